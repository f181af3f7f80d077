"""Render a patch and write it, as ``synth render`` does, from Python.

A thin layer over :mod:`synth.pipeline`, :mod:`synth.voicing` and
:mod:`synth.audio`: :func:`render` takes the steps of the ``render`` command
(partial table, ending, render, normalisation) and returns the normalised
signal with what was used to make it; :func:`write_audio` writes a signal as
the command writes its file.  Nothing here reads files, and only
:func:`write_audio` writes one.
"""
from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

import numpy as np

from .errors import PatchError, option_error
from .units import short_repr

__all__ = ["Rendered", "render", "voiced", "check_velocity", "write_audio", "WAV_BIT_DEPTHS"]

#: Bit depths :func:`write_audio` writes: 16-bit PCM (TPDF-dithered), 24-bit PCM, 32-bit float.
WAV_BIT_DEPTHS = (16, 24, 32)
#: MIDI velocities (the MIDI 1.0 note-on range; 0 is a note-off).
MIN_VELOCITY, MAX_VELOCITY = 1, 127


@dataclass(frozen=True)
class Rendered:
    """A rendered patch: the normalised signal and what was used to make it.

    Returned by :func:`render`; the signal is what ``synth render`` writes.

    Attributes
    ----------
    signal : ndarray [shape=(n,)], float32
        The samples, normalised as the patch's ``render`` section says
        (``peak_db``, ``peak``); read-only.
    sample_rate : int, Hz
    bit_depth : {16, 24, 32}
        The patch's ``render.bit_depth``: what :func:`write_audio` should
        write to give the command's file.
    table : PartialTable
        The partials rendered (every mode below Nyquist, with its level, T60
        and phase).
    ending : synth.tone.Ending
        How the file ends: its length in samples, where the damper falls, a
        fade (:func:`synth.pipeline.patch_ending`).
    gain_db : float, dB
        Gain the normalisation applied to the patch's absolute scale (0 with
        ``render.peak_db: null``); higher for a quieter note.
    peak_dbfs : float, dBFS
        Largest |sample| of `signal` (-inf for silence).

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: reed-bar
    ... resonator: {type: bar, material: aluminium-6061, length: 200 mm, width: 25 mm, thickness: 6 mm}
    ... excitation: {type: strike, position: 0.5}
    ... render: {duration: 0.1 s, sample_rate: 16000, peak: sample, peak_db: -6}
    ... ''')
    >>> rendered = synth.render(patch)
    >>> rendered.signal.shape, rendered.signal.dtype.name, rendered.sample_rate
    ((1600,), 'float32', 16000)
    >>> round(rendered.peak_dbfs, 2)
    -6.0
    >>> rendered.ending.n_samples == len(rendered.signal)
    True
    """

    signal: np.ndarray
    sample_rate: int
    bit_depth: int
    table: object  # PartialTable
    ending: object  # synth.tone.Ending
    gain_db: float
    peak_dbfs: float

    @property
    def duration_s(self):
        """Length of `signal` in seconds."""
        return len(self.signal) / self.sample_rate


def check_velocity(velocity, *, option=None):
    """`velocity` as an int MIDI velocity 1..127, or a one-line PatchError (a ValueError).

    Parameters
    ----------
    velocity : int or str
        A whole number 1..127: an int, a float with no fraction (``64.0``)
        or the text of a whole number (``"64"``, as a command line gives it).
    option : str or None
        The command-line option that gave it (``"--velocity"``): the error
        then reads ``command line: --velocity: ...``; None names the
        argument ``velocity``.

    Returns
    -------
    int

    Raises
    ------
    PatchError
        If `velocity` is not a whole number in 1..127.

    Examples
    --------
    >>> from synth.api import check_velocity
    >>> check_velocity(64), check_velocity("127"), check_velocity(90.0)
    (64, 127, 90)
    >>> check_velocity(0)
    Traceback (most recent call last):
    ...
    synth.errors.PatchError: velocity: must be a whole number 1..127 (MIDI; 100 plays the patch as written), got 0
    >>> check_velocity(12.5, option="--velocity")
    Traceback (most recent call last):
    ...
    synth.errors.PatchError: command line: --velocity: must be a whole number 1..127 (MIDI; 100 plays the patch as written), got 12.5
    """
    value = velocity
    if isinstance(value, str):
        text = value.strip()
        try:
            value = int(text, 10)
        except ValueError:
            value = None
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        value = None
    elif not isinstance(value, numbers.Integral):
        value = int(value) if math.isfinite(value) and float(value).is_integer() else None
    if value is None or not MIN_VELOCITY <= value <= MAX_VELOCITY:
        message = (f"must be a whole number {MIN_VELOCITY}..{MAX_VELOCITY} (MIDI; 100 plays the patch as written), "
                   f"got {short_repr(velocity)}")
        raise option_error(message, option) if option else PatchError(message, key="velocity")
    return int(value)


def voiced(patch, velocity, *, option=None):
    """`patch` voiced for MIDI `velocity`, as a MIDI file or a batch library plays a note.

    The excitation is scaled by :func:`synth.voicing.voice_patch`: its
    strength in proportion to the velocity, a strike's contact time shorter
    for a harder blow (so a brighter sound).  The pitch is not changed.

    Parameters
    ----------
    patch : Patch
    velocity : int, str or None
        MIDI velocity 1..127 (see :func:`check_velocity`).  None, or
        :data:`synth.voicing.REFERENCE_VELOCITY` (100), is the patch as
        written: `patch` itself is returned, so a render of it is the same
        sample for sample.
    option : str or None
        The command-line option that gave `velocity`, named in its error
        (``"--velocity"``).

    Returns
    -------
    Patch

    Raises
    ------
    PatchError
        If `velocity` is not a whole number in 1..127.

    Examples
    --------
    >>> import synth
    >>> from synth.api import voiced
    >>> patch = synth.patch_from_text('''
    ... name: felt-on-wire
    ... resonator: {type: string, material: music-wire, length: 500 mm, diameter: 0.7 mm, pitch: D3}
    ... excitation: {type: strike, position: 0.125, contact_time: 2 ms}
    ... ''')
    >>> soft = voiced(patch, 50)
    >>> soft.excitation.strength, round(soft.excitation.contact_time * 1e3, 2)  # ms: a longer, softer blow
    (0.5, 2.69)
    >>> voiced(patch, None) is patch, voiced(patch, 100) is patch
    (True, True)
    """
    from .voicing import REFERENCE_VELOCITY, voice_patch

    if velocity is None:
        return patch
    velocity = check_velocity(velocity, option=option)
    if velocity == REFERENCE_VELOCITY:
        return patch
    return voice_patch(patch, velocity=velocity)


def render(patch, *, velocity=None, cache=None):
    """Render `patch` as ``synth render`` does, without writing a file.

    The steps of the command: the partial table
    (:func:`synth.pipeline.partial_table`), the file's ending
    (:func:`synth.pipeline.patch_ending`: ``render.duration``, or until the
    sound has decayed 90 dB), the render (:func:`synth.pipeline.render_patch`)
    and the normalisation of ``render.peak_db`` (the true peak, or the largest
    sample with ``render.peak: sample``).

    Parameters
    ----------
    patch : Patch
        As loaded (:func:`synth.load_patch`), retuned (:func:`synth.retune`)
        or changed with :func:`dataclasses.replace`.
    velocity : int or None
        MIDI velocity 1..127, voiced as a MIDI file or a batch library voices
        a note (:func:`voiced`); None (the default) or 100 renders the patch
        as written.
    cache : SolveCache or None
        Where the modes are solved (default: the process-wide cache).

    Returns
    -------
    Rendered
        The normalised float32 signal, its sample rate and bit depth, the
        partial table, the ending, the gain applied and the peak.

    Raises
    ------
    PatchError
        If `velocity` is not a whole number in 1..127, or the patch cannot
        sound (every mode above Nyquist, the excitation on a node of every
        mode, ...), naming the key to change.
    RenderError
        If ``render.peak_db`` is null and the signal would clip.
    TypeError
        If `patch` is not a :class:`~synth.patch.Patch`.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: skin-tap
    ... resonator: {type: membrane, shape: circle, radius: 15 cm, tension: 1500 N/m, areal_density: 0.2 kg/m^2}
    ... excitation: {type: strike, position: {radius: 0.4}, contact_time: 1 ms}
    ... render: {duration: 0.2 s, sample_rate: 8000, max_modes: 12}
    ... ''')
    >>> loud, soft = synth.render(patch, velocity=120), synth.render(patch, velocity=30)
    >>> len(loud.signal), round(loud.table.fundamental_hz, 1)
    (1600, 221.0)
    >>> max(loud.peak_dbfs, soft.peak_dbfs) < -0.99  # both normalised to a -1 dBTP true peak
    True
    >>> round(soft.gain_db - loud.gain_db)  # the soft note needed more gain: it was quieter
    18
    """
    from .audio import normalise, peak_dbfs
    from .patch import Patch
    from .pipeline import partial_table, patch_ending, render_patch

    if not isinstance(patch, Patch):
        raise TypeError(f"render() takes a Patch (from synth.load_patch or synth.patch_from_text), "
                        f"got {type(patch).__name__}")
    patch = voiced(patch, velocity)
    settings = patch.render
    table = partial_table(patch, cache=cache)
    ending = patch_ending(patch, table)
    signal, table = render_patch(patch, table=table, ending=ending)
    scaled, gain_db = normalise(signal, peak_db=settings.peak_db, bit_depth=settings.bit_depth, peak=settings.peak,
                                sample_rate=settings.sample_rate)
    scaled.flags.writeable = False
    return Rendered(signal=scaled, sample_rate=int(settings.sample_rate), bit_depth=int(settings.bit_depth),
                    table=table, ending=ending, gain_db=float(gain_db), peak_dbfs=peak_dbfs(scaled))


def _argument_error(error, key):
    """A PatchError of the audio module's option errors (``command line: --output: ...``) naming argument `key`."""
    return PatchError(error.message, key=key)


def _checked_signal(signal, bit_depth):
    """`signal` as a float array of shape (n,) or (n, 2), finite, fitting `bit_depth`; PatchError if not."""
    try:
        data = np.asarray(signal)
    except (TypeError, ValueError) as error:
        raise PatchError(f"must be an array of samples: {error}", key="signal") from None
    if data.dtype.kind != "f":
        raise PatchError(f"must hold floating-point samples (full scale is -1..1), got dtype {data.dtype}",
                         key="signal")
    if not (data.ndim == 1 or (data.ndim == 2 and data.shape[1] == 2)):
        raise PatchError(f"must have shape (n,) (mono) or (n, 2) (stereo), got {data.shape}", key="signal")
    if data.shape[0] == 0:
        raise PatchError("is empty: a file needs at least one sample", key="signal")
    if not np.all(np.isfinite(data)):
        raise PatchError("is not finite (NaN or inf)", key="signal")
    peak = float(np.max(np.abs(data)))
    if bit_depth != 32 and peak > 1.0:
        raise PatchError(
            f"peaks at {20.0 * math.log10(peak):+.2f} dBFS and would clip at {bit_depth} bits: scale it to "
            "|x| <= 1 (synth.render normalises) or write bit_depth=32 (float)", key="signal")
    return data


def _checked_sample_rate(sample_rate):
    """`sample_rate` as an int in the range a patch allows; PatchError if not."""
    from .patch import MAX_SAMPLE_RATE, MIN_SAMPLE_RATE

    whole = None
    if isinstance(sample_rate, numbers.Real) and not isinstance(sample_rate, (bool, np.bool_)):
        if math.isfinite(sample_rate) and float(sample_rate).is_integer():
            whole = int(sample_rate)
    if whole is None or not MIN_SAMPLE_RATE <= whole <= MAX_SAMPLE_RATE:
        raise PatchError(f"must be a whole number of Hz, {MIN_SAMPLE_RATE}..{MAX_SAMPLE_RATE}, "
                         f"got {short_repr(sample_rate)}", key="sample_rate")
    return whole


def write_audio(path, signal, *, sample_rate, bit_depth=24, pitch=None):
    """Write `signal` to a WAV file atomically, as ``synth render`` writes its file.

    The file is written under a temporary name in the target folder and
    renamed when complete, so an interrupted or failed write leaves nothing
    behind and never a broken file; an existing file at `path` is replaced.
    16-bit samples get TPDF dither (triangular, +-1 LSB, from a fixed seed:
    the same signal gives the same bytes; off over the last 10 ms, so a file
    whose sound has ended ends in digital silence); 24-bit samples are
    rounded; 32-bit samples are IEEE float.

    Parameters
    ----------
    path : str or os.PathLike
        A file name ending in ``.wav``, in a folder that exists.
    signal : array_like [shape=(n,) or (n, 2)], float
        Mono, or stereo as (left, right) columns; finite, full scale -1..1
        (at 16 and 24 bits a sample beyond it is refused, not clipped).
    sample_rate : int, Hz
        A whole number of Hz, 1000..768000 (as a patch's ``render.sample_rate``).
    bit_depth : {16, 24, 32}
        Bits per sample: 16 or 24 (PCM) or 32 (float).  Default 24.
    pitch : str, float or None
        The pitch the sound has (a note name, Hz, or a frequency with its
        unit, as :func:`synth.retune` takes it): the file then carries
        ``smpl`` and ``inst`` chunks giving it to a sampler, as the files of
        ``synth render`` do (pass ``rendered.table.fundamental_hz``).  None:
        no sampler chunks.

    Returns
    -------
    pathlib.Path
        `path`.

    Raises
    ------
    PatchError
        One line naming the argument that is wrong (``path``, ``signal``,
        ``sample_rate``, ``bit_depth`` or ``pitch``) and what is allowed: a
        path that is not ``.wav``, is a folder or is in a folder that does not
        exist; a signal that is empty, not float, not finite, of another
        shape, or that would clip.  PatchError is a ValueError.
    RenderError
        If the file cannot be written (no permission, a full disk); nothing
        is left behind.

    See Also
    --------
    render : the signal and bit depth of a patch, ready to write.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> import numpy as np
    >>> import synth
    >>> tone = 0.5 * np.sin(2 * np.pi * 440.0 * np.arange(800) / 8000.0)
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = synth.write_audio(pathlib.Path(folder) / "a4.wav", tone, sample_rate=8000, bit_depth=16)
    ...     print(path.name, path.stat().st_size > 1600, sorted(p.name for p in pathlib.Path(folder).iterdir()))
    a4.wav True ['a4.wav']
    >>> synth.write_audio("a4.mp3", tone, sample_rate=8000)
    Traceback (most recent call last):
    ...
    synth.errors.PatchError: path: output must end in .wav, got 'a4.mp3'
    """
    from . import audio

    if isinstance(bit_depth, (bool, np.bool_)) or bit_depth not in WAV_BIT_DEPTHS:
        raise PatchError(f"must be one of {', '.join(map(str, WAV_BIT_DEPTHS))}, got {short_repr(bit_depth)}",
                         key="bit_depth")
    bit_depth = int(bit_depth)
    rate = _checked_sample_rate(sample_rate)
    try:
        audio.check_output_file(path, suffixes=(".wav",), key="path")
    except PatchError as error:
        raise _argument_error(error, "path") from None
    data = _checked_signal(signal, bit_depth)
    sampler = None
    if pitch is not None:
        from .schema import Field, convert
        from .units import hz_to_midi

        try:
            pitch_hz = convert(Field("pitch", positive=True), pitch)
        except ValueError as error:
            raise PatchError(str(error), key="pitch") from None
        sampler = audio.sampler_fields(float(hz_to_midi(pitch_hz)))
    return audio.write_audio(path, data, sample_rate=rate, bit_depth=bit_depth, sampler=sampler)
