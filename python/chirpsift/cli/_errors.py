"""How the command line reports bad input: one line on stderr and exit status 2."""

from __future__ import annotations

import argparse
import difflib
import re
import sys

__all__ = ["UsageError", "INPUT_ERRORS", "Parser", "one_line", "print_error"]


class UsageError(ValueError):
    """Bad command-line input (reported in one line, exit status 2)."""


#: Exceptions that mean "the input is wrong", not "chirpsift is broken".
INPUT_ERRORS = (ValueError, TypeError, FileNotFoundError, IsADirectoryError, NotADirectoryError, PermissionError,
                FileExistsError)


def one_line(message) -> str:
    """``message`` as one line (the parts of a multi-line message joined by "; ")."""
    parts = [p.strip() for p in str(message).splitlines() if p.strip()]
    return "; ".join(parts)


class Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one line naming the argument, with a pointer to
    ``--help`` and, for a misspelt option, the nearest valid one."""

    def _with_subparsers(self) -> list:
        found = [self]
        for action in self._actions:
            if isinstance(action, argparse._SubParsersAction):
                for sub in action.choices.values():
                    found.extend(sub._with_subparsers() if isinstance(sub, Parser) else [sub])
        return found

    def error(self, message):
        match = re.match(r"unrecognized arguments: (\S+)", message)
        if match and match.group(1).startswith("-"):
            word = match.group(1).split("=", 1)[0]
            options = [s for p in self._with_subparsers() for a in p._actions for s in a.option_strings
                       if s.startswith("--")]
            near = difflib.get_close_matches(word, options, n=1)
            if near:
                message += f" (did you mean {near[0]}?)"
        self.exit(2, f"{self.prog}: error: {one_line(message)} (see {self.prog} --help)\n")


def print_error(prog: str, exc) -> None:
    """Print ``prog: error: message`` in one line on stderr."""
    print(f"{prog}: error: {one_line(exc)}", file=sys.stderr)
