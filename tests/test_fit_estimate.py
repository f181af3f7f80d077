"""synth.analysis.estimate: recorded audio -> decaying partials (issue 15).

Every test signal is built here by independent numpy code, a sum of
exponentially damped sinusoids ``a exp(-ln(1000) t / T60) sin(2 pi f t + phi)``
(the closed form, not synth's engine), so the estimator is checked against the
parameters that made the signal.  Sources of the reference values are named
beside each check.
"""
from __future__ import annotations

import doctest
import re

import numpy as np
import pytest

from synth.analysis import estimate as estimate_module
from synth.analysis.estimate import Estimate, estimate_partials
from synth.errors import InputFileError

LN1000 = np.log(1000.0)


def damped_sum(freq, t60, amp, phase, n, fs, start=0):
    """Independent reference: sum of damped sinusoids, zero before sample `start`."""
    t = (np.arange(n) - start) / fs
    x = np.zeros(n)
    for f, d, a, p in zip(freq, t60, amp, phase):
        x += a * np.exp(-LN1000 * t / d) * np.sin(2 * np.pi * f * t + p)
    x[: start] = 0.0
    return x


def random_partials(rng, n=30, lo=100.0, hi=15000.0, min_gap_cents=30.0):
    """Inharmonic partials: log-uniform frequencies (at least `min_gap_cents` apart), T60 0.2-5 s, levels 0..-40 dB."""
    while True:
        freq = np.sort(np.exp(rng.uniform(np.log(lo), np.log(hi), n)))
        if np.all(1200 * np.diff(np.log2(freq)) > min_gap_cents):
            break
    t60 = np.exp(rng.uniform(np.log(0.2), np.log(5.0), n))
    level = rng.uniform(-40.0, 0.0, n)
    level[0 if n == 1 else rng.integers(n)] = 0.0
    amp = 0.02 * 10 ** (level / 20)  # 30 partials at 0.02 full scale peak at most 0.6 together
    phase = rng.uniform(0, 2 * np.pi, n)
    return freq, t60, amp, phase


def match(estimate, freq):
    """Index of the estimated partial nearest each true frequency."""
    return np.array([int(np.argmin(np.abs(estimate.frequency_hz - f))) for f in freq])


def cents(a, b):
    return 1200 * np.log2(np.asarray(a) / np.asarray(b))


def pink(rng, n):
    """Pink noise by 1/f power shaping of white noise in the frequency domain (DC removed), unit rms."""
    spectrum = np.fft.rfft(rng.standard_normal(n))
    k = np.arange(len(spectrum))
    spectrum[0] = 0.0
    spectrum[1:] /= np.sqrt(k[1:])
    x = np.fft.irfft(spectrum, n)
    return x / np.sqrt(np.mean(x**2))


# --- the physics: partials recovered ---------------------------------------------------------------


def test_thirty_inharmonic_partials_at_48khz():
    """Issue 15: 30 partials (100 Hz-15 kHz, T60 0.2-5 s, 0..-40 dB) within 0.5 cent and T60 within 10 %."""
    fs = 48000
    freq, t60, amp, phase = random_partials(np.random.default_rng(15))
    x = damped_sum(freq, t60, amp, phase, int(1.5 * fs), fs)
    est = estimate_partials(x, sample_rate=fs)
    assert len(est) == 30, est.frequency_hz  # nothing spurious, nothing lost
    j = match(est, freq)
    # Reference: the parameters that built x.
    assert np.max(np.abs(cents(est.frequency_hz[j], freq))) < 0.5
    assert np.max(np.abs(est.t60_s[j] / t60 - 1)) < 0.10
    # Noise-free: amplitudes and phases at the onset (t = 0) close too.
    assert est.onset_s == 0.0
    np.testing.assert_allclose(est.amplitude[j], amp, rtol=0.01)
    dphi = np.angle(np.exp(1j * (est.phase_rad[j] - phase)))
    assert np.max(np.abs(dphi)) < 0.01
    assert np.all(np.diff(est.frequency_hz) > 0)
    np.testing.assert_allclose(est.level_db.max(), 0.0)


def test_beating_pair_half_a_hertz_apart_is_two_partials():
    """Two partials 0.5 Hz apart (a beat of 2 s period), 3.5 s at 48 kHz with noise 60 dB down: two partials."""
    fs = 48000
    freq = np.array([440.0, 440.5, 1000.0])
    t60 = np.array([6.0, 4.0, 3.0])
    amp = np.array([0.3, 0.2, 0.1])
    phase = np.array([0.3, 2.0, 1.0])
    clean = damped_sum(freq, t60, amp, phase, int(3.5 * fs), fs)
    x = clean + 1e-3 * np.sqrt(np.mean(clean**2)) * np.random.default_rng(2).standard_normal(len(clean))
    est = estimate_partials(x, sample_rate=fs)
    assert len(est) == 3, est.frequency_hz
    # Reference: the generating frequencies, T60s and amplitudes.
    np.testing.assert_allclose(est.frequency_hz, freq, atol=0.002)
    np.testing.assert_allclose(est.t60_s, t60, rtol=0.02)
    np.testing.assert_allclose(est.amplitude, amp, rtol=0.02)


@pytest.mark.parametrize("colour", ["white", "pink"])
def test_forty_db_snr_noise(colour):
    """40 dB SNR (noise rms = 1 % of the note's rms over its 2 s), white or pink (1/f power).

    Held: every partial at -20 dB or above within 0.5 cent and T60 within 10 %;
    every partial found within 5 reported sd (frequency and T60); at most two
    lost, both below -30 dB (a short weak partial under pink noise's low end);
    nothing spurious above -40 dB.
    """
    fs = 48000
    rng = np.random.default_rng(40 if colour == "white" else 41)
    freq, t60, amp, phase = random_partials(rng)
    n = int(2.0 * fs)
    clean = damped_sum(freq, t60, amp, phase, n, fs)
    noise = rng.standard_normal(n) if colour == "white" else pink(rng, n)
    x = clean + noise * 0.01 * np.sqrt(np.mean(clean**2))
    est = estimate_partials(x, sample_rate=fs)
    j = match(est, freq)
    level = 20 * np.log10(amp / amp.max())
    # Reference: the generating parameters; a partial is found when an estimate lies within 5 cents.
    err_cents = np.abs(cents(est.frequency_hz[j], freq))
    found = err_cents < 5.0
    err_t60 = np.abs(est.t60_s[j] / t60 - 1)
    strong = level >= -20
    assert np.all(found[strong])
    assert np.max(err_cents[strong]) < 0.5 and np.max(err_t60[strong]) < 0.10
    assert np.count_nonzero(~found) <= 2 and np.all(level[~found] < -30)
    jf = j[found]
    assert np.all(np.abs(est.frequency_hz[jf] - freq[found]) < 5 * est.frequency_sd_hz[jf])
    assert np.all(np.abs(est.t60_s[jf] - t60[found]) < 5 * est.t60_sd_s[jf])
    spurious = np.setdiff1d(np.arange(len(est)), jf)
    assert np.all(est.level_db[spurious] < -40), (est.frequency_hz[spurious], est.level_db[spurious])
    assert 30 < est.snr_db < 60  # strongest partial rms over the noise rms
    assert -90 < est.noise_floor_db < -75  # the added noise: 1 % of the note's rms (about -82 dBFS)


def test_stiff_string_partials_give_inharmonicity():
    """f_n = n f0 sqrt(1 + B n^2) (Fletcher 1964) with B = 4e-4: each partial within 0.05 cent, B within 2 %."""
    fs = 22050
    f0, b = 110.0, 4e-4
    n = np.arange(1, 31)
    freq = n * f0 * np.sqrt(1 + b * n**2)
    decay = 0.6 + 2e-5 * freq**2  # b1 + b3 f^2, 1/s (amplitude decay rate)
    t60 = LN1000 / decay
    amp = 0.1 / n
    x = damped_sum(freq, t60, amp, np.zeros(len(n)), int(1.5 * fs), fs)
    est = estimate_partials(x, sample_rate=fs, pitch_hint_hz=110.0)
    assert len(est) == len(n)
    j = match(est, freq)
    assert np.max(np.abs(cents(est.frequency_hz[j], freq))) < 0.05
    # Independent least squares: (f_n / n)^2 = f0^2 + f0^2 B n^2 is linear in n^2.
    slope, intercept = np.polyfit(n**2.0, (est.frequency_hz[j] / n) ** 2, 1)
    assert abs(slope / intercept / b - 1) < 0.02
    assert abs(np.sqrt(intercept) / f0 - 1) < 1e-4


def test_onset_after_low_noise_and_amplitudes_referred_to_it():
    """A note after 0.3 s of -80 dBFS noise: onset within 2 ms, amplitudes and phases at the onset."""
    fs = 16000
    rng = np.random.default_rng(3)
    freq = np.array([261.6, 523.9, 787.0, 1310.0])
    t60 = np.array([2.0, 1.2, 0.8, 0.4])
    amp = np.array([0.4, 0.2, 0.1, 0.05])
    phase = np.array([0.5, 1.5, 2.5, 3.5])
    start = int(0.3 * fs)
    n = start + int(1.2 * fs)
    x = damped_sum(freq, t60, amp, phase, n, fs, start=start) + 1e-4 * rng.standard_normal(n)
    est = estimate_partials(x, sample_rate=fs)
    assert abs(est.onset_s - 0.3) < 0.002
    j = match(est, freq)
    assert len(est) == 4
    # Reference: the amplitude and phase of each partial at the true onset,
    # carried to the detected onset through the true pole.
    lag = est.onset_s - 0.3
    np.testing.assert_allclose(est.amplitude[j], amp * np.exp(-LN1000 * lag / t60), rtol=0.01)
    dphi = np.angle(np.exp(1j * (est.phase_rad[j] - (phase + 2 * np.pi * freq * lag))))
    assert np.max(np.abs(dphi)) < 0.02
    # Rendering from onset_s reproduces the recording.
    rendered = est.render(n - start, start_s=0.3)
    error = rendered - x[start:]
    assert np.sqrt(np.mean(error**2)) < 1e-3 * np.sqrt(np.mean(x[start:] ** 2)) + 2e-4


def test_onset_of_a_struck_note():
    """A struck note: 4 ms noise burst, partials rising over 2 ms, after 0.2 s of -70 dBFS noise.

    Onset within 1 ms of the strike; the analysis starts after the attack, and
    the partials carried back to the onset keep their amplitudes (the rise
    multiplies them by 1 - e^{-t/2ms}, which is 1 after the attack).
    """
    fs = 44100
    rng = np.random.default_rng(11)
    start = int(0.2 * fs)
    n = start + int(2.0 * fs)
    freq = np.array([220.0, 441.3, 663.5, 1780.0, 3100.0])
    t60 = np.array([2.5, 1.5, 1.0, 0.4, 0.2])
    amp = np.array([0.3, 0.15, 0.1, 0.05, 0.03])
    t = (np.arange(n) - start) / fs
    x = damped_sum(freq, t60, amp, rng.uniform(0, 2 * np.pi, 5), n, fs, start=start)
    x *= np.where(t >= 0, 1 - np.exp(-np.maximum(t, 0) / 0.002), 0.0)
    x += np.where((t >= 0) & (t < 0.004), 0.2 * np.exp(-np.maximum(t, 0) / 0.001), 0.0) * rng.standard_normal(n)
    x += 3e-4 * rng.standard_normal(n)
    est = estimate_partials(x, sample_rate=fs)
    assert abs(est.onset_s - 0.2) < 0.001
    assert len(est) == 5
    j = match(est, freq)
    assert np.max(np.abs(cents(est.frequency_hz[j], freq))) < 0.1
    np.testing.assert_allclose(est.t60_s[j], t60, rtol=0.02)
    np.testing.assert_allclose(est.amplitude[j], amp, rtol=0.02)


def test_short_tap_is_searched_from_what_it_can_show():
    """A 80 ms tap at 48 kHz (T60 50 and 30 ms): without a hint, searched from 4 periods of its length (52 Hz)."""
    fs = 48000
    freq, t60, amp, phase = np.array([2000.0, 5432.1]), np.array([0.05, 0.03]), np.array([0.5, 0.2]), np.ones(2)
    x = damped_sum(freq, t60, amp, phase, int(0.08 * fs), fs)
    est = estimate_partials(x, sample_rate=fs)
    np.testing.assert_allclose(est.frequency_hz, freq, rtol=1e-7)
    np.testing.assert_allclose(est.t60_s, t60, rtol=1e-4)
    np.testing.assert_allclose(est.amplitude, amp, rtol=1e-4)


# --- uncertainties ---------------------------------------------------------------------------------


def test_uncertainties_positive_and_grow_with_noise():
    """Residual-based sd: positive, about 10x larger for 20 dB more noise, and covering the actual errors."""
    fs = 8000
    freq = np.array([300.0, 710.0, 1234.0])
    t60 = np.array([1.5, 1.0, 0.6])
    amp = np.array([0.3, 0.2, 0.1])
    phase = np.array([1.0, 2.0, 3.0])
    n = int(1.5 * fs)
    clean = damped_sum(freq, t60, amp, phase, n, fs)
    noise = np.random.default_rng(7).standard_normal(n)
    sds = []
    for noise_rms in (1e-4, 1e-3):
        est = estimate_partials(clean + noise_rms * noise, sample_rate=fs)
        assert len(est) == 3
        for name in ("frequency_sd_hz", "t60_sd_s", "amplitude_sd", "phase_sd_rad"):
            assert np.all(getattr(est, name) > 0), name
        # Errors against the generating values, in units of the reported sd.
        assert np.all(np.abs(est.frequency_hz - freq) < 5 * est.frequency_sd_hz + 1e-9)
        assert np.all(np.abs(est.t60_s - t60) < 5 * est.t60_sd_s + 1e-9)
        sds.append(np.concatenate([est.frequency_sd_hz, est.t60_sd_s, est.amplitude_sd, est.phase_sd_rad]))
    ratio = sds[1] / sds[0]
    assert np.all((ratio > 5) & (ratio < 20)), ratio  # sd scale with the noise rms (10x here)


# --- options ----------------------------------------------------------------------------------------


def test_max_modes_and_lowest_hz():
    fs = 8000
    freq = np.array([60.0, 440.0, 900.0, 1500.0])
    amp = np.array([0.3, 0.2, 0.05, 0.1])
    x = damped_sum(freq, [1.0] * 4, amp, [1.0] * 4, fs, fs)
    est = estimate_partials(x, sample_rate=fs, max_modes=2)
    np.testing.assert_allclose(est.frequency_hz, [60.0, 440.0], atol=1e-3)
    assert est.rejected["max_modes"] == 2
    est = estimate_partials(x, sample_rate=fs, lowest_hz=200.0)
    np.testing.assert_allclose(est.frequency_hz, [440.0, 900.0, 1500.0], atol=1e-3)
    est = estimate_partials(x, sample_rate=fs, pitch_hint_hz=440.0)  # searches from 176 Hz
    assert est.frequency_hz[0] > 400
    assert isinstance(est, Estimate) and "ESPRIT" in est.method


def test_estimate_is_read_only():
    fs = 8000
    x = damped_sum([440.0], [1.0], [0.5], [0.0], fs, fs)
    est = estimate_partials(x, sample_rate=fs)
    with pytest.raises(ValueError):
        est.frequency_hz[0] = 1.0
    with pytest.raises(AttributeError):
        est.onset_s = 1.0


# --- bad audio: one line each, naming the file -----------------------------------------------------


def _error(x, fs=8000, **options):
    with pytest.raises(InputFileError) as info:
        estimate_partials(x, sample_rate=fs, source="take1.wav", **options)
    text = str(info.value)
    assert "\n" not in text and text.startswith("take1.wav: ")
    return text


def test_bad_audio_messages():
    fs = 8000
    t = np.arange(fs) / fs
    note = 0.5 * np.exp(-LN1000 * t / 0.5) * np.sin(2 * np.pi * 440 * t)
    assert "silent" in _error(np.zeros(fs)) and "-inf dBFS" in _error(np.zeros(fs))
    assert "-100.0 dBFS" in _error(1e-5 * np.cos(2 * np.pi * 100 * t))
    nan = note.copy()
    nan[4000] = np.nan
    assert "1 samples are NaN or infinite (the first at 0.500 s)" in _error(nan)
    assert "not floating point" in _error((note * 32767).astype(np.int16))
    assert "1-D" in _error(np.stack([note, note], axis=1))
    assert "DC only" in _error(np.full(fs, 0.25))
    # Clipping: a note driven 12 dB over full scale and hard-clipped.
    clipped = np.clip(4 * note, -1.0, 1.0)
    text = _error(clipped)
    n_at = int(np.count_nonzero(np.abs(clipped) == 1.0))  # runs of 1 or 2 samples are not counted
    said = re.match(r"take1.wav: (\d+) samples \((\S+) %\) sit at full scale in (\d+) runs: the recording clipped "
                    r"by about (\d+) dB; record (\d+) dB quieter$", text)
    assert said, text
    assert 0.9 * n_at <= int(said[1]) <= n_at and int(said[3]) > 10 and 3 <= int(said[4]) <= 15
    # Too short: 30 ms after the attack, and the lowest partial searched is 100 Hz (4 periods: 40 ms).
    text = _error(note[: int(0.03 * fs)], lowest_hz=100.0)
    assert "too short" in text and "lowest_hz = 100 Hz" in text and "0.040 s" in text
    text = _error(note[: int(0.03 * fs)], pitch_hint_hz=55.0)  # searched from 22 Hz
    assert "too short" in text and "pitch hint 55 Hz" in text
    text = _error(note[:40])  # 5 ms: shorter than the sub-band filters
    assert "too short" in text and "sub-band filters" in text
    # No decaying partials: white noise, or a growing tone.
    assert "no decaying partials" in _error(0.1 * np.random.default_rng(1).standard_normal(fs))
    growing = 0.001 * np.exp(LN1000 * t / 0.5) * np.sin(2 * np.pi * 440 * t)
    text = _error(growing)
    assert "no decaying partials" in text


def test_quiet_full_scale_note_is_not_clipping():
    """A clean note peaking at -0.05 dBFS is not clipping (its crest is not flat)."""
    fs = 48000
    t = np.arange(fs) / fs
    x = 0.994 * np.exp(-LN1000 * t / 1.0) * np.sin(2 * np.pi * 220 * t + np.pi / 2)
    est = estimate_partials(x, sample_rate=fs)
    np.testing.assert_allclose(est.frequency_hz, [220.0], atol=1e-4)


# --- documentation ---------------------------------------------------------------------------------


def test_docstring_examples():
    failures, attempted = doctest.testmod(estimate_module, optionflags=doctest.ELLIPSIS)
    assert attempted > 0 and failures == 0
