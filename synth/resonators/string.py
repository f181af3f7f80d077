"""Transverse modes of a stiff string, solid or wound, with pinned or clamped ends.

Notes
-----
Ideal string (Mersenne's laws / Taylor): ``f_n = n / (2 L) * sqrt(T / mu)``.
The string obeys ``EI w'''' - T w'' = mu omega**2 w`` (Euler-Bernoulli
bending plus tension), ``I = pi d**4 / 64`` of the (core) wire, and
``B = pi**2 EI / (T L**2) = pi**3 E d**4 / (64 T L**2)`` (Fletcher 1964).

* **Pinned ends** (``w = w'' = 0``): the shapes are ``sin(n pi x / L)``
  exactly and ``f_n = n f_0 sqrt(1 + B n**2)`` exactly [1]_.
* **Clamped ends** (``w = w' = 0``): solved exactly,
  ``f_n = f_0 nu_n sqrt(1 + B nu_n**2)`` with the effective mode number
  ``nu_n`` in ``(n, n + 1)`` from the frequency determinant, and the exact
  shapes and nodes (:mod:`.string_clamped`).  Fletcher's small-B expansion
  ``f_n ~= n f_0 sqrt(1 + B n**2) (1 + 2 sqrt(B)/pi + 4 B/pi**2)`` [1]_ is
  kept as :func:`fletcher_clamped_frequencies`, a documented approximation
  (0.1 cent at B = 1e-4; +11.5 cents at n = 10 for B = 1e-2).
* **Wound strings** (``winding``): a close-wound helical wrap of wire
  diameter ``dw`` on a core (or an inner layer) of diameter ``D`` has a mean
  helix diameter ``D + dw`` and one turn per ``dw`` of length, so its mass per
  length is ``rho_w (pi dw**2 / 4) pi (D + dw) / dw = rho_w pi**2 dw (D + dw) / 4``
  (the helix-angle approximation: a turn's wire length is taken as
  ``pi (D + dw)``, neglecting the factor ``sqrt(1 + (dw / (pi (D + dw)))**2)``,
  +1.3 % at ``dw = D``, +0.6 % at ``dw = D / 2``).  The layer's outer diameter
  is ``D + 2 dw``.  The wrap adds mass, not bending stiffness, and carries no
  tension: B comes from the core alone and the stress is the tension over the
  core's area.  This is common practice in string scaling (wound strings are
  treated so in Fletcher & Rossing 1998, ch. 2, and Conklin 1996 [3]_: from
  memory), not a published law; the geometry is plain arithmetic, and a real
  wrap, pressed into the core, packs slightly differently.

References
----------
.. [1] H. Fletcher, "Normal vibration frequencies of a stiff piano string",
   J. Acoust. Soc. Am. 36(1), 203-209 (1964).
.. [2] N. H. Fletcher and T. D. Rossing, *The Physics of Musical Instruments*,
   2nd ed., Springer (1998), ch. 2.
.. [3] H. A. Conklin, "Design and tone in the mechanoacoustic piano. Part III:
   Piano strings and scale design", J. Acoust. Soc. Am. 100(3), 1286-1298
   (1996) (from memory).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np
from ..modes import EvenNodes, Solution, frozen_array
from ..schema import Field, convert
from .common import SAFE_STRESS_FRACTION, SpecError, UnreachablePitch, stress_warnings
from .string_clamped import BEAM_NU1, clamped_mode_numbers, clamped_nodes, clamped_shapes

__all__ = [
    "FIELDS",
    "PITCH_REPLACES",
    "StringSpec",
    "Winding",
    "build_spec",
    "position_style",
    "modes",
    "solve",
    "count_below",
    "retune",
    "string_modes",
    "linear_density",
    "winding_linear_density",
    "string_mass",
    "inharmonicity",
    "stiff_string_frequencies",
    "clamped_mode_numbers",
    "clamped_shapes",
    "clamped_nodes",
    "fletcher_clamped_frequencies",
    "clamped_factor",
    "solve_tension",
    "SAFE_STRESS_FRACTION",
    "UnreachablePitch",
]

#: At most this many winding layers (inner first).
MAX_WINDING_LAYERS = 2

_WINDING_TAKES = ("a mapping {material, diameter} (the wrap wire's diameter), or a list of one or two "
                  "of them, inner layer first")

#: Patch keys of a string (besides ``type``).
FIELDS = {
    "material": Field("any", required=True),
    "length": Field("length", required=True, positive=True),
    "diameter": Field("length", required=True, positive=True),  # of the core, for a wound string
    "pitch": Field("pitch", positive=True),
    "tension": Field("force", positive=True),
    "ends": Field("choice", default="pinned", choices=("pinned", "clamped")),
    "winding": Field("any", nullable=True, takes=_WINDING_TAKES),
}

#: Keys a command-line ``--pitch`` replaces (for the patch loader).
PITCH_REPLACES = ("tension",)

_WIRE_DIAMETER = Field("length", required=True, positive=True)


@dataclass(frozen=True)
class Winding:
    """One close-wound layer of wrap wire.

    Attributes
    ----------
    diameter : float > 0, m
        The wrap wire's diameter.
    density : float > 0, kg/m^3
    material : str
        Name for the report.
    """

    diameter: float
    density: float
    material: str = "custom"


@dataclass(frozen=True)
class StringSpec:
    """A string in SI units.

    Attributes
    ----------
    length : float > 0, m
    diameter : float > 0, m
        Of the solid wire, or of the core of a wound string.
    density : float > 0, kg/m^3
        Of the (core) wire.
    youngs_modulus : float >= 0, Pa
        Of the (core) wire: the only bending stiffness.
    tension : float > 0 or None, N
        Give `tension` or `pitch_hz`, not both.
    pitch_hz : float > 0 or None, Hz
        Pitch of the lowest partial; the tension is solved for it.
    ends : {"pinned", "clamped"}
    tensile_strength : float or None, Pa
        Of the core.
    material : str
        Name for the report.
    winding : tuple of Winding
        Wrap layers, inner first (empty: a solid string).
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
    winding: tuple = ()

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
        winding=_windings(values.get("winding")),
    )


def _windings(value):
    """The :class:`Winding` layers of a patch's ``winding`` value (SpecError naming the key otherwise)."""
    if value is None:
        return ()
    layers = [value] if isinstance(value, dict) else value
    if not isinstance(layers, list) or not layers or len(layers) > MAX_WINDING_LAYERS:
        many = isinstance(layers, list) and len(layers) > MAX_WINDING_LAYERS
        why = f"at most {MAX_WINDING_LAYERS} layers, got {len(layers)}" if many else f"got {_short(value)}"
        raise SpecError(f"must be {_WINDING_TAKES}: {why}", key="winding")
    return tuple(_winding_layer(layer, f"layer {i + 1} " if len(layers) > 1 else "")
                 for i, layer in enumerate(layers))


def _winding_layer(layer, where):
    from ..errors import PatchError
    from ..patch import MATERIAL_FILE_SUFFIXES, material_from
    from ..schema import Section

    if not isinstance(layer, dict):
        raise SpecError(f"{where}must be a mapping {{material, diameter}}, got {_short(layer)}", key="winding")
    unknown = sorted(str(k) for k in layer if k not in ("material", "diameter"))
    if unknown:
        raise SpecError(f"{where}has unknown key {unknown[0]!r} (allowed: material, diameter)", key="winding")
    for key in ("material", "diameter"):
        if key not in layer:
            raise SpecError(f"{where}is missing {key!r} (a winding takes material and diameter, "
                            "the wrap wire's diameter)", key="winding")
    try:
        diameter = convert(_WIRE_DIAMETER, layer["diameter"])
    except ValueError as error:
        raise SpecError(f"{where}diameter: {error}", key="winding") from None
    name = layer["material"]
    if isinstance(name, str) and name.lower().endswith(MATERIAL_FILE_SUFFIXES):
        raise SpecError(f"{where}material: give a material name or a mapping (a material file is read "
                        "only for the string itself)", key="winding")
    try:
        material = material_from(Section(layer, file=None, path=""), "material")
    except PatchError as error:
        raise SpecError(f"{where}{error.key}: {error.message}", key="winding") from None
    return Winding(diameter=diameter, density=material.density, material=material.name)


def _short(value):
    from ..units import short_repr

    return f"{type(value).__name__} {short_repr(value)}"


def position_style(spec):
    """Positions on a string are fractions of its length."""
    return "fraction"


def retune(spec, pitch_hz):
    """The string re-tensioned so its lowest partial sounds at `pitch_hz`."""
    retuned = replace(spec, tension=None, pitch_hz=pitch_hz)
    solve_tension(pitch_hz, length=spec.length, diameter=spec.diameter, density=spec.density,
                  youngs_modulus=spec.youngs_modulus, ends=spec.ends, winding=spec.winding)
    return retuned


def linear_density(density, diameter):
    """Mass per length (kg/m) of a round solid string: rho pi d^2 / 4."""
    return density * math.pi * diameter**2 / 4.0


def winding_linear_density(density, wire_diameter, under_diameter):
    """Mass per length of string (kg/m) of one close-wound layer of wrap wire.

    Parameters
    ----------
    density : float > 0, kg/m^3
        Of the wrap wire.
    wire_diameter : float > 0, m
        ``dw``, the wrap wire's diameter (also the turn pitch: close-wound).
    under_diameter : float > 0, m
        ``D``, the diameter the layer is wound on (the core, or the layer below).

    Returns
    -------
    float, kg/m
        ``rho (pi dw**2 / 4) pi (D + dw) / dw = rho pi**2 dw (D + dw) / 4``:
        one turn of mean diameter ``D + dw`` per ``dw`` of length (helix-angle
        approximation; see the module notes).

    Examples
    --------
    >>> round(winding_linear_density(8900.0, 0.5e-3, 1.0e-3) * 1e3, 4)  # copper on a 1 mm core, g/m
    16.4699
    """
    return density * math.pi**2 * wire_diameter * (under_diameter + wire_diameter) / 4.0


def string_mass(density, diameter, winding=()):
    """(total mass per length kg/m, core's mass per length kg/m, outer diameter m) of a string.

    `density` and `diameter` are the core's; `winding` is a sequence of
    :class:`Winding`, inner first (empty: a solid string).
    """
    core = linear_density(density, diameter)
    total, outer = core, diameter
    for layer in winding:
        total += winding_linear_density(layer.density, layer.diameter, outer)
        outer += 2.0 * layer.diameter
    return total, core, outer


def inharmonicity(youngs_modulus, diameter, tension, length):
    """Fletcher's inharmonicity coefficient B = pi^3 E d^4 / (64 T L^2) (d: the solid wire or the core)."""
    return math.pi**3 * youngs_modulus * diameter**4 / (64.0 * tension * length**2)


def clamped_factor(b):
    """Fletcher's clamped-end factor 1 + 2 sqrt(B)/pi + 4 B/pi^2 (a small-B approximation)."""
    return 1.0 + 2.0 * math.sqrt(b) / math.pi + 4.0 * b / math.pi**2


def fletcher_clamped_frequencies(n, *, length, tension, mu, b):
    """Fletcher's small-B approximation to a clamped stiff string's frequencies (Hz).

    ``f_n ~= n f_0 sqrt(1 + B n**2) (1 + 2 sqrt(B) / pi + 4 B / pi**2)``
    (Fletcher 1964, eq. for clamped ends).  Kept for comparison only: the
    model uses the exact :func:`clamped_mode_numbers`.  Its error against the
    exact law grows with B and n: 0.1 cent at B = 1e-4 (n <= 30); -0.3 and
    +2.5 cents at n = 10 and 30 for B = 1e-3; +11.5 and +61 cents for B = 1e-2.
    """
    n = np.asarray(n, dtype=float)
    f0 = math.sqrt(tension / mu) / (2.0 * length)
    return n * f0 * np.sqrt(1.0 + b * n**2) * clamped_factor(b)


def stiff_string_frequencies(n, *, length, tension, mu, b, ends="pinned"):
    """Frequencies (Hz) of modes `n` of a stiff string (exact for both ends).

    Parameters
    ----------
    n : array_like of int >= 1
    length : float, m
    tension : float, N
    mu : float, kg/m
    b : float
        Inharmonicity coefficient.
    ends : {"pinned", "clamped"}

    Notes
    -----
    ``f_n = f_0 nu sqrt(1 + B nu**2)``, ``f_0 = sqrt(T / mu) / (2 L)``, with
    ``nu = n`` (pinned) or :func:`clamped_mode_numbers` (clamped).
    """
    nu = np.asarray(n, dtype=float)
    if ends == "clamped":
        nu = clamped_mode_numbers(nu, b)
    f0 = math.sqrt(tension / mu) / (2.0 * length)
    return f0 * nu * np.sqrt(1.0 + b * nu**2)


def solve_tension(pitch_hz, *, length, diameter, density, youngs_modulus, ends="pinned", winding=()):
    """Tension (N) that puts the lowest partial of the string at `pitch_hz`.

    ``f_1**2 = (T nu**2 + K nu**4) / (4 L**2 mu)`` with ``K = pi**3 E d**4 / (64 L**2)``
    (``B = K / T``): pinned ends (``nu = 1``) have the closed form
    ``T = 4 L**2 mu f**2 - K``; clamped ends (``nu`` from the exact law,
    depending on T) are solved by regula falsi (Illinois) between T = 0 (a
    clamped beam) and the pinned tension (clamping only raises the pitch).

    Raises
    ------
    UnreachablePitch
        If the stiffness alone already sounds above `pitch_hz`.
    """
    mu = string_mass(density, diameter, winding)[0]
    k = math.pi**3 * youngs_modulus * diameter**4 / (64.0 * length**2)  # N: B = K / T
    tension = 4.0 * length**2 * mu * pitch_hz**2 - k
    if ends == "pinned" or k == 0.0:
        if tension <= 0.0:
            raise UnreachablePitch(_unreachable(pitch_hz, length, mu, k, 1.0))
        return tension

    def error(t):
        nu = float(clamped_mode_numbers([1], k / t)[0]) if t > 0.0 else BEAM_NU1
        return (t * nu**2 + k * nu**4) / (4.0 * length**2 * mu) - pitch_hz**2

    if tension <= 0.0 or error(0.0) >= 0.0:
        raise UnreachablePitch(_unreachable(pitch_hz, length, mu, k, BEAM_NU1))
    return _illinois(error, 0.0, tension, tolerance=1e-15 * tension)


def _illinois(function, low, high, *, tolerance):
    """The root of increasing `function` in [low, high] (f(low) < 0 <= f(high)): regula falsi, Illinois variant.

    Superlinear and never leaves the bracket (Dowell & Jarratt 1971, BIT 11:168); pure Python,
    so a pitch solve does not import scipy.optimize.
    """
    f_low, f_high = function(low), function(high)
    side = 0
    for _ in range(200):
        if f_high == 0.0 or high - low <= tolerance:
            break
        middle = (low * f_high - high * f_low) / (f_high - f_low)
        if not low < middle < high:
            middle = 0.5 * (low + high)
        f_middle = function(middle)
        if f_middle < 0.0:
            low, f_low = middle, f_middle
            f_high = f_high * 0.5 if side == -1 else f_high
            side = -1
        else:
            high, f_high = middle, f_middle
            f_low = f_low * 0.5 if side == 1 else f_low
            side = 1
    return high if abs(f_high) <= abs(f_low) else low


def _unreachable(pitch_hz, length, mu, k, nu):
    floor_hz = math.sqrt(k / mu) * nu**2 / (2.0 * length)
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
        Shapes ``sin(n pi x)`` (pinned) or the exact clamped shapes at
        fractions x of the length; columns harmonic, overtone, wavelength_m
        (``2 L / nu``: the interior wave's), phase_velocity_m_s, n_nodes,
        n_antinodes, node_spacing (``1 / nu``, between interior nodes) and
        node_positions (built on demand: text report only); parameters
        tension_n, stress (over the core's area), inharmonicity, the stress as
        a percentage of tensile strength and, for a wound string, the core and
        outer diameters and the winding's share of the mass.
    """
    mu, tension, b = _constants(spec)
    n = np.arange(1, n_modes + 1)
    nu = clamped_mode_numbers(n, b) if spec.ends == "clamped" else n.astype(float)
    f0 = math.sqrt(tension / mu) / (2.0 * spec.length)
    freq = f0 * nu * np.sqrt(1.0 + b * nu**2)
    wavelength = 2.0 * spec.length / nu
    columns = {
        "harmonic": tuple(n.tolist()),
        "overtone": tuple((n - 1).tolist()),
        "wavelength_m": tuple(wavelength.tolist()),
        "phase_velocity_m_s": tuple((freq * wavelength).tolist()),
        "n_nodes": tuple((n + 1).tolist()),
        "n_antinodes": tuple(n.tolist()),
        "node_spacing": tuple((1.0 / nu).tolist()),
        "node_positions": clamped_nodes(n, nu, b) if spec.ends == "clamped" else EvenNodes(n),
    }
    stress = tension / (math.pi * spec.diameter**2 / 4.0)  # the core carries the tension
    strength = spec.tensile_strength
    parameters = {"material": spec.material, "length_m": spec.length}
    parameters.update(_size_parameters(spec, mu, tension, f0))
    parameters.update({
        "ends": spec.ends,
        "tension_n": tension,
        "tension_solved": spec.tension is None,
        "linear_density_kg_m": mu,
        "wave_speed_m_s": math.sqrt(tension / mu),
        "ideal_fundamental_hz": f0,
        "inharmonicity_b": b,
        "stress_pa": stress,
        "tensile_strength_pa": strength,
        "stress_percent_of_strength": None if not strength else 100.0 * stress / strength,
    })
    if spec.ends == "clamped":
        def shape(position):
            return clamped_shapes(position, n, nu, b)
    else:
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


def _size_parameters(spec, mu, tension, f0):
    """Report parameters of the wire: its diameter, or a wound string's core, winding and outer diameter."""
    if not spec.winding:
        return {"diameter_m": spec.diameter}
    _, core, outer = string_mass(spec.density, spec.diameter, spec.winding)
    # A solid string of the core's material as thick as the wound one, at the same f0 (T = 4 L^2 mu f0^2).
    solid_mu = linear_density(spec.density, outer)
    solid_b = inharmonicity(spec.youngs_modulus, outer, 4.0 * spec.length**2 * solid_mu * f0**2, spec.length)
    parameters = {"core_diameter_m": spec.diameter}
    for i, layer in enumerate(spec.winding):
        prefix = "winding" if i == 0 else "winding_2"
        parameters[f"{prefix}_material"] = layer.material
        parameters[f"{prefix}_wire_m"] = layer.diameter
    parameters["outer_diameter_m"] = outer
    parameters["winding_mass_percent"] = 100.0 * (mu - core) / mu
    parameters["solid_inharmonicity_b"] = solid_b
    return parameters


def _constants(spec):
    """(mass per length kg/m, tension N (solved for a pitch), inharmonicity B) of `spec`."""
    mu = string_mass(spec.density, spec.diameter, spec.winding)[0]
    if spec.tension is None:
        tension = solve_tension(spec.pitch_hz, length=spec.length, diameter=spec.diameter, density=spec.density,
                                youngs_modulus=spec.youngs_modulus, ends=spec.ends, winding=spec.winding)
    else:
        tension = spec.tension
    return mu, tension, inharmonicity(spec.youngs_modulus, spec.diameter, tension, spec.length)


#: Beyond this many modes below a frequency the count is not worked out exactly (it is over any ceiling).
_COUNT_EXACTLY = 10_000_000


def count_below(spec, limit_hz):
    """How many modes of `spec` sound below `limit_hz` (exact: the frequencies :func:`solve` gives).

    Stiffness and clamping only raise a partial, ``f_n >= n f_0``
    (``nu_n >= n``), so no more than ``limit_hz / f_0`` modes can lie below.
    """
    mu, tension, b = _constants(spec)
    f0 = math.sqrt(tension / mu) / (2.0 * spec.length)
    most = limit_hz / f0
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
