"""The Mindlin-Reissner (thick) plate of an outline: assembly and edge conditions.

Unknowns ``w`` (deflection) and ``theta = (theta_x, theta_y)`` (rotations
of the normal, signed so that ``theta -> grad w`` in the thin limit), each in
P2 Lagrange triangles.  In lengths divided by ``L = sqrt(area)`` and with
``mu = omega**2 rho h L**4 / D`` (the Kirchhoff eigenvalue of :mod:`.core`)
the energies are ::

    K:  int (1 - nu) eps(theta):eps(theta) + nu (div theta)**2  dA      (bending)
        + s int |grad w - theta|**2  dA,   s = kappa G h L**2 / D = 6 kappa (1 - nu) (L / h)**2   (shear)
    M:  int w**2 dA + r int |theta|**2 dA,  r = (h / L)**2 / 12                                  (rotary inertia)

so the eigenvalue depends on the outline, ``nu`` and ``h / L``.  The shear
coefficient is ``kappa = pi**2 / 12`` (Mindlin 1951 [1]_: it makes the
thickness-shear frequency of the exact 3-D plate come out right, which is
what matters for the frequencies of a vibrating plate; Reissner's 5/6 is
the static value).  It is a keyword, so 5/6 is one argument away.

Shear locking: the shear term is integrated with the 3-point (degree-2)
rule while bending and mass take the exact degree-4 rule (selective reduced
integration, common practice).  Measured on a pinned unit square, nu = 0.3,
against the closed form (kappa = 5/6; fixed meshes of 64, 156, 351 triangles): lambda_11
is 3.1%, 0.9%, 0.17% high at ``h / L = 0.01`` (mild locking, gone by ~6
elements per half-wave) and 0.25%, 0.05%, 0.007% high at ``h / L = 0.1``.
With the convergence loop of :mod:`.core` the first 30 modes are within
0.15% (h/L = 0.01) and 0.36% (h/L = 0.002) of the closed form.

A curved edge drawn as a polygon: clamped is fine (a 64-gon, h = 0.04 radius:
lambda**2 = 10.20 against 10.22), but a hard simple support on a polygon
is not a curve's in the thin limit (Babuska's paradox: ``w = 0`` on two
facets meeting at a vertex forces ``grad w = 0`` there): the pinned 64-gon
reads 5.04, 5.16, 5.51 at h = 0.04, 0.01, 0.004 radius against 4.94; the
soft support does no better (5.04, 5.15, 5.46).  :mod:`.plate_fe` warns.

Edge conditions per segment, on every boundary node of the segment (vertices
and edge midpoints): clamped ``w = 0, theta = 0``; pinned ``w = 0`` and the
tangential rotation ``t.theta = 0`` (the "hard" simple support, SS2: the
Navier solution's condition and the one that tends to Kirchhoff's pinned
edge without a boundary layer); free: nothing (the natural conditions).
A node shared by segments of different directions or conditions takes the
constraints of each (an SVD keeps the free combinations).

References
----------
.. [1] R. D. Mindlin, "Influence of rotatory inertia and shear on flexural
   motions of isotropic, elastic plates", *J. Appl. Mech.* 18 (1951), 31-38.
"""
from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp

from .core import constrained_basis, null_space

__all__ = ["KAPPA_MINDLIN", "mindlin_system", "shear_factor", "rotary_factor"]

#: Mindlin's shear coefficient pi**2 / 12 (matches the exact thickness-shear frequency).
KAPPA_MINDLIN = math.pi**2 / 12.0


def shear_factor(thickness_ratio, nu, kappa=KAPPA_MINDLIN):
    """``kappa G h L**2 / D = 6 kappa (1 - nu) / (h / L)**2`` (dimensionless)."""
    return 6.0 * kappa * (1.0 - nu) / thickness_ratio**2


def rotary_factor(thickness_ratio):
    """``(h / L)**2 / 12`` (dimensionless): rotary inertia over translational inertia."""
    return thickness_ratio**2 / 12.0


def mindlin_system(mesh, conditions, nu, thickness_ratio, *, kappa=KAPPA_MINDLIN):
    """Stiffness, mass and constraint map of a Mindlin plate on a Triangle mesh (unit area).

    Parameters
    ----------
    mesh : synth.resonators.fe.mesh.Mesh
        Points in units of L = sqrt(area).
    conditions : sequence of {"free", "pinned", "clamped"}
        Per outline segment id.
    nu : float
    thickness_ratio : float > 0
        h / L.
    kappa : float
        Shear coefficient.

    Returns
    -------
    basis : skfem.Basis
        The scalar P2 basis of ``w``; the full vector is ``[w, theta_x, theta_y]``,
        each ``basis.N`` long.
    K, M : scipy.sparse matrix [shape=(3N, 3N)]
    T : scipy.sparse matrix [shape=(3N, n_free)]
    """
    from skfem import Basis, BilinearForm, ElementTriP2, MeshTri

    m = MeshTri(mesh.points.T.copy(), mesh.triangles.T.copy())
    full = Basis(m, ElementTriP2(), intorder=4)
    reduced = Basis(m, ElementTriP2(), intorder=2)
    s, r = shear_factor(thickness_ratio, nu, kappa), rotary_factor(thickness_ratio)
    g = 0.5 * (1.0 - nu)

    def form(f):
        return BilinearForm(f)

    dx = lambda u: u.grad[0]  # noqa: E731
    dy = lambda u: u.grad[1]  # noqa: E731
    aa = form(lambda u, v, _: dx(u) * dx(v) + g * dy(u) * dy(v)).assemble(full)
    bb = form(lambda u, v, _: dy(u) * dy(v) + g * dx(u) * dx(v)).assemble(full)
    ab = form(lambda u, v, _: nu * dy(u) * dx(v) + g * dx(u) * dy(v)).assemble(full)  # rows theta_x, cols theta_y
    lap = form(lambda u, v, _: dx(u) * dx(v) + dy(u) * dy(v)).assemble(reduced)
    wx = form(lambda u, v, _: -u * dx(v)).assemble(reduced)  # rows w, cols theta_x
    wy = form(lambda u, v, _: -u * dy(v)).assemble(reduced)
    mass_r = form(lambda u, v, _: u * v).assemble(reduced)
    mass = form(lambda u, v, _: u * v).assemble(full)
    K = sp.bmat([[s * lap, s * wx, s * wy],
                 [s * wx.T, aa + s * mass_r, ab],
                 [s * wy.T, ab.T, bb + s * mass_r]], format="csr")
    M = sp.block_diag([mass, r * mass, r * mass], format="csr")
    T = _constraints(mesh, conditions, m, full)
    return full, K, M, T


def _constraints(mesh, conditions, m, basis):
    """Sparse map T (3N x free) setting w = 0 and the rotations of each held segment's nodes."""
    n = basis.N
    facet_index = {(int(a), int(b)): k for k, (a, b) in enumerate(zip(*np.sort(m.facets, axis=0)))}
    rows = {}  # node -> constraint rows on (w, theta_x, theta_y)
    for (a, b), sid in zip(mesh.segments, mesh.segment_ids):
        kind = conditions[sid]
        if kind == "free":
            continue
        t = mesh.points[b] - mesh.points[a]
        t = t / np.hypot(*t)
        if kind == "clamped":
            local = [[1, 0, 0], [0, 1, 0], [0, 0, 1]]
        else:
            local = [[1, 0, 0], [0, t[0], t[1]]]
        middle = int(basis.facet_dofs[0, facet_index[(min(a, b), max(a, b))]])
        for node in (int(basis.nodal_dofs[0, a]), int(basis.nodal_dofs[0, b]), middle):
            rows.setdefault(node, []).append((kind, t, local))
    keep = np.ones(3 * n, dtype=bool)
    blocks = []
    for node, sides in rows.items():
        pinned = [t for kind, t, _ in sides if kind == "pinned"]
        if len(sides) == 2 and len(pinned) == 2 and abs(float(np.dot(pinned[0], pinned[1]))) > math.cos(math.radians(15.0)):
            # a sample of a curve (or a straight run): hold the mean tangential rotation only
            t = pinned[0] + (pinned[1] if np.dot(pinned[0], pinned[1]) > 0 else -pinned[1])
            t = t / np.hypot(*t)
            c = [[1, 0, 0], [0, t[0], t[1]]]
        else:
            c = [r for _, _, local in sides for r in local]
        dofs = np.array([node, n + node, 2 * n + node])
        keep[dofs] = False
        blocks.append((dofs, null_space(c)))
    return constrained_basis(keep, blocks)
