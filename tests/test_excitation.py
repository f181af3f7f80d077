"""Excitation weights and damping against published closed forms."""
from __future__ import annotations

import math
import textwrap

import numpy as np
import pytest

from synth.damping import LN1000, two_point_t60
from synth.excitation import contact_envelope, contact_spectrum, excitation_weights


def _string(n_modes, beta, xp=None):
    n = np.arange(1, n_modes + 1)
    f = 100.0 * n
    phi_e = np.sin(n * math.pi * beta)
    phi_p = np.ones(n_modes) if xp is None else np.sin(n * math.pi * xp)
    return n, f, phi_e, phi_p


class TestPluck:
    def test_triangle_series(self):
        # Fletcher & Rossing (1998) sec. 2.7: a triangular pluck of height h at beta L has
        # a_n = 2 h sin(n pi beta) / (n^2 pi^2 beta (1 - beta)).
        # [C] REFERENCES.md sec. 10, beta = 0.2: a1 = 0.744439, a2 = 0.301132, a3 = 0.133836, a5 = 0.
        n, f, phi_e, phi_p = _string(4000, 0.2)
        amplitude, phase = excitation_weights("pluck", f, phi_e, phi_p, strength=1.0)
        signed = amplitude * np.where(np.isclose(phase, np.pi / 2), 1, -1)
        closed = 2 * np.sin(n * np.pi * 0.2) / (n**2 * np.pi**2 * 0.2 * 0.8)
        np.testing.assert_allclose(signed[:50], closed[:50], rtol=1e-3, atol=1e-12)
        assert amplitude[0] == pytest.approx(0.744439, rel=1e-3)
        assert amplitude[1] == pytest.approx(0.301132, rel=1e-3)
        assert amplitude[2] == pytest.approx(0.133836, rel=1e-3)
        assert amplitude[4] == pytest.approx(0.0, abs=1e-12)

    def test_missing_harmonics(self):
        # Common practice: plucking at 1/k of the length removes harmonics k, 2k, 3k...
        n, f, phi_e, phi_p = _string(30, 1 / 3)
        amplitude, _ = excitation_weights("pluck", f, phi_e, phi_p)
        assert np.all(amplitude[2::3] < 1e-12 * amplitude.max())

    def test_cosine_phase(self):
        # A pluck starts from rest: displacement ~ cos, i.e. sin with phase pi/2.
        _, f, phi_e, phi_p = _string(10, 0.13)
        _, phase = excitation_weights("pluck", f, phi_e, phi_p)
        assert np.all(np.isclose(np.mod(phase, np.pi), np.pi / 2))


class TestStrike:
    def test_ideal_strike_is_one_over_n(self):
        # Fletcher & Rossing (1998) ch. 2: a velocity impulse gives displacement ~ sin(n pi beta)/n.
        n, f, phi_e, phi_p = _string(50, 0.1)
        amplitude, phase = excitation_weights("strike", f, phi_e, phi_p, contact_time=0.0)
        expected = np.abs(np.sin(n * np.pi * 0.1) / n)
        np.testing.assert_allclose(amplitude / amplitude[0], expected / expected[0], rtol=1e-12)
        assert np.all(np.isclose(np.mod(phase, np.pi), 0.0))

    def test_contact_spectrum_values(self):
        # [C] REFERENCES.md sec. 10, half-sine force of duration tau: |F(f)/F(0)| =
        # |cos(pi f tau)| / |1 - (2 f tau)^2|: pi/4 at 0.5/tau, 1/3 at 1/tau, zero at 1.5/tau.
        tau = 2e-3
        assert contact_spectrum(0.5 / tau, tau) == pytest.approx(0.7854, abs=1e-4)
        assert contact_spectrum(1.0 / tau, tau) == pytest.approx(1 / 3, rel=1e-12)
        assert contact_spectrum(1.5 / tau, tau) == pytest.approx(0.0, abs=1e-12)
        assert contact_spectrum(0.0, tau) == pytest.approx(1.0)

    def test_longer_contact_darker(self):
        n, f, phi_e, phi_p = _string(40, 0.11)
        short, _ = excitation_weights("strike", f, phi_e, phi_p, contact_time=0.2e-3)
        long, _ = excitation_weights("strike", f, phi_e, phi_p, contact_time=3e-3)
        assert (long[20:] / long[0]).sum() < (short[20:] / short[0]).sum()


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


class TestContactEnvelope:
    def test_through_lobe_peaks(self):
        # The half-sine spectrum's side lobes peak where |cos(pi f tau)| = 1, i.e. at
        # x = 2 f tau = 2, 4, 6 ..., with height 1 / (x^2 - 1) (REFERENCES.md sec. 10 form).
        tau = 1e-3
        for x in (2.0, 4.0, 6.0, 10.0):
            f = x / (2 * tau)
            assert contact_envelope(f, tau) == pytest.approx(1 / (x * x - 1), rel=1e-9)
            assert contact_envelope(f, tau) == pytest.approx(contact_spectrum(f, tau), rel=1e-9)

    def test_no_notches_and_monotone(self):
        tau = 1e-3
        f = np.linspace(0.0, 20.0 / tau, 4001)
        env = contact_envelope(f, tau)
        assert np.all(env >= contact_spectrum(f, tau) - 1e-12)
        assert np.all(np.diff(env) <= 1e-12) and np.all(env > 0)


class TestLevelIndependence:
    """The level of the low modes must not depend on the mode count or the sample rate."""

    @pytest.mark.parametrize("kind", ["pluck", "strike", "impulse"])
    def test_mode_count(self, kind):
        first = []
        for n_modes in (64, 256, 1024):
            n, f, phi_e, phi_p = _string(n_modes, 0.13, xp=0.77)
            amplitude, _ = excitation_weights(kind, f, phi_e, phi_p, contact_time=1e-4)
            first.append(amplitude[:3])
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
