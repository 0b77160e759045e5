"""``chirpsift inject``: draw an injection set, or read one, and add it to strain files."""

from __future__ import annotations

import argparse
from pathlib import Path

from ..cli._paths import check_output, same_file
from ..cli._types import finite_float, nonnegative_float, nonnegative_int, positive_float, positive_int
from .command import check_folder, pick_sites, range_value, read_injections, site_file, site_set, strain_files

__all__ = ["HELP", "add_arguments", "run"]

HELP = "draw an injection set; add its signals to strain files"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the flags of ``chirpsift inject`` to ``parser``."""
    from .population import DISTANCE_DISTRIBUTIONS

    parser.description = (
        "Draw a population of simulated binaries (or read one with --injections) and write it as a Parquet "
        "table; with --sites and --strain, also write each site's strain with the signals added."
    )
    g = parser.add_argument_group("population (when drawing a new set)")
    g.add_argument("--count", type=positive_int, metavar="N", help="number of injections")
    for flag in ("--m1", "--m2"):
        g.add_argument(flag, type=positive_float, nargs="+", metavar="MSUN",
                       help="component mass: fixed, or LOW HIGH (uniform)")
    for flag in ("--chi1", "--chi2"):
        g.add_argument(flag, type=finite_float, nargs="+", metavar="X",
                       help="aligned spin: fixed, or LOW HIGH (default 0)")
    g.add_argument("--distance", type=nonnegative_float, nargs=2, metavar=("LOW", "HIGH"), help="distance range, Mpc")
    g.add_argument("--distance-distribution", choices=DISTANCE_DISTRIBUTIONS, default="volume",
                   help="density of distances: uniform in volume, in distance or in log distance "
                        "(default %(default)s)")
    g.add_argument("--start", type=finite_float, metavar="S", help="earliest coalescence time, GPS s")
    g.add_argument("--end", type=finite_float, metavar="S", help="latest coalescence time (exclusive), GPS s")
    g.add_argument("--f-low", type=positive_float, metavar="HZ", required=True,
                   help="frequency from which signals are added and searched for (sets their length)")
    g.add_argument("--spacing", type=positive_float, metavar="S",
                   help="seconds between coalescence times (default and minimum: the longest signal plus a margin)")
    g.add_argument("--seed", type=nonnegative_int, default=0, metavar="N", help="random seed (default %(default)s)")
    g = parser.add_argument_group("existing set and strain")
    g.add_argument("--injections", metavar="FILE", help="read this injection set instead of drawing one")
    g.add_argument("--sites", metavar="FILE.toml", help="site set (chirpsift.load_sites)")
    g.add_argument("--strain", type=site_file, action="append", metavar="SITE=FILE",
                   help="strain of one site (repeat per site); the injections are added to it")
    g.add_argument("--output-dir", metavar="DIR", help="where the strain with injections goes: DIR/SITE.npz")
    g = parser.add_argument_group("output")
    g.add_argument("--output", metavar="FILE", default="injections.parquet",
                   help="injection table (default %(default)s); not written with --injections")


def run(args) -> int:
    """Run ``chirpsift inject``; return the exit status."""
    from ..io import read_strain, write_triggers
    from .command import write_strain_npz
    from .population import draw_injections
    from .project import project

    strains = strain_files(args.strain)
    if strains and (args.sites is None or args.output_dir is None):
        raise ValueError("--strain needs --sites (the site set) and --output-dir (where the results go)")
    if (args.sites or args.output_dir) and not strains:
        raise ValueError("--sites and --output-dir need at least one --strain SITE=FILE")
    targets = {}
    if args.output_dir is not None:
        out_dir = Path(args.output_dir)
        if not out_dir.is_dir():
            raise FileNotFoundError(f"--output-dir {args.output_dir!r} does not exist")
        for name, path in strains.items():
            targets[name] = check_folder(out_dir / f"{name}.npz", "--output-dir")
            if any(same_file(targets[name], p) for p in strains.values()):
                raise ValueError(f"--output-dir would write {targets[name]} over an input strain file")
    sites = pick_sites(site_set(args.sites), strains, args.sites) if strains else {}

    if args.injections:
        drawing = [f for f in ("count", "m1", "m2", "chi1", "chi2", "distance", "start", "end", "spacing")
                   if getattr(args, f) is not None]
        if drawing:
            raise ValueError(f"--injections reads an existing set; do not also give --{drawing[0]}")
        inj, _ = read_injections(args.injections)
        output = None
    else:
        for flag in ("count", "m1", "m2", "distance", "start", "end"):
            if getattr(args, flag) is None:
                raise ValueError(f"--{flag} is required to draw an injection set (or give --injections FILE)")
        output = check_output(args.output, "--output", ".parquet", dict(zip(strains, strains.values())))
        settings = dict(
            m1=range_value(args.m1, "--m1"), m2=range_value(args.m2, "--m2"),
            chi1=range_value(args.chi1, "--chi1") if args.chi1 else (0.0, 0.0),
            chi2=range_value(args.chi2, "--chi2") if args.chi2 else (0.0, 0.0),
            distance=tuple(args.distance), distance_distribution=args.distance_distribution,
            start=args.start, end=args.end, f_low=args.f_low, spacing=args.spacing, seed=args.seed,
        )
        inj = draw_injections(args.count, **settings)

    # every signal is computed before anything is written, so a failure leaves no partial set
    injected = {}
    for name, path in strains.items():
        strain = read_strain(path)
        added = project(inj, sites[name], start=strain.t0, duration=strain.data.size / strain.sample_rate,
                        sample_rate=strain.sample_rate, f_low=args.f_low)
        injected[name] = (strain.data + added, strain.sample_rate, strain.t0)
    for name, (data, rate, t0) in injected.items():
        write_strain_npz(targets[name], data, rate, t0)
    if output is not None:
        meta = {"kind": "chirpsift-injections", "count": int(inj.size),
                "settings": {k: list(v) if isinstance(v, tuple) else v for k, v in settings.items()},
                "densities": {"distance": args.distance_distribution, "sky": "isotropic",
                              "orientation": "isotropic (cos inclination uniform)",
                              "masses and spins": "uniform on their ranges"}}
        write_triggers(output, inj, meta)
    what = f"wrote {output}" if output is not None else f"read {args.injections}"
    extra = f"; strain with injections: {', '.join(str(targets[n]) for n in injected)}" if injected else ""
    print(f"{inj.size} injections, coalescence times {inj['time'].min():.3f} to {inj['time'].max():.3f} s, "
          f"distances {inj['distance'].min():.4g} to {inj['distance'].max():.4g} Mpc: {what}{extra}.")
    return 0
