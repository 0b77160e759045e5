"""Gating: zero short loud transients with an inverse Tukey window, reporting every gate."""

from __future__ import annotations

import numpy as np

from .spectrum import psd_to_grid, truncate_inverse_psd, welch, whiten

__all__ = ["find_gates", "apply_gates"]


def find_gates(strain, sample_rate, threshold, *, f_low, psd_segment_duration=4.0, half_width=0.25):
    """Sample intervals around whitened samples louder than ``threshold``.

    Parameters
    ----------
    strain : ndarray, shape (n,)
        Data (finite).
    sample_rate : float
        Hz.
    threshold : float
        Gate where the whitened data exceed this many standard deviations.
    f_low : float
        Whitening low-frequency cutoff (Hz).
    psd_segment_duration : float
        Welch segment length (s) for the whole-data median PSD, also the length of
        the truncated whitening filter; the first and last half of it are not
        examined (they are corrupted by the circular filter).
    half_width : float
        Seconds zeroed on either side of each loud sample.

    Returns
    -------
    list of (int, int)
        Merged, sorted half-open sample intervals to zero.
    """
    n = strain.shape[0]
    freqs, psd = welch(strain, sample_rate, psd_segment_duration, average="median")
    grid = psd_to_grid(freqs, psd, sample_rate / n, n // 2 + 1)
    if n % 2 == 1:
        grid = np.append(grid, grid[-1])  # truncation works on even-length grids
    smooth = truncate_inverse_psd(grid, sample_rate, psd_segment_duration, f_low)[: n // 2 + 1]
    white = whiten(strain, smooth, sample_rate, f_low)
    edge = int(round(psd_segment_duration * sample_rate / 2))
    loud = np.flatnonzero(np.abs(white[edge:n - edge]) > threshold) + edge
    hw = int(round(half_width * sample_rate))
    gates: list[tuple[int, int]] = []
    for i in loud:
        a, b = max(0, i - hw), min(n, i + hw + 1)
        if gates and a <= gates[-1][1]:
            gates[-1] = (gates[-1][0], max(gates[-1][1], b))
        else:
            gates.append((a, b))
    return gates


def apply_gates(strain, sample_rate, gates, taper=0.125):
    """Multiply ``strain`` by an inverse Tukey window over each gate.

    The window is 0 inside each ``[start, stop)`` interval and rises to 1 over
    ``taper`` seconds on each side with a half-cosine (Hann) taper.

    Returns
    -------
    ndarray
        A gated copy of ``strain``.
    """
    out = np.array(strain, dtype=np.float64, copy=True)
    n = out.shape[0]
    nt = int(round(taper * sample_rate))
    ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(1, nt + 1) / (nt + 1))  # rising from ~0 to ~1
    for a, b in gates:
        out[a:b] = 0.0
        lo = np.arange(a - nt, a)
        ok = lo >= 0
        out[lo[ok]] *= ramp[::-1][ok]
        hi = np.arange(b, b + nt)
        ok = hi < n
        out[hi[ok]] *= ramp[ok]
    return out
