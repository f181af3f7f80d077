"""Outline helpers shared by the resonators cut as a circle or a rectangle
(:mod:`.membrane`, :mod:`.plate`): the size keys of each outline, and the
basis of the degenerate cos/sin pairs of a circle.

Notes
-----
A circular mode with n > 0 nodal diameters is a degenerate pair,
``cos(n theta)`` and ``sin(n theta)``, and any rotation of the pair is an
equally valid basis.  Both resonators turn the basis to the excitation point
(to the pickup if the excitation is at the centre), so the "cos" member
carries everything a point excitation puts into the pair and the "sin" member
is silent; without a pickup each pair is one row (orientation "pair").
"""
from __future__ import annotations

from .common import SpecError

__all__ = ["OUTLINES", "check_outline", "frame_angle", "circle_rows"]

#: Size keys of each outline.
OUTLINES = {"circle": ("radius",), "rectangle": ("width", "height")}


def check_outline(shape, values):
    """Each shape takes its own size keys (:data:`OUTLINES`), all of them.

    Raises
    ------
    SpecError
        Naming the first key of another outline that is given, else the first
        missing key of this one.
    """
    own = " and ".join(f"'{key}'" for key in OUTLINES[shape])
    for other, keys in OUTLINES.items():
        for key in keys:
            if other != shape and values[key] is not None:
                raise SpecError(f"a {shape} takes {own}; '{key}' is for a {other} (shape: {other})", key=key)
    for key in OUTLINES[shape]:
        if values[key] is None:
            raise SpecError(f"missing for a {shape}: give {own}", key=key)


def frame_angle(excitation, pickup):
    """Basis direction (rad): the excitation's angle, or the pickup's if it is central.

    Parameters
    ----------
    excitation : (float, float)
        (radius fraction, angle rad).
    pickup : (float, float) or None
        As `excitation`.
    """
    if excitation[0] > 0.0:
        return excitation[1]
    if pickup is not None and pickup[0] > 0.0:
        return pickup[1]
    return 0.0


def circle_rows(orders, split, n_rows):
    """The first `n_rows` (mode index, orientation) rows of circular modes.

    Parameters
    ----------
    orders : sequence of int >= 0
        Nodal diameters of each mode (pair), in table order.
    split : bool
        True lists each n > 0 pair as a "cos" and a "sin" row; False as one
        "pair" row.  n = 0 is one row with orientation "".
    n_rows : int >= 1
    """
    rows = []
    for index, n in enumerate(orders):
        orientations = ("",) if n == 0 else (("cos", "sin") if split else ("pair",))
        rows.extend((index, o) for o in orientations)
        if len(rows) >= n_rows:
            break
    return rows[:n_rows]
