"""The frequency grid ``f_k = k df``: which bins a band ``f_low <= f < f_high`` holds.

A frequency a hair below a bin (relative ``BIN_TOLERANCE``) selects that bin, so a
band edge typed as an exact multiple of ``df`` (``0.1`` Hz at ``df = 1/70`` Hz)
starts on that bin although ``0.1 / (1/70)`` rounds to slightly above 7.
"""

import numpy as np

__all__ = ["BIN_TOLERANCE", "first_bin", "band", "in_band"]

#: Relative distance below a bin within which a frequency counts as on it.
BIN_TOLERANCE = 1e-9


def first_bin(f, df):
    """First bin index ``k`` with ``k df >= f`` (0 for ``f <= 0``), elementwise."""
    x = np.asarray(f, dtype=np.float64) / float(df)
    k = np.ceil(x - BIN_TOLERANCE * np.maximum(np.abs(x), 1.0))
    return np.maximum(k, 0).astype(np.int64)


def band(f_low, f_high, df, n_freq):
    """Return ``(k_lo, k_hi)``, the bins ``k_lo <= k < k_hi`` of ``f_low <= k df < f_high``.

    Clipped to ``n_freq`` (``f_high`` None: to the last bin), ``k_hi >= k_lo``.
    """
    k_lo = min(int(first_bin(f_low, df)), int(n_freq))
    k_hi = int(n_freq) if f_high is None else min(int(first_bin(f_high, df)), int(n_freq))
    return k_lo, max(k_hi, k_lo)


def in_band(n_freq, df, f_low, f_high=None):
    """Return the boolean mask of the bins in the band.

    ``f_low``/``f_high`` may be arrays of shape ``(K,)``, giving a mask ``(K, n_freq)``.
    """
    k = np.arange(int(n_freq))
    lo = first_bin(f_low, df)
    mask = k >= lo[..., None] if lo.ndim else k >= lo
    if f_high is not None:
        hi = first_bin(f_high, df)
        mask = mask & (k < hi[..., None] if hi.ndim else k < hi)
    return mask
