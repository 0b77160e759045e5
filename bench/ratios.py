"""Per-group ratios from pytest-benchmark JSON output.

Usage::

    pytest bench/ --benchmark-only --benchmark-json=out.json
    python bench/ratios.py out.json [--stat median]

Every benchmark of ``bench/test_kernels.py`` records its ``role`` (``rust``,
``reference``, ``bare``), the units of work ``per`` call (templates or transforms), a
``label`` and the ``transform`` it performs (length and real/complex); the compiled
yardstick also records the time per transform it measured itself (``self_timed``,
buffer set-up excluded), which is used in its place. For each group this prints the
time per unit, that time over the bare transform the group's kernel performs (from the
``bare transforms`` group: rustfft when timed, else the first bare entry of that
transform) and over the group's first ``rust`` entry (so a reference row shows how
many times slower than the compiled path it is).
"""

from __future__ import annotations

import argparse
import json
import sys

STATS = ("min", "median", "mean")


def load(path):
    """Benchmarks of a ``--benchmark-json`` file grouped by their group name.

    Parameters
    ----------
    path : str
        JSON file written by pytest-benchmark.

    Returns
    -------
    dict of str to list of dict
        Group name to its benchmarks (pytest-benchmark's records), in file order.
    """
    with open(path, encoding="utf-8") as fh:
        doc = json.load(fh)
    groups: dict[str, list] = {}
    for bench in doc.get("benchmarks", []):
        groups.setdefault(bench.get("group") or "(no group)", []).append(bench)
    return groups


def ratios(groups, stat="min"):
    """Per-unit times and ratios of every group.

    Parameters
    ----------
    groups : dict
        As returned by :func:`load`.
    stat : {"min", "median", "mean"}
        Which pytest-benchmark statistic of the per-call time to use.

    Returns
    -------
    dict of str to list of dict
        Per group, rows with ``label``, ``role``, ``per_unit`` (s), ``vs_bare`` and
        ``vs_rust`` (``per_unit`` over the group's bare and first compiled entry;
        ``None`` where the group has none).
    """
    def row(b):
        info = b.get("extra_info", {})
        per = max(1, int(info.get("per", 1)))
        own = info.get("self_timed")
        # the compiled yardstick times itself per transform; prefer that figure
        per_unit = float(own[stat]) if own else float(b["stats"][stat]) / per
        t = info.get("transform")
        return {"label": info.get("label", b.get("name")), "role": info.get("role", "?"), "per_unit": per_unit,
                "transform": None if t is None else (int(t["n"]), bool(t["real"]))}

    all_rows = {name: [row(b) for b in benches] for name, benches in groups.items()}
    bares: dict = {}
    for rows in all_rows.values():
        for r in rows:
            if r["role"] == "bare" and r["transform"] is not None:
                bares.setdefault(r["transform"], []).append(r)
    out = {}
    for name, rows in all_rows.items():
        rust = next((r for r in rows if r["role"] == "rust"), None)
        key = next((r["transform"] for r in rows if r["role"] != "bare" and r["transform"]), None)
        for r in rows:
            # a kernel against the transform it performs; a bare transform against
            # the core's transform of the same length and kind
            candidates = bares.get(r["transform"] if r["role"] == "bare" else key, [])
            bare = next((c for c in candidates if "rustfft" in c["label"]), candidates[0] if candidates else None)
            r["vs_bare"] = r["per_unit"] / bare["per_unit"] if bare else None
            r["vs_rust"] = r["per_unit"] / rust["per_unit"] if rust else None
            r["bare_label"] = bare["label"] if bare else None
        out[name] = rows
    return out


def _fmt(x, spec):
    return "-" if x is None else format(x, spec)


def main(argv=None) -> int:
    """Print the ratios of a pytest-benchmark JSON file as one Markdown table per group.

    Parameters
    ----------
    argv : list of str, optional
        ``JSON [--stat min|median|mean]``.

    Returns
    -------
    int
        Exit status.
    """
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("json", help="pytest-benchmark --benchmark-json output")
    p.add_argument("--stat", choices=STATS, default="min", help="statistic per call (default min)")
    ns = p.parse_args(argv)
    table = ratios(load(ns.json), ns.stat)
    if not table:
        print("no benchmarks in the file", file=sys.stderr)
        return 1
    for name, rows in table.items():
        print(f"\n### {name}  (per unit, {ns.stat})")
        print("| entry | role | per unit (ms) | / bare transform | bare transform | / rust |")
        print("| --- | --- | --- | --- | --- | --- |")
        for r in rows:
            print(f"| {r['label']} | {r['role']} | {r['per_unit'] * 1e3:.4g} | {_fmt(r['vs_bare'], '.3g')} | "
                  f"{r['bare_label'] or '-'} | {_fmt(r['vs_rust'], '.3g')} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
