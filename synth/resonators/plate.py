"""Flexural modes of thin plates: circles (clamped, free or pinned edges) and
rectangles with pinned edges.

Notes
-----
Kirchhoff (thin-plate) theory.  With the flexural rigidity
``D = E h**3 / (12 (1 - nu**2))`` and the frequency parameter
``lambda**2 = omega a**2 sqrt(rho h / D)`` (``a`` the radius of a circle or
the width of a rectangle), every frequency is ``f = lambda**2 / (2 pi a**2)
sqrt(D / (rho h))``, which grows in proportion to the thickness ``h``.

*Circle* ([1]_, ch. 2).  With ``x = r / a`` the mode shapes are
``w = [J_n(lambda x) + C I_n(lambda x)] cos(n theta)``; the edge conditions
at ``x = 1`` are two linear equations in (1, C) whose determinant is the
frequency equation:

* clamped: ``w = 0`` and ``dw/dr = 0``;
* pinned (simply supported): ``w = 0`` and the radial moment ``M_r = 0``;
* free: ``M_r = 0`` and the Kirchhoff shear ``V_r = 0``, where (a = 1)
  ``M_r ~ R'' + nu (R' - n**2 R)`` and
  ``V_r ~ (del**2 R)' - (1 - nu) n**2 (R' - R)``.

The modified Bessel function is carried scaled (``ive = I_n e**-x``) so nothing
overflows at large ``lambda``.  Roots are bracketed on a fine grid of lambda
(sign changes of the determinant, which has no poles) and polished with
Brent's method, for enough orders n to hold the lowest `n_modes` modes.  A free
plate's rigid-body modes, (0,0) translation and (1,0) rocking at 0 Hz, are
left out.  Labels are ``(n,s)``: n nodal diameters and s nodal circles, the
boundary not counted.  Shapes are normalised by Gauss-Legendre quadrature over
the disc to a mean square of 1 (common modal mass: the plate's mass).

For n > 0 each (n,s) is a degenerate pair, cos(n theta) and sin(n theta), and
any rotation of the pair is an equally valid basis.  As for the membrane, the
basis is turned to the excitation point (theta = 0 there; to the pickup if the
excitation is at the centre): the "cos" member carries everything a point
excitation puts into the pair (pickup factor ``cos(n (theta_p - theta_e))``)
and the "sin" member, with a nodal diameter through the excitation point, is
listed with level null.  Without a pickup the partner tells nothing and each
pair is one row (orientation "pair").  The sum over both members equals the
sum over the cos/sin members of any fixed frame.

*Rectangle*, all edges pinned ([1]_, ch. 4, exact):
``omega_mn = pi**2 [(m / a)**2 + (n / b)**2] sqrt(D / (rho h))``,
``w = 2 sin(m pi x / a) sin(n pi y / b)`` (mean square 1); labels ``(m,n)``
count half-waves across the width and the height.

*Pitch* solves the thickness, the parameter a maker would change (sheet gauge,
or grinding a disc thinner): ``f ~ h`` at a fixed outline.  ``retune`` moves
the same parameter.

References
----------
.. [1] A. W. Leissa, *Vibration of Plates*, NASA SP-160 (1969).
.. [2] L. Cremer, M. Heckl and E. E. Ungar, *Structure-Borne Sound*, 2nd ed.,
   Springer (1988) (validity of thin-plate bending waves).
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np
from scipy.optimize import brentq
from scipy.special import ive, jv, sindg

from ..modes import ModeSet, frozen_array
from ..schema import Field
from .common import SpecError, UnreachablePitch

__all__ = [
    "FIELDS",
    "PITCH_REPLACES",
    "PlateSpec",
    "build_spec",
    "position_style",
    "modes",
    "retune",
    "plate_modes",
    "flexural_rigidity",
    "circle_lambdas",
    "rectangle_lambdas",
    "solve_thickness",
    "UnreachablePitch",
]

#: Thin-plate theory needs the thickness well below the span (diameter or
#: shorter side); 1/10 is the usual limit (common practice).
MAX_THICKNESS_FRACTION = 0.1
#: A given thickness above this fraction of the span is a block, not a plate.
BLOCK_THICKNESS_FRACTION = 0.5
#: Thinnest plate a pitch may solve for, m (thinner than household foil; a
#: sheet this thin is governed by tension, not stiffness; common practice).
MIN_THICKNESS = 10e-6
#: Bending waves shorter than this many thicknesses are beyond thin-plate
#: theory (Cremer, Heckl & Ungar 1988; from memory).
THIN_PLATE_WAVELENGTHS = 6.0
#: Lowest lambda scanned, and the grid step of the root bracketing.  The
#: lowest elastic root of any circle is near 2.2 (pinned (0,0)); roots of one
#: order n are at least about 3 apart (measured: 3.11 up to lambda 156 for
#: nu = -0.5 ... 0.5), so a step of 0.2 brackets each root alone.
LAMBDA_FLOOR = 0.5
LAMBDA_STEP = 0.2
#: False-position steps that polish each bracketed nodal radius.
NODE_REFINE_STEPS = 5
#: Sign changes of R between values below this fraction of its peak are
#: underflow noise near the centre, not nodal circles.
NODE_FLOOR = 1e-8
#: The first root of order n lies above about 0.99 n (edge modes of a free
#: plate approach n from above); orders up to lambda_max / 0.9 are scanned.
ORDER_MARGIN = 0.9
#: Modes per block when mode shapes are evaluated together.
SHAPE_BLOCK = 256
#: Composite Gauss-Legendre quadrature of the mode shapes: points per panel,
#: and radians of lambda x per panel (R**2 oscillates with period pi / lambda).
QUADRATURE_POINTS = 16
QUADRATURE_PANEL_RADIANS = 8.0

#: Size keys of each outline.
OUTLINES = {"circle": ("radius",), "rectangle": ("width", "height")}

#: Patch keys of a plate (besides ``type``).
FIELDS = {
    "shape": Field("choice", required=True, choices=("circle", "rectangle")),
    "edges": Field("choice", required=True, choices=("clamped", "free", "pinned")),
    "radius": Field("length", positive=True),
    "width": Field("length", positive=True),
    "height": Field("length", positive=True),
    "thickness": Field("length", positive=True),
    "pitch": Field("pitch", positive=True),
    "material": Field("any", required=True),
}

#: Keys a pitch (e.g. ``--pitch`` on the command line) replaces.
PITCH_REPLACES = ("thickness",)


@dataclass(frozen=True)
class PlateSpec:
    """A thin plate in SI units.

    Attributes
    ----------
    shape : {"circle", "rectangle"}
    edges : {"clamped", "free", "pinned"}
        A rectangle takes "pinned" only.
    radius : float > 0 or None, m
        Circle only.
    width, height : float > 0 or None, m
        Rectangle only; ``x`` runs across the width.
    thickness : float > 0 or None, m
        Give `thickness` or `pitch_hz`, not both.
    pitch_hz : float > 0 or None, Hz
        Pitch of the lowest mode; the thickness is solved for it.
    density : float > 0, kg/m^3
    youngs_modulus : float > 0, Pa
    poisson_ratio : float in (-1, 0.5]
    material : str
        Name for the report.
    """

    shape: str
    edges: str
    density: float
    youngs_modulus: float
    poisson_ratio: float
    radius: float | None = None
    width: float | None = None
    height: float | None = None
    thickness: float | None = None
    pitch_hz: float | None = None
    material: str = "custom"

    TYPE: ClassVar[str] = "plate"

    @property
    def size(self):
        """The length ``a`` of lambda**2 = omega a**2 sqrt(rho h / D), m."""
        return self.radius if self.shape == "circle" else self.width

    @property
    def span(self):
        """Diameter of a circle, shorter side of a rectangle, m."""
        return 2.0 * self.radius if self.shape == "circle" else min(self.width, self.height)


def build_spec(values):
    """A :class:`PlateSpec` from checked patch values (``material`` is a Material)."""
    shape, edges = values["shape"], values["edges"]
    _check_outline(shape, values)
    if shape == "rectangle" and edges != "pinned":
        raise SpecError(
            f"a rectangle takes edges: pinned only (the closed-form case); {edges} rectangles are not built "
            "(circles take clamped, free or pinned)",
            key="edges",
        )
    if (values["pitch"] is None) == (values["thickness"] is None):
        raise SpecError(
            "give exactly one of 'pitch' (the thickness is solved) or 'thickness'",
            key="pitch" if values["pitch"] is not None else None,
        )
    material = values["material"]
    if not material.youngs_modulus > 0:
        raise SpecError("a plate needs youngs_modulus > 0: its stiffness sets every frequency", key="material.youngs_modulus")
    if not material.poisson_ratio > -1.0:
        raise SpecError(
            f"must be > -1 for a plate (got {material.poisson_ratio:g}): D = E h^3 / (12 (1 - nu^2)) is infinite at -1",
            key="material.poisson_ratio",
        )
    spec = PlateSpec(
        shape, edges, material.density, material.youngs_modulus, material.poisson_ratio,
        radius=values["radius"], width=values["width"], height=values["height"],
        thickness=values["thickness"], pitch_hz=values["pitch"], material=material.name,
    )
    if spec.thickness is not None and spec.thickness > BLOCK_THICKNESS_FRACTION * spec.span:
        raise SpecError(
            f"{spec.thickness * 1e3:.4g} mm is more than {BLOCK_THICKNESS_FRACTION:g} of the "
            f"{'diameter' if shape == 'circle' else 'shorter side'} ({spec.span * 1e3:.4g} mm): a block, not a plate; "
            f"thin-plate theory wants at most {MAX_THICKNESS_FRACTION:g}",
            key="thickness",
        )
    if spec.pitch_hz is not None:
        try:
            solve_thickness(spec, spec.pitch_hz)
        except UnreachablePitch as error:
            raise SpecError(str(error), key="pitch") from None
    return spec


def _check_outline(shape, values):
    """Each shape takes its own size keys (:data:`OUTLINES`), all of them."""
    own = " and ".join(f"'{key}'" for key in OUTLINES[shape])
    for other, keys in OUTLINES.items():
        for key in keys:
            if other != shape and values[key] is not None:
                raise SpecError(f"a {shape} takes {own}; '{key}' is for a {other} (shape: {other})", key=key)
    for key in OUTLINES[shape]:
        if values[key] is None:
            raise SpecError(f"missing for a {shape}: give {own}", key=key)


def position_style(spec):
    """Circles take ``{radius, angle}`` positions, rectangles ``[x, y]`` fractions."""
    return "polar" if spec.shape == "circle" else "xy"


def retune(spec, pitch_hz):
    """The plate with its thickness changed so its lowest mode sounds at `pitch_hz`."""
    retuned = replace(spec, thickness=None, pitch_hz=pitch_hz)
    solve_thickness(retuned, pitch_hz)
    return retuned


def flexural_rigidity(youngs_modulus, thickness, poisson_ratio):
    """D = E h**3 / (12 (1 - nu**2)), N m.

    >>> round(flexural_rigidity(200e9, 1e-3, 0.3), 3)
    18.315
    """
    return youngs_modulus * thickness**3 / (12.0 * (1.0 - poisson_ratio**2))


def _hz_per_lambda2(spec, thickness):
    """f / lambda**2 (Hz) of `spec` at `thickness`: sqrt(D / (rho h)) / (2 pi a**2)."""
    d = flexural_rigidity(spec.youngs_modulus, thickness, spec.poisson_ratio)
    return math.sqrt(d / (spec.density * thickness)) / (2.0 * math.pi * spec.size**2)


def _lowest_lambda2(spec):
    if spec.shape == "rectangle":
        return math.pi**2 * (1.0 + (spec.width / spec.height) ** 2)
    lam, _, _, _ = circle_lambdas(spec.edges, spec.poisson_ratio, 1)
    return float(lam[0] ** 2)


def solve_thickness(spec, pitch_hz):
    """Thickness (m) that puts the lowest mode of `spec` at `pitch_hz`.

    Frequencies grow in proportion to the thickness (``sqrt(D / rho h) ~ h``),
    so ``h = pitch / (f per metre of thickness)``.

    Raises
    ------
    UnreachablePitch
        If the thickness would leave thin-plate theory (above 1/10 of the
        span) or fall below :data:`MIN_THICKNESS`.
    """
    per_metre = _lowest_lambda2(spec) * _hz_per_lambda2(spec, 1.0)  # Hz per m of thickness
    thickness = pitch_hz / per_metre
    limit = MAX_THICKNESS_FRACTION * spec.span
    what = "diameter" if spec.shape == "circle" else "shorter side"
    if thickness > limit:
        raise UnreachablePitch(
            f"pitch {pitch_hz:.4g} Hz would need a {thickness * 1e3:.4g} mm thick plate, more than "
            f"{MAX_THICKNESS_FRACTION:g} of the {what} ({limit * 1e3:.4g} mm) where thin-plate theory holds: "
            f"make the plate larger or lower the pitch (at most {limit * per_metre:.4g} Hz)"
        )
    if thickness < MIN_THICKNESS:
        raise UnreachablePitch(
            f"pitch {pitch_hz:.4g} Hz would need a {thickness * 1e6:.3g} um thick plate, thinner than "
            f"{MIN_THICKNESS * 1e6:g} um (foil): make the plate smaller or raise the pitch "
            f"(at least {MIN_THICKNESS * per_metre:.4g} Hz)"
        )
    return thickness


# --------------------------------------------------------------------------
# Circles: frequency equations, roots, shapes.


def _bessel_columns(n, lam):
    """Radial functions at the edge (a = 1) and their derivatives.

    Returns (J, J', J'', I, I', I'') with the I's scaled by exp(-lam).
    Derivatives are with respect to x = r/a at x = 1 (chain rule: lam d/dz).
    """
    j0, j1 = jv(n, lam), jv(n + 1, lam)
    i0, i1 = ive(n, lam), ive(n + 1, lam)
    jp = n / lam * j0 - j1  # J_n'(z)
    ip = n / lam * i0 + i1  # I_n'(z) (scaled)
    jpp = -jp / lam - (1.0 - n * n / lam**2) * j0  # Bessel's equation
    ipp = -ip / lam + (1.0 + n * n / lam**2) * i0  # modified Bessel equation
    return j0, lam * jp, lam**2 * jpp, i0, lam * ip, lam**2 * ipp


def _edge_rows(n, lam, edges, nu):
    """The two edge conditions as rows (J coefficient, scaled-I coefficient)."""
    j, jp, jpp, i, ip, ipp = _bessel_columns(n, lam)
    nn = float(n * n)
    if edges == "clamped" or edges == "pinned":
        first = (j, i)  # w = 0
        if edges == "clamped":
            return first, (jp, ip)  # dw/dr = 0
        return first, (jpp + nu * (jp - nn * j), ipp + nu * (ip - nn * i))  # M_r = 0
    moment = (jpp + nu * (jp - nn * j), ipp + nu * (ip - nn * i))
    # V_r: (del^2 R)' with del^2 J_n(lam x) = -lam^2 J_n and del^2 I_n = +lam^2 I_n.
    shear = (-(lam**2) * jp - (1.0 - nu) * nn * (jp - j), lam**2 * ip - (1.0 - nu) * nn * (ip - i))
    return moment, shear


def _characteristic(lam, n, edges, nu):
    """Frequency determinant of order n at lambda (no poles; scaled by exp(-lam))."""
    (a, b), (c, d) = _edge_rows(n, lam, edges, nu)
    return a * d - b * c


def _shape_coefficient(n, lam, edges, nu):
    """C-tilde: w ~ J_n(lam x) + C-tilde ive(n, lam x) exp(lam (x - 1))."""
    first, second = _edge_rows(n, lam, edges, nu)
    # Use the row with the larger I entry relative to its size: better conditioned.
    row = max((first, second), key=lambda r: abs(r[1]) / math.hypot(*r))
    return -row[0] / row[1]


def _roots_of_order(n, edges, nu, lam_max):
    """Roots lambda in (floor, lam_max] of the frequency equation of order n."""
    start = max(LAMBDA_FLOOR, 0.5 * n)
    if start >= lam_max:
        return []
    grid = np.arange(start, lam_max + LAMBDA_STEP, LAMBDA_STEP)
    with np.errstate(all="ignore"):
        values = _characteristic(grid, n, edges, nu)
    roots = []
    sign = np.sign(values)
    for k in np.flatnonzero(sign[:-1] * sign[1:] < 0):
        roots.append(brentq(_characteristic, grid[k], grid[k + 1], args=(n, edges, nu), xtol=1e-13, rtol=1e-14))
    roots.extend(grid[sign == 0])
    return sorted(r for r in roots if r <= lam_max)


def circle_lambdas(edges, nu, n_modes):
    """The lowest `n_modes` frequency parameters of a circular plate.

    Parameters
    ----------
    edges : {"clamped", "free", "pinned"}
    nu : float
        Poisson's ratio (clamped plates do not depend on it).
    n_modes : int >= 1

    Returns
    -------
    lam : ndarray [shape=(n_modes,)]
        lambda (its square is the frequency parameter), ascending.
    order : ndarray of int
        Nodal diameters n.
    circles : ndarray of int
        Nodal circles s (boundary not counted).
    coefficient : ndarray
        C-tilde of each mode shape (see :func:`_shape_coefficient`).
    """
    # Pairs (n, s) below lambda: about lambda**2 / 8 (Weyl's law, lambda**2 / 4
    # shapes, with each n > 0 pair counted once).
    lam_max = math.sqrt(8.0 * n_modes) + 6.0
    while True:
        found = []
        for n in range(int(lam_max / ORDER_MARGIN) + 2):
            # A free plate's s = 0 member of orders 0 and 1 is a rigid-body
            # mode (not scanned): its k-th elastic root has k + 1 nodal circles.
            shift = 1 if edges == "free" and n < 2 else 0
            found.extend((root, n, k + shift) for k, root in enumerate(_roots_of_order(n, edges, nu, lam_max)))
        if len(found) >= n_modes:
            break
        lam_max *= 1.3
    found.sort()
    found = found[:n_modes]
    lam = np.array([f[0] for f in found])
    order = np.array([f[1] for f in found], dtype=int)
    circles = np.array([f[2] for f in found], dtype=int)
    coefficient = np.array([_shape_coefficient(n, x, edges, nu) for x, n in zip(lam, order)])
    return lam, order, circles, coefficient


def _radial(n, lam, coefficient, x):
    """Radial shape J_n(lam x) + C-tilde ive(n, lam x) e^(lam (x - 1)); broadcasts."""
    z = lam * x
    return jv(n, z) + coefficient * ive(n, z) * np.exp(z - lam)


def _composite_rule(lam_max):
    """Nodes and weights on [0, 1]: a Gauss-Legendre rule on panels of about
    QUADRATURE_PANEL_RADIANS / lam_max each, so each panel holds about one
    oscillation of R**2."""
    n_panels = 1 + int(math.ceil(lam_max / QUADRATURE_PANEL_RADIANS))
    base, base_weights = np.polynomial.legendre.leggauss(QUADRATURE_POINTS)
    edges = np.linspace(0.0, 1.0, n_panels + 1)
    half = 0.5 * np.diff(edges)
    nodes = (edges[:-1, None] + half[:, None] * (base[None, :] + 1.0)).ravel()
    weights = (half[:, None] * base_weights[None, :]).ravel()
    return nodes, weights


def _norms_and_nodes(lam, order, coefficient):
    """Mean square over the disc and nodal-circle radii of each unnormalised shape.

    One evaluation of R on the quadrature nodes serves both: the mean square
    ``(1/pi) int int R**2 cos**2(n theta) x dx dtheta`` and, from the sign
    changes of R between neighbouring nodes (at least 4 nodes between nodal
    circles, which are about pi / lambda apart), the brackets of the nodal
    radii, refined by vectorised false position.  The edge x = 1 is not a node
    of the rule, so a clamped or pinned boundary is not counted.
    """
    norms = np.empty(len(lam))
    radii = [()] * len(lam)
    for start in range(0, len(lam), SHAPE_BLOCK):
        block = np.arange(start, min(start + SHAPE_BLOCK, len(lam)))
        x, weights = _composite_rule(float(np.max(lam[block])))
        r = _radial(order[block, None], lam[block, None], coefficient[block, None], x[None, :])
        norms[block] = np.where(order[block] == 0, 2.0, 1.0) * ((r**2 * x) @ weights)
        # Sign changes, except among values that have underflowed near the
        # centre (R ~ x**n there): a real node has a sizeable neighbour.
        size = np.maximum(np.abs(r[:, :-1]), np.abs(r[:, 1:]))
        floor = NODE_FLOOR * np.max(np.abs(r), axis=1, keepdims=True)
        row, col = np.nonzero((np.sign(r[:, :-1]) * np.sign(r[:, 1:]) < 0) & (size > floor))
        mode = block[row]
        x0, x1, r0, r1 = x[col], x[col + 1], r[row, col], r[row, col + 1]
        for _ in range(NODE_REFINE_STEPS):
            xm = x0 - r0 * (x1 - x0) / (r1 - r0)
            rm = _radial(order[mode], lam[mode], coefficient[mode], xm)
            left = np.sign(rm) == np.sign(r0)
            x0, r0 = np.where(left, xm, x0), np.where(left, rm, r0)
            x1, r1 = np.where(left, x1, xm), np.where(left, r1, rm)
        roots = x0 - r0 * (x1 - x0) / (r1 - r0)
        for i in block:
            radii[i] = tuple(float(v) for v in roots[mode == i])
    return norms, radii


def _frame_angle(excitation, pickup):
    """Basis direction (rad): the excitation's angle, or the pickup's if it is central."""
    if excitation[0] > 0.0:
        return excitation[1]
    if pickup is not None and pickup[0] > 0.0:
        return pickup[1]
    return 0.0


def _circle_rows(order, split, n_modes):
    """(pair index, orientation) rows: n = 0 alone, n > 0 as cos + sin or one pair."""
    rows = []
    for index, n in enumerate(order):
        orientations = ("",) if n == 0 else (("cos", "sin") if split else ("pair",))
        rows.extend((index, o) for o in orientations)
    return rows[:n_modes]


@functools.lru_cache(maxsize=16)
def _circle_table(edges, nu, n_modes, split):
    """Everything about the lowest (n,s) filling `n_modes` rows that does not
    depend on the thickness or the positions: lambda, n, s, C-tilde, shape
    scale, nodal radii, and the rows (pair index, orientation).

    Cached: retuning (MIDI notes, batch jobs) only changes the thickness.
    """
    lam, order, circles, coefficient = circle_lambdas(edges, nu, n_modes)
    rows = _circle_rows(order, split, n_modes)
    used = rows[-1][0] + 1  # pairs that made it into the rows
    lam, order, circles, coefficient = lam[:used], order[:used], circles[:used], coefficient[:used]
    norms, radii = _norms_and_nodes(lam, order, coefficient)
    arrays = (lam, order, circles, coefficient, 1.0 / np.sqrt(norms))
    for array in arrays:
        array.flags.writeable = False
    return (*arrays, tuple(radii), tuple(rows))


def _circle_set(spec, excitation_position, pickup_position, n_modes):
    split = pickup_position is not None
    frame = _frame_angle(excitation_position, pickup_position)
    lam, order, circles, coefficient, scale, radii, rows = _circle_table(spec.edges, spec.poisson_ratio, n_modes, split)
    held = spec.edges != "free"  # w = 0 on a clamped or pinned edge, exactly
    index = np.array([r[0] for r in rows])
    sine = np.array([r[1] == "sin" for r in rows])
    n = order[index]

    def shape(point):
        radius, angle = point
        if held and radius >= 1.0:
            return np.zeros(len(rows))
        radial = (_radial(order, lam, coefficient, radius) * scale)[index]
        turn = np.where(sine, np.sin(n * (angle - frame)), np.cos(n * (angle - frame)))
        return radial * turn

    excitation = shape(excitation_position)
    pickup = np.ones(len(rows)) if pickup_position is None else shape(pickup_position)
    columns = {
        "nodal_diameters": tuple(int(order[i]) for i, _ in rows),
        "nodal_circles": tuple(int(circles[i]) for i, _ in rows),
        "nodal_lines": tuple(int(order[i] + circles[i]) for i, _ in rows),
        "orientation": tuple(o for _, o in rows),
        "nodal_circle_radii": tuple(radii[i] for i, _ in rows),
        "lambda_squared": tuple(float(lam[i] ** 2) for i, _ in rows),
    }
    labels = tuple(f"({order[i]},{circles[i]})" for i, _ in rows)
    geometry = {"radius_m": spec.radius, "orientation_reference_deg": math.degrees(frame)}
    return lam[index] ** 2, labels, excitation, pickup, columns, geometry


# --------------------------------------------------------------------------
# Rectangles with pinned edges (closed form).


def rectangle_lambdas(aspect, n_modes):
    """The lowest `n_modes` (lambda**2, m, n) of a pinned rectangle.

    Parameters
    ----------
    aspect : float > 0
        Width over height, a / b.
    n_modes : int >= 1

    Returns
    -------
    lambda2, m, n : ndarrays [shape=(n_modes,)]
        ``lambda**2 = pi**2 (m**2 + (n aspect)**2)``, ascending (ties by m).
    """
    # Modes with m^2 + (n aspect)^2 <= K number about pi K / (4 aspect).
    bound = 4.0 * aspect * n_modes / math.pi + 2.0 * (1.0 + aspect) * math.sqrt(n_modes) + 4.0
    while True:
        m = np.arange(1, int(math.sqrt(bound)) + 2)
        n = np.arange(1, int(math.sqrt(bound) / aspect) + 2)
        mm, nn = np.meshgrid(m, n, indexing="ij")
        value = (mm**2 + (nn * aspect) ** 2).ravel()
        keep = value <= bound
        if np.count_nonzero(keep) >= n_modes:
            break
        bound *= 1.5
    mm, nn, value = mm.ravel()[keep], nn.ravel()[keep], value[keep]
    index = np.lexsort((nn, mm, value))[:n_modes]
    return math.pi**2 * value[index], mm[index], nn[index]


def _rectangle_set(spec, excitation_position, pickup_position, n_modes):
    lambda2, m, n = rectangle_lambdas(spec.width / spec.height, n_modes)

    def shape(point):
        x, y = point
        # sin(m pi x) via degrees: exactly 0 on the edges and on nodal lines.
        return 2.0 * sindg(180.0 * m * x) * sindg(180.0 * n * y)

    excitation = shape(excitation_position)
    pickup = np.ones(len(m)) if pickup_position is None else shape(pickup_position)
    columns = {
        "nodal_lines_x": tuple(int(k) - 1 for k in m),
        "nodal_lines_y": tuple(int(k) - 1 for k in n),
        "nodal_lines": tuple(int(a + b - 2) for a, b in zip(m, n)),
        "lambda_squared": tuple(float(v) for v in lambda2),
    }
    labels = tuple(f"({a},{b})" for a, b in zip(m, n))
    return lambda2, labels, excitation, pickup, columns, {"width_m": spec.width, "height_m": spec.height}


# --------------------------------------------------------------------------
# The contract.


def plate_modes(spec, *, excitation_position, pickup_position, n_modes):
    """Modes of a thin plate.

    Parameters
    ----------
    spec : PlateSpec
    excitation_position : (float, float)
        Circle: (radius fraction 0..1, angle rad); rectangle: (x, y) fractions
        of the width and height.
    pickup_position : (float, float) or None
        As `excitation_position`; None weights every mode by 1 (and merges
        the orientations of circular pairs into one row).
    n_modes : int >= 1
        How many rows to compute (the lowest modes; a cos/sin pair is two).

    Returns
    -------
    ModeSet
        Circle columns: nodal_diameters (n), nodal_circles (s), nodal_lines
        (n + s), orientation ("", "cos", "sin" or "pair"), nodal_circle_radii
        (fractions of the radius), lambda_squared.  Rectangle columns:
        nodal_lines_x (m - 1), nodal_lines_y (n - 1), nodal_lines,
        lambda_squared.  Parameters: the thickness (solved or given), D, the
        areal density, the mass and the thin-plate limit frequency.
    """
    thickness = spec.thickness if spec.thickness is not None else solve_thickness(spec, spec.pitch_hz)
    build = _circle_set if spec.shape == "circle" else _rectangle_set
    lambda2, labels, excitation, pickup, columns, geometry = build(spec, excitation_position, pickup_position, n_modes)
    area = math.pi * spec.radius**2 if spec.shape == "circle" else spec.width * spec.height
    freq = lambda2 * _hz_per_lambda2(spec, thickness)
    d = flexural_rigidity(spec.youngs_modulus, thickness, spec.poisson_ratio)
    areal = spec.density * thickness
    k_limit = 2.0 * math.pi / (THIN_PLATE_WAVELENGTHS * thickness)  # rad/m
    parameters = {
        "material": spec.material,
        "shape": spec.shape,
        "edges": spec.edges,
        **geometry,
        "thickness_m": thickness,
        "thickness_solved": spec.thickness is None,
        "poisson_ratio": spec.poisson_ratio,
        "flexural_rigidity_n_m": d,
        "areal_density_kg_m2": areal,
        "mass_kg": areal * area,
        "thin_plate_limit_hz": k_limit**2 * math.sqrt(d / areal) / (2.0 * math.pi),
    }
    if spec.edges == "free":
        parameters["rigid_body_modes"] = "left out (0 Hz): (0,0) translation and (1,0) rocking"
    warnings = []
    if thickness > MAX_THICKNESS_FRACTION * spec.span:
        warnings.append(
            f"plate thickness {thickness * 1e3:.4g} mm is more than {MAX_THICKNESS_FRACTION:g} of the "
            f"{'diameter' if spec.shape == 'circle' else 'shorter side'}: thin-plate theory reads the modes sharp"
        )
    return ModeSet(  # both tables come sorted by lambda
        resonator="plate",
        frequency_hz=frozen_array(freq),
        labels=labels,
        excitation_shape=frozen_array(excitation),
        pickup_shape=frozen_array(pickup),
        columns=columns,
        parameters=parameters,
        warnings=tuple(warnings),
    )


modes = plate_modes
