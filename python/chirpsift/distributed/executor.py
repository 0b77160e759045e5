"""Executors: run named tasks in this process or on a Dask cluster, one interface for both.

The driver of ``chirpsift run`` hands an executor each unit whose inputs are complete
(:meth:`submit`) and takes results back as they finish (:meth:`next_done`), recording
each in the manifest itself; an executor never writes the manifest. :func:`executor`
picks :class:`InProcess` or :class:`DaskExecutor` from the engine settings, and only the
latter imports Dask.

A task is a picklable function and its arguments: small objects (the unit and the
analysis settings, a few kilobytes), never strain or trigger arrays, which workers read
and write as files themselves. :class:`Outcome` carries the bytes that travelled each
way, measured by pickling.
"""

from __future__ import annotations

import pickle
import time
import traceback
from collections import deque
from dataclasses import dataclass

from .settings import EngineSettings

__all__ = ["Outcome", "InProcess", "DaskExecutor", "executor", "call_with_threads"]


@dataclass
class Outcome:
    """What became of one task.

    Attributes
    ----------
    key : str
        The task's key.
    value : object
        Its result (None on failure).
    error : BaseException or None
        The exception of its last attempt.
    traceback : str
        That exception's traceback, as text ("" on success).
    seconds : float
        Time the task's function ran (its last attempt), s.
    sent, received : int
        Bytes of the pickled task and of its pickled result.
    """

    key: str
    value: object = None
    error: BaseException | None = None
    traceback: str = ""
    seconds: float = 0.0
    sent: int = 0
    received: int = 0


def call_with_threads(fn, threads, *args):
    """Run ``fn(*args)`` with chirpsift's thread pool sized to ``threads`` (None: as set).

    The task every executor runs: workers size the pool explicitly (Dask does not set
    rayon's), so a unit never uses more threads than its worker was given.

    Returns
    -------
    value : object
        ``fn(*args)``.
    seconds : float
        Wall time of the call, s.
    """
    if threads is not None:
        from ..threads import set_threads

        set_threads(threads)
    t = time.perf_counter()
    value = fn(*args)
    return value, time.perf_counter() - t


def _size(obj) -> int:
    try:
        import cloudpickle

        return len(cloudpickle.dumps(obj))
    except ImportError:
        return len(pickle.dumps(obj))


class InProcess:
    """Run tasks one at a time in this process, in the order submitted, each when its result is asked for.

    ``attempts`` bounds the tries of a failing task; ``threads`` as
    :func:`call_with_threads`. ``KeyboardInterrupt`` is never caught.
    """

    uses_dask = False

    def __init__(self, attempts: int = 1, threads: int | None = None):
        self.attempts, self.threads = attempts, threads
        self._queue: deque = deque()

    def submit(self, key: str, fn, *args) -> None:
        """Queue ``fn(*args)`` under ``key``."""
        self._queue.append((key, fn, args))

    @property
    def pending(self) -> int:
        """Tasks submitted and not yet returned by :meth:`next_done`."""
        return len(self._queue)

    def next_key(self) -> str | None:
        """Return the key :meth:`next_done` runs next (for progress displays)."""
        return self._queue[0][0] if self._queue else None

    def next_done(self) -> Outcome:
        """Run the oldest queued task and return its :class:`Outcome`."""
        key, fn, args = self._queue.popleft()
        out = Outcome(key)
        for _ in range(self.attempts):
            try:
                out.value, out.seconds = call_with_threads(fn, self.threads, *args)
                out.error, out.traceback = None, ""
                break
            except Exception as exc:  # reported by the driver with the unit's key
                out.error, out.traceback = exc, traceback.format_exc()
        return out

    def close(self) -> None:
        """Forget queued tasks."""
        self._queue.clear()


class DaskExecutor:
    """Run tasks on a Dask cluster through ``client``, with stable keys and bounded retries.

    Parameters
    ----------
    client : distributed.Client
    attempts : int
        Tries per task (Dask reruns a task that raised ``attempts - 1`` times; a task
        whose worker dies is rescheduled by the scheduler, up to its
        ``allowed-failures``).
    threads : int or None
        chirpsift threads per task (:func:`call_with_threads`).
    resources : dict or None
        Dask resources each task asks for (one unit per worker at a time).
    """

    uses_dask = True

    def __init__(self, client, attempts: int = 3, threads: int | None = 1, resources=None):
        from distributed import as_completed

        self.client, self.attempts, self.threads, self.resources = client, attempts, threads, resources
        self._done = as_completed()
        self._futures: dict = {}
        self._sent: dict[str, int] = {}

    def submit(self, key: str, fn, *args) -> None:
        """Submit ``fn(*args)`` under the Dask key ``key``."""
        task = (call_with_threads, fn, self.threads, *args)
        self._sent[key] = _size(task)
        # A tuple key's first element is Dask's task prefix: units of one stage share it, so
        # the scheduler learns their duration and its work stealing moves queued units to
        # idle workers (with one prefix per unit it never learnt one, and 2 local workers
        # sat idle for a quarter of the run while the other's queue drained).
        future = self.client.submit(*task, key=(key.split("/")[0], key), pure=False, retries=self.attempts - 1,
                                    resources=self.resources)
        self._futures[key] = future
        self._done.add(future)

    @property
    def pending(self) -> int:
        """Tasks submitted and not yet returned by :meth:`next_done`."""
        return len(self._futures)

    def next_key(self) -> str | None:
        """Return None: on a cluster, which task ends next is not known."""
        return None

    def next_done(self) -> Outcome:
        """Wait for any submitted task to end and return its :class:`Outcome`."""
        future = next(self._done)
        key = future.key[1]
        self._futures.pop(key, None)
        out = Outcome(key, sent=self._sent.pop(key, 0))
        if future.status == "finished":
            out.value, out.seconds = future.result()
            out.received = _size((out.value, out.seconds))
        else:
            try:
                error = future.exception()
                tb = future.traceback()
            except Exception as exc:  # cancelled, or the scheduler gave up on it
                error, tb = exc, None
            out.error = error
            out.traceback = "".join(traceback.format_exception(type(error), error, tb))
        future.release()
        return out

    def close(self) -> None:
        """Cancel what is still running."""
        if self._futures:
            self.client.cancel(list(self._futures.values()))
        self._futures.clear()


def executor(engine: EngineSettings, client=None):
    """Return the executor for ``engine``: :class:`InProcess`, or :class:`DaskExecutor` over ``client``.

    Parameters
    ----------
    engine : EngineSettings
    client : distributed.Client, optional
        Required for every kind but ``"process"`` (from
        :func:`chirpsift.distributed.cluster.make_client`).

    Examples
    --------
    >>> from chirpsift.distributed import EngineSettings, executor
    >>> ex = executor(EngineSettings())
    >>> ex.submit("twice/3", lambda x: 2 * x, 3)
    >>> ex.next_done().value
    6
    """
    if not engine.uses_dask:
        return InProcess(engine.tries, engine.threads)
    if client is None:
        raise ValueError(f"engine kind {engine.kind!r} needs a Dask client (chirpsift.distributed.make_client)")
    from .cluster import RESOURCE

    resources = None if engine.kind == "scheduler" else {RESOURCE: 1}
    return DaskExecutor(client, engine.tries, engine.threads, resources)
