"""Per-mode decay times: three damping laws.

A mode's amplitude decays as ``exp(-sigma t)``; ``T60 = ln(1000) / sigma``.

* **two-point** (the default): ``sigma(f) = b1 + b3 f**2`` (frequency-independent
  loss plus a loss growing with the square of frequency), the form of the
  damping terms in Chaigne & Askenfelt's string model [1]_, fixed by the T60 at
  the fundamental and at one high frequency.
* **loss factor** (constant eta, hysteretic or structural damping): a complex
  stiffness ``k (1 + i eta)`` gives ``omega**2 = omega_0**2 (1 + i eta)``, so
  ``omega = omega_0 (1 + i eta / 2)`` to first order and ``sigma = eta omega_0
  / 2 = pi eta f``: ``T60 = 3 ln(10) / (pi eta f) = 2.1988 / (eta f)``, the
  same Q = 1 / eta at every frequency.  Wood along the grain and most metals
  follow it closely [2]_, [3]_.
* **Rayleigh** (proportional viscous damping ``C = alpha M + beta K``): the
  modal damping ratio is ``zeta = alpha / (2 omega) + beta omega / 2``, so
  ``sigma = zeta omega = (alpha + beta omega**2) / 2`` [4]_.

Each law's decay time is capped at :data:`MAX_T60_S` (a loss factor or a
Rayleigh alpha of 0 would give the lowest modes unbounded decay times).

References
----------
.. [1] A. Chaigne and A. Askenfelt, "Numerical simulations of piano strings",
   J. Acoust. Soc. Am. 95(2), 1112-1118 (1994).
.. [2] L. Cremer, M. Heckl and E. E. Ungar, *Structure-Borne Sound*, 2nd ed.,
   Springer (1988), ch. 3 (loss factor; tables of material loss factors).
.. [3] I. Bremaud, "Acoustical properties of wood in string instruments
   soundboards and tuned idiophones", J. Acoust. Soc. Am. 131(1), 807-818
   (2012).
.. [4] R. W. Clough and J. Penzien, *Dynamics of Structures*, 2nd ed.,
   McGraw-Hill (1993), sec. 12-5 (Rayleigh damping; from memory).
"""
from __future__ import annotations

import math

import numpy as np

__all__ = [
    "LN1000",
    "MAX_T60_S",
    "t60_to_sigma",
    "sigma_to_t60",
    "two_point_t60",
    "loss_factor_t60",
    "rayleigh_t60",
]

LN1000 = math.log(1000.0)  # 60 dB in nepers: T60 = LN1000 / sigma
#: Longest decay time (s) any law gives a mode, as the damping section's t60 allows.
MAX_T60_S = 3600.0


def t60_to_sigma(t60_s):
    """Amplitude decay rate sigma (1/s) of a T60 (s)."""
    return LN1000 / np.asarray(t60_s, dtype=float)


def sigma_to_t60(sigma):
    """T60 (s) of an amplitude decay rate sigma (1/s)."""
    return LN1000 / np.asarray(sigma, dtype=float)


def two_point_t60(frequency_hz, *, t60, fundamental_hz, t60_high=None, high_frequency=None):
    """T60 (s) of every mode from T60 at the fundamental and at a high frequency.

    Parameters
    ----------
    frequency_hz : array_like, Hz
    t60 : float > 0, s
        Decay time at `fundamental_hz`.
    fundamental_hz : float > 0, Hz
    t60_high : float > 0 or None, s
        Decay time at `high_frequency`; None gives every mode `t60`.
    high_frequency : float > fundamental_hz, Hz

    Returns
    -------
    ndarray, s

    Notes
    -----
    ``b3 = (sigma_h - sigma_1) / (f_h**2 - f_1**2)``, ``b1 = sigma_1 - b3 f_1**2``.
    When `t60_high` exceeds `t60` the loss falls with frequency; sigma is then
    kept no lower than a fiftieth of sigma_1 (never negative).

    >>> [round(float(x), 3) for x in two_point_t60([100, 1000], t60=2.0, fundamental_hz=100, t60_high=0.5, high_frequency=1000)]
    [2.0, 0.5]
    """
    f = np.asarray(frequency_hz, dtype=float)
    sigma_1 = LN1000 / t60
    if t60_high is None:
        return np.full(f.shape, float(t60))
    sigma_h = LN1000 / t60_high
    b3 = (sigma_h - sigma_1) / (high_frequency**2 - fundamental_hz**2)
    b1 = sigma_1 - b3 * fundamental_hz**2
    sigma = np.maximum(b1 + b3 * f**2, sigma_1 / 50.0)
    return LN1000 / sigma


def loss_factor_t60(frequency_hz, *, loss_factor):
    """T60 (s) of every mode under a constant loss factor eta: ``ln(1000) / (pi eta f)``.

    Parameters
    ----------
    frequency_hz : array_like, Hz
    loss_factor : float > 0, dimensionless
        eta = 1 / Q (the energy lost per radian of a cycle over the energy stored).

    Returns
    -------
    ndarray, s
        At most :data:`MAX_T60_S`.

    >>> [round(float(x), 4) for x in loss_factor_t60([100.0, 1000.0], loss_factor=0.01)]
    [2.1988, 0.2199]
    """
    f = np.asarray(frequency_hz, dtype=float)
    sigma = math.pi * loss_factor * f
    with np.errstate(divide="ignore"):
        return np.minimum(LN1000 / sigma, MAX_T60_S)


def rayleigh_t60(frequency_hz, *, alpha, beta):
    """T60 (s) of every mode under Rayleigh damping ``C = alpha M + beta K``.

    Parameters
    ----------
    frequency_hz : array_like, Hz
    alpha : float >= 0, 1/s
        Mass-proportional coefficient.
    beta : float >= 0, s
        Stiffness-proportional coefficient.

    Returns
    -------
    ndarray, s
        ``ln(1000) / sigma`` with ``sigma = (alpha + beta (2 pi f)**2) / 2``,
        at most :data:`MAX_T60_S`.

    >>> [round(float(x), 4) for x in rayleigh_t60([0.0, 1000.0], alpha=2.0, beta=0.0)]
    [6.9078, 6.9078]
    """
    omega = 2.0 * math.pi * np.asarray(frequency_hz, dtype=float)
    sigma = 0.5 * (alpha + beta * omega * omega)
    with np.errstate(divide="ignore"):
        return np.minimum(LN1000 / sigma, MAX_T60_S)
