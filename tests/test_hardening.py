"""Nothing lost, nothing hung, nothing overwritten (issue 12): each case reproduced, then held.

* A full disk (here a file-size limit, RLIMIT_FSIZE, which fails writes the same way) during
  ``synth render`` and ``synth midi``: one line, no file, no temporary.
* One output-path validator: names longer than 255 bytes, symbolic-link loops, NUL bytes, and
  ``out/../x.wav`` (read lexically: no empty ``out/`` is left).
* Inputs are sacred: a library whose manifest, map or samples would land on its own spec or
  patch is refused; ``--prune`` never deletes an input.
* One run per folder: a second ``synth batch`` on a locked folder is refused, naming the pid.
* SIGTERM unwinds a single-file command as Ctrl-C does (exit 143, no temporary).
* A Dask cluster whose workers are all gone: one line, exit status 1, a manifest that matches
  the disk, within the ``--worker-timeout``.
* Positions within 1e-9 of an end are the end (a pluck at 1e-45 overflowed); a resonator
  ``type`` that is a mapping or list; error lines stay short.
(SIGINT and SIGTERM on a real ``synth batch`` process: tests/test_batch.py.)
"""
from __future__ import annotations

import fcntl
import os
import resource
import signal
import subprocess
import sys
import time
from pathlib import Path

import mido
import pytest

from synth.cli import main

from .cli_checks import error_line
from .cli_checks import run_cli as run

REPO = Path(__file__).resolve().parents[1]

PATCH = """\
name: hard-string
resonator: {type: string, material: nylon, length: 500 mm, diameter: 0.8 mm, pitch: A3}
excitation: {type: pluck, position: 0.3}
pickup: {position: 0.1}
damping: {t60: 1 s, release_t60: 0.2 s}
render: {duration: 0.4 s, sample_rate: 8000, max_modes: 12}
"""


@pytest.fixture
def patch(tmp_path):
    path = tmp_path / "p.yaml"
    path.write_text(PATCH, encoding="utf-8")
    return path


def _leftovers(folder):
    return sorted(p.name for p in Path(folder).rglob("*") if ".part" in p.name)


def _song(path, n_notes=3):
    song = mido.MidiFile(ticks_per_beat=96)
    track = mido.MidiTrack()
    song.tracks.append(track)
    for k in range(n_notes):
        track.append(mido.Message("note_on", note=57 + k, velocity=90, time=0 if k == 0 else 10))
        track.append(mido.Message("note_off", note=57 + k, time=48))
    song.save(path)
    return path


# --------------------------------------------------------------------------- full disk


def _file_size_limit():
    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # a write past the limit then fails with EFBIG, as on a full disk
    resource.setrlimit(resource.RLIMIT_FSIZE, (20_000, 20_000))


@pytest.mark.parametrize("command", ["render", "midi"])
def test_a_full_disk_is_one_line(tmp_path, patch, command):
    out = tmp_path / "out.wav"
    if command == "render":
        argv = ["render", str(patch), "-o", str(out), "--duration", "3", "--quiet"]
    else:
        argv = ["midi", str(_song(tmp_path / "s.mid", 12)), "--patch", str(patch), "-o", str(out), "--quiet"]
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    done = subprocess.run([sys.executable, "-m", "synth.cli", *argv], env=env, capture_output=True, text=True,
                          preexec_fn=_file_size_limit, timeout=120)
    assert done.returncode == 2, done.stderr
    line = error_line(done.stderr)
    assert f"cannot write '{out}'" in line
    assert not out.exists() and _leftovers(tmp_path) == []


# --------------------------------------------------------------------------- output paths


def test_a_name_too_long_for_the_file_system(capsys, tmp_path, patch):
    out = tmp_path / ("a" * 300 + ".wav")
    status, _, err = run(capsys, "render", patch, "-o", out)
    assert status == 2 and "is 304 bytes long (file systems take at most 255)" in error_line(err)


def test_a_symbolic_link_loop_in_the_output_path(capsys, tmp_path, patch):
    (tmp_path / "a").symlink_to(tmp_path / "b")
    (tmp_path / "b").symlink_to(tmp_path / "a")
    status, _, err = run(capsys, "render", patch, "-o", tmp_path / "a" / "x.wav")
    assert status == 2 and "loop of symbolic links" in error_line(err)


def test_a_nul_byte_in_the_output_path(capsys, tmp_path, patch):
    status, _, err = run(capsys, "render", patch, "-o", f"{tmp_path}/x\0y.wav")
    assert status == 2 and "NUL byte" in error_line(err)


def test_dot_dot_leaves_no_empty_folder(capsys, tmp_path, patch, monkeypatch):
    monkeypatch.chdir(tmp_path)
    status, _, err = run(capsys, "render", patch, "-o", "out/../x.wav", "--quiet")
    assert status == 0, err
    assert (tmp_path / "x.wav").exists() and not (tmp_path / "out").exists()


# --------------------------------------------------------------------------- inputs are sacred


def test_a_library_never_writes_over_its_spec(capsys, tmp_path, patch):
    spec = tmp_path / "p2.sfz"  # the spec is named like the map the library would write
    spec.write_text("patch: p.yaml\nname: p2\noutput: .\nnotes: [A3]\n", encoding="utf-8")
    before = spec.read_bytes()
    status, out, err = run(capsys, "batch", spec, "--workers", "1")
    assert status == 2 and "would write p2.sfz over its own input" in error_line(err)
    assert spec.read_bytes() == before and not list(tmp_path.glob("*.wav"))


def test_a_library_never_writes_over_its_patch(capsys, tmp_path):
    (tmp_path / "manifest.json").write_text(PATCH, encoding="utf-8")  # the patch is named like the manifest
    spec = tmp_path / "spec.yaml"
    spec.write_text("patch: manifest.json\noutput: .\nnotes: [A3]\n", encoding="utf-8")
    status, out, err = run(capsys, "batch", spec, "--workers", "1")
    assert status == 2 and "would write manifest.json over its own input" in error_line(err)
    assert (tmp_path / "manifest.json").read_text(encoding="utf-8") == PATCH


# --------------------------------------------------------------------------- one run per folder


def test_a_second_run_on_a_locked_folder_is_refused(capsys, tmp_path, patch):
    spec = tmp_path / "spec.yaml"
    spec.write_text("patch: p.yaml\noutput: lib\nnotes: [A3]\n", encoding="utf-8")
    (tmp_path / "lib").mkdir()
    (tmp_path / "lib" / ".hard-string_057_A3_v100_rr01.x.part.wav").write_bytes(b"another run's temporary")
    holder = os.open(tmp_path / "lib", os.O_RDONLY)
    try:
        fcntl.flock(holder, fcntl.LOCK_EX | fcntl.LOCK_NB)  # another run holds the folder
        status, out, err = run(capsys, "batch", spec, "--workers", "1")
        assert status == 2
        assert f"is in use by another synth batch run (pid {os.getpid()})" in error_line(err)
        assert (tmp_path / "lib" / ".hard-string_057_A3_v100_rr01.x.part.wav").exists()  # its temporaries kept
    finally:
        os.close(holder)  # released, as the kernel does when a process ends
    status, out, err = run(capsys, "batch", spec, "--workers", "1")
    assert status == 0, err
    assert _leftovers(tmp_path / "lib") == []  # a run cleans temporaries only while it holds the folder


# --------------------------------------------------------------------------- SIGTERM


def test_sigterm_unwinds_a_render_like_ctrl_c(capsys, tmp_path, patch, monkeypatch):
    """SIGTERM arriving while the file is being written: the temporary goes, exit status 143."""
    import synth.audio

    real = synth.audio.quantise

    def quantise_then_terminate(*args, **kwargs):
        os.kill(os.getpid(), signal.SIGTERM)
        return real(*args, **kwargs)

    previous = signal.getsignal(signal.SIGTERM)
    monkeypatch.setattr(synth.audio, "quantise", quantise_then_terminate)
    try:
        status, out, err = run(capsys, "render", patch, "-o", tmp_path / "x.wav", "--quiet")
    finally:
        signal.signal(signal.SIGTERM, previous)
    assert status == 143 and "synth: terminated; nothing half-written" in err
    assert not (tmp_path / "x.wav").exists() and _leftovers(tmp_path) == []


# --------------------------------------------------------------------------- Dask


def test_a_cluster_with_no_worker_left_gives_up(tmp_path, patch, capsys):
    distributed = pytest.importorskip("distributed")
    spec = tmp_path / "spec.yaml"
    spec.write_text("patch: p.yaml\noutput: lib\nnotes: [A3, B3]\n", encoding="utf-8")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False, dashboard_address=":0") as cluster:
        cluster.scale(0)  # every worker gone before the run starts
        deadline = time.monotonic() + 30
        while cluster.workers and time.monotonic() < deadline:
            time.sleep(0.05)
        started = time.monotonic()
        status, out, err = run(capsys, "batch", spec, "--scheduler", cluster.scheduler_address,
                               "--worker-timeout", "2 s")
        elapsed = time.monotonic() - started
    assert status == 1 and "no Dask worker has been alive" in error_line(err)
    assert elapsed < 30
    assert "distributed" not in err.lower().replace("dask", "")  # Dask's own logging stays quiet


# --------------------------------------------------------------------------- small things


@pytest.mark.parametrize("kind", ["pluck", "strike"])
@pytest.mark.parametrize("where", ["excitation", "pickup"])
def test_a_position_1e_45_from_an_end_is_the_end(capsys, tmp_path, kind, where):
    text = PATCH.replace("type: pluck", f"type: {kind}")
    old = "position: 0.3" if where == "excitation" else "position: 0.1"
    (tmp_path / "p.yaml").write_text(text.replace(old, "position: 1e-45"), encoding="utf-8")
    status, out, err = run(capsys, "render", tmp_path / "p.yaml", "-o", tmp_path / "x.wav")
    assert status == 2 and f"{where}.position: nothing would sound: the {where} sits on a node" in error_line(err)
    assert not (tmp_path / "x.wav").exists()


@pytest.mark.parametrize("value", ["{a: 1}", "[string]"])
def test_pitch_on_a_type_that_is_not_a_name(capsys, tmp_path, value):
    (tmp_path / "p.yaml").write_text(f"name: x\nresonator:\n  type: {value}\n", encoding="utf-8")
    status, out, err = run(capsys, "modes", tmp_path / "p.yaml", "--pitch", "C4")
    assert status == 2 and "resonator.type:" in error_line(err) and "is not allowed" in err


def test_error_lines_stay_short(capsys, monkeypatch):
    """A command failing with a 100,000-character message prints one line of at most MAX_ERROR_CHARS."""
    import synth.cli
    from synth.errors import PatchError

    def huge(args):
        raise PatchError("bad value " + "x" * 100_000, file="f.yaml", line=1, key="k")

    monkeypatch.setattr(synth.cli, "cmd_modes", huge)  # build_parser binds the command when main runs
    status = main(["modes", "whatever.yaml"])
    err = capsys.readouterr().err
    assert status == 2 and len(error_line(err)) <= len("synth: error: ") + synth.cli.MAX_ERROR_CHARS


def test_the_song_buffer_message_names_the_song(capsys, tmp_path, patch, monkeypatch):
    import synth.midi

    monkeypatch.setattr(synth.midi, "MEMORY_LIMIT_BYTES", 1000)
    song = _song(tmp_path / "s.mid")
    status, out, err = run(capsys, "midi", song, "--patch", patch, "-o", tmp_path / "s.wav")
    assert status == 2 and f"{song}: the song buffer would need" in error_line(err)


def test_a_song_past_4_gib_is_written_as_rf64(capsys, tmp_path, patch, monkeypatch):
    """``synth midi`` once wrote a 4.4 GB WAV whose RIFF sizes stuck at 0xFFFFFFFF; past the WAV limit
    (lowered here to test it) a song is RF64, read back whole by libsndfile."""
    import soundfile

    from synth import wavmeta

    monkeypatch.setattr(wavmeta, "WAV_LIMIT_BYTES", 10_000)
    out = tmp_path / "song.wav"
    status, _, err = run(capsys, "midi", _song(tmp_path / "s.mid"), "--patch", patch, "-o", out, "--quiet")
    assert status == 0, err
    assert out.read_bytes()[:4] == b"RF64"
    info = soundfile.info(str(out))
    assert info.format == "RF64" and info.frames * info.channels * 3 > 10_000


def test_a_ctrl_c_while_the_workers_stop_still_says_so(capsys, tmp_path, patch, monkeypatch):
    """A second Ctrl-C arriving after the work is done, while the pool shuts down, used to end the
    command with no message; now it is the usual one line and exit status 130."""
    import synth.executors

    real = synth.executors.ProcessPoolExecutor.shutdown

    def shutdown_then_interrupt(self, *args, **kwargs):
        real(self, *args, **kwargs)
        raise KeyboardInterrupt

    monkeypatch.setattr(synth.executors.ProcessPoolExecutor, "shutdown", shutdown_then_interrupt)
    spec = tmp_path / "spec.yaml"
    spec.write_text("patch: p.yaml\noutput: lib\nnotes: [A3, B3]\n", encoding="utf-8")
    status, out, err = run(capsys, "batch", spec, "--workers", "2")
    assert status == 130 and "synth: interrupted; nothing half-written was left behind" in err
    assert "Traceback" not in err and _leftovers(tmp_path / "lib") == []
