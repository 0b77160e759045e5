"""Scale-out of ``chirpsift run``: 2 Dask worker processes of 1 thread against 1 in-process thread.

One run measures, on the same analysis and the same units (the layout and search stages:
two sites, one span each, laid out once per span from one scan and one gates unit, a
bank of binary-neutron-star templates split into sub-banks of the default
``templates-per-unit``, one block of time per span at the default ``seconds-per-unit``):

- the throughput ratio: in-process time at 1 thread over the time of a ``LocalCluster``
  of 2 worker processes x 1 thread (target >= 1.8; the cluster's start, in which each
  worker imports chirpsift, is not counted);
- the machine's own ceiling for that ratio: twice the in-process time over the time of
  two in-process runs started together in two processes (no Dask). On a small virtual
  machine two busy processes slow each other down (shared cache, memory bandwidth,
  the host's scheduling), and no scheduler can beat that; the cluster's ratio over this
  one is what Dask and chirpsift's units cost;
- the scheduling overhead per unit: ``(workers x wall - sum of unit compute) / units``
  over the mean compute of a unit (target < 2 %). Idle time at the end, when fewer units
  remain than workers, counts as overhead, so this is an upper bound;
- the gap between units: the seconds each worker sits between the end of one unit's
  compute and the start of its next (from Dask's task stream), over the mean compute of
  a unit: the scheduling cost proper, without the end of the run's tail;
- the bytes of each unit's task sent to a worker and of its result (measured by
  pickling: no strain or trigger array travels through the scheduler);
- the per-template throughput (template-seconds of data per second of one thread), the
  number the README's core-hour estimate scales.

Each of ``--rounds`` rounds (default 3) times the in-process run and then the cluster's
on a fresh copy of the scenario, on the same running cluster; each number is the median
over the rounds, with the rounds' values beside it. Single rounds move a lot on a small
shared machine: four single runs on an idle 2-core machine gave 1.58, 1.84, 1.60 and
1.88, with the in-process side as unsteady as the cluster's.

Both runs must publish the same bytes (checked in every round). The machine is shared: run it once,
``python bench/test_distributed.py`` (add ``--quick`` for a quarter of the data, and
``--seconds-per-unit 128`` to split each span into blocks of time), or
``pytest bench/test_distributed.py --benchmark-only``.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pytest

FS = 2048.0
F_LOW = 30.0
T0 = 1_200_000_000.0
SITES = ("Kestrel", "Heron")
#: name -> (seconds of data per site, templates); templates-per-unit is the default (256)
SIZES = {"quick": (256.0, 512), "full": (512.0, 1024)}


def _scenario(folder: Path, seconds: float, templates: int, block: float | None = None) -> tuple[Path, Path]:
    from chirpsift.benchmarks.banks import component_mass_bank
    from chirpsift.network import EXAMPLE_SITES
    from chirpsift.synthetic import colored_gaussian_noise

    for k, site in enumerate(SITES):
        (folder / site).mkdir(parents=True)
        x = colored_gaussian_noise(int(seconds * FS), FS, "gen2-zero-detuned", seed=k, f_low=20.0)
        np.savez(folder / site / "strain.npz", strain=x, sample_rate=FS, t0=T0)
    component_mass_bank(templates, 1.2, 2.0).save(folder / "bank.parquet")
    (folder / "sites.toml").write_text(Path(EXAMPLE_SITES).read_text())
    data = "".join(f'[data.{s}]\nfiles = "{s}/*.npz"\n\n' for s in SITES)
    common = f'[sites]\nfile = "sites.toml"\n\n{data}[bank]\nfile = "bank.parquet"\n\n[search]\nf-low = {F_LOW}\n'
    blocks = "" if block is None else f"seconds-per-unit = {block}\n"
    one = folder / "in-process.toml"
    one.write_text(f'output = "in-process"\n{common}\n[engine]\nthreads-per-worker = 1\n{blocks}')
    two = folder / "local.toml"
    two.write_text(f'output = "local"\n{common}\n[engine]\nkind = "local"\nworkers = 2\nthreads-per-worker = 1\n'
                   f'{blocks}')
    return one, two


def _outputs(folder: Path) -> dict:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


_PAIR = ("import sys, time; from chirpsift.run import load_analysis, run_analysis; a = load_analysis(sys.argv[1]); "
         "print('ready', flush=True); sys.stdin.readline(); t = time.perf_counter(); "
         "run_analysis(a, stop_after='search'); print(time.perf_counter() - t, flush=True)")


def _two_processes_at_once(paths) -> float:
    """Seconds for two in-process runs started together in two processes (imports not counted)."""
    env = {**os.environ, "OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1"}  # as Dask's workers have it
    procs = [subprocess.Popen([sys.executable, "-c", _PAIR, str(p)], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                              stderr=subprocess.DEVNULL, text=True, env=env) for p in paths]
    try:
        for p in procs:
            assert p.stdout.readline().strip() == "ready"
        for p in procs:
            p.stdin.write("go\n")
            p.stdin.flush()
        return max(float(p.stdout.readline()) for p in procs)
    finally:
        for p in procs:
            p.kill()
            p.wait()


def _gaps_between_units(stream) -> list[float]:
    """Seconds each worker sat between the end of one unit's compute and the start of its next."""
    by_worker: dict = {}
    for task in stream:
        for part in task["startstops"]:
            if part["action"] == "compute":
                by_worker.setdefault(task["worker"], []).append((part["start"], part["stop"]))
    gaps = []
    for spans in by_worker.values():
        spans.sort()
        gaps += [b[0] - a[1] for a, b in zip(spans, spans[1:])]
    return gaps or [0.0]


def _one_round(root: Path, size: str, block: float | None, client) -> dict:
    """Time the in-process run, two of them at once, then the cluster's, on fresh copies of the scenario."""
    from chirpsift.run import load_analysis, run_analysis

    seconds, templates = SIZES[size]
    one, two = _scenario(root, seconds, templates, block)
    pair = [_scenario(root / f"pair-{k}", seconds, templates, block)[0] for k in range(2)]
    a1, a2 = load_analysis(one), load_analysis(two)
    for a in (a1, a2, *map(load_analysis, pair)):
        run_analysis(a, stop_after="bank")
    t = time.perf_counter()
    r1 = run_analysis(a1, stop_after="search")
    t1 = time.perf_counter() - t
    t_pair = _two_processes_at_once(pair)
    from distributed import get_task_stream

    with get_task_stream(client) as stream:
        t = time.perf_counter()
        r2 = run_analysis(a2, stop_after="search", client=client)
        t2 = time.perf_counter() - t
    gaps = _gaps_between_units(stream.data)
    units = [k for k in r2.ran if k.startswith(("scan/", "gates/", "layout/", "search/"))]
    compute = sum(r2.seconds[k] for k in units)
    mean = compute / len(units)
    return {
        "engine": a2.engine, "units": units, "in_process_1_thread_s": t1, "local_2x1_s": t2,
        "throughput_ratio": t1 / t2, "two_processes_s": t_pair, "two_processes_ratio": 2 * t1 / t_pair,
        "mean_unit_compute_s": mean, "overhead_per_unit_s": (2 * t2 - compute) / len(units),
        "overhead_ratio": (2 * t2 - compute) / len(units) / mean,
        "gap_between_units_s": float(np.mean(gaps)), "gap_between_units_max_s": float(np.max(gaps)),
        "gap_ratio": float(np.mean(gaps)) / mean,
        "bytes_sent_per_unit": float(np.mean([r2.sent[k] for k in units])),
        "bytes_received_per_unit": float(np.mean([r2.received[k] for k in units])),
        "layout_s": float(sum(r1.seconds[k] for k in r1.ran if k.startswith("layout/"))),
        "template_seconds_per_second_1_thread": templates * seconds * len(SITES) / sum(
            r1.seconds[k] for k in r1.ran if k.startswith(("scan/", "gates/", "layout/", "search/"))),
        "identical_outputs": _outputs(root / "in-process") == _outputs(root / "local"),
    }


def run(size: str = "full", folder: str | None = None, block: float | None = None, rounds: int = 3) -> dict:
    """Measure; return the numbers of the module docstring (``block``: seconds-per-unit, default the default).

    Each of ``rounds`` rounds times the in-process run and then the cluster's on a fresh
    copy of the scenario (same data, same bank), so a burst of load from elsewhere on a
    shared machine hits one round, not one side of every comparison: the ratios are
    reported per round, with their median.
    """
    from chirpsift.distributed import make_client
    from chirpsift.run import load_analysis

    root = Path(folder or tempfile.mkdtemp(prefix="chirpsift-bench-"))
    seconds, templates = SIZES[size]
    _, two = _scenario(root / "engine", seconds, templates, block)
    client, close = make_client(load_analysis(two).engine)
    try:
        client.run(lambda: None)  # workers up (make_client has them import chirpsift as they start)
        per_round = [_one_round(root / f"round-{k}", size, block, client) for k in range(rounds)]
    finally:
        close()
    engine, units = per_round[0]["engine"], per_round[0]["units"]
    out = {
        "size": size, "seconds_per_site": seconds, "templates": templates, "sample_rate": FS, "f_low": F_LOW,
        "templates_per_unit": engine.templates_per_unit, "seconds_per_unit": engine.seconds_per_unit,
        "units": len(units), "search_units": sum(k.startswith("search/") for k in units), "rounds": rounds,
    }
    for name in ("throughput_ratio", "two_processes_ratio", "overhead_ratio", "gap_ratio", "gap_between_units_s",
                 "gap_between_units_max_s", "two_processes_s",
                 "in_process_1_thread_s", "local_2x1_s", "mean_unit_compute_s",
                 "overhead_per_unit_s", "bytes_sent_per_unit", "bytes_received_per_unit", "layout_s",
                 "template_seconds_per_second_1_thread"):
        values = [r[name] for r in per_round]
        out[name] = float(np.median(values))
        out[name + "_per_round"] = [round(v, 4) for v in values]
    out["identical_outputs"] = all(r["identical_outputs"] for r in per_round)
    out["load_average"] = os.getloadavg()[0]
    if folder is None:
        shutil.rmtree(root, ignore_errors=True)
    return out


@pytest.mark.parametrize("size", ["quick", "full"])
def test_two_worker_processes_against_one_thread(benchmark, tmp_path, size):
    """Time both runs once and keep the numbers in the benchmark's extra info."""
    pytest.importorskip("distributed")
    numbers = benchmark.pedantic(run, args=(size, str(tmp_path)), rounds=1, iterations=1, warmup_rounds=0)
    benchmark.group = "chirpsift run: scale-out"
    benchmark.extra_info.update(numbers)
    assert numbers["identical_outputs"]


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a quarter of the data and half the templates")
    parser.add_argument("--seconds-per-unit", type=float, default=None,
                        help="blocks of time per search unit (default: the [engine] default, one block per span here)")
    parser.add_argument("--rounds", type=int, default=3, help="in-process and cluster runs, alternated (default 3)")
    args = parser.parse_args()
    numbers = run("quick" if args.quick else "full", block=args.seconds_per_unit, rounds=args.rounds)
    print("{\n" + ",\n".join(f"  {json.dumps(k)}: {json.dumps(v)}" for k, v in numbers.items()) + "\n}")
    sys.exit(0)
