"""Overlap-save segmentation: how long segments are, how much of each is discarded,
and which samples of each are analysable, so that every sample of the analysable span
is filtered exactly once.

The rules, in seconds (``T``: longest template duration from ``f_low``; ``T_spec``:
``welch_duration``, the length of the truncated inverse-PSD filter; ``fs``: sample rate):

- pads (:func:`padding`): the first ``ceil((1.1 T + T_spec / 2) fs) + 1`` and the last
  ``ceil(T_spec / 2 fs) + 1`` samples of each segment's filter output are corrupted by
  the circular correlation and discarded;
- default length (:func:`default_length`): the smallest power of two of samples that is
  at least ``4 (1.1 T + T_spec)`` seconds (so at most about a quarter of each segment is
  discarded) and at least ``64 T_spec`` (so a PSD estimated from the segment averages
  about 127 half-overlapping Welch segments), capped by the data length.
"""

from __future__ import annotations

import math
from typing import NamedTuple

from ._validate import nonnegative_scalar, integer, positive_scalar

__all__ = ["SegmentPlan", "plan_segments", "padding", "default_length", "DURATION_MARGIN",
           "PAD_FRACTION_DIVISOR", "MIN_WELCH_LENGTHS"]

#: Safety factor on the 3.5PN non-spinning chirp duration (TaylorT2) when sizing the
#: corrupted start of each segment: aligned spins change durations by a few per cent.
DURATION_MARGIN = 1.1

#: ``K``: a default segment is at least ``K`` times its pads, so at most ``1 / K`` of
#: it is discarded.
PAD_FRACTION_DIVISOR = 4

#: A default segment holds at least this many Welch lengths (``welch_duration``).
MIN_WELCH_LENGTHS = 64


def padding(max_duration, welch_duration, sample_rate) -> tuple[int, int]:
    """Samples discarded at the start and end of each segment's filter output.

    With the template's coalescence at index 0 of the circular correlation, the output
    at sample ``j`` uses data from ``j - T`` to ``j + T_spec / 2`` (the whitening filter
    spreads by ``T_spec / 2`` each way), so the first ``T + T_spec / 2`` and the last
    ``T_spec / 2`` seconds wrap round. The template duration carries the safety factor
    :data:`DURATION_MARGIN`; one more sample on each side leaves room for the peak's
    neighbours used to refine its time.

    Parameters
    ----------
    max_duration : float
        Longest template duration from ``f_low`` (s), as :func:`chirpsift.chirp_duration`
        gives it (without margin).
    welch_duration : float
        Length of the truncated inverse-PSD filter, ``T_spec`` (s).
    sample_rate : float
        Hz.

    Returns
    -------
    pad_start, pad_end : int
        ``ceil((DURATION_MARGIN T + T_spec / 2) fs) + 1`` and ``ceil(T_spec / 2 fs) + 1``.

    References
    ----------
    .. [1] B. Allen et al., Phys. Rev. D 85, 122006 (2012), arXiv:gr-qc/0509116
       (overlap-save segments and inverse spectrum truncation).

    Examples
    --------
    >>> from chirpsift.segments import padding
    >>> padding(10.0, 4.0, 1024.0)
    (13313, 2049)
    """
    t = nonnegative_scalar("max_duration", max_duration)
    t_spec = positive_scalar("welch_duration", welch_duration)
    fs = positive_scalar("sample_rate", sample_rate)
    pad_start = math.ceil((DURATION_MARGIN * t + t_spec / 2) * fs) + 1
    pad_end = math.ceil(t_spec / 2 * fs) + 1
    return pad_start, pad_end


def default_length(max_duration, welch_duration, sample_rate, n_samples=None) -> int:
    """Segment length (samples) used when the search is not given one.

    The smallest power of two that is at least ``K (DURATION_MARGIN T + T_spec) fs``
    (``K =`` :data:`PAD_FRACTION_DIVISOR`, so the pads of :func:`padding` take at most
    about ``1 / K`` of a segment) and at least ``MIN_WELCH_LENGTHS T_spec fs`` (enough
    Welch averages for a PSD estimated from the segment), then capped by ``n_samples``
    (rounded down to even): data shorter than that are searched as one segment.

    Parameters
    ----------
    max_duration : float
        Longest template duration from ``f_low`` (s), without margin.
    welch_duration : float
        ``T_spec`` (s).
    sample_rate : float
        Hz.
    n_samples : int, optional
        Length of the data to be segmented.

    Returns
    -------
    int
        Even number of samples. It may leave nothing to analyse when capped by short
        data; :func:`plan_segments` then refuses it.

    Examples
    --------
    >>> from chirpsift.segments import default_length
    >>> default_length(10.0, 4.0, 1024.0) / 1024.0  # 64 Welch lengths: 256 s
    256.0
    >>> default_length(300.0, 4.0, 1024.0) / 1024.0  # 4 (1.1 x 300 + 4) = 1336 s
    2048.0
    >>> default_length(300.0, 4.0, 1024.0, n_samples=600 * 1024) / 1024.0
    600.0
    """
    t = nonnegative_scalar("max_duration", max_duration)
    t_spec = positive_scalar("welch_duration", welch_duration)
    fs = positive_scalar("sample_rate", sample_rate)
    need = max(PAD_FRACTION_DIVISOR * (DURATION_MARGIN * t + t_spec), MIN_WELCH_LENGTHS * t_spec) * fs
    length = 1 << max(1, math.ceil(need) - 1).bit_length()
    if n_samples is not None:
        length = min(length, integer("n_samples", n_samples) // 2 * 2)
    return length


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
    n_samples = integer("n_samples", n_samples)
    length = integer("length", length)
    pad_start = integer("pad_start", pad_start, minimum=0)
    pad_end = integer("pad_end", pad_end, minimum=0)
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
