"""How an excitation sets each mode moving, in time: pulses, modal weights and the onset.

Every excitation is a force applied at a point, with a time course; every
mode (frequency omega, decay sigma, shapes phi_e at the excitation and phi_p
at the pickup, a common modal mass) answers a unit force impulse with the
displacement ``Im[c e^(s t)]``, ``s = -sigma + i omega``, ``c = phi_e phi_p /
omega``.  The excitations:

* **impulse**: an ideal force impulse of area J.
* **strike**: a half-sine force pulse of duration tau (``contact_time``) and
  area J, ``f(u) = J (pi / 2 tau) sin(pi u / tau)``.
* **pluck**: the object held at rest under a static force F0 (deflected), the
  force then released over ``release_time`` T (a raised-cosine fall
  ``F0 (1 + cos(pi u / T)) / 2``): a finger or plectrum letting go.

A force ``p(u)`` gives each mode ``Im[c e^(s t) P_t(s)]`` with ``P_t(s) =
int_0^t p(u) e^(-s u) du``; once the pulse is over the mode is a damped
sinusoid whose complex amplitude is ``c`` times the pulse's Laplace transform
at the mode's own complex frequency, ``M(s) = P_inf(s)``:

* impulse: ``M = J``;
* strike: ``M = J (pi/2tau) int_0^tau sin(pi u/tau) e^(-s u) du``, which on the
  undamped axis is ``|cos(pi f tau)| / |1 - (2 f tau)**2|`` times J (pi/4 at
  f = 1/(2 tau), 1/3 at 1/tau, zeros at (2k+1)/(2 tau) for k >= 1): the one
  rule for a strike's spectrum, damping included;
* pluck: ``M = F0 [G(s) - e^(-s T) / s]``, ``G(s) = int_0^T (r(u) - 1) e^(-s u)
  du``; an instant release (T = 0) gives ``-F0 / s``, the familiar pluck from a
  static deflection (cosine phase, amplitude ``F0 phi_e phi_p / omega**2``).

The pickup measures displacement, velocity or acceleration (``s`` once or
twice more, each divided by the fundamental's angular frequency so the
fundamental keeps its level and higher modes rise 6 or 12 dB per octave).
During a pulse the onset is evaluated sample by sample from the same
integrals (:func:`onset_samples`), so the rendered signal is the modal
response convolved with the pulse, exactly.  A force that rises from zero
gives a velocity and an acceleration that start from zero; an ideal impulse
and a held (deflected) start do not, which is why an impulse is measured as
displacement and a pluck as velocity or acceleration (:func:`check_measure`).

Amplitudes are scaled so that `strength` keeps its meaning: for a pluck it is
the static deflection at the pluck point (the triangle's height, with F0 =
strength / sum phi_e**2 / omega**2); for a strike or an impulse the largest
single mode's displacement contribution at the excitation point before the
pulse's roll-off (J = strength / max phi_e**2 / omega).  Either way the low
modes' level does not depend on the mode count or the sample rate.

A strike's contact time may come from a mallet (:class:`Mallet`): a mass m
meeting the object at speed v through a contact spring ``F = K x**p`` (Hertz:
p = 3/2 for a sphere on a flat; felt hammers p = 2.2-3.5 [3]_).  Against a
rigid (much stiffer and heavier) surface, energy conservation ``m x'**2 / 2 +
K x**(p+1) / (p+1) = m v**2 / 2`` gives the largest compression ``x_max =
((p + 1) m v**2 / (2 K))**(1/(p+1))`` and the contact time (compression and
release, no hysteresis)::

    tau = 2 int_0^x_max dx / sqrt(v**2 - 2 K x**(p+1) / ((p+1) m))
        = (2 x_max / v) B(1/(p+1), 1/2) / (p + 1)

(substitute ``w = (x / x_max)**(p+1)``), so ``tau ~ v**((1-p)/(p+1))``:
v**(-1/5) for Hertz, harder blows are shorter and brighter [4]_.

References
----------
.. [1] N. H. Fletcher and T. D. Rossing, *The Physics of Musical Instruments*,
   2nd ed., Springer (1998), sec. 2.7-2.8 (plucked and struck strings).
.. [3] T. D. Rossing, ed., *The Science of String Instruments*, Springer
   (2010), ch. 19 (piano): F = K x**p, p 2.2-3.5 for hammers taken from
   pianos, 1.5-2.8 unused (Hall & Askenfelt 1988).
.. [4] K. L. Johnson, *Contact Mechanics*, Cambridge University Press (1985),
   sec. 11.4 (impact of spheres; from memory).
.. [2] L. Meirovitch, *Fundamentals of Vibrations*, McGraw-Hill (2001), ch. 3
   and 7 (response of modes to arbitrary forces by the convolution integral;
   chapters from memory).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

__all__ = [
    "EXCITATIONS",
    "MEASURES",
    "DEFAULT_RELEASE_TIME_S",
    "Pulse",
    "check_measure",
    "drive_coefficients",
    "contact_spectrum",
    "onset_samples",
    "ONSET_BLOCK",
    "Mallet",
    "MALLETS",
    "DEFAULT_STRIKE_SPEED",
    "hertz_contact_time",
    "hertz_sphere_stiffness",
]

EXCITATIONS = ("pluck", "strike", "impulse")
MEASURES = ("displacement", "velocity", "acceleration")
#: How long a pluck's release takes (s) unless the patch says: between a nail
#: or plectrum (about 0.1 ms) and the flesh of a fingertip (about a
#: millisecond) -- orders of magnitude from the finger-string interaction
#: literature (Pavlidou 1997; Evangelista & Eckerholm 2010; from memory).
DEFAULT_RELEASE_TIME_S = 0.2e-3
#: Onset samples evaluated at a time (rows of an onset x modes array).
ONSET_BLOCK = 512
ONSET_ELEMENTS = 2**18  # samples x modes of one onset block (a few MiB a temporary, not 160 MiB for 20,000 modes)
_SMALL = 1e-6  # |z t| below which (1 - e^-zt) / z is summed as a series


def contact_spectrum(frequency_hz, contact_time):
    """|F(f) / F(0)| of a half-sine force pulse of duration `contact_time` (s), undamped axis.

    Equals ``|cos(pi f tau)| / |1 - (2 f tau)**2|``: pi/4 at f = 1/(2 tau),
    1/3 at f = 1/tau, zeros at (2k+1)/(2 tau) for k >= 1, falling as f**-2.
    :class:`Pulse` evaluates the same transform at complex s (damping included).

    >>> float(np.round(contact_spectrum(1000.0, 1e-3), 6))
    0.333333
    """
    x = 2.0 * np.asarray(frequency_hz, dtype=float) * contact_time
    with np.errstate(divide="ignore", invalid="ignore"):
        h = np.abs(np.cos(0.5 * math.pi * x) / (1.0 - x**2))
    return np.where(np.isclose(x, 1.0, rtol=0, atol=1e-9), math.pi / 4.0, h)


#: A mallet's striking speed at MIDI velocity 100 unless the patch says (m/s): a
#: moderate stroke (common practice); piano hammers span 1-6 m/s from pianissimo to
#: fortissimo (Russell & Rossing 1998, Acustica 84:967).
DEFAULT_STRIKE_SPEED = 1.0


def hertz_contact_time(*, mass, stiffness, exponent, speed):
    """Contact time (s) of a mass striking a rigid surface through a spring ``F = K x**p``.

    Parameters
    ----------
    mass : float > 0, kg
    stiffness : float > 0, N/m**p
        K of the contact law.
    exponent : float >= 1
        p (3/2 for Hertz contact of a sphere on a flat).
    speed : float > 0, m/s
        Speed at first contact.

    Returns
    -------
    float, s
        ``(2 x_max / v) B(1/(p+1), 1/2) / (p+1)``, ``x_max = ((p+1) m v**2 / (2K))**(1/(p+1))``
        (module notes).

    >>> round(hertz_contact_time(mass=1.0, stiffness=1.0, exponent=1.0, speed=1.0), 6)  # half a period of sqrt(K/m)
    3.141593
    """
    p1 = exponent + 1.0
    x_max = (p1 * mass * speed * speed / (2.0 * stiffness)) ** (1.0 / p1)
    beta = math.exp(math.lgamma(1.0 / p1) + math.lgamma(0.5) - math.lgamma(1.0 / p1 + 0.5))
    return 2.0 * x_max / speed * beta / p1


def hertz_sphere_stiffness(*, youngs_modulus, poisson_ratio, radius):
    """K (N/m**1.5) of an elastic sphere of `radius` (m) pressed on a rigid flat: ``(4/3) E/(1 - nu**2) sqrt(R)``.

    Hertz 1882; Johnson, *Contact Mechanics* (1985), eq. 4.22 (from memory).
    """
    return 4.0 / 3.0 * youngs_modulus / (1.0 - poisson_ratio**2) * math.sqrt(radius)


@dataclass(frozen=True)
class Mallet:
    """A mallet or hammer head: a mass striking through a contact spring ``F = K x**p``.

    Attributes
    ----------
    mass : float > 0, kg
        The head and the share of the stick that moves with it.
    stiffness : float > 0, N/m**p
        K of the contact law.
    exponent : float >= 1
        p: 3/2 for Hertz contact of an elastic sphere; 2.2-3.5 for felt.
    speed : float > 0, m/s
        Striking speed at MIDI velocity 100 (:data:`DEFAULT_STRIKE_SPEED`).
    name : str
        A name of :data:`MALLETS`, or "custom".
    """

    mass: float
    stiffness: float
    exponent: float = 1.5
    speed: float = DEFAULT_STRIKE_SPEED
    name: str = "custom"

    @property
    def contact_time(self):
        """Contact time (s) on a rigid surface at `speed` (:func:`hertz_contact_time`)."""
        return hertz_contact_time(mass=self.mass, stiffness=self.stiffness, exponent=self.exponent, speed=self.speed)

    def at_speed(self, speed):
        """The same mallet striking at `speed` (m/s)."""
        return replace(self, speed=float(speed))

    def describe(self):
        """One line for a report: ``felt, 2.97 g, K 4.5e+09 N/m^2.5, p 2.5, at 1 m/s``."""
        return (f"{self.name}, {self.mass * 1e3:.3g} g, K {self.stiffness:.3g} N/m^{self.exponent:g}, "
                f"p {self.exponent:g}, at {self.speed:.3g} m/s")


_HEAD_RADIUS = 0.0125  # m: heads of 2-2.8 cm diameter (Vienna Symphonic Library, xylophone mallets)
_HEAD_MASS = 0.025  # kg: head plus the moving share of a rattan or birch stick (common practice, from memory)

#: Named mallets (``excitation.mallet: felt``), striking a rigid surface at 1 m/s.  Elastic
#: heads use Hertz's sphere on a flat (:func:`hertz_sphere_stiffness`) with the head
#: material's modulus; felt and yarn harden faster (p = 2.5).  Contact times at 1 m/s:
#: rubber 1.7 ms, yarn 3.1 ms, felt 1.1 ms, wood 0.30 ms, plastic 0.26 ms, brass 0.065 ms.
MALLETS = {
    # medium rubber, E 20 MPa, nu 0.5 (rubber 1-100 MPa; from memory)
    "rubber": Mallet(_HEAD_MASS, hertz_sphere_stiffness(youngs_modulus=20e6, poisson_ratio=0.5, radius=_HEAD_RADIUS),
                     1.5, name="rubber"),
    # yarn over a rubber core: hardens like felt, p = 2.5 (Hall & Askenfelt's felt range, taken for yarn:
    # common practice); K 1e9 N/m^2.5 puts its contact near 3 ms at 1 m/s (no measured yarn constant found)
    "yarn": Mallet(0.030, 1.0e9, 2.5, name="yarn"),
    # piano hammer felt, middle C: 2.97 g, K 4.5e9 N/m^2.5, p 2.5 (Chaigne & Askenfelt 1994, JASA 95:1112,
    # Table I; from memory), p inside the 2.2-3.5 of Hall & Askenfelt 1988 (via Rossing 2010, ch. 19)
    "felt": Mallet(2.97e-3, 4.5e9, 2.5, name="felt"),
    # hard maple head loaded across the grain: E_R = 0.132 E_L = 1.66 GPa (USDA Wood Handbook 2010,
    # Table 5-3a ratios), nu 0.42
    "wood": Mallet(_HEAD_MASS, hertz_sphere_stiffness(youngs_modulus=1.66e9, poisson_ratio=0.42, radius=_HEAD_RADIUS),
                   1.5, name="wood"),
    # polycarbonate (Lexan) head, E 2.4 GPa, nu 0.37 (from memory)
    "plastic": Mallet(_HEAD_MASS, hertz_sphere_stiffness(youngs_modulus=2.4e9, poisson_ratio=0.37, radius=_HEAD_RADIUS),
                      1.5, name="plastic"),
    # brass head of 20 mm diameter, 30 g: E 110 GPa, nu 0.33 (Olin C26000 data sheet, as synth.materials)
    "brass": Mallet(0.030, hertz_sphere_stiffness(youngs_modulus=110e9, poisson_ratio=0.33, radius=0.010),
                    1.5, name="brass"),
}


def _e(z, t):
    """``int_0^t e^(-z u) du = (1 - e^(-z t)) / z``, stable as z t -> 0 (complex z, t >= 0)."""
    zt = z * t
    small = np.abs(zt) < _SMALL
    with np.errstate(divide="ignore", invalid="ignore"):
        exact = -np.expm1(-zt) / z
    series = t * (1.0 - 0.5 * zt + zt * zt / 6.0)
    return np.where(small, series, exact)


def _cos_integral(s, b, t):
    """``int_0^t cos(b u) e^(-s u) du`` from exponentials (no cancellation near s = +-ib)."""
    return 0.5 * (_e(s - 1j * b, t) + _e(s + 1j * b, t))


def _sin_integral(s, b, t):
    """``int_0^t sin(b u) e^(-s u) du``."""
    return (_e(s - 1j * b, t) - _e(s + 1j * b, t)) / 2j


@dataclass(frozen=True)
class Pulse:
    """The time course of an excitation's force, in units of its area (J) or its held value (F0).

    Attributes
    ----------
    kind : {"impulse", "strike", "pluck"}
    duration : float >= 0, s
        Contact time of a strike, release time of a pluck, 0 for an impulse.
    """

    kind: str
    duration: float = 0.0

    def onset_length(self, sample_rate):
        """Samples during which the force acts (0 for an ideal pulse)."""
        return int(math.ceil(self.duration * sample_rate - 1e-9)) if self.duration > 0 else 0

    def transform(self, s):
        """``M(s)``: the factor a mode's impulse response is multiplied by once the force is over."""
        s = np.asarray(s, dtype=complex)
        tau = self.duration
        if self.kind == "impulse" or (self.kind == "strike" and tau == 0.0):
            return np.ones(s.shape, complex)
        if self.kind == "strike":
            return (0.5 * math.pi / tau) * _sin_integral(s, math.pi / tau, tau)
        if tau == 0.0:  # an instant release from the held deflection
            return -1.0 / s
        return self._held_change(s, tau) - np.exp(-s * tau) / s

    def _held_change(self, s, t):
        """``int_0^t (r(u) - 1) e^(-s u) du`` of the release r(u) = (1 + cos(pi u / T)) / 2, t <= T."""
        return 0.5 * (_cos_integral(s, math.pi / self.duration, t) - _e(s, t))

    def partial(self, s, t):
        """``P_t(s) = int_0^t p(u) e^(-s u) du`` for times `t` within the pulse (broadcasts)."""
        tau = self.duration
        if self.kind == "strike":
            return (0.5 * math.pi / tau) * _sin_integral(s, math.pi / tau, t)
        return self._held_change(s, t)

    def force(self, t):
        """The force (change, for a pluck) at times `t` within the pulse, in units of J or F0."""
        t = np.asarray(t, dtype=float)
        tau = self.duration
        if self.kind == "strike":
            return (0.5 * math.pi / tau) * np.sin(math.pi * t / tau)
        return 0.5 * (np.cos(math.pi * t / tau) - 1.0)


def check_measure(kind, measures):
    """None if `kind` measured as `measures` starts from silence, else why it would not (one line).

    An ideal impulse makes the velocity jump; a pluck starts from a held
    deflection, so its displacement does not start at zero.
    """
    if kind == "impulse" and measures != "displacement":
        return (f"an ideal impulse measured as {measures} starts with a step (a click at the first sample): "
                "measure displacement, or use a strike with a short contact_time")
    if kind == "pluck" and measures == "displacement":
        return ("a pluck starts from the held deflection, so its displacement starts with a step: "
                "measure velocity (the default) or acceleration")
    return None


def drive_coefficients(kind, frequency_hz, excitation_shape, pickup_shape, *, strength=1.0):
    """Each mode's displacement response ``c`` (real, signed) to the excitation's unit force.

    ``c = K phi_e phi_p / omega``, with K the impulse area J (strike, impulse)
    or the held force F0 (pluck) that give `strength` (see the module notes).

    Parameters
    ----------
    kind : {"pluck", "strike", "impulse"}
    frequency_hz : array_like [shape=(M,)], Hz
    excitation_shape, pickup_shape : array_like [shape=(M,)]
    strength : float >= 0

    Returns
    -------
    ndarray [shape=(M,)]
    """
    if kind not in EXCITATIONS:
        raise ValueError(f"kind={kind!r} must be one of {EXCITATIONS}")
    omega = 2.0 * math.pi * np.asarray(frequency_hz, dtype=float)
    phi_e = np.asarray(excitation_shape, dtype=float)
    phi_p = np.asarray(pickup_shape, dtype=float)
    if kind == "pluck":
        norm = float(np.sum(phi_e * phi_e / (omega * omega)))  # static deflection at the point per unit force
    else:
        norm = float(np.max(np.abs(phi_e * phi_e / omega), initial=0.0))  # largest single mode
    scale = strength / norm if norm > 0 else 0.0
    return scale * phi_e * phi_p / omega


def _measure_power(measures):
    return MEASURES.index(measures)


def onset_samples(pulse, coefficient, s, *, measures, reference_omega, sample_rate):
    """The signal at the pickup while the force acts: samples ``0 .. pulse.onset_length - 1``.

    Parameters
    ----------
    pulse : Pulse
    coefficient : ndarray [shape=(M,)]
        The modes' ``c`` (:func:`drive_coefficients`); complex for coupled
        sub-modes, whose ``c`` carries the mixing weight.
    s : ndarray [shape=(M,)], 1/s
        ``-sigma + i omega`` of each mode.
    measures : {"displacement", "velocity", "acceleration"}
    reference_omega : float > 0, rad/s
        The fundamental's angular frequency (each derivative is divided by it).
    sample_rate : float, Hz

    Returns
    -------
    ndarray [shape=(n_onset,)], float64

    Notes
    -----
    ``y(t) = Im[c (s/w1)**k e^(s t) P_t(s)] + extra``: the derivative of a
    convolution adds the force times the derivative of the impulse response
    at 0, which is ``Im[c] = 0`` for velocity and ``Im[c s] / w1**2 = c omega /
    w1**2`` for acceleration; a pluck's displacement also carries its held
    deflection ``-Im[c / s]``.
    """
    n = pulse.onset_length(sample_rate)
    out = np.zeros(n)
    if n == 0 or len(coefficient) == 0:
        return out
    k = _measure_power(measures)
    s = np.asarray(s, dtype=complex)
    coefficient = np.asarray(coefficient)  # real, or complex for coupled sub-modes (synth.coupling)
    weight = coefficient * (s / reference_omega) ** k
    block = max(1, min(ONSET_BLOCK, ONSET_ELEMENTS // len(s)))  # bounded memory for thousands of modes
    for start in range(0, n, block):
        t = np.arange(start, min(start + block, n))[:, None] / sample_rate
        values = np.imag(weight[None, :] * np.exp(s[None, :] * t) * pulse.partial(s[None, :], t))
        y = values.sum(axis=1)
        if k == 1 and np.iscomplexobj(coefficient):  # h(0) = Im[sum c]: 0 for real c, ~0 for coupled sub-modes
            y += pulse.force(t[:, 0]) * float(np.sum(np.imag(coefficient))) / reference_omega
        if k == 2:
            y += pulse.force(t[:, 0]) * float(np.sum(np.imag(coefficient * s))) / reference_omega**2
        if k == 0 and pulse.kind == "pluck":
            y += float(np.sum(-np.imag(coefficient / s)))
        out[start : start + t.shape[0]] = y
    return out
