"""What one struck, plucked or excited note renders: its onset, its decaying modes, its ending.

A :class:`Tone` is the audible part of a partial table: the onset samples
(the signal while the excitation's force acts, :mod:`synth.excitation`) and,
from then on, a sum of damped sinusoids.  :func:`render_tone` writes it into a
buffer, with an optional damper falling at a sample (every mode then decays
with ``min(own T60, release_t60)``).

:func:`plan_ending` decides how a file ends:

* ``duration: auto`` renders until the sum of every mode's envelope
  ``sum |a_m| e^(-sigma_m t)`` (a bound on the signal) is below
  :data:`END_DB` (-90 dB) of the file's peak, at most :data:`AUTO_CAP_S`;
* a fixed duration that would end the file while that bound is still above
  -90 dB of the peak lets the damper fall first, as late as still ends the
  file below -90 dB, so the sound ends as the object's own damping ends it;
  a patch without dampers fades out over its last :data:`FADE_S` instead.
  Either way the level it would have been cut at is reported, as a warning
  when it is above :data:`CUT_DB` (-60 dB: an audible cut).

The peak used is a lower bound of the file's peak (the largest sample of its
first periods), so "below -90 dB of the peak" holds for the real peak too.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .damping import LN1000
from .engine import render_modes
from .modes import frozen_array

__all__ = [
    "Tone",
    "Ending",
    "END_DB",
    "end_target_db",
    "CUT_DB",
    "AUTO_CAP_S",
    "FADE_S",
    "envelope",
    "decay_samples",
    "render_tone",
    "plan_ending",
    "peak_lower_bound",
]

END_DB = -90.0  # dB re the peak: where a file ends
CUT_DB = -60.0  # dB re the peak: a cut above this is audible (warned)
AUTO_CAP_S = 60.0  # s: longest automatic duration
FADE_S = 0.010  # s: fade-out of a cut patch without dampers
END_WINDOW_S = 0.010  # s: the whole of a file's last 10 ms is below END_DB (not only its last sample)
PEAK_PERIODS = 3.0  # periods of the lowest mode rendered to bound the peak from below
PEAK_MIN_S = 0.02  # s: at least this much of the start is rendered for it


@dataclass(frozen=True)
class Tone:
    """The audible partials of one voiced note.

    Attributes
    ----------
    frequency_hz, amplitude, phase, t60_s : ndarray [shape=(M,)]
        Modes with amplitude > 0 (Hz, full-scale units, rad, s), as damped
        sinusoids ``a e^(-ln(1000) t / T60) sin(2 pi f t + phase)`` valid from
        the end of the onset on; read-only.
    onset : ndarray [shape=(n,)], float64
        The first n samples (while the force acts), at the table's rate.
    fundamental_hz : float, Hz
    warnings : tuple of str
    """

    frequency_hz: np.ndarray
    amplitude: np.ndarray
    phase: np.ndarray
    t60_s: np.ndarray
    onset: np.ndarray
    fundamental_hz: float
    warnings: tuple = ()

    @classmethod
    def from_table(cls, table):
        """The audible modes and the onset of a :class:`~synth.modes.PartialTable`."""
        if table.onset is None:
            raise ValueError("this table was made for a report, without its onset (partial_table(..., onset=True))")
        keep = table.amplitude > 0
        modes = (frozen_array(values[keep]) for values in (table.frequency_hz, table.amplitude, table.phase, table.t60_s))
        return cls(*modes, frozen_array(table.onset), float(table.fundamental_hz), tuple(table.warnings))

    def arrays(self):
        """(frequency, t60, amplitude, phase, onset): what a worker process needs to render it."""
        return self.frequency_hz, self.t60_s, self.amplitude, self.phase, self.onset


def _sigma(t60_s, sample_rate):
    """Per-sample decay rate (nepers per sample) of each T60 (s)."""
    return LN1000 / (np.asarray(t60_s, dtype=np.float64) * sample_rate)


def envelope(abs_amp, sigma, n):
    """Bound ``sum_m |a_m| exp(-sigma_m n)`` on a sum of damped sinusoids after n samples."""
    return float(np.sum(abs_amp * np.exp(-sigma * n)))


def decay_samples(abs_amp, sigma, level):
    """Samples until ``sum_m |a_m| exp(-sigma_m n)`` falls to `level` (0 if already).

    Parameters
    ----------
    abs_amp : ndarray [shape=(M,)], >= 0
    sigma : ndarray [shape=(M,)], nepers per sample, >= 0
    level : float > 0

    Returns
    -------
    float
        The smallest whole n at which the bound is <= `level` (no later than
        the sample at which every mode is below level / M); ``inf`` if a
        mode with a > 0 never decays.

    Notes
    -----
    ``g(n) = log sum_m |a_m| e^(-sigma_m n) - log(level)`` is convex and
    decreasing, so Newton's method started at n = 0 climbs to its root from
    below without overshooting; a few steps and a whole-sample check give
    the same n as bisection, in a handful of O(M) evaluations.
    """
    if envelope(abs_amp, sigma, 0) <= level:
        return 0.0
    loud = abs_amp * abs_amp.size > level
    if np.any(loud & (sigma <= 0)):
        return math.inf
    # At n_m every mode is below level / M, so the sum is below level.
    high = math.ceil(float(np.max(np.log(abs_amp[loud] * abs_amp.size / level) / sigma[loud])))
    n = 0.0
    log_level = math.log(level)
    for _ in range(60):
        terms = abs_amp * np.exp(-sigma * n)
        total = float(np.sum(terms))
        if total <= 0.0:
            break
        slope = float(np.dot(terms, sigma)) / total  # -g'(n) > 0
        step = (math.log(total) - log_level) / slope
        n = min(n + step, float(high))
        if step < 0.25:
            break
    whole = min(max(int(math.ceil(n)), 1), high)
    while whole < high and envelope(abs_amp, sigma, whole) > level:
        whole += 1
    while whole > 1 and envelope(abs_amp, sigma, whole - 1) <= level:
        whole -= 1
    return float(whole)


def _render_modes_into(out, frequency, t60, amplitude, phase, start, sample_rate):
    """Add nothing; write the modes' signal from absolute sample `start` into `out` (its first sample is `start`)."""
    if out.size == 0:
        return
    t0 = start / sample_rate
    amp = amplitude * np.exp(-LN1000 * t0 / t60)
    shifted = np.mod(phase + 2.0 * math.pi * frequency * t0, 2.0 * math.pi)
    render_modes(frequency, t60, amp, out.size / sample_rate, sample_rate, phase=shifted, out=out)


def render_tone(tone, n_samples, sample_rate, *, damper=None, release_t60=None, fade=0, out=None):
    """The first `n_samples` of `tone`: onset, modes, and a damper or a fade at the end.

    Parameters
    ----------
    tone : Tone
    n_samples : int >= 0
    sample_rate : float, Hz
        The rate the tone's onset was computed at.
    damper : int or None, samples
        Where the damper falls (from then on T60 = min(own, `release_t60`)).
    release_t60 : float or None, s
    fade : int >= 0, samples
        A raised-cosine fade over the last `fade` samples (a cut patch without dampers).
    out : ndarray [shape=(n_samples,)], float32, optional
        Buffer to write into.

    Returns
    -------
    ndarray [shape=(n_samples,)], float32
    """
    n_samples = int(n_samples)
    if out is None:
        out = np.zeros(n_samples, np.float32)
    frequency, t60, amplitude, phase, onset = (np.asarray(v, dtype=np.float64) for v in tone.arrays())
    n_on = min(onset.size, n_samples)
    out[:n_on] = onset[:n_on]
    split = n_samples if damper is None else min(max(int(damper), n_on), n_samples)
    _render_modes_into(out[n_on:split], frequency, t60, amplitude, phase, n_on, sample_rate)
    if split < n_samples:
        # State at the damper: the free decay up to it, then the damped rates.
        free = amplitude * np.exp(-LN1000 * (split / sample_rate) / t60)
        turned = np.mod(phase + 2.0 * math.pi * frequency * split / sample_rate, 2.0 * math.pi)
        damped = np.minimum(t60, release_t60)
        render_modes(frequency, damped, free, (n_samples - split) / sample_rate, sample_rate, phase=turned,
                     out=out[split:])
    if fade:
        fade = min(int(fade), n_samples)
        ramp = 0.5 * (1.0 + np.cos(math.pi * np.arange(1, fade + 1) / fade))
        out[n_samples - fade :] *= ramp.astype(np.float32)
    return out


@dataclass(frozen=True)
class Ending:
    """How a rendered file ends (:func:`plan_ending`).

    n_samples : int; damper : int or None (sample where the damper falls);
    fade : int (samples of fade-out, a patch without dampers); cut_db : float
    or None (the envelope bound at a fixed duration's end, dB re the peak,
    when it was above :data:`CUT_DB`); capped : bool (auto hit
    :data:`AUTO_CAP_S`); end_db : float (the bound at the last sample, dB re
    the peak).
    """

    n_samples: int
    damper: int | None = None
    fade: int = 0
    cut_db: float | None = None
    capped: bool = False
    end_db: float = -math.inf

    @property
    def audible_cut(self):
        """True when the fixed duration would have cut the sound above :data:`CUT_DB`."""
        return self.cut_db is not None and self.cut_db > CUT_DB

    def describe(self, sample_rate):
        """One line for the report, or None when there is nothing to say."""
        seconds = self.n_samples / sample_rate
        if self.capped:
            return (f"duration auto stopped at the {AUTO_CAP_S:g} s cap with the sound still at "
                    f"{self.end_db:.0f} dB re its peak")
        if self.cut_db is None:
            return None
        if self.damper is not None:
            return (f"{seconds:g} s would cut the sound at {self.cut_db:.0f} dB re its peak: the damper falls at "
                    f"{self.damper / sample_rate:.3f} s (release_t60) so the file ends at {self.end_db:.0f} dB")
        return (f"{seconds:g} s cuts the sound at {self.cut_db:.0f} dB re its peak; the patch has no dampers, so "
                f"the last {FADE_S * 1e3:g} ms fade out (duration: auto lets it ring out)")


def peak_lower_bound(tone, sample_rate):
    """The largest |sample| of the tone's first few periods: a lower bound of its peak."""
    lowest = float(np.min(tone.frequency_hz)) if tone.frequency_hz.size else 1.0
    seconds = max(PEAK_PERIODS / max(lowest, 1e-3), PEAK_MIN_S) + tone.onset.size / sample_rate
    n = max(1, min(int(math.ceil(seconds * sample_rate)), int(AUTO_CAP_S * sample_rate)))
    return float(np.max(np.abs(render_tone(tone, n, sample_rate))))


def end_target_db(bit_depth, peak_db):
    """dB re the peak that a file's last 10 ms stay below: :data:`END_DB`, lower for 16-bit files.

    At 16 bits, -90 dB re a -1 dBFS peak is 0.9 LSB: such a tail would be
    written as +-1 LSB.  The target is lowered to 0.45 LSB at the peak
    `peak_db` (-95.6 dB re a -1 dBFS peak), below which the undithered tail
    (:func:`synth.audio.dither_gain`) rounds to exact silence.  Without a
    peak target (absolute scale) it stays :data:`END_DB`.
    """
    if bit_depth != 16 or peak_db is None:
        return END_DB
    return min(END_DB, 20.0 * math.log10(0.45 / 32767.0) - float(peak_db))


def plan_ending(tone, *, duration, sample_rate, release_t60, peak=None, end_db=END_DB, floor=0.0):
    """How the file of `tone` ends: its length, and a damper or a fade where a fixed duration cuts it.

    Parameters
    ----------
    tone : Tone
    duration : float or "auto", s
    sample_rate : float, Hz
    release_t60 : float or None, s
        The patch's damper (None: it has none).
    peak : float or None
        The file's peak if known (else :func:`peak_lower_bound`).
    end_db : float, dB re the peak
        The level the last 10 ms stay below (:func:`end_target_db`).
    floor : float >= 0
        The largest error writing adds to a sample (half an LSB), in the
        tone's units: the sound is ended that much lower, or below it (so the
        tail rounds to exact zero) when the target is within two of it.  A
        soft sample of a library, far below full scale, needs it.

    Returns
    -------
    Ending
    """
    amp = np.abs(np.asarray(tone.amplitude, dtype=np.float64))
    sigma = _sigma(tone.t60_s, sample_rate)
    peak = peak_lower_bound(tone, sample_rate) if peak is None else peak
    if peak <= 0.0 or amp.size == 0:
        n = int(round(AUTO_CAP_S * sample_rate)) if duration == "auto" else int(round(duration * sample_rate))
        return Ending(max(n, 1))
    end_level = 10.0 ** (end_db / 20.0) * peak
    if floor > 0.0:
        end_level = end_level - floor if end_level > 2.0 * floor else 0.999 * floor
    n_on = tone.onset.size
    window = int(round(END_WINDOW_S * sample_rate))

    def bound_db(n):
        value = envelope(amp, sigma, n)
        return 20.0 * math.log10(value / peak) if value > 0 else -math.inf

    if duration == "auto":
        cap = int(round(AUTO_CAP_S * sample_rate))
        n = n_on + decay_samples(amp * np.exp(-sigma * n_on), sigma, end_level) + window
        if n > cap:
            return Ending(cap, capped=True, end_db=bound_db(cap))
        return Ending(max(int(n), 1), end_db=bound_db(n))
    n = max(int(round(duration * sample_rate)), 1)
    last = max(n - window, 0)  # the start of the last 10 ms: the level that must be below end_db
    cut = bound_db(last)
    if cut <= end_db:
        return Ending(n, end_db=cut)
    if release_t60 is None:
        return Ending(n, fade=min(n, max(1, int(round(FADE_S * sample_rate)))), cut_db=cut, end_db=-math.inf)
    damped = _sigma(np.minimum(tone.t60_s, release_t60), sample_rate)

    def damped_end(d):  # the bound at the start of the last 10 ms with the damper at sample d
        return float(np.sum(amp * np.exp(-sigma * d - damped * (last - d))))

    low, high = min(n_on, last), max(last, min(n_on, last))  # the latest damper ending below the level
    if damped_end(low) > end_level:
        return Ending(n, damper=low, cut_db=cut, end_db=20.0 * math.log10(damped_end(low) / peak))
    while high - low > 1:
        middle = (low + high) // 2
        low, high = (middle, high) if damped_end(middle) <= end_level else (low, middle)
    return Ending(n, damper=low, cut_db=cut, end_db=20.0 * math.log10(max(damped_end(low), 1e-300) / peak))
