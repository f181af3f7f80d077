"""Patch files: YAML -> validated :class:`Patch` in SI units.

Every error is a :class:`~synth.errors.PatchError` naming the file, the line,
the dotted key and what is allowed.  YAML is read with the safe loader only.
"""
from __future__ import annotations

import copy
import difflib
import math
from dataclasses import dataclass, field, replace

from .errors import COMMAND_LINE, PatchError
from .excitation import DEFAULT_RELEASE_TIME_S, EXCITATIONS, MEASURES, Pulse, check_measure
from .materials import MATERIALS, Material
from .resonators import (
    RESONATOR_TYPES,
    SpecError,
    UnreachablePitch,
    resonator_module,
)
from .solvecache import DEFAULT_CACHE
from .schema import Field, Section, convert, convert_option, read_section
from .units import short_repr
from .yamlio import LineDict, load_yaml_file, load_yaml_text

__all__ = [
    "Patch",
    "Excitation",
    "Pickup",
    "Damping",
    "RenderSettings",
    "load_patch",
    "patch_from_text",
    "patch_from_mapping",
    "retune",
    "MAX_MODES",
    "MIN_SAMPLE_RATE",
    "MAX_SAMPLE_RATE",
    "MIN_DURATION_S",
    "MEMORY_LIMIT_BYTES",
    "estimate_render_bytes",
]

#: Largest mode count a patch may ask for.
MAX_MODES = 20000
#: Sample rates a patch may ask for (Hz): 1 kHz .. 768 kHz, a whole number of Hz
#: (a WAV header holds nothing else); 768 kHz is the highest rate common
#: audio interfaces offer (common practice).
MIN_SAMPLE_RATE = 1000
MAX_SAMPLE_RATE = 768000
#: Shortest render (s): anything shorter is an empty file, not a sound.
MIN_DURATION_S = 1e-3
#: Renders estimated to need more memory than this are refused (a workstation's
#: memory; common practice for a desktop machine, not a measured limit).
MEMORY_LIMIT_BYTES = 16 * 2**30
#: Peak working bytes per output sample of ``synth render`` (the float32 signal,
#: its normalised copy, the float64 scratch and integers of the conversion, the
#: loudness meter's float64 copies).  Measured as peak RSS of a render minus
#: that of the same render at --duration 0.001, each in its own process:
#:   .venv/bin/python -c "import resource,sys; from synth.cli import main; main(sys.argv[1:]);
#:   print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)" render PATCH -o /tmp/o.wav -q
#:   --sample-rate 768000 --duration 4        (and 48000 x 40 s; 20 s and 2 s for the slopes)
#: on patches/string-bass-steel-a1, partials-bell-invented and
#: plate-aluminium-gong-disc, 24-bit WAV (16- and 32-bit measured lower):
#: 67.7-68.7 bytes a sample at 48 kHz x 40 s, 63.4-65.3 at 768 kHz x 4 s;
#: slopes 66.7-67.0 (48 kHz, 20 -> 40 s) and 58.8-58.9 (768 kHz, 2 -> 4 s).
#: 80 is the largest (68.7) plus about 15 %.
BYTES_PER_SAMPLE = 80
#: Working bytes per computed mode (table, report and engine state); measured
#: about 870 bytes a mode (max_modes 256 -> 20000 at 768 kHz x 0.2 s: +17 MB).
BYTES_PER_MODE = 4096
#: Fixed working memory of a render whatever its length (filters, engine
#: blocks, scratch buffers): the intercepts of the slopes above were about 3 MB
#: at 48 kHz and 20 MB at 768 kHz; 32 MiB covers them, so short renders are
#: covered too (tests/test_input_limits.py measures one of 1 s at 768 kHz).
RENDER_BASE_BYTES = 32 * 2**20


@dataclass(frozen=True)
class Point:
    """A position on the object: ``style`` is "fraction", "xy" or "polar".

    fraction: (x,) fraction of the length; xy: (x, y) fractions of width and
    height; polar: (radius fraction, angle in rad).
    """

    style: str
    values: tuple


@dataclass(frozen=True)
class Excitation:
    """How the object is set vibrating (patch section ``excitation:``).

    Attributes
    ----------
    kind : {"pluck", "strike", "impulse"}
        Patch key ``type``.
    position : Point or None
        Where it is excited, in the resonator's position style; None where the
        resonator takes no positions.
    contact_time : float >= 0, s
        How long a strike touches the object (0..1 s): its half-sine force
        pulse filters the high modes.  Default 1 ms.
    strength : float > 0, dimensionless
        Scale of every amplitude (at most 1e6); matters only with
        ``render.peak_db: null``.  Default 1.
    release_time : float >= 0, s
        How long a pluck's release takes (0..100 ms): the holding force
        falls as a raised cosine.  Default
        :data:`synth.excitation.DEFAULT_RELEASE_TIME_S` (0.2 ms).
    """

    kind: str = "pluck"
    position: Point | None = None
    contact_time: float = 1e-3  # s
    strength: float = 1.0
    release_time: float = DEFAULT_RELEASE_TIME_S  # s

    @property
    def pulse(self):
        """The force's time course (:class:`synth.excitation.Pulse`)."""
        duration = {"strike": self.contact_time, "pluck": self.release_time}.get(self.kind, 0.0)
        return Pulse(self.kind, duration)


@dataclass(frozen=True)
class Pickup:
    """Where the sound is taken from (patch section ``pickup:``).

    Attributes
    ----------
    position : Point or None
        In the resonator's position style; None weights every mode 1 (a
        listener who hears the whole object).
    measures : {"displacement", "velocity", "acceleration"}
        What the pickup reads.  Default velocity (displacement for an
        impulse, whose velocity would start with a step).
    """

    position: Point | None = None  # None: every mode weighted 1
    measures: str = "velocity"


@dataclass(frozen=True)
class Damping:
    """How fast the partials decay (patch section ``damping:``).

    Attributes
    ----------
    t60 : float > 0, s
        Time to decay 60 dB at the fundamental (at most 3600 s).  Default 3 s.
    t60_high : float > 0 or None, s
        T60 at `high_frequency`, at most `t60`; None gives every partial `t60`.
    high_frequency : float > 0, Hz
        Frequency where `t60_high` holds; above the fundamental.  Default 4 kHz.
    release_t60 : float > 0 or None, s
        T60 after a MIDI note-off (at most 3600 s), and the ending of a file
        whose fixed duration would cut the sound; None: the object has no
        dampers (it rings on after key-up).  Default 0.15 s.
    """

    t60: float = 3.0  # s, at the fundamental
    t60_high: float | None = None  # s, at high_frequency
    high_frequency: float = 4000.0  # Hz
    release_t60: float | None = 0.15  # s, after note-off; None: no dampers


@dataclass(frozen=True)
class RenderSettings:
    """How the patch is rendered (patch section ``render:``).

    Attributes
    ----------
    duration : float or "auto", s
        Length of the output, :data:`MIN_DURATION_S` (1 ms) or more; "auto"
        (the default) until every mode's envelope has summed below -90 dB of
        the peak (at most :data:`synth.tone.AUTO_CAP_S`).
    sample_rate : int, Hz
        A whole number of Hz, :data:`MIN_SAMPLE_RATE` .. :data:`MAX_SAMPLE_RATE`.
        Default 48000.
    bit_depth : {16, 24, 32}
        Bits per sample of the output (32: float).  Default 24.
    peak_db : float or None, dBFS
        Peak level the render is normalised to (-120..0); None keeps the
        absolute scale.  Default -1.
    max_modes : int
        Modes computed (1 .. :data:`MAX_MODES`), before those at or above
        Nyquist are dropped.  Default 256.
    peak : {"true", "sample"}
        What `peak_db` normalises: the true (inter-sample) peak of ITU-R
        BS.1770-4 Annex 2 (the default: no reconstructed overs) or the
        largest sample.
    """

    duration: float | str = "auto"  # s, or "auto"
    sample_rate: int = 48000  # Hz
    bit_depth: int = 24
    peak_db: float | None = -1.0  # dBFS; None keeps the absolute scale
    max_modes: int = 256
    peak: str = "true"


@dataclass(frozen=True)
class Patch:
    """A validated patch.  `lines` maps dotted keys to their line in `source`."""

    name: str
    resonator: object
    excitation: Excitation
    pickup: Pickup
    damping: Damping
    render: RenderSettings
    coupling: object = None  # synth.coupling.KeyCoupling of an instrument's key; None for a patch file
    source: str = "<patch>"
    lines: dict = field(default_factory=dict, compare=False)

    def error(self, key, message):
        """A PatchError for dotted `key`, naming this patch's file and line."""
        return PatchError(message, file=self.source, line=self.lines.get(key), key=key)


_RESONATOR_TAKES = f"a mapping with type ({', '.join(RESONATOR_TYPES)}) and that object's keys"
_MATERIAL_TAKES = (
    f"a material name ({', '.join(sorted(MATERIALS))}) or a mapping of density, youngs_modulus, "
    "poisson_ratio, tensile_strength"
)

_TOP = {
    "name": Field("slug", required=True),
    "resonator": Field("any", required=True, takes=_RESONATOR_TAKES),
    "excitation": Field("any"),
    "pickup": Field("any"),
    "damping": Field("any"),
    "render": Field("any"),
}

_MATERIAL_FIELDS = {
    "density": Field("density", required=True, positive=True),
    "youngs_modulus": Field("pressure", required=True, low=0.0),  # 0: an ideal string, no stiffness
    "poisson_ratio": Field("number", low=-1.0, high=0.5, default=0.3),
    "tensile_strength": Field("pressure", positive=True, nullable=True),
}

_POSITION_1D = Field("number", low=0.0, high=1.0)

_EXCITATION_FIELDS = {
    "type": Field("choice", default="pluck", choices=EXCITATIONS),
    "position": Field("any"),
    "contact_time": Field("time", default=1e-3, low=0.0, high=1.0),
    "strength": Field("number", default=1.0, positive=True, high=1e6),
    "release_time": Field("time", default=DEFAULT_RELEASE_TIME_S, low=0.0, high=0.1),
}

_PICKUP_FIELDS = {
    "position": Field("any"),
    "measures": Field("choice", choices=MEASURES),
}

_DAMPING_FIELDS = {
    "t60": Field("time", default=3.0, positive=True, high=3600.0),
    "t60_high": Field("time", positive=True, high=3600.0),
    "high_frequency": Field("frequency", default=4000.0, positive=True),
    "release_t60": Field("time", default=0.15, positive=True, high=3600.0, nullable=True),
}

_RENDER_FIELDS = {
    "duration": Field("time", default="auto", positive=True, low=MIN_DURATION_S, keywords=("auto",),
                      takes="a time, e.g. '4 s', or auto (until the sound has decayed 90 dB)"),
    "sample_rate": Field("frequency", default=48000, low=MIN_SAMPLE_RATE, high=MAX_SAMPLE_RATE, whole=True),
    "bit_depth": Field("choice", default=24, choices=(16, 24, 32)),
    "peak_db": Field("level", default=-1.0, nullable=True, high=0.0, low=-120.0),
    "max_modes": Field("int", default=256, low=1, high=MAX_MODES),
    "peak": Field("choice", default="true", choices=("true", "sample")),
}


def material_from(section, key="material"):
    """A :class:`Material` from a name or a mapping of constants."""
    value = section.mapping.get(key)
    if isinstance(value, str):
        if value not in MATERIALS:
            close = difflib.get_close_matches(value, list(MATERIALS), n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise section.error(key, f"unknown material {short_repr(value)}{hint} (known: {', '.join(sorted(MATERIALS))}; or give a mapping of density, youngs_modulus, poisson_ratio, tensile_strength)")
        return MATERIALS[value]
    if isinstance(value, dict):
        values = read_section(section.child(key), _MATERIAL_FIELDS)
        return Material("custom", values["density"], values["youngs_modulus"], values["poisson_ratio"], values["tensile_strength"], source="patch")
    raise section.error(key, f"must be a material name ({', '.join(sorted(MATERIALS))}) or a mapping of constants, got {short_repr(value)}")


#: Fractions closer than this to 0 or 1 are the end (or centre) itself: a point 1e-45 of the length
#: from an end would otherwise scale a pluck's weights by 1 / position and overflow.
POSITION_SNAP = 1e-9


def _snapped(fraction):
    return 0.0 if fraction < POSITION_SNAP else 1.0 if fraction > 1.0 - POSITION_SNAP else fraction


def _position(section, key, style, default):
    """Read a position of the given style (see resonators.common)."""
    if key not in section.mapping:
        return default
    value = section.mapping[key]
    try:
        if style == "fraction":
            return Point("fraction", (_snapped(convert(_POSITION_1D, value)),))
        if style == "xy":
            if not isinstance(value, list) or len(value) != 2:
                raise ValueError(f"must be [x, y], two fractions of the width and height (0..1), got {short_repr(value)}")
            return Point("xy", tuple(_snapped(convert(_POSITION_1D, v)) for v in value))
        if style == "polar":
            if not isinstance(value, dict):
                raise ValueError(f"must be {{radius: fraction 0..1, angle: degrees}}, got {short_repr(value)}")
            polar = Section(value, file=section.file, path=section.key(key))
            values = read_section(polar, _POLAR_FIELDS)
            return Point("polar", (_snapped(values["radius"]), values["angle"]))
        raise ValueError("this resonator takes no positions; leave the key out")
    except ValueError as error:
        if isinstance(error, PatchError):
            raise
        hint = " (a fraction of the length, 0..1)" if style == "fraction" else ""
        raise section.error(key, f"{error}{hint}") from None


_POLAR_FIELDS = {
    "radius": Field("number", required=True, low=0.0, high=1.0),
    "angle": Field("angle", default=0.0),
}

_DEFAULT_POSITIONS = {
    "fraction": Point("fraction", (0.2,)),
    "xy": Point("xy", (0.31, 0.37)),
    "polar": Point("polar", (0.33, 0.0)),
    "none": None,
}


def _build_resonator(resonator):
    """The resonator spec of a `resonator:` section."""
    kind = resonator.mapping.get("type")
    if kind is None:
        error = resonator.missing("type")
        raise PatchError(f"{error.message} (allowed: {', '.join(RESONATOR_TYPES)})", file=error.file, line=error.line, key=error.key)
    try:
        convert(Field("choice", choices=RESONATOR_TYPES), kind)
    except ValueError as error:
        raise resonator.error("type", str(error)) from None
    try:
        module = resonator_module(kind)
    except ImportError:
        raise resonator.error("type", f"resonator type {kind!r} is not available in this version") from None
    fields = {"type": Field("choice", required=True, choices=RESONATOR_TYPES), **module.FIELDS}
    if "material" in fields and not fields["material"].takes:
        fields["material"] = replace(fields["material"], takes=_MATERIAL_TAKES)
    values = read_section(resonator, fields, context=f" for a {kind}")
    if "material" in module.FIELDS and (values.get("material") is not None or module.FIELDS["material"].required):
        values["material"] = material_from(resonator)
    try:
        return module.build_spec(values)
    except SpecError as error:
        raise resonator.error(error.key, str(error)) from None


_SECTION_KEYS = {
    "excitation": _EXCITATION_FIELDS,
    "pickup": _PICKUP_FIELDS,
    "damping": _DAMPING_FIELDS,
    "render": _RENDER_FIELDS,
}


def _sections(top, file):
    sections = {}
    for key, allowed in _SECTION_KEYS.items():
        if key in top.mapping and top.mapping[key] is not None:
            sections[key] = top.child(key, allowed)
        else:
            sections[key] = Section(LineDict(), file=file, path=key)
    return sections


def patch_from_mapping(mapping, *, file="<patch>", overrides=None):
    """Validate a parsed YAML mapping into a :class:`Patch`.

    Parameters
    ----------
    mapping : dict (ideally a LineDict, for line numbers)
    file : str
        Name for error messages.
    overrides : dict or None
        ``{"render.duration": (value, "--duration"), ...}``: values set from
        the command line; their errors name the option instead of a line.
    """
    if not isinstance(mapping, dict):
        raise PatchError("a patch must be a mapping with keys name, resonator, excitation, pickup, damping, render", file=file, line=1)
    mapping = _apply_overrides(mapping, overrides or {}, file)
    top = Section(mapping, file=file)
    top_values = read_section(top, _TOP)
    spec = _build_resonator(top.child("resonator", _RESONATOR_TAKES))
    style = resonator_module(spec.TYPE).position_style(spec)
    sections = _sections(top, file)
    exc = sections["excitation"]
    exc_values = read_section(exc, _EXCITATION_FIELDS)
    excitation = Excitation(
        kind=exc_values["type"],
        position=_position(exc, "position", style, _DEFAULT_POSITIONS[style]),
        contact_time=exc_values["contact_time"],
        strength=exc_values["strength"],
        release_time=exc_values["release_time"],
    )
    pick = sections["pickup"]
    pick_values = read_section(pick, _PICKUP_FIELDS)
    measures = pick_values["measures"] or ("displacement" if excitation.kind == "impulse" else "velocity")
    problem = check_measure(excitation.kind, measures)
    if problem is not None:
        raise pick.error("measures", problem)
    pickup = Pickup(position=_position(pick, "position", style, None), measures=measures)
    damp_values = read_section(sections["damping"], _DAMPING_FIELDS)
    if damp_values["t60_high"] is not None and damp_values["t60_high"] > damp_values["t60"]:
        raise sections["damping"].error("t60_high", f"must not exceed t60 ({damp_values['t60']:g} s): higher partials decay faster")
    render_section = sections["render"]
    render_values = read_section(render_section, _RENDER_FIELDS)
    render = RenderSettings(**render_values)
    lines = _collect_lines(mapping)
    patch = Patch(
        name=top_values["name"],
        resonator=spec,
        excitation=excitation,
        pickup=pickup,
        damping=Damping(**damp_values),
        render=render,
        source=file,
        lines=lines,
    )
    _check_size(patch, overrides or {})
    return patch


def _apply_overrides(mapping, overrides, file):
    if not overrides:
        return mapping
    mapping = copy.deepcopy(mapping)
    for dotted, (value, option) in overrides.items():
        section_name, key = dotted.split(".")
        section = mapping.get(section_name)
        if not isinstance(section, dict):
            section = LineDict()
            mapping[section_name] = section
        if key == "pitch" and section_name == "resonator":
            try:
                replaced = resonator_module(section.get("type")).PITCH_REPLACES
            except (ImportError, KeyError):  # no or unknown type: the loader says so next
                replaced = ()
            for other in replaced:
                section.pop(other, None)
        section[key] = value
        if hasattr(section, "lines"):
            section.lines[key] = None
        if dotted.startswith("render.") and key in _RENDER_FIELDS:
            convert_option(_RENDER_FIELDS[key], value, option)
        elif dotted == "resonator.pitch":
            convert_option(Field("pitch", positive=True), value, option)
    return mapping


def _collect_lines(mapping, prefix=""):
    lines = {}
    for key, value in mapping.items():
        dotted = f"{prefix}{key}"
        line = getattr(mapping, "lines", {}).get(key)
        if line is not None:
            lines[dotted] = line
        if isinstance(value, dict):
            lines.update(_collect_lines(value, dotted + "."))
    return lines


def estimate_render_bytes(duration, sample_rate, n_modes):
    """Peak working memory (bytes) of a render: a fixed part, samples and modes (see BYTES_PER_SAMPLE)."""
    return RENDER_BASE_BYTES + float(duration) * float(sample_rate) * BYTES_PER_SAMPLE + n_modes * BYTES_PER_MODE


def _check_size(patch, overrides):
    from .tone import AUTO_CAP_S

    duration = AUTO_CAP_S if patch.render.duration == "auto" else patch.render.duration
    need = estimate_render_bytes(duration, patch.render.sample_rate, patch.render.max_modes)
    if need > MEMORY_LIMIT_BYTES:
        for key in ("render.duration", "render.sample_rate", "render.max_modes"):
            if key in overrides:
                file, line, name = COMMAND_LINE, None, overrides[key][1]
                break
        else:
            file, line, name = patch.source, patch.lines.get("render.duration"), "render.duration"
        raise PatchError(
            f"this render would need about {need / 2**30:.3g} GiB of memory, more than a workstation has "
            f"(limit {MEMORY_LIMIT_BYTES / 2**30:.0f} GiB): shorten render.duration or lower render.sample_rate",
            file=file,
            line=line,
            key=name,
        )


def load_patch(path, *, overrides=None):
    """Load and validate the patch file at `path`.

    Parameters
    ----------
    path : str or os.PathLike
    overrides : dict or None
        See :func:`patch_from_mapping`.

    Returns
    -------
    Patch

    Raises
    ------
    PatchError
        Naming the file, line and key of the first problem.
    """
    return patch_from_mapping(load_yaml_file(path), file=str(path), overrides=overrides)


def patch_from_text(text, *, file="<text>", overrides=None):
    """Validate a patch given as YAML text."""
    return patch_from_mapping(load_yaml_text(text, file=file), file=file, overrides=overrides)


def retune(patch, pitch_hz, *, cache=None):
    """A copy of `patch` whose lowest mode sounds at `pitch_hz`.

    Moves the parameter a maker would move (tension for a string).  The
    retuned spec is computed once per (spec, pitch) in `cache` (default: the
    process-wide :data:`synth.solvecache.DEFAULT_CACHE`).

    Raises
    ------
    PatchError
        If the object cannot reach `pitch_hz` (names ``resonator.pitch``).
    """
    if not (math.isfinite(pitch_hz) and pitch_hz > 0):
        raise ValueError(f"pitch_hz={pitch_hz!r} must be > 0")
    try:
        return replace(patch, resonator=(DEFAULT_CACHE if cache is None else cache).retune(patch.resonator, pitch_hz))
    except UnreachablePitch as error:
        raise patch.error("resonator.pitch", str(error)) from None
