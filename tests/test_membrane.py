"""Membranes held against published zeros and closed forms, the audio and bad input.

References are computed here independently (Bessel zeros by Brent's method on
scipy.special.jv, the rectangular formula re-implemented, quadrature for the
normalisation) or quoted as literals from ../shared/REFERENCES.md sec. 3,
which gives Abramowitz & Stegun (1964) table 9.5 and values computed [C]
with scipy.special.jn_zeros.  The module under test never supplies an
expected value.
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.special import jv

from synth import patch_from_text, retune
from synth.cli import main
from synth.materials import MATERIALS
from synth.pipeline import partial_table
from synth.resonators.membrane import (
    MembraneSpec,
    circle_mode_shape,
    membrane_modes,
    rectangle_mode_shape,
)

from .analysis import measured_t60, peak_near, read_wav
from .cli_checks import check_bad_patch

# REFERENCES.md sec. 3 example [C]: a = 0.1 m, T = 1000 N/m, sigma = 0.25 kg/m^2.
A, T, SIGMA = 0.1, 1000.0, 0.25
ONE_CENT = 5.8e-4  # rtol of one cent: 2**(1/1200) - 1

# j_mn as tabulated in REFERENCES.md sec. 3: computed there [C] with scipy and matching
# Abramowitz & Stegun (1964) table 9.5 (table number from memory); of these, 2.40483,
# 5.52008, 8.65373, 3.83171 and 5.13562 were seen in a published excerpt. The independent
# check is the Brent search on J_m below, not scipy's jn_zeros (the module uses it for order 0 only; higher orders come from its own recurrence).
AS_TABLE_95 = {
    (0, 1): 2.404826, (0, 2): 5.520078, (0, 3): 8.653728,
    (1, 1): 3.831706, (1, 2): 7.015587, (1, 3): 10.173468,
    (2, 1): 5.135622, (2, 2): 8.417244, (2, 3): 11.619841,
    (3, 1): 6.380162, (3, 2): 9.761023, (3, 3): 13.015201,
}

# REFERENCES.md sec. 3 [C]: the ten lowest distinct circular modes, ratios to j01.
SORTED_RATIOS = [
    ("(0,1)", 1.0), ("(1,1)", 1.5933), ("(2,1)", 2.1355), ("(0,2)", 2.2954), ("(3,1)", 2.6531),
    ("(1,2)", 2.9173), ("(4,1)", 3.1555), ("(2,2)", 3.5001), ("(0,3)", 3.5985), ("(5,1)", 3.6475),
]


def _circle(**changes):
    values = dict(shape="circle", areal_density=SIGMA, radius=A, tension=T)
    values.update(changes)
    return MembraneSpec(**values)


def _rectangle(width, height, **changes):
    values = dict(shape="rectangle", areal_density=SIGMA, width=width, height=height, tension=T)
    values.update(changes)
    return MembraneSpec(**values)


def _modes(spec, n=40, exc=(0.4, 0.0), pick=(0.7, 0.9)):
    return membrane_modes(spec, excitation_position=exc, pickup_position=pick, n_modes=n)


def bessel_zeros_by_brent(m, upper):
    """Zeros of J_m below `upper`: sign changes of scipy.special.jv on a grid, refined by brentq."""
    x = np.arange(0.05, upper, 0.02)
    y = jv(m, x)
    cross = np.flatnonzero(np.sign(y[:-1]) * np.sign(y[1:]) < 0)
    return [brentq(lambda t: jv(m, t), x[i], x[i + 1], xtol=1e-14, rtol=1e-15) for i in cross]


def _distinct(modes):
    """(label, frequency) of each circular mode once (pairs listed twice collapse)."""
    seen, out = set(), []
    for label, f in zip(modes.labels, modes.frequency_hz):
        if label not in seen:
            seen.add(label)
            out.append((label, float(f)))
    return out


class TestCircleBesselZeros:
    """f_mn = j_mn c / (2 pi a), c = sqrt(T / sigma) (Fletcher & Rossing 1998 sec. 3.4)."""

    def test_abramowitz_stegun_table_9_5(self):
        c = math.sqrt(T / SIGMA)
        for label, f in _distinct(_modes(_circle(), n=60)):
            m, n = map(int, label.strip("()").split(","))
            if (m, n) in AS_TABLE_95:
                # The table has six decimals: half a unit in the last place.
                assert f * 2 * math.pi * A / c == pytest.approx(AS_TABLE_95[(m, n)], abs=5e-7), label

    def test_worked_example(self):
        # [C] REFERENCES.md sec. 3: f01 = 242.066 Hz, f11 = 385.693 Hz.
        modes = _modes(_circle())
        assert modes.frequency_hz[0] == pytest.approx(242.066, abs=1e-3)
        assert dict(_distinct(modes))["(1,1)"] == pytest.approx(385.693, abs=1e-3)
        assert modes.parameters["wave_speed_m_s"] == pytest.approx(math.sqrt(1000 / 0.25), rel=1e-12)

    def test_sorted_order_and_ratios(self):
        distinct = _distinct(_modes(_circle(), n=40))
        f0 = distinct[0][1]
        for (label, f), (ref_label, ratio) in zip(distinct, SORTED_RATIOS):
            assert label == ref_label
            assert f / f0 == pytest.approx(ratio, abs=5e-5)  # four decimals in the source

    def test_every_mode_against_brent(self):
        """No mode missing or misplaced: the lowest modes equal an independent Brent search."""
        upper = 30.0
        reference = sorted((j, m, n + 1) for m in range(0, 40) for n, j in enumerate(bessel_zeros_by_brent(m, upper)))
        rows = sum(1 if m == 0 else 2 for _, m, _ in reference)
        modes = _modes(_circle(), n=rows)
        c = math.sqrt(T / SIGMA)
        expected_f, expected_labels = [], []
        for j, m, n in reference:
            for _ in range(1 if m == 0 else 2):
                expected_f.append(j * c / (2 * math.pi * A))
                expected_labels.append(f"({m},{n})")
        np.testing.assert_allclose(modes.frequency_hz, expected_f, rtol=1e-10)
        assert list(modes.labels) == expected_labels

    def test_large_mode_count(self):
        # Weyl's law (common practice for a fixed-rim disc): about x^2/4 - x/2 modes
        # (pairs counted twice) below j = x.  The 2000th mode sits near x = 91.
        modes = _modes(_circle(), n=2000)
        assert len(modes.labels) == 2000
        assert np.all(np.diff(modes.frequency_hz) >= 0)
        x = modes.frequency_hz[-1] * 2 * math.pi * A / math.sqrt(T / SIGMA)
        assert x**2 / 4 - x / 2 == pytest.approx(2000, rel=0.03)


class TestCircleShapes:
    """Shapes J_m(j r/a) cos(m theta), sin(m theta), scaled to mean square 1 over the disc."""

    @pytest.mark.parametrize("m,n,orientation", [(0, 1, "cos"), (0, 3, "cos"), (1, 1, "cos"), (2, 2, "sin"), (5, 1, "cos")])
    def test_mass_normalised_by_quadrature(self, m, n, orientation):
        # Gauss-Legendre in r, trapezoid in theta (exact for trigonometric polynomials).
        r, w = np.polynomial.legendre.leggauss(120)
        r, w = 0.5 * (r + 1), 0.5 * w
        theta = np.linspace(0, 2 * math.pi, 64, endpoint=False)
        rr, tt = np.meshgrid(r, theta, indexing="ij")
        phi = circle_mode_shape(m, n, rr, tt, orientation=orientation)
        mean_square = np.sum((phi**2 * rr) * w[:, None]) * (2 * math.pi / 64) / math.pi
        assert mean_square == pytest.approx(1.0, rel=1e-10)

    def test_rim_is_a_node(self):
        # The fixed rim: the shape falls to 0 as r -> a (J_m(j_mn) = 0), and is exactly 0 there.
        for m, n in [(0, 1), (1, 2), (3, 1)]:
            assert abs(circle_mode_shape(m, n, 1.0 - 1e-7, 0.3)) < 1e-5
            assert circle_mode_shape(m, n, 1.0, 0.3) == 0.0

    def test_nodal_counts_and_circle_radii(self):
        modes = _modes(_circle(), n=60)
        for i, label in enumerate(modes.labels):
            m, n = map(int, label.strip("()").split(","))
            assert modes.columns["nodal_diameters"][i] == m
            assert modes.columns["nodal_circles"][i] == n - 1  # the rim not counted
            assert modes.columns["nodal_lines"][i] == m + n - 1
            radii = modes.columns["nodal_circle_radii"][i]
            assert len(radii) == n - 1
            j = AS_TABLE_95.get((m, n))
            for rho in radii:
                # A nodal circle: J_m(j_mn rho) = 0 (independent evaluation).
                jmn = bessel_zeros_by_brent(m, 60)[n - 1]
                assert abs(jv(m, jmn * rho)) < 1e-9, label
            if j is not None and n > 1:
                assert radii[0] == pytest.approx(AS_TABLE_95[(m, 1)] / j, abs=1e-6)

    def test_pair_turned_to_the_excitation(self):
        """The pair response equals the sum over cos(m theta), sin(m theta) in any fixed frame."""
        exc, pick = (0.55, math.radians(30)), (0.7, math.radians(100))
        modes = _modes(_circle(), n=30, exc=exc, pick=pick)
        orientation = modes.columns["orientation"]
        for i, label in enumerate(modes.labels):
            m, n = map(int, label.strip("()").split(","))
            j = bessel_zeros_by_brent(m, 40)[n - 1]
            scale = (1.0 if m == 0 else 2.0) / jv(m + 1, j) ** 2
            radial = jv(m, j * exc[0]) * jv(m, j * pick[0]) * scale
            if m == 0:
                assert orientation[i] == ""
                expected = radial
            elif orientation[i] == "sin":
                assert modes.excitation_shape[i] == 0.0  # a nodal diameter through the excitation
                continue
            else:
                assert orientation[i] == "cos" and orientation[i + 1] == "sin"
                # cos(m te) cos(m tp) + sin(m te) sin(m tp) = cos(m (tp - te)): rotation invariant.
                expected = radial * math.cos(m * (pick[1] - exc[1]))
            got = modes.excitation_shape[i] * modes.pickup_shape[i]
            assert got == pytest.approx(expected, rel=1e-9, abs=1e-12), label
        assert modes.parameters["orientation_reference_deg"] == pytest.approx(30.0)

    def test_pairs_merged_without_pickup(self):
        modes = _modes(_circle(), n=30, pick=None)
        assert set(modes.columns["orientation"]) == {"", "pair"}
        assert len(set(modes.labels)) == 30  # every row a distinct mode
        np.testing.assert_allclose(modes.pickup_shape, 1.0)

    def test_centre_strike_sounds_only_axisymmetric_modes(self):
        # Common practice (Fletcher & Rossing 1998 sec. 3.4): J_m(0) = 0 for m > 0, so a
        # strike at the centre excites only the (0,n) modes.
        patch = patch_from_text(CIRCLE_PATCH.format(exc="{radius: 0, angle: 0 deg}", pick="{radius: 0.6, angle: 20 deg}"))
        table = partial_table(patch)
        for label, level in zip(table.labels, table.level_db):
            assert np.isnan(level) == (not label.startswith("(0,")), label

    def test_pickup_on_a_nodal_diameter(self):
        # Excitation at 0 deg, pickup at 90 deg: cos(m 90 deg) = 0 for odd m, so every
        # odd-m mode is silent and the even-m modes sound.
        patch = patch_from_text(CIRCLE_PATCH.format(exc="{radius: 0.5, angle: 0 deg}", pick="{radius: 0.5, angle: 90 deg}"))
        table = partial_table(patch)
        diameters = table.columns["nodal_diameters"]
        orientation = table.columns["orientation"]
        for i, level in enumerate(table.level_db):
            silent = diameters[i] % 2 == 1 or orientation[i] == "sin"
            assert np.isnan(level) == silent, table.labels[i]


class TestRectangle:
    """f_mn = (c/2) sqrt((m/Lx)^2 + (n/Ly)^2), shapes sin(m pi x) sin(n pi y)."""

    def test_square_ratios(self):
        # [C] REFERENCES.md sec. 3: square, ratios to f11: (1,2) 1.5811, (2,2) 2,
        # (1,3) 2.2361, (2,3) 2.5495; (m,n) and (n,m) coincide.
        modes = _modes(_rectangle(0.3, 0.3), n=8, exc=(0.3, 0.4), pick=(0.8, 0.35))
        ratio = modes.frequency_hz / modes.frequency_hz[0]
        expected = [1, 1.5811, 1.5811, 2, 2.2361, 2.2361, 2.5495, 2.5495]
        np.testing.assert_allclose(ratio, expected, atol=5e-5)
        assert sorted(modes.labels[1:3]) == ["(1,2)", "(2,1)"]
        assert sorted(modes.labels[6:8]) == ["(2,3)", "(3,2)"]

    def test_against_reimplementation(self):
        width, height = 0.42, 0.28
        c = math.sqrt(T / SIGMA)
        reference = sorted(
            (c / 2 * math.hypot(m / width, n / height), m, n) for m in range(1, 80) for n in range(1, 80)
        )[:300]
        modes = _modes(_rectangle(width, height), n=300, exc=(0.27, 0.61), pick=(0.8, 0.35))
        np.testing.assert_allclose(modes.frequency_hz, [f for f, _, _ in reference], rtol=1e-12)
        for i, label in enumerate(modes.labels):
            m, n = map(int, label.strip("()").split(","))
            assert modes.excitation_shape[i] == pytest.approx(
                2 * math.sin(m * math.pi * 0.27) * math.sin(n * math.pi * 0.61), abs=1e-12
            )
            assert modes.columns["nodal_lines_x"][i] == m - 1
            assert modes.columns["nodal_lines_y"][i] == n - 1
            assert modes.columns["nodal_lines"][i] == m + n - 2

    def test_mass_normalised(self):
        # Midpoint rule on a 200 x 200 grid is exact for these trigonometric products.
        x = (np.arange(200) + 0.5) / 200
        xx, yy = np.meshgrid(x, x, indexing="ij")
        for m, n in [(1, 1), (2, 3), (5, 1)]:
            assert np.mean(rectangle_mode_shape(m, n, xx, yy) ** 2) == pytest.approx(1.0, rel=1e-12)


class TestTension:
    """`pitch` solves the tension; material + thickness give the areal density."""

    @pytest.mark.parametrize("pitch", [55.0, 146.83, 440.0])
    def test_circle_pitch(self, pitch):
        modes = _modes(_circle(tension=None, pitch_hz=pitch))
        assert modes.frequency_hz[0] == pytest.approx(pitch, rel=1e-12)
        # Closed form from f01 = j01 sqrt(T/sigma) / (2 pi a), j01 from A&S table 9.5.
        expected = SIGMA * (2 * math.pi * A * pitch / 2.404825557695773) ** 2
        assert modes.parameters["tension_n_per_m"] == pytest.approx(expected, rel=1e-12)
        assert modes.parameters["tension_solved"] is True

    def test_rectangle_pitch(self):
        modes = _modes(_rectangle(0.42, 0.28, tension=None, pitch_hz=200.0), exc=(0.3, 0.3), pick=None)
        assert modes.frequency_hz[0] == pytest.approx(200.0, rel=1e-12)
        c = 2 * 200.0 / math.hypot(1 / 0.42, 1 / 0.28)
        assert modes.parameters["tension_n_per_m"] == pytest.approx(SIGMA * c**2, rel=1e-12)

    def test_material_and_thickness(self):
        patch = patch_from_text(
            CIRCLE_PATCH.format(exc="{radius: 0.4, angle: 0 deg}", pick="{radius: 0.6, angle: 20 deg}").replace(
                "  areal_density: 0.25 kg/m^2", "  material: aluminium-6061\n  thickness: 0.05 mm"
            )
        )
        table = partial_table(patch)
        density = MATERIALS["aluminium-6061"].density  # 2700 kg/m^3 (REFERENCES.md sec. 7)
        assert table.parameters["areal_density_kg_m2"] == pytest.approx(density * 0.05e-3, rel=1e-12)
        assert table.parameters["material"] == "aluminium-6061"

    def test_retune_moves_the_tension(self):
        patch = patch_from_text(CIRCLE_PATCH.format(exc="{radius: 0.4, angle: 0 deg}", pick="{radius: 0.6, angle: 20 deg}"))
        base = partial_table(patch)
        tuned = partial_table(retune(patch, 2 * base.fundamental_hz))
        assert tuned.fundamental_hz == pytest.approx(2 * base.fundamental_hz, rel=1e-12)
        # Frequency grows as sqrt(T): an octave needs four times the tension.
        assert tuned.parameters["tension_n_per_m"] == pytest.approx(4 * base.parameters["tension_n_per_m"], rel=1e-12)
        assert tuned.parameters["radius_m"] == base.parameters["radius_m"]
        np.testing.assert_allclose(tuned.ratio, base.ratio, rtol=1e-12)


# --------------------------------------------------------------------------
# Through the patch file and the command line.

CIRCLE_PATCH = """\
name: test-membrane
resonator:
  type: membrane
  shape: circle
  radius: 0.1 m
  areal_density: 0.25 kg/m^2
  tension: 1000 N/m
excitation:
  type: strike
  position: {exc}
  contact_time: 0.5 ms
pickup:
  position: {pick}
damping:
  t60: 1.2 s
  t60_high: 0.4 s
  high_frequency: 2 kHz
render:
  duration: 1 s
  sample_rate: 16000
  bit_depth: 24
  max_modes: 40
"""


def _render(write_patch, tmp_path, capsys, text):
    patch = write_patch(text)
    assert main(["modes", str(patch), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    out = tmp_path / "membrane.wav"
    assert main(["render", str(patch), "-o", str(out), "--quiet"]) == 0
    signal, rate = read_wav(out)
    return report, signal, rate


def _gap(report, mode):
    """Distance (Hz) from `mode` to the nearest other sounding mode at another frequency."""
    f = mode["frequency_hz"]
    others = [m["frequency_hz"] for m in report["modes"] if m["level_db"] is not None and m["frequency_hz"] != f]
    return min(abs(g - f) for g in others)


def _magnitude(signal, rate, frequency):
    """|DFT| of the Hann-windowed signal at `frequency` (Hz)."""
    t = np.arange(len(signal)) / rate
    return abs(np.sum(signal * np.hanning(len(signal)) * np.exp(-2j * math.pi * frequency * t)))


class TestClosedLoop:
    def test_peaks_and_decay_match_the_report(self, write_patch, tmp_path, capsys):
        text = CIRCLE_PATCH.format(exc="{radius: 0.45, angle: 10 deg}", pick="{radius: 0.7, angle: 55 deg}")
        report, signal, rate = _render(write_patch, tmp_path, capsys, text)
        loud = [m for m in report["modes"] if m["level_db"] is not None and m["level_db"] > -30]
        assert len(loud) >= 5
        assert any(m["nodal_diameters"] > 0 for m in loud)
        head = signal[: rate // 2]
        checked = 0
        for mode in loud[:12]:
            if _gap(report, mode) < 30.0:
                continue  # e.g. (4,2) and (7,1) lie 2 Hz apart: one peak in a 0.5 s window
            found = peak_near(head, rate, mode["frequency_hz"], search_hz=10.0)
            # 0.5 s Hann window, 8x padding and parabolic interpolation: a small
            # fraction of the 2 Hz bin for a peak >= 30 Hz from any neighbour.
            assert found == pytest.approx(mode["frequency_hz"], abs=0.5), mode["label"]
            checked += 1
        assert checked >= 5
        for mode in report["modes"][:2]:
            # 0.1 s frames resolve 10 Hz; (0,1) and (1,1) are 144 Hz from any neighbour.
            t60 = measured_t60(signal, rate, mode["frequency_hz"], start_s=0.05, stop_s=0.7, frame_s=0.1)
            assert t60 == pytest.approx(mode["t60_s"], rel=0.03), mode["label"]

    def test_centre_strike_audio_has_no_diameter_modes(self, write_patch, tmp_path, capsys):
        text = CIRCLE_PATCH.format(exc="{radius: 0, angle: 0 deg}", pick="{radius: 0.6, angle: 20 deg}")
        report, signal, rate = _render(write_patch, tmp_path, capsys, text)
        modes = {m["label"]: m for m in report["modes"]}
        f01, f11, f02 = (modes[k]["frequency_hz"] for k in ("(0,1)", "(1,1)", "(0,2)"))
        # Absent in the report ...
        assert modes["(1,1)"]["level_db"] is None and modes["(0,2)"]["level_db"] is not None
        # ... and in the audio: (1,1) more than 60 dB under (0,1); (0,2) is there.
        assert 20 * math.log10(_magnitude(signal, rate, f11) / _magnitude(signal, rate, f01)) < -60
        level_02 = 20 * math.log10(_magnitude(signal, rate, f02) / _magnitude(signal, rate, f01))
        assert level_02 > -40
        assert peak_near(signal[: rate // 2], rate, f02, search_hz=10.0) == pytest.approx(f02, abs=0.5)

    def test_rectangle_peaks(self, write_patch, tmp_path, capsys):
        text = (
            CIRCLE_PATCH.format(exc="[0.27, 0.61]", pick="[0.8, 0.35]")
            .replace("  shape: circle\n  radius: 0.1 m", "  shape: rectangle\n  width: 0.42 m\n  height: 0.28 m")
        )
        report, signal, rate = _render(write_patch, tmp_path, capsys, text)
        loud = [m for m in report["modes"] if m["level_db"] is not None and m["level_db"] > -25]
        checked = 0
        for mode in loud[:10]:
            gap = _gap(report, mode)
            if gap < 8.0:
                continue  # too close to a neighbour for a 1 s window (main lobe +-2 Hz)
            found = peak_near(signal, rate, mode["frequency_hz"], search_hz=min(10.0, gap / 2))
            # 1 s Hann window, 8x padding, parabolic interpolation: well under the 1 Hz bin.
            assert found == pytest.approx(mode["frequency_hz"], abs=0.5), mode["label"]
            checked += 1
        assert checked >= 4


# --------------------------------------------------------------------------
# Bad input: one line, exit status 2, nothing written.  Line numbers refer to
# BAD_BASE (line 1 is ``name:``).

BAD_BASE = CIRCLE_PATCH.format(exc="{radius: 0.45, angle: 10 deg}", pick="{radius: 0.7, angle: 55 deg}")


def _edit(old, new):
    assert BAD_BASE.count(old) == 1, old
    return BAD_BASE.replace(old, new)


BAD_CASES = [
    pytest.param(_edit("  shape: circle", "  shape: rectangle"), "resonator.radius", 5,
                 r"a rectangle takes 'width' and 'height'; 'radius' is for a circle \(shape: circle\)", id="radius-with-rectangle"),
    pytest.param(_edit("  shape: circle\n  radius: 0.1 m", "  shape: rectangle\n  width: 0.3 m"), "resonator.height", 2,
                 r"missing for a rectangle: give 'width' and 'height'", id="width-without-height"),
    pytest.param(_edit("  radius: 0.1 m", "  radius: 0.1 m\n  width: 0.3 m"), "resonator.width", 6,
                 r"a circle takes 'radius'; 'width' is for a rectangle \(shape: rectangle\)", id="width-with-circle"),
    pytest.param(_edit("  radius: 0.1 m\n", ""), "resonator.radius", 2,
                 r"missing for a circle: give 'radius'", id="circle-without-radius"),
    pytest.param(_edit("  shape: circle", "  shape: triangle"), "resonator.shape", 4,
                 r"'triangle' is not allowed; did you mean 'rectangle'\? \(allowed: circle, rectangle, outline\)", id="unknown-shape"),
    pytest.param(_edit("  tension: 1000 N/m", "  tension: 1000 N/m\n  pitch: A3"), "resonator.pitch", 8,
                 r"give exactly one of 'pitch' \(the tension is solved\) or 'tension' \(N/m\)", id="tension-and-pitch"),
    pytest.param(_edit("  tension: 1000 N/m\n", ""), "resonator", 2,
                 r"give exactly one of 'pitch'", id="neither-tension-nor-pitch"),
    pytest.param(_edit("  tension: 1000 N/m", "  tension: 1000 N"), "resonator.tension", 7,
                 r"unit 'N' is not allowed here \(units: N/m, kN/m\)", id="tension-as-force"),
    pytest.param(_edit("  areal_density: 0.25 kg/m^2", "  areal_density: -0.25 kg/m^2"), "resonator.areal_density", 6,
                 r"must be > 0", id="negative-areal-density"),
    pytest.param(_edit("  areal_density: 0.25 kg/m^2", "  areal_density: 0.25 kg/m^2\n  material: steel"),
                 "resonator.areal_density", 6, r"give areal_density \(kg/m\^2\) or material \+ thickness, not both",
                 id="areal-density-and-material"),
    pytest.param(_edit("  areal_density: 0.25 kg/m^2", "  material: steel"), "resonator.thickness", 2,
                 r"material needs thickness", id="material-without-thickness"),
    pytest.param(_edit("  areal_density: 0.25 kg/m^2", "  thickness: 0.1 mm"), "resonator.thickness", 6,
                 r"thickness needs a material", id="thickness-without-material"),
    pytest.param(_edit("  areal_density: 0.25 kg/m^2\n", ""), "resonator", 2,
                 r"give areal_density \(kg/m\^2\), or material \+ thickness", id="no-density"),
    pytest.param(_edit("  areal_density: 0.25 kg/m^2", "  material: mylar\n  thickness: 0.1 mm"), "resonator.material", 6,
                 r"unknown material 'mylar'", id="unknown-material"),
    pytest.param(_edit("{radius: 0.45, angle: 10 deg}", "{radius: 1.2, angle: 10 deg}"), "excitation.position.radius", 10,
                 r"must be <= 1, got 1\.2", id="position-outside-circle"),
    pytest.param(_edit("{radius: 0.7, angle: 55 deg}", "{radius: -0.1, angle: 55 deg}"), "pickup.position.radius", 13,
                 r"must be >= 0", id="pickup-negative-radius"),
    pytest.param(_edit("{radius: 0.7, angle: 55 deg}", "{radius: 0.7, angle: 55 m}"), "pickup.position.angle", 13,
                 r"unit 'm' is not allowed here \(units: rad, deg\)", id="angle-unit"),
    pytest.param(_edit("{radius: 0.45, angle: 10 deg}", "0.45"), "excitation.position", 10,
                 r"must be \{radius: fraction 0\.\.1, angle: degrees\}", id="circle-position-as-number"),
    pytest.param(_edit("{radius: 0.45, angle: 10 deg}", "{radius: 1, angle: 10 deg}"), "excitation.position", 10,
                 r"nothing would sound", id="excitation-on-the-rim"),
    pytest.param(_edit("  shape: circle\n  radius: 0.1 m", "  shape: rectangle\n  width: 0.3 m\n  height: 0.2 m"),
                 "excitation.position", 11, r"must be \[x, y\], two fractions", id="polar-position-on-rectangle"),
    pytest.param(
        _edit("  shape: circle\n  radius: 0.1 m", "  shape: rectangle\n  width: 0.3 m\n  height: 0.2 m")
        .replace("{radius: 0.45, angle: 10 deg}", "[1.2, 0.5]"),
        "excitation.position", 11, r"must be <= 1, got 1\.2", id="xy-outside-rectangle"),
    pytest.param(
        _edit("  shape: circle\n  radius: 0.1 m", "  shape: rectangle\n  width: 0.3 m\n  height: 0.2 m")
        .replace("{radius: 0.45, angle: 10 deg}", "[0.3, 0.5]").replace("{radius: 0.7, angle: 55 deg}", "[1.0, 0.4]"),
        "pickup.position", 14, r"nothing would sound: the pickup sits on a node", id="pickup-on-the-edge"),
]


@pytest.mark.parametrize("command", ["render", "modes"])
@pytest.mark.parametrize(("text", "key", "line", "phrase"), BAD_CASES)
def test_bad_membrane_patch(tmp_path, monkeypatch, capsys, command, text, key, line, phrase):
    check_bad_patch(tmp_path, monkeypatch, capsys, command, text, key, line, phrase)


class TestMaterialChecks:
    """With material + thickness, the membrane reports its stress and says when bending matters."""

    FOIL = """\
    name: foil
    resonator:
      type: membrane
      shape: circle
      radius: 80 mm
      material: aluminium-6061
      thickness: 0.05 mm
      tension: {tension}
    render: {{max_modes: 40}}
    """

    def _table(self, tension):
        import textwrap

        from synth import partial_table, patch_from_text

        return partial_table(patch_from_text(textwrap.dedent(self.FOIL.format(tension=tension))))

    def test_stress_is_tension_over_thickness(self):
        # Common practice: membrane stress = tension per length / thickness.
        table = self._table("600 N/m")
        assert table.parameters["stress_pa"] == pytest.approx(600 / 0.05e-3, rel=1e-12)
        assert table.parameters["stress_percent_of_strength"] == pytest.approx(100 * 12e6 / 310e6, rel=1e-9)

    def test_warns_near_breaking(self):
        # 6061-T6 UTS 310 MPa (Aluminum Association via MatWeb): 14000 N/m on 0.05 mm is 280 MPa.
        assert any("working ceiling" in w for w in self._table("14000 N/m").warnings)
        assert any("would break" in w for w in self._table("16000 N/m").warnings)

    def test_bending_note(self):
        # D = E h^3 / (12 (1 - nu^2)); D k^2 / T = 0.01 at k = sqrt(0.01 T / D), f = c k / (2 pi).
        e, h, nu, rho, t = 68.9e9, 0.05e-3, 0.33, 2700.0, 600.0
        d = e * h**3 / (12 * (1 - nu**2))
        onset = math.sqrt(t / (rho * h)) * math.sqrt(0.01 * t / d) / (2 * math.pi)
        note = [w for w in self._table("600 N/m").warnings if "bending stiffness" in w]
        assert len(note) == 1 and f"{onset:.0f} Hz" in note[0]
