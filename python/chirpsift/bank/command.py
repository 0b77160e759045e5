"""``chirpsift bank``: place a template bank over a region and, optionally, check its coverage.

Writes the bank (``.parquet`` or ``.npz``, the layout of :class:`chirpsift.Bank`, with the
placement in its metadata) atomically; with ``--coverage N`` also ``<bank>-coverage.png``
(fitting factor over the mass plane) and ``<bank>-coverage.json`` (the summary).
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

__all__ = ["HELP", "add_arguments", "run"]

HELP = "place a template bank covering a region at a minimal match, and check its coverage"

_PAIRS = ("m1", "m2", "chi1", "chi2", "mtotal", "mass-ratio")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the flags of ``chirpsift bank`` to ``parser``."""
    from ..cli._types import Once, positive_int
    from .config import PLACEMENT_KEYS

    parser.description = (
        "Place the templates of a bank so that every binary of a region keeps at least the minimal match "
        "(fraction of its optimal SNR) with its best template: a hexagonal lattice in flat metric "
        "coordinates for non-spinning regions, stochastic placement with spins, then points whose exact "
        "fitting factor falls short become templates. Give the region by flags or in a TOML file's [bank] "
        "table (the same keys, kebab-case); flags win."
    )
    parser.add_argument("output", metavar="BANK", help="bank file to write: .parquet or .npz")
    parser.add_argument("--config", metavar="FILE.toml", action=Once, what="file",
                        help="read the region and settings from this file's [bank] table")
    g = parser.add_argument_group("region")
    for key in _PAIRS:
        g.add_argument(f"--{key}", nargs=2, metavar=("LO", "HI"), help=PLACEMENT_KEYS[key])
    g = parser.add_argument_group("placement")
    for key in ("psd", "f-low", "minimal-match", "sample-rate", "seed", "method", "max-templates"):
        g.add_argument(f"--{key}", metavar=key.upper().replace("-", "_"), help=PLACEMENT_KEYS[key])
    g = parser.add_argument_group("coverage")
    g.add_argument("--coverage", type=positive_int, metavar="N",
                   help="draw N points uniformly in the region (in component masses and spins) and write "
                        "their fitting factors as <bank>-coverage.png and the summary as <bank>-coverage.json")
    g.add_argument("--coverage-seed", type=int, default=1, metavar="N",
                   help="seed of the coverage points (default: %(default)s; not the placement's)")
    parser.add_argument("--progress", action=argparse.BooleanOptionalAction, default=True,
                        help="show progress on stderr (default: on)")


def _flag_value(key: str, text: str):
    from ..cli._errors import UsageError

    if key in ("psd", "method"):
        return text
    try:
        return int(text) if key in ("seed", "max-templates") else float(text)
    except ValueError:
        kind = "an integer" if key in ("seed", "max-templates") else "a number"
        raise UsageError(f"--{key} must be {kind}, got {text!r}") from None


def _table(args) -> tuple[dict, str]:
    from ..cli._errors import UsageError
    from ..io.readers import read_toml

    table, where = {}, "flags"
    if args.config is not None:
        _, doc = read_toml(args.config, what="--config file")
        if "bank" not in doc or not isinstance(doc["bank"], dict):
            raise UsageError(f"--config {args.config!r} has no [bank] table")
        table, where = dict(doc["bank"]), f"{args.config} [bank]"
    for key in _PAIRS + ("psd", "f-low", "minimal-match", "sample-rate", "seed", "method", "max-templates"):
        value = getattr(args, key.replace("-", "_"))
        if value is None:
            continue
        table[key] = [_flag_value(key, v) for v in value] if key in _PAIRS else _flag_value(key, value)
    return table, where


def _flags(message: str) -> str:
    """Speak of flags, not table keys or API keywords, in a message about flag values."""
    import re

    message = message.removeprefix("flags: ")
    for key in ("mass_ratio", "minimal_match", "f_low", "sample_rate", "max_templates"):
        message = message.replace(key, "--" + key.replace("_", "-"))
    return re.sub(r"(?<![\w'-])(m1|m2|chi1|chi2|mtotal|mass-ratio|psd|f-low|minimal-match|sample-rate|seed|method|"
                  r"max-templates)(?![\w'-])", r"--\1", message)


def run(args) -> int:
    """Run ``chirpsift bank`` from parsed arguments (see :func:`add_arguments`)."""
    from ..cli._errors import UsageError
    from ..io.atomic import write_json_atomic
    from .config import placement_arguments
    from .coverage import bank_coverage
    from .place import FILL_TARGET, place_bank
    from .plot import plot_coverage

    out = Path(args.output)
    if out.suffix.lower() not in (".parquet", ".npz"):
        raise UsageError(f"BANK {args.output!r} must end in .parquet or .npz")
    if out.exists() and out.is_dir():
        raise UsageError(f"BANK {args.output!r} is a folder")
    if args.config is not None and Path(args.config).resolve() == out.resolve():
        raise UsageError(f"BANK {args.output!r} is the --config file; it would be overwritten")
    table, where = _table(args)
    try:
        kwargs = placement_arguments(table, where)
    except ValueError as exc:
        raise UsageError(_flags(str(exc)) if where == "flags" else str(exc)) from None
    started = time.perf_counter()
    try:
        bank = place_bank(**kwargs, progress=args.progress)
    except ValueError as exc:
        raise UsageError(_flags(str(exc)) if where == "flags" else f"{where}: {exc}") from None
    bank.save(out)
    meta = bank.metadata
    edges = meta["metric_estimate_with_edges"]
    estimate = f"{meta['metric_estimate']:.0f} for an ideal lattice" + (
        f", {edges:.0f} counting the region's edges" if edges != meta["metric_estimate"] else "")
    print(f"Placed {len(bank)} templates in {time.perf_counter() - started:.1f} s ({meta['method']}, minimal "
          f"match {meta['minimal_match']:g}; metric estimate {estimate}); wrote {out}")
    if meta["last_check_fraction_below"] >= FILL_TARGET:
        print(f"Note: after {meta['check_rounds']} check rounds {100 * meta['last_check_fraction_below']:.2f}% of "
              "the last draw was still below the minimal match; check the coverage (--coverage N).")
    if args.coverage:
        started = time.perf_counter()
        cov = bank_coverage(bank, args.coverage, seed=args.coverage_seed, progress=args.progress)
        stem = out.with_suffix("")
        png, summary = Path(f"{stem}-coverage.png"), Path(f"{stem}-coverage.json")
        plot_coverage(cov, bank, png)
        doc = {"bank": str(out), "templates": len(bank), "placement": meta, "coverage": cov.summary,
               "measure": "points uniform in component masses and spins over the region, after its cuts",
               "seed": args.coverage_seed}
        write_json_atomic(summary, doc)
        s = cov.summary
        print(f"Coverage of {s['points']} points in {time.perf_counter() - started:.1f} s: "
              f"{100 * s['fraction_covered']:.2f}% reach {s['minimal_match']:g}; minimum {s['minimum']:.4f}, "
              f"0.1/1/5 percentiles {s['percentile_0.1']:.4f} / {s['percentile_1']:.4f} / "
              f"{s['percentile_5']:.4f}, median {s['median']:.4f}")
        print(f"Wrote {png} and {summary}.")
    return 0
