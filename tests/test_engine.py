"""Correctness tests for synth.engine.render_modes (no timing assertions).

Unless a test says otherwise, the source of truth is a float64 evaluation of
the closed form y(t) = sum_m a_m exp(-ln(1000) t / T60_m) sin(2 pi f_m t + phi_m),
t = n / fs, computed directly sample by sample in ``closed_form`` below
(independent of the engine's block/GEMM method).  Errors are measured in dB
relative to the peak of that reference over the checked window, unless noted.
"""

from __future__ import annotations

import math
import tracemalloc

import numpy as np
import pytest

from synth import engine
from synth.engine import render_modes

LN_1000 = math.log(1000.0)
ACCURACY_DB = -100.0  # issue 4 target: error within -100 dB of the float64 reference


def closed_form(f, t60, a, fs, phase, n):
    """float64 evaluation of the closed form at integer sample indices ``n``."""
    t = np.asarray(n, dtype=np.float64) / fs
    y = np.zeros(t.shape)
    for fm, tm, am, pm in zip(f, t60, a, phase):
        y += am * np.exp(-LN_1000 * t / tm) * np.sin(2 * np.pi * fm * t + pm)
    return y


def err_db(y, ref, scale=None):
    """Max abs error in dB relative to ``scale`` (default: peak of ``ref``)."""
    scale = np.max(np.abs(ref)) if scale is None else scale
    err = np.max(np.abs(np.asarray(y, np.float64) - ref))
    return -math.inf if err == 0 else 20 * math.log10(err / scale)


def random_bank(m, seed, f_max=20000.0, t60=(0.1, 9.0)):
    rng = np.random.default_rng(seed)
    f = rng.uniform(40.0, f_max, m)
    t = rng.uniform(*t60, m)
    a = rng.uniform(-1.0, 1.0, m)
    ph = rng.uniform(0, 2 * np.pi, m)
    return f, t, a, ph


def test_random_bank_matches_closed_form_everywhere():
    f, t, a, ph = random_bank(64, 1, f_max=7900.0)
    fs, dur = 16000, 2.0
    y = render_modes(f, t, a, dur, fs, ph)
    ref = closed_form(f, t, a, fs, ph, np.arange(y.size))
    assert err_db(y, ref) < ACCURACY_DB
    assert err_db(y, ref, np.sum(np.abs(a))) < -120  # scale: sum|a| bounds the peak


def test_long_render_has_no_drift_at_the_end():
    # 10 minutes at 8 kHz (4.8 M samples, ~18 k blocks): the block states come
    # from one float64 exp each, so the last window is as exact as the first.
    fs, dur = 8000, 600.0
    f = np.array([55.0, 440.0, 1234.5, 3999.0, 2500.0, 100.0])
    t60 = np.array([np.inf, np.inf, 900.0, 2000.0, 400.0, 5.0])
    a = np.array([0.5, -0.3, 0.2, 0.1, 0.25, 1.0])
    ph = np.array([0.1, 1.0, 2.0, 3.0, 4.0, 5.0])
    y = render_modes(f, t60, a, dur, fs, ph)
    assert y.shape == (round(dur * fs),)
    head = np.arange(0, 4000)
    tail = np.arange(y.size - 4000, y.size)
    ref_head = closed_form(f, t60, a, fs, ph, head)
    ref_tail = closed_form(f, t60, a, fs, ph, tail)
    peak = np.max(np.abs(ref_head))
    assert err_db(y[head], ref_head) < ACCURACY_DB
    assert err_db(y[tail], ref_tail, peak) < ACCURACY_DB
    # stricter: relative to the (still loud, T60 = inf) tail itself
    assert err_db(y[tail], ref_tail) < ACCURACY_DB


def test_output_is_float32_with_rounded_length():
    for dur, fs in [(0.1234, 44100), (1.0, 48000), (0.5, 7), (2.5e-4, 10000)]:
        y = render_modes([100.0], [1.0], [1.0], dur, fs)
        assert y.dtype == np.float32
        assert y.ndim == 1
        assert y.size == round(dur * fs)


def test_zero_modes_give_silence_of_the_right_length():
    y = render_modes([], [], [], 0.25, 8000)
    assert y.dtype == np.float32 and y.shape == (2000,)
    assert not y.any()
    assert render_modes([], [], [], 0.0, 8000).shape == (0,)
    assert render_modes([440.0], [1.0], [1.0], 0.0, 8000).shape == (0,)


def test_one_mode_matches_closed_form():
    fs = 8000
    y = render_modes([440.0], [0.5], [0.8], 1.0, fs, [0.3])
    ref = closed_form([440.0], [0.5], [0.8], fs, [0.3], np.arange(fs))
    assert err_db(y, ref) < ACCURACY_DB


def test_phase_none_means_zero_and_lists_are_accepted():
    y1 = render_modes([220, 330], [1, 2], [1, 0.5], 0.1, 8000)
    y2 = render_modes(np.array([220.0, 330.0]), [1.0, 2.0], [1.0, 0.5], 0.1, 8000, [0.0, 0.0])
    np.testing.assert_array_equal(y1, y2)
    assert y1[0] == 0.0  # sin(0) = 0 for every mode


def test_extreme_t60s():
    fs = 8000
    f = np.array([300.0, 700.0, 1100.0, 1500.0, 1900.0])
    t60 = np.array([1e-6, 1e-4, 1e-2, 1e6, np.inf])
    a = np.array([1.0, 1.0, 1.0, 0.5, 0.5])
    ph = np.array([1.0, 2.0, 0.5, 0.7, 0.9])
    y = render_modes(f, t60, a, 3.0, fs, ph)
    n = np.arange(y.size)
    ref = closed_form(f, t60, a, fs, ph, n)
    assert err_db(y, ref) < ACCURACY_DB
    # the 1 us mode only exists at n = 0, where it contributes a sin(phi)
    y0 = render_modes(f[:1], t60[:1], a[:1], 0.01, fs, ph[:1])
    assert y0[0] == pytest.approx(math.sin(1.0), rel=1e-6)
    assert not y0[1:].any()
    # undamped: constant envelope to the very end
    yi = render_modes([1000.0], [np.inf], [1.0], 60.0, fs, [math.pi / 2])
    tail = np.arange(yi.size - 1000, yi.size)
    assert err_db(yi[tail], closed_form([1000.0], [np.inf], [1.0], fs, [math.pi / 2], tail)) < -120


def test_modes_near_and_above_nyquist_follow_the_formula():
    fs = 8000
    f = np.array([3999.0, 3999.9, 4000.0, 4100.0, 7999.0])
    t60 = np.full(5, 2.0)
    a = np.ones(5)
    ph = np.array([0.3, 0.6, 0.9, 1.2, 1.5])
    y = render_modes(f, t60, a, 1.0, fs, ph)
    ref = closed_form(f, t60, a, fs, ph, np.arange(y.size))
    assert err_db(y, ref) < ACCURACY_DB
    # exactly at Nyquist: sin(pi n + phi) = (-1)^n sin(phi)
    y_n = render_modes([4000.0], [np.inf], [1.0], 0.01, fs, [0.9])
    expect = (-1.0) ** np.arange(y_n.size) * math.sin(0.9)
    assert np.max(np.abs(y_n - expect)) < 1e-6


@pytest.mark.parametrize("block", [1, 32, 48, 100, 512])
@pytest.mark.parametrize("chunk", [1, 3, 256])
def test_block_and_chunk_sizes_do_not_change_the_result(block, chunk):
    # odd lengths exercise the partial last block and partial last chunk
    f, t, a, ph = random_bank(17, 2, f_max=3900.0, t60=(0.05, 3.0))
    fs, dur = 8000, 0.7777
    y = render_modes(f, t, a, dur, fs, ph, block_size=block, chunk_blocks=chunk)
    ref = closed_form(f, t, a, fs, ph, np.arange(y.size))
    assert err_db(y, ref) < ACCURACY_DB


def test_many_modes_in_several_groups(monkeypatch):
    monkeypatch.setattr(engine, "GROUP_MODES", 5)  # 23 modes -> 5 passes, 4 accumulate
    f, t, a, ph = random_bank(23, 3, f_max=3900.0)
    fs = 8000
    y = render_modes(f, t, a, 1.3, fs, ph, block_size=64, chunk_blocks=4)
    ref = closed_form(f, t, a, fs, ph, np.arange(y.size))
    assert err_db(y, ref) < ACCURACY_DB


def test_work_skipping_error_is_bounded_by_the_floor():
    # Loud short modes and quiet long ones: with a coarse floor most work is
    # skipped; the error stays below floor * sum|a| (plus float32 rounding).
    f, t, a, ph = random_bank(40, 4, f_max=3900.0, t60=(0.02, 1.0))
    fs = 8000
    n = np.arange(round(2.0 * fs))
    ref = closed_form(f, t, a, fs, ph, n)
    total = np.sum(np.abs(a))
    for floor in (1e-2, 1e-4, engine.DEFAULT_FLOOR):
        y = render_modes(f, t, a, 2.0, fs, ph, floor=floor, block_size=32, chunk_blocks=2)
        assert np.max(np.abs(y - ref)) <= floor * total + 1e-6 * total
    exact = render_modes(f, t, a, 2.0, fs, ph, floor=0.0)
    assert err_db(exact, ref) < ACCURACY_DB


def test_death_samples_match_the_envelope_threshold():
    # analytic check: |a| exp(-sigma n*) equals floor * sum|a| / M at n*
    a = np.array([1.0, 0.5, 1e-3, 0.0, 0.2])
    sigma = np.array([1e-3, 1e-2, 1e-1, 1e-3, 0.0])
    floor = 1e-6
    death = engine._death_samples(a, sigma, floor)
    thr = floor * a.sum() / a.size
    np.testing.assert_allclose(a[:3] * np.exp(-sigma[:3] * death[:3]), thr, rtol=1e-12)
    assert death[3] == -1.0  # zero amplitude: never computed
    assert death[4] == np.inf  # T60 = inf: never dropped
    # an undamped mode below the floor is still never dropped
    assert engine._death_samples(np.array([1.0, 1e-12]), np.array([1e-3, 0.0]), 1e-3)[1] == np.inf


def test_dead_modes_are_left_out_of_later_chunks(monkeypatch):
    # Structural check of "stops costing anything": record the GEMM operand
    # widths; once the short modes die they are no longer in the product.
    widths = []
    real = engine._chunk_states

    def spy(s, coef, table, start, kc, block, death, live):
        widths.append(live)
        return real(s, coef, table, start, kc, block, death, live)

    monkeypatch.setattr(engine, "_chunk_states", spy)
    f = [100.0, 200.0, 300.0, 400.0]
    t60 = [0.01, 0.02, 5.0, np.inf]
    render_modes(f, t60, [1.0] * 4, 2.0, 8000, block_size=64, chunk_blocks=4)
    assert widths[0] == 4
    assert widths[-1] == 2


def test_powers_are_float64_accurate():
    # Source: x87 extended-precision (np.longdouble, 64-bit mantissa) exp of
    # n * s.  The doubling table may lose a few ulp per row index j, scaled by
    # the phase step |3 s| (as a direct float64 exp of the rounded n * s does).
    rng = np.random.default_rng(5)
    s = -rng.uniform(0, 1e-3, 7) + 1j * rng.uniform(0, np.pi, 7)
    n = 3 * np.arange(1000)[:, None]
    p = engine._powers(s, 1000, 3)
    exact = np.exp(n.astype(np.longdouble) * s.astype(np.clongdouble))
    err = np.abs(p - exact) / np.abs(exact)
    j = np.arange(1000)[:, None]
    assert np.all(err <= 4.4e-16 * (1 + j) * (1 + 3 * np.abs(s)))
    assert err.max() < 1e-11


def test_power_matrix_and_states_are_float32_accurate_and_normal():
    rng = np.random.default_rng(6)
    sigma = np.concatenate([rng.uniform(0, 1e-3, 6), [0.5, 5.0, 300.0]])  # last: fast decays
    s = -sigma + 1j * rng.uniform(0, np.pi, sigma.size)
    for count, step in [(512, 1), (256, 512), (37, 1)]:
        p = engine._power_matrix(s, count, step, "first")
        assert p.dtype == np.complex64 and p.shape == (count, s.size)
        direct = np.exp(np.arange(count)[:, None] * step * s)
        big = np.abs(direct) >= engine.FACTOR_FLUSH
        assert np.max(np.abs(p - direct)[big]) < 1e-6
        assert np.max(np.abs(p - direct)[~big], initial=0) < engine.FACTOR_FLUSH
        # subnormal float32 makes sgemm ~50x slower: none may appear
        mag = np.abs(p.view(np.float32))
        assert not np.any((mag > 0) & (mag < np.finfo(np.float32).tiny))
    # chunk states at the end of 10 min at 48 kHz: source is an x87
    # extended-precision exp of n * s (slow decays so nothing underflows)
    s = -rng.uniform(0, 1e-8, 6) + 1j * rng.uniform(0, np.pi, 6)
    start, block, kc = 28_800_000, 64, 4
    coef = np.full(s.size, 1j)  # i conj(a e^{i phi}) for a = 1, phi = 0
    death = np.full(s.size, np.inf)
    table = engine._power_matrix(np.conj(s), kc, block, "table")
    u = engine._chunk_states(s, coef, table, start, kc, block, death, s.size)
    n = start + block * np.arange(kc)[:, None]
    expect = 1j * np.conj(np.exp(n.astype(np.longdouble) * s.astype(np.clongdouble)))
    got = u.view(np.complex64)
    assert np.max(np.abs(got - expect)) < 1e-6 * np.max(np.abs(expect))


def test_memory_is_bounded_independently_of_duration():
    # tracemalloc sees numpy allocations (not BLAS-internal buffers); the
    # benchmark measures whole-process RSS as well.
    f, t, a, ph = random_bank(256, 7, f_max=3900.0, t60=(1.0, 1e4))
    fs, dur = 8000, 600.0  # 10 minutes
    engine._clear_workspace()  # so the reusable scratch buffers are counted too
    tracemalloc.start()
    try:
        y = render_modes(f, t, a, dur, fs, ph)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak - y.nbytes < 32 * 2**20


@pytest.mark.parametrize(
    ("kwargs", "name"),
    [
        (dict(frequency_hz=[-1.0]), "frequency_hz"),
        (dict(frequency_hz=[np.nan]), "frequency_hz"),
        (dict(frequency_hz=[np.inf]), "frequency_hz"),
        (dict(t60_s=[0.0]), "t60_s"),
        (dict(t60_s=[-1.0]), "t60_s"),
        (dict(t60_s=[np.nan]), "t60_s"),
        (dict(amplitude=[np.inf]), "amplitude"),
        (dict(phase=[np.nan]), "phase"),
        (dict(amplitude=[1.0, 2.0]), "amplitude"),
        (dict(phase=[0.0, 1.0]), "phase"),
        (dict(frequency_hz=[[1.0]]), "frequency_hz"),
        (dict(sample_rate=0), "sample_rate"),
        (dict(sample_rate=np.inf), "sample_rate"),
        (dict(duration=-1.0), "duration"),
        (dict(duration=np.nan), "duration"),
        (dict(floor=-1.0), "floor"),
        (dict(block_size=0), "block_size"),
    ],
)
def test_invalid_arguments_raise_one_clear_value_error(kwargs, name):
    args = dict(
        frequency_hz=[440.0], t60_s=[1.0], amplitude=[1.0], duration=0.1, sample_rate=8000
    )
    args.update(kwargs)
    with pytest.raises(ValueError, match=name):
        render_modes(**args)


def test_concurrent_renders_do_not_share_scratch():
    # Source: the same renders done one after another in this thread.
    from concurrent.futures import ThreadPoolExecutor

    banks = [random_bank(40 + 7 * i, 10 + i, f_max=3900.0) for i in range(4)]

    def job(b):
        return render_modes(*b[:3], 1.5, 8000, b[3], block_size=64, chunk_blocks=8)

    serial = [job(b) for b in banks]
    with ThreadPoolExecutor(4) as pool:
        for _ in range(3):
            for got, want in zip(pool.map(job, banks), serial):
                np.testing.assert_array_equal(got, want)


def test_t60_inf_is_accepted():
    y = render_modes([0.0], [np.inf], [2.0], 0.01, 8000, [math.pi / 2])
    np.testing.assert_allclose(y, 2.0, rtol=1e-6)


def test_cached_power_tables_render_the_same_samples():
    """Rendering the same modes again (tables from the per-thread cache) gives bit-identical output."""
    rng = np.random.default_rng(3)
    f, t60 = rng.uniform(40.0, 18000.0, 96), rng.uniform(0.05, 6.0, 96)
    a, phase = rng.uniform(0.0, 1.0, 96), rng.uniform(0.0, 2 * np.pi, 96)
    engine._clear_workspace()
    cold = render_modes(f, t60, a, 0.7, 32000, phase=phase)
    warm = render_modes(f, t60, a, 0.7, 32000, phase=phase)
    louder = render_modes(f, t60, 3.0 * a, 0.7, 32000, phase=phase)  # same exponents, other amplitudes
    np.testing.assert_array_equal(cold, warm)
    engine._clear_workspace()
    np.testing.assert_array_equal(louder, render_modes(f, t60, 3.0 * a, 0.7, 32000, phase=phase))
