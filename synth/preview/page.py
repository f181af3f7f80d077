"""The preview page's patch logic: controls from a patch, control values back to a patch, the table as JSON.

No web server here: every function takes and returns plain data, so the tests
(and the server, :mod:`synth.preview.server`) call them directly.

A control is one value of the patch file at a dotted key path
(``resonator.length``): its text is YAML, as a ``--set KEY=VALUE`` value is,
and it is checked exactly as ``synth modes PATCH --set KEY=VALUE`` checks it
(:func:`synth.patch.patch_from_mapping` with overrides).  An empty control
removes the key, so the patch's default applies.
"""
from __future__ import annotations

import copy
import json
import math
import re

from ..errors import COMMAND_LINE, ModalError, PatchError

__all__ = [
    "MAX_ROWS",
    "MAX_VOICES",
    "controls_of",
    "value_text",
    "parse_value",
    "patch_from_values",
    "error_payload",
    "table_payload",
    "stems_svg",
]

#: Rows of the partial table the page shows (the lowest modes; the count of the rest is given).
MAX_ROWS = 200
#: Partials the page's own synthesis plays: the strongest this many (an oscillator each per note).
MAX_VOICES = 256
#: Longest control text accepted (characters): a value, not a document.
MAX_VALUE_CHARS = 1000
#: Longest one-line error sent to the page (characters), as the command line cuts its own.
MAX_ERROR_CHARS = 1000

#: Resonator keys shown as controls, per type, when the patch file gives them
#: (a key in _ALWAYS is shown even when the file leaves it to its default).
_RESONATOR_KEYS = {
    "string": ("length", "diameter", "pitch", "tension"),
    "bar": ("length", "pitch", "width", "thickness", "diameter"),
    "membrane": ("radius", "width", "height", "pitch", "tension", "areal_density", "thickness"),
    "plate": ("radius", "width", "height", "thickness", "pitch"),
    "air-column": ("length", "pitch", "radius", "temperature"),
    "partials": ("fundamental", "pitch"),
}
_ALWAYS = {"air-column": ("temperature",)}

#: key (last part of the path) -> (label, what it takes: the input's tooltip)
_KEY_HINTS = {
    "length": ("length", "a length: 0.65 (m) or '650 mm', '25.5 in'"),
    "diameter": ("diameter", "a length: '0.45 mm'"),
    "width": ("width", "a length: '25 mm'"),
    "height": ("height", "a length: '280 mm'"),
    "thickness": ("thickness", "a length: '1.5 mm'"),
    "radius": ("radius", "a length: '200 mm'"),
    "pitch": ("pitch", "a note name (A2, C#3, Bb1) or a frequency ('110 Hz')"),
    "tension": ("tension", "a force: '90 N' (a membrane's: '900 N/m')"),
    "areal_density": ("mass per area", "'0.25 kg/m^2'"),
    "temperature": ("air temperature", "'20 degC'"),
    "fundamental": ("ratio 1 at", "a frequency: '612 Hz'"),
    "contact_time": ("contact time", "a time: '1.5 ms'"),
    "release_time": ("release time", "a time: '0.4 ms'"),
    "strength": ("strength", "a number > 0 (1: as written)"),
    "t60": ("T60 at the fundamental", "a time: '6 s'"),
    "t60_high": ("T60 at the high frequency", "a time: '0.6 s' (empty: same as t60)"),
    "high_frequency": ("high frequency", "a frequency: '4 kHz'"),
    "release_t60": ("T60 after key-up", "a time: '0.15 s', or null (no dampers)"),
}
_POSITION_HINTS = {
    "fraction": "a fraction of the length, 0..1",
    "xy": "[x, y]: fractions of the width and height",
}


def _one_line(text):
    """`text` on one line of at most :data:`MAX_ERROR_CHARS` characters, control characters escaped."""
    text = " ".join(str(text).splitlines())
    text = "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii") for c in text)
    return text if len(text) <= MAX_ERROR_CHARS else f"{text[: MAX_ERROR_CHARS - 300]} ... {text[-280:]}"


# ---- values as text ----

#: Strings written without quotes: the characters of numbers with units, note names and words.
_PLAIN = re.compile(r"[A-Za-z0-9_.+\-/^#*]+(?: [A-Za-z0-9_.+\-/^#*]+)*")


def float_text(value):
    """A float as YAML 1.1 (PyYAML) reads back as the same float: ``1e-05`` -> ``1.0e-05``.

    Examples
    --------
    >>> float_text(0.45), float_text(1e-5), float_text(2.5e20), float_text(float("inf"))
    ('0.45', '1.0e-05', '2.5e+20', '.inf')
    """
    if math.isnan(value):
        return ".nan"
    if math.isinf(value):
        return ".inf" if value > 0 else "-.inf"
    text = repr(float(value))
    mantissa, e, exponent = text.partition("e")
    if e and "." not in mantissa:
        text = f"{mantissa}.0e{exponent}"
    return text


def _reads_back(text, value):
    from ..yamlio import load_yaml_text

    try:
        return load_yaml_text(text, file="<value>") == value
    except (ModalError, RecursionError):
        return False


def value_text(value):
    """The YAML text of a parsed patch value, on one line, as a control shows it.

    Strings that read back as themselves are written plain ("650 mm", "C#3"),
    others double-quoted; lists and mappings in flow style.

    Examples
    --------
    >>> value_text("650 mm"), value_text(0.12), value_text([0.27, 0.61]), value_text({"radius": 0.6, "angle": "30 deg"})
    ('650 mm', '0.12', '[0.27, 0.61]', '{radius: 0.6, angle: 30 deg}')
    >>> value_text(None), value_text("yes"), value_text("1, 2")
    ('null', '"yes"', '"1, 2"')
    """
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return float_text(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, str):
        if _PLAIN.fullmatch(value) and not value.startswith("#") and _reads_back(value, value):
            return value
        return json.dumps(value)  # a JSON string is a YAML double-quoted scalar
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(value_text(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{value_text(k)}: {value_text(v)}" for k, v in value.items()) + "}"
    return json.dumps(str(value))


#: A control left empty: the key is removed, so the patch's default applies.
DELETE = object()


def parse_value(key, text):
    """The value of control `key` from its text (YAML, as ``--set`` reads it); :data:`DELETE` if empty.

    Raises
    ------
    PatchError
        ``command line: KEY: cannot read ...`` for text that is not one YAML value on one line.
    """
    from ..yamlio import load_yaml_text

    if not isinstance(text, str):
        if isinstance(text, bool) or not isinstance(text, (int, float)):
            raise PatchError("give the value as text", file=COMMAND_LINE, key=key)
        text = str(text)
    if len(text) > MAX_VALUE_CHARS:
        raise PatchError(f"a value of {len(text)} characters is too long (at most {MAX_VALUE_CHARS})",
                         file=COMMAND_LINE, key=key)
    if any(c in text for c in "\r\n\x00"):
        raise PatchError("give the value on one line", file=COMMAND_LINE, key=key)
    if not text.strip():
        return DELETE
    try:
        return load_yaml_text(text, file=COMMAND_LINE)
    except ModalError as error:
        message = getattr(error, "message", str(error))
        raise PatchError(f"cannot read {text!r} as a value ({message})", file=COMMAND_LINE, key=key) from None


# ---- controls ----

_MISSING = object()


def lookup(mapping, key):
    """The value at dotted `key` in nested mappings, or a sentinel if it is not there."""
    value = mapping
    for part in key.split("."):
        if not isinstance(value, dict) or part not in value:
            return _MISSING
        value = value[part]
    return value


def _number(value, unit=""):
    return f"{value:g}{' ' + unit if unit else ''}"


def _default_text(key, patch):
    """Placeholder of an empty control: the value the patch uses without the key."""
    ex, damping = patch.excitation, patch.damping
    defaults = {
        "excitation.contact_time": lambda: _number(ex.contact_time, "s"),
        "excitation.release_time": lambda: _number(ex.release_time, "s"),
        "excitation.strength": lambda: _number(ex.strength),
        "damping.t60": lambda: _number(damping.t60, "s"),
        "damping.t60_high": lambda: "same as t60",
        "damping.high_frequency": lambda: _number(damping.high_frequency, "Hz"),
        "damping.release_t60": lambda: "null (no dampers)" if damping.release_t60 is None
        else _number(damping.release_t60, "s"),
        "resonator.temperature": lambda: "20 degC",
        "pickup.position": lambda: "none: every mode weighted 1",
    }
    if key.startswith("excitation.position") and ex.position is not None:
        point = ex.position
        if point.style == "polar":
            return _number(point.values[0]) if key.endswith("radius") else _number(math.degrees(point.values[1]), "deg")
        return value_text(list(point.values)) if point.style == "xy" else _number(point.values[0])
    if key.startswith("pickup.position"):
        return "none: every mode weighted 1"
    make = defaults.get(key)
    return f"default: {make()}" if make is not None else ""


def _position_keys(section, mapping, style):
    """The control keys of `section`'s position: polar positions as radius and angle."""
    if style == "none":
        return []
    given = lookup(mapping, f"{section}.position")
    if style == "polar" and (given is _MISSING or isinstance(given, dict)):
        return [(f"{section}.position.radius", "position: radius", "a fraction of the radius, 0..1"),
                (f"{section}.position.angle", "position: angle", "an angle: '30 deg' (a bare number is degrees)")]
    hint = _POSITION_HINTS.get(style, "a position: '{radius: 0.6, angle: 30 deg}'")
    return [(f"{section}.position", "position", hint)]


def controls_of(mapping, patch):
    """The controls of a patch: its main numbers, each at its dotted key path.

    Parameters
    ----------
    mapping : dict
        The patch file as parsed (:func:`synth.yamlio.load_yaml_file`).
    patch : Patch
        The same file validated, for the defaults of keys it leaves out.

    Returns
    -------
    list of dict
        One per control: ``key`` (the dotted path, the input's name),
        ``section``, ``label``, ``value`` (the file's text, "" when the key is
        not in the file), ``placeholder`` (the default then) and ``hint``.
    """
    from ..resonators import resonator_module

    kind = patch.resonator.TYPE
    style = resonator_module(kind).position_style(patch.resonator)
    keys = []
    for name in _RESONATOR_KEYS.get(kind, ()):
        if lookup(mapping, f"resonator.{name}") is not _MISSING or name in _ALWAYS.get(kind, ()):
            label, hint = _KEY_HINTS[name]
            keys.append((f"resonator.{name}", label, hint))
    keys += _position_keys("excitation", mapping, style)
    if patch.excitation.kind == "strike":
        keys.append(("excitation.contact_time",) + _KEY_HINTS["contact_time"])
    if patch.excitation.kind == "pluck":
        keys.append(("excitation.release_time",) + _KEY_HINTS["release_time"])
    keys.append(("excitation.strength",) + _KEY_HINTS["strength"])
    keys += _position_keys("pickup", mapping, style)
    for name in ("t60", "t60_high", "high_frequency", "release_t60"):
        keys.append((f"damping.{name}",) + _KEY_HINTS[name])
    controls = []
    for key, label, hint in keys:
        given = lookup(mapping, key)
        controls.append({
            "key": key,
            "section": key.split(".")[0],
            "label": label,
            "value": "" if given is _MISSING else value_text(given),
            "placeholder": _default_text(key, patch) if given is _MISSING else "",
            "hint": hint,
        })
    return controls


def _changes(mapping, values, keys):
    """({key: (value, key)} to set, [keys] to remove): the controls whose value differs from the file's."""
    unknown = [key for key in values if key not in keys]
    if unknown:
        raise PatchError(f"not a control of this page (controls: {', '.join(keys)})", file=COMMAND_LINE,
                         key=_one_line(str(unknown[0]))[:80])
    overrides, deletions = {}, []
    for key, text in values.items():
        value = parse_value(key, text)
        given = lookup(mapping, key)
        if value is DELETE:
            if given is not _MISSING:
                deletions.append(key)
        elif given is _MISSING or given != value or isinstance(given, bool) != isinstance(value, bool):
            overrides[key] = (value, key)
    return overrides, deletions


def _without(mapping, keys):
    """(a copy of `mapping` without `keys`, the keys removed, in order).

    A mapping left empty goes too (``pickup.position`` once its radius and
    angle are gone, then ``pickup``): in the file it would read as null.
    """
    mapping = copy.deepcopy(mapping)
    removed = []
    for key in keys:
        *parents, last = key.split(".")
        section = lookup(mapping, ".".join(parents)) if parents else mapping
        if not isinstance(section, dict) or last not in section:
            continue
        section.pop(last)
        removed.append(key)
        while parents and not lookup(mapping, ".".join(parents)):
            *parents, last = parents
            (lookup(mapping, ".".join(parents)) if parents else mapping).pop(last)
            removed.append(".".join(parents + [last]))
    return mapping, removed


def patch_from_values(mapping, values, *, file, keys):
    """The patch of `mapping` with the page's control `values`, checked as ``--set`` checks them.

    Parameters
    ----------
    mapping : dict
        The patch file as parsed.
    values : dict of str -> str
        Control key -> text.  Controls equal to the file's value change
        nothing; an empty one removes its key.
    file : str
        The patch file, named in errors about its own lines.
    keys : sequence of str
        The page's control keys; any other key is refused.

    Returns
    -------
    (Patch, overrides, deletions)
        The validated patch, ``{key: (value, key)}`` set and the keys removed
        (in order: a position mapping emptied by its last key follows it).

    Raises
    ------
    PatchError
        The first problem: about a control, ``command line: KEY: ...``
        (:func:`error_payload` turns it into the page's one line).
    """
    from ..patch import patch_from_mapping

    if not isinstance(values, dict):
        raise PatchError("values must be a mapping of control key -> text", file=COMMAND_LINE, key="values")
    overrides, deletions = _changes(mapping, values, list(keys))
    mapping, deletions = _without(mapping, deletions)
    patch = patch_from_mapping(mapping, file=file, overrides=overrides)
    return patch, overrides, deletions


def error_payload(error):
    """``{"ok": False, "error": one line, "key": dotted key or None}`` of a user error.

    A control's error reads ``KEY: what is wrong`` (it came from the page, as
    a ``--set`` value comes from the command line); an error in the file
    itself reads ``FILE:LINE: KEY: ...`` as ``synth modes`` prints it.
    """
    if isinstance(error, PatchError):
        if error.file == COMMAND_LINE:
            text = f"{error.key}: {error.message}" if error.key else error.message
        else:
            text = str(error)
        return {"ok": False, "error": _one_line(text), "key": error.key}
    return {"ok": False, "error": _one_line(str(error)), "key": None}


# ---- the table as the page reads it ----


def _finite(value):
    value = float(value)
    return value if math.isfinite(value) else None


def table_payload(table, patch, *, units="workshop"):
    """The partial table as the page's JSON: rows, the voices it plays, parameter lines, warnings, figure.

    Parameters
    ----------
    table : PartialTable
    patch : Patch
    units : {"si", "workshop", "imperial"}
        Units of the parameter lines (as ``synth modes --units``).

    Returns
    -------
    dict
        ``fundamental_hz``; ``rows`` (the lowest :data:`MAX_ROWS` modes:
        ``index``, ``label``, ``frequency_hz``, ``ratio``, ``cents``, ``t60_s``,
        ``level_db``, SI and full precision); ``n_modes``; ``voices`` (the
        strongest :data:`MAX_VOICES` modes as ``[frequency_hz, amplitude,
        t60_s, phase_rad]``); ``parameters`` (``[label, text]`` lines);
        ``warnings``; ``release_t60_s``; ``figure_svg`` (the quick figure,
        :func:`stems_svg`: the full one, :func:`figure_svg`, takes about a
        second and is asked for separately).
    """
    import numpy as np

    from ..labels import parameter_lines
    from ..report import PREVIEW_NOTE

    frequency, ratio, cents = table.frequency_hz, table.ratio, table.cents_from_harmonic
    n_rows = min(len(frequency), MAX_ROWS)
    rows = [{
        "index": i + 1,
        "label": table.labels[i],
        "frequency_hz": float(frequency[i]),
        "ratio": _finite(ratio[i]),
        "cents": _finite(cents[i]),
        "t60_s": _finite(table.t60_s[i]),
        "level_db": _finite(table.level_db[i]),
    } for i in range(n_rows)]
    amplitude = np.abs(np.asarray(table.amplitude, dtype=float))
    audible = np.flatnonzero(np.isfinite(amplitude) & (amplitude > 0) & np.isfinite(table.t60_s))
    strongest = audible[np.argsort(-amplitude[audible], kind="stable")[:MAX_VOICES]]
    voices = [[float(frequency[i]), float(table.amplitude[i]), float(table.t60_s[i]), float(table.phase[i])]
              for i in sorted(strongest)]
    parameters = [list(line) for line in parameter_lines(table.parameters, units=units)]
    if "stress_pa" in table.parameters:
        parameters.append(["note", PREVIEW_NOTE])
    return {
        "ok": True,
        "name": table.name,
        "resonator": table.resonator,
        "fundamental_hz": float(table.fundamental_hz),
        "n_modes": int(len(frequency)),
        "rows": rows,
        "voices": voices,
        "parameters": parameters,
        "warnings": list(table.warnings),
        "release_t60_s": patch.damping.release_t60,
        "figure_svg": stems_svg(table),
    }


_FIGURE_FAILED = []  # the first failure of synth.plots, reported once


def figure_svg(table):
    """The partials figure: :func:`synth.plots.partials_figure` where it exists, else :func:`stems_svg`."""
    import sys

    try:
        from .. import plots
    except ImportError:
        plots = None
    make, to_svg = getattr(plots, "partials_figure", None), getattr(plots, "figure_svg", None)
    if make is None or to_svg is None:
        return stems_svg(table)
    try:
        figure = make(table)
        try:
            return to_svg(figure)
        finally:
            pyplot = sys.modules.get("matplotlib.pyplot")
            if pyplot is not None:
                pyplot.close(figure)
    except Exception as error:  # noqa: BLE001 - the page keeps its own figure if the shared one fails
        if not _FIGURE_FAILED:
            _FIGURE_FAILED.append(error)
            print(f"synth: warning: preview: the partials figure failed ({type(error).__name__}: "
                  f"{_one_line(error)[:120]}); the page draws its own stems", file=sys.stderr)
        return stems_svg(table)


#: Size of the page's own figure (SVG user units) and its level range (dB re the strongest).
_SVG_WIDTH, _SVG_HEIGHT, _SVG_MARGIN = 640, 240, 40
_FLOOR_DB = -80.0


def stems_svg(table):
    """A small SVG of the partials: one stem per mode, level (dB re the strongest) over log frequency.

    Drawn without matplotlib; modes on a node (level null) are left out.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: two
    ... resonator: {type: partials, fundamental: 200 Hz, ratios: [1, 2.5]}
    ... render: {sample_rate: 8000, duration: 0.1 s}
    ... ''')
    >>> svg = stems_svg(synth.partial_table(patch, onset=False))
    >>> svg.startswith("<svg") and svg.count("<line class='stem'") == 2
    True
    """
    import numpy as np

    frequency = np.asarray(table.frequency_hz, dtype=float)
    level = np.asarray(table.level_db, dtype=float)
    shown = np.isfinite(level) & (frequency > 0)
    w, h, m = _SVG_WIDTH, _SVG_HEIGHT, _SVG_MARGIN
    parts = [f"<svg xmlns='http://www.w3.org/2000/svg' viewBox='0 0 {w} {h}' role='img' "
             f"aria-label='partials: level over frequency' font-family='sans-serif'>",
             f"<rect x='{m}' y='{m // 2}' width='{w - 1.5 * m:g}' height='{h - 1.5 * m:g}' fill='none' stroke='#999'/>"]
    if shown.any():
        low, high = float(frequency[shown].min()), float(frequency[shown].max())
        low_octave, high_octave = math.floor(math.log2(low)), math.ceil(math.log2(max(high, low * 1.01)))
        span = max(high_octave - low_octave, 1)

        def x(f):
            return m + (w - 1.5 * m) * (math.log2(f) - low_octave) / span

        def y(db):
            return m // 2 + (h - 1.5 * m) * (max(db, _FLOOR_DB) / _FLOOR_DB)

        for octave in range(low_octave, high_octave + 1):
            hz = 2.0 ** octave
            label = f"{hz / 1000:g}k" if hz >= 1000 else f"{hz:.3g}"
            parts.append(f"<text x='{x(hz):.1f}' y='{h - m // 2 + 4}' font-size='10' text-anchor='middle'>{label}</text>")
        for db in (0, -20, -40, -60, -80):
            parts.append(f"<text x='{m - 4}' y='{y(db) + 3:.1f}' font-size='10' text-anchor='end'>{db}</text>")
        base = y(_FLOOR_DB)
        for f, db in zip(frequency[shown], level[shown]):
            parts.append(f"<line class='stem' x1='{x(f):.1f}' y1='{base:.1f}' x2='{x(f):.1f}' y2='{y(db):.1f}' "
                         f"stroke='#1f5f8b' stroke-width='1.5'/>")
    parts.append(f"<text x='{w / 2:g}' y='{h - 2}' font-size='10' text-anchor='middle'>frequency, Hz (log)</text>")
    parts.append(f"<text x='10' y='{h / 2:g}' font-size='10' transform='rotate(-90 10 {h / 2:g})' "
                 f"text-anchor='middle'>level, dB</text>")
    parts.append("</svg>")
    return "".join(parts)
