"""Calibrate a material from a tap on a blank of known dimensions.

A maker taps a bar (or a plate) whose dimensions are measured and records it;
its partials differ from what the handbook modulus predicts.  This module
finds the Young's modulus (and, for a thick bar, the shear modulus) that make
synth's own model of that blank sound the measured partials, and writes the
material a patch can use.

Notes
-----
Thin theory has every frequency proportional to ``sqrt(E / rho)`` (bar:
``f_n = (beta_n L)**2 / (2 pi L**2) sqrt(E I / (rho A))``; plate:
``f ~ sqrt(D / (rho h))`` with ``D = E h**3 / (12 (1 - nu**2))``), and so does
a Timoshenko bar when E and G move together: a scale ``s`` of the measured
over the model frequencies gives ``E = E_0 s**2`` exactly.  The blank is
solved by synth's resonator module at its given dimensions (closed form,
Timoshenko frequency equation or finite elements for a shaped bar), so the
calibrated material reproduces the measured partials in synth itself.

The scale is fitted by weighted least squares in cents after a one-to-one
assignment of partials to modes (:func:`synth.analysis.matching.match_scaled`:
trial scales put one of the lowest partials on one of the lowest modes, E
within 1/4 .. 4 times the handbook's).  A thick bar's ratios depend on G / E
(G x 0.6 moves B2 / B1 of a 22 mm rosewood bar 300 mm long by 80 cents), so
for a Timoshenko bar the first assignment also tries G / E from 1/4 to 4
times the handbook's (:data:`SHEAR_GRID`) and keeps the best.
Shear then lowers the upper partials of a thick bar relative to the lower
ones; with at least :data:`MIN_SHEAR_PARTIALS` matched partials and a fit
that can resolve it (predicted one-sigma of ``ln G`` at most
:data:`MAX_SHEAR_SD` with partials known to :data:`SHEAR_SD_FLOOR_CENTS`),
``(ln E, ln G)`` are fitted by Gauss-Newton with a forward-difference
Jacobian of the solver; otherwise G keeps the handbook's ratio G / E.
Uncertainties: ``cov = (J^T W J)^-1`` times the reduced chi-square where that
exceeds 1 (the Birge ratio, common practice).

References
----------
.. [1] R. D. Blevins, *Formulas for Natural Frequency and Mode Shape*, Van
   Nostrand Reinhold (1979), table 8-1 (thin-bar roots; table number from memory).
.. [2] S. M. Han, H. Benaroya and T. Wei, "Dynamics of transversely vibrating
   beams using four engineering theories", J. Sound Vib. 225(5), 935-988 (1999).
.. [3] A. W. Leissa, *Vibration of Plates*, NASA SP-160 (1969), ch. 2.
"""
from __future__ import annotations

import datetime
import math
from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import PatchError
from ..materials import MATERIALS
from ..modes import frozen_array
from .matching import CENTS_PER_NEPER, FAMILY_TOLERANCE_CENTS, assign_modes, birge, cents, checked_partials, match_scaled

__all__ = [
    "Calibration",
    "calibrate_material",
    "material_mapping",
    "material_yaml",
    "calibrated_overrides",
    "MIN_SHEAR_PARTIALS",
]

#: Resonators whose partials scale with the Young's modulus.
CALIBRATED_TYPES = ("bar", "plate")
#: Fewest matched partials for a shear-modulus fit (two parameters and one check).
MIN_SHEAR_PARTIALS = 3
#: Largest predicted (and fitted) one-sigma of ln G at which G is fitted (10 %, then 25 %).
MAX_SHEAR_SD = 0.10
MAX_FITTED_SHEAR_SD = 0.25
#: Partials are taken as known no better than this (cents) when judging whether G can be fitted.
SHEAR_SD_FLOOR_CENTS = 1.0
#: Credible shear moduli: E / 1000 .. E (isotropic solids have G = E / (2 (1 + nu)) > E / 3; wood E / 10 .. E / 20).
SHEAR_RANGE = (1e-3, 1.0)
#: Frequency scales (measured / handbook model) tried for the first assignment: E within 1/4 .. 4 times the
#: handbook's (wood varies by about 30 %; a factor of 4 is a wrong material or a wrong dimension).
SCALE_RANGE = (0.5, 2.0)
#: Factors on the handbook's G / E tried for the first assignment of a thick bar's partials (1/4 .. 4).
SHEAR_GRID = tuple(2.0 ** (k / 3.0) for k in range(-6, 7))
#: Step of ln E and ln G in the forward-difference Jacobian.
_STEP = 1e-4
#: Most modes solved for a calibration.
_MAX_MODES = 200


@dataclass(frozen=True)
class Calibration:
    """Moduli that make synth's model of a blank sound its measured partials.

    Attributes
    ----------
    blank_name : str
        The blank patch's name.
    resonator : str
        ``"bar"`` or ``"plate"``.
    material : str
        The blank's (handbook) material name (``"custom"`` for a mapping).
    density : float, kg/m^3
    poisson_ratio : float
    tensile_strength : float or None, Pa
        The handbook material's, where the table has one.
    handbook_youngs_modulus, youngs_modulus, youngs_modulus_sd : float, Pa
    handbook_shear_modulus, shear_modulus, shear_modulus_sd : float or None, Pa
        Bars only (None for plates); the sd is NaN where G was not fitted.
    shear_fitted : bool
        True when G was fitted from the upper partials; False: G keeps the
        handbook's ratio G / E (see `notes`).
    isotropic : bool
        The handbook G is E / (2 (1 + nu)) (so a material mapping need not give it).
    frequency_hz : ndarray [shape=(N,)], Hz
        Measured partials.
    labels : tuple of str [len N]
        Mode of each partial ("" unmatched), as synth's report labels them.
    model_before_hz, model_after_hz : ndarray [shape=(N,)], Hz
        The assigned mode with the handbook and with the calibrated moduli (NaN unmatched).
    residual_before_cents, residual_after_cents : ndarray [shape=(N,)]
        Measured minus model (cents).
    matched : ndarray [shape=(N,)], bool
    unmatched : tuple of int
        Partials no mode claims within the tolerance.
    missing : tuple of str
        Modes between the lowest and the highest matched one with no partial.
    rms_before_cents, rms_after_cents : float
    notes : tuple of str
        What the user should know (why G was or was not fitted).
    calibrated : Patch
        The blank with the calibrated moduli.
    """

    blank_name: str
    resonator: str
    material: str
    density: float
    poisson_ratio: float
    tensile_strength: float | None
    handbook_youngs_modulus: float
    youngs_modulus: float
    youngs_modulus_sd: float
    handbook_shear_modulus: float | None
    shear_modulus: float | None
    shear_modulus_sd: float | None
    shear_fitted: bool
    isotropic: bool
    frequency_hz: np.ndarray
    labels: tuple
    model_before_hz: np.ndarray
    model_after_hz: np.ndarray
    residual_before_cents: np.ndarray
    residual_after_cents: np.ndarray
    matched: np.ndarray
    unmatched: tuple
    missing: tuple
    rms_before_cents: float
    rms_after_cents: float
    notes: tuple
    calibrated: object = field(compare=False, repr=False, default=None)

    @property
    def youngs_change_percent(self):
        """Change of E from the handbook (%)."""
        return 100.0 * (self.youngs_modulus / self.handbook_youngs_modulus - 1.0)

    @property
    def shear_change_percent(self):
        """Change of G from the handbook (%), None for a plate."""
        if self.shear_modulus is None:
            return None
        return 100.0 * (self.shear_modulus / self.handbook_shear_modulus - 1.0)


def _check_blank(blank):
    spec = getattr(blank, "resonator", None)
    kind = getattr(spec, "TYPE", None)
    if kind not in CALIBRATED_TYPES:
        raise blank.error(
            "resonator.type",
            f"a blank for calibrating a material must be a bar or a plate (their partials scale with the Young's "
            f"modulus), got {kind}: its partials are set by tension or given directly")
    if spec.pitch_hz is not None:
        size = "length" if kind == "bar" else "thickness"
        raise blank.error(
            "resonator.pitch",
            f"a blank is solved at its measured size: give its measured {size} instead of pitch "
            f"(pitch solves the {size}, so the blank would match any modulus)")
    return spec


def _solver(spec):
    from ..resonators import resonator_module

    module = resonator_module(spec.TYPE)

    def solve(youngs, shear, n_modes):
        changed = replace(spec, youngs_modulus=youngs)
        if spec.TYPE == "bar":
            changed = replace(changed, shear_modulus=shear)
        solution = module.solve(changed, n_modes)
        return np.asarray(solution.frequency_hz, dtype=float), tuple(solution.labels)

    return module, solve


def _residuals(f, model, member):
    on = member >= 0
    return np.where(on, cents(f / np.where(on, model[np.maximum(member, 0)], 1.0)), np.nan)


def _gauss_newton(f, sd, member, log_e, log_g, model_at):
    """(ln E, ln G, J^T W J) fitted by Gauss-Newton on the residuals in cents (assignment fixed)."""
    on = member >= 0
    k = member[on]
    p = np.array([log_e, log_g])

    def residual(q):
        model = model_at(q)
        return cents(f[on] / model[k]) / sd[on]

    for _ in range(12):
        r = residual(p)
        jac = np.column_stack([(residual(p + _STEP * e) - r) / _STEP for e in np.eye(2)])
        step = np.linalg.lstsq(jac, -r, rcond=None)[0]
        p = p + step
        if np.max(np.abs(step)) < 1e-9:
            break
    r = residual(p)
    jac = np.column_stack([(residual(p + _STEP * e) - r) / _STEP for e in np.eye(2)])
    return p[0], p[1], jac.T @ jac, float(r @ r)


def calibrate_material(frequency_hz, *, blank, frequency_sd_hz=None, fit_shear=None,
                       tolerance_cents=FAMILY_TOLERANCE_CENTS):
    """Young's (and shear) modulus that make a blank of known dimensions sound its measured partials.

    Parameters
    ----------
    frequency_hz : array_like [shape=(N,)], Hz
        Measured partials of the tapped blank, ascending.
    blank : Patch
        A bar (uniform or shaped, rectangular or round) or a plate, with its
        measured dimensions (not a pitch) and the handbook material.
    frequency_sd_hz : array_like [shape=(N,)] or None, Hz
        One sigma of each; None weighs every partial alike (in cents).
    fit_shear : bool or None
        None: fit G for a Timoshenko bar when the partials resolve it;
        True: fit it whenever there are enough partials; False: never.
    tolerance_cents : float > 0
        A partial further than this from every mode (after the first scale)
        is unmatched.

    Returns
    -------
    Calibration

    Raises
    ------
    PatchError
        A blank that is not a bar or a plate, a blank given by pitch (names
        ``resonator.pitch``), bad frequencies, or no partial near a mode.

    Notes
    -----
    First scale: ``ln s = sum w_i (ln f_i - ln m_k(i)) / sum w_i`` over the
    assigned pairs, ``E_1 = E_0 s**2`` and ``G_1 = G_0 s**2`` (exact for every
    model here, see the module notes); then (bars) ``(ln E, ln G)`` by
    Gauss-Newton when the partials resolve G.  ``sd(ln E) = 2 sd(ln s)``.

    Examples
    --------
    >>> import synth
    >>> blank = synth.patch_from_text('''
    ... name: steel-blank
    ... resonator: {type: bar, theory: euler-bernoulli, material: steel, length: 300 mm, width: 20 mm, thickness: 4 mm}
    ... ''')
    >>> fit = calibrate_material([200.0, 551.3, 1080.8], blank=blank)
    >>> fit.labels, round(fit.youngs_modulus / 1e9, 2), round(fit.rms_after_cents, 2)
    (('B1', 'B2', 'B3'), 149.49, 0.02)
    """
    f, sd, given = checked_partials(frequency_hz, frequency_sd_hz)
    spec = _check_blank(blank)
    module, solve = _solver(spec)
    e0 = float(spec.youngs_modulus)
    g0 = float(spec.shear_modulus) if spec.TYPE == "bar" else None
    ratio0 = None if g0 is None else g0 / e0
    tol = float(tolerance_cents)
    n_modes = int(min(_MAX_MODES, max(module.count_below(spec, 4.0 * f[-1]) + 2, f.size + 4)))
    before, labels = solve(e0, g0, n_modes)
    reason = None if g0 is None else _shear_blocker(spec, fit_shear, f.size)
    # First assignment: the scale (E) and, where G may be fitted, the ratio G / E on a grid
    # (shear changes a thick bar's ratios by tens of cents); ties keep the handbook ratio.
    grid = [1.0] if g0 is None or reason else sorted(SHEAR_GRID, key=lambda g: abs(math.log(g)))
    best = None
    for factor in grid:
        model = before if factor == 1.0 else solve(e0, g0 * factor, n_modes)[0]
        match = match_scaled(f, model, sd_cents=sd, tolerance_cents=tol, scales=(1.0,), scale_range=SCALE_RANGE)
        if match is not None and (best is None or match.cost < best[0].cost - 1e-9):
            best = (match, factor)
    if best is None:
        low, high = SCALE_RANGE
        raise PatchError(
            f"no measured partial lies within {tol:g} cents of a mode of the blank with a Young's modulus "
            f"{low**2:g} .. {high**2:g} times the handbook's: check the blank's dimensions and material",
            key="frequency_hz")
    match, factor = best
    ratio = None if g0 is None else ratio0 * factor
    youngs, member, youngs_sd = _scale_only(f, sd, given, solve, n_modes, tol, e0 * match.scale**2, ratio,
                                            match.member)
    shear = None if g0 is None else youngs * ratio
    shear_sd = None if g0 is None else math.nan
    notes, fitted = [], False
    if g0 is not None:
        if reason is None:
            result = _fit_shear(f, sd, given, member, youngs, shear, fit_shear, solve, n_modes, tol)
            if isinstance(result, str):
                reason = result
            else:
                youngs, shear, youngs_sd, shear_sd, member, note = result
                fitted = True
        if not fitted:
            if factor != 1.0:  # back to the handbook's ratio
                youngs, member, youngs_sd = _scale_only(f, sd, given, solve, n_modes, tol, youngs, ratio0, member)
            shear = youngs * ratio0
            note = f"shear modulus not fitted: {reason}; kept the handbook ratio G/E = {ratio0:.4g}"
        notes.append(note)
    after, _ = solve(youngs, shear, n_modes)
    on = member >= 0
    residual_after = _residuals(f, after, member)
    residual_before = _residuals(f, before, member)
    used = set(member[on].tolist())
    lo, hi = int(member[on].min()), int(member[on].max())
    changed = replace(spec, youngs_modulus=youngs, material="custom")  # as a patch with the mapping names it
    if g0 is not None:
        changed = replace(changed, shear_modulus=shear)
    handbook = MATERIALS.get(spec.material)
    isotropic = g0 is None or math.isclose(g0, e0 / (2.0 * (1.0 + spec.poisson_ratio)), rel_tol=1e-9)
    return Calibration(
        blank_name=blank.name,
        resonator=spec.TYPE,
        material=spec.material,
        density=float(spec.density),
        poisson_ratio=float(spec.poisson_ratio),
        tensile_strength=None if handbook is None else handbook.tensile_strength,
        handbook_youngs_modulus=e0,
        youngs_modulus=float(youngs),
        youngs_modulus_sd=float(youngs_sd),
        handbook_shear_modulus=g0,
        shear_modulus=None if shear is None else float(shear),
        shear_modulus_sd=shear_sd,
        shear_fitted=fitted,
        isotropic=isotropic,
        frequency_hz=frozen_array(f),
        labels=tuple(labels[k] if k >= 0 else "" for k in member),
        model_before_hz=frozen_array(np.where(on, before[np.maximum(member, 0)], np.nan)),
        model_after_hz=frozen_array(np.where(on, after[np.maximum(member, 0)], np.nan)),
        residual_before_cents=frozen_array(residual_before),
        residual_after_cents=frozen_array(residual_after),
        matched=frozen_array(on, dtype=bool),
        unmatched=tuple(int(i) for i in np.flatnonzero(~on)),
        missing=tuple(labels[k] for k in range(lo, hi + 1) if k not in used),
        rms_before_cents=float(np.sqrt(np.mean(residual_before[on] ** 2))),
        rms_after_cents=float(np.sqrt(np.mean(residual_after[on] ** 2))),
        notes=tuple(notes),
        calibrated=replace(blank, resonator=changed),
    )


def _shear_blocker(spec, fit_shear, n_partials):
    """Why G cannot be fitted before any fit (a phrase), or None."""
    if fit_shear is False:
        return "not asked for"
    if spec.theory != "timoshenko":
        return f"theory {spec.theory} has no shear"
    if n_partials < MIN_SHEAR_PARTIALS:
        return f"{n_partials} partial{'s' if n_partials != 1 else ''} measured, it needs {MIN_SHEAR_PARTIALS}"
    return None


def _scale_only(f, sd, given, solve, n_modes, tol, youngs, ratio, member):
    """(E, member, sd E) with G / E held at `ratio` (None: no G): a pure scale, refitted while the assignment moves."""
    for _ in range(4):
        after = solve(youngs, None if ratio is None else youngs * ratio, n_modes)[0]
        new = assign_modes(f, after, tolerance_cents=tol)
        on = new >= 0
        if not np.any(on):  # cannot happen for a pure scale; keep the last assignment
            break
        w = 1.0 / sd[on] ** 2
        log_s = float(np.sum(w * np.log(f[on] / after[new[on]])) / np.sum(w))
        youngs *= math.exp(2.0 * log_s)
        settled = np.array_equal(new, member) and abs(log_s) < 1e-12
        member = new
        if settled:
            break
    on = member >= 0
    w = 1.0 / sd[on] ** 2
    after = solve(youngs, None if ratio is None else youngs * ratio, n_modes)[0]
    r = _residuals(f, after, member)[on]
    factor = birge(float(np.sum(w * r * r)), int(on.sum()) - 1, given)
    return youngs, member, youngs * 2.0 * math.sqrt(factor / np.sum(w)) / CENTS_PER_NEPER


def _fit_shear(f, sd, given, member, youngs, shear, fit_shear, solve, n_modes, tol):
    """(E, G, sd E, sd G, member, note) fitted from the upper partials, or why not (a phrase)."""
    matched = int(np.count_nonzero(member >= 0))
    if matched < MIN_SHEAR_PARTIALS:
        return f"{matched} partial{'s' if matched != 1 else ''} matched, it needs {MIN_SHEAR_PARTIALS}"

    def model_at(q):
        return solve(math.exp(q[0]), math.exp(q[1]), n_modes)[0]

    floor = np.maximum(sd, SHEAR_SD_FLOOR_CENTS)
    on = member >= 0
    k = member[on]
    p = np.log([youngs, shear])
    base = cents(f[on] / model_at(p)[k]) / floor[on]
    jac = np.column_stack([(cents(f[on] / model_at(p + _STEP * e)[k]) / floor[on] - base) / _STEP for e in np.eye(2)])
    predicted = math.sqrt(abs(np.linalg.pinv(jac.T @ jac)[1, 1]))
    if fit_shear is None and predicted > MAX_SHEAR_SD:
        return (f"shear moves these partials too little to resolve G (one sigma {100 * predicted:.0f} % "
                f"at {SHEAR_SD_FLOOR_CENTS:g} cent per partial)")
    log_e, log_g = p
    for _ in range(4):  # refit while the assignment moves
        log_e, log_g, normal, chi2 = _gauss_newton(f, sd, member, log_e, log_g, model_at)
        new = assign_modes(f, model_at((log_e, log_g)), tolerance_cents=tol)
        if np.array_equal(new, member) or np.count_nonzero(new >= 0) < MIN_SHEAR_PARTIALS:
            break
        member = new
    matched = int(np.count_nonzero(member >= 0))
    cov = np.linalg.pinv(normal) * birge(chi2, matched - 2, given)
    sd_e, sd_g = (math.sqrt(abs(v)) for v in np.diag(cov))
    e_fit, g_fit = math.exp(log_e), math.exp(log_g)
    low, high = SHEAR_RANGE
    if not (low * e_fit <= g_fit <= high * e_fit) or (fit_shear is None and sd_g > MAX_FITTED_SHEAR_SD):
        return (f"the fit gave G = {g_fit / 1e9:.3g} GPa +- {100 * sd_g:.0f} % (G/E = {g_fit / e_fit:.3g}), "
                "not credible")
    note = f"shear modulus fitted from the upper partials (Timoshenko), {matched} partials, G/E = {g_fit / e_fit:.4g}"
    return e_fit, g_fit, e_fit * sd_e, g_fit * sd_g, member, note


def material_mapping(calibration):
    """The mapping a patch's ``resonator.material`` takes for the calibrated material (SI).

    Parameters
    ----------
    calibration : Calibration

    Returns
    -------
    dict
        ``density`` (kg/m^3, the blank's), ``youngs_modulus`` (Pa),
        ``poisson_ratio``, ``tensile_strength`` (Pa, where the handbook
        material had one) and ``shear_modulus`` (Pa) where it was fitted or
        the handbook's was not the isotropic ``E / (2 (1 + nu))`` (wood).

    Examples
    --------
    >>> import synth
    >>> blank = synth.patch_from_text('''
    ... name: steel-blank
    ... resonator: {type: bar, theory: euler-bernoulli, material: steel, length: 300 mm, width: 20 mm, thickness: 4 mm}
    ... ''')
    >>> mapping = material_mapping(calibrate_material([200.0, 551.3], blank=blank))
    >>> sorted(mapping), round(mapping["youngs_modulus"] / 1e9, 2)
    (['density', 'poisson_ratio', 'youngs_modulus'], 149.48)
    """
    c = calibration
    mapping = {"density": c.density, "youngs_modulus": c.youngs_modulus, "poisson_ratio": c.poisson_ratio}
    if c.tensile_strength is not None:
        mapping["tensile_strength"] = c.tensile_strength
    if c.shear_modulus is not None and (c.shear_fitted or not c.isotropic):
        mapping["shear_modulus"] = c.shear_modulus
    return mapping


def calibrated_overrides(calibration, *, option="calibration"):
    """Overrides that give a blank patch file the calibrated material (for :func:`synth.load_patch`).

    ``{"resonator.material": (mapping, option)}``, with a bar's shear modulus
    as ``resonator.shear_modulus`` (a key bars take) instead of inside the
    mapping.

    Examples
    --------
    >>> import synth
    >>> text = '''
    ... name: steel-blank
    ... resonator: {type: bar, theory: euler-bernoulli, material: steel, length: 300 mm, width: 20 mm, thickness: 4 mm}
    ... '''
    >>> fit = calibrate_material([200.0, 551.3], blank=synth.patch_from_text(text))
    >>> patch = synth.patch_from_text(text, overrides=calibrated_overrides(fit))
    >>> round(patch.resonator.youngs_modulus / 1e9, 2)
    149.48
    """
    mapping = material_mapping(calibration)
    overrides = {}
    shear = mapping.pop("shear_modulus", None)
    overrides["resonator.material"] = (mapping, option)
    if calibration.resonator == "bar":
        overrides["resonator.shear_modulus"] = (calibration.shear_modulus if shear is None else shear, option)
    return overrides


def _plus_minus(sd):
    """" +- x GPa" of a one-sigma in Pa, or "" where there is none (one partial, no sd given)."""
    return f" +- {sd / 1e9:.2g} GPa" if sd is not None and math.isfinite(sd) else ""


def _number(value):
    """A float rounded to 6 significant digits (YAML-safe through yaml.safe_dump)."""
    return float(f"{value:.6g}")


def material_yaml(calibration, *, recording, blank_file, date=None):
    """The text of a MATERIAL file: ``material: {mapping}`` with comments saying how it was calibrated.

    Parameters
    ----------
    calibration : Calibration
    recording : str
        Name of the tap recording.
    blank_file : str
        Name of the blank's patch file.
    date : datetime.date or str or None
        Date of the calibration (default: today).

    Returns
    -------
    str
        YAML: comment lines, then ``material:`` with the keys of
        :func:`material_mapping` in SI units (numbers to 6 significant digits).

    Examples
    --------
    >>> import yaml, synth
    >>> blank = synth.patch_from_text('''
    ... name: steel-blank
    ... resonator: {type: bar, theory: euler-bernoulli, material: steel, length: 300 mm, width: 20 mm, thickness: 4 mm}
    ... ''')
    >>> text = material_yaml(calibrate_material([200.0, 551.3], blank=blank), recording="tap.wav",
    ...                      blank_file="blank.yaml", date="2025-01-01")
    >>> yaml.safe_load(text)["material"]["youngs_modulus"]
    149484000000.0
    """
    import yaml

    c = calibration
    when = (date or datetime.date.today())
    when = when.isoformat() if hasattr(when, "isoformat") else str(when)
    on = np.asarray(c.matched)
    lines = [
        "# Material calibrated from a tap on a blank of known dimensions (synth fit --blank).",
        f"# recording: {recording}",
        f"# blank: {blank_file} (patch {c.blank_name}, a {c.resonator}; handbook material {c.material})",
        f"# date: {when}",
        f"# Young's modulus: {c.youngs_modulus / 1e9:.4g} GPa{_plus_minus(c.youngs_modulus_sd)} "
        f"({c.youngs_change_percent:+.1f} % from the handbook {c.handbook_youngs_modulus / 1e9:.4g} GPa)",
    ]
    if c.shear_modulus is not None:
        sd = _plus_minus(c.shear_modulus_sd) if c.shear_fitted else ""
        lines.append(f"# shear modulus: {c.shear_modulus / 1e9:.4g} GPa{sd} ({c.shear_change_percent:+.1f} % from "
                     f"the handbook {c.handbook_shear_modulus / 1e9:.4g} GPa)")
    lines += [f"# {note}" for note in c.notes]
    lines.append(f"# {int(on.sum())} of {on.size} partials matched; rms residual {c.rms_before_cents:.2f} cents "
                 f"with the handbook modulus, {c.rms_after_cents:.2f} cents calibrated")
    lines.append("#   mode    measured Hz   before cents   after cents")
    for label, f, before, after in zip(c.labels, c.frequency_hz, c.residual_before_cents, c.residual_after_cents):
        if label:
            lines.append(f"#   {label:<6} {f:12.3f} {before:+14.2f} {after:+13.2f}")
        else:
            lines.append(f"#   {'-':<6} {f:12.3f}   (no mode within the tolerance)")
    lines.append("# Units: SI (density kg/m^3; moduli and strength Pa).")
    body = yaml.safe_dump({"material": {k: _number(v) for k, v in material_mapping(c).items()}},
                          sort_keys=False, default_flow_style=False)
    return "\n".join(lines) + "\n" + body
