"""pytest-benchmark groups: each kernel's compiled path and its numpy reference twin
on the standard workloads, and the bare transforms they are measured against.

Each kernel's yardstick is the transform it performs itself (length and kind:
complex64 inverse for the SNR series and fused kernels, float64 real inverse for
the spectrum chain and ``correlate``; ``taylorf2`` performs none). Each distinct
transform is timed once, in the group ``bare transforms``, and every kernel
benchmark names its transform in ``extra_info["transform"]``.

Run ``pytest bench/ --benchmark-only --benchmark-json=out.json`` and then
``python bench/ratios.py out.json``. Each benchmark records in ``extra_info`` its
``role`` (``rust``, ``reference`` or ``bare``), the ``per`` units of work one call
does (templates, or transforms for the yardsticks) and the length ``n``, so ratios
are per template / per transform. Nothing here asserts a speed.
"""

import numpy as np
import pytest

import chirpsift
import chirpsift.reference as ref
from chirpsift import benchmarks
from chirpsift.reference import filter_segment as ref_filter_segment

from _helpers import fast_length, fftw_transform, reference_subset, rust_transform, scipy_transform, self_timed

#: Template length of the correlate group (s).
CORRELATE_SECONDS = 4.0
#: Welch segment length of the welch group (s).
WELCH_SECONDS = 4.0
#: Rounds of the slow reference benchmarks (each round is one call).
SLOW_ROUNDS = 3


def _transforms(w):
    """The transform each kernel performs on workload ``w``, as ``(n, real)``;
    ``None`` for a kernel that performs none."""
    n = w.segment_samples
    m = int(CORRELATE_SECONDS * w.sample_rate)
    return {
        "welch": (int(round(WELCH_SECONDS * w.sample_rate)), True),
        "whiten": (n, True),
        "taylorf2": None,
        "snr_series": (n, False),
        "correlate": (fast_length(n + m - 1), True),
        "filter_segment": (n, False),
        "filter_segment W2": (n, False),
    }


def _record(benchmark, role, per, n, label=None, transform=None):
    benchmark.extra_info.update({"role": role, "per": int(per), "n": int(n), "label": label or role})
    if transform is not None:
        benchmark.extra_info["transform"] = {"n": int(transform[0]), "real": bool(transform[1])}


def _slow(benchmark, fn):
    """Time a slow call a fixed few times instead of letting pytest-benchmark calibrate."""
    return benchmark.pedantic(fn, rounds=SLOW_ROUNDS, iterations=1, warmup_rounds=0)


# ---------------------------------------------------------------------------
# bare transforms, each distinct (length, kind) once
# ---------------------------------------------------------------------------
_BARE = ["rustfft", "scipy", "fftw"]


def _distinct_transforms():
    w = benchmarks.workload("W1", benchmarks.FULL_DATA_SCALE)
    return sorted({t for t in _transforms(w).values() if t is not None})


@pytest.mark.parametrize("transform", _distinct_transforms(), ids=lambda t: f"{'real f64' if t[1] else 'complex64'} n={t[0]}")
@pytest.mark.parametrize("which", _BARE)
def test_bare_transform(benchmark, transform, which):
    n, real = transform
    benchmark.group = "bare transforms"
    if which == "rustfft":
        raw, per = rust_transform(n, real)
        own: list[float] = []
        fn = self_timed(raw, own)
    elif which == "scipy":
        pytest.importorskip("scipy")
        fn, per = scipy_transform(n, real)
    else:
        made = fftw_transform(n, real)
        if made is None:
            pytest.skip("pyfftw is not installed (optional second yardstick)")
        fn, per = made
    kind = "real f64" if real else "complex64"
    _record(benchmark, "bare", per, n, label=f"bare {kind} inverse n={n} ({which})", transform=transform)
    benchmark(fn)
    if which == "rustfft" and own:
        # the core's own steady-state time per transform (buffer set-up excluded)
        benchmark.extra_info["self_timed"] = {"min": min(own), "median": float(np.median(own)),
                                              "mean": float(np.mean(own))}


# ---------------------------------------------------------------------------
# spectrum
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("impl", ["rust", "reference"])
def test_welch(benchmark, w1, impl):
    x = np.asarray(w1.strain()[: w1.segment_samples])
    mod = chirpsift if impl == "rust" else ref
    benchmark.group = "welch"
    _record(benchmark, impl, 1, x.size, transform=_transforms(w1)["welch"])
    benchmark(mod.welch, x, w1.sample_rate, WELCH_SECONDS, average="median")


@pytest.mark.parametrize("impl", ["rust", "reference"])
def test_whiten(benchmark, w1, impl):
    x = np.asarray(w1.strain()[: w1.segment_samples])
    _, psd = w1.segment()
    mod = chirpsift if impl == "rust" else ref
    benchmark.group = "whiten"
    _record(benchmark, impl, 1, x.size, transform=_transforms(w1)["whiten"])
    benchmark(mod.whiten, x, psd, w1.sample_rate, f_low=w1.f_low)


# ---------------------------------------------------------------------------
# waveform
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("impl", ["rust", "reference"])
def test_taylorf2(benchmark, w1, impl):
    bank = w1.bank if impl == "rust" else reference_subset(w1.bank)
    mod = chirpsift if impl == "rust" else ref
    benchmark.group = "taylorf2"
    _record(benchmark, impl, len(bank), w1.segment_samples)

    def call():
        return mod.taylorf2(bank.m1, bank.m2, f_low=w1.f_low, df=w1.df, n_freq=w1.n_freq)

    if impl == "rust":
        benchmark(call)
    else:
        _slow(benchmark, call)


# ---------------------------------------------------------------------------
# filter
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("impl", ["rust", "reference"])
def test_snr_series(benchmark, w1, w1_templates, impl):
    d, psd = w1.segment()
    k = len(w1.bank) if impl == "rust" else len(reference_subset(w1.bank))
    h = w1_templates[:k]
    mod = chirpsift if impl == "rust" else ref
    benchmark.group = "snr_series"
    _record(benchmark, impl, k, w1.segment_samples, transform=_transforms(w1)["snr_series"])

    def call():
        return mod.snr_series(d, h, psd, w1.df, w1.f_low)

    if impl == "rust":
        benchmark(call)
    else:
        _slow(benchmark, call)


@pytest.mark.parametrize("impl", ["rust", "reference"])
def test_correlate(benchmark, w1, impl):
    x = np.asarray(w1.strain()[: w1.segment_samples])
    m = int(CORRELATE_SECONDS * w1.sample_rate)
    k = len(w1.bank) if impl == "rust" else len(reference_subset(w1.bank))
    rng = np.random.default_rng(7)
    templates = rng.standard_normal((k, m))
    mod = chirpsift if impl == "rust" else ref
    benchmark.group = "correlate"
    _record(benchmark, impl, k, x.size, transform=_transforms(w1)["correlate"])

    def call():
        return mod.correlate(x, templates, mode="valid")

    if impl == "rust":
        benchmark(call)
    else:
        _slow(benchmark, call)


# ---------------------------------------------------------------------------
# fused segment filter and the search over one segment
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("workload", ["W1", "W2"])
@pytest.mark.parametrize("impl", ["rust", "reference"])
def test_filter_segment(benchmark, request, workload, impl):
    w = request.getfixturevalue(workload.lower())
    d, psd = w.segment()
    kw = w.filter_kwargs()
    bank = w.bank if impl == "rust" else reference_subset(w.bank)
    fn = chirpsift.filter_segment if impl == "rust" else ref_filter_segment
    benchmark.group = "filter_segment" if workload == "W1" else "filter_segment W2"
    _record(benchmark, impl, len(bank), w.segment_samples, label=f"{impl} {workload}",
            transform=_transforms(w)[benchmark.group])

    def call():
        return fn(d, psd, w.df, bank.m1, bank.m2, bank.chi1, bank.chi2, **kw)

    if impl == "rust":
        benchmark(call)
    else:
        _slow(benchmark, call)


def test_search_one_segment(benchmark, w1):
    """The whole pipeline (PSD estimate, truncation, data FFT, fused filter,
    clustering, ranking) on W1's one segment, in the filter_segment group."""
    x = np.asarray(w1.strain()[: w1.segment_samples])
    benchmark.group = "filter_segment"
    _record(benchmark, "rust", len(w1.bank), w1.segment_samples, label="rust search()",
            transform=_transforms(w1)["filter_segment"])
    benchmark(chirpsift.search, x, w1.sample_rate, w1.bank, f_low=w1.f_low, segment_duration=w1.segment_duration)
