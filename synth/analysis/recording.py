"""A recording as synth reads it: the file, its channel, its partials as a partial table.

:func:`read_recording` reads an audio file with soundfile (WAV, FLAC, AIFF,
OGG and the other formats libsndfile reads) and picks or mixes one channel;
:func:`analyse_recording` estimates its partials
(:func:`synth.analysis.estimate.estimate_partials`);
:func:`estimate_table` turns an estimate (and a model fitted to it) into the
:class:`synth.modes.PartialTable` every report form prints, so a recording and
a design read the same; :func:`partials_mapping` is the ``partials`` patch
that resynthesises it.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputFileError, option_error
from ..modes import PartialTable, frozen_array

__all__ = [
    "AUDIO_SUFFIXES",
    "MAX_SECONDS",
    "Recording",
    "is_recording",
    "read_recording",
    "analyse_recording",
    "estimate_table",
    "partials_mapping",
]

#: File name endings read as recordings (``synth compare`` takes them in place of a patch).
AUDIO_SUFFIXES = (".wav", ".flac", ".aif", ".aiff", ".ogg", ".w64", ".rf64", ".caf")
MAX_SECONDS = 60.0  # s: only the first minute of a longer file is read (one note per recording)
MAX_FILE_BYTES = 2 * 1024**3  # a larger file is refused before it is opened


@dataclass(frozen=True)
class Recording:
    """One channel of an audio file, float64 in full-scale units.

    Attributes
    ----------
    path : str
    signal : ndarray [shape=(n,)]
    sample_rate : float, Hz
    channels : int
        Channels in the file.
    channel : str
        What was analysed: ``"mono"``, ``"1"`` .. ``"N"`` or ``"mix of N"``.
    truncated : bool
        The file is longer than :data:`MAX_SECONDS`; only its start was read.
    """

    path: str
    signal: np.ndarray
    sample_rate: float
    channels: int
    channel: str
    truncated: bool = False

    @property
    def name(self):
        """A patch name from the file name (letters, digits, '-' and '_')."""
        stem = re.sub(r"[^A-Za-z0-9_-]+", "-", Path(self.path).stem).strip("-")
        return stem or "recording"


def is_recording(path):
    """True if `path` names an audio file by its ending (:data:`AUDIO_SUFFIXES`)."""
    return str(path).lower().endswith(AUDIO_SUFFIXES)


def read_recording(path, *, channel=None):
    """Read `path` and pick its channel.

    Parameters
    ----------
    path : str or Path
    channel : None, "mix" or int >= 1
        None: the only channel of a mono file, the mix (mean) of the channels
        of any other; an int: that channel (1-based).

    Returns
    -------
    Recording

    Raises
    ------
    InputFileError
        Missing, a folder, not audio libsndfile reads, empty.
    PatchError
        `channel` outside the file's channels (names ``--channel``).
    """
    import soundfile

    file = str(path)
    p = Path(path)
    if not p.exists():
        raise InputFileError("file not found", file=file)
    if p.is_dir():
        raise InputFileError("is a folder, not an audio file", file=file)
    if p.stat().st_size > MAX_FILE_BYTES:
        raise InputFileError(f"is {p.stat().st_size / 1024**3:.1f} GiB: give one note, at most "
                             f"{MAX_FILE_BYTES // 1024**3} GiB", file=file)
    try:
        info = soundfile.info(file)
        frames = min(info.frames, int(MAX_SECONDS * info.samplerate))
        data, rate = soundfile.read(file, frames=frames, dtype="float64", always_2d=True)
    except (RuntimeError, soundfile.LibsndfileError, OSError, ValueError) as error:
        reason = str(error).split(":")[-1].strip() or type(error).__name__
        raise InputFileError(f"not an audio file synth can read (WAV, FLAC, AIFF, OGG ...): {reason}",
                             file=file) from None
    if data.shape[0] == 0:
        raise InputFileError("holds no samples", file=file)
    channels = data.shape[1]
    if channel is None or channel == "mix":
        signal = data[:, 0] if channels == 1 else data.mean(axis=1)
        which = "mono" if channels == 1 else f"mix of {channels}"
    else:
        if not 1 <= int(channel) <= channels:
            raise option_error(f"{file} has {channels} channel{'s' * (channels != 1)}: give 1 .. {channels} "
                               "or mix", "--channel")
        signal = data[:, int(channel) - 1]
        which = str(int(channel))
    return Recording(file, frozen_array(signal), float(rate), channels, which, truncated=info.frames > frames)


def analyse_recording(recording, *, pitch_hint_hz=None, max_modes=None, lowest_hz=None):
    """The :class:`~synth.analysis.estimate.Estimate` of a :class:`Recording` (errors name its file)."""
    from .estimate import estimate_partials

    return estimate_partials(recording.signal, sample_rate=recording.sample_rate, pitch_hint_hz=pitch_hint_hz,
                             max_modes=max_modes, lowest_hz=lowest_hz, source=recording.path)


def _reference(estimate, fit, pitch_hint_hz):
    """The frequency ratios are read against: the model's first partial, else the hinted or lowest partial."""
    if fit is not None:
        return float(fit.reference_hz)
    f = estimate.frequency_hz
    if pitch_hint_hz is not None:
        near = np.abs(1200.0 * np.log2(f / pitch_hint_hz)) <= 100.0
        if np.any(near):
            return float(f[near][np.argmax(np.asarray(estimate.amplitude)[near])])
    return float(f[0])


def estimate_table(estimate, recording, *, fit=None, pitch_hint_hz=None):
    """The estimate as a :class:`~synth.modes.PartialTable` (resonator ``"recording"``).

    Parameters
    ----------
    estimate : Estimate
    recording : Recording
    fit : ModelFit or None
        A fitted model (:mod:`synth.analysis.fitting`): its labels, residuals
        and parameters join the table.
    pitch_hint_hz : float or None, Hz

    Returns
    -------
    PartialTable
        Levels re the strongest partial at the onset, the uncertainties as
        columns ``frequency_sd_hz`` and ``t60_sd_s``, the model's residual
        as ``fit_cents``.
    """
    n = len(estimate)
    labels = tuple(f"p{i + 1}" for i in range(n)) if fit is None else tuple(fit.labels)
    columns = {"frequency_sd_hz": tuple(float(v) for v in estimate.frequency_sd_hz),
               "t60_sd_s": tuple(float(v) for v in estimate.t60_sd_s)}
    parameters = {
        "recording_file": recording.path,
        "channel": recording.channel + (" (first minute)" if recording.truncated else ""),
        "recording_sample_rate_hz": recording.sample_rate,
        "onset_s": estimate.onset_s,
        "analysed_s": estimate.duration_s,
        "noise_floor_dbfs": estimate.noise_floor_db,
        "snr_db": estimate.snr_db,
        "rejected_components": ", ".join(f"{v} {k.replace('_', ' ')}" for k, v in estimate.rejected.items() if v)
                               or "none",
        "method": estimate.method,
    }
    if fit is not None:
        columns["fit_cents"] = tuple(None if not math.isfinite(v) else float(v) for v in fit.residual_cents)
        parameters.update(fit.parameters)
    return PartialTable(
        name=recording.name,
        resonator="recording",
        fundamental_hz=_reference(estimate, fit, pitch_hint_hz),
        frequency_hz=frozen_array(estimate.frequency_hz),
        amplitude=frozen_array(estimate.amplitude),
        phase=frozen_array(estimate.phase_rad),
        t60_s=frozen_array(estimate.t60_s),
        level_db=frozen_array(estimate.level_db),
        labels=labels,
        columns=columns,
        parameters=parameters,
        warnings=() if fit is None else tuple(fit.warnings),
        sample_rate=recording.sample_rate,
    )


def _round(value, digits=6):
    return float(f"{value:.{digits}g}")


def partials_mapping(table, *, name, sample_rate):
    """The ``partials`` patch (a plain mapping) that resynthesises `table`'s partials, levels and decays.

    The excitation is a strike of 0.5 ms: the recording's own attack is not
    modelled, its levels are given per partial (so they hold where the force
    ends, see :func:`synth.pipeline.weigh`).
    """
    reference = float(table.fundamental_hz)
    rate = int(round(sample_rate))
    rate = min(max(rate, 8000), 192000)
    return {
        "name": name,
        "resonator": {
            "type": "partials",
            "fundamental": f"{_round(reference, 9)} Hz",
            "ratios": [_round(f / reference, 9) for f in table.frequency_hz],
            "t60": [_round(t, 4) for t in table.t60_s],
            "levels_db": [round(float(v), 2) for v in table.level_db],
        },
        "excitation": {"type": "strike", "contact_time": "0.5 ms"},
        "render": {"duration": "auto", "sample_rate": rate, "bit_depth": 24},
    }
