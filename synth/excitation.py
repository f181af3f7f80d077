"""Modal weights of a pluck, a strike or an impulse at a point.

With mode shapes phi_m scaled to a common modal mass, a point excitation puts
into mode m (displacement at the pickup, up to one common factor):

* pluck (released from a static deflection, zero velocity):
  ``phi_m(x0) phi_m(xp) / omega_m**2``, sounding as a cosine;
* strike (a velocity impulse through a contact of duration tau):
  ``phi_m(x0) phi_m(xp) / omega_m * H(f_m)``, sounding as a sine, where
  ``H(f) = |cos(pi f tau)| / |1 - (2 f tau)**2|`` is the spectrum of a
  half-sine contact force relative to its value at 0 Hz (used through its
  notch-free envelope, :func:`contact_envelope`);
* impulse (a flat excitation: every mode driven equally, weighted only by its
  shape at the two points): ``phi_m(x0) phi_m(xp)``, sounding as a sine from
  rest -- the brightest option, for auditioning the mode set itself.

For a string (phi_n = sin(n pi x / L), omega_n proportional to n) the pluck
gives the familiar triangle series ``sin(n pi beta) / n**2`` and the strike
``sin(n pi beta) / n``.  Amplitudes are scaled so that `strength` is a level
in full-scale units: for the pluck it is the initial deflection at the pluck
point (the triangle's height); for the strike and impulse it is the largest
single mode's contribution at the excitation point, before the contact
roll-off.  Either way the low modes' level is proportional to `strength` and
does not depend on the contact time, the sample rate or the mode count.

References
----------
.. [1] N. H. Fletcher and T. D. Rossing, *The Physics of Musical Instruments*,
   2nd ed., Springer (1998), sec. 2.7-2.8 (plucked and struck strings).
"""
from __future__ import annotations

import math

import numpy as np

__all__ = ["EXCITATIONS", "excitation_weights", "contact_spectrum", "contact_envelope"]

EXCITATIONS = ("pluck", "strike", "impulse")


def contact_spectrum(frequency_hz, contact_time):
    """|F(f) / F(0)| of a half-sine force pulse of duration `contact_time` (s).

    Equals ``|cos(pi f tau)| / |1 - (2 f tau)**2|``: pi/4 at f = 1/(2 tau),
    1/3 at f = 1/tau, zeros at (2k+1)/(2 tau) for k >= 1, falling as f**-2.

    >>> float(np.round(contact_spectrum(1000.0, 1e-3), 6))
    0.333333
    """
    x = 2.0 * np.asarray(frequency_hz, dtype=float) * contact_time
    with np.errstate(divide="ignore", invalid="ignore"):
        h = np.abs(np.cos(0.5 * math.pi * x) / (1.0 - x**2))
    return np.where(np.isclose(x, 1.0, rtol=0, atol=1e-9), math.pi / 4.0, h)


def contact_envelope(frequency_hz, contact_time):
    """Notch-free envelope of :func:`contact_spectrum` through its lobe peaks.

    Equal to the half-sine spectrum up to f = 1/tau (x = 2 f tau = 2, where it
    is 1/3), and ``1 / (x**2 - 1)`` above, which touches every side-lobe peak
    (x = 4, 6, ...).  A real felt contact is never an exact half-sine, so its
    spectrum has no exact zeros; the envelope also keeps brightness growing
    smoothly as a harder blow shortens the contact, instead of sweeping zeros
    through the partials.

    >>> float(np.round(contact_envelope(2000.0, 1e-3), 6))  # x = 4: 1/15
    0.066667
    """
    x = 2.0 * np.asarray(frequency_hz, dtype=float) * contact_time
    with np.errstate(divide="ignore"):
        tail = 1.0 / np.maximum(x**2 - 1.0, 1e-300)
    return np.where(x <= 2.0, contact_spectrum(frequency_hz, contact_time), tail)


def excitation_weights(kind, frequency_hz, excitation_shape, pickup_shape, *, strength=1.0, contact_time=0.0):
    """Signed amplitude and phase (rad) of every mode for an excitation.

    Parameters
    ----------
    kind : {"pluck", "strike", "impulse"}
    frequency_hz : array_like [shape=(M,)], Hz
    excitation_shape, pickup_shape : array_like [shape=(M,)]
        Mode shapes at the excitation and pickup points.
    strength : float >= 0
        Peak level in full-scale units (see module notes).
    contact_time : float >= 0, s
        Strike contact duration; 0 is an ideal (infinitely hard) strike.

    Returns
    -------
    amplitude : ndarray [shape=(M,)]
        Non-negative amplitudes.
    phase : ndarray [shape=(M,)], rad
        pi/2 for a pluck (cosine), 0 for a strike or impulse, plus pi where the
        product of the shapes is negative.
    """
    if kind not in EXCITATIONS:
        raise ValueError(f"kind={kind!r} must be one of {EXCITATIONS}")
    f = np.asarray(frequency_hz, dtype=float)
    phi_e = np.asarray(excitation_shape, dtype=float)
    phi_p = np.asarray(pickup_shape, dtype=float)
    omega = 2.0 * math.pi * f
    rolloff = 1.0
    if kind == "pluck":
        drive = phi_e / omega**2
        base_phase = 0.5 * math.pi
    elif kind == "strike":
        drive = phi_e / omega
        if contact_time > 0:
            rolloff = contact_envelope(f, contact_time)
        base_phase = 0.0
    else:
        drive = phi_e.copy()
        base_phase = 0.0
    # Scale to `strength`.  A pluck's sum(drive * phi_e) is the deflection at the
    # pluck point (the triangle's height), a sum that converges as modes are
    # added.  A strike's or impulse's sum grows with the mode count, so they
    # are scaled by their largest single-mode term instead: the level of the
    # low modes then does not depend on how many modes are computed.  The
    # contact roll-off is applied after, so a longer contact takes away high
    # modes without changing the level of the low ones.
    terms = drive * phi_e
    norm = float(np.sum(terms)) if kind == "pluck" else float(np.max(np.abs(terms), initial=0.0))
    signed = drive * rolloff * phi_p * (strength / norm if norm > 0 else 0.0)
    amplitude = np.abs(signed)
    phase = np.where(signed < 0, base_phase + math.pi, base_phase)
    return amplitude, phase
