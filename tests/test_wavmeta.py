"""Sampler chunks, chunk stripping and the RF64 threshold (synth.wavmeta).

Every file is parsed here by an independent struct-based RIFF walker
(:func:`parse`, not synth.wavmeta.read_chunks).  Sources of expected values:

* [MPIDS] IBM/Microsoft "Multimedia Programming Interface and Data
  Specifications 1.0" (1991): chunk = id, u32 size, payload, pad byte to an
  even length; RIFF size = file length - 8.
* [NMDT] Microsoft "New Multimedia Data Types and Data Techniques" 3.0 (1994)
  as quoted by wavref.til.cafe (chunk/smpl, chunk/inst) and the
  recordingblogs.com wiki: smpl = nine u32 (manufacturer, product, sample
  period, MIDI unity note, MIDI pitch fraction, SMPTE format, SMPTE offset,
  sample loops, sampler data); "0x80000000 is 1/2 semitone (50 cents)";
  "44.1 kHz would be specified as 22675"; inst = u8 note, i8 fine tune,
  i8 gain, u8 low/high note, u8 low/high velocity.
* libsndfile (through soundfile) as the writer and a reader; Python's
  stdlib ``wave`` as a second, independent PCM reader.
"""
from __future__ import annotations

import io
import struct
import time
import wave

import numpy as np
import pytest
import soundfile as sf

from synth.wavmeta import (
    HEADER_ALLOWANCE_BYTES,
    WAV_LIMIT_BYTES,
    add_sampler_chunks,
    needs_rf64,
    read_chunks,
    strip_chunks,
)

SUBTYPES = {"PCM_16": 2, "PCM_24": 3, "FLOAT": 4}  # bytes per sample (libsndfile subtypes)


def parse(wav):
    """Independent walker: [(id, offset of the chunk header, payload)], checking [MPIDS] layout."""
    assert wav[:4] == b"RIFF" and wav[8:12] == b"WAVE"
    assert struct.unpack("<I", wav[4:8])[0] == len(wav) - 8  # [MPIDS] RIFF size
    chunks, pos = [], 12
    while pos < len(wav):
        assert pos % 2 == 0  # [MPIDS] word alignment
        size = struct.unpack("<I", wav[pos + 4:pos + 8])[0]
        chunks.append((wav[pos:pos + 4], pos, wav[pos + 8:pos + 8 + size]))
        pos += 8 + size + size % 2
        if size % 2:
            assert wav[pos - 1] == 0  # pad byte
    assert pos == len(wav)
    return chunks


def payload(wav, chunk_id):
    found = [body for cid, _, body in parse(wav) if cid == chunk_id]
    assert len(found) == 1, (chunk_id, [cid for cid, _, _ in parse(wav)])
    return found[0]


def write(x, rate, subtype, fmt="WAV"):
    buffer = io.BytesIO()
    sf.write(buffer, x, rate, subtype=subtype, format=fmt)
    return buffer.getvalue()


def signal(frames, channels, seed=0):
    x = np.random.default_rng(seed).uniform(-0.9, 0.9, (frames, channels))
    return x[:, 0] if channels == 1 else x


@pytest.mark.parametrize("subtype", list(SUBTYPES))
@pytest.mark.parametrize("channels", [1, 2])
@pytest.mark.parametrize("frames", [101, 1000])  # 101 x 3 bytes: an odd data chunk (PCM_24 mono)
def test_chunks_fields_alignment_and_audio(subtype, channels, frames):
    rate = 44100
    original = write(signal(frames, channels), rate, subtype)
    out = add_sampler_chunks(original, sample_rate=rate, unity_note=69, pitch_fraction_cents=50.0,
                             fine_tune_cents=-12.0, gain_db=-6, low_note=60, high_note=80,
                             low_velocity=10, high_velocity=100)
    chunks = parse(out)
    ids = [cid for cid, _, _ in chunks]
    before = [cid for cid, _, _ in parse(original)]
    # smpl and inst immediately before data; every other chunk kept, in order (module's stated choice).
    i = ids.index(b"data")
    assert ids[i - 2:i] == [b"smpl", b"inst"]
    assert [cid for cid in ids if cid not in (b"smpl", b"inst")] == before
    # smpl fields [NMDT]: 44.1 kHz -> 22675 ns (the spec's example), 50 cents -> 0x80000000.
    smpl = payload(out, b"smpl")
    assert len(smpl) == 36
    assert struct.unpack("<9I", smpl) == (0, 0, 22675, 69, 0x80000000, 0, 0, 0, 0)
    # inst fields [NMDT]: 7 bytes, size field 7, then a pad byte [MPIDS].
    inst_offset = next(off for cid, off, _ in chunks if cid == b"inst")
    assert struct.unpack("<I", out[inst_offset + 4:inst_offset + 8])[0] == 7
    assert out[inst_offset + 15] == 0 and (inst_offset + 16) % 2 == 0
    assert struct.unpack("<BbbBBBB", payload(out, b"inst")) == (69, -12, -6, 60, 80, 10, 100)
    # Bytes of every original chunk unchanged.
    for cid in before:
        assert payload(out, cid) == payload(original, cid)
    assert len(out) == len(original) + (8 + 36) + (8 + 8)
    # Audio read back by libsndfile: unchanged.
    a, ra = sf.read(io.BytesIO(original))
    b, rb = sf.read(io.BytesIO(out))
    assert ra == rb == rate
    np.testing.assert_array_equal(a, b)
    # And by the stdlib wave module (PCM only): the same frames and format.
    if subtype != "FLOAT":
        with wave.open(io.BytesIO(out)) as w:
            assert (w.getnchannels(), w.getsampwidth(), w.getframerate(), w.getnframes()) == \
                (channels, SUBTYPES[subtype], rate, frames)
            assert w.readframes(frames) == payload(original, b"data")


@pytest.mark.parametrize("rate, period", [(48000, 20833), (44100, 22675), (96000, 10416), (22050, 45351)])
def test_sample_period_truncates(rate, period):
    """10**9 / rate truncated to whole ns, as the spec's 44.1 kHz example (22675.7 -> 22675) [NMDT];
    the other values computed here: 20833.3, 10416.7, 45351.5."""
    out = add_sampler_chunks(write(np.zeros(10), rate, "PCM_16"), sample_rate=rate, unity_note=60)
    assert struct.unpack("<9I", payload(out, b"smpl"))[2] == period


@pytest.mark.parametrize("cents, fraction", [(0.0, 0), (50.0, 0x80000000), (25.0, 0x40000000),
                                             (1.0, 42949673), (99.9999999999, 2**32 - 1)])
def test_pitch_fraction(cents, fraction):
    """Fraction of a semitone as a 32-bit fraction [NMDT]; 1 cent = 2**32 / 100 = 42949672.96
    -> 42949673 (computed here); the top of the range is held at 2**32 - 1."""
    out = add_sampler_chunks(write(np.zeros(10), 48000, "PCM_16"), sample_rate=48000, unity_note=60,
                             pitch_fraction_cents=cents)
    assert struct.unpack("<9I", payload(out, b"smpl"))[4] == fraction


def test_defaults_and_range_ends():
    """Range ends from the brief's allowed ranges and [NMDT] (fine tune -50..50); defaults per the
    signature: notes 0..127, velocities 1..127; an integral float sample rate is accepted."""
    out = add_sampler_chunks(write(np.zeros(10), 48000, "PCM_16"), sample_rate=48000.0, unity_note=0,
                             fine_tune_cents=50, gain_db=63)
    assert struct.unpack("<BbbBBBB", payload(out, b"inst")) == (0, 50, 63, 0, 127, 1, 127)
    out = add_sampler_chunks(out, sample_rate=48000, unity_note=127, fine_tune_cents=-50, gain_db=-64,
                             low_note=127, low_velocity=127)
    assert struct.unpack("<BbbBBBB", payload(out, b"inst")) == (127, -50, -64, 127, 127, 127, 127)


def test_adding_twice_replaces():
    """Module docstring: earlier smpl/inst chunks are replaced, not duplicated."""
    once = add_sampler_chunks(write(np.zeros(10), 48000, "PCM_24"), sample_rate=48000, unity_note=50)
    twice = add_sampler_chunks(once, sample_rate=48000, unity_note=72)
    assert [cid for cid, _, _ in parse(twice)].count(b"smpl") == 1  # payload() asserts one of each
    assert struct.unpack("<9I", payload(twice, b"smpl"))[3] == 72
    assert payload(twice, b"inst")[0] == 72


def test_chunk_after_data_is_kept():
    """A hand-built odd-sized 'LIST' chunk after 'data' [MPIDS] stays at the end, padded."""
    original = write(np.zeros(11), 48000, "PCM_16")
    extra = b"LIST" + struct.pack("<I", 5) + b"INFOx" + b"\x00"
    body = original[12:] + extra
    handmade = b"RIFF" + struct.pack("<I", 4 + len(body)) + b"WAVE" + body
    out = add_sampler_chunks(handmade, sample_rate=48000, unity_note=60)
    assert [cid for cid, _, _ in parse(out)] == [b"fmt ", b"smpl", b"inst", b"data", b"LIST"]
    assert out.endswith(extra)


def test_read_chunks_matches_independent_parser():
    """read_chunks against this test's own struct walker [MPIDS]."""
    for wav in (write(signal(33, 2), 48000, "FLOAT"), write(signal(33, 1), 48000, "PCM_24")):
        assert read_chunks(wav) == [(cid, body) for cid, _, body in parse(wav)]


def test_float_writes_differ_only_in_peak_and_strip_makes_them_identical():
    """libsndfile 1.2.2 writes a PEAK chunk into FLOAT files (checked here); its second field is a
    wall-clock time in seconds, so two writes in different seconds differ there alone."""
    x = signal(500, 2, seed=5)
    first = write(x, 48000, "FLOAT")
    time.sleep(1.02 - time.time() % 1.0)  # into the next second of the wall clock
    second = write(x, 48000, "FLOAT")
    assert b"PEAK" in [cid for cid, _, _ in parse(first)]
    assert len(first) == len(second) and first != second
    peak_offset = next(off for cid, off, _ in parse(first) if cid == b"PEAK")
    differing = [i for i in range(len(first)) if first[i] != second[i]]
    assert all(peak_offset + 12 <= i < peak_offset + 16 for i in differing)  # payload bytes 4..7
    a, b = strip_chunks(first), strip_chunks(second)
    assert a == b
    assert [cid for cid, _, _ in parse(a)] == [b"fmt ", b"fact", b"data"]
    assert len(a) == len(first) - (8 + 8 + 8 * 2)  # PEAK payload: 8 + 8 per channel
    np.testing.assert_array_equal(sf.read(io.BytesIO(a))[0], sf.read(io.BytesIO(first))[0])
    # Stripping then labelling keeps them identical.
    assert add_sampler_chunks(a, sample_rate=48000, unity_note=60) == \
        add_sampler_chunks(b, sample_rate=48000, unity_note=60)


def test_strip_without_match_returns_the_same_bytes():
    """strip_chunks' docstring: a file holding none of the ids comes back equal (zero pad bytes)."""
    wav = write(signal(101, 1), 48000, "PCM_24")  # odd data chunk with its pad byte
    assert strip_chunks(wav) == wav
    assert strip_chunks(wav, ids=b"LIST") == wav


def test_wav_limit_and_rf64_thresholds():
    """The WAV limit is the module's stated choice, 2**32 - 1 bytes of file.  Thresholds computed
    here: file = 44 header bytes (libsndfile's PCM header, measured below) + data + pad."""
    assert WAV_LIMIT_BYTES == 2**32 - 1
    small = write(np.zeros(7), 48000, "PCM_16")
    assert len(small) == 44 + 14
    # 16-bit mono: data + 44 <= 2**32 - 1  <=>  frames <= (2**32 - 45) // 2.
    last = (2**32 - 45) // 2
    assert not needs_rf64(last, 1, 2, extra_bytes=44)
    assert needs_rf64(last + 1, 1, 2, extra_bytes=44)
    # 24-bit mono: odd data takes a pad byte: 3 f + (3 f) % 2 + 44 <= 2**32 - 1.
    frames = next(f for f in range((2**32 - 45) // 3 + 2, 0, -1) if 3 * f + (3 * f) % 2 + 44 <= 2**32 - 1)
    assert not needs_rf64(frames, 1, 3, extra_bytes=44)
    assert needs_rf64(frames + 1, 1, 3, extra_bytes=44)
    # Default allowance and multi-channel arithmetic.
    assert HEADER_ALLOWANCE_BYTES >= 72 + 8 * 8 + 44 + 16  # FLOAT headers for 8 channels + smpl + inst
    assert not needs_rf64(48000 * 60 * 60, 2, 4)  # an hour of stereo float: 1.38e9 bytes
    assert needs_rf64(48000 * 60 * 60 * 4, 2, 4)  # four hours: 5.5e9 bytes
    assert needs_rf64((2**32 - HEADER_ALLOWANCE_BYTES) // 8 + 1, 2, 4)
    assert not needs_rf64((2**32 - 1 - HEADER_ALLOWANCE_BYTES) // 8, 2, 4)
    assert not needs_rf64(0, 1, 2)


def test_rf64_written_and_read_back_by_soundfile():
    x = signal(1000, 2, seed=9)
    rf64 = write(x, 48000, "PCM_24", fmt="RF64")
    assert rf64[:4] == b"RF64" and rf64[8:16] == b"WAVEds64"  # EBU Tech 3306 layout (from memory)
    back, rate = sf.read(io.BytesIO(rf64))
    assert rate == 48000
    np.testing.assert_allclose(back, x, atol=2**-23)  # 24-bit quantisation
    with pytest.raises(ValueError, match="RF64"):
        read_chunks(rf64)


GOOD = dict(sample_rate=48000, unity_note=60)


@pytest.mark.parametrize("changes, match", [
    (dict(unity_note=-1), r"unity_note must be an integer in 0\.\.127, got -1"),
    (dict(unity_note=128), r"unity_note must be an integer in 0\.\.127, got 128"),
    (dict(unity_note=60.5), r"unity_note must be an integer in 0\.\.127, got 60\.5"),
    (dict(unity_note=True), r"unity_note must be an integer in 0\.\.127, got True"),
    (dict(pitch_fraction_cents=-0.5), r"pitch_fraction_cents must be in \[0\.0, 100\.0\), got -0\.5"),
    (dict(pitch_fraction_cents=100), r"pitch_fraction_cents must be in \[0\.0, 100\.0\), got 100"),
    (dict(pitch_fraction_cents="x"), r"pitch_fraction_cents must be a number"),
    (dict(fine_tune_cents=-51), r"fine_tune_cents must be in \[-50\.0, 50\.0\], got -51"),
    (dict(fine_tune_cents=50.5), r"fine_tune_cents must be in \[-50\.0, 50\.0\], got 50\.5"),
    (dict(gain_db=-65), r"gain_db must be an integer in -64\.\.63, got -65"),
    (dict(gain_db=64), r"gain_db must be an integer in -64\.\.63, got 64"),
    (dict(low_note=128), r"low_note must be an integer in 0\.\.127, got 128"),
    (dict(high_note=-3), r"high_note must be an integer in 0\.\.127, got -3"),
    (dict(low_note=70, high_note=69), r"low_note \(70\) must not exceed high_note \(69\)"),
    (dict(low_velocity=0), r"low_velocity must be an integer in 1\.\.127, got 0"),
    (dict(high_velocity=128), r"high_velocity must be an integer in 1\.\.127, got 128"),
    (dict(low_velocity=90, high_velocity=80), r"low_velocity \(90\) must not exceed high_velocity \(80\)"),
    (dict(sample_rate=44100), r"sample_rate 44100 Hz differs from the file's 48000 Hz"),
    (dict(sample_rate=0), r"sample_rate must be an integer in 1\.\.4294967295, got 0"),
    (dict(sample_rate=44100.5), r"sample_rate must be an integer"),
])
def test_bad_arguments(changes, match):
    wav = write(np.zeros(10), 48000, "PCM_16")
    with pytest.raises(ValueError, match=match):
        add_sampler_chunks(wav, **{**GOOD, **changes})


def _riff(*chunks):
    body = b"".join(cid + struct.pack("<I", len(p)) + p + b"\x00" * (len(p) % 2) for cid, p in chunks)
    return b"RIFF" + struct.pack("<I", 4 + len(body)) + b"WAVE" + body


def test_malformed_files():
    """Malformed per [MPIDS]: wrong magic or form type, size field disagreeing with the length,
    chunks (or an odd chunk's pad byte) past the end; missing fmt/data (module docstring)."""
    good = write(np.zeros(10), 48000, "PCM_16")
    fmt = payload(good, b"fmt ")
    cases = [
        (b"RIFX" + good[4:], "not a RIFF/WAVE file"),
        (good[:8] + b"AVI " + good[12:], "not a RIFF/WAVE file"),
        (good[:10], "fewer than the 12-byte header"),
        (good[:-2], "RIFF size field"),  # truncated file
        (good + b"\x00\x00", "RIFF size field"),  # trailing bytes
        (b"RIFF" + struct.pack("<I", 4 + 8 + 4) + b"WAVE" + b"data" + struct.pack("<I", 99) + b"abcd",
         "runs past the end"),
        (b"RIFF" + struct.pack("<I", 4 + 6) + b"WAVE" + b"data\x00\x00", "runs past the end"),
        (b"RIFF" + struct.pack("<I", 4 + 8 + 3) + b"WAVE" + b"junk" + struct.pack("<I", 3) + b"abc",
         "runs past the end"),  # odd chunk without its pad byte
        ("RIFF", "must be bytes"),
    ]
    for wav, match in cases:
        with pytest.raises(ValueError, match=match):
            read_chunks(wav)
        with pytest.raises(ValueError, match=match):
            strip_chunks(wav)
        with pytest.raises(ValueError, match=match):
            add_sampler_chunks(wav, **GOOD)
    with pytest.raises(ValueError, match="no b'data' chunk"):
        add_sampler_chunks(_riff((b"fmt ", fmt)), **GOOD)
    with pytest.raises(ValueError, match="no b'fmt ' chunk"):
        add_sampler_chunks(_riff((b"data", b"\x00\x00")), **GOOD)
    with pytest.raises(ValueError, match="fewer than 16"):
        add_sampler_chunks(_riff((b"fmt ", fmt[:14]), (b"data", b"")), **GOOD)


@pytest.mark.parametrize("ids, match", [
    ((b"PEA",), "4 bytes"), (("PEAK",), "4 bytes"), ((b"data",), "required"), ((b"fmt ",), "required"),
])
def test_strip_bad_ids(ids, match):
    with pytest.raises(ValueError, match=match):
        strip_chunks(write(np.zeros(10), 48000, "FLOAT"), ids=ids)


@pytest.mark.parametrize("args, kwargs, match", [
    ((-1, 1, 2), {}, r"n_frames must be an integer >= 0, got -1"),
    ((10.0, 1, 2), {}, r"n_frames must be an integer >= 0, got 10\.0"),
    ((10, 0, 2), {}, r"channels must be an integer >= 1, got 0"),
    ((10, 1, 5), {}, r"bytes_per_sample must be one of \(1, 2, 3, 4, 8\), got 5"),
    ((10, 1, 16), {}, r"bytes_per_sample must be an integer in 1\.\.8, got 16"),
    ((10, 1, 2.0), {}, r"bytes_per_sample must be an integer in 1\.\.8, got 2\.0"),
    ((10, 1, 2), {"extra_bytes": -1}, r"extra_bytes must be an integer >= 0, got -1"),
])
def test_needs_rf64_bad_arguments(args, kwargs, match):
    with pytest.raises(ValueError, match=match):
        needs_rf64(*args, **kwargs)
