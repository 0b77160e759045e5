"""Benchmarks of the match kernel and of bank placement, with their targets."""

from __future__ import annotations

import math
import time

import numpy as np

from .._timing import inverse_fft_seconds
from ..bank import bank_coverage, place_bank
from ..filter import band
from ..overlap import match, transform_length
from ..spectrum import design_psd
from ..threads import get_threads, set_threads
from ..waveform import isco_frequency, taylorf2
from .measure import Measurement, ratio

__all__ = ["measure_match", "measure_placement", "REGION_A", "REGION_B", "REGION_QUICK", "MATCH_ROWS"]

#: Region (a) of the bank targets: non-spinning components of 1-3 Msun from 30 Hz on
#: gen2-zero-detuned at minimal match 0.97, 4096 Hz, checked with 10^4 points.
REGION_A = {"m1": (1.0, 3.0), "m2": (1.0, 3.0), "psd": "gen2-zero-detuned", "f_low": 30.0,
            "minimal_match": 0.97, "sample_rate": 4096.0, "seed": 0}
COVERAGE_POINTS = 10_000
#: Region (b): components of 1-10 Msun with aligned spins |chi| <= 0.5 from 30 Hz at
#: minimal match 0.97. It needs about 310,000 templates (over the default cap) and 28
#: minutes on 2 cores (2026-12-02), so it is placed only from bench/test_bank.py, with
#: the cap raised.
REGION_B = {**REGION_A, "m1": (1.0, 10.0), "m2": (1.0, 10.0), "chi1": (-0.5, 0.5), "chi2": (-0.5, 0.5),
            "max_templates": 2_000_000}
#: ``--quick``: 1.3-1.6 Msun from 40 Hz, 2,000 points (no verdict).
REGION_QUICK = {**REGION_A, "m1": (1.3, 1.6), "m2": (1.3, 1.6), "f_low": 40.0}
QUICK_POINTS = 2_000
#: One template against this many in the match row (the target's count).
MATCH_ROWS = 1000
#: Targets of the match kernel and of bank placement.
MATCH_TARGET = 1.5
PLACEMENT_TARGET_S = 300.0
EFFICIENCY_AIM = 1.15


def measure_match(say, repeats: int = 3) -> list[Measurement]:
    """Time ``match`` of one template against 10^3, per pair, over one bare inverse FFT.

    The templates: 10+10 Msun against neighbours within 0.3 Msun, from 30 Hz, 8 s period,
    on gen2-zero-detuned, one thread. Every pair's common band ends at the lighter
    template's ISCO; the yardstick is a bare complex128 inverse FFT of the length the
    kernel transforms for the median pair (:func:`chirpsift.overlap.transform_length`).
    """
    df, n, f_low = 1.0 / 8.0, 16385, 30.0
    psd = design_psd(np.arange(n) * df)
    rng = np.random.default_rng(0)
    m1 = np.append(10.0, 10.0 + rng.uniform(-0.3, 0.3, MATCH_ROWS))
    m2 = np.append(10.0, 10.0 + rng.uniform(-0.3, 0.3, MATCH_ROWS))
    h = taylorf2(m1, m2, f_low=f_low, df=df, n_freq=n)
    top = np.minimum(isco_frequency(m1[0], m2[0]), isco_frequency(m1[1:], m2[1:]))  # the heavier's ISCO
    lengths = [transform_length(np.subtract(*band(f_low, float(f), df, n)[::-1])) for f in top]
    length = int(np.median(lengths))
    say(f"match: one template against {MATCH_ROWS}, transforms of {length} points")
    previous = get_threads()
    try:
        set_threads(1)
        f_high = float(isco_frequency(m1[0], m2[0]))  # the band every pair shares at most
        match(h[0], h[1:3], psd, df, f_low, f_high)  # plans
        best = math.inf
        for _ in range(repeats):
            t = time.perf_counter()
            match(h[0], h[1:], psd, df, f_low, f_high)
            best = min(best, time.perf_counter() - t)
    finally:
        set_threads(previous)
    per_pair = best / MATCH_ROWS
    bare = inverse_fft_seconds(length, double=True, repeats=200)
    value = per_pair / bare
    return [
        Measurement("match_per_pair_us", f"match, 1 template vs {MATCH_ROWS} (10+10 Msun, 30 Hz, 1 thread), per pair",
                    round(per_pair * 1e6, 2), "us"),
        Measurement("match_per_ifft", f"match per pair / bare complex128 inverse FFT of {length} points",
                    ratio(value), "x", f"<= {MATCH_TARGET:g}", bool(value <= MATCH_TARGET)),
    ]


def measure_placement(say, *, quick: bool = False, region_b: bool = False) -> list[Measurement]:
    """Place region (a) and check its coverage; report size, efficiency and times.

    Efficiency is the bank's size over the metric estimate for an ideal hexagonal
    lattice, ``area / ((3 sqrt 3 / 2)(1 - MM))``, which leaves out the edges: for a
    region thin in metric terms (region (a) is 1,400 long and 0.1-1.9 wide, covering
    radius 0.17) every covering needs more.
    """
    region = REGION_QUICK if quick else REGION_B if region_b else REGION_A
    n_points = QUICK_POINTS if quick else COVERAGE_POINTS
    name = ("1.3-1.6 Msun from 40 Hz (quick)" if quick else
            "region (b): 1-10 Msun, |chi| <= 0.5 from 30 Hz" if region_b else "region (a): 1-3 Msun from 30 Hz")
    say(f"bank placement: {name}")
    t = time.perf_counter()
    bank = place_bank(**region)
    t_place = time.perf_counter() - t
    say(f"bank placement: {len(bank)} templates in {t_place:.1f} s; coverage of {n_points} points")
    t = time.perf_counter()
    cov = bank_coverage(bank, n_points, seed=1)
    t_cov = time.perf_counter() - t
    s = cov.summary
    mm = region["minimal_match"]
    full = not quick and not region_b  # the efficiency aim and time target are region (a)'s
    efficiency = len(bank) / bank.metadata["metric_estimate"]
    total = t_place + t_cov
    covered_ok = s["fraction_covered"] >= 0.99 and s["percentile_0.1"] >= mm - 0.01
    return [
        Measurement("bank_templates", f"bank of {name}, MM {mm:g}", len(bank), "templates"),
        Measurement("bank_efficiency", "bank size / ideal hexagonal-lattice estimate (metric area over the cell)",
                    ratio(efficiency), "x", f"aim <= {EFFICIENCY_AIM:g}" if full else "",
                    bool(efficiency <= EFFICIENCY_AIM) if full else None),
        Measurement("bank_efficiency_with_edges",
                    "bank size / the same estimate with the edges' share (half a lattice row per unit of edge)",
                    ratio(len(bank) / bank.metadata["metric_estimate_with_edges"]), "x"),
        Measurement("bank_coverage_fraction", f"fraction of {n_points} points with fitting factor >= {mm:g}",
                    round(s["fraction_covered"], 4), "", ">= 0.99, 0.1 percentile >= MM - 0.01",
                    bool(covered_ok)),
        Measurement("bank_coverage_p01", "fitting factor, 0.1 percentile", round(s["percentile_0.1"], 4), ""),
        Measurement("bank_coverage_min", "fitting factor, minimum", round(s["minimum"], 4), ""),
        Measurement("bank_place_s", "placement time", round(t_place, 1), "s"),
        Measurement("bank_coverage_s", f"coverage time, {n_points} points", round(t_cov, 1), "s"),
        Measurement("bank_total_s", "placement and coverage", round(total, 1), "s",
                    f"< {PLACEMENT_TARGET_S:g} on 2 cores" if full else "",
                    bool(total < PLACEMENT_TARGET_S) if full else None),
    ]
