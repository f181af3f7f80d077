"""Normalisation, dither and atomic WAV/FLAC writing.

Renders never clip: a signal is scaled to a peak target below 0 dBFS, or,
at absolute scale, refused when it would not fit.  16-bit output gets TPDF
dither (triangular, +-1 LSB peak); 24-bit output is rounded (its quantisation
floor is near -144 dBFS); 32-bit output is IEEE float.  Files are written to a
temporary name in the target folder and renamed, so an interrupted write
never leaves a broken file.
"""
from __future__ import annotations

import math
import os
import tempfile
from pathlib import Path

import numpy as np
import soundfile

from .errors import PatchError, RenderError

__all__ = ["peak_dbfs", "normalise", "quantise", "write_audio", "atomic_output", "SUBTYPES", "FORMATS"]

#: soundfile subtype per bit depth.
SUBTYPES = {16: "PCM_16", 24: "PCM_24", 32: "FLOAT"}
#: file suffix -> soundfile format, with the bit depths it can hold.
FORMATS = {".wav": ("WAV", (16, 24, 32)), ".flac": ("FLAC", (16, 24))}
DITHER_SEED = 0  # fixed, so a render writes the same bytes every time


def peak_dbfs(signal):
    """Peak level of `signal` in dBFS (-inf for silence)."""
    peak = float(np.max(np.abs(signal))) if np.size(signal) else 0.0
    return 20.0 * math.log10(peak) if peak > 0 else -math.inf


def _full_scale_limit(bit_depth):
    """Largest |sample| that survives conversion (and 16-bit dither) unclipped."""
    if bit_depth == 16:
        return (32767.0 - 1.0) / 32767.0
    if bit_depth == 24:
        return 1.0
    return 1.0


def normalise(signal, *, peak_db, bit_depth=24):
    """Scale `signal` to `peak_db` dBFS, or check it fits at absolute scale.

    Parameters
    ----------
    signal : ndarray, float
    peak_db : float <= 0 or None
        Target peak in dBFS; None keeps the absolute scale.
    bit_depth : {16, 24, 32}

    Returns
    -------
    scaled : ndarray, float32
    gain_db : float
        Gain applied (0 at absolute scale).

    Raises
    ------
    RenderError
        If `peak_db` is None and the signal would clip.
    """
    signal = np.asarray(signal)
    if not np.all(np.isfinite(signal)):
        raise RenderError("the rendered signal is not finite (NaN or inf); please report this patch")
    peak = float(np.max(np.abs(signal))) if signal.size else 0.0
    if peak_db is None:
        limit = _full_scale_limit(bit_depth)
        if peak > limit:
            over = 20.0 * math.log10(peak / limit)
            raise RenderError(
                f"at absolute scale the peak is {20 * math.log10(peak):+.2f} dBFS and would clip: "
                f"lower excitation.strength by at least {over:.2f} dB, or set render.peak_db"
            )
        return signal.astype(np.float32), 0.0
    if peak == 0.0:
        return signal.astype(np.float32), 0.0
    gain = 10.0 ** (peak_db / 20.0) / peak
    return (signal * gain).astype(np.float32), 20.0 * math.log10(gain)


def quantise(signal, bit_depth, *, seed=DITHER_SEED):
    """The samples to write for `bit_depth`: int16 (TPDF-dithered), int32 or float32.

    24-bit samples are returned as int32 with the 24 significant bits at the top,
    as soundfile expects for PCM_24.
    """
    if bit_depth == 32:
        return np.asarray(signal, dtype=np.float32)
    if bit_depth == 16:
        rng = np.random.default_rng(seed)
        shape = np.shape(signal)
        tpdf = rng.random(shape) - rng.random(shape)  # triangular, +-1 LSB
        values = np.round(np.asarray(signal, dtype=np.float64) * 32767.0 + tpdf)
        return np.clip(values, -32768, 32767).astype(np.int16)
    if bit_depth == 24:
        values = np.round(np.asarray(signal, dtype=np.float64) * 8388607.0)
        return (np.clip(values, -8388608, 8388607).astype(np.int32) << 8)
    raise ValueError(f"bit_depth={bit_depth!r} must be one of 16, 24, 32")


def check_output_path(path, bit_depth):
    """Raise PatchError if `path` cannot take a render of `bit_depth`."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in FORMATS:
        raise PatchError(f"output must end in {' or '.join(FORMATS)}, got {path.name!r}", key="--output")
    fmt, depths = FORMATS[suffix]
    if bit_depth not in depths:
        raise PatchError(f"{fmt} cannot hold {bit_depth}-bit samples (allowed: {', '.join(map(str, depths))})", key="--output")
    if path.parent and not path.parent.exists():
        raise PatchError(f"output folder {str(path.parent)!r} does not exist", key="--output")
    return fmt


class atomic_output:
    """Context manager: yields a temporary path beside `path`, renamed on success.

    On any exception (Ctrl-C included) the temporary file is removed and
    `path` is left untouched.
    """

    def __init__(self, path, suffix=None):
        self.path = Path(path)
        self.suffix = suffix if suffix is not None else self.path.suffix

    def __enter__(self):
        handle, name = tempfile.mkstemp(prefix=f".{self.path.stem}.", suffix=".part" + self.suffix, dir=self.path.parent or ".")
        os.close(handle)
        self.tmp = Path(name)
        return self.tmp

    def __exit__(self, kind, value, traceback):
        if kind is None:
            umask = os.umask(0)
            os.umask(umask)
            os.chmod(self.tmp, 0o666 & ~umask)  # mkstemp makes 0600; give the usual mode
            os.replace(self.tmp, self.path)
        else:
            try:
                self.tmp.unlink()
            except FileNotFoundError:
                pass
        return False


def write_audio(path, signal, *, sample_rate, bit_depth, seed=DITHER_SEED):
    """Write `signal` (already normalised, |x| <= 1) atomically as WAV or FLAC.

    Parameters
    ----------
    path : str or Path
        ``.wav`` or ``.flac``.
    signal : ndarray [shape=(n,) or (n, channels)], float
    sample_rate : int, Hz
    bit_depth : {16, 24, 32}
    """
    fmt = check_output_path(path, bit_depth)
    data = quantise(signal, bit_depth, seed=seed)
    with atomic_output(path) as tmp:
        soundfile.write(str(tmp), data, int(sample_rate), subtype=SUBTYPES[bit_depth], format=fmt)
    return Path(path)
