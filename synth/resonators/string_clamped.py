"""Exact modes of a stiff string with clamped ends: frequencies, shapes and nodes.

Notes
-----
``EI w'''' - T w'' = mu omega**2 w`` on ``0 < x < L`` with ``w = w' = 0`` at
both ends.  The solutions are ``e^{+-k1 x}``, ``cos k2 x``, ``sin k2 x`` with
``k1**2 - k2**2 = T / EI`` and ``k1 k2 = sqrt(mu omega**2 / EI)``.  Put
``k = k2 L``, ``a = k1 L``, ``s = x / L - 1/2`` and
``c = pi / sqrt(B) = L sqrt(T / EI)`` (so ``a**2 = k**2 + c**2``).  The 4x4
frequency determinant ``2 a k (1 - cosh a cos k) + c**2 sinh a sin k = 0``
splits, by the symmetry about the middle, into two 2x2 blocks:

* symmetric modes (n odd), ``w = A cosh(a s) + C cos(k s)``:
  ``k sin(k/2) + a tanh(a/2) cos(k/2) = 0``;
* antisymmetric modes (n even), ``w = A sinh(a s) + C sin(k s)``:
  ``a sin(k/2) - k tanh(a/2) cos(k/2) = 0``.

With ``k = pi (n + delta)`` mode n has exactly one root with
``0 < delta < 1`` (``delta = 0`` is the pinned string; the block changes sign
across the bracket), found by a bracketed vectorised Newton iteration to
~1e-16; no asymptotic shortcut is used, so it is exact at every n (20,000
modes take ~10 ms).  The frequency is ``f_n = f_0 nu sqrt(1 + B nu**2)``,
``nu = n + delta``, ``f_0 = sqrt(T / mu) / (2 L)``.  The shape is the block's
null vector, ``cos(k s) - cos(k/2) cosh(a s) / cosh(a/2)`` (n odd) or
``sin(k s) - sin(k/2) sinh(a s) / sinh(a/2)`` (n even), evaluated without
overflow and scaled by the closed-form integral of its square (the cross term
vanishes at a root).  Between neighbouring points where the interior wave is
+-1 the end term is smaller than 1, so each such interval holds one node:
the n - 1 interior nodes are found by bisection in those brackets.
B -> infinity gives the clamped-clamped beam (``cos x cosh x = 1``,
x = 4.730041, 7.853205, ...); B = 0 the ideal string (``nu = n``).

References
----------
.. [1] H. Fletcher, "Normal vibration frequencies of a stiff piano string",
   J. Acoust. Soc. Am. 36(1), 203-209 (1964) (the equation and its small-B
   expansion).
"""
from __future__ import annotations

import math

import numpy as np
from ..modes import EvenNodes

__all__ = ["clamped_mode_numbers", "clamped_shapes", "clamped_nodes", "BEAM_NU1"]


#: Newton steps at most (a few suffice: the start is within ~1e-3 of the root for a string).
_MAX_ITERATIONS = 100


def _end_parameter(b):
    """``c = pi / sqrt(B) = L sqrt(T / EI)`` (inf for B = 0, an ideal string)."""
    return math.inf if b == 0.0 else math.pi / math.sqrt(b)


def _clamped_deltas(n, c):
    """``delta_n`` in (0, 1) with ``k = pi (n + delta)`` a root of mode n's clamped block (see the module notes).

    A vectorised Newton iteration kept inside the bracket [0, 1] (bisection
    where a step would leave it).  With ``phi = pi delta / 2`` the blocks read
    ``H = a T sin(phi) - k cos(phi)`` (n odd) and ``H = a sin(phi) - k T cos(phi)``
    (n even), ``T = tanh(a / 2)``: ``H(0) < 0 < H(1)``.
    """
    n = np.asarray(n, dtype=float)
    odd = (n % 2.0) == 1.0
    if math.isinf(c) or n.size == 0:
        return np.zeros_like(n)
    c2 = c * c

    def parts(delta):
        k = math.pi * (n + delta)
        a = np.sqrt(k * k + c2)
        t = np.tanh(0.5 * a)
        return k, a, t

    # Start from the fixed-point estimate with k at the pinned value.
    k, a, t = parts(0.0)
    delta = np.where(odd, np.arctan2(k, a * t), np.arctan2(k * t, a)) * (2.0 / math.pi)
    low, high = np.zeros_like(n), np.ones_like(n)
    for _ in range(_MAX_ITERATIONS):
        k, a, t = parts(delta)
        phi = 0.5 * math.pi * delta
        sin, cos = np.sin(phi), np.cos(phi)
        da = math.pi * k / a
        dt = 0.5 * (1.0 - t * t) * da
        h = np.where(odd, a * t * sin - k * cos, a * sin - k * t * cos)
        dh = np.where(
            odd,
            (da * t + a * dt) * sin + 0.5 * math.pi * a * t * cos - math.pi * cos + 0.5 * math.pi * k * sin,
            da * sin + 0.5 * math.pi * a * cos - (math.pi * t + k * dt) * cos + 0.5 * math.pi * k * t * sin,
        )
        low = np.where(h < 0.0, delta, low)
        high = np.where(h > 0.0, delta, high)
        step = np.where(dh != 0.0, h / np.where(dh != 0.0, dh, 1.0), np.inf)
        trial = delta - step
        outside = ~((trial >= low) & (trial <= high))  # NaN, or a step out of the bracket
        new = np.where(outside, 0.5 * (low + high), trial)
        done = np.max(np.abs(new - delta)) <= 4e-16
        delta = np.where(h == 0.0, delta, new)
        if done:
            break
    return delta


def clamped_mode_numbers(n, b):
    """Exact effective mode numbers ``nu_n = k2 L / pi`` of a clamped stiff string.

    Parameters
    ----------
    n : array_like of int >= 1
        Mode numbers.
    b : float >= 0
        Inharmonicity coefficient B.

    Returns
    -------
    ndarray of float
        ``nu_n`` in ``(n, n + 1)`` (``n`` itself for B = 0); the frequencies are
        ``f_n = f_0 nu_n sqrt(1 + B nu_n**2)`` exactly.

    Examples
    --------
    >>> np.round(clamped_mode_numbers([1, 2, 3], 0.0), 6).tolist()
    [1.0, 2.0, 3.0]
    >>> # B -> infinity is the clamped-clamped beam: (4.730041 / pi)**2 sqrt(B) ...
    >>> round(float(clamped_mode_numbers([1], 1e12)[0]) * math.pi, 5)
    4.73004
    """
    n = np.asarray(n, dtype=float)
    return n + _clamped_deltas(n, _end_parameter(float(b)))


def clamped_shapes(position, n, nu, b):
    """Clamped mode shapes at `position` (fraction of the length), one value per mode.

    Parameters
    ----------
    position : float in [0, 1]
    n : ndarray of int >= 1
    nu : ndarray of float
        :func:`clamped_mode_numbers` of `n`.
    b : float >= 0

    Returns
    -------
    ndarray [shape=(M,)]
        The block's null vector (module notes), signed so each mode starts
        positive at the left end, as ``sin(n pi x)`` does, and scaled to the
        sine's modal mass: ``int_0^1 w**2 dx = 1/2``.
    """
    c = _end_parameter(float(b))
    n = np.asarray(n, dtype=float)
    if math.isinf(c):
        return np.sin(n * math.pi * position)
    k = math.pi * np.asarray(nu, dtype=float)
    a = np.sqrt(k * k + c * c)
    s = float(position) - 0.5
    w, scale = _shape_parts(s, n, k, a)
    return w * scale


def _shape_parts(s, n, k, a):
    """(unscaled signed shape at s = x - 1/2, modal-mass scale) of modes n with wavenumbers k, a."""
    odd = (n % 2.0) == 1.0
    sign = np.where((n // 2) % 2 == 0, 1.0, -1.0)
    far = np.exp(-a)  # e^(-a), exponentially small for a stiff but tense string
    decay = np.exp(a * (abs(s) - 0.5))
    near = np.exp(-2.0 * a * abs(s))
    cosh_ratio = decay * (1.0 + near) / (1.0 + far)  # cosh(a s) / cosh(a / 2)
    sinh_ratio = math.copysign(1.0, s) * decay * (1.0 - near) / (1.0 - far)  # sinh(a s) / sinh(a / 2)
    half_cos, half_sin = np.cos(0.5 * k), np.sin(0.5 * k)
    w = np.where(odd, np.cos(k * s) - half_cos * cosh_ratio, np.sin(k * s) - half_sin * sinh_ratio)
    tanh = np.tanh(0.5 * a)
    sech2 = 4.0 * far / (1.0 + far) ** 2  # 1 / cosh(a/2)^2
    csch2 = 4.0 * far / (1.0 - far) ** 2  # 1 / sinh(a/2)^2
    sinc = np.sin(k) / (2.0 * k)
    norm = np.where(odd, 0.5 + sinc + half_cos**2 * (0.5 * sech2 + tanh / a),
                    0.5 - sinc + half_sin**2 * (1.0 / (tanh * a) - 0.5 * csch2))
    return w, sign * np.sqrt(0.5 / norm)


class _ClampedNodeList:
    """The nodes of one clamped mode (fractions, ends included), each found when asked for."""

    __slots__ = ("n", "k", "a")

    def __init__(self, n, k, a):
        self.n, self.k, self.a = int(n), float(k), float(a)

    def __len__(self):
        return self.n + 1

    def __getitem__(self, index):
        if isinstance(index, slice):
            return tuple(self._nodes(np.arange(len(self))[index]).tolist())
        j = range(len(self))[index]
        return float(self._nodes(np.array([j]))[0])

    def __iter__(self):
        return iter(self._nodes(np.arange(len(self))).tolist())

    def _nodes(self, j):
        """Nodes number `j` (ints, 0 .. n) by bisection between the points where the interior wave peaks."""
        n, k = self.n, self.k
        left = np.minimum(j, n - j)  # by symmetry: the j-th node from the nearer end
        mirror = j > n - j
        x = np.zeros(len(j))
        inner = left > 0
        if n % 2 == 0:
            middle = inner & (left == n // 2)
            inner &= ~middle
            x[middle] = 0.5
        if np.any(inner):
            # Left half, s = x - 1/2 < 0: the i-th interior node from the middle lies between
            # s = -i pi / k and -(i+1) pi / k (n odd), or between -(i - 1/2) pi / k and
            # -(i + 1/2) pi / k (n even), where the interior wave is +-1 and the end term smaller.
            from_middle = (n - 1) // 2 - left[inner] if n % 2 else n // 2 - left[inner]
            offset = 0.0 if n % 2 else -0.5
            lo = -(from_middle + 1 + offset) * math.pi / k
            hi = -(from_middle + offset) * math.pi / k
            x[inner] = 0.5 + _bisect_shape(lo, hi, n, k, self.a)
        x[(left == 0)] = 0.0
        return np.where(mirror, 1.0 - x, x)


def _bisect_shape(lo, hi, n, k, a):
    """Zeros of mode n's shape, one in each bracket [lo, hi] of s (vectorised bisection to 1e-15)."""
    def shape(s):  # unscaled: cos(k s) - cos(k/2) cosh(a s)/cosh(a/2), or the sine form (s < 0 here)
        decay, near = np.exp(a * (np.abs(s) - 0.5)), np.exp(-2.0 * a * np.abs(s))
        if n % 2:
            return np.cos(k * s) - math.cos(0.5 * k) * decay * (1.0 + near) / (1.0 + math.exp(-a))
        return np.sin(k * s) - math.sin(0.5 * k) * np.sign(s) * decay * (1.0 - near) / (1.0 - math.exp(-a))

    lo, hi = np.asarray(lo, dtype=float), np.asarray(hi, dtype=float)
    f_lo = shape(lo)
    for _ in range(64):
        mid = 0.5 * (lo + hi)
        f_mid = shape(mid)
        same = np.sign(f_mid) == np.sign(f_lo)
        lo, f_lo = np.where(same, mid, lo), np.where(same, f_mid, f_lo)
        hi = np.where(same, hi, mid)
        if np.max(hi - lo) <= 1e-15:
            break
    return 0.5 * (lo + hi)


class _ClampedNodes:
    """A report column of clamped modes' nodes (lazy, like :class:`synth.modes.EvenNodes`).

    Mode ``i`` has ``n_i + 1`` nodes (ends included), found on demand from its
    exact shape, so a table of M modes never holds M**2 / 2 numbers; the JSON
    and CSV forms leave the column out (:attr:`report_only`).
    """

    report_only = True

    def __init__(self, orders, k, a):
        self.orders, self.k, self.a = np.asarray(orders, dtype=np.int64), np.asarray(k), np.asarray(a)

    def __len__(self):
        return len(self.orders)

    def __getitem__(self, i):
        return _ClampedNodeList(self.orders[i], self.k[i], self.a[i])

    def __iter__(self):
        return (self[i] for i in range(len(self)))

    def take(self, index):
        """The column of the modes at `index` (an index array)."""
        return _ClampedNodes(self.orders[index], self.k[index], self.a[index])


def clamped_nodes(n, nu, b):
    """Node positions (fractions, ends included) of clamped modes `n`: a lazy column, one sequence per mode.

    The interior nodes are the zeros of :func:`clamped_shapes`, one between
    each pair of neighbouring points where the interior wave ``cos(k s)``
    (or ``sin(k s)``) is +-1 (the end term is smaller than 1 there), found by
    bisection to 1e-15 of the length.
    """
    n = np.asarray(n, dtype=np.int64)
    c = _end_parameter(float(b))
    if math.isinf(c):
        return EvenNodes(n)
    k = math.pi * np.asarray(nu, dtype=float)
    return _ClampedNodes(n, k, np.sqrt(k * k + c * c))


#: ``nu_1`` of a clamped-clamped beam (no tension, c = 0): 4.730041 / pi, the first root of cos(x) cosh(x) = 1.
BEAM_NU1 = 1.0 + float(_clamped_deltas([1], 0.0)[0])
