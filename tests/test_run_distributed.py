"""chirpsift run on Dask: the same bytes as in-process, and faults that lose nothing.

Every test here on a LocalCluster of two worker processes is a consistency test: the
expected outputs are the in-process run's, itself checked against the whole-catalogue
search and outside truths in test_run.py. The outside checks here are facts of the
trade: a unit's key and error must be named, a Parquet dataset reader skips
dot-prefixed names (pyarrow's documented default), a killed process's work is lost.
"""

import json
import os
import re
import signal
import subprocess
import sys
import threading
import time
import warnings
from pathlib import Path

import numpy as np
import pytest

import chirpsift as cs
from chirpsift.io import read_triggers
from chirpsift.run.manifest import read_units
from chirpsift.run import ManifestMismatch, UnitsFailed, load_analysis, plan, run_analysis

from _run_scenario import outputs, temporaries, write_scenario

pytest.importorskip("distributed")

ENGINE = '\n[engine]\ntemplates-per-unit = 1\nseconds-per-unit = 100\nkind = "local"\nworkers = 2\n'
TESTS = str(Path(__file__).resolve().parent)
ENV = {**os.environ, "PYTHONPATH": os.pathsep.join(p for p in sys.path if p)}


def _copy(path: Path, name: str, drop_engine_kind=False) -> Path:
    """The same analysis with another output folder (and, optionally, the in-process engine)."""
    text = path.read_text().replace('output = "out"', f'output = "{name}"')
    if drop_engine_kind:
        text = text.replace('kind = "local"\nworkers = 2\n', "")
    out = path.with_name(f"{name}.toml")
    out.write_text(text)
    return out


@pytest.fixture(scope="module")
def client():
    from chirpsift.distributed import EngineSettings, make_client

    c, close = make_client(EngineSettings(kind="local", workers=2))
    yield c
    close()


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    """The scenario split into one-template units of 100 s blocks with bank clustering, run in-process."""
    folder = tmp_path_factory.mktemp("distributed")
    path = write_scenario(folder, extra=ENGINE)
    path.write_text(path.read_text().replace("peak-window = 0.5", "peak-window = 0.5\nbank-cluster = true"))
    ref = _copy(path, "ref", drop_engine_kind=True)
    result = run_analysis(load_analysis(ref))
    assert result.engine == "process" and not result.sent
    assert len(result.ran) == len(plan(load_analysis(ref)))
    return folder, path, outputs(folder / "ref"), len(result.ran)


def test_a_local_cluster_gives_the_in_process_bytes_and_the_whole_bank_search(reference, client):
    folder, path, expected, total = reference
    analysis = load_analysis(path)
    assert analysis.settings_hash() == load_analysis(folder / "ref.toml").settings_hash()  # engine kind not hashed
    search_units = [u for u in plan(analysis) if u.stage == "search"]
    # Kestrel: one span of 480 s, 5 blocks; Heron: spans of 330 s and 130 s, 4 + 2 blocks; x 3 sub-banks
    assert len(search_units) == 33 and len({u.block for u in search_units if u.site == "Kestrel"}) == 5
    result = run_analysis(analysis, client=client)
    assert result.engine == "local" and len(result.ran) == total
    assert outputs(folder / "out") == expected  # every file, manifest and report included
    # no array travels through the scheduler: a task is the unit and the analysis settings
    assert max(result.sent.values()) < 20_000 and max(result.received.values()) < 2_000
    # the merged, bank-clustered triggers equal one search of the whole catalogue with the whole bank
    from chirpsift.io.catalogue import read_catalogue
    from chirpsift.pipeline import search_catalogue

    merged, meta = read_triggers(folder / "out" / "triggers" / "Heron.parquet")
    settings = analysis.search.as_dict()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the search's own notes on left-out data, as in test_run.py
        whole, _ = search_catalogue(read_catalogue(list(analysis.data["Heron"].files)),
                                    cs.Bank.load(folder / "bank.parquet"),
                                    vetoes=str(folder / "heron-vetoes.txt"), **settings)
    assert len(merged) and merged.tobytes() == whole.tobytes()
    assert meta["units"] == 18 and settings["bank_cluster"]
    union = sum(len(read_triggers(f)[0]) for f in (folder / "out" / "peaks" / "Heron").glob("*.parquet"))
    assert union > len(merged)  # the merge's clustering had work to do


def test_killing_a_worker_mid_run_loses_and_duplicates_nothing(reference, monkeypatch):
    import _slow_units
    from chirpsift.distributed import EngineSettings, make_client

    folder, path, expected, total = reference
    _slow_units.install(monkeypatch)
    c, close = make_client(EngineSettings(kind="local", workers=2))
    pids = list(c.run(os.getpid).values())
    manifest = folder / "kill-worker" / "manifest.json"
    seen = {}

    def killer():
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            units = read_units(manifest.parent)
            if sum(k.startswith("search/") for k in units) >= 2:
                seen["before"] = len(units)
                os.kill(pids[0], signal.SIGKILL)
                return
            time.sleep(0.01)

    thread = threading.Thread(target=killer)
    try:
        thread.start()
        result = run_analysis(load_analysis(_copy(path, "kill-worker")), client=c)
        thread.join()
        alive = list(c.run(os.getpid).values())
    finally:
        close()
    assert "before" in seen and seen["before"] < len(result.ran)  # the kill landed mid-run
    assert pids[0] not in alive  # the nanny replaced the killed worker
    assert len(result.ran) == len(set(result.ran)) == total
    got = outputs(folder / "kill-worker")
    assert got == expected and not temporaries(folder / "kill-worker")


def _children(pid):
    import psutil

    try:
        return psutil.Process(pid).children(recursive=True)
    except psutil.NoSuchProcess:
        return []


def test_killing_the_driver_resumes_byte_identical_and_a_second_resume_submits_nothing(reference):
    folder, path, expected, total = reference
    again = _copy(path, "kill-driver")
    command = [sys.executable, "-c", f"import sys; sys.path.insert(0, {TESTS!r}); import _slow_units; "
               "_slow_units.install(); from chirpsift.cli import main; sys.exit(main(sys.argv[1:]))",
               "run", str(again), "--quiet"]
    proc = subprocess.Popen(command, env=ENV, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    manifest = folder / "kill-driver" / "manifest.json"
    deadline, recorded, family = time.monotonic() + 90, {}, []
    while time.monotonic() < deadline and proc.poll() is None:
        family = _children(proc.pid) or family
        units = read_units(manifest.parent)
        if sum(k.startswith("search/") for k in units) >= 2:
            break
        time.sleep(0.01)
    proc.kill()  # SIGKILL: no cleanup of any kind
    proc.communicate(timeout=30)
    for child in family:  # the killed driver's worker processes, orphaned
        child.kill()
    recorded = read_units(manifest.parent)
    assert 2 <= sum(k.startswith("search/") for k in recorded) and len(recorded) < total
    resumed = subprocess.run([sys.executable, "-m", "chirpsift.cli", "run", str(again), "--quiet"], env=ENV,
                             capture_output=True, text=True, timeout=120)
    assert resumed.returncode == 0, resumed.stderr
    assert f"{total - len(recorded)} units run on engine 'local', {len(recorded)} already complete" in resumed.stdout
    assert outputs(folder / "kill-driver") == expected
    second = subprocess.run([sys.executable, "-m", "chirpsift.cli", "run", str(again), "--quiet"], env=ENV,
                            capture_output=True, text=True, timeout=120)
    assert second.returncode == 0 and f"0 units run, {total} already complete" in second.stdout
    assert outputs(folder / "kill-driver") == expected


def test_truncated_corrupt_and_leftover_temporary_unit_files_are_found_and_redone(reference, client):
    import pyarrow.dataset as ds

    folder, path, expected, total = reference
    again = _copy(path, "damaged")
    run_analysis(load_analysis(again), client=client)
    site = folder / "damaged" / "peaks" / "Heron"
    first, second = sorted(site.glob("*.parquet"))[:2]
    leftover = site / f".{first.name}.x1y2.partial"
    leftover.write_bytes(b"half a table")
    # a dataset reader never sees the temporary (pyarrow skips names starting with '.' or '_')
    files = ds.dataset(site, format="parquet").files
    assert len(files) == 18 and str(leftover) not in files
    first.write_bytes(first.read_bytes()[:-20])  # truncated: no footer
    raw = bytearray(second.read_bytes())
    raw[100] ^= 0xFF  # same size, one byte flipped
    second.write_bytes(bytes(raw))
    scan = sorted((folder / "damaged" / "scans" / "Kestrel").glob("*.json"))[0]
    scan.write_bytes(scan.read_bytes()[:-5])  # a layout step's file, truncated
    gates = sorted((folder / "damaged" / "gates" / "Heron").glob("*.json"))[-1]
    gates.write_text(gates.read_text().replace('"gates"', '"gatez"'))  # and one edited
    result = run_analysis(load_analysis(again), client=client)
    keys = {f"search/Heron/{p.stem.split('-')[1]}/{p.stem.split('-')[3]}-{p.stem.split('-')[4]}"
            for p in (first, second)}
    keys |= {f"scan/Kestrel/{scan.stem[len('block-'):]}", f"gates/Heron/{gates.stem[len('block-'):]}"}
    assert set(result.ran) == keys  # the rest publish the same bytes, so nothing after them reruns
    assert result.removed == [str(leftover.relative_to(folder / "damaged"))]
    assert outputs(folder / "damaged") == expected


def test_the_merge_names_missing_and_corrupt_units(reference):
    from chirpsift.run.manifest import Manifest
    from chirpsift.run.stages import UnitOutputError, execute

    folder, _, _, _ = reference
    ref = load_analysis(folder / "ref.toml")
    merge = next(u for u in plan(ref) if u.key == "merge/Heron")
    manifest = Manifest.open(ref.output, ref.settings_hash(), ref.canonical())
    upstream = {k: manifest.units[k] for k in merge.after}
    import shutil

    shutil.copytree(folder / "ref", folder / "merge-check")
    checked_path = folder / "merge-check.toml"
    checked_path.write_text((folder / "ref.toml").read_text().replace('output = "ref"', 'output = "merge-check"'))
    checked = load_analysis(checked_path)
    site = folder / "merge-check" / "peaks" / "Heron"
    files = sorted(site.glob("*.parquet"))
    files[0].unlink()
    files[1].write_bytes(files[1].read_bytes()[:-30])
    key = [k for k in merge.after if k.startswith("search/Heron/")]
    upstream[key[2]] = dict(upstream[key[2]], rows=upstream[key[2]]["rows"] + 1)
    (site / "block-1.000-templates-0-0.parquet").write_bytes(files[3].read_bytes())
    layout_key = next(k for k in merge.after if k.startswith("layout/Heron/"))
    layout_file = folder / "merge-check" / next(iter(upstream[layout_key]["files"]))
    layout_file.write_bytes(layout_file.read_bytes()[:-40])  # a torn layout
    with pytest.raises(UnitOutputError) as err:
        execute(merge, checked, upstream=upstream)
    text = str(err.value)
    assert text.startswith("merge/Heron: 5 problem(s)")
    assert f"{key[0]}: " in text and "is missing" in text
    assert f"{key[1]}: " in text and "no readable Parquet footer" in text
    assert f"{key[2]}: " in text and "the manifest recorded" in text
    assert f"{layout_key}: " in text and "is not a readable layout" in text
    assert "belong to no planned unit (block-1.000-templates-0-0.parquet)" in text
    assert not (folder / "merge-check" / "triggers" / "Heron.parquet").stat().st_size == 0


def test_a_unit_that_keeps_failing_is_named_after_its_attempts_and_the_rest_complete(tmp_path, client):
    path = write_scenario(tmp_path, extra=ENGINE + "attempts = 2\n")
    path.write_text(path.read_text().replace("peak-window = 0.5", 'peak-window = 0.5\nnonfinite = "error"'))
    late = sorted((tmp_path / "heron").glob("*.npz"))[-1]
    with np.load(late) as z:
        x, fs, t0 = z["strain"].copy(), z["sample_rate"], z["t0"]
    x[1000] = np.nan  # bad data in Heron's last span
    np.savez(late, strain=x, sample_rate=fs, t0=t0)
    with pytest.raises(UnitsFailed) as err:
        run_analysis(load_analysis(path), client=client)
    text = str(err.value)
    label = f"{float(t0):.3f}"
    assert text.startswith("1 unit(s) failed after 2 attempt(s) each: ")  # the span's layout finds the samples
    assert f"layout/Heron/{label}: ValueError: " in text and "non-finite samples" in text and late.name in text
    assert set(err.value.failures) == {f"layout/Heron/{label}"}
    assert f"search/Heron/{label}/0-0" in err.value.blocked  # the span's first block, its blocks not run
    assert "merge/Heron" in err.value.blocked and "report" in err.value.blocked
    units = json.loads((tmp_path / "out" / "manifest.json").read_text())["units"]
    assert {"merge/Kestrel", "spectrum/Kestrel"} <= set(units)  # what did not need the bad span completed
    assert not temporaries(tmp_path / "out")


def test_the_command_reports_failed_units_in_one_line(tmp_path, capsys):
    from chirpsift.cli import main

    path = write_scenario(tmp_path)
    path.write_text(path.read_text().replace("peak-window = 0.5", 'peak-window = 0.5\nnonfinite = "error"'))
    late = sorted((tmp_path / "kestrel").glob("*.npz"))[-1]
    with np.load(late) as z:
        x, fs, t0 = z["strain"].copy(), z["sample_rate"], z["t0"]
    x[10] = np.inf
    np.savez(late, strain=x, sample_rate=fs, t0=t0)
    assert main(["run", str(path), "--quiet", "--every", "1000", "--attempts", "2"]) == 2  # no progress line
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "1 unit(s) failed after 2 attempt(s) each: layout/Kestrel/" in err
    assert "run the same command again" in err
    assert main(["run", str(path), "--workers", "0"]) == 2
    assert "--workers must be at least 1, got 0" in capsys.readouterr().err
    assert main(["run", str(path), "--scheduler", "tcp://h:1", "--engine", "local"]) == 2
    assert "does not go with --engine local" in capsys.readouterr().err


def test_units_of_a_stage_share_one_dask_task_prefix(client):
    # Consistency test of the executor's keys: Dask learns durations and steals work per
    # task prefix (the first element of a tuple key), so a stage's units must share one,
    # and results still come back under the unit's own key.
    from chirpsift.distributed import DaskExecutor

    ex = DaskExecutor(client, attempts=1, threads=1)
    for key in ("probe/Kestrel/1", "probe/Heron/2"):
        ex.submit(key, len, key)
    done = sorted((out.key, out.value) for out in (ex.next_done(), ex.next_done()))
    assert done == [("probe/Heron/2", 13), ("probe/Kestrel/1", 15)]
    prefixes = client.run_on_scheduler(
        lambda dask_scheduler: sorted(p for p in dask_scheduler.task_prefixes if p.startswith("probe")))
    assert prefixes == ["probe"]


def test_local_workers_run_with_the_lengthened_housekeeping_intervals(client):
    # The settings must reach the spawned worker processes, not only this one; Dask's own
    # config reader is the outside truth of what each worker runs with.
    from chirpsift.distributed import HOUSEKEEPING

    def settings():
        import dask

        return {key: dask.config.get(key) for key in HOUSEKEEPING}

    seen = client.run(settings)
    assert len(seen) == 2 and all(got == HOUSEKEEPING for got in seen.values())


def test_in_process_attempts_are_bounded():
    from chirpsift.distributed import InProcess

    calls = []

    def flaky():
        calls.append(1)
        if len(calls) < 3:
            raise OSError("node went away")
        return "done"

    ex = InProcess(attempts=3)
    ex.submit("a", flaky)
    assert ex.next_done().value == "done" and len(calls) == 3
    calls.clear()
    ex = InProcess(attempts=2)
    ex.submit("b", flaky)
    out = ex.next_done()
    assert out.key == "b" and isinstance(out.error, OSError) and "node went away" in out.traceback and len(calls) == 2


def test_the_engine_may_change_between_runs_but_the_unit_size_may_not(reference):
    folder, _, _, _ = reference
    text = (folder / "ref.toml").read_text().replace("templates-per-unit = 1", "templates-per-unit = 2")
    changed = folder / "units-changed.toml"
    changed.write_text(text)
    with pytest.raises(ManifestMismatch, match=r"changed: units\.templates_per_unit"):
        run_analysis(load_analysis(changed))
    blocks = (folder / "ref.toml").read_text().replace("seconds-per-unit = 100", "seconds-per-unit = 200")
    changed.write_text(blocks)
    with pytest.raises(ManifestMismatch, match=r"changed: units\.seconds_per_unit"):
        run_analysis(load_analysis(changed))
    assert run_analysis(load_analysis(folder / "ref.toml")).ran == []  # in-process resumes a local-cluster plan


def test_a_second_run_on_a_busy_folder_is_refused(reference):
    from chirpsift.run.driver import FolderInUse, _folder_lock

    folder, _, _, _ = reference
    with _folder_lock(folder / "ref"):
        with pytest.raises(FolderInUse, match="in use by another chirpsift run"):
            run_analysis(load_analysis(folder / "ref.toml"))


@pytest.mark.parametrize("table, message", [
    ({"kind": "cloud"}, "kind must be one of 'process', 'local'"),
    ({"kind": "scheduler"}, "needs the scheduler's address"),
    ({"kind": "local", "queue": "long"}, "queue is only for the batch kinds"),
    ({"kind": "slurm", "cores": 6, "threads-per-worker": 4}, "cores (6) must be a multiple of threads-per-worker"),
    ({"kind": "local", "memory": "lots"}, "memory must be an amount"),
    ({"kind": "htcondor", "lifetime": "soon"}, "lifetime must be a duration"),
    ({"templates-per-unit": 0}, "templates-per-unit must be an integer >= 1"),
    ({"seconds-per-unit": 0.5}, "seconds-per-unit must be a number of seconds >= 1, got 0.5"),
    ({"seconds-per-unit": "1d"}, "seconds-per-unit must be a number of seconds >= 1, got '1d'"),
    ({"workres": 2}, "unknown key 'workres'; did you mean 'workers'?"),
])
def test_bad_engine_tables_are_refused_naming_the_key(tmp_path, table, message):
    from chirpsift.run import write_analysis
    import tomllib

    doc = tomllib.loads(write_scenario(tmp_path).read_text())
    doc["engine"] = table
    with pytest.raises(ValueError) as err:
        load_analysis(write_analysis(tmp_path / "bad.toml", doc))
    assert message in str(err.value) and "bad.toml [engine]" in str(err.value)


@pytest.mark.parametrize("kind", ["slurm", "htcondor"])
def test_batch_job_scripts_are_built_without_submitting(kind):
    pytest.importorskip("dask_jobqueue")
    from chirpsift.distributed import batch_cluster, engine_settings

    table = {"kind": kind, "cores": 8, "threads-per-worker": 4, "memory": "16GiB", "lifetime": "3h50m",
             "lifetime-stagger": "10m", "workers": 20, "prologue": ["source /opt/venv/bin/activate"],
             "python": "/opt/venv/bin/python"}
    if kind == "slurm":
        table.update(queue="long", account="grp-gw", walltime="04:00:00", **{"job-directives": ["--exclusive"]})
    else:
        table.update(disk="4GiB", **{"job-directives": ["+MaxRuntime = 14400"]})
    cluster = batch_cluster(engine_settings(table))
    try:
        script = cluster.job_script()
    finally:
        cluster.close()
    worker = next(line for line in script.splitlines() if "distributed.cli.dask_worker" in line)
    assert "/opt/venv/bin/python -m distributed.cli.dask_worker" in worker
    assert "--nthreads 4" in worker and "--nworkers 2" in worker  # 8 cores: 2 workers of 4 threads
    assert "--lifetime 3h50m --lifetime-stagger 10m" in worker and "--resources chirpsift=1" in worker
    assert "export CHIRPSIFT_THREADS=4" in script and "source /opt/venv/bin/activate" in script
    # The job's exports, read by Dask's own config reader in a fresh process, give the
    # housekeeping intervals local workers get (a batch worker inherits nothing else).
    from chirpsift.distributed import HOUSEKEEPING

    exports = dict(re.findall(r"export (DASK_\w+)=([^;\s']+)", script))  # HTCondor: one line, ';'-separated
    assert len(exports) == len(HOUSEKEEPING)
    code = ("import dask, distributed, json; "
            f"print(json.dumps({{k: dask.config.get(k) for k in {list(HOUSEKEEPING)!r}}}))")
    out = subprocess.run([sys.executable, "-c", code], env={**ENV, **exports}, capture_output=True, text=True,
                         timeout=60)
    assert out.returncode == 0 and json.loads(out.stdout) == HOUSEKEEPING, out.stderr
    if kind == "slurm":
        for line in ("#SBATCH -p long", "#SBATCH -A grp-gw", "#SBATCH -t 04:00:00", "#SBATCH --cpus-per-task=8",
                     "#SBATCH --exclusive"):
            assert line in script
    else:
        assert "MY.DaskWorkerCores = 8" in script and "+MaxRuntime = 14400" in script
        assert "MY.DaskWorkerDisk = 4294967296" in script


def test_the_readme_gives_self_started_workers_the_job_scripts_exports():
    # Consistency test of the docs: workers started by hand get the same lines as batch jobs.
    from chirpsift.distributed.cluster import _housekeeping_exports

    readme = (Path(TESTS).parent / "README.md").read_text()
    assert all(f"\n{line}\n" in readme for line in _housekeeping_exports())


def test_the_base_install_never_imports_dask(tmp_path):
    path = write_scenario(tmp_path)
    code = ("import sys; from chirpsift.run import load_analysis, plan; import chirpsift.distributed; "
            f"a = load_analysis({str(path)!r}); plan(a); print(sorted(m for m in sys.modules "
            "if m.split('.')[0] in ('dask', 'distributed', 'dask_jobqueue')))")
    out = subprocess.run([sys.executable, "-c", code], env=ENV, capture_output=True, text=True, timeout=60)
    assert out.returncode == 0 and out.stdout.strip() == "[]", out.stderr
    missing = ("import sys; sys.modules['distributed'] = None; from chirpsift.cli import main; "
               f"sys.exit(main(['run', {str(path)!r}, '--engine', 'local']))")
    out = subprocess.run([sys.executable, "-c", missing], env=ENV, capture_output=True, text=True, timeout=60)
    assert out.returncode == 1 and 'needs Dask: pip install "chirpsift[cluster]"' in out.stderr
    assert "Traceback" not in out.stderr
