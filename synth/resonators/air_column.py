"""Plane-wave modes of a cylindrical air column: open-open or closed-open.

Notes
-----
Speed of sound: Cramer's interpolating equation for the zero-frequency speed
of sound in humid air [3]_, from the temperature t (degC), the pressure p (Pa),
the water-vapour mole fraction x_w and the CO2 mole fraction x_c::

    c = a0 + a1 t + a2 t^2 + (a3 + a4 t + a5 t^2) x_w + (a6 + a7 t + a8 t^2) p
        + (a9 + a10 t + a11 t^2) x_c + a12 x_w^2 + a13 p^2 + a14 x_c^2 + a15 x_w p x_c

with ``x_w = (RH / 100) f psv / p``, the enhancement factor ``f = 1.00062 +
3.14e-8 p + 5.6e-7 t^2`` and the saturation vapour pressure ``psv = exp(A T^2
+ B T + C + D / T)`` Pa (T in K; Davis 1992's coefficients [4]_, as the NPL
calculator uses them).  CO2 is taken as 400 ppm (the NPL calculator's value;
Cramer used 314 ppm, 0.04 cent higher).  Cramer fits 0-30 degC, 75-102 kPa and
x_w up to 0.06 (uncertainty under 300 ppm); outside 0-30 degC the polynomial is
extrapolated (within 1 cent of the dry ideal gas from -30 to 60 degC), and a
humidity beyond x_w = 0.06 is refused.  Against the former ``331.3 sqrt(1 +
T/273.15)`` dry air is 0.1-0.8 cent higher, and 50 % relative humidity adds
about 3 cents at 20 degC.
An unflanged open end of a thin-walled pipe of radius ``a`` radiates as if
the pipe were ``delta = 0.6133 a`` longer (Levine & Schwinger 1948, the
low-frequency limit).  With ``L_e`` the effective length:

* open-open, ``L_e = L + 2 delta``: ``f_n = n c / (2 L_e)``, every harmonic;
  pressure ``p_n(x) = sin(n pi (x + delta) / L_e)``.
* closed-open, ``L_e = L + delta`` (closed end at x = 0, a pressure
  antinode): ``f_n = (2n - 1) c / (4 L_e)``, odd harmonics only; pressure
  ``p_n(x) = cos((2n - 1) pi x / (2 L_e))``.

Positions are fractions of the physical length from the x = 0 end (the closed
end of a closed-open pipe).  Shapes are scaled to a mean square of 1 over the
effective length (a common modal mass).  The one-dimensional model holds
below the cut-on of the first cross mode, ``ka = 1.8412`` (the first zero of
J_1'); modes at or above it are left out: the model has no more, which a
table records as information, not a warning (its ``cross_mode_cut_on_hz``,
and where the cut-on lies below Nyquist ``modes_limit`` "every mode the model
has" with ``bandwidth_hz``, :func:`synth.pipeline.unweighted_partials`), as
it does for the modes at or above Nyquist.

References
----------
.. [1] H. Levine and J. Schwinger, "On the radiation of sound from an
   unflanged circular pipe", Phys. Rev. 73(4), 383-406 (1948).
.. [2] N. H. Fletcher and T. D. Rossing, *The Physics of Musical Instruments*,
   2nd ed., Springer (1998), ch. 8 (pipes and end corrections).
.. [3] O. Cramer, "The variation of the specific heat ratio and the speed of
   sound in air with temperature, pressure, humidity, and CO2 concentration",
   J. Acoust. Soc. Am. 93(5), 2510-2516 (1993), eq. (15) and Table III (the
   coefficients as reproduced by the USP "Speed of Sound Calculator" page and
   a MATLAB implementation seen via search).
.. [4] R. S. Davis, "Equation for the determination of the density of moist
   air (1981/91)", Metrologia 29, 67-70 (1992).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np

from ..modes import Solution, frozen_array
from ..schema import Field, convert
from .common import SpecError, UnreachablePitch

__all__ = [
    "FIELDS",
    "AirColumnSpec",
    "build_spec",
    "position_style",
    "modes",
    "solve",
    "count_below",
    "retune",
    "air_column_modes",
    "speed_of_sound",
    "end_correction",
    "effective_length",
    "solve_length",
    "cutoff_frequency",
    "ENDS",
    "UNFLANGED_END_CORRECTION",
    "CELSIUS_ZERO_K",
    "DEFAULT_HUMIDITY_PERCENT",
    "STANDARD_PRESSURE_PA",
    "CO2_MOLE_FRACTION",
    "MAX_WATER_MOLE_FRACTION",
    "water_mole_fraction",
    "CROSS_MODE_KA",
    "PITCH_REPLACES",
    "UnreachablePitch",
]

#: Pipe end conditions a patch may name.
ENDS = ("open-open", "closed-open")
#: End correction of an unflanged thin-walled open end, per radius (Levine & Schwinger 1948).
UNFLANGED_END_CORRECTION = 0.6133
#: 0 degC in kelvin (K).
CELSIUS_ZERO_K = 273.15
#: Relative humidity (%) unless the patch says: indoor air of a heated or air-conditioned room
#: is kept at 30-60 % (common practice); 50 % is its middle and the NPL calculator's default.
DEFAULT_HUMIDITY_PERCENT = 50.0
#: Standard atmosphere (Pa), ISO 2533.
STANDARD_PRESSURE_PA = 101325.0
#: CO2 mole fraction: 400 ppm, the NPL speed-of-sound calculator's value (about today's outdoor air).
CO2_MOLE_FRACTION = 400e-6
#: Largest water-vapour mole fraction Cramer's equation covers.
MAX_WATER_MOLE_FRACTION = 0.06
#: Cramer 1993, eq. (15): a0 .. a15 (t in degC, p in Pa, mole fractions).
_CRAMER = (331.5024, 0.603055, -0.000528, 51.471935, 0.1495874, -0.000782, -1.82e-7, 3.73e-8, -2.93e-10,
           -85.20931, -0.228525, 5.91e-5, -2.835149, -2.15e-13, 29.179762, 0.000486)
#: Saturation vapour pressure over water, psv = exp(A T^2 + B T + C + D / T) Pa, T in K (Davis 1992).
_PSV = (1.2378847e-5, -1.9121316e-2, 33.93711047, -6.3431645e3)
#: Enhancement factor f = f0 + f1 p + f2 t^2 (p in Pa, t in degC; Cramer 1993 / Davis 1992).
_ENHANCEMENT = (1.00062, 3.14e-8, 5.6e-7)
#: ka where the first non-planar (1,0) mode of a circular duct cuts on:
#: the first zero of J_1' (dimensionless).
CROSS_MODE_KA = 1.8411837813
#: Keys a command-line ``--pitch`` replaces (for the patch loader).
PITCH_REPLACES = ("length",)

_HUMIDITY = Field("number", low=0.0, high=100.0, takes="a relative humidity in percent, 0..100, e.g. 50 or '50 %'")

#: Patch keys of an air column (besides ``type``).
FIELDS = {
    "length": Field("length", positive=True),
    "pitch": Field("pitch", positive=True),
    "radius": Field("length", required=True, positive=True),
    "ends": Field("choice", default="open-open", choices=ENDS),
    # Air temperature; the range catches a kelvin value written as degC.
    "temperature": Field("temperature", default=20.0, low=-50.0, high=100.0),
    # Relative humidity in percent: a number or "50 %" (checked by _humidity).
    "humidity": Field("any", default=DEFAULT_HUMIDITY_PERCENT, takes=_HUMIDITY.takes),
    # Cramer fits 75-102 kPa; the pressure terms are small (0.05 m/s over that span), so a little beyond is kept.
    "pressure": Field("pressure", default=STANDARD_PRESSURE_PA, low=60e3, high=110e3),
}


@dataclass(frozen=True)
class AirColumnSpec:
    """A cylindrical pipe in SI units (temperature in degC).

    Attributes
    ----------
    length : float > 0, m
        Physical length (solved from `pitch_hz` where that was given).
    radius : float > 0, m
    ends : {"open-open", "closed-open"}
    temperature : float, degC
    pitch_hz : float or None, Hz
        The pitch the length was solved for (report only).
    humidity : float, % (0..100)
        Relative humidity of the air.
    pressure : float, Pa
        Air pressure.
    """

    length: float
    radius: float
    ends: str = "open-open"
    temperature: float = 20.0
    pitch_hz: float | None = None
    humidity: float = DEFAULT_HUMIDITY_PERCENT
    pressure: float = STANDARD_PRESSURE_PA

    @property
    def speed_of_sound(self):
        """Speed of sound (m/s) in this pipe's air (:func:`speed_of_sound`)."""
        return speed_of_sound(self.temperature, humidity=self.humidity, pressure=self.pressure)

    TYPE: ClassVar[str] = "air-column"


def _humidity(value):
    """Relative humidity (%) from a number or a text ending in '%'; SpecError names the key."""
    if isinstance(value, str) and value.strip().endswith("%"):
        value = value.strip()[:-1].strip()
    try:
        return float(convert(_HUMIDITY, value))
    except ValueError as error:
        raise SpecError(f"{error} ({_HUMIDITY.takes})", key="humidity") from None


def build_spec(values):
    """An :class:`AirColumnSpec` from checked patch values; `pitch` solves the length."""
    length, pitch = values["length"], values["pitch"]
    if (length is None) == (pitch is None):
        raise SpecError(
            "give exactly one of 'pitch' (the length is solved) or 'length'",
            key="pitch" if pitch is not None else None,
        )
    spec = AirColumnSpec(length=1.0, radius=values["radius"], ends=values["ends"], temperature=values["temperature"],
                         humidity=_humidity(values["humidity"]), pressure=values["pressure"])
    fraction = water_mole_fraction(spec.temperature, humidity=spec.humidity, pressure=spec.pressure)
    if fraction > MAX_WATER_MOLE_FRACTION:
        raise SpecError(f"at {spec.temperature:g} degC a humidity of {spec.humidity:g} % is a water-vapour mole "
                        f"fraction of {fraction:.3f}, beyond the {MAX_WATER_MOLE_FRACTION} Cramer's speed of sound "
                        "covers: lower the humidity", key="humidity")
    try:
        if pitch is not None:
            return retune(spec, pitch)
        spec = replace(spec, length=length)
        _check_plane_wave(spec)
    except UnreachablePitch as error:
        raise SpecError(str(error), key="pitch" if pitch is not None else "radius") from None
    return spec


def position_style(spec):
    """Positions along a pipe are fractions of its length (from the closed end)."""
    return "fraction"


def retune(spec, pitch_hz):
    """The pipe cut to the length whose lowest mode sounds at `pitch_hz`."""
    length = solve_length(pitch_hz, radius=spec.radius, ends=spec.ends, temperature=spec.temperature,
                          humidity=spec.humidity, pressure=spec.pressure)
    tuned = replace(spec, length=length, pitch_hz=pitch_hz)
    _check_plane_wave(tuned)
    return tuned


def water_mole_fraction(temperature, *, humidity=DEFAULT_HUMIDITY_PERCENT, pressure=STANDARD_PRESSURE_PA):
    """Mole fraction of water vapour in air at `temperature` (degC), `humidity` (%) and `pressure` (Pa).

    ``x_w = (RH / 100) f psv / p`` (module notes; Davis 1992).
    """
    kelvin = temperature + CELSIUS_ZERO_K
    a, b, c, d = _PSV
    saturation = math.exp(a * kelvin * kelvin + b * kelvin + c + d / kelvin)
    f0, f1, f2 = _ENHANCEMENT
    enhancement = f0 + f1 * pressure + f2 * temperature * temperature
    return humidity / 100.0 * enhancement * saturation / pressure


def speed_of_sound(temperature, *, humidity=DEFAULT_HUMIDITY_PERCENT, pressure=STANDARD_PRESSURE_PA):
    """Speed of sound (m/s) in air at `temperature` (degC), `humidity` (% RH) and `pressure` (Pa): Cramer 1993.

    Parameters
    ----------
    temperature : float, degC
    humidity : float, % (0..100)
        Relative humidity; default :data:`DEFAULT_HUMIDITY_PERCENT`.
    pressure : float, Pa
        Default :data:`STANDARD_PRESSURE_PA`.

    Returns
    -------
    float, m/s
        The zero-frequency speed of sound with CO2 at :data:`CO2_MOLE_FRACTION`.

    >>> round(speed_of_sound(20.0, humidity=0.0), 2), round(speed_of_sound(20.0, humidity=50.0), 2)
    (343.36, 343.99)
    """
    a = _CRAMER
    t, p = temperature, pressure
    x_w = water_mole_fraction(t, humidity=humidity, pressure=p)
    x_c = CO2_MOLE_FRACTION
    return (a[0] + a[1] * t + a[2] * t * t
            + (a[3] + a[4] * t + a[5] * t * t) * x_w
            + (a[6] + a[7] * t + a[8] * t * t) * p
            + (a[9] + a[10] * t + a[11] * t * t) * x_c
            + a[12] * x_w * x_w + a[13] * p * p + a[14] * x_c * x_c + a[15] * x_w * p * x_c)


def end_correction(radius):
    """Length (m) added by one unflanged open end: 0.6133 a (Levine & Schwinger 1948)."""
    return UNFLANGED_END_CORRECTION * radius


def _open_ends(ends):
    return 2 if ends == "open-open" else 1


def effective_length(length, radius, ends):
    """Acoustic length (m): the physical length plus one end correction per open end."""
    return length + _open_ends(ends) * end_correction(radius)


def cutoff_frequency(radius, temperature, *, humidity=DEFAULT_HUMIDITY_PERCENT, pressure=STANDARD_PRESSURE_PA):
    """Cut-on frequency (Hz) of the first cross mode: ka = 1.8412."""
    c = speed_of_sound(temperature, humidity=humidity, pressure=pressure)
    return CROSS_MODE_KA * c / (2.0 * math.pi * radius)


def _quarter_waves(ends):
    """Effective length of the lowest mode, in wavelengths: 1/2 or 1/4."""
    return 0.5 if ends == "open-open" else 0.25


def solve_length(pitch_hz, *, radius, ends, temperature=20.0, humidity=DEFAULT_HUMIDITY_PERCENT,
                 pressure=STANDARD_PRESSURE_PA):
    """Physical length (m) whose lowest mode sounds at `pitch_hz`.

    ``L = c / (2 f) - 2 delta`` (open-open) or ``c / (4 f) - delta`` (closed-open).

    Raises
    ------
    UnreachablePitch
        If the end corrections alone are longer than that.
    """
    c = speed_of_sound(temperature, humidity=humidity, pressure=pressure)
    acoustic = _quarter_waves(ends) * c / pitch_hz
    length = acoustic - _open_ends(ends) * end_correction(radius)
    if length <= 0.0:
        top = _quarter_waves(ends) * c / (_open_ends(ends) * end_correction(radius))
        raise UnreachablePitch(
            f"pitch {pitch_hz:.4g} Hz is above what a {ends} pipe of radius {radius * 1000:.4g} mm can sound "
            f"(its end corrections alone give about {top:.4g} Hz): make the radius smaller or lower the pitch"
        )
    return length


def _check_plane_wave(spec):
    c = spec.speed_of_sound
    lowest = _quarter_waves(spec.ends) * c / effective_length(spec.length, spec.radius, spec.ends)
    cutoff = CROSS_MODE_KA * c / (2.0 * math.pi * spec.radius)
    if lowest >= cutoff:
        raise UnreachablePitch(
            f"a pipe of radius {spec.radius * 1000:.4g} mm is too wide for its lowest mode ({lowest:.4g} Hz): "
            f"it lies above the first cross-mode cut-on ({cutoff:.4g} Hz), where the pipe is no longer "
            "one-dimensional; make it narrower or longer, or lower the pitch"
        )


def _harmonics(ends, n):
    return n if ends == "open-open" else 2 * n - 1


def _pressure_shape(ends, harmonic, x, length, delta, l_eff):
    """Pressure shape (mean square 1 over L_e) at physical positions x (m)."""
    if ends == "open-open":
        return math.sqrt(2.0) * np.sin(harmonic * math.pi * (x + delta) / l_eff)
    return math.sqrt(2.0) * np.cos(harmonic * math.pi * x / (2.0 * l_eff))


def _pressure_nodes(ends, harmonic, length, delta, l_eff):
    """Pressure nodes inside the pipe, as fractions of the physical length."""
    if ends == "open-open":
        nodes = [k * l_eff / harmonic - delta for k in range(1, harmonic)]
    else:
        nodes = [(2 * k - 1) * l_eff / harmonic for k in range(1, (harmonic + 1) // 2)]
    return tuple(float(x / length) for x in nodes if 0.0 <= x <= length)


def solve(spec, n_modes):
    """Pressure modes of a cylindrical pipe, before it is excited or heard anywhere.

    Parameters
    ----------
    spec : AirColumnSpec
    n_modes : int >= 1

    Returns
    -------
    Solution
        Shapes at fractions of the physical length from the x = 0 end
        (closed end of a closed-open pipe).  Labels ``"n=1"``...; columns
        harmonic (odd only for closed-open), wavelength_m and node_positions
        (pressure nodes inside the pipe, fractions of the length); parameters
        speed of sound, end correction, effective length, cut-on frequency.
    """
    c = spec.speed_of_sound
    delta = end_correction(spec.radius)
    l_eff = effective_length(spec.length, spec.radius, spec.ends)
    cutoff = CROSS_MODE_KA * c / (2.0 * math.pi * spec.radius)
    n = np.arange(1, n_modes + 1)
    harmonic = _harmonics(spec.ends, n)
    freq = harmonic * _quarter_waves(spec.ends) * c / l_eff
    keep = freq < cutoff  # the pipe is not one-dimensional above: the model's modes end there
    n, harmonic, freq = n[keep], harmonic[keep], freq[keep]
    wavelength = c / freq
    columns = {
        "harmonic": tuple(int(h) for h in harmonic),
        "wavelength_m": tuple(float(w) for w in wavelength),
        "node_positions": tuple(_pressure_nodes(spec.ends, int(h), spec.length, delta, l_eff) for h in harmonic),
    }
    parameters = {
        "ends": spec.ends,
        "length_m": spec.length,
        "length_solved": spec.pitch_hz is not None,
        "radius_m": spec.radius,
        "temperature_c": spec.temperature,
        "humidity_percent": spec.humidity,
        **({} if spec.pressure == STANDARD_PRESSURE_PA else {"air_pressure_pa": spec.pressure}),
        "speed_of_sound_m_s": c,
        "end_correction_m": delta,
        "effective_length_m": l_eff,
        "cross_mode_cut_on_hz": cutoff,
    }

    def shape(position):
        return _pressure_shape(spec.ends, harmonic, position * spec.length, spec.length, delta, l_eff)

    return Solution(
        resonator="air-column",
        frequency_hz=frozen_array(freq),
        labels=tuple(f"n={k}" for k in n),
        shape=shape,
        columns=columns,
        parameters=parameters,
        warnings=(),
    )


def count_below(spec, limit_hz):
    """How many plane-wave modes of `spec` lie below `limit_hz` (exact; those at or above the cut-on included)."""
    lowest = _quarter_waves(spec.ends) * spec.speed_of_sound / effective_length(
        spec.length, spec.radius, spec.ends)
    steps = limit_hz / lowest  # harmonics of the lowest mode below the limit: n or 2n - 1 of them
    n = math.ceil(steps) if spec.ends == "open-open" else math.ceil((steps + 1.0) / 2.0)
    return max(0, int(n) - 1)


def air_column_modes(spec, *, excitation_position, pickup_position, n_modes):
    """Pressure modes of a pipe excited and heard at fractions of its length (see :func:`solve`).

    Returns
    -------
    ModeSet
    """
    return solve(spec, n_modes).place(excitation_position, pickup_position)


modes = air_column_modes
