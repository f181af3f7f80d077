"""Start-up: the command line loads only what a command needs (issue 9).

``synth --help`` needs no numpy at all; ``synth modes`` of a string needs
numpy and PyYAML but none of scipy, soundfile, mido, Dask, pyloudnorm, tqdm
or threadpoolctl.  Checked in a fresh interpreter, since this test process
has imported everything already.
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
HEAVY = ("scipy", "soundfile", "mido", "dask", "distributed", "pyloudnorm", "tqdm", "threadpoolctl")

PROBE = """
import contextlib, io, json, sys
from synth.cli import main
out = io.StringIO()
try:
    with contextlib.redirect_stdout(out):
        status = main(sys.argv[1:])
except SystemExit as stop:
    status = stop.code
print(json.dumps({"status": status, "modules": sorted({m.split('.')[0] for m in sys.modules})}))
"""


def _loaded(*args):
    proc = subprocess.run([sys.executable, "-c", PROBE, *args], capture_output=True, text=True, cwd=REPO, timeout=60,
                          env={"PYTHONPATH": str(REPO), "PATH": "/usr/bin:/bin"})
    result = json.loads(proc.stdout.strip().splitlines()[-1])
    return result["status"], set(result["modules"])


def test_help_loads_no_numpy():
    status, modules = _loaded("--help")
    assert status == 0
    assert "numpy" not in modules and not modules & set(HEAVY)


def test_modes_of_a_string_loads_only_what_it_needs():
    status, modules = _loaded("modes", str(REPO / "patches" / "string-harp-practice-c4.yaml"))
    assert status == 0
    assert {"numpy", "yaml"} <= modules
    assert not modules & set(HEAVY), modules & set(HEAVY)


def test_a_batch_worker_needs_no_scipy_signal():
    """Loudness runs in every fresh worker of a batch run; scipy.signal alone imports in about a second."""
    proc = subprocess.run(
        [sys.executable, "-c", "import sys, numpy as np; from synth.loudness import integrated_loudness; "
         "integrated_loudness(np.sin(np.arange(48000) * 0.1), 48000); print('scipy.signal' in sys.modules)"],
        capture_output=True, text=True, cwd=REPO, timeout=60, env={"PYTHONPATH": str(REPO), "PATH": "/usr/bin:/bin"})
    assert proc.stdout.strip() == "False", proc.stderr
