"""Ideal membranes of any outline, by finite elements: ``type: membrane, shape: outline``.

Notes
-----
``T grad.grad u = sigma omega**2 u`` with ``u = 0`` on the rim and on every
hole's rim (a membrane's edges carry its tension: they are fixed), solved
with P2 triangles (:mod:`.core`).  The dimensionless eigenvalue
``mu = omega**2 sigma L**2 / T`` (``L = sqrt(area)``) depends on the outline
only, so ::

    f = sqrt(mu) / (2 pi L) sqrt(T / sigma),

grows as the square root of the tension.  *Pitch* solves the tension
(``T = sigma (2 pi f L)**2 / mu_1``) from the same solve as the frequencies;
``retune`` moves the tension.  Shapes have a mean square of 1 over the area
(modal mass = the membrane's mass), as :mod:`synth.resonators.membrane`.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np

from ...schema import Field
from ..common import SpecError, UnreachablePitch, stress_warnings
from .core import content_hash, fe_modes
from .geometry import Outline, check_point
from .plate_fe import outline_from_values
from .solution import mesh_parameters, outline_solution

__all__ = [
    "FIELDS",
    "PITCH_REPLACES",
    "MembraneOutlineSpec",
    "build_spec",
    "position_style",
    "solve",
    "retune",
    "count_below",
    "check_position",
    "solve_tension",
]

#: Patch keys of an outline membrane besides ``type`` and ``shape``.
FIELDS = {
    "points": Field("any"),
    "holes": Field("any"),
    "svg_path": Field("str"),
    "svg_unit": Field("length", positive=True, default=1e-3),
    "tension": Field("force_per_length", positive=True),
    "pitch": Field("pitch", positive=True),
    "areal_density": Field("areal_density", positive=True),
    "material": Field("any"),
    "thickness": Field("length", positive=True),
}

#: Keys a pitch replaces.
PITCH_REPLACES = ("tension",)


@dataclass(frozen=True)
class MembraneOutlineSpec:
    """A membrane of any outline, in SI units (hashable).

    Attributes
    ----------
    outline : Outline
        Points in metres and holes (every rim fixed).
    areal_density : float > 0, kg/m^2
    tension : float > 0 or None, N/m
    pitch_hz : float > 0 or None, Hz
        Give `tension` or `pitch_hz`, not both.
    material : str
    thickness, tensile_strength : float or None
        When the areal density came from material x thickness (stress report).
    """

    outline: Outline
    areal_density: float
    tension: float | None = None
    pitch_hz: float | None = None
    material: str = "custom"
    thickness: float | None = None
    tensile_strength: float | None = None

    TYPE: ClassVar[str] = "membrane"
    shape: ClassVar[str] = "outline"


def build_spec(values):
    """A :class:`MembraneOutlineSpec` from checked patch values (``material`` is a Material or None)."""
    from ..membrane import _areal_density

    outline = outline_from_values(values, plate=False)
    if (values.get("pitch") is None) == (values.get("tension") is None):
        raise SpecError("give exactly one of 'pitch' (the tension is solved) or 'tension' (N/m)",
                        key="pitch" if values.get("pitch") is not None else None)
    sigma, material, thickness = _areal_density({key: values.get(key) for key in ("material", "thickness", "areal_density")})
    constants = values.get("material")
    return MembraneOutlineSpec(
        outline=outline, areal_density=sigma, tension=values.get("tension"), pitch_hz=values.get("pitch"),
        material=material, thickness=thickness,
        tensile_strength=None if constants is None else constants.tensile_strength,
    )


def position_style(spec):
    """``"xy_m"``: positions are ``[x, y]`` in metres in the outline's coordinates."""
    return "xy_m"


def check_position(spec, point, key):
    """Refuse an excitation or pickup point outside the membrane or in a hole (SpecError naming `key`)."""
    check_point(spec.outline, point, key)


def _tension_for(spec, pitch_hz, mu1):
    length = math.sqrt(spec.outline.area)
    return spec.areal_density * (2.0 * math.pi * pitch_hz * length) ** 2 / mu1


def solve_tension(spec, pitch_hz):
    """Tension per length (N/m) putting the lowest mode at `pitch_hz`."""
    return _tension_for(spec, pitch_hz, float(fe_modes("membrane", spec.outline, 8).mu[0]))


def retune(spec, pitch_hz):
    """The membrane re-tensioned so its lowest mode sounds at `pitch_hz`."""
    if not (math.isfinite(pitch_hz) and pitch_hz > 0):
        raise UnreachablePitch(f"pitch {pitch_hz!r} Hz must be a positive frequency")
    return replace(spec, tension=None, pitch_hz=float(pitch_hz))


def solve(spec, n_modes):
    """Modes of a membrane of any outline, before it is excited or heard.

    Returns
    -------
    OutlineSolution
        Labels ``"(1)"``, ``"(2)"``, ...; positions ``(x, y)`` in metres;
        column ``mesh_error``; parameters: tension (solved or given), wave
        speed, mass, the mesh and its error estimate, ``mesh_key``.
    """
    fe = fe_modes("membrane", spec.outline, n_modes)
    tension = spec.tension if spec.tension is not None else _tension_for(spec, spec.pitch_hz, float(fe.mu[0]))
    speed = math.sqrt(tension / spec.areal_density)
    length = math.sqrt(spec.outline.area)
    freq = np.sqrt(fe.mu[:n_modes]) * speed / (2.0 * math.pi * length)
    parameters = {
        "shape": "outline",
        "material": spec.material,
        "area_m2": spec.outline.area,
        "outline_points": len(spec.outline.points),
        "holes": len(spec.outline.holes),
        "areal_density_kg_m2": spec.areal_density,
        "mass_kg": spec.areal_density * spec.outline.area,
        "tension_n_per_m": tension,
        "tension_solved": spec.tension is None,
        "wave_speed_m_s": speed,
        **mesh_parameters(fe, len(freq), "P2 Lagrange triangle (membrane)"),
        "mesh_key": content_hash(("membrane", spec.outline)),
    }
    warnings = []
    if spec.thickness is not None:
        stress = tension / spec.thickness
        parameters["thickness_m"] = spec.thickness
        parameters["stress_pa"] = stress
        warnings += stress_warnings(stress, spec.tensile_strength, "membrane")
    if not parameters["mesh_converged"]:
        warnings.append(f"mesh error estimate {parameters['mesh_error_highest_mode']:.2%} of the highest mode is above "
                        f"the {parameters['mesh_error_target']:.1%} target after the finest mesh allowed: ask fewer modes")
    return outline_solution("membrane", spec.outline, fe, freq, parameters, warnings)


def count_below(spec, limit_hz):
    """About how many modes lie below `limit_hz`: Weyl's law ``N ~ area k**2 / (4 pi)``, ``k = 2 pi f / c``."""
    tension = spec.tension if spec.tension is not None else solve_tension(spec, spec.pitch_hz)
    k = 2.0 * math.pi * limit_hz / math.sqrt(tension / spec.areal_density)
    return int(spec.outline.area * k * k / (4.0 * math.pi))
