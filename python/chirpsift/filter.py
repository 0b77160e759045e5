"""Matched filtering against explicit template arrays, and batched cross-correlation."""

from __future__ import annotations

import numpy as np

from . import _core
from ._validate import (
    choice, complex_array, dtype_choice, finite_output, nonnegative_scalar, integer, positive_scalar, psd_array, real_array,
)

__all__ = ["band", "sigma", "snr_series", "correlate"]


def band(f_low, f_high, df, n_freq):
    """Return the frequency bins ``k_lo <= k < k_hi`` of the band ``f_low <= k df < f_high``.

    Parameters
    ----------
    f_low : float
        Lower edge (Hz), included.
    f_high : float or None
        Upper edge (Hz), excluded; ``None`` runs to the last bin.
    df : float
        Bin spacing (Hz).
    n_freq : int
        Number of bins; the result is clipped to ``[0, n_freq]``.

    Returns
    -------
    (int, int)
        ``(k_lo, k_hi)`` with ``k_hi >= k_lo``. A frequency within one part in
        ``1e9`` below a bin counts as on it, so an edge that is an exact multiple of
        ``df`` (``0.1`` Hz at ``df = 1/70`` Hz) starts on that bin (bin 7) even though
        ``0.1 / (1/70)`` rounds above 7. Every kernel uses this one rule.

    See Also
    --------
    chirpsift.reference.band : the pure-numpy twin.

    Examples
    --------
    >>> from chirpsift.filter import band
    >>> band(0.1, None, 1 / 70, 100)
    (7, 100)
    """
    fl = nonnegative_scalar("f_low", f_low)
    fh = None if f_high is None else positive_scalar("f_high", f_high)
    return tuple(int(k) for k in _core.band(fl, fh, positive_scalar("df", df), integer("n_freq", n_freq)))


def checked_band(psd: np.ndarray, df: float, f_low, f_high):
    """Validate a band against a PSD on ``k df`` and return ``(f_low, f_high)`` as floats.

    Raises ``ValueError`` when ``f_low`` is above Nyquist, ``f_high <= f_low``, the band
    holds no bins, or the PSD is infinite over all of it.
    """
    fl = nonnegative_scalar("f_low", f_low)
    n_freq = psd.shape[-1]
    f_top = (n_freq - 1) * df
    if fl > f_top:
        raise ValueError(f"f_low={fl} Hz is above the highest bin frequency {f_top} Hz (Nyquist)")
    fh = None
    if f_high is not None:
        fh = positive_scalar("f_high", f_high)
        if fh <= fl:
            raise ValueError(f"f_high={fh} Hz must exceed f_low={fl} Hz")
    k_lo, k_hi = _core.band(fl, fh, df, n_freq)
    if k_hi <= k_lo:
        raise ValueError(f"no frequency bins between f_low={fl} Hz and f_high={fh} Hz at df={df} Hz")
    if not np.isfinite(psd[k_lo:k_hi]).any():
        raise ValueError(f"psd is inf over the whole band [{fl}, {fh if fh is not None else f_top}] Hz")
    return fl, fh


def _templates(templates, n_freq=None):
    h = complex_array("templates", templates, ndim=(1, 2))
    h2 = np.atleast_2d(h)
    if n_freq is not None and h2.shape[1] != n_freq:
        raise ValueError(f"templates must have {n_freq} frequency bins to match the data, got {h2.shape[1]}")
    return h, h2


def sigma(templates, psd, df, f_low, f_high=None):
    """Template norms ``sigma = sqrt(<h|h>)``.

    Parameters
    ----------
    templates : array_like, complex, shape (n_freq,) or (K, n_freq)
        Frequency-domain templates ``h~`` (strain per Hz) on the grid ``k * df``.
    psd : array_like, shape (n_freq,)
        One-sided PSD (1/Hz); ``inf`` excludes a bin.
    df : float
        Frequency spacing (Hz).
    f_low, f_high : float
        Band ``f_low <= f < f_high`` (Hz); ``f_high=None`` runs to the last bin.

    Returns
    -------
    float or ndarray of float64, shape (K,)
        ``sigma^2 = 4 df sum_band |h~|^2 / S``. For a template at 1 Mpc,
        ``sigma / rho`` is the effective distance (Mpc) at which it gives SNR ``rho``.

    References
    ----------
    .. [1] B. Allen et al., Phys. Rev. D 85, 122006 (2012), arXiv:gr-qc/0509116.
    """
    p = psd_array("psd", psd, ndim=1)
    dfv = positive_scalar("df", df)
    h, h2 = _templates(templates, p.shape[0])
    fl, fh = checked_band(p, dfv, f_low, f_high)
    out = finite_output(_core.sigma(h2, p, dfv, fl, fh), "templates or psd", " (norm beyond float64)")
    return float(out[0]) if h.ndim == 1 else out


def snr_series(data_fd, templates, psd, df, f_low, f_high=None, dtype=np.complex64):
    """Complex matched-filter SNR time series of each template.

    Parameters
    ----------
    data_fd : array_like, complex, shape (n_freq,)
        Data in the frequency domain, ``d~ = rfft(d) / sample_rate`` (strain per Hz).
    templates : array_like, complex, shape (n_freq,) or (K, n_freq)
        Templates ``h~`` with ``t_c = 0`` (see :func:`chirpsift.taylorf2`).
    psd : array_like, shape (n_freq,)
        One-sided PSD (1/Hz); ``inf`` excludes a bin.
    df : float
        Frequency spacing (Hz).
    f_low, f_high : float
        Band ``f_low <= f < f_high`` (Hz); ``f_high=None`` runs to the last bin.
    dtype : {numpy.complex64, numpy.complex128}, optional
        Output precision (products are formed in float64 either way).

    Returns
    -------
    ndarray, shape (K, N), ``N = 2 (n_freq - 1)``
        ``z_j = 4 df sum_band d~_k h~_k* / S_k exp(2 pi i j k / N) / sigma``. Index
        ``j`` is coalescence at ``j / sample_rate`` after the segment start; ``Re z``
        and ``Im z`` are the two phases of the filter, and in stationary Gaussian noise
        ``|z|^2`` is chi-squared with 2 degrees of freedom (mean 2). The series is
        circular: the first template duration and the ends of the segment are
        corrupted by wrap-around.

    References
    ----------
    .. [1] B. Allen et al., Phys. Rev. D 85, 122006 (2012), arXiv:gr-qc/0509116.
    """
    d = complex_array("data_fd", data_fd, ndim=1, dtype=np.complex128)
    if d.shape[0] < 2:
        raise ValueError(f"data_fd must have at least 2 frequency bins, got {d.shape[0]}")
    p = psd_array("psd", psd, ndim=1)
    if p.shape[0] != d.shape[0]:
        raise ValueError(f"psd must have {d.shape[0]} bins to match data_fd, got {p.shape[0]}")
    dfv = positive_scalar("df", df)
    _, h2 = _templates(templates, d.shape[0])
    fl, fh = checked_band(p, dfv, f_low, f_high)
    dt = dtype_choice("dtype", dtype, (np.complex64, np.complex128))
    out = _core.snr_series(d, h2, p, dfv, fl, fh, dt.name)
    return finite_output(out, "data_fd, templates or psd", f" (the SNR does not fit in {dt.name}; try dtype=complex128)")


def correlate(data, templates, mode="valid"):
    """Cross-correlate one real stream with K real kernels by FFT.

    Parameters
    ----------
    data : array_like, shape (n,)
        Real input stream.
    templates : array_like, shape (m,) or (K, m)
        Real kernels (all the same length).
    mode : {"valid", "same", "full"}, optional
        Output extent, as in :func:`scipy.signal.correlate`.

    Returns
    -------
    ndarray, shape (L,) or (K, L)
        Row ``i`` equals ``scipy.signal.correlate(data, templates[i], mode)``. float32
        if both inputs are float32, else float64 (computed in float64).
    """
    d = real_array("data", data, ndim=1, dtype=None)
    t = real_array("templates", templates, ndim=(1, 2), dtype=None)
    choice("mode", mode, ("valid", "same", "full"))
    if mode == "valid" and t.shape[-1] > d.shape[0]:
        raise ValueError(f"mode='valid' needs templates no longer than data, got {t.shape[-1]} > {d.shape[0]} samples")
    out_dtype = np.float32 if (d.dtype == np.float32 and t.dtype == np.float32) else np.float64
    out = _core.correlate(
        np.ascontiguousarray(d, dtype=np.float64), np.ascontiguousarray(np.atleast_2d(t), dtype=np.float64), mode
    )
    out = finite_output(out.astype(out_dtype, copy=False), "data or templates", " (values too large)")
    return out[0] if t.ndim == 1 else out
