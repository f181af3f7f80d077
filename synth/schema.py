"""Field checking for YAML specs: one rule per key, one clear message per error.

A :class:`Field` says what a key may hold; :func:`read_section` checks a
mapping against a dict of fields and returns plain SI values, raising
:class:`~synth.errors.PatchError` that names the file, line and dotted key.
Used by the patch loader and by the other YAML specs (MIDI maps, batch).
"""
from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass

from .errors import PatchError
from .units import UNITS, parse_pitch, parse_quantity

__all__ = ["Field", "Section", "read_section", "SLUG"]

SLUG = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]{0,79}$")


@dataclass(frozen=True)
class Field:
    """What one key may hold.

    kind : a unit kind of :data:`synth.units.UNITS` ("length", "time", ...),
        or "int", "choice", "slug", "pitch", "bool", "str", "any".
    required : the key must be present.
    default : value when absent.
    choices : allowed values for "choice".
    low, high : inclusive bounds (after unit conversion).
    positive : value must be > 0.
    nullable : ``null`` is allowed.
    """

    kind: str
    required: bool = False
    default: object = None
    choices: tuple = ()
    low: float | None = None
    high: float | None = None
    positive: bool = False
    nullable: bool = False


class Section:
    """A mapping from a YAML file with the path of keys that leads to it."""

    def __init__(self, mapping, *, file, path="", header_line=None):
        self.mapping = mapping
        self.file = file
        self.path = path
        self.header_line = header_line

    def line(self, key=None):
        """Line of `key` (or of the section's own header) where known."""
        lines = getattr(self.mapping, "lines", {})
        if key is not None and key in lines:
            return lines[key]
        if self.header_line is not None:
            return self.header_line
        return getattr(self.mapping, "line", None)

    def key(self, key):
        return f"{self.path}.{key}" if self.path else str(key)

    def error(self, key, message):
        return PatchError(message, file=self.file, line=self.line(key), key=self.key(key) if key is not None else self.path or None)

    def missing(self, key):
        """The error for a required `key` that is absent (line of the section)."""
        return PatchError(
            f"missing required key{_allowed_hint(key)}",
            file=self.file,
            line=self.line(),
            key=self.key(key),
        )

    def child(self, key):
        value = self.mapping.get(key)
        if not isinstance(value, dict):
            raise self.error(key, f"must be a mapping of keys, got {_describe(value)}")
        return Section(value, file=self.file, path=self.key(key), header_line=self.line(key))


def _allowed_hint(key):
    return ""


def _describe(value):
    if value is None:
        return "nothing (null)"
    return f"{type(value).__name__} {value!r}"


def check_keys(section, allowed, *, context=""):
    """Raise on the first key of `section` not in `allowed`, suggesting a close one."""
    for key in section.mapping:
        if key not in allowed:
            close = difflib.get_close_matches(str(key), [str(a) for a in allowed], n=1, cutoff=0.6)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise section.error(key, f"unknown key{context}{hint} (allowed: {', '.join(sorted(map(str, allowed)))})")


def convert(field, value):
    """Check and convert one value; raise ValueError with what is allowed."""
    if value is None:
        if field.nullable:
            return None
        raise ValueError("must have a value, not null")
    kind = field.kind
    if kind == "any":
        return value
    if kind == "bool":
        if not isinstance(value, bool):
            raise ValueError(f"must be true or false, got {value!r}")
        return value
    if kind == "str":
        if not isinstance(value, str):
            raise ValueError(f"must be text, got {_describe(value)}")
        return value
    if kind == "slug":
        if not isinstance(value, str) or not SLUG.match(value):
            raise ValueError(
                f"{value!r} is not a plain file-name slug: use letters, digits, '-' and '_' only "
                "(starting with a letter or digit, at most 80 characters)"
            )
        return value
    if kind == "choice":
        if isinstance(value, str) and value.strip().isdigit() and int(value) in field.choices:
            value = int(value)
        if value not in field.choices:
            close = difflib.get_close_matches(str(value), [str(c) for c in field.choices], n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise ValueError(f"{value!r} is not allowed{hint} (allowed: {', '.join(map(str, field.choices))})")
        return value
    if kind == "int":
        if isinstance(value, bool) or not isinstance(value, int):
            raise ValueError(f"must be a whole number, got {_describe(value)}")
        number = value
    elif kind == "pitch":
        if isinstance(value, bool):
            raise ValueError(f"must be a pitch, got {value!r}")
        number = parse_pitch(value)
    elif kind in UNITS:
        number = parse_quantity(value, kind)
    else:  # pragma: no cover - a programming error
        raise TypeError(f"unknown field kind {kind!r}")
    if not math.isfinite(number):
        raise ValueError(f"must be a finite number{_range_hint(field)}, got {value!r}")
    if field.positive and number <= 0:
        raise ValueError(f"must be > 0, got {value!r}")
    if field.low is not None and number < field.low:
        raise ValueError(f"must be >= {field.low:g}{_si(kind)}, got {value!r}")
    if field.high is not None and number > field.high:
        raise ValueError(f"must be <= {field.high:g}{_si(kind)}, got {value!r}")
    return number


def _range_hint(field):
    parts = []
    if field.positive:
        parts.append("> 0")
    if field.low is not None:
        parts.append(f">= {field.low:g}")
    if field.high is not None:
        parts.append(f"<= {field.high:g}")
    unit = ""
    units = UNITS.get(field.kind)
    if units:
        unit = f"; units {', '.join(units)}"
    return f" ({', '.join(parts)}{unit})" if parts or unit else ""


def _si(kind):
    units = UNITS.get(kind)
    if units:
        return " " + next(iter(units))
    return ""


def read_section(section, fields, *, context=""):
    """Check every key of `section` against `fields`; return {key: value}.

    Unknown keys, missing required keys and bad values raise PatchError naming
    the file, line and dotted key.
    """
    check_keys(section, fields, context=context)
    values = {}
    for key, field in fields.items():
        if key not in section.mapping:
            if field.required:
                raise section.missing(key)
            values[key] = field.default
            continue
        try:
            values[key] = convert(field, section.mapping[key])
        except ValueError as error:
            raise section.error(key, str(error)) from None
    return values
