"""Finite-element bending modes of a bar whose cross-section varies along it.

Two-node beam elements with a deflection and a rotation at each node:

* Euler-Bernoulli: Hermite cubic deflection (the rotation is its slope),
  consistent mass;
* Timoshenko (shear deformation and rotary inertia): the interdependent
  interpolation element of Friedman & Kosmatka [1]_, whose cubic deflection
  and quadratic rotation solve the static Timoshenko equations of a uniform
  element exactly.  Its shear parameter ``phi = 12 EI / (kappa G A l**2)``
  goes to 0 for a slender element, giving back the Hermite element, so the
  element does not lock in shear.

Stiffness (bending ``EI theta'**2`` plus shear ``kappa G A (w' - theta)**2``)
and mass (``rho A w**2`` plus rotary ``rho I theta**2``) are integrated by
5-point Gauss-Legendre quadrature with the section evaluated at each point,
so a thickness that is linear over an element is integrated exactly.  The
eigenproblem ``K v = omega**2 M v`` is solved for the lowest modes with
:func:`scipy.linalg.eigh` (LAPACK's symmetric generalized solver; see
:func:`solve_bar` for the inverted form used).

Convergence (measured, and held by tests/test_bar.py): Hermite elements
converge as ``(element / wavelength)**4``; the Timoshenko element as
``(element / wavelength)**2``, so its frequencies are extrapolated from the
mesh and its half (:func:`richardson`).  With :data:`ELEMENTS_PER_MODE`
elements per computed mode, and at least :data:`MIN_ELEMENTS`, the first
five modes of a deeply undercut rosewood bar are within 0.01% of a mesh four
times finer (the issue asks for 0.1%).

References
----------
.. [1] Z. Friedman and J. B. Kosmatka, "An improved two-node Timoshenko beam
   finite element", Computers & Structures 47(3), 473-481 (1993) (volume and
   pages from memory).
.. [2] S. M. Han, H. Benaroya and T. Wei, "Dynamics of transversely vibrating
   beams using four engineering theories", J. Sound Vib. 225(5), 935-988
   (1999).
"""
from __future__ import annotations

import functools
import math

import numpy as np
import scipy.linalg
from threadpoolctl import ThreadpoolController

__all__ = [
    "ELEMENTS_PER_MODE",
    "MIN_ELEMENTS",
    "element_count",
    "richardson",
    "section_area_inertia",
    "bar_matrices",
    "solve_bar",
    "deflection_at",
    "spec_size_function",
    "spec_modes",
    "spec_mass",
    "signs_and_nodes",
    "rotation_follows_slope",
]

#: Fewest elements in any mesh.
MIN_ELEMENTS = 96
#: Elements per computed mode (see the module notes for what this buys).
ELEMENTS_PER_MODE = 10
#: Largest relative step between a mesh and its half that is extrapolated.
RICHARDSON_LIMIT = 0.05

#: One BLAS thread per solve: these matrices are small, and threads only
#: contend (measured: 8x slower with two threads on a busy two-core machine).
_THREADS = ThreadpoolController()

_GAUSS_X, _GAUSS_W = np.polynomial.legendre.leggauss(5)
_GAUSS_X = 0.5 * (_GAUSS_X + 1.0)  # on [0, 1]
_GAUSS_W = 0.5 * _GAUSS_W


def element_count(n_modes, n_segments=1):
    """Elements for `n_modes` modes: an even multiple of `n_segments` (profile segments).

    Element ends then fall on the profile points, so the linearly interpolated
    thickness is smooth inside every element, also on the half mesh of
    :func:`richardson`.
    """
    need = max(MIN_ELEMENTS, ELEMENTS_PER_MODE * (int(n_modes) + 1))
    step = 2 * n_segments
    return int(math.ceil(need / step) * step)


def richardson(fine, coarse):
    """Frequencies of a mesh extrapolated from it (`fine`) and its half (`coarse`).

    The Timoshenko element's frequencies converge as ``h**2`` (measured), so
    ``f + (f - f_coarse) / 3`` removes the leading error.  Modes whose two
    values differ by more than :data:`RICHARDSON_LIMIT` are not yet in that
    regime and keep the fine value.
    """
    fine, coarse = np.asarray(fine, dtype=float), np.asarray(coarse, dtype=float)
    step = fine - coarse
    return np.where(np.abs(step) <= RICHARDSON_LIMIT * fine, fine + step / 3.0, fine)


def section_area_inertia(size, *, section, width=None):
    """Area (m^2) and second moment of area (m^4) of the section.

    Parameters
    ----------
    size : array_like, m
        Thickness (rectangular, bending across the thickness) or diameter (round).
    section : {"rectangular", "round"}
    width : float, m
        Width of a rectangular section.
    """
    size = np.asarray(size, dtype=float)
    if section == "round":
        return math.pi * size**2 / 4.0, math.pi * size**4 / 64.0
    return width * size, width * size**3 / 12.0


def _shape_functions(xi, length, phi):
    """Deflection and rotation shape functions (and x-derivatives) of one element.

    `xi` (local coordinate 0..1), `length` and `phi` broadcast together; each
    result has a trailing axis of 4 (w1, theta1, w2, theta2).
    """
    c = 1.0 / (1.0 + phi)
    xi2, xi3 = xi * xi, xi * xi * xi
    n_w = np.stack(
        [
            c * (2 * xi3 - 3 * xi2 - phi * xi + 1 + phi),
            c * length * (xi3 - (2 + phi / 2) * xi2 + (1 + phi / 2) * xi),
            -c * (2 * xi3 - 3 * xi2 - phi * xi),
            c * length * (xi3 - (1 - phi / 2) * xi2 - (phi / 2) * xi),
        ],
        axis=-1,
    )
    n_t = np.stack(
        [
            6 * c / length * (xi2 - xi),
            c * (3 * xi2 - (4 + phi) * xi + 1 + phi),
            -6 * c / length * (xi2 - xi),
            c * (3 * xi2 - (2 - phi) * xi),
        ],
        axis=-1,
    )
    inv = (1.0 / length)[..., None] if np.ndim(length) else 1.0 / length
    d_w = np.stack(
        [
            c * (6 * xi2 - 6 * xi - phi),
            c * length * (3 * xi2 - (4 + phi) * xi + 1 + phi / 2),
            -c * (6 * xi2 - 6 * xi - phi),
            c * length * (3 * xi2 - (2 - phi) * xi - phi / 2),
        ],
        axis=-1,
    ) * inv
    d_t = np.stack(
        [
            6 * c / length * (2 * xi - 1),
            c * (6 * xi - (4 + phi)),
            -6 * c / length * (2 * xi - 1),
            c * (6 * xi - (2 - phi)),
        ],
        axis=-1,
    ) * inv
    return n_w, n_t, d_w, d_t


def bar_matrices(node_x, size_at, *, section, width, density, youngs_modulus, shear_modulus, shear_coefficient, timoshenko):
    """Global stiffness and mass matrices of a free bar.

    Parameters
    ----------
    node_x : ndarray [shape=(N+1,)], m
        Node positions, ascending.
    size_at : callable
        Thickness (or diameter) in m at an array of positions in m.
    section : {"rectangular", "round"}
    width : float or None, m
    density : float, kg/m^3
    youngs_modulus, shear_modulus : float, Pa
    shear_coefficient : float
        Timoshenko's kappa.
    timoshenko : bool
        Include shear deformation and rotary inertia.

    Returns
    -------
    stiffness, mass : scipy.sparse.csr_matrix [shape=(2N+2, 2N+2)]
        Banded (half-bandwidth 3); degrees of freedom ordered (w0, theta0,
        w1, theta1, ...).
    phi : ndarray [shape=(N,)]
        Shear parameter of each element (0 for Euler-Bernoulli).
    """
    node_x = np.asarray(node_x, dtype=float)
    lengths = np.diff(node_x)
    n_elem = len(lengths)
    points = node_x[:-1, None] + lengths[:, None] * _GAUSS_X[None, :]
    area, inertia = section_area_inertia(size_at(points), section=section, width=width)
    bending = youngs_modulus * inertia
    shear = shear_coefficient * shear_modulus * area
    weights = _GAUSS_W[None, :] * lengths[:, None]
    if timoshenko:
        phi = 12.0 * (bending * weights).sum(1) / ((shear * weights).sum(1) * lengths**2)
    else:
        phi = np.zeros(n_elem)
    n_w, n_t, d_w, d_t = _shape_functions(_GAUSS_X[None, :], lengths[:, None], phi[:, None])
    k_e = np.einsum("eq,eqi,eqj->eij", weights * bending, d_t, d_t)
    m_e = np.einsum("eq,eqi,eqj->eij", weights * density * area, n_w, n_w)
    if timoshenko:
        strain = d_w - n_t
        k_e += np.einsum("eq,eqi,eqj->eij", weights * shear, strain, strain)
        m_e += np.einsum("eq,eqi,eqj->eij", weights * density * inertia, n_t, n_t)
    import scipy.sparse

    size = 2 * (n_elem + 1)
    dofs = 2 * np.arange(n_elem)[:, None] + np.arange(4)[None, :]
    rows = np.broadcast_to(dofs[:, :, None], (n_elem, 4, 4)).ravel()
    cols = np.broadcast_to(dofs[:, None, :], (n_elem, 4, 4)).ravel()
    # COO sums the entries elements share (in element order, as the dense sum did).
    stiffness = scipy.sparse.coo_matrix((k_e.ravel(), (rows, cols)), shape=(size, size)).tocsr()
    mass = scipy.sparse.coo_matrix((m_e.ravel(), (rows, cols)), shape=(size, size)).tocsr()
    return stiffness, mass, phi


def _fixed_dofs(supports, n_nodes):
    """Constrained degrees of freedom for 'a-b' supports (first end at x = 0)."""
    fixed = []
    for end, node in zip(supports.split("-"), (0, n_nodes - 1)):
        if end == "clamped":
            fixed += [2 * node, 2 * node + 1]
        elif end == "pinned":
            fixed.append(2 * node)
    return fixed


def solve_bar(node_x, size_at, *, supports, n_modes, sparse=False, **properties):
    """Lowest bending modes of a bar by finite elements.

    Parameters
    ----------
    node_x : ndarray [shape=(N+1,)], m
    size_at : callable
        See :func:`bar_matrices`.
    supports : {"free-free", "clamped-free", "pinned-pinned", "clamped-clamped"}
    n_modes : int >= 1
        Bending modes wanted (free-free rigid-body modes are dropped).
    sparse : bool
        Solve by shift-invert Lanczos on the banded matrices
        (:func:`scipy.sparse.linalg.eigsh`) with Rayleigh-quotient
        frequencies, about twice as fast on large meshes; agrees with the
        dense solve to ~1e-9 (used where a report needs the value, not the
        audio: the thin-bar reference of a shaped bar's shear shift).
    **properties
        The keyword arguments of :func:`bar_matrices`.

    Returns
    -------
    frequency_hz : ndarray [shape=(n_modes,)], Hz
    dofs : ndarray [shape=(2N+2, n_modes)]
        Mode vectors with ``v.T M v = 1`` (kg^-1/2 units), zeros at the
        constrained degrees of freedom.
    phi : ndarray [shape=(N,)]
        Shear parameter of each element.

    Notes
    -----
    The problem is solved inverted, ``M v = mu (K + s M) v`` with
    ``mu = 1 / (omega**2 + s)`` and a shift ``s`` near the lowest eigenvalue,
    taking the largest ``mu``.  Solved directly, the lowest modes of a fine
    mesh lose accuracy as ``eps * omega_max**2 / omega_1**2`` (0.4% for the
    first mode of an 800-element clamped-free bar, measured); inverted they
    keep nearly full precision, and ``K + s M`` is positive definite even for
    a free bar.
    """
    stiffness, mass, phi = bar_matrices(node_x, size_at, **properties)
    size = stiffness.shape[0]
    keep = np.setdiff1d(np.arange(size), _fixed_dofs(supports, len(node_x)))
    k, m = stiffness[keep][:, keep], mass[keep][:, keep]
    shift = _eigenvalue_scale(k.diagonal(), m.diagonal(), node_x[-1] - node_x[0])
    n_rigid = 2 if supports == "free-free" else 0
    n_total = min(n_modes + n_rigid, len(keep))
    if sparse and n_total < len(keep) - 1:
        frequency, vectors = _solve_sparse(k.tocsc(), m.tocsc(), shift, n_total)
        frequency, vectors = frequency[n_rigid:], vectors[:, n_rigid:]
    else:
        k_dense, m_dense = k.toarray(), m.toarray()
        with _THREADS.limit(limits=1, user_api="blas"):
            mu, vectors = scipy.linalg.eigh(m_dense, k_dense + shift * m_dense,
                                            subset_by_index=[len(keep) - n_total, len(keep) - 1])
        mu, vectors = mu[::-1][n_rigid:], vectors[:, ::-1][:, n_rigid:]
        frequency = np.sqrt(np.maximum(1.0 / mu - shift, 0.0)) / (2.0 * math.pi)
    vectors = vectors / np.sqrt(np.sum(vectors * (m @ vectors), axis=0))
    dofs = np.zeros((size, n_total - n_rigid))
    dofs[keep] = vectors
    return frequency, dofs, phi


def _solve_sparse(k, m, shift, n_total):
    """Lowest `n_total` (frequency Hz, vectors) by shift-invert Lanczos about ``-shift``, Rayleigh quotients."""
    import scipy.sparse.linalg

    start = np.random.default_rng(0).uniform(0.5, 1.5, k.shape[0])  # fixed: the same answer every run
    with _THREADS.limit(limits=1, user_api="blas"):
        _, vectors = scipy.sparse.linalg.eigsh(k, k=n_total, M=m, sigma=-shift, which="LM", v0=start)
    quotient = np.sum(vectors * (k @ vectors), axis=0) / np.sum(vectors * (m @ vectors), axis=0)
    order = np.argsort(quotient)
    return np.sqrt(np.maximum(quotient[order], 0.0)) / (2.0 * math.pi), vectors[:, order]


def _eigenvalue_scale(k_diagonal, m_diagonal, length):
    """A shift (rad^2/s^2) of the order of the lowest eigenvalue: (pi/L)^4 EI / rho A.

    From the translational diagonals: ``K_ww ~ 24 EI / l**3`` and
    ``M_ww ~ 26 rho A l / 35`` per node; any value within a few decades of
    the lowest eigenvalue serves.
    """
    n_nodes = k_diagonal.size / 2.0
    element = length / max(n_nodes - 1.0, 1.0)
    ei = np.mean(k_diagonal[::2]) * element**3 / 24.0
    rho_a = np.mean(m_diagonal[::2]) / element * 35.0 / 26.0
    return float(ei / rho_a * (math.pi / length) ** 4)


def deflection_at(node_x, phi, dofs, x):
    """Deflection of each mode at positions `x` (m), from the element shape functions.

    Returns
    -------
    ndarray [shape=(len(x), n_modes)]
    """
    node_x = np.asarray(node_x, dtype=float)
    x = np.clip(np.asarray(x, dtype=float), node_x[0], node_x[-1])
    element = np.clip(np.searchsorted(node_x, x, side="right") - 1, 0, len(node_x) - 2)
    lengths = node_x[element + 1] - node_x[element]
    xi = (x - node_x[element]) / lengths
    n_w = _shape_functions(xi, lengths, phi[element])[0]  # (P, 4)
    index = 2 * element[:, None] + np.arange(4)[None, :]  # (P, 4)
    return np.einsum("pi,pim->pm", n_w, dofs[index])


def rotation_follows_slope(node_x, phi, dofs):
    """Which modes are bending (first-spectrum) modes: ``integral w' theta dx > 0``.

    In a first-spectrum mode the cross-sections turn with the centre line; in
    a second-spectrum (shear) mode of Timoshenko theory they turn against it
    (the rule :func:`synth.resonators.timoshenko.mode_shapes` applies to the
    exact shapes; for pinned-pinned it splits the two roots of each
    wavenumber exactly).

    Returns
    -------
    ndarray [shape=(n_modes,)], bool
    """
    node_x = np.asarray(node_x, dtype=float)
    lengths = np.diff(node_x)
    _, n_t, d_w, _ = _shape_functions(_GAUSS_X[None, :], lengths[:, None], np.asarray(phi)[:, None])
    index = 2 * np.arange(len(lengths))[:, None] + np.arange(4)[None, :]  # (E, 4)
    local = dofs[index]  # (E, 4, M)
    slope = np.einsum("eqi,eim->eqm", d_w, local)
    theta = np.einsum("eqi,eim->eqm", n_t, local)
    return np.einsum("eq,eqm->m", _GAUSS_W[None, :] * lengths[:, None], slope * theta) > 0.0


# --------------------------------------------------------------------------
# A bar spec (synth.resonators.bar.BarSpec) on a mesh.


def spec_size_function(spec, length):
    """Thickness (or diameter), m, of `spec` made `length` long, at positions in m."""
    if spec.profile is None:
        size = spec.diameter if spec.section == "round" else spec.thickness
        return lambda x: np.full(np.shape(x), size)
    stations = np.linspace(0.0, length, len(spec.profile))
    profile = np.asarray(spec.profile)
    return lambda x: np.interp(x, stations, profile)


@functools.lru_cache(maxsize=32)
def spec_modes(spec, length, n_modes, timoshenko, kappa, sparse=False):
    """Modes of a bar spec made `length` long: (frequency_hz, dofs, phi, node_x), read-only.

    The mesh has :func:`element_count` elements (ends on the profile points);
    Timoshenko frequencies are extrapolated from this mesh and its half
    (:func:`richardson`); the shapes are this mesh's.  `kappa` is the shear
    coefficient.
    """
    segments = 1 if spec.profile is None else len(spec.profile) - 1
    properties = dict(
        supports=spec.supports,
        n_modes=n_modes,
        sparse=sparse,
        section=spec.section,
        width=spec.width,
        density=spec.density,
        youngs_modulus=spec.youngs_modulus,
        shear_modulus=spec.shear_modulus,
        shear_coefficient=kappa,
        timoshenko=timoshenko,
    )
    size_at = spec_size_function(spec, length)
    node_x = np.linspace(0.0, length, element_count(n_modes, segments) + 1)
    frequency, dofs, phi = solve_bar(node_x, size_at, **properties)
    if timoshenko:
        frequency = richardson(frequency, solve_bar(node_x[::2], size_at, **properties)[0])
    arrays = (frequency, dofs, phi, node_x)
    for array in arrays:
        array.flags.writeable = False
    return arrays


def spec_mass(spec, length):
    """Mass (kg) of a bar spec made `length` long; exact for a linearly interpolated profile."""
    if spec.profile is None:
        size = spec.diameter if spec.section == "round" else spec.thickness
        return spec.density * float(section_area_inertia(size, section=spec.section, width=spec.width)[0]) * length
    profile = np.asarray(spec.profile)
    mean = (profile.sum() - 0.5 * (profile[0] + profile[-1])) / (len(profile) - 1)
    return float(spec.density * spec.width * mean * length)


def signs_and_nodes(shape, n_modes, supports):
    """Sign (+1/-1) making each mode first swing positive from x = 0, and its nodes.

    Parameters
    ----------
    shape : callable
        Fractions of the length (array) -> mode shapes, shape (P, n_modes).
    n_modes : int
    supports : str

    Returns
    -------
    signs : ndarray [shape=(n_modes,)]
    nodes : list of tuple of float
        Fractions of the length: sign changes on a grid of 64 points per
        mode, placed by linear interpolation (error ~1e-5 of the length),
        with each pinned or clamped end included.
    """
    grid = np.linspace(0.0, 1.0, 64 * (n_modes + 2) + 1)
    values = shape(grid)
    peak = np.max(np.abs(values), axis=0)
    first = np.argmax(np.abs(values) > 0.1 * peak, axis=0)
    signs = np.sign(values[first, np.arange(n_modes)])
    inner, x = values[1:-1], grid[1:-1]
    ends = [end != "free" for end in supports.split("-")]
    nodes = []
    for m in range(n_modes):
        v = inner[:, m]
        i = np.flatnonzero(v[:-1] * v[1:] < 0.0)
        crossing = x[i] + (x[i + 1] - x[i]) * v[i] / (v[i] - v[i + 1])
        # A node exactly on a grid point (the middle of an antisymmetric mode): zero between opposite signs.
        j = np.flatnonzero((v[1:-1] == 0.0) & (v[:-2] * v[2:] < 0.0)) + 1
        crossing = np.sort(np.concatenate([crossing, x[j]]))
        nodes.append(tuple(([0.0] if ends[0] else []) + [float(c) for c in crossing] + ([1.0] if ends[1] else [])))
    return signs, nodes
