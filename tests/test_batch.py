"""Batch rendering of sample libraries (``synth batch``): issue 6.

* a small library end to end on a local process pool: files, manifest, the
  SFZ map parsed back, one gain (the loudest sample at render.peak_db),
  dynamics kept across layers, round robins that differ but stay in tune
  (closed loop: pitch and loudness measured again from the WAV files);
* resume (nothing touched), resume after deletions (the recorded gain reused,
  same bytes), ``--force``, a changed spec, a bad job among good ones;
* Ctrl-C on a real subprocess, then a re-run that finishes the rest;
* a Dask LocalCluster started here gives the same bytes as the local pool;
* loudness against ITU-R BS.1770's own reference case;
* bad specs and options: one error line, exit status 2, nothing written.

Renders are short (0.5 s at 16 kHz) and no test asserts a time.
"""
from __future__ import annotations

import json
import math
import os
import re
import shutil
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest
import scipy.signal

from synth.batch import build_library
from synth.libwork import measure_patch_peak as _measure_peak
from synth.cli import main
from synth.libindex import LOUDNESS_METER, key_ranges, velocity_ranges
from synth.library import (
    Variation,
    job_offsets,
    library_jobs,
    load_library_spec,
    loudness_lufs,
    sample_file_name,
    voice_job,
)
from synth.pipeline import render_patch

from .analysis import peak_near, read_wav

REPO = Path(__file__).resolve().parents[1]

# A steel string on a test rig, plucked near one end (an invented patch).
RIG = """\
name: rig
resonator:
  type: string
  material: music-wire
  length: 650 mm
  diameter: 0.45 mm
  pitch: A2
excitation:
  type: pluck
  position: 0.15
pickup:
  position: 0.9
damping:
  t60: 2 s
  t60_high: 0.3 s
  high_frequency: 3 kHz
render:
  duration: 0.5 s
  sample_rate: 16000
  bit_depth: 24
  peak_db: -1.0
  max_modes: 48
"""

SPEC = """\
patch: rig.yaml
name: rig
output: lib
notes: [A3, C4, E4]
velocities: [40, 100]
round_robin: 2
variation: {position: 0.01, detune_cents: 3, seed: 5}
"""
NOTES = {"A3": 57, "C4": 60, "E4": 64}
VELOCITIES = (40, 100)
DETUNE_CENTS = 3.0
N_FILES = 12
PEAK_DB = -1.0
LAYER_GAP_DB = 20.0 * math.log10(100 / 40)  # a pluck's strength is linear in velocity (synth.voicing)


def write(folder, name, text):
    path = Path(folder) / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def make_spec(folder, spec=SPEC, patch=RIG):
    write(folder, "rig.yaml", patch)
    return write(folder, "spec.yaml", spec)


def twelve_tet(midi):
    """12-TET frequency (Hz), A4 = 440 Hz (ISO 16:1975; MIDI 69 = A4)."""
    return 440.0 * 2.0 ** ((midi - 69) / 12.0)


def wavs(folder):
    return sorted(p.name for p in Path(folder).glob("*.wav"))


def manifest_of(folder):
    return json.loads((Path(folder) / "manifest.json").read_text(encoding="utf-8"))


def stats(folder):
    """(inode, mtime_ns, size) of every file in `folder`: changes if a file is touched."""
    return {p.name: (p.stat().st_ino, p.stat().st_mtime_ns, p.stat().st_size) for p in Path(folder).iterdir()}


def contents(folder):
    return {p.name: p.read_bytes() for p in sorted(Path(folder).iterdir())}


def parse_sfz(text):
    """An independent reader of the SFZ we write: ({global opcodes}, [region opcodes incl. its group's])."""
    glob, group, regions, header = {}, {}, [], None
    for raw in text.splitlines():
        line = raw.split("//", 1)[0]
        for token in re.findall(r"<\w+>|[^\s=]+=\S+", line):
            if token.startswith("<"):
                header = token
                if header == "<group>":
                    group = {}
                elif header == "<region>":
                    regions.append({**glob, **group})
                continue
            key, value = token.split("=", 1)
            {"<global>": glob, "<group>": group}.get(header, regions[-1] if regions else {})[key] = value
    return glob, regions


@pytest.fixture(scope="module")
def library(tmp_path_factory):
    """The small library rendered once on a local pool of two processes."""
    folder = tmp_path_factory.mktemp("library")
    spec = make_spec(folder)
    result = build_library(spec, workers=2, progress=False)
    return folder, spec, result


# ---------------------------------------------------------------------------
# End to end


def test_library_files(library):
    folder, _, result = library
    assert result.exit_status == 0 and not result.failed and not result.interrupted
    assert (result.rendered, result.skipped, result.n_jobs) == (N_FILES, 0, N_FILES)
    assert result.backend == "2 local processes"
    expected = sorted(
        f"rig_{midi:03d}_{note}_v{velocity:03d}_rr{rr:02d}.wav"
        for note, midi in NOTES.items() for velocity in VELOCITIES for rr in (1, 2)
    )
    assert wavs(folder / "lib") == expected
    assert sorted(p.name for p in (folder / "lib").iterdir()) == sorted(expected + ["manifest.json", "rig.sfz"])


def test_manifest_fields(library):
    folder, _, result = library
    manifest = manifest_of(folder / "lib")
    lib = manifest["library"]
    assert lib["complete"] and lib["n_files"] == N_FILES and lib["failed"] == []
    assert lib["gain"] == pytest.approx(result.gain, rel=1e-15)
    assert lib["gain_db"] == pytest.approx(20 * math.log10(lib["gain"]))
    assert lib["gain_basis"]["loudest_file"] in wavs(folder / "lib")
    assert lib["gain_basis"]["jobs_measured"] == N_FILES
    assert lib["loudness_meter"] == LOUDNESS_METER
    files = manifest["files"]
    assert [e["file"] for e in files] == wavs(folder / "lib")
    for entry in files:
        assert entry["note"] in NOTES and entry["midi"] == NOTES[entry["note"]]
        assert entry["velocity"] in VELOCITIES and entry["round_robin"] in (1, 2)
        assert entry["file"] == sample_file_name("rig", entry["midi"], entry["velocity"], entry["round_robin"])
        assert re.fullmatch(r"[0-9a-f]{64}", entry["param_hash"])
        assert entry["bytes"] == (folder / "lib" / entry["file"]).stat().st_size
        partials = entry["partials"]
        assert partials["fundamental_hz"] == pytest.approx(entry["fundamental_hz"], rel=1e-12)
        freqs = [m["frequency_hz"] for m in partials["modes"]]
        assert freqs == sorted(freqs) and freqs[0] == pytest.approx(entry["fundamental_hz"], rel=1e-12)
        assert max(freqs) < 8000.0  # below Nyquist at 16 kHz
    assert len({e["param_hash"] for e in files}) == N_FILES


def test_one_gain_and_levels_read_back(library):
    """The loudest true peak sits at render.peak_db (render.peak: true, the default); every manifest
    peak matches the WAV read back, the true peak an independent 4x oversampling (scipy.signal.resample_poly)."""
    folder, _, _ = library
    peaks, true_peaks = {}, {}
    for entry in manifest_of(folder / "lib")["files"]:
        data, rate = read_wav(folder / "lib" / entry["file"])
        assert rate == 16000 and len(data) == 8000
        peaks[entry["file"]] = 20 * math.log10(np.max(np.abs(data)))
        assert peaks[entry["file"]] == pytest.approx(entry["peak_dbfs"], abs=1e-3)  # 24-bit rounding
        true_peaks[entry["file"]] = 20 * math.log10(np.max(np.abs(scipy.signal.resample_poly(data, 4, 1))))
        assert true_peaks[entry["file"]] == pytest.approx(entry["true_peak_dbtp"], abs=0.2)
        assert entry["true_peak_dbtp"] >= entry["peak_dbfs"] - 1e-6
    loudest = max(e["true_peak_dbtp"] for e in manifest_of(folder / "lib")["files"])
    assert loudest == pytest.approx(PEAK_DB, abs=1e-3)
    assert min(peaks.values()) < PEAK_DB - 6.0  # no file was normalised on its own


def test_dynamics_kept_across_layers(library):
    """Soft and hard layers keep the velocity curve's level gap (20 log10(100/40) = 7.96 dB for a pluck).

    The round robins' jitter (pluck point +-0.01, pitch +-3 cents) moves a
    level by a fraction of a dB, hence the 1 dB allowance.
    """
    folder, _, _ = library
    files = manifest_of(folder / "lib")["files"]
    by = {(e["midi"], e["velocity"], e["round_robin"]): e for e in files}
    for midi in NOTES.values():
        for rr in (1, 2):
            gap = by[(midi, 100, rr)]["peak_dbfs"] - by[(midi, 40, rr)]["peak_dbfs"]
            assert gap == pytest.approx(LAYER_GAP_DB, abs=1.0)
            loud = by[(midi, 100, rr)]["loudness_lufs"] - by[(midi, 40, rr)]["loudness_lufs"]
            assert loud == pytest.approx(LAYER_GAP_DB, abs=1.0)


def test_round_robins_differ_but_stay_in_tune(library):
    folder, _, _ = library
    files = manifest_of(folder / "lib")["files"]
    by = {(e["midi"], e["velocity"], e["round_robin"]): e for e in files}
    for midi in NOTES.values():
        for velocity in VELOCITIES:
            first, second = by[(midi, velocity, 1)], by[(midi, velocity, 2)]
            a, _ = read_wav(folder / "lib" / first["file"])
            b, _ = read_wav(folder / "lib" / second["file"])
            assert np.max(np.abs(a - b)) > 1e-3  # audibly different takes
            assert first["fundamental_hz"] != second["fundamental_hz"]
            for entry, data in ((first, a), (second, b)):
                target = twelve_tet(midi)
                assert abs(1200 * math.log2(entry["fundamental_hz"] / target)) <= DETUNE_CENTS + 1e-9
                measured = peak_near(data, 16000, entry["fundamental_hz"], search_hz=20.0)
                # closed loop: measured 4e-5 Hz off; 0.05 Hz is 0.4 cents at 220 Hz, well inside the 3-cent jitter
                assert measured == pytest.approx(entry["fundamental_hz"], abs=0.05)
                assert abs(1200 * math.log2(measured / target)) <= DETUNE_CENTS + 0.4


def test_loudness_measured_again_from_the_files(library):
    folder, _, _ = library
    for entry in manifest_of(folder / "lib")["files"]:
        data, rate = read_wav(folder / "lib" / entry["file"])
        again, note = loudness_lufs(data, rate)
        assert note is None and entry["loudness_note"] is None
        assert entry["loudness_lufs"] == pytest.approx(again, abs=0.01)


def test_sfz_map_parsed_back(library):
    folder, _, _ = library
    glob, regions = parse_sfz((folder / "lib" / "rig.sfz").read_text(encoding="utf-8"))
    # The samples carry their dynamics; key-up fades them over the patch's release_t60, as synth midi does.
    assert glob == {"amp_veltrack": "0", "ampeg_release": "0.15"}
    files = {e["file"]: e for e in manifest_of(folder / "lib")["files"]}
    assert sorted(r["sample"] for r in regions) == sorted(files)
    groups = {}
    for region in regions:
        entry = files[region["sample"]]
        assert (folder / "lib" / region["sample"]).is_file()
        assert int(region["pitch_keycenter"]) == entry["midi"]
        assert int(region["lokey"]) <= entry["midi"] <= int(region["hikey"])
        assert int(region["lovel"]) <= entry["velocity"] <= int(region["hivel"])
        assert int(region["seq_length"]) == 2
        groups.setdefault((entry["midi"], entry["velocity"]), []).append(int(region["seq_position"]))
    assert all(sorted(p) == [1, 2] for p in groups.values())
    # keys: no overlap between notes; velocities: each note's layers tile 1..127
    spans = sorted({(int(r["lokey"]), int(r["hikey"])) for r in regions})
    assert all(a[1] < b[0] for a, b in zip(spans, spans[1:]))
    for midi in NOTES.values():
        layers = sorted({(int(r["lovel"]), int(r["hivel"])) for r in regions if int(r["pitch_keycenter"]) == midi})
        assert layers[0][0] == 1 and layers[-1][1] == 127
        assert all(a[1] + 1 == b[0] for a, b in zip(layers, layers[1:]))


# ---------------------------------------------------------------------------
# Resume, force, changes, failures


def copy_of(library, tmp_path):
    folder, spec, _ = library
    shutil.copytree(folder / "lib", tmp_path / "lib")
    return spec, tmp_path / "lib"


def test_rerun_touches_nothing(library, tmp_path):
    spec, out = copy_of(library, tmp_path)
    before = stats(out)
    result = build_library(spec, output=str(out), workers=2, progress=False)
    assert (result.rendered, result.skipped, result.exit_status) == (0, N_FILES, 0)
    assert result.gain_reused
    assert stats(out) == before  # not one file rewritten, manifest and map included


def test_idle_rerun_solves_no_physics(library, tmp_path, monkeypatch):
    """Up to date is decided from the inputs' hashes and the file sizes: not one mode is solved or placed."""
    from synth.resonators import string

    spec, out = copy_of(library, tmp_path)
    before = stats(out)

    def no_physics(*args, **kwargs):
        raise AssertionError("an idle re-run solved physics")

    monkeypatch.setattr(string, "solve", no_physics)
    monkeypatch.setattr(string, "retune", no_physics)
    result = build_library(spec, output=str(out), workers=1, progress=False)
    assert (result.rendered, result.skipped, result.exit_status) == (0, N_FILES, 0)
    assert stats(out) == before


def test_a_file_of_another_size_is_rendered_again(library, tmp_path):
    spec, out = copy_of(library, tmp_path)
    original = contents(out)
    victim = out / wavs(out)[3]
    victim.write_bytes(victim.read_bytes()[:-6])  # cut short: the recorded size no longer matches
    result = build_library(spec, output=str(out), workers=1, progress=False)
    assert (result.rendered, result.skipped) == (1, N_FILES - 1)
    assert contents(out) == original


def test_resume_reuses_the_recorded_gain(library, tmp_path):
    """Deleted files come back byte for byte (here rendered in this process, first run on a pool)."""
    spec, out = copy_of(library, tmp_path)
    original = contents(out)
    gone = wavs(out)[::5]
    for name in gone:
        (out / name).unlink()
    kept = {name: value for name, value in stats(out).items() if name.endswith(".wav")}
    result = build_library(spec, output=str(out), workers=1, progress=False)
    assert result.gain_reused and result.rendered == len(gone) and result.skipped == N_FILES - len(gone)
    assert contents(out) == original
    assert {name: value for name, value in stats(out).items() if name in kept} == kept


def test_force_renders_again_the_same_bytes(library, tmp_path, capsys):
    spec, out = copy_of(library, tmp_path)
    original, before = contents(out), stats(out)
    assert main(["batch", str(spec), "--output", str(out), "--force", "--workers", "1"]) == 0
    assert f"{N_FILES} rendered, 0 up to date" in capsys.readouterr().out
    assert contents(out) == original
    assert all(stats(out)[name][0] != before[name][0] for name in wavs(out))  # new files, renamed in


def test_changed_spec_renders_again(library, tmp_path):
    spec, out = copy_of(library, tmp_path)
    original = contents(out)
    spec2 = write(spec.parent, "spec2.yaml", SPEC.replace("seed: 5", "seed: 6"))
    result = build_library(spec2, output=str(out), workers=1, progress=False)
    assert result.rendered == N_FILES and not result.gain_reused
    manifest = manifest_of(out)
    assert manifest["library"]["complete"] and all(e["up_to_date"] for e in manifest["files"])
    assert all(contents(out)[name] != original[name] for name in wavs(out))


def test_bad_job_is_reported_and_the_rest_go_on(tmp_path, capsys):
    """A 120 mm, 3 mm steel string: its stiffness alone sounds near 410 Hz, so A3 cannot be reached."""
    patch = RIG.replace("length: 650 mm", "length: 120 mm").replace("diameter: 0.45 mm", "diameter: 3 mm")
    patch = patch.replace("pitch: A2", "pitch: A5")
    spec = make_spec(tmp_path, "patch: rig.yaml\nname: rig\noutput: lib\nnotes: [A3, A4, A5]\n", patch)
    status = main(["batch", str(spec), "--workers", "2"])
    out, err = capsys.readouterr()
    assert status == 1
    assert re.search(r"^synth: error: rig_057_A3_v100_rr01\.wav \(A3, velocity 100, round robin 1\): .*"
                     r"below what this string's stiffness alone gives", err, re.M), err
    assert "1 of 3 files failed" in err and "2 rendered" in out
    assert wavs(tmp_path / "lib") == ["rig_069_A4_v100_rr01.wav", "rig_081_A5_v100_rr01.wav"]
    manifest = manifest_of(tmp_path / "lib")
    assert [f["file"] for f in manifest["library"]["failed"]] == ["rig_057_A3_v100_rr01.wav"]
    assert not manifest["library"]["complete"]
    _, regions = parse_sfz((tmp_path / "lib" / "rig.sfz").read_text(encoding="utf-8"))
    assert sorted(r["sample"] for r in regions) == wavs(tmp_path / "lib")


def test_absolute_scale_keeps_gain_one(tmp_path):
    quiet = RIG.replace("peak_db: -1.0", "peak_db: null").replace("max_modes: 48", "max_modes: 8")
    spec = make_spec(tmp_path, SPEC, quiet.replace("position: 0.15", "position: 0.15\n  strength: 0.3"))
    result = build_library(spec, workers=1, progress=False)
    assert result.exit_status == 0 and result.gain == 1.0
    assert manifest_of(tmp_path / "lib")["library"]["gain_basis"]["method"].startswith("absolute scale")


# ---------------------------------------------------------------------------
# Ctrl-C on a real process


@pytest.mark.parametrize("signum, status", [(signal.SIGINT, 130), (signal.SIGTERM, 143)], ids=["SIGINT", "SIGTERM"])
def test_signal_leaves_whole_files_and_a_true_manifest(tmp_path, signum, status):
    """Signal ``python -m synth.cli batch`` once its first file appears; then finish with a re-run.

    SIGTERM (what ``timeout``, CI cancellation and container stops send) behaves as Ctrl-C does;
    ``communicate`` returning at all shows no worker, fork server or resource tracker kept the
    caller's pipes open."""
    rig = RIG.replace("duration: 0.5 s", "duration: 3 s").replace("sample_rate: 16000", "sample_rate: 8000")
    spec = make_spec(tmp_path, "patch: rig.yaml\nname: rig\noutput: lib\nnotes: {from: A1, to: A4}\nvelocities: [40, 100]\n", rig)
    n_files = 37 * 2
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    argv = [sys.executable, "-m", "synth.cli", "batch", str(spec), "--workers", "2"]
    process = subprocess.Popen(argv, cwd=tmp_path, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    out = tmp_path / "lib"
    while not list(out.glob("*.wav")) and process.poll() is None:
        time.sleep(0.002)
    process.send_signal(signum)
    stdout, stderr = process.communicate(timeout=120)
    assert process.returncode == status, stderr
    assert "synth: interrupted:" in stderr and "Traceback" not in stderr
    assert [p.name for p in out.iterdir() if ".part" in p.name] == []
    on_disk = wavs(out)
    manifest = manifest_of(out)
    assert [e["file"] for e in manifest["files"]] == on_disk
    assert 0 < len(on_disk) < n_files and not manifest["library"]["complete"]
    for name in on_disk:  # whole files: the right length, read by an independent reader
        data, rate = read_wav(out / name)
        assert (rate, len(data)) == (8000, 24000)
    before = stats(out)
    result = build_library(spec, workers=2, progress=False)
    assert result.exit_status == 0 and result.gain_reused
    assert (result.skipped, result.rendered) == (len(on_disk), n_files - len(on_disk))
    assert len(wavs(out)) == n_files and manifest_of(out)["library"]["complete"]
    assert {name: stats(out)[name] for name in on_disk} == {name: before[name] for name in on_disk}


# ---------------------------------------------------------------------------
# Dask


def test_dask_local_cluster_gives_the_same_bytes(library, tmp_path):
    distributed = pytest.importorskip("distributed")
    folder, spec, _ = library
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=":0") as cluster:
        result = build_library(spec, output=str(tmp_path / "lib"), scheduler=cluster.scheduler_address, progress=False)
    assert result.exit_status == 0 and result.rendered == N_FILES
    assert result.backend.startswith("Dask scheduler tcp://")
    assert contents(tmp_path / "lib") == contents(folder / "lib")  # WAVs, manifest and map, byte for byte


# ---------------------------------------------------------------------------
# Pieces


def test_loudness_bs1770_reference_case():
    """ITU-R BS.1770-4 (2015), Annex 1: a 0 dBFS 997 Hz sine in one channel reads -3.01 LKFS.

    (The sentence is quoted in Blaizzy/mlx-audio PR #860; REFERENCES.md sec. 11.)
    Recomputed here independently: mean square 1/2, the K-weighting gain at
    997 Hz from the Recommendation's 48 kHz coefficients (Annex 1, tables 1
    and 2) with scipy.signal.freqz, and the -0.691 offset of eq. (2).
    """
    rate = 48000
    shelf_b, shelf_a = [1.53512485958697, -2.69169618940638, 1.19839281085285], [1.0, -1.69065929318241, 0.73248077421585]
    high_b, high_a = [1.0, -2.0, 1.0], [1.0, -1.99004745483398, 0.99007225036621]
    _, h1 = scipy.signal.freqz(shelf_b, shelf_a, worN=[997.0], fs=rate)
    _, h2 = scipy.signal.freqz(high_b, high_a, worN=[997.0], fs=rate)
    expected = -0.691 + 10 * math.log10(0.5) + 20 * math.log10(abs(h1[0] * h2[0]))
    assert expected == pytest.approx(-3.01, abs=0.005)
    t = np.arange(3 * rate) / rate
    measured, note = loudness_lufs(np.sin(2 * np.pi * 997.0 * t), rate)
    assert note is None
    assert measured == pytest.approx(expected, abs=0.005)
    assert measured == pytest.approx(-3.01, abs=0.005)


def test_loudness_of_short_or_silent_samples_is_null():
    value, note = loudness_lufs(np.ones(4000) * 0.5, 16000)  # 0.25 s < one 400 ms block
    assert value is None and "shorter than one 400 ms gating block" in note
    value, note = loudness_lufs(np.zeros(16000), 16000)
    assert value is None and "-70 LUFS absolute gate" in note


@pytest.mark.parametrize("peak", ["sample", "true"])
def test_peak_measurement_is_exact(tmp_path, peak):
    """The bounded early-stopping peak equals the full render's peak (float32 rounding aside)."""
    from synth.truepeak import true_peak

    rig = RIG.replace("duration: 0.5 s", "duration: 4 s").replace("peak_db: -1.0", f"peak_db: -1.0\n  peak: {peak}")
    spec = load_library_spec(make_spec(tmp_path, SPEC, rig))
    for job in library_jobs(spec)[::3]:
        patch = voice_job(spec, job)
        signal, _ = render_patch(patch)
        full = true_peak(signal, 16000) if peak == "true" else float(np.max(np.abs(signal)))
        assert _measure_peak(patch) == pytest.approx(full, rel=1e-5)


def test_variation_is_seeded_by_the_job_not_the_order(tmp_path):
    variation = Variation(position=0.02, detune_cents=2.0, seed=11)
    first = job_offsets(variation, 57, 40, 1)
    assert np.array_equal(first, job_offsets(variation, 57, 40, 1))
    assert not np.array_equal(first, job_offsets(variation, 57, 40, 2))
    assert np.all(np.abs(first) <= 1.0)
    a = library_jobs(load_library_spec(make_spec(tmp_path, SPEC)))
    b = library_jobs(load_library_spec(make_spec(tmp_path, SPEC.replace("[A3, C4, E4]", "[E4, A3, C4]"))))
    assert [(j.file, j.detune_cents, j.excitation_position) for j in a] == [(j.file, j.detune_cents, j.excitation_position) for j in b]
    assert all(abs(j.detune_cents) <= 3.0 and abs(j.excitation_position[0] - 0.15) <= 0.01 for j in a)


def test_file_names_sort_by_key_layer_round_robin():
    keys = [(midi, velocity, rr) for midi in (21, 61, 108) for velocity in (5, 64, 127) for rr in (1, 2, 10)]
    names = [sample_file_name("lib", *key) for key in keys]
    assert names == sorted(names)
    assert sample_file_name("lib", 61, 64, 2) == "lib_061_Cs4_v064_rr02.wav"


def test_key_and_velocity_ranges():
    assert key_ranges([45, 48, 52]) == {45: (44, 46), 48: (47, 50), 52: (51, 53)}
    assert key_ranges([60]) == {60: (60, 60)}
    assert velocity_ranges([100, 40]) == {40: (1, 40), 100: (41, 127)}


# ---------------------------------------------------------------------------
# Bad input: one line, exit status 2, nothing written

BAD_SPECS = [
    pytest.param("patch: rig.yaml\nnotes: [A2, H3]\n", 2, "notes[1]", r"'H3' is not a note name", id="bad-note"),
    pytest.param("patch: rig.yaml\nnotes: [A2, Bb2, A#2]\n", 2, "notes[2]", r"same key as 'Bb2' \(MIDI 46\)", id="same-key-twice"),
    pytest.param("patch: rig.yaml\nnotes: [200]\n", 2, "notes[0]", r"outside the MIDI range 0\.\.127", id="note-out-of-midi"),
    pytest.param("patch: rig.yaml\nnotes: A2\n", 2, "notes", r"must be a list of notes .* or a range", id="notes-not-list"),
    pytest.param("patch: rig.yaml\nnotes: {from: C5, to: C2}\n", 2, "notes.to", r"must not be below 'from'", id="range-downwards"),
    pytest.param("patch: rig.yaml\nnotes: {from: C2, to: C5, stp: 2}\n", 2, "notes.stp", r"did you mean 'step'\?", id="range-unknown-key"),
    pytest.param("patch: rig.yaml\nnotes: {from: C2, to: C5, step: 0}\n", 2, "notes.step", r"must be >= 1", id="range-step-0"),
    pytest.param("patch: rig.yaml\nnotes: [A2]\nvelocities: [0, 100]\n", 3, "velocities[0]", r"not a MIDI velocity \(a whole number 1\.\.127\)", id="velocity-0"),
    pytest.param("patch: rig.yaml\nnotes: [A2]\nvelocities: 100\n", 3, "velocities", r"must be a list of MIDI velocities", id="velocities-not-list"),
    pytest.param("patch: rig.yaml\nnotes: [A2]\nvelocities: [90, 90]\n", 3, "velocities[1]", r"velocity 90 appears twice", id="velocity-twice"),
    pytest.param("patch: rig.yaml\nnotes: [A2]\nvelocity: [10]\n", 3, "velocity", r"did you mean 'velocities'\?", id="unknown-key"),
    pytest.param("patch: rig.yaml\nnotes: [A2]\nround_robin: 0\n", 3, "round_robin", r"must be >= 1, got 0", id="round-robin-0"),
    pytest.param("patch: rig.yaml\nnotes: [A2]\nround_robin: 1.5\n", 3, "round_robin", r"must be a whole number", id="round-robin-float"),
    pytest.param("patch: rig.yaml\nnotes: [A2]\nvariation: {position: 0.7}\n", 3, "variation.position", r"must be <= 0\.5", id="jitter-too-wide"),
    pytest.param("patch: rig.yaml\nnotes: [A2]\nvariation: {seed: -1}\n", 3, "variation.seed", r"must be >= 0", id="negative-seed"),
    pytest.param("patch: rig.yaml\nnotes: [A2]\nvariation: {detune: 2}\n", 3, "variation.detune", r"did you mean 'detune_cents'\?", id="variation-unknown-key"),
    pytest.param("patch: nothere.yaml\nnotes: [A2]\n", 1, "patch", r"no patch file 'nothere\.yaml' \(paths are relative to the spec file\)", id="patch-missing"),
    pytest.param("notes: [A2]\n", 1, "patch", r"missing required key", id="no-patch-key"),
    pytest.param("patch: ''\nnotes: [A2]\n", 1, "patch", r"must name a patch file \(YAML\), relative to the spec file", id="patch-empty"),
    pytest.param("patch: .\nnotes: [A2]\n", 1, "patch", r"is a folder, not a patch file", id="patch-is-a-folder"),
    pytest.param("patch: rig.yaml\nname: ../x\nnotes: [A2]\n", 2, "name", r"not a plain file-name slug", id="name-path"),
    pytest.param("patch: rig.yaml\nnotes: [A2]\noutput: rig.yaml\n", 3, "output", r"exists and is not a folder", id="output-is-a-file"),
    pytest.param("- patch\n", 1, None, r"a library spec must be a mapping", id="not-a-mapping"),
    pytest.param("patch: rig.yaml\nnotes: {from: C-1, to: G9}\nvelocities: [1, 2, 3, 4, 5, 6, 7, 8]\nround_robin: 99\n", 2, "notes",
                 r"101376 files .* more than the 100000", id="too-many-files"),
]


@pytest.mark.parametrize(("text", "line", "key", "phrase"), BAD_SPECS)
def test_bad_spec(tmp_path, monkeypatch, capsys, text, line, key, phrase):
    monkeypatch.chdir(tmp_path)
    write(tmp_path, "rig.yaml", RIG)
    write(tmp_path, "spec.yaml", text)
    before = sorted(p.name for p in tmp_path.iterdir())
    status = main(["batch", "spec.yaml", "--workers", "1"])
    out, err = capsys.readouterr()
    lines = err.strip().splitlines()
    assert status == 2 and out == "" and len(lines) == 1, err
    start = f"synth: error: spec.yaml:{line}: " + (f"{key}: " if key else "")
    assert lines[0].startswith(start), lines[0]
    assert re.search(phrase, lines[0]), lines[0]
    assert sorted(p.name for p in tmp_path.iterdir()) == before  # no renders/, no output folder


BAD_OPTIONS = [
    pytest.param(["--workers", "0"], r"^synth: error: command line: --workers: must be a whole number >= 1, got 0$", id="workers-0"),
    pytest.param(["--workers", "two"], r"^synth: error: command line: --workers: must be a whole number, got 'two'", id="workers-text"),
    pytest.param(["--workers", "2", "--scheduler", "tcp://127.0.0.1:8786"], r"command line: --workers: give --workers .* not both", id="both"),
    pytest.param(["--scheduler", "nonsense"], r"^synth: error: command line: --scheduler: 'nonsense' is not a scheduler address", id="bad-address"),
    pytest.param(["--output", "rig.yaml"], r"^synth: error: command line: --output: 'rig\.yaml' exists and is not a folder", id="output-file"),
]


@pytest.mark.parametrize(("options", "phrase"), BAD_OPTIONS)
def test_bad_option(tmp_path, monkeypatch, capsys, options, phrase):
    monkeypatch.chdir(tmp_path)
    write(tmp_path, "rig.yaml", RIG)
    write(tmp_path, "spec.yaml", "patch: rig.yaml\nnotes: [A2]\n")
    try:
        status = main(["batch", "spec.yaml", *options])
    except SystemExit as exit_:
        status = exit_.code
    _, err = capsys.readouterr()
    assert status == 2 and len(err.strip().splitlines()) == 1, err
    assert re.search(phrase, err.strip()), err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["rig.yaml", "spec.yaml"]


def test_patch_errors_name_the_patch_file(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    write(tmp_path, "rig.yaml", RIG.replace("length: 650 mm", "lenght: 650 mm"))
    write(tmp_path, "spec.yaml", "patch: rig.yaml\nnotes: [A2]\n")
    assert main(["batch", "spec.yaml"]) == 2
    assert capsys.readouterr().err.startswith("synth: error: rig.yaml:5: resonator.lenght: unknown key")


def test_stale_files_are_named_and_pruned_exactly(library, tmp_path, capsys):
    """A smaller spec: the files the previous manifest listed and it no longer makes are named;
    --prune deletes exactly those (a stranger's file, even one named like a sample, is kept)."""
    spec, out = copy_of(library, tmp_path)
    stranger = out / "rig_099_Ds7_v100_rr01.wav"  # sample-shaped, but in no manifest
    stranger.write_bytes(b"not ours")
    (out / "notes.txt").write_text("keep me")
    smaller = write(spec.parent, "smaller.yaml", SPEC.replace("[A3, C4, E4]", "[A3, C4]"))
    stale = sorted(name for name in wavs(out) if "_064_E4_" in name)
    assert len(stale) == 4
    assert main(["batch", str(smaller), "--output", str(out), "--workers", "1"]) == 0
    err = capsys.readouterr().err
    assert f"{len(stale)} files in {out} from the previous spec are no longer produced (--prune deletes them)" in err
    assert all((out / name).exists() for name in stale)
    assert main(["batch", str(smaller), "--output", str(out), "--workers", "1", "--prune"]) == 0
    captured = capsys.readouterr()
    assert f"pruned {len(stale)} stale files" in captured.out and "no longer produced" not in captured.err
    assert not any((out / name).exists() for name in stale)
    assert stranger.read_bytes() == b"not ours" and (out / "notes.txt").exists()
    assert len(wavs(out)) == 8 + 1


def test_patch_without_dampers_is_one_shot(tmp_path):
    """release_t60: null -- the object has no dampers: the SFZ plays each sample to its end at key-up."""
    spec = make_spec(tmp_path, SPEC.replace("round_robin: 2", "round_robin: 1"),
                     RIG.replace("high_frequency: 3 kHz", "high_frequency: 3 kHz\n  release_t60: null"))
    assert build_library(spec, workers=1, progress=False).exit_status == 0
    glob, regions = parse_sfz((tmp_path / "lib" / "rig.sfz").read_text(encoding="utf-8"))
    assert glob == {"amp_veltrack": "0", "loop_mode": "one_shot"} and len(regions) == 6


def test_every_file_carries_its_root_note(library):
    """smpl / inst of every sample, parsed here with struct: the take's pitch and the SFZ's key and layer ranges."""
    import struct

    folder, _, _ = library
    manifest = manifest_of(folder / "lib")
    glob, regions = parse_sfz((folder / "lib" / "rig.sfz").read_text(encoding="utf-8"))
    ranges = {r["sample"]: r for r in regions}
    for entry in manifest["files"]:
        raw = (folder / "lib" / entry["file"]).read_bytes()
        offset, chunks = 12, {}
        while offset < len(raw):
            size = struct.unpack_from("<I", raw, offset + 4)[0]
            chunks[raw[offset:offset + 4]] = raw[offset + 8 : offset + 8 + size]
            offset += 8 + size + (size & 1)
        _, _, period, unity, fraction = struct.unpack("<9I", chunks[b"smpl"])[:5]
        pitch = unity + fraction / 2**32  # semitones
        assert period == 10**9 // 16000
        assert pitch == pytest.approx(entry["midi"] + entry["detune_cents"] / 100.0, abs=1e-6)
        note, fine, _, low, high, low_vel, high_vel = struct.unpack("<BbbBBBB", chunks[b"inst"][:7])
        assert note == round(pitch) and fine == round((note - pitch) * 100)
        region = ranges[entry["file"]]
        assert (low, high, low_vel, high_vel) == tuple(int(region[k]) for k in ("lokey", "hikey", "lovel", "hivel"))
