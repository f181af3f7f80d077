"""The damping laws (issue 16): constant loss factor, Rayleigh, and the two-point default.

References named beside each check:

* loss factor: a complex stiffness k (1 + i eta) gives sigma = pi eta f, so
  T60 = 3 ln(10) / (pi eta f) (Cremer, Heckl & Ungar, *Structure-Borne Sound*,
  1988, ch. 3); checked from rendered audio by the log-envelope slope of each
  partial (tests/analysis.py, a Hann-windowed heterodyne independent of the engine);
* Rayleigh damping C = alpha M + beta K: zeta = alpha / (2 omega) + beta omega / 2,
  sigma = (alpha + beta omega^2) / 2 (Clough & Penzien, *Dynamics of Structures*,
  1993, sec. 12-5; from memory), against hand arithmetic.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from synth import patch_from_text
from synth.cli import main
from synth.errors import PatchError
from synth.pipeline import partial_table

from .analysis import measured_t60, read_wav
from .cli_checks import check_bad_patch

T60_FACTOR = 3.0 * math.log(10.0)  # 60 dB in nepers, 6.9078

PARTIALS = """\
name: loss-factor-test
resonator:
  type: partials
  fundamental: 300 Hz
  ratios: [1.0, 2.7565, 5.4039]
  levels_db: [0, 0, 0]
excitation:
  type: strike
  contact_time: 0.2 ms
damping:
  {damping}
render:
  duration: 1.2 s
  sample_rate: 16000
  bit_depth: 24
"""

BAR = """\
name: bar-test
resonator: {{type: bar, material: {material}, length: 300 mm, width: 40 mm, thickness: 18 mm}}
excitation: {{type: strike, position: 0.5}}
damping: {damping}
render: {{duration: 0.1 s, sample_rate: 16000}}
"""


class TestLossFactor:
    def test_rendered_decay_follows_one_over_f(self, write_patch, tmp_path, capsys):
        eta = 0.003
        path = write_patch(PARTIALS.format(damping=f"loss_factor: {eta}"))
        out = tmp_path / "lf.wav"
        assert main(["render", str(path), "-o", str(out), "--quiet"]) == 0
        signal, rate = read_wav(out)
        for ratio in (1.0, 2.7565, 5.4039):
            f = 300.0 * ratio
            expected = T60_FACTOR / (math.pi * eta * f)  # 2.44, 0.886, 0.452 s
            # 50 ms frames from 50 ms to 0.45 s: > 25 dB of decay for every partial; partials
            # 500 Hz and more apart, so the Hann heterodyne sees one at a time.  3 %.
            assert measured_t60(signal, rate, f, start_s=0.05, stop_s=0.45) == pytest.approx(expected, rel=0.03), f

    def test_table_t60_is_the_closed_form(self):
        table = partial_table(patch_from_text(PARTIALS.format(damping="loss_factor: 0.01")))
        np.testing.assert_allclose(table.t60_s, T60_FACTOR / (math.pi * 0.01 * table.frequency_hz), rtol=1e-12)
        assert table.parameters["damping_law"].startswith("constant loss factor eta = 0.01")

    def test_material_value(self):
        # synth.materials: rosewood eta 5e-3 (wood along the grain 3e-3..1e-2, Cremer-Heckl; Bremaud 2012).
        patch = patch_from_text(BAR.format(material="rosewood", damping="{loss_factor: material}"))
        assert patch.damping.loss_factor == 5e-3 and patch.damping.loss_factor_source == "rosewood"
        table = partial_table(patch)
        np.testing.assert_allclose(table.t60_s, T60_FACTOR / (math.pi * 5e-3 * table.frequency_hz), rtol=1e-12)
        assert "rosewood's tabulated value" in table.parameters["damping_law"]

    def test_a_bar_without_damping_decays_by_its_material(self):
        # Issue 16: a patch without a damping section decays plausibly: a bar or a plate of a
        # tabulated material by its loss factor (rosewood 5e-3, synth.materials).
        table = partial_table(patch_from_text(BAR.format(material="rosewood", damping="{}")))
        np.testing.assert_allclose(table.t60_s, T60_FACTOR / (math.pi * 5e-3 * table.frequency_hz), rtol=1e-12)
        assert "rosewood's tabulated value" in table.parameters["damping_law"]

    def test_a_string_without_damping_keeps_the_two_point_default(self):
        # A string loses energy to the air and its supports, far faster than steel's eta 2e-4
        # (which would ring for minutes): without a damping section every partial keeps 3 s.
        table = partial_table(patch_from_text(
            "name: s\nresonator: {type: string, material: music-wire, length: 0.65, diameter: 0.45 mm, pitch: A2}\n"
            "render: {sample_rate: 8000, max_modes: 8}\n"))
        np.testing.assert_array_equal(table.t60_s, 3.0)
        assert "damping_law" not in table.parameters

    def test_very_low_frequencies_are_capped(self):
        from synth.damping import MAX_T60_S, loss_factor_t60

        assert loss_factor_t60([0.0, 1e-3], loss_factor=1e-4).tolist() == [MAX_T60_S, MAX_T60_S]


class TestRayleigh:
    def test_hand_arithmetic(self):
        # alpha = 2 1/s, beta = 1e-7 s at 300 Hz: sigma = (2 + 1e-7 (2 pi 300)^2) / 2
        # = (2 + 0.355306) / 2 = 1.177653 1/s, T60 = 6.907755 / 1.177653 = 5.86570 s.
        table = partial_table(patch_from_text(PARTIALS.format(damping="rayleigh: {alpha: 2, beta: 1e-7}")))
        assert table.t60_s[0] == pytest.approx(5.86570, rel=1e-5)
        # and at 5.4039 x 300 = 1621.17 Hz: omega = 10186.112 rad/s, beta omega^2 = 10.375687;
        # sigma = 6.187843 1/s, T60 = 1.116343 s.
        assert table.t60_s[2] == pytest.approx(1.116343, rel=1e-6)
        assert table.parameters["damping_law"].startswith("Rayleigh, alpha = 2 1/s, beta = 1e-07 s")

    def test_mass_proportional_alone_is_flat(self):
        table = partial_table(patch_from_text(PARTIALS.format(damping="rayleigh: {alpha: 4}")))
        np.testing.assert_allclose(table.t60_s, T60_FACTOR / 2.0, rtol=1e-12)  # sigma = alpha / 2


class TestMidiRelease:
    def test_note_off_applies_release_t60_under_a_loss_factor(self, tmp_path):
        # The damper works with every law: synth.voices takes min(own T60, release_t60).
        from .test_midi import STRING, fundamental_t60, off, on, render, song

        text = STRING.format(kind="pluck").replace(
            "  t60: 3 s\n  t60_high: 0.5 s\n  high_frequency: 3 kHz\n", "  loss_factor: 0.002\n")
        patch = tmp_path / "lf-string.yaml"
        patch.write_text(text, encoding="utf-8")
        data, rate = render(tmp_path, song(tmp_path / "r.mid", [(0, on(57)), (40, off(57))]), source=("--patch", patch))
        own = T60_FACTOR / (math.pi * 0.002 * 220.0)  # 5.0 s at A3
        assert fundamental_t60(data, rate, 0.05, 0.37) == pytest.approx(own, rel=0.15)
        assert fundamental_t60(data, rate, 0.44, 0.70) == pytest.approx(0.25, rel=0.1)  # damping.release_t60


# --------------------------------------------------------------------------
# Bad input: one line naming file, line and key.

BAD_BASE = PARTIALS.format(damping="loss_factor: 0.003")


def _edit(new):
    return BAD_BASE.replace("  loss_factor: 0.003", new)


BAD_CASES = [
    pytest.param(_edit("  t60: 2 s\n  loss_factor: 0.003"), "damping.loss_factor", 12,
                 r"damping takes one law, but this section gives t60 and loss_factor", id="two-point-and-loss-factor"),
    pytest.param(_edit("  loss_factor: 0.003\n  rayleigh: {alpha: 1}"), "damping.rayleigh", 12,
                 r"gives loss_factor and rayleigh: keep t60/t60_high/high_frequency \(two-point\), loss_factor or "
                 r"rayleigh", id="loss-factor-and-rayleigh"),
    pytest.param(_edit("  loss_factor: -0.01"), "damping.loss_factor", 11, r"must be > 0, got -0\.01", id="negative-eta"),
    pytest.param(_edit("  loss_factor: 2"), "damping.loss_factor", 11, r"must be <= 1, got 2", id="eta-above-1"),
    pytest.param(_edit("  loss_factor: material"), "damping.loss_factor", 11,
                 r"the resonator has no material, so no tabulated loss factor: give a number \(0 < eta <= 1\)", id="material-without-one"),
    pytest.param(_edit("  rayleigh: {alpha: 0, beta: 0}"), "damping.rayleigh", 11,
                 r"alpha and beta are both 0 \(no damping\)", id="rayleigh-zero"),
    pytest.param(_edit("  rayleigh: {alpha: -1}"), "damping.rayleigh.alpha", 11, r"must be >= 0", id="rayleigh-negative"),
    pytest.param(_edit("  rayleigh: {gamma: 1}"), "damping.rayleigh.gamma", 11, r"unknown key", id="rayleigh-unknown-key"),
    pytest.param(_edit("  rayleigh: 0.5"), "damping.rayleigh", 11, r"must be a mapping of keys", id="rayleigh-not-mapping"),
]


@pytest.mark.parametrize(("text", "key", "line", "phrase"), BAD_CASES)
def test_bad_damping(tmp_path, monkeypatch, capsys, text, key, line, phrase):
    check_bad_patch(tmp_path, monkeypatch, capsys, "modes", text, key, line, phrase)


def test_custom_material_has_no_tabulated_loss_factor():
    text = BAR.format(material="{density: 700, youngs_modulus: 10 GPa}", damping="{loss_factor: material}")
    with pytest.raises(PatchError, match=r"damping.loss_factor: the resonator's material \{.*\} has no tabulated loss factor"):
        patch_from_text(text)
