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

import math
from dataclasses import dataclass, field

import numpy as np

from ..modes import ModeSet, frozen_array, take_column
from .common import SpecError

__all__ = ["OUTLINES", "check_outline", "is_drawn_outline", "frame_angle", "circle_rows", "PairedSolution"]

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


@dataclass(frozen=True, eq=False)
class PairedSolution:
    """The solved modes of a circular object, one entry per (order, index) pair.

    :meth:`place` turns the pairs into rows (:func:`circle_rows`): the basis
    faces the excitation (:func:`frame_angle`), and with a pickup each pair of
    order n > 0 is a "cos" and a "sin" row, without one a single "pair" row.

    Attributes
    ----------
    resonator : str
    frequency_hz : ndarray [shape=(P,)], Hz
        Per pair, ascending; at least `n_rows` pairs.
    orders : ndarray [shape=(P,)] of int
        Nodal diameters of each pair.
    labels : tuple of str [len P]
    radial : callable
        ``radial(radius_fraction) -> ndarray [shape=(P,)]``: each pair's
        mass-normalised shape along the direction of its "cos" member.
    n_rows : int
        Rows a placement lists.
    columns : dict of str -> sequence [len P]
        Per-pair report columns; the rows' ``orientation`` column is inserted
        after ``nodal_lines``.
    parameters : dict
        ``orientation_reference_deg`` (if present) is set by :meth:`place`.
    warnings : tuple of str
    rim_is_node : bool
        The rim (radius fraction 1) is an exact node of every mode.
    warn_above : tuple of (float, str)
        ``(frequency_hz, warning)``: the warning is given when a placement
        lists a mode above that frequency.
    """

    resonator: str
    frequency_hz: np.ndarray
    orders: np.ndarray
    labels: tuple
    radial: object
    n_rows: int
    columns: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    warnings: tuple = ()
    rim_is_node: bool = True
    warn_above: tuple = ()

    def place(self, excitation_position, pickup_position):
        """The :class:`~synth.modes.ModeSet` of the rows, with shapes at the two points."""
        split = pickup_position is not None
        frame = frame_angle(excitation_position, pickup_position)
        rows = circle_rows(self.orders, split, self.n_rows)
        index = np.array([i for i, _ in rows])
        sine = np.array([o == "sin" for _, o in rows])
        order = self.orders[index]

        def shape(point):
            radius, angle = point
            if self.rim_is_node and radius >= 1.0:
                return np.zeros(len(rows))
            turn = np.where(sine, np.sin(order * (angle - frame)), np.cos(order * (angle - frame)))
            return self.radial(radius)[index] * turn

        columns = {}
        for key, values in self.columns.items():
            columns[key] = take_column(values, index)
            if key == "nodal_lines":
                columns["orientation"] = tuple(o for _, o in rows)
        parameters = dict(self.parameters)
        if "orientation_reference_deg" in parameters:
            parameters["orientation_reference_deg"] = math.degrees(frame)
        frequency = self.frequency_hz[index]
        warnings = self.warnings + tuple(text for onset, text in self.warn_above if frequency.size and frequency[-1] > onset)
        return ModeSet(
            resonator=self.resonator,
            frequency_hz=frozen_array(frequency),
            labels=tuple(self.labels[i] for i in index),
            excitation_shape=frozen_array(shape(excitation_position)),
            pickup_shape=frozen_array(np.ones(len(rows)) if pickup_position is None else shape(pickup_position)),
            columns=columns,
            parameters=parameters,
            warnings=warnings,
        )


def is_drawn_outline(values):
    """True for ``shape: outline`` (finite elements, :mod:`.fe`); the keys of the other shapes refused either way.

    Raises
    ------
    SpecError
        An outline's key on a circle or rectangle, or a circle's or rectangle's size on an outline.
    """
    if values["shape"] != "outline":
        for key in ("points", "holes", "hole_edges", "svg_path"):
            if values.get(key) is not None:
                raise SpecError(f"'{key}' is for shape: outline", key=key)
        return False
    for key in ("radius", "width", "height"):
        if values.get(key) is not None:
            raise SpecError(f"an outline takes 'points' (or 'svg_path'); '{key}' is for a circle or rectangle", key=key)
    return True
