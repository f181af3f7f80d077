"""synth: a parametric modal synthesizer for prototyping overtone structures.

From a physically specified vibrating object it computes the modes, weights
them by excitation and pickup, gives every mode its own decay, renders audio
and reports the partial table it used.
"""
from __future__ import annotations

__version__ = "0.1.0"

from .engine import render_modes
from .errors import InputFileError, ModalError, PatchError, RenderError
from .modes import (
    ModeSet,
    PartialTable,
    table_to_csv,
    table_to_dict,
    table_to_json,
    table_to_text,
)
from .patch import Patch, load_patch, patch_from_text, retune
from .pipeline import mode_set, partial_table, render_patch

__all__ = [
    "__version__",
    "render_modes",
    "ModalError",
    "PatchError",
    "RenderError",
    "InputFileError",
    "ModeSet",
    "PartialTable",
    "table_to_csv",
    "table_to_dict",
    "table_to_json",
    "table_to_text",
    "Patch",
    "load_patch",
    "patch_from_text",
    "retune",
    "mode_set",
    "partial_table",
    "render_patch",
]
