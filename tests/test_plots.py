"""Figures: synth plot, the figure functions of synth.plots and tune-bar --drawing.

Every panel of every resonator type renders to a real image file; the data
plotted is read back from the figures' artists (found by their gid) and held
against the partial table and against independent references: Mersenne's law,
the nodes j/n of a pinned string, the Bessel zeros of a circular membrane
(scipy.special.jn_zeros), the nodes of a free-free beam (Blevins) and the
tuned profile itself.  Bad options are one line, exit status 2, nothing written.
"""
from __future__ import annotations

import doctest
import math
import re
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("matplotlib")

import synth  # noqa: E402
from synth.cli import main  # noqa: E402
from synth.pipeline import partial_table, patch_ending, render_patch  # noqa: E402
from synth.plots import (  # noqa: E402
    bar_profile_drawing,
    decay_figure,
    figure_svg,
    partials_figure,
    shapes_figure,
    spectrogram_figure,
)
from synth.tuning import tune_undercut  # noqa: E402

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), sec. 5.2
SHORT = "render: {duration: 0.3 s, sample_rate: 8000, max_modes: 16}"

# One small patch of every resonator type and outline (invented objects, as in tests/test_report.py).
PATCHES = {
    "string": f"""\
        name: plot-string
        resonator: {{type: string, material: phosphor-bronze, length: 430 mm, diameter: 0.33 mm, pitch: E4}}
        excitation: {{type: pluck, position: 0.2}}
        pickup: {{position: 0.85}}
        damping: {{t60: 1.5 s, t60_high: 0.4 s, high_frequency: 3 kHz}}
        {SHORT}
        """,
    "bar": f"""\
        name: plot-bar
        resonator: {{type: bar, material: maple, length: 300 mm, width: 40 mm, thickness: 18 mm}}
        excitation: {{type: strike, position: 0.45, contact_time: 1 ms}}
        pickup: {{position: 0.1}}
        {SHORT}
        """,
    "membrane-circle": f"""\
        name: plot-drum
        resonator: {{type: membrane, shape: circle, radius: 150 mm, areal_density: 0.25, tension: 1800 N/m}}
        excitation: {{type: strike, position: {{radius: 0.6, angle: 20 deg}}, contact_time: 2 ms}}
        pickup: {{position: {{radius: 0.3, angle: 65 deg}}}}
        {SHORT}
        """,
    "membrane-rectangle": f"""\
        name: plot-panel
        resonator: {{type: membrane, shape: rectangle, width: 420 mm, height: 280 mm, areal_density: 0.18,
                     tension: 900 N/m}}
        excitation: {{type: strike, position: [0.27, 0.61], contact_time: 1.2 ms}}
        pickup: {{position: [0.8, 0.35]}}
        {SHORT}
        """,
    "plate-circle": f"""\
        name: plot-disc
        resonator: {{type: plate, shape: circle, edges: free, radius: 200 mm, thickness: 2 mm,
                     material: aluminium-6061}}
        excitation: {{type: strike, position: {{radius: 0.9, angle: 0 deg}}, contact_time: 1 ms}}
        pickup: {{position: {{radius: 0.55, angle: 70 deg}}}}
        {SHORT}
        """,
    "plate-rectangle": f"""\
        name: plot-sheet
        resonator: {{type: plate, shape: rectangle, edges: pinned, width: 300 mm, height: 200 mm, thickness: 1.5 mm,
                     material: brass}}
        excitation: {{type: strike, position: [0.27, 0.36], contact_time: 1 ms}}
        pickup: {{position: [0.78, 0.69]}}
        {SHORT}
        """,
    "air-column": f"""\
        name: plot-pipe
        resonator: {{type: air-column, length: 400 mm, radius: 10 mm, ends: closed-open, temperature: 22}}
        excitation: {{type: strike, contact_time: 0.5 ms}}
        {SHORT}
        """,
    "partials": f"""\
        name: plot-bell
        resonator: {{type: partials, pitch: G4, ratios: [0.5, 1, 1.19, 1.5, 2.0, 2.51]}}
        excitation: {{type: strike, contact_time: 0.5 ms}}
        {SHORT}
        """,
}

# A uniform free-free blank for tune-bar (a small rosewood bar; 13 profile points tune quickly).
BLANK = """\
    name: plot-blank
    resonator: {type: bar, material: rosewood, length: 400 mm, width: 50 mm, thickness: 20 mm, supports: free-free}
    excitation: {type: strike, position: 0.5}
    render: {sample_rate: 16000}
    """


def _patch(text):
    return synth.patch_from_text(textwrap.dedent(text))


def _write(tmp_path, text, name="patch.yaml"):
    path = tmp_path / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def _run(capsys, *argv):
    status = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return status, out, err


def _find(figure, gid):
    """Every artist of `figure` (subfigures included) whose gid is `gid`."""
    return figure.findobj(lambda artist: artist.get_gid() == gid)


def _panel(figure, label):
    """The axes of a shapes figure whose title starts with mode `label`."""
    for ax in figure.axes:
        if ax.get_title().split()[:1] == [label]:
            return ax
    raise AssertionError(f"no panel {label}: {[ax.get_title() for ax in figure.axes]}")


def _check_image(path):
    """A real, non-blank PNG: signature, a few kB at least, and pixels that vary."""
    from matplotlib.image import imread

    data = path.read_bytes()
    assert data[:8] == PNG_SIGNATURE
    assert len(data) > 5000
    pixels = imread(path)
    assert pixels.ndim == 3 and pixels.shape[0] > 300 and pixels.shape[1] > 500
    assert float(np.var(pixels[..., :3])) > 1e-3  # not one flat colour


def _leftovers(folder):
    return sorted(p.name for p in folder.iterdir() if p.name != "patch.yaml")


# --------------------------------------------------------------------------
# Every panel of every resonator type, through the command line.


@pytest.mark.parametrize("kind", list(PATCHES))
def test_every_panel_of_every_resonator(tmp_path, capsys, kind):
    patch = _write(tmp_path, PATCHES[kind])
    out = tmp_path / f"{kind}.png"
    status, printed, err = _run(capsys, "plot", patch, "-o", out)
    assert status == 0, err
    assert printed == f"wrote {out} (partials, decay, spectrogram, shapes)\n"
    _check_image(out)
    assert _leftovers(tmp_path) == [out.name]  # no temporary file left behind


@pytest.mark.parametrize("show", ["partials", "decay", "spectrogram", "shapes,partials"])
def test_each_panel_alone(tmp_path, capsys, show):
    patch = _write(tmp_path, PATCHES["membrane-circle"])
    out = tmp_path / "drum.png"
    status, printed, err = _run(capsys, "plot", patch, "-o", out, "--show", show)
    assert status == 0, err
    assert printed == f"wrote {out} ({show.replace(',', ', ')})\n"
    _check_image(out)


def test_default_output_and_other_formats(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    _write(tmp_path, PATCHES["string"])
    status, printed, err = _run(capsys, "plot", "patch.yaml", "--show", "partials")
    assert status == 0, err
    assert printed == f"wrote {Path('renders') / 'plot-string.png'} (partials)\n"
    _check_image(tmp_path / "renders" / "plot-string.png")
    # SVG is XML text, PDF starts with its header (ISO 32000-1, sec. 7.5.2).
    for suffix, head in ((".svg", b"<?xml"), (".pdf", b"%PDF-")):
        status, _, err = _run(capsys, "plot", "patch.yaml", "--show", "partials", "-o", f"out{suffix}")
        assert status == 0, err
        assert (tmp_path / f"out{suffix}").read_bytes().startswith(head)


def test_figure_svg_is_standalone(tmp_path):
    table = partial_table(_patch(PATCHES["string"]), onset=False)
    svg = figure_svg(partials_figure(table))
    assert svg.lstrip().startswith("<?xml") and "<svg" in svg and svg.rstrip().endswith("</svg>")


# --------------------------------------------------------------------------
# The data on the figures.


def test_partials_stems_are_the_table():
    # A pinned string plucked at its middle: the even modes have a node there (sin(n pi / 2) = 0).
    patch = _patch("""\
        name: plot-middle
        resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G3, ends: pinned}
        excitation: {type: pluck, position: 0.5}
        render: {sample_rate: 8000, max_modes: 12}
        """)
    table = partial_table(patch, onset=False)
    figure = partials_figure(table)
    heard = np.isfinite(table.level_db)
    (dots,) = _find(figure, "partials")
    np.testing.assert_array_equal(dots.get_offsets()[:, 0], table.frequency_hz[heard])
    np.testing.assert_array_equal(dots.get_offsets()[:, 1], table.level_db[heard])
    np.testing.assert_allclose(dots.get_array(), table.cents_from_harmonic[heard])  # the colour
    (stems,) = _find(figure, "partial-stems")
    tops = np.array([segment[1] for segment in stems.get_segments()])
    np.testing.assert_array_equal(tops, np.column_stack([table.frequency_hz[heard], table.level_db[heard]]))
    (silent,) = _find(figure, "partials-on-node")
    n = np.arange(1, len(table.frequency_hz) + 1)
    assert list(n[~heard]) == [k for k in n if k % 2 == 0]  # independent: nodes of sin(n pi x) at x = 1/2
    np.testing.assert_array_equal(silent.get_offsets()[:, 0], table.frequency_hz[~heard])
    bottom = figure.axes[0].get_ylim()[0]
    assert np.all(silent.get_offsets()[:, 1] >= bottom)  # drawn at the floor, inside the axes
    (grid,) = _find(figure, "harmonic-grid")
    grid_x = [segment[0][0] for segment in grid.get_segments()]
    np.testing.assert_allclose(grid_x[:4], table.fundamental_hz * np.arange(1, 5))


def test_decay_marks_every_t60():
    table = partial_table(_patch(PATCHES["bar"]), onset=False)
    figure = decay_figure(table)
    heard = np.isfinite(table.level_db)
    (points,) = _find(figure, "t60-points")
    # The T60 law: 60 dB down at T60 (the definition of the reverberation time, ISO 3382).
    np.testing.assert_allclose(points.get_offsets()[:, 0], table.t60_s[heard])
    np.testing.assert_allclose(points.get_offsets()[:, 1], table.level_db[heard] - 60.0)
    (first,) = _find(figure, f"decay:{table.labels[0]}")
    t, level = first.get_data()
    slope = (level[1] - level[0]) / (t[1] - t[0])
    assert slope == pytest.approx(-60.0 / table.t60_s[0], rel=1e-12)


def test_spectrogram_ridge_at_the_fundamental():
    # An ideal string (no stiffness): Mersenne's law f1 = sqrt(T / mu) / (2 L), mu = rho pi d^2 / 4.
    length, diameter, tension, density = 0.5, 0.6e-3, 60.0, 1140.0
    mu = density * math.pi * diameter**2 / 4.0
    f1 = math.sqrt(tension / mu) / (2.0 * length)
    patch = _patch(f"""\
        name: plot-ideal
        resonator: {{type: string, material: {{density: {density}, youngs_modulus: 0}}, length: {length},
                     diameter: {diameter}, tension: {tension}}}
        excitation: {{type: pluck, position: 0.45}}
        damping: {{t60: 1 s}}
        render: {{duration: 0.5 s, sample_rate: 8000, max_modes: 12}}
        """)
    table = partial_table(patch)
    signal, table = render_patch(patch, table=table, ending=patch_ending(patch, table))
    figure = spectrogram_figure(signal, sample_rate=8000, table=table)
    (mesh,) = _find(figure, "spectrogram")
    rows = np.asarray(mesh.get_array()).reshape(mesh.get_coordinates().shape[0] - 1, -1)
    edges = mesh.get_coordinates()[:, 0, 1]
    strongest = int(np.argmax(rows.mean(axis=1)))
    low, high = edges[strongest], edges[strongest + 1]
    width = high - low  # one FFT bin at the fundamental
    assert low - width <= f1 <= high + width
    (predicted,) = _find(figure, "predicted-partials")
    lines_hz = sorted(segment[0][1] for segment in predicted.get_segments())
    np.testing.assert_allclose(lines_hz[0], f1, rtol=1e-9)
    np.testing.assert_allclose(lines_hz, np.sort(table.frequency_hz[np.isfinite(table.level_db)]))


def test_pinned_string_nodes_at_j_over_n():
    figure = shapes_figure(_patch(PATCHES["string"]))
    for n in range(1, 7):
        ax = _panel(figure, f"n={n}")
        (nodes,) = [line for line in ax.get_lines() if line.get_gid() == "nodes"]
        np.testing.assert_allclose(nodes.get_xdata(), [j / n for j in range(n + 1)], atol=1e-12)
        # The drawn curve crosses zero there too (sin(n pi x), independent arithmetic), to the grid's resolution.
        (curve,) = [line for line in ax.get_lines() if line.get_gid() == "shape"]
        x, y = np.asarray(curve.get_xdata()), np.asarray(curve.get_ydata())
        inside = [x[k] for k in range(1, len(x) - 1) if y[k] == 0 or y[k] * y[k + 1] < 0]
        np.testing.assert_allclose(inside, [j / n for j in range(1, n)], atol=1.0 / (len(x) - 1))
        (excitation,) = [line for line in ax.get_lines() if line.get_gid() == "excitation"]
        (pickup,) = [line for line in ax.get_lines() if line.get_gid() == "pickup"]
        assert excitation.get_xdata()[0] == 0.2 and pickup.get_xdata()[0] == 0.85


def test_circular_membrane_nodal_circle():
    from scipy.special import jn_zeros

    figure = shapes_figure(_patch(PATCHES["membrane-circle"]))
    ax = _panel(figure, "(0,2)")
    (circle,) = [line for line in ax.get_lines() if line.get_gid() == "nodal-circle"]
    radius = np.hypot(circle.get_xdata(), circle.get_ydata())
    j01, j02 = jn_zeros(0, 2)  # J0(j01 r) = 0 inside the mode J0(j02 r): r = j01 / j02 (A&S table 9.5)
    np.testing.assert_allclose(radius, j01 / j02, rtol=0.01)
    assert not [line for line in ax.get_lines() if line.get_gid() == "nodal-diameter"]
    # (m, 1): m nodal diameters and no circle inside the rim (Fletcher & Rossing sec. 3.5).
    for m in (1, 2, 3):
        lines = [line.get_gid() for line in _panel(figure, f"({m},1)").get_lines()]
        assert lines.count("nodal-diameter") == m and "nodal-circle" not in lines


def test_rectangular_membrane_nodal_line():
    figure = shapes_figure(_patch(PATCHES["membrane-rectangle"]))
    (contour,) = [c for c in _find(figure, "nodal-lines") if c.axes is _panel(figure, "(2,1)")]
    x = np.concatenate([path.vertices[:, 0] for path in contour.get_paths()])
    # sin(2 pi x / W) vanishes at x = W / 2: 210 mm (independent arithmetic).
    np.testing.assert_allclose(x, 210.0, atol=0.01 * 420.0)


def test_free_free_bar_suspension_points():
    patch = _patch("""\
        name: plot-slender-bar
        resonator: {type: bar, material: aluminium-6061, length: 600 mm, width: 30 mm, thickness: 6 mm,
                    supports: free-free}
        render: {sample_rate: 16000, max_modes: 6}
        """)
    figure = shapes_figure(patch)
    (nodes,) = [line for line in _panel(figure, "B1").get_lines() if line.get_gid() == "nodes"]
    # Nodes of the first free-free beam mode: 0.2242 L and 0.7758 L (Blevins, Formulas for Natural
    # Frequency and Mode Shape, table 8-1; Rayleigh).
    np.testing.assert_allclose(nodes.get_xdata(), [0.2242, 0.7758], atol=2e-4)


def test_partials_resonator_has_no_shapes():
    figure = shapes_figure(_patch(PATCHES["partials"]))
    (text,) = _find(figure, "no-shapes")
    assert "no mode shapes" in text.get_text()


def test_drawing_holds_the_tuned_profile():
    tuning = tune_undercut(_patch(BLANK).resonator, (1, 4, 10), n_points=13)
    figure = bar_profile_drawing(tuning, name="plot-blank")
    spec = tuning.spec
    (profile,) = _find(figure, "profile")
    np.testing.assert_allclose(profile.get_xdata(), np.linspace(0.0, 400.0, 13))  # mm from one end
    np.testing.assert_allclose(profile.get_ydata(), np.asarray(spec.profile) * 1e3)  # thickness, mm
    (blank,) = _find(figure, "blank")
    assert max(blank.get_ydata()) == pytest.approx(20.0) and max(blank.get_xdata()) == pytest.approx(spec.length * 1e3)
    (hang,) = _find(figure, "suspension-points")
    x = np.asarray(hang.get_xdata())
    assert len(x) == 2 and x[0] + x[1] == pytest.approx(spec.length * 1e3, rel=1e-6)  # a symmetric cut
    assert 0.1 * spec.length * 1e3 < x[0] < 0.3 * spec.length * 1e3


# --------------------------------------------------------------------------
# tune-bar: the printed table and --drawing.


def test_tune_bar_table_and_drawing(tmp_path, capsys):
    import yaml

    blank = _write(tmp_path, BLANK)
    tuned, drawing = tmp_path / "tuned.yaml", tmp_path / "tuned.png"
    status, out, err = _run(capsys, "tune-bar", blank, "--ratios", "1:4:10", "--points", "13", "-o", tuned,
                            "--drawing", drawing)
    assert status == 0, err
    assert out.endswith(f"wrote {tuned}\nwrote {drawing}\n")
    _check_image(drawing)
    rows = [line.split() for line in out.splitlines() if re.fullmatch(r"\s+[\d.]+(\s+[\d.]+){3}", line)]
    assert len(rows) == 13
    table = np.array(rows, dtype=float)
    written = [float(v.split()[0]) for v in yaml.safe_load(tuned.read_text())["resonator"]["profile"]]
    np.testing.assert_allclose(table[:, 1], written, atol=0.005)  # thickness mm, to 0.01 mm
    np.testing.assert_allclose(table[:, 2], 20.0 - np.array(written), atol=0.006)  # cut depth below the blank
    np.testing.assert_allclose(table[:, 3], np.linspace(0, 1, 13), atol=5e-5)
    np.testing.assert_allclose(table[:, 0], np.linspace(0, 400, 13), atol=0.051)  # x mm, to 0.1 mm
    assert re.search(r"suspension points \(nodes of B1\): [\d.]+, [\d.]+ mm from the first end", out)


def test_tune_bar_without_output_keeps_the_paste_list(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    _write(tmp_path, BLANK)
    status, out, err = _run(capsys, "tune-bar", "patch.yaml", "--ratios", "1:4:10", "--points", "13",
                            "--drawing", "cut.svg")
    assert status == 0, err
    pasted = [line for line in out.splitlines() if line.startswith("  - ") and line.endswith(" mm")]
    assert len(pasted) == 13 and "profile:" in out  # the list a patch takes, as before
    assert out.endswith("wrote cut.svg\n") and (tmp_path / "cut.svg").read_bytes().startswith(b"<?xml")


# --------------------------------------------------------------------------
# Bad input: one line, exit status 2, nothing written.


def _refused(capsys, folder, argv, pattern):
    status, out, err = _run(capsys, *argv)
    assert status == 2 and out == "", (out, err)
    assert len(err.strip().splitlines()) == 1 and re.search(pattern, err), err
    assert _leftovers(folder) == [name for name in ("file.txt",) if (folder / name).exists()]


@pytest.mark.parametrize(("options", "pattern"), [
    (["--show", "partials,spectrum"], r"^synth: error: command line: --show: 'spectrum' is not a kind of figure: "
                                      r"give one or more of partials, decay, spectrogram, shapes"),
    (["--show", "partials,"], r"^synth: error: command line: --show: an empty name is not a kind of figure"),
    (["-o", "out.jpg"], r"^synth: error: command line: --output: output must end in \.png or \.svg or \.pdf"),
    (["-o", "missing/out.png"], r"^synth: error: command line: --output: output folder 'missing' does not exist"),
    (["-o", "file.txt/out.png"], r"^synth: error: command line: --output: 'file.txt' is not a folder"),
    (["-o", "."], r"^synth: error: command line: --output: output must end in"),
], ids=["show", "empty-show", "suffix", "no-folder", "file-as-folder", "folder"])
def test_bad_plot_options(tmp_path, capsys, monkeypatch, options, pattern):
    monkeypatch.chdir(tmp_path)
    _write(tmp_path, PATCHES["string"])
    (tmp_path / "file.txt").write_text("x")
    _refused(capsys, tmp_path, ["plot", "patch.yaml", *options], pattern)


def test_unwritable_output(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    _write(tmp_path, PATCHES["string"])
    (tmp_path / "out.png").mkdir()  # a folder in the way of the file
    status, out, err = _run(capsys, "plot", "patch.yaml", "-o", "out.png")
    assert status == 2 and out == ""
    assert err == "synth: error: command line: --output: 'out.png' is a folder; name a file inside it\n"
    assert not any((tmp_path / "out.png").iterdir())


def test_bad_drawing_refused_before_any_work(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    _write(tmp_path, BLANK)
    _refused(capsys, tmp_path, ["tune-bar", "patch.yaml", "--ratios", "1:4:10", "-o", "tuned.yaml",
                                "--drawing", "cut.jpg"],
             r"^synth: error: command line: --drawing: output must end in \.png or \.svg or \.pdf")


def test_matplotlib_missing(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    _write(tmp_path, PATCHES["string"])
    monkeypatch.setitem(sys.modules, "matplotlib", None)  # import matplotlib now raises ImportError
    _refused(capsys, tmp_path, ["plot", "patch.yaml"],
             r"^synth: error: synth plot needs matplotlib: pip install '\.\[plot\]'$")
    _write(tmp_path, BLANK)
    _refused(capsys, tmp_path, ["tune-bar", "patch.yaml", "--ratios", "1:4:10", "--drawing", "cut.png"],
             r"^synth: error: synth tune-bar --drawing needs matplotlib: pip install '\.\[plot\]'$")


# --------------------------------------------------------------------------
# The docstring examples run.


@pytest.mark.parametrize("name", ["synth.plots.partials_figure", "synth.plots.figure_svg",
                                  "synth.tuning.profile_table"])
def test_docstring_examples(name):
    module_name, _, attr = name.rpartition(".")
    module = sys.modules[module_name]
    finder = doctest.DocTestFinder(recurse=False)
    (test,) = finder.find(getattr(module, attr), name, module=module, globs=dict(vars(module)))
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS)
    runner.run(test)
    assert test.examples and runner.failures == 0
