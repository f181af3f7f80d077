"""The Python API (issue 13): every public name's examples, retune by pitch, render, write_audio."""
from __future__ import annotations

import dataclasses
import doctest
import inspect
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import soundfile

import synth
from synth.api import check_velocity, voiced
from synth.cli import main
from synth.errors import PatchError, RenderError
from synth.voicing import voice_patch

REPO = Path(__file__).resolve().parents[1]

#: Public names whose examples live elsewhere (none: the report forms of synth/report.py carry their own).
EXAMPLES_ELSEWHERE = set()
#: Helpers of synth.api that the command line uses; not top-level names, but documented with examples too.
API_HELPERS = ("check_velocity", "voiced")

STRING = """
name: api-nylon
resonator: {type: string, material: nylon, length: 320 mm, diameter: 0.75 mm, pitch: E4}
excitation: {type: pluck, position: 0.22}
pickup: {position: 0.9}
damping: {t60: 0.4 s, t60_high: 0.1 s, high_frequency: 3 kHz}
render: {duration: 0.12 s, sample_rate: 16000, max_modes: 24}
"""

STRIKE = """
name: api-felt-wire
resonator: {type: string, material: music-wire, length: 600 mm, diameter: 0.8 mm, pitch: A2}
excitation: {type: strike, position: 0.12, contact_time: 1.5 ms}
damping: {t60: 0.5 s}
render: {duration: 0.1 s, sample_rate: 16000, max_modes: 40}
"""


@pytest.fixture(scope="module")
def string_patch():
    return synth.patch_from_text(STRING)


@pytest.fixture(scope="module")
def strike_patch():
    return synth.patch_from_text(STRIKE)


def _one_line_error(info):
    """The error message of a pytest.raises, checked to be one line."""
    text = str(info.value)
    assert "\n" not in text and text.strip() == text and text
    return text


# --- the examples of every public name ---------------------------------------------------------


def _run_examples(obj, name):
    """(number of examples, failures, report) of `obj`'s docstring run as a doctest in its module."""
    module = sys.modules[obj.__module__]
    tests = doctest.DocTestFinder(recurse=False).find(obj, name, module=module, globs=dict(vars(module)))
    report = []
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS)
    n_examples = 0
    for test in tests:
        n_examples += len(test.examples)
        runner.run(test, out=report.append)
    return n_examples, runner.failures, "".join(report)


@pytest.mark.parametrize("name", sorted(synth._PUBLIC))
def test_public_name_has_working_examples(name):
    if name in EXAMPLES_ELSEWHERE:
        pytest.skip("examples owned by synth/report.py")
    n_examples, failures, report = _run_examples(getattr(synth, name), name)
    assert n_examples > 0, f"synth.{name} has no Examples section with doctests"
    assert failures == 0, report


@pytest.mark.parametrize("name", API_HELPERS)
def test_api_helpers_have_working_examples(name):
    import synth.api

    n_examples, failures, report = _run_examples(getattr(synth.api, name), name)
    assert n_examples > 0 and failures == 0, report


@pytest.mark.parametrize("name", sorted(set(synth._PUBLIC) - EXAMPLES_ELSEWHERE))
def test_public_functions_document_parameters_and_returns(name):
    obj = getattr(synth, name)
    if not inspect.isfunction(obj):
        return
    doc = inspect.getdoc(obj)
    assert "Examples\n--------" in doc
    if inspect.signature(obj).parameters:
        assert "Parameters\n----------" in doc, f"synth.{name} documents no Parameters"
    assert "Returns\n-------" in doc, f"synth.{name} documents no Returns"


def test_new_names_are_public():
    for name in ("render", "write_audio", "Rendered", "retune"):
        assert name in synth.__all__ and name in dir(synth)
    assert synth.render is synth.api.render and synth.write_audio is synth.api.write_audio


def test_import_synth_stays_lazy():
    """``import synth`` loads none of the API's modules (nor numpy) until a name is used."""
    probe = "import sys, synth; print(sorted(m for m in ('numpy', 'synth.api', 'synth.patch') if m in sys.modules))"
    proc = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, cwd=REPO, timeout=60,
                          env={"PYTHONPATH": str(REPO), "PATH": "/usr/bin:/bin"})
    assert proc.stdout.strip() == "[]", proc.stderr


def test_signatures():
    """Options are keyword-only and the sample rate a required keyword (STYLE.md 4)."""
    params = inspect.signature(synth.render).parameters
    assert [p.kind for p in params.values()][1:] == [inspect.Parameter.KEYWORD_ONLY] * 2
    write = inspect.signature(synth.write_audio).parameters
    assert write["sample_rate"].kind is inspect.Parameter.KEYWORD_ONLY and write["sample_rate"].default is inspect._empty
    assert write["bit_depth"].default == 24
    retune = inspect.signature(synth.retune).parameters
    assert list(retune)[:2] == ["patch", "pitch"] and retune["cache"].kind is inspect.Parameter.KEYWORD_ONLY


# --- retune by pitch ---------------------------------------------------------------------------


def _hz(midi):
    """12-TET with A4 (MIDI 69) = 440 Hz, computed here rather than by synth.units."""
    return 440.0 * 2.0 ** ((midi - 69) / 12.0)


class TestRetune:
    # MIDI numbers of the names: C4 = 60 (middle C), A#3 = Bb3 = 58, Bb2 = 46, F#5 = 78.
    @pytest.mark.parametrize("name, midi", [("C4", 60), ("A#3", 58), ("Bb3", 58), ("Bb2", 46), ("F#5", 78), ("A4", 69)])
    def test_note_name_equals_its_frequency(self, string_patch, name, midi):
        by_name = synth.retune(string_patch, name)
        by_hz = synth.retune(string_patch, _hz(midi))
        fundamental = synth.partial_table(by_name, onset=False).fundamental_hz
        assert fundamental == pytest.approx(_hz(midi), rel=1e-9)  # the solve puts the lowest mode on pitch
        assert synth.partial_table(by_hz, onset=False).fundamental_hz == pytest.approx(fundamental, rel=1e-12)

    @pytest.mark.parametrize("pitch, hz", [("261.6 Hz", 261.6), ("1.2 kHz", 1200.0), (" 330 Hz ", 330.0), (220, 220.0),
                                           (np.float64(196.5), 196.5), ("440", 440.0)])
    def test_frequencies_with_and_without_units(self, string_patch, pitch, hz):
        table = synth.partial_table(synth.retune(string_patch, pitch), onset=False)
        assert table.fundamental_hz == pytest.approx(hz, rel=1e-9)

    def test_old_keyword_and_positional_hz_still_work(self, string_patch):
        positional = synth.retune(string_patch, 220.0)
        assert synth.retune(string_patch, pitch_hz=220.0) == positional
        assert synth.retune(string_patch, "A3") == positional  # A3 = 220 Hz exactly

    def test_the_patch_itself_is_unchanged(self, string_patch):
        before = dataclasses.replace(string_patch)
        synth.retune(string_patch, "G2")
        assert string_patch == before

    @pytest.mark.parametrize("bad, match", [
        ("H4", "not a pitch: give a note name"),
        ("", "not a pitch"),
        ("440 m", "not a pitch"),
        (-5.0, "must be > 0"),
        (0, "must be > 0"),
        (float("nan"), "finite"),
        (2e6, "<= 1e\\+06 Hz"),
        (True, "must be a pitch"),
        ([440], "not a pitch"),
    ])
    def test_bad_pitch_is_one_line_error_naming_what_is_allowed(self, string_patch, bad, match):
        with pytest.raises(PatchError, match=match) as info:
            synth.retune(string_patch, bad)
        text = _one_line_error(info)
        assert text.startswith("pitch: ") and isinstance(info.value, ValueError)

    def test_pitch_given_twice_or_not_at_all(self, string_patch):
        with pytest.raises(TypeError, match="one pitch"):
            synth.retune(string_patch)
        with pytest.raises(TypeError, match="one pitch"):
            synth.retune(string_patch, "A4", pitch_hz=440.0)

    def test_cache_is_used(self, string_patch):
        cache = synth.SolveCache()
        synth.retune(string_patch, "D4", cache=cache)
        synth.retune(string_patch, _hz(62), cache=cache)
        assert cache.retunes == 1 and cache.hits == 1


# --- render ------------------------------------------------------------------------------------


class TestRender:
    def test_returns_a_frozen_normalised_render(self, string_patch):
        rendered = synth.render(string_patch)
        assert isinstance(rendered, synth.Rendered)
        assert rendered.signal.dtype == np.float32 and rendered.signal.ndim == 1
        assert len(rendered.signal) == rendered.ending.n_samples == round(0.12 * 16000)
        assert rendered.sample_rate == 16000 and rendered.bit_depth == 24
        assert rendered.duration_s == pytest.approx(0.12)
        assert rendered.peak_dbfs == pytest.approx(20 * math.log10(np.max(np.abs(rendered.signal))))
        assert rendered.peak_dbfs <= -1.0 + 1e-5  # -1 dBTP: the true peak is at least the sample peak
        assert rendered.table.fundamental_hz == pytest.approx(_hz(64), rel=1e-9)  # E4
        with pytest.raises(dataclasses.FrozenInstanceError):
            rendered.sample_rate = 8000
        with pytest.raises(ValueError):
            rendered.signal[0] = 1.0  # read-only

    def test_is_render_patch_normalised(self, string_patch):
        """The command's steps: table, ending, render_patch, then a gain to the peak target."""
        rendered = synth.render(string_patch)
        raw, table = synth.render_patch(string_patch)
        gain = 10.0 ** (rendered.gain_db / 20.0)
        assert np.allclose(rendered.signal, raw * gain, rtol=0, atol=1e-6)
        assert np.array_equal(rendered.table.frequency_hz, table.frequency_hz)

    def test_sample_peak_and_absolute_scale(self, string_patch):
        settings = dataclasses.replace(string_patch.render, peak="sample", peak_db=-6.0)
        rendered = synth.render(dataclasses.replace(string_patch, render=settings))
        assert rendered.peak_dbfs == pytest.approx(-6.0, abs=1e-5)
        absolute = synth.render(dataclasses.replace(string_patch, render=dataclasses.replace(settings, peak_db=None)))
        raw, _ = synth.render_patch(string_patch)
        assert absolute.gain_db == 0.0 and np.array_equal(absolute.signal, raw)

    def test_velocity_100_is_the_patch_as_written(self, strike_patch):
        plain, at_100 = synth.render(strike_patch), synth.render(strike_patch, velocity=100)
        assert np.array_equal(plain.signal, at_100.signal)
        assert plain.gain_db == at_100.gain_db

    def test_velocity_is_voiced_as_midi_voices_a_note(self, strike_patch):
        assert voiced(strike_patch, 64) == voice_patch(strike_patch, velocity=64)
        assert voiced(strike_patch, None) is strike_patch
        expected = synth.render_patch(voice_patch(strike_patch, velocity=64))[0]
        got = synth.render(strike_patch, velocity=64)
        assert np.allclose(got.signal, expected * 10.0 ** (got.gain_db / 20.0), rtol=0, atol=1e-6)

    def test_soft_notes_are_quieter_and_darker(self, strike_patch):
        """A softer blow: less force (lower level before normalisation) and a longer contact (fewer highs)."""
        soft, hard = synth.render(strike_patch, velocity=40), synth.render(strike_patch, velocity=120)
        assert soft.gain_db - hard.gain_db > 6.0  # strength alone: 20 log10(120 / 40) = 9.5 dB
        assert np.max(soft.table.amplitude) < np.max(hard.table.amplitude)

        def centroid(table):
            return float(np.sum(table.frequency_hz * table.amplitude) / np.sum(table.amplitude))

        assert centroid(soft.table) < 0.9 * centroid(hard.table)
        high = hard.table.frequency_hz > 1000.0  # above 1 kHz, about the first zero of the strikes' spectra

        def high_share(table):
            return float(np.sum(table.amplitude[high] ** 2) / np.sum(table.amplitude ** 2))

        assert high_share(soft.table) < 0.5 * high_share(hard.table)  # measured 0.0016 vs 0.0054

    @pytest.mark.parametrize("bad", [0, 128, -3, 64.5, float("nan"), float("inf"), True, "loud", "12.5", [64]])
    def test_bad_velocity_is_one_line_error_saying_1_to_127(self, strike_patch, bad):
        with pytest.raises(ValueError, match=r"whole number 1\.\.127") as info:
            synth.render(strike_patch, velocity=bad)
        assert _one_line_error(info).startswith("velocity: ")

    def test_whole_velocities_in_other_forms(self, strike_patch):
        assert check_velocity(np.int64(7)) == 7 and check_velocity(7.0) == 7 and check_velocity(" 99 ") == 99
        assert voiced(strike_patch, np.int32(64)) == voiced(strike_patch, 64)

    def test_velocity_error_names_a_command_line_option(self, strike_patch):
        with pytest.raises(PatchError) as info:
            voiced(strike_patch, "200", option="--velocity")
        assert _one_line_error(info).startswith("command line: --velocity: must be a whole number 1..127")

    def test_a_patch_is_required(self):
        with pytest.raises(TypeError, match="takes a Patch"):
            synth.render(STRING)

    def test_cache_is_used(self, string_patch):
        cache = synth.SolveCache()
        synth.render(string_patch, cache=cache)
        synth.render(string_patch, velocity=30, cache=cache)
        assert cache.solves == 1 and cache.hits == 1

    @pytest.mark.parametrize("bits", [16, 24])
    def test_render_then_write_audio_is_the_command_s_file(self, tmp_path, write_patch, capsys, bits):
        """synth.render + synth.write_audio (pitch for the sampler chunks) give ``synth render``'s bytes."""
        patch_file = write_patch(STRING.replace("max_modes: 24}", f"max_modes: 24, bit_depth: {bits}}}"))
        command_file = tmp_path / "command.wav"
        assert main(["render", str(patch_file), "-o", str(command_file), "-q"]) == 0
        capsys.readouterr()
        rendered = synth.render(synth.load_patch(patch_file))
        api_file = synth.write_audio(tmp_path / "api.wav", rendered.signal, sample_rate=rendered.sample_rate,
                                     bit_depth=rendered.bit_depth, pitch=rendered.table.fundamental_hz)
        assert api_file.read_bytes() == command_file.read_bytes()


# --- write_audio -------------------------------------------------------------------------------


def _tone(n=1200, sample_rate=12000, level=0.9):
    t = np.arange(n) / sample_rate
    return level * np.sin(2 * np.pi * 330.0 * t) * np.exp(-t / 0.05)


class TestWriteAudio:
    def test_24_bit_round_trip_within_one_lsb(self, tmp_path):
        signal = _tone()
        path = synth.write_audio(tmp_path / "x.wav", signal, sample_rate=12000)
        assert path == tmp_path / "x.wav"
        info = soundfile.info(path)
        assert (info.samplerate, info.channels, info.subtype, info.frames) == (12000, 1, "PCM_24", len(signal))
        data, _ = soundfile.read(path, dtype="int32")
        steps = (data >> 8).astype(np.float64)  # the 24-bit sample values; full scale is 2**23 - 1 steps
        assert np.max(np.abs(steps - signal * (2**23 - 1))) <= 1.0

    def test_16_bit_is_dithered_within_two_lsb_and_repeatable(self, tmp_path):
        signal = _tone(n=4000)
        first = synth.write_audio(tmp_path / "a.wav", signal, sample_rate=12000, bit_depth=16)
        second = synth.write_audio(tmp_path / "b.wav", signal, sample_rate=12000, bit_depth=16)
        assert first.read_bytes() == second.read_bytes()  # a fixed dither seed
        data, _ = soundfile.read(first, dtype="int16")
        error = data - signal * 32767
        assert np.max(np.abs(error)) <= 1.5  # TPDF +-1 LSB, then rounding
        assert np.std(error[:3000]) > 0.2  # the dither is there (rounding alone: 0.29 LSB rms; TPDF adds 0.41)

    def test_32_bit_float_is_exact_and_may_exceed_full_scale(self, tmp_path):
        signal = (_tone() * 1.5).astype(np.float32)
        path = synth.write_audio(tmp_path / "x.wav", signal, sample_rate=12000, bit_depth=32)
        data, _ = soundfile.read(path, dtype="float32")
        assert soundfile.info(path).subtype == "FLOAT" and np.array_equal(data, signal)

    def test_stereo(self, tmp_path):
        signal = np.stack([_tone(), -0.5 * _tone()], axis=1)
        path = synth.write_audio(tmp_path / "x.wav", signal, sample_rate=12000, bit_depth=32)
        data, _ = soundfile.read(path)
        assert data.shape == signal.shape and np.allclose(data, signal, atol=1e-7)

    def test_a_list_and_float32_are_fine(self, tmp_path):
        synth.write_audio(str(tmp_path / "x.WAV"), [0.0, 0.5, -0.5], sample_rate=8000)
        synth.write_audio(tmp_path / "y.wav", np.zeros(10, np.float32), sample_rate=48000.0)
        assert sorted(p.name for p in tmp_path.iterdir()) == ["x.WAV", "y.wav"]

    def test_sampler_chunks_only_with_a_pitch(self, tmp_path):
        plain = synth.write_audio(tmp_path / "plain.wav", _tone(), sample_rate=12000).read_bytes()
        tagged = synth.write_audio(tmp_path / "tagged.wav", _tone(), sample_rate=12000, pitch="A4").read_bytes()
        assert b"smpl" not in plain and b"smpl" in tagged and b"inst" in tagged
        unity_note = int.from_bytes(tagged[tagged.index(b"smpl") + 8 + 12:][:4], "little")  # smpl: dwMIDIUnityNote
        assert unity_note == 69

    def test_atomic_no_temporary_file_left(self, tmp_path):
        synth.write_audio(tmp_path / "x.wav", _tone(), sample_rate=12000)
        synth.write_audio(tmp_path / "x.wav", _tone(level=0.1), sample_rate=12000)  # replaces it
        assert [p.name for p in tmp_path.iterdir()] == ["x.wav"]
        assert np.max(np.abs(soundfile.read(tmp_path / "x.wav")[0])) < 0.11

    def test_a_failed_write_leaves_nothing(self, tmp_path, monkeypatch):
        import synth.audio

        old = synth.write_audio(tmp_path / "keep.wav", _tone(), sample_rate=12000).read_bytes()

        def full_disk(*args, **kwargs):
            raise OSError(28, "No space left on device")

        monkeypatch.setattr(synth.audio, "encode_wav", full_disk)
        for name in ("new.wav", "keep.wav"):
            with pytest.raises(RenderError, match="No space left on device") as info:
                synth.write_audio(tmp_path / name, _tone(), sample_rate=12000)
            assert name in _one_line_error(info)
        assert [p.name for p in tmp_path.iterdir()] == ["keep.wav"]
        assert (tmp_path / "keep.wav").read_bytes() == old

    @pytest.mark.parametrize("kwargs, key, match", [
        ({"path": "x.flac"}, "path", "must end in .wav"),
        ({"path": "x.mp3"}, "path", "must end in .wav"),
        ({"path": "no-such-folder/x.wav"}, "path", "does not exist"),
        ({"path": "."}, "path", "must end in .wav"),
        ({"bit_depth": 8}, "bit_depth", "one of 16, 24, 32"),
        ({"bit_depth": True}, "bit_depth", "one of 16, 24, 32"),
        ({"bit_depth": "24"}, "bit_depth", "one of 16, 24, 32"),
        ({"sample_rate": 44100.5}, "sample_rate", "whole number of Hz"),
        ({"sample_rate": 0}, "sample_rate", "1000..768000"),
        ({"sample_rate": 10**9}, "sample_rate", "1000..768000"),
        ({"sample_rate": float("nan")}, "sample_rate", "whole number"),
        ({"sample_rate": True}, "sample_rate", "whole number"),
        ({"signal": np.zeros(0)}, "signal", "empty"),
        ({"signal": np.zeros(10, np.int16)}, "signal", "floating-point"),
        ({"signal": np.zeros(10, complex)}, "signal", "floating-point"),
        ({"signal": np.zeros((10, 3))}, "signal", r"shape \(n,\) \(mono\) or \(n, 2\)"),
        ({"signal": np.zeros((2, 10, 2))}, "signal", "shape"),
        ({"signal": np.array([0.0, np.nan])}, "signal", "not finite"),
        ({"signal": np.array([0.0, np.inf])}, "signal", "not finite"),
        ({"signal": np.array([0.0, 1.25])}, "signal", "would clip at 24 bits"),
        ({"signal": np.array([0.0, -1.01]), "bit_depth": 16}, "signal", "would clip at 16 bits"),
        ({"signal": "loud"}, "signal", "floating-point"),
        ({"pitch": "H4"}, "pitch", "not a pitch"),
    ])
    def test_bad_inputs_are_one_line_errors_and_write_nothing(self, tmp_path, monkeypatch, kwargs, key, match):
        monkeypatch.chdir(tmp_path)
        args = {"path": "out.wav", "signal": _tone(), "sample_rate": 12000, **kwargs}
        with pytest.raises(PatchError, match=match) as info:
            synth.write_audio(args.pop("path"), args.pop("signal"), **args)
        assert _one_line_error(info).startswith(f"{key}: ") and isinstance(info.value, ValueError)
        assert list(tmp_path.iterdir()) == []
