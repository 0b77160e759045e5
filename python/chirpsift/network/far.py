"""False-alarm rates of zero-lag candidates from a time-slide background."""

from __future__ import annotations

import numpy as np

__all__ = ["YEAR", "false_alarm_rate"]

#: Seconds in a Julian year (365.25 days), the unit of ``far`` (per year) and ``ifar`` (years).
YEAR = 365.25 * 86400.0


def false_alarm_rate(statistic, background_statistic, background_time: float):
    """False-alarm rate (per year) of each statistic value against a background.

    Parameters
    ----------
    statistic : array_like
        Network statistic of the zero-lag candidates.
    background_statistic : array_like
        Network statistic of every background coincidence (all slides).
    background_time : float
        Live time of the background in seconds: the sum over slides of the time analysed
        by all sites at once (> 0).

    Returns
    -------
    far : numpy.ndarray
        ``n_b / T_b`` per year, where ``n_b`` counts background coincidences with a
        statistic at least as large.
    bound : numpy.ndarray of bool
        True where ``n_b = 0``: ``far`` is then set to ``1 / T_b``, an upper bound (the
        background cannot measure a smaller rate), never 0.

    Notes
    -----
    Time slides estimate how often noise alone, independent between sites, makes a
    coincidence this loud. They assume the noise is stationary over the time used and
    independent between sites, and cannot measure rates below ``1 / T_b``. Zero-lag
    triggers stay in the background (a loud signal then inflates the background it is
    measured against, which errs on the safe side; Capano et al. 2017, arXiv:1708.06710).

    Examples
    --------
    >>> from chirpsift.network.far import false_alarm_rate, YEAR
    >>> far, bound = false_alarm_rate([5.0, 50.0], [4.0, 6.0, 7.0], background_time=YEAR)
    >>> far.tolist(), bound.tolist()
    ([2.0, 1.0], [False, True])
    """
    x = np.asarray(statistic, dtype=np.float64)
    bg = np.sort(np.asarray(background_statistic, dtype=np.float64).ravel())
    if not (np.isfinite(background_time) and background_time > 0):
        raise ValueError(f"background_time must be a positive number of seconds, got {background_time!r}")
    louder = bg.size - np.searchsorted(bg, x, side="left")
    years = background_time / YEAR
    bound = louder == 0
    far = np.where(bound, 1.0, louder) / years
    return far, bound
