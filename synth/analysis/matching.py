"""Shared pieces of the model fits: cents, checked partial lists, and assigning partials to model modes.

Notes
-----
A measured partial ``f_i`` is assigned to a model mode ``m_k`` one-to-one,
minimising the sum of squared intervals ``(1200 log2(f_i / (s m_k)))**2``
over the pairs within a tolerance (Hungarian method [1]_, via
:func:`scipy.optimize.linear_sum_assignment`); with a free scale ``s`` the
assignment and ``ln s = sum w_i (ln f_i - ln m_k(i)) / sum w_i`` alternate
from several starting scales (:func:`match_scaled`).

References
----------
.. [1] H. W. Kuhn, "The Hungarian method for the assignment problem", Naval
   Res. Logist. Q. 2, 83-97 (1955).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import PatchError

__all__ = [
    "CENTS_PER_NEPER",
    "MIN_SD_CENTS",
    "FAMILY_TOLERANCE_CENTS",
    "Match",
    "cents",
    "checked_partials",
    "birge",
    "assign_modes",
    "match_scaled",
]

#: Cents per neper (a natural-log frequency ratio of 1).
CENTS_PER_NEPER = 1200.0 / math.log(2.0)
#: Uncertainties below this (cents) are taken as this: no fit weighs one partial infinitely.
MIN_SD_CENTS = 1e-3
#: Default gate (cents): a partial further than this from every model mode is unmatched.
FAMILY_TOLERANCE_CENTS = 100.0


def cents(ratio):
    """Interval (cents) of frequency ratio(s) `ratio`: ``1200 log2(ratio)``.

    >>> round(float(cents(2.0)), 6)
    1200.0
    """
    return CENTS_PER_NEPER * np.log(np.asarray(ratio, dtype=float))


def checked_partials(frequency_hz, frequency_sd_hz, name="frequency_hz"):
    """Measured partials as checked arrays: (f Hz, one sigma in cents, whether sds were given).

    Parameters
    ----------
    frequency_hz : array_like [shape=(N,)], Hz
        Ascending, finite, > 0.
    frequency_sd_hz : array_like [shape=(N,)] or None, Hz
        None gives 1 cent each (equal weights in cents); an sd that is not a
        finite number > 0 is taken as the median of the others.
    name : str
        Key named by the errors.

    Returns
    -------
    f : ndarray [shape=(N,)], Hz
    sd_cents : ndarray [shape=(N,)]
        At least :data:`MIN_SD_CENTS`.
    given : bool

    Raises
    ------
    PatchError
        An empty list, a value that is not a finite number > 0, an unsorted
        list, or sds of another length.
    """
    f = np.asarray(frequency_hz, dtype=float).reshape(-1)
    if f.size == 0:
        raise PatchError("no partials to fit: the list is empty", key=name)
    if not np.all(np.isfinite(f)) or np.any(f <= 0.0):
        raise PatchError("every frequency must be a finite number > 0 Hz", key=name)
    if np.any(np.diff(f) < 0.0):
        raise PatchError("frequencies must be sorted ascending", key=name)
    if frequency_sd_hz is None:
        return f, np.ones_like(f), False
    sd = np.asarray(frequency_sd_hz, dtype=float).reshape(-1)
    if sd.shape != f.shape:
        raise PatchError(f"has {sd.size} values for {f.size} partials", key="frequency_sd_hz")
    valid = np.isfinite(sd) & (sd > 0.0)
    if not np.any(valid):
        return f, np.ones_like(f), False
    sd_cents = np.maximum(CENTS_PER_NEPER * np.where(valid, sd, 1.0) / f, MIN_SD_CENTS)
    return f, np.where(valid, sd_cents, np.median(sd_cents[valid])), True  # unknown: a typical partial's


def birge(chi2, dof, given):
    """Factor on a covariance ``(J^T W J)^-1``: the reduced chi-square ``chi2 / dof``.

    With sds given, at least 1 (the Birge ratio squared: sds that explain the
    scatter are kept, sds that do not are scaled up; common practice); without,
    the residuals alone set the scale (NaN when no degree of freedom is left).
    """
    if dof <= 0:
        return 1.0 if given else math.nan
    reduced = chi2 / dof
    return max(1.0, reduced) if given else reduced


@dataclass(frozen=True)
class Match:
    """Measured partials assigned to scaled model modes (:func:`match_scaled`).

    Attributes
    ----------
    scale : float
        Measured over model frequency.
    member : ndarray [shape=(N,)], int
        Model mode of each measured partial, -1 where none lies within the tolerance.
    residual_cents : ndarray [shape=(N,)]
        Measured minus scaled model (cents); NaN unmatched.
    cost : float
        The robust cost the scale was chosen by (lower is better).
    """

    scale: float
    member: np.ndarray
    residual_cents: np.ndarray
    cost: float


def _assign_members(log_f, log_m, gate):
    """One-to-one assignment of partials to members minimising the sum of squared cents within `gate`."""
    from scipy.optimize import linear_sum_assignment

    member = np.full(log_f.size, -1, dtype=np.int64)
    near = np.flatnonzero((log_m >= log_f.min() - gate / CENTS_PER_NEPER) & (log_m <= log_f.max() + gate / CENTS_PER_NEPER))
    if near.size == 0:
        return member
    c = CENTS_PER_NEPER * (log_f[:, None] - log_m[near][None, :])
    cost = np.where(np.abs(c) <= gate, c * c, 1e12)
    rows, cols = linear_sum_assignment(cost)
    ok = cost[rows, cols] < 1e12
    member[rows[ok]] = near[cols[ok]]
    return member


def assign_modes(frequency_hz, model_hz, *, tolerance_cents=FAMILY_TOLERANCE_CENTS):
    """Mode index of each measured partial (-1 where none lies within `tolerance_cents`), one-to-one.

    Parameters
    ----------
    frequency_hz : array_like [shape=(N,)], Hz
    model_hz : array_like [shape=(M,)], Hz
        Ascending.
    tolerance_cents : float > 0

    Returns
    -------
    ndarray [shape=(N,)], int

    Notes
    -----
    The assignment minimises the sum of squared cents over the pairs within
    the tolerance (Hungarian method, [1]_).

    Examples
    --------
    >>> assign_modes([100.0, 150.0, 301.0], [100.0, 200.0, 300.0]).tolist()
    [0, -1, 2]
    """
    return _assign_members(np.log(np.asarray(frequency_hz, dtype=float)), np.log(np.asarray(model_hz, dtype=float)),
                           float(tolerance_cents))


def match_scaled(frequency_hz, model_hz, *, sd_cents=None, tolerance_cents=FAMILY_TOLERANCE_CENTS, scales=(),
                 scale_range=None):
    """Scale `model_hz` onto measured partials and assign each partial to one model mode.

    Parameters
    ----------
    frequency_hz : array_like [shape=(N,)], Hz
        Measured, ascending.
    model_hz : array_like [shape=(M,)], Hz
        Model modes, ascending.
    sd_cents : array_like [shape=(N,)] or None
        One sigma of each partial (weights of the scale).
    tolerance_cents : float > 0
        Gate of the assignment.
    scales : sequence of float
        Scales to try besides those that put one of the lowest four partials
        on one of the lowest four modes.
    scale_range : (float, float) or None
        Only trial scales in this range are tried (a calibration knows the
        scale to within a factor of two; a ratio family does not).

    Returns
    -------
    Match or None
        ``scale`` (measured / model), ``member`` (mode index of each partial,
        -1 unmatched), ``residual_cents`` (NaN unmatched), ``cost``; None
        when no partial lies within the tolerance at any trial scale.

    Notes
    -----
    Each trial scale alternates a one-to-one assignment (Hungarian method on
    squared cents, [1]_) and the weighted mean of ``ln f_i - ln m_k``; the
    trial kept minimises ``sum min((r_i / tol)**2, 1)`` plus 0.5 per model
    mode below the lowest assigned one (a scale that leaves the lowest modes
    silent is the less likely).

    Examples
    --------
    >>> match = match_scaled([220.0, 606.4, 1300.0], [1.0, 2.7565, 5.4039])  # thin-bar ratios
    >>> round(match.scale, 2), match.member.tolist()
    (219.99, [0, 1, -1])
    """
    log_f = np.log(np.asarray(frequency_hz, dtype=float))
    log_m = np.log(np.asarray(model_hz, dtype=float))
    w = np.ones_like(log_f) if sd_cents is None else 1.0 / np.asarray(sd_cents, dtype=float) ** 2
    tol = float(tolerance_cents)
    trials = {round(float(log_f[i] - log_m[k]), 12) for i in range(min(4, log_f.size)) for k in range(min(4, log_m.size))}
    trials |= {round(math.log(s), 12) for s in scales}
    if scale_range is not None:
        low, high = (math.log(x) for x in scale_range)
        trials = {t for t in trials if low <= t <= high}
    best = None
    for log_s in sorted(trials):
        member = None
        for _ in range(8):
            new = _assign_members(log_f, log_m + log_s, tol)
            on = new >= 0
            if not np.any(on):
                break
            log_s = float(np.sum(w[on] * (log_f[on] - log_m[new[on]])) / np.sum(w[on]))
            if member is not None and np.array_equal(new, member):
                break
            member = new
        member = _assign_members(log_f, log_m + log_s, tol)
        on = member >= 0
        if not np.any(on):
            continue
        r = np.where(on, CENTS_PER_NEPER * (log_f - log_m[np.maximum(member, 0)] - log_s), np.nan)
        cost = float(np.where(on, (r / tol) ** 2, 1.0).sum()) + 0.5 * int(member[on].min())
        if best is None or cost < best.cost - 1e-9:
            best = Match(math.exp(log_s), member, r, cost)
    return best
