"""The driver of ``chirpsift run``: runs the plan's units in order, resuming from the manifest."""

from __future__ import annotations

import time
from dataclasses import dataclass, field

from .manifest import Manifest, fingerprint
from .progress import Progress
from .stages import execute, plan, unit_inputs

__all__ = ["run_analysis", "RunResult"]


@dataclass
class RunResult:
    """What a call of :func:`run_analysis` did.

    Attributes
    ----------
    ran : list of str
        Keys of the units run, in order.
    skipped : list of str
        Keys of the units already complete.
    seconds : dict of str to float
        Wall time of each unit run.
    manifest : Manifest
        The folder's manifest after the run.
    """

    ran: list[str] = field(default_factory=list)
    skipped: list[str] = field(default_factory=list)
    seconds: dict[str, float] = field(default_factory=dict)
    manifest: Manifest | None = None


def run_analysis(analysis, *, progress: str = "off", every: int = 10, seconds: float = 60.0, stream=None,
                 stop_after: str | None = None) -> RunResult:
    """Run every unit of an analysis that is not already complete.

    Parameters
    ----------
    analysis : chirpsift.run.Analysis
        From :func:`chirpsift.run.load_analysis`.
    progress : {"off", "bar", "lines"}, optional
        Progress display on ``stream`` (:class:`chirpsift.run.progress.Progress`); the
        search units show their own bar too (``"lines"``: as a line per ``seconds``).
    every, seconds : optional
        Line frequency of the ``"lines"`` display: every ``every`` units or ``seconds`` s.
    stream : file, optional
        Where progress goes (default stderr).
    stop_after : str, optional
        A stage name: stop once its units are complete (the later ones are not run).

    Returns
    -------
    RunResult

    Raises
    ------
    chirpsift.run.ManifestMismatch
        The output folder holds a run of a different analysis.
    ValueError, FileNotFoundError
        Bad input found by a unit; units completed before it stay recorded.

    Notes
    -----
    A unit is skipped when the manifest records it with the same input fingerprint and
    every file it published is present with the recorded size and SHA-256; otherwise it
    is run again, which publishes the same bytes if its inputs are unchanged, so later
    units stay complete. The manifest is rewritten (atomically) after each unit, so an
    interrupted run loses at most the unit in progress, whose temporary file is removed.
    """
    manifest = Manifest.open(analysis.output, analysis.settings_hash(), analysis.canonical())
    units = plan(analysis)
    if stop_after is not None:
        from .stages import STAGES

        if stop_after not in STAGES:
            raise ValueError(f"stop_after must be one of {STAGES}, got {stop_after!r}")
        last = STAGES.index(stop_after)
        units = [u for u in units if STAGES.index(u.stage) <= last]
    result = RunResult(manifest=manifest)
    # decide up front what is complete, so the display knows how many units remain
    todo = set()
    fingerprints = {}
    for unit in units:
        if any(k in todo for k in unit.after):
            todo.add(unit.key)
            continue
        fingerprints[unit.key] = fingerprint(unit_inputs(unit, analysis, manifest))
        if not manifest.complete(unit.key, fingerprints[unit.key]):
            todo.add(unit.key)
    if not manifest.path.exists():
        manifest.write()
    display = Progress(len(todo), progress, every=every, seconds=seconds, stream=stream)
    try:
        for unit in units:
            if unit.key not in todo:
                result.skipped.append(unit.key)
                continue
            fp = fingerprints.get(unit.key) or fingerprint(unit_inputs(unit, analysis, manifest))
            if manifest.complete(unit.key, fp):  # upstream redone to the same bytes
                result.skipped.append(unit.key)
                display.finished(unit.key, 0.0)
                continue
            display.started(unit.key)
            t = time.perf_counter()
            with display.inside(unit.key):
                facts = execute(unit, analysis, progress=progress != "off")
            manifest.record(unit.key, unit.stage, unit.outputs, fp, **facts)
            result.seconds[unit.key] = time.perf_counter() - t
            result.ran.append(unit.key)
            display.finished(unit.key, result.seconds[unit.key])
    finally:
        display.close()
    return result
