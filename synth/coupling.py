"""Coupled modes: unison courses and polarisations on a common bridge, bar + tube pairs.

A mode elsewhere in synth is ``exp(s t)``, ``s = -sigma + i omega``.  Coupling
replaces partial i by sub-modes k heard, for unit complex amplitude, as
``Re sum_k w_k exp(s_k t)``; the caller multiplies each sub-mode by the
excitation's transfer at ``s_k``.

Notes
-----
**Strings on a yielding bridge** (Weinreich [1]_).  Time dependence
``exp(i omega t)``.  A string (tension T, wave speed c, ``Z0 = sqrt(T mu) = T/c``)
is fixed at x = 0 and rests at x = L on a bridge of admittance ``Y = G + iB``.
With ``y = A sin(kx)`` it pulls the bridge with ``F = -T y'(L)``, and
``v = i omega y(L) = Y F`` gives ``tan(kL) = i Y Z0``, so
``kL = n pi + arctan(i Y Z0) = n pi + i Y Z0 + O((Y Z0)^3)``.  With
``omega = c k`` mode n moves by ``eps_n = i omega_n Z0 Y / (n pi)``:
``Im eps_n = omega_n Z0 G / (n pi)`` is bridge loss, ``Re eps_n = -omega_n Z0 B / (n pi)``
a shift (down for a springy bridge, B > 0).  N strings drive the bridge together
(``v = Y sum_j F_j``): to first order ``da/dt = i M a``,
``M = diag(omega_n 2**(c_j/1200) + i sigma_n) + eps_n ones((N, N))``.  Eigenvalue
``lambda_k`` is the sub-mode ``exp(i lambda_k t)``: frequency ``Re(lambda_k)/(2 pi)``,
decay rate ``Im(lambda_k)``.  Struck alike, ``a(0) = ones``; heard is the mean drive
``ones @ a / N``: ``w_k = (ones @ V[:, k] / N) (V^-1 ones)[k]``, ``sum_k w_k = 1``.
``(M - M^H)/2i = sigma_n I + Im(eps_n) ones >= 0``, so every decay rate is >= sigma_n.

Robustness.  Strings tuned alike are solved through their group sums
(``omega I + eps ones`` is degenerate): a group of m gives m - 1 "dark" sub-modes
at ``omega + i sigma`` with weight 0 and one member of the reduced system
``R[g, h] = d_g delta_gh + eps m_h``.  Near an exceptional point (a defective R,
e.g. two strings split by ``2 |eps|`` with ``eps`` imaginary) the diagonal is
nudged by ``1e-4 |eps|``: weights stay of order 100 and the summed response moves
by about ``1e-4 |eps| t``.

**Two polarisations**: two independent courses (admittances ``Y_v``, ``Y_h``; the
horizontal one tuned ``split_cents`` up) started with ``cos(theta)``, ``sin(theta)``;
the bridge velocity is heard, so the horizontal part is scaled by ``|Y_h|/|Y_v|``.

**Bar and tube** (Fletcher & Rossing [2]_, ch. 1-2, from memory):
``M = [[lambda_b, g], [g, lambda_t]]``, ``g = coupling omega_b``, eigenvalues
``(lambda_b + lambda_t)/2 +- sqrt(((lambda_b - lambda_t)/2)^2 + g^2)``; the bar is
struck (``a(0) = [1, 0]``) and ``[1, level] @ a`` is heard.

References
----------
.. [1] G. Weinreich, "Coupled piano strings", J. Acoust. Soc. Am. 62(6), 1474-1484
   (1977) (page details from memory).
.. [2] N. H. Fletcher and T. D. Rossing, *The Physics of Musical Instruments*, 2nd
   ed., Springer (1998).
.. [3] L. Cremer, M. Heckl and B. A. T. Petersson, *Structure-Borne Sound*, 3rd ed.,
   Springer (2005): infinite-plate point impedance ``8 sqrt(B' m'')`` (from memory).
.. [4] H. Levine and J. Schwinger, "On the radiation of sound from an unflanged
   circular pipe", Phys. Rev. 73(4), 383-406 (1948).
.. [5] D. E. Weston, "The theory of the propagation of plane sound waves in tubes",
   Proc. Phys. Soc. B 66, 695-709 (1953), eq. (2): Kirchhoff's (1868) wide-tube
   attenuation ``2.964e-5 sqrt(f) / r`` for air at 20 degC, 76 cmHg (seen; the
   volume and pages from memory).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .damping import LN1000
from .errors import ModalError
from .modes import frozen_array
from .resonators.air_column import solve_length, speed_of_sound

__all__ = [
    "CoupledModes", "CouplingError", "Bridge", "Polarisation", "uncoupled", "course_modes",
    "string_modes", "default_polarisation", "plate_point_admittance", "tube_pair", "tube_length",
    "tube_decay_rate", "DEFAULT_BRIDGE_CONDUCTANCE", "DEFAULT_HORIZONTAL_RATIO", "DEFAULT_SPLIT_CENTS",
    "DEFAULT_ANGLE", "WALL_ATTENUATION", "DEFAULT_TUBE_COUPLING", "DEFAULT_TUBE_LEVEL", "KeyCoupling", "string_impedance",
]

# Representative soundboard: Sitka spruce at 12% moisture, quarter-sawn, 9 mm.
# Handbook-typical values from memory (USDA Wood Handbook FPL-GTR-190, Tables 5-1 and
# 5-3a; REFERENCES.md sec. 7 has E_L 10.8 GPa from memory and a mill sheet's 11.2 GPa).
SPRUCE_DENSITY = 450.0  # kg/m^3: specific gravity 0.40 x 1.12 x 1000 (REFERENCES.md sec. 7)
SPRUCE_YOUNGS_ALONG = 10.8e9  # Pa, E_L along the grain (from memory)
SPRUCE_YOUNGS_ACROSS = 0.078 * SPRUCE_YOUNGS_ALONG  # Pa, E_R: E_R/E_L = 0.078 (from memory)
SOUNDBOARD_THICKNESS = 9.0e-3  # m (assumed representative)


def plate_point_admittance(youngs_modulus, density, thickness, *, poisson_ratio=0.0):
    """Point admittance (s/kg) of an infinite thin plate: ``1 / (8 sqrt(D m''))``.

    Parameters
    ----------
    youngs_modulus : float > 0, Pa
    density : float > 0, kg/m^3
    thickness : float > 0, m
    poisson_ratio : float, optional
        Enters ``D = E h^3 / (12 (1 - nu^2))``.

    Returns
    -------
    float, s/kg
        Real: the infinite plate's admittance is a pure conductance.  A finite
        plate's admittance, averaged over frequency above its first modes,
        tends to it (Cremer, Heckl & Petersson [3]_, from memory).
    """
    rigidity = youngs_modulus * thickness**3 / (12.0 * (1.0 - poisson_ratio**2))
    return 1.0 / (8.0 * math.sqrt(rigidity * density * thickness))


#: Vertical bridge conductance (s/kg): the infinite-plate admittance of the board above,
#: with E the geometric mean of E_L and E_R (an orthotropic plate's sqrt(D_L D_R)) and
#: the Poisson factor 1 - nu_LR nu_RL ~ 0.99 dropped (nu_LR ~ 0.37, from memory): about
#: 4.6e-3 s/kg.  A bare board: ribs and a bridge stiffen a real one, so measured bridge
#: admittances are likely lower (not checked).
DEFAULT_BRIDGE_CONDUCTANCE = plate_point_admittance(
    math.sqrt(SPRUCE_YOUNGS_ALONG * SPRUCE_YOUNGS_ACROSS), SPRUCE_DENSITY, SOUNDBOARD_THICKNESS
)
#: Horizontal / vertical conductance: an assumption, not a measurement (a board is far
#: stiffer in its own plane than across it, so horizontal motion loses less).
DEFAULT_HORIZONTAL_RATIO = 0.1
#: Horizontal minus vertical tuning (cents): an assumption, a small termination asymmetry.
DEFAULT_SPLIT_CENTS = 0.5
#: Excitation direction from the vertical (rad): an assumption (30 degrees).
DEFAULT_ANGLE = math.radians(30.0)
#: Wall (visco-thermal boundary-layer) attenuation, alpha = WALL_ATTENUATION sqrt(f) / a
#: in 1/m (s^1/2): Kirchhoff's wide-tube value for air at 20 degC as quoted by Weston [5]_
#: (unit-free between cgs and SI); its slight temperature dependence is ignored.
WALL_ATTENUATION = 2.964e-5
#: Bar-tube coupling g / omega_b: an assumption, not a measurement.  At C4 (tube radius
#: 30 mm, bar T60 2 s) it splits the tuned pair by about 1 Hz and roughly halves the
#: fundamental's T60, the order of shortening reported for resonated bars (from memory,
#: not checked); set ``tubes.coupling`` from a measured decay where one exists.
DEFAULT_TUBE_COUPLING = 3.0e-3
#: How strongly the tube's mode is heard against the bar's (heard vector [1, level]):
#: an assumption, equal weight.
DEFAULT_TUBE_LEVEL = 1.0
#: cond(V) above which a near-defective matrix is nudged (see Notes).
CONDITION_LIMIT = 1.0e3
#: Size of that nudge relative to the largest coupling term.
EXCEPTIONAL_NUDGE = 1.0e-4


class CouplingError(ValueError, ModalError):
    """Coupling parameters that cannot be used (the message names the value)."""


@dataclass(frozen=True)
class CoupledModes:
    """Sub-modes of coupled partials (contiguous per source, by frequency then decay).

    Attributes
    ----------
    source : ndarray of int [shape=(m,)]
        Index of the input partial each sub-mode comes from.
    frequency_hz : ndarray [shape=(m,)], Hz
    decay_rate : ndarray [shape=(m,)], 1/s
        Not clipped; a negative (growing) one is reported by :attr:`warnings`.
    weight : ndarray of complex [shape=(m,)]
    suffix : tuple of str [shape=(m,)]
        Label suffix, e.g. ``"c1"``, ``"h2"``, ``"a"``; ``""`` for an uncoupled mode.
    """

    source: np.ndarray
    frequency_hz: np.ndarray
    decay_rate: np.ndarray
    weight: np.ndarray
    suffix: tuple

    def __post_init__(self):
        object.__setattr__(self, "source", frozen_array(self.source, dtype=int))
        object.__setattr__(self, "frequency_hz", frozen_array(self.frequency_hz))
        object.__setattr__(self, "decay_rate", frozen_array(self.decay_rate))
        object.__setattr__(self, "weight", frozen_array(self.weight, dtype=complex))
        object.__setattr__(self, "suffix", tuple(str(s) for s in self.suffix))
        sizes = {len(self.source), len(self.frequency_hz), len(self.decay_rate), len(self.weight), len(self.suffix)}
        if len(sizes) != 1:
            raise CouplingError(f"CoupledModes fields have different lengths {sorted(sizes)}")

    @property
    def warnings(self):
        """Messages about sub-modes that grow (negative decay rate): reported, not clipped."""
        growing = self.decay_rate < 0.0
        if not np.any(growing):
            return ()
        return (f"{np.count_nonzero(growing)} coupled sub-modes grow (decay rate down to "
                f"{self.decay_rate.min():.3g} 1/s): check for negative damping or conductance",)

    @classmethod
    def concatenate(cls, parts):
        """One CoupledModes from several, in order (sources are kept as given)."""
        parts = list(parts)
        if not parts:
            return cls(np.zeros(0, int), np.zeros(0), np.zeros(0), np.zeros(0, complex), ())
        return cls(
            np.concatenate([p.source for p in parts]),
            np.concatenate([p.frequency_hz for p in parts]),
            np.concatenate([p.decay_rate for p in parts]),
            np.concatenate([p.weight for p in parts]),
            tuple(s for p in parts for s in p.suffix),
        )


def uncoupled(frequency_hz, decay_rate):
    """The identity coupling: one sub-mode per partial, weight 1, suffix ``""``."""
    f, sigma = _validate_partials(frequency_hz, decay_rate)
    return CoupledModes(np.arange(len(f)), f, sigma, np.ones(len(f), complex), ("",) * len(f))


@dataclass(frozen=True)
class Bridge:
    """Vertical point admittance ``Y = G + iB`` of the bridge (s/kg)."""

    conductance: float  #: G >= 0, s/kg
    susceptance: float = 0.0  #: B, s/kg (> 0 springy, < 0 massy)

    def __post_init__(self):
        _check_admittance(self.conductance, self.susceptance, "bridge")

    @property
    def admittance(self):
        return complex(self.conductance, self.susceptance)


@dataclass(frozen=True)
class Polarisation:
    """The horizontal polarisation: its bridge admittance, tuning split and the stroke angle."""

    conductance: float  #: horizontal G >= 0, s/kg
    susceptance: float = 0.0  #: horizontal B, s/kg
    split_cents: float = 0.0  #: horizontal minus vertical tuning, cents
    angle: float = DEFAULT_ANGLE  #: excitation direction from the vertical, rad

    def __post_init__(self):
        _check_admittance(self.conductance, self.susceptance, "polarisation")
        for name in ("split_cents", "angle"):
            if not math.isfinite(getattr(self, name)):
                raise CouplingError(f"polarisation {name}={getattr(self, name)!r} must be finite")

    @property
    def admittance(self):
        return complex(self.conductance, self.susceptance)


def default_polarisation(bridge):
    """A :class:`Polarisation` from the module defaults, scaled from `bridge` (all assumptions)."""
    return Polarisation(conductance=DEFAULT_HORIZONTAL_RATIO * bridge.conductance,
                        susceptance=DEFAULT_HORIZONTAL_RATIO * bridge.susceptance,
                        split_cents=DEFAULT_SPLIT_CENTS, angle=DEFAULT_ANGLE)


def course_modes(frequency_hz, decay_rate, harmonic, *, impedance, admittance, detune_cents=(0.0,), suffix="c"):
    """Sub-modes of a course of 1-3 unison strings on one bridge (Weinreich 1977).

    Parameters
    ----------
    frequency_hz, decay_rate : array_like [shape=(n,)], Hz and 1/s
        Partials of the reference (undetuned, rigidly held) string.
    harmonic : array_like of int >= 1 [shape=(n,)]
        Mode number of each partial.
    impedance : float > 0, kg/s
        Characteristic impedance ``Z0 = sqrt(T mu)`` of one string.
    admittance : complex, s/kg
        Bridge point admittance ``Y = G + iB`` with G >= 0.
    detune_cents : sequence of 1 to 3 floats, cents
        Tuning of each string against the reference.
    suffix : str
        Sub-mode k (by frequency) is labelled ``f"{suffix}{k + 1}"`` when there
        are several strings, ``""`` for one.

    Returns
    -------
    CoupledModes
        ``n * N`` sub-modes; weights of each partial sum to 1.

    Notes
    -----
    ``M = diag(omega_n 2**(c_j/1200) + i sigma_n) + eps_n ones``,
    ``eps_n = i omega_n Z0 Y / (n pi)``; see the module Notes.
    """
    f, sigma, n, cents, y = _validate_course(frequency_hz, decay_rate, harmonic, impedance, admittance, detune_cents)
    single = "" if len(cents) == 1 else None
    rows = _course_rows(f, sigma, n, impedance, y, cents, suffix, single, 1.0)
    return _assemble(rows, len(f))


def string_modes(frequency_hz, decay_rate, harmonic, *, impedance, bridge, detune_cents=(0.0,), polarisation=None):
    """Sub-modes of a course in its vertical and (optionally) horizontal polarisation.

    Parameters
    ----------
    frequency_hz, decay_rate, harmonic, impedance, detune_cents
        As in :func:`course_modes`.
    bridge : Bridge
        The vertical admittance.
    polarisation : Polarisation or None
        None: the vertical polarisation only (:func:`course_modes`, suffixes ``"c..."``).

    Returns
    -------
    CoupledModes
        Vertical sub-modes weighted ``cos(theta)`` and labelled ``"v1"...`` (``"v"``
        for one string), horizontal ones weighted ``sin(theta) |Y_h| / |Y_v|``
        (``"h1"...`` or ``"h"``), both sorted together per partial.
    """
    if polarisation is None:
        return course_modes(frequency_hz, decay_rate, harmonic, impedance=impedance,
                            admittance=bridge.admittance, detune_cents=detune_cents)
    f, sigma, n, cents, y_v = _validate_course(frequency_hz, decay_rate, harmonic, impedance,
                                               bridge.admittance, detune_cents)
    if y_v == 0:
        raise CouplingError("bridge admittance=0j leaves the horizontal/vertical ratio undefined: give a conductance")
    y_h, theta = polarisation.admittance, polarisation.angle
    one = len(cents) == 1
    vertical = _course_rows(f, sigma, n, impedance, y_v, cents, "v", "v" if one else None, math.cos(theta))
    horizontal = _course_rows(f, sigma, n, impedance, y_h, cents + polarisation.split_cents, "h",
                              "h" if one else None, math.sin(theta) * abs(y_h) / abs(y_v))
    return _assemble(vertical + horizontal, len(f))


def tube_pair(frequency_hz, decay_rate, *, tube_frequency_hz, tube_decay_rate, coupling, level):
    """A bar mode coupled to a tube mode: two sub-modes ``"a"`` (lower) and ``"b"`` (upper).

    Parameters
    ----------
    frequency_hz, decay_rate : float, Hz and 1/s
        The bar's mode (its fundamental).
    tube_frequency_hz, tube_decay_rate : float, Hz and 1/s
        The tube's first mode (:func:`tube_length`, :func:`tube_decay_rate`).
    coupling : float
        Dimensionless ``g / omega_b``.
    level : float
        How strongly the tube is heard against the bar (heard vector ``[1, level]``).

    Returns
    -------
    CoupledModes
        Source 0.  With ``coupling = 0`` the bar's sub-mode is the bar mode with
        weight 1, the tube's has weight 0 (nothing is dropped).
    """
    values = [frequency_hz, decay_rate, tube_frequency_hz, tube_decay_rate, coupling, level]
    names = ["frequency_hz", "decay_rate", "tube_frequency_hz", "tube_decay_rate", "coupling", "level"]
    for name, value in zip(names, values):
        if not (isinstance(value, (int, float, np.floating, np.integer)) and math.isfinite(value)):
            raise CouplingError(f"{name}={value!r} must be a finite real number")
    for name, value in zip(names[:3:2], values[:3:2]):
        if value <= 0:
            raise CouplingError(f"{name}={value!r} must be > 0")
    omega_b = 2.0 * math.pi * frequency_hz
    bar = complex(omega_b, decay_rate)
    tube = complex(2.0 * math.pi * tube_frequency_hz, tube_decay_rate)
    g = coupling * omega_b
    lam, w = _eig_weights(np.array([[bar, g], [g, tube]]), np.array([1.0, level]), np.array([1.0, 0.0]))
    order = _order(lam)
    return _assemble([(0, lam[order], w[order], ["a", "b"])], 1)


@dataclass(frozen=True)
class KeyCoupling:
    """The coupling of one instrument key, applied to its solved, damped modes.

    Attributes
    ----------
    detune_cents : tuple of float
        One tuning per unison string (a single 0.0: one string).
    bridge : Bridge or None
        The strings' common bridge (strings only).
    polarisation : Polarisation or None
        The horizontal polarisation (strings only; None: vertical only).
    tube : tuple or None
        ``(frequency_hz, decay_rate, coupling, level, radius_m, length_m)`` of the
        closed-open tube under a bar, coupled to the bar's lowest mode.
    """

    detune_cents: tuple = (0.0,)
    bridge: Bridge | None = None
    polarisation: Polarisation | None = None
    tube: tuple | None = None

    def apply(self, frequency_hz, decay_rate, harmonic, *, impedance=None):
        """:class:`CoupledModes` of the partials (Hz, 1/s, mode numbers); `impedance` (kg/s) for strings."""
        if self.bridge is not None:
            if impedance is None:
                raise CouplingError("a bridge couples strings: the object has no string impedance sqrt(T mu)")
            coupled = string_modes(frequency_hz, decay_rate, harmonic, impedance=impedance, bridge=self.bridge,
                                   detune_cents=self.detune_cents, polarisation=self.polarisation)
        else:
            coupled = uncoupled(frequency_hz, decay_rate)
        if self.tube is None or len(coupled.source) == 0:
            return coupled
        tube_hz, tube_rate, coupling, level = self.tube[:4]
        first = coupled.source == 0
        pair = tube_pair(float(coupled.frequency_hz[0]), float(coupled.decay_rate[0]), tube_frequency_hz=tube_hz,
                         tube_decay_rate=tube_rate, coupling=coupling, level=level)
        pair = CoupledModes(pair.source, pair.frequency_hz, pair.decay_rate, pair.weight * coupled.weight[0],
                            pair.suffix)
        rest = CoupledModes(coupled.source[~first], coupled.frequency_hz[~first], coupled.decay_rate[~first],
                            coupled.weight[~first], tuple(s for s, f in zip(coupled.suffix, first) if not f))
        return CoupledModes.concatenate([pair, rest])

    def parameters(self):
        """Report parameters of the coupling (SI, unit-suffixed names)."""
        out = {}
        if len(self.detune_cents) > 1:
            out["course_strings"] = len(self.detune_cents)
            out["course_detune_cents"] = list(self.detune_cents)
        if self.bridge is not None:
            out["bridge_conductance_s_kg"] = self.bridge.conductance
            out["bridge_susceptance_s_kg"] = self.bridge.susceptance
        if self.polarisation is not None:
            out["horizontal_conductance_s_kg"] = self.polarisation.conductance
            out["polarisation_split_cents"] = self.polarisation.split_cents
            out["polarisation_angle_deg"] = math.degrees(self.polarisation.angle)
        if self.tube is not None:
            tube_hz, tube_rate, coupling, level, radius, length = self.tube
            out.update(tube_frequency_hz=tube_hz, tube_t60_s=LN1000 / tube_rate, tube_coupling=coupling,
                       tube_level=level, tube_radius_m=radius, tube_length_m=length)
        return out


def string_impedance(parameters):
    """``Z0 = sqrt(T mu)`` (kg/s) from a string's report parameters, or None for other objects."""
    if parameters.get("tension_n") is None or parameters.get("linear_density_kg_m") is None:
        return None
    return math.sqrt(parameters["tension_n"] * parameters["linear_density_kg_m"])


def tube_length(frequency_hz, radius, temperature=20.0):
    """Physical length (m) of a closed-open tube whose first mode is `frequency_hz`.

    ``L = c / (4 f) - 0.6133 a`` (Levine & Schwinger [4]_ end correction), from
    :func:`synth.resonators.air_column.solve_length`.

    Raises
    ------
    UnreachablePitch
        If the end correction alone is longer than a quarter wavelength.
    """
    return solve_length(frequency_hz, radius=radius, ends="closed-open", temperature=temperature)


def tube_decay_rate(frequency_hz, radius, temperature=20.0):
    """Amplitude decay rate sigma (1/s) of a closed-open tube's first mode.

    Parameters
    ----------
    frequency_hz : float > 0, Hz
    radius : float > 0, m
    temperature : float, degC

    Returns
    -------
    float, 1/s
        ``sigma_rad + sigma_wall``.

    Notes
    -----
    Radiation from the unflanged open end, for ``ka << 1``:
    ``|R| = exp(-(ka)^2 / 2)`` (Levine & Schwinger [4]_, low-frequency limit), lost
    once per round trip ``2 L_e / c`` with ``L_e = c / (4 f)``, so
    ``sigma_rad = (ka)^2 c / (4 L_e) = (ka)^2 f``.  Walls:
    ``alpha = 2.964e-5 sqrt(f) / a`` (1/m; Kirchhoff via Weston [5]_) and
    ``sigma_wall = alpha c``.
    """
    if not (frequency_hz > 0 and radius > 0):
        raise CouplingError(f"frequency_hz={frequency_hz!r} and radius={radius!r} must be > 0")
    c = speed_of_sound(temperature)
    ka = 2.0 * math.pi * frequency_hz * radius / c
    effective_length = c / (4.0 * frequency_hz)
    radiation = (ka**2 / 2.0) * c / (2.0 * effective_length)
    wall = WALL_ATTENUATION * math.sqrt(frequency_hz) / radius * c
    return radiation + wall


# -- the math -----------------------------------------------------------------------


def _eig_weights(matrix, heard, start):
    """Eigenvalues of `matrix` and weights ``(heard @ V[:, k]) (V^-1 start)[k]``."""
    values, vectors = np.linalg.eig(matrix)
    if np.linalg.cond(vectors) > CONDITION_LIMIT:
        # Near an exceptional point: nudge the diagonal, trying four directions so the
        # nudge cannot land on the defective matrix (module Notes).
        off = np.max(np.abs(matrix - np.diag(np.diag(matrix))))
        ramp = np.diag(np.arange(len(matrix), dtype=complex))
        trials = [np.linalg.eig(matrix + EXCEPTIONAL_NUDGE * off * turn * ramp) for turn in (1, 1j, -1, -1j)]
        values, vectors = min(trials, key=lambda trial: np.linalg.cond(trial[1]))
    return values, (heard @ vectors) * np.linalg.solve(vectors, start)


def _order(lam):
    """Sort by frequency, then decay rate."""
    return np.lexsort((lam.imag, lam.real))


def _course_rows(f, sigma, harmonic, impedance, admittance, cents, label, single, scale):
    """Per partial: (source, sorted lambdas, weights x scale, suffixes)."""
    groups, counts = np.unique(cents, return_counts=True)
    ratio = 2.0 ** (groups / 1200.0)
    rows = []
    for i in range(len(f)):
        omega = 2.0 * math.pi * f[i]
        eps = 1j * omega * impedance * admittance / (harmonic[i] * math.pi)
        own = omega * ratio + 1j * sigma[i]
        reduced = np.diag(own) + eps * counts[None, :]
        lam, w = _eig_weights(reduced, counts / counts.sum(), np.ones(len(groups)))
        lam = np.concatenate([lam, np.repeat(own, counts - 1)])
        w = np.concatenate([w, np.zeros(counts.sum() - len(groups))])
        order = _order(lam)
        names = [single] * len(order) if single is not None else [f"{label}{k + 1}" for k in range(len(order))]
        rows.append((i, lam[order], scale * w[order], names))
    return rows


def _assemble(rows, n_sources):
    """CoupledModes from rows (source, lambdas, weights, suffixes), sorted within each source."""
    by_source = [[] for _ in range(n_sources)]
    for source, lam, w, names in rows:
        by_source[source].extend(zip(lam, w, names))
    parts = []
    for source, items in enumerate(by_source):
        lam = np.array([item[0] for item in items], dtype=complex)
        order = _order(lam)
        parts.append(CoupledModes(np.full(len(items), source), lam.real[order] / (2.0 * math.pi), lam.imag[order],
                                  np.array([items[k][1] for k in order], complex), [items[k][2] for k in order]))
    return CoupledModes.concatenate(parts)


# -- validation ---------------------------------------------------------------------


def _check_admittance(conductance, susceptance, name):
    if not (math.isfinite(conductance) and conductance >= 0.0):
        raise CouplingError(f"{name} conductance={conductance!r} must be finite and >= 0 (s/kg)")
    if not math.isfinite(susceptance):
        raise CouplingError(f"{name} susceptance={susceptance!r} must be finite (s/kg)")


def _validate_partials(frequency_hz, decay_rate):
    f = np.asarray(frequency_hz, dtype=float).reshape(-1)
    sigma = np.asarray(decay_rate, dtype=float).reshape(-1)
    if f.shape != sigma.shape:
        raise CouplingError(f"frequency_hz and decay_rate have different lengths ({len(f)}, {len(sigma)})")
    if not (np.all(np.isfinite(f)) and np.all(f > 0) and np.all(np.isfinite(sigma))):
        raise CouplingError("frequency_hz must be finite and > 0, decay_rate finite")
    return f, sigma


def _validate_course(frequency_hz, decay_rate, harmonic, impedance, admittance, detune_cents):
    f, sigma = _validate_partials(frequency_hz, decay_rate)
    n = np.asarray(harmonic).reshape(-1)
    if n.shape != f.shape or not np.all(n >= 1) or not np.all(n == np.round(n)):
        raise CouplingError(f"harmonic={harmonic!r} must hold one whole number >= 1 per partial")
    if not (math.isfinite(impedance) and impedance > 0):
        raise CouplingError(f"impedance={impedance!r} must be > 0 (kg/s)")
    y = complex(admittance)
    _check_admittance(y.real, y.imag, "bridge")
    cents = np.asarray(detune_cents, dtype=float).reshape(-1)
    if not (1 <= len(cents) <= 3 and np.all(np.isfinite(cents))):
        raise CouplingError(f"detune_cents={detune_cents!r} must give 1 to 3 finite values (one per string)")
    return f, sigma, n.astype(float), cents, y
