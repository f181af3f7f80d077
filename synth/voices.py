"""Voices of a MIDI render: one struck note of a patch, rendered in segments.

A voice is the partial table of a patch voiced for one note (retuned to the
note's pitch, scaled by its velocity: :func:`synth.voicing.voice_patch`),
struck at an onset sample.  It rings with the patch's own T60s until its
damper falls; from then on every mode decays with
``T60 = min(own T60, damping.release_t60)``.  Pitch bend multiplies every
mode frequency by the channel's bend ratio.

Each change (the damper, a bend step) starts a new segment, and the engine
renders the segment from the exact state of every mode at that sample: after
L samples of a segment with per-sample decay sigma_m and frequency omega_m,

    a_m <- a_m exp(-sigma_m L),    phi_m <- phi_m + omega_m L,

so the signal and every mode's phase are continuous across the change.  A
voice ends when the bound sum_m |a_m| e^(-sigma_m n) on its envelope has
fallen :data:`DECAY_DB` below its value at the onset, so its cost is bounded
whatever the length of the song.

This module also holds the per-note cache of voiced partials, the pan law
and the chunked, normalised writing of the song buffer.
"""
from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from .audio import (
    BYTES_PER_SAMPLE,
    DITHER_SEED,
    SUBTYPES,
    atomic_output,
    check_output_path,
    dither_gain,
    normalise,
    quantise,
    whole_sample_rate,
)
from .damping import LN1000
from .engine import render_modes
from .modes import frozen_array
from .pipeline import unweighted_partials, weigh
from .tone import Tone, decay_samples
from .wavmeta import needs_rf64, zero_peak_timestamp
from .tone import envelope as _envelope
from .voicing import voice_patch

__all__ = [
    "DECAY_DB",
    "MAX_SEGMENT_SAMPLES",
    "BEND_STEP_S",
    "Tone",
    "VoicingCache",
    "pan_gains",
    "decay_samples",
    "voice_end",
    "quantise_bends",
    "render_voice",
    "write_song",
]

DECAY_DB = 100.0  # dB below its start at which a voice stops being rendered
MAX_SEGMENT_SAMPLES = 1 << 16  # samples; longest single engine call (bounds working memory)
BEND_STEP_S = 0.002  # s; pitch-bend changes are placed on a grid of this step
WRITE_CHUNK_FRAMES = 1 << 16  # frames converted and written at a time


class VoicingCache:
    """Voiced partials per (patch, note, velocity, A4), each computed once.

    Parameters
    ----------
    patches : sequence of Patch
        Indexed by the ``patch_index`` of :meth:`tone`.
    a4_hz : float or None, Hz
        Tuning reference for 12-TET note frequencies (None: 440 Hz for a
        patch, an instrument's own ``tuning.a4``).

    Attributes
    ----------
    solves : int
        How many notes were prepared (each object's modes placed and damped
        once; the solve itself is shared further through
        :data:`synth.solvecache.DEFAULT_CACHE`).

    Notes
    -----
    Only the compact :class:`Tone` is kept, not the whole partial table with
    its per-mode report columns, so a file that uses thousands of distinct
    note/velocity pairs stays small in memory.
    """

    def __init__(self, patches, *, a4_hz=None):
        self.patches = tuple(patches)
        self.a4_hz = None if a4_hz is None else float(a4_hz)
        self.solves = 0
        self._tones = {}
        self._notes = {}  # (patch_index, note) -> unweighted partials: shared by every velocity
        self._weighed_notes = {}  # (patch_index, note, a4) -> (Tone, strength): scaled for other velocities

    def tone(self, patch_index, note, velocity):
        """The :class:`Tone` of MIDI `note` (0..127) at `velocity` (1..127).

        The object voiced for the note is prepared once (modes placed,
        damped, cut at Nyquist); a velocity only reweights it.

        Raises
        ------
        PatchError
            If the patch cannot reach the note's pitch (or has nothing to sound there).
        """
        key = (patch_index, int(note), int(velocity), self.a4_hz)
        tone = self._tones.get(key)
        if tone is None:
            voiced = voice_patch(self.patches[patch_index], midi_note=int(note), velocity=int(velocity), a4_hz=self.a4_hz)
            unweighted = self._notes.get(key[:2])
            if unweighted is None:
                unweighted = self._notes[key[:2]] = unweighted_partials(voiced)
                self.solves += 1
            tone = self._weighed(key, voiced, unweighted)
            self._tones[key] = tone
        return tone

    def _weighed(self, key, voiced, unweighted):
        """The Tone of `voiced`; where velocity changes only the strength (a pluck or an impulse: the
        pulse's time course does not move), the note's first weighing is scaled, not repeated."""
        if voiced.excitation.kind == "strike":  # contact time moves with velocity: a pulse of its own
            return Tone.from_table(weigh(voiced, unweighted))
        patch_index, note, _velocity, a4 = key
        first = self._weighed_notes.get((patch_index, note, a4))
        if first is None:
            tone = Tone.from_table(weigh(voiced, unweighted))
            self._weighed_notes[(patch_index, note, a4)] = (tone, voiced.excitation.strength)
            return tone
        tone, strength = first
        if voiced.excitation.strength == strength:
            return tone
        scale = voiced.excitation.strength / strength  # amplitudes and onset are linear in the strength
        return replace(tone, amplitude=frozen_array(tone.amplitude * scale), onset=frozen_array(tone.onset * scale))

    def release_t60(self, patch_index, note):
        """The damper's T60 (s, or None: no dampers) of MIDI `note` on patch `patch_index` (an instrument's key's own)."""
        playable = self.patches[patch_index]
        key_patch = getattr(playable, "key_patch", None)
        if key_patch is None:
            return playable.damping.release_t60
        return key_patch(int(note), a4_hz=self.a4_hz).damping.release_t60

    def items(self):
        """((patch_index, note, velocity, a4_hz), Tone) of every voicing computed so far."""
        return self._tones.items()


def pan_gains(pan):
    """(left, right) gains of a constant-power pan law.

    Parameters
    ----------
    pan : float in [-1, 1]
        -1 hard left, 0 centre, +1 hard right.

    Notes
    -----
    ``theta = (pan + 1) pi / 4``, gains ``(cos theta, sin theta)``: the
    power sum is 1 at every position, the centre is -3 dB per side
    (common practice for a sine-cosine pan law).

    >>> [round(g, 4) for g in pan_gains(0.0)]
    [0.7071, 0.7071]
    """
    theta = (min(max(float(pan), -1.0), 1.0) + 1.0) * math.pi / 4.0
    return math.cos(theta), math.sin(theta)


def _sigma(t60_s, sample_rate):
    """Per-sample decay rate (nepers per sample) of each T60 (s)."""
    return LN1000 / (np.asarray(t60_s, dtype=np.float64) * sample_rate)


def voice_end(tone, *, onset, damper, release_t60, sample_rate):
    """Sample at which a voice has decayed :data:`DECAY_DB` below its start.

    Parameters
    ----------
    tone : Tone
    onset : int, samples
    damper : int or None, samples
        When the damper falls (None: never).
    release_t60 : float > 0, s
    sample_rate : float, Hz

    Returns
    -------
    float
        An absolute sample index (``inf`` if the voice never decays).
    """
    amp = np.abs(tone.amplitude)
    level = 10.0 ** (-DECAY_DB / 20.0) * float(np.sum(amp))
    sigma = _sigma(tone.t60_s, sample_rate)
    if damper is not None and release_t60 is not None:
        held = max(damper - onset, 0)
        # The free decay ends at or before the damper exactly when the bound has
        # reached the level by then (it only falls): only then is it needed.
        if _envelope(amp, sigma, held) > level:
            amp = amp * np.exp(-sigma * held)
            release = _sigma(np.minimum(tone.t60_s, release_t60), sample_rate)
            return onset + held + decay_samples(amp, release, level)
    return onset + decay_samples(amp, sigma, level)


def quantise_bends(samples, ratios, sample_rate, *, step_s=BEND_STEP_S):
    """Place pitch-bend changes on a grid of `step_s`; the last value in a step wins.

    Returns
    -------
    samples : ndarray of int64, sorted, unique
    ratios : ndarray of float64
        Frequency ratio in effect from each sample on.
    """
    step = max(1, round(step_s * sample_rate))
    grid = {}
    for sample, ratio in zip(samples, ratios):
        grid[int(round(sample / step)) * step] = float(ratio)  # a later change in the same step wins
    keys = sorted(grid)
    return np.array(keys, dtype=np.int64), np.array([grid[k] for k in keys], dtype=np.float64)


def _changes(onset, stop, damper, bend):
    """Sorted (sample, ratio or None) changes inside (onset, stop); None marks the damper."""
    changes = []
    if damper is not None and onset < damper < stop:
        changes.append((int(damper), None))
    if bend is not None:
        samples, ratios = bend
        first = int(np.searchsorted(samples, onset, side="right"))
        last = int(np.searchsorted(samples, stop, side="left"))
        changes.extend((int(s), float(r)) for s, r in zip(samples[first:last], ratios[first:last]))
    changes.sort(key=lambda change: (change[0], change[1] is not None))
    return changes


def _bend_at(bend, sample):
    """Bend ratio in effect at `sample` (1 before any bend)."""
    if bend is None:
        return 1.0
    samples, ratios = bend
    index = int(np.searchsorted(samples, sample, side="right")) - 1
    return float(ratios[index]) if index >= 0 else 1.0


def render_voice(tone, *, onset, stop, damper, release_t60, sample_rate, bend=None):
    """Render one voice, segment by segment.

    Parameters
    ----------
    tone : Tone
    onset : int, samples
        First sample of the voice (absolute).
    stop : int, samples
        Render up to (not including) this absolute sample.
    damper : int or None, samples
        Absolute sample at which the damper falls; at or before `onset`
        means the voice is damped from its first sample.
    release_t60 : float > 0 or None, s
        T60 ceiling after the damper falls (None: the patch has no dampers;
        the voice rings on).
    sample_rate : float, Hz
    bend : (samples, ratios) or None
        The channel's pitch-bend steps (:func:`quantise_bends`).

    Yields
    ------
    start : int
        Absolute sample of the segment's first value.
    signal : ndarray [shape=(L,)], float32
        L <= :data:`MAX_SEGMENT_SAMPLES`.

    Notes
    -----
    The voice starts with the tone's onset samples (while the excitation's
    force acts; neither a damper nor a bend changes them), then its modes.
    Modes whose bent frequency reaches Nyquist are silent in that segment
    (they keep their state, and sound again if the bend comes back down).
    """
    amp = np.array(tone.amplitude, dtype=np.float64)
    phase = np.array(tone.phase, dtype=np.float64)
    t60_free = np.asarray(tone.t60_s, dtype=np.float64)
    if release_t60 is None:  # no dampers: a key-up changes nothing
        damper = None
    t60_damped = t60_free if release_t60 is None else np.minimum(t60_free, release_t60)
    nyquist = 0.5 * sample_rate
    damped = damper is not None and damper <= onset
    ratio = _bend_at(bend, onset)
    changes = _changes(onset, stop, damper, bend)
    position, index = int(onset), 0
    n_on = min(tone.onset.size, max(int(stop) - position, 0))
    if n_on:
        yield position, np.asarray(tone.onset[:n_on], dtype=np.float32)
        amp *= np.exp(-_sigma(t60_free, sample_rate) * n_on)
        phase = np.mod(phase + (2.0 * math.pi / sample_rate) * tone.frequency_hz * ratio * n_on, 2.0 * math.pi)
        position += n_on
        index, damped, ratio = _apply_changes(changes, index, position, damped, ratio)
    while position < stop:
        boundary = changes[index][0] if index < len(changes) else stop
        end = min(boundary, position + MAX_SEGMENT_SAMPLES)
        length = end - position
        t60 = t60_damped if damped else t60_free
        frequency = tone.frequency_hz * ratio
        on = frequency < nyquist
        signal = render_modes(frequency[on], t60[on], amp[on], length / sample_rate, sample_rate, phase=phase[on])
        yield position, _exact_length(signal, length)
        amp *= np.exp(-_sigma(t60, sample_rate) * length)
        phase = np.mod(phase + (2.0 * math.pi / sample_rate) * frequency * length, 2.0 * math.pi)
        position = end
        index, damped, ratio = _apply_changes(changes, index, position, damped, ratio)


def _apply_changes(changes, index, position, damped, ratio):
    """(index, damped, ratio) after the changes up to `position`: a damper (None) or a new bend ratio."""
    while index < len(changes) and changes[index][0] <= position:
        if changes[index][1] is None:
            damped = True
        else:
            ratio = changes[index][1]
        index += 1
    return index, damped, ratio


def _exact_length(signal, length):
    """`signal` cut or zero-padded to `length` samples (guards float rounding of n / fs * fs)."""
    if signal.size == length:
        return signal
    out = np.zeros(length, np.float32)
    out[: min(length, signal.size)] = signal[:length]
    return out


def write_song(path, buffer, *, sample_rate, bit_depth, peak_db, peak="true", key=None):
    """Normalise `buffer` in place and write it atomically, a chunk at a time.

    Parameters
    ----------
    path : Path
        ``.wav`` or ``.flac`` in an existing folder.
    buffer : ndarray [shape=(n,) or (n, channels)], float32
        The mixed song; scaled in place, so no second whole-song array is made.
    sample_rate : int > 0, Hz
        A whole number (a float such as 44100.0 is fine).
    bit_depth : {16, 24, 32}
    peak_db : float or None
        Peak target in dBFS, or None to keep the absolute scale.
    peak : {"true", "sample"}
        What `peak_db` holds: the true peak (ITU-R BS.1770-4 Annex 2, read a
        segment at a time, see :func:`synth.truepeak.true_peak`) or the
        largest sample.
    key : str or None
        The option that named `path`, for the error if it cannot be written
        (see :class:`synth.audio.atomic_output`).

    Returns
    -------
    gain_db : float
        Gain applied.
    peak_dbfs : float
        Sample peak of what was written (before quantisation), dBFS.
    true_peak_dbtp : float
        Its true peak, dBTP.

    Raises
    ------
    RenderError
        As :func:`synth.audio.normalise`: a non-finite signal, or a clip at
        absolute scale.  Raised before anything is written.
    ValueError
        If `sample_rate` is not a whole number of Hz.

    Notes
    -----
    The gain (and every error) is that of :func:`synth.audio.normalise`,
    applied to the song's peak (`peak`); a clip at absolute scale is judged
    on the sample peak, as there.  16-bit TPDF dither uses the seed of
    :func:`synth.audio.write_audio` for the first chunk and ``(seed, k)``
    for chunk k, so a song shorter than one chunk writes the same bytes as
    ``write_audio`` would.
    """
    import soundfile

    from .truepeak import true_peak

    fmt = check_output_path(path, bit_depth)
    rate = whole_sample_rate(sample_rate)
    measure = peak
    peak = 0.0
    for start in range(0, buffer.shape[0], WRITE_CHUNK_FRAMES):
        chunk_peak = float(np.max(np.abs(buffer[start : start + WRITE_CHUNK_FRAMES])))
        if not math.isfinite(chunk_peak):
            peak = chunk_peak  # normalise() names the problem
            break
        peak = max(peak, chunk_peak)
    true = true_peak(buffer, rate) if math.isfinite(peak) and peak > 0.0 else peak
    level = true if (peak_db is not None and measure == "true") else peak
    _, gain_db = normalise(np.array([level], dtype=np.float32), peak_db=peak_db, bit_depth=bit_depth)
    if gain_db:
        buffer *= np.float32(10.0 ** (gain_db / 20.0))
    channels = 1 if buffer.ndim == 1 else buffer.shape[1]
    if fmt == "WAV" and needs_rf64(buffer.shape[0], channels, BYTES_PER_SAMPLE[bit_depth]):
        fmt = "RF64"  # a WAV's 32-bit sizes would overflow: never written truncated
    with atomic_output(path, key=key) as tmp:
        with soundfile.SoundFile(str(tmp), "w", samplerate=rate, channels=channels,
                                 subtype=SUBTYPES[bit_depth], format=fmt) as handle:
            total = buffer.shape[0]
            for k, start in enumerate(range(0, total, WRITE_CHUNK_FRAMES)):
                seed = DITHER_SEED if k == 0 else (DITHER_SEED, k)
                chunk = buffer[start : start + WRITE_CHUNK_FRAMES]
                dither = dither_gain(chunk.shape[0], sample_rate=rate, frames_after=total - start - chunk.shape[0])
                handle.write(quantise(chunk, bit_depth, seed=seed, dither=dither))
        if fmt == "WAV" and bit_depth == 32:
            zero_peak_timestamp(tmp)  # libsndfile's PEAK chunk carries a wall-clock time
    scale = 10.0 ** (gain_db / 20.0)
    return gain_db, _db(peak * scale), _db(true * scale)


def _db(level):
    return 20.0 * math.log10(level) if level > 0 else -math.inf
