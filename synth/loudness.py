"""ITU-R BS.1770-4 integrated loudness of a mono signal, fast enough for every sample of a library.

Method (ITU-R BS.1770-4, 2015, Annex 1):

1. K-weighting: a high-shelf pre-filter and a high-pass "RLB" filter.  The
   Recommendation tabulates both biquads at 48 kHz; at other rates they are
   redesigned from the analogue parameters derived by B. De Man (the
   parameters and bilinear-transform forms of pyloudnorm's "DeMan" filter
   class, whose coefficients at 48 kHz equal the Recommendation's to ~1e-9;
   :func:`k_weighting_sos`).  The cascade runs as a blocked state-space
   filter (:func:`sos_filter`): exact, as fast as scipy's ``sosfilt``, and
   free of ``scipy.signal``, whose import alone takes about a second -- paid
   by every fresh worker process of a batch run otherwise.
2. Mean square z_j of every 400 ms block, blocks starting every 100 ms (75 %
   overlap); block loudness ``l_j = -0.691 + 10 log10(z_j)``.
3. Gating: blocks at or above the absolute gate of -70 LKFS; then the
   relative gate, 10 LU below the loudness of the mean of those; the
   integrated loudness is ``-0.691 + 10 log10(mean z_j)`` over the blocks
   above both gates.

Block boundaries are placed exactly as pyloudnorm places them (``int(0.4 (j
/ 4) fs)`` to ``int(0.4 (j / 4 + 1) fs)``, ``round((T - 0.4) / 0.1) + 1``
blocks), so the two agree to rounding (tests/test_loudness.py holds it); the
block sums come from one reduction over 100 ms sub-blocks instead of a loop
over blocks, and the cascade from one C call.
"""
from __future__ import annotations

import functools
import math
import threading

import numpy as np

__all__ = [
    "sos_filter",
    "BLOCK_S",
    "OVERLAP",
    "ABSOLUTE_GATE_LKFS",
    "RELATIVE_GATE_LU",
    "k_weighting_sos",
    "integrated_loudness",
]

BLOCK_S = 0.400  # s, gating block (BS.1770-4)
OVERLAP = 0.75  # fraction of a block shared with the next (BS.1770-4)
ABSOLUTE_GATE_LKFS = -70.0  # LKFS (BS.1770-4)
RELATIVE_GATE_LU = -10.0  # LU below the absolute-gated loudness (BS.1770-4)
LOUDNESS_OFFSET_DB = -0.691  # dB, cancels the K-filter's gain at 997 Hz (BS.1770-4 eq. 2)

#: De Man's analogue parameters of the two K-weighting stages: (gain dB, Q, centre Hz).
_SHELF = (3.99984385397, 0.7071752369554193, 1681.9744509555319)
_HIGH_PASS = (0.0, 0.5003270373253953, 38.13547087613982)
_SHELF_MID_EXPONENT = 0.499666774155  # the shelf's mid-band gain is Vh ** this (De Man)
FILTER_BLOCK = 32  # samples per block of the state-space filter (measured fastest here)


def k_weighting_sos(sample_rate):
    """The K-weighting cascade at `sample_rate` (Hz) as second-order sections, shape (2, 6).

    Bilinear-transform biquads with ``K = tan(pi fc / fs)``: the shelf
    ``b = (Vh + Vb K/Q + K**2, 2 (K**2 - Vh), Vh - Vb K/Q + K**2) / a0``,
    ``a = (1, 2 (K**2 - 1) / a0, (1 - K/Q + K**2) / a0)``, ``a0 = 1 + K/Q + K**2``,
    ``Vh = 10**(G/20)``, ``Vb = Vh**0.4997``; the high-pass ``b = (1, -2, 1)``
    with the same denominator at its own K and Q.  At 48 kHz they equal
    BS.1770-4's tabulated coefficients to ~1e-9.
    """
    return np.array(_sections(float(sample_rate)))


@functools.lru_cache(maxsize=16)
def _sections(sample_rate):
    gain, q, centre = _SHELF
    k = math.tan(math.pi * centre / sample_rate)
    vh = 10.0 ** (gain / 20.0)
    vb = vh**_SHELF_MID_EXPONENT
    a0 = 1.0 + k / q + k * k
    shelf = ((vh + vb * k / q + k * k) / a0, 2.0 * (k * k - vh) / a0, (vh - vb * k / q + k * k) / a0,
             1.0, 2.0 * (k * k - 1.0) / a0, (1.0 - k / q + k * k) / a0)
    _, q, centre = _HIGH_PASS
    k = math.tan(math.pi * centre / sample_rate)
    a0 = 1.0 + k / q + k * k
    high_pass = (1.0, -2.0, 1.0, 1.0, 2.0 * (k * k - 1.0) / a0, (1.0 - k / q + k * k) / a0)
    return shelf, high_pass


@functools.lru_cache(maxsize=16)
def _blocked_operators(sections, block):
    """State-space operators of a biquad cascade for blocks of `block` samples.

    Each section in transposed direct form II is ``y = b0 x + z1``,
    ``z' = A z + B x`` with ``A = [[-a1, 1], [-a2, 0]]``, ``B = (b1 - a1 b0,
    b2 - a2 b0)``; in cascade the state is both sections' (4 values).  For a
    block, ``y = T x + O s`` and ``s_next = P s + G x``, with ``T`` the
    lower-triangular Toeplitz matrix of the impulse response, ``O`` rows
    ``C A**n``, ``P = A**block`` and ``G`` columns ``A**(block-1-j) B``.
    """
    order = 2 * len(sections)
    a = np.zeros((order, order))
    b = np.zeros(order)
    c = np.zeros(order)
    d = 1.0
    for i, (b0, b1, b2, _, a1, a2) in enumerate(sections):
        j = 2 * i
        a_sec = np.array([[-a1, 1.0], [-a2, 0.0]])
        b_sec = np.array([b1 - a1 * b0, b2 - a2 * b0])
        # Feed the section with everything so far: u = c s + d x.
        a[j : j + 2, :j] = np.outer(b_sec, c[:j])
        a[j : j + 2, j : j + 2] = a_sec
        b[j : j + 2] = b_sec * d
        c = np.concatenate([b0 * c[:j], [1.0, 0.0], np.zeros(order - j - 2)])
        d = b0 * d
    powers = [np.eye(order)]
    for _ in range(block):
        powers.append(a @ powers[-1])
    observe = np.array([c @ powers[n] for n in range(block)])  # (block, order)
    impulse = np.concatenate([[d], [c @ powers[m - 1] @ b for m in range(1, block)]])
    toeplitz = np.zeros((block, block))
    for lag in range(block):
        toeplitz[np.arange(lag, block), np.arange(block - lag)] = impulse[lag]
    gather = np.array([powers[block - 1 - j] @ b for j in range(block)]).T  # (order, block)
    return toeplitz, observe, powers[block], gather


_SCRATCH = threading.local()  # per-thread buffers: fresh pages cost more than the filter


def _buffer(name, shape):
    """A float64 array of `shape` reusing this thread's buffer `name` (contents undefined)."""
    size = math.prod(shape)
    buf = getattr(_SCRATCH, name, None)
    if buf is None or buf.size < size:
        buf = np.empty(size)
        setattr(_SCRATCH, name, buf)
    return buf[:size].reshape(shape)


def sos_filter(sos, signal, *, block=FILTER_BLOCK, out=None):
    """Filter `signal` (1-D, float64) through a cascade of biquads from rest, exactly.

    Parameters
    ----------
    sos : array_like [shape=(n_sections, 6)]
        ``(b0, b1, b2, 1, a1, a2)`` per section, as :func:`k_weighting_sos`.
    signal : ndarray [shape=(n,)]
    block : int > 0
        Samples per block.
    out : ndarray [shape=(n,)] or None
        Where to write the result (float64); a new array if None.

    Returns
    -------
    ndarray [shape=(n,)], float64
        Equal to :func:`scipy.signal.sosfilt` to rounding (~1e-12 relative).

    Notes
    -----
    Blocked state space (see :func:`_blocked_operators`): with the signal cut
    into K blocks (rows of X), ``Y = X T^T + S O^T`` and the block-start
    states ``s_{k+1} = P s_k + G x_k`` come from a doubling scan (log2 K
    small products), so the whole filter is a few matrix products instead
    of a loop over samples.
    """
    sections = tuple(tuple(float(v) for v in row) for row in np.asarray(sos, dtype=float))
    toeplitz, observe, power, gather = _blocked_operators(sections, int(block))
    x = np.asarray(signal, dtype=np.float64)
    n = x.size
    k = -(-n // block)
    blocks = _buffer("blocks", (k, block))
    flat = blocks.reshape(-1)
    flat[:n] = x
    flat[n:] = 0.0
    inputs = blocks @ gather.T  # (K, order): each block's push on the state
    states = np.zeros_like(inputs)
    states[1:] = inputs[:-1]  # s_k = sum_d P**d (input of block k-1-d)
    step, factor = 1, power
    while step < k:
        states[step:] += states[:-step] @ factor.T
        factor = factor @ factor
        step *= 2
    result = _buffer("result", (k, block))
    np.matmul(blocks, toeplitz.T, out=result)
    result += states @ observe.T
    if out is None:
        return result.reshape(-1)[:n].copy()
    out[:] = result.reshape(-1)[:n]
    return out


def _block_sums(squares, sample_rate):
    """Sum of `squares` over every gating block, boundaries as pyloudnorm places them.

    Block j runs from ``int(0.4 (j / 4) fs)`` to ``int(0.4 (j / 4 + 1) fs)``,
    which is where block j + 4 starts (the two products are the same
    float), so every block is four consecutive 100 ms sub-blocks: one
    ``add.reduceat`` over the sub-blocks and a four-term sum per block.
    """
    n_samples = squares.size
    step = 1.0 - OVERLAP
    duration = n_samples / sample_rate
    n_blocks = int(np.round((duration - BLOCK_S) / (BLOCK_S * step))) + 1
    k = np.arange(n_blocks + 4)
    edges = np.minimum((BLOCK_S * (k * step) * sample_rate).astype(np.int64), n_samples)
    inside = edges < n_samples  # the segment from the last edge (samples after every block) is dropped
    sub = np.zeros(edges.size)
    sub[inside] = np.add.reduceat(squares, edges[inside])
    sub = sub[:-1]
    sub[edges[:-1] == edges[1:]] = 0.0  # reduceat gives the element itself for an empty segment
    return sub[0:n_blocks] + sub[1 : n_blocks + 1] + sub[2 : n_blocks + 2] + sub[3 : n_blocks + 3]


def integrated_loudness(signal, sample_rate):
    """Gated integrated loudness (LUFS) of a mono signal (ITU-R BS.1770-4).

    Parameters
    ----------
    signal : array_like [shape=(n,)], full scale 1.0
    sample_rate : float > 0, Hz

    Returns
    -------
    float
        LUFS; ``-inf`` when no block passes the absolute gate.

    Raises
    ------
    ValueError
        If the signal is shorter than one 400 ms block, or not finite.

    Examples
    --------
    A full-scale 997 Hz sine in one channel reads -3.01 LKFS (BS.1770-4's
    reference: the K-filter's gain there is +0.691 dB):

    >>> t = np.arange(48000 * 2) / 48000
    >>> round(integrated_loudness(np.sin(2 * np.pi * 997 * t), 48000), 2)
    -3.01
    """
    x = np.asarray(signal, dtype=np.float64)
    if x.ndim != 1:
        raise ValueError(f"signal must be mono (1-D), got shape {x.shape}")
    if x.size < BLOCK_S * sample_rate:
        raise ValueError(f"a {x.size / sample_rate:.3g} s signal is shorter than one {BLOCK_S * 1e3:.0f} ms gating block")
    if not np.all(np.isfinite(x)):
        raise ValueError("signal must be finite")
    weighted = sos_filter(k_weighting_sos(float(sample_rate)), x, out=_buffer("weighted", (x.size,)))
    z = _block_sums(np.square(weighted, out=weighted), sample_rate) / (BLOCK_S * sample_rate)
    with np.errstate(divide="ignore"):
        block_loudness = LOUDNESS_OFFSET_DB + 10.0 * np.log10(z)
    gated = block_loudness >= ABSOLUTE_GATE_LKFS
    if not np.any(gated):
        return -math.inf
    relative = LOUDNESS_OFFSET_DB + 10.0 * math.log10(float(np.mean(z[gated]))) + RELATIVE_GATE_LU
    kept = (block_loudness > relative) & (block_loudness > ABSOLUTE_GATE_LKFS)
    if not np.any(kept):
        return -math.inf
    return LOUDNESS_OFFSET_DB + 10.0 * math.log10(float(np.mean(z[kept])))
