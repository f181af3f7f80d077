"""The exact clamped stiff string held against an independent solver written here.

The reference is a Chebyshev collocation of ``w'''' - c**2 w'' = Lambda w`` on
``0 < x < 1`` with ``w = w' = 0`` at both ends (Trefethen, *Spectral Methods in
MATLAB*, SIAM 2000, program 38: clamped ends through ``w = (1 - x**2) q``),
``c**2 = pi**2 / B`` and ``Lambda = k**2 (k**2 + c**2)`` (so
``f_n = f_0 nu sqrt(1 + B nu**2)``, ``nu = k / pi``).  It shares no code with
synth.resonators.string_clamped; the explicit 4x4 frequency determinant is
also built here, from the four solutions ``e^{+-a x}``, ``cos k x``, ``sin k x``.
"""
from __future__ import annotations

import math
import time

import numpy as np
import pytest
from scipy.interpolate import BarycentricInterpolator
from scipy.optimize import brentq

from synth.resonators.string import (
    StringSpec,
    clamped_mode_numbers,
    fletcher_clamped_frequencies,
    solve,
    solve_tension,
    stiff_string_frequencies,
)
from synth.resonators.string_clamped import clamped_nodes, clamped_shapes

CENT = 2.0 ** (1.0 / 1200.0) - 1.0  # one cent as a relative step (rtol 5.8e-4)
N_MODES = 30


def _cheb(n):
    """Chebyshev points and differentiation matrix (Trefethen 2000, program cheb)."""
    x = np.cos(np.pi * np.arange(n + 1) / n)
    c = np.hstack([2.0, np.ones(n - 1), 2.0]) * (-1.0) ** np.arange(n + 1)
    dx = x[:, None] - x[None, :]
    d = np.outer(c, 1.0 / c) / (dx + np.eye(n + 1))
    return d - np.diag(d.sum(axis=1)), x


def chebyshev_reference(b, *, points=120, count=N_MODES):
    """(nu, interior points in [0, 1], eigenvectors) of the clamped stiff string, by collocation."""
    c2 = math.pi**2 / b
    d, x = _cheb(points)
    d2 = d @ d
    d3, d4 = d2 @ d, d2 @ d2
    s = np.diag(np.hstack([0.0, 1.0 / (1.0 - x[1:-1] ** 2), 0.0]))
    fourth = ((np.diag(1 - x**2) @ d4 - 8 * np.diag(x) @ d3 - 12 * d2) @ s)[1:-1, 1:-1]
    second = ((np.diag(1 - x**2) @ d2 - 4 * np.diag(x) @ d - 2 * np.eye(points + 1)) @ s)[1:-1, 1:-1]
    # x in [-1, 1] -> [0, 1]: d/dx_[0,1] = 2 d/dx_[-1,1]
    lam, vectors = np.linalg.eig(16.0 * fourth - 4.0 * c2 * second)
    order = np.argsort(lam.real)[:count]
    lam, vectors = lam.real[order], vectors.real[:, order]
    k2 = 0.5 * (-c2 + np.sqrt(c2 * c2 + 4.0 * lam))
    return np.sqrt(k2) / math.pi, 0.5 * (x[1:-1] + 1.0), vectors


def _cents(a, b):
    return 1200.0 * np.log2(np.asarray(a) / np.asarray(b))


def _dimensionless(nu, b):
    nu = np.asarray(nu, dtype=float)
    return nu * np.sqrt(1.0 + b * nu**2)  # f_n / f_0


@pytest.fixture(scope="module", params=[1e-4, 1e-3, 1e-2], ids=lambda b: f"B={b:g}")
def case(request):
    b = request.param
    nu, x, vectors = chebyshev_reference(b)
    return b, nu, x, vectors


class TestFrequencies:
    def test_against_chebyshev_to_a_hundredth_of_a_cent(self, case):
        b, nu_ref, _, _ = case
        n = np.arange(1, N_MODES + 1)
        nu = clamped_mode_numbers(n, b)
        cents = _cents(_dimensionless(nu, b), _dimensionless(nu_ref, b))
        assert np.max(np.abs(cents)) < 0.01  # the tolerance; measured < 1e-6 cent
        assert np.all((nu > n) & (nu < n + 1))  # clamping raises every mode, by less than one mode number

    def test_explicit_four_by_four_determinant_is_singular(self, case):
        """The 4x4 matrix of w = A e^{a(x-1)} + B e^{-a x} + C cos k x + D sin k x with w = w' = 0
        at x = 0 and 1 (exponentials scaled so nothing overflows) is singular at every root."""
        b = case[0]
        c2 = math.pi**2 / b
        for nu in clamped_mode_numbers(np.arange(1, N_MODES + 1), b):
            k = math.pi * nu
            a = math.sqrt(k * k + c2)
            e = math.exp(-a)
            m = np.array([
                [e, 1.0, 1.0, 0.0],  # w(0)
                [a * e, -a, 0.0, k],  # w'(0)
                [1.0, e, math.cos(k), math.sin(k)],  # w(1)
                [a, -a * e, -k * math.sin(k), k * math.cos(k)],  # w'(1)
            ])
            m /= np.linalg.norm(m, axis=1, keepdims=True)
            singular = np.linalg.svd(m, compute_uv=False)
            assert singular[-1] < 1e-9 * singular[0]

    def test_the_model_uses_the_exact_law(self):
        # The frequencies the resonator reports are f0 nu sqrt(1 + B nu^2) with the exact nu.
        spec = StringSpec(length=1.2, diameter=1.6e-3, density=7850.0, youngs_modulus=200e9, tension=260.0,
                          ends="clamped")
        table = solve(spec, N_MODES)
        mu = 7850.0 * math.pi * 1.6e-3**2 / 4
        b = math.pi**3 * 200e9 * 1.6e-3**4 / (64 * 260.0 * 1.2**2)
        nu_ref = chebyshev_reference(b)[0]
        f0 = math.sqrt(260.0 / mu) / (2 * 1.2)
        np.testing.assert_allclose(table.frequency_hz, f0 * _dimensionless(nu_ref, b), rtol=0.01 * CENT)

    def test_beam_limit(self):
        # B -> infinity: the clamped-clamped beam, cos(x) cosh(x) = 1: 4.730041, 7.853205, 10.995608
        # (Thomson, Theory of Vibration, App. D; REFERENCES.md sec. 4).
        x = math.pi * clamped_mode_numbers([1, 2, 3], 1e14)
        np.testing.assert_allclose(x, [4.730041, 7.853205, 10.995608], atol=2e-6)

    def test_ideal_string_limit(self):
        # B = 0: a clamped ideal string is a pinned one (the slope condition costs nothing).
        np.testing.assert_array_equal(clamped_mode_numbers(np.arange(1, 6), 0.0), np.arange(1.0, 6.0))


class TestFletcherApproximation:
    """Fletcher's small-B expansion (Fletcher 1964) against the exact law: the issue's figures."""

    @pytest.mark.parametrize("b, modes, expected, tolerance", [
        (1e-4, [30], [-0.10], 0.02),  # 0.1 cent at B = 1e-4
        (1e-3, [10, 30], [-0.30, 2.53], 0.05),  # -0.3 / +2.5 cents
        (1e-2, [10, 30], [11.53, 60.8], 0.1),  # +11.5 / +61 cents
    ])
    def test_error_of_the_expansion(self, b, modes, expected, tolerance):
        nu_ref = chebyshev_reference(b)[0]
        n = np.arange(1, N_MODES + 1)
        # Fletcher 1964, written out here: n sqrt(1 + B n^2) (1 + 2 sqrt(B)/pi + 4 B/pi^2).
        by_hand = n * np.sqrt(1 + b * n**2) * (1 + 2 * math.sqrt(b) / math.pi + 4 * b / math.pi**2)
        fletcher = fletcher_clamped_frequencies(n, length=0.5, tension=1.0, mu=1.0, b=b) / (1.0 / (2 * 0.5))
        np.testing.assert_allclose(fletcher, by_hand, rtol=1e-14)
        error = _cents(fletcher, _dimensionless(nu_ref, b))
        for m, value in zip(modes, expected):
            assert error[m - 1] == pytest.approx(value, abs=tolerance)
        assert np.max(np.abs(error)) == pytest.approx(abs(expected[-1]), abs=tolerance)


class TestShapesAndNodes:
    def test_nodes_against_the_chebyshev_eigenvectors(self, case):
        b, _, x, vectors = case
        n = np.arange(1, N_MODES + 1)
        nu = clamped_mode_numbers(n, b)
        column = clamped_nodes(n, nu, b)
        grid = np.hstack([0.0, x, 1.0])
        for i in range(N_MODES):
            nodes = np.array(list(column[i]))
            assert len(nodes) == n[i] + 1 and nodes[0] == 0.0 and nodes[-1] == 1.0
            # The reference shape: the collocation polynomial through the eigenvector (zero at the ends).
            w = BarycentricInterpolator(grid, np.hstack([0.0, vectors[:, i], 0.0]))
            fine = np.linspace(0.0, 1.0, 40 * N_MODES + 1)[1:-1]
            values = w(fine)
            change = np.nonzero(np.sign(values[:-1]) * np.sign(values[1:]) < 0)[0]
            reference = np.array([brentq(w, fine[j], fine[j + 1], xtol=1e-14) for j in change])
            assert len(reference) == n[i] - 1
            np.testing.assert_allclose(nodes[1:-1], reference, atol=1e-9)

    def test_shapes_against_the_chebyshev_eigenvectors(self, case):
        b, _, x, vectors = case
        n = np.arange(1, N_MODES + 1)
        nu = clamped_mode_numbers(n, b)
        model = np.array([clamped_shapes(p, n, nu, b) for p in x])  # (points, modes)
        for i in range(N_MODES):
            ref = vectors[:, i] * np.sign(vectors[np.argmax(np.abs(vectors[:, i])), i])
            got = model[:, i] * np.sign(model[np.argmax(np.abs(vectors[:, i])), i])
            np.testing.assert_allclose(got / np.max(np.abs(got)), ref / np.max(np.abs(ref)), atol=1e-8)

    def test_modal_mass_and_sign_match_the_sine(self):
        # Scaled like sin(n pi x): int_0^1 w^2 dx = 1/2, and positive next to the left end.
        from scipy.integrate import quad

        b = 1e-3
        n = np.arange(1, 13)
        nu = clamped_mode_numbers(n, b)
        for i in range(len(n)):
            mass = quad(lambda p: clamped_shapes(p, n, nu, b)[i] ** 2, 0.0, 1.0, limit=200,
                        points=np.linspace(0, 1, 4 * len(n) + 1)[1:-1])[0]
            assert mass == pytest.approx(0.5, rel=1e-9)
        assert np.all(clamped_shapes(0.02, n, nu, b) > 0.0)
        # The end is clamped, w ~ w''(0) x^2 / 2: doubling a small distance quadruples w (a sine doubles).
        h = 1e-6
        np.testing.assert_allclose(clamped_shapes(2 * h, n, nu, b) / clamped_shapes(h, n, nu, b), 4.0, rtol=1e-3)


class TestPitchSolve:
    @pytest.mark.parametrize("pitch", [27.5, 55.0, 110.0, 440.0])
    def test_solved_tension_sounds_the_pitch_by_the_reference(self, pitch):
        length, d, rho, e = 1.2, 1.6e-3, 7850.0, 200e9
        tension = solve_tension(pitch, length=length, diameter=d, density=rho, youngs_modulus=e, ends="clamped")
        mu = rho * math.pi * d**2 / 4
        b = math.pi**3 * e * d**4 / (64 * tension * length**2)
        nu_ref = chebyshev_reference(b, count=1)[0]
        f1 = math.sqrt(tension / mu) / (2 * length) * _dimensionless(nu_ref, b)[0]
        assert abs(_cents(f1, pitch)) < 1e-4

    def test_fletcher_tension_was_off(self):
        # The bass patch's string (A1, 1.2 m, 1.6 mm music wire): Fletcher's factor put the lowest
        # partial off pitch by a few hundredths of a cent (the issue: 0.04-0.54 cent across the range).
        length, d, rho, e, pitch = 1.2, 1.6e-3, 7850.0, 200e9, 55.0
        mu = rho * math.pi * d**2 / 4
        k = math.pi**3 * e * d**4 / (64 * length**2)

        def fletcher_error(t):
            return float(fletcher_clamped_frequencies([1], length=length, tension=t, mu=mu, b=k / t)[0]) - pitch

        t_fletcher = brentq(fletcher_error, 1.0, 1e4, xtol=1e-12)
        exact = stiff_string_frequencies([1], length=length, tension=t_fletcher, mu=mu, b=k / t_fletcher,
                                         ends="clamped")[0]
        assert 0.02 < abs(_cents(exact, pitch)) < 0.6


def test_twenty_thousand_modes_of_the_bass_patch_are_quick():
    from synth.patch import load_patch
    from pathlib import Path

    spec = load_patch(Path(__file__).resolve().parents[1] / "patches" / "string-bass-steel-a1.yaml").resonator
    assert spec.ends == "clamped"
    start = time.perf_counter()
    table = solve(spec, 20000)
    elapsed = time.perf_counter() - start
    assert elapsed < 1.0  # measured ~0.05 s
    f = np.asarray(table.frequency_hz)
    assert np.all(np.diff(f) > 0)
    b = table.parameters["inharmonicity_b"]
    nu = clamped_mode_numbers([20000], b)[0]
    nodes = table.columns["node_positions"][19999]  # found on demand
    assert len(nodes) == 20001 and nodes[10000] == 0.5
    # Interior nodes are 1/nu apart; the clamped end pushes the first one out, towards a clamped
    # beam's (about 1.25 / nu: Blevins 1979, Table 8-1, from memory).
    assert nodes[10001] - nodes[10000] == pytest.approx(1.0 / nu, rel=1e-9)
    assert 1.0 / nu < nodes[1] < 1.3 / nu
    # For large n the end term is negligible and the block reduces to tan(pi delta / 2) = k / a (exact
    # to rounding once tanh(a/2) = 1): check the last mode against that closed form.
    k = math.pi * nu
    closed = 20000 + 2 / math.pi * math.atan(k / math.sqrt(k * k + math.pi**2 / b))
    assert nu == pytest.approx(closed, rel=4e-16)  # to the last bit or two of nu (ulp 3.6e-12 at 20000)
