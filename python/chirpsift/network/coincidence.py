"""Multi-site coincidences, their time-slide background and false-alarm rates."""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping, Sequence

import numpy as np

from .._validate import nonnegative_scalar, positive_scalar
from .far import YEAR, false_alarm_rate
from .sites import Site, light_travel_time
from .slides import (
    NS,
    Ring,
    SiteTriggers,
    assemble,
    cluster_by_slide,
    reference_positions,
    site_values,
    slide_pairs,
    slide_pairs_loop,
    to_ns,
    zero_lag_pairs,
)
from .statistic import network_statistic

__all__ = [
    "CAUTIONS",
    "DEFAULT_ALLOWANCE",
    "DEFAULT_PEAK_WINDOW",
    "TIME_SLACK",
    "background_dtype",
    "candidate_dtype",
    "coincidences",
]

#: Default timing allowance (s) added to every pair's light travel time; see `coincidences`.
DEFAULT_ALLOWANCE = 0.005
#: Default half-width (s) of the triggers' own clustering (``search``'s default ``peak_window``).
DEFAULT_PEAK_WINDOW = 1.0
#: How far (s) a trigger may sit outside its site's analysed intervals: peak refinement
#: moves a time by up to a sample.
TIME_SLACK = 0.1
#: Trigger fields the coincidence search reads.
REQUIRED_FIELDS = ("time", "template", "snr", "phase", "chi2", "reweighted_snr", "m1", "m2")
#: Per-site fields of the candidate table (and their source fields).
SITE_FIELDS = (("time", "f8"), ("snr", "f4"), ("chi2", "f4"), ("reweighted_snr", "f4"), ("phase", "f4"))

#: Printed with every summary of candidates, and in the README.
CAUTIONS = (
    "Cautions: false-alarm rates from time slides assume the noise is stationary and independent "
    "between sites over the time used; they cannot go below one per background live time (the "
    "background's reach); and a detection claim needs far more validation than this tool does."
)


def candidate_dtype(site_names) -> np.dtype:
    """Fields of the candidate table for these sites (see :func:`coincidences`).

    Examples
    --------
    >>> from chirpsift.network import candidate_dtype
    >>> candidate_dtype(["Kestrel"]).names[:7]
    ('time', 'template', 'statistic', 'far', 'ifar', 'Kestrel_time', 'Kestrel_snr')
    """
    fields = [("time", "f8"), ("template", "i4"), ("statistic", "f8"), ("far", "f8"), ("ifar", "f8")]
    for name in site_names:
        fields += [(f"{name}_{f}", t) for f, t in SITE_FIELDS]
    return np.dtype(fields)


def background_dtype(site_names) -> np.dtype:
    """Fields of the background table for these sites (see :func:`coincidences`).

    Examples
    --------
    >>> from chirpsift.network import background_dtype
    >>> background_dtype(["Kestrel", "Heron"]).names
    ('slide', 'time', 'template', 'statistic', 'Kestrel_trigger', 'Heron_trigger')
    """
    fields = [("slide", "i4"), ("time", "f8"), ("template", "i4"), ("statistic", "f8")]
    fields += [(f"{name}_trigger", "i8") for name in site_names]
    return np.dtype(fields)


def _describe(x) -> str:
    text = repr(x)
    return text if len(text) <= 80 else text[:77] + "..."


# ---------------------------------------------------------------------------
# input checks
# ---------------------------------------------------------------------------
def _check_sites(sites) -> list[Site]:
    if isinstance(sites, Mapping):
        items = list(sites.values())
        for key, s in sites.items():
            if isinstance(s, Site) and key != s.name:
                raise ValueError(f"sites maps the key {key!r} to a site named {s.name!r}")
    elif isinstance(sites, Sequence) and not isinstance(sites, (str, bytes)):
        items = list(sites)
    else:
        raise TypeError(f"sites must be a sequence or mapping of chirpsift.Site, got {_describe(sites)}")
    for s in items:
        if not isinstance(s, Site):
            raise TypeError(f"sites must hold chirpsift.Site objects, got {_describe(s)}")
    names = [s.name for s in items]
    if len(items) < 2:
        raise ValueError(f"coincidences need at least two sites, got {len(items)}: {names}")
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise ValueError(f"sites holds the name {dup[0]!r} more than once")
    return items


def _check_table(name: str, table) -> np.ndarray:
    if not isinstance(table, np.ndarray) or table.dtype.names is None:
        raise TypeError(
            f"triggers[{name!r}] must be a structured array as chirpsift.search returns, got {_describe(table)}"
        )
    if table.ndim != 1:
        raise ValueError(f"triggers[{name!r}] must be 1-D, got shape {table.shape}")
    missing = [f for f in REQUIRED_FIELDS if f not in table.dtype.names]
    if missing:
        raise ValueError(f"triggers[{name!r}] lacks the field {missing[0]!r} (fields: {', '.join(table.dtype.names)})")
    if table.dtype["template"].kind not in "iu":
        raise TypeError(f"triggers[{name!r}] field 'template' must be integer, got {table.dtype['template']}")
    for field in ("time", "reweighted_snr"):
        values = np.asarray(table[field], dtype=np.float64)
        bad = ~np.isfinite(values)
        if bad.any():
            i = int(np.argmax(bad))
            raise ValueError(f"triggers[{name!r}] field {field!r} must be finite, found {values[i]} at row {i}")
    if table.size and np.min(table["reweighted_snr"]) < 0:
        i = int(np.argmin(table["reweighted_snr"]))
        raise ValueError(f"triggers[{name!r}] has a negative reweighted_snr {table['reweighted_snr'][i]} at row {i}")
    if table.size and np.min(table["template"]) < 0:
        i = int(np.argmin(table["template"]))
        raise ValueError(f"triggers[{name!r}] has a negative template {table['template'][i]} at row {i}")
    return table


def _check_intervals(name: str, value) -> np.ndarray:
    try:
        a = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise TypeError(
            f"analysed[{name!r}] must be a (k, 2) array of [start, end) seconds, got {_describe(value)}"
        ) from None
    if a.ndim != 2 or a.shape[1] != 2:
        raise ValueError(f"analysed[{name!r}] must have shape (k, 2) of [start, end) seconds, got shape {a.shape}")
    if not np.all(np.isfinite(a)):
        raise ValueError(f"analysed[{name!r}] must be finite, got {a[~np.isfinite(a).all(axis=1)][0].tolist()}")
    bad = a[:, 1] <= a[:, 0]
    if bad.any():
        raise ValueError(f"analysed[{name!r}] has an interval that does not end after it starts: {a[bad][0].tolist()}")
    a = a[np.argsort(a[:, 0], kind="stable")]
    merged: list[list[float]] = []
    for start, end in a:
        if merged and start <= merged[-1][1]:
            merged[-1][1] = max(merged[-1][1], end)
        else:
            merged.append([start, end])
    return np.array(merged, dtype=np.float64).reshape(-1, 2)


def _outside(times: np.ndarray, intervals: np.ndarray, slack: float) -> np.ndarray:
    """Mask of times farther than ``slack`` from every interval."""
    i = np.searchsorted(intervals[:, 0], times, side="right") - 1
    ok_prev = (i >= 0) & (times < intervals[np.maximum(i, 0), 1] + slack)
    j = np.minimum(i + 1, len(intervals) - 1)
    ok_next = times >= intervals[j, 0] - slack
    return ~(ok_prev | ok_next)


def _intersect(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    out = []
    i = j = 0
    while i < len(a) and j < len(b):
        lo, hi = max(a[i, 0], b[j, 0]), min(a[i, 1], b[j, 1])
        if hi > lo:
            out.append((lo, hi))
        if a[i, 1] < b[j, 1]:
            i += 1
        else:
            j += 1
    return np.array(out, dtype=np.float64).reshape(-1, 2)


def _check_templates(tables: dict[str, np.ndarray]) -> None:
    """Check that a template number means the same masses (and spins) at every site."""
    fields = [f for f in ("m1", "m2", "spin1", "spin2") if all(f in t.dtype.names for t in tables.values())]
    tid = np.concatenate([np.asarray(t["template"], dtype=np.int64) for t in tables.values()])
    if tid.size == 0:
        return
    site = np.concatenate([np.full(len(t), k) for k, t in enumerate(tables.values())])
    values = {f: np.concatenate([np.asarray(t[f], dtype=np.float64) for t in tables.values()]) for f in fields}
    order = np.argsort(tid, kind="stable")
    first = np.ones(tid.size, dtype=bool)
    first[1:] = tid[order][1:] != tid[order][:-1]
    group_first = order[np.maximum.accumulate(np.where(first, np.arange(tid.size), 0))]
    names = list(tables)
    for f in fields:
        differ = values[f][order] != values[f][group_first]
        if differ.any():
            k = int(np.argmax(differ))
            a, b = group_first[k], order[k]
            raise ValueError(
                f"template {tid[a]} has {f}={values[f][a]} at site {names[site[a]]!r} but {f}={values[f][b]} "
                f"at site {names[site[b]]!r}: the sites must be searched with the same bank"
            )


# ---------------------------------------------------------------------------
# the search
# ---------------------------------------------------------------------------
def coincidences(
    triggers,
    sites,
    *,
    analysed,
    n_slides=0,
    slide_step=None,
    window=None,
    peak_window=None,
    method="all-at-once",
    full_output=False,
):
    """Candidates seen at two or more sites, their time-slide background and false-alarm rates.

    Parameters
    ----------
    triggers : Mapping
        Site name to that site's trigger table, a structured array as
        :func:`chirpsift.search` returns it (fields ``time``, ``template``, ``snr``,
        ``phase``, ``chi2``, ``reweighted_snr``, ``m1``, ``m2`` are read). Every site
        needs an entry (an empty table is fine); template numbers must mean the same
        template at every site.
    sites : sequence or mapping of Site
        Two or more sites; their order fixes the reference site (the first) and the
        slide of each (below).
    analysed : Mapping
        Site name to its analysed intervals, a ``(k, 2)`` array of ``[start, end)`` GPS
        seconds (``search(..., full_output=True)`` reports them as ``info["analysed"]``).
        Every trigger must lie inside them (to within ``TIME_SLACK`` = 0.1 s).
    n_slides : int, optional
        Number of time slides of the background (0: zero lag only, ``far`` is NaN).
    slide_step : float, optional
        Seconds between slides. Must exceed both the largest coincidence window plus
        twice ``peak_window`` and twice the largest window. Default: the smallest whole
        number of seconds above those.
    window : float, optional
        Timing allowance (s) added to the light travel time of every pair of sites to
        form its coincidence window; default ``DEFAULT_ALLOWANCE`` = 5 ms (Notes).
    peak_window : float, optional
        Half-width (s) of the clustering the triggers went through (``search``'s
        ``peak_window``, default 1 s); candidates of one slide are clustered across
        templates with it too.
    method : {"all-at-once", "slide-by-slide"}, optional
        How the background is found. Both give the same result bit for bit;
        ``"slide-by-slide"`` costs time in proportion to ``n_slides`` and is kept as the
        reference the fast method is checked against.
    full_output : bool, optional
        Also return a dict of run information (windows, live times, slides).

    Returns
    -------
    candidates : numpy.ndarray
        Zero-lag candidates, loudest first, with fields (:func:`candidate_dtype`):
        ``time`` (s, the trigger time at the first listed site that took part),
        ``template``, ``statistic`` (:func:`chirpsift.network.statistic.network_statistic`),
        ``far`` (per year), ``ifar`` (years, ``1 / far``) and per site
        ``<site>_time``, ``<site>_snr``, ``<site>_chi2``, ``<site>_reweighted_snr``,
        ``<site>_phase``, NaN for a site without a trigger in the candidate.
    background : numpy.ndarray
        Coincidences of the time slides, ordered by slide then time, with fields
        ``slide`` (1..n_slides), ``time`` (s, the first taking-part site's trigger time
        moved by its slide), ``template``, ``statistic`` and ``<site>_trigger`` (the
        row of that site's table, -1 if absent). Empty when ``n_slides`` is 0.
    info : dict, only if ``full_output``
        ``sites``, ``windows`` (s, per pair), ``allowance``, ``peak_window``,
        ``slide_step``, ``n_slides``, ``common`` (intervals analysed by all sites),
        ``live_time`` (s of common time), ``background_time`` (s), ``excluded``
        (triggers per site outside the common time), ``far_bound`` (bool per candidate:
        no background as loud, ``far`` is the bound ``1 / background_time``).

    Notes
    -----
    *Coincidence.* Triggers of the same template at two or more sites form a candidate
    when every two of them are within the pair's light travel time plus the allowance.
    With three or more sites a candidate may be seen by any subset of two or more; a
    site without a trigger adds nothing to the statistic (it was below its threshold),
    and a pair that belongs to a coincident triple is not reported on its own. Only
    time analysed by all the given sites at once (the *common time*) is used; triggers
    elsewhere are set aside (counted in ``info["excluded"]``). Within each slide,
    candidates are then clustered across templates: one is kept only if no louder one
    lies within ``peak_window``.

    *Allowance.* The arrival-time error of a trigger is about
    ``1 / (2 pi rho sigma_f)`` (Fairhurst 2009 [1]_), ``sigma_f`` the signal's
    frequency spread: 0.23 ms at SNR 8 for a 1.4+1.4 Msun signal in a second-generation
    design spectrum, up to about 1.6 ms at SNR 5 for a band as narrow as 20 Hz (heavy
    templates). A pair's difference has sqrt(2) times that; 5 ms covers it with a margin
    for the search's peak interpolation between samples.

    *Time slides.* Common time is laid end to end into a ring of ``L`` seconds; in slide
    ``k`` the site at position ``j`` of ``sites`` moves ``k j slide_step`` around it,
    so every slide has the same live time ``L`` and the background live time is
    ``n_slides L``. Zero lag (``k = 0``) is never part of the background, and
    ``n_slides (n_sites - 1) slide_step`` may not exceed ``L - slide_step``, so no slide
    repeats another or comes back to zero lag. All slides are found at once (see
    :mod:`chirpsift.network.slides`); the cost does not grow with ``n_slides``.

    *False-alarm rate.* ``far`` is the number of background coincidences with a
    statistic at least the candidate's, over the background live time, per year
    (Julian, 365.25 days); with none as loud, ``far = 1 / background time``, an upper
    bound (the background's reach), never 0. These rates assume stationary noise
    independent between sites, and a detection claim needs far more validation than
    this (``CAUTIONS``).

    References
    ----------
    .. [1] S. Fairhurst, New J. Phys. 11, 123006 (2009), arXiv:0908.2356.
    .. [2] S. Babak et al., Phys. Rev. D 87, 024033 (2013), arXiv:1208.3491.
    .. [3] S. A. Usman et al., Class. Quantum Grav. 33, 215004 (2016), arXiv:1508.02357.

    Examples
    --------
    >>> import numpy as np, chirpsift
    >>> from chirpsift import load_sites, coincidences
    >>> from chirpsift.network import EXAMPLE_SITES
    >>> sites = load_sites(EXAMPLE_SITES)
    >>> kestrel, heron = sites["Kestrel"], sites["Heron"]
    >>> def table(times, rw):
    ...     t = np.zeros(len(times), dtype=chirpsift.TRIGGER_DTYPE)
    ...     t["time"], t["snr"], t["reweighted_snr"], t["m1"], t["m2"] = times, rw, rw, 10.0, 10.0
    ...     return t
    >>> trig = {"Kestrel": table([1000.0, 1500.0], [9.0, 6.0]), "Heron": table([1000.004, 1800.0], [8.0, 6.5])}
    >>> cands, bg = coincidences(trig, [kestrel, heron], analysed={"Kestrel": [[0, 3600]], "Heron": [[0, 3600]]},
    ...                          n_slides=100, slide_step=10.0)
    >>> len(cands), round(float(cands["statistic"][0]), 3), float(cands["Heron_time"][0])
    (1, 12.042, 1000.004)
    >>> bg["slide"].tolist(), bg["Kestrel_trigger"].tolist(), bg["Heron_trigger"].tolist()
    ([50], [1], [0])

    Heron moves 10 s further round the 3,600 s ring per slide: in slide 50 its trigger at
    1000.004 s sits at 1500.004 s, 4 ms from Kestrel's second trigger.
    """
    site_list = _check_sites(sites)
    names = [s.name for s in site_list]
    if not isinstance(triggers, Mapping):
        raise TypeError(f"triggers must be a mapping of site name to trigger table, got {_describe(triggers)}")
    if not isinstance(analysed, Mapping):
        raise TypeError(f"analysed must be a mapping of site name to (k, 2) intervals, got {_describe(analysed)}")
    for what, mapping in (("triggers", triggers), ("analysed", analysed)):
        unknown = [k for k in mapping if k not in names]
        if unknown:
            raise ValueError(f"{what} names a site {unknown[0]!r} that is not among the sites {names}")
        absent = [n for n in names if n not in mapping]
        if absent:
            raise ValueError(f"{what} has no entry for site {absent[0]!r}")
    tables = {n: _check_table(n, triggers[n]) for n in names}
    intervals = {n: _check_intervals(n, analysed[n]) for n in names}
    for n in names:
        t = np.asarray(tables[n]["time"], dtype=np.float64)
        if t.size and intervals[n].size == 0:
            raise ValueError(f"analysed[{n!r}] is empty but site {n!r} has {t.size} triggers")
        if t.size:
            out = _outside(t, intervals[n], TIME_SLACK)
            if out.any():
                i = int(np.argmax(out))
                raise ValueError(
                    f"triggers[{n!r}] has a trigger at t={t[i]!r} s outside the site's analysed intervals "
                    f"(first {intervals[n][0].tolist()}, last {intervals[n][-1].tolist()}); "
                    "analysed time and triggers must come from the same run"
                )
    _check_templates(tables)
    if method not in ("all-at-once", "slide-by-slide"):
        raise ValueError(f"method must be 'all-at-once' or 'slide-by-slide', got {_describe(method)}")
    allowance = DEFAULT_ALLOWANCE if window is None else nonnegative_scalar("window", window)
    pw = DEFAULT_PEAK_WINDOW if peak_window is None else nonnegative_scalar("peak_window", peak_window)

    # coincidence windows per pair of sites
    windows = {}
    for (i, a), (j, b) in itertools.combinations(enumerate(site_list), 2):
        tau = light_travel_time(a, b)
        if tau <= allowance:
            raise ValueError(
                f"sites {a.name!r} and {b.name!r} are {tau * 1e3:.3g} ms of light apart, not more than the timing "
                f"allowance window={allowance:g} s: coincidence cannot tell a signal from local noise "
                "at sites this close"
            )
        windows[(i, j)] = tau + allowance
    w_ns = {pair: to_ns(w) for pair, w in windows.items()}
    w_max = max(windows.values())

    # common time and the ring
    common = intervals[names[0]]
    for n in names[1:]:
        common = _intersect(common, intervals[n])
    t_ref = float(common[0, 0]) if common.size else 0.0
    ring = Ring.from_intervals(common, t_ref)
    length = ring.length
    live_time = length / NS

    n_slides_i = _check_n_slides(n_slides)
    step = math.nan
    if n_slides_i:
        minimum = max(w_max + 2 * pw, 2 * w_max)
        step = float(math.floor(minimum) + 1) if slide_step is None else positive_scalar("slide_step", slide_step)
        step_ns = to_ns(step)
        if not (step_ns > to_ns(w_max) + 2 * to_ns(pw) and step_ns > 2 * max(w_ns.values())):
            raise ValueError(
                f"slide_step={step:g} s is too small: it must exceed the largest coincidence window "
                f"({w_max:.4g} s) plus twice peak_window={pw:g} s, and twice that window: more than {minimum:.4g} s"
            )
        most = (length // step_ns - 1) // (len(site_list) - 1) if length else 0
        if n_slides_i > most:
            raise ValueError(
                f"n_slides={n_slides_i} slides of slide_step={step:g} s do not fit in the {live_time:g} s "
                f"analysed by all sites at once: at most {max(most, 0)} (each slide moves site number j by "
                "j * slide_step per slide, and no slide may come back to zero lag)"
            )
    else:
        step_ns = 0

    # the triggers in common time, with templates numbered densely across sites
    all_templates = np.concatenate([np.asarray(tables[n]["template"], dtype=np.int64) for n in names])
    labels, dense = np.unique(all_templates, return_inverse=True)
    dense = dense.ravel()
    prepared, excluded, offset = [], {}, 0
    for n in names:
        tab = tables[n]
        t = np.asarray(tab["time"], dtype=np.float64)
        t_ns = np.rint((t - t_ref) * NS).astype(np.int64)
        u, inside = ring.locate(t_ns)
        tmpl = dense[offset:offset + t.size]
        offset += t.size
        rows = np.flatnonzero(inside)
        excluded[n] = int(t.size - rows.size)
        prepared.append(SiteTriggers(
            t=t[rows], t_ns=t_ns[rows], u=u[rows], template=tmpl[rows].astype(np.int64),
            rw=np.asarray(tab["reweighted_snr"], dtype=np.float64)[rows], row=rows.astype(np.int64),
        ))
    sizes = [len(p) for p in prepared]
    pairs_of = list(windows)
    pw_ns = to_ns(pw)

    # zero lag
    zl = {(i, j): zero_lag_pairs(prepared[i], prepared[j], w_ns[(i, j)]) for i, j in pairs_of}
    z_slide, z_rows = assemble(zl, len(names), sizes)
    z_stat = network_statistic(site_values(z_rows, prepared, "rw"))
    z_time_ns = _first_present(z_rows, prepared, "t_ns")
    keep = cluster_by_slide(z_slide, z_time_ns, z_stat, pw_ns, z_rows)
    z_rows, z_stat = z_rows[keep], z_stat[keep]

    # background
    if n_slides_i:
        if method == "all-at-once":
            sp = {(i, j): slide_pairs(prepared[i], prepared[j], i, j, w_ns[(i, j)], step_ns, length, n_slides_i)
                  for i, j in pairs_of}
            b_slide, b_rows, b_stat, b_time = _slide_table(sp, prepared, ring, step_ns, pw_ns)
        else:
            parts = []
            for k in range(1, n_slides_i + 1):
                sp = {(i, j): slide_pairs_loop(prepared[i], prepared[j], i, j, w_ns[(i, j)], step_ns, length, k)
                      for i, j in pairs_of}
                parts.append(_slide_table(sp, prepared, ring, step_ns, pw_ns))
            b_slide, b_rows, b_stat, b_time = (np.concatenate([p[c] for p in parts]) for c in range(4))
        background_time = n_slides_i * live_time
        far, bound = false_alarm_rate(z_stat, b_stat, background_time)
    else:
        b_slide = np.zeros(0, dtype=np.int64)
        b_rows = np.zeros((0, len(names)), dtype=np.int64)
        b_stat = np.zeros(0)
        b_time = np.zeros(0, dtype=np.int64)
        background_time = 0.0
        far, bound = np.full(z_stat.shape, np.nan), np.zeros(z_stat.shape, dtype=bool)

    # tables
    cand = np.zeros(z_stat.size, dtype=candidate_dtype(names))
    cand["time"] = _first_present(z_rows, prepared, "t", fill=np.nan)
    cand["template"] = labels[_first_present(z_rows, prepared, "template")]
    cand["statistic"] = z_stat
    cand["far"] = far
    with np.errstate(divide="ignore"):
        cand["ifar"] = 1.0 / far
    for col, n in enumerate(names):
        present = z_rows[:, col] >= 0
        src = tables[n][prepared[col].row[z_rows[present, col]]]
        for field, _ in SITE_FIELDS:
            column = np.full(z_stat.size, np.nan)
            column[present] = src[field]
            cand[f"{n}_{field}"] = column
    rank = np.lexsort((cand["time"], -cand["statistic"]))
    cand, bound = cand[rank], bound[rank]

    bg = np.zeros(b_stat.size, dtype=background_dtype(names))
    bg["slide"] = b_slide
    bg["time"] = t_ref + b_time / NS
    bg["template"] = labels[_first_present(b_rows, prepared, "template")] if b_stat.size else 0
    bg["statistic"] = b_stat
    for col, n in enumerate(names):
        present = b_rows[:, col] >= 0
        column = np.full(b_stat.size, -1, dtype=np.int64)
        column[present] = prepared[col].row[b_rows[present, col]]
        bg[f"{n}_trigger"] = column
    if not full_output:
        return cand, bg
    info = {
        "sites": names,
        "windows": {f"{names[i]}-{names[j]}": w for (i, j), w in windows.items()},
        "allowance": allowance,
        "peak_window": pw,
        "slide_step": step,
        "n_slides": n_slides_i,
        "common": common.tolist(),
        "live_time": live_time,
        "background_time": background_time,
        "background_time_years": background_time / YEAR,
        "excluded": excluded,
        "far_bound": bound,
        "method": method,
    }
    return cand, bg, info


def _check_n_slides(n_slides) -> int:
    if isinstance(n_slides, (bool, np.bool_)) or not isinstance(n_slides, (int, np.integer)):
        raise TypeError(f"n_slides must be an integer, got {_describe(n_slides)}")
    if n_slides < 0:
        raise ValueError(f"n_slides must be >= 0, got {n_slides}")
    return int(n_slides)


def _first_present(rows: np.ndarray, sites: list[SiteTriggers], field: str, fill=-1):
    """Return a per-trigger field of each coincidence's first listed site that took part."""
    dtype = getattr(sites[0], field).dtype
    out = np.full(rows.shape[0], fill, dtype=dtype)
    for col in range(len(sites) - 1, -1, -1):
        present = rows[:, col] >= 0
        out[present] = getattr(sites[col], field)[rows[present, col]]
    return out


def _slide_table(pairs, prepared, ring: Ring, step_ns: int, pw_ns: int):
    """Assemble, rank and cluster slide coincidences: (slide, rows, statistic, time ns)."""
    slide, rows = assemble(pairs, len(prepared), [len(p) for p in prepared])
    stat = network_statistic(site_values(rows, prepared, "rw"))
    u = reference_positions(rows, slide, prepared, step_ns, ring.length)
    time_ns = ring.time_of(u) if u.size else u
    keep = cluster_by_slide(slide, time_ns, stat, pw_ns, rows)
    return slide[keep], rows[keep], stat[keep], time_ns[keep]
