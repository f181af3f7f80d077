"""Input limits: bounded reads, paths that are not files, NUL bytes, names, MIDI oddities, memory estimate.

Every refusal is checked as tests/test_bad_input.py checks a bad patch: exit
status 2, exactly one ``synth: error:`` line on stderr naming the file, no
traceback, nothing written.

* YAML inputs (patch, spec, map, instrument) larger than
  :data:`synth.yamlio.MAX_YAML_BYTES` are refused before parsing, and the
  parser stops as soon as a file holds more than
  :data:`synth.yamlio.MAX_VALUES` values;
* MIDI files larger than :data:`synth.midifile.MAX_MIDI_BYTES`, with more than
  :data:`synth.midifile.MAX_MIDI_NOTES` notes or
  :data:`synth.midifile.MAX_MIDI_EVENTS` events are refused before decoding;
* a path that is not a regular file (a folder, a device, a FIFO) is refused
  without reading it; a path with a NUL byte is one line too;
* ``name: "abc\\n"`` is not a slug;
* a malformed meta event synth does not use (key or time signature, ...) is
  skipped: the song plays;
* :data:`synth.patch.BYTES_PER_SAMPLE` covers the measured peak memory of a
  render.
"""
from __future__ import annotations

import json
import os
import re
import struct
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
import soundfile

from synth import InputFileError, load_patch, midifile, yamlio
from synth.midifile import read_midi
from synth.patch import estimate_render_bytes
from synth.schema import SLUG

from .cli_checks import error_line
from .cli_checks import run_cli as run

REPO = Path(__file__).resolve().parents[1]
SONG = REPO / "patches" / "midi" / "demo-song.mid"
# A Python exception's class name in a message (KeyError, IndexError, KeySignatureError, ...).
EXCEPTION_NAME = re.compile(r"\b[A-Za-z]*(Error|Exception)\b")

PATCH = textwrap.dedent(
    """\
    name: limits-string
    resonator:
      type: string
      material: nylon
      length: 650 mm
      diameter: 0.8 mm
      pitch: A3
    render:
      duration: 0.2 s
      sample_rate: 8000
      max_modes: 24
    """
)


@pytest.fixture
def work(tmp_path, monkeypatch):
    """tmp_path as the working folder, with patch.yaml in it."""
    monkeypatch.chdir(tmp_path)
    (tmp_path / "patch.yaml").write_text(PATCH, encoding="utf-8")
    return tmp_path


def listing(folder):
    return sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*"))


def refused(capsys, argv, start):
    """Run `argv`; check status 2, empty stdout and one error line starting with `start`; return the line."""
    status, out, err = run(capsys, *argv)
    message = error_line(err)
    assert status == 2, err
    assert out == ""
    assert message.startswith(start), message
    assert not EXCEPTION_NAME.search(message), message
    return message


def smf(*tracks, fmt=1, division=96):
    """Raw MIDI bytes from raw track bodies."""
    header = b"MThd" + struct.pack(">LHHh", 6, fmt, len(tracks), division)
    return header + b"".join(b"MTrk" + struct.pack(">L", len(t)) + t for t in tracks)


NOTE = bytes([0, 0x90, 57, 100, 48, 57, 0])  # A3 on; 48 ticks later off (running status, velocity 0)
EOT = bytes([0, 0xFF, 0x2F, 0])


def many_notes(n):
    """One track of `n` short notes, every event 3 bytes (running status)."""
    body = bytearray([0, 0x90, 57, 100, 1, 57, 0])
    body += bytes([0, 57, 100, 1, 57, 0]) * (n - 1)
    return smf(bytes(body) + EOT)


# Commands that read a YAML file of each kind, with {} for the file.
YAML_COMMANDS = [
    pytest.param(["modes", "{}"], id="patch-modes"),
    pytest.param(["render", "{}", "-o", "out.wav"], id="patch-render"),
    pytest.param(["batch", "{}", "--workers", "1"], id="library-spec"),
    pytest.param(["midi", str(SONG), "--map", "{}", "-o", "out.wav"], id="midi-map"),
    pytest.param(["midi", str(SONG), "--patch", "{}", "-o", "out.wav"], id="midi-patch"),
    pytest.param(["range", "{}"], id="instrument"),
    pytest.param(["tune-bar", "{}", "--ratios", "1:4:10"], id="tune-bar"),
]


def argv_for(command, path):
    return [str(path) if a == "{}" else a for a in command]


# ---------------------------------------------------------------- 1. bounded YAML reads


@pytest.mark.parametrize("command", YAML_COMMANDS)
def test_yaml_over_the_size_limit_is_refused_before_parsing(work, capsys, command):
    """A file one byte over the limit that is not valid YAML either: the size is what is reported."""
    limit = yamlio.MAX_YAML_BYTES
    head = b"name: [\n"
    (work / "big.yaml").write_bytes(head + b"#" * (limit + 1 - len(head) - 1) + b"\n")
    assert (work / "big.yaml").stat().st_size == limit + 1
    message = refused(capsys, argv_for(command, "big.yaml"), "synth: error: big.yaml: ")
    assert "YAML syntax error" not in message
    assert re.search(rf"too large: {limit + 1} bytes; a YAML file may be at most 2 MiB \({limit} bytes\)", message)
    assert listing(work) == ["big.yaml", "patch.yaml"]


def test_yaml_at_the_size_limit_is_read(work, capsys, monkeypatch):
    """A file of exactly MAX_YAML_BYTES bytes is read; one more byte is refused."""
    limit = len(PATCH.encode()) + 10
    monkeypatch.setattr(yamlio, "MAX_YAML_BYTES", limit)
    (work / "full.yaml").write_bytes(PATCH.encode() + b"#" * 9 + b"\n")
    status, _, err = run(capsys, "render", "full.yaml", "-o", "out.wav", "-q")
    assert status == 0, err
    assert (work / "out.wav").exists()
    (work / "over.yaml").write_bytes(PATCH.encode() + b"#" * 10 + b"\n")
    message = refused(capsys, ["render", "over.yaml", "-o", "over.wav"], "synth: error: over.yaml: ")
    assert f"too large: {limit + 1} bytes; a YAML file may be at most " in message


@pytest.mark.skipif(not Path("/proc/self/maps").is_file(), reason="needs Linux /proc")
def test_yaml_read_is_bounded_whatever_the_size_says(monkeypatch):
    """/proc files say they hold 0 bytes: the read itself stops after the limit."""
    assert os.stat("/proc/self/maps").st_size == 0
    monkeypatch.setattr(yamlio, "MAX_YAML_BYTES", 100)
    with pytest.raises(InputFileError, match=r"^/proc/self/maps: too large: more than 100 bytes; a YAML file may be "):
        yamlio.load_yaml_file("/proc/self/maps")


def test_yaml_parser_stops_at_the_value_limit(work, capsys, monkeypatch):
    """More values than MAX_VALUES stops the parser there: a syntax error after them is never reached."""
    monkeypatch.setattr(yamlio, "MAX_VALUES", 1000)
    (work / "many.yaml").write_text("name: x\nresonator: [" + ", ".join(["1"] * 2000) + "]\nbroken: [\n")
    message = refused(capsys, ["modes", "many.yaml"], "synth: error: many.yaml:2: ")
    assert message.endswith("too large: more than 1000 values once aliases (*name) are expanded"), message


@pytest.mark.parametrize("command", YAML_COMMANDS)
def test_yaml_folder_is_refused(work, capsys, command):
    (work / "folder.yaml").mkdir()
    message = refused(capsys, argv_for(command, "folder.yaml"), "synth: error: folder.yaml: ")
    assert "is a folder, not a file" in message


def run_limited(argv, cwd, timeout=30):
    """`synth ARGV` in a subprocess with at most 2 GiB of address space and `timeout` seconds."""

    def limit_memory():
        import resource

        resource.setrlimit(resource.RLIMIT_AS, (2 * 2**30, 2 * 2**30))

    env = {**os.environ, "PYTHONPATH": str(REPO)}
    return subprocess.run([sys.executable, "-m", "synth.cli", *map(str, argv)], cwd=cwd, env=env, check=False,
                          capture_output=True, text=True, timeout=timeout, preexec_fn=limit_memory)


@pytest.mark.skipif(not (os.path.exists("/dev/zero") and hasattr(os, "mkfifo")), reason="needs /dev/zero and FIFOs")
@pytest.mark.parametrize("kind", ["device", "fifo"])
@pytest.mark.parametrize("command", [
    pytest.param(["modes", "{}"], id="yaml"),
    pytest.param(["midi", "{}", "--patch", "patch.yaml", "-o", "out.wav"], id="midi"),
])
def test_not_a_regular_file_is_not_read(work, command, kind):
    """/dev/zero never ends and a FIFO with no writer blocks: both are refused without a read."""
    if kind == "fifo":
        os.mkfifo(work / "fifo")
        path = "fifo"
    else:
        path = "/dev/zero"
    result = run_limited(argv_for(command, path), work)
    assert result.returncode == 2, result.stderr
    message = error_line(result.stderr)
    what = "a character device" if kind == "device" else r"a pipe \(FIFO\)"
    assert re.search(rf"^synth: error: {re.escape(path)}: is {what}, not a regular file", message), message
    assert sorted(os.listdir(work)) == (["fifo", "patch.yaml"] if kind == "fifo" else ["patch.yaml"])


# ---------------------------------------------------------------- 1. bounded MIDI reads


def test_midi_over_the_size_limit(work, capsys):
    limit = midifile.MAX_MIDI_BYTES
    data = smf(NOTE + EOT)
    (work / "big.mid").write_bytes(data + b"XTRA" + struct.pack(">L", limit) + b"\0" * (limit + 1 - len(data) - 8))
    assert (work / "big.mid").stat().st_size == limit + 1
    message = refused(capsys, ["midi", "big.mid", "--patch", "patch.yaml", "-o", "out.wav"], "synth: error: big.mid: ")
    assert f"too large: {limit + 1} bytes; a MIDI file may be at most 16 MiB ({limit} bytes)" in message
    assert listing(work) == ["big.mid", "patch.yaml"]


def test_midi_folder(work, capsys):
    (work / "folder.mid").mkdir()
    message = refused(capsys, ["midi", "folder.mid", "--patch", "patch.yaml", "-o", "out.wav"],
                      "synth: error: folder.mid: ")
    assert "is a folder, not a MIDI file" in message


def test_midi_note_limit(tmp_path):
    """One note over MAX_MIDI_NOTES is refused before decoding, naming the count."""
    limit = midifile.MAX_MIDI_NOTES
    (tmp_path / "many.mid").write_bytes(many_notes(limit + 1))
    with pytest.raises(InputFileError, match=rf"holds {limit + 1} notes, more than the {limit} synth plays"):
        read_midi(tmp_path / "many.mid")


def test_midi_note_limit_command_line(work, capsys, monkeypatch):
    monkeypatch.setattr(midifile, "MAX_MIDI_NOTES", 3)
    (work / "three.mid").write_bytes(many_notes(3))
    assert len(read_midi(work / "three.mid").events) == 6
    (work / "four.mid").write_bytes(many_notes(4))
    message = refused(capsys, ["midi", "four.mid", "--patch", "patch.yaml", "-o", "out.wav"], "synth: error: four.mid: ")
    assert message.endswith("holds 4 notes, more than the 3 synth plays from one file: split the song into shorter files")
    assert listing(work) == ["four.mid", "patch.yaml", "three.mid"]


def test_midi_event_limit(work, capsys, monkeypatch):
    """A flood of events that are not notes stops the walk at MAX_MIDI_EVENTS."""
    monkeypatch.setattr(midifile, "MAX_MIDI_EVENTS", 100)
    controllers = bytes([0, 0xB0, 1, 10]) + bytes([0, 1, 20]) * 200  # modulation wheel, running status
    (work / "busy.mid").write_bytes(smf(NOTE + controllers + EOT))
    message = refused(capsys, ["midi", "busy.mid", "--patch", "patch.yaml", "-o", "out.wav"], "synth: error: busy.mid: ")
    assert re.search(r"holds more than 100 events \(notes, controllers, meta events\)", message), message


def test_midi_many_notes_stop_at_the_event_limit(tmp_path, monkeypatch):
    monkeypatch.setattr(midifile, "MAX_MIDI_EVENTS", 100)
    monkeypatch.setattr(midifile, "MAX_MIDI_NOTES", 10)
    (tmp_path / "many.mid").write_bytes(many_notes(1000))
    with pytest.raises(InputFileError, match=r"holds more than 10 notes \(50 in its first 100 events\)"):
        read_midi(tmp_path / "many.mid")


# ---------------------------------------------------------------- 2. NUL bytes in paths


@pytest.mark.parametrize("command", [
    *YAML_COMMANDS,
    pytest.param(["midi", "{}", "--patch", "patch.yaml", "-o", "out.wav"], id="midi-song"),
])
def test_nul_byte_in_a_path(work, capsys, command):
    message = refused(capsys, argv_for(command, "bad\0name"), "synth: error: bad\\0name: ")
    assert message.endswith("the path contains a NUL byte (\\0), which no file name can hold"), message
    assert listing(work) == ["patch.yaml"]


def test_nul_byte_api(tmp_path):
    with pytest.raises(InputFileError, match=r"NUL byte"):
        load_patch(tmp_path / "a\0b.yaml")
    with pytest.raises(InputFileError, match=r"NUL byte"):
        read_midi(str(tmp_path / "a\0b.mid"))


# ---------------------------------------------------------------- 3. name slug


@pytest.mark.parametrize("name", ['"abc\\n"', '"abc\\r"', "|\n  abc"])
def test_name_with_a_trailing_newline_is_refused(work, capsys, name):
    (work / "patch.yaml").write_text(PATCH.replace("name: limits-string", f"name: {name}"), encoding="utf-8")
    message = refused(capsys, ["render", "patch.yaml"], "synth: error: patch.yaml:1: name: ")
    assert "is not a plain file-name slug" in message
    assert listing(work) == ["patch.yaml"]  # no renders/ folder, no "abc\n.wav"


def test_slug_pattern():
    assert SLUG.match("abc") and SLUG.match("a" * 80)
    for bad in ("abc\n", "abc\r\n", "\nabc", "a" * 80 + "\n", "a\nb"):
        assert not SLUG.match(bad), repr(bad)


# ---------------------------------------------------------------- 4. malformed meta events


UNUSED_META = [
    pytest.param(bytes([0, 0xFF, 0x59, 2, 20, 0]), id="key-signature-20-sharps"),
    pytest.param(bytes([0, 0xFF, 0x59, 1, 0]), id="key-signature-short"),
    pytest.param(bytes([0, 0xFF, 0x58, 2, 4, 2]), id="time-signature-short"),
    pytest.param(bytes([0, 0xFF, 0x54, 5, 0xFF, 0, 0, 0, 0]), id="smpte-offset-bad-rate"),
    pytest.param(bytes([0, 0xFF, 0x20, 0]), id="channel-prefix-empty"),
    pytest.param(bytes([0, 0xFF, 0x00, 1, 5]), id="sequence-number-short"),
    pytest.param(bytes([0, 0xF0, 3, 0x90, 0x80, 0xF7]), id="sysex-byte-over-127"),
]


@pytest.mark.parametrize("meta", UNUSED_META)
def test_malformed_unused_meta_is_skipped(work, capsys, meta):
    """The song plays, with the same notes and timing as without the event."""
    (work / "odd.mid").write_bytes(smf(meta + NOTE + EOT))
    (work / "plain.mid").write_bytes(smf(NOTE + EOT))
    odd, plain = read_midi(work / "odd.mid"), read_midi(work / "plain.mid")
    assert [(t, k, m.bytes()) for t, k, m in odd.events] == [(t, k, m.bytes()) for t, k, m in plain.events]
    assert odd.end_tick == plain.end_tick == 48
    status, _, err = run(capsys, "midi", "odd.mid", "--patch", "patch.yaml", "-o", "out.wav", "-q")
    assert status == 0, err
    assert soundfile.info(str(work / "out.wav")).frames > 0


def test_skipped_events_keep_their_time(tmp_path):
    """Deltas of skipped events add up: a note after a skipped meta lands on the same tick."""
    body = bytes([10, 0xFF, 0x59, 2, 20, 0, 5, 0xFF, 0x01, 1, 65, 7, 0x90, 57, 100, 0x81, 0x00, 0xFF, 0x58, 1, 4,
                  3, 57, 0, 2, 0xFF, 0x7F, 0])
    (tmp_path / "t.mid").write_bytes(smf(body))
    song = read_midi(tmp_path / "t.mid")
    assert [(t, m.type, m.velocity) for t, _, m in song.events] == [(22, "note_on", 100), (153, "note_on", 0)]
    assert song.end_tick == 155


BROKEN = [
    pytest.param(smf(bytes([0, 0xFF, 0x59, 2, 20, 0]) + NOTE + EOT)[:-12],
                 r"track 1 declares \d+ bytes but only \d+ remain: the file is truncated", id="truncated-file"),
    pytest.param(smf(NOTE + bytes([0, 0xFF, 0x59, 9, 0, 0])),
                 r"track 1, byte 29: a sysex or meta event runs past the end of its track", id="meta-past-track-end"),
    pytest.param(smf(bytes([0, 0xFF, 0x51, 2, 7, 0xA1]) + NOTE + EOT),
                 r"track 1, byte 22: a Set Tempo meta event holds 2 bytes, not 3: the file is corrupt", id="short-tempo"),
]


@pytest.mark.parametrize(("content", "phrase"), BROKEN)
def test_broken_midi_is_one_plain_line(work, capsys, content, phrase):
    (work / "bad.mid").write_bytes(content)
    message = refused(capsys, ["midi", "bad.mid", "--patch", "patch.yaml", "-o", "out.wav"], "synth: error: bad.mid: ")
    assert re.search(phrase, message), message
    assert listing(work) == ["bad.mid", "patch.yaml"]


# ---------------------------------------------------------------- 5. the render-size estimate

# Peak RSS growth of one render, from /proc/self/status: VmHWM is this process's own high-water mark
# (ru_maxrss is not: after exec it keeps the parent's, the test process's, peak).  Writing 5 to
# clear_refs resets VmHWM to the current RSS (Linux 4.0+), so the warm-up's peak does not count.
MEASURE = r"""
import json, sys
from synth.cli import main

def status(key):
    with open("/proc/self/status") as handle:
        return next(int(line.split()[1]) * 1024 for line in handle if line.startswith(key + ":"))

main(["render", sys.argv[1], "-o", "warm.wav", "-q", "--duration", "0.5"])  # imports, filters, scratch buffers
try:
    with open("/proc/self/clear_refs", "w") as handle:
        handle.write("5")
except OSError:
    pass
before = status("VmRSS")
main(["render", sys.argv[1], "-o", "out.wav", "-q", "--sample-rate", "768000", "--duration", "1"])
print(json.dumps({"growth": status("VmHWM") - before}))
"""


@pytest.mark.skipif(not Path("/proc/self/status").is_file(), reason="needs Linux /proc")
def test_estimate_covers_the_measured_peak(tmp_path):
    """A 1 s render at 768 kHz (768 000 samples): the peak RSS growth is within the estimate."""
    patch = REPO / "patches" / "string-bass-steel-a1.yaml"
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    result = subprocess.run([sys.executable, "-c", MEASURE, str(patch)], cwd=tmp_path, env=env, check=False,
                            capture_output=True, text=True, timeout=120)
    assert result.returncode == 0, result.stderr
    growth = json.loads(result.stdout.strip().splitlines()[-1])["growth"]
    estimate = estimate_render_bytes(1.0, 768000, 256)
    assert growth > 20 * 768000, growth  # the measurement saw the render (more than 20 bytes a sample)
    assert estimate >= growth, (estimate, growth)
