"""What every resonator module shares: the contract and its errors.

A resonator module ``synth/resonators/<name>.py`` provides

``FIELDS`` : dict of key -> :class:`synth.schema.Field`
    Its patch keys besides ``type``.  A ``material`` key is read by the patch
    loader (a name or a mapping of constants) and arrives as a
    :class:`synth.materials.Material`.
``build_spec(values) -> spec``
    A frozen dataclass in SI units from the checked values; cross-key
    problems raise :class:`SpecError` naming the key to blame.
``PITCH_REPLACES`` : tuple of str
    The keys a command-line ``--pitch`` replaces: the patch loader drops them
    from the resonator section before it sets ``pitch``, so the two never
    clash.  Name the keys the pitch is solved for, the parameter ``retune``
    moves (``("tension",)`` for a string, ``("thickness",)`` for a plate).
``position_style(spec) -> str``
    ``"fraction"`` (a number 0..1 along the length), ``"xy"`` (``[x, y]``
    fractions), ``"polar"`` (``{radius: fraction, angle: degrees}``) or
    ``"none"`` (positions are not used).
``solve(spec, n_modes) -> Solution``
    Everything about the modes that depends only on the object: a
    :class:`synth.modes.Solution` (or a
    :class:`synth.resonators.outline.PairedSolution` for circular pairs),
    whose ``place(excitation_position, pickup_position)`` gives the
    :class:`synth.modes.ModeSet`.  Positions arrive as a float (fraction),
    ``(x, y)`` or ``(radius_fraction, angle_rad)``; ``pickup_position`` may
    be None (weight every mode 1).  Mode shapes are scaled to a common modal
    mass.  Solutions are cached per spec (:mod:`synth.solvecache`), so
    ``solve`` must be a pure function of its arguments.
``modes(spec, *, excitation_position, pickup_position, n_modes) -> ModeSet``
    ``solve(spec, n_modes).place(excitation_position, pickup_position)``.
``retune(spec, pitch_hz) -> spec``
    The spec with the parameter a maker would move changed so the lowest mode
    sounds at `pitch_hz` (raise :class:`UnreachablePitch` if it cannot).
"""
from __future__ import annotations

__all__ = ["SpecError", "UnreachablePitch", "SAFE_STRESS_FRACTION", "stress_warnings"]

#: Working stress above this fraction of the tensile strength gets a warning.
#: Common practice (makers commonly keep working tension well below breaking;
#: about 60% is a frequently used ceiling), not a published limit.
SAFE_STRESS_FRACTION = 0.60


class SpecError(ValueError):
    """A resonator spec whose keys contradict each other; `key` is the one to blame."""

    def __init__(self, message, key=None):
        super().__init__(message)
        self.key = key

    def __reduce__(self):
        return (type(self), (str(self), self.key))


class UnreachablePitch(ValueError):
    """The requested pitch cannot be reached by this object's geometry."""


def stress_warnings(stress, strength, what):
    """Warnings (list of str) for a working `stress` (Pa) against `strength` (Pa).

    Empty below :data:`SAFE_STRESS_FRACTION`; `what` names the part ("string").
    The figures are previews: the message defers to the maker's data.
    """
    if not strength:
        return []
    fraction = stress / strength
    head = (
        f"{what} stress {stress / 1e6:.4g} MPa is {100 * fraction:.3g}% of the tensile strength "
        f"({strength / 1e6:.4g} MPa)"
    )
    if fraction >= 1.0:
        return [f"{head}: this {what} would break; this is a preview, defer to the maker's data"]
    if fraction > SAFE_STRESS_FRACTION:
        return [
            f"{head}, above the {100 * SAFE_STRESS_FRACTION:.0f}% working ceiling (common practice): "
            "risk of breaking; this is a preview, defer to the maker's data"
        ]
    return []
