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
]

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

    Examples
    --------
    >>> import numpy as np
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... render: {sample_rate: 8000, max_modes: 12}
    ... ''')
    >>> solution = synth.SolveCache().solve(patch.resonator, 6)
    >>> solution.resonator, solution.labels
    ('string', ('n=1', 'n=2', 'n=3', 'n=4', 'n=5', 'n=6'))
    >>> middle = solution.place(0.5, None)  # plucked at the middle: the even modes have a node there
    >>> np.round(np.abs(middle.excitation_shape), 6).tolist()
    [1.0, 0.0, 1.0, 0.0, 1.0, 0.0]
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

    Examples
    --------
    >>> import numpy as np
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... excitation: {type: pluck, position: 0.25}
    ... render: {sample_rate: 8000, max_modes: 12}
    ... ''')
    >>> modes = synth.mode_set(patch)
    >>> modes.resonator, len(modes.frequency_hz), modes.labels[:3]
    ('string', 12, ('n=1', 'n=2', 'n=3'))
    >>> np.round(modes.frequency_hz[:3]).tolist()  # Hz: nearly harmonic, a little sharp (stiffness)
    [392.0, 784.0, 1178.0]
    >>> np.round(np.abs(modes.excitation_shape[:4]), 4).tolist()  # mode 4 has a node at 1/4
    [0.7071, 1.0, 0.7071, 0.0]
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
        Level relative to the strongest mode, each taken when the excitation's
        force ends (where it starts ringing freely; `amplitude` is referred
        back to t = 0); NaN where the excitation or the pickup sits on a node
        of the mode (null in JSON).
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

    Examples
    --------
    >>> import numpy as np
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... excitation: {type: pluck, position: 0.25}
    ... damping: {t60: 2 s, t60_high: 0.5 s, high_frequency: 3 kHz}
    ... render: {sample_rate: 8000, max_modes: 12}
    ... ''')
    >>> table = synth.partial_table(patch)
    >>> round(table.fundamental_hz, 1), len(table.frequency_hz)  # modes 11 and 12 are above Nyquist
    (392.0, 10)
    >>> np.round(table.ratio[:4], 3).tolist()
    [1.0, 2.001, 3.004, 4.01]
    >>> np.round(table.level_db[:5]).tolist()  # dB re the strongest; mode 4 has a node at the pluck: NaN
    [0.0, -3.0, -10.0, nan, -15.0]
    >>> bool(np.all(np.diff(table.t60_s) < 0))  # higher partials decay faster
    True
    >>> table.parameters["modes_above_nyquist"], table.warnings  # expected, so not a warning
    (2, ())
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
