"""Flexural modes of thin plates: circles (clamped, free or pinned edges),
rectangles (pinned edges in closed form; any other edges by Rayleigh-Ritz in
:mod:`.plate_rect`) and any outline (finite elements in :mod:`.fe`).

Notes
-----
Kirchhoff (thin-plate) theory.  With the flexural rigidity
``D = E h**3 / (12 (1 - nu**2))`` and the frequency parameter
``lambda**2 = omega a**2 sqrt(rho h / D)`` (``a`` the radius of a circle or
the width of a rectangle), every frequency is ``f = lambda**2 / (2 pi a**2)
sqrt(D / (rho h))``, which grows in proportion to the thickness ``h``.

*Circle* ([1]_, ch. 2).  With ``x = r / a`` the mode shapes are
``w = [J_n(lambda x) + C I_n(lambda x)] cos(n theta)``; the edge conditions
at ``x = 1`` are two linear equations in (1, C) whose determinant is the
frequency equation:

* clamped: ``w = 0`` and ``dw/dr = 0``;
* pinned (simply supported): ``w = 0`` and the radial moment ``M_r = 0``;
* free: ``M_r = 0`` and the Kirchhoff shear ``V_r = 0``, where (a = 1)
  ``M_r ~ R'' + nu (R' - n**2 R)`` and
  ``V_r ~ (del**2 R)' - (1 - nu) n**2 (R' - R)``.

The modified Bessel function is carried scaled (``ive = I_n e**-x``) so nothing
overflows at large ``lambda``.  Roots are bracketed on a fine grid of lambda
(sign changes of the determinant, which has no poles) and polished with
Brent's method, for enough orders n to hold the lowest `n_modes` modes.  A free
plate's rigid-body modes, (0,0) translation and (1,0) rocking at 0 Hz, are
left out.  Labels are ``(n,s)``: n nodal diameters and s nodal circles, the
boundary not counted.  Shapes are normalised by Gauss-Legendre quadrature over
the disc to a mean square of 1 (common modal mass: the plate's mass).

For n > 0 each (n,s) is a degenerate pair, cos(n theta) and sin(n theta), and
any rotation of the pair is an equally valid basis.  As for the membrane, the
basis is turned to the excitation point (theta = 0 there; to the pickup if the
excitation is at the centre): the "cos" member carries everything a point
excitation puts into the pair (pickup factor ``cos(n (theta_p - theta_e))``)
and the "sin" member, with a nodal diameter through the excitation point, is
listed with level null.  Without a pickup the partner tells nothing and each
pair is one row (orientation "pair").  The sum over both members equals the
sum over the cos/sin members of any fixed frame.

*Rectangle*, all edges pinned ([1]_, ch. 4, exact):
``omega_mn = pi**2 [(m / a)**2 + (n / b)**2] sqrt(D / (rho h))``,
``w = 2 sin(m pi x / a) sin(n pi y / b)`` (mean square 1); labels ``(m,n)``
count half-waves across the width and the height.

*Pitch* solves the thickness, the parameter a maker would change (sheet gauge,
or grinding a disc thinner): ``f ~ h`` at a fixed outline.  ``retune`` moves
the same parameter.

References
----------
.. [1] A. W. Leissa, *Vibration of Plates*, NASA SP-160 (1969).
.. [2] L. Cremer, M. Heckl and E. E. Ungar, *Structure-Borne Sound*, 2nd ed.,
   Springer (1988) (validity of thin-plate bending waves).
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np
from scipy.special import sindg

from ..modes import Solution, frozen_array
from ..schema import Field
from . import plate_rect
from .common import SpecError, UnreachablePitch
from .outline import PairedSolution, check_outline, is_drawn_outline
from .plate_circle import circle_lambdas, circle_pairs

__all__ = [
    "FIELDS",
    "PITCH_REPLACES",
    "PlateSpec",
    "build_spec",
    "position_style",
    "modes",
    "solve",
    "count_below",
    "retune",
    "plate_modes",
    "flexural_rigidity",
    "circle_lambdas",
    "rectangle_lambdas",
    "solve_thickness",
    "UnreachablePitch",
]

#: Thin-plate theory needs the thickness well below the span (diameter or
#: shorter side); 1/10 is the usual limit (common practice).
MAX_THICKNESS_FRACTION = 0.1
#: A given thickness above this fraction of the span is a block, not a plate.
BLOCK_THICKNESS_FRACTION = 0.5
#: Thinnest plate a pitch may solve for, m (thinner than household foil; a
#: sheet this thin is governed by tension, not stiffness; common practice).
MIN_THICKNESS = 10e-6
#: Bending waves shorter than this many thicknesses are beyond thin-plate
#: theory (Cremer, Heckl & Ungar 1988; from memory).
THIN_PLATE_WAVELENGTHS = 6.0

#: Patch keys of a plate (besides ``type``).
FIELDS = {
    "shape": Field("choice", required=True, choices=("circle", "rectangle", "outline")),
    "edges": Field("any", required=True,
                   takes="clamped, free or pinned (a rectangle also takes {left, right, bottom, top} of those)"),
    "radius": Field("length", positive=True),
    "width": Field("length", positive=True),
    "height": Field("length", positive=True),
    "thickness": Field("length", positive=True),
    "pitch": Field("pitch", positive=True),
    "material": Field("any", required=True),
    "points": Field("any"),  # shape: outline ([x, y] in metres; synth/resonators/fe)
    "holes": Field("any"),
    "svg_path": Field("str"),
    "svg_unit": Field("length", positive=True, default=1e-3),
    "hole_edges": Field("any"),
    "theory": Field("choice", choices=("kirchhoff", "mindlin"),
                    takes="kirchhoff (thin plate, the default) or mindlin (thick: shear and rotary inertia; shape: outline)"),
}

#: Keys a pitch (e.g. ``--pitch`` on the command line) replaces.
PITCH_REPLACES = ("thickness",)


@dataclass(frozen=True)
class PlateSpec:
    """A thin plate in SI units.

    Attributes
    ----------
    shape : {"circle", "rectangle"}
    edges : {"clamped", "free", "pinned"}
        A rectangle takes "pinned" only.
    radius : float > 0 or None, m
        Circle only.
    width, height : float > 0 or None, m
        Rectangle only; ``x`` runs across the width.
    thickness : float > 0 or None, m
        Give `thickness` or `pitch_hz`, not both.
    pitch_hz : float > 0 or None, Hz
        Pitch of the lowest mode; the thickness is solved for it.
    density : float > 0, kg/m^3
    youngs_modulus : float > 0, Pa
    poisson_ratio : float in (-1, 0.5]
    material : str
        Name for the report.
    """

    shape: str
    edges: str
    density: float
    youngs_modulus: float
    poisson_ratio: float
    radius: float | None = None
    width: float | None = None
    height: float | None = None
    thickness: float | None = None
    pitch_hz: float | None = None
    material: str = "custom"

    TYPE: ClassVar[str] = "plate"

    @property
    def size(self):
        """The length ``a`` of lambda**2 = omega a**2 sqrt(rho h / D), m."""
        return self.radius if self.shape == "circle" else self.width

    @property
    def span(self):
        """Diameter of a circle, shorter side of a rectangle, m."""
        return 2.0 * self.radius if self.shape == "circle" else min(self.width, self.height)


def build_spec(values):
    """A :class:`PlateSpec` from checked patch values (``material`` is a Material)."""
    if is_drawn_outline(values):
        from .fe import plate_fe

        return plate_fe.build_spec(values)
    if values.get("theory") == "mindlin":
        raise SpecError(f"theory: mindlin is for shape: outline (a {values['shape']} here is a thin Kirchhoff plate; "
                        "draw it as an outline for a thick one)", key="theory")
    shape = values["shape"]
    check_outline(shape, values)
    edges = plate_rect.edges_from(values["edges"])  # "clamped" | "free" | "pinned" | (left, right, bottom, top)
    if shape == "circle" and not isinstance(edges, str):
        raise SpecError("a circle has one edge: give clamped, free or pinned (left/right/bottom/top are for a "
                        "rectangle)", key="edges")
    if (values["pitch"] is None) == (values["thickness"] is None):
        raise SpecError(
            "give exactly one of 'pitch' (the thickness is solved) or 'thickness'",
            key="pitch" if values["pitch"] is not None else None,
        )
    material = values["material"]
    if not material.youngs_modulus > 0:
        raise SpecError("a plate needs youngs_modulus > 0: its stiffness sets every frequency", key="material.youngs_modulus")
    if not material.poisson_ratio > -1.0:
        raise SpecError(
            f"must be > -1 for a plate (got {material.poisson_ratio:g}): D = E h^3 / (12 (1 - nu^2)) is infinite at -1",
            key="material.poisson_ratio",
        )
    spec = PlateSpec(
        shape, edges, material.density, material.youngs_modulus, material.poisson_ratio,
        radius=values["radius"], width=values["width"], height=values["height"],
        thickness=values["thickness"], pitch_hz=values["pitch"], material=material.name,
    )
    if spec.thickness is not None and spec.thickness > BLOCK_THICKNESS_FRACTION * spec.span:
        raise SpecError(
            f"{spec.thickness * 1e3:.4g} mm is more than {BLOCK_THICKNESS_FRACTION:g} of the "
            f"{'diameter' if shape == 'circle' else 'shorter side'} ({spec.span * 1e3:.4g} mm): a block, not a plate; "
            f"thin-plate theory wants at most {MAX_THICKNESS_FRACTION:g}",
            key="thickness",
        )
    if spec.pitch_hz is not None:
        try:
            solve_thickness(spec, spec.pitch_hz)
        except UnreachablePitch as error:
            raise SpecError(str(error), key="pitch") from None
    return spec


def position_style(spec):
    """Circles take ``{radius, angle}`` positions, rectangles ``[x, y]`` fractions."""
    if getattr(spec, "shape", None) == "outline":
        from .fe import plate_fe

        return plate_fe.position_style(spec)
    return "polar" if spec.shape == "circle" else "xy"


def retune(spec, pitch_hz):
    """The plate with its thickness changed so its lowest mode sounds at `pitch_hz`."""
    if getattr(spec, "shape", None) == "outline":
        from .fe import plate_fe

        return plate_fe.retune(spec, pitch_hz)
    retuned = replace(spec, thickness=None, pitch_hz=pitch_hz)
    solve_thickness(retuned, pitch_hz)
    return retuned


def flexural_rigidity(youngs_modulus, thickness, poisson_ratio):
    """D = E h**3 / (12 (1 - nu**2)), N m.

    >>> round(flexural_rigidity(200e9, 1e-3, 0.3), 3)
    18.315
    """
    return youngs_modulus * thickness**3 / (12.0 * (1.0 - poisson_ratio**2))


def _hz_per_lambda2(spec, thickness):
    """f / lambda**2 (Hz) of `spec` at `thickness`: sqrt(D / (rho h)) / (2 pi a**2)."""
    d = flexural_rigidity(spec.youngs_modulus, thickness, spec.poisson_ratio)
    return math.sqrt(d / (spec.density * thickness)) / (2.0 * math.pi * spec.size**2)


def _lowest_lambda2(spec):
    if spec.shape == "rectangle" and not plate_rect.is_closed_form(spec.edges):
        return plate_rect.lowest_lambda2(spec)
    if spec.shape == "rectangle":
        return math.pi**2 * (1.0 + (spec.width / spec.height) ** 2)
    return _lowest_circle_lambda2(spec.edges, spec.poisson_ratio)


@functools.lru_cache(maxsize=64)
def _lowest_circle_lambda2(edges, nu):
    """lambda**2 of a circular plate's lowest mode (a constant of the edge and nu)."""
    lam, _, _, _ = circle_lambdas(edges, nu, 1)
    return float(lam[0] ** 2)


def solve_thickness(spec, pitch_hz):
    """Thickness (m) that puts the lowest mode of `spec` at `pitch_hz`.

    Frequencies grow in proportion to the thickness (``sqrt(D / rho h) ~ h``),
    so ``h = pitch / (f per metre of thickness)``.

    Raises
    ------
    UnreachablePitch
        If the thickness would leave thin-plate theory (above 1/10 of the
        span) or fall below :data:`MIN_THICKNESS`.
    """
    per_metre = _lowest_lambda2(spec) * _hz_per_lambda2(spec, 1.0)  # Hz per m of thickness
    thickness = pitch_hz / per_metre
    limit = MAX_THICKNESS_FRACTION * spec.span
    what = "diameter" if spec.shape == "circle" else "shorter side"
    if thickness > limit:
        raise UnreachablePitch(
            f"pitch {pitch_hz:.4g} Hz would need a {thickness * 1e3:.4g} mm thick plate, more than "
            f"{MAX_THICKNESS_FRACTION:g} of the {what} ({limit * 1e3:.4g} mm) where thin-plate theory holds: "
            f"make the plate larger or lower the pitch (at most {limit * per_metre:.4g} Hz)"
        )
    if thickness < MIN_THICKNESS:
        raise UnreachablePitch(
            f"pitch {pitch_hz:.4g} Hz would need a {thickness * 1e6:.3g} um thick plate, thinner than "
            f"{MIN_THICKNESS * 1e6:g} um (foil): make the plate smaller or raise the pitch "
            f"(at least {MIN_THICKNESS * per_metre:.4g} Hz)"
        )
    return thickness


# --------------------------------------------------------------------------
# Rectangles with pinned edges (closed form).


def rectangle_lambdas(aspect, n_modes):
    """The lowest `n_modes` (lambda**2, m, n) of a pinned rectangle.

    Parameters
    ----------
    aspect : float > 0
        Width over height, a / b.
    n_modes : int >= 1

    Returns
    -------
    lambda2, m, n : ndarrays [shape=(n_modes,)]
        ``lambda**2 = pi**2 (m**2 + (n aspect)**2)``, ascending (ties by m).
    """
    # Modes with m^2 + (n aspect)^2 <= K number about pi K / (4 aspect).
    bound = 4.0 * aspect * n_modes / math.pi + 2.0 * (1.0 + aspect) * math.sqrt(n_modes) + 4.0
    while True:
        m = np.arange(1, int(math.sqrt(bound)) + 2)
        n = np.arange(1, int(math.sqrt(bound) / aspect) + 2)
        mm, nn = np.meshgrid(m, n, indexing="ij")
        value = (mm**2 + (nn * aspect) ** 2).ravel()
        keep = value <= bound
        if np.count_nonzero(keep) >= n_modes:
            break
        bound *= 1.5
    mm, nn, value = mm.ravel()[keep], nn.ravel()[keep], value[keep]
    index = np.lexsort((nn, mm, value))[:n_modes]
    return math.pi**2 * value[index], mm[index], nn[index]


def _rectangle_pairs(spec, n_modes):
    lambda2, m, n = rectangle_lambdas(spec.width / spec.height, n_modes)

    def shape(point):
        x, y = point
        # sin(m pi x) via degrees: exactly 0 on the edges and on nodal lines.
        return 2.0 * sindg(180.0 * m * x) * sindg(180.0 * n * y)

    columns = {
        "nodal_lines_x": tuple(int(k) - 1 for k in m),
        "nodal_lines_y": tuple(int(k) - 1 for k in n),
        "nodal_lines": tuple(int(a + b - 2) for a, b in zip(m, n)),
        "lambda_squared": tuple(float(v) for v in lambda2),
    }
    labels = tuple(f"({a},{b})" for a, b in zip(m, n))
    return lambda2, labels, shape, columns


# --------------------------------------------------------------------------
# The contract.


def solve(spec, n_modes):
    """Modes of a thin plate, before it is excited or heard anywhere.

    Parameters
    ----------
    spec : PlateSpec
    n_modes : int >= 1
        How many rows a placement lists (the lowest modes; a circular cos/sin
        pair is two rows when a pickup is given).

    Returns
    -------
    PairedSolution (circle) or Solution (rectangle)
        Positions: circle ``(radius fraction 0..1, angle rad)``; rectangle
        ``(x, y)`` fractions of the width and height.  Circle columns:
        nodal_diameters (n), nodal_circles (s), nodal_lines (n + s),
        orientation ("", "cos", "sin" or "pair"), nodal_circle_radii
        (fractions of the radius), lambda_squared.  Rectangle columns:
        nodal_lines_x (m - 1), nodal_lines_y (n - 1), nodal_lines,
        lambda_squared.  Parameters: the thickness (solved or given), D, the
        areal density, the mass and the thin-plate limit frequency.
    """
    if getattr(spec, "shape", None) == "outline":
        from .fe import plate_fe

        return plate_fe.solve(spec, n_modes)
    if spec.shape == "rectangle" and not plate_rect.is_closed_form(spec.edges):
        return plate_rect.solve(spec, n_modes)
    thickness = spec.thickness if spec.thickness is not None else solve_thickness(spec, spec.pitch_hz)
    if spec.shape == "circle":
        lambda2, orders, labels, radial, columns = circle_pairs(spec, n_modes)
        geometry = {"radius_m": spec.radius, "orientation_reference_deg": 0.0}
    else:
        lambda2, labels, shape, columns = _rectangle_pairs(spec, n_modes)
        geometry = {"width_m": spec.width, "height_m": spec.height}
    area = math.pi * spec.radius**2 if spec.shape == "circle" else spec.width * spec.height
    freq = lambda2 * _hz_per_lambda2(spec, thickness)
    d = flexural_rigidity(spec.youngs_modulus, thickness, spec.poisson_ratio)
    areal = spec.density * thickness
    k_limit = 2.0 * math.pi / (THIN_PLATE_WAVELENGTHS * thickness)  # rad/m
    parameters = {
        "material": spec.material,
        "shape": spec.shape,
        "edges": spec.edges,
        **geometry,
        "thickness_m": thickness,
        "thickness_solved": spec.thickness is None,
        "poisson_ratio": spec.poisson_ratio,
        "flexural_rigidity_n_m": d,
        "areal_density_kg_m2": areal,
        "mass_kg": areal * area,
        "thin_plate_limit_hz": k_limit**2 * math.sqrt(d / areal) / (2.0 * math.pi),
    }
    if spec.edges == "free":
        parameters["rigid_body_modes"] = "left out (0 Hz): (0,0) translation and (1,0) rocking"
    warnings = []
    if thickness > MAX_THICKNESS_FRACTION * spec.span:
        warnings.append(
            f"plate thickness {thickness * 1e3:.4g} mm is more than {MAX_THICKNESS_FRACTION:g} of the "
            f"{'diameter' if spec.shape == 'circle' else 'shorter side'}: thin-plate theory reads the modes sharp"
        )
    if spec.shape == "circle":  # both tables come sorted by lambda
        return PairedSolution(
            resonator="plate",
            frequency_hz=frozen_array(freq),
            orders=orders,
            labels=labels,
            radial=radial,
            n_rows=n_modes,
            columns=columns,
            parameters=parameters,
            warnings=tuple(warnings),
            rim_is_node=spec.edges != "free",  # w = 0 on a clamped or pinned edge, exactly
        )
    return Solution(
        resonator="plate",
        frequency_hz=frozen_array(freq),
        labels=labels,
        shape=shape,
        columns=columns,
        parameters=parameters,
        warnings=tuple(warnings),
    )


#: Beyond this many modes below a frequency a rectangle's count is the area law, not a tally.
_COUNT_EXACTLY = 10_000_000


def count_below(spec, limit_hz):
    """About how many modes of `spec` lie below `limit_hz`, in the units of :func:`solve`'s table.

    With ``f = lambda**2 sqrt(D / (rho h)) / (2 pi a**2)``: a pinned
    rectangle counts its modes exactly, ``pi**2 (m**2 + (n a / b)**2) <
    lambda**2``; a circle estimates its (n, s) pairs (one per cos/sin pair) by
    Weyl's law, about ``lambda**2 / 8`` (Leissa [1]_; the boundary's
    correction is left to the growth of
    :meth:`synth.solvecache.SolveCache.solve_below`).
    """
    if getattr(spec, "shape", None) == "outline":
        from .fe import plate_fe

        return plate_fe.count_below(spec, limit_hz)
    if spec.shape == "rectangle" and not plate_rect.is_closed_form(spec.edges):
        return plate_rect.count_below(spec, limit_hz)
    thickness = spec.thickness if spec.thickness is not None else solve_thickness(spec, spec.pitch_hz)
    lambda2 = limit_hz / _hz_per_lambda2(spec, thickness)
    if spec.shape == "circle":
        return int(lambda2 / 8.0)
    aspect = spec.width / spec.height
    bound = lambda2 / math.pi**2  # m**2 + (n aspect)**2 below this
    if bound / aspect > _COUNT_EXACTLY:
        return int(math.pi * bound / (4.0 * aspect))
    m = np.arange(1, int(math.sqrt(bound)) + 1)
    across = np.sqrt(np.maximum(bound - m.astype(float) ** 2, 0.0)) / aspect
    return int(np.sum(np.maximum(np.ceil(across) - 1.0, 0.0)))


def plate_modes(spec, *, excitation_position, pickup_position, n_modes):
    """Modes of a thin plate excited and heard at two points (see :func:`solve`).

    `pickup_position` None weights every mode by 1 (and merges the
    orientations of circular pairs into one row).

    Returns
    -------
    ModeSet
    """
    return solve(spec, n_modes).place(excitation_position, pickup_position)


modes = plate_modes


def check_position(spec, point, key):
    """Refuse a point outside an outline or in a hole (SpecError naming `key`); other shapes check fractions."""
    if getattr(spec, "shape", None) == "outline":
        from .fe import plate_fe

        plate_fe.check_position(spec, point, key)
