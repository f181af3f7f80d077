"""Standard MIDI Files: bytes -> checked, merged events and an exact tempo map.

Files of format 0 and 1 are read with mido, one track at a time, after a
structural check of every chunk and event of our own, so a truncated or
corrupt file is named with the track and byte where it breaks.  Running
status carries across meta events, as tolerant readers do; a sysex event
cancels it.  Chunks other than ``MTrk`` are skipped, as the specification
asks of readers.  Format 2 (independent sequences) is refused.

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
from pathlib import Path

import mido

from .errors import InputFileError

__all__ = ["DEFAULT_TEMPO_US", "SMPTE_RATES", "TempoMap", "MidiSong", "tempo_map", "read_midi"]

DEFAULT_TEMPO_US = 500_000  # us per quarter note before any Set Tempo (SMF 1.0: 120 BPM)
SMPTE_RATES = {24: (24, 1), 25: (25, 1), 29: (30000, 1001), 30: (30, 1)}  # fps byte -> frames/s as (num, den)
CHANNEL_DATA_BYTES = {0x8: 2, 0x9: 2, 0xA: 2, 0xB: 2, 0xC: 1, 0xD: 1, 0xE: 2}  # data bytes by status nibble
USED_TYPES = frozenset({"note_on", "note_off", "control_change", "pitchwheel", "set_tempo"})


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
    try:
        return Path(path).read_bytes()
    except FileNotFoundError:
        raise InputFileError("file not found", file=str(path)) from None
    except IsADirectoryError:
        raise InputFileError("is a folder, not a MIDI file", file=str(path)) from None
    except OSError as error:
        raise InputFileError(f"cannot read: {error.strerror or error}", file=str(path)) from None


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


def _check_track(data, start, end, number, file):
    """Walk the events of one track; raise InputFileError naming the byte where it breaks."""
    position, running, cancelled = start, None, False

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
        position = read[1]
        status = data[position]
        if status in (0xF0, 0xF7, 0xFF):
            head = position + (2 if status == 0xFF else 1)
            read = _varlen(data, head, end) if head <= end else None
            if read is None or read[1] + read[0] > end:
                fail(at, "a sysex or meta event runs past the end of its track: the file is truncated or corrupt")
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
        position = first + count


def _decode_track(data, start, end, division, number, file):
    """The mido track of one (checked) MTrk chunk."""
    blob = struct.pack(">4sLHHh", b"MThd", 6, 0, 1, division) + data[start - 8 : end]
    try:
        return mido.MidiFile(file=io.BytesIO(blob)).tracks[0]
    except Exception as error:  # noqa: BLE001 - any mido failure is a file the user must fix
        raise InputFileError(f"track {number} cannot be decoded ({type(error).__name__}: {error})", file=file) from None


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
    """
    file = str(path)
    data = _read_file(path)
    fmt, division, chunks = _scan_chunks(data, file)
    if fmt == 2:
        raise _file_error(file, "format 2 (independent sequences) is not supported: save each sequence as a "
                                "format 0 or 1 file")
    if fmt not in (0, 1):
        raise _file_error(file, f"unknown MIDI file format {fmt} (allowed: 0, 1)")
    events, names, end_tick = [], [], 0
    for number, (start, end) in enumerate(chunks, start=1):
        _check_track(data, start, end, number, file)
        tick, name = 0, None
        for message in _decode_track(data, start, end, division, number, file):
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
