"""synth compare and synth sweep (synth/compare.py, synth/sweep.py, synth/plots_compare.py).

References, each computed here by separate code:

* every frequency, level and T60 of ``compare --json`` and ``sweep --json`` is
  the one a separate ``synth modes --json`` run of that patch (or of that
  value, set with ``--set``) reports; the intervals are recomputed here as
  1200 log2(fB / fA) cents (the definition of the cent, common practice);
* the A-then-B file: its length is A + 0.5 s + B samples; the loudness of its
  A part and its B part, measured by pyloudnorm (an independent ITU-R
  BS.1770-4 implementation, its default K-weighting at 48 kHz, where the
  Recommendation tabulates the filter), agree within 0.5 LU; below one 400 ms
  gating block the RMS levels (numpy) agree within 0.5 dB; the peak is below
  0 dBFS;
* a string swept in length at fixed tension follows Mersenne's law,
  f1 = 1 / (2 L) sqrt(T / mu), mu = rho pi d^2 / 4 (an ideal string:
  Young's modulus 0, so no stiffness term), computed here.
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
import soundfile

from tests.cli_checks import error_line, run_cli

STRING = """\
name: bench-string
resonator:
  type: string
  material: nylon
  length: 420 mm
  diameter: 0.91 mm
  tension: 36 N
excitation: {{type: pluck, position: 0.37}}
pickup: {{position: 0.08}}
damping: {{t60: 2 s, t60_high: 0.4 s, high_frequency: 3 kHz}}
render: {{duration: {duration}, sample_rate: {rate}{extra}}}
"""

MEMBRANE = """\
name: bench-skin
resonator: {type: membrane, shape: circle, radius: 15 cm, tension: 1500 N/m, areal_density: 0.2 kg/m^2}
excitation: {type: strike, position: {radius: 0.4}}
render: {duration: 0.2 s, sample_rate: 8000, max_modes: 12}
"""

#: An ideal string (no stiffness): Young's modulus 0 in a material given by its constants.
IDEAL = """\
name: ideal-string
resonator:
  type: string
  material: {density: 1140 kg/m^3, youngs_modulus: 0, tensile_strength: 400 MPa}
  length: 400 mm
  diameter: 0.5 mm
  tension: 50 N
excitation: {type: pluck, position: 0.3}
render: {duration: 0.2 s, sample_rate: 8000, max_modes: 6}
"""


def _string(duration="0.2 s", rate=8000, extra="", **replace):
    text = STRING.format(duration=duration, rate=rate, extra=extra)
    for old, new in replace.items():
        text = text.replace(old.replace("_", " "), new)
    return text


def _json(capsys, *argv):
    status, out, err = run_cli(capsys, *argv)
    assert status == 0, err
    return json.loads(out)


def _modes(capsys, patch, *settings):
    argv = ["modes", patch, "--json"]
    for setting in settings:
        argv += ["--set", setting]
    return _json(capsys, *argv)


def _files(folder):
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*"))


class TestCompare:
    def test_partials_match_separate_modes_runs(self, tmp_path, write_patch, capsys):
        a = write_patch(_string(), "a.yaml")
        b = write_patch(_string().replace("420 mm", "460 mm").replace("t60: 2 s", "t60: 3 s"), "b.yaml")
        data = _json(capsys, "compare", a, b, "--json")
        modes_a, modes_b = _modes(capsys, a), _modes(capsys, b)
        by_a = {m["label"]: m for m in modes_a["modes"]}
        by_b = {m["label"]: m for m in modes_b["modes"]}
        assert data["matched_by"] == "label"
        assert [r["label"] for r in data["partials"]] == [m["label"] for m in modes_a["modes"] if m["label"] in by_b]
        for row in data["partials"]:
            ma, mb = by_a[row["label"]], by_b[row["label"]]
            assert row["frequency_a_hz"] == ma["frequency_hz"] and row["frequency_b_hz"] == mb["frequency_hz"]
            # the cent: 1200 log2 of the frequency ratio (common practice)
            assert row["difference_cents"] == pytest.approx(1200 * math.log2(mb["frequency_hz"] / ma["frequency_hz"]),
                                                            rel=1e-12, abs=1e-9)
            assert row["t60_ratio"] == pytest.approx(mb["t60_s"] / ma["t60_s"], rel=1e-12)
            if ma["level_db"] is None or mb["level_db"] is None:
                assert row["level_difference_db"] is None
            else:
                assert row["level_difference_db"] == pytest.approx(mb["level_db"] - ma["level_db"], abs=1e-9)
        # a longer string sounds lower: B has modes below Nyquist that A has not
        assert [m["label"] for m in data["only_in_b"]] == [m["label"] for m in modes_b["modes"] if m["label"] not in by_a]
        assert data["only_in_a"] == []
        # the parameters that differ: exactly the two keys changed, and exactly the reported values that moved
        assert [d["key"] for d in data["patch_differences"]] == ["resonator.length", "damping.t60"]
        assert data["patch_differences"][0]["a"] == 0.42 and data["patch_differences"][0]["b"] == 0.46
        assert data["patch_differences"][0]["unit"] == "m"
        pa, pb = modes_a["parameters"], modes_b["parameters"]
        moved = {k for k in {*pa, *pb} if pa.get(k) != pb.get(k)}
        assert {d["key"] for d in data["parameter_differences"]} == moved
        assert "length_m" in moved and "inharmonicity_b" in moved and "tension_n" not in moved

    def test_text_names_what_differs_in_the_chosen_units(self, tmp_path, write_patch, capsys):
        a = write_patch(_string(), "a.yaml")
        b = write_patch(_string().replace("0.91 mm", "1.00 mm"), "b.yaml")
        status, out, err = run_cli(capsys, "compare", a, b, "--rows", "3", "--units", "imperial")
        assert status == 0 and err == ""
        assert "resonator.diameter: 0.0358 in -> 0.0394 in" in out  # 0.91 mm and 1.00 mm / 25.4 (exact inch)
        assert "more matched partials" in out
        assert "stress" in out  # a thicker string at the same tension: less stress

    def test_material_constants_are_keys_when_the_patch_gives_them(self, tmp_path, write_patch, capsys):
        a = write_patch(IDEAL, "a.yaml")
        b = write_patch(IDEAL.replace("1140 kg/m^3", "1300 kg/m^3").replace("0.3}", "0.25}"), "b.yaml")
        data = _json(capsys, "compare", a, b, "--json")
        assert [d["key"] for d in data["patch_differences"]] == ["resonator.material.density", "excitation.position"]

    def test_different_objects_are_matched_in_order_of_frequency(self, tmp_path, write_patch, capsys):
        a = write_patch(_string(), "a.yaml")
        b = write_patch(MEMBRANE, "b.yaml")
        data = _json(capsys, "compare", a, b, "--json")
        fa = [m["frequency_hz"] for m in _modes(capsys, a)["modes"]]
        fb = [m["frequency_hz"] for m in _modes(capsys, b)["modes"]]
        n = min(len(fa), len(fb))
        assert data["matched_by"] == "frequency order"
        assert [(r["frequency_a_hz"], r["frequency_b_hz"]) for r in data["partials"]] == list(zip(fa[:n], fb[:n]))
        assert len(data["only_in_a"]) + len(data["only_in_b"]) == abs(len(fa) - len(fb))
        assert "resonator.type" in [d["key"] for d in data["patch_differences"]]

    def test_loudness_matched_pair(self, tmp_path, write_patch, capsys):
        """A 0.5 s string and a string rendered 12 dB quieter: equal loudness in the file (pyloudnorm)."""
        import pyloudnorm

        rate = 48000
        a = write_patch(_string("0.5 s", rate, ", max_modes: 24"), "a.yaml")
        b = write_patch(_string("0.5 s", rate, ", max_modes: 24, peak_db: -12").replace("0.37", "0.2"), "b.yaml")
        out = tmp_path / "ab.wav"
        status, stdout, err = run_cli(capsys, "compare", a, b, "-o", out)
        assert status == 0
        assert "listening caution" in err
        line = stdout.strip().splitlines()[-1]
        assert line.startswith(f"wrote {out} (A ") and "LUFS after matching; B was" in line and "quieter" in line
        signal, file_rate = soundfile.read(out)
        n = round(0.5 * rate)  # each render: its fixed duration; the gap: 0.5 s
        assert file_rate == rate and len(signal) == 3 * n
        assert np.max(np.abs(signal)) < 1.0
        assert np.all(signal[n : 2 * n] == 0.0)
        meter = pyloudnorm.Meter(rate)  # its default BS.1770 K-weighting, at 48 kHz
        la, lb = meter.integrated_loudness(signal[:n]), meter.integrated_loudness(signal[2 * n :])
        assert abs(la - lb) < 0.5

    def test_short_renders_are_matched_by_rms(self, tmp_path, write_patch, capsys):
        a = write_patch(_string("0.2 s"), "a.yaml")
        b = write_patch(_string("0.1 s", extra=", peak_db: -9"), "b.yaml")
        out = tmp_path / "ab.wav"
        status, stdout, err = run_cli(capsys, "compare", a, b, "-o", out, "--json")
        assert status == 0
        assert "RMS" in err
        data = json.loads(stdout)
        assert data["audio"]["measure"] == "dBFS RMS"
        signal, rate = soundfile.read(out)
        na, gap, nb = 1600, 4000, 800  # 0.2 s, 0.5 s and 0.1 s at 8 kHz
        assert len(signal) == na + gap + nb
        rms = [20 * math.log10(np.sqrt(np.mean(np.square(part)))) for part in (signal[:na], signal[na + gap :])]
        assert abs(rms[0] - rms[1]) < 0.5
        assert np.max(np.abs(signal)) < 1.0

    def test_b_is_rendered_at_as_rate(self, tmp_path, write_patch, capsys):
        a = write_patch(_string("0.2 s", 8000), "a.yaml")
        b = write_patch(_string("0.3 s", 16000), "b.yaml")
        out = tmp_path / "ab.wav"
        status, _, err = run_cli(capsys, "compare", a, b, "-o", out)
        assert status == 0
        assert "rendered at A's sample rate, 8000 Hz" in err
        info = soundfile.info(out)
        assert info.samplerate == 8000 and info.frames == 1600 + 4000 + 2400


class TestSweep:
    def test_json_matches_modes_runs_of_each_value(self, tmp_path, write_patch, capsys):
        patch = write_patch(_string(), "p.yaml")
        data = _json(capsys, "sweep", patch, "--vary", "resonator.tension=30 N..42 N", "--steps", "4", "--json",
                     "--no-audio", "-o", tmp_path / "out")
        assert [r["value"] for r in data["rows"]] == pytest.approx([30.0, 34.0, 38.0, 42.0], rel=1e-15)
        assert data["unit"] == "N" and data["n_steps"] == 4
        for row in data["rows"]:
            modes = _modes(capsys, patch, f"resonator.tension={row['value']!r} N")
            frequencies = [m["frequency_hz"] for m in modes["modes"]]
            assert row["fundamental_hz"] == modes["fundamental_hz"]
            assert [p["frequency_hz"] for p in row["partials"]] == frequencies[:4]
            for p in row["partials"]:
                ratio = p["frequency_hz"] / frequencies[0]
                assert p["ratio"] == pytest.approx(ratio, rel=1e-12)
                # cents from the nearest harmonic, recomputed
                assert p["cents_from_harmonic"] == pytest.approx(1200 * math.log2(ratio / max(1, round(ratio))),
                                                                 abs=1e-9)
            assert row["t60_first_s"] == modes["modes"][0]["t60_s"]
            assert row["parameters"]["tension_n"] == pytest.approx(row["value"], rel=1e-12)
            assert row["parameters"]["stress_pa"] == modes["parameters"]["stress_pa"]
            assert row["file"] is None
        assert _files(tmp_path / "out") == ["bench-string-sweep.csv", "bench-string-sweep.png"]

    def test_string_length_follows_mersenne(self, tmp_path, write_patch, capsys):
        patch = write_patch(IDEAL, "ideal.yaml")
        data = _json(capsys, "sweep", patch, "--vary", "resonator.length=300 mm..600 mm", "--steps", "4", "--json",
                     "--no-audio", "-o", tmp_path / "out")
        mu = 1140.0 * math.pi * 0.0005**2 / 4  # kg/m
        for row, length in zip(data["rows"], (0.3, 0.4, 0.5, 0.6)):
            assert row["value"] == pytest.approx(length, rel=1e-12)
            # Mersenne's law (Mersenne 1636; Taylor): f1 = sqrt(T / mu) / (2 L)
            assert row["fundamental_hz"] == pytest.approx(math.sqrt(50.0 / mu) / (2 * length), rel=1e-9)
            assert [p["ratio"] for p in row["partials"]] == pytest.approx([1, 2, 3, 4], rel=1e-9)  # no stiffness

    def test_renders_figure_and_table(self, tmp_path, write_patch, capsys):
        patch = write_patch(_string(), "p.yaml")
        out = tmp_path / "out"
        status, stdout, err = run_cli(capsys, "sweep", patch, "--vary", "resonator.length=400 mm..500 mm",
                                      "--steps", "3", "-o", out)
        assert status == 0
        assert "listening caution" in err
        names = ["bench-string-1-400.0mm.wav", "bench-string-2-450.0mm.wav", "bench-string-3-500.0mm.wav"]
        assert _files(out) == sorted(names + ["bench-string-sweep.csv", "bench-string-sweep.png"])
        for name in names:
            info = soundfile.info(out / name)
            assert info.samplerate == 8000 and info.frames == 1600
        assert (out / "bench-string-sweep.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        csv_lines = (out / "bench-string-sweep.csv").read_text().splitlines()
        assert csv_lines[1].startswith("index,value_m,fundamental_hz,p1_label") and len(csv_lines) == 5
        assert "stress" in stdout and f"wrote {out / names[0]}" in stdout

    def test_whole_number_keys_take_whole_values(self, tmp_path, write_patch, capsys):
        patch = write_patch(_string(), "p.yaml")
        data = _json(capsys, "sweep", patch, "--vary", "render.sample_rate=8000..16000", "--steps", "3", "--json",
                     "--no-audio", "-o", tmp_path / "out")
        assert [r["value"] for r in data["rows"]] == [8000, 12000, 16000]

    def test_default_folder(self, tmp_path, write_patch, capsys, monkeypatch):
        monkeypatch.chdir(tmp_path)
        write_patch(_string(), "p.yaml")
        status, _, _ = run_cli(capsys, "sweep", "p.yaml", "--vary", "damping.t60=1 s..2 s", "--steps", "2")
        assert status == 0
        assert _files(tmp_path / "renders") == ["bench-string-sweep", "bench-string-sweep/bench-string-1-1.000s.wav",
                                                "bench-string-sweep/bench-string-2-2.000s.wav",
                                                "bench-string-sweep/bench-string-sweep.csv",
                                                "bench-string-sweep/bench-string-sweep.png"]


@pytest.mark.parametrize(
    "argv, phrase",
    [
        (["sweep", "p.yaml", "--vary", "resonator.length=600 mm"], r"--vary resonator\.length: give the range as FROM\.\.TO"),
        (["sweep", "p.yaml", "--vary", "600 mm..700 mm"], r"--vary: give KEY=FROM\.\.TO"),
        (["sweep", "p.yaml", "--vary", "resonator.lenght=0.5..0.6"], r"--vary resonator\.lenght: unknown key.*'length'"),
        (["sweep", "p.yaml", "--vary", "resonator.ends=0.5..0.6"], r"--vary resonator\.ends: takes one of pinned, clamped, not a number"),
        (["sweep", "p.yaml", "--vary", "name=1..2"], r"--vary name: .*not a number"),
        (["sweep", "p.yaml", "--vary", "resonatr.length=1..2"], r"--vary resonatr\.length: .*did you mean 'resonator'"),
        (["sweep", "p.yaml", "--vary", "resonator.length=0.5 m..0.5 m"], r"--vary resonator\.length: FROM and TO are the same"),
        (["sweep", "p.yaml", "--vary", "resonator.length=0.5..2000 m"], r"--vary resonator\.length: must be <= 1000 m"),
        (["sweep", "p.yaml", "--vary", "resonator.length=auto..0.5"], r"--vary resonator\.length: "),
        (["sweep", "p.yaml", "--vary", "resonator.length=0.4..0.5", "--steps", "1"], r"--steps: must be a whole number 2\.\.200, got 1"),
        (["sweep", "p.yaml", "--vary", "resonator.length=0.4..0.5", "--steps", "201"], r"--steps: must be a whole number 2\.\.200"),
        (["sweep", "p.yaml", "--vary", "resonator.length=0.4..0.5", "--steps", "x"], r"--steps: must be a whole number"),
        (["sweep", "p.yaml", "--vary", "render.max_modes=2..3", "--steps", "3"], r"--steps: .*repeat whole numbers"),
        (["sweep", "p.yaml", "--vary", "resonator.length=0.4..0.5", "--set", "resonator.length=1"], r"--vary resonator\.length: .*give it once"),
        (["sweep", "missing.yaml", "--vary", "resonator.length=0.4..0.5"], r"missing\.yaml: file not found"),
        (["sweep", "p.yaml", "--vary", "excitation.strength=0.01..100", "--steps", "3", "--set", "render.peak_db=null"],
         r"at excitation\.strength = 50\.005: .*would clip"),  # found while rendering: the files made are removed
        (["compare", "p.yaml", "missing.yaml"], r"missing\.yaml: file not found"),
        (["compare", "p.yaml", "p.yaml", "-o", "ab.flac"], r"--output: output must end in \.wav"),
        (["compare", "p.yaml", "p.yaml", "--rows", "0"], r"--rows: must be a whole number >= 1"),
    ],
)
def test_errors_are_one_line_and_write_nothing(tmp_path, write_patch, capsys, monkeypatch, argv, phrase):
    import re

    monkeypatch.chdir(tmp_path)
    write_patch(_string(), "p.yaml")
    status, out, err = run_cli(capsys, *argv)
    assert status == 2
    assert out == ""
    line = error_line(err)
    assert re.search(phrase, line), line
    assert _files(tmp_path) == ["p.yaml"]


def test_module_examples():
    """The docstring examples of synth.compare and synth.sweep run as doctests."""
    import doctest

    import synth.compare
    import synth.sweep

    for module in (synth.compare, synth.sweep):
        failures, _ = doctest.testmod(module, optionflags=doctest.ELLIPSIS)
        assert failures == 0, module.__name__
