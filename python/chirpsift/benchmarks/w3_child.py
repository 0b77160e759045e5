"""The W3 memory measurement: one :func:`chirpsift.search` in a process of its own.

Run as ``python -m chirpsift.benchmarks.w3_child STRAIN.npy BANK.npz SETTINGS.json``;
it prints one JSON line with the wall time, the trigger count and the process's peak
resident memory (its own address space's high-water mark, :func:`peak_rss_mib`, so
neither the parent nor one measurement can leak into the next). :func:`search_in_child`
starts it and reads the line back.
"""

from __future__ import annotations

import json
import os
import resource
import subprocess
import sys
import time

__all__ = ["search_in_child", "main"]


def _bytes_per_rss_unit() -> float:
    """Bytes per ``ru_maxrss`` unit (KiB on Linux, bytes on macOS)."""
    return 1.0 if sys.platform == "darwin" else 1024.0


def peak_rss_mib() -> float:
    """Peak resident memory of this process's own address space, MiB.

    Linux keeps ``ru_maxrss`` across ``execve``, so a child started by a large parent
    reports the parent's peak until it exceeds it (measured: a 135 MiB search reported
    529 MiB, its parent's size); ``VmHWM`` in ``/proc/self/status`` belongs to the new
    address space alone. Elsewhere ``ru_maxrss`` is all there is.
    """
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * _bytes_per_rss_unit() / 2**20


def main(argv=None) -> int:
    """Search the strain with the bank and settings named in ``argv`` and print the JSON line."""
    import numpy as np

    import chirpsift
    from chirpsift.bank import Bank

    strain_path, bank_path, settings_path = sys.argv[1:] if argv is None else argv
    with open(settings_path, encoding="utf-8") as fh:
        job = json.load(fh)
    x = np.load(strain_path)
    bank = Bank.load(bank_path)
    chirpsift.set_threads(job["threads"])
    before = peak_rss_mib()
    t = time.perf_counter()
    triggers = chirpsift.search(x, job["sample_rate"], bank, **job["settings"])
    wall = time.perf_counter() - t
    peak = peak_rss_mib()
    print(json.dumps({"wall": wall, "triggers": int(len(triggers)), "baseline_mib": before, "peak_mib": peak}))
    return 0


def search_in_child(strain_path: str, bank, sample_rate: float, settings, threads: int, folder: str,
                    tag: str) -> dict:
    """Run one search in a fresh Python process and return its JSON report.

    Parameters
    ----------
    strain_path : str
        ``.npy`` file of the strain.
    bank : chirpsift.Bank
        Saved beside the strain as ``bank-{tag}.npz``.
    sample_rate : float
        Hz.
    settings : chirpsift.SearchSettings
        Passed to the search as keyword arguments.
    threads : int
        Worker threads of the child.
    folder, tag : str
        Where to put the bank and the job file, and their name suffix.

    Returns
    -------
    dict
        ``wall`` (s), ``triggers``, ``baseline_mib`` (peak memory before the search),
        ``peak_mib`` (peak resident memory of the whole process, MiB).
    """
    bank_path = os.path.join(folder, f"bank-{tag}.npz")
    bank.save(bank_path)
    job_path = os.path.join(folder, f"job-{tag}.json")
    with open(job_path, "w", encoding="utf-8") as fh:
        json.dump({"threads": int(threads), "sample_rate": float(sample_rate), "settings": settings.as_dict()}, fh)
    cmd = [sys.executable, "-m", "chirpsift.benchmarks.w3_child", strain_path, bank_path, job_path]
    r = subprocess.run(cmd, capture_output=True, text=True, env=_child_environment())
    if r.returncode:
        raise RuntimeError(f"W3 search subprocess failed ({r.returncode}):\n{r.stderr[-4000:]}")
    return json.loads(r.stdout.strip().splitlines()[-1])


def _child_environment() -> dict:
    """Return this process's environment for the child, so it imports the same build.

    The folder chirpsift was imported from goes first on ``PYTHONPATH``.
    """
    import chirpsift

    root = os.path.dirname(os.path.dirname(os.path.abspath(chirpsift.__file__)))
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([root, *filter(None, [env.get("PYTHONPATH")])])
    return env


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
