"""Coupled modes (issue 11): courses, polarisations and bar + tube pairs against closed forms.

References, each computed here and never by the code under test:

* Two unison strings on one bridge (Weinreich 1977, "Coupled piano strings", JASA 62:1474;
  page details from memory): to first order in the bridge admittance Y, partial n of strings
  tuned omega_1, omega_2 becomes the two normal modes
  ``lambda = (omega_1 + omega_2)/2 + i sigma + eps +- sqrt(((omega_2 - omega_1)/2)^2 + eps^2)``,
  ``eps = i omega Z0 Y / (n pi)``, time dependence ``exp(i lambda t)``.  The heard weights
  (both strings struck alike, the bridge drive heard) come from the 2 x 2 eigenvectors written
  out by hand below.
* One string on a resistive termination, exactly: ``tan(kL) = i G Z0`` (transmission line), so
  ``Im(omega) = (c / L) atanh(G Z0)``; the first-order model must agree to ``O((G Z0)^2)``.
* Two coupled damped oscillators (any vibration text, e.g. Fletcher & Rossing 1998 ch. 1-2, from
  memory): ``[[lb, g], [g, lt]]`` has eigenvalues ``(lb + lt)/2 +- sqrt(((lb - lt)/2)^2 + g^2)``.
* A closed-open tube's first mode: ``L = c/(4 f) - 0.6133 a`` (Levine & Schwinger 1948), the
  radiation loss of an unflanged end ``|R| = exp(-(ka)^2 / 2)`` per round trip and Kirchhoff's
  wall attenuation ``2.964e-5 sqrt(f) / a`` (1/m, air at 20 degC, as quoted by Weston 1953).

Closed loops: a two-string course and a tubed bar are rendered, read back with the standard
library's ``wave`` module and their partial-1 envelopes compared with the closed forms; every key
of a tuned, tubed bar instrument sounds 1:4:10 within 1 cent in its own audio.
"""
from __future__ import annotations

import cmath
import json
import math

import numpy as np
import pytest

from synth.coupling import (
    Bridge,
    CouplingError,
    KeyCoupling,
    Polarisation,
    course_modes,
    string_modes,
    tube_decay_rate,
    tube_length,
    tube_pair,
)

from .analysis import envelope_db, phase_frequency, read_wav
from .cli_checks import error_line
from .cli_checks import run_cli as run
from .test_air_column import _cramer

LN1000 = math.log(1000.0)
CENT = 2.0 ** (1.0 / 1200.0) - 1.0


def weinreich_pair(omega_1, omega_2, sigma, eps):
    """The two normal modes (lambda, heard weight) of a two-string course, by hand."""
    mean = 0.5 * (omega_1 + omega_2) + 1j * sigma + eps
    root = cmath.sqrt((0.5 * (omega_2 - omega_1)) ** 2 + eps**2)
    a, b = omega_1 + 1j * sigma + eps, omega_2 + 1j * sigma + eps  # the diagonal
    modes = []
    lambdas = (mean - root, mean + root)
    # Eigenvector of [[a, eps], [eps, b]] for lambda: (eps, lambda - a).  V = [[eps, eps], [l1 - a, l2 - a]].
    v = np.array([[eps, eps], [lambdas[0] - a, lambdas[1] - a]])
    det = v[0, 0] * v[1, 1] - v[0, 1] * v[1, 0]
    inverse = np.array([[v[1, 1], -v[0, 1]], [-v[1, 0], v[0, 0]]]) / det
    start = inverse @ np.ones(2)  # both strings struck alike
    for k, lam in enumerate(lambdas):
        heard = (v[0, k] + v[1, k]) / 2.0  # the mean bridge drive
        modes.append((lam, heard * start[k]))
    return modes


class TestCourse:
    def test_two_strings_match_weinreich(self):
        f, sigma, z0 = 220.0, 0.8, 1.9
        bridge = complex(2e-3, 1.5e-3)
        for n, cents in ((1, 1.5), (2, 0.4), (3, 0.0)):
            fn = n * f
            got = course_modes([fn], [sigma], [n], impedance=z0, admittance=bridge, detune_cents=(0.0, cents))
            omega = 2 * math.pi * fn
            eps = 1j * omega * z0 * bridge / (n * math.pi)
            want = sorted(weinreich_pair(omega, omega * 2 ** (cents / 1200), sigma, eps),
                          key=lambda m: (m[0].real, m[0].imag))
            got_lambda = 2 * math.pi * got.frequency_hz + 1j * got.decay_rate
            np.testing.assert_allclose(got_lambda, [m[0] for m in want], rtol=1e-12)
            if cents:
                np.testing.assert_allclose(got.weight, [m[1] for m in want], rtol=1e-9, atol=1e-12)
            else:  # tuned alike: the antisymmetric mode is dark, the symmetric one carries everything
                assert got.weight[np.argmax(got.decay_rate)] == pytest.approx(1.0)
                assert abs(got.weight[np.argmin(got.decay_rate)]) < 1e-12
            assert np.sum(got.weight) == pytest.approx(1.0, abs=1e-12)

    def test_tuned_unison_prompt_sound_decays_at_twice_the_bridge_rate(self):
        """Weinreich's two-stage decay: the in-phase mode loses energy twice as fast into the bridge."""
        f, sigma, z0, g = 300.0, 0.5, 1.2, 3e-3
        one = course_modes([f], [sigma], [1], impedance=z0, admittance=g)
        two = course_modes([f], [sigma], [1], impedance=z0, admittance=g, detune_cents=(0.0, 0.0))
        bridge_rate = 2 * math.pi * f * z0 * g / math.pi
        assert one.decay_rate[0] == pytest.approx(sigma + bridge_rate, rel=1e-12)
        assert sorted(two.decay_rate) == pytest.approx([sigma, sigma + 2 * bridge_rate], rel=1e-12)

    def test_one_string_on_a_resistive_bridge_agrees_with_the_exact_line(self):
        """Im(omega) = (c/L) atanh(G Z0) exactly; the model is its first order."""
        f1, z0 = 110.0, 2.0
        for conductance in (1e-3, 5e-3):
            for n in (1, 4, 9):
                got = course_modes([n * f1], [0.0], [n], impedance=z0, admittance=conductance)
                c_over_l = 2 * f1  # c / L = 2 f1 for a string fixed at both ends
                exact = c_over_l * math.atanh(conductance * z0)
                assert got.decay_rate[0] == pytest.approx(exact, rel=(conductance * z0) ** 2)

    def test_polarisations_split_each_mode(self):
        f, sigma, z0 = 200.0, 1.0, 1.5
        bridge = Bridge(4e-3)
        horizontal = Polarisation(4e-4, 0.0, split_cents=0.8, angle=math.radians(30))
        got = string_modes([f], [sigma], [1], impedance=z0, bridge=bridge, polarisation=horizontal)
        rate = 2 * f * z0  # omega Z0 / pi for n = 1
        by_tag = dict(zip(got.suffix, zip(got.frequency_hz, got.decay_rate, got.weight)))
        assert by_tag["v"][0] == pytest.approx(f, rel=1e-12) and by_tag["v"][1] == pytest.approx(sigma + rate * 4e-3)
        assert by_tag["h"][0] == pytest.approx(f * 2 ** (0.8 / 1200), rel=1e-12)
        # eps is taken at the reference string's omega: the split's own effect on it is second order.
        assert by_tag["h"][1] == pytest.approx(sigma + rate * 4e-4, rel=1e-12)
        assert by_tag["v"][2] == pytest.approx(math.cos(math.radians(30)))
        assert by_tag["h"][2] == pytest.approx(math.sin(math.radians(30)) * 0.1)

    def test_bad_coupling_values_are_refused(self):
        with pytest.raises(CouplingError, match="conductance=-0.001 must be finite and >= 0"):
            Bridge(-1e-3)
        with pytest.raises(CouplingError, match="no string impedance"):
            KeyCoupling(bridge=Bridge(1e-3)).apply([100.0], [1.0], [1])


class TestTube:
    def test_pair_matches_the_two_oscillator_closed_form(self):
        fb, sb, ft, st, coupling, level = 262.0, 3.0, 263.0, 11.0, 3e-3, 1.5
        got = tube_pair(fb, sb, tube_frequency_hz=ft, tube_decay_rate=st, coupling=coupling, level=level)
        lb, lt = complex(2 * math.pi * fb, sb), complex(2 * math.pi * ft, st)
        g = coupling * 2 * math.pi * fb
        root = cmath.sqrt(((lb - lt) / 2) ** 2 + g**2)
        want = sorted([(lb + lt) / 2 - root, (lb + lt) / 2 + root], key=lambda z: (z.real, z.imag))
        np.testing.assert_allclose(2 * math.pi * got.frequency_hz + 1j * got.decay_rate, want, rtol=1e-12)
        # Struck bar a(0) = [1, 0], heard [1, level]: eigenvectors (g, lambda - lb) by hand.
        v = np.array([[g, g], [want[0] - lb, want[1] - lb]])
        start = np.linalg.solve(v, [1.0, 0.0])
        np.testing.assert_allclose(got.weight, (v[0] + level * v[1]) * start, rtol=1e-9)

    def test_tube_length_and_decay(self):
        c = _cramer(20.0, 50.0)  # the air column's speed of sound at 20 degC, 50 % RH (Cramer 1993)
        f, a = 262.0, 0.03
        assert tube_length(f, a) == pytest.approx(c / (4 * f) - 0.6133 * a, rel=1e-12)
        ka = 2 * math.pi * f * a / c
        radiation = -math.log(math.exp(-(ka**2) / 2)) / (2 * (c / (4 * f)) / c)  # |R| lost once per round trip
        wall = 2.964e-5 * math.sqrt(f) / a * c
        assert tube_decay_rate(f, a) == pytest.approx(radiation + wall, rel=1e-12)


# --------------------------------------------------------------------------- closed loops

STRING = """\
name: course-string
resonator: {type: string, material: music-wire, length: 650 mm, diameter: 1.0 mm, pitch: A3}
excitation: {type: impulse, position: 0.13}
pickup: {position: 0.07, measures: displacement}
damping: {t60: 4 s, release_t60: null}
render: {duration: 3 s, sample_rate: 8000, max_modes: 1, bit_depth: 24}
"""

COURSE = """\
name: course
patch: string.yaml
range: {from: A3, to: A3}
courses: {strings: 2, detune_cents: [0, 1.5]}
bridge: {conductance: 1.5e-3, susceptance: 3.0e-3}
"""


def _json(capsys, *argv):
    status, out, err = run(capsys, *argv)
    assert status == 0, err
    return json.loads(out)


def _compare_envelopes(path, frequency, lambdas, weights, *, floor_db=-45.0):
    """Measured partial envelope (dB) against |sum w exp(i lambda t)| up to one offset."""
    signal, rate = read_wav(path)
    times, measured = envelope_db(signal, rate, frequency, frame_s=0.02)
    predicted = 20 * np.log10(np.abs(np.exp(1j * np.outer(times, lambdas)) @ weights))
    use = (times > 0.05) & (predicted > predicted.max() + floor_db)
    offset = np.median(measured[use] - predicted[use])
    deviation = np.abs(measured[use] - predicted[use] - offset)
    return times[use], measured[use] - offset, predicted[use], float(deviation.max())


def test_a_rendered_course_beats_and_decays_in_two_stages(capsys, tmp_path):
    (tmp_path / "string.yaml").write_text(STRING, encoding="utf-8")
    (tmp_path / "course.yaml").write_text(COURSE, encoding="utf-8")
    table = _json(capsys, "modes", tmp_path / "course.yaml", "--pitch", "A3", "--json")
    p = table["parameters"]
    # The reference string (before coupling): Fletcher's pinned stiff string from the reported values.
    f1 = math.sqrt(p["tension_n"] / p["linear_density_kg_m"]) / (2 * p["length_m"]) * math.sqrt(1 + p["inharmonicity_b"])
    omega = 2 * math.pi * f1
    z0 = math.sqrt(p["tension_n"] * p["linear_density_kg_m"])
    eps = 1j * omega * z0 * complex(1.5e-3, 3.0e-3) / math.pi
    pair = sorted(weinreich_pair(omega, omega * 2 ** (1.5 / 1200), LN1000 / 4.0, eps), key=lambda m: m[0].real)
    lambdas = np.array([m[0] for m in pair])
    weights = np.array([m[1] for m in pair])
    modes = table["modes"]
    np.testing.assert_allclose([m["frequency_hz"] for m in modes], lambdas.real / (2 * math.pi), rtol=1e-9)
    np.testing.assert_allclose([m["t60_s"] for m in modes], LN1000 / lambdas.imag, rtol=1e-9)
    # The key sounds its target: the course's weighted mean frequency sits on A3.
    heard = np.sum(np.abs(weights) * lambdas.real) / np.sum(np.abs(weights)) / (2 * math.pi)
    assert abs(1200 * math.log2(heard / 220.0)) < 0.01

    beat_hz = abs(lambdas[1].real - lambdas[0].real) / (2 * math.pi)
    slow, fast = sorted(lambdas.imag)
    assert beat_hz > 0.5 and fast > 2 * slow  # the case really beats and decays in two stages

    out = tmp_path / "course.wav"
    status, _, err = run(capsys, "render", tmp_path / "course.yaml", "--pitch", "A3", "-o", out, "--quiet")
    assert status == 0, err
    times, measured, predicted, worst = _compare_envelopes(out, heard, lambdas, weights, floor_db=-70.0)
    assert worst < 0.5, worst  # dB, the whole envelope: beats and both stages
    assert times[-1] > 2.0
    early, late = times < 0.4, times > 1.4
    slopes = [np.polyfit(times[part], level[part], 1)[0] for part in (early, late) for level in (measured, predicted)]
    early, early_want, late, late_want = slopes
    assert early == pytest.approx(early_want, rel=0.05) and late == pytest.approx(late_want, rel=0.05)
    assert early < 1.5 * late  # two slopes (dB/s, both negative): the prompt sound falls faster
    # The beat is in the audio: the same comparison with the two frequencies made equal fails.
    unbeaten = lambdas.imag * 1j + lambdas.real.mean()
    assert _compare_envelopes(out, heard, unbeaten, weights, floor_db=-70.0)[3] > 3.0


BAR = """\
name: tubed-bar
resonator: {type: bar, material: rosewood, width: 50 mm, thickness: 20 mm, pitch: C4, supports: free-free}
excitation: {type: impulse, position: 0.5}
pickup: {position: 0.5, measures: displacement}
damping: {t60: 2 s, release_t60: null}
render: {duration: 2 s, sample_rate: 8000, max_modes: 1, bit_depth: 24}
"""

TUBED = """\
name: tubed
patch: bar.yaml
range: {from: C4, to: C4}
tubes: {radius: 30 mm}
"""


def test_a_tubed_bar_decays_as_the_coupled_pair_predicts(capsys, tmp_path):
    (tmp_path / "bar.yaml").write_text(BAR, encoding="utf-8")
    (tmp_path / "tubed.yaml").write_text(TUBED, encoding="utf-8")
    table = _json(capsys, "modes", tmp_path / "tubed.yaml", "--pitch", "C4", "--json")
    p = table["parameters"]
    fb = p["tube_frequency_hz"]  # the tube is tuned to the bar's fundamental, so this is the bar's own
    c = _cramer(20.0, 50.0)  # Cramer 1993 at 20 degC, 50 % RH (tests/test_air_column.py)
    ka = 2 * math.pi * fb * 0.03 / c
    tube_rate = ka**2 * fb + 2.964e-5 * math.sqrt(fb) / 0.03 * c
    assert p["tube_length_m"] == pytest.approx(c / (4 * fb) - 0.6133 * 0.03, rel=1e-12)
    lb, lt = complex(2 * math.pi * fb, LN1000 / 2.0), complex(2 * math.pi * fb, tube_rate)
    g = p["tube_coupling"] * 2 * math.pi * fb
    root = cmath.sqrt(((lb - lt) / 2) ** 2 + g**2)
    lambdas = np.array(sorted([(lb + lt) / 2 - root, (lb + lt) / 2 + root], key=lambda z: (z.real, z.imag)))
    v = np.array([[g, g], [lambdas[0] - lb, lambdas[1] - lb]])
    weights = (v[0] + p["tube_level"] * v[1]) * np.linalg.solve(v, [1.0, 0.0])
    np.testing.assert_allclose([m["frequency_hz"] for m in table["modes"]], lambdas.real / (2 * math.pi), rtol=1e-9)
    np.testing.assert_allclose([m["t60_s"] for m in table["modes"]], LN1000 / lambdas.imag, rtol=1e-9)
    heard = np.sum(np.abs(weights) * lambdas.real) / np.sum(np.abs(weights)) / (2 * math.pi)
    assert abs(1200 * math.log2(heard / 261.6255653)) < 0.05  # the key still sounds C4

    out = tmp_path / "tubed.wav"
    status, _, err = run(capsys, "render", tmp_path / "tubed.yaml", "--pitch", "C4", "-o", out, "--quiet")
    assert status == 0, err
    times, measured, predicted, worst = _compare_envelopes(out, heard, lambdas, weights)
    assert worst < 0.5, worst
    slope = np.polyfit(times[times < 1.0], measured[times < 1.0], 1)[0]
    assert -60.0 / slope < 0.8 * 2.0  # the tube takes energy: the fundamental rings shorter than the bare bar's 2 s


TUNED = """\
name: tuned-bars
patch: bar.yaml
range: {from: E5, to: F5}
vary:
  resonator.width: {E5: 40 mm, F5: 38 mm}
tune: {ratios: "1:4:10", points: 15}
tubes: {radius: 20 mm}
"""


def test_every_key_of_a_tuned_tubed_bar_instrument_sounds_its_ratios(capsys, tmp_path):
    # Struck and heard near one end, where all three partials sound (the centre is a node of B2).
    bar = BAR.replace("max_modes: 1", "max_modes: 3").replace("sample_rate: 8000", "sample_rate: 32000") \
        .replace("position: 0.5", "position: 0.07").replace("thickness: 20 mm", "thickness: 16 mm")
    (tmp_path / "bar.yaml").write_text(bar, encoding="utf-8")
    (tmp_path / "tuned.yaml").write_text(TUNED, encoding="utf-8")
    for key, target in (("E5", 659.2551138), ("F5", 698.4564629)):
        out = tmp_path / f"{key}.wav"
        status, _, err = run(capsys, "render", tmp_path / "tuned.yaml", "--pitch", key, "-o", out, "--quiet")
        assert status == 0, err
        signal, rate = read_wav(out)
        heard = [phase_frequency(signal, rate, target * r, stop_s=1.2) for r in (1, 4, 10)]
        assert abs(1200 * math.log2(heard[0] / target)) < 1.0
        for ratio, f in zip((4, 10), heard[1:]):
            assert abs(1200 * math.log2(f / heard[0] / ratio)) < 1.0, (key, ratio, f / heard[0])
    assert (tmp_path / "tuned.tuned.json").exists()  # the fits are kept beside the instrument


def test_polarisations_key_on_a_bar_refused(capsys, tmp_path):
    (tmp_path / "bar.yaml").write_text(BAR, encoding="utf-8")
    (tmp_path / "i.yaml").write_text("name: i\npatch: bar.yaml\nrange: {from: C4, to: C5}\npolarisations: true\n",
                                     encoding="utf-8")
    status, out, err = run(capsys, "range", tmp_path / "i.yaml")
    assert status == 2 and "i.yaml:4: polarisations: a bridge and polarisations are for strings, not a bar" \
        in error_line(err)
