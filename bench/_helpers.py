"""Helpers of the benchmark suite: bare inverse FFTs (the yardsticks of every group)
and subsets of banks for the slow reference path."""

import numpy as np

#: Transforms per call of the compiled yardstick (amortises its per-call set-up).
RUST_REPEATS = 10


def rust_ifft(n):
    """``(callable, transforms per call)`` timing rustfft's complex64 inverse FFT."""
    from chirpsift._timing import inverse_fft_seconds

    inverse_fft_seconds(n, repeats=1)
    return (lambda: inverse_fft_seconds(n, repeats=RUST_REPEATS)), RUST_REPEATS


def self_timed(fn, seconds):
    """Wrap ``fn`` (returning seconds per transform) to collect its own timings."""

    def call():
        seconds.append(float(fn()))

    return call


def scipy_ifft(n):
    """``(callable, 1)``: scipy's pocketfft complex64 inverse FFT on one worker."""
    import scipy.fft

    rng = np.random.default_rng(0)
    z = (rng.standard_normal(n) + 1j * rng.standard_normal(n)).astype(np.complex64)
    return (lambda: scipy.fft.ifft(z, workers=1, overwrite_x=True)), 1


def fftw_ifft(n):
    """``(callable, 1)`` for FFTW's complex64 inverse FFT (one thread), or ``None``
    when ``pyfftw`` is not importable."""
    try:
        import pyfftw
    except ImportError:
        return None
    a = pyfftw.empty_aligned(n, dtype="complex64")
    a[:] = 0
    plan = pyfftw.builders.ifft(a, threads=1, planner_effort="FFTW_MEASURE", overwrite_input=True)
    return (lambda: plan()), 1


def reference_subset(bank, k=None):
    """An evenly spread subset of a bank for the slow reference path."""
    k = max(2, len(bank) // 8) if k is None else k
    k = min(k, len(bank))
    return bank[np.linspace(0, len(bank) - 1, k).round().astype(int)]
