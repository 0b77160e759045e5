"""The one factory of Dask clusters: every engine of :mod:`chirpsift.distributed.settings`.

:func:`make_client` builds the cluster an :class:`EngineSettings` describes and returns a
connected ``distributed.Client``; everything after it (submitting units, collecting
results) is the same code whatever the cluster. :func:`batch_cluster` builds the
dask-jobqueue cluster alone, so its job script can be read (``cluster.job_script()``)
without submitting anything.

Dask is imported here, inside the functions: the base install never needs it.
"""

from __future__ import annotations

import contextlib
import logging
import os
import sys

from .settings import EngineSettings

__all__ = ["make_client", "batch_cluster", "RESOURCE", "HOUSEKEEPING", "require_dask"]

#: Dask resource each worker holds one of and each unit asks for, so a worker runs one
#: unit at a time whatever its Dask thread count (batch workers get ``threads-per-worker``
#: Dask threads, one per core they were given).
RESOURCE = "chirpsift"


def require_dask(kind: str):
    """Import ``distributed``, or raise ``ImportError`` saying how to install it."""
    try:
        import dask  # noqa: F401
        import distributed
    except ImportError:
        raise ImportError(f"engine {kind!r} needs Dask: pip install \"chirpsift[cluster]\"") from None
    if kind in ("htcondor", "slurm"):
        try:
            import dask_jobqueue  # noqa: F401
        except ImportError:
            raise ImportError(f"engine {kind!r} needs dask-jobqueue: pip install \"chirpsift[cluster]\"") from None
    return distributed


#: Dask's housekeeping intervals, lengthened for units that compute for seconds to
#: minutes: Dask's defaults (a 20 ms event-loop tick, stack samples every 10 ms for the
#: dashboard's profiler, memory checks every 100 ms, system monitor every 500 ms) suit
#: interactive work. Measured on an idle LocalCluster of 2 workers, 10 s: 1.6 s of CPU
#: with the defaults (8% of a core, taken from the units on a small machine), 0.2 s with
#: these. The dashboard's profile page stays empty; memory limits are still enforced.
HOUSEKEEPING = {
    "distributed.admin.tick.interval": "1s",
    "distributed.admin.system-monitor.interval": "5s",
    "distributed.worker.memory.monitor-interval": "1s",
    "distributed.worker.profile.enabled": False,
}


def _dask_config():
    """Return the Dask settings every cluster of ours uses: :data:`HOUSEKEEPING`, and spawn.

    Worker processes are started by spawn: a process holding chirpsift's thread pool is
    never forked. Local workers inherit these settings through their nannies; batch jobs
    get them as environment variables (:func:`_housekeeping_exports`).
    """
    import dask

    return dask.config.set({"distributed.worker.multiprocessing-method": "spawn", **HOUSEKEEPING})


def _housekeeping_exports() -> list[str]:
    """:data:`HOUSEKEEPING` as a job script's ``export DASK_...`` lines (Dask reads them at start)."""
    def name(key):
        return "DASK_" + "__".join(part.upper().replace("-", "_") for part in key.split("."))

    return [f"export {name(k)}={v}" for k, v in HOUSEKEEPING.items()]


def batch_cluster(engine: EngineSettings, **extra):
    """Build the dask-jobqueue cluster of a batch engine (HTCondor or SLURM), submitting no job.

    Each job holds ``cores`` (default ``threads-per-worker``) cores and runs
    ``cores / threads-per-worker`` worker processes, each with ``threads-per-worker`` Dask
    threads, one :data:`RESOURCE` (so one unit at a time) and ``CHIRPSIFT_THREADS`` set to
    ``threads-per-worker``; ``lifetime`` and ``lifetime-stagger`` become the workers'
    ``--lifetime`` options.

    Parameters
    ----------
    engine : EngineSettings
        ``kind`` ``"htcondor"`` or ``"slurm"``.
    **extra
        More keyword arguments of the dask-jobqueue cluster class.

    Returns
    -------
    dask_jobqueue.HTCondorCluster or dask_jobqueue.SLURMCluster
        Its scheduler runs in this process; call ``close()`` when done.
    """
    if engine.kind not in ("htcondor", "slurm"):
        raise ValueError(f"batch_cluster needs kind 'htcondor' or 'slurm', got {engine.kind!r}")
    require_dask(engine.kind)
    import dask_jobqueue

    threads = engine.threads or 1
    cores = engine.cores or threads
    args = ["--resources", f"{RESOURCE}=1"]
    if engine.lifetime:
        args += ["--lifetime", engine.lifetime]
        if engine.lifetime_stagger:
            args += ["--lifetime-stagger", engine.lifetime_stagger]
    kwargs = dict(cores=cores, processes=cores // threads, memory=engine.memory or f"{2 * cores}GiB",
                  worker_extra_args=args, python=engine.python or sys.executable,
                  job_script_prologue=[*engine.prologue, f"export CHIRPSIFT_THREADS={threads}",
                                       "export OMP_NUM_THREADS=1", *_housekeeping_exports()],
                  scheduler_options={"dashboard_address": ":0"}, log_directory=engine.log_directory,
                  local_directory=engine.local_directory, job_name="chirpsift")
    if engine.kind == "slurm":
        kwargs.update(queue=engine.queue, account=engine.account, walltime=engine.walltime,
                      job_extra_directives=list(engine.job_directives))
        cls = dask_jobqueue.SLURMCluster
    else:
        directives = {}
        for line in engine.job_directives:
            key, sep, value = line.partition("=")
            if not sep or not key.strip():
                raise ValueError(f"HTCondor job-directives lines must be 'Key = value', got {line!r}")
            directives[key.strip()] = value.strip()
        if engine.queue:
            directives.setdefault("+JobFlavour", f'"{engine.queue}"')
        kwargs.update(disk=engine.disk or "1GiB", job_extra_directives=directives)
        cls = dask_jobqueue.HTCondorCluster
    kwargs.update(extra)
    with _dask_config():
        return cls(**kwargs)


def import_on_start(distributed):
    """Return a Dask worker plugin that imports chirpsift as each worker starts (and joins later).

    A worker's first unit would otherwise pay for starting chirpsift (numpy, pyarrow, the
    compiled core): measured on 2 local workers, 1.42x throughput and 23% overhead per
    unit without it, 1.68x and 1.3% with the import done first (bench/test_distributed.py).
    The class is made here, not at import, so chirpsift never needs Dask to import.
    """

    class ImportOnStart(distributed.WorkerPlugin):
        name = "chirpsift-import"

        def setup(self, worker):
            import chirpsift  # noqa: F401

    return ImportOnStart()


def make_client(engine: EngineSettings):
    """Connect a Dask client to the cluster ``engine`` describes, starting the cluster if ours.

    Parameters
    ----------
    engine : EngineSettings
        Any kind but ``"process"``.

    Returns
    -------
    client : distributed.Client
    close : callable
        Closes the client and the cluster it started (none for ``"scheduler"``).

    Raises
    ------
    ImportError
        Dask (or dask-jobqueue) is not installed; the message says how to install it.
    ValueError
        The scheduler at ``address`` cannot be reached (a one-line message naming it).

    Notes
    -----
    ``"local"``: ``workers`` processes (default the cores over ``threads-per-worker``),
    each with one Dask thread (one unit at a time) and ``CHIRPSIFT_THREADS`` set.
    ``"scheduler"``: the workers already exist; each unit sets chirpsift's threads to
    ``threads-per-worker`` (default 1), so start them with ``--nthreads 1`` per
    ``threads-per-worker`` cores. Batch kinds: :func:`batch_cluster`, scaled adaptively
    between ``minimum-jobs`` and ``workers`` jobs (default 10).
    """
    if not engine.uses_dask:
        raise ValueError("engine kind 'process' runs units in this process: there is no cluster to make")
    distributed = require_dask(engine.kind)
    threads = engine.threads or 1
    with _dask_config():
        if engine.kind == "scheduler":
            try:
                client = distributed.Client(engine.address, timeout="20s")
            except (OSError, TimeoutError) as exc:
                raise ValueError(f"cannot reach the Dask scheduler at {engine.address}: {exc}; check the address "
                                 "and that the scheduler is running") from None
            client.register_plugin(import_on_start(distributed))
            return client, client.close
        if engine.kind == "local":
            workers = engine.workers or max(1, (os.cpu_count() or 1) // threads)
            cluster = distributed.LocalCluster(
                n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=":0",
                memory_limit=engine.memory or "auto", local_directory=engine.local_directory,
                env={"CHIRPSIFT_THREADS": str(threads), "OMP_NUM_THREADS": "1"},
                resources={RESOURCE: 1}, silence_logs=logging.ERROR)
        else:
            cluster = batch_cluster(engine)
            cluster.adapt(minimum_jobs=engine.minimum_jobs, maximum_jobs=engine.workers or 10)
        client = distributed.Client(cluster)
    client.register_plugin(import_on_start(distributed))

    def close():
        with contextlib.suppress(Exception):
            client.close()
        with contextlib.suppress(Exception):
            cluster.close()

    return client, close
