"""Field checking for YAML specs: one rule per key, one clear message per error.

A :class:`Field` says what a key may hold; :func:`read_section` checks a
mapping against a dict of fields and returns plain SI values, raising
:class:`~synth.errors.PatchError` that names the file, line and dotted key.
Used by the patch loader and by the other YAML specs (MIDI maps, batch).

Every quantity kind has a physical range (:data:`KIND_BOUNDS`) that applies to
every field of that kind, so an extreme but finite number (``length: 1e300``)
is refused here, with the allowed range, instead of failing deep in the
physics; a field's own ``low``/``high`` narrow that range.  A kind's lower
bound above 0 applies to positive values: zero and negative values are the
field's own business (``positive=True``, or ``low=0.0`` to allow exactly 0,
as an ideal string's Young's modulus is; a field with neither leaves the sign
to its caller).
"""
from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass

from .errors import COMMAND_LINE, PatchError, option_error
from .units import UNITS, parse_pitch, parse_quantity, short_repr

__all__ = ["Field", "Section", "read_section", "check_keys", "convert", "convert_option", "KIND_BOUNDS", "SLUG"]

# \A and \Z, not ^ and $: "$" also matches before a final newline, which would let
# "abc\n" through and put a newline in an output file name.
SLUG = re.compile(r"\A[A-Za-z0-9][A-Za-z0-9_-]{0,79}\Z")

#: Physical range (low, high) of every field of a unit kind, in SI units
#: (None: no bound on that side).  Generous on purpose: the widest span a
#: sensible patch could use, so that only absurd values are refused.  A field's
#: own ``low``/``high`` narrow the range, never widen it.
KIND_BOUNDS = {
    "length": (1e-6, 1e3),  # m: 1 um (thin foil, fine wire) .. 1 km
    "frequency": (1e-2, 1e6),  # Hz: a 100 s period .. 1 MHz (pitches too)
    "force": (1e-6, 1e7),  # N: 1 uN .. 10 MN (about 1000 t weight)
    "force_per_length": (1e-6, 1e7),  # N/m
    "pressure": (1e3, 1e13),  # Pa: 1 kPa (soft foam) .. 10 TPa (above diamond's modulus, ~1.1 TPa)
    "density": (1.0, 1e5),  # kg/m^3: aerogel .. 5x osmium (22.6 g/cm^3)
    "areal_density": (1e-6, 1e4),  # kg/m^2: 1 mg/m^2 film .. 10 t/m^2
    "volume": (1e-9, 1e3),  # m^3: 1 mm^3 .. 1000 m^3
    "time": (None, 1e6),  # s: up to about 11.6 days
    "temperature": (-100.0, 500.0),  # degC
}

#: What a key of each kind takes, for messages about a missing or null value.
_TAKES = {
    "length": "a length, e.g. '650 mm'",
    "force": "a force, e.g. '120 N'",
    "force_per_length": "a tension per length, e.g. '600 N/m'",
    "frequency": "a frequency, e.g. '440 Hz'",
    "time": "a time, e.g. '1.5 s' or '20 ms'",
    "pressure": "a pressure or modulus, e.g. '70 GPa'",
    "density": "a density, e.g. '7850 kg/m^3'",
    "areal_density": "a mass per area, e.g. '0.3 kg/m^2'",
    "volume": "a volume, e.g. '0.14 m^3' or '140 L'",
    "angle": "an angle, e.g. '30 deg'",
    "temperature": "a temperature, e.g. '20 degC'",
    "level": "a level in dB, e.g. '-6 dB'",
    "number": "a number",
    "int": "a whole number",
    "pitch": "a pitch: a note name such as 'A4' or a frequency such as '440 Hz'",
    "bool": "true or false",
    "str": "text",
    "slug": "a plain name of letters, digits, '-' and '_'",
}


@dataclass(frozen=True)
class Field:
    """What one key may hold.

    Parameters
    ----------
    kind : str
        A unit kind of :data:`synth.units.UNITS` ("length", "time", ...), or
        "int", "choice", "slug", "pitch", "bool", "str", "any".
    required : bool
        The key must be present.
    default : object
        Value when absent.
    choices : tuple
        Allowed values for "choice".
    low, high : float or None
        Inclusive bounds (after unit conversion); they narrow the kind's
        :data:`KIND_BOUNDS`.  ``low=0.0`` on a kind whose range starts above
        0 allows exactly 0 besides that range.
    positive : bool
        Value must be > 0.
    nullable : bool
        ``null`` is allowed.
    whole : bool
        The SI value must be a whole number; it is returned as an int (a
        sample rate in Hz).
    takes : str
        What the key takes, for messages (default: from `kind`).
    keywords : tuple of str
        Words accepted as they are besides the kind's values (``("auto",)``).
    """

    kind: str
    required: bool = False
    default: object = None
    choices: tuple = ()
    low: float | None = None
    high: float | None = None
    positive: bool = False
    nullable: bool = False
    whole: bool = False
    takes: str = ""
    keywords: tuple = ()


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
        origin = getattr(self.mapping, "origins", {}).get(key)
        if origin is not None:  # set on the command line: name the option, not a line of the file
            return PatchError(message, file=COMMAND_LINE, key=origin)
        return PatchError(message, file=self.file, line=self.line(key), key=self.key(key) if key is not None else self.path or None)

    def missing(self, key, field=None):
        """The error for a required `key` that is absent (line of the section).

        With `field`, the message says what the key takes.
        """
        takes = _takes(field) if field is not None else ""
        return PatchError(
            f"missing required key ({takes})" if takes else "missing required key",
            file=self.file,
            line=self.line(),
            key=self.key(key),
        )

    def child(self, key, allowed=None):
        """The mapping under `key` as a Section.

        `allowed` (a collection of key names, or a phrase) goes into the
        message when the value is not a mapping.
        """
        value = self.mapping.get(key)
        if not isinstance(value, dict):
            if isinstance(allowed, str):
                hint = f" ({allowed})"
            elif allowed:
                hint = f" (allowed keys: {', '.join(sorted(map(str, allowed)))})"
            else:
                hint = ""
            raise self.error(key, f"must be a mapping of keys, got {_describe(value)}{hint}")
        return Section(value, file=self.file, path=self.key(key), header_line=self.line(key))


def _describe(value):
    """Type and a shortened repr of `value` for messages: ``int 5``."""
    if value is None:
        return "nothing (null)"
    return f"{type(value).__name__} {short_repr(value)}"


def _takes(field):
    """What `field` takes, in words (empty when nothing useful can be said)."""
    if field.takes:
        return field.takes
    if field.kind == "choice":
        return "one of " + ", ".join(map(str, field.choices))
    takes = _TAKES.get(field.kind, "")
    if takes and field.kind not in ("bool", "str", "slug"):
        span = _range_text(field)
        if span:
            takes += f"; {span}"
    return takes


def check_keys(section, allowed, *, context=""):
    """Raise on the first key of `section` not in `allowed`, suggesting a close one."""
    for key in section.mapping:
        if key not in allowed:
            close = difflib.get_close_matches(str(key), [str(a) for a in allowed], n=1, cutoff=0.6)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise section.error(key, f"unknown key{context}{hint} (allowed: {', '.join(sorted(map(str, allowed)))})")


_NO_MATCH = object()


def _choice(choices, value):
    """The element of `choices` that `value` names (24.0 and "24" name 24), else _NO_MATCH."""
    if isinstance(value, bool):
        if any(c is value for c in choices):
            return value
        word = "true" if value else "false"  # YAML reads an unquoted true / false as a boolean
        return word if word in choices else _NO_MATCH
    for choice in choices:
        if type(choice) is type(value) and choice == value:
            return choice
    number = value
    if isinstance(value, str):
        try:
            number = float(value.strip())
        except ValueError:
            return _NO_MATCH
    if isinstance(number, (int, float)):
        for choice in choices:
            if isinstance(choice, (int, float)) and not isinstance(choice, bool) and choice == number:
                return choice
    return _NO_MATCH


def convert(field, value):
    """Check and convert one value; raise ValueError with what is allowed.

    Parameters
    ----------
    field : Field
    value : object
        As read from YAML (or the command line).

    Returns
    -------
    object
        SI float for unit kinds and pitches (an int with ``field.whole``), the
        element of ``field.choices`` for a choice, else `value` itself.

    Raises
    ------
    ValueError
        One line saying what is wrong and what is allowed; the value is
        shortened (``reprlib``) so a huge value cannot make a huge message.
    """
    if value is None:
        if field.nullable:
            return None
        takes = _takes(field)
        raise ValueError(f"must have a value, not null: give {takes}" if takes else "must have a value, not null")
    kind = field.kind
    if isinstance(value, str) and value.strip().lower() in field.keywords:  # auto, AUTO, " auto"
        return value.strip().lower()
    if kind == "any":
        return value
    if kind == "bool":
        if not isinstance(value, bool):
            words = "true or false" + "".join(f" or {k}" for k in field.keywords)
            raise ValueError(f"must be {words}, got {short_repr(value)}")
        return value
    if kind == "str":
        if not isinstance(value, str):
            raise ValueError(f"must be text, got {_describe(value)}")
        return value
    if kind == "slug":
        if not isinstance(value, str) or not SLUG.match(value):
            raise ValueError(
                f"{short_repr(value)} is not a plain file-name slug: use letters, digits, '-' and '_' only "
                "(starting with a letter or digit, at most 80 characters)"
            )
        return value
    if kind == "choice":
        match = _choice(field.choices, value)
        if match is _NO_MATCH:
            close = difflib.get_close_matches(str(value)[:100], [str(c) for c in field.choices], n=1)
            hint = f"; did you mean {close[0]!r}?" if close and close[0] != str(value) else ""
            raise ValueError(f"{short_repr(value)} is not allowed{hint} (allowed: {', '.join(map(str, field.choices))})")
        return match
    if kind == "int":
        if isinstance(value, bool) or not isinstance(value, int):
            takes = field.takes if field.keywords and field.takes else "a whole number"
            raise ValueError(f"must be {takes}, got {_describe(value)}")
        number = value
    elif kind == "pitch":
        if isinstance(value, bool):
            raise ValueError(f"must be a pitch, got {value!r}")
        number = parse_pitch(value)
    elif kind in UNITS:
        number = parse_quantity(value, kind)
    else:  # pragma: no cover - a programming error
        raise TypeError(f"unknown field kind {kind!r}")
    return _check_number(field, number, value)


def convert_option(field, value, option):
    """:func:`convert` for a command-line value: errors name `option` (``command line: --x: ...``)."""
    try:
        return convert(field, value)
    except ValueError as error:
        raise option_error(str(error), option) from None


def _unit_kind(kind):
    """The unit kind whose units and range a field kind uses (pitches are frequencies)."""
    return "frequency" if kind == "pitch" else kind


def _check_number(field, number, value):
    """`number` (SI) checked against `field`'s sign, range and wholeness."""
    got = _got(field, number, value)
    if not isinstance(number, int) and not math.isfinite(number):
        raise ValueError(f"must be a finite number{_range_hint(field)}, got {got}")
    if field.positive and number <= 0:
        raise ValueError(f"must be > 0, got {got}")
    low, high = _bounds(field)
    allowed = f" (allowed: {_range_text(field)})" if _unit(field.kind) else ""
    below_own = field.low is not None and number < field.low
    sign_is_the_fields = number <= 0 and not below_own and _kind_low(field) > 0
    if low is not None and number < low and not sign_is_the_fields:
        zero = "0 or " if _zero_ok(field) else ""
        raise ValueError(f"must be {zero}>= {low:g}{_unit(field.kind)}, got {got}{allowed}")
    if high is not None and number > high:
        raise ValueError(f"must be <= {high:g}{_unit(field.kind)}, got {got}{allowed}")
    if field.whole:
        if number != math.floor(number):
            raise ValueError(f"must be a whole number of{_unit(field.kind) or ' units'}, got {got}")
        return int(number)
    return number


_WRITTEN_UNIT = re.compile(r"^\s*[-+]?[\d.]+(?:[eE][-+]?\d+)?\s*(.*?)\s*$")


def _got(field, number, value):
    """The value as the user wrote it, with its SI value where the text is in another unit (or a note name)."""
    text = short_repr(value)
    if isinstance(value, str) and isinstance(number, float) and math.isfinite(number):
        written = _WRITTEN_UNIT.match(value)
        if written is None or written.group(1) not in ("", _unit(field.kind).strip()):
            text += f" = {number:.4g}{_unit(field.kind)}"
    return text


def _kind_low(field):
    """The kind's lower bound (SI), or -inf."""
    low = KIND_BOUNDS.get(_unit_kind(field.kind), (None, None))[0]
    return -math.inf if low is None else low


def _zero_ok(field):
    """Exactly 0 is allowed besides the range: the field's own low is 0 where the kind's is above 0."""
    return field.low is not None and field.low <= 0 < _kind_low(field)


def _bounds(field):
    """Effective (low, high): the kind's physical range narrowed by the field's own."""
    low, high = KIND_BOUNDS.get(_unit_kind(field.kind), (None, None))
    if field.low is not None:
        low = field.low if low is None else max(low, field.low)
    if field.high is not None:
        high = field.high if high is None else min(high, field.high)
    return low, high


def _range_text(field, *, unit=True):
    """The allowed range in words with the SI unit: ``1e-06 .. 1000 m``, ``> 0, <= 3600 s``."""
    low, high = _bounds(field)
    unit = _unit(field.kind) if unit else ""
    if low is not None and high is not None:
        text = f"{low:g} .. {high:g}{unit}"
    else:
        parts = []
        if field.positive and (low is None or low <= 0):
            parts.append("> 0")
        if low is not None:
            parts.append(f">= {low:g}")
        if high is not None:
            parts.append(f"<= {high:g}")
        text = ", ".join(parts) + unit if parts else ""
    if _zero_ok(field) and text:
        text = f"0, or {text}"
    return text


def _range_hint(field):
    parts = []
    span = _range_text(field, unit=False)
    if span:
        parts.append(span)
    units = UNITS.get(_unit_kind(field.kind))
    if units:
        parts.append(f"units {', '.join(units)}")
    return f" ({'; '.join(parts)})" if parts else ""


def _unit(kind):
    """' <SI unit>' of a unit kind (pitches are in Hz), '' for plain numbers."""
    units = UNITS.get(_unit_kind(kind))
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
                raise section.missing(key, field)
            values[key] = field.default
            continue
        try:
            values[key] = convert(field, section.mapping[key])
        except ValueError as error:
            raise section.error(key, str(error)) from None
    return values
