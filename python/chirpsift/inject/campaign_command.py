"""``chirpsift campaign``: search strain with injections added and tabulate found and missed signals."""

from __future__ import annotations

import argparse
import os

from ..cli._paths import check_output
from ..cli._types import nonnegative_float, nonnegative_int, positive_float, positive_int
from ..cli.search import add_option_flag, search_settings
from ..pipeline.settings import SEARCH_OPTIONS
from .command import CAUTION, pick_sites, read_injections, site_file, site_set, strain_files

__all__ = ["HELP", "add_arguments", "run"]

HELP = "search strain with injections added and tabulate found and missed signals"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the flags of ``chirpsift campaign`` to ``parser``."""
    parser.description = (
        "Add an injection set to each site's strain, search it with the analysis's settings, find coincidences "
        "with a time-slide background, and write the found/missed table. Flags override the --config file's "
        "[search] table."
    )
    g = parser.add_argument_group("input")
    g.add_argument("--injections", metavar="FILE", required=True, help="injection set (chirpsift inject)")
    g.add_argument("--sites", metavar="FILE.toml", required=True, help="site set (chirpsift.load_sites)")
    g.add_argument("--strain", type=site_file, action="append", required=True, metavar="SITE=FILE",
                   help="strain of one site without injections (repeat per site; same sample rate and start)")
    g.add_argument("--bank", metavar="FILE", required=True, help="template bank (.npz or .parquet)")
    g.add_argument("--config", metavar="FILE.toml", help="TOML file whose [search] table holds the analysis settings")
    g.add_argument("--psd", metavar="CURVE", help="known PSD, a design-curve name (default: estimated from the data)")
    g = parser.add_argument_group("search settings (as in the analysis)")
    for option in SEARCH_OPTIONS:
        add_option_flag(g, option)
    g = parser.add_argument_group("coincidence and matching")
    g.add_argument("--slides", type=nonnegative_int, default=0, metavar="N",
                   help="time slides for the background (default 0)")
    g.add_argument("--slide-step", type=positive_float, metavar="S", help="time-slide step")
    g.add_argument("--coincidence-window", type=positive_float, metavar="S",
                   help="timing allowance beyond the light travel time (default: the network stage's)")
    g.add_argument("--match-window", type=positive_float, metavar="S",
                   help="seconds around each injection searched for its candidate (default 0.1)")
    g.add_argument("--ifar-threshold", type=nonnegative_float, metavar="YEARS",
                   help="found only with at least this inverse false-alarm rate (default: any matched candidate)")
    g = parser.add_argument_group("running and output")
    g.add_argument("--threads", type=positive_int, metavar="N", help="worker threads (default: all cores)")
    g.add_argument("--output", metavar="FILE", default="found_missed.parquet",
                   help="found/missed table (default %(default)s)")
    g.add_argument("--candidates", metavar="FILE", help="also write the candidates with injections (Parquet)")
    g.add_argument("--summary", metavar="FILE", help="JSON summary (default: --output with suffix .json)")
    g.add_argument("--no-progress", action="store_true", help="do not show progress bars")


def run(args) -> int:
    """Run ``chirpsift campaign``; return the exit status."""
    from ..bank import Bank
    from ..config import load_config
    from ..io import read_strain, write_json_atomic, write_triggers
    from ..threads import set_threads
    from .campaign import MATCH_WINDOW, run_campaign

    strains = strain_files(args.strain)
    inputs = {"injection set (--injections)": args.injections, "sites file (--sites)": args.sites,
              "bank file (--bank)": args.bank, "config file (--config)": args.config,
              **{f"strain file of {name} (--strain)": path for name, path in strains.items()}}
    output = check_output(args.output, "--output", ".parquet", inputs)
    summary = check_output(args.summary or output.with_suffix(".json"), "--summary", ".json", inputs)
    candidates = None
    if args.candidates:
        candidates = check_output(args.candidates, "--candidates", ".parquet",
                                  {**inputs, "found/missed table (--output)": output})
    sites = pick_sites(site_set(args.sites), strains, args.sites)
    if len(sites) < 2:
        raise ValueError(f"a campaign needs strain from at least two sites for coincidences, got {len(sites)}")
    settings = search_settings(load_config(args.config).search if args.config else {}, args)
    inj, _ = read_injections(args.injections)
    data = {name: read_strain(path) for name, path in strains.items()}
    first = next(iter(data.values()))
    for name, s in data.items():
        if s.sample_rate != first.sample_rate or s.t0 != first.t0 or s.data.size != first.data.size:
            raise ValueError(f"strain of site {name!r} ({s.sample_rate:g} Hz from {s.t0} s, {s.data.size} samples) "
                             f"does not line up with the first site's ({first.sample_rate:g} Hz from {first.t0} s, "
                             f"{first.data.size} samples)")
    bank = Bank.load(args.bank)
    if args.threads:
        set_threads(args.threads)
    result = run_campaign({k: v.data for k, v in data.items()}, sites, inj, bank, sample_rate=first.sample_rate,
                          t0=first.t0, f_low=settings.f_low, psd=args.psd, settings=settings, n_slides=args.slides,
                          slide_step=args.slide_step, coincidence_window=args.coincidence_window,
                          match_window=args.match_window or MATCH_WINDOW, ifar_threshold=args.ifar_threshold,
                          progress=not args.no_progress)
    table = result.found_missed
    rule = ("any matched candidate" if args.ifar_threshold is None else f"IFAR >= {args.ifar_threshold:g} yr")
    doc = {
        "kind": "chirpsift-found-missed",
        "injections": os.path.abspath(args.injections),
        "sites": list(sites),
        "settings": settings.as_dict(),
        "psd": args.psd or "estimated",
        "slides": args.slides,
        "slide_step": args.slide_step,
        "match_window": args.match_window or MATCH_WINDOW,
        "found_rule": rule,
        "analysed": result.analysed,
        "analysed_time": result.analysed_time,
        "counts": {"injections": int(table.size), "analysed": int(table["analysed"].sum()),
                   "found": int((table["found"] & table["analysed"]).sum()),
                   "candidates": int(result.candidates.size), "background": int(result.background.size)},
        "caution": CAUTION,
    }
    write_triggers(output, table, doc)
    if candidates is not None:
        write_triggers(candidates, result.candidates, doc)
    write_json_atomic(summary, doc)
    c = doc["counts"]
    print(f"{c['found']} of {c['analysed']} analysed injections found ({rule}) among {c['candidates']} candidates "
          f"over {result.analysed_time:g} s of coincident time at {', '.join(sites)}. Wrote {output} and {summary}.")
    print(f"Caution: {CAUTION}")
    return 0
