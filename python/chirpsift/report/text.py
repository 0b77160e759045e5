"""Wording helpers for what is printed on screen."""

from __future__ import annotations

__all__ = ["plural"]


def plural(count: int, noun: str, many: str | None = None) -> str:
    """``count`` followed by ``noun`` in the number that matches it.

    Parameters
    ----------
    count : int
        How many.
    noun : str
        The singular form.
    many : str, optional
        The plural form (default: ``noun + "s"``).

    Examples
    --------
    >>> from chirpsift.report import plural
    >>> plural(1, "trigger"), plural(0, "trigger"), plural(3, "analysis", "analyses")
    ('1 trigger', '0 triggers', '3 analyses')
    """
    n = int(count)
    return f"{n} {noun if n == 1 else (many or noun + 's')}"
