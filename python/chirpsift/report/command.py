"""``chirpsift report RUN_FOLDER``: write (again) the HTML report of a run folder."""

from __future__ import annotations

import argparse

__all__ = ["NAME", "HELP", "add_arguments", "run"]

NAME = "report"
HELP = "write the HTML report of a run folder"
PROG = "chirpsift report"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the ``report`` subcommand's arguments to ``parser``."""
    parser.description = (
        "Write report/report.html (one self-contained page) and its PNG plots from a folder written by "
        "chirpsift run. Exit status: 0 done, 2 bad input, 1 unexpected failure."
    )
    parser.add_argument("folder", metavar="RUN_FOLDER", help="output folder of chirpsift run")
    parser.add_argument("--top", metavar="N", type=int, default=10,
                        help="number of loudest candidates listed (default: %(default)s)")


def run(args: argparse.Namespace) -> int:
    """Run ``chirpsift report`` with parsed ``args``.

    Bad input is raised for the command line to report in one line with exit status 2.

    Returns
    -------
    int
        0 success.
    """
    from .html import write_report

    if args.top < 1:
        raise ValueError(f"--top must be at least 1, got {args.top}")
    print(f"Report: {write_report(args.folder, top=args.top)}")
    return 0
