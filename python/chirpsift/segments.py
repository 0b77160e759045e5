"""Overlap-save segmentation: which samples of each segment are analysable, so
that every sample of the analysable span is filtered exactly once."""

from __future__ import annotations

from typing import NamedTuple

from ._validate import positive_int

__all__ = ["SegmentPlan", "plan_segments"]


class SegmentPlan(NamedTuple):
    """One segment: data ``[start, start + length)``, analysable ``[valid_start, valid_stop)``
    in samples relative to ``start``."""

    start: int
    length: int
    valid_start: int
    valid_stop: int


def plan_segments(n_samples: int, length: int, pad_start: int, pad_end: int) -> list[SegmentPlan]:
    """Cover ``[pad_start, n_samples - pad_end)`` with segments of ``length`` samples.

    Parameters
    ----------
    n_samples : int
        Length of the data.
    length : int
        Segment length in samples.
    pad_start, pad_end : int
        Samples at the start and end of every segment whose filter output is
        corrupted by wrap-around (template duration plus half the whitening filter
        at the start; half the whitening filter at the end).

    Returns
    -------
    list of SegmentPlan
        Segments advance by ``length - pad_start - pad_end``; the last one is
        aligned with the end of the data and analyses only what the others left, so
        the analysable parts tile the span without gaps or overlaps.
    """
    n_samples = positive_int("n_samples", n_samples)
    length = positive_int("length", length)
    pad_start = positive_int("pad_start", pad_start, minimum=0)
    pad_end = positive_int("pad_end", pad_end, minimum=0)
    stride = length - pad_start - pad_end
    if stride < 1:
        raise ValueError(
            f"length={length} leaves nothing to analyse after discarding pad_start={pad_start} + pad_end={pad_end} samples"
        )
    if n_samples < length:
        raise ValueError(f"n_samples={n_samples} is shorter than one segment of length={length}")
    plans = []
    start = 0
    covered = pad_start
    end = n_samples - pad_end
    while start + length <= n_samples and covered < end:
        stop = min(start + pad_start + stride, end)
        plans.append(SegmentPlan(start, length, covered - start, stop - start))
        covered = stop
        start += stride
    if covered < end:
        start = n_samples - length
        plans.append(SegmentPlan(start, length, covered - start, end - start))
    return plans
