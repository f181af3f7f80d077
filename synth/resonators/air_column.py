"""Plane-wave modes of a cylindrical air column: open-open or closed-open.

Notes
-----
Speed of sound in dry air at ``T`` degC: ``c = 331.3 sqrt(1 + T / 273.15)``
m/s (the ideal-gas law ``c = sqrt(gamma R T_K)`` written around 0 degC).
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
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np

from ..modes import Solution, frozen_array
from ..schema import Field
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
    "SPEED_OF_SOUND_0C",
    "CELSIUS_ZERO_K",
    "CROSS_MODE_KA",
    "PITCH_REPLACES",
    "UnreachablePitch",
]

#: Pipe end conditions a patch may name.
ENDS = ("open-open", "closed-open")
#: End correction of an unflanged thin-walled open end, per radius (Levine & Schwinger 1948).
UNFLANGED_END_CORRECTION = 0.6133
#: Speed of sound in dry air at 0 degC (m/s); REFERENCES.md sec. 6.
SPEED_OF_SOUND_0C = 331.3
#: 0 degC in kelvin (K).
CELSIUS_ZERO_K = 273.15
#: ka where the first non-planar (1,0) mode of a circular duct cuts on:
#: the first zero of J_1' (dimensionless).
CROSS_MODE_KA = 1.8411837813
#: Keys a command-line ``--pitch`` replaces (for the patch loader).
PITCH_REPLACES = ("length",)

#: Patch keys of an air column (besides ``type``).
FIELDS = {
    "length": Field("length", positive=True),
    "pitch": Field("pitch", positive=True),
    "radius": Field("length", required=True, positive=True),
    "ends": Field("choice", default="open-open", choices=ENDS),
    # Air temperature; the range catches a kelvin value written as degC.
    "temperature": Field("temperature", default=20.0, low=-50.0, high=100.0),
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
    """

    length: float
    radius: float
    ends: str = "open-open"
    temperature: float = 20.0
    pitch_hz: float | None = None

    TYPE: ClassVar[str] = "air-column"


def build_spec(values):
    """An :class:`AirColumnSpec` from checked patch values; `pitch` solves the length."""
    length, pitch = values["length"], values["pitch"]
    if (length is None) == (pitch is None):
        raise SpecError(
            "give exactly one of 'pitch' (the length is solved) or 'length'",
            key="pitch" if pitch is not None else None,
        )
    spec = AirColumnSpec(length=1.0, radius=values["radius"], ends=values["ends"], temperature=values["temperature"])
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
    length = solve_length(pitch_hz, radius=spec.radius, ends=spec.ends, temperature=spec.temperature)
    tuned = replace(spec, length=length, pitch_hz=pitch_hz)
    _check_plane_wave(tuned)
    return tuned


def speed_of_sound(temperature):
    """Speed of sound (m/s) in dry air at `temperature` (degC): 331.3 sqrt(1 + T/273.15)."""
    return SPEED_OF_SOUND_0C * math.sqrt(1.0 + temperature / CELSIUS_ZERO_K)


def end_correction(radius):
    """Length (m) added by one unflanged open end: 0.6133 a (Levine & Schwinger 1948)."""
    return UNFLANGED_END_CORRECTION * radius


def _open_ends(ends):
    return 2 if ends == "open-open" else 1


def effective_length(length, radius, ends):
    """Acoustic length (m): the physical length plus one end correction per open end."""
    return length + _open_ends(ends) * end_correction(radius)


def cutoff_frequency(radius, temperature):
    """Cut-on frequency (Hz) of the first cross mode: ka = 1.8412."""
    return CROSS_MODE_KA * speed_of_sound(temperature) / (2.0 * math.pi * radius)


def _quarter_waves(ends):
    """Effective length of the lowest mode, in wavelengths: 1/2 or 1/4."""
    return 0.5 if ends == "open-open" else 0.25


def solve_length(pitch_hz, *, radius, ends, temperature=20.0):
    """Physical length (m) whose lowest mode sounds at `pitch_hz`.

    ``L = c / (2 f) - 2 delta`` (open-open) or ``c / (4 f) - delta`` (closed-open).

    Raises
    ------
    UnreachablePitch
        If the end corrections alone are longer than that.
    """
    c = speed_of_sound(temperature)
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
    c = speed_of_sound(spec.temperature)
    lowest = _quarter_waves(spec.ends) * c / effective_length(spec.length, spec.radius, spec.ends)
    cutoff = cutoff_frequency(spec.radius, spec.temperature)
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
    c = speed_of_sound(spec.temperature)
    delta = end_correction(spec.radius)
    l_eff = effective_length(spec.length, spec.radius, spec.ends)
    cutoff = cutoff_frequency(spec.radius, spec.temperature)
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
    lowest = _quarter_waves(spec.ends) * speed_of_sound(spec.temperature) / effective_length(
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
