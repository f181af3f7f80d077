"""What a worker does for one library job: render, scale, dither, encode, measure.

Pure functions of the task (:func:`execute` runs one): a task carries partial
tables solved in the parent, once per object, never a patch, so a worker only
renders, encodes and measures; it is the same in this process, a local pool
and a Dask cluster, which is why they write the same bytes.
"""
from __future__ import annotations

import os
import tempfile
import threading
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .audio import dither_gain, encode_wav, normalise, peak_dbfs, quantise
from .damping import LN1000
from .errors import ModalError
from .library import loudness_lufs
from .pipeline import partial_table
from .tone import END_DB, Tone, end_target_db, plan_ending, render_tone

__all__ = ["RenderRequest", "execute", "audible", "measure_patch_peak", "PEAK_PREFIX_S", "WORKER_PRELOAD"]

PEAK_PREFIX_S = 0.25  # s, first span rendered when measuring a job's peak (doubled until exact)
#: What a local worker needs beyond this module, imported once in the fork server.
WORKER_PRELOAD = ("soundfile", "threadpoolctl", "synth.loudness")

# ---------------------------------------------------------------------------
# Work done in the workers (or inline): pure functions of the task.  A task
# carries partial tables (solved in the parent, once per object), never a
# patch: a worker only renders, encodes and measures.

_CONTROLLER = None


def _one_blas_thread():
    """A context limiting BLAS to one thread (the same sums on every machine and pool size)."""
    global _CONTROLLER
    if _CONTROLLER is None:
        from threadpoolctl import ThreadpoolController

        _CONTROLLER = ThreadpoolController()
    return _CONTROLLER.limit(limits=1)


@dataclass(frozen=True)
class RenderRequest:
    """How every sample of a library is rendered (the patch's render settings and damper).

    duration : float or "auto", s; sample_rate : int, Hz; bit_depth : int;
    absolute : bool (``peak_db: null``); peak : {"true", "sample"} (what the
    gain normalises); release_t60 : float or None, s; end_db : float (dB re
    the peak a file ends below, :func:`synth.tone.end_target_db`).
    """

    duration: object
    sample_rate: int
    bit_depth: int
    absolute: bool
    peak: str
    release_t60: object
    end_db: float = END_DB

    @classmethod
    def of(cls, patch):
        render = patch.render
        return cls(render.duration, render.sample_rate, render.bit_depth, render.peak_db is None, render.peak,
                   patch.damping.release_t60, end_target_db(render.bit_depth, render.peak_db))

    def ending(self, tone, gain=None):
        """How the file of `tone` ends (:func:`synth.tone.plan_ending`); with the library `gain`, the
        integer formats' rounding is allowed for, so a soft sample ends below the target too."""
        floor = 0.0
        if gain is not None and gain > 0 and self.bit_depth in (16, 24):
            floor = 0.5 / (32767.0 if self.bit_depth == 16 else 8388607.0) / gain  # half an LSB, in tone units
        return plan_ending(tone, duration=self.duration, sample_rate=self.sample_rate,
                           release_t60=self.release_t60, end_db=self.end_db, floor=floor)


def audible(table):
    """The :class:`~synth.tone.Tone` arrays (frequency, t60, amplitude, phase, onset) of a table."""
    return Tone.from_table(table).arrays()


def _tone(arrays):
    frequency, t60, amplitude, phase, onset = arrays
    return Tone(frequency, amplitude, phase, t60, onset, float(frequency[0]) if len(frequency) else 0.0)


def _peak_measure(mode):
    """The function measuring a signal's peak for ``render.peak`` `mode`."""
    if mode == "true":
        from .truepeak import true_peak

        return true_peak
    return lambda signal, sample_rate: float(np.max(np.abs(signal))) if signal.size else 0.0


def _peak_of(tone, request):
    """The exact peak (sample or true, per `request`) of the file `tone` renders to.

    Renders spans of 0.25 s, 0.5 s, ... of the file (onset, ending and all)
    until the decay bound ``sum |a| exp(-ln(1000) t / T60)``, which no later
    sample can exceed, falls below the peak found (see the module notes).
    """
    ending = request.ending(tone)
    measure = _peak_measure(request.peak)
    rate, total = request.sample_rate, ending.n_samples
    amplitude, t60 = np.abs(tone.amplitude), tone.t60_s
    span = PEAK_PREFIX_S
    while True:
        n = min(int(round(span * rate)), total)
        damper = None if ending.damper is None or ending.damper >= n else ending.damper
        samples = render_tone(tone, n, rate, damper=damper, release_t60=request.release_t60,
                              fade=ending.fade if n == total else 0)
        peak = measure(samples, rate)
        if n >= total:
            return peak
        bound = float(np.sum(amplitude * np.exp(-LN1000 * (n / rate) / t60)))
        if bound <= peak:
            return peak
        span *= 2.0


def measure_patch_peak(patch):
    """The exact peak of `patch`'s unnormalised file (sample or true, per ``render.peak``)."""
    return _peak_of(Tone.from_table(partial_table(patch)), RenderRequest.of(patch))


def _render_sample(arrays, request, gain, seed, target=None, sampler=None):
    """Render, scale, dither and encode one sample; measure it.

    Returns a dict with the measurements and either ``wav`` (the file's
    bytes) or, when `target` ``(folder, file name)`` is given (a worker on
    this machine), ``part``: the path of a temporary file the worker wrote
    beside the final one, which the parent renames into place.  `sampler`
    holds the ``smpl`` / ``inst`` chunk fields (:func:`synth.wavmeta.add_sampler_chunks`).
    """
    from .truepeak import true_peak_dbtp

    tone = _tone(arrays)
    rate, bit_depth = request.sample_rate, request.bit_depth
    ending = request.ending(tone, gain)
    n = ending.n_samples
    signal = render_tone(tone, n, rate, damper=ending.damper, release_t60=request.release_t60, fade=ending.fade,
                         out=_reused("signal", n, np.float32))
    scaled = _reused("scaled", n, np.float64)
    np.multiply(signal, gain, out=scaled, dtype=np.float64)
    if request.absolute:
        normalise(scaled, peak_db=None, bit_depth=bit_depth)  # raises RenderError if it would clip
    data = quantise(scaled, bit_depth, seed=seed, dither=dither_gain(n, sample_rate=rate) if bit_depth == 16 else None)
    loudness, note = loudness_lufs(scaled, rate)
    result = {"peak_dbfs": peak_dbfs(scaled), "true_peak_dbtp": true_peak_dbtp(scaled, rate),
              "loudness_lufs": loudness, "loudness_note": note, "duration_s": n / rate,
              "ending": ending.describe(rate), "cut_db": ending.cut_db}
    wav = encode_wav(data, sample_rate=rate, bit_depth=bit_depth, sampler=sampler)
    if target is None:
        result["wav"] = wav
        return result
    folder, name = target
    handle, part = tempfile.mkstemp(prefix=f".{Path(name).stem}.", suffix=".part.wav", dir=folder)
    try:
        with os.fdopen(handle, "wb") as stream:
            stream.write(wav)
    except BaseException:
        Path(part).unlink(missing_ok=True)
        raise
    result["part"], result["bytes"] = part, len(wav)
    return result


_REUSED = threading.local()  # per-thread buffers of the worker loop, by name (fresh pages cost ~1 ms a job)


def _reused(name, size, dtype):
    """An array of `size` values reusing this thread's buffer `name` (contents undefined)."""
    buf = getattr(_REUSED, name, None)
    if buf is None or buf.size < size or buf.dtype != dtype:
        buf = np.empty(size, dtype)
        setattr(_REUSED, name, buf)
    return buf[:size]


def _one(kind, request, item):
    """("ok", value) or ("error", message) of one job of a task -- never raises."""
    try:
        request = item[-1] if isinstance(item[-1], RenderRequest) else request  # a key's own damper
        if kind == "peak":
            return "ok", _peak_of(_tone(item[1]), request)
        return "ok", _render_sample(item[1], request, item[2], item[3], item[4], item[5])
    except (ModalError, ValueError) as error:
        return "error", str(error)
    except Exception as error:  # noqa: BLE001 - one broken job must not stop the library
        return "error", f"internal error ({type(error).__name__}: {error}); please report this patch"


def execute(task):
    """Run one task ``(kind, settings, [(job index, modes, ...), ...])``: [(job index, status, value)]."""
    kind, settings, items = task
    with _one_blas_thread():
        return [(item[0], *_one(kind, settings, item)) for item in items]


