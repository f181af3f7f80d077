"""Sub-band ESPRIT: a DFT filter bank, per-band subspace estimation, least-squares amplitudes and their covariance.

The private engine of :func:`synth.analysis.estimate.estimate_partials`.

A real signal ``x[n] = sum_j a_j r_j^n sin(w_j n + phi_j)`` is, for positive
frequencies, ``sum_j A_j z_j^n`` with ``z_j = r_j e^{i w_j}`` and
``A_j = a_j e^{i phi_j} / (2i)``.  The filter bank turns it into narrow complex
band signals at a low rate in which each pole is still a pole (``z^D``), so a
small Hankel matrix per band suffices (ESPRIT, Roy & Kailath 1989, on the
Hankel matrix the matrix pencil of Hua & Sarkar 1990 also starts from).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

__all__ = ["FilterBank", "make_filter_bank", "analyse_bands", "BandComponents", "merge_overlaps", "frequency_sd"]

#: Stopband attenuation of the filter bank's prototype lowpass, dB.
STOPBAND_DB = 100.0
#: Largest Hankel row count (the subspace dimension searched) per band.
MAX_ROWS = 120
#: A component is kept when its energy in the band signal is at least this many
#: times the band's residual noise variance (an "integrated SNR" of 26 dB).
MIN_ENERGY_RATIO = 400.0
#: Keep regions overlap by this fraction of the band spacing on each side.
OVERLAP = 0.08
#: Bands are analysed when their keep region holds a spectral peak this many
#: times the local mean noise power (a white-noise bin exceeds it with
#: probability e^-12).
PEAK_OVER_NOISE = 12.0
#: Eigenvalues below this fraction of a band's largest are numerical noise
#: (amplitudes 110 dB down; eigh is accurate to about 1e-16 of the largest).
EIGEN_FLOOR = 1e-11
#: A component whose decay across the filter window makes the band gain
#: ``|G_k(z)|`` smaller than this cannot be told from numerical noise
#: (T60 below about 5 / band rate: the 13 / band rate long window sees it 80 dB down).
MIN_GAIN = 1e-4
_LN1000 = np.log(1000.0)


@dataclass(frozen=True)
class FilterBank:
    """An oversampled DFT filter bank: band k is centred on ``k * fs / (2 D)`` and sampled at ``fs / D``."""

    decimation: int
    taps: np.ndarray
    sample_rate: float

    @property
    def band_rate(self):
        """Sample rate of each band signal, Hz."""
        return self.sample_rate / self.decimation

    @property
    def spacing(self):
        """Distance between band centres (the width of a keep region), Hz."""
        return self.band_rate / 2.0

    @property
    def n_bands(self):
        return self.decimation + 1

    def gain(self, k, z):
        """``G_k(z) = sum_l h[l] (z e^{-i pi k / D})^l`` at full-rate poles `z` (shape (p,))."""
        u = np.asarray(z, dtype=complex) * np.exp(-1j * np.pi * k / self.decimation)
        return np.exp(np.outer(np.log(u), np.arange(len(self.taps)))) @ self.taps

    def bands(self, x, ks):
        """Complex band signals of real `x` for band indices `ks`: shape (len(ks), M), centred on 0 Hz.

        Frame ``m`` uses ``x[mD : mD + L]`` only, so a sum of damped exponentials
        from ``x[0]`` on gives an exact sum of damped exponentials in ``m``.
        """
        h = self.taps
        d2 = 2 * self.decimation
        n_frames = (len(x) - len(h)) // self.decimation + 1
        folded = np.zeros((n_frames, d2))
        windows = sliding_window_view(x, d2)
        for q in range(len(h) // d2):
            frames = windows[q * d2 :: self.decimation][:n_frames]
            folded += frames * h[q * d2 : (q + 1) * d2]
        spectrum = np.fft.rfft(folded, axis=1)[:, ks]
        m = np.arange(n_frames)
        sign = np.where(np.outer(np.asarray(ks) % 2, m % 2) == 1, -1.0, 1.0)
        return spectrum.T * sign


def make_filter_bank(sample_rate, band_rate):
    """The filter bank with band rate near `band_rate` (Hz): passband edge at band_rate/4, stopband at 3 band_rate/4."""
    decimation = max(2, int(round(sample_rate / band_rate)))
    # Kaiser's design formulas (Oppenheim & Schafer, Discrete-Time Signal
    # Processing, sec. 7.5.3, from memory): transition width fs/(2D), i.e.
    # pi/D rad/sample; cutoff fs/(2D) (half-way), relative to Nyquist 1/D.
    beta = 0.1102 * (STOPBAND_DB - 8.7)
    numtaps = int(np.ceil((STOPBAND_DB - 7.95) / (2.285 * np.pi / decimation))) + 1
    d2 = 2 * decimation
    numtaps = int(np.ceil(numtaps / d2)) * d2
    cutoff = 1.0 / decimation
    centre = np.arange(numtaps) - (numtaps - 1) / 2.0
    taps = cutoff * np.sinc(cutoff * centre) * np.kaiser(numtaps, beta)
    taps /= taps.sum()
    taps.flags.writeable = False
    return FilterBank(decimation, taps, float(sample_rate))


@dataclass
class BandComponents:
    """Components kept from all bands, at the analysis start (full-rate parameters)."""

    frequency: np.ndarray  # Hz
    decay: np.ndarray  # alpha, 1/s (amplitude ~ exp(-alpha t))
    amplitude: np.ndarray  # complex A at the analysis start (positive-frequency part)
    covariance: np.ndarray  # (n, 4, 4) of (Re c, Im c, alpha_band, theta_band)
    band_c: np.ndarray  # complex band amplitude c (for the propagation of covariance)
    band: np.ndarray  # band index
    centre_distance: np.ndarray  # |f - band centre| / spacing
    rejected: dict
    n_active: int = 0


def _active_bands(x, bank, lowest, highest):
    """Indices of bands whose keep region (plus overlap) meets [lowest, highest] and holds a spectral peak.

    Two Hann-windowed spectra are tested, of the whole segment (long decays)
    and of its first eighth (short decays, less noise); the local mean noise
    power is the 10th percentile over +-4 bands divided by -ln(0.9) = 0.105,
    the 10th percentile of an exponential distribution.
    """
    spacing = bank.spacing
    k_lo = max(0, int(np.floor(lowest / spacing - 0.5 - OVERLAP)))
    k_hi = min(bank.decimation, int(np.ceil(highest / spacing + 0.5 + OVERLAP)))
    ks = np.arange(k_lo, k_hi + 1)
    active = np.zeros(len(ks), dtype=bool)
    for n in {len(x), max(min(len(x), 2048), len(x) // 8)}:
        power = np.abs(np.fft.rfft(x[:n] * np.hanning(n))) ** 2
        df = bank.sample_rate / n
        per_band = max(1, int(round(spacing / df)))
        for i, k in enumerate(ks):
            if active[i]:
                continue
            centre = k * spacing
            lo = int(max(0, (centre - spacing * (0.5 + OVERLAP)) / df))
            hi = int(min(len(power), (centre + spacing * (0.5 + OVERLAP)) / df + 1))
            mid = int(centre / df)
            wide = power[max(0, mid - 4 * per_band) : mid + 4 * per_band + 1]
            if hi > lo and len(wide) and power[lo:hi].max() > PEAK_OVER_NOISE * np.percentile(wide, 10) / 0.105:
                active[i] = True
    return [int(k) for k in ks[active]]


def _trim(y, min_frames=24):
    """`y` cut where its envelope has sunk into the band's floor.

    Envelope: ``|y|^2`` averaged over 8 samples; floor: the larger of 4 times
    the median of the last fifth (noise) and 1e-12 of the peak (float64
    round-off, 120 dB down).  Frames after the floor add only noise.
    """
    power = np.abs(y) ** 2
    width = min(8, len(y))
    envelope = np.convolve(power, np.ones(width) / width, mode="same")
    floor = max(4.0 * np.median(envelope[-max(1, len(y) // 5) :]), 1e-12 * envelope.max())
    above = np.flatnonzero(envelope > floor)
    end = int(above[-1]) + 1 + width if len(above) else len(y)
    return y[: min(len(y), max(end, min_frames))]


def _esprit(y):
    """Band poles of complex `y` (shape (M,)) by ESPRIT on a Hankel covariance, order from the eigenvalue floor."""
    m_len = len(y)
    rows = int(min(max(m_len // 3, 4), MAX_ROWS))
    cols = m_len - rows + 1
    hankel = sliding_window_view(y, cols)  # (rows, cols), hankel[i] = y[i : i + cols]
    cov = hankel @ hankel.conj().T / cols
    values, vectors = np.linalg.eigh(cov)  # ascending
    values = np.maximum(values, 0.0)
    # Noise eigenvalues: the median of the lower half, scaled by the
    # Marchenko-Pastur upper edge (1 + sqrt(rows/cols))^2 and a margin of 2.
    noise = np.median(values[: rows // 2])
    threshold = max(2.0 * noise * (1.0 + np.sqrt(rows / cols)) ** 2, EIGEN_FLOOR * values[-1])
    order = int(np.count_nonzero(values > threshold))
    order = min(order, (2 * rows) // 3, rows - 2)
    if order < 1:
        return np.zeros(0, dtype=complex)
    basis = vectors[:, -order:]
    rotation = np.linalg.lstsq(basis[:-1], basis[1:], rcond=None)[0]
    return np.linalg.eigvals(rotation)


def _fit(y, poles):
    """Least-squares amplitudes of `poles` in `y`, residual variance and the (4p, 4p) covariance of the real parameters.

    Parameters per pole: (Re c, Im c, alpha, theta) with ``w = exp(-alpha + i theta)``.
    Fisher information for circular complex noise of variance s2:
    ``F = (2 / s2) Re(J^H J)``.
    """
    m = np.arange(len(y))
    basis = np.exp(np.outer(m, np.log(poles)))  # (M, p)
    c = np.linalg.lstsq(basis, y, rcond=None)[0]
    residual = y - basis @ c
    p = len(poles)
    dof = max(len(y) - 2 * p, 1)
    s2 = max(float(np.vdot(residual, residual).real) / dof, 1e-300)
    jac = np.empty((len(y), 4 * p), dtype=complex)
    jac[:, 0::4] = basis
    jac[:, 1::4] = 1j * basis
    jac[:, 2::4] = -m[:, None] * basis * c
    jac[:, 3::4] = 1j * m[:, None] * basis * c
    fisher = (2.0 / s2) * (jac.conj().T @ jac).real
    try:
        cov = np.linalg.inv(fisher)
    except np.linalg.LinAlgError:
        cov = np.linalg.pinv(fisher)
    return c, s2, cov


def _analyse_band(k, y, bank, lowest, highest):
    """(kept components of band `k` as a dict of arrays or None, residual variance, rejection counts, frames)."""
    rejected = {"growing": 0, "noise": 0, "out_of_band": 0}
    y = _trim(y)
    n_frames = len(y)
    fr = bank.band_rate
    poles = _esprit(y)
    magnitude = np.abs(poles)
    in_keep = np.abs(np.angle(poles) / (2 * np.pi)) <= 0.25 * (1 + 2 * OVERLAP)  # cycles per band sample
    growing = magnitude >= 1.0
    usable = (magnitude < 1.0 + 5.0 / n_frames) & (magnitude > 1e-6)
    rejected["growing"] += int(np.count_nonzero(in_keep & growing))
    keep = (in_keep & ~growing & usable)[usable]
    fit_poles = poles[usable]
    c, s2, cov = _fit(y, fit_poles)
    if not keep.any():
        return None, s2, rejected, n_frames
    mag = np.abs(fit_poles)
    energy = np.abs(c) ** 2 * (1 - mag ** (2 * n_frames)) / np.maximum(1 - mag**2, 1e-300)
    loud = energy >= MIN_ENERGY_RATIO * s2
    rejected["noise"] += int(np.count_nonzero(keep & ~loud))
    keep &= loud
    freq = (k / 2.0 + np.angle(fit_poles) / (2 * np.pi)) * fr
    alpha = -np.log(mag) * fr
    # Decays faster than 60 dB in one period, or within two band samples: not a partial.
    too_fast = (alpha > _LN1000 * np.maximum(freq, 1e-9)) | (alpha > _LN1000 * fr / 2)
    rejected["noise"] += int(np.count_nonzero(keep & too_fast))
    keep &= ~too_fast
    band_edge = (freq < lowest) | (freq > highest)
    rejected["out_of_band"] += int(np.count_nonzero(keep & band_edge & (freq > 0) & (freq < bank.sample_rate / 2)))
    keep &= ~band_edge
    idx = np.flatnonzero(keep)
    z = np.exp((-alpha[idx] + 2j * np.pi * freq[idx]) / bank.sample_rate)
    gain = bank.gain(k, z)
    seen = np.abs(gain) >= MIN_GAIN
    rejected["noise"] += int(np.count_nonzero(~seen))
    idx, gain = idx[seen], gain[seen]
    if len(idx) == 0:
        return None, s2, rejected, n_frames
    found = {
        "f": freq[idx], "alpha": alpha[idx], "A": c[idx] / gain, "c": c[idx],
        "cov": np.stack([cov[4 * j : 4 * j + 4, 4 * j : 4 * j + 4] for j in idx]),
        "band": np.full(len(idx), k), "dist": np.abs(freq[idx] / bank.spacing - k),
    }
    return found, s2, rejected, n_frames


def _leakage(bank, ks, n_frames, sources, noise_sd):
    """Band signals (len(ks), n_frames) that `sources` (f, alpha, A) leak into bands `ks` through their stopbands.

    Each source ``A z^n`` and its negative-frequency twin ``conj(A) conj(z)^n``
    contribute ``A G_k(z) ((-1)^k z^D)^m`` to band k; sources within ``3 f_r / 4``
    of the band centre (passband and transition) are left to the band itself.
    ``G_k(z)`` for every k at once: fold ``h[l] z^l`` modulo 2D and take its DFT.
    """
    f, alpha, amp = sources
    fs, d = bank.sample_rate, bank.decimation
    z = np.exp((-alpha + 2j * np.pi * f) / fs)
    poles = np.concatenate([z, np.conj(z)])
    amps = np.concatenate([amp, np.conj(amp)])
    freqs = np.concatenate([f, -f])
    taps = np.exp(np.outer(np.log(poles), np.arange(len(bank.taps)))) * bank.taps
    gains = np.fft.fft(taps.reshape(len(poles), -1, 2 * d).sum(axis=1), axis=1)  # (P, 2D), bin k = G_k
    m = np.arange(n_frames)
    out = np.zeros((len(ks), n_frames), dtype=complex)
    for i, k in enumerate(ks):
        far = np.abs(freqs - k * bank.spacing) > bank.spacing
        far &= np.abs(amps * gains[:, k]) > 1e-2 * noise_sd[i]
        if not far.any():
            continue
        w = poles[far] ** d * (-1.0) ** k
        out[i] = np.exp(np.outer(m, np.log(w))) @ (amps[far] * gains[far, k])
    return out


def analyse_bands(x, bank, *, lowest, highest):
    """ESPRIT on each active band of `x` (real, starting at the analysis start), in two passes.

    Pass 2 re-analyses a band after subtracting the predicted stopband leakage
    of the partials found elsewhere in pass 1, where that leakage exceeds a
    tenth of the band's residual noise energy (noise-free or very quiet
    recordings; a fast-decaying partial is weak in its band and strong long
    partials leak 100 dB down).  Returns a :class:`BandComponents` of the
    components in their band's keep region, before merging across band overlaps.
    """
    rejected = {"growing": 0, "noise": 0, "out_of_band": 0}
    active = _active_bands(x, bank, lowest, highest)
    keys = ("f", "alpha", "A", "cov", "c", "band", "dist")
    if not active:
        return _collect({key: [] for key in keys}, rejected, 0)
    signals = bank.bands(x, active)
    results = [_analyse_band(k, y, bank, lowest, highest) for k, y in zip(active, signals)]
    found = [r[0] for r in results if r[0] is not None]
    if found:
        first = _collect({key: [r[key] for r in found] for key in keys}, {}, len(active))
        unique = merge_overlaps(first, bank.spacing)  # a partial in two keep regions leaks once
        sources = (first.frequency[unique], first.decay[unique], first.amplitude[unique])
        noise_sd = np.sqrt([r[1] for r in results])
        leak = _leakage(bank, active, signals.shape[1], sources, noise_sd)
        for i, (k, y) in enumerate(zip(active, signals)):
            _, s2, _, n_used = results[i]
            if np.vdot(leak[i, :n_used], leak[i, :n_used]).real > 0.1 * s2 * n_used:
                results[i] = _analyse_band(k, y - leak[i], bank, lowest, highest)
    out = {key: [] for key in keys}
    for band_found, _, counts, _ in results:
        for name, n in counts.items():
            rejected[name] += n
        if band_found is not None:
            for key in keys:
                out[key].append(band_found[key])
    comp = _collect(out, rejected, len(active))
    # Leakage through the stopband (aliases of strong partials, mirror images of
    # negative frequencies) lies about STOPBAND_DB below its source: what pass 2
    # did not cancel is dropped by keeping only what lies within
    # STOPBAND_DB - 10 dB of the strongest component.
    if len(comp.frequency):
        level = np.abs(comp.amplitude)
        loud = level >= level.max() * 10.0 ** (-(STOPBAND_DB - 10.0) / 20.0)
        rejected["noise"] += int(np.count_nonzero(~loud))
        comp = _subset(comp, np.flatnonzero(loud))
    return comp


def _subset(comp, idx):
    return BandComponents(
        frequency=comp.frequency[idx], decay=comp.decay[idx], amplitude=comp.amplitude[idx],
        covariance=comp.covariance[idx], band_c=comp.band_c[idx], band=comp.band[idx],
        centre_distance=comp.centre_distance[idx], rejected=comp.rejected, n_active=comp.n_active)


def _collect(out, rejected, n_active):
    def cat(key, dtype=float, shape=(0,)):
        return np.concatenate(out[key]) if out[key] else np.zeros(shape, dtype=dtype)

    return BandComponents(
        frequency=cat("f"),
        decay=cat("alpha"),
        amplitude=cat("A", complex),
        covariance=cat("cov", float, (0, 4, 4)),
        band_c=cat("c", complex),
        band=cat("band", int),
        centre_distance=cat("dist"),
        rejected=rejected,
        n_active=n_active,
    )


def merge_overlaps(comp, spacing):
    """Indices of `comp` to keep after removing the duplicates found by two neighbouring bands.

    Two components of neighbouring bands are the same partial when their
    frequencies differ by less than ``max(4 * combined sd, 1e-4 * spacing)``;
    the estimate nearer its band's centre stays.  Pairs are matched closest first.
    """
    n = len(comp.frequency)
    if n < 2:
        return np.arange(n)
    sd = frequency_sd(comp, spacing * 2)
    order = np.argsort(comp.frequency)
    f = comp.frequency[order]
    drop = set()
    candidates = []
    for a in range(n):
        for b in range(a + 1, n):
            if f[b] - f[a] > spacing:
                break
            ia, ib = order[a], order[b]
            if abs(comp.band[ia] - comp.band[ib]) != 1:
                continue
            tol = max(4.0 * np.hypot(sd[ia], sd[ib]), 1e-4 * spacing)
            if f[b] - f[a] < tol:
                candidates.append((f[b] - f[a], ia, ib))
    for _, ia, ib in sorted(candidates):
        if ia in drop or ib in drop:
            continue
        drop.add(ia if comp.centre_distance[ia] > comp.centre_distance[ib] else ib)
    return np.array([i for i in range(n) if i not in drop], dtype=int)


def frequency_sd(comp, band_rate):
    """1-sigma frequency of each component, Hz, from its theta variance."""
    return np.sqrt(np.maximum(comp.covariance[:, 3, 3], 0.0)) * band_rate / (2 * np.pi)
