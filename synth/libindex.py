"""A sample library's index files: the manifest (JSON) and the SFZ sample map.

:mod:`synth.batch` renders the files and hands each one's manifest entry here;
:func:`index_texts` writes the two texts from the library spec
(:class:`synth.library.LibrarySpec`), its jobs and the entries of the files on
disk.  This module writes no files; it only builds and reads text.

Manifest
--------
``manifest.json`` holds ``format`` (:data:`MANIFEST_FORMAT`),
``format_version`` (:data:`FORMAT_VERSION`), ``synth_version``, a ``library``
header (spec, notes, layers, render settings, the one gain and how it was
decided, the library hash, failed jobs) and ``files``, one entry per sample
on one line each.

SFZ map
-------
One ``<group>`` per note x velocity with its key and velocity range, one
``<region>`` per round robin (``seq_position``); ``amp_veltrack=0`` because
the samples already carry their dynamics.  Key-up behaves as ``synth midi``
plays it: ``ampeg_release`` = the patch's ``release_t60`` (a sampler's release
stage then fades the still-ringing sample over that time, as the damper
does), or ``loop_mode=one_shot`` for a patch without dampers
(``release_t60: null``: the sample plays to its end whatever the key does).
"""
from __future__ import annotations

import dataclasses
import json
import math
from pathlib import Path

from . import __version__

__all__ = [
    "key_ranges",
    "velocity_ranges",
    "sfz_text",
    "read_manifest",
    "manifest_text",
    "index_texts",
    "MANIFEST_NAME",
    "MANIFEST_FORMAT",
    "FORMAT_VERSION",
    "LOUDNESS_METER",
]

MANIFEST_NAME = "manifest.json"
MANIFEST_FORMAT = "synth-library"
FORMAT_VERSION = 2  # bump when file naming, hashing or the manifest layout changes
MIDI_LOW, MIDI_HIGH = 0, 127  # MIDI note numbers (MIDI 1.0)
VELOCITY_LOW, VELOCITY_HIGH = 1, 127  # MIDI note-on velocities (0 means note-off)
#: How :func:`synth.library.loudness_lufs` measures, recorded in the manifest.
LOUDNESS_METER = (
    "ITU-R BS.1770-4 gated integrated loudness (synth.loudness; equal to pyloudnorm Meter(filter_class='DeMan') "
    "to rounding): the Recommendation's K-weighting coefficients at 48 kHz, redesigned for other rates"
)


# ---------------------------------------------------------------------------
# SFZ map


def key_ranges(keys):
    """{key: (lokey, hikey)}: each sample covers the keys nearer to it than to a neighbour.

    A key midway between two samples goes to the lower one; the lowest sample
    reaches as far down as it reaches up, the highest as far up as it reaches
    down (within MIDI 0..127).
    """
    keys = sorted(set(keys))
    ranges = {}
    for i, key in enumerate(keys):
        low = (keys[i - 1] + key) // 2 + 1 if i > 0 else None
        high = (key + keys[i + 1]) // 2 if i < len(keys) - 1 else None
        ranges[key] = [low, high]
    for key, span in ranges.items():
        low, high = span
        if low is None:
            low = max(MIDI_LOW, key - ((high - key) if high is not None else 0))
        if high is None:
            high = min(MIDI_HIGH, key + (key - low))
        ranges[key] = (low, high)
    return ranges


def velocity_ranges(velocities):
    """{velocity: (lovel, hivel)}: a layer plays up to its own velocity; the top one up to 127."""
    velocities = sorted(set(velocities))
    ranges = {}
    for i, velocity in enumerate(velocities):
        low = VELOCITY_LOW if i == 0 else velocities[i - 1] + 1
        high = VELOCITY_HIGH if i == len(velocities) - 1 else velocity
        ranges[velocity] = (low, high)
    return ranges


def _key_up(release_t60):
    """The opcode of a key-up: the damper's fade, or a one-shot sample when there are no dampers."""
    return "loop_mode=one_shot" if release_t60 is None else f"ampeg_release={release_t60:g}"


def sfz_text(name, entries, *, comment_lines=(), release_t60=None):
    """An SFZ file mapping `entries` (manifest entries) onto keys and velocities.

    One ``<group>`` per note x velocity with ``lokey hikey pitch_keycenter
    lovel hivel seq_length``, one ``<region>`` per round robin with
    ``sample`` and ``seq_position``.  ``amp_veltrack=0``: the samples already
    carry their dynamics, so the sampler must not scale them by velocity again.
    Key-up: ``ampeg_release=<release_t60>`` (seconds), or
    ``loop_mode=one_shot`` when `release_t60` is None (no dampers); a dict
    {MIDI key: release_t60} (an instrument whose dampers vary by key) puts
    the opcode on each key's groups.
    """
    groups = {}
    for entry in sorted(entries, key=lambda e: (e["midi"], e["velocity"], e["round_robin"])):
        groups.setdefault((entry["midi"], entry["velocity"]), []).append(entry)
    keys = key_ranges([midi for midi, _ in groups])
    layers = {}
    for midi, velocity in groups:
        layers.setdefault(midi, []).append(velocity)
    lines = [f"// {name}: sample map written by synth {__version__}"]
    lines += [f"// {line}" for line in comment_lines]
    per_key = release_t60 if isinstance(release_t60, dict) else None
    if per_key is not None and len(set(per_key.values())) <= 1:  # one value for every key: say it once
        release_t60, per_key = next(iter(per_key.values()), None), None
    lines += ["<global>", "amp_veltrack=0"] + ([] if per_key is not None else [_key_up(release_t60)]) + [""]
    for (midi, velocity), members in groups.items():
        lokey, hikey = keys[midi]
        lovel, hivel = velocity_ranges(layers[midi])[velocity]
        own = "" if per_key is None else " " + _key_up(per_key.get(midi))
        lines.append(
            f"<group> lokey={lokey} hikey={hikey} pitch_keycenter={midi} lovel={lovel} hivel={hivel} "
            f"seq_length={len(members)}{own}"
        )
        for position, entry in enumerate(members, start=1):
            lines.append(f"<region> sample={entry['file']} seq_position={position}")
        lines.append("")
    return "\n".join(lines)


# ---------------------------------------------------------------------------
# The manifest file


def _release(spec):
    """The damper T60 of the library: one value, or {MIDI key: value} for an instrument."""
    release_at = getattr(spec.patch, "release_t60_at", None)
    if release_at is None:
        return spec.patch.damping.release_t60
    return {midi: release_at(midi) for _, midi in spec.notes}


def read_manifest(folder):
    """The manifest in `folder` as a dict, or None if absent, unreadable or of another format."""
    try:
        data = json.loads((Path(folder) / MANIFEST_NAME).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(data, dict) or data.get("format") != MANIFEST_FORMAT or data.get("format_version") != FORMAT_VERSION:
        return None
    if not isinstance(data.get("library"), dict) or not isinstance(data.get("files"), list):
        return None
    return data


def manifest_text(manifest):
    """JSON text of `manifest`: the header indented, then one line per file (it stays small)."""
    head = {key: value for key, value in manifest.items() if key != "files"}
    text = json.dumps(head, indent=1, allow_nan=False)
    files = ",\n".join("  " + json.dumps(entry, allow_nan=False) for entry in manifest["files"])
    return text[:-2] + ',\n "files": [\n' + files + ("\n" if files else "") + " ]\n}\n"


def index_texts(spec, jobs, entries, failed, *, lib_hash, gain, basis, stale=()):
    """(manifest JSON text, SFZ text) of a library.

    Parameters
    ----------
    spec : LibrarySpec
    jobs : list of Job
    entries : dict of job index -> manifest entry (files on disk)
    failed : dict of job index -> error message
    lib_hash : str
        :func:`synth.library.library_hash` of `jobs`.
    gain : float or None
        The library's one gain (linear).
    basis : dict or None
        How the gain was decided.
    stale : sequence of str
        Files on disk that earlier manifests listed and this spec no longer
        makes (kept listed until ``--prune`` deletes them).
    """
    render = spec.patch.render
    files = [entries[i] for i in sorted(entries)]
    current = [entry for entry in files if entry["up_to_date"]]
    gain_db = None if not gain else 20.0 * math.log10(gain)
    library = {
        "name": spec.name,
        "spec": Path(spec.source).name,
        "patch": spec.patch_file,
        "patch_name": spec.patch.name,
        "notes": [text for text, _ in spec.notes],
        "velocities": list(spec.velocities),
        "round_robin": spec.round_robin,
        "variation": dataclasses.asdict(spec.variation),
        "sample_rate": render.sample_rate,
        "bit_depth": render.bit_depth,
        "duration_s": render.duration,
        "peak_db": render.peak_db,
        "peak": render.peak,
        "release_t60_s": spec.patch.damping.release_t60,
        "instrument": hasattr(spec.patch, "keys"),
        "gain": gain,
        "gain_db": gain_db,
        "gain_basis": basis,
        "hash": lib_hash,
        "loudness_meter": LOUDNESS_METER,
        "n_files": len(jobs),
        "complete": len(current) == len(jobs),
        "stale": sorted(stale),
        "failed": [{"file": jobs[i].file, "note": jobs[i].note, "velocity": jobs[i].velocity,
                    "round_robin": jobs[i].round_robin, "error": message} for i, message in sorted(failed.items())],
    }
    manifest = {"format": MANIFEST_FORMAT, "format_version": FORMAT_VERSION, "synth_version": __version__,
                "library": library, "files": files}
    comments = (
        f"{len(current)} samples of patch {spec.patch.name}; one gain for the whole library"
        + (f" ({gain_db:+.2f} dB)" if gain_db is not None else "") + ", so velocity layers keep their dynamics",
        "listening caution: start playback quietly; long exposure to loud sound harms hearing",
    )
    sfz = sfz_text(spec.name, current, comment_lines=comments, release_t60=_release(spec))
    return manifest_text(manifest), sfz + "\n"
