"""Matched filtering: template normalisation, complex SNR time series and
batched real cross-correlation.

Fourier conventions: ``x~ = rfft(x) * dt``; inner product
``<a|b> = 4 Re sum_k a~_k b~_k* / S_k * df`` over the band.
"""

import numpy as np

from .grid import band, in_band

__all__ = ["band", "sigma", "snr_series", "correlate"]


def _band(n_freq, df, f_low, f_high):
    return in_band(n_freq, df, f_low, f_high)


def _inverse_psd(psd, band):
    s = np.asarray(psd, dtype=np.float64)
    inv = np.zeros(s.shape)
    use = band & np.isfinite(s)
    inv[use] = 1.0 / s[use]
    return inv


def sigma(templates, psd, df, f_low, f_high=None):
    """Template norm ``sigma = sqrt(<h|h>)``.

    Parameters
    ----------
    templates : array_like, shape (K, n_freq) or (n_freq,)
        Frequency-domain templates ``h~`` in 1/Hz on the grid ``k df``.
    psd : array_like, shape (n_freq,)
        One-sided noise PSD in 1/Hz (``inf`` bins contribute nothing).
    df : float
        Frequency spacing in Hz.
    f_low : float
        Lowest frequency in Hz of the band ``f_low <= k df < f_high``.
    f_high : float, optional
        Upper band edge in Hz (exclusive); default: up to the last bin.

    Returns
    -------
    sigma : ndarray, shape (K,), or float for 1-D ``templates``
        ``sqrt(4 df sum_band |h~|^2 / S)``, float64 (dimensionless). For a
        template at 1 Mpc, ``sigma / rho*`` is the optimal-orientation
        distance in Mpc at which the signal has SNR ``rho*`` (the horizon
        distance for ``rho* = 8``).

    References
    ----------
    .. [1] Allen, B. et al. 2012, PRD 85, 122006, arXiv:gr-qc/0509116.
    .. [2] Finn, L. S. and Chernoff, D. F. 1993, PRD 47, 2198,
       arXiv:gr-qc/9301003.
    """
    h0 = np.asarray(templates)
    h = np.atleast_2d(h0).astype(np.complex128)
    inv = _inverse_psd(psd, _band(h.shape[-1], df, f_low, f_high))
    out = np.sqrt(4.0 * float(df) * ((h.real**2 + h.imag**2) @ inv))
    return float(out[0]) if h0.ndim == 1 else out


def snr_series(data_fd, templates, psd, df, f_low, f_high=None, dtype=np.complex64):
    """Complex matched-filter SNR time series (circular correlation).

    Parameters
    ----------
    data_fd : array_like, shape (n_freq,)
        Frequency-domain data ``d~ = rfft(d) dt`` in 1/Hz.
    templates : array_like, shape (K, n_freq) or (n_freq,)
        Frequency-domain templates ``h~`` in 1/Hz.
    psd : array_like, shape (n_freq,)
        One-sided noise PSD in 1/Hz (``inf`` bins contribute nothing).
    df : float
        Frequency spacing in Hz.
    f_low, f_high : float
        Band ``f_low <= k df < f_high`` in Hz (``f_high`` None: to the last
        bin).
    dtype : numpy dtype, optional
        Complex output dtype; computed in complex128 and cast.

    Returns
    -------
    z : ndarray, shape (K, N), ``N = 2 (n_freq - 1)``
        ``z_j = 4 df sum_band d~_k h~_k* / S_k exp(2 pi i j k / N) / sigma``,
        sample ``j`` at time ``j / (N df)`` s. ``Re z`` and ``Im z`` are the
        two quadrature filter outputs; in Gaussian noise of PSD ``S``,
        ``|z|^2`` is chi-squared with 2 degrees of freedom (mean 2).

    References
    ----------
    .. [1] Allen, B. et al. 2012, PRD 85, 122006, arXiv:gr-qc/0509116.
    """
    d = np.asarray(data_fd).astype(np.complex128)
    h = np.atleast_2d(np.asarray(templates)).astype(np.complex128)
    n_freq = h.shape[-1]
    if d.shape != (n_freq,):
        raise ValueError("data_fd must have shape (n_freq,)")
    n = 2 * (n_freq - 1)
    inv = _inverse_psd(psd, _band(n_freq, df, f_low, f_high))
    norm = np.sqrt(4.0 * float(df) * ((h.real**2 + h.imag**2) @ inv))
    spec = np.zeros((h.shape[0], n), dtype=np.complex128)
    spec[:, :n_freq] = (4.0 * float(df)) * d * inv * np.conj(h)
    with np.errstate(divide="ignore", invalid="ignore"):
        z = np.fft.ifft(spec, axis=-1) * (n / norm[:, None])
    return z.astype(dtype, copy=False)


def correlate(data, templates, mode="valid"):
    """Cross-correlate one real series with each of ``K`` real templates.

    Parameters
    ----------
    data : array_like, shape (n,)
        Real data.
    templates : array_like, shape (K, m) or (m,)
        Real templates.
    mode : {"valid", "full", "same"}, optional
        Output extent, as for a 1-D correlation
        ``c[l] = sum_i data[i + l] templates[i]``: ``"full"`` gives every
        lag ``l = -(m - 1) .. n - 1`` (length ``n + m - 1``), ``"valid"``
        the lags ``0 .. n - m`` (needs ``m <= n``), ``"same"`` the ``n``
        lags centred on the full output (starting at ``(m - 1) // 2`` in
        it).

    Returns
    -------
    c : ndarray, shape (K, n_out), or (n_out,) for 1-D ``templates``
        Float32 if both inputs are float32, otherwise float64 (computed in
        float64 either way).
    """
    d = np.asarray(data)
    t0 = np.asarray(templates)
    t = np.atleast_2d(t0)
    out_dtype = (np.float32 if d.dtype == np.float32 and t.dtype == np.float32
                 else np.float64)
    if d.ndim != 1 or t.ndim != 2:
        raise ValueError("data must be 1-D and templates 1-D or 2-D")
    n, m = d.size, t.shape[-1]
    if n < 1 or m < 1:
        raise ValueError("data and templates must not be empty")
    n_full = n + m - 1
    full = np.fft.irfft(np.fft.rfft(d.astype(np.float64), n_full)[None, :]
                        * np.fft.rfft(t[:, ::-1].astype(np.float64), n_full, axis=-1),
                        n_full, axis=-1)
    if mode == "full":
        out = full
    elif mode == "valid":
        if m > n:
            raise ValueError("mode 'valid' needs templates no longer than data")
        out = full[:, m - 1:n]
    elif mode == "same":
        start = (m - 1) // 2
        out = full[:, start:start + n]
    else:
        raise ValueError("mode must be 'valid', 'full' or 'same'")
    out = np.ascontiguousarray(out, dtype=out_dtype)
    return out[0] if t0.ndim == 1 else out
