"""Instrument files (issue 11): keys designed across a range, checked against independent arithmetic.

References, computed here and never by the code under test:

* 12-TET key frequencies, ``a4 * 2 ** ((m - 69) / 12)`` (ISO 16 reference pitch; MIDI numbering);
* a pinned stiff string's tension for a pitch, ``T = 4 L^2 mu f^2 - pi^3 E d^4 / (64 L^2)`` (from
  Fletcher 1964's ``f_1^2 = (T + K) / (4 L^2 mu)``), and its stress ``T / (pi d^2 / 4)``;
* the ``vary`` rule of the format: ``log(value)`` linear in the key number between anchors, held beyond;
* stretched octaves: a key's fundamental on the 2nd partial of the key an octave below (and the
  reverse below the temperament octave A#3..A4), read from each key's own ``synth modes --json``.
"""
from __future__ import annotations

import json
import math
import textwrap

import numpy as np
import pytest

from synth.materials import MATERIALS

from .cli_checks import error_line
from .cli_checks import run_cli as run

STRING = """\
name: test-string
resonator:
  type: string
  material: nylon
  length: 500 mm
  diameter: 0.9 mm
  pitch: C4
excitation:
  type: pluck
  position: 0.3
pickup:
  position: 0.1
damping:
  t60: 3 s
  release_t60: 0.2 s
render:
  duration: 0.3 s
  sample_rate: 16000
  max_modes: auto
"""

HARP = """\
name: test-harp
patch: string.yaml
range: {from: G3, to: D5}
vary:
  resonator.length: {G3: 0.62 m, D5: 0.21 m}
  resonator.diameter: {G3: 1.2 mm, A4: 0.8 mm}
  resonator.material: {G3: nylon, C5: phosphor-bronze}
  damping.t60: {G3: 5 s, D5: 2 s}
"""


def equal_hz(midi, a4=440.0):
    return a4 * 2.0 ** ((midi - 69) / 12.0)


def geometric(midi, anchors):
    """The format's rule, written out here: log-linear between anchors, held beyond."""
    keys = sorted(anchors)
    if midi <= keys[0]:
        return anchors[keys[0]]
    if midi >= keys[-1]:
        return anchors[keys[-1]]
    for k0, k1 in zip(keys, keys[1:]):
        if k0 <= midi <= k1:
            f = (midi - k0) / (k1 - k0)
            return math.exp(math.log(anchors[k0]) + f * (math.log(anchors[k1]) - math.log(anchors[k0])))
    raise AssertionError


@pytest.fixture
def harp(tmp_path):
    (tmp_path / "string.yaml").write_text(STRING, encoding="utf-8")
    path = tmp_path / "harp.yaml"
    path.write_text(HARP, encoding="utf-8")
    return path


def range_json(capsys, path):
    status, out, err = run(capsys, "range", path, "--json")
    assert status == 0, err
    return json.loads(out)


def test_range_table_against_the_string_formulas(capsys, harp):
    data = range_json(capsys, harp)
    assert data["name"] == "test-harp" and [k["note"] for k in data["keys"]][[0, -1][0]] == "G3"
    assert [k["midi"] for k in data["keys"]] == list(range(55, 75))  # G3..D5 inclusive
    for key in data["keys"]:
        m = key["midi"]
        p = key["parameters"]
        assert key["target_hz"] == pytest.approx(equal_hz(m), rel=1e-12)
        assert abs(key["cents_from_target"]) < 0.01
        length = geometric(m, {55: 0.62, 74: 0.21})
        diameter = geometric(m, {55: 1.2e-3, 69: 0.8e-3})
        material = MATERIALS["nylon" if m < 72 else "phosphor-bronze"]
        assert p["length_m"] == pytest.approx(length, rel=1e-12)
        assert p["diameter_m"] == pytest.approx(diameter, rel=1e-12)
        assert p["material"] == material.name
        mu = material.density * math.pi * diameter**2 / 4
        k = math.pi**3 * material.youngs_modulus * diameter**4 / (64 * length**2)
        tension = 4 * length**2 * mu * equal_hz(m) ** 2 - k  # Fletcher 1964, pinned ends
        assert p["tension_n"] == pytest.approx(tension, rel=1e-9)
        stress = tension / (math.pi * diameter**2 / 4)
        assert p["stress_percent_of_strength"] == pytest.approx(100 * stress / material.strength_at(diameter), rel=1e-9)
        assert key["t60_s"] == [pytest.approx(geometric(m, {55: 5.0, 74: 2.0}), rel=1e-9)]
        assert key["ratios"][0] == 1.0 and 2.0 < key["ratios"][1] < 2.01  # a stiff string: slightly sharp
        assert key["warnings"] == []


def test_range_text_and_csv(capsys, harp, tmp_path):
    status, out, err = run(capsys, "range", harp, "--csv", tmp_path / "keys.csv")
    assert status == 0, err
    lines = out.splitlines()
    assert lines[0].startswith("test-harp: 20 keys G3..D5") and "tension N" in lines[1] and "% strength" in lines[1]
    assert lines[2].split()[0] == "G3" and "highest stress" in out
    rows = (tmp_path / "keys.csv").read_text().splitlines()
    assert rows[0].startswith("note,midi,target_hz,fundamental_hz,cents_from_target") and len(rows) == 21


def test_modes_and_render_one_key(capsys, harp, tmp_path):
    status, out, err = run(capsys, "modes", harp, "--pitch", "A4", "--json")
    assert status == 0, err
    table = json.loads(out)
    assert table["fundamental_hz"] == pytest.approx(440.0, rel=1e-12)
    assert table["parameters"]["length_m"] == pytest.approx(geometric(69, {55: 0.62, 74: 0.21}), rel=1e-12)
    status, out, err = run(capsys, "render", harp, "--pitch", "69", "-o", tmp_path / "a4.wav", "--quiet")
    assert status == 0, err and (tmp_path / "a4.wav").exists()


@pytest.mark.parametrize("argv, phrase", [
    ((), r"--pitch: .* is an instrument of the keys G3\.\.D5: give --pitch KEY"),
    (("--pitch", "C6"), r"--pitch: key C6 is outside the instrument's range G3\.\.D5"),
    (("--pitch", "440 Hz"), r"--pitch: .* is not a note name"),
])
def test_an_instrument_is_played_by_its_keys(capsys, harp, tmp_path, argv, phrase):
    status, out, err = run(capsys, "render", harp, "-o", tmp_path / "x.wav", *argv)
    assert status == 2 and out == ""
    assert pytest.importorskip("re").search(phrase, error_line(err))
    assert not (tmp_path / "x.wav").exists()


# --------------------------------------------------------------------------- stretch

STRETCHED = """\
name: test-stretch
patch: string.yaml
range: {from: A2, to: A6}
tuning: {a4: 440 Hz, stretch: octaves}
vary:
  resonator.length: {A2: 1.1 m, A6: 0.09 m}
  resonator.diameter: {A2: 1.3 mm, A6: 0.9 mm}
  resonator.material: {A2: music-wire}
"""


def test_stretched_octaves_meet_within_a_tenth_of_a_cent(capsys, tmp_path):
    """Railsback-style octaves from each key's own partials, read from its own `synth modes --json`."""
    (tmp_path / "string.yaml").write_text(STRING.replace("max_modes: auto", "max_modes: 4"), encoding="utf-8")
    path = tmp_path / "stretch.yaml"
    path.write_text(STRETCHED, encoding="utf-8")
    partials = {}
    for midi in (45, 46, 57, 58, 69, 70, 81, 82, 93):
        status, out, err = run(capsys, "modes", path, "--pitch", str(midi), "--json", "--sample-rate", "48000")
        assert status == 0, err
        partials[midi] = [m["frequency_hz"] for m in json.loads(out)["modes"]]
    for midi in (58, 69):  # the temperament octave A#3..A4 is equal-tempered
        assert partials[midi][0] == pytest.approx(equal_hz(midi), rel=1e-9)
    for midi in (70, 81, 82, 93):  # above: fundamental on the 2nd partial an octave down
        assert abs(1200 * math.log2(partials[midi][0] / partials[midi - 12][1])) < 0.1
    for midi in (45, 46, 57):  # below: 2nd partial on the fundamental an octave up
        assert abs(1200 * math.log2(partials[midi][1] / partials[midi + 12][0])) < 0.1
    stretch = range_json(capsys, path)
    cents = {k["midi"]: k["parameters"]["stretch_cents"] for k in stretch["keys"]}
    assert cents[93] > cents[81] > cents[70] > 0 > cents[57] > cents[45]  # the stretch curve: wider both ways


# --------------------------------------------------------------------------- MIDI and batch


def _song(path, notes):
    import mido

    song = mido.MidiFile(ticks_per_beat=100)
    track = mido.MidiTrack()
    song.tracks.append(track)
    events = []
    for start, key in notes:
        events += [(start, mido.Message("note_on", note=key, velocity=90)), (start + 20, mido.Message("note_off", note=key))]
    now = 0
    for tick, message in sorted(events, key=lambda e: e[0]):
        track.append(message.copy(time=tick - now))
        now = tick
    song.save(path)
    return path


def test_midi_skips_notes_outside_the_range_with_one_warning(capsys, harp, tmp_path):
    song = _song(tmp_path / "s.mid", [(0, 60), (25, 40), (50, 64), (75, 100), (100, 40)])
    status, out, err = run(capsys, "midi", song, "--patch", harp, "-o", tmp_path / "s.wav", "--quiet")
    assert status == 0, err
    assert "2 notes" in out  # played: C4 and E4
    warnings = [line for line in err.splitlines() if "outside" in line]
    assert len(warnings) == 1 and "3 notes outside it skipped (E2, E7)" in warnings[0], err
    only_outside = _song(tmp_path / "o.mid", [(0, 30), (20, 100)])
    status, out, err = run(capsys, "midi", only_outside, "--patch", harp, "-o", tmp_path / "o.wav")
    assert status == 2 and "every note lies outside" in error_line(err) and not (tmp_path / "o.wav").exists()


def test_batch_over_an_instrument_defaults_to_every_key(capsys, harp, tmp_path):
    spec = tmp_path / "lib.yaml"
    spec.write_text("patch: harp.yaml\noutput: lib\n", encoding="utf-8")
    status, out, err = run(capsys, "batch", spec, "--workers", "1")
    assert status == 0, err
    manifest = json.loads((tmp_path / "lib" / "manifest.json").read_text())
    assert [f["midi"] for f in manifest["files"]] == list(range(55, 75))
    assert manifest["library"]["instrument"] is True
    # Each file holds its own key's object: the fundamentals are 12-TET, not one string retuned.
    assert [f["fundamental_hz"] for f in manifest["files"]] == pytest.approx([equal_hz(m) for m in range(55, 75)])
    spec.write_text("patch: harp.yaml\noutput: lib2\nnotes: [C4, C6]\n", encoding="utf-8")
    status, out, err = run(capsys, "batch", spec)
    assert status == 2 and "notes: C6 lie outside the range G3..D5" in error_line(err)
    assert not (tmp_path / "lib2").exists()


# --------------------------------------------------------------------------- bad input


def _bad(tmp_path, capsys, instrument_text, key, line, phrase, *, base=STRING):
    (tmp_path / "string.yaml").write_text(base, encoding="utf-8")
    (tmp_path / "i.yaml").write_text(textwrap.dedent(instrument_text), encoding="utf-8")
    before = sorted(p.name for p in tmp_path.iterdir())
    status, out, err = run(capsys, "range", tmp_path / "i.yaml", "--csv", tmp_path / "out.csv")
    assert status == 2 and out == ""
    message = error_line(err)
    assert f"i.yaml:{line}: {key}: " in message, message
    assert pytest.importorskip("re").search(phrase, message), message
    assert sorted(p.name for p in tmp_path.iterdir()) == before  # nothing written


BAR = STRING.replace("type: string", "type: bar").replace("material: nylon", "material: rosewood") \
    .replace("length: 500 mm", "width: 50 mm").replace("diameter: 0.9 mm", "thickness: 20 mm")


@pytest.mark.parametrize("text, key, line, phrase", [
    ("name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\nvary:\n  resonator.length: {C3: 1 m, C5: 0.5 m}\n",
     "vary.resonator.length.C3", 5, r"anchor C3 is outside the range C4\.\.C5"),
    ("name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\nvary:\n  resonator.lenght: {C4: 1 m}\n",
     "vary.resonator.lenght", 5, r"unknown patch key of a string; did you mean 'resonator.length'"),
    ("name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\nvary:\n  resonator.tension: {C4: 50 N}\n",
     "vary.resonator.tension", 5, r"cannot vary: it is solved for each key's pitch"),
    ("name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\nvary:\n  render.sample_rate: {C4: 8000}\n",
     "vary.render.sample_rate", 5, r"render keys cannot vary by key"),
    ("name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\nvary:\n  resonator.length: {C5: 1 m, C4: 0.5 m}\n",
     "vary.resonator.length.C4", 5, r"anchors must rise through the range: C4 comes after C5"),
    ("name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\nvary:\n  resonator.length: {C#4: 1 m, Db4: 0.5 m}\n",
     "vary.resonator.length.Db4", 5, r"anchor Db4 is the same key as the one before it"),
    ("name: i\npatch: string.yaml\nrange: {from: C5, to: C4}\n", "range.to", 3, r"holds no keys"),
    ("name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\ntubes: {radius: 20 mm}\n",
     "tubes", 4, r"tube resonators go under bars, not a string"),
    ("name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\ntune: {ratios: '1:4:10'}\n",
     "tune", 4, r"tune fits a bar's undercut, not a string"),
    ("name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\nsolve: resonator.ends\n",
     "solve", 4, r"cannot be solved for a string's pitch"),
    ("name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\ncourses: {strings: 2, detune_cents: [0]}\n",
     "courses.detune_cents", 4, r"must be a list of 2 tunings in cents"),
    ("name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\ncourses: {strings: 4}\n",
     "courses.strings", 4, r"must be <= 3"),
    ("name: i\npatch: missing.yaml\nrange: {from: C4, to: C5}\n", "patch", 2, r"no patch file"),
    ("name: i\npatch: string.yaml\nrange: {from: C4, to: Q5}\n", "range.to", 3, r"not a note name"),
    ("name: i\npatch: string.yaml\nrange: {from: C2, to: C3}\nvary:\n  resonator.length: {C2: 0.05 m}\n"
     "  resonator.diameter: {C2: 20 mm}\n", "range", 3, r"C2: pitch 65\.41 Hz is below what this string's stiffness"),
])
def test_bad_instruments_one_line_each(tmp_path, capsys, text, key, line, phrase):
    _bad(tmp_path, capsys, text, key, line, phrase)


def test_courses_on_a_bar_refused(tmp_path, capsys):
    _bad(tmp_path, capsys, "name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\ncourses: {strings: 2}\n",
         "courses", 4, r"unison courses are for strings, not a bar", base=BAR)


def test_a_varied_value_that_breaks_a_key_names_the_instrument_and_the_key(tmp_path, capsys):
    _bad(tmp_path, capsys, "name: i\npatch: string.yaml\nrange: {from: C4, to: C5}\nvary:\n"
         "  excitation.position: {C4: 0.3, C5: 1.5}\n", "vary.excitation.position", 5, r"at A4: must be <= 1")


def test_vary_rule_holds_names_and_interpolates_numbers():
    from synth.instrument import Vary

    numbers = Vary("resonator.length", ((48, 1.0), (60, 0.5), (72, 0.2)), True)
    for midi in range(40, 80):
        assert numbers.at(midi) == pytest.approx(geometric(midi, {48: 1.0, 60: 0.5, 72: 0.2}), rel=1e-12)
    names = Vary("resonator.material", ((48, "nylon"), (60, "phosphor-bronze")), False)
    assert [names.at(m) for m in (40, 48, 59, 60, 80)] == ["nylon", "nylon", "nylon", "phosphor-bronze", "phosphor-bronze"]
    signed = Vary("pickup.position", ((48, 0.0), (60, 0.2)), True)  # an anchor at 0: linear
    assert signed.at(54) == pytest.approx(0.1, rel=1e-12)
    assert np.isclose(Vary("x", ((48, 2.0),), True).at(100), 2.0)
