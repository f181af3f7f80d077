"""A given overtone set: frequency ratios over a fundamental, measured or invented.

Notes
-----
Partial k sounds at ``f_k = f_ref * r_k``.  With ``fundamental`` the
reference is given; with ``pitch`` it is solved so that the lowest partial
sounds at the pitch (``f_ref = pitch / min(r)``).  Partials are listed by
frequency; their labels ``p1, p2, ...`` keep the order of the patch's list.

Positions are not used: every partial has shape 1 at the excitation and the
pickup.  Optional per-partial lists ride along as ModeSet columns that the
pipeline honours:

* ``t60_s`` (from ``t60``): the decay time of each partial, in place of the
  damping section's two-point T60;
* ``level_override_db`` (from ``levels_db``): the level of each partial, in
  place of the excitation's weighting (the excitation type still sets the
  phase, and ``strength`` the overall scale).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np

from ..modes import Solution, frozen_array
from ..schema import Field
from ..units import parse_quantity
from .common import SpecError, UnreachablePitch

__all__ = [
    "FIELDS",
    "PartialsSpec",
    "build_spec",
    "position_style",
    "modes",
    "solve",
    "count_below",
    "retune",
    "partials_modes",
    "MAX_PARTIALS",
    "MAX_T60_S",
    "PITCH_REPLACES",
]

#: Longest list of partials a patch may give (a list in a YAML file: 20,000 is already far past any use).
MAX_PARTIALS = 20000
#: Longest per-partial decay time (s), as for the damping section.
MAX_T60_S = 3600.0
#: Keys a command-line ``--pitch`` replaces (for the patch loader).
PITCH_REPLACES = ("fundamental",)

#: Patch keys of a partial set (besides ``type``).
FIELDS = {
    "fundamental": Field("frequency", positive=True),
    "pitch": Field("pitch", positive=True),
    "ratios": Field("any", required=True),
    "t60": Field("any", nullable=True),
    "levels_db": Field("any", nullable=True),
}


@dataclass(frozen=True)
class PartialsSpec:
    """An overtone set in SI units.

    Attributes
    ----------
    reference_hz : float > 0, Hz
        The frequency the ratios multiply.
    ratios : tuple of float > 0
        In the patch's order.
    t60 : tuple of float > 0 or None, s
        Decay time per partial (same order as `ratios`).
    levels_db : tuple of float or None, dB
        Level per partial (same order as `ratios`).
    pitch_hz : float or None, Hz
        The pitch the reference was solved for (report only).
    """

    reference_hz: float
    ratios: tuple
    t60: tuple | None = None
    levels_db: tuple | None = None
    pitch_hz: float | None = None

    TYPE: ClassVar[str] = "partials"


def build_spec(values):
    """A :class:`PartialsSpec` from checked patch values."""
    fundamental, pitch = values["fundamental"], values["pitch"]
    if (fundamental is None) == (pitch is None):
        raise SpecError(
            "give exactly one of 'pitch' (the lowest partial sounds there) or 'fundamental' (Hz, the ratios' reference)",
            key="pitch" if pitch is not None else None,
        )
    ratios = _number_list(values["ratios"], "ratios", "a ratio", kind="number", positive=True, low=1e-3, high=1e4)
    n = len(ratios)
    t60 = None
    if values["t60"] is not None:
        t60 = _number_list(values["t60"], "t60", "a decay time", kind="time", positive=True, high=MAX_T60_S)
        _same_length(t60, n, "t60", "decay time (s)")
    levels = None
    if values["levels_db"] is not None:
        levels = _number_list(values["levels_db"], "levels_db", "a level", kind="level", low=-200.0, high=200.0)
        _same_length(levels, n, "levels_db", "level (dB)")
    spec = PartialsSpec(reference_hz=1.0, ratios=ratios, t60=t60, levels_db=levels)
    if pitch is not None:
        return retune(spec, pitch)
    return replace(spec, reference_hz=fundamental)


def _number_list(value, key, what, *, kind, positive=False, low=None, high=None):
    """A tuple of finite SI numbers from a YAML list, or SpecError naming `key`."""
    if not isinstance(value, list) or not value:
        raise SpecError(f"must be a non-empty list of numbers, e.g. [1, 2.76, 5.40], got {value!r}", key=key)
    if len(value) > MAX_PARTIALS:
        raise SpecError(f"has {len(value)} entries; at most {MAX_PARTIALS} partials are allowed", key=key)
    numbers = []
    for i, item in enumerate(value, start=1):
        try:
            number = parse_quantity(item, kind)
        except ValueError as error:
            raise SpecError(f"entry {i} ({item!r}) is not {what}: {error}", key=key) from None
        if not math.isfinite(number):
            raise SpecError(f"entry {i} ({item!r}) must be a finite number", key=key)
        if positive and number <= 0:
            raise SpecError(f"entry {i} ({item!r}) must be > 0", key=key)
        if low is not None and number < low:
            raise SpecError(f"entry {i} ({item!r}) must be >= {low:g}", key=key)
        if high is not None and number > high:
            raise SpecError(f"entry {i} ({item!r}) must be <= {high:g}", key=key)
        numbers.append(number)
    return tuple(numbers)


def _same_length(values, n, key, what):
    if len(values) != n:
        raise SpecError(
            f"has {len(values)} entries but ratios has {n}: give one {what} per partial", key=key
        )


def position_style(spec):
    """A partial set has no geometry: positions are not used."""
    return "none"


def retune(spec, pitch_hz):
    """The set scaled so its lowest partial sounds at `pitch_hz`."""
    if not (math.isfinite(pitch_hz) and pitch_hz > 0):
        raise UnreachablePitch(f"pitch {pitch_hz!r} Hz must be a positive frequency")
    return replace(spec, reference_hz=pitch_hz / min(spec.ratios), pitch_hz=pitch_hz)


def solve(spec, n_modes):
    """The partials of a given set, lowest first.

    Parameters
    ----------
    spec : PartialsSpec
    n_modes : int >= 1
        The lowest `n_modes` partials are kept (the pipeline reports the
        level of those a fixed ``render.max_modes`` leaves out, as for any
        resonator: :func:`synth.pipeline.weigh`).

    Returns
    -------
    Solution
        Every shape is 1 (a partial set has no geometry).  Labels ``"p<k>"``
        (k: place in the patch's list); columns partial, given_ratio, and
        t60_s / level_override_db where given.
    """
    ratios = np.array(spec.ratios, dtype=float)
    order = np.argsort(ratios, kind="stable")[:n_modes]
    freq = spec.reference_hz * ratios[order]
    columns = {
        "partial": tuple(int(k) + 1 for k in order),
        "given_ratio": tuple(float(ratios[k]) for k in order),
    }
    if spec.t60 is not None:
        columns["t60_s"] = tuple(float(spec.t60[k]) for k in order)
    if spec.levels_db is not None:
        columns["level_override_db"] = tuple(float(spec.levels_db[k]) for k in order)
    parameters = {
        "reference_hz": spec.reference_hz,
        "reference_solved": spec.pitch_hz is not None,
        "n_partials": len(spec.ratios),
        "per_partial_t60": spec.t60 is not None,
        "per_partial_levels": spec.levels_db is not None,
    }
    size = order.size

    def shape(position):
        return np.ones(size)

    return Solution(
        resonator="partials",
        frequency_hz=frozen_array(freq),
        labels=tuple(f"p{k + 1}" for k in order),
        shape=shape,
        columns=columns,
        parameters=parameters,
        warnings=(),
    )


def count_below(spec, limit_hz):
    """Every partial of the set, as the count for ``render.max_modes: auto``.

    More than the partials below `limit_hz` on purpose: a solve for all of
    them names none as left out, and the pipeline drops those at or above
    Nyquist without a word, as for any resonator.
    """
    return len(spec.ratios)


def partials_modes(spec, *, excitation_position=None, pickup_position=None, n_modes):
    """The partials of a given set as a ModeSet (positions are ignored; see :func:`solve`)."""
    return solve(spec, n_modes).place(excitation_position, pickup_position)


modes = partials_modes
