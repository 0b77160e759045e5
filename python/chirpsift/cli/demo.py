"""``chirpsift demo``: the main job on an invented scenario, from strain files to the report.

It writes a scenario of its own (:mod:`chirpsift.demo`: three invented sites, coloured
Gaussian noise from design curves, one hidden binary, one loud glitch, a veto and a
missing file) into a folder, then runs ``chirpsift run`` on the analysis file it wrote,
exactly as a user would (bank, search, coincidences and time-slide background,
false-alarm rates, injection campaign, sensitivity, report), and prints what it found
beside what was hidden.

Run again on the same folder with the same settings, it keeps the scenario's files and
the run resumes (nothing left to do: it prints the summary again). A folder holding
anything else is refused.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

from ._errors import UsageError
from ._types import Once, nonnegative_int, positive_int

__all__ = ["HELP", "add_arguments", "run"]

HELP = "the whole job on an invented three-site scenario: write it, run it, show what was found"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the flags of ``chirpsift demo`` to ``parser``."""
    from ..demo import DEFAULT_FOLDER
    from ..demo import scenario as sc

    parser.description = (
        f"Write an invented scenario into a folder ({DEFAULT_FOLDER}/ unless --output): three invented sites "
        f"({', '.join(sc.SITES)}), {sc.MINUTES:g} minutes of coloured Gaussian noise per site from analytic design "
        f"curves at {sc.SAMPLE_RATE:g} Hz in {sc.FILES_PER_SITE} files (one of {sc.MISSING_FILE[0]}'s missing), "
        f"one {sc.HIDDEN['m1']}+{sc.HIDDEN['m2']} Msun binary hidden at network SNR {sc.HIDDEN_NETWORK_SNR:g}, a "
        f"loud glitch at {sc.GLITCH['site']} and a veto at {sc.VETO[0]}. Then run 'chirpsift run' on the analysis "
        f"file it wrote ({sc.ANALYSIS_FILE}): search with a bank of {sc.REGION[0]}-{sc.REGION[1]} Msun "
        f"templates, coincidences with {sc.SLIDES} time slides, false-alarm rates, {sc.INJECTIONS} injections, "
        "sensitivity and the HTML report; and print the top candidates, the hidden binary injected against "
        "recovered, the sensitive range and the report's path."
    )
    parser.add_argument("--output", action=Once, what="folder", metavar="DIR", default=DEFAULT_FOLDER,
                        help="the demo folder (default: %(default)s)")
    parser.add_argument("--minutes", type=_minutes, default=sc.MINUTES, metavar="M",
                        help=f"minutes of data per site, at least {sc.MIN_MINUTES:g} (default: %(default)s)")
    parser.add_argument("--slides", type=positive_int, default=sc.SLIDES, metavar="N",
                        help="time slides of the background (default: %(default)s; fewer fit in fewer minutes)")
    parser.add_argument("--injections", type=positive_int, default=sc.INJECTIONS, metavar="N",
                        help="simulated binaries of the injection campaign (default: %(default)s)")
    parser.add_argument("--seed", type=nonnegative_int, default=sc.NOISE_SEED, metavar="N",
                        help="noise seed (default: %(default)s)")
    parser.add_argument("--quiet", action="store_true",
                        help="no progress bar: one line per unit of the run (for logs)")


def _minutes(text: str) -> float:
    from ..demo.scenario import MIN_MINUTES
    from ._types import number

    return number(float, at_least=MIN_MINUTES)(text)


def _prepare(folder: Path, scenario) -> bool:
    """Check the demo folder; return True if it already holds this very scenario."""
    from ..demo import read_scenario

    if folder.exists() and not folder.is_dir():
        raise UsageError(f"--output {str(folder)!r} is a file, not a folder")
    if not folder.exists() or not any(folder.iterdir()):
        folder.mkdir(parents=True, exist_ok=True)
        return False
    truth = read_scenario(folder)
    if truth is None:
        raise UsageError(f"--output {str(folder)!r} holds files that are not a complete chirpsift demo (no "
                         "scenario.json, which a demo writes last: an interrupted one leaves none); give another "
                         "folder, or remove it")
    wanted = {k: getattr(scenario, k) for k in ("minutes", "seed", "slides", "injections")}
    held = {k: truth.get(k) for k in wanted}
    if held != wanted:
        diff = ", ".join(f"{k} {held[k]!r} (now {wanted[k]!r})" for k in wanted if held[k] != wanted[k])
        raise UsageError(f"--output {str(folder)!r} holds a demo with other settings: {diff}; give another "
                         "folder, or remove it")
    return True


def run(args) -> int:
    """Run ``chirpsift demo`` from parsed arguments (see :func:`add_arguments`)."""
    from ..demo import ANALYSIS_FILE, make_scenario, read_outcome, read_scenario, summary_lines, write_scenario
    from ..run import command as run_command

    started = time.perf_counter()
    folder = Path(args.output)
    try:
        scenario = make_scenario(args.minutes, seed=args.seed, slides=args.slides, injections=args.injections)
    except ValueError as exc:  # slides or injections that do not fit: name the flags
        raise UsageError(str(exc).replace("slides=", "--slides ").replace("injections=", "--injections ")
                         .replace("give more minutes", "give more --minutes")) from None
    if _prepare(folder, scenario):
        print(f"chirpsift demo: {folder} already holds this scenario; running it again resumes the run")
    else:
        print(f"chirpsift demo: writing the scenario into {folder}")
        write_scenario(folder, scenario, progress=lambda text: print(f"  {text}", flush=True))
    written = time.perf_counter() - started
    analysis = folder / ANALYSIS_FILE
    print(f"chirpsift demo: chirpsift run {analysis}" + (" --quiet --every 1" if args.quiet else ""), flush=True)
    # exactly `chirpsift run`: its own parser and defaults, its own code path
    run_parser = argparse.ArgumentParser(prog="chirpsift run")
    run_command.add_arguments(run_parser)
    run_args = run_parser.parse_args([str(analysis), *(["--quiet", "--every", "1"] if args.quiet else [])])
    status = run_command.run(run_args)
    if status != 0:
        return status
    truth = read_scenario(folder)
    for line in summary_lines(read_outcome(folder, truth), truth):
        print(line)
    total = time.perf_counter() - started
    print(f"chirpsift demo: done in {total:.0f} s (scenario {written:.0f} s, run {total - written:.0f} s)")
    sys.stdout.flush()
    return 0
