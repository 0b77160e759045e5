"""The coverage figure: fitting factor over the (m1, m2) plane."""

from __future__ import annotations

import numpy as np

from ..report.plots import PALETTE, save_png

__all__ = ["plot_coverage"]


def plot_coverage(coverage, bank, path) -> None:
    """Draw each point's fitting factor in the component-mass plane and save it as PNG.

    Parameters
    ----------
    coverage : chirpsift.bank.Coverage
        From :func:`chirpsift.bank_coverage`.
    bank : chirpsift.Bank
        The bank (its templates are drawn as small grey dots).
    path : str or os.PathLike
        PNG to write (atomically).

    Notes
    -----
    The colour scale (matplotlib's ``cividis``, designed to read the same for
    colour-blind readers and in greyscale) runs from the lowest fitting factor to 1;
    points below the minimal match are ringed, so they stand out without colour.
    """
    from matplotlib.figure import Figure

    p, ff, mm = coverage.points, coverage.fitting_factors, coverage.minimal_match
    fig = Figure(figsize=(6.4, 5.0), dpi=100)
    fig.subplots_adjust(left=0.12, right=0.97, bottom=0.11, top=0.9)
    ax = fig.add_subplot()
    ax.scatter(bank.m1, bank.m2, s=2, color="#8c8c8c", linewidths=0, label=f"templates ({len(bank)})", zorder=1)
    order = np.argsort(-ff)  # lowest on top
    lo = float(min(ff.min(), mm))
    sc = ax.scatter(p[order, 0], p[order, 1], c=ff[order], s=6, cmap="cividis", vmin=lo, vmax=1.0,
                    linewidths=0, zorder=2)
    low = ff < mm
    if low.any():
        ax.scatter(p[low, 0], p[low, 1], s=40, facecolors="none", edgecolors=PALETTE[2], linewidths=1.0, zorder=3,
                   label=f"below minimal match {mm:g} ({int(low.sum())})")
    bar = fig.colorbar(sc, ax=ax, pad=0.02)
    bar.set_label("fitting factor (fraction of optimal SNR kept)")
    s = coverage.summary
    ax.set_title(f"Bank coverage: {100 * s['fraction_covered']:.2f}% of {s['points']} points reach {mm:g}; "
                 f"0.1 percentile {s['percentile_0.1']:.4f}", fontsize=9)
    ax.set_xlabel(r"$m_1$ (solar masses, heavier)")
    ax.set_ylabel(r"$m_2$ (solar masses, lighter)")
    ax.legend(loc="upper left", fontsize=8, framealpha=0.85)
    ax.grid(True, alpha=0.3)
    save_png(fig, path)
