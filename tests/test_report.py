"""The report a practitioner reads (synth/report.py): labels, units, precision, CSV, golden texts.

Golden texts (tests/data/report/*.txt) hold one small patch of every resonator
type as ``synth modes`` prints it.  They change only on purpose: after a
deliberate change of the report, rewrite them with
``SYNTH_UPDATE_GOLDEN=1 .venv/bin/python -m pytest tests/test_report.py`` and
read the diff before committing.
"""
from __future__ import annotations

import csv
import io
import json
import os
import re
from pathlib import Path

import pytest

from synth.cli import DEFAULT_UNITS as CLI_DEFAULT_UNITS
from synth.cli import UNIT_SYSTEMS as CLI_UNIT_SYSTEMS
from synth.cli import main
from synth.instrument_file import load_instrument
from synth.patch import load_patch
from synth.pipeline import partial_table
from synth.labels import _PARAMETERS, _SOLVED_WORDS, DEFAULT_UNITS, UNIT_SYSTEMS, format_quantity, parameter_lines
from synth.report import table_to_dict

ROOT = Path(__file__).resolve().parents[1]
GOLDEN = Path(__file__).resolve().parent / "data" / "report"
UPDATE = os.environ.get("SYNTH_UPDATE_GOLDEN") == "1"
PATCHES = sorted((ROOT / "patches").glob("*.yaml"))
INSTRUMENTS = sorted(p for p in (ROOT / "patches" / "instruments").glob("*.yaml") if "range" in p.read_text())

# One small patch of every resonator type (invented objects; sizes chosen to exercise every label).
SMALL = {
    "string": """\
        name: golden-string
        resonator: {type: string, material: phosphor-bronze, length: 430 mm, diameter: 0.33 mm, pitch: E4}
        excitation: {type: pluck, position: 0.2}
        pickup: {position: 0.85}
        damping: {t60: 5 s, t60_high: 0.8 s, high_frequency: 3 kHz}
        render: {sample_rate: 16000}
        """,
    "membrane": """\
        name: golden-membrane
        resonator: {type: membrane, shape: circle, radius: 150 mm, areal_density: 0.25, tension: 1800 N/m}
        excitation: {type: strike, position: {radius: 0.6, angle: 0 deg}, contact_time: 2 ms}
        pickup: {position: {radius: 0.3, angle: 45 deg}}
        render: {sample_rate: 16000}
        """,
    "bar": """\
        name: golden-bar
        resonator: {type: bar, material: maple, length: 300 mm, width: 40 mm, thickness: 18 mm}
        excitation: {type: strike, position: 0.5, contact_time: 1 ms}
        pickup: {position: 0.1}
        render: {sample_rate: 16000}
        """,
    "plate": """\
        name: golden-plate
        resonator: {type: plate, shape: circle, edges: clamped, radius: 60 mm, thickness: 0.5 mm, material: brass}
        excitation: {type: strike, position: {radius: 0.4, angle: 0 deg}, contact_time: 0.3 ms}
        render: {sample_rate: 16000}
        """,
    "air-column": """\
        name: golden-pipe
        resonator: {type: air-column, length: 400 mm, radius: 10 mm, ends: closed-open, temperature: 22}
        excitation: {type: strike, contact_time: 0.5 ms}
        render: {sample_rate: 16000}
        """,
    "partials": """\
        name: golden-partials
        resonator: {type: partials, pitch: G4, ratios: [0.5, 1, 1.19, 1.5, 2.0, 2.51]}
        excitation: {type: strike, contact_time: 0.5 ms}
        render: {sample_rate: 16000}
        """,
}


def _write(tmp_path, text):
    import textwrap

    path = tmp_path / "patch.yaml"
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def _modes_text(capsys, monkeypatch, tmp_path, text, *extra):
    path = _write(tmp_path, text)
    monkeypatch.chdir(tmp_path)
    assert main(["modes", path.name, *extra]) == 0
    return capsys.readouterr().out


@pytest.mark.parametrize("kind", sorted(SMALL))
def test_golden_report(kind, capsys, monkeypatch, tmp_path):
    printed = _modes_text(capsys, monkeypatch, tmp_path, SMALL[kind], "--rows", "6")
    golden = GOLDEN / f"{kind}.txt"
    if UPDATE:
        golden.write_text(printed, encoding="utf-8")
    assert printed == golden.read_text(encoding="utf-8")


@pytest.mark.parametrize("units", ["si", "imperial"])
def test_golden_report_units(units, capsys, monkeypatch, tmp_path):
    printed = _modes_text(capsys, monkeypatch, tmp_path, SMALL["string"], "--units", units, "--rows", "6")
    golden = GOLDEN / f"string-{units}.txt"
    if UPDATE:
        golden.write_text(printed, encoding="utf-8")
    assert printed == golden.read_text(encoding="utf-8")


def _demo_tables():
    for path in PATCHES:
        yield path.name, partial_table(load_patch(path), onset=False)
    for path in INSTRUMENTS:
        instrument = load_instrument(path)
        yield f"{path.name} {instrument.keys[0]}", partial_table(instrument.key_patch(instrument.keys[0]), onset=False)


@pytest.fixture(scope="module")
def demo_tables():
    return list(_demo_tables())


def test_every_reported_parameter_has_a_label(demo_tables):
    """Labels a maker would write, never a key with its underscores (issue 13)."""
    seen = set()
    for name, table in demo_tables:
        for key in table.parameters:
            seen.add(key)
            assert key in _PARAMETERS or key in _SOLVED_WORDS, f"{name}: parameter {key!r} has no label in synth/report.py"
    for name, table in demo_tables:
        for label, text in parameter_lines(table.parameters):
            assert "_" not in label and text not in ("True", "False"), (name, label, text)
            for number in re.findall(r"[\d.]+\d", text.replace(",", "")):
                significant = number.replace(".", "").lstrip("0")
                assert len(significant) <= 7, f"{name}: {label}: {text} (precision wanders)"
            assert not re.search(r"\de[-+]\d", text), (name, label, text)  # no 1.443e+04
    assert {"tension_n", "stress_pa", "inharmonicity_b", "length_m"} <= seen


def test_solved_flags_fold_into_their_value():
    lines = dict(parameter_lines({"length_m": 0.3254, "length_solved": True, "reference_hz": 612.0,
                                  "reference_solved": False}))
    assert lines["length"] == "325.4 mm (solved for the pitch)"
    assert lines["ratio 1 at (the patch's fundamental)"] == "612.000 Hz"
    assert "length solved" not in lines


# Exact definitions: 1 in = 0.0254 m, 1 lb = 0.45359237 kg (1959 international yard and pound);
# 1 lbf = 4.4482216152605 N and 1 psi = 6894.757293168 Pa (NIST SP 811 (2008), Appendix B.8).
@pytest.mark.parametrize("value, quantity, units, resolution, expected", [
    (0.4, "length", "workshop", 1e-4, "400.0 mm"),
    (0.0254, "length", "imperial", 1e-5, "1.0000 in"),
    (0.00091, "length", "si", 1e-5, "0.00091 m"),
    (4.4482216152605 * 20, "force", "imperial", 0.1, "20.00 lbf"),
    (6894.757293168 * 50000, "stress", "imperial", 1e6, "50,000 psi"),
    (611154981.47, "stress", "workshop", 1e6, "611 MPa"),
    (1.6e9, "modulus", "workshop", 1e7, "1.60 GPa"),
    (0.45359237, "mass", "imperial", 1e-4, "1.0000 lb"),
    (0.1977, "mass", "workshop", 1e-4, "197.7 g"),
    (100.0, "temperature", "imperial", 0.1, "212.0 °F"),
    (0.0006, "short_time", "si", 1e-5, "0.60 ms"),
    (90.0, "angle", "workshop", 0.1, "90.0°"),
])
def test_units_and_precision(value, quantity, units, resolution, expected):
    assert format_quantity(value, quantity, units=units, resolution=resolution) == expected


def test_unit_systems_the_cli_offers_are_the_reports():
    assert CLI_UNIT_SYSTEMS == UNIT_SYSTEMS and CLI_DEFAULT_UNITS == DEFAULT_UNITS


def test_json_stays_si_whatever_the_units(capsys, monkeypatch, tmp_path):
    si = _modes_text(capsys, monkeypatch, tmp_path, SMALL["string"], "--json")
    imperial = _modes_text(capsys, monkeypatch, tmp_path, SMALL["string"], "--json", "--units", "imperial")
    assert si == imperial
    assert json.loads(si)["parameters"]["length_m"] == pytest.approx(0.43)


def _csv_blocks(text):
    block = [row for row in csv.reader(line for line in io.StringIO(text) if line.startswith("#"))]
    rows = list(csv.DictReader(line for line in io.StringIO(text) if not line.startswith("#")))
    return {key[2:]: value for key, value in block}, rows


def test_csv_carries_the_parameter_block(capsys, monkeypatch, tmp_path):
    data = json.loads(_modes_text(capsys, monkeypatch, tmp_path, SMALL["string"], "--json"))
    text = _modes_text(capsys, monkeypatch, tmp_path, SMALL["string"], "--csv", "-")
    block, rows = _csv_blocks(text)
    assert block["name"] == "golden-string"
    for key in ("tension_n", "stress_pa", "inharmonicity_b", "linear_density_kg_m"):
        assert float(block[key]) == pytest.approx(data["parameters"][key], rel=1e-9)
    assert block["tension_solved"] == "true"
    assert len(rows) == len(data["modes"])
    assert float(rows[2]["frequency_hz"]) == pytest.approx(data["modes"][2]["frequency_hz"], rel=1e-9)


def test_csv_to_a_file_equals_csv_to_stdout(capsys, monkeypatch, tmp_path):
    to_stdout = _modes_text(capsys, monkeypatch, tmp_path, SMALL["bar"], "--csv", "-")
    _modes_text(capsys, monkeypatch, tmp_path, SMALL["bar"], "--csv", "table.csv")
    assert (tmp_path / "table.csv").read_text(encoding="utf-8") == to_stdout


def test_cut_table_names_its_file(capsys, monkeypatch, tmp_path):
    printed = _modes_text(capsys, monkeypatch, tmp_path, SMALL["string"], "--rows", "2")
    assert printed.splitlines()[0].startswith("golden-string (string from patch.yaml)")
    assert "(synth modes patch.yaml lists them all)" in printed


def test_table_to_dict_is_the_json(demo_tables):
    name, table = demo_tables[0]
    data = table_to_dict(table)
    assert json.loads(json.dumps(data)) == data


def test_report_module_examples():
    import doctest

    import synth.labels
    import synth.report

    tried = 0
    for module in (synth.labels, synth.report):
        failures, count = doctest.testmod(module, optionflags=doctest.ELLIPSIS)
        assert failures == 0
        tried += count
    assert tried >= 8
