"""Two patches side by side (``synth compare``); :mod:`synth.sweep` moves one key across a range.

``compare`` matches the partials of two patches (by label when both are the
same kind of object, else by order of frequency), gives each pair's interval
in cents (``1200 log2(fB / fA)``), level and T60, then the patch keys and the
reported parameters whose values differ; ``-o`` writes A, a gap and B,
loudness-matched (ITU-R BS.1770-4 integrated loudness, :mod:`synth.loudness`;
RMS when a render is shorter than one 400 ms gating block).
"""
from __future__ import annotations

import json
import math
import sys
from dataclasses import fields
from pathlib import Path

import numpy as np

from .errors import PatchError, RenderError, option_error
from .labels import format_quantity, parameter_lines

__all__ = [
    "run_compare",
    "compare_tables",
    "match_partials",
    "patch_values",
    "differing",
    "match_loudness",
    "GAP_S",
    "PAIR_PEAK_DBTP",
]

GAP_S = 0.5  # s of silence between A and B in the A-then-B file
PAIR_PEAK_DBTP = -1.0  # dBTP: true peak of the A-then-B file (one gain for both, as synth render's default)
#: Relative difference below which two SI values are the same (float noise of one computation done twice).
SAME_RTOL = 1e-12
# ---- values of a patch, by patch key -----------------------------------------------------------

#: Spec attribute -> patch key, where they differ; attributes left out are not patch keys.
_SPEC_KEYS = {"pitch_hz": "pitch", "reference_hz": "fundamental", "shaped_for_hz": None}
_MATERIAL_CONSTANTS = ("density", "youngs_modulus", "poisson_ratio", "tensile_strength")
#: Last part of a patch key -> the quantity it is shown as (synth.labels, plus density and level here).
_QUANTITIES = {
    "length": "length", "diameter": "length", "width": "length", "height": "length", "radius": "length",
    "thickness": "length", "profile": "length", "tension": "force", "pitch": "frequency", "fundamental": "frequency",
    "high_frequency": "frequency", "sample_rate": "frequency", "density": "density", "areal_density": "areal_density",
    "youngs_modulus": "modulus", "shear_modulus": "modulus", "tensile_strength": "stress", "temperature": "temperature",
    "t60": "time", "t60_high": "time", "release_t60": "time", "duration": "time", "contact_time": "short_time",
    "release_time": "short_time", "angle": "angle", "peak_db": "level", "levels_db": "level",
}
#: The SI unit of each quantity, for the JSON.
_SI_UNITS = {"length": "m", "force": "N", "membrane_tension": "N/m", "frequency": "Hz", "density": "kg/m^3",
             "areal_density": "kg/m^2", "modulus": "Pa", "stress": "Pa", "temperature": "degC", "time": "s",
             "short_time": "s", "angle": "rad", "level": "dB"}
_FINE_LENGTHS = ("diameter", "thickness", "profile")  # read to 0.01 mm, as the report reads them
_KG_M3_TO_LB_IN3 = 0.0254**3 / 0.45359237  # 1 in = 25.4 mm, 1 lb = 0.45359237 kg (exact)


def _quantity(key, resonator=None):
    """What patch key `key` measures (None: a plain number, a count or a word)."""
    last = key.rsplit(".", 1)[-1]
    if key == "resonator.tension" and resonator == "membrane":
        return "membrane_tension"
    if ".position" in key:  # fractions of the object's size, and an angle
        return "angle" if last == "angle" else None
    return _QUANTITIES.get(last)


def _point_values(prefix, point):
    """A position (synth.patch.Point) as the patch keys that set it."""
    if point is None:
        return {prefix: None}
    if point.style == "fraction":
        return {prefix: float(point.values[0])}
    if point.style == "xy":
        return {prefix: tuple(float(v) for v in point.values)}
    return {f"{prefix}.radius": float(point.values[0]), f"{prefix}.angle": float(point.values[1])}


def patch_values(patch):
    """{patch key: SI value} of a validated patch: what its file (and options) set, and the defaults.

    Parameters
    ----------
    patch : Patch

    Returns
    -------
    dict
        Dotted patch keys (``resonator.length``, ``excitation.type``,
        ``pickup.position``, ``render.sample_rate``) -> SI values (angles in
        rad, lists as tuples, None where not given).  A named material gives
        ``resonator.material`` (its constants follow from the name and, for
        drawn wire, the gauge: the report's parameters show them); a material
        given by its constants gives ``resonator.material.density`` and the rest.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, tension: 40 N}
    ... excitation: {type: pluck, position: 0.25}
    ... render: {sample_rate: 8000}
    ... ''')
    >>> values = patch_values(patch)
    >>> values["resonator.length"], values["resonator.tension"], values["excitation.position"]
    (0.3, 40.0, 0.25)
    >>> values["resonator.pitch"], values["render.sample_rate"]
    (None, 8000)
    """
    spec = patch.resonator
    values = {"name": patch.name, "resonator.type": spec.TYPE}
    custom = getattr(spec, "material", None) == "custom"
    for item in fields(spec):
        if item.name in _MATERIAL_CONSTANTS:  # a material's constants: patch keys only when the patch gives them
            if custom:
                values[f"resonator.material.{item.name}"] = getattr(spec, item.name)
            continue
        name = _SPEC_KEYS.get(item.name, item.name)
        if name is not None:
            values[f"resonator.{name}"] = getattr(spec, item.name)
    if spec.TYPE == "membrane" and getattr(spec, "youngs_modulus", None) is None:
        values["resonator.material"] = None  # given by its areal density alone
    excitation, pickup = patch.excitation, patch.pickup
    values["excitation.type"] = excitation.kind
    values.update(_point_values("excitation.position", excitation.position))
    values.update({"excitation.contact_time": excitation.contact_time, "excitation.strength": excitation.strength,
                   "excitation.release_time": excitation.release_time})
    values.update(_point_values("pickup.position", pickup.position))
    values["pickup.measures"] = pickup.measures
    for section in ("damping", "render"):
        obj = getattr(patch, section)
        for item in fields(obj):
            values[f"{section}.{item.name}"] = getattr(obj, item.name)
    return {k: (tuple(v) if isinstance(v, list) else v) for k, v in values.items()}


def _is_number(value):
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, (bool, np.bool_))


def _same(a, b):
    """True if two values are equal, numbers to :data:`SAME_RTOL`."""
    if _is_number(a) and _is_number(b):
        a, b = float(a), float(b)
        if a == b or (math.isnan(a) and math.isnan(b)):
            return True
        return math.isfinite(a) and math.isfinite(b) and abs(a - b) <= SAME_RTOL * max(abs(a), abs(b))
    if isinstance(a, (tuple, list)) and isinstance(b, (tuple, list)):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b))
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_same(a[k], b[k]) for k in a)
    return a == b


def differing(a, b):
    """Keys of mappings `a` and `b` (in their order) whose values differ, or that only one has.

    Examples
    --------
    >>> differing({"x": 1.0, "y": 2.0, "z": "pinned"}, {"x": 1.0 + 1e-15, "y": 2.5, "w": 3})
    ['y', 'z', 'w']
    """
    keys = list(dict.fromkeys([*a, *b]))
    return [k for k in keys if k not in a or k not in b or not _same(a[k], b[k])]


def _shown(value, quantity, units, key=""):
    """One value as the report shows it, with its unit."""
    if value is None:
        return "not given"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, str):
        return value
    if isinstance(value, (tuple, list)):
        texts = [_shown(v, quantity, units, key) for v in value[:6]]
        return "[" + ", ".join(texts) + (f", ... ({len(value)})" if len(value) > 6 else "") + "]"
    if not _is_number(value):
        return str(value)
    value = float(value)
    if quantity is None:
        return f"{value:.6g}"
    if quantity == "level":
        return f"{value:.6g} dB"
    if quantity == "density":
        if units == "imperial":
            return f"{value * _KG_M3_TO_LB_IN3:.4g} lb/in³"
        return f"{value:.5g} kg/m³"
    if quantity == "angle":
        return format_quantity(math.degrees(value), "angle", units=units, resolution=0.1)
    if quantity == "frequency" and key.endswith("sample_rate"):
        return f"{value:g} Hz"
    resolution = None
    if quantity == "length":
        resolution = 1e-5 if key.rsplit(".", 1)[-1] in _FINE_LENGTHS else 1e-4
    return format_quantity(value, quantity, units=units, resolution=resolution)


def _change(a, b, *, signed=False, unit=""):
    """How B differs from A: a percentage of A, or (`signed`, or a value <= 0) the signed difference."""
    if not (_is_number(a) and _is_number(b)):
        return ""
    a, b = float(a), float(b)
    if not (math.isfinite(a) and math.isfinite(b)):
        return ""
    if signed or a <= 0 or b <= 0:
        return f"{b - a:+.4g}{unit}"
    return f"{100.0 * (b / a - 1.0):+.2f} %"


def _key_change(a, b, quantity, units):
    """:func:`_change` of a patch key: levels, angles and temperatures as signed differences in the shown unit."""
    if quantity not in ("level", "angle", "temperature") or not (_is_number(a) and _is_number(b)):
        return _change(a, b)
    a, b = float(a), float(b)
    if quantity == "angle":
        return _change(math.degrees(a), math.degrees(b), signed=True, unit="°")
    if quantity == "temperature" and units == "imperial":
        return _change(1.8 * a, 1.8 * b, signed=True, unit=" °F")  # a difference: 1.8 °F per °C, no offset
    return _change(a, b, signed=True, unit=" dB" if quantity == "level" else " °C")


def _json_value(value):
    """`value` as JSON holds it: lists for tuples and arrays, None for NaN and infinity, Python numbers."""
    if isinstance(value, (tuple, list, np.ndarray)):
        return [_json_value(v) for v in value]
    if isinstance(value, dict):
        return {k: _json_value(v) for k, v in value.items()}
    if isinstance(value, (np.integer,)):
        return int(value)
    if _is_number(value):
        value = float(value)
        return value if math.isfinite(value) else None
    if isinstance(value, (np.bool_,)):
        return bool(value)
    return value


_SECTIONS = ("name", "resonator", "excitation", "pickup", "damping", "render")


def _key_differences(a_values, b_values, resonator):
    """[(key, a, b, quantity)] of the patch keys whose values differ, section by section.

    A key one patch leaves unset (None) and the other lacks is not a difference.
    """
    keys = [k for k in differing(a_values, b_values) if a_values.get(k) is not None or b_values.get(k) is not None]
    keys.sort(key=lambda k: _SECTIONS.index(k.split(".")[0]))  # stable: each patch's own order within a section
    return [(k, a_values.get(k), b_values.get(k), _quantity(k, resonator)) for k in keys]


def _parameter_text(key, parameters, units):
    """(label, shown value) of reported parameter `key` of `parameters` (its 'solved' flag folded in)."""
    if key not in parameters:
        return None, "not reported"
    sub = {key: parameters[key]}
    sub.update({k: v for k, v in parameters.items() if k.endswith("_solved") and key.startswith(k[: -len("solved")])})
    lines = parameter_lines(sub, units=units)
    for label, text in lines:
        return label, text
    return key, str(parameters[key])  # pragma: no cover - parameter_lines shows every key


# ---- compare -----------------------------------------------------------------------------------


def match_partials(labels_a, labels_b, *, by_label):
    """Pairs ``(i, j)`` of matched partials, and the unmatched indices of A and of B.

    Parameters
    ----------
    labels_a, labels_b : sequence of str
        Mode labels of each table, in order of frequency.
    by_label : bool
        True (same resonator type): the k-th mode labelled L in A pairs with
        the k-th labelled L in B.  False: the i-th mode of A pairs with the
        i-th of B (order of frequency).

    Returns
    -------
    pairs : list of (int, int)
        In A's order of frequency.
    only_a, only_b : list of int

    Examples
    --------
    >>> match_partials(["n=1", "n=2", "n=3"], ["n=2", "n=1"], by_label=True)
    ([(0, 1), (1, 0)], [2], [])
    >>> match_partials(["(0,1)", "(1,1)"], ["n=1", "n=2", "n=3"], by_label=False)
    ([(0, 0), (1, 1)], [], [2])
    """
    if not by_label:
        n = min(len(labels_a), len(labels_b))
        return [(i, i) for i in range(n)], list(range(n, len(labels_a))), list(range(n, len(labels_b)))
    waiting = {}
    for j, label in enumerate(labels_b):
        waiting.setdefault(label, []).append(j)
    pairs, only_a = [], []
    for i, label in enumerate(labels_a):
        queue = waiting.get(label)
        if queue:
            pairs.append((i, queue.pop(0)))
        else:
            only_a.append(i)
    paired_b = {j for _, j in pairs}
    return pairs, only_a, [j for j in range(len(labels_b)) if j not in paired_b]


#: A recorded partial pairs with the nearest partial of the other side within this interval.
NEAREST_CENTS = 50.0


def match_nearest(table_a, table_b, *, tolerance_cents=NEAREST_CENTS):
    """Pairs of partials nearest in frequency (one-to-one, within `tolerance_cents`), for a recording.

    A recording has no labels and misses the modes its microphone or the
    strike did not catch, so order means nothing; modes that sit on a node
    (no level) are left out of the pairing.  Returns ``(pairs, only_a,
    only_b)`` as :func:`match_partials` does; the pairing minimises the sum of
    squared cents (:func:`synth.analysis.matching.assign_modes`).
    """
    from .analysis.matching import assign_modes

    heard_b = np.flatnonzero(np.isfinite(np.asarray(table_b.level_db, dtype=float)))
    heard_a = np.flatnonzero(np.isfinite(np.asarray(table_a.level_db, dtype=float)))
    pairs = []
    if heard_a.size and heard_b.size:
        member = assign_modes(np.asarray(table_a.frequency_hz)[heard_a], np.asarray(table_b.frequency_hz)[heard_b],
                              tolerance_cents=tolerance_cents)
        pairs = [(int(heard_a[k]), int(heard_b[m])) for k, m in enumerate(member) if m >= 0]
    paired_a, paired_b = {i for i, _ in pairs}, {j for _, j in pairs}
    return (pairs, [i for i in heard_a if i not in paired_a],
            [int(j) for j in heard_b if j not in paired_b])


def _level(table, i):
    value = float(table.level_db[i])
    return value if math.isfinite(value) else None


def _alone(table, i):
    return {"label": table.labels[i], "frequency_hz": float(table.frequency_hz[i]), "level_db": _level(table, i),
            "t60_s": float(table.t60_s[i])}


def compare_tables(table_a, table_b, patch_a, patch_b):
    """The comparison of two partial tables and their patches, as one JSON-ready dict (SI units).

    Parameters
    ----------
    table_a, table_b : PartialTable
    patch_a, patch_b : Patch

    Returns
    -------
    dict
        ``matched_by`` ("label" or "frequency order"), ``partials`` (each
        matched pair: ``label``, ``label_a``, ``label_b``, ``frequency_a_hz``,
        ``frequency_b_hz``, ``difference_cents`` = 1200 log2(fB / fA),
        ``level_a_db``, ``level_b_db``, ``level_difference_db`` (B - A; None on
        a node), ``t60_a_s``, ``t60_b_s``, ``t60_ratio`` (B / A)),
        ``only_in_a``, ``only_in_b``, ``patch_differences`` and
        ``parameter_differences`` (each ``{"key", "a", "b"}``, SI, with
        ``unit`` for patch keys).
    """
    recorded = "recording" in (table_a.resonator, table_b.resonator)
    by_label = table_a.resonator == table_b.resonator and not recorded
    if recorded:
        pairs, only_a, only_b = match_nearest(table_a, table_b)
    else:
        pairs, only_a, only_b = match_partials(table_a.labels, table_b.labels, by_label=by_label)
    rows = []
    for i, j in pairs:
        fa, fb = float(table_a.frequency_hz[i]), float(table_b.frequency_hz[j])
        la, lb = _level(table_a, i), _level(table_b, j)
        ta, tb = float(table_a.t60_s[i]), float(table_b.t60_s[j])
        label_a, label_b = table_a.labels[i], table_b.labels[j]
        rows.append({
            "label": label_a if label_a == label_b else f"{label_a} / {label_b}",
            "label_a": label_a, "label_b": label_b,
            "frequency_a_hz": fa, "frequency_b_hz": fb, "difference_cents": 1200.0 * math.log2(fb / fa),
            "level_a_db": la, "level_b_db": lb, "level_difference_db": None if la is None or lb is None else lb - la,
            "t60_a_s": ta, "t60_b_s": tb, "t60_ratio": tb / ta,
        })
    a_values, b_values = patch_values(patch_a), patch_values(patch_b)
    resonator = patch_a.resonator.TYPE if patch_a.resonator.TYPE == patch_b.resonator.TYPE else None
    keys = [{"key": k, "a": _json_value(a), "b": _json_value(b), "unit": _SI_UNITS.get(q)}
            for k, a, b, q in _key_differences(a_values, b_values, resonator)] if not recorded else []
    params = [{"key": k, "a": _json_value(table_a.parameters.get(k)), "b": _json_value(table_b.parameters.get(k))}
              for k in differing(table_a.parameters, table_b.parameters)] if not recorded else []
    return {
        "matched_by": "nearest frequency" if recorded else "label" if by_label else "frequency order",
        "partials": rows,
        "only_in_a": [_alone(table_a, i) for i in only_a],
        "only_in_b": [_alone(table_b, j) for j in only_b],
        "patch_differences": keys,
        "parameter_differences": params,
    }


def _side(table, patch, file):
    return {"name": table.name, "file": str(file), "resonator": table.resonator,
            "fundamental_hz": float(table.fundamental_hz), "sample_rate_hz": int(patch.render.sample_rate),
            "n_modes": len(table.frequency_hz), "warnings": list(table.warnings)}


def _load_side(path, patch_from_mapping, partial_table):
    """(patch, table, recording or None) of one side: a patch file, or a recording in place of one.

    A recording's table is its estimated partials (:mod:`synth.analysis`),
    its patch the ``partials`` patch that resynthesises it (for the keys that
    differ), and the A-then-B file plays the recording itself from its onset.
    """
    from .analysis.recording import (analyse_recording, estimate_table, is_recording, partials_mapping,
                                     read_recording)

    if not is_recording(path):
        patch = patch_from_mapping(_load_patch_file(path, "compare"), file=str(path))
        return patch, partial_table(patch, onset=False), None
    recording = read_recording(path)
    estimate = analyse_recording(recording)
    table = estimate_table(estimate, recording)
    patch = patch_from_mapping(partials_mapping(table, name=recording.name, sample_rate=recording.sample_rate),
                               file=str(path))
    start = int(round(estimate.onset_s * recording.sample_rate))
    return patch, table, (np.asarray(recording.signal[start:], dtype=np.float64), int(recording.sample_rate))


def _load_patch_file(path, what):
    """A patch file, refused with one line when it is an instrument."""
    from .instrument_file import is_instrument_mapping
    from .yamlio import load_yaml_file

    mapping = load_yaml_file(path)
    if is_instrument_mapping(mapping):
        raise PatchError(f"is an instrument, not a patch: {what} takes patch files (synth range shows an "
                         "instrument's keys)", file=str(path), line=1)
    return mapping


def _aligned(rows, right):
    """Rows of cells as aligned text; columns whose index is in `right` align right."""
    widths = [max(len(r[c]) for r in rows) for c in range(len(rows[0]))]
    return ["  ".join(cell.rjust(w) if c in right else cell.ljust(w) for c, (cell, w) in enumerate(zip(row, widths)))
            .rstrip() for row in rows]


def _opt(value, fmt):
    return "null" if value is None else fmt.format(value)


def compare_text(data, table_a, table_b, patch_a, patch_b, *, units, max_rows=None):
    """The comparison as text lines: both headers, the partials side by side, what differs."""
    lines = []
    for tag, side in (("A", data["a"]), ("B", data["b"])):
        lines.append(f"{tag}: {side['name']} ({side['resonator']} from {side['file']}), fundamental "
                     f"{side['fundamental_hz']:.3f} Hz, {side['n_modes']} mode{'s' * (side['n_modes'] != 1)}")
    why = {"label": "same resonator type", "frequency order": "different resonator types",
           "nearest frequency": f"a recording: within {NEAREST_CENTS:.0f} cents, modes on a node left out"}[
        data["matched_by"]]
    lines.append(f"partials matched by {data['matched_by']} ({why}); cents = 1200 log2(B/A)")
    shown = data["partials"] if max_rows is None else data["partials"][:max_rows]
    if shown:
        header = ["mode", "A Hz", "B Hz", "cents", "A dB", "B dB", "B-A dB", "A T60 s", "B T60 s", "T60 B/A"]
        cells = [header] + [[
            r["label"], f"{r['frequency_a_hz']:.2f}", f"{r['frequency_b_hz']:.2f}", f"{r['difference_cents']:+.1f}",
            _opt(r["level_a_db"], "{:.1f}"), _opt(r["level_b_db"], "{:.1f}"), _opt(r["level_difference_db"], "{:+.1f}"),
            f"{r['t60_a_s']:.3g}", f"{r['t60_b_s']:.3g}", f"{r['t60_ratio']:.3f}"] for r in shown]
        lines += _aligned(cells, right=set(range(1, 10)))
    if len(shown) < len(data["partials"]):
        lines.append(f"... {len(data['partials']) - len(shown)} more matched partials (leave out --rows to see them)")
    for tag, alone in (("A", data["only_in_a"]), ("B", data["only_in_b"])):
        if alone:
            listed = ", ".join(f"{m['label']} {m['frequency_hz']:.2f} Hz" for m in alone[:8])
            more = f", ... ({len(alone)} in all)" if len(alone) > 8 else ""
            lines.append(f"only in {tag}: {listed}{more}")
    if data["matched_by"] == "nearest frequency":  # a recording has measured partials, not keys or parameters
        lines += [f"warning: {tag}: {w}" for tag, side in (("A", data["a"]), ("B", data["b"])) for w in side["warnings"]]
        return lines
    resonator = patch_a.resonator.TYPE if patch_a.resonator.TYPE == patch_b.resonator.TYPE else None
    diffs = _key_differences(patch_values(patch_a), patch_values(patch_b), resonator)
    lines.append("patch keys that differ:" if diffs else "patch keys that differ: none")
    for key, a, b, quantity in diffs:
        change = _key_change(a, b, quantity, units)
        lines.append(f"  {key}: {_shown(a, quantity, units, key)} -> {_shown(b, quantity, units, key)}"
                     + (f" ({change})" if change else ""))
    params = data["parameter_differences"]
    lines.append("reported parameters that differ:" if params else "reported parameters that differ: none")
    for item in params:
        label_a, text_a = _parameter_text(item["key"], table_a.parameters, units)
        label_b, text_b = _parameter_text(item["key"], table_b.parameters, units)
        change = _change(item["a"], item["b"], signed=item["key"].endswith(("_db", "_cents", "_deg", "_c")))
        lines.append(f"  {label_a or label_b}: {text_a} -> {text_b}" + (f" ({change})" if change else ""))
    for tag, side in (("A", data["a"]), ("B", data["b"])):
        lines += [f"warning: {tag}: {w}" for w in side["warnings"]]
    return lines


def _rms_db(signal):
    rms = math.sqrt(float(np.mean(np.square(np.asarray(signal, dtype=np.float64))))) if len(signal) else 0.0
    return 20.0 * math.log10(rms) if rms > 0 else -math.inf


def match_loudness(a, b, sample_rate):
    """The gain (dB) that brings `b` to the loudness of `a`, and how it was measured.

    Parameters
    ----------
    a, b : ndarray [shape=(n,)], float
    sample_rate : float, Hz

    Returns
    -------
    gain_db : float, dB
        Add to B: ``L(A) - L(B)``.
    measure : {"LUFS", "dBFS RMS"}
        ITU-R BS.1770-4 integrated loudness (:func:`synth.loudness.integrated_loudness`),
        or, when either signal is shorter than one 400 ms gating block or
        below the -70 LUFS gate, the RMS level of the whole signal.
    loudness : tuple of float
        A's and B's level in `measure`.
    note : str or None
        Why RMS was used.

    Examples
    --------
    >>> t = np.arange(8000) / 8000.0
    >>> gain, measure, _, note = match_loudness(np.sin(2 * np.pi * 440 * t), 0.5 * np.sin(2 * np.pi * 440 * t), 8000)
    >>> round(gain, 2), measure
    (6.02, 'LUFS')
    >>> match_loudness(np.ones(100), 0.5 * np.ones(100), 8000)[1]
    'dBFS RMS'
    """
    from .library import loudness_lufs

    la, note_a = loudness_lufs(a, sample_rate)
    lb, note_b = loudness_lufs(b, sample_rate)
    if la is not None and lb is not None:
        return la - lb, "LUFS", (la, lb), None
    ra, rb = _rms_db(a), _rms_db(b)
    if not (math.isfinite(ra) and math.isfinite(rb)):
        raise RenderError("a render is silent: its loudness cannot be matched")
    note = f"A {note_a}" if note_a else f"B {note_b}"
    return ra - rb, "dBFS RMS", (ra, rb), note


def _part_level(signal, sample_rate, measure):
    if measure == "LUFS":
        from .library import loudness_lufs

        return loudness_lufs(signal, sample_rate)[0]
    return _rms_db(signal)


def _write_pair(out, patch_a, patch_b, args, recorded=(None, None)):
    """Render A and B, match their loudness, write A + gap + B to `out`; the line to print and the JSON.

    A side given as a recording plays the recording (``recorded``: its signal
    from the onset and its rate); the other side is rendered at its rate.
    """
    from dataclasses import replace

    from .api import render
    from .audio import normalise, write_audio

    (rec_a, rec_b) = recorded
    if rec_a is not None and rec_b is not None and rec_a[1] != rec_b[1]:
        raise option_error(f"the recordings have different sample rates ({rec_a[1]} and {rec_b[1]} Hz): the "
                           "A-then-B file needs one", "--output")
    rate = rec_a[1] if rec_a is not None else rec_b[1] if rec_b is not None else int(patch_a.render.sample_rate)
    own_rate = int(patch_b.render.sample_rate)
    moved = own_rate != rate and rec_b is None
    if rec_b is None and own_rate != rate:
        patch_b = replace(patch_b, render=replace(patch_b.render, sample_rate=rate))
    if rec_a is None and int(patch_a.render.sample_rate) != rate:
        patch_a = replace(patch_a, render=replace(patch_a.render, sample_rate=rate))
    a = rec_a[0] if rec_a is not None else np.asarray(render(patch_a).signal, dtype=np.float64)
    try:
        b = rec_b[0] if rec_b is not None else np.asarray(render(patch_b).signal, dtype=np.float64)
    except PatchError as error:
        if not moved:
            raise
        raise option_error(f"{args.second}: {error.message} (B is rendered at A's sample rate, {rate} Hz, for the "
                           "A-then-B file)", "--output") from None
    gain_db, measure, (level_a, level_b), note = match_loudness(a, b, rate)
    gap = int(round(GAP_S * rate))
    pair = np.concatenate([a, np.zeros(gap), b * 10.0 ** (gain_db / 20.0)])
    bits = int(patch_a.render.bit_depth) if rec_a is None else 24
    scaled, _ = normalise(pair, peak_db=PAIR_PEAK_DBTP, bit_depth=bits, peak="true", sample_rate=rate)
    write_audio(out, scaled, sample_rate=rate, bit_depth=bits, key="--output")
    after_a = _part_level(scaled[: len(a)], rate, measure)
    after_b = _part_level(scaled[len(a) + gap:], rate, measure)
    louder = level_b - level_a
    said = f"B was {louder:+.1f} dB louder" if louder >= 0 else f"B was {-louder:.1f} dB quieter"
    shown_a, shown_b = ("unmeasured" if v is None else f"{v:.1f} {measure}" for v in (after_a, after_b))
    line = f"wrote {out} (A {shown_a}, B {shown_b} after matching; {said})"
    notes = []
    if moved:
        notes.append(f"{args.second}: rendered at A's sample rate, {rate} Hz, for {out} (its own is {own_rate} Hz)")
    if note is not None:
        notes.append(f"loudness matched by RMS level, not BS.1770 loudness: {note}")
    audio = {"file": str(out), "sample_rate_hz": rate, "bit_depth": bits, "gap_s": gap / rate,
             "a_samples": len(a), "b_samples": len(b), "measure": measure,
             "a_level": after_a, "b_level": after_b, "b_louder_db": louder, "b_gain_db": gain_db}
    return line, notes, audio


def run_compare(args):
    """``synth compare A B``: the two partial tables side by side, what differs, and ``-o`` an A-then-B file."""
    from .audio import check_output_file
    from .patch import patch_from_mapping
    from .pipeline import partial_table

    if args.rows is not None and args.rows < 1:
        raise option_error(f"must be a whole number >= 1, got {args.rows}", "--rows")
    out = Path(args.output) if args.output else None
    if out is not None:
        check_output_file(out, suffixes=(".wav",), inputs=(args.first, args.second), key="--output")
    (patch_a, table_a, heard_a), (patch_b, table_b, heard_b) = (
        _load_side(path, patch_from_mapping, partial_table) for path in (args.first, args.second))
    data = {"a": _side(table_a, patch_a, args.first), "b": _side(table_b, patch_b, args.second)}
    data.update(compare_tables(table_a, table_b, patch_a, patch_b))
    line, notes = None, []
    if out is not None:
        line, notes, data["audio"] = _write_pair(out, patch_a, patch_b, args, recorded=(heard_a, heard_b))
    if args.json:
        print(json.dumps(data, indent=2, allow_nan=False))
    else:
        print("\n".join(compare_text(data, table_a, table_b, patch_a, patch_b, units=args.units, max_rows=args.rows)))
        if line:
            print(line)
    for note in notes:
        print(f"synth: note: {note}", file=sys.stderr)
    if out is not None:
        from .cli import LISTENING_CAUTION

        print(LISTENING_CAUTION, file=sys.stderr)
    return 0
