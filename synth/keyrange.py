"""The range table of an instrument: one row per key, as designed and as it sounds.

``synth range INSTRUMENT`` prints it (text, ``--json``, ``--csv``).  Each row
holds the key's target and sounding pitch (the amplitude-weighted mean of the
fundamental's sub-modes, so courses and tubes show where the heard pitch
lands), the varied and solved parameters, the T60 of the fundamental (one per
sub-mode: a course's prompt and after-sound), the first partial ratios as
heard (each partial's sub-modes weighted the same way), and the key's warnings.
"""
from __future__ import annotations

import csv
import io
import json
import math

import numpy as np

from .report import DEFAULT_UNITS, PREVIEW_NOTE, format_number, unit_symbol
from .pipeline import partial_table
from .units import cents

__all__ = ["KeyRow", "range_rows", "range_to_dict", "range_to_json", "range_to_text", "range_to_csv", "WORKING_CEILING"]

#: Stress as a fraction of tensile strength above which a key is flagged (the designer's working ceiling;
#: common practice for instrument strings is to stay well below breaking: 60 % is this project's line).
WORKING_CEILING = 0.60
#: Partial ratios shown per key.
N_RATIOS = 4
#: Parameters reported, in this order, when the object has them: (key, JSON name, text header, scale, format).
_REPORTED = (  # (parameter key, JSON name, column header, quantity, resolution in SI units or a format)
    ("material", "material", "material", None, "{}"),
    ("length_m", "length_m", "length", "length", 1e-4),
    ("diameter_m", "diameter_m", "diam", "length", 1e-6),
    ("width_m", "width_m", "width", "length", 1e-4),
    ("thickness_m", "thickness_m", "thick", "length", 1e-5),
    ("tension_n", "tension_n", "tension", "force", 0.1),
    ("stress_pa", "stress_pa", "stress", "stress", 1e6),
    ("stress_percent_of_strength", "stress_percent_of_strength", "% strength", None, "{:.1f}"),
    ("inharmonicity_b", "inharmonicity_b", "B", None, "{:.2e}"),
)


class KeyRow(dict):
    """One key of the range table (a dict with the JSON keys of the module notes)."""


def range_rows(instrument, *, keys=None):
    """The :class:`KeyRow` of every key (or of `keys`), designing each key once.

    Raises
    ------
    PatchError
        If a key cannot be designed (it names the instrument, the key and why).
    """
    rows = []
    for midi in instrument.keys if keys is None else keys:
        design = instrument.design(midi)
        table = partial_table(design.patch, cache=instrument.cache, onset=False)  # a report: no onset samples
        rows.append(_row(instrument, design, table))
    return rows


def _row(instrument, design, table):
    t60 = np.asarray(table.t60_s)
    groups = _partial_groups(table)
    heard = [_heard_hz(table, group) for group in groups[:N_RATIOS]]
    sounding = heard[0]
    ratios = [f / sounding for f in heard]
    first = groups[0]
    parameters = {}
    for key, name, _, _, _ in _REPORTED:
        if table.parameters.get(key) is not None:
            parameters[name] = table.parameters[key]
    parameters["stretch_cents"] = design.stretch_cents
    if design.tuning is not None:
        parameters["undercut_depth"] = design.tuning.depth
        parameters["undercut_half_width"] = design.tuning.half_width
    if design.tube_length_m is not None:
        parameters["tube_length_m"] = design.tube_length_m
        parameters["tube_radius_m"] = design.tube_radius_m
    for entry in instrument.vary:
        value = entry.at(design.midi)
        parameters.setdefault(f"vary.{entry.key}", value if not isinstance(value, dict) else dict(value))
    warnings = list(table.warnings)  # modes left out at Nyquist are information (parameters), not warnings
    percent = table.parameters.get("stress_percent_of_strength")
    if percent is not None and percent > 100 * WORKING_CEILING:
        warnings.append(f"stress {percent:.0f}% of tensile strength is above the {WORKING_CEILING:.0%} working "
                        "ceiling: a longer string, another material or a lower pitch")
    return KeyRow(
        note=design.note,
        midi=design.midi,
        target_hz=design.target_hz,
        fundamental_hz=sounding,
        cents_from_target=float(cents(sounding, design.target_hz)),
        parameters=parameters,
        t60_s=sorted(float(v) for v in t60[first]),  # a course's prompt sound first, then its after-sound
        ratios=ratios,
        warnings=warnings,
    )


def _partial_groups(table):
    """Row indices of each partial of the table (its coupled sub-modes, or itself), lowest first."""
    suffix = table.columns.get("coupled", ("",) * len(table.labels))
    groups = {}
    for i, (label, tag) in enumerate(zip(table.labels, suffix)):
        groups.setdefault(label[: -len(tag) - 1] if tag else label, []).append(i)
    return [np.array(rows) for rows in groups.values()]  # in order of first appearance: by frequency


def _heard_hz(table, rows):
    """Heard pitch (Hz) of one partial: its sub-modes' frequencies weighted by their amplitudes."""
    frequency = np.asarray(table.frequency_hz)[rows]
    weight = np.asarray(table.amplitude)[rows]
    return float(np.sum(frequency * weight) / np.sum(weight)) if np.sum(weight) > 0 else float(np.mean(frequency))


def _summary(instrument, rows):
    """Instrument-level warnings: how many keys warn, the worst stress."""
    lines = []
    warned = [row for row in rows if row["warnings"]]
    if warned:
        lines.append(f"{len(warned)} of {len(rows)} keys warn (e.g. {warned[0]['note']}: {warned[0]['warnings'][0]})")
    percents = [(row["parameters"].get("stress_percent_of_strength"), row["note"]) for row in rows]
    percents = [(p, n) for p, n in percents if p is not None]
    if percents:
        worst, note = max(percents)
        lines.append(f"highest stress {worst:.1f}% of tensile strength at {note} ({PREVIEW_NOTE})")
    return lines


def range_to_dict(instrument, rows):
    """``{"name", "keys": [...], "warnings"}``: the JSON form of the range table."""
    return {"name": instrument.name, "range": instrument.range_text, "a4_hz": instrument.a4_hz,
            "stretch": instrument.stretch, "keys": [dict(row) for row in rows], "warnings": _summary(instrument, rows)}


def range_to_json(instrument, rows):
    return json.dumps(range_to_dict(instrument, rows), indent=2, allow_nan=False, default=_json_default)


def _json_default(value):
    if isinstance(value, np.generic):
        return value.item()
    raise TypeError(f"not JSON: {type(value).__name__}")


def _columns(rows, units=DEFAULT_UNITS):
    """(header, getter, format) of the text and CSV columns the rows have values for, in `units`."""
    columns = [("note", lambda r: r["note"], "{}"), ("target Hz", lambda r: r["target_hz"], "{:.2f}"),
               ("sounding Hz", lambda r: r["fundamental_hz"], "{:.2f}"),
               ("cents", lambda r: r["cents_from_target"], "{:+.2f}")]
    if any(abs(r["parameters"].get("stretch_cents", 0.0)) > 1e-9 for r in rows):
        columns.append(("stretch c", lambda r: r["parameters"]["stretch_cents"], "{:+.2f}"))
    extra = (("undercut_depth", "undercut_depth", "cut %", None, "{:.1f}"),
             ("tube_length_m", "tube_length_m", "tube", "length", 1e-4))
    for _key, name, header, quantity, resolution in _REPORTED + extra:
        if any(name in r["parameters"] for r in rows):
            if quantity is None:
                scale = 100.0 if name == "undercut_depth" else None
                columns.append((header, _scaled(name, scale), resolution))
            else:
                columns.append((f"{header} {unit_symbol(quantity, units)}", _shown(name, quantity, units, resolution), "{}"))
    columns += [("T60 s", lambda r: "/".join(f"{v:.3g}" for v in r["t60_s"]), "{}"),
                ("ratios", lambda r: ":".join(f"{v:.3f}" for v in r["ratios"]), "{}"),
                ("warnings", lambda r: len(r["warnings"]) or "", "{}")]
    return columns


def _shown(name, quantity, units, resolution):
    def get(row):
        value = row["parameters"].get(name)
        if value is None or isinstance(value, str):
            return value
        return format_number(value, quantity, units=units, resolution=resolution)

    return get


def _scaled(name, scale):
    def get(row):
        value = row["parameters"].get(name)
        if value is None or scale is None or isinstance(value, str):
            return value
        return value * scale

    return get


def range_to_text(instrument, rows, *, units=DEFAULT_UNITS):
    """The range table as aligned text (sizes, forces and stresses in `units`), with the instrument's warnings."""
    columns = _columns(rows, units)
    table = []
    for row in rows:
        cells = []
        for _, get, fmt in columns:
            value = get(row)
            if isinstance(value, float) and "+" in fmt and abs(value) < 0.005:
                value = 0.0  # no "-0.00"
            cells.append("" if value is None or value == "" else fmt.format(value))
        table.append(cells)
    headers = [c[0] for c in columns]
    widths = [max([len(h)] + [len(r[i]) for r in table]) for i, h in enumerate(headers)]
    lines = [f"{instrument.name}: {len(rows)} keys {instrument.range_text}, A4 = {instrument.a4_hz:g} Hz, "
             f"stretch {instrument.stretch}, solving {instrument.solve}"]
    lines.append("  ".join(h.ljust(w) if i == 0 else h.rjust(w) for i, (h, w) in enumerate(zip(headers, widths))).rstrip())
    for cells in table:
        lines.append("  ".join(c.ljust(w) if i == 0 else c.rjust(w) for i, (c, w) in enumerate(zip(cells, widths))).rstrip())
    for row in rows:
        for warning in row["warnings"]:
            lines.append(f"warning: {row['note']}: {warning}")
    lines += [f"note: {line}" for line in _summary(instrument, rows)]
    return "\n".join(lines)


def range_to_csv(instrument, rows):
    """One CSV row per key: the text table's columns, unscaled names from the JSON form."""
    buffer = io.StringIO()
    names = ["note", "midi", "target_hz", "fundamental_hz", "cents_from_target"]
    parameter_names = []
    for row in rows:
        for key in row["parameters"]:
            if key not in parameter_names:
                parameter_names.append(key)
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(names + parameter_names + ["t60_s", "ratios", "warnings"])
    for row in rows:
        values = [row[n] for n in names] + [row["parameters"].get(k) for k in parameter_names]
        values += [" ".join(f"{v:.6g}" for v in row["t60_s"]), " ".join(f"{v:.6g}" for v in row["ratios"]),
                   " | ".join(row["warnings"])]
        writer.writerow(["" if v is None else (f"{v:.10g}" if isinstance(v, float) and math.isfinite(v) else v)
                         for v in values])
    return buffer.getvalue()
