"""Physics solved once per distinct object, shared by every render of it.

A resonator's modes depend only on the object (its resolved spec) and on how
many modes are asked for (or, with ``render.max_modes: auto``, on the frequency
below which every mode is asked for: :meth:`SolveCache.solve_below`, keyed by
Nyquist); where it is excited and heard, how hard, how it is
detuned and how it decays are applied afterwards to the solved modes
(:meth:`synth.modes.Solution.place`, :func:`synth.pipeline.partial_table`).
So MIDI notes, every velocity and round robin of a batch job, the batch's
gain pass and render pass, and the keys of an instrument all reuse one solve
per object, and a retune (the length of a bar solved for a pitch, say) is
computed once per (object, pitch).

Keys are the frozen spec dataclasses themselves (equal specs are the same
object), so a cached result is exactly what a fresh solve returns; the tests
hold that.  Entries are evicted least recently used beyond
:data:`MAX_ENTRIES` solutions or :data:`MAX_CACHED_MODES` modes in all.
"""
from __future__ import annotations

from collections import OrderedDict
from dataclasses import replace

import numpy as np

from .resonators import resonator_module

__all__ = ["SolveCache", "DEFAULT_CACHE", "MAX_ENTRIES", "MAX_CACHED_MODES", "AUTO", "ModeCeiling", "row_count"]

#: Most solutions kept (an 88-key instrument with a few variants fits).
MAX_ENTRIES = 1024
#: Most modes kept over every solution (bounds memory: a few hundred bytes each).
MAX_CACHED_MODES = 2_000_000
#: ``render.max_modes: auto``: every mode below Nyquist is solved (:meth:`SolveCache.solve_below`).
AUTO = "auto"
#: First count tried for a resonator that gives no estimate of its modes below a frequency.
FIRST_COUNT = 64
#: Growth of the count between solves while the highest solved mode is still below the limit:
#: after an estimate (which falls short by little) and without one.
GROWTH_ESTIMATED = 1.25
GROWTH_BLIND = 2.0
#: An estimate above the ceiling by this factor is refused before any solve (estimates are within a
#: few percent; between the ceiling and this the exact count, after the solve, decides).
ESTIMATE_MARGIN = 1.25


class ModeCeiling(ValueError):
    """More modes below `limit_hz` than `ceiling`: ``max_modes: auto`` cannot compute them all.

    Attributes
    ----------
    ceiling : int
        The most modes allowed.
    limit_hz : float, Hz
        The frequency below which every mode was asked for (Nyquist).
    """

    def __init__(self, ceiling, limit_hz):
        self.ceiling = int(ceiling)
        self.limit_hz = float(limit_hz)
        super().__init__(
            f"auto would compute more than {self.ceiling} modes below Nyquist ({self.limit_hz:g} Hz), the most "
            f"a render may hold: give a number of modes (at most {self.ceiling}) or lower render.sample_rate"
        )

    def __reduce__(self):
        return (type(self), (self.ceiling, self.limit_hz))


def _paired(solution):
    """True for a solution of circular pairs (:class:`synth.resonators.outline.PairedSolution`)."""
    return getattr(solution, "orders", None) is not None


def row_count(solution, limit_hz=np.inf):
    """Modes of `solution` below `limit_hz`, each member of a circular cos/sin pair counted."""
    below = np.asarray(solution.frequency_hz) < limit_hz
    if _paired(solution):
        return int(np.sum(np.where(np.asarray(solution.orders)[below] == 0, 1, 2)))
    return int(np.count_nonzero(below))


class SolveCache:
    """Solutions and retunes of resonator specs, each computed once.

    Parameters
    ----------
    max_entries : int
        Most solutions (and, apart, most retunes) kept; the least recently
        used go first.  Default :data:`MAX_ENTRIES`.
    max_modes : int
        Most modes kept over every solution.  Default :data:`MAX_CACHED_MODES`.

    Attributes
    ----------
    solves, retunes : int
        Cache misses: how many times modes (retunes) were computed.
    hits : int
        Lookups answered from the cache.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... render: {sample_rate: 8000, max_modes: 12}
    ... ''')
    >>> cache = synth.SolveCache()
    >>> for velocity_strength in (0.5, 1.0, 2.0):  # one object, three strengths: one solve
    ...     table = synth.partial_table(patch, cache=cache)
    >>> cache.solves, cache.hits, len(cache)
    (1, 2, 1)
    >>> up = synth.retune(patch, "A4", cache=cache)
    >>> again = synth.retune(patch, 440.0, cache=cache)  # the same pitch: computed once
    >>> cache.retunes, up == again
    (1, True)
    """

    def __init__(self, *, max_entries=MAX_ENTRIES, max_modes=MAX_CACHED_MODES):
        self.max_entries = int(max_entries)
        self.max_modes = int(max_modes)
        self._solutions = OrderedDict()
        self._retunes = OrderedDict()
        self._modes = 0
        self.solves = self.retunes = self.hits = 0

    def solve(self, spec, n_modes):
        """The :class:`~synth.modes.Solution` of `spec` with `n_modes` modes asked for.

        Raises whatever the resonator's solve raises (UnreachablePitch, ...);
        failures are not cached.
        """
        key = (spec, int(n_modes))
        solution = self._solutions.get(key)
        if solution is not None:
            self._solutions.move_to_end(key)
            self.hits += 1
            return solution
        solution = resonator_module(spec.TYPE).solve(spec, int(n_modes))
        self.solves += 1
        self._store(key, solution)
        return solution

    def _store(self, key, solution):
        """Keep `solution` under `key`, evicting the least recently used beyond the bounds."""
        self._solutions[key] = solution
        self._modes += len(solution.frequency_hz)
        while len(self._solutions) > 1 and (len(self._solutions) > self.max_entries or self._modes > self.max_modes):
            _, old = self._solutions.popitem(last=False)
            self._modes -= len(old.frequency_hz)

    def solve_for(self, spec, max_modes, *, sample_rate, ceiling):
        """The solution a render at `sample_rate` uses: `max_modes` modes, or every mode below Nyquist.

        Parameters
        ----------
        spec : resonator spec
        max_modes : int or "auto"
            ``render.max_modes``: a number of modes, or :data:`AUTO`.
        sample_rate : float, Hz
        ceiling : int
            The most modes auto may compute (:data:`synth.patch.MAX_MODES`).

        Raises
        ------
        ModeCeiling
            If auto would compute more than `ceiling` modes.
        """
        if max_modes == AUTO:
            return self.solve_below(spec, sample_rate / 2.0, ceiling=ceiling)
        return self.solve(spec, max_modes)

    def solve_below(self, spec, limit_hz, *, ceiling):
        """Every mode of `spec` below `limit_hz`, and the first one at or above it if the model has one.

        The count grows until the highest solved mode reaches `limit_hz` or
        the resonator returns fewer modes than asked (it has no more: an air
        column's cross-mode cut-on, a bar's mode ceiling, a partial list's
        end).  A resonator module's ``count_below(spec, limit_hz)``, where it
        has one, gives the first count (its estimate of the modes below,
        plus one); without one the count starts at :data:`FIRST_COUNT` and
        doubles.  A circular object's solution lists every member of every
        pair it holds (``n_rows``), with a pickup and without.

        One cache miss (``solves``) however many solves the growth takes.

        Raises
        ------
        ModeCeiling
            If more than `ceiling` modes (a pair's members counted apart) lie
            below `limit_hz`.
        """
        key = (spec, AUTO, float(limit_hz), int(ceiling))
        solution = self._solutions.get(key)
        if solution is not None:
            self._solutions.move_to_end(key)
            self.hits += 1
            return solution
        module = resonator_module(spec.TYPE)
        estimate = getattr(module, "count_below", None)
        if estimate is not None:
            below = int(estimate(spec, float(limit_hz)))
            if below > ESTIMATE_MARGIN * ceiling:
                raise ModeCeiling(ceiling, limit_hz)
            n, growth = below + 1, GROWTH_ESTIMATED
        else:
            n, growth = FIRST_COUNT, GROWTH_BLIND
        while True:
            n = max(1, min(n, int(ceiling) + 1))
            solution = module.solve(spec, n)
            frequency = np.asarray(solution.frequency_hz)
            if len(frequency) < n or float(np.max(frequency)) >= limit_hz:
                break
            if n > ceiling:
                raise ModeCeiling(ceiling, limit_hz)
            n = max(n + 1, int(n * growth))
        if row_count(solution, limit_hz) > ceiling:
            raise ModeCeiling(ceiling, limit_hz)
        if _paired(solution):
            solution = replace(solution, n_rows=row_count(solution))
        self.solves += 1
        self._store(key, solution)
        return solution

    def retune(self, spec, pitch_hz):
        """`spec` with the parameter a maker moves solved so its lowest mode sounds at `pitch_hz`."""
        key = (spec, float(pitch_hz))
        tuned = self._retunes.get(key)
        if tuned is not None:
            self._retunes.move_to_end(key)
            self.hits += 1
            return tuned
        tuned = resonator_module(spec.TYPE).retune(spec, float(pitch_hz))
        self.retunes += 1
        self._retunes[key] = tuned
        while len(self._retunes) > self.max_entries:
            self._retunes.popitem(last=False)
        return tuned

    def clear(self):
        """Forget every entry (the counters stay)."""
        self._solutions.clear()
        self._retunes.clear()
        self._modes = 0

    def __len__(self):
        return len(self._solutions)


#: The cache every render in this process shares unless given another.
DEFAULT_CACHE = SolveCache()
