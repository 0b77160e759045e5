"""Timing of the time-slide background: all slides at once against a slide-by-slide loop."""

from __future__ import annotations

import time
import tracemalloc

import numpy as np

from .coincidence import coincidences
from .sites import EXAMPLE_SITES, load_sites

__all__ = ["benchmark_slides", "synthetic_triggers"]

#: GPS start of the synthetic trigger sets (an arbitrary time in 2011).
BENCH_T0 = 1.0e9


def synthetic_triggers(n_triggers: int, duration: float, n_templates: int, *, seed: int = 0, t0: float = BENCH_T0):
    """Make a table of noise-like triggers spread uniformly over ``[t0, t0 + duration)``.

    Parameters
    ----------
    n_triggers : int
    duration : float
        Seconds.
    n_templates : int
        Templates drawn uniformly; template ``k`` has masses ``(10 + k / n_templates, 10)``.
    seed : int
        Seed of :func:`numpy.random.default_rng`.
    t0 : float
        GPS start (s).

    Returns
    -------
    numpy.ndarray
        Sorted by time, with :data:`chirpsift.TRIGGER_DTYPE`; SNRs are ``5 + Exp(1)`` and
        the reweighted SNR equals the SNR.

    Examples
    --------
    >>> from chirpsift.network.bench import synthetic_triggers
    >>> t = synthetic_triggers(1000, 3600.0, 10, seed=1)
    >>> len(t), bool(t["time"].min() >= 1e9)
    (1000, True)
    """
    from chirpsift import TRIGGER_DTYPE

    rng = np.random.default_rng(seed)
    out = np.zeros(n_triggers, dtype=TRIGGER_DTYPE)
    out["time"] = np.sort(t0 + rng.uniform(0.0, duration, n_triggers))
    out["template"] = rng.integers(0, n_templates, n_triggers)
    out["snr"] = 5.0 + rng.exponential(1.0, n_triggers)
    out["reweighted_snr"] = out["snr"]
    out["chi2_dof"] = 30
    out["m1"] = 10.0 + out["template"] / n_templates
    out["m2"] = 10.0
    return out


def _run(triggers, sites, analysed, n_slides, step, peak_window, method):
    tracemalloc.start()
    start = time.perf_counter()
    cands, bg, info = coincidences(triggers, sites, analysed=analysed, n_slides=n_slides, slide_step=step,
                                   peak_window=peak_window, method=method, full_output=True)
    wall = time.perf_counter() - start
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return cands, bg, info, wall, peak


def benchmark_slides(
    n_triggers: int = 1_000_000,
    n_slides: int = 100_000,
    n_templates: int = 2_000,
    *,
    slide_step: float = 3.0,
    peak_window: float = 1.0,
    small_triggers: int = 20_000,
    small_slides: int = 200,
    seed: int = 0,
) -> dict:
    """Time the time-slide background of two sites, all at once and slide by slide.

    The large case runs all at once; a small case runs both ways (the two must agree bit
    for bit).

    Parameters
    ----------
    n_triggers : int
        Triggers per site of the large case.
    n_slides : int
        Slides of the large case; the analysed time is ``(n_slides + 1) * slide_step``
        seconds, just enough for them.
    n_templates : int
        Templates the triggers are spread over.
    slide_step, peak_window : float
        Seconds.
    small_triggers, small_slides : int
        Size of the case timed both ways.
    seed : int

    Returns
    -------
    dict
        ``large`` and ``small`` entries, each with the case's sizes, ``wall_s`` (all at
        once), ``peak_traced_mib`` (peak memory numpy and Python allocated during the
        call), ``input_mib`` and ``output_mib`` (trigger and result tables) and
        ``background`` (coincidences found); ``small`` adds ``loop_wall_s`` and
        ``identical`` (the two methods' results are equal bit for bit), and ``speedup``.

    Notes
    -----
    Two of the invented example sites (Kestrel, Heron); triggers are uniform in time.
    Times are wall-clock seconds of one process; numpy's sorts and searches run on one
    core.

    Examples
    --------
    >>> from chirpsift.network import benchmark_slides
    >>> r = benchmark_slides(20_000, 1_000, 200, small_triggers=2_000, small_slides=20)
    >>> r["small"]["identical"]
    True
    """
    all_sites = load_sites(EXAMPLE_SITES)
    sites = [all_sites["Kestrel"], all_sites["Heron"]]
    for s in sites:
        s.position  # noqa: B018 - computed (astropy imported) before any timing
    out = {}
    for label, n_trig, slides in (("small", small_triggers, small_slides), ("large", n_triggers, n_slides)):
        duration = (slides + 1) * slide_step
        triggers = {s.name: synthetic_triggers(n_trig, duration, n_templates, seed=seed + k)
                    for k, s in enumerate(sites)}
        analysed = {s.name: np.array([[BENCH_T0, BENCH_T0 + duration]]) for s in sites}
        cands, bg, _info, wall, peak = _run(triggers, sites, analysed, slides, slide_step, peak_window, "all-at-once")
        entry = {
            "sites": 2,
            "triggers_per_site": n_trig,
            "templates": n_templates,
            "slides": slides,
            "slide_step_s": slide_step,
            "analysed_s": duration,
            "background": int(bg.size),
            "candidates": int(cands.size),
            "wall_s": wall,
            "peak_traced_mib": peak / 2**20,
            "input_mib": sum(t.nbytes for t in triggers.values()) / 2**20,
            "output_mib": (bg.nbytes + cands.nbytes) / 2**20,
        }
        if label == "small":
            c2, b2, _, loop_wall, _ = _run(triggers, sites, analysed, slides, slide_step, peak_window, "slide-by-slide")
            entry["loop_wall_s"] = loop_wall
            entry["identical"] = bool(bg.tobytes() == b2.tobytes() and cands.tobytes() == c2.tobytes())
            entry["speedup"] = loop_wall / wall
        out[label] = entry
    return out
