"""Torsional bar modes through a patch: the across keys, the table and the rendered audio.

The physics of synth/resonators/torsion.py is held against Timoshenko & Goodier's series and
closed forms in test_torsion.py; here a bar struck off its centre line is rendered and its
spectrum shows T1 where the Saint-Venant closed form puts it, and not when struck on the line.
"""
from __future__ import annotations

import math
import textwrap

import numpy as np
import pytest

import synth
from synth import PatchError
from tests.analysis import peak_near

BAR = textwrap.dedent("""\
    name: twist-bar
    resonator: {type: bar, material: rosewood, length: 400 mm, width: 50 mm, thickness: 20 mm}
    excitation: {type: strike, position: 0.3, contact_time: 0.3 ms, across: 0.8}
    pickup: {position: 0.1, across: 0.8}
    damping: {t60: 1.5 s, t60_high: 0.3 s, high_frequency: 5 kHz}
    render: {duration: 1 s, sample_rate: 16000}
    """)


def _t1_closed_form():
    """T1 of a free-free rectangle by hand: c = sqrt(G J / (rho I_p)), f = c / 2L.

    J = beta b h^3 with beta from the series of Timoshenko & Goodier (sec. 109), summed here;
    I_p = b h (b^2 + h^2) / 12; rosewood rho 1010 kg/m^3, G 1.6 GPa (synth/materials.py).
    """
    b, h, length, rho, g = 0.050, 0.020, 0.400, 1010.0, 1.6e9
    series = sum(math.tanh(n * math.pi * b / (2 * h)) / n**5 for n in range(1, 200, 2))
    j = b * h**3 * (1 / 3 - 64 / math.pi**5 * (h / b) * series)
    ip = b * h * (b * b + h * h) / 12
    return math.sqrt(g * j / (rho * ip)) / (2 * length)


def test_t1_in_the_table_and_in_the_audio():
    t1 = _t1_closed_form()
    assert t1 == pytest.approx(1010.76, abs=0.01)  # the worked value of the torsion module's notes
    patch = synth.patch_from_text(BAR)
    table = synth.partial_table(patch, onset=False)
    labels = list(table.labels)
    assert table.frequency_hz[labels.index("T1")] == pytest.approx(t1, rel=1e-9)
    assert table.fundamental_hz == pytest.approx(table.frequency_hz[labels.index("B1")])  # B1 stays the pitch
    signal, _ = synth.render_patch(patch)
    assert peak_near(np.asarray(signal, dtype=float), 16000, t1, search_hz=20.0) == pytest.approx(t1, abs=0.5)
    on_line = synth.patch_from_text(BAR.replace(", across: 0.8}", "}"))
    assert not any(label.startswith("T") for label in synth.partial_table(on_line, onset=False).labels)
    quiet, _ = synth.render_patch(on_line)
    # dB at T1 re the strongest line of each render: on the centre line the torsion is not driven
    assert _level_at(signal, t1) - _level_at(quiet, t1) > 40.0


def _level_at(signal, frequency, sample_rate=16000):
    x = np.asarray(signal, dtype=float)
    spectrum = np.abs(np.fft.rfft(x * np.hanning(len(x))))
    f = np.fft.rfftfreq(len(x), 1.0 / sample_rate)
    near = np.abs(f - frequency) <= 5.0
    return 20.0 * np.log10(spectrum[near].max() / spectrum.max())


@pytest.mark.parametrize("change, key, phrase", [
    (("resonator: {type: bar,", "resonator: {torsion: false, type: bar,"), "excitation.across",
     "resonator.torsion is false"),
    (("across: 0.8}\npickup", "across: 1.5}\npickup"), "excitation.across", r"1\.5"),
    (("pickup: {position: 0.1, across: 0.8}", "pickup: {across: 0.8}"), "pickup.across", "needs pickup.position"),
    (("torsion: false, ", "torsion: maybe, "), "resonator.torsion", "true or false or auto"),
])
def test_errors(change, key, phrase):
    import re

    text = BAR.replace("resonator: {type: bar,", "resonator: {torsion: false, type: bar,") \
        if change[0] == "torsion: false, " else BAR
    with pytest.raises(PatchError) as error:
        synth.patch_from_text(text.replace(*change))
    assert error.value.key == key
    assert re.search(phrase, str(error.value)), str(error.value)


def test_across_on_a_string_is_refused():
    with pytest.raises(PatchError, match="only a bar takes across") as error:
        synth.patch_from_text(textwrap.dedent("""\
            name: s
            resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
            excitation: {type: pluck, position: 0.2, across: 0.5}
            """))
    assert error.value.key == "excitation.across"
