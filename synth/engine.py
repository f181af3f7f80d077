"""Modal synthesis engine: render a bank of exponentially decaying sinusoids.

Every render in synth goes through :func:`render_modes`.  It evaluates

    y(t) = sum_m a_m * exp(-ln(1000) * t / T60_m) * sin(2 pi f_m t + phi_m)

at t = n / sample_rate, blockwise, as real matrix products (one GEMM per
chunk of blocks), in memory that does not grow with the duration.

Method
------
Write z_m = exp(s_m) with s_m = (-sigma_m + i omega_m), sigma_m = ln(1000) /
(T60_m fs) and omega_m = 2 pi f_m / fs (per sample).  For a sample
n = k B + r inside block k of B samples,

    y[n] = Im( sum_m z_m^r * c_m * z_m^(kB) ),   c_m = a_m exp(i phi_m),

and with u = i conj(c z^(kB)) (so that Re u = Im(c z^kB), Im u = Re(c z^kB))

    y[n] = sum_m Re(z_m^r) Re(u_mk) + Im(z_m^r) Im(u_mk).

Viewing complex64 arrays as interleaved float32 pairs, the whole chunk is
``out(K x B) = U(K x 2M) @ P(B x 2M)^T``: one float32 GEMM with 4 flops per
mode-sample.  The matrices are never built from millions of ``exp`` calls:

* ``P`` (the first block, z^r for r < B) is an outer product of two short
  power tables, z^(qL) * z^l with r = qL + l and L ~ sqrt(B);
* ``U`` for a chunk starting at block k0 is the exact state z^(k0 B) (one
  float64 complex ``exp`` per mode and chunk, so nothing drifts however long
  the render) times a per-render table of z^(jB), j < chunk length;
* every power table is built in float64 by doubling from one direct
  ``exp`` (relative error ~ length x 1e-16, far below float32 rounding).

Only the GEMM operands are float32.  Work skipping: modes are sorted by the
sample at which their envelope falls below a floor, so the live modes of a
chunk are a prefix of the operands and dead modes cost nothing.

The two power tables depend only on the modes' exponents (frequency, T60,
sample rate) and the block layout, not on amplitudes or phases, so a small
per-thread cache keeps them for renders of the same modes again: MIDI voices
of one note, the velocity layers of a sample, the segments of a voice.
"""

from __future__ import annotations

import math
import threading
from collections import OrderedDict

import numpy as np

from .damping import LN1000

__all__ = [
    "DEFAULT_FLOOR",
    "MIN_ENVELOPE",
    "render_modes",
]

DEFAULT_FLOOR = 1e-7  # dimensionless, fraction of sum|a_m| (-140 dB); total skip error bound
MIN_ENVELOPE = 1e-20  # amplitude units (absolute); modes below are always skipped
FACTOR_FLUSH = 1e-8  # dimensionless; power-table magnitudes below this become 0
MIN_BLOCK = 32  # samples; smallest block size B
MAX_BLOCK = 512  # samples; largest block size B (measured best at 10 s, 48 kHz)
CHUNK_BLOCKS = 256  # blocks per GEMM call (rows of U); GEMM efficiency needs >= ~256
GROUP_MODES = 2048  # modes per pass; bounds memory in the number of modes
MAX_DECAY = 800.0  # nepers per sample; exp(-800) is 0 in float64, so faster decays are clamped
WORKSPACE_BYTES = 8 * 2**20  # bytes; largest scratch buffer kept per thread between calls
TABLE_CACHE_BYTES = 16 * 2**20  # bytes; power tables kept per thread for renders of the same modes
TABLE_CACHE_MODES = 512  # modes; larger groups are not cached (their tables cost little next to the GEMM)

_WORKSPACE = threading.local()  # per-thread reusable scratch buffers, by name
_TABLES = threading.local()  # per-thread LRU of power tables: key -> (first, table, bytes)


def _scratch(name: str, shape: tuple, dtype) -> np.ndarray:
    """An uninitialised array that reuses this thread's buffer ``name``.

    Fresh memory costs a page fault per 4 KiB on first touch (~1.4 us each
    measured on the benchmark VM, about 1 ms per 512-mode render), so the
    per-render tables live in buffers kept between calls; buffers above
    WORKSPACE_BYTES are not kept.  Views never escape a render.
    """
    nbytes = math.prod(shape) * np.dtype(dtype).itemsize
    buf = getattr(_WORKSPACE, name, None)
    if buf is None or buf.size < nbytes:
        buf = np.empty(max(nbytes, 1), np.uint8)
        if nbytes <= WORKSPACE_BYTES:
            setattr(_WORKSPACE, name, buf)
    return buf[:nbytes].view(dtype).reshape(shape)


def _clear_workspace() -> None:
    """Drop this thread's scratch buffers and cached power tables (for memory measurements)."""
    _WORKSPACE.__dict__.clear()
    _TABLES.__dict__.clear()


def _as_1d(name: str, value) -> np.ndarray:
    """Convert an array-like to a 1-D float64 array or raise ValueError."""
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"{name} must be a 1-D array-like of real numbers") from exc
    if arr.ndim != 1:
        raise ValueError(f"{name} must be 1-D (one value per mode), got shape {arr.shape}")
    return arr


def _fast_checks(f, t60, a, ph):
    """True if the per-mode arrays certainly pass :func:`_validate` (a few reductions).

    False means "look closer": the exact checks then decide (a phase of
    1e308 is finite although the sum used here overflows).
    """
    return bool(
        f.min() >= 0.0
        and math.isfinite(f.max())
        and t60.min() > 0.0  # NaN makes min NaN: not > 0
        and math.isfinite(np.abs(a).sum())
        and math.isfinite(ph.sum())
    )


def _validate(frequency_hz, t60_s, amplitude, duration, sample_rate, phase):
    """Check the arguments of :func:`render_modes`; return arrays and sample count."""
    f = _as_1d("frequency_hz", frequency_hz)
    t60 = _as_1d("t60_s", t60_s)
    a = _as_1d("amplitude", amplitude)
    ph = np.zeros_like(f) if phase is None else _as_1d("phase", phase)
    m = f.size
    for name, arr in (("t60_s", t60), ("amplitude", a), ("phase", ph)):
        if arr.size != m:
            raise ValueError(
                f"{name} has {arr.size} values but frequency_hz has {m}; "
                "all per-mode arrays must have equal length"
            )
    if m and not _fast_checks(f, t60, a, ph):
        if not np.all(np.isfinite(f) & (f >= 0)):
            raise ValueError("frequency_hz must be finite and >= 0 Hz")
        if not np.all((t60 > 0) & ~np.isnan(t60)):
            raise ValueError("t60_s must be > 0 s (np.inf allowed: no decay)")
        if not (np.all(np.isfinite(a)) and math.isfinite(float(np.abs(a).sum()))):
            raise ValueError("amplitude must be finite (and sum|amplitude| finite)")
        if not np.all(np.isfinite(ph)):
            raise ValueError("phase must be finite (radians)")
    try:
        fs = float(sample_rate)
        dur = float(duration)
    except (TypeError, ValueError) as exc:
        raise ValueError("sample_rate and duration must be real scalars") from exc
    if not (math.isfinite(fs) and fs > 0):
        raise ValueError("sample_rate must be finite and > 0 Hz")
    if not (math.isfinite(dur) and dur >= 0 and math.isfinite(dur * fs)):
        raise ValueError("duration must be finite and >= 0 s")
    return f, t60, a, ph, fs, round(dur * fs)


def _exponents(frequency_hz, t60_s, sample_rate):
    """Per-sample complex exponents s_m = -sigma_m + i omega_m (float64).

    sigma_m = ln(1000) / (T60_m fs) [1/sample], omega_m = 2 pi f_m / fs [rad/sample].
    """
    with np.errstate(divide="ignore", over="ignore"):  # T60 * fs may underflow to 0
        sigma = np.minimum(LN1000 / (t60_s * sample_rate), MAX_DECAY)  # T60 = inf: 0
    omega = (2.0 * np.pi / sample_rate) * frequency_hz
    return sigma, omega


def _powers(s: np.ndarray, count: int, step: int = 1, name: str | None = None) -> np.ndarray:
    """Return exp(j * step * s) for j = 0 .. count-1, shape (count, M), complex128.

    One direct ``exp`` gives x = exp(step s); rows [L, 2L) are rows [0, L)
    times x^L, with x^L from repeated squaring.  The relative error of row j
    is a few j ulp (float64) times (1 + step |s|), the same order as a direct
    exp of the rounded j step s; < 1e-11 for the tables used here, harmless
    before the cast to complex64, and never carried from chunk to chunk.
    """
    shape = (count, s.size)
    out = np.empty(shape, np.complex128) if name is None else _scratch(name, shape, np.complex128)
    if count == 0:
        return out
    out[0] = 1.0
    factor = np.exp(step * s)
    length = 1
    while length < count:
        n = min(length, count - length)
        np.multiply(out[:n], factor, out=out[length : length + n])
        length *= 2
        if length < count:
            np.multiply(factor, factor, out=factor)
    return out


def _flush(table: np.ndarray, level: float, rate: np.ndarray) -> np.ndarray:
    """Set entries of a power table with magnitude below ``level`` to 0 (in place).

    ``rate`` is each column's decay per row (nepers); only columns that can
    fall below ``level`` within the table are examined.  Keeps float32 GEMM
    operands out of the subnormal range, where this class of CPU runs sgemm
    about 50x slower.
    """
    cols = np.flatnonzero(rate * (table.shape[0] - 1) > -math.log(level))
    if cols.size:
        sub = table[:, cols]
        sub[np.abs(sub) < level] = 0.0
        table[:, cols] = sub
    return table


def _power_matrix(s: np.ndarray, count: int, step: int, name: str) -> np.ndarray:
    """exp(j * step * s_m) for j < count, shape (count, M), complex64.

    An outer product hi[q] * lo[l] (j = q L + l, L a power of two near
    sqrt(count)) of two float64 doubling tables, each flushed below
    FACTOR_FLUSH, then a single complex64 multiply.  Nonzero entries are
    >= FACTOR_FLUSH**2 in magnitude; zeroed ones are < FACTOR_FLUSH.
    The result lives in the scratch buffer ``name``.
    """
    lo_len = 1 << (((count - 1).bit_length() + 1) // 2)
    hi_len = -(-count // lo_len)
    rate = -step * s.real  # decay per row, nepers
    lo = _flush(_powers(s, lo_len, step, "lo"), FACTOR_FLUSH, rate).astype(np.complex64)
    hi = _flush(_powers(s, hi_len, step * lo_len, "hi"), FACTOR_FLUSH, lo_len * rate)
    out = _scratch(name, (hi_len, lo_len, s.size), np.complex64)
    np.multiply(hi.astype(np.complex64)[:, None, :], lo[None, :, :], out=out)
    return out.reshape(hi_len * lo_len, s.size)[:count]


def _chunk_states(s, coef, table, start, kc, block, death, live):
    """Interleaved float32 GEMM operand U for blocks start/B .. +kc of live modes.

    ``u[k, m] = i conj(c_m z_m^(start + kB))``; the chunk-start state is one
    direct float64 ``exp`` (exact at any ``start``), later blocks multiply by
    the per-render ``table``.  Entries of blocks starting at or after a mode's
    death sample are set to 0.  Returns a (kc, 2 live) float32 array.
    """
    v = coef[:live] * np.exp(start * np.conj(s[:live])) if start else coef[:live]
    u = _scratch("u", (kc, live), np.complex64)
    np.multiply(table[:kc, :live], v.astype(np.complex64), out=u)
    # Modes dying inside this chunk are the tail of the sorted prefix.
    end = start + kc * block
    first_dying = int(np.searchsorted(-death[:live], -end, side="left"))
    if first_dying < live:
        alive_blocks = np.ceil((death[first_dying:live] - start) / block)
        dead = np.arange(kc)[:, None] >= alive_blocks[None, :]
        np.copyto(u[:, first_dying:live], 0, where=dead)
    return u.view(np.float32)


def _death_samples(abs_amp, sigma, floor):
    """Sample time (float) at which each mode's envelope |a| e^(-sigma n) hits a threshold.

    threshold = max(floor * sum|a| / M, MIN_ENVELOPE).  A mode is computed in
    a block only if the block starts before its death, so at any sample the
    skipped modes sum to less than M * threshold = floor * sum|a| (or
    M * MIN_ENVELOPE).  Modes with T60 = inf (sigma = 0) and a != 0 never die
    (+inf); decaying modes starting at or below the threshold, and modes with
    a = 0, are dead from the start (-1).
    """
    m = abs_amp.size
    thr = max(floor * float(abs_amp.sum()) / m, MIN_ENVELOPE) if m else MIN_ENVELOPE
    death = np.full(m, -1.0)
    decays = (abs_amp > thr) & (sigma > 0)
    death[decays] = np.log(abs_amp[decays] / thr) / sigma[decays]
    death[(abs_amp > 0) & (sigma == 0)] = np.inf
    return death


def _choose_block(n_samples: int) -> int:
    """Block size B: the power of two nearest sqrt(N), within [MIN_BLOCK, MAX_BLOCK].

    The per-render tables cost O(M B) and the chunk states O(M N / B), so
    sqrt(N) balances them; MAX_BLOCK is where the GEMM stops gaining.
    """
    b = 1 << max(0, round(math.log2(max(n_samples, 1)) / 2))
    return min(max(b, MIN_BLOCK), MAX_BLOCK)


def _render_chunk(out, start, stop, ops, accumulate):
    """Render samples [start, stop) of one mode group into ``out``."""
    s, coef, death, table, p_t, block = ops
    live = int(np.searchsorted(-death, -start, side="left"))  # death > start
    if live == 0:
        return
    kc = -(-(stop - start) // block)
    u = _chunk_states(s, coef, table, start, kc, block, death, live)
    lhs = p_t[: 2 * live]  # (2 live, B) view, F-ordered: BLAS reads it in place
    full = (stop - start) // block
    if full:
        dst = out[start : start + full * block].reshape(full, block)
        if accumulate:
            dst += u[:full] @ lhs
        else:
            np.matmul(u[:full], lhs, out=dst)
    rest = stop - start - full * block
    if rest:
        tail = u[full] @ lhs[:, :rest]
        if accumulate:
            out[stop - rest : stop] += tail
        else:
            out[stop - rest : stop] = tail


def _group_tables(s, block, count):
    """The power tables of one group: z^r (r < block) and conj z^(jB) (j < count).

    Kept in this thread's LRU (:data:`TABLE_CACHE_BYTES`) for groups of at
    most :data:`TABLE_CACHE_MODES` modes, keyed by the exact exponents: a
    render of the same modes again gets the very same tables.
    """
    if s.size > TABLE_CACHE_MODES:
        return _power_matrix(s, block, 1, "first"), _power_matrix(np.conj(s), count, block, "table")
    lru = getattr(_TABLES, "lru", None)
    if lru is None:
        lru = _TABLES.lru = OrderedDict()
        _TABLES.bytes = 0
    key = (s.tobytes(), block, count)
    hit = lru.get(key)
    if hit is not None:
        lru.move_to_end(key)
        return hit[0], hit[1]
    first = _power_matrix(s, block, 1, "first").copy()
    table = _power_matrix(np.conj(s), count, block, "table").copy()
    first.flags.writeable = table.flags.writeable = False
    size = first.nbytes + table.nbytes
    lru[key] = (first, table, size)
    _TABLES.bytes += size
    while _TABLES.bytes > TABLE_CACHE_BYTES and len(lru) > 1:
        _TABLES.bytes -= lru.popitem(last=False)[1][2]
    return first, table


def _render_group(out, s, coef, death, block, chunk, accumulate):
    """Render (or add) one group of modes, sorted by death, into ``out``."""
    n = out.size
    span = chunk * block
    first, table = _group_tables(s, block, min(chunk, -(-n // block)))
    ops = (s, coef, death, table, first.view(np.float32).T, block)
    for start in range(0, n, span):
        _render_chunk(out, start, min(start + span, n), ops, accumulate)


def render_modes(
    frequency_hz,
    t60_s,
    amplitude,
    duration,
    sample_rate,
    phase=None,
    *,
    floor: float = DEFAULT_FLOOR,
    block_size: int | None = None,
    chunk_blocks: int = CHUNK_BLOCKS,
    out: np.ndarray | None = None,
) -> np.ndarray:
    """Render a sum of exponentially decaying sinusoids.

    Parameters
    ----------
    frequency_hz : array_like, shape (M,)
        Mode frequencies f_m in Hz, finite, >= 0.  Modes at or above the
        Nyquist frequency ``sample_rate / 2`` are rendered as the formula
        samples them (i.e. aliased); callers that do not want them drop them.
    t60_s : array_like, shape (M,)
        Time for each mode to decay by 60 dB, in seconds, > 0; ``np.inf``
        means no decay.
    amplitude : array_like, shape (M,)
        Initial amplitudes a_m (output units), finite, any sign.
    duration : float
        Length in seconds, finite, >= 0.
    sample_rate : float
        Sample rate fs in Hz, finite, > 0.
    phase : array_like, shape (M,), optional
        Initial phases phi_m in radians, finite; None means all zero.
    floor : float, keyword-only
        Work-skipping floor as a fraction of sum|a_m| (default
        ``DEFAULT_FLOOR`` = 1e-7, -140 dB).  A mode stops being computed once
        |a_m| exp(-sigma_m n) < floor * sum|a| / M, so the skipped modes add
        up to less than floor * sum|a| at any sample.  0 disables skipping
        except below the absolute ``MIN_ENVELOPE``.  Modes with T60 = inf
        never stop.
    block_size : int, optional, keyword-only
        Samples per block B, >= 1.  Default: the power of two nearest
        sqrt(N), within [MIN_BLOCK, MAX_BLOCK] = [32, 512] samples.
    chunk_blocks : int, keyword-only
        Blocks per GEMM call, >= 1 (default ``CHUNK_BLOCKS`` = 256).  Work
        skipping is decided per chunk; memory grows with it; the GEMM needs
        it >= ~256 for full speed.
    out : numpy.ndarray, optional, keyword-only
        A float32 C-contiguous array of ``round(duration * sample_rate)``
        samples to render into (and return), for callers that render many
        signals of one length: reusing it saves the fresh pages of a new
        array.

    Returns
    -------
    numpy.ndarray
        float32, shape ``(round(duration * sample_rate),)``.

    Raises
    ------
    ValueError
        If an argument is outside the ranges above or the lengths differ.

    Notes
    -----
    Evaluates, for n = 0 .. N-1 and t = n / fs,

    .. math:: y(t) = \\sum_m a_m e^{-\\ln(1000) t / T_{60,m}}
              \\sin(2\\pi f_m t + \\phi_m)

    blockwise as float32 GEMMs on float64-exact states (see the module
    docstring).  Error sources: float32 rounding of the GEMM operands and
    sums (about 1e-7 of each term, with no growth along the signal), work
    skipping (< floor * sum|a|), and the subnormal guards (power-table
    entries below FACTOR_FLUSH = 1e-8 and envelopes below ``MIN_ENVELOPE``
    are zeroed, i.e. < 1e-8 |a_m| per mode).  Measured against a float64
    evaluation for 512 random modes x 10 s at 48 kHz: -125 dB at the start
    and -159 dB at the end, relative to the signal's peak.

    A mode dead at a chunk's start is left out of that chunk's GEMM; inside
    a chunk its blocks after death are zero.  Memory beyond the output is
    O(M (B + chunk_blocks)) for at most ``GROUP_MODES`` modes per pass
    (about 6 MiB for 512 modes), independent of the duration; the tables
    stay in per-thread scratch buffers between calls (at most ~16 MiB per
    thread) because fresh pages cost more than the GEMM for short renders.

    The engine does not change BLAS settings: the GEMM runs on the BLAS
    library's own threads (OpenBLAS: all cores), which measured fastest;
    limiting BLAS to one thread halves the GEMM speed.  See
    benchmarks/README.md for the measurements behind every default.

    References
    ----------
    .. [1] J.-M. Adrien, "The missing link: modal synthesis", in G. De Poli,
       A. Piccialli and C. Roads (eds.), *Representations of Musical
       Signals*, MIT Press, 1991.
    .. [2] K. Goto and R. van de Geijn, "Anatomy of high-performance matrix
       multiplication", ACM Trans. Math. Softw. 34(3), 2008.

    Examples
    --------
    Two partials, a fifth apart, the upper one dying twice as fast:

    >>> import numpy as np
    >>> from synth import render_modes
    >>> y = render_modes([300.0, 450.0], [0.8, 0.4], [0.6, 0.3], 0.02, 8000)
    >>> y.shape, y.dtype.name, float(y[0])
    ((160,), 'float32', 0.0)
    >>> t = np.arange(160) / 8000.0  # the formula above, in float64
    >>> exact = sum(a * np.exp(-np.log(1000.0) * t / t60) * np.sin(2 * np.pi * f * t)
    ...             for f, t60, a in [(300.0, 0.8, 0.6), (450.0, 0.4, 0.3)])
    >>> bool(np.max(np.abs(y - exact)) < 1e-6)
    True
    """
    f, t60, a, ph, fs, n = _validate(frequency_hz, t60_s, amplitude, duration, sample_rate, phase)
    if not (math.isfinite(floor) and floor >= 0):
        raise ValueError("floor must be finite and >= 0 (fraction of sum|amplitude|)")
    block = _choose_block(n) if block_size is None else int(block_size)
    if block < 1:
        raise ValueError("block_size must be a positive number of samples")
    chunk_blocks = int(chunk_blocks)
    if chunk_blocks < 1:
        raise ValueError("chunk_blocks must be >= 1")

    if out is None:
        out = np.zeros(n, np.float32)
    else:
        if not (isinstance(out, np.ndarray) and out.dtype == np.float32 and out.shape == (n,) and out.flags.c_contiguous):
            raise ValueError(f"out must be a C-contiguous float32 array of shape ({n},)")
        out[:] = 0.0
    if n == 0 or f.size == 0:
        return out
    sigma, omega = _exponents(f, t60, fs)
    death = _death_samples(np.abs(a), sigma, floor)
    order = np.argsort(-death, kind="stable")
    order = order[death[order] >= 0]  # drop modes that are never alive
    for g in range(0, order.size, GROUP_MODES):
        idx = order[g : g + GROUP_MODES]
        s = -sigma[idx] + 1j * omega[idx]
        coef = 1j * a[idx] * np.exp(-1j * ph[idx])  # i conj(a e^{i phi})
        _render_group(out, s, coef, death[idx], block, chunk_blocks, g > 0)
    return out
