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
import sys
import tempfile
import threading
from pathlib import Path

import numpy as np

from .errors import COMMAND_LINE, RenderError, option_error

__all__ = [
    "peak_dbfs",
    "normalise",
    "quantise",
    "write_audio",
    "encode_wav",
    "sampler_fields",
    "atomic_output",
    "check_output_file",
    "output_path",
    "check_output_path",
    "make_output_folder",
    "whole_sample_rate",
    "SUBTYPES",
    "FORMATS",
    "COMMAND_LINE",
]

#: soundfile subtype per bit depth, and the bytes each sample takes in a file.
SUBTYPES = {16: "PCM_16", 24: "PCM_24", 32: "FLOAT"}
BYTES_PER_SAMPLE = {16: 2, 24: 3, 32: 4}
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
    return 1.0  # 24-bit rounds to the nearest step; 32-bit float has no ceiling at 1


def normalise(signal, *, peak_db, bit_depth=24, peak="sample", sample_rate=None):
    """Scale `signal` to `peak_db` dBFS, or check it fits at absolute scale.

    Parameters
    ----------
    signal : ndarray, float
    peak_db : float <= 0 or None
        Target peak in dBFS; None keeps the absolute scale.
    bit_depth : {16, 24, 32}
    peak : {"sample", "true"}
        Normalise the largest sample, or the true (4x oversampled, ITU-R
        BS.1770-4 Annex 2) peak, which needs `sample_rate`.
    sample_rate : float or None, Hz

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
    measure = peak
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
    if measure == "true":
        from .truepeak import true_peak

        peak = true_peak(signal, sample_rate)
    gain = 10.0 ** (peak_db / 20.0) / peak
    return (signal * gain).astype(np.float32), 20.0 * math.log10(gain)


_SCRATCH = threading.local()  # per-thread float64 buffer of quantise (fresh pages cost more than the work)


def _scratch_float64(shape):
    size = math.prod(shape)
    buf = getattr(_SCRATCH, "values", None)
    if buf is None or buf.size < size:
        buf = np.empty(size)
        _SCRATCH.values = buf
    return buf[:size].reshape(shape)


QUIET_TAIL_S = 0.010  # s: a 16-bit file's last 10 ms carry no dither (digital silence where the sound has ended)


def dither_gain(n, *, sample_rate, frames_after=0):
    """Gain of the 16-bit dither over `n` frames followed by `frames_after` more of the file; None if all 1.

    The dither is off over the file's last :data:`QUIET_TAIL_S` and rises as
    a raised cosine over the same length before that, so a file whose sound
    has fallen below half an LSB ends in exact digital silence (common
    practice in dithering: silence is not dithered) instead of +-1 LSB of
    noise, -89 dB re a -1 dBFS peak.
    """
    quiet = max(int(round(QUIET_TAIL_S * sample_rate)), 1)
    if frames_after >= 2 * quiet:
        return None
    gain = np.ones(n)  # 1 wherever the end is 2 x QUIET_TAIL_S away or more (0.5 - 0.5 cos(pi) == 1 exactly)
    start = max(0, n + frames_after - 2 * quiet)  # only the last 2 x QUIET_TAIL_S are computed
    to_end = np.arange(n - start, 0, -1, dtype=np.float64) + frames_after  # frames from each one to the end, >= 1
    rise = np.clip((to_end - quiet) / quiet, 0.0, 1.0)
    gain[start:] = 0.5 - 0.5 * np.cos(np.pi * rise)
    return gain


def quantise(signal, bit_depth, *, seed=DITHER_SEED, dither=None):
    """The samples to write for `bit_depth`: int16 (TPDF-dithered), int32 or float32.

    24-bit samples are returned as int32 with the 24 significant bits at the top,
    as soundfile expects for PCM_24.  `dither` (16-bit only) scales the TPDF
    dither frame by frame (:func:`dither_gain`); None keeps it whole.
    """
    if bit_depth == 32:
        return np.asarray(signal, dtype=np.float32)
    if bit_depth == 16:
        rng = np.random.default_rng(seed)
        shape = np.shape(signal)
        tpdf = rng.random(shape) - rng.random(shape)  # triangular, +-1 LSB
        if dither is not None:
            tpdf *= dither if tpdf.ndim == 1 else dither[:, None]
        values = np.round(np.asarray(signal, dtype=np.float64) * 32767.0 + tpdf)
        return np.clip(values, -32768, 32767).astype(np.int16)
    if bit_depth == 24:
        values = _scratch_float64(np.shape(signal))
        np.multiply(signal, 8388607.0, out=values, dtype=np.float64)  # one pass: no float64 copy first
        np.rint(values, out=values)
        np.clip(values, -8388608, 8388607, out=values)
        ints = values.astype(np.int32)
        np.left_shift(ints, 8, out=ints)
        return ints
    raise ValueError(f"bit_depth={bit_depth!r} must be one of 16, 24, 32")


#: Longest file or folder name most file systems take (bytes; ext4, XFS, APFS, NTFS all 255).
NAME_MAX_BYTES = 255


def _same_file(a, b):
    """True if paths `a` and `b` name one file (links and ``..`` included)."""
    try:
        return os.path.samefile(a, b)
    except OSError:  # one of them does not exist (yet)
        pass
    except ValueError:  # a NUL byte: no file has that name (the reader of the input says so)
        return False
    try:
        return Path(a).resolve() == Path(b).resolve()
    except (OSError, RuntimeError, ValueError):  # a symbolic-link loop: not the same as an input that exists
        return False


def output_path(path):
    """`path` read lexically (``out/../x.wav`` is ``x.wav``), so no folder is made only to be left again."""
    return Path(os.path.normpath(os.fspath(path)))


def check_output_file(path, *, suffixes, inputs=(), key="--output", make_folder=False):
    """Check that `path` can take an output file; raise PatchError naming `key` if not.

    Parameters
    ----------
    path : str or Path
    suffixes : sequence of str
        Allowed suffixes, lower case with the dot (``(".csv",)``).
    inputs : iterable of str, Path or None
        Files this command reads (patch, song, map, spec); the output may not
        be any of them.  None entries are skipped.
    key : str
        The option that named `path`, e.g. ``--output`` or ``--csv``.
    make_folder : bool
        The folder will be created before writing, so it need not exist yet.

    Returns
    -------
    Path

    Notes
    -----
    One validator for every output file: a NUL byte, a name longer than
    :data:`NAME_MAX_BYTES`, a symbolic-link loop, a folder in the way and an
    input of the command are each refused with one line before anything is
    rendered.
    """
    text = os.fspath(path)
    if "\0" in text:
        raise option_error("the output path contains a NUL byte", key)
    path = Path(text)
    long = [part for part in path.parts if len(os.fsencode(part)) > NAME_MAX_BYTES]
    if long:
        raise option_error(f"the name {long[0][:40]!r}... is {len(os.fsencode(long[0]))} bytes long "
                           f"(file systems take at most {NAME_MAX_BYTES})", key)
    if path.suffix.lower() not in suffixes:
        raise option_error(f"output must end in {' or '.join(suffixes)}, got {path.name[:80]!r}", key)
    for source in inputs:
        if source is not None and _same_file(path, source):
            raise option_error(f"{str(path)!r} is an input of this command; name another file", key)
    try:
        path.resolve(strict=False)
        if path.is_dir():
            raise option_error(f"{str(path)!r} is a folder; name a file inside it", key)
        folder = path.parent
        if folder.exists() and not folder.is_dir():
            raise option_error(f"{str(folder)!r} is not a folder", key)
        if not make_folder and not folder.exists():
            raise option_error(f"output folder {str(folder)!r} does not exist", key)
    except RuntimeError:  # Path.resolve: "Symlink loop"
        raise option_error(f"{str(path)!r} runs through a loop of symbolic links", key) from None
    except OSError as error:
        raise option_error(f"cannot use {str(path)!r}: {error.strerror or error}", key) from None
    return path


def check_output_path(path, bit_depth, *, inputs=(), key="--output", make_folder=False):
    """Raise PatchError if `path` cannot take a render of `bit_depth`; return the soundfile format.

    `inputs`, `key` and `make_folder` are as in :func:`check_output_file`.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix in FORMATS:
        fmt, depths = FORMATS[suffix]
        if bit_depth not in depths:
            raise option_error(f"{fmt} cannot hold {int(bit_depth)}-bit samples (allowed: {', '.join(map(str, depths))})", key)
    check_output_file(path, suffixes=tuple(FORMATS), inputs=inputs, key=key, make_folder=make_folder)
    return FORMATS[suffix][0]


def make_output_folder(path):
    """Create the folder of output file `path` (and its parents); RenderError if it cannot."""
    folder = Path(path).parent
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise RenderError(f"cannot create the output folder {str(folder)!r}: {error.strerror or error}") from None


def whole_sample_rate(sample_rate):
    """`sample_rate` as an int, or ValueError if it is not a positive whole number of Hz.

    A WAV or FLAC header holds a whole number: truncating 44100.5 to 44100
    would play the render at the wrong speed.
    """
    try:
        whole = int(sample_rate)
    except (TypeError, ValueError, OverflowError):
        raise ValueError(f"sample_rate={sample_rate!r} must be a whole number of Hz") from None
    if whole != sample_rate or whole <= 0:
        raise ValueError(f"sample_rate={sample_rate!r} must be a whole number of Hz > 0")
    return whole


class atomic_output:
    """Context manager: yields a temporary path beside `path`, renamed on success.

    On any exception (Ctrl-C included) the temporary file is removed and
    `path` is left untouched.  An OSError (no permission, a folder in the
    way, a full disk) becomes a one-line error naming `path`: a PatchError
    about option `key` (``command line: --output: ...``), or, with `key`
    None, a RenderError.
    """

    def __init__(self, path, *, key=None):
        self.path = Path(path)
        self.key = key
        self.tmp = None

    def _error(self, error):
        lines = str(error).strip().splitlines()
        reason = getattr(error, "strerror", None) or (lines[-1][:200] if lines else type(error).__name__)
        message = f"cannot write {str(self.path)!r}: {reason}"
        if self.key is None:
            return RenderError(message)
        return option_error(message, self.key)

    def _remove(self):
        if self.tmp is not None:
            try:
                self.tmp.unlink()
            except OSError:
                pass

    def __enter__(self):
        try:
            handle, name = tempfile.mkstemp(prefix=f".{self.path.stem}.", suffix=".part" + self.path.suffix, dir=self.path.parent)
            os.close(handle)
        except OSError as error:
            raise self._error(error) from None
        self.tmp = Path(name)
        return self.tmp

    def __exit__(self, kind, value, traceback):
        if kind is None:
            try:
                umask = os.umask(0)
                os.umask(umask)
                os.chmod(self.tmp, 0o666 & ~umask)  # mkstemp makes 0600; give the usual mode
                os.replace(self.tmp, self.path)
            except OSError as error:
                self._remove()
                raise self._error(error) from None
            return False
        self._remove()
        if issubclass(kind, OSError) or _is_soundfile_error(value):
            raise self._error(value) from None  # e.g. the disk filled up while writing
        return False


def _is_soundfile_error(error):
    """True for libsndfile's errors (soundfile raises RuntimeError subclasses, not OSError, for a full disk)."""
    soundfile = sys.modules.get("soundfile")
    return soundfile is not None and isinstance(error, getattr(soundfile, "SoundFileError", ()))


def sampler_fields(pitch_midi, *, low_note=0, high_note=127, low_velocity=1, high_velocity=127):
    """The ``smpl`` / ``inst`` chunk fields of a sample sounding at fractional MIDI pitch `pitch_midi`.

    ``smpl`` gives that pitch (the unity note below it and the upward
    fraction of a semitone); ``inst`` names the nearest note and the fine
    tune that would bring the sample onto it (the RIFF "shift needed to hit"
    the unshifted note), with the key and velocity range it is mapped to.
    See :func:`synth.wavmeta.add_sampler_chunks`.
    """
    unity = math.floor(pitch_midi)
    nearest = int(round(pitch_midi))
    return {
        "unity_note": int(np.clip(unity, 0, 127)),
        "pitch_fraction_cents": min((pitch_midi - unity) * 100.0, 99.999),
        "unshifted_note": int(np.clip(nearest, 0, 127)),
        "fine_tune_cents": float(np.clip(round((nearest - pitch_midi) * 100.0), -50, 50)),
        "low_note": int(low_note), "high_note": int(high_note),
        "low_velocity": int(low_velocity), "high_velocity": int(high_velocity),
    }


def encode_wav(data, *, sample_rate, bit_depth, sampler=None):
    """The bytes of a WAV file of quantised `data` (:func:`quantise`), with sampler chunks.

    libsndfile's ``PEAK`` chunk (32-bit float files) is removed: it carries a
    wall-clock time, so two renders of one signal would differ.  With
    `sampler` (:func:`sampler_fields`) a ``smpl`` and an ``inst`` chunk are added.
    """
    import io

    import soundfile

    from .wavmeta import add_sampler_chunks, strip_chunks

    buffer = io.BytesIO()
    soundfile.write(buffer, data, int(sample_rate), subtype=SUBTYPES[bit_depth], format="WAV")
    wav = strip_chunks(buffer.getvalue())
    if sampler is not None:
        wav = add_sampler_chunks(wav, sample_rate=int(sample_rate), **sampler)
    return wav


def write_audio(path, signal, *, sample_rate, bit_depth, seed=DITHER_SEED, key=None, sampler=None):
    """Write `signal` (already normalised, |x| <= 1) atomically as WAV (or RF64) or FLAC.

    Parameters
    ----------
    path : str or Path
        ``.wav`` or ``.flac``.
    signal : ndarray [shape=(n,) or (n, channels)], float
    sample_rate : int > 0, Hz
        A whole number (a float such as 44100.0 is fine).
    bit_depth : {16, 24, 32}
    seed : int
        Seed of the 16-bit TPDF dither (off over the last 10 ms, :func:`dither_gain`).
    key : str or None
        The option that named `path`, for the error if it cannot be written
        (see :class:`atomic_output`).
    sampler : dict or None
        ``smpl`` / ``inst`` fields (:func:`sampler_fields`) for a WAV file.

    Returns
    -------
    Path

    Raises
    ------
    ValueError
        If `sample_rate` is not a whole number of Hz.
    PatchError, RenderError
        If `path` is refused or cannot be written; nothing is left behind.

    Notes
    -----
    A WAV file's sizes are 32-bit: a signal that would pass 4 GiB is written
    as RF64 (the EBU's 64-bit WAV, which libsndfile writes) and never
    truncated; such a file carries no sampler chunks.
    """
    import soundfile

    from .wavmeta import needs_rf64

    fmt = check_output_path(path, bit_depth)
    rate = whole_sample_rate(sample_rate)
    data = quantise(signal, bit_depth, seed=seed, dither=dither_gain(np.shape(signal)[0], sample_rate=rate))
    frames = data.shape[0]
    channels = 1 if data.ndim == 1 else data.shape[1]
    with atomic_output(path, key=key) as tmp:
        if fmt == "WAV" and needs_rf64(frames, channels, BYTES_PER_SAMPLE[bit_depth]):
            soundfile.write(str(tmp), data, rate, subtype=SUBTYPES[bit_depth], format="RF64")
        elif fmt == "WAV":
            tmp.write_bytes(encode_wav(data, sample_rate=rate, bit_depth=bit_depth, sampler=sampler))
        else:
            soundfile.write(str(tmp), data, rate, subtype=SUBTYPES[bit_depth], format=fmt)
    return Path(path)
