"""The report of a run folder: one self-contained HTML page and its PNG plots.

:func:`write_report` reads what the run published (the manifest's analysis, the bank,
per-site triggers with their run summaries, spectra, background and candidates),
draws the plots of :mod:`chirpsift.report.plots`, and writes into ``report/``:

``spectra.png``, ``timeline.png``, ``bank.png``, ``top_candidate.png``,
``statistic.png``, ``ifar.png``
    The figures, also embedded in the page as ``data:`` URIs.
``summary.json``
    The numbers the page shows (live times, counts, the listed candidates).
``report.html``
    The page, written last: it needs no network access, reflows to a phone's width
    (wide tables scroll inside their own box) and prints on A4 or Letter.

Nothing written depends on the clock, so a report drawn again from the same run has
the same bytes.
"""

from __future__ import annotations

import base64
import html
import json
import math
import re
import platform
from pathlib import Path

import numpy as np

from ..io import read_triggers
from ..io.atomic import atomic_path, write_json_atomic
from . import plots

__all__ = ["write_report", "report_files", "REPORT_FILES", "CAUTIONS"]

#: Files written into ``report/`` for a run without injections, in the order written (the page last).
REPORT_FILES = ("spectra.png", "timeline.png", "bank.png", "top_candidate.png", "statistic.png", "ifar.png",
                "summary.json", "report.html")


def report_files(injections: bool) -> tuple[str, ...]:
    """Files written into ``report/``, in order; ``injections.png`` too when the run has injections."""
    return REPORT_FILES[:6] + (("injections.png",) if injections else ()) + REPORT_FILES[6:]

#: The cautions printed at the top of every report.
CAUTIONS = (
    "False-alarm rates from time slides assume the noise is stationary over the time used and independent "
    "between sites; a disturbance seen at two sites at once breaks that, and no rate below one per background "
    "live time can be measured (such candidates carry a bound, marked '>').",
    "Results from synthetic data describe the synthetic data only: simulated Gaussian noise has none of the "
    "glitches and non-stationarity of a real instrument.",
    "A candidate here is not a detection. A detection claim needs full, independent validation: data quality "
    "and instrument checks, independent analyses and review.",
)

_CSS = """
:root { --ink: #1c2541; --blue: #3a6ea5; --amber: #f0a430; --pale: #e8f1f8; }
* { box-sizing: border-box; }
body { font-family: system-ui, -apple-system, "Segoe UI", sans-serif; color: var(--ink); margin: 0 auto;
       padding: 1rem; max-width: 60rem; line-height: 1.45; }
h1 { font-size: 1.5rem; } h2 { font-size: 1.2rem; border-bottom: 2px solid var(--blue); margin-top: 2rem; }
img { max-width: 100%; height: auto; display: block; margin: 0.5rem 0; }
figure { margin: 0; } figcaption { font-size: 0.9rem; }
.scroll { overflow-x: auto; max-width: 100%; }
table { border-collapse: collapse; font-size: 0.85rem; font-variant-numeric: tabular-nums; }
th, td { border: 1px solid #b9c4d0; padding: 0.2rem 0.45rem; text-align: right; white-space: nowrap; }
th { background: var(--pale); white-space: normal; vertical-align: bottom; } td.l, th.l { text-align: left; }
td.w { text-align: left; white-space: normal; overflow-wrap: anywhere; min-width: 10rem; }
.caution { border-left: 6px solid var(--amber); background: #fff7e8; padding: 0.5rem 0.8rem; }
.caution li { margin: 0.3rem 0; }
code { overflow-wrap: anywhere; }
@media print { body { max-width: none; padding: 0; font-size: 10pt; } h2 { break-after: avoid; }
  figure, table { break-inside: avoid; } .scroll { overflow: visible; } }
"""


def _esc(x) -> str:
    return html.escape(str(x), quote=True)


def _fmt(x, digits=4) -> str:
    if x is None:
        return "n/a"
    x = float(x)
    if not math.isfinite(x):
        return "n/a"
    return f"{x:.{digits}g}"


def _read_manifest(folder: Path) -> dict:
    path = folder / "manifest.json"
    if not path.is_file():
        raise FileNotFoundError(f"{folder} is not a run folder: no manifest.json (write one with chirpsift run)")
    from ..run.manifest import read_manifest  # here: the run package imports this module

    try:
        return read_manifest(folder)  # the snapshot with the units journalled since
    except ValueError:
        raise ValueError(f"{path} is not a chirpsift run manifest") from None


def _png_uri(path: Path) -> str:
    return "data:image/png;base64," + base64.b64encode(path.read_bytes()).decode("ascii")


def _versions() -> dict:
    import matplotlib
    import pyarrow

    from .. import __version__

    return {"chirpsift": __version__, "numpy": np.__version__, "pyarrow": pyarrow.__version__,
            "matplotlib": matplotlib.__version__, "python": platform.python_version()}


def _top_series(analysis: dict, names, spectra, cand, settings, out: Path) -> str:
    """Plot the top candidate's SNR and chi-squared series; return a caption."""
    from ..run.stages import catalogue_of, read_times
    from .refilter import candidate_series, stretch_for

    if cand is None:
        plots.plot_message(out, "Top candidate", "No zero-lag candidate: nothing to show.")
        return "No zero-lag candidate."
    m1, m2, s1, s2 = (float(cand[k]) for k in ("m1", "m2", "spin1", "spin2"))
    series = {}
    for n in names:
        t_site = float(cand[f"{n}_time"])
        t_c = t_site if math.isfinite(t_site) else float(cand["time"])
        start, stop = stretch_for(t_c, m1, m2, settings["f_low"])
        f, med = spectra[n][0], spectra[n][1]
        if f.size == 0:
            continue
        catalogue = catalogue_of(analysis["data"][n])
        span = next((sp for sp in catalogue.spans if sp.t0 <= t_c < sp.end), None)
        if span is None:
            continue
        t0, x = read_times(catalogue, max(start, span.t0), stop)
        if not (np.all(np.isfinite(x)) and x.size and t0 < t_c - 1.0 and t0 + x.size / spectra[n][4] > t_c + 1.0):
            continue
        series[n] = candidate_series(t0, x, spectra[n][4], f, med ** 2, t_c=t_c, m1=m1, m2=m2, spin1=s1,
                                     spin2=s2, f_low=settings["f_low"], chi2_bands=settings["chi2_bands"])
    if not series:
        plots.plot_message(out, "Top candidate", "The data around the top candidate could not be read again.")
        return "The data around the top candidate could not be filtered again."
    t_ref = float(cand["time"])
    plots.plot_candidate_series(series, t_ref, out, title=f"Top candidate: template {m1:#.4g} + {m2:#.4g} Msun")
    return (f"The top candidate's template ({m1:#.4g} + {m2:#.4g} solar masses) filtered again over a short stretch "
            "at each site, with the site's median PSD over the run; chi-squared with "
            f"{2 * settings['chi2_bands'] - 2} degrees of freedom.")


def write_report(folder, *, top: int = 10) -> Path:
    """Write the HTML report and its plots of a run folder.

    Parameters
    ----------
    folder : str or os.PathLike
        A run's output folder (``chirpsift run``), with its bank, search, spectrum,
        background and candidates units complete.
    top : int, optional
        Number of loudest candidates listed.

    Returns
    -------
    Path
        The page, ``folder/report/report.html``.

    Raises
    ------
    FileNotFoundError
        Not a run folder, or a file the report needs is missing.
    ValueError
        A file is damaged, or the run is not complete up to its candidates.
    """
    folder = Path(folder)
    doc = _read_manifest(folder)
    analysis = doc["analysis"]
    names = [s["name"] for s in analysis["sites"]]
    needed = ["bank", *(f"merge/{n}" for n in names), *(f"spectrum/{n}" for n in names), "background",
              "candidates"]
    with_injections = analysis.get("injections") is not None
    if with_injections:
        needed.append("sensitivity")
    missing = [k for k in needed if k not in doc["units"]]
    if missing:
        raise ValueError(f"{folder}: the run is not complete (missing units: {', '.join(missing)}); "
                         "finish it with chirpsift run first")
    settings = analysis["search"]
    out = folder / "report"
    out.mkdir(exist_ok=True)

    from ..bank import Bank

    bank = Bank.load(folder / "bank.parquet")
    trig, meta, spectra = {}, {}, {}
    for n in names:
        trig[n], meta[n] = read_triggers(folder / "triggers" / f"{n}.parquet")
        sp, _ = read_triggers(folder / "spectra" / f"{n}.parquet")
        spectra[n] = (sp["frequency"], sp["asd_median"], sp["asd_low"], sp["asd_high"], meta[n]["sample_rate"])
    bg, bg_meta = read_triggers(folder / "background.parquet")
    cands, c_meta = read_triggers(folder / "candidates.parquet")
    listed = cands[:top]

    # figures
    plots.plot_spectra({n: spectra[n][:4] for n in names}, out / "spectra.png", f_low=settings["f_low"])
    plots.plot_timeline({n: meta[n]["live_time_table"] for n in names}, out / "timeline.png")
    plots.plot_bank(bank.m1, bank.m2, out / "bank.png")
    top_caption = _top_series(analysis, names, spectra, listed[0] if len(listed) else None, settings,
                              out / "top_candidate.png")
    in_bg = {}
    for n in names:
        mask = np.zeros(len(trig[n]), dtype=bool)
        rows = bg[f"{n}_trigger"] if len(bg) else np.zeros(0, dtype=np.int64)
        mask[rows[rows >= 0]] = True
        in_bg[n] = mask
    cand_points = {n: (listed[f"{n}_snr"][np.isfinite(listed[f"{n}_snr"])],
                       listed[f"{n}_reweighted_snr"][np.isfinite(listed[f"{n}_snr"])]) for n in names}
    plots.plot_statistic({n: (trig[n]["snr"], trig[n]["reweighted_snr"]) for n in names}, in_bg, cand_points,
                         out / "statistic.png")
    n_slides = int(bg_meta["n_slides"])
    if n_slides:
        plots.plot_ifar(cands["ifar"], c_meta["live_time_years"], c_meta["background_time_years"], out / "ifar.png")
    else:
        plots.plot_message(out / "ifar.png", "Candidates against the background",
                           "No time slides were run: no false-alarm rates.")

    sens = None
    if with_injections:
        fm, _ = read_triggers(folder / "injections" / "found_missed.parquet")
        sens = json.loads((folder / "injections" / "sensitivity.json").read_text(encoding="utf-8"))
        counted = fm[fm["analysed"]]
        rng = (sens["sensitivity"] or {}).get("range")
        plots.plot_injections(counted["distance"], counted["network_optimal_snr"], counted["found"],
                              sens["efficiency"], rng, out / "injections.png")

    # numbers
    dof = 2 * settings["chi2_bands"] - 2
    rows = []
    for i, c in enumerate(listed):
        row = {"rank": i + 1, "time": float(c["time"]), "m1": float(c["m1"]), "m2": float(c["m2"]),
               "statistic": float(c["statistic"]), "ifar_years": float(c["ifar"]),
               "ifar_is_bound": bool(c["far_bound"])}
        for n in names:
            row[f"{n}_snr"] = float(c[f"{n}_snr"])
            row[f"{n}_chi2_per_dof"] = float(c[f"{n}_chi2"]) / dof
        rows.append(row)
    summary = {
        "sites": names,
        "settings_hash": doc["settings_hash"],
        "live_time": {n: meta[n]["live_time"] for n in names},
        "live_time_table": {n: meta[n]["live_time_table"]["seconds"] for n in names},
        "triggers": {n: int(len(trig[n])) for n in names},
        "coincident_live_time": c_meta["live_time"],
        "background_time": c_meta["background_time"],
        "n_slides": n_slides,
        "candidates": int(len(cands)),
        "background_coincidences": int(len(bg)),
        "listed": rows,
        "sensitivity": sens,
        "versions": _versions(),
        "cautions": list(CAUTIONS),
    }
    write_json_atomic(out / "summary.json", summary)
    page = _page(folder, analysis, doc, names, meta, summary, rows, dof, top_caption, out)
    with atomic_path(out / "report.html") as tmp:
        Path(tmp).write_text(page, encoding="utf-8")
    return out / "report.html"


def _table(head, body, left=(), wrap=()) -> str:
    """Return an HTML table in a box that scrolls sideways when too wide; ``wrap`` columns break lines."""
    def cls(i):
        return " class=w" if i in wrap else (" class=l" if i in left else "")

    th = "".join(f"<th{' class=l' if i in left or i in wrap else ''}>{h}</th>" for i, h in enumerate(head))
    trs = "".join("<tr>" + "".join(f"<td{cls(i)}>{v}</td>" for i, v in enumerate(r)) + "</tr>" for r in body)
    return f'<div class="scroll"><table><thead><tr>{th}</tr></thead><tbody>{trs}</tbody></table></div>'


def _figure(out: Path, name: str, alt: str, caption: str) -> str:
    return (f'<figure><img src="{_png_uri(out / name)}" alt="{_esc(alt)}" width="700">'
            f"<figcaption>{caption} (also <code>{_esc(name)}</code>)</figcaption></figure>")


def _sensitivity_section(sens: dict, cfg: dict, out: Path) -> str:
    s = sens["sensitivity"] or {}
    threshold = (f"a matched coincidence with IFAR at least {cfg['found_ifar']:g} yr" if cfg["found_ifar"] > 0
                 else "any matched coincidence")
    rows = [["injections made", str(sens["injections"])],
            ["in time analysed by all sites", str(sens["analysed_injections"])],
            ["found", str(s.get("found", 0))],
            ["sensitive range (Mpc)", f"{_fmt(s.get('range'))} &plusmn; {_fmt(s.get('range_error'), 2)}"],
            ["sensitive volume (Mpc&sup3;)", f"{_fmt(s.get('volume'))} &plusmn; {_fmt(s.get('volume_error'), 2)}"],
            ["VT (Mpc&sup3; yr)", f"{_fmt(s.get('volume_time'))} &plusmn; {_fmt(s.get('volume_time_error'), 2)}"],
            ["analysed time (s)", _fmt(sens["analysed_time"], 6)]]
    return ("<h2>Sensitivity</h2>"
            f"<p>{cfg['count']} simulated binaries (m1 {_esc(cfg['m1'])}, m2 {_esc(cfg['m2'])} Msun, distance "
            f"{_esc(cfg['distance'])} Mpc, {_esc(cfg['distance_distribution'])}), added to the data and searched "
            f"with the same settings; found means {threshold} within 0.1 s. Errors are Monte-Carlo standard "
            f"errors. {_esc(sens['cautions'])}</p>"
            + _table(["quantity", "value"], rows, left=(0,))
            + _figure(out, "injections.png", "found and missed injections against distance, and the efficiency",
                      "Found and missed injections against distance with their network optimal SNR (from each "
                      "site's median PSD), and the fraction found per distance bin."))



#: What a search's warning categories mean, in the report's words.
_WARNING_WORDS = {"GatingWarning": "gating", "AnalysedFractionWarning": "little of the data analysed",
                  "ExcludedDataWarning": "data left out"}


def _plain_warning(text: str) -> str:
    """Put a search warning as a reader needs it: its kind in words, without pointers into the API.

    >>> from chirpsift.report.html import _plain_warning
    >>> _plain_warning("GatingWarning: 1 gate(s); see info['gates']")
    'gating: 1 gate(s)'
    """
    kind, _, message = text.partition(": ")
    if kind in _WARNING_WORDS:
        text = f"{_WARNING_WORDS[kind]}: {message}"
    return re.sub(r"; see info\[[^\]]*\]", "", text)


def _page(folder, analysis, doc, names, meta, summary, rows, dof, top_caption, out) -> str:
    parts = []
    parts.append("<h2>Cautions</h2><div class=\"caution\"><ul>"
                 + "".join(f"<li>{_esc(c)}</li>" for c in CAUTIONS) + "</ul></div>")
    # live time
    cats = ["analysed", "gated", "pads", "vetoed", "nonfinite", "short", "gap"]
    body = [[_esc(n)] + [_fmt(meta[n]["live_time_table"]["seconds"][c], 6) for c in cats]
            + [str(summary["triggers"][n])] for n in names]
    parts.append("<h2>Data</h2>" + _table(["site", "analysed (s)", "gated (s)", "edge pads (s)", "vetoed (s)",
                                           "non-finite (s)", "too short (s)", "gap (s)", "triggers"], body, left=(0,)))
    parts.append(f"<p>Time analysed by all sites at once: {_fmt(summary['coincident_live_time'], 6)} s. "
                 f"Time slides: {summary['n_slides']}, background live time {_fmt(summary['background_time'], 6)} s "
                 f"({summary['background_coincidences']} background coincidences).</p>")
    notes = [f"{_esc(n)}: {_esc(_plain_warning(w))}" for n in names for w in meta[n].get("warnings", [])]
    if notes:
        parts.append("<p>What the searches reported:</p><ul>" + "".join(f"<li>{w}</li>" for w in notes) + "</ul>")
    parts.append(_figure(out, "timeline.png", "time line of analysed and left-out data per site",
                         "Analysed and left-out time per site, from the live-time tables."))
    parts.append(_figure(out, "spectra.png", "amplitude spectral density per site",
                         "Amplitude spectral density per site: median over stretches of analysed data spread over "
                         "the run, with the band between the 10th and 90th percentiles."))
    # candidates
    head = ["#", "time (s)", "m1 + m2 (Msun)"] + [f"{_esc(n)} SNR" for n in names] \
        + [f"{_esc(n)} &chi;&sup2;/dof" for n in names] + ["statistic", "IFAR (yr)"]
    body = []
    for r in rows:
        ifar = r["ifar_years"]
        ifar_text = "n/a" if not math.isfinite(ifar) else (("&gt;" if r["ifar_is_bound"] else "") + _fmt(ifar, 3))
        body.append([str(r["rank"]), f"{r['time']:.4f}", f"{r['m1']:#.4g} + {r['m2']:#.4g}"]
                    + [_fmt(r[f"{n}_snr"], 4) for n in names] + [_fmt(r[f"{n}_chi2_per_dof"], 3) for n in names]
                    + [_fmt(r["statistic"], 4), ifar_text])
    parts.append(f"<h2>Loudest candidates</h2><p>{summary['candidates']} zero-lag candidates; the "
                 f"{len(rows)} loudest by network statistic (quadrature sum of reweighted SNRs). &chi;&sup2; has "
                 f"{dof} degrees of freedom. '&gt;' marks an IFAR at the background's reach.</p>"
                 + (_table(head, body) if body else "<p>None.</p>"))
    parts.append(_figure(out, "top_candidate.png", "SNR and chi-squared time series around the top candidate",
                         _esc(top_caption)))
    parts.append(_figure(out, "statistic.png", "reweighted SNR against SNR",
                         "Reweighted SNR against SNR: every single-site trigger, those taking part in time-slide "
                         "background coincidences, and the listed zero-lag candidates."))
    parts.append(_figure(out, "ifar.png", "cumulative candidate count against inverse false-alarm rate",
                         "Zero-lag candidates with at least a given IFAR, against what noise alone gives on "
                         "average (live time / IFAR) with its Poisson 1 and 2 sigma bands."))
    if summary["sensitivity"] is not None:
        parts.append(_sensitivity_section(summary["sensitivity"], analysis["injections"], out))
    parts.append("<h2>Template bank</h2>" + _figure(out, "bank.png", "template bank in the component-mass plane",
                                                    "The templates searched."))
    # settings and versions
    s_rows = [[_esc(k), "default" if v is None else _esc(v)] for k, v in analysis["search"].items()]
    s_rows += [[f"network.{_esc(k)}", "default" if v is None else _esc(v)] for k, v in analysis["network"].items()]
    s_rows += [["settings hash", f"<code>{_esc(doc['settings_hash'])}</code>"]]
    parts.append("<h2>Settings</h2>" + _table(["setting", "value"], s_rows, left=(0,), wrap=(1,)))
    f_rows = [[_esc(n), "<br>".join(_esc(f) for f in analysis["data"][n]["files"])] for n in names]
    parts.append("<h2>Inputs</h2>" + _table(["site", "strain files"], f_rows, left=(0,), wrap=(1,)))
    v_rows = [[_esc(k), _esc(v)] for k, v in summary["versions"].items()]
    parts.append("<h2>Software</h2>" + _table(["package", "version"], v_rows, left=(0, 1)))
    title = f"chirpsift run report: {', '.join(names)}"
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            f"<title>{_esc(title)}</title><style>{_CSS}</style></head><body>"
            f"<h1>{_esc(title)}</h1><p>Analysis settings hash <code>{_esc(doc['settings_hash'][:16])}</code>; "
            "the files beside this page hold its plots and numbers.</p>"
            + "\n".join(parts) + "</body></html>\n")
