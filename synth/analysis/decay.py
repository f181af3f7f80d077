"""The decay law ``sigma(f) = b1 + b3 f**2`` fitted to measured T60s.

Notes
-----
synth's damping (:mod:`synth.damping`) gives every mode the decay rate
``sigma(f) = ln(1000) / T60 = b1 + b3 f**2`` (frequency-independent loss plus
a loss growing as the square of frequency, the form of Chaigne & Askenfelt's
string model [1]_), fixed in a patch by two points: ``t60`` at the
fundamental and ``t60_high`` at ``high_frequency``.  Here b1, b3 >= 0 are
fitted by weighted non-negative least squares (Lawson & Hanson [2]_, via
:func:`scipy.optimize.nnls`) and the two points read off the fitted law.

References
----------
.. [1] A. Chaigne and A. Askenfelt, "Numerical simulations of piano strings",
   J. Acoust. Soc. Am. 95(2), 1112-1118 (1994).
.. [2] C. L. Lawson and R. J. Hanson, *Solving Least Squares Problems*,
   Prentice-Hall (1974), ch. 23 (chapter from memory).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..damping import LN1000
from ..errors import PatchError
from ..modes import frozen_array
from .matching import birge

__all__ = ["DecayFit", "fit_decay"]


@dataclass(frozen=True)
class DecayFit:
    """The decay law ``sigma(f) = b1 + b3 f**2`` (1/s) fitted to measured T60s.

    Attributes
    ----------
    b1 : float >= 0, 1/s
    b3 : float >= 0, s
    b1_sd, b3_sd : float, 1/s and s
        One sigma; NaN for a coefficient held at its bound 0 or not determined.
    fundamental_hz, high_frequency : float, Hz
        The two points of the patch form (``high_frequency`` > ``fundamental_hz``).
    t60, t60_high : float, s
        T60 of the law at those two points (``t60_high <= t60``).
    frequency_hz, t60_s, t60_model_s : ndarray [shape=(K,)]
        The partials used, their measured T60 and the law's.
    """

    b1: float
    b3: float
    b1_sd: float
    b3_sd: float
    fundamental_hz: float
    high_frequency: float
    t60: float
    t60_high: float
    frequency_hz: np.ndarray
    t60_s: np.ndarray
    t60_model_s: np.ndarray

    @property
    def damping(self):
        """The patch's ``damping:`` keys (synth.damping.two_point_t60 reproduces the law from them)."""
        return {"t60": self.t60, "t60_high": self.t60_high, "high_frequency": self.high_frequency}


def fit_decay(frequency_hz, t60_s, *, t60_sd_s=None, fundamental_hz=None, high_frequency=None):
    """Fit ``sigma(f) = ln(1000) / T60 = b1 + b3 f**2`` (b1, b3 >= 0) by weighted least squares.

    Parameters
    ----------
    frequency_hz : array_like [shape=(K,)], Hz
    t60_s : array_like [shape=(K,)], s
        Non-finite or non-positive values are left out.
    t60_sd_s : array_like [shape=(K,)] or None, s
        One sigma; None weighs every partial by its relative error alike.
    fundamental_hz : float or None, Hz
        Where the patch's ``t60`` holds (default: the lowest frequency).
    high_frequency : float or None, Hz
        Where ``t60_high`` holds (default: the highest frequency).

    Returns
    -------
    DecayFit

    Raises
    ------
    PatchError
        No usable T60, or `high_frequency` not above `fundamental_hz`.

    Notes
    -----
    With ``sd(sigma) = ln(1000) sd(T60) / T60**2`` the rows ``[1, f**2] / sd``
    are solved by non-negative least squares (Lawson & Hanson).  Then
    ``t60 = ln(1000) / (b1 + b3 f_1**2)`` and ``t60_high`` likewise at
    `high_frequency`, the two points of :func:`synth.damping.two_point_t60`.

    Examples
    --------
    >>> import numpy as np
    >>> f = np.array([100.0, 200.0, 400.0])
    >>> fit = fit_decay(f, 6.9078 / (0.5 + 1e-5 * f**2))
    >>> round(fit.b1, 3), round(fit.b3 * 1e5, 3), round(fit.t60, 3)
    (0.5, 1.0, 11.513)
    """
    from scipy.optimize import nnls

    f = np.asarray(frequency_hz, dtype=float).reshape(-1)
    t60 = np.asarray(t60_s, dtype=float).reshape(-1)
    if t60.shape != f.shape:
        raise PatchError(f"has {t60.size} values for {f.size} partials", key="t60_s")
    sd = None if t60_sd_s is None else np.asarray(t60_sd_s, dtype=float).reshape(-1)
    use = np.isfinite(t60) & (t60 > 0.0) & np.isfinite(f) & (f > 0.0)
    if sd is not None:
        use &= np.isfinite(sd) & (sd > 0.0)
    if not np.any(use):
        raise PatchError("no partial has a usable T60 (finite, > 0 s): the decay law cannot be fitted", key="t60_s")
    f, t60 = f[use], t60[use]
    sigma = LN1000 / t60
    sigma_sd = sigma * 0.05 if sd is None else LN1000 * sd[use] / t60**2
    f1 = float(f.min()) if fundamental_hz is None else float(fundamental_hz)
    fh = float(f.max()) if high_frequency is None else float(high_frequency)
    scale = max(fh, f1) ** 2  # keeps the two columns of one size
    a = np.column_stack([np.ones_like(f), f**2 / scale]) / sigma_sd[:, None]
    columns = 2 if np.unique(f).size >= 2 else 1  # one frequency: b1 alone
    coef = np.zeros(2)
    coef[:columns] = nnls(a[:, :columns], sigma / sigma_sd)[0]
    free = coef > 0.0
    residual = a @ coef - sigma / sigma_sd
    sds = np.full(2, np.nan)
    n_free = int(np.count_nonzero(free))
    if n_free:
        factor = birge(float(residual @ residual), f.size - n_free, sd is not None)
        cov = np.linalg.pinv(a[:, free].T @ a[:, free]) * factor
        sds[free] = np.sqrt(np.diag(cov))
    b1, b3 = float(coef[0]), float(coef[1]) / scale
    if not fh > f1:
        fh = 2.0 * f1 if high_frequency is None else fh
        if not fh > f1:
            raise PatchError(f"must be above the fundamental ({f1:.6g} Hz)", key="high_frequency")

    def t60_at(x):
        return LN1000 / (b1 + b3 * x * x)

    return DecayFit(
        b1=b1, b3=b3, b1_sd=float(sds[0]), b3_sd=float(sds[1]) / scale,
        fundamental_hz=f1, high_frequency=fh, t60=float(t60_at(f1)), t60_high=float(t60_at(fh)),
        frequency_hz=frozen_array(f), t60_s=frozen_array(t60), t60_model_s=frozen_array(t60_at(f)),
    )
