"""Independent audio analysis for closed-loop tests.

Reads WAV files with the standard library's `wave` module (not soundfile, so
the writer is checked by a different reader) and measures spectral peaks and
decay rates with plain numpy.
"""
from __future__ import annotations

import wave

import numpy as np


def read_wav(path):
    """(samples as float64 in [-1, 1], shape (n,) or (n, channels), sample_rate) of a PCM WAV."""
    with wave.open(str(path), "rb") as handle:
        width = handle.getsampwidth()
        channels = handle.getnchannels()
        rate = handle.getframerate()
        raw = handle.readframes(handle.getnframes())
    if width == 2:
        data = np.frombuffer(raw, dtype="<i2").astype(np.float64) / 32768.0
    elif width == 3:
        bytes3 = np.frombuffer(raw, dtype=np.uint8).reshape(-1, 3)
        ints = bytes3[:, 0].astype(np.int32) | (bytes3[:, 1].astype(np.int32) << 8) | (bytes3[:, 2].astype(np.int32) << 16)
        ints = np.where(ints >= 1 << 23, ints - (1 << 24), ints)
        data = ints.astype(np.float64) / 8388608.0
    else:
        raise ValueError(f"unsupported sample width {width}")
    if channels > 1:
        data = data.reshape(-1, channels)
    return data, rate


def peak_near(signal, sample_rate, frequency, *, search_hz=None, pad=8):
    """Frequency (Hz) of the largest spectral peak within `search_hz` of `frequency`.

    Hann window, zero padding by `pad`, parabolic interpolation on log magnitude.
    """
    n = len(signal)
    window = np.hanning(n)
    spectrum = np.abs(np.fft.rfft(signal * window, n * pad))
    freqs = np.fft.rfftfreq(n * pad, 1.0 / sample_rate)
    search_hz = search_hz if search_hz is not None else 4.0 * sample_rate / n
    band = np.flatnonzero(np.abs(freqs - frequency) <= search_hz)
    k = band[np.argmax(spectrum[band])]
    a, b, c = np.log(spectrum[k - 1 : k + 2] + 1e-300)
    offset = 0.5 * (a - c) / (a - 2 * b + c)
    return freqs[k] + offset * (freqs[1] - freqs[0])


def envelope_db(signal, sample_rate, frequency, *, frame_s=0.05):
    """(times s, level dB) of the component at `frequency`, by heterodyning and frame averaging."""
    t = np.arange(len(signal)) / sample_rate
    baseband = signal * np.exp(-2j * np.pi * frequency * t)
    frame = int(round(frame_s * sample_rate))
    n_frames = len(signal) // frame
    blocks = baseband[: n_frames * frame].reshape(n_frames, frame)
    window = np.hanning(frame)
    level = np.abs(blocks @ window) / window.sum() * 2
    times = (np.arange(n_frames) + 0.5) * frame / sample_rate
    return times, 20 * np.log10(level + 1e-300)


def measured_t60(signal, sample_rate, frequency, *, start_s=0.05, stop_s=None, frame_s=0.05):
    """T60 (s) of the component at `frequency` from a straight-line fit of its dB envelope."""
    times, level = envelope_db(signal, sample_rate, frequency, frame_s=frame_s)
    stop_s = times[-1] if stop_s is None else stop_s
    use = (times >= start_s) & (times <= stop_s)
    slope = np.polyfit(times[use], level[use], 1)[0]  # dB per second
    return -60.0 / slope


def phase_frequency(signal, sample_rate, frequency, *, frame_s=0.04, start_s=0.05, stop_s=None):
    """Frequency (Hz) of the component near `frequency` from the slope of its phase.

    Heterodyne by `frequency`, average Hann-windowed frames (which rejects every
    component more than a few 1/`frame_s` away), unwrap the frames' phase and fit
    a straight line: the slope over 2 pi is the offset from `frequency`.
    """
    t = np.arange(len(signal)) / sample_rate
    baseband = signal * np.exp(-2j * np.pi * frequency * t)
    frame = int(round(frame_s * sample_rate))
    hop = frame // 2
    starts = np.arange(0, len(signal) - frame, hop)
    window = np.hanning(frame)
    values = np.array([baseband[s : s + frame] @ window for s in starts])
    times = (starts + frame / 2) / sample_rate
    stop_s = times[-1] if stop_s is None else stop_s
    use = (times >= start_s) & (times <= stop_s)
    phase = np.unwrap(np.angle(values[use]))
    slope = np.polyfit(times[use], phase, 1)[0]
    return frequency + slope / (2 * np.pi)
