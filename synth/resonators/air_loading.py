"""Air loading of a circular membrane: added mass, radiation damping and a kettle's air.

Notes
-----
The air lowers a drum head's modes (it must be moved with the head: added
mass), takes energy away as sound (radiation damping), and, where it is shut
in a kettle, pushes back on the head's net volume change (a stiffness that
raises the axisymmetric modes, (0,1) most).  This module works these out for
an ideal circular membrane (radius ``a``, tension ``T`` N/m, areal density
``sigma`` kg/m^2, fixed rim) by our own derivation in the spirit of Christian,
Davis, Tubis & Anderson [1]_ (a membrane expanded in its in-vacuo modes, the
air's pressure on it from the Rayleigh / King integral):

* **Basis.**  For each number of nodal diameters ``m`` the displacement is
  ``w = cos(m theta) sum_n q_n J_m(j_mn r / a)`` (the in-vacuo modes of that
  ``m``; modes of different ``m`` do not couple in any of the loadings
  below, all axisymmetric).  Modal mass ``M_n = sigma e_m a^2 J_(m+1)(j_mn)^2
  / 2`` and stiffness ``K_n = M_n omega_mn^2`` with ``e_m = 2 pi`` (m = 0) or
  ``pi``.  The mode shape may change (it becomes a mixture of the same-m
  modes); only the frequencies and decay rates are reported.
* **One face in an infinite rigid baffle** (King's integral, time factor
  ``exp(-i omega t)``): the Hankel transform of mode n is
  ``Psi_n(k) = a^2 j J_m'(j) J_m(ka) / ((ka)^2 - j^2)`` and the face's
  pressure projected on mode n' gives the loading ``omega^2 rho e_m a^3
  (X + i R)_(n n')`` with, in ``x = k a``, ``x0 = omega a / c``,
  ``R = int_0^x0 psi_n psi_n' x dx / sqrt(x0^2 - x^2)`` (radiation) and
  ``X = int_x0^inf psi_n psi_n' x dx / sqrt(x^2 - x0^2)`` (added mass).
* **baffled**: both faces in the baffle, each radiating into its own
  half-space: twice the one-face loading.
* **free** (no baffle: a head alone in open air, both faces): the pressure
  is odd in z, so it vanishes on the plane outside the disc; the jump across
  the disc is expanded in functions whose Hankel transforms are
  ``J_(m + 2l + 3/2)(x) / x^(3/2)`` (Sonine's integral: they vanish outside
  the disc and carry the square-root edge behaviour of the jump), and
  velocity continuity on the disc is met in the Galerkin sense.  The loading
  is ``2 i rho e_m a^3 B^T H^-1 B`` with ``B_ln = int G_l psi_n x dx`` and
  ``H_ll' = int G_l G_l' kz x dx`` (``kz = sqrt(x0^2 - x^2)``, ``+i`` above
  x0).
* **kettle**: the top face in the baffle (one half-space; the kettle's rim
  and a large flange are taken as a baffle), the under face closing a rigid
  cylinder of the head's radius and depth ``d = V / (pi a^2)``.  The
  cylinder's field is a sum of duct modes ``J_m(alpha r / a)``
  (``J_m'(alpha) = 0``, rigid wall; ``alpha = 0`` for the plane mode) with
  axial wavenumbers ``kappa = sqrt(k0^2 - (alpha / a)^2)`` and a rigid
  bottom: ``p = -omega^2 rho W_s cot(kappa d) / kappa`` on the head.  The
  plane mode's ``1 / (k0^2 d)`` part is the kettle's stiffness
  ``rho c^2 Q^2 / V`` (Q the mode's volume displacement) and is kept exact
  as a stiffness; the rest (the evanescent duct modes) is interior added
  mass; duct resonances (cot poles) are in it too.
* **cavity**: the kettle without the outside air (a check case: a sealed
  kettle in vacuum), and ``cavity_model="uniform"``: only the uniform
  pressure ``p = -rho c^2 (volume displaced) / V`` (no interior mass), the
  textbook kettledrum [3]_ with roots of ``J_0(x) = -B J_2(x) / x^2``.

The coupled problem ``[K - omega^2 (M + rho e_m a^3 L(omega))] q = 0`` is
nonlinear in omega; each mode is found by fixed-point iteration: solve the
linear generalised eigenproblem with ``L`` at the present real frequency,
take the eigenvalue whose vector is mostly mode n, repeat until the real
frequency stops moving.  The loading is evaluated at real frequencies (weak
damping: ``Im omega << Re omega``).  ``omega = omega_r - i gamma``; the
amplitude decays as ``exp(-gamma t)`` and the radiation T60 is
``3 ln(10) / gamma``.

Assumptions: flat head in a plane (no bowing), rigid rim, rigid baffle and
kettle walls, linear acoustics, no viscous or thermal losses (only
radiation), air density :data:`AIR_DENSITY` and the speed of sound of
:func:`synth.resonators.air_column.speed_of_sound` at 20 degC (both may be
given).  Bending stiffness of the head is not modelled (real timpani heads
add a few per cent at the higher modes [2]_).

References
----------
.. [1] R. S. Christian, R. E. Davis, A. Tubis, C. A. Anderson, R. I. Mills
   and T. D. Rossing, "Effects of air loading on timpani membrane
   vibrations", J. Acoust. Soc. Am. 76(5), 1336-1345 (1984) (pages from
   memory).
.. [2] T. D. Rossing, "The acoustics of timpani", Percussionist 19(3), 18-31
   (1982): ten or more modes measured with and without the kettle; the
   principal modes near 2:3:4, without the bowl 1, 1.48, 1.92, 2.36, 2.78
   relative to (1,1) (read second-hand on wtt.pauken.org).
.. [3] D. R. Raichel, *The Science and Applications of Acoustics*, Springer,
   ch. 6, eq. 6.28 and table 6.2 (kettledrum with trapped air; read on a
   reproduced page).
.. [4] L. V. King, "On the acoustic radiation field of the piezo-electric
   oscillator and the effect of viscosity on transmission", Can. J. Res. 11,
   135-155 (1934) (the wavenumber integral; from memory).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.linalg import eig
from scipy.special import jn_zeros, jnp_zeros, jv, jvp, spherical_jn

from .air_column import speed_of_sound

__all__ = [
    "AIR_DENSITY",
    "SPEED_OF_SOUND",
    "KINDS",
    "CAVITY_MODELS",
    "AirLoading",
    "LoadedModes",
    "air_loaded_modes",
    "tension_for_pitch",
    "baffled_face_matrix",
    "free_disc_matrix",
    "cylinder_matrix",
    "mode_transform",
]

#: Density of air (kg/m^3): the common textbook round value (dry air at about 20 degC, 101.3 kPa: 1.204).
AIR_DENSITY = 1.2
#: Speed of sound (m/s) at 20 degC and 50 % RH (Cramer 1993, :func:`speed_of_sound`).
SPEED_OF_SOUND = speed_of_sound(20.0)
#: Loadings a patch may name ("cavity" is a check case: a sealed kettle with no outside air).
KINDS = ("none", "free", "baffled", "kettle", "cavity")
#: How the kettle's air is modelled.
CAVITY_MODELS = ("cylinder", "uniform")
#: In-vacuo modes of each order m kept in the basis beyond the highest one asked for.
EXTRA_RADIAL = 6
#: Pressure-jump functions of the unbaffled disc, per m.
FREE_TERMS = 10
#: Duct modes of the cylinder, per m.
DUCT_TERMS = 40
#: Upper end of the wavenumber integrals (x = k a), at least this, and a multiple of the largest zero.
_X_MAX, _X_PER_ZERO = 300.0, 8.0
#: Composite Gauss-Legendre: panel width (in s, x = x0 +- s^2) and points per panel.
_PANEL, _GAUSS = 0.1, 10
#: Fixed-point iteration: relative change of the real frequency that ends it, and the most steps.
_RTOL, _MAX_STEPS = 1e-10, 60


@dataclass(frozen=True)
class AirLoading:
    """How the air meets a circular membrane.

    Attributes
    ----------
    kind : {"none", "free", "baffled", "kettle", "cavity"}
        ``free``: no baffle, air on both faces; ``baffled``: both faces in an
        infinite baffle; ``kettle``: top face baffled, under face over a
        closed kettle; ``cavity``: the kettle's air alone (a check case).
    kettle_volume : float > 0 or None, m^3
        Kettle and cavity only.
    air_density : float >= 0, kg/m^3
    sound_speed : float > 0, m/s
    cavity_model : {"cylinder", "uniform"}
        ``cylinder``: a rigid cylinder of the head's radius (interior mass and
        duct resonances); ``uniform``: a uniform pressure only (stiffness).
    n_radial : int >= 1 or None
        Same-m in-vacuo modes in the basis; None: the highest asked for +
        :data:`EXTRA_RADIAL`.
    """

    kind: str = "none"
    kettle_volume: float | None = None
    air_density: float = AIR_DENSITY
    sound_speed: float = SPEED_OF_SOUND
    cavity_model: str = "cylinder"
    n_radial: int | None = None

    def __post_init__(self):
        if self.kind not in KINDS:
            raise ValueError(f"air={self.kind!r} must be one of {', '.join(KINDS)}")
        if self.cavity_model not in CAVITY_MODELS:
            raise ValueError(f"cavity_model={self.cavity_model!r} must be one of {', '.join(CAVITY_MODELS)}")
        needs = self.kind in ("kettle", "cavity")
        if needs and not (self.kettle_volume is not None and math.isfinite(self.kettle_volume)
                          and self.kettle_volume > 0):
            raise ValueError(f"kettle_volume={self.kettle_volume!r} must be a volume > 0 (m^3) for air={self.kind}")
        if not needs and self.kettle_volume is not None:
            raise ValueError(f"kettle_volume goes with air=kettle, not air={self.kind}")
        if not (math.isfinite(self.air_density) and self.air_density >= 0):
            raise ValueError(f"air_density={self.air_density!r} must be >= 0 (kg/m^3)")
        if not (math.isfinite(self.sound_speed) and self.sound_speed > 0):
            raise ValueError(f"sound_speed={self.sound_speed!r} must be > 0 (m/s)")
        if self.n_radial is not None and int(self.n_radial) < 1:
            raise ValueError(f"n_radial={self.n_radial!r} must be >= 1")


@dataclass(frozen=True)
class LoadedModes:
    """Modes of an air-loaded membrane, in the order asked for.

    Attributes
    ----------
    orders, indices : tuple of int
        m (nodal diameters) and n (nodal circles + 1) of each mode.
    vacuum_frequency_hz, frequency_hz : ndarray [shape=(n_modes,)], Hz
    decay_rate : ndarray [shape=(n_modes,)], 1/s
        Amplitude decays as ``exp(-decay_rate t)`` (radiation only).
    t60_s : ndarray [shape=(n_modes,)], s
        ``3 ln(10) / decay_rate`` (inf without radiation).
    cents : ndarray [shape=(n_modes,)]
        ``1200 log2(frequency / vacuum_frequency)``.
    """

    orders: tuple
    indices: tuple
    vacuum_frequency_hz: np.ndarray
    frequency_hz: np.ndarray
    decay_rate: np.ndarray
    t60_s: np.ndarray
    cents: np.ndarray


def _frozen(values):
    array = np.array(values, dtype=float)
    array.flags.writeable = False
    return array


# ----------------------------------------------------------------------------- transforms and quadrature


def mode_transform(m, zeros, x):
    """Dimensionless Hankel transforms ``psi_n(x) = j J_m'(j) J_m(x) / (x^2 - j^2)`` of modes ``J_m(j r / a)``.

    Parameters
    ----------
    m : int >= 0
    zeros : array_like [shape=(n,)]
        Zeros j of J_m.
    x : array_like [shape=(p,)]
        ``k a``.

    Returns
    -------
    ndarray [shape=(n, p)]
        ``int_0^1 J_m(j rho) J_m(x rho) rho d rho`` (Lommel); ``J_m'(j)^2 / 2`` at ``x = j``.
    """
    j = np.asarray(zeros, dtype=float)[:, None]
    x = np.asarray(x, dtype=float)[None, :]
    slope = jvp(m, j)
    gap = x * x - j * j
    near = np.abs(x - j) < 1e-9 * j
    with np.errstate(invalid="ignore", divide="ignore"):
        out = j * slope * jv(m, x) / gap
    return np.where(near, 0.5 * slope * slope + 0.0 * x, out)


def _gauss_panels(s_end):
    """Nodes and weights on [0, s_end]: composite Gauss-Legendre, panels about :data:`_PANEL` wide."""
    count = max(1, int(math.ceil(s_end / _PANEL)))
    nodes, weights = np.polynomial.legendre.leggauss(_GAUSS)
    edges = np.linspace(0.0, s_end, count + 1)
    half = 0.5 * np.diff(edges)
    mid = 0.5 * (edges[1:] + edges[:-1])
    s = (mid[:, None] + half[:, None] * nodes[None, :]).ravel()
    w = (half[:, None] * weights[None, :]).ravel()
    return s, w


def _below(x0):
    """Nodes on [0, x0] (x = x0 - s^2) and weights for ``f dx``, ``f dx / sqrt(x0^2 - x^2)``, ``f sqrt(.) dx``."""
    if x0 <= 0.0:
        empty = np.zeros(0)
        return empty, empty, empty, empty
    s, w = _gauss_panels(math.sqrt(x0))
    x = x0 - s * s
    root = np.sqrt(x0 + x)  # sqrt(x0^2 - x^2) = s root; dx = 2 s ds
    return x, 2.0 * w * s, 2.0 * w / root, 2.0 * w * s * s * root


def _above(x0, x_max):
    """Nodes on [x0, x_max] (x = x0 + s^2) and weights as :func:`_below`, with ``sqrt(x^2 - x0^2)``."""
    s, w = _gauss_panels(math.sqrt(x_max - x0))
    x = x0 + s * s
    root = np.sqrt(x + x0)
    return x, 2.0 * w * s, 2.0 * w / root, 2.0 * w * s * s * root


def _x_max(zeros, x0):
    return max(_X_MAX, _X_PER_ZERO * float(np.max(zeros)), 4.0 * x0)


# ----------------------------------------------------------------------------- loading matrices


def baffled_face_matrix(m, zeros, x0):
    """One face in an infinite baffle: ``X + i R`` (dimensionless, symmetric).

    Parameters
    ----------
    m : int >= 0
    zeros : array_like [shape=(n,)]
        Zeros of J_m (the basis modes ``J_m(j r / a) cos(m theta)``).
    x0 : float >= 0
        ``k0 a = omega a / c``.

    Returns
    -------
    ndarray [shape=(n, n)], complex
        The face's pressure on mode n' from unit displacement of mode n is
        ``-omega^2 rho e_m a^3 (X + i R)`` per unit modal coordinate
        (``e_m = 2 pi`` for m = 0, else ``pi``): X is the added mass, R the
        radiation (time factor ``exp(-i omega t)``).  The mechanical
        radiation resistance of mode n (per unit modal velocity) is
        ``omega rho e_m a^3 R_nn``.
    """
    zeros = np.asarray(zeros, dtype=float)
    return _baffled(lambda x: mode_transform(m, zeros, x), x0, _x_max(zeros, x0))


def _baffled(transform, x0, x_max):
    """``X + i R`` of shapes whose Hankel transforms are ``transform(x) -> (n, p)``."""
    x_lo, _, w_lo, _ = _below(x0)
    x_hi, _, w_hi, _ = _above(x0, x_max)
    psi_lo, psi_hi = transform(x_lo), transform(x_hi)
    resistance = (psi_lo * (w_lo * x_lo)) @ psi_lo.T
    mass = (psi_hi * (w_hi * x_hi)) @ psi_hi.T
    return mass + 1j * resistance


def _jump_transform(m, n_terms, x):
    """Transforms ``J_(m + 2l + 3/2)(x) / x^(3/2)`` of the pressure-jump functions, shape (n_terms, p)."""
    order = m + 2 * np.arange(n_terms)[:, None] + 1  # J_(k + 1/2)(x) = sqrt(2 x / pi) j_k(x), spherical
    x = np.asarray(x, dtype=float)[None, :]
    return math.sqrt(2.0 / math.pi) * spherical_jn(order, x) / x


def free_disc_matrix(m, zeros, x0, *, n_terms=None):
    """Both faces, no baffle: the loading ``X + i R`` in the units of :func:`baffled_face_matrix`.

    Returns
    -------
    ndarray [shape=(n, n)], complex
        ``2 i B^T H^-1 B`` (see the module notes).

    Notes
    -----
    The tail of ``H`` beyond the quadrature's end X is added from the large-x
    form ``J_nu J_nu' ~ cos((nu - nu') pi / 2) / (pi x)``: ``i (-1)^(l - l') / (pi X)``.
    """
    zeros = np.asarray(zeros, dtype=float)
    n_terms = FREE_TERMS if n_terms is None else int(n_terms)
    return _free(lambda x: mode_transform(m, zeros, x), m, x0, _x_max(zeros, x0), n_terms)


def _free(transform, m, x0, x_max, n_terms):
    """``2 i B^T H^-1 B`` of shapes of order m whose Hankel transforms are ``transform(x) -> (n, p)``."""
    x_lo, plain_lo, _, root_lo = _below(x0)
    x_hi, plain_hi, _, root_hi = _above(x0, x_max)
    g_lo, g_hi = _jump_transform(m, n_terms, x_lo), _jump_transform(m, n_terms, x_hi)
    psi_lo, psi_hi = transform(x_lo), transform(x_hi)
    coupling = (g_lo * (plain_lo * x_lo)) @ psi_lo.T + (g_hi * (plain_hi * x_hi)) @ psi_hi.T
    parity = (-1.0) ** np.subtract.outer(np.arange(n_terms), np.arange(n_terms))
    h = (g_lo * (root_lo * x_lo)) @ g_lo.T + 1j * ((g_hi * (root_hi * x_hi)) @ g_hi.T + parity / (math.pi * x_max))
    return 2j * coupling.T @ np.linalg.solve(h, coupling)


def cylinder_matrix(m, zeros, x0, depth_ratio, *, n_duct=DUCT_TERMS, uniform=False):
    """Under face over a rigid closed cylinder of the head's radius: (stiffness, loading).

    Parameters
    ----------
    m : int >= 0
    zeros : array_like [shape=(n,)]
    x0 : float > 0
        ``k0 a``.
    depth_ratio : float > 0
        ``d / a`` with ``d = V / (pi a^2)``.
    uniform : bool
        Keep only the uniform pressure's stiffness.

    Returns
    -------
    stiffness : ndarray [shape=(n, n)]
        Dimensionless: the plane mode's ``rho c^2 Q Q^T / V`` is
        ``rho c^2 e_m a X0 X0^T / (N0 d/a)`` (m = 0 only; zeros otherwise).
    loading : ndarray [shape=(n, n)]
        In the units of :func:`baffled_face_matrix` (interior added mass;
        real: the closed kettle does not radiate).
    """
    zeros = np.asarray(zeros, dtype=float)
    n = zeros.size
    stiffness = np.zeros((n, n))
    loading = np.zeros((n, n))
    if m == 0:
        plane = jv(1, zeros) / zeros  # X0 = int_0^1 J_0(j r) r dr
        stiffness = np.outer(plane, plane) / (0.5 * depth_ratio)
        if not uniform:
            t = x0 * depth_ratio
            rest = (math.cos(t) / math.sin(t) / x0 - 1.0 / (x0 * x0 * depth_ratio)) if t > 1e-3 else (
                -depth_ratio / 3.0 - x0 * x0 * depth_ratio**3 / 45.0)
            loading -= np.outer(plane, plane) * rest / 0.5
    if uniform:
        return stiffness, loading
    alpha = jnp_zeros(m, n_duct) if m > 0 else jn_zeros(1, n_duct)  # J_0' = -J_1
    overlap = -(zeros[:, None] * jvp(m, zeros)[:, None] * jv(m, alpha)[None, :]) / (
        zeros[:, None] ** 2 - alpha[None, :] ** 2)
    norm = 0.5 * (1.0 - (m / alpha) ** 2) * jv(m, alpha) ** 2
    kappa_sq = x0 * x0 - alpha * alpha
    kappa = np.sqrt(np.abs(kappa_sq))
    arg = kappa * depth_ratio
    with np.errstate(over="ignore"):
        factor = np.where(kappa_sq < 0.0, -1.0 / (np.tanh(arg) * kappa), np.cos(arg) / np.sin(arg) / kappa)
    loading -= (overlap * (factor / norm)) @ overlap.T
    return stiffness, loading


# ----------------------------------------------------------------------------- the coupled problem


def _angular(m):
    """``int_0^2pi cos(m theta)^2 d theta``: 2 pi for m = 0, else pi."""
    return 2.0 * math.pi if m == 0 else math.pi


def _loading(loading, m, zeros, x0, depth_ratio):
    """(dimensionless cavity stiffness, dimensionless loading matrix) of `loading` at ``k0 a = x0``."""
    n = zeros.size
    stiffness = np.zeros((n, n))
    total = np.zeros((n, n), dtype=complex)
    kind = loading.kind
    if kind == "baffled":
        total += 2.0 * baffled_face_matrix(m, zeros, x0)
    elif kind == "free":
        total += free_disc_matrix(m, zeros, x0)
    elif kind == "kettle":
        total += baffled_face_matrix(m, zeros, x0)
    if kind in ("kettle", "cavity"):
        cavity_stiffness, cavity_mass = cylinder_matrix(
            m, zeros, x0, depth_ratio, uniform=loading.cavity_model == "uniform")
        stiffness += cavity_stiffness
        total += cavity_mass
    return stiffness, total


def _solve_order(m, wanted, *, radius, tension, areal_density, loading):
    """Loaded complex angular frequencies (rad/s, ``omega_r - i gamma``) of modes (m, n) for n in `wanted`."""
    size = loading.n_radial if loading.n_radial is not None else max(wanted) + EXTRA_RADIAL
    size = max(int(size), max(wanted))
    zeros = jn_zeros(m, size)
    speed = math.sqrt(tension / areal_density)
    omega_vacuum = zeros * speed / radius
    modal_mass = areal_density * _angular(m) * radius**2 * 0.5 * jv(m + 1, zeros) ** 2
    stiffness = np.diag(modal_mass * omega_vacuum**2)
    scale = loading.air_density * _angular(m) * radius**3  # kg per unit dimensionless loading
    depth_ratio = None
    if loading.kind in ("kettle", "cavity"):
        depth_ratio = loading.kettle_volume / (math.pi * radius**3)
    c = loading.sound_speed
    out = []
    for n in wanted:
        # each mode with its own basis (n + EXTRA_RADIAL terms), so its frequency does not depend on
        # which other modes were asked for (a pitch solved on (0,1) alone holds in a full table)
        k = size if loading.n_radial is not None else n + EXTRA_RADIAL
        omega = complex(omega_vacuum[n - 1])
        for _ in range(_MAX_STEPS):
            x0 = omega.real * radius / c
            cavity, load = _loading(loading, m, zeros[:k], x0, depth_ratio)
            a_matrix = stiffness[:k, :k] + loading.air_density * c * c * _angular(m) * radius * cavity
            b_matrix = np.diag(modal_mass[:k]) + scale * load
            values, vectors = eig(a_matrix, b_matrix)
            energy = np.abs(vectors) ** 2 * modal_mass[:k, None]
            pick = int(np.argmax(energy[n - 1] / energy.sum(axis=0)))
            new = np.sqrt(complex(values[pick]))
            if new.real < 0:
                new = -new
            done = abs(new.real - omega.real) <= _RTOL * abs(omega.real)
            omega = new
            if done:
                break
        out.append(complex(omega.real, -abs(omega.imag)) if omega.imag > 0 else omega)
    return out


def air_loaded_modes(radius, tension, areal_density, modes, *, loading):
    """Frequencies, radiation decay rates and cents shifts of an air-loaded circular membrane.

    Parameters
    ----------
    radius : float > 0, m
    tension : float > 0, N/m
    areal_density : float > 0, kg/m^2
    modes : iterable of (int, int)
        (m, n) of each mode: m nodal diameters, n - 1 nodal circles (the
        labels of :mod:`synth.resonators.membrane`).
    loading : AirLoading

    Returns
    -------
    LoadedModes
        In the order of `modes`.

    Raises
    ------
    ValueError
        A mode label that is not (m >= 0, n >= 1), or a size that is not > 0.

    Examples
    --------
    >>> out = air_loaded_modes(0.328, 3990.0, 0.262, [(1, 1), (2, 1)], loading=AirLoading(kind="none"))
    >>> [round(float(f), 2) for f in out.frequency_hz]
    [229.44, 307.52]
    """
    for name, value in (("radius", radius), ("tension", tension), ("areal_density", areal_density)):
        if not (math.isfinite(value) and value > 0):
            raise ValueError(f"{name}={value!r} must be > 0")
    pairs = [(int(m), int(n)) for m, n in modes]
    for m, n in pairs:
        if m < 0 or n < 1:
            raise ValueError(f"mode ({m},{n}) must have m >= 0 and n >= 1")
    speed = math.sqrt(tension / areal_density)
    vacuum = np.array([jn_zeros(m, n)[-1] * speed / (2.0 * math.pi * radius) for m, n in pairs])
    omega = {}
    if loading.kind == "none" or loading.air_density == 0.0:
        omega = {pair: 2.0 * math.pi * f for pair, f in zip(pairs, vacuum)}
    else:
        for m in sorted({m for m, _ in pairs}):
            wanted = sorted({n for order, n in pairs if order == m})
            found = _solve_order(m, wanted, radius=radius, tension=tension, areal_density=areal_density,
                                 loading=loading)
            omega.update({(m, n): w for n, w in zip(wanted, found)})
    complex_omega = np.array([complex(omega[pair]) for pair in pairs])
    frequency = complex_omega.real / (2.0 * math.pi)
    decay = np.maximum(-complex_omega.imag, 0.0)
    with np.errstate(divide="ignore"):
        t60 = np.where(decay > 0.0, 3.0 * math.log(10.0) / np.where(decay > 0, decay, 1.0), np.inf)
    return LoadedModes(
        orders=tuple(m for m, _ in pairs),
        indices=tuple(n for _, n in pairs),
        vacuum_frequency_hz=_frozen(vacuum),
        frequency_hz=_frozen(frequency),
        decay_rate=_frozen(decay),
        t60_s=_frozen(t60),
        cents=_frozen(1200.0 * np.log2(frequency / vacuum)),
    )


def tension_for_pitch(radius, areal_density, pitch_hz, *, loading, mode=(0, 1)):
    """Tension (N/m) that puts the loaded `mode` at `pitch_hz`.

    Parameters
    ----------
    radius : float > 0, m
    areal_density : float > 0, kg/m^2
    pitch_hz : float > 0, Hz
    loading : AirLoading
    mode : (int, int)
        The mode that carries the pitch: (0, 1) for most drums, (1, 1) for a
        kettledrum's principal tone.

    Notes
    -----
    The loaded frequency grows close to ``sqrt(T)`` (exactly so without
    air), so ``T <- T (f_target / f)^2`` converges in a few steps.
    """
    if not (math.isfinite(pitch_hz) and pitch_hz > 0):
        raise ValueError(f"pitch_hz={pitch_hz!r} must be > 0")
    m, n = mode
    tension = areal_density * (2.0 * math.pi * pitch_hz * radius / jn_zeros(m, n)[-1]) ** 2
    for _ in range(40):
        found = air_loaded_modes(radius, tension, areal_density, [mode], loading=loading).frequency_hz[0]
        step = (pitch_hz / found) ** 2
        tension *= step
        if abs(step - 1.0) < 1e-11:
            break
    return tension
