"""Standard MIDI Files: bytes -> checked, merged events and an exact tempo map.

Files of format 0 and 1 are read with mido, one track at a time, after a
structural check of every chunk and event of our own, so a truncated or
corrupt file is named with the track and byte where it breaks.  Running
status carries across meta events, as tolerant readers do; a sysex event
cancels it.  Chunks other than ``MTrk`` are skipped, as the specification
asks of readers.  Format 2 (independent sequences) is refused.

mido decodes only what synth uses: channel messages, Set Tempo and the track
name.  Sysex and every other meta event (key and time signatures, text,
SMPTE offset, ...) are skipped by the check, their delta times kept, so a
malformed one that mido would reject does not stop a song whose notes are
fine; a Set Tempo that does not hold 3 bytes is an error.

Limits, checked before anything is decoded: files over :data:`MAX_MIDI_BYTES`
and paths that are not regular files are not read; a file with more than
:data:`MAX_MIDI_NOTES` notes or :data:`MAX_MIDI_EVENTS` events is refused
(the walk stops at the event limit).

Timing
------
The arithmetic of the Standard MIDI Files 1.0 specification (part of the
MIDI 1.0 Detailed Specification, MMA), done here in exact integers:

* division > 0 is ticks per quarter note; a Set Tempo meta event (FF 51 03)
  gives microseconds per quarter note from its tick on, in whichever track it
  sits (the tracks of a format-1 file share one tempo map); until the first
  one the tempo is 500 000 us (120 BPM).  A tick's time is the sum over tempo
  segments of ``ticks * tempo / (division * 1e6)`` seconds;
* division < 0 is SMPTE time: its high byte is -frames per second (24, 25,
  29 meaning 29.97 drop-frame, 30), its low byte ticks per frame, and a tick
  lasts ``1 / (fps * ticks_per_frame)`` s whatever tempo events say.

:meth:`TempoMap.sample` puts a tick on the nearest sample (halves round up).
"""
from __future__ import annotations

import bisect
import io
import struct
from dataclasses import dataclass
from fractions import Fraction

import mido

from .errors import InputFileError
from .yamlio import read_input_file

__all__ = ["DEFAULT_TEMPO_US", "SMPTE_RATES", "TempoMap", "MidiSong", "tempo_map", "read_midi",
           "MAX_MIDI_BYTES", "MAX_MIDI_NOTES", "MAX_MIDI_EVENTS"]

DEFAULT_TEMPO_US = 500_000  # us per quarter note before any Set Tempo (SMF 1.0: 120 BPM)
SMPTE_RATES = {24: (24, 1), 25: (25, 1), 29: (30000, 1001), 30: (30, 1)}  # fps byte -> frames/s as (num, den)
CHANNEL_DATA_BYTES = {0x8: 2, 0x9: 2, 0xA: 2, 0xB: 2, 0xC: 1, 0xD: 1, 0xE: 2}  # data bytes by status nibble
USED_TYPES = frozenset({"note_on", "note_off", "control_change", "pitchwheel", "set_tempo"})
KEPT_META = frozenset({0x03, 0x51})  # meta types handed to mido: track name, Set Tempo (the rest is skipped)
SET_TEMPO = 0x51
#: Most notes (note-ons with velocity > 0) a file may hold.  At 20 notes a
#: second, a dense performance, 200 000 notes last 2 h 47 min.  A file of
#: 200 000 notes (400 000 events) reads in 8 s, 203 MB peak RSS, nearly all of
#: it mido's decoding, which grows with the count; the count is checked before.
MAX_MIDI_NOTES = 200_000
#: Most events of any kind (notes, controllers, pitch bends, meta, sysex) a
#: file may hold: the note-ons and note-offs of MAX_MIDI_NOTES notes, 400 000,
#: and as many again and more for controllers.  The check walks about 700 000
#: events a second and stops here (a 16 MB file of 2.7 million notes is
#: refused in 1.4 s); a file at the limit reads in 17 s, 465 MB peak RSS
#: (measured: 200 000 notes and 600 000 controllers).
MAX_MIDI_EVENTS = 1_000_000
#: Largest MIDI file read: a file at the event limit, a million channel
#: messages of at most 7 bytes (4-byte delta, status, 2 data bytes), is under
#: 7 MB; 16 MiB leaves room for sysex and text, and bounds the read's memory.
MAX_MIDI_BYTES = 16 * 2**20


@dataclass(frozen=True)
class TempoMap:
    """Tick -> time of one file: ``seconds = acc(tick) / unit``, exactly.

    ``acc`` is sum(ticks x tempo in us) over tempo segments (for SMPTE time,
    ticks x the frame-rate denominator), an integer; ``unit`` is division x
    1e6 (SMPTE: fps numerator x ticks per frame).
    """

    change_ticks: tuple
    rates: tuple
    start_acc: tuple
    unit: int

    def _acc(self, tick):
        i = max(0, bisect.bisect_right(self.change_ticks, tick) - 1)
        return self.start_acc[i] + (tick - self.change_ticks[i]) * self.rates[i]

    def seconds(self, tick):
        """Time of `tick` in seconds (exact, as a Fraction)."""
        return Fraction(self._acc(tick), self.unit)

    def sample(self, tick, sample_rate):
        """Nearest sample index of `tick` at `sample_rate` (halves round up)."""
        rate = Fraction(sample_rate)
        numerator = self._acc(tick) * rate.numerator
        denominator = self.unit * rate.denominator
        return (2 * numerator + denominator) // (2 * denominator)


def tempo_map(division, tempo_changes=(), *, file="<midi>"):
    """The :class:`TempoMap` of a file's `division` and its (tick, us per quarter) changes."""
    if division < 0:
        fps, per_frame = -(division >> 8), division & 0xFF
        if fps not in SMPTE_RATES or per_frame == 0:
            raise InputFileError(f"SMPTE division with {fps} frames/s and {per_frame} ticks/frame is not valid "
                                 f"(frame rates: 24, 25, 29, 30; ticks per frame >= 1)", file=file)
        numerator, denominator = SMPTE_RATES[fps]
        return TempoMap((0,), (denominator,), (0,), numerator * per_frame)
    if division == 0:
        raise InputFileError("the header gives 0 ticks per quarter note; the file has no timing", file=file)
    ticks, rates = [0], [DEFAULT_TEMPO_US]
    for tick, tempo in tempo_changes:
        if tick == ticks[-1]:
            rates[-1] = tempo
        elif tempo != rates[-1]:
            ticks.append(tick)
            rates.append(tempo)
    acc = [0]
    for i in range(1, len(ticks)):
        acc.append(acc[-1] + (ticks[i] - ticks[i - 1]) * rates[i - 1])
    return TempoMap(tuple(ticks), tuple(rates), tuple(acc), division * 1_000_000)


@dataclass(frozen=True)
class MidiSong:
    """A read MIDI file: merged events and the tempo map.

    Attributes
    ----------
    path : str
    format : {0, 1}
    division : int
        Ticks per quarter note, or negative for SMPTE time.
    track_names : tuple of (str or None)
        One per track.
    events : tuple of (tick, track, mido.Message)
        Note, controller, pitch-bend and tempo events of every track, merged
        in time order (ties: track order, then file order); tracks count from 0.
    end_tick : int
        Tick of the last event of the longest track (its end of track).
    tempo : TempoMap
    """

    path: str
    format: int
    division: int
    track_names: tuple
    events: tuple
    end_tick: int
    tempo: TempoMap


def _file_error(file, message):
    return InputFileError(message, file=file)


def _read_file(path):
    return read_input_file(path, limit=MAX_MIDI_BYTES, kind="MIDI", folder_hint="is a folder, not a MIDI file")


def _scan_chunks(data, file):
    """(format, division, [(start, end) of each MTrk body]) of a whole file."""
    if len(data) < 8 or data[:4] != b"MThd":
        raise _file_error(file, "not a Standard MIDI File (it does not start with an 'MThd' header)")
    (length,) = struct.unpack(">L", data[4:8])
    if length < 6 or len(data) < 8 + length:
        raise _file_error(file, "the MIDI header chunk is cut short: the file is truncated or corrupt")
    fmt, n_tracks, division = struct.unpack(">HHh", data[8:14])
    position, tracks = 8 + length, []
    while position < len(data) and len(tracks) < n_tracks:
        if len(data) - position < 8:
            raise _file_error(file, f"the file ends inside a chunk header after track {len(tracks)}: it is truncated")
        kind, size = struct.unpack(">4sL", data[position : position + 8])
        body = position + 8
        if body + size > len(data):
            raise _file_error(file, f"track {len(tracks) + 1} declares {size} bytes but only {len(data) - body} remain: "
                                    "the file is truncated")
        if kind == b"MTrk":
            tracks.append((body, body + size))
        position = body + size
    if len(tracks) < n_tracks:
        raise _file_error(file, f"the header promises {n_tracks} tracks but the file holds {len(tracks)}: "
                                "it is truncated or corrupt")
    return fmt, division, tracks


def _varlen(data, position, end):
    """(value, next position) of a variable-length quantity (at most 4 bytes), or None if cut short."""
    value = 0
    for k in range(4):
        if position + k >= end:
            return None
        byte = data[position + k]
        value = (value << 7) | (byte & 0x7F)
        if byte < 0x80:
            return value, position + k + 1
    raise ValueError("a variable-length number runs over 4 bytes")


def _varlen_bytes(value):
    """The variable-length quantity of `value` >= 0 (as many bytes as it needs; mido reads any length)."""
    out = [value & 0x7F]
    value >>= 7
    while value:
        out.append(0x80 | (value & 0x7F))
        value >>= 7
    return bytes(reversed(out))


class _Tally:
    """Events and notes counted over every track of a file, against MAX_MIDI_EVENTS and MAX_MIDI_NOTES."""

    def __init__(self, file):
        self.file, self.events, self.notes = file, 0, 0

    def too_many_events(self):
        """The error once ``events`` has passed MAX_MIDI_EVENTS (the walk stops there)."""
        if self.notes > MAX_MIDI_NOTES:
            return _file_error(self.file, f"holds more than {MAX_MIDI_NOTES} notes ({self.notes} in its first "
                                          f"{MAX_MIDI_EVENTS} events): split the song into shorter files")
        return _file_error(self.file, f"holds more than {MAX_MIDI_EVENTS} events (notes, controllers, meta "
                                      "events), more than synth reads from one file: split the song into "
                                      "shorter files")

    def check_notes(self):
        if self.notes > MAX_MIDI_NOTES:
            raise _file_error(self.file, f"holds {self.notes} notes, more than the {MAX_MIDI_NOTES} synth plays "
                                         "from one file: split the song into shorter files")


def _check_track(data, start, end, number, file, tally):
    """Walk the events of one track; raise InputFileError naming the byte where it breaks.

    Returns the body of an MTrk chunk holding only the events synth uses
    (channel messages, each with its status byte, Set Tempo and the track
    name), the delta times of skipped events carried to the next kept one,
    and an end of track at the tick of the track's last event.  Counts every
    event and note into `tally`.
    """
    position, running, cancelled = start, None, False
    kept, pending = bytearray(), 0  # pending: ticks since the last kept event
    events, notes, most_events = tally.events, tally.notes, MAX_MIDI_EVENTS

    def fail(at, what):
        raise InputFileError(f"track {number}, byte {at}: {what}", file=file)

    while position < end:
        at = position
        try:
            read = _varlen(data, position, end)
        except ValueError as error:
            fail(at, f"{error}: the track is corrupt")
        if read is None or read[1] >= end:
            fail(at, "the track ends inside an event: the file is truncated or corrupt")
        events += 1
        if events > most_events:
            tally.events, tally.notes = events, notes
            raise tally.too_many_events()
        pending += read[0]
        position = read[1]
        status = data[position]
        if status in (0xF0, 0xF7, 0xFF):
            head = position + (2 if status == 0xFF else 1)
            try:
                read = _varlen(data, head, end) if head <= end else None
            except ValueError as error:  # the event's length itself is corrupt
                fail(at, f"{error}: the track is corrupt")
            if read is None or read[1] + read[0] > end:
                fail(at, "a sysex or meta event runs past the end of its track: the file is truncated or corrupt")
            if status == 0xFF and data[position + 1] in KEPT_META:
                if data[position + 1] == SET_TEMPO and read[0] != 3:
                    fail(at, f"a Set Tempo meta event holds {read[0]} bytes, not 3: the file is corrupt")
                kept += _varlen_bytes(pending) + data[position : read[1] + read[0]]
                pending = 0
            position = read[1] + read[0]
            if status != 0xFF:
                running, cancelled = None, True
            continue
        if status >= 0xF0:
            kind = "real-time" if status >= 0xF8 else "system common"
            fail(position, f"status byte 0x{status:02x} (a {kind} message) cannot appear in a MIDI file")
        if status < 0x80:
            if running is None:
                why = " (a sysex event before it cancelled running status)" if cancelled else ""
                fail(position, f"data byte 0x{status:02x} where a status byte is needed, and no running status "
                               f"is in effect{why}: the file is corrupt")
            first = position
        else:
            running, first = status, position + 1
        count = CHANNEL_DATA_BYTES[running >> 4]
        if first + count > end:
            fail(at, "the track ends inside a channel message: the file is truncated or corrupt")
        for k in range(first, first + count):
            if data[k] >= 0x80:
                fail(k, f"byte 0x{data[k]:02x} inside a channel message is above 127: the file is corrupt")
        if running >> 4 == 0x9 and data[first + 1] > 0:
            notes += 1
        if pending < 0x80:
            kept.append(pending)
        else:
            kept += _varlen_bytes(pending)
        kept.append(running)
        kept += data[first : first + count]
        pending = 0
        position = first + count
    tally.events, tally.notes = events, notes
    return bytes(kept + _varlen_bytes(pending) + b"\xff\x2f\x00")


def _decode_track(body, division, number, file):
    """The mido track of one checked and cleaned MTrk body (see :func:`_check_track`)."""
    blob = struct.pack(">4sLHHh4sL", b"MThd", 6, 0, 1, division, b"MTrk", len(body)) + body
    try:
        return mido.MidiFile(file=io.BytesIO(blob)).tracks[0]
    except Exception:  # noqa: BLE001 - the check should have caught it; still a file the user must fix
        raise InputFileError(f"track {number} cannot be decoded: the file is corrupt", file=file) from None


def read_midi(path):
    """Read a Standard MIDI File (format 0 or 1).

    Returns
    -------
    MidiSong

    Raises
    ------
    InputFileError
        Missing, unreadable, truncated or corrupt files, format 2, bad
        division or tempo; the message names the file, track and byte.
        Paths that are not regular files, files over MAX_MIDI_BYTES and
        files with more than MAX_MIDI_NOTES notes or MAX_MIDI_EVENTS events.
    """
    file = str(path)
    data = _read_file(path)
    fmt, division, chunks = _scan_chunks(data, file)
    if fmt == 2:
        raise _file_error(file, "format 2 (independent sequences) is not supported: save each sequence as a "
                                "format 0 or 1 file")
    if fmt not in (0, 1):
        raise _file_error(file, f"unknown MIDI file format {fmt} (allowed: 0, 1)")
    tally = _Tally(file)
    bodies = [_check_track(data, start, end, number, file, tally) for number, (start, end) in enumerate(chunks, 1)]
    tally.check_notes()
    del data
    events, names, end_tick = [], [], 0
    for number, body in enumerate(bodies, start=1):
        tick, name = 0, None
        for message in _decode_track(body, division, number, file):
            tick += message.time
            if message.type == "track_name" and name is None:
                name = message.name
            elif message.type in USED_TYPES:
                events.append((tick, number - 1, message))
                if message.type == "set_tempo":
                    if message.tempo <= 0:
                        raise _file_error(file, f"track {number}: a tempo of 0 us per quarter note at tick {tick}")
        names.append(name)
        end_tick = max(end_tick, tick)
    events.sort(key=lambda event: (event[0], event[1]))
    tempos = [(tick, message.tempo) for tick, _, message in events if message.type == "set_tempo"]
    return MidiSong(file, fmt, division, tuple(names), tuple(events), end_tick, tempo_map(division, tempos, file=file))
