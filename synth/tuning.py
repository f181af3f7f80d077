"""Undercut tuning: shape a bar so its lowest partials land on chosen ratios.

A uniform rectangular blank of thickness ``h0`` gets a symmetric cut centred
on the bar.  At a fraction ``s`` of the length the thickness is

    h(s) = h0 (1 - d (1 - |u|**p)),  u = (s - 1/2) / w,  for |u| < 1,

and ``h0`` elsewhere: depth ``d`` (fraction of ``h0`` removed at the centre),
half-width ``w`` (fraction of the length) and a fixed exponent ``p`` (2 is a
parabola; larger is flatter-bottomed, closer to a marimba maker's cut).  The
cut is sampled at evenly spaced points, which is exactly the ``profile`` a
patch takes (linear between points), so the tuner solves the very bar the
patch describes.

``(d, w)`` are found by least squares on the errors in cents of partials 2 and
3 relative to partial 1 (:func:`scipy.optimize.least_squares`, started from
the best point of a coarse grid); exponents are tried in the order of
:data:`EXPONENTS` until one reaches the targets.  When the patch gives a
pitch, the length is then solved for it and the cut re-tuned at the new
length (shear effects depend on thickness / length) until both settle.

Undercut ratios are common practice: 1:4:10 for marimba and vibraphone bars,
1:3:6 for xylophone bars (Fletcher & Rossing 1998, ch. 19, from memory; see
REFERENCES.md sec. 4).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
import yaml
from scipy.optimize import least_squares

from .resonators import bar

__all__ = [
    "TuningError",
    "UndercutTuning",
    "EXPONENTS",
    "MAX_DEPTH",
    "DEFAULT_POINTS",
    "MIN_POINTS",
    "MAX_POINTS",
    "TOLERANCE_CENTS",
    "TUNING_CAUTION",
    "parse_ratios",
    "undercut_profile",
    "tune_undercut",
    "tuning_report",
    "tuned_patch_text",
    "profile_text",
    "profile_table",
    "suspension_points",
]

#: Cut exponents tried, in order (4: flat-bottomed; 2: parabolic).
EXPONENTS = (4.0, 2.0, 6.0, 3.0, 8.0)
#: Deepest cut, as a fraction of the blank thickness (our limit: a thinner
#: centre is fragile and bar theory strains there).
MAX_DEPTH = 0.85
#: Narrowest and widest half-width of the cut (fractions of the length).
MIN_HALF_WIDTH = 0.05
MAX_HALF_WIDTH = 0.5
#: Profile points written out: default, fewest, most.
DEFAULT_POINTS = 41
MIN_POINTS = 9
MAX_POINTS = bar.MAX_PROFILE_POINTS
#: One line printed with every tuning report and at the top of a tuned patch.
TUNING_CAUTION = (
    "caution: real stock (wood above all) varies from piece to piece, so these figures are previews: "
    "defer to the maker's data and qualified practice, and remove material a little at a time"
)
#: A tuning within this many cents on every target counts as reached.
TOLERANCE_CENTS = 2.0
#: Profile values are rounded to this step (m) before the final check.
ROUND_M = 1e-7
#: Coarse start grid.
_GRID_DEPTH = np.linspace(0.15, 0.8, 6)
_GRID_WIDTH = np.linspace(0.1, 0.5, 6)
#: Most pitch/length iterations.
_MAX_ROUNDS = 6


class TuningError(ValueError):
    """A tuning that cannot be done; `key` names what to change.

    ``"--ratios"`` for the targets, or a patch key such as
    ``"resonator.profile"`` for a blank the tuner cannot start from.
    """

    def __init__(self, message, key="--ratios"):
        super().__init__(message)
        self.key = key

    def __reduce__(self):
        return (type(self), (str(self), self.key))


@dataclass(frozen=True)
class UndercutTuning:
    """The result of :func:`tune_undercut`.

    Attributes
    ----------
    spec : BarSpec
        The tuned bar (``profile`` set, ``length`` solved when a pitch was given).
    blank_thickness : float, m
    depth : float
        Fraction of the blank thickness removed at the centre.
    half_width : float
        Half-width of the cut, fraction of the length.
    exponent : float
    targets : tuple of float
        Target ratios of partials 1, 2, 3 (the first is 1).
    frequency_hz : tuple of float, Hz
        The first three partials of the tuned bar.
    """

    spec: object
    blank_thickness: float
    depth: float
    half_width: float
    exponent: float
    targets: tuple
    frequency_hz: tuple

    @property
    def ratios(self):
        """Achieved ratios of partials 1, 2, 3 to partial 1."""
        return tuple(f / self.frequency_hz[0] for f in self.frequency_hz)

    @property
    def cents_error(self):
        """Achieved minus target, in cents, for each partial."""
        return tuple(1200.0 * math.log2(r / t) for r, t in zip(self.ratios, self.targets))


def parse_ratios(text):
    """Target ratios from text such as ``"1:4:10"`` (normalised to a first value of 1).

    Raises
    ------
    TuningError
        Unless three positive, rising numbers are given.
    """
    parts = str(text).replace(",", ":").split(":")
    try:
        values = [float(p) for p in parts]
    except ValueError:
        raise TuningError(f"{text!r} is not a list of ratios: give three numbers such as 1:4:10") from None
    if len(values) != 3:
        raise TuningError(f"{text!r} has {len(values)} ratios: give three (partials 1, 2 and 3), such as 1:4:10")
    if not all(math.isfinite(v) and v > 0 for v in values):
        raise TuningError(f"{text!r}: ratios must be positive numbers, such as 1:4:10")
    if not values[0] < values[1] < values[2]:
        raise TuningError(f"{text!r}: ratios must rise (partial 1 < partial 2 < partial 3), such as 1:4:10")
    return tuple(v / values[0] for v in values)


def undercut_profile(thickness, depth, half_width, *, exponent, n_points=DEFAULT_POINTS):
    """Thicknesses (m) at `n_points` evenly spaced points of an undercut blank.

    >>> [round(float(h), 4) for h in undercut_profile(0.02, 0.5, 0.25, exponent=2, n_points=5)]
    [0.02, 0.02, 0.01, 0.02, 0.02]
    """
    s = np.linspace(0.0, 1.0, n_points)
    u = np.abs(s - 0.5) / half_width
    cut = np.where(u < 1.0, depth * (1.0 - np.minimum(u, 1.0) ** exponent), 0.0)
    return thickness * (1.0 - cut)


def _check_blank(spec):
    if spec.section != "rectangular":
        raise TuningError("an undercut needs a rectangular bar (width and thickness), not a round rod", key="resonator.diameter")
    if spec.profile is not None:
        raise TuningError("tuning starts from a uniform blank: give thickness instead of profile", key="resonator.profile")


def _shaped(spec, thickness, x, exponent, n_points, *, rounded=False):
    profile = undercut_profile(thickness, x[0], x[1], exponent=exponent, n_points=n_points)
    if rounded:
        profile = np.round(profile / ROUND_M) * ROUND_M
    return replace(spec, thickness=None, profile=tuple(float(h) for h in profile))


def _errors(spec, thickness, x, exponent, n_points, targets):
    """Cents errors of partials 2 and 3 (relative to partial 1) for cut `x` = (depth, half-width)."""
    f = bar.lowest_frequencies(_shaped(spec, thickness, x, exponent, n_points), 3)
    return 1200.0 * np.log2(f[1:3] / f[0] / np.asarray(targets[1:3]))


def _fit(spec, thickness, exponent, n_points, targets, start=None):
    """Best (depth, half-width) for one exponent: (x, worst error in cents)."""
    def residual(x):
        return _errors(spec, thickness, x, exponent, n_points, targets)

    if start is None:
        grid = [(d, w) for d in _GRID_DEPTH for w in _GRID_WIDTH]
        start = min(grid, key=lambda x: float(np.sum(residual(x) ** 2)))
    fit = least_squares(
        residual,
        start,
        bounds=([0.0, MIN_HALF_WIDTH], [MAX_DEPTH, MAX_HALF_WIDTH]),
        x_scale=[0.1, 0.05],
        diff_step=1e-5,
        xtol=1e-12,
        ftol=1e-12,
    )
    return fit.x, float(np.max(np.abs(fit.fun)))


def tune_undercut(spec, targets, *, n_points=DEFAULT_POINTS):
    """Undercut `spec`'s blank so partials 1:2:3 sound at `targets`.

    Parameters
    ----------
    spec : BarSpec
        A uniform rectangular blank.  With ``pitch_hz`` set the length is
        solved for that pitch; otherwise the length is kept.
    targets : tuple of 3 float
        Ratios, e.g. ``(1, 4, 10)`` (see :func:`parse_ratios`).
    n_points : int, MIN_POINTS..MAX_POINTS
        Profile points.

    Returns
    -------
    UndercutTuning

    Raises
    ------
    TuningError
        If the blank is not uniform and rectangular, or no cut of this family
        reaches the targets within :data:`TOLERANCE_CENTS`.
    """
    _check_blank(spec)
    targets = tuple(float(t) / float(targets[0]) for t in targets)
    thickness = spec.thickness
    best = None
    for exponent in EXPONENTS:
        x, worst = _fit(spec, thickness, exponent, n_points, targets)
        if best is None or worst < best[2]:
            best = (exponent, x, worst)
        if worst <= TOLERANCE_CENTS / 4:
            break
    exponent, x, worst = best
    if worst > TOLERANCE_CENTS:
        ratios = _errors(spec, thickness, x, exponent, n_points, targets)
        got = [t * 2 ** (e / 1200) for t, e in zip(targets[1:], ratios)]
        raise TuningError(
            f"no undercut of depth <= {MAX_DEPTH:.0%} reaches 1:{targets[1]:g}:{targets[2]:g} on this blank; "
            f"the closest is 1:{got[0]:.3g}:{got[1]:.3g} (off by {worst:.0f} cents); try other targets, "
            "or a longer or thinner blank"
        )
    shaped = _shaped(spec, thickness, x, exponent, n_points, rounded=True)
    pitch = spec.pitch_hz
    if pitch is not None:
        for _ in range(_MAX_ROUNDS):
            length = bar.solve_length(shaped, pitch)
            settled = abs(length / spec.length - 1.0) < 1e-7
            spec = replace(spec, length=length)
            if settled:
                break
            x, worst = _fit(spec, thickness, exponent, n_points, targets, start=x)
            shaped = _shaped(spec, thickness, x, exponent, n_points, rounded=True)
        shaped = replace(shaped, length=bar.solve_length(shaped, pitch), pitch_hz=pitch)
        if worst > TOLERANCE_CENTS:
            raise TuningError(
                f"the cut for 1:{targets[1]:g}:{targets[2]:g} drifts {worst:.0f} cents off once the length is "
                f"solved for {pitch:.2f} Hz; try a longer or thinner blank"
            )
    f = bar.lowest_frequencies(shaped, 3)
    return UndercutTuning(
        spec=shaped,
        blank_thickness=thickness,
        depth=float(x[0]),
        half_width=float(x[1]),
        exponent=exponent,
        targets=targets,
        frequency_hz=tuple(float(v) for v in f),
    )


def tuning_report(tuning, *, name="bar"):
    """The tuning as a few lines of text (cut, length, achieved partials)."""
    spec = tuning.spec
    length = spec.length
    lines = [
        f"{name}: undercut for 1:{tuning.targets[1]:g}:{tuning.targets[2]:g} ({spec.material}, {spec.supports}, "
        f"theory {spec.theory})",
        f"  cut: {tuning.depth:.1%} of the {tuning.blank_thickness * 1e3:.4g} mm blank removed at the centre, "
        f"half-width {tuning.half_width:.1%} of the length ({tuning.half_width * length * 1e3:.1f} mm), "
        f"shape 1 - |u|^{tuning.exponent:g} (u: distance from the centre over the half-width)",
        f"  thinnest: {min(spec.profile) * 1e3:.3f} mm; length: {length * 1e3:.2f} mm"
        + (f" (solved for {spec.pitch_hz:.2f} Hz)" if spec.pitch_hz is not None else ""),
        "  partial  target  achieved  error cents  freq Hz",
    ]
    for i, (t, r, e, f) in enumerate(zip(tuning.targets, tuning.ratios, tuning.cents_error, tuning.frequency_hz)):
        lines.append(f"  B{i + 1:<7d}{t:>7.4g}{r:>10.4f}{e:>+13.2f}{f:>9.2f}")
    lines.append(f"  {TUNING_CAUTION}")
    return "\n".join(lines)


def _plain(value):
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_plain(v) for v in value]
    return value


def profile_text(profile):
    """The profile as the list a patch takes, in mm."""
    return [f"{h * 1e3:.4f} mm" for h in profile]


def suspension_points(tuning):
    """The nodes of the tuned bar's first mode (B1), as fractions of its length from the first end.

    A free-free bar is hung at these points (Rossing: the nodes of the
    fundamental), where its sounding mode hardly moves; the cut moves them
    from the 0.224 and 0.776 of a uniform bar.  For other supports the list
    holds the supported ends too.
    """
    return tuple(float(x) for x in bar.solve(tuning.spec, 1).columns["node_positions"][0])


def profile_table(tuning):
    """The tuned profile as a printed table: x from the first end, thickness and cut depth (mm), x / length.

    Ends with the suspension points (the nodes of B1, :func:`suspension_points`) in mm from the first end.

    Examples
    --------
    >>> import synth
    >>> from synth.tuning import tune_undercut, profile_table
    >>> patch = synth.patch_from_text('''
    ... name: bench-blank
    ... resonator: {type: bar, material: rosewood, length: 400 mm, width: 50 mm, thickness: 20 mm}
    ... ''')
    >>> print(profile_table(tune_undercut(patch.resonator, (1, 4, 10), n_points=13)))  # doctest: +ELLIPSIS
    profile (x from the first end; cut depth below the 20.00 mm blank):
          x mm  thickness mm  cut depth mm  x / length
           0.0         20.00          0.00      0.0000
    ...
    suspension points (nodes of B1): ... mm from the first end
    """
    spec = tuning.spec
    length = spec.length
    h0 = tuning.blank_thickness
    lines = [f"profile (x from the first end; cut depth below the {h0 * 1e3:.2f} mm blank):",
             f"{'x mm':>10}{'thickness mm':>14}{'cut depth mm':>14}{'x / length':>12}"]
    for s, h in zip(np.linspace(0.0, 1.0, len(spec.profile)), spec.profile):
        lines.append(f"{s * length * 1e3:10.1f}{h * 1e3:14.2f}{(h0 - h) * 1e3:14.2f}{s:12.4f}")
    nodes = ", ".join(f"{x * length * 1e3:.1f}" for x in suspension_points(tuning))
    what = "suspension points (nodes of B1)" if spec.supports == "free-free" else "nodes of B1"
    lines.append(f"{what}: {nodes} mm from the first end")
    return "\n".join(lines)


def tuned_patch_text(mapping, tuning, *, source="patch"):
    """YAML text of the patch `mapping` with its blank replaced by the tuned profile.

    The thickness becomes ``profile``; with a pitch the length is left to be
    solved again on loading (the same length), else the length is kept.
    """
    mapping = _plain(mapping)
    resonator = dict(mapping["resonator"])
    resonator.pop("thickness", None)
    if tuning.spec.pitch_hz is not None:
        resonator.pop("length", None)
    resonator["profile"] = profile_text(tuning.spec.profile)
    mapping["resonator"] = resonator
    name = str(mapping.get("name", "bar"))
    mapping["name"] = name if name.endswith("-tuned") else f"{name[:74]}-tuned"
    header = [f"# {TUNING_CAUTION}", f"# Written by synth tune-bar from {source}."]
    header += [f"# {line.strip()}" for line in tuning_report(tuning, name=name).splitlines()[:3]]
    return "\n".join(header) + "\n" + yaml.safe_dump(mapping, sort_keys=False, allow_unicode=True)
