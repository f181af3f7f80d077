"""MIDI file -> note events -> voices -> one WAV: the ``synth midi`` command.

The file itself is read by :mod:`synth.midifile` (format 0 and 1, exact
tick/tempo arithmetic, every onset on the nearest sample).

Performance
-----------
Events are taken in time order (ties: track order, then file order).  A
note-on (velocity > 0) strikes a voice of the note's patch, retuned and
voiced by :func:`synth.voicing.voice_patch` (cached per note and velocity).
Each (channel, key) is one physical object with one damper:

* note-off (or note-on with velocity 0) releases the key; when no note-on of
  that key is still held and the sustain pedal (CC 64 >= 64) is up, the
  damper falls on every voice of the key (``damping.release_t60``);
* pedal-up damps every key that is no longer held;
* a re-struck key that is still ringing is struck again as a real string or
  bar is: the new voice adds to the old one (the resonator is linear, so
  responses superpose) and the old voice keeps ringing until the key's
  damper falls for both;
* pitch bend (default range +-2 semitones; RPN 0 changes it) scales the
  frequencies of the channel's sounding voices, in steps of
  :data:`synth.voices.BEND_STEP_S` with continuous phase;
* CC 10 pans the notes struck after it; CC 123 (all notes off) releases every
  key of the channel, CC 120 (all sound off) damps them even under the pedal,
  CC 121 resets the pedal and the bend;
* at the end of the file, keys still held are released and a pedal still
  down is lifted (both reported).

Map file
--------
``--patch`` plays every channel; a map file (YAML) assigns patches::

    render: {sample_rate: 48000, bit_depth: 24, peak_db: -1.0}   # optional
    channels:             # MIDI channels numbered 1-16, as sequencers print them
      1: {patch: harp.yaml, pan: -0.3}          # pan -1 (left) .. 1 (right)
      2: {patch: bass.yaml, gain: -4 dB}
    tracks:               # optional: a track number (1 = first) or a track name
      Lead: {patch: bright.yaml}
    default: {patch: harp.yaml}                 # optional: every other note

Patch paths are relative to the map file.  A note takes the entry of its
track (by name, then number), else its channel, else ``default``; a note
with none is an error naming the channel.  A pan in the map wins over CC 10;
the output is stereo when any pan is set (map or CC 10), else mono.  Each
patch's ``render.duration`` is ignored (the file sets the length) and its
``render.sample_rate`` replaced by the output's.

The song buffer (float32, mono or stereo) is the only whole-song array;
voices are rendered one at a time, in segments of at most
:data:`synth.voices.MAX_SEGMENT_SAMPLES`, and added into it, and it is
normalised in place and written in chunks.
"""
from __future__ import annotations

import math
import re
import sys
from collections import defaultdict
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
from tqdm import tqdm

from .audio import check_output_path, make_output_folder
from .errors import InputFileError, PatchError, RenderError
from .midifile import MidiSong, TempoMap, read_midi, tempo_map
from .instrument_file import load_playable
from .patch import _RENDER_FIELDS, MEMORY_LIMIT_BYTES
from .schema import Field, Section, convert_option, read_section
from .units import counted, midi_to_note, short_repr
from .voices import (
    VoicingCache,
    pan_gains,
    quantise_bends,
    render_voice,
    voice_end,
    write_song,
)
from .yamlio import file_problem, load_yaml_file

__all__ = [
    "DEFAULT_BEND_RANGE",
    "MAX_TAIL_S",
    "MidiSong",
    "TempoMap",
    "NoteEvent",
    "Performance",
    "MapEntry",
    "ChannelMap",
    "MidiRender",
    "read_midi",
    "tempo_map",
    "perform",
    "load_channel_map",
    "render_midi",
]

DEFAULT_BEND_RANGE = 2.0  # semitones either way (General MIDI default; common practice)
PEDAL_DOWN = 64  # CC 64 values 64..127 mean the sustain pedal is down (MIDI 1.0)
MAX_TAIL_S = 60.0  # s; longest automatic tail after the end of the file
A4_RANGE_HZ = (100.0, 1000.0)  # Hz; allowed --a4


# ---------------------------------------------------------------- performance


@dataclass(frozen=True)
class NoteEvent:
    """One struck note: where it starts and when its damper falls.

    channel : int, 0..15 (mido numbering; messages print 1..16)
    track : int, 0-based
    key, velocity : int, MIDI 0..127 and 1..127
    onset, damper : int, samples (damper >= onset)
    pan : float or None
        CC 10 in effect at the onset, -1..1.
    """

    channel: int
    track: int
    key: int
    velocity: int
    onset: int
    damper: int
    pan: float | None


@dataclass(frozen=True)
class Performance:
    """What the file plays at one sample rate.

    notes : tuple of NoteEvent, in onset order
    bends : dict channel -> (samples, ratios), the raw pitch-bend changes
    end_sample : int, the end of the file
    sample_rate : float, Hz
    warnings : tuple of str
    """

    notes: tuple
    bends: dict
    end_sample: int
    sample_rate: float
    warnings: tuple


def cc_to_pan(value):
    """Pan position -1..1 of a CC 10 value (0 hard left, 64 centre, 127 hard right; common practice)."""
    return max(-1.0, min(1.0, (value - 64) / 63.0))


class _Player:
    """The state of a performance: keys, dampers, pedals, pans and bends per channel."""

    def __init__(self):
        self.notes = []  # [channel, track, key, velocity, onset, damper, pan]
        self.held = defaultdict(int)  # (channel, key) -> note-ons not yet released
        self.ringing = defaultdict(list)  # (channel, key) -> indices of notes whose damper is up
        self.pedal = [False] * 16
        self.pan = [None] * 16
        self.bend_range = [DEFAULT_BEND_RANGE] * 16
        self.rpn = [(127, 127)] * 16
        self.bends = defaultdict(list)  # channel -> [(sample, ratio)]

    def damp(self, key, sample):
        for index in self.ringing.pop(key, ()):
            self.notes[index][5] = sample

    def release(self, key, sample, *, every=False, under_pedal=False):
        """Release one strike of `key` (`every`: all of them); damp it when none is held.

        `under_pedal` damps even with the sustain pedal down (all sound off, end of file).
        """
        self.held[key] = 0 if every else max(self.held[key] - 1, 0)
        if self.held[key] == 0 and (under_pedal or not self.pedal[key[0]]):
            self.damp(key, sample)

    def pedal_up(self, channel, sample):
        self.pedal[channel] = False
        for key in [k for k in self.ringing if k[0] == channel and self.held[k] == 0]:
            self.damp(key, sample)

    def bend(self, channel, sample, pitch):
        semitones = self.bend_range[channel] * (pitch / 8192.0 if pitch < 0 else pitch / 8191.0)
        self.bends[channel].append((sample, 2.0 ** (semitones / 12.0)))

    def control(self, channel, control, value, sample):
        if control == 64:
            if value >= PEDAL_DOWN:
                self.pedal[channel] = True
            elif self.pedal[channel]:
                self.pedal_up(channel, sample)
        elif control == 10:
            self.pan[channel] = cc_to_pan(value)
        elif control in (101, 100):
            msb, lsb = self.rpn[channel]
            self.rpn[channel] = (value, lsb) if control == 101 else (msb, value)
        elif control in (99, 98):  # an NRPN selected: data entry no longer goes to an RPN
            self.rpn[channel] = (127, 127)
        elif control in (6, 38) and self.rpn[channel] == (0, 0):  # RPN 0: pitch-bend range
            whole, cents = divmod(round(self.bend_range[channel] * 100), 100)
            whole, cents = (value, cents) if control == 6 else (whole, value)
            self.bend_range[channel] = whole + cents / 100.0
        elif control in (120, 123):  # all sound off / all notes off
            for key in [k for k in set(self.held) | set(self.ringing) if k[0] == channel]:
                self.release(key, sample, every=True, under_pedal=control == 120)
        elif control == 121:  # reset all controllers
            if self.pedal[channel]:
                self.pedal_up(channel, sample)
            self.bend(channel, sample, 0)


def perform(song, *, sample_rate):
    """Play `song`'s events: notes with their onsets and dampers, bends, warnings.

    Parameters
    ----------
    song : MidiSong
    sample_rate : float, Hz

    Returns
    -------
    Performance
    """
    player = _Player()
    for tick, track, message in song.events:
        kind = message.type
        if kind == "set_tempo":
            continue
        sample = song.tempo.sample(tick, sample_rate)
        channel = message.channel
        if kind == "note_on" and message.velocity > 0:
            key = (channel, message.note)
            player.ringing[key].append(len(player.notes))
            player.held[key] += 1
            player.notes.append([channel, track, message.note, message.velocity, sample, None, player.pan[channel]])
        elif kind in ("note_on", "note_off"):
            player.release((channel, message.note), sample)
        elif kind == "control_change":
            player.control(channel, message.control, message.value, sample)
        elif kind == "pitchwheel":
            player.bend(channel, sample, message.pitch)
    end = song.tempo.sample(song.end_tick, sample_rate)
    warnings = _close_at_end(player, end, song.tempo.seconds(song.end_tick))
    notes = tuple(NoteEvent(*fields) for fields in player.notes)
    bends = {ch: (np.array([s for s, _ in b], np.int64), np.array([r for _, r in b])) for ch, b in player.bends.items()}
    return Performance(notes, bends, end, float(sample_rate), tuple(warnings))


def _close_at_end(player, end, end_s):
    """Release held keys and lift pedals at the end of the file; say what was closed."""
    warnings = []
    hanging = sorted(k for k, n in player.held.items() if n > 0)
    if hanging:
        shown = ", ".join(f"channel {c + 1} {midi_to_note(k)}" for c, k in hanging[:6]) + (" ..." if len(hanging) > 6 else "")
        count = sum(player.held[k] for k in hanging)
        verb = "was" if count == 1 else "were"
        warnings.append(f"{count} note{'s' * (count != 1)} still held at the end of the file ({float(end_s):.3f} s) "
                        f"{verb} released there: {shown}")
    pedals = [c + 1 for c in range(16) if player.pedal[c]]
    if pedals:
        warnings.append(f"the sustain pedal was still down at the end of the file on channel "
                        f"{', '.join(map(str, pedals))}; lifted there")
    for key in hanging:
        player.release(key, end, every=True, under_pedal=True)
    for key in list(player.ringing):
        player.damp(key, end)
    return warnings


# ---------------------------------------------------------------- map file


@dataclass(frozen=True)
class MapEntry:
    """Which patch plays a channel or track, how loud and where.

    patch_path : Path; gain_db : float, dB; pan : float -1..1 or None (CC 10 or centre)
    """

    patch_path: Path
    gain_db: float = 0.0
    pan: float | None = None


@dataclass(frozen=True)
class ChannelMap:
    """A parsed map file (or the single ``--patch``).

    channels : dict channel (0..15) -> MapEntry; tracks : dict 0-based index
    or track name -> MapEntry; default : MapEntry or None; render : dict of
    sample_rate, bit_depth, peak_db (None: not given); source : str or None.
    """

    channels: dict
    tracks: dict
    default: MapEntry | None
    render: dict
    source: str | None = None
    line: int | None = None

    def entry(self, channel, track, track_name):
        """The entry for a note (track name, track number, channel, default), or None."""
        for lookup, key in ((self.tracks, track_name), (self.tracks, track), (self.channels, channel)):
            if key is not None and key in lookup:
                return lookup[key]
        return self.default


_MAP_TOP = {"channels": Field("any"), "tracks": Field("any"), "default": Field("any"), "render": Field("any")}
_ENTRY_FIELDS = {
    "patch": Field("str", required=True, takes="a patch file (YAML), relative to the map file"),
    "gain": Field("level", default=0.0, low=-120.0, high=24.0),
    "pan": Field("number", low=-1.0, high=1.0, nullable=True),
}
_MAP_RENDER = {key: replace(_RENDER_FIELDS[key], default=None) for key in ("sample_rate", "bit_depth", "peak_db", "peak")}


def _entry(section, key, folder):
    if not isinstance(section.mapping.get(key), dict):
        raise section.error(key, "must be a mapping with patch (a patch file), optional gain (dB) and pan (-1..1)")
    child = section.child(key)
    values = read_section(child, _ENTRY_FIELDS)
    if not values["patch"].strip():
        raise child.error("patch", "is empty: name a patch file (YAML), relative to the map file")
    path = Path(values["patch"])
    path = path if path.is_absolute() else folder / path
    problem = file_problem(path)
    if problem == "a folder":
        raise child.error("patch", f"{str(path)!r} is a folder, not a file: name the patch file (YAML) inside it")
    if problem == "not found":
        raise child.error("patch", f"patch file {str(path)!r} not found (paths are relative to the map file)")
    if problem:
        raise child.error("patch", f"cannot use {short_repr(str(path))} as a patch file: {problem}")
    return MapEntry(path, values["gain"], values["pan"])


def load_channel_map(path):
    """Read a map file: MIDI channel (1-16) or track -> patch, gain, pan.

    Raises
    ------
    PatchError
        Naming the file, line and dotted key of the first problem.
    """
    file = str(path)
    mapping = load_yaml_file(path)
    if not isinstance(mapping, dict):
        raise PatchError("a map file must be a mapping with channels, tracks, default, render", file=file, line=1)
    top = Section(mapping, file=file)
    read_section(top, _MAP_TOP)
    folder = Path(path).parent
    channels, tracks = {}, {}
    if mapping.get("channels") is not None:
        section = top.child("channels")
        for key in section.mapping:
            if isinstance(key, bool) or not isinstance(key, int) or not 1 <= key <= 16:
                raise section.error(key, f"{key!r} is not a MIDI channel: channels are numbered 1-16 here, "
                                         "as sequencers print them")
            channels[key - 1] = _entry(section, key, folder)
    if mapping.get("tracks") is not None:
        section = top.child("tracks")
        for key in section.mapping:
            if isinstance(key, bool) or (isinstance(key, int) and key < 1) or not isinstance(key, (int, str)):
                raise section.error(key, f"{key!r} is not a track: give its number (1 = first track) or its name")
            tracks[key - 1 if isinstance(key, int) else key] = _entry(section, key, folder)
    default = _entry(top, "default", folder) if mapping.get("default") is not None else None
    if not channels and not tracks and default is None:
        raise PatchError("the map gives no patch: add channels:, tracks: or default:", file=file, line=1)
    render = {}
    if mapping.get("render") is not None:
        section = top.child("render")
        render = {k: v for k, v in read_section(section, _MAP_RENDER).items() if k in section.mapping}
    return ChannelMap(channels, tracks, default, render, file, getattr(mapping, "lines", {}).get("channels"))


# ---------------------------------------------------------------- rendering


@dataclass(frozen=True)
class MidiRender:
    """Summary of a MIDI render."""

    output: Path
    n_notes: int
    duration_s: float
    sample_rate: float
    bit_depth: int
    n_channels: int
    peak_dbfs: float
    true_peak_dbtp: float
    gain_db: float
    solves: int
    warnings: tuple


def _setup(patch, map_file, sample_rate, bit_depth):
    """(ChannelMap, {patch path: index}, [Patch at the output rate], output settings) of --patch or --map.

    Output settings (sample_rate, bit_depth, peak_db, peak) come from the
    command line, else from the ``--patch`` patch's ``render:`` or the map's
    ``render:`` (default 48 kHz, 24-bit, -1 dBFS on the true peak).
    """
    given = {"sample_rate": (sample_rate, "--sample-rate"), "bit_depth": (bit_depth, "--bit-depth")}
    given = {name: pair for name, pair in given.items() if pair[0] is not None}
    if patch is not None:
        loaded = load_playable(patch, overrides={f"render.{name}": pair for name, pair in given.items()})
        chmap = ChannelMap({}, {}, MapEntry(Path(patch)), {})
        settings = {"sample_rate": loaded.render.sample_rate, "bit_depth": loaded.render.bit_depth,
                    "peak_db": loaded.render.peak_db, "peak": loaded.render.peak}
        patches = {Path(patch): loaded}
    else:
        chmap = load_channel_map(map_file)
        settings = {name: _RENDER_FIELDS[name].default for name in ("sample_rate", "bit_depth", "peak_db", "peak")}
        settings.update(chmap.render)
        settings.update({name: convert_option(_RENDER_FIELDS[name], value, option) for name, (value, option) in given.items()})
        patches = {}
        for entry in [*chmap.channels.values(), *chmap.tracks.values(), *([chmap.default] if chmap.default else [])]:
            if entry.patch_path not in patches:
                patches[entry.patch_path] = load_playable(entry.patch_path)
    rate = settings["sample_rate"]
    order = {path: i for i, path in enumerate(patches)}
    voiced = [_at_rate(p, rate) for p in patches.values()]
    return chmap, order, voiced, settings


def _at_rate(playable, rate):
    """A patch or an instrument rendering at `rate`."""
    if hasattr(playable, "with_render"):
        return playable.with_render(sample_rate=rate)
    return replace(playable, render=replace(playable.render, sample_rate=rate))


def _in_ranges(performance, assigned, patches):
    """(performance, assigned) without the notes an instrument has no key for, and one warning per instrument."""
    outside = defaultdict(list)
    kept = []
    for i, (note, (index, _)) in enumerate(zip(performance.notes, assigned)):
        contains = getattr(patches[index], "contains", None)
        if contains is not None and not contains(note.key):
            outside[index].append(note.key)
        else:
            kept.append(i)
    if not outside:
        return performance, assigned, []
    warnings = []
    for index, keys in outside.items():
        shown = ", ".join(midi_to_note(k) for k in sorted(set(keys))[:6]) + (" ..." if len(set(keys)) > 6 else "")
        warnings.append(f"{patches[index].name} plays {patches[index].range_text}: {counted(len(keys), 'note')} "
                        f"outside it skipped ({shown})")
    notes = tuple(performance.notes[i] for i in kept)
    return replace(performance, notes=notes), [assigned[i] for i in kept], warnings


def _assign(performance, song, chmap, order):
    """Per note: (patch index, MapEntry); PatchError naming unmapped channels."""
    assigned, missing = [], defaultdict(int)
    for note in performance.notes:
        entry = chmap.entry(note.channel, note.track, song.track_names[note.track])
        if entry is None:
            missing[note.channel] += 1
            continue
        assigned.append((order[entry.patch_path], entry))
    if missing:
        shown = ", ".join(f"channel {c + 1} ({n} note{'s' * (n != 1)})" for c, n in sorted(missing.items()))
        raise PatchError(f"no patch for {shown}: add the channel (1-16) under channels:, or a default: entry",
                         file=chmap.source, line=chmap.line, key="channels")
    return assigned


def _note_context(note, seconds):
    return f"note {midi_to_note(note.key)} (key {note.key}, velocity {note.velocity}) on channel {note.channel + 1} at {seconds:.3f} s"


def render_midi(song_path, *, output, patch=None, map_file=None, a4_hz=None, sample_rate=None, bit_depth=None,
                tail_s=None, progress=False, make_folder=False):
    """Render a MIDI file through a patch (or a channel map) to `output`.

    Parameters
    ----------
    song_path : str or Path
    output : Path
        ``.wav`` or ``.flac``; written atomically.
    patch, map_file : str or Path
        Exactly one: a patch for every channel, or a map file.
    a4_hz, sample_rate, bit_depth, tail_s : command-line values or None
        Tuning (Hz, default 440), output rate and depth (default: the
        patch's, or the map's ``render:``), seconds after the end of the file
        (default: until every voice has decayed 100 dB, at most
        :data:`MAX_TAIL_S`).
    progress : bool
        Show progress bars on stderr.
    make_folder : bool
        Create the output folder (the default ``renders/``) just before writing.

    Returns
    -------
    MidiRender

    Raises
    ------
    ModalError
        Every problem with the inputs, before anything is written.
    """
    if (patch is None) == (map_file is None):
        raise ValueError("give exactly one of patch= (every channel) or map_file= (a map file)")
    a4_field = Field("frequency", low=A4_RANGE_HZ[0], high=A4_RANGE_HZ[1])
    a4 = None if a4_hz is None else convert_option(a4_field, a4_hz, "--a4")  # None: 440 Hz, or an instrument's own
    tail = None if tail_s is None else convert_option(Field("time", low=0.0, high=3600.0), tail_s, "--tail")
    song = read_midi(song_path)
    chmap, order, patches, settings = _setup(patch, map_file, sample_rate, bit_depth)
    rate, bits, output = settings["sample_rate"], settings["bit_depth"], Path(output)
    inputs = (song_path, patch, map_file, *order)  # every file read: the output may be none of them
    check_output_path(output, bits, inputs=inputs, make_folder=make_folder)
    performance = perform(song, sample_rate=rate)
    if not performance.notes:
        raise InputFileError(f"no notes to play ({len(song.track_names)} track(s), {len(song.events)} "
                             "tempo/controller events): nothing to render", file=song.path)
    assigned = _assign(performance, song, chmap, order)
    performance, assigned, skipped = _in_ranges(performance, assigned, patches)
    if not performance.notes:
        raise InputFileError(f"every note lies outside the instrument's range: {'; '.join(skipped)}", file=song.path)
    bar = {"unit": "note", "disable": not progress, "file": sys.stderr}
    cache = VoicingCache(patches, a4_hz=a4)
    voiced = _voice(performance, assigned, cache, bar)
    ends = [end for _, end in voiced]
    if tail is None:
        tail_samples = min(max(max(ends) - performance.end_sample, 0.0), MAX_TAIL_S * rate)
    else:
        tail_samples = tail * rate
    n_out = max(int(performance.end_sample + math.ceil(tail_samples)), 1)
    stereo = any(entry.pan is not None for _, entry in assigned) or any(n.pan is not None for n in performance.notes)
    n_channels = 2 if stereo else 1
    if n_out * n_channels * 4 > MEMORY_LIMIT_BYTES:
        raise RenderError(f"{song_path}: the song buffer would need {n_out * n_channels * 4 / 2**30:.1f} GiB "
                          f"(limit {MEMORY_LIMIT_BYTES / 2**30:.0f} GiB): lower --sample-rate or set a shorter --tail")
    buffer = np.zeros((n_out, 2) if stereo else n_out, np.float32)
    _mix(buffer, performance, assigned, voiced, cache, bar)
    if make_folder:
        make_output_folder(output)
    gain_db, peak_dbfs, true_peak_dbtp = write_song(output, buffer, sample_rate=rate, bit_depth=bits,
                                                    peak_db=settings["peak_db"], peak=settings["peak"],
                                                    key=None if make_folder else "--output")
    warnings = list(performance.warnings) + skipped + _tone_warnings(cache)
    return MidiRender(output, len(performance.notes), n_out / rate, rate, bits, n_channels, peak_dbfs,
                      true_peak_dbtp, gain_db, cache.solves, tuple(warnings))


def _voice(performance, assigned, cache, bar):
    """[(Tone, end sample)] of every note; retuning errors name the note."""
    voiced = []
    for note, (index, _) in tqdm(list(zip(performance.notes, assigned)), desc="voicing", leave=False, **bar):
        try:
            tone = cache.tone(index, note.key, note.velocity)
        except PatchError as error:
            context = _note_context(note, note.onset / performance.sample_rate)
            raise PatchError(f"{context}: {error.message}", file=error.file, line=error.line, key=error.key) from None
        end = voice_end(tone, onset=note.onset, damper=note.damper,
                        release_t60=cache.release_t60(index, note.key), sample_rate=performance.sample_rate)
        voiced.append((tone, end))
    return voiced


def _mix(buffer, performance, assigned, voiced, cache, bar):
    """Render every voice, one at a time, and add it into `buffer` with its gains."""
    rate, stereo = performance.sample_rate, buffer.ndim == 2
    bends = {channel: quantise_bends(s, r, rate) for channel, (s, r) in performance.bends.items()}
    for note, (index, entry), (tone, end) in tqdm(list(zip(performance.notes, assigned, voiced)), desc="rendering",
                                                  **bar):
        gains = _gains(entry, note, stereo)
        segments = render_voice(tone, onset=note.onset, stop=min(math.ceil(end), buffer.shape[0]), damper=note.damper,
                                release_t60=cache.release_t60(index, note.key), sample_rate=rate,
                                bend=bends.get(note.channel))
        for start, signal in segments:
            stop = start + signal.size
            if stereo:
                buffer[start:stop] += signal[:, None] * gains[None, :]
            elif gains[0] == 1.0:
                buffer[start:stop] += signal  # the same sums as signal * 1
            else:
                buffer[start:stop] += signal * gains[0]


def _gains(entry, note, stereo):
    """Output gains (one per output channel) of a note: the entry's gain and pan (map pan wins over CC 10)."""
    gain = 10.0 ** (entry.gain_db / 20.0)
    if not stereo:
        return np.array([gain], np.float32)
    pan = entry.pan if entry.pan is not None else (note.pan if note.pan is not None else 0.0)
    return np.array(pan_gains(pan), np.float32) * np.float32(gain)


def _tone_warnings(cache):
    """One line per patch and kind of partial-table warning, with how many voiced notes gave it.

    (Modes left out at Nyquist are no warning: the tables record them.)
    """
    groups = {}
    for (index, note, velocity, _), tone in cache.items():
        for text in tone.warnings:
            key = (index, re.sub(r"[-+]?\d[\d.,]*", "#", text))
            count, example = groups.get(key, (0, (note, velocity, text)))
            groups[key] = (count + 1, example)
    lines = []
    for (index, _), (count, (note, velocity, text)) in groups.items():
        others = f" (and {counted(count - 1, 'other note')} of the song)" if count > 1 else ""
        lines.append(f"{cache.patches[index].name}, {midi_to_note(note)} at velocity {velocity}{others}: {text}")
    return lines
