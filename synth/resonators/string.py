"""Transverse modes of a stiff string with pinned or clamped ends.

Notes
-----
Ideal string (Mersenne's laws / Taylor): ``f_n = n / (2 L) * sqrt(T / mu)``
with ``mu = rho * pi * d**2 / 4``.  Stiffness (Fletcher 1964):
``f_n = n f_0 sqrt(1 + B n**2)``, ``B = pi**3 E d**4 / (64 T L**2)``; clamped
ends multiply every frequency by ``1 + 2 sqrt(B) / pi + 4 B / pi**2``.
A pinned stiff string keeps the mode shapes ``sin(n pi x / L)`` exactly; for
clamped ends the sine is used as the (close) approximation away from the ends.

References
----------
.. [1] H. Fletcher, "Normal vibration frequencies of a stiff piano string",
   J. Acoust. Soc. Am. 36(1), 203-209 (1964).
.. [2] N. H. Fletcher and T. D. Rossing, *The Physics of Musical Instruments*,
   2nd ed., Springer (1998), ch. 2.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np
from ..modes import EvenNodes, Solution, frozen_array
from ..schema import Field
from .common import SAFE_STRESS_FRACTION, SpecError, UnreachablePitch, stress_warnings

__all__ = [
    "FIELDS",
    "PITCH_REPLACES",
    "StringSpec",
    "build_spec",
    "position_style",
    "modes",
    "solve",
    "count_below",
    "retune",
    "string_modes",
    "linear_density",
    "inharmonicity",
    "stiff_string_frequencies",
    "clamped_factor",
    "solve_tension",
    "SAFE_STRESS_FRACTION",
    "UnreachablePitch",
]

#: Patch keys of a string (besides ``type``).
FIELDS = {
    "material": Field("any", required=True),
    "length": Field("length", required=True, positive=True),
    "diameter": Field("length", required=True, positive=True),
    "pitch": Field("pitch", positive=True),
    "tension": Field("force", positive=True),
    "ends": Field("choice", default="pinned", choices=("pinned", "clamped")),
}

#: Keys a command-line ``--pitch`` replaces (for the patch loader).
PITCH_REPLACES = ("tension",)


@dataclass(frozen=True)
class StringSpec:
    """A string in SI units.

    Attributes
    ----------
    length : float > 0, m
    diameter : float > 0, m
    density : float > 0, kg/m^3
    youngs_modulus : float >= 0, Pa
    tension : float > 0 or None, N
        Give `tension` or `pitch_hz`, not both.
    pitch_hz : float > 0 or None, Hz
        Pitch of the lowest partial; the tension is solved for it.
    ends : {"pinned", "clamped"}
    tensile_strength : float or None, Pa
    material : str
        Name for the report.
    """

    length: float
    diameter: float
    density: float
    youngs_modulus: float
    tension: float | None = None
    pitch_hz: float | None = None
    ends: str = "pinned"
    tensile_strength: float | None = None
    material: str = "custom"

    TYPE: ClassVar[str] = "string"


def build_spec(values):
    """A :class:`StringSpec` from checked patch values (``material`` is a Material)."""
    if (values["pitch"] is None) == (values["tension"] is None):
        raise SpecError("give exactly one of 'pitch' (the tension is solved) or 'tension'", key="pitch" if values["pitch"] is not None else None)
    material = values["material"]
    return StringSpec(
        length=values["length"],
        diameter=values["diameter"],
        density=material.density,
        youngs_modulus=material.youngs_modulus,
        tension=values["tension"],
        pitch_hz=values["pitch"],
        ends=values["ends"],
        tensile_strength=material.strength_at(values["diameter"]),
        material=material.name,
    )


def position_style(spec):
    """Positions on a string are fractions of its length."""
    return "fraction"


def retune(spec, pitch_hz):
    """The string re-tensioned so its lowest partial sounds at `pitch_hz`."""
    retuned = replace(spec, tension=None, pitch_hz=pitch_hz)
    solve_tension(pitch_hz, length=spec.length, diameter=spec.diameter, density=spec.density, youngs_modulus=spec.youngs_modulus, ends=spec.ends)
    return retuned




def linear_density(density, diameter):
    """Mass per length (kg/m) of a round solid string: rho pi d^2 / 4."""
    return density * math.pi * diameter**2 / 4.0


def inharmonicity(youngs_modulus, diameter, tension, length):
    """Fletcher's inharmonicity coefficient B = pi^3 E d^4 / (64 T L^2)."""
    return math.pi**3 * youngs_modulus * diameter**4 / (64.0 * tension * length**2)


def clamped_factor(b):
    """Fletcher's clamped-end factor 1 + 2 sqrt(B)/pi + 4 B/pi^2."""
    return 1.0 + 2.0 * math.sqrt(b) / math.pi + 4.0 * b / math.pi**2


def stiff_string_frequencies(n, *, length, tension, mu, b, ends="pinned"):
    """Frequencies (Hz) of modes `n` of a stiff string.

    Parameters
    ----------
    n : array_like of int >= 1
    length : float, m
    tension : float, N
    mu : float, kg/m
    b : float
        Inharmonicity coefficient.
    ends : {"pinned", "clamped"}
    """
    n = np.asarray(n, dtype=float)
    f0 = math.sqrt(tension / mu) / (2.0 * length)
    f = n * f0 * np.sqrt(1.0 + b * n**2)
    if ends == "clamped":
        f = f * clamped_factor(b)
    return f


def solve_tension(pitch_hz, *, length, diameter, density, youngs_modulus, ends="pinned"):
    """Tension (N) that puts the lowest partial of the string at `pitch_hz`.

    Pinned ends have the closed form ``T = 4 L^2 mu f^2 - pi^3 E d^4 / (64 L^2)``
    (from ``f_1^2 = (T + K) / (4 L^2 mu)``); clamped ends are solved with
    Brent's method, since the clamped factor depends on B.

    Raises
    ------
    UnreachablePitch
        If the stiffness alone already sounds above `pitch_hz`.
    """
    mu = linear_density(density, diameter)
    k = math.pi**3 * youngs_modulus * diameter**4 / (64.0 * length**2)  # N: B = K / T
    tension = 4.0 * length**2 * mu * pitch_hz**2 - k
    if tension <= 0.0:
        raise UnreachablePitch(_unreachable(pitch_hz, length, mu, k))
    if ends == "pinned":
        return tension

    def error(t):
        return stiff_string_frequencies(1, length=length, tension=t, mu=mu, b=k / t, ends=ends)[()] - pitch_hz

    from scipy.optimize import brentq

    # Clamping only raises the pitch, so the answer lies below the pinned
    # tension.  Fletcher's factor is a small-B expansion: search no lower than
    # B = 1, where it stops being meaningful.
    high, low = tension, tension
    while error(low) >= 0.0:
        low *= 0.5
        if k / low > 1.0:
            raise UnreachablePitch(_unreachable(pitch_hz, length, mu, k))
    return brentq(error, low, high, xtol=1e-12, rtol=1e-14)


def _unreachable(pitch_hz, length, mu, k):
    floor_hz = math.sqrt(k / mu) / (2.0 * length)
    return (
        f"pitch {pitch_hz:.4g} Hz is below what this string's stiffness alone gives "
        f"(about {floor_hz:.4g} Hz): make it longer or thinner, or raise the pitch"
    )


def solve(spec, n_modes):
    """The modes of a stiff string, before it is excited or heard anywhere.

    Parameters
    ----------
    spec : StringSpec
    n_modes : int >= 1
        How many modes to compute.

    Returns
    -------
    Solution
        Shapes ``sin(n pi x)`` at fractions x of the length; columns harmonic,
        overtone, wavelength_m, phase_velocity_m_s, n_nodes, n_antinodes,
        node_spacing (fraction of the length between nodes, 1 / n) and
        node_positions (``j / n``, built on demand: text report only);
        parameters tension_n, stress, inharmonicity and the stress as a
        percentage of tensile strength.
    """
    mu, tension, b = _constants(spec)
    n = np.arange(1, n_modes + 1)
    freq = stiff_string_frequencies(n, length=spec.length, tension=tension, mu=mu, b=b, ends=spec.ends)
    wavelength = 2.0 * spec.length / n
    columns = {
        "harmonic": tuple(n.tolist()),
        "overtone": tuple((n - 1).tolist()),
        "wavelength_m": tuple(wavelength.tolist()),
        "phase_velocity_m_s": tuple((freq * wavelength).tolist()),
        "n_nodes": tuple((n + 1).tolist()),
        "n_antinodes": tuple(n.tolist()),
        "node_spacing": tuple((1.0 / n).tolist()),
        "node_positions": EvenNodes(n),
    }
    area = math.pi * spec.diameter**2 / 4.0
    stress = tension / area
    strength = spec.tensile_strength
    parameters = {
        "material": spec.material,
        "length_m": spec.length,
        "diameter_m": spec.diameter,
        "ends": spec.ends,
        "tension_n": tension,
        "tension_solved": spec.tension is None,
        "linear_density_kg_m": mu,
        "wave_speed_m_s": math.sqrt(tension / mu),
        "ideal_fundamental_hz": math.sqrt(tension / mu) / (2.0 * spec.length),
        "inharmonicity_b": b,
        "stress_pa": stress,
        "tensile_strength_pa": strength,
        "stress_percent_of_strength": None if not strength else 100.0 * stress / strength,
    }

    def shape(position):
        return np.sin(n * math.pi * position)

    return Solution(
        resonator="string",
        frequency_hz=frozen_array(freq),
        labels=tuple(f"n={k}" for k in n.tolist()),
        shape=shape,
        columns=columns,
        parameters=parameters,
        warnings=tuple(stress_warnings(stress, strength, "string")),
    )


def _constants(spec):
    """(linear density kg/m, tension N (solved for a pitch), inharmonicity B) of `spec`."""
    mu = linear_density(spec.density, spec.diameter)
    if spec.tension is None:
        tension = solve_tension(
            spec.pitch_hz,
            length=spec.length,
            diameter=spec.diameter,
            density=spec.density,
            youngs_modulus=spec.youngs_modulus,
            ends=spec.ends,
        )
    else:
        tension = spec.tension
    return mu, tension, inharmonicity(spec.youngs_modulus, spec.diameter, tension, spec.length)


#: Beyond this many modes below a frequency the count is not worked out exactly (it is over any ceiling).
_COUNT_EXACTLY = 10_000_000


def count_below(spec, limit_hz):
    """How many modes of `spec` sound below `limit_hz` (exact: the frequencies :func:`solve` gives).

    Stiffness only raises a partial, ``f_n = n f0 sqrt(1 + B n**2) >= n f_1``
    (Fletcher 1964), so no more than ``limit_hz / f_1`` modes can lie below.
    """
    mu, tension, b = _constants(spec)
    first = float(stiff_string_frequencies([1], length=spec.length, tension=tension, mu=mu, b=b, ends=spec.ends)[0])
    most = limit_hz / first
    if most > _COUNT_EXACTLY:
        return int(most)
    n = np.arange(1, int(most) + 2)
    frequency = stiff_string_frequencies(n, length=spec.length, tension=tension, mu=mu, b=b, ends=spec.ends)
    return int(np.count_nonzero(frequency < limit_hz))


def string_modes(spec, *, excitation_position, pickup_position, n_modes):
    """Modes of a stiff string excited and heard at fractions of its length.

    Parameters
    ----------
    spec : StringSpec
    excitation_position : float in [0, 1]
        Fraction of the length.
    pickup_position : float in [0, 1] or None
        Fraction of the length; None weights every mode by 1.
    n_modes : int >= 1
        How many modes to compute.

    Returns
    -------
    ModeSet
        See :func:`solve` for the columns and parameters.
    """
    return solve(spec, n_modes).place(excitation_position, pickup_position)


modes = string_modes
