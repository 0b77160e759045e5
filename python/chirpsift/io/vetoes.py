"""Vetoes: time intervals a user excludes from a search, read from a text or TOML file.

Two file formats of our own, both in seconds (the same absolute times as the strain):

- text (any extension but ``.toml``): one interval per line, ``start end``, separated by
  spaces or tabs; blank lines and everything after ``#`` are ignored;
- TOML (``.toml``): one key, ``vetoes``, a list of ``[start, end]`` pairs.

Intervals are half-open, ``[start, end)``; overlapping or touching ones are merged.
"""

from __future__ import annotations

import difflib
import math
import os
import tomllib
from pathlib import Path

__all__ = ["read_vetoes", "check_vetoes"]


def _interval(pair, where: str) -> tuple[float, float]:
    if isinstance(pair, (str, bytes)) or not hasattr(pair, "__len__") or len(pair) != 2:
        raise ValueError(f"{where}: a veto is two times, start and end (s), got {pair!r}")
    out = []
    for value in pair:
        if isinstance(value, bool) or not isinstance(value, (int, float)) and not hasattr(value, "__float__"):
            raise ValueError(f"{where}: veto times must be numbers of seconds, got {value!r}")
        out.append(float(value))
    start, end = out
    if not (math.isfinite(start) and math.isfinite(end)):
        raise ValueError(f"{where}: veto times must be finite, got ({start!r}, {end!r})")
    if not end > start:
        raise ValueError(f"{where}: a veto must end after it starts, got start {start!r} s and end {end!r} s")
    return start, end


def _merged(intervals) -> list[tuple[float, float]]:
    out: list[tuple[float, float]] = []
    for start, end in sorted(intervals):
        if out and start <= out[-1][1]:
            out[-1] = (out[-1][0], max(out[-1][1], end))
        else:
            out.append((start, end))
    return out


def check_vetoes(vetoes, name: str = "vetoes") -> list[tuple[float, float]]:
    """Return vetoes given in code as sorted, merged ``(start, end)`` intervals (s).

    Parameters
    ----------
    vetoes : None, str, os.PathLike, or iterable of (float, float)
        A file for :func:`read_vetoes`, or the intervals themselves; None for none.
    name : str
        Argument name used in messages.

    Returns
    -------
    list of (float, float)

    Examples
    --------
    >>> from chirpsift.io.vetoes import check_vetoes
    >>> check_vetoes([(20.0, 30.0), (5.0, 10.0), (9.0, 12.0)])
    [(5.0, 12.0), (20.0, 30.0)]
    """
    if vetoes is None:
        return []
    if isinstance(vetoes, (str, os.PathLike)):
        return read_vetoes(vetoes)
    try:
        items = list(vetoes)
    except TypeError:
        raise TypeError(f"{name} must be a file or a list of (start, end) pairs, got {vetoes!r}") from None
    return _merged(_interval(pair, f"{name}[{i}]") for i, pair in enumerate(items))


def _read_toml(path: Path) -> list[tuple[float, float]]:
    try:
        with open(path, "rb") as fh:
            doc = tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{path}: cannot parse as TOML: {exc}") from None
    for key in doc:
        if key != "vetoes":
            near = difflib.get_close_matches(key, ["vetoes"], n=1)
            hint = "did you mean 'vetoes'?" if near else "the only key is 'vetoes'"
            raise ValueError(f"{path}: unknown key {key!r}; {hint}")
    items = doc.get("vetoes", [])
    if not isinstance(items, list):
        raise ValueError(f"{path}: 'vetoes' must be a list of [start, end] pairs, got {items!r}")
    return [_interval(pair, f"{path}: vetoes[{i}]") for i, pair in enumerate(items)]


def _read_text(path: Path) -> list[tuple[float, float]]:
    out = []
    with open(path, encoding="utf-8") as fh:
        for number, line in enumerate(fh, start=1):
            words = line.split("#", 1)[0].split()
            if not words:
                continue
            where = f"{path}:{number}"
            if len(words) != 2:
                raise ValueError(f"{where}: expected two times 'start end' (s), got {line.strip()!r}")
            try:
                pair = (float(words[0]), float(words[1]))
            except ValueError:
                raise ValueError(f"{where}: veto times must be numbers of seconds, got {line.strip()!r}") from None
            out.append(_interval(pair, where))
    return out


def read_vetoes(path) -> list[tuple[float, float]]:
    r"""Read vetoes from a text or TOML file (module docstring), sorted and merged.

    Parameters
    ----------
    path : str or os.PathLike
        ``.toml`` for the TOML format, any other extension for text.

    Returns
    -------
    list of (float, float)
        Half-open ``(start, end)`` intervals (s), sorted, overlapping ones merged.

    Raises
    ------
    FileNotFoundError
        If the file does not exist.
    ValueError
        For a line or entry that is not two finite times with end after start, or an
        unknown TOML key; the message names the file and the line or entry.

    Examples
    --------
    >>> from chirpsift.io.vetoes import read_vetoes
    >>> p = "vetoes.txt"
    >>> with open(p, "w") as fh:
    ...     _ = fh.write("# loud fan at the invented site\n1010 1012.5\n1000 1001  # test tone\n")
    >>> read_vetoes(p)
    [(1000.0, 1001.0), (1010.0, 1012.5)]
    >>> q = "vetoes.toml"
    >>> with open(q, "w") as fh:
    ...     _ = fh.write("vetoes = [[1000, 1001], [1010, 1012.5]]\n")
    >>> read_vetoes(q) == read_vetoes(p)
    True
    """
    path = Path(os.fspath(path))
    if not path.exists():
        raise FileNotFoundError(f"veto file not found: {path}")
    if path.is_dir():
        raise ValueError(f"{path}: is a directory, not a veto file")
    found = _read_toml(path) if path.suffix.lower() == ".toml" else _read_text(path)
    return _merged(found)
