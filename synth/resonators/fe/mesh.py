"""Quality triangle meshes of an outline with holes (Shewchuk's Triangle).

The mesher is Triangle [1]_ through its Python wrapper (``pip install
triangle``): a constrained conforming Delaunay triangulation of the planar
straight-line graph made of the outline and the holes, with a minimum angle
of :data:`MIN_ANGLE_DEG` and a largest triangle area from the target element
size.  Every boundary segment of the mesh keeps the index of the outline (or
hole) segment it lies on, so edge conditions can be set per segment.
Triangle is deterministic: the same input gives the same mesh.

References
----------
.. [1] J. R. Shewchuk, "Triangle: engineering a 2D quality mesh generator and
   Delaunay triangulator", in *Applied Computational Geometry*, LNCS 1148,
   Springer (1996), 203-222.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["TriMesh", "triangulate", "element_size", "SEGMENT_NONE"]

#: Smallest triangle angle asked of Triangle (degrees; 30 is well inside its guaranteed range).
MIN_ANGLE_DEG = 30.0
#: Corners of the region sharper inward than this (degrees) get a graded mesh: points along their
#: segments at size / 2**k, k = 1..GRADE_LEVELS, which Triangle's quality bound spreads inward
#: (re-entrant corners make the modes singular there and slow the convergence).
GRADE_ABOVE_DEG = 190.0
GRADE_LEVELS = 5
#: Boundary marker of an interior edge.
SEGMENT_NONE = 0


@dataclass(frozen=True, eq=False)
class TriMesh:
    """A triangle mesh.

    Attributes
    ----------
    points : ndarray [shape=(N, 2)]
    triangles : ndarray [shape=(T, 3)] of int
        Counter-clockwise vertex indices.
    segments : ndarray [shape=(S, 2)] of int
        Boundary edges (vertex indices).
    segment_ids : ndarray [shape=(S,)] of int
        For each boundary edge, the index of the input segment it lies on
        (outline segments first, then each hole's in turn).
    """

    points: np.ndarray
    triangles: np.ndarray
    segments: np.ndarray
    segment_ids: np.ndarray


def element_size(area, n_modes, *, per_wavelength):
    """Target element size for `n_modes` modes of a region of `area` (same length unit).

    The highest mode's wavenumber ``k`` follows Weyl's law for membranes and
    thin plates alike (``N ~ area k**2 / (4 pi)``); its wavelength ``2 pi / k``
    is cut into `per_wavelength` elements.  A margin of 20% on the count
    covers the boundary term of the law.
    """
    k = math.sqrt(4.0 * math.pi * (1.2 * n_modes + 8.0) / area)
    return 2.0 * math.pi / k / per_wavelength


def _cross2(u, v):
    """z component of the cross product of 2-D vectors (rows)."""
    return u[:, 0] * v[:, 1] - u[:, 1] * v[:, 0]


def _interior_point(polygon):
    """A point strictly inside a simple polygon: the centroid of one triangle of its triangulation."""
    import triangle

    p = np.asarray(polygon, dtype=float)
    n = len(p)
    seg = np.column_stack([np.arange(n), (np.arange(n) + 1) % n])
    out = triangle.triangulate({"vertices": p, "segments": seg}, "pQ")
    tri = out["triangles"]
    # the largest triangle: its centroid is safely away from the edges
    a = out["vertices"][tri]
    area = np.abs(_cross2(a[:, 1] - a[:, 0], a[:, 2] - a[:, 0]))
    return a[int(np.argmax(area))].mean(axis=0)


def _reentrant(polygon, *, hole):
    """Indices of the vertices where the region (inside an outline, outside a hole) has an angle above 190 deg."""
    p = np.asarray(polygon, dtype=float)
    before, after = p - np.roll(p, 1, axis=0), np.roll(p, -1, axis=0) - p
    turn = np.arctan2(before[:, 0] * after[:, 1] - before[:, 1] * after[:, 0], np.einsum("ij,ij->i", before, after))  # left turn > 0
    orientation = 1.0 if np.dot(p[:, 0], np.roll(p[:, 1], -1)) - np.dot(np.roll(p[:, 0], -1), p[:, 1]) > 0 else -1.0
    reflex = orientation * turn < -math.radians(GRADE_ABOVE_DEG - 180.0)  # a right turn on a CCW outline
    convex = orientation * turn > math.radians(GRADE_ABOVE_DEG - 180.0)
    return np.flatnonzero(convex if hole else reflex)


def _graded(polygon, corners, size):
    """The polygon with points added along the segments beside each corner, at size / 2**k (k = 1..)."""
    p = np.asarray(polygon, dtype=float)
    n = len(p)
    extra = {i: [] for i in range(n)}  # segment i (p[i] -> p[i+1]): fractions along it
    for c in corners:
        for seg, start in ((c, True), ((c - 1) % n, False)):
            length = float(np.hypot(*(p[(seg + 1) % n] - p[seg])))
            for k in range(1, GRADE_LEVELS + 1):
                d = size * 0.5**k
                if d < 0.45 * length:
                    extra[seg].append(d / length if start else 1.0 - d / length)
    out, ids = [], []
    for i in range(n):
        out.append(p[i])
        ids.append(i)
        for s in sorted(set(extra[i])):
            out.append(p[i] + s * (p[(i + 1) % n] - p[i]))
            ids.append(i)
    return np.array(out), np.array(ids)


def triangulate(points, holes, max_area):
    """A quality mesh of the polygon `points` less the `holes`.

    Parameters
    ----------
    points : array_like [shape=(n, 2)]
    holes : sequence of array_like [shape=(n_k, 2)]
    max_area : float > 0
        Largest triangle area.

    Returns
    -------
    TriMesh
    """
    import triangle

    polygons = [np.asarray(points, dtype=float)] + [np.asarray(h, dtype=float) for h in holes]
    size = math.sqrt(4.0 * max_area / math.sqrt(3.0))
    vertices, segments, markers, offset, first_id = [], [], [], 0, 0
    for k, polygon in enumerate(polygons):
        graded, ids = _graded(polygon, _reentrant(polygon, hole=k > 0), size)
        n = len(graded)
        vertices.append(graded)
        local = np.arange(n)
        segments.append(np.column_stack([local, (local + 1) % n]) + offset)
        markers.append(ids + first_id + 1)
        offset += n
        first_id += len(polygon)
    data = {
        "vertices": np.vstack(vertices),
        "segments": np.vstack(segments).astype(np.int32),
        "segment_markers": np.concatenate(markers).astype(np.int32)[:, None],
    }
    if len(polygons) > 1:
        data["holes"] = np.array([_interior_point(h) for h in polygons[1:]])
    out = triangle.triangulate(data, f"pq{MIN_ANGLE_DEG:g}a{max_area:.17g}Q")
    tri = out["triangles"].astype(np.int64)
    pts = out["vertices"].astype(float)
    # counter-clockwise triangles
    a = pts[tri]
    flip = _cross2(a[:, 1] - a[:, 0], a[:, 2] - a[:, 0]) < 0
    tri[flip] = tri[flip][:, [0, 2, 1]]
    seg_markers = out["segment_markers"].ravel().astype(np.int64)
    boundary = seg_markers != SEGMENT_NONE
    return TriMesh(
        points=pts,
        triangles=tri,
        segments=out["segments"][boundary].astype(np.int64),
        segment_ids=seg_markers[boundary] - 1,
    )
