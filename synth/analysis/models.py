"""Physical models fitted to measured partials: a stiff string, a decay law, a resonator's ratio family.

The input is a list of partials as the estimator gives them (frequencies in
ascending order, T60s, with one-sigma uncertainties), passed as plain arrays.

Notes
-----
*Stiff string* (Fletcher 1964): ``f_n = n f0 sqrt(1 + B n**2)``.  Partial
numbers are assigned with this law, never by rounding ``f / f0`` (harmonic
tracking loses count on a stiff string, where partial 30 of B = 1e-3 lies
above the 31st harmonic; Rigaud, David & Daudet [1]_ search with the
inharmonic law for the same reason).  The search starts from a few candidate
combs (a low partial taken as tooth 1..4, at a few trial B) and grows each
over the partials from the lowest up, refitting as it goes with the linear
form ``(f_n / n)**2 = f0**2 + f0**2 B n**2``; the best comb (fewest partials
off it, fewest empty teeth) is then polished by Gauss-Newton on the residuals
in cents.

*Decay* (the law of :mod:`synth.damping`, fitted in :mod:`.decay`):
``sigma(f) = ln(1000) / T60 = b1 + b3 f**2`` with b1, b3 >= 0, by weighted
non-negative least squares.

*Ratio families*: the modes of synth's own resonator models (free-free thin
bar, ideal circular membrane, free circular thin plate) with one free scale,
fitted by least squares in log frequency after a one-to-one assignment
(Hungarian method [3]_ on squared cents, :mod:`.matching`) of measured
partials to family members.

Uncertainties come from the weighted normal equations, ``cov = (J^T W J)^-1``,
scaled by the reduced chi-square where that exceeds 1 (the Birge ratio:
common practice), or by the residual variance when no uncertainties are given.

References
----------
.. [1] F. Rigaud, B. David and L. Daudet, "A parametric model and estimation
   techniques for the inharmonicity and tuning of the piano", J. Acoust. Soc.
   Am. 133(5), 3107-3118 (2013), doi:10.1121/1.4799806 (volume and issue from
   memory; title, pages and DOI seen in a copy of the paper).
.. [2] H. Fletcher, "Normal vibration frequencies of a stiff piano string",
   J. Acoust. Soc. Am. 36(1), 203-209 (1964).
.. [3] H. W. Kuhn, "The Hungarian method for the assignment problem", Naval
   Res. Logist. Q. 2, 83-97 (1955) (via :func:`scipy.optimize.linear_sum_assignment`).
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from ..errors import PatchError
from ..modes import frozen_array
from .decay import DecayFit, fit_decay
from .matching import (
    CENTS_PER_NEPER,
    FAMILY_TOLERANCE_CENTS,
    birge,
    cents,
    checked_partials,
    match_scaled,
)

__all__ = [
    "FAMILIES",
    "StringFit",
    "DecayFit",
    "FamilyFit",
    "fit_string",
    "fit_decay",
    "string_geometry",
    "fit_family",
    "family_modes",
    "STRING_TOLERANCE_CENTS",
    "FAMILY_TOLERANCE_CENTS",
]

#: Resonator ratio families :func:`fit_family` knows.
FAMILIES = ("bar", "membrane", "plate")
#: Default gate (cents): a partial further than this from every tooth is off the comb.
STRING_TOLERANCE_CENTS = 30.0
#: Cost of an empty tooth of the comb (a partial off the comb costs 1): halving f0 empties every other tooth.
EMPTY_TOOTH_COST = 0.5
#: Trial inharmonicities and tooth numbers that start the comb search.
_TRIAL_B = (0.0, 1e-4, 1e-3, 1e-2)
_TRIAL_TEETH = 4
_TRIAL_PARTIALS = 4


# --------------------------------------------------------------------------
# Stiff string.


@dataclass(frozen=True)
class StringFit:
    """A stiff-string comb ``f_n = n f0 sqrt(1 + B n**2)`` fitted to measured partials.

    Attributes
    ----------
    f0_hz, f0_sd_hz : float, Hz
        The ideal (flexible-string) fundamental ``sqrt(T / mu) / (2 L)`` and its one sigma.
    inharmonicity, inharmonicity_sd : float
        B and its one sigma.
    fundamental_hz : float, Hz
        Partial n = 1 of the comb, ``f0 sqrt(1 + B)``: the patch's pitch.
    frequency_hz : ndarray [shape=(N,)], Hz
        The measured partials, as given.
    partial_number : ndarray [shape=(N,)], int
        n of each partial; 0 where it is off the comb.
    model_hz, residual_cents : ndarray [shape=(N,)]
        The comb's frequency and measured minus model (cents); NaN off the comb.
    matched : ndarray [shape=(N,)], bool
    unmatched : tuple of int
        Indexes of the partials off the comb (spurious, or another object's).
    missing : tuple of int
        Teeth n = 1 .. the highest matched n with no partial.
    rms_cents : float
        Root mean square of the matched residuals.
    decay : DecayFit or None
        The decay law of the matched partials, when T60s were given.
    """

    f0_hz: float
    f0_sd_hz: float
    inharmonicity: float
    inharmonicity_sd: float
    fundamental_hz: float
    frequency_hz: np.ndarray
    partial_number: np.ndarray
    model_hz: np.ndarray
    residual_cents: np.ndarray
    matched: np.ndarray
    unmatched: tuple
    missing: tuple
    rms_cents: float
    decay: DecayFit | None = None

    @property
    def damping(self):
        """The patch's ``damping:`` keys from the decay law (None without T60s)."""
        return None if self.decay is None else self.decay.damping


def _tooth(f, f0, b):
    """Continuous partial number of frequencies `f` on the comb: n**2 + B n**4 = (f / f0)**2."""
    x = (f / f0) ** 2
    return np.sqrt(2.0 * x / (1.0 + np.sqrt(1.0 + 4.0 * b * x)))  # cancellation-free root


def _comb(n, f0, b):
    return n * f0 * np.sqrt(1.0 + b * n * n)


def _assign_teeth(f, f0, b, gate):
    """(n, residual cents, on): nearest tooth of each partial, one partial per tooth (the closest)."""
    n = np.maximum(1, np.rint(_tooth(f, f0, b))).astype(np.int64)
    c = cents(f / _comb(n, f0, b))
    gate = np.broadcast_to(gate, f.shape)
    on = np.abs(c) <= gate
    order = np.argsort(np.abs(c))
    taken = set()
    for i in order:
        if on[i]:
            if n[i] in taken:
                on[i] = False
            taken.add(n[i])
    return n, c, on


def _linear_comb(f, n, sd_cents):
    """(f0, B) from the weighted line (f / n)**2 = f0**2 + f0**2 B n**2 (B held >= 0)."""
    y = (f / n) ** 2
    w = 1.0 / (y * sd_cents) ** 2  # sd(y) / y = 2 sd(f) / f
    x = n.astype(float) ** 2
    if np.unique(n).size >= 2:
        sw, sx, sy = w.sum(), (w * x).sum(), (w * y).sum()
        sxx, sxy = (w * x * x).sum(), (w * x * y).sum()
        det = sw * sxx - sx * sx
        if det > 0.0:
            slope = (sw * sxy - sx * sy) / det
            intercept = (sy - slope * sx) / sw
            if slope >= 0.0 and intercept > 0.0:
                return math.sqrt(intercept), slope / intercept
    return math.sqrt((w * y).sum() / w.sum()), 0.0


def _grow(f, sd, f0, b, tol):
    """Refit a comb over the partials from the lowest up (frequency limit x 1.25 a step)."""
    limit = _comb(4.5, f0, b)
    while True:
        inside = f <= limit
        for _ in range(2):
            n, c, _ = _assign_teeth(f[inside], f0, b, 0.0)
            spacing = cents((n + 1.0) / n)  # about the tooth spacing at n
            for gate in (0.45 * spacing, tol):
                n, c, on = _assign_teeth(f[inside], f0, b, gate)
                if np.count_nonzero(on) >= 1:
                    f0, b = _linear_comb(f[inside][on], n[on], sd[inside][on])
        if limit >= f[-1]:
            return f0, b
        limit *= 1.25


def _comb_cost(f, f0, b, tol):
    n, c, on = _assign_teeth(f, f0, b, tol)
    off = np.where(on, (c / tol) ** 2, 1.0).sum()
    top = int(n[on].max()) if np.any(on) else 0
    return off + EMPTY_TOOTH_COST * (top - np.count_nonzero(on))


def _polish(f, n, sd_cents, f0, b):
    """Gauss-Newton on cents: (f0, B, covariance of (ln f0, B) without the chi-square factor, chi2)."""
    n = n.astype(float)
    fit_b = np.unique(n).size >= 2
    for _ in range(20):
        r = (cents(f / _comb(n, f0, b))) / sd_cents
        jac = np.column_stack([np.full_like(n, CENTS_PER_NEPER), CENTS_PER_NEPER * 0.5 * n * n / (1.0 + b * n * n)])
        jac = (jac if fit_b else jac[:, :1]) / sd_cents[:, None]
        step = np.linalg.lstsq(jac, r, rcond=None)[0]
        f0 *= math.exp(step[0])
        if fit_b:
            b = max(0.0, b + step[1])
        if np.all(np.abs(step) < 1e-13):
            break
    r = cents(f / _comb(n, f0, b)) / sd_cents
    jac = np.column_stack([np.full_like(n, CENTS_PER_NEPER), CENTS_PER_NEPER * 0.5 * n * n / (1.0 + b * n * n)]) / sd_cents[:, None]
    if not fit_b or b == 0.0:  # f0 alone (B held at 0)
        return f0, b, np.array([[1.0 / (jac[:, 0] @ jac[:, 0]), 0.0], [0.0, math.nan]]), float(r @ r), 1
    return f0, b, np.linalg.pinv(jac.T @ jac), float(r @ r), 2


def fit_string(frequency_hz, *, frequency_sd_hz=None, t60_s=None, t60_sd_s=None, pitch_hint_hz=None,
               tolerance_cents=STRING_TOLERANCE_CENTS):
    """Fit a stiff string's comb ``f_n = n f0 sqrt(1 + B n**2)`` and its decay law to measured partials.

    Parameters
    ----------
    frequency_hz : array_like [shape=(N,)], Hz
        Measured partials, ascending; some may be missing (the fundamental
        too) and some may not belong to the string.
    frequency_sd_hz : array_like [shape=(N,)] or None, Hz
        One sigma of each; None weighs every partial alike (in cents).
    t60_s, t60_sd_s : array_like [shape=(N,)] or None, s
        Measured T60s and their one sigma: the decay law of the matched partials.
    pitch_hint_hz : float or None, Hz
        The note's pitch (partial n = 1), if known: only combs within a
        semitone of it are tried.
    tolerance_cents : float > 0
        A partial further than this from every tooth is off the comb.

    Returns
    -------
    StringFit

    Raises
    ------
    PatchError
        No partials, bad values, or no comb holds two partials.

    Notes
    -----
    Weighted least squares on ``r_i = 1200 log2(f_i / f_model(n_i)) / sd_i``
    (cents), with ``d r / d ln f0 = 1200 / ln 2`` and
    ``d r / d B = (1200 / ln 2) n**2 / (2 (1 + B n**2))``; B is held >= 0.
    The comb chosen minimises ``sum min((r_i / tol)**2, 1) + 0.5 (empty teeth
    below the highest matched one)``: a comb at f0 / 2 matches every partial
    but leaves every other tooth empty.

    Examples
    --------
    >>> import numpy as np
    >>> n = np.array([1, 2, 3, 5, 6, 7, 8])
    >>> fit = fit_string(n * 110.0 * np.sqrt(1 + 4e-4 * n**2))
    >>> round(fit.f0_hz, 6), round(fit.inharmonicity * 1e4, 6), fit.missing
    (110.0, 4.0, (4,))
    """
    f, sd, given = checked_partials(frequency_hz, frequency_sd_hz)
    tol = float(tolerance_cents)
    candidates = set()
    for i in range(min(_TRIAL_PARTIALS, f.size)):
        for k in range(1, _TRIAL_TEETH + 1):
            for b in _TRIAL_B:
                f0 = f[i] / (k * math.sqrt(1.0 + b * k * k))
                if pitch_hint_hz is not None and abs(cents(f0 * math.sqrt(1.0 + b) / pitch_hint_hz)) > 100.0:
                    continue
                candidates.add((f0, b))
    if pitch_hint_hz is not None:
        candidates.add((float(pitch_hint_hz), 0.0))
    best = None
    for f0, b in sorted(candidates):
        f0, b = _grow(f, sd, f0, b, tol)
        cost = _comb_cost(f, f0, b, tol)
        if best is None or cost < best[0] - 1e-9:
            best = (cost, f0, b)
    _, f0, b = best
    n, c, on = _assign_teeth(f, f0, b, tol)
    if np.count_nonzero(on) < 2:
        raise PatchError(f"no stiff-string comb holds two of these {f.size} partials within {tol:g} cents: "
                         "not a string, or give the note's pitch", key="frequency_hz")
    f0, b, cov, chi2, n_par = _polish(f[on], n[on], sd[on], f0, b)
    n, c, on = _assign_teeth(f, f0, b, tol)  # the polished comb's assignment
    f0, b, cov, chi2, n_par = _polish(f[on], n[on], sd[on], f0, b)
    cov = cov * birge(chi2, int(np.count_nonzero(on)) - n_par, given)
    model = np.where(on, _comb(n, f0, b), np.nan)
    residual = np.where(on, cents(f / np.where(on, model, 1.0)), np.nan)
    top = int(n[on].max())
    decay = None
    if t60_s is not None:
        t60 = _per_partial(t60_s, f, "t60_s")
        t60_sd = None if t60_sd_s is None else _per_partial(t60_sd_s, f, "t60_sd_s")[on]
        decay = fit_decay(f[on], t60[on], t60_sd_s=t60_sd, fundamental_hz=float(f0 * math.sqrt(1.0 + b)))
    return StringFit(
        f0_hz=float(f0),
        f0_sd_hz=float(f0 * math.sqrt(cov[0, 0])),
        inharmonicity=float(b),
        inharmonicity_sd=float(math.sqrt(cov[1, 1])) if np.isfinite(cov[1, 1]) else math.nan,
        fundamental_hz=float(f0 * math.sqrt(1.0 + b)),
        frequency_hz=frozen_array(f),
        partial_number=frozen_array(np.where(on, n, 0), dtype=np.int64),
        model_hz=frozen_array(model),
        residual_cents=frozen_array(residual),
        matched=frozen_array(on, dtype=bool),
        unmatched=tuple(int(i) for i in np.flatnonzero(~on)),
        missing=tuple(k for k in range(1, top + 1) if k not in set(n[on].tolist())),
        rms_cents=float(np.sqrt(np.nanmean(residual**2))),
        decay=decay,
    )


def _per_partial(values, f, key):
    """`values` as a float array with one value per partial (PatchError naming `key` otherwise)."""
    array = np.asarray(values, dtype=float).reshape(-1)
    if array.shape != f.shape:
        raise PatchError(f"has {array.size} values for {f.size} partials", key=key)
    return array


def string_geometry(*, f0_hz, inharmonicity, length, density, youngs_modulus, ends="pinned"):
    """The solid round string (diameter, tension) with a fitted f0 and B.

    Parameters
    ----------
    f0_hz : float > 0, Hz
        The comb's f0 (:attr:`StringFit.f0_hz`).
    inharmonicity : float > 0
        B.
    length : float > 0, m
        Speaking length.
    density : float > 0, kg/m^3
    youngs_modulus : float > 0, Pa
    ends : {"pinned", "clamped"}
        As the patch's ``resonator.ends``.  Clamped ends raise every partial
        to the exact clamped law ``f_n = f0 nu_n sqrt(1 + B nu_n**2)``
        (:func:`synth.resonators.string_clamped.clamped_mode_numbers`): the
        comb's partial 1 is the string's, from which its ``sqrt(T / mu) / (2 L)``.

    Returns
    -------
    diameter : float, m
    tension : float, N

    Raises
    ------
    PatchError
        A value that is not > 0 (B = 0 is an ideal string: any diameter fits).

    Notes
    -----
    With ``mu = rho pi d**2 / 4`` and ``T = 4 L**2 mu f0**2 = pi rho L**2 f0**2 d**2``,
    ``B = pi**3 E d**4 / (64 T L**2) = pi**2 E d**2 / (64 rho L**4 f0**2)``, so

    ``d = (8 L**2 f0 / pi) sqrt(B rho / E)``,  ``T = pi rho L**2 f0**2 d**2``.

    These are :mod:`synth.resonators.string`'s definitions, so a patch with
    this diameter and tension sounds the fitted comb.

    Examples
    --------
    >>> d, t = string_geometry(f0_hz=110.0, inharmonicity=4e-4, length=1.0, density=7850.0, youngs_modulus=200e9)
    >>> round(d * 1e3, 4), round(t, 2)
    (1.1099, 367.6)
    """
    values = {"f0_hz": f0_hz, "inharmonicity": inharmonicity, "length": length, "density": density,
              "youngs_modulus": youngs_modulus}
    for key, value in values.items():
        try:
            number = float(value)
        except (TypeError, ValueError):
            number = math.nan
        if not (math.isfinite(number) and number > 0):
            why = " (B = 0 is an ideal string: stiffness does not fix its diameter)" if key == "inharmonicity" else ""
            raise PatchError(f"must be a number > 0, got {value!r}{why}", key=key)
    if ends not in ("pinned", "clamped"):
        raise PatchError(f"must be pinned or clamped, got {ends!r}", key="ends")
    f0, b, length, density, youngs_modulus = (float(v) for v in values.values())
    if ends == "clamped":  # the comb's partial 1, f0 sqrt(1 + B), is the clamped string's f0 nu_1 sqrt(1 + B nu_1^2)
        from ..resonators.string_clamped import clamped_mode_numbers

        nu = float(clamped_mode_numbers([1], b)[0])
        f0 *= math.sqrt(1.0 + b) / (nu * math.sqrt(1.0 + b * nu * nu))
    diameter = 8.0 * length**2 * f0 / math.pi * math.sqrt(b * density / youngs_modulus)
    tension = math.pi * density * length**2 * f0**2 * diameter**2
    return diameter, tension


# --------------------------------------------------------------------------
# Ratio families.


@functools.lru_cache(maxsize=32)
def _family_solution(family, n_modes, poisson_ratio):
    from ..patch import patch_from_mapping
    from ..resonators import resonator_module

    resonator = {
        "bar": {"type": "bar", "theory": "euler-bernoulli", "supports": "free-free", "length": 1.0,
                "width": 0.01, "thickness": 0.001, "material": "steel"},
        "membrane": {"type": "membrane", "shape": "circle", "radius": 1.0, "tension": 1000.0, "areal_density": 1.0},
        "plate": {"type": "plate", "shape": "circle", "edges": "free", "radius": 1.0, "thickness": 0.001,
                  "material": {"density": 1000.0, "youngs_modulus": 1e9, "poisson_ratio": poisson_ratio}},
    }[family]
    spec = patch_from_mapping({"name": f"{family}-family", "resonator": resonator}).resonator
    solution = resonator_module(spec.TYPE).solve(spec, n_modes)
    return np.asarray(solution.frequency_hz, dtype=float), tuple(solution.labels)


def family_modes(family, n_modes, *, poisson_ratio=None):
    """Ratios to the lowest mode and labels of the first `n_modes` modes of a family.

    Parameters
    ----------
    family : {"bar", "membrane", "plate"}
        Free-free thin (Euler-Bernoulli) bar, ideal circular membrane (each
        degenerate pair once), free circular thin plate.
    n_modes : int >= 1
    poisson_ratio : float or None
        The plate's (default 0.3); the others do not depend on it.

    Returns
    -------
    ratio : ndarray [shape=(M,)]
        Ascending, the first 1 (M may be below `n_modes` where a model stops).
    labels : tuple of str [len M]
        As synth's reports label the modes (``B1``, ``(0,1)``, ``(2,0)``).

    Examples
    --------
    >>> ratio, labels = family_modes("bar", 3)
    >>> [round(float(r), 4) for r in ratio], labels
    ([1.0, 2.7565, 5.4039], ('B1', 'B2', 'B3'))
    """
    if family not in FAMILIES:
        raise PatchError(f"unknown family {family!r} (known: {', '.join(FAMILIES)})", key="family")
    nu = 0.3 if poisson_ratio is None or family != "plate" else float(poisson_ratio)
    if not -1.0 < nu <= 0.5:
        raise PatchError(f"must be > -1 and <= 0.5 for a plate, got {poisson_ratio!r}", key="poisson_ratio")
    frequency, labels = _family_solution(family, int(n_modes), nu)
    return frequency / frequency[0], labels


@dataclass(frozen=True)
class FamilyFit:
    """A resonator's ratio family, scaled onto measured partials.

    Attributes
    ----------
    family : str
        ``"bar"``, ``"membrane"`` or ``"plate"``.
    poisson_ratio : float or None
        The plate's; None for the others.
    scale_hz, scale_sd_hz : float, Hz
        Frequency of the family's lowest mode at the fitted scale, and its one sigma.
    frequency_hz : ndarray [shape=(N,)], Hz
        The measured partials.
    labels : tuple of str [len N]
        Family member of each partial ("" where unmatched).
    model_hz, residual_cents : ndarray [shape=(N,)]
        Scaled member frequency and measured minus model (cents); NaN unmatched.
    matched : ndarray [shape=(N,)], bool
    unmatched : tuple of int
        Indexes of partials no member claims within the tolerance.
    missing : tuple of str
        Members between the lowest and the highest matched one with no partial.
    family_hz : ndarray [shape=(M,)], Hz
    family_labels : tuple of str [len M]
        The members up to the highest partial, scaled.
    rms_cents : float
    """

    family: str
    poisson_ratio: float | None
    scale_hz: float
    scale_sd_hz: float
    frequency_hz: np.ndarray
    labels: tuple
    model_hz: np.ndarray
    residual_cents: np.ndarray
    matched: np.ndarray
    unmatched: tuple
    missing: tuple
    family_hz: np.ndarray
    family_labels: tuple
    rms_cents: float


#: Most family members computed for a fit.
MAX_FAMILY_MODES = 400


def fit_family(frequency_hz, *, family, frequency_sd_hz=None, poisson_ratio=None,
               tolerance_cents=FAMILY_TOLERANCE_CENTS):
    """Fit a resonator's ratio family (one free scale) to measured partials.

    Parameters
    ----------
    frequency_hz : array_like [shape=(N,)], Hz
        Measured partials, ascending.
    family : {"bar", "membrane", "plate"}
        See :func:`family_modes`.
    frequency_sd_hz : array_like [shape=(N,)] or None, Hz
        One sigma; None weighs every partial alike (in cents).
    poisson_ratio : float or None
        The plate's (default 0.3).
    tolerance_cents : float > 0
        A partial further than this from every member is unmatched.

    Returns
    -------
    FamilyFit

    Raises
    ------
    PatchError
        Unknown family, bad frequencies, or no partial near any member.

    Notes
    -----
    ``ln s = sum_i w_i (ln f_i - ln r_k(i)) / sum_i w_i`` over the matched
    pairs (see :func:`match_scaled`), ``w_i = 1 / sd_i**2`` (cents);
    ``var(ln s) = 1 / sum w_i`` times the chi-square factor.

    Examples
    --------
    >>> fit = fit_family([200.0, 551.3, 1080.8], family="bar")
    >>> round(fit.scale_hz, 2), fit.labels, fit.missing
    (200.0, ('B1', 'B2', 'B3'), ())
    """
    f, sd, given = checked_partials(frequency_hz, frequency_sd_hz)
    if family not in FAMILIES:
        raise PatchError(f"unknown family {family!r} (known: {', '.join(FAMILIES)})", key="family")
    n = 16
    while True:
        ratio, labels = family_modes(family, n, poisson_ratio=poisson_ratio)
        need = f[-1] / f[0] * ratio[min(3, ratio.size - 1)] * 2.0 ** (tolerance_cents / 1200.0)
        if ratio[-1] >= need or ratio.size < n or n >= MAX_FAMILY_MODES:
            break
        n = min(2 * n, MAX_FAMILY_MODES)
    match = match_scaled(f, ratio, sd_cents=sd, tolerance_cents=tolerance_cents)
    if match is None:
        raise PatchError(f"no partial lies within {tolerance_cents:g} cents of the {family} family", key="frequency_hz")
    on = match.member >= 0
    w = 1.0 / sd[on] ** 2
    r = match.residual_cents[on]
    factor = birge(float(np.sum(w * r * r)), int(on.sum()) - 1, given)
    scale_sd = match.scale * math.sqrt(factor / w.sum()) / CENTS_PER_NEPER if np.isfinite(factor) else math.nan
    member = match.member
    model = np.where(on, match.scale * ratio[np.maximum(member, 0)], np.nan)
    used = set(member[on].tolist())
    lo, hi = int(member[on].min()), int(member[on].max())
    shown = ratio * match.scale <= f[-1] * 2.0 ** (tolerance_cents / 1200.0)
    return FamilyFit(
        family=family,
        poisson_ratio=(0.3 if poisson_ratio is None else float(poisson_ratio)) if family == "plate" else None,
        scale_hz=float(match.scale),
        scale_sd_hz=float(scale_sd),
        frequency_hz=frozen_array(f),
        labels=tuple(labels[k] if k >= 0 else "" for k in member),
        model_hz=frozen_array(model),
        residual_cents=frozen_array(match.residual_cents),
        matched=frozen_array(on, dtype=bool),
        unmatched=tuple(int(i) for i in np.flatnonzero(~on)),
        missing=tuple(labels[k] for k in range(lo, hi + 1) if k not in used),
        family_hz=frozen_array(ratio[shown] * match.scale),
        family_labels=tuple(label for label, s in zip(labels, shown) if s),
        rms_cents=float(np.sqrt(np.mean(r * r))),
    )
