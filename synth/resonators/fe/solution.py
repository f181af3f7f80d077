"""The solved modes of an outline as a :class:`synth.modes.Solution`, with what plots need.

Positions are ``(x, y)`` in metres in the outline's own coordinates (position
style ``"xy_m"``); a point outside the outline or inside a hole is refused.
Labels are the order of the mode, ``"(1)"``, ``"(2)"``, ... (a free shape has
no mode indices of its own).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ...modes import Solution, frozen_array
from .core import nodal_segments
from .geometry import check_point

__all__ = ["OutlineSolution", "order_labels", "outline_solution", "mesh_parameters"]


def mesh_parameters(fe, n, element):
    """Report parameters of a finite-element solve: mesh size and the error estimate of mode `n`."""
    from .core import TOLERANCE

    error = fe.error[:n]
    return {
        "element": element,
        "mesh_elements": fe.n_elements,
        "mesh_dofs": fe.n_dofs,
        "mesh_error_highest_mode": float(error[-1]) if len(error) else 0.0,
        "mesh_error_max": float(np.nanmax(error)) if len(error) else 0.0,
        "mesh_error_target": TOLERANCE,
        "mesh_converged": bool(len(error) == 0 or float(error[-1]) <= TOLERANCE),
    }


def order_labels(n):
    """``("(1)", "(2)", ...)``: labels by order."""
    return tuple(f"({i + 1})" for i in range(n))


@dataclass(frozen=True, eq=False)
class OutlineSolution(Solution):
    """A :class:`~synth.modes.Solution` of an outline, with its mesh for plots.

    Attributes
    ----------
    outline : Outline
        In metres.
    fe : FEModes
        The dimensionless finite-element modes (shapes: mean square 1).
    """

    outline: object = None
    fe: object = None

    def triangulation(self):
        """(points [shape=(N, 2)] m, triangles [shape=(T, 3)]): the mesh refined once, for contouring.

        With :meth:`nodal_values` this is what ``matplotlib.tri`` needs
        (``ax.tricontour(x, y, triangles, values, levels=[0])``).
        """
        return self._plot_mesh()[:2]

    def nodal_values(self, n_shapes=None):
        """Shape values [shape=(N, n_shapes)] at the points of :meth:`triangulation` (mean square 1)."""
        values = self._plot_mesh()[2]
        return values if n_shapes is None else values[:, :n_shapes]

    def nodal_lines(self, index):
        """Zero contour of mode `index` (0-based) as segments [shape=(S, 2, 2)], m."""
        points, triangles, values = self._plot_mesh()
        return nodal_segments(points, triangles, values[:, index])

    def _plot_mesh(self):
        cached = getattr(self, "_plot_cache", None)
        if cached is not None:
            return cached
        coarse = self.fe.basis.mesh
        mesh = coarse.refined(1)  # the vertices, then the facet midpoints in facet order
        n_vertices, n = coarse.p.shape[1], len(self.frequency_hz)
        points = mesh.p.T * self.fe.length
        vertex = self.fe.vectors[self.fe.basis.nodal_dofs[0], :n]  # both elements carry w at the vertices
        middle = mesh.p[:, n_vertices:].T
        owner = coarse.p[:, coarse.t[:, coarse.f2t[0]]].mean(axis=1).T  # centroid of a triangle on each facet
        inward = middle + 1e-9 * (owner - middle)  # never exactly on a boundary edge
        values = np.vstack([vertex, self.fe.probe(inward * self.fe.length)[:, :n]])
        result = (points, mesh.t.T.copy(), values)
        object.__setattr__(self, "_plot_cache", result)
        return result


def outline_solution(resonator, outline, fe, frequency_hz, parameters, warnings=()):
    """An :class:`OutlineSolution` from FE modes scaled to Hz.

    Parameters
    ----------
    resonator : str
    outline : Outline
    fe : FEModes
    frequency_hz : ndarray [shape=(M,)], Hz
    parameters : dict
    warnings : sequence of str
    """
    n = len(frequency_hz)

    def shape(point):
        check_point(outline, point, "position")
        return fe.probe([point])[0, :n]

    columns = {"mesh_error": tuple(float(e) for e in fe.error[:n])}
    return OutlineSolution(
        resonator=resonator,
        frequency_hz=frozen_array(frequency_hz),
        labels=order_labels(n),
        shape=shape,
        columns=columns,
        parameters=parameters,
        warnings=tuple(warnings),
        outline=outline,
        fe=fe,
    )
