"""``chirpsift bench``: the standard benchmark workloads, one table of ratios measured in one run."""

from __future__ import annotations

import argparse
import sys
import time

from ..benchmarks import QUICK_SCALE, SCALING_RUNS, WORKLOADS, format_table
from ..benchmarks import run as run_suite
from ._paths import check_output
from ._types import Once, positive_float, positive_int

__all__ = ["HELP", "add_arguments", "run", "QUICK_SECONDS"]

HELP = "measure the standard benchmark workloads"

#: Wall time (s) of ``chirpsift bench --quick`` on an idle 2-core machine of the CI kind.
#: Measured side by side on a busy one (load 5-6), this version took 114 s where the
#: previous layout took 132 s; that one took 25 s when the machine was idle.
QUICK_SECONDS = 30

#: Paired scaling runs with ``--quick``.
_QUICK_SCALING_RUNS = 5


def _workload_list(text: str) -> list[str]:
    names = [x.strip().upper() for x in text.split(",") if x.strip()]
    bad = [x for x in names if x not in WORKLOADS]
    if bad or not names:
        raise argparse.ArgumentTypeError(
            f"unknown workload(s) {', '.join(bad) or '(none)'} in {text!r}; choose from {','.join(WORKLOADS)}"
        )
    return names


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the flags of ``chirpsift bench`` to ``parser``."""
    parser.description = (
        "Run the standard benchmark workloads (chirpsift.benchmarks) and print one table. Every target is a "
        "ratio of two timings taken in the same run; speed is measured, never asserted, so the exit status "
        "is 0 whether or not a target is met."
    )
    parser.add_argument("--quick", action="store_true",
                        help=f"a quarter of the templates (scale {QUICK_SCALE:g}), best of 2, "
                             f"{_QUICK_SCALING_RUNS} scaling runs: about {QUICK_SECONDS} s on an idle 2-core machine, "
                             "several times that on a busy one")
    parser.add_argument("--scale", type=positive_float, metavar="X",
                        help=f"workload scale: template counts times X (default: 1, or {QUICK_SCALE:g} with --quick)")
    parser.add_argument("--workloads", type=_workload_list, default=list(WORKLOADS), metavar="LIST",
                        help=f"comma-separated subset of {','.join(WORKLOADS)} (default: all)")
    parser.add_argument("--threads", type=positive_int, metavar="N",
                        help="threads of the multi-threaded rows (default: the CPUs available)")
    parser.add_argument("--repeats", type=positive_int, metavar="N",
                        help="each timing is the best of N runs (default: 3, or 2 with --quick)")
    parser.add_argument("--scaling-runs", type=positive_int, metavar="N",
                        help=f"paired 1-thread / n-thread runs behind the thread-scaling row, reported as median "
                             f"and range (default: {SCALING_RUNS}, or {_QUICK_SCALING_RUNS} with --quick)")
    parser.add_argument("--json", dest="json_path", action=Once, what="JSON file", metavar="FILE.json",
                        help="also write the results to this JSON file")
    parser.add_argument("--bank", action=argparse.BooleanOptionalAction, default=True,
                        help="time the match kernel and place and check a bank (region (a): 1-3 Msun from 30 Hz "
                             "with 10^4 coverage points, a few minutes; a small region with --quick); default: on")
    parser.add_argument("--quiet", action="store_true", help="no progress lines on stderr")


def run(args) -> int:
    """Run ``chirpsift bench`` from parsed arguments (see :func:`add_arguments`)."""
    from ..io import write_json_atomic

    json_path = check_output(args.json_path, "--json", ".json", {}) if args.json_path else None
    scale = args.scale if args.scale is not None else (QUICK_SCALE if args.quick else 1.0)
    repeats = args.repeats if args.repeats is not None else (2 if args.quick else 3)
    scaling_runs = args.scaling_runs if args.scaling_runs is not None else (
        _QUICK_SCALING_RUNS if args.quick else SCALING_RUNS)
    log = None if args.quiet else (lambda msg: print(f"[bench] {msg}", file=sys.stderr, flush=True))
    started = time.perf_counter()
    rows, context = run_suite(args.workloads, scale=scale, threads=args.threads, repeats=repeats,
                              scaling_runs=scaling_runs, bank=args.bank, log=log)
    context["wall_s"] = round(time.perf_counter() - started, 1)
    print(format_table(rows, context))
    if json_path is not None:
        write_json_atomic(json_path, {"context": context, "measurements": [m.as_dict() for m in rows]})
    return 0
