"""``synth midi``: timing, pitch, dampers, pedal, velocity, pan, bad input.

Timing references are the arithmetic of the Standard MIDI Files 1.0
specification (MMA, part of the MIDI 1.0 Detailed Specification): the header's
division is ticks per quarter note, Set Tempo (FF 51 03) is microseconds per
quarter note (500 000 until the first one), a tick lasts tempo / (division x
1e6) seconds; a negative division is SMPTE time, -fps in the high byte and
ticks per frame in the low byte.  Every expected time below is worked by hand
from those definitions (written out in the comments), not taken from the code.

Pitch references are 12-TET, f = A4 x 2^((n - 69) / 12), A4 = 440 Hz
(ISO 16:1975) and MIDI note 69 = A4 (MIDI 1.0).
"""
from __future__ import annotations

import importlib.util
import math
import re
import struct
import sys
from fractions import Fraction
from pathlib import Path

import mido
import numpy as np
import pytest
import soundfile

from synth import voices
from synth.audio import normalise, write_audio
from synth.cli import main
from synth.errors import InputFileError
from synth.midi import load_channel_map, perform, read_midi, render_midi
from synth.midifile import tempo_map
from synth.patch import _RENDER_FIELDS, load_patch
from synth.voices import (
    DECAY_DB,
    Tone,
    VoicingCache,
    decay_samples,
    pan_gains,
    quantise_bends,
    render_voice,
    voice_end,
    write_song,
)
from tests.analysis import measured_t60, peak_near, read_wav

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "patches" / "midi"
RATE = 8000
CENT = 2.0 ** (1 / 1200) - 1.0  # one cent as a relative frequency tolerance (5.8e-4)

# A plucked nylon string at 8 kHz with few modes: quick to render.
STRING = """\
name: midi-test-string
resonator:
  type: string
  material: nylon
  length: 650 mm
  diameter: 0.8 mm
  pitch: A3
  ends: pinned
excitation:
  type: {kind}
  position: 0.27
  contact_time: 0.5 ms
pickup:
  position: 0.11
damping:
  t60: 3 s
  t60_high: 0.5 s
  high_frequency: 3 kHz
  release_t60: 0.25 s
render:
  sample_rate: 8000
  bit_depth: 24
  peak_db: -1.0
  max_modes: 24
"""


def a4_pitch(note, a4=440.0):
    """12-TET frequency of MIDI `note` (ISO 16 / MIDI 1.0 numbering)."""
    return a4 * 2.0 ** ((note - 69) / 12.0)


@pytest.fixture
def patch(tmp_path):
    path = tmp_path / "string.yaml"
    path.write_text(STRING.format(kind="pluck"), encoding="utf-8")
    return path


@pytest.fixture
def struck(tmp_path):
    path = tmp_path / "struck.yaml"
    path.write_text(STRING.format(kind="strike").replace("name: midi-test-string", "name: midi-struck"), encoding="utf-8")
    return path


# ---- MIDI fixtures (mido writes them; 100 ticks per quarter at 1 s per quarter: 1 tick = 10 ms)

TICK_S = 0.01


def on(key, velocity=100, channel=0):
    return mido.Message("note_on", channel=channel, note=key, velocity=velocity)


def off(key, channel=0):
    return mido.Message("note_off", channel=channel, note=key, velocity=64)


def cc(control, value, channel=0):
    return mido.Message("control_change", channel=channel, control=control, value=value)


def bend(pitch, channel=0):
    return mido.Message("pitchwheel", channel=channel, pitch=pitch)


def tempo(us):
    return mido.MetaMessage("set_tempo", tempo=us)


def song(path, *tracks, ticks_per_beat=100, fmt=1, names=None, seconds_per_quarter=True):
    """Write a MIDI file; each track is a list of (absolute tick, message)."""
    midi = mido.MidiFile(type=fmt, ticks_per_beat=ticks_per_beat)
    for number, events in enumerate(tracks):
        track = mido.MidiTrack()
        if names and names[number]:
            track.append(mido.MetaMessage("track_name", name=names[number]))
        if number == 0 and seconds_per_quarter:
            track.append(tempo(1_000_000))
        now = 0
        for tick, message in sorted(events, key=lambda event: event[0]):
            track.append(message.copy(time=tick - now))
            now = tick
        midi.tracks.append(track)
    midi.save(path)
    return path


def render(tmp_path, midi_path, *options, source=("--patch",), name="out.wav"):
    out = tmp_path / name
    status = main(["midi", str(midi_path), *map(str, source), "-o", str(out), "--quiet", *map(str, options)])
    assert status == 0
    return read_wav(out)


def window(signal, start_s, stop_s, rate=RATE):
    return signal[int(round(start_s * rate)) : int(round(stop_s * rate))]


# --------------------------------------------------------------------------- timing


class TestTiming:
    def test_tempo_change_midway_in_another_track(self, tmp_path):
        # 96 ticks per quarter note.  Tempo: 500 000 us from tick 0 (track 1),
        # 250 000 us from tick 192 (track 1), 1 000 000 us from tick 384 (track 3:
        # tempo events in any track apply to all).
        path = song(tmp_path / "t.mid",
                    [(192, tempo(250_000))],
                    [(t, on(57)) for t in (0, 96, 192, 288, 384, 401, 432)] + [(440, off(57))],
                    [(384, tempo(1_000_000))],
                    ticks_per_beat=96, seconds_per_quarter=False)
        midi = read_midi(path)
        # By hand, seconds = sum(ticks * tempo / (96 * 1e6)):
        #   96 * 0.5/96 = 0.5;  192 -> 1.0;  1.0 + 96 * 0.25/96 = 1.25;  1.25 + 96 * 0.25/96 = 1.5;
        #   1.5 + 17 * 1.0/96 = 1.5 + 17/96;  1.5 + 48/96 = 2.0
        expected = [Fraction(0), Fraction(1, 2), Fraction(1), Fraction(5, 4), Fraction(3, 2),
                    Fraction(3, 2) + Fraction(17, 96), Fraction(2)]
        got = [midi.tempo.seconds(t) for t in (0, 96, 192, 288, 384, 401, 432)]
        assert got == expected
        # On the sample at 8 kHz: 0, 4000, 8000, 10000, 12000, 12000 + 17 * 8000/96 = 13416.67 -> 13417, 16000
        notes = perform(midi, sample_rate=8000).notes
        assert [n.onset for n in notes] == [0, 4000, 8000, 10000, 12000, 13417, 16000]
        # 440 ticks: 2.0 + 8/96 s = 2.08333 s -> 16666.67 -> 16667
        assert perform(midi, sample_rate=8000).end_sample == 16667

    def test_odd_division_and_rounding(self):
        # 7 ticks per quarter at 333 333 us: tick 5 is 5 * 333333 / 7e6 = 0.238095 s;
        # at 11 025 Hz that is 1666665 * 11025 / 7e6 = 2624.997 -> 2625.
        tmap = tempo_map(7, [(0, 333_333)])
        assert tmap.seconds(5) == Fraction(5 * 333_333, 7_000_000)
        assert tmap.sample(5, 11025) == 2625
        # Halves round up: 96 ticks per quarter at 500 000 us, 12 kHz: 1 tick = 62.5 samples -> 63.
        tmap = tempo_map(96)
        assert tmap.sample(1, 12000) == 63 and tmap.sample(3, 12000) == 188  # 187.5 -> 188

    @pytest.mark.parametrize(
        "fps_byte, per_frame, tick, seconds",
        [
            (25, 40, 1234, Fraction(1234, 1000)),  # 25 fps x 40 ticks: 1 ms per tick
            (24, 10, 48, Fraction(48, 240)),
            (29, 80, 2400, Fraction(2400 * 1001, 30000 * 80)),  # 29.97 fps = 30000/1001
        ],
    )
    def test_smpte_division_ignores_tempo(self, tmp_path, fps_byte, per_frame, tick, seconds):
        division = struct.unpack(">h", bytes([256 - fps_byte, per_frame]))[0]  # high byte -fps, low byte ticks/frame
        path = song(tmp_path / "s.mid", [(0, tempo(300_000)), (tick, on(57)), (tick + 10, off(57))],
                    ticks_per_beat=division, seconds_per_quarter=False)
        midi = read_midi(path)
        assert midi.tempo.seconds(tick) == seconds
        assert perform(midi, sample_rate=8000).notes[0].onset == math.floor(seconds * 8000 + Fraction(1, 2))

    def test_onsets_land_on_the_sample_in_the_audio(self, tmp_path, patch):
        # 100 ticks per quarter; 1 s per quarter, then 0.6 s from tick 100.  Short
        # notes with a quick damper leave silence (exact zeros) before each onset.
        fast = tmp_path / "fast.yaml"
        fast.write_text(patch.read_text().replace("release_t60: 0.25 s", "release_t60: 0.02 s"))
        path = song(tmp_path / "o.mid", [(100, tempo(600_000))],
                    [(t, on(57)) for t in (0, 50, 100, 150, 233)] + [(t + 10, off(57)) for t in (0, 50, 100, 150, 233)])
        data, rate = render(tmp_path, path, source=("--patch", fast))
        # ticks 0, 50 -> 0, 0.5 s; 100 -> 1.0 s; 150 -> 1.0 + 50 * 0.006 = 1.3 s; 233 -> 1.0 + 133 * 0.006 = 1.798 s
        for seconds in (0.5, 1.0, 1.3, 1.798):
            onset = round(seconds * rate)
            assert np.max(np.abs(data[onset - 40 : onset + 1])) == 0.0  # a pluck's velocity starts from rest ...
            assert data[onset + 1] != 0.0 and np.max(np.abs(data[onset + 1 : onset + 40])) > 1e-3  # ... at once


# --------------------------------------------------------------------------- pitch and bend


class TestPitch:
    NOTES = (45, 57, 64, 69, 76)

    @pytest.mark.parametrize("a4", [440.0, 415.0])
    def test_rendered_fundamentals_are_12tet(self, tmp_path, patch, a4):
        path = song(tmp_path / "p.mid", [(100 * i, on(n, 90)) for i, n in enumerate(self.NOTES)]
                    + [(100 * i + 60, off(n)) for i, n in enumerate(self.NOTES)])
        data, rate = render(tmp_path, path, "--a4", a4, source=("--patch", patch))
        for i, note in enumerate(self.NOTES):
            expected = a4_pitch(note, a4)
            measured = peak_near(window(data, i + 0.02, i + 0.58), rate, expected, search_hz=0.03 * expected)
            assert measured == pytest.approx(expected, rel=CENT)

    def test_pitch_bend_retunes_a_sounding_note(self, tmp_path, patch):
        # +8191 with the default +-2 semitone range at 0.5 s; then RPN 0 sets 12
        # semitones and -8192 bends an octave down at 1.0 s.
        path = song(tmp_path / "b.mid", [(0, on(57)), (50, bend(8191)), (90, cc(101, 0)), (90, cc(100, 0)),
                                         (90, cc(6, 12)), (90, cc(38, 0)), (100, bend(-8192)), (150, off(57))])
        data, rate = render(tmp_path, path, source=("--patch", patch))
        for start, stop, expected in ((0.05, 0.48, 220.0), (0.53, 0.88, 220.0 * 2 ** (2 / 12)), (1.03, 1.48, 110.0)):
            measured = peak_near(window(data, start, stop), rate, expected, search_hz=0.04 * expected)
            assert measured == pytest.approx(expected, rel=2 * CENT)


# --------------------------------------------------------------------------- dampers and pedal


def fundamental_t60(data, rate, start_s, stop_s, frequency=220.0):
    return measured_t60(data, rate, frequency, start_s=start_s, stop_s=stop_s, frame_s=0.02)


class TestDampers:
    def test_note_off_applies_release_t60(self, tmp_path, patch):
        data, rate = render(tmp_path, song(tmp_path / "r.mid", [(0, on(57)), (40, off(57))]), source=("--patch", patch))
        assert fundamental_t60(data, rate, 0.05, 0.37) == pytest.approx(3.0, rel=0.15)  # damping.t60
        assert fundamental_t60(data, rate, 0.44, 0.70) == pytest.approx(0.25, rel=0.1)  # damping.release_t60

    def test_pedal_holds_until_pedal_up(self, tmp_path, patch):
        path = song(tmp_path / "p.mid", [(0, cc(64, 127)), (0, on(57)), (30, off(57)), (80, cc(64, 0))])
        data, rate = render(tmp_path, path, source=("--patch", patch))
        assert fundamental_t60(data, rate, 0.35, 0.77) == pytest.approx(3.0, rel=0.15)
        assert fundamental_t60(data, rate, 0.84, 1.10) == pytest.approx(0.25, rel=0.1)

    def test_pedal_up_leaves_held_keys_ringing(self, tmp_path, patch):
        path = song(tmp_path / "h.mid", [(0, cc(64, 127)), (0, on(57)), (20, cc(64, 0)), (70, off(57))])
        data, rate = render(tmp_path, path, source=("--patch", patch))
        assert fundamental_t60(data, rate, 0.25, 0.67) == pytest.approx(3.0, rel=0.15)
        assert fundamental_t60(data, rate, 0.74, 1.00) == pytest.approx(0.25, rel=0.1)

    def test_restruck_key_keeps_ringing_until_its_last_release(self, tmp_path, patch):
        # The same string struck twice: the damper stays up until both strikes are released.
        path = song(tmp_path / "x.mid", [(0, on(57, 60)), (20, on(57, 90)), (40, off(57)), (70, off(57))])
        data, rate = render(tmp_path, path, source=("--patch", patch))
        assert fundamental_t60(data, rate, 0.43, 0.68) == pytest.approx(3.0, rel=0.2)
        assert fundamental_t60(data, rate, 0.74, 1.00) == pytest.approx(0.25, rel=0.1)

    def test_restrike_superposes_and_shares_the_damper(self, tmp_path, patch):
        # At absolute scale the re-struck key is exactly the sum of its two strikes,
        # each ringing until the key's last release (0.7 s): a linear string struck twice.
        absolute = tmp_path / "absolute.yaml"
        absolute.write_text(patch.read_text().replace("peak_db: -1.0", "peak_db: null").replace("bit_depth: 24", "bit_depth: 32")
                            .replace("position: 0.27", "position: 0.27\n  strength: 0.1"))
        files = {
            "both": [(0, on(57, 60)), (20, on(57, 90)), (40, off(57)), (70, off(57))],
            "first": [(0, on(57, 60)), (70, off(57))],
            "second": [(20, on(57, 90)), (70, off(57))],
        }
        signals = {}
        for name, events in files.items():
            out = tmp_path / f"{name}.wav"
            main(["midi", str(song(tmp_path / f"{name}.mid", events)), "--patch", str(absolute), "-o", str(out),
                  "--tail", "0.5", "--quiet"])
            signals[name], _ = soundfile.read(out, dtype="float64")
        assert np.max(np.abs(signals["both"])) > 0.01
        assert np.max(np.abs(signals["both"] - signals["first"] - signals["second"])) < 1e-6

    def test_all_notes_off_damps_held_keys(self, tmp_path, patch):
        data, rate = render(tmp_path, song(tmp_path / "a.mid", [(0, on(57)), (40, cc(123, 0)), (90, off(57))]),
                            source=("--patch", patch))
        assert fundamental_t60(data, rate, 0.44, 0.70) == pytest.approx(0.25, rel=0.1)

    def test_all_notes_off_respects_the_pedal_all_sound_off_does_not(self, tmp_path, patch):
        # MIDI 1.0: All Notes Off (CC 123) releases keys, which the sustain pedal still holds;
        # All Sound Off (CC 120) silences them (here: drops every damper) at once.
        events = [(0, cc(64, 127)), (0, on(57)), (30, cc(123, 0)), (80, cc(64, 0))]
        data, rate = render(tmp_path, song(tmp_path / "n.mid", events), source=("--patch", patch))
        assert fundamental_t60(data, rate, 0.35, 0.77) == pytest.approx(3.0, rel=0.15)
        assert fundamental_t60(data, rate, 0.84, 1.10) == pytest.approx(0.25, rel=0.1)
        events = [(0, cc(64, 127)), (0, on(57)), (30, cc(120, 0)), (80, cc(64, 0))]
        data, rate = render(tmp_path, song(tmp_path / "s.mid", events), source=("--patch", patch), name="s.wav")
        assert fundamental_t60(data, rate, 0.34, 0.60) == pytest.approx(0.25, rel=0.1)


# --------------------------------------------------------------------------- velocity


def magnitude(signal, rate, frequency):
    """|windowed DFT| of `signal` at `frequency` (Hann window)."""
    n = np.arange(signal.size)
    return abs(np.sum(signal * np.hanning(signal.size) * np.exp(-2j * np.pi * frequency * n / rate)))


def test_velocity_sets_level_and_brightness(tmp_path, struck):
    # Two strikes of A3 at velocity 40 and 120, far enough apart not to overlap.
    path = song(tmp_path / "v.mid", [(0, on(57, 40)), (90, off(57)), (200, on(57, 120)), (290, off(57))])
    data, rate = render(tmp_path, path, source=("--patch", struck))
    soft, loud = window(data, 0.0, 0.5), window(data, 2.0, 2.5)
    patch = load_patch(struck)
    cache = VoicingCache([patch])
    tables = [cache.tone(0, 57, v) for v in (40, 120)]
    # The level of each partial follows the voiced table (closed loop) ...
    for k in (0, 2, 3, 5):
        f = tables[0].frequency_hz[k]
        measured = magnitude(loud, rate, f) / magnitude(soft, rate, f)
        assert measured == pytest.approx(tables[1].amplitude[k] / tables[0].amplitude[k], rel=0.02)
    # ... louder: strength is linear in velocity (voicing.py): 20 log10(120 / 40) = 9.54 dB,
    # times the half-sine contact spectrum |cos(pi f tau)| / |1 - (2 f tau)^2| at 220 Hz
    # (REFERENCES.md sec. 10) for the two contact times, recomputed here.
    def contact(tau):
        x = 2 * 220.0 * tau
        return abs(math.cos(math.pi * x / 2) / (1 - x * x))

    taus = [patch.excitation.contact_time * (100 / v) ** (1.5 / 3.5) for v in (40, 120)]
    expected_db = 20 * math.log10(3.0) + 20 * math.log10(contact(taus[1]) / contact(taus[0]))
    gain_db = 20 * math.log10(magnitude(loud, rate, 220.0) / magnitude(soft, rate, 220.0))
    assert gain_db == pytest.approx(expected_db, abs=0.2)
    # ... and brighter: the 4th partial (880 Hz, below the first zero of either contact
    # spectrum) gains on the fundamental, as the contact shortens from 0.74 to 0.46 ms.
    f4 = tables[0].frequency_hz[3]
    brightness = [magnitude(x, rate, f4) / magnitude(x, rate, 220.0) for x in (soft, loud)]
    assert 20 * math.log10(brightness[1] / brightness[0]) > 1.0


# --------------------------------------------------------------------------- channels, maps, pan


def write_map(tmp_path, text, name="map.yaml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


class TestMapAndPan:
    def test_map_pans_and_gains(self, tmp_path, patch):
        path = song(tmp_path / "m.mid", [(0, on(57, 100, 0)), (50, off(57, 0)), (100, on(57, 100, 1)), (150, off(57, 1))])
        chmap = write_map(tmp_path, f"render: {{sample_rate: {RATE}}}\nchannels:\n  1: {{patch: {patch.name}, pan: -1}}\n"
                                    f"  2: {{patch: {patch.name}, pan: 1, gain: -6 dB}}\n")
        data, rate = render(tmp_path, path, source=("--map", chmap))
        assert data.ndim == 2 and data.shape[1] == 2
        first, second = window(data, 0.0, 0.9), window(data, 1.0, 1.9)
        assert np.max(np.abs(first[:, 1])) < 1e-6 and np.max(np.abs(second[:, 0])) < 1e-6
        # Same note, same velocity, hard-panned (gain 1 per side): -6 dB apart.
        ratio = np.max(np.abs(second[:, 1])) / np.max(np.abs(first[:, 0]))
        assert 20 * math.log10(ratio) == pytest.approx(-6.0, abs=0.05)

    def test_cc10_gives_stereo_and_no_pan_gives_mono(self, tmp_path, patch):
        panned = song(tmp_path / "c.mid", [(0, cc(10, 0)), (0, on(57)), (30, off(57))])
        data, _ = render(tmp_path, panned, source=("--patch", patch))
        assert data.ndim == 2 and np.max(np.abs(data[:, 1])) < 1e-6 and np.max(np.abs(data[:, 0])) > 0.5
        plain = song(tmp_path / "n.mid", [(0, on(57)), (30, off(57))])
        data, _ = render(tmp_path, plain, source=("--patch", patch), name="mono.wav")
        assert data.ndim == 1

    def test_tracks_by_name_and_default(self, tmp_path, patch):
        path = song(tmp_path / "t.mid", [(0, on(57)), (30, off(57))], [(100, on(57, 100, 0)), (130, off(57))],
                    names=["lead", "other"])
        chmap = write_map(tmp_path, f"render: {{sample_rate: {RATE}}}\ntracks:\n  lead: {{patch: {patch.name}, pan: 1}}\n"
                                    f"default: {{patch: {patch.name}, pan: -1}}\n")
        data, _ = render(tmp_path, path, source=("--map", chmap))
        assert np.max(np.abs(window(data, 0, 0.9)[:, 0])) < 1e-6  # track "lead": right
        assert np.max(np.abs(window(data, 1.0, 1.9)[:, 1])) < 1e-6  # the other track: default, left

    def test_map_render_section_and_channel_numbers(self, tmp_path, patch):
        chmap = load_channel_map(write_map(tmp_path, f"render: {{sample_rate: 11025, peak_db: null}}\n"
                                                     f"channels:\n  16: {{patch: {patch.name}}}\n"))
        assert set(chmap.channels) == {15}  # map channel 16 is mido channel 15
        assert chmap.render == {"sample_rate": 11025.0, "peak_db": None}

    def test_map_render_fields_are_the_patch_render_fields(self):
        from synth.midi import _MAP_RENDER

        for key, field in _MAP_RENDER.items():
            assert (field.kind, field.choices, field.low, field.high) == (
                _RENDER_FIELDS[key].kind, _RENDER_FIELDS[key].choices, _RENDER_FIELDS[key].low, _RENDER_FIELDS[key].high)

    def test_pan_law_is_constant_power(self):
        for pan in np.linspace(-1, 1, 9):
            left, right = pan_gains(pan)
            assert left**2 + right**2 == pytest.approx(1.0)
        assert pan_gains(0.0) == pytest.approx((math.sqrt(0.5), math.sqrt(0.5)))


# --------------------------------------------------------------------------- the voice renderer


def reference_voice(tone, onset, stop, damper, release_t60, rate, bend_samples, bend_ratios):
    """Float64 re-implementation: per-sample frequency and decay, phases and log-amplitudes summed."""
    n = np.arange(onset, stop)
    index = np.searchsorted(bend_samples, n, side="right") - 1
    ratios = np.concatenate(([1.0], bend_ratios))
    ratio = ratios[index + 1]  # 1 before the first bend
    out = np.zeros(n.size)
    for f, a, phi, t60 in zip(tone.frequency_hz, tone.amplitude, tone.phase, tone.t60_s):
        t60_n = np.where(n >= damper, min(t60, release_t60), t60)
        sigma = math.log(1000.0) / (t60_n * rate)
        omega = 2 * math.pi * f * ratio / rate
        phase = phi + np.concatenate(([0.0], np.cumsum(omega)[:-1]))
        log_amp = math.log(a) - np.concatenate(([0.0], np.cumsum(sigma)[:-1]))
        out += np.exp(log_amp) * np.sin(phase)
    return out


def assemble(segments, onset, stop):
    out = np.zeros(stop - onset, np.float64)
    position = onset
    for start, signal in segments:
        assert start == position  # contiguous
        out[start - onset : start - onset + signal.size] = signal
        position = start + signal.size
    assert position == stop
    return out


TONE = Tone(np.array([220.0, 661.3, 1187.9]), np.array([0.6, 0.3, 0.1]), np.array([0.3, 2.0, -1.0]),
            np.array([2.0, 1.0, 0.4]), np.zeros(0), 220.0)  # no onset: the modes from the first sample


class TestRenderVoice:
    @pytest.mark.parametrize("max_segment", [voices.MAX_SEGMENT_SAMPLES, 512])
    def test_segments_match_the_closed_form(self, monkeypatch, max_segment):
        monkeypatch.setattr(voices, "MAX_SEGMENT_SAMPLES", max_segment)
        onset, stop, damper = 1000, 5000, 2500
        bends = (np.array([900, 1700, 3300]), np.array([1.02, 2 ** (2 / 12), 0.94]))
        segments = list(render_voice(TONE, onset=onset, stop=stop, damper=damper, release_t60=0.1,
                                     sample_rate=RATE, bend=bends))
        assert all(signal.size <= max_segment and signal.dtype == np.float32 for _, signal in segments)
        got = assemble(segments, onset, stop)
        expected = reference_voice(TONE, onset, stop, damper, 0.1, RATE, *bends)
        assert np.max(np.abs(got - expected)) < 2e-6 * float(np.sum(TONE.amplitude))

    def test_damped_from_the_first_sample(self):
        segments = list(render_voice(TONE, onset=0, stop=800, damper=0, release_t60=0.05, sample_rate=RATE))
        expected = reference_voice(TONE, 0, 800, 0, 0.05, RATE, np.array([], int), np.array([]))
        assert np.max(np.abs(assemble(segments, 0, 800) - expected)) < 2e-6

    def test_voice_end_is_100_db_down(self):
        # The bound sum |a_m| e^(-sigma_m n) on the envelope, recomputed here: free decay
        # for the 800 samples before the damper, then T60 = min(T60, 0.2 s).
        end = voice_end(TONE, onset=100, damper=900, release_t60=0.2, sample_rate=RATE)
        sigma = lambda t60: math.log(1000) / (np.asarray(t60) * RATE)  # noqa: E731
        held = np.abs(TONE.amplitude) * np.exp(-sigma(TONE.t60_s) * 800)
        bound = lambda n: float(np.sum(held * np.exp(-sigma(np.minimum(TONE.t60_s, 0.2)) * n)))  # noqa: E731
        level = 10 ** (-DECAY_DB / 20) * float(np.sum(TONE.amplitude))
        after = int(end) - 900
        assert bound(after) <= level < bound(after - 1)

    def test_decay_samples_zero_when_already_quiet(self):
        assert decay_samples(np.array([1e-9]), np.array([1e-3]), 1e-6) == 0.0

    def test_bends_on_a_grid_last_wins(self):
        samples, ratios = quantise_bends([0, 3, 10, 17, 18], [1.0, 1.1, 1.2, 1.3, 1.4], 8000, step_s=0.001)
        assert samples.tolist() == [0, 8, 16] and ratios.tolist() == [1.1, 1.2, 1.4]


# --------------------------------------------------------------------------- cache and summary


def test_ten_thousand_notes_twenty_solves(tmp_path, patch, monkeypatch):
    """20 (note, velocity) pairs: each note prepared once, each pair weighed once."""
    pairs = [(45 + k, 40 + 4 * k) for k in range(20)]
    events = []
    for i in range(10_000):
        key, velocity = pairs[i % 20]
        events += [(2 * i, on(key, velocity)), (2 * i + 1, off(key))]
    midi = read_midi(song(tmp_path / "many.mid", events, fmt=0))
    notes = perform(midi, sample_rate=RATE).notes
    assert len(notes) == 10_000
    prepared, weighed = [], []
    unweighted, weigh = voices.unweighted_partials, voices.weigh
    monkeypatch.setattr(voices, "unweighted_partials", lambda p: prepared.append(1) or unweighted(p))
    monkeypatch.setattr(voices, "weigh", lambda p, u: weighed.append(1) or weigh(p, u))
    cache = VoicingCache([load_patch(patch)])
    for note in notes:
        cache.tone(0, note.key, note.velocity)
    assert cache.solves == 20 and len(prepared) == 20 and len(weighed) == 20


def test_velocities_of_one_note_share_its_preparation(patch):
    """Five velocities of one key: the object is prepared once, and each tone equals a fresh partial table.

    A pluck's velocities differ only in strength, so the note is weighed once and its other velocities
    are that tone scaled: equal to a fresh table to rounding (1e-14)."""
    from synth.pipeline import partial_table
    from synth.voicing import voice_patch

    base = load_patch(patch)
    cache = VoicingCache([base])
    for velocity in (10, 40, 64, 100, 127):
        tone = cache.tone(0, 57, velocity)
        fresh = partial_table(voice_patch(base, midi_note=57, velocity=velocity))
        keep = fresh.amplitude > 0
        np.testing.assert_allclose(tone.amplitude, fresh.amplitude[keep], rtol=1e-14, atol=0)
        np.testing.assert_allclose(tone.onset, fresh.onset, rtol=1e-12, atol=1e-15 * np.max(np.abs(fresh.onset)))
        np.testing.assert_allclose(tone.phase, fresh.phase[keep], rtol=0, atol=1e-13)
        np.testing.assert_array_equal(tone.frequency_hz, fresh.frequency_hz[keep])
        np.testing.assert_array_equal(tone.t60_s, fresh.t60_s[keep])
    assert cache.solves == 1


def test_summary_normalised_and_solves(tmp_path, patch, capsys):
    path = song(tmp_path / "s.mid", [(t, on(57 + 2 * (t // 25 % 3), 80)) for t in range(0, 300, 25)]
                + [(t + 20, off(57 + 2 * (t // 25 % 3))) for t in range(0, 300, 25)])
    out = tmp_path / "s.wav"
    assert main(["midi", str(path), "--patch", str(patch), "-o", str(out)]) == 0
    captured = capsys.readouterr()
    assert "wrote" in captured.out and "12 notes" in captured.out and "true peak -1.00 dBTP" in captured.out
    assert "\r" not in captured.err and "%|" not in captured.err  # no progress bar when not a TTY
    assert "listening caution" in captured.err
    data, rate = read_wav(out)
    # Normalised on the true peak: 4x oversampled by scipy's polyphase resampler (an independent reference).
    import scipy.signal

    oversampled = scipy.signal.resample_poly(np.pad(data, 64), 4, 1)
    assert 20 * math.log10(np.max(np.abs(oversampled))) == pytest.approx(-1.0, abs=0.05)
    assert np.max(np.abs(data)) <= 10 ** (-1.0 / 20)
    result = render_midi(path, output=tmp_path / "again.wav", patch=patch)
    assert result.solves == 3 and result.n_notes == 12


def test_progress_bar_only_on_a_terminal(tmp_path, patch, capsys, monkeypatch):
    path = song(tmp_path / "p.mid", [(0, on(57)), (20, off(57))])
    monkeypatch.setattr(sys.stderr, "isatty", lambda: True)  # as on a terminal
    assert main(["midi", str(path), "--patch", str(patch), "-o", str(tmp_path / "p.wav")]) == 0
    assert "rendering" in capsys.readouterr().err
    assert main(["midi", str(path), "--patch", str(patch), "-o", str(tmp_path / "p.wav"), "--quiet"]) == 0
    captured = capsys.readouterr()
    assert captured.err == "" and captured.out.startswith("wrote ")


def test_default_output_goes_to_renders(tmp_path, patch, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    song(tmp_path / "tune.mid", [(0, on(57)), (20, off(57))])
    assert main(["midi", "tune.mid", "--patch", str(patch), "--quiet"]) == 0
    assert (tmp_path / "renders" / "tune.wav").is_file()


def test_end_of_file_agrees_with_mido(tmp_path):
    # An independent float computation of the same tempo map: mido's MidiFile.length.
    for path in (DEMO / "demo-song.mid", song(tmp_path / "t.mid", [(37, tempo(411_111)), (300, tempo(733_000))],
                                              [(0, on(57)), (555, off(57))], ticks_per_beat=77)):
        performance = perform(read_midi(path), sample_rate=48000)
        assert performance.end_sample / 48000 == pytest.approx(mido.MidiFile(path).length, abs=1 / 48000)


def test_tail_option_and_automatic_tail(tmp_path, patch):
    path = song(tmp_path / "e.mid", [(0, on(57)), (50, off(57))])  # the file ends at 0.5 s
    data, rate = render(tmp_path, path, "--tail", "0.3", source=("--patch", patch))
    assert data.size == round(0.8 * rate)
    data, rate = render(tmp_path, path, source=("--patch", patch), name="auto.wav")
    # Automatic: until 100 dB down after the damper at 0.5 s: about 100/60 x 0.25 s (release_t60).
    assert 0.5 + 0.3 < data.size / rate < 0.5 + 100 / 60 * 0.25 + 0.01


def test_write_song_chunked_equals_write_audio(tmp_path, rng):
    buffer = rng.standard_normal((150_000, 2)).astype(np.float32) * 0.3
    expected, _ = normalise(buffer.copy(), peak_db=-1.0, bit_depth=24, peak="true", sample_rate=RATE)
    write_audio(tmp_path / "whole.wav", expected, sample_rate=RATE, bit_depth=24)
    write_song(tmp_path / "chunked.wav", buffer, sample_rate=RATE, bit_depth=24, peak_db=-1.0)
    a, _ = soundfile.read(tmp_path / "whole.wav", dtype="int32")
    b, _ = soundfile.read(tmp_path / "chunked.wav", dtype="int32")
    assert np.max(np.abs((a >> 8).astype(np.int64) - (b >> 8))) <= 1


# --------------------------------------------------------------------------- the demo song


def _demo_module():
    spec = importlib.util.spec_from_file_location("make_demo_song", DEMO / "make_demo_song.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_demo_song_is_what_the_script_writes(tmp_path):
    _demo_module().main([str(tmp_path / "demo.mid")])
    assert (tmp_path / "demo.mid").read_bytes() == (DEMO / "demo-song.mid").read_bytes()


def test_demo_song_renders_through_its_map(tmp_path, capsys):
    out = tmp_path / "demo.wav"
    status = main(["midi", str(DEMO / "demo-song.mid"), "--map", str(DEMO / "demo-map.yaml"), "-o", str(out),
                   "--sample-rate", "8000", "--quiet"])
    captured = capsys.readouterr()
    assert status == 0, captured.err
    assert "92 notes" in captured.out and "stereo" in captured.out
    assert "still held" not in captured.err and "stress" not in captured.err
    assert soundfile.info(out).channels == 2


# --------------------------------------------------------------------------- bad input


def smf(*tracks, fmt=1, division=96, n_tracks=None):
    """Raw MIDI bytes from raw track bodies."""
    header = b"MThd" + struct.pack(">LHHh", 6, fmt, len(tracks) if n_tracks is None else n_tracks, division)
    return header + b"".join(b"MTrk" + struct.pack(">L", len(t)) + t for t in tracks)


NOTE = bytes([0, 0x90, 57, 100, 48, 57, 0])  # note on; 48 ticks later a running-status note-on, velocity 0
EOT = bytes([0, 0xFF, 0x2F, 0])
SMPTE_26 = struct.unpack(">h", bytes([256 - 26, 40]))[0]

BAD_FILES = [
    pytest.param(b"hello, this is not MIDI", r"not a Standard MIDI File", id="not-midi"),
    pytest.param(b"", r"not a Standard MIDI File", id="empty"),
    pytest.param(smf(NOTE + EOT)[:-3], r"track 1 declares 11 bytes but only 8 remain: the file is truncated", id="truncated"),
    pytest.param(smf(NOTE + EOT)[:11], r"header chunk is cut short", id="truncated-header"),
    pytest.param(smf(NOTE + EOT, n_tracks=2), r"promises 2 tracks but the file holds 1", id="missing-track"),
    pytest.param(smf(bytes([0, 0x90, 57, 200]) + EOT), r"track 1, byte 25: byte 0xc8 .* above 127", id="data-byte-over-127"),
    pytest.param(smf(bytes([0, 57, 100]) + EOT), r"track 1, byte 23: data byte 0x39 where a status byte is needed",
                 id="running-status-without-status"),
    pytest.param(smf(bytes([0, 0x90, 57, 100, 0, 0xF0, 2, 1, 0xF7, 48, 57, 0]) + EOT),
                 r"a sysex event before it cancelled running status", id="running-status-after-sysex"),
    pytest.param(smf(bytes([0, 0xF8]) + NOTE + EOT), r"status byte 0xf8 \(a real-time message\)", id="realtime-byte"),
    pytest.param(smf(bytes([0, 0xFF, 0x01, 5, 65, 65])), r"runs past the end of its track", id="meta-past-end"),
    pytest.param(smf(bytes([0, 0x90, 57])), r"ends inside a channel message", id="message-past-end"),
    pytest.param(smf(bytes([0x81, 0x81, 0x81, 0x81, 0x01, 0x90, 57, 100]) + EOT), r"over 4 bytes", id="long-delta"),
    pytest.param(smf(NOTE + EOT, fmt=2), r"format 2 \(independent sequences\) is not supported", id="format-2"),
    pytest.param(smf(NOTE + EOT, division=0), r"0 ticks per quarter note", id="division-0"),
    pytest.param(smf(NOTE + EOT, division=SMPTE_26), r"SMPTE division with 26 frames/s", id="smpte-26-fps"),
    pytest.param(smf(bytes([0, 0xFF, 0x51, 3, 0, 0, 0]) + NOTE + EOT), r"a tempo of 0 us", id="zero-tempo"),
    pytest.param(smf(bytes([0, 0xFF, 0x51, 3, 7, 0xA1, 0x20]) + EOT), r"no notes to play", id="no-notes"),
]


@pytest.mark.parametrize("content, phrase", BAD_FILES)
def test_bad_midi_files(tmp_path, monkeypatch, capsys, patch, content, phrase):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "bad.mid").write_bytes(content)
    before = sorted(p.name for p in tmp_path.iterdir())
    status = main(["midi", "bad.mid", "--patch", str(patch)])  # default output: renders/bad.wav
    err = capsys.readouterr().err
    assert status == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err, err
    assert lines[0].startswith("synth: error: bad.mid: ")
    assert re.search(phrase, lines[0]), lines[0]
    assert sorted(p.name for p in tmp_path.iterdir()) == before  # no renders/ folder, no temporary file


@pytest.mark.parametrize(
    "name, phrase",
    [("missing.mid", "file not found"), ("folder.mid", "is a folder")],
)
def test_missing_or_folder(tmp_path, capsys, patch, name, phrase):
    (tmp_path / "folder.mid").mkdir()
    status = main(["midi", str(tmp_path / name), "--patch", str(patch), "-o", str(tmp_path / "x.wav")])
    assert status == 2 and phrase in capsys.readouterr().err
    assert not (tmp_path / "x.wav").exists()


def test_read_midi_raises_input_file_error(tmp_path):
    (tmp_path / "bad.mid").write_bytes(b"MThd")
    with pytest.raises(InputFileError, match="not a Standard MIDI File|cut short"):
        read_midi(tmp_path / "bad.mid")


def test_tolerated_oddities(tmp_path, patch):
    # Running status across a meta event, note-on velocity 0 as note-off, an
    # unknown chunk (skipped), no end-of-track event.
    body = bytes([0, 0x90, 57, 100, 0, 0xFF, 0x01, 2, 65, 65, 48, 57, 0])
    data = smf(body)
    data = data[:14] + b"XTRA" + struct.pack(">L", 3) + b"abc" + data[14:]
    (tmp_path / "odd.mid").write_bytes(data)
    midi = read_midi(tmp_path / "odd.mid")
    performance = perform(midi, sample_rate=RATE)
    assert len(performance.notes) == 1 and performance.warnings == ()
    assert performance.notes[0].damper == round(48 * 0.5 / 96 * RATE)


def test_hanging_notes_and_pedal_closed_at_the_end(tmp_path, patch, capsys):
    path = song(tmp_path / "h.mid", [(0, cc(64, 127)), (0, on(57)), (0, on(64)), (20, off(64)), (50, cc(7, 100))])
    out = tmp_path / "h.wav"
    assert main(["midi", str(path), "--patch", str(patch), "-o", str(out), "--quiet"]) == 0
    err = capsys.readouterr().err
    assert "1 note still held at the end of the file (0.500 s) was released there: channel 1 A3" in err
    assert "sustain pedal was still down at the end of the file on channel 1; lifted there" in err
    data, rate = read_wav(out)
    assert fundamental_t60(data, rate, 0.54, 0.80) == pytest.approx(0.25, rel=0.1)


MAP_CASES = [
    pytest.param("channels:\n  17: {patch: string.yaml}\n", 2, "channels.17", r"not a MIDI channel: channels are numbered 1-16", id="channel-17"),
    pytest.param("channels:\n  0: {patch: string.yaml}\n", 2, "channels.0", r"numbered 1-16", id="channel-0"),
    pytest.param("channels:\n  one: {patch: string.yaml}\n", 2, "channels.one", r"'one' is not a MIDI channel", id="channel-name"),
    pytest.param("channels:\n  1: string.yaml\n", 2, "channels.1", r"must be a mapping with patch", id="entry-not-mapping"),
    pytest.param("channels:\n  1: {gain: -3 dB}\n", 2, "channels.1.patch", r"missing required key", id="entry-no-patch"),
    pytest.param("channels:\n  1: {patch: string.yaml, pann: 0.5}\n", 2, "channels.1.pann", r"did you mean 'pan'", id="entry-unknown-key"),
    pytest.param("channels:\n  1: {patch: string.yaml, pan: 2}\n", 2, "channels.1.pan", r"must be <= 1", id="pan-range"),
    pytest.param("channels:\n  1: {patch: string.yaml, gain: -3 dBFS}\n", 2, "channels.1.gain", r"unit 'dBFS' is not allowed", id="gain-unit"),
    pytest.param("channels:\n  1: {patch: nowhere.yaml}\n", 2, "channels.1.patch", r"patch file .*nowhere.yaml' not found", id="patch-missing"),
    pytest.param("chanels:\n  1: {patch: string.yaml}\n", 1, "chanels", r"did you mean 'channels'", id="unknown-top-key"),
    pytest.param("render: {bit_depth: 20}\nchannels:\n  1: {patch: string.yaml}\n", 1, "render.bit_depth", r"20 is not allowed", id="render-bit-depth"),
    pytest.param("render: {sample_rate: 8000}\n", 1, None, r"gives no patch", id="no-entries"),
    pytest.param("tracks:\n  0: {patch: string.yaml}\n", 2, "tracks.0", r"not a track", id="track-0"),
    pytest.param("channels:\n  1: {patch: string.yaml}\n", 1, "channels", r"no patch for channel 3 \(1 note\)", id="unmapped-channel"),
]


@pytest.mark.parametrize("text, line, key, phrase", MAP_CASES)
def test_bad_map_files(tmp_path, monkeypatch, capsys, patch, text, line, key, phrase):
    monkeypatch.chdir(tmp_path)
    write_map(tmp_path, text)
    song(tmp_path / "song.mid", [(0, on(57, 100, 0)), (10, on(60, 100, 2)), (30, off(57, 0)), (30, off(60, 2))])
    before = sorted(p.name for p in tmp_path.iterdir())
    status = main(["midi", "song.mid", "--map", "map.yaml"])
    err = capsys.readouterr().err
    assert status == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err, err
    where = f"synth: error: map.yaml:{line}: " + (f"{key}: " if key else "")
    assert lines[0].startswith(where), lines[0]
    assert re.search(phrase, lines[0]), lines[0]
    assert sorted(p.name for p in tmp_path.iterdir()) == before


@pytest.mark.parametrize(
    "options, key, phrase",
    [
        (["--a4", "20"], "--a4", r"must be >= 100 Hz"),
        (["--a4", "loud"], "--a4", r"cannot read 'loud'"),
        (["--tail", "-1"], "--tail", r"must be >= 0"),
        (["--sample-rate", "10"], "--sample-rate", r"must be >= 1000 Hz"),
        (["--bit-depth", "12"], "--bit-depth", r"12 is not allowed"),
    ],
)
def test_bad_options(tmp_path, capsys, patch, options, key, phrase):
    path = song(tmp_path / "o.mid", [(0, on(57)), (10, off(57))])
    for source in (["--patch", str(patch)], ["--map", str(write_map(tmp_path, f"default: {{patch: {patch.name}}}\n"))]):
        status = main(["midi", str(path), *source, "-o", str(tmp_path / "o.wav"), *options])
        err = capsys.readouterr().err
        assert status == 2 and err.startswith(f"synth: error: command line: {key}: "), err
        assert re.search(phrase, err), err
    assert not (tmp_path / "o.wav").exists()


def test_song_too_large_for_memory(tmp_path, patch, capsys):
    # Stereo (CC 10) at 768 kHz with an hour of tail: 2 x 4 bytes x 768000 x 3600 s = 20.6 GiB.
    path = song(tmp_path / "big.mid", [(0, cc(10, 20)), (0, on(57)), (10, off(57))])
    status = main(["midi", str(path), "--patch", str(patch), "-o", str(tmp_path / "big.wav"),
                   "--sample-rate", "768000", "--tail", "3600"])
    err = capsys.readouterr().err
    assert status == 2 and "the song buffer would need 20.6 GiB" in err
    assert not (tmp_path / "big.wav").exists()


def test_unreachable_note_names_the_note(tmp_path, capsys):
    # A thick steel string cannot sound far below its stiffness floor.
    stiff = tmp_path / "stiff.yaml"
    stiff.write_text(STRING.format(kind="pluck").replace("material: nylon", "material: music-wire")
                     .replace("diameter: 0.8 mm", "diameter: 6 mm").replace("length: 650 mm", "length: 100 mm"))
    path = song(tmp_path / "u.mid", [(0, on(21)), (10, off(21))])
    status = main(["midi", str(path), "--patch", str(stiff), "-o", str(tmp_path / "u.wav")])
    err = capsys.readouterr().err
    assert status == 2 and "note A0 (key 21, velocity 100) on channel 1 at 0.000 s" in err and "stiffness" in err
    assert "resonator.pitch" in err


def _decay_by_bisection(abs_amp, sigma, level):
    """Reference: the smallest whole n with sum |a| e^(-sigma n) <= level, by plain bisection."""
    def envelope(n):
        return float(np.sum(abs_amp * np.exp(-sigma * n)))

    if envelope(0) <= level:
        return 0.0
    loud = abs_amp * abs_amp.size > level
    low, high = 0, math.ceil(float(np.max(np.log(abs_amp[loud] * abs_amp.size / level) / sigma[loud])))
    while high - low > 1:
        middle = (low + high) // 2
        low, high = (low, middle) if envelope(middle) <= level else (middle, high)
    return float(high)


def test_voice_end_newton_matches_bisection(rng):
    """decay_samples (Newton on a convex decreasing log-envelope) gives bisection's whole sample, every time."""
    for _ in range(2000):
        m = int(rng.integers(1, 120))
        amp = rng.uniform(0.0, 1.0, m) ** rng.uniform(0.5, 4.0)
        sigma = 10.0 ** rng.uniform(-7.0, -1.0, m)
        level = 10.0 ** rng.uniform(-8.0, 0.0) * float(amp.sum())
        assert voices.decay_samples(amp, sigma, level) == _decay_by_bisection(amp, sigma, level)
