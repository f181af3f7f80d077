"""synth: a parametric modal synthesizer for prototyping overtone structures.

From a physically specified vibrating object it computes the modes, weights
them by excitation and pickup, gives every mode its own decay, renders audio
and reports the partial table it used.

The public names below are imported on first use (so ``synth --help`` and a
string's ``synth modes`` load only what they need).
"""
from __future__ import annotations

import importlib

__version__ = "0.1.0"

#: Public name -> the module that defines it.
_PUBLIC = {
    "render_modes": "engine",
    "ModalError": "errors",
    "PatchError": "errors",
    "RenderError": "errors",
    "InputFileError": "errors",
    "ModeSet": "modes",
    "PartialTable": "modes",
    "Solution": "modes",
    "table_to_csv": "report",
    "table_to_dict": "report",
    "table_to_json": "report",
    "table_to_text": "report",
    "Patch": "patch",
    "load_patch": "patch",
    "patch_from_text": "patch",
    "retune": "patch",
    "mode_set": "pipeline",
    "partial_table": "pipeline",
    "patch_ending": "pipeline",
    "render_patch": "pipeline",
    "SolveCache": "solvecache",
    "Rendered": "api",
    "render": "api",
    "write_audio": "api",
}

__all__ = ["__version__", *_PUBLIC]


def __getattr__(name):
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'synth' has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(__all__)
