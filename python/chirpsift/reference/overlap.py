"""Pure-numpy twin of :func:`chirpsift.match`: the overlap maximised over time and phase."""

import numpy as np

from .filter import band

__all__ = ["match"]

#: Zero-padding factor of the inverse transform: the series is sampled this many times
#: faster than the full grid's Nyquist rate, then refined with a parabola, so the
#: time maximisation is independent of the fast kernel's band-sized transform and
#: Newton steps.
OVERSAMPLE = 8


def match(h1, h2, psd, df, f_low, f_high=None):
    """Match of frequency-domain templates, by an oversampled full-grid inverse FFT.

    Parameters
    ----------
    h1, h2 : array_like, complex, shape (n_freq,) or (rows, n_freq)
        One-sided spectra on ``k df``; rows pair or broadcast as in :func:`chirpsift.match`.
    psd : array_like, shape (n_freq,)
        One-sided PSD (1/Hz); ``inf`` excludes a bin.
    df : float
        Bin spacing (Hz).
    f_low : float
        Lower band edge (Hz), included.
    f_high : float, optional
        Upper band edge (Hz), excluded.

    Returns
    -------
    float or ndarray
        As :func:`chirpsift.match`.

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift.reference import match
    >>> h = np.exp(-1j * np.linspace(0, 50, 513)) * np.linspace(1, 2, 513)
    >>> round(match(h, h * np.exp(0.3j), np.ones(513), 0.25, 10.0), 9)
    1.0
    """
    a = np.atleast_2d(np.asarray(h1, dtype=np.complex128))
    b = np.atleast_2d(np.asarray(h2, dtype=np.complex128))
    p = np.asarray(psd, dtype=np.float64)
    n_freq = a.shape[1]
    k_lo, k_hi = band(f_low, f_high, df, n_freq)
    w = np.zeros(n_freq)
    finite = np.isfinite(p[k_lo:k_hi]) & (p[k_lo:k_hi] > 0)
    w[k_lo:k_hi][finite] = 1.0 / p[k_lo:k_hi][finite]
    a, b = np.broadcast_arrays(a, b)
    for name, h in (("h1", a), ("h2", b)):
        power = np.sum(np.abs(h) ** 2 * w, axis=1)
        if not (power > 0).all():
            raise ValueError(f"{name}: row {int(np.argmin(power > 0))} has no power between f_low and f_high "
                             "where the PSD is finite")
    norm = np.sqrt(np.sum(np.abs(a) ** 2 * w, axis=1) * np.sum(np.abs(b) ** 2 * w, axis=1))
    n = OVERSAMPLE * 2 * (n_freq - 1)
    product = np.zeros((a.shape[0], n), dtype=np.complex128)
    product[:, :n_freq] = a * np.conj(b) * w
    z = np.abs(np.fft.ifft(product, axis=1)) * n
    j = np.argmax(z, axis=1)
    rows = np.arange(z.shape[0])
    left, mid, right = z[rows, j - 1], z[rows, j], z[rows, (j + 1) % n]
    den = left - 2 * mid + right
    with np.errstate(invalid="ignore", divide="ignore"):
        peak = np.where(den < 0, mid - 0.125 * (left - right) ** 2 / den, mid)
    out = np.minimum(peak / norm, 1.0)
    return float(out[0]) if np.ndim(h1) == 1 and np.ndim(h2) == 1 else out
