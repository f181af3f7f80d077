"""Every decaying partial of a recorded note: frequency, T60, amplitude, phase and their uncertainties.

:func:`estimate_partials` finds the note's onset, splits the spectrum into
narrow sub-bands with a DFT filter bank, estimates the poles of each band by
ESPRIT (Roy & Kailath 1989), rejects noise and growing components, merges the
band overlaps and fits amplitudes and phases by least squares.  The result is
an :class:`Estimate` in synth's engine convention,
``a exp(-ln(1000) t / T60) sin(2 pi f t + phi)`` with ``t`` from the onset.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from synth.errors import InputFileError
from synth.modes import frozen_array

from ._onset import check_audio, find_onset
from ._subspace import analyse_bands, make_filter_bank, merge_overlaps

__all__ = ["Estimate", "estimate_partials"]

_LN1000 = np.log(1000.0)
#: Longest stretch analysed after the attack, s (longer recordings are cut).
MAX_ANALYSIS_S = 6.0
#: Band-signal length aimed at, samples: the band rate is about this over the duration.
_TARGET_FRAMES = 480
#: Band rate limits, Hz.
_BAND_RATE_RANGE = (100.0, 2000.0)
#: Periods of the lowest partial needed after the onset.
_MIN_PERIODS = 4
#: Band samples needed after the filter bank's window.
_MIN_FRAMES = 24
#: Lowest partial searched without a hint, Hz; with a hint, this fraction of it.
DEFAULT_LOWEST_HZ = 20.0
HINT_LOWEST_FRACTION = 0.4

_ARRAYS = ("frequency_hz", "t60_s", "amplitude", "phase_rad",
           "frequency_sd_hz", "t60_sd_s", "amplitude_sd", "phase_sd_rad")


@dataclass(frozen=True)
class Estimate:
    """The decaying partials of a recording, sorted by frequency, with 1-sigma uncertainties.

    Parameters
    ----------
    frequency_hz : numpy.ndarray, shape (M,)
        Partial frequencies, Hz, ascending.
    t60_s : numpy.ndarray, shape (M,)
        60 dB decay times, s.
    amplitude : numpy.ndarray, shape (M,)
        Peak amplitude ``a`` at the onset, in the input's full-scale units.
    phase_rad : numpy.ndarray, shape (M,)
        Phase ``phi`` at the onset, rad, in [0, 2 pi).
    frequency_sd_hz, t60_sd_s, amplitude_sd, phase_sd_rad : numpy.ndarray, shape (M,)
        1-sigma uncertainties (Hz, s, full scale, rad) from the least-squares
        residual of each sub-band (see :func:`estimate_partials`, Notes).
    sample_rate : float
        Sample rate of the analysed signal, Hz.
    onset_s : float
        Where the note starts in the given signal, s (analysis ``t = 0``).
    duration_s : float
        Length analysed after the onset, s.
    noise_floor_db : float
        RMS level of what the partials leave unexplained, dBFS (20 log10 rms).
    snr_db : float
        RMS level of the strongest partial at the onset over the noise floor, dB.
    rejected : dict
        Counts of components thrown away: ``growing``, ``noise``,
        ``out_of_band`` (outside ``lowest_hz`` .. 0.49 fs) and ``max_modes``.
    method : str
        One line naming the method and its settings.

    Notes
    -----
    Rendering ``sum a exp(-ln(1000) t / T60) sin(2 pi f t + phi)`` from
    ``t = onset_s`` reproduces the recording after its attack.

    Examples
    --------
    >>> import numpy as np
    >>> estimate = Estimate(*(np.array([440.0, 880.0]),) * 8, sample_rate=8000.0, onset_s=0.0, duration_s=1.0,
    ...                     noise_floor_db=-90.0, snr_db=80.0, rejected={}, method="example")
    >>> estimate.level_db
    array([-6.02059991,  0.        ])
    """

    frequency_hz: np.ndarray
    t60_s: np.ndarray
    amplitude: np.ndarray
    phase_rad: np.ndarray
    frequency_sd_hz: np.ndarray
    t60_sd_s: np.ndarray
    amplitude_sd: np.ndarray
    phase_sd_rad: np.ndarray
    sample_rate: float
    onset_s: float
    duration_s: float
    noise_floor_db: float
    snr_db: float
    rejected: dict
    method: str

    def __post_init__(self):
        for name in _ARRAYS:
            object.__setattr__(self, name, frozen_array(getattr(self, name)))
        sizes = {len(getattr(self, name)) for name in _ARRAYS}
        if len(sizes) != 1:
            raise ValueError(f"Estimate arrays differ in length: {sorted(sizes)}")
        object.__setattr__(self, "rejected", dict(self.rejected))

    def __len__(self):
        return len(self.frequency_hz)

    @property
    def level_db(self):
        """``20 log10(amplitude / max amplitude)``, dB, shape (M,)."""
        if len(self.amplitude) == 0:
            return frozen_array([])
        with np.errstate(divide="ignore"):
            return frozen_array(20.0 * np.log10(self.amplitude / self.amplitude.max()))

    def render(self, n_samples, *, start_s=None):
        """The partials summed over `n_samples` samples from ``start_s`` (default: the onset), float64.

        Samples before the onset are zero.
        """
        start = self.onset_s if start_s is None else float(start_s)
        t = start - self.onset_s + np.arange(int(n_samples)) / self.sample_rate
        return _render(self.frequency_hz, self.t60_s, self.amplitude, self.phase_rad, t)

    def __repr__(self):
        return (f"Estimate({len(self)} partials, {self.sample_rate:g} Hz, onset {self.onset_s:.4f} s, "
                f"{self.duration_s:.3f} s analysed, SNR {self.snr_db:.1f} dB)")


def _render(freq, t60, amp, phase, t, chunk=8192):
    out = np.zeros(len(t))
    if len(freq) == 0:
        return out
    alpha = _LN1000 / t60
    for lo in range(0, len(t), chunk):
        tt = t[lo : lo + chunk]
        live = tt >= 0
        arg = np.outer(tt, 2 * np.pi * freq) + phase
        out[lo : lo + chunk] = np.where(live, (np.exp(-np.outer(tt, alpha)) * np.sin(arg)) @ amp, 0.0)
    return out


def estimate_partials(signal, *, sample_rate, pitch_hint_hz=None, max_modes=None, lowest_hz=None, source=None):
    """Estimate every decaying partial of a recorded note by sub-band ESPRIT.

    Parameters
    ----------
    signal : array_like of float, shape (N,)
        One channel of samples, full scale = 1.0.
    sample_rate : float
        Sample rate, Hz.
    pitch_hint_hz : float, optional
        The note's approximate pitch, Hz.  Without `lowest_hz`, partials are
        searched from 0.4 times the hint (a bell's hum lies an octave below its
        strike note).
    max_modes : int, optional
        Keep only the strongest `max_modes` partials (by amplitude at the onset).
    lowest_hz : float, optional
        Lowest partial searched, Hz.  Default: 0.4 x `pitch_hint_hz`, or
        without a hint the larger of 20 Hz and four periods in the decay
        available (a 0.1 s tap is searched from 40 Hz).
    source : str, optional
        The file the samples came from, used in error messages only.

    Returns
    -------
    Estimate
        The partials, sorted by frequency, referred to the onset.

    Raises
    ------
    synth.errors.InputFileError
        One-line message, naming `source`, when the audio cannot be analysed:
        not one channel of finite floating-point samples, silent, clipped, DC
        only, too short for the lowest partial, or no decaying partial found.
    ValueError
        `max_modes` below 1.

    Notes
    -----
    *Onset.*  The first 1 ms block whose energy rises out of the floor, refined
    to the first sample above five times the pre-onset noise rms.  Analysis
    starts just after the attack peak; amplitudes and phases are carried back
    to the onset ``t0`` through the fitted poles: with analysis start ``t1``,
    ``a(t0) = a(t1) exp(alpha (t1 - t0))`` and
    ``phi(t0) = phi(t1) - 2 pi f (t1 - t0)``, ``alpha = ln(1000) / T60``.

    *Sub-bands.*  A DFT filter bank with decimation ``D`` (band rate
    ``f_r = fs / D``, about 480 band samples over the analysed length, 100 to
    2000 Hz) and a Kaiser prototype (passband to ``f_r / 4``, 100 dB from
    ``3 f_r / 4``) gives band ``k``, centred on ``k f_r / 2``:

    .. math:: y_k[m] = (-1)^{km} \\sum_{l=0}^{L-1} h[l]\\, x[mD + l]\\, e^{-i\\pi k l / D}

    Each frame lies wholly after the analysis start, so a damped exponential
    ``A z^n`` becomes ``A G_k(z) w^m`` with ``w = (-1)^k z^D`` and
    ``G_k(z) = sum_l h[l] (z e^{-i pi k / D})^l``: exact, no filter transient.
    Only bands whose keep region (``|f - k f_r / 2| <= f_r / 4``, plus 8 %)
    holds a spectral peak 12 times the local noise power are analysed.

    *ESPRIT* (Roy & Kailath 1989) on each band, cut where its envelope sinks
    into the band's floor: the covariance of a Hankel matrix of
    ``min(M/3, 120)`` rows; order = number of eigenvalues above twice the
    Marchenko-Pastur edge ``s^2 (1 + sqrt(rows/cols))^2`` of the noise
    eigenvalues (``s^2`` the median of the lower half) and above 1e-11 of the
    largest; the rotation ``Phi = U_down^+ U_up`` gives the poles.  Components
    are rejected as *growing* (``|w| >= 1``), *noise* (energy in the band below
    400 times the band's residual variance, a decay of 60 dB within one period
    or two band samples, a band gain ``|G_k(z)|`` below 1e-4, or a level
    90 dB below the strongest) or *out of band*.  A second pass re-analyses
    each band after subtracting the stopband leakage ``A G_k(z) w^m`` of the
    partials found in the other bands, where it exceeds a tenth of the band's
    noise (quiet recordings).  Duplicates from neighbouring bands (within 4
    combined sd) are merged.

    *Amplitudes and uncertainties.*  Complex amplitudes ``c`` by least squares
    on the band signal with all the band's poles, then ``A = c / G_k(z)``,
    ``a = 2 |A|``, ``phi = arg A + pi / 2``.  The 1-sigma uncertainties are the
    Cramer-Rao-like perturbation bound from the residual: with ``J`` the
    Jacobian of the band model in ``(Re c, Im c, alpha, theta)`` per pole
    (``w = e^{-alpha + i theta}``) and ``s^2`` the residual variance,
    ``Cov = (s^2 / 2) Re(J^H J)^{-1}``, propagated to ``f``, ``T60``, ``a``,
    ``phi`` at the onset (the small dependence of ``G_k`` on the pole is
    neglected).  They assume white band noise; they are not a bootstrap.

    References
    ----------
    .. [1] R. Roy and T. Kailath, "ESPRIT -- estimation of signal parameters
       via rotational invariance techniques", IEEE Trans. ASSP 37(7),
       984-995, 1989.
    .. [2] Y. Hua and T. K. Sarkar, "Matrix pencil method for estimating
       parameters of exponentially damped/undamped sinusoids in noise",
       IEEE Trans. ASSP 38(5), 814-824, 1990 (the Hankel row count between
       M/3 and M/2).
    .. [3] R. Badeau, B. David and G. Richard, "A new perturbation analysis for
       signal enumeration in rotational invariance techniques", IEEE Trans.
       SP, 2006 (ESPRIT applied to audio in sub-bands; from memory -- we use a
       simpler eigenvalue floor, not their ESTER criterion).

    Examples
    --------
    >>> import numpy as np
    >>> fs = 8000
    >>> t = np.arange(fs) / fs
    >>> x = 0.5 * np.exp(-np.log(1000) * t / 0.8) * np.sin(2 * np.pi * 440 * t + 1.0)
    >>> x += 0.25 * np.exp(-np.log(1000) * t / 0.3) * np.sin(2 * np.pi * 1234.5 * t + 2.0)
    >>> estimate = estimate_partials(x, sample_rate=fs)
    >>> print(np.round(estimate.frequency_hz, 3), np.round(estimate.t60_s, 3))
    [ 440.  1234.5] [0.8 0.3]
    >>> print(np.round(estimate.amplitude, 4), np.round(estimate.phase_rad, 4), estimate.onset_s)
    [0.5  0.25] [1. 2.] 0.0
    """
    x = check_audio(signal, sample_rate=sample_rate, source=source)
    fs = float(sample_rate)
    onset, start, _ = find_onset(x, fs)
    available = (len(x) - start) / fs
    if lowest_hz is not None:
        lowest, lowest_why = float(lowest_hz), f"lowest_hz = {float(lowest_hz):g} Hz"
    elif pitch_hint_hz is not None:
        lowest = HINT_LOWEST_FRACTION * float(pitch_hint_hz)
        lowest_why = f"0.4 x the pitch hint {float(pitch_hint_hz):g} Hz"
    else:  # a short tap is searched from the lowest frequency it can show
        lowest = max(DEFAULT_LOWEST_HZ, _MIN_PERIODS / max(available, 1e-9))
        lowest_why = f"the lowest partial a {available:.3f} s decay can show, {lowest:.4g} Hz"
    if not (np.isfinite(lowest) and 0 < lowest < fs / 2):
        raise InputFileError(f"the lowest partial searched ({lowest_why}) must lie between 0 and "
                             f"{fs / 2:g} Hz (half the sample rate)", file=source)
    if max_modes is not None and int(max_modes) < 1:
        raise ValueError(f"max_modes must be at least 1, got {max_modes!r}")
    highest = 0.49 * fs
    need = _MIN_PERIODS / lowest
    fr = float(np.clip(_TARGET_FRAMES / max(min(available, MAX_ANALYSIS_S), 1e-9), *_BAND_RATE_RANGE))
    bank = make_filter_bank(fs, fr)
    filters = (len(bank.taps) + _MIN_FRAMES * bank.decimation) / fs
    if available < max(need, filters):
        if filters > need:
            why = f"the sub-band filters need {filters:.3f} s"
        else:
            why = f"{_MIN_PERIODS} periods of the lowest partial searched ({lowest_why}) take {need:.3f} s"
        raise InputFileError(
            f"too short: {available:.3f} s of decay after the attack (onset at {onset / fs:.3f} s), and {why}; "
            "record a longer decay" + (" or raise the lowest partial" if filters <= need else ""), file=source)
    segment = x[start : start + int(round(min(available, MAX_ANALYSIS_S) * fs))]
    comp = analyse_bands(segment, bank, lowest=lowest, highest=highest)
    rejected = dict(comp.rejected)
    keep = merge_overlaps(comp, bank.spacing)
    rejected["max_modes"] = 0
    lead = (start - onset) / fs
    result = _partials(comp, keep, bank, lead)
    if len(result["f"]) == 0:
        total = sum(rejected.values())
        details = ", ".join(f"{n} {k.replace('_', ' ')}" for k, n in rejected.items() if n)
        why = f"{total} components rejected: {details}" if total else "no spectral peak stands above the noise"
        raise InputFileError(f"no decaying partials found above {lowest:.4g} Hz ({why}): the recording may be "
                             "noise or a sustained, non-decaying tone", file=source)
    order = np.argsort(result["a"])[::-1]
    if max_modes is not None and len(order) > int(max_modes):
        rejected["max_modes"] = len(order) - int(max_modes)
        order = order[: int(max_modes)]
    order = order[np.argsort(result["f"][order])]
    part = {key: value[order] for key, value in result.items()}
    # Noise floor: what the partials leave in the first second of the analysed segment.
    n_res = min(len(segment), int(fs))
    t = lead + np.arange(n_res) / fs
    residual = segment[:n_res] - _render(part["f"], _LN1000 / part["alpha"], part["a"], part["phi"], t)
    noise_rms = max(float(np.std(residual)), 1e-15)  # a DC offset is not noise
    noise_db = 20.0 * np.log10(noise_rms)
    snr_db = 20.0 * np.log10(part["a"].max() / np.sqrt(2) / noise_rms)
    method = (f"ESPRIT (Roy & Kailath 1989) on {comp.n_active} of {bank.n_bands} sub-bands "
              f"{bank.spacing:.0f} Hz apart, {lowest:.1f} Hz to {highest:.0f} Hz, order from the eigenvalue "
              "floor, least-squares amplitudes, residual-based uncertainties")
    return Estimate(
        frequency_hz=part["f"], t60_s=_LN1000 / part["alpha"], amplitude=part["a"], phase_rad=part["phi"],
        frequency_sd_hz=part["sf"], t60_sd_s=part["st"], amplitude_sd=part["sa"], phase_sd_rad=part["sp"],
        sample_rate=fs, onset_s=onset / fs, duration_s=(start - onset + len(segment)) / fs,
        noise_floor_db=noise_db, snr_db=snr_db, rejected=rejected, method=method)


def _partials(comp, keep, bank, lead):
    """Physical parameters at the onset, `lead` seconds before the analysis start, with propagated sd."""
    f = comp.frequency[keep]
    alpha = comp.decay[keep]
    big_a = comp.amplitude[keep]
    c = comp.band_c[keep]
    cov = comp.covariance[keep]
    fr = bank.band_rate
    a = 2.0 * np.abs(big_a) * np.exp(alpha * lead)
    phi = np.mod(np.angle(big_a) + np.pi / 2 - 2 * np.pi * f * lead, 2 * np.pi)
    phi[phi >= 2 * np.pi] = 0.0  # np.mod can round a tiny negative angle up to 2 pi
    # Gradients in (Re c, Im c, alpha_band, theta_band); alpha = alpha_band fr, f = (k/2 + theta/2pi) fr.
    n = len(f)
    mag2 = np.maximum(np.abs(c) ** 2, 1e-300)
    g_lna = np.zeros((n, 4))
    g_lna[:, 0] = c.real / mag2
    g_lna[:, 1] = c.imag / mag2
    g_lna[:, 2] = fr * lead
    g_phi = np.zeros((n, 4))
    g_phi[:, 0] = -c.imag / mag2
    g_phi[:, 1] = c.real / mag2
    g_phi[:, 3] = -fr * lead

    def spread(g):
        return np.sqrt(np.maximum(np.einsum("ni,nij,nj->n", g, cov, g), 0.0))

    sd_theta = np.sqrt(np.maximum(cov[:, 3, 3], 0.0))
    sd_alpha_band = np.sqrt(np.maximum(cov[:, 2, 2], 0.0))
    t60 = _LN1000 / alpha
    return {
        "f": f, "alpha": alpha, "a": a, "phi": phi,
        "sf": sd_theta * fr / (2 * np.pi),
        "st": t60 * sd_alpha_band * fr / alpha,
        "sa": a * spread(g_lna),
        "sp": spread(g_phi),
    }
