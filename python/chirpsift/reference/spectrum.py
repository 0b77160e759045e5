"""Noise power spectra: estimation, analytic design curves, resampling,
inverse spectrum truncation and whitening.

Conventions (shared by every kernel of the package): frequencies in Hz, times
in seconds, one-sided power spectral densities (PSDs) in 1/Hz, Fourier
transforms ``x~ = rfft(x) * dt``.
"""

import numpy as np

from .grid import in_band

__all__ = [
    "median_bias",
    "welch",
    "DESIGN_CURVES",
    "design_psd",
    "psd_to_grid",
    "truncate_inverse_psd",
    "whiten",
]


# ---------------------------------------------------------------------------
# Welch estimate
# ---------------------------------------------------------------------------

def median_bias(n):
    """Bias of the median of ``n`` exponentially distributed periodogram bins.

    Parameters
    ----------
    n : int
        Number of averaged segments, ``n >= 1``.

    Returns
    -------
    beta : float
        ``1 + sum_{i=1}^{(n-1)//2} (1/(2i+1) - 1/(2i))``. For odd ``n`` this
        is the alternating harmonic sum ``sum_{l=1}^{n} (-1)^(l+1) / l``,
        which equals ``E[median] / E[mean]`` exactly for ``n`` independent
        Exp(1) variables; for even ``n`` (median taken as the mean of the two
        middle values) it equals ``beta(n - 1)``. It tends to ``ln 2``.

    References
    ----------
    .. [1] Allen, B., Anderson, W. G., Brady, P. R., Brown, D. A. and
       Creighton, J. D. E. 2012, PRD 85, 122006, arXiv:gr-qc/0509116
       (appendix on median PSD estimation).
    """
    n = int(n)
    if n < 1:
        raise ValueError("median_bias needs n >= 1")
    i2 = 2.0 * np.arange(1, (n - 1) // 2 + 1)
    return float(1.0 + np.sum(1.0 / (i2 + 1.0) - 1.0 / i2))


def _window(window, nperseg):
    if isinstance(window, str):
        if window == "hann":
            # periodic Hann window (the DFT-even form)
            k = np.arange(nperseg)
            return 0.5 - 0.5 * np.cos(2.0 * np.pi * k / nperseg)
        if window == "boxcar":
            return np.ones(nperseg)
        raise ValueError(f"unknown window {window!r}; use 'hann', 'boxcar' or an array")
    w = np.asarray(window, dtype=np.float64)
    if w.shape != (nperseg,):
        raise ValueError(f"window array must have length nperseg={nperseg}")
    return w


def welch(x, sample_rate, segment_duration=4.0, overlap=0.5, average="median",
          window="hann", detrend=False):
    """One-sided PSD by Welch's method of averaged, windowed periodograms.

    Parameters
    ----------
    x : array_like, shape (n,) or (channels, n)
        Real time series (strain, dimensionless).
    sample_rate : float
        Sampling rate ``fs`` in Hz.
    segment_duration : float, optional
        Segment length in seconds; ``nperseg = round(segment_duration * fs)``.
    overlap : float, optional
        Fractional overlap of consecutive segments; the step between segment
        starts is ``nperseg - round(overlap * nperseg)`` samples.
    average : {"median", "mean"}, optional
        How the ``n_seg = (n - nperseg) // step + 1`` periodograms of each
        frequency are combined. ``"median"`` (robust to loud transients)
        divides the median (mean of the two middle values for an even count)
        by :func:`median_bias` ``(n_seg)`` so that Gaussian noise gives an
        unbiased estimate.
    window : {"hann", "boxcar"} or array_like, optional
        Taper. ``"hann"`` is the periodic Hann window; an array must have
        length ``nperseg``.
    detrend : {False, "constant"}, optional
        ``"constant"`` subtracts each segment's mean before windowing.

    Returns
    -------
    freqs : ndarray, shape (nperseg // 2 + 1,)
        Frequencies ``k fs / nperseg`` in Hz.
    psd : ndarray, shape (nfreq,) or (channels, nfreq)
        One-sided PSD in 1/Hz, float64. Each periodogram is
        ``2 |rfft(w x)|^2 / (fs sum w^2)``, not doubled at DC nor (even
        ``nperseg``) at the Nyquist frequency.

    References
    ----------
    .. [1] Welch, P. D. 1967, "The use of fast Fourier transform for the
       estimation of power spectra", IEEE Trans. Audio Electroacoust. 15, 70.
    .. [2] Allen, B. et al. 2012, PRD 85, 122006, arXiv:gr-qc/0509116
       (median average and its bias).
    """
    x = np.asarray(x, dtype=np.float64)
    fs = float(sample_rate)
    nperseg = int(round(segment_duration * fs))
    if nperseg < 1:
        raise ValueError("segment_duration * sample_rate must round to >= 1 sample")
    step = nperseg - int(round(overlap * nperseg))
    if step < 1:
        raise ValueError("overlap leaves a step of less than one sample")
    n = x.shape[-1]
    if n < nperseg:
        raise ValueError("time series shorter than one segment")
    n_seg = (n - nperseg) // step + 1
    w = _window(window, nperseg)

    starts = step * np.arange(n_seg)
    idx = starts[:, None] + np.arange(nperseg)[None, :]
    seg = x[..., idx]                       # (..., n_seg, nperseg)
    if detrend == "constant":
        seg = seg - seg.mean(axis=-1, keepdims=True)
    elif detrend not in (False, None):
        raise ValueError("detrend must be False or 'constant'")

    spec = np.fft.rfft(seg * w, axis=-1)
    per = (spec.real**2 + spec.imag**2) / (fs * np.sum(w * w))
    per[..., 1:] *= 2.0
    if nperseg % 2 == 0:
        per[..., -1] /= 2.0                 # Nyquist bin is not doubled

    if average == "mean":
        psd = per.mean(axis=-2)
    elif average == "median":
        psd = np.median(per, axis=-2) / median_bias(n_seg)
    else:
        raise ValueError("average must be 'median' or 'mean'")
    freqs = np.arange(nperseg // 2 + 1) * (fs / nperseg)
    return freqs, psd


# ---------------------------------------------------------------------------
# Analytic design noise curves
# ---------------------------------------------------------------------------

def _gen1_4km(x):
    return 9e-46 * ((4.49 * x) ** -56 + 0.16 * x ** -4.52 + 0.52 + 0.32 * x**2)


def _gen1_3km(x):
    return 3.2e-46 * ((7.87 * x) ** -4.8 + (6.0 / 17.0) / x + 1.0 + x**2)


def _gen1_600m(x):
    return 1e-46 * ((3.4 * x) ** -30 + 34.0 / x
                    + 20.0 * (1.0 - x**2 + 0.5 * x**4) / (1.0 + 0.5 * x**2))


def _gen1_300m(x):
    return 7.5e-46 * (x ** -5 + 13.0 / x + 9.0 * (1.0 + x**2))


def _gen2_early(x):
    return 1e-49 * (x ** -4.14 - 5.0 * x ** -2
                    + 111.0 * (1.0 - x**2 + 0.5 * x**4) / (1.0 + 0.5 * x**2))


def _gen2_zero_detuned(x):
    return 1e-48 * (0.0152 * x ** -4 + 0.2935 * x ** 2.25 + 2.7951 * x ** 1.5
                    - 6.5080 * x ** 0.75 + 17.7622)


# name -> (fit function of x = f / f0, f0 in Hz, lowest valid frequency in Hz)
_CURVES = {
    "gen1-4km": (_gen1_4km, 150.0, 30.0),
    "gen1-3km": (_gen1_3km, 500.0, 10.0),
    "gen1-600m": (_gen1_600m, 150.0, 30.0),
    "gen1-300m": (_gen1_300m, 400.0, 50.0),
    "gen2-early": (_gen2_early, 215.0, 10.0),
    "gen2-zero-detuned": (_gen2_zero_detuned, 245.4, 10.0),
}

#: Names accepted by :func:`design_psd`.
DESIGN_CURVES = tuple(_CURVES)


def design_psd(freqs, curve="gen2-zero-detuned"):
    """Analytic one-sided design noise PSD of an idealised interferometer.

    Parameters
    ----------
    freqs : array_like
        Frequencies in Hz.
    curve : str, optional
        One of the fits below, with ``x = f / f0``:

        ``"gen1-4km"``
            ``9e-46 [(4.49x)^-56 + 0.16 x^-4.52 + 0.52 + 0.32 x^2]``,
            f0 = 150 Hz, valid for f >= 30 Hz (first-generation 4-km arms).
        ``"gen1-3km"``
            ``3.2e-46 [(7.87x)^-4.8 + (6/17) x^-1 + 1 + x^2]``,
            f0 = 500 Hz, f >= 10 Hz.
        ``"gen1-600m"``
            ``1e-46 [(3.4x)^-30 + 34 x^-1 + 20 (1 - x^2 + x^4/2) / (1 + x^2/2)]``,
            f0 = 150 Hz, f >= 30 Hz.
        ``"gen1-300m"``
            ``7.5e-46 [x^-5 + 13 x^-1 + 9 (1 + x^2)]``, f0 = 400 Hz, f >= 50 Hz.
        ``"gen2-early"``
            ``1e-49 [x^-4.14 - 5 x^-2 + 111 (1 - x^2 + x^4/2) / (1 + x^2/2)]``,
            f0 = 215 Hz, f >= 10 Hz.
        ``"gen2-zero-detuned"``
            ``1e-48 [0.0152 x^-4 + 0.2935 x^(9/4) + 2.7951 x^(3/2)
            - 6.5080 x^(3/4) + 17.7622]``, f0 = 245.4 Hz, f >= 10 Hz
            (second-generation zero-detuned high-power fit).

    Returns
    -------
    psd : ndarray
        PSD in 1/Hz, float64, same shape as ``freqs``; ``inf`` below the
        curve's low-frequency validity and at ``f <= 0``.

    References
    ----------
    .. [1] Sathyaprakash, B. S. and Schutz, B. F. 2009, "Physics, astrophysics
       and cosmology with gravitational waves", Living Rev. Relativ. 12, 2,
       arXiv:0903.0338 (fits of the first- and second-generation designs).
    .. [2] Damour, T., Iyer, B. R. and Sathyaprakash, B. S. 2001, PRD 63,
       044023, arXiv:gr-qc/0010009.
    .. [3] Ajith, P. 2011, PRD 84, 084037, arXiv:1107.1267 (zero-detuned
       high-power fit).
    """
    try:
        fit, f0, f_valid = _CURVES[curve]
    except KeyError:
        raise ValueError(f"unknown curve {curve!r}; choose from {DESIGN_CURVES}") from None
    f = np.asarray(freqs, dtype=np.float64)
    ok = (f >= f_valid) & (f > 0)
    x = np.where(ok, f, f_valid) / f0
    return np.where(ok, fit(x), np.inf)


# ---------------------------------------------------------------------------
# Resampling onto an FFT grid
# ---------------------------------------------------------------------------

def psd_to_grid(freqs, psd, df, n_freq):
    """Linearly interpolate a sampled PSD onto the grid ``k df``, ``k < n_freq``.

    Parameters
    ----------
    freqs : array_like, shape (m,)
        Increasing sample frequencies in Hz.
    psd : array_like, shape (m,)
        PSD samples in 1/Hz; ``inf`` marks unusable frequencies.
    df : float
        Grid spacing in Hz.
    n_freq : int
        Number of grid points.

    Returns
    -------
    out : ndarray, shape (n_freq,)
        ``(1 - w) S_i + w S_{i+1}`` with ``w = (f - f_i) / (f_{i+1} - f_i)``
        between the two bracketing samples ``f_i <= f < f_{i+1}``. A grid
        point on an input node takes that node's value. ``inf`` where either
        bracketing sample is ``inf`` or the point lies outside
        ``[freqs[0], freqs[-1]]``.
    """
    fr = np.asarray(freqs, dtype=np.float64)
    s = np.asarray(psd, dtype=np.float64)
    if fr.ndim != 1 or fr.shape != s.shape or fr.size < 1:
        raise ValueError("freqs and psd must be 1-D of equal, non-zero length")
    f = np.arange(int(n_freq)) * float(df)
    out = np.full(f.shape, np.inf)
    inside = (f >= fr[0]) & (f <= fr[-1])
    i = np.clip(np.searchsorted(fr, f, side="right") - 1, 0, fr.size - 1)
    exact = inside & (fr[i] == f)
    out[exact] = s[i[exact]]
    between = inside & ~exact
    ib = i[between]
    lo, hi = s[ib], s[ib + 1]
    w = (f[between] - fr[ib]) / (fr[ib + 1] - fr[ib])
    with np.errstate(invalid="ignore"):
        val = (1.0 - w) * lo + w * hi
    out[between] = np.where(np.isinf(lo) | np.isinf(hi), np.inf, val)
    return out


# ---------------------------------------------------------------------------
# Inverse spectrum truncation
# ---------------------------------------------------------------------------

def truncate_inverse_psd(psd, sample_rate, max_duration, f_low):
    """Smooth a PSD so that its inverse square root is a short filter.

    Parameters
    ----------
    psd : array_like, shape (N//2 + 1,)
        One-sided PSD in 1/Hz on the rfft grid of ``N = 2 (len(psd) - 1)``
        samples at ``sample_rate``; ``inf`` marks unusable bins.
    sample_rate : float
        Sampling rate in Hz.
    max_duration : float
        Length ``T_spec`` in seconds of the whitening filter's impulse
        response; ``L = round(max_duration * sample_rate)``.
    f_low : float
        Low-frequency cutoff in Hz.

    Returns
    -------
    psd_trunc : ndarray, shape (N//2 + 1,)
        ``1 / |r'|^2``, float64, with ``inf`` below ``f_low``, where
        ``r' = rfft(q')``; ``q'`` is ``q = irfft(1/sqrt(psd))`` (taken as 0
        below ``f_low`` and where ``psd`` is ``inf``) with every sample
        outside ``j < L // 2`` and ``j >= N - L // 2`` set to zero.

    Notes
    -----
    Truncation confines the impulse response of ``1/sqrt(S)``, hence the
    filter's wrap-around corruption of circular correlations, to
    ``T_spec / 2`` either side of each sample. Features of ``S`` narrower
    than about ``1 / T_spec`` are smoothed; a smooth spectrum is left
    nearly unchanged in band.

    References
    ----------
    .. [1] Allen, B. et al. 2012, PRD 85, 122006, arXiv:gr-qc/0509116
       (inverse spectrum truncation).
    """
    s = np.asarray(psd, dtype=np.float64)
    n = 2 * (s.size - 1)
    df = float(sample_rate) / n
    usable = in_band(s.size, df, f_low) & np.isfinite(s)
    r = np.zeros(s.size)
    r[usable] = 1.0 / np.sqrt(s[usable])
    q = np.fft.irfft(r, n)
    half = int(round(max_duration * sample_rate)) // 2
    q[half:n - half] = 0.0
    r2 = np.fft.rfft(q)
    with np.errstate(divide="ignore"):
        out = 1.0 / (r2.real**2 + r2.imag**2)
    out[~in_band(s.size, df, f_low)] = np.inf
    return out


# ---------------------------------------------------------------------------
# Whitening
# ---------------------------------------------------------------------------

def whiten(x, psd, sample_rate, f_low=None):
    """Whiten a time series by its noise PSD.

    Parameters
    ----------
    x : array_like, shape (..., n)
        Real time series.
    psd : array_like, shape (n//2 + 1,) or broadcastable to (..., n//2 + 1)
        One-sided PSD in 1/Hz on the rfft grid of ``n`` samples; one shared
        by all channels or one per channel.
    sample_rate : float
        Sampling rate ``fs`` in Hz.
    f_low : float, optional
        Bins below ``f_low`` Hz are set to zero.

    Returns
    -------
    y : ndarray, shape (..., n)
        ``irfft(W, n)`` with ``W = rfft(x) sqrt(2 / (S fs))``, zero at DC,
        below ``f_low`` and where ``S`` is ``inf``. Gaussian noise of PSD
        ``S`` comes out with unit variance (dimensionless, float64).
    """
    x = np.asarray(x, dtype=np.float64)
    s = np.asarray(psd, dtype=np.float64)
    n = x.shape[-1]
    fs = float(sample_rate)
    if s.shape[-1] != n // 2 + 1:
        raise ValueError("psd must have n//2 + 1 frequency bins")
    f = np.arange(n // 2 + 1) * (fs / n)
    keep = np.isfinite(s) & (f > 0)
    if f_low is not None:
        keep &= in_band(n // 2 + 1, fs / n, f_low)
    scale = np.zeros(np.broadcast_shapes(s.shape, keep.shape))
    scale[keep] = np.sqrt(2.0 / (np.broadcast_to(s, keep.shape)[keep] * fs))
    return np.fft.irfft(np.fft.rfft(x, axis=-1) * scale, n, axis=-1)
