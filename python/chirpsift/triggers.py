"""The trigger: one clustered, refined peak of one template's SNR, and the table that holds them.

This module owns the trigger table's columns. The fused kernel returns peaks with the same
column names (:data:`chirpsift.fused.PEAK_COLUMNS` shares ``template``, ``snr``, ``phase``,
``sigma``, ``chi2``, ``chi2_dof``); the search adds absolute time, reweighted SNR and the
template's parameters, and nothing is renamed on the way.
"""

from __future__ import annotations

import numpy as np

__all__ = ["TRIGGER_DTYPE", "TRIGGER_COLUMNS", "trigger_table"]

#: Fields of the trigger table returned by :func:`chirpsift.search`.
TRIGGER_DTYPE = np.dtype(
    [
        ("time", "f8"),  # absolute time of the refined SNR peak (the template's coalescence time), s
        ("template", "i4"),  # row of the bank
        ("snr", "f4"),  # |z| at the refined peak
        ("phase", "f4"),  # arg z at the refined peak, rad
        ("sigma", "f8"),  # template norm at 1 Mpc: effective distance = sigma / snr, Mpc
        ("chi2", "f4"),  # Allen's chi-squared
        ("chi2_dof", "i4"),  # its degrees of freedom, 2p - 2
        ("reweighted_snr", "f4"),  # Babak et al. 2013
        ("m1", "f8"),  # template component masses, solar masses
        ("m2", "f8"),
        ("spin1", "f8"),  # template aligned spins chi1, chi2 (named apart from the chi2 column)
        ("spin2", "f8"),
    ]
)

#: Column names of the trigger table, in order.
TRIGGER_COLUMNS: tuple[str, ...] = TRIGGER_DTYPE.names

#: Columns copied unchanged from the fused kernel's peaks.
_FROM_PEAKS = ("template", "snr", "phase", "sigma", "chi2", "chi2_dof")


def trigger_table(peaks: dict, time: np.ndarray, reweighted: np.ndarray, bank) -> np.ndarray:
    """Assemble the trigger table, sorted by time (stable).

    Parameters
    ----------
    peaks : dict of ndarray
        Columns of merged fused-kernel peaks (at least ``template``, ``snr``, ``phase``,
        ``sigma``, ``chi2``, ``chi2_dof``), one entry per trigger.
    time : ndarray
        Absolute time of each trigger, s.
    reweighted : ndarray
        Reweighted SNR of each trigger.
    bank : chirpsift.Bank
        The bank the ``template`` column indexes.

    Returns
    -------
    ndarray of :data:`TRIGGER_DTYPE`
    """
    order = np.argsort(time, kind="stable")
    out = np.zeros(order.size, dtype=TRIGGER_DTYPE)
    out["time"] = time[order]
    for name in _FROM_PEAKS:
        out[name] = peaks[name][order]
    out["reweighted_snr"] = reweighted[order]
    tid = out["template"]
    out["m1"], out["m2"], out["spin1"], out["spin2"] = bank.m1[tid], bank.m2[tid], bank.chi1[tid], bank.chi2[tid]
    return out
