"""The ``chirpsift`` command line.

Each subcommand is a module listed in :data:`COMMANDS` with:

``HELP``
    One line for ``chirpsift --help``.
``add_arguments(parser)``
    Give the subcommand's parser its description and arguments.
``run(args) -> int``
    Do the work and return the exit status. Bad input is raised, never printed:
    :class:`UsageError`, ``ValueError``, ``TypeError`` or an ``OSError`` about a file.

:func:`main` parses the command line, calls the subcommand and turns what it raises into
an exit status: 0 success, 2 bad usage or bad input (one line on stderr, no traceback),
1 unexpected failure (with the traceback, to report), 130 interrupted. A new subcommand
(``bank``, ``network``) is one more line in :data:`COMMANDS`.
"""

from __future__ import annotations

import argparse
import importlib
import re
import sys
import traceback
import warnings
from typing import NamedTuple

from ._errors import INPUT_ERRORS, Parser, UsageError, one_line, print_error

__all__ = ["main", "build_parser", "COMMANDS", "Command", "UsageError",
           "EXIT_OK", "EXIT_FAILURE", "EXIT_USAGE", "EXIT_INTERRUPTED"]

PROG = "chirpsift"

EXIT_OK = 0
EXIT_FAILURE = 1
EXIT_USAGE = 2
EXIT_INTERRUPTED = 130


class Command(NamedTuple):
    """A subcommand: its name and the module holding ``HELP``, ``add_arguments`` and ``run``."""

    name: str
    module: str


COMMANDS: tuple[Command, ...] = (
    Command("search", "chirpsift.cli.search"),
    Command("demo", "chirpsift.cli.demo"),
    Command("bank", "chirpsift.bank.command"),
    Command("bench", "chirpsift.cli.bench"),
    Command("network", "chirpsift.network.command"),
    Command("inject", "chirpsift.inject.inject_command"),
    Command("campaign", "chirpsift.inject.campaign_command"),
    Command("sensitivity", "chirpsift.inject.sensitivity_command"),
    Command("run", "chirpsift.run.command"),
    Command("report", "chirpsift.report.command"),
)


def build_parser() -> argparse.ArgumentParser:
    """Build the argument parser of the ``chirpsift`` command (all subcommands)."""
    parser = Parser(
        prog=PROG,
        description="Matched-filter search for compact-binary inspiral signals in strain data.",
        epilog=f"Run '{PROG} COMMAND --help' for a command's options.",
        allow_abbrev=False,
    )
    parser.add_argument("--version", action="store_true", help="print the version and exit")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for command in COMMANDS:
        module = importlib.import_module(command.module)
        p = sub.add_parser(command.name, help=module.HELP, description=module.HELP, allow_abbrev=False)
        module.add_arguments(p)
        p.set_defaults(run=module.run)
    return parser


def _version() -> str:
    from .. import __version__

    return __version__


def _format_warning(message, category, filename, lineno, line=None) -> str:
    """Format a warning as one line in the command's words, not as a source location.

    Flags stand for the search's keywords, and the run summary's ``gates`` for the
    search's ``info['gates']``.
    """
    from ..config import in_option_terms

    text = re.sub(r"info\['(\w+)'\]", r"'\1' in the run summary", in_option_terms(one_line(message), "--"))
    return f"{PROG}: warning: {text}\n"


def main(argv=None) -> int:
    """Run the ``chirpsift`` command.

    Parameters
    ----------
    argv : list of str, optional
        Arguments without the program name (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        Exit status: 0 success, 2 bad usage or input, 1 unexpected failure,
        130 interrupted.
    """
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    try:
        args, unknown = parser.parse_known_args(argv)
        if unknown:  # reported by the subcommand's parser, which knows its own flags
            parser.subparser(args.command).error(f"unrecognized arguments: {' '.join(unknown)}")
    except SystemExit as exc:  # argparse: --help (0) or a usage error (2)
        return exc.code if isinstance(exc.code, int) else EXIT_USAGE
    if args.version:
        print(f"{PROG} {_version()}")
        return EXIT_OK
    if args.command is None:
        parser.print_help(sys.stderr)
        return EXIT_USAGE
    args.argv = argv
    plain_format = warnings.formatwarning
    warnings.formatwarning = _format_warning
    try:
        return int(args.run(args))
    except KeyboardInterrupt:
        print(f"{PROG}: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except INPUT_ERRORS as exc:
        print_error(PROG, exc)
        return EXIT_USAGE
    except ImportError as exc:  # an optional dependency that is not installed
        print_error(PROG, exc)
        return EXIT_FAILURE
    except Exception:
        print(f"{PROG}: unexpected failure; please report it with the traceback below", file=sys.stderr)
        traceback.print_exc(file=sys.stderr)
        return EXIT_FAILURE
    finally:
        warnings.formatwarning = plain_format


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
