"""Standard benchmark workloads and the ``chirpsift bench`` table.

Every speed figure is a ratio between two timings taken in the same run on the same
machine (absolute seconds are noise on shared machines): the fused search against a
bare inverse FFT of the same length, against the numpy reference, and ``n`` threads
against one. The only absolute numbers reported are the yardstick itself, the
throughput and the peak memory of the W3 search.

The package, in the order a run uses it:

``workloads``
    W1, W2, W3: data, bank and search settings (see :func:`workload`).
``banks``
    The deterministic benchmark banks.
``measure``
    Timing helpers and the :class:`Measurement` row.
``suite``
    :func:`run`: one ``_measure_*`` function per kind of measurement.
``w3_child``
    The W3 search in a process of its own (peak memory).
``table``
    Run context and :func:`format_table`.

Each workload takes a ``scale``: template counts are multiplied by it (with a small
floor); below :data:`FULL_DATA_SCALE` the data are shortened too (to powers of two), which
is only meant for smoke tests.

Examples
--------
>>> from chirpsift import benchmarks
>>> w = benchmarks.workload("W1", scale=1 / 16)
>>> len(w.bank), w.n
(16, 1048576)
"""

from __future__ import annotations

from .banks import component_mass_bank, total_mass_bank
from .measure import Measurement, yardstick
from .suite import SCALING_RUNS, run
from .table import format_table
from .workloads import FULL_DATA_SCALE, QUICK_SCALE, WORKLOADS, Workload, workload

__all__ = [
    "QUICK_SCALE",
    "FULL_DATA_SCALE",
    "WORKLOADS",
    "SCALING_RUNS",
    "Workload",
    "Measurement",
    "workload",
    "component_mass_bank",
    "total_mass_bank",
    "yardstick",
    "run",
    "format_table",
    "main",
]


def main(args=None) -> int:
    """Entry point of ``chirpsift bench`` (also ``python -m chirpsift.benchmarks``).

    Parameters
    ----------
    args : list of str, optional
        The ``chirpsift bench`` arguments (default: ``sys.argv[1:]``); see
        ``chirpsift bench --help``.

    Returns
    -------
    int
        0 on success (whether or not targets are met: speed is measured, never
        asserted), 2 on bad arguments.
    """
    import sys

    from ..cli import main as cli_main

    return cli_main(["bench", *(sys.argv[1:] if args is None else args)])
