"""Figures of an object's shape: its first mode shapes, and a tuned bar's workshop drawing.

Part of :mod:`synth.plots` (which re-exports both functions): the mode shapes
are evaluated where the resonator's solved modes say (:meth:`Solution.shape
<synth.modes.Solution>` along a length or over a rectangle, a circle's radial
functions and nodal-circle column), nothing is computed here that the
resonator modules do not provide.
"""
from __future__ import annotations

import math

import numpy as np

__all__ = ["shapes_figure", "bar_profile_drawing", "shape_layout"]

#: Mode shapes drawn: along a length, and over a circle or a rectangle (panels per row).
N_SHAPES_LINE, COLUMNS_LINE = 6, 2
N_SHAPES_AREA, COLUMNS_AREA = 8, 4
#: Points along a length, radii of a circle, cells across a rectangle.
LINE_POINTS = 201
RADIAL_POINTS = 161
AREA_CELLS = 81

_EXCITATION = {"color": "tab:red", "label": "excitation"}
_PICKUP = {"color": "tab:green", "label": "pickup"}


# ---- mode shapes ----------------------------------------------------------------------------------


def shape_layout(patch):
    """(style, number of panels, columns, figure height in inches) of `patch`'s shapes panel."""
    from .plots import WIDTH_IN
    from .resonators import resonator_module

    style = resonator_module(patch.resonator.TYPE).position_style(patch.resonator)
    if style == "none":
        return style, 0, 1, 1.4
    if style == "fraction":
        n, columns, row_in = N_SHAPES_LINE, COLUMNS_LINE, 1.7
    elif style in ("xy", "xy_m"):  # a rectangle or an outline: rows as tall as its panels need
        if style == "xy":
            aspect = patch.resonator.height / patch.resonator.width
        else:
            x0, y0, x1, y1 = patch.resonator.outline.bounds
            aspect = (y1 - y0) / (x1 - x0)
        n, columns, row_in = N_SHAPES_AREA, COLUMNS_AREA, min(3.6, 0.5 + WIDTH_IN / COLUMNS_AREA * aspect)
    else:
        n, columns, row_in = N_SHAPES_AREA, COLUMNS_AREA, 2.7
    return style, n, columns, 0.6 + row_in * math.ceil(n / columns)


def _point(position):
    return None if position is None else tuple(position.values)


def shapes_figure(patch, *, figure=None, n_shapes=None, cache=None):
    """The first mode shapes of `patch`'s object: along its length, or nodal lines over its area.

    Parameters
    ----------
    patch : Patch
    figure : Figure, SubFigure or None
    n_shapes : int >= 1 or None
        Modes drawn (default 6 along a length, 8 over an area).
    cache : SolveCache or None
        Where the modes are solved (default: the process-wide cache).

    Returns
    -------
    Figure or SubFigure
        One small axes per mode, titled with its label and frequency.  Along
        a length (string, bar, air column; x in fractions of the length):
        the shape ``gid="shape"``, its nodes ``"nodes"`` (the report's
        ``node_positions``), the excitation ``"excitation"`` and pickup
        ``"pickup"`` lines.  A circle (radius 1): the shape as a mesh, nodal
        diameters ``"nodal-diameter"`` and circles ``"nodal-circle"`` (the
        report's ``nodal_circle_radii``), the rim ``"rim"`` (black where it
        is a node).  A rectangle (mm): the shape as a mesh and its zero
        contour ``"nodal-lines"``.  A ``partials`` resonator has no geometry:
        one line of text says so.

    Raises
    ------
    PatchError
        If the object cannot reach its pitch (names ``resonator.pitch``).
    """
    from .plots import _new_figure
    from .resonators import UnreachablePitch
    from .solvecache import DEFAULT_CACHE

    style, default_n, columns, height = shape_layout(patch)
    fig = _new_figure(figure, height)
    kind = patch.resonator.TYPE
    if style == "none":
        ax = fig.add_subplot()
        ax.text(0.5, 0.5, f"a {kind} resonator (a measured or invented partial set) has no geometry: "
                "no mode shapes to draw",
                ha="center", va="center", fontsize=10, transform=ax.transAxes, gid="no-shapes")
        ax.set_axis_off()
        return fig
    cache = DEFAULT_CACHE if cache is None else cache
    n = default_n if n_shapes is None else int(n_shapes)
    try:
        solution = cache.solve(patch.resonator, n)
    except UnreachablePitch as error:
        raise patch.error("resonator.pitch", str(error)) from None
    n = min(n, len(solution.frequency_hz))
    axes = fig.subplots(math.ceil(n / columns), columns, squeeze=False, sharex=style == "fraction").ravel()
    for ax in axes[n:]:
        ax.set_axis_off()
    excitation, pickup = _point(patch.excitation.position), _point(patch.pickup.position)
    if style == "fraction":
        _line_shapes(axes[:n], solution, excitation, pickup, kind)
        where = "along the length (fraction from the x = 0 end)"
    elif style == "xy_m":
        _outline_shapes(axes[:n], solution, excitation, pickup)
        where = "nodal lines black, red and blue in opposite phase"
    elif getattr(solution, "orders", None) is not None:
        _circle_shapes(axes[:n], solution, excitation, pickup)
        where = "nodal lines black, red and blue in opposite phase"
    else:
        _rectangle_shapes(axes[:n], solution, excitation, pickup, patch.resonator)
        where = "nodal lines black, red and blue in opposite phase"
    what = "pressure" if kind == "air-column" else "displacement"
    title = f"{patch.name}: first {n} mode shapes of the {kind} ({what}); {where}"
    fig.suptitle(title, fontsize=10)
    if axes[0].get_legend_handles_labels()[0]:
        axes[0].legend(fontsize=6, loc="lower left", framealpha=0.85)
    return fig


def _title(ax, solution, i):
    ax.set_title(f"{solution.labels[i]}   {float(solution.frequency_hz[i]):.2f} Hz", fontsize=8)


def _line_shapes(axes, solution, excitation, pickup, kind):
    x = np.linspace(0.0, 1.0, LINE_POINTS)
    values = np.array([np.asarray(solution.shape(float(s)), dtype=float)[: len(axes)] for s in x])
    nodes = solution.columns.get("node_positions")
    for i, ax in enumerate(axes):
        w = values[:, i]
        w = w / (np.max(np.abs(w)) or 1.0)
        ax.axhline(0.0, color="0.8", linewidth=0.6)
        ax.plot(x, w, color="k", linewidth=1.2, gid="shape")
        if nodes is not None:
            at = np.asarray(list(nodes[i]), dtype=float)
            ax.plot(at, np.zeros_like(at), "o", ms=4, mfc="white", mec="k", zorder=3, gid="nodes",
                    label="node" if kind != "air-column" else "pressure node")
        if excitation is not None:
            ax.axvline(excitation[0], linestyle="--", linewidth=1.0, gid="excitation", **_EXCITATION)
        if pickup is not None:
            ax.axvline(pickup[0], linestyle=":", linewidth=1.2, gid="pickup", **_PICKUP)
        ax.set_xlim(0.0, 1.0)
        ax.set_ylim(-1.3, 1.3)
        ax.set_yticks([])
        ax.tick_params(labelsize=7)
        _title(ax, solution, i)


def _circle_shapes(axes, solution, excitation, pickup):
    from .resonators.outline import frame_angle

    radius = np.linspace(0.0, 1.0, RADIAL_POINTS)
    radial = np.array([np.asarray(solution.radial(float(r)), dtype=float)[: len(axes)] for r in radius])
    grid = np.linspace(-1.0, 1.0, AREA_CELLS)
    gx, gy = np.meshgrid(grid, grid)
    r, angle = np.hypot(gx, gy), np.arctan2(gy, gx)
    frame = frame_angle(excitation, pickup) if excitation is not None else 0.0
    circles = solution.columns.get("nodal_circle_radii")
    turn = np.linspace(0.0, 2.0 * math.pi, 181)
    for i, ax in enumerate(axes):
        order = int(solution.orders[i])
        w = np.interp(r, radius, radial[:, i]) * np.cos(order * (angle - frame))
        w = np.ma.masked_where(r > 1.0, w)
        top = float(np.max(np.abs(w))) or 1.0
        ax.pcolormesh(gx, gy, w, cmap="RdBu_r", vmin=-top, vmax=top, shading="nearest", rasterized=True, gid="shape")
        rim = solution.rim_is_node
        ax.plot(np.cos(turn), np.sin(turn), color="k" if rim else "0.45", linewidth=1.6 if rim else 0.8, gid="rim")
        for k in range(order):  # cos(n (theta - frame)) = 0
            theta = frame + (2 * k + 1) * math.pi / (2 * order)
            ax.plot([-math.cos(theta), math.cos(theta)], [-math.sin(theta), math.sin(theta)], color="k",
                    linewidth=1.4, gid="nodal-diameter")
        rings = list(circles[i]) if circles is not None else _sign_changes(radius, radial[:, i])
        for rho in rings:
            ax.plot(rho * np.cos(turn), rho * np.sin(turn), color="k", linewidth=1.4, gid="nodal-circle")
        for point, marker, style in ((excitation, "*", _EXCITATION), (pickup, "s", _PICKUP)):
            if point is not None:
                ax.plot(point[0] * math.cos(point[1]), point[0] * math.sin(point[1]), marker, ms=8 if marker == "*" else 5,
                        mec="k", mew=0.5, zorder=4, gid=style["label"], linestyle="none", **style)
        ax.set_xlim(-1.08, 1.08)
        ax.set_ylim(-1.08, 1.08)
        ax.set_aspect("equal")
        ax.set_axis_off()
        _title(ax, solution, i)


def _sign_changes(x, y):
    """Where `y` (sampled at `x`) changes sign inside the interval, by linear interpolation."""
    s = np.flatnonzero(np.sign(y[:-1]) * np.sign(y[1:]) < 0)
    s = s[(x[s] > 0.0) & (x[s + 1] < 1.0)]
    return [float(x[k] - y[k] * (x[k + 1] - x[k]) / (y[k + 1] - y[k])) for k in s]


def _outline_shapes(axes, solution, excitation, pickup):
    """Modes of an outline (finite elements): the shape on the mesh, its nodal lines, the rim and holes (mm)."""
    from matplotlib.collections import LineCollection

    points, triangles = solution.triangulation()
    values = solution.nodal_values(len(axes))
    x, y = points[:, 0] * 1e3, points[:, 1] * 1e3
    outline = solution.outline
    rings = [outline.points] + list(outline.holes or ())
    for i, ax in enumerate(axes):
        top = float(np.max(np.abs(values[:, i]))) or 1.0
        ax.tripcolor(x, y, triangles, values[:, i], cmap="RdBu_r", vmin=-top, vmax=top, shading="gouraud",
                     rasterized=True, gid="shape")
        segments = np.asarray(solution.nodal_lines(i)) * 1e3
        if len(segments):
            ax.add_collection(LineCollection(segments, colors="k", linewidths=1.4, gid="nodal-lines"))
        for ring in rings:
            r = np.asarray(list(ring) + [ring[0]]) * 1e3
            ax.plot(r[:, 0], r[:, 1], color="k", linewidth=1.2, gid="rim")
        for point, marker, style in ((excitation, "*", _EXCITATION), (pickup, "s", _PICKUP)):
            if point is not None:
                ax.plot(point[0] * 1e3, point[1] * 1e3, marker, ms=8 if marker == "*" else 5, mec="k", mew=0.5,
                        zorder=4, gid=style["label"], linestyle="none", **style)
        ax.set_aspect("equal")
        ax.set_axis_off()
        _title(ax, solution, i)


def _rectangle_shapes(axes, solution, excitation, pickup, spec):
    width, height = spec.width * 1e3, spec.height * 1e3  # mm
    nx = AREA_CELLS
    ny = max(21, int(round(AREA_CELLS * height / width)))
    u, v = (np.arange(nx) + 0.5) / nx, (np.arange(ny) + 0.5) / ny  # cell centres: never exactly on an edge
    values = np.array([[np.asarray(solution.shape((float(a), float(b))), dtype=float)[: len(axes)] for a in u]
                       for b in v])  # (ny, nx, modes)
    gx, gy = np.meshgrid(u * width, v * height)
    for i, ax in enumerate(axes):
        w = values[:, :, i]
        top = float(np.max(np.abs(w))) or 1.0
        ax.pcolormesh(gx, gy, w, cmap="RdBu_r", vmin=-top, vmax=top, shading="nearest", rasterized=True, gid="shape")
        if w.min() < 0.0 < w.max():
            ax.contour(gx, gy, w, levels=[0.0], colors="k", linewidths=1.4).set_gid("nodal-lines")
        ax.plot([0, width, width, 0, 0], [0, 0, height, height, 0], color="k", linewidth=1.6, gid="rim")
        for point, marker, style in ((excitation, "*", _EXCITATION), (pickup, "s", _PICKUP)):
            if point is not None:
                ax.plot(point[0] * width, point[1] * height, marker, ms=8 if marker == "*" else 5, mec="k", mew=0.5,
                        zorder=4, gid=style["label"], linestyle="none", **style)
        ax.set_xlim(-0.03 * width, 1.03 * width)
        ax.set_ylim(-0.03 * height, 1.03 * height)
        ax.set_aspect("equal")
        ax.set_axis_off()
        _title(ax, solution, i)


# ---- a tuned bar's workshop drawing -----------------------------------------------------------------


def bar_profile_drawing(tuning, *, name=None, figure=None):
    """A workshop drawing of a tuned bar's profile: thickness along the length, the cut, where to hang it.

    Parameters
    ----------
    tuning : UndercutTuning
        From :func:`synth.tuning.tune_undercut`.
    name : str or None
        Printed in the title.
    figure : Figure, SubFigure or None

    Returns
    -------
    Figure or SubFigure
        One axes in mm (x from the first end; the bar drawn underside up, as
        it lies on its playing face to be cut; the vertical scale is
        stretched): the tuned profile ``gid="profile"`` (x mm, thickness mm
        at the profile's points), the blank's outline dashed ``"blank"``, the
        nodes of the first mode ``"suspension-points"`` (x mm), and
        dimensions: length, suspension points, blank and thinnest thickness,
        cut depth and length.
    """
    from .plots import _new_figure
    from .tuning import TUNING_CAUTION, suspension_points

    fig = _new_figure(figure, 4.6)
    ax = fig.add_subplot()
    spec = tuning.spec
    length = spec.length * 1e3
    h = np.asarray(spec.profile, dtype=float) * 1e3
    x = np.linspace(0.0, length, h.size)
    h0 = tuning.blank_thickness * 1e3
    ax.fill_between(x, 0.0, h, color="#dcb27c", linewidth=0, zorder=1, gid="bar")
    cut = h < h0 - 1e-9
    cut = cut | np.r_[cut[1:], False] | np.r_[False, cut[:-1]]  # and the points where the cut begins and ends
    ax.fill_between(x, h, h0, where=cut, facecolor="none", edgecolor="0.55", hatch="////", linewidth=0,
                    zorder=1, gid="cut", label="cut away")
    ax.plot(x, h, color="k", linewidth=1.6, zorder=3, gid="profile", label="tuned profile (underside)")
    ax.plot([0, length, length, 0, 0], [0, 0, h0, h0, 0], color="k", linestyle="--", linewidth=0.9, zorder=2,
            gid="blank", label="blank")
    nodes = np.asarray(suspension_points(tuning), dtype=float) * length
    hang = "suspension point (node of B1)" if spec.supports == "free-free" else "node of B1"
    ax.vlines(nodes, -0.12 * h0, 1.12 * h0, colors="tab:blue", linestyles="-.", linewidth=1.0, zorder=2)
    ax.plot(nodes, np.zeros_like(nodes), "^", color="tab:blue", ms=9, zorder=4, gid="suspension-points",
            linestyle="none", label=hang)

    def dimension(x0, y0, x1, y1, text, *, side=None):
        """An arrow between two points, its text above (horizontal) or to the `side` ("left", "right")."""
        ax.annotate("", xy=(x0, y0), xytext=(x1, y1), arrowprops={"arrowstyle": "<->", "linewidth": 0.8,
                                                                  "shrinkA": 0, "shrinkB": 0})
        offset = (0, 3) if side is None else ((-4, 0) if side == "left" else (4, 0))
        ax.annotate(text, ((x0 + x1) / 2, (y0 + y1) / 2), xytext=offset, textcoords="offset points", fontsize=8,
                    ha="center" if side is None else ("right" if side == "left" else "left"),
                    va="bottom" if side is None else "center", gid="dimension")

    dimension(0.0, -0.42 * h0, length, -0.42 * h0, f"length {length:.1f} mm")
    if nodes.size:
        dimension(0.0, -0.22 * h0, nodes[0], -0.22 * h0, f"{nodes[0]:.1f} mm")
        if nodes.size > 1:
            dimension(nodes[-1], -0.22 * h0, length, -0.22 * h0, f"{length - nodes[-1]:.1f} mm")
    dimension(-0.03 * length, 0.0, -0.03 * length, h0, f"blank {h0:.2f} mm", side="left")
    thin = int(np.argmin(h))
    dimension(x[thin], 0.0, x[thin], h[thin], f"thinnest {h[thin]:.2f} mm", side="right")
    if h[thin] < h0 - 1e-9:
        dimension(x[thin], h[thin], x[thin], h0, f"cut {h0 - h[thin]:.2f} mm deep", side="right")
        cut = np.flatnonzero(h < h0 - 1e-9)
        start, stop = x[max(cut[0] - 1, 0)], x[min(cut[-1] + 1, h.size - 1)]
        dimension(start, 1.2 * h0, stop, 1.2 * h0, f"cut {stop - start:.1f} mm long, from {start:.1f} mm")
    ax.set_xlim(-0.16 * length, 1.04 * length)
    ax.set_ylim(-0.55 * h0, 1.45 * h0)
    ax.set_xlabel("x from the first end (mm)")
    ax.set_ylabel("thickness (mm)")
    ax.grid(True, color="0.9", linewidth=0.5)
    ax.legend(loc="upper right", fontsize=7, framealpha=0.9)
    partials = ", ".join(f"B{i + 1} {f:.2f} Hz ({r:.3f})" for i, (f, r) in enumerate(zip(tuning.frequency_hz,
                                                                                         tuning.ratios)))
    ax.set_title(f"{name or 'bar'}: undercut for 1:{tuning.targets[1]:g}:{tuning.targets[2]:g}, {spec.material}, "
                 f"width {spec.width * 1e3:.1f} mm; underside up, vertical scale stretched\n{partials}", fontsize=9)
    fig.supxlabel(TUNING_CAUTION, fontsize=6.5, color="0.3")
    return fig
