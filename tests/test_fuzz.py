"""Fuzz tests of every file synth reads: patches, library specs, MIDI maps and MIDI files.

Hypothesis builds the inputs: small valid patches, specs and maps of our own, then mutated
(keys dropped, values replaced by random scalars, strings, lists, mappings, huge, tiny,
negative or non-finite numbers, unit strings, unknown keys, wrong types), YAML text
corrupted, random text and bytes, and MIDI files written by mido then corrupted byte by
byte.  Every example runs the command line in-process (``synth.cli.main``) and checks its
contract:

* exit status 0 and every output whole (a WAV ``soundfile.info`` reads) with no ``*.part*``
  temporary left anywhere, or
* exit status 2, exactly one ``synth: error: ...`` line on stderr and nothing written (the
  folder holds the inputs and nothing else), or
* (``synth batch`` only) exit status 1 when some jobs failed, whole outputs, no traceback;

never a traceback on stderr, never an exception escaping ``main``.

Profiles (hypothesis settings), chosen by the environment variable ``SYNTH_FUZZ_PROFILE``:

``ci`` (the default)
    200 derandomised examples for the patch tests, 80-120 for the slower ones: the same inputs
    on every run, about 30 s on two cores.
``long``
    2000 random examples per test (the slower tests a fraction of that; new inputs on every
    run, about five minutes), to look for new bugs::

        SYNTH_FUZZ_PROFILE=long .venv/bin/python -m pytest -q tests/test_fuzz.py

    ``SYNTH_FUZZ_EXAMPLES=N`` sets the examples per test of either profile (N=1000 takes about
    two minutes here).  ``SYNTH_FUZZ_SLOW=S`` prints every example that took over S seconds
    (run pytest with ``-s``); ``--hypothesis-show-statistics`` shows how often each exit status
    came up.  Add ``-x`` to stop at the first failure: hypothesis prints the shrunk input and a
    ``@reproduce_failure`` blob.  No example database is written.

Bugs of synth found by these tests: ``FOUND_BUGS`` keeps each one's minimal input as a plain
regression test (``test_found_bugs_stay_fixed``).  A bug found and not yet fixed goes into
``KNOWN_BUGS`` with a signature that :func:`_known_bug` matches, and the fuzz tests skip the
examples that show it (``assume``) so the suite stays green until the fix; delete the entry then.

Inputs whose work would be long but legitimate (a render of hours, thousands of jobs) are
kept out of the strategies (render durations, mode counts, note ranges and round robins are
drawn from cheap lists; MIDI files whose song would last over two minutes are filtered out);
that is not a statement about synth, only about the time budget.
"""
from __future__ import annotations

import contextlib
import copy
import io
import json
import os
import re
import struct
import tempfile
import time
import traceback
import unicodedata
from dataclasses import dataclass, field
from pathlib import Path

import mido
import numpy as np
import pytest
import soundfile
import yaml
from hypothesis import HealthCheck, assume, event, given, note, settings
from hypothesis import strategies as st

from .cli_checks import error_line, run_cli

# ----------------------------------------------------------------------------- settings

_EXAMPLES = os.environ.get("SYNTH_FUZZ_EXAMPLES")
_SUPPRESS = [HealthCheck.function_scoped_fixture, HealthCheck.too_slow, HealthCheck.filter_too_much,
             HealthCheck.data_too_large]
settings.register_profile(
    "ci", max_examples=int(_EXAMPLES or 200), deadline=None, derandomize=True, database=None,
    suppress_health_check=_SUPPRESS, print_blob=True,
)
settings.register_profile(
    "long", max_examples=int(_EXAMPLES or 2000), deadline=None, derandomize=False, database=None,
    suppress_health_check=_SUPPRESS, print_blob=True,
)
PROFILE = os.environ.get("SYNTH_FUZZ_PROFILE", "ci")
# Applied per test (not settings.load_profile) so other test modules keep hypothesis' defaults.
FUZZ = settings.get_profile(PROFILE)


def _scaled(fraction):
    """The profile with `fraction` of its examples (slow tests run fewer)."""
    return settings(FUZZ, max_examples=max(5, int(FUZZ.max_examples * fraction)))


# ----------------------------------------------------------------------------- known bugs

#: Bugs of synth these tests found that are not fixed yet: id -> (what goes wrong, signature), where
#: signature(outcome, text) recognises the bug from what the command did (text: the escaped exception's
#: traceback, stderr and any complaint about JSON).  :func:`_known_bug` matches them, and the fuzz tests
#: skip a matching example with ``assume`` so the suite stays green until the fix; add the bug's
#: minimal input to _KNOWN_REPRODUCERS (at the end of the file), a strict xfail that turns red once
#: the bug is fixed, to say the entry can go (then move the input to FOUND_BUGS).
KNOWN_BUGS: dict = {
}


def _controls(text):
    """The control characters of `text` other than line feed and tab (category Cc: C0, DEL, C1)."""
    return sorted({c for c in text if unicodedata.category(c) == "Cc" and c not in "\n\t"})


def _known_bug(outcome, json_error=None):
    """The id in :data:`KNOWN_BUGS` of the known synth bug `outcome` shows, or None.

    json_error : the complaint about `modes --json` output that is not strict JSON, if that is the problem.
    """
    text = (outcome.exception or "") + outcome.err + (f"\njson: {json_error}" if json_error else "")
    for bug_id, (_, signature) in KNOWN_BUGS.items():
        if signature(outcome, text):
            return bug_id
    return None


# ----------------------------------------------------------------------------- running the CLI


@dataclass
class Outcome:
    """What one command did."""

    argv: list
    status: object = None
    out: str = ""
    err: str = ""
    exception: str | None = None  # the traceback of an exception that escaped main
    seconds: float = 0.0
    before: dict = field(default_factory=dict)  # relative path -> bytes, the inputs
    after: dict = field(default_factory=dict)  # relative path -> Path, every file afterwards


def _files(root):
    return {str(p.relative_to(root)): p for p in sorted(Path(root).rglob("*")) if p.is_file() or p.is_symlink()}


@contextlib.contextmanager
def _workspace():
    """A fresh folder tree for one example: (root, work), work = root/a/b/work is the working folder.

    Nested so that a stray ``..`` in a fuzzed path still lands inside root, where it is seen.
    """
    with tempfile.TemporaryDirectory(prefix="synth-fuzz-") as root:
        work = Path(root) / "a" / "b" / "work"
        work.mkdir(parents=True)
        old = os.getcwd()
        os.chdir(work)
        try:
            yield Path(root), work
        finally:
            os.chdir(old)


def _run(capsys, root, *argv):
    """Run synth in-process; an exception escaping main is recorded, not raised."""
    outcome = Outcome(argv=[str(a) for a in argv])
    outcome.before = {name: path.read_bytes() for name, path in _files(root).items()}
    capsys.readouterr()
    start = time.perf_counter()
    try:
        outcome.status, outcome.out, outcome.err = run_cli(capsys, *argv)
    except BaseException as error:  # noqa: BLE001 - any escape is a finding
        if isinstance(error, KeyboardInterrupt):
            raise
        outcome.exception = traceback.format_exc()
        outcome.out, outcome.err = capsys.readouterr()
    outcome.seconds = time.perf_counter() - start
    outcome.after = {name: path for name, path in _files(root).items()}
    return outcome


def _tail(text, lines=6):
    return "\n".join(text.strip().splitlines()[-lines:])


def _problems(outcome, outputs=(), batch=False, protected=None):
    """What `outcome` did against the contract (an empty list when it kept it).

    outputs : relative paths (to root) that a status 0 must have written as whole audio files.
    protected : the relative paths a successful run must leave unchanged (default: every file that
    was there before); a refused run (status 2) must leave every file unchanged.
    """
    problems = []
    if outcome.exception is not None:
        return [f"exception escaped main:\n{_tail(outcome.exception)}"]
    if "Traceback" in outcome.err:
        problems.append(f"traceback on stderr:\n{_tail(outcome.err)}")
    # A raw control character (ESC, BEL, backspace, ...) in a message: a terminal obeys it (ESC E is a
    # new line, ESC [ 2 K erases one), so the one line on screen is not what synth wrote.
    controls = _controls(outcome.err)
    if controls:
        problems.append(f"raw control characters {controls!r} on stderr: {_tail(outcome.err, 3)!r}")
    new = sorted(set(outcome.after) - set(outcome.before))
    temporaries = [name for name in outcome.after if ".part" in Path(name).name]
    changed = [name for name, data in outcome.before.items()
               if (protected is None or outcome.status == 2 or name in protected)
               and (name not in outcome.after or outcome.after[name].read_bytes() != data)]
    if changed:
        problems.append(f"inputs changed or removed: {changed}")
    if outcome.status in (0, 1) and (outcome.status == 0 or batch):
        if temporaries:
            problems.append(f"temporaries left behind: {temporaries}")
        for name in outputs:
            if name not in outcome.after:
                problems.append(f"status {outcome.status} but {name} was not written")
        for name in new:
            if name.endswith((".wav", ".flac", ".WAV")):
                try:
                    soundfile.info(str(outcome.after[name]))
                    samples, _ = soundfile.read(str(outcome.after[name]), dtype="float64")
                except Exception as error:  # noqa: BLE001
                    problems.append(f"{name} is not a whole audio file: {error}")
                else:
                    if not np.isfinite(samples).all():
                        problems.append(f"{name} holds samples that are not finite (NaN or infinity)")
        for name in outcome.after:
            if name.endswith(".json") and (name in new or outcome.before.get(name) != outcome.after[name].read_bytes()):
                try:
                    _strict_json(outcome.after[name].read_text(encoding="utf-8"))
                except ValueError as error:
                    problems.append(f"{name} is not strict JSON: {error}")
        if outcome.status == 1:
            lines = outcome.err.strip().splitlines()
            if not any(line.startswith("synth: error: ") for line in lines):
                problems.append(f"status 1 without an error line:\n{_tail(outcome.err)}")
    elif outcome.status == 2:
        try:
            error_line(outcome.err)
        except AssertionError as error:
            problems.append(f"status 2 without exactly one error line: {error}")
        if new:
            problems.append(f"status 2 but files were written: {new}")
    else:
        problems.append(f"exit status {outcome.status!r} (stderr: {_tail(outcome.err, 3)!r})")
    return problems


def _check(outcome, inputs, outputs=(), batch=False, protected=None):
    """Fail with the inputs when `outcome` broke the contract (known bugs are skipped with assume)."""
    note(f"argv: {outcome.argv}")
    for name, text in inputs.items():
        note(f"{name}: {text!r}")
    note(f"status {outcome.status}, {outcome.seconds:.2f} s, stderr: {outcome.err.strip()[-400:]!r}")
    event(f"exit status {outcome.status}")
    problems = _problems(outcome, outputs=outputs, batch=batch, protected=protected)
    if problems:
        bug = _known_bug(outcome)
        if bug is not None:
            event(f"known bug skipped: {bug}")
        assume(bug is None)
        shown = "\n".join(f"--- {name}:\n{text if isinstance(text, str) else repr(text)}"
                          for name, text in inputs.items())
        pytest.fail(f"synth {' '.join(outcome.argv)}: " + "\n".join(problems) + f"\ninputs:\n{shown}", pytrace=False)
    if os.environ.get("SYNTH_FUZZ_SLOW") and outcome.seconds > float(os.environ["SYNTH_FUZZ_SLOW"]):
        print(f"\nslow example ({outcome.seconds:.1f} s, status {outcome.status}): {outcome.argv} {inputs!r}")


# ----------------------------------------------------------------------------- the valid bases

_FAST = {"duration": "0.05 s", "sample_rate": 8000}

BASE_PATCHES = [
    {
        "name": "fz-string",
        "resonator": {"type": "string", "material": "music-wire", "length": "650 mm", "diameter": "0.45 mm",
                      "pitch": "A2", "ends": "pinned"},
        "excitation": {"type": "pluck", "position": 0.2, "release_time": "0.3 ms", "strength": 1.0},
        "pickup": {"position": 0.9, "measures": "velocity"},
        "damping": {"t60": "0.5 s", "t60_high": "0.1 s", "high_frequency": "2 kHz", "release_t60": "0.05 s"},
        "render": {**_FAST, "max_modes": 32},
    },
    {
        "name": "fz_string_tension",
        "resonator": {"type": "string", "material": {"density": "7800 kg/m^3", "youngs_modulus": "200 GPa",
                                                     "poisson_ratio": 0.3, "tensile_strength": "2000 MPa"},
                      "length": 0.4, "diameter": 0.0005, "tension": "60 N", "ends": "clamped"},
        "excitation": {"type": "strike", "position": 0.12, "contact_time": "1.5 ms"},
        "pickup": {"measures": "displacement"},
        "render": {**_FAST, "bit_depth": 16, "peak_db": -3},
    },
    {
        "name": "fz-bar",
        "resonator": {"type": "bar", "material": "aluminium-6061", "width": "25 mm", "thickness": "9 mm",
                      "pitch": "A4", "supports": "free-free"},
        "excitation": {"type": "strike", "position": 0.08, "contact_time": "0.3 ms"},
        "pickup": {"position": 0.45},
        "damping": {"t60": "0.4 s"},
        "render": {**_FAST, "max_modes": 12},
    },
    {
        "name": "fz-rod",
        "resonator": {"type": "bar", "material": "steel", "length": "120 mm", "diameter": "4 mm",
                      "supports": "clamped-free", "theory": "euler-bernoulli"},
        "excitation": {"type": "impulse", "position": 0.9},
        "damping": {"t60": "0.3 s", "release_t60": None},
        "render": {**_FAST, "bit_depth": 32, "peak": "sample"},
    },
    {
        "name": "fz-shaped-bar",
        "resonator": {"type": "bar", "material": "rosewood", "length": "300 mm", "width": "40 mm",
                      "profile": ["16 mm", "12 mm", "9 mm", "12 mm", "16 mm"], "shear_modulus": "1.6 GPa"},
        "excitation": {"type": "strike", "position": 0.5},
        "render": {**_FAST, "max_modes": 6},
    },
    {
        "name": "fz-membrane",
        "resonator": {"type": "membrane", "shape": "circle", "radius": "230 mm", "areal_density": "0.30 kg/m^2",
                      "pitch": "D3"},
        "excitation": {"type": "strike", "position": {"radius": 0.62, "angle": "0 deg"}, "contact_time": "3 ms"},
        "pickup": {"position": {"radius": 0.35, "angle": "40 deg"}},
        "damping": {"t60": "0.4 s", "t60_high": "0.12 s", "high_frequency": "2 kHz"},
        "render": {**_FAST, "max_modes": 24},
    },
    {
        "name": "fz-panel",
        "resonator": {"type": "membrane", "shape": "rectangle", "width": "300 mm", "height": "200 mm",
                      "tension": "2 kN/m", "material": "aluminium-6061", "thickness": "0.05 mm"},
        "excitation": {"type": "strike", "position": [0.3, 0.4]},
        "pickup": {"position": [0.7, 0.2], "measures": "acceleration"},
        "render": {**_FAST, "max_modes": 16},
    },
    {
        "name": "fz-plate",
        "resonator": {"type": "plate", "shape": "circle", "edges": "free", "radius": "200 mm", "pitch": "C3",
                      "material": "aluminium-6061"},
        "excitation": {"type": "strike", "position": {"radius": 0.9, "angle": 0}, "contact_time": "2 ms"},
        "pickup": {"position": {"radius": 0.55, "angle": "70 deg"}},
        "damping": {"t60": "0.5 s"},
        "render": {**_FAST, "max_modes": 16},
    },
    {
        "name": "fz-brass-panel",
        "resonator": {"type": "plate", "shape": "rectangle", "edges": "pinned", "width": "300 mm",
                      "height": "200 mm", "thickness": "2 mm", "material": "brass"},
        "excitation": {"type": "strike", "position": [0.31, 0.27]},
        "render": {**_FAST, "max_modes": 16},
    },
    {
        "name": "fz-pipe",
        "resonator": {"type": "air-column", "ends": "closed-open", "radius": "7 mm", "pitch": "A4",
                      "temperature": "28 degC"},
        "excitation": {"type": "strike", "position": 0.93, "contact_time": "0.6 ms"},
        "pickup": {"position": 0.0},
        "damping": {"t60": "0.3 s", "t60_high": "0.12 s", "high_frequency": "4 kHz"},
        "render": {**_FAST, "max_modes": 12},
    },
    {
        "name": "fz-conduit",
        "resonator": {"type": "air-column", "ends": "open-open", "length": "300 mm", "radius": "10 mm"},
        "excitation": {"type": "pluck", "position": 0.3},
        "render": _FAST,
    },
    {
        "name": "fz-bell",
        "resonator": {"type": "partials", "pitch": "G4", "ratios": [0.5011, 1.0, 1.1934, 1.4987, 2.0031],
                      "t60": [0.5, 0.4, 0.3, 0.2, 0.2], "levels_db": [-8, -3, 0, -14, -2]},
        "excitation": {"type": "strike"},
        "damping": {"t60": "0.5 s"},
        "render": _FAST,
    },
    {
        "name": "fz-glass",
        "resonator": {"type": "partials", "fundamental": "220 Hz", "ratios": [1, 2.76, 5.4]},
        "excitation": {"type": "impulse", "strength": 0.1},
        "damping": {"t60": 0.4, "t60_high": 0.1, "high_frequency": "1 kHz"},
        "render": {**_FAST, "bit_depth": 24, "peak_db": None},
    },
]

# ----------------------------------------------------------------------------- values

_NAN, _INF = float("nan"), float("inf")
_NUMBERS = [0, -0.0, -1, 1, 2, 0.5, 1.5, 1e-45, 5e-324, -1e-300, 1e-9, 1e9, 1e308, -1e308, 1.7976931348623157e308,
            2**31, 2**53 + 1, 2**63, 2**64 + 1, 10**30, -10**30, _NAN, _INF, -_INF]
_STRINGS = [
    "12 mm", "1e-45", "-3 Hz", "1e-45 m", "0 m", "-0 mm", "1e308 m", "1e999", "-1e999 Hz", "nan", "NaN Hz", "inf",
    "-inf s", ".inf", ".nan", "12 parsecs", "mm", "12 mm mm", "12mm", " 12 mm ", "12 MM", "1,5 mm", "1_000 m", "0x10",
    "1/2", "\u00bd", "\uff21\uff14", "A4", "C#3", "Bb1", "C-1", "G9", "H2", "A#-1", "E#4", "Cb4", "A4 Hz", "440",
    "440 Hz", "44.1 kHz", "1 MHz", "2 MHz", "800 ms", "4 s", "3 kg", "2 kN", "5 N/m", "2 GPa", "0 Pa", "1e20 Pa",
    "7800 kg/m^3", "1.2 g/cm^3", "0.3 kg/m^2", "30 deg", "2 rad", "1e300 rad", "20 degC", "-300 degC", "1e9 degC",
    "-3 dB", "inf dB", "auto", "Auto", "true", "sample", "null", "~", "", " ", "\t", "\n", "\u00e9", "\U0001f4a5",
    "%s%n", "{}", "[]", "- x", "a: b", "#", "&anchor", "x" * 300, "pluck", "strike", "impulse", "velocity",
    "displacement", "free-free", "pinned", "clamped", "circle", "rectangle", "open-open", "music-wire", "nylon",
]
_KEYS = [
    "type", "material", "length", "diameter", "pitch", "tension", "ends", "width", "thickness", "height", "radius",
    "shape", "edges", "supports", "theory", "shear_modulus", "profile", "areal_density", "temperature",
    "fundamental", "ratios", "t60", "levels_db", "position", "contact_time", "release_time", "strength",
    "measures", "t60_high", "high_frequency", "release_t60", "duration", "sample_rate", "bit_depth", "peak_db",
    "peak", "max_modes", "name", "resonator", "excitation", "pickup", "damping", "render", "range", "patch", "vary",
    "tuning", "courses", "density", "youngs_modulus", "poisson_ratio", "tensile_strength", "angle", "Type",
    "lenght", "tempreature", "renders", "", " ", "x" * 100, "\u00e9", 0, 1, -1, 2.5, True, None,
]
_SCALARS = st.one_of(
    st.sampled_from(_NUMBERS), st.sampled_from(_STRINGS), st.none(), st.booleans(), st.integers(),
    st.floats(), st.text(max_size=12),
)
_ANY_KEY = st.one_of(st.sampled_from(_KEYS), st.text(max_size=8), st.integers(-3, 20))
_VALUES = st.recursive(
    _SCALARS,
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(_ANY_KEY, inner, max_size=3),
    max_leaves=6,
)
_SHAPES = [[], {}, [0.5], [0.5, 0.5], [0.5, 0.5, 0.5], {"radius": 0.5}, {"angle": 10},
           {"radius": 1.5, "angle": 10}, {"radius": -0.1, "angle": "1e300 deg"}, {"x": 1}, [[0.5], 0.5]]

# Cheap choices for the keys that set how much work a render is (a long render is not a bug).
_CHEAP = {
    "duration": [0, -1, 1e-45, 5e-324, "1e-45", "1e-45 s", "0.5 ms", "0.999 ms", "1 ms", "0.05 s", "50 ms", 0.05,
                 "0.05", "auto", "AUTO", _NAN, _INF, -_INF, "inf s", "nan s", 1e7, "1e7 s", 1e308, "1e308 s",
                 10**30, None, "", "50 mm", "-3 Hz", [0.05], {"s": 1}, True, "0.05 s s"],
    "sample_rate": [0, -1, 999, 1000, 1000.5, 8000, "8 kHz", "8000 Hz", "8000", 8000.0, "8000.5 Hz", 44100,
                    "44.1 kHz", 768000, 768001, "768 kHz", "1 MHz", _NAN, _INF, 1e308, None, "", "fast", [8000],
                    True, 2**64, "8 s"],
    "max_modes": [0, -1, 1, 2, 3, 200, 201, 200001, "auto", "AUTO", 10**9, 2.5, 3.0, "12", "12 modes", _NAN, _INF, None, True,
                  [], "max", 2**64],
    "notes": [[], ["A2"], ["A2", "A2"], ["A2", 45], [21, 108], ["C-1"], [0], [127], [128], [-1], ["H2"], "A2", 45,
              None, _NAN, {}, [None], [[45]], [{"from": "A2"}], ["A2 Hz"], ["110 Hz"], [45.5], [True],
              {"from": "A2", "to": "A2"}, {"from": "B2", "to": "A2"}, {"from": "A2", "to": "B2", "step": 2},
              {"from": "A2", "to": "C8", "step": 1000}, {"from": "A2", "to": "A3", "step": 0},
              {"from": "A2", "to": "A3", "step": -1}, {"from": "A2", "to": "A3", "step": 1.5},
              {"from": "A2"}, {"to": "A2"}, {"from": 45, "to": 46, "by": 1}, {"from": None, "to": "A2"},
              {"from": "C-1", "to": "C-1"}, {"from": "G9", "to": "G9"}, {"from": "A2", "to": "A2", "step": 10**30}],
    "velocities": [[], [100], [1], [127], [0], [128], [-1], [100, 100], [1, 127], ["loud"], [1.5], [_NAN], 100,
                   None, {}, [None], [True], ["100"], [[100]], [10**30]],
    "round_robin": [0, -1, 1, 2, 3, 99, 100, 10**9, 2**64, 1.5, "2", _NAN, _INF, None, True, [], {}, "two"],
}
_CHEAP_PATHS = {
    ("render", "duration"): "duration", ("render", "sample_rate"): "sample_rate",
    ("render", "max_modes"): "max_modes", ("notes",): "notes", ("velocities",): "velocities",
    ("round_robin",): "round_robin",
}


def _value_for(path):
    """The strategy of values to put at `path` (tuple of keys)."""
    cheap = _CHEAP_PATHS.get(tuple(path))
    if cheap is not None:
        return st.sampled_from(_CHEAP[cheap])
    if path and path[-1] in ("position", "ratios", "t60", "levels_db", "profile"):
        return st.one_of(_VALUES, st.sampled_from(_SHAPES))
    if path and path[-1] in ("render",):  # a render section of any kind still has a cheap duration
        return st.one_of(_SCALARS, st.sampled_from([{}, {"duration": "0.05 s"}, {"sample_rate": 8000},
                                                    {"duration": "auto", "sample_rate": 1000}, []]))
    return _VALUES


# ----------------------------------------------------------------------------- tree mutation


def _paths(tree, prefix=()):
    """Every path (tuple of keys or indices) inside `tree`, the root left out."""
    items = tree.items() if isinstance(tree, dict) else enumerate(tree) if isinstance(tree, list) else ()
    for key, value in list(items):
        yield prefix + (key,)
        yield from _paths(value, prefix + (key,))


def _mappings(tree, prefix=()):
    """Every path of a mapping inside `tree`, the root included."""
    if isinstance(tree, dict):
        yield prefix
    items = tree.items() if isinstance(tree, dict) else enumerate(tree) if isinstance(tree, list) else ()
    for key, value in list(items):
        yield from _mappings(value, prefix + (key,))


def _at(tree, path):
    for key in path:
        tree = tree[key]
    return tree


_FACTORS = [0.0, -1.0, 1e-9, 1e-6, 1e-3, 0.01, 0.1, 0.5, 0.999, 1.001, 2.0, 10.0, 100.0, 1e3, 1e6, 1e9]
_NUMBER_PREFIX = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)(.*)$", re.S)


def _scalable(value):
    if isinstance(value, bool):
        return False
    return isinstance(value, (int, float)) or (isinstance(value, str) and _NUMBER_PREFIX.match(value) is not None)


def _scale(value, factor):
    """`value` (a number, or a number with a unit) times `factor`, in the same form."""
    if isinstance(value, str):
        number, rest = _NUMBER_PREFIX.match(value).groups()
        return f"{float(number) * factor:.6g}{rest}"
    scaled = value * factor
    return int(scaled) if isinstance(value, int) and float(scaled).is_integer() and abs(scaled) < 2**63 else scaled


#: Values a maker could write for some keys: swapping them keeps a patch valid more often than not.
_CHOICES = {
    "ends": ["pinned", "clamped", "open-open", "closed-open"],
    "supports": ["free-free", "clamped-free", "pinned-pinned", "clamped-clamped"],
    "theory": ["timoshenko", "euler-bernoulli"],
    "edges": ["clamped", "free", "pinned"],
    "shape": ["circle", "rectangle"],
    "measures": ["displacement", "velocity", "acceleration"],
    "material": ["music-wire", "stainless-steel", "brass", "phosphor-bronze", "nylon", "steel", "aluminium-6061",
                 "copper", "soda-lime-glass", "borosilicate-glass", "maple", "rosewood"],
    "bit_depth": [16, 24, 32],
    "peak": ["true", "sample"],
    "peak_db": [None, 0, -0.0, -120, -1, "-60 dB"],
    "release_t60": [None, "1 ms", "3600 s"],
    "pitch": ["A0", "C8", "A4", "C-1", "G9", "8 Hz", "20 Hz", "3999 Hz", "4001 Hz", "20 kHz", "1 MHz", "1e-3 Hz"],
    "position": [0, 1, 0.5, 1e-9, 0.999999, [0, 0], [1, 1], [0.5, 0.5], {"radius": 0, "angle": 0},
                 {"radius": 1, "angle": "360 deg"}, {"radius": 0.5, "angle": "-7 rad"}],
    "strength": [1e-300, 1e-9, 1e6],
    "contact_time": [0, "1 ms", "1 s", "1e-9 s"],
    "release_time": [0, "0.1 s", "1e-9 s"],
    "temperature": ["-273 degC", "-50 degC", "1000 degC", 0],
}
_ALL_OPS = ("scale", "scale", "scale", "choose", "drop", "replace", "replace", "add", "type", "graft")
_PHYSICS_OPS = ("scale", "scale", "choose", "choose", "drop")


@st.composite
def mutated(draw, bases, *, max_mutations=4, ops=_ALL_OPS):
    """One of `bases` (deep-copied) with up to `max_mutations` random changes drawn from `ops`."""
    tree = copy.deepcopy(draw(st.sampled_from(bases)))
    for _ in range(draw(st.sampled_from([n for n in (0, 1, 1, 1, 2, 2, 3, 4) if n <= max_mutations]))):
        op = draw(st.sampled_from(ops))
        paths = list(_paths(tree))
        if op == "choose":
            keys = [p for p in paths if p[-1] in _CHOICES]
            if keys:
                path = draw(st.sampled_from(keys))
                _at(tree, path[:-1])[path[-1]] = _fresh(draw, st.sampled_from(_CHOICES[path[-1]]))
            continue
        if op == "scale":  # a number moved by orders of magnitude, its unit kept: the physics at its limits
            numeric = [p for p in paths if _scalable(_at(tree, p)) and tuple(p) not in _CHEAP_PATHS]
            if numeric:
                path = draw(st.sampled_from(numeric))
                factor = draw(st.sampled_from(_FACTORS))
                _at(tree, path[:-1])[path[-1]] = _scale(_at(tree, path), factor)
            continue
        if op == "drop" and paths:
            path = draw(st.sampled_from(paths))
            parent = _at(tree, path[:-1])
            del parent[path[-1]]
        elif op == "replace" and paths:
            path = draw(st.sampled_from(paths))
            _at(tree, path[:-1])[path[-1]] = _fresh(draw, _value_for(path))
        elif op == "add":
            path = draw(st.sampled_from(list(_mappings(tree))))
            key = draw(_ANY_KEY)
            _at(tree, path)[key] = _fresh(draw, _value_for(path + (key,)))
        elif op == "type":
            types = [p for p in _paths(tree) if p[-1] in ("type", "measures", "shape", "edges", "ends", "supports",
                                                           "theory", "material", "peak", "bit_depth")]
            if types:
                path = draw(st.sampled_from(types))
                _at(tree, path[:-1])[path[-1]] = _fresh(draw, st.one_of(st.sampled_from(
                    ["string", "bar", "membrane", "plate", "air-column", "partials", "String", "strings", "air_column",
                     "partial", "pluck", "strike", "impulse", "velocity", "acceleration", "free", "steel", "", 1,
                     None, True, [], {}, ["string"], {"type": "string"}, 16, 24, 32, 8, "24", 24.0, "true", False]),
                    _SCALARS))
        elif op == "graft":  # a whole section of another base: positions and keys of another resonator
            other = draw(st.sampled_from(bases))
            key = draw(st.sampled_from(sorted(other, key=str)))
            tree[key] = copy.deepcopy(other[key])
    return tree


def _fresh(draw, strategy):
    """A deep copy of a drawn value: the lists of sample values are shared and must never be changed."""
    return copy.deepcopy(draw(strategy))


def _dump(tree, flow):
    return yaml.safe_dump(tree, default_flow_style=flow, allow_unicode=True, sort_keys=False, width=10_000)


_TEXT_EDITS = [
    "raw_value", "raw_value", "truncate", "insert", "replace_char", "duplicate_line", "tab", "bom", "doc2", "tag",
    "alias", "merge", "crlf", "nul", "flow_garbage", "deep",
]


@st.composite
def yaml_bytes(draw, bases, **kwargs):
    """YAML of a mutated tree, sometimes with its text corrupted too."""
    tree = draw(mutated(bases, **kwargs))
    text = _dump(tree, draw(st.booleans()))
    if draw(st.integers(0, 5)) == 0:
        edit = draw(st.sampled_from(_TEXT_EDITS))
        at = draw(st.integers(0, len(text)))
        if edit == "truncate":
            text = text[:at]
        elif edit == "insert":
            inserted = draw(st.sampled_from([":", "-", "{", "}", "[", "]", "'", '"', "#", "&a", "*a", "!", "|", ">",
                                             "%", "@", "`", "\t", "\n  ", "\n- ", "?", ",", "\\"]))
            text = text[:at] + inserted + text[at:]
        elif edit == "replace_char" and text:
            at = min(at, len(text) - 1)
            text = text[:at] + draw(st.characters()) + text[at + 1:]
        elif edit == "duplicate_line":
            lines = text.splitlines(keepends=True)
            if lines:
                i = draw(st.integers(0, len(lines) - 1))
                lines.insert(i, lines[i])
                text = "".join(lines)
        elif edit == "tab":
            text = text.replace("  ", "\t", 1)
        elif edit == "bom":
            text = "\ufeff" + text
        elif edit == "doc2":
            text = text + "\n---\nname: second\n"
        elif edit == "tag":
            text = draw(st.sampled_from(["!!python/object/apply:os.getcwd []\n", "name: !!binary aGVsbG8=\n",
                                         "name: !custom x\n", "!!set {a, b}\n", "name: !!float x\n",
                                         "name: !!timestamp 2001-12-14\n"])) + text
        elif edit == "alias":
            text = "a: &x [1, 2]\n" + text + "\nb: *x\nc: *undefined\n"
        elif edit == "merge":
            text = text + "\nextra: &e {t60: 1 s}\nmore:\n  <<: *e\n"
        elif edit == "crlf":
            text = text.replace("\n", "\r\n")
        elif edit == "nul":
            text = text[:at] + "\x00" + text[at:]
        elif edit == "flow_garbage":
            text = "{" + text
        elif edit == "raw_value":  # a plain scalar YAML 1.1 reads as another type, or a tag, in place of a value
            lines = text.splitlines(keepends=True)
            valued = [i for i, line in enumerate(lines) if ": " in line and not line.rstrip().endswith(":")]
            if valued:
                i = draw(st.sampled_from(valued))
                head = lines[i].split(": ", 1)[0]
                lines[i] = head + ": " + draw(st.sampled_from(_RAW_SCALARS)) + "\n"
                text = "".join(lines)
        elif edit == "deep":
            text = text + "\ndeep: " + "[" * 200 + "]" * 200 + "\n"
    return text.encode("utf-8", "surrogatepass")


_RAW_SCALARS = [
    "2001-01-01", "2001-12-14t21:59:43.10-05:00", "1:30", "1:30:00.5", "0b101", "0o17", "017", "0x1F", "1_000",
    "yes", "no", "on", "off", "Y", "=", ".NaN", "-.inf", "~", "!!binary aGVsbG8=", "!!set {a}", "!!omap [a: 1]",
    "!!pairs [a: 1]", "!!str 5", "!!null ''", "!!int 5", "!!float 5", "!!bool true", "!custom x", "!<tag:x> y",
    "|\n  block", ">-\n  folded", "&anchor 5", "*undefined", "'quoted", "\"\\ud800\"", "\"\\x00\"", "\"\\e[31m\"",
    "\"\\u2028\"", "\"\\r\"", "[a, {b: [c]}]", "{a: b, a: c}", "- x",
]
_RAW = st.one_of(
    st.binary(max_size=200),
    st.text(max_size=200).map(lambda t: t.encode("utf-8", "surrogatepass")),
    st.sampled_from([b"", b"\n", b"---\n", b"~\n", b"null", b"42", b"- a\n- b\n", b"[]", b"{}", b"name: x\n",
                     b"\xff\xfe\x00n\x00a\x00m\x00e\x00", b"\xef\xbb\xbfname: x\n", b"a: [\n", b"\x00",
                     b"resonator: {type: string}\n", b"name: x\nname: y\n", b"key: 'unterminated\n",
                     b"a: &a [*a]\n", b"? [a, b]\n: c\n", b"{[1]: 2}\n", b"!!python/name:os.system\n",
                     b"%YAML 1.1\n---\nname: x\n", b"%YAML 9.9\n---\nname: x\n", b"\t- x\n",
                     ("\u2028name: x\n").encode(), b"\x1b[31mred\n"]),
)


# ----------------------------------------------------------------------------- 1. patches


def _patch_inputs():
    return st.one_of(*[yaml_bytes(BASE_PATCHES)] * 4, *[yaml_bytes(BASE_PATCHES, ops=_PHYSICS_OPS)] * 3, _RAW)


_MODES_FLAGS = st.sampled_from([[], [], ["--json"], ["--json"], ["--csv", "table.csv"],
                                ["--json", "--csv", "table.csv"], ["--rows", "1"]])


def _strict_json(text):
    """json.loads that refuses NaN and Infinity (not JSON)."""
    def refuse(constant):
        raise ValueError(f"{constant} is not JSON")
    return json.loads(text, parse_constant=refuse)


def _check_json(outcome, data):
    """`modes --json` printed one strict JSON object."""
    try:
        _strict_json(outcome.out)
    except ValueError as error:
        assume(_known_bug(outcome, json_error=str(error)) is None)
        pytest.fail(f"synth {' '.join(outcome.argv)}: stdout is not one JSON object ({error})\n"
                    f"inputs:\n--- patch.yaml:\n{data.decode('utf-8', 'replace')}", pytrace=False)


@_scaled(1.0)
@given(data=_patch_inputs(), flags=_MODES_FLAGS)
def test_modes_on_fuzzed_patches(capsys, data, flags):
    with _workspace() as (root, work):
        (work / "patch.yaml").write_bytes(data)
        outcome = _run(capsys, root, "modes", "patch.yaml", *flags)
        _check(outcome, {"patch.yaml": data.decode("utf-8", "replace")},
               outputs=["a/b/work/table.csv"] if "--csv" in flags else ())
        if outcome.status == 0 and "--json" in flags:
            _check_json(outcome, data)


def _option(name, values):
    return st.sampled_from(values).map(lambda value: [name, str(value)])


# Mostly none; now and then a command-line override or another output name (cheap values only).
_RENDER_OPTIONS = st.one_of(
    *[st.just([])] * 6,
    _option("--pitch", _CHOICES["pitch"] + ["", "H2", "-3 Hz", "nan Hz", "1e999"]),
    _option("--duration", [0, "1 ms", "0.05 s", "auto", "nan", "-1", "1e9 s", "50 mm"]),
    _option("--sample-rate", [1000, 8000, "8 kHz", 768000, 999, 8000.5, "nan", "0", "1e9"]),
    _option("--max-modes", [1, 3, 0, -1, 200001, "auto", "2.5", "x"]),
    _option("--bit-depth", [16, 24, 32, 8, "24.0", "x"]),
)
_RENDER_OUTPUTS = st.sampled_from(["out.wav"] * 20 + ["out.flac", "sub/out.wav", "out.WAV", "out", "out.mp3",
                                                      "missing/out.wav", "patch.yaml", ".", "sub", "out.wav/",
                                                      "sub/../out.wav", "./out.wav", " out.wav"])


@_scaled(1.0)
@given(data=_patch_inputs(), options=_RENDER_OPTIONS, output=_RENDER_OUTPUTS)
def test_render_on_fuzzed_patches(capsys, data, options, output):
    with _workspace() as (root, work):
        (work / "patch.yaml").write_bytes(data)
        (work / "sub").mkdir()
        outcome = _run(capsys, root, "render", "patch.yaml", "-o", output, "--quiet", *options)
        written = os.path.normpath(os.path.join("a/b/work", output))
        _check(outcome, {"patch.yaml": data.decode("utf-8", "replace"), "options": " ".join(options + ["-o", output])},
               outputs=[written])


def test_base_patches_are_valid(capsys):
    """Every base patch renders (else the fuzz would only ever test refusals)."""
    for base in BASE_PATCHES:
        data = _dump(base, False).encode()
        with _workspace() as (root, work):
            (work / "patch.yaml").write_bytes(data)
            outcome = _run(capsys, root, "render", "patch.yaml", "-o", "out.wav", "--quiet")
            assert outcome.status == 0 and not _problems(outcome, ["a/b/work/out.wav"]), (base["name"], outcome.err)
    for base in BASE_INSTRUMENTS:
        with _workspace() as (root, work):
            (work / "inst.yaml").write_text(_dump(base, False), encoding="utf-8")
            for name, patch in INSTRUMENT_PATCHES.items():
                (work / name).write_text(_dump(patch, False), encoding="utf-8")
            outcome = _run(capsys, root, "render", "inst.yaml", "--pitch", "D3", "-o", "out.wav", "--quiet")
            assert outcome.status == 0 and not _problems(outcome, ["a/b/work/out.wav"]), (base["name"], outcome.err)


# ----------------------------------------------------------------------------- 1b. instruments
# An instrument file is accepted wherever a patch is (README "Instruments"); `modes` and `render` take
# one of its keys with --pitch.  (No `tune:` here: an undercut fit takes seconds per key.)

INSTRUMENT_PATCHES = {
    "string.yaml": {
        "name": "fz-inst-string",
        "resonator": {"type": "string", "material": "music-wire", "length": "650 mm", "diameter": "0.45 mm",
                      "pitch": "A2", "ends": "pinned"},
        "excitation": {"type": "strike", "position": 0.12, "contact_time": "0.8 ms"},
        "pickup": {"position": 0.9},
        "damping": {"t60": "0.5 s", "t60_high": "0.1 s", "high_frequency": "2 kHz", "release_t60": "0.05 s"},
        "render": {**_FAST, "max_modes": 32},
    },
    "bar.yaml": {
        "name": "fz-inst-bar",
        "resonator": {"type": "bar", "material": "rosewood", "width": "56 mm", "thickness": "22 mm", "pitch": "C4",
                      "supports": "free-free"},
        "excitation": {"type": "strike", "position": 0.42, "contact_time": "1.5 ms"},
        "pickup": {"position": 0.3},
        "damping": {"t60": "0.5 s", "release_t60": None},
        "render": {**_FAST, "max_modes": 12},
    },
}
BASE_INSTRUMENTS = [
    {"name": "fz-harp", "patch": "string.yaml", "range": {"from": "C3", "to": "E3"},
     "tuning": {"a4": "440 Hz", "stretch": "octaves"},
     "vary": {"resonator.length": {"C3": "0.6 m", "E3": "0.5 m"},
              "resonator.diameter": {"C3": "0.9 mm", "E3": "0.8 mm"},
              "resonator.material": {"C3": "nylon", "D3": "phosphor-bronze"},
              "damping.t60": {"C3": "0.5 s", "E3": "0.3 s"}},
     "courses": {"strings": 2, "detune_cents": [0, 0.7]}, "bridge": {"conductance": 4.6e-3, "susceptance": 0},
     "polarisations": True},
    {"name": "fz-dulcimer", "patch": "string.yaml", "range": {"from": "C3", "to": "E3"}, "solve": "resonator.tension",
     "vary": {"resonator.length": {"C3": "0.7 m", "E3": "0.55 m"}, "excitation.position": {"C3": 0.1, "E3": 0.15}},
     "courses": {"strings": 3, "detune_cents": [0, 0.5, -0.5]},
     "polarisations": {"conductance": 4.6e-4, "susceptance": 0, "split_cents": 0.5, "angle": "30 deg"}},
    {"name": "fz-marimba", "patch": "bar.yaml", "range": {"from": "C3", "to": "E3"},
     "vary": {"resonator.width": {"C3": "56 mm", "E3": "50 mm"}, "damping.t60": {"C3": "0.5 s", "E3": "0.3 s"}},
     "tubes": {"radius": {"C3": "30 mm", "E3": "25 mm"}, "coupling": 0.003, "level": 1, "temperature": 20}},
]
_KEYS_TO_PLAY = st.sampled_from(["C3", "D3", "E3", "C#3", "Db3", "B2", "F3", "48", "130.81 Hz", "", "C", "X9", "C-1"])


@_scaled(0.4)
@given(instrument=st.one_of(*[yaml_bytes(BASE_INSTRUMENTS)] * 2, yaml_bytes(BASE_INSTRUMENTS, ops=_PHYSICS_OPS)),
       patch=st.one_of(st.none(), yaml_bytes([INSTRUMENT_PATCHES["string.yaml"]], max_mutations=1, ops=_PHYSICS_OPS),
                       yaml_bytes([INSTRUMENT_PATCHES["bar.yaml"]], max_mutations=1, ops=_PHYSICS_OPS)),
       key=_KEYS_TO_PLAY, render=st.booleans())
def test_instruments_on_fuzzed_files(capsys, instrument, patch, key, render):
    with _workspace() as (root, work):
        (work / "inst.yaml").write_bytes(instrument)
        for name, base in INSTRUMENT_PATCHES.items():
            (work / name).write_text(_dump(base, False), encoding="utf-8")
        if patch is not None:  # one of the base patches mutated too
            (work / ("bar.yaml" if b"fz-inst-bar" in patch else "string.yaml")).write_bytes(patch)
        command = ["render", "inst.yaml", "--pitch", key, "-o", "out.wav", "--quiet"] if render else \
            ["modes", "inst.yaml", "--pitch", key]
        outcome = _run(capsys, root, *command)
        inputs = {"inst.yaml": instrument.decode("utf-8", "replace")}
        if patch is not None:
            inputs["patch"] = patch.decode("utf-8", "replace")
        _check(outcome, inputs, outputs=["a/b/work/out.wav"] if render else ())


# ----------------------------------------------------------------------------- 2. batch specs

BATCH_PATCH = BASE_PATCHES[0]
BASE_SPECS = [
    {"patch": "base.yaml", "name": "fz-lib", "output": "lib", "notes": ["A2"], "velocities": [100], "round_robin": 1},
    {"patch": "base.yaml", "notes": {"from": "A2", "to": "B2", "step": 2}, "velocities": [40, 120],
     "variation": {"position": 0.02, "detune_cents": 2, "seed": 11}},
    {"patch": "base.yaml", "name": "fz_lib2", "output": "sub/lib", "notes": [45, "C3"], "round_robin": 2,
     "variation": {"position": 0.1, "detune_cents": 100, "seed": 0}},
    {"patch": "inst.yaml", "velocities": [64], "output": "keys"},  # an instrument: every key of its range
]
_SPEC_VALUES = {
    "patch": ["base.yaml", "inst.yaml", "missing.yaml", "", " ", ".", "..", "sub", "spec.yaml", "bad.yaml", "song.mid",
              "./base.yaml", "../work/base.yaml", "base.yaml/", "BASE.yaml", "base.yaml\x00", "x" * 300 + ".yaml",
              "sub/" + "x" * 300 + "/base.yaml", None, 12, [], {},
              ["base.yaml"], {"patch": "base.yaml"}],
    "output": ["lib", "sub/lib", ".", "", " ", "..", "base.yaml", "spec.yaml", "lib/../lib2", "out.wav", "a b",
               "lib\x00", "\u00e9", "x" * 300, None, 12, [], {}, True, "bad.yaml/lib"],
    "name": ["fz", "a", "", " ", "-x", "_x", "x-", "../../x", "a/b", "a\\b", "x" * 300, "\u00e9t\u00e9", "CON",
             ".hidden", "name with space", "x.y", "x_045_A2", None, 12, 1.5, [], {}, True],
}


def _spec_value_for(path):
    if len(path) == 1 and path[0] in _SPEC_VALUES:
        return st.sampled_from(_SPEC_VALUES[path[0]])
    return _value_for(path)


@st.composite
def spec_bytes(draw):
    tree = copy.deepcopy(draw(st.sampled_from(BASE_SPECS)))
    for _ in range(draw(st.integers(0, 3))):
        op = draw(st.sampled_from(["drop", "replace", "replace", "add"]))
        paths = list(_paths(tree))
        if op == "drop" and paths:
            path = draw(st.sampled_from(paths))
            del _at(tree, path[:-1])[path[-1]]
        elif op == "replace" and paths:
            path = draw(st.sampled_from(paths))
            _at(tree, path[:-1])[path[-1]] = _fresh(draw, _spec_value_for(path))
        elif op == "add":
            path = draw(st.sampled_from(list(_mappings(tree))))
            key = draw(st.one_of(st.sampled_from(["notes", "velocities", "round_robin", "variation", "name", "output",
                                                  "patch", "seed", "position", "detune_cents", "Notes", "note",
                                                  "render", "extra"]), _ANY_KEY))
            _at(tree, path)[key] = _fresh(draw, _spec_value_for(path + (key,)))
    text = _dump(tree, draw(st.booleans()))
    if draw(st.integers(0, 5)) == 0:
        at = draw(st.integers(0, len(text)))
        text = text[:at] + draw(st.sampled_from(["", ":", "{", "- ", "\t", "&a ", "*a", "\n"]))
    return text.encode("utf-8", "surrogatepass")


_BATCH_INPUTS = st.one_of(spec_bytes(), spec_bytes(), spec_bytes(), _RAW)
# A second patch for the batch: sometimes the fuzzed patch itself, to vary what each job meets.
_BATCH_PATCHES = st.one_of(st.just(_dump(BATCH_PATCH, False).encode()),
                           yaml_bytes([BATCH_PATCH], max_mutations=2))


_BATCH_FLAGS = st.sampled_from([[], [], [], ["--force"], ["--prune"], ["-o", "outdir"], ["-o", "base.yaml"],
                                 ["-o", "."], ["--force", "--prune"]])


@_scaled(0.5)
@given(spec=_BATCH_INPUTS, patch=_BATCH_PATCHES, flags=_BATCH_FLAGS, first=st.sampled_from([None, None, 0, 1, 2, 3]))
def test_batch_on_fuzzed_specs(capsys, spec, patch, flags, first):
    """A fuzzed spec, run in a fresh folder or after a base spec already rendered its library there
    (`first`: which one), so resumed runs, stale files and --prune meet fuzzed specs too."""
    with _workspace() as (root, work):
        (work / "base.yaml").write_bytes(patch if first is None else _dump(BATCH_PATCH, False).encode())
        (work / "bad.yaml").write_text("name: [\n", encoding="utf-8")
        (work / "string.yaml").write_text(_dump(INSTRUMENT_PATCHES["string.yaml"], False), encoding="utf-8")
        (work / "inst.yaml").write_text(_dump(MAP_INSTRUMENTS["narrow.yaml"], False), encoding="utf-8")
        (work / "sub").mkdir()
        if first is not None:  # a library already on disk: the spec below may resume, re-render or prune it
            (work / "spec.yaml").write_text(_dump(BASE_SPECS[first], False), encoding="utf-8")
            earlier = _run(capsys, root, "batch", "spec.yaml", "--workers", "1")
            assert earlier.status == 0 and not _problems(earlier, batch=True), earlier.err
            (work / "base.yaml").write_bytes(patch)
        (work / "spec.yaml").write_bytes(spec)
        outcome = _run(capsys, root, "batch", "spec.yaml", "--workers", "1", *flags)
        inputs = {"spec.yaml": spec.decode("utf-8", "replace"), "base.yaml": patch.decode("utf-8", "replace"),
                  "flags": " ".join(flags), "run first": "nothing" if first is None else _dump(BASE_SPECS[first], True)}
        inputs_on_disk = ("spec.yaml", "base.yaml", "bad.yaml", "string.yaml", "inst.yaml")
        _check(outcome, inputs, batch=True, protected={f"a/b/work/{name}" for name in inputs_on_disk})
        if outcome.status == 0 and first is None:
            assert any(name.endswith(".wav") for name in set(outcome.after) - set(outcome.before)), outcome.out


# ----------------------------------------------------------------------------- MIDI files


def _song(notes, *, ticks_per_beat=96, fmt=1, tempo=500_000, extra=()):
    """Bytes of a small MIDI file: notes are (track, channel, key, velocity, start tick, length ticks)."""
    song = mido.MidiFile(type=fmt, ticks_per_beat=ticks_per_beat)
    tracks = sorted({n[0] for n in notes} | {0}) if fmt == 1 else [0]
    for t in tracks:
        events = []
        if t == 0:
            events.append((0, mido.MetaMessage("set_tempo", tempo=tempo)))
            events.extend(extra)
        if fmt == 1:
            events.append((0, mido.MetaMessage("track_name", name=["Conductor", "Lead", "Bass", "Pad"][t % 4])))
        for track, channel, key, velocity, start, length in notes:
            if fmt == 1 and track != t:
                continue
            events.append((start, mido.Message("note_on", channel=channel, note=key, velocity=velocity)))
            events.append((start + length, mido.Message("note_off", channel=channel, note=key, velocity=0)))
        events.sort(key=lambda e: (e[0], e[1].type != "set_tempo", e[1].type == "note_on"))
        track = mido.MidiTrack()
        now = 0
        for tick, message in events:
            track.append(message.copy(time=tick - now))
            now = tick
        song.tracks.append(track)
    buffer = io.BytesIO()
    song.save(file=buffer)
    return buffer.getvalue()


_MESSAGES = st.sampled_from([
    mido.Message("control_change", channel=0, control=64, value=127),
    mido.Message("control_change", channel=0, control=64, value=0),
    mido.Message("control_change", channel=0, control=10, value=0),
    mido.Message("control_change", channel=1, control=10, value=127),
    mido.Message("control_change", channel=0, control=101, value=0),
    mido.Message("control_change", channel=0, control=100, value=0),
    mido.Message("control_change", channel=0, control=6, value=127),
    mido.Message("control_change", channel=0, control=38, value=127),
    mido.Message("pitchwheel", channel=0, pitch=8191),
    mido.Message("pitchwheel", channel=0, pitch=-8192),
    mido.Message("program_change", channel=0, program=5),
    mido.Message("aftertouch", channel=0, value=50),
    mido.Message("polytouch", channel=0, note=60, value=50),
    mido.Message("sysex", data=[1, 2, 3]),
    mido.MetaMessage("set_tempo", tempo=1),
    mido.MetaMessage("set_tempo", tempo=16_777_215),
    mido.MetaMessage("set_tempo", tempo=250_000),
    mido.MetaMessage("time_signature", numerator=3, denominator=8),
    mido.MetaMessage("key_signature", key="C#m"),
    mido.MetaMessage("text", text="fuzz \u00e9"),
    mido.MetaMessage("marker", text=""),
    mido.MetaMessage("end_of_track"),
    mido.MetaMessage("sequencer_specific", data=[0, 1]),
])


@st.composite
def valid_songs(draw, *, channels=(0,)):
    """A small valid MIDI file (bytes) of 1-3 short notes, now and then with other events."""
    fmt = draw(st.sampled_from([0, 1]))
    n = draw(st.integers(1, 3))
    tpb = draw(st.sampled_from([96, 480, 1, 24, 32767]))
    notes = []
    for _ in range(n):
        key = draw(st.one_of(st.integers(40, 80), st.sampled_from([0, 1, 21, 108, 126, 127]), st.just(60)))
        notes.append((draw(st.integers(1, 3)), draw(st.sampled_from(channels)), key,
                      draw(st.one_of(st.integers(1, 127), st.just(0))),
                      draw(st.integers(0, 2)) * max(tpb // 8, 1), draw(st.integers(0, 2)) * max(tpb // 16, 1) + 1))
    extra = [(draw(st.integers(0, 2)) * max(tpb // 16, 1), m) for m in draw(st.lists(_MESSAGES, max_size=3))]
    return _song(notes, ticks_per_beat=tpb, fmt=fmt, tempo=draw(st.sampled_from([500_000, 250_000, 1_000_000])),
                 extra=extra)


def _chunks(data):
    """(offset of the length field, length) of every chunk of a well-formed SMF."""
    out, at = [], 0
    while at + 8 <= len(data):
        (length,) = struct.unpack(">I", data[at + 4:at + 8])
        out.append((at + 4, length))
        at += 8 + length
    return out


@st.composite
def corrupt_songs(draw, *, channels=(0,)):
    """A valid small MIDI file, then a few byte flips, insertions, deletions or truncation.

    Half the time the chunk lengths are fixed up after an insertion or deletion (the damage is inside
    a plausible structure); otherwise they are left as they are, or set to random values.
    """
    data = bytearray(draw(valid_songs(channels=channels)))
    for _ in range(draw(st.integers(1, 3))):
        op = draw(st.sampled_from(["flip", "set", "insert", "delete", "truncate", "length", "header", "junk_chunk",
                                   "prefix"]))
        fix = draw(st.booleans())
        chunks = _chunks(bytes(data))
        at = draw(st.integers(0, max(len(data) - 1, 0)))
        if op == "flip" and data:
            data[at] ^= draw(st.sampled_from([1, 0x80, 0xFF, 1 << draw(st.integers(0, 7))]))
        elif op == "set" and data:
            data[at] = draw(st.sampled_from([0x00, 0x7F, 0x80, 0x8F, 0x90, 0xB0, 0xC0, 0xE0, 0xF0, 0xF7, 0xFF]) |
                            st.integers(0, 255))
        elif op in ("insert", "delete"):
            at = max(at, 14)
            if op == "insert":
                blob = draw(st.one_of(st.binary(min_size=1, max_size=8), st.sampled_from(
                    [b"\x00\xff\x51\x03\x00\x00\x00", b"\x00\x90\x3c", b"\x8f\xff\xff\xff\x7f\x80\x3c\x00",
                     b"\x00\xf0\x85\x80\x80\x80\x00", b"\x00\xff\x2f\x00", b"\x00\xff\x01\xff\xff\xff\xff\x7f",
                     b"\x00\xff\x20\x01\x05", b"\x00\xc0", b"\x00\xff"])))
                data[at:at] = blob
                delta = len(blob)
            else:
                size = draw(st.integers(1, 6))
                del data[at:at + size]
                delta = -size
            if fix:
                for offset, length in chunks:
                    if offset + 4 <= at <= offset + 4 + length:
                        data[offset:offset + 4] = struct.pack(">I", min(max(length + delta, 0), 2**32 - 1))
        elif op == "truncate":
            data = data[:at]
        elif op == "length" and chunks:
            offset, length = draw(st.sampled_from(chunks))
            value = draw(st.sampled_from([0, 1, length - 1, length + 1, 2**31, 2**32 - 1]) | st.integers(0, 2**32 - 1))
            data[offset:offset + 4] = struct.pack(">I", min(max(value, 0), 2**32 - 1))
        elif op == "header" and len(data) >= 14:
            which = draw(st.sampled_from([8, 10, 12]))
            value = draw(st.sampled_from([0, 1, 2, 3, 0xFFFF, 0x7FFF, 0x8000, 0xE728, 0xE850, 0xE302, 0xE201,
                                          0xE700, 0x8001, 0xFF01]))
            data[which:which + 2] = struct.pack(">H", value)
        elif op == "junk_chunk":
            blob = draw(st.binary(max_size=8))
            data += draw(st.sampled_from([b"XFIH", b"MTrk", b"MThd", b"\x00\x00\x00\x00"])) + struct.pack(
                ">I", len(blob) if fix else draw(st.integers(0, 2**32 - 1))) + blob
        elif op == "prefix":
            data[0:0] = draw(st.sampled_from([b"RIFF\x00\x00\x00\x00RMIDdata\x00\x00\x00\x00", b"\x00", b"MThd"]))
    return bytes(data)


_SONG_INPUTS = st.one_of(valid_songs(), corrupt_songs(), corrupt_songs(), corrupt_songs(), st.binary(max_size=64))


def _vlq(data, at, end):
    value = 0
    for _ in range(4):
        if at >= end:
            raise ValueError
        byte = data[at]
        at += 1
        value = (value << 7) | (byte & 0x7F)
        if not byte & 0x80:
            return value, at
    raise ValueError


def _song_seconds(data):
    """A rough upper bound on how long `data` plays (s), by a tolerant scan; 0 if it is not an SMF.

    Used only to keep the fuzz quick: an hour-long song is legitimate work, not a bug.
    """
    if len(data) < 14 or data[:4] != b"MThd":
        return 0.0
    (division,) = struct.unpack(">H", data[12:14])
    at = 8 + struct.unpack(">I", data[4:8])[0]
    longest, slowest = 0, 500_000
    while at + 8 <= len(data):
        end = min(at + 8 + struct.unpack(">I", data[at + 4:at + 8])[0], len(data))
        is_track, at = data[at:at + 4] == b"MTrk", at + 8
        ticks, status = 0, 0
        while is_track and at < end:
            try:
                delta, at = _vlq(data, at, end)
            except ValueError:
                break
            ticks += delta
            if at >= end:
                break
            byte = data[at]
            if byte == 0xFF and at + 2 <= end:
                kind = data[at + 1]
                try:
                    length, body = _vlq(data, at + 2, end)
                except ValueError:
                    break
                if kind == 0x51 and length == 3 and body + 3 <= end:
                    slowest = max(slowest, int.from_bytes(data[body:body + 3], "big"))
                at = body + length
            elif byte in (0xF0, 0xF7):
                try:
                    length, body = _vlq(data, at + 1, end)
                except ValueError:
                    break
                at = body + length
            else:
                if byte & 0x80:
                    status, at = byte, at + 1
                at += {0xC: 1, 0xD: 1}.get(status >> 4, 2)
        longest = max(longest, ticks)
        at = max(at, end)
    if division & 0x8000:
        fps = 256 - (division >> 8)
        return longest / max(fps * (division & 0xFF), 1)
    return longest * max(slowest, 500_000, 16_777_215 if b"\xff\x51\x03" in data else 0) / max(division, 1) / 1e6


#: Songs longer than this are kept out (the render is long, not wrong); far longer ones, that synth
#: must refuse at once as too big for memory, are kept in.
_MAX_SONG_S = 120.0
_REFUSED_SONG_S = 16 * 2**30 / 4 / 1000 * 4


def _quick_song(data):
    seconds = _song_seconds(data)
    return seconds <= _MAX_SONG_S or seconds > _REFUSED_SONG_S


MIDI_PATCH = {
    "name": "fz-midi",
    "resonator": {"type": "string", "material": "nylon", "length": "420 mm", "diameter": "0.91 mm", "pitch": "C4"},
    "excitation": {"type": "pluck", "position": 0.4},
    "damping": {"t60": "0.1 s", "release_t60": "0.02 s"},
    "render": {"sample_rate": 8000, "max_modes": 16},
}


# ----------------------------------------------------------------------------- 4. the MIDI reader


# Mostly none; now and then an option of `synth midi` (cheap values only: a long tail is long work).
_MIDI_OPTIONS = st.one_of(
    *[st.just([])] * 6,
    _option("--a4", [440, 442, "415 Hz", 100, 1000, 99, 1001, "nan", "A4", "-440"]),
    _option("--tail", [0, "0.1", "0.1 s", "100 ms", -1, "nan", "inf", "1e9", "x"]),
    _option("--sample-rate", [1000, 8000, "8 kHz", 999, "nan", "1e9"]),
    _option("--bit-depth", [16, 24, 32, 8]),
)


@_scaled(0.6)
@given(song=_SONG_INPUTS, options=_MIDI_OPTIONS)
def test_midi_reader_on_fuzzed_files(capsys, song, options):
    assume(_quick_song(song))
    with _workspace() as (root, work):
        (work / "song.mid").write_bytes(song)
        (work / "patch.yaml").write_text(_dump(MIDI_PATCH, False), encoding="utf-8")
        outcome = _run(capsys, root, "midi", "song.mid", "--patch", "patch.yaml", "-o", "out.wav", "--quiet", *options)
        _check(outcome, {"song.mid": song, "options": " ".join(options)}, outputs=["a/b/work/out.wav"])


# ----------------------------------------------------------------------------- 3. MIDI maps

MAP_PATCH_2 = {
    "name": "fz-midi-bar",
    "resonator": {"type": "bar", "material": "aluminium-6061", "width": "25 mm", "thickness": "9 mm", "pitch": "A4"},
    "excitation": {"type": "strike", "position": 0.08},
    "damping": {"t60": "0.1 s", "release_t60": "0.02 s"},
    "render": {"sample_rate": 8000, "max_modes": 8},
}
BASE_MAPS = [
    # "true" quoted here: a bare `peak: true` was BUG-5 (FOUND_BUGS), refused at first
    {"render": {"sample_rate": 8000, "bit_depth": 24, "peak_db": -1.0, "peak": "true"},
     "channels": {1: {"patch": "p1.yaml", "pan": -0.35}, 2: {"patch": "p2.yaml", "gain": "-3 dB", "pan": 0.1}},
     "default": {"patch": "p1.yaml"}},
    {"render": {"sample_rate": 8000}, "tracks": {"Lead": {"patch": "p1.yaml"}, 2: {"patch": "p2.yaml", "gain": -6}},
     "default": {"patch": "p2.yaml", "pan": 1}},
    {"render": {"sample_rate": "8 kHz", "bit_depth": 16, "peak": "sample"},
     "channels": {1: {"patch": "p1.yaml"}, 2: {"patch": "p2.yaml"}, 3: {"patch": "sub/p3.yaml", "gain": "6 dB"}}},
    {"render": {"sample_rate": 8000}, "channels": {1: {"patch": "inst.yaml"}, 3: {"patch": "narrow.yaml"}},
     "default": {"patch": "inst.yaml", "gain": "-6 dB"}},
]
_MAP_VALUES = {
    "patch": ["p1.yaml", "p2.yaml", "sub/p3.yaml", "inst.yaml", "narrow.yaml", "x" * 300 + ".yaml", "missing.yaml",
              "", " ", ".", "sub", "map.yaml", "song.mid",
              "bad.yaml", "../work/p1.yaml", "p1.yaml/", None, 12, [], {}, ["p1.yaml"]],
    "gain": [0, -120, -121, 24, 25, "-3 dB", "3 dB", "-inf dB", "inf dB", "3 Hz", "3", -1e308, _NAN, _INF, None, "",
             [], {}, True, "loud"],
    "pan": [-1, 1, 0, -1.0001, 1.0001, 2, "left", "0.5", "50 %", _NAN, _INF, -_INF, None, [], {}, True, 1e-45],
    "channels": [{}, [], None, {0: {"patch": "p1.yaml"}}, {17: {"patch": "p1.yaml"}}, {"1": {"patch": "p1.yaml"}},
                 {True: {"patch": "p1.yaml"}}, {1.0: {"patch": "p1.yaml"}}, {1: "p1.yaml"}, {1: None}, {1: []},
                 {-1: {"patch": "p1.yaml"}}, {16: {"patch": "p2.yaml"}}, {None: {"patch": "p1.yaml"}},
                 {1: {"patch": "p1.yaml", "extra": 1}}, {1: {}}, "1: p1.yaml", 12],
    "tracks": [{}, [], None, {0: {"patch": "p1.yaml"}}, {1: {"patch": "p1.yaml"}}, {4: {"patch": "p1.yaml"}},
               {"Lead": {"patch": "p1.yaml"}}, {"": {"patch": "p1.yaml"}}, {"Nope": {"patch": "p2.yaml"}},
               {1.5: {"patch": "p1.yaml"}}, {True: {"patch": "p1.yaml"}}, {None: {"patch": "p1.yaml"}},
               {10**30: {"patch": "p1.yaml"}}, {"Lead": "p1.yaml"}, "Lead"],
    "default": [{"patch": "p1.yaml"}, {"patch": "p2.yaml", "gain": 24, "pan": -1}, {}, [], None, "p1.yaml",
                {"patch": None}, {"patch": "p1.yaml", "channels": {}}],
    "render": [{}, [], None, "fast", {"sample_rate": 1000}, {"sample_rate": 768000}, {"sample_rate": 999},
               {"bit_depth": 8}, {"bit_depth": 32}, {"peak_db": None}, {"peak_db": 0}, {"peak_db": 1},
               {"peak": "sample"}, {"peak": "false"}, {"duration": "1 s"}, {"max_modes": 2}, {"sample_rate": _NAN}],
    "sample_rate": _CHEAP["sample_rate"],
    "bit_depth": [16, 24, 32, 8, 0, "24", "24 bit", 24.0, 24.5, None, _NAN, [], True],
    "peak_db": [0, -1, -120, -121, 1, "-1 dB", "0 dBFS", None, _NAN, -_INF, "", True],
    "peak": [True, False, "true", "sample", "false", "SAMPLE", None, 1, 0, [], "peak"],
}


# Instruments in a map (README "Instruments"): every key of the song, and a range that skips two of its notes.
MAP_INSTRUMENTS = {
    "inst.yaml": {"name": "fz-map-harp", "patch": "string.yaml", "range": {"from": "A2", "to": "C4"},
                  "vary": {"resonator.length": {"A2": "0.8 m", "C4": "0.4 m"}}},
    "narrow.yaml": {"name": "fz-map-narrow", "patch": "string.yaml", "range": {"from": "C3", "to": "E3"}},
}


def _write_map_inputs(work):
    (work / "song.mid").write_bytes(MAP_SONG)
    (work / "p1.yaml").write_text(_dump(MIDI_PATCH, False), encoding="utf-8")
    (work / "p2.yaml").write_text(_dump(MAP_PATCH_2, False), encoding="utf-8")
    (work / "sub").mkdir()
    (work / "sub" / "p3.yaml").write_text(_dump(MIDI_PATCH, False), encoding="utf-8")
    (work / "bad.yaml").write_text("name: [\n", encoding="utf-8")
    (work / "string.yaml").write_text(_dump(INSTRUMENT_PATCHES["string.yaml"], False), encoding="utf-8")
    for name, instrument in MAP_INSTRUMENTS.items():
        (work / name).write_text(_dump(instrument, False), encoding="utf-8")


def _map_value_for(path):
    if path and path[-1] in _MAP_VALUES and not (path[-1] == "render" and len(path) > 1):
        return st.one_of(st.sampled_from(_MAP_VALUES[path[-1]]), _SCALARS)
    return _VALUES


@st.composite
def map_bytes(draw):
    tree = copy.deepcopy(draw(st.sampled_from(BASE_MAPS)))
    for _ in range(draw(st.integers(0, 3))):
        op = draw(st.sampled_from(["drop", "replace", "replace", "add"]))
        paths = list(_paths(tree))
        if op == "drop" and paths:
            path = draw(st.sampled_from(paths))
            del _at(tree, path[:-1])[path[-1]]
        elif op == "replace" and paths:
            path = draw(st.sampled_from(paths))
            _at(tree, path[:-1])[path[-1]] = _fresh(draw, _map_value_for(path))
        elif op == "add":
            path = draw(st.sampled_from(list(_mappings(tree))))
            key = draw(st.one_of(st.sampled_from(["channels", "tracks", "default", "render", "patch", "gain", "pan",
                                                  "channel", "track", 1, 2, 3, 16, 17, 0, "Lead", "Bass"]), _ANY_KEY))
            _at(tree, path)[key] = _fresh(draw, _map_value_for(path + (key,)))
    text = _dump(tree, draw(st.booleans()))
    if draw(st.integers(0, 5)) == 0:
        at = draw(st.integers(0, len(text)))
        text = text[:at] + draw(st.sampled_from(["", ":", "{", "- ", "\t", "&a ", "*a", "\n"]))
    return text.encode("utf-8", "surrogatepass")


# Three short notes: channel 1 on track "Lead", channel 2 and channel 3 on track "Bass".
MAP_SONG = _song([(1, 0, 60, 100, 0, 24), (2, 1, 45, 80, 12, 24), (2, 2, 52, 64, 24, 12)], ticks_per_beat=96)


@_scaled(0.6)
@given(map_=st.one_of(map_bytes(), map_bytes(), map_bytes(), _RAW))
def test_midi_map_on_fuzzed_maps(capsys, map_):
    with _workspace() as (root, work):
        _write_map_inputs(work)
        (work / "map.yaml").write_bytes(map_)
        outcome = _run(capsys, root, "midi", "song.mid", "--map", "map.yaml", "-o", "out.wav", "--quiet")
        _check(outcome, {"map.yaml": map_.decode("utf-8", "replace")}, outputs=["a/b/work/out.wav"])


def test_midi_bases_are_valid(capsys):
    """The map bases and a few valid songs render (else the fuzz would only ever test refusals)."""
    for base in BASE_MAPS:
        with _workspace() as (root, work):
            _write_map_inputs(work)
            (work / "map.yaml").write_text(_dump(base, False), encoding="utf-8")
            outcome = _run(capsys, root, "midi", "song.mid", "--map", "map.yaml", "-o", "out.wav", "--quiet")
            assert outcome.status == 0 and not _problems(outcome, ["a/b/work/out.wav"]), (base, outcome.err)
    for spec in BASE_SPECS:
        with _workspace() as (root, work):
            (work / "spec.yaml").write_text(_dump(spec, False), encoding="utf-8")
            (work / "base.yaml").write_text(_dump(BATCH_PATCH, False), encoding="utf-8")
            (work / "string.yaml").write_text(_dump(INSTRUMENT_PATCHES["string.yaml"], False), encoding="utf-8")
            (work / "inst.yaml").write_text(_dump(MAP_INSTRUMENTS["narrow.yaml"], False), encoding="utf-8")
            outcome = _run(capsys, root, "batch", "spec.yaml", "--workers", "1")
            assert outcome.status == 0 and not _problems(outcome, batch=True), (spec, outcome.err)


# Every bug these tests found, with its minimal input: id -> (what went wrong, files, argv, expected status).
# They were found while the file was written and have since been fixed in synth/ (the tree was being
# edited alongside); each minimal input stays here as a regression test of the contract.
_MAP_MIDI = {"song.mid": MAP_SONG, "p1.yaml": _dump(MIDI_PATCH, False).encode()}
FOUND_BUGS = {
    # A YAML key holding a line separator other than "\n" ("\r", "\x0b", "\x0c", "\x1c".."\x1e", "\x85",
    # "\u2028", "\u2029") was echoed raw into the error message: the one line on stderr was several
    # lines to anything that splits lines as Python does (cli.py _one_line() joined only "\n").
    "BUG-1 line separators in error messages": (
        {"patch.yaml": b'"\\x1E": []\n'}, ["modes", "patch.yaml"], 2),
    "BUG-1b carriage return in an error message": (
        {"patch.yaml": b'name: x\n"a\\rb": 1\n'}, ["modes", "patch.yaml"], 2),
    # A scalar with an explicit standard tag its text does not fit raised ValueError, KeyError,
    # AttributeError or TypeError inside PyYAML's SafeConstructor, past yamlio.load_yaml_text(): a
    # traceback for every YAML input (patch, spec, map, instrument).
    "BUG-2 bad explicit YAML tags": ({"patch.yaml": b"a: !!float x\n"}, ["modes", "patch.yaml"], 2),
    "BUG-2b !!int": ({"patch.yaml": b"a: !!int x\n"}, ["modes", "patch.yaml"], 2),
    "BUG-2c !!bool": ({"patch.yaml": b"a: !!bool x\n"}, ["modes", "patch.yaml"], 2),
    "BUG-2d !!timestamp": ({"patch.yaml": b"a: !!timestamp 2001-99-99\n"}, ["modes", "patch.yaml"], 2),
    "BUG-2e !!map": ({"patch.yaml": b"a: !!map [1]\n"}, ["modes", "patch.yaml"], 2),
    # The length of a sysex (F0/F7) or meta (FF) event written as a variable-length number of more than
    # 4 bytes raised ValueError out of midifile._varlen() (called by _check_track() for the event length
    # without the guard the delta time has): a traceback.
    "BUG-3 long variable-length event length in a MIDI file": (
        {"song.mid": b"MThd\x00\x00\x00\x06\x00\x00\x00\x01\x00\x00MTrk\x00\x00\x00\x06\x00\xf0\x80\x80\x80\x80",
         "patch.yaml": _dump(MIDI_PATCH, False).encode()},
        ["midi", "song.mid", "--patch", "patch.yaml", "-o", "out.wav", "--quiet"], 2),
    "BUG-3b the same in a meta event": (
        {"song.mid": b"MThd\x00\x00\x00\x06\x00\x00\x00\x01\x00\x60MTrk\x00\x00\x00\x07\x00\xff\x01\x80\x80\x80\x80",
         "patch.yaml": _dump(MIDI_PATCH, False).encode()},
        ["midi", "song.mid", "--patch", "patch.yaml", "-o", "out.wav", "--quiet"], 2),
    # A file name over 255 bytes given inside a YAML file (a map entry's patch, a spec's patch or
    # output, an instrument's patch) or as `synth batch -o` raised OSError [Errno 36] "File name too
    # long" from Path.is_dir()/is_file()/exists(): a traceback.
    "BUG-4 over-long file name of a map entry's patch": (
        {**_MAP_MIDI, "map.yaml": ("default: {patch: " + "x" * 300 + ".yaml}\n").encode()},
        ["midi", "song.mid", "--map", "map.yaml", "-o", "out.wav", "--quiet"], 2),
    "BUG-4b over-long file name of a spec's patch": (
        {"spec.yaml": ("patch: " + "x" * 300 + ".yaml\nnotes: [A2]\n").encode()},
        ["batch", "spec.yaml", "--workers", "1"], 2),
    "BUG-4c over-long name of a spec's output": (
        {"spec.yaml": ("patch: p1.yaml\nnotes: [C4]\noutput: " + "x" * 300 + "\n").encode(),
         "p1.yaml": _dump(BATCH_PATCH, False).encode()},
        ["batch", "spec.yaml", "--workers", "1"], 2),
    "BUG-4d over-long name given to batch -o": (
        {"spec.yaml": b"patch: p1.yaml\nnotes: [C4]\n", "p1.yaml": _dump(BATCH_PATCH, False).encode()},
        ["batch", "spec.yaml", "--workers", "1", "-o", "x" * 300], 2),
    "BUG-4e over-long file name of an instrument's patch": (
        {"inst.yaml": ("name: i\npatch: " + "x" * 300 + ".yaml\nrange: {from: C3, to: E3}\n").encode()},
        ["modes", "inst.yaml", "--pitch", "D3"], 2),
    # README's map example writes `render: {..., peak: true}`: YAML reads the bare word as a boolean,
    # which the patch loader accepted (patch.py turns True into "true") and the map loader refused
    # ("True is not allowed; did you mean 'true'?").  Found building the map bases.
    "BUG-5 a map's render.peak: true": (
        {**_MAP_MIDI, "map.yaml": b"render: {sample_rate: 8000, peak: true}\ndefault: {patch: p1.yaml}\n"},
        ["midi", "song.mid", "--map", "map.yaml", "-o", "out.wav", "--quiet"], 0),
    # A YAML key holding a control character (ESC, BEL, backspace, DEL, NUL, U+009B CSI) was printed
    # raw in "unknown key" errors: a terminal obeys it ("\x1bE" starts a new line, "\x1b[2K" erases
    # one).  cli._one_line() now escapes every non-printable character.
    "BUG-6 raw control characters of keys in error messages": (
        {"patch.yaml": b'"\\e": 1\n'}, ["modes", "patch.yaml"], 2),
}


@pytest.mark.parametrize("bug", list(FOUND_BUGS))
def test_found_bugs_stay_fixed(capsys, bug):
    files, argv, expected = FOUND_BUGS[bug]
    with _workspace() as (root, work):
        for name, data in files.items():
            (work / name).write_bytes(data)
        outcome = _run(capsys, root, *argv)
        problems = _problems(outcome, outputs=["a/b/work/out.wav"] if "-o" in argv and expected == 0 else (),
                             batch=argv[0] == "batch")
        assert not problems, problems
        assert outcome.status == expected, outcome.err


# The minimal input of every bug in KNOWN_BUGS (not fixed yet): each must still break the contract.
# Strict xfail: once the bug is fixed this XPASSes and fails, to say its KNOWN_BUGS entry can go.
_KNOWN_REPRODUCERS = {}


@pytest.mark.parametrize("bug", [
    pytest.param(bug, marks=pytest.mark.xfail(strict=True, raises=AssertionError, reason=f"known synth bug: {bug}"))
    for bug in KNOWN_BUGS])
def test_known_bugs_still_reproduce(capsys, bug):
    files, argv = _KNOWN_REPRODUCERS[bug]
    with _workspace() as (root, work):
        for name, data in files.items():
            (work / name).write_bytes(data)
        outcome = _run(capsys, root, *argv)
        problems = _problems(outcome, outputs=["a/b/work/out.wav"] if "-o" in argv else (), batch=argv[0] == "batch")
        if problems and _known_bug(outcome) != bug:  # pytest.fail is no AssertionError: a real failure
            pytest.fail(f"the reproducer of {bug} now breaks the contract another way: {problems}", pytrace=False)
        assert not problems, problems  # fails (xfail) while the bug is there; passes (strict XPASS) once fixed
