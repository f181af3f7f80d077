"""Plates and membranes of any outline by finite elements (``shape: outline``).

Layout: :mod:`.geometry` (outline parsing and validation, SVG paths),
:mod:`.mesh` (Triangle meshes), :mod:`.core` (scikit-fem assembly, sliced
shift-invert eigensolve, mesh convergence, the per-outline cache),
:mod:`.solution` (the :class:`~synth.modes.Solution` with nodal lines),
:mod:`.plate_fe` and :mod:`.membrane_fe` (the resonator contract of
:mod:`synth.resonators.common`).
"""
from __future__ import annotations

from .geometry import EDGE_CONDITIONS, Outline, check_point, contains, parse_outline, parse_svg_path
from .membrane_fe import MembraneOutlineSpec
from .plate_fe import PlateOutlineSpec
from .solution import OutlineSolution

__all__ = [
    "EDGE_CONDITIONS",
    "Outline",
    "parse_outline",
    "parse_svg_path",
    "contains",
    "check_point",
    "PlateOutlineSpec",
    "MembraneOutlineSpec",
    "OutlineSolution",
]
