"""Ranking statistics that combine SNR with the chi-squared signal-consistency test."""

from __future__ import annotations

import numpy as np

__all__ = ["reweighted_snr"]


def reweighted_snr(snr, chisq, dof):
    """Reweighted SNR of Babak et al. (2013).

    Parameters
    ----------
    snr : array_like
        Matched-filter SNR ``rho``.
    chisq : array_like
        Allen's chi-squared value.
    dof : array_like
        Its degrees of freedom, ``2 p - 2`` for ``p`` bins.

    Returns
    -------
    ndarray
        ``rho`` where the reduced chi-squared ``chi_r^2 = chisq / dof <= 1``, else
        ``rho [(1 + (chi_r^2)^3) / 2]^(-1/6)``: triggers whose power is distributed
        over frequency unlike the template's are down-weighted.

    References
    ----------
    .. [1] S. Babak et al., "Searching for gravitational waves from binary
       coalescence", Phys. Rev. D 87, 024033 (2013), arXiv:1208.3491.
    """
    rho = np.asarray(snr, dtype=np.float64)
    r2 = np.asarray(chisq, dtype=np.float64) / np.asarray(dof, dtype=np.float64)
    factor = np.where(r2 > 1.0, ((1.0 + r2**3) / 2.0) ** (-1.0 / 6.0), 1.0)
    return rho * factor
