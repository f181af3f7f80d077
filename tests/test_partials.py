"""Given partial sets: frequencies, per-partial T60 and levels, in the table and the audio.

A partial set has no physics of its own to check against a published source:
the reference is the patch itself (f_k = f_ref r_k, T60 and levels as given),
held through the table (pipeline) and the rendered WAV (closed loop).
"""
from __future__ import annotations

import json
import math
import re

import numpy as np
import pytest

from synth import patch_from_text, retune
from synth.cli import main
from synth.damping import LN1000
from synth.pipeline import partial_table
from synth.units import parse_pitch

from .analysis import envelope_db, measured_t60, peak_near, read_wav
from .cli_checks import check_bad_patch

PATCH = """\
name: test-partials
resonator:
  type: partials
  fundamental: 300 Hz
  ratios: [1, 2.31, 3.74, 5.18]
  t60: [1.2, 0.8, 0.5, 0.35]
  levels_db: [0, -6, -12, -3]
excitation:
  type: strike
damping:
  t60: 2 s
render:
  duration: 1 s
  sample_rate: 16000
  bit_depth: 24
  max_modes: 64
"""

RATIOS = [1, 2.31, 3.74, 5.18]
T60 = [1.2, 0.8, 0.5, 0.35]
LEVELS = [0, -6, -12, -3]


def _table(text=PATCH):
    return partial_table(patch_from_text(text))


class TestTable:
    def test_frequencies_are_fundamental_times_ratios(self):
        table = _table()
        np.testing.assert_allclose(table.frequency_hz, 300.0 * np.array(RATIOS), rtol=1e-15)
        assert table.labels == ("p1", "p2", "p3", "p4")
        assert table.fundamental_hz == 300.0

    def test_per_partial_t60_and_levels(self):
        table = _table()
        np.testing.assert_allclose(table.t60_s, T60, rtol=1e-15)
        np.testing.assert_allclose(table.level_db, LEVELS, atol=1e-12)
        assert "t60_s" not in table.columns  # the table's own T60 column carries them
        assert table.columns["level_override_db"] == tuple(float(x) for x in LEVELS)

    def test_levels_replace_the_excitation_weighting(self):
        for kind in ("pluck", "strike", "impulse"):
            table = _table(PATCH.replace("type: strike", f"type: {kind}"))
            np.testing.assert_allclose(table.level_db, LEVELS, atol=1e-12)
            # The amplitudes when the force ends add up to `strength` (1.0), as a pluck's do at its point.
            duration = {"pluck": 0.2e-3, "strike": 1e-3, "impulse": 0.0}[kind]  # the defaults (README)
            heard = table.amplitude * np.exp(-np.log(1000.0) * duration / table.t60_s)
            assert np.sum(heard) == pytest.approx(1.0, rel=1e-12)

    def test_without_lists_the_damping_and_excitation_apply(self):
        text = PATCH.replace("  t60: [1.2, 0.8, 0.5, 0.35]\n", "").replace("  levels_db: [0, -6, -12, -3]\n", "")
        table = _table(text.replace("type: strike", "type: pluck\n  release_time: 0"))
        np.testing.assert_allclose(table.t60_s, 2.0)
        # Unit shapes and an instant pluck: displacement ~ 1 / omega^2 (synth.excitation), heard
        # by the default velocity pickup as ~ 1 / omega: -20 log10(ratio) dB.
        np.testing.assert_allclose(table.level_db, -20 * np.log10(RATIOS), atol=1e-6)

    def test_unsorted_ratios_keep_their_labels(self):
        # A hum below the prime (an invented bell-like set): listed by frequency,
        # labelled by place in the patch's list.
        text = PATCH.replace("[1, 2.31, 3.74, 5.18]", "[1, 0.5, 2.31, 1.19]")
        table = _table(text)
        assert table.labels == ("p2", "p1", "p4", "p3")
        np.testing.assert_allclose(table.frequency_hz, [150.0, 300.0, 357.0, 693.0], rtol=1e-12)
        np.testing.assert_allclose(table.t60_s, [0.8, 1.2, 0.35, 0.5], rtol=1e-15)
        np.testing.assert_allclose(table.level_db, [-6, 0, -3, -12], atol=1e-12)
        assert table.columns["given_ratio"] == (0.5, 1.0, 1.19, 2.31)

    def test_pitch_tunes_the_lowest_partial(self):
        text = PATCH.replace("fundamental: 300 Hz", "pitch: G4").replace("[1, 2.31, 3.74, 5.18]", "[1, 0.5, 2.31, 1.19]")
        table = _table(text)
        g4 = 440 * 2 ** (-2 / 12)  # 12-TET, A4 = 440 Hz (ISO 16:1975)
        assert table.frequency_hz[0] == pytest.approx(g4, rel=1e-12)
        assert table.parameters["reference_hz"] == pytest.approx(2 * g4, rel=1e-12)
        assert parse_pitch("G4") == pytest.approx(g4, rel=1e-12)

    def test_retune_scales_the_fundamental(self):
        patch = patch_from_text(PATCH)
        tuned = partial_table(retune(patch, 440.0))
        np.testing.assert_allclose(tuned.frequency_hz, 440.0 * np.array(RATIOS), rtol=1e-12)
        np.testing.assert_allclose(tuned.t60_s, T60, rtol=1e-15)

    def test_max_modes_keeps_the_lowest(self):
        table = _table(PATCH.replace("max_modes: 64", "max_modes: 2"))
        assert table.labels == ("p1", "p2")
        # The cut is reported as for any resonator (issue 13): p4, given -3 dB, is the loudest left out.
        assert table.parameters["modes_limit"] == "render.max_modes"
        assert table.parameters["omitted_mode"] == "p4"
        assert table.parameters["omitted_mode_level_db"] == pytest.approx(-3.0, abs=1e-9)
        assert table.warnings == ("render.max_modes 2 cuts the series at 693 Hz: the loudest of the next 2 modes, "
                                  "p4 at 1554 Hz, is at -3 dB re the strongest; use max_modes: auto",)

    def test_units_in_lists(self):
        text = PATCH.replace("[1.2, 0.8, 0.5, 0.35]", "[1.2 s, 800 ms, 0.5, 350 ms]").replace("[0, -6, -12, -3]", "[0 dB, -6 dB, -12, -3]")
        table = _table(text)
        np.testing.assert_allclose(table.t60_s, T60, rtol=1e-12)
        np.testing.assert_allclose(table.level_db, LEVELS, atol=1e-12)


class TestClosedLoop:
    def test_peaks_decays_and_levels_in_the_audio(self, write_patch, tmp_path, capsys):
        patch = write_patch(PATCH)
        assert main(["modes", str(patch), "--json"]) == 0
        report = json.loads(capsys.readouterr().out)
        out = tmp_path / "partials.wav"
        assert main(["render", str(patch), "-o", str(out), "--quiet"]) == 0
        signal, rate = read_wav(out)
        intercepts = []
        for mode in report["modes"]:
            f = mode["frequency_hz"]
            found = peak_near(signal[: rate // 2], rate, f, search_hz=20.0)
            # 0.5 s Hann window, 8x padding, parabolic interpolation; partials >= 300 Hz apart.
            assert found == pytest.approx(f, abs=0.5), mode["label"]
            stop = min(0.9, 0.6 * mode["t60_s"])  # stay > 20 dB above the 24-bit floor
            t60 = measured_t60(signal, rate, f, start_s=0.05, stop_s=stop)
            # 3%: a straight-line fit over tens of dB of clean exponential decay.
            assert t60 == pytest.approx(mode["t60_s"], rel=0.03), mode["label"]
            # Level at t = 0: the decay line extrapolated back (exactly exponential decay).
            times, level = envelope_db(signal, rate, f)
            use = (times >= 0.05) & (times <= stop)
            intercepts.append(np.polyval(np.polyfit(times[use], level[use], 1), 0.0))
        heard = np.array(intercepts) - intercepts[0]
        # 0.3 dB: 50 ms frames resolve 20 Hz; the partials are >= 300 Hz apart.
        np.testing.assert_allclose(heard, [m["level_db"] for m in report["modes"]], atol=0.3)

    def test_decay_follows_ln1000(self, write_patch, tmp_path, capsys):
        # T60 = ln(1000) / sigma (REFERENCES.md sec. 8): after one T60 the partial is 60 dB down.
        patch = write_patch(PATCH.replace("[1, 2.31, 3.74, 5.18]", "[1, 2, 3, 4]").replace("[1.2, 0.8, 0.5, 0.35]", "[0.5, 0.5, 0.5, 0.5]"))
        out = tmp_path / "d.wav"
        assert main(["render", str(patch), "-o", str(out), "--quiet"]) == 0
        signal, rate = read_wav(out)
        times, level = envelope_db(signal, rate, 300.0)
        slope = np.polyfit(times[(times > 0.05) & (times < 0.4)], level[(times > 0.05) & (times < 0.4)], 1)[0]
        assert slope == pytest.approx(-20 * math.log10(math.e) * LN1000 / 0.5, rel=0.03)


# --------------------------------------------------------------------------
# Bad input: one line, exit status 2, nothing written.  Line numbers refer to PATCH.


def _edit(old, new):
    assert PATCH.count(old) == 1, old
    return PATCH.replace(old, new)


BAD_CASES = [
    pytest.param(_edit("[1, 2.31, 3.74, 5.18]", "[]"), "resonator.ratios", 5,
                 r"must be a non-empty list of numbers", id="ratios-empty"),
    pytest.param(_edit("[1, 2.31, 3.74, 5.18]", "[1, 0, 3.74, 5.18]"), "resonator.ratios", 5,
                 r"entry 2 \(0\) must be > 0", id="ratio-zero"),
    pytest.param(_edit("[1, 2.31, 3.74, 5.18]", "[1, 2.31, -3.74, 5.18]"), "resonator.ratios", 5,
                 r"entry 3 \(-3\.74\) must be > 0", id="ratio-negative"),
    pytest.param(_edit("[1, 2.31, 3.74, 5.18]", "[1, 2.31, .nan, 5.18]"), "resonator.ratios", 5,
                 r"entry 3 \(nan\) must be a finite number", id="ratio-nan"),
    pytest.param(_edit("[1, 2.31, 3.74, 5.18]", "[1, two, 3.74, 5.18]"), "resonator.ratios", 5,
                 r"entry 2 \('two'\) is not a ratio: cannot read 'two' as a number", id="ratio-text"),
    pytest.param(_edit("[1, 2.31, 3.74, 5.18]", "2.31"), "resonator.ratios", 5,
                 r"must be a non-empty list of numbers, e\.g\. \[1, 2\.76, 5\.40\], got 2\.31", id="ratios-not-a-list"),
    pytest.param(_edit("  ratios: [1, 2.31, 3.74, 5.18]\n", ""), "resonator.ratios", 2,
                 r"missing required key", id="ratios-missing"),
    pytest.param(_edit("[1.2, 0.8, 0.5, 0.35]", "[1.2, 0.8, 0.5]"), "resonator.t60", 6,
                 r"has 3 entries but ratios has 4: give one decay time \(s\) per partial", id="t60-too-short"),
    pytest.param(_edit("[1.2, 0.8, 0.5, 0.35]", "[1.2, 0.8, -0.5, 0.35]"), "resonator.t60", 6,
                 r"entry 3 \(-0\.5\) must be > 0", id="t60-negative"),
    pytest.param(_edit("[1.2, 0.8, 0.5, 0.35]", "[1.2, 0.8, 5 Hz, 0.35]"), "resonator.t60", 6,
                 r"entry 3 \('5 Hz'\) is not a decay time: unit 'Hz' is not allowed here \(units: s, ms\)", id="t60-unit"),
    pytest.param(_edit("[1.2, 0.8, 0.5, 0.35]", "[1.2, 0.8, 0.5, 7200]"), "resonator.t60", 6,
                 r"entry 4 \(7200\) must be <= 3600", id="t60-too-long"),
    pytest.param(_edit("[0, -6, -12, -3]", "[0, -6, -12, -3, -9]"), "resonator.levels_db", 7,
                 r"has 5 entries but ratios has 4: give one level \(dB\) per partial", id="levels-too-long"),
    pytest.param(_edit("[0, -6, -12, -3]", "[0, -6, .inf, -3]"), "resonator.levels_db", 7,
                 r"entry 3 \(inf\) must be a finite number", id="levels-inf"),
    pytest.param(_edit("  fundamental: 300 Hz", "  fundamental: 300 Hz\n  pitch: A4"), "resonator.pitch", 5,
                 r"give exactly one of 'pitch' \(the lowest partial sounds there\) or 'fundamental'", id="fundamental-and-pitch"),
    pytest.param(_edit("  fundamental: 300 Hz\n", ""), "resonator", 2,
                 r"give exactly one of 'pitch'", id="neither-fundamental-nor-pitch"),
    pytest.param(_edit("  fundamental: 300 Hz", "  fundamental: -300 Hz"), "resonator.fundamental", 4,
                 r"must be > 0", id="negative-fundamental"),
    pytest.param(_edit("  type: strike", "  type: strike\n  position: 0.3"), "excitation.position", 10,
                 r"this resonator takes no positions; leave the key out", id="excitation-position"),
    pytest.param(_edit("damping:", "pickup:\n  position: 0.5\ndamping:"), "pickup.position", 11,
                 r"this resonator takes no positions", id="pickup-position"),
    pytest.param(_edit("  fundamental: 300 Hz", "  fundamental: 9 kHz"), "render.sample_rate", 14,
                 r"every mode is at or above Nyquist \(8000 Hz\)", id="all-above-nyquist"),
]


@pytest.mark.parametrize("command", ["render", "modes"])
@pytest.mark.parametrize(("text", "key", "line", "phrase"), BAD_CASES)
def test_bad_partials_patch(tmp_path, monkeypatch, capsys, command, text, key, line, phrase):
    check_bad_patch(tmp_path, monkeypatch, capsys, command, text, key, line, phrase)


@pytest.mark.parametrize("key,values,phrase", [
    ("levels_db", "[1e4, 0]", r"entry 1 \('1e4'\) must be <= 200"),
    ("ratios", "[1e-9, 1]", r"entry 1 \('1e-9'\) must be >= 0\.001"),
])
def test_list_entries_in_range(write_patch, capsys, key, values, phrase):
    text = f"""\
    name: bounds
    resonator:
      type: partials
      fundamental: 300 Hz
      ratios: [1, 2]
      {key}: {values}
    """.replace("ratios: [1, 2]\n      ratios:", "ratios:")
    path = write_patch(text)
    assert main(["modes", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and f"resonator.{key}" in err and re.search(phrase, err), err
