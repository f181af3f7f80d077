"""Sample libraries: the spec, its jobs, file names, hashes and loudness.

A library spec (YAML) names a patch and the notes, velocities and round robins
to render; :func:`load_library_spec` checks it (every error names file, line
and key) and :func:`library_jobs` turns it into one :class:`Job` per
note x velocity x round robin.  A job holds only what it was asked for (note,
velocity, take, detune, excitation point): :func:`job_table` voices it and
computes its partials (the physics solved once per note in a
:class:`~synth.solvecache.SolveCache`), and :func:`input_hash` fingerprints
it without any physics, so a re-run can tell what is up to date at once.
Execution lives in :mod:`synth.batch`; this module does no rendering and
writes no files.
The manifest and SFZ map are built in :mod:`synth.libindex` (its names are
re-exported here).

Spec keys
---------
``patch``        patch file, relative to the spec file (required)
``name``         library name (a slug; default: the patch's name), starts every file name
``output``       output folder, relative to the spec file (default ``renders/<name>``
                 in the working folder; ``--output`` overrides)
``notes``        list of note names (``A2``, ``C#3``, ``Bb1``) or MIDI numbers, or
                 ``{from: C2, to: C5, step: 1}`` (step in semitones)
``velocities``   list of MIDI velocities 1..127: the layers (default ``[100]``)
``round_robin``  variations of each note x velocity (default 1)
``variation``    ``{position, detune_cents, seed}``: seeded jitter of each round robin

Variation
---------
Every sample draws three numbers u0, u1, u2 uniform in [-1, 1) from
``numpy.random.default_rng([seed, midi, velocity, round_robin])`` -- never from
the order in which processes run.  Every partial of the object solved for the
note is moved by ``detune_cents * u0`` cents (the ratios stay as solved, and
no new solve is needed) and the excitation point moved by
``position * u1`` (fraction of the length; ``position * u2`` is the second
coordinate of a 2-D point), clipped to [0, 1].  The pickup does not move.

File names
----------
``<name>_<midi:03d>_<note>_v<velocity:03d>_rr<round robin:02d>.wav``, e.g.
``harp_045_A2_v040_rr01.wav``: sorted by key, then layer, then round robin.
Every part is checked or computed (the name is a slug, the note is spelt from
the MIDI number with ``s`` for a sharp), never copied from the spec text.
"""
from __future__ import annotations

import dataclasses
import hashlib
import json
import math
import os
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import __version__
from .errors import PatchError, option_error
from .libindex import (
    FORMAT_VERSION,
    MIDI_HIGH,
    VELOCITY_HIGH,
    VELOCITY_LOW,
)
from .report import table_to_dict
from .instrument_file import load_playable
from .pipeline import partial_table
from .schema import Field, Section, read_section
from .units import midi_number, midi_to_note, short_repr
from .voicing import REFERENCE_VELOCITY, voice_patch
from .yamlio import file_problem, load_yaml_file

__all__ = [
    "LibrarySpec",
    "Variation",
    "Job",
    "load_library_spec",
    "library_jobs",
    "voice_job",
    "job_table",
    "sample_file_name",
    "is_sample_file_name",
    "job_offsets",
    "patch_fingerprint",
    "input_hash",
    "library_hash",
    "file_hash",
    "dither_seed",
    "loudness_lufs",
    "partials_dict",
]

MAX_ROUND_ROBIN = 99  # round robins per note x velocity (two digits in the file name)
MAX_JOBS = 100_000  # files per library: far beyond any sampler's practical size
MAX_POSITION_JITTER = 0.5  # fraction of the length
MAX_DETUNE_CENTS = 100.0  # cents: one semitone
DITHER_STREAM = 0x5EED  # first word of every per-file dither seed
LOUDNESS_BLOCK_S = 0.4  # s, gating block of ITU-R BS.1770 integrated loudness
_SAFE_FILE = re.compile(r"[A-Za-z0-9][A-Za-z0-9_-]*_\d{3}_[A-Gs0-9-]+_v\d{3}_rr\d{2}\.wav")  # whole name: fullmatch

_SPEC_FIELDS = {
    "name": Field("slug"),
    "patch": Field("str", required=True),
    "output": Field("str"),
    "notes": Field("any"),
    "velocities": Field("any"),
    "round_robin": Field("int", default=1, low=1, high=MAX_ROUND_ROBIN),
    "variation": Field("any"),
}
_VARIATION_FIELDS = {
    "position": Field("number", default=0.0, low=0.0, high=MAX_POSITION_JITTER),
    "detune_cents": Field("number", default=0.0, low=0.0, high=MAX_DETUNE_CENTS),
    "seed": Field("int", default=0, low=0),
}
_RANGE_FIELDS = {
    "from": Field("any", required=True),
    "to": Field("any", required=True),
    "step": Field("int", default=1, low=1, high=MIDI_HIGH),
}


@dataclass(frozen=True)
class Variation:
    """Seeded jitter of the round robins.

    position : float in [0, 0.5], fraction of the length (+- range of the excitation point)
    detune_cents : float in [0, 100], cents (+- range of the pitch)
    seed : int >= 0
    """

    position: float = 0.0
    detune_cents: float = 0.0
    seed: int = 0


@dataclass(frozen=True)
class LibrarySpec:
    """A checked library spec.  `notes` holds (text as written, MIDI number), sorted by MIDI number."""

    name: str
    patch: object
    patch_file: str
    output: Path
    notes: tuple
    velocities: tuple
    round_robin: int
    variation: Variation
    source: str


@dataclass(frozen=True)
class Job:
    """One sample: a note x velocity x round robin and its file.

    `point` is the excitation point of this take (a :class:`synth.patch.Point`,
    or None where the resonator takes no positions); `excitation_position`
    its values.  The voiced patch and the partials are computed on demand
    (:func:`voice_job`, :func:`job_table`).
    """

    index: int
    note: str
    midi: int
    velocity: int
    round_robin: int
    file: str
    detune_cents: float
    point: object

    @property
    def excitation_position(self):
        """The excitation point's values (tuple), or None."""
        return None if self.point is None else tuple(self.point.values)

    @property
    def label(self):
        """Human-readable description, e.g. ``A2, velocity 40, round robin 1``."""
        return f"{self.note}, velocity {self.velocity}, round robin {self.round_robin}"


# ---------------------------------------------------------------------------
# The spec


def load_library_spec(path, *, output=None):
    """Read and check the library spec at `path`.

    Parameters
    ----------
    path : str or os.PathLike
    output : str or None
        ``--output``: overrides the spec's ``output`` (relative to the working folder).

    Returns
    -------
    LibrarySpec

    Raises
    ------
    PatchError
        Naming the file, line and key of the first problem (patch-file
        problems name the patch file).
    """
    file = str(path)
    mapping = load_yaml_file(path)
    if not isinstance(mapping, dict):
        raise PatchError(
            "a library spec must be a mapping with keys patch, notes, velocities, round_robin, variation, output, name",
            file=file,
            line=1,
        )
    top = Section(mapping, file=file)
    values = read_section(top, _SPEC_FIELDS)
    base = Path(path).parent
    if not str(values["patch"]).strip():
        raise top.error("patch", "must name a patch file (YAML), relative to the spec file")
    patch_path = base / values["patch"]
    problem = file_problem(patch_path)
    if problem == "a folder":
        raise top.error("patch", f"{str(patch_path)!r} is a folder, not a patch file")
    if problem == "not found":
        raise top.error("patch", f"no patch file {str(patch_path)!r} (paths are relative to the spec file)")
    if problem:
        raise top.error("patch", f"cannot use {short_repr(str(patch_path))} as the patch file: {problem}")
    patch = load_playable(patch_path)
    name = values["name"] or patch.name
    if mapping.get("notes") is None:
        if not hasattr(patch, "keys"):
            raise top.missing("notes", _SPEC_FIELDS["notes"]) if "notes" not in mapping else top.error(
                "notes", "must be a list of notes (e.g. [A2, A3, A4]) or a range {from: C2, to: C5, step: 1}")
        notes = tuple((midi_to_note(m), m) for m in patch.keys)  # an instrument: every key of its range
    else:
        notes = _notes(top, mapping["notes"])
        contains = getattr(patch, "contains", None)
        outside = [text for text, midi in notes if contains is not None and not contains(midi)]
        if outside:
            raise top.error("notes", f"{', '.join(outside[:6])}{' ...' if len(outside) > 6 else ''} lie outside the "
                                     f"range {patch.range_text} of instrument {patch.name}")
    velocities = _velocities(top, mapping.get("velocities"))
    variation = Variation()
    if mapping.get("variation") is not None:
        variation = Variation(**read_section(top.child("variation"), _VARIATION_FIELDS))
    n_jobs = len(notes) * len(velocities) * values["round_robin"]
    if n_jobs > MAX_JOBS:
        raise top.error("notes", f"{n_jobs} files (notes x velocities x round_robin) is more than the {MAX_JOBS} a library may hold")
    if output is not None:
        folder = Path(output)
        if os.path.exists(folder) and not os.path.isdir(folder):  # os.path: False, not an error, for a bad name
            raise option_error(f"{output!r} exists and is not a folder", "--output")
    elif values["output"] is not None:
        if not values["output"].strip():
            raise top.error("output", "is empty: name a folder (relative to the spec file), or leave the key out "
                                      "for renders/<name> in the working folder")
        folder = Path(os.path.normpath(base / values["output"]))
        if os.path.exists(folder) and not os.path.isdir(folder):
            raise top.error("output", f"{str(folder)!r} exists and is not a folder")
    else:
        folder = Path("renders") / name
    return LibrarySpec(
        name=name,
        patch=patch,
        patch_file=values["patch"],
        output=folder,
        notes=notes,
        velocities=velocities,
        round_robin=values["round_robin"],
        variation=variation,
        source=file,
    )


def _notes(top, value):
    """((text, midi), ...) sorted by MIDI number, from a list or a {from, to, step} range."""
    line = top.line("notes")
    if isinstance(value, dict):
        section = top.child("notes")
        fields = read_section(section, _RANGE_FIELDS)
        ends = {}
        for key in ("from", "to"):
            try:
                ends[key] = midi_number(fields[key])
            except ValueError as error:
                raise section.error(key, str(error)) from None
        if ends["from"] > ends["to"]:
            raise section.error("to", f"must not be below 'from' ({fields['from']}): the range runs upwards")
        midis = range(ends["from"], ends["to"] + 1, fields["step"])
        return tuple((midi_to_note(m), m) for m in midis)
    if not isinstance(value, list) or not value:
        raise PatchError(
            "must be a list of notes (e.g. [A2, A3, A4]) or a range {from: C2, to: C5, step: 1}",
            file=top.file, line=line, key="notes",
        )
    notes, seen = [], {}
    for i, item in enumerate(value):
        try:
            midi = midi_number(item)
        except ValueError as error:
            raise PatchError(str(error), file=top.file, line=line, key=f"notes[{i}]") from None
        if midi in seen:
            raise PatchError(
                f"{item!r} is the same key as {seen[midi]!r} (MIDI {midi}): each note may appear once",
                file=top.file, line=line, key=f"notes[{i}]",
            )
        seen[midi] = item
        notes.append((str(item), midi))
    return tuple(sorted(notes, key=lambda note: note[1]))


def _velocities(top, value):
    line = top.line("velocities")
    if value is None:
        return (REFERENCE_VELOCITY,)
    if not isinstance(value, list) or not value:
        raise PatchError(
            f"must be a list of MIDI velocities ({VELOCITY_LOW}..{VELOCITY_HIGH}), e.g. [40, 100]",
            file=top.file, line=line, key="velocities",
        )
    for i, item in enumerate(value):
        if isinstance(item, bool) or not isinstance(item, int) or not VELOCITY_LOW <= item <= VELOCITY_HIGH:
            raise PatchError(
                f"{item!r} is not a MIDI velocity (a whole number {VELOCITY_LOW}..{VELOCITY_HIGH})",
                file=top.file, line=line, key=f"velocities[{i}]",
            )
        if value.index(item) != i:
            raise PatchError(f"velocity {item} appears twice", file=top.file, line=line, key=f"velocities[{i}]")
    return tuple(sorted(value))


# ---------------------------------------------------------------------------
# Jobs


def is_sample_file_name(text):
    """True if `text` is a file name of the library pattern (no folder, nothing else)."""
    return isinstance(text, str) and _SAFE_FILE.fullmatch(text) is not None


def sample_file_name(name, midi, velocity, round_robin):
    """The file name of one sample (see the module notes); checked before use."""
    note = midi_to_note(midi).replace("#", "s")
    file = f"{name}_{int(midi):03d}_{note}_v{int(velocity):03d}_rr{int(round_robin):02d}.wav"
    if not _SAFE_FILE.fullmatch(file):  # pragma: no cover - every part is checked above
        raise ValueError(f"unsafe sample file name {file!r}")
    return file


def job_offsets(variation, midi, velocity, round_robin):
    """The three uniform numbers in [-1, 1) of one sample (see the module notes)."""
    rng = np.random.default_rng([int(variation.seed), int(midi), int(velocity), int(round_robin)])
    return rng.uniform(-1.0, 1.0, size=3)


def _moved_point(point, jitter, offsets):
    """`point` (synth.patch.Point) with the excitation jitter applied, clipped to [0, 1]."""
    if point is None or jitter == 0.0:
        return point
    values = list(point.values)
    if point.style == "fraction":
        values[0] = float(np.clip(values[0] + jitter * offsets[1], 0.0, 1.0))
    elif point.style == "xy":
        values = [float(np.clip(v + jitter * u, 0.0, 1.0)) for v, u in zip(values, offsets[1:])]
    elif point.style == "polar":
        values[0] = float(np.clip(values[0] + jitter * offsets[1], 0.0, 1.0))
    return dataclasses.replace(point, values=tuple(values))


def _excitation_point(playable, midi):
    """Where key `midi` is excited: an instrument's varied point, else the patch's."""
    point_at = getattr(playable, "excitation_point", None)
    return playable.excitation.position if point_at is None else point_at(midi)


def library_jobs(spec):
    """One :class:`Job` per note x velocity x round robin, sorted by file name (no physics)."""
    jobs = []
    for note, midi in spec.notes:
        for velocity in spec.velocities:
            for rr in range(1, spec.round_robin + 1):
                offsets = job_offsets(spec.variation, midi, velocity, rr)
                jobs.append(Job(
                    index=len(jobs),
                    note=note,
                    midi=midi,
                    velocity=velocity,
                    round_robin=rr,
                    file=sample_file_name(spec.name, midi, velocity, rr),
                    detune_cents=float(spec.variation.detune_cents * offsets[0]),
                    point=_moved_point(_excitation_point(spec.patch, midi), spec.variation.position, offsets),
                ))
    return jobs


def voice_job(spec, job, *, cache=None):
    """The patch of `job`: the spec's patch retuned to the note, at the job's velocity and excitation point.

    The detune is not in it: :func:`job_table` moves the solved partials.

    Raises
    ------
    PatchError
        If the object cannot reach the note (names ``resonator.pitch``).
    """
    voiced = voice_patch(spec.patch, midi_note=job.midi, velocity=job.velocity, cache=cache)
    return dataclasses.replace(voiced, excitation=dataclasses.replace(voiced.excitation, position=job.point))


def job_table(spec, job, *, cache=None):
    """The :class:`~synth.modes.PartialTable` one job renders (its detune applied).

    Raises
    ------
    PatchError
        If the note cannot be voiced or has nothing to sound.
    """
    return partial_table(voice_job(spec, job, cache=cache), detune_cents=job.detune_cents, cache=cache)


# ---------------------------------------------------------------------------
# Hashes: what a file depends on


def _canonical(value):
    """A JSON-ready form of `value` with a stable layout (dataclasses by field)."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        out = {"__type__": type(value).__name__}
        for f in dataclasses.fields(value):
            if f.compare:
                out[f.name] = _canonical(getattr(value, f.name))
        kind = getattr(type(value), "TYPE", None)
        if kind is not None:
            out["__resonator__"] = kind
        return out
    if isinstance(value, dict):
        return {str(k): _canonical(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, np.ndarray)):
        return [_canonical(v) for v in value]
    if isinstance(value, (bool, str)) or value is None:
        return value
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value)
    return repr(value)


def _digest(value):
    text = json.dumps(_canonical(value), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def patch_fingerprint(patch):
    """SHA-256 of every value of `patch` that changes its sound (not its file name or lines)."""
    fingerprint = getattr(patch, "fingerprint", None)  # an instrument: its file's values and its base patch's
    if fingerprint is not None:
        return _digest({"instrument": fingerprint()})
    return _digest({"patch": dataclasses.replace(patch, source="", lines={})})


def dither_seed(job):
    """The fixed dither seed of one sample, from its key, layer and round robin."""
    return [DITHER_STREAM, int(job.midi), int(job.velocity), int(job.round_robin)]


def input_hash(job, fingerprint):
    """SHA-256 of everything one file is made from, computed without any physics.

    The resolved base patch (`fingerprint`: :func:`patch_fingerprint` of the
    spec's patch, render settings and sample format included), the note,
    velocity and take, the take's detune and excitation point (which the
    variation seed decides), the dither seed, and the versions of the
    manifest layout and of synth.
    """
    return _digest({
        "format_version": FORMAT_VERSION,
        "synth_version": __version__,
        "patch": fingerprint,
        "job": {"midi": job.midi, "velocity": job.velocity, "round_robin": job.round_robin, "file": job.file},
        "detune_cents": job.detune_cents,
        "excitation_position": job.excitation_position,
        "dither_seed": dither_seed(job),
    })


def library_hash(input_hashes):
    """SHA-256 of everything the library's one gain depends on: every job's inputs, in order."""
    return _digest({"format_version": FORMAT_VERSION, "synth_version": __version__, "jobs": list(input_hashes)})


def file_hash(input_digest, gain):
    """SHA-256 of one file's bytes-to-be: its inputs (:func:`input_hash`) and the library gain."""
    return _digest({"inputs": input_digest, "gain": float(gain)})


# ---------------------------------------------------------------------------
# Measurements


def loudness_lufs(signal, sample_rate):
    """Integrated loudness (LUFS) of a mono signal, after ITU-R BS.1770-4.

    Parameters
    ----------
    signal : ndarray [shape=(n,)], float, full scale 1.0
    sample_rate : float, Hz

    Returns
    -------
    loudness : float or None, LUFS
        None when it cannot be measured; `note` says why.
    note : str or None

    Notes
    -----
    Measured by :func:`synth.loudness.integrated_loudness`: the
    Recommendation's K-weighting (its tabulated coefficients at 48 kHz,
    redesigned for other rates with De Man's parameters, as pyloudnorm's
    "DeMan" filter class does, so a 0 dBFS 997 Hz sine reads -3.01 LKFS) and
    its gating, agreeing with pyloudnorm's meter to rounding.  The gated
    measure needs at least one 400 ms block, so shorter samples get None.
    """
    from .loudness import integrated_loudness

    signal = np.asarray(signal, dtype=np.float64)
    duration = len(signal) / float(sample_rate)
    if len(signal) < LOUDNESS_BLOCK_S * float(sample_rate):
        return None, f"not measured: {duration:.3g} s is shorter than one {LOUDNESS_BLOCK_S * 1000:.0f} ms gating block (ITU-R BS.1770)"
    try:
        value = integrated_loudness(signal, float(sample_rate))
    except ValueError as error:
        return None, f"not measured: {error}"
    if not math.isfinite(value):
        return None, "not measured: every block is below the -70 LUFS absolute gate (ITU-R BS.1770)"
    return float(value), None


def partials_dict(table):
    """The partial table as in ``synth modes --json``, without list-valued columns.

    Per-mode lists (node positions) are left out to keep the manifest small;
    ``synth modes`` lists them.
    """
    data = table_to_dict(table)
    data["modes"] = [{k: v for k, v in mode.items() if not isinstance(v, list)} for mode in data["modes"]]
    return data
