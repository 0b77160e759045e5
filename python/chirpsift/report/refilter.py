"""SNR and chi-squared time series around one candidate, by filtering a short stretch again.

Only the numpy API is used (:func:`chirpsift.taylorf2`, :func:`chirpsift.snr_series`,
:func:`chirpsift.sigma`, :func:`chirpsift.psd_to_grid`): the stretch is tapered at its
ends, its PSD is the site's median over the run (the ``spectrum`` unit), and the
chi-squared series is Allen's statistic evaluated at every sample from the SNR series
of ``p`` frequency bands of equal ``sigma^2``.
"""

from __future__ import annotations

import math

import numpy as np

from ..filter import sigma, snr_series
from ..spectrum import psd_to_grid
from ..waveform import chirp_duration, isco_frequency, taylorf2

__all__ = ["candidate_series", "stretch_for", "upsampling", "TAPER", "MARGIN", "TARGET_RATE"]

#: Seconds of half-cosine taper at each end of the re-filtered stretch.
TAPER = 1.0
#: Sample rate (Hz) the series are evaluated at, at least.
TARGET_RATE = 2048.0
#: Seconds of data kept beyond the template and the window shown, on each side.
MARGIN = 8.0


def upsampling(sample_rate: float) -> int:
    """Factor (a power of two, at most 16) bringing the series' time step to 1/2048 s or finer."""
    return int(min(16, 2 ** max(0, math.ceil(math.log2(TARGET_RATE / sample_rate)))))


def _band_edges(weight: np.ndarray, df: float, f_low: float, f_high: float, p: int) -> list[float]:
    """Edges of ``p`` bands of equal ``sum weight`` (bins assigned as the search assigns them)."""
    below = np.concatenate([[0.0], np.cumsum(weight)[:-1]])
    band_of = np.minimum((below / (weight.sum() / p)).astype(int), p - 1)
    inside = weight > 0
    edges = [f_low]
    for k in range(1, p):
        first = np.flatnonzero(inside & (band_of >= k))
        edges.append((first[0] - 0.5) * df if first.size else f_high)
    edges.append(f_high)
    return edges


def candidate_series(t0: float, strain, sample_rate: float, psd_freqs, psd_values, *, t_c: float, m1: float,
                     m2: float, spin1: float = 0.0, spin2: float = 0.0, f_low: float, chi2_bands: int = 16,
                     half_width: float = 2.0):
    """SNR and chi-squared per degree of freedom within ``half_width`` s of ``t_c``.

    Parameters
    ----------
    t0 : float
        Time of ``strain[0]`` (s).
    strain : ndarray
        Data around the candidate: at least the template's duration before ``t_c``.
    sample_rate : float
        Hz.
    psd_freqs, psd_values : ndarray
        One-sided PSD (1/Hz) on any frequency grid, interpolated onto the stretch's.
    t_c : float
        The candidate's time (s).
    m1, m2, spin1, spin2 : float
        The template (solar masses, aligned spins).
    f_low : float
        Hz.
    chi2_bands : int
        Bands ``p`` of the chi-squared test (``2 p - 2`` degrees of freedom).
    half_width : float
        Seconds shown either side of ``t_c``.

    Returns
    -------
    times : ndarray
        s.
    snr : ndarray
        ``|z|``.
    chi2_per_dof : ndarray
        Allen's chi-squared over ``2 p - 2``.

    References
    ----------
    .. [1] B. Allen, Phys. Rev. D 71, 062001 (2005), gr-qc/0405045.
    """
    x = np.asarray(strain, dtype=np.float64)
    n = x.shape[0] - x.shape[0] % 2
    x = x[:n].copy()
    fs = float(sample_rate)
    m = int(TAPER * fs)
    if 0 < m < n // 2:
        ramp = 0.5 * (1 - np.cos(np.pi * np.arange(m) / m))
        x[:m] *= ramp
        x[n - m:] *= ramp[::-1]
    df = fs / n
    # evaluate the series on a finer time grid (zeros above the Nyquist frequency), so
    # that the chi-squared is seen near the peak's true time, not only at whole samples
    up = upsampling(fs)
    n_freq = up * (n // 2) + 1
    data_fd = np.zeros(n_freq, dtype=np.complex128)
    data_fd[:n // 2 + 1] = np.fft.rfft(x) / fs
    psd = psd_to_grid(np.asarray(psd_freqs, float), np.asarray(psd_values, float), df, n_freq)
    psd = np.where(np.isfinite(psd) & (psd > 0), psd, np.inf)
    psd[n // 2 + 1:] = np.inf
    f_high = min(float(np.ravel(isco_frequency(m1, m2))[0]), (n // 2) * df)
    h = taylorf2(m1, m2, spin1, spin2, f_low=f_low, df=df, n_freq=n_freq, f_high=f_high, dtype=np.complex128)
    z = snr_series(data_fd, h, psd, df, f_low, f_high, dtype=np.complex128)[0]
    total = float(sigma(h, psd, df, f_low, f_high)[0])
    f = np.arange(n_freq) * df
    weight = np.where((f >= f_low) & (f < f_high) & np.isfinite(psd), np.abs(h[0]) ** 2 / psd, 0.0)
    p = int(chi2_bands)
    edges = _band_edges(weight, df, f_low, f_high, p)
    m_out = 2 * (n_freq - 1)
    parts = np.zeros((p, m_out), dtype=np.complex128)
    for k in range(p):
        a, b = edges[k], edges[k + 1]
        s = float(sigma(h, psd, df, a, b)[0])
        if s > 0:
            parts[k] = snr_series(data_fd, h, psd, df, a, b, dtype=np.complex128)[0] * (s / total)
    chi2 = p * np.sum(np.abs(parts - z[None, :] / p) ** 2, axis=0)
    times = t0 + np.arange(m_out) / (fs * up)
    keep = np.abs(times - t_c) <= half_width
    return times[keep], np.abs(z[keep]), chi2[keep] / (2 * p - 2)


def stretch_for(t_c: float, m1: float, m2: float, f_low: float, half_width: float = 2.0) -> tuple[float, float]:
    """Start and end (s) of the data :func:`candidate_series` needs around ``t_c``."""
    duration = float(np.ravel(chirp_duration(m1, m2, f_low))[0])
    return t_c - duration * 1.1 - MARGIN - half_width - TAPER, t_c + MARGIN + half_width + TAPER
