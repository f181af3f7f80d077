"""Write ``demo-song.mid``: a short piece of our own for ``synth midi``.

"Workbench Air" -- eight bars in D minor, 4/4, for three of the example
string patches (see ``demo-map.yaml``): a plucked-nylon melody (channel 1),
a steel bass string (channel 2) and hammered bronze chords under the sustain
pedal (channel 3).  It exercises what the MIDI renderer does: a tempo change
mid-way and a ritardando (tempo events in a conductor track), pedal changes
every bar, a pitch bend and a vibrato, and a range of velocities.  Ranges
stay where the retuned strings keep a safe working stress.

Run ``python patches/midi/make_demo_song.py`` to rewrite the file; the
output is the same bytes every time (a test checks the committed file).
"""
from __future__ import annotations

import math
import sys
from pathlib import Path

import mido

TICKS = 480  # ticks per quarter note
BAR = 4 * TICKS
OUT = Path(__file__).with_name("demo-song.mid")

# (start in quarters, length in quarters, MIDI key, velocity)
MELODY = [
    (0, 1, 69, 84), (1, 0.5, 65, 70), (1.5, 0.5, 67, 74), (2, 2, 69, 90),
    (4, 1, 70, 88), (5, 0.5, 69, 72), (5.5, 0.5, 67, 70), (6, 2, 65, 80),
    (8, 1, 65, 78), (9, 0.5, 67, 76), (9.5, 0.5, 69, 82), (10, 1.5, 72, 100), (11.5, 0.5, 70, 76),
    (12, 1, 69, 86), (13, 1, 67, 80), (14, 2, 64, 92),
    (16, 0.5, 69, 96), (16.5, 0.5, 70, 90), (17, 0.5, 69, 86), (17.5, 0.5, 67, 80), (18, 1, 65, 84), (19, 1, 62, 78),
    (20, 1.5, 67, 88), (21.5, 0.5, 65, 74), (22, 1, 62, 80), (23, 1, 58, 76),
    (24, 1, 61, 82), (25, 1, 64, 86), (26, 1, 67, 92), (27, 1, 69, 104),
    (28, 4, 62, 88),
]
BASS = [(4 * bar + beat, 2, key, 86 if beat == 0 else 72)
        for bar, (root, fifth) in enumerate([(38, 33), (34, 29), (29, 36), (36, 31), (38, 33), (31, 38), (33, 28), (26, 26)])
        for beat, key in ((0, root), (2, fifth))]
CHORDS = [(53, 57, 62), (53, 58, 62), (53, 57, 60), (52, 55, 60), (53, 57, 62), (55, 58, 62), (52, 57, 61), (50, 57, 62)]
TEMPO_BPM = [(0, 96), (16, 104), (24, 96), (28, 92), (29, 86), (30, 78), (31, 70)]  # (quarter, BPM)


def _ticks(quarters):
    return int(round(quarters * TICKS))


def _track(name, events):
    """A MidiTrack from (absolute tick, message) pairs, ordered stably by tick."""
    track = mido.MidiTrack([mido.MetaMessage("track_name", name=name, time=0)])
    now = 0
    for tick, message in sorted(events, key=lambda event: event[0]):
        track.append(message.copy(time=tick - now))
        now = tick
    return track


def _notes(notes, channel, *, roll=0):
    events = []
    for start, length, key, velocity in notes:
        on = _ticks(start) + roll
        events.append((on, mido.Message("note_on", channel=channel, note=key, velocity=velocity)))
        events.append((_ticks(start + length) - 10, mido.Message("note_off", channel=channel, note=key, velocity=64)))
    return events


def _chords(channel):
    """Rolled chords on beats 1 and 3, short notes held by the pedal, pedal changed each bar."""
    events = []
    for bar, chord in enumerate(CHORDS):
        start = bar * BAR
        events.append((start, mido.Message("control_change", channel=channel, control=64, value=0)))
        events.append((start + 40, mido.Message("control_change", channel=channel, control=64, value=127)))
        strikes = ((0, 76), (2, 58)) if bar < len(CHORDS) - 1 else ((0, 80),)
        for beat, velocity in strikes:
            for k, key in enumerate(chord):
                notes = [(bar * 4 + beat, 0.5, key, velocity - 4 * k)]
                events.extend(_notes(notes, channel, roll=25 * k))
    events.append((len(CHORDS) * BAR + 2 * TICKS, mido.Message("control_change", channel=channel, control=64, value=0)))
    return events


def _bends(channel):
    """A bend up a semitone and back on bar 4's long note, a vibrato on the last note."""
    events = []
    start = _ticks(14.5)
    for step in range(25):  # up over half a beat, hold, back over half a beat
        x = min(step, 24 - step, 8) / 8.0
        events.append((start + step * 24, mido.Message("pitchwheel", channel=channel, pitch=int(round(4096 * x)))))
    start = _ticks(29)
    for step in range(60):  # 5 Hz at 92-70 BPM: about 0.15 semitone either way
        pitch = int(round(600 * math.sin(2 * math.pi * step / 12)))
        events.append((start + step * 24, mido.Message("pitchwheel", channel=channel, pitch=pitch)))
    events.append((_ticks(32), mido.Message("pitchwheel", channel=channel, pitch=0)))
    return events


def build_song():
    """The demo song as a mido.MidiFile (format 1, conductor track first)."""
    song = mido.MidiFile(type=1, ticks_per_beat=TICKS)
    conductor = [(0, mido.MetaMessage("time_signature", numerator=4, denominator=4))]
    conductor += [(_ticks(q), mido.MetaMessage("set_tempo", tempo=mido.bpm2tempo(bpm))) for q, bpm in TEMPO_BPM]
    conductor.append((len(CHORDS) * BAR + 3 * TICKS, mido.MetaMessage("end_of_track")))  # room to ring out
    song.tracks.append(_track("conductor", conductor))
    song.tracks.append(_track("melody", _notes(MELODY, 0) + _bends(0)))
    song.tracks.append(_track("bass", _notes(BASS, 1)))
    song.tracks.append(_track("chords", _chords(2)))
    return song


def main(argv=None):
    path = Path(argv[0]) if argv else OUT
    build_song().save(path)
    print(f"wrote {path}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
