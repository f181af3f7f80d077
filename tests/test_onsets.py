"""Samples a sampler can use: clean starts and ends, levels the table states, metadata (issue 10).

Closed loop: render through the command line, read the WAV back with the
standard library's `wave` module (tests/analysis.py), and check

* the start: sample 0 at most -60 dB re the file's peak for every excitation
  (it is exactly 0: a force rising from zero, a release from rest), and no
  step in the first millisecond larger than the sound's own steps later on;
* each partial's level against the table, by least squares on the known
  frequencies and decay rates after the onset (an independent fit of the
  audio, not the code's amplitudes), including a partial sitting on the first
  zero of a strike's half-sine spectrum, 1.5 / tau (REFERENCES.md sec. 10);
* the end: the last 10 ms below -90 dB re the peak, for `auto` and for a fixed
  duration that would cut the ringing sound (the damper then falls first);
* the RIFF `smpl` / `inst` chunks, parsed here with `struct` (Microsoft/IBM
  Multimedia Programming Interface and Data Specifications 1.0, 1991: field
  order as confirmed in synth/wavmeta.py's notes).
"""
from __future__ import annotations

import json
import math
import struct

import numpy as np
import pytest

from synth.cli import main

from .analysis import read_wav
from .cli_checks import error_line
from .cli_checks import run_cli as run

LN1000 = math.log(1000.0)  # T60 = ln(1000) / sigma

STRING = """\
name: onset-string
resonator:
  type: string
  material: music-wire
  length: 650 mm
  diameter: 0.45 mm
  pitch: G3
excitation:
  type: {kind}
  position: 0.23
  contact_time: 0.8 ms
  release_time: 0.4 ms
pickup:
  position: 0.87
  {measures}
damping:
  t60: 1.2 s
  t60_high: 0.3 s
  high_frequency: 2 kHz
render:
  duration: {duration}
  sample_rate: 16000
  bit_depth: 24
  max_modes: 48
"""

# Partials at 400 Hz x [1, 2.2, 3.75, 5.1]: the third, 1500 Hz, sits on the first zero of a 1 ms
# half-sine's spectrum, 1.5 / tau (REFERENCES.md sec. 10).
NOTCH = """\
name: onset-notch
resonator:
  type: partials
  fundamental: 400 Hz
  ratios: [1, 2.2, 3.75, 5.1]
excitation:
  type: strike
  contact_time: 1 ms
pickup:
  measures: displacement
damping:
  t60: 1.5 s
render:
  duration: 1 s
  sample_rate: 16000
  bit_depth: 32
"""


def _render(write_patch, tmp_path, capsys, text, name="out.wav", *extra):
    patch = write_patch(text)
    assert main(["modes", str(patch), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    out = tmp_path / name
    assert main(["render", str(patch), "-o", str(out), "--quiet", *extra]) == 0
    captured = capsys.readouterr()
    return report, out, captured


def _read(path):
    """Samples of a WAV (PCM through `wave`; 32-bit float by numpy from the data chunk)."""
    raw = path.read_bytes()
    if raw[20:22] == b"\x03\x00":  # WAVE_FORMAT_IEEE_FLOAT
        chunks = _chunks(raw)
        return np.frombuffer(chunks[b"data"], dtype="<f4").astype(np.float64), struct.unpack_from("<I", raw, 24)[0]
    return read_wav(path)


def _chunks(raw):
    """{id: payload} of a RIFF/WAVE file, walked here with struct."""
    assert raw[:4] == b"RIFF" and raw[8:12] == b"WAVE"
    assert struct.unpack_from("<I", raw, 4)[0] == len(raw) - 8
    chunks, offset = {}, 12
    while offset < len(raw):
        chunk_id, size = raw[offset:offset + 4], struct.unpack_from("<I", raw, offset + 4)[0]
        chunks[chunk_id] = raw[offset + 8 : offset + 8 + size]
        offset += 8 + size + (size & 1)
    return chunks


@pytest.mark.parametrize("kind, measures", [
    ("pluck", ""), ("pluck", "measures: acceleration"), ("strike", ""), ("strike", "measures: displacement"),
    ("strike", "measures: acceleration"), ("impulse", ""),
])
def test_every_file_starts_from_silence(write_patch, tmp_path, capsys, kind, measures):
    _, out, _ = _render(write_patch, tmp_path, capsys, STRING.format(kind=kind, measures=measures, duration="auto"))
    signal, rate = _read(out)
    peak = np.max(np.abs(signal))
    assert abs(signal[0]) <= 1e-3 * peak  # -60 dB re the peak (it is 0)
    steps = np.abs(np.diff(signal))
    first_ms = steps[: rate // 1000]
    assert np.max(first_ms) <= np.max(steps[rate // 1000 :]) * 1.0001  # no click: the onset slews as the sound does


def _fit_amplitudes(signal, rate, frequency, t60, start):
    """Least-squares amplitude of each damped sinusoid in `signal[start:]` (frequencies and decays given)."""
    n = np.arange(start, signal.size)
    t = n / rate
    columns = []
    for f, tt in zip(frequency, t60):
        envelope = np.exp(-LN1000 * t / tt)
        columns += [envelope * np.sin(2 * np.pi * f * t), envelope * np.cos(2 * np.pi * f * t)]
    basis = np.stack(columns, axis=1)
    coefficients, *_ = np.linalg.lstsq(basis, signal[start:], rcond=None)
    return np.hypot(coefficients[0::2], coefficients[1::2])


def test_levels_are_what_the_audio_holds_at_the_spectral_zero_too(write_patch, tmp_path, capsys):
    report, out, _ = _render(write_patch, tmp_path, capsys, NOTCH)
    signal, rate = _read(out)
    modes = report["modes"]
    frequency = [m["frequency_hz"] for m in modes]
    fitted = _fit_amplitudes(signal, rate, frequency, [m["t60_s"] for m in modes], start=int(0.002 * rate))
    table = np.array([m["amplitude"] for m in modes])
    scale = fitted[0] / table[0]  # the file is normalised: compare shapes, re the fundamental
    levels_fitted = 20 * np.log10(fitted / fitted[0])
    levels_table = np.array([m["level_db"] for m in modes]) - modes[0]["level_db"]
    assert modes[2]["frequency_hz"] == pytest.approx(1500.0)
    assert levels_table[2] < -40.0  # the zero of the undamped spectrum, filled a little by the decay
    np.testing.assert_allclose(levels_fitted[[0, 1, 3]], levels_table[[0, 1, 3]], atol=0.05)
    assert levels_fitted[2] == pytest.approx(levels_table[2], abs=0.5)  # 32-bit float: resolvable far down
    assert fitted[2] == pytest.approx(scale * table[2], rel=0.06)


@pytest.mark.parametrize("duration", ["auto", "0.6 s"])
def test_every_file_ends_below_minus_90_db(write_patch, tmp_path, capsys, duration):
    report, out, captured = _render(write_patch, tmp_path, capsys, STRING.format(kind="pluck", measures="",
                                                                                duration=duration))
    signal, rate = _read(out)
    peak = np.max(np.abs(signal))
    tail = signal[-rate // 100 :]
    assert 20 * np.log10(max(np.max(np.abs(tail)), 1e-12) / peak) < -90.0
    if duration == "auto":
        # -90 dB of the sum of envelopes: about 90/60 x the fundamental's 1.2 s T60 (the highs die first).
        assert 1.5 < signal.size / rate < 1.2 * 1.5 + 0.2
    else:
        assert signal.size == int(0.6 * rate)
        assert "would cut the sound at" in captured.err and "the damper falls at" in captured.err


@pytest.mark.parametrize("bits", [16, 24])
def test_soft_library_samples_end_below_minus_90_db_of_their_own_peak(write_patch, tmp_path, capsys, bits):
    """A library's soft layer sits far below full scale (one gain for all), where half an LSB of
    rounding is no longer small against -90 dB of the file's own peak: the ending allows for it."""
    patch = write_patch(STRING.format(kind="pluck", measures="", duration="auto").replace("bit_depth: 24",
                                                                                         f"bit_depth: {bits}"))
    spec = tmp_path / "lib.yaml"
    spec.write_text(f"patch: {patch.name}\nnotes: [G3]\nvelocities: [1, 127]\noutput: lib\n", encoding="utf-8")
    status, _, err = run(capsys, "batch", spec, "--workers", "1")
    assert status == 0, err
    for path in sorted((tmp_path / "lib").glob("*.wav")):
        signal, rate = read_wav(path)
        peak = np.max(np.abs(signal))
        assert 20 * np.log10(max(np.max(np.abs(signal[-rate // 100 :])), 1e-12) / peak) < -90.0, path.name


@pytest.mark.parametrize("duration", ["auto", "0.6 s"])
def test_16_bit_files_end_in_digital_silence(write_patch, tmp_path, capsys, duration):
    """At 16 bits -90 dB re a -1 dBFS peak is 0.9 LSB (20 log10(32767 x 10^(-91/20)) = -0.9 dB re 1 LSB):
    the tail is rendered down to 0.45 LSB and its last 10 ms carry no dither, so they are exact zeros,
    while the dither is whole earlier on (half the samples of a quiet stretch are off zero)."""
    text = STRING.format(kind="pluck", measures="", duration=duration).replace("bit_depth: 24", "bit_depth: 16")
    _, out, _ = _render(write_patch, tmp_path, capsys, text)
    raw = out.read_bytes()
    samples = np.frombuffer(_chunks(raw)[b"data"], dtype="<i2")
    rate = struct.unpack_from("<I", raw, 24)[0]
    assert np.all(samples[-rate // 100 :] == 0)
    middle = samples[samples.size // 2 : samples.size // 2 + rate // 100]
    assert np.count_nonzero(middle) > 0.4 * middle.size


def test_dither_gain_is_off_over_the_last_10_ms():
    from synth.audio import dither_gain

    assert dither_gain(1000, sample_rate=8000, frames_after=160) is None  # 20 ms or more from the end: whole
    gain = dither_gain(400, sample_rate=8000)  # 10 ms = 80 frames
    np.testing.assert_array_equal(gain[-80:], 0.0)
    np.testing.assert_array_equal(gain[:240], 1.0)
    assert np.all(np.diff(gain[240:320]) <= 0) and 0.0 < gain[280] < 1.0
    # A chunk of a longer file reads the same gains as the whole.
    np.testing.assert_array_equal(dither_gain(100, sample_rate=8000, frames_after=50), gain[250:350])


def test_sampler_chunks_name_the_note(write_patch, tmp_path, capsys):
    _, out, _ = _render(write_patch, tmp_path, capsys, STRING.format(kind="pluck", measures="", duration="0.3 s"))
    chunks = _chunks(out.read_bytes())
    manufacturer, product, period, unity, fraction, *_rest = struct.unpack("<9I", chunks[b"smpl"])
    assert period == 10**9 // 16000 and unity == 55  # G3 is MIDI 55
    # The stiff string's lowest partial sounds on G3 (its tension is solved for it): no fraction.
    assert fraction / 2**32 * 100 == pytest.approx(0.0, abs=0.01) or fraction / 2**32 * 100 > 99.99
    note, fine, gain, low, high, low_vel, high_vel = struct.unpack("<BbbBBBB", chunks[b"inst"][:7])
    assert (note, fine, gain, low, high, low_vel, high_vel) == (55, 0, 0, 0, 127, 1, 127)
    assert b"PEAK" not in chunks


def test_float_files_are_byte_identical(write_patch, tmp_path, capsys):
    text = STRING.format(kind="strike", measures="", duration="0.3 s").replace("bit_depth: 24", "bit_depth: 32")
    _, first, _ = _render(write_patch, tmp_path, capsys, text, "a.wav")
    _, second, _ = _render(write_patch, tmp_path, capsys, text, "b.wav")
    assert first.read_bytes() == second.read_bytes()
    assert b"PEAK" not in _chunks(first.read_bytes())


@pytest.mark.parametrize("kind, measures, phrase", [
    ("impulse", "measures: velocity", "an ideal impulse measured as velocity starts with a step"),
    ("pluck", "measures: displacement", "a pluck starts from the held deflection"),
])
def test_measures_that_would_click_are_refused(tmp_path, monkeypatch, capsys, kind, measures, phrase):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "p.yaml").write_text(STRING.format(kind=kind, measures=measures, duration="auto"), encoding="utf-8")
    status, out, err = run(capsys, "render", "p.yaml", "-o", "o.wav")
    assert status == 2 and out == ""
    line = error_line(err)
    assert line.startswith("synth: error: p.yaml:15: pickup.measures: ") and phrase in line
    assert sorted(p.name for p in tmp_path.iterdir()) == ["p.yaml"]


def test_rf64_when_a_wav_would_pass_4_gib(tmp_path, monkeypatch):
    """A file whose 32-bit RIFF sizes would overflow is written as RF64 (the limit lowered here to test it)."""
    import soundfile

    from synth import wavmeta
    from synth.audio import write_audio

    monkeypatch.setattr(wavmeta, "WAV_LIMIT_BYTES", 10_000)
    signal = 0.5 * np.sin(np.arange(8000) * 0.05)
    write_audio(tmp_path / "big.wav", signal, sample_rate=16000, bit_depth=24)
    assert (tmp_path / "big.wav").read_bytes()[:4] == b"RF64"
    back, rate = soundfile.read(tmp_path / "big.wav")
    assert rate == 16000 and back.size == 8000 and np.max(np.abs(back - signal)) < 1e-6


def test_a_report_table_skips_the_onset_but_nothing_else(write_patch):
    """``synth modes`` and ``synth range`` make their tables without the onset samples (20,000 modes
    at 768 kHz spent 1.5 s and 220 MiB on them); every reported number is the same, and such a table
    cannot be rendered by mistake."""
    from synth.patch import load_patch
    from synth.pipeline import partial_table
    from synth.tone import Tone

    patch = load_patch(write_patch(STRING.format(kind="pluck", measures="", duration="0.3 s")))
    full, report = partial_table(patch), partial_table(patch, onset=False)
    assert report.onset is None and full.onset.size > 0
    for key in ("frequency_hz", "amplitude", "phase", "t60_s", "level_db"):
        np.testing.assert_array_equal(getattr(full, key), getattr(report, key))
    with pytest.raises(ValueError, match="without its onset"):
        Tone.from_table(report)
