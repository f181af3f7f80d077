"""Benchmark of synth.engine.render_modes (issue 4).

Run from the repository root (with synth installed, or PYTHONPATH=.):

    python benchmarks/engine.py            # full table, about 1 minute
    python benchmarks/engine.py --quick    # two sizes, fewer repeats, < 10 s
    python benchmarks/engine.py --sweep    # block size / chunk / BLAS-thread sweep

For each (modes, duration) at 48 kHz with the issue's random bank
(frequencies 40 Hz - 20 kHz, T60 0.1 - 9 s, phases 0 - 2 pi, amplitudes
0 - 1), it prints:

* engine time (best of N) and mode-samples per second;
* the fraction of the float32 matrix-multiply limit, counting 4 flops per
  mode-sample; the limit is the best rate of a 4096 x 4096 float32 matmul
  measured in the same run (at its start and end; the higher is used).  Also
  with ``floor=0`` (skipping only below the absolute MIN_ENVELOPE = 1e-20);
* the share of mode-samples actually computed (work skipping);
* speed ratios to a per-mode numpy loop of exp x sin (float32 and float64),
  and to scipy.signal.lfilter driving one two-pole resonator per mode with an
  impulse.  To be conservative the baselines get the engine's work skipping
  too (each mode runs only until the engine would drop it; this also keeps
  them out of subnormal arithmetic).  Their cost is a sum over modes, so they
  are timed on 8 modes spread over the lifetime distribution and scaled by
  the ratio of total lifetimes;
* accuracy: max |engine - reference| over the first and the last 4096
  samples, where the reference is a float64 evaluation of the closed form,
  in dB relative to the reference peak over the first window (the signal's
  peak, as every mode decays) and, for the end, also relative to the peak of
  the last window itself;
* memory, in a fresh subprocess: growth of the peak resident set during
  the render (VmHWM after, reset through /proc/self/clear_refs just before,
  minus VmRSS before: numpy, BLAS buffers, the written part of the output,
  everything), the output size, and the tracemalloc peak (numpy only).
  Output pages the render never writes (chunks where every mode is dead) stay
  unmapped, so a final check renders 10 minutes of 256 modes that all live
  to the end (T60 60 - 600 s) and reports RSS growth minus output = memory
  beyond the output, with its speed and its accuracy at the end.

Timings are the best of several repeats because the machine is shared.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import subprocess
import sys
import time
import tracemalloc

import numpy as np
from scipy.signal import lfilter

from synth import engine
from synth.engine import render_modes

FS = 48000  # Hz
SIZES = [(64, 1.0), (512, 1.0), (128, 10.0), (512, 10.0), (1024, 10.0), (256, 600.0)]
QUICK_SIZES = [(512, 10.0), (256, 60.0)]
BASELINE_MODES = 8  # modes actually run by the per-mode baselines
WINDOW = 4096  # samples checked against the float64 reference at each end
LN_1000 = math.log(1000.0)


def bank(m, seed=0):
    """Random modes as in issue 4."""
    rng = np.random.default_rng(seed)
    return (
        rng.uniform(40.0, 20000.0, m),
        rng.uniform(0.1, 9.0, m),
        rng.uniform(0.0, 1.0, m),
        rng.uniform(0.0, 2 * np.pi, m),
    )


def best_time(fn, repeats):
    best = math.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def matmul_limit(n, repeats):
    """Best float32 flop rate of an n x n matmul (2 n^3 flops)."""
    rng = np.random.default_rng(1)
    a = rng.standard_normal((n, n)).astype(np.float32)
    b = rng.standard_normal((n, n)).astype(np.float32)
    out = np.empty((n, n), np.float32)
    np.matmul(a, b, out=out)
    return 2.0 * n**3 / best_time(lambda: np.matmul(a, b, out=out), repeats)


def lifetimes(f, t60, a, n, fs):
    """Samples each mode is computed for: up to the engine's skip point."""
    sigma, _ = engine._exponents(f, t60, fs)
    death = engine._death_samples(np.abs(a), sigma, engine.DEFAULT_FLOOR)
    return np.clip(np.ceil(death), 0, n).astype(np.int64)


def loop_render(f, t60, a, ph, life, n, fs, dtype):
    """Per-mode numpy loop of exp x sin, each mode over its lifetime."""
    t = (np.arange(n) / fs).astype(dtype)
    y = np.zeros(n, dtype)
    for fm, tm, am, pm, lm in zip(f, t60, a, ph, life):
        tt = t[:lm]
        env = np.exp(dtype(-LN_1000 / tm) * tt)
        y[:lm] += dtype(am) * env * np.sin(dtype(2 * np.pi * fm) * tt + dtype(pm))
    return y


def lfilter_render(f, t60, a, ph, life, n, fs):
    """One two-pole resonator per mode driven by a unit impulse (float64).

    a r^n sin(w n + phi) has H(z) = (b0 + b1 z^-1) / (1 - 2 r cos w z^-1 + r^2 z^-2)
    with b0 = a sin(phi), b1 = a r sin(w - phi).  Run over each mode's
    lifetime (past it the recursion would crawl through float64 subnormals).
    """
    x = np.zeros(n)
    x[0] = 1.0
    y = np.zeros(n)
    for fm, tm, am, pm, lm in zip(f, t60, a, ph, life):
        w = 2 * np.pi * fm / fs
        r = math.exp(-LN_1000 / (tm * fs))
        b = [am * math.sin(pm), am * r * math.sin(w - pm)]
        y[:lm] += lfilter(b, [1.0, -2 * r * math.cos(w), r * r], x[:lm])
    return y


def closed_form(f, t60, a, ph, fs, idx):
    """float64 evaluation of the closed form at sample indices idx."""
    t = idx / fs
    y = np.zeros(idx.size)
    for fm, tm, am, pm in zip(f, t60, a, ph):
        y += am * np.exp(-LN_1000 * t / tm) * np.sin(2 * np.pi * fm * t + pm)
    return y


def accuracy(y, f, t60, a, ph, fs):
    """(start dB, end dB re signal peak, end dB re end-window peak)."""
    n = y.size
    w = min(WINDOW, n)
    head, tail = np.arange(w), np.arange(n - w, n)
    rh = closed_form(f, t60, a, ph, fs, head)
    rt = closed_form(f, t60, a, ph, fs, tail)
    peak = np.max(np.abs(rh))

    def db(err, ref):
        return max(20 * math.log10(max(err, 1e-300) / ref), -200.0)  # shown as -200

    eh = np.max(np.abs(y[head] - rh))
    et = np.max(np.abs(y[tail] - rt))
    return db(eh, peak), db(et, peak), db(et, np.max(np.abs(rt)))


def computed_share(f, t60, a, n, fs, floor=engine.DEFAULT_FLOOR):
    """Share of the M x N mode-samples the engine actually puts in GEMMs."""
    sigma, _ = engine._exponents(f, t60, fs)
    death = engine._death_samples(np.abs(a), sigma, floor)
    block = engine._choose_block(n)
    span = block * engine.CHUNK_BLOCKS
    work = sum(int(np.sum(death > s)) * min(span, n - s) for s in range(0, n, span))
    return work / (f.size * n)


def _status_kib(field):
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith(field + ":"):
                return int(line.split()[1])
    raise RuntimeError(f"{field} not in /proc/self/status")


def memory_probe(m, dur, t60_range):
    """Child process: memory of one render (JSON, bytes).

    rss_growth: peak resident set (VmHWM, reset via /proc/self/clear_refs just
    before the render) minus the resident set before it -- everything the
    process touched: numpy temporaries and the engine's reusable scratch,
    BLAS buffers, the written output.  traced: tracemalloc peak of a second
    render with the scratch dropped first (numpy allocations only).
    """
    f, t60, a, ph = bank(m)
    t60 = np.random.default_rng(2).uniform(*t60_range, m) if t60_range else t60
    render_modes(f[:1], t60[:1], a[:1], 0.01, FS, ph[:1])  # start BLAS, tiny scratch
    engine._clear_workspace()
    with open("/proc/self/clear_refs", "w") as fh:
        fh.write("5")  # reset the peak-RSS mark to the current RSS
    before = _status_kib("VmRSS")
    y = render_modes(f, t60, a, dur, FS, ph)
    growth = (_status_kib("VmHWM") - before) * 1024
    out_bytes = y.nbytes
    del y
    engine._clear_workspace()  # count the scratch buffers in the traced peak
    tracemalloc.start()
    render_modes(f, t60, a, dur, FS, ph)  # the traced peak includes its output
    traced = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    print(json.dumps({"rss_growth": growth, "traced": traced, "output": out_bytes}))


def measure_memory(m, dur, t60_range=None):
    cmd = [sys.executable, __file__, "--memory-probe", str(m), str(dur)]
    if t60_range:
        cmd += [str(v) for v in t60_range]
    out = subprocess.run(cmd, capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def cpu_pressure():
    """Linux PSI 'some avg10' for the CPU: % of time runnable tasks waited."""
    try:
        with open("/proc/pressure/cpu") as fh:
            return fh.readline().split()[1].split("=")[1] + "%"
    except (OSError, IndexError):
        return "n/a"


def environment():
    try:
        from threadpoolctl import threadpool_info

        blas = [
            f"{i['internal_api']} {i['version']} {i.get('architecture')} "
            f"threads={i['num_threads']}"
            for i in threadpool_info()
            if i["user_api"] == "blas"
        ]
    except ImportError:
        blas = ["threadpoolctl not installed"]
    return (
        f"python {platform.python_version()}, numpy {np.__version__}, cpus {os.cpu_count()}, "
        f"{'; '.join(blas)}, OPENBLAS_CORETYPE={os.environ.get('OPENBLAS_CORETYPE', '(unset)')}"
    )


def baseline_subset(life, k):
    """k modes spread over the lifetime distribution, and the scale to all M."""
    order = np.argsort(life, kind="stable")
    pick = order[np.linspace(0, life.size - 1, k).round().astype(int)]
    return pick, life.sum() / max(life[pick].sum(), 1)


def measure_size(m, dur, repeats, base_repeats):
    """All figures for one (modes, duration) row; times in seconds."""
    f, t60, a, ph = bank(m)
    n = round(dur * FS)
    y = render_modes(f, t60, a, dur, FS, ph)
    y0 = render_modes(f, t60, a, dur, FS, ph, floor=0.0)

    def engine_times():  # engine and floor=0, best over spread-out repeats
        return (
            best_time(lambda: render_modes(f, t60, a, dur, FS, ph), repeats),
            best_time(lambda: render_modes(f, t60, a, dur, FS, ph, floor=0.0), repeats),
        )

    t_eng, t_exact = engine_times()
    life = lifetimes(f, t60, a, n, FS)
    pick, scale = baseline_subset(life, min(m, BASELINE_MODES))
    sub = (f[pick], t60[pick], a[pick], ph[pick], life[pick], n, FS)
    t_l32 = best_time(lambda: loop_render(*sub, np.float32), base_repeats) * scale
    t_l64 = best_time(lambda: loop_render(*sub, np.float64), base_repeats) * scale
    t_lf = best_time(lambda: lfilter_render(*sub), base_repeats) * scale
    t_eng, t_exact = (min(x, y) for x, y in zip((t_eng, t_exact), engine_times()))
    start_db, end_db, _ = accuracy(y, f, t60, a, ph, FS)
    _, _, end_local = accuracy(y0, f, t60, a, ph, FS)
    tail_peak = np.max(np.abs(closed_form(f, t60, a, ph, FS, np.arange(n - WINDOW, n))))
    head_peak = np.max(np.abs(closed_form(f, t60, a, ph, FS, np.arange(WINDOW))))
    return dict(
        m=m, dur=dur, n=n, t_eng=t_eng, t_exact=t_exact, t_l32=t_l32, t_l64=t_l64, t_lf=t_lf,
        computed=computed_share(f, t60, a, n, FS), start_db=start_db, end_db=end_db,
        end_local=f"{end_local:.1f}" if tail_peak > 1e-7 * head_peak else "(decayed)",
        mem=measure_memory(m, dur),
    )


def measure_long(repeats):
    """10 minutes of 256 modes that all live to the end: speed, drift, memory."""
    m, dur, t60_range = 256, 600.0, (60.0, 600.0)
    f, _, a, ph = bank(m)
    t60 = np.random.default_rng(2).uniform(*t60_range, m)  # same draw as the probe
    n = round(dur * FS)
    y = render_modes(f, t60, a, dur, FS, ph)
    t_eng = best_time(lambda: render_modes(f, t60, a, dur, FS, ph), repeats)
    start_db, end_db, _ = accuracy(y, f, t60, a, ph, FS)
    del y
    _, _, end_local = accuracy(render_modes(f, t60, a, dur, FS, ph, floor=0.0), f, t60, a, ph, FS)
    return dict(
        m=m, dur=dur, n=n, t60_range=t60_range, t_eng=t_eng, start_db=start_db, end_db=end_db,
        end_local=end_local, computed=computed_share(f, t60, a, n, FS),
        mem=measure_memory(m, dur, t60_range),
    )


def run_table(sizes, repeats, base_repeats, limit_n):
    pressure_start = cpu_pressure()
    limit_start = matmul_limit(limit_n, repeats)
    rows = []
    for m, dur in sizes:
        print(f"measuring {m} modes x {dur:g} s ...", file=sys.stderr, flush=True)
        rows.append(measure_size(m, dur, repeats, base_repeats))
    print("measuring the long render ...", file=sys.stderr, flush=True)
    long = measure_long(max(3, repeats // 3))
    limit_end = matmul_limit(limit_n, repeats)
    limit = max(limit_start, limit_end)  # the machine's limit: the better of the two

    print(environment())
    print(
        f"CPU pressure (PSI some avg10): {pressure_start} at start, {cpu_pressure()} at end; "
        f"float32 matmul limit ({limit_n}^2, best of {repeats}): {limit_start / 1e9:.0f} GFLOP/s "
        f"at start, {limit_end / 1e9:.0f} at end; percentages use {limit / 1e9:.0f}"
    )
    head = (
        "| modes | seconds | ms | M mode-samples/s | % of matmul limit | same, floor=0 "
        "| computed % | x loop f32 | x loop f64 | x lfilter | start dB | end dB "
        "| end dB local, floor=0 | RSS growth MiB | output MiB | traced MiB |"
    )
    print()
    print(head)
    print("|" + "---|" * (head.count("|") - 1))
    for r in rows:
        rate = r["m"] * r["n"] / r["t_eng"]
        mem = r["mem"]
        print(
            f"| {r['m']} | {r['dur']:g} | {r['t_eng'] * 1e3:.2f} | {rate / 1e6:.0f} "
            f"| {400 * rate / limit:.0f} | {400 * r['m'] * r['n'] / r['t_exact'] / limit:.0f} "
            f"| {100 * r['computed']:.0f} | {r['t_l32'] / r['t_eng']:.0f} "
            f"| {r['t_l64'] / r['t_eng']:.0f} | {r['t_lf'] / r['t_eng']:.0f} "
            f"| {r['start_db']:.1f} | {r['end_db']:.1f} | {r['end_local']} "
            f"| {mem['rss_growth'] / 2**20:.1f} | {mem['output'] / 2**20:.1f} "
            f"| {mem['traced'] / 2**20:.1f} |"
        )
    r, mem = long, long["mem"]
    lo, hi = r["t60_range"]
    print(
        f"\nLong render, {r['m']} modes x {r['dur']:g} s, T60 {lo:g}-{hi:g} s "
        "(every mode alive to the end, so the whole output is written):\n"
    )
    print(
        "| ms | % of matmul limit | computed % | start dB | end dB | end dB local, floor=0 "
        "| RSS growth - output MiB | traced - output MiB |"
    )
    print("|---|---|---|---|---|---|---|---|")
    print(
        f"| {r['t_eng'] * 1e3:.0f} | {400 * r['m'] * r['n'] / r['t_eng'] / limit:.0f} "
        f"| {100 * r['computed']:.0f} | {r['start_db']:.1f} | {r['end_db']:.1f} "
        f"| {r['end_local']:.1f} | {(mem['rss_growth'] - mem['output']) / 2**20:.1f} "
        f"| {(mem['traced'] - mem['output']) / 2**20:.1f} |"
    )


def run_sweep(rounds):
    """Block size, chunk length and BLAS threads at 512 modes x 10 s.

    Configurations are timed round-robin (one render each per round, best
    over the rounds), so bursts of load on the shared machine hit them alike.
    """
    from threadpoolctl import threadpool_limits

    m, dur = 512, 10.0
    f, t60, a, ph = bank(m)
    n = round(dur * FS)
    limit = matmul_limit(4096, 5)
    print(environment())
    print(f"CPU pressure (PSI some avg10) at start: {cpu_pressure()}")
    print(f"float32 matmul limit: {limit / 1e9:.0f} GFLOP/s; {m} modes x {dur:g} s at {FS} Hz")
    configs = [
        (threads, block, chunk)
        for threads in (None, 1)
        for block in (256, 512, 1024)
        for chunk in (128, 256, 512)
    ]
    best = dict.fromkeys(configs, math.inf)
    for _ in range(rounds):
        for cfg in configs:
            threads, block, chunk = cfg
            with threadpool_limits(limits=threads, user_api="blas"):
                t = best_time(
                    lambda: render_modes(
                        f, t60, a, dur, FS, ph, block_size=block, chunk_blocks=chunk
                    ),
                    1,
                )
            best[cfg] = min(best[cfg], t)
    print("\n| BLAS threads | block B | chunk blocks | time ms | % matmul limit |")
    print("|---|---|---|---|---|")
    for (threads, block, chunk), t in best.items():
        label = "all" if threads is None else threads
        print(f"| {label} | {block} | {chunk} | {t * 1e3:.2f} | {400 * m * n / t / limit:.0f} |")
    print(f"\nCPU pressure at end: {cpu_pressure()}")


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--quick", action="store_true", help="two sizes, fewer repeats (~30 s)")
    p.add_argument("--sweep", action="store_true", help="block/chunk/thread sweep at 512 x 10 s")
    p.add_argument("--repeats", type=int, default=None, help="repeats/rounds (best is kept)")
    p.add_argument("--memory-probe", nargs="+", help=argparse.SUPPRESS)
    args = p.parse_args()
    if args.memory_probe:
        probe = args.memory_probe
        t60_range = tuple(float(v) for v in probe[2:]) or None
        memory_probe(int(probe[0]), float(probe[1]), t60_range)
    elif args.sweep:
        run_sweep(args.repeats or 25)
    elif args.quick:
        run_table(QUICK_SIZES, args.repeats or 5, 1, 2048)
    else:
        run_table(SIZES, args.repeats or 10, 2, 4096)


if __name__ == "__main__":
    main()
