"""Command-line options of issue 13: --set, --velocity, --units, one-line argparse errors, quiet renders."""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import soundfile

from synth.cli import main

ROOT = Path(__file__).resolve().parents[1]
STRING = """\
    name: set-string
    resonator: {type: string, material: music-wire, length: 600 mm, diameter: 0.45 mm, pitch: A3}
    excitation: {type: strike, position: 0.13, contact_time: 1 ms}
    damping: {t60: 2 s}
    render: {sample_rate: 16000, duration: 0.2 s}
    """
FAST = ["--sample-rate", "16000", "--duration", "0.2"]


def _run(capsys, *argv):
    status = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return status, out, err


def _json(capsys, *argv):
    status, out, err = _run(capsys, *argv, "--json")
    assert status == 0, err
    return json.loads(out)


# --set parity: a value set on the command line is read exactly as the same value written in the file.
@pytest.mark.parametrize("key, value, old, new", [
    ("resonator.diameter", "0.5 mm", "diameter: 0.45 mm", "diameter: 0.5 mm"),
    ("resonator.tension", "90 N", "pitch: A3", "tension: 90 N"),  # replaces the pitch, as in the file
    ("excitation.position", "0.2", "position: 0.13", "position: 0.2"),
    ("damping.t60_high", "0.4 s", "t60: 2 s", "t60: 2 s, t60_high: 0.4 s"),
    ("render.sample_rate", "22050", "sample_rate: 16000", "sample_rate: 22050"),
])
def test_set_equals_the_value_in_the_file(write_patch, capsys, key, value, old, new):
    base = write_patch(STRING)
    edited = write_patch(STRING.replace(old, new), name="edited.yaml")
    assert _json(capsys, "modes", base, "--set", f"{key}={value}") == _json(capsys, "modes", edited)


def test_set_in_a_nested_position_and_repeated(write_patch, capsys):
    drum = write_patch("""\
        name: set-drum
        resonator: {type: membrane, shape: circle, radius: 0.2, areal_density: 0.2, tension: 2000}
        render: {sample_rate: 16000, max_modes: 12}
        """)
    a = _json(capsys, "modes", drum, "--set", "excitation.position.radius=0.3", "--set", "excitation.position.angle=0",
              "--set", "excitation.type=strike")
    b = _json(capsys, "modes", drum, "--set", "excitation={type: strike, position: {radius: 0.3, angle: 0}}")
    assert a == b


@pytest.mark.parametrize("argv, message", [
    (["--set", "resonator.diamter=1 mm"],
     r"^synth: error: command line: --set resonator\.diamter: unknown key for a string; did you mean 'diameter'\?"),
    (["--set", "resonator.diameter=thick"], r"^synth: error: command line: --set resonator\.diameter: cannot read 'thick'"),
    (["--set", "resonator.diameter"], r"^synth: error: command line: --set: give KEY=VALUE"),
    (["--set", "resonator.material.density=7000"],
     r"^synth: error: command line: --set resonator\.material\.density: resonator\.material is 'music-wire' here, "
     r"not a mapping"),
    (["--set", "render.sample_rate=8000", "--sample-rate", "16000"],
     r"^synth: error: command line: --set render\.sample_rate: render\.sample_rate is already set by --sample-rate"),
    (["--set", "resonator.pitch=[1, 2"], r"^synth: error: command line: --set resonator\.pitch: cannot read '\[1, 2'"),
    (["--set", "resonator.pitch=Z9"], r"^synth: error: command line: --set resonator\.pitch: "),
])
def test_set_errors_name_the_option(write_patch, capsys, argv, message):
    import re

    patch = write_patch(STRING)
    for command in (["modes", patch], ["render", patch, "-o", patch.parent / "out.wav"]):
        status, out, err = _run(capsys, *command, *argv)
        assert status == 2 and out == "", err
        assert len(err.strip().splitlines()) == 1 and re.search(message, err), err
        assert not (patch.parent / "out.wav").exists()


def test_set_reaches_range_and_tune_bar(tmp_path, capsys):
    status, out, _ = _run(capsys, "range", ROOT / "patches/instruments/workshop-harp.yaml", "--json",
                          "--set", "excitation.position=0.25")
    assert status == 0
    blank = ROOT / "patches/bar-rosewood-blank-c4.yaml"
    out_path = tmp_path / "tuned.yaml"
    status, out, err = _run(capsys, "tune-bar", blank, "--ratios", "1:4:10", "--points", "9",
                            "--set", "resonator.width=50 mm", "-o", out_path)
    assert status == 0, err
    assert "width: 50 mm" in out_path.read_text()
    status, _, err = _run(capsys, "tune-bar", blank, "--ratios", "1:4:10", "--set", "resonator.widht=50 mm")
    assert status == 2 and "command line: --set resonator.widht: unknown key" in err


# --velocity: a single render heard as a MIDI note of that velocity would sound.
def test_render_velocity(write_patch, tmp_path, capsys):
    patch = write_patch(STRING)
    peaks = {}
    for velocity in (None, "100", "30"):
        out = tmp_path / f"v{velocity}.wav"
        extra = [] if velocity is None else ["--velocity", velocity]
        status, _, err = _run(capsys, "render", patch, "-o", out, "--quiet", *extra)
        assert status == 0, err
        peaks[velocity] = soundfile.read(out)[0]
    assert np.array_equal(peaks[None], peaks["100"])  # 100 is the patch as written
    assert not np.array_equal(peaks[None], peaks["30"])  # softer: longer contact, darker (normalised level)
    status, out, err = _run(capsys, "render", patch, "-o", tmp_path / "bad.wav", "--velocity", "128")
    assert status == 2 and "command line: --velocity: must be a whole number 1..127" in err
    assert not (tmp_path / "bad.wav").exists()


# argparse's own errors in the project's one-line form.
@pytest.mark.parametrize("argv, message", [
    (["midi", "song.mid", "--patch", "a.yaml", "--map", "b.yaml"],
     "synth: error: command line: --map: cannot be given with --patch: give one of them (see 'synth midi --help')"),
    (["midi", "song.mid"], "synth: error: command line: --patch or --map: give one of them (see 'synth midi --help')"),
    (["tune-bar", "p.yaml"], "synth: error: command line: --ratios: required, not given (see 'synth tune-bar --help')"),
    (["modes", "p.yaml", "--rows", "x"],
     "synth: error: command line: --rows: must be a whole number, got 'x' (see 'synth modes --help')"),
    (["modes", "p.yaml", "--units", "metric"],
     "synth: error: command line: --units: 'metric' is not one of 'si', 'workshop', 'imperial' (see 'synth modes --help')"),
    (["modes", "p.yaml", "--r", "3"], "synth: error: command line: --r: not an option of this command (see 'synth --help')"),
    (["frobnicate"], "synth: error: command line: COMMAND: 'frobnicate' is not one of"),
])
def test_argparse_errors_are_one_line(capsys, argv, message):
    with pytest.raises(SystemExit) as stop:
        main(argv)
    out, err = capsys.readouterr()
    assert stop.value.code == 2 and out == ""
    assert err.count("\n") == 1 and err.startswith(message), err


# Warnings: once, on stderr, naming the patch; the expected (Nyquist) is not a warning.
def test_render_warning_names_the_patch_once(write_patch, tmp_path, capsys):
    patch = write_patch("""\
        name: over-strung
        resonator: {type: string, material: phosphor-bronze, length: 600 mm, diameter: 0.4 mm, pitch: E4}
        damping: {t60: 0.3 s}
        render: {sample_rate: 16000, duration: auto}
        """)
    status, out, err = _run(capsys, "render", patch, "-o", tmp_path / "x.wav")
    assert status == 0
    warnings = [line for line in err.splitlines() if line.startswith("synth: warning")]
    assert len(warnings) == 1 and warnings[0].startswith(f"synth: warning: {patch}: string stress"), err
    assert "warning:" not in out  # the table on stdout does not repeat it
    status, out, err = _run(capsys, "modes", patch)
    assert "\nwarning: string stress" in out and err == ""  # the report carries it once


def test_batch_quiet_leaves_out_the_caution(tmp_path, capsys):
    (tmp_path / "p.yaml").write_text(STRING.replace("    ", ""), encoding="utf-8")
    spec = tmp_path / "lib.yaml"
    spec.write_text("name: quiet-lib\npatch: p.yaml\nnotes: [C4]\nvelocities: [100]\noutput: out\n", encoding="utf-8")
    status, out, err = _run(capsys, "batch", spec, "--quiet", "--workers", "1")
    assert status == 0, err
    assert "listening caution" not in err and "library quiet-lib" in out


@pytest.mark.parametrize("path", sorted((ROOT / "patches").glob("*.yaml")), ids=lambda p: p.stem)
def test_demo_patches_render_without_warnings(path):
    """`make demo` prints a line per file and nothing else but real warnings: the demo patches have none.

    The warnings of a render are the table's and its ending's (synth.cli.cmd_render); checked
    here without rendering the audio.
    """
    from synth.patch import load_patch
    from synth.pipeline import partial_table, patch_ending

    patch = load_patch(path)
    table = partial_table(patch)
    assert table.warnings == ()
    ending = patch_ending(patch, table)
    assert not (ending.audible_cut or ending.capped), ending.describe(patch.render.sample_rate)


def test_make_demo_prints_the_caution_once():
    from synth.cli import LISTENING_CAUTION

    makefile = (ROOT / "Makefile").read_text(encoding="utf-8")
    assert makefile.count(LISTENING_CAUTION) == 1
    demo = makefile.split("\ndemo:", 1)[1].split("\n\n", 1)[0]
    assert all("--quiet" in line for line in demo.splitlines() if "synth " in line)


# A tuned (shaped) bar moved to another pitch: its ratios move, and the report says so.
UNDERCUT = ROOT / "patches" / "bar-rosewood-undercut-c4.yaml"


def test_pitch_on_a_tuned_bar_warns_that_its_ratios_moved(capsys):
    status, out, _ = _run(capsys, "modes", UNDERCUT, "--pitch", "A4", "--json")
    report = json.loads(out)
    warning = next(w for w in report["warnings"] if "profile was shaped at C4" in w)
    ratios = [m["ratio"] for m in report["modes"][:3]]
    assert f"at A4 its partials sit at 1.00 : {ratios[1]:.2f} : {ratios[2]:.2f}" in warning
    status, out, _ = _run(capsys, "modes", UNDERCUT, "--pitch", "C4", "--json")  # where it was shaped: no warning
    assert not [w for w in json.loads(out)["warnings"] if "profile was shaped" in w]


def test_midi_and_batch_voicing_of_a_tuned_bar_warns():
    from synth.patch import load_patch
    from synth.pipeline import partial_table
    from synth.voicing import voice_patch

    patch = load_patch(UNDERCUT)
    moved = partial_table(voice_patch(patch, midi_note=72, velocity=90), onset=False)  # C5
    assert any("shaped at C4" in w and "at C5" in w for w in moved.warnings)
    same = partial_table(voice_patch(patch, midi_note=60, velocity=90), onset=False)  # C4, as shaped
    assert not any("shaped at" in w for w in same.warnings)
    uniform = load_patch(ROOT / "patches" / "bar-rosewood-blank-c4.yaml")  # no profile: nothing to move
    assert not any("shaped at" in w for w in partial_table(voice_patch(uniform, midi_note=72), onset=False).warnings)
