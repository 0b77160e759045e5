"""Measured sensitivity: efficiency against distance, sensitive volume, volume-time and range.

The volume is a Monte-Carlo integral over the injections.

Every figure here describes one population in one noise model. The sensitive volume
of a search depends on the masses, spins and orientations injected, on the noise the
signals were added to (synthetic Gaussian noise is kinder than real data) and on the
detection threshold; quote them together.
"""

from __future__ import annotations

import math
import statistics
from dataclasses import asdict, dataclass

import numpy as np

from ..io import atomic_path
from .._validate import integer, nonnegative_scalar, positive_scalar, real_array
from .population import injection_table
from .project import SNR_DF, optimal_sigma

__all__ = [
    "EFFICIENCY_DTYPE",
    "Sensitivity",
    "chirp_distance",
    "efficiency",
    "horizon_distance",
    "sensitive_volume",
    "sensitivity",
    "plot_efficiency",
    "FINN_CHERNOFF_RATIO",
    "SECONDS_PER_YEAR",
    "REFERENCE_CHIRP_MASS",
]

#: Horizon distance over sensitive range for an isotropic population seen by one L-shaped
#: site: ``(64 / <Theta^3>)^(1/3)`` with ``<Theta^3> = 5.5095`` (Finn & Chernoff 1993;
#: REFERENCES item 10 gives 2.2648 from 1e8 Monte-Carlo samples, quoted as 2.26).
FINN_CHERNOFF_RATIO = 2.2648

#: A Julian year in seconds (volume-time is quoted in Mpc^3 yr).
SECONDS_PER_YEAR = 365.25 * 86400.0

#: Chirp mass (Msun) of a 1.4 + 1.4 Msun binary, the reference of :func:`chirp_distance`.
REFERENCE_CHIRP_MASS = (1.4 * 1.4) ** 0.6 / 2.8**0.2

#: Fields of the table returned by :func:`efficiency`.
EFFICIENCY_DTYPE = np.dtype(
    [
        ("low", "f8"),  # bin edges (Mpc, or scaled Mpc)
        ("high", "f8"),
        ("injected", "i8"),  # injections in the bin
        ("found", "i8"),  # of which found
        ("efficiency", "f8"),  # found / injected (NaN for an empty bin)
        ("error", "f8"),  # binomial standard error sqrt(e (1 - e) / injected)
        ("lower", "f8"),  # Wilson score interval at the requested confidence
        ("upper", "f8"),
    ]
)


def _found(found, size: int) -> np.ndarray:
    f = np.asarray(found)
    if f.dtype != np.bool_:
        raise TypeError(f"found must be a boolean array, got dtype {f.dtype}")
    if f.shape != (size,):
        raise ValueError(f"found must have one entry per injection ({size}), got shape {f.shape}")
    return f


def chirp_distance(distance, m1, m2, reference_chirp_mass=REFERENCE_CHIRP_MASS):
    """Distance scaled to a reference chirp mass: ``D (Mc_ref / Mc)^(5/6)`` (Mpc).

    At leading order the SNR of an inspiral scales as ``Mc^(5/6) / D`` (Cutler &
    Flanagan 1994; REFERENCES item 2), so sources of different chirp masses at the same
    chirp distance are about equally loud (exactly so only while the band is set by the
    noise, not by the merger frequency). The default reference is a 1.4 + 1.4 Msun binary.
    """
    d = real_array("distance", distance, ndim=range(0, 2))
    a = real_array("m1", m1, ndim=range(0, 2))
    b = real_array("m2", m2, ndim=range(0, 2))
    ref = positive_scalar("reference_chirp_mass", reference_chirp_mass)
    mc = (a * b) ** 0.6 / (a + b) ** 0.2
    return d * (ref / mc) ** (5.0 / 6.0)


def _wilson(k, n, z):
    with np.errstate(invalid="ignore", divide="ignore"):
        p = k / n
        denom = 1.0 + z**2 / n
        centre = (p + z**2 / (2 * n)) / denom
        half = z * np.sqrt(p * (1 - p) / n + z**2 / (4 * n**2)) / denom
    return centre - half, centre + half


def efficiency(distance, found, *, bins=10, confidence=0.6827) -> np.ndarray:
    """Fraction of injections found in bins of distance, with binomial uncertainties.

    Parameters
    ----------
    distance : array_like, shape (n,)
        Distance (Mpc) of each injection, or any other abscissa (e.g.
        :func:`chirp_distance`).
    found : array_like of bool, shape (n,)
        Whether each injection was found at the chosen threshold (e.g.
        ``table["ifar"] >= 1.0`` for a found/missed table).
    bins : int or array_like, optional
        Number of equal-width bins spanning the distances, or increasing bin edges.
    confidence : float, optional
        Coverage of the Wilson score interval (default one Gaussian sigma).

    Returns
    -------
    ndarray of :data:`EFFICIENCY_DTYPE`
        Per bin: edges, counts, efficiency ``k / n``, its binomial standard error
        ``sqrt(e (1 - e) / n)`` and the Wilson interval (which stays inside [0, 1] and
        is not empty when ``k = 0`` or ``k = n``). Injections outside the edges are left out.

    References
    ----------
    .. [1] E. B. Wilson, J. Am. Stat. Assoc. 22, 209 (1927) (score interval).
    """
    d = real_array("distance", distance, ndim=1)
    f = _found(found, d.size)
    conf = positive_scalar("confidence", confidence)
    if conf >= 1:
        raise ValueError(f"confidence must be below 1, got {conf}")
    if np.ndim(bins) == 0:
        nb = integer("bins", bins)
        lo, hi = float(d.min()), float(d.max())
        edges = np.linspace(lo, hi if hi > lo else lo + 1.0, nb + 1)
    else:
        edges = real_array("bins", bins, ndim=1)
        if edges.size < 2 or not np.all(np.diff(edges) > 0):
            raise ValueError(f"bins must be at least two strictly increasing edges, got {edges.tolist()}")
    n_in = np.histogram(d, edges)[0]
    k_in = np.histogram(d[f], edges)[0]
    out = np.zeros(edges.size - 1, dtype=EFFICIENCY_DTYPE)
    out["low"], out["high"] = edges[:-1], edges[1:]
    out["injected"], out["found"] = n_in, k_in
    z = statistics.NormalDist().inv_cdf(0.5 + conf / 2)
    with np.errstate(invalid="ignore", divide="ignore"):
        e = k_in / n_in
        out["efficiency"] = e
        out["error"] = np.sqrt(e * (1 - e) / n_in)
    out["lower"], out["upper"] = _wilson(k_in.astype(float), n_in.astype(float), z)
    return out


def sensitive_volume(injections, found, *, assume_found_within=0.0):
    """Sensitive volume by Monte-Carlo integration over the injections, and its error.

    Parameters
    ----------
    injections : ndarray of :data:`chirpsift.inject.INJECTION_DTYPE`
        The injections made (all of them, found or not), drawn as one set by
        :func:`chirpsift.draw_injections` (their ``distance_density`` is the density of
        that draw).
    found : array_like of bool
        Whether each was found.
    assume_found_within : float, optional
        Radius (Mpc) inside which every source is taken as found, added as
        ``4 pi r^3 / 3``: for sets drawn from a distance range starting above zero, where
        the efficiency at the lower end is 1. Default 0 (nothing added).

    Returns
    -------
    volume, error : float
        ``V = int eps(x) dV`` in Mpc^3 over the drawn range, and its Monte-Carlo
        standard error.

    Notes
    -----
    With injections drawn from a distance density ``p(d)`` (isotropic in direction),
    ``V = E[eps 4 pi d^2 / p(d)] ~= (1/N) sum_found w_i`` with ``w_i = 4 pi d_i^2 / p(d_i)``
    over all ``N`` injections, and the variance of that mean is
    ``sum_found w_i^2 / N^2 - (sum_found w_i)^2 / N^3``. For injections uniform in volume
    out to ``D`` every weight is ``4 pi D^3 / 3`` and this is ``V_inj N_found / N``
    with relative error ``sqrt((1 - eps) / (eps N))``. The estimate covers the drawn range
    only: sources beyond it count as missed.

    References
    ----------
    .. [1] V. Tiwari, Class. Quantum Grav. 35, 145009 (2018), arXiv:1712.00482
       (Monte-Carlo sensitive volume with re-weighted injections).
    """
    inj = injection_table(injections)
    f = _found(found, inj.size)
    r0 = nonnegative_scalar("assume_found_within", assume_found_within)
    w = 4.0 * np.pi * inj["distance"] ** 2 / inj["distance_density"]
    n = float(inj.size)
    s1 = float(np.sum(w[f]))
    s2 = float(np.sum(w[f] ** 2))
    volume = s1 / n + 4.0 * np.pi * r0**3 / 3.0
    var = max(s2 / n**2 - s1**2 / n**3, 0.0)
    return volume, math.sqrt(var)


@dataclass(frozen=True)
class Sensitivity:
    """Sensitive volume, volume-time and range of a search for one population.

    Attributes
    ----------
    injections, found : int
        Injections counted and found.
    volume, volume_error : float
        Sensitive volume (Mpc^3) and its Monte-Carlo standard error.
    range, range_error : float
        Sensitive range ``(3 V / (4 pi))^(1/3)`` (Mpc) and its error ``range * dV / (3 V)``
        (infinite when nothing was found; the volume and its Monte-Carlo error are then
        both 0, which says only that none of these injections was found).
    analysed_time : float or None
        Seconds of data searched (None if not given).
    volume_time, volume_time_error : float or None
        ``V T`` in Mpc^3 yr (Julian years) and its error, when ``analysed_time`` is given.
    """

    injections: int
    found: int
    volume: float
    volume_error: float
    range: float
    range_error: float
    analysed_time: float | None = None
    volume_time: float | None = None
    volume_time_error: float | None = None

    def as_dict(self) -> dict:
        """Plain ``{name: value}`` for summaries."""
        return asdict(self)


def sensitivity(injections, found, *, analysed_time=None, assume_found_within=0.0) -> Sensitivity:
    """Sensitive volume, volume-time and range from injections found and missed.

    Parameters
    ----------
    injections : ndarray of :data:`chirpsift.inject.INJECTION_DTYPE`
        All injections made, drawn as one set (see :func:`sensitive_volume`).
    found : array_like of bool
        Whether each was found at the chosen threshold.
    analysed_time : float, optional
        Seconds of data searched, for the volume-time ``V T``.
    assume_found_within : float, optional
        See :func:`sensitive_volume`.

    Returns
    -------
    Sensitivity

    Notes
    -----
    ``V T`` multiplies the volume by the analysed time, which assumes the sensitivity
    measured by these injections holds over all of it (stationary noise). The range is
    the radius of a sphere of volume ``V``; for one site, an isotropic population and a
    fixed SNR threshold it is the horizon distance divided by :data:`FINN_CHERNOFF_RATIO`.

    References
    ----------
    .. [1] V. Tiwari, Class. Quantum Grav. 35, 145009 (2018), arXiv:1712.00482.
    .. [2] L. S. Finn and D. F. Chernoff, Phys. Rev. D 47, 2198 (1993), gr-qc/9301003.

    Examples
    --------
    >>> import numpy as np, chirpsift
    >>> inj = chirpsift.draw_injections(400, m1=1.4, m2=1.4, distance=(0, 100), start=0, end=2e4, f_low=40.0)
    >>> s = chirpsift.sensitivity(inj, inj["distance"] < 50)  # everything inside 50 Mpc found
    >>> bool(abs(s.range - 50) < 3 * s.range_error + 1)
    True
    """
    inj = injection_table(injections)
    f = _found(found, inj.size)
    v, dv = sensitive_volume(inj, f, assume_found_within=assume_found_within)
    r = (3.0 * v / (4.0 * np.pi)) ** (1.0 / 3.0)
    dr = r * dv / (3.0 * v) if v > 0 else math.inf
    t = vt = dvt = None
    if analysed_time is not None:
        t = positive_scalar("analysed_time", analysed_time)
        vt, dvt = v * t / SECONDS_PER_YEAR, dv * t / SECONDS_PER_YEAR
    return Sensitivity(int(inj.size), int(f.sum()), v, dv, r, dr, t, vt, dvt)


def horizon_distance(m1, m2, psd, *, f_low, f_high=None, snr=8.0, chi1=0.0, chi2=0.0, df=SNR_DF):
    """Distance (Mpc) at which an optimally oriented source has SNR ``snr``.

    ``D_h = sigma_1Mpc / snr`` with ``sigma`` the norm of the TaylorF2 signal (Newtonian
    amplitude, overhead and face on) over ``f_low <= f < min(f_ISCO, f_high)``; PSD as in
    :func:`chirpsift.injection_snr`.

    References
    ----------
    .. [1] B. Allen et al., Phys. Rev. D 85, 122006 (2012), arXiv:gr-qc/0509116.
    .. [2] B. S. Sathyaprakash and B. F. Schutz, Living Rev. Relativ. 12, 2 (2009),
       arXiv:0903.0338 (design curves).

    Examples
    --------
    >>> import chirpsift
    >>> round(float(chirpsift.horizon_distance(1.4, 1.4, "gen2-early", f_low=20.0)[0]))
    497
    """
    rho = positive_scalar("snr", snr)
    return optimal_sigma(m1, m2, chi1, chi2, psd, f_low=f_low, f_high=f_high, df=df) / rho


def plot_efficiency(table, path, *, title=None, xlabel="distance (Mpc)", sensitive_range=None, dpi=110) -> None:
    """Draw efficiency against distance (from :func:`efficiency`) as a PNG, atomically.

    Parameters
    ----------
    table : ndarray of :data:`EFFICIENCY_DTYPE`
        Efficiency per bin.
    path : str or os.PathLike
        Destination ``.png``; its folder must exist. Written to a temporary file beside
        it and renamed into place.
    title : str, optional
        Plot title.
    xlabel : str, optional
        Label of the distance axis.
    sensitive_range : (float, float), optional
        ``(range, error)`` in Mpc, drawn as a vertical line with a band.
    dpi : int, optional
        Resolution.
    """
    if not isinstance(table, np.ndarray) or table.dtype != EFFICIENCY_DTYPE:
        raise TypeError("table must be the output of chirpsift.inject.efficiency (EFFICIENCY_DTYPE)")
    from matplotlib.figure import Figure  # no pyplot: no global state, no display needed

    fig = Figure(figsize=(6.4, 4.2))
    ax = fig.add_subplot()
    ok = table["injected"] > 0
    mid = 0.5 * (table["low"] + table["high"])
    e = table["efficiency"]
    yerr = [np.maximum(e[ok] - table["lower"][ok], 0.0), np.maximum(table["upper"][ok] - e[ok], 0.0)]
    ax.errorbar(mid[ok], e[ok], yerr=yerr,
                xerr=0.5 * (table["high"] - table["low"])[ok], fmt="o", ms=4, capsize=2, color="C0",
                label="found / injected (Wilson 68% interval)")
    if sensitive_range is not None:
        r, dr = (float(v) for v in sensitive_range)
        ax.axvline(r, color="C3", lw=1.2, label=f"sensitive range {r:.4g} \u00b1 {dr:.2g} Mpc")
        ax.axvspan(r - dr, r + dr, color="C3", alpha=0.15, lw=0)
    ax.set_ylim(-0.03, 1.03)
    ax.set_xlim(float(table["low"][0]), float(table["high"][-1]))
    ax.set_xlabel(xlabel)
    ax.set_ylabel("efficiency")
    ax.grid(alpha=0.3)
    ax.legend(loc="upper right", fontsize=8)
    if title:
        ax.set_title(title, fontsize=10)
    fig.text(0.01, 0.01, "Sensitivity depends on the injected population and the noise model.", fontsize=7,
             color="0.4")
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png", dpi=dpi)
