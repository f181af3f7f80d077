"""Analysis of recordings: estimate the decaying partials of a recorded note and fit physical models to them.

Modules
-------
estimate      recording samples -> :class:`Estimate` (sub-band ESPRIT, onset, model order, uncertainties)
recording     audio files and channels; an estimate as a partial table and a ``partials`` patch
models        stiff-string comb (f0, B), ratio families of bars, membranes and plates; decay law b1 + b3 f^2
fitting       one model fitted, as the report and the written patch need it
calibrate     Young's (and shear) modulus of a tapped blank of known size; the material file
fitcmd        ``synth fit``
"""
from __future__ import annotations

from .calibrate import Calibration, calibrate_material, material_mapping, material_yaml
from .estimate import Estimate, estimate_partials
from .fitting import MODELS, ModelFit, fit_model
from .models import FamilyFit, StringFit, fit_decay, fit_family, fit_string, string_geometry
from .recording import Recording, analyse_recording, estimate_table, read_recording

__all__ = [
    "Estimate", "estimate_partials",
    "Recording", "read_recording", "analyse_recording", "estimate_table",
    "StringFit", "FamilyFit", "fit_string", "fit_family", "fit_decay", "string_geometry",
    "MODELS", "ModelFit", "fit_model",
    "Calibration", "calibrate_material", "material_mapping", "material_yaml",
]
