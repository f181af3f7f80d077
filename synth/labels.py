"""How a report parameter reads: its label, its unit in the chosen system and its precision.

Every parameter a resonator, the coupling or the pipeline reports (SI values
under unit-suffixed keys) has an entry in :data:`_PARAMETERS`: the label a maker
would write, the quantity it measures and the resolution it is read to (tension
to 0.1 N, stress to 1 MPa, lengths to 0.1 mm).  :func:`parameter_lines` turns a
table's parameters into ``(label, text)`` pairs in one of :data:`UNIT_SYSTEMS`;
:mod:`synth.report` lays them out.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["UNIT_SYSTEMS", "DEFAULT_UNITS", "format_quantity", "format_number", "unit_symbol", "parameter_lines"]

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
    # wound strings (resonators/string.py: the wrap adds mass, the core alone bends and carries the tension)
    "core_diameter_m": _Param("core diameter", "length", 1e-5),
    "winding_material": _Param("winding"),
    "winding_wire_m": _Param("winding wire diameter", "length", 1e-5),
    "winding_2_material": _Param("second winding (outer layer)"),
    "winding_2_wire_m": _Param("second winding wire diameter", "length", 1e-5),
    "outer_diameter_m": _Param("outer diameter (over the winding)", "length", 1e-5),
    "winding_mass_percent": _Param("winding's share of the mass", "percent", 0.1),
    "solid_inharmonicity_b": _Param("inharmonicity B of a solid string as thick, same f0"),
    "stress_pa": _Param("stress", "stress", 1e6),
    "tensile_strength_pa": _Param("tensile strength", "stress", 1e6),
    "stress_percent_of_strength": _Param("stress / tensile strength", "percent", 0.1),
    # bars and plates
    "shear_modulus_pa": _Param("shear modulus", "modulus", 1e7),
    "shear_coefficient": _Param("shear coefficient", None, 0.001),
    "shear_correction": _Param("shear correction"),
    "shear_cutoff_hz": _Param("second-spectrum cut-off (shear modes S1, S2, ... lie above it)", "frequency", 1.0),
    "shear_coefficient_rule": _Param("shear coefficient from"),
    "poisson_ratio": _Param("Poisson's ratio", None, 0.001),
    "flexural_rigidity_n_m": _Param("flexural rigidity", "rigidity"),
    "thin_plate_limit_hz": _Param("thin-plate theory holds below", "frequency", 1.0),
    "rigid_body_modes": _Param("rigid-body modes"),
    "orientation_reference_deg": _Param("mode orientation measured from", "angle", 0.1),
    # torsional modes of bars (synth.resonators.torsion)
    "torsion_ends": _Param("torsion held at the ends"),
    "torsion_constant_m4": _Param("torsion constant J (m⁴)"),
    "polar_moment_m4": _Param("polar moment of area (m⁴)"),
    "torsion_wave_speed_m_s": _Param("torsional wave speed", "speed", 0.1),
    "torsion_solver": _Param("torsional modes solved by"),
    "torsion_fe_elements": _Param("torsion finite elements"),
    "torsion_modes": _Param("torsional modes listed"),
    "bending_fundamental_hz": _Param("first bending mode (the fundamental)", "frequency", 0.01),
    # air-loaded membranes (synth.resonators.air_loading)
    "air": _Param("air loading"),
    "kettle_volume_m3": _Param("kettle volume (m³)", None, 1e-4),
    # air columns
    "temperature_c": _Param("air temperature", "temperature", 0.1),
    "speed_of_sound_m_s": _Param("speed of sound", "speed", 0.01),
    "humidity_percent": _Param("relative humidity", "percent", 1.0),
    "air_pressure_pa": _Param("air pressure (Pa)", None, 1.0),
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
    # a recording (synth fit) and the model fitted to it
    "recording_file": _Param("recording"),
    "channel": _Param("channel analysed"),
    "recording_sample_rate_hz": _Param("sample rate", "frequency", 1.0),
    "onset_s": _Param("note starts at", "time", 0.001),
    "analysed_s": _Param("analysed", "time", 0.01),
    "noise_floor_dbfs": _Param("noise floor (dBFS)", None, 0.1),
    "snr_db": _Param("strongest partial over the noise floor (dB)", None, 0.1),
    "rejected_components": _Param("components rejected"),
    "method": _Param("method"),
    "model": _Param("model"),
    "ideal_fundamental_sd_hz": _Param("fundamental without stiffness, 1 sigma (Hz)"),
    "inharmonicity_sd": _Param("inharmonicity B, 1 sigma"),
    "family_scale_hz": _Param("the family's first mode at", "frequency", 0.01),
    "missing_members": _Param("model partials not found"),
    "matched_partials": _Param("partials on the model"),
    "fit_rms_cents": _Param("fit residual (rms)", "cents", 0.01),
    "decay_law": _Param("decay law"),
    # how it is played
    "excitation": _Param("excitation"),
    "pickup_measures": _Param("pickup measures"),
    "contact_time_s": _Param("contact time", "short_time", 1e-5),
    "release_time_s": _Param("release time", "short_time", 1e-5),
    "mallet": _Param("mallet (mass, F = K x^p, speed)"),
    "damping_law": _Param("damping law"),
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
