"""``chirpsift run ANALYSIS.toml``: the whole analysis, resumable, ending with the report."""

from __future__ import annotations

import argparse
import sys

__all__ = ["NAME", "HELP", "add_arguments", "run", "print_summary"]

NAME = "run"
HELP = "run a whole analysis file: search every site, coincidences, false-alarm rates, report"
PROG = "chirpsift run"
DESCRIPTION = (
    "Run the analysis described by a TOML file (keys in the README): copy the bank, search each site's strain "
    "catalogue, measure each site's spectrum, find coincidences and their time-slide background, give "
    "candidates false-alarm rates, run the injection campaign and measure the sensitivity (with an "
    "[injections] table) and write the HTML report. Every output is published atomically into the "
    "output folder and recorded in its manifest.json; running the same command again skips what is complete, "
    "on any engine. Units run in this process by default, or on Dask (the [engine] table, or --engine, "
    "--workers, --scheduler; needs pip install \"chirpsift[cluster]\"). "
    "Exit status: 0 done, 2 bad input (one line on stderr, naming failed units), 1 unexpected failure, "
    "130 interrupted."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the ``run`` subcommand's arguments to ``parser``."""
    parser.description = DESCRIPTION
    parser.add_argument("analysis", metavar="ANALYSIS.toml", help="the analysis file")
    parser.add_argument("--quiet", action="store_true",
                        help="no progress bar: one line per --every units or per minute (for batch logs)")
    parser.add_argument("--every", metavar="N", type=int, default=10,
                        help="units between progress lines with --quiet (default: %(default)s)")
    from .stages import STAGES

    parser.add_argument("--stop-after", metavar="STAGE", choices=STAGES,
                        help=f"stop once this stage is complete ({', '.join(STAGES)})")
    from ..distributed.settings import ENGINE_KINDS

    engine = parser.add_argument_group("engine (override the analysis file's [engine] table)")
    engine.add_argument("--engine", metavar="KIND", choices=ENGINE_KINDS,
                        help=f"where units run: {', '.join(ENGINE_KINDS)} (default: the file's, else process)")
    engine.add_argument("--workers", metavar="N", type=int,
                        help="local: worker processes; htcondor, slurm: the most jobs")
    engine.add_argument("--threads-per-worker", metavar="N", type=int,
                        help="chirpsift threads of each worker process, one unit at a time (default 1 on Dask)")
    engine.add_argument("--scheduler", metavar="ADDRESS",
                        help="join the running Dask scheduler at ADDRESS (engine 'scheduler')")
    engine.add_argument("--attempts", metavar="N", type=int,
                        help="tries of a failing unit before it is reported (default 1 in-process, 3 on Dask)")


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
    engine = engine_from_flags(analysis.engine, args)
    try:
        result = run_analysis(analysis, progress="lines" if args.quiet else "bar", every=args.every,
                              stop_after=args.stop_after, engine=engine)
    except KeyboardInterrupt:
        print(f"{PROG}: interrupted; completed units are kept: run the same command to resume", file=sys.stderr)
        return 130
    folder = analysis.output
    where = "" if result.engine == "process" or not result.ran else f" on engine {result.engine!r}"
    print(f"{len(result.ran)} units run{where}, {len(result.skipped)} already complete; outputs in {folder}")
    if (folder / "candidates.parquet").exists():
        print_summary(folder, analysis.site_names, analysis.top)
    report = folder / "report" / "report.html"
    if report.exists():
        print(f"Report: {report}")
    return 0


def engine_from_flags(engine, args):
    """Return the analysis file's engine with the command's flags applied (flags win).

    ``--scheduler ADDRESS`` means ``--engine scheduler``; a flag that does not fit the
    engine (``--workers`` with ``scheduler``) is an error naming it.
    """
    kind = args.engine
    if args.scheduler is not None:
        if kind not in (None, "scheduler"):
            raise ValueError(f"--scheduler joins a running scheduler: it does not go with --engine {kind}")
        kind = "scheduler"
    changes = dict(kind=kind, workers=args.workers, threads_per_worker=args.threads_per_worker,
                   address=args.scheduler, attempts=args.attempts)
    if kind is not None and kind != engine.kind:  # keys of the file's engine that do not fit the new one
        from ..distributed import EngineSettings

        engine = EngineSettings(kind=kind, templates_per_unit=engine.templates_per_unit,
                                seconds_per_unit=engine.seconds_per_unit,
                                attempts=engine.attempts, threads_per_worker=engine.threads_per_worker)
    for flag in ("workers", "threads_per_worker", "attempts"):
        value = getattr(args, flag)
        if value is not None and value < 1:
            raise ValueError(f"--{flag.replace('_', '-')} must be at least 1, got {value}")
    return engine.replace(**changes)


def print_summary(folder, names, top: int, out=None) -> None:
    """Print each site's live time and the loudest candidates of a run folder, with the cautions.

    Parameters
    ----------
    folder : path
        A run's output folder, complete up to its candidates.
    names : list of str
        The sites, in order.
    top : int
        Candidates to list.
    out : file, optional
        Default: stdout.
    """
    import math

    import numpy as np

    from ..io import read_triggers
    from ..network.coincidence import CAUTIONS
    from ..pipeline import LiveTimeTable

    out = sys.stdout if out is None else out
    for n in names:
        _, meta = read_triggers(folder / "triggers" / f"{n}.parquet")
        t = meta["live_time_table"]
        table = LiveTimeTable(t["start"], t["end"], t["seconds"], t["intervals"])
        print(f"\n{n}: where each second went", file=out)
        print(table.format(), file=out)
    cands, meta = read_triggers(folder / "candidates.parquet")
    print(f"\n{len(cands)} zero-lag candidates in {meta['live_time']:g} s analysed by all sites at once; "
          f"{meta['n_slides']} time slides, background live time {meta['background_time']:g} s.", file=out)
    if len(cands):
        cols = "".join(f" {n[:10] + ' SNR':>15}" for n in names)
        print(f"{'#':>3} {'time (s)':>17} {'m1 + m2 (Msun)':>15}{cols} {'statistic':>9} {'IFAR (yr)':>10}", file=out)
        for i, row in enumerate(cands[:top]):
            snrs = "".join(f" {row[f'{n}_snr']:15.2f}" if np.isfinite(row[f"{n}_snr"]) else f" {'-':>15}"
                           for n in names)
            ifar = float(row["ifar"])
            ifar_text = "n/a" if not math.isfinite(ifar) else (">" if row["far_bound"] else "") + f"{ifar:.3g}"
            masses = f"{row['m1']:#.4g} + {row['m2']:#.4g}"  # neighbouring templates differ in the third digit
            print(f"{i + 1:>3} {row['time']:17.4f} {masses:>15}{snrs} {row['statistic']:9.3f} {ifar_text:>10}",
                  file=out)
    print(CAUTIONS, file=out)
