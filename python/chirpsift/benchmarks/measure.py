"""Timing helpers and the table row type of the benchmarks.

Every timing is the best (smallest) wall time of a few runs, the least disturbed one;
the yardsticks come from the core's timing probes, which time the bare operation
without Python in the loop.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from ..bank import Bank
from .workloads import Workload

__all__ = ["Measurement", "best_time", "yardstick", "generation_seconds", "ratio"]


@dataclass
class Measurement:
    """One row of the benchmark table.

    Attributes
    ----------
    key : str
        Stable descriptive identifier, e.g. ``"w1_fused_per_ifft"`` (unique in a run).
    name : str
        What was measured.
    value : float, str or None
        The result (``None`` if not measured).
    unit : str
        Unit or ``"x"`` for ratios.
    target : str
        Human-readable target, ``""`` if informational.
    met : bool or None
        Whether the target is met (``None``: no target or not measured).
    note : str
        A caution printed under the table (``""`` for none).
    """

    key: str
    name: str
    value: object
    unit: str = ""
    target: str = ""
    met: bool | None = None
    note: str = ""

    def as_dict(self) -> dict:
        """JSON-ready form."""
        return {"key": self.key, "name": self.name, "value": self.value, "unit": self.unit,
                "target": self.target, "met": self.met, "note": self.note}


def ratio(x: float) -> float:
    """Round a ratio to four significant digits (the table's precision)."""
    return float(f"{x:.4g}")


def best_time(fn, repeats: int) -> float:
    """Smallest wall time (s) of ``repeats`` calls of ``fn`` (the least disturbed run)."""
    best = math.inf
    for _ in range(max(1, int(repeats))):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


def _inverse_fft_probe(n: int, repeats: int) -> float:
    """Seconds per complex64 inverse FFT of length ``n`` (rustfft, planned once, one thread)."""
    from .._timing import inverse_fft_seconds

    return inverse_fft_seconds(int(n), repeats=int(repeats))


def _generation_probe(bank: Bank, f_low: float, df: float, n_freq: int, repeats: int) -> float:
    """Seconds per template to generate ``bank`` into one reused buffer, as the fused kernel does."""
    from .._timing import generation_seconds

    return generation_seconds(bank.m1, bank.m2, f_low=f_low, df=df, n_freq=n_freq, repeats=int(repeats))


def yardstick(n: int, repeats: int = 20) -> tuple[float, str]:
    """Seconds per complex64 inverse FFT of length ``n`` on one thread.

    Parameters
    ----------
    n : int
        Transform length.
    repeats : int, optional
        Transforms timed per sample; the best of three samples is returned.

    Returns
    -------
    seconds : float
    label : str
        ``"rustfft"``: the core's transform, planned once, in place with scratch.
    """
    _inverse_fft_probe(n, 1)  # plan and warm up
    return min(_inverse_fft_probe(n, repeats) for _ in range(3)), "rustfft"


def generation_seconds(w: Workload, repeats: int) -> float:
    """Best seconds per template to generate ``w``'s bank alone (one thread, no Python)."""
    return min(_generation_probe(w.bank, w.f_low, w.df, w.n_freq, 1) for _ in range(max(1, repeats)))


def fused_bank(w: Workload, bank: Bank, *, repeats: int):
    """Best time (s) of one :func:`chirpsift.filter_segment` call over ``bank``, and its result."""
    from ..fused import filter_segment

    d, psd = w.segment()
    kw = w.filter_kwargs()
    out = {}

    def once():
        out["result"] = filter_segment(d, psd, w.df, bank.m1, bank.m2, bank.chi1, bank.chi2, **kw)

    return best_time(once, repeats), out["result"]


def reference_bank(w: Workload, bank: Bank, *, repeats: int) -> float:
    """Best time (s) of the numpy reference of the fused kernel over ``bank``."""
    from ..reference import filter_segment as ref_filter_segment

    d, psd = w.segment()
    kw = w.filter_kwargs()
    return best_time(lambda: ref_filter_segment(d, psd, w.df, bank.m1, bank.m2, bank.chi1, bank.chi2, **kw), repeats)


def taylorf2_bank(w: Workload, bank: Bank, *, repeats: int, chunk: int = 1) -> float:
    """Best time (s) to generate every template of ``bank`` with :func:`chirpsift.taylorf2`.

    One template per call by default: its 4 MiB output is then recycled by the
    allocator, whereas batches of 32 MiB or more get fresh pages from the system on
    every call and the timing measures page faults rather than generation.
    """
    from ..waveform import taylorf2

    def once():
        for i in range(0, len(bank), chunk):
            taylorf2(bank.m1[i:i + chunk], bank.m2[i:i + chunk], f_low=w.f_low, df=w.df, n_freq=w.n_freq)

    return best_time(once, repeats)


def warm_up(w: Workload) -> None:
    """Plan transforms and fault in pages before anything is timed."""
    from ..fused import filter_segment
    from ..waveform import taylorf2

    d, psd = w.segment()
    b = w.bank[:1]
    filter_segment(d, psd, w.df, b.m1, b.m2, **w.filter_kwargs())
    taylorf2(b.m1, b.m2, f_low=w.f_low, df=w.df, n_freq=w.n_freq)


def cpu_ticks():
    """``(steal, total)`` jiffies of all CPUs from ``/proc/stat``, or ``None``."""
    try:
        with open("/proc/stat", encoding="ascii") as fh:
            fields = [int(v) for v in fh.readline().split()[1:]]
    except (OSError, ValueError):
        return None
    return (fields[7] if len(fields) > 7 else 0), sum(fields[:8])


def same_output(a: dict, b: dict) -> bool:
    """Whether two fused-kernel results are bitwise identical, column by column."""
    if set(a) != set(b):
        return False
    for key in a:
        x, y = np.asarray(a[key]), np.asarray(b[key])
        if x.dtype != y.dtype or x.shape != y.shape or x.tobytes() != y.tobytes():
            return False
    return True
