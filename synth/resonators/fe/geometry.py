"""Outlines of plates and membranes of free shape: parsing and validation.

An outline is a closed polygon in metres (``points: [[x, y], ...]``; the
last point joins the first), with optional holes (each a polygon inside the
outline) and, for plates, an edge condition per outline segment (segment i
runs from point i to point i + 1, the last one back to point 0).  Every
problem is refused with one line naming the key (:class:`SpecError`).

A simple SVG path (commands M, L, H, V, Z, absolute and relative) may give
the polygon instead: its first subpath is the outline, any further subpaths
are holes, in SVG units times a scale.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

from ...units import parse_quantity, short_repr
from ..common import SpecError

__all__ = [
    "EDGE_CONDITIONS",
    "Outline",
    "parse_outline",
    "parse_svg_path",
    "polygon_area",
    "contains",
    "check_point",
    "default_position",
    "to_metres",
]

#: Edge conditions of a plate segment.
EDGE_CONDITIONS = ("clamped", "free", "pinned")
#: Most outline points (and points over all holes) a patch may give.
MAX_POINTS = 4000
#: A polygon whose area is below this fraction of its bounding box's squared size has zero area.
ZERO_AREA_FRACTION = 1e-9


@dataclass(frozen=True)
class Outline:
    """A validated outline in metres (hashable: tuple fields).

    Attributes
    ----------
    points : tuple of (float, float), m
        The polygon, closing segment implied; at least 3 points.
    holes : tuple of tuple of (float, float), m
        Polygons strictly inside the outline, not touching each other.
    edges : tuple of str [len points] or None
        Per outline segment (plates); None for a membrane (its rim is fixed).
    hole_edges : tuple of str [len holes] or None
        Per hole (plates); None for a membrane (hole rims are fixed).
    """

    points: tuple
    holes: tuple = ()
    edges: tuple | None = None
    hole_edges: tuple | None = None

    @property
    def area(self):
        """Area inside the outline less the holes, m^2."""
        return abs(polygon_area(self.points)) - sum(abs(polygon_area(h)) for h in self.holes)

    @property
    def bounds(self):
        """(x_min, y_min, x_max, y_max), m."""
        p = np.asarray(self.points)
        return (*p.min(axis=0), *p.max(axis=0))

    @property
    def span(self):
        """The smaller side of the bounding box, m (the plate's span for thin-plate limits)."""
        x0, y0, x1, y1 = self.bounds
        return float(min(x1 - x0, y1 - y0))


def to_metres(value, key):
    """A coordinate in metres from a number (metres) or a length with a unit ("-12 mm")."""
    if isinstance(value, bool):
        raise SpecError(f"must be a number of metres or a length such as '12 mm', got {short_repr(value)}", key=key)
    if isinstance(value, (int, float)):
        number = float(value)
    elif isinstance(value, str):
        try:
            number = float(parse_quantity(value, "length"))
        except ValueError as error:
            raise SpecError(f"{error}", key=key) from None
    else:
        raise SpecError(f"must be a number of metres or a length such as '12 mm', got {short_repr(value)}", key=key)
    if not math.isfinite(number) or abs(number) > 1e3:
        raise SpecError(f"must be a finite coordinate within 1 km, got {short_repr(value)}", key=key)
    return number


def _polygon(value, key, what):
    """A tuple of (x, y) in metres from a list of [x, y] pairs; a repeated first point at the end is dropped."""
    if not isinstance(value, (list, tuple)):
        raise SpecError(f"{what} must be a list of [x, y] points, got {short_repr(value)}", key=key)
    if len(value) > MAX_POINTS:
        raise SpecError(f"{what} has {len(value)} points; at most {MAX_POINTS}", key=key)
    points = []
    for i, pair in enumerate(value):
        if not isinstance(pair, (list, tuple)) or len(pair) != 2:
            raise SpecError(f"{what}: point {i} must be [x, y], got {short_repr(pair)}", key=f"{key}[{i}]")
        points.append((to_metres(pair[0], f"{key}[{i}]"), to_metres(pair[1], f"{key}[{i}]")))
    if len(points) > 1 and points[0] == points[-1]:
        points.pop()
    if len(points) < 3:
        raise SpecError(f"{what} needs at least 3 points (a closed polygon), got {len(points)}", key=key)
    for i in range(len(points)):
        j = (i + 1) % len(points)
        if points[i] == points[j]:
            raise SpecError(f"{what}: points {i} and {j} coincide (a segment of zero length)", key=key)
    return tuple(points)


def polygon_area(points):
    """Signed area (m^2, positive counter-clockwise) of a polygon by the shoelace formula."""
    p = np.asarray(points, dtype=float)
    x, y = p[:, 0], p[:, 1]
    return 0.5 * float(np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y))


def _segments(points):
    p = np.asarray(points, dtype=float)
    return p, np.roll(p, -1, axis=0)


def _cross(o, a, b):
    return (a[..., 0] - o[..., 0]) * (b[..., 1] - o[..., 1]) - (a[..., 1] - o[..., 1]) * (b[..., 0] - o[..., 0])


def _crossings(a0, a1, b0, b1, *, same=False):
    """Pairs (i, j) where segment i of A and segment j of B meet (touching counts).

    With ``same`` the polygon is checked against itself: neighbouring
    segments (sharing a point) are not compared, and i < j.
    """
    p, q = a0[:, None, :], a1[:, None, :]
    r, s = b0[None, :, :], b1[None, :, :]
    d1, d2 = _cross(r, s, p), _cross(r, s, q)
    d3, d4 = _cross(p, q, r), _cross(p, q, s)
    scale = max(float(np.ptp(np.vstack([a0, b0]), axis=0).max()), 1e-30) ** 2
    eps = 1e-12 * scale
    proper = (d1 * d2 < -eps * eps) & (d3 * d4 < -eps * eps)

    def on(o, a, b, d):  # point b on segment o-a, given collinear (|d| small)
        inside = (np.minimum(o[..., 0], a[..., 0]) - 1e-12 <= b[..., 0]) & (b[..., 0] <= np.maximum(o[..., 0], a[..., 0]) + 1e-12)
        inside &= (np.minimum(o[..., 1], a[..., 1]) - 1e-12 <= b[..., 1]) & (b[..., 1] <= np.maximum(o[..., 1], a[..., 1]) + 1e-12)
        return (np.abs(d) <= eps) & inside

    touch = on(r, s, p, d1) | on(r, s, q, d2) | on(p, q, r, d3) | on(p, q, s, d4)
    hit = proper | touch
    if same:
        n = len(a0)
        i, j = np.indices((n, n))
        hit &= (j > i + 1) & ~((i == 0) & (j == n - 1))
    return [(int(i), int(j)) for i, j in zip(*np.nonzero(hit))]


def _inside(points, x, y):
    """Even-odd test: is each (x, y) strictly inside the polygon (points on an edge: either)?"""
    p = np.asarray(points, dtype=float)
    x, y = np.asarray(x, dtype=float)[..., None], np.asarray(y, dtype=float)[..., None]
    x0, y0 = p[:, 0], p[:, 1]
    x1, y1 = np.roll(x0, -1), np.roll(y0, -1)
    straddle = (y0 > y) != (y1 > y)
    with np.errstate(divide="ignore", invalid="ignore"):
        cross_x = x0 + (y - y0) * (x1 - x0) / (y1 - y0)
    return np.count_nonzero(straddle & (x < cross_x), axis=-1) % 2 == 1


def contains(outline, x, y):
    """True where (x, y) (m; arrays broadcast) lies inside the outline and outside every hole."""
    inside = _inside(outline.points, x, y)
    for hole in outline.holes:
        inside &= ~_inside(hole, x, y)
    return inside


def default_position(outline, fraction=(0.31, 0.37)):
    """A point on the object (m) for a patch that gives no position: `fraction` of the bounding box if it
    lies on the object, else the nearest centre of a triangle of the object's coarse triangulation."""
    x0, y0, x1, y1 = outline.bounds
    x, y = x0 + fraction[0] * (x1 - x0), y0 + fraction[1] * (y1 - y0)
    if bool(contains(outline, x, y)):
        return (float(x), float(y))
    from .mesh import triangulate

    mesh = triangulate(outline.points, outline.holes, outline.area / 50.0)
    centres = mesh.points[mesh.triangles].mean(axis=1)
    best = centres[int(np.argmin(np.hypot(centres[:, 0] - x, centres[:, 1] - y)))]
    return (float(best[0]), float(best[1]))


def check_point(outline, point, key):
    """Refuse a point (excitation, pickup) outside the shape or inside a hole, in one line.

    Parameters
    ----------
    outline : Outline
    point : (float, float), m
    key : str
        Named in the message (e.g. ``"excitation.position"``).
    """
    x, y = float(point[0]), float(point[1])
    if not bool(_inside(outline.points, x, y)):
        x0, y0, x1, y1 = outline.bounds
        raise SpecError(
            f"[{x:.6g}, {y:.6g}] m is outside the outline (its points span x {x0:.6g}..{x1:.6g} m, "
            f"y {y0:.6g}..{y1:.6g} m): give a point on the object, in metres",
            key=key,
        )
    for k, hole in enumerate(outline.holes):
        if bool(_inside(hole, x, y)):
            raise SpecError(f"[{x:.6g}, {y:.6g}] m is inside hole {k}: give a point on the object", key=key)


def _check_simple(points, key, what):
    a0, a1 = _segments(points)
    hits = _crossings(a0, a1, a0, a1, same=True)
    if hits:
        i, j = hits[0]
        n = len(points)
        more = f" (and {len(hits) - 1} more crossings)" if len(hits) > 1 else ""
        raise SpecError(
            f"{what} crosses itself: segment {i} (point {i} to {(i + 1) % n}) meets segment {j} "
            f"(point {j} to {(j + 1) % n}){more}; give the points in order around the shape",
            key=key,
        )
    area = polygon_area(points)
    p = np.asarray(points)
    size = float(np.ptp(p, axis=0).max())
    if abs(area) <= ZERO_AREA_FRACTION * size * size:
        raise SpecError(f"{what} has zero area (its points lie on a line)", key=key)


def _conditions(value, count, key, default, what):
    """Per-segment (or per-hole) edge conditions from one word or a list of `count` words."""
    if value is None:
        return (default,) * count
    if isinstance(value, str):
        value = [value] * count
    if not isinstance(value, (list, tuple)):
        raise SpecError(f"must be one of {', '.join(EDGE_CONDITIONS)} or a list of them, got {short_repr(value)}", key=key)
    if len(value) != count:
        raise SpecError(
            f"has {len(value)} entries but the {what} has {count}: give one per {what[:-1] if what.endswith('s') else what} "
            "(segment i runs from point i to point i + 1, the last back to point 0) or one word for all",
            key=key,
        )
    for i, word in enumerate(value):
        if word not in EDGE_CONDITIONS:
            raise SpecError(f"entry {i} is {short_repr(word)}; allowed: {', '.join(EDGE_CONDITIONS)}", key=key)
    return tuple(value)


def parse_outline(points, *, holes=None, edges=None, hole_edges=None, plate=True):
    """A validated :class:`Outline` from patch values.

    Parameters
    ----------
    points : list of [x, y]
        Numbers in metres or lengths with a unit; at least 3 points.
    holes : list of lists of [x, y] or None
    edges : str or list of str or None
        Plates: one of :data:`EDGE_CONDITIONS` for every segment, or one per
        outline segment.  Default "free".  Membranes take none (the rim is fixed).
    hole_edges : str or list of str or None
        Plates: per hole (default "free").  Membranes take none (hole rims are fixed).
    plate : bool
        A plate (edges allowed) or a membrane.

    Raises
    ------
    SpecError
        One line naming the key: too few points, zero area, a self-crossing
        outline (naming the segments), a hole outside the outline or crossing
        it or another hole, an edges list of the wrong length.
    """
    outline = _polygon(points, "points", "the outline")
    _check_simple(outline, "points", "the outline")
    if holes is None:
        holes = []
    if not isinstance(holes, (list, tuple)):
        raise SpecError(f"must be a list of polygons (each a list of [x, y]), got {short_repr(holes)}", key="holes")
    parsed = []
    o0, o1 = _segments(outline)
    for k, hole in enumerate(holes):
        key = f"holes[{k}]"
        polygon = _polygon(hole, key, f"hole {k}")
        _check_simple(polygon, key, f"hole {k}")
        h0, h1 = _segments(polygon)
        hits = _crossings(h0, h1, o0, o1)
        if hits:
            raise SpecError(f"hole {k} crosses or touches the outline (hole segment {hits[0][0]} meets outline segment "
                            f"{hits[0][1]}): a hole must lie inside the outline", key=key)
        if not bool(np.all(_inside(outline, *np.asarray(polygon).T))):
            raise SpecError(f"hole {k} lies outside the outline: a hole must lie inside it", key=key)
        for m, other in enumerate(parsed):
            g0, g1 = _segments(other)
            inside = bool(_inside(other, *polygon[0])) or bool(_inside(polygon, *other[0]))
            if _crossings(h0, h1, g0, g1) or inside:
                raise SpecError(f"hole {k} overlaps hole {m}: holes must be apart (join them into one)", key=key)
        parsed.append(polygon)
    if plate:
        edge_list = _conditions(edges, len(outline), "edges", "free", "outline segments")
        hole_list = _conditions(hole_edges, len(parsed), "hole_edges", "free", "holes")
    else:
        if edges is not None:
            raise SpecError("a membrane's rim is fixed (it carries the tension): leave 'edges' out", key="edges")
        if hole_edges is not None:
            raise SpecError("a membrane's hole rims are fixed: leave 'hole_edges' out", key="hole_edges")
        edge_list = hole_list = None
    return Outline(points=outline, holes=tuple(parsed), edges=edge_list, hole_edges=hole_list)


_SVG_TOKEN = re.compile(r"[MmLlHhVvZz]|[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")


def parse_svg_path(d, *, scale):
    """Polygons from a simple SVG path: the first subpath is the outline, the others holes.

    Parameters
    ----------
    d : str
        Commands M, L, H, V, Z (absolute upper case, relative lower case);
        numbers after M are line-tos, as in SVG.  Curves are refused.
    scale : float > 0, m
        Metres per SVG unit (e.g. 1e-3 when the drawing is in mm).

    Returns
    -------
    list of lists of [x, y], m
        SVG's y axis points down; it is flipped so y points up.

    Raises
    ------
    SpecError
        Naming ``svg_path``: an unknown command, a number without a command,
        a path with no closed polygon.
    """
    if not isinstance(d, str):
        raise SpecError(f"must be an SVG path string such as 'M 0 0 L 100 0 L 0 50 Z', got {short_repr(d)}", key="svg_path")
    rest = _SVG_TOKEN.sub(" ", d).replace(",", " ").strip()
    if rest:
        raise SpecError(f"only the commands M, L, H, V, Z (and their lower-case forms) are read; "
                        f"found {short_repr(rest.split()[0])}", key="svg_path")
    tokens = _SVG_TOKEN.findall(d)
    paths, current, x, y, start, command, i = [], [], 0.0, 0.0, (0.0, 0.0), None, 0

    def number():
        nonlocal i
        if i >= len(tokens) or tokens[i].isalpha():
            raise SpecError(f"command {command} needs a number at token {i}", key="svg_path")
        i += 1
        return float(tokens[i - 1])

    while i < len(tokens):
        if tokens[i].isalpha():
            command = tokens[i]
            i += 1
        elif command is None:
            raise SpecError("the path must begin with M (move to)", key="svg_path")
        upper, relative = command.upper(), command.islower()
        if upper == "Z":
            if current:
                paths.append(current)
            current, (x, y) = [], start
            continue
        if upper == "M":
            if current:
                paths.append(current)
            dx, dy = number(), number()
            x, y = (x + dx, y + dy) if relative else (dx, dy)
            current, start = [(x, y)], (x, y)
            command = "l" if relative else "L"
            continue
        if upper == "L":
            dx, dy = number(), number()
            x, y = (x + dx, y + dy) if relative else (dx, dy)
        elif upper == "H":
            value = number()
            x = x + value if relative else value
        elif upper == "V":
            value = number()
            y = y + value if relative else value
        current.append((x, y))
    if current:
        paths.append(current)
    if not paths:
        raise SpecError("the path holds no polygon", key="svg_path")
    return [[[px * scale, -py * scale] for px, py in path] for path in paths]
