"""Fitting factors of points against a bank, and a bank's coverage of a region."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._validate import choice, integer, positive_scalar, real_array, switch
from ..filter import checked_band
from ..overlap import best_matches, required_period
from ..spectrum import psd_on_grid
from ..waveform import chirp_duration, isco_frequency
from .metric import flat_coordinates
from .region import Region, heavier_first
from .templates import Bank

__all__ = ["fitting_factor", "bank_coverage", "Coverage", "coverage_summary", "SweepSetup"]

#: A point is compared with the templates the flat metric puts near it: its
#: NEAREST_CANDIDATES nearest, and every template whose predicted mismatch is within
#: CANDIDATE_FACTOR times the nearest one's plus CANDIDATE_SLACK (never beyond
#: CANDIDATE_MISMATCH). The metric predicts mismatches to a few per cent below 0.03
#: (0.01316 predicted for 0.01305 exact, 0.0353 for 0.0345) and over-predicts beyond
#: (0.082 for 0.072; tests/test_bank_metric.py), so a template predicted 1.5 times
#: worse than the nearest, plus 0.01, does not beat it; tests/test_bank_placement.py
#: compares with a sweep over the whole bank.
NEAREST_CANDIDATES = 2
CANDIDATE_FACTOR = 1.5
CANDIDATE_SLACK = 0.01
CANDIDATE_MISMATCH = 0.2
#: Points per call of the kernel: bounds memory and paces the progress bar.
CHUNK = 256


def _points(points) -> np.ndarray:
    if isinstance(points, Bank):
        return np.stack([points.m1, points.m2, points.chi1, points.chi2])
    a = real_array("points", points, ndim=2)
    if a.shape[1] not in (2, 4):
        raise ValueError(f"points must have shape (n, 2) (m1, m2) or (n, 4) (m1, m2, chi1, chi2), got {a.shape}")
    if a.shape[1] == 2:
        a = np.hstack([a, np.zeros((a.shape[0], 2))])
    if (a[:, :2] <= 0).any():
        raise ValueError("points: masses must be positive (solar masses)")
    if (np.abs(a[:, 2:]) >= 1).any():
        raise ValueError("points: spins must satisfy |chi| < 1")
    return heavier_first(a.T)


@dataclass
class SweepSetup:
    """What every fitting-factor call over one bank shares.

    The grid, the PSD on it and the flat coordinates, built once by :meth:`build` and
    reused by placement's many calls.
    """

    f_low: float
    sample_rate: float
    df_fine: float
    psd: np.ndarray
    coordinates: object

    @classmethod
    def build(cls, psd, f_low: float, sample_rate: float, longest: float, lightest_total: float) -> "SweepSetup":
        """Grid fine enough for templates lasting ``longest`` s, up to Nyquist."""
        f_cap = 0.5 * sample_rate
        if f_low >= f_cap:
            raise ValueError(f"f_low={f_low} Hz must be below the Nyquist frequency {f_cap} Hz")
        period = 2.0 ** math.ceil(math.log2(required_period(longest)))
        df = 1.0 / period
        grid = psd_on_grid(psd, df, int(math.floor(f_cap / df)) + 1)
        checked_band(grid, df, f_low, None)  # the one band rule; refuses a PSD infinite over all of it
        f_high = min(f_cap, float(isco_frequency(lightest_total / 2, lightest_total / 2)))
        return cls(f_low, sample_rate, df, grid, flat_coordinates(psd, f_low, max(f_high, 1.01 * f_low)))

    def xi(self, p: np.ndarray) -> np.ndarray:
        """Flat coordinates of parameters ``p`` (4, n)."""
        return self.coordinates(p[0], p[1], p[2], p[3])

    def candidates(self, p: np.ndarray, bank_p: np.ndarray, tree=None):
        """Compressed candidate lists (``indptr``, ``indices``) of points ``p`` in a bank."""
        from scipy.spatial import cKDTree

        n_bank = bank_p.shape[1]
        tree = tree if tree is not None else cKDTree(self.xi(bank_p))
        x = self.xi(p)
        k = min(NEAREST_CANDIDATES, n_bank)
        d, near = tree.query(x, k=k)
        d, near = d.reshape(len(x), k), near.reshape(len(x), k)
        reach = np.sqrt(np.minimum(CANDIDATE_FACTOR * d[:, 0] ** 2 + CANDIDATE_SLACK, CANDIDATE_MISMATCH))
        ball = tree.query_ball_point(x, r=reach)
        lists = [np.union1d(near[i], np.asarray(ball[i], dtype=np.int64)) for i in range(len(x))]
        indptr = np.zeros(len(x) + 1, dtype=np.int64)
        indptr[1:] = np.cumsum([len(c) for c in lists])
        indices = np.concatenate(lists).astype(np.int64) if lists else np.zeros(0, dtype=np.int64)
        return indptr, indices

    def sweep(self, p: np.ndarray, bank_p: np.ndarray, *, tree=None, every: bool = False, progress=None):
        """Best match and template index of each point ``p`` over ``bank_p`` (both (4, n))."""
        if bank_p.shape[1] == 0:
            return np.zeros(p.shape[1]), np.full(p.shape[1], -1, dtype=np.int64)
        if tree is None and not every:
            from scipy.spatial import cKDTree

            tree = cKDTree(self.xi(bank_p))
        out_m, out_i = [], []
        for a in range(0, p.shape[1], CHUNK):
            chunk = p[:, a:a + CHUNK]
            if every:
                n = chunk.shape[1]
                indptr = np.arange(n + 1, dtype=np.int64) * bank_p.shape[1]
                indices = np.tile(np.arange(bank_p.shape[1], dtype=np.int64), n)
            else:
                indptr, indices = self.candidates(chunk, bank_p, tree)
            m, i = best_matches(chunk, bank_p, indptr, indices, self.psd, self.df_fine, self.f_low,
                                0.5 * self.sample_rate)
            out_m.append(m)
            out_i.append(i)
            if progress is not None:
                progress.update(chunk.shape[1])
        return np.concatenate(out_m), np.concatenate(out_i)


def template_durations(m1, m2, f_low: float) -> np.ndarray:
    """Seconds from ``f_low`` to coalescence: the 3.5PN chirp time, or the Newtonian one where that is not positive.

    Close below the ISCO frequency the post-Newtonian series for the duration turns
    negative; the Newtonian chirp time is positive and bounds such short templates.
    """
    d = np.asarray(chirp_duration(m1, m2, f_low), dtype=np.float64).reshape(-1)
    if (d <= 0).any():
        newtonian = np.asarray(chirp_duration(m1, m2, f_low, phase_order=0), dtype=np.float64).reshape(-1)
        d = np.where(d > 0, d, newtonian)
    return d


def setup_for(psd, f_low: float, sample_rate: float, *params) -> SweepSetup:
    """Build a :class:`SweepSetup` for comparisons among parameter sets ``params`` ((4, n) each)."""
    allp = np.hstack([q for q in params if q.shape[1]])
    longest = float(template_durations(allp[0], allp[1], f_low).max())
    return SweepSetup.build(psd, f_low, sample_rate, longest, float((allp[0] + allp[1]).min()))


def fitting_factor(points, bank, *, psd, f_low, sample_rate=4096.0, search="metric", return_index=False):
    """Best match of each point over a bank: the fraction of its optimal SNR the bank recovers.

    Parameters
    ----------
    points : array_like, shape (n, 2) or (n, 4), or Bank
        Sources ``(m1, m2[, chi1, chi2])``: solar masses and aligned dimensionless spins.
    bank : Bank
        The templates (TaylorF2, 3.5PN phase, as the search generates them).
    psd : str, callable or (freqs, values)
        Noise curve: a design-curve name (:data:`chirpsift.DESIGN_CURVES`), a callable of
        frequency (Hz), or samples.
    f_low : float
        Lower frequency cutoff (Hz) of sources and templates.
    sample_rate : float, optional
        The search's sample rate (Hz): every waveform ends at its ISCO frequency or at
        Nyquist, whichever is lower (default 4096).
    search : {"metric", "all"}, optional
        ``"metric"`` (default) compares each point only with the templates the flat
        metric puts near it (its :data:`NEAREST_CANDIDATES` nearest, and every template
        predicted within :data:`CANDIDATE_FACTOR` times the nearest one's mismatch plus
        :data:`CANDIDATE_SLACK`); ``"all"`` with every template (slow; for checks).
    return_index : bool, optional
        Also return the best template's row for each point.

    Returns
    -------
    ff : ndarray of float64, shape (n,)
        Fitting factors in ``[0, 1]`` (Apostolatos 1995).
    index : ndarray of int64, shape (n,)
        With ``return_index``: the best template's row.

    Notes
    -----
    Templates are generated on the fly on each point's grid; no (points x bank) array
    is ever made, and memory stays bounded by :data:`CHUNK` points' candidate lists.
    The result does not depend on the thread count.

    Each point is compared on the coarsest grid whose period (the smallest power of two
    of seconds above 1.1 times its longest comparison plus 2 s) holds the templates.
    The sharp band edges ring, and that ringing aliases: measured against a 1/512 Hz
    grid, a 1/8 Hz grid gives matches lower by about 2e-4 at 0.976 and 8e-4 at 0.92,
    shrinking in proportion to the spacing. Coverage is therefore, if anything,
    understated.

    References
    ----------
    .. [1] Apostolatos, T. A. 1995, PRD 52, 605 (fitting factor).
    .. [2] Owen, B. J. 1996, PRD 53, 6749, arXiv:gr-qc/9511032.

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift import Bank, fitting_factor
    >>> bank = Bank([10.0, 12.0], [10.0, 9.0])
    >>> ff = fitting_factor(np.array([[10.0, 10.0]]), bank, psd="gen2-zero-detuned", f_low=30.0)
    >>> round(float(ff[0]), 6)
    1.0
    """
    p = _points(points)
    if not isinstance(bank, Bank):
        raise TypeError(f"bank must be a chirpsift.Bank, got {type(bank).__name__}")
    if len(bank) == 0:
        raise ValueError("bank holds no templates")
    choice("search", search, ("metric", "all"))
    switch("return_index", return_index)
    fl = positive_scalar("f_low", f_low)
    fs = positive_scalar("sample_rate", sample_rate)
    b = _points(bank)
    setup = setup_for(psd, fl, fs, p, b)
    m, i = setup.sweep(p, b, every=search == "all")
    return (m, i) if return_index else m


@dataclass(frozen=True)
class Coverage:
    """A bank's coverage of a region: points drawn in it and their fitting factors.

    Attributes
    ----------
    points : ndarray, shape (n, 4)
        ``m1, m2, chi1, chi2`` of the points (``m1 >= m2``).
    fitting_factors : ndarray, shape (n,)
    minimal_match : float
        The threshold the summary counts against.
    summary : dict
        :func:`coverage_summary`.
    """

    points: np.ndarray
    fitting_factors: np.ndarray
    minimal_match: float
    summary: dict


def coverage_summary(ff: np.ndarray, minimal_match: float) -> dict:
    """Minimum, 0.1/1/5 percentiles, median and the fraction at or above the minimal match.

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift.bank import coverage_summary
    >>> coverage_summary(np.array([0.95, 0.98, 0.99, 1.0]), 0.97)["fraction_covered"]
    0.75
    """
    ff = np.asarray(ff, dtype=np.float64)
    return {
        "points": int(ff.size),
        "minimal_match": float(minimal_match),
        "minimum": float(ff.min()),
        "percentile_0.1": float(np.percentile(ff, 0.1)),
        "percentile_1": float(np.percentile(ff, 1)),
        "percentile_5": float(np.percentile(ff, 5)),
        "median": float(np.median(ff)),
        "fraction_covered": float(np.mean(ff >= minimal_match)),
    }


def bank_coverage(bank, n_points=10000, *, m1=None, m2=None, chi1=(0.0, 0.0), chi2=(0.0, 0.0), mtotal=None,
                  mass_ratio=None, psd=None, f_low=None, sample_rate=None, minimal_match=None, seed=0,
                  progress=False):
    """Draw points uniformly in a region and measure the bank's fitting factor at each.

    Parameters
    ----------
    bank : Bank
        The bank to check. Arguments left ``None`` are taken from its metadata when it
        was placed by :func:`chirpsift.place_bank` (region, ``psd``, ``f_low``,
        ``sample_rate``, ``minimal_match``).
    n_points : int, optional
        Points to draw (default 10,000).
    m1, m2, chi1, chi2, mtotal, mass_ratio : optional
        The region, as :class:`chirpsift.bank.Region`.
    psd : str, callable or (freqs, values)
        Noise curve.
    f_low : float
        Lower frequency cutoff (Hz).
    sample_rate : float, optional
        Hz (default 4096).
    minimal_match : float, optional
        Threshold of the summary (default 0.97).
    seed : int, optional
        Random seed of the points.
    progress : bool, optional
        Show a progress bar (tqdm) on stderr.

    Returns
    -------
    Coverage

    Notes
    -----
    The measure is uniform in the component masses (and spins) over the region's
    ranges, after its cuts: the fraction covered is the fraction of that measure. A
    population uniform in chirp mass or in volume would weigh the region differently.

    Examples
    --------
    >>> from chirpsift import Bank, bank_coverage
    >>> bank = Bank([10.0, 11.0, 12.0], [10.0, 10.0, 10.0])
    >>> cov = bank_coverage(bank, 20, m1=(10, 12), m2=(10, 10), psd="gen2-zero-detuned", f_low=30.0)
    >>> sorted(cov.summary)[:3]
    ['fraction_covered', 'median', 'minimal_match']
    """
    if not isinstance(bank, Bank):
        raise TypeError(f"bank must be a chirpsift.Bank, got {type(bank).__name__}")
    meta = bank.metadata
    saved = meta.get("region", {})
    if m1 is None and m2 is None and saved:
        region = Region(**{k: tuple(v) for k, v in saved.items()})
    elif m1 is None or m2 is None:
        raise ValueError("give the region (m1 and m2 ranges) or a bank placed by chirpsift.place_bank")
    else:
        region = Region(m1=m1, m2=m2, chi1=chi1, chi2=chi2, mtotal=mtotal, mass_ratio=mass_ratio)
    psd = psd if psd is not None else meta.get("psd")
    if psd is None:
        raise ValueError("psd must be given (the bank's metadata names none)")
    f_low = f_low if f_low is not None else meta.get("f_low")
    if f_low is None:
        raise ValueError("f_low must be given (the bank's metadata names none)")
    sample_rate = sample_rate if sample_rate is not None else meta.get("sample_rate", 4096.0)
    mm = minimal_match if minimal_match is not None else meta.get("minimal_match", 0.97)
    mm = positive_scalar("minimal_match", mm)
    if not mm < 1:
        raise ValueError(f"minimal_match must lie in (0, 1), got {mm!r}")
    n = integer("n_points", n_points, minimum=1)
    switch("progress", progress)
    pts = np.stack(region.sample(n, seed=integer("seed", seed, minimum=0)))
    bar = None
    if progress:
        from tqdm.auto import tqdm

        bar = tqdm(total=n, desc="coverage", unit="point")
    try:
        b = _points(bank)
        setup = setup_for(psd, positive_scalar("f_low", f_low), positive_scalar("sample_rate", sample_rate), pts, b)
        ff, _ = setup.sweep(pts, b, progress=bar)
    finally:
        if bar is not None:
            bar.close()
    return Coverage(pts.T.copy(), ff, mm, coverage_summary(ff, mm))
