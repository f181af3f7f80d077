"""Circular thin plates: the Bessel frequency equation, its roots and the mode shapes.

Notes
-----
The theory is in :mod:`.plate` (circle, [1]_ ch. 2): with ``x = r / a`` the
shapes are ``w = [J_n(lambda x) + C I_n(lambda x)] cos(n theta)``, and the two
edge conditions at ``x = 1`` (clamped, pinned or free) are linear equations in
(1, C) whose determinant is the frequency equation.  The modified Bessel
function is carried scaled (``ive = I_n e**-x``) so nothing overflows at large
``lambda``.  Roots are bracketed on a fine grid of lambda and polished
together by Chandrupatla's method [2]_; shapes are normalised to a mean square
of 1 over the disc by Lommel's integrals [3]_ (closed forms in the edge values
of J_n, I_n and their derivatives), and nodal circles are found, when a
report asks for them, from the sign changes of the radial shape.  Everything here is per unit radius and
independent of the thickness, which :mod:`.plate` applies.

References
----------
.. [1] A. W. Leissa, *Vibration of Plates*, NASA SP-160 (1969).
.. [2] T. R. Chandrupatla, "A new hybrid quadratic/bisection algorithm for
   finding the zero of a nonlinear function without using derivatives",
   Adv. Eng. Softw. 28(3), 145-149 (1997) (from memory; the method of
   :func:`scipy.optimize.elementwise.find_root`).
.. [3] G. N. Watson, *A Treatise on the Theory of Bessel Functions*, 2nd ed.,
   Cambridge (1944), sec. 5.11 (Lommel's integrals; section from memory,
   the three integrals used are checked against quadrature in the tests).
"""
from __future__ import annotations

import functools
import math

import numpy as np
from scipy.special import ive, jv

from ..modes import LazyColumn


__all__ = ["circle_lambdas", "circle_pairs"]

#: Lowest lambda scanned, and the grid step of the root bracketing.  The
#: lowest elastic root of any circle is near 2.2 (pinned (0,0)); roots of one
#: order n are at least about 3 apart (measured: 3.11 up to lambda 156 for
#: nu = -0.5 ... 0.5), so a step of 1 brackets each root alone (three steps apart at least).
LAMBDA_FLOOR = 0.5
LAMBDA_STEP = 1.0
#: False-position steps that polish each bracketed nodal radius.
NODE_REFINE_STEPS = 5
#: Relative tolerance of the frequency roots.
ROOT_RTOL = 1e-15
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
    nn = np.asarray(n, dtype=float) ** 2
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
    """C-tilde: w ~ J_n(lam x) + C-tilde ive(n, lam x) exp(lam (x - 1)); broadcasts."""
    (a1, b1), (a2, b2) = _edge_rows(n, lam, edges, nu)
    # Use the row with the larger I entry relative to its size: better conditioned.
    first = np.abs(b1) / np.hypot(a1, b1) >= np.abs(b2) / np.hypot(a2, b2)
    return np.where(first, -a1 / b1, -a2 / b2)


def _refine(lo, hi, order, edges, nu):
    """Roots of the frequency equation in the brackets ``[lo, hi]`` (a sign change each), all at once.

    Chandrupatla's method on arrays (:func:`scipy.optimize.elementwise.find_root`:
    one Bessel evaluation per step for every bracket still open), to
    :data:`ROOT_RTOL`: the roots of a scalar Brent search per bracket to ~1e-14.
    """
    from scipy.optimize.elementwise import find_root

    def characteristic(lam, n):
        with np.errstate(all="ignore"):
            return _characteristic(lam, n, edges, nu)

    result = find_root(characteristic, (lo, hi), args=(order,),
                       tolerances={"xatol": 0.0, "xrtol": ROOT_RTOL, "fatol": 0.0, "frtol": 0.0})
    return np.asarray(result.x, dtype=float)


def _brackets(edges, nu, lam_max):
    """Brackets ``(lo, hi, order)`` of every root up to at least `lam_max`, sorted by order then lambda.

    One grid per order (step :data:`LAMBDA_STEP`, from just below its first
    root), all evaluated together; a sign change brackets a root, and a grid
    point on a root is its own bracket (``lo == hi``).  Orders whose first
    root lies above `lam_max` are not scanned.
    """
    grids, orders = [], []
    for n in range(int(lam_max / ORDER_MARGIN) + 2):
        start = max(LAMBDA_FLOOR, ORDER_MARGIN * n)  # below the first root of the order
        if start >= lam_max:
            continue
        grid = np.arange(start, lam_max + LAMBDA_STEP, LAMBDA_STEP)
        grids.append(grid)
        orders.append(np.full(grid.size, n))
    if not grids:
        return np.empty(0), np.empty(0), np.empty(0, dtype=int)
    grid, order = np.concatenate(grids), np.concatenate(orders)
    with np.errstate(all="ignore"):
        values = _characteristic(grid, order, edges, nu)
    sign = np.sign(values)
    change = np.flatnonzero((sign[:-1] * sign[1:] < 0) & (order[:-1] == order[1:]))
    exact = np.flatnonzero(sign == 0)
    lo = np.concatenate([grid[change], grid[exact]])
    hi = np.concatenate([grid[change + 1], grid[exact]])
    order = np.concatenate([order[change], order[exact]])
    sort = np.lexsort((lo, order))
    return lo[sort], hi[sort], order[sort]


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
    # shapes, with each n > 0 pair counted once); the search grows if short.
    lam_max = math.sqrt(8.0 * n_modes) + 3.0
    while True:
        lo, hi, order = _brackets(edges, nu, lam_max)
        if np.count_nonzero(hi <= lam_max) >= n_modes:
            break
        lam_max *= 1.3
    # The k-th bracket of an order holds its k-th root.  A free plate's s = 0
    # member of orders 0 and 1 is a rigid-body mode (not scanned): its k-th
    # elastic root has k + 1 nodal circles.
    first_of_order = np.searchsorted(order, order, side="left")
    circles = np.arange(order.size) - first_of_order + np.where((edges == "free") & (order < 2), 1, 0)
    # Only brackets that can hold one of the n_modes lowest roots are refined:
    # n_modes roots lie at or below the n_modes-th smallest upper end.
    bound = np.partition(hi, n_modes - 1)[n_modes - 1]
    candidate = np.flatnonzero(lo < bound) if n_modes < lo.size else np.arange(lo.size)
    lam = lo[candidate].copy()
    open_ = hi[candidate] > lo[candidate]
    pick = candidate[open_]
    lam[open_] = _refine(lo[pick], hi[pick], order[pick], edges, nu)
    ranking = np.lexsort((order[candidate], lam))[:n_modes]  # by lambda, ties by order
    lowest = candidate[ranking]
    lam, order, circles = lam[ranking], order[lowest], circles[lowest]
    coefficient = _shape_coefficient(order, lam, edges, nu)
    return lam, order, circles, coefficient


def _radial(n, lam, coefficient, x):
    """Radial shape J_n(lam x) + C-tilde ive(n, lam x) e^(lam (x - 1)); broadcasts."""
    z = lam * x
    return jv(n, z) + coefficient * ive(n, z) * np.exp(z - lam)


def _composite_rule(lam_max):
    """Nodes and weights on [0, 1]: a Gauss-Legendre rule on panels of about
    QUADRATURE_PANEL_RADIANS / lam_max each, so each panel holds about one
    oscillation of R**2 (used to find nodal circles, and by tests)."""
    n_panels = 1 + int(math.ceil(lam_max / QUADRATURE_PANEL_RADIANS))
    base, base_weights = np.polynomial.legendre.leggauss(QUADRATURE_POINTS)
    edges = np.linspace(0.0, 1.0, n_panels + 1)
    half = 0.5 * np.diff(edges)
    nodes = (edges[:-1, None] + half[:, None] * (base[None, :] + 1.0)).ravel()
    weights = (half[:, None] * base_weights[None, :]).ravel()
    return nodes, weights


def _mean_squares(lam, order, coefficient):
    """Mean square over the disc of each unnormalised shape ``R(x) cos(n theta)``, in closed form.

    ``R = J_n(lam x) + C e^-lam I_n(lam x)`` (C the scaled coefficient), and
    ``(1/pi) int int R**2 cos**2(n theta) x dx dtheta`` is ``2 int_0^1 R**2 x dx``
    for n = 0 and ``int_0^1 R**2 x dx`` otherwise, with Lommel's integrals
    (:data:`__doc__` [3]): ``int J**2 x = (J'**2 + (1 - n**2/lam**2) J**2) / 2``,
    ``int I**2 x = ((1 + n**2/lam**2) I**2 - I'**2) / 2`` and
    ``int J I x = (J I' - J' I) / (2 lam)``, all at ``lam`` (the scaled I
    carrying its e^-lam).
    """
    j, jp, _, i, ip, _ = _bessel_columns(order, lam)
    jp, ip = jp / lam, ip / lam  # derivatives in z = lam x
    ratio = (order / lam) ** 2
    jj = 0.5 * (jp * jp + (1.0 - ratio) * j * j)
    ii = 0.5 * ((1.0 + ratio) * i * i - ip * ip)
    ji = (j * ip - jp * i) / (2.0 * lam)
    radial = jj + 2.0 * coefficient * ji + coefficient * coefficient * ii
    return np.where(order == 0, 2.0, 1.0) * radial


def _nodal_radii(lam, order, coefficient):
    """Nodal-circle radii (fractions of the radius) of each shape: a tuple per mode.

    From the sign changes of R on the composite Gauss-Legendre nodes (at least
    4 between nodal circles, which are about pi / lambda apart), refined by
    vectorised false position.  The edge x = 1 is not a node of the rule, so
    a clamped or pinned boundary is not counted.
    """
    radii = [()] * len(lam)
    for start in range(0, len(lam), SHAPE_BLOCK):
        block = np.arange(start, min(start + SHAPE_BLOCK, len(lam)))
        x, _ = _composite_rule(float(np.max(lam[block])))
        r = _radial(order[block, None], lam[block, None], coefficient[block, None], x[None, :])
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
    return tuple(radii)


@functools.lru_cache(maxsize=16)
def _circle_table(edges, nu, n_modes):
    """Everything about the lowest `n_modes` (n,s) pairs that does not depend on
    the thickness or the positions: lambda, n, s, C-tilde, shape scale and
    nodal radii.

    Cached: retuning (MIDI notes, batch jobs) only changes the thickness.
    """
    lam, order, circles, coefficient = circle_lambdas(edges, nu, n_modes)
    arrays = (lam, order, circles, coefficient, 1.0 / np.sqrt(_mean_squares(lam, order, coefficient)))
    for array in arrays:
        array.flags.writeable = False
    radii = LazyColumn(lambda: _nodal_radii(lam, order, coefficient), len(lam))
    return (*arrays, radii)


def circle_pairs(spec, n_modes):
    """The lowest `n_modes` (n,s) pairs of a circular plate, per unit thickness.

    Returns
    -------
    lambda2 : ndarray [shape=(n_modes,)]
        lambda**2 of each pair (the frequencies follow from the thickness).
    order : ndarray of int
        Nodal diameters.
    labels : tuple of str
    radial : callable
        Radius fraction -> each pair's mass-normalised radial shape.
    columns : dict
        Per-pair nodal_diameters, nodal_circles, nodal_lines,
        nodal_circle_radii, lambda_squared.
    """
    lam, order, circles, coefficient, scale, radii = _circle_table(spec.edges, spec.poisson_ratio, n_modes)

    def radial(radius_fraction):
        return _radial(order, lam, coefficient, radius_fraction) * scale

    columns = {
        "nodal_diameters": tuple(int(n) for n in order),
        "nodal_circles": tuple(int(s) for s in circles),
        "nodal_lines": tuple(int(n + s) for n, s in zip(order, circles)),
        "nodal_circle_radii": radii,
        "lambda_squared": tuple(float(x**2) for x in lam),
    }
    labels = tuple(f"({n},{s})" for n, s in zip(order, circles))
    return lam**2, order, labels, radial, columns
