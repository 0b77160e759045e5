"""Gating: zero short loud transients with an inverse Tukey window, reporting every gate."""

from __future__ import annotations

import numpy as np

from .condition import merge_intervals
from .spectrum import psd_to_grid, truncate_inverse_psd, welch, whiten

__all__ = ["find_gates", "apply_gates", "whitening_blocks", "loud_samples_of_block", "GatingWarning"]


class GatingWarning(UserWarning):
    """Data were gated; the gates are listed in ``info["gates"]``."""


#: Whitening block length for gating, in units of ``welch_duration``.
BLOCK_SEGMENTS = 64


def whitening_blocks(n: int, sample_rate: float, welch_duration: float) -> list[int]:
    """Starts of the whitening blocks :func:`find_gates` examines in ``n`` samples.

    Each block of ``BLOCK_SEGMENTS * welch_duration`` is whitened with its own median
    PSD, so its loud samples depend on it and its pads alone: blocks can be examined
    apart (:func:`loud_samples_of_block`) and their gates joined
    (:func:`chirpsift.condition.merge_intervals`).
    """
    return list(range(0, n, int(round(BLOCK_SEGMENTS * welch_duration * sample_rate))))


def loud_samples_of_block(strain, sample_rate, threshold, f_low, welch_duration, start):
    """Indices whose whitened amplitude exceeds ``threshold`` in the whitening block from ``start``.

    The block (one of :func:`whitening_blocks`) is whitened with its own median PSD
    (so slow changes of the noise level are followed and memory stays bounded on long
    data), padded by ``welch_duration`` of neighbouring data so the truncated whitening
    filter's wrap-around never reaches it. The data's own first and last half filter
    length are never examined.
    """
    n = strain.shape[0]
    core = int(round(BLOCK_SEGMENTS * welch_duration * sample_rate))
    pad = int(round(welch_duration * sample_rate))
    edge = pad // 2  # the data's own ends: corrupted, never examined
    lo, hi = max(0, start - pad), min(n, start + core + pad)
    if (hi - lo) % 2:  # the truncation works on rfft grids of even length
        if lo > 0:
            lo -= 1
        else:
            hi -= 1
    a, b = max(start, edge), min(start + core, n - edge)
    if b <= a:
        return np.zeros(0, dtype=np.int64)
    block = strain[lo:hi]
    m = block.shape[0]
    freqs, psd = welch(block, sample_rate, welch_duration, average="median")
    grid = psd_to_grid(freqs, psd, sample_rate / m, m // 2 + 1)
    smooth = truncate_inverse_psd(grid, sample_rate, welch_duration, f_low)
    white = whiten(block, smooth, sample_rate, f_low)
    return np.flatnonzero(np.abs(white[a - lo:b - lo]) > threshold) + a


def find_gates(strain, sample_rate, threshold, *, f_low, welch_duration=4.0, half_width=0.25, blocks=None):
    """Sample intervals around whitened samples louder than ``threshold``.

    Parameters
    ----------
    strain : ndarray, shape (n,), or a lazy view
        Data (finite), at least one ``welch_duration`` long. Only ``strain.shape[0]``
        and slices ``strain[a:b]`` (one per block, in increasing order) are used, so a
        view that reads long data from files block by block serves as well as an array.
    sample_rate : float
        Hz.
    threshold : float
        Gate where the whitened data exceed this many standard deviations.
    f_low : float
        Whitening low-frequency cutoff (Hz).
    welch_duration : float
        Welch segment length (s) of the median PSD, also the length of the truncated
        whitening filter. Data are whitened in blocks of 64 such lengths, each with its
        own PSD; the first and last half filter length of the data are not examined
        (they are corrupted by the circular filter).
    half_width : float
        Seconds zeroed on either side of each loud sample.
    blocks : iterable of int, optional
        Examine only the whitening blocks starting at these samples (some of
        :func:`whitening_blocks`, in increasing order; default all). The gates of
        disjoint sets of blocks, concatenated in block order, give the gates of their
        union through :func:`chirpsift.condition.merge_intervals`.

    Returns
    -------
    list of (int, int)
        Merged, sorted half-open sample intervals to zero.
    """
    n = strain.shape[0]
    if blocks is None:
        blocks = whitening_blocks(n, sample_rate, welch_duration)
    loud = [loud_samples_of_block(strain, sample_rate, threshold, f_low, welch_duration, start) for start in blocks]
    hw = int(round(half_width * sample_rate))
    loud = np.concatenate(loud).tolist() if loud else []
    return merge_intervals((max(0, i - hw), min(n, i + hw + 1)) for i in loud)


def apply_gates(strain, sample_rate, gates, taper=0.125, *, start=0):
    """Multiply ``strain`` by an inverse Tukey window over each gate.

    The window is 0 inside each ``[start, stop)`` interval and rises to 1 over
    ``taper`` seconds on each side with a half-cosine (Hann) taper.

    Parameters
    ----------
    strain : array_like, shape (m,)
        Data (dimensionless).
    sample_rate : float
        Hz.
    gates : list of (int, int)
        Half-open sample intervals to zero, as :func:`find_gates` gives them.
    taper : float
        Length (s) of the taper on each side of a gate.
    start : int, optional
        Index of ``strain[0]`` in the data the gates were found in: a block of long
        data is gated exactly as the same samples of the whole would be (the gates are
        applied in the same order, so each sample sees the same products).

    Returns
    -------
    ndarray
        A gated copy of ``strain``.

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift.gating import apply_gates
    >>> x = np.ones(10)
    >>> apply_gates(x, 1.0, [(4, 6)], taper=2.0)
    array([1.  , 1.  , 0.75, 0.25, 0.  , 0.  , 0.25, 0.75, 1.  , 1.  ])
    >>> apply_gates(x[5:], 1.0, [(4, 6)], taper=2.0, start=5)
    array([0.  , 0.25, 0.75, 1.  , 1.  ])
    """
    out = np.array(strain, dtype=np.float64, copy=True)
    m = out.shape[0]
    nt = int(round(taper * sample_rate))
    ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(1, nt + 1) / (nt + 1))  # rising from ~0 to ~1
    for a, b in gates:
        a, b = a - start, b - start  # positions in ``out``
        out[min(max(a, 0), m):min(max(b, 0), m)] = 0.0
        lo = np.arange(a - nt, a)
        ok = (lo >= 0) & (lo < m)
        out[lo[ok]] *= ramp[::-1][ok]
        hi = np.arange(b, b + nt)
        ok = (hi >= 0) & (hi < m)
        out[hi[ok]] *= ramp[ok]
    return out
