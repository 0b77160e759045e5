"""The ``chirpsift`` command line.

Subcommands:

``chirpsift search``
    Matched-filter search of one strain file with a template bank; writes the triggers
    (Parquet) and a JSON run summary.
``chirpsift demo``
    Synthetic noise with one injected inspiral, searched with a small bank; prints the
    loudest trigger beside the injection.
``chirpsift bench``
    The standard benchmark workloads (``chirpsift.benchmarks``).
``chirpsift network``
    Coincidences between sites, time-slide background and false-alarm rates.

Exit status: 0 success, 2 bad usage or bad input (message on stderr, no traceback),
1 unexpected failure, 130 interrupted.
"""

from __future__ import annotations

import argparse
import datetime as _dt
import importlib
import math
import os
import platform
import sys
import time
import traceback
from pathlib import Path

import numpy as np

from .network import command as network_command
from .threads import get_threads, set_threads

__all__ = ["main", "build_parser"]

PROG = "chirpsift"

#: Trigger fields copied into the run summary for the loudest trigger.
_LOUDEST_FIELDS = ("time", "template", "snr", "reweighted_snr", "chi2", "m1", "m2", "spin1", "spin2")

#: search() keyword arguments that the command line and config files can set.
_SEARCH_ARGS = (
    "f_low",
    "segment_duration",
    "min_snr",
    "peak_window",
    "chi2_bands",
    "gate_threshold",
    "welch_duration",
    "psd_duration",
    "bank_cluster",
)

#: Demo constants: an invented site, start time and source.
DEMO_SITE = "Site A"
DEMO_SAMPLE_RATE = 4096.0
DEMO_T0 = 1_000_000.0
DEMO_F_LOW = 20.0
DEMO_MASSES = (1.4, 1.4)
DEMO_TARGET_SNR = 12.0
DEMO_CURVE = "gen2-zero-detuned"


class UsageError(ValueError):
    """Bad command-line input (reported with exit status 2)."""


# ---------------------------------------------------------------------------
# parser
# ---------------------------------------------------------------------------
def _positive_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    if not (math.isfinite(value) and value > 0):
        raise argparse.ArgumentTypeError(f"expected a positive number, got {text!r}")
    return value


def _nonnegative_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    if not (math.isfinite(value) and value >= 0):
        raise argparse.ArgumentTypeError(f"expected a number >= 0, got {text!r}")
    return value


def _finite_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"expected a finite number, got {text!r}")
    return value


def _int_at_least(minimum: int):
    """An argparse type: an integer no smaller than ``minimum``."""

    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"expected an integer, got {text!r}") from None
        if value < minimum:
            raise argparse.ArgumentTypeError(f"expected an integer >= {minimum}, got {text!r}")
        return value

    return parse


_positive_int = _int_at_least(1)
_nonnegative_int = _int_at_least(0)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``chirpsift`` command (all subcommands)."""
    parser = argparse.ArgumentParser(
        prog=PROG,
        description="Matched-filter search for compact-binary inspiral signals in strain data.",
    )
    parser.add_argument("--version", action="store_true", help="print the version and exit")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    s = sub.add_parser(
        "search",
        help="search a strain file with a template bank",
        description=(
            "Search one strain file with a template bank and write the triggers (Parquet) and a "
            "JSON run summary. Flags override values from --config."
        ),
    )
    g = s.add_argument_group("input")
    g.add_argument("--strain", metavar="FILE", help="strain file: .npy, .npz, .h5/.hdf5, .txt/.dat/.csv")
    g.add_argument("--dataset", metavar="NAME", help="HDF5 dataset holding the strain")
    g.add_argument("--sample-rate", type=_positive_float, metavar="HZ", help="sampling rate in Hz")
    g.add_argument("--t0", type=_finite_float, metavar="S", help="time of the first sample in seconds")
    g.add_argument("--bank", metavar="FILE", help="template bank: .npz or .parquet")
    g.add_argument("--config", metavar="FILE.toml", help="TOML file with [input] and [search] tables")
    g = s.add_argument_group("search settings")
    g.add_argument("--f-low", type=_positive_float, metavar="HZ", help="low-frequency cutoff in Hz (required)")
    g.add_argument("--segment-duration", type=_positive_float, metavar="S", help="analysis segment length, s")
    g.add_argument("--min-snr", type=_positive_float, metavar="X", help="SNR threshold for triggers")
    g.add_argument("--peak-window", type=_nonnegative_float, metavar="S", help="trigger clustering window, s")
    g.add_argument("--chi2-bands", type=_positive_int, metavar="P", help="number of chi-squared frequency bands")
    g.add_argument("--gate-threshold", type=_positive_float, metavar="X", help="threshold for gating loud glitches")
    g.add_argument("--welch-duration", type=_positive_float, metavar="S", help="Welch segment length, s")
    g.add_argument("--psd-duration", type=_positive_float, metavar="S",
                   help="seconds of data per PSD estimate, centred on each segment (default: the segment)")
    g.add_argument(
        "--bank-cluster",
        action=argparse.BooleanOptionalAction,
        default=None,
        help="cluster triggers across templates as well as in time",
    )
    g = s.add_argument_group("running and output")
    g.add_argument("--threads", type=_positive_int, metavar="N", help="worker threads (default: all cores)")
    g.add_argument("--output", metavar="FILE", default="triggers.parquet", help="trigger table (default: %(default)s)")
    g.add_argument(
        "--summary", metavar="FILE", help="JSON run summary (default: the --output path with suffix .json)"
    )
    g.add_argument("--no-progress", action="store_true", help="do not show a progress bar")

    d = sub.add_parser(
        "demo",
        help="search synthetic noise with one injected inspiral",
        description=(
            f"Generate coloured Gaussian noise for an invented detector site ({DEMO_SITE}) from the "
            f"{DEMO_CURVE!r} design curve at {DEMO_SAMPLE_RATE:g} Hz, inject one "
            f"{DEMO_MASSES[0]}+{DEMO_MASSES[1]} Msun inspiral with optimal SNR about {DEMO_TARGET_SNR:g}, "
            "search it with a small bank and print the loudest trigger beside the injection."
        ),
    )
    d.add_argument("--seed", type=_nonnegative_int, default=1, metavar="N", help="noise seed (default: %(default)s)")
    d.add_argument(
        "--duration", type=_positive_float, default=512.0, metavar="S", help="data length in s (default: %(default)s)"
    )
    d.add_argument("--threads", type=_positive_int, metavar="N", help="worker threads (default: all cores)")
    d.add_argument("--output-dir", metavar="DIR", help="also write strain, bank, triggers and summary here")
    d.add_argument("--no-progress", action="store_true", help="do not show a progress bar")

    b = sub.add_parser(
        "bench",
        help="run the standard benchmark workloads",
        description="Run the standard benchmark workloads; arguments are passed to chirpsift.benchmarks.",
        add_help=False,
    )
    b.add_argument("bench_args", nargs=argparse.REMAINDER)
    network_command.add_arguments(sub.add_parser(network_command.NAME, help=network_command.HELP))
    return parser


# ---------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------
def _version() -> str:
    from . import __version__

    return __version__


def _versions() -> dict:
    return {"chirpsift": _version(), "numpy": np.__version__, "python": platform.python_version()}


def _set_threads(n: int | None) -> None:
    if n is not None:
        set_threads(n)


def _check_writable(path: Path, what: str) -> None:
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise FileNotFoundError(f"folder for {what} does not exist: {folder}")
    if path.is_dir():
        raise UsageError(f"{what} {path} is a directory")
    if not os.access(folder, os.W_OK):
        raise PermissionError(f"cannot write {what} into {folder}")


def _loudest(triggers: np.ndarray) -> dict | None:
    """The trigger with the largest reweighted SNR, as plain Python values."""
    if len(triggers) == 0:
        return None
    row = triggers[int(np.argmax(triggers["reweighted_snr"]))]
    return {name: row[name].item() for name in _LOUDEST_FIELDS}


def _describe_loudest(loud: dict | None) -> str:
    if loud is None:
        return "no triggers"
    return (
        f"t = {loud['time']:.4f} s, template {loud['m1']:.3f} + {loud['m2']:.3f} Msun, "
        f"SNR {loud['snr']:.2f}, reweighted SNR {loud['reweighted_snr']:.2f}"
    )


def _effective_settings(settings: dict) -> dict:
    """The given search settings completed with ``chirpsift.search``'s own defaults."""
    import inspect

    from .pipeline import search

    out = {}
    skip = {"strain", "sample_rate", "bank", "t0", "progress", "full_output"}
    for name, param in inspect.signature(search).parameters.items():
        if name in skip or param.default is inspect.Parameter.empty:
            continue
        if param.default is None or isinstance(param.default, (bool, int, float, str)):
            out[name] = param.default
    out.update({k: v for k, v in settings.items() if v is not None})
    return out


def _pairs(values) -> list:
    return [[float(a), float(b)] for a, b in values]


def _run_search(strain, bank, settings: dict, progress: bool):
    from .pipeline import search

    kwargs = {k: v for k, v in settings.items() if v is not None}
    return search(strain.data, strain.sample_rate, bank, t0=strain.t0, progress=progress, full_output=True, **kwargs)


def _summary(
    *, command, argv, strain, strain_path, dataset, bank, bank_path, config_path, settings, triggers, info,
    wall, extra=None,
) -> dict:
    gates = _pairs(info["gates"])
    analysed = _pairs(info["analysed"])
    doc = {
        "summary_version": 1,
        "command": command,
        "argv": list(argv),
        "created_utc": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "versions": _versions(),
        "inputs": {
            "strain": {
                "path": None if strain_path is None else os.path.abspath(strain_path),
                "dataset": dataset,
                "source": strain.source,
                "sample_rate": strain.sample_rate,
                "t0": strain.t0,
                "samples": int(strain.data.size),
                "duration": strain.duration,
            },
            "bank": {
                "path": None if bank_path is None else os.path.abspath(bank_path),
                "templates": len(bank),
            },
            "config": None if config_path is None else os.path.abspath(config_path),
        },
        "settings": {**_effective_settings(settings), "threads": get_threads()},
        "counts": {
            "triggers": int(len(triggers)),
            "templates": int(info["templates"]),
            "segments": int(info["segments"]),
            "gates": len(gates),
        },
        "gates": gates,
        "analysed": analysed,
        "analysed_duration": float(sum(b - a for a, b in analysed)),
        "loudest": _loudest(triggers),
        "wall_time_s": wall,
    }
    if extra:
        doc.update(extra)
    return doc


# ---------------------------------------------------------------------------
# search
# ---------------------------------------------------------------------------
def _cmd_search(args, argv) -> int:
    from .bank import Bank
    from .config import load_config, merge_settings
    from .io import read_strain, write_json_atomic, write_triggers

    started = time.perf_counter()
    config = load_config(args.config) if args.config else None
    inputs = merge_settings(
        config.input if config else {},
        {"strain": args.strain, "dataset": args.dataset, "sample_rate": args.sample_rate, "t0": args.t0,
         "bank": args.bank},
    )
    settings = merge_settings(config.search if config else {}, {k: getattr(args, k) for k in _SEARCH_ARGS})
    for key, flag in (("strain", "--strain"), ("bank", "--bank")):
        if not inputs.get(key):
            raise UsageError(f"{flag} is required (or set [input] {key} in the --config file)")
    if settings.get("f_low") is None:
        raise UsageError("--f-low is required (or set [search] f-low in the --config file)")

    output = Path(args.output)
    summary_path = Path(args.summary) if args.summary else output.with_suffix(".json")
    if summary_path.resolve() == output.resolve():
        raise UsageError(f"--summary and --output are the same file: {output}")
    _check_writable(output, "--output")
    _check_writable(summary_path, "--summary")

    strain = read_strain(
        inputs["strain"], dataset=inputs.get("dataset"), sample_rate=inputs.get("sample_rate"), t0=inputs.get("t0")
    )
    bank = Bank.load(inputs["bank"])
    if len(bank) == 0:
        raise UsageError(f"bank {inputs['bank']} holds no templates")
    _set_threads(args.threads)

    triggers, info = _run_search(strain, bank, settings, progress=not args.no_progress)
    wall = time.perf_counter() - started

    doc = _summary(
        command="search", argv=argv, strain=strain, strain_path=inputs["strain"], dataset=inputs.get("dataset"),
        bank=bank, bank_path=inputs["bank"], config_path=args.config, settings=settings,
        triggers=triggers, info=info, wall=wall,
        extra={"outputs": {"triggers": os.path.abspath(output), "summary": os.path.abspath(summary_path)}},
    )
    write_triggers(output, triggers, doc)
    write_json_atomic(summary_path, doc)

    counts = doc["counts"]
    threshold = doc["settings"].get("min_snr")
    above = f" above SNR {threshold:g}" if threshold is not None else ""
    print(
        f"Searched {strain.duration:g} s of strain from {strain.source} ({strain.sample_rate:g} Hz, "
        f"analysed {doc['analysed_duration']:g} s in {counts['segments']} segments, {counts['gates']} gates) "
        f"with {counts['templates']} templates from {settings['f_low']:g} Hz: {counts['triggers']} triggers{above}. "
        f"Loudest by reweighted SNR: {_describe_loudest(doc['loudest'])}. "
        f"Wrote {output} and {summary_path} in {wall:.1f} s."
    )
    return 0


# ---------------------------------------------------------------------------
# demo
# ---------------------------------------------------------------------------
def _cmd_demo(args, argv) -> int:
    import chirpsift

    from .bank import Bank
    from .io import StrainSeries, write_json_atomic, write_triggers
    from .synthetic import colored_gaussian_noise, inject_taylorf2, optimal_snr

    started = time.perf_counter()
    out_dir = Path(args.output_dir) if args.output_dir else None
    if out_dir is not None:
        out_dir.mkdir(parents=True, exist_ok=True)

    fs = DEMO_SAMPLE_RATE
    n = int(round(args.duration * fs))
    m1, m2 = DEMO_MASSES
    chirp = float(np.asarray(chirpsift.chirp_duration(m1, m2, DEMO_F_LOW)).reshape(-1)[0])
    segment = 256.0
    if args.duration < 2 * segment:
        raise UsageError(
            f"--duration must be at least {2 * segment:g} s: the {m1}+{m2} Msun chirp lasts {chirp:.0f} s "
            f"from {DEMO_F_LOW:g} Hz and the demo searches {segment:g} s segments"
        )
    t0 = DEMO_T0
    # an invented coalescence time midway through the part of the data a full-length
    # template can analyse, off the sample grid
    tc = t0 + round(0.5 * (chirp + args.duration), 0) + 0.3712

    noise = colored_gaussian_noise(n, fs, DEMO_CURVE, seed=args.seed)
    snr_1mpc = optimal_snr(m1, m2, distance=1.0, psd=DEMO_CURVE, f_low=DEMO_F_LOW, sample_rate=fs, n=n)
    distance = snr_1mpc / DEMO_TARGET_SNR
    data = inject_taylorf2(
        noise, fs, m1=m1, m2=m2, t_coalescence=tc, distance=distance, phase=0.7, f_low=DEMO_F_LOW, t0=t0
    )
    strain = StrainSeries(data=data, sample_rate=fs, t0=t0, source=f"synthetic {DEMO_SITE} (seed {args.seed})")
    bank = Bank.mass_grid(1.3, 1.5, 5)
    settings = {"f_low": DEMO_F_LOW, "segment_duration": segment}
    _set_threads(args.threads)

    print(
        f"{DEMO_SITE}: {args.duration:g} s of Gaussian noise ({DEMO_CURVE}, {fs:g} Hz, seed {args.seed}) with a "
        f"{m1}+{m2} Msun inspiral injected at t = {tc:.4f} s, distance {distance:.1f} Mpc "
        f"(optimal SNR {DEMO_TARGET_SNR:g}); searching with {len(bank)} templates from {DEMO_F_LOW:g} Hz."
    )
    triggers, info = _run_search(strain, bank, settings, progress=not args.no_progress)
    wall = time.perf_counter() - started

    loud = _loudest(triggers)
    injected = {"site": DEMO_SITE, "time": tc, "m1": m1, "m2": m2, "distance": distance,
                "optimal_snr": DEMO_TARGET_SNR, "phase": 0.7}
    analysed = _pairs(info["analysed"])
    covered = any(a <= tc < b for a, b in analysed) if analysed else None
    width = 12
    print(f"{'':{width}} {'time (s)':>16} {'m1':>7} {'m2':>7} {'SNR':>7} {'rw SNR':>7}")
    print(f"{'injected':{width}} {tc:16.4f} {m1:7.3f} {m2:7.3f} {DEMO_TARGET_SNR:7.2f} {'':>7}")
    if loud is None:
        print(f"{'loudest':{width}} no triggers")
    else:
        print(
            f"{'loudest':{width}} {loud['time']:16.4f} {loud['m1']:7.3f} {loud['m2']:7.3f} "
            f"{loud['snr']:7.2f} {loud['reweighted_snr']:7.2f}"
        )
    if covered is False:
        print("note: the injection time lies outside the analysed intervals reported by the search")
    print(f"{len(triggers)} triggers in {wall:.1f} s.")

    if out_dir is not None:
        np.savez(out_dir / "strain.npz", strain=data, sample_rate=fs, t0=t0)
        bank.save(out_dir / "bank.npz")
        doc = _summary(
            command="demo", argv=argv, strain=strain, strain_path=str(out_dir / "strain.npz"), dataset=None,
            bank=bank, bank_path=str(out_dir / "bank.npz"), config_path=None, settings=settings,
            triggers=triggers, info=info, wall=wall,
            extra={"injection": injected, "seed": args.seed},
        )
        write_triggers(out_dir / "triggers.parquet", triggers, doc)
        write_json_atomic(out_dir / "summary.json", doc)
        print(f"Wrote strain, bank, triggers and summary to {out_dir}.")
    return 0


# ---------------------------------------------------------------------------
# bench
# ---------------------------------------------------------------------------
def _cmd_bench(args, argv) -> int:
    try:
        module = importlib.import_module("chirpsift.benchmarks")
    except ModuleNotFoundError as exc:
        if exc.name in ("chirpsift.benchmarks",):
            print(
                f"{PROG}: error: the benchmark workloads (chirpsift.benchmarks) are not available in this "
                "installation",
                file=sys.stderr,
            )
            return 2
        raise
    result = module.main(list(args.bench_args))
    return 0 if result is None else int(result)


# ---------------------------------------------------------------------------
# entry point
# ---------------------------------------------------------------------------
_INPUT_ERRORS = (ValueError, TypeError, FileNotFoundError, IsADirectoryError, NotADirectoryError, PermissionError)


def main(argv=None) -> int:
    """Run the ``chirpsift`` command.

    Parameters
    ----------
    argv : list of str, optional
        Arguments without the program name (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        Exit status: 0 success, 2 bad usage or input, 1 unexpected failure,
        130 interrupted.
    """
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    # `bench` forwards everything after it untouched (including --help)
    if argv and argv[0] == "bench":
        args = argparse.Namespace(command="bench", bench_args=argv[1:])
    else:
        try:
            args = parser.parse_args(argv)
        except SystemExit as exc:  # argparse: --help (0) or a usage error (2)
            return exc.code if isinstance(exc.code, int) else 2
    if getattr(args, "version", False):
        print(f"{PROG} {_version()}")
        return 0
    if args.command is None:
        parser.print_help(sys.stderr)
        return 2
    handler = {"search": _cmd_search, "demo": _cmd_demo, "bench": _cmd_bench,
               network_command.NAME: lambda a, _argv: network_command.run(a)}[args.command]
    try:
        return handler(args, argv)
    except KeyboardInterrupt:
        print(f"{PROG}: interrupted", file=sys.stderr)
        return 130
    except _INPUT_ERRORS as exc:
        print(f"{PROG}: error: {exc}", file=sys.stderr)
        return 2
    except ImportError as exc:
        print(f"{PROG}: error: {exc}", file=sys.stderr)
        return 1
    except Exception:
        print(f"{PROG}: unexpected failure; please report it with the traceback below", file=sys.stderr)
        traceback.print_exc(file=sys.stderr)
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
