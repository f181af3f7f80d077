"""Air columns held against Levine & Schwinger, the speed of sound, the audio and bad input.

Reference values are quoted from ../shared/REFERENCES.md sec. 6 ([C]: computed
there with numpy) or recomputed here from the published formulas; the module
under test never supplies an expected value.
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy.special import jnp_zeros

from synth import patch_from_text, retune
from synth.cli import main
from synth.pipeline import partial_table
from synth.resonators.air_column import (
    CROSS_MODE_KA,
    AirColumnSpec,
    UnreachablePitch,
    air_column_modes,
    solve_length,
    speed_of_sound,
)

from .analysis import measured_t60, peak_near, read_wav
from .cli_checks import check_bad_patch

# Levine & Schwinger (1948), Phys. Rev. 73(4):383: unflanged end correction 0.6133 a.
LEVINE_SCHWINGER = 0.6133
# Ideal gas: gamma = 1.4 for air, R = 287.05 J/(kg K) (REFERENCES.md sec. 6).
GAMMA, R_AIR = 1.4, 287.05
CENT = 2.0 ** (1.0 / 1200.0) - 1.0  # one cent as a relative step

# Cramer 1993, JASA 93(5):2510, eq. (15): a0..a15, transcribed here from the "Speed of Sound
# Calculator" page of the USP (gsd.ime.usp.br/acmus, which quotes the paper's p. 2514), with
# x_w from the enhancement factor and psv of Davis 1992 (as the NPL calculator, quoted in the
# ITA toolbox's calculateSoundSpeed.m) and 400 ppm CO2.
_A = [331.5024, 0.603055, -0.000528, 51.471935, 0.1495874, -0.000782, -1.82e-7, 3.73e-8, -2.93e-10,
      -85.20931, -0.228525, 5.91e-5, -2.835149, -2.15e-13, 29.179762, 0.000486]


def _cramer(t, rh, p=101325.0, xc=400e-6):
    tk = t + 273.15
    psv = math.exp(1.2378847e-5 * tk**2 - 1.9121316e-2 * tk + 33.93711047 - 6.3431645e3 / tk)
    xw = rh / 100.0 * (1.00062 + 3.14e-8 * p + 5.6e-7 * t**2) * psv / p
    a = _A
    return (a[0] + a[1] * t + a[2] * t**2 + (a[3] + a[4] * t + a[5] * t**2) * xw + (a[6] + a[7] * t + a[8] * t**2) * p
            + (a[9] + a[10] * t + a[11] * t**2) * xc + a[12] * xw**2 + a[13] * p**2 + a[14] * xc**2 + a[15] * xw * p * xc)


def _ideal_humid_air(t, rh, p=101325.0):
    """An independent ideal-gas mixture: dry air (gamma 1.4, 28.9645 g/mol) with water vapour
    (18.015 g/mol, Cp = 4.04 R, i.e. 33.6 J/(mol K) near 300 K; from memory); saturation
    pressure from Buck 1981, 611.21 exp((18.678 - t/234.5) t / (257.14 + t)) Pa (from memory)."""
    r = 8.314462618  # J/(mol K), CODATA 2018
    x = rh / 100.0 * 611.21 * math.exp((18.678 - t / 234.5) * t / (257.14 + t)) / p
    molar_mass = (1 - x) * 28.9645e-3 + x * 18.015e-3
    cp = (1 - x) * 3.5 * r + x * 4.04 * r
    gamma = cp / (cp - r)
    return math.sqrt(gamma * r * (t + 273.15) / molar_mass)


def _modes(length=0.5, radius=0.01, ends="open-open", temperature=20.0, n=12, x0=0.3, xp=0.8):
    spec = AirColumnSpec(length=length, radius=radius, ends=ends, temperature=temperature)
    return air_column_modes(spec, excitation_position=x0, pickup_position=xp, n_modes=n)


class TestSpeedOfSound:
    def test_dry_20_degrees(self):
        # The well-known 343.2 m/s of dry air at 20 degC (from memory; REFERENCES.md sec. 6 has
        # 343.21-343.29 from three textbook forms); Cramer's real-gas value is 343.36.
        assert speed_of_sound(20.0, humidity=0.0) == pytest.approx(343.2, abs=0.2)

    @pytest.mark.parametrize("temperature", [0.0, 10.0, 20.0, 30.0])
    @pytest.mark.parametrize("humidity", [0.0, 50.0, 100.0])
    @pytest.mark.parametrize("pressure", [75e3, 101325.0])
    def test_cramer_equation(self, temperature, humidity, pressure):
        # Against the equation transcribed above from the published coefficients.
        expected = _cramer(temperature, humidity, pressure)
        assert speed_of_sound(temperature, humidity=humidity, pressure=pressure) == pytest.approx(expected, rel=1e-12)

    @pytest.mark.parametrize("temperature", [-30.0, 0.0, 15.0, 20.0, 37.0, 60.0])
    def test_dry_air_is_near_the_ideal_gas(self, temperature):
        # c = sqrt(gamma R T_K), gamma 1.4, R 287.05 (REFERENCES.md sec. 6): Cramer's real gas
        # is 0.1-0.8 cent above it inside 0-30 degC (issue 16), the extrapolation within 1 cent.
        ideal = math.sqrt(GAMMA * R_AIR * (temperature + 273.15))
        cents = 1200 * math.log2(speed_of_sound(temperature, humidity=0.0) / ideal)
        assert -1.0 < cents < 1.0
        if 0.0 <= temperature <= 30.0:
            assert 0.1 < cents < 0.9

    @pytest.mark.parametrize("temperature", [0.0, 10.0, 20.0, 30.0])
    def test_humidity_shift_matches_an_ideal_gas_mixture(self, temperature):
        # Water vapour is lighter than air: the ideal-gas mixture above gives the shift to a few %.
        cramer = speed_of_sound(temperature, humidity=50.0) / speed_of_sound(temperature, humidity=0.0) - 1
        mixture = _ideal_humid_air(temperature, 50.0) / _ideal_humid_air(temperature, 0.0) - 1
        assert cramer == pytest.approx(mixture, rel=0.05)

    def test_half_humidity_adds_about_three_cents(self):
        # Issue 16: 50 % RH adds about 3 cents at 20 degC.
        cents = 1200 * math.log2(speed_of_sound(20.0, humidity=50.0) / speed_of_sound(20.0, humidity=0.0))
        assert 2.9 < cents < 3.4

    def test_pitch_rises_with_temperature(self):
        # f ~ c: a pipe at 30 degC sounds c(30) / c(10) higher than at 10 degC (at the default 50 % RH),
        # a little more than the dry sqrt(303.15 / 283.15) because warm air holds more water.
        cold = _modes(temperature=10.0).frequency_hz[0]
        warm = _modes(temperature=30.0).frequency_hz[0]
        assert warm / cold == pytest.approx(_cramer(30.0, 50.0) / _cramer(10.0, 50.0), rel=1e-12)
        assert warm / cold > math.sqrt(303.15 / 283.15)

    @pytest.mark.parametrize("written", ["30", "30 %", "'30%'"])
    def test_humidity_in_a_patch(self, written):
        patch = patch_from_text(PATCH.format(ends="open-open", x0=0.1, xp=0.3).replace(
            "  temperature: 20 degC", f"  temperature: 20 degC\n  humidity: {written}"))
        assert patch.resonator.humidity == 30.0

    def test_humidity_and_pressure_reach_the_report(self):
        spec = AirColumnSpec(length=0.5, radius=0.01, temperature=20.0, humidity=30.0, pressure=90e3)
        modes = air_column_modes(spec, excitation_position=0.3, pickup_position=0.8, n_modes=3)
        assert modes.parameters["humidity_percent"] == 30.0
        assert modes.parameters["air_pressure_pa"] == 90e3
        assert modes.parameters["speed_of_sound_m_s"] == pytest.approx(_cramer(20.0, 30.0, 90e3), rel=1e-12)


class TestLevineSchwinger:
    def test_published_example(self):
        # [C] REFERENCES.md sec. 6: L = 0.5, a = 0.01, c = 343.21, unflanged:
        # open-open f1 = 334.99 Hz, closed-open f1 = 169.53 Hz.  The example takes c
        # as exactly 343.21 m/s (Cramer at 20 degC, 50 % RH gives 343.99), so scale f ~ c to that c.
        to_example = 343.21 / speed_of_sound(20.0)
        assert _modes(ends="open-open").frequency_hz[0] * to_example == pytest.approx(334.99, abs=0.005)
        assert _modes(ends="closed-open").frequency_hz[0] * to_example == pytest.approx(169.53, abs=0.005)

    @pytest.mark.parametrize("ends,open_ends", [("open-open", 2), ("closed-open", 1)])
    def test_end_correction(self, ends, open_ends):
        modes = _modes(length=0.37, radius=0.015, ends=ends)
        p = modes.parameters
        assert p["end_correction_m"] == pytest.approx(LEVINE_SCHWINGER * 0.015, rel=1e-12)
        assert p["effective_length_m"] == pytest.approx(0.37 + open_ends * LEVINE_SCHWINGER * 0.015, rel=1e-12)

    def test_open_open_every_harmonic(self):
        # f_n = n c / (2 (L + 2 delta)) (REFERENCES.md sec. 6).
        modes = _modes(ends="open-open", n=20)
        c = _cramer(20.0, 50.0)  # the default 50 % RH
        expected = np.arange(1, 21) * c / (2 * (0.5 + 2 * LEVINE_SCHWINGER * 0.01))
        np.testing.assert_allclose(modes.frequency_hz, expected, rtol=1e-12)
        assert modes.columns["harmonic"] == tuple(range(1, 21))

    def test_closed_open_odd_harmonics(self):
        # f_n = (2n - 1) c / (4 (L + delta)): odd harmonics only (REFERENCES.md sec. 6).
        modes = _modes(ends="closed-open", n=15)
        c = _cramer(20.0, 50.0)  # the default 50 % RH
        odd = 2 * np.arange(1, 16) - 1
        np.testing.assert_allclose(modes.frequency_hz, odd * c / (4 * (0.5 + LEVINE_SCHWINGER * 0.01)), rtol=1e-12)
        assert modes.columns["harmonic"] == tuple(int(h) for h in odd)
        assert modes.labels[:3] == ("n=1", "n=2", "n=3")
        np.testing.assert_allclose(modes.frequency_hz / modes.frequency_hz[0], odd, rtol=1e-12)


class TestPressureShapes:
    def test_closed_end_is_a_pressure_antinode(self):
        # Rigid closed end: zero particle velocity, pressure maximum (Fletcher & Rossing 1998 ch. 8).
        modes = _modes(ends="closed-open", x0=0.0, xp=0.0, n=10)
        np.testing.assert_allclose(np.abs(modes.excitation_shape), math.sqrt(2), rtol=1e-12)

    def test_open_end_is_nearly_a_node(self):
        # The pressure node sits delta beyond the open end: p(L) = sin(n pi delta / L_e), small.
        modes = _modes(ends="open-open", x0=1.0, xp=0.0, n=4)
        l_eff = 0.5 + 2 * LEVINE_SCHWINGER * 0.01
        n = np.arange(1, 5)
        expected = math.sqrt(2) * np.abs(np.sin(n * math.pi * LEVINE_SCHWINGER * 0.01 / l_eff))
        np.testing.assert_allclose(np.abs(modes.excitation_shape), expected, rtol=1e-9)
        assert np.all(np.abs(modes.excitation_shape) < 0.15 * math.sqrt(2))

    @pytest.mark.parametrize("ends", ["open-open", "closed-open"])
    def test_node_positions_are_pressure_zeros(self, ends):
        modes = _modes(ends=ends, n=8)
        l_eff = modes.parameters["effective_length_m"]
        delta = LEVINE_SCHWINGER * 0.01
        for h, nodes in zip(modes.columns["harmonic"], modes.columns["node_positions"]):
            x = np.array(nodes) * 0.5
            if ends == "open-open":
                p = np.sin(h * math.pi * (x + delta) / l_eff)
                assert len(nodes) == h - 1
            else:
                p = np.cos(h * math.pi * x / (2 * l_eff))
                assert len(nodes) == (h - 1) // 2
            np.testing.assert_allclose(p, 0.0, atol=1e-12)

    def test_shapes_at_points(self):
        modes = _modes(ends="closed-open", x0=0.3, xp=0.8, n=6)
        l_eff = 0.5 + LEVINE_SCHWINGER * 0.01
        h = 2 * np.arange(1, 7) - 1
        np.testing.assert_allclose(modes.excitation_shape, math.sqrt(2) * np.cos(h * math.pi * 0.15 / (2 * l_eff)), rtol=1e-12)
        np.testing.assert_allclose(modes.pickup_shape, math.sqrt(2) * np.cos(h * math.pi * 0.4 / (2 * l_eff)), rtol=1e-12)

    def test_wavelength(self):
        modes = _modes(ends="closed-open", n=5)
        l_eff = modes.parameters["effective_length_m"]
        # Quarter-wave resonator: lambda_n = 4 L_e / (2n - 1) (common practice).
        np.testing.assert_allclose(modes.columns["wavelength_m"], 4 * l_eff / (2 * np.arange(1, 6) - 1), rtol=1e-12)


class TestCrossModeCutOn:
    def test_constant_is_first_zero_of_j1_prime(self):
        # The (1,0) duct mode cuts on at ka = j'_11, the first zero of J_1'.
        assert CROSS_MODE_KA == pytest.approx(jnp_zeros(1, 1)[0], rel=1e-9)

    def test_modes_above_cut_on_left_out(self):
        modes = _modes(length=0.5, radius=0.02, n=200)
        c = _cramer(20.0, 50.0)  # the default 50 % RH
        cut_on = jnp_zeros(1, 1)[0] * c / (2 * math.pi * 0.02)
        assert modes.frequency_hz[-1] < cut_on
        assert len(modes.frequency_hz) == int(cut_on // modes.frequency_hz[0])
        # The model's end, like Nyquist, is information (issue 13): the cut-on is a parameter.
        assert modes.warnings == ()
        assert modes.parameters["cross_mode_cut_on_hz"] == pytest.approx(cut_on, rel=1e-9)


class TestLengthSolve:
    @pytest.mark.parametrize("ends", ["open-open", "closed-open"])
    @pytest.mark.parametrize("pitch", [110.0, 440.0, 1760.0])
    def test_lowest_mode_on_pitch(self, ends, pitch):
        length = solve_length(pitch, radius=0.008, ends=ends, temperature=24.0)
        modes = _modes(length=length, radius=0.008, ends=ends, temperature=24.0)
        assert modes.frequency_hz[0] == pytest.approx(pitch, rel=1e-12)
        c = _cramer(24.0, 50.0)  # the default 50 % RH
        quarter = 2 if ends == "open-open" else 4
        corrections = 2 if ends == "open-open" else 1
        # L = c / (2f) - 2 delta, or c / (4f) - delta.
        assert length == pytest.approx(c / (quarter * pitch) - corrections * LEVINE_SCHWINGER * 0.008, rel=1e-12)

    def test_unreachable(self):
        # 2 delta = 24.5 mm already exceeds c / (2 f) = 21.5 mm at 8 kHz.
        with pytest.raises(UnreachablePitch, match=r"end corrections alone"):
            solve_length(8000.0, radius=0.02, ends="open-open")

    def test_retune_moves_the_length(self):
        patch = patch_from_text(PATCH.format(ends="closed-open", x0=0.2, xp=0.0))
        base = partial_table(patch)
        tuned = partial_table(retune(patch, 2 * base.fundamental_hz))
        assert tuned.fundamental_hz == pytest.approx(2 * base.fundamental_hz, rel=1e-12)
        assert tuned.parameters["radius_m"] == base.parameters["radius_m"]
        # The effective length halves for an octave.
        assert tuned.parameters["effective_length_m"] == pytest.approx(base.parameters["effective_length_m"] / 2, rel=1e-12)
        assert tuned.parameters["length_solved"] is True


# --------------------------------------------------------------------------
# Through the patch file and the command line.

PATCH = """\
name: test-pipe
resonator:
  type: air-column
  ends: {ends}
  length: 400 mm
  radius: 9 mm
  temperature: 20 degC
excitation:
  type: strike
  position: {x0}
  contact_time: 0.3 ms
pickup:
  position: {xp}
damping:
  t60: 0.8 s
  t60_high: 0.3 s
  high_frequency: 2 kHz
render:
  duration: 1 s
  sample_rate: 16000
  bit_depth: 24
  max_modes: 20
"""


def _render(write_patch, tmp_path, capsys, text):
    patch = write_patch(text)
    assert main(["modes", str(patch), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    out = tmp_path / "pipe.wav"
    assert main(["render", str(patch), "-o", str(out), "--quiet"]) == 0
    signal, rate = read_wav(out)
    return report, signal, rate


def _magnitude(signal, rate, frequency):
    """|DFT| of the Hann-windowed signal at `frequency` (Hz)."""
    t = np.arange(len(signal)) / rate
    return abs(np.sum(signal * np.hanning(len(signal)) * np.exp(-2j * math.pi * frequency * t)))


class TestClosedLoop:
    def test_closed_open_sounds_odd_harmonics_only(self, write_patch, tmp_path, capsys):
        report, signal, rate = _render(write_patch, tmp_path, capsys, PATCH.format(ends="closed-open", x0=0.1, xp=0.0))
        f1 = report["fundamental_hz"]
        for mode in report["modes"][:6]:
            found = peak_near(signal[: rate // 2], rate, mode["frequency_hz"], search_hz=20.0)
            # 0.5 s Hann window, 8x padding, parabolic interpolation; harmonics 2 f1 apart.
            assert found == pytest.approx(mode["frequency_hz"], abs=0.5), mode["label"]
        odd = _magnitude(signal, rate, 3 * f1)
        for even in (2, 4, 6):
            # No mode there: only window leakage, far below the odd neighbours.
            assert 20 * math.log10(_magnitude(signal, rate, even * f1) / odd) < -50
        t60 = measured_t60(signal, rate, f1, start_s=0.05, stop_s=0.7)
        # 3%: > 40 dB of clean exponential decay, neighbours 2 f1 away.
        assert t60 == pytest.approx(report["modes"][0]["t60_s"], rel=0.03)

    def test_open_open_pickup_in_the_middle(self, write_patch, tmp_path, capsys):
        # The middle is a pressure node of every even mode: the report says null, the audio agrees.
        text = PATCH.format(ends="open-open", x0=0.1, xp=0.5)
        report, signal, rate = _render(write_patch, tmp_path, capsys, text)
        f1 = report["fundamental_hz"]
        by_harmonic = {m["harmonic"]: m for m in report["modes"]}
        assert by_harmonic[2]["level_db"] is None and by_harmonic[3]["level_db"] is not None
        assert 20 * math.log10(_magnitude(signal, rate, 2 * f1) / _magnitude(signal, rate, f1)) < -50
        assert peak_near(signal[: rate // 2], rate, 3 * f1, search_hz=20.0) == pytest.approx(3 * f1, abs=0.5)


# --------------------------------------------------------------------------
# Bad input: one line, exit status 2, nothing written.  Line numbers refer to BAD_BASE.

BAD_BASE = PATCH.format(ends="closed-open", x0=0.1, xp=0.0)


def _edit(old, new):
    assert BAD_BASE.count(old) == 1, old
    return BAD_BASE.replace(old, new)


BAD_CASES = [
    pytest.param(_edit("  length: 400 mm", "  length: 400 mm\n  pitch: A4"), "resonator.pitch", 6,
                 r"give exactly one of 'pitch' \(the length is solved\) or 'length'", id="length-and-pitch"),
    pytest.param(_edit("  length: 400 mm\n", ""), "resonator", 2,
                 r"give exactly one of 'pitch'", id="neither-length-nor-pitch"),
    pytest.param(_edit("  length: 400 mm", "  pitch: 9 kHz").replace("9 mm", "25 mm"), "resonator.pitch", 5,
                 r"pitch 9000 Hz is above what a closed-open pipe of radius 25 mm can sound "
                 r"\(its end corrections alone give about \d+ Hz\): make the radius smaller or lower the pitch",
                 id="pitch-unreachable"),
    pytest.param(_edit("  length: 400 mm", "  length: 10 mm").replace("9 mm", "100 mm"), "resonator.radius", 6,
                 r"too wide for its lowest mode .* first cross-mode cut-on", id="too-wide"),
    pytest.param(_edit("  radius: 9 mm\n", ""), "resonator.radius", 2,
                 r"missing required key", id="missing-radius"),
    pytest.param(_edit("  ends: closed-open", "  ends: closed-closed"), "resonator.ends", 4,
                 r"'closed-closed' is not allowed; did you mean .*\(allowed: open-open, closed-open\)", id="bad-ends"),
    pytest.param(_edit("  temperature: 20 degC", "  temperature: 293"), "resonator.temperature", 7,
                 r"must be <= 100 degC, got 293", id="kelvin-as-celsius"),
    pytest.param(_edit("  temperature: 20 degC", "  temperature: 293 K"), "resonator.temperature", 7,
                 r"unit 'K' is not allowed here \(units: degC, C\)", id="kelvin-unit"),
    pytest.param(_edit("  temperature: 20 degC", "  temperature: 20 degC\n  humidity: 120"), "resonator.humidity", 8,
                 r"must be <= 100, got 120", id="humidity-above-100"),
    pytest.param(_edit("  temperature: 20 degC", "  temperature: 20 degC\n  humidity: fifty %"), "resonator.humidity", 8,
                 r"a relative humidity in percent, 0\.\.100", id="humidity-not-a-number"),
    pytest.param(_edit("  temperature: 20 degC", "  temperature: 80 degC\n  humidity: 60"), "resonator.humidity", 8,
                 r"at 80 degC a humidity of 60 % is a water-vapour mole fraction of 0\.2\d+, beyond the 0\.06 "
                 r"Cramer's speed of sound covers: lower the humidity", id="humidity-beyond-cramer"),
    pytest.param(_edit("  temperature: 20 degC", "  temperature: 20 degC\n  pressure: 30 kPa"), "resonator.pressure", 8,
                 r"must be >= 60000 Pa, got '30 kPa'", id="pressure-too-low"),
    pytest.param(_edit("  radius: 9 mm", "  radius: 0"), "resonator.radius", 6,
                 r"must be > 0", id="zero-radius"),
    pytest.param(_edit("  position: 0.1", "  position: 1.5"), "excitation.position", 10,
                 r"must be <= 1, got 1\.5 \(a fraction of the length, 0\.\.1\)", id="position-outside"),
    pytest.param(_edit("  position: 0.0", "  position: [0.2, 0.3]"), "pickup.position", 13,
                 r"expected a number.*\(a fraction of the length, 0\.\.1\)", id="position-as-list"),
]


@pytest.mark.parametrize("command", ["render", "modes"])
@pytest.mark.parametrize(("text", "key", "line", "phrase"), BAD_CASES)
def test_bad_air_column_patch(tmp_path, monkeypatch, capsys, command, text, key, line, phrase):
    check_bad_patch(tmp_path, monkeypatch, capsys, command, text, key, line, phrase)
