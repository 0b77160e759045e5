"""Injection campaigns: which simulated signals a search finds, how loud, how significant.

The data are searched with the signals added and with the analysis's own settings.

The found/missed table (:func:`found_missed`) has one row per injection: the injection's
parameters (:data:`chirpsift.inject.INJECTION_DTYPE`), then

``analysed`` (bool)
    the coalescence time at every site lies inside that site's analysed time, so the
    search could have found it; efficiencies and volumes should count only these rows,
``<site>_optimal_snr`` (float64)
    optimal SNR at each site from its PSD (:func:`chirpsift.injection_snr`),
``network_optimal_snr`` (float64)
    their quadrature sum,
``found`` (bool)
    a candidate was matched and passes the threshold (:func:`match_injections`),
``statistic``, ``far`` (per year), ``ifar`` (years), ``recovered_time`` (s), ``template``
    of the matched candidate (NaN, NaN, 0, NaN and -1 when none).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from .._validate import nonnegative_scalar, real_array
from .population import INJECTION_DTYPE, injection_table

__all__ = ["MATCH_WINDOW", "CampaignResult", "analysed_mask", "found_missed", "found_missed_dtype",
           "match_injections", "run_campaign"]

#: Default half-width (s) of the window around an injection's geocentric coalescence time
#: in which a candidate is taken as its recovery: the largest geocentric delay
#: (Earth radius / c = 21 ms) plus the time offset of a near-miss template (a
#: mass mismatch shifts the SNR peak by up to a few tens of ms), with room to spare; far
#: below the search's clustering window (1 s), so a signal is never matched to a
#: neighbour's candidate.
MATCH_WINDOW = 0.1


def found_missed_dtype(site_names) -> np.dtype:
    """Give the dtype of the found/missed table for the given site names (module notes)."""
    fields = list(INJECTION_DTYPE.descr) + [("analysed", "?")]
    fields += [(f"{name}_optimal_snr", "f8") for name in site_names]
    fields += [("network_optimal_snr", "f8"), ("found", "?"), ("statistic", "f8"), ("far", "f8"), ("ifar", "f8"),
               ("recovered_time", "f8"), ("template", "i4")]
    return np.dtype(fields)


def match_injections(times, candidate_times, candidate_statistic, *, window=MATCH_WINDOW) -> np.ndarray:
    """Index of the candidate that recovers each injection, or -1.

    Parameters
    ----------
    times : array_like, shape (n,)
        Injection times (s), e.g. geocentric coalescence times.
    candidate_times : array_like, shape (m,)
        Candidate times (s), in the same frame.
    candidate_statistic : array_like, shape (m,)
        Ranking statistic of each candidate.
    window : float, optional
        Half-width (s) of the matching window, :data:`MATCH_WINDOW` by default.

    Returns
    -------
    ndarray of int64, shape (n,)
        For each injection, the candidate with the largest statistic among those within
        ``|t_candidate - t_injection| <= window``; -1 if there is none.
    """
    t = real_array("times", times, ndim=1, allow_empty=True)
    ct = real_array("candidate_times", candidate_times, ndim=1, allow_empty=True)
    cs_ = real_array("candidate_statistic", candidate_statistic, ndim=1, allow_empty=True, finite=False)
    if cs_.shape != ct.shape:
        raise ValueError(f"candidate_statistic must have one value per candidate ({ct.size}), got {cs_.size}")
    w = nonnegative_scalar("window", window)
    out = np.full(t.size, -1, dtype=np.int64)
    if ct.size == 0 or t.size == 0:
        return out
    order = np.argsort(ct, kind="stable")
    sorted_t = ct[order]
    lo = np.searchsorted(sorted_t, t - w, side="left")
    hi = np.searchsorted(sorted_t, t + w, side="right")
    for i in np.flatnonzero(hi > lo):
        idx = order[lo[i]:hi[i]]
        stat = np.where(np.isnan(cs_[idx]), -np.inf, cs_[idx])
        out[i] = idx[int(np.argmax(stat))]
    return out


def analysed_mask(times, intervals) -> np.ndarray:
    """Whether each time lies in one of the ``[start, end)`` intervals (a (k, 2) array, s)."""
    t = real_array("times", times, ndim=1, allow_empty=True)
    iv = real_array("analysed", intervals, ndim=2, allow_empty=True).reshape(-1, 2)
    inside = np.zeros(t.size, dtype=bool)
    for a, b in iv:
        inside |= (t >= a) & (t < b)
    return inside


def found_missed(injections, candidates, *, optimal_snr, analysed=None, window=MATCH_WINDOW, ifar_threshold=None,
                 min_statistic=None, statistic="statistic") -> np.ndarray:
    """Found/missed table of an injection set against a search's candidates.

    Parameters
    ----------
    injections : ndarray of :data:`chirpsift.inject.INJECTION_DTYPE`
        The injections made.
    candidates : structured ndarray
        Candidates (or one site's triggers) with fields ``time``, ``template`` and the
        ranking field named by ``statistic``; ``far`` and ``ifar`` are copied when present.
    optimal_snr : mapping of str to array_like
        Site name -> optimal SNR of each injection there.
    analysed : mapping of str to (k, 2) array_like, optional
        Site name -> analysed intervals; an injection counts as analysed if its time at
        the Earth's centre lies inside every site's intervals (delays of up to 21 ms are
        ignored here). Default: everything analysed.
    window : float, optional
        Matching half-width (s) around the geocentric time, :data:`MATCH_WINDOW`.
    ifar_threshold : float, optional
        Years: found only if the matched candidate's ``ifar`` reaches it.
    min_statistic : float, optional
        Found only if the matched candidate's statistic reaches it (e.g. an SNR threshold
        for one site's triggers).
    statistic : str, optional
        Candidate field that ranks candidates (``"statistic"`` for network candidates,
        ``"snr"`` or ``"reweighted_snr"`` for triggers).

    Returns
    -------
    ndarray of :func:`found_missed_dtype`
        One row per injection (module notes). With neither threshold, every matched
        injection counts as found.

    Examples
    --------
    >>> import numpy as np, chirpsift
    >>> from chirpsift.inject import found_missed
    >>> inj = chirpsift.draw_injections(2, m1=1.4, m2=1.4, distance=(10, 20), start=0, end=100, f_low=40.0)
    >>> cands = np.zeros(1, dtype=[("time", "f8"), ("template", "i4"), ("statistic", "f8"), ("ifar", "f8")])
    >>> cands[0] = (inj["time"][1] + 0.01, 3, 15.0, 20.0)
    >>> t = found_missed(inj, cands, optimal_snr={"A": [9.0, 14.0]}, ifar_threshold=1.0)
    >>> t["found"].tolist(), t["template"].tolist()
    ([False, True], [-1, 3])
    """
    inj = injection_table(injections)
    if not isinstance(candidates, np.ndarray) or candidates.dtype.names is None:
        raise TypeError(f"candidates must be a structured array, got {type(candidates).__name__}")
    for field in ("time", "template", statistic):
        if field not in candidates.dtype.names:
            raise ValueError(f"candidates lack the field {field!r} (fields: {', '.join(candidates.dtype.names)})")
    names = list(optimal_snr)
    out = np.zeros(inj.size, dtype=found_missed_dtype(names))
    for field in INJECTION_DTYPE.names:
        out[field] = inj[field]
    total = np.zeros(inj.size)
    for name in names:
        rho = real_array(f"optimal_snr[{name!r}]", optimal_snr[name], ndim=1)
        if rho.shape != (inj.size,):
            raise ValueError(f"optimal_snr[{name!r}] must have one value per injection ({inj.size}), got {rho.size}")
        out[f"{name}_optimal_snr"] = rho
        total += rho**2
    out["network_optimal_snr"] = np.sqrt(total)
    out["analysed"] = True
    for name, intervals in (analysed or {}).items():
        out["analysed"] &= analysed_mask(inj["time"], intervals)
    stat = np.asarray(candidates[statistic], dtype=np.float64)
    match = match_injections(inj["time"], candidates["time"], stat, window=window)
    hit = match >= 0
    m = match[hit]
    out["statistic"] = np.nan
    out["far"] = np.nan
    out["ifar"] = 0.0
    out["recovered_time"] = np.nan
    out["template"] = -1
    out["statistic"][hit] = stat[m]
    out["recovered_time"][hit] = candidates["time"][m]
    out["template"][hit] = candidates["template"][m]
    for field in ("far", "ifar"):
        if field in candidates.dtype.names:
            out[field][hit] = candidates[field][m]
    found = hit.copy()
    if ifar_threshold is not None:
        if "ifar" not in candidates.dtype.names:
            raise ValueError("ifar_threshold needs candidates with an 'ifar' field (network candidates)")
        found &= out["ifar"] >= nonnegative_scalar("ifar_threshold", ifar_threshold)
    if min_statistic is not None:
        found &= out["statistic"] >= real_array("min_statistic", min_statistic, ndim=0)
    out["found"] = found
    return out


@dataclass(frozen=True)
class CampaignResult:
    """What :func:`run_campaign` found.

    Attributes
    ----------
    found_missed : ndarray
        One row per injection (module notes).
    candidates, background : ndarray
        The network stage's zero-lag candidates and time-slide background over the data
        with injections (:func:`chirpsift.coincidences`); the candidates' ``far`` and
        ``ifar`` are against the analysis's background when one was given.
    triggers : dict of ndarray
        Each site's trigger table.
    analysed : dict of list of (float, float)
        Each site's analysed intervals (s).
    analysed_time : float
        Seconds analysed by every site at once (the network stage's live time).
    """

    found_missed: np.ndarray
    candidates: np.ndarray
    background: np.ndarray
    triggers: dict
    analysed: dict
    analysed_time: float


def _site_mapping(sites) -> dict:
    if isinstance(sites, Mapping):
        return dict(sites)
    out = {}
    for s in sites:
        name = getattr(s, "name", None)
        if not isinstance(name, str):
            raise TypeError(f"sites must be chirpsift.Site objects (with a name) or a mapping of them, got {s!r}")
        out[name] = s
    return out


def run_campaign(strain, sites, injections, bank, *, sample_rate, t0, f_low, psd=None, settings=None, n_slides=0,
                 slide_step=None, coincidence_window=None, background=None, match_window=MATCH_WINDOW,
                 ifar_threshold=None, progress=False) -> CampaignResult:
    """Search data with injections added at every site and tabulate found and missed signals.

    Parameters
    ----------
    strain : mapping of str to array_like
        Site name -> that site's strain (the analysis's data, without the injections),
        all at ``sample_rate`` and starting at ``t0``.
    sites : sequence or mapping of chirpsift.Site
        The site set; every key of ``strain`` must name one of them.
    injections : ndarray of :data:`chirpsift.inject.INJECTION_DTYPE`
        The injections (see :func:`chirpsift.draw_injections`).
    bank : chirpsift.Bank or equivalent
        The analysis's template bank.
    sample_rate, t0, f_low : float
        Hz, GPS s of the first sample, Hz (as for :func:`chirpsift.search`).
    psd : optional
        As for :func:`chirpsift.search` (``None``: estimated per segment). The optimal
        SNRs use it too, or, when ``None``, a Welch median estimate from each site's
        whole strain (without injections).
    settings : chirpsift.SearchSettings or mapping, optional
        The analysis's search settings (``f_low`` here wins).
    n_slides, slide_step, coincidence_window
        Passed to :func:`chirpsift.coincidences` (time slides for the background, and
        its timing allowance ``window``); the search's ``peak_window`` goes with them.
    background : (array_like, float), optional
        ``(statistic, background_time)`` of the analysis's own time-slide background
        (without injections; ``background_time`` in seconds): the candidates' false-alarm
        rates are then measured against it (:func:`chirpsift.network.far.false_alarm_rate`)
        instead of against the slides of the data with injections, and ``n_slides`` may
        be 0.
    match_window : float, optional
        Seconds around each geocentric coalescence time searched for its candidate.
    ifar_threshold : float, optional
        Years: an injection counts as found only if its candidate reaches it; without a
        threshold any matched candidate counts.
    progress : bool, optional
        Show the search's progress bars.

    Returns
    -------
    CampaignResult

    Notes
    -----
    Without ``background`` the candidates' false-alarm rates come from time slides of the
    data with injections, as the analysis's would with signals in the data: an injection
    at one site slid against noise (or another injection) at the others adds loud
    background, which makes the rates conservative, the more so the more and the louder
    the injections. With ``background`` they are measured against the analysis's
    background, where injections cannot add to it. An injection counts as analysed when
    its geocentric time lies inside every site's analysed time.
    """
    from ..network import coincidences
    from ..network.far import false_alarm_rate
    from ..pipeline import SearchSettings, search
    from ..spectrum import welch
    from .project import injection_snr, project

    inj = injection_table(injections)
    site_map = _site_mapping(sites)
    if not isinstance(strain, Mapping) or not strain:
        raise TypeError("strain must be a non-empty mapping of site name to strain array")
    unknown = [name for name in strain if name not in site_map]
    if unknown:
        raise ValueError(f"strain names site {unknown[0]!r}, which is not in the site set "
                         f"({', '.join(site_map) or 'empty'})")
    if settings is None:
        base = {}
    elif isinstance(settings, SearchSettings):
        base = settings.as_dict()
    else:
        base = SearchSettings.from_mapping({"f_low": f_low, **dict(settings)}).as_dict()
    base["f_low"] = f_low
    chosen = SearchSettings(**base)
    fs = float(sample_rate)
    triggers, analysed, snrs = {}, {}, {}
    for name, data in strain.items():
        x = np.asarray(data, dtype=np.float64)
        site = site_map[name]
        added = project(inj, site, start=t0, duration=x.size / fs, sample_rate=fs, f_low=f_low)
        trig, info = search(x + added, fs, bank, t0=t0, psd=psd, progress=progress, full_output=True,
                            **chosen.as_dict())
        triggers[name], analysed[name] = trig, [tuple(map(float, iv)) for iv in info["analysed"]]
        if psd is None:
            freqs, est = welch(x, fs, chosen.welch_duration, average="median")
            site_psd = (freqs, est)
        else:
            site_psd = psd
        snrs[name] = injection_snr(inj, site, site_psd, f_low=f_low, f_high=fs / 2)
    used = {name: site_map[name] for name in strain}
    candidates, slid, info = coincidences(
        triggers, used, analysed={k: np.asarray(v) for k, v in analysed.items()}, n_slides=n_slides,
        slide_step=slide_step, window=coincidence_window, peak_window=chosen.peak_window, full_output=True)
    if background is not None:
        bg_stat, bg_time = background
        far, _ = false_alarm_rate(candidates["statistic"], real_array("background statistic", bg_stat, ndim=1,
                                                                        allow_empty=True), float(bg_time))
        candidates = candidates.copy()
        candidates["far"], candidates["ifar"] = far, 1.0 / far
    table = found_missed(inj, candidates, optimal_snr=snrs, analysed=analysed, window=match_window,
                         ifar_threshold=ifar_threshold)
    return CampaignResult(table, candidates, slid, triggers, analysed, float(info["live_time"]))
