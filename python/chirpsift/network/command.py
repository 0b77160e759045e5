"""``chirpsift network``: coincidences between sites, time-slide background, false-alarm rates.

Reads a sites file and one or more trigger Parquet files per site (as ``chirpsift
search`` writes them: the run summary in the file's metadata, or in the JSON file beside
it, gives the analysed time), writes the candidate and background tables atomically and
prints the loudest candidates.
"""

from __future__ import annotations

import argparse
import datetime as _dt
import json
import math
import os
import re
import sys
from pathlib import Path

import numpy as np

from .coincidence import CAUTIONS, DEFAULT_ALLOWANCE, DEFAULT_PEAK_WINDOW, coincidences
from .sites import load_sites

__all__ = ["HELP", "NAME", "add_arguments", "run"]

NAME = "network"
HELP = "find coincidences between sites and their false-alarm rates by time slides"
DESCRIPTION = (
    "Find triggers of the same template at two or more sites within the light travel time "
    "plus a timing allowance, rank them by the quadrature sum of reweighted SNRs, measure the "
    "background by time slides and give each candidate a false-alarm rate. " + CAUTIONS
)
PROG = "chirpsift network"
#: Summary document version stored in the output files' metadata.
SUMMARY_VERSION = 1


#: API argument names as the command line spells them, for error messages.
_FLAGS = {"n_slides": "--slides", "slide_step": "--slide-step", "window": "--allowance",
          "peak_window": "--peak-window"}
_FLAG_NAMES = re.compile(r"(?<![\w-])(n_slides|slide_step|window|peak_window)(=)")


class _Usage(ValueError):
    """Bad command-line input (exit status 2)."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the ``network`` subcommand's arguments to ``parser``."""
    parser.description = DESCRIPTION
    g = parser.add_argument_group("input")
    g.add_argument("--sites", metavar="FILE.toml", help="sites file (chirpsift.load_sites format); required")
    g.add_argument("--triggers", metavar="SITE=FILE", action="append", default=[],
                   help="trigger Parquet file of a site, as chirpsift search writes it; repeat per site "
                        "(and per run); sites are used in sites-file order, the first is never slid")
    g = parser.add_argument_group("coincidence and background")
    g.add_argument("--slides", metavar="N", default="0", help="number of time slides (default: %(default)s)")
    g.add_argument("--slide-step", metavar="S", help="seconds between slides (default: the smallest whole "
                   "second above the light travel time plus allowance plus twice the peak window)")
    g.add_argument("--allowance", metavar="S", help=f"timing allowance added to each pair's light travel time, "
                   f"s (default {DEFAULT_ALLOWANCE:g})")
    g.add_argument("--peak-window", metavar="S", help="trigger clustering half-width, s (default: the search's, "
                   f"from the run summaries, else {DEFAULT_PEAK_WINDOW:g})")
    g = parser.add_argument_group("output")
    g.add_argument("--candidates", metavar="FILE", default="candidates.parquet",
                   help="candidate table (default: %(default)s)")
    g.add_argument("--background", metavar="FILE", default="background.parquet",
                   help="background table (default: %(default)s)")
    g.add_argument("--top", metavar="N", default="10", help="candidates to print (default: %(default)s)")


def _number(flag: str, text, *, positive=False, integer=False, minimum=None):
    if text is None:
        return None
    try:
        value = int(text) if integer else float(text)
    except ValueError:
        kind = "an integer" if integer else "a number"
        raise _Usage(f"{flag} must be {kind}, got {text!r}") from None
    if not math.isfinite(value) or (positive and value <= 0) or (minimum is not None and value < minimum):
        need = "positive" if positive else f">= {minimum}"
        raise _Usage(f"{flag} must be a finite number {need}, got {text!r}")
    return value


def _summary_of(path: Path, metadata: dict) -> dict:
    """Find the run summary of a trigger file: its Parquet metadata, else the JSON beside it."""
    if isinstance(metadata, dict) and "analysed" in metadata:
        return metadata
    beside = path.with_suffix(".json")
    if beside.is_file():
        try:
            doc = json.loads(beside.read_text(encoding="utf-8"))
        except (ValueError, UnicodeDecodeError) as exc:
            raise _Usage(f"run summary {beside} is not valid JSON ({exc})") from None
        if isinstance(doc, dict) and "analysed" in doc:
            return doc
    raise _Usage(
        f"no analysed time for trigger file {path}: neither its metadata nor {beside} holds an 'analysed' list "
        "(write it with chirpsift search)"
    )


def _read_site_files(spec: list[str], sites: dict):
    from ..io import read_triggers

    per_site: dict[str, list] = {}
    for item in spec:
        if "=" not in item:
            raise _Usage(f"--triggers must be SITE=FILE, got {item!r}")
        name, file = item.split("=", 1)
        if name not in sites:
            raise _Usage(f"--triggers names site {name!r}, which is not in the sites file ({', '.join(sites)})")
        path = Path(file)
        table, metadata = read_triggers(path)
        summary = _summary_of(path, metadata)
        try:
            analysed = np.asarray(summary["analysed"], dtype=np.float64).reshape(-1, 2)
        except (TypeError, ValueError):
            raise _Usage(f"run summary of {path}: 'analysed' must be a list of [start, end] pairs, "
                         f"got {str(summary['analysed'])[:80]}") from None
        peak = (summary.get("settings") or {}).get("peak_window")
        per_site.setdefault(name, []).append((path, table, analysed, peak))
    return per_site


def _merge_runs(name: str, runs):
    """One table and one interval list per site from several runs (which must not overlap)."""
    tables = [r[1] for r in runs]
    names = tables[0].dtype.names
    for (path, table, _, _) in runs[1:]:
        if table.dtype.names != names:
            raise _Usage(f"trigger file {path} has columns {table.dtype.names}, unlike {runs[0][0]} ({names})")
    intervals = np.concatenate([r[2] for r in runs])
    order = np.argsort(intervals[:, 0])
    s = intervals[order]
    overlap = np.flatnonzero(s[1:, 0] < s[:-1, 1])
    if overlap.size:
        k = int(overlap[0])
        raise _Usage(f"site {name!r}: the analysed times of its trigger files overlap "
                     f"({s[k].tolist()} and {s[k + 1].tolist()}); give each stretch of data once")
    table = np.concatenate([t.astype(tables[0].dtype) for t in tables])
    return table[np.argsort(table["time"], kind="stable")], intervals


def _check_outputs(*paths: Path) -> None:
    resolved = [p.resolve() for p in paths]
    if len(set(resolved)) != len(resolved):
        raise _Usage(f"--candidates and --background must be different files, got {paths[0]} twice")
    for flag, p in zip(("--candidates", "--background"), paths):
        folder = p.parent if str(p.parent) else Path(".")
        if not folder.is_dir():
            raise _Usage(f"{flag}: folder does not exist: {folder}")
        if p.is_dir():
            raise _Usage(f"{flag}: {p} is a directory")
        if not os.access(folder, os.W_OK):
            raise _Usage(f"{flag}: cannot write into {folder}")


def _format_ifar(ifar: float, bound: bool) -> str:
    if not math.isfinite(ifar):
        return "n/a"
    return (">" if bound else "") + f"{ifar:.3g}"


def _print_summary(cands, info, names, top: int, out=None) -> None:
    out = sys.stdout if out is None else out
    years = info["background_time_years"]
    print(
        f"Sites {', '.join(names)}: {info['live_time']:g} s analysed by all at once; "
        f"{info['n_slides']} time slides"
        + (f" of {info['slide_step']:g} s, background live time {info['background_time']:g} s ({years:.3g} yr)"
           if info["n_slides"] else " (no background: false-alarm rates not measured)")
        + f"; {len(cands)} zero-lag candidates.",
        file=out,
    )
    if len(cands):
        cols = "".join(f" {n[:10] + ' SNR':>15}" for n in names)
        print(f"{'#':>3} {'time (s)':>17} {'template masses':>17}{cols} {'statistic':>9} {'IFAR (yr)':>10}", file=out)
        bound = info["far_bound"]
        for i, row in enumerate(cands[:top]):
            snrs = "".join(f" {row[f'{n}_snr']:15.2f}" if np.isfinite(row[f"{n}_snr"]) else f" {'-':>15}"
                           for n in names)
            masses = f"{row['m1']:.2f}+{row['m2']:.2f}" if "m1" in cands.dtype.names else f"#{row['template']}"
            print(f"{i + 1:>3} {row['time']:17.4f} {masses:>17}{snrs} {row['statistic']:9.3f} "
                  f"{_format_ifar(float(row['ifar']), bool(bound[i])):>10}", file=out)
        if info["n_slides"]:
            print(f"'>' marks an IFAR at the background's reach ({years:.3g} yr): no background coincidence "
                  "was as loud.", file=out)
    print(CAUTIONS, file=out)


def run(args: argparse.Namespace) -> int:
    """Run ``chirpsift network`` with parsed ``args``.

    Parameters
    ----------
    args : argparse.Namespace
        As parsed by a parser that :func:`add_arguments` filled.

    Returns
    -------
    int
        Exit status: 0 success, 2 bad input (with a one-line message on stderr).
    """
    try:
        return _run(args)
    except (_Usage, ValueError, TypeError, FileNotFoundError, IsADirectoryError, NotADirectoryError,
            PermissionError) as exc:
        print(f"{PROG}: error: {exc}", file=sys.stderr)
        return 2


def _run(args) -> int:
    from ..io import write_triggers

    if not args.sites:
        raise _Usage("--sites is required")
    if not args.triggers:
        raise _Usage("--triggers SITE=FILE is required, once per site (at least two sites)")
    n_slides = _number("--slides", args.slides, integer=True, minimum=0)
    step = _number("--slide-step", args.slide_step, positive=True)
    allowance = _number("--allowance", args.allowance, minimum=0)
    peak_window = _number("--peak-window", args.peak_window, minimum=0)
    top = _number("--top", args.top, integer=True, minimum=0)
    outputs = (Path(args.candidates), Path(args.background))
    _check_outputs(*outputs)

    sites = load_sites(args.sites)
    runs = _read_site_files(args.triggers, sites)
    names = [n for n in sites if n in runs]
    if len(names) < 2:
        raise _Usage(f"--triggers must cover at least two sites, got {names}")
    triggers, analysed, peaks = {}, {}, []
    for n in names:
        triggers[n], analysed[n] = _merge_runs(n, runs[n])
        peaks += [r[3] for r in runs[n] if r[3] is not None]
    if peak_window is None:
        peak_window = max(peaks) if peaks else DEFAULT_PEAK_WINDOW
    try:
        cands, bg, info = coincidences(
            triggers, [sites[n] for n in names], analysed=analysed, n_slides=n_slides, slide_step=step,
            window=allowance, peak_window=peak_window, full_output=True,
        )
    except ValueError as exc:
        raise _Usage(_FLAG_NAMES.sub(lambda m: _FLAGS[m.group(1)] + m.group(2), str(exc))) from None
    # template masses beside the candidate table, for the printed summary only
    display = cands
    if len(cands):
        first = {n: dict(zip(triggers[n]["template"].tolist(), zip(triggers[n]["m1"], triggers[n]["m2"])))
                 for n in names}
        masses = [next(first[n][t] for n in names if t in first[n]) for t in cands["template"].tolist()]
        extra = np.zeros(len(cands), dtype=cands.dtype.descr + [("m1", "f8"), ("m2", "f8")])
        for f in cands.dtype.names:
            extra[f] = cands[f]
        extra["m1"], extra["m2"] = np.array(masses).T
        display = extra

    doc = {
        "summary_version": SUMMARY_VERSION,
        "command": "network",
        "argv": sys.argv[1:],
        "created_utc": _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds"),
        "sites": {n: {k: getattr(sites[n], k) for k in ("latitude", "longitude", "elevation", "x_azimuth",
                                                       "y_azimuth", "x_altitude", "y_altitude")} for n in names},
        "inputs": {n: [os.path.abspath(r[0]) for r in runs[n]] for n in names},
        "settings": {"slides": n_slides, "slide_step": info["slide_step"], "allowance": info["allowance"],
                     "peak_window": info["peak_window"]},
        "windows": info["windows"],
        "common": info["common"],
        "live_time": info["live_time"],
        "background_time": info["background_time"],
        "counts": {"candidates": len(cands), "background": len(bg),
                   "excluded_triggers": info["excluded"]},
        "far_is_bound": info["far_bound"].tolist(),
        "cautions": CAUTIONS,
    }
    # background first: a candidate table only ever appears beside its complete background
    write_triggers(outputs[1], bg, {**doc, "table": "background", "far_is_bound": None})
    write_triggers(outputs[0], cands, {**doc, "table": "candidates"})
    _print_summary(display, info, names, top)
    print(f"Wrote {outputs[0]} and {outputs[1]}.")
    return 0
