"""Conditioning of strain before the search: checks, and which samples can be analysed.

Data that cannot be filtered (NaN or infinite samples today; file gaps and vetoes
later) are described as half-open sample intervals ``[start, stop)``. The search
analyses the *stretches* between them separately, so one bad run costs only its own
neighbourhood, never the whole input. Interval lists here are always sorted,
non-overlapping and half-open.
"""

from __future__ import annotations

import numpy as np

from ._validate import integer, real_array

__all__ = ["check_strain", "find_nonfinite_runs", "stretches_between", "finite_stretches", "subtract_intervals",
           "merge_intervals"]


def check_strain(strain, name: str = "strain") -> np.ndarray:
    """Strain as a float64 1-D array; non-finite samples are kept (they are located later).

    Parameters
    ----------
    strain : array_like, shape (n,)
        Real strain samples (dimensionless).
    name : str, optional
        Argument name used in error messages.

    Returns
    -------
    ndarray of float64, shape (n,)

    Raises
    ------
    ValueError
        If the array is not 1-D, is empty, has no finite sample, or its finite samples
        are all zero (there is no noise to estimate a PSD from).
    TypeError
        If the samples are not real numbers.

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift.condition import check_strain
    >>> check_strain([1e-21, np.nan, -2e-21]).dtype
    dtype('float64')
    """
    x = real_array(name, strain, ndim=1, finite=False)
    finite = np.isfinite(x)
    if not finite.any():
        raise ValueError(f"{name} has no finite samples (all {x.shape[0]} are NaN or infinite)")
    if not np.any(finite & (x != 0)):  # no copy of the finite samples
        raise ValueError(f"{name} is identically zero: there is no noise to estimate a PSD from")
    return x


def find_nonfinite_runs(data) -> list[tuple[int, int]]:
    """Index ranges of consecutive non-finite (NaN or infinite) samples.

    Parameters
    ----------
    data : array_like
        1-D real samples.

    Returns
    -------
    list of (int, int)
        ``(start, stop)`` pairs, half-open (``data[start:stop]`` is the run), in
        increasing order; empty if every sample is finite.

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift.condition import find_nonfinite_runs
    >>> find_nonfinite_runs(np.array([0.0, np.nan, np.nan, 1.0, np.inf]))
    [(1, 3), (4, 5)]
    """
    arr = np.asarray(data)
    if arr.ndim != 1:
        raise ValueError(f"data must be 1-D, got an array of shape {arr.shape}")
    if arr.dtype.kind not in "biufc":
        raise TypeError(f"data must be numeric, got dtype {arr.dtype}")
    bad = ~np.isfinite(arr)
    if not bad.any():
        return []
    edges = np.diff(np.concatenate(([False], bad, [False])).astype(np.int8))
    starts = np.flatnonzero(edges == 1)
    stops = np.flatnonzero(edges == -1)
    return [(int(a), int(b)) for a, b in zip(starts, stops)]


def stretches_between(n_samples: int, excluded) -> list[tuple[int, int]]:
    """The stretches of ``[0, n_samples)`` left between excluded intervals.

    This is the one rule by which unusable data split an input: non-finite runs today,
    gaps between files and vetoed times use it the same way.

    Parameters
    ----------
    n_samples : int
        Length of the data.
    excluded : iterable of (int, int)
        Half-open sample intervals to leave out, sorted and non-overlapping, each
        within ``[0, n_samples]``.

    Returns
    -------
    list of (int, int)
        Half-open, non-empty stretches in increasing order.

    Examples
    --------
    >>> from chirpsift.condition import stretches_between
    >>> stretches_between(10, [(0, 2), (5, 6)])
    [(2, 5), (6, 10)]
    """
    n = integer("n_samples", n_samples, minimum=0)
    out = []
    cursor = 0
    for a, b in excluded:
        a, b = int(a), int(b)
        if not (cursor <= a <= b <= n):
            raise ValueError(f"excluded intervals must be sorted, disjoint and within [0, {n}], got ({a}, {b})")
        if a > cursor:
            out.append((cursor, a))
        cursor = b
    if cursor < n:
        out.append((cursor, n))
    return out


def finite_stretches(data) -> list[tuple[int, int]]:
    """Half-open index ranges of the runs of finite samples of ``data``.

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift.condition import finite_stretches
    >>> finite_stretches(np.array([0.0, np.nan, 1.0, 2.0, np.inf]))
    [(0, 1), (2, 4)]
    """
    arr = np.asarray(data)
    return stretches_between(arr.shape[0] if arr.ndim == 1 else 0, find_nonfinite_runs(arr))


def merge_intervals(intervals) -> list:
    """Join half-open intervals, given in order of their starts, that overlap or touch.

    The one rule by which pieces found apart become one list: non-finite runs of
    abutting chunks or blocks, excluded intervals of several kinds, the gates of
    consecutive whitening blocks.

    Examples
    --------
    >>> from chirpsift.condition import merge_intervals
    >>> merge_intervals([(0, 5), (5, 9), (8, 10), (12, 14)])
    [(0, 10), (12, 14)]
    """
    out: list = []
    for a, b in intervals:
        if out and a <= out[-1][1]:
            out[-1] = (out[-1][0], max(out[-1][1], b))
        else:
            out.append((a, b))
    return out


def subtract_intervals(intervals, removed) -> list[tuple[float, float]]:
    """``intervals`` minus ``removed``: what is left of each half-open interval.

    Parameters
    ----------
    intervals, removed : iterable of (float, float)
        Half-open intervals, each list sorted and non-overlapping (samples or seconds).

    Returns
    -------
    list of (float, float)
        Sorted, non-empty pieces.

    Examples
    --------
    >>> from chirpsift.condition import subtract_intervals
    >>> subtract_intervals([(0, 10), (20, 30)], [(5, 6), (9, 21)])
    [(0, 5), (6, 9), (21, 30)]
    """
    cuts = sorted((a, b) for a, b in removed if b > a)
    out = []
    for lo, hi in intervals:
        cur = lo
        for a, b in cuts:
            if b <= cur:
                continue
            if a >= hi:
                break
            if a > cur:
                out.append((cur, a))
            cur = max(cur, b)
            if cur >= hi:
                break
        if cur < hi:
            out.append((cur, hi))
    return out
