"""synth preview: the page's API, its guard, saving, the command, and the page in a real browser.

References: the partial table the page shows must be the one ``synth modes
PATCH --set KEY=VALUE --json`` prints (the command line run in-process), and
the bench string here is ideal (Young's modulus 0, pinned ends), so Mersenne's
law f_1 = (1 / 2L) sqrt(T / mu), mu = rho pi d^2 / 4, gives its fundamental
exactly (Mersenne 1636; any acoustics text, e.g. Fletcher & Rossing,
*The Physics of Musical Instruments*, section 2.2).  Saved files are read back
with PyYAML, not with the editor that wrote them.
"""
from __future__ import annotations

import io
import json
import math
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import threading
import time
import wave
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
import yaml

from synth.cli import main
from synth.preview import page, server
from synth.preview.page import controls_of, patch_from_values, value_text
from synth.preview.yamledit import delete_value, set_value
from synth.yamlio import load_yaml_file

pytestmark = pytest.mark.filterwarnings("ignore:Using `httpx` with `starlette.testclient`")

ROOT = Path(__file__).resolve().parents[1]
PORT = 8765
BASE = f"http://127.0.0.1:{PORT}"
REL = 1e-9  # the page and the command line run the same code on the same input: equal to rounding

BENCH = """\
# A bench string for the preview tests: ideal (no bending stiffness), so
# Mersenne's law gives its fundamental exactly.
name: preview-bench-string
resonator:
  type: string
  material: {density: 7850, youngs_modulus: 0}   # steel-like, ideal
  length: 700 mm        # the vibrating length, nut to bridge
  diameter: 0.5 mm
  tension: 120 N        # set by the tuning key
excitation:
  type: pluck
  position: 0.15
pickup:
  position: 0.9   # near the bridge
damping:
  t60: 2 s
  t60_high: 0.4 s
  high_frequency: 3 kHz
render:
  duration: 0.2 s
  sample_rate: 8000
"""
DENSITY, DIAMETER, TENSION = 7850.0, 0.5e-3, 120.0  # the bench string's values, SI


def mersenne_hz(length_m):
    """Fundamental of the ideal bench string (Mersenne's law)."""
    mu = DENSITY * math.pi * DIAMETER**2 / 4
    return math.sqrt(TENSION / mu) / (2 * length_m)


@pytest.fixture
def bench(tmp_path):
    folder = tmp_path / "patches"
    folder.mkdir()
    path = folder / "bench.yaml"
    path.write_text(BENCH, encoding="utf-8")
    return path


def client_for(path):
    from starlette.testclient import TestClient

    return TestClient(server.create_app(path, host="127.0.0.1", port=PORT), base_url=BASE)


def control_values(client):
    data = client.get("/api/patch").json()
    return {c["key"]: c["value"] for c in data["controls"]}


def cli_json(capsys, path, *settings):
    """``synth modes PATCH --set S ... --json``, run in-process."""
    argv = ["modes", str(path)]
    for setting in settings:
        argv += ["--set", setting]
    status = main(argv + ["--json"])
    out, err = capsys.readouterr()
    assert status == 0, err
    return json.loads(out)


def folder_listing(folder):
    return sorted(p.name for p in Path(folder).iterdir())


class TestControls:
    def test_api_lists_the_contract_names_with_the_files_values(self, bench):
        data = client_for(bench).get("/api/patch").json()
        controls = {c["key"]: c for c in data["controls"]}
        for key in ("resonator.length", "resonator.diameter", "resonator.tension", "excitation.position",
                    "excitation.release_time", "excitation.strength", "pickup.position", "damping.t60",
                    "damping.t60_high"):
            assert key in controls
        assert controls["resonator.length"]["value"] == "700 mm"  # the file's own text
        assert controls["excitation.position"]["value"] == "0.15"
        assert controls["excitation.strength"]["value"] == ""  # not in the file: the default shows
        assert "1" in controls["excitation.strength"]["placeholder"]
        assert "resonator.pitch" not in controls  # the file gives the tension, not the pitch

    def test_positions_follow_the_resonator(self):
        mapping = load_yaml_file(ROOT / "patches/membrane-frame-drum-d3.yaml")
        keys = [c["key"] for c in controls_of(mapping, _patch(mapping))]
        assert {"excitation.position.radius", "excitation.position.angle", "resonator.pitch"} <= set(keys)
        mapping = load_yaml_file(ROOT / "patches/membrane-rect-panel.yaml")
        controls = {c["key"]: c for c in controls_of(mapping, _patch(mapping))}
        assert controls["excitation.position"]["value"] == "[0.27, 0.61]"
        mapping = load_yaml_file(ROOT / "patches/partials-bell-invented.yaml")
        keys = [c["key"] for c in controls_of(mapping, _patch(mapping))]
        assert not [k for k in keys if "position" in k]  # a partial set has no geometry

    @pytest.mark.parametrize("path", sorted((ROOT / "patches").glob("*.yaml")), ids=lambda p: p.stem)
    def test_the_pages_own_text_changes_nothing(self, path):
        # Every control shows its value as text that reads back as the file's value.
        mapping = load_yaml_file(path)
        controls = controls_of(mapping, _patch(mapping))
        values = {c["key"]: c["value"] for c in controls}
        _, overrides, deletions = patch_from_values(mapping, values, file=str(path), keys=list(values))
        assert overrides == {} and deletions == []


def _patch(mapping):
    from synth.patch import patch_from_mapping

    return patch_from_mapping(mapping, file="<test>")


class TestValueText:
    @pytest.mark.parametrize("value", [0.45, 1e-5, 2.5e20, 48000, "650 mm", "C#3", "kg/m^3", "yes", "1, 2",
                                       "a: b", "[x", [0.27, 0.61], {"radius": 0.6, "angle": "30 deg"}, None, True,
                                       "   spaced", "#hash", "é 1"])
    def test_reads_back_as_itself(self, value):
        # PyYAML (the loader of every patch) is the reference reader.
        text = value_text(value)
        assert "\n" not in text
        assert yaml.safe_load(text) == value
        assert yaml.safe_load(f"k: {text}\n") == {"k": value}  # in a block mapping
        assert yaml.safe_load(f"k: {{a: 1, b: {text}}}\n") == {"k": {"a": 1, "b": value}}  # in a flow mapping


class TestSolve:
    def test_equals_synth_modes_with_the_same_set(self, bench, capsys):
        client = client_for(bench)
        values = control_values(client)
        values["resonator.length"] = "650 mm"
        data = client.post("/api/solve", json={"values": values}).json()
        reference = cli_json(capsys, bench, "resonator.length=650 mm")
        assert data["fundamental_hz"] == pytest.approx(reference["fundamental_hz"], rel=REL)
        cli_hz = [m["frequency_hz"] for m in reference["modes"]]
        page_hz = [row["frequency_hz"] for row in data["rows"]]
        np.testing.assert_allclose(page_hz, cli_hz, rtol=REL)
        assert [row["label"] for row in data["rows"]] == [m["label"] for m in reference["modes"]]
        # and the physics: Mersenne's law for the ideal string
        assert data["fundamental_hz"] == pytest.approx(mersenne_hz(0.650), rel=REL)
        assert data["fundamental_hz"] != pytest.approx(mersenne_hz(0.700), rel=1e-3)

    def test_voices_are_the_tables_strongest_partials(self, bench):
        client = client_for(bench)
        data = client.post("/api/solve", json={"values": control_values(client)}).json()
        assert 0 < len(data["voices"]) <= page.MAX_VOICES
        table_hz = {row["frequency_hz"] for row in data["rows"]}
        assert {v[0] for v in data["voices"]} <= table_hz
        assert all(v[2] > 0 for v in data["voices"])  # T60, s
        assert data["release_t60_s"] == 0.15  # the default dampers
        assert any(label == "tension" for label, _ in data["parameters"])
        assert data["figure_svg"].startswith("<svg")

    def test_units_change_the_parameter_lines(self, bench):
        client = client_for(bench)
        data = client.post("/api/solve", json={"values": control_values(client), "units": "imperial"}).json()
        assert dict(data["parameters"])["length"].endswith(" in")
        response = client.post("/api/solve", json={"values": {}, "units": "furlongs"})
        assert response.json()["ok"] is False and "units" in response.json()["error"]

    @pytest.mark.parametrize("text, phrase", [
        ("-3 mm", "must be > 0"),
        ("[1,", "cannot read"),
        ("650 parsecs", "unit"),
        ("1\n2", "one line"),
    ])
    def test_a_bad_value_is_one_line_naming_its_key(self, bench, text, phrase):
        client = client_for(bench)
        values = control_values(client)
        values["resonator.length"] = text
        response = client.post("/api/solve", json={"values": values})
        assert response.status_code == 200  # answered: the answer is the error line
        data = response.json()
        assert data["ok"] is False and data["key"] == "resonator.length"
        assert data["error"].startswith("resonator.length: ") and "\n" not in data["error"]
        assert phrase in data["error"]

    def test_an_error_in_the_file_names_its_line(self, bench):
        client = client_for(bench)
        values = control_values(client)
        values["damping.t60"] = "0.1 s"  # now below the file's t60_high (0.4 s, line 17)
        data = client.post("/api/solve", json={"values": values}).json()
        assert data["key"] == "damping.t60_high" and ":17: damping.t60_high: must not exceed t60" in data["error"]

    def test_an_unknown_key_is_refused(self, bench):
        response = client_for(bench).post("/api/solve", json={"values": {"render.sample_rate": "96000"}})
        assert response.json()["ok"] is False and "not a control" in response.json()["error"]

    def test_the_full_figure_is_svg(self, bench):
        client = client_for(bench)
        data = client.post("/api/figure", json={"values": control_values(client)}).json()
        assert data["ok"] and "</svg>" in data["figure_svg"]

    def test_the_servers_render_sounds_at_the_solved_pitch(self, bench):
        client = client_for(bench)
        values = control_values(client)
        values["resonator.length"] = "650 mm"
        response = client.get("/api/render.wav", params=values)
        assert response.status_code == 200 and response.headers["content-type"] == "audio/wav"
        with wave.open(io.BytesIO(response.content)) as wav:  # Python's own reader
            rate, n, width = wav.getframerate(), wav.getnframes(), wav.getsampwidth()
            raw = wav.readframes(n)
        assert (rate, n, width) == (8000, 1600, 3)  # the patch's 0.2 s at 8 kHz, 24-bit
        samples = np.frombuffer(raw, dtype=np.uint8).reshape(-1, 3)
        ints = (samples[:, 0].astype(np.int32) | samples[:, 1].astype(np.int32) << 8
                | samples[:, 2].astype(np.int32) << 16)
        ints = np.where(ints >= 1 << 23, ints - (1 << 24), ints)
        spectrum = np.abs(np.fft.rfft(ints * np.hanning(n), 16 * n))
        peak_hz = np.argmax(spectrum) * rate / (16 * n)
        f1 = mersenne_hz(0.650)
        harmonic = max(1, round(peak_hz / f1))
        assert abs(peak_hz - harmonic * f1) < 2 * rate / n  # within two bins of the unpadded spectrum
        bad = client.get("/api/render.wav", params={**values, "resonator.length": "-1 m"})
        assert bad.status_code == 400 and bad.json()["key"] == "resonator.length"


class TestGuard:
    def test_a_foreign_host_is_refused(self, bench):
        client = client_for(bench)
        for host in ("evil.example", f"evil.example:{PORT}", "127.0.0.1", f"127.0.0.1:{PORT + 1}"):
            assert client.get("/", headers={"host": host}).status_code == 403
            assert client.get("/api/patch", headers={"host": host}).status_code == 403
            assert client.post("/api/solve", json={"values": {}}, headers={"host": host}).status_code == 403
        assert client.get("/", headers={"host": f"localhost:{PORT}"}).status_code == 200
        assert client.get("/").status_code == 200

    def test_a_post_from_another_origin_is_refused(self, bench):
        client = client_for(bench)
        values = control_values(client)
        for origin in ("http://evil.example", "null", f"http://evil.example:{PORT}", f"https://127.0.0.1:{PORT}"):
            for path in ("/api/solve", "/api/save"):
                response = client.post(path, json={"values": values}, headers={"origin": origin})
                assert response.status_code == 403, (origin, path)
        assert bench.read_text(encoding="utf-8") == BENCH
        assert client.post("/api/solve", json={"values": values}, headers={"origin": BASE}).status_code == 200

    def test_cross_site_fetches_and_forms_are_refused(self, bench):
        client = client_for(bench)
        response = client.get("/api/render.wav", headers={"sec-fetch-site": "cross-site"})
        assert response.status_code == 403
        form = client.post("/api/save", content="values=x", headers={"content-type": "application/x-www-form-urlencoded"})
        assert form.status_code == 415
        assert bench.read_text(encoding="utf-8") == BENCH

    def test_pages_carry_a_content_security_policy(self, bench):
        response = client_for(bench).get("/")
        policy = response.headers["content-security-policy"]
        assert "script-src 'self'" in policy and "frame-ancestors 'none'" in policy
        assert not re.search(r"<input[^>]*\sname=", response.text)  # the controls are made from /api/patch
        assert client_for(bench).get("/static/../server.py").status_code == 404


class TestSave:
    def test_save_keeps_comments_and_changes_only_the_values(self, bench, capsys):
        client = client_for(bench)
        values = control_values(client)
        values["resonator.length"] = "650 mm"
        values["pickup.position"] = "0.85"
        solved = client.post("/api/solve", json={"values": values}).json()
        response = client.post("/api/save", json={"values": values})
        assert response.status_code == 200, response.text
        assert sorted(response.json()["changed"]) == ["pickup.position", "resonator.length"]
        saved = bench.read_text(encoding="utf-8")
        before, after = BENCH.splitlines(), saved.splitlines()
        assert len(before) == len(after)
        changed = [(a, b) for a, b in zip(before, after) if a != b]
        assert changed == [("  length: 700 mm        # the vibrating length, nut to bridge",
                            "  length: 650 mm        # the vibrating length, nut to bridge"),
                           ("  position: 0.9   # near the bridge", "  position: 0.85   # near the bridge")]
        assert yaml.safe_load(saved)["resonator"]["length"] == "650 mm"
        reference = cli_json(capsys, bench)  # the saved file, as the command line reads it
        assert reference["fundamental_hz"] == pytest.approx(solved["fundamental_hz"], rel=REL)
        assert folder_listing(bench.parent) == ["bench.yaml"]  # no temporary left

    def test_emptied_values_leave_the_file(self, tmp_path):
        path = tmp_path / "drum.yaml"
        text = (ROOT / "patches/membrane-frame-drum-d3.yaml").read_text(encoding="utf-8")
        path.write_text(text.replace("sample_rate: 48000", "sample_rate: 8000"), encoding="utf-8")
        client = client_for(path)
        values = control_values(client)
        values.update({"pickup.position.radius": "", "pickup.position.angle": "", "excitation.position.angle": "45"})
        assert client.post("/api/save", json={"values": values}).status_code == 200
        saved = yaml.safe_load(path.read_text(encoding="utf-8"))
        assert "pickup" not in saved  # an empty section would read as null
        assert saved["excitation"]["position"] == {"radius": 0.62, "angle": 45}
        assert "# soft fingers: few high modes" in path.read_text(encoding="utf-8")

    def test_save_as_writes_a_new_file_beside_the_patch(self, bench):
        client = client_for(bench)
        values = control_values(client)
        values["damping.t60"] = "3 s"
        response = client.post("/api/save", json={"values": values, "name": "longer.yaml"})
        assert response.status_code == 200 and response.json()["file"] == "longer.yaml"
        assert bench.read_text(encoding="utf-8") == BENCH  # the original is untouched
        new = (bench.parent / "longer.yaml").read_text(encoding="utf-8")
        assert new == BENCH.replace("  t60: 2 s", "  t60: 3 s")
        again = client.post("/api/save", json={"values": values, "name": "bench.yaml"}).json()
        assert again["ok"] is False and again["exists"] is True  # an existing file is replaced only when asked
        assert bench.read_text(encoding="utf-8") == BENCH
        replaced = client.post("/api/save", json={"values": values, "name": "bench.yaml", "replace": True})
        assert replaced.status_code == 200 and "t60: 3 s" in bench.read_text(encoding="utf-8")

    @pytest.mark.parametrize("name", ["../outside.yaml", "sub/inside.yaml", "/tmp/absolute.yaml", "notes.txt",
                                      ".hidden.yaml", "back\\slash.yaml", "nul\0.yaml", "..", "x" * 300 + ".yaml",
                                      "tab\t.yaml"])
    def test_save_as_goes_only_into_the_same_folder(self, bench, name):
        (bench.parent / "sub").mkdir()
        client = client_for(bench)
        before = folder_listing(bench.parent), folder_listing(bench.parent.parent)
        response = client.post("/api/save", json={"values": control_values(client), "name": name})
        assert response.json()["ok"] is False
        assert response.json()["key"] == "save" and "\n" not in response.json()["error"]
        assert (folder_listing(bench.parent), folder_listing(bench.parent.parent)) == before
        assert folder_listing(bench.parent / "sub") == []

    @pytest.mark.parametrize("key, text", [("resonator.length", "-1 m"), ("damping.t60", "0.1 s"),
                                           ("excitation.position", "1.5"), ("resonator.diameter", "{a: 1}")])
    def test_invalid_values_are_never_written(self, bench, key, text):
        client = client_for(bench)
        values = control_values(client)
        values["resonator.length"] = "650 mm"  # a good change alongside
        values[key] = text
        for name in (None, "new.yaml"):
            response = client.post("/api/save", json={"values": values, "name": name})
            assert response.json()["ok"] is False and "\n" not in response.json()["error"]
        assert bench.read_text(encoding="utf-8") == BENCH
        assert folder_listing(bench.parent) == ["bench.yaml"]


class TestYamlEdit:
    @pytest.mark.parametrize("path", sorted((ROOT / "patches").glob("*.yaml")), ids=lambda p: p.stem)
    def test_setting_a_control_changes_that_value_alone(self, path):
        # Reference: PyYAML's parse of the original with the one value set in the dict.
        text = path.read_text(encoding="utf-8")
        mapping = load_yaml_file(path)
        for control in controls_of(mapping, _patch(mapping)):
            edited = set_value(text, control["key"], "0.123")
            expected = yaml.safe_load(text)
            *parents, last = control["key"].split(".")
            section = expected
            for part in parents:
                section = section.setdefault(part, {})
            section[last] = 0.123
            assert yaml.safe_load(edited) == expected, control["key"]
            comments = [line for line in text.splitlines() if line.lstrip().startswith("#")]
            assert all(line in edited.splitlines() for line in comments)
            if control["value"] != "":
                removed = yaml.safe_load(delete_value(text, control["key"]))
                assert removed == _without_key(yaml.safe_load(text), control["key"]), control["key"]

    def test_flow_and_missing_mappings(self):
        text = "a: {x: 1, y: 2}  # keep\nb:\nc:\n  d: 1\n"
        assert set_value(text, "a.z", "3") == "a: {x: 1, y: 2, z: 3}  # keep\nb:\nc:\n  d: 1\n"
        assert set_value(text, "b.e", "4") == "a: {x: 1, y: 2}  # keep\nb: {e: 4}\nc:\n  d: 1\n"
        assert set_value(text, "f.g.h", "5").endswith("  d: 1\nf: {g: {h: 5}}\n")
        assert delete_value(text, "a.x") == "a: {y: 2}  # keep\nb:\nc:\n  d: 1\n"
        assert delete_value(text, "a.y") == "a: {x: 1}  # keep\nb:\nc:\n  d: 1\n"
        crlf = "a:\r\n  b: 1\r\n"
        assert set_value(crlf, "a.c", "2") == "a:\r\n  b: 1\r\n  c: 2\r\n"


def _without_key(mapping, dotted):
    """`mapping` without the key at `dotted`; a block mapping left empty reads as null."""
    *parents, last = dotted.split(".")
    sections = [mapping]
    for part in parents:
        sections.append(sections[-1][part])
    del sections[-1][last]
    if parents and not sections[-1]:
        sections[-2][parents[-1]] = None
    return mapping


class TestCommand:
    def run_preview(self, monkeypatch, capsys, *argv):
        """Run ``synth preview`` with a server that returns at once; (status, stdout, stderr, opened urls)."""
        opened = []
        fake = SimpleNamespace(started=True, should_exit=False, run=lambda sockets: None)
        monkeypatch.setattr(server, "make_server", lambda app: fake)
        monkeypatch.setattr(server.webbrowser, "open", lambda url: opened.append(url))
        try:
            status = main(["preview", *map(str, argv)])
        except SystemExit as exit_:
            status = exit_.code
        out, err = capsys.readouterr()
        deadline = time.monotonic() + 5
        while "--no-browser" not in argv and not opened and time.monotonic() < deadline:
            time.sleep(0.01)
        return status, out, err, opened

    def test_serves_on_loopback_and_opens_the_browser(self, bench, monkeypatch, capsys):
        status, out, err, opened = self.run_preview(monkeypatch, capsys, bench, "--port", 0)
        assert status == 0 and "warning" not in err
        match = re.fullmatch(rf"preview of {re.escape(str(bench))} at (http://127\.0\.0\.1:(\d+)/) \(Ctrl-C stops\)\n", out)
        assert match and int(match.group(2)) > 0
        assert opened == [match.group(1)]

    def test_another_host_warns(self, bench, monkeypatch, capsys):
        status, out, err, opened = self.run_preview(monkeypatch, capsys, bench, "--port", 0, "--host", "0.0.0.0",
                                                    "--no-browser")
        assert status == 0 and opened == []
        warnings = [line for line in err.splitlines() if line.startswith("synth: warning:")]
        assert len(warnings) == 1 and "network" in warnings[0] and "bench.yaml" in warnings[0]
        assert out.startswith("preview of ") and "http://127.0.0.1:" in out

    def test_user_errors_are_one_line(self, bench, tmp_path, monkeypatch, capsys):
        from tests.cli_checks import error_line

        busy = socket.socket()
        busy.bind(("127.0.0.1", 0))
        busy.listen(1)
        bad = tmp_path / "bad.yaml"
        bad.write_text(BENCH.replace("700 mm", "-700 mm"), encoding="utf-8")
        cases = [
            ((bench, "--port", busy.getsockname()[1], "--no-browser"), "command line: --port: port"),
            ((bench, "--port", 70000, "--no-browser"), "command line: --port: must be a port number"),
            ((bad, "--no-browser", "--port", 0), f"{bad}:7: resonator.length: must be > 0"),
            ((tmp_path / "missing.yaml", "--no-browser"), "missing.yaml: file not found"),
            ((ROOT / "patches/instruments/workshop-harp.yaml", "--no-browser"), "is an instrument file"),
        ]
        try:
            for argv, phrase in cases:
                status, out, err, _ = self.run_preview(monkeypatch, capsys, *argv)
                assert status == 2 and out == ""
                assert phrase in error_line(err)
        finally:
            busy.close()

    def test_without_the_preview_extra(self, bench, monkeypatch, capsys):
        import importlib.util

        from tests.cli_checks import error_line

        real = importlib.util.find_spec
        monkeypatch.setattr(importlib.util, "find_spec", lambda name, *a: None if name == "uvicorn" else real(name, *a))
        status, out, err, _ = self.run_preview(monkeypatch, capsys, bench, "--no-browser")
        assert status == 2 and "command line: preview: needs the preview extra (uvicorn not installed)" in error_line(err)

    @pytest.mark.parametrize("signum, status, word", [(signal.SIGINT, 130, "interrupted"),
                                                      (signal.SIGTERM, 143, "terminated")])
    def test_a_signal_stops_the_server_cleanly(self, bench, signum, status, word):
        process = subprocess.Popen([sys.executable, "-m", "synth.cli", "preview", str(bench), "--port", "0",
                                    "--no-browser"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                                   cwd=ROOT)
        try:
            line = process.stdout.readline()
            url = re.search(r"http://\S+/", line).group(0)
            import urllib.request

            with urllib.request.urlopen(url + "api/patch", timeout=10) as response:
                assert json.loads(response.read())["ok"]
            process.send_signal(signum)
            assert process.wait(timeout=15) == status
            assert f"synth: {word}" in process.stderr.read()
        finally:
            if process.poll() is None:
                process.kill()
                process.wait()
            process.stdout.close()
            process.stderr.close()


# ---- the page in a real browser ----

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
CHROMEDRIVER = shutil.which("chromedriver") or "/usr/bin/chromedriver"


def _browser_problem():
    from importlib.util import find_spec

    if find_spec("selenium") is None:
        return "selenium is not installed (pip install '.[test]')"
    for program in (CHROMIUM, CHROMEDRIVER):
        if not os.access(program, os.X_OK):
            return f"{program} is missing (Debian: apt-get install chromium chromium-driver)"
    return None


@pytest.fixture
def browser():
    problem = _browser_problem()
    if problem is not None:
        if os.environ.get("SYNTH_REQUIRE_BROWSER") == "1":
            pytest.fail(f"SYNTH_REQUIRE_BROWSER=1 but {problem}")
        pytest.skip(problem)
    from selenium import webdriver
    from selenium.webdriver.chrome.options import Options
    from selenium.webdriver.chrome.service import Service

    options = Options()
    options.binary_location = CHROMIUM
    for argument in ("--headless=new", "--no-sandbox", "--disable-gpu", "--autoplay-policy=no-user-gesture-required",
                     "--window-size=1400,1000"):
        options.add_argument(argument)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    driver = webdriver.Chrome(service=Service(CHROMEDRIVER), options=options)
    driver.set_page_load_timeout(20)
    try:
        yield driver
    finally:
        driver.quit()


@pytest.fixture
def live_server():
    """start(path) -> URL of a real uvicorn server on a free loopback port, run in a thread."""
    running = []

    def start(path):
        sock = server.bind_socket("127.0.0.1", 0)
        port = sock.getsockname()[1]
        uvicorn_server = server.make_server(server.create_app(path, host="127.0.0.1", port=port))
        thread = threading.Thread(target=uvicorn_server.run, kwargs={"sockets": [sock]}, daemon=True)
        thread.start()
        running.append((uvicorn_server, thread, sock))
        deadline = time.monotonic() + 10
        while not uvicorn_server.started:
            assert time.monotonic() < deadline, "the preview server did not start"
            time.sleep(0.02)
        return f"http://127.0.0.1:{port}/"

    yield start
    for uvicorn_server, thread, sock in running:
        uvicorn_server.should_exit = True
        thread.join(timeout=10)
        sock.close()


def test_the_page_in_a_browser(bench, live_server, browser, capsys, tmp_path):
    from selenium.common.exceptions import StaleElementReferenceException
    from selenium.webdriver.common.action_chains import ActionChains
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import WebDriverWait

    def first_hz(driver):
        rows = driver.find_elements(By.CSS_SELECTOR, "#partials tr[data-frequency-hz]")
        return float(rows[0].get_attribute("data-frequency-hz")) if rows else None

    wait = WebDriverWait(browser, 15, ignored_exceptions=(StaleElementReferenceException,))
    browser.get(live_server(bench))
    wait.until(first_hz)
    assert first_hz(browser) == pytest.approx(cli_json(capsys, bench)["modes"][0]["frequency_hz"], rel=REL)
    assert browser.find_element(By.ID, "caution").text.startswith("Listening caution")
    assert browser.find_element(By.ID, "volume").get_attribute("value") == "-18"

    field = browser.find_element(By.NAME, "resonator.length")
    field.clear()
    field.send_keys("650 mm")
    browser.execute_script("arguments[0].dispatchEvent(new Event('change', {bubbles: true}))", field)
    expected = cli_json(capsys, bench, "resonator.length=650 mm")["modes"][0]["frequency_hz"]
    wait.until(lambda d: (hz := first_hz(d)) is not None and abs(hz / expected - 1) < REL)

    # a note from the computer keyboard, with the new table
    browser.execute_script("document.activeElement.blur()")  # keys in a field type; elsewhere they play
    ActionChains(browser).key_down("g").perform()
    wait.until(lambda d: "sounding" in d.find_element(By.ID, "listen-status").text)
    ActionChains(browser).key_up("g").perform()

    browser.find_element(By.ID, "save").click()
    wait.until(lambda d: d.find_element(By.ID, "save-status").text.startswith("saved"))
    saved = bench.read_text(encoding="utf-8")
    assert saved == BENCH.replace("length: 700 mm ", "length: 650 mm ")  # comments and all else kept
    assert cli_json(capsys, bench)["modes"][0]["frequency_hz"] == pytest.approx(expected, rel=REL)

    browser.execute_script("window.scrollTo(0, 0)")
    browser.save_screenshot(str(tmp_path / "preview.png"))
    try:
        logs = browser.get_log("browser")
    except Exception:  # noqa: BLE001 - a driver without the log endpoint: nothing to check
        logs = []
    severe = [entry for entry in logs if entry.get("level") == "SEVERE"]
    assert severe == [], severe


def test_docstring_examples_run():
    import doctest

    from synth.preview import save, yamledit

    for module in (page, yamledit, save, server):
        failures, _ = doctest.testmod(module, optionflags=doctest.ELLIPSIS)
        assert failures == 0, module.__name__
