"""Template-bank targets: the match kernel against its bare transform, and region (a).

- ``match`` of one template against 10^3 (10+10 Msun from 30 Hz, one thread): seconds
  per pair over one bare complex128 inverse FFT of the length the kernel transforms
  (target <= 1.5), and against its numpy twin ``chirpsift.reference.match``;
- region (a): non-spinning components of 1-3 Msun from 30 Hz on gen2-zero-detuned at
  minimal match 0.97, placed and checked with 10^4 points (target: under 5 minutes on
  2 cores, >= 99% covered, 0.1 percentile >= 0.96; size over the ideal lattice's,
  aim <= 1.15);
- region (b): components of 1-10 Msun with aligned spins |chi| <= 0.5 from 30 Hz, the
  same coverage target; more than 200,000 templates, so only with ``--bank-region-b``.

Run ``pytest bench/test_bank.py --benchmark-only -s`` (several minutes), or
``python bench/test_bank.py`` (``--quick``: a small region).
"""

from __future__ import annotations

import argparse
import json

import numpy as np
import pytest

from chirpsift.benchmarks.placement import MATCH_ROWS, measure_match, measure_placement


def _print(rows):
    for r in rows:
        verdict = "" if r.met is None else (" (met)" if r.met else " (NOT met)")
        print(f"  {r.name}: {r.value} {r.unit}  {r.target}{verdict}")


def test_match_against_twin(benchmark):
    from chirpsift import design_psd, match, reference, taylorf2

    df, n = 1.0 / 8.0, 16385
    psd = design_psd(np.arange(n) * df)
    h = taylorf2(np.full(65, 10.0), np.linspace(9.7, 10.3, 65), f_low=30.0, df=df, n_freq=n)
    benchmark.group = "match"
    fast = benchmark(match, h[0], h[1:], psd, df, 30.0, 220.0)
    twin = reference.match(h[0], h[1:], psd, df, 30.0, 220.0)
    np.testing.assert_allclose(fast, twin, atol=1e-4)  # the twin: an 8x oversampled transform


def test_match_per_bare_transform(benchmark):
    rows = benchmark.pedantic(measure_match, args=(print,), rounds=1, iterations=1)
    benchmark.extra_info.update({r.key: r.value for r in rows})
    benchmark.extra_info["pairs"] = MATCH_ROWS
    _print(rows)


@pytest.mark.parametrize("quick", [False])
def test_region_a(benchmark, quick):
    rows = benchmark.pedantic(measure_placement, args=(print,), kwargs={"quick": quick}, rounds=1, iterations=1)
    benchmark.extra_info.update({r.key: r.value for r in rows})
    _print(rows)


@pytest.mark.skipif("not config.getoption('--bank-region-b')",
                    reason="region (b) needs about 310,000 templates: 28 minutes on 2 cores (--bank-region-b)")
def test_region_b(benchmark):
    rows = benchmark.pedantic(measure_placement, args=(print,), kwargs={"region_b": True}, rounds=1, iterations=1)
    benchmark.extra_info.update({r.key: r.value for r in rows})
    _print(rows)


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    args = parser.parse_args()
    rows = measure_match(print) + measure_placement(print, quick=args.quick)
    _print(rows)
    print(json.dumps({r.key: r.value for r in rows}))
