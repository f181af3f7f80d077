"""Figures of a design: partials on the harmonic grid, decays, spectrogram, mode shapes, a tuned bar.

Every function draws with matplotlib's Agg backend (never a window) into a
new :class:`matplotlib.figure.Figure`, or into the figure or subfigure given
as ``figure=``, and returns it, so the plotted data can be read back from the
axes and artists.  Artists that carry data have a ``gid`` (``"partials"``,
``"nodes"``, ``"nodal-circle"``, ``"profile"``, ...: see each function).

Nothing here computes physics: the figures show what the partial table, the
render and the resonator's solved modes (:meth:`synth.modes.Solution.shape`,
a circle's radial functions and its report columns) already hold.  No file
is written except by :func:`save_figure`, to the path it is given.
"""
from __future__ import annotations

import io
import math

import numpy as np

from .plots_shapes import bar_profile_drawing, shape_layout, shapes_figure

__all__ = [
    "KINDS",
    "FIGURE_SUFFIXES",
    "partials_figure",
    "decay_figure",
    "spectrogram_figure",
    "shapes_figure",
    "bar_profile_drawing",
    "patch_figure",
    "figure_svg",
    "save_figure",
]

#: The panels ``synth plot --show`` draws, in the order they are stacked.
KINDS = ("partials", "decay", "spectrogram", "shapes")
#: Files a figure is saved as (the suffix picks the format).
FIGURE_SUFFIXES = (".png", ".svg", ".pdf")
#: Figure width (inches) and the height of one full-width panel.
WIDTH_IN = 10.0
PANEL_HEIGHT_IN = 3.8
#: Resolution of saved PNG files (dots per inch).
PNG_DPI = 100
#: Cents from the nearest harmonic at which the colour scale saturates (a quarter tone).
CENTS_SPAN = 50.0
#: Lowest level drawn, dB re the strongest mode (the partials, decay and spectrogram panels).
FLOOR_DB = -100.0
#: Partials annotated with their cents; modes named in the decay legend.
N_ANNOTATED = 12
N_LABELLED = 24
#: Spectrogram: frequency resolution (bins per fundamental spacing), shortest window, most time columns and
#: frequency rows drawn, most predicted partials drawn over it (the strongest).
BINS_PER_FUNDAMENTAL = 8
MIN_WINDOW = 512
MAX_COLUMNS = 400
MAX_ROWS = 400
MAX_PREDICTED = 200
#: Most harmonic-grid lines drawn on a log and a linear frequency axis (beyond them the lines merge).
MAX_GRID_LINES = {"log": 40, "linear": 256}
#: A partials panel with more modes than this draws small dots without edges.
MANY_MODES = 200
#: Most modes drawn in the partials and decay panels (the strongest; more cannot be told apart).
MAX_DRAWN = 2000


def _matplotlib():
    """matplotlib, set to the Agg backend (ImportError if it is not installed)."""
    import matplotlib

    matplotlib.use("Agg")
    return matplotlib


def _new_figure(figure, height_in):
    """`figure` (a Figure or SubFigure to draw into) or a new Figure of the standard width."""
    _matplotlib()
    if figure is not None:
        return figure
    from matplotlib.figure import Figure

    return Figure(figsize=(WIDTH_IN, height_in), layout="constrained")


def _plain_log(axis):
    """Plain numbers (200, 500, 1000) on a log `axis`: the decades and the 2s and 5s between them."""
    from matplotlib.ticker import FuncFormatter

    def major(value, _):
        return f"{value:g}"

    def minor(value, _):
        return f"{value:g}" if value > 0 and f"{value:.0e}"[0] in "25" else ""

    axis.set_major_formatter(FuncFormatter(major))
    axis.set_minor_formatter(FuncFormatter(minor))


def _heard(table):
    """(frequency_hz, level_db, t60_s, heard mask) of a table; level NaN where a mode sits on a node."""
    level = np.asarray(table.level_db, dtype=float)
    return np.asarray(table.frequency_hz, dtype=float), level, np.asarray(table.t60_s, dtype=float), np.isfinite(level)


def _strongest(level, index, limit=MAX_DRAWN):
    """The `limit` loudest of the modes at `index` (all of them if fewer), in table order."""
    index = np.asarray(index)
    if index.size <= limit:
        return index
    return np.sort(index[np.argsort(-level[index], kind="stable")[:limit]])


def _bottom_db(level, heard, floor_db):
    """The lowest level shown: 6 dB under the quietest heard mode, not below `floor_db`, on a 10 dB step."""
    lowest = float(np.min(level[heard])) - 6.0 if np.any(heard) else floor_db
    return 10.0 * math.floor(max(lowest, floor_db) / 10.0)


# ---- partials on the harmonic grid -----------------------------------------------------------


def partials_figure(table, *, figure=None, scale="log", n_annotated=N_ANNOTATED, floor_db=FLOOR_DB):
    """Each mode as a stem at its frequency, over the harmonic grid, coloured by its cents from it.

    Parameters
    ----------
    table : PartialTable
        From :func:`synth.partial_table` (or a render's ``table``).
    figure : Figure, SubFigure or None
        Where to draw (default: a new Figure).
    scale : {"log", "linear"}
        Frequency axis.
    n_annotated : int >= 0
        The first modes heard are annotated with their cents from the nearest harmonic.
    floor_db : float, dB
        Lowest level shown (re the strongest mode).

    Returns
    -------
    Figure or SubFigure
        One axes: a scatter ``gid="partials"`` at (frequency_hz, level_db) of
        every mode heard, coloured by ``cents_from_harmonic``; stems
        ``"partial-stems"``; modes on a node (level NaN) as crosses
        ``"partials-on-node"`` at the bottom; vertical lines
        ``"harmonic-grid"`` at n x the fundamental.

    Examples
    --------
    >>> import synth
    >>> from synth.plots import partials_figure
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... excitation: {type: pluck, position: 0.25}
    ... render: {sample_rate: 8000, max_modes: 12}
    ... ''')
    >>> table = synth.partial_table(patch, onset=False)
    >>> figure = partials_figure(table)
    >>> dots = figure.axes[0].findobj(lambda a: a.get_gid() == "partials")[0]
    >>> [round(float(f)) for f in dots.get_offsets()[:3, 0]]  # Hz: the table's frequencies
    [392, 784, 1178]
    """
    matplotlib = _matplotlib()
    from matplotlib.cm import ScalarMappable
    from matplotlib.colors import Normalize

    fig = _new_figure(figure, PANEL_HEIGHT_IN)
    ax = fig.add_subplot()
    frequency, level, _, heard = _heard(table)
    cents = np.asarray(table.cents_from_harmonic, dtype=float)
    f0 = float(table.fundamental_hz)
    bottom = _bottom_db(level, heard, floor_db)
    cmap = matplotlib.colormaps["coolwarm"]
    norm = Normalize(-CENTS_SPAN, CENTS_SPAN)

    top_hz = float(frequency.max()) * 1.15
    n_grid = min(MAX_GRID_LINES.get(scale, MAX_GRID_LINES["linear"]), int(top_hz / f0) + 1)
    ax.vlines(f0 * np.arange(1, n_grid + 1), 0.0, 1.0, transform=ax.get_xaxis_transform(), colors="0.82",
              linewidths=0.7, zorder=0, gid="harmonic-grid", label=f"harmonics 1 to {n_grid} x the fundamental")
    many = frequency.size > MANY_MODES
    drawn = _strongest(level, np.flatnonzero(heard))
    ax.vlines(frequency[drawn], bottom, level[drawn], colors=cmap(norm(cents[drawn])), linewidths=0.6 if many else 1.3,
              zorder=2, gid="partial-stems", rasterized=many)
    size = 6.0 if many else 28.0
    ax.scatter(frequency[drawn], level[drawn], c=cents[drawn], cmap=cmap, norm=norm, s=size, zorder=3, gid="partials",
               edgecolors="none" if many else "k", linewidths=0.4, rasterized=many)
    silent = np.flatnonzero(~heard)[:MAX_DRAWN]
    if silent.size:
        ax.scatter(frequency[silent], np.full(silent.size, bottom), marker="x", s=size + 10, color="0.25", zorder=3,
                   rasterized=many, gid="partials-on-node", label="on a node of the excitation or pickup: not heard")
    for i in np.flatnonzero(heard)[:n_annotated]:
        ax.annotate(f"{cents[i]:+.0f}", (frequency[i], level[i]), xytext=(0, 5), textcoords="offset points",
                    ha="center", va="bottom", fontsize=7, color="0.2")
    fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), ax=ax, extend="both", pad=0.01,
                 label="cents from the nearest harmonic\n(written over the first partials)")
    ax.set_xscale(scale)
    low = f0 / 1.25 if scale == "log" else 0.0
    ax.set_xlim(low, top_hz)
    ax.set_ylim(bottom - 0.04 * (8.0 - bottom), 8.0)
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel("level (dB re the strongest)")
    ratio = ax.secondary_xaxis("top", functions=(lambda f: np.asarray(f) / f0, lambda r: np.asarray(r) * f0))
    ratio.set_xlabel("ratio to the fundamental", fontsize=8)
    ratio.tick_params(which="both", labelsize=7)
    if scale == "log":
        _plain_log(ax.xaxis)
        _plain_log(ratio.xaxis)
    ax.legend(loc="lower left", fontsize=7, framealpha=0.85)
    heard_count = int(np.sum(heard))
    shown = "" if drawn.size == heard_count else f"; the {drawn.size} strongest drawn"
    ax.set_title(f"{table.name}: {frequency.size} partials ({heard_count} heard{shown}), fundamental {f0:.2f} Hz",
                 fontsize=10)
    return fig


# ---- decays -----------------------------------------------------------------------------------


def decay_figure(table, *, figure=None, n_labelled=N_LABELLED, floor_db=FLOOR_DB):
    """Every mode's envelope in dB over time: its level falling 60 dB in its T60.

    Parameters
    ----------
    table : PartialTable
    figure : Figure, SubFigure or None
    n_labelled : int >= 0
        The first modes heard are drawn in colour and named in the legend; the rest faint.
    floor_db : float, dB
        Lowest level shown; each line ends where it reaches it.

    Returns
    -------
    Figure or SubFigure
        One axes: lines ``gid="decay:LABEL"`` of the labelled modes, a line
        collection ``"decay-faint"`` of the others, and a scatter
        ``"t60-points"`` at (t60_s, level_db - 60) of every mode heard.
    """
    matplotlib = _matplotlib()
    from matplotlib.collections import LineCollection

    fig = _new_figure(figure, PANEL_HEIGHT_IN)
    ax = fig.add_subplot()
    _, level, t60, heard = _heard(table)
    index = np.flatnonzero(heard)
    labelled, faint = index[:n_labelled], _strongest(level, index[n_labelled:])
    index = np.r_[labelled, faint]
    end = t60 * np.maximum(level - floor_db, 0.0) / 60.0  # s: where each line reaches the floor
    if faint.size:
        segments = [((0.0, level[i]), (end[i], floor_db)) for i in faint]
        ax.add_collection(LineCollection(segments, colors="0.78", linewidths=0.6, zorder=1, gid="decay-faint",
                                         rasterized=faint.size > MANY_MODES))
    cmap = matplotlib.colormaps["viridis"]
    colours = {int(i): cmap(k / max(1, len(labelled) - 1) * 0.9) for k, i in enumerate(labelled)}
    for i in labelled:
        ax.plot([0.0, end[i]], [level[i], floor_db], color=colours[int(i)], linewidth=1.2, zorder=2,
                label=f"{table.labels[i]}  T60 {t60[i]:.3g} s", gid=f"decay:{table.labels[i]}")
    ax.scatter(t60[index], level[index] - 60.0, s=12, zorder=3, gid="t60-points", rasterized=index.size > MANY_MODES,
               c=[colours.get(int(i), (0.6, 0.6, 0.6, 1.0)) for i in index], edgecolors="k", linewidths=0.3)
    longest = float(np.max(t60[labelled])) if labelled.size else 1.0
    ax.set_xlim(0.0, 1.08 * longest)
    ax.set_ylim(floor_db, 5.0)
    ax.axhline(0.0, color="0.85", linewidth=0.6, zorder=0)
    ax.set_xlabel("time (s)")
    ax.set_ylabel("level (dB re the strongest)")
    if labelled.size:
        ax.legend(loc="upper right", fontsize=6, ncol=3 if labelled.size > 12 else 2, framealpha=0.85,
                  title=f"first {labelled.size} modes heard", title_fontsize=7)
    ax.set_title(f"{table.name}: decay of every mode (dots: -60 dB at its T60)", fontsize=10)
    return fig


# ---- spectrogram of the render ------------------------------------------------------------------


def _window_length(sample_rate, fundamental_hz, n_samples):
    """FFT length: a power of two giving about BINS_PER_FUNDAMENTAL bins per fundamental.

    At least :data:`MIN_WINDOW` and at most 2**16 samples, and no more than a quarter of the signal
    (the whole of a very short one), so the picture has several columns.
    """
    wanted = BINS_PER_FUNDAMENTAL * sample_rate / fundamental_hz
    n = 2 ** int(math.ceil(math.log2(max(wanted, MIN_WINDOW))))
    quarter = 2 ** int(math.floor(math.log2(n_samples / 4))) if n_samples >= 4 * MIN_WINDOW else MIN_WINDOW
    return int(min(n, 2**16, quarter, n_samples))


def _power_frames(x, sample_rate, nperseg, hop):
    """(frequency Hz, frame centre s, power [bins x frames]) of Hann-windowed frames of `x`, `hop` samples apart.

    A plain short-time Fourier transform (periodic Hann window); the signal is
    padded with half a window of zeros at each end so the frames are centred
    on 0 s, hop, 2 hop, ... up to its end.  The picture is in dB re its
    largest cell, so no scaling is applied.
    """
    half = nperseg // 2
    frames = np.lib.stride_tricks.sliding_window_view(np.pad(x, (half, half)), nperseg)[::hop]
    window = 0.5 - 0.5 * np.cos(2.0 * np.pi * np.arange(nperseg) / nperseg)
    power = np.abs(np.fft.rfft(frames * window, axis=1)).T ** 2
    times = np.arange(frames.shape[0]) * hop / sample_rate
    return np.fft.rfftfreq(nperseg, 1.0 / sample_rate), times, power


def _log_rows(frequency, power, low_hz, n_rows):
    """Bins merged (by their largest value) into about `n_rows` rows of equal width on a log axis.

    Returns (row edges in Hz, rows x time).  Bins wider than a row stay one row each.
    """
    step = frequency[1] - frequency[0]
    keep = frequency >= low_hz
    frequency, power = frequency[keep], power[keep]
    span = math.log(frequency[-1] / frequency[0]) if frequency[-1] > frequency[0] else 1.0
    band = np.floor(n_rows * np.log(frequency / frequency[0]) / span).astype(int)
    starts = np.flatnonzero(np.r_[True, np.diff(band) != 0])
    rows = np.maximum.reduceat(power, starts, axis=0)
    edges = np.r_[frequency[starts] - step / 2.0, frequency[-1] + step / 2.0]
    return edges, rows


def spectrogram_figure(signal, *, sample_rate, table, figure=None, floor_db=FLOOR_DB):
    """The spectrogram of a render, with the table's partials drawn over it: a closed loop to see.

    Parameters
    ----------
    signal : array_like [shape=(n,)]
        The render (any scale: the picture is in dB re its loudest cell).
    sample_rate : float, Hz
    table : PartialTable
        The partials the render was made from.
    figure : Figure, SubFigure or None
    floor_db : float, dB

    Returns
    -------
    Figure or SubFigure
        One axes: a mesh ``gid="spectrogram"`` (time x frequency, dB re its
        largest cell; rows of equal width on the log frequency axis, each the
        largest of the FFT bins it holds) and a line collection
        ``"predicted-partials"``: a horizontal line at each heard mode's
        frequency from 0 s until its envelope reaches `floor_db`.

    Notes
    -----
    Hann-windowed short-time power spectra of a power-of-two length giving
    about eight bins per fundamental, at most :data:`MAX_COLUMNS` frames.
    """
    _matplotlib()
    from matplotlib.collections import LineCollection

    fig = _new_figure(figure, PANEL_HEIGHT_IN)
    ax = fig.add_subplot()
    x = np.asarray(signal, dtype=np.float64).reshape(-1)
    f0 = float(table.fundamental_hz)
    duration = x.size / sample_rate
    nperseg = _window_length(sample_rate, f0, x.size)
    if nperseg < 8:
        ax.text(0.5, 0.5, f"the render is {x.size} samples long: too short for a spectrogram", ha="center",
                va="center", transform=ax.transAxes)
        ax.set_axis_off()
        return fig
    hop = max(nperseg // 4, int(math.ceil(x.size / MAX_COLUMNS)), 1)
    frequency, times, power = _power_frames(x, sample_rate, nperseg, hop)
    low = max(float(frequency[1]), f0 / 2.0)
    edges, rows = _log_rows(frequency, power, low, MAX_ROWS)
    peak = float(rows.max()) if rows.size and rows.max() > 0 else 1.0
    level = 10.0 * np.log10(np.maximum(rows / peak, 10.0 ** (floor_db / 10.0)))
    step = hop / sample_rate
    t_edges = np.clip(np.r_[times - step / 2.0, times[-1] + step / 2.0], 0.0, duration)
    mesh = ax.pcolormesh(t_edges, edges, level, cmap="magma", vmin=floor_db, vmax=0.0, shading="flat",
                         rasterized=True, gid="spectrogram")
    fig.colorbar(mesh, ax=ax, pad=0.01, label="dB re the loudest")
    hz, level_db, t60, heard = _heard(table)
    end = np.minimum(t60 * np.maximum(level_db - floor_db, 0.0) / 60.0, duration)
    show = np.flatnonzero(heard & (hz >= edges[0]) & (hz <= edges[-1]) & (end > 0))
    strongest = f" (the {MAX_PREDICTED} strongest)" if show.size > MAX_PREDICTED else ""
    show = show[np.argsort(-level_db[show], kind="stable")[:MAX_PREDICTED]]
    segments = [((0.0, hz[i]), (end[i], hz[i])) for i in np.sort(show)]
    ax.add_collection(LineCollection(segments, colors="cyan", linewidths=0.6, linestyles=(0, (4, 3)), alpha=0.7,
                                     zorder=3, gid="predicted-partials",
                                     label=f"partials of the table{strongest}, until {floor_db:g} dB"))
    ax.set_yscale("log")
    _plain_log(ax.yaxis)
    ax.tick_params(which="minor", labelsize=7)
    ax.set_ylim(edges[0], edges[-1])
    ax.set_xlim(0.0, duration)
    ax.set_xlabel("time (s)")
    ax.set_ylabel("frequency (Hz)")
    ax.legend(loc="upper right", fontsize=7, framealpha=0.85)
    ax.set_title(f"{table.name}: spectrogram of the render ({nperseg}-point Hann window, "
                 f"{sample_rate / nperseg:.3g} Hz bins) with the predicted partials", fontsize=10)
    return fig


# ---- a patch, every panel ----------------------------------------------------------------------------


def patch_figure(patch, *, kinds=KINDS, table=None, signal=None, cache=None):
    """The panels `kinds` of `patch`, stacked in one figure (what ``synth plot`` saves).

    Parameters
    ----------
    patch : Patch
    kinds : sequence of str
        Some of :data:`KINDS`, drawn in the order given.
    table : PartialTable or None
        The patch's partial table (default :func:`synth.partial_table`).
    signal : array_like or None
        Its render at ``patch.render.sample_rate`` (default
        :func:`synth.render_patch`; only the spectrogram needs it).
    cache : SolveCache or None

    Returns
    -------
    Figure
        One subfigure per kind, in order.

    Raises
    ------
    ValueError
        For a kind that is not one of :data:`KINDS`.
    """
    from .pipeline import partial_table, patch_ending, render_patch

    unknown = [k for k in kinds if k not in KINDS]
    if unknown or not kinds:
        raise ValueError(f"kinds={list(kinds)!r}: give some of {', '.join(KINDS)}")
    if "spectrogram" in kinds and signal is None:
        table = partial_table(patch, cache=cache) if table is None or table.onset is None else table
        signal, table = render_patch(patch, table=table, ending=patch_ending(patch, table))
    elif table is None and any(k != "shapes" for k in kinds):
        table = partial_table(patch, cache=cache, onset=False)
    heights = [(shape_layout(patch)[3] if kind == "shapes" else PANEL_HEIGHT_IN) for kind in kinds]
    _matplotlib()
    from matplotlib.figure import Figure

    fig = Figure(figsize=(WIDTH_IN, sum(heights)), layout="constrained")
    panels = fig.subfigures(len(kinds), 1, height_ratios=heights, squeeze=False).ravel()
    for kind, panel in zip(kinds, panels):
        if kind == "partials":
            partials_figure(table, figure=panel)
        elif kind == "decay":
            decay_figure(table, figure=panel)
        elif kind == "spectrogram":
            spectrogram_figure(signal, sample_rate=patch.render.sample_rate, table=table, figure=panel)
        else:
            shapes_figure(patch, figure=panel, cache=cache)
    return fig


# ---- output -----------------------------------------------------------------------------------------

#: Metadata left out so the same figure gives the same bytes (no date, no version stamp).
_METADATA = {"png": {"Software": None}, "svg": {"Date": None}, "pdf": {"CreationDate": None, "Producer": None}}


def save_figure(figure, path, *, format=None):
    """Write `figure` to `path` as PNG, SVG or PDF (`format`, default from the suffix); no other file work.

    Callers that write for a user give the temporary path of
    :class:`synth.audio.atomic_output`.
    """
    fmt = (format or str(path).rsplit(".", 1)[-1]).lower()
    figure.savefig(path, format=fmt, dpi=PNG_DPI, metadata=_METADATA.get(fmt))


def figure_svg(figure):
    """`figure` as SVG text (for a web page: inline it or serve it as ``image/svg+xml``).

    Examples
    --------
    >>> import synth
    >>> from synth.plots import figure_svg, partials_figure
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... render: {sample_rate: 8000, max_modes: 12}
    ... ''')
    >>> svg = figure_svg(partials_figure(synth.partial_table(patch, onset=False)))
    >>> svg.lstrip().startswith("<?xml") and "</svg>" in svg
    True
    """
    _matplotlib()
    buffer = io.StringIO()
    figure.savefig(buffer, format="svg", metadata=_METADATA["svg"])
    return buffer.getvalue()
