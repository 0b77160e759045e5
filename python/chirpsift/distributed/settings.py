"""Where a run's units execute: the ``[engine]`` table of an analysis file and its flags.

Nothing here imports Dask: the settings are read and checked with the analysis file, and
only :func:`chirpsift.distributed.cluster.make_client` (run when an engine other than
``"process"`` is chosen) needs the ``cluster`` extra.

Engines (``kind``):

``"process"``
    The default: every unit runs in the driver's own process, one after another, with
    chirpsift's thread pool as the caller set it (``CHIRPSIFT_THREADS``).
``"local"``
    A Dask ``LocalCluster`` of ``workers`` worker processes on this machine.
``"scheduler"``
    Join a running Dask scheduler at ``address`` (``--scheduler ADDRESS``).
``"htcondor"``, ``"slurm"``
    Batch jobs through dask-jobqueue, each job one worker process per
    ``threads-per-worker`` of its ``cores``, scaled adaptively between
    ``minimum-jobs`` and ``maximum-jobs`` with worker lifetimes, so jobs that reach
    their wall-time limit are replaced.

Whatever the engine, each unit runs with ``threads-per-worker`` chirpsift threads and one
unit at a time per worker process, so a worker never runs more threads than the cores it
was given; results are the same, bit for bit, for every engine and worker count.
"""

from __future__ import annotations

import dataclasses
import os
import re
from dataclasses import dataclass

__all__ = ["EngineSettings", "ENGINE_KINDS", "ENGINE_KEYS", "DEFAULT_TEMPLATES_PER_UNIT", "DEFAULT_SECONDS_PER_UNIT",
           "engine_settings"]

#: The engines, in the order of the module docstring.
ENGINE_KINDS = ("process", "local", "scheduler", "htcondor", "slurm")

#: Templates per search unit unless the analysis file says otherwise. Each unit reads its
#: block of data (and estimates its segments' PSDs) again for its sub-bank; at 256
#: templates that is a few per cent of the unit's filtering for banks of
#: binary-neutron-star templates (bench/test_distributed.py measures the overhead).
DEFAULT_TEMPLATES_PER_UNIT = 256

#: Seconds of one site's data per search unit (a block of time of a span) unless the
#: analysis file says otherwise: one day, so that a span of months is searched in parallel
#: over time, while a unit of 256 binary-neutron-star templates still computes for minutes
#: (about 390 s on one thread at the W1 rate in the README), long beside its scheduling
#: and its reading of one day of samples.
DEFAULT_SECONDS_PER_UNIT = 86400.0

#: Every key of the ``[engine]`` table, with one line of help (the README's table is
#: checked against it).
ENGINE_KEYS: dict[str, str] = {
    "kind": "where units run: 'process' (default, no Dask), 'local', 'scheduler', 'htcondor' or 'slurm'",
    "templates-per-unit": f"templates of the bank per search unit (default {DEFAULT_TEMPLATES_PER_UNIT}); part of "
                          "the plan, so changing it needs a new output folder",
    "seconds-per-unit": f"seconds of a span's data per search unit, blocks of time counted from the span's start "
                        f"(default {DEFAULT_SECONDS_PER_UNIT:g} s, one day; at least 1 s); part of the plan, so "
                        "changing it needs a new output folder",
    "attempts": "times a failing unit is tried before it is reported (default 1 in-process, 3 on Dask)",
    "workers": "'local': worker processes (default: cores / threads-per-worker); batch kinds: the most jobs "
               "(default 10)",
    "threads-per-worker": "chirpsift threads of each worker process, one unit at a time (default 1)",
    "address": "'scheduler': the scheduler's address, e.g. tcp://10.0.0.5:8786",
    "memory": "memory of each worker process ('local') or job (batch kinds), e.g. '8GiB'",
    "cores": "batch kinds: cores per job (default threads-per-worker); one worker process per threads-per-worker",
    "queue": "batch kinds: the queue (SLURM partition)",
    "account": "SLURM: the account charged",
    "walltime": "SLURM: the wall-time limit of each job, e.g. '04:00:00'",
    "disk": "HTCondor: scratch disk of each job, e.g. '4GiB'",
    "lifetime": "batch kinds: a worker leaves after this long (e.g. '3h50m'), before its job's limit, and "
                "adaptive scaling starts a new job (default: none)",
    "lifetime-stagger": "batch kinds: random spread of the lifetimes, so workers do not all leave at once",
    "minimum-jobs": "batch kinds: jobs kept running when idle (default 0)",
    "job-directives": "batch kinds: extra lines of the job script: SLURM '--option=value' lines, HTCondor "
                      "'Key = value' lines",
    "prologue": "batch kinds: shell lines run before the worker starts (module loads, a virtual environment)",
    "python": "batch kinds: the Python on the execute nodes (default: this one)",
    "local-directory": "scratch folder of each worker (default: Dask's)",
    "log-directory": "batch kinds: folder for the jobs' output and error files",
}

_BATCH = ("htcondor", "slurm")
_MEMORY = re.compile(r"^\s*\d+(\.\d+)?\s*([kKMGT]i?B|[kKMGT]|B)?\s*$")
_DURATION = re.compile(r"^\s*(\d+(\.\d+)?\s*(s|m|h|d|ms)\s*)+$")
_WALLTIME = re.compile(r"^\s*(\d+-)?\d+(:\d{2}){0,2}\s*$")


@dataclass(frozen=True)
class EngineSettings:
    """The engine a run uses (keys of :data:`ENGINE_KEYS`, with underscores).

    Attributes
    ----------
    kind : str
        One of :data:`ENGINE_KINDS`.
    templates_per_unit : int
        Templates per search unit (decides the plan, not where it runs).
    seconds_per_unit : float
        Seconds of data per search unit, s (decides the plan, not where it runs).
    attempts : int or None
        Tries per unit; None: 1 in-process, 3 on Dask.
    workers : int or None
        Local worker processes, or the most batch jobs.
    threads_per_worker : int or None
        chirpsift threads per worker; None: 1 on Dask, unchanged in-process.
    address : str or None
        Scheduler address (``kind="scheduler"``).
    memory, cores, queue, account, walltime, disk, lifetime, lifetime_stagger, minimum_jobs, job_directives, prologue,
    python, local_directory, log_directory
        As :data:`ENGINE_KEYS` describes.

    Examples
    --------
    >>> from chirpsift.distributed import EngineSettings
    >>> e = EngineSettings(kind="local", workers=2)
    >>> e.uses_dask, e.tries, e.threads
    (True, 3, 1)
    >>> EngineSettings().uses_dask, EngineSettings().tries
    (False, 1)
    """

    kind: str = "process"
    templates_per_unit: int = DEFAULT_TEMPLATES_PER_UNIT
    seconds_per_unit: float = DEFAULT_SECONDS_PER_UNIT
    attempts: int | None = None
    workers: int | None = None
    threads_per_worker: int | None = None
    address: str | None = None
    memory: str | None = None
    cores: int | None = None
    queue: str | None = None
    account: str | None = None
    walltime: str | None = None
    disk: str | None = None
    lifetime: str | None = None
    lifetime_stagger: str | None = None
    minimum_jobs: int = 0
    job_directives: tuple[str, ...] = ()
    prologue: tuple[str, ...] = ()
    python: str | None = None
    local_directory: str | None = None
    log_directory: str | None = None

    def __post_init__(self):
        _check(self, "engine")

    @property
    def uses_dask(self) -> bool:
        """Whether the engine needs Dask (every kind but ``"process"``)."""
        return self.kind != "process"

    @property
    def tries(self) -> int:
        """Attempts per unit, the default resolved."""
        return self.attempts if self.attempts is not None else (3 if self.uses_dask else 1)

    @property
    def threads(self) -> int | None:
        """Threads of chirpsift's pool per unit: None leaves the in-process setting alone."""
        if self.threads_per_worker is not None:
            return self.threads_per_worker
        return 1 if self.uses_dask else None

    def replace(self, **changes) -> "EngineSettings":
        """Return a copy with ``changes`` (checked again); None values are ignored (flags not given)."""
        return dataclasses.replace(self, **{k: v for k, v in changes.items() if v is not None})


def _check(e: EngineSettings, where: str) -> None:
    if e.kind not in ENGINE_KINDS:
        raise ValueError(f"{where}: kind must be one of {', '.join(map(repr, ENGINE_KINDS))}, got {e.kind!r}")
    for name, low in (("templates_per_unit", 1), ("attempts", 1), ("workers", 1), ("threads_per_worker", 1),
                      ("cores", 1), ("minimum_jobs", 0)):
        value = getattr(e, name)
        if value is None:
            continue
        if isinstance(value, bool) or not isinstance(value, int) or value < low:
            raise ValueError(f"{where}: {name.replace('_', '-')} must be an integer >= {low}, got {value!r}")
    sec = e.seconds_per_unit
    if isinstance(sec, bool) or not isinstance(sec, (int, float)) or not sec >= 1.0 or sec == float("inf"):
        raise ValueError(f"{where}: seconds-per-unit must be a number of seconds >= 1, got {sec!r}")
    if e.kind == "scheduler" and not e.address:
        raise ValueError(f"{where}: kind 'scheduler' needs the scheduler's address (address = \"tcp://HOST:PORT\", "
                         "or --scheduler ADDRESS)")
    if e.address is not None and e.kind != "scheduler":
        raise ValueError(f"{where}: address is only for kind 'scheduler', got kind {e.kind!r}")
    if e.memory is not None and not _MEMORY.match(e.memory):
        raise ValueError(f"{where}: memory must be an amount such as '8GiB' or '4000MB', got {e.memory!r}")
    if e.disk is not None and not _MEMORY.match(e.disk):
        raise ValueError(f"{where}: disk must be an amount such as '4GiB', got {e.disk!r}")
    for name in ("lifetime", "lifetime_stagger"):
        value = getattr(e, name)
        if value is not None and not _DURATION.match(value):
            raise ValueError(f"{where}: {name.replace('_', '-')} must be a duration such as '3h50m' or '90s', "
                             f"got {value!r}")
    if e.walltime is not None and not _WALLTIME.match(e.walltime):
        raise ValueError(f"{where}: walltime must be [D-]HH:MM:SS, got {e.walltime!r}")
    if e.kind in _BATCH:
        cores = e.cores if e.cores is not None else (e.threads_per_worker or 1)
        if cores % (e.threads_per_worker or 1):
            raise ValueError(f"{where}: cores ({cores}) must be a multiple of threads-per-worker "
                             f"({e.threads_per_worker}): each job runs cores / threads-per-worker workers")
        if e.workers is not None and e.minimum_jobs > e.workers:
            raise ValueError(f"{where}: minimum-jobs ({e.minimum_jobs}) exceeds workers ({e.workers}), the most jobs")
    else:
        batch_only = [k for k in ("cores", "queue", "account", "walltime", "disk", "lifetime", "lifetime_stagger",
                                  "python", "log_directory") if getattr(e, k) is not None]
        batch_only += [k for k in ("job_directives", "prologue") if getattr(e, k)]
        batch_only += ["minimum_jobs"] if e.minimum_jobs else []
        if batch_only:
            raise ValueError(f"{where}: {batch_only[0].replace('_', '-')} is only for the batch kinds "
                             f"('htcondor', 'slurm'), got kind {e.kind!r}")
    if e.kind == "htcondor" and (e.account or e.walltime):
        raise ValueError(f"{where}: account and walltime are SLURM keys; an HTCondor job's limits go in "
                         "job-directives")
    if e.kind == "slurm" and e.disk:
        raise ValueError(f"{where}: disk is an HTCondor key; give SLURM scratch space in job-directives")


def engine_settings(table: dict, where: str = "[engine]", base=None) -> EngineSettings:
    """Read and check an ``[engine]`` table.

    Parameters
    ----------
    table : dict
        The table's keys (kebab-case, :data:`ENGINE_KEYS`).
    where : str, optional
        Put in front of every message (the file and table).
    base : pathlib.Path, optional
        Folder that relative ``local-directory`` and ``log-directory`` paths are relative to.

    Returns
    -------
    EngineSettings

    Raises
    ------
    ValueError
        An unknown key (naming the nearest valid one) or a bad value, naming the key.

    Examples
    --------
    >>> from chirpsift.distributed import engine_settings
    >>> engine_settings({"kind": "local", "workers": 2}).workers
    2
    >>> engine_settings({"kind": "slurm", "walltime": "4 hours"}, "a.toml [engine]")
    Traceback (most recent call last):
    ...
    ValueError: a.toml [engine]: walltime must be [D-]HH:MM:SS, got '4 hours'
    """
    import difflib

    if not isinstance(table, dict):
        raise ValueError(f"{where} must be a table, got {table!r}")
    for key in table:
        if key not in ENGINE_KEYS:
            near = difflib.get_close_matches(str(key), list(ENGINE_KEYS), n=1, cutoff=0.5)
            hint = f"; did you mean {near[0]!r}?" if near else f"; valid keys: {', '.join(ENGINE_KEYS)}"
            raise ValueError(f"{where}: unknown key {key!r}{hint}")
    values = {}
    for key, value in table.items():
        name = key.replace("-", "_")
        if key in ("job-directives", "prologue"):
            value = [value] if isinstance(value, str) else value
            if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
                raise ValueError(f"{where}: {key} must be a string or a list of strings, got {value!r}")
            value = tuple(value)
        elif key in ("kind", "address", "memory", "queue", "account", "walltime", "disk", "lifetime",
                     "lifetime-stagger", "python", "local-directory", "log-directory"):
            if not isinstance(value, str) or not value:
                raise ValueError(f"{where}: {key} must be a non-empty string, got {value!r}")
            if key in ("local-directory", "log-directory") and base is not None:
                value = os.path.join(base, os.path.expanduser(value))
        values[name] = value
    try:
        e = EngineSettings.__new__(EngineSettings)
        for f in dataclasses.fields(EngineSettings):
            object.__setattr__(e, f.name, values.get(f.name, f.default))
        _check(e, where)
    except TypeError as exc:  # pragma: no cover - every field has a default
        raise ValueError(f"{where}: {exc}") from None
    return e
