"""Instruments: a base patch designed key by key across a range (format v1; files: instrument_file.py).

An instrument is the unit of MIDI and batch work: every key is an object a
maker would build, with its own length, gauge or material (``vary``), the
parameter the pitch solves (``solve``), and optional unison courses, a second
polarisation and a bridge (strings), a fitted undercut (``tune``) and a tuned
tube resonator (``tubes``) for bars.

Key design (:meth:`Instrument.design`), per 12-TET key of the range:

1. the base patch's mapping with every ``vary`` value of the key put in
   (numbers: ``log(value)`` linear in the key number between anchors, linear
   where an anchor is <= 0, held beyond the first and last anchor; names,
   lists and mappings held from each anchor up to the next);
2. the key's target pitch: 12-TET from ``tuning.a4``, or stretched
   (``tuning.stretch: octaves``, :meth:`Instrument.target_hz`);
3. the solved parameter (``solve``, default the one a patch's pitch solves)
   found so the lowest mode sounds at the target;
4. with ``tune``, the bar's undercut fitted at the key's own length
   (:func:`synth.tuning.tune_undercut`), cached on disk beside the
   instrument (:class:`TuneStore`);
5. the coupling of the key (:class:`synth.coupling.KeyCoupling`), applied by
   the pipeline to the solved, damped modes.

Stretch tuning (``octaves``): the temperament octave A#3..A4 is equal-tempered
from A4; every key above it is tuned so its fundamental meets the 2nd partial
of the key an octave below, every key below it so its 2nd partial meets the
fundamental of the key an octave above, from each key's own computed
inharmonicity -- the octaves an aural tuner sets on a stiff-stringed
instrument (Railsback 1938, JASA 10:86, from memory; the stretch follows the
inharmonicity as Rigaud, David & Daudet 2013 model it).
"""
from __future__ import annotations

import copy
import hashlib
import json
import math
from dataclasses import asdict, dataclass, replace
from pathlib import Path

import numpy as np

from .errors import PatchError, RenderError
from .pipeline import solve_modes
from .resonators import UnreachablePitch, resonator_module
from .schema import convert
from .solvecache import DEFAULT_CACHE
from .units import midi_to_hz, midi_to_note, short_repr
from .yamlio import LineDict

__all__ = ["Instrument", "KeyDesign", "TuneStore", "Vary", "TEMPERAMENT_OCTAVE"]

#: MIDI keys of the equal-tempered temperament octave of a stretched tuning (A#3..A4).
TEMPERAMENT_OCTAVE = (58, 69)
#: Stretched keys below the temperament octave are solved to this many cents.
_STRETCH_TOLERANCE_CENTS = 1e-4
_STRETCH_ROUNDS = 12
#: A generic solve (a key other than the one a pitch solves) settles to this many cents.
_SOLVE_TOLERANCE_CENTS = 1e-4
_SOLVE_ROUNDS = 40
#: Rounds of aiming a coupled key's object so its heard fundamental meets the target.
_AIM_ROUNDS = 4
#: Accepted 2nd-partial ratio for ``stretch: octaves`` (near-harmonic objects only).
_OCTAVE_PARTIAL = (1.8, 2.3)
@dataclass(frozen=True)
class Vary:
    """One ``vary`` entry: a dotted patch key and its anchors [(MIDI key, value)].

    ``numeric``: the values are SI numbers, interpolated between anchors
    (``log`` linear when every value is > 0, else linear); otherwise held
    from each anchor up to the next.
    """

    key: str
    anchors: tuple
    numeric: bool
    whole: bool = False

    def at(self, midi):
        """The value at MIDI key `midi`."""
        keys = [k for k, _ in self.anchors]
        values = [v for _, v in self.anchors]
        if midi <= keys[0]:
            return values[0]
        if midi >= keys[-1]:
            return values[-1]
        upper = int(np.searchsorted(keys, midi, side="right"))
        if not self.numeric:
            return values[upper - 1]
        (k0, v0), (k1, v1) = self.anchors[upper - 1], self.anchors[upper]
        fraction = (midi - k0) / (k1 - k0)
        if v0 > 0 and v1 > 0:
            value = math.exp(math.log(v0) + fraction * (math.log(v1) - math.log(v0)))
        else:
            value = v0 + fraction * (v1 - v0)
        return int(round(value)) if self.whole else value


@dataclass(frozen=True)
class KeyDesign:
    """One key of an instrument as designed: its patch and what was solved for it.

    midi : int; target_hz : float (12-TET or stretched); equal_hz : float
    (12-TET); patch : Patch (the key's object, its coupling attached);
    tuning : UndercutTuning or None; tube_length_m, tube_radius_m : float or None.
    """

    midi: int
    target_hz: float
    equal_hz: float
    patch: object
    tuning: object = None
    tube_length_m: float | None = None
    tube_radius_m: float | None = None

    @property
    def note(self):
        return midi_to_note(self.midi)

    @property
    def stretch_cents(self):
        return 1200.0 * math.log2(self.target_hz / self.equal_hz)


class Instrument:
    """A validated instrument file (see the module notes).

    Patch-like where a patch is accepted: ``name``, ``render``,
    ``excitation``, ``pickup``, ``damping`` and ``resonator`` are the base
    patch's; :meth:`key_patch` gives the patch of one key.
    """

    def __init__(self, *, name, source, base, base_mapping, low, high, a4_hz, stretch, vary, solve, coupling,
                 tune, tubes, lines, overrides=None, store=None, cache=None):
        self.name = name
        self.source = str(source)
        self.base = base
        self.base_mapping = base_mapping
        self.low, self.high = int(low), int(high)
        self.a4_hz = float(a4_hz)
        self.stretch = stretch
        self.vary = vary
        self.solve = solve
        self.coupling = coupling  # (detune_cents, Bridge or None, Polarisation or None, tube settings or None)
        self.tune = tune
        self.tubes = tubes
        self.lines = lines
        self.overrides = overrides or {}
        self.store = store
        self.cache = DEFAULT_CACHE if cache is None else cache
        self.render_changes = {}
        self._designs = {}

    # -- patch-like ---------------------------------------------------------
    render = property(lambda self: self.base.render)
    excitation = property(lambda self: self.base.excitation)
    pickup = property(lambda self: self.base.pickup)
    damping = property(lambda self: self.base.damping)
    resonator = property(lambda self: self.base.resonator)

    def excitation_point(self, midi):
        """The excitation point of key `midi` (no physics): a varied ``excitation.position``, else the base's."""
        from .patch import Point

        for entry in self.vary:
            if entry.key == "excitation.position" and entry.numeric and self.base.excitation.position is not None \
                    and self.base.excitation.position.style == "fraction":
                return Point("fraction", (float(entry.at(midi)),))
        return self.base.excitation.position

    def release_t60_at(self, midi):
        """The damper's T60 of key `midi` (no physics): a varied ``damping.release_t60``, else the base's."""
        for entry in self.vary:
            if entry.key == "damping.release_t60":
                value = entry.at(midi)
                return None if value is None else float(value)
        return self.base.damping.release_t60

    def fingerprint(self):
        """Everything of the instrument that changes its sound, for input hashes (no file names or lines)."""
        return {"base": replace(self.base, source="", lines={}), "range": (self.low, self.high), "a4_hz": self.a4_hz,
                "stretch": self.stretch, "vary": self.vary, "solve": self.solve, "coupling": self.coupling,
                "tune": self.tune, "render_changes": self.render_changes}

    def with_render(self, **changes):
        """This instrument with render settings changed (``sample_rate=...``) for every key."""
        other = copy.copy(self)
        other.base = replace(self.base, render=replace(self.base.render, **changes))
        other.render_changes = {**self.render_changes, **changes}
        other._designs = {}
        return other

    def __repr__(self):
        return f"Instrument({self.name!r}, {self.range_text})"

    def error(self, key, message):
        """A PatchError naming this instrument file, the line of `key` and `key`."""
        return PatchError(message, file=self.source, line=self.lines.get(key), key=key)

    @property
    def keys(self):
        """The MIDI keys of the range, lowest first."""
        return tuple(range(self.low, self.high + 1))

    @property
    def range_text(self):
        return f"{midi_to_note(self.low)}..{midi_to_note(self.high)}"

    def contains(self, midi):
        return self.low <= int(midi) <= self.high

    def check_key(self, midi, *, what="key"):
        """Raise PatchError (naming ``range``) if `midi` is not a key of the range."""
        if not (float(midi).is_integer() and self.contains(midi)):
            shown = midi_to_note(midi) if float(midi).is_integer() and 0 <= midi <= 127 else short_repr(midi)
            raise self.error("range", f"{what} {shown} is outside the instrument's range {self.range_text} "
                                      f"(MIDI {self.low}..{self.high})")

    def key_patch(self, midi, *, a4_hz=None):
        """The :class:`~synth.patch.Patch` of key `midi` (in the range)."""
        self.check_key(midi)
        return self.design(int(midi), a4_hz=a4_hz).patch

    # -- design ---------------------------------------------------------------
    def design(self, midi, *, a4_hz=None):
        """The :class:`KeyDesign` of MIDI key `midi` (computed once per key and A4)."""
        a4 = self.a4_hz if a4_hz is None else float(a4_hz)
        key = (int(midi), a4)
        found = self._designs.get(key)
        if found is None:
            found = self._designs[key] = self._design(int(midi), self.target_hz(int(midi), a4_hz=a4), a4)
        return found

    def target_hz(self, midi, *, a4_hz=None):
        """The pitch key `midi` is tuned to: 12-TET from A4, or stretched by octaves."""
        a4 = self.a4_hz if a4_hz is None else float(a4_hz)
        equal = float(midi_to_hz(midi, a4_hz=a4))
        low, high = TEMPERAMENT_OCTAVE
        if self.stretch == "none" or low <= midi <= high:
            return equal
        if midi > high:  # fundamental on the 2nd partial of the key an octave below
            below = self.design(midi - 12, a4_hz=a4)
            return below.target_hz * self._octave_ratio(below.patch, midi - 12)
        above = self.design(midi + 12, a4_hz=a4).target_hz  # 2nd partial on the key an octave above
        pitch = equal
        for _ in range(_STRETCH_ROUNDS):
            trial = self._design(midi, pitch, a4)
            new = above / self._octave_ratio(trial.patch, midi)
            if abs(1200.0 * math.log2(new / pitch)) < _STRETCH_TOLERANCE_CENTS:
                return new
            pitch = new
        return pitch

    def _octave_ratio(self, patch, midi):
        """f2 / f1 of a key's object (uncoupled), refused when the object is not near-harmonic."""
        frequency = solve_modes(patch, cache=self.cache, at_least=2).frequency_hz
        ratio = float(frequency[1] / frequency[0]) if len(frequency) > 1 else math.nan
        if not (_OCTAVE_PARTIAL[0] <= ratio <= _OCTAVE_PARTIAL[1]):
            raise self.error("tuning.stretch", f"octaves need a 2nd partial near 2x the fundamental; at "
                                               f"{midi_to_note(midi)} it is {ratio:.4g}x (use stretch: none)")
        return ratio

    def mapping_at(self, midi):
        """The base patch's mapping with every ``vary`` value of key `midi` put in."""
        mapping = copy.deepcopy(self.base_mapping)
        for entry in self.vary:
            section_name, key = entry.key.split(".", 1)
            section = mapping.get(section_name)
            if not isinstance(section, dict):
                section = mapping[section_name] = LineDict()
            section[key] = entry.at(midi)
            if hasattr(section, "lines"):
                section.lines[key] = None
        return mapping

    def _patch_at(self, midi, mapping):
        from .patch import patch_from_mapping

        try:
            patch = patch_from_mapping(mapping, file=self.base.source, overrides=self.overrides)
        except PatchError as error:
            raise self._key_error(midi, error) from None
        if self.render_changes:
            patch = replace(patch, render=replace(patch.render, **self.render_changes))
        return replace(patch, name=self.name)

    def _key_error(self, midi, error):
        """`error` of key `midi`'s patch, naming the instrument where the value came from it."""
        note = midi_to_note(midi)
        varied = {entry.key for entry in self.vary}
        if error.key in varied:
            return self.error(f"vary.{error.key}", f"at {note}: {error.message}")
        if error.key in ("resonator.pitch", self.solve):
            return self.error("range", f"{note}: {error.message}")
        return PatchError(f"at {note} of instrument {self.name}: {error.message}", file=error.file, line=error.line,
                          key=error.key)

    def _design(self, midi, target, a4):
        patch = self._pitched(midi, target)
        self._fundamental(midi, patch)  # a pitch the object cannot reach is named here, as a key of the range
        coupling, tube = self._coupling(midi, patch)
        pull = 1.0
        for _ in range(_AIM_ROUNDS if coupling is not None else 0):
            # Coupling moves the heard fundamental (the weighted mean of its sub-modes) off the
            # object's own: aim the object so the key sounds its target.  The aim is rounded to
            # 12 digits (2e-8 cent) so it, and the undercut fits keyed by it, do not hang on an
            # eigen-solve's last bits.
            own = self._fundamental(midi, patch)
            heard = own * self._pull(patch, coupling)
            if abs(1200.0 * math.log2(heard / target)) < _SOLVE_TOLERANCE_CENTS:
                break
            pull = heard / own
            patch = self._pitched(midi, float(f"{own * target / heard:.12g}"))
            coupling, tube = self._coupling(midi, patch)
        tuning = None
        if self.tune is not None:
            tuning = self._tuned(midi, patch, target, pull)
            patch = replace(patch, resonator=tuning.spec)
        coupling, tube = self._coupling(midi, patch)
        if coupling is not None:
            patch = replace(patch, coupling=coupling)
        return KeyDesign(midi, float(target), float(midi_to_hz(midi, a4_hz=a4)), patch, tuning, *tube)

    def _fundamental(self, midi, patch):
        try:
            return float(solve_modes(patch, cache=self.cache).frequency_hz[0])
        except UnreachablePitch as error:
            raise self.error("range", f"{midi_to_note(midi)}: {error}") from None

    def _coupling(self, midi, patch):
        """(KeyCoupling or None, (tube length, tube radius) or (None, None)) of key `midi`'s object."""
        detune, bridge, polarisation, tubes = self.coupling
        if tubes is None and bridge is None:
            return None, (None, None)
        from .coupling import KeyCoupling, tube_decay_rate, tube_length

        fundamental = self._fundamental(midi, patch)
        tube, length, radius = None, None, None
        if tubes is not None:
            radius = float(tubes["radius"].at(midi))
            try:
                length = tube_length(fundamental, radius, tubes["temperature"])
            except UnreachablePitch as error:
                raise self.error("tubes.radius", f"at {midi_to_note(midi)}: {error}") from None
            tube = (fundamental, tube_decay_rate(fundamental, radius, tubes["temperature"]), tubes["coupling"],
                    tubes["level"], radius, length)
        return KeyCoupling(detune_cents=detune, bridge=bridge, polarisation=polarisation, tube=tube), (length, radius)

    def _pull(self, patch, coupling):
        """Heard over own pitch of the fundamental of `patch`'s object under `coupling`."""
        from .coupling import string_impedance
        from .damping import LN1000

        solution = solve_modes(patch, cache=self.cache)
        own = float(solution.frequency_hz[0])
        modes = coupling.apply([own], [LN1000 / patch.damping.fundamental_t60(own)], [1],
                               impedance=string_impedance(solution.parameters))
        weight = np.abs(modes.weight)
        return float(np.sum(weight * modes.frequency_hz) / np.sum(weight)) / own

    def _pitched(self, midi, pitch):
        """The key's patch with its solved parameter found so the object sounds `pitch` (Hz)."""
        mapping = self.mapping_at(midi)
        module = resonator_module(self.base.resonator.TYPE)
        section = mapping["resonator"]
        if self.solve == f"resonator.{module.PITCH_REPLACES[0]}":
            for other in module.PITCH_REPLACES:
                section.pop(other, None)
            section["pitch"] = float(pitch)
            return self._patch_at(midi, mapping)
        return self._solve_generic(midi, mapping, pitch)

    def _solve_generic(self, midi, mapping, target):
        """Solve ``solve`` (not the key a pitch solves) by secant steps on log value against log frequency."""
        section_name, key = self.solve.split(".", 1)
        section = mapping[section_name]
        section.pop("pitch", None)
        value = section.get(key)
        field = resonator_module(self.base.resonator.TYPE).FIELDS[key]
        try:
            value = convert(field, value)
        except ValueError:
            raise self.error("solve", f"{self.solve} needs a starting value in the patch or in vary "
                                      f"(got {short_repr(section.get(key))})") from None

        def sounding(v):
            section[key] = v
            patch = self._patch_at(midi, mapping)
            try:
                return patch, float(solve_modes(patch, cache=self.cache).frequency_hz[0])
            except UnreachablePitch as error:
                raise self.error("solve", f"at {midi_to_note(midi)}: {error}") from None

        patch, f = sounding(value)
        previous = None
        for _ in range(_SOLVE_ROUNDS):
            error_cents = 1200.0 * math.log2(f / target)
            if abs(error_cents) < _SOLVE_TOLERANCE_CENTS:
                return patch
            slope = -1.0 if previous is None else (math.log(f) - math.log(previous[1])) / (math.log(value) - math.log(previous[0]))
            if not math.isfinite(slope) or abs(slope) < 1e-6:
                break
            previous = (value, f)
            value = value * math.exp(-math.log(f / target) / slope)
            if not (math.isfinite(value) and value > 0):
                break
            patch, f = sounding(value)
        raise self.error("solve", f"at {midi_to_note(midi)}: {self.solve} cannot be solved for {target:.2f} Hz "
                                  f"(last {f:.2f} Hz at {value:.4g}); choose another key to solve")

    def _tuned(self, midi, patch, target, pull=1.0):
        """The key's undercut fit; with a tube (`pull` != 1) the upper partials are aimed at the
        heard fundamental, so the key sounds its ratios."""
        from .tuning import TuningError, tune_undercut

        given, points = self.tune
        ratios = (1.0,) + tuple(float(f"{r / given[0] * pull:.12g}") for r in given[1:])
        blank = patch.resonator
        store_key = TuneStore.key(blank, ratios, points)
        found = None if self.store is None else self.store.get(store_key)
        if found is not None:
            return found
        try:
            tuning = tune_undercut(blank, ratios, n_points=points)
        except TuningError as error:
            raise self.error("tune", f"at {midi_to_note(midi)} ({target:.2f} Hz): {error}") from None
        worst = max(abs(c) for c in tuning.cents_error)
        if worst > 1.0:
            raise self.error("tune", f"at {midi_to_note(midi)}: the closest cut misses 1:{given[1] / given[0]:g}:{given[2] / given[0]:g} "
                                     f"by {worst:.2f} cents (more than 1 cent); try a longer or thinner blank")
        if self.store is not None:
            self.store.put(store_key, tuning)
        return tuning


class TuneStore:
    """Undercut fits on disk beside an instrument, keyed by the hash of what they depend on.

    The file (``<instrument>.tuned.json``) maps ``sha256(blank spec, ratios,
    points, tuner version)`` to the tuned bar, so a re-run (a library, a
    MIDI render, ``synth range``) does not fit again.  It is written
    atomically after each new fit; a folder that cannot be written keeps the
    fits in memory only.
    """

    VERSION = 1

    def __init__(self, path):
        self.path = Path(path)
        self._entries = {}
        self.writable = True
        try:
            data = json.loads(self.path.read_text(encoding="utf-8"))
            if isinstance(data, dict) and data.get("version") == self.VERSION:
                self._entries = dict(data.get("entries", {}))
        except (OSError, ValueError):
            pass

    @staticmethod
    def key(blank, ratios, points):
        # The blank as given (its pitch, not the length solved from it: a solve may differ in the last
        # bit between machines, the inputs do not).
        given = replace(blank, length=None) if getattr(blank, "pitch_hz", None) is not None else blank
        text = json.dumps({"blank": _plain(asdict(given)), "type": blank.TYPE, "ratios": list(ratios),
                           "points": points, "version": TuneStore.VERSION}, sort_keys=True)
        return hashlib.sha256(text.encode()).hexdigest()

    def get(self, key):
        from .resonators.bar import BarSpec
        from .tuning import UndercutTuning

        entry = self._entries.get(key)
        if entry is None:
            return None
        spec = dict(entry["spec"])
        spec["profile"] = tuple(spec["profile"]) if spec.get("profile") is not None else None
        fields = {k: v for k, v in entry.items() if k != "spec"}
        fields["targets"] = tuple(fields["targets"])
        fields["frequency_hz"] = tuple(fields["frequency_hz"])
        return UndercutTuning(spec=BarSpec(**spec), **fields)

    def put(self, key, tuning):
        entry = {k: _plain(v) for k, v in asdict(tuning).items() if k != "spec"}
        entry["spec"] = _plain(asdict(tuning.spec))
        self._entries[key] = entry
        if not self.writable:
            return
        from .audio import atomic_output

        try:
            with atomic_output(self.path) as tmp:
                tmp.write_text(json.dumps({"version": self.VERSION, "entries": self._entries}, sort_keys=True),
                               encoding="utf-8")
        except RenderError:  # a folder that cannot be written: the fits stay in memory
            self.writable = False


def _plain(value):
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    return value
