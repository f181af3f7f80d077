"""Plates of any outline, by finite elements: ``type: plate, shape: outline``.

Notes
-----
The outline (metres), its holes and its edge conditions per segment
(clamped, pinned, free) are meshed with Triangle and solved with Argyris
triangles in scikit-fem (:mod:`.core`).  The dimensionless eigenvalue
``mu = omega**2 rho h L**4 / D`` (``L = sqrt(area)``) depends only on the
outline, the edges and Poisson's ratio, so ::

    f = sqrt(mu) / (2 pi L**2) sqrt(D / (rho h)),    D = E h**3 / (12 (1 - nu**2)),

grows in proportion to the thickness ``h``.  *Pitch* solves the thickness
(``h = pitch / (f_1 per metre of thickness)``) from the same solve as the
frequencies, so the lowest mode sounds at the pitch exactly; ``retune`` moves
the thickness.  Rigid-body modes of a plate held nowhere (or along one line)
are left out.  Mode shapes have a mean square of 1 over the area (modal
mass = the plate's mass), as :mod:`synth.resonators.plate`.

``theory: mindlin`` (the default is ``kirchhoff``) solves the thick
(Mindlin-Reissner) plate of :mod:`.mindlin` instead: shear deformation and
rotary inertia lower every mode, the more the shorter its wavelength is
against the thickness.  Its ``mu`` also depends on ``h / L``, so the
frequencies no longer scale with ``h`` alone: *pitch* finds the thickness by
a secant iteration on the finite-element solve (to :data:`PITCH_TOLERANCE`),
and the plate may be up to :data:`MAX_MINDLIN_FRACTION` of its span thick.
Mode shapes are the deflection ``w``, scaled as in :mod:`synth.resonators.bar`
with rotary inertia: ``int (rho h w**2 + rho h**3 / 12 |theta|**2) dA`` is the
plate's mass, so the mean square of ``w`` is 1 less the (small) rotary share.

Choice of element (measured on a free unit square, nu = 0.3, against the
converged lambda**2 = 13.468, 19.596, 24.270): Argyris is within 1e-6 on 74
triangles; Morley (non-conforming, from below) is 0.6%, 1.5%, 2.3% low on 159
triangles and still 0.03%, 0.08%, 0.12% low on 3174.  Argyris it is.

References
----------
.. [1] A. W. Leissa, *Vibration of Plates*, NASA SP-160 (1969).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np

from ...schema import Field
from ..common import SpecError, UnreachablePitch
from .core import content_hash, fe_modes
from .geometry import Outline, check_point, parse_outline, parse_svg_path
from .mindlin import KAPPA_MINDLIN
from .solution import mesh_parameters, outline_solution

__all__ = [
    "FIELDS",
    "PITCH_REPLACES",
    "PlateOutlineSpec",
    "build_spec",
    "position_style",
    "solve",
    "retune",
    "count_below",
    "check_position",
    "outline_from_values",
    "solve_thickness",
    "THEORIES",
]

#: Thin-plate theory needs the thickness below this fraction of the span (common practice).
MAX_THICKNESS_FRACTION = 0.1
#: Thinnest plate a pitch may solve for, m (as :mod:`synth.resonators.plate`).
MIN_THICKNESS = 10e-6
#: Modes solved to find the thickness for a pitch (the lowest is wanted; a few more cost little).
PITCH_MODES = 8
#: Plate theories of an outline plate.
THEORIES = ("kirchhoff", "mindlin")
#: A Mindlin plate may be this thick against the span (beyond, the low modes need 3-D elasticity;
#: common practice, from memory).
MAX_MINDLIN_FRACTION = 0.25
#: Relative error of the lowest frequency at which the pitch iteration of a Mindlin plate stops.
PITCH_TOLERANCE = 1e-7
#: Most finite-element solves of that iteration.
PITCH_ITERATIONS = 12

#: Patch keys of an outline plate besides ``type`` and ``shape``.
FIELDS = {
    "points": Field("any"),
    "holes": Field("any"),
    "edges": Field("any"),
    "hole_edges": Field("any"),
    "svg_path": Field("str"),
    "svg_unit": Field("length", positive=True, default=1e-3),
    "thickness": Field("length", positive=True),
    "pitch": Field("pitch", positive=True),
    "material": Field("any", required=True),
    "theory": Field("choice", default="kirchhoff", choices=THEORIES),
}

#: Keys a pitch replaces.
PITCH_REPLACES = ("thickness",)


@dataclass(frozen=True)
class PlateOutlineSpec:
    """A thin plate of any outline, in SI units (hashable: the solve is cached by it).

    Attributes
    ----------
    outline : Outline
        Points in metres, holes, edge condition per segment and per hole.
    density : float > 0, kg/m^3
    youngs_modulus : float > 0, Pa
    poisson_ratio : float in (-1, 0.5]
    thickness : float > 0 or None, m
    pitch_hz : float > 0 or None, Hz
        Give `thickness` or `pitch_hz`, not both.
    material : str
    theory : {"kirchhoff", "mindlin"}
        Thin plate, or thick (shear deformation and rotary inertia).
    """

    outline: Outline
    density: float
    youngs_modulus: float
    poisson_ratio: float
    thickness: float | None = None
    pitch_hz: float | None = None
    material: str = "custom"
    theory: str = "kirchhoff"

    TYPE: ClassVar[str] = "plate"
    shape: ClassVar[str] = "outline"

    @property
    def span(self):
        """Smaller side of the outline's bounding box, m."""
        return self.outline.span


def outline_from_values(values, *, plate):
    """An :class:`Outline` from the patch values ``points`` or ``svg_path`` (+ ``svg_unit``), ``holes``, edges."""
    points, path = values.get("points"), values.get("svg_path")
    holes = values.get("holes")
    if (points is None) == (path is None):
        raise SpecError("an outline takes 'points: [[x, y], ...]' (metres) or 'svg_path', exactly one",
                        key="points" if points is None else "svg_path")
    if path is not None:
        polygons = parse_svg_path(path, scale=values.get("svg_unit") or 1e-3)
        if holes is not None:
            raise SpecError("with svg_path the holes are the path's further subpaths: leave 'holes' out", key="holes")
        points, holes = polygons[0], polygons[1:] or None
    return parse_outline(points, holes=holes, edges=values.get("edges"), hole_edges=values.get("hole_edges"), plate=plate)


def build_spec(values):
    """A :class:`PlateOutlineSpec` from checked patch values (``material`` is a Material).

    Raises
    ------
    SpecError
        One line naming the key (see :func:`.geometry.parse_outline`).
    """
    theory = values.get("theory") or "kirchhoff"
    if theory not in THEORIES:
        raise SpecError(f"theory {theory!r}: use kirchhoff (thin plate) or mindlin (thick: shear and rotary inertia)",
                        key="theory")
    outline = outline_from_values(values, plate=True)
    if (values.get("pitch") is None) == (values.get("thickness") is None):
        raise SpecError("give exactly one of 'pitch' (the thickness is solved) or 'thickness'",
                        key="pitch" if values.get("pitch") is not None else None)
    material = values["material"]
    if not material.youngs_modulus > 0:
        raise SpecError("a plate needs youngs_modulus > 0: its stiffness sets every frequency", key="material.youngs_modulus")
    if not material.poisson_ratio > -1.0:
        raise SpecError(f"must be > -1 for a plate (got {material.poisson_ratio:g})", key="material.poisson_ratio")
    spec = PlateOutlineSpec(outline, material.density, material.youngs_modulus, material.poisson_ratio,
                            thickness=values.get("thickness"), pitch_hz=values.get("pitch"), material=material.name,
                            theory=theory)
    if spec.thickness is not None and spec.thickness > 0.5 * spec.span:
        raise SpecError(f"{spec.thickness * 1e3:.4g} mm is more than half the outline's span "
                        f"({spec.span * 1e3:.4g} mm): a block, not a plate", key="thickness")
    if spec.pitch_hz is not None:
        try:
            solve_thickness(spec, spec.pitch_hz)
        except UnreachablePitch as error:
            raise SpecError(str(error), key="pitch") from None
    return spec


def position_style(spec):
    """``"xy_m"``: positions are ``[x, y]`` in metres in the outline's coordinates."""
    return "xy_m"


def check_position(spec, point, key):
    """Refuse an excitation or pickup point outside the plate or in a hole (SpecError naming `key`)."""
    check_point(spec.outline, point, key)


def _hz_per_root_mu(spec, thickness):
    """f / sqrt(mu), Hz: sqrt(D / (rho h)) / (2 pi L**2)."""
    d = spec.youngs_modulus * thickness**3 / (12.0 * (1.0 - spec.poisson_ratio**2))
    return math.sqrt(d / (spec.density * thickness)) / (2.0 * math.pi * spec.outline.area)


def _thickness_for(spec, pitch_hz, mu1):
    per_metre = math.sqrt(mu1) * _hz_per_root_mu(spec, 1.0)  # Hz per metre of thickness
    return _checked(spec, pitch_hz, pitch_hz / per_metre, per_metre)


def _checked(spec, pitch_hz, thickness, per_metre):
    """`thickness` if within the theory's range, else UnreachablePitch (`per_metre`: f_1 / h, Hz/m)."""
    fraction = MAX_MINDLIN_FRACTION if spec.theory == "mindlin" else MAX_THICKNESS_FRACTION
    where = "Mindlin plate theory" if spec.theory == "mindlin" else "thin-plate theory (theory: mindlin goes thicker)"
    limit = fraction * spec.span
    if thickness > limit:
        raise UnreachablePitch(
            f"pitch {pitch_hz:.4g} Hz would need a {thickness * 1e3:.4g} mm thick plate, more than "
            f"{fraction:g} of the outline's span ({limit * 1e3:.4g} mm) where {where} holds: "
            f"make the plate larger or lower the pitch (at most about {limit * per_metre:.4g} Hz)")
    if thickness < MIN_THICKNESS:
        raise UnreachablePitch(
            f"pitch {pitch_hz:.4g} Hz would need a {thickness * 1e6:.3g} um thick plate, thinner than "
            f"{MIN_THICKNESS * 1e6:g} um: make the plate smaller or raise the pitch "
            f"(at least {MIN_THICKNESS * per_metre:.4g} Hz)")
    return thickness


def _fe(spec, n_modes, thickness):
    """The dimensionless modes of the spec's theory (a Mindlin plate's depend on `thickness`)."""
    if spec.theory == "mindlin":
        return fe_modes("mindlin", spec.outline, n_modes, nu=spec.poisson_ratio,
                        thickness_ratio=thickness / math.sqrt(spec.outline.area))
    return fe_modes("plate", spec.outline, n_modes, nu=spec.poisson_ratio)


def _mindlin_thickness(spec, pitch_hz, n_modes):
    """(thickness m, FEModes at it) of a Mindlin plate whose lowest mode is `pitch_hz`: a secant on log h."""
    kirchhoff = fe_modes("plate", spec.outline, PITCH_MODES, nu=spec.poisson_ratio)
    h = _thickness_for(spec, pitch_hz, float(kirchhoff.mu[0]))  # the thin-plate thickness to start
    points = []
    for _ in range(PITCH_ITERATIONS):
        fe = _fe(spec, n_modes, h)
        error = math.log(math.sqrt(float(fe.mu[0])) * _hz_per_root_mu(spec, h) / pitch_hz)
        if abs(error) < PITCH_TOLERANCE:
            return h, fe
        points.append((math.log(h), error))
        if len(points) == 1:
            step = -error  # f ~ h at first order
        else:
            (x0, e0), (x1, e1) = points[-2:]
            step = -e1 * (x1 - x0) / (e1 - e0) if e1 != e0 else -e1
        h = math.exp(math.log(h) + step)
        _checked(spec, pitch_hz, h, pitch_hz / h)
    raise UnreachablePitch(f"pitch {pitch_hz:.4g} Hz: the thickness of the Mindlin plate did not settle "
                           f"in {PITCH_ITERATIONS} solves")  # pragma: no cover - the iteration is monotone


def solve_thickness(spec, pitch_hz):
    """Thickness (m) putting the lowest mode at `pitch_hz` (raises UnreachablePitch)."""
    if spec.theory == "mindlin":
        return _mindlin_thickness(spec, pitch_hz, PITCH_MODES)[0]
    fe = fe_modes("plate", spec.outline, PITCH_MODES, nu=spec.poisson_ratio)
    return _thickness_for(spec, pitch_hz, float(fe.mu[0]))


def retune(spec, pitch_hz):
    """The plate with its thickness changed so its lowest mode sounds at `pitch_hz`."""
    if not (math.isfinite(pitch_hz) and pitch_hz > 0):
        raise UnreachablePitch(f"pitch {pitch_hz!r} Hz must be a positive frequency")
    tuned = replace(spec, thickness=None, pitch_hz=float(pitch_hz))
    solve_thickness(tuned, pitch_hz)
    return tuned


def solve(spec, n_modes):
    """Modes of a plate of any outline, before it is excited or heard.

    Parameters
    ----------
    spec : PlateOutlineSpec
    n_modes : int >= 1

    Returns
    -------
    OutlineSolution
        Labels ``"(1)"``, ``"(2)"``, ...; positions ``(x, y)`` in metres;
        column ``mesh_error`` (estimated relative error of each frequency);
        parameters: thickness (solved or given), D, mass, the mesh and its
        error estimate, ``mesh_key`` (content hash of the outline solve).
    """
    mindlin = spec.theory == "mindlin"
    if mindlin and spec.thickness is None:
        thickness, fe = _mindlin_thickness(spec, spec.pitch_hz, n_modes)
    elif mindlin:
        thickness, fe = spec.thickness, _fe(spec, n_modes, spec.thickness)
    else:
        fe = fe_modes("plate", spec.outline, n_modes, nu=spec.poisson_ratio)
        thickness = spec.thickness if spec.thickness is not None else _thickness_for(spec, spec.pitch_hz, float(fe.mu[0]))
    freq = np.sqrt(fe.mu[:n_modes]) * _hz_per_root_mu(spec, thickness)
    d = spec.youngs_modulus * thickness**3 / (12.0 * (1.0 - spec.poisson_ratio**2))
    areal = spec.density * thickness
    parameters = {
        "material": spec.material,
        "shape": "outline",
        "edges": ",".join(sorted(set(spec.outline.edges))),
        "area_m2": spec.outline.area,
        "outline_points": len(spec.outline.points),
        "holes": len(spec.outline.holes),
        "thickness_m": thickness,
        "thickness_solved": spec.thickness is None,
        "poisson_ratio": spec.poisson_ratio,
        "flexural_rigidity_n_m": d,
        "areal_density_kg_m2": areal,
        "mass_kg": areal * spec.outline.area,
        "theory": spec.theory,
        **mesh_parameters(fe, len(freq), "P2 triangles for w, theta_x, theta_y; shear by the 3-point rule "
                          "(Mindlin plate)" if mindlin else "Argyris quintic triangle (C1, Kirchhoff plate)"),
        "mesh_key": content_hash(("mindlin", spec.outline, spec.poisson_ratio, thickness / math.sqrt(spec.outline.area))
                                 if mindlin else ("plate", spec.outline, spec.poisson_ratio)),
    }
    if mindlin:
        parameters["shear_coefficient"] = KAPPA_MINDLIN
    if fe.n_rigid:
        parameters["rigid_body_modes"] = f"{fe.n_rigid} left out (0 Hz)"
    warnings = []
    if not parameters["mesh_converged"]:
        warnings.append(f"mesh error estimate {parameters['mesh_error_highest_mode']:.2%} of the highest mode is above "
                        f"the {parameters['mesh_error_target']:.1%} target after the finest mesh allowed: ask fewer modes")
    if mindlin and _curved_pinned(spec.outline):
        warnings.append("a pinned edge drawn as a curve (vertices turning less than 15 degrees): a Mindlin plate reads "
                        "it stiff, the more the thinner the plate (a polygon's simple support is not a curve's; "
                        "measured +2% at h = 0.04 radius, +11% at 0.004): theory: kirchhoff treats curves")
    if mindlin and thickness > MAX_MINDLIN_FRACTION * spec.span:
        warnings.append(f"plate thickness {thickness * 1e3:.4g} mm is more than {MAX_MINDLIN_FRACTION:g} of the "
                        "outline's span: even Mindlin plate theory is rough there")
    elif not mindlin and thickness > MAX_THICKNESS_FRACTION * spec.span:
        warnings.append(f"plate thickness {thickness * 1e3:.4g} mm is more than {MAX_THICKNESS_FRACTION:g} of the "
                        "outline's span: thin-plate theory reads the modes sharp (theory: mindlin)")
    return outline_solution("plate", spec.outline, fe, freq, parameters, warnings)


def _curved_pinned(outline):
    """Whether a pinned run of the outline (or a hole) turns by less than 15 degrees at a vertex (a sampled curve)."""
    loops = [(outline.points, outline.edges)] + [(h, [e] * len(h)) for h, e in zip(outline.holes, outline.hole_edges)]
    for points, edges in loops:
        p = np.asarray(points, dtype=float)
        n = len(p)
        for i in range(n):
            if edges[i - 1] != "pinned" or edges[i] != "pinned":
                continue
            a, b = p[i] - p[i - 1], p[(i + 1) % n] - p[i]
            cosine = float(np.dot(a, b)) / (float(np.hypot(*a)) * float(np.hypot(*b)))
            if 1e-6 < math.degrees(math.acos(min(1.0, max(-1.0, cosine)))) < 15.0:
                return True
    return False


def count_below(spec, limit_hz):
    """About how many modes lie below `limit_hz`: Weyl's law, ``N ~ area k**2 / (4 pi)``.

    ``k`` is the bending wavenumber at `limit_hz`: ``k**2 = sqrt(mu) / L**2``
    (thin plate), or the flexural root of Mindlin's dispersion relation
    ``D kGh k**4 - (D rho h + I kGh) omega**2 k**2 + rho h omega**2 (I omega**2 - kGh) = 0``
    (``I = rho h**3 / 12``, ``kGh = kappa G h``) for a Mindlin plate.
    """
    thickness = spec.thickness if spec.thickness is not None else solve_thickness(spec, spec.pitch_hz)
    root_mu = limit_hz / _hz_per_root_mu(spec, thickness)
    if spec.theory != "mindlin":
        return int(root_mu / (4.0 * math.pi))
    h, nu, rho = thickness, spec.poisson_ratio, spec.density
    d = spec.youngs_modulus * h**3 / (12.0 * (1.0 - nu**2))
    kgh = KAPPA_MINDLIN * spec.youngs_modulus / (2.0 * (1.0 + nu)) * h
    inertia, omega2 = rho * h**3 / 12.0, (2.0 * math.pi * limit_hz) ** 2
    a, b, c = d * kgh, -(d * rho * h + inertia * kgh) * omega2, rho * h * omega2 * (inertia * omega2 - kgh)
    k2 = (-b + math.sqrt(max(b * b - 4.0 * a * c, 0.0))) / (2.0 * a)
    return int(spec.outline.area * k2 / (4.0 * math.pi))

