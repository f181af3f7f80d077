"""String physics held against published laws and check values.

Every reference below is computed in this file from the published formula
(never by calling the module under test for the expected value), and each
check names its source.  Values marked [C] in ../shared/REFERENCES.md were
computed independently with numpy/scipy and are quoted as literals here.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from synth.materials import MATERIALS
from synth.resonators.string import (
    SAFE_STRESS_FRACTION,
    StringSpec,
    UnreachablePitch,
    Winding,
    fletcher_clamped_frequencies,
    solve_tension,
    string_modes,
)
from synth.units import midi_to_hz, note_to_midi, parse_pitch

# The worked example used throughout: steel, rho=7850, d=0.43 mm, L=0.65 m, T=70 N.
RHO, D, L, T, E = 7850.0, 0.43e-3, 0.65, 70.0, 200e9


def _spec(**changes):
    values = dict(length=L, diameter=D, density=RHO, youngs_modulus=E, tension=T)
    values.update(changes)
    return StringSpec(**values)


def _modes(spec, n=10, x0=0.2, xp=None):
    return string_modes(spec, excitation_position=x0, pickup_position=xp, n_modes=n)


def fletcher_reference(n, *, rho, d, length, tension, youngs, clamped=False):
    """Independent re-implementation of Fletcher (1964), JASA 36(1):203-209."""
    mu = rho * math.pi * d * d / 4
    f0 = math.sqrt(tension / mu) / (2 * length)
    b = math.pi**3 * youngs * d**4 / (64 * tension * length**2)
    f = [k * f0 * math.sqrt(1 + b * k * k) for k in n]
    if clamped:
        f = [x * (1 + 2 * math.sqrt(b) / math.pi + 4 * b / math.pi**2) for x in f]
    return np.array(f), b


class TestMersenneTaylor:
    """Ideal string: f_n = (n / 2L) sqrt(T / mu) (Mersenne's laws, 1636; Taylor, 1713)."""

    def test_worked_example(self):
        # [C] REFERENCES.md sec. 1: mu = 1.139978e-3 kg/m, f1 = 190.6152 Hz.
        table = _modes(_spec(youngs_modulus=0.0))
        assert table.parameters["linear_density_kg_m"] == pytest.approx(1.139978e-3, rel=1e-6)
        assert table.frequency_hz[0] == pytest.approx(190.6152, abs=1e-4)

    def test_scaling_laws(self):
        # Mersenne: f ~ 1/L, f ~ sqrt(T), f ~ 1/sqrt(mu) (~ 1/d at fixed density).
        base = _modes(_spec(youngs_modulus=0.0)).frequency_hz[0]
        assert _modes(_spec(youngs_modulus=0.0, length=2 * L)).frequency_hz[0] == pytest.approx(base / 2, rel=1e-12)
        assert _modes(_spec(youngs_modulus=0.0, tension=4 * T)).frequency_hz[0] == pytest.approx(2 * base, rel=1e-12)
        assert _modes(_spec(youngs_modulus=0.0, diameter=2 * D)).frequency_hz[0] == pytest.approx(base / 2, rel=1e-12)

    def test_harmonic_series(self):
        # Common practice: an ideal string's harmonic n sits at n times the fundamental.
        f = _modes(_spec(youngs_modulus=0.0), n=40).frequency_hz
        np.testing.assert_allclose(f, f[0] * np.arange(1, 41), rtol=1e-12)

    def test_wave_speed_is_frequency_times_wavelength(self):
        # Common practice: v = f lambda, lambda_n = 2L/n, v = sqrt(T/mu) for an ideal string.
        modes = _modes(_spec(youngs_modulus=0.0), n=12)
        mu = RHO * math.pi * D**2 / 4
        wavelength = np.array(modes.columns["wavelength_m"])
        np.testing.assert_allclose(wavelength, 2 * L / np.arange(1, 13), rtol=1e-12)
        np.testing.assert_allclose(modes.frequency_hz * wavelength, math.sqrt(T / mu), rtol=1e-12)

    def test_nodes_and_antinodes(self):
        # Common practice: mode n has n+1 nodes counting the ends and n antinodes;
        # harmonic n is overtone n-1.
        modes = _modes(_spec(), n=9)
        for i, n in enumerate(range(1, 10)):
            assert modes.columns["n_nodes"][i] == n + 1
            assert modes.columns["n_antinodes"][i] == n
            assert modes.columns["harmonic"][i] == n
            assert modes.columns["overtone"][i] == n - 1
            positions = np.array(modes.columns["node_positions"][i])
            assert len(positions) == n + 1
            np.testing.assert_allclose(np.sin(n * math.pi * positions), 0.0, atol=1e-12)


class TestFletcherStiffString:
    """Fletcher (1964): f_n = n f0 sqrt(1 + B n^2), B = pi^3 E d^4 / (64 T L^2)."""

    def test_published_check_values(self):
        # [C] REFERENCES.md sec. 2 (E = 200 GPa): B = 1.12008e-4, f1 = 190.6258,
        # f2 = 381.3157, f5 = 954.4093, f10 = 1916.797 Hz.
        modes = _modes(_spec(), n=10)
        assert modes.parameters["inharmonicity_b"] == pytest.approx(1.12008e-4, rel=1e-5)
        f = modes.frequency_hz
        assert f[0] == pytest.approx(190.6258, abs=1e-4)
        assert f[1] == pytest.approx(381.3157, abs=1e-4)
        assert f[4] == pytest.approx(954.4093, abs=1e-4)
        assert f[9] == pytest.approx(1916.797, abs=1e-3)
        # f10 is 9.64 cents sharp of 10 f1 of the ideal string (same source).
        assert 1200 * math.log2(f[9] / (10 * 190.6152)) == pytest.approx(9.64, abs=0.01)

    def test_clamped_ends(self):
        # [C] REFERENCES.md sec. 2: Fletcher's clamped factor 1.006783 -> f1 = 191.9188, f10 = 1929.799.
        # That is Fletcher's small-B approximation; the model solves the exact clamped law
        # (tests/test_string_exact.py holds it against an independent Chebyshev solver), which at
        # B = 1.12e-4 lies within 0.03 cent of it for n <= 10.
        mu = RHO * math.pi * D**2 / 4
        b = math.pi**3 * E * D**4 / (64 * T * L**2)
        approx = fletcher_clamped_frequencies([1, 10], length=L, tension=T, mu=mu, b=b)
        assert approx[0] == pytest.approx(191.9188, abs=1e-4)
        assert approx[1] == pytest.approx(1929.799, abs=1e-3)
        f = _modes(_spec(ends="clamped"), n=10).frequency_hz
        cents = 1200 * np.log2(np.array([f[0], f[9]]) / approx)
        assert np.all(np.abs(cents) < 0.03)

    @pytest.mark.parametrize("ends", ["pinned", "clamped"])
    def test_independent_reimplementation(self, ends):
        for d, tension in [(0.3e-3, 40.0), (1.0e-3, 300.0), (1.6e-3, 260.0)]:
            spec = _spec(diameter=d, tension=tension, ends=ends)
            expected, b = fletcher_reference(
                range(1, 61), rho=RHO, d=d, length=L, tension=tension, youngs=E, clamped=ends == "clamped"
            )
            got = _modes(spec, n=60)
            assert got.parameters["inharmonicity_b"] == pytest.approx(b, rel=1e-12)
            if ends == "pinned":  # Fletcher's pinned law is exact
                np.testing.assert_allclose(got.frequency_hz, expected, rtol=1e-12)
            else:  # his clamped factor is the documented approximation, kept for comparison
                mu = RHO * math.pi * d * d / 4
                approx = fletcher_clamped_frequencies(range(1, 61), length=L, tension=tension, mu=mu, b=b)
                np.testing.assert_allclose(approx, expected, rtol=1e-12)

    def test_partials_run_sharp(self):
        # Schuck & Young 1943 (JASA 15:1-11): stiff-string partials are sharp, growing ~ n^2.
        f = _modes(_spec(diameter=1.2e-3, tension=300.0), n=20).frequency_hz
        cents = 1200 * np.log2(f / (np.arange(1, 21) * f[0]))
        assert np.all(np.diff(cents) > 0)


class TestPitchSolve:
    """`pitch` solves the tension so the lowest partial is exactly in tune."""

    @pytest.mark.parametrize("ends", ["pinned", "clamped"])
    @pytest.mark.parametrize("note", ["A1", "A2", "C4", "A4"])
    def test_lowest_partial_on_pitch(self, ends, note):
        pitch = parse_pitch(note)
        modes = _modes(_spec(tension=None, pitch_hz=pitch, ends=ends, length=0.9, diameter=0.8e-3))
        # One cent is rtol 5.8e-4; the solve is held far tighter.
        assert modes.frequency_hz[0] == pytest.approx(pitch, rel=1e-10)

    def test_pinned_closed_form(self):
        # f1^2 = (T + K) / (4 L^2 mu), K = pi^3 E d^4 / (64 L^2), from Fletcher's formula with n = 1.
        mu = RHO * math.pi * D**2 / 4
        k = math.pi**3 * E * D**4 / (64 * L**2)
        expected = 4 * L**2 * mu * 110.0**2 - k
        got = solve_tension(110.0, length=L, diameter=D, density=RHO, youngs_modulus=E)
        assert got == pytest.approx(expected, rel=1e-12)

    def test_unreachable_pitch(self):
        # A short, thick steel rod: stiffness alone sounds above 20 Hz.
        with pytest.raises(UnreachablePitch, match="stiffness alone"):
            solve_tension(20.0, length=0.05, diameter=5e-3, density=RHO, youngs_modulus=E)

    def test_stress_report(self):
        # REFERENCES.md sec. 1: stress = 482 MPa, about 19% of the ASTM A228 minimum.
        wire = MATERIALS["music-wire"]
        spec = _spec(tensile_strength=wire.strength_at(D))
        params = _modes(spec).parameters
        assert params["stress_pa"] / 1e6 == pytest.approx(482.0, abs=0.5)
        assert 18.0 < params["stress_percent_of_strength"] < 21.0

    def test_warns_near_breaking(self):
        wire = MATERIALS["music-wire"]
        strength = wire.strength_at(D)
        area = math.pi * D**2 / 4
        near = _modes(_spec(tension=0.8 * strength * area, tensile_strength=strength))
        assert any("working ceiling" in w for w in near.warnings)
        broken = _modes(_spec(tension=1.1 * strength * area, tensile_strength=strength))
        assert any("would break" in w for w in broken.warnings)
        safe = _modes(_spec(tension=0.5 * strength * area, tensile_strength=strength))
        assert safe.warnings == ()
        assert SAFE_STRESS_FRACTION == 0.60


class TestPitchStandard:
    """ISO 16:1975 (A4 = 440 Hz) and MIDI 1.0 note numbering (69 = A4)."""

    def test_a4(self):
        assert parse_pitch("A4") == pytest.approx(440.0, rel=1e-15)
        assert note_to_midi("A4") == 69
        assert midi_to_hz(69) == pytest.approx(440.0, rel=1e-15)

    def test_equal_temperament(self):
        # [C] REFERENCES.md sec. 9: 60 -> 261.6256, 21 -> 27.5, 108 -> 4186.0090 Hz.
        assert midi_to_hz(60) == pytest.approx(261.6256, abs=1e-4)
        assert midi_to_hz(21) == pytest.approx(27.5, abs=1e-12)
        assert midi_to_hz(108) == pytest.approx(4186.0090, abs=1e-4)
        assert note_to_midi("C4") == 60 and note_to_midi("Bb1") == 34 and note_to_midi("C#3") == 49


def test_many_modes_cost_no_quadratic_lists():
    """20,000 modes of an ideal string: node positions are built on demand (j / n), the JSON gives
    node_spacing = 1/n per mode and no per-mode lists, so report size is linear in the mode count."""
    from synth import patch_from_text, partial_table, table_to_dict, table_to_text

    patch = patch_from_text(
        "name: many\n"
        "resonator: {type: string, material: {density: 1140, youngs_modulus: 0}, length: 1.2 m, "
        "diameter: 0.5 mm, pitch: 15 Hz}\n"
        "render: {sample_rate: 768000, max_modes: 20000}\n"
    )
    table = partial_table(patch)
    assert len(table.frequency_hz) == 20000
    modes = table_to_dict(table)["modes"]
    assert "node_positions" not in modes[0]
    assert modes[19999]["node_spacing"] == pytest.approx(1.0 / 20000)
    assert not any(isinstance(v, list) for v in modes[19999].values())
    nodes = table.columns["node_positions"][19999]  # built on demand
    assert len(nodes) == 20001 and nodes[1] == pytest.approx(1.0 / 20000) and nodes[-1] == 1.0
    last_row = next(line for line in table_to_text(table).splitlines() if "  n=20000  " in line)
    assert last_row.endswith("0 5e-05 0.0001 0.00015 0.0002 ... (20001)")


class TestWinding:
    """Wound strings: the wrap adds mass (close-wound helix), the core alone bends and carries the tension.

    Mass of a layer (common practice; geometry by hand): one turn of wire of diameter dw on a diameter D
    has a mean diameter D + dw and a length pi (D + dw) (helix angle neglected); there is one turn per
    dw of string, so mu_wrap = rho_w (pi dw^2 / 4) pi (D + dw) / dw.
    """

    CORE_D, WRAP_D, WRAP2_D = 1.0e-3, 0.8e-3, 0.5e-3
    COPPER = 8900.0  # kg/m^3, synth.materials "copper" (Cremer, Heckl & Ungar via REFERENCES.md sec. 7)

    def _wound(self, layers=1, **changes):
        winding = (Winding(diameter=self.WRAP_D, density=self.COPPER, material="copper"),)
        if layers == 2:
            winding += (Winding(diameter=self.WRAP2_D, density=self.COPPER, material="copper"),)
        return _spec(diameter=self.CORE_D, tension=600.0, length=1.2, winding=winding, **changes)

    def test_mass_by_hand(self):
        core = RHO * math.pi * 1.0e-3**2 / 4  # 6.16538e-3 kg/m
        wrap1 = 8900.0 * (math.pi * 0.8e-3**2 / 4) * math.pi * (1.0e-3 + 0.8e-3) / 0.8e-3  # on the 1.0 mm core
        wrap2 = 8900.0 * (math.pi * 0.5e-3**2 / 4) * math.pi * (2.6e-3 + 0.5e-3) / 0.5e-3  # on 1.0 + 2 * 0.8 mm
        assert core == pytest.approx(6.16538e-3, rel=1e-5)
        assert wrap1 == pytest.approx(0.0316222, rel=1e-5)  # by calculator: 8900 pi^2 0.8e-3 1.8e-3 / 4
        one = _modes(self._wound(1)).parameters
        two = _modes(self._wound(2)).parameters
        assert one["linear_density_kg_m"] == pytest.approx(core + wrap1, rel=1e-12)
        assert two["linear_density_kg_m"] == pytest.approx(core + wrap1 + wrap2, rel=1e-12)
        assert one["outer_diameter_m"] == pytest.approx(2.6e-3, rel=1e-12)
        assert two["outer_diameter_m"] == pytest.approx(3.6e-3, rel=1e-12)
        assert two["core_diameter_m"] == 1.0e-3 and "diameter_m" not in two
        assert one["winding_mass_percent"] == pytest.approx(100 * wrap1 / (core + wrap1), rel=1e-12)
        assert two["winding_wire_m"] == 0.8e-3 and two["winding_2_wire_m"] == 0.5e-3

    def test_stiffness_from_the_core_only(self):
        # B = pi^3 E d_core^4 / (64 T L^2) (Fletcher 1964 with the core's d), and the frequencies those of a
        # string with the total mass: f_n = n f0 sqrt(1 + B n^2), f0 = sqrt(T / mu_total) / (2 L).
        wound = _modes(self._wound(1), n=20)
        mu = wound.parameters["linear_density_kg_m"]
        b = math.pi**3 * E * 1.0e-3**4 / (64 * 600.0 * 1.2**2)
        assert wound.parameters["inharmonicity_b"] == pytest.approx(b, rel=1e-12)
        n = np.arange(1, 21)
        f0 = math.sqrt(600.0 / mu) / (2 * 1.2)
        np.testing.assert_allclose(wound.frequency_hz, n * f0 * np.sqrt(1 + b * n**2), rtol=1e-12)

    def test_far_less_inharmonic_than_a_solid_string_of_equal_mass(self):
        # A solid steel string with the wound one's mass per length, tension and length (Fletcher 1964):
        # d_eq = sqrt(4 mu / (pi rho)), B_solid = pi^3 E d_eq^4 / (64 T L^2); the wound B is
        # (d_core / d_eq)^4 of it.
        wound = _modes(self._wound(1)).parameters
        mu = wound["linear_density_kg_m"]
        d_eq = math.sqrt(4 * mu / (math.pi * RHO))
        solid = _modes(_spec(diameter=d_eq, tension=600.0, length=1.2)).parameters
        assert solid["linear_density_kg_m"] == pytest.approx(mu, rel=1e-12)
        ratio = wound["inharmonicity_b"] / solid["inharmonicity_b"]
        assert ratio == pytest.approx((1.0e-3 / d_eq) ** 4, rel=1e-12)
        assert ratio < 0.05  # ~ 1/27 here

    def test_solid_string_of_the_outer_diameter_reported(self):
        # The report's comparison: a solid core-material string as thick as the wound one, at the same
        # fundamental without stiffness (T = 4 L^2 mu f0^2), B = pi^3 E D^4 / (64 T L^2).
        params = _modes(self._wound(2)).parameters
        f0, outer = params["ideal_fundamental_hz"], 3.6e-3
        tension = 4 * 1.2**2 * (RHO * math.pi * outer**2 / 4) * f0**2
        b = math.pi**3 * E * outer**4 / (64 * tension * 1.2**2)
        assert params["solid_inharmonicity_b"] == pytest.approx(b, rel=1e-12)
        assert params["inharmonicity_b"] < params["solid_inharmonicity_b"] / 50

    def test_stress_on_the_core(self):
        params = _modes(self._wound(2)).parameters
        assert params["stress_pa"] == pytest.approx(600.0 / (math.pi * 1.0e-3**2 / 4), rel=1e-12)

    @pytest.mark.parametrize("ends", ["pinned", "clamped"])
    def test_pitch_solve_uses_the_total_mass(self, ends):
        spec = replace_tension(self._wound(2, ends=ends), 55.0)
        modes = _modes(spec)
        assert modes.frequency_hz[0] == pytest.approx(55.0, rel=1e-10)

    def test_report_labels_exist(self):
        from synth.labels import _PARAMETERS

        for key in _modes(self._wound(2)).parameters:
            assert key in _PARAMETERS or key.endswith("_solved"), key  # flags fold into their value's line


def replace_tension(spec, pitch_hz):
    from dataclasses import replace

    return replace(spec, tension=None, pitch_hz=pitch_hz)


class TestWindingKeys:
    """`resonator.winding` in a patch: one clear error line each (file, line, key, what is allowed)."""

    HEAD = "name: wound\nresonator:\n  type: string\n  material: music-wire\n  length: 1.2 m\n  diameter: 1 mm\n" \
           "  pitch: A1\n"

    def _load(self, winding):
        from synth import patch_from_text

        return patch_from_text(self.HEAD + f"  winding: {winding}\n", file="wound.yaml")

    def test_one_and_two_layers(self):
        one = self._load("{material: copper, diameter: 0.8 mm}").resonator
        assert one.winding == (Winding(diameter=0.8e-3, density=8900.0, material="copper"),)
        two = self._load("[{material: copper, diameter: 0.8 mm}, {material: {density: 8530, youngs_modulus: 110 GPa}, "
                         "diameter: 0.4 mm}]").resonator
        assert len(two.winding) == 2 and two.winding[1].density == 8530.0
        assert self._load("null").resonator.winding == ()

    @pytest.mark.parametrize("winding, message", [
        ("copper", r"must be a mapping \{material, diameter\} .*or a list of one or two"),
        ("[]", r"or a list of one or two"),
        ("[{material: copper, diameter: 1 mm}, {material: copper, diameter: 1 mm}, {material: copper, diameter: 1 mm}]",
         r"at most 2 layers, got 3"),
        ("{material: copper}", r"is missing 'diameter'"),
        ("{diameter: 1 mm}", r"is missing 'material'"),
        ("{material: copper, diameter: 1 mm, pitch: 2 mm}", r"unknown key 'pitch' \(allowed: material, diameter\)"),
        ("{material: copper, diameter: -0.5 mm}", r"diameter: must be > 0"),
        ("{material: copper, diameter: 0 mm}", r"diameter: must be > 0"),
        ("{material: copper, diameter: thick}", r"diameter: cannot read .thick. as a number \(units: m, cm, mm"),
        ("{material: coper, diameter: 1 mm}", r"unknown material 'coper'; did you mean 'copper'"),
        ("{material: wrap.yaml, diameter: 1 mm}", r"material file is read only for the string itself"),
        ("{material: {youngs_modulus: 110 GPa}, diameter: 1 mm}", r"material.density: missing required key"),
        ("[{material: copper, diameter: 1 mm}, 3]", r"layer 2 must be a mapping"),
    ])
    def test_errors(self, winding, message):
        from synth import PatchError

        with pytest.raises(PatchError, match=message) as error:
            self._load(winding)
        assert error.value.file == "wound.yaml" and error.value.line == 8 and error.value.key == "resonator.winding"
