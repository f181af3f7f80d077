"""Normalisation, dither and atomic writing."""
from __future__ import annotations

import numpy as np
import pytest
import soundfile

from synth.audio import atomic_output, normalise, quantise, write_audio
from synth.errors import RenderError


class TestNormalise:
    def test_peak_target(self, rng):
        x = rng.standard_normal(1000) * 3.0
        y, gain_db = normalise(x, peak_db=-1.0)
        assert 20 * np.log10(np.max(np.abs(y))) == pytest.approx(-1.0, abs=1e-5)
        assert y.dtype == np.float32
        assert gain_db == pytest.approx(20 * np.log10(10 ** (-1 / 20) / np.max(np.abs(x))))

    def test_absolute_scale_refuses_to_clip(self):
        with pytest.raises(RenderError, match=r"would clip: lower excitation.strength by at least 3\.\d\d dB"):
            normalise(np.array([0.0, 1.5]), peak_db=None, bit_depth=24)
        y, gain_db = normalise(np.array([0.0, 0.5]), peak_db=None)
        assert gain_db == 0.0 and y[1] == 0.5

    def test_non_finite_refused(self):
        with pytest.raises(RenderError, match="not finite"):
            normalise(np.array([0.0, np.nan]), peak_db=-1.0)


class TestDither:
    def test_tpdf_statistics(self, rng):
        # TPDF dither of +-1 LSB (variance 1/6 LSB^2) followed by rounding (1/12 LSB^2,
        # independent) leaves an unbiased error of variance 1/4 LSB^2, whatever the signal
        # (Lipshitz, Wannamaker & Vanderkooy, JAES 40(5), 1992; from memory).
        x = rng.uniform(-0.5, 0.5, 200_000)
        q = quantise(x, 16, seed=1).astype(np.float64)
        error = q - x * 32767.0
        assert abs(error.mean()) < 0.01
        assert error.var() == pytest.approx(0.25, rel=0.02)

    def test_deterministic(self):
        x = np.linspace(-0.9, 0.9, 1000)
        assert np.array_equal(quantise(x, 16), quantise(x, 16))

    def test_24_bit_rounding(self):
        x = np.array([0.0, 0.5, -0.5, 0.99])
        q = quantise(x, 24) >> 8
        np.testing.assert_array_equal(q, np.round(x * 8388607).astype(np.int32))


class TestAtomicWrite:
    @pytest.mark.parametrize("bits,subtype", [(16, "PCM_16"), (24, "PCM_24"), (32, "FLOAT")])
    def test_round_trip(self, tmp_path, bits, subtype):
        x = (0.5 * np.sin(np.arange(800) / 10)).astype(np.float32)
        path = write_audio(tmp_path / "a.wav", x, sample_rate=8000, bit_depth=bits)
        data, rate = soundfile.read(path)
        assert rate == 8000 and soundfile.info(path).subtype == subtype
        np.testing.assert_allclose(data, x, atol=2.0 / 2 ** (bits - 1) if bits < 32 else 1e-7)

    def test_interrupted_write_leaves_nothing(self, tmp_path, monkeypatch):
        target = tmp_path / "a.wav"
        target.write_bytes(b"old")

        def boom(*args, **kwargs):
            raise KeyboardInterrupt

        monkeypatch.setattr(soundfile, "write", boom)
        with pytest.raises(KeyboardInterrupt):
            write_audio(target, np.zeros(10), sample_rate=8000, bit_depth=24)
        assert target.read_bytes() == b"old"
        assert [p.name for p in tmp_path.iterdir()] == ["a.wav"]

    def test_atomic_output_renames_on_success(self, tmp_path):
        target = tmp_path / "table.csv"
        with atomic_output(target) as tmp:
            tmp.write_text("x")
            assert not target.exists()
        assert target.read_text() == "x"
