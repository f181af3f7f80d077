"""Patch files: YAML -> validated :class:`Patch` in SI units.

Every error is a :class:`~synth.errors.PatchError` naming the file, the line,
the dotted key and what is allowed.  YAML is read with the safe loader only.
"""
from __future__ import annotations

import copy
import difflib
from dataclasses import dataclass, field, replace
from pathlib import Path

from .errors import COMMAND_LINE, PatchError
from .damping import loss_factor_t60, rayleigh_t60, two_point_t60
from .excitation import DEFAULT_RELEASE_TIME_S, DEFAULT_STRIKE_SPEED, EXCITATIONS, MALLETS, MEASURES, Mallet, Pulse, \
    check_measure
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

#: Most modes a render computes: the largest number ``render.max_modes`` takes, and the
#: ceiling of ``auto`` (every mode below Nyquist; more is an error on render.max_modes).
#: Measured on the worst common case, a 2-D object whose mode count grows as the square of
#: the bandwidth: a membrane of radius 0.23 m, 0.3 kg/m^2 at pitch D3, struck, 2 s rendered
#: (synth.pipeline.solve_modes, partial_table, render_patch timed in one process; peak RSS
#: from getrusage; 2 vCPUs):
#:   48 kHz: 38,425 modes below Nyquist; solve 0.7-0.9 s, table 0.2-1.0 s, render 0.1 s, peak RSS
#:           82-98 MiB (51 MiB after imports);
#:   96 kHz: 154,112 modes; solve 2.1-2.4 s, table 3.9-4.6 s, render 0.5 s, 140 MiB;
#:   108 kHz (impulse): 195,113 modes; solve 2.7 s, table 1.1 s, render 0.7 s, 133 MiB.
#: About 430-600 bytes a mode in all, well under BYTES_PER_MODE, so memory is not what
#: bounds the count (16 GiB / 4096 B would allow 4 million): the time is, about 30 us a mode
#: before the audio.  200,000 keeps the first render of any patch within about 10 s and
#: 0.8 GiB by the estimate below; it holds that drum up to 96 kHz and refuses 192 kHz
#: (about 616,000 modes), where a number of modes is the better request.
MAX_MODES = 200_000
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
    mallet : Mallet or None
        What strikes (:class:`synth.excitation.Mallet`): where given,
        `contact_time` is its Hertz contact time at its speed, and a MIDI
        velocity scales that speed.  None: `contact_time` as written.
    across : float in [-1, 1]
        A bar's strike across its width: fraction of the half-width from the
        centre line (0: on it; off it, the torsional modes sound).
    """

    kind: str = "pluck"
    position: Point | None = None
    contact_time: float = 1e-3  # s
    strength: float = 1.0
    release_time: float = DEFAULT_RELEASE_TIME_S  # s
    mallet: Mallet | None = None
    across: float = 0.0  # fraction of a bar's half-width from its centre line

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
    across : float in [-1, 1]
        A bar's pickup across its width, as :attr:`Excitation.across`.
    """

    position: Point | None = None  # None: every mode weighted 1
    measures: str = "velocity"
    across: float = 0.0


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
    loss_factor : float > 0 or None, dimensionless
        A constant loss factor eta instead of the two-point law: ``T60 =
        3 ln(10) / (pi eta f)`` (:func:`synth.damping.loss_factor_t60`).
    loss_factor_source : str or None
        The material whose tabulated eta this is (``loss_factor: material``);
        None when the patch gave the number.
    rayleigh : (float, float) or None, (1/s, s)
        ``(alpha, beta)`` of Rayleigh damping instead of the two-point law:
        ``sigma = (alpha + beta omega**2) / 2`` (:func:`synth.damping.rayleigh_t60`).
    """

    t60: float = 3.0  # s, at the fundamental
    t60_high: float | None = None  # s, at high_frequency
    high_frequency: float = 4000.0  # Hz
    release_t60: float | None = 0.15  # s, after note-off; None: no dampers
    loss_factor: float | None = None  # eta; None: not this law
    loss_factor_source: str | None = None  # material name, when taken from the material table
    rayleigh: tuple | None = None  # (alpha 1/s, beta s); None: not this law

    @property
    def law(self):
        """Which damping law applies: "two-point", "loss-factor" or "rayleigh"."""
        if self.loss_factor is not None:
            return "loss-factor"
        if self.rayleigh is not None:
            return "rayleigh"
        return "two-point"

    def mode_t60(self, frequency_hz, *, fundamental_hz):
        """T60 (s) of modes at `frequency_hz` (Hz) under this section's law (`fundamental_hz` anchors the two-point law)."""
        if self.law == "loss-factor":
            return loss_factor_t60(frequency_hz, loss_factor=self.loss_factor)
        if self.law == "rayleigh":
            alpha, beta = self.rayleigh
            return rayleigh_t60(frequency_hz, alpha=alpha, beta=beta)
        return two_point_t60(frequency_hz, t60=self.t60, fundamental_hz=fundamental_hz, t60_high=self.t60_high,
                             high_frequency=self.high_frequency)

    def fundamental_t60(self, fundamental_hz):
        """T60 (s) at the fundamental: `t60` itself under the two-point law."""
        if self.law == "two-point":
            return self.t60
        return float(self.mode_t60([fundamental_hz], fundamental_hz=fundamental_hz)[0])

    def describe(self):
        """The law in words (for a report), or None for the two-point law (the T60 column says it)."""
        if self.law == "loss-factor":
            where = f" ({self.loss_factor_source}'s tabulated value)" if self.loss_factor_source else ""
            return f"constant loss factor eta = {self.loss_factor:.3g}{where}: T60 = 3 ln 10 / (pi eta f)"
        if self.law == "rayleigh":
            return (f"Rayleigh, alpha = {self.rayleigh[0]:.4g} 1/s, beta = {self.rayleigh[1]:.4g} s: "
                    "sigma = (alpha + beta omega^2) / 2")
        return None


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
    max_modes : int or "auto"
        "auto" (the default): every mode below Nyquist (``sample_rate / 2``)
        is computed, at most :data:`MAX_MODES` (more is an error naming this
        key).  A number (1 .. :data:`MAX_MODES`): the lowest that many modes;
        those at or above Nyquist are left out (the table's parameters say how
        many), and a count that stops below Nyquist is reported with the
        level of the modes it leaves out (a warning above -60 dB re the
        strongest; :func:`synth.pipeline.partial_table`).
    peak : {"true", "sample"}
        What `peak_db` normalises: the true (inter-sample) peak of ITU-R
        BS.1770-4 Annex 2 (the default: no reconstructed overs) or the
        largest sample.
    """

    duration: float | str = "auto"  # s, or "auto"
    sample_rate: int = 48000  # Hz
    bit_depth: int = 24
    peak_db: float | None = -1.0  # dBFS; None keeps the absolute scale
    max_modes: int | str = "auto"  # or a number of modes
    peak: str = "true"


@dataclass(frozen=True)
class Patch:
    """A validated patch: a vibrating object, how it is excited and heard, how it is rendered.

    Made by :func:`load_patch`, :func:`patch_from_text` or
    :func:`patch_from_mapping`, which check every key; every value is in SI
    units.  Frozen: change one with :func:`dataclasses.replace` or
    :func:`retune`.

    Attributes
    ----------
    name : str
        Letters, digits, '-' and '_' (used in file names).
    resonator : object
        The resonator's frozen spec (``resonator.TYPE`` is "string",
        "membrane", "bar", "plate", "air_column" or "partials").
    excitation : Excitation
    pickup : Pickup
    damping : Damping
    render : RenderSettings
    coupling : object or None
        An instrument key's coupling to its neighbours
        (:class:`synth.coupling.KeyCoupling`); None for a patch file.
    source : str
        The file it came from, named in its errors.
    lines : dict of str -> int
        Dotted key -> line in `source` (not compared).
    origins : dict of str -> str
        Dotted key -> the command-line option that set it (not compared);
        its errors name the option instead of a line.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... excitation: {type: pluck, position: 0.3}
    ... render: {duration: 50 ms, sample_rate: 8000}
    ... ''')
    >>> patch.name, patch.resonator.TYPE, patch.excitation.kind
    ('bench-nylon', 'string', 'pluck')
    >>> patch.render.duration, patch.render.sample_rate, patch.render.bit_depth
    (0.05, 8000, 24)
    >>> patch.lines["resonator"], patch.lines["render.sample_rate"]
    (3, 5)
    """

    name: str
    resonator: object
    excitation: Excitation
    pickup: Pickup
    damping: Damping
    render: RenderSettings
    coupling: object = None  # synth.coupling.KeyCoupling of an instrument's key; None for a patch file
    source: str = "<patch>"
    lines: dict = field(default_factory=dict, compare=False)
    origins: dict = field(default_factory=dict, compare=False)  # dotted key -> the option that set it

    def error(self, key, message):
        """A PatchError for dotted `key`, naming this patch's file and line (or the option that set it)."""
        if key in self.origins:
            return PatchError(message, file=COMMAND_LINE, key=self.origins[key])
        return PatchError(message, file=self.source, line=self.lines.get(key), key=key)


_RESONATOR_TAKES = f"a mapping with type ({', '.join(RESONATOR_TYPES)}) and that object's keys"
_MATERIAL_TAKES = (
    f"a material name ({', '.join(sorted(MATERIALS))}), a mapping of density, youngs_modulus, "
    "poisson_ratio, tensile_strength, shear_modulus, or a material file (.yaml)"
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
    "shear_modulus": Field("pressure", positive=True, nullable=True),  # None: isotropic, E / (2 (1 + nu))
}

#: A material given as a file (``material: rosewood-tapped.yaml``, as ``synth fit --blank`` writes it).
MATERIAL_FILE_SUFFIXES = (".yaml", ".yml")

_POSITION_1D = Field("number", low=0.0, high=1.0)

_EXCITATION_FIELDS = {
    "type": Field("choice", default="pluck", choices=EXCITATIONS),
    "position": Field("any"),
    "contact_time": Field("time", default=1e-3, low=0.0, high=1.0),
    "strength": Field("number", default=1.0, positive=True, high=1e6),
    "release_time": Field("time", default=DEFAULT_RELEASE_TIME_S, low=0.0, high=0.1),
    "mallet": Field("any", takes=f"a mallet name ({', '.join(MALLETS)}) or a mapping of material, mass, "
                                 "stiffness, exponent, speed"),
    "across": Field("number", default=0.0, low=-1.0, high=1.0),  # bars: fraction of the half-width off centre
}

#: Keys of ``excitation.mallet`` given as a mapping (bare SI numbers: kg, N/m^p, m/s).
_MALLET_FIELDS = {
    "material": Field("choice", choices=tuple(MALLETS)),
    "mass": Field("number", positive=True, high=100.0, takes="a mass in kg (a bare number), e.g. 0.025"),
    "stiffness": Field("number", positive=True, high=1e15, takes="K of F = K x^p in N/m^p (a bare number), e.g. 4e8"),
    "exponent": Field("number", low=1.0, high=5.0, takes="p of F = K x^p, 1..5 (Hertz: 1.5)"),
    "speed": Field("number", positive=True, high=50.0,
                   takes="the striking speed at MIDI velocity 100 in m/s (a bare number), e.g. 1.5"),
}

_PICKUP_FIELDS = {
    "position": Field("any"),
    "measures": Field("choice", choices=MEASURES),
    "across": Field("number", default=0.0, low=-1.0, high=1.0),
}

_DAMPING_FIELDS = {
    "t60": Field("time", default=3.0, positive=True, high=3600.0),
    "t60_high": Field("time", positive=True, high=3600.0),
    "high_frequency": Field("frequency", default=4000.0, positive=True),
    "release_t60": Field("time", default=0.15, positive=True, high=3600.0, nullable=True),
    "loss_factor": Field("number", positive=True, high=1.0, keywords=("material",),
                         takes="a loss factor eta, 0 < eta <= 1, or material (the resonator material's tabulated eta)"),
    "rayleigh": Field("any", takes="a mapping {alpha: 1/s, beta: s} (bare numbers)"),
}

#: The keys of each damping law; a section gives the keys of one law only.
_DAMPING_LAWS = {
    "two-point": ("t60", "t60_high", "high_frequency"),
    "loss-factor": ("loss_factor",),
    "rayleigh": ("rayleigh",),
}

_RAYLEIGH_FIELDS = {
    "alpha": Field("number", default=0.0, low=0.0, high=1e6, takes="alpha in 1/s (a bare number >= 0)"),
    "beta": Field("number", default=0.0, low=0.0, high=1.0, takes="beta in s (a bare number >= 0)"),
}

_RENDER_FIELDS = {
    "duration": Field("time", default="auto", positive=True, low=MIN_DURATION_S, keywords=("auto",),
                      takes="a time, e.g. '4 s', or auto (until the sound has decayed 90 dB)"),
    "sample_rate": Field("frequency", default=48000, low=MIN_SAMPLE_RATE, high=MAX_SAMPLE_RATE, whole=True),
    "bit_depth": Field("choice", default=24, choices=(16, 24, 32)),
    "peak_db": Field("level", default=-1.0, nullable=True, high=0.0, low=-120.0),
    "max_modes": Field("int", default="auto", low=1, high=MAX_MODES, keywords=("auto",),
                       takes=f"a whole number of modes, 1 .. {MAX_MODES}, or auto (every mode below Nyquist)"),
    "peak": Field("choice", default="true", choices=("true", "sample")),
}


def material_from(section, key="material"):
    """A :class:`Material` from a name, a mapping of constants or a material file.

    A file (a value ending in ``.yaml`` or ``.yml``) holds ``material:`` and
    the mapping; its path is relative to the patch's folder, or to the current
    folder when the value came from the command line (``--set``).
    """
    value = section.mapping.get(key)
    if isinstance(value, str) and value.lower().endswith(MATERIAL_FILE_SUFFIXES):
        return _material_file(section, key, value)
    if isinstance(value, str):
        if value not in MATERIALS:
            close = difflib.get_close_matches(value, list(MATERIALS), n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise section.error(key, f"unknown material {short_repr(value)}{hint} (known: {', '.join(sorted(MATERIALS))}; or give a mapping of density, youngs_modulus, poisson_ratio, tensile_strength)")
        return MATERIALS[value]
    if isinstance(value, dict):
        values = read_section(section.child(key), _MATERIAL_FIELDS)
        return Material("custom", values["density"], values["youngs_modulus"], values["poisson_ratio"],
                        values["tensile_strength"], source="patch", shear_modulus=values["shear_modulus"])
    raise section.error(key, f"must be {_MATERIAL_TAKES}, got {short_repr(value)}")


def _material_file(section, key, value):
    """The :class:`Material` of the material file `value` named at `key` of `section`."""
    from_option = key in getattr(section.mapping, "origins", {})
    base = Path(".") if from_option or section.file in (None, COMMAND_LINE) or str(section.file).startswith("<") \
        else Path(section.file).parent
    path = base / value
    if not path.is_file():
        raise section.error(key, f"material file {str(path)!r} not found (a path relative to "
                                 f"{'the current folder' if base == Path('.') else 'the patch'})")
    mapping = load_yaml_file(path)
    if not isinstance(mapping, dict) or "material" not in mapping or set(mapping) - {"material"}:
        raise PatchError("a material file holds one key, material: a mapping of density, youngs_modulus, "
                         "poisson_ratio, tensile_strength, shear_modulus", file=str(path), line=1)
    inner = Section(mapping, file=str(path))
    material = material_from(inner) if isinstance(mapping["material"], dict) else None
    if material is None:
        raise inner.error("material", "must be a mapping of density, youngs_modulus, poisson_ratio, "
                                      "tensile_strength, shear_modulus")
    return replace(material, name=path.name, source=str(path))


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
        if style == "xy_m":  # an outline: [x, y] in metres (or lengths) in the outline's coordinates
            from .resonators.fe.geometry import to_metres

            if not isinstance(value, list) or len(value) != 2:
                raise ValueError(f"must be [x, y] in metres (or lengths such as '120 mm'), got {short_repr(value)}")
            return Point("xy_m", tuple(to_metres(v, key) for v in value))
        raise ValueError("this resonator takes no positions; leave the key out")
    except ValueError as error:
        if isinstance(error, PatchError):
            raise
        hint = " (a fraction of the length, 0..1)" if style == "fraction" else ""
        raise section.error(key, f"{getattr(error, 'message', error)}{hint}") from None


def _outline_point(spec, section, key, point):
    """`point` of an outline resonator checked to lie on the object (one line naming `key`), or the default."""
    from .resonators.common import SpecError
    from .resonators.fe.geometry import default_position

    if point is None:
        return None
    if point.style != "xy_m":  # the default of the style table: a point on the object instead
        return Point("xy_m", default_position(spec.outline))
    try:
        resonator_module(spec.TYPE).check_position(spec, point.values, key)
    except SpecError as error:
        raise section.error(key, error.message if hasattr(error, "message") else str(error)) from None
    return point


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
    mapping = apply_overrides(mapping, overrides or {}, file)
    top = Section(mapping, file=file)
    top_values = read_section(top, _TOP)
    spec = _build_resonator(top.child("resonator", _RESONATOR_TAKES))
    style = resonator_module(spec.TYPE).position_style(spec)
    sections = _sections(top, file)
    outline = style == "xy_m"
    exc = sections["excitation"]
    exc_values = read_section(exc, _EXCITATION_FIELDS)
    mallet = _mallet(exc, exc_values["type"])
    excitation = Excitation(
        kind=exc_values["type"],
        position=(_outline_point(spec, exc, "position", _position(exc, "position", style, _DEFAULT_POSITIONS["xy"]))
                  if outline else _position(exc, "position", style, _DEFAULT_POSITIONS[style])),
        contact_time=exc_values["contact_time"] if mallet is None else mallet.contact_time,
        strength=exc_values["strength"],
        release_time=exc_values["release_time"],
        mallet=mallet,
        across=exc_values["across"],
    )
    pick = sections["pickup"]
    pick_values = read_section(pick, _PICKUP_FIELDS)
    measures = pick_values["measures"] or ("displacement" if excitation.kind == "impulse" else "velocity")
    problem = check_measure(excitation.kind, measures)
    if problem is not None:
        raise pick.error("measures", problem)
    pick_point = _position(pick, "position", style, None)
    if outline:
        pick_point = _outline_point(spec, pick, "position", pick_point)
    pickup = Pickup(position=pick_point, measures=measures,
                    across=pick_values["across"])
    spec = _torsion_choice(spec, exc, excitation.across, pick, pickup)
    damp_values = _damping_values(sections["damping"], top)
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
        origins=_collect_lines(mapping, attribute="origins"),
    )
    _check_size(patch, overrides or {})
    return patch


def _mallet(section, kind):
    """The :class:`Mallet` of ``excitation.mallet`` (None when not given); its errors name the key."""
    value = section.mapping.get("mallet")
    if value is None:
        return None
    if kind != "strike":
        raise section.error("mallet", f"a mallet strikes: it needs type: strike (this excitation is a {kind})")
    if "contact_time" in section.mapping:
        raise section.error("mallet", "give mallet or contact_time, not both: a mallet sets the contact time")
    if isinstance(value, str):
        if value not in MALLETS:
            close = difflib.get_close_matches(value, list(MALLETS), n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise section.error("mallet", f"unknown mallet {short_repr(value)}{hint} (known: {', '.join(MALLETS)}; "
                                          "or a mapping of mass, stiffness, exponent, speed)")
        mallet = MALLETS[value]
    elif isinstance(value, dict):
        inner = section.child("mallet")
        values = read_section(inner, _MALLET_FIELDS)
        base = MALLETS.get(values["material"])
        if base is None:
            for key in ("mass", "stiffness"):
                if values[key] is None:  # a mallet without a named material needs both
                    raise inner.missing(key, _MALLET_FIELDS[key])
            base = Mallet(values["mass"], values["stiffness"], 1.5)
        mallet = Mallet(
            mass=base.mass if values["mass"] is None else values["mass"],
            stiffness=base.stiffness if values["stiffness"] is None else values["stiffness"],
            exponent=base.exponent if values["exponent"] is None else values["exponent"],
            speed=DEFAULT_STRIKE_SPEED if values["speed"] is None else values["speed"],
            name=base.name,
        )
    else:
        raise section.error("mallet", f"must be {_EXCITATION_FIELDS['mallet'].takes}, got {short_repr(value)}")
    tau = mallet.contact_time
    if not 0.0 < tau <= 1.0:
        raise section.error("mallet", f"gives a contact time of {tau:.3g} s; it must be 0 .. 1 s (a lighter or "
                                      "stiffer mallet, or a faster stroke, is shorter)")
    return mallet


def _damping_values(section, top):
    """The :class:`Damping` keyword values of a ``damping:`` section: one law, checked."""
    values = read_section(section, _DAMPING_FIELDS)
    given = [law for law, keys in _DAMPING_LAWS.items() if any(k in section.mapping for k in keys)]
    if len(given) > 1:
        keys = [k for law in given for k in _DAMPING_LAWS[law] if k in section.mapping]
        raise section.error(keys[-1], f"damping takes one law, but this section gives {' and '.join(keys)}: keep "
                                      "t60/t60_high/high_frequency (two-point), loss_factor or rayleigh")
    if values["t60_high"] is not None and values["t60_high"] > values["t60"]:
        raise section.error("t60_high", f"must not exceed t60 ({values['t60']:g} s): higher partials decay faster")
    if values["rayleigh"] is not None:
        inner = section.child("rayleigh", _RAYLEIGH_FIELDS)
        coefficients = read_section(inner, _RAYLEIGH_FIELDS)
        if coefficients["alpha"] == 0.0 and coefficients["beta"] == 0.0:
            raise section.error("rayleigh", "alpha and beta are both 0 (no damping): give alpha > 0 (1/s) or beta > 0 (s)")
        values["rayleigh"] = (coefficients["alpha"], coefficients["beta"])
    if values["loss_factor"] == "material":
        values["loss_factor"], values["loss_factor_source"] = _material_loss_factor(section, top)
    elif not section.mapping and _MATERIAL_DAMPED.get(_resonator_type(top)):
        # No damping section: a bar or a plate of a tabulated material decays by its material's loss
        # factor (the losses of a free solid are mostly internal); strings, membranes and air columns
        # lose energy to the air and their supports far faster than their material does: 3 s stays.
        name = top.mapping["resonator"].get("material")
        material = MATERIALS.get(name) if isinstance(name, str) else None
        if material is not None and material.loss_factor is not None:
            values["loss_factor"], values["loss_factor_source"] = material.loss_factor, material.name
    return values


#: Resonator types that, without a damping section, decay by their material's loss factor.
_MATERIAL_DAMPED = {"bar": True, "plate": True}


def _resonator_type(top):
    resonator = top.mapping.get("resonator")
    return resonator.get("type") if isinstance(resonator, dict) else None


def _material_loss_factor(section, top):
    """(eta, material name) of the resonator's material, for ``loss_factor: material``."""
    name = top.mapping.get("resonator", {}).get("material") if isinstance(top.mapping.get("resonator"), dict) else None
    material = MATERIALS.get(name) if isinstance(name, str) else None
    if material is None or material.loss_factor is None:
        what = f"the resonator's material {short_repr(name)} has" if name is not None else "the resonator has no material, so"
        known = ", ".join(sorted(m for m, v in MATERIALS.items() if v.loss_factor is not None))
        raise section.error("loss_factor", f"{what} no tabulated loss factor: give a number (0 < eta <= 1), "
                                           f"or use a named material ({known})")
    return material.loss_factor, material.name


def _torsion_choice(spec, exc, exc_across, pick, pickup):
    """The bar spec with ``resonator.torsion`` decided from the ``across`` keys; errors where one cannot apply."""
    off_centre = [(section, value) for section, value in ((exc, exc_across), (pick, pickup.across)) if value != 0.0]
    if spec.TYPE != "bar":
        for section, _ in off_centre:
            raise section.error("across", f"only a bar takes across (a fraction -1..1 of its half-width from the "
                                          f"centre line); leave it out for a {spec.TYPE}")
        return spec
    if pickup.across != 0.0 and pickup.position is None:
        raise pick.error("across", "needs pickup.position (without a position every mode is heard with weight 1)")
    if spec.torsion == "auto":
        return replace(spec, torsion=bool(off_centre))
    if spec.torsion is False and off_centre:
        raise off_centre[0][0].error("across", "off the centre line only torsional modes respond, and "
                                               "resonator.torsion is false: set it to true or auto, or leave across out")
    return spec


def apply_overrides(mapping, overrides, file="<patch>"):
    """A copy of `mapping` with command-line values set at their dotted keys.

    Parameters
    ----------
    mapping : dict (a LineDict from :mod:`synth.yamlio`)
    overrides : dict
        ``{"resonator.diameter": (value, "--set resonator.diameter"), ...}``:
        a key path of any depth and the option that gave it.  Missing
        sections are created; setting the pitch drops the keys it replaces
        (``PITCH_REPLACES``: a string's tension) and setting one of those
        drops the pitch.  Each set key remembers its option (``origins``), so
        its errors name the option instead of a line of `file`.

    Raises
    ------
    PatchError
        A key path that runs through a value that is not a mapping.
    """
    if not overrides:
        return mapping
    mapping = copy.deepcopy(mapping)
    for dotted, (value, option) in overrides.items():
        *parents, key = dotted.split(".")
        section, walked = mapping, []
        for name in parents:
            walked.append(name)
            child = section.get(name)
            if child is None:
                child = LineDict()
                section[name] = child
            elif not isinstance(child, dict):
                raise PatchError(f"{'.'.join(walked)} is {short_repr(child)} here, not a mapping: set "
                                 f"{'.'.join(walked)} itself", file=COMMAND_LINE, key=option)
            section = child
        if parents == ["resonator"]:
            _drop_replaced(section, key)
        section[key] = value
        if hasattr(section, "lines"):
            section.lines[key] = None
        if isinstance(section, LineDict):
            section.origins[key] = option
        if dotted.startswith("render.") and key in _RENDER_FIELDS:
            convert_option(_RENDER_FIELDS[key], value, option)
        elif dotted == "resonator.pitch":
            convert_option(Field("pitch", positive=True), value, option)
    return mapping


def _drop_replaced(section, key):
    """Setting a resonator's pitch drops what it replaces (a string's tension), and the other way round."""
    try:
        replaced = resonator_module(section.get("type")).PITCH_REPLACES
    except (ImportError, KeyError, TypeError):  # no or unknown type: the loader says so next
        return
    if key == "pitch":
        for other in replaced:
            section.pop(other, None)
    elif key in replaced:
        section.pop("pitch", None)


def _collect_lines(mapping, prefix="", attribute="lines"):
    """{dotted key: line} of every key of `mapping` whose line is known (``attribute="origins"``: its option)."""
    lines = {}
    for key, value in mapping.items():
        dotted = f"{prefix}{key}"
        line = getattr(mapping, attribute, {}).get(key)
        if line is not None:
            lines[dotted] = line
        if isinstance(value, dict):
            lines.update(_collect_lines(value, dotted + ".", attribute))
    return lines


def estimate_render_bytes(duration, sample_rate, n_modes):
    """Peak working memory (bytes) of a render: a fixed part, samples and modes (see BYTES_PER_SAMPLE)."""
    return RENDER_BASE_BYTES + float(duration) * float(sample_rate) * BYTES_PER_SAMPLE + n_modes * BYTES_PER_MODE


def _check_size(patch, overrides):
    from .tone import AUTO_CAP_S

    duration = AUTO_CAP_S if patch.render.duration == "auto" else patch.render.duration
    n_modes = MAX_MODES if patch.render.max_modes == "auto" else patch.render.max_modes  # auto: at most the ceiling
    need = estimate_render_bytes(duration, patch.render.sample_rate, n_modes)
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
        A YAML patch file (format in README.md, "Patch reference").
    overrides : dict or None
        ``{"render.duration": (value, "--duration"), ...}``: values that
        replace the file's; see :func:`patch_from_mapping`.

    Returns
    -------
    Patch

    Raises
    ------
    InputFileError
        If the file is missing, unreadable or not YAML (a PatchError).
    PatchError
        Naming the file, line and key of the first problem.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> import synth
    >>> text = '''
    ... name: steel-tine
    ... resonator: {type: string, material: music-wire, length: 250 mm, diameter: 0.5 mm, tension: 80 N}
    ... render: {duration: 0.1 s, sample_rate: 16000}
    ... '''
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = pathlib.Path(folder) / "steel-tine.yaml"
    ...     _ = path.write_text(text)
    ...     patch = synth.load_patch(path)
    >>> patch.name, patch.resonator.tension
    ('steel-tine', 80.0)
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = pathlib.Path(folder) / "bad.yaml"
    ...     _ = path.write_text(text.replace("250 mm", "-250 mm"))
    ...     try:
    ...         synth.load_patch(path)
    ...     except synth.PatchError as error:
    ...         print(error.line, error.key, error.message)
    3 resonator.length must be > 0, got '-250 mm' = -0.25 m
    """
    return patch_from_mapping(load_yaml_file(path), file=str(path), overrides=overrides)


def patch_from_text(text, *, file="<text>", overrides=None):
    """Validate a patch given as YAML text.

    Parameters
    ----------
    text : str
        The YAML of a patch, as a patch file holds it.
    file : str
        Name for error messages (default ``"<text>"``).
    overrides : dict or None
        See :func:`patch_from_mapping`.

    Returns
    -------
    Patch

    Raises
    ------
    PatchError
        Naming `file`, the line and the key of the first problem and what is
        allowed.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: frame-skin
    ... resonator: {type: membrane, shape: circle, radius: 20 cm, tension: 2 kN/m, areal_density: 0.25 kg/m^2}
    ... excitation: {type: strike, position: {radius: 0.5}}
    ... render: {duration: 0.1 s, sample_rate: 8000, max_modes: 8}
    ... ''')
    >>> patch.resonator.TYPE, patch.excitation.contact_time
    ('membrane', 0.001)
    >>> synth.patch_from_text('''
    ... name: typo
    ... resonator: {type: sting}
    ... ''', file="typo.yaml")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    synth.errors.PatchError: typo.yaml:3: resonator.type: 'sting' is not allowed; did you mean 'string'? (allowed: ...)
    """
    return patch_from_mapping(load_yaml_text(text, file=file), file=file, overrides=overrides)


#: What :func:`retune` takes as a pitch: the field a patch's ``resonator.pitch`` is read with.
_PITCH = Field("pitch", positive=True)


def retune(patch, pitch=None, *, cache=None, pitch_hz=None):
    """A copy of `patch` whose lowest mode sounds at `pitch`.

    Moves the parameter a maker would move (the tension of a string, the
    length of a bar, the thickness of a plate, ...), exactly as the
    ``render --pitch`` option does.  The retuned object is computed once per
    (object, pitch) in `cache`.

    Parameters
    ----------
    patch : Patch
    pitch : str or float
        As a patch's ``resonator.pitch`` takes it: a note name (``"C4"``,
        ``"A#3"``, ``"Bb2"``; A4 = 440 Hz, 12-TET, C4 = middle C), a
        frequency in Hz (``261.6``) or a frequency with its unit
        (``"261.6 Hz"``, ``"1.2 kHz"``); 0.01 Hz .. 1 MHz.
    cache : SolveCache or None
        Where the retune is computed (default: the process-wide
        :data:`synth.solvecache.DEFAULT_CACHE`).
    pitch_hz : float or None, Hz
        The former name of `pitch` (a frequency in Hz), still accepted; give
        one of the two.

    Returns
    -------
    Patch
        A new patch; `patch` itself is unchanged.

    Raises
    ------
    PatchError
        If `pitch` is not a pitch (key ``pitch``: the message says what is
        allowed), or the object cannot reach it (key ``resonator.pitch``,
        naming the patch's file).  PatchError is a ValueError.

    Examples
    --------
    >>> import synth
    >>> patch = synth.patch_from_text('''
    ... name: bench-nylon
    ... resonator: {type: string, material: nylon, length: 300 mm, diameter: 0.8 mm, pitch: G4}
    ... render: {duration: 0.05 s, sample_rate: 8000, max_modes: 12}
    ... ''')
    >>> round(synth.partial_table(synth.retune(patch, "A4")).fundamental_hz, 3)
    440.0
    >>> round(synth.partial_table(synth.retune(patch, "0.3 kHz")).fundamental_hz, 3)
    300.0
    >>> def tension(p):
    ...     return synth.partial_table(p).parameters["tension_n"]
    >>> round(tension(synth.retune(patch, 196.0)) / tension(patch), 2)  # an octave down: a quarter
    0.25
    >>> synth.retune(patch, "H4")
    Traceback (most recent call last):
    ...
    synth.errors.PatchError: pitch: 'H4' is not a pitch: give a note name (A4, C#3, Bb1) or a frequency (e.g. '110 Hz')
    """
    if (pitch is None) == (pitch_hz is None):
        raise TypeError("retune() takes one pitch: give pitch (or its former name pitch_hz), not both or neither")
    given = pitch if pitch_hz is None else pitch_hz
    try:
        frequency = convert(_PITCH, given)
    except ValueError as error:
        key = "pitch" if pitch_hz is None else "pitch_hz"
        raise PatchError(str(error), key=key) from None
    try:
        return replace(patch, resonator=(DEFAULT_CACHE if cache is None else cache).retune(patch.resonator, frequency))
    except UnreachablePitch as error:
        raise patch.error("resonator.pitch", str(error)) from None
