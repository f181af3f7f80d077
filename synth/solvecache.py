"""Physics solved once per distinct object, shared by every render of it.

A resonator's modes depend only on the object (its resolved spec) and on how
many modes are asked for; where it is excited and heard, how hard, how it is
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

from .resonators import resonator_module

__all__ = ["SolveCache", "DEFAULT_CACHE", "MAX_ENTRIES", "MAX_CACHED_MODES"]

#: Most solutions kept (an 88-key instrument with a few variants fits).
MAX_ENTRIES = 1024
#: Most modes kept over every solution (bounds memory: a few hundred bytes each).
MAX_CACHED_MODES = 2_000_000


class SolveCache:
    """Solutions and retunes of resonator specs, each computed once.

    Attributes
    ----------
    solves, retunes : int
        Cache misses: how many times modes (retunes) were computed.
    hits : int
        Lookups answered from the cache.
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
        self._solutions[key] = solution
        self._modes += len(solution.frequency_hz)
        while len(self._solutions) > 1 and (len(self._solutions) > self.max_entries or self._modes > self.max_modes):
            _, old = self._solutions.popitem(last=False)
            self._modes -= len(old.frequency_hz)
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
