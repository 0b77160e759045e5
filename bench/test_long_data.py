"""Peak memory of the streamed search against the amount of data.

:func:`chirpsift.pipeline.search_catalogue` reads its files block by block, so its peak
resident memory should not grow with the amount of data. Each size is searched in a
fresh child process, which reports its own peak resident set size; a third child
only imports, for the floor. The peak is the kernel's high-water mark of the child's
own memory, ``VmHWM`` in ``/proc/self/status``: on Linux ``ru_maxrss`` also carries the
parent's high-water mark across fork and exec (the parent here has written the data),
so it is reported beside it and used only where ``/proc`` is missing. The target is a
ratio measured in one run:

    peak RSS (long catalogue) / peak RSS (short catalogue) <= 1.10

Sizes (``--size``): ``full`` is the target's workload, 1 hour against 1 day of
4096 Hz strain in 1-hour files (1.4 GB of float32 files, a few minutes on 2 cores);
``quick`` is 10 minutes against 2 hours at 4096 Hz in 10-minute files (under a
minute). The noise is Gaussian, coloured by an analytic design curve, one independent
realisation per file; the bank is three heavy templates (under a second from 30 Hz),
so the cost is the per-segment transforms, and gating is on so every step reads data.

Run ``pytest bench/test_long_data.py --benchmark-only -k quick`` (or ``full``), or
``python bench/test_long_data.py --size quick`` for the table alone.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time

import numpy as np
import pytest

#: name -> (sample rate Hz, seconds per file, files in the short catalogue, files in the long one)
SIZES = {"quick": (4096.0, 600.0, 1, 12), "full": (4096.0, 3600.0, 1, 24)}
#: Largest accepted peak-RSS ratio, long over short (the target).
TARGET_RATIO = 1.10
T0 = 1_300_000_000.0
BANK = {"m1": [20.0, 25.0, 30.0], "m2": [15.0, 20.0, 25.0]}
SEARCH = {"f_low": 30.0, "min_snr": 6.0, "gate_threshold": 10.0}

_CHILD = r"""
import json, resource, sys, time

def peak_kib():
    try:
        with open("/proc/self/status") as fh:
            return next(int(line.split()[1]) for line in fh if line.startswith("VmHWM:"))
    except (OSError, StopIteration):
        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss

args = json.loads(sys.argv[1])
import chirpsift as cs
from chirpsift.io.catalogue import read_catalogue
from chirpsift.pipeline import search_catalogue
start = time.perf_counter()
out = {"imports_kib": peak_kib(), "files": len(args["paths"])}
if args["paths"]:
    import warnings
    warnings.simplefilter("ignore")  # gates at the joins of independent files: expected here
    cat = read_catalogue(args["paths"], sample_rate=args["sample_rate"], t0=args["t0"])
    triggers, info = search_catalogue(cat, cs.Bank(**args["bank"]), **args["search"])
    out.update(data_seconds=cat.covered, live_seconds=info["live_time"], triggers=len(triggers),
               segments=info["segments"], largest_block=info["largest_block"])
out["seconds"] = time.perf_counter() - start
out["peak_kib"] = peak_kib()
out["ru_maxrss_kib"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps(out))
"""


def write_files(folder, size):
    """Write the long catalogue's files (float32 ``.npy``); return paths and start times."""
    from chirpsift.synthetic import colored_gaussian_noise

    fs, seconds, _, count = SIZES[size]
    n = int(seconds * fs)
    paths, starts = [], []
    for i in range(count):
        x = colored_gaussian_noise(n, fs, "gen2-zero-detuned", seed=1000 + i, f_low=20.0)
        path = os.path.join(folder, f"site-w-{i:03d}.npy")
        np.save(path, x.astype(np.float32))
        paths.append(path)
        starts.append(T0 + i * seconds)
    return paths, starts


def measure(paths, starts, sample_rate):
    """Search ``paths`` in a fresh process; return its report (peak RSS in KiB, seconds, ...)."""
    args = {"paths": paths, "t0": starts, "sample_rate": sample_rate, "bank": BANK, "search": SEARCH}
    done = subprocess.run([sys.executable, "-c", _CHILD, json.dumps(args)], capture_output=True, text=True,
                          check=False)
    if done.returncode != 0:
        raise RuntimeError(f"child search failed:\n{done.stderr[-4000:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def run(size, folder):
    """Measure imports alone, the short and the long catalogue; return the three reports."""
    fs, _, short, _ = SIZES[size]
    paths, starts = write_files(folder, size)
    return {
        "imports": measure([], [], fs),
        "short": measure(paths[:short], starts[:short], fs),
        "long": measure(paths, starts, fs),
    }


def table(size, reports):
    """Return the measurements as text lines, ending with the ratio."""
    fs = SIZES[size][0]
    lines = [f"streamed search, {size} size, {fs:g} Hz, {len(BANK['m1'])} templates",
             f"{'catalogue':<10}{'data (h)':>10}{'peak RSS (MiB)':>16}{'above imports':>15}{'time (s)':>10}"]
    for name in ("imports", "short", "long"):
        r = reports[name]
        hours = r.get("data_seconds", 0.0) / 3600
        above = (r["peak_kib"] - reports["imports"]["peak_kib"]) / 1024
        lines.append(f"{name:<10}{hours:>10.2f}{r['peak_kib'] / 1024:>16.1f}{above:>15.1f}{r['seconds']:>10.1f}")
    ratio = reports["long"]["peak_kib"] / reports["short"]["peak_kib"]
    lines.append(f"peak RSS long / short: {ratio:.3f} (target <= {TARGET_RATIO})")
    return lines


@pytest.mark.parametrize("size", ["quick", "full"])
def test_peak_memory_does_not_grow_with_the_data(benchmark, tmp_path, size):
    reports = benchmark.pedantic(run, args=(size, str(tmp_path)), rounds=1, iterations=1, warmup_rounds=0)
    benchmark.group = "long data: peak RSS"
    ratio = reports["long"]["peak_kib"] / reports["short"]["peak_kib"]
    benchmark.extra_info.update({"role": "memory", "label": f"peak RSS long/short ({size})", "per": 1,
                                 "ratio": ratio, **{f"{k}_peak_kib": v["peak_kib"] for k, v in reports.items()}})
    print("\n" + "\n".join(table(size, reports)))
    assert reports["long"]["data_seconds"] >= 12 * reports["short"]["data_seconds"]
    assert ratio <= TARGET_RATIO, "\n".join(table(size, reports))


def main(argv=None):
    """Command line: measure one size and print the table."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--size", choices=sorted(SIZES), default="quick")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="chirpsift-long-") as folder:
        start = time.perf_counter()
        reports = run(args.size, folder)
        print("\n".join(table(args.size, reports)))
        print(f"(whole run {time.perf_counter() - start:.0f} s)")


if __name__ == "__main__":
    main()
