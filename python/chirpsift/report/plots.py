"""The report's figures (matplotlib, Agg) and the colour scheme they share.

Every figure is drawn on its own :class:`matplotlib.figure.Figure` (no pyplot state),
saved as PNG atomically and without the software tag, so the same data give the same
bytes. Axes carry units.

The colour scheme is our own: a dark ink, a mid blue, an amber and a pale blue, whose
relative luminances (WCAG 2 formula) differ pairwise by at least 0.1 so they stay
apart in greyscale, and whose hues avoid the red-green pairs that colour-blind readers
confuse (blue against amber is the pair all common colour-vision deficiencies keep).
Markers and line styles differ as well, so no plot relies on colour alone.
"""

from __future__ import annotations

import math

import numpy as np

from ..io.atomic import atomic_path

__all__ = ["PALETTE", "MARKERS", "LINESTYLES", "relative_luminance", "poisson_interval", "save_png",
           "plot_spectra", "plot_timeline", "plot_bank", "plot_candidate_series", "plot_statistic",
           "plot_ifar", "plot_message", "plot_injections"]

#: The report's colours: ink, blue, amber, pale blue (see the module docstring).
PALETTE = ("#1c2541", "#3a6ea5", "#f0a430", "#b9d6ea")
#: Markers per series, in palette order.
MARKERS = ("o", "s", "^", "D")
#: Line styles per series, in palette order.
LINESTYLES = ("-", "--", "-.", ":")
_GREY = "#8c8c8c"
#: Timeline categories drawn, with (colour, hatch): analysed time solid ink, the rest light or hatched.
_TIMELINE = {
    "analysed": (PALETTE[0], ""),
    "gated": (PALETTE[2], "xx"),
    "pads": (PALETTE[3], ""),
    "vetoed": (PALETTE[2], ""),
    "nonfinite": (_GREY, "//"),
    "short": (_GREY, ""),
}
_LABELS = {"analysed": "analysed", "gated": "gated", "pads": "stretch edge pads", "vetoed": "vetoed",
           "nonfinite": "non-finite samples", "short": "stretch too short"}


def relative_luminance(colour: str) -> float:
    """Relative luminance of a ``#rrggbb`` colour (WCAG 2.x definition), 0 (black) to 1 (white).

    Examples
    --------
    >>> from chirpsift.report.plots import relative_luminance
    >>> relative_luminance("#ffffff"), relative_luminance("#000000")
    (1.0, 0.0)
    """
    rgb = [int(colour[i:i + 2], 16) / 255.0 for i in (1, 3, 5)]
    lin = [c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4 for c in rgb]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def poisson_interval(mean, probability: float):
    """Central interval of a Poisson count: ``lo``, ``hi`` with at most ``(1 - p) / 2`` outside each side.

    Parameters
    ----------
    mean : array_like
        Expected counts (>= 0).
    probability : float
        Probability inside the interval, in (0, 1).

    Returns
    -------
    lo, hi : ndarray of int
        The smallest ``k`` with ``P(X <= k) > (1 - p) / 2`` and the smallest ``k`` with
        ``P(X <= k) >= (1 + p) / 2``: the quantiles scipy's ``poisson.ppf`` gives.

    Examples
    --------
    >>> from chirpsift.report.plots import poisson_interval
    >>> lo, hi = poisson_interval([0.0, 10.0], 0.9)
    >>> lo.tolist(), hi.tolist()
    ([0, 5], [0, 15])
    """
    mu = np.atleast_1d(np.asarray(mean, dtype=np.float64))
    a, b = (1 - probability) / 2, (1 + probability) / 2
    kmax = int(np.max(mu, initial=0.0) + 12 * math.sqrt(np.max(mu, initial=0.0)) + 20)
    k = np.arange(kmax + 1)
    lgam = np.array([math.lgamma(x + 1.0) for x in k])
    with np.errstate(divide="ignore", invalid="ignore"):
        logp = k[None, :] * np.log(mu[:, None]) - mu[:, None] - lgam[None, :]
    logp[mu == 0] = np.where(k == 0, 0.0, -np.inf)
    cdf = np.cumsum(np.exp(logp), axis=1)
    lo = np.argmax(cdf > a * (1 - 1e-12), axis=1)
    hi = np.argmax(cdf >= b * (1 - 1e-12), axis=1)
    return lo, hi


def _plain_log_ticks(ax) -> None:
    """Label log axes at their major ticks only, in plain numbers (mathtext labels are slow to lay out)."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    for axis, text, limits in ((ax.xaxis, "{:g}", ax.get_xlim()), (ax.yaxis, "{:.0e}", ax.get_ylim())):
        if axis.get_scale() == "log":
            decades = math.log10(max(limits) / min(limits)) if min(limits) > 0 else 10.0
            axis.set_major_locator(LogLocator(subs=(1.0, 2.0, 5.0) if decades <= 2.0 else (1.0,)))
            axis.set_major_formatter(FuncFormatter(lambda v, _, text=text: text.format(v)))
            axis.set_minor_formatter(NullFormatter())


def _figure(width=7.0, height=4.0, *, left=0.9, right=0.25, bottom=0.6, top=0.4, hspace=0.15):
    """Return a figure with fixed margins in inches (a layout engine costs more than the drawing)."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=100)
    fig.subplots_adjust(left=left / width, right=1 - right / width, bottom=bottom / height, top=1 - top / height,
                        hspace=hspace)
    return fig


def save_png(fig, path) -> None:
    """Save a figure as PNG atomically, without the software tag (same data, same bytes)."""
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png", dpi=100, metadata={"Software": None})


def plot_message(path, title: str, message: str) -> None:
    """Draw a figure that says why there is nothing to plot."""
    fig = _figure(7.0, 2.0)
    ax = fig.add_subplot()
    ax.set_axis_off()
    ax.set_title(title)
    ax.text(0.5, 0.5, message, ha="center", va="center", wrap=True)
    save_png(fig, path)


def plot_spectra(spectra: dict, path, *, f_low: float) -> None:
    """Amplitude spectral density per site: the median over the run and the 10-90% spread.

    Parameters
    ----------
    spectra : dict
        Site name to ``(frequency Hz, median, 10th percentile, 90th percentile)``, ASDs in 1/sqrt(Hz).
    path : path
        PNG to write.
    f_low : float
        Lower frequency limit of the plot (Hz).
    """
    fig = _figure()
    ax = fig.add_subplot()
    drawn = False
    for i, (name, (f, med, low, high)) in enumerate(spectra.items()):
        keep = (f >= f_low) & (f < f[-1]) & (med > 0)  # the Nyquist bin holds half the power
        if not keep.any():
            continue
        c = PALETTE[i % len(PALETTE)] if i % len(PALETTE) != 3 else _GREY
        ax.fill_between(f[keep], low[keep], high[keep], color=c, alpha=0.25, linewidth=0)
        ax.loglog(f[keep], med[keep], color=c, linestyle=LINESTYLES[i % 4], label=f"{name} (median; band 10-90%)")
        drawn = True
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel("amplitude spectral density (1/\u221aHz)")
    ax.set_title("Noise of each site over the run")
    _plain_log_ticks(ax)
    ax.grid(True, which="major", alpha=0.3)
    if drawn:
        ax.legend(fontsize="small")
    save_png(fig, path)


def plot_timeline(tables: dict, path) -> None:
    """Analysed and left-out time of each site, from the live-time tables.

    Parameters
    ----------
    tables : dict
        Site name to a live-time table as :meth:`chirpsift.pipeline.LiveTimeTable.as_dict` gives it.
    path : path
        PNG to write.
    """
    from matplotlib.patches import Patch

    names = list(tables)
    fig = _figure(7.0, 1.5 + 0.6 * len(names), left=0.8, bottom=1.05)
    ax = fig.add_subplot()
    t0 = min(t["start"] for t in tables.values())
    scale, unit = (3600.0, "h") if max(t["end"] for t in tables.values()) - t0 > 7200 else (1.0, "s")
    used = set()
    for row, name in enumerate(names):
        intervals = tables[name]["intervals"]
        for cat, (colour, hatch) in _TIMELINE.items():
            ivs = intervals.get(cat, [])
            if not ivs:
                continue
            used.add(cat)
            bars = [((a - t0) / scale, (b - a) / scale) for a, b in ivs]
            ax.broken_barh(bars, (row - 0.35, 0.7), facecolors=colour, hatch=hatch, edgecolor=PALETTE[0],
                           linewidth=0.0)
    ax.set_yticks(range(len(names)), names)
    ax.set_ylim(len(names) - 0.5, -0.5)
    ax.set_xlabel(f"time since {t0:.1f} s ({unit})")
    ax.set_title("Time analysed and left out (white: no data)")
    handles = [Patch(facecolor=_TIMELINE[c][0], hatch=_TIMELINE[c][1], edgecolor=PALETTE[0], label=_LABELS[c])
               for c in _TIMELINE if c in used]
    if handles:
        fig.legend(handles=handles, loc="lower center", ncols=min(3, len(handles)), fontsize="small",
                   frameon=False)
    save_png(fig, path)


def plot_bank(m1, m2, path) -> None:
    """Plot the template bank in the component-mass plane (solar masses)."""
    fig = _figure(5.0, 3.6)
    ax = fig.add_subplot()
    ax.scatter(m1, m2, s=8, color=PALETTE[1], marker="o", linewidths=0)
    ax.set_xlabel(r"$m_1$ (solar masses)")
    ax.set_ylabel(r"$m_2$ (solar masses)")
    ax.set_title(f"Template bank: {len(m1)} templates")
    ax.grid(True, alpha=0.3)
    save_png(fig, path)


def plot_candidate_series(series: dict, t_c: float, path, *, title: str) -> None:
    """SNR and chi-squared per degree of freedom around a candidate, per site.

    Parameters
    ----------
    series : dict
        Site name to ``(times s, |SNR|, chi-squared / dof)``.
    t_c : float
        The candidate's time (s); the x axis is time from it.
    path : path
        PNG to write.
    title : str
        Figure title.
    """
    fig = _figure(7.0, 5.0)
    top, bottom = fig.subplots(2, 1, sharex=True)
    fig.subplots_adjust(hspace=0.08)
    for i, (name, (t, snr, chi)) in enumerate(series.items()):
        c, ls = PALETTE[i % 3], LINESTYLES[i % 4]
        top.plot(t - t_c, snr, color=c, linestyle=ls, label=name)
        bottom.plot(t - t_c, chi, color=c, linestyle=ls, label=name)
    top.set_ylabel("SNR")
    bottom.set_ylabel(r"$\chi^2$ / degrees of freedom")
    bottom.set_xlabel(f"time from {t_c:.3f} s (s)")
    top.set_title(title)
    for ax in (top, bottom):
        ax.grid(True, alpha=0.3)
    top.legend(fontsize="small")
    save_png(fig, path)


def plot_statistic(triggers: dict, background_rows: dict, candidates: dict, path) -> None:
    """Reweighted SNR against SNR: every trigger, those in background coincidences, and the candidates.

    Parameters
    ----------
    triggers : dict
        Site name to ``(snr, reweighted_snr)`` of all its triggers.
    background_rows : dict
        Site name to a boolean mask of its triggers that took part in a background coincidence.
    candidates : dict
        Site name to ``(snr, reweighted_snr)`` of its triggers in the listed zero-lag candidates.
    path : path
        PNG to write.
    """
    fig = _figure(6.0, 4.8)
    ax = fig.add_subplot()
    snr = np.concatenate([np.asarray(s, float) for s, _ in triggers.values()] or [np.zeros(0)])
    rw = np.concatenate([np.asarray(r, float) for _, r in triggers.values()] or [np.zeros(0)])
    mask = np.concatenate([np.asarray(m, bool) for m in background_rows.values()] or [np.zeros(0, bool)])
    ax.scatter(snr, rw, s=5, color=_GREY, marker="o", linewidths=0, label="single-site triggers")
    if mask.any():
        ax.scatter(snr[mask], rw[mask], s=10, color=PALETTE[1], marker="s", linewidths=0,
                   label="in time-slide background")
    for i, (name, (s, r)) in enumerate(candidates.items()):
        if len(s) == 0:
            continue
        ax.scatter(s, r, s=40, facecolors=PALETTE[2], edgecolors=PALETTE[0], marker=MARKERS[(i + 2) % 4],
                   label=f"candidates at {name}")
    if snr.size:
        lo, hi = float(np.min(rw)) * 0.9, float(np.max(snr)) * 1.05
        ax.plot([lo, hi], [lo, hi], color=_GREY, linestyle=":", linewidth=1, label="reweighted = SNR")
        ax.set_xlim(float(np.min(snr)) * 0.95, hi)
        ax.set_ylim(lo, hi)
    ax.set_xlabel("SNR")
    ax.set_ylabel("reweighted SNR")
    ax.set_title("Signal consistency: reweighted SNR against SNR")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize="small")
    save_png(fig, path)


def plot_ifar(ifar, live_time_years: float, background_time_years: float, path) -> None:
    """Cumulative count of zero-lag candidates against IFAR, with the background expectation.

    Parameters
    ----------
    ifar : array_like
        Inverse false-alarm rates of the zero-lag candidates (years).
    live_time_years : float
        Zero-lag live time (years): noise alone gives on average ``live / IFAR``
        candidates with an IFAR at least ``IFAR``.
    background_time_years : float
        Background live time (years): the largest IFAR the background can measure.
    path : path
        PNG to write.
    """
    fig = _figure(6.0, 4.5)
    ax = fig.add_subplot()
    x = np.sort(np.asarray(ifar, dtype=np.float64))[::-1]
    x = x[np.isfinite(x) & (x > 0)]
    lo_x = min(float(x.min()) if x.size else live_time_years, live_time_years) / 3
    hi_x = max(background_time_years, float(x.max()) if x.size else 0.0, lo_x * 10) * 1.5
    grid = np.geomspace(lo_x, hi_x, 200)
    expected = live_time_years / grid
    for p, alpha, label in ((0.9545, 0.18, "background 2 sigma"), (0.6827, 0.35, "background 1 sigma")):
        lo, hi = poisson_interval(expected, p)
        ax.fill_between(grid, np.maximum(lo, 0.5), np.maximum(hi, 0.5), step="mid", color=PALETTE[1],
                        alpha=alpha, linewidth=0, label=label)
    ax.plot(grid, expected, color=PALETTE[1], linestyle="--", label="background expectation")
    if x.size:
        ax.step(x, np.arange(1, x.size + 1), where="post", color=PALETTE[0], label="zero-lag candidates")
        ax.plot(x, np.arange(1, x.size + 1), linestyle="none", marker="o", markersize=3, color=PALETTE[0])
    ax.axvline(background_time_years, color=PALETTE[2], linestyle=":", label="background reach")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_ylim(0.5, max(10.0, (x.size if x.size else 1) * 2.0, float(expected.max()) * 1.2))
    _plain_log_ticks(ax)
    ax.yaxis.set_major_formatter("{x:g}")
    ax.set_xlabel("inverse false-alarm rate (years)")
    ax.set_ylabel("candidates with at least this IFAR")
    ax.set_title("Candidates against the time-slide background")
    ax.grid(True, which="major", alpha=0.3)
    ax.legend(fontsize="small")
    save_png(fig, path)


def plot_injections(distance, network_snr, found, efficiency_rows, sensitive_range, path) -> None:
    """Found and missed injections against distance, and the efficiency curve.

    Parameters
    ----------
    distance : array_like
        Luminosity distance of each injection counted (Mpc).
    network_snr : array_like
        Its network optimal SNR.
    found : array_like of bool
        Whether it was found.
    efficiency_rows : list of dict
        Rows of :func:`chirpsift.inject.efficiency` (``low``, ``high``, ``efficiency``,
        ``lower``, ``upper``).
    sensitive_range : float or None
        Sensitive range (Mpc), marked on both panels when finite.
    path : path
        PNG to write.
    """
    fig = _figure(7.0, 3.6, bottom=0.6, hspace=0.15)
    fig.subplots_adjust(wspace=0.35)
    left, right = fig.subplots(1, 2)
    d = np.asarray(distance, dtype=np.float64)
    rho = np.asarray(network_snr, dtype=np.float64)
    f = np.asarray(found, dtype=bool)
    left.scatter(d[~f], rho[~f], s=18, marker="x", color=PALETTE[2], linewidths=1.2, label="missed")
    left.scatter(d[f], rho[f], s=14, marker="o", color=PALETTE[0], linewidths=0, label="found")
    if np.any(rho > 0):
        left.set_yscale("log")
        _plain_log_ticks(left)
        left.yaxis.set_major_formatter("{x:g}")
    left.set_xlabel("distance (Mpc)")
    left.set_ylabel("network optimal SNR")
    left.set_title("Injections found and missed")
    left.legend(fontsize="small")
    left.grid(True, alpha=0.3)
    if efficiency_rows:
        mid = np.array([(r["low"] + r["high"]) / 2 for r in efficiency_rows])
        eff = np.array([np.nan if r["efficiency"] is None else r["efficiency"] for r in efficiency_rows], float)
        lo = np.array([np.nan if r["lower"] is None else r["lower"] for r in efficiency_rows], float)
        hi = np.array([np.nan if r["upper"] is None else r["upper"] for r in efficiency_rows], float)
        ok = np.isfinite(eff)
        yerr = [np.maximum(eff[ok] - lo[ok], 0.0), np.maximum(hi[ok] - eff[ok], 0.0)]
        right.errorbar(mid[ok], eff[ok], yerr=yerr, color=PALETTE[1], marker="s", linestyle="-", capsize=3,
                       label="efficiency (Wilson 1 sigma)")
    if sensitive_range is not None and np.isfinite(sensitive_range):
        for ax in (left, right):
            ax.axvline(sensitive_range, color=PALETTE[2], linestyle="--", label="sensitive range")
    right.set_ylim(-0.05, 1.05)
    right.set_xlabel("distance (Mpc)")
    right.set_ylabel("fraction found")
    right.set_title("Efficiency")
    right.grid(True, alpha=0.3)
    right.legend(fontsize="small")
    save_png(fig, path)
