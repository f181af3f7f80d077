"""Resonator models: one module per physical object, each a pure function
spec -> :class:`synth.modes.ModeSet`.

:func:`resonator_modes` dispatches on the spec's type; :func:`retune_spec`
moves the parameter a maker would move to put the lowest mode on a pitch.
"""
from __future__ import annotations

from dataclasses import replace

from .string import StringSpec, string_modes

__all__ = ["RESONATOR_TYPES", "StringSpec", "string_modes", "resonator_modes", "retune_spec", "resonator_name"]

#: Every resonator type a patch may name.
RESONATOR_TYPES = ("string", "membrane", "bar", "plate", "air-column", "partials")

_MODES = {StringSpec: ("string", string_modes)}


def resonator_name(spec):
    """The patch type name of a spec, e.g. ``"string"``."""
    return _MODES[type(spec)][0]


def resonator_modes(spec, *, excitation_position, pickup_position, n_modes):
    """The ModeSet of any resonator spec (positions as tuples of coordinates)."""
    return _MODES[type(spec)][1](
        spec, excitation_position=excitation_position, pickup_position=pickup_position, n_modes=n_modes
    )


def retune_spec(spec, pitch_hz):
    """A copy of `spec` tuned so its lowest mode sounds at `pitch_hz`."""
    if isinstance(spec, StringSpec):
        return replace(spec, tension=None, pitch_hz=pitch_hz)
    raise TypeError(f"cannot retune {type(spec).__name__}")
