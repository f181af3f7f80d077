"""Quantities with units, note names and pitch conversions.

Patch files may write a number in SI units or a string with a unit
("650 mm", "4 kHz", "1.5 ms").  This module turns both into SI floats, and
converts between note names, MIDI numbers, frequencies and cents.

References
----------
ISO 16:1975, *Acoustics -- Standard tuning frequency*: A4 = 440 Hz.
MIDI 1.0 Detailed Specification (MMA): note number 69 is A4; 60 is middle C.
"""
from __future__ import annotations

import math
import re
import reprlib

import numpy as np

__all__ = [
    "UNITS",
    "counted",
    "parse_quantity",
    "note_to_midi",
    "midi_number",
    "midi_to_hz",
    "hz_to_midi",
    "parse_pitch",
    "midi_to_note",
    "cents",
    "short_repr",
    "A4_HZ",
]

A4_HZ = 440.0  # standard tuning frequency (Hz), ISO 16:1975
A4_MIDI = 69  # MIDI note number of A4 (MIDI 1.0)

#: Allowed units per kind of quantity, as factors to the SI unit.
UNITS = {
    "length": {"m": 1.0, "cm": 1e-2, "mm": 1e-3, "um": 1e-6, "in": 0.0254},
    "force": {"N": 1.0, "kN": 1e3},
    "force_per_length": {"N/m": 1.0, "kN/m": 1e3},
    "frequency": {"Hz": 1.0, "kHz": 1e3},
    "time": {"s": 1.0, "ms": 1e-3},
    "pressure": {"Pa": 1.0, "kPa": 1e3, "MPa": 1e6, "GPa": 1e9},
    "density": {"kg/m^3": 1.0, "kg/m3": 1.0, "g/cm^3": 1e3, "g/cm3": 1e3},
    "volume": {"m^3": 1.0, "m3": 1.0, "L": 1e-3, "l": 1e-3, "cm^3": 1e-6, "cm3": 1e-6},
    "areal_density": {"kg/m^2": 1.0, "kg/m2": 1.0, "g/m^2": 1e-3, "g/m2": 1e-3},
    "angle": {"rad": 1.0, "deg": math.pi / 180.0},
    "temperature": {"degC": 1.0, "C": 1.0},
    "level": {"dB": 1.0},
    "number": {},
}

#: Kinds whose bare numbers are not in the SI unit: patch angles are degrees.
BARE_UNITS = {"angle": "deg"}

_QUANTITY = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([^\s\d].*?)?\s*$")
_NOTE = re.compile(r"^\s*([A-Ga-g])([#b♯♭]?)(-?\d+)\s*$")
_PITCH_CLASS = {"C": 0, "D": 2, "E": 4, "F": 5, "G": 7, "A": 9, "B": 11}
_NAMES_SHARP = ("C", "C#", "D", "D#", "E", "F", "F#", "G", "G#", "A", "A#", "B")


class _ShortRepr(reprlib.Repr):
    """reprlib with short limits that also shortens LineDicts and huge ints."""

    def __init__(self):
        super().__init__()
        self.maxlevel = 2
        self.maxstring = self.maxother = 60
        self.maxlist = self.maxtuple = self.maxset = 6
        self.maxdict = 4

    def repr_int(self, x, level):
        if abs(x).bit_length() > 128:  # str() of a huge int is slow and limited (4300 digits)
            return f"<a whole number of about {int(abs(x).bit_length() * math.log10(2)) + 1} digits>"
        return super().repr_int(x, level)

    def repr_LineDict(self, x, level):  # synth.yamlio.LineDict
        return self.repr_dict(x, level)


_SHORT = _ShortRepr()
_SHORT_MAX = 80  # characters of a value echoed in a message


def counted(count, noun, plural=None):
    """``"1 note"``, ``"3 notes"``: `count` with `noun` in the right number (`plural` for irregular ones)."""
    return f"{count} {noun if count == 1 else (plural or noun + 's')}"


def short_repr(value):
    """A repr of `value` short enough for a one-line message (reprlib, at most 80 characters).

    >>> short_repr("x" * 100)[:12], short_repr(list(range(100)))
    ("'xxxxxxxxxxx", '[0, 1, 2, 3, 4, 5, ...]')
    """
    text = _SHORT.repr(value)
    return text if len(text) <= _SHORT_MAX else text[: _SHORT_MAX - 3] + "..."


def parse_quantity(value, kind):
    """Return `value` in SI units.

    Parameters
    ----------
    value : float, int or str
        A number (SI, except the kinds in :data:`BARE_UNITS`: a bare angle is in
        degrees) or a string "number unit", e.g. ``"650 mm"``.
    kind : str
        A key of :data:`UNITS`, e.g. ``"length"``.

    Returns
    -------
    float
        The value in the SI unit of `kind`.

    Raises
    ------
    ValueError
        If the string does not parse or the unit is not one of `kind`'s.

    Examples
    --------
    >>> parse_quantity("650 mm", "length")
    0.65
    >>> parse_quantity("4 kHz", "frequency")
    4000.0
    """
    units = UNITS[kind]
    if isinstance(value, bool):
        raise ValueError(f"expected a number{_unit_hint(kind)}, got {value!r}")
    if isinstance(value, (int, float)):
        return _float(value) * units.get(BARE_UNITS.get(kind), 1.0)
    if not isinstance(value, str):
        raise ValueError(f"expected a number{_unit_hint(kind)}, got {short_repr(value)}")
    match = _QUANTITY.match(value)
    if not match:
        if value.strip().lower() in ("nan", "inf", "-inf", "+inf", ".nan", ".inf"):
            return float(value.strip().lstrip("."))
        raise ValueError(f"cannot read {short_repr(value)} as a number{_unit_hint(kind)}")
    number, unit = match.groups()
    if not unit:
        return float(number) * units.get(BARE_UNITS.get(kind), 1.0)
    if unit not in units:
        raise ValueError(f"unit {short_repr(unit)} is not allowed here{_unit_hint(kind)}")
    return float(number) * units[unit]


def _float(number):
    """float(number); a whole number too large for a float becomes infinity (refused later as not finite)."""
    try:
        return float(number)
    except OverflowError:
        return math.inf if number > 0 else -math.inf


def _unit_hint(kind):
    units = UNITS[kind]
    if not units:
        return ""
    return " (units: " + ", ".join(units) + ")"


def note_to_midi(name):
    """MIDI note number of a note name such as ``"A4"``, ``"C#3"`` or ``"Bb1"``.

    Middle C is C4 = 60 and A4 = 69 (MIDI 1.0 numbering).

    >>> note_to_midi("A4"), note_to_midi("C4"), note_to_midi("Bb1")
    (69, 60, 34)
    """
    match = _NOTE.match(name)
    if not match:
        raise ValueError(f"{short_repr(name)} is not a note name (e.g. A4, C#3, Bb1)")
    letter, accidental, octave = match.groups()
    semitone = _PITCH_CLASS[letter.upper()]
    semitone += {"#": 1, "♯": 1, "b": -1, "♭": -1}.get(accidental, 0)
    return 12 * (int(octave) + 1) + semitone


def midi_number(value):
    """MIDI number (0..127) of a note name (``"C2"``) or a whole number; ValueError says what is allowed.

    >>> midi_number("A4"), midi_number(60)
    (69, 60)
    """
    if isinstance(value, bool):
        raise ValueError(f"{value!r} is not a note")
    if isinstance(value, int):
        midi = value
    elif isinstance(value, str):
        midi = note_to_midi(value.strip())
    else:
        raise ValueError(f"{short_repr(value)} is not a note name (e.g. A4, C#3, Bb1) or a MIDI number")
    if not 0 <= midi <= 127:
        raise ValueError(f"{value!r} is MIDI note {midi}, outside the MIDI range 0..127 (C-1..G9)")
    return midi


def midi_to_note(midi):
    """Note name (sharps) of a MIDI note number: ``midi_to_note(69) == "A4"``."""
    midi = int(midi)
    return f"{_NAMES_SHARP[midi % 12]}{midi // 12 - 1}"


def midi_to_hz(midi, *, a4_hz=A4_HZ):
    """Frequency (Hz) of a (fractional) MIDI note in 12-TET: a4 * 2**((n - 69)/12)."""
    return a4_hz * 2.0 ** ((np.asarray(midi, dtype=float) - A4_MIDI) / 12.0)


def hz_to_midi(frequency, *, a4_hz=A4_HZ):
    """Fractional MIDI note number of a frequency (Hz) in 12-TET."""
    return A4_MIDI + 12.0 * np.log2(np.asarray(frequency, dtype=float) / a4_hz)


def parse_pitch(value, *, a4_hz=A4_HZ):
    """Frequency (Hz) of a pitch given as a note name, ``"261.6 Hz"`` or a number.

    >>> round(parse_pitch("A4"), 6), round(parse_pitch("C4"), 4)
    (440.0, 261.6256)
    """
    if isinstance(value, str) and _NOTE.match(value):
        try:
            return float(a4_hz * 2.0 ** ((note_to_midi(value) - A4_MIDI) / 12.0))
        except OverflowError:  # an absurd octave ("C999999"): refused later as not finite
            return math.inf
    try:
        return parse_quantity(value, "frequency")
    except ValueError:
        raise ValueError(
            f"{short_repr(value)} is not a pitch: give a note name (A4, C#3, Bb1) or a frequency (e.g. '110 Hz')"
        ) from None


def cents(frequency, reference):
    """Interval from `reference` to `frequency` in cents: 1200 log2(f / f_ref)."""
    return 1200.0 * np.log2(np.asarray(frequency, dtype=float) / np.asarray(reference, dtype=float))
