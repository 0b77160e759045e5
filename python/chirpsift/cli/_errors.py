"""How the command line reports bad input: one line on stderr and exit status 2."""

from __future__ import annotations

import argparse
import difflib
import re
import sys

__all__ = ["UsageError", "INPUT_ERRORS", "Parser", "one_line", "print_error", "in_flag_terms"]


class UsageError(ValueError):
    """Bad command-line input (reported in one line, exit status 2)."""


#: Exceptions that mean "the input is wrong", not "chirpsift is broken".
INPUT_ERRORS = (ValueError, TypeError, FileNotFoundError, IsADirectoryError, NotADirectoryError, PermissionError,
                FileExistsError)


def one_line(message) -> str:
    """``message`` as one line (the parts of a multi-line message joined by "; ")."""
    parts = [p.strip().rstrip(";") for p in str(message).splitlines() if p.strip()]
    return "; ".join(parts)


class Parser(argparse.ArgumentParser):
    """Argument parser whose errors are one line naming the argument.

    The line points to ``--help`` and, for a misspelt option or command, to the nearest
    valid one.
    """

    def subparser(self, name: str | None) -> "Parser":
        """Return the parser of subcommand ``name`` (this parser if there is none by that name)."""
        for action in self._actions:
            if isinstance(action, argparse._SubParsersAction) and name in action.choices:
                return action.choices[name]
        return self

    def error(self, message):
        unknown = re.match(r"unrecognized arguments: (-[^\s=]+)", message)
        choice = re.match(r"argument \S+: invalid choice: '([^']*)' \(choose from (.*)\)", message)
        near = []
        if unknown:
            options = [s for a in self._actions for s in a.option_strings if s.startswith("--")]
            near = difflib.get_close_matches(unknown.group(1), options, n=1)
        elif choice:
            near = difflib.get_close_matches(choice.group(1), re.findall(r"'([^']*)'", choice.group(2)), n=1)
        if near:
            message += f" (did you mean {near[0]}?)"
        self.exit(2, f"{self.prog}: error: {one_line(message)} (see {self.prog} --help)\n")


def _flag_of(name: str) -> str:
    return "--" + name.replace("_", "-")


def in_flag_terms(message: str, api_only: dict | None = None) -> str:
    """``message`` as a command-line user needs it: flags, not Python keywords.

    A keyword followed by its own flag (``"pass sample_rate (--sample-rate)"``,
    ``"(dataset=, --dataset)"``) keeps only the flag; a value explained as an argument
    (``"sample_rate=2048.0 Hz (the sample_rate argument, --sample-rate)"``) is shown as
    the flag's (``"--sample-rate=2048.0 Hz"``); the keywords in ``api_only`` (keyword to
    flag) are replaced wherever they appear.

    Examples
    --------
    >>> from chirpsift.cli._errors import in_flag_terms
    >>> in_flag_terms("pass sample_rate (--sample-rate) or set t0_attr", {"t0_attr": "--t0-attr"})
    'pass --sample-rate or set --t0-attr'
    >>> in_flag_terms("name the dataset (dataset=, --dataset)")
    'name the dataset (--dataset)'
    >>> in_flag_terms("f.npz: sample_rate=2.0 Hz (the sample_rate argument, --sample-rate) conflicts")
    'f.npz: --sample-rate=2.0 Hz conflicts'
    """

    def keep_flag(match):
        return match.group(2) if _flag_of(match.group(1)) == match.group(2) else match.group(0)

    for name, flag in re.findall(r" \(the ([a-z][a-z0-9_]*) argument, (--[a-z0-9-]+)\)", message):
        if _flag_of(name) == flag:
            message = message.replace(f" (the {name} argument, {flag})", "")
            message = re.sub(rf"(?<![\w-]){re.escape(name)}=", f"{flag}=", message)
    message = re.sub(r"(?<![\w-])([a-z][a-z0-9_]*) \((--[a-z0-9-]+)\)", keep_flag, message)
    message = re.sub(r"\(([a-z][a-z0-9_]*)=, (--[a-z0-9-]+)\)",
                     lambda m: f"({m.group(2)})" if _flag_of(m.group(1)) == m.group(2) else m.group(0), message)
    for name, flag in (api_only or {}).items():
        message = re.sub(rf"(?<![\w-]){re.escape(name)}(?![\w-])", flag, message)
    return message


def print_error(prog: str, exc) -> None:
    """Print ``prog: error: message`` in one line on stderr."""
    print(f"{prog}: error: {one_line(exc)}", file=sys.stderr)
