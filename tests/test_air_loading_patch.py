"""Air-loaded drum heads through a patch: keys, errors, the kettledrum's ratios and the radiation decay.

The air-loading physics is held against closed forms and published values in test_air_loading.py;
here the membrane resonator uses it: a kettledrum patch lists the ratios the module gives, the
radiation's decay adds to the damping section's, and bad combinations are one line each.
"""
from __future__ import annotations

import textwrap

import numpy as np
import pytest

import synth
from synth import PatchError

KETTLE = textwrap.dedent("""\
    name: bench-kettle
    resonator: {type: membrane, shape: circle, radius: 328 mm, areal_density: 0.262, tension: 3990,
                air: kettle, kettle_volume: 0.14 m^3}
    excitation: {type: strike, position: {radius: 0.75, angle: 0 deg}, contact_time: 2 ms}
    damping: {t60: 4 s}
    render: {sample_rate: 8000, max_modes: 30}
    """)


def _table(text):
    return synth.partial_table(synth.patch_from_text(text), onset=False)


def test_kettledrum_ratios():
    # A kettledrum's (1,1), (2,1), (3,1), (4,1) near 1 : 1.50 : 1.98 : 2.44 (Fletcher & Rossing,
    # The Physics of Musical Instruments, ch. 18; from memory), against the ideal membrane's
    # 1 : 1.34 : 1.66 : 1.98 (Bessel zeros); head and kettle values from memory (see test_air_loading.py).
    table = _table(KETTLE)
    labels = list(table.labels)
    f = {label: table.frequency_hz[labels.index(label)] for label in ("(1,1)", "(2,1)", "(3,1)", "(4,1)")}
    ratios = np.array([f["(2,1)"], f["(3,1)"], f["(4,1)"]]) / f["(1,1)"]
    np.testing.assert_allclose(ratios, [1.50, 1.98, 2.44], rtol=0.02)
    ideal = _table(KETTLE.replace("air: kettle, kettle_volume: 0.14 m^3", "air: none"))
    assert "air_cents" not in ideal.columns  # no air key: the in-vacuo head, as before


def test_radiation_adds_to_the_damping():
    table = _table(KETTLE)
    radiation = np.array([np.inf if v is None else v for v in table.columns["radiation_t60_s"]])
    np.testing.assert_allclose(table.t60_s, 1.0 / (1.0 / 4.0 + 1.0 / radiation), rtol=1e-12)
    assert table.t60_s[list(table.labels).index("(0,1)")] < 0.2  # the (0,1) radiates strongly (a monopole)


def test_pitch_is_the_loaded_lowest_mode():
    text = KETTLE.replace("tension: 3990", "pitch: D3")
    table = _table(text)
    assert table.frequency_hz[0] == pytest.approx(440.0 * 2 ** (-19 / 12), rel=1e-9)  # D3, 12-TET, A4 = 440 Hz


@pytest.mark.parametrize("change, key", [
    (("air: kettle, kettle_volume: 0.14 m^3", "air: kettle"), "resonator.kettle_volume"),
    (("air: kettle, kettle_volume: 0.14 m^3", "air: baffled, kettle_volume: 0.14 m^3"), "resonator.kettle_volume"),
    (("shape: circle, radius: 328 mm", "shape: rectangle, width: 0.5, height: 0.4"), "resonator.air"),
    (("air: kettle", "air: water"), "resonator.air"),
])
def test_errors(change, key):
    with pytest.raises(PatchError) as error:
        synth.patch_from_text(KETTLE.replace(*change))
    assert error.value.key == key


def test_a_pitch_below_the_kettle_air_is_refused():
    # The kettle's air alone holds the (0,1) up (a stiffness without tension): no tension reaches A1.
    with pytest.raises(PatchError, match="the air alone holds its lowest mode near") as error:
        synth.partial_table(synth.patch_from_text(KETTLE.replace("tension: 3990", "pitch: A1")), onset=False)
    assert error.value.key == "resonator.pitch"
