"""The partial table as a practitioner reads it: text, JSON and CSV forms.

The JSON form is the contract of DESIGN.md: SI values under unit-suffixed
keys (``tension_n``, ``stress_pa``), full precision.  The text form is for
people: every parameter has a label a maker would write, a unit from the
chosen system (:data:`UNIT_SYSTEMS`) and a precision that fits how the value
is read (tension to 0.1 N, stress to 1 MPa, lengths to 0.1 mm): those live in
:mod:`synth.labels`.  The CSV
form is one row per mode after a block of ``# key,value`` lines holding the
parameters (see :func:`table_to_csv`).
"""
from __future__ import annotations

import csv
import io
import json
import math

import numpy as np

from .labels import DEFAULT_UNITS, UNIT_SYSTEMS, format_number, format_quantity, parameter_lines, unit_symbol
from .modes import LazyColumn

__all__ = [
    "UNIT_SYSTEMS",
    "DEFAULT_UNITS",
    "PREVIEW_NOTE",
    "table_to_dict",
    "table_to_json",
    "table_to_text",
    "table_to_csv",
    "parameter_lines",
    "format_quantity",
    "format_number",
    "unit_symbol",
]

#: Shown under any stress figure: design figures are previews.
PREVIEW_NOTE = "stress figures are previews: defer to the maker's data, local codes and qualified practice"


def _clean(value):
    """A JSON-safe form of `value` (NaN/inf -> None, numpy -> python)."""
    if isinstance(value, (list, tuple, np.ndarray)):
        return [_clean(v) for v in value]
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.bool_,)):
        return bool(value)
    if isinstance(value, (float, np.floating)):
        value = float(value)
        return value if math.isfinite(value) else None
    return value


def table_to_dict(table):
    """The partial table as the JSON object of DESIGN.md (SI values, unit-suffixed keys).

    Parameters
    ----------
    table : PartialTable

    Returns
    -------
    dict
        ``name``, ``resonator``, ``fundamental_hz``, ``parameters``, ``modes``
        (one dict per mode, sorted by frequency) and ``warnings``; NaN and
        infinity become None.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: report-demo
    ... resonator: {type: partials, fundamental: 200 Hz, ratios: [1, 2.5]}
    ... render: {sample_rate: 8000, duration: 0.1 s}
    ... ''')
    >>> data = table_to_dict(synth.partial_table(patch, onset=False))
    >>> [round(mode["frequency_hz"], 1) for mode in data["modes"]]
    [200.0, 500.0]
    """
    modes = []
    ratio, cents = table.ratio, table.cents_from_harmonic
    columns = {
        k: (list(v) if isinstance(v, LazyColumn) else v)
        for k, v in table.columns.items()
        if not getattr(v, "report_only", False)
    }
    for i in range(len(table.frequency_hz)):
        mode = {
            "index": i + 1,
            "label": table.labels[i],
            "frequency_hz": float(table.frequency_hz[i]),
            "ratio": float(ratio[i]),
            "cents_from_harmonic": float(cents[i]),
            "t60_s": float(table.t60_s[i]),
            "level_db": float(table.level_db[i]),
            "amplitude": float(table.amplitude[i]),
            "phase_rad": float(table.phase[i]),
        }
        for key, values in columns.items():
            mode[key] = values[i]
        modes.append(mode)
    return _clean(
        {
            "name": table.name,
            "resonator": table.resonator,
            "fundamental_hz": table.fundamental_hz,
            "parameters": table.parameters,
            "modes": modes,
            "warnings": list(table.warnings),
        }
    )


def table_to_json(table):
    """The partial table as a JSON string (:func:`table_to_dict`, indented).

    Parameters
    ----------
    table : PartialTable

    Returns
    -------
    str

    Examples
    --------
    >>> import json, synth
    >>> patch = synth.patch_from_text('''
    ... name: report-demo
    ... resonator: {type: partials, fundamental: 200 Hz, ratios: [1, 2.5]}
    ... render: {sample_rate: 8000, duration: 0.1 s}
    ... ''')
    >>> json.loads(table_to_json(synth.partial_table(patch, onset=False)))["resonator"]
    'partials'
    """
    return json.dumps(table_to_dict(table), indent=2)


def _csv_value(value, digits):
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return f"{value:.{digits}g}"
    if isinstance(value, list):
        return " ".join(_csv_value(v, 6) for v in value)
    return str(value)


def table_to_csv(table):
    """The partial table as CSV: a parameter block, then one row per mode.

    The file opens with comment lines a spreadsheet shows in its first
    column: ``# name,<name>``, ``# resonator,<type>``, ``# fundamental_hz,<f>``,
    one ``# <parameter key>,<SI value>`` line per parameter (the JSON's
    unit-suffixed keys; lists joined by spaces) and one ``# warning,<text>``
    line per warning.  Then the header row and one row per mode (the
    JSON's mode keys).  Readers that take comments (``pandas.read_csv(...,
    comment="#")``, ``numpy.genfromtxt``) skip the block.

    Parameters
    ----------
    table : PartialTable

    Returns
    -------
    str
        Empty of mode rows (the block alone) when the table has no modes.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: report-demo
    ... resonator: {type: partials, fundamental: 200 Hz, ratios: [1, 2.5]}
    ... render: {sample_rate: 8000, duration: 0.1 s}
    ... ''')
    >>> text = table_to_csv(synth.partial_table(patch, onset=False))
    >>> text.splitlines()[0]
    '# name,report-demo'
    >>> [line.split(",")[1] for line in text.splitlines() if not line.startswith("#")]
    ['label', 'p1', 'p2']
    """
    data = table_to_dict(table)
    buffer = io.StringIO()
    meta = csv.writer(buffer, lineterminator="\n")
    head = [("name", data["name"]), ("resonator", data["resonator"]), ("fundamental_hz", data["fundamental_hz"])]
    head += list(data["parameters"].items())
    head += [("warning", warning) for warning in data["warnings"]]
    for key, value in head:
        meta.writerow([f"# {key}", _csv_value(value, 10)])
    if data["modes"]:
        writer = csv.DictWriter(buffer, fieldnames=list(data["modes"][0]), lineterminator="\n")
        writer.writeheader()
        for mode in data["modes"]:
            writer.writerow({k: _csv_value(v, 10) for k, v in mode.items()})
    return buffer.getvalue()


# Report columns of the text table: (header, json key, format).
_TEXT_COLUMNS = (
    ("#", "index", "{:d}"),
    ("mode", "label", "{}"),
    ("freq Hz", "frequency_hz", "{:.2f}"),
    ("ratio", "ratio", "{:.4f}"),
    ("cents", "cents_from_harmonic", "{:+.1f}"),
    ("T60 s", "t60_s", "{:.3g}"),
    ("level dB", "level_db", "{:.1f}"),
)

#: Extra columns a resonator may add: text header and format (None: a list of
#: positions; "length": a length in the report's units).
EXTRA_TEXT_COLUMNS = {
    "harmonic": ("harmonic", "{:d}"),
    "overtone": ("overtone", "{:d}"),
    "wavelength_m": ("wavelength", "length"),
    "n_nodes": ("nodes", "{:d}"),
    "n_antinodes": ("antinodes", "{:d}"),
    "node_positions": ("node positions (fraction of length)", None),
    "orientation": ("orientation", "{}"),
    "nodal_diameters": ("diameters", "{}"),
    "nodal_circles": ("circles", "{}"),
    "nodal_lines_x": ("lines x", "{}"),
    "nodal_lines_y": ("lines y", "{}"),
    "nodal_lines": ("nodal lines", "{}"),
    "timoshenko_shift_cents": ("shear cents", "{:+.1f}"),
    "cents_from_bending": ("from bending cents", "{:+.1f}"),
    "air_cents": ("air cents", "{:+.1f}"),
    "radiation_t60_s": ("radiation T60 s", "{:.3g}"),
    "nearest_bending": ("nearest bending", "{}"),
    "frequency_sd_hz": ("± Hz", "{:.2g}"),
    "t60_sd_s": ("± T60 s", "{:.2g}"),
    "fit_cents": ("fit cents", "{:+.2f}"),
}


def _positions_text(values, limit=5):
    text = " ".join(f"{v:.3g}" for v in values[:limit])
    if len(values) > limit:
        text += f" ... ({len(values)})"
    return text


def _columns(table, units):
    columns = list(_TEXT_COLUMNS)
    for key in table.columns:
        if key in EXTRA_TEXT_COLUMNS:
            header, fmt = EXTRA_TEXT_COLUMNS[key]
            if fmt == "length":
                header = f"{header} {unit_symbol('length', units)}"
            columns.append((header, key, fmt))
    return columns


def _cell(value, key, fmt, units):
    if value is None:
        return "null" if key == "level_db" else ""
    if fmt is None:
        return _positions_text(value)
    if fmt == "length":
        return format_number(float(value), "length", units=units, resolution=1e-4)
    return fmt.format(value)


def table_to_text(table, *, max_rows=None, units=DEFAULT_UNITS, source=None, warnings=True, command="synth modes"):
    """The partial table as an aligned text table, with its parameters and warnings.

    Parameters
    ----------
    table : PartialTable
    max_rows : int or None
        Show only the first `max_rows` modes (and say how many were left out).
    units : {"si", "workshop", "imperial"}
        Units of the parameters and length columns (:data:`UNIT_SYSTEMS`).
    source : str or None
        The patch file, named in the header and in the hint after a cut table.
    warnings : bool
        Print the table's warnings under it (``synth render`` prints them once
        on stderr instead, naming the patch).
    command : str
        The command the hint after a cut table names (``synth fit`` for a recording).

    Returns
    -------
    str
        Lines joined by newlines, without a final newline.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: report-demo
    ... resonator: {type: partials, fundamental: 200 Hz, ratios: [1, 2.5]}
    ... render: {sample_rate: 8000, duration: 0.1 s}
    ... ''')
    >>> print(table_to_text(synth.partial_table(patch, onset=False)).splitlines()[0])
    report-demo (partials), fundamental 200.000 Hz, 2 modes
    """
    data = table_to_dict(table)
    columns = _columns(table, units)
    modes = data["modes"] if max_rows is None else data["modes"][:max_rows]
    rows = []
    for i, mode in enumerate(modes):
        rows.append([
            _cell(_clean(table.columns[key][i]) if key in table.columns else mode.get(key), key, fmt, units)
            for _header, key, fmt in columns
        ])
    headers = [c[0] for c in columns]
    widths = [max([len(h)] + [len(r[i]) for r in rows]) for i, h in enumerate(headers)]
    count = len(table.frequency_hz)
    where = f" from {source}" if source else ""
    lines = [f"{table.name} ({table.resonator}{where}), fundamental {table.fundamental_hz:.3f} Hz, "
             f"{count} mode{'s' * (count != 1)}"]
    lines += [f"  {label}: {text}" for label, text in parameter_lines(data["parameters"], units=units)]
    if "stress_pa" in data["parameters"]:
        lines.append(f"  ({PREVIEW_NOTE})")

    def aligned(cells):
        # number columns right, the label and the resonator's own columns left
        return "  ".join(c.rjust(w) if i != 1 and i < len(_TEXT_COLUMNS) else c.ljust(w)
                         for i, (c, w) in enumerate(zip(cells, widths))).rstrip()

    lines.append(aligned(headers))
    lines += [aligned(row) for row in rows]
    if max_rows is not None and len(data["modes"]) > max_rows:
        command = f"{command} {source}" if source else command
        lines.append(f"... {len(data['modes']) - max_rows} more modes ({command} lists them all)")
    if warnings:
        lines += [f"warning: {w}" for w in data["warnings"]]
    return "\n".join(lines)
