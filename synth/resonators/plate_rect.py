"""Flexural modes of thin rectangular plates with any clamped, pinned or free edges.

Notes
-----
Kirchhoff (thin-plate) theory, solved by the Rayleigh-Ritz method ([1]_
ch. 4, [2]_).  The plate spans ``0 <= x <= a`` (the width) and
``0 <= y <= b`` (the height); its four edges are named ``left`` (x = 0),
``right`` (x = a), ``bottom`` (y = 0) and ``top`` (y = b), each clamped
(``w = dw/dn = 0``), pinned (simply supported, ``w = 0``) or free (nothing
imposed: the moment and shear conditions are natural, the Ritz method meets
them as the basis grows).

*Basis.*  Products ``X_i(xi) Y_j(eta)`` of one-dimensional functions on
``xi = x / a``, ``eta = y / b``.  Each set is built from Legendre polynomials
(orthonormal on [0, 1]) restricted to the subspace that meets the geometric
conditions of its two ends (w = 0 at a pinned end; w = w' = 0 at a clamped
one), ordered by degree and orthonormalised exactly in coefficient space
(nested null spaces of the end constraints, by SVD).  The functions are
orthonormal (``int X_i X_k dxi = delta_ik``), so the mass matrix is the
identity, and the set stays well conditioned to 40 and more terms per
direction (products of characteristic beam functions, Warburton's and
Leissa's choice, lose accuracy at high order through their cosh/sinh
cancellation; the tests use them, at a low order, as the independent check).
Integrals of products of the functions and their derivatives are exact
(Gauss-Legendre quadrature of polynomials).

*Eigenproblem.*  With ``r = a / b`` and the 1-D matrices ``E1 = int X' X'``,
``E2 = int X'' X''``, ``E02 = int X X''`` (``F..`` alike for Y), the strain
energy of ``w = sum c_ij X_i Y_j`` divided by the kinetic energy gives

``K = E2 (x) I + r**4 I (x) F2 + r**2 [nu (E02^T (x) F02 + E02 (x) F02^T)
+ 2 (1 - nu) E1 (x) F1]``,  ``K c = lambda**4 c``,

with the frequency parameter ``lambda**2 = omega a**2 sqrt(rho h / D)``
(``D = E h**3 / (12 (1 - nu**2))``), as for synth's pinned rectangle, so
``f = lambda**2 / (2 pi a**2) sqrt(D / (rho h))``: every frequency grows in
proportion to the thickness.  Rigid-body modes (3 for a plate with every edge
free, 1 for one pinned edge and three free) are left out: their count follows
from which of ``1, x, y`` meet the geometric conditions.

*Shapes* are normalised to a mean square of 1 over the plate (modal mass =
the plate's mass), synth's convention: the coefficient vectors are unit
vectors of the orthonormal basis.

*Labels.*  Ritz modes have no exact nodal-line counts.  Each mode is written
in the basis of the 1-D beam modes of the same end conditions (computed in the
same polynomial space); the dominant pair (p, q) of beam modes names it
``"(m,n)"`` with ``m = p + 1``, ``n = q + 1`` (beam mode p has p interior
nodes, rigid translation and rotation counted as beam modes 0 and 1 of a free
end pair), so ``m - 1`` and ``n - 1`` are the nodal lines across the width
and the height of that pair, the convention of synth's pinned rectangles,
which this labelling reproduces.  When two pairs share a mode about equally
(a free square's ``(1,3) +/- (3,1)``), the label names both:
``"(1,3)+(3,1)"`` (symmetric about the diagonal when the plate is square
with the same edges across x and y; "+" and "-" are then the two symmetric
and antisymmetric combinations), else ``"(1,3)/(3,1)"``.  The ``dominance``
column gives the dominant pair's share of the mode's mean square.

*Pitch* solves the thickness (``f ~ h``); ``retune`` moves the same parameter.

References
----------
.. [1] A. W. Leissa, *Vibration of Plates*, NASA SP-160 (1969), ch. 4.
.. [2] A. W. Leissa, "The free vibration of rectangular plates", J. Sound
   Vib. 31(3):257-293 (1973).
.. [3] G. B. Warburton, "The vibration of rectangular plates", Proc. Inst.
   Mech. Eng. 168:371-384 (1954) (from memory for the pages).
"""
from __future__ import annotations

import functools
import math
from collections.abc import Mapping
from dataclasses import dataclass, replace

import numpy as np
import scipy.linalg
from numpy.polynomial import legendre

from ..modes import Solution, frozen_array
from . import plate as _plate
from .common import SpecError, UnreachablePitch

__all__ = [
    "EDGE_KINDS",
    "EDGE_NAMES",
    "edges_from",
    "edge_tuple",
    "is_closed_form",
    "RitzModes",
    "ritz_modes",
    "default_terms",
    "resolved_lambda2",
    "rigid_body_count",
    "lowest_lambda2",
    "solve_thickness",
    "position_style",
    "solve",
    "count_below",
    "retune",
    "modes",
]

#: What an edge may be.
EDGE_KINDS = ("clamped", "free", "pinned")
#: Edge names in the order of :func:`edge_tuple`: x = 0, x = a, y = 0, y = b.
EDGE_NAMES = ("left", "right", "bottom", "top")
#: Basis functions per direction: at least, at most (a 48 x 48 basis is 2304 unknowns, ~2 s).
MIN_TERMS, MAX_TERMS = 14, 48
#: Basis size per direction per half-wave of the highest mode asked for, plus a margin
#: (measured: keeps the highest reported mode within 0.1% of a basis 12 terms larger).
TERMS_PER_HALF_WAVE, TERMS_MARGIN = 1.6, 10
#: Frequencies this close (relative) are one degenerate set (a square's (1,2) and (2,1)).
DEGENERATE_RTOL = 1e-6
#: Two pairs share a mode "about equally" when the second holds this fraction of the first's share.
SHARED_LABEL_FRACTION = 0.5


# --------------------------------------------------------------------------
# Edges.


def edges_from(value, *, key="edges"):
    """The edges of a rectangle from a patch value.

    Parameters
    ----------
    value : str or mapping
        One of :data:`EDGE_KINDS` for all four edges, or a mapping with every
        key of :data:`EDGE_NAMES` (``{left: clamped, right: free, bottom:
        free, top: free}``).
    key : str
        The patch key, for messages.

    Returns
    -------
    str or tuple of 4 str
        A string when all four edges are alike, else ``(left, right, bottom, top)``.

    Raises
    ------
    SpecError
        Naming the key (``edges`` or ``edges.<name>``) and what it takes.
    """
    kinds = ", ".join(EDGE_KINDS)
    if isinstance(value, str):
        word = value.strip().lower()
        if word not in EDGE_KINDS:
            raise SpecError(f"{value!r} is not allowed (allowed: {kinds}, or for a rectangle a mapping "
                            "{left, right, bottom, top} of those)", key=key)
        return word
    if not isinstance(value, Mapping):
        raise SpecError(f"must be one of {kinds}, or for a rectangle a mapping {{left, right, bottom, top}} of "
                        f"those; got {type(value).__name__}", key=key)
    for name in value:
        if name not in EDGE_NAMES:
            raise SpecError(f"unknown edge {name!r}: a rectangle's edges are left (x = 0), right (x = width), "
                            "bottom (y = 0) and top (y = height)", key=f"{key}.{name}")
    found = []
    for name in EDGE_NAMES:
        if name not in value:
            raise SpecError(f"missing: give all four edges left, right, bottom and top, each one of {kinds}",
                            key=f"{key}.{name}")
        kind = value[name]
        if not isinstance(kind, str) or kind.strip().lower() not in EDGE_KINDS:
            raise SpecError(f"must be one of {kinds}; got {kind!r}", key=f"{key}.{name}")
        found.append(kind.strip().lower())
    return found[0] if len(set(found)) == 1 else tuple(found)


def edge_tuple(edges):
    """``(left, right, bottom, top)`` from a spec's `edges` (a string for all four, or a 4-tuple)."""
    return (edges,) * 4 if isinstance(edges, str) else tuple(edges)


def is_closed_form(edges):
    """True when every edge is pinned (synth's closed-form rectangle)."""
    return edge_tuple(edges) == ("pinned",) * 4


def _edges_text(edges):
    left, right, bottom, top = edge_tuple(edges)
    if left == right == bottom == top:
        return left
    return f"left {left}, right {right}, bottom {bottom}, top {top}"


def rigid_body_count(edges):
    """How many of the rigid motions ``1, x, y`` meet the geometric edge conditions (0 to 3).

    >>> rigid_body_count("free"), rigid_body_count(("pinned", "free", "free", "free"))
    (3, 1)
    """
    left, right, bottom, top = edge_tuple(edges)
    rows = []  # w = c + alpha xi + beta eta; each held edge gives linear conditions on (c, alpha, beta)
    for kind, on_value, along, slope in (
        (left, (1, 0, 0), (0, 0, 1), (0, 1, 0)),
        (right, (1, 1, 0), (0, 0, 1), (0, 1, 0)),
        (bottom, (1, 0, 0), (0, 1, 0), (0, 0, 1)),
        (top, (1, 0, 1), (0, 1, 0), (0, 0, 1)),
    ):
        if kind != "free":
            rows += [on_value, along]  # w = 0 all along the edge
        if kind == "clamped":
            rows.append(slope)  # normal slope 0
    return 3 - (int(np.linalg.matrix_rank(np.array(rows, dtype=float))) if rows else 0)


# --------------------------------------------------------------------------
# The 1-D basis.


@dataclass(frozen=True, eq=False)
class _Basis:
    """N orthonormal polynomials on [0, 1] meeting the geometric conditions of two ends."""

    coefficients: np.ndarray  # (n_legendre, N): Legendre-series coefficients (in t = 2 xi - 1) of each function
    e1: np.ndarray  # (N, N) int X' X'
    e2: np.ndarray  # (N, N) int X'' X''
    e02: np.ndarray  # (N, N) int X X''
    beam: np.ndarray  # (N, N) columns: the 1-D beam modes in this basis, by rising frequency

    def values(self, xi):
        """Every function's value at the points `xi` (shape (len(xi), N))."""
        t = 2.0 * np.asarray(xi, dtype=float) - 1.0
        return legendre.legvander(t, self.coefficients.shape[0] - 1) @ self.coefficients


def _derivative_matrix(n, order):
    """(n, n) matrix taking Legendre coefficients to those of the `order`-th t-derivative."""
    d = legendre.legder(np.eye(n), m=order, axis=0)
    return np.vstack([d, np.zeros((order, n))])


@functools.lru_cache(maxsize=64)
def _basis(ends, n_terms):
    """The 1-D basis of `n_terms` functions for end conditions `ends` = (at 0, at 1)."""
    n_constraints = sum({"free": 0, "pinned": 1, "clamped": 2}[kind] for kind in ends)
    n = n_terms + n_constraints
    scale = np.sqrt(2.0 * np.arange(n) + 1.0)  # P_k scaled to unit mean square on [0, 1]
    d1, d2 = _derivative_matrix(n, 1), _derivative_matrix(n, 2)
    ends_t = legendre.legvander(np.array([-1.0, 1.0]), n - 1)
    rows = []
    for side, kind in enumerate(ends):
        if kind != "free":
            rows.append(ends_t[side] * scale)
        if kind == "clamped":
            rows.append((ends_t[side] @ d1) * scale)
    constraints = np.array(rows).reshape(len(rows), n)
    # Nested null spaces: function j spans what degree < n_constraints + j + 1 adds, orthogonal to the rest.
    basis = np.zeros((n, n_terms))
    for j in range(n_terms):
        m = n_constraints + j + 1
        if n_constraints:
            _, _, vt = np.linalg.svd(constraints[:, :m] / np.linalg.norm(constraints[:, :m], axis=1, keepdims=True))
            null = vt[n_constraints:].T
        else:
            null = np.eye(m)
        null = np.vstack([null, np.zeros((n - m, null.shape[1]))])
        residual = null - basis[:, :j] @ (basis[:, :j].T @ null)
        u, _, _ = np.linalg.svd(residual, full_matrices=False)
        vector = u[:, 0]
        basis[:, j] = vector * np.sign(vector[m - 1] or 1.0)
    coefficients = scale[:, None] * basis  # Legendre coefficients of each function
    t, w = legendre.leggauss(n + 2)
    w = w / 2.0  # weights on xi in [0, 1]
    vander = legendre.legvander(t, n - 1)
    x0 = vander @ coefficients
    x1 = 2.0 * vander @ d1 @ coefficients  # d/dxi = 2 d/dt
    x2 = 4.0 * vander @ d2 @ coefficients
    e1, e2, e02 = x1.T @ (w[:, None] * x1), x2.T @ (w[:, None] * x2), x0.T @ (w[:, None] * x2)
    # Beam modes of these ends: E2 v = mu v; the small E1 term orders a free pair's rigid modes
    # (translation before rotation) without moving the elastic ones noticeably.
    _, beam = np.linalg.eigh(e2 + 1e-6 * e1)
    for array in (coefficients, e1, e2, e02, beam):
        array.flags.writeable = False
    return _Basis(coefficients, e1, e2, e02, beam)


# --------------------------------------------------------------------------
# The 2-D eigenproblem.


@dataclass(frozen=True, eq=False)
class RitzModes:
    """Solved modes of a rectangle in dimensionless form (shared by every thickness).

    Attributes
    ----------
    lambda2 : ndarray [shape=(M,)]
        ``omega a**2 sqrt(rho h / D)``, ascending, rigid-body modes left out.
    coefficients : ndarray [shape=(Nx, Ny, M)]
        Each mode in the product basis (unit vectors: mean square 1).
    labels : tuple of str [len M]
    pairs : ndarray [shape=(M, 2)], int
        Dominant beam-mode pair (m, n) of each mode, 1-based.
    dominance : ndarray [shape=(M,)]
        That pair's share of the mode's mean square (0..1).
    n_terms : (int, int)
        Basis functions across x and y.
    n_rigid : int
        Rigid-body modes left out.
    """

    lambda2: np.ndarray
    coefficients: np.ndarray
    labels: tuple
    pairs: np.ndarray
    dominance: np.ndarray
    n_terms: tuple
    n_rigid: int
    x_basis: _Basis
    y_basis: _Basis

    def shape(self, xi, eta):
        """Every mode's value at the fractions (`xi`, `eta`) of the width and the height."""
        x = self.x_basis.values([xi])[0]
        y = self.y_basis.values([eta])[0]
        return np.tensordot(x, np.tensordot(y, self.coefficients, axes=(0, 1)), axes=(0, 0))


def default_terms(aspect, n_modes):
    """Basis functions across x and y (Nx, Ny) to resolve the lowest `n_modes` modes.

    The lowest n modes of a plate reach about ``lambda**2 = 4 pi (a / b) n``
    (Weyl, :func:`count_below`), that is about ``sqrt(4 (a/b) n / pi)``
    half-waves across x and ``sqrt(4 n / (pi a/b))`` across y.
    """
    lam2 = 4.0 * math.pi * aspect * (n_modes + 4) + 40.0
    half_x = math.sqrt(lam2) / math.pi
    half_y = half_x / aspect
    terms = [int(min(MAX_TERMS, max(MIN_TERMS, math.ceil(TERMS_PER_HALF_WAVE * h + TERMS_MARGIN))))
             for h in (half_x, half_y)]
    return terms[0], terms[1]


def resolved_lambda2(aspect, n_terms):
    """Highest lambda**2 a basis of (Nx, Ny) terms resolves (:func:`default_terms` inverted; inf if uncapped)."""
    limit = math.inf
    for terms, scale in ((n_terms[0], 1.0), (n_terms[1], aspect)):
        if terms >= MAX_TERMS:
            limit = min(limit, (math.pi * scale * (terms - TERMS_MARGIN) / TERMS_PER_HALF_WAVE) ** 2)
    return limit


@functools.lru_cache(maxsize=32)
def ritz_modes(aspect, edges, poisson_ratio, n_modes, n_terms=None):
    """The lowest `n_modes` elastic modes of a rectangle (dimensionless, cached).

    Parameters
    ----------
    aspect : float > 0
        Width over height, a / b.
    edges : str or tuple of 4 str
        ``(left, right, bottom, top)``, or one kind for all four.
    poisson_ratio : float in (-1, 0.5]
    n_modes : int >= 1
    n_terms : (int, int) or None
        Basis functions across x and y (default :func:`default_terms`).

    Returns
    -------
    RitzModes
        At most `n_modes` modes (fewer when the basis holds fewer).
    """
    edges = edge_tuple(edges)
    nx, ny = default_terms(aspect, n_modes) if n_terms is None else n_terms
    bx, by = _basis((edges[0], edges[1]), nx), _basis((edges[2], edges[3]), ny)
    ix, iy = np.eye(nx), np.eye(ny)
    nu, r2 = poisson_ratio, aspect**2
    stiffness = (
        np.kron(bx.e2, iy)
        + r2 * r2 * np.kron(ix, by.e2)
        + r2 * (nu * (np.kron(bx.e02.T, by.e02) + np.kron(bx.e02, by.e02.T)) + 2.0 * (1.0 - nu) * np.kron(bx.e1, by.e1))
    )
    stiffness = 0.5 * (stiffness + stiffness.T)
    n_rigid = rigid_body_count(edges)
    count = min(n_modes, nx * ny - n_rigid)
    eigenvalues, vectors = scipy.linalg.eigh(stiffness, subset_by_index=[0, n_rigid + count - 1], driver="evr")
    eigenvalues, vectors = eigenvalues[n_rigid:], vectors[:, n_rigid:]
    lambda2 = np.sqrt(np.maximum(eigenvalues, 0.0))
    keep = lambda2 <= resolved_lambda2(aspect, (nx, ny))  # a capped basis holds its lower modes only
    lambda2, vectors = lambda2[keep], vectors[:, keep]
    count = len(lambda2)
    vectors = _purest_in_degenerate_sets(lambda2, vectors, bx, by)
    coefficients = vectors.reshape(nx, ny, count)
    labels, pairs, dominance = _labels(coefficients, bx, by, edges, aspect)
    for array in (lambda2, coefficients, pairs, dominance):
        array.flags.writeable = False
    return RitzModes(lambda2, coefficients, labels, pairs, dominance, (nx, ny), n_rigid, bx, by)


def _beam_coordinates(coefficients, bx, by):
    """Coefficients (Nx, Ny, M) rewritten in the basis of 1-D beam-mode pairs (p, q): (Nx, Ny, M)."""
    return np.einsum("ip,ijk,jq->pqk", bx.beam, coefficients, by.beam, optimize=True)


def _purest_in_degenerate_sets(lambda2, vectors, bx, by):
    """Within each set of equal frequencies (a square's (1,2) and (2,1)), the basis of purest beam pairs.

    Any rotation of a degenerate set is an equally valid basis; the one chosen
    takes, one member at a time, the normalised projection of the beam-mode
    pair that lies most in the set (members ordered by that pair, (1,2)
    before (2,1), as synth's pinned rectangle orders ties).
    """
    vectors = np.array(vectors)
    nx, ny = bx.beam.shape[0], by.beam.shape[0]
    start = 0
    while start < len(lambda2):
        stop = start + 1
        while stop < len(lambda2) and lambda2[stop] - lambda2[start] <= DEGENERATE_RTOL * lambda2[start]:
            stop += 1
        if stop - start > 1:
            k = stop - start
            space = _beam_coordinates(vectors[:, start:stop].reshape(nx, ny, k), bx, by).reshape(nx * ny, k)
            rotation, left = [], np.eye(k)  # columns of `left`: what remains of the set, in its own basis
            for _ in range(k):
                rows = space @ left  # each pair's projection on what remains
                best = int(np.argmax(np.sum(rows**2, axis=1)))
                column = left @ rows[best]
                column /= np.linalg.norm(column)
                rotation.append((best, column))
                remaining = left - np.outer(column, column @ left)
                u, sv, _ = np.linalg.svd(remaining, full_matrices=False)
                left = u[:, sv > 1e-6]
            rotation.sort(key=lambda item: item[0])
            vectors[:, start:stop] = vectors[:, start:stop] @ np.column_stack([c for _, c in rotation])
        start = stop
    return vectors


def _labels(coefficients, bx, by, edges, aspect):
    """Dominant beam-mode pair of every mode, its share, and the label text."""
    signed = _beam_coordinates(coefficients, bx, by)  # (Nx, Ny, M)
    share = signed**2
    square = aspect == 1.0 and edges[:2] == edges[2:] and bx is by
    labels, pairs, dominance = [], [], []
    for k in range(coefficients.shape[2]):
        flat = share[:, :, k].ravel()
        first, second = np.argsort(flat)[::-1][:2]
        p, q = np.unravel_index(first, share.shape[:2])
        p2, q2 = np.unravel_index(second, share.shape[:2])
        text = f"({p + 1},{q + 1})"
        if flat[second] >= SHARED_LABEL_FRACTION * flat[first]:
            a, b = sorted([(p, q), (p2, q2)])
            if square and (a[0], a[1]) == (b[1], b[0]):
                sign = "+" if signed[a[0], a[1], k] * signed[b[0], b[1], k] > 0 else "-"
            else:
                sign = "/"
            text = f"({a[0] + 1},{a[1] + 1}){sign}({b[0] + 1},{b[1] + 1})"
        labels.append(text)
        pairs.append((p + 1, q + 1))
        dominance.append(flat[first])
    return tuple(labels), np.array(pairs, dtype=np.int64).reshape(-1, 2), np.array(dominance)


def lowest_lambda2(spec):
    """lambda**2 of the lowest elastic mode of the rectangle `spec` (width, height, edges, poisson_ratio)."""
    return float(ritz_modes(spec.width / spec.height, edge_tuple(spec.edges), spec.poisson_ratio, 1).lambda2[0])


# --------------------------------------------------------------------------
# The contract.


def position_style(spec):
    """``[x, y]`` fractions of the width and the height, as synth's pinned rectangle."""
    return "xy"


def _hz_per_lambda2(spec, thickness):
    d = _plate.flexural_rigidity(spec.youngs_modulus, thickness, spec.poisson_ratio)
    return math.sqrt(d / (spec.density * thickness)) / (2.0 * math.pi * spec.width**2)


def solve_thickness(spec, pitch_hz):
    """Thickness (m) that puts the lowest mode of the rectangle `spec` at `pitch_hz` (``f ~ h``).

    Raises
    ------
    UnreachablePitch
        If the thickness would exceed 1/10 of the shorter side (thin-plate
        theory) or fall below :data:`synth.resonators.plate.MIN_THICKNESS`.
    """
    per_metre = lowest_lambda2(spec) * _hz_per_lambda2(spec, 1.0)  # Hz per m of thickness
    thickness = pitch_hz / per_metre
    limit = _plate.MAX_THICKNESS_FRACTION * min(spec.width, spec.height)
    if thickness > limit:
        raise UnreachablePitch(
            f"pitch {pitch_hz:.4g} Hz would need a {thickness * 1e3:.4g} mm thick plate, more than "
            f"{_plate.MAX_THICKNESS_FRACTION:g} of the shorter side ({limit * 1e3:.4g} mm) where thin-plate theory "
            f"holds: make the plate larger or lower the pitch (at most {limit * per_metre:.4g} Hz)"
        )
    if thickness < _plate.MIN_THICKNESS:
        raise UnreachablePitch(
            f"pitch {pitch_hz:.4g} Hz would need a {thickness * 1e6:.3g} um thick plate, thinner than "
            f"{_plate.MIN_THICKNESS * 1e6:g} um (foil): make the plate smaller or raise the pitch "
            f"(at least {_plate.MIN_THICKNESS * per_metre:.4g} Hz)"
        )
    return thickness


def retune(spec, pitch_hz):
    """The rectangle with its thickness changed so its lowest mode sounds at `pitch_hz`."""
    retuned = replace(spec, thickness=None, pitch_hz=pitch_hz)
    solve_thickness(retuned, pitch_hz)
    return retuned


def _thickness(spec):
    return spec.thickness if spec.thickness is not None else solve_thickness(spec, spec.pitch_hz)


def solve(spec, n_modes):
    """Modes of a thin rectangular plate with any edges, before it is excited or heard anywhere.

    Parameters
    ----------
    spec : PlateSpec
        ``shape == "rectangle"``; `edges` one kind or ``(left, right, bottom, top)``.
    n_modes : int >= 1

    Returns
    -------
    Solution
        Positions ``(x, y)`` as fractions of the width and the height.
        Columns: nodal_lines_x and nodal_lines_y (m - 1, n - 1 of the
        dominant beam-mode pair: approximate, see the module notes),
        nodal_lines (their sum), dominance (that pair's share, 0..1),
        lambda_squared.  Parameters as :func:`synth.resonators.plate.solve`,
        plus the basis size and the rigid-body modes left out.
    """
    thickness = _thickness(spec)
    ritz = ritz_modes(spec.width / spec.height, edge_tuple(spec.edges), spec.poisson_ratio, int(n_modes))
    held = _held_edges(spec.edges)

    def shape(point):
        x, y = float(point[0]), float(point[1])
        if (x == 0.0 and held[0]) or (x == 1.0 and held[1]) or (y == 0.0 and held[2]) or (y == 1.0 and held[3]):
            return np.zeros(len(ritz.lambda2))  # w = 0 exactly on a clamped or pinned edge
        return ritz.shape(x, y)

    m, n = ritz.pairs[:, 0], ritz.pairs[:, 1]
    columns = {
        "nodal_lines_x": tuple(int(k) - 1 for k in m),
        "nodal_lines_y": tuple(int(k) - 1 for k in n),
        "nodal_lines": tuple(int(a + b - 2) for a, b in zip(m, n)),
        "dominance": tuple(round(float(v), 4) for v in ritz.dominance),
        "lambda_squared": tuple(float(v) for v in ritz.lambda2),
    }
    d = _plate.flexural_rigidity(spec.youngs_modulus, thickness, spec.poisson_ratio)
    areal = spec.density * thickness
    k_limit = 2.0 * math.pi / (_plate.THIN_PLATE_WAVELENGTHS * thickness)  # rad/m
    parameters = {
        "material": spec.material,
        "shape": "rectangle",
        "edges": _edges_text(spec.edges),
        "width_m": spec.width,
        "height_m": spec.height,
        "thickness_m": thickness,
        "thickness_solved": spec.thickness is None,
        "poisson_ratio": spec.poisson_ratio,
        "flexural_rigidity_n_m": d,
        "areal_density_kg_m2": areal,
        "mass_kg": areal * spec.width * spec.height,
        "thin_plate_limit_hz": k_limit**2 * math.sqrt(d / areal) / (2.0 * math.pi),
        "method": f"Rayleigh-Ritz, {ritz.n_terms[0]} x {ritz.n_terms[1]} Legendre terms",
    }
    if ritz.n_rigid:
        parameters["rigid_body_modes"] = f"{ritz.n_rigid} left out (0 Hz)"
    warnings = []
    if thickness > _plate.MAX_THICKNESS_FRACTION * min(spec.width, spec.height):
        warnings.append(
            f"plate thickness {thickness * 1e3:.4g} mm is more than {_plate.MAX_THICKNESS_FRACTION:g} of the "
            "shorter side: thin-plate theory reads the modes sharp"
        )
    if len(ritz.lambda2) < n_modes:
        warnings.append(f"{len(ritz.lambda2)} modes solved of {n_modes} asked: the basis holds no more")
    return Solution(
        resonator="plate",
        frequency_hz=frozen_array(ritz.lambda2 * _hz_per_lambda2(spec, thickness)),
        labels=ritz.labels,
        shape=shape,
        columns=columns,
        parameters=parameters,
        warnings=tuple(warnings),
    )


def _held_edges(edges):
    return tuple(kind != "free" for kind in edge_tuple(edges))


def count_below(spec, limit_hz):
    """About how many modes of the rectangle `spec` lie below `limit_hz` (Weyl's law).

    For a thin plate of area S the modes below omega number about
    ``N = S omega / (4 pi) sqrt(rho h / D)`` (the leading term of the
    asymptotic count for the biharmonic operator; common practice, e.g.
    Cremer, Heckl & Ungar 1988; from memory), i.e. ``N = lambda**2 / (4 pi
    (a / b))``.  The edges change the next term (free edges add modes,
    clamped remove them); the growth of
    :meth:`synth.solvecache.SolveCache.solve_below` takes care of it.
    """
    lambda2 = limit_hz / _hz_per_lambda2(spec, _thickness(spec))
    return int(lambda2 * spec.height / (4.0 * math.pi * spec.width))


def modes(spec, *, excitation_position, pickup_position, n_modes):
    """``solve(spec, n_modes).place(excitation_position, pickup_position)``."""
    return solve(spec, n_modes).place(excitation_position, pickup_position)
