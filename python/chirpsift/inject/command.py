"""Command-line stages of injection campaigns: ``inject``, ``campaign`` and ``sensitivity``.

Each stage is a pair ``add_*_arguments(parser)`` / ``run_*(args) -> int`` for the
``chirpsift`` command. Bad input raises ``ValueError``/``TypeError``/``FileNotFoundError``
with a one-line message, which the command turns into exit status 2.

``chirpsift inject``
    Draw an injection set (Parquet) or read one, and optionally write each site's strain
    with the signals added (``.npz`` with ``strain``, ``sample_rate``, ``t0``, as
    ``search`` reads it).
``chirpsift campaign``
    Search each site's strain with the injections added, with the analysis's search
    settings, find coincidences with time-slide background, and write the found/missed
    table (Parquet) and a JSON summary.
``chirpsift sensitivity``
    From a found/missed table: efficiency against distance (table and PNG), sensitive
    volume, volume-time and range at a chosen threshold (JSON and printed).
"""

from __future__ import annotations

import argparse
import math
import os
from pathlib import Path

import numpy as np

__all__ = [
    "add_inject_arguments",
    "run_inject",
    "add_campaign_arguments",
    "run_campaign_command",
    "add_sensitivity_arguments",
    "run_sensitivity",
    "CAUTION",
]

#: Printed with every sensitivity figure and stored in every summary.
CAUTION = (
    "Sensitivity depends on the injected population (masses, spins, distances, orientations) and on the "
    "noise the signals were added to; injections into synthetic Gaussian noise measure the search in "
    "synthetic Gaussian noise, not in real detector data. False-alarm rates from time slides assume noise "
    "that is stationary and independent between sites."
)


# ---------------------------------------------------------------------------
# argument types
# ---------------------------------------------------------------------------
def _number(text: str, *, positive=False, nonnegative=False) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"expected a finite number, got {text!r}")
    if positive and value <= 0:
        raise argparse.ArgumentTypeError(f"expected a positive number, got {text!r}")
    if nonnegative and value < 0:
        raise argparse.ArgumentTypeError(f"expected a number >= 0, got {text!r}")
    return value


def _finite(text):
    return _number(text)


def _positive(text):
    return _number(text, positive=True)


def _nonnegative(text):
    return _number(text, nonnegative=True)


def _count(text):
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected an integer, got {text!r}") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"expected an integer >= 0, got {text!r}")
    return value


def _site_file(text: str) -> tuple[str, str]:
    name, sep, path = text.partition("=")
    if not sep or not name or not path:
        raise argparse.ArgumentTypeError(f"expected SITE=FILE, got {text!r}")
    return name, path


def _range_arg(values, flag):
    if values is None:
        return None
    if len(values) == 1:
        return values[0]
    if len(values) == 2:
        return tuple(values)
    raise ValueError(f"{flag} takes one value or a LOW HIGH pair, got {len(values)} values")


def _strain_map(pairs, flag="--strain") -> dict[str, str]:
    out: dict[str, str] = {}
    for name, path in pairs or []:
        if name in out:
            raise ValueError(f"{flag} names site {name!r} twice")
        out[name] = path
    return out


def _site_set(path) -> dict:
    from ..network import load_sites

    sites = load_sites(path)
    if isinstance(sites, dict):
        return dict(sites)
    return {s.name: s for s in sites}


def _pick_sites(all_sites: dict, names, sites_path) -> dict:
    unknown = [n for n in names if n not in all_sites]
    if unknown:
        raise ValueError(f"site {unknown[0]!r} is not in the site set {sites_path} (it has "
                         f"{', '.join(sorted(all_sites)) or 'no sites'})")
    return {n: all_sites[n] for n in names}


def _check_output(path: Path, what: str) -> None:
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise FileNotFoundError(f"folder for {what} does not exist: {folder}")
    if path.is_dir():
        raise ValueError(f"{what} {path} is a directory")


def _write_strain_npz(path: Path, data, sample_rate: float, t0: float) -> None:
    """``np.savez`` the strain as ``read_strain`` reads it, atomically."""
    from ..io import atomic_path

    with atomic_path(path) as tmp, open(tmp, "wb") as fh:  # a file object: savez adds no suffix
        np.savez(fh, strain=np.asarray(data, dtype=np.float64), sample_rate=np.float64(sample_rate),
                 t0=np.float64(t0))


def read_injections(path):
    """Read an injection set written by ``chirpsift inject``.

    Any Parquet file with the fields of :data:`chirpsift.inject.INJECTION_DTYPE` will do;
    returns ``(table, metadata)``.
    """
    from ..io import read_triggers
    from .population import INJECTION_DTYPE, injection_table

    table, meta = read_triggers(path)
    missing = [f for f in INJECTION_DTYPE.names if f not in (table.dtype.names or ())]
    if missing:
        raise ValueError(f"{path}: not an injection set, it lacks the column(s) {', '.join(missing)}")
    out = np.zeros(table.size, dtype=INJECTION_DTYPE)
    for f in INJECTION_DTYPE.names:
        out[f] = table[f]
    return injection_table(out, name=str(path)), meta


# ---------------------------------------------------------------------------
# chirpsift inject
# ---------------------------------------------------------------------------
def add_inject_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the flags of ``chirpsift inject`` to ``parser``."""
    from .population import DISTANCE_DISTRIBUTIONS

    parser.description = (
        "Draw a population of simulated binaries (or read one with --injections) and write it as a Parquet "
        "table; with --sites and --strain, also write each site's strain with the signals added."
    )
    g = parser.add_argument_group("population (when drawing a new set)")
    g.add_argument("--count", type=_count, metavar="N", help="number of injections")
    for flag in ("--m1", "--m2"):
        g.add_argument(flag, type=_positive, nargs="+", metavar="MSUN",
                       help="component mass: fixed, or LOW HIGH (uniform)")
    g.add_argument("--chi1", type=_finite, nargs="+", metavar="X", help="aligned spin: fixed, or LOW HIGH (default 0)")
    g.add_argument("--chi2", type=_finite, nargs="+", metavar="X", help="aligned spin: fixed, or LOW HIGH (default 0)")
    g.add_argument("--distance", type=_nonnegative, nargs=2, metavar=("LOW", "HIGH"), help="distance range, Mpc")
    g.add_argument("--distance-distribution", choices=DISTANCE_DISTRIBUTIONS, default="volume",
                   help="density of distances: uniform in volume, in distance or in log distance (default %(default)s)")
    g.add_argument("--start", type=_finite, metavar="S", help="earliest coalescence time, GPS s")
    g.add_argument("--end", type=_finite, metavar="S", help="latest coalescence time (exclusive), GPS s")
    g.add_argument("--f-low", type=_positive, metavar="HZ", required=True,
                   help="frequency from which signals are added and searched for (sets their length)")
    g.add_argument("--spacing", type=_positive, metavar="S",
                   help="seconds between coalescence times (default and minimum: the longest signal plus a margin)")
    g.add_argument("--seed", type=_count, default=0, metavar="N", help="random seed (default %(default)s)")
    g = parser.add_argument_group("existing set and strain")
    g.add_argument("--injections", metavar="FILE", help="read this injection set instead of drawing one")
    g.add_argument("--sites", metavar="FILE.toml", help="site set (chirpsift.load_sites)")
    g.add_argument("--strain", type=_site_file, action="append", metavar="SITE=FILE",
                   help="strain of one site (repeat per site); the injections are added to it")
    g.add_argument("--output-dir", metavar="DIR", help="where the strain with injections goes: DIR/SITE.npz")
    g = parser.add_argument_group("output")
    g.add_argument("--output", metavar="FILE", default="injections.parquet",
                   help="injection table (default %(default)s); not written with --injections")


def run_inject(args) -> int:
    """Run ``chirpsift inject``; returns the exit status."""
    from ..io import read_strain, write_triggers
    from .population import draw_injections
    from .project import project

    strains = _strain_map(args.strain)
    if strains and (args.sites is None or args.output_dir is None):
        raise ValueError("--strain needs --sites (the site set) and --output-dir (where the results go)")
    if (args.sites or args.output_dir) and not strains:
        raise ValueError("--sites and --output-dir need at least one --strain SITE=FILE")
    out_dir = None if args.output_dir is None else Path(args.output_dir)
    if out_dir is not None and not out_dir.is_dir():
        raise FileNotFoundError(f"--output-dir does not exist: {out_dir}")
    sites = _pick_sites(_site_set(args.sites), strains, args.sites) if strains else {}

    if args.injections:
        drawing = [f for f in ("count", "m1", "m2", "chi1", "chi2", "distance", "start", "end", "spacing")
                   if getattr(args, f) is not None]
        if drawing:
            raise ValueError(f"--injections reads an existing set; do not also give --{drawing[0].replace('_', '-')}")
        inj, _ = read_injections(args.injections)
        output = None
    else:
        for flag in ("count", "m1", "m2", "distance", "start", "end"):
            if getattr(args, flag) is None:
                raise ValueError(f"--{flag} is required to draw an injection set (or give --injections FILE)")
        output = Path(args.output)
        _check_output(output, "--output")
        settings = dict(
            m1=_range_arg(args.m1, "--m1"), m2=_range_arg(args.m2, "--m2"),
            chi1=_range_arg(args.chi1, "--chi1") if args.chi1 else (0.0, 0.0),
            chi2=_range_arg(args.chi2, "--chi2") if args.chi2 else (0.0, 0.0),
            distance=tuple(args.distance), distance_distribution=args.distance_distribution,
            start=args.start, end=args.end, f_low=args.f_low, spacing=args.spacing, seed=args.seed,
        )
        inj = draw_injections(args.count, **settings)

    written = []
    for name, path in strains.items():
        strain = read_strain(path)
        added = project(inj, sites[name], start=strain.t0, duration=strain.data.size / strain.sample_rate,
                        sample_rate=strain.sample_rate, f_low=args.f_low)
        target = out_dir / f"{name}.npz"
        if Path(path).resolve() == target.resolve():
            raise ValueError(f"--output-dir would overwrite the input strain {path}")
        _write_strain_npz(target, strain.data + added, strain.sample_rate, strain.t0)
        written.append(str(target))
    if output is not None:
        meta = {"kind": "chirpsift-injections", "count": int(inj.size),
                "settings": {k: list(v) if isinstance(v, tuple) else v for k, v in settings.items()},
                "densities": {"distance": args.distance_distribution, "sky": "isotropic",
                              "orientation": "isotropic (cos inclination uniform)",
                              "masses and spins": "uniform on their ranges"}}
        write_triggers(output, inj, meta)
    what = f"wrote {output}" if output is not None else f"read {args.injections}"
    extra = f"; strain with injections: {', '.join(written)}" if written else ""
    print(f"{inj.size} injections, coalescence times {inj['time'].min():.3f} to {inj['time'].max():.3f} s, "
          f"distances {inj['distance'].min():.4g} to {inj['distance'].max():.4g} Mpc: {what}{extra}.")
    return 0


# ---------------------------------------------------------------------------
# chirpsift sensitivity
# ---------------------------------------------------------------------------
def add_sensitivity_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the flags of ``chirpsift sensitivity`` to ``parser``."""
    parser.description = (
        "Efficiency against distance, sensitive volume, volume-time and range from a found/missed table "
        "(written by chirpsift campaign). Only injections inside the analysed time count."
    )
    parser.add_argument("--found-missed", metavar="FILE", required=True, help="found/missed table (Parquet)")
    g = parser.add_argument_group("threshold (default: the table's own found column)")
    t = g.add_mutually_exclusive_group()
    t.add_argument("--ifar-threshold", type=_nonnegative, metavar="YEARS",
                   help="found if the matched candidate's inverse false-alarm rate reaches this")
    t.add_argument("--min-statistic", type=_finite, metavar="X",
                   help="found if the matched candidate's statistic reaches this")
    g = parser.add_argument_group("estimates")
    g.add_argument("--bins", type=_count, default=12, metavar="N",
                   help="distance bins of the efficiency (default %(default)s)")
    g.add_argument("--chirp-distance", action="store_true",
                   help="bin in distance scaled to a 1.4+1.4 Msun chirp mass, D (Mc_ref / Mc)^(5/6)")
    g.add_argument("--analysed-time", type=_positive, metavar="S",
                   help="seconds analysed, for volume-time (default: from the table's metadata)")
    g.add_argument("--assume-found-within", type=_nonnegative, default=0.0, metavar="MPC",
                   help="radius inside which every source counts as found (default %(default)s)")
    g = parser.add_argument_group("output")
    g.add_argument("--plot", metavar="FILE.png", help="efficiency against distance as a PNG")
    g.add_argument("--output", metavar="FILE.json", help="the figures and the efficiency table as JSON")


def run_sensitivity(args) -> int:
    """Run ``chirpsift sensitivity``; returns the exit status."""
    from ..io import read_triggers, write_json_atomic
    from .population import INJECTION_DTYPE
    from .sensitivity import chirp_distance, efficiency, plot_efficiency, sensitivity

    for flag, value in (("--plot", args.plot), ("--output", args.output)):
        if value is not None:
            _check_output(Path(value), flag)
    if args.bins < 1:
        raise ValueError(f"--bins must be at least 1, got {args.bins}")
    table, meta = read_triggers(args.found_missed)
    need = list(INJECTION_DTYPE.names) + ["analysed", "found", "statistic", "ifar"]
    missing = [f for f in need if f not in (table.dtype.names or ())]
    if missing:
        raise ValueError(f"{args.found_missed}: not a found/missed table, it lacks {', '.join(missing)}")
    rows = table[table["analysed"].astype(bool)]
    if rows.size == 0:
        raise ValueError(f"{args.found_missed}: no injection lies inside the analysed time")
    if args.ifar_threshold is not None:
        found, rule = rows["ifar"] >= args.ifar_threshold, f"IFAR >= {args.ifar_threshold:g} yr"
    elif args.min_statistic is not None:
        found, rule = rows["statistic"] >= args.min_statistic, f"statistic >= {args.min_statistic:g}"
    else:
        found, rule = rows["found"].astype(bool), meta.get("found_rule", "the table's found column")
    inj = np.zeros(rows.size, dtype=INJECTION_DTYPE)
    for f in INJECTION_DTYPE.names:
        inj[f] = rows[f]
    analysed_time = args.analysed_time if args.analysed_time is not None else meta.get("analysed_time")
    sens = sensitivity(inj, found, analysed_time=analysed_time, assume_found_within=args.assume_found_within)
    x = chirp_distance(inj["distance"], inj["m1"], inj["m2"]) if args.chirp_distance else inj["distance"]
    label = "chirp distance (Mpc, 1.4+1.4 Msun)" if args.chirp_distance else "distance (Mpc)"
    eff = efficiency(x, found, bins=args.bins)
    if args.plot:
        plot_efficiency(eff, args.plot, xlabel=label, sensitive_range=(sens.range, sens.range_error),
                        title=f"{sens.found} of {sens.injections} injections found ({rule})")
    doc = {"found_missed": os.path.abspath(args.found_missed), "rule": rule, "abscissa": label,
           **sens.as_dict(), "efficiency": {k: eff[k].tolist() for k in eff.dtype.names}, "caution": CAUTION}
    if args.output:
        write_json_atomic(args.output, doc)
    vt = ("" if sens.volume_time is None else
          f", VT {sens.volume_time:.4g} +- {sens.volume_time_error:.2g} Mpc^3 yr over {sens.analysed_time:g} s")
    print(f"{sens.found} of {sens.injections} analysed injections found ({rule}): sensitive volume "
          f"{sens.volume:.4g} +- {sens.volume_error:.2g} Mpc^3, "
          f"range {sens.range:.4g} +- {sens.range_error:.2g} Mpc{vt}.")
    print(f"Caution: {CAUTION}")
    return 0


# ---------------------------------------------------------------------------
# chirpsift campaign
# ---------------------------------------------------------------------------
def _add_search_flags(group) -> None:
    """One flag per search option, from the options' own table."""
    from ..pipeline.settings import SEARCH_OPTIONS

    kinds = {"positive": _positive, "nonnegative": _nonnegative, "count": _count, "order": _count}
    for option in SEARCH_OPTIONS:
        flag = f"--{option.key}"
        unit = f" ({option.unit})" if option.unit else ""
        if option.kind == "switch":
            group.add_argument(flag, dest=option.name, action=argparse.BooleanOptionalAction, default=None,
                               help=option.help + unit)
        elif option.kind == "choice":
            group.add_argument(flag, dest=option.name, choices=option.choices, default=None, help=option.help)
        else:
            group.add_argument(flag, dest=option.name, type=kinds[option.kind], metavar=option.unit.upper() or "X",
                               default=None, help=option.help + unit)


def add_campaign_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the flags of ``chirpsift campaign`` to ``parser``."""
    parser.description = (
        "Add an injection set to each site's strain, search it with the analysis's settings, find coincidences "
        "with a time-slide background, and write the found/missed table. Flags override the --config file's "
        "[search] table."
    )
    g = parser.add_argument_group("input")
    g.add_argument("--injections", metavar="FILE", required=True, help="injection set (chirpsift inject)")
    g.add_argument("--sites", metavar="FILE.toml", required=True, help="site set (chirpsift.load_sites)")
    g.add_argument("--strain", type=_site_file, action="append", required=True, metavar="SITE=FILE",
                   help="strain of one site without injections (repeat per site; same sample rate and start)")
    g.add_argument("--bank", metavar="FILE", required=True, help="template bank (.npz or .parquet)")
    g.add_argument("--config", metavar="FILE.toml", help="TOML file whose [search] table holds the analysis settings")
    g.add_argument("--psd", metavar="CURVE", help="known PSD, a design-curve name (default: estimated from the data)")
    g = parser.add_argument_group("search settings (as in the analysis)")
    _add_search_flags(g)
    g = parser.add_argument_group("coincidence and matching")
    g.add_argument("--slides", type=_count, default=0, metavar="N", help="time slides for the background (default 0)")
    g.add_argument("--slide-step", type=_positive, metavar="S", help="time-slide step")
    g.add_argument("--coincidence-window", type=_positive, metavar="S",
                   help="timing allowance beyond the light travel time (default: the network stage's)")
    g.add_argument("--match-window", type=_positive, metavar="S",
                   help="seconds around each injection searched for its candidate (default 0.1)")
    g.add_argument("--ifar-threshold", type=_nonnegative, metavar="YEARS",
                   help="found only with at least this inverse false-alarm rate (default: any matched candidate)")
    g = parser.add_argument_group("running and output")
    g.add_argument("--threads", type=_count, metavar="N", help="worker threads (default: all cores)")
    g.add_argument("--output", metavar="FILE", default="found_missed.parquet",
                   help="found/missed table (default %(default)s)")
    g.add_argument("--candidates", metavar="FILE", help="also write the candidates with injections (Parquet)")
    g.add_argument("--summary", metavar="FILE", help="JSON summary (default: --output with suffix .json)")
    g.add_argument("--no-progress", action="store_true", help="do not show progress bars")


def run_campaign_command(args) -> int:
    """Run ``chirpsift campaign``; returns the exit status."""
    from ..bank import Bank
    from ..io import read_strain, write_json_atomic, write_triggers
    from ..pipeline.settings import SEARCH_OPTIONS, SearchSettings
    from ..threads import set_threads
    from .campaign import MATCH_WINDOW, run_campaign

    output = Path(args.output)
    summary = Path(args.summary) if args.summary else output.with_suffix(".json")
    for path, flag in ((output, "--output"), (summary, "--summary")) + (
            ((Path(args.candidates), "--candidates"),) if args.candidates else ()):
        _check_output(path, flag)
    if len({output.resolve(), summary.resolve()} | ({Path(args.candidates).resolve()} if args.candidates else set())) \
            < 2 + bool(args.candidates):
        raise ValueError("--output, --summary and --candidates must be different files")
    strains = _strain_map(args.strain)
    sites = _pick_sites(_site_set(args.sites), strains, args.sites)
    if len(sites) < 2:
        raise ValueError(f"a campaign needs strain from at least two sites for coincidences, got {len(sites)}")
    merged = {}
    if args.config:
        import tomllib

        try:
            with open(args.config, "rb") as fh:
                merged = {str(k).replace("-", "_"): v for k, v in tomllib.load(fh).get("search", {}).items()}
        except tomllib.TOMLDecodeError as exc:
            raise ValueError(f"{args.config}: not valid TOML ({exc})") from None
    merged.update({o.name: getattr(args, o.name) for o in SEARCH_OPTIONS if getattr(args, o.name) is not None})
    settings = SearchSettings.from_mapping(merged, where=args.config or "search settings")
    inj, _ = read_injections(args.injections)
    data = {name: read_strain(path) for name, path in strains.items()}
    first = next(iter(data.values()))
    for name, s in data.items():
        if s.sample_rate != first.sample_rate or s.t0 != first.t0 or s.data.size != first.data.size:
            raise ValueError(f"strain of site {name!r} ({s.sample_rate:g} Hz from {s.t0} s, {s.data.size} samples) "
                             f"does not line up with the first site's ({first.sample_rate:g} Hz from {first.t0} s, "
                             f"{first.data.size} samples)")
    bank = Bank.load(args.bank)
    if args.threads:
        set_threads(args.threads)
    result = run_campaign({k: v.data for k, v in data.items()}, sites, inj, bank, sample_rate=first.sample_rate,
                          t0=first.t0, f_low=settings.f_low, psd=args.psd, settings=settings, n_slides=args.slides,
                          slide_step=args.slide_step, coincidence_window=args.coincidence_window,
                          match_window=args.match_window or MATCH_WINDOW, ifar_threshold=args.ifar_threshold,
                          progress=not args.no_progress)
    table = result.found_missed
    rule = ("any matched candidate" if args.ifar_threshold is None else f"IFAR >= {args.ifar_threshold:g} yr")
    doc = {
        "kind": "chirpsift-found-missed",
        "injections": os.path.abspath(args.injections),
        "sites": list(sites),
        "settings": settings.as_dict(),
        "psd": args.psd or "estimated",
        "slides": args.slides,
        "slide_step": args.slide_step,
        "match_window": args.match_window or MATCH_WINDOW,
        "found_rule": rule,
        "analysed": result.analysed,
        "analysed_time": result.analysed_time,
        "counts": {"injections": int(table.size), "analysed": int(table["analysed"].sum()),
                   "found": int((table["found"] & table["analysed"]).sum()),
                   "candidates": int(result.candidates.size), "background": int(result.background.size)},
        "caution": CAUTION,
    }
    write_triggers(output, table, doc)
    if args.candidates:
        write_triggers(args.candidates, result.candidates, doc)
    write_json_atomic(summary, doc)
    c = doc["counts"]
    print(f"{c['found']} of {c['analysed']} analysed injections found ({rule}) among {c['candidates']} candidates "
          f"over {result.analysed_time:g} s of coincident time at {', '.join(sites)}. Wrote {output} and {summary}.")
    print(f"Caution: {CAUTION}")
    return 0
