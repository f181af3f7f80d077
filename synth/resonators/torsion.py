"""Torsional (twisting) modes of a bar or rod: uniform in closed form, shaped by finite elements.

Notes
-----
Saint-Venant torsion of a straight bar whose section is symmetric about both
axes (so twisting does not couple to bending: the shear centre is the
centroid), with free warping:

``(G J(x) theta')' = rho I_p(x) theta_tt``

``theta`` is the angle of twist (rad), ``G`` the shear modulus, ``J`` the
Saint-Venant torsion constant and ``I_p`` the polar second moment of area
(``rho I_p`` the polar mass moment of inertia per unit length).

* Round rod of diameter ``d``: ``J = I_p = pi d**4 / 32``.
* Rectangle ``b x h``, ``b >= h`` ([1]_ sec. 109; [2]_ table 10.7):
  ``J = beta b h**3`` with
  ``beta = 1/3 - (64 / pi**5) (h / b) sum_{n = 1, 3, 5, ...} tanh(n pi b / (2 h)) / n**5``,
  and ``I_p = b h (b**2 + h**2) / 12``.  ``beta`` runs from 0.1406 (square)
  to 1/3 (thin strip).

A uniform bar has the wave speed ``c = sqrt(G J / (rho I_p))`` and:

=================  ===========================  ==================================
supports           frequencies ``f_n``          twist shape ``Theta_n(xi)``
=================  ===========================  ==================================
free-free          ``n c / (2 L)``              ``cos(n pi xi)``
clamped-free       ``(2n - 1) c / (4 L)``       ``sin((2n - 1) pi xi / 2)``
clamped-clamped    ``n c / (2 L)``              ``sin(n pi xi)``
=================  ===========================  ==================================

(``n = 1, 2, ...``; ``xi = x / L``; the free-free rigid rotation ``n = 0`` is
dropped, as the bending modes drop their rigid-body modes.)

**Assumed torsional ends of synth's bar supports** (:data:`TORSION_ENDS`):
a clamp holds the twist (``theta = 0``); a free end is free; a *pinned*
end of a flexural bar (a knife edge, a peg or a cord under the bar) holds the
deflection but not the twist, so pinned-pinned is taken as free-free in
torsion.  A fork support that also holds the twist is not modelled.  The
cords of a free-free bar at the nodes of its first bending mode do not hold
the twist either.

A shaped bar (a ``profile`` of thicknesses, linearly interpolated, constant
width) is solved with two-node linear elements: stiffness
``integral G J(x) N'^T N' dx`` and consistent mass
``integral rho I_p(x) N^T N dx`` by 5-point Gauss-Legendre quadrature with the
section at each point, the lowest modes by :func:`scipy.linalg.eigh`.  The
frequencies converge as ``(element / wavelength)**2``, and are extrapolated
from the mesh and its half (``f + (f - f_half) / 3``), as :mod:`.bar_fe` does.
Element ends fall on the profile points.  A varying section warps
non-uniformly; that restraint of warping is ignored (Saint-Venant theory
section by section, common practice for 1-D models).

**Off-centre excitation and pickup.**  A point force ``F`` normal to the wide
face at ``(x, y)``, ``y`` across the width from the centre line, applies the
torque ``F y``; the twist ``theta`` moves that point by ``y theta`` normal to
the face.  So the modal force and the pickup weight are ``y Theta_n(x)``:
zero on the centre line (where bending-only synth works today) and odd in
``y``.  ``y`` is given as ``across``, a fraction ``-1 .. 1`` of the half-width
(``width / 2``, or the radius of a rod).

**Normalisation** (the same as :func:`synth.resonators.bar.solve`'s bending
shapes): every torsional mode is scaled so that its modal mass
``integral rho I_p Theta**2 dx`` equals the bar's mass ``integral rho A dx``,
as each bending mode has ``integral rho A phi**2 dx`` equal to it.  With the
generalised coordinate ``q`` (m) of every mode having the same modal mass,
the displacement ``y Theta(x) q`` of a torsional mode and ``phi(x) q`` of a
bending mode compare directly, and a unit force drives each by its shape
value.  A uniform bar has ``Theta_n = sqrt(A / I_p) psi_n`` with ``psi_n`` of
unit mean square (``sqrt(2) cos(n pi xi)``, ...): at a free end the edge
(``across = 1``) of a thin rectangle moves ``sqrt(6) b / sqrt(b**2 + h**2)``,
about 2.45, where a free-free bending mode moves 2.

Limits: the one-dimensional model holds while the torsional wavelength is
long against the width (a round rod's lowest torsional branch is exactly
non-dispersive; a rectangle's disperses once the wavelength nears the width);
a single ``G`` is used (wood has two along-the-grain shear moduli, ``G_LR`` and
``G_LT``; the bar's ``shear_modulus`` stands for both).

References
----------
.. [1] S. P. Timoshenko and J. N. Goodier, *Theory of Elasticity*, 3rd ed.,
   McGraw-Hill (1970), ch. 10, sec. 109 "Torsion of rectangular bars"
   (section number and table from memory; the series is the standard one).
.. [2] W. C. Young and R. G. Budynas, *Roark's Formulas for Stress and
   Strain*, 7th ed., McGraw-Hill (2002), table 10.7 (torsion of a solid
   rectangle; table number from memory), and its approximation
   ``J = b h**3 [1/3 - 0.21 (h / b) (1 - h**4 / (12 b**4))]``.
.. [3] K. F. Graff, *Wave Motion in Elastic Solids*, Dover (1991), sec. 2.3
   (torsional waves in rods; from memory).
.. [4] L. Soares, J. Antunes and V. Debut, JASA (2021), doi:10.1121/10.0006573:
   bending and torsional modes in the tuning of percussion bars.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.linalg
import scipy.special

from ..modes import ModeSet, Solution, frozen_array

__all__ = [
    "TORSION_ENDS",
    "MODE_CEILING_HZ",
    "NEAR_FLEXURAL_CENTS",
    "TUNED_PARTIALS",
    "TorsionSolution",
    "rectangle_torsion_coefficient",
    "torsion_constant",
    "polar_moment",
    "wave_speed",
    "torsion_ends",
    "uniform_frequencies",
    "uniform_twist",
    "fe_matrices",
    "solve_fe",
    "solve",
    "count_below",
    "torsion_modes",
    "cents_from_nearest",
    "near_flexural_warnings",
    "with_torsion",
]

#: Torsional ends (first, second) taken for each bar support (see the module notes).
TORSION_ENDS = {
    "free-free": ("free", "free"),
    "clamped-free": ("fixed", "free"),
    "pinned-pinned": ("free", "free"),  # a knife edge holds the deflection, not the twist
    "clamped-clamped": ("fixed", "fixed"),
}
#: Modes above this frequency (Hz) are not computed (the bending modes' ceiling, bar.MODE_CEILING_HZ).
MODE_CEILING_HZ = 60e3
#: Most torsional modes: closed form, finite elements.
MAX_MODES = 200
FE_MAX_MODES = 60
#: Fewest elements, and elements per computed mode (see :func:`element_count`).
MIN_ELEMENTS = 200
ELEMENTS_PER_MODE = 12
#: Largest relative step between a mesh and its half that is extrapolated.
RICHARDSON_LIMIT = 0.05
#: Torsional modes closer than this (cents) to a tuned bending mode are called out.
#: Our choice (a quarter tone: close enough to blur the tuned partial), not a published limit.
NEAR_FLEXURAL_CENTS = 50.0
#: Bending modes taken as tuned in those warnings: makers tune the lowest two
#: or three partials of a bar (common practice).
TUNED_PARTIALS = 3

#: sum over odd n of 1 / n**5 = (1 - 2**-5) zeta(5)
_ODD_ZETA5 = (31.0 / 32.0) * float(scipy.special.zeta(5.0))
#: Odd n kept in the exponentially small correction 1 - tanh(n pi r / 2), r >= 1: beyond n = 41 it is < 1e-55.
_SERIES_N = np.arange(1, 43, 2, dtype=float)

_GAUSS_X, _GAUSS_W = np.polynomial.legendre.leggauss(5)
_GAUSS_X = 0.5 * (_GAUSS_X + 1.0)  # on [0, 1]
_GAUSS_W = 0.5 * _GAUSS_W


# --------------------------------------------------------------------------
# Sections.


def rectangle_torsion_coefficient(aspect):
    """Saint-Venant ``beta`` in ``J = beta b h**3`` of a rectangle with sides ratio `aspect` = b / h >= 1.

    Parameters
    ----------
    aspect : array_like, >= 1 (inf allowed)
        Long side over short side.

    Returns
    -------
    ndarray
        ``1/3 - (64 / pi**5) (h / b) sum_{n odd} tanh(n pi b / (2 h)) / n**5``
        ([1]_, [2]_), summed as ``(31/32) zeta(5)`` less the exponentially
        small ``sum (1 - tanh) / n**5``, so it is exact to rounding.

    Examples
    --------
    >>> [round(float(b), 4) for b in rectangle_torsion_coefficient([1.0, 2.0, 10.0, np.inf])]
    [0.1406, 0.2287, 0.3123, 0.3333]
    """
    aspect = np.asarray(aspect, dtype=float)
    inverse = 1.0 / aspect  # h / b, 0 for an infinitely thin strip
    x = np.pi * aspect[..., None] * _SERIES_N / 2.0
    one_minus_tanh = 2.0 / (np.exp(np.minimum(2.0 * x, 700.0)) + 1.0)
    series = _ODD_ZETA5 - np.sum(one_minus_tanh / _SERIES_N**5, axis=-1)
    return 1.0 / 3.0 - (64.0 / np.pi**5) * inverse * series


def torsion_constant(size, *, section, width=None):
    """Saint-Venant torsion constant ``J`` (m^4).

    Parameters
    ----------
    size : array_like, m
        Thickness (rectangular) or diameter (round).
    section : {"rectangular", "round"}
    width : float > 0 or None, m
        Width of a rectangular section (either side may be the longer).

    Returns
    -------
    ndarray, m^4
        ``pi d**4 / 32`` (round) or ``beta(b / h) b h**3`` with ``b`` the
        longer side (:func:`rectangle_torsion_coefficient`).
    """
    size = np.asarray(size, dtype=float)
    if section == "round":
        return math.pi * size**4 / 32.0
    long, short = np.maximum(size, width), np.minimum(size, width)
    return rectangle_torsion_coefficient(long / short) * long * short**3


def polar_moment(size, *, section, width=None):
    """Polar second moment of area ``I_p`` (m^4): ``pi d**4 / 32`` or ``b h (b**2 + h**2) / 12``."""
    size = np.asarray(size, dtype=float)
    if section == "round":
        return math.pi * size**4 / 32.0
    return width * size * (width**2 + size**2) / 12.0


def _area(size, section, width):
    size = np.asarray(size, dtype=float)
    return math.pi * size**2 / 4.0 if section == "round" else width * size


def wave_speed(size, *, section, width=None, shear_modulus, density):
    """Torsional wave speed ``sqrt(G J / (rho I_p))`` (m/s) of a uniform section."""
    j = torsion_constant(size, section=section, width=width)
    return np.sqrt(shear_modulus * j / (density * polar_moment(size, section=section, width=width)))


# --------------------------------------------------------------------------
# Uniform bars.


def torsion_ends(supports):
    """The torsional ends ``("free" | "fixed", "free" | "fixed")`` of a bar's `supports` (:data:`TORSION_ENDS`).

    Raises
    ------
    ValueError
        For supports that are not one of the bar's.
    """
    try:
        return TORSION_ENDS[supports]
    except (KeyError, TypeError):
        raise ValueError(f"supports={supports!r} must be one of {', '.join(TORSION_ENDS)}") from None


def uniform_frequencies(n_modes, *, length, wave_speed, ends):
    """Frequencies (Hz) of the first `n_modes` torsional modes of a uniform bar.

    ``n c / (2 L)`` with both ends alike (free-free, fixed-fixed), ``(2n - 1) c / (4 L)``
    with one fixed; ``n = 1 .. n_modes``.

    Examples
    --------
    >>> uniform_frequencies(3, length=0.5, wave_speed=1000.0, ends=("fixed", "free")).tolist()
    [500.0, 1500.0, 2500.0]
    """
    n = np.arange(1, n_modes + 1, dtype=float)
    if ends[0] == ends[1]:
        return n * wave_speed / (2.0 * length)
    return (2.0 * n - 1.0) * wave_speed / (4.0 * length)


def uniform_twist(ends, n_modes, xi):
    """Twist shapes of a uniform bar at fractions `xi`: array (len(xi), n_modes), unit mean square.

    ``sqrt(2) cos(n pi xi)`` (free-free), ``sqrt(2) sin(n pi xi)``
    (fixed-fixed), ``sqrt(2) sin((2n - 1) pi xi / 2)`` (fixed at xi = 0) or
    ``sqrt(2) cos((2n - 1) pi xi / 2)`` (fixed at xi = 1).
    """
    xi = np.asarray(xi, dtype=float)[:, None]
    n = np.arange(1, n_modes + 1, dtype=float)[None, :]
    root2 = math.sqrt(2.0)
    if ends == ("free", "free"):
        return root2 * np.cos(n * np.pi * xi)
    if ends == ("fixed", "fixed"):
        return root2 * np.sin(n * np.pi * xi)
    if ends == ("fixed", "free"):
        return root2 * np.sin((2.0 * n - 1.0) * np.pi * xi / 2.0)
    return root2 * np.cos((2.0 * n - 1.0) * np.pi * xi / 2.0)


def _uniform_nodes(ends, n_modes):
    """Exact twist nodes (fractions of the length, fixed ends included) of each uniform mode."""
    nodes = []
    for n in range(1, n_modes + 1):
        if ends == ("free", "free"):
            nodes.append(tuple((2 * j - 1) / (2 * n) for j in range(1, n + 1)))
        elif ends == ("fixed", "fixed"):
            nodes.append(tuple(j / n for j in range(n + 1)))
        elif ends == ("fixed", "free"):
            nodes.append(tuple(2 * j / (2 * n - 1) for j in range(n)))
        else:
            nodes.append(tuple(1.0 - 2 * j / (2 * n - 1) for j in reversed(range(n))))
    return nodes


# --------------------------------------------------------------------------
# Finite elements.


def element_count(n_modes, n_segments=1):
    """Elements for `n_modes` modes: an even multiple of `n_segments`, so element ends fall on profile points."""
    need = max(MIN_ELEMENTS, ELEMENTS_PER_MODE * (int(n_modes) + 1))
    step = 2 * n_segments
    return int(math.ceil(need / step) * step)


def fe_matrices(node_x, size_at, *, section, width, shear_modulus, density):
    """Stiffness and consistent mass matrices of linear torsion elements on a free bar.

    Parameters
    ----------
    node_x : ndarray [shape=(N+1,)], m
        Node positions, ascending.
    size_at : callable
        Thickness (or diameter) in m at an array of positions in m.
    section : {"rectangular", "round"}
    width : float or None, m
    shear_modulus : float > 0, Pa
    density : float > 0, kg/m^3

    Returns
    -------
    stiffness, mass : ndarray [shape=(N+1, N+1)]
        Tridiagonal; N m/rad and kg m^2 (per unit nodal twist).
    """
    node_x = np.asarray(node_x, dtype=float)
    lengths = np.diff(node_x)
    points = node_x[:-1, None] + lengths[:, None] * _GAUSS_X[None, :]
    size = size_at(points)
    weights = _GAUSS_W[None, :] * lengths[:, None]
    rigidity = (shear_modulus * torsion_constant(size, section=section, width=width) * weights).sum(1) / lengths**2
    inertia = density * polar_moment(size, section=section, width=width) * weights  # (N, 5)
    n0, n1 = 1.0 - _GAUSS_X, _GAUSS_X
    m00, m01, m11 = (inertia * n0 * n0).sum(1), (inertia * n0 * n1).sum(1), (inertia * n1 * n1).sum(1)
    n_nodes = len(node_x)
    stiffness = np.zeros((n_nodes, n_nodes))
    mass = np.zeros((n_nodes, n_nodes))
    i = np.arange(n_nodes - 1)
    np.add.at(stiffness, (i, i), rigidity)
    np.add.at(stiffness, (i + 1, i + 1), rigidity)
    stiffness[i, i + 1] = stiffness[i + 1, i] = -rigidity
    np.add.at(mass, (i, i), m00)
    np.add.at(mass, (i + 1, i + 1), m11)
    mass[i, i + 1] = mass[i + 1, i] = m01
    return stiffness, mass


def solve_fe(node_x, size_at, *, ends, n_modes, **properties):
    """Lowest torsional modes of a bar by linear finite elements (one mesh, no extrapolation).

    Parameters
    ----------
    node_x : ndarray [shape=(N+1,)], m
    size_at : callable
        See :func:`fe_matrices`.
    ends : tuple of {"free", "fixed"}
        Torsional ends at the first and last node (:func:`torsion_ends`).
    n_modes : int >= 1
        Modes wanted (the free-free rigid rotation is dropped).
    **properties
        `section`, `width`, `shear_modulus`, `density` of :func:`fe_matrices`.

    Returns
    -------
    frequency_hz : ndarray [shape=(n_modes,)], Hz
    twist : ndarray [shape=(N+1, n_modes)]
        Nodal twist, mass-normalised (``twist.T @ mass @ twist = 1``), each
        mode signed to swing positive first from ``x = 0``.
    """
    stiffness, mass = fe_matrices(node_x, size_at, **properties)
    n_nodes = len(node_x)
    keep = np.ones(n_nodes, dtype=bool)
    keep[0], keep[-1] = ends[0] != "fixed", ends[1] != "fixed"
    rigid = 1 if ends == ("free", "free") else 0
    n_free = int(keep.sum())
    n = min(n_modes + rigid, n_free)
    values, vectors = scipy.linalg.eigh(stiffness[np.ix_(keep, keep)], mass[np.ix_(keep, keep)],
                                        subset_by_index=[0, n - 1])
    values, vectors = values[rigid:], vectors[:, rigid:]
    twist = np.zeros((n_nodes, vectors.shape[1]))
    twist[keep] = vectors
    peak = np.max(np.abs(twist), axis=0)
    first = np.argmax(np.abs(twist) > 0.1 * peak, axis=0)
    twist *= np.sign(twist[first, np.arange(twist.shape[1])])
    return np.sqrt(np.maximum(values, 0.0)) / (2.0 * math.pi), twist


def _richardson(fine, coarse):
    """``f + (f - f_half) / 3`` where the two meshes are within :data:`RICHARDSON_LIMIT`."""
    step = fine - coarse
    return np.where(np.abs(step) <= RICHARDSON_LIMIT * fine, fine + step / 3.0, fine)


def _fe_nodes(twist, node_x, ends):
    """Sign changes of each nodal twist vector, by linear interpolation, as fractions (fixed ends included)."""
    xi = node_x / node_x[-1]
    nodes = []
    for m in range(twist.shape[1]):
        v = twist[1:-1, m]
        x = xi[1:-1]
        i = np.flatnonzero(v[:-1] * v[1:] < 0.0)
        crossing = x[i] + (x[i + 1] - x[i]) * v[i] / (v[i] - v[i + 1])
        inner = [float(round(c, 6)) for c in crossing]
        nodes.append(tuple(([0.0] if ends[0] == "fixed" else []) + inner + ([1.0] if ends[1] == "fixed" else [])))
    return nodes


# --------------------------------------------------------------------------
# A bar spec (synth.resonators.bar.BarSpec, read by attribute).


@dataclass(frozen=True, eq=False)
class TorsionSolution:
    """The torsional modes of one bar, before it is struck or heard anywhere.

    Attributes
    ----------
    frequency_hz : ndarray [shape=(M,)], Hz
        Ascending.
    labels : tuple of str [len M]
        ``T1``, ``T2``, ...
    twist : callable
        ``twist(xi) -> ndarray [shape=(len(xi), M)]``, rad/m: the twist per
        unit modal amplitude (m) at fractions `xi` of the length, scaled so
        ``integral rho I_p twist**2 dx`` is the bar's mass (module notes).
    half_width : float, m
        Half the width (rectangle) or the radius (rod): ``across = 1`` there.
    columns : dict of str -> tuple
        ``n_nodes``, ``node_positions`` (fractions, fixed ends included),
        ``nodes_m``: as the bending modes' columns.
    parameters : dict
        ``torsion_constant_m4``, ``polar_moment_m4`` (at the thinnest point of
        a shaped bar), ``torsion_wave_speed_m_s`` (ditto), ``torsion_ends``,
        ``torsion_solver`` and, for a shaped bar, ``torsion_fe_elements``.
    """

    frequency_hz: np.ndarray
    labels: tuple
    twist: object
    half_width: float
    columns: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)

    def shape(self, position):
        """Displacement per unit modal amplitude at `position`: ``(x, across)``, or a fraction x (across 0).

        ``across * half_width * twist(x)``, normal to the struck face; zero on
        the centre line and odd in `across`.
        """
        x, across = (position, 0.0) if np.ndim(position) == 0 else position
        return across * self.half_width * self.twist(np.array([float(x)]))[0]


def _spec_sizes(spec, length):
    """(size_at(x m) -> m, smallest and largest size (m)) of a bar spec."""
    if spec.profile is None:
        size = spec.diameter if spec.section == "round" else spec.thickness
        return (lambda x: np.full(np.shape(x), float(size))), size, size
    stations = np.linspace(0.0, length, len(spec.profile))
    profile = np.asarray(spec.profile, dtype=float)
    return (lambda x: np.interp(x, stations, profile)), float(profile.min()), float(profile.max())


def _spec_mass(spec, length):
    """Mass (kg) of the bar: exact for a linearly interpolated profile."""
    if spec.profile is None:
        size = spec.diameter if spec.section == "round" else spec.thickness
        return float(spec.density * _area(size, spec.section, spec.width) * length)
    profile = np.asarray(spec.profile, dtype=float)
    mean = (profile.sum() - 0.5 * (profile[0] + profile[-1])) / (len(profile) - 1)
    return float(spec.density * spec.width * mean * length)


def solve(spec, n_modes, *, length=None, max_hz=MODE_CEILING_HZ):
    """Torsional modes of a bar spec.

    Parameters
    ----------
    spec : BarSpec
        Read: ``length``, ``density``, ``shear_modulus``, ``section``,
        ``width``, ``thickness``, ``diameter``, ``profile``, ``supports``.
    n_modes : int >= 1
        Most torsional modes to compute (fewer above `max_hz`; a shaped bar
        at most :data:`FE_MAX_MODES`, a uniform one :data:`MAX_MODES`).
    length : float > 0 or None, m
        The length to use (default ``spec.length``); give the length
        :func:`synth.resonators.bar.solve` reports (``length_m``) when it
        rescaled a solved length to the exact pitch.
    max_hz : float > 0, Hz
        Modes above are not kept (the lowest is always kept).

    Returns
    -------
    TorsionSolution

    Raises
    ------
    ValueError
        For supports that are not a bar's.
    """
    length = spec.length if length is None else float(length)
    ends = torsion_ends(spec.supports)
    size_at, thinnest, _ = _spec_sizes(spec, length)
    section, width = spec.section, spec.width
    properties = {"section": section, "width": width, "shear_modulus": spec.shear_modulus, "density": spec.density}
    mass = _spec_mass(spec, length)
    half_width = 0.5 * (spec.diameter if section == "round" else width)
    j_min = float(torsion_constant(thinnest, section=section, width=width))
    ip_min = float(polar_moment(thinnest, section=section, width=width))
    parameters = {
        "torsion_ends": "-".join(ends),
        "torsion_constant_m4": j_min,
        "polar_moment_m4": ip_min,
        "torsion_wave_speed_m_s": math.sqrt(spec.shear_modulus * j_min / (spec.density * ip_min)),
    }
    below = count_below(spec, max_hz, length=length)
    if spec.profile is None:
        n = max(1, min(n_modes, below, MAX_MODES))
        frequency = uniform_frequencies(n, length=length, wave_speed=parameters["torsion_wave_speed_m_s"], ends=ends)
        scale = math.sqrt(mass / (spec.density * ip_min * length))  # sqrt(A / I_p): integral rho I_p twist**2 dx = mass

        def twist(xi):
            return scale * uniform_twist(ends, n, xi)

        nodes = _uniform_nodes(ends, n)
        parameters["torsion_solver"] = "closed form, Saint-Venant torsion"
    else:
        n = max(1, min(n_modes, below + 1, FE_MAX_MODES))
        node_x = np.linspace(0.0, length, element_count(n, len(spec.profile) - 1) + 1)
        fine, nodal = solve_fe(node_x, size_at, ends=ends, n_modes=n, **properties)
        coarse = solve_fe(node_x[::2], size_at, ends=ends, n_modes=n, **properties)[0]
        frequency = _richardson(fine, coarse)
        nodal = nodal * math.sqrt(mass)
        xi_nodes = node_x / length

        def twist(xi):
            xi = np.clip(np.asarray(xi, dtype=float), 0.0, 1.0)
            return np.stack([np.interp(xi, xi_nodes, nodal[:, m]) for m in range(nodal.shape[1])], axis=-1)

        nodes = _fe_nodes(nodal, node_x, ends)
        parameters["torsion_solver"] = "finite elements, linear, consistent mass (Richardson on the half mesh)"
        parameters["torsion_fe_elements"] = len(node_x) - 1
    keep = max(1, int(np.count_nonzero(frequency < max_hz)))
    frequency = frequency[:keep]
    nodes = nodes[:keep]

    def kept_twist(xi):
        return twist(xi)[..., :keep]

    columns = {
        "n_nodes": tuple(len(p) for p in nodes),
        "node_positions": tuple(nodes),
        "nodes_m": tuple(tuple(round(x * length, 6) for x in p) for p in nodes),
    }
    return TorsionSolution(
        frequency_hz=frozen_array(frequency),
        labels=tuple(f"T{m}" for m in range(1, keep + 1)),
        twist=kept_twist,
        half_width=float(half_width),
        columns=columns,
        parameters=parameters,
    )


def count_below(spec, limit_hz, *, length=None):
    """How many torsional modes of `spec` lie below `limit_hz` (at most :data:`MAX_MODES`).

    Exact for a uniform bar; for a shaped one an upper bound: by the min-max
    principle every mode lies above the uniform bar's with the weakest
    stiffness ``G J_min`` and the largest inertia ``rho I_p,max``.
    """
    length = spec.length if length is None else float(length)
    ends = torsion_ends(spec.supports)
    _, thinnest, thickest = _spec_sizes(spec, length)
    section, width = spec.section, spec.width
    slowest = math.sqrt(spec.shear_modulus * float(torsion_constant(thinnest, section=section, width=width))
                        / (spec.density * float(polar_moment(thickest, section=section, width=width))))
    frequency = uniform_frequencies(MAX_MODES, length=length, wave_speed=slowest, ends=ends)
    return int(np.count_nonzero(frequency < limit_hz))


def _check_point(point, name):
    """(x, across) from `point`; ValueError unless 0 <= x <= 1 and -1 <= across <= 1."""
    try:
        x, across = (float(point), 0.0) if np.ndim(point) == 0 else (float(point[0]), float(point[1]))
    except (TypeError, ValueError, IndexError):
        raise ValueError(f"{name}={point!r} must be a fraction of the length or (fraction, across)") from None
    if not 0.0 <= x <= 1.0:
        raise ValueError(f"{name} x={x!r} must be a fraction of the length, 0..1")
    if not -1.0 <= across <= 1.0:
        raise ValueError(f"{name} across={across!r} must be a fraction of the half-width, -1..1 (0: the centre line)")
    return x, across


def torsion_modes(spec, *, excitation_position, pickup_position, n_modes, length=None):
    """Torsional modes of a bar struck and heard at points given along and across it.

    Parameters
    ----------
    spec : BarSpec
    excitation_position, pickup_position : float or (float, float)
        ``(x, across)``: a fraction of the length and a fraction ``-1 .. 1`` of
        the half-width from the centre line (a bare fraction is on the centre
        line).  `pickup_position` None weights every mode 1.
    n_modes : int >= 1
    length : float or None, m
        See :func:`solve`.

    Returns
    -------
    ModeSet
        Labels ``T1``, ``T2``, ...; shapes as :meth:`TorsionSolution.shape`
        (the bending modes' normalisation: module notes).

    Raises
    ------
    ValueError
        For a point off the bar.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> steel = SimpleNamespace(length=0.5, density=7850.0, shear_modulus=80e9, section="round", width=None,
    ...                         thickness=None, diameter=0.01, profile=None, supports="free-free")
    >>> modes = torsion_modes(steel, excitation_position=(0.0, 1.0), pickup_position=None, n_modes=3)
    >>> modes.labels, [round(float(f), 1) for f in modes.frequency_hz]  # n sqrt(G / rho) / (2 L)
    (('T1', 'T2', 'T3'), [3192.3, 6384.7, 9577.0])
    >>> [round(float(s), 4) for s in modes.excitation_shape]  # sqrt(2) cos(n pi 0) x sqrt(A / I_p) d / 2
    [2.0, 2.0, 2.0]
    """
    excitation = _check_point(excitation_position, "excitation_position")
    pickup = None if pickup_position is None else _check_point(pickup_position, "pickup_position")
    solution = solve(spec, n_modes, length=length)
    n = len(solution.frequency_hz)
    return ModeSet(
        resonator="bar",
        frequency_hz=solution.frequency_hz,
        labels=solution.labels,
        excitation_shape=frozen_array(solution.shape(excitation)),
        pickup_shape=frozen_array(np.ones(n) if pickup is None else solution.shape(pickup)),
        columns=solution.columns,
        parameters=solution.parameters,
    )


# --------------------------------------------------------------------------
# Torsional modes against the bending modes.


def cents_from_nearest(torsion_hz, flexural_hz):
    """Distance in cents of each torsional mode from the nearest bending mode.

    Parameters
    ----------
    torsion_hz : array_like [shape=(M,)], Hz
    flexural_hz : array_like [shape=(K,)], Hz, K >= 1

    Returns
    -------
    cents : ndarray [shape=(M,)]
        ``1200 log2(f_torsion / f_nearest)``: positive where the torsional
        mode lies above its nearest bending mode (nearest in cents).
    nearest : ndarray [shape=(M,)], int
        Index of that bending mode in `flexural_hz`.

    Examples
    --------
    >>> cents, nearest = cents_from_nearest([450.0, 1000.0], [100.0, 400.0, 1100.0])
    >>> [round(float(c), 1) for c in cents], nearest.tolist()
    ([203.9, -165.0], [1, 2])
    """
    torsion = np.log2(np.asarray(torsion_hz, dtype=float))[:, None]
    flexural = np.log2(np.asarray(flexural_hz, dtype=float))[None, :]
    if flexural.size == 0:
        raise ValueError("flexural_hz must hold at least one frequency")
    difference = 1200.0 * (torsion - flexural)
    nearest = np.argmin(np.abs(difference), axis=1)
    return difference[np.arange(len(nearest)), nearest], nearest


def near_flexural_warnings(torsion_labels, torsion_hz, flexural_labels, flexural_hz, *,
                           within_cents=NEAR_FLEXURAL_CENTS, n_tuned=TUNED_PARTIALS):
    """Warnings (list of str) for torsional modes within `within_cents` of a tuned bending mode.

    Makers reject tuned bars whose torsional modes sit near a tuned bending
    partial: struck off the centre line, the two blur (beat) and the partial's
    pitch is no longer clear ([4]_).  The tuned partials are the lowest
    `n_tuned` bending modes (:data:`TUNED_PARTIALS`); the threshold is our
    choice (:data:`NEAR_FLEXURAL_CENTS`).  The report's ``cents_from_bending``
    column (:func:`with_torsion`) gives every mode's distance.
    """
    flexural_hz = np.asarray(flexural_hz, dtype=float)[:n_tuned]
    if len(torsion_hz) == 0 or len(flexural_hz) == 0:
        return []
    cents, nearest = cents_from_nearest(torsion_hz, flexural_hz)
    close = [
        f"{torsion_labels[i]} {cents[i]:+.0f} cents from {flexural_labels[nearest[i]]} "
        f"({float(torsion_hz[i]):.1f} / {float(flexural_hz[nearest[i]]):.1f} Hz)"
        for i in np.flatnonzero(np.abs(cents) < within_cents)
    ]
    if not close:
        return []
    return [
        f"torsional mode{'s' if len(close) > 1 else ''} within {within_cents:g} cents of a bending mode: "
        f"{'; '.join(close)}; struck or heard off the centre line they blur that partial "
        "(retune the bar or change its width)"
    ]


def with_torsion(bending, torsion, *, max_modes=None, within_cents=NEAR_FLEXURAL_CENTS, n_tuned=TUNED_PARTIALS):
    """One :class:`synth.modes.Solution` holding a bar's bending and torsional modes, by frequency.

    Parameters
    ----------
    bending : Solution
        :func:`synth.resonators.bar.solve`'s (labels ``B1`` ...).
    torsion : TorsionSolution
        :func:`solve` of the same bar (at the same length).
    max_modes : int >= 1 or None
        Keep only the lowest `max_modes` of the merged modes (None: all).
        Solving both families for ``n`` modes and keeping the lowest ``n``
        gives every mode below the ``n``-th: the ``solve(spec, n_modes)``
        contract of :mod:`.common`.
    within_cents : float, cents
    n_tuned : int >= 1
        See :func:`near_flexural_warnings`.

    Returns
    -------
    Solution
        ``shape(position)`` takes ``(x, across)`` or a bare fraction (the
        centre line, where every torsional mode is 0, so a patch without
        ``across`` keeps its bending sound).  The bending modes' columns run
        on over the torsional modes (None where a column is bending-only, such
        as ``timoshenko_shift_cents``), with ``cents_from_bending`` and
        ``nearest_bending`` (None for bending modes); parameters of both, with
        ``torsion_modes`` (the count kept) and ``bending_fundamental_hz``
        (B1, which a torsional mode may undercut); warnings of both (the
        near-mode warning over the modes kept).
    """
    n_bending = len(bending.frequency_hz)
    frequency = np.concatenate([np.asarray(bending.frequency_hz, dtype=float), torsion.frequency_hz])
    order = np.argsort(frequency, kind="stable")[:max_modes]
    n_torsion = int(np.count_nonzero(order >= n_bending))
    labels = tuple(bending.labels) + tuple(torsion.labels)
    cents, nearest = cents_from_nearest(torsion.frequency_hz, bending.frequency_hz)
    columns = {}
    for key, values in bending.columns.items():
        extra = torsion.columns.get(key, (None,) * len(torsion.labels))
        columns[key] = tuple(values[i] for i in range(n_bending)) + tuple(extra)
    columns["cents_from_bending"] = (None,) * n_bending + tuple(float(c) for c in cents)
    columns["nearest_bending"] = (None,) * n_bending + tuple(bending.labels[i] for i in nearest)
    columns = {key: tuple(values[i] for i in order) for key, values in columns.items()}

    def shape(position):
        x = position if np.ndim(position) == 0 else position[0]
        return np.concatenate([np.asarray(bending.shape(x), dtype=float), torsion.shape(position)])[order]

    warnings = tuple(bending.warnings) + tuple(near_flexural_warnings(
        torsion.labels[:n_torsion], torsion.frequency_hz[:n_torsion], bending.labels, bending.frequency_hz,
        within_cents=within_cents, n_tuned=n_tuned))
    return Solution(
        resonator=bending.resonator,
        frequency_hz=frozen_array(frequency[order]),
        labels=tuple(labels[i] for i in order),
        shape=shape,
        columns=columns,
        parameters={**bending.parameters, **torsion.parameters, "torsion_modes": n_torsion,
                    "bending_fundamental_hz": float(bending.frequency_hz[0])},
        warnings=warnings,
    )
