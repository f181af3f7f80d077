"""Outline plates and membranes through a patch: modes, positions, errors, figures, audio.

The finite-element physics is held against Bessel zeros, Leissa's circular plate equation, the
pinned rectangle's closed form and the L-shaped membrane's published eigenvalue in
test_fe_outline.py; here the patch keys, the [x, y] positions in metres and the plot of nodal lines.
"""
from __future__ import annotations

import math
import textwrap

import numpy as np
import pytest

import synth
from synth import PatchError

ELL = textwrap.dedent("""\
    name: ell-head
    resonator:
      type: membrane
      shape: outline
      points: [[0, 0], [0.4, 0], [0.4, 0.2], [0.2, 0.2], [0.2, 0.4], [0, 0.4]]
      areal_density: 0.25
      tension: 1000
    excitation: {type: strike, position: [0.1, 0.12]}
    render: {sample_rate: 8000, duration: 0.3 s, max_modes: 6}
    """)

TONGUE = textwrap.dedent("""\
    name: steel-tongue
    resonator:
      type: plate
      shape: outline
      material: steel
      thickness: 2 mm
      points: [[0, 0], [120 mm, 0], [120 mm, 30 mm], [0, 30 mm]]
      edges: [free, free, free, clamped]
    excitation: {type: strike, position: [110 mm, 15 mm], contact_time: 0.5 ms}
    pickup: {position: [100 mm, 10 mm]}
    render: {sample_rate: 8000, duration: 0.3 s, max_modes: 4}
    """)


def test_l_shaped_membrane_fundamental():
    # Fox, Henrici & Moler 1967: the unit L's first Dirichlet eigenvalue lambda = 9.6397238 (from
    # memory); for an L of arm 2s it is lambda / s^2, and f = sqrt(lambda T / sigma) / (2 pi).
    table = synth.partial_table(synth.patch_from_text(ELL), onset=False)
    s = 0.2
    expected = math.sqrt(9.6397238 / s**2 * 1000 / 0.25) / (2 * math.pi)
    assert table.frequency_hz[0] == pytest.approx(expected, rel=1e-3)


def test_cantilever_tongue_against_beam_theory():
    # A clamped-free strip, nu-corrected: the beam's f1 = (1.8751^2 / 2 pi L^2) sqrt(D / (rho h))
    # with the plate rigidity D = E h^3 / 12 (1 - nu^2) (Blevins; common practice for a wide beam):
    # the plate lies between the beam with E and with E / (1 - nu^2).
    table = synth.partial_table(synth.patch_from_text(TONGUE), onset=False)
    from synth.materials import MATERIALS

    steel = MATERIALS["steel"]
    h, length = 2e-3, 0.12
    beam = 1.8751**2 / (2 * math.pi * length**2) * math.sqrt(steel.youngs_modulus * h**2 / (12 * steel.density))
    plate = beam / math.sqrt(1 - steel.poisson_ratio**2)
    assert beam * 0.99 < table.frequency_hz[0] < plate * 1.01


def test_audio_renders_and_default_position():
    patch = synth.patch_from_text(ELL.replace("excitation: {type: strike, position: [0.1, 0.12]}",
                                              "excitation: {type: strike}"))
    assert patch.excitation.position.style == "xy_m"
    signal, table = synth.render_patch(patch)
    assert np.max(np.abs(signal)) > 0 and len(table.frequency_hz) == 6


@pytest.mark.parametrize("change, key, phrase", [
    (("position: [0.1, 0.12]", "position: [0.3, 0.3]"), "excitation.position", "outside the outline"),
    (("[[0, 0], [0.4, 0], [0.4, 0.2], [0.2, 0.2], [0.2, 0.4], [0, 0.4]]", "[[0, 0], [0.4, 0]]"),
     "resonator.points", "3"),
    (("[0.2, 0.4], [0, 0.4]]", "[0, 0.4], [0.4, 0.4]]"), "resonator.points", "cross"),
    (("shape: outline", "shape: outline\n  radius: 0.2"), "resonator.radius", "outline"),
])
def test_errors(change, key, phrase):
    import re

    text = ELL.replace(*change)
    if key is None:
        synth.patch_from_text(text)  # the unchanged patch loads
        return
    with pytest.raises(PatchError) as error:
        synth.partial_table(synth.patch_from_text(text), onset=False)
    assert error.value.key == key, str(error.value)
    if phrase:
        assert re.search(phrase, str(error.value)), str(error.value)


def test_shapes_figure_draws_nodal_lines(tmp_path):
    pytest.importorskip("matplotlib")
    from synth.plots_shapes import shapes_figure

    figure = shapes_figure(synth.patch_from_text(ELL), n_shapes=4)
    gids = {artist.get_gid() for ax in figure.axes for artist in ax.get_children()}
    assert {"shape", "nodal-lines", "rim"} <= gids
    figure.savefig(tmp_path / "ell.png")
    assert (tmp_path / "ell.png").stat().st_size > 10_000
