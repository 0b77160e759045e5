"""``chirpsift run ANALYSIS.toml``: the whole analysis, resumable, ending with the report."""

from __future__ import annotations

import argparse
import sys

__all__ = ["NAME", "HELP", "add_arguments", "run"]

NAME = "run"
HELP = "run a whole analysis file: search every site, coincidences, false-alarm rates, report"
PROG = "chirpsift run"
DESCRIPTION = (
    "Run the analysis described by a TOML file (keys in the README): copy the bank, search each site's strain "
    "catalogue, measure each site's spectrum, find coincidences and their time-slide background, give "
    "candidates false-alarm rates and write the HTML report. Every output is published atomically into the "
    "output folder and recorded in its manifest.json; running the same command again skips what is complete. "
    "Exit status: 0 done, 2 bad input (one line on stderr), 1 unexpected failure, 130 interrupted."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the ``run`` subcommand's arguments to ``parser``."""
    parser.description = DESCRIPTION
    parser.add_argument("analysis", metavar="ANALYSIS.toml", help="the analysis file")
    parser.add_argument("--quiet", action="store_true",
                        help="no progress bar: one line per --every units or per minute (for batch logs)")
    parser.add_argument("--every", metavar="N", type=int, default=10,
                        help="units between progress lines with --quiet (default: %(default)s)")
    parser.add_argument("--stop-after", metavar="STAGE",
                        help="stop once this stage is complete (bank, search, spectrum, background, candidates, "
                             "report)")


def run(args: argparse.Namespace) -> int:
    """Run ``chirpsift run`` with parsed ``args``.

    Bad input is raised (``ValueError``, ``FileNotFoundError``, ...) for the command line
    to report in one line with exit status 2.

    Returns
    -------
    int
        0 success, 130 interrupted (completed units are kept).
    """
    from .analysis import load_analysis
    from .driver import run_analysis

    if args.every < 1:
        raise ValueError(f"--every must be at least 1, got {args.every}")
    analysis = load_analysis(args.analysis)
    try:
        result = run_analysis(analysis, progress="lines" if args.quiet else "bar", every=args.every,
                              stop_after=args.stop_after)
    except KeyboardInterrupt:
        print(f"{PROG}: interrupted; completed units are kept: run the same command to resume", file=sys.stderr)
        return 130
    folder = analysis.output
    print(f"{len(result.ran)} units run, {len(result.skipped)} already complete; outputs in {folder}")
    report = folder / "report" / "report.html"
    if report.exists():
        print(f"Report: {report}")
    return 0
