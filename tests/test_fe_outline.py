"""Plates and membranes of any outline (synth.resonators.fe) against independent references.

Sources
-------
* Circular membrane: ``f = j_mn c / (2 pi a)``, Bessel zeros from
  ``scipy.special.jn_zeros`` (A&S 1964 table 9.5; table number from memory).
* Clamped circular plate: the frequency equation
  ``J_n(lam) I_n'(lam) - I_n(lam) J_n'(lam) = 0`` (Leissa, NASA SP-160, 1969,
  ch. 2; lambda**2 = 10.2158, 21.26, 34.88, ... quoted there, from memory),
  solved here with ``brentq``.
* Pinned rectangle: ``omega_mn = pi**2 (m**2/a**2 + n**2/b**2) sqrt(D/(rho h))``
  (Leissa ch. 4, exact); rectangular membrane ``f = (c/2) sqrt((m/a)**2 + (n/b)**2)``
  (Fletcher & Rossing 1998, sec. 3.3).
* L-shaped membrane (three unit squares): lambda_1 = 9.6397238 (Fox, Henrici &
  Moler 1967, SIAM J. Numer. Anal. 4:89; from memory, as in
  ../shared/REFERENCES.md).
* Free square plate, nu = 0.3: an independent Rayleigh-Ritz solve written
  here (products of Legendre polynomials, Gauss quadrature), and the values
  lambda**2 = 13.49, 19.79, 24.43, 35.02 that Leissa's ch. 4 quotes from
  beam-function Ritz solutions (Barton 1951 form, as in the Code_Aster
  benchmark SDLS01; from memory for the table number).  Those are upper
  bounds about 0.2-1% high; the converged values are 13.468, 19.596, 24.270.

Nothing here calls the code under test to make a reference.
"""
from __future__ import annotations

import math
import time

import numpy as np
import pytest
import scipy.linalg
from numpy.polynomial import legendre
from scipy.optimize import brentq
from scipy.special import ivp, iv, jn_zeros, jv, jvp

from synth.materials import get_material
from synth.resonators.common import SpecError
from synth.resonators.fe import core, geometry, membrane_fe, plate_fe

STEEL = get_material("steel")


def _plate(points, *, edges="free", holes=None, hole_edges=None, thickness=2e-3, pitch=None, material=STEEL,
           svg_path=None):
    return plate_fe.build_spec({
        "points": points, "holes": holes, "edges": edges, "hole_edges": hole_edges, "svg_path": svg_path,
        "svg_unit": 1e-3, "thickness": None if pitch is not None else thickness, "pitch": pitch, "material": material,
    })


def _membrane(points, *, holes=None, tension=1000.0, pitch=None, sigma=0.25, edges=None):
    return membrane_fe.build_spec({
        "points": points, "holes": holes, "svg_path": None, "svg_unit": 1e-3, "edges": edges,
        "tension": None if pitch is not None else tension, "pitch": pitch, "areal_density": sigma,
        "material": None, "thickness": None,
    })


def _circle(radius, n):
    angle = 2.0 * math.pi * np.arange(n) / n
    return (radius * np.c_[np.cos(angle), np.sin(angle)]).tolist()


def _rigidity(material, h):
    return material.youngs_modulus * h**3 / (12.0 * (1.0 - material.poisson_ratio**2))


# ---------------------------------------------------------------------------
# Independent references.


def clamped_circle_lambda2(count):
    """lambda**2 of a clamped circular plate, each n > 0 twice, from Leissa's frequency equation."""
    roots = []
    grid = np.linspace(0.5, 40.0, 4000)
    for n in range(0, 14):
        def f(x, n=n):
            return jv(n, x) * ivp(n, x) / iv(n, x) - jvp(n, x)
        values = f(grid)
        for i in np.flatnonzero(np.sign(values[:-1]) * np.sign(values[1:]) < 0):
            root = brentq(f, grid[i], grid[i + 1], xtol=1e-13)
            roots += [root**2] * (1 if n == 0 else 2)
    return np.sort(roots)[:count]


def membrane_circle_j(count):
    """Bessel zeros j_mn, each m > 0 twice."""
    zeros = [jn_zeros(0, 8)] + [np.repeat(jn_zeros(m, 8), 2) for m in range(1, 16)]
    return np.sort(np.concatenate(zeros))[:count]


def free_square_ritz(nu, degree=13):
    """lambda**2 = omega a**2 sqrt(rho h / D) of a free square plate by Rayleigh-Ritz with Legendre products."""
    x, w = legendre.leggauss(degree + 4)
    n = degree + 1
    eye = np.eye(n)
    p = np.array([legendre.legval(x, eye[i]) for i in range(n)])
    d1 = np.array([legendre.legval(x, legendre.legder(eye[i], 1)) for i in range(n)])
    d2 = np.array([legendre.legval(x, legendre.legder(eye[i], 2)) for i in range(n)])
    a0, a1, a2, b = (p * w) @ p.T, (d1 * w) @ d1.T, (d2 * w) @ d2.T, (d2 * w) @ p.T
    stiffness = (np.kron(a2, a0) + np.kron(a0, a2) + nu * (np.kron(b, b.T) + np.kron(b.T, b))
                 + 2.0 * (1.0 - nu) * np.kron(a1, a1))
    mass = np.kron(a0, a0)
    omega2 = scipy.linalg.eigh(stiffness, mass, eigvals_only=True)
    omega = np.sqrt(np.clip(omega2, 0.0, None))
    return 4.0 * omega[3:]  # side 2 on [-1, 1]: lambda**2 = omega * 2**2; 3 rigid-body modes left out


# ---------------------------------------------------------------------------


class TestCircle:
    def test_membrane_bessel_zeros(self):
        a, tension, sigma = 0.15, 2000.0, 0.26
        solution = membrane_fe.solve(_membrane(_circle(a, 160), tension=tension, sigma=sigma), 20)
        exact = membrane_circle_j(20) * math.sqrt(tension / sigma) / (2.0 * math.pi * a)
        np.testing.assert_allclose(solution.frequency_hz, exact, rtol=5e-3)  # issue 17: 0.5% on 20 modes
        assert solution.labels[:3] == ("(1)", "(2)", "(3)")

    def test_clamped_plate(self):
        a, h = 0.1, 1e-3
        solution = plate_fe.solve(_plate(_circle(a, 160), edges="clamped", thickness=h), 20)
        scale = math.sqrt(_rigidity(STEEL, h) / (STEEL.density * h)) / (2.0 * math.pi * a**2)
        exact = clamped_circle_lambda2(20) * scale
        assert exact[0] / scale == pytest.approx(10.2158, abs=1e-4)  # Leissa ch. 2 (from memory)
        np.testing.assert_allclose(solution.frequency_hz, exact, rtol=5e-3)


class TestRectangle:
    def test_pinned_plate_closed_form(self):
        a, b, h = 0.4, 0.25, 2e-3
        solution = plate_fe.solve(_plate([[0, 0], [a, 0], [a, b], [0, b]], edges="pinned", thickness=h), 12)
        mn = sorted((m * m / a**2 + n * n / b**2) for m in range(1, 15) for n in range(1, 15))[:12]
        exact = np.array(mn) * (math.pi / 2.0) * math.sqrt(_rigidity(STEEL, h) / (STEEL.density * h))
        np.testing.assert_allclose(solution.frequency_hz, exact, rtol=5.8e-4)  # one cent
        # shape normalisation: mode (1,1) is 2 sin sin (mean square 1; plate.py's convention)
        for x, y in ((0.1, 0.07), (0.2, 0.125), (0.33, 0.2)):
            expected = 2.0 * math.sin(math.pi * x / a) * math.sin(math.pi * y / b)
            assert abs(solution.shape((x, y))[0]) == pytest.approx(expected, rel=1e-3)

    def test_membrane_closed_form_and_shapes(self):
        a, b, tension, sigma = 0.5, 0.32, 800.0, 0.2
        solution = membrane_fe.solve(_membrane([[0, 0], [a, 0], [a, b], [0, b]], tension=tension, sigma=sigma), 10)
        c = math.sqrt(tension / sigma)
        rows = sorted((math.hypot(m / a, n / b), m, n) for m in range(1, 12) for n in range(1, 12))[:10]
        np.testing.assert_allclose(solution.frequency_hz, [0.5 * c * r for r, _, _ in rows], rtol=1e-3)
        # normalisation (mean square 1) against 2 sin sin, at points inside
        for x, y in ((0.1, 0.1), (0.25, 0.16), (0.4, 0.05)):
            expected = 2.0 * math.sin(math.pi * x / a) * math.sin(math.pi * y / b)
            assert abs(solution.shape((x, y))[0]) == pytest.approx(expected, rel=2e-3)
        # mode (2,1): its nodal line is x = a / 2
        assert rows[1][1:] == (2, 1)
        lines = solution.nodal_lines(1)
        assert lines.size and np.allclose(lines[..., 0], a / 2.0, atol=a / 200.0)
        points, triangles = solution.triangulation()
        assert solution.nodal_values(3).shape == (len(points), 3) and triangles.max() < len(points)


class TestLShape:
    def test_fox_henrici_moler(self):
        # unit L (three unit squares; here the 2 x 2 square less the top right one), T = sigma
        solution = membrane_fe.solve(_membrane([[0, 0], [2, 0], [2, 1], [1, 1], [1, 2], [0, 2]], tension=1.0,
                                               sigma=1.0), 4)
        eigenvalue = (2.0 * math.pi * solution.frequency_hz[0]) ** 2
        assert eigenvalue == pytest.approx(9.6397238, rel=1e-3)  # FHM 1967 (from memory)
        assert solution.parameters["mesh_error_highest_mode"] < core.TOLERANCE


class TestFreeSquare:
    def test_against_ritz_and_leissa(self):
        a, h = 0.3, 1.5e-3
        material = STEEL.__class__(**{**STEEL.__dict__, "poisson_ratio": 0.3})
        solution = plate_fe.solve(_plate([[0, 0], [a, 0], [a, a], [0, a]], edges="free", thickness=h,
                                         material=material), 6)
        scale = math.sqrt(_rigidity(material, h) / (material.density * h)) / (2.0 * math.pi * a**2)
        lambda2 = solution.frequency_hz / scale
        ritz = free_square_ritz(0.3)[:6]
        np.testing.assert_allclose(lambda2, ritz, rtol=1e-3)  # independent Ritz: 0.1%
        quoted = np.array([13.49, 19.79, 24.43, 35.02])  # Leissa ch. 4 / Barton 1951 (from memory): upper bounds
        assert np.all(lambda2[:4] <= quoted) and np.all(lambda2[:4] >= quoted * 0.985)
        assert solution.parameters["rigid_body_modes"].startswith("3 ")


class TestBadOutlines:
    @pytest.mark.parametrize("points, key, words", [
        ([[0, 0], [1, 0]], "points", "at least 3 points"),
        ([[0, 0], [1, 1], [2, 2]], "points", "zero area"),
        ([[0, 0], [1, 1], [1, 0], [0, 1]], "points", "segment 0 (point 0 to 1) meets segment 2"),
        ([[0, 0], [1, 0], [1, 0], [0, 1]], "points", "coincide"),
        ([[0, 0], "x", [0, 1]], "points[1]", "[x, y]"),
    ])
    def test_outline(self, points, key, words):
        with pytest.raises(SpecError, match=None) as info:
            _plate(points)
        assert info.value.key == key and words in str(info.value) and "\n" not in str(info.value)

    @pytest.mark.parametrize("holes, words", [
        ([[[2, 2], [3, 2], [3, 3]]], "outside"),
        ([[[0.5, 0.5], [1.5, 0.5], [0.5, 0.8]]], "crosses or touches the outline"),
        ([[[0.1, 0.1], [0.4, 0.1], [0.1, 0.4]], [[0.2, 0.2], [0.6, 0.2], [0.2, 0.6]]], "overlaps hole 0"),
    ])
    def test_holes(self, holes, words):
        with pytest.raises(SpecError) as info:
            _plate([[0, 0], [1, 0], [1, 1], [0, 1]], holes=holes)
        assert info.value.key.startswith("holes[") and words in str(info.value)

    def test_edges_list_length(self):
        with pytest.raises(SpecError, match="has 3 entries but the outline segments has 4") as info:
            _plate([[0, 0], [1, 0], [1, 1], [0, 1]], edges=["free", "clamped", "pinned"])
        assert info.value.key == "edges"
        with pytest.raises(SpecError, match="allowed: clamped, free, pinned"):
            _plate([[0, 0], [1, 0], [1, 1], [0, 1]], edges=["free", "glued", "free", "free"])
        with pytest.raises(SpecError, match="membrane's rim is fixed"):
            _membrane([[0, 0], [1, 0], [1, 1]], edges="free")

    def test_point_outside_or_in_hole(self):
        spec = _membrane([[0, 0], [1, 0], [1, 1], [0, 1]], holes=[[[0.4, 0.4], [0.6, 0.4], [0.6, 0.6], [0.4, 0.6]]])
        with pytest.raises(SpecError, match="outside the outline") as info:
            membrane_fe.check_position(spec, (1.2, 0.5), "excitation.position")
        assert info.value.key == "excitation.position"
        with pytest.raises(SpecError, match="inside hole 0"):
            membrane_fe.check_position(spec, (0.5, 0.5), "pickup.position")
        membrane_fe.check_position(spec, (0.2, 0.5), "pickup.position")  # on the object: fine
        inside = geometry.default_position(spec.outline, (0.5, 0.5))  # the box centre is in the hole: moved out
        membrane_fe.check_position(spec, inside, "excitation.position")

    def test_svg_path(self):
        polygons = geometry.parse_svg_path("M 0 0 h 100 v -50 L 0 -50 z M 10 -10 l 20 0 l 0 -20 Z", scale=1e-3)
        assert polygons[0] == [[0.0, 0.0], [0.1, 0.0], [0.1, 0.05], [0.0, 0.05]]
        assert len(polygons) == 2 and polygons[1][2] == pytest.approx([0.03, 0.03])
        spec = _plate(None, svg_path="M 0 0 h 100 v -50 L 0 -50 z M 10 -10 l 20 0 l 0 -20 Z")
        assert len(spec.outline.holes) == 1
        with pytest.raises(SpecError, match="only the commands M, L, H, V, Z") as info:
            geometry.parse_svg_path("M 0 0 C 1 1 2 2 3 3 Z", scale=1.0)
        assert info.value.key == "svg_path"


class TestSolveContract:
    def test_deterministic(self):
        points = [[0, 0], [0.3, 0], [0.26, 0.2], [0.05, 0.17]]
        spec = _plate(points, edges=["clamped", "free", "pinned", "free"], holes=[[[0.1, 0.05], [0.15, 0.05], [0.12, 0.1]]])
        first = plate_fe.solve(spec, 12)
        core._CACHE.clear()
        second = plate_fe.solve(spec, 12)
        assert first.fe is not second.fe
        np.testing.assert_array_equal(first.fe.basis.mesh.p, second.fe.basis.mesh.p)
        np.testing.assert_allclose(first.frequency_hz, second.frequency_hz, rtol=1e-9)
        np.testing.assert_allclose(first.shape((0.2, 0.1)), second.shape((0.2, 0.1)), rtol=1e-6, atol=1e-9)
        assert first.parameters["mesh_key"] == second.parameters["mesh_key"]

    def test_pitch_and_retune_scale(self):
        points = [[0, 0], [0.2, 0], [0.2, 0.12], [0, 0.12]]
        spec = _plate(points, edges="clamped", pitch=600.0)
        solution = plate_fe.solve(spec, 5)
        assert solution.frequency_hz[0] == pytest.approx(600.0, rel=1e-12)
        up = plate_fe.solve(plate_fe.retune(spec, 1200.0), 5)
        assert up.parameters["thickness_m"] == pytest.approx(2 * solution.parameters["thickness_m"], rel=1e-9)  # f ~ h
        drum = _membrane(points, pitch=100.0)
        low, high = membrane_fe.solve(drum, 4), membrane_fe.solve(membrane_fe.retune(drum, 200.0), 4)
        assert high.parameters["tension_n_per_m"] == pytest.approx(4 * low.parameters["tension_n_per_m"])  # f ~ sqrt(T)
        assert hash(spec) == hash(_plate(points, edges="clamped", pitch=600.0))  # SolveCache keys

    def test_timing_200_plate_modes(self):
        spec = _plate([[0, 0], [0.5, 0], [0.45, 0.3], [0.05, 0.35]], edges="free")
        core._CACHE.clear()
        start = time.perf_counter()
        solution = plate_fe.solve(spec, 200)
        elapsed = time.perf_counter() - start
        print(f"\n200 plate modes: {elapsed:.1f} s, {solution.parameters['mesh_elements']} triangles, "
              f"{solution.parameters['mesh_dofs']} dofs, error estimate of mode 200 "
              f"{solution.parameters['mesh_error_highest_mode']:.2e}")
        assert len(solution.frequency_hz) == 200 and np.all(np.diff(solution.frequency_hz) >= 0)
