"""Unit checks of the field rules (synth.schema), the YAML loader (synth.yamlio)
and the patch dataclasses: physical ranges, choices, whole numbers, short
messages and the shape limits of a YAML file.

The CLI side of each error class (one line, exit status 2, file:line: key) is
in tests/test_bad_input.py; this file checks the rules themselves.
"""
from __future__ import annotations

import dataclasses
import re

import pytest

from synth import schema
from synth.errors import InputFileError, PatchError
from synth.patch import Damping, Excitation, Pickup, RenderSettings, patch_from_text
from synth.schema import KIND_BOUNDS, Field, Section, convert, read_section
from synth.units import parse_pitch, parse_quantity, short_repr
from synth.yamlio import MAX_DEPTH, MAX_VALUES, load_yaml_file, load_yaml_text

from .test_bad_input import mutate, sub

# --------------------------------------------------------------------------
# Physical ranges per unit kind.

BOUNDED_KINDS = sorted(KIND_BOUNDS)


@pytest.mark.parametrize("kind", BOUNDED_KINDS)
def test_kind_range_edges_are_allowed(kind):
    low, high = KIND_BOUNDS[kind]
    for value in (low, high):
        if value is not None:
            assert convert(Field(kind), value) == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize("kind", BOUNDED_KINDS)
def test_kind_range_outside_is_refused_with_range_and_unit(kind):
    low, high = KIND_BOUNDS[kind]
    unit = next(iter(schema.UNITS[kind]))
    if high is not None:
        beyond = high * 10 if high > 0 else high + 1000
        with pytest.raises(ValueError, match=rf"^must be <= {re.escape(f'{high:g}')} {re.escape(unit)}, got .*\(allowed: .*{re.escape(unit)}\)$"):
            convert(Field(kind), beyond)
    if low is not None:
        below = low / 10 if low > 0 else low - 1000
        with pytest.raises(ValueError, match=rf"^must be >= {re.escape(f'{low:g}')} {re.escape(unit)}, got "):
            convert(Field(kind), below)


@pytest.mark.parametrize("value", [1e-300, 1e-30, 1e-9, 1e9, 1e30, 1e300])
def test_extreme_lengths_refused(value):
    # 1 um .. 1 km: a thin foil to a long wire (schema.KIND_BOUNDS)
    with pytest.raises(ValueError, match=r"\(allowed: 1e-06 \.\. 1000 m\)$"):
        convert(Field("length", positive=True), value)


def test_pitch_uses_the_frequency_range():
    assert convert(Field("pitch"), "A4") == pytest.approx(440.0)  # ISO 16: A4 = 440 Hz
    with pytest.raises(ValueError, match=r"^must be <= 1e\+06 Hz, got 'C99' = 1\.036e\+31 Hz"):
        convert(Field("pitch"), "C99")


def test_field_bounds_narrow_the_kind_range():
    # air_column's own temperature range is -50..100 degC, inside the kind's -100..500
    field = Field("temperature", low=-50.0, high=100.0)
    assert convert(field, "99 degC") == 99.0
    with pytest.raises(ValueError, match=r"^must be <= 100 degC, got '200 degC' \(allowed: -50 \.\. 100 degC\)$"):
        convert(field, "200 degC")
    # a field bound wider than the kind's cannot widen it
    with pytest.raises(ValueError, match=r"must be <= 1000 m"):
        convert(Field("length", high=1e9), 5e3)


def test_low_zero_keeps_the_ideal_string():
    # low=0.0 on a kind whose range starts above 0 allows exactly 0 (patch.py's youngs_modulus)
    field = Field("pressure", low=0.0)
    assert convert(field, 0) == 0.0
    assert convert(field, "200 GPa") == 200e9
    with pytest.raises(ValueError, match=r"^must be 0 or >= 1000 Pa, got '500 Pa' \(allowed: 0, or 1000 \.\. 1e\+13 Pa\)$"):
        convert(field, "500 Pa")
    with pytest.raises(ValueError, match=r"^must be 0 or >= 1000 Pa, got -1 "):
        convert(field, -1)


def test_sign_without_a_field_rule_is_left_to_the_caller():
    # bar.py's profile points use Field("length") and give their own "> 0" message
    assert convert(Field("length"), 0) == 0.0
    assert convert(Field("length"), "-2 mm") == -0.002
    with pytest.raises(ValueError, match=r"^must be >= 1e-06 m"):
        convert(Field("length"), 1e-9)
    with pytest.raises(ValueError, match=r"^must be > 0, got 0$"):
        convert(Field("length", positive=True), 0)


def test_ideal_string_patch_loads():
    text = mutate(sub("  material: music-wire", "  material: {density: 1140, youngs_modulus: 0}"))
    patch = patch_from_text(text, file="ideal.yaml")
    assert patch.resonator.youngs_modulus == 0.0


# --------------------------------------------------------------------------
# Choices, whole numbers, strength.


@pytest.mark.parametrize("value", [24, 24.0, "24", " 24 ", "24.0"])
def test_choice_returns_the_choice_itself(value):
    result = convert(Field("choice", choices=(16, 24, 32)), value)
    assert result == 24 and type(result) is int


@pytest.mark.parametrize("value", [True, 20, "twenty-four", 24.5, [24]])
def test_choice_refuses_others(value):
    with pytest.raises(ValueError, match=r"is not allowed.*\(allowed: 16, 24, 32\)$"):
        convert(Field("choice", choices=(16, 24, 32)), value)


def test_sample_rate_is_a_whole_number_of_hz():
    field = Field("frequency", whole=True)
    assert convert(field, "44.1 kHz") == 44100 and type(convert(field, "44.1 kHz")) is int
    with pytest.raises(ValueError, match=r"^must be a whole number of Hz, got 44100\.5$"):
        convert(field, 44100.5)
    patch = patch_from_text(mutate(sub("  sample_rate: 8000", "  sample_rate: 8 kHz")), file="p.yaml")
    assert patch.render.sample_rate == 8000 and type(patch.render.sample_rate) is int


def test_defaults_are_whole():
    assert type(RenderSettings().sample_rate) is int


def test_strength_must_be_positive():
    with pytest.raises(PatchError, match=r"^p\.yaml:13: excitation\.strength: must be > 0, got 0$"):
        patch_from_text(mutate(sub("  strength: 1.0", "  strength: 0")), file="p.yaml")


# --------------------------------------------------------------------------
# Messages: short, and saying what a key takes.


def test_short_repr_limits():
    assert len(short_repr(list(range(10**6)))) <= 80
    assert len(short_repr("x" * 10**6)) <= 80
    assert short_repr(10**5000) == "<a whole number of about 5001 digits>"
    assert short_repr({"a": 1}) == "{'a': 1}"


@pytest.mark.parametrize(("field", "value"), [
    pytest.param(Field("length"), list(range(10**5)), id="length-list"),
    pytest.param(Field("slug"), "x/" * 10**5, id="slug-text"),
    pytest.param(Field("choice", choices=("a", "b")), "z" * 10**5, id="choice-text"),
    pytest.param(Field("str"), list(range(10**5)), id="str-list"),
    pytest.param(Field("bool"), "y" * 10**5, id="bool-text"),
    pytest.param(Field("int", high=10), 10**5000, id="int-5001-digits"),
    pytest.param(Field("pitch"), "Q" * 10**5, id="pitch-text"),
])
def test_messages_echo_values_shortened(field, value):
    with pytest.raises(ValueError) as info:
        convert(field, value)
    assert len(str(info.value)) < 400, str(info.value)[:500]


def test_huge_yaml_integer_is_not_finite_not_a_crash():
    # YAML reads 1 followed by 400 zeros as an int too large for a float
    with pytest.raises(ValueError, match=r"^must be a finite number"):
        convert(Field("length"), 10**400)
    assert parse_quantity(-(10**400), "length") == float("-inf")
    assert parse_pitch("C999999999") == float("inf")


def test_missing_and_null_say_what_is_taken():
    section = Section({}, file="f.yaml", path="resonator")
    error = section.missing("length", Field("length", required=True, positive=True))
    assert str(error) == "f.yaml: resonator.length: missing required key (a length, e.g. '650 mm'; 1e-06 .. 1000 m)"
    error = section.missing("edges", Field("choice", required=True, choices=("clamped", "free")))
    assert error.message == "missing required key (one of clamped, free)"
    with pytest.raises(ValueError, match=r"^must have a value, not null: give a time, e\.g\. '1\.5 s' or '20 ms'; > 0, <= 3600 s$"):
        convert(Field("time", positive=True, high=3600.0), None)
    with pytest.raises(ValueError, match=r"^must have a value, not null$"):
        convert(Field("any"), None)


def test_child_lists_allowed_keys():
    section = Section({"excitation": 5}, file="f.yaml")
    with pytest.raises(PatchError, match=r"must be a mapping of keys, got int 5 \(allowed keys: a, b\)$"):
        section.child("excitation", ("b", "a"))
    with pytest.raises(PatchError, match=r"must be a mapping of keys, got int 5$"):
        section.child("excitation")


def test_read_section_passes_the_field_to_missing():
    with pytest.raises(PatchError, match=r"missing required key \(a force, e\.g\. '120 N'; 1e-06 \.\. 1e\+07 N\)$"):
        read_section(Section({}, file="f.yaml"), {"tension": Field("force", required=True)})


def test_all_names_exist():
    assert {"check_keys", "convert", "Field", "Section", "read_section"} <= set(schema.__all__)
    for name in schema.__all__:
        assert hasattr(schema, name), name


# --------------------------------------------------------------------------
# The YAML loader: keys, depth, size, encoding, folders.


@pytest.mark.parametrize(("text", "line", "phrase"), [
    ("a: 1\n~: x\n", 2, r"got None: YAML reads ~ as nothing \(null\)"),
    ("a: 1\nyes: 3\n", 2, r"got True: YAML reads yes as true/false; put the key in quotes \('yes':\)"),
    ("a:\n  1.5: x\n", 2, r"got 1\.5: YAML reads 1\.5 as a number with a fraction"),
    ("2020-01-01: x\n", 1, r"got datetime\.date\(2020, 1, 1\): YAML reads 2020-01-01 as a date"),
])
def test_keys_must_be_names(text, line, phrase):
    with pytest.raises(InputFileError, match=r"^f\.yaml:\d+: keys must be plain names, " + phrase) as info:
        load_yaml_text(text, file="f.yaml")
    assert info.value.line == line


def test_whole_number_keys_stay_allowed():
    # MIDI maps number their channels: channels: {1: ..., 10: ...}
    assert load_yaml_text("channels:\n  1: a\n  10: b\n")["channels"] == {1: "a", 10: "b"}


@pytest.mark.parametrize("depth", [MAX_DEPTH + 1, 300, 5000])
def test_deep_nesting_is_one_line(depth):
    text = "name: x\nresonator: " + "[" * depth + "]" * depth + "\n"
    with pytest.raises(InputFileError, match=rf"^f\.yaml:2: nested too deeply: at most {MAX_DEPTH} levels") as info:
        load_yaml_text(text, file="f.yaml")
    assert "\n" not in str(info.value)


def test_nesting_at_the_limit_loads():
    depth = MAX_DEPTH - 1  # the top mapping is the first level
    data = load_yaml_text("k: " + "[" * depth + "]" * depth + "\n")
    assert isinstance(data["k"], list)


def test_alias_expansion_limit():
    laughs = "a: &a [x, x, x, x, x, x, x, x, x]\n" + "".join(
        f"{n}: &{n} [{', '.join(['*' + p] * 9)}]\n" for p, n in zip("abcde", "bcdef")
    )
    with pytest.raises(InputFileError, match=rf"too large: more than {MAX_VALUES} values once aliases"):
        load_yaml_text(laughs, file="f.yaml")
    assert load_yaml_text(laughs.rsplit("\n", 2)[0] + "\n")["e"][0][0][0][0] == ["x"] * 9  # 9**5: allowed


def test_recursive_alias_refused():
    with pytest.raises(InputFileError, match=r"nested too deeply"):
        load_yaml_text("&a [*a]\n", file="f.yaml")


def test_not_utf8_names_the_line(tmp_path):
    path = tmp_path / "p.yaml"
    path.write_bytes("name: x\nresonator:\n  material: café\n".encode("latin-1"))
    with pytest.raises(InputFileError, match=r"^.*p\.yaml:3: not UTF-8 text: byte 0xe9 cannot be read; save the file as UTF-8$"):
        load_yaml_file(path)


def test_folder_is_not_a_file(tmp_path):
    with pytest.raises(InputFileError, match=r"is a folder, not a file"):
        load_yaml_file(tmp_path)


# --------------------------------------------------------------------------
# The patch section dataclasses document every field with its unit.


@pytest.mark.parametrize("cls", [Excitation, Pickup, Damping, RenderSettings])
def test_section_dataclasses_document_fields(cls):
    doc = cls.__doc__ or ""
    assert "Attributes\n    ----------" in doc
    for field in dataclasses.fields(cls):
        assert re.search(rf"^    {field.name} : ", doc, re.M), (cls.__name__, field.name)
