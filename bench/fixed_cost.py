"""Breakdown of the per-segment fixed cost of :func:`chirpsift.search`, in yardsticks.

Usage::

    PYTHONPATH=python python bench/fixed_cost.py [--threads 1 2] [--repeats 5]

One segment of workload W1 (2^20 samples, 256 s at 4096 Hz, PSD estimated from the
segment itself, default search settings). Each step of the per-segment path is timed
through the numpy API, best of ``--repeats``, and divided by the yardstick measured in
the same process: one complex64 inverse FFT of 2^20 points on one thread
(:func:`chirpsift._timing.inverse_fft_seconds`, the transform the fused kernel
performs per template). A step timed alone, call after call, finds the allocator's
memory warm; the search's steps in sequence (the row after the sum) do not always, so
that row, not the sum, is the per-segment fixed cost. The float64 real transforms of the same length that the
spectrum chain and the data transform perform are shown beside it, and numpy's and
scipy's transforms and Welch estimate on the same lengths as a sanity check of the
core's.

The whole-search rows time :func:`chirpsift.search` with the first 64 and all 256
templates, and the fused kernel alone (:func:`chirpsift.filter_segment` on the prepared
segment) with the same templates: the difference is the search's fixed cost per
segment, and should roughly equal the sum of the per-segment steps. (The bank is sorted
by chirp mass, so its first 64 templates are the longest and cost more each: the
intercept of a line through the 64- and 256-template searches overstates the fixed
cost.)
"""

from __future__ import annotations

import argparse
import os
import time
import warnings

# numpy's BLAS threads spin after a call and would take the cores rayon is timed on
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402


def best(fn, repeats):
    """Best wall time (s) of ``repeats`` calls after one warm-up call."""
    fn()
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times), float(np.median(times))


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--threads", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args(argv)
    warnings.simplefilter("ignore")  # W1 keeps 9% of its one segment live: the search says so each call

    import chirpsift as cs
    from chirpsift import _timing, benchmarks
    from chirpsift.condition import check_strain, find_nonfinite_runs
    from chirpsift.fused import filter_segment, prepare_bank, prepare_segments
    from chirpsift.spectrum import psd_to_grid, segment_psds, truncate_inverse_psd, welch

    w = benchmarks.workload("W1")
    x = np.array(w.strain()[: w.segment_samples])
    fs, n, n_freq, df, fl = w.sample_rate, w.segment_samples, w.n_freq, w.df, w.f_low
    t_welch = w.settings.welch_duration
    bank = w.bank
    kwargs = w.settings.as_dict()
    one = prepare_bank(bank.m1[:1], bank.m2[:1], f_low=fl)
    r = args.repeats

    freqs, est = welch(x, fs, t_welch, average="median")
    grid = psd_to_grid(freqs, est, df, n_freq)
    psd = truncate_inverse_psd(grid, fs, t_welch, fl)
    (prepared,) = prepare_segments(x, fs, [0], n, psd)
    total_steps = ("check", "find", "prepare_segments estimating", "filter")
    try:
        prepare_segments(x, fs, [0], n, welch_duration=t_welch, f_low=fl)
    except TypeError:  # a build whose search calls the chain and the preparation apart
        total_steps = ("check", "find", "segment_psds", "prepare_segments (", "filter")
    filt = w.filter_kwargs()
    filt = {k: filt[k] for k in ("min_snr", "cluster_samples", "chi2_bands", "valid")}

    steps = [
        ("check_strain (finite scan, copy)", lambda: check_strain(x)),
        ("find_nonfinite_runs", lambda: find_nonfinite_runs(x)),
        ("welch (median, 4 s Hann, 50%)", lambda: welch(x, fs, t_welch, average="median")),
        ("psd_to_grid", lambda: psd_to_grid(freqs, est, df, n_freq)),
        ("truncate_inverse_psd", lambda: truncate_inverse_psd(grid, fs, t_welch, fl)),
        ("segment_psds (the chain, one call)",
         lambda: segment_psds(x, fs, [0], n, n_freq, welch_duration=t_welch, f_low=fl)),
        ("prepare_segments (data rfft + weights)", lambda: prepare_segments(x, fs, [0], n, psd)),
        ("prepare_segments estimating (the search's call)",
         lambda: prepare_segments(x, fs, [0], n, welch_duration=t_welch, f_low=fl)),
        ("filter_segment, 1 template (prepared)", lambda: filter_segment(prepared, bank=one, **filt)),
    ]
    sanity = [
        ("numpy rfft float64", lambda: np.fft.rfft(x)),
        ("numpy irfft float64", lambda: np.fft.irfft(np.sqrt(grid[:n_freq]).astype(complex), n)),
    ]
    try:
        import scipy.fft
        import scipy.signal

        sanity += [
            ("scipy.fft rfft float64", lambda: scipy.fft.rfft(x)),
            ("scipy.signal.welch (median, same settings)",
             lambda: scipy.signal.welch(x, fs, nperseg=int(t_welch * fs), average="median")),
        ]
    except ImportError:  # pragma: no cover - scipy is a dependency
        pass

    for threads in args.threads:
        cs.set_threads(threads)
        yard = min(_timing.inverse_fft_seconds(n, repeats=10) for _ in range(3))
        real64 = min(_timing.inverse_fft_seconds(n, real=True, repeats=10) for _ in range(3))
        print(f"\n== {threads} thread(s): yardstick complex64 inverse FFT n={n}: {yard * 1e3:.2f} ms; "
              f"float64 real inverse FFT n={n}: {real64 * 1e3:.2f} ms = {real64 / yard:.2f} yardsticks")
        total = 0.0
        for name, fn in steps:
            try:
                b, med = best(fn, r)
            except TypeError:  # a build without this call
                print(f"  {name:<45s}    n/a")
                continue
            if name.startswith(total_steps):
                total += b
            print(f"  {name:<45s} {b / yard:6.2f}  (median {med / yard:.2f})")
        print(f"  {'sum of the search path: ' + ', '.join(t.split()[0] for t in total_steps):<45s} {total / yard:6.2f}")
        path = [fn for name, fn in steps if name.startswith(total_steps)]
        b, med = best(lambda: [fn() for fn in path], r)
        print(f"  {'the same steps in sequence, as a search runs them':<45s} {b / yard:6.2f}  (median {med / yard:.2f})")
        for k in (64, len(bank)):
            kb = prepare_bank(bank.m1[:k], bank.m2[:k], f_low=fl)
            tf, _ = best(lambda: filter_segment(prepared, bank=kb, **filt), max(2, r // 2))
            ts, ms = best(lambda: cs.search(x, fs, bank[:k], **kwargs), max(2, r // 2))
            print(f"  whole search {k:3d} templates: per template {ts / k / yard:.3f} (median {ms / k / yard:.3f}); "
                  f"kernel alone {tf / k / yard:.3f}; search - kernel = {(ts - tf) / yard:.2f} yardsticks")
        if threads == args.threads[0]:
            print("  sanity (numpy/scipy on the same lengths, their own threading):")
            for name, fn in sanity:
                b, _ = best(fn, r)
                print(f"    {name:<45s} {b / yard:6.2f}")
    cs.set_threads(1)


if __name__ == "__main__":
    main()
