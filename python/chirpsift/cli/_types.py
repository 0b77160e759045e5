"""argparse plumbing: number types built by one factory, and an action that refuses repeats.

A type function raises :class:`argparse.ArgumentTypeError`, so argparse reports
``argument --f-low: expected a number > 0, got '-5'`` with exit status 2.
"""

from __future__ import annotations

import argparse
import math

__all__ = ["number", "Once", "positive_float", "nonnegative_float", "finite_float", "positive_int", "nonnegative_int"]


def _bounds_text(kind: type, above, at_least, at_most) -> str:
    what = "an integer" if kind is int else "a number"
    if above is not None:
        return f"{what} > {above:g}"
    if at_least is not None and at_most is not None:
        return f"{what} from {at_least:g} to {at_most:g}"
    if at_least is not None:
        return f"{what} >= {at_least:g}"
    if at_most is not None:
        return f"{what} <= {at_most:g}"
    return "a finite number" if kind is float else what


def number(kind: type = float, *, above=None, at_least=None, at_most=None):
    """Make an argparse ``type``: text to ``kind`` (``float`` or ``int``), finite and within bounds.

    Parameters
    ----------
    kind : {float, int}
        The type of the value.
    above : float, optional
        Exclusive lower bound.
    at_least, at_most : float, optional
        Inclusive bounds.

    Examples
    --------
    >>> from chirpsift.cli._types import number
    >>> number(float, above=0)("2.5"), number(int, at_least=0, at_most=7)("7")
    (2.5, 7)
    >>> number(float, above=0)("0")
    Traceback (most recent call last):
    ...
    argparse.ArgumentTypeError: expected a number > 0, got '0'
    """
    wanted = _bounds_text(kind, above, at_least, at_most)

    def parse(text: str):
        try:
            value = kind(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"expected {wanted}, got {text!r}") from None
        if kind is float and not math.isfinite(value):
            raise argparse.ArgumentTypeError(f"expected {wanted}, got {text!r}")
        if (above is not None and not value > above) or (at_least is not None and value < at_least) \
                or (at_most is not None and value > at_most):
            raise argparse.ArgumentTypeError(f"expected {wanted}, got {text!r}")
        return value

    parse.__name__ = wanted  # argparse names the type in some messages
    return parse


positive_float = number(float, above=0)
nonnegative_float = number(float, at_least=0)
finite_float = number(float)
positive_int = number(int, at_least=1)
nonnegative_int = number(int, at_least=0)


class Once(argparse.Action):
    """Store a value, refusing the option when it is given a second time.

    ``what`` names the value in the message.
    For options naming one file or one choice (``--strain``, ``--bank``, ``--output``):
    with the last one silently winning, ``--strain a.h5 --strain b.h5`` would search
    only ``b.h5``.
    """

    def __init__(self, *args, what: str = "value", **kwargs):
        super().__init__(*args, **kwargs)
        self.what = what

    def __call__(self, parser, namespace, values, option_string=None):
        seen = getattr(namespace, "_given_once", None)
        if seen is None:
            seen = {}
            setattr(namespace, "_given_once", seen)
        if self.dest in seen:
            raise argparse.ArgumentError(
                self, f"given twice ({seen[self.dest]!r} and {values!r}); give one {self.what} per run"
            )
        seen[self.dest] = values
        setattr(namespace, self.dest, values)
