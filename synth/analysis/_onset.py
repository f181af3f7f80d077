"""Checks of recorded audio (finite, not silent, not clipped, not DC only) and onset detection.

Private helpers of :func:`synth.analysis.estimate.estimate_partials`; every
problem is an :class:`synth.errors.InputFileError` with a one-line message.
"""
from __future__ import annotations

import numpy as np

from synth.errors import InputFileError

__all__ = ["check_audio", "find_onset", "SILENCE_DBFS"]

#: A peak at or below this level (one 16-bit step) is silence, dBFS.
SILENCE_DBFS = -90.0
#: Samples within this fraction of the peak magnitude count as "at the peak".
_CLIP_FRACTION = 0.999
#: A run at the peak is a clipped plateau when its values spread by less than this fraction of the peak.
_FLAT_SPREAD = 1e-4
#: Length of the energy blocks of the onset detector, s.
_BLOCK_S = 0.001


def _dbfs(value):
    return 20.0 * np.log10(value) if value > 0 else -np.inf


def _fmt_db(value):
    return "-inf" if not np.isfinite(value) else f"{value:.1f}"


def _runs(mask):
    """(starts, lengths) of the runs of True in a boolean array."""
    padded = np.concatenate(([False], mask, [False])).astype(np.int8)
    change = np.flatnonzero(np.diff(padded))
    return change[0::2], change[1::2] - change[0::2]


def check_audio(signal, *, sample_rate, source=None):
    """`signal` as a float64 1-D array, or InputFileError naming what is wrong with it.

    Checks, in order: one channel of floating-point samples, all finite, not
    silent (peak above -90 dBFS), not clipped (runs of three or more flat samples
    at a peak of at least 0.99 full scale, or at an exactly repeated peak),
    not DC only (the AC part above -90 dBFS and within 80 dB of the DC).
    """
    def fail(message):
        raise InputFileError(message, file=source)

    if not (np.isfinite(sample_rate) and sample_rate > 0):
        fail(f"sample rate must be a positive number of Hz, got {sample_rate!r}")
    array = np.asarray(signal)
    if array.ndim != 1:
        fail(f"expected one channel of samples (a 1-D array), got shape {array.shape}: pick or mix a channel first")
    if array.dtype.kind != "f":
        fail(f"samples are {array.dtype}, not floating point: read the audio as float, full scale = 1.0")
    if len(array) == 0:
        fail("no samples: the recording is empty")
    x = array.astype(np.float64)
    bad = ~np.isfinite(x)
    if bad.any():
        first = int(np.flatnonzero(bad)[0])
        fail(f"{int(bad.sum())} samples are NaN or infinite (the first at {first / sample_rate:.3f} s): "
             "the file is corrupt or was decoded wrongly")
    magnitude = np.abs(x)
    peak = float(magnitude.max())
    peak_db = _dbfs(peak)
    if peak_db <= SILENCE_DBFS:
        detail = " (every sample is 0)" if peak == 0 else f", at or below {SILENCE_DBFS:.0f} dBFS"
        fail(f"silent: the peak level is {_fmt_db(peak_db)} dBFS{detail}; check the channel and the input gain")
    _check_clipping(x, peak, fail)
    mean = float(x.mean())
    ac_peak = float(np.abs(x - mean).max())
    if _dbfs(ac_peak) <= SILENCE_DBFS or ac_peak <= 1e-4 * abs(mean):
        fail(f"DC only: a constant offset of {mean:.4g} ({_fmt_db(_dbfs(abs(mean)))} dBFS) with no sound on it "
             f"(AC peak {_fmt_db(_dbfs(ac_peak))} dBFS); check the microphone and the channel")
    return x


def _check_clipping(x, peak, fail):
    near = np.abs(x) >= _CLIP_FRACTION * peak
    n_runs = 0
    n_samples = 0
    drive = []
    for mask in (near & (x > 0), near & (x < 0)):
        starts, lengths = _runs(mask)
        for start, length in zip(starts, lengths):
            if length < 3:
                continue
            values = np.abs(x[start : start + length])
            flat = values.max() - values.min() <= _FLAT_SPREAD * peak
            exact = np.count_nonzero(values == peak) >= 3
            if flat and (peak >= 0.99 or exact):
                n_runs += 1
                n_samples += int(length)
                drive.append(_crest(x, start))
    if n_runs and (peak >= 0.99 or n_runs >= 2):
        percent = 100.0 * n_samples / len(x)
        crest = max((value for value in drive if np.isfinite(value)), default=np.nan)
        if np.isfinite(crest) and crest > peak:
            over = 20.0 * np.log10(crest / peak)
            how = f" by about {over:.0f} dB"
            quieter = np.ceil(over) + 3.0
        else:
            how, quieter = "", 6.0
        where = "at full scale" if peak >= 0.99 else f"flat at the peak ({_fmt_db(_dbfs(peak))} dBFS)"
        fail(f"{n_samples} samples ({percent:.2g} %) sit {where} in {n_runs} run{'s' if n_runs > 1 else ''}: "
             f"the recording clipped{how}; record {quieter:.0f} dB quieter")


def _crest(x, start):
    """Amplitude of the sinusoid through the three samples before a clipped run (nan if they do not fit one).

    For ``x[n] = A sin(w n + theta)``: ``x[n-1] + x[n+1] = 2 cos(w) x[n]`` and
    ``A^2 = (x[n]^2 - 2 x[n] x[n+1] cos w + x[n+1]^2) / sin^2 w``.
    """
    if start < 3:
        return np.nan
    a, b, c = x[start - 3 : start]
    if b == 0:
        return np.nan
    cos_w = (a + c) / (2.0 * b)
    if not -0.999 < cos_w < 0.999:
        return np.nan
    return float(np.sqrt(max(b * b - 2.0 * b * c * cos_w + c * c, 0.0) / (1.0 - cos_w**2)))


def find_onset(x, sample_rate):
    """(onset index, analysis start index, pre-onset noise rms) of a note in `x`.

    The onset is where the energy first rises out of the floor: coarse on 1 ms
    blocks (the first block above the larger of the floor + 20 dB and the peak
    block - 40 dB), then to the sample (the first sample above 5 times the rms
    of the pre-onset noise).  The analysis starts 1 ms after the first 2 ms
    block within 3 dB of the largest block in the 60 ms after the onset (the
    attack peak), so the excitation has ended.
    """
    block = max(1, int(round(_BLOCK_S * sample_rate)))
    n_blocks = len(x) // block
    if n_blocks < 4:
        return 0, 0, 0.0
    energy = np.mean(x[: n_blocks * block].reshape(n_blocks, block) ** 2, axis=1)
    tiny = 1e-30
    level = 10.0 * np.log10(energy + tiny)
    floor = np.percentile(level, 5)
    threshold = max(floor + 20.0, level.max() - 40.0)
    first = int(np.argmax(level > threshold))
    pre = x[: max(0, first - 1) * block]
    noise_rms = float(np.sqrt(np.mean(pre**2))) if len(pre) >= block * 4 else 0.0
    lo = max(0, first - 1) * block
    hi = min(len(x), (first + 1) * block)
    above = np.flatnonzero(np.abs(x[lo:hi]) > max(5.0 * noise_rms, 1e-12))
    onset = lo + int(above[0]) if len(above) else first * block
    # Attack peak: 2 ms smoothed energy after the onset.
    span = x[onset : onset + int(0.06 * sample_rate)]
    b2 = 2 * block
    n2 = len(span) // b2
    if n2 >= 1:
        e2 = np.mean(span[: n2 * b2].reshape(n2, b2) ** 2, axis=1)
        peak_block = int(np.argmax(e2 >= 0.5 * e2.max()))
        start = onset + (peak_block + 1) * b2 + block
    else:
        start = onset
    return onset, min(start, len(x) - 1), noise_rms
