"""Bar physics held against published values, the undercut tuner, renders and bad input.

Every reference below is computed in this file from the published frequency
equation (brentq on cos x cosh x = +-1, the Timoshenko quadratic, an exact
Timoshenko boundary-value determinant written out here), never by calling the
module under test for the expected value; each check names its source.
Values marked [C] in ../shared/REFERENCES.md were computed independently and
are quoted as literals.
"""
from __future__ import annotations

import json
import math
import re
import textwrap
from dataclasses import replace

import numpy as np
import pytest
from scipy.optimize import brentq

from synth import PatchError, partial_table, patch_from_text
from synth.cli import main
from pathlib import Path

from synth.materials import MATERIALS
from synth.patch import load_patch
from synth.resonators import bar_fe
from synth.resonators.bar import (
    BarSpec,
    UnreachablePitch,
    bar_modes,
    retune,
    solve_length,
)
from synth.tuning import TuningError, parse_ratios, tune_undercut, undercut_profile

from .analysis import measured_t60, peak_near, read_wav
from .cli_checks import error_line
from .cli_checks import run_cli as run

REPO = Path(__file__).resolve().parents[1]

# --------------------------------------------------------------------------
# Independent references.


def beam_root(sign, n):
    """n-th root of cos x cosh x = sign (Blevins 1979 table 8-1; Thomson App. D), by brentq."""
    guess = (n + 0.5) * math.pi if sign > 0 else (n - 0.5) * math.pi
    return brentq(lambda x: math.cos(x) * math.cosh(x) - sign, guess - 0.7, guess + 0.7, xtol=1e-14)


def roots(supports, n):
    if supports == "pinned-pinned":
        return np.arange(1, n + 1) * math.pi
    sign = -1 if supports == "clamped-free" else 1
    return np.array([beam_root(sign, k) for k in range(1, n + 1)])


def thin_bar_hz(beta_l, *, length, radius, youngs, rho):
    """omega_n = (beta_n L)^2 / L^2 sqrt(EI / rho A), sqrt(I / A) = r (REFERENCES.md sec. 4)."""
    return np.asarray(beta_l) ** 2 / length**2 * radius * math.sqrt(youngs / rho) / (2 * math.pi)


def timoshenko_det(omega, *, supports, length, youngs, shear, kappa, rho, radius):
    """Boundary determinant of the uniform Timoshenko beam at angular frequency omega.

    Written out from the Timoshenko equations (Timoshenko 1921; Han, Benaroya &
    Wei 1999, J. Sound Vib. 225:935, sec. 5), per unit area (A = 1, I = r^2):
    kGA (w'' - t') + rho A w^2 w = 0, EI t'' + kGA (w' - t) + rho I w^2 t = 0.
    Below the cut-off frequency the solutions are cosh, sinh (alpha) and
    cos, sin (beta); clamped: w = t = 0; pinned: w = t' = 0; free: t' = 0,
    w' - t = 0.
    """
    area, inertia = 1.0, radius**2
    kga, ei, w2 = kappa * shear * area, youngs * inertia, omega**2
    a, b, c = ei * kga, w2 * rho * (kga * inertia + area * ei), rho * area * w2 * (rho * inertia * w2 - kga)
    disc = math.sqrt(b * b - 4 * a * c)
    alpha, beta = math.sqrt((-b + disc) / (2 * a)), math.sqrt((b + disc) / (2 * a))
    ra = (kga * alpha**2 + rho * area * w2) / (kga * alpha)
    q = (rho * area * w2 - kga * beta**2) / (kga * beta)
    rows = []
    for end, x in zip(supports.split("-"), (0.0, length)):
        ch, sh, co, si = math.cosh(alpha * x), math.sinh(alpha * x), math.cos(beta * x), math.sin(beta * x)
        w = np.array([ch, sh, co, si])
        t = np.array([ra * sh, ra * ch, q * si, -q * co])
        dw = np.array([alpha * sh, alpha * ch, -beta * si, beta * co])
        dt = np.array([ra * alpha * ch, ra * alpha * sh, q * beta * co, q * beta * si])
        rows += {"clamped": [w, t], "pinned": [w, dt], "free": [dt, dw - t]}[end]
    m = np.array(rows)
    return np.linalg.det(m / np.max(np.abs(m), axis=1, keepdims=True))


def timoshenko_exact_hz(n, top_hz, **beam):
    """First n roots of timoshenko_det below top_hz (a 2 Hz scan, then brentq)."""
    def det(f):
        return timoshenko_det(2 * math.pi * f, **beam)

    grid = np.arange(5.0, top_hz, 2.0)
    values = np.array([det(f) for f in grid])
    index = np.flatnonzero(np.sign(values[:-1]) != np.sign(values[1:]))[:n]
    return np.array([brentq(det, grid[i], grid[i + 1], xtol=1e-9) for i in index])


def closed_form_shape(supports, beta_l, xi):
    """Classical thin-bar mode shape (Blevins 1979 table 8-1), direct (unscaled) form."""
    z = beta_l * np.asarray(xi)
    if supports == "pinned-pinned":
        return np.sin(z)
    if supports == "clamped-free":
        s = (math.sinh(beta_l) - math.sin(beta_l)) / (math.cosh(beta_l) + math.cos(beta_l))
        return np.cosh(z) - np.cos(z) - s * (np.sinh(z) - np.sin(z))
    s = (math.cosh(beta_l) - math.cos(beta_l)) / (math.sinh(beta_l) - math.sin(beta_l))
    if supports == "free-free":
        return np.cosh(z) + np.cos(z) - s * (np.sinh(z) + np.sin(z))
    return np.cosh(z) - np.cos(z) - s * (np.sinh(z) - np.sin(z))


# The 6061 example of REFERENCES.md sec. 4: L = 0.30, h = 0.01, E = 68.9 GPa, rho = 2700.
AL = dict(density=2700.0, youngs_modulus=68.9e9, shear_modulus=68.9e9 / 2.66, poisson_ratio=0.33)
# The Timoshenko example of REFERENCES.md sec. 4: steel 50 x 50 mm, L = 0.5, nu = 0.3.
STEEL = dict(density=7850.0, youngs_modulus=200e9, shear_modulus=200e9 / 2.6, poisson_ratio=0.3)
# A rosewood blank (materials table) with a wood-like low shear modulus (about E/12, assumed).
ROSEWOOD = dict(density=MATERIALS["rosewood"].density, youngs_modulus=MATERIALS["rosewood"].youngs_modulus,
                shear_modulus=1.6e9, poisson_ratio=0.35)
SUPPORTS = ("free-free", "clamped-free", "pinned-pinned", "clamped-clamped")


def _bar(**values):
    base = dict(length=0.3, width=0.03, thickness=0.01, theory="euler-bernoulli", **AL)
    base.update(values)
    return BarSpec(**base)


def _modes(spec, n=8, x0=0.2, xp=None):
    return bar_modes(spec, excitation_position=x0, pickup_position=xp, n_modes=n)


def _cents(a, b):
    return 1200 * np.log2(np.asarray(a) / np.asarray(b))


# --------------------------------------------------------------------------
# Euler-Bernoulli closed forms.


class TestBeamRoots:
    def test_thomson_appendix_d(self):
        # Thomson, Theory of Vibration with Applications, App. D [S]: CC (= FF)
        # 4.7300 / 7.8532 / 10.9956, ratios 2.7565 / 5.4039; CF 1.8751 / 4.6941 /
        # 7.8548, ratios 6.2669 / 17.5475.
        np.testing.assert_allclose(roots("free-free", 3), [4.7300, 7.8532, 10.9956], atol=5e-5)
        np.testing.assert_allclose(roots("clamped-free", 3), [1.8751, 4.6941, 7.8548], atol=5e-5)
        for supports, ratios in (("free-free", [2.7565, 5.4039]), ("clamped-clamped", [2.7565, 5.4039]),
                                 ("clamped-free", [6.2669, 17.5475])):
            f = _modes(_bar(supports=supports), n=3).frequency_hz
            np.testing.assert_allclose(f[1:] / f[0], ratios, atol=5e-4)

    @pytest.mark.parametrize("supports", SUPPORTS)
    def test_frequencies_from_the_frequency_equation(self, supports):
        # REFERENCES.md sec. 4 table: omega_n = (beta_n L)^2 / L^2 sqrt(EI / rho A), rectangle r = h / sqrt(12).
        f = _modes(_bar(supports=supports), n=10).frequency_hz
        expected = thin_bar_hz(roots(supports, 10), length=0.3, radius=0.01 / math.sqrt(12), youngs=68.9e9, rho=2700)
        np.testing.assert_allclose(f, expected, rtol=1e-12)

    def test_6061_worked_example(self):
        # [C] REFERENCES.md sec. 4: free-free 6061 bar -> 576.96, 1590.41, 3117.84 Hz.
        f = _modes(_bar(), n=3).frequency_hz
        np.testing.assert_allclose(f, [576.96, 1590.41, 3117.84], atol=0.006)

    def test_round_rod(self):
        # Round section: sqrt(I / A) = d / 4 (I = pi d^4 / 64, A = pi d^2 / 4).
        spec = _bar(width=None, thickness=None, diameter=0.012, supports="clamped-free")
        expected = thin_bar_hz(roots("clamped-free", 5), length=0.3, radius=0.003, youngs=68.9e9, rho=2700)
        np.testing.assert_allclose(_modes(spec, n=5).frequency_hz, expected, rtol=1e-12)

    def test_width_does_not_change_frequencies(self):
        # Bending across the thickness: f depends on h, not on the width (EI / rho A = E h^2 / 12 rho).
        np.testing.assert_allclose(_modes(_bar(width=0.06)).frequency_hz, _modes(_bar()).frequency_hz, rtol=1e-14)


class TestShapes:
    @pytest.mark.parametrize("supports", SUPPORTS)
    def test_mass_normalised(self, supports):
        # Common modal mass: integral of rho A phi^2 = the bar's mass, i.e. mean phi^2 = 1 on a uniform bar.
        spec = _bar(supports=supports)
        x = np.linspace(0, 1, 401)
        phi = np.array([_modes(spec, n=4, x0=xi).excitation_shape for xi in x])
        mean_square = np.trapezoid(phi**2, x, axis=0)
        np.testing.assert_allclose(mean_square, 1.0, rtol=2e-4)

    @pytest.mark.parametrize("supports", SUPPORTS)
    def test_nodes_match_the_closed_form(self, supports):
        # Nodes: zeros of the classical shapes (Blevins table 8-1), found here by brentq.
        modes = _modes(_bar(supports=supports), n=4)
        for k, beta_l in enumerate(roots(supports, 4)):
            reported = np.array(modes.columns["node_positions"][k])
            interior = reported[(reported > 0) & (reported < 1)]
            grid = np.linspace(1e-3, 1 - 1e-3, 4001)
            v = closed_form_shape(supports, beta_l, grid)
            i = np.flatnonzero(v[:-1] * v[1:] < 0)
            expected = [brentq(lambda s: closed_form_shape(supports, beta_l, s), grid[j], grid[j + 1]) for j in i]
            np.testing.assert_allclose(interior, expected, atol=2e-5)
            ends = [e != "free" for e in supports.split("-")]
            assert (reported[0] == 0.0) == ends[0] and (reported[-1] == 1.0) == ends[1]

    def test_suspension_points(self):
        # Rossing (Science of Percussion Instruments, ch. 4, from memory; common practice): a free-free
        # bar is hung at the nodes of its first mode, 0.224 L from each end.
        modes = _modes(_bar(length=0.4), n=3)
        np.testing.assert_allclose(modes.parameters["suspension_points_m"], [0.224 * 0.4, 0.776 * 0.4], atol=3e-4)
        assert modes.labels[:3] == ("B1", "B2", "B3")

    def test_strike_on_a_node_silences_the_mode(self):
        # A strike at the centre of a free-free bar: the antisymmetric B2 has a node there.
        modes = _modes(_bar(), n=4, x0=0.5)
        assert abs(modes.excitation_shape[1]) < 1e-9 * abs(modes.excitation_shape[0])


# --------------------------------------------------------------------------
# Timoshenko.


class TestTimoshenko:
    def test_pinned_pinned_table(self):
        # [C] REFERENCES.md sec. 4 (Timoshenko 1921; Han, Benaroya & Wei 1999), kappa = 5/6:
        # 450.24 / 1720.56 / 3624.89 / 5967.65 Hz for steel 50 x 50 mm, L = 0.5, pinned-pinned.
        spec = BarSpec(length=0.5, width=0.05, thickness=0.05, supports="pinned-pinned", **STEEL)
        table = [450.24, 1720.56, 3624.89, 5967.65]
        np.testing.assert_allclose(_modes(spec, n=4).frequency_hz, table, atol=0.006)
        # The finite-element path on a flat profile: within 0.01% of the exact values.
        shaped = replace(spec, thickness=None, profile=(0.05, 0.05, 0.05))
        np.testing.assert_allclose(_modes(shaped, n=4).frequency_hz, table, rtol=1e-4)
        # Thin-bar values of the same table: 457.76, 1831.05, 4119.85, 7324.19 Hz.
        thin = _modes(replace(spec, theory="euler-bernoulli"), n=4).frequency_hz
        np.testing.assert_allclose(thin, [457.76, 1831.05, 4119.85, 7324.19], atol=0.006)

    def test_exact_determinant_reproduces_the_table(self):
        # The determinant written out in this file against the same [C] table: it is a fair referee.
        beam = dict(supports="pinned-pinned", length=0.5, youngs=200e9, shear=200e9 / 2.6, kappa=5 / 6,
                    rho=7850, radius=0.05 / math.sqrt(12))
        np.testing.assert_allclose(timoshenko_exact_hz(4, 6500, **beam), [450.24, 1720.56, 3624.89, 5967.65], atol=0.006)

    @pytest.mark.parametrize("supports", ["free-free", "clamped-free", "clamped-clamped"])
    def test_other_supports_against_exact_determinant(self, supports):
        spec = BarSpec(length=0.5, width=0.05, thickness=0.05, supports=supports, **STEEL)
        beam = dict(supports=supports, length=0.5, youngs=200e9, shear=200e9 / 2.6, kappa=5 / 6, rho=7850,
                    radius=0.05 / math.sqrt(12))
        exact = timoshenko_exact_hz(4, 7500, **beam)
        # Uniform path (closed form x finite-element ratio) and the flat-profile finite-element path:
        # both within 0.01% (0.17 cents) of the exact Timoshenko frequencies.
        np.testing.assert_allclose(_modes(spec, n=4).frequency_hz, exact, rtol=1e-4)
        shaped = replace(spec, thickness=None, profile=(0.05,) * 5)
        np.testing.assert_allclose(_modes(shaped, n=4).frequency_hz, exact, rtol=1e-4)

    def test_lowers_upper_modes_and_says_so(self):
        # Shear and rotary inertia lower every mode, the upper ones most (Han et al. 1999).
        modes = _modes(_bar(theory="timoshenko"), n=6)
        shift = np.array(modes.columns["timoshenko_shift_cents"])
        assert np.all(shift < 0) and np.all(np.diff(shift) < 0)
        thin = _modes(_bar(), n=6).frequency_hz
        np.testing.assert_allclose(_cents(modes.frequency_hz, thin), shift, atol=1e-6)
        # Applied by default, so it is a report note, not a warning.
        assert "B2" in modes.parameters["shear_correction"]
        assert not any("Timoshenko" in w for w in modes.warnings)

    def test_thin_bar_has_no_warning(self):
        # A 3 mm thick, 400 mm bar: the correction stays under 5 cents for the first modes.
        modes = _modes(_bar(theory="timoshenko", thickness=0.003, length=0.4), n=3)
        assert max(abs(s) for s in modes.columns["timoshenko_shift_cents"]) < 5
        assert modes.warnings == ()

    def test_thin_theory_on_a_thick_bar_warns(self):
        modes = _modes(_bar(), n=4)
        assert any("euler-bernoulli ignores shear" in w for w in modes.warnings)


# --------------------------------------------------------------------------
# Shaped bars: the finite-element solver.


class TestShapedBar:
    @pytest.mark.parametrize("supports", SUPPORTS)
    def test_flat_profile_matches_closed_form(self, supports):
        # (a) A flat profile through the finite elements gives the closed form within 0.01%.
        uniform = _modes(_bar(supports=supports), n=8)
        shaped = _modes(_bar(supports=supports, thickness=None, profile=(0.01,) * 9), n=8)
        np.testing.assert_allclose(shaped.frequency_hz, uniform.frequency_hz, rtol=1e-4)
        np.testing.assert_allclose(shaped.excitation_shape, uniform.excitation_shape, atol=2e-4)
        assert shaped.parameters["mass_kg"] == pytest.approx(uniform.parameters["mass_kg"], rel=1e-12)

    @pytest.mark.parametrize("theory", ["timoshenko", "euler-bernoulli"])
    @pytest.mark.parametrize("shape", ["undercut", "taper"])
    def test_mesh_convergence(self, theory, shape):
        # (b) The mesh the module picks for 5 modes against one at least four times finer: first 5 modes within 0.1%.
        if shape == "undercut":
            profile = tuple(undercut_profile(0.02, 0.65, 0.24, exponent=4, n_points=41))
        else:
            profile = tuple(np.linspace(0.02, 0.008, 11))
        spec = BarSpec(length=0.35, width=0.05, profile=profile, theory=theory, **ROSEWOOD)
        got = _modes(spec, n=5).frequency_hz
        kappa = 5 / 6
        fine = bar_fe.spec_modes(spec, 0.35, 60, theory == "timoshenko", kappa)
        assert len(fine[3]) - 1 >= 4 * bar_fe.element_count(5, len(profile) - 1)
        np.testing.assert_allclose(got, fine[0][:5], rtol=1e-3)

    def test_mass_normalised(self):
        # Common modal mass on a shaped bar: integral of rho A phi^2 dx = mass, i.e.
        # integral of h phi^2 dxi = mean h (thin-bar theory: no rotary inertia in the mass).
        profile = (0.02, 0.012, 0.008, 0.012, 0.02)
        spec = BarSpec(length=0.35, width=0.05, profile=profile, theory="euler-bernoulli", **ROSEWOOD)
        x = np.linspace(0, 1, 321)
        phi = np.array([_modes(spec, n=4, x0=xi).excitation_shape for xi in x])
        h = np.interp(x, np.linspace(0, 1, 5), profile)
        mean_h = np.trapezoid(h, x)
        np.testing.assert_allclose(np.trapezoid(h[:, None] * phi**2, x, axis=0) / mean_h, 1.0, rtol=5e-4)

    def test_symmetric_profile_symmetric_modes(self):
        # A symmetric undercut keeps B2 antisymmetric: a node at the centre.
        profile = tuple(undercut_profile(0.02, 0.5, 0.3, exponent=2, n_points=21))
        modes = _modes(BarSpec(length=0.35, width=0.05, profile=profile, **ROSEWOOD), n=3)
        assert 0.5 == pytest.approx(modes.columns["node_positions"][1][1], abs=1e-6)
        assert modes.parameters["thinnest_m"] == pytest.approx(0.01)

    def test_undercut_lowers_the_fundamental_most(self):
        # Common practice (marimba makers): thinning the middle lowers B1 far more than B2, B3.
        uniform = _modes(BarSpec(length=0.35, width=0.05, thickness=0.02, **ROSEWOOD), n=3).frequency_hz
        profile = tuple(undercut_profile(0.02, 0.5, 0.25, exponent=4, n_points=41))
        cut = _modes(BarSpec(length=0.35, width=0.05, profile=profile, **ROSEWOOD), n=3).frequency_hz
        drop = uniform / cut
        assert drop[0] > drop[1] > 1 and drop[0] > drop[2] > 1


# --------------------------------------------------------------------------
# Pitch: the length is solved.


class TestPitch:
    @pytest.mark.parametrize("supports", SUPPORTS)
    @pytest.mark.parametrize("theory", ["timoshenko", "euler-bernoulli"])
    def test_lowest_mode_on_pitch(self, supports, theory):
        spec = retune(_bar(supports=supports, theory=theory), 440.0)
        assert _modes(spec, n=3).frequency_hz[0] == pytest.approx(440.0, rel=1e-10)

    def test_thin_bar_length_closed_form(self):
        # f1 = beta1^2 h sqrt(E / 12 rho) / (2 pi L^2)  =>  L = beta1 sqrt(h sqrt(E / 12 rho) / (2 pi f1)).
        beta = beam_root(1, 1)
        expected = beta * math.sqrt(0.01 * math.sqrt(68.9e9 / (12 * 2700)) / (2 * math.pi * 440.0))
        assert solve_length(_bar(), 440.0) == pytest.approx(expected, rel=1e-10)

    def test_shaped_bar_on_pitch_keeps_profile(self):
        profile = tuple(undercut_profile(0.02, 0.6, 0.25, exponent=4, n_points=21))
        spec = retune(BarSpec(length=0.4, width=0.05, profile=profile, **ROSEWOOD), 196.0)
        modes = _modes(spec, n=4)
        assert modes.frequency_hz[0] == pytest.approx(196.0, rel=1e-10)
        assert spec.profile == profile and modes.parameters["length_solved"] is True

    def test_unreachable(self):
        # A 40 mm wide bar cannot be shorter than 80 mm (twice its width) and stay a bar.
        with pytest.raises(UnreachablePitch, match=r"above what this bar can reach"):
            solve_length(_bar(width=0.04, thickness=0.02), 20000.0)


# --------------------------------------------------------------------------
# The undercut tuner.


class TestTuner:
    @pytest.mark.parametrize("blank", ["rosewood", "aluminium"])
    def test_reaches_marimba_ratios(self, blank):
        # 1:4:10: common practice for marimba / vibraphone bars (REFERENCES.md sec. 4).
        if blank == "rosewood":
            spec = BarSpec(length=0.4, width=0.05, thickness=0.02, **ROSEWOOD)
        else:
            spec = BarSpec(length=0.4, width=0.038, thickness=0.0127, **AL)
        spec = retune(spec, 349.23)  # F4
        tuning = tune_undercut(spec, (1, 4, 10), n_points=31)
        assert max(abs(c) for c in tuning.cents_error) < 1.0
        # Independently of the tuner's report: the tuned spec through the modes path.
        f = _modes(tuning.spec, n=4).frequency_hz
        assert f[0] == pytest.approx(349.23, rel=1e-9)
        np.testing.assert_allclose(_cents(f[1:3] / f[0], [4, 10]), 0, atol=1.0)
        assert len(tuning.spec.profile) == 31 and min(tuning.spec.profile) < 0.02

    def test_parse_ratios(self):
        assert parse_ratios("1:4:10") == (1, 4, 10)
        assert parse_ratios("2:6:12") == (1, 3, 6)
        for bad in ("1:4", "a:b:c", "1:4:3", "0:4:10", "1:4:10:20"):
            with pytest.raises(TuningError):
                parse_ratios(bad)

    def test_cli_round_trip(self, write_patch, tmp_path, capsys):
        """tune-bar writes a patch whose own report (a separate load and solve) shows 1:4:10."""
        blank = write_patch(BLANK)
        out = tmp_path / "tuned.yaml"
        assert main(["tune-bar", str(blank), "--ratios", "1:4:10", "--points", "21", "-o", str(out)]) == 0
        printed = capsys.readouterr().out
        assert "B3" in printed and f"wrote {out}" in printed
        assert main(["modes", str(out), "--json"]) == 0
        report = json.loads(capsys.readouterr().out)
        assert report["name"] == "test-blank-tuned"
        ratios = [m["ratio"] for m in report["modes"][:3]]
        np.testing.assert_allclose(_cents(ratios, [1, 4, 10]), 0, atol=2.0)
        assert "thickness" not in out.read_text() and report["parameters"]["profile_points"] == 21
        assert report["fundamental_hz"] == pytest.approx(523.2511, abs=1e-3)  # C5

    def test_cli_prints_profile_without_output(self, write_patch, capsys):
        # 1:3:6: common practice for xylophone bars (REFERENCES.md sec. 4).
        blank = write_patch(BLANK)
        assert main(["tune-bar", str(blank), "--ratios", "1:3:6", "--points", "11"]) == 0
        out = capsys.readouterr().out
        assert out.count(" mm\n") == 11 and "profile:" in out


# --------------------------------------------------------------------------
# Closed loop: the rendered audio does what the report says.

CHIME = """\
name: loop-bar
resonator:
  type: bar
  material: aluminium-6061
  width: 25 mm
  thickness: 6 mm
  pitch: {pitch}
excitation:
  type: strike
  position: 0.07
  contact_time: 0.2 ms
pickup:
  position: 0.41
damping:
  t60: 1.2 s
  t60_high: 0.4 s
  high_frequency: 5 kHz
render:
  duration: 1.0 s
  sample_rate: 16000
  max_modes: 16
"""


def _report_and_audio(write_patch, tmp_path, capsys, text):
    patch = write_patch(text)
    assert main(["modes", str(patch), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    out = tmp_path / "loop.wav"
    assert main(["render", str(patch), "-o", str(out), "--quiet"]) == 0
    signal, rate = read_wav(out)
    return report, signal, rate


def test_closed_loop_peaks(write_patch, tmp_path, capsys):
    report, signal, rate = _report_and_audio(write_patch, tmp_path, capsys, CHIME.format(pitch="E5"))
    loud = [m for m in report["modes"] if m["level_db"] is not None and m["level_db"] > -40]
    assert [m["label"] for m in loud[:3]] == ["B1", "B2", "B3"]
    head = signal[: rate // 2]
    for mode in loud:
        found = peak_near(head, rate, mode["frequency_hz"], search_hz=20.0)
        # 0.5 Hz: 0.5 s Hann window, 8x padding and parabolic interpolation (as for the string).
        assert found == pytest.approx(mode["frequency_hz"], abs=0.5), mode["label"]
    # Inharmonic: B2 sits near 2.76 x B1 in the audio, not at a harmonic.
    assert peak_near(head, rate, 2.74 * report["fundamental_hz"], search_hz=30.0) / report["fundamental_hz"] > 2.7


def test_closed_loop_decay(write_patch, tmp_path, capsys):
    report, signal, rate = _report_and_audio(write_patch, tmp_path, capsys, CHIME.format(pitch="E5"))
    for mode in report["modes"][:2]:
        t60 = measured_t60(signal, rate, mode["frequency_hz"], start_s=0.05, stop_s=0.8)
        # 3%: the fit spans over 30 dB of clean exponential decay.
        assert t60 == pytest.approx(mode["t60_s"], rel=0.03), mode["label"]


def test_closed_loop_undercut_bar(tmp_path, capsys):
    """The example undercut patch: peaks at 1 : 4 : 10 in the audio."""
    from pathlib import Path

    patch = Path(__file__).resolve().parents[1] / "patches" / "bar-rosewood-undercut-c4.yaml"
    out = tmp_path / "uc.wav"
    assert main(["render", str(patch), "-o", str(out), "-q", "--duration", "1", "--sample-rate", "16000"]) == 0
    signal, rate = read_wav(out)
    f1 = 261.6256  # C4, the patch's pitch
    for ratio in (1, 4, 10):
        found = peak_near(signal[: rate // 2], rate, ratio * f1, search_hz=15.0)
        assert abs(_cents(found, ratio * f1)) < 3.0, ratio


# --------------------------------------------------------------------------
# Bad input: one line, exit status 2, nothing written.

BASE = """\
name: test-bar
resonator:
  type: bar
  material: aluminium-6061
  width: 30 mm
  thickness: 10 mm
  length: 300 mm
  supports: free-free
excitation:
  type: strike
  position: 0.1
pickup:
  position: 0.5
render:
  duration: 0.2 s
  sample_rate: 8000
"""

BLANK = """\
name: test-blank
resonator:
  type: bar
  material: rosewood
  width: 40 mm
  thickness: 16 mm
  pitch: C5
  shear_modulus: 1.6 GPa
render:
  duration: 0.2 s
  sample_rate: 16000  # B3 of a 1:4:10 C5 bar is at 5.2 kHz
"""


def _mutate(old, new, text=BASE):
    assert text.count(old) == 1, old
    return text.replace(old, new)






def written(folder):
    return sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*"))


PROFILE_3 = "  profile: [10 mm, 6 mm, 10 mm]"

BAD_PATCHES = [
    pytest.param(_mutate("  width: 30 mm", "  width: 30 mm\n  diameter: 10 mm"), "resonator.width", 5,
                 r"give width and thickness \(rectangular bar\) or diameter \(round rod\), not both", id="diameter-and-width"),
    pytest.param(_mutate("  thickness: 10 mm", "  thickness: 10 mm\n" + PROFILE_3), "resonator.profile", 7,
                 r"give thickness \(uniform bar\) or profile \(shaped bar\), not both", id="thickness-and-profile"),
    pytest.param(_mutate("  thickness: 10 mm\n", ""), "resonator.width", 5,
                 r"needs thickness \(uniform\) or profile \(shaped\) as well as width", id="width-alone"),
    pytest.param(_mutate("  width: 30 mm\n", ""), "resonator.thickness", 5, r"needs width as well", id="thickness-alone"),
    pytest.param(_mutate("  width: 30 mm\n  thickness: 10 mm\n", ""), "resonator", 2,
                 r"give width and thickness \(rectangular bar\), width and profile \(shaped bar\) or diameter",
                 id="no-section"),
    pytest.param(_mutate("  thickness: 10 mm", "  profile: [10 mm, 0 mm, 10 mm]"), "resonator.profile", 6,
                 r"point 2 of 3 is '0 mm': every thickness must be > 0", id="profile-zero"),
    pytest.param(_mutate("  thickness: 10 mm", "  profile: [10 mm, 8 mm, -2 mm]"), "resonator.profile", 6,
                 r"point 3 of 3 is '-2 mm': every thickness must be > 0", id="profile-negative"),
    pytest.param(_mutate("  thickness: 10 mm", "  profile: [10 mm]"), "resonator.profile", 6,
                 r"needs at least 2 points \(thicknesses at evenly spaced points", id="profile-one-point"),
    pytest.param(_mutate("  thickness: 10 mm", "  profile: 10 mm"), "resonator.profile", 6,
                 r"must be a list of thicknesses at evenly spaced points", id="profile-not-list"),
    pytest.param(_mutate("  thickness: 10 mm", "  profile: [10 mm, thick, 10 mm]"), "resonator.profile", 6,
                 r"point 2 of 3: cannot read 'thick' as a number", id="profile-text"),
    pytest.param(_mutate("  thickness: 10 mm", "  profile: [10 kg, 8 mm]"), "resonator.profile", 6,
                 r"point 1 of 2: unit 'kg' is not allowed", id="profile-unit"),
    pytest.param(_mutate("  thickness: 10 mm", "  thickness: 0 mm"), "resonator.thickness", 6,
                 r"must be > 0", id="zero-thickness"),
    pytest.param(_mutate("  position: 0.1", "  position: 1.2"), "excitation.position", 11,
                 r"must be <= 1, got 1\.2 \(a fraction of the length, 0\.\.1\)", id="excitation-off-the-bar"),
    pytest.param(_mutate("  position: 0.5", "  position: -0.3"), "pickup.position", 13,
                 r"must be >= 0, got -0\.3 \(a fraction of the length", id="pickup-off-the-bar"),
    pytest.param(_mutate("  length: 300 mm", "  pitch: 30 kHz"), "resonator.pitch", 7,
                 r"pitch 30000 Hz is above what this bar can reach \(about [\d.]+ Hz at 60 mm, 2 x its largest", id="pitch-unreachable"),
    pytest.param(_mutate("  length: 300 mm", "  length: 300 mm\n  pitch: A4"), "resonator.pitch", 8,
                 r"give length or pitch \(which solves the length\), not both", id="length-and-pitch"),
    pytest.param(_mutate("  length: 300 mm\n", ""), "resonator", 2, r"give length, or pitch \(which solves the length\)$",
                 id="neither-length-nor-pitch"),
    pytest.param(_mutate("  length: 300 mm", "  length: 50 mm"), "resonator.length", 7,
                 r"under 2 x the largest cross-section dimension \(30 mm\): too stubby", id="too-short"),
    pytest.param(_mutate("  supports: free-free", "  supports: free"), "resonator.supports", 8,
                 r"'free' is not allowed; did you mean 'free-free'\?", id="supports"),
    pytest.param(_mutate("  material: aluminium-6061", "  material: {density: 2700, youngs_modulus: 0}"),
                 "resonator.material", 4, r"needs a material with youngs_modulus > 0", id="zero-modulus"),
    pytest.param(_mutate("  supports: free-free", "  supports: free-free\n  theory: euler"), "resonator.theory", 9,
                 r"'euler' is not allowed.*\(allowed: timoshenko, euler-bernoulli\)", id="theory"),
]


@pytest.mark.parametrize(("text", "key", "line", "phrase"), BAD_PATCHES)
def test_bad_patch(tmp_path, monkeypatch, capsys, text, key, line, phrase):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "patch.yaml").write_text(text)
    for argv in (["render", "patch.yaml", "-o", "out.wav"], ["modes", "patch.yaml"], ["render", "patch.yaml"]):
        status, out, err = run(capsys, *argv)
        message = error_line(err)
        assert status == 2 and out == ""
        assert message.startswith(f"synth: error: patch.yaml:{line}: {key}: "), message
        assert re.search(phrase, message), message
        assert written(tmp_path) == ["patch.yaml"]


def test_bad_patch_api():
    with pytest.raises(PatchError, match=r"point 2 of 3 is '0 mm'") as info:
        patch_from_text(_mutate("  thickness: 10 mm", "  profile: [10 mm, 0 mm, 10 mm]"), file="p.yaml")
    assert (info.value.key, info.value.line) == ("resonator.profile", 6)


def test_base_bar_patch_is_valid(capsys):
    patch = patch_from_text(BASE)
    assert partial_table(patch).labels[0] == "B1"


def test_pitch_override_replaces_length(tmp_path, capsys):
    # --pitch on a patch that gives a length: the length is solved instead.
    (tmp_path / "p.yaml").write_text(BASE)
    assert main(["modes", str(tmp_path / "p.yaml"), "--pitch", "A5", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["fundamental_hz"] == pytest.approx(880.0, rel=1e-10)
    status, _, err = run(capsys, "modes", str(tmp_path / "p.yaml"), "--pitch", "20 kHz")
    assert status == 2 and "command line: --pitch: " in error_line(err) and "above what this bar can reach" in err


STRING_PATCH = """\
name: a-string
resonator: {type: string, material: music-wire, length: 0.65, diameter: 0.45 mm, pitch: A2}
"""

BAD_TUNES = [
    pytest.param(BLANK, ["--ratios", "1:4"], r"^synth: error: command line: --ratios: '1:4' has 2 ratios: give three",
                 id="two-ratios"),
    pytest.param(BLANK, ["--ratios", "one:four:ten"], r"command line: --ratios: 'one:four:ten' is not a list of ratios",
                 id="ratios-text"),
    pytest.param(BLANK, ["--ratios", "1:10:4"], r"--ratios: '1:10:4': ratios must rise", id="ratios-falling"),
    pytest.param(BLANK, ["--ratios", "1:2:3"], r"--ratios: no undercut of depth <= 85% reaches 1:2:3 on this blank; "
                 r"the closest is 1:", id="ratios-unreachable"),
    pytest.param(BLANK, ["--ratios", "1:4:10", "--points", "3"], r"command line: --points: must be 9\.\.401, got 3",
                 id="points"),
    pytest.param(BLANK, ["--ratios", "1:4:10", "-o", "tuned.txt"], r"command line: --output: output must end in \.yaml or \.yml",
                 id="output-suffix"),
    pytest.param(BLANK, ["--ratios", "1:4:10", "-o", "missing/tuned.yaml"],
                 r"command line: --output: output folder 'missing' does not exist", id="output-folder"),
    pytest.param(BLANK, ["--ratios", "1:4:10", "-o", "patch.yaml"], r"command line: --output: 'patch\.yaml' is an input of this command",
                 id="output-is-input"),
    pytest.param(_mutate("  width: 40 mm\n  thickness: 16 mm", "  diameter: 16 mm", BLANK), ["--ratios", "1:4:10"],
                 r"patch\.yaml:5: resonator\.diameter: an undercut needs a rectangular bar", id="round-rod"),
    pytest.param(_mutate("  thickness: 16 mm", "  profile: [16 mm, 10 mm, 16 mm]", BLANK), ["--ratios", "1:4:10"],
                 r"patch\.yaml:6: resonator\.profile: tuning starts from a uniform blank", id="already-shaped"),
    pytest.param(STRING_PATCH, ["--ratios", "1:4:10"], r"patch\.yaml:2: resonator\.type: tune-bar shapes bars, not a string",
                 id="not-a-bar"),
]


@pytest.mark.parametrize(("text", "options", "pattern"), BAD_TUNES)
def test_bad_tune_bar(tmp_path, monkeypatch, capsys, text, options, pattern):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "patch.yaml").write_text(textwrap.dedent(text))
    before = (tmp_path / "patch.yaml").read_text()
    status, out, err = run(capsys, "tune-bar", "patch.yaml", *options)
    message = error_line(err)
    assert status == 2 and out == ""
    assert re.search(pattern, message), message
    assert written(tmp_path) == ["patch.yaml"]
    assert (tmp_path / "patch.yaml").read_text() == before


def test_tune_bar_needs_ratios(tmp_path, capsys):
    (tmp_path / "patch.yaml").write_text(BLANK)
    status, _, err = run(capsys, "tune-bar", str(tmp_path / "patch.yaml"))
    assert status == 2 and "--ratios" in error_line(err)


@pytest.mark.parametrize("name", ["bar-aluminium-chime-a4", "bar-rosewood-blank-c4", "bar-steel-rod-clamped-tine"])
def test_exact_timoshenko_matches_a_fine_finite_element_mesh(name):
    """Every mode below 24 kHz (what a 48 kHz render holds) of the demo bars from the exact frequency
    equation (synth.resonators.timoshenko) against the project's Timoshenko finite elements (bar_fe) on a
    mesh of 40 elements per mode, Richardson-extrapolated from it and its half: within 0.001 cent
    (measured <= 7e-5 cent; the old finite-element ratio was off by up to 0.019 cent up there)."""
    from synth.resonators import bar as bar_module

    spec = load_patch(REPO / "patches" / f"{name}.yaml").resonator
    length = bar_module.solve(spec, 64).parameters["length_m"]
    exact = bar_module.lowest_frequencies(spec, 64, length=length)
    exact = exact[exact < 24000.0]
    n = exact.size
    size = spec.diameter or spec.thickness
    properties = dict(supports=spec.supports, n_modes=n, section=spec.section, width=spec.width,
                      density=spec.density, youngs_modulus=spec.youngs_modulus, shear_modulus=spec.shear_modulus,
                      shear_coefficient=bar_module.shear_coefficient(spec), timoshenko=True)
    node_x = np.linspace(0.0, length, 40 * (n + 1) + 1)

    def size_at(x):
        return np.full(np.shape(x), size)

    fine = bar_fe.richardson(bar_fe.solve_bar(node_x, size_at, **properties)[0],
                             bar_fe.solve_bar(node_x[::2], size_at, **properties)[0])
    assert np.max(np.abs(1200.0 * np.log2(exact / fine))) < 1e-3


@pytest.mark.parametrize("name", ["bar-aluminium-chime-a4", "bar-rosewood-blank-c4", "bar-rosewood-undercut-c4",
                                  "bar-steel-rod-clamped-tine"])
def test_length_solve_by_secant_agrees_with_brent(name):
    """solve_length's secant steps on log f(log L) land where Brent's method on a bracket does (1e-12)."""
    from synth.resonators import bar as bar_module

    spec = load_patch(REPO / "patches" / f"{name}.yaml").resonator
    pitch = 523.2511  # C5
    shortest = bar_module.MIN_LENGTH_RATIO * spec.largest_dimension
    assert solve_length(spec, pitch) == pytest.approx(bar_module._bracketed_length(spec, pitch, shortest), rel=1e-12)
