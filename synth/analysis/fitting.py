"""One model fitted to a recording's partials, as the report and the written patch need it.

:func:`fit_model` runs the fit of :mod:`synth.analysis.models` that ``--model``
names and gives back a :class:`ModelFit`: a label per partial (the model's
own, as ``synth modes`` prints them), the residual in cents, the report's
parameters and the decay law.  :func:`model_mapping` writes the physical
patch of a fitted model from the keys the user knows (``--set``), inferring
the rest: a string's diameter and tension from f0 and B given its length and
material; a bar's length, a membrane's tension or a plate's thickness from
the pitch (as every patch does).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import PatchError, option_error

__all__ = ["MODELS", "ModelFit", "fit_model", "model_mapping"]

#: A model whose rms residual exceeds this (cents) is said to fit poorly.
POOR_FIT_CENTS = 10.0

#: What ``synth fit --model`` takes.
MODELS = ("partials", "string", "bar", "membrane", "plate")

#: The model each family fit stands for (resonator keys that fix its shape).
_FAMILY_RESONATOR = {
    "bar": {"type": "bar", "supports": "free-free", "theory": "euler-bernoulli"},
    "membrane": {"type": "membrane", "shape": "circle"},
    "plate": {"type": "plate", "shape": "circle", "edges": "free"},
}


@dataclass(frozen=True)
class ModelFit:
    """A fitted model, as the report shows it.

    Attributes
    ----------
    model : str
        One of :data:`MODELS` (not "partials").
    labels : tuple of str
        The model's label of each partial (``n=3``, ``B2``, ``(0,1)``);
        ``?k`` for partial k off the model.
    residual_cents : ndarray [shape=(N,)]
        Measured minus model, cents; NaN off the model.
    reference_hz : float, Hz
        The model's first partial: what ratios are read against.
    parameters : dict
        Report parameters (SI, unit-suffixed keys; :mod:`synth.labels`).
    damping : dict or None
        ``{t60, t60_high, high_frequency}`` of the decay law b1 + b3 f^2.
    warnings : tuple of str
        Said when the model fits poorly (:data:`POOR_FIT_CENTS`, or half the
        partials off it).
    detail : object
        The fit itself (:class:`~synth.analysis.models.StringFit` or
        :class:`~synth.analysis.models.FamilyFit`).
    """

    model: str
    labels: tuple
    residual_cents: np.ndarray
    reference_hz: float
    parameters: dict = field(default_factory=dict)
    damping: dict | None = None
    detail: object = None
    warnings: tuple = ()


def _listed(items, limit=8):
    items = [str(i) for i in items]
    return ", ".join(items[:limit]) + (f", ... ({len(items)})" if len(items) > limit else "") if items else "none"


def _decay_parameters(decay):
    if decay is None:
        return {}
    return {"decay_law": (f"sigma = {decay.b1:.4g} + {decay.b3:.4g} f² (1/s): T60 {decay.t60:.3g} s at "
                          f"{decay.fundamental_hz:.1f} Hz, {decay.t60_high:.3g} s at {decay.high_frequency:.0f} Hz")}


def fit_model(estimate, model, *, pitch_hint_hz=None, poisson_ratio=None):
    """Fit `model` (one of :data:`MODELS`) to an estimate's partials; None for ``"partials"``.

    Raises
    ------
    PatchError
        The partials fit no such object (one line; names ``--model``).
    """
    from .decay import fit_decay
    from .models import fit_family, fit_string

    if model == "partials":
        return None
    f, sd = np.asarray(estimate.frequency_hz), np.asarray(estimate.frequency_sd_hz)
    sd = np.where(np.isfinite(sd) & (sd > 0), sd, np.nan)
    sd = None if np.all(np.isnan(sd)) else np.where(np.isnan(sd), np.nanmax(sd), sd)
    try:
        if model == "string":
            fit = fit_string(f, frequency_sd_hz=sd, t60_s=estimate.t60_s, t60_sd_s=estimate.t60_sd_s,
                             pitch_hint_hz=pitch_hint_hz)
        else:
            fit = fit_family(f, family=model, frequency_sd_hz=sd, poisson_ratio=poisson_ratio)
    except PatchError as error:
        raise option_error(f"the partials fit no {model}: {error.message}", "--model") from None
    matched = np.asarray(fit.matched, dtype=bool)
    n_matched = int(np.count_nonzero(matched))
    if model == "string":
        labels = tuple(f"n={int(n)}" if on else f"?{i + 1}" for i, (n, on) in enumerate(zip(fit.partial_number, matched)))
        reference = float(fit.fundamental_hz)
        decay = fit.decay
        parameters = {
            "model": "string: f_n = n f0 sqrt(1 + B n²) (stiff string)",
            "ideal_fundamental_hz": fit.f0_hz,
            "ideal_fundamental_sd_hz": fit.f0_sd_hz,
            "inharmonicity_b": fit.inharmonicity,
            "inharmonicity_sd": fit.inharmonicity_sd,
            "missing_members": _listed(f"n={n}" for n in fit.missing),
        }
    else:
        labels = tuple(label if on else f"?{i + 1}" for i, (label, on) in enumerate(zip(fit.labels, matched)))
        reference = float(fit.scale_hz)
        decay = fit_decay(f[matched], np.asarray(estimate.t60_s)[matched],
                          t60_sd_s=np.asarray(estimate.t60_sd_s)[matched], fundamental_hz=reference) \
            if n_matched >= 2 else None
        words = {"bar": "free-free thin bar (Euler-Bernoulli)", "membrane": "ideal circular membrane",
                 "plate": f"free circular thin plate (Poisson's ratio {fit.poisson_ratio or 0.3:.3g})"}[model]
        parameters = {
            "model": f"{model}: the ratio family of the {words}, one scale fitted",
            "family_scale_hz": fit.scale_hz,
            "missing_members": _listed(fit.missing),
        }
    parameters["matched_partials"] = f"{n_matched} of {len(f)}"
    parameters["fit_rms_cents"] = fit.rms_cents
    parameters.update(_decay_parameters(decay))
    warnings = ()
    if not fit.rms_cents <= POOR_FIT_CENTS or n_matched < max(2, len(f) // 2):
        warnings = (f"the partials fit a {model} poorly (rms residual {fit.rms_cents:.1f} cents, {n_matched} of "
                    f"{len(f)} partials on the model): another --model, or partials, may describe it better",)
    return ModelFit(model, labels, np.asarray(fit.residual_cents, dtype=float), reference, parameters,
                    None if decay is None else decay.damping, fit, warnings)


def _hz(value):
    return f"{float(f'{value:.9g}')} Hz"


def _given(overrides):
    """{dotted key: value} of the ``--set`` values."""
    return {key: value for key, (value, _option) in overrides.items()}


def _needs(model, keys):
    return option_error(f"a {model} patch needs what the recording cannot say: give "
                        + " and ".join(f"--set {k}=..." for k in keys), "--model")


def model_mapping(fit, *, name, sample_rate, overrides):
    """The physical patch (a plain mapping, before `overrides` are applied) of a fitted model.

    Parameters
    ----------
    fit : ModelFit
    name : str
    sample_rate : float, Hz
    overrides : dict
        ``{key: (value, option)}`` of ``--set``: what the user knows of the
        object (a string's ``resonator.length`` and ``resonator.material``, a
        bar's section and material, a membrane's radius and areal density, a
        plate's radius and material).

    Returns
    -------
    dict
        ``pitch`` is the model's first partial, so the patch solves the
        parameter it moves; a string's diameter comes from B.

    Raises
    ------
    PatchError
        A key the model cannot do without is not given (names ``--model``).
    """
    from ..patch import patch_from_mapping
    from .models import string_geometry

    given = _given(overrides)
    resonator = {"type": fit.model} if fit.model == "string" else dict(_FAMILY_RESONATOR[fit.model])
    if fit.model == "string" and "resonator.diameter" not in given:
        missing = [k for k in ("resonator.length", "resonator.material") if k not in given]
        if missing:
            raise _needs("string", missing)
        if not fit.detail.inharmonicity > 0:
            raise option_error("the string's partials show no inharmonicity (B = 0), so its diameter cannot be "
                               "inferred: give --set resonator.diameter=...", "--model")
        # The loader reads the given length and material (a name, a mapping or a file) as a patch would.
        probe = patch_from_mapping({"name": name, "resonator": {"type": "string", "diameter": "1 mm",
                                                                "tension": "100 N"}},
                                   file="<fit>", overrides={k: v for k, v in overrides.items()
                                                            if k in ("resonator.length", "resonator.material",
                                                                     "resonator.ends")}).resonator
        diameter, _tension = string_geometry(f0_hz=fit.detail.f0_hz, inharmonicity=fit.detail.inharmonicity,
                                             length=probe.length, density=probe.density,
                                             youngs_modulus=probe.youngs_modulus, ends=probe.ends)
        resonator["diameter"] = f"{float(f'{diameter * 1e3:.6g}')} mm"
    resonator["pitch"] = _hz(fit.reference_hz)
    mapping = {"name": name, "resonator": resonator}
    if fit.damping is not None and math.isfinite(fit.damping["t60"]):
        damping = {"t60": f"{fit.damping['t60']:.4g} s"}
        if fit.damping["t60_high"] < fit.damping["t60"]:
            damping["t60_high"] = f"{fit.damping['t60_high']:.4g} s"
            damping["high_frequency"] = f"{fit.damping['high_frequency']:.0f} Hz"
        mapping["damping"] = damping
    mapping["render"] = {"duration": "auto", "sample_rate": min(max(int(round(sample_rate)), 8000), 192000),
                         "bit_depth": 24}
    return mapping
