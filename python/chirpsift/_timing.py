"""Timing probes for the benchmarks (numpy API over the core's ``timing`` module).

Not part of the search: these time a bare transform, the yardstick a kernel's cost
is divided by, and template generation alone as the fused kernel performs it. Each
probe runs on the calling thread only, whatever :func:`chirpsift.set_threads` says.
"""

from __future__ import annotations

from . import _core
from ._validate import integer, positive_scalar, switch
from .fused import prepare_bank

__all__ = ["inverse_fft_seconds", "generation_seconds"]


def inverse_fft_seconds(n, *, real=False, double=False, repeats=10):
    """Seconds per inverse FFT of length ``n``, planned once, buffers reused.

    Parameters
    ----------
    n : int
        Transform length (samples of the time series).
    real : bool, optional
        ``False``: unnormalised complex64 inverse transform in place (what
        :func:`chirpsift.snr_series` and :func:`chirpsift.filter_segment` perform).
        ``True``: float64 complex-to-real inverse transform (what the spectrum chain
        and :func:`chirpsift.correlate` perform), input refilled before each call.
    double : bool, optional
        With ``real=False``: complex128 instead of complex64 (what :func:`chirpsift.match`
        performs, on the pair's band-limited length).
    repeats : int, optional
        Transforms timed after one warm-up transform; the mean is returned.

    Returns
    -------
    float
        Seconds per transform.

    Examples
    --------
    >>> from chirpsift import _timing
    >>> _timing.inverse_fft_seconds(4096, repeats=3) > 0
    True
    """
    real, double = switch("real", real), switch("double", double)
    return float(_core.timing.transform_seconds(integer("n", n), real, integer("repeats", repeats), double))


def generation_seconds(m1, m2, *, f_low, df, n_freq, repeats=1):
    """Seconds per template to generate non-spinning TaylorF2 templates alone.

    Parameters
    ----------
    m1, m2 : float or array_like
        Component masses (solar masses), broadcast to ``K`` templates, each from
        ``f_low`` to its ISCO frequency.
    f_low : float
        Lower frequency cutoff (Hz).
    df : float
        Bin spacing (Hz).
    n_freq : int
        Bins of the grid.
    repeats : int, optional
        Passes over the bank timed; the mean per template is returned.

    Returns
    -------
    float
        Seconds per template, generating into one reused complex64 buffer as the
        fused kernel does (no output array, no validation).
    """
    bank = prepare_bank(m1, m2, f_low=f_low)
    return float(_core.timing.generation_seconds(bank._core, positive_scalar("df", df),
                                                 integer("n_freq", n_freq), integer("repeats", repeats)))
