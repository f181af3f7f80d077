"""BS.1770-4 integrated loudness (synth.loudness) against the Recommendation and pyloudnorm.

* The K-weighting biquads at 48 kHz equal ITU-R BS.1770-4's tabulated
  coefficients (Annex 1, tables 1 and 2; copied in shared/REFERENCES.md sec. 11).
* A 0 dBFS 997 Hz sine in one channel reads -3.01 LKFS (the Recommendation's
  reference: the K-filter gains +0.691 dB there, which -0.691 cancels).
* pyloudnorm (an independent implementation, Meter(filter_class="DeMan"),
  which loops over blocks and filters with lfilter stage by stage) gives the
  same loudness to 1e-9 LU on noise, sines, decaying tones and silence-padded
  signals at 16, 44.1, 48 and 96 kHz.
"""
from __future__ import annotations

import math

import numpy as np
import pyloudnorm
import pytest

import scipy.signal

from synth.loudness import integrated_loudness, k_weighting_sos, sos_filter

# ITU-R BS.1770-4 Annex 1, table 1 (pre-filter) and table 2 (RLB filter), 48 kHz.
STAGE_1 = ([1.53512485958697, -2.69169618940638, 1.19839281085285], [1.0, -1.69065929318241, 0.73248077421585])
STAGE_2 = ([1.0, -2.0, 1.0], [1.0, -1.99004745483398, 0.99007225036621])


def test_coefficients_at_48k_are_the_recommendations():
    sos = k_weighting_sos(48000.0)
    for row, (b, a) in zip(sos, (STAGE_1, STAGE_2)):
        np.testing.assert_allclose(row[:3], b, rtol=0, atol=1e-8)
        np.testing.assert_allclose(row[3:], a, rtol=0, atol=1e-8)


@pytest.mark.parametrize("rate", [16000, 44100, 48000, 96000, 192000])
def test_coefficients_equal_pyloudnorms_de_man_design(rate):
    """The redesign at other rates: the same biquads as pyloudnorm's "DeMan" filter class."""
    from pyloudnorm.iirfilter import IIRfilter

    stages = [IIRfilter(3.99984385397, 0.7071752369554193, 1681.9744509555319, rate, "high_shelf_DeMan"),
              IIRfilter(0.0, 0.5003270373253953, 38.13547087613982, rate, "high_pass_DeMan")]
    for row, stage in zip(k_weighting_sos(rate), stages):
        np.testing.assert_allclose(row, np.concatenate([stage.b, stage.a]), rtol=1e-13, atol=1e-15)


@pytest.mark.parametrize("rate", [16000, 48000, 96000])
def test_state_space_filter_equals_sosfilt(rate):
    """The blocked state-space cascade against scipy.signal.sosfilt (an independent implementation)."""
    rng = np.random.default_rng(rate)
    for n in (1, 31, 32, 33, 1000, int(2.7 * rate)):
        x = rng.standard_normal(n)
        expected = scipy.signal.sosfilt(k_weighting_sos(rate), x)
        got = sos_filter(k_weighting_sos(rate), x)
        assert np.max(np.abs(got - expected)) <= 1e-10 * max(np.max(np.abs(expected)), 1e-300)


def test_997_hz_full_scale_sine_reads_minus_3_01():
    t = np.arange(48000 * 5) / 48000.0
    assert integrated_loudness(np.sin(2 * math.pi * 997.0 * t), 48000) == pytest.approx(-3.0103, abs=0.001)


def _signals(rng, rate):
    n = int(rate * 2.3) + int(rng.integers(0, rate // 10))  # the last block need not end at the last sample
    t = np.arange(n) / rate
    noise = 0.1 * rng.standard_normal(n)
    tone = 0.5 * np.exp(-3.0 * t) * np.sin(2 * math.pi * 311.0 * t) + 0.2 * np.exp(-9.0 * t) * np.sin(2 * math.pi * 2900.0 * t)
    padded = np.concatenate([np.zeros(n // 3), 0.3 * np.sin(2 * math.pi * 1200.0 * t[: n // 2]), np.zeros(n // 4)])
    quiet = 1e-4 * rng.standard_normal(n)  # near the -70 LKFS gate
    loud_tail = np.concatenate([0.01 * rng.standard_normal(n - 3000), 0.9 * np.ones(3000)])  # after the last block?
    return {"noise": noise, "decaying tone": tone, "padded sine": padded, "quiet": quiet, "loud tail": loud_tail}


@pytest.mark.parametrize("rate", [16000, 44100, 48000, 96000])
@pytest.mark.parametrize("trial", range(3))
def test_equals_pyloudnorm(rate, trial):
    meter = pyloudnorm.Meter(rate, filter_class="DeMan")
    for name, signal in _signals(np.random.default_rng([rate, trial]), rate).items():
        ours = integrated_loudness(signal, rate)
        theirs = meter.integrated_loudness(signal)
        assert ours == pytest.approx(theirs, abs=1e-8), name  # 1e-8 LU: rounding only


def test_silence_is_minus_infinity_and_short_is_refused():
    assert integrated_loudness(np.zeros(48000), 48000) == -math.inf
    with pytest.raises(ValueError, match="shorter than one 400 ms gating block"):
        integrated_loudness(np.zeros(1000), 48000)
