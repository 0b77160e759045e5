"""The fused matched-filter kernel over one data segment (numpy API).

Templates are generated on the fly inside the kernel; only clustered, refined
peaks come back, so memory does not grow with the bank size.
"""

from __future__ import annotations

import numpy as np

from . import _core
from ._validate import broadcast, complex_array, integer, positive_scalar, psd_array, real_array
from .waveform import _masses, _phase_order, _spins

__all__ = ["filter_segment", "PEAK_COLUMNS"]

#: Columns returned by :func:`filter_segment` (shared names mean the same as in the trigger table).
PEAK_COLUMNS = ("template", "index", "position", "snr", "phase", "sigma", "chi2", "chi2_dof")


def _valid_range(valid, n):
    """``(start, stop)`` integers with ``1 <= start < stop <= n - 1``."""
    if valid is None:
        return 1, n - 1
    try:
        ndim = np.ndim(valid)
    except ValueError:  # ragged nesting
        ndim = -1
    if isinstance(valid, (str, bytes, dict)) or ndim != 1 or len(valid) != 2:
        raise TypeError(f"valid must be a pair of sample indices (start, stop), got {valid!r}")
    out = []
    for v in valid:
        if isinstance(v, (bool, np.bool_)) or not isinstance(v, (int, np.integer)):
            raise TypeError(f"valid must hold two integers, got {valid!r}")
        out.append(int(v))
    start, stop = out
    if not (1 <= start < stop <= n - 1):
        raise ValueError(f"valid must satisfy 1 <= start < stop <= {n - 1}, got ({start}, {stop})")
    return start, stop


def filter_segment(
    data_fd,
    psd,
    df,
    m1,
    m2,
    chi1=0.0,
    chi2=0.0,
    *,
    f_low,
    f_high=None,
    min_snr=5.5,
    cluster_samples=0,
    chi2_bands=16,
    valid=None,
    phase_order=7,
):
    """Filter one segment with TaylorF2 templates generated on the fly.

    Parameters
    ----------
    data_fd : array_like, complex, shape (n_freq,)
        Segment in the frequency domain, ``d~ = rfft(d) / sample_rate``.
    psd : array_like, shape (n_freq,)
        One-sided PSD (1/Hz) on the same grid, ``inf`` for excluded bins (usually the
        output of :func:`chirpsift.truncate_inverse_psd`).
    df : float
        Frequency spacing (Hz); the segment has ``N = 2 (n_freq - 1)`` samples.
    m1, m2, chi1, chi2 : array_like
        Template parameters (solar masses, aligned spins), broadcast to ``K``.
    f_low : float
        Lower frequency cutoff (Hz).
    f_high : float or array_like, optional
        Upper cutoffs (Hz, exclusive); default each template's ISCO frequency.
    min_snr : float, optional
        Samples with ``|z|`` at or above this are peak candidates.
    cluster_samples : int, optional
        A peak survives only if no louder peak of the same template lies within this
        many samples (ties go to the earlier one).
    chi2_bands : int, optional
        Number ``p`` of frequency bands of equal expected SNR^2 for Allen's chi-squared.
    valid : (int, int), optional
        Analysable samples ``[start, stop)``; default all but the first and last sample.
    phase_order : int, optional
        PN order of the phase (twice the PN order, 7 = 3.5PN).

    Returns
    -------
    dict of ndarray
        Columns :data:`PEAK_COLUMNS`, one entry per surviving peak, ordered by
        template and then time: ``template`` (index), ``index`` (peak sample),
        ``position`` (refined peak, fractional samples from the segment start),
        ``snr`` and ``phase`` (``|z|`` and ``arg z`` evaluated exactly at
        ``position``), ``sigma`` (norm of the template at 1 Mpc), ``chi2`` and
        ``chi2_dof`` (``2 p - 2``).

    Notes
    -----
    Peaks are local maxima of ``|z|`` (above the previous sample, at least the next).
    The refined position is the vertex of the parabola through ``|z|`` at the peak
    sample and its neighbours; SNR, phase and the chi-squared band sums are then
    evaluated directly at that fractional time from the frequency-domain product.
    Band ``l`` of the chi-squared holds bin ``k`` when
    ``floor(p C_k / sigma^2) = l`` with ``C_k`` the template norm accumulated below
    bin ``k``, and ``chi^2 = p sum_l |z_l - z/p|^2``.

    References
    ----------
    .. [1] B. Allen, "A chi^2 time-frequency discriminator for gravitational wave
       detection", Phys. Rev. D 71, 062001 (2005), gr-qc/0405045.
    .. [2] B. Allen et al., Phys. Rev. D 85, 122006 (2012), arXiv:gr-qc/0509116.
    """
    d = complex_array("data_fd", data_fd, ndim=1, dtype=np.complex128)
    if d.shape[0] < 3:
        raise ValueError(f"data_fd must have at least 3 frequency bins, got {d.shape[0]}")
    p = psd_array("psd", psd, ndim=1)
    if p.shape != d.shape:
        raise ValueError(f"psd must have {d.shape[0]} bins to match data_fd, got {p.shape[0]}")
    dfv = positive_scalar("df", df)
    a, b = _masses(m1, m2)
    c1, c2 = _spins(chi1, chi2)
    m1v, m2v, c1v, c2v = (
        np.ascontiguousarray(x.reshape(-1), dtype=np.float64) for x in broadcast(("m1", "m2", "chi1", "chi2"), (a, b, c1, c2))
    )
    fl = positive_scalar("f_low", f_low)
    n = 2 * (d.shape[0] - 1)
    nyquist = (d.shape[0] - 1) * dfv
    if fl >= nyquist:
        raise ValueError(f"f_low={fl} Hz must be below the Nyquist frequency {nyquist} Hz")
    if f_high is None:
        fh = _core.isco_frequency(np.ascontiguousarray(m1v + m2v))
    else:
        fh = real_array("f_high", f_high, ndim=range(0, 2))
        try:
            fh = np.ascontiguousarray(np.broadcast_to(fh, m1v.shape), dtype=np.float64)
        except ValueError:
            raise ValueError(f"f_high must be a scalar or hold one value per template ({m1v.shape[0]}), got shape {fh.shape}") from None
    if not np.all(fh > fl):
        raise ValueError(f"f_high must exceed f_low={fl} Hz for every template, got min {fh.min()} Hz")
    thr = positive_scalar("min_snr", min_snr)
    # A window longer than the segment clusters the whole segment, as n does.
    cl = min(integer("cluster_samples", cluster_samples, minimum=0), n)
    k_low = int(np.ceil(fl / dfv))
    bins = integer("chi2_bands", chi2_bands, minimum=2, maximum=max(2, d.shape[0] - k_low))
    start, stop = _valid_range(valid, n)
    if not np.isfinite(p[int(np.ceil(fl / dfv)):]).any():
        raise ValueError(f"psd is inf at every frequency above f_low={fl} Hz")
    return _core.search_segment(d, p, dfv, m1v, m2v, c1v, c2v, fh, _phase_order(phase_order), fl, thr, cl, bins, start, stop)
