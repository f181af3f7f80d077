"""One key moved across a range (``synth sweep``).

``sweep`` sets one numeric patch key to evenly spaced values (read and checked
exactly as ``--set`` reads a value, so an error names ``--vary KEY``), tables
how the first partials, their ratios, the first T60 and the string or membrane
figures move, renders each value and draws the figure
(:mod:`synth.plots_compare`).  Every file is staged under a temporary name and
renamed only once all of them are made, so an error leaves nothing behind.
"""
from __future__ import annotations

import json
import math
import os
import sys
from pathlib import Path

import numpy as np

from .compare import (
    _KG_M3_TO_LB_IN3,
    _aligned,
    _is_number,
    _json_value,
    _level,
    _load_patch_file,
    _quantity,
    _shown,
)
from .errors import COMMAND_LINE, RenderError, option_error
from .labels import format_number, parameter_lines

__all__ = ["run_sweep", "parse_vary", "sweep_values", "SWEEP_PARTIALS", "MIN_STEPS", "MAX_STEPS"]

SWEEP_PARTIALS = 4  # partials a sweep's table follows
MIN_STEPS, MAX_STEPS = 2, 200  # values of a sweep, both ends included
#: Reported parameters a sweep's text table shows when the table has them (the JSON carries every one).
SWEEP_PARAMETERS = ("tension_n", "tension_n_per_m", "stress_pa", "stress_percent_of_strength", "inharmonicity_b",
                    "length_m", "thickness_m", "effective_length_m")
#: Schema kinds a sweep can move (a number, with or without a unit).
NUMERIC_KINDS = ("length", "frequency", "force", "force_per_length", "pressure", "density", "areal_density", "time",
                 "temperature", "angle", "level", "number", "int", "pitch")


def parse_vary(text):
    """(key, FROM, TO, option) of ``--vary KEY=FROM..TO``; FROM and TO are read as YAML, as ``--set`` reads a value.

    Examples
    --------
    >>> parse_vary('resonator.length=600 mm..700 mm')
    ('resonator.length', '600 mm', '700 mm', '--vary resonator.length')
    >>> parse_vary("excitation.position=0.1..0.4")[1:3]
    (0.1, 0.4)
    """
    import re

    from .cli import _KEY_PATTERN
    from .errors import ModalError
    from .yamlio import load_yaml_text

    key, sep, span = text.partition("=")
    key = key.strip()
    if not sep or not re.fullmatch(_KEY_PATTERN, key):
        raise option_error(f"give KEY=FROM..TO with a dotted patch key, e.g. --vary resonator.length=\"600 mm..700 mm\", "
                           f"got {text!r}", "--vary")
    option = f"--vary {key}"
    ends = span.split("..")
    if len(ends) != 2 or not ends[0].strip() or not ends[1].strip():
        raise option_error(f"give the range as FROM..TO (two values joined by '..', units allowed: "
                           f"\"600 mm..700 mm\"), got {span!r}", option)
    values = []
    for end in ends:
        try:
            values.append(load_yaml_text(end, file=COMMAND_LINE))
        except ModalError as error:
            raise option_error(f"cannot read {end.strip()!r} as a value ({getattr(error, 'message', error)})",
                               option) from None
    return key, values[0], values[1], option


def _field_of(mapping, key, option):
    """The schema Field of dotted patch `key` in `mapping` (overrides applied), "position", or None if unknown.

    The patch loader's own tables are read, so a swept value is checked by
    the very rule that checks it in a file.
    """
    import difflib

    from .patch import _MATERIAL_FIELDS, _POLAR_FIELDS, _SECTION_KEYS, _TOP  # the loader's rules, read not copied
    from .resonators import resonator_module

    parts = key.split(".")
    if parts[0] not in _TOP:
        close = difflib.get_close_matches(parts[0], list(_TOP), n=1)
        hint = f"; did you mean {close[0]!r}?" if close else ""
        raise option_error(f"{parts[0]!r} is not a section of a patch{hint} (sections: {', '.join(_TOP)})", option)
    if len(parts) == 1:
        return _TOP[parts[0]]
    if parts[0] == "resonator":
        try:
            module = resonator_module(mapping["resonator"].get("type"))
        except (KeyError, AttributeError, TypeError, ImportError):
            return None
        if len(parts) == 2:
            return module.FIELDS.get(parts[1])
        if len(parts) == 3 and parts[1] == "material":
            return _MATERIAL_FIELDS.get(parts[2])
        return None
    if parts[1] == "position":
        if len(parts) == 2:
            return "position"
        return _POLAR_FIELDS.get(parts[2]) if len(parts) == 3 else None
    return _SECTION_KEYS.get(parts[0], {}).get(parts[1]) if len(parts) == 2 else None


def _si_text(value, field):
    """A swept SI value as the text a patch file would hold: exact, with the SI unit of the key's kind."""
    from .units import UNITS

    kind = "frequency" if field.kind == "pitch" else field.kind
    units = UNITS.get(kind)
    if isinstance(value, int) or not units:
        return value
    return f"{float(value)!r} {next(iter(units))}"


def sweep_values(low, high, steps, *, whole=False):
    """`steps` values from `low` to `high`, ends included, evenly spaced (whole numbers with `whole`).

    Examples
    --------
    >>> sweep_values(0.5, 1.0, 3)
    [0.5, 0.75, 1.0]
    >>> sweep_values(8000, 16000, 3, whole=True)
    [8000, 12000, 16000]
    """
    values = np.linspace(low, high, steps)
    values[0], values[-1] = low, high
    if whole:
        return [int(round(v)) for v in values]
    return [float(v) for v in values]


def _key_display(key, field, resonator):
    """The quantity a swept key is shown in (synth.labels) and its resolution."""
    kind_quantity = {"length": "length", "force": "force", "force_per_length": "membrane_tension",
                     "frequency": "frequency", "pitch": "frequency", "time": "time", "areal_density": "areal_density",
                     "temperature": "temperature", "angle": "angle", "density": "density", "level": "level"}
    quantity = _quantity(key, resonator) or kind_quantity.get(field.kind)
    if field.kind == "pressure" and quantity is None:
        quantity = "modulus"
    return quantity


def _axis_value(value, quantity, units):
    """A swept SI value in the units shown (the figure's x axis)."""
    if quantity in (None, "level", "density"):
        return float(value) * (_KG_M3_TO_LB_IN3 if quantity == "density" and units == "imperial" else 1.0)
    if quantity == "angle":
        return math.degrees(value)
    resolution = abs(value) * 1e-9 or 1e-12
    return float(format_number(float(value), quantity, units=units, resolution=resolution).replace(",", ""))


def _axis_unit(quantity, units):
    from .labels import unit_symbol

    if quantity is None:
        return ""
    if quantity == "level":
        return "dB"
    if quantity == "density":
        return "lb/in³" if units == "imperial" else "kg/m³"
    if quantity == "angle":
        return "°"
    return unit_symbol(quantity, units)


def _file_value(text):
    """A shown value as part of a file name: letters, digits, '.', '+' and '-' only."""
    import re

    return re.sub(r"[^A-Za-z0-9.+-]", "", text.replace("/", "-")) or "value"


def _step_row(index, value, table, file):
    """One value of a sweep as a JSON-ready dict (SI)."""
    n = min(SWEEP_PARTIALS, len(table.frequency_hz))
    ratio, cents = table.ratio, table.cents_from_harmonic
    partials = [{"index": k + 1, "label": table.labels[k], "frequency_hz": float(table.frequency_hz[k]),
                 "ratio": float(ratio[k]), "cents_from_harmonic": float(cents[k]), "t60_s": float(table.t60_s[k]),
                 "level_db": _level(table, k)} for k in range(n)]
    parameters = _json_value(dict(table.parameters))
    return {"index": index, "value": value, "fundamental_hz": float(table.fundamental_hz),
            "t60_first_s": float(table.t60_s[0]), "partials": partials, "parameters": parameters,
            "warnings": list(table.warnings), "file": None if file is None else str(file)}


def _parameter_columns(rows):
    """The :data:`SWEEP_PARAMETERS` the sweep's tables hold as numbers, in that order.

    A size (length, thickness) is shown only where it was solved for the pitch: otherwise the patch gives it.
    """
    def shown(key):
        if not any(_is_number(r["parameters"].get(key)) for r in rows):
            return False
        solved = key.rsplit("_", 1)[0] + "_solved"
        return key not in ("length_m", "thickness_m") or any(r["parameters"].get(solved) for r in rows)

    return [k for k in SWEEP_PARAMETERS if shown(k)]


def sweep_text(data, *, quantity, units, source):
    """The sweep as aligned text: one row per value (`quantity`: what the swept key measures)."""
    rows = data["rows"]
    head = (f"{data['name']} ({data['resonator']} from {source}): {data['key']} from "
            f"{_shown(data['from'], quantity, units, data['key'])} to "
            f"{_shown(data['to'], quantity, units, data['key'])}, {len(rows)} steps")
    n = max(len(r["partials"]) for r in rows)
    symbol = _axis_unit(quantity, units)
    header = ["#", data["key"].rsplit(".", 1)[-1] + (f" {symbol}" if symbol else ""), "p1 Hz"]
    for k in range(2, n + 1):
        header += [f"p{k} Hz", f"p{k} ratio", f"p{k} cents"]
    header.append("p1 T60 s")
    columns = _parameter_columns(rows)
    units_of = {}
    for key in columns:
        sample = next(r["parameters"][key] for r in rows if _is_number(r["parameters"].get(key)))
        label, text = parameter_lines({key: sample}, units=units)[0]
        unit = text.split(" ", 1)[1] if " " in text else ""
        units_of[key] = unit
        header.append(f"{label} {unit}".strip())
    cells = [header]
    for r in rows:
        value = _axis_value(r["value"], quantity, units)
        row = [str(r["index"]), f"{value:.6g}", f"{r['partials'][0]['frequency_hz']:.2f}"]
        for k in range(1, n):
            if k < len(r["partials"]):
                p = r["partials"][k]
                row += [f"{p['frequency_hz']:.2f}", f"{p['ratio']:.4f}", f"{p['cents_from_harmonic']:+.1f}"]
            else:
                row += ["", "", ""]
        row.append(f"{r['t60_first_s']:.3g}")
        for key in columns:
            value = r["parameters"].get(key)
            if not _is_number(value):
                row.append("")
                continue
            text = parameter_lines({key: value}, units=units)[0][1]
            unit = units_of[key]
            row.append(text[: -len(unit)].strip() if unit and text.endswith(unit) else text)
        cells.append(row)
    lines = [head] + _aligned(cells, right=set(range(len(header))))
    if any("stress_pa" in r["parameters"] for r in rows):
        from .report import PREVIEW_NOTE

        lines.append(f"({PREVIEW_NOTE})")
    return lines


def _sweep_csv(data):
    """The sweep as CSV, one row per value (SI, unit-suffixed headers)."""
    import csv
    import io

    rows = data["rows"]
    n = max(len(r["partials"]) for r in rows)
    columns = _parameter_columns(rows)
    unit = data["unit"]
    header = ["index", f"value_{unit}".replace("/", "_per_").replace("^", "") if unit else "value", "fundamental_hz"]
    for k in range(1, n + 1):
        header += [f"p{k}_label", f"p{k}_frequency_hz", f"p{k}_ratio", f"p{k}_cents_from_harmonic"]
    header += ["p1_t60_s", *columns, "file"]
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow([f"# key,{data['key']}"])
    writer.writerow(header)
    for r in rows:
        line = [r["index"], repr(r["value"]), repr(r["fundamental_hz"])]
        for k in range(n):
            if k < len(r["partials"]):
                p = r["partials"][k]
                line += [p["label"], repr(p["frequency_hz"]), repr(p["ratio"]), repr(p["cents_from_harmonic"])]
            else:
                line += ["", "", "", ""]
        line += [repr(r["t60_first_s"])] + [repr(r["parameters"].get(k)) if _is_number(r["parameters"].get(k)) else ""
                                            for k in columns]
        line.append(r["file"] or "")
        writer.writerow(line)
    return buffer.getvalue()


class _Staging:
    """Files made under temporary names and renamed together at the end; on any failure none is left.

    Folders made for them are removed again if the run fails and they are empty.
    """

    def __init__(self, folder):
        self.folder = Path(folder)
        self.made_folders = []
        self.staged = []  # (temporary, final)

    def __enter__(self):
        missing = []
        folder = self.folder
        while not folder.exists() and folder != folder.parent:
            missing.append(folder)
            folder = folder.parent
        try:
            for path in reversed(missing):
                path.mkdir()
                self.made_folders.append(path)
        except OSError as error:
            self._undo()
            raise option_error(f"cannot create the folder {str(path)!r}: {error.strerror or error}", "--output") from None
        return self

    def stage(self, final):
        """A temporary name beside `final` (same suffix), removed unless the run succeeds."""
        final = Path(final)
        temporary = final.with_name(f".{final.stem}.staged{final.suffix}")
        self.staged.append((temporary, final))
        return temporary

    def _undo(self):
        for temporary, _ in self.staged:
            try:
                temporary.unlink()
            except OSError:
                pass
        for folder in reversed(self.made_folders):
            try:
                folder.rmdir()
            except OSError:
                pass

    def __exit__(self, kind, value, traceback):
        if kind is not None:
            self._undo()
            return False
        try:
            for temporary, final in self.staged:
                os.replace(temporary, final)
        except OSError as error:
            self._undo()
            raise option_error(f"cannot write {str(final)!r}: {error.strerror or error}", "--output") from None
        return False


def _sweep_patches(args):
    """The patch file's mapping, the swept key's Field and option, and one validated Patch per value."""
    from .cli import _overrides
    from .patch import apply_overrides, patch_from_mapping

    if not MIN_STEPS <= args.steps <= MAX_STEPS:
        raise option_error(f"must be a whole number {MIN_STEPS}..{MAX_STEPS}, got {args.steps}", "--steps")
    key, low_text, high_text, option = parse_vary(args.vary)
    overrides = _overrides(args)
    if key in overrides:
        raise option_error(f"{key} is also set by {overrides[key][1]}: give it once", option)
    file = str(args.patch)
    mapping = _load_patch_file(args.patch, "sweep")
    first = {**overrides, key: (low_text, option)}
    field = _field_of(apply_overrides(mapping, first, file), key, option)
    if field is not None and field != "position" and field.kind not in NUMERIC_KINDS:
        takes = {"choice": f"one of {', '.join(map(str, field.choices))}", "any": "a list or a mapping",
                 "bool": "true or false", "slug": "a name"}.get(field.kind, f"a {field.kind} value")
        raise option_error(f"takes {takes}, not a number: a sweep moves a number "
                           "(a length, a tension, a time, a fraction ...)", option)
    patch = patch_from_mapping(mapping, file=file, overrides=first)  # the key and FROM, checked as in the file
    if field == "position":
        point = getattr(patch, key.split(".")[0]).position
        if point is None or point.style != "fraction":
            raise option_error(f"{key} is a point of a {patch.resonator.TYPE} here, not a number: sweep one of its "
                               "coordinates (e.g. {0}.radius)".format(key), option)
        from .patch import _POSITION_1D

        field = _POSITION_1D
    if field is None:
        raise option_error(f"{key} is not a number a sweep can move", option)
    from .schema import convert_option

    low = convert_option(field, low_text, option)
    high = convert_option(field, high_text, option)
    if not (_is_number(low) and _is_number(high)):
        raise option_error(f"FROM and TO must be numbers, got {low_text!r}..{high_text!r}", option)
    if low == high:
        raise option_error(f"FROM and TO are the same value ({_shown(low, _key_display(key, field, patch.resonator.TYPE), 'si', key)}): "
                           "give two different ends", option)
    whole = field.whole or field.kind == "int"
    values = sweep_values(low, high, args.steps, whole=whole)
    if len(set(values)) < len(values):
        raise option_error(f"{args.steps} steps from {low} to {high} repeat whole numbers: give at most "
                           f"{abs(int(high) - int(low)) + 1} steps", "--steps")
    patches = [patch_from_mapping(mapping, file=file, overrides={**overrides, key: (_si_text(v, field), option)})
               for v in values]
    return key, field, values, patches


def run_sweep(args):
    """``synth sweep PATCH --vary KEY=FROM..TO``: tables, renders and a figure of one key moved across a range."""
    from .audio import check_output_file, sampler_fields, write_audio
    from .cli import DEFAULT_OUTPUT_DIR, LISTENING_CAUTION
    from .pipeline import partial_table
    from .plots_compare import sweep_figure
    from .units import UNITS, hz_to_midi

    key, field, values, patches = _sweep_patches(args)
    tables = [partial_table(p, onset=False) for p in patches]  # every value can sound: checked before any file
    first = patches[0]
    resonator = first.resonator.TYPE
    quantity = _key_display(key, field, resonator)
    folder = Path(args.output) if args.output else DEFAULT_OUTPUT_DIR / f"{first.name}-sweep"
    if folder.exists() and not folder.is_dir():
        raise option_error(f"{str(folder)!r} is a file, not a folder: name a folder for the sweep", "--output")
    width = len(str(len(values)))
    names = [folder / f"{first.name}-{i + 1:0{width}d}-{_file_value(_shown(v, quantity, args.units, key))}.wav"
             for i, v in enumerate(values)] if args.audio else [None] * len(values)
    figure = folder / f"{first.name}-sweep.png"
    csv_file = folder / f"{first.name}-sweep.csv"
    for path, suffix in [(p, ".wav") for p in names if p is not None] + [(figure, ".png"), (csv_file, ".csv")]:
        check_output_file(path, suffixes=(suffix,), inputs=(args.patch,), key="--output", make_folder=True)
    kind = "frequency" if field.kind == "pitch" else field.kind
    unit = next(iter(UNITS[kind])) if UNITS.get(kind) else None
    data = {"name": first.name, "file": str(args.patch), "resonator": resonator, "key": key, "unit": unit,
            "from": values[0], "to": values[-1], "n_steps": len(values), "n_partials": SWEEP_PARTIALS,
            "rows": [_step_row(i + 1, v, t, f) for i, (v, t, f) in enumerate(zip(values, tables, names))],
            "figure": str(figure), "table": str(csv_file)}
    with _Staging(folder) as staging:
        if args.audio:
            from .api import render

            for patch, path, value in zip(patches, names, values):
                try:
                    heard = render(patch)
                except RenderError as error:  # e.g. clipping at absolute scale: name the value
                    raise RenderError(f"at {key} = {_shown(value, quantity, args.units, key)}: {error}") from None
                sampler = sampler_fields(float(hz_to_midi(heard.table.fundamental_hz)))
                write_audio(staging.stage(path), heard.signal, sample_rate=heard.sample_rate, bit_depth=heard.bit_depth,
                            key="--output", sampler=sampler)
        axis = {"label": f"{key}" + (f" ({_axis_unit(quantity, args.units)})" if _axis_unit(quantity, args.units)
                                     else ""),
                "values": [_axis_value(v, quantity, args.units) for v in values]}
        sweep_figure(staging.stage(figure), data, axis=axis)
        staging.stage(csv_file).write_text(_sweep_csv(data), encoding="utf-8")
    if args.json:
        print(json.dumps(data, indent=2, allow_nan=False))
    else:
        print("\n".join(sweep_text(data, quantity=quantity, units=args.units, source=args.patch)))
        for path in names:
            if path is not None:
                print(f"wrote {path}")
        print(f"wrote {figure}")
        print(f"wrote {csv_file}")
    for row in data["rows"]:
        for warning in row["warnings"]:
            shown = _shown(row["value"], quantity, args.units, key)
            print(f"synth: warning: {args.patch}: at {key} = {shown}: {warning}", file=sys.stderr)
    if args.audio:
        print(LISTENING_CAUTION, file=sys.stderr)
    return 0
