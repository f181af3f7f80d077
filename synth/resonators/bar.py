"""Bending modes of a bar or rod: free-free, clamped-free, pinned-pinned, clamped-clamped.

Notes
-----
Uniform bar, Euler-Bernoulli (thin-bar) theory:
``omega_n = (beta_n L)**2 / L**2 * sqrt(E I / (rho A))``, with
``sqrt(I / A) = h / sqrt(12)`` for a rectangle of thickness ``h`` (struck on
its wide face) and ``d / 4`` for a round rod.  ``beta_n L`` are the roots of
``cos x cosh x = 1`` (free-free and clamped-clamped), ``cos x cosh x = -1``
(clamped-free) and ``n pi`` (pinned-pinned); the mode shapes are the classical
ones of Blevins [1]_ table 8-1, each with ``integral_0^1 phi**2 dxi = 1``.

Thick bars (``theory: timoshenko``, the default) add shear deformation and
rotary inertia, which lower the upper modes:

* pinned-pinned is exact, the smaller root of
  ``(rho**2 I / kappa G) w**4 - [rho A + rho I k**2 (1 + E / kappa G)] w**2 + E I k**4 = 0``
  with ``k = n pi / L`` [2]_;
* every support's frequencies are the roots of the exact frequency
  determinant and its mode shapes the determinant's null vectors
  (:mod:`.timoshenko`), normalised on the modal mass with rotary inertia,
  ``integral (rho A w**2 + rho I psi**2) dx`` = the bar's mass (the right
  measure for a transverse point force: see
  :func:`.timoshenko.mode_shapes`).  Shaped bars take the same from the
  finite-element eigenvectors (``v.T M v = 1`` with the rotary mass).

Second spectrum: above the cut-off ``f_c = sqrt(kappa G A / (rho I)) / 2 pi``
(reported as ``shear_cutoff_hz``; a shaped bar's at its thickest section,
where it is lowest) Timoshenko theory has a second family of
modes, in which the cross-sections turn against the slope of the centre line
(``integral w' psi dx < 0``; for pinned-pinned exactly the upper root of each
wavenumber).  One rule for every support, uniform or shaped: they are all
listed, in frequency order, labelled ``S1``, ``S2``, ... with their own
shapes (the bending modes keep ``B1``, ``B2``, ... counted among themselves),
and :func:`count_below` counts both families.  The one mode without any
transverse motion, pinned-pinned's uniform rotation at exactly ``f_c``, is
left out: a transverse force does not drive it nor a transverse pickup hear
it.  Near and above ``f_c`` the wavelength is comparable with the thickness
and beam theory is only a rough guide (common practice).

``kappa`` (key ``shear_coefficient``): by default 5/6 for a rectangle and
Cowper's ``6 (1 + nu) / (7 + 6 nu)`` for a round rod; ``cowper`` gives
Cowper's value for either section [4]_ (rectangle
``10 (1 + nu) / (12 + 11 nu)``), ``5/6`` gives 5/6 for either, or a number.

Shaped bars (``profile``): thicknesses at evenly spaced points from one end to
the other, linearly interpolated; modes by finite elements (:mod:`.bar_fe`).

Free-free bars drop the two rigid-body modes.  Modes are labelled ``B1``,
``B2``, ... (bending) and ``S1``, ``S2``, ... (second spectrum).  A position is a fraction of the length on the bar's
centre line, where torsional modes have a node, so torsion is not modelled.
Modes above :data:`MODE_CEILING_HZ` are not computed, nor more than
:data:`MAX_MODES` (:data:`FE_MAX_MODES` for a shaped bar).

References
----------
.. [1] R. D. Blevins, *Formulas for Natural Frequency and Mode Shape*, Van
   Nostrand Reinhold (1979), table 8-1 (table number from memory; the first
   roots are also in W. T. Thomson, *Theory of Vibration with Applications*,
   app. D).
.. [2] S. M. Han, H. Benaroya and T. Wei, "Dynamics of transversely vibrating
   beams using four engineering theories", J. Sound Vib. 225(5), 935-988 (1999).
.. [3] T. D. Rossing, *Science of Percussion Instruments*, World Scientific
   (2000), ch. 4 (from memory): free-free bars are supported at the nodes of
   the first mode, 0.224 L from each end (also common practice).
.. [4] G. R. Cowper, "The shear coefficient in Timoshenko's beam theory",
   J. Appl. Mech. 33(2), 335-340 (1966), table 1 (issue number and table
   from memory).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import ClassVar

import numpy as np

from ..modes import Solution, frozen_array
from ..schema import Field, convert
from . import bar_fe
from . import timoshenko as exact_timoshenko
from . import torsion
from .common import SpecError, UnreachablePitch

__all__ = [
    "FIELDS",
    "PITCH_REPLACES",
    "SUPPORTS",
    "THEORIES",
    "BarSpec",
    "build_spec",
    "position_style",
    "modes",
    "solve",
    "count_below",
    "retune",
    "bar_modes",
    "beam_roots",
    "euler_bernoulli_frequencies",
    "timoshenko_pinned_frequencies",
    "solve_length",
    "first_frequency",
    "lowest_frequencies",
    "shear_coefficient",
    "cowper_shear_coefficient",
    "SHEAR_COEFFICIENTS",
    "MODE_CEILING_HZ",
    "MIN_LENGTH_RATIO",
    "TIMOSHENKO_NOTE_CENTS",
    "UnreachablePitch",
]

SUPPORTS = ("free-free", "clamped-free", "pinned-pinned", "clamped-clamped")
THEORIES = ("timoshenko", "euler-bernoulli")
#: Named shear coefficients (key ``shear_coefficient``; a number is also allowed).
SHEAR_COEFFICIENTS = ("5/6", "cowper")

#: Modes above this frequency (Hz) are not computed: beyond any render's use.
MODE_CEILING_HZ = 60e3
#: Most modes computed: closed form, finite elements.
MAX_MODES = 200
FE_MAX_MODES = 60
#: A bar must be at least this many times longer than its largest
#: cross-section dimension (our limit: shorter pieces are blocks or plates,
#: where one-dimensional bar theory does not hold).
MIN_LENGTH_RATIO = 2.0
#: Timoshenko shifts larger than this (cents) are called out in the report (shear_correction).
TIMOSHENKO_NOTE_CENTS = 5.0
#: Shear coefficient of a rectangular section (Timoshenko's 5/6).
RECTANGLE_KAPPA = 5.0 / 6.0
#: Fewest and most profile points.
MIN_PROFILE_POINTS = 2
MAX_PROFILE_POINTS = 401
#: Missing modes below this (Hz) are worth a warning (upper limit of hearing).
AUDIBLE_HZ = 20e3

#: Keys a pitch given on the command line replaces (the length is solved).
PITCH_REPLACES = ("length",)

#: Patch keys of a bar (besides ``type``).
FIELDS = {
    "material": Field("any", required=True),
    "length": Field("length", positive=True),
    "pitch": Field("pitch", positive=True),
    "width": Field("length", positive=True),
    "thickness": Field("length", positive=True),
    "diameter": Field("length", positive=True),
    "profile": Field("any"),
    "supports": Field("choice", default="free-free", choices=SUPPORTS),
    "theory": Field("choice", default="timoshenko", choices=THEORIES),
    "shear_modulus": Field("pressure", positive=True),
    "shear_coefficient": Field("any"),
    "torsion": Field("bool", default="auto", keywords=("auto",),
                     takes="true, false or auto (torsional modes when the strike or the pickup is off the centre line)"),
}

_PROFILE_HELP = "thicknesses at evenly spaced points, the first at one end and the last at the other"
_LENGTH_FIELD = Field("length")


@dataclass(frozen=True)
class BarSpec:
    """A bar in SI units.

    Attributes
    ----------
    length : float > 0, m
        The length (solved when `pitch_hz` is given).
    density : float > 0, kg/m^3
    youngs_modulus : float > 0, Pa
    shear_modulus : float > 0, Pa
    poisson_ratio : float
    width, thickness : float or None, m
        Rectangular section (bending across the thickness).
    diameter : float or None, m
        Round section.
    profile : tuple of float or None, m
        Thicknesses at evenly spaced points (a shaped rectangular bar).
    supports : one of :data:`SUPPORTS`
    theory : one of :data:`THEORIES`
    pitch_hz : float or None, Hz
        Pitch of the lowest mode, when the length was solved for it.
    material : str
    shaped_for_hz : float or None, Hz
        A shaped bar retuned away from the pitch its profile was made for
        (:func:`retune` keeps it): the report warns that its tuned ratios moved.
    shear_coefficient : None, "5/6", "cowper" or float
        Timoshenko's kappa (:func:`shear_coefficient`); None: the section's default.
    torsion : bool or "auto"
        Also list the torsional modes (:mod:`synth.resonators.torsion`); the
        patch loader turns "auto" into True when the excitation or the pickup
        is off the centre line (``across``), else False.
    """

    length: float
    density: float
    youngs_modulus: float
    shear_modulus: float
    poisson_ratio: float = 0.3
    width: float | None = None
    thickness: float | None = None
    diameter: float | None = None
    profile: tuple | None = None
    supports: str = "free-free"
    theory: str = "timoshenko"
    pitch_hz: float | None = None
    material: str = "custom"
    shaped_for_hz: float | None = None
    shear_coefficient: object = None
    torsion: object = False

    TYPE: ClassVar[str] = "bar"

    @property
    def section(self):
        """``"round"`` or ``"rectangular"``."""
        return "round" if self.diameter is not None else "rectangular"

    @property
    def largest_dimension(self):
        """Largest cross-section dimension (m)."""
        sizes = [s for s in (self.width, self.thickness, self.diameter) if s is not None]
        return max(sizes + list(self.profile or ()))


def cowper_shear_coefficient(section, poisson_ratio):
    """Cowper's shear coefficient [4]_ of a solid section.

    ``10 (1 + nu) / (12 + 11 nu)`` for a rectangle, ``6 (1 + nu) / (7 + 6 nu)``
    for a solid circle.

    >>> round(cowper_shear_coefficient("rectangular", 0.3), 6), round(cowper_shear_coefficient("round", 0.3), 6)
    (0.849673, 0.886364)
    """
    nu = poisson_ratio
    if section == "round":
        return 6.0 * (1.0 + nu) / (7.0 + 6.0 * nu)
    return 10.0 * (1.0 + nu) / (12.0 + 11.0 * nu)


def shear_coefficient(spec):
    """Timoshenko's kappa of `spec` (key ``shear_coefficient``).

    Absent: 5/6 for a rectangle, Cowper's value for a round rod; ``"5/6"``:
    5/6 for either; ``"cowper"``: :func:`cowper_shear_coefficient`; a number: itself.
    """
    rule = spec.shear_coefficient
    if rule == "cowper" or (rule is None and spec.section == "round"):
        return cowper_shear_coefficient(spec.section, spec.poisson_ratio)
    if rule is None or rule == "5/6":
        return RECTANGLE_KAPPA
    return float(rule)


_SHEAR_HELP = "5/6, cowper or a number in (0, 1]"


def _read_shear_coefficient(value):
    """None, ``"5/6"``, ``"cowper"`` or a float in (0, 1] from the patch value."""
    if value is None:
        return None
    if isinstance(value, str) and value.strip().lower() in SHEAR_COEFFICIENTS:
        return value.strip().lower()
    if isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value) and 0.0 < value <= 1.0:
        return float(value)
    raise SpecError(f"must be {_SHEAR_HELP}, got {value!r}", key="shear_coefficient")


def _read_profile(value):
    if not isinstance(value, (list, tuple)):
        raise SpecError(f"must be a list of {_PROFILE_HELP}, got {value!r}", key="profile")
    n = len(value)
    if n < MIN_PROFILE_POINTS:
        raise SpecError(f"needs at least {MIN_PROFILE_POINTS} points ({_PROFILE_HELP}), got {n}", key="profile")
    if n > MAX_PROFILE_POINTS:
        raise SpecError(f"has {n} points; at most {MAX_PROFILE_POINTS} are allowed", key="profile")
    points = []
    for i, item in enumerate(value, start=1):
        try:
            thickness = convert(_LENGTH_FIELD, item)
        except ValueError as error:
            raise SpecError(f"point {i} of {n}: {error}", key="profile") from None
        if thickness <= 0:
            raise SpecError(
                f"point {i} of {n} is {item!r}: every thickness must be > 0 (a bar cannot be cut through)",
                key="profile",
            )
        points.append(thickness)
    return tuple(points)


def _check_section(values):
    width, thickness, diameter, profile = (values[k] for k in ("width", "thickness", "diameter", "profile"))
    if diameter is not None:
        for key in ("width", "thickness", "profile"):
            if values[key] is not None:
                extra = "; a profile shapes a rectangular bar" if key == "profile" else ""
                raise SpecError(f"give width and thickness (rectangular bar) or diameter (round rod), not both{extra}", key=key)
        return
    if width is None and thickness is None and profile is None:
        raise SpecError("give width and thickness (rectangular bar), width and profile (shaped bar) or diameter (round rod)")
    if thickness is not None and profile is not None:
        raise SpecError("give thickness (uniform bar) or profile (shaped bar), not both", key="profile")
    if width is None:
        raise SpecError("a rectangular bar needs width as well (or give diameter for a round rod)", key="thickness" if thickness is not None else "profile")
    if thickness is None and profile is None:
        raise SpecError("a rectangular bar needs thickness (uniform) or profile (shaped) as well as width", key="width")


def build_spec(values):
    """A :class:`BarSpec` from checked patch values (``material`` is a Material).

    Raises
    ------
    SpecError
        Contradictory or missing section keys, a bad profile, a bar too short
        for bar theory, or a pitch it cannot reach.
    """
    _check_section(values)
    profile = None if values["profile"] is None else _read_profile(values["profile"])
    material = values["material"]
    if not material.youngs_modulus > 0:
        raise SpecError(f"a bar needs a material with youngs_modulus > 0, got {material.youngs_modulus!r}", key="material")
    if values["length"] is not None and values["pitch"] is not None:
        raise SpecError("give length or pitch (which solves the length), not both", key="pitch")
    if values["length"] is None and values["pitch"] is None:
        raise SpecError("give length, or pitch (which solves the length)")
    shear = values["shear_modulus"]
    if shear is None:
        shear = material.shear_modulus  # wood: far softer in shear than isotropic
    if shear is None:
        shear = material.youngs_modulus / (2.0 * (1.0 + material.poisson_ratio))  # isotropic
    spec = BarSpec(
        length=values["length"] or 1.0,
        density=material.density,
        youngs_modulus=material.youngs_modulus,
        shear_modulus=shear,
        poisson_ratio=material.poisson_ratio,
        width=values["width"],
        thickness=values["thickness"],
        diameter=values["diameter"],
        profile=profile,
        supports=values["supports"],
        theory=values["theory"],
        material=material.name,
        shear_coefficient=_read_shear_coefficient(values["shear_coefficient"]),
        torsion=values["torsion"],
    )
    if values["pitch"] is not None:
        try:
            # the pitch the file gives: the bar as made, so no shaped_for_hz
            return replace(spec, length=solve_length(spec, values["pitch"]), pitch_hz=values["pitch"])
        except UnreachablePitch as error:
            raise SpecError(str(error), key="pitch") from None
    shortest = MIN_LENGTH_RATIO * spec.largest_dimension
    if spec.length < shortest:
        raise SpecError(
            f"{spec.length * 1e3:.4g} mm is under {MIN_LENGTH_RATIO:g} x the largest cross-section dimension "
            f"({spec.largest_dimension * 1e3:.4g} mm): too stubby for bar theory; make it at least "
            f"{shortest * 1e3:.4g} mm",
            key="length",
        )
    return spec


def position_style(spec):
    """Positions on a bar are fractions of its length."""
    return "fraction"


def retune(spec, pitch_hz):
    """The bar with its length solved so the lowest mode sounds at `pitch_hz`.

    A shaped bar remembers the pitch its profile was made for (``shaped_for_hz``):
    scaling the length does not scale the profile's thicknesses, so its tuned
    ratios move (:func:`synth.pipeline.unweighted_partials` warns).
    """
    shaped_for = spec.shaped_for_hz
    if shaped_for is None and spec.profile is not None:
        shaped_for = spec.pitch_hz or float(solve(spec, 1).frequency_hz[0])
    if shaped_for is not None and abs(math.log2(pitch_hz / shaped_for)) < 1e-9:
        shaped_for = None  # back where it was made
    return replace(spec, length=solve_length(spec, pitch_hz), pitch_hz=pitch_hz, shaped_for_hz=shaped_for)


# --------------------------------------------------------------------------
# Closed forms for uniform bars.


def beam_roots(supports, n_modes):
    """``beta_n L`` of the first `n_modes` bending modes (Blevins table 8-1).

    >>> [round(float(x), 4) for x in beam_roots("free-free", 3)]
    [4.73, 7.8532, 10.9956]
    """
    n = np.arange(1, n_modes + 1, dtype=float)
    if supports == "pinned-pinned":
        return n * math.pi
    if supports == "clamped-free":
        sign, guess = -1.0, (n - 0.5) * math.pi
    else:
        sign, guess = 1.0, (n + 0.5) * math.pi

    from scipy.optimize import brentq

    def equation(x):  # cos x cosh x = sign, divided by cosh x
        return math.cos(x) - sign / math.cosh(x)

    roots = guess.copy()
    for i, g in enumerate(guess):
        if g < 40.0:  # beyond, 1/cosh x < 1e-17: the root is the guess to double precision
            roots[i] = brentq(equation, g - 0.6, g + 0.6, xtol=1e-15, rtol=1e-15)
    return roots


def euler_bernoulli_frequencies(roots, *, length, radius_of_gyration, youngs_modulus, density):
    """Thin-bar frequencies (Hz) ``(beta L)**2 / (2 pi L**2) * r sqrt(E / rho)``."""
    return np.asarray(roots) ** 2 / (2.0 * math.pi * length**2) * radius_of_gyration * math.sqrt(youngs_modulus / density)


def timoshenko_pinned_frequencies(n_modes, *, length, radius_of_gyration, youngs_modulus, shear_modulus, kappa, density):
    """Exact Timoshenko frequencies (Hz) of a uniform pinned-pinned bar.

    The smaller root of the quadratic in ``w**2`` (per unit area, ``r**2 = I / A``)
    ``(rho**2 r**2 / kappa G) w**4 - [rho + rho r**2 k**2 (1 + E / kappa G)] w**2
    + E r**2 k**4 = 0``, ``k = n pi / L``, taken in the cancellation-free form
    ``w**2 = 2 c / (b + sqrt(b**2 - 4 a c))``.
    """
    k = np.arange(1, n_modes + 1) * math.pi / length
    return _timoshenko_omega(k, radius_of_gyration, youngs_modulus, kappa * shear_modulus, density) / (2.0 * math.pi)


def _timoshenko_omega(k, radius, youngs_modulus, kappa_shear, density):
    """Lower-branch Timoshenko angular frequency (rad/s) at wavenumbers `k` (rad/m)."""
    r2 = radius**2
    a = density**2 * r2 / kappa_shear
    b = density + density * r2 * k**2 * (1.0 + youngs_modulus / kappa_shear)
    c = youngs_modulus * r2 * k**4
    return np.sqrt(2.0 * c / (b + np.sqrt(b * b - 4.0 * a * c)))


def _uniform_shapes(supports, roots, xi):
    """Closed-form thin-bar shapes at fractions `xi`: array (len(xi), n), unit mean square."""
    xi = np.asarray(xi, dtype=float)[:, None]
    a = np.asarray(roots, dtype=float)[None, :]
    z = a * xi
    if supports == "pinned-pinned":
        return math.sqrt(2.0) * np.sin(z)
    # cosh z - s sinh z = ((1 - s) e^z + (1 + s) e^-z) / 2 with (1 - s) e^z in a
    # form that never overflows (s -> 1 as beta L grows).
    ea = np.exp(-a)
    if supports == "clamped-free":
        s = (np.sinh(np.minimum(a, 700)) - np.sin(a)) / (np.cosh(np.minimum(a, 700)) + np.cos(a))
        one_minus_s_ez = (ea + np.cos(a) + np.sin(a)) * 2.0 * np.exp(z - a) / (1.0 + ea * ea + 2.0 * np.cos(a) * ea)
    else:
        s = (np.cosh(np.minimum(a, 700)) - np.cos(a)) / (np.sinh(np.minimum(a, 700)) - np.sin(a))
        one_minus_s_ez = (np.cos(a) - np.sin(a) - ea) * 2.0 * np.exp(z - a) / (1.0 - ea * ea - 2.0 * np.sin(a) * ea)
    hyperbolic = 0.5 * (one_minus_s_ez + (1.0 + s) * np.exp(-z))  # cosh z - s sinh z
    if supports == "free-free":
        return hyperbolic + np.cos(z) - s * np.sin(z)
    return hyperbolic - np.cos(z) + s * np.sin(z)  # clamped-clamped, clamped-free


def _radius_of_gyration(spec, size):
    return size / 4.0 if spec.section == "round" else size / math.sqrt(12.0)


# --------------------------------------------------------------------------
# Length solve.


def first_frequency(spec, length):
    """Frequency (Hz) of the lowest mode of `spec` made `length` long."""
    return lowest_frequencies(spec, 1, length=length)[0]


def lowest_frequencies(spec, n_modes, *, length=None):
    """Frequencies (Hz) of the lowest `n_modes` modes (of `spec`, or made `length` long)."""
    return _solve(spec, spec.length if length is None else length, n_modes, with_shift=False)[0]


def solve_length(spec, pitch_hz):
    """Length (m) that puts the lowest mode of `spec` at `pitch_hz`.

    Raises
    ------
    UnreachablePitch
        If the bar would have to be shorter than :data:`MIN_LENGTH_RATIO`
        times its largest cross-section dimension.
    """
    shortest = MIN_LENGTH_RATIO * spec.largest_dimension
    top = first_frequency(spec, shortest)
    if top < pitch_hz:
        raise UnreachablePitch(
            f"pitch {pitch_hz:.6g} Hz is above what this bar can reach (about {top:.6g} Hz at "
            f"{shortest * 1e3:.4g} mm, {MIN_LENGTH_RATIO:g} x its largest cross-section dimension, the "
            "shortest piece bar theory covers): make it thinner or narrower, or lower the pitch"
        )
    # Thin-bar scaling f ~ 1 / L**2 gives the first step; secant steps on
    # log f against log L (a straight line of slope -2 for a thin bar, nearly
    # so for a thick or shaped one) then converge in a few solves.
    x0, y0 = math.log(shortest), math.log(top / pitch_hz)
    x1 = x0 + 0.5 * y0
    y1 = _log_error(spec, x1, pitch_hz)
    for _ in range(_SECANT_STEPS):
        if abs(y1) <= _LENGTH_RTOL:
            return math.exp(x1)
        slope = (y1 - y0) / (x1 - x0) if x1 != x0 else -2.0
        if not slope < 0.0:  # not monotone here: fall back to bracketing
            break
        x0, y0 = x1, y1
        x1 = x1 - y1 / slope
        y1 = _log_error(spec, x1, pitch_hz)
    return _bracketed_length(spec, pitch_hz, shortest)


_SECANT_STEPS = 12
_LENGTH_RTOL = 1e-13  # |log(f / pitch)| at which the length is taken


def _log_error(spec, log_length, pitch_hz):
    return math.log(first_frequency(spec, math.exp(log_length)) / pitch_hz)


def _bracketed_length(spec, pitch_hz, shortest):
    """Brent's method on log(f / pitch) (the fallback of :func:`solve_length`)."""
    from scipy.optimize import brentq

    def error(length):
        return math.log(first_frequency(spec, length) / pitch_hz)

    guess = shortest * math.sqrt(first_frequency(spec, shortest) / pitch_hz)
    high = guess * 1.25
    while error(high) > 0.0:
        high *= 2.0
    low = max(shortest, guess / 1.25)
    if error(low) < 0.0:
        low = shortest
    return brentq(error, low, high, xtol=1e-15, rtol=1e-13)


# --------------------------------------------------------------------------
# Modes.


#: Wavenumbers tried when counting a bar's modes below a frequency (more than any bar computes).
_COUNTED_ORDERS = 4 * MAX_MODES


def _modes_below(spec, length, frequency_hz):
    """How many modes of `spec` made `length` long lie below `frequency_hz`.

    A uniform bar with ``theory: timoshenko``: exactly, the roots of its
    frequency equation below the limit (:mod:`.timoshenko`), both spectra,
    less pinned-pinned's uniform rotation at the cut-off as :func:`solve`
    leaves it out (shear and rotary inertia bring many more modes below a
    limit than thin theory: the rosewood blank of
    patches/bar-rosewood-blank-c4.yaml has 26 below 24 kHz; thin theory counts
    22 below 60 kHz).  A thin bar: mode n has ``beta_n L`` close to
    ``(n + 1/2) pi`` (free-free, clamped-clamped), ``(n - 1/2) pi``
    (clamped-free) or exactly ``n pi`` (pinned-pinned) (Blevins [1]_); a shaped
    bar (counted as thin, see :func:`_count_below_ceiling`) is taken at its
    thinnest, which sounds lowest.
    """
    size = min(spec.profile) if spec.profile else (spec.diameter or spec.thickness)
    radius = _radius_of_gyration(spec, size)
    if spec.theory == "timoshenko" and spec.profile is None:
        beam = dict(length=length, radius_of_gyration=radius, youngs_modulus=spec.youngs_modulus,
                    kappa_shear=spec.shear_modulus * shear_coefficient(spec), density=spec.density)
        found = exact_timoshenko.uniform_frequencies(spec.supports, _COUNTED_ORDERS, max_hz=frequency_hz, **beam)
        if spec.supports == "pinned-pinned":
            cutoff = exact_timoshenko.cutoff_frequency(radius_of_gyration=radius, kappa_shear=beam["kappa_shear"],
                                                       density=spec.density)
            found = found[np.abs(found / cutoff - 1.0) > 1e-12]
        return int(found.size)
    offset = -0.5 if spec.supports == "clamped-free" else (0.0 if spec.supports == "pinned-pinned" else 0.5)
    k = (np.arange(1, _COUNTED_ORDERS + 1) + offset) * math.pi / length
    omega = k * k * radius * math.sqrt(spec.youngs_modulus / spec.density)
    return int(np.count_nonzero(omega < 2.0 * math.pi * frequency_hz))


def _count_below_ceiling(spec, length, n_modes):
    """Modes to compute: at most `n_modes`, and about those the bar has below the ceiling (two more).

    A shaped bar counts them as a thin bar (its finite-element mesh follows
    the count, so the count stays what its tables were made with).
    """
    if spec.profile is not None:
        spec = replace(spec, theory="euler-bernoulli")
    return max(1, min(n_modes, _modes_below(spec, length, MODE_CEILING_HZ) + 2, MAX_MODES))


def count_below(spec, limit_hz):
    """How many modes of `spec` lie below `limit_hz` (exact for a uniform Timoshenko bar: :func:`_modes_below`).

    :meth:`synth.solvecache.SolveCache.solve_below` grows the count when
    the highest solved mode is still below the limit.  A shaped bar answers
    with every mode it computes up to :data:`MODE_CEILING_HZ` whatever the
    limit: its finite-element mesh follows the count, and so its modes do
    not move with the sample rate (at most :data:`FE_MAX_MODES` of them).
    """
    twist = torsion.count_below(spec, limit_hz) if spec.torsion is True else 0
    if spec.profile is not None:
        return min(_count_below_ceiling(spec, spec.length, MAX_MODES), FE_MAX_MODES) + twist
    return _modes_below(spec, spec.length, limit_hz) + twist


def _solve(spec, length, n, *, with_shift=True):
    """(frequency_hz, shift_cents or None, shape(xi) -> (P, n) mass-normalised, solver, elements, bending).

    `bending` (bool per mode) marks the first-spectrum modes; shift_cents is
    NaN for second-spectrum ones (no thin-bar counterpart).
    """
    timoshenko = spec.theory == "timoshenko"
    kappa = shear_coefficient(spec)
    if spec.profile is not None:
        n = min(n, FE_MAX_MODES)
        frequency, dofs, phi, node_x = bar_fe.spec_modes(spec, length, n, timoshenko, kappa)
        bending = bar_fe.rotation_follows_slope(node_x, phi, dofs) if timoshenko else np.ones(len(frequency), bool)
        shift = None
        if timoshenko and with_shift:
            # The thin-bar reference only feeds the report (shear cents): the faster sparse solve serves.
            thin = bar_fe.spec_modes(spec, length, n, False, kappa, sparse=True)[0]
            shift = _paired_shift(frequency, bending, thin)
        scale = math.sqrt(bar_fe.spec_mass(spec, length))

        def shape(xi):
            return scale * bar_fe.deflection_at(node_x, phi, dofs, np.asarray(xi) * length)

        kind = "Timoshenko" if timoshenko else "Hermite (Euler-Bernoulli)"
        return frequency, shift, shape, f"finite elements, {kind}", len(node_x) - 1, bending
    size = spec.diameter if spec.section == "round" else spec.thickness
    radius = _radius_of_gyration(spec, size)
    roots = beam_roots(spec.supports, n)
    thin = euler_bernoulli_frequencies(roots, length=length, radius_of_gyration=radius, youngs_modulus=spec.youngs_modulus, density=spec.density)
    if not timoshenko:
        def shape(xi):
            return _uniform_shapes(spec.supports, roots, xi)

        return thin, None, shape, "closed form, Euler-Bernoulli", None, np.ones(n, bool)
    beam = dict(length=length, radius_of_gyration=radius, youngs_modulus=spec.youngs_modulus,
                kappa_shear=spec.shear_modulus * kappa, density=spec.density)
    frequency = exact_timoshenko.uniform_frequencies(spec.supports, n + 1, max_hz=MODE_CEILING_HZ, **beam)
    if frequency.size == 0:  # even the lowest mode is above the ceiling: report it anyway
        frequency = exact_timoshenko.uniform_frequencies(spec.supports, 2, **beam)
    if not with_shift:  # a length solve: the frequencies only, without pinned-pinned's uniform rotation
        if spec.supports == "pinned-pinned":
            cutoff = exact_timoshenko.cutoff_frequency(radius_of_gyration=radius, kappa_shear=beam["kappa_shear"],
                                                       density=spec.density)
            frequency = frequency[np.abs(frequency / cutoff - 1.0) > 1e-12]
        return frequency[:n], None, None, None, None, None
    shapes = exact_timoshenko.mode_shapes(spec.supports, frequency, **beam)
    moving = shapes.transverse > _NO_TRANSVERSE  # pinned-pinned's uniform rotation at f_c has none
    index = np.flatnonzero(moving)[:n]
    frequency, bending = frequency[index], shapes.bending[index]
    solver = "frequency equation, Timoshenko (exact; Han, Benaroya & Wei 1999)"

    def shape_found(xi):  # Timoshenko deflections of the modes found below the ceiling
        return shapes.deflection(xi)[:, index]

    return frequency, _paired_shift(frequency, bending, thin), shape_found, solver, None, bending


#: A mode whose transverse share of the modal mass is below this has no transverse motion.
_NO_TRANSVERSE = 1e-9


def _paired_shift(frequency, bending, thin):
    """Cents from thin-bar theory: the k-th bending mode against the k-th thin-bar mode; NaN for shear modes."""
    shift = np.full(len(frequency), np.nan)
    n_bending = min(int(np.count_nonzero(bending)), len(thin))
    at = np.flatnonzero(bending)[:n_bending]
    shift[at] = 1200.0 * np.log2(frequency[at] / np.asarray(thin)[:n_bending])
    return shift


def mode_labels(bending):
    """``B1``, ``B2``, ... for bending modes and ``S1``, ``S2``, ... for second-spectrum ones, in order."""
    counts = {"B": 0, "S": 0}
    labels = []
    for flag in bending:
        kind = "B" if flag else "S"
        counts[kind] += 1
        labels.append(f"{kind}{counts[kind]}")
    return tuple(labels)


_SHEAR_RULES = {"5/6": "5/6 (Timoshenko's rectangle value)", "cowper": "Cowper 1966, nu-dependent"}


def _shear_note(labels, shift):
    """Report note: where the (applied) Timoshenko correction exceeds a few cents, or None."""
    big = [(label, s) for label, s in zip(labels, shift) if s is not None and s < -TIMOSHENKO_NOTE_CENTS]
    if not big:
        return None
    shown = ", ".join(f"{label} {s:+.0f}" for label, s in big[:4])
    return (
        f"applied; lowers partials more than {TIMOSHENKO_NOTE_CENTS:g} cents below thin-bar theory "
        f"from {big[0][0]} up ({shown} cents; column shear cents)"
    )


def _warnings(spec, labels, frequency, shift, length, n_modes):
    warnings = []
    if shift is None and spec.theory == "euler-bernoulli" and len(frequency) >= 2:
        size = float(np.mean(spec.profile)) if spec.profile else (spec.diameter or spec.thickness)
        radius = _radius_of_gyration(spec, size)
        k = beam_roots(spec.supports, min(3, len(frequency))) / length
        thin = k * k * radius * math.sqrt(spec.youngs_modulus / spec.density)
        thick = _timoshenko_omega(k, radius, spec.youngs_modulus, spec.shear_modulus * shear_coefficient(spec), spec.density)
        cents = 1200.0 * math.log2(thick[-1] / thin[-1])
        if cents < -TIMOSHENKO_NOTE_CENTS:
            warnings.append(
                f"theory: euler-bernoulli ignores shear and rotary inertia, which would lower {labels[len(k) - 1]} "
                f"of this thick bar by about {-cents:.0f} cents (theory: timoshenko includes them)"
            )
    if len(frequency) < n_modes and frequency[-1] < AUDIBLE_HZ:
        warnings.append(
            f"only the lowest {len(frequency)} modes are computed (up to {frequency[-1]:.0f} Hz); "
            "higher ones are left out"
        )
    return warnings


def solve(spec, n_modes):
    """Bending modes of a bar, before it is struck or heard anywhere.

    Parameters
    ----------
    spec : BarSpec
    n_modes : int >= 1
        Most modes to compute (fewer if they would lie above
        :data:`MODE_CEILING_HZ`; free-free rigid-body modes are not counted).

    Returns
    -------
    Solution
        Positions are fractions of the length from the first end.  Labels
        ``B1``, ``B2``, ... (bending) and ``S1``, ``S2``, ... (Timoshenko's
        second spectrum, module Notes); shapes scaled so that the modal mass
        ``integral (rho A phi**2 + rho I psi**2) dx`` (no ``psi`` term for a thin
        bar) is the bar's mass for every mode; columns n_nodes, node_positions
        (fractions of the length, supported ends included), nodes_m and, for
        Timoshenko theory, timoshenko_shift_cents (the shift from thin-bar
        theory; None for a second-spectrum mode).
    """
    length = spec.length
    n = _count_below_ceiling(spec, length, n_modes)
    frequency, shift, shape, solver, elements, bending = _solve(spec, length, n)
    n = len(frequency)
    if spec.pitch_hz is not None:
        # Remove the last trace of the length solve's tolerance and mesh: the
        # exact pitch, with the length scaled to match (f ~ 1 / L^2).
        scale = spec.pitch_hz / frequency[0]
        frequency = frequency * scale
        length = length / math.sqrt(scale)
    keep = max(1, int(np.count_nonzero(frequency < MODE_CEILING_HZ)))
    signs, nodes = bar_fe.signs_and_nodes(shape, n, spec.supports)

    def weights(position):
        return (signs * shape(np.array([position]))[0])[:keep]

    labels = mode_labels(bending[:keep])
    frequency = frequency[:keep]
    shift = None if shift is None else shift[:keep]
    columns = {
        "n_nodes": tuple(len(p) for p in nodes[:keep]),
        "node_positions": tuple(nodes[:keep]),
        "nodes_m": tuple(tuple(round(x * length, 6) for x in p) for p in nodes[:keep]),
    }
    if shift is not None:
        columns["timoshenko_shift_cents"] = tuple(None if math.isnan(s) else float(s) for s in shift)
    parameters = {
        "material": spec.material,
        "section": spec.section,
        "supports": spec.supports,
        "theory": spec.theory,
        "length_m": length,
        "length_solved": spec.pitch_hz is not None,
    }
    if spec.section == "round":
        parameters["diameter_m"] = spec.diameter
    else:
        parameters["width_m"] = spec.width
        if spec.profile is None:
            parameters["thickness_m"] = spec.thickness
        else:
            parameters["thinnest_m"] = min(spec.profile)
            parameters["thickest_m"] = max(spec.profile)
            parameters["profile_points"] = len(spec.profile)
    parameters["mass_kg"] = bar_fe.spec_mass(spec, length)
    if spec.theory == "timoshenko":
        parameters["shear_modulus_pa"] = spec.shear_modulus
        parameters["shear_coefficient"] = shear_coefficient(spec)
        if spec.shear_coefficient is not None:
            parameters["shear_coefficient_rule"] = _SHEAR_RULES.get(spec.shear_coefficient, "given")
        size = max(spec.profile) if spec.profile else (spec.diameter or spec.thickness)  # shaped: lowest, thickest
        parameters["shear_cutoff_hz"] = exact_timoshenko.cutoff_frequency(
            radius_of_gyration=_radius_of_gyration(spec, size), kappa_shear=spec.shear_modulus * shear_coefficient(spec),
            density=spec.density)
        note = _shear_note(labels, columns["timoshenko_shift_cents"])
        if note is not None:
            parameters["shear_correction"] = note
    parameters["solver"] = solver
    if elements is not None:
        parameters["fe_elements"] = elements
    if spec.supports == "free-free":
        # Where to hang a free-free bar: the nodes of its first mode (Rossing [3]).
        parameters["suspension_points_m"] = [round(x * length, 5) for x in nodes[0]]
    solution = Solution(
        resonator="bar",
        frequency_hz=frozen_array(frequency),
        labels=labels,
        shape=weights,
        columns=columns,
        parameters=parameters,
        warnings=tuple(_warnings(spec, labels, frequency, shift, length, n_modes)),
    )
    if spec.torsion is True:  # the torsional family at the same (pitch-scaled) length; the pitch stays B1's
        solution = torsion.with_torsion(solution, torsion.solve(spec, n_modes, length=length), max_modes=n_modes)
    return solution


def bar_modes(spec, *, excitation_position, pickup_position, n_modes):
    """Bending modes of a bar struck and heard at fractions of its length (see :func:`solve`).

    `pickup_position` None weights every mode by 1.

    Returns
    -------
    ModeSet
    """
    return solve(spec, n_modes).place(excitation_position, pickup_position)


modes = bar_modes
