"""``render.max_modes``: auto computes every mode below Nyquist; a number that cuts the series is reported.

References are computed here, independently of the modules under test:

* a pinned stiff string, f_n = n f0 sqrt(1 + B n**2) with f0 = sqrt(T / mu) / (2 L),
  mu = rho pi d**2 / 4 and B = pi**3 E d**4 / (64 T L**2) (Fletcher 1964);
* a circular membrane with a fixed rim, f_mn = j_mn c / (2 pi a), c = sqrt(T / sigma),
  j_mn the zeros of J_m from scipy.special.jn_zeros (Fletcher & Rossing 1998, sec. 3.5);
  each m > 0 mode is a cos/sin pair: two rows with a pickup, one row without;
* a partial set: the given ratios times the fundamental;
* Bessel zeros by Brent's method on scipy.special.jv and by scipy.special.jn_zeros.

Levels are dB re the strongest mode, as the table gives them; the -60 dB threshold of
the cut warning is common practice (the span of a T60).
"""
from __future__ import annotations

import math
import re
from dataclasses import replace
from pathlib import Path

import mido
import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.special import jn_zeros, jv

import synth.pipeline
from synth.cli import main
from synth.errors import PatchError
from synth.instrument_file import load_playable
from synth.patch import MAX_MODES, load_patch, patch_from_text
from synth.pipeline import partial_table, solve_modes
from synth.resonators import resonator_module
from synth.resonators.membrane import bessel_zeros_below
from synth.solvecache import SolveCache
from synth.voicing import voice_patch

REPO = Path(__file__).resolve().parents[1]
PATCHES = sorted((REPO / "patches").glob("*.yaml"))

# A steel string given its constants and tension, so the test can work its modes out by hand.
RHO, E, DIAMETER, LENGTH, TENSION = 7850.0, 200e9, 0.45e-3, 0.65, 90.0
STRING = f"""\
name: count-string
resonator:
  type: string
  material: {{density: {RHO}, youngs_modulus: {E}, poisson_ratio: 0.3}}
  length: {LENGTH}
  diameter: {DIAMETER}
  tension: {TENSION}
  ends: pinned
excitation: {{type: pluck, position: 0.13}}
pickup: {{position: 0.91}}
damping: {{t60: 2 s}}
render: {{duration: 0.05 s, sample_rate: 8000}}
"""

# REFERENCES.md sec. 3 example: a = 0.1 m, T = 1000 N/m, sigma = 0.25 kg/m^2.
RADIUS, MEMBRANE_TENSION, SIGMA = 0.1, 1000.0, 0.25
MEMBRANE = f"""\
name: count-membrane
resonator: {{type: membrane, shape: circle, radius: {RADIUS}, tension: {MEMBRANE_TENSION} N/m,
             areal_density: {SIGMA} kg/m^2}}
excitation: {{type: strike, position: {{radius: 0.4, angle: 0 deg}}, contact_time: 0.2 ms}}
pickup: {{position: {{radius: 0.7, angle: 50 deg}}}}
damping: {{t60: 1 s}}
render: {{duration: 0.05 s, sample_rate: 8000}}
"""

# A 16-inch (0.2032 m radius) frame drum head struck with the fingers, as in issue 13.
FRAME_DRUM = """\
name: frame-drum
resonator: {type: membrane, shape: circle, radius: 0.2032, areal_density: 0.3 kg/m^2, pitch: D3}
excitation: {type: strike, position: {radius: 0.62, angle: 0 deg}, contact_time: 3 ms}
pickup: {position: {radius: 0.35, angle: 40 deg}}
damping: {t60: 1.4 s, t60_high: 0.12 s, high_frequency: 2 kHz}
render: {duration: 0.05 s, sample_rate: 48000, max_modes: 120}
"""

CUT = re.compile(r"^render\.max_modes (\d+) cuts the series at (\d+) Hz: the loudest of the next (\d+) modes, "
                 r"(\S+) at (\d+) Hz, is at (-?\d+) dB re the strongest; use max_modes: auto$")


def string_reference(nyquist):
    """The pinned stiff string's modes below `nyquist` (Fletcher 1964)."""
    mu = RHO * math.pi * DIAMETER**2 / 4.0
    f0 = math.sqrt(TENSION / mu) / (2.0 * LENGTH)
    b = math.pi**3 * E * DIAMETER**4 / (64.0 * TENSION * LENGTH**2)
    n = np.arange(1, int(nyquist / f0) + 2)
    f = n * f0 * np.sqrt(1.0 + b * n**2)
    return f[f < nyquist]


def membrane_rows(nyquist, *, split):
    """Rows of the circular membrane below `nyquist`: Bessel zeros from scipy.special.jn_zeros."""
    speed = math.sqrt(MEMBRANE_TENSION / SIGMA)
    x = 2.0 * math.pi * RADIUS * nyquist / speed  # j below this sounds below Nyquist
    rows, m = 0, 0
    while True:
        zeros = jn_zeros(m, int(x / math.pi) + 3)
        below = int(np.count_nonzero(zeros < x))
        if below == 0:
            return rows
        rows += below * (2 if split and m > 0 else 1)
        m += 1


class TestAuto:
    def test_auto_is_the_default(self):
        assert patch_from_text(STRING).render.max_modes == "auto"

    @pytest.mark.parametrize("rate", [8000, 16000])
    def test_string_every_mode_below_nyquist(self, rate):
        table = partial_table(patch_from_text(STRING.replace("sample_rate: 8000", f"sample_rate: {rate}")))
        expected = string_reference(rate / 2.0)
        assert len(table.frequency_hz) == len(expected)
        np.testing.assert_allclose(table.frequency_hz, expected, rtol=1e-12)  # float rounding only
        assert table.warnings == ()
        assert table.parameters["modes_limit"] == "every mode below Nyquist"
        assert table.parameters["nyquist_hz"] == table.parameters["bandwidth_hz"] == rate / 2.0
        assert "modes_above_nyquist" not in table.parameters  # auto: how many were solved above says nothing

    def test_the_sample_rate_sets_the_count(self):
        low = partial_table(patch_from_text(STRING))
        high = partial_table(patch_from_text(STRING.replace("sample_rate: 8000", "sample_rate: 16000")))
        assert len(high.frequency_hz) > len(low.frequency_hz) == len(string_reference(4000.0))

    @pytest.mark.parametrize("split", [True, False])
    def test_membrane_every_mode_below_nyquist(self, split):
        text = MEMBRANE if split else MEMBRANE.replace("pickup: {position: {radius: 0.7, angle: 50 deg}}\n", "")
        table = partial_table(patch_from_text(text))
        assert len(table.frequency_hz) == membrane_rows(4000.0, split=split) > 100
        assert np.all(table.frequency_hz < 4000.0)
        assert not any("Nyquist" in w for w in table.warnings)

    def test_partials_every_one_below_nyquist(self):
        text = """\
            name: count-partials
            resonator: {type: partials, fundamental: 500 Hz, ratios: [1, 2, 3.5, 7.9, 12.2, 30]}
            excitation: {type: strike}
            render: {duration: 0.05 s, sample_rate: 16000}
            """
        table = partial_table(patch_from_text(text.replace("            ", "")))
        np.testing.assert_allclose(table.frequency_hz, 500.0 * np.array([1, 2, 3.5, 7.9, 12.2]), rtol=1e-15)
        assert table.warnings == ()

    def test_a_model_with_no_more_modes_says_so(self):
        # A pipe's plane-wave modes stop at the first cross mode's cut-on, below Nyquist here.
        patch = load_patch(REPO / "patches" / "air-column-open-conduit.yaml")
        table = partial_table(patch)
        cut_on = table.parameters["cross_mode_cut_on_hz"]
        assert table.parameters["modes_limit"] == "every mode the model has"
        assert table.parameters["bandwidth_hz"] == table.frequency_hz[-1] < cut_on < 24000.0

    def test_a_thick_bar_reaches_nyquist(self):
        # Shear lowers a thick wooden bar's upper modes: counted as a thin bar, the modes computed
        # stopped at 21.8 kHz, a silent cap below Nyquist at 48 kHz (issue 13).
        table = partial_table(load_patch(REPO / "patches" / "bar-rosewood-blank-c4.yaml"))
        assert table.parameters["modes_limit"] == "every mode below Nyquist"
        assert table.frequency_hz[-1] > 23000.0

    @pytest.mark.parametrize("path", PATCHES, ids=lambda p: p.stem)
    def test_auto_equals_a_large_count_cut_at_nyquist(self, path):
        """Every demo patch at 8 kHz: auto's table is the one a large enough count gives."""
        patch = load_patch(path, overrides={"render.sample_rate": (8000, "--sample-rate")})
        auto = partial_table(replace(patch, render=replace(patch.render, max_modes="auto")), cache=SolveCache())
        count = len(auto.frequency_hz) + 40
        fixed = partial_table(replace(patch, render=replace(patch.render, max_modes=count)), cache=SolveCache())
        assert auto.labels == fixed.labels
        np.testing.assert_allclose(auto.frequency_hz, fixed.frequency_hz, rtol=1e-12)

    @pytest.mark.parametrize("name", ["string-bass-steel-a1", "air-column-bamboo-closed-a4", "membrane-frame-drum-d3",
                                      "membrane-rect-panel", "plate-brass-panel-pinned"])
    def test_exact_counts(self, name):
        """Where a resonator counts its modes exactly, the count is what its solve gives."""
        spec = load_patch(REPO / "patches" / f"{name}.yaml").resonator
        module = resonator_module(spec.TYPE)
        for limit in (1000.0, 4321.0):
            count = module.count_below(spec, limit)
            solution = module.solve(spec, count + 1)
            assert int(np.count_nonzero(solution.frequency_hz < limit)) == count
            assert len(solution.frequency_hz) <= count or solution.frequency_hz[count] >= limit

    def test_velocities_share_one_auto_solve(self):
        patch = load_patch(REPO / "patches" / "plate-aluminium-gong-disc.yaml")  # Weyl's estimate: may grow
        cache = SolveCache()
        tables = [partial_table(voice_patch(patch, velocity=v, cache=cache), cache=cache) for v in (20, 64, 127)]
        assert cache.solves == 1 and cache.hits == 2
        assert tables[0].labels == tables[2].labels


class TestBesselZeros:
    """The membrane's own Bessel zeros (grid, recurrence, Halley) against scipy, independently."""

    def test_every_zero_below_a_bound_as_jn_zeros_gives_it(self):
        bound = 80.0
        zeros = bessel_zeros_below(bound)
        m = 0
        while True:
            reference = jn_zeros(m, int(bound / math.pi) + 3)
            reference = reference[reference < bound]
            if reference.size == 0:
                assert m not in zeros
                break
            np.testing.assert_allclose(zeros[m], reference, rtol=1e-14)  # both converged to the last bits
            m += 1

    @pytest.mark.parametrize(("m", "k"), [(0, 1), (1, 1), (7, 3), (40, 2), (75, 1)])
    def test_against_brent_on_jv(self, m, k):
        # Brent's method on J_m between two grid points around the k-th zero found by a scan of jv.
        x = np.linspace(max(m, 0.5), 85.0, 20000)
        value = jv(m, x)
        change = np.flatnonzero(np.sign(value[:-1]) != np.sign(value[1:]))[k - 1]
        reference = brentq(lambda z: jv(m, z), x[change], x[change + 1], xtol=1e-14, rtol=1e-15)
        assert bessel_zeros_below(85.0)[m][k - 1] == pytest.approx(reference, rel=1e-14)

    def test_a_zero_does_not_depend_on_the_table_it_came_from(self):
        from synth.resonators import membrane

        small = bessel_zeros_below(50.0)
        grown = bessel_zeros_below(200.0)
        saved = membrane._ZEROS
        try:
            membrane._ZEROS = (0.0, {})
            fresh = bessel_zeros_below(50.0)  # computed anew at another bound
        finally:
            membrane._ZEROS = saved
        for m, zeros in small.items():
            np.testing.assert_array_equal(zeros, grown[m][grown[m] < 50.0])
            np.testing.assert_array_equal(zeros, fresh[m])


class TestGrowth:
    def test_without_an_estimate_the_count_grows(self, monkeypatch):
        from synth.resonators import string

        patch = patch_from_text(STRING.replace("sample_rate: 8000", "sample_rate: 48000"))
        monkeypatch.delattr(string, "count_below")
        cache = SolveCache()
        solution = solve_modes(patch, cache=cache)  # 64, 128: the second reaches Nyquist
        expected = string_reference(24000.0)
        assert len(expected) > 64
        np.testing.assert_allclose(solution.frequency_hz[: len(expected)], expected, rtol=1e-12)
        assert solution.frequency_hz[len(expected)] >= 24000.0
        assert cache.solves == 1  # one miss, however many solves the growth took
        assert solve_modes(patch, cache=cache) is solution and cache.hits == 1


class TestNyquistIsInformation:
    def test_fixed_count_records_what_nyquist_left_out(self):
        text = STRING.replace("sample_rate: 8000}", "sample_rate: 8000, max_modes: 40}")
        table = partial_table(patch_from_text(text))
        expected = string_reference(4000.0)
        assert len(table.frequency_hz) == len(expected)
        assert table.parameters["modes_above_nyquist"] == 40 - len(expected)
        assert table.parameters["modes_limit"] == "every mode below Nyquist"
        assert table.warnings == ()

    def test_every_mode_above_nyquist_is_still_an_error(self):
        text = STRING.replace("sample_rate: 8000", "sample_rate: 1000").replace("tension: 90.0", "tension: 900.0")
        with pytest.raises(PatchError, match=r"every mode is at or above Nyquist \(500 Hz\)") as info:
            partial_table(patch_from_text(text))
        assert info.value.key == "render.sample_rate"


class TestCutWarning:
    def test_frame_drum_cut_by_the_count_warns_with_the_level(self):
        patch = patch_from_text(FRAME_DRUM)
        table = partial_table(patch, cache=SolveCache())
        parameters = table.parameters
        assert parameters["modes_limit"] == "render.max_modes"
        assert parameters["bandwidth_hz"] == table.frequency_hz[-1]
        (warning,) = [w for w in table.warnings if w.startswith("render.max_modes")]
        count, cut_hz, looked, label, omitted_hz, level_db = CUT.match(warning).groups()
        assert (int(count), int(looked)) == (120, 8)
        assert int(cut_hz) == round(table.frequency_hz[-1])
        assert label == parameters["omitted_mode"] and int(omitted_hz) == round(parameters["omitted_mode_hz"])
        assert int(level_db) == round(parameters["omitted_mode_level_db"]) > -60
        # The same mode in a table that keeps it, weighed by the table's own rule.
        longer = partial_table(replace(patch, render=replace(patch.render, max_modes=128)), cache=SolveCache())
        index = list(longer.frequency_hz).index(parameters["omitted_mode_hz"])
        assert longer.labels[index] == label
        assert parameters["omitted_mode_level_db"] == pytest.approx(longer.level_db[index], abs=1e-9)
        assert np.nanmax(longer.level_db[120:128]) == pytest.approx(longer.level_db[index], abs=1e-12)  # loudest of 8

    def test_a_quiet_omitted_mode_is_information_only(self):
        text = """\
            name: quiet-tail
            resonator: {type: partials, fundamental: 200 Hz, ratios: [1, 2, 3, 4, 5],
                        levels_db: [0, -10, -20, -70, -75]}
            excitation: {type: strike}
            render: {duration: 0.05 s, sample_rate: 8000, max_modes: 3}
            """
        table = partial_table(patch_from_text(text.replace("            ", "")))
        assert table.warnings == ()
        assert table.parameters["modes_limit"] == "render.max_modes"
        assert table.parameters["omitted_mode"] == "p4"
        assert table.parameters["omitted_mode_level_db"] == pytest.approx(-70.0, abs=1e-9)  # as given

    def test_a_count_that_reaches_nyquist_is_not_a_cut(self):
        count = len(string_reference(4000.0))
        text = STRING.replace("sample_rate: 8000}", f"sample_rate: 8000, max_modes: {count}}}")
        table = partial_table(patch_from_text(text))
        assert table.parameters["modes_limit"] == "every mode below Nyquist"
        assert "omitted_mode" not in table.parameters and table.warnings == ()

    def test_modes_on_a_node_are_looked_past(self):
        # Struck at the centre, only the (0,n) modes sound: the eight modes after the cut are all silent.
        text = MEMBRANE.replace("radius: 0.4, angle: 0 deg", "radius: 0.0, angle: 0 deg").replace(
            "sample_rate: 8000}", "sample_rate: 8000, max_modes: 60}")
        table = partial_table(patch_from_text(text))
        assert table.parameters["omitted_mode"].startswith("(0,")
        assert any(w.startswith("render.max_modes 60 cuts the series") for w in table.warnings)


class TestCeiling:
    def test_auto_past_the_ceiling_is_one_line_on_max_modes(self):
        text = MEMBRANE.replace("sample_rate: 8000", "sample_rate: 768000")
        with pytest.raises(PatchError) as info:
            partial_table(patch_from_text(text))
        error = info.value
        assert error.key == "render.max_modes"
        assert "\n" not in str(error)
        assert error.message == (f"auto would compute more than {MAX_MODES} modes below Nyquist (384000 Hz), the most "
                                 f"a render may hold: give a number of modes (at most {MAX_MODES}) or lower "
                                 "render.sample_rate")

    @pytest.mark.parametrize("ceiling", [45, 80])  # the exact count after a solve, and the estimate before one
    def test_the_ceiling_counts_every_mode(self, monkeypatch, ceiling):
        monkeypatch.setattr(synth.pipeline, "MAX_MODES", ceiling)
        text = STRING.replace("sample_rate: 8000", "sample_rate: 48000")  # about 106 modes below Nyquist
        assert 1.25 * 45 < len(string_reference(24000.0)) < 1.25 * 80
        with pytest.raises(PatchError, match=rf"more than {ceiling} modes below Nyquist \(24000 Hz\)"):
            partial_table(patch_from_text(text), cache=SolveCache())

    def test_a_number_past_the_ceiling_is_refused(self):
        text = STRING.replace("sample_rate: 8000}", f"sample_rate: 8000, max_modes: {MAX_MODES + 1}}}")
        with pytest.raises(PatchError, match=rf"must be <= {MAX_MODES}, got {MAX_MODES + 1}") as info:
            patch_from_text(text)
        assert info.value.key == "render.max_modes"


class TestInstrumentsAndMidi:
    def test_instrument_keys_with_auto(self):
        harp = load_playable(REPO / "patches" / "instruments" / "workshop-harp.yaml")
        for note in (43, 67):
            table = partial_table(voice_patch(harp, midi_note=note))
            assert table.parameters["modes_limit"] == "every mode below Nyquist"
            assert not any("Nyquist" in w or "max_modes" in w for w in table.warnings)

    def test_midi_through_an_auto_patch(self, tmp_path, capsys):
        patch = tmp_path / "string.yaml"
        patch.write_text(STRING, encoding="utf-8")
        song = mido.MidiFile(ticks_per_beat=100)
        track = mido.MidiTrack()
        for key in (48, 55, 60):
            track.append(mido.Message("note_on", note=key, velocity=90, time=0))
            track.append(mido.Message("note_off", note=key, velocity=64, time=20))
        song.tracks.append(track)
        song.save(tmp_path / "song.mid")
        status = main(["midi", str(tmp_path / "song.mid"), "--patch", str(patch), "-o", str(tmp_path / "song.wav"),
                       "--quiet"])
        assert status == 0
        assert "warning" not in capsys.readouterr().err
        assert (tmp_path / "song.wav").is_file()

    def test_fundamental_helper_reads_auto(self):
        patch = patch_from_text(STRING)
        solution = solve_modes(patch, cache=SolveCache())
        assert solution.frequency_hz[-1] >= 4000.0 > solution.frequency_hz[-2]  # the first at or above Nyquist too
