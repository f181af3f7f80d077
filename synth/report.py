"""The partial table as a practitioner reads it: text, JSON and CSV forms.

The JSON form is the contract of DESIGN.md: SI values under unit-suffixed
keys (``tension_n``, ``stress_pa``), full precision.  The text form is for
people: every parameter has a label a maker would write, a unit from the
chosen system (:data:`UNIT_SYSTEMS`) and a precision that fits how the value
is read (tension to 0.1 N, stress to 1 MPa, lengths to 0.1 mm).  The CSV
form is one row per mode after a block of ``# key,value`` lines holding the
parameters (see :func:`table_to_csv`).
"""
from __future__ import annotations

import csv
import io
import json
import math
from dataclasses import dataclass

import numpy as np

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

#: Exact conversion factors (SI value x factor = value in the unit).
#: The inch is 25.4 mm exactly and the pound 0.45359237 kg exactly (international yard and
#: pound agreement, 1959); the pound-force is the pound times standard gravity 9.80665 m/s^2
#: (CGPM 1901); psi is lbf per square inch.
_INCH = 0.0254  # m
_POUND = 0.45359237  # kg
_LBF = _POUND * 9.80665  # N
_PSI = _LBF / _INCH**2  # Pa
_FOOT = 12 * _INCH  # m


@dataclass(frozen=True)
class _Unit:
    symbol: str
    scale: float  # SI value * scale = shown value
    offset: float = 0.0  # added after scaling (temperatures)


#: quantity -> unit system -> unit.  Frequencies, times, cents and plain numbers are shown as they are.
_UNITS = {
    "length": {"si": _Unit("m", 1.0), "workshop": _Unit("mm", 1e3), "imperial": _Unit("in", 1 / _INCH)},
    "mass": {"si": _Unit("kg", 1.0), "workshop": _Unit("g", 1e3), "imperial": _Unit("lb", 1 / _POUND)},
    "force": {"si": _Unit("N", 1.0), "workshop": _Unit("N", 1.0), "imperial": _Unit("lbf", 1 / _LBF)},
    "stress": {"si": _Unit("Pa", 1.0), "workshop": _Unit("MPa", 1e-6), "imperial": _Unit("psi", 1 / _PSI)},
    "modulus": {"si": _Unit("Pa", 1.0), "workshop": _Unit("GPa", 1e-9), "imperial": _Unit("psi", 1 / _PSI)},
    "linear_density": {"si": _Unit("kg/m", 1.0), "workshop": _Unit("kg/m", 1.0),
                       "imperial": _Unit("lb/in", _INCH / _POUND)},
    "areal_density": {"si": _Unit("kg/m²", 1.0), "workshop": _Unit("kg/m²", 1.0),
                      "imperial": _Unit("lb/ft²", _FOOT**2 / _POUND)},
    "membrane_tension": {"si": _Unit("N/m", 1.0), "workshop": _Unit("N/m", 1.0),
                         "imperial": _Unit("lbf/in", _INCH / _LBF)},
    "rigidity": {"si": _Unit("N·m", 1.0), "workshop": _Unit("N·m", 1.0), "imperial": _Unit("lbf·in", 1 / (_LBF * _INCH))},
    "speed": {"si": _Unit("m/s", 1.0), "workshop": _Unit("m/s", 1.0), "imperial": _Unit("ft/s", 1 / _FOOT)},
    "temperature": {"si": _Unit("°C", 1.0), "workshop": _Unit("°C", 1.0),
                    "imperial": _Unit("°F", 1.8, 32.0)},
    "frequency": {system: _Unit("Hz", 1.0) for system in ("si", "workshop", "imperial")},
    "time": {system: _Unit("s", 1.0) for system in ("si", "workshop", "imperial")},
    "short_time": {system: _Unit("ms", 1e3) for system in ("si", "workshop", "imperial")},
    "angle": {system: _Unit("°", 1.0) for system in ("si", "workshop", "imperial")},
    "cents": {system: _Unit("cents", 1.0) for system in ("si", "workshop", "imperial")},
    "percent": {system: _Unit("%", 1.0) for system in ("si", "workshop", "imperial")},
    "admittance": {system: _Unit("s/kg", 1.0) for system in ("si", "workshop", "imperial")},
}

#: Unit systems of the text report: ``si`` (m, kg, N, Pa), ``workshop`` (mm, g, N, MPa, GPa,
#: kg/m: the default) and ``imperial`` (in, lb, lbf, psi, lb/in, degF).
UNIT_SYSTEMS = ("si", "workshop", "imperial")
DEFAULT_UNITS = "workshop"


@dataclass(frozen=True)
class _Param:
    label: str
    quantity: str | None = None  # a key of _UNITS; None: a count, a plain number or text
    resolution: float | None = None  # in SI units: how finely a maker reads it; None: 4 significant figures
    solved: str | None = None  # the boolean parameter saying whether this value was solved for the pitch


# Every parameter a resonator, the coupling or the pipeline reports, with the label a maker
# would write and the resolution the value is read to (SI units).  A key missing here still
# prints (its name with spaces); tests/test_report.py checks every demo patch's keys are here.
_PARAMETERS = {
    # what the object is
    "material": _Param("material"),
    "shape": _Param("shape"),
    "section": _Param("cross-section"),
    "supports": _Param("supports"),
    "ends": _Param("ends"),
    "edges": _Param("edges"),
    "theory": _Param("beam theory"),
    "solver": _Param("solved by"),
    # sizes
    "length_m": _Param("length", "length", 1e-4, solved="length_solved"),
    "effective_length_m": _Param("acoustic length (with end corrections)", "length", 1e-4),
    "end_correction_m": _Param("end correction, each open end", "length", 1e-4),
    "width_m": _Param("width", "length", 1e-4),
    "height_m": _Param("height", "length", 1e-4),
    "radius_m": _Param("radius", "length", 1e-4),
    "diameter_m": _Param("diameter", "length", 1e-5),
    "thickness_m": _Param("thickness", "length", 1e-5, solved="thickness_solved"),
    "thinnest_m": _Param("thinnest (under the cut)", "length", 1e-5),
    "thickest_m": _Param("thickest", "length", 1e-5),
    "profile_points": _Param("profile points"),
    "fe_elements": _Param("finite elements along the length"),
    "suspension_points_m": _Param("suspension points (nodes of the first mode), from one end", "length", 1e-4),
    "mass_kg": _Param("mass", "mass", 1e-4),
    # strings and membranes
    "tension_n": _Param("tension", "force", 0.1, solved="tension_solved"),
    "tension_n_per_m": _Param("tension", "membrane_tension", 0.1, solved="tension_solved"),
    "linear_density_kg_m": _Param("mass per length", "linear_density", 1e-6),
    "areal_density_kg_m2": _Param("mass per area", "areal_density", 1e-4),
    "wave_speed_m_s": _Param("wave speed", "speed", 0.1),
    "phase_velocity_m_s": _Param("phase velocity", "speed", 0.1),
    "ideal_fundamental_hz": _Param("fundamental without stiffness", "frequency", 0.01),
    "inharmonicity_b": _Param("inharmonicity B"),  # 4 significant figures: B moves partials by cents
    "stress_pa": _Param("stress", "stress", 1e6),
    "tensile_strength_pa": _Param("tensile strength", "stress", 1e6),
    "stress_percent_of_strength": _Param("stress / tensile strength", "percent", 0.1),
    # bars and plates
    "shear_modulus_pa": _Param("shear modulus", "modulus", 1e7),
    "shear_coefficient": _Param("shear coefficient", None, 0.001),
    "shear_correction": _Param("shear correction"),
    "poisson_ratio": _Param("Poisson's ratio", None, 0.001),
    "flexural_rigidity_n_m": _Param("flexural rigidity", "rigidity"),
    "thin_plate_limit_hz": _Param("thin-plate theory holds below", "frequency", 1.0),
    "rigid_body_modes": _Param("rigid-body modes"),
    "orientation_reference_deg": _Param("mode orientation measured from", "angle", 0.1),
    # air columns
    "temperature_c": _Param("air temperature", "temperature", 0.1),
    "speed_of_sound_m_s": _Param("speed of sound", "speed", 0.01),
    "cross_mode_cut_on_hz": _Param("first cross-mode cut-on (the 1-D model holds below it)", "frequency", 1.0),
    # measured or invented partial sets
    "reference_hz": _Param("ratio 1 at (the patch's fundamental)", "frequency", 0.001, solved="reference_solved"),
    "n_partials": _Param("partials given"),
    "per_partial_t60": _Param("decay times"),
    "per_partial_levels": _Param("levels"),
    # instruments: courses, bridge, polarisations, tubes
    "course_strings": _Param("strings in the course"),
    "course_detune_cents": _Param("course detuning", "cents", 0.1),
    "bridge_conductance_s_kg": _Param("bridge conductance", "admittance"),
    "bridge_susceptance_s_kg": _Param("bridge susceptance", "admittance"),
    "horizontal_conductance_s_kg": _Param("bridge conductance, horizontal polarisation", "admittance"),
    "polarisation_split_cents": _Param("polarisation split", "cents", 0.01),
    "polarisation_angle_deg": _Param("polarisation angle", "angle", 0.1),
    "tube_frequency_hz": _Param("resonator tube tuned to", "frequency", 0.01),
    "tube_t60_s": _Param("resonator tube T60", "time", 0.001),
    "tube_coupling": _Param("bar-tube coupling", None, 1e-4),
    "tube_level": _Param("resonator tube level"),
    "tube_radius_m": _Param("resonator tube radius", "length", 1e-4),
    "tube_length_m": _Param("resonator tube length", "length", 1e-4),
    "detune_cents": _Param("detuned by", "cents", 0.01),
    # how it is played
    "excitation": _Param("excitation"),
    "pickup_measures": _Param("pickup measures"),
    "contact_time_s": _Param("contact time", "short_time", 1e-5),
    "release_time_s": _Param("release time", "short_time", 1e-5),
    # how many modes were computed (pipeline): shown together on one line, see _modes_text
    "modes_limit": _Param("modes"),
    "nyquist_hz": _Param("Nyquist", "frequency", 1.0),
    "bandwidth_hz": _Param("complete up to", "frequency", 1.0),
    "modes_above_nyquist": _Param("modes at or above Nyquist, left out"),
    "omitted_mode": _Param("loudest mode left out"),
    "omitted_mode_hz": _Param("loudest mode left out at", "frequency", 1.0),
    "omitted_mode_level_db": _Param("loudest mode left out, level re the strongest"),
}
#: The keys :func:`_modes_text` writes as one line.
_MODE_KEYS = ("modes_limit", "nyquist_hz", "bandwidth_hz", "modes_above_nyquist", "omitted_mode", "omitted_mode_hz",
              "omitted_mode_level_db")

#: Words for the boolean parameters that are not folded into another line.
_FLAG_WORDS = {
    "per_partial_t60": ("given per partial", "from the damping section"),
    "per_partial_levels": ("given per partial", "from the excitation and pickup"),
}

#: Words after a value that was (or was not) solved for the pitch.
_SOLVED_WORDS = {
    "length_solved": ("solved for the pitch", ""),
    "thickness_solved": ("solved for the pitch", ""),
    "tension_solved": ("solved for the pitch", ""),
    "reference_solved": ("from the pitch", ""),
}


def _decimals(resolution):
    """Decimal places that show a value to `resolution` (in the shown unit)."""
    if resolution <= 0 or not math.isfinite(resolution):
        return 0
    return max(0, min(9, math.ceil(-math.log10(resolution) - 1e-9)))


def _significant(value, digits=4):
    """`value` to `digits` significant figures, without an exponent for everyday magnitudes."""
    if value == 0 or not math.isfinite(value):
        return f"{value:g}"
    magnitude = math.floor(math.log10(abs(value)))
    if -6 <= magnitude < 9:
        return f"{value:.{max(0, digits - 1 - magnitude)}f}"
    return f"{value:.{digits - 1}e}"


def format_quantity(value, quantity, *, units=DEFAULT_UNITS, resolution=None):
    """`value` (SI) as text in `units`: ``"420.0 mm"``, ``"35.8 N"``, ``"0.0412 lbf/in"``.

    Parameters
    ----------
    value : float
        In SI units (m, kg, N, Pa, degC, Hz, s).
    quantity : str or None
        What it measures (``"length"``, ``"force"``, ``"stress"``, ...); None for
        a plain number.
    units : {"si", "workshop", "imperial"}
    resolution : float or None
        How finely the value is read, in SI units (0.1 for a tension read to 0.1 N);
        None shows 4 significant figures.

    Examples
    --------
    >>> format_quantity(0.42, "length")
    '420.0 mm'
    >>> format_quantity(0.42, "length", units="imperial", resolution=1e-4)
    '16.535 in'
    >>> format_quantity(6.1115e8, "stress", resolution=1e6)
    '611 MPa'
    """
    unit = _UNITS[quantity][units] if quantity is not None else _Unit("", 1.0)
    shown = value * unit.scale + unit.offset
    if resolution is None and quantity == "length":
        resolution = 1e-4
    if resolution is None:
        text = _significant(shown)
    else:
        step = resolution * unit.scale
        decimals = _decimals(step)
        if decimals == 0 and step >= 10:  # read to 1 MPa in pascals: 61,000,000 Pa, not 61,023,417 Pa
            shown = round(shown, -int(math.floor(math.log10(step))))
        text = f"{shown:,.0f}" if decimals == 0 and abs(shown) >= 10000 else f"{shown:.{decimals}f}"
        if text.startswith("-") and float(text) == 0:
            text = text[1:]
    if not unit.symbol:
        return text
    return f"{text}{unit.symbol}" if unit.symbol == "°" else f"{text} {unit.symbol}"


def unit_symbol(quantity, units=DEFAULT_UNITS):
    """The symbol `quantity` is shown in under `units` (``"mm"`` for a length in the workshop)."""
    return _UNITS[quantity][units].symbol


def format_number(value, quantity, *, units=DEFAULT_UNITS, resolution=None):
    """:func:`format_quantity` without the unit symbol (for a table whose header carries it)."""
    text = format_quantity(value, quantity, units=units, resolution=resolution)
    symbol = unit_symbol(quantity, units) if quantity is not None else ""
    return text[: -len(symbol)].rstrip() if symbol and text.endswith(symbol) else text


def _signed(text, value):
    return text if value < 0 or text.startswith("-") else f"+{text}"


def _value_text(key, value, units):
    """The shown value of parameter `key` (None when it is not shown on its own line)."""
    spec = _PARAMETERS.get(key)
    if value is None:
        return "unknown"
    if isinstance(value, bool):
        yes, no = _FLAG_WORDS.get(key, ("yes", "no"))
        return yes if value else no
    if key == "material" and value == "custom":
        return "given by its constants in the patch"
    if isinstance(value, str):
        return value
    if isinstance(value, (list, tuple)):
        if spec is not None and spec.quantity is not None:
            symbol = unit_symbol(spec.quantity, units)
            numbers = [format_number(float(v), spec.quantity, units=units, resolution=spec.resolution) for v in value]
            if spec.quantity == "cents":
                numbers = [_signed(n, float(v)) for n, v in zip(numbers, value)]
            return f"{', '.join(numbers)}{'' if symbol == '°' else ' '}{symbol}"
        return ", ".join(str(v) for v in value)
    if isinstance(value, (int, np.integer)) and (spec is None or spec.quantity is None) and (spec is None or spec.resolution is None):
        return f"{int(value)}"
    if spec is None:
        return _significant(float(value))
    return format_quantity(float(value), spec.quantity, units=units, resolution=spec.resolution)


def _label(key):
    spec = _PARAMETERS.get(key)
    if spec is not None:
        return spec.label
    for suffix in ("_hz", "_m", "_s", "_n", "_pa", "_kg"):
        if key.endswith(suffix):
            key = key[: -len(suffix)]
            break
    return key.replace("_", " ")


def parameter_lines(parameters, *, units=DEFAULT_UNITS):
    """``(label, shown value)`` of each parameter, in the order given.

    Flags saying whether a value was solved for the pitch are folded into that
    value's line (``tension: 35.8 N (solved for the pitch)``).

    Examples
    --------
    >>> parameter_lines({"tension_n": 35.7999, "tension_solved": True, "diameter_m": 0.00091})
    [('tension', '35.8 N (solved for the pitch)'), ('diameter', '0.91 mm')]
    """
    folded = {_PARAMETERS[k].solved for k in parameters if k in _PARAMETERS and _PARAMETERS[k].solved}
    if "modes_limit" in parameters:
        folded.update(k for k in _MODE_KEYS if k != "modes_limit")
    lines = []
    for key, value in parameters.items():
        if key in folded:
            continue
        if key == "modes_limit":
            lines.append(("modes", _modes_text(parameters)))
            continue
        text = _value_text(key, value, units)
        spec = _PARAMETERS.get(key)
        if spec is not None and spec.solved is not None and spec.solved in parameters:
            words = _SOLVED_WORDS[spec.solved][0 if parameters[spec.solved] else 1]
            text += f" ({words})" if words else ""
        lines.append((_label(key), text))
    return lines


def _hz(value):
    """A frequency as the report's mode line shows it: whole Hz from 100 Hz up."""
    return f"{value:.0f} Hz" if value >= 100 else f"{value:.3g} Hz"


def _modes_text(parameters):
    """What ended the list of modes, on one line (the pipeline's ``modes_limit`` and its companions)."""
    limit = parameters["modes_limit"]
    nyquist = parameters.get("nyquist_hz")
    complete = parameters.get("bandwidth_hz")
    if limit == "every mode below Nyquist" and nyquist is not None:
        return f"every mode below Nyquist ({_hz(nyquist)})"
    if limit == "render.max_modes":
        text = "cut by render.max_modes" + (f" at {_hz(complete)}" if complete is not None else "")
        if parameters.get("omitted_mode") is not None:
            level = parameters.get("omitted_mode_level_db")
            heard = "on a node" if level is None else f"{level:.0f} dB re the strongest"
            text += (f"; loudest mode left out {parameters['omitted_mode']} at {_hz(parameters['omitted_mode_hz'])}, "
                     f"{heard}")
        return text
    text = str(limit)
    if complete is not None:
        text += f", up to {_hz(complete)}"
    if nyquist is not None:
        text += f" (Nyquist {_hz(nyquist)})"
    return text


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
                header = f"{header} {_UNITS['length'][units].symbol}"
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


def table_to_text(table, *, max_rows=None, units=DEFAULT_UNITS, source=None, warnings=True):
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
        command = f"synth modes {source}" if source else "synth modes"
        lines.append(f"... {len(data['modes']) - max_rows} more modes ({command} lists them all)")
    if warnings:
        lines += [f"warning: {w}" for w in data["warnings"]]
    return "\n".join(lines)
