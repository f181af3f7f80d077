"""``synth fit RECORDING``: the partial table of a recording, a model fitted to it, a patch, a material.

The command's side of :mod:`synth.analysis`: options are checked before the
file is read, the table is printed in the form of ``synth modes``, the patch
(``-o PATCH.yaml``) or the calibrated material (``--blank``, ``-o
MATERIAL.yaml``) is written atomically, and ``--check`` renders the written
patch and says how far its spectrum is from the recording's.
"""
from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import numpy as np
import yaml

from ..errors import PatchError, option_error

__all__ = ["run_fit", "spectral_distance", "parse_channel"]

CHECK_SECONDS = 2.0  # s of the recording (after its onset) and of the render that --check compares
BANDS_PER_OCTAVE = 6  # the check's band width: 1/6 octave
CHECK_RANGE_DB = 60.0  # bands more than this below the recording's strongest band are left out of the check


def parse_channel(text):
    """None, "mix" or a channel number >= 1 from ``--channel`` (one line naming it otherwise)."""
    if text is None:
        return None
    if str(text).strip().lower() == "mix":
        return "mix"
    try:
        number = int(str(text))
    except ValueError:
        number = 0
    if number < 1:
        raise option_error(f"give a channel number 1, 2, ... or mix, got {text!r}", "--channel")
    return number


def _band_levels(signal, sample_rate, edges):
    from scipy.signal import welch

    n = len(signal)
    freq, power = welch(signal, fs=sample_rate, nperseg=min(8192, n), window="hann")
    index = np.searchsorted(freq, edges)
    sums = np.add.reduceat(power, np.minimum(index[:-1], len(power) - 1)) if len(power) else np.zeros(0)
    sums = np.where(index[1:] > index[:-1], sums, 0.0)
    return sums / max(float(np.sum(sums)), 1e-300)


def spectral_distance(recorded, rendered, *, sample_rate, lowest_hz=20.0):
    """Root-mean-square difference (dB) of two sounds' band spectra, each normalised to its own power.

    Parameters
    ----------
    recorded, rendered : array_like [shape=(n,)]
        The recording from its onset and the render, the same length.
    sample_rate : float, Hz
    lowest_hz : float, Hz
        The lowest band's lower edge.

    Returns
    -------
    distance_db : float
    n_bands : int
        Bands compared: 1/6-octave bands from `lowest_hz` to 0.45 of the
        sample rate where the recording is within 60 dB of its strongest band.

    Notes
    -----
    A log-spectral distance (common practice): Welch power spectra (Hann,
    8192 points) summed into 1/6-octave bands, each spectrum divided by its
    total power, ``d = sqrt(mean((10 log10 P_rec - 10 log10 P_ren)**2))``; a
    band empty in the render counts at -120 dB.

    Examples
    --------
    >>> t = np.arange(8000) / 8000
    >>> tone = np.sin(2 * np.pi * 440 * t) * np.exp(-3 * t)
    >>> round(spectral_distance(tone, 0.5 * tone, sample_rate=8000)[0], 6)
    0.0
    """
    n_octaves = math.log2(0.45 * sample_rate / lowest_hz)
    edges = lowest_hz * 2.0 ** (np.arange(int(n_octaves * BANDS_PER_OCTAVE) + 1) / BANDS_PER_OCTAVE)
    a = _band_levels(np.asarray(recorded, dtype=float), sample_rate, edges)
    b = _band_levels(np.asarray(rendered, dtype=float), sample_rate, edges)
    with np.errstate(divide="ignore"):
        level_a, level_b = 10.0 * np.log10(a), np.maximum(10.0 * np.log10(b), -120.0)
    keep = level_a >= np.max(level_a) - CHECK_RANGE_DB
    return float(np.sqrt(np.mean((level_a[keep] - level_b[keep]) ** 2))), int(np.count_nonzero(keep))


def _check(patch, recording, estimate):
    """The written patch rendered and compared with the recording (a dict for the report)."""
    from dataclasses import replace

    from ..api import render

    start = int(round(estimate.onset_s * recording.sample_rate))
    recorded = np.asarray(recording.signal[start:start + int(CHECK_SECONDS * recording.sample_rate)], dtype=float)
    rate = int(patch.render.sample_rate)
    if rate != int(round(recording.sample_rate)):
        raise option_error("the patch renders at another sample rate than the recording's: leave "
                           "render.sample_rate to the fit", "--check")
    patch = replace(patch, render=replace(patch.render, duration=max(len(recorded) / rate, 0.05)))
    signal = np.asarray(render(patch).signal, dtype=float)[: len(recorded)]
    recorded = recorded[: len(signal)]
    distance, bands = spectral_distance(recorded, signal, sample_rate=rate)
    return {"spectral_distance_db": distance, "bands": bands, "seconds": len(signal) / rate}


def _overrides(args):
    """The ``--set`` values only: ``--pitch`` and ``--max-modes`` of synth fit are not patch keys."""
    from ..cli import settings

    return settings(args.settings)


def _options(args):
    """(pitch hint Hz, lowest Hz, channel, output) after checking every option."""
    from ..audio import check_output_file
    from ..schema import Field, convert_option

    if args.max_modes is not None and (not isinstance(args.max_modes, int) or args.max_modes < 1):
        raise option_error(f"must be a whole number >= 1, got {args.max_modes}", "--max-modes")
    if args.rows is not None and args.rows < 1:
        raise option_error(f"must be a whole number >= 1, got {args.rows}", "--rows")
    hint = None if args.pitch is None else convert_option(Field("pitch", positive=True), args.pitch, "--pitch")
    lowest = None if args.lowest is None else convert_option(Field("frequency", positive=True), args.lowest,
                                                             "--lowest")
    if args.blank is not None and args.model != "partials":
        raise option_error("--blank calibrates the blank's own model: leave out --model", "--model")
    if args.blank is not None and args.check:
        raise option_error("--check renders a fitted patch; with --blank the output is a material", "--check")
    out = Path(args.output) if args.output else None
    if out is not None:
        inputs = (args.recording,) + ((args.blank,) if args.blank else ())
        check_output_file(out, suffixes=(".yaml", ".yml"), inputs=inputs, key="--output")
    return hint, lowest, parse_channel(args.channel), out


def _patch(table, fit, recording, overrides, model):
    """(mapping, Patch) of the patch that resynthesises the recording."""
    from ..patch import apply_overrides, patch_from_mapping
    from .fitting import model_mapping
    from .recording import partials_mapping

    if fit is None:
        mapping = partials_mapping(table, name=recording.name, sample_rate=recording.sample_rate)
    else:
        mapping = model_mapping(fit, name=recording.name, sample_rate=recording.sample_rate, overrides=overrides)
    mapping = apply_overrides(mapping, overrides, "<fit>")
    try:
        patch = patch_from_mapping(mapping, file="<fit>")
    except PatchError as error:
        if error.file == "<fit>":  # a key the written patch needs and nobody gave
            raise option_error(f"the {model} patch: {error.key}: {error.message}"
                               + (f" (give --set {error.key}=...)" if "missing" in error.message else ""),
                               "--model") from None
        raise
    return mapping, patch


def _plain(value):
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    return value


def _patch_text(mapping, table, fit, recording, check):
    head = [f"# Written by synth fit from {Path(recording.path).name} ({recording.channel}), "
            f"{len(table.frequency_hz)} partials from {table.parameters['onset_s']:.3f} s.",
            "# " + ("a partials patch: each partial's ratio, T60 and level as measured" if fit is None else
                    f"model {table.parameters['model']}; rms residual {fit.parameters['fit_rms_cents']:.2f} cents"),
            "# The excitation and pickup positions are not measured: edit them to taste."]
    if check is not None:
        head.append(f"# Check: spectral distance {check['spectral_distance_db']:.1f} dB over {check['bands']} "
                    f"1/6-octave bands ({check['seconds']:.2f} s).")
    return "\n".join(head) + "\n" + yaml.safe_dump(_plain(mapping), sort_keys=False, allow_unicode=True,
                                                   default_flow_style=None, width=100)


def _calibrate(args, estimate, recording, out):
    from ..audio import atomic_output
    from ..patch import patch_from_mapping
    from ..yamlio import load_yaml_file
    from .calibrate import calibrate_material, material_yaml

    blank = patch_from_mapping(load_yaml_file(args.blank), file=str(args.blank), overrides=_overrides(args))
    cal = calibrate_material(estimate.frequency_hz, blank=blank, frequency_sd_hz=estimate.frequency_sd_hz)
    data = _calibration_dict(cal)
    if args.json:
        print(json.dumps(data, indent=2, allow_nan=False))
    else:
        print("\n".join(_calibration_text(cal, recording, args.blank)))
    if out is not None:
        with atomic_output(out, key="--output") as tmp:
            tmp.write_text(material_yaml(cal, recording=Path(recording.path).name, blank_file=str(args.blank)),
                           encoding="utf-8")
        print(f"wrote {out}; use it: --set resonator.material={out} (or material: {out.name} in a patch beside it)",
              file=sys.stderr if args.json else sys.stdout)
    return 0


def _finite(value):
    value = float(value)
    return value if math.isfinite(value) else None


def _calibration_dict(cal):
    rows = [{"label": label, "frequency_hz": _finite(f), "model_before_hz": _finite(b), "model_after_hz": _finite(a),
             "before_cents": _finite(cb), "after_cents": _finite(ca)}
            for label, f, b, a, cb, ca in zip(cal.labels, cal.frequency_hz, cal.model_before_hz, cal.model_after_hz,
                                              cal.residual_before_cents, cal.residual_after_cents)]
    return {"blank": cal.blank_name, "resonator": cal.resonator, "material": cal.material,
            "youngs_modulus_pa": _finite(cal.youngs_modulus), "youngs_modulus_sd_pa": _finite(cal.youngs_modulus_sd),
            "handbook_youngs_modulus_pa": _finite(cal.handbook_youngs_modulus),
            "youngs_change_percent": _finite(cal.youngs_change_percent),
            "shear_modulus_pa": None if cal.shear_modulus is None else _finite(cal.shear_modulus),
            "shear_modulus_sd_pa": None if cal.shear_modulus_sd is None else _finite(cal.shear_modulus_sd),
            "shear_fitted": bool(cal.shear_fitted),
            "rms_before_cents": _finite(cal.rms_before_cents), "rms_after_cents": _finite(cal.rms_after_cents),
            "partials": rows, "unmatched": [int(i) for i in cal.unmatched], "missing": list(cal.missing),
            "notes": list(cal.notes)}


def _gpa(value, sd=None):
    if value is None or not math.isfinite(value):
        return "not fitted"
    text = f"{value / 1e9:.3f} GPa"
    return text + (f" ± {sd / 1e9:.2g}" if sd is not None and math.isfinite(sd) else "")


def _calibration_text(cal, recording, blank_file):
    lines = [f"{cal.blank_name} ({cal.resonator} blank from {blank_file}) tapped in {recording.path} "
             f"({recording.channel}): {len(cal.frequency_hz)} partials",
             f"  material: {cal.material}",
             f"  Young's modulus: {_gpa(cal.youngs_modulus, cal.youngs_modulus_sd)} "
             f"(handbook {_gpa(cal.handbook_youngs_modulus)}, {cal.youngs_change_percent:+.1f} %)"]
    if cal.shear_modulus is not None:
        words = "fitted" if cal.shear_fitted else "kept at the handbook ratio"
        change = "" if cal.shear_change_percent is None else f", {cal.shear_change_percent:+.1f} %"
        lines.append(f"  shear modulus: {_gpa(cal.shear_modulus, cal.shear_modulus_sd if cal.shear_fitted else None)}"
                     f" ({words}; handbook {_gpa(cal.handbook_shear_modulus)}{change})")
    lines.append(f"  rms residual: {cal.rms_before_cents:.1f} cents with the handbook values, "
                 f"{cal.rms_after_cents:.2f} cents calibrated")
    cells = [["mode", "measured Hz", "handbook Hz", "cents", "calibrated Hz", "cents"]]
    for label, f, b, a, cb, ca in zip(cal.labels, cal.frequency_hz, cal.model_before_hz, cal.model_after_hz,
                                      cal.residual_before_cents, cal.residual_after_cents):
        fin = [math.isfinite(float(x)) for x in (b, a, cb, ca)]
        cells.append([label or "?", f"{f:.2f}", f"{b:.2f}" if fin[0] else "", f"{cb:+.1f}" if fin[2] else "",
                      f"{a:.2f}" if fin[1] else "", f"{ca:+.2f}" if fin[3] else ""])
    widths = [max(len(r[c]) for r in cells) for c in range(len(cells[0]))]
    lines += ["  ".join(c.ljust(w) if i == 0 else c.rjust(w) for i, (c, w) in enumerate(zip(row, widths))).rstrip()
              for row in cells]
    lines += [f"note: {note}" for note in cal.notes]
    lines.append("caution: a calibrated material is a preview from one tap; wood varies along a plank: "
                 "remove material a little at a time and listen")
    return lines


def run_fit(args):
    """``synth fit RECORDING [--pitch] [--model] [--json] [-o] [--check] [--blank]``."""
    from ..audio import atomic_output
    from ..report import table_to_dict, table_to_text
    from .fitting import fit_model
    from .recording import analyse_recording, estimate_table, read_recording

    hint, lowest, channel, out = _options(args)
    overrides = _overrides(args)
    recording = read_recording(args.recording, channel=channel)
    estimate = analyse_recording(recording, pitch_hint_hz=hint, max_modes=args.max_modes, lowest_hz=lowest)
    if args.blank is not None:
        return _calibrate(args, estimate, recording, out)
    fit = fit_model(estimate, args.model, pitch_hint_hz=hint)
    table = estimate_table(estimate, recording, fit=fit, pitch_hint_hz=hint)
    mapping = patch = check = None
    if out is not None or args.check:
        mapping, patch = _patch(table, fit, recording, overrides, args.model)
    if args.check:
        check = _check(patch, recording, estimate)
    if args.json:
        data = table_to_dict(table)
        if check is not None:
            data["check"] = check
        print(json.dumps(data, indent=2, allow_nan=False))
    else:
        print(table_to_text(table, max_rows=args.rows, units=args.units, source=args.recording, command="synth fit"))
        if check is not None:
            print(f"check: the written patch rendered for {check['seconds']:.2f} s is "
                  f"{check['spectral_distance_db']:.1f} dB from the recording (log-spectral distance over "
                  f"{check['bands']} 1/6-octave bands)")
    if out is not None:
        with atomic_output(out, key="--output") as tmp:
            tmp.write_text(_patch_text(mapping, table, fit, recording, check), encoding="utf-8")
        print(f"wrote {out}", file=sys.stderr if args.json else sys.stdout)
    return 0
