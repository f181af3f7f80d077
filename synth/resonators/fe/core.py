"""Finite-element eigenproblems of an outline: the membrane and the Kirchhoff plate.

Both problems are solved once per outline in dimensionless form and scaled to
any material, thickness or tension afterwards (so a retune never re-solves).
Lengths are divided by ``L = sqrt(area)``; the eigenvalue is

* membrane: ``mu = omega**2 sigma L**2 / T`` for ``T grad.grad u = sigma omega**2 u``
  (P2 Lagrange triangles, ``u = 0`` on the rim and on every hole's rim);
* plate: ``mu = omega**2 rho h L**4 / D`` for the Kirchhoff plate, bilinear form
  ``D [(1 - nu) w_,ij v_,ij + nu lap w lap v]`` (Argyris quintic triangles,
  C1-conforming [1]_), with per-segment edge conditions.
* thick plate: the Mindlin-Reissner plate of :mod:`.mindlin` (``w`` and the
  rotations in P2, shear by reduced integration); its ``mu`` (same scaling)
  also depends on ``h / L``, which is part of the cache key.

Edge conditions of the plate are linear constraints on the Argyris degrees
of freedom: on a straight segment with unit tangent ``t`` and normal ``n``,
``w = 0`` along it (pinned) fixes ``w``, ``t.grad w`` and ``t.H.t`` at its
vertices; clamped adds ``n.grad w`` and ``n.H.t`` at the vertices and the
normal derivative at the edge midpoints; free sets nothing (the natural
conditions).  At each boundary vertex the constraints of its segments are
gathered and the free combinations found by an SVD, giving a sparse map
``T`` from free to full degrees of freedom (``K_r = T' K T``).

The generalised eigenproblem ``K x = mu M x`` is solved by
``scipy.sparse.linalg.eigsh`` in shift-invert mode about a negative shift
(so a free plate's rigid-body modes, mu = 0, are found but never factorised
at).  Eigenvalues below :data:`RIGID_MU` (dimensionless) are rigid-body
motions and are dropped.  eigsh's vectors are M-orthonormal over the unit
area, so every mode shape has a mean square of 1 over the real area: its
modal mass ``int rho h w**2 dA`` (``int sigma u**2 dA``) is the object's mass,
the convention of :mod:`synth.resonators.plate` and :mod:`..membrane`.

Mesh convergence: each solve is repeated on a mesh of elements
:data:`COARSEN` times larger, and the relative error of each frequency on
the finer mesh is estimated Richardson-style as
``|f_coarse - f_fine| / (COARSEN**q - 1)`` with an assumed order q
(:data:`ORDER`); while the estimate of the highest reported mode exceeds
:data:`TOLERANCE` the mesh is refined (at most :data:`MAX_REFINEMENTS` times).

References
----------
.. [1] J. H. Argyris, I. Fried and D. W. Scharpf, "The TUBA family of plate
   elements for the matrix displacement method", *Aeronautical Journal* 72
   (1968), 701-709.
.. [2] T. Gustafsson and G. D. McBain, "scikit-fem: A Python package for
   finite element assembly", *JOSS* 5(52) (2020), 2369.
"""
from __future__ import annotations

import hashlib
import math
import threading
from collections import OrderedDict
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import LinearOperator, eigsh, splu

from .mesh import element_size, triangulate

__all__ = ["FEModes", "fe_modes", "content_hash", "TOLERANCE", "nodal_segments"]

#: Dimensionless eigenvalues below this are rigid-body motions (the lowest
#: elastic mode of any free plate is about 180, of a membrane about 5).
RIGID_MU = 1e-3
#: Shift of the shift-invert eigensolve (dimensionless; below every eigenvalue, so never singular).
SHIFT = -1.0
#: Boundary vertices turning by less than this (degrees) between segments of one condition are
#: samples of a curve; below STRAIGHT_TURN_DEG the boundary is straight there.
SMOOTH_TURN_DEG = 15.0
STRAIGHT_TURN_DEG = 1e-4
#: Values below this fraction of a mode's largest are zero when its nodal lines are traced.
NODE_FRACTION = 1e-9
#: Modes per shift-invert window, and the relative width of a cluster of (nearly) equal eigenvalues.
SLICE = 60
CLUSTER = 1e-6
#: Target relative error of the highest reported frequency (the mesh is refined above it).
TOLERANCE = 5e-3
#: Element size ratio of the coarse mesh used for the error estimate.
COARSEN = 1.5
#: Assumed convergence order of a frequency in the element size: conservative
#: against the nominal h**4 (P2) and h**8 (Argyris) of smooth modes, because
#: re-entrant corners slow both (the L-shaped membrane converges as h**(4/3)).
#: Mindlin P2 with reduced shear: measured h**3 to h**5 on a pinned square (thick to thin); 3 keeps
#: the estimate at or above the true error there (0.35% estimated, 0.36% true at h/L = 0.002, 30 modes).
ORDER = {"membrane": 2.0, "plate": 4.0, "mindlin": 3.0}
#: Elements per wavelength of the highest mode asked for, at the first try.
PER_WAVELENGTH = {"membrane": 6.0, "plate": 1.5, "mindlin": 4.0}
#: Refinements (each 1.4x finer) after the first mesh.
MAX_REFINEMENTS = 3
REFINE = 1.4
#: Fewest elements across the whole outline (a coarse mesh still resolves the shape).
MIN_ELEMENTS = 40
#: Solved outlines kept in memory (least recently used go first).
CACHE_ENTRIES = 16


@dataclass(frozen=True, eq=False)
class FEModes:
    """Dimensionless modes of one outline.

    Attributes
    ----------
    mu : ndarray [shape=(M,)]
        Eigenvalues, ascending, rigid-body modes left out.
    error : ndarray [shape=(M,)]
        Estimated relative error of each frequency (sqrt(mu)).
    length : float, m
        The length unit L = sqrt(area).
    basis : skfem.Basis
        On the mesh in units of L.
    vectors : ndarray [shape=(n_dofs, M)]
        Full degree-of-freedom vectors, mean square 1 over the area.
    n_elements, n_dofs : int
    n_rigid : int
        Rigid-body modes found and dropped.
    """

    mu: np.ndarray
    error: np.ndarray
    length: float
    basis: object
    vectors: np.ndarray
    n_elements: int
    n_dofs: int
    n_rigid: int

    def probe(self, xy):
        """Shape values (rows: points, columns: modes) at points `xy` [shape=(P, 2)], m."""
        xy = np.atleast_2d(np.asarray(xy, dtype=float)) / self.length
        try:
            return np.asarray(self.basis.probes(xy.T) @ self.vectors)
        except ValueError:  # a point on the boundary, found outside by rounding: nudge it inward
            return np.asarray(self.basis.probes(self._nudged(xy).T) @ self.vectors)

    def _nudged(self, xy):
        """Points moved a hair (1e-9 L) toward the centroid of the nearest triangle."""
        mesh = self.basis.mesh
        centroids = mesh.p[:, mesh.t].mean(axis=1).T  # (T, 2)
        out = xy.copy()
        for i, point in enumerate(xy):
            c = centroids[int(np.argmin(np.sum((centroids - point) ** 2, axis=1)))]
            out[i] = point + 1e-9 * (c - point) / max(float(np.hypot(*(c - point))), 1e-30)
        return out


def content_hash(key):
    """A short SHA-256 hex digest of a solve key (its repr: floats and tuples print exactly)."""
    return hashlib.sha256(repr(key).encode()).hexdigest()[:16]


# --------------------------------------------------------------------------
# Assembly.


def _membrane_system(mesh):
    from skfem import Basis, BilinearForm, ElementTriP2, MeshTri
    from skfem.helpers import dot, grad

    m = MeshTri(mesh.points.T.copy(), mesh.triangles.T.copy())
    basis = Basis(m, ElementTriP2())

    @BilinearForm
    def stiffness(u, v, _):
        return dot(grad(u), grad(v))

    @BilinearForm
    def mass(u, v, _):
        return u * v

    K, M = stiffness.assemble(basis), mass.assemble(basis)
    free = basis.complement_dofs(basis.get_dofs())
    T = sp.identity(basis.N, format="csr")[:, free]
    return basis, K, M, T


def _vertex_rows(kind, t, *, curved):
    """Constraint rows on (w, w_x, w_y, w_xx, w_xy, w_yy) at a vertex of an edge with unit tangent `t`."""
    n = (t[1], -t[0])
    rows = [[1, 0, 0, 0, 0, 0], [0, t[0], t[1], 0, 0, 0]]  # w, t.grad w
    if kind == "clamped" or not curved:  # on a curve a pinned edge has w_tt = -kappa w_n, not 0
        rows.append([0, 0, 0, t[0] ** 2, 2 * t[0] * t[1], t[1] ** 2])  # t.H.t
    if kind == "clamped":
        rows.append([0, n[0], n[1], 0, 0, 0])  # n.grad w
        rows.append([0, 0, 0, n[0] * t[0], n[0] * t[1] + n[1] * t[0], n[1] * t[1]])  # n.H.t
    return rows


def _plate_constraints(mesh, conditions, basis, facet_index):
    """Sparse map T (full x free dofs) setting the edge conditions of each boundary segment.

    A vertex between two boundary segments of one condition that turn by less
    than :data:`SMOOTH_TURN_DEG` is a sample of a curve: the constraints use
    the mean tangent (so a circle given as a many-sided polygon behaves as a
    circle, not as a polygon with a corner at every point, where a clamped
    plate's curvature and a pinned plate's slope would be forced to zero).
    Sharper vertices are corners and take the constraints of both segments.
    """
    nodal = basis.nodal_dofs  # (6, N_vertices): u, u_x, u_y, u_xx, u_xy, u_yy
    around = {}
    fixed_facets = []
    for (a, b), sid in zip(mesh.segments, mesh.segment_ids):
        kind = conditions[sid]
        if kind == "free":
            continue
        t = mesh.points[b] - mesh.points[a]
        t = t / np.hypot(*t)
        if kind == "clamped":
            fixed_facets.append(facet_index[(min(a, b), max(a, b))])
        around.setdefault(int(a), []).append((kind, t))
        around.setdefault(int(b), []).append((kind, t))
    rows = {}
    for v, sides in around.items():
        if len(sides) == 2 and sides[0][0] == sides[1][0]:
            (kind, t1), (_, t2) = sides
            if np.dot(t1, t2) < 0:
                t2 = -t2
            turn = math.degrees(math.acos(min(1.0, abs(float(np.dot(t1, t2))))))
            if turn < SMOOTH_TURN_DEG:
                t = (t1 + t2) / np.hypot(*(t1 + t2))
                rows[v] = _vertex_rows(kind, t, curved=turn > STRAIGHT_TURN_DEG)
                continue
        rows[v] = [r for kind, t in sides for r in _vertex_rows(kind, t, curved=False)]
    n_dofs = basis.N
    keep = np.ones(n_dofs, dtype=bool)
    blocks = []
    for v, c in sorted(rows.items()):
        dofs = nodal[:, v]
        keep[dofs] = False
        blocks.append((dofs, null_space(c)))  # (6, 6 - rank)
    facet_dofs = basis.facet_dofs[0, np.asarray(fixed_facets, dtype=np.int64)] if fixed_facets else []
    keep[np.asarray(facet_dofs, dtype=np.int64)] = False
    return constrained_basis(keep, blocks)


def null_space(rows):
    """An orthonormal basis (columns) of the vectors a node's constraint `rows` leave free."""
    _, s, vt = np.linalg.svd(np.asarray(rows, dtype=float))
    rank = int(np.sum(s > 1e-10 * s[0]))
    return vt[rank:].T


def constrained_basis(keep, blocks):
    """The sparse map T (all dofs x free coordinates) from the unconstrained dofs `keep` and per-node blocks.

    Each block is ``(dofs, null)``: the node's dofs and the null space of its
    constraints; the free coordinates are the kept dofs, then each block's.
    """
    plain = np.flatnonzero(keep)
    cols_i, cols_j, cols_v = [plain], [np.arange(plain.size)], [np.ones(plain.size)]
    col = plain.size
    for dofs, null in blocks:
        k = null.shape[1]
        if k == 0:
            continue
        ii, jj = np.meshgrid(dofs, np.arange(col, col + k), indexing="ij")
        cols_i.append(ii.ravel())
        cols_j.append(jj.ravel())
        cols_v.append(null.ravel())
        col += k
    T = sp.csr_matrix((np.concatenate(cols_v), (np.concatenate(cols_i), np.concatenate(cols_j))),
                      shape=(keep.size, col))
    T.eliminate_zeros()
    return T


def _plate_system(mesh, conditions, nu):
    from skfem import Basis, BilinearForm, ElementTriArgyris, MeshTri
    from skfem.helpers import dd, ddot, trace

    m = MeshTri(mesh.points.T.copy(), mesh.triangles.T.copy())
    basis = Basis(m, ElementTriArgyris())

    @BilinearForm
    def stiffness(u, v, _):
        return (1.0 - nu) * ddot(dd(u), dd(v)) + nu * trace(dd(u)) * trace(dd(v))

    @BilinearForm
    def mass(u, v, _):
        return u * v

    K, M = stiffness.assemble(basis), mass.assemble(basis)
    facets = m.facets
    facet_index = {(int(a), int(b)): k for k, (a, b) in enumerate(zip(*np.sort(facets, axis=0)))}
    T = _plate_constraints(mesh, conditions, basis, facet_index)
    return basis, K, M, T


def _window(Kr, Mr, sigma, k):
    """The `k` eigenpairs of Kr x = mu Mr x nearest `sigma` (shift-invert), ascending."""
    n = Kr.shape[0]
    lu = splu((Kr - sigma * Mr).tocsc())
    shifted = LinearOperator((n, n), matvec=lu.solve, dtype=float)
    start = np.cos(np.arange(n) * 0.7071) + 1.5  # a fixed start vector: the same mesh gives the same modes
    values, vectors = eigsh(Kr, k=k, M=Mr, sigma=sigma, which="LM", OPinv=shifted, v0=start,
                            ncv=min(n - 1, max(2 * k + 1, 20)))
    order = np.argsort(values)
    return values[order], vectors[:, order]


def _eigen(K, M, T, count):
    """The lowest `count` eigenpairs of T'KT x = mu T'MT x (full vectors T x, M-orthonormal).

    Spectrum slicing: the lowest :data:`SLICE` pairs come from a shift below
    every eigenvalue; each further window is centred above the last one so
    that it overlaps it, and is kept only from the last cluster of the
    previous window upward (a degenerate pair is always taken whole from one
    window, so the vectors stay orthogonal).  ARPACK's cost grows as the
    square of the window, so several windows beat one large one.
    """
    Kr = (T.T @ K @ T).tocsc()
    Mr = (T.T @ M @ T).tocsc()
    n = Kr.shape[0]
    count = min(count, n - 2)
    values, vectors = _window(Kr, Mr, SHIFT, min(count, SLICE))
    while len(values) < count:
        top = values[-1]
        cut = top * (1.0 - CLUSTER)
        keep = values < cut  # the last cluster is taken again from the next window
        low = values[len(values) // 2]
        density = (len(values) - len(values) // 2) / max(top - low, 1e-12)  # modes per unit of mu
        k = min(SLICE, n - 2)
        sigma = cut + 0.4 * k / density
        for _ in range(6):
            v2, x2 = _window(Kr, Mr, sigma, k)
            if v2[0] < cut:
                break
            sigma = cut + (sigma - cut) * 0.5  # the window missed the end of the last one: move down
        else:  # pragma: no cover - fall back to one large window
            return _eigen_one(Kr, Mr, T, count)
        new = v2 >= cut
        values = np.concatenate([values[keep], v2[new]])
        vectors = np.concatenate([vectors[:, keep], x2[:, new]], axis=1)
    return values[:count], T @ vectors[:, :count]


def _eigen_one(Kr, Mr, T, count):
    values, vectors = _window(Kr, Mr, SHIFT, count)
    return values, T @ vectors


def _solve_on(kind, points, holes, conditions, nu, count, size, thickness_ratio=None):
    mesh = triangulate(points, holes, math.sqrt(3.0) / 4.0 * size * size)
    if kind == "membrane":
        basis, K, M, T = _membrane_system(mesh)
    elif kind == "mindlin":
        from .mindlin import mindlin_system

        basis, K, M, T = mindlin_system(mesh, conditions, nu, thickness_ratio)
    else:
        basis, K, M, T = _plate_system(mesh, conditions, nu)
    mu, vectors = _eigen(K, M, T, count)
    return mesh, basis, mu, vectors


# --------------------------------------------------------------------------
# The solve with its convergence check, cached per outline.

_CACHE: OrderedDict = OrderedDict()
_LOCK = threading.Lock()


def fe_modes(kind, outline, n_modes, *, nu=None, thickness_ratio=None):
    """The lowest `n_modes` dimensionless modes of an outline (cached; see the module notes).

    Parameters
    ----------
    kind : {"membrane", "plate", "mindlin"}
        ``"mindlin"`` is the thick plate of :mod:`.mindlin` (its shapes are ``w``;
        the rotations are solved and dropped).
    outline : synth.resonators.fe.geometry.Outline
    n_modes : int >= 1
        Elastic modes wanted (rigid-body modes are extra).
    nu : float or None
        Poisson's ratio (plates).
    thickness_ratio : float or None
        Thickness over ``sqrt(area)`` (``"mindlin"`` only).

    Returns
    -------
    FEModes
        At least `n_modes` modes unless the mesh has fewer degrees of freedom.
    """
    key = (kind, outline, None if kind == "membrane" else float(nu))
    if kind == "mindlin":
        key += (float(thickness_ratio),)
    with _LOCK:
        cached = _CACHE.get(key)
        if cached is not None and len(cached.mu) >= n_modes:
            _CACHE.move_to_end(key)
            return cached
    result = _solve(kind, outline, n_modes, nu, thickness_ratio)
    with _LOCK:
        _CACHE[key] = result
        _CACHE.move_to_end(key)
        while len(_CACHE) > CACHE_ENTRIES:
            _CACHE.popitem(last=False)
    return result


def _solve(kind, outline, n_modes, nu, thickness_ratio=None):
    length = math.sqrt(outline.area)
    points = np.asarray(outline.points) / length
    holes = [np.asarray(h) / length for h in outline.holes]
    if kind in ("plate", "mindlin"):
        conditions = list(outline.edges) + [e for h, e in zip(outline.holes, outline.hole_edges) for _ in h]
        n_rigid_max = 3
    else:
        conditions, n_rigid_max = None, 0
    count = n_modes + n_rigid_max + 2
    size = min(element_size(1.0, n_modes, per_wavelength=PER_WAVELENGTH[kind]), 1.0 / math.sqrt(MIN_ELEMENTS / 2.0))
    previous = _solve_on(kind, points, holes, conditions, nu, count, size * COARSEN, thickness_ratio)
    for step in range(MAX_REFINEMENTS + 1):
        mesh, basis, mu, vectors = _solve_on(kind, points, holes, conditions, nu, count, size, thickness_ratio)
        rigid = int(np.count_nonzero(mu < RIGID_MU))
        coarse = previous[2]
        coarse = coarse[coarse >= RIGID_MU]
        elastic = mu[rigid:]
        n = min(len(elastic), len(coarse), n_modes + 2)
        f_fine, f_coarse = np.sqrt(elastic[:n]), np.sqrt(coarse[:n])
        ratio = (COARSEN if step == 0 else REFINE) ** ORDER[kind] - 1.0
        error = np.abs(f_coarse - f_fine) / f_fine / ratio
        top = float(error[min(n_modes, n) - 1])
        if top <= TOLERANCE or step == MAX_REFINEMENTS:
            break
        previous = (mesh, basis, mu, vectors)
        size /= REFINE
    mu_out = elastic[:n_modes] if len(elastic) >= n_modes else elastic
    n_dofs = int(vectors.shape[0])
    vecs = vectors[:basis.N, rigid:rigid + len(mu_out)]  # w only (a Mindlin vector is [w, theta_x, theta_y])
    at_vertices = vecs[basis.nodal_dofs[0]]  # w at the mesh vertices (both elements)
    biggest = at_vertices[np.argmax(np.abs(at_vertices), axis=0), np.arange(vecs.shape[1])]
    vecs = vecs * np.where(biggest < 0.0, -1.0, 1.0)  # sign convention: the largest vertex value is positive
    return FEModes(
        mu=mu_out,
        error=error[: len(mu_out)] if len(error) >= len(mu_out) else np.pad(error, (0, len(mu_out) - len(error)), constant_values=np.nan),
        length=length,
        basis=basis,
        vectors=vecs,
        n_elements=int(mesh.triangles.shape[0]),
        n_dofs=n_dofs,
        n_rigid=rigid,
    )


def nodal_segments(points, triangles, values):
    """Zero contour of a piecewise-linear field: line segments, one per triangle the sign changes in.

    Parameters
    ----------
    points : ndarray [shape=(N, 2)]
    triangles : ndarray [shape=(T, 3)]
    values : ndarray [shape=(N,)]

    Returns
    -------
    ndarray [shape=(S, 2, 2)]
        Segment end points (same unit as `points`).
    """
    v = values[triangles]
    p = points[triangles]
    tiny = NODE_FRACTION * float(np.max(np.abs(values))) if values.size else 0.0
    sign = np.where(v > tiny, 1, np.where(v < -tiny, -1, 0))  # a fixed rim's rounding noise is 0, not a sign
    mixed = np.flatnonzero((sign == 1).any(axis=1) & (sign == -1).any(axis=1))
    out = []
    for t in mixed:
        ends = [p[t, i] for i in range(3) if sign[t, i] == 0]
        for i, j in ((0, 1), (1, 2), (2, 0)):
            if sign[t, i] * sign[t, j] < 0:
                s = v[t, i] / (v[t, i] - v[t, j])
                ends.append(p[t, i] + s * (p[t, j] - p[t, i]))
        if len(ends) == 2:
            out.append(ends)
    return np.array(out, dtype=float).reshape(-1, 2, 2)
