"""Clustering of triggers in time: keep the loudest within a window."""

from __future__ import annotations

import numpy as np

from ._validate import nonnegative_scalar, real_array

__all__ = ["cluster_in_time"]


def cluster_in_time(times, values, window, groups=None):
    """Indices of triggers that have no louder trigger within ``window`` seconds.

    Parameters
    ----------
    times : array_like of float
        Trigger times (s).
    values : array_like of float
        Loudness used to rank (SNR or reweighted SNR).
    window : float
        Half-width of the clustering window (s).
    groups : array_like of int, optional
        Cluster only within equal group labels (e.g. per template).

    Returns
    -------
    ndarray of int
        Indices (into the inputs) of the survivors, in ascending time order per
        group. Equal values are resolved in favour of the earlier trigger.
    """
    t = real_array("times", times, ndim=1, allow_empty=True)
    v = real_array("values", values, ndim=1, allow_empty=True)
    if t.shape != v.shape:
        raise ValueError(f"times and values must have the same length, got {t.shape[0]} and {v.shape[0]}")
    window = nonnegative_scalar("window", window)
    if groups is None:
        g = np.zeros(t.shape, dtype=np.int64)
    else:
        try:
            g = np.asarray(groups)
        except ValueError:
            raise ValueError("groups must be a 1-D array of integer labels") from None
        if g.shape != t.shape or g.dtype.kind not in "iu":
            raise ValueError(f"groups must be integers of the same length as times, got {g.dtype} of shape {g.shape}")
        g = g.astype(np.int64)
    order = np.lexsort((t, g))
    ts, vs, gs = t[order], v[order], g[order]
    keep = np.ones(ts.shape[0], dtype=bool)
    # Sort key that separates groups by more than any window.
    span = (ts.max() - ts.min() + 4 * window + 1.0) if ts.size else 1.0
    key = gs * span + (ts - (ts.min() if ts.size else 0.0))
    lo = np.searchsorted(key, key - window, side="left")
    hi = np.searchsorted(key, key + window, side="right")
    for i in range(ts.shape[0]):
        if hi[i] - lo[i] <= 1:
            continue
        vv = vs[lo[i]:hi[i]]
        idx = np.arange(lo[i], hi[i])
        louder = (vv > vs[i]) | ((vv == vs[i]) & (idx < i))
        if louder.any():
            keep[i] = False
    return order[keep]
