"""Closed loop: what the report says is what the rendered audio does.

Render a patch through the command line, read the WAV back with the standard
library's `wave` module, and check the spectral peaks and decay rates against
the partial table the tool reports for the same patch (`synth modes --json`).
"""
from __future__ import annotations

import json

import numpy as np
import pytest

from synth.cli import main

from .analysis import envelope_db, measured_t60, peak_near, read_wav

STRING = """\
name: loop-string
resonator:
  type: string
  material: music-wire
  length: 650 mm
  diameter: 0.45 mm
  pitch: {pitch}
excitation:
  type: {excitation}
  position: 0.23
  contact_time: 0.5 ms
pickup:
  position: 0.87
damping:
  t60: 1.5 s
  t60_high: 0.3 s
  high_frequency: 2 kHz
render:
  duration: 1.5 s
  sample_rate: 16000
  bit_depth: {bits}
  max_modes: 64
"""


def _report_and_audio(write_patch, tmp_path, capsys, **fields):
    values = {"pitch": "G3", "excitation": "pluck", "bits": 24}
    values.update(fields)
    patch = write_patch(STRING.format(**values))
    assert main(["modes", str(patch), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    out = tmp_path / "loop.wav"
    assert main(["render", str(patch), "-o", str(out), "--quiet"]) == 0
    signal, rate = read_wav(out)
    return report, signal, rate


@pytest.mark.parametrize("excitation,bits", [("pluck", 24), ("strike", 16)])
def test_spectral_peaks_sit_at_reported_frequencies(write_patch, tmp_path, capsys, excitation, bits):
    report, signal, rate = _report_and_audio(write_patch, tmp_path, capsys, excitation=excitation, bits=bits)
    assert rate == 16000
    loud = [m for m in report["modes"] if m["level_db"] is not None and m["level_db"] > -30]
    assert len(loud) >= 5
    head = signal[: rate // 2]
    for mode in loud[:10]:
        found = peak_near(head, rate, mode["frequency_hz"], search_hz=20.0)
        # Tolerance 0.5 Hz: a 0.5 s Hann window, 8x padding and parabolic interpolation
        # resolve isolated peaks to a small fraction of the 2 Hz bin.
        assert found == pytest.approx(mode["frequency_hz"], abs=0.5), mode["label"]


def test_inharmonic_partials_in_the_audio(write_patch, tmp_path, capsys):
    """A thick bass string: the upper partials are sharp in the audio, as reported."""
    text = STRING.format(pitch="A1", excitation="strike", bits=24).replace("0.45 mm", "1.6 mm").replace("650 mm", "1.2 m")
    patch = write_patch(text)
    assert main(["modes", str(patch), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    out = tmp_path / "bass.wav"
    assert main(["render", str(patch), "-o", str(out), "--quiet"]) == 0
    signal, rate = read_wav(out)
    f0 = report["fundamental_hz"]
    mode = next(m for m in report["modes"] if m["harmonic"] == 8)
    assert mode["cents_from_harmonic"] > 10  # clearly sharp of 8 f0
    found = peak_near(signal[: rate], rate, mode["frequency_hz"], search_hz=10.0)
    assert found == pytest.approx(mode["frequency_hz"], abs=0.3)
    assert found > 8 * f0 * 2 ** (10 / 1200)


def test_decay_matches_reported_t60(write_patch, tmp_path, capsys):
    report, signal, rate = _report_and_audio(write_patch, tmp_path, capsys, excitation="strike")
    for index in (0, 3):
        mode = report["modes"][index]
        # 50 ms frames: other partials (>= 190 Hz away) fall outside the 20 Hz frame resolution.
        t60 = measured_t60(signal, rate, mode["frequency_hz"], start_s=0.05, stop_s=1.2)
        # 3%: the fit spans > 15 dB of clean exponential decay.
        assert t60 == pytest.approx(mode["t60_s"], rel=0.03), mode["label"]
    # Higher partials die faster (two-point damping).
    assert report["modes"][3]["t60_s"] < report["modes"][0]["t60_s"]


def test_peak_normalisation(write_patch, tmp_path, capsys):
    """render.peak: true (the default) puts the true peak at peak_db: checked by an independent 4x
    oversampling (scipy.signal.resample_poly, a different filter: 0.2 dB); the samples sit at or below it."""
    import scipy.signal

    _, signal, _ = _report_and_audio(write_patch, tmp_path, capsys)
    true_db = 20 * np.log10(np.max(np.abs(scipy.signal.resample_poly(signal, 4, 1))))
    assert true_db == pytest.approx(-1.0, abs=0.2)
    assert 20 * np.log10(np.max(np.abs(signal))) <= -1.0 + 1e-4


@pytest.mark.parametrize("excitation", ["strike", "impulse"])
def test_levels_match_reported_level_db(write_patch, tmp_path, capsys, excitation):
    """Each partial's starting level in the audio (its decay line extrapolated to t = 0)
    sits at the reported level_db relative to the fundamental."""
    report, signal, rate = _report_and_audio(write_patch, tmp_path, capsys, excitation=excitation)
    modes = [m for m in report["modes"][:8] if m["level_db"] is not None and m["level_db"] > -40]
    assert len(modes) >= 4

    def start_level(frequency):
        times, level = envelope_db(signal, rate, frequency)
        use = (times > 0.05) & (times < 0.6)
        slope, intercept = np.polyfit(times[use], level[use], 1)
        return intercept

    reference = start_level(modes[0]["frequency_hz"]) - modes[0]["level_db"]
    for mode in modes[1:]:
        # 0.3 dB: the fit over > 10 dB of clean decay, frames 20 Hz wide against partials
        # >= 190 Hz apart.
        assert start_level(mode["frequency_hz"]) - reference == pytest.approx(mode["level_db"], abs=0.3), mode["label"]
