"""Resonator models: one module per physical object, each a pure function
spec -> :class:`synth.modes.ModeSet` (the contract is in :mod:`.common`).

Modules are imported when a patch names their type.
"""
from __future__ import annotations

import importlib

from .common import SpecError, UnreachablePitch

__all__ = [
    "RESONATOR_TYPES",
    "resonator_module",
    "resonator_modes",
    "retune_spec",
    "resonator_name",
    "SpecError",
    "UnreachablePitch",
]

#: Patch type name -> module name in this package.
_MODULES = {
    "string": "string",
    "membrane": "membrane",
    "bar": "bar",
    "plate": "plate",
    "air-column": "air_column",
    "partials": "partials",
}

#: Every resonator type a patch may name.
RESONATOR_TYPES = tuple(_MODULES)


def resonator_module(kind):
    """The module implementing resonator type `kind` (KeyError for a type that is not one, even unhashable)."""
    if not isinstance(kind, str) or kind not in _MODULES:
        raise KeyError(kind)
    return importlib.import_module(f".{_MODULES[kind]}", __name__)


def resonator_name(spec):
    """The patch type name of a spec, e.g. ``"string"``."""
    return spec.TYPE


def resonator_modes(spec, *, excitation_position, pickup_position, n_modes):
    """The ModeSet of any resonator spec (solved afresh; the pipeline uses :mod:`synth.solvecache`)."""
    return resonator_module(spec.TYPE).solve(spec, n_modes).place(excitation_position, pickup_position)


def retune_spec(spec, pitch_hz):
    """A copy of `spec` tuned so its lowest mode sounds at `pitch_hz`."""
    return resonator_module(spec.TYPE).retune(spec, pitch_hz)
