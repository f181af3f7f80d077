"""Instrument files (format v1): YAML -> a validated :class:`~synth.instrument.Instrument`.

Reads the top-level keys (``name``, ``patch``, ``range``, ``tuning``, ``vary``,
``solve``, ``courses``, ``bridge``, ``polarisations``, ``tune``, ``tubes``),
checks each against the base patch's resonator, and names the instrument
file, line and key in every error.  Wherever a patch file is accepted an
instrument file is too (:func:`load_playable`), told apart by its ``range``.
"""
from __future__ import annotations

import difflib
import math
from pathlib import Path

from .instrument import Instrument, TuneStore, Vary
from .resonators import resonator_module
from .schema import Field, Section, convert, read_section
from .units import A4_HZ, midi_number, midi_to_note, short_repr
from .yamlio import file_problem, load_yaml_file

__all__ = ["load_playable", "playable_from_mapping", "load_instrument", "instrument_from_mapping",
           "is_instrument_mapping", "key_of"]

#: Sections of a patch whose keys ``vary`` may set (render settings are one per job).
_VARIED_SECTIONS = ("resonator", "excitation", "pickup", "damping")

_TOP = {
    "name": Field("slug", required=True),
    "patch": Field("str", required=True, takes="the base patch's file, relative to this file"),
    "range": Field("any", required=True, takes="{from: NOTE, to: NOTE}"),
    "tuning": Field("any"),
    "vary": Field("any"),
    "solve": Field("str"),
    "courses": Field("any"),
    "bridge": Field("any"),
    "polarisations": Field("any"),
    "tune": Field("any"),
    "tubes": Field("any"),
}
_RANGE = {"from": Field("any", required=True), "to": Field("any", required=True)}
_TUNING = {
    "a4": Field("frequency", default=A4_HZ, low=300.0, high=600.0),
    "stretch": Field("choice", default="none", choices=("none", "octaves")),
}
_COURSES = {
    "strings": Field("int", required=True, low=1, high=3),
    "detune_cents": Field("any"),
}
_DETUNE = Field("number", low=-50.0, high=50.0)
_BRIDGE = {
    "conductance": Field("number", low=0.0, high=1.0, takes="the bridge's point conductance in s/kg (m/(N s))"),
    "susceptance": Field("number", low=-1.0, high=1.0, takes="the bridge's point susceptance in s/kg"),
}
_POLARISATIONS = {
    "conductance": Field("number", low=0.0, high=1.0),
    "susceptance": Field("number", low=-1.0, high=1.0),
    "split_cents": Field("number", low=-50.0, high=50.0),
    "angle": Field("angle", low=0.0, high=math.pi / 2),
}
_TUNE = {
    "ratios": Field("any", required=True, takes="partial ratios such as '1:4:10'"),
    "points": Field("int", low=9, high=201),
}
_TUBES = {
    "radius": Field("any", required=True, takes="a radius, e.g. '25 mm', or {KEY: radius, ...}"),
    "coupling": Field("number", positive=True, high=0.2),
    "level": Field("number", low=0.0, high=100.0),
    "temperature": Field("temperature", default=20.0),
}
_TUBE_RADIUS = Field("length", positive=True, high=0.5)


def is_instrument_mapping(mapping):
    """True for an instrument file's mapping (told apart from a patch by its ``range`` key)."""
    return isinstance(mapping, dict) and "range" in mapping


def load_playable(path, *, overrides=None):
    """A :class:`~synth.patch.Patch` or an :class:`Instrument` from the YAML file at `path`."""
    return playable_from_mapping(load_yaml_file(path), file=str(path), overrides=overrides)


def playable_from_mapping(mapping, *, file, overrides=None):
    from .patch import patch_from_mapping

    if is_instrument_mapping(mapping):
        return instrument_from_mapping(mapping, file=file, overrides=overrides)
    return patch_from_mapping(mapping, file=file, overrides=overrides)


def load_instrument(path, *, overrides=None):
    """Load and validate the instrument file at `path` (errors name the file, line and key)."""
    return instrument_from_mapping(load_yaml_file(path), file=str(path), overrides=overrides)


def key_of(value):
    """MIDI key of a note name (``C2``) or a MIDI number (an int, or its digits); ValueError otherwise."""
    if isinstance(value, str) and value.strip().isdigit():
        value = int(value.strip())
    return midi_number(value)


def instrument_from_mapping(mapping, *, file, overrides=None):
    """Validate an instrument file's parsed mapping into an :class:`Instrument`."""
    from .patch import _collect_lines, patch_from_mapping
    from .tuning import TuningError, parse_ratios

    top = Section(mapping, file=file)
    values = read_section(top, _TOP)
    lines = _collect_lines(mapping)
    base_path = (Path(file).parent / values["patch"])
    problem = file_problem(base_path)
    if problem == "not found":
        raise top.error("patch", f"no patch file {str(base_path)!r} (paths are relative to the instrument file)")
    if problem:
        raise top.error("patch", f"cannot use {short_repr(str(base_path))} as the base patch: {problem}")
    base_mapping = load_yaml_file(base_path)  # read and parsed once: the base patch and every key's mapping
    base = patch_from_mapping(base_mapping, file=str(base_path), overrides=overrides)
    kind = base.resonator.TYPE
    module = resonator_module(kind)

    span = top.child("range", _RANGE)
    bounds = read_section(span, _RANGE)
    keys = {}
    for end in ("from", "to"):
        try:
            keys[end] = midi_number(bounds[end])
        except ValueError as error:
            raise span.error(end, str(error)) from None
    if keys["to"] < keys["from"]:
        raise span.error("to", f"the range {bounds['from']}..{bounds['to']} holds no keys: 'to' must be at or above 'from'")
    low, high = keys["from"], keys["to"]

    tuning = read_section(top.child("tuning", _TUNING), _TUNING) if mapping.get("tuning") is not None else \
        {"a4": A4_HZ, "stretch": "none"}

    solvable = [f"resonator.{k}" for k, f in module.FIELDS.items() if _is_number(f) and k != "pitch"]
    solve = values["solve"] or f"resonator.{module.PITCH_REPLACES[0]}"
    if solve not in solvable:
        raise top.error("solve", f"{short_repr(solve)} cannot be solved for a {kind}'s pitch "
                                 f"(allowed: {', '.join(solvable)})")

    vary = ()
    if mapping.get("vary") is not None:
        vary = _read_vary(top.child("vary"), module, kind, low, high, solve)

    detune, bridge, polarisation = (0.0,), None, None
    if mapping.get("courses") is not None:
        if kind != "string":
            raise top.error("courses", f"unison courses are for strings, not a {kind}")
        detune = _read_courses(top.child("courses", _COURSES))
    if mapping.get("bridge") is not None or mapping.get("polarisations") is not None or len(detune) > 1:
        from .coupling import DEFAULT_BRIDGE_CONDUCTANCE, Bridge

        for name in ("bridge", "polarisations"):
            if mapping.get(name) is not None and kind != "string":
                raise top.error(name, f"a bridge and polarisations are for strings, not a {kind}")
        given = read_section(top.child("bridge", _BRIDGE), _BRIDGE) if mapping.get("bridge") is not None else {}
        bridge = Bridge(given.get("conductance") if given.get("conductance") is not None else DEFAULT_BRIDGE_CONDUCTANCE,
                        given.get("susceptance") or 0.0)
        if mapping.get("polarisations") is not None:
            polarisation = _read_polarisations(top, bridge)

    tune = None
    if mapping.get("tune") is not None:
        if kind != "bar":
            raise top.error("tune", f"tune fits a bar's undercut, not a {kind}")
        section = top.child("tune", _TUNE)
        given = read_section(section, _TUNE)
        try:
            ratios = parse_ratios(str(given["ratios"]))
        except (TuningError, ValueError) as error:
            raise section.error("ratios", str(error)) from None
        from .tuning import DEFAULT_POINTS

        tune = (tuple(ratios), given["points"] or DEFAULT_POINTS)

    tubes = None
    if mapping.get("tubes") is not None:
        if kind != "bar":
            raise top.error("tubes", f"tube resonators go under bars, not a {kind}")
        tubes = _read_tubes(top.child("tubes", _TUBES), low, high)

    store = TuneStore(Path(file).with_suffix(".tuned.json")) if tune is not None else None
    return Instrument(name=values["name"], source=file, base=base, base_mapping=base_mapping, low=low, high=high,
                      a4_hz=tuning["a4"], stretch=tuning["stretch"], vary=vary, solve=solve,
                      coupling=(detune, bridge, polarisation, tubes), tune=tune, tubes=tubes, lines=lines,
                      overrides=overrides, store=store)


def _is_number(field):
    return field.kind not in ("any", "choice", "slug", "str", "bool", "pitch")


def _section_fields(section_name, module):
    from .patch import _SECTION_KEYS

    if section_name == "resonator":
        return module.FIELDS
    return _SECTION_KEYS[section_name]


def _read_vary(section, module, kind, low, high, solve):
    entries = []
    for dotted, anchors in section.mapping.items():
        if not isinstance(dotted, str) or dotted.count(".") != 1:
            raise section.error(dotted, "must be a patch key such as resonator.length or damping.t60")
        section_name, key = dotted.split(".")
        if section_name not in _VARIED_SECTIONS:
            raise section.error(dotted, f"{section_name} keys cannot vary by key (allowed sections: "
                                        f"{', '.join(_VARIED_SECTIONS)}; render settings are one per job)")
        fields = _section_fields(section_name, module)
        if key not in fields:
            allowed = [f"{section_name}.{k}" for k in fields]
            close = difflib.get_close_matches(dotted, allowed, n=1, cutoff=0.6)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            owner = f" of a {kind}" if section_name == "resonator" else ""
            raise section.error(dotted, f"unknown patch key{owner}{hint} (allowed: {', '.join(allowed)})")
        if dotted in (solve, "resonator.pitch", "resonator.type"):
            why = "it names the object" if key == "type" else "it is solved for each key's pitch"
            raise section.error(dotted, f"{dotted} cannot vary: {why}")
        field = fields[key]
        points = _read_anchors(section, dotted, anchors, field, low, high)
        numeric = all(_plain_number(v) for _, v in points)
        entries.append(Vary(dotted, points, numeric, whole=field.kind == "int"))
    return tuple(entries)


def _read_anchors(section, key, anchors, field, low, high):
    """((MIDI key, value), ...) of the anchor mapping under `key` of `section`: rising keys inside the range."""
    if not isinstance(anchors, dict) or not anchors:
        raise section.error(key, f"must be a mapping of anchor keys to values, e.g. {{C2: ..., G6: ...}}, "
                                 f"got {short_repr(anchors)}")
    anchor_section = Section(anchors, file=section.file, path=section.key(key), header_line=section.line(key))
    points = []
    for anchor, value in anchors.items():
        try:
            midi = midi_number(anchor)
        except ValueError as error:
            raise anchor_section.error(anchor, str(error)) from None
        if not low <= midi <= high:
            raise anchor_section.error(anchor, f"anchor {midi_to_note(midi)} is outside the range "
                                               f"{midi_to_note(low)}..{midi_to_note(high)}")
        if points and midi == points[-1][0]:
            raise anchor_section.error(anchor, f"anchor {anchor} is the same key as the one before it")
        if points and midi < points[-1][0]:
            raise anchor_section.error(anchor, f"anchors must rise through the range: {anchor} comes after "
                                               f"{midi_to_note(points[-1][0])}")
        if _is_number(field) or (field.kind == "any" and _plain_number(value)):
            try:
                value = convert(field if _is_number(field) else Field("number"), value)
            except ValueError as error:
                raise anchor_section.error(anchor, str(error)) from None
        points.append((midi, value))
    return tuple(points)


def _plain_number(value):
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _read_courses(section):
    given = read_section(section, _COURSES)
    strings = given["strings"]
    detune = given["detune_cents"]
    if detune is None:
        return (0.0,) * strings
    if not isinstance(detune, list) or len(detune) != strings:
        raise section.error("detune_cents", f"must be a list of {strings} tunings in cents, one per string "
                                            f"(the first is usually 0), got {short_repr(detune)}")
    try:
        return tuple(float(convert(_DETUNE, v)) for v in detune)
    except ValueError as error:
        raise section.error("detune_cents", str(error)) from None


def _read_polarisations(top, bridge):
    from .coupling import DEFAULT_ANGLE, DEFAULT_HORIZONTAL_RATIO, DEFAULT_SPLIT_CENTS, Polarisation

    value = top.mapping.get("polarisations")
    given = {}
    if value is not True:
        if value is False:
            return None
        given = read_section(top.child("polarisations", _POLARISATIONS), _POLARISATIONS)

    def pick(key, default):
        return default if given.get(key) is None else given[key]

    return Polarisation(pick("conductance", DEFAULT_HORIZONTAL_RATIO * bridge.conductance), pick("susceptance", 0.0),
                        pick("split_cents", DEFAULT_SPLIT_CENTS), pick("angle", DEFAULT_ANGLE))


def _read_tubes(section, low, high):
    from .coupling import DEFAULT_TUBE_COUPLING, DEFAULT_TUBE_LEVEL

    given = read_section(section, _TUBES)
    radius = given["radius"]
    if isinstance(radius, dict):
        radius = Vary("tubes.radius", _read_anchors(section, "radius", radius, _TUBE_RADIUS, low, high), True)
    else:
        try:
            radius = Vary("tubes.radius", ((low, convert(_TUBE_RADIUS, radius)),), True)
        except ValueError as error:
            raise section.error("radius", str(error)) from None
    return {"radius": radius,
            "coupling": DEFAULT_TUBE_COUPLING if given["coupling"] is None else given["coupling"],
            "level": DEFAULT_TUBE_LEVEL if given["level"] is None else given["level"],
            "temperature": given["temperature"]}
