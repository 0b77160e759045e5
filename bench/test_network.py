"""pytest-benchmark group ``slides``: the time-slide background of two sites, all slides
at once against the slide-by-slide loop on a small case, and the all-at-once method on
the target case (10^6 triggers per site, 10^5 slides; target: under one minute on two
cores, memory proportional to triggers plus coincidences).

Each benchmark records ``per`` = slides, so ``bench/ratios.py`` prints the time per
slide. ``chirpsift.network.benchmark_slides`` measures the same cases for a table.
"""

import numpy as np
import pytest
from chirpsift.network import EXAMPLE_SITES, coincidences, load_sites
from chirpsift.network.bench import BENCH_T0, synthetic_triggers

#: (triggers per site, slides, templates) of the two cases.
SMALL = (20_000, 200, 2_000)
TARGET = (1_000_000, 100_000, 2_000)
STEP = 3.0


def _case(n_triggers, n_slides, n_templates):
    sites = load_sites(EXAMPLE_SITES)
    pair = [sites["Kestrel"], sites["Heron"]]
    for s in pair:
        s.position  # noqa: B018 - astropy's first use outside the timing
    duration = (n_slides + 1) * STEP
    trig = {s.name: synthetic_triggers(n_triggers, duration, n_templates, seed=k) for k, s in enumerate(pair)}
    analysed = {s.name: np.array([[BENCH_T0, BENCH_T0 + duration]]) for s in pair}
    return trig, pair, analysed, n_slides


def _record(benchmark, role, slides, label):
    benchmark.extra_info.update({"role": role, "per": int(slides), "n": int(slides), "label": label})


@pytest.fixture(scope="module")
def small():
    return _case(*SMALL)


@pytest.mark.benchmark(group="slides")
def test_small_all_at_once(benchmark, small):
    trig, pair, analysed, n = small
    _record(benchmark, "all-at-once", n, f"all at once, {SMALL[0]} triggers/site, {n} slides")
    out = benchmark(lambda: coincidences(trig, pair, analysed=analysed, n_slides=n, slide_step=STEP))
    loop = coincidences(trig, pair, analysed=analysed, n_slides=n, slide_step=STEP, method="slide-by-slide")
    assert out[1].tobytes() == loop[1].tobytes() and out[0].tobytes() == loop[0].tobytes()


@pytest.mark.benchmark(group="slides")
def test_small_slide_by_slide(benchmark, small):
    trig, pair, analysed, n = small
    _record(benchmark, "loop", n, f"slide by slide, {SMALL[0]} triggers/site, {n} slides")
    benchmark.pedantic(lambda: coincidences(trig, pair, analysed=analysed, n_slides=n, slide_step=STEP,
                                            method="slide-by-slide"), rounds=3, iterations=1)


@pytest.mark.benchmark(group="slides")
def test_target_all_at_once(benchmark):
    trig, pair, analysed, n = _case(*TARGET)
    _record(benchmark, "all-at-once", n, f"all at once, {TARGET[0]} triggers/site, {n} slides")
    _, bg = benchmark.pedantic(lambda: coincidences(trig, pair, analysed=analysed, n_slides=n, slide_step=STEP),
                               rounds=1, iterations=1)
    benchmark.extra_info["background"] = int(bg.size)
