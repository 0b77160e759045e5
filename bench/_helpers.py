"""Helpers of the benchmark suite: bare transforms (the yardsticks of every group)
and subsets of banks for the slow reference path."""

import numpy as np

#: Transforms per call of the compiled yardstick (amortises its per-call set-up).
RUST_REPEATS = 10


def fast_length(n):
    """Smallest ``2^a 3^b >= n``: the transform length :func:`chirpsift.correlate` uses."""
    best = 1 << max(0, int(n - 1).bit_length())
    p3 = 1
    while p3 < best:
        m = p3
        while m < n:
            m *= 2
        best = min(best, m)
        p3 *= 3
    return best


def rust_transform(n, real):
    """``(callable, transforms per call)`` timing the core's transform through the
    numpy API (:mod:`chirpsift._timing`): complex64 inverse, or float64 real inverse."""
    from chirpsift._timing import inverse_fft_seconds

    inverse_fft_seconds(n, real=real, repeats=1)
    return (lambda: inverse_fft_seconds(n, real=real, repeats=RUST_REPEATS)), RUST_REPEATS


def self_timed(fn, seconds):
    """Wrap ``fn`` (returning seconds per transform) to collect its own timings."""

    def call():
        seconds.append(float(fn()))

    return call


def scipy_transform(n, real):
    """``(callable, 1)``: scipy's pocketfft inverse transform on one worker."""
    import scipy.fft

    rng = np.random.default_rng(0)
    if real:
        z = rng.standard_normal(n // 2 + 1) + 1j * rng.standard_normal(n // 2 + 1)
        return (lambda: scipy.fft.irfft(z, n, workers=1)), 1
    z = (rng.standard_normal(n) + 1j * rng.standard_normal(n)).astype(np.complex64)
    return (lambda: scipy.fft.ifft(z, workers=1, overwrite_x=True)), 1


def fftw_transform(n, real):
    """``(callable, 1)`` for FFTW's inverse transform (one thread), or ``None`` when
    ``pyfftw`` is not importable."""
    try:
        import pyfftw
    except ImportError:
        return None
    if real:
        a = pyfftw.empty_aligned(n // 2 + 1, dtype="complex128")
        a[:] = 0
        plan = pyfftw.builders.irfft(a, n, threads=1, planner_effort="FFTW_MEASURE")
    else:
        a = pyfftw.empty_aligned(n, dtype="complex64")
        a[:] = 0
        plan = pyfftw.builders.ifft(a, threads=1, planner_effort="FFTW_MEASURE", overwrite_input=True)
    return (lambda: plan()), 1


def reference_subset(bank, k=None):
    """An evenly spread subset of a bank for the slow reference path."""
    k = max(2, len(bank) // 8) if k is None else k
    k = min(k, len(bank))
    return bank[np.linspace(0, len(bank) - 1, k).round().astype(int)]
