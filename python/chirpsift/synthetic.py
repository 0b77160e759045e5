"""Synthetic data: coloured Gaussian noise and TaylorF2 signal injections.

Conventions (see the contributor guide): ``x~ = rfft(x) * dt``, ``x = irfft(x~) / dt``,
one-sided PSD ``S`` in 1/Hz with ``E|n~_k|^2 = T S_k / 2`` for a buffer of duration
``T``. Units: seconds, Hz, solar masses, Mpc.
"""

from __future__ import annotations

import warnings

import numpy as np

from ._validate import integer, nonnegative_scalar, positive_scalar, real_scalar
from .filter import sigma
from .spectrum import psd_on_grid, psd_to_grid
from .waveform import chirp_duration, taylorf2

__all__ = ["colored_gaussian_noise", "inject_taylorf2", "optimal_snr"]


def colored_gaussian_noise(
    n: int,
    sample_rate: float,
    psd="gen2-zero-detuned",
    *,
    seed=None,
    f_low: float | None = None,
) -> np.ndarray:
    """Stationary Gaussian noise with a given one-sided PSD.

    Parameters
    ----------
    n : int
        Number of samples (>= 2).
    sample_rate : float
        Sampling rate in Hz.
    psd : str, callable or (freqs, values), default "gen2-zero-detuned"
        A curve name for :func:`chirpsift.design_psd`, a callable mapping a float64
        array of frequencies (Hz) to the one-sided PSD (1/Hz) at them (zero allowed: a
        band without noise), or sampled values (:func:`chirpsift.spectrum.psd_on_grid`);
        ``inf`` marks frequencies to leave empty.
    seed : int, numpy.random.Generator or None
        Passed to :func:`numpy.random.default_rng`; the same seed gives the same noise.
    f_low : float, optional
        Frequency in Hz below which the noise has no power.

    Returns
    -------
    numpy.ndarray
        ``n`` float64 strain samples.

    Notes
    -----
    The noise is drawn in the frequency domain on the ``rfft`` grid ``f_k = k fs / n``:
    each bin ``n~_k`` is complex Gaussian with ``E|n~_k|^2 = T S_k / 2`` (``T = n / fs``),
    i.e. real and imaginary parts each of variance ``T S_k / 4``; the DC bin and, for even
    ``n``, the Nyquist bin are real with variance ``T S_k / 2``. Bins where ``S`` is
    infinite or ``f < f_low`` are zero. The time series is ``irfft(n~, n) / dt``. Its
    expected variance is ``df * sum_k S_k`` (the discrete form of ``integral S df``),
    and a periodogram of it estimates ``S``. The noise is periodic in the buffer (its
    correlations wrap around).

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift.synthetic import colored_gaussian_noise
    >>> x = colored_gaussian_noise(4096, 1024.0, lambda f: np.full(f.shape, 2e-46), seed=1)
    >>> x.shape, x.dtype
    ((4096,), dtype('float64'))
    """
    n = integer("n", n, minimum=2)
    fs = positive_scalar("sample_rate", sample_rate)
    if f_low is not None:
        f_low = nonnegative_scalar("f_low", f_low)
    df = 1.0 / (n * (1.0 / fs))  # numpy.fft.rfftfreq's spacing, bit for bit
    freqs = np.arange(n // 2 + 1) * df
    psd_grid = psd_on_grid(psd, df, n // 2 + 1, allow_zero=True)
    usable = np.isfinite(psd_grid)
    if f_low is not None:
        usable &= freqs >= f_low
    s = np.where(usable, psd_grid, 0.0)
    duration = n / fs
    rng = np.random.default_rng(seed)
    re = rng.standard_normal(freqs.size)
    im = rng.standard_normal(freqs.size)
    scale = np.sqrt(duration * s / 4.0)
    spec = scale * (re + 1j * im)
    # DC and (even n) Nyquist are real with the full variance T S / 2
    real_bins = [0] + ([freqs.size - 1] if n % 2 == 0 else [])
    for k in real_bins:
        spec[k] = np.sqrt(duration * s[k] / 2.0) * re[k]
    return np.fft.irfft(spec, n) * fs


def _check_source(m1, m2, chi1, chi2) -> None:
    """Check one injected source: positive finite masses, aligned spins with ``|chi| < 1``."""
    positive_scalar("m1", m1)
    positive_scalar("m2", m2)
    for name, value in (("chi1", chi1), ("chi2", chi2)):
        if abs(real_scalar(name, value)) >= 1:
            raise ValueError(f"{name} must satisfy |{name}| < 1, got {value!r}")


def inject_taylorf2(
    strain,
    sample_rate: float,
    *,
    m1: float,
    m2: float,
    chi1: float = 0.0,
    chi2: float = 0.0,
    t_coalescence: float,
    distance: float,
    phase: float = 0.0,
    f_low: float,
    t0: float = 0.0,
) -> np.ndarray:
    """Add an optimally oriented TaylorF2 inspiral to a strain series.

    Parameters
    ----------
    strain : array_like
        1-D real strain samples (not modified).
    sample_rate : float
        Sampling rate in Hz.
    m1, m2 : float
        Component masses, solar masses.
    chi1, chi2 : float
        Aligned dimensionless spins, ``|chi| < 1``.
    t_coalescence : float
        Absolute coalescence time in seconds; must lie inside the buffer
        ``[t0, t0 + n / sample_rate)``.
    distance : float
        Luminosity distance in Mpc (the signal is optimally oriented: face-on, overhead).
    phase : float
        Constant phase in radians: the frequency-domain signal is multiplied by
        ``exp(1j * phase)``.
    f_low : float
        Frequency in Hz where the signal starts.
    t0 : float
        Time of the first sample in seconds.

    Returns
    -------
    numpy.ndarray
        New float64 array ``strain + h``.

    Warns
    -----
    UserWarning
        If the chirp from ``f_low`` starts before ``t0`` (its early part then wraps round
        to the end of the buffer).

    Notes
    -----
    The signal is built in the frequency domain,
    ``h~ = chirpsift.taylorf2(m1, m2, chi1, chi2, f_low=f_low, df=fs/n, n_freq=n//2+1,
    distance=distance)[0] * exp(-2 pi i f (t_coalescence - t0)) * exp(1j phase)``, and
    ``h = irfft(h~, n) * fs``. A time shift in the frequency domain is circular: whatever
    of the chirp does not fit between ``t0`` and ``t_coalescence`` reappears at the end
    of the buffer. Keep the whole chirp (its duration is
    :func:`chirpsift.chirp_duration`) inside the data.
    """
    data = np.asarray(strain)
    if data.ndim != 1 or data.size < 2:
        raise ValueError(f"strain must be 1-D with at least 2 samples, got shape {data.shape}")
    if data.dtype.kind not in "biuf":
        raise TypeError(f"strain must be real numeric, got dtype {data.dtype}")
    fs = positive_scalar("sample_rate", sample_rate)
    _check_source(m1, m2, chi1, chi2)
    distance = positive_scalar("distance", distance)
    f_low = positive_scalar("f_low", f_low)
    phase = real_scalar("phase", phase)
    t0 = real_scalar("t0", t0)
    tc = real_scalar("t_coalescence", t_coalescence)
    n = data.size
    duration = n / fs
    offset = tc - t0
    if not 0.0 <= offset < duration:
        raise ValueError(
            f"t_coalescence={tc!r} s lies outside the data [{t0!r}, {t0 + duration!r}) s"
        )
    length = chirp_duration(m1, m2, f_low)
    if length > offset:
        warnings.warn(
            f"the chirp from f_low={f_low} Hz lasts {length:.3g} s but coalesces {offset:.3g} s after "
            "the start of the data; its beginning wraps round to the end of the buffer",
            UserWarning,
            stacklevel=2,
        )
    df = fs / n
    n_freq = n // 2 + 1
    h = taylorf2(
        m1, m2, chi1, chi2, f_low=f_low, df=df, n_freq=n_freq, distance=distance, dtype=np.complex128
    )[0]
    freqs = np.arange(n_freq) * df
    h = h * np.exp(-2j * np.pi * freqs * offset) * np.exp(1j * phase)
    return data.astype(np.float64) + np.fft.irfft(h, n) * fs


def optimal_snr(
    m1,
    m2,
    chi1=0.0,
    chi2=0.0,
    *,
    distance: float = 1.0,
    psd,
    psd_freqs=None,
    f_low: float,
    sample_rate: float,
    n: int,
    f_high: float | None = None,
):
    """Optimal matched-filter SNR ``sigma = sqrt(<h|h>)`` of optimally oriented TaylorF2 signals.

    Parameters
    ----------
    m1, m2 : float or array_like
        Component masses, solar masses (arrays give one SNR per template).
    chi1, chi2 : float or array_like
        Aligned dimensionless spins.
    distance : float
        Luminosity distance in Mpc.
    psd : array_like, str or callable
        One-sided PSD in 1/Hz: samples at ``psd_freqs`` (resampled onto the analysis grid
        with :func:`chirpsift.psd_to_grid`), or a design curve name or callable
        ``freqs -> psd`` evaluated on the grid (then ``psd_freqs`` must be None).
    psd_freqs : array_like, optional
        Frequencies (Hz) of the ``psd`` samples.
    f_low : float
        Lower frequency of the signal and of the integral, Hz.
    sample_rate : float
        Sampling rate in Hz of the data the signal would sit in.
    n : int
        Length in samples of that data (sets ``df = sample_rate / n``).
    f_high : float, optional
        Upper frequency of the integral in Hz (default: the templates' own cutoff).

    Returns
    -------
    float or numpy.ndarray
        ``sqrt(4 df sum |h~_k|^2 / S_k)`` over ``f_low <= f_k < f_high`` (float for
        scalar inputs, else a float64 array).

    Notes
    -----
    For a signal exactly matching its template the expected matched-filter SNR at the
    true time and phase equals this value (e.g. Allen et al. 2012, PRD 85, 122006).
    """
    fs = positive_scalar("sample_rate", sample_rate)
    n = integer("n", n, minimum=2)
    f_low = positive_scalar("f_low", f_low)
    distance = positive_scalar("distance", distance)
    df = fs / n
    n_freq = n // 2 + 1
    if isinstance(psd, str) or callable(psd):
        if psd_freqs is not None:
            raise ValueError("psd_freqs must be None when psd is a curve name or a callable")
        grid = psd_on_grid(psd, df, n_freq)
    else:
        if psd_freqs is None:
            raise ValueError("psd_freqs is required when psd is an array of samples")
        grid = psd_to_grid(np.asarray(psd_freqs, dtype=np.float64), np.asarray(psd, dtype=np.float64), df, n_freq)
    scalar = all(np.ndim(v) == 0 for v in (m1, m2, chi1, chi2))
    m1b, m2b, c1b, c2b = (
        np.atleast_1d(np.asarray(v, dtype=np.float64)) for v in np.broadcast_arrays(m1, m2, chi1, chi2)
    )
    templates = taylorf2(m1b, m2b, c1b, c2b, f_low=f_low, df=df, n_freq=n_freq, distance=distance, dtype=np.complex128)
    snr = np.asarray(sigma(templates, grid, df, f_low, f_high), dtype=np.float64)
    return float(snr[0]) if scalar else snr
