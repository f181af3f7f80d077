"""``synth plot``: a patch's figures in one file (and the figure files of ``tune-bar --drawing``).

The file and command-line side of :mod:`synth.plots`: which panels, where the
file goes, the checks made before any work, and the atomic write.
"""
from __future__ import annotations

import sys
from pathlib import Path

from .errors import RenderError, option_error
from .plots import FIGURE_SUFFIXES, KINDS

__all__ = ["run_plot", "parse_kinds", "check_figure_output", "write_figure", "PLOT_INSTALL_HINT"]

#: How to get the figures' one optional dependency.
PLOT_INSTALL_HINT = "pip install '.[plot]'"


def parse_kinds(text):
    """The panels named in ``--show`` (comma-separated, each once, in the order given), or a one-line option error."""
    names = [part.strip().lower() for part in str(text).split(",")]
    unknown = [name for name in names if name not in KINDS]
    if unknown:
        shown = repr(unknown[0]) if unknown[0] else "an empty name"
        raise option_error(f"{shown} is not a kind of figure: give one or more of {', '.join(KINDS)}, "
                           "comma-separated", "--show")
    return tuple(dict.fromkeys(names))


def _need_matplotlib(command):
    try:
        import matplotlib  # noqa: F401  (only: is it installed?)
    except ImportError:
        raise RenderError(f"{command} needs matplotlib: {PLOT_INSTALL_HINT}") from None


def check_figure_output(path, *, inputs=(), key="--output", command="synth plot", make_folder=False):
    """`path` checked as a figure file (.png, .svg or .pdf) before any work; matplotlib must be installed.

    Returns the path, read lexically (``out/../x.png`` is ``x.png``).

    Raises
    ------
    RenderError
        If matplotlib is not installed (one line naming `command` and how to install it).
    PatchError
        About option `key`, as :func:`synth.audio.check_output_file` says.
    """
    from .audio import check_output_file, output_path

    _need_matplotlib(command)
    text = str(path)
    path = output_path(text) if text and "\0" not in text else Path(text)
    return check_output_file(path, suffixes=FIGURE_SUFFIXES, inputs=inputs, key=key, make_folder=make_folder)


def write_figure(figure, path, *, key="--output"):
    """Save `figure` to `path` atomically (a temporary name beside it, renamed once complete)."""
    from .audio import atomic_output
    from .plots import save_figure

    path = Path(path)
    with atomic_output(path, key=key) as tmp:
        save_figure(figure, tmp, format=path.suffix.lower().lstrip("."))


def run_plot(args):
    """``synth plot PATCH``: the panels of ``--show`` in one figure file (default ``renders/<name>.png``)."""
    from .audio import make_output_folder
    from .cli import DEFAULT_OUTPUT_DIR, _load_key, _warn

    kinds = parse_kinds(args.show)
    out = None
    if args.output:
        out = check_figure_output(args.output, inputs=(args.patch,))
    else:
        _need_matplotlib("synth plot")
    patch, stem = _load_key(args)
    if out is None:
        out = check_figure_output(DEFAULT_OUTPUT_DIR / f"{stem}.png", inputs=(args.patch,), make_folder=True)

    from .pipeline import partial_table, patch_ending, render_patch
    from .plots import patch_figure

    table = signal = None
    if "spectrogram" in kinds:
        table = partial_table(patch)
        signal, table = render_patch(patch, table=table, ending=patch_ending(patch, table))
    elif kinds != ("shapes",):
        table = partial_table(patch, onset=False)
    figure = patch_figure(patch, kinds=kinds, table=table, signal=signal)
    if not args.output:
        make_output_folder(out)
    write_figure(figure, out, key="--output" if args.output else None)
    print(f"wrote {out} ({', '.join(kinds)})")
    if table is not None:
        _warn(table.warnings, args.patch)
    sys.stdout.flush()
    return 0
