"""ModeSet and PartialTable: what a resonator computes and what gets rendered.

A resonator module solves an object once into a :class:`Solution` (frequencies,
labels, report columns and a mode-shape function: everything that does not
depend on where the object is excited or heard), which
:meth:`Solution.place` turns into a :class:`ModeSet` (the mode-shape values
at the excitation and pickup points).  The pipeline weights a ModeSet into a
:class:`PartialTable` (amplitude, phase and T60 of every mode), which the
engine renders and the report prints as text, JSON or CSV.
"""
from __future__ import annotations

import csv
import io
import json
import math
from dataclasses import dataclass, field

import numpy as np

__all__ = [
    "Solution",
    "ModeSet",
    "PartialTable",
    "EvenNodes",
    "LazyColumn",
    "take_column",
    "frozen_array",
    "table_to_dict",
    "table_to_text",
    "table_to_csv",
]

#: Shown under any stress figure: design figures are previews.
PREVIEW_NOTE = "stress figures are previews: defer to the maker's data, local codes and qualified practice"

#: |shape| below this fraction of the largest |shape| counts as a node.
NODE_TOLERANCE = 1e-9


def frozen_array(values, dtype=float):
    """A read-only copy of `values` as a 1-D numpy array."""
    array = np.array(values, dtype=dtype).reshape(-1)
    array.flags.writeable = False
    return array


class _EvenlySpaced:
    """The nodes ``j / n``, j = 0..n, of one mode, as a sequence built on demand."""

    __slots__ = ("n",)

    def __init__(self, n):
        self.n = int(n)

    def __len__(self):
        return self.n + 1

    def __getitem__(self, index):
        if isinstance(index, slice):
            return tuple(j / self.n for j in range(len(self))[index])
        return range(len(self))[index] / self.n

    def __iter__(self):
        return (j / self.n for j in range(len(self)))


class EvenNodes:
    """A report column of evenly spaced nodes (fractions ``j / n``, ends included).

    Mode ``i`` with whole-number order ``n_i`` (a string's harmonic number) has
    nodes at ``j / n_i``, ``j = 0 .. n_i``.  The lists are never built for the
    whole column: a table of M modes would hold M**2 / 2 numbers.  An item is
    a lazy sequence, so the text report shows its first few values in
    constant time; the JSON and CSV forms leave the column out
    (:attr:`report_only`) and give the spacing instead (a ``node_spacing``
    column of the resonator).
    """

    report_only = True

    def __init__(self, orders):
        self.orders = np.asarray(orders, dtype=np.int64)

    def __len__(self):
        return len(self.orders)

    def __getitem__(self, i):
        return _EvenlySpaced(self.orders[i])

    def __iter__(self):
        return (_EvenlySpaced(n) for n in self.orders)

    def take(self, index):
        """The column of the modes at `index` (an index array)."""
        return EvenNodes(self.orders[index])


class LazyColumn:
    """A report column computed on first use: the same values every time, in one batch.

    Parameters
    ----------
    compute : callable
        ``compute() -> sequence`` of the whole column (called at most once;
        the result is shared by every :meth:`take` of this column).
    size : int
        Length of the whole column.

    Columns that only the report needs (a plate's nodal-circle radii) cost
    nothing in a render, a MIDI file or a batch job.
    """

    def __init__(self, compute, size, index=None, _store=None):
        self._compute = compute
        self._store = {} if _store is None else _store
        self._index = np.arange(size) if index is None else np.asarray(index, dtype=np.int64)

    def _values(self):
        if "values" not in self._store:
            self._store["values"] = tuple(self._compute())
        return self._store["values"]

    def __len__(self):
        return len(self._index)

    def __getitem__(self, i):
        return self._values()[int(self._index[i])]

    def __iter__(self):
        values = self._values()
        return (values[int(k)] for k in self._index)

    def take(self, index):
        """The column of the entries at `index` (still lazy, sharing the computation)."""
        return LazyColumn(self._compute, 0, self._index[np.asarray(index, dtype=np.int64)], self._store)


def take_column(values, index):
    """Column `values` (a tuple or a lazy column) at the positions in `index` (lazy columns stay lazy)."""
    take = getattr(values, "take", None)
    if take is not None and not isinstance(values, (np.ndarray, tuple)):
        return take(index)
    n = len(index)
    if n == 0 or (index[0] == 0 and index[-1] == n - 1 and bool(np.all(np.diff(index) == 1))):  # 0..n-1: a slice
        return tuple(values[:n])
    return tuple(values[i] for i in index)


@dataclass(frozen=True, eq=False)
class Solution:
    """The solved modes of one object, before it is excited or heard anywhere.

    Everything here depends only on the object (the resonator spec and the
    number of modes asked for), so it is computed once per object and shared
    by every render of it (:mod:`synth.solvecache`); :meth:`place` evaluates
    the mode shapes at an excitation and a pickup point.

    Attributes
    ----------
    resonator : str
    frequency_hz : ndarray [shape=(M,)], Hz
        Ascending.
    labels : tuple of str [len M]
    shape : callable
        ``shape(position) -> ndarray [shape=(M,)]``: every mode's shape value
        at a position in the resonator's coordinates (a fraction, ``(x, y)``
        or ``(radius fraction, angle rad)``), scaled to a common modal mass.
    columns, parameters, warnings
        As in :class:`ModeSet`.
    """

    resonator: str
    frequency_hz: np.ndarray
    labels: tuple
    shape: object
    columns: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    warnings: tuple = ()

    def place(self, excitation_position, pickup_position):
        """The :class:`ModeSet` heard at `pickup_position` (None: every mode 1) when excited at `excitation_position`."""
        n = len(self.frequency_hz)
        excitation = self.shape(excitation_position)
        pickup = np.ones(n) if pickup_position is None else self.shape(pickup_position)
        return ModeSet(
            resonator=self.resonator,
            frequency_hz=self.frequency_hz,
            labels=self.labels,
            excitation_shape=frozen_array(excitation),
            pickup_shape=frozen_array(pickup),
            columns=self.columns,
            parameters=self.parameters,
            warnings=self.warnings,
        )


@dataclass(frozen=True)
class ModeSet:
    """The modes of one resonator, sorted by frequency.

    Attributes
    ----------
    resonator : str
        Resonator type, e.g. ``"string"``.
    frequency_hz : ndarray [shape=(M,)], Hz
        Mode frequencies, ascending.
    labels : tuple of str [len M]
        Mode labels, e.g. ``"n=3"`` or ``"(1,2)"``.
    excitation_shape, pickup_shape : ndarray [shape=(M,)]
        Mode-shape values at the excitation and pickup points.  Shapes are
        scaled to a common modal mass, so values of different modes compare.
    columns : dict of str -> tuple
        Extra per-mode report columns (name -> M values), e.g. wavelength.
    parameters : dict
        Resolved physical values (solved tension, stress, ...), SI units.
    warnings : tuple of str
        Anything the user should know (stress near breaking, dropped modes).
    """

    resonator: str
    frequency_hz: np.ndarray
    labels: tuple
    excitation_shape: np.ndarray
    pickup_shape: np.ndarray
    columns: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    warnings: tuple = ()

    def __post_init__(self):
        n = len(self.frequency_hz)
        for name in ("excitation_shape", "pickup_shape"):
            if len(getattr(self, name)) != n:
                raise ValueError(f"{name} has {len(getattr(self, name))} values, expected {n}")
        if len(self.labels) != n:
            raise ValueError(f"labels has {len(self.labels)} values, expected {n}")
        for name, values in self.columns.items():
            if len(values) != n:
                raise ValueError(f"column {name!r} has {len(values)} values, expected {n}")
        if n and np.any(np.diff(self.frequency_hz) < 0):
            raise ValueError("frequency_hz must be sorted ascending")

    def select(self, keep):
        """A ModeSet of the modes where boolean mask (or index array) `keep` holds."""
        index = np.arange(len(self.frequency_hz))[keep]
        return ModeSet(
            resonator=self.resonator,
            frequency_hz=frozen_array(self.frequency_hz[index]),
            labels=tuple(self.labels[i] for i in index),
            excitation_shape=frozen_array(self.excitation_shape[index]),
            pickup_shape=frozen_array(self.pickup_shape[index]),
            columns={k: take_column(v, index) for k, v in self.columns.items()},
            parameters=dict(self.parameters),
            warnings=self.warnings,
        )

    def detuned(self, cents):
        """This ModeSet with every frequency moved by `cents` (shapes and columns unchanged).

        A small retuning of the whole object (a round robin's detune): every
        partial moves by the same interval, so the ratios stay as solved.
        """
        if cents == 0.0:
            return self
        ratio = 2.0 ** (cents / 1200.0)
        return ModeSet(
            resonator=self.resonator,
            frequency_hz=frozen_array(self.frequency_hz * ratio),
            labels=self.labels,
            excitation_shape=self.excitation_shape,
            pickup_shape=self.pickup_shape,
            columns=self.columns,
            parameters={**self.parameters, "detune_cents": float(cents)},
            warnings=self.warnings,
        )


@dataclass(frozen=True)
class PartialTable:
    """The partials that get rendered, with everything the report shows.

    Attributes
    ----------
    name, resonator : str
    fundamental_hz : float, Hz
        Frequency of the lowest mode of the object.
    frequency_hz, amplitude, phase, t60_s : ndarray [shape=(M,)]
        What the engine renders: ``a sin(2 pi f t + phase) e^(-ln(1000) t / T60)``.
    level_db : ndarray [shape=(M,)], dB
        Level relative to the strongest mode; NaN where the excitation or the
        pickup sits on a node of the mode (null in JSON).
    labels : tuple of str
    columns : dict of str -> tuple
        Extra per-mode columns from the resonator.
    parameters : dict
    warnings : tuple of str
    onset : ndarray [shape=(n,)], float64, or None
        The signal's first n samples while the excitation's force acts (at
        the render's sample rate); the modes above describe it from sample n on.
        None in a report's table, made without it (``partial_table(..., onset=False)``).
    sample_rate : float or None, Hz
        The rate the table was made for (Nyquist cut, onset).
    """

    name: str
    resonator: str
    fundamental_hz: float
    frequency_hz: np.ndarray
    amplitude: np.ndarray
    phase: np.ndarray
    t60_s: np.ndarray
    level_db: np.ndarray
    labels: tuple
    columns: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    warnings: tuple = ()
    onset: np.ndarray = field(default_factory=lambda: frozen_array(()))
    sample_rate: float | None = None

    @property
    def ratio(self):
        """Frequency of each mode over the fundamental."""
        return self.frequency_hz / self.fundamental_hz

    @property
    def cents_from_harmonic(self):
        """Cents from the nearest whole-number multiple of the fundamental."""
        ratio = self.ratio
        harmonic = np.maximum(1.0, np.round(ratio))
        return 1200.0 * np.log2(ratio / harmonic)


def _clean(value):
    """A JSON-safe form of `value` (NaN/inf -> None, numpy -> python)."""
    if isinstance(value, (list, tuple, np.ndarray)):
        return [_clean(v) for v in value]
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        value = float(value)
        return value if math.isfinite(value) else None
    return value


def table_to_dict(table):
    """The partial table as the JSON object described in DESIGN.md."""
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
    """The partial table as a JSON string."""
    return json.dumps(table_to_dict(table), indent=2)


def table_to_csv(table):
    """The partial table as CSV text, one row per mode (lists joined by spaces)."""
    data = table_to_dict(table)
    buffer = io.StringIO()
    if not data["modes"]:
        return ""
    writer = csv.DictWriter(buffer, fieldnames=list(data["modes"][0]), lineterminator="\n")
    writer.writeheader()
    for mode in data["modes"]:
        row = {k: (" ".join(_fmt(x, 6) for x in v) if isinstance(v, list) else _fmt(v, 10)) for k, v in mode.items()}
        writer.writerow(row)
    return buffer.getvalue()


def _fmt(value, digits):
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:.{digits}g}"
    return str(value)


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

#: Extra columns a resonator may add, with their text header and format.
EXTRA_TEXT_COLUMNS = {
    "harmonic": ("harm", "{:d}"),
    "overtone": ("ovt", "{:d}"),
    "wavelength_m": ("wavelen m", "{:.4g}"),
    "n_nodes": ("nodes", "{:d}"),
    "n_antinodes": ("antinodes", "{:d}"),
    "node_positions": ("node positions (fraction of length)", None),
    "orientation": ("orient", "{}"),
    "nodal_diameters": ("diam", "{}"),
    "nodal_circles": ("circles", "{}"),
    "nodal_lines_x": ("lines x", "{}"),
    "nodal_lines_y": ("lines y", "{}"),
    "nodal_lines": ("nodal lines", "{}"),
    "timoshenko_shift_cents": ("shear cents", "{:+.1f}"),
}


def _positions_text(values, limit=5):
    text = " ".join(f"{v:.3g}" for v in values[:limit])
    if len(values) > limit:
        text += f" ... ({len(values)})"
    return text


def table_to_text(table, *, max_rows=None):
    """The partial table as an aligned text table, with parameters and warnings.

    Parameters
    ----------
    table : PartialTable
    max_rows : int or None
        Show only the first `max_rows` modes (and say how many were left out).
    """
    data = table_to_dict(table)
    columns = list(_TEXT_COLUMNS)
    for key in table.columns:
        if key in EXTRA_TEXT_COLUMNS:
            header, fmt = EXTRA_TEXT_COLUMNS[key]
            columns.append((header, key, fmt))
    rows = []
    modes = data["modes"] if max_rows is None else data["modes"][:max_rows]
    for i, mode in enumerate(modes):
        row = []
        for _header, key, fmt in columns:
            value = _clean(table.columns[key][i]) if key in table.columns else mode.get(key)
            if value is None:
                row.append("null" if key == "level_db" else "")
            elif fmt is None:
                row.append(_positions_text(value))
            else:
                row.append(fmt.format(value))
        rows.append(row)
    headers = [c[0] for c in columns]
    widths = [max([len(h)] + [len(r[i]) for r in rows]) for i, h in enumerate(headers)]
    lines = [f"{table.name} ({table.resonator}), fundamental {table.fundamental_hz:.3f} Hz, {len(table.frequency_hz)} modes"]
    lines += [_parameter_line(k, v) for k, v in data["parameters"].items()]
    if "stress_pa" in data["parameters"]:
        lines.append(f"  ({PREVIEW_NOTE})")
    lines.append("  ".join(h.rjust(w) if i != 1 and i < 7 else h.ljust(w) for i, (h, w) in enumerate(zip(headers, widths))).rstrip())
    for row in rows:
        lines.append("  ".join(c.rjust(w) if i != 1 and i < 7 else c.ljust(w) for i, (c, w) in enumerate(zip(row, widths))).rstrip())
    if max_rows is not None and len(data["modes"]) > max_rows:
        lines.append(f"... {len(data['modes']) - max_rows} more modes (synth modes PATCH lists them all)")
    lines += [f"warning: {w}" for w in data["warnings"]]
    return "\n".join(lines)


#: Parameter-name suffix -> (unit shown, scale applied) for the text report.
_PARAMETER_UNITS = (
    ("_percent_of_strength", "%", 1.0),
    ("_n_per_m", "N/m", 1.0),
    ("_kg_m2", "kg/m^2", 1.0),
    ("_kg_m", "kg/m", 1.0),
    ("_n_m", "N m", 1.0),
    ("_kg", "kg", 1.0),
    ("_m_s", "m/s", 1.0),
    ("_pa", "MPa", 1e-6),
    ("_hz", "Hz", 1.0),
    ("_n", "N", 1.0),
    ("_m", "m", 1.0),
    ("_s", "s", 1.0),
)


def _parameter_line(key, value):
    label, unit, scale = key, "", 1.0
    for suffix, unit_text, factor in _PARAMETER_UNITS:
        if key.endswith(suffix):
            label, unit, scale = key[: -len(suffix)], unit_text, factor
            break
    if isinstance(value, float):
        value = f"{value * scale:.6g}"
    elif value is None:
        value = "unknown"
    label = "stress / tensile strength" if key == "stress_percent_of_strength" else label.replace("_", " ")
    return f"  {label}: {value}{' ' + unit if unit and value != 'unknown' else ''}"
