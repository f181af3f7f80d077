"""Patch -> ModeSet -> PartialTable -> signal: the one-way data flow.

These functions glue the rooms together; they do no file work.  The
resonator's modes come from a :class:`~synth.solvecache.SolveCache` (solved
once per object); everything after -- positions, detune, weights, damping --
is applied to the solved modes.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from .damping import LN1000
from .excitation import MEASURES, drive_coefficients, onset_samples
from .modes import NODE_TOLERANCE, PartialTable, frozen_array
from .patch import MAX_MODES, MAX_SAMPLE_RATE
from .resonators import UnreachablePitch, resonator_name
from .solvecache import AUTO, DEFAULT_CACHE, ModeCeiling
from .tone import Tone, end_target_db, plan_ending, render_tone

__all__ = ["mode_set", "solve_modes", "partial_table", "render_patch", "patch_ending", "Unweighted",
           "unweighted_partials", "weigh", "CUT_WARNING_DB", "CUT_CHECK_MODES"]

#: A fixed ``render.max_modes`` that stops below Nyquist is checked by solving this many modes
#: more and weighing them as the table's are: the loudest of them is reported.
CUT_CHECK_MODES = 8
#: ... and warned about when it is louder than this, dB re the table's strongest mode (the 60 dB
#: of a T60, the usual span of an audible decay: common practice).
CUT_WARNING_DB = -60.0
#: ``modes_limit`` in a table's parameters: what ended its list of modes.
LIMIT_NYQUIST = "every mode below Nyquist"
LIMIT_COUNT = "render.max_modes"
LIMIT_MODEL = "every mode the model has"


def _coordinate(point, across=0.0):
    """A point as the resonator's shapes take it; a bar's point off its centre line is (fraction, across)."""
    if point is None:
        return None
    if point.style == "fraction":
        return point.values[0] if across == 0.0 else (point.values[0], across)
    return point.values


def _points(patch):
    """(excitation, pickup) coordinates of `patch`."""
    return (_coordinate(patch.excitation.position, patch.excitation.across),
            _coordinate(patch.pickup.position, patch.pickup.across))


def mode_set(patch, *, cache=None):
    """The resonator's ModeSet for `patch` (as ``render.max_modes`` asks, before the cut at Nyquist).

    The modes are solved once per resonator spec in `cache` (default: the
    process-wide :data:`~synth.solvecache.DEFAULT_CACHE`) and placed at the
    patch's excitation and pickup points.

    Parameters
    ----------
    patch : Patch
    cache : SolveCache or None
        Where the modes are solved (default: the process-wide cache).

    Returns
    -------
    ModeSet
        ``render.max_modes`` modes (auto: every mode below Nyquist and the
        first at or above it; :func:`solve_modes`), ascending, with their
        shapes at the excitation and pickup points; not yet weighted or damped.

    Raises
    ------
    PatchError
        If the object cannot reach its pitch (names ``resonator.pitch``), or
        auto would compute too many modes (names ``render.max_modes``).

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... excitation: {type: pluck, position: 0.25}
    ... damping: {t60: 0.2 s, t60_high: 0.05 s, high_frequency: 3 kHz}
    ... render: {sample_rate: 8000, max_modes: 12}
    ... ''')
    >>> modes = synth.mode_set(patch)
    >>> len(modes.frequency_hz), modes.labels[-1]  # every mode asked for, even above Nyquist (4 kHz)
    (12, 'n=12')
    >>> round(float(modes.frequency_hz[0]), 1)
    392.0
    """
    try:
        solution = solve_modes(patch, cache=cache)
    except UnreachablePitch as error:
        raise patch.error("resonator.pitch", str(error)) from None
    return solution.place(*_points(patch))


def solve_modes(patch, *, cache=None, n_modes=None, at_least=1):
    """The solved modes of `patch`'s resonator as its ``render.max_modes`` asks: the one place that reads it.

    Parameters
    ----------
    patch : Patch
    cache : SolveCache or None
        Where the modes are solved (default: the process-wide cache).
    n_modes : int or None
        A count to solve instead of ``render.max_modes`` (the cut check).
    at_least : int
        A number ``max_modes`` below this solves this many (the two lowest
        modes of an octave check); auto always holds the first mode at or
        above Nyquist where the model has one.

    Returns
    -------
    Solution
        ``max_modes`` modes, or with ``auto`` every mode below Nyquist
        (``render.sample_rate / 2``) and the first one at or above it
        (:meth:`synth.solvecache.SolveCache.solve_below`).

    Raises
    ------
    PatchError
        If auto would compute more than :data:`synth.patch.MAX_MODES` modes
        (names ``render.max_modes``).
    UnreachablePitch
        If the object cannot reach its pitch (callers name the key).
    """
    cache = DEFAULT_CACHE if cache is None else cache
    max_modes = patch.render.max_modes if n_modes is None else n_modes
    if max_modes != AUTO:
        max_modes = max(int(max_modes), int(at_least))
    try:
        return cache.solve_for(patch.resonator, max_modes, sample_rate=patch.render.sample_rate, ceiling=MAX_MODES)
    except ModeCeiling as error:
        raise patch.error("render.max_modes", str(error)) from None


#: A shaped bar retuned away from the pitch its profile was made for warns once a tuned ratio moves this far.
MOVED_SHAPE_CENTS = 1.0


def _moved_shape(spec, cache):
    """A warning when a shaped bar was retuned away from the pitch its profile was made for (else none).

    Retuning solves the length; the profile's thicknesses stay, so the ratios
    of the first partials, which the profile was shaped to hold, move.
    """
    shaped_for = getattr(spec, "shaped_for_hz", None)
    if shaped_for is None or spec.pitch_hz is None:
        return []
    from .units import hz_to_midi, midi_to_note

    def note(hz):
        midi = float(hz_to_midi(hz))
        cents = 100.0 * (midi - round(midi))
        return midi_to_note(round(midi)) + (f" {cents:+.0f} cents" if abs(cents) >= 1 else "")

    cache = DEFAULT_CACHE if cache is None else cache
    spec = replace(spec, torsion=False)  # the tuned bending partials only
    original = cache.retune(replace(spec, shaped_for_hz=None), shaped_for)
    before = cache.solve(original, 3).frequency_hz[:3]
    after = cache.solve(spec, 3).frequency_hz[:3]
    if min(before.size, after.size) < 2:
        return []
    count = min(before.size, after.size)
    moved = 1200.0 * np.log2((after[1:count] / after[0]) / (before[1:count] / before[0]))
    if np.max(np.abs(moved)) < MOVED_SHAPE_CENTS:
        return []
    def ratios(frequency):
        return " : ".join(f"{x / frequency[0]:.2f}" for x in frequency[:count])

    shifts = ", ".join(f"partial {i + 2} {c:+.0f} cents" for i, c in enumerate(moved))
    return [f"the bar's profile was shaped at {note(shaped_for)} for {ratios(before)}; at {note(spec.pitch_hz)} its "
            f"partials sit at {ratios(after)} ({shifts}): retuning changes the length, not the profile (shape it "
            "for this pitch with synth tune-bar, or with an instrument file's tune)"]


@dataclass(frozen=True)
class Unweighted:
    """The partials of a patch before the excitation weights them (see :func:`unweighted_partials`).

    Everything here depends on the object, the positions, the detune, the
    damping and the sample rate, but not on how hard it is excited: a MIDI
    note's velocities share one.
    """

    modes: object  # ModeSet, every computed mode
    keep: np.ndarray  # below Nyquist
    kept: object  # ModeSet of the modes below Nyquist
    t60_s: np.ndarray  # of the kept modes
    fundamental_hz: float
    warnings: tuple
    source: np.ndarray | None = None  # coupled: the computed mode below Nyquist each kept sub-mode comes from
    mix: np.ndarray | None = None  # coupled: each sub-mode's complex mixing weight (synth.coupling)
    limits: dict | None = None  # what ended the list of modes (table parameters; see _mode_limits)
    following: tuple | None = None  # a count that cut the series: (ModeSet of n + CUT_CHECK_MODES, their T60)


def unweighted_partials(patch, *, modes=None, detune_cents=0.0, cache=None):
    """The first half of :func:`partial_table`: modes placed, detuned, cut at Nyquist and damped.

    The modes at or above Nyquist are left out silently; what ended the list
    (Nyquist, the model's last mode or a fixed ``render.max_modes``) becomes
    the table's ``modes_limit``, ``nyquist_hz``, ``bandwidth_hz`` (the modes
    are complete up to there), with a number ``modes_above_nyquist``, and a
    number that stopped below Nyquist ``omitted_mode``, ``omitted_mode_hz``
    and ``omitted_mode_level_db`` (see :func:`weigh`).

    Raises
    ------
    PatchError
        If every mode is at or above Nyquist, or the damping cannot apply.
    """
    modes = mode_set(patch, cache=cache) if modes is None else modes
    modes = modes.detuned(detune_cents)
    warnings = list(modes.warnings) + _moved_shape(patch.resonator, cache)
    nyquist = patch.render.sample_rate / 2.0
    keep = modes.frequency_hz < nyquist  # those at or above are left out: information, not a warning
    if not np.any(keep):
        raise _all_above_nyquist(patch, float(modes.frequency_hz[0]), nyquist)
    # a bar with torsional modes keeps B1 as its fundamental (T1 may lie below it)
    fundamental = float(modes.parameters.get("bending_fundamental_hz", modes.frequency_hz[0]))
    kept = modes.select(keep)
    damping = patch.damping
    if damping.t60_high is not None and damping.high_frequency <= fundamental:
        raise patch.error(
            "damping.high_frequency",
            f"must be above the fundamental ({fundamental:.2f} Hz) to set how high partials decay",
        )
    t60 = damping.mode_t60(kept.frequency_hz, fundamental_hz=fundamental)  # the section's law (synth.damping)
    t60 = _given_t60(kept, t60)
    limits, following = _mode_limits(patch, modes, keep, detune_cents, cache)
    if following is not None:
        following = (following, _given_t60(following, damping.mode_t60(following.frequency_hz,
                                                                        fundamental_hz=fundamental)))
    if patch.coupling is None:
        return Unweighted(modes, keep, kept, t60, fundamental, tuple(warnings), limits=limits, following=following)
    return replace(_coupled(patch, modes, keep, kept, t60, fundamental, warnings), limits=limits, following=following)


def _given_t60(modes, t60):
    """`t60` with the decay times a resonator gives per mode (None: the damping section's) put in.

    A ``radiation_t60_s`` column (an air-loaded membrane's radiation) is a
    loss on top of the damping section's: decay rates add,
    ``1 / T60 = 1 / T60_patch + 1 / T60_radiation``.
    """
    if "radiation_t60_s" in modes.columns:
        radiation = np.array([np.inf if v is None else v for v in modes.columns["radiation_t60_s"]], dtype=float)
        t60 = 1.0 / (1.0 / np.asarray(t60, dtype=float) + 1.0 / radiation)
    if "t60_s" not in modes.columns:
        return t60
    given = np.array([np.nan if v is None else v for v in modes.columns["t60_s"]], dtype=float)
    return np.where(np.isfinite(given), given, t60)


def _mode_limits(patch, modes, keep, detune_cents, cache):
    """(parameters, following): what ended the list of modes, and the modes a fixed count left out.

    ``modes_limit`` is Nyquist when a computed mode reached it, the model when
    the resonator has no more modes, else ``render.max_modes``: then
    ``following`` is the ModeSet of :data:`CUT_CHECK_MODES` more modes
    (placed and detuned as `modes`), which :func:`weigh` weighs; where all of
    those sit on a node, four times as many, up to as many as were kept.
    """
    nyquist = patch.render.sample_rate / 2.0
    max_modes = patch.render.max_modes
    limits = {"modes_limit": LIMIT_NYQUIST, "nyquist_hz": nyquist, "bandwidth_hz": nyquist}
    if max_modes != AUTO:
        limits["modes_above_nyquist"] = int(np.count_nonzero(~keep))
    if not np.all(keep):
        return limits, None
    limits.update(modes_limit=LIMIT_MODEL, bandwidth_hz=float(np.max(modes.frequency_hz)))
    if max_modes == AUTO or len(modes.frequency_hz) < max_modes:
        return limits, None  # every mode was asked for, or the resonator returned fewer: it has no more
    look = CUT_CHECK_MODES
    while True:
        asked = max_modes + look
        following = solve_modes(patch, cache=cache, n_modes=asked)
        following = following.place(*_points(patch))
        following = following.detuned(detune_cents)
        frequency = following.frequency_hz
        if len(frequency) <= max_modes:
            return limits, None  # no more modes in the model
        below = np.flatnonzero(frequency[max_modes:] < nyquist) + max_modes
        if below.size == 0:
            limits.update(modes_limit=LIMIT_NYQUIST, bandwidth_hz=nyquist)  # the count happened to reach Nyquist
            return limits, None
        scale = np.abs(following.excitation_shape * following.pickup_shape)
        sounding = scale[below] > NODE_TOLERANCE * max(float(np.max(scale)), 1e-300)
        # Every one of them on a node (a strike at a membrane's centre): look further, up to as many as kept.
        if np.any(sounding) or look >= max_modes or len(frequency) < asked or below.size < len(frequency) - max_modes:
            break
        look *= 4
    limits["modes_limit"] = LIMIT_COUNT
    return limits, following


def _coupled(patch, modes, keep, kept, t60, fundamental, warnings):
    """Unweighted partials with every mode replaced by its coupled sub-modes (:mod:`synth.coupling`)."""
    from .coupling import string_impedance

    impedance = string_impedance(kept.parameters)
    harmonic = np.asarray(kept.columns.get("harmonic", range(1, len(kept.frequency_hz) + 1)), dtype=float)
    coupled = patch.coupling.apply(kept.frequency_hz, LN1000 / t60, harmonic, impedance=impedance)
    below = coupled.frequency_hz < patch.render.sample_rate / 2.0
    source = np.asarray(coupled.source)[below]
    suffix = [s for s, b in zip(coupled.suffix, below) if b]
    expanded = kept.select(source)
    labels = tuple(f"{label} {tag}" if tag else label for label, tag in zip(expanded.labels, suffix))
    expanded = replace(expanded, frequency_hz=frozen_array(coupled.frequency_hz[below]), labels=labels,
                       columns={**expanded.columns, "coupled": tuple(suffix)},
                       parameters={**expanded.parameters, **patch.coupling.parameters()})
    with np.errstate(divide="ignore"):
        t60 = np.where(coupled.decay_rate[below] > 0, LN1000 / coupled.decay_rate[below], np.inf)
    return Unweighted(modes, keep, expanded, t60, fundamental, tuple(warnings), source=source,
                      mix=np.asarray(coupled.weight)[below])


def weigh(patch, unweighted, *, onset=True):
    """The second half of :func:`partial_table`: the excitation's pulse, the pickup, the levels.

    Each mode's displacement response to the excitation's unit force
    (:func:`synth.excitation.drive_coefficients`, over every computed mode:
    a pluck's static deflection sums them all) is taken through the pulse's
    transform at the mode's complex frequency and the pickup's measure:
    the amplitude and phase of the damped sinusoid the mode is once the force
    is over, and the onset samples while it acts (see :mod:`synth.excitation`).

    With `onset` False the onset is not computed (``table.onset`` is None): a
    report's table, which is never rendered (``synth modes``, ``synth range``).

    A fixed ``render.max_modes`` that stopped below Nyquist has the
    :data:`CUT_CHECK_MODES` next modes weighed the same way: the loudest is
    named in the parameters (``omitted_mode``, ``omitted_mode_hz``,
    ``omitted_mode_level_db``, dB re the strongest mode) and, louder than
    :data:`CUT_WARNING_DB`, in a warning.

    Raises
    ------
    PatchError
        If nothing would sound (the excitation or pickup on a node of every
        mode, or no strength).
    """
    modes, keep, kept = unweighted.modes, unweighted.keep, unweighted.kept
    excitation = patch.excitation
    coefficient = drive_coefficients(
        excitation.kind, modes.frequency_hz, modes.excitation_shape, modes.pickup_shape, strength=excitation.strength
    )
    scale = np.abs(modes.excitation_shape * modes.pickup_shape)
    null = (scale <= NODE_TOLERANCE * max(float(np.max(scale)), 1e-300))[keep]
    coefficient = np.where(null, 0.0, coefficient[keep])
    if unweighted.source is not None:  # coupled sub-modes: each takes its mode's drive times its mixing weight
        null = null[unweighted.source]
        coefficient = coefficient[unweighted.source] * unweighted.mix
    sample_rate = patch.render.sample_rate
    omega = 2.0 * math.pi * kept.frequency_hz
    s = -LN1000 / unweighted.t60_s + 1j * omega
    reference = 2.0 * math.pi * unweighted.fundamental_hz
    power = MEASURES.index(patch.pickup.measures)
    pulse = excitation.pulse
    response = (s / reference) ** power * pulse.transform(s)
    if "level_override_db" in kept.columns:
        # Levels given per mode (a measured partial set): the audio holds exactly these when
        # the force ends, the amplitudes there summing to `strength`; the pulse keeps its time
        # course and phases.
        weight = 10.0 ** (np.asarray(kept.columns["level_override_db"], dtype=float) / 20.0)
        target = np.where(null, 0.0, excitation.strength * weight / np.sum(np.where(null, 0.0, weight)))
        coefficient = target / _after_force(np.abs(response), unweighted.t60_s, pulse)
    complex_amplitude = coefficient * response
    amplitude = np.abs(complex_amplitude)
    phase = np.mod(np.angle(complex_amplitude), 2.0 * math.pi)
    peak = float(np.max(amplitude)) if amplitude.size else 0.0
    if excitation.strength == 0.0:
        raise patch.error("excitation.strength", "must be > 0 to sound")
    if peak <= 0.0:
        excitation_sounds = np.any(np.abs(kept.excitation_shape) > NODE_TOLERANCE * np.max(np.abs(kept.excitation_shape), initial=0.0))
        key = "pickup.position" if excitation_sounds and patch.pickup.position is not None else "excitation.position"
        raise patch.error(
            key,
            f"nothing would sound: the {key.split('.')[0]} sits on a node of every mode below Nyquist",
        )
    audible = amplitude > 0
    if onset:
        onset = frozen_array(onset_samples(pulse, coefficient[audible], s[audible], measures=patch.pickup.measures,
                                           reference_omega=reference, sample_rate=sample_rate))
    else:
        onset = None
    heard = _after_force(amplitude, unweighted.t60_s, pulse)
    with np.errstate(divide="ignore"):
        level_db = np.where(null, np.nan, 20.0 * np.log10(np.maximum(heard, 1e-300) / np.max(heard)))
    omitted, cut = _cut_check(patch, unweighted)
    return PartialTable(
        name=patch.name,
        resonator=resonator_name(patch.resonator),
        fundamental_hz=unweighted.fundamental_hz,
        frequency_hz=frozen_array(kept.frequency_hz),
        amplitude=frozen_array(amplitude),
        phase=frozen_array(phase),
        t60_s=frozen_array(unweighted.t60_s),
        level_db=frozen_array(level_db),
        labels=kept.labels,
        columns={k: v for k, v in kept.columns.items() if k != "t60_s"},
        parameters={**kept.parameters, **_excitation_parameters(patch), **(unweighted.limits or {}), **omitted},
        warnings=unweighted.warnings + cut,
        onset=onset,
        sample_rate=float(sample_rate),
    )


def _cut_check(patch, unweighted):
    """(parameters, warnings) about the modes a fixed ``render.max_modes`` left out below Nyquist.

    The :data:`CUT_CHECK_MODES` modes after the last one kept (more where
    they all sit on a node) are weighed as the table's are (uncoupled); the
    loudest of those below Nyquist is named with its level re the strongest
    kept mode, and warned about above :data:`CUT_WARNING_DB`.
    """
    if unweighted.following is None:
        return {}, ()
    following, t60 = unweighted.following
    n = len(unweighted.modes.frequency_hz)
    amplitude = _heard_amplitudes(patch, following, t60, unweighted.fundamental_hz)
    strongest = float(np.max(amplitude[:n]))
    below = following.frequency_hz[n:] < patch.render.sample_rate / 2.0
    index = n + int(np.argmax(np.where(below, amplitude[n:], -1.0)))
    level = 20.0 * math.log10(amplitude[index] / strongest) if amplitude[index] > 0 and strongest > 0 else None
    label, frequency = following.labels[index], float(following.frequency_hz[index])
    parameters = {"omitted_mode": label, "omitted_mode_hz": frequency, "omitted_mode_level_db": level}
    if level is None or level <= CUT_WARNING_DB:
        return parameters, ()
    last = float(np.max(unweighted.modes.frequency_hz))
    return parameters, (
        f"render.max_modes {n} cuts the series at {_hz(last)} Hz: the loudest of the next {int(np.sum(below))} "
        f"modes, {label} at {_hz(frequency)} Hz, is at {level:.0f} dB re the strongest; use max_modes: auto",
    )


def _hz(frequency):
    """A frequency for a message: whole Hz from 100 Hz up, else three digits."""
    return f"{frequency:.0f}" if frequency >= 100.0 else f"{frequency:.3g}"


def _heard_amplitudes(patch, modes, t60, fundamental_hz):
    """|amplitude| of each mode of `modes` as :func:`weigh` gives it, up to one common scale (uncoupled)."""
    excitation = patch.excitation
    scale = np.abs(modes.excitation_shape * modes.pickup_shape)
    null = scale <= NODE_TOLERANCE * max(float(np.max(scale)), 1e-300)
    if "level_override_db" in modes.columns:
        return np.where(null, 0.0, 10.0 ** (np.asarray(modes.columns["level_override_db"], dtype=float) / 20.0))
    coefficient = drive_coefficients(excitation.kind, modes.frequency_hz, modes.excitation_shape, modes.pickup_shape)
    s = -LN1000 / t60 + 2j * math.pi * modes.frequency_hz
    power = MEASURES.index(patch.pickup.measures)
    response = (s / (2.0 * math.pi * fundamental_hz)) ** power * excitation.pulse.transform(s)
    return _after_force(np.abs(np.where(null, 0.0, coefficient) * response), t60, excitation.pulse)


def _after_force(amplitude, t60_s, pulse):
    """Each mode's amplitude when the excitation's force ends (t = the pulse's duration), not referred to t = 0.

    The engine's amplitude is the free vibration's referred back to t = 0; a
    mode that decays within the contact would look far louder than it ever is
    (a 0.9 ms T60 under a 3 ms strike by 200 dB), so levels compare the modes
    where they start ringing freely.
    """
    return amplitude * np.exp(-LN1000 * pulse.duration / np.asarray(t60_s, dtype=float))


def _excitation_parameters(patch):
    """What the report says of the excitation and the pickup."""
    excitation = patch.excitation
    out = {"excitation": excitation.kind, "pickup_measures": patch.pickup.measures}
    if excitation.kind == "strike":
        out["contact_time_s"] = excitation.contact_time
        if excitation.mallet is not None:
            out["mallet"] = excitation.mallet.describe()
    elif excitation.kind == "pluck":
        out["release_time_s"] = excitation.release_time
    law = patch.damping.describe()
    if law is not None:  # the two-point law is the default the T60 column shows
        out["damping_law"] = law
    return out


def partial_table(patch, *, modes=None, detune_cents=0.0, cache=None, onset=True):
    """The partials `patch` renders: weighted, damped, below Nyquist.

    Parameters
    ----------
    patch : Patch
    modes : ModeSet or None
        Precomputed modes of `patch.resonator`.
    detune_cents : float, cents
        Moves every partial of the solved object by this interval before it
        is weighted and damped (a round robin's detune: no new solve).
    cache : SolveCache or None
        Where the modes are solved (default: the process-wide cache).

    onset : bool
        Compute the samples while the excitation's force acts
        (``table.onset``); False for a table that is only reported.

    Returns
    -------
    PartialTable
        The modes below Nyquist with amplitude, phase, T60 and level.

    Raises
    ------
    PatchError
        If nothing would sound (every mode at or above Nyquist, the
        excitation or pickup on a node of every mode), naming the key to change.

    Notes
    -----
    :func:`unweighted_partials` then :func:`weigh`; callers that voice one
    object at many strengths (MIDI velocities) keep the first and call the
    second per strength.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... excitation: {type: pluck, position: 0.25}
    ... damping: {t60: 0.2 s, t60_high: 0.05 s, high_frequency: 3 kHz}
    ... render: {sample_rate: 8000, max_modes: 12}
    ... ''')
    >>> table = synth.partial_table(patch)
    >>> round(table.fundamental_hz, 1), len(table.frequency_hz), table.labels[-1]
    (392.0, 10, 'n=10')
    >>> round(synth.partial_table(patch, detune_cents=1200).fundamental_hz, 1)  # an octave up, no new solve
    784.0
    """
    return weigh(patch, unweighted_partials(patch, modes=modes, detune_cents=detune_cents, cache=cache), onset=onset)


def _all_above_nyquist(patch, lowest_hz, nyquist):
    """The error when every mode is at or above Nyquist, blaming the key that can fix it.

    A higher sample rate helps only if one within the allowed range holds the
    lowest mode; otherwise the pitch (or, when no pitch is given, the
    resonator's own keys) must come down.
    """
    needed = math.floor(2.0 * lowest_hz) + 1  # Hz: the smallest whole rate with lowest_hz below Nyquist
    if needed <= MAX_SAMPLE_RATE:
        return patch.error(
            "render.sample_rate",
            f"every mode is at or above Nyquist ({nyquist:g} Hz): raise render.sample_rate to {needed} Hz or more",
        )
    key = _pitch_key(patch)
    fix = "lower the pitch" if key.endswith(".pitch") else "make the object sound lower (larger, heavier or slacker)"
    return patch.error(
        key,
        f"the lowest mode sounds at {lowest_hz:.4g} Hz, above what any sample rate allowed here can hold "
        f"(Nyquist {MAX_SAMPLE_RATE / 2:g} Hz at the highest rate, {MAX_SAMPLE_RATE} Hz): {fix}",
    )


def _pitch_key(patch):
    """The dotted key that sets the patch's pitch: resonator.pitch when given, else the resonator."""
    if getattr(patch.resonator, "pitch_hz", None) is not None or "resonator.pitch" in patch.lines:
        return "resonator.pitch"
    if "resonator.fundamental" in patch.lines:
        return "resonator.fundamental"
    return "resonator"


def patch_ending(patch, table):
    """How `patch`'s file ends (:func:`synth.tone.plan_ending`): its length, a damper or a fade.

    ``render.duration: auto`` ends the file once every mode's envelope has
    summed to 90 dB below the peak (held for 10 ms); a fixed duration that
    would cut the sound lets the damper fall first (``damping.release_t60``),
    or fades out a patch without dampers.

    Parameters
    ----------
    patch : Patch
    table : PartialTable
        Its partial table (:func:`partial_table`).

    Returns
    -------
    synth.tone.Ending
        ``n_samples`` (the file's length), ``damper`` (the sample where the
        damper falls, or None), ``fade``, ``cut_db``, ``capped``, ``end_db``
        and ``describe(sample_rate)``, the report's line about it.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... excitation: {type: pluck, position: 0.25}
    ... damping: {t60: 0.2 s, t60_high: 0.05 s, high_frequency: 3 kHz}
    ... render: {sample_rate: 8000, max_modes: 12}
    ... ''')
    >>> ending = synth.patch_ending(patch, synth.partial_table(patch))
    >>> round(ending.n_samples / 8000, 2), ending.damper  # s: auto, until -90 dB
    (0.3, None)
    >>> from dataclasses import replace
    >>> short = replace(patch, render=replace(patch.render, duration=0.05))
    >>> synth.patch_ending(short, synth.partial_table(short)).damper is not None  # 50 ms cuts it: damped
    True
    """
    render = patch.render
    return plan_ending(Tone.from_table(table), duration=render.duration, sample_rate=render.sample_rate,
                       release_t60=patch.damping.release_t60, end_db=end_target_db(render.bit_depth, render.peak_db))


def render_patch(patch, *, table=None, ending=None):
    """Render `patch` to a float32 signal at its own scale (not normalised).

    The signal is the onset (while the excitation's force acts) and then the
    modes, as long as `ending` says (default :func:`patch_ending`: ``render.duration``,
    or ``auto``; a fixed duration that would cut the sound lets the damper fall first).

    Parameters
    ----------
    patch : Patch
    table : PartialTable or None
        Its partial table (default :func:`partial_table`).
    ending : synth.tone.Ending or None
        How the file ends (default :func:`patch_ending`).

    Returns
    -------
    signal : ndarray [shape=(ending.n_samples,)], float32
        At the patch's own scale; :func:`synth.render` normalises it as the
        ``render`` command does.
    table : PartialTable

    Raises
    ------
    PatchError
        If the patch cannot sound (see :func:`partial_table`).

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... excitation: {type: pluck, position: 0.25}
    ... damping: {t60: 0.2 s, t60_high: 0.05 s, high_frequency: 3 kHz}
    ... render: {sample_rate: 8000, max_modes: 12}
    ... ''')
    >>> signal, table = synth.render_patch(patch)
    >>> signal.dtype.name, round(len(signal) / 8000, 2), float(signal[0])  # every render starts from silence
    ('float32', 0.3, 0.0)
    """
    table = partial_table(patch) if table is None else table
    tone = Tone.from_table(table)
    ending = patch_ending(patch, table) if ending is None else ending
    signal = render_tone(tone, ending.n_samples, patch.render.sample_rate, damper=ending.damper,
                         release_t60=patch.damping.release_t60, fade=ending.fade)
    return signal, table
