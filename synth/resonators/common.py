"""What every resonator module shares: the contract and its errors.

A resonator module ``synth/resonators/<name>.py`` provides

``FIELDS`` : dict of key -> :class:`synth.schema.Field`
    Its patch keys besides ``type``.  A ``material`` key is read by the patch
    loader (a name or a mapping of constants) and arrives as a
    :class:`synth.materials.Material`.
``build_spec(values) -> spec``
    A frozen dataclass in SI units from the checked values; cross-key
    problems raise :class:`SpecError` naming the key to blame.
``position_style(spec) -> str``
    ``"fraction"`` (a number 0..1 along the length), ``"xy"`` (``[x, y]``
    fractions), ``"polar"`` (``{radius: fraction, angle: degrees}``) or
    ``"none"`` (positions are not used).
``modes(spec, *, excitation_position, pickup_position, n_modes) -> ModeSet``
    Positions arrive as a float (fraction), ``(x, y)`` or
    ``(radius_fraction, angle_rad)``; ``pickup_position`` may be None (weight
    every mode 1).  Mode shapes are scaled to a common modal mass.
``retune(spec, pitch_hz) -> spec``
    The spec with the parameter a maker would move changed so the lowest mode
    sounds at `pitch_hz` (raise :class:`UnreachablePitch` if it cannot).
"""
from __future__ import annotations

__all__ = ["SpecError", "UnreachablePitch"]


class SpecError(ValueError):
    """A resonator spec whose keys contradict each other; `key` is the one to blame."""

    def __init__(self, message, key=None):
        super().__init__(message)
        self.key = key

    def __reduce__(self):
        return (type(self), (str(self), self.key))


class UnreachablePitch(ValueError):
    """The requested pitch cannot be reached by this object's geometry."""
