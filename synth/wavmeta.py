"""Sampler metadata (``smpl``, ``inst``) and chunk surgery on the bytes of a RIFF WAVE file.

The functions work on a complete WAV file held in memory as ``bytes``, as
written by libsndfile through soundfile: a ``RIFF`` header, the form type
``WAVE``, then chunks (``fmt ``, ``data`` and possibly ``fact`` and ``PEAK``
for floating-point files).  Every chunk is ``id`` (4 bytes), ``size``
(little-endian unsigned 32-bit, the payload length without the pad byte) and
the payload, followed by one pad byte when the size is odd, so that every
chunk starts on an even offset (word alignment).  The ``RIFF`` size field
counts every byte after itself: ``len(file) - 8``.

* :func:`read_chunks` walks the chunks.
* :func:`add_sampler_chunks` inserts a sampled-instrument chunk ``smpl`` and
  an instrument chunk ``inst`` immediately before the ``data`` chunk.  That
  place is chosen because readers that stop at ``data`` (Python's ``wave``,
  streaming players) still see the metadata, and because nothing depends on
  how the audio at the end of the file is padded.  Existing ``smpl`` and
  ``inst`` chunks are replaced, so applying it twice does not duplicate them.
* :func:`strip_chunks` removes chunks, by default libsndfile's ``PEAK``
  chunk, whose wall-clock timestamp (seconds) makes two renders of the same
  float signal differ; without it they are byte-identical.
* :data:`WAV_LIMIT_BYTES` and :func:`needs_rf64` decide when a file must be
  written as RF64 (soundfile ``format="RF64"``) instead of WAV.

RF64 input (``RF64`` or ``BW64`` in place of ``RIFF``) is not handled: such a
file is larger than anyone should hold in memory as ``bytes``.

References
----------
.. [1] IBM Corporation and Microsoft Corporation, "Multimedia Programming
   Interface and Data Specifications 1.0", 1991 (RIFF chunks, word
   alignment; the WAVE form).
.. [2] Microsoft Corporation, "New Multimedia Data Types and Data
   Techniques", revision 3.0, 1994 (the ``smpl`` and ``inst`` chunks).  Field
   order and widths confirmed, as quoted from [2], by wavref.til.cafe pages
   "chunk/smpl" and "chunk/inst" and by the recordingblogs.com wiki pages
   "Sample chunk of a Wave file" and "Instrument chunk of a Wave file":
   ``smpl`` = manufacturer, product, sample_period, midi_unity_note,
   midi_pitch_fraction, smpte_format, smpte_offset, all u32, and (from
   the un4seen.com BASS documentation page "TAG_SMPL", an audio library's
   C rendering of the same structure) cSampleLoops, cbSamplerData, all
   DWORDs, followed by the loops; "A value of
   0x80000000 is 1/2 semitone (50 cents)"; "44.1 kHz would be specified as
   22675 (0x00005893)".  ``inst`` = unshifted_note u8, fine_tune i8
   ("-50 to 50" cents), gain i8 (dB), low_note u8, high_note u8,
   low_velocity u8, high_velocity u8.
.. [3] EBU Tech 3306, "MBWF / RF64: An extended File Format for Audio", 2009
   (from memory: the 64-bit sizes of RF64 in a ``ds64`` chunk).
"""
from __future__ import annotations

import operator
import struct

__all__ = [
    "zero_peak_timestamp",
    "WAV_LIMIT_BYTES",
    "HEADER_ALLOWANCE_BYTES",
    "read_chunks",
    "add_sampler_chunks",
    "strip_chunks",
    "needs_rf64",
]

#: Largest total WAV file length (bytes) accepted: 2**32 - 1.  The ``RIFF``
#: size field (u32) counts the bytes after the first 8, so the format itself
#: would allow a file of up to 2**32 + 6 bytes (the size is always even);
#: the 8 bytes given up buy a simple rule -- every offset and length in the
#: file fits an unsigned 32-bit integer, for readers that keep the file
#: position or length in one.  (Readers using a signed 32-bit size fail
#: already past 2**31 - 1; nothing here caters for them.)
WAV_LIMIT_BYTES = 2**32 - 1

#: Bytes allowed, by default, for everything in a file but the audio samples:
#: RIFF header (12), ``fmt `` (24 to 48), ``fact`` (12), ``PEAK`` (16 + 8 per
#: channel), ``data`` header (8), ``smpl`` (44), ``inst`` (16), with room to
#: spare.  libsndfile 1.2.2 writes 44 bytes of headers for PCM and 72 + 8 per
#: channel for FLOAT (measured).  Overstating it only moves files within
#: 4 KiB of the limit to RF64.
HEADER_ALLOWANCE_BYTES = 4096

_U32_MAX = 2**32 - 1
_RIFF_HEADER = 12  # b"RIFF", u32 size, b"WAVE"
_REQUIRED = (b"fmt ", b"data")
_SAMPLE_WIDTHS = (1, 2, 3, 4, 8)  # bytes: PCM_U8, PCM_16, PCM_24, PCM_32/FLOAT, DOUBLE


def _walk(wav):
    """(id, payload start, payload size) of every chunk; the checks of :func:`read_chunks`."""
    try:
        view = memoryview(wav).cast("B")
    except TypeError:
        raise ValueError(f"a WAV file must be bytes, not {type(wav).__name__}") from None
    if len(view) < _RIFF_HEADER:
        raise ValueError(f"not a RIFF/WAVE file: {len(view)} bytes, fewer than the 12-byte header")
    magic = bytes(view[0:4])
    if magic in (b"RF64", b"BW64"):
        raise ValueError(f"{magic!r} (64-bit RIFF) files are not handled, only 'RIFF'")
    if magic != b"RIFF" or bytes(view[8:12]) != b"WAVE":
        raise ValueError(f"not a RIFF/WAVE file: starts {bytes(view[0:4])!r}...{bytes(view[8:12])!r}")
    (riff_size,) = struct.unpack_from("<I", view, 4)
    end = 8 + riff_size
    if end != len(view):
        raise ValueError(f"RIFF size field {riff_size} says the file is {end} bytes; it is {len(view)}")
    chunks = []
    offset = _RIFF_HEADER
    while offset < end:
        if offset + 8 > end:
            raise ValueError(f"chunk header at byte {offset} runs past the end ({end} bytes)")
        chunk_id = bytes(view[offset:offset + 4])
        (size,) = struct.unpack_from("<I", view, offset + 4)
        stop = offset + 8 + size + (size & 1)
        if stop > end:
            raise ValueError(f"chunk {chunk_id!r} at byte {offset} ({size} bytes"
                             f"{' + pad' if size & 1 else ''}) runs past the end ({end} bytes)")
        chunks.append((chunk_id, offset + 8, size))
        offset = stop
    return view, chunks


def read_chunks(wav: bytes) -> list[tuple[bytes, bytes]]:
    """The chunks of a RIFF/WAVE file, in file order.

    Parameters
    ----------
    wav : bytes-like
        A complete RIFF/WAVE file.

    Returns
    -------
    list of (bytes, bytes)
        ``(chunk id, payload)`` per chunk; the payload excludes the pad byte.

    Raises
    ------
    ValueError
        If `wav` is not RIFF/WAVE (including RF64, which is not handled), if
        the RIFF size field disagrees with the length of `wav`, or if a chunk
        (with its pad byte) runs past the end.

    Notes
    -----
    Strict by design: the functions that rewrite a file must not drop bytes
    they did not understand.

    References
    ----------
    IBM and Microsoft, "Multimedia Programming Interface and Data
    Specifications 1.0", 1991 (RIFF chunk structure).
    """
    view, chunks = _walk(wav)
    return [(chunk_id, bytes(view[start:start + size])) for chunk_id, start, size in chunks]


def _assemble(pieces):
    """A RIFF/WAVE file from (id, payload) pieces, each padded to an even length."""
    body = []
    length = 4  # b"WAVE"
    for chunk_id, payload in pieces:
        size = len(payload)
        if size > _U32_MAX:
            raise ValueError(f"chunk {chunk_id!r} of {size} bytes does not fit a 32-bit size field")
        body += [chunk_id, struct.pack("<I", size), payload]
        if size & 1:
            body.append(b"\x00")
        length += 8 + size + (size & 1)
    if 8 + length > WAV_LIMIT_BYTES:
        raise ValueError(f"the file would be {8 + length} bytes, more than WAV_LIMIT_BYTES "
                         f"({WAV_LIMIT_BYTES}); write it as RF64")
    return b"".join([b"RIFF", struct.pack("<I", length), b"WAVE", *body])


def _integer(name, value, low, high=None):
    """`value` as an int in low..high (no upper bound for None), else ValueError naming both."""
    allowed = f"an integer >= {low}" if high is None else f"an integer in {low}..{high}"
    try:
        number = operator.index(value)
    except TypeError:
        raise ValueError(f"{name} must be {allowed}, got {value!r}") from None
    if isinstance(value, bool) or number < low or (high is not None and number > high):
        raise ValueError(f"{name} must be {allowed}, got {value!r}")
    return number


def _real(name, value, low, high, *, high_open=False):
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a number in {low}..{high}, got {value!r}") from None
    inside = low <= number < high if high_open else low <= number <= high
    if isinstance(value, bool) or not inside:
        interval = f"[{low}, {high})" if high_open else f"[{low}, {high}]"
        raise ValueError(f"{name} must be in {interval}, got {value!r}")
    return number


def add_sampler_chunks(wav: bytes, *, sample_rate, unity_note, pitch_fraction_cents=0.0,
                       fine_tune_cents=0.0, gain_db=0, low_note=0, high_note=127,
                       low_velocity=1, high_velocity=127, unshifted_note=None) -> bytes:
    """The WAV file with a ``smpl`` and an ``inst`` chunk inserted before its ``data`` chunk.

    Parameters
    ----------
    wav : bytes-like
        A complete RIFF/WAVE file with a ``fmt `` and a ``data`` chunk.
    sample_rate : int
        Sample rate, Hz (an integral float is accepted); must equal the one
        in the ``fmt `` chunk (a guard against labelling the wrong file).
    unity_note : int
        MIDI note (0..127) that replays the sample at its recorded pitch.
    pitch_fraction_cents : float, optional
        Fraction of a semitone above `unity_note`, cents, 0 <= c < 100;
        stored as ``round(c / 100 * 2**32)`` (at most 2**32 - 1).
    fine_tune_cents : float, optional
        ``inst`` fine tune, cents, -50..50; stored rounded to a whole cent.
    gain_db : int, optional
        Suggested gain, dB, -64..63.
    low_note, high_note : int, optional
        Usable MIDI note range, 0..127, ``low_note <= high_note``.
    low_velocity, high_velocity : int, optional
        Usable MIDI velocity range, 1..127, ``low_velocity <= high_velocity``.
    unshifted_note : int or None, optional
        ``inst``'s note, 0..127, that `fine_tune_cents` tunes the sample onto
        (default `unity_note`): for a sample a little sharp of its note, the
        note above `unity_note`, tuned down.

    Returns
    -------
    bytes
        The file with the two chunks before ``data``, any earlier ``smpl`` or
        ``inst`` chunks removed and the RIFF size fixed.  The other chunks,
        the audio included, are copied unchanged.

    Raises
    ------
    ValueError
        For malformed `wav` (see :func:`read_chunks`), a missing ``fmt `` or
        ``data`` chunk, a `sample_rate` other than the file's, any argument
        outside its range (the message names the value and the range), or a
        result larger than :data:`WAV_LIMIT_BYTES`.

    Notes
    -----
    ``smpl`` payload (36 bytes, nine little-endian u32): manufacturer 0,
    product 0, sample period ``10**9 // sample_rate`` ns, MIDI unity note,
    MIDI pitch fraction, SMPTE format 0, SMPTE offset 0, number of sample
    loops 0, sampler data size 0.  The period is truncated, not rounded,
    following the specification's own example (44.1 kHz -> 22675 ns,
    although 10**9 / 44100 = 22675.7).

    ``inst`` payload (7 bytes, size field 7, then a zero pad byte): unshifted
    note (`unshifted_note`, default `unity_note`), fine tune (i8), gain (i8),
    low note, high note, low velocity, high velocity.

    References
    ----------
    Microsoft, "New Multimedia Data Types and Data Techniques" 3.0, 1994
    (``smpl``, ``inst``), confirmed as quoted by wavref.til.cafe and the
    recordingblogs.com wiki (see the module docstring).  IBM and Microsoft,
    "Multimedia Programming Interface and Data Specifications 1.0", 1991.
    """
    unity = _integer("unity_note", unity_note, 0, 127)
    unshifted = unity if unshifted_note is None else _integer("unshifted_note", unshifted_note, 0, 127)
    fraction_cents = _real("pitch_fraction_cents", pitch_fraction_cents, 0.0, 100.0, high_open=True)
    fine = _real("fine_tune_cents", fine_tune_cents, -50.0, 50.0)
    gain = _integer("gain_db", gain_db, -64, 63)
    notes = [_integer(name, value, 0, 127) for name, value in (("low_note", low_note), ("high_note", high_note))]
    velocities = [_integer(name, value, 1, 127)
                  for name, value in (("low_velocity", low_velocity), ("high_velocity", high_velocity))]
    if notes[0] > notes[1]:
        raise ValueError(f"low_note ({notes[0]}) must not exceed high_note ({notes[1]})")
    if velocities[0] > velocities[1]:
        raise ValueError(f"low_velocity ({velocities[0]}) must not exceed high_velocity ({velocities[1]})")
    if isinstance(sample_rate, float) and sample_rate.is_integer():
        sample_rate = int(sample_rate)  # 48000.0 names the same rate as 48000
    rate = _integer("sample_rate", sample_rate, 1, _U32_MAX)

    view, chunks = _walk(wav)
    ids = [chunk_id for chunk_id, _, _ in chunks]
    for required in _REQUIRED:
        if required not in ids:
            raise ValueError(f"the file has no {required!r} chunk (its chunks: {ids})")
    fmt_start, fmt_size = next((start, size) for chunk_id, start, size in chunks if chunk_id == b"fmt ")
    if fmt_size < 16:
        raise ValueError(f"the 'fmt ' chunk is {fmt_size} bytes, fewer than 16")
    (file_rate,) = struct.unpack_from("<I", view, fmt_start + 4)
    if file_rate != rate:
        raise ValueError(f"sample_rate {rate} Hz differs from the file's {file_rate} Hz")

    fraction = min(round(fraction_cents / 100.0 * 2**32), _U32_MAX)
    smpl = struct.pack("<9I", 0, 0, 10**9 // rate, unity, fraction, 0, 0, 0, 0)
    inst = struct.pack("<BbbBBBB", unshifted, int(round(fine)), gain, *notes, *velocities)
    pieces = []
    for chunk_id, start, size in chunks:
        if chunk_id in (b"smpl", b"inst"):
            continue
        if chunk_id == b"data" and not any(piece_id == b"smpl" for piece_id, _ in pieces):
            pieces += [(b"smpl", smpl), (b"inst", inst)]
        pieces.append((chunk_id, view[start:start + size]))
    return _assemble(pieces)


def strip_chunks(wav: bytes, *, ids=(b"PEAK",)) -> bytes:
    """The WAV file without the chunks named in `ids`.

    Parameters
    ----------
    wav : bytes-like
        A complete RIFF/WAVE file.
    ids : iterable of bytes, optional
        Four-byte chunk ids to remove; default ``(b"PEAK",)``.

    Returns
    -------
    bytes
        The file without those chunks, the RIFF size fixed; the rest copied
        unchanged (pad bytes written as zero).  A file holding none of them
        comes back equal to `wav` when its pad bytes were zero.

    Raises
    ------
    ValueError
        For malformed `wav` (see :func:`read_chunks`), an id that is not 4
        bytes, or an attempt to remove ``fmt `` or ``data``.

    Notes
    -----
    libsndfile writes a ``PEAK`` chunk (version, u32 timestamp in seconds,
    then value and position per channel) into every 32- and 64-bit float
    WAV it writes; the timestamp is the wall-clock time of writing.

    References
    ----------
    IBM and Microsoft, "Multimedia Programming Interface and Data
    Specifications 1.0", 1991 (RIFF chunk structure).
    """
    if isinstance(ids, (bytes, bytearray)):
        ids = (ids,)
    drop = set()
    for chunk_id in ids:
        if not isinstance(chunk_id, (bytes, bytearray)) or len(chunk_id) != 4:
            raise ValueError(f"chunk ids must be 4 bytes, got {chunk_id!r}")
        if bytes(chunk_id) in _REQUIRED:
            raise ValueError(f"the {bytes(chunk_id)!r} chunk is required and cannot be stripped")
        drop.add(bytes(chunk_id))
    view, chunks = _walk(wav)
    return _assemble([(chunk_id, view[start:start + size])
                      for chunk_id, start, size in chunks if chunk_id not in drop])


def needs_rf64(n_frames, channels, bytes_per_sample, *, extra_bytes=HEADER_ALLOWANCE_BYTES) -> bool:
    """Whether a file of this much audio must be written as RF64 rather than WAV.

    Parameters
    ----------
    n_frames : int
        Sample frames, >= 0.
    channels : int
        Channels, >= 1.
    bytes_per_sample : int
        Bytes of one sample of one channel: 1, 2, 3 (PCM_24), 4 (PCM_32,
        FLOAT) or 8 (DOUBLE).
    extra_bytes : int, optional
        Bytes of everything but the samples (headers, metadata chunks), >= 0;
        default :data:`HEADER_ALLOWANCE_BYTES`.

    Returns
    -------
    bool
        True when ``data + pad + extra_bytes > WAV_LIMIT_BYTES``, where
        ``data = n_frames * channels * bytes_per_sample`` and ``pad`` is 1 if
        ``data`` is odd.

    Raises
    ------
    ValueError
        If an argument is not an integer in its range.

    Notes
    -----
    libsndfile writes RF64 when asked for ``format="RF64"``; a WAV too large
    for its 32-bit sizes cannot be represented, so the choice has to be made
    before writing.

    References
    ----------
    IBM and Microsoft, "Multimedia Programming Interface and Data
    Specifications 1.0", 1991 (32-bit chunk sizes); EBU Tech 3306 (RF64).
    """
    frames = _integer("n_frames", n_frames, 0)
    chans = _integer("channels", channels, 1)
    width = _integer("bytes_per_sample", bytes_per_sample, 1, 8)
    if width not in _SAMPLE_WIDTHS:
        raise ValueError(f"bytes_per_sample must be one of {_SAMPLE_WIDTHS}, got {bytes_per_sample!r}")
    extra = _integer("extra_bytes", extra_bytes, 0)
    data = frames * chans * width
    return data + (data & 1) + extra > WAV_LIMIT_BYTES


def zero_peak_timestamp(path, *, search_bytes=4096):
    """Set the timestamp of a WAV file's ``PEAK`` chunk to 0, in place (no other byte changes).

    For files written as a stream (a song), where :func:`strip_chunks` would
    mean rewriting the whole file: libsndfile puts the chunk near the start
    with the wall-clock time in it; zeroed, two renders of one signal are
    byte-identical.  Returns True if a PEAK chunk was found.
    """
    with open(path, "r+b") as handle:
        head = handle.read(search_bytes)
        if head[:4] != b"RIFF" or head[8:12] != b"WAVE":
            return False
        offset = 12
        while offset + 8 <= len(head):
            chunk_id = head[offset:offset + 4]
            (size,) = struct.unpack_from("<I", head, offset + 4)
            if chunk_id == b"PEAK":
                handle.seek(offset + 8 + 4)  # payload: version (u32), timestamp (u32), peaks
                handle.write(b"\x00\x00\x00\x00")
                return True
            if chunk_id == b"data":
                return False
            offset += 8 + size + (size & 1)
    return False
