"""ITU-R BS.1770-4 integrated loudness of a mono signal, fast enough for every sample of a library.

Method (ITU-R BS.1770-4, 2015, Annex 1):

1. K-weighting: a high-shelf pre-filter and a high-pass "RLB" filter.  The
   Recommendation tabulates both biquads at 48 kHz; at other rates they are
   redesigned from the analogue parameters derived by B. De Man (pyloudnorm's
   "DeMan" filter class, whose coefficients at 48 kHz equal the
   Recommendation's to ~1e-9; :func:`k_weighting_sos` designs them with
   pyloudnorm's own ``IIRfilter``).  The two biquads run as one
   second-order-section cascade (:func:`scipy.signal.sosfilt`).
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

import numpy as np

__all__ = [
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


def k_weighting_sos(sample_rate):
    """The K-weighting cascade at `sample_rate` (Hz) as second-order sections, shape (2, 6).

    At 48 kHz the sections equal BS.1770-4's tabulated coefficients (to ~1e-9).
    """
    return np.array(_sections(float(sample_rate)))


@functools.lru_cache(maxsize=16)
def _sections(sample_rate):
    from pyloudnorm.iirfilter import IIRfilter


    sections = []
    for (gain, q, centre), kind in ((_SHELF, "high_shelf_DeMan"), (_HIGH_PASS, "high_pass_DeMan")):
        stage = IIRfilter(gain, q, centre, float(sample_rate), kind)
        b, a = np.asarray(stage.b, dtype=float), np.asarray(stage.a, dtype=float)
        sections.append(tuple(np.concatenate([b / a[0], a / a[0]]).tolist()))
    return tuple(sections)


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
    import scipy.signal

    x = np.asarray(signal, dtype=np.float64)
    if x.ndim != 1:
        raise ValueError(f"signal must be mono (1-D), got shape {x.shape}")
    if x.size < BLOCK_S * sample_rate:
        raise ValueError(f"a {x.size / sample_rate:.3g} s signal is shorter than one {BLOCK_S * 1e3:.0f} ms gating block")
    if not np.all(np.isfinite(x)):
        raise ValueError("signal must be finite")
    weighted = scipy.signal.sosfilt(k_weighting_sos(float(sample_rate)), x)
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
