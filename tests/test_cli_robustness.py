"""Command-line robustness: outputs that would clobber inputs, bad output places,
numeric failures, a closed stdout pipe, bad --rows, fractional sample rates.

Every refusal is checked the way tests/test_bad_input.py checks a bad patch:
exit status 2, exactly one ``synth: error:`` line on stderr, no traceback,
nothing written or left behind (no ``.part`` file), and the inputs unchanged.
"""
from __future__ import annotations

import os
import re
import subprocess
import sys
import textwrap
from pathlib import Path

import mido
import numpy as np
import pytest

import synth.audio as audio
import synth.cli as cli
import synth.pipeline as pipeline
from synth.audio import _full_scale_limit, atomic_output, check_output_path, write_audio
from synth.cli import main
from synth.errors import PatchError, RenderError
from synth.tuning import TUNING_CAUTION
from synth.voices import write_song

from .cli_checks import error_line
from .cli_checks import run_cli as run

REPO = Path(__file__).resolve().parents[1]

# A small, quick patch: 0.2 s at 8 kHz.
PATCH = textwrap.dedent(
    """\
    name: robust-string
    resonator:
      type: string
      material: music-wire
      length: 650 mm
      diameter: 0.45 mm
      pitch: A2
      ends: pinned
    render:
      duration: 0.2 s
      sample_rate: 8000
      bit_depth: 24
      max_modes: 63
    """
)

# A uniform rosewood blank for tune-bar (as in tests/test_bar.py).
BLANK = textwrap.dedent(
    """\
    name: robust-blank
    resonator:
      type: bar
      material: rosewood
      width: 40 mm
      thickness: 16 mm
      pitch: C5
      shear_modulus: 1.6 GPa
    render:
      duration: 0.2 s
      sample_rate: 16000
    """
)

# Many modes, so `modes --json` writes far more than a pipe buffer (64 KiB on Linux).
MANY_MODES = textwrap.dedent(
    """\
    name: many-modes
    resonator:
      type: string
      material: music-wire
      length: 1.2 m
      diameter: 0.1 mm
      pitch: 40 Hz
      ends: pinned
    render:
      duration: 0.2 s
      sample_rate: 96000
      max_modes: 2000
    """
)

PIPE_BUFFER_BYTES = 65536  # Linux default pipe capacity


# -- helpers -------------------------------------------------------------------






def snapshot(folder):
    """{relative path: bytes or 'dir'} of everything under `folder`."""
    return {
        p.relative_to(folder).as_posix(): ("dir" if p.is_dir() else p.read_bytes())
        for p in sorted(folder.rglob("*"))
    }


def refused(capsys, folder, *argv, phrase):
    """Run `argv` in `folder`; check a one-line refusal matching `phrase` that changed nothing."""
    before = snapshot(folder)
    status, out, err = run(capsys, *argv)
    line = error_line(err)
    assert status == 2, (status, err)
    assert out == ""
    assert re.search(phrase, line), line
    assert snapshot(folder) == before  # inputs unchanged, no output, no .part file
    return line


def song_file(path):
    """A one-note MIDI file (A3, 1/8 s at 120 bpm)."""
    mid = mido.MidiFile(ticks_per_beat=480)
    track = mido.MidiTrack()
    mid.tracks.append(track)
    track.append(mido.Message("note_on", note=57, velocity=90, time=0))
    track.append(mido.Message("note_off", note=57, velocity=0, time=120))
    mid.save(str(path))
    return path


@pytest.fixture
def work(tmp_path, monkeypatch):
    """tmp_path as the working folder, holding patch.yaml."""
    monkeypatch.chdir(tmp_path)
    (tmp_path / "patch.yaml").write_text(PATCH, encoding="utf-8")
    return tmp_path


def parts(folder):
    return [p.name for p in folder.rglob("*") if ".part" in p.name]


# -- 1. an output may not be an input ------------------------------------------------


def test_csv_must_end_in_csv(work, capsys):
    line = refused(capsys, work, "modes", "patch.yaml", "--csv", "patch.yaml", phrase=r"output must end in \.csv")
    assert line.startswith("synth: error: command line: --csv: "), line


def test_csv_onto_its_patch(work, capsys):
    (work / "patch.csv").write_text(PATCH, encoding="utf-8")  # a YAML patch that happens to end in .csv
    refused(capsys, work, "modes", "patch.csv", "--csv", "patch.csv", phrase=r"--csv: 'patch\.csv' is an input")


def test_render_onto_its_patch(work, capsys):
    (work / "pp.wav").write_text(PATCH, encoding="utf-8")
    refused(capsys, work, "render", "pp.wav", "-o", "pp.wav", phrase=r"^synth: error: command line: --output: 'pp\.wav' is an input")


def test_render_onto_its_patch_through_a_link(work, capsys):
    (work / "pp.wav").write_text(PATCH, encoding="utf-8")
    (work / "sub").mkdir()
    os.symlink(work / "pp.wav", work / "link.wav")
    refused(capsys, work, "render", "sub/../pp.wav", "-o", "link.wav", phrase=r"--output: 'link\.wav' is an input")


@pytest.mark.parametrize("victim", ["song", "patch", "map", "map-patch"])
def test_midi_onto_an_input(work, capsys, victim):
    song_file(work / "song.wav")  # a MIDI file under a .wav name
    (work / "p.wav").write_text(PATCH, encoding="utf-8")
    (work / "map.wav").write_text("default: {patch: p.wav}\n", encoding="utf-8")
    argv = {
        "song": ["midi", "song.wav", "--patch", "patch.yaml", "-o", "song.wav"],
        "patch": ["midi", "song.wav", "--patch", "p.wav", "-o", "p.wav"],
        "map": ["midi", "song.wav", "--map", "map.wav", "-o", "map.wav"],
        "map-patch": ["midi", "song.wav", "--map", "map.wav", "-o", "p.wav"],
    }[victim]
    refused(capsys, work, *argv, phrase=r"command line: --output: '.*\.wav' is an input of this command")


def test_tune_bar_onto_its_patch(work, capsys):
    (work / "blank.yaml").write_text(BLANK, encoding="utf-8")
    refused(capsys, work, "tune-bar", "blank.yaml", "--ratios", "1:4:10", "-o", "./blank.yaml",
            phrase=r"--output: '.*blank\.yaml' is an input")


# -- 2. a folder, or a place that cannot be written ------------------------------------


@pytest.mark.parametrize(
    ("folder", "argv", "key"),
    [
        ("e.wav", ["render", "patch.yaml", "-o", "e.wav"], "--output"),
        ("e.csv", ["modes", "patch.yaml", "--csv", "e.csv"], "--csv"),
        ("e.wav", ["midi", "song.mid", "--patch", "patch.yaml", "-o", "e.wav"], "--output"),
        ("e.yaml", ["tune-bar", "blank.yaml", "--ratios", "1:4:10", "-o", "e.yaml"], "--output"),
    ],
    ids=["render", "modes-csv", "midi", "tune-bar"],
)
def test_output_is_a_folder(work, capsys, folder, argv, key):
    song_file(work / "song.mid")
    (work / "blank.yaml").write_text(BLANK, encoding="utf-8")
    (work / folder).mkdir()
    refused(capsys, work, *argv, phrase=rf"^synth: error: command line: {key}: '{re.escape(folder)}' is a folder")


def test_unwritable_folder(work, capsys, monkeypatch):
    """mkstemp refused (as in /sys): one line naming the path, nothing left."""

    def refuse(*args, **kwargs):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(audio.tempfile, "mkstemp", refuse)
    refused(capsys, work, "render", "patch.yaml", "-o", "out.wav",
            phrase=r"^synth: error: command line: --output: cannot write 'out\.wav': Permission denied$")
    refused(capsys, work, "modes", "patch.yaml", "--csv", "t.csv",
            phrase=r"^synth: error: command line: --csv: cannot write 't\.csv': Permission denied$")


@pytest.mark.skipif(not Path("/sys").is_dir(), reason="needs a /sys that refuses new files")
def test_sys_folder(work, capsys):
    refused(capsys, work, "render", "patch.yaml", "-o", "/sys/x.wav", phrase=r"--output: cannot write '/sys/x\.wav'")
    assert not Path("/sys/x.wav").exists()


def test_rename_fails_leaves_no_part_file(work, capsys, monkeypatch):
    """The target became a folder after the checks (a race): os.replace fails; the .part file goes."""
    real_replace = os.replace

    def replace(src, dst):
        Path(dst).mkdir()
        return real_replace(src, dst)

    monkeypatch.setattr(audio.os, "replace", replace)
    status, out, err = run(capsys, "render", "patch.yaml", "-o", "late.wav", "-q")
    assert status == 2 and out == ""
    assert re.search(r"^synth: error: command line: --output: cannot write 'late\.wav': ", error_line(err))
    assert parts(work) == [] and (work / "late.wav").is_dir()


class TestAtomicOutput:
    def test_body_error_removes_part(self, tmp_path):
        with pytest.raises(RenderError, match=r"cannot write '.*x\.csv': No space left on device"):
            with atomic_output(tmp_path / "x.csv") as tmp:
                tmp.write_text("partial")
                raise OSError(28, "No space left on device")
        assert list(tmp_path.iterdir()) == []

    def test_replace_onto_folder_names_the_option(self, tmp_path):
        (tmp_path / "d.wav").mkdir()
        with pytest.raises(PatchError) as info:
            with atomic_output(tmp_path / "d.wav", key="--output") as tmp:
                tmp.write_bytes(b"x")
        assert (info.value.file, info.value.key) == ("command line", "--output")
        assert [p.name for p in tmp_path.iterdir()] == ["d.wav"]

    def test_other_errors_pass_through(self, tmp_path):
        with pytest.raises(KeyError):
            with atomic_output(tmp_path / "x.wav"):
                raise KeyError("a bug")
        assert list(tmp_path.iterdir()) == []


def test_default_folder_blocked_by_a_file(work, capsys):
    (work / "renders").write_text("not a folder")
    refused(capsys, work, "render", "patch.yaml", phrase=r"'renders' is not a folder")


# -- 3. numeric failures deep in the physics -------------------------------------------


@pytest.mark.parametrize(
    "error",
    [
        OverflowError("math range error"),
        ZeroDivisionError("float division by zero"),
        FloatingPointError("overflow encountered in multiply"),
        np.linalg.LinAlgError("Singular matrix"),
        MemoryError(),
        RecursionError("maximum recursion depth exceeded " + "x" * 200),
    ],
    ids=lambda e: type(e).__name__,
)
def test_numeric_failure_is_one_line(work, capsys, monkeypatch, error):
    def fail(patch, **options):
        raise error

    monkeypatch.setattr(pipeline, "partial_table", fail)  # the command imports it when it runs
    line = refused(capsys, work, "modes", "patch.yaml", "--csv", "t.csv",
                   phrase=rf"^synth: error: cannot compute this request \({type(error).__name__}")
    assert line.endswith("): check that sizes and frequencies are physically sensible"), line
    assert len(line) < 200, line  # a long message is cut short


def test_real_bugs_still_raise(work, monkeypatch):
    def bug(patch, **options):
        raise TypeError("a bug in synth")

    monkeypatch.setattr(pipeline, "partial_table", bug)
    with pytest.raises(TypeError, match="a bug in synth"):
        main(["modes", "patch.yaml"])


# -- 4. the reader of stdout goes away -------------------------------------------------


def _piped(tmp_path, read_bytes):
    (tmp_path / "many.yaml").write_text(MANY_MODES, encoding="utf-8")
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    proc = subprocess.Popen([sys.executable, "-m", "synth.cli", "modes", str(tmp_path / "many.yaml"), "--json"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env, cwd=tmp_path)
    head = proc.stdout.read(read_bytes) if read_bytes else b""
    proc.stdout.close()
    err = proc.stderr.read().decode()
    return proc.wait(timeout=60), head, err


@pytest.mark.parametrize("read_bytes", [10, 0], ids=["head-10", "closed-at-once"])
def test_broken_pipe(tmp_path, read_bytes):
    status, head, err = _piped(tmp_path, read_bytes)
    assert status == cli.BROKEN_PIPE_STATUS == 141
    assert err == "", err  # no traceback, no "Exception ignored"
    assert head == b'{\n  "name"'[:read_bytes]


def test_many_modes_overflow_a_pipe(tmp_path, capsys):
    """The broken-pipe test needs more output than a pipe holds, or no write would fail."""
    (tmp_path / "many.yaml").write_text(MANY_MODES, encoding="utf-8")
    assert main(["modes", str(tmp_path / "many.yaml"), "--json"]) == 0
    assert len(capsys.readouterr().out) > 4 * PIPE_BUFFER_BYTES


# -- 5. --rows ----------------------------------------------------------------------------


@pytest.mark.parametrize("command", ["modes", "render"])
@pytest.mark.parametrize("rows", ["-3", "0"])
def test_rows_must_be_positive(work, capsys, command, rows):
    refused(capsys, work, command, "patch.yaml", "--rows", rows,
            phrase=rf"^synth: error: command line: --rows: must be a whole number >= 1, got {rows}$")


def test_one_row(work, capsys):
    status, out, _ = run(capsys, "modes", "patch.yaml", "--rows", "1")
    assert status == 0
    total = int(re.search(r", (\d+) modes", out).group(1))
    more = int(re.search(r"\.\.\. (\d+) more modes", out).group(1))
    assert total > 1 and more == total - 1  # one shown


# -- 6. whole sample rates, integer bit depths ------------------------------------------


def test_fractional_sample_rate_option(work, capsys):
    refused(capsys, work, "render", "patch.yaml", "-o", "o.wav", "--sample-rate", "44100.5",
            phrase=r"^synth: error: command line: --sample-rate: must be a whole number of Hz, got 44100\.5$")


def test_fractional_sample_rate_midi(work, capsys):
    song_file(work / "song.mid")
    refused(capsys, work, "midi", "song.mid", "--patch", "patch.yaml", "-o", "o.wav", "--sample-rate", "8000.5",
            phrase=r"command line: --sample-rate: must be a whole number of Hz")


@pytest.mark.parametrize("rate", [44100.5, 0, -8000, float("nan")])
def test_write_audio_refuses_fractional_rate(tmp_path, rate):
    signal = np.zeros(80)
    with pytest.raises(ValueError, match=r"whole number of Hz"):
        write_audio(tmp_path / "o.wav", signal, sample_rate=rate, bit_depth=24)
    with pytest.raises(ValueError, match=r"whole number of Hz"):
        write_song(tmp_path / "s.wav", signal.astype(np.float32), sample_rate=rate, bit_depth=24, peak_db=-1.0)
    assert list(tmp_path.iterdir()) == []


def test_write_audio_whole_float_rate(tmp_path):
    import wave

    write_audio(tmp_path / "o.wav", np.zeros(80), sample_rate=8000.0, bit_depth=16)
    with wave.open(str(tmp_path / "o.wav")) as handle:
        assert handle.getframerate() == 8000


def test_bit_depth_printed_as_integer(work, capsys):
    status, out, _ = run(capsys, "render", "patch.yaml", "-o", "o.wav", "-q", "--bit-depth", "24.0")
    assert status == 0
    assert "24-bit" in out and "24.0-bit" not in out, out


# -- 7. cleaned-up code paths --------------------------------------------------------------


def test_full_scale_limits():
    # 16-bit: one LSB of TPDF dither headroom; 24-bit rounds; 32-bit float.
    assert _full_scale_limit(16) == pytest.approx(32766 / 32767)
    assert _full_scale_limit(24) == _full_scale_limit(32) == 1.0


def test_default_output_folder_is_made(work, capsys):
    status, out, err = run(capsys, "render", "patch.yaml", "-q")
    assert status == 0 and "Traceback" not in err
    assert (work / "renders" / "robust-string.wav").is_file()
    assert parts(work) == []


def test_check_output_path_in_current_folder(work):
    assert check_output_path("o.wav", 24) == "WAV"  # Path("o.wav").parent is "."


# -- 8. one prefix for option errors --------------------------------------------------------


@pytest.mark.parametrize(
    ("argv", "key"),
    [
        (["render", "patch.yaml", "-o", "o.mp3"], "--output"),
        (["render", "patch.yaml", "-o", "missing/o.wav"], "--output"),
        (["modes", "patch.yaml", "--csv", "missing/t.csv"], "--csv"),
        (["modes", "patch.yaml", "--rows", "0"], "--rows"),
        (["render", "patch.yaml", "--pitch", "loud"], "--pitch"),
        (["batch", "spec.yaml", "--workers", "0"], "--workers"),
        (["batch", "spec.yaml", "--scheduler", "nonsense"], "--scheduler"),
    ],
    ids=["output-suffix", "output-folder", "csv-folder", "rows", "pitch", "workers", "scheduler"],
)
def test_option_error_prefix(work, capsys, argv, key):
    (work / "spec.yaml").write_text("patch: patch.yaml\nnotes: [A2]\n", encoding="utf-8")
    refused(capsys, work, *argv, phrase=rf"^synth: error: command line: {key}: ")


# -- 9. tune-bar's caution ---------------------------------------------------------------------


def test_tune_bar_caution(work, capsys):
    (work / "blank.yaml").write_text(BLANK, encoding="utf-8")
    status, out, _ = run(capsys, "tune-bar", "blank.yaml", "--ratios", "1:4:10", "--points", "11", "-o", "tuned.yaml")
    assert status == 0
    assert TUNING_CAUTION in out
    for phrase in ("varies", "previews", "maker's data", "qualified practice"):
        assert phrase in TUNING_CAUTION
    first = (work / "tuned.yaml").read_text(encoding="utf-8").splitlines()[0]
    assert first == f"# {TUNING_CAUTION}"
