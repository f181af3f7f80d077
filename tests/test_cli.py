"""The command line and the Python API on the example patches."""
from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import numpy as np
import pytest
import soundfile

import synth
from synth.cli import build_parser, main
from synth.patch import (
    _DAMPING_FIELDS,
    _EXCITATION_FIELDS,
    _RENDER_FIELDS,
    Damping,
    Excitation,
    RenderSettings,
)

PATCHES = sorted((Path(__file__).parent.parent / "patches").glob("*.yaml"))
FAST = ["--duration", "0.3", "--sample-rate", "16000"]


def test_example_patches_exist():
    assert len([p for p in PATCHES if p.name.startswith("string-")]) >= 3


@pytest.mark.parametrize("patch", PATCHES, ids=lambda p: p.stem)
def test_every_example_renders(patch, tmp_path, capsys):
    out = tmp_path / "x.wav"
    assert main(["render", str(patch), "-o", str(out), *FAST]) == 0
    data, rate = soundfile.read(out)
    assert rate == 16000 and len(data) == round(0.3 * 16000)
    assert 0 < np.max(np.abs(data)) < 1.0
    text = capsys.readouterr()
    assert "wrote" in text.out and "listening caution" in text.err


def test_modes_table_text(capsys):
    patch = next(p for p in PATCHES if "monochord" in p.name)
    assert main(["modes", str(patch)]) == 0
    out = capsys.readouterr().out
    for header in ("freq Hz", "ratio", "cents", "T60 s", "level dB", "harmonic", "overtone", "wavelength mm", "nodes", "antinodes"):
        assert header in out
    assert "tension: 120.0 N" in out


def test_modes_json_and_csv(tmp_path, capsys):
    patch = next(p for p in PATCHES if "harp" in p.name)
    csv_path = tmp_path / "table.csv"
    assert main(["modes", str(patch), "--json", "--csv", str(csv_path)]) == 0
    report = json.loads(capsys.readouterr().out)
    assert set(report) == {"name", "resonator", "fundamental_hz", "parameters", "modes", "warnings"}
    assert report["fundamental_hz"] == pytest.approx(261.6256, abs=1e-4)  # C4, ISO 16 / 12-TET
    first = report["modes"][0]
    for key in ("index", "label", "frequency_hz", "ratio", "cents_from_harmonic", "t60_s", "level_db"):
        assert key in first
    freqs = [m["frequency_hz"] for m in report["modes"]]
    assert freqs == sorted(freqs)
    rows = list(csv.DictReader(line for line in csv_path.open() if not line.startswith("#")))  # after the parameter block
    assert len(rows) == len(report["modes"])
    assert float(rows[0]["frequency_hz"]) == pytest.approx(first["frequency_hz"], rel=1e-9)


def test_nyquist_modes_dropped_and_counted(write_patch, capsys):
    patch = write_patch(
        """\
        name: high
        resonator: {type: string, material: music-wire, length: 0.3, diameter: 0.3 mm, pitch: A5}
        render: {sample_rate: 8000, max_modes: 40}
        """
    )
    assert main(["modes", str(patch), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert all(m["frequency_hz"] < 4000 for m in report["modes"])
    # Leaving out the modes at or above Nyquist is expected: information, not a warning (issue 13).
    assert not any("Nyquist" in w for w in report["warnings"])
    parameters = report["parameters"]
    assert parameters["modes_limit"] == "every mode below Nyquist"
    assert parameters["nyquist_hz"] == parameters["bandwidth_hz"] == 4000.0
    assert parameters["modes_above_nyquist"] == 40 - len(report["modes"]) > 0


def test_node_gives_null_level(write_patch, capsys):
    patch = write_patch(
        """\
        name: node
        resonator: {type: string, material: music-wire, length: 0.65, diameter: 0.45 mm, pitch: A2}
        excitation: {position: 0.5}
        render: {max_modes: 8}
        """
    )
    assert main(["modes", str(patch), "--json"]) == 0
    modes = json.loads(capsys.readouterr().out)["modes"]
    assert [m["level_db"] is None for m in modes] == [False, True] * 4
    assert main(["modes", str(patch)]) == 0
    assert "null" in capsys.readouterr().out


def test_default_output_and_overrides(tmp_path, monkeypatch, capsys):
    patch = PATCHES[0].resolve()
    monkeypatch.chdir(tmp_path)
    assert main(["render", str(patch), "--duration", "200 ms", "--sample-rate", "8 kHz", "--pitch", "A3", "--bit-depth", "32"]) == 0
    out = tmp_path / "renders" / f"{synth.load_patch(patch).name}.wav"
    data, rate = soundfile.read(out)
    assert rate == 8000 and len(data) == 1600
    assert soundfile.info(out).subtype == "FLOAT"
    assert [p.name for p in out.parent.iterdir()] == [out.name]  # no temporary files left


def test_absolute_scale_refuses_to_clip(write_patch, tmp_path, capsys):
    patch = write_patch(
        """\
        name: loud
        resonator: {type: string, material: music-wire, length: 0.65, diameter: 0.45 mm, pitch: A2}
        excitation: {strength: 20}
        render: {peak_db: null, duration: 0.2, sample_rate: 8000}
        """
    )
    out = tmp_path / "loud.wav"
    assert main(["render", str(patch), "-o", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert "would clip" in err and "dBFS" in err and len(err.splitlines()) == 1
    assert not out.exists()
    quiet = write_patch(
        """\
        name: soft
        resonator: {type: string, material: music-wire, length: 0.65, diameter: 0.45 mm, pitch: A2}
        excitation: {strength: 0.25}
        render: {peak_db: null, duration: 0.2, sample_rate: 8000}
        """,
        name="soft.yaml",
    )
    assert main(["render", str(quiet), "-o", str(out), "-q"]) == 0
    data, _ = soundfile.read(out)
    assert 0.01 < np.max(np.abs(data)) < 1.0
    # Absolute scale is linear in strength: half the strength, half the peak.
    half = write_patch(quiet.read_text().replace("0.25", "0.125"), name="half.yaml")
    out_half = tmp_path / "half.wav"
    assert main(["render", str(half), "-o", str(out_half), "-q"]) == 0
    data_half, _ = soundfile.read(out_half)
    assert np.max(np.abs(data_half)) == pytest.approx(np.max(np.abs(data)) / 2, rel=1e-4)


def test_python_api_without_files():
    patch = synth.patch_from_text(PATCHES[0].read_text())
    table = synth.partial_table(patch)
    assert isinstance(table, synth.PartialTable)
    tuned = synth.retune(patch, 220.0)
    signal, table = synth.render_patch(tuned, table=None)
    assert signal.dtype == np.float32
    assert patch.render.duration == "auto" and signal[0] == 0.0
    assert len(signal) == synth.patch_ending(tuned, table).n_samples
    assert synth.partial_table(synth.retune(patch, 220.0)).fundamental_hz == pytest.approx(220.0, rel=1e-10)


def test_partial_table_arrays_are_read_only():
    table = synth.partial_table(synth.load_patch(PATCHES[0]))
    with pytest.raises(ValueError):
        table.frequency_hz[0] = 1.0


def test_schema_matches_dataclasses():
    # Consistency (cf. soundfile's test_argspec): every YAML key has a dataclass field
    # and every dataclass default equals the schema default.
    for fields, cls, rename in (
        (_DAMPING_FIELDS, Damping, {}),
        (_RENDER_FIELDS, RenderSettings, {}),
        (_EXCITATION_FIELDS, Excitation, {"type": "kind"}),
    ):
        instance = cls()
        for key, field in fields.items():
            attr = rename.get(key, key)
            assert hasattr(instance, attr), (cls.__name__, key)
            if key != "position":
                assert getattr(instance, attr) == field.default, (cls.__name__, key)


def test_cli_overrides_are_render_keys():
    parser = build_parser()
    text = parser.format_help()
    assert "modes" in text and "render" in text
    assert math.isclose(synth.load_patch(PATCHES[0], overrides={"render.duration": ("0.5 s", "--duration")}).render.duration, 0.5)


@pytest.mark.parametrize("command", [
    "synth modes patches/string-bass-steel-a1.yaml --rows 12",
    "synth modes patches/partials-bell-invented.yaml --rows 6",
])
def test_readme_tables_are_what_the_tool_prints(command, capsys, monkeypatch):
    """The README quotes real tables: keep them true."""
    root = Path(__file__).resolve().parent.parent
    readme = (root / "README.md").read_text(encoding="utf-8")
    assert f"`{command}`" in readme
    monkeypatch.chdir(root)
    assert main(command.split()[1:]) == 0
    printed = capsys.readouterr().out.rstrip("\n")
    block = readme.split(f"`{command}`", 1)[1].split("```\n", 1)[1].split("```", 1)[0].rstrip("\n")
    assert block == printed
