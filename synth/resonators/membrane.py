"""Transverse modes of an ideal stretched membrane: circle or rectangle.

Notes
-----
An ideal membrane under uniform tension per length ``T`` (N/m) with areal
density ``sigma`` (kg/m^2) carries waves at ``c = sqrt(T / sigma)``.  With a
fixed rim:

* circle of radius ``a``: ``f_mn = j_mn c / (2 pi a)``, where ``j_mn`` is the
  n-th positive zero of the Bessel function ``J_m``; shapes
  ``J_m(j_mn r / a) cos(m theta)`` and ``J_m(j_mn r / a) sin(m theta)``.
  Mode (m, n) has m nodal diameters and n - 1 nodal circles inside the rim.
* rectangle ``Lx x Ly``: ``f_mn = (c / 2) sqrt((m / Lx)**2 + (n / Ly)**2)``,
  shapes ``sin(m pi x / Lx) sin(n pi y / Ly)``, with m - 1 and n - 1 interior
  nodal lines.

Shapes are scaled to a mean square of 1 over the area (a common modal mass):
``J_m(j r/a) / |J_1(j)|`` for m = 0, ``sqrt(2) J_m(j r/a) cos(m theta) /
|J_(m+1)(j)|`` for m > 0 (from ``int_0^1 J_m(j x)**2 x dx = J_(m+1)(j)**2 / 2``),
and ``2 sin sin`` for the rectangle.

The two orientations of a circular (m > 0) pair share one frequency, so any
rotation of the pair is an equally valid modal basis.  The basis is turned to
the excitation point (its angle is ``theta = 0``): the "cos" member then
carries everything the excitation puts into the pair, and its level is what
the pickup hears; the "sin" member has a nodal diameter through the excitation
point and is listed with level null.  Without a pickup (every mode weighted 1)
the silent partner tells nothing, so each pair is merged into one row
(orientation "pair").  Where the excitation sits at the centre the basis is
turned to the pickup instead (every m > 0 mode is then silent anyway).

References
----------
.. [1] M. Abramowitz and I. A. Stegun, *Handbook of Mathematical Functions*,
   NBS (1964), table 9.5 (zeros of J_m; table number from memory).
.. [2] N. H. Fletcher and T. D. Rossing, *The Physics of Musical Instruments*,
   2nd ed., Springer (1998), sec. 3.2-3.5 (rectangular and circular membranes).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np
from scipy.special import jn_zeros, jv

from ..modes import LazyColumn, Solution, frozen_array
from ..schema import Field
from .common import SpecError, UnreachablePitch, stress_warnings
from .outline import PairedSolution, check_outline, is_drawn_outline

__all__ = [
    "FIELDS",
    "MembraneSpec",
    "build_spec",
    "position_style",
    "modes",
    "solve",
    "count_below",
    "retune",
    "membrane_modes",
    "wave_speed",
    "solve_tension",
    "circle_zeros",
    "bessel_zeros_below",
    "circle_mode_shape",
    "rectangle_mode_shape",
    "SHAPES",
    "PITCH_REPLACES",
]

#: Membrane outlines a patch may name.
SHAPES = ("circle", "rectangle", "outline")

#: Keys a command-line ``--pitch`` replaces (for the patch loader).
PITCH_REPLACES = ("tension",)

#: Patch keys of a membrane (besides ``type``).
FIELDS = {
    "shape": Field("choice", default="circle", choices=SHAPES),
    "radius": Field("length", positive=True),
    "width": Field("length", positive=True),
    "height": Field("length", positive=True),
    "tension": Field("force_per_length", positive=True),
    "pitch": Field("pitch", positive=True),
    "areal_density": Field("areal_density", positive=True),
    "material": Field("any"),
    "thickness": Field("length", positive=True),
    "air": Field("choice", default="none", choices=("none", "free", "baffled", "kettle")),
    "kettle_volume": Field("volume", positive=True),
    "points": Field("any"),  # shape: outline ([x, y] in metres; synth/resonators/fe)
    "holes": Field("any"),
    "svg_path": Field("str"),
    "svg_unit": Field("length", positive=True, default=1e-3),
}

#: Pairs solved exactly with the air (:mod:`.air_loading`); above them the infinite-membrane law.
AIR_EXACT_PAIRS = 40

#: Growth factor of the search bound while collecting enough modes.
_GROW = 1.25


@dataclass(frozen=True)
class MembraneSpec:
    """A membrane in SI units.

    Attributes
    ----------
    shape : {"circle", "rectangle"}
    radius : float > 0 or None, m
        Circle only.
    width, height : float > 0 or None, m
        Rectangle only; positions ``[x, y]`` are fractions of these.
    areal_density : float > 0, kg/m^2
    tension : float > 0 or None, N/m
        Give `tension` or `pitch_hz`, not both.
    pitch_hz : float > 0 or None, Hz
        Pitch of the lowest mode; the tension is solved for it.
    material : str
        Name for the report ("custom" when `areal_density` was given).
    thickness : float or None, m
        Where the areal density came from material density x thickness.
    youngs_modulus, poisson_ratio, tensile_strength : float or None
        The material's, when given by material + thickness: used for the
        stress report and the bending-stiffness note (bending is not modelled).
    air : {"none", "free", "baffled", "kettle"}
        How the air loads a circular head (:mod:`.air_loading`): not at all, in
        free air on both faces, in an infinite baffle on both faces, or over a
        closed kettle of `kettle_volume` (m^3) and baffled above.
    kettle_volume : float or None, m^3
    """

    shape: str
    areal_density: float
    radius: float | None = None
    width: float | None = None
    height: float | None = None
    tension: float | None = None
    pitch_hz: float | None = None
    material: str = "custom"
    thickness: float | None = None
    youngs_modulus: float | None = None
    poisson_ratio: float | None = None
    tensile_strength: float | None = None
    air: str = "none"
    kettle_volume: float | None = None

    TYPE: ClassVar[str] = "membrane"

    def air_loading(self):
        """The :class:`~synth.resonators.air_loading.AirLoading` of this head."""
        from .air_loading import AirLoading

        return AirLoading(kind=self.air, kettle_volume=self.kettle_volume)


def build_spec(values):
    """A :class:`MembraneSpec` from checked patch values (``material`` is a Material)."""
    if is_drawn_outline(values):
        from .fe import membrane_fe

        return membrane_fe.build_spec(values)
    shape = values["shape"]
    check_outline(shape, values)
    if (values["pitch"] is None) == (values["tension"] is None):
        raise SpecError(
            "give exactly one of 'pitch' (the tension is solved) or 'tension' (N/m)",
            key="pitch" if values["pitch"] is not None else None,
        )
    areal_density, material, thickness = _areal_density(values)
    constants = values["material"]
    air, volume = values["air"], values["kettle_volume"]
    if air != "none" and shape != "circle":
        raise SpecError(f"air: {air} is worked out for a circular head only (shape: circle)", key="air")
    if air == "kettle" and volume is None:
        raise SpecError("air: kettle needs kettle_volume (the kettle's air, e.g. 0.14 m^3)", key="kettle_volume")
    if volume is not None and air != "kettle":
        raise SpecError(f"kettle_volume goes with air: kettle (air is {air})", key="kettle_volume")
    return MembraneSpec(
        shape=shape,
        areal_density=areal_density,
        radius=values["radius"],
        width=values["width"],
        height=values["height"],
        tension=values["tension"],
        pitch_hz=values["pitch"],
        material=material,
        thickness=thickness,
        youngs_modulus=None if constants is None else constants.youngs_modulus,
        poisson_ratio=None if constants is None else constants.poisson_ratio,
        tensile_strength=None if constants is None else constants.tensile_strength,
        air=air,
        kettle_volume=volume,
    )


def _areal_density(values):
    """(areal density kg/m^2, material name, thickness m) from the patch values."""
    material, thickness, sigma = values["material"], values["thickness"], values["areal_density"]
    if sigma is not None:
        if material is not None:
            raise SpecError("give areal_density (kg/m^2) or material + thickness, not both", key="areal_density")
        if thickness is not None:
            raise SpecError("thickness goes with material; with areal_density leave it out", key="thickness")
        return sigma, "custom", None
    if material is None and thickness is None:
        raise SpecError("give areal_density (kg/m^2), or material + thickness")
    if thickness is None:
        raise SpecError("material needs thickness (areal density = density x thickness)", key="thickness")
    if material is None:
        raise SpecError("thickness needs a material (or give areal_density instead)", key="thickness")
    return material.density * thickness, material.name, thickness


def position_style(spec):
    """Circle: ``{radius: fraction, angle: degrees}``; rectangle: ``[x, y]`` fractions."""
    if getattr(spec, "shape", None) == "outline":
        from .fe import membrane_fe

        return membrane_fe.position_style(spec)
    return "polar" if spec.shape == "circle" else "xy"


def retune(spec, pitch_hz):
    """The membrane re-tensioned so its lowest mode sounds at `pitch_hz`."""
    if getattr(spec, "shape", None) == "outline":
        from .fe import membrane_fe

        return membrane_fe.retune(spec, pitch_hz)
    if not (math.isfinite(pitch_hz) and pitch_hz > 0):
        raise UnreachablePitch(f"pitch {pitch_hz!r} Hz must be a positive frequency")
    return replace(spec, tension=None, pitch_hz=pitch_hz)


def wave_speed(tension, areal_density):
    """Transverse wave speed (m/s) on a membrane: sqrt(T / sigma)."""
    return math.sqrt(tension / areal_density)


def circle_zeros(m, count):
    """The first `count` positive zeros of the Bessel function J_m."""
    return jn_zeros(int(m), int(count))


def _lowest_eigenvalue(spec):
    """k (rad/m) of the lowest mode: f_lowest = k c / (2 pi)."""
    if spec.shape == "circle":
        return circle_zeros(0, 1)[0] / spec.radius
    return math.pi * math.hypot(1.0 / spec.width, 1.0 / spec.height)


def solve_tension(spec, pitch_hz):
    """Tension per length (N/m) that puts the lowest mode at `pitch_hz`.

    ``T = sigma (2 pi f / k_1)**2``, with ``k_1 = j_01 / a`` (circle) or
    ``pi sqrt(1/Lx**2 + 1/Ly**2)`` (rectangle).
    """
    speed = 2.0 * math.pi * pitch_hz / _lowest_eigenvalue(spec)
    if spec.shape == "circle" and spec.air != "none":  # the loaded (0,1) carries the pitch
        from .air_loading import air_loaded_modes, tension_for_pitch

        tension = tension_for_pitch(spec.radius, spec.areal_density, pitch_hz, loading=spec.air_loading(), mode=(0, 1))
        reached = air_loaded_modes(spec.radius, tension, spec.areal_density, [(0, 1)],
                                   loading=spec.air_loading()).frequency_hz[0]
        if not (tension > 0 and abs(reached / pitch_hz - 1.0) < 1e-6):
            # a kettle's air alone holds the (0,1) up: below that no tension reaches the pitch
            floor = air_loaded_modes(spec.radius, 1e-6 * spec.areal_density, spec.areal_density, [(0, 1)],
                                     loading=spec.air_loading()).frequency_hz[0]
            raise UnreachablePitch(f"pitch {pitch_hz:.2f} Hz is below what this head can sound with air: {spec.air}: "
                                   f"the air alone holds its lowest mode near {floor:.1f} Hz; raise the pitch, "
                                   "or make the kettle larger or the head heavier")
        return tension
    return spec.areal_density * speed**2


def circle_mode_shape(m, n, radius_fraction, angle, *, orientation="cos"):
    """Mass-normalised shape of circular mode (m, n) at points on the membrane.

    Parameters
    ----------
    m : int >= 0
        Nodal diameters.
    n : int >= 1
        Nodal circles + 1 (the rim counted).
    radius_fraction : array_like in [0, 1]
    angle : array_like, rad
        From the basis direction (``theta = 0``).
    orientation : {"cos", "sin"}

    Returns
    -------
    ndarray
        Mean square over the disc is 1.
    """
    j = circle_zeros(m, n)[-1]
    return _circle_shape(m, j, np.asarray(radius_fraction, dtype=float), np.asarray(angle, dtype=float), orientation)


def _circle_shape(m, j, r, angle, orientation):
    radial = np.where(r >= 1.0, 0.0, jv(m, j * r) / abs(jv(m + 1, j)))  # the rim: an exact node
    if m == 0:
        return radial
    turn = np.cos(m * angle) if orientation == "cos" else np.sin(m * angle)
    return math.sqrt(2.0) * radial * turn


def rectangle_mode_shape(m, n, x, y):
    """Mass-normalised shape ``2 sin(m pi x) sin(n pi y)`` at fractions (x, y)."""
    return 2.0 * _edge_sine(m, x) * _edge_sine(n, y)


def _edge_sine(k, fraction):
    """sin(k pi fraction), exactly 0 on the edges (fraction 0 or 1)."""
    fraction = np.asarray(fraction, dtype=float)
    return np.where((fraction <= 0.0) | (fraction >= 1.0), 0.0, np.sin(k * math.pi * fraction))


def _circle_table(n_pairs):
    """The lowest `n_pairs` circular modes: (j, m, n) arrays sorted by j, and {m: zeros of J_m} below the last."""
    # Weyl's law for a fixed-rim disc: about x**2 / 4 - x / 2 modes with j < x, x**2 / 8 pairs.
    bound = 2.0 * math.sqrt(2.0 * n_pairs) + 4.0
    while True:
        zeros = bessel_zeros_below(bound)
        if sum(z.size for z in zeros.values()) >= n_pairs:
            break
        bound *= _GROW
    j = np.concatenate(list(zeros.values()))
    m = np.concatenate([np.full(z.size, order) for order, z in zeros.items()])
    n = np.concatenate([np.arange(1, z.size + 1) for z in zeros.values()])
    lowest = np.lexsort((n, m, j))[:n_pairs]
    return j[lowest], m[lowest], n[lowest], zeros


#: Grid step (in x) of the search for the zeros of J_m, m >= 1: consecutive zeros are
#: more than 3 apart (the spacing falls towards pi from above), so a step holds one at most;
#: a fine grid makes the regula-falsi start close, and two Halley steps reach the last bit.
ZERO_GRID_STEP = 0.25
#: A Halley step smaller than this fraction of the zero is the last one needed (cubic
#: convergence: the error left is about its cube).
ZERO_STEP_RTOL = 1e-8
#: Below this, a recurrence value on the grid is recomputed directly before its sign is read.
_NEAR_ZERO = 1e-9
#: A table of zeros is made this much wider than first asked (a solve asks a little past a count).
_HEADROOM = 1.1
#: The zeros found so far, shared by every circular membrane: (bound, {m: every zero of J_m
#: below bound}).  Zeros do not depend on the object (only c / a scales them), so a retune
#: or another size reuses them; the table only grows, and each zero is the same computed at
#: any bound (its bracket and its iteration are its own).
_ZEROS = (0.0, {})


def bessel_zeros_below(bound):
    """{m: the zeros of J_m below `bound`, ascending} for every order m that has one.

    Notes
    -----
    Order 0 comes from :func:`scipy.special.jn_zeros`.  For m >= 1, J_m is
    tabulated on the grid x = k :data:`ZERO_GRID_STEP` by the forward
    recurrence ``J_(m+1) = (2m / x) J_m - J_(m-1)`` from J_0 and J_1, stable
    where x >= m, the only place J_m has zeros (``j_m1 > m``; Abramowitz &
    Stegun 9.5.2, from memory); each sign change brackets one zero, polished
    by Halley's method on J_m with ``J_m' = (m / x) J_m - J_(m+1)`` and
    Bessel's equation for J_m'' (a few evaluations per zero, where
    ``jn_zeros`` takes a fixed-point search per order: ten times slower at
    20,000 pairs).  The tests hold the zeros against Brent's method on
    :func:`scipy.special.jv` and against ``jn_zeros``.
    """
    global _ZEROS
    known, table = _ZEROS
    if known < bound:
        known = max(_HEADROOM * float(bound), _GROW * known)
        table = _compute_zeros(known)
        _ZEROS = (known, table)
    out = {}
    for m, zeros in table.items():
        below = zeros[zeros < bound]
        if below.size == 0:
            break  # the first zero rises with the order
        out[m] = below
    return out


def _compute_zeros(bound):
    """{m: every zero of J_m below `bound`}: see :func:`bessel_zeros_below`."""
    count = int(bound / math.pi) + 2
    first = jn_zeros(0, count)
    while first[-1] < bound:
        count *= 2
        first = jn_zeros(0, count)
    table = {0: first[first < bound]}
    x = np.arange(1, int(math.ceil(bound / ZERO_GRID_STEP)) + 2) * ZERO_GRID_STEP
    top = int(bound)
    if top < 1:
        return table
    values = np.empty((top + 1, x.size))
    values[0], values[1] = jv(0, x), jv(1, x)
    with np.errstate(all="ignore"):  # beyond x < m the recurrence grows without bound: never read there
        for m in range(1, top):
            values[m + 1] = (2.0 * m / x) * values[m] - values[m - 1]
    pieces = []
    for m in range(1, top + 1):
        start = int(np.searchsorted(x, m))
        grid, value = x[start:], values[m, start:]
        near = np.abs(value) < _NEAR_ZERO
        if np.any(near):
            value = value.copy()
            value[near] = jv(m, grid[near])
        positive = value >= 0.0  # a value of exactly 0 closes the bracket on its one side only
        change = np.flatnonzero(positive[:-1] != positive[1:])
        pieces.append((m, grid[change], grid[change + 1], value[change], value[change + 1]))
    order = np.concatenate([np.full(lo.size, m) for m, lo, _, _, _ in pieces])
    lo, hi, f_lo, f_hi = (np.concatenate([piece[k] for piece in pieces]) for k in range(1, 5))
    zeros = _halley(order, lo, hi, f_lo, f_hi)
    for m in range(1, top + 1):
        found = zeros[order == m]
        found = found[found < bound]
        if found.size == 0:
            break
        table[m] = found
    return table


def _halley(order, lo, hi, f_lo, f_hi):
    """Zeros of J_order in the brackets [lo, hi] (f_lo, f_hi: J at the ends), all at once."""
    with np.errstate(invalid="ignore", divide="ignore"):
        x = np.where(f_hi == 0.0, hi, np.where(f_lo == 0.0, lo, lo - f_lo * (hi - lo) / (f_hi - f_lo)))
    todo = np.flatnonzero((f_lo != 0.0) & (f_hi != 0.0))
    for _ in range(8):
        if todo.size == 0:
            break
        m, at = order[todo], x[todo]
        value, next_order = jv(m, at), jv(m + 1, at)
        slope = m / at * value - next_order
        curve = -slope / at - (1.0 - m * m / (at * at)) * value  # Bessel's equation
        step = 2.0 * value * slope / (2.0 * slope * slope - value * curve)
        x[todo] = np.clip(at - step, lo[todo], hi[todo])
        todo = todo[np.abs(step) > ZERO_STEP_RTOL * at]
    return x


def _circle_pairs(spec, speed, n_modes):
    """Per-pair frequencies, orders, labels, radial function and columns of a circle."""
    margin = 0 if spec.air == "none" else max(4, n_modes // 10)  # the air reorders the top end a little
    j, m, n, zeros = _circle_table(n_modes + margin)  # n_modes pairs: enough for n_modes rows either way
    freq = j * speed / (2.0 * math.pi * spec.radius)
    air_columns = {}
    if spec.air != "none":
        freq, cents, t60 = _air_loaded(spec, speed, j, m, n, freq)
        order = np.argsort(freq, kind="stable")[:n_modes]
        j, m, n, freq = j[order], m[order], n[order], freq[order]
        air_columns = {"air_cents": tuple(float(c) for c in cents[order]),
                       "radiation_t60_s": tuple(None if not math.isfinite(t) else float(t) for t in t60[order])}
    norm = np.abs(jv(m + 1, j))
    root2 = np.where(m == 0, 1.0, math.sqrt(2.0))

    def radial(radius_fraction):
        return root2 * (jv(m, j * radius_fraction) / norm)

    def radii():  # a report column: built when a report asks for it
        return [tuple(float(z / root) for z in zeros[order][: index - 1]) for root, order, index in zip(j, m, n)]

    columns = {
        "nodal_diameters": tuple(int(k) for k in m),
        "nodal_circles": tuple(int(k) - 1 for k in n),
        "nodal_lines": tuple(int(a + b) - 1 for a, b in zip(m, n)),
        "nodal_circle_radii": LazyColumn(radii, len(j)),
        **air_columns,
    }
    labels = tuple(f"({a},{b})" for a, b in zip(m.tolist(), n.tolist()))
    return freq, m, labels, radial, columns


def _air_loaded(spec, speed, j, m, n, freq):
    """(frequency Hz, cents from in vacuo, radiation T60 s) of the pairs (j, m, n) of an air-loaded head.

    The lowest :data:`AIR_EXACT_PAIRS` pairs are solved with the air
    (:func:`.air_loading.air_loaded_modes`); above them, where the head is
    many wavelengths across, the infinite membrane's added mass 2 rho / k per
    area for both faces: ``f = f_vacuum / sqrt(1 + 2 rho / (sigma k))``, k = j / a,
    without radiation damping (their radiation T60 is long; left to the patch).
    """
    from .air_loading import AIR_DENSITY, air_loaded_modes

    k = j / spec.radius
    loaded = freq / np.sqrt(1.0 + 2.0 * AIR_DENSITY / (spec.areal_density * k))
    t60 = np.full(freq.shape, np.inf)
    exact = np.argsort(freq, kind="stable")[:AIR_EXACT_PAIRS]
    tension = speed**2 * spec.areal_density
    solved = air_loaded_modes(spec.radius, tension, spec.areal_density, list(zip(m[exact].tolist(), n[exact].tolist())),
                              loading=spec.air_loading())
    loaded[exact] = solved.frequency_hz
    t60[exact] = solved.t60_s
    return loaded, 1200.0 * np.log2(loaded / freq), t60


def _rectangle_table(n_rows, width, height):
    """Sorted (k, m, n) of the lowest rectangular modes, k = sqrt((m/Lx)^2 + (n/Ly)^2)."""
    bound = math.sqrt(4.0 * n_rows / (math.pi * width * height)) + 2.0 / min(width, height)
    while True:
        m = np.arange(1, int(bound * width) + 2)
        n = np.arange(1, int(bound * height) + 2)
        mm, nn = np.meshgrid(m, n, indexing="ij")
        k = np.hypot(mm / width, nn / height)
        inside = k < bound
        if np.count_nonzero(inside) >= n_rows:
            entries = sorted(zip(k[inside].tolist(), mm[inside].tolist(), nn[inside].tolist()))
            return entries[:n_rows]
        bound *= _GROW


def _rectangle_solution(spec, speed, n_modes):
    rows = _rectangle_table(n_modes, spec.width, spec.height)
    freq = np.array([0.5 * speed * k for k, _, _ in rows])
    m = np.array([r[1] for r in rows])
    n = np.array([r[2] for r in rows])

    def shape(point):
        return 2.0 * _edge_sine(m, point[0]) * _edge_sine(n, point[1])

    columns = {
        "nodal_lines_x": tuple(int(a) - 1 for a in m),
        "nodal_lines_y": tuple(int(b) - 1 for b in n),
        "nodal_lines": tuple(int(a + b) - 2 for a, b in zip(m, n)),
    }
    labels = tuple(f"({a},{b})" for _, a, b in rows)
    return freq, labels, shape, columns


def solve(spec, n_modes):
    """Modes of a circular or rectangular membrane with a fixed rim, before it is excited or heard.

    Parameters
    ----------
    spec : MembraneSpec
    n_modes : int >= 1
        Rows a placement lists (a circular cos/sin pair is two rows when a
        pickup is given, one without).

    Returns
    -------
    PairedSolution (circle) or Solution (rectangle)
        Positions: ``(radius fraction, angle rad)`` for a circle, ``(x, y)``
        fractions of width and height for a rectangle.  Labels ``"(m,n)"``.
        Circle columns: nodal_diameters (m), nodal_circles (n - 1, rim not
        counted), nodal_lines (m + n - 1), orientation ("", "cos", "sin" or
        "pair") and nodal_circle_radii.  Rectangle columns: nodal_lines_x
        (m - 1), nodal_lines_y (n - 1), nodal_lines (m + n - 2).  Parameters
        include the tension (solved where a pitch was given) and the wave
        speed.
    """
    if getattr(spec, "shape", None) == "outline":
        from .fe import membrane_fe

        return membrane_fe.solve(spec, n_modes)
    tension = solve_tension(spec, spec.pitch_hz) if spec.tension is None else spec.tension
    speed = wave_speed(tension, spec.areal_density)
    if spec.shape == "circle":
        freq, orders, labels, radial, columns = _circle_pairs(spec, speed, n_modes)
        geometry = {"radius_m": spec.radius, "orientation_reference_deg": 0.0}
        if spec.air != "none":
            geometry.update({"air": spec.air, **({"kettle_volume_m3": spec.kettle_volume} if spec.kettle_volume else {})})
    else:
        freq, labels, shape, columns = _rectangle_solution(spec, speed, n_modes)
        geometry = {"width_m": spec.width, "height_m": spec.height}
    parameters = {
        "shape": spec.shape,
        **geometry,
        "material": spec.material,
        "thickness_m": spec.thickness,
        "areal_density_kg_m2": spec.areal_density,
        "tension_n_per_m": tension,
        "tension_solved": spec.tension is None,
        "wave_speed_m_s": speed,
    }
    warnings, warn_above = [], ()
    if spec.thickness is None:
        del parameters["thickness_m"]
    else:
        stress = tension / spec.thickness
        parameters["stress_pa"] = stress
        if spec.tensile_strength:
            parameters["tensile_strength_pa"] = spec.tensile_strength
            parameters["stress_percent_of_strength"] = 100.0 * stress / spec.tensile_strength
        warnings += stress_warnings(stress, spec.tensile_strength, "membrane")
        note = _bending_note(spec, tension, speed)
        if note is not None:
            warn_above = (note,)
    if spec.shape == "circle":
        return PairedSolution(
            resonator="membrane",
            frequency_hz=frozen_array(freq),
            orders=orders,
            labels=labels,
            radial=radial,
            n_rows=n_modes,
            columns=columns,
            parameters=parameters,
            warnings=tuple(warnings),
            warn_above=warn_above,
        )
    if warn_above and freq[-1] > warn_above[0][0]:
        warnings.append(warn_above[0][1])
    return Solution(
        resonator="membrane",
        frequency_hz=frozen_array(freq),
        labels=labels,
        shape=shape,
        columns=columns,
        parameters=parameters,
        warnings=tuple(warnings),
    )


#: Beyond this many modes (Weyl's estimate) below a frequency the count is not worked out exactly.
_COUNT_EXACTLY = 1_000_000


def count_below(spec, limit_hz):
    """How many modes of `spec` lie below `limit_hz`, in the units of :func:`solve`'s table.

    A circle counts its (m, n) pairs once each (the table :func:`solve`
    builds holds pairs; a placement lists both members of a pair), exactly
    from the Bessel zeros below ``x = 2 pi a f / c`` (the same zeros the solve
    then uses), or by Weyl's law (about x**2 / 8 pairs) where that is over a
    million.  A rectangle counts its modes exactly:
    ``(m / Lx)**2 + (n / Ly)**2 < (2 f / c)**2``.
    """
    if getattr(spec, "shape", None) == "outline":
        from .fe import membrane_fe

        return membrane_fe.count_below(spec, limit_hz)
    tension = solve_tension(spec, spec.pitch_hz) if spec.tension is None else spec.tension
    speed = wave_speed(tension, spec.areal_density)
    if spec.shape == "circle":
        if spec.air != "none":  # the air lowers the modes: count in vacuo up to the largest lowering (the (0,1)'s)
            from .air_loading import AIR_DENSITY

            limit_hz *= math.sqrt(1.0 + 2.0 * AIR_DENSITY * spec.radius / (spec.areal_density * circle_zeros(0, 1)[0]))
        x = 2.0 * math.pi * spec.radius * limit_hz / speed
        if x * x / 8.0 > _COUNT_EXACTLY:
            return int(x * x / 8.0)
        return sum(z.size for z in bessel_zeros_below(x).values())
    wavenumber = 2.0 * limit_hz / speed  # cycles per metre of (m / Lx, n / Ly)
    if wavenumber * wavenumber * spec.width * spec.height > 4.0 * _COUNT_EXACTLY:
        return int(math.pi / 4.0 * wavenumber**2 * spec.width * spec.height)
    m = np.arange(1, int(wavenumber * spec.width) + 1)
    across = spec.height * np.sqrt(np.maximum(wavenumber**2 - (m / spec.width) ** 2, 0.0))
    return int(np.sum(np.maximum(np.ceil(across) - 1.0, 0.0)))


def membrane_modes(spec, *, excitation_position, pickup_position, n_modes):
    """Modes of a membrane excited and heard at two points (see :func:`solve`).

    `pickup_position` None weights every mode 1 (and merges the orientations
    of circular pairs).

    Returns
    -------
    ModeSet
    """
    return solve(spec, n_modes).place(excitation_position, pickup_position)


#: Bending stiffness raises a mode by about (D k^2 / T) / 2 of its frequency;
#: D k^2 / T = 0.01 is about 9 cents.
BENDING_NOTE_RATIO = 0.01


def _bending_note(spec, tension, speed):
    """(onset Hz, warning) for the (unmodelled) bending stiffness, or None.

    The warning applies when modes above the onset are listed: there bending
    would shift them more than ~9 cents.

    For a membrane with bending stiffness D = E h^3 / (12 (1 - nu^2)),
    sigma omega^2 = T k^2 + D k^4 (exact for a pinned rectangle, close for a
    circle), so modes are raised by about D k^2 / (2 T) of their frequency.
    """
    if not spec.youngs_modulus or spec.poisson_ratio is None:
        return None
    rigidity = spec.youngs_modulus * spec.thickness**3 / (12.0 * (1.0 - spec.poisson_ratio**2))
    k = math.sqrt(BENDING_NOTE_RATIO * tension / rigidity)  # rad/m where D k^2 / T = 0.01
    onset_hz = speed * k / (2.0 * math.pi)
    return onset_hz, (
        f"bending stiffness of the {spec.thickness * 1e3:.3g} mm {spec.material} is not modelled: "
        f"modes above about {onset_hz:.0f} Hz would sound more than 9 cents sharper on a real membrane"
    )


modes = membrane_modes


def check_position(spec, point, key):
    """Refuse a point outside an outline or in a hole (SpecError naming `key`); other shapes check fractions."""
    if getattr(spec, "shape", None) == "outline":
        from .fe import membrane_fe

        membrane_fe.check_position(spec, point, key)
