"""Torsional bar modes held against published values and independent solutions.

References are computed here, never by calling synth.resonators.torsion for
the expected value: the Saint-Venant series summed term by term, the closed
forms n c / (2 L) and (2n - 1) c / (4 L), and a cell-centred finite-difference
solution of (G J theta')' = -omega**2 rho I_p theta written out below.  Each
check names its source.
"""
from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest
from scipy.linalg import eigh_tridiagonal

from synth.modes import Solution
from synth.resonators import torsion

#: One cent as a frequency ratio (1200 cents an octave).
CENT = 2.0 ** (1.0 / 1200.0) - 1.0

# --------------------------------------------------------------------------
# Independent references.


def beta_series(aspect, terms=4000):
    """Timoshenko & Goodier, Theory of Elasticity, sec. 109 (from memory for the section):
    beta = 1/3 - (64 / pi**5) (h / b) sum_{n odd} tanh(n pi b / (2 h)) / n**5, summed term by term."""
    total = 0.0
    for n in range(1, 2 * terms, 2):
        total += math.tanh(n * math.pi * aspect / 2.0) / n**5
    return 1.0 / 3.0 - 64.0 / math.pi**5 / aspect * total


def section_j_ip(h, b):
    """J (T&G series, 200 odd terms: tail < 1e-11) and I_p = b h (b**2 + h**2) / 12 of b x h rectangles.

    `h` may be an array; either side may be the longer."""
    h = np.asarray(h, dtype=float)
    long, short = np.maximum(b, h), np.minimum(b, h)
    aspect = long / short
    n = np.arange(1, 400, 2, dtype=float)
    total = np.sum(np.tanh(n * np.pi * aspect[..., None] / 2.0) / n**5, axis=-1)
    beta = 1.0 / 3.0 - 64.0 / np.pi**5 / aspect * total
    return beta * long * short**3, b * h * (b * b + h * h) / 12.0


def fd_frequencies(length, thickness_at, width, shear_modulus, density, n_modes, *, ends, cells=20000):
    """Torsional frequencies (Hz) by cell-centred finite differences (second order).

    Twist at cell centres x_i = (i + 1/2) dx; torque G J (theta_i - theta_{i-1}) / dx on the
    faces, with J and I_p from the section at each face / centre; a free end has zero torque,
    a fixed end theta = 0 on the face (torque G J theta_0 / (dx / 2)).  The diagonal mass makes
    the problem a symmetric tridiagonal one after scaling by rho I_p**(-1/2).
    """
    dx = length / cells
    centres = (np.arange(cells) + 0.5) * dx
    faces = np.arange(cells + 1) * dx
    gj = shear_modulus * section_j_ip(thickness_at(faces), width)[0]
    mass = density * section_j_ip(thickness_at(centres), width)[1]
    k_face = gj / dx**2  # inner faces couple neighbours
    diagonal = np.zeros(cells)
    diagonal[:-1] += k_face[1:-1]
    diagonal[1:] += k_face[1:-1]
    if ends[0] == "fixed":
        diagonal[0] += 2.0 * k_face[0]
    if ends[1] == "fixed":
        diagonal[-1] += 2.0 * k_face[-1]
    off = -k_face[1:-1]
    scale = 1.0 / np.sqrt(mass)
    d = diagonal * scale * scale
    e = off * scale[:-1] * scale[1:]
    rigid = 1 if ends == ("free", "free") else 0
    values = eigh_tridiagonal(d, e, eigvals_only=True, select="i", select_range=(0, n_modes - 1 + rigid))
    return np.sqrt(np.maximum(values[rigid:], 0.0)) / (2.0 * math.pi)


def bar(*, length=0.4, width=0.05, thickness=0.02, diameter=None, profile=None, supports="free-free",
        density=1010.0, shear_modulus=1.6e9):
    """A bar as torsion.solve reads it (the attributes of synth.resonators.bar.BarSpec)."""
    return SimpleNamespace(
        length=length, density=density, shear_modulus=shear_modulus,
        section="round" if diameter is not None else "rectangular",
        width=None if diameter is not None else width, thickness=None if profile is not None else thickness,
        diameter=diameter, profile=profile, supports=supports,
    )


def wave_speed_reference(spec):
    """sqrt(G J / (rho I_p)) from the series above (rectangle) or J = I_p (round: c = sqrt(G / rho))."""
    if spec.diameter is not None:
        return math.sqrt(spec.shear_modulus / spec.density)
    j, ip = section_j_ip(spec.thickness, spec.width)
    return math.sqrt(spec.shear_modulus * float(j) / (spec.density * float(ip)))


# --------------------------------------------------------------------------
# Sections.


class TestTorsionConstant:
    # beta in J = beta b h**3 for b / h: Timoshenko & Goodier sec. 109 table and Roark's table
    # (from memory); the same three-figure values are reproduced in the Oasys GSA documentation,
    # "Rectangular sections" (seen via search).
    TABLE = {1.0: 0.141, 1.2: 0.166, 1.5: 0.196, 2.0: 0.229, 2.5: 0.249, 3.0: 0.263, 4.0: 0.281,
             5.0: 0.291, 10.0: 0.312, math.inf: 0.333}

    @pytest.mark.parametrize("aspect, beta", sorted(TABLE.items()))
    def test_against_published_table(self, aspect, beta):
        got = float(torsion.rectangle_torsion_coefficient(aspect))
        assert got == pytest.approx(beta, abs=5e-4 + 1e-9)  # the table's three figures

    def test_square_four_figures(self):
        # J = 0.1406 a**4 for a square (Timoshenko & Goodier sec. 109, from memory).
        assert float(torsion.rectangle_torsion_coefficient(1.0)) == pytest.approx(0.1406, abs=5e-5)

    @pytest.mark.parametrize("aspect", [1.0, 1.1, 1.37, 2.0, 3.3, 7.0, 25.0, 400.0])
    def test_against_series_summed_term_by_term(self, aspect):
        # The series as printed (term by term, 4000 odd terms: tail < 1e-14).
        assert float(torsion.rectangle_torsion_coefficient(aspect)) == pytest.approx(beta_series(aspect), rel=1e-12)

    @pytest.mark.parametrize("aspect", [1.0, 1.1, 1.5, 2.0, 4.0, 10.0])
    def test_against_roark_approximation(self, aspect):
        # Roark's approximation J = b h^3 [1/3 - 0.21 (h/b)(1 - h^4 / (12 b^4))] (REFERENCES.md,
        # from memory; also piping-designer.com, seen via search): within 0.5 % (measured 0.45 % at 1.1).
        r = 1.0 / aspect
        roark = 1.0 / 3.0 - 0.21 * r * (1.0 - r**4 / 12.0)
        assert float(torsion.rectangle_torsion_coefficient(aspect)) == pytest.approx(roark, rel=5e-3)

    def test_rectangle_either_way_round(self):
        # J depends on the section, not on which side is called the width.
        j1 = torsion.torsion_constant(0.01, section="rectangular", width=0.04)
        j2 = torsion.torsion_constant(0.04, section="rectangular", width=0.01)
        assert float(j1) == pytest.approx(float(j2), rel=1e-14)
        assert float(j1) == pytest.approx(float(section_j_ip(0.01, 0.04)[0]), rel=1e-12)

    def test_round_and_polar(self):
        d = 0.012
        assert float(torsion.torsion_constant(d, section="round")) == pytest.approx(math.pi * d**4 / 32, rel=1e-15)
        assert float(torsion.polar_moment(d, section="round")) == pytest.approx(math.pi * d**4 / 32, rel=1e-15)
        # I_p = I_y + I_z = b h^3 / 12 + h b^3 / 12 (perpendicular-axis theorem).
        b, h = 0.05, 0.02
        ip = torsion.polar_moment(h, section="rectangular", width=b)
        assert float(ip) == pytest.approx(b * h**3 / 12 + h * b**3 / 12, rel=1e-14)


# --------------------------------------------------------------------------
# Uniform bars: closed form.


class TestUniform:
    @pytest.mark.parametrize("spec", [bar(), bar(diameter=0.01, density=7850.0, shear_modulus=79.3e9)],
                             ids=["rosewood-rectangle", "steel-rod"])
    def test_free_free(self, spec):
        # f_n = n c / (2 L), c = sqrt(G J / (rho I_p)) (Graff, Wave Motion in Elastic Solids, sec. 2.3, from memory).
        solution = torsion.solve(spec, 12)
        c = wave_speed_reference(spec)
        expected = np.arange(1, 13) * c / (2 * spec.length)
        np.testing.assert_allclose(solution.frequency_hz, expected, rtol=1e-12)
        assert solution.labels[:3] == ("T1", "T2", "T3")

    def test_clamped_free(self):
        # Clamped at x = 0: f_n = (2n - 1) c / (4 L), shape sin((2n - 1) pi x / (2 L)).
        spec = bar(supports="clamped-free")
        solution = torsion.solve(spec, 8)
        c = wave_speed_reference(spec)
        np.testing.assert_allclose(solution.frequency_hz, (2 * np.arange(1, 9) - 1) * c / (4 * spec.length), rtol=1e-12)
        assert solution.columns["node_positions"][1] == pytest.approx((0.0, 2 / 3))
        assert solution.twist(np.array([0.0]))[0] == pytest.approx(np.zeros(8), abs=1e-12)

    def test_clamped_clamped_and_pinned(self):
        # Both ends held: n c / (2 L) with sin shapes; pinned ends leave the twist free (assumption),
        # so pinned-pinned is free-free in torsion.
        c = wave_speed_reference(bar())
        held = torsion.solve(bar(supports="clamped-clamped"), 5)
        np.testing.assert_allclose(held.frequency_hz, np.arange(1, 6) * c / 0.8, rtol=1e-12)
        assert held.columns["node_positions"][1] == pytest.approx((0.0, 0.5, 1.0))
        pinned = torsion.solve(bar(supports="pinned-pinned"), 5)
        np.testing.assert_allclose(pinned.frequency_hz, np.arange(1, 6) * c / 0.8, rtol=1e-12)
        assert pinned.columns["node_positions"][1] == pytest.approx((0.25, 0.75))

    def test_ceiling(self):
        # Modes stop below 60 kHz: the steel rod's c / (2L) = 3175 Hz gives 18 of them.
        spec = bar(diameter=0.01, density=7850.0, shear_modulus=79.3e9, length=0.5)
        solution = torsion.solve(spec, 100)
        step = math.sqrt(79.3e9 / 7850.0) / 1.0
        assert len(solution.frequency_hz) == int(60e3 // step)
        assert solution.frequency_hz[-1] < 60e3

    def test_real_bar_spec(self):
        # The bar module's own spec works (its section property and fields).
        from synth.resonators.bar import BarSpec

        spec = BarSpec(length=0.4, density=1010.0, youngs_modulus=20e9, shear_modulus=1.6e9, width=0.05, thickness=0.02)
        c = wave_speed_reference(bar())
        assert torsion.solve(spec, 3).frequency_hz[0] == pytest.approx(c / 0.8, rel=1e-12)


# --------------------------------------------------------------------------
# Shaped bars: finite elements.


class TestShaped:
    def test_uniform_profile_matches_closed_form(self):
        # A flat profile through the finite elements against n c / (2 L): 0.02 cent up to T20.
        c = wave_speed_reference(bar())
        for supports, expected in (("free-free", np.arange(1, 21) * c / 0.8),
                                   ("clamped-free", (2 * np.arange(1, 21) - 1) * c / 1.6)):
            solution = torsion.solve(bar(profile=(0.02,) * 5, supports=supports), 20)
            np.testing.assert_allclose(solution.frequency_hz, expected, rtol=0.02 * CENT)

    def test_mesh_convergence_second_order(self):
        # Linear elements with consistent mass: the error of one mesh falls as (element length)**2.
        c = wave_speed_reference(bar())
        expected = np.arange(1, 6) * c / 0.8
        spec = bar()
        errors = []
        for n in (50, 100, 200):
            x = np.linspace(0.0, 0.4, n + 1)
            f = torsion.solve_fe(x, lambda s: np.full(np.shape(s), 0.02), ends=("free", "free"), n_modes=5,
                                 section="rectangular", width=spec.width, shear_modulus=spec.shear_modulus,
                                 density=spec.density)[0]
            errors.append(np.abs(f / expected - 1.0))
        np.testing.assert_allclose(errors[0] / errors[1], 4.0, rtol=0.02)
        np.testing.assert_allclose(errors[1] / errors[2], 4.0, rtol=0.02)

    @pytest.mark.parametrize("ends", [("free", "free"), ("fixed", "free")], ids=["free-free", "clamped-free"])
    def test_linear_taper_against_finite_differences(self, ends):
        # 0.020 m thick at one end to 0.008 m at the other, 0.05 m wide (aspect 2.5 .. 6.25):
        # against the independent finite-difference solution above (20000 cells): 0.02 cent.
        supports = "free-free" if ends == ("free", "free") else "clamped-free"
        spec = bar(profile=(0.020, 0.008), supports=supports)
        reference = fd_frequencies(0.4, lambda x: 0.020 + (0.008 - 0.020) * x / 0.4, 0.05, 1.6e9, 1010.0, 8, ends=ends)
        got = torsion.solve(spec, 8).frequency_hz
        np.testing.assert_allclose(got, reference, rtol=0.02 * CENT)
        # and a taper moves them away from the uniform bar of the mean thickness (the check has teeth)
        uniform = torsion.solve(bar(thickness=0.014, supports=supports), 8).frequency_hz
        assert np.max(np.abs(np.log2(got / uniform))) * 1200 > 20

    def test_undercut_against_finite_differences(self):
        # A marimba-like undercut (thin in the middle), piecewise linear: 0.05 cent.
        profile = (0.02, 0.016, 0.008, 0.008, 0.016, 0.02)
        stations = np.linspace(0.0, 0.4, len(profile))
        reference = fd_frequencies(0.4, lambda x: np.interp(x, stations, profile), 0.05, 1.6e9, 1010.0, 6,
                                   ends=("free", "free"))
        np.testing.assert_allclose(torsion.solve(bar(profile=profile), 6).frequency_hz, reference, rtol=0.05 * CENT)

    def test_modal_mass_and_orthogonality(self):
        # integral rho I_p Theta_m Theta_n dx = bar mass * delta_mn (the bending modes' normalisation).
        profile = (0.020, 0.008)
        solution = torsion.solve(bar(profile=profile), 6)
        x = np.linspace(0.0, 1.0, 40001)
        h = 0.020 + (0.008 - 0.020) * x
        ip = 0.05 * h * (0.05**2 + h**2) / 12.0
        twist = solution.twist(x)
        gram = np.trapezoid(1010.0 * ip[:, None, None] * twist[:, :, None] * twist[:, None, :], x * 0.4, axis=0)
        mass = 1010.0 * 0.05 * 0.014 * 0.4
        np.testing.assert_allclose(gram, mass * np.eye(6), atol=2e-3 * mass)


# --------------------------------------------------------------------------
# Excitation and pickup across the width.


class TestAcross:
    def test_uniform_normalisation(self):
        # Uniform bar: Theta_n = sqrt(A / I_p) sqrt(2) cos(n pi xi), so the edge (across = 1) at a
        # free end moves sqrt(6) b / sqrt(b^2 + h^2); a round rod's surface, 2 (hand arithmetic).
        b, h = 0.05, 0.02
        solution = torsion.solve(bar(), 4)
        assert solution.shape((0.0, 1.0)) == pytest.approx(np.full(4, math.sqrt(6) * b / math.hypot(b, h)), rel=1e-12)
        rod = torsion.solve(bar(diameter=0.01), 4)
        assert rod.shape((1.0, -1.0)) == pytest.approx(-2.0 * np.array([-1.0, 1.0, -1.0, 1.0]), rel=1e-12)
        x = np.linspace(0.0, 1.0, 20001)
        ip = b * h * (b * b + h * h) / 12.0
        modal_mass = np.trapezoid(1010.0 * ip * solution.twist(x) ** 2, x * 0.4, axis=0)
        np.testing.assert_allclose(modal_mass, 1010.0 * b * h * 0.4, rtol=1e-8)

    @pytest.mark.parametrize("spec", [bar(), bar(profile=(0.02, 0.01, 0.02))], ids=["uniform", "shaped"])
    def test_zero_on_centre_line_and_odd(self, spec):
        solution = torsion.solve(spec, 6)
        assert np.all(solution.shape((0.3, 0.0)) == 0.0)
        assert np.all(solution.shape(0.3) == 0.0)  # a bare fraction is on the centre line
        np.testing.assert_allclose(solution.shape((0.3, -0.7)), -solution.shape((0.3, 0.7)), rtol=0, atol=0)
        np.testing.assert_allclose(solution.shape((0.3, 0.7)), 0.7 * solution.shape((0.3, 1.0)), rtol=1e-14)

    def test_torsion_modes_placed(self):
        # Struck at the edge of a free end, heard on the centre line: every torsional mode silent at the pickup.
        modes = torsion.torsion_modes(bar(), excitation_position=(0.0, 1.0), pickup_position=(0.5, 0.0), n_modes=4)
        assert modes.labels == ("T1", "T2", "T3", "T4")
        assert np.all(modes.pickup_shape == 0.0)
        assert np.all(modes.excitation_shape > 0.0)
        heard_anywhere = torsion.torsion_modes(bar(), excitation_position=(0.1, 0.5), pickup_position=None, n_modes=4)
        assert np.all(heard_anywhere.pickup_shape == 1.0)

    @pytest.mark.parametrize("point, message", [((0.5, 1.5), "across=1.5 must be a fraction of the half-width"),
                                                ((1.2, 0.0), "x=1.2 must be a fraction of the length"),
                                                ("edge", "must be a fraction of the length or")])
    def test_bad_points(self, point, message):
        with pytest.raises(ValueError, match=message):
            torsion.torsion_modes(bar(), excitation_position=point, pickup_position=None, n_modes=2)

    def test_bad_supports(self):
        with pytest.raises(ValueError, match="supports='hinged' must be one of free-free, clamped-free"):
            torsion.solve(bar(supports="hinged"), 2)


# --------------------------------------------------------------------------
# Against the bending modes.


def bending_solution(frequency):
    """A stand-in for bar.solve's Solution: B modes, shape 1 everywhere, one bending-only column."""
    n = len(frequency)
    return Solution(
        resonator="bar", frequency_hz=np.asarray(frequency, dtype=float), labels=tuple(f"B{i + 1}" for i in range(n)),
        shape=lambda x: np.ones(n), columns={"n_nodes": tuple(range(2, n + 2)), "timoshenko_shift_cents": (-1.0,) * n},
        parameters={"length_m": 0.4},
    )


class TestCentsFromBending:
    def test_simple_case(self):
        # Hand arithmetic: 450 Hz is 1200 log2(450 / 400) = +203.91 cents from 400 Hz (nearer than 1100 Hz,
        # 1200 log2(1100 / 450) = 1547.6); 1000 Hz is 1200 log2(1000 / 1100) = -165.00 cents from 1100 Hz.
        cents, nearest = torsion.cents_from_nearest([450.0, 1000.0], [100.0, 400.0, 1100.0])
        np.testing.assert_allclose(cents, [203.910, -165.004], atol=1e-3)
        assert nearest.tolist() == [1, 2]

    def test_warning_names_close_tuned_modes_only(self):
        # 2 cents above B2 is called out; 10 cents from B5 is not (B5 is not a tuned partial: the lowest three are).
        bending = [100.0, 400.0, 1000.0, 1800.0, 2800.0]
        twist = [400.0 * 2 ** (2 / 1200), 700.0, 2800.0 * 2 ** (10 / 1200)]
        warnings = torsion.near_flexural_warnings(("T1", "T2", "T3"), twist, tuple(f"B{i}" for i in range(1, 6)), bending)
        assert len(warnings) == 1
        assert "T1 +2 cents from B2" in warnings[0] and "T3" not in warnings[0]
        assert torsion.near_flexural_warnings(("T1",), [700.0], ("B1", "B2"), [100.0, 400.0]) == []

    def test_with_torsion_merges_by_frequency(self):
        # The rosewood bar's T1 = c / (2L) sits between two stand-in bending modes.
        t1 = wave_speed_reference(bar()) / 0.8
        bending = bending_solution([300.0, 1.02 * t1, 4000.0])
        twist = torsion.solve(bar(), 3)
        merged = torsion.with_torsion(bending, twist)
        assert merged.labels[:3] == ("B1", "T1", "B2")
        assert np.all(np.diff(merged.frequency_hz) > 0)
        # on the centre line the torsional modes are silent and the bending modes unchanged
        centre = merged.shape(0.25)
        assert centre[list(merged.labels).index("T1")] == 0.0
        assert centre[0] == 1.0
        off = merged.shape((0.0, 1.0))
        assert off[1] == pytest.approx(twist.shape((0.0, 1.0))[0])
        # columns run on: bending-only ones hold None for torsional modes; cents from the nearest bending mode
        assert merged.columns["timoshenko_shift_cents"][1] is None
        assert merged.columns["n_nodes"][1] == 1
        assert merged.columns["nearest_bending"][1] == "B2"
        assert merged.columns["cents_from_bending"][1] == pytest.approx(-1200 * math.log2(1.02), abs=1e-6)
        assert merged.columns["cents_from_bending"][0] is None
        assert merged.parameters["torsion_modes"] == 3 and merged.parameters["length_m"] == 0.4
        assert any("T1 -34 cents from B2" in w for w in merged.warnings)

    def test_with_torsion_keeps_lowest(self):
        # Both families solved for 3 modes, the lowest 3 kept: every mode below the third one.
        t1 = wave_speed_reference(bar()) / 0.8
        merged = torsion.with_torsion(bending_solution([300.0, 1.5 * t1, 9.0 * t1]), torsion.solve(bar(), 3), max_modes=3)
        assert merged.labels == ("B1", "T1", "B2")
        assert merged.parameters["torsion_modes"] == 1
        assert merged.parameters["bending_fundamental_hz"] == 300.0
        assert all(len(v) == 3 for v in merged.columns.values())


class TestCountBelow:
    def test_uniform_exact_and_shaped_bound(self):
        # Uniform: n c / (2L) < limit counted by hand; shaped: never fewer than the modes really below.
        c = wave_speed_reference(bar())
        assert torsion.count_below(bar(), 10_000.0) == math.ceil(10_000.0 / (c / 0.8)) - 1
        shaped = bar(profile=(0.02, 0.008, 0.02))
        solved = torsion.solve(shaped, 60).frequency_hz
        assert torsion.count_below(shaped, 10_000.0) >= np.count_nonzero(solved < 10_000.0)


def test_docstring_examples():
    import doctest

    failures, _ = doctest.testmod(torsion, optionflags=doctest.ELLIPSIS)
    assert failures == 0
