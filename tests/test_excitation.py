"""Excitation pulses, modal weights and damping against published and independent closed forms.

References used below: Fletcher & Rossing, *The Physics of Musical
Instruments* (1998), sec. 2.7-2.8 (triangle pluck series, struck string);
shared/REFERENCES.md sec. 8 (damping) and sec. 10 (the half-sine contact
spectrum, computed there independently).  The onset is checked against the
convolution integral evaluated numerically here (scipy.integrate.quad), not
against the code's own formulas.
"""
from __future__ import annotations

import math
import textwrap

import numpy as np
import pytest
from scipy.integrate import quad

from synth.damping import LN1000, two_point_t60
from synth.excitation import Pulse, check_measure, contact_spectrum, drive_coefficients, onset_samples

SIGMA = 1e-9  # 1/s: decay small enough that the undamped closed forms hold to ~1e-12


def _string(n_modes, beta, xp=None):
    n = np.arange(1, n_modes + 1)
    f = 100.0 * n
    phi_e = np.sin(n * math.pi * beta)
    phi_p = np.ones(n_modes) if xp is None else np.sin(n * math.pi * xp)
    return n, f, phi_e, phi_p


def _post(kind, duration, f, phi_e, phi_p, strength=1.0):
    """Complex amplitudes (displacement) of the modes once the force is over."""
    s = -SIGMA + 2j * math.pi * np.asarray(f)
    return drive_coefficients(kind, f, phi_e, phi_p, strength=strength) * Pulse(kind, duration).transform(s)


class TestPluck:
    def test_triangle_series(self):
        # Fletcher & Rossing (1998) sec. 2.7: a triangular pluck of height h at beta L has
        # a_n = 2 h sin(n pi beta) / (n^2 pi^2 beta (1 - beta)).
        # [C] REFERENCES.md sec. 10, beta = 0.2: a1 = 0.744439, a2 = 0.301132, a3 = 0.133836, a5 = 0.
        n, f, phi_e, phi_p = _string(4000, 0.2)
        post = _post("pluck", 0.0, f, phi_e, phi_p)
        # A release from rest: x = Im[A e^(i w t)] = a cos(w t), so A = i a.
        np.testing.assert_allclose(post.real, 0.0, atol=1e-10)  # sigma / omega ~ 1e-12
        closed = 2 * np.sin(n * np.pi * 0.2) / (n**2 * np.pi**2 * 0.2 * 0.8)
        np.testing.assert_allclose(post.imag[:50], closed[:50], rtol=1e-3, atol=1e-12)
        assert abs(post[0]) == pytest.approx(0.744439, rel=1e-3)
        assert abs(post[1]) == pytest.approx(0.301132, rel=1e-3)
        assert abs(post[2]) == pytest.approx(0.133836, rel=1e-3)
        assert abs(post[4]) == pytest.approx(0.0, abs=1e-12)

    def test_missing_harmonics(self):
        # Common practice: plucking at 1/k of the length removes harmonics k, 2k, 3k...
        n, f, phi_e, phi_p = _string(30, 1 / 3)
        amplitude = np.abs(_post("pluck", 0.0, f, phi_e, phi_p))
        assert np.all(amplitude[2::3] < 1e-12 * amplitude.max())

    def test_release_filters_like_a_half_sine_rate(self):
        # The holding force falls as (1 + cos(pi u / T)) / 2; its rate of fall is a half-sine
        # pulse of area 1 and duration T, so each mode is the ideal pluck times that pulse's
        # spectrum: |cos(pi f T)| / |1 - (2 f T)^2| (REFERENCES.md sec. 10, computed there).
        n, f, phi_e, phi_p = _string(60, 0.17)
        release = 0.8e-3
        ratio = np.abs(_post("pluck", release, f, phi_e, phi_p)) / np.abs(_post("pluck", 0.0, f, phi_e, phi_p))
        np.testing.assert_allclose(ratio, contact_spectrum(f, release), rtol=1e-7, atol=1e-9)


class TestStrike:
    def test_ideal_strike_is_one_over_n(self):
        # Fletcher & Rossing (1998) ch. 2: a velocity impulse gives displacement ~ sin(n pi beta)/n.
        n, f, phi_e, phi_p = _string(50, 0.1)
        post = _post("strike", 0.0, f, phi_e, phi_p)
        np.testing.assert_allclose(post.imag, 0.0, atol=1e-12)  # x = a sin(w t): A real
        expected = np.sin(n * np.pi * 0.1) / n
        np.testing.assert_allclose(np.abs(post) / abs(post[0]), np.abs(expected / expected[0]), rtol=1e-12)

    def test_contact_spectrum_values(self):
        # [C] REFERENCES.md sec. 10, half-sine force of duration tau: |F(f)/F(0)| =
        # |cos(pi f tau)| / |1 - (2 f tau)^2|: pi/4 at 0.5/tau, 1/3 at 1/tau, zero at 1.5/tau.
        tau = 2e-3
        assert contact_spectrum(0.5 / tau, tau) == pytest.approx(0.7854, abs=1e-4)
        assert contact_spectrum(1.0 / tau, tau) == pytest.approx(1 / 3, rel=1e-12)
        assert contact_spectrum(1.5 / tau, tau) == pytest.approx(0.0, abs=1e-12)
        assert contact_spectrum(0.0, tau) == pytest.approx(1.0)

    def test_pulse_transform_is_the_contact_spectrum_on_the_axis(self):
        tau = 1.3e-3
        f = np.linspace(10.0, 20.0 / tau, 997)
        got = np.abs(Pulse("strike", tau).transform(-SIGMA + 2j * np.pi * f))
        np.testing.assert_allclose(got, contact_spectrum(f, tau), rtol=1e-7, atol=1e-9)

    def test_damping_fills_the_zeros(self):
        # With sigma > 0 the transform at the first zero (1.5 / tau) is no longer 0 but small:
        # int (pi/2tau) sin(pi u/tau) e^(sigma u) cos... evaluated here by quadrature.
        tau, sigma = 1e-3, 40.0
        omega = 2 * np.pi * 1.5 / tau
        integrand = lambda u, part: (np.pi / (2 * tau)) * np.sin(np.pi * u / tau) * np.exp(sigma * u) * (
            np.cos(omega * u) if part == 0 else -np.sin(omega * u))
        reference = complex(quad(integrand, 0, tau, args=(0,))[0], quad(integrand, 0, tau, args=(1,))[0])
        got = Pulse("strike", tau).transform(np.array([-sigma + 1j * omega]))[0]
        assert got == pytest.approx(reference, rel=1e-9, abs=1e-14)
        assert 0.0 < abs(got) < 0.01


class TestOnset:
    """The onset against the convolution integral, evaluated numerically here."""

    @staticmethod
    def _force(kind, duration, u):
        if kind == "strike":
            return (np.pi / (2 * duration)) * np.sin(np.pi * u / duration) if 0 <= u <= duration else 0.0
        return 0.5 * (np.cos(np.pi * u / duration) - 1) if u <= duration else -1.0  # a pluck: the force change

    @pytest.mark.parametrize("kind, duration, measures", [
        ("strike", 1e-3, "displacement"), ("strike", 1e-3, "velocity"), ("strike", 2.3e-3, "acceleration"),
        ("pluck", 0.5e-3, "velocity"), ("pluck", 1.7e-3, "acceleration"),
    ])
    def test_onset_is_the_convolution(self, kind, duration, measures):
        rate, sigma, c = 48000.0, 12.0, 0.37
        frequency = np.array([440.0, 2900.0])
        weights = np.array([c, -0.6 * c])
        s = -sigma + 2j * np.pi * frequency
        k = ["displacement", "velocity", "acceleration"].index(measures)
        got = onset_samples(Pulse(kind, duration), weights, s, measures=measures, reference_omega=1.0,
                            sample_rate=rate)
        assert got.size == math.ceil(duration * rate - 1e-9)

        def response(t, w, weight):  # the k-th derivative of the displacement impulse response
            e = np.exp(-sigma * t)
            shapes = (e * np.sin(w * t), e * (w * np.cos(w * t) - sigma * np.sin(w * t)),
                      e * ((sigma**2 - w**2) * np.sin(w * t) - 2 * sigma * w * np.cos(w * t)))
            return weight * shapes[k]

        for j in range(0, got.size, max(1, got.size // 7)):
            t = j / rate
            total = 0.0
            for f, weight in zip(frequency, weights):
                w = 2 * np.pi * f
                total += quad(lambda u: self._force(kind, duration, u) * response(t - u, w, weight), 0, t,
                              limit=200, epsabs=1e-14)[0]
                if k == 2:  # the derivative of a convolution: force x the velocity response at 0
                    total += self._force(kind, duration, t) * weight * w
            assert got[j] == pytest.approx(total, rel=1e-7, abs=1e-9 * max(1.0, abs(total)))

    def test_measures_that_would_start_with_a_step_are_named(self):
        assert check_measure("impulse", "velocity") and check_measure("pluck", "displacement")
        assert check_measure("strike", "displacement") is None and check_measure("pluck", "velocity") is None


class TestDamping:
    def test_t60_sigma(self):
        # [C] REFERENCES.md sec. 8: T60 = 3 ln 10 / sigma = 6.9078 / sigma.
        assert LN1000 == pytest.approx(6.9078, abs=1e-4)

    def test_two_point_reproduces_chaigne_askenfelt_form(self):
        # Chaigne & Askenfelt 1994 (JASA 95:1112): sigma = b1 + b3 omega^2; C4 values
        # b1 = 0.5 1/s, b3 = 6.25e-9 s (from memory, REFERENCES.md sec. 8).
        b1, b3 = 0.5, 6.25e-9

        def sigma(f):
            return b1 + b3 * (2 * np.pi * f) ** 2

        f1, fh = 262.0, 5000.0
        assert sigma(f1) == pytest.approx(0.517, abs=1e-3)  # REFERENCES.md sec. 8
        assert sigma(fh) == pytest.approx(6.67, abs=0.01)
        f = np.array([262.0, 500.0, 1000.0, 2500.0, 5000.0])
        t60 = two_point_t60(f, t60=LN1000 / sigma(f1), fundamental_hz=f1, t60_high=LN1000 / sigma(fh), high_frequency=fh)
        np.testing.assert_allclose(t60, LN1000 / sigma(f), rtol=1e-10)

    def test_flat_without_high_point(self):
        np.testing.assert_allclose(two_point_t60([100, 5000], t60=2.5, fundamental_hz=100), 2.5)


class TestLevelIndependence:
    """The level of the low modes must not depend on the mode count or the sample rate."""

    @pytest.mark.parametrize("kind", ["pluck", "strike", "impulse"])
    def test_mode_count(self, kind):
        first = []
        for n_modes in (64, 256, 1024):
            n, f, phi_e, phi_p = _string(n_modes, 0.13, xp=0.77)
            first.append(np.abs(drive_coefficients(kind, f, phi_e, phi_p))[:3])
        # A pluck's normalising sum converges like its tail sum_{n>N} sin^2/n^2 ~ 1/(2N),
        # against pi^2 beta (1 - beta) / 2 = 0.56: 1.4% at N = 64, 0.35% at N = 256.
        np.testing.assert_allclose(first[0], first[2], rtol=0.02 if kind == "pluck" else 1e-12)
        np.testing.assert_allclose(first[1], first[2], rtol=0.005 if kind == "pluck" else 1e-12)

    @pytest.mark.parametrize("kind", ["pluck", "strike", "impulse"])
    def test_sample_rate(self, kind, write_patch):
        import synth

        text = f"""\
        name: rate
        resonator: {{type: string, material: music-wire, length: 0.65, diameter: 0.45 mm, pitch: A2}}
        excitation: {{type: {kind}, position: 0.13, contact_time: 0.3 ms}}
        pickup: {{position: 0.77}}
        render: {{max_modes: 256, sample_rate: 16000}}
        """
        low = synth.partial_table(synth.patch_from_text(textwrap.dedent(text)))
        high = synth.partial_table(synth.patch_from_text(textwrap.dedent(text).replace("16000", "48000")))
        assert len(high.amplitude) > len(low.amplitude)
        np.testing.assert_allclose(low.amplitude[:10], high.amplitude[:10], rtol=1e-12)


class TestLevelsWhereTheForceEnds:
    """A mode that dies within the contact is not the loudest: levels compare modes when the force ends."""

    def test_band_energies_of_a_soft_strike_match_the_audio(self):
        import synth

        # A large membrane under a 3 ms strike whose high modes ring < 1 ms: referred back to
        # t = 0 their amplitudes grow by e^(sigma tau) and looked 100+ dB too loud.  Closed loop:
        # the share of the energy above 500 Hz / 1 kHz / 2 kHz in the first 0.25 s after the
        # contact, predicted from the table's level_db and T60 alone (a mode of level L and decay
        # sigma holds 10^(L/10) (1 - e^(-2 sigma T)) / (2 sigma) over T), against the render's
        # spectrum (rectangular window tapered at its end only, so fast decays keep their weight).
        patch = synth.patch_from_text(textwrap.dedent("""\
            name: soft-hand-drum
            resonator: {type: membrane, shape: circle, radius: 230 mm, areal_density: 0.3, pitch: D3}
            excitation: {type: strike, position: {radius: 0.62, angle: 0 deg}, contact_time: 3 ms}
            pickup: {position: {radius: 0.35, angle: 40 deg}}
            damping: {t60: 1.4 s, t60_high: 0.12 s, high_frequency: 2 kHz}
            render: {sample_rate: 16000, max_modes: auto, duration: 0.4 s}
            """))
        table = synth.partial_table(patch, onset=False)
        level = np.nan_to_num(table.level_db, nan=-np.inf)
        assert table.frequency_hz[int(np.argmax(level))] < 500.0
        signal, _ = synth.render_patch(patch)
        start, n = 48, 4000  # the contact's 3 ms at 16 kHz, then 0.25 s
        x = np.asarray(signal, dtype=float)[start:start + n]
        window = np.ones(n)
        window[-n // 4:] = np.hanning(n // 2)[n // 4:]
        power = np.abs(np.fft.rfft(x * window)) ** 2
        f = np.fft.rfftfreq(n, 1.0 / 16000)
        sigma = LN1000 / table.t60_s
        energy = 10.0 ** (level / 10.0) * -np.expm1(-2.0 * sigma * n / 16000) / (2.0 * sigma)
        for cut in (500.0, 1000.0, 2000.0):
            predicted = 10.0 * np.log10(energy[table.frequency_hz > cut].sum() / energy.sum())
            heard = 10.0 * np.log10(power[f > cut].sum() / power.sum())
            assert abs(predicted - heard) < 2.0, (cut, predicted, heard)
