"""Benchmark of the modal estimator (issue 15): read a 3 s mono WAV at 48 kHz and estimate its partials.

The note is 30 inharmonic partials (100 Hz-15 kHz, T60 0.2-5 s, 0..-40 dB,
independent numpy closed form, not synth's engine) plus white noise 40 dB
below the note's rms, written as 24-bit PCM.  The figure is the best of 3
runs of ``soundfile.read`` + :func:`synth.analysis.estimate.estimate_partials`
(the issue's target: under 2 s on this machine).  Run from the repository root:

    PYTHONPATH=. python benchmarks/fit.py            # or: .venv/bin/python benchmarks/fit.py
    PYTHONPATH=. python benchmarks/fit.py --repeats 5 --seconds 3 --partials 30
"""
from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time

import numpy as np
import soundfile

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

from synth.analysis.estimate import estimate_partials  # noqa: E402

LN1000 = np.log(1000.0)


def make_note(seconds, n_partials, fs, seed=2024):
    rng = np.random.default_rng(seed)
    while True:
        freq = np.sort(np.exp(rng.uniform(np.log(100.0), np.log(15000.0), n_partials)))
        if np.all(1200 * np.diff(np.log2(freq)) > 30):
            break
    t60 = np.exp(rng.uniform(np.log(0.2), np.log(5.0), n_partials))
    amp = 0.02 * 10 ** (rng.uniform(-40.0, 0.0, n_partials) / 20)
    phase = rng.uniform(0, 2 * np.pi, n_partials)
    t = np.arange(int(seconds * fs)) / fs
    x = np.zeros(len(t))
    for f, d, a, p in zip(freq, t60, amp, phase):
        x += a * np.exp(-LN1000 * t / d) * np.sin(2 * np.pi * f * t + p)
    x += 0.01 * np.sqrt(np.mean(x**2)) * rng.standard_normal(len(t))
    return x, freq, t60


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=3.0)
    parser.add_argument("--partials", type=int, default=30)
    parser.add_argument("--rate", type=int, default=48000)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args(argv)
    x, freq, t60 = make_note(args.seconds, args.partials, args.rate)
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "note.wav")
        soundfile.write(path, x, args.rate, subtype="PCM_24")
        times = []
        for _ in range(args.repeats):
            start = time.perf_counter()
            data, rate = soundfile.read(path, dtype="float64")
            estimate = estimate_partials(data, sample_rate=rate, source=path)
            times.append(time.perf_counter() - start)
    nearest = np.array([np.argmin(np.abs(estimate.frequency_hz - f)) for f in freq])
    cents = np.abs(1200 * np.log2(estimate.frequency_hz[nearest] / freq))
    found = cents < 5
    t60_error = np.abs(estimate.t60_s[nearest] / t60 - 1)[found]
    print(f"{args.seconds:g} s mono at {args.rate} Hz, {args.partials} partials + noise 40 dB down, 24-bit WAV")
    print(f"read + estimate_partials: best {min(times):.3f} s of {args.repeats} "
          f"(all: {', '.join(f'{t:.3f}' for t in times)})")
    print(f"{estimate!r}; {estimate.method}")
    print(f"found {found.sum()} of {len(freq)} partials ({len(estimate)} reported, rejected {estimate.rejected}); "
          f"worst found: {cents[found].max():.3f} cent, T60 {100 * t60_error.max():.1f} %")


if __name__ == "__main__":
    main()
