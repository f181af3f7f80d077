"""The ``synth`` command line.

Every user error is one line on stderr (``synth: error: FILE:LINE: KEY: ...``)
and exit status 2, with nothing written.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

from . import __version__
from .audio import atomic_output, check_output_path, normalise, peak_dbfs, write_audio
from .errors import ModalError, PatchError
from .modes import table_to_csv, table_to_json, table_to_text
from .patch import load_patch
from .pipeline import partial_table, render_patch

__all__ = ["main", "LISTENING_CAUTION"]

LISTENING_CAUTION = (
    "listening caution: start playback quietly and raise it slowly; long exposure to loud sound harms hearing"
)
DEFAULT_OUTPUT_DIR = Path("renders")


def _overrides(args):
    overrides = {}
    for attr, key, option in (
        ("duration", "render.duration", "--duration"),
        ("sample_rate", "render.sample_rate", "--sample-rate"),
        ("pitch", "resonator.pitch", "--pitch"),
        ("max_modes", "render.max_modes", "--max-modes"),
        ("bit_depth", "render.bit_depth", "--bit-depth"),
    ):
        value = getattr(args, attr, None)
        if value is not None:
            overrides[key] = (value, option)
    return overrides


def _warn(messages, quiet=False):
    for message in messages:
        print(f"synth: warning: {message}", file=sys.stderr)


def cmd_modes(args):
    patch = load_patch(args.patch, overrides=_overrides(args))
    table = partial_table(patch)
    if args.csv:
        csv_path = Path(args.csv)
        if not csv_path.parent.exists():
            raise PatchError(f"folder {str(csv_path.parent)!r} does not exist", key="--csv")
        with atomic_output(csv_path) as tmp:
            tmp.write_text(table_to_csv(table), encoding="utf-8")
    if args.json:
        print(table_to_json(table))
    else:
        print(table_to_text(table, max_rows=args.rows))
    if args.csv and not args.json:
        print(f"wrote {args.csv}")
    return 0


def cmd_render(args):
    patch = load_patch(args.patch, overrides=_overrides(args))
    if args.output:
        out = Path(args.output)
    else:
        out = DEFAULT_OUTPUT_DIR / f"{patch.name}.wav"
    if args.output:
        check_output_path(out, patch.render.bit_depth)
    signal, table = render_patch(patch)
    scaled, gain_db = normalise(signal, peak_db=patch.render.peak_db, bit_depth=patch.render.bit_depth)
    out.parent.mkdir(parents=True, exist_ok=True)
    write_audio(out, scaled, sample_rate=patch.render.sample_rate, bit_depth=patch.render.bit_depth)
    if not args.quiet:
        print(table_to_text(table, max_rows=args.rows))
    print(
        f"wrote {out} ({patch.render.duration:g} s, {patch.render.sample_rate:g} Hz, "
        f"{patch.render.bit_depth}-bit, peak {peak_dbfs(scaled):.2f} dBFS)"
    )
    if table.warnings:
        _warn(table.warnings)
    if not args.quiet:
        print(LISTENING_CAUTION, file=sys.stderr)
    return 0


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors (exit status 2), like every other synth error."""

    def error(self, message):
        self.exit(2, f"synth: error: {message} (see '{self.prog} --help')\n")


def build_parser():
    parser = _Parser(
        prog="synth",
        description="Modal synthesis from physics: compute, report and render the partials of a vibrating object.",
    )
    parser.add_argument("--version", action="version", version=f"synth {__version__}")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND", parser_class=_Parser)

    def patch_options(p):
        p.add_argument("patch", help="patch file (YAML)")
        p.add_argument("--pitch", help="override the pitch (note name such as A2, or '110 Hz'); retunes the object")
        p.add_argument("--sample-rate", dest="sample_rate", help="override render.sample_rate (Hz)")
        p.add_argument("--max-modes", dest="max_modes", help="override render.max_modes")

    modes = commands.add_parser("modes", help="print the partial table of a patch")
    patch_options(modes)
    modes.add_argument("--json", action="store_true", help="print the table as one JSON object")
    modes.add_argument("--csv", metavar="FILE", help="also write the table as CSV to FILE")
    modes.add_argument("--rows", type=int, default=None, help="show only the first ROWS modes of the text table")
    modes.set_defaults(func=cmd_modes)

    render = commands.add_parser("render", help="render a patch to a WAV (or FLAC) file")
    patch_options(render)
    render.add_argument("-o", "--output", help="output file (.wav or .flac); default renders/<name>.wav")
    render.add_argument("--duration", help="override render.duration (e.g. 2.5 or '800 ms')")
    render.add_argument("--bit-depth", dest="bit_depth", help="override render.bit_depth (16, 24, 32)")
    render.add_argument("--rows", type=int, default=10, help="partial-table rows to print (default 10)")
    render.add_argument("-q", "--quiet", action="store_true", help="print only where the file went")
    render.set_defaults(func=cmd_render)
    return parser


def _number_or_text(value):
    """Command-line values: numbers where they parse, else text with units."""
    if value is None:
        return None
    try:
        return float(value) if any(c in value for c in ".eE") else int(value)
    except ValueError:
        return value


def main(argv=None):
    parser = build_parser()
    args = parser.parse_args(argv)
    for attr in ("duration", "sample_rate", "max_modes", "bit_depth"):
        if hasattr(args, attr):
            setattr(args, attr, _number_or_text(getattr(args, attr)))
    try:
        return args.func(args)
    except ModalError as error:
        print(f"synth: error: {error}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("synth: interrupted; nothing half-written was left behind", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
