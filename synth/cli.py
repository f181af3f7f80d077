"""The ``synth`` command line.

Every user error is one line on stderr (``synth: error: FILE:LINE: KEY: ...``;
for an option, ``synth: error: command line: --option: ...``) and exit status
2, with nothing written.  A request whose numbers the physics cannot handle
(an overflow, a singular matrix, memory) is one line and status 2 too.  When
the reader of stdout goes away (``synth modes P --json | head``) the command
stops quietly with status 141 (128 + SIGPIPE, what a shell reports for a
program killed by a broken pipe).
"""
from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from . import __version__
from .errors import COMMAND_LINE, ModalError, option_error

__all__ = ["main", "LISTENING_CAUTION"]

LISTENING_CAUTION = (
    "listening caution: start playback quietly and raise it slowly; long exposure to loud sound harms hearing"
)
DEFAULT_OUTPUT_DIR = Path("renders")
#: Exit status after the reader of stdout went away: 128 + SIGPIPE (13), as a shell reports.
BROKEN_PIPE_STATUS = 141
#: Numeric failures deep in the physics that extreme (but finite) inputs can cause.
#: ArithmeticError covers OverflowError, ZeroDivisionError and FloatingPointError;
#: numpy's LinAlgError joins them once numpy is loaded (:func:`_numeric_errors`).
NUMERIC_ERRORS = (ArithmeticError, MemoryError, RecursionError)
NUMERIC_HINT = "check that sizes and frequencies are physically sensible"
SHORT_MESSAGE_CHARS = 80  # of a numeric failure's own message
#: synth.labels.UNIT_SYSTEMS and DEFAULT_UNITS, spelled out so ``synth --help`` needs no numpy (a test keeps them equal).
UNIT_SYSTEMS = ("si", "workshop", "imperial")
DEFAULT_UNITS = "workshop"


#: Dedicated options and the patch key each one sets (as ``--set KEY=VALUE`` would).
_KEY_OPTIONS = (
    ("duration", "render.duration", "--duration"),
    ("sample_rate", "render.sample_rate", "--sample-rate"),
    ("pitch", "resonator.pitch", "--pitch"),
    ("max_modes", "render.max_modes", "--max-modes"),
    ("bit_depth", "render.bit_depth", "--bit-depth"),
)
#: A dotted patch key: names of letters, digits and '_' joined by dots.
_KEY_PATTERN = r"[A-Za-z_][A-Za-z0-9_]*(\.[A-Za-z_][A-Za-z0-9_]*)*"


def _setting(text):
    """(key, value, option) of one ``--set KEY=VALUE``; the value is read as YAML (safely)."""
    import re

    from .yamlio import load_yaml_text

    key, sep, value = text.partition("=")
    key = key.strip()
    if not sep or not re.fullmatch(_KEY_PATTERN, key):
        raise option_error(f"give KEY=VALUE with a dotted patch key, e.g. --set resonator.length=\"650 mm\", "
                           f"got {text!r}", "--set")
    option = f"--set {key}"
    try:
        parsed = load_yaml_text(value, file=COMMAND_LINE) if value.strip() else None
    except ModalError as error:
        raise option_error(f"cannot read {value!r} as a value ({getattr(error, 'message', error)})", option) from None
    return key, parsed, option


def _overrides(args):
    """{dotted key: (value, option)} from the dedicated options and every ``--set``; a key given twice is an error."""
    overrides = {}
    for attr, key, option in _KEY_OPTIONS:
        value = getattr(args, attr, None)
        if value is not None:
            overrides[key] = (value, option)
    return settings(getattr(args, "settings", None), overrides)


def settings(texts, overrides=None):
    """`overrides` ({dotted key: (value, option)}) with every ``--set KEY=VALUE`` of `texts` added; twice is an error."""
    overrides = dict(overrides or {})
    for text in texts or ():
        key, value, option = _setting(text)
        if key in overrides:
            raise option_error(f"{key} is already set by {overrides[key][1]}: give it once", option)
        overrides[key] = (value, option)
    return overrides


def _load_key(args):
    """(patch, output stem) of ``args.patch``: a patch file (``--pitch`` retunes it) or one key of an instrument file."""
    from .instrument_file import instrument_from_mapping, is_instrument_mapping, key_of
    from .units import midi_to_note
    from .patch import patch_from_mapping
    from .yamlio import load_yaml_file

    overrides = _overrides(args)
    mapping = load_yaml_file(args.patch)
    if not is_instrument_mapping(mapping):
        patch = patch_from_mapping(mapping, file=str(args.patch), overrides=overrides)
        if "resonator.pitch" in overrides and getattr(patch.resonator, "profile", None) is not None:
            patch = _mark_shaped_for(patch, mapping, overrides, str(args.patch))
        return patch, patch.name
    pitch = overrides.pop("resonator.pitch", None)
    instrument = instrument_from_mapping(mapping, file=str(args.patch), overrides=overrides)
    if pitch is None:
        raise option_error(f"{args.patch} is an instrument of the keys {instrument.range_text}: "
                           "give --pitch KEY (a note name such as C4)", "--pitch")
    try:
        midi = key_of(pitch[0])
    except ValueError as error:
        raise option_error(f"{error} (an instrument plays its keys {instrument.range_text})", "--pitch") from None
    if not instrument.contains(midi):
        raise option_error(f"key {pitch[0]} is outside the instrument's range {instrument.range_text}", "--pitch")
    return instrument.key_patch(midi), f"{instrument.name}-{midi_to_note(midi).replace('#', 's')}"


def _mark_shaped_for(patch, mapping, overrides, file):
    """`patch` (a shaped bar moved by ``--pitch``) marked with the pitch its profile was made for.

    The report then warns that its tuned ratios moved, as it does for a MIDI
    note or a library sample (:func:`synth.resonators.bar.retune` marks those).
    """
    from dataclasses import replace

    from .patch import patch_from_mapping
    from .solvecache import DEFAULT_CACHE

    made = patch_from_mapping(mapping, file=file, overrides={k: v for k, v in overrides.items() if k != "resonator.pitch"})
    made_hz = made.resonator.pitch_hz or float(DEFAULT_CACHE.solve(made.resonator, 1).frequency_hz[0])
    if abs(made_hz / patch.resonator.pitch_hz - 1.0) < 1e-9:
        return patch
    return replace(patch, resonator=replace(patch.resonator, shaped_for_hz=made_hz))


def _warn(messages, source=None):
    """Each of `messages` as one ``synth: warning:`` line on stderr, naming `source` (the patch) when given."""
    where = f"{source}: " if source else ""
    for message in dict.fromkeys(messages):  # each once, in order
        print(f"synth: warning: {where}{message}", file=sys.stderr)


def _note(messages, source=None):
    where = f"{source}: " if source else ""
    for message in messages:
        print(f"synth: note: {where}{message}", file=sys.stderr)


def _check_rows(rows):
    if rows is not None and rows < 1:
        raise option_error(f"must be a whole number >= 1, got {rows}", "--rows")


def cmd_modes(args):
    from .audio import atomic_output, check_output_file
    from .pipeline import partial_table
    from .report import table_to_csv, table_to_json, table_to_text

    _check_rows(args.rows)
    to_stdout = args.csv == "-"
    if to_stdout and args.json:
        raise option_error("--csv - and --json both print to stdout: give one of them", "--csv")
    if args.csv and not to_stdout:
        check_output_file(args.csv, suffixes=(".csv",), inputs=(args.patch,), key="--csv")
    patch, _ = _load_key(args)
    table = partial_table(patch, onset=False)  # a report: the onset samples are not needed
    if to_stdout:
        sys.stdout.write(table_to_csv(table))
        return 0
    if args.csv:
        with atomic_output(Path(args.csv), key="--csv") as tmp:
            tmp.write_text(table_to_csv(table), encoding="utf-8")
    if args.json:
        print(table_to_json(table))
    else:
        print(table_to_text(table, max_rows=args.rows, units=args.units, source=args.patch))
    if args.csv and not args.json:
        print(f"wrote {args.csv}")
    return 0


def cmd_render(args):
    from .api import voiced
    from .audio import check_output_path, make_output_folder, normalise, peak_dbfs, sampler_fields, write_audio
    from .library import loudness_lufs
    from .pipeline import partial_table, patch_ending, render_patch
    from .report import table_to_text
    from .truepeak import true_peak_dbtp
    from .units import hz_to_midi

    _check_rows(args.rows)
    patch, stem = _load_key(args)
    patch = voiced(patch, args.velocity, option="--velocity")  # None: the patch as written
    bits, rate = patch.render.bit_depth, patch.render.sample_rate
    out = Path(args.output) if args.output else DEFAULT_OUTPUT_DIR / f"{stem}.wav"
    check_output_path(out, bits, inputs=(args.patch,), make_folder=not args.output)
    table = partial_table(patch)
    ending = patch_ending(patch, table)
    signal, table = render_patch(patch, table=table, ending=ending)
    scaled, _ = normalise(signal, peak_db=patch.render.peak_db, bit_depth=bits, peak=patch.render.peak,
                          sample_rate=rate)
    if not args.output:
        make_output_folder(out)
    sampler = sampler_fields(float(hz_to_midi(table.fundamental_hz)))
    write_audio(out, scaled, sample_rate=rate, bit_depth=bits, key="--output" if args.output else None, sampler=sampler)
    if not args.quiet:
        print(table_to_text(table, max_rows=args.rows, units=args.units, source=args.patch, warnings=False))
    loudness, _ = loudness_lufs(scaled, rate)
    heard = "" if loudness is None else f", {loudness:.1f} LUFS"
    print(
        f"wrote {out} ({len(scaled) / rate:.2f} s, {rate:g} Hz, {int(bits)}-bit, peak {peak_dbfs(scaled):.2f} dBFS, "
        f"true peak {true_peak_dbtp(scaled, rate):.2f} dBTP{heard})"
    )
    note = ending.describe(rate)
    if note is not None and (ending.audible_cut or ending.capped):
        _warn([note], args.patch)
    elif note is not None and not args.quiet:
        _note([note], args.patch)
    _warn(table.warnings, args.patch)
    if not args.quiet:
        print(LISTENING_CAUTION, file=sys.stderr)
    return 0


def cmd_midi(args):
    from .midi import render_midi

    out = Path(args.output) if args.output else DEFAULT_OUTPUT_DIR / f"{Path(args.song).stem}.wav"
    result = render_midi(
        args.song,
        output=out,
        patch=args.patch,
        map_file=args.map,
        a4_hz=args.a4,
        sample_rate=args.sample_rate,
        bit_depth=args.bit_depth,
        tail_s=args.tail,
        progress=not args.quiet and sys.stderr.isatty(),
        make_folder=not args.output,
    )
    layout = "stereo" if result.n_channels == 2 else "mono"
    notes = f"{result.n_notes} note{'s' * (result.n_notes != 1)}"
    print(
        f"wrote {out} ({notes}, {result.duration_s:.2f} s, {result.sample_rate:g} Hz, "
        f"{int(result.bit_depth)}-bit {layout}, peak {result.peak_dbfs:.2f} dBFS, "
        f"true peak {result.true_peak_dbtp:.2f} dBTP)"
    )
    _warn(result.warnings)
    if not args.quiet:
        print(LISTENING_CAUTION, file=sys.stderr)
    return 0


def cmd_batch(args):
    from .batch import build_library, summary_lines
    from .executors import WORKER_TIMEOUT_S

    worker_timeout = WORKER_TIMEOUT_S
    if args.worker_timeout is not None:
        from .schema import Field, convert_option

        worker_timeout = convert_option(Field("time", positive=True, high=86400.0), args.worker_timeout, "--worker-timeout")
    result = build_library(args.spec, output=args.output, workers=args.workers, scheduler=args.scheduler, force=args.force,
                           prune=args.prune, worker_timeout=worker_timeout, verbose=args.verbose)
    out, err = summary_lines(result)
    for line in out:
        print(line)
    for line in err:
        print(line, file=sys.stderr)
    if result.rendered and not args.quiet:
        print(LISTENING_CAUTION, file=sys.stderr)
    return result.exit_status


def cmd_tune_bar(args):
    from .tuning import (
        MAX_POINTS,
        MIN_POINTS,
        TuningError,
        parse_ratios,
        profile_table,
        profile_text,
        tune_undercut,
        tuned_patch_text,
        tuning_report,
    )
    from .audio import atomic_output, check_output_file
    from .patch import apply_overrides, patch_from_mapping
    from .yamlio import load_yaml_file

    out = Path(args.output) if args.output else None
    if out is not None:
        check_output_file(out, suffixes=(".yaml", ".yml"), inputs=(args.patch,), key="--output")
    drawing = Path(args.drawing) if args.drawing else None
    if drawing is not None:
        from .plotcmd import check_figure_output

        drawing = check_figure_output(drawing, inputs=(args.patch, out), key="--drawing",
                                      command="synth tune-bar --drawing")
    if not MIN_POINTS <= args.points <= MAX_POINTS:
        raise option_error(f"must be {MIN_POINTS}..{MAX_POINTS}, got {args.points}", "--points")
    try:
        targets = parse_ratios(args.ratios)
    except TuningError as error:
        raise option_error(str(error), "--ratios") from None
    # --set values go into the tuned patch that -o writes, as if they had been in the file
    mapping = apply_overrides(load_yaml_file(args.patch), _overrides(args), str(args.patch))
    patch = patch_from_mapping(mapping, file=str(args.patch))
    if patch.resonator.TYPE != "bar":
        raise patch.error("resonator.type", f"tune-bar shapes bars, not a {patch.resonator.TYPE}")
    try:
        tuning = tune_undercut(patch.resonator, targets, n_points=args.points)
    except TuningError as error:
        if error.key.startswith("resonator."):
            raise patch.error(error.key, str(error)) from None
        raise option_error(str(error), error.key) from None
    print(tuning_report(tuning, name=patch.name))
    print(profile_table(tuning))
    if out is None:
        print("profile:  # paste into the patch's resonator section in place of thickness")
        for value in profile_text(tuning.spec.profile):
            print(f"  - {value}")
    else:
        with atomic_output(out, key="--output") as tmp:
            tmp.write_text(tuned_patch_text(mapping, tuning, source=Path(args.patch).name), encoding="utf-8")
        print(f"wrote {out}")
    if drawing is not None:
        from .plotcmd import write_figure
        from .plots import bar_profile_drawing

        write_figure(bar_profile_drawing(tuning, name=patch.name), drawing, key="--drawing")
        print(f"wrote {drawing}")
    return 0


def cmd_range(args):
    from .audio import atomic_output, check_output_file
    from .instrument_file import instrument_from_mapping, is_instrument_mapping
    from .keyrange import range_rows, range_to_csv, range_to_json, range_to_text
    from .yamlio import load_yaml_file

    to_stdout = args.csv == "-"
    if to_stdout and args.json:
        raise option_error("--csv - and --json both print to stdout: give one of them", "--csv")
    if args.csv and not to_stdout:
        check_output_file(args.csv, suffixes=(".csv",), inputs=(args.instrument,), key="--csv")
    mapping = load_yaml_file(args.instrument)
    if not is_instrument_mapping(mapping):
        from .errors import PatchError

        raise PatchError("is a patch, not an instrument (an instrument file has a range: {from: NOTE, to: NOTE}); "
                         "synth modes shows a patch", file=args.instrument, line=1)
    instrument = instrument_from_mapping(mapping, file=str(args.instrument), overrides=_overrides(args))
    rows = range_rows(instrument)
    if to_stdout:
        sys.stdout.write(range_to_csv(instrument, rows))
        return 0
    if args.csv:
        with atomic_output(Path(args.csv), key="--csv") as tmp:
            tmp.write_text(range_to_csv(instrument, rows), encoding="utf-8")
    print(range_to_json(instrument, rows) if args.json else range_to_text(instrument, rows, units=args.units))
    if args.csv and not args.json:
        print(f"wrote {args.csv}")
    return 0


# ---- issue 14: see and hear (each command's work lives in its own module) ----


def cmd_plot(args):
    from .plotcmd import run_plot

    return run_plot(args)


def cmd_compare(args):
    from .compare import run_compare

    return run_compare(args)


def cmd_sweep(args):
    from .sweep import run_sweep

    return run_sweep(args)


def cmd_preview(args):
    from .preview.server import run_preview

    return run_preview(args)


def cmd_fit(args):
    from .analysis.fitcmd import run_fit

    return run_fit(args)


#: ``synth fit --model`` choices (synth.analysis.fitting.MODELS; kept here so --help loads no numpy).
FIT_MODELS = ("partials", "string", "bar", "membrane", "plate")


def _argparse_message(message):
    """argparse's own error text in the project's form: ``command line: OPTION: what is wrong``."""
    import re

    rules = (
        (r"argument (\S+): not allowed with argument (\S+)", lambda m: (m[1], f"cannot be given with {m[2]}: give one of them")),
        (r"one of the arguments (.+) is required", lambda m: (" or ".join(m[1].split()), "give one of them")),
        (r"the following arguments are required: (.+)", lambda m: (m[1], "required, not given")),
        (r"unrecognized arguments: (.+)", lambda m: (m[1].split()[0], "not an option of this command")),
        (r"argument (\S+): invalid int value: (.+)", lambda m: (m[1], f"must be a whole number, got {m[2]}")),
        (r"argument (\S+): invalid float value: (.+)", lambda m: (m[1], f"must be a number, got {m[2]}")),
        (r"argument (\S+): invalid choice: (.+?) \(choose from (.+)\)",
         lambda m: (m[1], f"{m[2]} is not one of {m[3]}")),
        (r"argument (\S+): expected one argument", lambda m: (m[1], "needs a value")),
        (r"ambiguous option: (\S+) could match (.+)", lambda m: (m[1], f"could be any of {m[2]}: write it in full")),
        (r"argument (\S+): (.+)", lambda m: (m[1], m[2])),
    )
    for pattern, build in rules:
        match = re.fullmatch(pattern, message)
        if match:
            option, text = build(match)
            option = "COMMAND" if option.startswith("COMMAND") else option.split("/")[-1]
            return f"{COMMAND_LINE}: {option}: {text}"
    return f"{COMMAND_LINE}: {message}"


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors (exit status 2) in the form of every other synth error.

    Options are matched in full only (``--r`` is not taken for ``--rows``).
    """

    def __init__(self, *args, **kwargs):
        kwargs.setdefault("allow_abbrev", False)
        super().__init__(*args, **kwargs)

    def error(self, message):
        self.exit(2, f"synth: error: {_argparse_message(message)} (see '{self.prog} --help')\n")


def build_parser():
    parser = _Parser(
        prog="synth",
        description="Modal synthesis from physics: compute, report and render the partials of a vibrating object.",
    )
    parser.add_argument("--version", action="version", version=f"synth {__version__}")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND", parser_class=_Parser)

    def patch_options(p):
        p.add_argument("patch", help="patch or instrument file (YAML)")
        p.add_argument("--pitch", help="override the pitch (note name such as A2, or '110 Hz'); retunes the object; "
                                       "for an instrument, the key to show or render")
        p.add_argument("--sample-rate", dest="sample_rate", help="override render.sample_rate (Hz)")
        p.add_argument("--max-modes", dest="max_modes", help="override render.max_modes (a number, or auto)")
        set_option(p)

    def set_option(p):
        p.add_argument("--set", action="append", dest="settings", metavar="KEY=VALUE",
                       help="set one patch key for this run, checked as in the file; repeatable; units allowed: "
                            "--set resonator.diameter=\"0.5 mm\"")

    def units_option(p):
        p.add_argument("--units", choices=UNIT_SYSTEMS, default=DEFAULT_UNITS,
                       help="units of the report: si (m, kg, N, Pa), workshop (mm, g, N, MPa; the default) or "
                            "imperial (in, lb, lbf, psi); --json and CSV stay SI")

    modes = commands.add_parser("modes", help="print the partial table of a patch")
    patch_options(modes)
    modes.add_argument("--json", action="store_true", help="print the table as one JSON object")
    modes.add_argument("--csv", metavar="FILE", help="also write the table as CSV to FILE (parameters first, as "
                                                     "'# key,value' lines); '-' prints only the CSV")
    modes.add_argument("--rows", type=int, default=None, help="show only the first ROWS modes of the text table")
    units_option(modes)
    modes.set_defaults(func=cmd_modes)

    keyrange = commands.add_parser("range", help="print an instrument's keys as designed: pitch, sizes, stress, T60, ratios")
    keyrange.add_argument("instrument", help="instrument file (YAML)")
    keyrange.add_argument("--json", action="store_true", help="print the table as one JSON object")
    keyrange.add_argument("--csv", metavar="FILE", help="also write the table as CSV to FILE; '-' prints only the CSV")
    keyrange.add_argument("--sample-rate", dest="sample_rate", help="override render.sample_rate (Hz)")
    keyrange.add_argument("--max-modes", dest="max_modes", help="override render.max_modes (a number, or auto)")
    set_option(keyrange)
    units_option(keyrange)
    keyrange.set_defaults(func=cmd_range)

    render = commands.add_parser("render", help="render a patch to a WAV (or FLAC) file")
    patch_options(render)
    render.add_argument("-o", "--output", help="output file (.wav or .flac); default renders/<name>.wav")
    render.add_argument("--duration", help="override render.duration (e.g. 2.5 or '800 ms')")
    render.add_argument("--bit-depth", dest="bit_depth", help="override render.bit_depth (16, 24, 32)")
    render.add_argument("--rows", type=int, default=10, help="partial-table rows to print (default 10)")
    render.add_argument("--velocity", help="play it as a MIDI note of this velocity (1..127; 100 = the patch as "
                                           "written) would sound: strength and contact time follow it")
    render.add_argument("-q", "--quiet", action="store_true", help="print only where the file went (and real warnings)")
    units_option(render)
    render.set_defaults(func=cmd_render)

    midi = commands.add_parser("midi", help="render a MIDI file (format 0 or 1) through a patch or a channel map")
    midi.add_argument("song", help="MIDI file (.mid)")
    source = midi.add_mutually_exclusive_group(required=True)
    source.add_argument("--patch", help="patch or instrument file (YAML) that plays every channel")
    source.add_argument("--map", help="map file (YAML): MIDI channel 1-16 or track -> patch, gain, pan")
    midi.add_argument("-o", "--output", help="output file (.wav or .flac); default renders/<song>.wav")
    midi.add_argument("--a4", help="tuning: frequency of A4 (default 440 Hz; e.g. 442 or '415 Hz')")
    midi.add_argument("--sample-rate", dest="sample_rate", help="output sample rate (default: the patch's or the map's)")
    midi.add_argument("--bit-depth", dest="bit_depth", help="16, 24 or 32 (default: the patch's or the map's)")
    midi.add_argument("--tail", help="seconds kept after the end of the file (default: until every note has decayed 100 dB, at most 60 s)")
    midi.add_argument("-q", "--quiet", action="store_true", help="no progress bar; print only where the file went")
    midi.set_defaults(func=cmd_midi)

    batch = commands.add_parser("batch", help="render a sample library: every note x velocity x round robin of a spec")
    batch.add_argument("spec", help="library spec (YAML): patch (or instrument), notes, velocities, round_robin, variation, output")
    batch.add_argument("--workers", type=int, help="local processes (default: every core; 1 renders in this process)")
    batch.add_argument("--scheduler", metavar="ADDRESS", help="run the jobs on a Dask cluster, e.g. tcp://host:8786 (pip install '.[cluster]')")
    batch.add_argument("-o", "--output", metavar="DIR", help="output folder (overrides the spec's output)")
    batch.add_argument("--force", action="store_true", help="render every file again, even those up to date")
    batch.add_argument("--worker-timeout", dest="worker_timeout", metavar="SECONDS",
                       help="with --scheduler: give up (exit status 1) once no Dask worker has been alive this long "
                            "(default 120 s)")
    batch.add_argument("--verbose", action="store_true", help="with --scheduler: show Dask's own log messages")
    batch.add_argument("-q", "--quiet", action="store_true", help="leave out the listening caution after the summary")
    batch.add_argument("--prune", action="store_true",
                       help="delete the files the previous manifest listed that this spec no longer produces")
    batch.set_defaults(func=cmd_batch)

    tune = commands.add_parser("tune-bar", help="shape an undercut so a bar's first three partials land on chosen ratios")
    tune.add_argument("patch", help="patch file (YAML) of a uniform rectangular bar: the blank")
    tune.add_argument("--ratios", required=True, help="target ratios of partials 1:2:3, e.g. 1:4:10 (marimba) or 1:3:6 (xylophone)")
    tune.add_argument("--points", type=int, default=41, help="profile points to report (default 41)")
    tune.add_argument("-o", "--output", help="write the tuned patch (.yaml) here; default: print the profile")
    set_option(tune)
    tune.add_argument("--drawing", metavar="FILE", help="also draw the tuned profile as a workshop drawing "
                                                      "(.png, .svg or .pdf: x and cut depth in mm, suspension points)")
    tune.set_defaults(func=cmd_tune_bar)

    # ---- plot (synth/plotcmd.py) ----
    plot = commands.add_parser("plot", help="draw a patch: partials on the harmonic grid, decays, spectrogram, mode shapes")
    patch_options(plot)
    plot.add_argument("-o", "--output", metavar="FILE", help="figure file (.png, .svg or .pdf); default renders/<name>.png")
    plot.add_argument("--show", default="partials,decay,spectrogram,shapes",
                      help="which panels, comma-separated: partials, decay, spectrogram, shapes (default: all)")
    plot.add_argument("--duration", help="override render.duration for the spectrogram (e.g. 2 s)")
    plot.set_defaults(func=cmd_plot)

    # ---- compare (synth/compare.py) ----
    compare = commands.add_parser("compare", help="two patches side by side: partials, cents, levels, T60, "
                                                  "the parameters that differ, an A-then-B audio file")
    compare.add_argument("first", metavar="A", help="patch file (YAML), or a recording of one note (WAV, FLAC, AIFF, OGG)")
    compare.add_argument("second", metavar="B", help="patch file (YAML), or a recording of one note (WAV, FLAC, AIFF, OGG)")
    compare.add_argument("--json", action="store_true", help="print the comparison as one JSON object")
    compare.add_argument("-o", "--output", metavar="FILE", help="write A then B, loudness-matched, to this .wav")
    compare.add_argument("--rows", type=int, default=None, help="show only the first ROWS partials")
    units_option(compare)
    compare.set_defaults(func=cmd_compare)

    # ---- sweep (synth/sweep.py) ----
    sweep = commands.add_parser("sweep", help="move one key across a range: renders, a table and a figure of how "
                                              "the partials, ratios, T60 and stress move")
    sweep.add_argument("patch", help="patch file (YAML)")
    sweep.add_argument("--vary", required=True, metavar="KEY=FROM..TO",
                       help="the key and its range, units allowed: --vary resonator.length=\"600 mm..700 mm\"")
    sweep.add_argument("--steps", type=int, default=5, help="values from FROM to TO, ends included (default 5)")
    sweep.add_argument("-o", "--output", metavar="DIR", help="folder for the renders, table and figure "
                                                             "(default renders/<name>-sweep)")
    sweep.add_argument("--json", action="store_true", help="print the table as one JSON object")
    sweep.add_argument("--no-audio", dest="audio", action="store_false", help="table and figure only, no renders")
    set_option(sweep)
    units_option(sweep)
    sweep.set_defaults(func=cmd_sweep)

    # ---- preview (synth/preview/) ----
    preview = commands.add_parser("preview", help="a local page: move a control, hear and see the change, save the patch")
    preview.add_argument("patch", help="patch file (YAML)")
    preview.add_argument("--port", type=int, default=8765, help="port on 127.0.0.1 (default 8765; 0: any free port)")
    preview.add_argument("--host", default="127.0.0.1",
                         help="address to serve on (default 127.0.0.1, this machine only; any other prints a warning)")
    preview.add_argument("--no-browser", dest="browser", action="store_false", help="do not open a browser")
    preview.set_defaults(func=cmd_preview)

    # ---- fit (synth/analysis/) ----
    fit = commands.add_parser("fit", help="a recording's partials (frequency, T60, level, each with its uncertainty), "
                                          "a model fitted to them, a patch or a calibrated material")
    fit.add_argument("recording", help="audio file of one note (WAV, FLAC, AIFF, OGG)")
    fit.add_argument("--pitch", help="the note's pitch, a hint (note name such as A2, or '110 Hz'): helps the search "
                                     "and the models; ratios are read against the partial nearest it")
    fit.add_argument("--model", choices=FIT_MODELS, default="partials",
                     help="partials (the default: the measured set), or fit a string (f0 and inharmonicity B), "
                          "bar, membrane or plate (their ratio family, residual in cents per partial)")
    fit.add_argument("--json", action="store_true", help="print the table as one JSON object")
    fit.add_argument("-o", "--output", metavar="FILE", help="write a patch (.yaml) that resynthesises the recording; "
                                                            "with --blank, the calibrated material (.yaml)")
    fit.add_argument("--check", action="store_true", help="render the fitted patch and say how far its spectrum is "
                                                          "from the recording's")
    fit.add_argument("--max-modes", dest="max_modes", default=None,
                     help="keep the strongest N partials")
    fit.add_argument("--lowest", help="lowest partial to search for (e.g. '40 Hz'; default from --pitch, or 20 Hz)")
    fit.add_argument("--channel", help="channel of a multichannel file: 1, 2, ... or mix (the default)")
    fit.add_argument("--blank", metavar="BLANK.yaml", help="the tapped blank's patch (measured length, not pitch): "
                                                            "calibrate its material's Young's (and shear) modulus")
    fit.add_argument("--rows", type=int, default=None, help="show only the first ROWS partials")
    set_option(fit)
    units_option(fit)
    fit.set_defaults(func=cmd_fit)
    return parser


def _number_or_text(value):
    """Command-line values: numbers where they parse, else text with units."""
    if value is None:
        return None
    try:
        return float(value) if any(c in value for c in ".eE") else int(value)
    except ValueError:
        return value


def _silence_stdout():
    """Point stdout at the null device, so the exit flush of a closed pipe cannot fail again."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError):  # stdout is not a real file (e.g. captured in tests)
        pass


def _short(error):
    """``TypeName: first line of the message``, cut to :data:`SHORT_MESSAGE_CHARS`."""
    text = str(error).strip().splitlines()[0] if str(error).strip() else ""
    if len(text) > SHORT_MESSAGE_CHARS:
        text = text[: SHORT_MESSAGE_CHARS - 3] + "..."
    return f"{type(error).__name__}: {text}" if text else type(error).__name__


def _numeric_errors():
    """:data:`NUMERIC_ERRORS`, with numpy's LinAlgError if numpy has been loaded (else none was raised)."""
    numpy = sys.modules.get("numpy")
    return NUMERIC_ERRORS + ((numpy.linalg.LinAlgError,) if numpy is not None else ())


#: Longest error line printed (characters): a huge value quoted in a message is cut in its middle.
MAX_ERROR_CHARS = 1000


def _one_line(message):
    """`message` on one line of at most :data:`MAX_ERROR_CHARS` characters."""
    message = " ".join(message.splitlines())  # every line separator Python knows: \r, \x0b, \x85, \u2028 ...
    # Control characters (ESC, BEL, DEL, U+009B, ...) from a key or value would act on the terminal: escape them.
    message = "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii") for c in message)
    if len(message) <= MAX_ERROR_CHARS:
        return message
    return f"{message[: MAX_ERROR_CHARS - 300]} ... {message[-280:]}"


def main(argv=None):
    parser = build_parser()
    args = parser.parse_args(argv)
    for attr in ("duration", "sample_rate", "max_modes", "bit_depth"):
        if hasattr(args, attr):
            setattr(args, attr, _number_or_text(getattr(args, attr)))
    from .audio import output_path
    from .signals import Terminated, exit_status, install

    for attr in ("output", "csv"):  # output paths are read lexically: out/../x.wav is x.wav
        value = getattr(args, attr, None)
        if isinstance(value, str) and value and "\0" not in value:  # a NUL is refused by check_output_file
            setattr(args, attr, str(output_path(value)))

    install()  # SIGTERM unwinds like Ctrl-C (synth/signals.py)
    try:
        status = args.func(args)
        sys.stdout.flush()  # a closed pipe shows here, not at interpreter exit
        return status
    except ModalError as error:
        print(f"synth: error: {_one_line(str(error))}", file=sys.stderr)
        return getattr(error, "exit_status", 2)
    except BrokenPipeError:
        _silence_stdout()
        return BROKEN_PIPE_STATUS
    except Exception as error:  # noqa: BLE001 - only the numeric failures are handled here
        if not isinstance(error, _numeric_errors()):
            raise
        print(f"synth: error: cannot compute this request ({_short(error)}): {NUMERIC_HINT}", file=sys.stderr)
        return 2
    except KeyboardInterrupt as interrupt:  # Ctrl-C, or SIGTERM (signals.Terminated)
        what = "terminated" if isinstance(interrupt, Terminated) else "interrupted"
        print(f"synth: {what}; nothing half-written was left behind", file=sys.stderr)
        return exit_status(interrupt)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
