"""The figure of ``synth sweep``: how the first partials move as one key moves (matplotlib, Agg).

Panels, each against the swept value: the partials' frequencies, their ratios
to the first (on a grid of whole numbers: the harmonic series), their cents
from the nearest harmonic, the first
partial's T60 and, for a string or a membrane, the stress as a percentage of
the tensile strength (with the 60 % working ceiling the report warns above).
The figure is drawn on an Agg canvas of its own: no window, no pyplot state.
"""
from __future__ import annotations

import math

__all__ = ["sweep_figure", "FIGURE_DPI"]

FIGURE_DPI = 110  # dots per inch of the PNG
PANEL_SIZE = (6.4, 2.6)  # inches, width x height of one panel
#: The stress ceiling drawn on the stress panel (fraction of the tensile strength), as the report warns.
STRESS_LINE_PERCENT = 60.0


def _series(rows, index, field):
    """The values of partial `index`'s `field` across the rows (NaN where a row has fewer partials)."""
    return [r["partials"][index][field] if index < len(r["partials"]) else math.nan for r in rows]


def sweep_figure(path, data, *, axis):
    """Draw the sweep in `data` (``synth sweep --json``'s object) as a PNG at `path`.

    Parameters
    ----------
    path : str or Path
        The PNG to write (the caller makes it atomic).
    data : dict
        ``name``, ``key`` and ``rows`` (each with ``partials``: ``frequency_hz``,
        ``ratio``, ``label``; ``t60_first_s``; ``parameters``).
    axis : dict
        ``label`` (the x-axis title, with its unit) and ``values`` (the swept
        values in that unit, one per row).

    Returns
    -------
    Path
    """
    from pathlib import Path

    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    rows = data["rows"]
    x = axis["values"]
    n_partials = max(len(r["partials"]) for r in rows)
    stress = [r["parameters"].get("stress_percent_of_strength") for r in rows]
    has_stress = any(isinstance(s, (int, float)) for s in stress)
    n_panels = 5 if has_stress else 4
    figure = Figure(figsize=(PANEL_SIZE[0], PANEL_SIZE[1] * n_panels), dpi=FIGURE_DPI, layout="constrained")
    FigureCanvasAgg(figure)
    panels = figure.subplots(n_panels, 1, sharex=True)
    figure.suptitle(f"{data['name']}: {data['key']} swept")

    freq, ratio, cents, decay = panels[:4]
    for k in range(n_partials):
        label = f"partial {k + 1}"
        freq.plot(x, _series(rows, k, "frequency_hz"), marker="o", markersize=3, label=label)
        ratio.plot(x, _series(rows, k, "ratio"), marker="o", markersize=3, label=label)
        cents.plot(x, _series(rows, k, "cents_from_harmonic"), marker="o", markersize=3, label=label)
    freq.set_yscale("log")
    freq.set_ylabel("frequency (Hz)")
    freq.legend(fontsize="small", ncol=2)
    cents.axhline(0.0, color="0.6", linewidth=0.8, zorder=0)
    cents.set_ylabel("cents from harmonic")
    finite = [v for k in range(n_partials) for v in _series(rows, k, "ratio") if math.isfinite(v)]
    for whole in range(1, int(math.ceil(max(finite))) + 1 if finite else 1):
        ratio.axhline(whole, color="0.8", linewidth=0.8, zorder=0)
    ratio.set_ylabel("ratio to partial 1")
    decay.plot(x, [r["t60_first_s"] for r in rows], marker="o", markersize=3, color="tab:red")
    decay.set_ylabel("T60 of partial 1 (s)")
    decay.set_ylim(bottom=0)
    if has_stress:
        panel = panels[4]
        panel.plot(x, [math.nan if s is None else s for s in stress], marker="o", markersize=3, color="tab:purple")
        panel.axhline(STRESS_LINE_PERCENT, color="tab:red", linestyle="--", linewidth=0.8,
                      label=f"{STRESS_LINE_PERCENT:g} % working ceiling (common practice)")
        panel.set_ylabel("stress (% of strength)")
        panel.set_ylim(bottom=0)
        panel.legend(fontsize="small")
    panels[-1].set_xlabel(axis["label"])
    for panel in panels:
        panel.grid(True, alpha=0.3)
    path = Path(path)
    figure.savefig(path, format="png")
    return path
