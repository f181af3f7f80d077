"""Per-mode decay times from a two-point T60 specification.

The decay rate follows ``sigma(f) = b1 + b3 f**2`` (frequency-independent loss
plus a loss growing with the square of frequency), the form of the damping
terms in Chaigne & Askenfelt's string model, fixed by the T60 at the
fundamental and at one high frequency.  ``T60 = ln(1000) / sigma``.

References
----------
.. [1] A. Chaigne and A. Askenfelt, "Numerical simulations of piano strings",
   J. Acoust. Soc. Am. 95(2), 1112-1118 (1994).
"""
from __future__ import annotations

import math

import numpy as np

__all__ = ["LN1000", "t60_to_sigma", "sigma_to_t60", "two_point_t60"]

LN1000 = math.log(1000.0)  # 60 dB in nepers: T60 = LN1000 / sigma


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
