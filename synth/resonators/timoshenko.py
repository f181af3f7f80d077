"""Exact natural frequencies of a uniform Timoshenko beam (shear deformation and rotary inertia).

Notes
-----
Per unit area (``r**2 = I / A``, ``s = kappa G``), with ``w(x) e^{i omega t}`` [1]_:
``rho w_tt = s (w'' - psi')`` and ``rho r**2 psi_tt = E r**2 psi'' + s (w' - psi)``.
In units of the length ``L`` (``xi = x / L - 1/2``, ``W = w / L``), with
``Omega**2 = rho omega**2 L**4 / (E r**2)``, ``q = r**2 / L**2``, ``e = E / s``,
``alpha = e q Omega**2`` and ``beta = q Omega**2``, ``e^{lambda xi}`` solves them if

    ``lambda**4 + (alpha + beta) lambda**2 + alpha beta - Omega**2 = 0``

(``psi' = W'' + alpha W`` from the first, put in the derivative of the second):
``lambda**2 = -b**2`` or ``a**2``, ``b**2 = (alpha + beta + sqrt((alpha - beta)**2
+ 4 Omega**2)) / 2``, ``a**2 = Omega**2 (1 - e q**2 Omega**2) / b**2``.  ``a**2``
changes sign at the cut-off ``omega_c**2 = s / (rho r**2)``; above it ``a = i a~``
(second spectrum).  The basis ``(W, psi)``, entire in ``a**2`` so smooth through
the cut-off, is, for even ``W``, ``(cosh(a xi), (a**2 + alpha) sinh(a xi) / a)``
and ``(cos(b xi), (alpha - b**2) sin(b xi) / b)``; for odd ``W``,
``(a sinh(a xi), (a**2 + alpha) cosh(a xi))`` (at the cut-off the rotation
``W = 0``, ``psi = alpha``) and ``(sin(b xi), (b**2 - alpha) cos(b xi) / b)``.
Only end values enter; the ``a`` columns carry ``e^{-a/2}`` when ``a**2 > 0``
(``cosh(a/2) e^{-a/2} = (1 + e^{-a}) / 2``: no overflow), rows are scaled by
powers of ``b`` and each ``a`` column divided by the norm of its end values
``(W, W', psi, psi')`` (never all zero): the determinant is O(1), continuous,
and zero exactly at the natural frequencies.  Ends: pinned ``W = psi' = 0``,
clamped ``W = psi = 0``, free ``psi' = W' - psi = 0``.  Symmetric supports split
into an even and an odd 2x2 determinant; clamped-free is the 4x4, expanded by
the 2x2 minors of its column pairs.

Brackets come from the constraint theorem [2]_: one added constraint gives
``lambda_k(A) <= lambda_k(A + constraint) <= lambda_{k+1}(A)``.  Pinned is free
plus ``W = 0``, clamped is pinned plus ``psi = 0``, so each symmetry class of
free-free or clamped-clamped (half a bar, its middle sliding or pinned) is one
constraint from the same class of pinned-pinned, known in closed form
(:func:`_pinned_roots` at ``k = n pi``, ``n`` odd or even, and the uniform
rotation at ``omega_c`` in the odd class): the ``k``-th root of a class
(free-free: after its rigid-body mode) lies between its ``k``-th and
``(k+1)``-th pinned values, one root per bracket whatever the two spectra do.
Clamped-free is pinned-free plus ``psi(0) = 0``, and pinned-free is
pinned-sliding (closed form, ``k = (m - 1/2) pi``) less ``psi(L) = 0``; see
:func:`_clamped_free`.  Roots are refined by Anderson-Bjorck regula falsi [3]_.

References
----------
.. [1] S. M. Han, H. Benaroya and T. Wei, "Dynamics of transversely vibrating
   beams using four engineering theories", J. Sound Vib. 225(5), 935-988 (1999).
.. [2] R. Courant and D. Hilbert, *Methods of Mathematical Physics*, vol. 1,
   ch. VI, maximum-minimum property of eigenvalues under constraints
   (Interscience, 1953; chapter from memory).
.. [3] N. Anderson and A. Bjorck, "A new high order method of regula falsi
   type for computing a root of an equation", BIT 13, 253-264 (1973) (from memory).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["SUPPORTS", "cutoff_frequency", "uniform_frequencies", "frequency_determinant", "mode_shapes",
           "ModeShapes"]

#: The support cases handled.
SUPPORTS = ("free-free", "clamped-free", "pinned-pinned", "clamped-clamped")

_TOL = 4e-15  # relative bracket width or last step at which refinement stops
_MAX_STEPS = 60  # refinement steps at most (6 to 12 are taken)
_NUDGE = 1e-10  # inward nudge of a bracket end whose determinant is only rounding
_SCALAR_BRACKETS = 12  # this few open brackets are refined one by one in floats (cheaper)

# Rows of end values, scaled: W, W'/b, psi/b, psi'/b**2, b (W' - psi)/alpha.
_W, _WD, _PSI, _PSID, _SHEAR = range(5)
_ROWS = {"free": (_PSID, _SHEAR), "clamped": (_W, _PSI), "pinned": (_W, _PSID)}
_PAIRS = ((0, 1), (0, 2), (0, 3), (1, 2), (1, 3), (2, 3))  # row pairs; complements in reverse order


def cutoff_frequency(*, radius_of_gyration, kappa_shear, density):
    """Cut-off ``omega_c / (2 pi)`` (Hz), where the second spectrum begins.

    Parameters
    ----------
    radius_of_gyration : float, m
        ``r = sqrt(I / A)``.
    kappa_shear : float, Pa
        Shear coefficient times shear modulus, ``kappa G``.
    density : float, kg/m^3

    Returns
    -------
    float, Hz

    Notes
    -----
    ``omega_c = sqrt(kappa G / (rho r**2))``: the uniform rotation ``w = 0``, ``psi = const`` [1]_.
    """
    return math.sqrt(kappa_shear / (density * radius_of_gyration**2)) / (2.0 * math.pi)


def _pinned_roots(k, q, e):
    """Both roots ``Omega`` of ``e q**2 Omega**4 - (1 + q k**2 (1 + e)) Omega**2 + k**4 = 0``.

    The pinned-pinned quadratic of :func:`uniform_frequencies` divided by
    ``E r**2 / L**4`` (``k`` in units of ``1/L``); the lower root in the
    cancellation-free form ``2 k**4 / (B + sqrt(B**2 - 4 e q**2 k**4))``.
    """
    k2 = k * k
    big = 1.0 + q * k2 * (1.0 + e)
    root = np.sqrt(1.0 + 2.0 * q * k2 * (1.0 + e) + (q * k2 * (1.0 - e)) ** 2)  # sqrt(B**2 - 4 e q**2 k**4)
    return np.sqrt(2.0 * k2 * k2 / (big + root)), np.sqrt((big + root) / (2.0 * e * q * q))


def _state(omega, q, e, xp):
    """End-value ingredients at ``xi = 1/2`` (module Notes), `xp` = math or numpy."""
    w2 = omega * omega
    alpha = e * q * w2
    y = 0.5 * ((alpha + q * w2) + omega * xp.sqrt(q * q * (e - 1.0) ** 2 * w2 + 4.0))  # b**2
    z = w2 * (1.0 - e * q * q * w2) / y  # a**2, signed
    b = xp.sqrt(y)
    grow = bool(z > 0.0) if xp is math else (True if (z > 0.0).all() else (False if (z <= 0.0).all() else z > 0.0))
    a = xp.sqrt(abs(z)) + 1e-300
    if grow is True:  # cosh(a/2) e^(-a/2), sinh(a/2) e^(-a/2) / a
        em = xp.expm1(-a)
        ca, sa = 0.5 * em + 1.0, em / (-2.0 * a)
    elif grow is False:  # above the cut-off: cos(a~/2), sin(a~/2) / a~
        ca, sa = xp.cos(0.5 * a), xp.sin(0.5 * a) / a
    else:
        ca = np.where(grow, 0.5 * np.expm1(-a) + 1.0, np.cos(0.5 * a))
        sa = np.where(grow, np.expm1(-a) / (-2.0 * a), np.sin(0.5 * a) / a)
    za = z + alpha
    t, u = 1.0 + (za / y) ** 2, (z * z + za * za) / y
    # Squared norms of (W, W', psi, psi') of the even and odd a columns.
    return ca, sa, xp.cos(0.5 * b), xp.sin(0.5 * b), z, za, y, b, (alpha - y) / y, \
        ca * ca * t + sa * sa * u, z * z * sa * sa * t + ca * ca * u


def _entries(st, row):
    """One row for the basis functions F1, G1 (even ``W``), F2, G2 (odd); ``a`` columns unnormalised."""
    ca, sa, cb, sb, z, za, y, b, rb = st[:9]
    if row == _W:
        return ca, cb, z * sa, sb
    if row == _WD:
        return z * sa / b, -sb, z * ca / b, cb
    if row == _PSI:
        return za * sa / b, rb * sb, za * ca / b, -rb * cb
    if row == _PSID:
        return za * ca / y, rb * cb, za * z * sa / y, rb * sb
    return -b * sa, -sb, -b * ca, cb  # _SHEAR


def _class_det(omega, q, e, rows, odd, xp):
    """2x2 determinant of one symmetry class, `rows` at ``xi = 1/2``; `odd` may be a boolean array."""
    st = _state(omega, q, e, xp)
    (f1, g1, f2, g2), (h1, k1, h2, k2) = _entries(st, rows[0]), _entries(st, rows[1])
    if odd is True:
        return (f2 * k2 - h2 * g2) / xp.sqrt(st[10])
    if odd is False:
        return (f1 * k1 - h1 * g1) / xp.sqrt(st[9])
    return np.where(odd, (f2 * k2 - h2 * g2) / np.sqrt(st[10]), (f1 * k1 - h1 * g1) / np.sqrt(st[9]))


def _full_det(omega, q, e, left, right, xp):
    """4x4 determinant, rows `left` at ``xi = -1/2`` and `right` at ``+1/2``.

    Left-end values are the right-end ones with the odd columns negated (up to
    a sign per row).  Laplace expansion by the column pairs (even | odd): the
    sum of (even minor of rows i, j) (odd minor of the other two), signs folded.
    """
    st = _state(omega, q, e, xp)
    r = [_entries(st, k) for k in left + right]
    me = [r[i][0] * r[j][1] - r[i][1] * r[j][0] for i, j in _PAIRS]
    mo = [r[i][2] * r[j][3] - r[i][3] * r[j][2] for i, j in _PAIRS]
    total = me[0] * mo[5] + me[1] * mo[4] - me[2] * mo[3] - me[3] * mo[2] + me[4] * mo[1] + me[5] * mo[0]
    return total / xp.sqrt(st[9] * st[10])


def _bracket(f, lo, hi, flo, fhi):
    """A sign-changing bracket for one known to hold exactly one root: without a sign change the root
    is at (within ``_NUDGE`` of) an end; an end whose value is only rounding is nudged inward, else the
    end with the smaller ``|f|`` is returned as a zero-width bracket."""
    if flo * fhi < 0.0:
        return lo, hi, flo, fhi
    lo2, hi2 = lo * (1.0 + _NUDGE), hi * (1.0 - _NUDGE)
    flo2, fhi2 = f(lo2), f(hi2)
    if flo2 * fhi < 0.0:
        return lo2, hi, flo2, fhi
    if flo * fhi2 < 0.0:
        return lo, hi2, flo, fhi2
    at = lo if abs(flo) <= abs(fhi) else hi
    return at, at, -1.0, 1.0


def _iterate(f, lo, hi, flo, fhi, steps=_MAX_STEPS):
    """Anderson-Bjorck regula falsi [3]_ from a bracket, in floats: the root, and the last bracket."""
    for _ in range(steps):
        if abs(hi - lo) <= _TOL * abs(hi):
            break
        x = min(max((lo * fhi - hi * flo) / (fhi - flo), min(lo, hi)), max(lo, hi))
        fx = f(x)
        if fx == 0.0 or abs(x - hi) <= _TOL * abs(x):
            return x, x, x
        if fx * fhi < 0.0:
            lo, flo = hi, fhi
        else:
            m = 1.0 - fx / fhi
            flo *= m if m > 0.0 else 0.5
        hi, fhi = x, fx
    return hi, lo, hi


def _refine(make_f, lo, hi, flo, fhi):
    """Roots, one per bracket ``[lo[i], hi[i]]`` (end values `flo`, `fhi`), each holding exactly one.

    ``make_f(math, i)`` is bracket ``i``'s determinant for floats, ``make_f(np, None)`` all brackets'
    for arrays.  Anderson-Bjorck steps (keep the newest point and the last of the other sign, scaling
    the kept value by ``1 - f(new) / f(old)``, or 1/2), vectorised while many brackets are open.
    """
    if len(lo) <= _SCALAR_BRACKETS:
        out = []
        for i in range(len(lo)):
            f = make_f(math, i)
            out.append(_iterate(f, *_bracket(f, float(lo[i]), float(hi[i]), float(flo[i]), float(fhi[i])))[0])
        return np.array(out)
    lo, hi, flo, fhi = (np.array(v, dtype=float) for v in (lo, hi, flo, fhi))
    for i in np.flatnonzero(~(flo * fhi < 0.0)):  # rare: a root at an end
        lo[i], hi[i], flo[i], fhi[i] = _bracket(make_f(math, i), *(float(v[i]) for v in (lo, hi, flo, fhi)))
    open_ = np.abs(hi - lo) > _TOL * np.abs(hi)
    f = make_f(np, None) if np.count_nonzero(open_) > _SCALAR_BRACKETS else None
    while np.count_nonzero(open_) > _SCALAR_BRACKETS:
        x = np.clip((lo * fhi - hi * flo) / np.where(open_, fhi - flo, 1.0), np.minimum(lo, hi), np.maximum(lo, hi))
        x = np.where(open_, x, hi)
        fx = f(x)
        flip = fx * fhi < 0.0
        m = 1.0 - fx / np.where(open_, fhi, 1.0)
        lo, flo = np.where(flip, hi, lo), np.where(flip, fhi, flo * np.where(m > 0.0, m, 0.5))
        open_ &= (fx != 0.0) & (np.abs(x - hi) > _TOL * np.abs(x))
        hi, fhi = x, fx
        open_ &= np.abs(hi - lo) > _TOL * np.abs(hi)
    for i in np.flatnonzero(open_):
        hi[i] = _iterate(make_f(math, i), float(lo[i]), float(hi[i]), float(flo[i]), float(fhi[i]))[0]
    return hi


def _evaluate(make_f, x):
    """The determinant at points `x`: one array call, or floats for a few points."""
    if len(x) > _SCALAR_BRACKETS:
        return make_f(np, None)(x)
    return np.array([make_f(math, i)(float(v)) for i, v in enumerate(x)])


def _dimensionless(length, radius_of_gyration, youngs_modulus, kappa_shear, density):
    """``q = r**2 / L**2``, ``e = E / kappa G`` and the unit of ``Omega`` in rad/s."""
    names = ("length", "radius_of_gyration", "youngs_modulus", "kappa_shear", "density")
    values = [length, radius_of_gyration, youngs_modulus, kappa_shear, density]
    for name, value in zip(names, values):
        if not (isinstance(value, (int, float, np.number)) and math.isfinite(value) and value > 0.0):
            raise ValueError(f"{name} must be a positive finite number, got {value!r}")
    length, r, youngs, shear, density = map(float, values)
    return (r / length) ** 2, youngs / shear, r / length**2 * math.sqrt(youngs / density)


def frequency_determinant(supports, frequency_hz, *, length, radius_of_gyration, youngs_modulus,
                          kappa_shear, density, symmetry=None):
    """The normalised frequency determinant of a uniform Timoshenko beam.

    Parameters
    ----------
    supports : {"free-free", "clamped-free", "pinned-pinned", "clamped-clamped"}
    frequency_hz : array_like, Hz (> 0)
    length, radius_of_gyration : float, m
    youngs_modulus, kappa_shear : float, Pa
        ``E`` and ``kappa G``.
    density : float, kg/m^3
    symmetry : {None, "even", "odd"}
        Symmetric supports only: the factor of the modes whose ``w`` is even
        or odd about the middle; None gives their product.

    Returns
    -------
    ndarray
        O(1), continuous in frequency, zero exactly at the natural
        frequencies, changing sign at each simple one (module Notes).
    """
    q, e, unit = _dimensionless(length, radius_of_gyration, youngs_modulus, kappa_shear, density)
    omega = 2.0 * math.pi * np.atleast_1d(np.asarray(frequency_hz, dtype=float)) / unit
    if supports not in SUPPORTS:
        raise ValueError(f"supports must be one of {SUPPORTS}, got {supports!r}")
    if supports == "clamped-free":
        if symmetry is not None:
            raise ValueError("clamped-free has no symmetry classes")
        return _full_det(omega, q, e, _ROWS["clamped"], _ROWS["free"], np)
    rows = _ROWS[supports.split("-")[0]]
    if symmetry is None:
        return _class_det(omega, q, e, rows, False, np) * _class_det(omega, q, e, rows, True, np)
    return _class_det(omega, q, e, rows, {"even": False, "odd": True}[symmetry], np)


def uniform_frequencies(supports, n_modes, *, length, radius_of_gyration, youngs_modulus, kappa_shear,
                        density, max_hz=math.inf):
    """The lowest natural frequencies of a uniform Timoshenko beam.

    Parameters
    ----------
    supports : {"free-free", "clamped-free", "pinned-pinned", "clamped-clamped"}
    n_modes : int >= 1
    length : float, m
    radius_of_gyration : float, m
        ``sqrt(I / A)``.
    youngs_modulus : float, Pa
    kappa_shear : float, Pa
        Shear coefficient times shear modulus, ``kappa G``.
    density : float, kg/m^3
    max_hz : float, Hz
        Only roots below this are returned.

    Returns
    -------
    ndarray [shape=(<= n_modes,)], Hz
        Ascending: every root of the frequency equation below `max_hz`, both
        spectra (a second-spectrum root takes its place in the order, as in a
        finite-element solution); free-free rigid-body modes excluded.

    Notes
    -----
    Pinned-pinned is closed-form, both roots in ``omega**2`` of
    ``(rho**2 r**2 / kappa G) omega**4 - [rho + rho r**2 k**2 (1 + E / kappa G)] omega**2 + E r**2 k**4 = 0``
    for ``k = n pi / L``, ``n >= 1``, and ``omega_c`` (``k = 0``: ``w = 0``,
    ``psi`` uniform).  Otherwise roots of :func:`frequency_determinant`,
    bracketed by interlacing (module Notes).
    """
    if supports not in SUPPORTS:
        raise ValueError(f"supports must be one of {SUPPORTS}, got {supports!r}")
    if isinstance(n_modes, bool) or int(n_modes) != n_modes or n_modes < 1:
        raise ValueError(f"n_modes must be a positive integer, got {n_modes!r}")
    n_modes = int(n_modes)
    q, e, unit = _dimensionless(length, radius_of_gyration, youngs_modulus, kappa_shear, density)
    if not max_hz > 0.0:
        raise ValueError(f"max_hz must be positive, got {max_hz!r}")
    top = 2.0 * math.pi * max_hz / unit if max_hz < math.inf else math.inf  # max_hz as Omega
    n_k = n_modes + 4  # wavenumbers; closed-form roots below `top` have k < b(top)
    if top < math.inf:
        b_top = math.sqrt(0.5 * ((e + 1.0) * q * top * top + top * math.sqrt(q * q * (e - 1.0) ** 2 * top * top + 4.0)))
        n_k = min(n_k, int(b_top / math.pi) + 4)
    if supports == "clamped-free":
        roots = _clamped_free(n_modes, top, q, e, n_k)
    else:
        lower, upper = _pinned_roots(np.arange(1, n_k + 1) * math.pi, q, e)
        lower = np.concatenate([[math.inf], lower])  # k = 0, n = 0: only the uniform rotation
        upper = np.concatenate([[1.0 / (math.sqrt(e) * q)], upper])
        every = np.sort(np.concatenate([lower, upper]))
        roots = every if supports == "pinned-pinned" else _symmetric(supports, n_modes, top, q, e, lower, upper, every)
    roots = roots[roots < top][:n_modes]
    return roots * unit / (2.0 * math.pi)


def _symmetric(supports, n_modes, top, q, e, lower, upper, every):
    """Free-free or clamped-clamped roots (``Omega``), each class bracketed by its pinned-pinned values."""
    # lambda_n(free-free, elastic) and lambda_n(clamped-clamped) <= lambda_{n+2}(pinned-pinned).
    limit = min(top, every[n_modes + 1]) if len(every) > n_modes + 1 else top
    mus = []
    for parity in (0, 1):  # n odd (parity 0): w even about the middle
        mu = np.sort(np.concatenate([lower[1 - parity::2], upper[1 - parity::2]]))
        mus.append(mu[: int(np.count_nonzero(mu < limit)) + 1])
    points = np.concatenate(mus)
    odd = np.arange(len(points)) >= len(mus[0])
    i = np.arange(len(points) - 1)
    i = i[i != len(mus[0]) - 1]  # brackets [points[i], points[i + 1]] within a class
    rows = _ROWS[supports.split("-")[0]]
    value = _evaluate(_maker(_class_det, q, e, rows, odd), points)
    return np.sort(_refine(_maker(_class_det, q, e, rows, odd[i]), points[i], points[i + 1], value[i], value[i + 1]))


def _maker(det, q, e, first, second):
    """``make_f`` for :func:`_refine`: ``det(x, q, e, first, second, xp)``; an array `second` is per point."""
    def make(xp, index):
        arg = bool(second[index]) if index is not None and isinstance(second, np.ndarray) else second
        return lambda x: det(x, q, e, first, arg, xp)
    return make


def _clamped_free(n_modes, top, q, e, n_k):
    """Clamped-free roots (``Omega``), separated by pinned-free roots.

    Pinned-free roots ``P_k`` satisfy ``lambda_{k-1} <= P_k <= lambda_k``
    (clamped-free ``lambda``; ``P_1 = 0``) and ``P_{k+1}`` lies in
    ``[nu_k, nu_{k+1}]`` (pinned-sliding ``nu``, closed form).  Separators are
    tried first: ``Omega_lb <= lambda_1``, estimates of ``P_2 .. P_K`` (mid-points
    of their brackets in ``sqrt(Omega)``), and a value ``<= P_{K+1}`` (lower end
    of its bracket).  If each of the ``K`` intervals shows a sign change, each
    holds an odd number of roots, and their sum, at most ``K`` roots below
    ``P_{K+1}``, forces one each.  Otherwise the exact ``P_k`` separate them.
    """
    lower, upper = _pinned_roots((np.arange(1, n_k + 2) - 0.5) * math.pi, q, e)
    nu = np.sort(np.concatenate([lower, upper]))
    count = min(n_modes, 1 + int(np.count_nonzero(nu < top)))  # clamped-free roots wanted
    # Rayleigh quotient bounded with Poincare (int f**2 <= (2L/pi)**2 int f'**2 when f(0) = 0) on
    # w and psi, and w'**2 <= 2 (w' - psi)**2 + 2 psi**2: Omega_1**2 >= min(1/(2 e q c), 1/((2 c + q) c)).
    c = (2.0 / math.pi) ** 2
    floor = math.sqrt(min(1.0 / (2.0 * e * q * c), 1.0 / ((2.0 * c + q) * c)))
    pinned = _maker(_full_det, q, e, _ROWS["pinned"], _ROWS["free"])
    clamped = _maker(_full_det, q, e, _ROWS["clamped"], _ROWS["free"])
    f_last = pinned(math, None)
    lo, hi = float(nu[count - 1]), float(nu[count])
    last = _bracket(f_last, lo, hi, f_last(lo), f_last(hi))
    guess = (0.5 * (np.sqrt(nu[: count - 1]) + np.sqrt(nu[1:count]))) ** 2
    for exact in (False, True):
        if exact:
            lo, hi = nu[: count - 1], nu[1:count]
            guess = _refine(pinned, lo, hi, _evaluate(pinned, lo), _evaluate(pinned, hi))
        # P_{K+1} from below: the lower end of its bracket after a few steps, or the root.
        sep = np.concatenate([[floor], guess, [min(_iterate(f_last, *last, steps=_MAX_STEPS if exact else 3))]])
        value = _evaluate(clamped, sep)
        if exact or (np.all(np.diff(sep) > 0.0) and np.all(value[:-1] * value[1:] < 0.0)):
            break
    return _refine(clamped, sep[:-1], sep[1:], value[:-1], value[1:])


# --------------------------------------------------------------------------
# Mode shapes.


def _columns(omega, q, e, x):
    """Basis F1, G1, F2, G2 (module Notes) at centred positions `x`: (W, W', psi, psi'), each (P, 4).

    ``a`` columns carry ``e^{-a/2}`` below the cut-off, as in :func:`_state`, so
    nothing overflows: ``C = e^{-a/2} cosh(a x)``, ``S = e^{-a/2} sinh(a x) / a``
    (``cos(a~ x)``, ``sin(a~ x) / a~`` above it); ``C' = z S``, ``S' = C``.
    """
    w2 = omega * omega
    alpha = e * q * w2
    y = 0.5 * ((alpha + q * w2) + omega * math.sqrt(q * q * (e - 1.0) ** 2 * w2 + 4.0))  # b**2
    z = w2 * (1.0 - e * q * q * w2) / y  # a**2, signed
    b, a = math.sqrt(y), math.sqrt(abs(z))
    if z > 0.0:
        if a < 30.0:
            c_a = math.exp(-0.5 * a) * np.cosh(a * x)
            s_a = math.exp(-0.5 * a) * x * (np.sinh(a * x) / np.where(a * x == 0.0, 1.0, a * x) + (a * x == 0.0))
        else:
            up, down = np.exp(a * (x - 0.5)), np.exp(-a * (x + 0.5))
            c_a, s_a = 0.5 * (up + down), (up - down) / (2.0 * a)
    else:
        c_a, s_a = np.cos(a * x), x * np.sinc(a * x / math.pi)
    za, ab = z + alpha, alpha - y
    cb, sb = np.cos(b * x), np.sin(b * x)
    w = np.stack([c_a, cb, z * s_a, sb], axis=-1)
    dw = np.stack([z * s_a, -b * sb, z * c_a, b * cb], axis=-1)
    psi = np.stack([za * s_a, ab * sb / b, za * c_a, -ab * cb / b], axis=-1)
    dpsi = np.stack([za * c_a, ab * cb, za * z * s_a, ab * sb], axis=-1)
    return w, dw, psi, dpsi, alpha, b


def _end_rows(end, values, alpha):
    """The two boundary rows of one end (module Notes) from its (W, W', psi, psi') rows."""
    w, dw, psi, dpsi = values
    return {"pinned": (w, dpsi), "clamped": (w, psi), "free": (dpsi, (dw - psi) / alpha)}[end]


_GAUSS_X, _GAUSS_W = np.polynomial.legendre.leggauss(16)


def _gauss(n_panels):
    """Composite 16-point Gauss-Legendre points and weights on [-1/2, 1/2] (weights sum to 1)."""
    edges = np.linspace(-0.5, 0.5, n_panels + 1)
    half = 0.5 / n_panels
    points = (0.5 * (edges[:-1] + edges[1:]))[:, None] + half * _GAUSS_X[None, :]
    return points.ravel(), np.tile(half * _GAUSS_W, n_panels)


@dataclass(frozen=True)
class ModeShapes:
    """Mode shapes of a uniform Timoshenko beam (:func:`mode_shapes`).

    Attributes
    ----------
    bending : ndarray [shape=(M,)], bool
        True for a first-spectrum (bending) mode, whose cross-sections turn
        with the centre line (``integral w' psi dx > 0``); False for a
        second-spectrum (shear) mode, whose cross-sections turn against it.
    transverse : ndarray [shape=(M,)]
        ``integral rho A w**2 dx`` over the modal mass: 0 for a mode without
        transverse motion (pinned-pinned's uniform rotation at the cut-off).
    """

    supports: str
    omega: np.ndarray  # dimensionless Omega of each mode
    coefficient: np.ndarray  # (4, M): basis coefficients, divided by the modal-mass norm
    q: float
    e: float
    length: float
    bending: np.ndarray
    transverse: np.ndarray

    def _at(self, fraction, which):
        x = np.atleast_1d(np.asarray(fraction, dtype=float)) - 0.5
        out = np.zeros((x.size, self.omega.size))
        for m, omega in enumerate(self.omega):
            out[:, m] = _columns(omega, self.q, self.e, x)[which] @ self.coefficient[:, m]
        return out

    def deflection(self, fraction):
        """``w`` (dimensionless) at fractions of the length: ndarray [shape=(P, M)].

        Scaled so that ``integral_0^L (rho A w**2 + rho I psi**2) dx = rho A L``, the
        bar's mass: one modal mass for every mode, rotary inertia included.
        """
        return self._at(fraction, 0)

    def rotation(self, fraction):
        """``psi`` (rad/m per unit ``w``) at fractions of the length: ndarray [shape=(P, M)]."""
        return self._at(fraction, 2) / self.length


def mode_shapes(supports, frequency_hz, *, length, radius_of_gyration, youngs_modulus, kappa_shear, density):
    """Mode shapes of a uniform Timoshenko beam at its natural frequencies, on a common modal mass.

    Parameters
    ----------
    supports : {"free-free", "clamped-free", "pinned-pinned", "clamped-clamped"}
        The first named end is at fraction 0.
    frequency_hz : array_like [shape=(M,)], Hz
        Natural frequencies (roots of :func:`frequency_determinant`, e.g. from
        :func:`uniform_frequencies`).
    length, radius_of_gyration, youngs_modulus, kappa_shear, density
        As :func:`uniform_frequencies`.

    Returns
    -------
    ModeShapes
        ``deflection(fraction)`` and ``rotation(fraction)`` of each mode, its
        spectrum (``bending``) and transverse share.

    Notes
    -----
    The modal mass is ``integral (rho A w**2 + rho I psi**2) dx``, the
    kinetic energy of Timoshenko's equations, with respect to which their
    modes are orthogonal; a transverse point force ``F`` at ``x_e`` does work
    ``F w(x_e)`` only, so mode ``n`` is driven by ``F w_n(x_e) / M_n`` and
    heard as ``w_n(x_p)``: with ``M_n`` the same for every mode (the bar's
    mass), ``w_n(x_e) w_n(x_p)`` weighs the modes as for a thin bar.

    The null vector of the 4x4 boundary matrix (rows scaled to unit size,
    columns by their end values; smallest singular vector) gives the coefficients of
    the basis of the module Notes.  For pinned-pinned it is a pure sine,
    ``w = sin(n pi x / L)``, on either spectrum.  Integrals by 16-point
    Gauss-Legendre quadrature on panels of at most 4 rad of the fastest wave
    (``b``; ``a <= b``).
    """
    if supports not in SUPPORTS:
        raise ValueError(f"supports must be one of {SUPPORTS}, got {supports!r}")
    q, e, unit = _dimensionless(length, radius_of_gyration, youngs_modulus, kappa_shear, density)
    omega = 2.0 * math.pi * np.atleast_1d(np.asarray(frequency_hz, dtype=float)) / unit
    left, right = supports.split("-")
    coefficients = np.zeros((4, omega.size))
    bending = np.zeros(omega.size, dtype=bool)
    transverse = np.zeros(omega.size)
    for m, om in enumerate(omega):
        ends = _columns(om, q, e, np.array([-0.5, 0.5]))
        alpha, b = ends[4], ends[5]
        rows = np.array(_end_rows(left, [v[0] for v in ends[:4]], alpha) + _end_rows(right, [v[1] for v in ends[:4]], alpha))
        rows /= np.max(np.abs(rows), axis=1, keepdims=True)
        # Columns scaled by their end values (W, W'/b, psi/b, psi'/b**2), never all zero (module Notes),
        # not by the boundary rows: a column that is itself the mode vanishes there.
        ends_scaled = np.array([ends[0][1], ends[1][1] / b, ends[2][1] / b, ends[3][1] / (b * b)])
        scale = np.linalg.norm(ends_scaled, axis=0)
        coefficient = np.linalg.svd(rows / scale)[2][-1] / scale
        points, weights = _gauss(int(0.5 * b) + 8)  # panels of at most 4 rad (a <= b)
        w, dw, psi = (v @ coefficient for v in _columns(om, q, e, points)[:3])
        inertia = weights @ (w * w + q * psi * psi)
        bending[m] = weights @ (dw * psi) > 0.0
        transverse[m] = weights @ (w * w) / inertia
        coefficients[:, m] = coefficient / math.sqrt(inertia)
    for array in (omega, coefficients, bending, transverse):
        array.flags.writeable = False
    return ModeShapes(supports, omega, coefficients, q, e, float(length), bending, transverse)
