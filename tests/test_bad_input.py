"""Bad input: every broken patch, option or path gives one clear error line.

The contract (from the issue): a bad patch gets exactly one line on stderr,
``synth: error: FILE:LINE: KEY: message``, naming the file, the line where the
YAML parser knows it, the dotted key and what is allowed; the exit status is
2; there is no traceback; nothing is written (no audio, no temporary file, no
``renders/`` folder).  YAML is read with the safe loader only.

This file holds:

* ``CASES``: one row per error class of a patch file (a mutation of a valid
  patch, the key, the line and a phrase of the message), each run through
  ``synth render -o out.wav`` and ``synth modes``;
* file-level cases (missing, unreadable, not a mapping, unsafe YAML tags);
* command-line cases (bad overrides, bad output paths);
* a few checks on the API (:func:`synth.load_patch` raising PatchError);
* end-to-end runs in a real subprocess.
"""
from __future__ import annotations

import os
import pickle
import re
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
import soundfile

from synth import InputFileError, PatchError, load_patch, patch_from_text

from .cli_checks import error_line
from .cli_checks import run_cli as run

REPO = Path(__file__).resolve().parents[1]

# A valid patch; line numbers below refer to it (line 1 is ``name:``).
BASE = textwrap.dedent(
    """\
    name: test-string
    resonator:
      type: string
      material: music-wire
      length: 650 mm
      diameter: 0.45 mm
      pitch: A2
      ends: pinned
    excitation:
      type: pluck
      position: 0.12
      contact_time: 1.5 ms
      strength: 1.0
    pickup:
      position: 0.9
    damping:
      t60: 2 s
      t60_high: 0.3 s
      high_frequency: 3 kHz
      release_t60: 0.15 s
    render:
      duration: 0.2 s
      sample_rate: 8000
      bit_depth: 24
      peak_db: -1.0
      max_modes: 64
    """
)

DAMPING_BLOCK = ("  t60: 2 s", "  t60_high: 0.3 s", "  high_frequency: 3 kHz", "  release_t60: 0.15 s")


def mutate(*edits):
    """BASE with whole lines replaced: each edit is (old line, new text or None to delete)."""
    lines = BASE.splitlines()
    for old, new in edits:
        assert lines.count(old) == 1, f"edit target {old!r} must occur exactly once"
        index = lines.index(old)
        lines[index : index + 1] = [] if new is None else new.split("\n")
    return "\n".join(lines) + "\n"


def sub(old, new):
    return (old, new)


def drop(old):
    return (old, None)






def where(file, line=None, key=None):
    """The expected start of an error line: ``synth: error: FILE[:LINE]: [KEY: ]``."""
    text = f"synth: error: {file}"
    if line is not None:
        text += f":{line}"
    text += ": "
    if key is not None:
        text += f"{key}: "
    return text


def written(tmp_path):
    """Every file and folder under `tmp_path`, relative, sorted."""
    return sorted(p.relative_to(tmp_path).as_posix() for p in tmp_path.rglob("*"))


@pytest.fixture
def workdir(tmp_path, monkeypatch):
    """tmp_path as the working folder, so a default ``renders/`` would land there."""
    monkeypatch.chdir(tmp_path)
    return tmp_path


def write(folder, text, name="patch.yaml"):
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


# --------------------------------------------------------------------------
# The control: BASE itself is valid, so each row below fails for its mutation.


def test_base_patch_is_valid(workdir, capsys):
    write(workdir, BASE)
    patch = load_patch("patch.yaml")
    assert patch.name == "test-string"
    status, out, err = run(capsys, "modes", "patch.yaml")
    assert status == 0, err
    assert "fundamental" in out


# --------------------------------------------------------------------------
# One row per error class: (edits, dotted key or None, line, phrase regex).

CASES = [
    # YAML syntax (no key: the parser stops before there is one)
    pytest.param((sub("  length: 650 mm", "\tlength: 650 mm"),), None, 5,
                 r"YAML syntax error: found character '\\t'", id="yaml-tab"),
    pytest.param((sub("  pitch: A2", "  pitch: A2\n   bad indent: 1"),), None, 8,
                 r"YAML syntax error: mapping values are not allowed", id="yaml-indent"),
    pytest.param((sub("  position: 0.12", "  position: 0.12: 3"),), None, 11,
                 r"YAML syntax error", id="yaml-colon-in-value"),
    pytest.param((sub("  ends: pinned", "  ends: pinned\n  length: 700 mm"),), None, 9,
                 r"duplicate key 'length'", id="duplicate-key"),
    pytest.param((sub("name: test-string", 'name: !!python/object/apply:os.system ["echo hi"]'),), None, 1,
                 r"could not determine a constructor for the tag .*python/object/apply:os\.system",
                 id="unsafe-python-tag"),
    # unknown keys, with the close one suggested and the allowed ones listed
    pytest.param((sub("render:", "rendr:"),), "rendr", 21,
                 r"unknown key; did you mean 'render'\? \(allowed: .*resonator", id="unknown-top-key"),
    pytest.param((sub("  length: 650 mm", "  lenght: 650 mm"),), "resonator.lenght", 5,
                 r"unknown key for a string; did you mean 'length'\? \(allowed: .*diameter", id="unknown-resonator-key"),
    pytest.param((sub("  position: 0.12", "  postion: 0.12"),), "excitation.postion", 11,
                 r"did you mean 'position'\?", id="unknown-excitation-key"),
    pytest.param((sub("  position: 0.9", "  possition: 0.9"),), "pickup.possition", 15,
                 r"did you mean 'position'\?", id="unknown-pickup-key"),
    pytest.param((sub("  t60_high: 0.3 s", "  t60_hi: 0.3 s"),), "damping.t60_hi", 18,
                 r"did you mean 't60_high'\?", id="unknown-damping-key"),
    pytest.param((sub("  sample_rate: 8000", "  samplerate: 8000"),), "render.samplerate", 23,
                 r"did you mean 'sample_rate'\? \(allowed: bit_depth, duration", id="unknown-render-key"),
    pytest.param((sub("  bit_depth: 24", "  colour: blue"),), "render.colour", 24,
                 r"unknown key \(allowed: bit_depth, duration, max_modes, peak, peak_db, sample_rate\)",
                 id="unknown-key-no-suggestion"),
    # wrong types
    pytest.param((sub("  length: 650 mm", "  length: true"),), "resonator.length", 5,
                 r"expected a number \(units: m, cm, mm", id="type-bool-length"),
    pytest.param((sub("  length: 650 mm", "  length: [650, mm]"),), "resonator.length", 5,
                 r"expected a number", id="type-list-length"),
    pytest.param((sub("  length: 650 mm", "  length: 650 kg"),), "resonator.length", 5,
                 r"unit 'kg' is not allowed here \(units: m, cm, mm", id="type-wrong-unit"),
    pytest.param((sub("  sample_rate: 8000", "  sample_rate: fast"),), "render.sample_rate", 23,
                 r"cannot read 'fast' as a number \(units: Hz, kHz\)", id="type-text-rate"),
    pytest.param((sub("  max_modes: 64", "  max_modes: 64.5"),), "render.max_modes", 26,
                 r"must be a whole number of modes, 1 \.\. 200000, or auto \(every mode below Nyquist\), got float 64\.5", id="type-float-max-modes"),
    pytest.param((sub("  position: 0.12", "  position: middle"),), "excitation.position", 11,
                 r"cannot read 'middle' as a number.*0\.\.1", id="type-text-position"),
    pytest.param((sub("damping:", "damping: 5"), *map(drop, DAMPING_BLOCK)), "damping", 16,
                 r"must be a mapping of keys, got int 5", id="type-section-not-mapping"),
    pytest.param((sub("  ends: pinned", "  ends: free"),), "resonator.ends", 8,
                 r"'free' is not allowed \(allowed: pinned, clamped\)", id="choice-ends"),
    pytest.param((sub("  type: pluck", "  type: bow"),), "excitation.type", 10,
                 r"'bow' is not allowed \(allowed: pluck, strike, impulse\)", id="choice-excitation"),
    pytest.param((sub("  type: string", "  type: strnig"),), "resonator.type", 3,
                 r"'strnig' is not allowed; did you mean 'string'\?", id="choice-resonator-type"),
    pytest.param((sub("  bit_depth: 24", "  bit_depth: 20"),), "render.bit_depth", 24,
                 r"20 is not allowed \(allowed: 16, 24, 32\)", id="bad-bit-depth"),
    # missing required keys (line: the mapping that lacks it)
    pytest.param((drop("name: test-string"),), "name", 1,
                 r"missing required key", id="missing-name"),
    pytest.param((drop("  length: 650 mm"),), "resonator.length", 2,
                 r"missing required key", id="missing-length"),
    pytest.param((drop("  type: string"),), "resonator.type", 2,
                 r"missing required key \(allowed: (.*, )?string\b", id="missing-resonator-type"),
    pytest.param((drop("  material: music-wire"),), "resonator.material", 2,
                 r"missing required key", id="missing-material"),
    pytest.param((sub("  material: music-wire", "  material:\n    youngs_modulus: 200 GPa"),),
                 "resonator.material.density", 4, r"missing required key",
                 id="missing-custom-density"),
    # negative or zero sizes
    pytest.param((sub("  length: 650 mm", "  length: 0"),), "resonator.length", 5,
                 r"must be > 0, got 0", id="zero-length"),
    pytest.param((sub("  diameter: 0.45 mm", "  diameter: -0.45 mm"),), "resonator.diameter", 6,
                 r"must be > 0, got '-0\.45 mm'", id="negative-diameter"),
    pytest.param((sub("  pitch: A2", "  tension: -5 N"),), "resonator.tension", 7,
                 r"must be > 0", id="negative-tension"),
    pytest.param((sub("  duration: 0.2 s", "  duration: 0 s"),), "render.duration", 22,
                 r"must be > 0", id="zero-duration"),
    pytest.param((sub("  t60: 2 s", "  t60: -2 s"),), "damping.t60", 17,
                 r"must be > 0", id="negative-t60"),
    pytest.param((sub("  sample_rate: 8000", "  sample_rate: 0"),), "render.sample_rate", 23,
                 r"must be >= 1000 Hz", id="zero-sample-rate"),
    pytest.param((sub("  max_modes: 64", "  max_modes: 0"),), "render.max_modes", 26,
                 r"must be >= 1, got 0", id="zero-max-modes"),
    pytest.param((sub("  contact_time: 1.5 ms", "  contact_time: -1 ms"),), "excitation.contact_time", 12,
                 r"must be >= 0 s", id="negative-contact-time"),
    pytest.param((sub("  strength: 1.0", "  strength: -1"),), "excitation.strength", 13,
                 r"must be > 0, got -1", id="negative-strength"),
    pytest.param((sub("  peak_db: -1.0", "  peak_db: 3"),), "render.peak_db", 25,
                 r"must be <= 0 dB, got 3", id="positive-peak-db"),
    # NaN and infinity (YAML's .nan/.inf and text forms)
    pytest.param((sub("  length: 650 mm", "  length: .nan"),), "resonator.length", 5,
                 r"must be a finite number \(1e-06 \.\. 1000; units m, .*\), got nan", id="nan-length"),
    pytest.param((sub("  t60: 2 s", "  t60: .inf"),), "damping.t60", 17,
                 r"must be a finite number \(> 0, <= 3600; units s, ms\), got inf", id="inf-t60"),
    pytest.param((sub("  duration: 0.2 s", "  duration: -.inf"),), "render.duration", 22,
                 r"must be a finite number", id="minus-inf-duration"),
    pytest.param((sub("  sample_rate: 8000", "  sample_rate: nan"),), "render.sample_rate", 23,
                 r"must be a finite number", id="nan-text-rate"),
    pytest.param((sub("  diameter: 0.45 mm", "  diameter: 1e999"),), "resonator.diameter", 6,
                 r"must be a finite number", id="overflow-text-diameter"),
    pytest.param((sub("  pitch: A2", "  pitch: .nan"),), "resonator.pitch", 7,
                 r"must be a finite number", id="nan-pitch"),
    pytest.param((sub("  position: 0.12", "  position: .nan"),), "excitation.position", 11,
                 r"must be a finite number.*0\.\.1", id="nan-position"),
    # positions outside 0..1 (and one on a node of every mode)
    pytest.param((sub("  position: 0.12", "  position: 1.5"),), "excitation.position", 11,
                 r"must be <= 1, got 1\.5 \(a fraction of the length, 0\.\.1\)", id="position-above-1"),
    pytest.param((sub("  position: 0.9", "  position: -0.1"),), "pickup.position", 15,
                 r"must be >= 0, got -0\.1 \(a fraction of the length, 0\.\.1\)", id="pickup-below-0"),
    pytest.param((sub("  position: 0.12", "  position: 0"),), "excitation.position", 11,
                 r"nothing would sound", id="position-on-node"),
    # materials
    pytest.param((sub("  material: music-wire", "  material: music-wir"),), "resonator.material", 4,
                 r"unknown material 'music-wir'; did you mean 'music-wire'\? \(known: aluminium-6061, ",
                 id="unknown-material-close"),
    pytest.param((sub("  material: music-wire", "  material: unobtainium"),), "resonator.material", 4,
                 r"unknown material 'unobtainium' \(known: .*rosewood.*or give a mapping of density",
                 id="unknown-material"),
    pytest.param((sub("  material: music-wire", "  material: [steel]"),), "resonator.material", 4,
                 r"must be a material name \(.*\), a mapping of density, .*, or a material file \(\.yaml\), got", id="material-wrong-type"),
    pytest.param((sub("  material: music-wire", "  material:\n    density: 7850\n    youngs_modulus: 200 GPa\n"
                                                "    poisson_ratio: 0.7"),),
                 "resonator.material.poisson_ratio", 7, r"must be <= 0\.5", id="custom-material-poisson"),
    # name must be a plain file-name slug
    pytest.param((sub("name: test-string", "name: ../evil"),), "name", 1,
                 r"'\.\./evil' is not a plain file-name slug: use letters, digits, '-' and '_' only",
                 id="name-path"),
    pytest.param((sub("name: test-string", "name: my patch"),), "name", 1,
                 r"not a plain file-name slug", id="name-space"),
    pytest.param((sub("name: test-string", "name: -x"),), "name", 1,
                 r"starting with a letter or digit", id="name-leading-dash"),
    pytest.param((sub("name: test-string", "name: " + "a" * 81),), "name", 1,
                 r"at most 80 characters", id="name-too-long"),
    pytest.param((sub("name: test-string", "name: 42"),), "name", 1,
                 r"42 is not a plain file-name slug", id="name-number"),
    pytest.param((sub("name: test-string", "name: a/b.wav"),), "name", 1,
                 r"not a plain file-name slug", id="name-slash"),
    # requests too large to render: say how much memory it would need
    pytest.param((sub("  duration: 0.2 s", "  duration: 200000 s"),), "render.duration", 22,
                 r"would need about 119 GiB of memory, more than a workstation has \(limit 16 GiB\)",
                 id="too-long-duration"),
    pytest.param((sub("  duration: 0.2 s", "  duration: 2000 s"), sub("  sample_rate: 8000", "  sample_rate: 768000")),
                 "render.duration", 22, r"about 114 GiB", id="too-long-at-high-rate"),
    pytest.param((sub("  max_modes: 64", "  max_modes: 300000"),), "render.max_modes", 26,
                 r"must be <= 200000, got 300000", id="too-many-modes"),
    pytest.param((sub("  duration: 0.2 s", "  duration: 1e306 s"),), "render.duration", 22,
                 r"must be <= 1e\+06 s, got '1e306 s' \(allowed: 0\.001 \.\. 1e\+06 s\)", id="absurd-duration"),
    # pitch and tension
    pytest.param((sub("  length: 650 mm", "  length: 100 mm"), sub("  diameter: 0.45 mm", "  diameter: 10 mm")),
                 "resonator.pitch", 7,
                 r"pitch 110 Hz is below what this string's stiffness alone gives \(about \d+ Hz\): "
                 r"make it longer or thinner, or raise the pitch", id="pitch-unreachable"),
    pytest.param((sub("  pitch: A2", "  pitch: A2\n  tension: 100 N"),), "resonator.pitch", 7,
                 r"give exactly one of 'pitch' \(the tension is solved\) or 'tension'", id="pitch-and-tension"),
    pytest.param((drop("  pitch: A2"),), "resonator", 2,
                 r"give exactly one of 'pitch'", id="neither-pitch-nor-tension"),
    pytest.param((sub("  pitch: A2", "  pitch: Q9"),), "resonator.pitch", 7,
                 r"'Q9' is not a pitch: give a note name \(A4, C#3, Bb1\) or a frequency", id="bad-pitch-name"),
    # damping
    pytest.param((sub("  t60_high: 0.3 s", "  t60_high: 3 s"),), "damping.t60_high", 18,
                 r"must not exceed t60 \(2 s\)", id="t60-high-above-t60"),
    pytest.param((sub("  high_frequency: 3 kHz", "  high_frequency: 50 Hz"),), "damping.high_frequency", 19,
                 r"must be above the fundamental \(110\.00 Hz\)", id="high-frequency-below-fundamental"),
    pytest.param((sub("  release_t60: 0.15 s", "  release_t60: 2 h"),), "damping.release_t60", 20,
                 r"unit 'h' is not allowed here \(units: s, ms\)", id="unit-hours"),
    # extreme but finite numbers: every unit kind has a physical range (schema.KIND_BOUNDS)
    pytest.param((sub("  length: 650 mm", "  length: 1e308"),), "resonator.length", 5,
                 r"must be <= 1000 m, got '1e308' \(allowed: 1e-06 \.\. 1000 m\)$", id="huge-length"),
    pytest.param((sub("  length: 650 mm", "  length: 1.0e+30 mm"),), "resonator.length", 5,
                 r"must be <= 1000 m, got '1\.0e\+30 mm' = 1e\+27 m \(allowed: ", id="huge-length-in-mm"),
    pytest.param((sub("  diameter: 0.45 mm", "  diameter: 1e-30"),), "resonator.diameter", 6,
                 r"must be >= 1e-06 m, got '1e-30' \(allowed: 1e-06 \.\. 1000 m\)$", id="tiny-diameter"),
    pytest.param((sub("  high_frequency: 3 kHz", "  high_frequency: 1e300"),), "damping.high_frequency", 19,
                 r"must be <= 1e\+06 Hz, got '1e300' \(allowed: 0\.01 \.\. 1e\+06 Hz\)$", id="huge-high-frequency"),
    pytest.param((sub("  pitch: A2", "  pitch: 1.0e+30"),), "resonator.pitch", 7,
                 r"must be <= 1e\+06 Hz, got 1e\+30 \(allowed: 0\.01 \.\. 1e\+06 Hz\)$", id="huge-pitch"),
    pytest.param((sub("  pitch: A2", "  pitch: C99"),), "resonator.pitch", 7,
                 r"must be <= 1e\+06 Hz, got 'C99' = 1\.036e\+31 Hz", id="note-name-above-range"),
    pytest.param((sub("  pitch: A2", "  tension: 1e30 N"),), "resonator.tension", 7,
                 r"must be <= 1e\+07 N, got '1e30 N' \(allowed: 1e-06 \.\. 1e\+07 N\)$", id="huge-tension"),
    pytest.param((sub("  material: music-wire", "  material: {density: 1e9, youngs_modulus: 200 GPa}"),),
                 "resonator.material.density", 4,
                 r"must be <= 100000 kg/m\^3, got '1e9' \(allowed: 1 \.\. 100000 kg/m\^3\)$", id="huge-density"),
    pytest.param((sub("  material: music-wire", "  material: {density: 1100, youngs_modulus: 500 Pa}"),),
                 "resonator.material.youngs_modulus", 4,
                 r"must be 0 or >= 1000 Pa, got '500 Pa' \(allowed: 0, or 1000 \.\. 1e\+13 Pa\)$",
                 id="youngs-modulus-between-0-and-range"),
    # renders: at least 1 ms long, at a whole number of Hz; a strength that sounds
    pytest.param((sub("  duration: 0.2 s", "  duration: 1e-9"),), "render.duration", 22,
                 r"must be >= 0\.001 s, got '1e-9'", id="empty-render"),
    pytest.param((sub("  sample_rate: 8000", "  sample_rate: 44100.5"),), "render.sample_rate", 23,
                 r"must be a whole number of Hz, got 44100\.5$", id="fractional-sample-rate"),
    pytest.param((sub("  strength: 1.0", "  strength: 0"),), "excitation.strength", 13,
                 r"must be > 0, got 0$", id="zero-strength"),
    # every mode above Nyquist: blame the key that can fix it, with advice that is possible
    pytest.param((sub("  pitch: A2", "  pitch: 5 kHz"),), "render.sample_rate", 23,
                 r"every mode is at or above Nyquist \(4000 Hz\): raise render\.sample_rate to 10001 Hz or more$",
                 id="pitch-above-nyquist"),
    pytest.param((sub("  pitch: A2", "  pitch: 500 kHz"),), "resonator.pitch", 7,
                 r"the lowest mode sounds at 5e\+05 Hz, above what any sample rate allowed here can hold "
                 r"\(Nyquist 384000 Hz at the highest rate, 768000 Hz\): lower the pitch$", id="pitch-above-every-rate"),
    pytest.param((sub("  length: 650 mm", "  length: 1 mm"), sub("  pitch: A2", "  tension: 10 kN")), "resonator", 2,
                 r"the lowest mode sounds at \d\.\d+e\+06 Hz, above what any sample rate allowed here can hold .*: "
                 r"make the object sound lower", id="tension-above-every-rate"),
    # null and missing values, and sections that are not mappings, say what is taken
    pytest.param((sub("  length: 650 mm", "  length: ~"),), "resonator.length", 5,
                 r"must have a value, not null: give a length, e\.g\. '650 mm'; 1e-06 \.\. 1000 m$", id="null-length"),
    pytest.param((drop("  length: 650 mm"),), "resonator.length", 2,
                 r"missing required key \(a length, e\.g\. '650 mm'; 1e-06 \.\. 1000 m\)$", id="missing-length-takes"),
    pytest.param((drop("  material: music-wire"),), "resonator.material", 2,
                 r"missing required key \(a material name \(.*music-wire.*\), a mapping of density, youngs_modulus.*material file",
                 id="missing-material-takes"),
    pytest.param((drop("name: test-string"),), "name", 1,
                 r"missing required key \(a plain name of letters, digits, '-' and '_'\)$", id="missing-name-takes"),
    pytest.param((sub("excitation:", "excitation: 5"), drop("  type: pluck"), drop("  position: 0.12"),
                  drop("  contact_time: 1.5 ms"), drop("  strength: 1.0")), "excitation", 9,
                 r"must be a mapping of keys, got int 5 \(allowed keys: across, contact_time, mallet, position, release_time, strength, type\)$",
                 id="section-not-mapping-lists-keys"),
    # keys YAML reads as something other than a name
    pytest.param((sub("  ends: pinned", "  ends: pinned\n  ~: x"),), None, 9,
                 r"keys must be plain names, got None: YAML reads ~ as nothing \(null\); put the key in quotes",
                 id="null-key"),
    pytest.param((sub("  ends: pinned", "  ends: pinned\n  yes: 3"),), None, 9,
                 r"keys must be plain names, got True: YAML reads yes as true/false; put the key in quotes \('yes':\)",
                 id="bool-key"),
]


@pytest.mark.parametrize("command", ["render", "modes"])
@pytest.mark.parametrize(("edits", "key", "line", "phrase"), CASES)
def test_bad_patch(workdir, capsys, command, edits, key, line, phrase):
    write(workdir, mutate(*edits))
    argv = ["render", "patch.yaml", "-o", "out.wav"] if command == "render" else ["modes", "patch.yaml"]
    status, out, err = run(capsys, *argv)
    message = error_line(err)
    assert status == 2
    assert out == ""
    assert message.startswith(where("patch.yaml", line, key)), message
    assert re.search(phrase, message), message
    assert written(workdir) == ["patch.yaml"]


# --------------------------------------------------------------------------
# Whole files: missing, unreadable, not a mapping.

FILE_CASES = [
    pytest.param(None, None, r"file not found", id="missing-file"),
    pytest.param(b"\xff\xfe\x00name: x\n", 1, r"not UTF-8 text: byte 0xff cannot be read; save the file as UTF-8",
                 id="not-utf8"),
    pytest.param(b"name: test-string\nresonator:\n  material: caf\xe9\n", 3, r"not UTF-8 text: byte 0xe9", id="latin-1-line-3"),
    pytest.param(b"name: x\nresonator: " + b"[" * 5000 + b"]" * 5000 + b"\n", 2,
                 r"nested too deeply: at most 64 levels of lists and mappings$", id="nested-5000-levels"),
    pytest.param(b"name: x\nresonator: " + b"[" * 100 + b"]" * 100 + b"\n", 2,
                 r"nested too deeply: at most 64 levels", id="nested-100-levels"),
    pytest.param(b"a: &a [x, x, x, x, x, x, x, x, x]\n"
                 + b"".join(f"{n}: &{n} [{', '.join(['*' + p] * 9)}]\n".encode() for p, n in zip("abcde", "bcdef")),
                 6, r"too large: more than 200000 values once aliases \(\*name\) are expanded$", id="billion-laughs"),
    pytest.param(b"- name: test-string\n- resonator: 1\n", 1, r"a patch must be a mapping with keys name, resonator",
                 id="top-level-list"),
    pytest.param(b"just some text\n", 1, r"a patch must be a mapping", id="top-level-scalar"),
    pytest.param(b"", 1, r"a patch must be a mapping", id="empty-file"),
    pytest.param(b"# only a comment\n", 1, r"a patch must be a mapping", id="comment-only"),
]


@pytest.mark.parametrize("command", ["render", "modes"])
@pytest.mark.parametrize(("content", "line", "phrase"), FILE_CASES)
def test_bad_file(workdir, capsys, command, content, line, phrase):
    if content is not None:
        (workdir / "patch.yaml").write_bytes(content)
    argv = ["render", "patch.yaml", "-o", "out.wav"] if command == "render" else ["modes", "patch.yaml"]
    status, out, err = run(capsys, *argv)
    message = error_line(err)
    assert status == 2
    assert out == ""
    assert message.startswith(where("patch.yaml", line)), message
    assert re.search(phrase, message), message
    assert written(workdir) == ([] if content is None else ["patch.yaml"])


def test_folder_as_patch(workdir, capsys):
    (workdir / "folder.yaml").mkdir()
    status, _, err = run(capsys, "modes", "folder.yaml")
    assert status == 2
    assert re.search(r"^synth: error: folder\.yaml: is a folder, not a file", error_line(err))


def test_python_tag_is_not_executed(workdir, capsys):
    """Safe loading only: a tag that would run a shell command is refused, not run."""
    write(workdir, mutate(sub("name: test-string", 'name: !!python/object/apply:os.system ["touch pwned"]')))
    status, out, err = run(capsys, "render", "patch.yaml", "-o", "out.wav")
    assert status == 2
    assert "could not determine a constructor" in error_line(err)
    assert not (workdir / "pwned").exists()
    assert written(workdir) == ["patch.yaml"]
    with pytest.raises(PatchError, match=r"could not determine a constructor"):
        load_patch(workdir / "patch.yaml")
    assert not (workdir / "pwned").exists()


def test_unhashable_key(workdir, capsys):
    write(workdir, mutate(sub("pickup:", "? [a, b]\n: 1\npickup:")))
    status, _, err = run(capsys, "modes", "patch.yaml")
    assert status == 2
    assert error_line(err).startswith(where("patch.yaml", 14) + "YAML syntax error: a key must be a plain name")


# --------------------------------------------------------------------------
# The default output folder: nothing may appear in renders/ (or renders/ itself).


def test_default_output_untouched_on_patch_error(workdir, capsys):
    write(workdir, mutate(sub("  length: 650 mm", "  lenght: 650 mm")))
    status, _, err = run(capsys, "render", "patch.yaml")
    assert status == 2
    assert "did you mean 'length'" in error_line(err)
    assert written(workdir) == ["patch.yaml"]


@pytest.mark.parametrize("edits", [
    pytest.param((sub("  length: 650 mm", "  length: 100 mm"), sub("  diameter: 0.45 mm", "  diameter: 10 mm")),
                 id="pitch-unreachable"),
    pytest.param((sub("  position: 0.12", "  position: 0"),), id="position-on-node"),
])
def test_default_output_untouched_on_render_error(workdir, capsys, edits):
    write(workdir, mutate(*edits))
    status, _, err = run(capsys, "render", "patch.yaml")
    assert status == 2
    error_line(err)
    assert written(workdir) == ["patch.yaml"]


# --------------------------------------------------------------------------
# Command-line overrides and output paths.

OPTION_CASES = [
    pytest.param(["render", "--duration", "-1"], "--duration", r"must be > 0, got -1", id="duration-negative"),
    pytest.param(["render", "--duration", "0"], "--duration", r"must be > 0", id="duration-zero"),
    pytest.param(["render", "--duration", "nan"], "--duration", r"must be a finite number", id="duration-nan"),
    pytest.param(["render", "--sample-rate", "abc"], "--sample-rate",
                 r"cannot read 'abc' as a number \(units: Hz, kHz\)", id="sample-rate-text"),
    pytest.param(["modes", "--sample-rate", "10"], "--sample-rate", r"must be >= 1000 Hz", id="sample-rate-low"),
    pytest.param(["render", "--bit-depth", "20"], "--bit-depth", r"20 is not allowed \(allowed: 16, 24, 32\)",
                 id="bit-depth"),
    pytest.param(["modes", "--max-modes", "0"], "--max-modes", r"must be >= 1, got 0", id="max-modes-zero"),
    pytest.param(["modes", "--max-modes", "300000"], "--max-modes", r"must be <= 200000", id="max-modes-huge"),
    pytest.param(["render", "--pitch", "Q9"], "--pitch", r"'Q9' is not a pitch: give a note name", id="pitch-name"),
    pytest.param(["modes", "--max-modes", "abc"], "--max-modes", r"must be a whole number of modes, 1 \.\. 200000, or auto \(every mode below Nyquist\), got str 'abc'", id="max-modes-text"),
    pytest.param(["modes", "--pitch", "C99"], "--pitch", r"must be <= 1e\+06 Hz, got 'C99' = 1\.036e\+31 Hz", id="pitch-above-range"),
    pytest.param(["render", "--duration", "1e-9"], "--duration", r"must be >= 0\.001 s, got 1e-09", id="duration-empty"),
    pytest.param(["modes", "--sample-rate", "44100.5"], "--sample-rate", r"must be a whole number of Hz, got 44100\.5",
                 id="sample-rate-fraction"),
]


@pytest.mark.parametrize(("args", "option", "phrase"), OPTION_CASES)
def test_bad_override(workdir, capsys, args, option, phrase):
    write(workdir, BASE)
    command, *options = args
    extra = ["-o", "out.wav"] if command == "render" else []
    status, out, err = run(capsys, command, "patch.yaml", *options, *extra)
    message = error_line(err)
    assert status == 2
    assert out == ""
    assert message.startswith(where("command line", key=option)), message
    assert re.search(phrase, message), message
    assert written(workdir) == ["patch.yaml"]


def test_pitch_override_message(workdir, capsys):
    """Whatever it names, a bad --pitch is one line, status 2, saying what a pitch is."""
    write(workdir, BASE)
    status, _, err = run(capsys, "render", "patch.yaml", "--pitch", "Q9", "-o", "out.wav")
    assert status == 2
    assert "'Q9' is not a pitch: give a note name (A4, C#3, Bb1) or a frequency" in error_line(err)
    assert written(workdir) == ["patch.yaml"]


def test_duration_override_too_large(workdir, capsys):
    write(workdir, BASE)
    status, _, err = run(capsys, "render", "patch.yaml", "--duration", "200000", "-o", "out.wav")
    assert status == 2
    assert re.search(r"would need about 119 GiB of memory", error_line(err))
    assert written(workdir) == ["patch.yaml"]


OUTPUT_CASES = [
    pytest.param(["-o", "x.mp3"], r"output must end in \.wav or \.flac, got 'x\.mp3'", id="mp3"),
    pytest.param(["-o", "x"], r"output must end in \.wav or \.flac", id="no-suffix"),
    pytest.param(["-o", "missing/x.wav"], r"output folder 'missing' does not exist", id="missing-folder"),
    pytest.param(["-o", "x.flac", "--bit-depth", "32"], r"FLAC cannot hold 32-bit samples \(allowed: 16, 24\)",
                 id="flac-32-bit"),
]


@pytest.mark.parametrize(("options", "phrase"), OUTPUT_CASES)
def test_bad_output_path(workdir, capsys, options, phrase):
    write(workdir, BASE)
    status, out, err = run(capsys, "render", "patch.yaml", *options)
    message = error_line(err)
    assert status == 2
    assert out == ""
    assert message.startswith("synth: error: command line: --output: "), message
    assert re.search(phrase, message), message
    assert written(workdir) == ["patch.yaml"]


def test_csv_missing_folder(workdir, capsys):
    write(workdir, BASE)
    status, out, err = run(capsys, "modes", "patch.yaml", "--csv", "missing/table.csv")
    assert status == 2
    assert out == ""
    assert "command line: --csv: output folder 'missing' does not exist" in error_line(err)
    assert written(workdir) == ["patch.yaml"]


def test_quoted_bit_depth_is_accepted(workdir, capsys):
    """bit_depth: "24" (text) names the choice 24: it renders a 24-bit file."""
    write(workdir, mutate(sub("  bit_depth: 24", '  bit_depth: "24"')))
    status, _, err = run(capsys, "render", "patch.yaml", "-o", "out.wav", "-q")
    assert status == 0, err
    assert soundfile.info(str(workdir / "out.wav")).subtype == "PCM_24"


# --------------------------------------------------------------------------
# The API: PatchError carries file, line and key.


def test_api_unknown_key(workdir):
    path = write(workdir, mutate(sub("  length: 650 mm", "  lenght: 650 mm")))
    with pytest.raises(PatchError, match=r"did you mean 'length'\?") as info:
        load_patch(path)
    error = info.value
    assert isinstance(error, ValueError)
    assert (error.file, error.line, error.key) == (str(path), 5, "resonator.lenght")
    assert str(error).startswith(f"{path}:5: resonator.lenght: unknown key")


def test_api_position_from_text():
    text = mutate(sub("  position: 0.9", "  position: 2"))
    with pytest.raises(PatchError, match=r"^demo\.yaml:15: pickup\.position: must be <= 1, got 2 \(a fraction"):
        patch_from_text(text, file="demo.yaml")


def test_api_memory_limit():
    text = mutate(sub("  duration: 0.2 s", "  duration: 200000 s"))
    with pytest.raises(PatchError, match=r"about 119 GiB") as info:
        patch_from_text(text, file="big.yaml")
    assert (info.value.line, info.value.key) == (22, "render.duration")


def test_api_missing_file(tmp_path):
    path = tmp_path / "nope.yaml"
    with pytest.raises(InputFileError, match=r"file not found") as info:
        load_patch(path)
    assert isinstance(info.value, PatchError)
    assert info.value.file == str(path)


def test_api_error_pickles():
    with pytest.raises(PatchError) as info:
        patch_from_text(mutate(sub("  material: music-wire", "  material: music-wir")), file="p.yaml")
    copy = pickle.loads(pickle.dumps(info.value))
    assert type(copy) is PatchError
    assert str(copy) == str(info.value)
    assert (copy.file, copy.line, copy.key) == ("p.yaml", 4, "resonator.material")


def test_api_bad_override_names_option():
    with pytest.raises(PatchError, match=r"^command line: --duration: must be > 0") as info:
        patch_from_text(BASE, file="p.yaml", overrides={"render.duration": (-1, "--duration")})
    assert info.value.key == "--duration"


# --------------------------------------------------------------------------
# Huge values, library specs and MIDI maps.


def nested_aliases(levels):
    """A flow list whose aliases expand nine-fold per level (9**levels values, a few hundred bytes)."""
    inner = "&a [" + ", ".join(["x"] * 9) + "]"
    for previous, name in zip("abcdefgh"[: levels - 1], "bcdefghi"):
        inner = f"&{name} [" + ", ".join([inner] + ["*" + previous] * 8) + "]"
    return inner


def test_alias_expanded_value_message_is_short(workdir, capsys):
    """A value of 59049 expanded items (under the size limit) is echoed shortened, not in full."""
    write(workdir, mutate(sub("name: test-string", "name: " + nested_aliases(5))))
    status, _, err = run(capsys, "modes", "patch.yaml")
    message = error_line(err)
    assert status == 2
    assert message.startswith(where("patch.yaml", 1, "name") + "[[[...]"), message
    assert "is not a plain file-name slug" in message
    assert len(message) < 300, len(message)


def test_library_spec_empty_output(workdir, capsys):
    """output: '' would write into the spec's own folder: refused."""
    write(workdir, BASE)
    write(workdir, "patch: patch.yaml\nnotes: [A2]\noutput: ''\n", name="spec.yaml")
    status, out, err = run(capsys, "batch", "spec.yaml", "--workers", "1")
    assert status == 2
    assert out == ""
    assert error_line(err).startswith(where("spec.yaml", 3, "output") + "is empty: name a folder"), err
    assert written(workdir) == ["patch.yaml", "spec.yaml"]


@pytest.mark.parametrize(("entry", "phrase"), [
    pytest.param("''", r"is empty: name a patch file \(YAML\), relative to the map file$", id="empty"),
    pytest.param("sub", r"'[^']*sub' is a folder, not a file: name the patch file \(YAML\) inside it$", id="folder"),
])
def test_map_patch_not_a_file(workdir, capsys, entry, phrase):
    (workdir / "sub").mkdir()
    write(workdir, f"default:\n  patch: {entry}\n", name="map.yaml")
    song = REPO / "patches" / "midi" / "demo-song.mid"
    status, out, err = run(capsys, "midi", song, "--map", "map.yaml", "-o", "out.wav")
    message = error_line(err)
    assert status == 2
    assert out == ""
    assert message.startswith(where("map.yaml", 2, "default.patch")), message
    assert re.search(phrase, message), message
    assert written(workdir) == ["map.yaml", "sub"]


# --------------------------------------------------------------------------
# End to end: a real process, its exit status and its stderr.


SUBPROCESS_CASES = [
    pytest.param(mutate(sub("name: test-string", 'name: !!python/object/apply:os.system ["echo hi"]')),
                 ["render", "patch.yaml", "-o", "out.wav"], r"^synth: error: patch\.yaml:1: YAML syntax error: "
                 r"could not determine a constructor", id="python-tag"),
    pytest.param(mutate(sub("  length: 650 mm", "  lenght: 650 mm")), ["render", "patch.yaml"],
                 r"^synth: error: patch\.yaml:5: resonator\.lenght: unknown key for a string; did you mean 'length'\?",
                 id="unknown-key"),
    pytest.param(BASE, ["render", "patch.yaml", "--duration", "-1"],
                 r"^synth: error: command line: --duration: must be > 0, got -1$", id="duration-override"),
]


@pytest.mark.parametrize(("text", "argv", "pattern"), SUBPROCESS_CASES)
def test_subprocess(tmp_path, text, argv, pattern):
    write(tmp_path, text)
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    result = subprocess.run(
        [sys.executable, "-m", "synth.cli", *argv],
        cwd=tmp_path, env=env, capture_output=True, text=True, timeout=60,
    )
    assert result.returncode == 2, result.stderr
    assert result.stdout == ""  # in particular no "hi" from os.system
    message = error_line(result.stderr)
    assert re.search(pattern, message), message
    assert written(tmp_path) == ["patch.yaml"]
