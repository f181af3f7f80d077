"""Mallets from Hertz contact (issue 16): contact time of a mass on a power-law spring.

A mass m meets a rigid surface at speed v through F = K x^p.  Every reference
here is computed in the test, independently of synth.excitation:

* the closed-form integral tau = 2 int_0^x_max dx / sqrt(v^2 - 2 K x^(p+1) / ((p+1) m))
  by scipy.integrate.quad;
* its Beta-function form (2 x_max / v) B(1/(p+1), 1/2) / (p+1) by scipy.special.beta;
* a direct integration of m x'' = -K x^p from x = 0, x' = v until x returns to 0
  (scipy.integrate.solve_ivp with an event);
* for p = 1 the half period pi sqrt(m / K) of a linear spring.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad, solve_ivp
from scipy.special import beta as beta_function

from synth import patch_from_text
from synth.errors import PatchError
from synth.excitation import MALLETS, hertz_contact_time
from synth.pipeline import partial_table
from synth.voicing import voice_patch

from .cli_checks import check_bad_patch


def _x_max(m, k, p, v):
    return ((p + 1) * m * v * v / (2 * k)) ** (1 / (p + 1))


def _tau_quad(m, k, p, v):
    x_max = _x_max(m, k, p, v)
    # Substitute x = x_max (1 - s^2) to take the 1/sqrt singularity at x_max out of the integrand.
    def integrand(s):
        x = x_max * (1 - s * s)
        rest = v * v - 2 * k * x ** (p + 1) / ((p + 1) * m)
        return 2 * x_max * s / math.sqrt(max(rest, 1e-300))
    value, _ = quad(integrand, 0.0, 1.0, epsabs=0, epsrel=1e-12, limit=200)
    return 2 * value


def _tau_beta(m, k, p, v):
    return 2 * _x_max(m, k, p, v) / v * beta_function(1 / (p + 1), 0.5) / (p + 1)


def _tau_ode(m, k, p, v):
    def rhs(t, y):
        return [y[1], -k * max(y[0], 0.0) ** p / m]

    def back_at_zero(t, y):
        return y[0]
    back_at_zero.terminal, back_at_zero.direction = True, -1
    guess = 10 * _tau_beta(m, k, p, v)
    sol = solve_ivp(rhs, (0, guess), [0.0, v], events=back_at_zero, rtol=1e-11, atol=1e-15, method="DOP853",
                    first_step=guess * 1e-6)
    return float(sol.t_events[0][0])


CASES = [  # (m kg, K N/m^p, p, v m/s)
    (0.025, 4.0e8, 1.5, 1.0),
    (0.030, 1.6e10, 1.5, 3.0),
    (0.003, 4.5e9, 2.5, 2.0),
    (0.030, 1.0e9, 2.5, 0.5),
]


class TestHertzContactTime:
    @pytest.mark.parametrize("m,k,p,v", CASES)
    def test_closed_form_integral(self, m, k, p, v):
        tau = hertz_contact_time(mass=m, stiffness=k, exponent=p, speed=v)
        assert tau == pytest.approx(_tau_quad(m, k, p, v), rel=1e-9)
        assert tau == pytest.approx(_tau_beta(m, k, p, v), rel=1e-12)

    @pytest.mark.parametrize("m,k,p,v", CASES)
    def test_direct_integration(self, m, k, p, v):
        tau = hertz_contact_time(mass=m, stiffness=k, exponent=p, speed=v)
        assert tau == pytest.approx(_tau_ode(m, k, p, v), rel=1e-6)

    def test_linear_spring_is_half_a_period(self):
        assert hertz_contact_time(mass=0.02, stiffness=3e5, exponent=1.0, speed=2.0) == pytest.approx(
            math.pi * math.sqrt(0.02 / 3e5), rel=1e-12)

    def test_hertz_velocity_exponent(self):
        # tau ~ v^((1 - p) / (p + 1)) = v^(-1/5) for p = 3/2 (from the closed form above).
        speeds = np.array([0.25, 0.5, 1.0, 2.0, 4.0])
        taus = [hertz_contact_time(mass=0.025, stiffness=4e8, exponent=1.5, speed=s) for s in speeds]
        slope = np.polyfit(np.log(speeds), np.log(taus), 1)[0]
        assert slope == pytest.approx(-0.2, abs=1e-12)
        slope_ode = math.log(_tau_ode(0.025, 4e8, 1.5, 4.0) / _tau_ode(0.025, 4e8, 1.5, 0.25)) / math.log(16.0)
        assert slope_ode == pytest.approx(-0.2, abs=1e-6)


class TestNamedMallets:
    # Plausible contact times at 1 m/s on a rigid surface (orders of magnitude, common practice /
    # from memory): soft heads a few ms, hard heads a few tenths of a ms, metal below 0.1 ms.
    # Piano-hammer pulses on a rigid surface are about a millisecond at a few m/s (Russell &
    # Rossing 1998, Acustica 84:967; Hall & Askenfelt 1988, via Rossing 2010 ch. 19).
    RANGES = {"yarn": (2e-3, 5e-3), "rubber": (1e-3, 3e-3), "felt": (0.5e-3, 2e-3), "wood": (0.1e-3, 0.6e-3),
              "plastic": (0.1e-3, 0.6e-3), "brass": (0.02e-3, 0.15e-3)}

    @pytest.mark.parametrize("name", sorted(RANGES))
    def test_plausible_contact_time(self, name):
        low, high = self.RANGES[name]
        mallet = MALLETS[name]
        assert low < _tau_beta(mallet.mass, mallet.stiffness, mallet.exponent, 1.0) < high
        assert low < mallet.contact_time < high

    def test_order_soft_to_hard(self):
        order = sorted(MALLETS, key=lambda n: MALLETS[n].contact_time)
        assert order[0] == "brass" and order[-1] == "yarn"
        assert set(MALLETS) == set(self.RANGES)

    def test_felt_exponent_within_published_range(self):
        # Hall & Askenfelt 1988 (via Rossing 2010, ch. 19): p = 2.2-3.5 for felt hammers from pianos.
        assert 2.2 <= MALLETS["felt"].exponent <= 3.5

    def test_rubber_stiffness_is_hertz_sphere(self):
        # K = (4/3) E / (1 - nu^2) sqrt(R): E 20 MPa, nu 0.5, R 12.5 mm (the module's stated head).
        assert MALLETS["rubber"].stiffness == pytest.approx(4 / 3 * 20e6 / 0.75 * math.sqrt(0.0125), rel=1e-12)


BAR = """\
name: mallet-test
resonator:
  type: bar
  material: rosewood
  length: 300 mm
  width: 40 mm
  thickness: 18 mm
excitation:
  type: strike
  position: 0.5
  {mallet}
render:
  duration: 0.1 s
  sample_rate: 16000
"""


class TestPatch:
    def test_named_mallet_sets_the_contact_time(self):
        patch = patch_from_text(BAR.format(mallet="mallet: rubber"))
        assert patch.excitation.contact_time == pytest.approx(_tau_beta(*(
            MALLETS["rubber"].mass, MALLETS["rubber"].stiffness, 1.5, 1.0)), rel=1e-12)
        table = partial_table(patch)
        assert table.parameters["contact_time_s"] == patch.excitation.contact_time
        assert table.parameters["mallet"].startswith("rubber, 25 g, K 3.98e+06 N/m^1.5, p 1.5, at 1 m/s")

    def test_mapping_mallet(self):
        patch = patch_from_text(BAR.format(mallet="mallet: {mass: 0.02, stiffness: 5e8, speed: 2}"))
        assert patch.excitation.contact_time == pytest.approx(_tau_beta(0.02, 5e8, 1.5, 2.0), rel=1e-12)

    def test_named_mallet_with_its_mass_changed(self):
        patch = patch_from_text(BAR.format(mallet="mallet: {material: felt, mass: 0.01}"))
        assert patch.excitation.mallet.exponent == 2.5
        assert patch.excitation.contact_time == pytest.approx(_tau_beta(0.01, 4.5e9, 2.5, 1.0), rel=1e-12)

    @pytest.mark.parametrize("velocity", [1, 20, 64, 100, 127])
    def test_midi_velocity_drives_the_strike_speed(self, velocity):
        # Velocity 100 = the mallet's speed; velocity v strikes at speed v / 100 (as strength grows
        # with v), so the contact time follows the mallet's own law: (v / 100)^(-(p-1)/(p+1)).
        patch = patch_from_text(BAR.format(mallet="mallet: {material: plastic, speed: 1.5}"))
        voiced = voice_patch(patch, velocity=velocity)
        m = MALLETS["plastic"]
        expected = _tau_beta(m.mass, m.stiffness, 1.5, 1.5 * velocity / 100)
        assert voiced.excitation.contact_time == pytest.approx(expected, rel=1e-12)
        assert voiced.excitation.mallet.speed == pytest.approx(1.5 * velocity / 100, rel=1e-15)

    def test_harder_strikes_are_shorter(self):
        # A shorter half-sine pulse reaches higher before its spectrum's first zero, 3 / (2 tau)
        # (synth.excitation module notes): harder, shorter, brighter.
        patch = patch_from_text(BAR.format(mallet="mallet: felt"))
        taus = [voice_patch(patch, velocity=v).excitation.contact_time for v in (10, 30, 64, 100, 127)]
        assert all(later < earlier for earlier, later in zip(taus, taus[1:]))
        # felt p = 2.5: tau ~ v^(-3/7), so 127 against 10 is (12.7)^(-3/7) = 0.336 of it.
        assert taus[-1] / taus[0] == pytest.approx(12.7 ** (-3 / 7), rel=1e-12)


BAD_BASE = BAR.format(mallet="mallet: rubber")


def _edit(new):
    return BAD_BASE.replace("  mallet: rubber", new)


BAD_CASES = [
    pytest.param(_edit("  mallet: rubber\n  contact_time: 1 ms"), "excitation.mallet", 11,
                 r"give mallet or contact_time, not both: a mallet sets the contact time", id="mallet-and-contact-time"),
    pytest.param(_edit("  mallet: rubbr"), "excitation.mallet", 11,
                 r"unknown mallet 'rubbr'; did you mean 'rubber'\? \(known: rubber, yarn, felt, wood, plastic, brass",
                 id="unknown-mallet"),
    pytest.param(_edit("  mallet: {mass: 0.02}"), "excitation.mallet.stiffness", 11, r"missing required key",
                 id="missing-stiffness"),
    pytest.param(_edit("  mallet: {mass: 0.02, stiffness: 1e8, exponent: 0.5}"), "excitation.mallet.exponent", 11,
                 r"must be >= 1", id="exponent-below-1"),
    pytest.param(_edit("  mallet: {mass: -1, stiffness: 1e8}"), "excitation.mallet.mass", 11, r"must be > 0",
                 id="negative-mass"),
    pytest.param(_edit("  mallet: {mass: 50, stiffness: 1e-3, speed: 0.01}"), "excitation.mallet", 11,
                 r"gives a contact time of [\d.e+]+ s; it must be 0 \.\. 1 s", id="contact-too-long"),
    pytest.param(_edit("  mallet: 3"), "excitation.mallet", 11, r"must be a mallet name \(rubber, yarn", id="not-a-mallet"),
    pytest.param(BAD_BASE.replace("type: strike", "type: pluck"), "excitation.mallet", 11,
                 r"a mallet strikes: it needs type: strike \(this excitation is a pluck\)", id="mallet-on-pluck"),
]


@pytest.mark.parametrize(("text", "key", "line", "phrase"), BAD_CASES)
def test_bad_mallet(tmp_path, monkeypatch, capsys, text, key, line, phrase):
    check_bad_patch(tmp_path, monkeypatch, capsys, "modes", text, key, line, phrase)


def test_errors_are_patch_errors():
    with pytest.raises(PatchError, match=r"excitation.mallet: unknown mallet"):
        patch_from_text(_edit("  mallet: steel"))
