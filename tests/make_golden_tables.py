"""Write tests/data/golden_tables.json.gz: partial tables of the demo patches.

Run once from the repository root, on the code whose output the tests must
keep (it was run at commit fc83547, before the solve cache and the exact
Timoshenko bars of issue 9):

    PYTHONPATH=. python tests/make_golden_tables.py

Each case is a demo patch, voiced at a note and a velocity (as MIDI and batch
voice it) or as written; the file holds every mode's frequency, amplitude,
phase and T60 with full float64 precision, so tests/test_solvecache.py can
check that later code renders the same partials.
"""
from __future__ import annotations

import gzip
import json
import sys
from pathlib import Path

from synth.patch import load_patch
from synth.pipeline import partial_table
from synth.voicing import voice_patch

ROOT = Path(__file__).resolve().parents[1]
OUT = ROOT / "tests" / "data" / "golden_tables.json.gz"

#: (patch file, MIDI note or None, velocity or None)
CASES = [(p.name, None, None) for p in sorted((ROOT / "patches").glob("*.yaml"))] + [
    ("string-harp-practice-c4.yaml", 55, 40),
    ("string-harp-practice-c4.yaml", 48, 127),
    ("string-bass-steel-a1.yaml", 40, 90),
    ("string-bronze-hammered-d4.yaml", 62, 30),
    ("bar-aluminium-chime-a4.yaml", 60, 100),
    ("bar-aluminium-chime-a4.yaml", 84, 64),
    ("bar-rosewood-blank-c4.yaml", 55, 100),
    ("bar-rosewood-undercut-c4.yaml", 60, 80),
    ("bar-steel-rod-clamped-tine.yaml", 72, 100),
    ("membrane-frame-drum-d3.yaml", 50, 70),
    ("plate-aluminium-gong-disc.yaml", 45, 100),
    ("air-column-bamboo-closed-a4.yaml", 69, 100),
    ("partials-bell-invented.yaml", 67, 20),
]


#: Demo patches retired since the golden file was written, kept as they were for its cases.
RETIRED = ROOT / "tests" / "data" / "patches"


def case_table(name, midi, velocity):
    path = ROOT / "patches" / name
    patch = load_patch(path if path.exists() else RETIRED / name)
    if midi is not None:
        patch = voice_patch(patch, midi_note=midi, velocity=velocity)
    table = partial_table(patch)
    return {
        "patch": name,
        "midi": midi,
        "velocity": velocity,
        "resonator": table.resonator,
        "labels": list(table.labels),
        "frequency_hz": table.frequency_hz.tolist(),
        "amplitude": table.amplitude.tolist(),
        "phase": table.phase.tolist(),
        "t60_s": table.t60_s.tolist(),
    }


def main():
    cases = [case_table(*case) for case in CASES]
    OUT.parent.mkdir(exist_ok=True)
    with gzip.open(OUT, "wt", encoding="utf-8") as handle:
        json.dump({"cases": cases}, handle)
    print(f"wrote {OUT} ({len(cases)} cases)", file=sys.stderr)


if __name__ == "__main__":
    main()
