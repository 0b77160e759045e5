"""``chirpsift sensitivity``: efficiency, sensitive volume, volume-time and range from found/missed injections."""

from __future__ import annotations

import argparse
import os
from pathlib import Path

import numpy as np

from ..cli._paths import check_output
from ..cli._types import finite_float, nonnegative_float, positive_float, positive_int
from .command import CAUTION, check_folder

__all__ = ["HELP", "add_arguments", "run"]

HELP = "efficiency, sensitive volume, volume-time and range from found and missed injections"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the flags of ``chirpsift sensitivity`` to ``parser``."""
    parser.description = (
        "Efficiency against distance, sensitive volume, volume-time and range from a found/missed table "
        "(written by chirpsift campaign). Only injections inside the analysed time count."
    )
    parser.add_argument("--found-missed", metavar="FILE", required=True, help="found/missed table (Parquet)")
    g = parser.add_argument_group("threshold (default: the table's own found column)")
    t = g.add_mutually_exclusive_group()
    t.add_argument("--ifar-threshold", type=nonnegative_float, metavar="YEARS",
                   help="found if the matched candidate's inverse false-alarm rate reaches this")
    t.add_argument("--min-statistic", type=finite_float, metavar="X",
                   help="found if the matched candidate's statistic reaches this")
    g = parser.add_argument_group("estimates")
    g.add_argument("--bins", type=positive_int, default=12, metavar="N",
                   help="distance bins of the efficiency (default %(default)s)")
    g.add_argument("--chirp-distance", action="store_true",
                   help="bin in distance scaled to a 1.4+1.4 Msun chirp mass, D (Mc_ref / Mc)^(5/6)")
    g.add_argument("--analysed-time", type=positive_float, metavar="S",
                   help="seconds analysed, for volume-time (default: from the table's metadata)")
    g.add_argument("--assume-found-within", type=nonnegative_float, default=0.0, metavar="MPC",
                   help="radius inside which every source counts as found (default %(default)s)")
    g = parser.add_argument_group("output")
    g.add_argument("--plot", metavar="FILE.png", help="efficiency against distance as a PNG")
    g.add_argument("--output", metavar="FILE.json", help="the figures and the efficiency table as JSON")


def run(args) -> int:
    """Run ``chirpsift sensitivity``; return the exit status."""
    from ..io import read_triggers, write_json_atomic
    from .population import INJECTION_DTYPE
    from .sensitivity import chirp_distance, efficiency, plot_efficiency, sensitivity

    inputs = {"found/missed table (--found-missed)": args.found_missed}
    if args.plot is not None:
        if Path(args.plot).suffix.lower() != ".png":
            raise ValueError(f"--plot {args.plot!r}: it is written as a PNG image; give a file name ending in .png")
        check_folder(args.plot, "--plot")
    if args.output is not None:
        check_output(args.output, "--output", ".json", inputs)
    table, meta = read_triggers(args.found_missed)
    need = list(INJECTION_DTYPE.names) + ["analysed", "found", "statistic", "ifar"]
    missing = [f for f in need if f not in (table.dtype.names or ())]
    if missing:
        raise ValueError(f"{args.found_missed}: not a found/missed table, it lacks {', '.join(missing)}")
    rows = table[table["analysed"].astype(bool)]
    if rows.size == 0:
        raise ValueError(f"{args.found_missed}: no injection lies inside the analysed time")
    if args.ifar_threshold is not None:
        found, rule = rows["ifar"] >= args.ifar_threshold, f"IFAR >= {args.ifar_threshold:g} yr"
    elif args.min_statistic is not None:
        found, rule = rows["statistic"] >= args.min_statistic, f"statistic >= {args.min_statistic:g}"
    else:
        found, rule = rows["found"].astype(bool), meta.get("found_rule", "the table's found column")
    inj = np.zeros(rows.size, dtype=INJECTION_DTYPE)
    for f in INJECTION_DTYPE.names:
        inj[f] = rows[f]
    analysed_time = args.analysed_time if args.analysed_time is not None else meta.get("analysed_time")
    sens = sensitivity(inj, found, analysed_time=analysed_time, assume_found_within=args.assume_found_within)
    x = chirp_distance(inj["distance"], inj["m1"], inj["m2"]) if args.chirp_distance else inj["distance"]
    label = "chirp distance (Mpc, 1.4+1.4 Msun)" if args.chirp_distance else "distance (Mpc)"
    eff = efficiency(x, found, bins=args.bins)
    if args.plot:
        plot_efficiency(eff, args.plot, xlabel=label, sensitive_range=(sens.range, sens.range_error),
                        title=f"{sens.found} of {sens.injections} injections found ({rule})")
    doc = {"found_missed": os.path.abspath(args.found_missed), "rule": rule, "abscissa": label,
           **sens.as_dict(), "efficiency": {k: eff[k].tolist() for k in eff.dtype.names}, "caution": CAUTION}
    if args.output:
        write_json_atomic(args.output, doc)
    vt = ("" if sens.volume_time is None else
          f", VT {sens.volume_time:.4g} +- {sens.volume_time_error:.2g} Mpc^3 yr over {sens.analysed_time:g} s")
    print(f"{sens.found} of {sens.injections} analysed injections found ({rule}): sensitive volume "
          f"{sens.volume:.4g} +- {sens.volume_error:.2g} Mpc^3, "
          f"range {sens.range:.4g} +- {sens.range_error:.2g} Mpc{vt}.")
    print(f"Caution: {CAUTION}")
    return 0
