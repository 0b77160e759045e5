"""Ranking statistics that combine SNR with the chi-squared signal-consistency test."""

from __future__ import annotations

import numpy as np

from ._validate import real_array

__all__ = ["reweighted_snr"]


def reweighted_snr(snr, chi2, dof):
    """Reweighted SNR of Babak et al. (2013).

    Parameters
    ----------
    snr : array_like
        Matched-filter SNR ``rho``.
    chi2 : array_like
        Allen's chi-squared value.
    dof : array_like
        Its degrees of freedom, ``2 p - 2`` for ``p`` bins.

    Returns
    -------
    ndarray
        ``rho`` where the reduced chi-squared ``chi_r^2 = chi2 / dof <= 1``, else
        ``rho [(1 + (chi_r^2)^3) / 2]^(-1/6)``: triggers whose power is distributed
        over frequency unlike the template's are down-weighted.

    References
    ----------
    .. [1] S. Babak et al., "Searching for gravitational waves from binary
       coalescence", Phys. Rev. D 87, 024033 (2013), arXiv:1208.3491.
    """
    rho = real_array("snr", snr, ndim=range(0, 8), allow_empty=True)
    chi = real_array("chi2", chi2, ndim=range(0, 8), allow_empty=True)
    nu = real_array("dof", dof, ndim=range(0, 8), allow_empty=True)
    for name, a, low in (("snr", rho, 0.0), ("chi2", chi, 0.0)):
        if np.any(a < low):
            raise ValueError(f"{name} must be non-negative, got {a.min()}")
    if np.any(nu <= 0):
        raise ValueError(f"dof must be positive, got {nu.min()}")
    try:
        rho, chi, nu = np.broadcast_arrays(rho, chi, nu)
    except ValueError as exc:
        raise ValueError(f"snr, chi2 and dof must broadcast together, got shapes {rho.shape}, {chi.shape}, {nu.shape}") from exc
    with np.errstate(over="ignore"):  # chi2 / dof beyond the float range is inf: the factor's limit, 0
        r2 = chi / nu
    # (chi_r^2)^3 overflows past 5.6e102; there the factor is (chi_r^2)^(-1/2) 2^(1/6) to
    # well within round-off, while below it the formula is evaluated as written
    huge = r2 > 1e100
    tame = np.where(huge, 1.0, r2)
    factor = np.where(r2 > 1.0, ((1.0 + tame**3) / 2.0) ** (-1.0 / 6.0), 1.0)
    factor = np.where(huge, 2.0 ** (1.0 / 6.0) / np.sqrt(np.where(huge, r2, 1.0)), factor)
    return rho * factor
