"""The benchmark suite: every measurement of ``chirpsift bench``, as ratios taken in one run.

Each ``_measure_*`` function returns table rows for one kind of measurement; :func:`run`
builds the workloads and calls them in order.
"""

from __future__ import annotations

import math
import os
import statistics
import tempfile
import time
from functools import partial

import numpy as np

from ..threads import get_threads, set_threads
from .placement import measure_match, measure_placement
from .measure import (
    Measurement,
    best_time,
    cpu_ticks,
    fused_bank,
    generation_seconds,
    ratio,
    reference_bank,
    same_output,
    taylorf2_bank,
    warm_up,
    yardstick,
)
from .table import available_cpus
from .table import context as run_context
from .w3_child import search_in_child
from .workloads import WORKLOADS, Workload, workload

__all__ = ["run", "scaling_summary", "SCALING_RUNS", "SCALING_NOTE"]

#: Paired 1-thread / n-thread runs behind the thread-scaling row (median and range).
SCALING_RUNS = 7

#: Where the table points a reader who sees the scaling row miss its target.
SCALING_NOTE = (
    "the ratio of a 1-thread to an n-thread run varies from run to run on a shared machine; the "
    "target is judged on the median of the paired runs and the range shows the spread (README, "
    "Benchmarks, 'Notes on these numbers')"
)

#: Target of the fused per-template cost over the yardstick, per workload.
_FUSED_TARGET = {"W1": 1.3}

#: Templates of the W3 search whose memory is compared with the full bank's.
_W3_SMALL = 100


def scaling_summary(ratios, threads: int) -> dict:
    """Median, range and verdict of repeated thread-scaling ratios.

    Parameters
    ----------
    ratios : sequence of float
        ``t(1 thread) / t(threads)`` of each paired run.
    threads : int
        Threads of the multi-threaded runs; the target is ``0.9 * threads``.

    Returns
    -------
    dict
        ``median``, ``low``, ``high``, ``target`` and ``met`` (the median reaches the
        target): one slow run on a busy machine does not decide the verdict.

    Examples
    --------
    >>> from chirpsift.benchmarks.suite import scaling_summary
    >>> s = scaling_summary([1.51, 1.83, 1.89], threads=2)
    >>> s["median"], s["low"], s["high"], s["met"]
    (1.83, 1.51, 1.89, True)
    """
    values = [float(r) for r in ratios]
    if not values:
        raise ValueError("ratios must hold at least one thread-scaling ratio, got none")
    median = statistics.median(values)
    target = 0.9 * int(threads)
    return {"median": median, "low": min(values), "high": max(values), "target": target,
            "met": bool(median >= target)}


def _measure_yardstick(w: Workload, context: dict, say) -> tuple[float, Measurement]:
    say(f"yardstick: inverse FFT of length {w.segment_samples}")
    seconds, label = yardstick(w.segment_samples)
    context["yardstick"] = label
    row = Measurement("yardstick_ifft_ms", f"yardstick: inverse FFT n={w.segment_samples} complex64, 1 thread "
                      f"({label})", round(seconds * 1e3, 4), "ms")
    return seconds, row


def _measure_fused(w: Workload, t_ifft: float, repeats: int, target: float | None):
    """Time the fused kernel per template over the whole bank, against the yardstick.

    Also its throughput, and the fixed cost of a call (a one-template bank). One thread.
    """
    prefix = w.name.lower()
    t1, result = fused_bank(w, w.bank, repeats=repeats)
    per_template = t1 / len(w.bank)
    per_ifft = per_template / t_ifft
    rows = [
        Measurement(f"{prefix}_fused_per_ifft", f"{w.name} fused per template / inverse FFT (1 thread)",
                    ratio(per_ifft), "x", "" if target is None else f"<= {target:g} (aim < 1.0)",
                    None if target is None else bool(per_ifft <= target)),
        Measurement(f"{prefix}_throughput_1_thread", f"{w.name} throughput, 1 thread",
                    round(len(w.bank) * w.segment_duration / t1, 1), "template-s/s"),
    ]
    t_one, _ = fused_bank(w, w.bank[:1], repeats=max(repeats, 5))
    rows.append(Measurement(f"{prefix}_one_template_call_per_ifft",
                            f"{w.name} fused call with 1 template / inverse FFT (1 thread)",
                            ratio(t_one / t_ifft), "x"))
    return rows, per_template, result


def _measure_search_fixed_cost(w: Workload, t_ifft: float, repeats: int, say) -> list[Measurement]:
    """Time the whole :func:`chirpsift.search` per template against the yardstick.

    Over the workload's data (one segment), with the full bank and with a quarter of it
    (at most 64 templates): the gap between the two is the per-segment fixed cost (PSD
    estimate, data transform, kernel preparation) spread over fewer templates. One thread.
    """
    from .. import pipeline

    x = w.strain()
    kwargs = w.settings.as_dict()
    rows = []
    for size, k in (("quarter", max(1, min(64, len(w.bank) // 4))), ("full", len(w.bank))):
        key = f"{w.name.lower()}_search_{size}_bank_per_ifft"
        name = f"{w.name} whole search, {k} templates: per template / inverse FFT (1 thread)"
        if not w.templates_fit:
            rows.append(Measurement(key, f"{name} (data at this scale too short)", None, "x"))
            continue
        say(f"{w.name}: whole search with {k} templates")
        seconds = best_time(partial(pipeline.search, x, w.sample_rate, w.bank[:k], **kwargs), repeats)
        rows.append(Measurement(key, name, ratio(seconds / k / t_ifft), "x"))
    return rows


def _measure_scaling(w: Workload, threads: int, runs: int, single_result: dict, context: dict, say):
    """Measure thread scaling from ``runs`` paired runs, and bitwise identity of the results.

    Each pair runs 1 thread, then ``threads``, back to back, so both see the same machine
    conditions.
    """
    prefix = w.name.lower()
    if threads < 2:
        return [
            Measurement(f"{prefix}_thread_scaling", f"{w.name} thread scaling (needs --threads >= 2)", None, "x"),
            Measurement(f"{prefix}_identical_across_threads",
                        f"{w.name} triggers bitwise identical (needs --threads >= 2)", None),
        ]
    say(f"{w.name}: {runs} paired runs on 1 and {threads} threads")
    set_threads(threads)
    warm_up(w)
    ratios, best_n, busy = [], math.inf, 0.0
    ticks0 = cpu_ticks()
    for _ in range(max(1, runs)):
        set_threads(1)
        t1, _ = fused_bank(w, w.bank, repeats=1)
        set_threads(threads)
        c0 = time.process_time()
        tn, multi_result = fused_bank(w, w.bank, repeats=1)
        if tn < best_n:
            best_n, busy = tn, (time.process_time() - c0) / tn
        ratios.append(t1 / tn)
    set_threads(1)
    ticks1 = cpu_ticks()
    steal = None
    if ticks0 and ticks1 and ticks1[1] > ticks0[1]:
        steal = round(100.0 * (ticks1[0] - ticks0[0]) / (ticks1[1] - ticks0[1]), 1)
    context["steal_percent_during_scaling"] = steal
    context["thread_scaling_ratios"] = ratios
    s = scaling_summary(ratios, threads)
    same = same_output(single_result, multi_result)
    return [
        Measurement(f"{prefix}_thread_scaling", f"{w.name} thread scaling, {threads} threads vs 1 "
                    f"(median of {len(ratios)} paired runs)", ratio(s["median"]), "x",
                    f">= {s['target']:g} (median)", s["met"], note=SCALING_NOTE),
        Measurement(f"{prefix}_thread_scaling_range", f"{w.name} thread scaling, lowest - highest of the "
                    f"{len(ratios)} paired runs", f"{s['low']:.3g} - {s['high']:.3g}", "x"),
        Measurement(f"{prefix}_identical_across_threads",
                    f"{w.name} triggers bitwise identical, {threads} threads vs 1",
                    "yes" if same else "no", "", "identical", same),
        Measurement(f"{prefix}_throughput_{threads}_threads", f"{w.name} throughput, {threads} threads",
                    round(len(w.bank) * w.segment_duration / best_n, 1), "template-s/s"),
        # diagnostics: CPU seconds per wall second of the best n-thread run (n if the
        # threads really ran side by side) and the hypervisor's steal over the scaling
        # runs (CPU time taken by other guests)
        Measurement(f"{prefix}_cpu_per_wall_{threads}_threads", f"{w.name} CPU time / wall time at {threads} threads",
                    ratio(busy), "x"),
        Measurement("cpu_steal_percent_scaling", "CPU steal during the scaling runs",
                    "n/a" if steal is None else steal, "%"),
    ]


def _measure_reference(w: Workload, fused_per_template: float, scale: float, say) -> Measurement:
    """Time the numpy reference per template on an evenly spread subset of the bank.

    It is compared with the fused per-template cost over the whole bank (its per-call
    set-up amortised).
    """
    k_ref = max(2, min(len(w.bank), int(round(16 * scale))))
    sub = w.bank[np.linspace(0, len(w.bank) - 1, k_ref).round().astype(int)]
    say(f"{w.name}: numpy reference on {k_ref} templates")
    t_ref = reference_bank(w, sub, repeats=1)
    speed = (t_ref / k_ref) / fused_per_template
    return Measurement(f"{w.name.lower()}_speedup_over_reference",
                       f"{w.name} fused speedup over numpy reference (per template, {k_ref} reference templates, "
                       "1 thread)", ratio(speed), "x", ">= 8", bool(speed >= 8))


def _measure_generation(w: Workload, fused_per_template: float, repeats: int, say) -> list[Measurement]:
    """Time template generation alone, against the fused per-template cost.

    Once as inside the fused kernel (reused buffer, no Python), once through the numpy API
    (fresh output array, validation).
    """
    say(f"{w.name}: template generation")
    prefix = w.name.lower()
    frac = generation_seconds(w, repeats) / fused_per_template
    t_api = taylorf2_bank(w, w.bank, repeats=repeats) / len(w.bank)
    return [
        Measurement(f"{prefix}_generation_in_kernel_per_fused",
                    f"{w.name} template generation (in-kernel) per template / fused per template (1 thread)",
                    ratio(frac), "x", "<= 0.25", bool(frac <= 0.25)),
        Measurement(f"{prefix}_taylorf2_api_per_fused",
                    f"{w.name} taylorf2() API call per template / fused per template (1 thread)",
                    ratio(t_api / fused_per_template), "x"),
    ]


#: Time-slide background at full scale: triggers per site and slides (two sites), and the target.
_SLIDES_FULL = (1_000_000, 100_000)
_SLIDES_TARGET_S = 60.0


def _measure_slides(scale: float, say) -> list[Measurement]:
    """Time the two-site time-slide background all at once, and against the slide-by-slide loop.

    At ``scale=1``: 10^6 triggers per site and 10^5 slides, judged against one minute;
    smaller scales shrink both (no verdict).
    """
    from ..network import benchmark_slides

    n_triggers = max(2_000, int(round(_SLIDES_FULL[0] * scale)))
    n_slides = max(20, int(round(_SLIDES_FULL[1] * scale)))
    small = (max(1_000, int(round(20_000 * min(scale, 1.0)))), max(10, int(round(200 * min(scale, 1.0)))))
    say(f"time slides: {n_triggers} triggers per site, {n_slides} slides")
    r = benchmark_slides(n_triggers, n_slides, small_triggers=small[0], small_slides=small[1])
    big, loop = r["large"], r["small"]
    full = scale >= 1.0
    return [
        Measurement("slides_background_s",
                    f"time-slide background, 2 sites, {n_triggers} triggers per site, {n_slides} slides, all at once",
                    round(big["wall_s"], 2), "s", f"< {_SLIDES_TARGET_S:g} at full scale" if full else "",
                    bool(big["wall_s"] < _SLIDES_TARGET_S) if full else None),
        Measurement("slides_speedup_over_loop",
                    f"time slides all at once vs slide by slide ({small[0]} triggers per site, {small[1]} slides)",
                    ratio(loop["speedup"]), "x"),
        Measurement("slides_identical_to_loop", "time slides: all-at-once background equals the slide-by-slide one",
                    "yes" if loop["identical"] else "NO", "", "identical", bool(loop["identical"])),
    ]


def _measure_memory(w: Workload, threads: int, say) -> tuple[list[Measurement], dict]:
    """Measure the peak resident memory of a whole search with a small and with the full bank.

    Each search runs in a process of its own.
    """
    small = w.bank[: min(_W3_SMALL, max(1, len(w.bank) // 4))]
    with tempfile.TemporaryDirectory(prefix="chirpsift-bench-") as tmp:
        strain_path = os.path.join(tmp, "strain.npy")
        np.save(strain_path, w.strain())
        runs = {}
        for tag, bank in (("small", small), ("full", w.bank)):
            say(f"{w.name}: search with {len(bank)} templates ({threads} threads)")
            runs[tag] = search_in_child(strain_path, bank, w.sample_rate, w.settings, threads, tmp, tag)
    a, b = runs["small"], runs["full"]
    growth = b["peak_mib"] / a["peak_mib"]
    rows = [
        Measurement("w3_peak_rss_small_mib", f"{w.name} peak RSS, {len(small)} templates", round(a["peak_mib"], 1),
                    "MiB"),
        Measurement("w3_peak_rss_full_mib", f"{w.name} peak RSS, {len(w.bank)} templates", round(b["peak_mib"], 1),
                    "MiB", "<= 1024", bool(b["peak_mib"] <= 1024)),
        Measurement("w3_peak_rss_ratio", f"{w.name} peak RSS ratio, {len(w.bank)} / {len(small)} templates",
                    ratio(growth), "x", "within 10% of 1", bool(abs(growth - 1) < 0.10)),
        Measurement(f"w3_throughput_{threads}_threads", f"{w.name} search throughput, {threads} threads",
                    round(len(w.bank) * w.duration / b["wall"], 1), "template-s/s"),
    ]
    return rows, runs


def run(workloads=WORKLOADS, *, scale: float = 1.0, threads: int | None = None, repeats: int = 3,
        scaling_runs: int = SCALING_RUNS, slides: bool = True, bank: bool = True,
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
    scaling_runs : int, optional
        Paired 1-thread / n-thread runs behind the thread-scaling row; the table gives
        their median (judged against the target) and range.
    slides : bool, optional
        Also time the two-site time-slide background (10^6 triggers per site and
        10^5 slides at ``scale=1``).
    bank : bool, optional
        Also time the match kernel and place region (a) of the bank targets with a
        10^4-point coverage check (several minutes; a small region when ``scale < 1``).
    log : callable, optional
        Called with progress lines (e.g. ``print`` to stderr).

    Returns
    -------
    measurements : list of Measurement
    context : dict
        Machine, versions, date, thread count, workload descriptions.
    """
    say = log or (lambda msg: None)
    chosen = [str(x).upper() for x in workloads]
    for x in chosen:
        if x not in WORKLOADS:
            raise ValueError(f"unknown workload {x!r}; choose from {', '.join(WORKLOADS)}")
    n_threads = int(threads) if threads is not None else available_cpus()
    if n_threads < 1:
        raise ValueError(f"threads must be at least 1, got {threads}")
    context = run_context(n_threads)
    context.update(scale=scale, repeats=repeats, scaling_runs=scaling_runs, workloads={})
    rows: list[Measurement] = []
    previous = get_threads()
    try:
        set_threads(1)
        spectral = [workload(name, scale) for name in ("W1", "W2") if name in chosen]
        per_template: dict[str, float] = {}
        t_ifft = None
        if spectral:
            t_ifft, row = _measure_yardstick(spectral[0], context, say)
            rows.append(row)
        for w in spectral:
            context["workloads"][w.name] = w.description
            say(f"{w.name}: {w.description}")
            warm_up(w)
            fused_rows, per_template[w.name], single_result = _measure_fused(
                w, t_ifft, repeats, target=_FUSED_TARGET.get(w.name)
            )
            rows.extend(fused_rows)
            if w.name != "W1":
                continue
            rows.extend(_measure_search_fixed_cost(w, t_ifft, repeats, say))
            rows.extend(_measure_scaling(w, n_threads, scaling_runs, single_result, context, say))
            rows.append(_measure_reference(w, per_template["W1"], scale, say))
            rows.extend(_measure_generation(w, per_template["W1"], repeats, say))
        if "W1" in per_template and "W2" in per_template:
            rows.append(Measurement("w2_over_w1_per_template", "W2 / W1 fused per-template cost (1 thread)",
                                    ratio(per_template["W2"] / per_template["W1"]), "x"))
        if "W3" in chosen:
            w3 = workload("W3", scale)
            context["workloads"]["W3"] = w3.description + f", {w3.segment_duration:g} s segments"
            memory_rows, context["w3_runs"] = _measure_memory(w3, n_threads, say)
            rows.extend(memory_rows)
        if slides:
            rows.extend(_measure_slides(scale, say))
        if bank:
            rows.extend(measure_match(say, repeats))
            set_threads(n_threads)  # placement and coverage run on every thread, as users run them
            rows.extend(measure_placement(say, quick=scale < 1.0))
    finally:
        set_threads(previous)
    return rows, context
