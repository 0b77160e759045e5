"""What the demo's run found, set beside what the scenario hid: the demo's closing summary.

:func:`read_outcome` reads a finished run folder (the candidates, each site's gates,
the sensitivity and the report) and the scenario's truth file; :func:`summary_lines`
lays them out as the table ``chirpsift demo`` prints.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

from ..inject import MATCH_WINDOW
from ..io import read_triggers
from .scenario import RESULTS

__all__ = ["read_outcome", "summary_lines", "match_hidden", "near_glitch", "GLITCH_WINDOW", "TOP_LISTED"]

#: s: a candidate with a trigger this close to the glitch (at any site) counts as the glitch's.
#: Wider than the gate (0.25 s each side plus its 0.125 s taper) and the clustering window.
GLITCH_WINDOW = 1.0
#: Candidates listed in the demo's summary (the run lists more, and the report too).
TOP_LISTED = 5


def _site_times(row, names) -> dict:
    return {n: float(row[f"{n}_time"]) for n in names if math.isfinite(float(row[f"{n}_time"]))}


def match_hidden(candidates, names, arrival: dict) -> int | None:
    """Row of the loudest candidate whose triggers lie within ``MATCH_WINDOW`` of the binary's arrival times.

    Parameters
    ----------
    candidates : numpy structured array
        Candidates, loudest first (``candidates.parquet``).
    names : list of str
        Sites.
    arrival : dict of str to float
        The binary's coalescence time at each site (s).

    Returns
    -------
    int or None
        None if no candidate matches.
    """
    for i, row in enumerate(candidates):
        times = _site_times(row, names)
        if times and all(abs(t - arrival[n]) <= MATCH_WINDOW for n, t in times.items()):
            return i
    return None


def near_glitch(candidates, names, time: float) -> list[int]:
    """Rows of the candidates with a trigger within :data:`GLITCH_WINDOW` of ``time`` (s), at any site."""
    return [i for i, row in enumerate(candidates)
            if any(abs(t - time) <= GLITCH_WINDOW for t in _site_times(row, names).values())]


def read_outcome(folder, truth: dict) -> dict:
    """Read what the demo's run found.

    Parameters
    ----------
    folder : path
        The demo folder (holding ``results/``).
    truth : dict
        The scenario's truth file (:func:`chirpsift.demo.read_scenario`).

    Returns
    -------
    dict
        ``names``, ``candidates`` (the table), ``meta`` (its metadata), ``hidden_row``
        (index of the hidden binary's candidate or None), ``glitch_rows``,
        ``glitch_gated`` (whether a gate at the glitch's site covers it),
        ``sensitivity`` (the sensitivity unit's document or None), ``report`` (path).
    """
    results = Path(folder) / RESULTS
    cands, meta = read_triggers(results / "candidates.parquet")
    names = list(meta["sites"])
    glitch = truth["glitch"]
    _, site_meta = read_triggers(results / "triggers" / f"{glitch['site']}.parquet")
    gated = any(a <= glitch["time"] < b for a, b in site_meta["gates"])
    sens_path = results / "injections" / "sensitivity.json"
    sens = json.loads(sens_path.read_text(encoding="utf-8")) if sens_path.is_file() else None
    return {"names": names, "candidates": cands, "meta": meta,
            "hidden_row": match_hidden(cands, names, truth["hidden"]["arrival"]),
            "glitch_rows": near_glitch(cands, names, glitch["time"]), "glitch_gated": gated,
            "sensitivity": sens, "report": (results / "report" / "report.html").resolve()}


def _ifar_text(row) -> str:
    ifar = float(row["ifar"])
    if not math.isfinite(ifar):
        return "n/a"
    return (">" if row["far_bound"] else "") + f"{ifar:.3g}"


def _mchirp(m1, m2) -> float:
    return (m1 * m2) ** 0.6 / (m1 + m2) ** 0.2


def _table(rows, head) -> list[str]:
    widths = [max(len(str(r[i])) for r in [head, *rows]) for i in range(len(head))]
    return ["  ".join(f"{c!s:<{w}}" if i == 0 else f"{c!s:>{w}}" for i, (c, w) in enumerate(zip(r, widths))).rstrip()
            for r in [head, *rows]]


def summary_lines(outcome: dict, truth: dict) -> list[str]:
    """Lay out the demo's closing summary: top candidates, the hidden binary injected and recovered, the range.

    Parameters
    ----------
    outcome : dict
        From :func:`read_outcome`.
    truth : dict
        The scenario's truth file.

    Returns
    -------
    list of str
        Lines to print.
    """
    names, cands, meta = outcome["names"], outcome["candidates"], outcome["meta"]
    hidden, glitch = truth["hidden"], truth["glitch"]
    k = outcome["hidden_row"]
    out = ["", "=" * 78, "chirpsift demo: what the run found", "=" * 78, ""]
    reach = meta["background_time_years"]
    out.append(f"Top candidates ({len(cands)} in {meta['live_time']:.0f} s analysed by all three sites; "
               f"{meta['n_slides']} time slides, background {meta['background_time']:.4g} s = {reach:.3g} yr, "
               f"so no IFAR above {reach:.3g} yr can be measured: '>' marks that bound):")
    rows = []
    for i, row in enumerate(cands[:TOP_LISTED]):
        what = "the hidden binary" if i == k else ("near the glitch" if i in outcome["glitch_rows"] else "noise")
        sites = "+".join(n for n in names if math.isfinite(float(row[f"{n}_snr"])))
        rows.append([str(i + 1), f"{row['time']:.4f}", f"{row['m1']:.3f} + {row['m2']:.3f}", sites,
                     f"{row['statistic']:.2f}", _ifar_text(row), what])
    out += ["  " + line for line in _table(rows, ["#", "time (s)", "m1 + m2 (Msun)", "sites", "statistic",
                                                  "IFAR (yr)", "what it is"])]
    out += ["", "The hidden binary, injected and recovered:"]
    row = cands[k] if k is not None else None
    first = names[0]
    if row is None:
        rec = dict.fromkeys(["rank", "time", "m1", "m2", "mchirp", "network", "ifar", *names], "not found")
    else:
        rec = {"rank": str(k + 1), "time": f"{row[f'{first}_time']:.4f}", "m1": f"{row['m1']:.3f}",
               "m2": f"{row['m2']:.3f}", "mchirp": f"{_mchirp(row['m1'], row['m2']):.4f}",
               "network": f"{row['statistic']:.2f}", "ifar": _ifar_text(row)}
        rec.update({n: f"{row[f'{n}_snr']:.2f}" if math.isfinite(float(row[f"{n}_snr"])) else "below threshold"
                    for n in names})
    table = [
        ["rank among candidates", "-", rec["rank"]],
        [f"time at {first} (s)", f"{hidden['arrival'][first]:.4f}", rec["time"]],
        ["m1 (Msun)", f"{hidden['m1']:.3f}", rec["m1"]],
        ["m2 (Msun)", f"{hidden['m2']:.3f}", rec["m2"]],
        ["chirp mass (Msun)", f"{_mchirp(hidden['m1'], hidden['m2']):.4f}", rec["mchirp"]],
        ["distance (Mpc)", f"{hidden['distance']:.1f}", "-"],
        *([f"{n} SNR (optimal / measured)", f"{hidden['optimal_snr'][n]:.2f}", rec[n]] for n in names),
        ["network SNR / statistic", f"{hidden['network_snr']:.2f}", rec["network"]],
        ["IFAR (yr)", "-", rec["ifar"]],
    ]
    out += ["  " + line for line in _table(table, ["", "injected", "recovered"])]
    out.append("  (optimal SNR: from the design curve the noise was drawn from; measured: the matched filter's, "
               "with the loudest template; statistic: quadrature sum of reweighted SNRs)")
    if row is not None and bool(row["far_bound"]):
        out.append(f"  No background coincidence in {meta['n_slides']} slides was as loud: its IFAR is beyond the "
                   "background's reach.")
    g = glitch
    verdict = ("no candidate within {:g} s of it".format(GLITCH_WINDOW) if not outcome["glitch_rows"]
               else f"{len(outcome['glitch_rows'])} candidate(s) within {GLITCH_WINDOW:g} s of it")
    out += ["", f"The glitch (a {g['frequency']:g} Hz sine-Gaussian of SNR {g['snr']:g} at {g['site']}, "
                f"t = {g['time']:.3f} s): {'gated' if outcome['glitch_gated'] else 'not gated'}; {verdict}."]
    sens = outcome["sensitivity"]
    s = (sens or {}).get("sensitivity")
    if s:
        found = f"a coincidence within {MATCH_WINDOW:g} s of it"
        found += (", whatever its IFAR, so the range is optimistic" if not sens["found_ifar"]
                  else f" with IFAR at least {sens['found_ifar']:g} yr")
        out.append(f"Sensitive range: {s['range']:.0f} +/- {s['range_error']:.0f} Mpc ({s['found']} of "
                   f"{sens['analysed_injections']} injections in common time found; found means {found}; a short "
                   "campaign, so the error is large; for this population and these synthetic data only).")
    elif sens is not None:
        out.append("Sensitive range: none measured (no injection fell in time all sites analysed).")
    out += ["Cautions: the data are synthetic Gaussian noise; false-alarm rates from time slides assume "
            "stationary noise independent between sites; a candidate is not a detection.",
            f"Report: {outcome['report']}"]
    return out

