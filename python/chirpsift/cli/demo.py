"""``chirpsift demo``: synthetic noise for an invented site, one injected inspiral, a search.

The source's masses lie between the points of the demo bank (:meth:`Bank.mass_grid`),
as a real source's would, so the screen shows what a crude bank costs: the best template
matches the source imperfectly, the measured SNR falls below the injected optimal SNR,
and the chi-squared rises above its Gaussian-noise mean. (Its chirp mass is close to a
grid point's; most sources between the grid points would be lost.)
"""

from __future__ import annotations

import argparse
import textwrap
import time
from pathlib import Path

import numpy as np

from .. import pipeline
from ..report import loudest, plural, run_summary
from ..threads import get_threads, set_threads
from ._errors import UsageError
from ._types import Once, nonnegative_int, positive_float, positive_int
from .search import describe_analysed

__all__ = ["HELP", "add_arguments", "run", "DEMO_MASSES", "DEMO_BANK_GRID"]

HELP = "search synthetic noise holding one injected inspiral"

#: An invented site, start time and source.
DEMO_SITE = "Site A"
DEMO_SAMPLE_RATE = 4096.0
DEMO_T0 = 1_000_000.0
DEMO_F_LOW = 20.0
#: Component masses (Msun) of the injected source: between the grid points of the bank.
DEMO_MASSES = (1.425, 1.375)
DEMO_PHASE = 0.7
DEMO_TARGET_SNR = 12.0
DEMO_CURVE = "gen2-zero-detuned"
#: ``Bank.mass_grid`` arguments of the demo bank: masses 1.3, 1.35, ..., 1.5 Msun.
DEMO_BANK_GRID = (1.3, 1.5, 5)
#: Shortest data (s): the bank's 1.3 + 1.3 Msun templates last 182 s from 20 Hz, and each
#: segment discards that much (with margin) before it analyses anything.
DEMO_MIN_DURATION = 512.0
#: Length (s) of the frequency grid the bank's match with the source is computed on:
#: longer than every template.
_MATCH_DURATION = 256.0
#: What the demo bank keeps of a source between its points, measured with
#: :func:`best_match` for 16 sources with masses drawn uniformly in 1.3-1.5 Msun
#: (``numpy.random.default_rng(3)``): the best template's match ranged from 0.14 to 0.59.
GRID_LOSS_TEXT = "for 16 random sources in its mass range the best template kept 14-59% of the optimal SNR, median 27%"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the flags of ``chirpsift demo`` to ``parser``."""
    m1, m2 = DEMO_MASSES
    parser.description = (
        f"Generate coloured Gaussian noise for an invented detector site ({DEMO_SITE}) from the "
        f"{DEMO_CURVE!r} design curve at {DEMO_SAMPLE_RATE:g} Hz, inject one {m1}+{m2} Msun inspiral "
        f"with optimal SNR {DEMO_TARGET_SNR:g}, search it with a small grid bank (Bank.mass_grid"
        f"{DEMO_BANK_GRID}) and print the loudest trigger beside the injection."
    )
    parser.add_argument("--seed", type=nonnegative_int, default=1, metavar="N",
                        help="noise seed (default: %(default)s)")
    parser.add_argument("--duration", type=positive_float, default=512.0, metavar="S",
                        help=f"data length in s, at least {DEMO_MIN_DURATION:g} (default: %(default)s s)")
    parser.add_argument("--threads", type=positive_int, metavar="N", help="worker threads (default: all cores)")
    parser.add_argument("--output-dir", action=Once, what="folder", metavar="DIR",
                        help="also write strain.npz, bank.npz, triggers.parquet and summary.json into this folder")
    parser.add_argument("--progress", action=argparse.BooleanOptionalAction, default=True,
                        help="show a progress bar on stderr (default: on)")


def best_match(bank, m1: float, m2: float, *, f_low: float, sample_rate: float, duration: float, psd: str):
    """Find the template of ``bank`` that best matches a non-spinning ``m1 + m2`` source.

    Parameters
    ----------
    bank : chirpsift.Bank
    m1, m2 : float
        Source masses, solar masses.
    f_low : float
        Hz.
    sample_rate, duration : float
        Hz and s of the grid the match is computed on (``duration`` longer than the
        templates).
    psd : str
        Design curve the noise follows.

    Returns
    -------
    match : float
        ``max over time and phase of <h|t> / (|h| |t|)``, the fraction of the optimal SNR
        the template can recover.
    index : int
        Row of that template.
    """
    from ..filter import sigma, snr_series
    from ..spectrum import design_psd
    from ..waveform import taylorf2

    n = int(round(duration * sample_rate))
    df = 1.0 / duration
    n_freq = n // 2 + 1
    grid = design_psd(np.arange(n_freq) * df, psd)
    source = taylorf2(m1, m2, f_low=f_low, df=df, n_freq=n_freq, dtype=np.complex128)[0]
    norm = float(sigma(source, grid, df, f_low))
    matches = np.empty(len(bank))
    for i in range(len(bank)):  # one template at a time: each SNR series holds n samples
        t = taylorf2(bank.m1[i], bank.m2[i], bank.chi1[i], bank.chi2[i], f_low=f_low, df=df, n_freq=n_freq)
        matches[i] = np.abs(snr_series(source, t, grid, df, f_low)).max() / norm
    best = int(np.argmax(matches))
    return float(matches[best]), best


def _say(paragraph: str) -> None:
    print(textwrap.fill(paragraph, width=100))


def _dash(value, fmt: str, width: int) -> str:
    return f"{'-':>{width}}" if value is None else f"{value:>{width}{fmt}}"


def _comparison(tc: float, masses, loud: dict | None) -> list[str]:
    """Lay out the injected source and the loudest trigger side by side.

    Each quantity has its own labelled column: the injection has an optimal SNR, a
    trigger has measured ones.
    """
    cols = [("", 16, None), ("time (s)", 14, ".4f"), ("m1 (Msun)", 10, ".3f"), ("m2 (Msun)", 10, ".3f"),
            ("optimal SNR", 12, ".2f"), ("measured SNR", 13, ".2f"), ("chi2/dof", 9, ".2f"),
            ("reweighted SNR", 15, ".2f")]
    header = " ".join(f"{name:<{w}}" if i == 0 else f"{name:>{w}}" for i, (name, w, _) in enumerate(cols))
    rows = [("injected source", [tc, masses[0], masses[1], DEMO_TARGET_SNR, None, None, None])]
    if loud is None:
        rows.append(("loudest trigger", [None] * 7))
    else:
        rows.append(("loudest trigger", [loud["time"], loud["m1"], loud["m2"], None, loud["snr"],
                                         loud["chi2"] / loud["chi2_dof"], loud["reweighted_snr"]]))
    lines = [header]
    for label, values in rows:
        cells = [f"{label:<{cols[0][1]}}"] + [_dash(v, fmt, w) for v, (_, w, fmt) in zip(values, cols[1:])]
        lines.append(" ".join(cells))
    return lines


def _chi2_expectation(bands: int) -> str:
    dof = 2 * bands - 2
    return (
        f"chi2/dof: Allen's chi-squared over p = {bands} frequency bands has 2p - 2 = {dof} degrees of freedom. "
        f"In Gaussian noise, for noise alone or a signal the template matches exactly, it averages {dof} "
        f"(chi2/dof 1, standard deviation {np.sqrt(2.0 / dof):.2f}). A template that differs from the signal "
        "adds a term that grows with the SNR squared, so a loud source between grid points shows chi2/dof above 1. "
        "The reweighted SNR equals the SNR when chi2/dof <= 1 and is the SNR times "
        "[(1 + (chi2/dof)^3) / 2]^(-1/6) above it (Babak et al. 2013)."
    )


def run(args) -> int:
    """Run ``chirpsift demo`` from parsed arguments (see :func:`add_arguments`)."""
    from ..bank import Bank
    from ..io import StrainSeries, atomic_path, write_json_atomic, write_triggers
    from ..synthetic import colored_gaussian_noise, inject_taylorf2, optimal_snr
    from ..waveform import chirp_duration

    started = time.perf_counter()
    out_dir = Path(args.output_dir) if args.output_dir else None
    if out_dir is not None:
        if out_dir.exists() and not out_dir.is_dir():
            raise UsageError(f"--output-dir {args.output_dir!r} is a file, not a folder")
        out_dir.mkdir(parents=True, exist_ok=True)

    fs = DEMO_SAMPLE_RATE
    n = int(round(args.duration * fs))
    m1, m2 = DEMO_MASSES
    chirp = chirp_duration(m1, m2, DEMO_F_LOW)
    if args.duration < DEMO_MIN_DURATION:
        raise UsageError(
            f"--duration {args.duration:g} is too short: give at least {DEMO_MIN_DURATION:g} s (the bank's longest "
            f"templates last {chirp_duration(DEMO_BANK_GRID[0], DEMO_BANK_GRID[0], DEMO_F_LOW):.0f} s from "
            f"{DEMO_F_LOW:g} Hz, and each segment discards that much before it analyses anything)"
        )
    t0 = DEMO_T0
    # an invented coalescence time midway through the part of the data a full-length
    # template can analyse, off the sample grid
    tc = t0 + round(0.5 * (chirp + args.duration), 0) + 0.3712

    noise = colored_gaussian_noise(n, fs, DEMO_CURVE, seed=args.seed)
    snr_1mpc = optimal_snr(m1, m2, distance=1.0, psd=DEMO_CURVE, f_low=DEMO_F_LOW, sample_rate=fs, n=n)
    distance = snr_1mpc / DEMO_TARGET_SNR
    data = inject_taylorf2(noise, fs, m1=m1, m2=m2, t_coalescence=tc, distance=distance, phase=DEMO_PHASE,
                           f_low=DEMO_F_LOW, t0=t0)
    strain = StrainSeries(data=data, sample_rate=fs, t0=t0, source=f"synthetic {DEMO_SITE} (seed {args.seed})")
    bank = Bank.mass_grid(*DEMO_BANK_GRID)
    settings = pipeline.SearchSettings(f_low=DEMO_F_LOW)  # segments sized from the bank
    match, best = best_match(bank, m1, m2, f_low=DEMO_F_LOW, sample_rate=fs, duration=_MATCH_DURATION,
                             psd=DEMO_CURVE)

    _say(f"{DEMO_SITE} (an invented site): {args.duration:g} s of Gaussian noise coloured by the {DEMO_CURVE} "
          f"design curve, {fs:g} Hz, seed {args.seed}.")
    _say(f"Injected: a non-spinning {m1} + {m2} Msun inspiral coalescing at t = {tc:.4f} s, {distance:.1f} Mpc "
          f"away, optimal SNR {DEMO_TARGET_SNR:g}.")
    source_mchirp = float(Bank([m1], [m2]).mchirp[0])
    offset = abs(source_mchirp / bank.mchirp[best] - 1)
    _say(f"Bank: Bank.mass_grid{DEMO_BANK_GRID}, {plural(len(bank), 'template')} from {DEMO_F_LOW:g} Hz. It is a "
         f"crude grid, not a covering bank: between its points a source can lose most of its SNR ({GRID_LOSS_TEXT})."
         f" This source's chirp mass, {source_mchirp:.4f} Msun, lies within {100 * offset:.2g}% of that of its best "
         f"template ({bank.m1[best]:.3f} + {bank.m2[best]:.3f} Msun), which matches it to {match:.3f}: expect a "
         f"measured SNR near {match * DEMO_TARGET_SNR:.1f}, give or take about 1 for the noise.")
    previous_threads = get_threads()
    if args.threads is not None:
        set_threads(args.threads)
    try:
        threads = get_threads()
        triggers, info = pipeline.search(strain.data, fs, bank, t0=t0, progress=args.progress, full_output=True,
                                         **settings.as_dict())
    finally:
        set_threads(previous_threads)
    wall = time.perf_counter() - started

    injected = {"site": DEMO_SITE, "time": tc, "m1": m1, "m2": m2, "distance": distance,
                "optimal_snr": DEMO_TARGET_SNR, "phase": DEMO_PHASE, "best_template": best, "best_match": match}
    doc = run_summary(
        command="demo", argv=args.argv, strain=strain,
        strain_path=None if out_dir is None else out_dir / "strain.npz", dataset=None, bank=bank,
        bank_path=None if out_dir is None else out_dir / "bank.npz", config_path=None, settings=settings,
        triggers=triggers, info=info, wall=wall, threads=threads, extra={"injection": injected, "seed": args.seed},
    )
    loud = loudest(triggers)
    print()
    for line in _comparison(tc, DEMO_MASSES, loud):
        print(line)
    print()
    if not any(a <= tc < b for a, b in doc["analysed"]):
        print("Note: the injection time lies outside the intervals the search analysed.")
    _say(describe_analysed(doc))
    pad_start, pad_end = info.get("pad_start"), info.get("pad_end")
    if pad_start is not None and pad_end is not None:
        _say(f"Each segment drops its first {pad_start:.1f} s (the longest template, "
             f"{info['max_template_duration']:.1f} s with a safety margin, plus half the "
             f"{settings.welch_duration:g} s whitening filter) and its last {pad_end:.1f} s, where the filter "
             "output wraps around.")
    _say(_chi2_expectation(settings.chi2_bands))
    print(f"{plural(len(triggers), 'trigger')} in {wall:.1f} s.")

    if out_dir is not None:
        with atomic_path(out_dir / "strain.npz") as tmp, open(tmp, "wb") as fh:
            np.savez(fh, strain=data, sample_rate=fs, t0=t0)
        bank.save(out_dir / "bank.npz")
        write_triggers(out_dir / "triggers.parquet", triggers, doc)
        write_json_atomic(out_dir / "summary.json", doc)
        print(f"Wrote strain.npz, bank.npz, triggers.parquet and summary.json into {out_dir}.")
    return 0
