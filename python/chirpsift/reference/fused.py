"""Pure-numpy twin of :func:`chirpsift.filter_segment`.

Full SNR series per template, peak finding, clustering, refinement and Allen's
chi-squared, written for clarity.
"""

import numpy as np

from .filter import snr_series
from .grid import in_band
from .waveform import isco_frequency, taylorf2

__all__ = ["filter_segment", "find_peaks", "cluster_peaks"]


def find_peaks(snr, start, stop, threshold):
    """Return indices ``j`` in ``[start, stop)`` of local maxima above ``threshold``.

    A peak has ``snr[j] >= threshold``, ``snr[j] > snr[j-1]`` and ``snr[j] >= snr[j+1]``.
    """
    j = np.arange(start, stop)
    s = snr[j]
    keep = (s >= threshold) & (s > snr[j - 1]) & (s >= snr[j + 1])
    return j[keep]


def cluster_peaks(index, value, window):
    """Keep peaks with no louder peak within ``window`` samples (ties: earlier wins)."""
    kept = []
    for i, (j, v) in enumerate(zip(index, value)):
        near = np.abs(index - j) <= window
        near[i] = False
        louder = (value[near] > v) | ((value[near] == v) & (index[near] < j))
        if not louder.any():
            kept.append(i)
    return np.asarray(kept, dtype=int)


def filter_segment(data_fd, psd, df, m1, m2, chi1=0.0, chi2=0.0, *, f_low, f_high=None, min_snr=5.5,
                   cluster_samples=0, chi2_bands=16, valid=None, phase_order=7):
    """Filter one segment as :func:`chirpsift.filter_segment` does (see its docstring).

    References
    ----------
    .. [1] B. Allen, Phys. Rev. D 71, 062001 (2005), gr-qc/0405045 (chi-squared).
    .. [2] B. Allen et al., Phys. Rev. D 85, 122006 (2012), arXiv:gr-qc/0509116.
    """
    d = np.asarray(data_fd, dtype=np.complex128)
    s = np.asarray(psd, dtype=np.float64)
    n_freq = d.shape[0]
    n = 2 * (n_freq - 1)
    m1, m2, chi1, chi2 = (np.ravel(x).astype(float) for x in np.broadcast_arrays(m1, m2, chi1, chi2))
    fh = isco_frequency(m1, m2) if f_high is None else np.broadcast_to(np.asarray(f_high, float), m1.shape)
    start, stop = (1, n - 1) if valid is None else valid
    inv = np.where(np.isfinite(s), 1.0 / s, 0.0)
    p = int(chi2_bands)
    # The kernel's per-peak columns (chirpsift.PEAK_COLUMNS; a test checks they match).
    columns = {c: [] for c in ("template", "index", "position", "snr", "phase", "sigma", "chi2", "chi2_dof")}
    for i in range(m1.shape[0]):
        h = taylorf2(m1[i], m2[i], chi1[i], chi2[i], f_low=f_low, df=df, n_freq=n_freq, f_high=fh[i],
                     phase_order=phase_order, dtype=np.complex128)[0]
        band = in_band(n_freq, df, f_low, fh[i])
        weight = np.abs(h) ** 2 * inv * band
        sigma2 = 4 * df * weight.sum()
        if not sigma2 > 0:
            continue
        sig = np.sqrt(sigma2)
        z = snr_series(d, h, s, df, f_low, fh[i], dtype=np.complex128)[0]
        mag = np.abs(z)
        peaks = find_peaks(mag, start, stop, min_snr)
        kept = peaks[cluster_peaks(peaks, mag[peaks], cluster_samples)]
        # Chi-squared bands of equal sigma^2 share; C_k is the norm below bin k.
        below = np.concatenate([[0.0], np.cumsum(weight)[:-1]])
        band_of = np.minimum((below / (weight.sum() / p)).astype(int), p - 1)
        product = 4 * df * d * np.conj(h) * inv * band / sig
        for j in kept:
            a, b, c = mag[j - 1], mag[j], mag[j + 1]
            den = a - 2 * b + c
            delta = float(np.clip(0.5 * (a - c) / den, -0.5, 0.5)) if den < 0 else 0.0
            t = j + delta
            terms = product * np.exp(2j * np.pi * np.arange(n_freq) * t / n)
            zl = np.array([terms[band & (band_of == l)].sum() for l in range(p)])
            zt = zl.sum()
            columns["template"].append(i)
            columns["index"].append(j)
            columns["position"].append(t)
            columns["snr"].append(abs(zt))
            columns["phase"].append(np.angle(zt))
            columns["sigma"].append(sig)
            columns["chi2"].append(p * np.sum(np.abs(zl - zt / p) ** 2))
            columns["chi2_dof"].append(2 * p - 2)
    kinds = {"template": np.int64, "index": np.int64, "chi2_dof": np.int64}
    return {k: np.asarray(v, dtype=kinds.get(k, np.float64)) for k, v in columns.items()}
