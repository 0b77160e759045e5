"""The run context (machine, versions, load) and the Markdown table ``chirpsift bench`` prints."""

from __future__ import annotations

import datetime as _dt
import os
import platform

import numpy as np

from .measure import Measurement

__all__ = ["context", "format_table", "available_cpus"]


def available_cpus() -> int:
    """CPUs this process may run on."""
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # pragma: no cover - not Linux
        return os.cpu_count() or 1


def _cpu_model() -> str:
    try:
        with open("/proc/cpuinfo", encoding="utf-8", errors="replace") as fh:
            for line in fh:
                if line.lower().startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or platform.machine() or "unknown"


def _load_average():
    try:
        return round(os.getloadavg()[0], 2)
    except (AttributeError, OSError):  # pragma: no cover - not Unix
        return None


def context(threads: int) -> dict:
    """Machine, versions, date, load and thread count of a benchmark run."""
    from .. import __version__

    return {
        "threads": threads,
        "cpu": _cpu_model(),
        "cores": available_cpus(),
        "numpy": np.__version__,
        "chirpsift": __version__,
        "python": platform.python_version(),
        "date": _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds"),
        "load_average": _load_average(),
    }


def _value_text(m: Measurement) -> str:
    if m.value is None:
        return "not measured"
    if isinstance(m.value, float):
        text = f"{m.value:.3g}" if m.unit == "x" else f"{m.value:g}"
    else:
        text = str(m.value)
    return f"{text} {m.unit}".strip()


def format_table(rows, context) -> str:
    """Format the benchmark table as Markdown.

    Parameters
    ----------
    rows : list of Measurement
    context : dict
        As returned by :func:`chirpsift.benchmarks.run`.

    Returns
    -------
    str
        One table: run context rows first, then one row per measurement with its
        value, target and whether it is met; then the rows' notes, if any.

    Examples
    --------
    >>> from chirpsift.benchmarks import Measurement, format_table
    >>> rows = [Measurement("x_ratio", "a ratio", 0.5, "x", "<= 1", True)]
    >>> format_table(rows, {}).splitlines()[-1]
    '| a ratio | 0.5 x | <= 1 | yes |'
    """
    lines = ["| measurement | value | target | met |", "| --- | --- | --- | --- |"]
    info = [
        ("date (UTC)", context.get("date")),
        ("CPU", context.get("cpu")),
        ("cores available", context.get("cores")),
        ("threads (multi-threaded rows)", context.get("threads")),
        ("load average (1 min) at start", context.get("load_average")),
        ("numpy / chirpsift / python",
         f"{context.get('numpy')} / {context.get('chirpsift')} / {context.get('python')}"),
        ("scale / repeats (best of)", f"{context.get('scale')} / {context.get('repeats')}"),
    ]
    for name, desc in context.get("workloads", {}).items():
        info.append((f"workload {name}", desc))
    for name, value in info:
        lines.append(f"| {name} | {value} | | |")
    for m in rows:
        met = "" if m.met is None else ("yes" if m.met else "NO")
        lines.append(f"| {m.name} | {_value_text(m)} | {m.target or 'n/a'} | {met} |")
    notes = [m for m in rows if m.note]
    if notes:
        lines.append("")
        lines.extend(f"Note on {m.name}: {m.note}" for m in notes)
    return "\n".join(lines)
