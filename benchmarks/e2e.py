"""Whole jobs against their engine-and-write lower bounds (issue 9).

Run from the repository root with synth installed (``make bench`` runs it
after the engine benchmark):

    python benchmarks/e2e.py            # every figure, about a minute
    python benchmarks/e2e.py --quick    # a smaller library and MIDI file

It prints, on this machine, in one run:

* **library**: ``synth batch`` of 392 four-second files of a free-free
  aluminium bar (49 notes x 4 velocities x 2 round robins, 2 workers), run as
  a user runs it (a new process, wall-clock time, every file rendered again
  with ``--force``: the physics, the gain pass and the render pass), against
  its serial bound: the manifest's partial tables rendered with
  ``render_modes`` and written with ``soundfile``, one after the other, in
  this process; the two are measured in turn, three times, best of each;
* **idle re-run**: the same command with every file up to date;
* **MIDI**: ``synth midi`` of a 4,000-note file through the practice-harp
  string patch (a new process, wall-clock time), against its engine-only
  bound: the very ``render_modes`` calls the render makes (every segment of
  every voice), replayed one after another in this process;
* **solves**: one fresh solve (no cache) of every resonator type at 64 and
  256 modes, best of several;
* **many modes**: ``synth modes`` of a 20,000-mode string, wall time and
  peak resident memory of the process;
* **short render**: 1 s of 64 modes at 48 kHz as a share of the float32
  matmul limit (a 4096^2 GEMM measured in the same run).

The machine is shared and noisy: every timing is the best of a few runs, and
the CPU pressure (Linux PSI) is printed at the start and end.  Nothing here
is asserted; the README records the figures.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import resource
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
SYNTH = [sys.executable, "-m", "synth.cli"]

BAR_PATCH = """\
name: bench-chime
resonator:
  type: bar
  material: aluminium-6061
  width: 25 mm
  thickness: 9 mm
  pitch: A4
  supports: free-free
excitation: {type: strike, position: 0.08, contact_time: 0.3 ms}
pickup: {position: 0.45}
damping: {t60: 6 s, t60_high: 1.2 s, high_frequency: 6 kHz}
render: {duration: 4 s, sample_rate: 48000, bit_depth: 24, peak_db: -1.0, max_modes: 64}
"""

LIBRARY = """\
patch: chime.yaml
name: bench-chime
output: library
notes: {{from: C3, to: {top}}}
velocities: [30, 60, 90, 120]
round_robin: 2
variation: {{position: 0.01, detune_cents: 2, seed: 3}}
"""


def pressure():
    """CPU pressure 'some avg10' in percent (Linux PSI), or None."""
    try:
        with open("/proc/pressure/cpu") as handle:
            return float(handle.readline().split()[1].split("=")[1])
    except (OSError, IndexError, ValueError):
        return None


sys.path.insert(0, str(Path(__file__).resolve().parent))
from engine import best_time as best, matmul_limit  # noqa: E402  (the engine benchmark's own timing helpers)


_PEAK_RSS = (
    "import resource, subprocess, sys; p = subprocess.run(sys.argv[1:]); "
    "print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss, file=sys.stderr); sys.exit(p.returncode)"
)


def run(command, cwd):
    """Wall time (s), peak RSS (MiB) and the finished process of a command run in a new process."""
    start = time.perf_counter()
    proc = subprocess.run([sys.executable, "-c", _PEAK_RSS, *command], cwd=cwd, capture_output=True, text=True,
                          env={**os.environ, "PYTHONPATH": str(ROOT)})
    wall = time.perf_counter() - start
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(command)} failed ({proc.returncode}):\n{proc.stderr}")
    peak_kib = int(proc.stderr.strip().splitlines()[-1])
    return wall, peak_kib / 1024.0, proc


def library_bound(folder):
    """Serial engine + write time of the manifest's partial tables."""
    import soundfile

    from synth.audio import SUBTYPES, quantise
    from synth.engine import render_modes

    manifest = json.loads((folder / "manifest.json").read_text())
    rate, bits = manifest["library"]["sample_rate"], manifest["library"]["bit_depth"]
    duration, gain = manifest["library"]["duration_s"], manifest["library"]["gain"]
    tables = []
    for entry in manifest["files"]:
        modes = [m for m in entry["partials"]["modes"] if m["amplitude"] > 0]
        tables.append([np.array([m[k] for m in modes]) for k in ("frequency_hz", "t60_s", "amplitude", "phase_rad")])
    out = Path(tempfile.mkdtemp(prefix="bound-"))

    def work():
        for i, (f, t60, a, phase) in enumerate(tables):
            signal = render_modes(f, t60, a * gain, duration, rate, phase=phase)
            soundfile.write(str(out / f"{i}.wav"), quantise(signal, bits), rate, subtype=SUBTYPES[bits])

    return best(work, 2), len(tables)


def bench_library(work, notes_top, workers, rounds=3):
    """First run, then `rounds` of (bound, forced re-run, idle re-run), interleaved: best of each.

    The disk is shared and its write-back comes in waves, so the bound and
    the runs it is compared with are measured side by side.
    """
    (work / "chime.yaml").write_text(BAR_PATCH)
    (work / "library.yaml").write_text(LIBRARY.format(top=notes_top))
    command = [*SYNTH, "batch", "library.yaml", "--workers", str(workers)]
    first = run(command, work)[0]
    bounds, forced, idle = [], [], []
    for _ in range(rounds):
        bound, n_files = library_bound(work / "library")
        bounds.append(bound)
        forced.append(run([*command, "--force"], work)[0])
        idle.append(run(command, work)[0])
    return {"files": n_files, "first_s": first, "forced_s": min(forced), "bound_s": min(bounds), "idle_s": min(idle)}


def write_song(path, n_notes, seed=9):
    """A 4,000-note two-handed piece of random notes on two channels (our own)."""
    import mido

    rng = np.random.default_rng(seed)
    song = mido.MidiFile(ticks_per_beat=480)
    for channel, (low, high) in enumerate(((60, 84), (43, 60))):
        track = mido.MidiTrack()
        song.tracks.append(track)
        events = []
        tick = 0
        for _ in range(n_notes // 2):
            note = int(rng.integers(low, high))
            length = int(rng.choice([120, 240, 480]))
            events.append((tick, mido.Message("note_on", channel=channel, note=note, velocity=int(rng.integers(40, 120)))))
            events.append((tick + length, mido.Message("note_off", channel=channel, note=note, velocity=0)))
            tick += int(rng.choice([120, 240]))
        events.sort(key=lambda e: e[0])
        now = 0
        for at, message in events:
            track.append(message.copy(time=at - now))
            now = at
    song.save(str(path))


def midi_bound(song_path, patch_path, work):
    """Engine-only time: every engine call of the render (each segment of each voice), replayed alone.

    The render is run once in this process with ``render_modes`` recording its
    arguments; the bound is the time of those same calls, one after another,
    with nothing else (no voicing, mixing, normalising or writing).
    """
    from synth import voices
    from synth.engine import render_modes
    from synth.midi import render_midi

    calls = []

    def recording(*args, **kwargs):
        calls.append((args, kwargs))
        return render_modes(*args, **kwargs)

    voices.render_modes = recording
    try:
        render_midi(song_path, output=work / "bound.wav", patch=patch_path)
    finally:
        voices.render_modes = render_modes

    def replay():
        for args, kwargs in calls:
            render_modes(*args, **kwargs)

    return best(replay, 2), len(calls)


def bench_midi(work, n_notes):
    song = work / "bench-song.mid"
    write_song(song, n_notes)
    patch = ROOT / "patches" / "string-harp-practice-c4.yaml"
    wall = min(run([*SYNTH, "midi", str(song), "--patch", str(patch), "-o", "song.wav", "-q"], work)[0] for _ in range(2))
    bound, calls = midi_bound(song, patch, work)
    return {"notes": n_notes, "calls": calls, "wall_s": wall, "bound_s": bound}


SOLVE_PATCHES = {
    "string": "string-bass-steel-a1.yaml",
    "uniform bar": "bar-aluminium-chime-a4.yaml",
    "shaped bar": "bar-rosewood-undercut-c4.yaml",
    "membrane": "membrane-frame-drum-d3.yaml",
    "plate": "plate-aluminium-gong-disc.yaml",
    "air column": "air-column-open-conduit.yaml",
}


def bench_solves(repeats):
    from synth.patch import load_patch
    from synth.resonators import resonator_module
    from synth.resonators import bar_fe
    from synth.resonators.plate_circle import _circle_table

    rows = {}
    for kind, name in SOLVE_PATCHES.items():
        spec = load_patch(ROOT / "patches" / name).resonator
        module = resonator_module(spec.TYPE)
        times = []
        for n_modes in (64, 256):
            def once():
                _circle_table.cache_clear()  # a fresh solve: no memo of the plate's Bessel table
                bar_fe.spec_modes.cache_clear()  # nor of a bar's finite-element solve
                module.solve(spec, n_modes)
            times.append(best(once, repeats) * 1e3)
        rows[kind] = times
    return rows


def bench_many_modes(work):
    patch = work / "many.yaml"
    patch.write_text(textwrap.dedent("""\
        name: many-modes
        resonator:
          type: string
          material: {density: 1140, youngs_modulus: 0}   # an ideal (limp) string: every mode below Nyquist
          length: 1.2 m
          diameter: 0.5 mm
          pitch: 15 Hz
        render: {sample_rate: 768000, max_modes: 20000}
        """))
    wall, rss, proc = run([*SYNTH, "modes", str(patch)], work)
    first = proc.stdout.splitlines()[0]
    return {"wall_s": wall, "peak_rss_mib": rss, "header": first}


def bench_short_render(limit):
    from synth.engine import render_modes

    rng = np.random.default_rng(0)
    f, t60 = rng.uniform(40, 20000, 64), rng.uniform(0.1, 9.0, 64)
    a, phase = rng.uniform(0, 1, 64), rng.uniform(0, 2 * np.pi, 64)
    render_modes(f, t60, a, 1.0, 48000, phase=phase)
    seconds = best(lambda: render_modes(f, t60, a, 1.0, 48000, phase=phase), 200)
    return {"ms": seconds * 1e3, "percent_of_limit": 100.0 * 4 * 64 * 48000 / seconds / limit}


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a 16-note library and a 1,000-note MIDI file")
    args = parser.parse_args(argv)
    print(f"CPU pressure at start: {pressure()} %")
    limit = matmul_limit(4096, 5)
    work = Path(tempfile.mkdtemp(prefix="synth-e2e-"))
    library = bench_library(work, "D#4" if args.quick else "C7", 2)
    print(f"library: {library['files']} files on 2 workers {library['forced_s']:.2f} s (best forced re-run; "
          f"first run {library['first_s']:.2f} s) = {library['forced_s'] / library['bound_s']:.2f}x its serial "
          f"engine+write bound {library['bound_s']:.2f} s; idle re-run {library['idle_s']:.2f} s = "
          f"{library['idle_s'] / library['bound_s']:.2f}x")
    song = bench_midi(work, 1000 if args.quick else 4000)
    print(f"midi: {song['notes']} notes {song['wall_s']:.2f} s = {song['wall_s'] / song['bound_s']:.2f}x its "
          f"engine-only bound {song['bound_s']:.2f} s ({song['calls']} engine calls)")
    for kind, (t64, t256) in bench_solves(3 if args.quick else 7).items():
        print(f"solve {kind:12s} 64 modes {t64:7.2f} ms   256 modes {t256:7.2f} ms")
    many = bench_many_modes(work)
    print(f"synth modes, 20,000-mode string: {many['wall_s']:.2f} s, peak RSS {many['peak_rss_mib']:.0f} MiB "
          f"({many['header']})")
    short = bench_short_render(limit)
    print(f"short render: 64 modes x 1 s at 48 kHz {short['ms']:.3f} ms = {short['percent_of_limit']:.0f}% of the "
          f"matmul limit ({limit / 1e9:.0f} GFLOP/s)")
    print(f"CPU pressure at end: {pressure()} %")


if __name__ == "__main__":
    main()
