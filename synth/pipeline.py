"""Patch -> ModeSet -> PartialTable -> signal: the one-way data flow.

These functions glue the rooms together; they do no file work.  The
resonator's modes come from a :class:`~synth.solvecache.SolveCache` (solved
once per object); everything after -- positions, detune, weights, damping --
is applied to the solved modes.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .damping import two_point_t60
from .engine import render_modes
from .excitation import excitation_weights
from .modes import NODE_TOLERANCE, PartialTable, frozen_array
from .patch import MAX_SAMPLE_RATE
from .resonators import UnreachablePitch, resonator_name
from .solvecache import DEFAULT_CACHE

__all__ = ["mode_set", "partial_table", "render_patch", "Unweighted", "unweighted_partials", "weigh"]


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
        dropped = [modes.labels[i] for i in np.flatnonzero(~keep)]
        shown = ", ".join(dropped[:3]) + (f" ... {dropped[-1]}" if len(dropped) > 3 else "")
        warnings.append(
            f"{len(dropped)} modes at or above Nyquist ({nyquist:g} Hz) left out: {shown}"
        )
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
    return Unweighted(modes, keep, kept, t60, fundamental, tuple(warnings))


def weigh(patch, unweighted):
    """The second half of :func:`partial_table`: the excitation's weights and the levels.

    Raises
    ------
    PatchError
        If nothing would sound (the excitation or pickup on a node of every
        mode, or no strength).
    """
    modes, keep, kept = unweighted.modes, unweighted.keep, unweighted.kept
    # Weights are computed over every computed mode, then the ones at or above
    # Nyquist are dropped: the level of a mode does not depend on the sample rate.
    amplitude, phase = excitation_weights(
        patch.excitation.kind,
        modes.frequency_hz,
        modes.excitation_shape,
        modes.pickup_shape,
        strength=patch.excitation.strength,
        contact_time=patch.excitation.contact_time,
    )
    if "level_override_db" in modes.columns:
        # Levels given per mode (a measured partial set) replace the excitation's
        # weighting; the amplitudes sum to `strength`, as a pluck's do at its point.
        weight = 10.0 ** (np.asarray(modes.columns["level_override_db"], dtype=float) / 20.0)
        amplitude = patch.excitation.strength * weight / np.sum(weight)
    scale = np.abs(modes.excitation_shape * modes.pickup_shape)
    null = scale <= NODE_TOLERANCE * max(float(np.max(scale)), 1e-300)
    amplitude = np.where(null, 0.0, amplitude)
    amplitude, phase, null = amplitude[keep], phase[keep], null[keep]
    peak = float(np.max(amplitude)) if amplitude.size else 0.0
    if patch.excitation.strength == 0.0:
        raise patch.error("excitation.strength", "must be > 0 to sound")
    if peak <= 0.0:
        excitation_sounds = np.any(np.abs(kept.excitation_shape) > NODE_TOLERANCE * np.max(np.abs(kept.excitation_shape), initial=0.0))
        key = "pickup.position" if excitation_sounds and patch.pickup.position is not None else "excitation.position"
        raise patch.error(
            key,
            f"nothing would sound: the {key.split('.')[0]} sits on a node of every mode below Nyquist",
        )
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
        parameters=kept.parameters,
        warnings=unweighted.warnings,
    )


def partial_table(patch, *, modes=None, detune_cents=0.0, cache=None):
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
    return weigh(patch, unweighted_partials(patch, modes=modes, detune_cents=detune_cents, cache=cache))


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


def render_patch(patch, *, table=None):
    """Render `patch` to a float32 signal at its own scale (not normalised).

    Returns
    -------
    signal : ndarray [shape=(round(duration * sample_rate),)], float32
    table : PartialTable
    """
    table = partial_table(patch) if table is None else table
    audible = table.amplitude > 0
    signal = render_modes(
        table.frequency_hz[audible],
        table.t60_s[audible],
        table.amplitude[audible],
        patch.render.duration,
        patch.render.sample_rate,
        phase=table.phase[audible],
    )
    return signal, table
