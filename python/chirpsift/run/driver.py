"""The driver of ``chirpsift run``: runs the plan's units, resuming from the manifest, on any engine.

The driver alone decides what is complete, hands each unit whose inputs are complete to
an executor (:mod:`chirpsift.distributed.executor`: this process, or a Dask cluster from
the one factory :func:`chirpsift.distributed.make_client`) and records each result in
the manifest as it comes back; the code after the executor is the same for every engine.
"""

from __future__ import annotations

import contextlib
import os
from collections import deque
from dataclasses import dataclass, field
from pathlib import Path

from ..distributed.executor import executor as make_executor
from .manifest import Manifest, fingerprint
from .progress import Progress
from .stages import STAGES, execute, execute_unit, plan, unit_inputs

__all__ = ["run_analysis", "RunResult", "UnitsFailed", "FolderInUse"]

#: Exceptions of a unit that mean its input is bad, not that chirpsift is broken.
INPUT_ERRORS = (ValueError, TypeError, FileNotFoundError, PermissionError, IsADirectoryError, NotADirectoryError)


class UnitsFailed(ValueError):
    """Units failed on bad input after their attempts; the message names each with its error.

    Attributes
    ----------
    failures : dict of str to str
        Unit key to ``"ExceptionType: message"`` of its last attempt.
    blocked : list of str
        Keys of the units not run because they need a failed unit's output.
    """

    def __init__(self, message: str, failures: dict, blocked: list):
        super().__init__(message)
        self.failures, self.blocked = failures, blocked


class FolderInUse(ValueError):
    """Another ``chirpsift run`` holds the output folder."""


@dataclass
class RunResult:
    """What a call of :func:`run_analysis` did.

    Attributes
    ----------
    ran : list of str
        Keys of the units run, in the order they completed.
    skipped : list of str
        Keys of the units already complete.
    seconds : dict of str to float
        Time each unit run computed (on its worker), s.
    manifest : Manifest
        The folder's manifest after the run.
    sent, received : dict of str to int
        Bytes of each unit's task sent to a Dask worker and of its result (empty in-process).
    removed : list of str
        Temporary files left by an interrupted run, removed before starting.
    engine : str
        The engine's kind.
    """

    ran: list[str] = field(default_factory=list)
    skipped: list[str] = field(default_factory=list)
    seconds: dict[str, float] = field(default_factory=dict)
    manifest: Manifest | None = None
    sent: dict[str, int] = field(default_factory=dict)
    received: dict[str, int] = field(default_factory=dict)
    removed: list[str] = field(default_factory=list)
    engine: str = "process"


@contextlib.contextmanager
def _folder_lock(folder: Path):
    """Hold an exclusive lock on the output folder (POSIX ``flock`` on the folder itself).

    A second run on the same folder is refused; the lock goes with the process, so a
    killed driver leaves none behind.
    """
    try:
        import fcntl
    except ImportError:  # pragma: no cover - Windows: no lock
        yield
        return
    fd = os.open(folder, os.O_RDONLY)
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            raise FolderInUse(f"{folder} is in use by another chirpsift run; wait for it to end, or give another "
                              "output folder") from None
        yield
    finally:
        os.close(fd)


def _remove_temporaries(folder: Path) -> list[str]:
    """Remove the temporary files (``.NAME.*.partial``) an interrupted run left; return their paths."""
    removed = []
    for p in sorted(folder.rglob(".*.partial")):
        if p.is_file():
            with contextlib.suppress(OSError):
                p.unlink()
                removed.append(str(p.relative_to(folder)))
    return removed


def _failure(failed: dict, blocked: list, tries: int) -> Exception:
    """Return the exception reporting failed units: :class:`UnitsFailed` for bad input, else the first unexpected."""
    summary = {k: f"{type(o.error).__name__}: {' '.join(str(o.error).split())}" for k, o in failed.items()}
    text = (f"{len(failed)} unit(s) failed after {tries} attempt(s) each: "
            + "; ".join(f"{k}: {v}" for k, v in summary.items())
            + (f"; {len(blocked)} unit(s) after them not run" if blocked else "")
            + "; completed units are kept: fix the cause and run the same command again")
    unexpected = [o for o in failed.values() if not isinstance(o.error, INPUT_ERRORS)]
    if unexpected:
        error = unexpected[0].error
        error.add_note(text)
        return error
    return UnitsFailed(text, summary, blocked)


def run_analysis(analysis, *, progress: str = "off", every: int = 10, seconds: float = 60.0, stream=None,
                 stop_after: str | None = None, engine=None, client=None) -> RunResult:
    """Run every unit of an analysis that is not already complete.

    Parameters
    ----------
    analysis : chirpsift.run.Analysis
        From :func:`chirpsift.run.load_analysis`.
    progress : {"off", "bar", "lines"}, optional
        Progress display on ``stream`` (:class:`chirpsift.run.progress.Progress`); in
        this process the search units show their own bar too (``"lines"``: as a line
        per ``seconds``).
    every, seconds : optional
        Line frequency of the ``"lines"`` display: every ``every`` units or ``seconds`` s.
    stream : file, optional
        Where progress goes (default stderr).
    stop_after : str, optional
        A stage name: stop once its units are complete (the later ones are not run).
    engine : chirpsift.distributed.EngineSettings, optional
        Where the units run; default the analysis file's ``[engine]`` table. Its
        ``templates_per_unit`` and ``seconds_per_unit`` must be the analysis's (they
        decide the plan).
    client : distributed.Client, optional
        Run on this Dask client instead of making one from ``engine`` (left open).

    Returns
    -------
    RunResult

    Raises
    ------
    chirpsift.run.ManifestMismatch
        The output folder holds a run of a different analysis.
    FolderInUse
        Another run holds the output folder.
    UnitsFailed
        Units failed on bad input after their attempts (the others are complete and
        recorded); the message names each failed unit with its error.
    Exception
        A unit failed unexpectedly: its exception, with the list of failed units as a note.

    Notes
    -----
    A unit is skipped when the manifest records it with the same input fingerprint and
    every file it published is present with the recorded size and SHA-256; otherwise it
    is run again, which publishes the same bytes if its inputs are unchanged, so later
    units stay complete. A unit is handed to the executor once every unit it reads is
    complete; the manifest is rewritten (atomically) as each unit comes back, so a run
    killed at any moment loses at most the units in flight. Temporary files left by
    such a run are removed first. No cluster is started when nothing is left to do.
    """
    engine = analysis.engine if engine is None else engine
    for key in ("templates_per_unit", "seconds_per_unit"):
        if getattr(engine, key) != getattr(analysis.engine, key):
            raise ValueError(f"engine.{key}={getattr(engine, key)} differs from the analysis's "
                             f"{getattr(analysis.engine, key)}: it decides the plan; change it in the analysis file")
    manifest = Manifest.open(analysis.output, analysis.settings_hash(), analysis.canonical())
    with _folder_lock(manifest.folder):
        if analysis.bank_region is None or stop_after == "bank":
            return _run(analysis, manifest, engine, client, progress, every, seconds, stream, stop_after)
        # a placed bank decides the search units' sub-banks: place it, then plan the rest
        first = _run(analysis, manifest, engine, client, progress, every, seconds, stream, "bank")
        rest = _run(analysis, manifest, engine, client, progress, every, seconds, stream, stop_after)
        rest.ran[:0] = first.ran
        rest.skipped = [k for k in rest.skipped if k not in first.ran]
        rest.seconds = {**first.seconds, **rest.seconds}
        rest.sent, rest.received = {**first.sent, **rest.sent}, {**first.received, **rest.received}
        return rest


def _run(analysis, manifest, engine, client, progress, every, seconds, stream, stop_after) -> RunResult:
    units = plan(analysis)
    if stop_after is not None:
        if stop_after not in STAGES:
            raise ValueError(f"stop_after must be one of {STAGES}, got {stop_after!r}")
        last = STAGES.index(stop_after)
        units = [u for u in units if STAGES.index(u.stage) <= last]
    result = RunResult(manifest=manifest, engine=engine.kind)
    result.removed = _remove_temporaries(manifest.folder)
    # decide up front what is complete, so the display knows how many units remain
    todo = set()
    for unit in units:
        if any(k in todo for k in unit.after) or not manifest.complete(
                unit.key, fingerprint(unit_inputs(unit, analysis, manifest))):
            todo.add(unit.key)
    if not manifest.path.exists():
        manifest.write()
    result.skipped = [u.key for u in units if u.key not in todo]
    if not todo:
        manifest.fold()  # a journal left by a killed run
        return result
    close = None
    if engine.uses_dask and client is None:
        from ..distributed.cluster import make_client

        client, close = make_client(engine)
    ex = make_executor(engine, client)
    display = Progress(len(todo), progress, every=every, seconds=seconds, stream=stream)
    waiting = [u for u in units if u.key in todo]
    done = set(result.skipped)
    by_key = {u.key: u for u in units}
    needs = {u.key: sum(k not in done for k in u.after) for u in waiting}  # inputs not yet complete
    dependents: dict[str, list[str]] = {}
    for u in waiting:
        for k in u.after:
            if k not in done:
                dependents.setdefault(k, []).append(u.key)
    ready = deque(u for u in waiting if needs[u.key] == 0)  # plan order
    failed, fps = {}, {}

    def completed(key):
        done.add(key)
        for d in dependents.get(key, ()):
            needs[d] -= 1
            if needs[d] == 0:
                ready.append(by_key[d])

    try:
        while True:
            while ready:
                unit = ready.popleft()
                fp = fingerprint(unit_inputs(unit, analysis, manifest))
                if manifest.complete(unit.key, fp):  # upstream redone to the same bytes
                    result.skipped.append(unit.key)
                    display.finished(unit.key, 0.0)
                    completed(unit.key)
                    continue
                fps[unit.key] = fp
                upstream = {k: manifest.units[k] for k in unit.after}
                if ex.uses_dask:
                    ex.submit(unit.key, execute_unit, unit, analysis, upstream)
                    display.started(unit.key)
                else:
                    ex.submit(unit.key, _in_process(unit, analysis, upstream, progress != "off"))
            if not ex.pending:
                break
            key = ex.next_key()
            if key is not None:
                display.started(key)
            with display.inside(key) if key is not None else contextlib.nullcontext():
                out = ex.next_done()
            unit = by_key[out.key]
            if out.error is not None:
                failed[out.key] = out
                display.finished(out.key, out.seconds)
                continue
            manifest.record(unit.key, unit.stage, unit.outputs, fps[unit.key], **out.value)
            result.ran.append(unit.key)
            result.seconds[unit.key] = out.seconds
            if ex.uses_dask:
                result.sent[unit.key], result.received[unit.key] = out.sent, out.received
            display.finished(unit.key, out.seconds)
            completed(unit.key)
    finally:
        manifest.fold()
        ex.close()
        display.close()
        if close is not None:
            close()
    blocked = [u.key for u in waiting if u.key not in done and u.key not in failed]
    if failed or blocked:
        raise _failure(failed, blocked, engine.tries)
    return result


def _in_process(unit, analysis, upstream, progress):
    """Wrap a unit as a call without arguments, for the in-process executor (with the search's own bar)."""
    def call():
        return execute(unit, analysis, progress=progress, upstream=upstream)

    return call
