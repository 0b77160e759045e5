"""Standard benchmark workloads and the ``chirpsift bench`` table.

Every speed figure is a ratio between two timings taken in the same run on the same
machine (absolute seconds are noise on shared machines): the fused search against a
bare inverse FFT of the same length, against the numpy reference, and ``n`` threads
against one. The only absolute numbers reported are the yardstick itself, the
throughput and the peak memory of the W3 search.

Workloads
---------
``W1``
    One 256 s segment at 4096 Hz (``N = 2**20``), ``f_low = 20`` Hz, Gaussian noise
    coloured by the ``"gen2-zero-detuned"`` design curve, and 256 non-spinning
    templates with component masses in 1.2-2.0 Msun (uniform in chirp mass).
``W2``
    The same data with 256 templates spanning total mass 2-40 Msun (uniform in
    ``log M``, components of at least 1 Msun).
``W3``
    2,048 s of the same kind of noise searched with :func:`chirpsift.search` (256 s
    segments) and 10,000 templates of total mass 10-40 Msun (components of at least
    3 Msun, so that each segment keeps most of its samples); the peak resident memory
    of a search with 100 templates is compared with that of the full bank.

Each workload takes a ``scale``: template counts are multiplied by it (with a small
floor); below :data:`FULL_DATA_SCALE` the data are shortened too (to powers of two), which
is only meant for smoke tests.

Examples
--------
>>> from chirpsift import benchmarks
>>> w = benchmarks.workload("W1", scale=1 / 16)
>>> len(w.bank), w.n
(16, 1048576)
"""

from __future__ import annotations

import argparse
import datetime as _dt
import json
import math
import os
import platform
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

__all__ = [
    "QUICK_SCALE",
    "FULL_DATA_SCALE",
    "WORKLOADS",
    "Workload",
    "Measurement",
    "workload",
    "component_mass_bank",
    "total_mass_bank",
    "yardstick",
    "run",
    "format_table",
    "main",
]

#: Scale used by ``--quick`` (a quarter of the templates, the full data lengths).
QUICK_SCALE = 1.0 / 4.0

#: Below this scale the data are shortened as well (smoke tests only).
FULL_DATA_SCALE = 1.0 / 16.0

#: Names of the standard workloads.
WORKLOADS = ("W1", "W2", "W3")

_CURVE = "gen2-zero-detuned"
_SAMPLE_RATE = 4096.0
_F_LOW = 20.0
_PSD_SEGMENT = 4.0  # Welch segment and inverse-PSD truncation length (s)
_CLUSTER_WINDOW = 1.0  # s, as the search's default
_SNR_THRESHOLD = 5.5
_CHISQ_BINS = 16
_SEED = {"W1": 20260101, "W2": 20260101, "W3": 20260303}
_FULL = {  # templates, data duration (s), segment duration (s)
    "W1": (256, 256.0, 256.0),
    "W2": (256, 256.0, 256.0),
    "W3": (10_000, 2048.0, 256.0),
}
_MIN_TEMPLATES = {"W1": 4, "W2": 4, "W3": 8}
_MIN_DURATION = {"W1": 8.0, "W2": 8.0, "W3": 64.0}
_W3_SMALL = 100
_GOLDEN = (math.sqrt(5.0) - 1.0) / 2.0


# ---------------------------------------------------------------------------
# banks
# ---------------------------------------------------------------------------
def _chirp_mass(m1, m2):
    m1 = np.asarray(m1, dtype=np.float64)
    m2 = np.asarray(m2, dtype=np.float64)
    return (m1 * m2) ** 0.6 / (m1 + m2) ** 0.2


def _weyl(k: int) -> np.ndarray:
    """``k`` points of the golden-ratio (Weyl) sequence in ``[0, 1)``, deterministic."""
    return np.mod((np.arange(k) + 0.5) * _GOLDEN, 1.0)


def component_mass_bank(k: int, m_min: float, m_max: float):
    """A non-spinning bank of ``k`` templates with both components in ``[m_min, m_max]``.

    Parameters
    ----------
    k : int
        Number of templates (>= 1).
    m_min, m_max : float
        Component mass range, solar masses (``0 < m_min <= m_max``).

    Returns
    -------
    chirpsift.Bank
        ``m1 >= m2``, chirp masses uniformly spaced from ``Mc(m_min, m_min)`` to
        ``Mc(m_max, m_max)``; at each chirp mass the mass ratio is placed inside its
        allowed interval by the golden-ratio sequence, so the bank is deterministic.

    Notes
    -----
    A benchmark bank, not a covering one: spacing is not chosen from a match metric.
    For a chirp mass ``Mc`` and ratio ``q = m2 / m1 <= 1``,
    ``m1 = Mc (1 + q)^(1/5) q^(-3/5)`` decreases and ``m2 = q m1`` increases with
    ``q``, so the constraints ``m1 <= m_max`` and ``m2 >= m_min`` give
    ``q in [q_lo(Mc), 1]``; ``q_lo`` is found by bisection.
    """
    from .bank import Bank

    k = int(k)
    if k < 1:
        raise ValueError(f"k must be at least 1, got {k}")
    lo, hi = float(m_min), float(m_max)
    if not (0 < lo <= hi and math.isfinite(hi)):
        raise ValueError(f"need 0 < m_min <= m_max, got {m_min!r}, {m_max!r}")
    mc = np.linspace(_chirp_mass(lo, lo), _chirp_mass(hi, hi), k)

    def m1_of(q):
        return mc * (1.0 + q) ** 0.2 * q ** -0.6

    # bisection in log q on [1e-6, 1] for the smallest q meeting both constraints
    a = np.full(k, math.log(1e-6))
    b = np.zeros(k)
    for _ in range(80):
        mid = 0.5 * (a + b)
        q = np.exp(mid)
        m1 = m1_of(q)
        ok = (m1 <= hi) & (q * m1 >= lo)
        b = np.where(ok, mid, b)
        a = np.where(ok, a, mid)
    q_lo = np.minimum(np.exp(b), 1.0)
    q = q_lo + _weyl(k) * (1.0 - q_lo)
    m1 = np.clip(m1_of(q), lo, hi)
    m2 = np.clip(q * m1_of(q), lo, hi)
    return Bank(np.maximum(m1, m2), np.minimum(m1, m2))


def total_mass_bank(k: int, mtotal_min: float, mtotal_max: float, m_min: float = 1.0):
    """A non-spinning bank of ``k`` templates spanning a total-mass range.

    Parameters
    ----------
    k : int
        Number of templates (>= 1).
    mtotal_min, mtotal_max : float
        Total mass range, solar masses; ``mtotal_min >= 2 m_min``.
    m_min : float, optional
        Smallest component mass (solar masses).

    Returns
    -------
    chirpsift.Bank
        Total masses uniformly spaced in ``log M``; the mass ratio at each is placed
        in ``[m_min / (M - m_min), 1]`` by the golden-ratio sequence; ``m1 >= m2``.
    """
    from .bank import Bank

    k = int(k)
    if k < 1:
        raise ValueError(f"k must be at least 1, got {k}")
    lo, hi, mm = float(mtotal_min), float(mtotal_max), float(m_min)
    if not (mm > 0 and 2 * mm <= lo <= hi and math.isfinite(hi)):
        raise ValueError(f"need 0 < 2 m_min <= mtotal_min <= mtotal_max, got {m_min!r}, {mtotal_min!r}, {mtotal_max!r}")
    mt = np.exp(np.linspace(math.log(lo), math.log(hi), k))
    q_lo = np.minimum(mm / (mt - mm), 1.0)
    q = q_lo + _weyl(k) * (1.0 - q_lo)
    m2 = np.maximum(mt * q / (1.0 + q), mm)
    m1 = mt - m2
    return Bank(np.maximum(m1, m2), np.minimum(m1, m2))


# ---------------------------------------------------------------------------
# workloads
# ---------------------------------------------------------------------------
@lru_cache(maxsize=4)
def _noise(n: int, sample_rate: float, seed: int, f_low: float) -> np.ndarray:
    from .synthetic import colored_gaussian_noise

    x = colored_gaussian_noise(n, sample_rate, _CURVE, seed=seed, f_low=f_low)
    x.setflags(write=False)
    return x


@dataclass
class Workload:
    """One standard workload: data, bank and filter settings.

    Attributes
    ----------
    name : str
        ``"W1"``, ``"W2"`` or ``"W3"``.
    scale : float
        The scale it was built with.
    bank : chirpsift.Bank
        The templates.
    sample_rate, duration, segment_duration, f_low : float
        Hz, s, s, Hz.
    seed : int
        Seed of the noise.
    description : str
        One line for tables.
    """

    name: str
    scale: float
    bank: object
    sample_rate: float
    duration: float
    segment_duration: float
    f_low: float
    seed: int
    description: str
    _cache: dict = field(default_factory=dict, repr=False, compare=False)

    @property
    def n(self) -> int:
        """Number of strain samples."""
        return int(round(self.duration * self.sample_rate))

    @property
    def segment_samples(self) -> int:
        """Samples per filtered segment (the inverse FFT length)."""
        return int(round(self.segment_duration * self.sample_rate))

    @property
    def df(self) -> float:
        """Frequency spacing of one segment (Hz)."""
        return 1.0 / self.segment_duration

    @property
    def n_freq(self) -> int:
        """Frequency bins of one segment."""
        return self.segment_samples // 2 + 1

    @property
    def cluster_samples(self) -> int:
        """Per-template clustering half-width in samples."""
        return int(round(_CLUSTER_WINDOW * self.sample_rate))

    def strain(self) -> np.ndarray:
        """The noise (read-only float64, deterministic for the workload's seed)."""
        return _noise(self.n, self.sample_rate, self.seed, self.f_low)

    def segment(self):
        """Frequency-domain data and truncated PSD of the first segment.

        Returns
        -------
        data_fd : ndarray, complex128
            ``rfft(segment) / sample_rate``.
        psd : ndarray, float64
            Welch median estimate from the segment, on its rfft grid, after inverse
            spectrum truncation (as :func:`chirpsift.search` does).
        """
        if "segment" not in self._cache:
            from .spectrum import psd_to_grid, truncate_inverse_psd, welch

            x = self.strain()[: self.segment_samples]
            fs = self.sample_rate
            freqs, est = welch(x, fs, _PSD_SEGMENT, average="median")
            psd = truncate_inverse_psd(psd_to_grid(freqs, est, self.df, self.n_freq), fs, _PSD_SEGMENT, self.f_low)
            self._cache["segment"] = (np.fft.rfft(x) / fs, psd)
        return self._cache["segment"]

    def valid(self) -> tuple[int, int]:
        """Analysable samples ``[start, stop)`` of one segment, as the search computes them.

        If the bank's longest template does not fit in the segment (only at smoke-test
        scales) the middle half of the segment is used; the timing is unaffected.
        """
        from .pipeline.single_site import DURATION_MARGIN
        from .waveform import chirp_duration

        n = self.segment_samples
        fs = self.sample_rate
        longest = float(np.max(chirp_duration(self.bank.m1, self.bank.m2, self.f_low))) * DURATION_MARGIN
        start = int(math.ceil((longest + _PSD_SEGMENT / 2) * fs)) + 1
        stop = n - int(math.ceil(_PSD_SEGMENT / 2 * fs)) - 1
        if not 1 <= start < stop <= n - 1:
            return n // 4, 3 * n // 4
        return start, stop

    def filter_kwargs(self) -> dict:
        """Keyword arguments of :func:`chirpsift.filter_segment` for this workload."""
        return {
            "f_low": self.f_low,
            "min_snr": _SNR_THRESHOLD,
            "cluster_samples": self.cluster_samples,
            "chi2_bands": _CHISQ_BINS,
            "valid": self.valid(),
        }


def _scaled(name: str, scale: float) -> tuple[int, float, float]:
    k_full, dur_full, seg_full = _FULL[name]
    k = max(_MIN_TEMPLATES[name], int(round(k_full * scale)))
    if scale >= FULL_DATA_SCALE:
        return k, dur_full, seg_full
    # smoke-test sizes: shorten the data by a power of two
    factor = 2.0 ** math.floor(math.log2(max(scale / FULL_DATA_SCALE, 1e-9)))
    dur = max(_MIN_DURATION[name], dur_full * factor)
    seg = min(seg_full, dur) if name != "W3" else min(seg_full, dur / 2)
    return k, dur, seg


def workload(name: str, scale: float = 1.0) -> Workload:
    """Build a standard workload.

    Parameters
    ----------
    name : {"W1", "W2", "W3"}
        Which workload.
    scale : float, optional
        Multiplies the template count (``scale=1``: 256, 256 and 10,000 templates);
        below :data:`FULL_DATA_SCALE` the data are shortened too.

    Returns
    -------
    Workload
    """
    key = str(name).upper()
    if key not in WORKLOADS:
        raise ValueError(f"unknown workload {name!r}; choose from {', '.join(WORKLOADS)}")
    s = float(scale)
    if not (math.isfinite(s) and s > 0):
        raise ValueError(f"scale must be a positive number, got {scale!r}")
    k, dur, seg = _scaled(key, s)
    if key == "W1":
        bank = component_mass_bank(k, 1.2, 2.0)
        desc = f"{k} templates, components 1.2-2.0 Msun"
    elif key == "W2":
        bank = total_mass_bank(k, 2.0, 40.0, m_min=1.0)
        desc = f"{k} templates, total mass 2-40 Msun"
    else:
        bank = total_mass_bank(k, 10.0, 40.0, m_min=3.0)
        desc = f"{k} templates, total mass 10-40 Msun"
    desc += f", {dur:g} s at {_SAMPLE_RATE:g} Hz, f_low {_F_LOW:g} Hz"
    return Workload(key, s, bank, _SAMPLE_RATE, dur, seg, _F_LOW, _SEED[key], desc)


# ---------------------------------------------------------------------------
# timing helpers
# ---------------------------------------------------------------------------
def _best(fn, repeats: int) -> float:
    """Smallest wall time of ``repeats`` calls (the least disturbed run)."""
    best = math.inf
    for _ in range(max(1, int(repeats))):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


def yardstick(n: int, repeats: int = 20) -> tuple[float, str]:
    """Seconds per complex64 inverse FFT of length ``n`` on one thread.

    Parameters
    ----------
    n : int
        Transform length.
    repeats : int, optional
        Transforms timed.

    Returns
    -------
    seconds : float
    label : str
        ``"rustfft"``: the core's transform, planned once, in place with scratch.
    """
    from . import _core

    _core.bench_inverse_fft(int(n), 1)  # plan and warm up
    return min(float(_core.bench_inverse_fft(int(n), int(repeats))) for _ in range(3)), "rustfft"


def _cpu_ticks():
    """``(steal, total)`` jiffies of all CPUs from ``/proc/stat``, or ``None``."""
    try:
        with open("/proc/stat", encoding="ascii") as fh:
            fields = [int(v) for v in fh.readline().split()[1:]]
    except (OSError, ValueError):
        return None
    return (fields[7] if len(fields) > 7 else 0), sum(fields[:8])


def _same_output(a: dict, b: dict) -> bool:
    if set(a) != set(b):
        return False
    for key in a:
        x, y = np.asarray(a[key]), np.asarray(b[key])
        if x.dtype != y.dtype or x.shape != y.shape or x.tobytes() != y.tobytes():
            return False
    return True


# ---------------------------------------------------------------------------
# measurements
# ---------------------------------------------------------------------------
@dataclass
class Measurement:
    """One row of the benchmark table.

    Attributes
    ----------
    key : str
        Short stable identifier (``"a"`` ... ``"g"`` plus a suffix).
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
    """

    key: str
    name: str
    value: object
    unit: str = ""
    target: str = ""
    met: bool | None = None

    def as_dict(self) -> dict:
        """JSON-ready form."""
        return {"key": self.key, "name": self.name, "value": self.value, "unit": self.unit,
                "target": self.target, "met": self.met}


def _fused_bank(w: Workload, bank, *, repeats: int):
    from .fused import filter_segment

    d, psd = w.segment()
    kw = w.filter_kwargs()
    out = {}

    def once():
        out["result"] = filter_segment(d, psd, w.df, bank.m1, bank.m2, bank.chi1, bank.chi2, **kw)

    return _best(once, repeats), out["result"]


def _reference_bank(w: Workload, bank, *, repeats: int):
    from .reference.segment import filter_segment as ref_filter_segment

    d, psd = w.segment()
    kw = w.filter_kwargs()
    return _best(lambda: ref_filter_segment(d, psd, w.df, bank.m1, bank.m2, bank.chi1, bank.chi2, **kw), repeats)


def _taylorf2_bank(w: Workload, bank, *, repeats: int, chunk: int = 1) -> float:
    """Best time to generate every template of ``bank`` with :func:`chirpsift.taylorf2`.

    One template per call by default: its 4 MiB output is then recycled by the
    allocator, whereas batches of 32 MiB or more get fresh pages from the system on
    every call and the timing measures page faults rather than generation.
    """
    from .waveform import taylorf2

    def once():
        for i in range(0, len(bank), chunk):
            taylorf2(bank.m1[i:i + chunk], bank.m2[i:i + chunk], f_low=w.f_low, df=w.df, n_freq=w.n_freq)

    return _best(once, repeats)


def _warm_up(w: Workload) -> None:
    """Plan transforms and fault in pages before anything is timed."""
    from .fused import filter_segment
    from .waveform import taylorf2

    d, psd = w.segment()
    b = w.bank[:1]
    filter_segment(d, psd, w.df, b.m1, b.m2, **w.filter_kwargs())
    taylorf2(b.m1, b.m2, f_low=w.f_low, df=w.df, n_freq=w.n_freq)


_W3_CHILD = r"""
import json, resource, sys, time
import numpy as np
import chirpsift
from chirpsift.bank import Bank
strain_path, bank_path, settings = sys.argv[1], sys.argv[2], json.loads(sys.argv[3])
x = np.load(strain_path)
bank = Bank.load(bank_path)
chirpsift.set_threads(settings.pop("threads"))
fs = settings.pop("sample_rate")
before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
t = time.perf_counter()
trig = chirpsift.search(x, fs, bank, **settings)
wall = time.perf_counter() - t
print(json.dumps({"wall": wall, "triggers": int(len(trig)), "maxrss_before": before,
                  "maxrss_self": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss}))
"""

# The launcher is a fresh child of the benchmark process: its RUSAGE_CHILDREN covers
# exactly one search worker, so one measurement cannot leak into the next.
_W3_LAUNCHER = r"""
import json, resource, subprocess, sys
r = subprocess.run(sys.argv[1:], capture_output=True, text=True)
if r.returncode:
    sys.stderr.write(r.stderr)
    sys.exit(r.returncode)
doc = json.loads(r.stdout.strip().splitlines()[-1])
doc["maxrss_children"] = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
print(json.dumps(doc))
"""


def _rss_unit() -> float:
    """Bytes per ``ru_maxrss`` unit (KiB on Linux, bytes on macOS)."""
    return 1.0 if sys.platform == "darwin" else 1024.0


def _w3_run(w: Workload, bank, threads: int, tmp: str, tag: str) -> dict:
    strain_path = os.path.join(tmp, "strain.npy")
    if not os.path.exists(strain_path):
        np.save(strain_path, w.strain())
    bank_path = os.path.join(tmp, f"bank-{tag}.npz")
    bank.save(bank_path)
    settings = {"threads": int(threads), "sample_rate": w.sample_rate, "f_low": w.f_low,
                "segment_duration": w.segment_duration, "welch_duration": _PSD_SEGMENT,
                "min_snr": _SNR_THRESHOLD, "peak_window": _CLUSTER_WINDOW, "chi2_bands": _CHISQ_BINS}
    cmd = [sys.executable, "-c", _W3_LAUNCHER, sys.executable, "-c", _W3_CHILD, strain_path, bank_path,
           json.dumps(settings)]
    r = subprocess.run(cmd, capture_output=True, text=True)
    if r.returncode:
        raise RuntimeError(f"W3 search subprocess failed ({r.returncode}):\n{r.stderr[-4000:]}")
    doc = json.loads(r.stdout.strip().splitlines()[-1])
    unit = _rss_unit() / 2**20
    doc["peak_mib"] = doc["maxrss_children"] * unit
    doc["baseline_mib"] = doc["maxrss_before"] * unit
    return doc


def _fmt_ratio(x: float) -> float:
    return float(f"{x:.4g}")


def run(workloads=WORKLOADS, *, scale: float = 1.0, threads: int | None = None, repeats: int = 3,
        log=None) -> tuple[list[Measurement], dict]:
    """Run the measurements for the chosen workloads.

    Parameters
    ----------
    workloads : iterable of str, optional
        Subset of :data:`WORKLOADS`.
    scale : float, optional
        Workload scale (see :func:`workload`).
    threads : int, optional
        Thread count of the multi-threaded measurements (default: the CPUs available
        to this process).
    repeats : int, optional
        Each timing is the best of this many runs.
    log : callable, optional
        Called with progress lines (e.g. ``print`` to stderr).

    Returns
    -------
    measurements : list of Measurement
    context : dict
        Machine, versions, date, thread count, workload descriptions.
    """
    from .threads import get_threads, set_threads

    say = log or (lambda msg: None)
    chosen = [str(x).upper() for x in workloads]
    for x in chosen:
        if x not in WORKLOADS:
            raise ValueError(f"unknown workload {x!r}; choose from {', '.join(WORKLOADS)}")
    n_threads = int(threads) if threads is not None else _available_cpus()
    if n_threads < 1:
        raise ValueError(f"threads must be at least 1, got {threads}")
    context = _context(n_threads)
    context["scale"] = scale
    context["repeats"] = repeats
    context["workloads"] = {}
    rows: list[Measurement] = []
    previous = get_threads()
    try:
        set_threads(1)
        w1 = workload("W1", scale) if "W1" in chosen else None
        w2 = workload("W2", scale) if "W2" in chosen else None
        per: dict[str, float] = {}
        fft = None
        first = w1 or w2
        if first is not None:
            say(f"yardstick: inverse FFT of length {first.segment_samples}")
            sec, label = yardstick(first.segment_samples)
            fft = sec
            context["yardstick"] = label
            rows.append(Measurement("a", f"yardstick: inverse FFT n={first.segment_samples} complex64, 1 thread "
                                    f"({label})", round(sec * 1e3, 4), "ms"))
        for w in (w1, w2):
            if w is None:
                continue
            context["workloads"][w.name] = w.description
            say(f"{w.name}: {w.description}")
            _warm_up(w)
            t1, res1 = _fused_bank(w, w.bank, repeats=repeats)
            scaling_rows: list[Measurement] = []
            if w.name == "W1" and n_threads > 1:
                # e. thread scaling and determinism; 1 and n threads alternate so that
                # both see the same machine conditions
                say(f"W1: {n_threads} threads")
                set_threads(n_threads)
                _warm_up(w)
                tn = math.inf
                busy = 0.0
                ticks0 = _cpu_ticks()
                for _ in range(max(1, repeats)):
                    set_threads(n_threads)
                    c0 = time.process_time()
                    t, resn = _fused_bank(w, w.bank, repeats=1)
                    if t < tn:
                        tn, busy = t, (time.process_time() - c0) / t
                    set_threads(1)
                    t1 = min(t1, _fused_bank(w, w.bank, repeats=1)[0])
                ticks1 = _cpu_ticks()
                steal = None
                if ticks0 and ticks1 and ticks1[1] > ticks0[1]:
                    steal = round(100.0 * (ticks1[0] - ticks0[0]) / (ticks1[1] - ticks0[1]), 1)
                context["steal_percent_during_scaling"] = steal
                scaling = t1 / tn
                want = 0.9 * n_threads
                same = _same_output(res1, resn)
                scaling_rows = [
                    Measurement("e", f"W1 thread scaling, {n_threads} threads vs 1", _fmt_ratio(scaling), "x",
                                f">= {want:g}", bool(scaling >= want)),
                    Measurement("e2", f"W1 triggers bitwise identical, {n_threads} threads vs 1",
                                "yes" if same else "no", "", "identical", same),
                    Measurement("tputN-W1", f"W1 throughput, {n_threads} threads",
                                round(len(w.bank) * w.segment_duration / tn, 1), "template-s/s"),
                    # diagnostics: CPU seconds per wall second of the best n-thread run
                    # (n if the threads really ran side by side) and the hypervisor's
                    # steal over the scaling runs (CPU time taken by other guests)
                    Measurement("e3", f"W1 CPU time / wall time at {n_threads} threads", _fmt_ratio(busy), "x"),
                    Measurement("e4", "CPU steal during the scaling runs",
                                "n/a" if steal is None else steal, "%"),
                ]
            elif w.name == "W1":
                scaling_rows = [
                    Measurement("e", "W1 thread scaling (needs --threads >= 2)", None, "x", "", None),
                    Measurement("e2", "W1 triggers bitwise identical (needs --threads >= 2)", None, "", "", None),
                ]
            per[w.name] = t1 / len(w.bank)
            ratio = per[w.name] / fft
            if w.name == "W1":
                rows.append(Measurement("b", "W1 fused per template / inverse FFT (1 thread)", _fmt_ratio(ratio), "x",
                                        "<= 1.3 (aim < 1.0)", bool(ratio <= 1.3)))
            else:
                rows.append(Measurement("b2", "W2 fused per template / inverse FFT (1 thread)", _fmt_ratio(ratio), "x"))
            rows.append(Measurement(f"tput1-{w.name}", f"{w.name} throughput, 1 thread",
                                    round(len(w.bank) * w.segment_duration / t1, 1), "template-s/s"))
            rows.extend(scaling_rows)
            if w.name != "W1":
                continue
            # fixed cost of one call: a one-template bank, per inverse FFT
            t_one, _ = _fused_bank(w, w.bank[:1], repeats=max(repeats, 5))
            rows.append(Measurement("b3", "W1 fused call with 1 template / inverse FFT (1 thread)",
                                    _fmt_ratio(t_one / fft), "x"))
            # d. numpy reference on an evenly spread subset; per template against the
            # fused per-template cost over the whole bank (its per-call set-up amortised)
            k_ref = max(2, min(len(w.bank), int(round(16 * scale))))
            sub = w.bank[np.linspace(0, len(w.bank) - 1, k_ref).round().astype(int)]
            say(f"W1: numpy reference on {k_ref} templates")
            t_ref = _reference_bank(w, sub, repeats=1)
            speed = (t_ref / k_ref) / per["W1"]
            rows.append(Measurement("d", f"W1 fused speedup over numpy reference (per template, {k_ref} reference "
                                    "templates, 1 thread)", _fmt_ratio(speed), "x", ">= 8", bool(speed >= 8)))
            # f. template generation alone, as inside the fused kernel (reused buffer,
            # no Python), and through the numpy API (fresh output array, validation)
            say("W1: template generation")
            from . import _core

            t_kernel = min(
                _core.bench_template_generation(np.ascontiguousarray(w.bank.m1), np.ascontiguousarray(w.bank.m2),
                                                w.f_low, w.df, w.n_freq, 1)
                for _ in range(repeats)
            )
            frac = t_kernel / per["W1"]
            rows.append(Measurement("f", "W1 template generation (in-kernel) per template / fused per template (1 thread)",
                                    _fmt_ratio(frac), "x", "<= 0.25", bool(frac <= 0.25)))
            t_gen = _taylorf2_bank(w, w.bank, repeats=repeats)
            rows.append(Measurement("f", "W1 taylorf2() API call per template / fused per template (1 thread)",
                                    _fmt_ratio((t_gen / len(w.bank)) / per["W1"]), "x"))
        if "W1" in per and "W2" in per:
            rows.append(Measurement("c", "W2 / W1 fused per-template cost (1 thread)",
                                    _fmt_ratio(per["W2"] / per["W1"]), "x"))
        if "W3" in chosen:
            w3 = workload("W3", scale)
            context["workloads"]["W3"] = w3.description + f", {w3.segment_duration:g} s segments"
            small = w3.bank[: min(_W3_SMALL, max(1, len(w3.bank) // 4))]
            with tempfile.TemporaryDirectory(prefix="chirpsift-bench-") as tmp:
                say(f"W3: search with {len(small)} templates ({n_threads} threads)")
                a = _w3_run(w3, small, n_threads, tmp, "small")
                say(f"W3: search with {len(w3.bank)} templates ({n_threads} threads)")
                b = _w3_run(w3, w3.bank, n_threads, tmp, "full")
            ratio = b["peak_mib"] / a["peak_mib"]
            rows.append(Measurement("g1", f"W3 peak RSS, {len(small)} templates", round(a["peak_mib"], 1), "MiB"))
            rows.append(Measurement("g2", f"W3 peak RSS, {len(w3.bank)} templates", round(b["peak_mib"], 1), "MiB",
                                    "<= 1024", bool(b["peak_mib"] <= 1024)))
            rows.append(Measurement("g", f"W3 peak RSS ratio, {len(w3.bank)} / {len(small)} templates",
                                    _fmt_ratio(ratio), "x", "within 10% of 1", bool(abs(ratio - 1) < 0.10)))
            rows.append(Measurement("tputN-W3", f"W3 search throughput, {n_threads} threads",
                                    round(len(w3.bank) * w3.duration / b["wall"], 1), "template-s/s"))
            context["w3_runs"] = {"small": a, "full": b}
    finally:
        set_threads(previous)
    return rows, context


# ---------------------------------------------------------------------------
# context and table
# ---------------------------------------------------------------------------
def _available_cpus() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # pragma: no cover - not Linux
        return os.cpu_count() or 1


def _cpu_model() -> str:
    try:
        with open("/proc/cpuinfo", encoding="utf-8", errors="replace") as fh:
            for line in fh:
                if line.lower().startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or platform.machine() or "unknown"


def _context(threads: int) -> dict:
    from . import __version__

    return {
        "threads": threads,
        "cpu": _cpu_model(),
        "cores": _available_cpus(),
        "numpy": np.__version__,
        "chirpsift": __version__,
        "python": platform.python_version(),
        "date": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "load_average": _load_average(),
    }


def _load_average():
    try:
        return round(os.getloadavg()[0], 2)
    except (AttributeError, OSError):  # pragma: no cover - not Unix
        return None


def _value_text(m: Measurement) -> str:
    if m.value is None:
        return "not measured"
    if isinstance(m.value, float):
        text = f"{m.value:.3g}" if m.unit == "x" else f"{m.value:g}"
    else:
        text = str(m.value)
    return f"{text} {m.unit}".strip() if m.unit not in ("",) else text


def format_table(rows, context) -> str:
    """The benchmark table as Markdown.

    Parameters
    ----------
    rows : list of Measurement
    context : dict
        As returned by :func:`run`.

    Returns
    -------
    str
        One table: run context rows first, then one row per measurement with its
        value, target and whether it is met.
    """
    lines = ["| measurement | value | target | met |", "| --- | --- | --- | --- |"]
    info = [
        ("date (UTC)", context.get("date")),
        ("CPU", context.get("cpu")),
        ("cores available", context.get("cores")),
        ("threads (multi-threaded rows)", context.get("threads")),
        ("load average (1 min) at start", context.get("load_average")),
        ("numpy / chirpsift / python", f"{context.get('numpy')} / {context.get('chirpsift')} / {context.get('python')}"),
        ("scale / repeats (best of)", f"{context.get('scale')} / {context.get('repeats')}"),
    ]
    for name, desc in context.get("workloads", {}).items():
        info.append((f"workload {name}", desc))
    for name, value in info:
        lines.append(f"| {name} | {value} | | |")
    for m in rows:
        met = "" if m.met is None else ("yes" if m.met else "NO")
        lines.append(f"| {m.name} | {_value_text(m)} | {m.target or 'n/a'} | {met} |")
    return "\n".join(lines)


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="chirpsift bench",
        description="Run the standard benchmark workloads and print one table of ratios.",
    )
    p.add_argument("--quick", action="store_true", help=f"fewer templates (scale {QUICK_SCALE:g}, ~2 minutes)")
    p.add_argument("--scale", type=float, default=None, help="workload scale (default 1, or the quick scale)")
    p.add_argument("--workloads", default=",".join(WORKLOADS), help="comma-separated subset of W1,W2,W3")
    p.add_argument("--threads", type=int, default=None, help="threads for the multi-threaded rows (default: all CPUs)")
    p.add_argument("--repeats", type=int, default=None, help="best of this many runs per timing (default 3, quick 2)")
    p.add_argument("--json", dest="json_path", default=None, help="also write the results to this JSON file")
    p.add_argument("--quiet", action="store_true", help="no progress lines on stderr")
    return p


def main(args=None) -> int:
    """Entry point of ``chirpsift bench``.

    Parameters
    ----------
    args : list of str, optional
        ``[--quick] [--scale S] [--workloads W1,W2,W3] [--threads N] [--repeats R]
        [--json out.json] [--quiet]`` (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        0 on success (whether or not targets are met: speed is measured, never
        asserted), 2 on bad arguments.
    """
    parser = _parser()
    try:
        ns = parser.parse_args(sys.argv[1:] if args is None else list(args))
    except SystemExit as exc:
        return exc.code if isinstance(exc.code, int) else 2
    scale = ns.scale if ns.scale is not None else (QUICK_SCALE if ns.quick else 1.0)
    repeats = ns.repeats if ns.repeats is not None else (2 if ns.quick else 3)
    names = [x.strip().upper() for x in ns.workloads.split(",") if x.strip()]
    bad = [x for x in names if x not in WORKLOADS]
    if bad or not names:
        parser.print_usage(sys.stderr)
        print(f"chirpsift bench: error: unknown workload(s) {', '.join(bad) or '(none)'}; choose from W1,W2,W3",
              file=sys.stderr)
        return 2
    if not (math.isfinite(scale) and scale > 0) or repeats < 1 or (ns.threads is not None and ns.threads < 1):
        print("chirpsift bench: error: --scale must be > 0, --repeats and --threads >= 1", file=sys.stderr)
        return 2
    log = None if ns.quiet else (lambda msg: print(f"[bench] {msg}", file=sys.stderr, flush=True))
    started = time.perf_counter()
    rows, context = run(names, scale=scale, threads=ns.threads, repeats=repeats, log=log)
    context["wall_s"] = round(time.perf_counter() - started, 1)
    print(format_table(rows, context))
    if ns.json_path:
        with open(ns.json_path, "w", encoding="utf-8") as fh:
            json.dump({"context": context, "measurements": [m.as_dict() for m in rows]}, fh, indent=2)
            fh.write("\n")
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
