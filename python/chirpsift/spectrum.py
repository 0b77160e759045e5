"""Noise spectra: Welch PSD estimates, analytic design curves, PSD resampling,
inverse spectrum truncation and whitening (numpy API over the Rust core)."""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from . import _core
from ._validate import check_allocation, choice, finite_output, nonnegative_scalar, integer, positive_scalar, psd_array, real_array

__all__ = ["welch", "design_psd", "DESIGN_CURVES", "psd_to_grid", "psd_on_grid", "truncate_inverse_psd", "segment_psds", "whiten"]

#: Names accepted by :func:`design_psd`.
DESIGN_CURVES = tuple(_core.DESIGN_CURVES)


def _welch_window(window, nperseg: int) -> np.ndarray:
    if isinstance(window, str):
        choice("window", window, ("hann", "boxcar"))
        if window == "boxcar":
            return np.ones(nperseg)
        # Periodic Hann, as scipy.signal.get_window("hann", n) (fftbins=True).
        return 0.5 - 0.5 * np.cos(2.0 * np.pi * np.arange(nperseg) / nperseg)
    w = real_array("window", window, ndim=1)
    if w.shape[0] != nperseg:
        raise ValueError(f"window must have segment_duration * sample_rate = {nperseg} samples, got {w.shape[0]}")
    if not np.any(w):
        raise ValueError("window must not be identically zero")
    return w


def welch(x, sample_rate, segment_duration=4.0, overlap=0.5, average="median", window="hann", detrend=False):
    """One-sided power spectral density by Welch's method.

    Parameters
    ----------
    x : array_like, shape (n,) or (channels, n)
        Time series (e.g. strain, dimensionless). Channels are processed in parallel.
    sample_rate : float
        Sampling rate in Hz.
    segment_duration : float, optional
        Length of each periodogram segment in seconds (``nperseg = round(duration * rate)``).
    overlap : float, optional
        Fraction of a segment shared with the next one, ``0 <= overlap < 1``.
    average : {"median", "mean"}, optional
        How periodograms are combined. ``"median"`` is robust to short transients
        and is divided by its bias for exponentially distributed bins.
    window : {"hann", "boxcar"} or array_like, optional
        Taper applied to each segment (Hann is periodic, as scipy's ``get_window``).
    detrend : False or "constant", optional
        Whether to subtract each segment's mean before transforming.

    Returns
    -------
    freqs : ndarray, shape (nperseg // 2 + 1,)
        Frequencies in Hz.
    psd : ndarray of float64, shape (..., nperseg // 2 + 1)
        One-sided PSD in 1/Hz (units of ``x`` squared per Hz).

    Notes
    -----
    Equals ``scipy.signal.welch(x, fs, nperseg=nperseg, noverlap=nperseg - step,
    scaling="density", detrend=False, average=average)``. The median bias is
    ``1 + sum_{i=1}^{(N-1)//2} (1/(2i+1) - 1/(2i))`` for ``N`` segments: exact for
    odd ``N``, and for even ``N`` (median = mean of the middle two) the exact value
    is that of ``N - 1``. Overlapping segments are not independent, so for 50%
    overlap the correction is approximate.

    References
    ----------
    .. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of
       power spectra", IEEE Trans. Audio Electroacoust. 15, 70 (1967).
    .. [2] B. Allen et al., Phys. Rev. D 85, 122006 (2012), arXiv:gr-qc/0509116
       (median PSD estimate and its bias).

    Examples
    --------
    >>> import numpy as np, chirpsift
    >>> x = np.random.default_rng(1).normal(size=4096 * 16)
    >>> f, p = chirpsift.welch(x, 4096.0, segment_duration=1.0)
    >>> bool(abs(p[10:1000].mean() * 4096.0 / 2 - 1) < 0.1)
    True
    """
    a = real_array("x", x, ndim=(1, 2))
    fs = positive_scalar("sample_rate", sample_rate)
    seg = positive_scalar("segment_duration", segment_duration)
    ov = nonnegative_scalar("overlap", overlap)
    if ov >= 1:
        raise ValueError(f"overlap must be below 1, got {ov}")
    choice("average", average, ("median", "mean"))
    if not (detrend is None or detrend is False or (isinstance(detrend, (bool, np.bool_)) and not detrend)
            or (isinstance(detrend, str) and detrend == "constant")):
        raise ValueError(f"detrend must be False or 'constant', got {detrend!r}")
    detrend = isinstance(detrend, str)
    nperseg = int(round(seg * fs))
    if nperseg < 2:
        raise ValueError(f"segment_duration={seg} s at sample_rate={fs} Hz gives {nperseg} samples; need at least 2")
    n = a.shape[-1]
    if nperseg > n:
        raise ValueError(f"x has {n} samples ({n / fs:g} s), fewer than one segment_duration={seg} s ({nperseg} samples)")
    step = nperseg - int(round(ov * nperseg))
    if step < 1:
        raise ValueError(f"overlap={ov} leaves no step between segments of {nperseg} samples")
    w = _welch_window(window, nperseg)
    psd = finite_output(_core.welch(np.atleast_2d(a), fs, step, w, detrend, average), "x",
                        " (values too large for a float64 PSD)")
    freqs = np.arange(nperseg // 2 + 1) * (fs / nperseg)
    return freqs, (psd[0] if a.ndim == 1 else psd)


def design_psd(freqs, curve="gen2-zero-detuned"):
    """Analytic fits to published design sensitivities of ground-based detectors.

    Parameters
    ----------
    freqs : array_like
        Frequencies in Hz (any shape).
    curve : str, optional
        One of :data:`DESIGN_CURVES` (``x = f / f0``, one-sided PSD in 1/Hz):

        ``"gen1-4km"``
            First-generation 4-km-arm design, ``9e-46 [(4.49x)^-56 + 0.16 x^-4.52 + 0.52 + 0.32 x^2]``,
            f0 = 150 Hz, used at f >= 30 Hz.
        ``"gen1-3km"``
            First-generation 3-km-arm design, ``3.2e-46 [(7.87x)^-4.8 + (6/17)/x + 1 + x^2]``,
            f0 = 500 Hz, f >= 10 Hz.
        ``"gen1-600m"``
            600-m-arm design, ``1e-46 [(3.4x)^-30 + 34/x + 20(1 - x^2 + x^4/2)/(1 + x^2/2)]``,
            f0 = 150 Hz, f >= 30 Hz.
        ``"gen1-300m"``
            300-m-arm design, ``7.5e-46 [x^-5 + 13/x + 9(1 + x^2)]``, f0 = 400 Hz, f >= 50 Hz.
        ``"gen2-early"``
            Early second-generation baseline,
            ``1e-49 [x^-4.14 - 5 x^-2 + 111(1 - x^2 + x^4/2)/(1 + x^2/2)]``, f0 = 215 Hz, f >= 10 Hz.
        ``"gen2-zero-detuned"`` (default)
            Second-generation zero-detuned high-power design fit,
            ``1e-48 [0.0152 x^-4 + 0.2935 x^(9/4) + 2.7951 x^(3/2) - 6.5080 x^(3/4) + 17.7622]``,
            f0 = 245.4 Hz, f >= 10 Hz.

    Returns
    -------
    psd : ndarray of float64
        One-sided PSD in 1/Hz, ``inf`` below the curve's lowest valid frequency (so
        the inverse PSD is zero there and such bins drop out of every inner product).

    References
    ----------
    .. [1] B. S. Sathyaprakash and B. F. Schutz, "Physics, astrophysics and cosmology
       with gravitational waves", Living Rev. Relativ. 12, 2 (2009), arXiv:0903.0338
       (the first five fits).
    .. [2] P. Ajith, "Addressing the spin question in gravitational-wave searches",
       Phys. Rev. D 84, 084037 (2011), arXiv:1107.1267 (the zero-detuned high-power fit).
    .. [3] T. Damour, B. R. Iyer and B. S. Sathyaprakash, Phys. Rev. D 63, 044023 (2001),
       gr-qc/0010009 (the 4-km fit).
    """
    choice("curve", curve, DESIGN_CURVES)
    f = real_array("freqs", freqs, ndim=range(0, 8), finite=False)
    if np.isnan(f).any():
        raise ValueError("freqs must not contain NaN")
    flat = np.ascontiguousarray(f.reshape(-1))
    return _core.design_psd(flat, curve).reshape(f.shape)


def psd_to_grid(freqs, psd, df, n_freq):
    """Resample a PSD onto the grid ``k * df``, ``k = 0 .. n_freq - 1``.

    Parameters
    ----------
    freqs : array_like, shape (m,)
        Strictly increasing frequencies (Hz) at which ``psd`` is known.
    psd : array_like, shape (m,)
        One-sided PSD (1/Hz); ``inf`` marks excluded bins.
    df : float
        Target frequency spacing (Hz), typically ``1 / segment duration``.
    n_freq : int
        Number of target bins (``N // 2 + 1`` for an N-sample segment).

    Returns
    -------
    ndarray of float64, shape (n_freq,)
        Linear interpolation between the two bracketing samples; ``inf`` outside
        ``[freqs[0], freqs[-1]]`` or next to an ``inf`` sample.
    """
    f = real_array("freqs", freqs, ndim=1)
    p = psd_array("psd", psd, ndim=1)
    if f.shape != p.shape:
        raise ValueError(f"freqs and psd must have the same length, got {f.shape[0]} and {p.shape[0]}")
    if f.shape[0] >= 2 and not np.all(np.diff(f) > 0):
        i = int(np.argmax(np.diff(f) <= 0))
        raise ValueError(f"freqs must increase strictly, but freqs[{i + 1}]={f[i + 1]} <= freqs[{i}]={f[i]}")
    nf = integer("n_freq", n_freq)
    check_allocation("n_freq", nf, 8)
    return _core.psd_to_grid(f, p, positive_scalar("df", df), nf)


def psd_on_grid(psd, df: float, n_freq: int, name: str = "psd", *, allow_zero: bool = False) -> np.ndarray:
    """One-sided PSD (1/Hz) at ``k * df``, ``k < n_freq``, from any of the ways a user names one.

    Parameters
    ----------
    psd : str, callable or (freqs, values)
        A design-curve name (:func:`design_psd`), a callable of frequency (Hz), or a
        sampled ``(freqs, values)`` pair (:func:`psd_to_grid`: linear interpolation,
        ``inf`` outside the samples).
    df : float
        Bin spacing (Hz).
    n_freq : int
        Number of bins.
    name : str, optional
        The argument's name in error messages.
    allow_zero : bool, optional
        Accept zero (a bin without noise) from a callable, for simulated noise; a
        filter's PSD must be positive or ``inf`` (an excluded bin), and sampled
        ``(freqs, values)`` must be positive to be interpolated.

    Returns
    -------
    ndarray of float64, shape (n_freq,)

    Examples
    --------
    >>> from chirpsift.spectrum import psd_on_grid
    >>> psd_on_grid("gen2-zero-detuned", 1.0, 4).shape
    (4,)
    """
    freqs = np.arange(n_freq) * df
    if isinstance(psd, str):
        return design_psd(freqs, psd)
    if callable(psd):
        values = np.asarray(psd(freqs))
        try:
            values = np.broadcast_to(values, freqs.shape)
        except ValueError:
            raise ValueError(f"{name} returned shape {values.shape} for {n_freq} frequencies") from None
        return psd_array(name, values, ndim=1, allow_zero=allow_zero)
    if isinstance(psd, tuple) and len(psd) == 2:
        return psd_to_grid(real_array(f"{name}[0]", psd[0], ndim=1), psd_array(f"{name}[1]", psd[1], ndim=1), df,
                           n_freq)
    raise TypeError(f"{name} must be a design-curve name, a callable freqs -> PSD or a (freqs, values) pair, "
                    f"got {type(psd).__name__}")


def truncate_inverse_psd(psd, sample_rate, max_duration, f_low):
    """Inverse spectrum truncation: a PSD whose inverse has a short impulse response.

    Parameters
    ----------
    psd : array_like, shape (n_freq,) or (channels, n_freq)
        One-sided PSD (1/Hz) on the rfft grid of ``N = 2 (n_freq - 1)`` samples at
        ``sample_rate``; ``inf`` marks excluded bins.
    sample_rate : float
        Hz.
    max_duration : float
        Length in seconds of the impulse response kept (``T_spec``); filtering with
        the result corrupts ``max_duration / 2`` seconds at each end of a segment.
    f_low : float
        Bins below this frequency (Hz) are excluded before and after truncation.

    Returns
    -------
    ndarray of float64, same shape as ``psd``
        ``1 / |rfft(q)|^2`` where ``q = irfft(1 / sqrt(psd))`` is zeroed outside
        ``|t| < max_duration / 2``; ``inf`` below ``f_low``.

    References
    ----------
    .. [1] B. Allen et al., Phys. Rev. D 85, 122006 (2012), arXiv:gr-qc/0509116,
       section on inverse spectrum truncation.
    """
    p = psd_array("psd", psd, ndim=(1, 2))
    fs = positive_scalar("sample_rate", sample_rate)
    t_spec = positive_scalar("max_duration", max_duration)
    fl = nonnegative_scalar("f_low", f_low)
    n_freq = p.shape[-1]
    if n_freq < 2:
        raise ValueError(f"psd must have at least 2 frequency bins, got {n_freq}")
    n = 2 * (n_freq - 1)
    if fl >= fs / 2:
        raise ValueError(f"f_low={fl} Hz must be below the Nyquist frequency {fs / 2} Hz")
    max_len = int(round(t_spec * fs))
    if max_len < 2 or max_len > n:
        raise ValueError(f"max_duration={t_spec} s must span 2..{n} samples of the {n / fs:g} s segment, got {max_len}")
    out = _core.truncate_inverse_psd(np.atleast_2d(p), max_len, fs / n, fl)
    return out[0] if p.ndim == 1 else out


class ChainArguments(NamedTuple):
    """The spectrum chain's checked arguments, as the core takes them (see :func:`chain_arguments`)."""

    starts: np.ndarray  # uint64, first sample of each block
    block_samples: int
    n_freq: int  # bins of the analysis grid
    sample_rate: float  # Hz
    step: int  # samples between Welch segments
    window: np.ndarray  # Hann taper of one Welch segment
    max_len: int  # samples kept of the inverse PSD's impulse response
    f_low: float  # Hz


def chain_arguments(x_samples, sample_rate, starts, block_samples, n_freq, welch_duration, f_low, *,
                    names=("x", "starts", "block_samples")):
    """Check the arguments of the PSD chain of :func:`segment_psds` (also run by
    :func:`chirpsift.prepare_segments` when it estimates the PSDs).

    Parameters
    ----------
    x_samples : int
        Samples of the strain the blocks are cut from.
    sample_rate, starts, block_samples, n_freq, welch_duration, f_low
        As :func:`segment_psds` takes them.
    names : tuple of str, optional
        What the messages call the strain, ``starts`` and ``block_samples``.

    Returns
    -------
    ChainArguments
        ``starts`` as uint64, ``n_freq``, Welch step and Hann window, ``max_len`` (the Welch length
        in samples) and the checked scalars.

    Raises
    ------
    ValueError, TypeError
        Naming the argument, as :func:`segment_psds` documents.

    Examples
    --------
    >>> from chirpsift.spectrum import chain_arguments
    >>> c = chain_arguments(8192, 1024.0, [0, 4096], 4096, 2049, 1.0, 20.0)
    >>> c.step, c.max_len, c.window.shape
    (512, 1024, (1024,))
    """
    x_name, s_name, b_name = names
    fs = positive_scalar("sample_rate", sample_rate)
    s = real_array(s_name, starts, ndim=1, dtype=None, allow_empty=True)
    if s.dtype.kind not in "iu":
        raise TypeError(f"{s_name} must hold integers, got dtype {s.dtype}")
    block = integer(b_name, block_samples)
    nf = integer("n_freq", n_freq, minimum=2)
    t_spec = positive_scalar("welch_duration", welch_duration)
    fl = nonnegative_scalar("f_low", f_low)
    if s.size and (s.min() < 0 or s.max() + block > x_samples):
        raise ValueError(f"{s_name} must keep every block of {block} samples inside the {x_samples} samples of "
                         f"{x_name}, got {s_name} from {s.min()} to {s.max()}")
    nperseg = int(round(t_spec * fs))
    if nperseg < 2 or nperseg > block:
        raise ValueError(f"welch_duration={t_spec} s gives {nperseg} samples; need 2..{b_name}={block}")
    n = 2 * (nf - 1)
    if nperseg > n:
        raise ValueError(f"welch_duration={t_spec} s is longer than the {n / fs:g} s analysis segment")
    if fl >= fs / 2:
        raise ValueError(f"f_low={fl} Hz must be below the Nyquist frequency {fs / 2} Hz")
    check_allocation("n_freq", s.size * nf, 8)
    step = nperseg - int(round(0.5 * nperseg))
    return ChainArguments(np.ascontiguousarray(s, dtype=np.uint64), block, nf, fs, step,
                          _welch_window("hann", nperseg), nperseg, fl)


def segment_psds(x, sample_rate, starts, block_samples, n_freq, *, welch_duration=4.0, f_low):
    """Run the PSD chain of many analysis segments in one call, blocks in parallel.

    For each block ``x[s : s + block_samples]``: :func:`welch` (median average, Hann
    window, 50% overlap, Welch segments of ``welch_duration``), :func:`psd_to_grid`
    onto the analysis grid of ``n_freq`` bins, then :func:`truncate_inverse_psd` to
    ``welch_duration``. The result equals those three calls row by row, bit for bit.

    Parameters
    ----------
    x : array_like, shape (n,)
        Strain (dimensionless), finite.
    sample_rate : float
        Hz.
    starts : array_like of int, shape (segments,)
        First sample of each block.
    block_samples : int
        Samples per block (at least ``welch_duration * sample_rate``).
    n_freq : int
        Bins of the analysis segment's grid, ``N // 2 + 1`` for ``N`` samples
        (spacing ``sample_rate / N``).
    welch_duration : float, optional
        Welch segment length and kept impulse response of the inverse PSD (s).
    f_low : float
        Bins below this frequency (Hz) are excluded (``inf``).

    Returns
    -------
    ndarray of float64, shape (segments, n_freq)
        One-sided PSDs (1/Hz), ``inf`` where excluded.

    Raises
    ------
    ValueError
        Naming ``x`` when a block's median estimate is zero at some frequency (more
        than half its Welch segments are zero, as in gated or blank data).

    Examples
    --------
    >>> import numpy as np, chirpsift
    >>> x = np.random.default_rng(1).normal(size=4096 * 8) * 1e-21
    >>> chirpsift.segment_psds(x, 1024.0, [0, 4096 * 4], 4096 * 4, 8193, welch_duration=1.0, f_low=20.0).shape
    (2, 8193)
    """
    a = real_array("x", x, ndim=1)
    chain = chain_arguments(a.shape[0], sample_rate, starts, block_samples, n_freq, welch_duration, f_low)
    out = _core.segment_psds(a, chain.starts, chain.block_samples, chain.sample_rate, chain.step, chain.window,
                             chain.n_freq, chain.max_len, chain.f_low)
    if np.isnan(out).any():
        raise ValueError("x: the PSD is undefined (values too large for float64)")
    return out


def whiten(x, psd, sample_rate, f_low=None):
    """Whiten time series by their PSD.

    Parameters
    ----------
    x : array_like, shape (n,) or (channels, n)
        Time series, e.g. strain. Channels are processed in parallel.
    psd : array_like, shape (n // 2 + 1,) or (channels, n // 2 + 1)
        One-sided PSD (1/Hz) on the rfft grid of ``x`` (``df = sample_rate / n``);
        ``inf`` marks excluded bins. One row applies to every channel.
    sample_rate : float
        Hz.
    f_low : float, optional
        Bins below this frequency (Hz) are zeroed. The DC bin is always zeroed.

    Returns
    -------
    ndarray of float64, same shape as ``x``
        ``irfft(rfft(x) * sqrt(2 / (S * sample_rate)))``: stationary Gaussian noise
        with PSD ``S`` comes out white with unit variance (in band).

    Notes
    -----
    Whitening is circular: ends of ``x`` are corrupted by the impulse response of
    ``1/sqrt(S)``; use :func:`truncate_inverse_psd` to bound its length.
    """
    a = real_array("x", x, ndim=(1, 2))
    fs = positive_scalar("sample_rate", sample_rate)
    p = psd_array("psd", psd, ndim=(1, 2))
    n = a.shape[-1]
    if p.shape[-1] != n // 2 + 1:
        raise ValueError(f"psd must have n // 2 + 1 = {n // 2 + 1} bins for x with {n} samples, got {p.shape[-1]}")
    x2 = np.atleast_2d(a)
    p2 = np.atleast_2d(p)
    if p2.shape[0] not in (1, x2.shape[0]):
        raise ValueError(f"psd has {p2.shape[0]} rows but x has {x2.shape[0]} channels")
    fl = 0.0 if f_low is None else nonnegative_scalar("f_low", f_low)
    if fl >= fs / 2:
        raise ValueError(f"f_low={fl} Hz must be below the Nyquist frequency {fs / 2} Hz")
    out = finite_output(_core.whiten(x2, np.ascontiguousarray(p2), fs, fl), "x or psd",
                        " (x too large or psd too small for float64)")
    return out[0] if a.ndim == 1 else out
