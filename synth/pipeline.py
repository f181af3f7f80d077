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

from .damping import LN1000, two_point_t60
from .excitation import MEASURES, drive_coefficients, onset_samples
from .modes import NODE_TOLERANCE, PartialTable, frozen_array
from .patch import MAX_SAMPLE_RATE
from .resonators import UnreachablePitch, resonator_name
from .solvecache import DEFAULT_CACHE
from .tone import Tone, end_target_db, plan_ending, render_tone

__all__ = ["mode_set", "partial_table", "render_patch", "patch_ending", "Unweighted", "unweighted_partials", "weigh"]


def _coordinate(point):
    if point is None:
        return None
    if point.style == "fraction":
        return point.values[0]
    return point.values


def mode_set(patch, *, cache=None):
    """The resonator's ModeSet for `patch` (all `max_modes`, before Nyquist).

    The modes are solved once per resonator spec in `cache` (default: the
    process-wide :data:`~synth.solvecache.DEFAULT_CACHE`) and placed at the
    patch's excitation and pickup points.
    """
    cache = DEFAULT_CACHE if cache is None else cache
    try:
        solution = cache.solve(patch.resonator, patch.render.max_modes)
    except UnreachablePitch as error:
        raise patch.error("resonator.pitch", str(error)) from None
    return solution.place(_coordinate(patch.excitation.position), _coordinate(patch.pickup.position))


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


def unweighted_partials(patch, *, modes=None, detune_cents=0.0, cache=None):
    """The first half of :func:`partial_table`: modes placed, detuned, cut at Nyquist and damped.

    Raises
    ------
    PatchError
        If every mode is at or above Nyquist, or the damping cannot apply.
    """
    modes = mode_set(patch, cache=cache) if modes is None else modes
    modes = modes.detuned(detune_cents)
    warnings = list(modes.warnings)
    nyquist = patch.render.sample_rate / 2.0
    keep = modes.frequency_hz < nyquist
    if not np.all(keep):
        count = int(np.count_nonzero(~keep))
        # A degenerate pair (cos and sin) shares one label: name each once.
        dropped = list(dict.fromkeys(modes.labels[i] for i in np.flatnonzero(~keep)))
        shown = ", ".join(dropped[:3]) + (f" ... {dropped[-1]}" if len(dropped) > 3 else "")
        warnings.append(f"{count} modes at or above Nyquist ({nyquist:g} Hz) left out: {shown}")
    if not np.any(keep):
        raise _all_above_nyquist(patch, float(modes.frequency_hz[0]), nyquist)
    fundamental = float(modes.frequency_hz[0])
    kept = modes.select(keep)
    damping = patch.damping
    if damping.t60_high is not None and damping.high_frequency <= fundamental:
        raise patch.error(
            "damping.high_frequency",
            f"must be above the fundamental ({fundamental:.2f} Hz) to set how high partials decay",
        )
    t60 = two_point_t60(
        kept.frequency_hz,
        t60=damping.t60,
        fundamental_hz=fundamental,
        t60_high=damping.t60_high,
        high_frequency=damping.high_frequency,
    )
    if "t60_s" in kept.columns:
        # Decay times given per mode (None: the damping section's) replace the two-point T60.
        given = np.array([np.nan if v is None else v for v in kept.columns["t60_s"]], dtype=float)
        t60 = np.where(np.isfinite(given), given, t60)
    if patch.coupling is None:
        return Unweighted(modes, keep, kept, t60, fundamental, tuple(warnings))
    return _coupled(patch, modes, keep, kept, t60, fundamental, warnings)


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
    (:func:`synth.excitation.drive_coefficients`, over every computed mode so
    a level does not depend on the sample rate) is taken through the pulse's
    transform at the mode's complex frequency and the pickup's measure:
    the amplitude and phase of the damped sinusoid the mode is once the force
    is over, and the onset samples while it acts (see :mod:`synth.excitation`).

    With `onset` False the onset is not computed (``table.onset`` is None): a
    report's table, which is never rendered (``synth modes``, ``synth range``).

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
        # Levels given per mode (a measured partial set): the audio holds exactly these,
        # the amplitudes summing to `strength`; the pulse keeps its time course and phases.
        weight = 10.0 ** (np.asarray(kept.columns["level_override_db"], dtype=float) / 20.0)
        target = np.where(null, 0.0, excitation.strength * weight / np.sum(np.where(null, 0.0, weight)))
        coefficient = target / np.abs(response)
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
    with np.errstate(divide="ignore"):
        level_db = np.where(null, np.nan, 20.0 * np.log10(np.maximum(amplitude, 1e-300) / peak))
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
        parameters={**kept.parameters, **_excitation_parameters(patch)},
        warnings=unweighted.warnings,
        onset=onset,
        sample_rate=float(sample_rate),
    )


def _excitation_parameters(patch):
    """What the report says of the excitation and the pickup."""
    excitation = patch.excitation
    out = {"excitation": excitation.kind, "pickup_measures": patch.pickup.measures}
    if excitation.kind == "strike":
        out["contact_time_s"] = excitation.contact_time
    elif excitation.kind == "pluck":
        out["release_time_s"] = excitation.release_time
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

    Returns
    -------
    PartialTable

    Notes
    -----
    :func:`unweighted_partials` then :func:`weigh`; callers that voice one
    object at many strengths (MIDI velocities) keep the first and call the
    second per strength.
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
    """How `patch`'s file ends (:func:`synth.tone.plan_ending`): its length, a damper or a fade."""
    render = patch.render
    return plan_ending(Tone.from_table(table), duration=render.duration, sample_rate=render.sample_rate,
                       release_t60=patch.damping.release_t60, end_db=end_target_db(render.bit_depth, render.peak_db))


def render_patch(patch, *, table=None, ending=None):
    """Render `patch` to a float32 signal at its own scale (not normalised).

    The signal is the onset (while the excitation's force acts) and then the
    modes, as long as `ending` says (default :func:`patch_ending`: ``render.duration``,
    or ``auto``; a fixed duration that would cut the sound lets the damper fall first).

    Returns
    -------
    signal : ndarray [shape=(ending.n_samples,)], float32
    table : PartialTable
    """
    table = partial_table(patch) if table is None else table
    tone = Tone.from_table(table)
    ending = patch_ending(patch, table) if ending is None else ending
    signal = render_tone(tone, ending.n_samples, patch.render.sample_rate, damper=ending.damper,
                         release_t60=patch.damping.release_t60, fade=ending.fade)
    return signal, table
