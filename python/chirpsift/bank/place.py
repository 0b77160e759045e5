"""Placing a template bank that covers a region at a minimal match.

Two published methods, in the flat coordinates of :mod:`chirpsift.bank.metric`
(where the mismatch of nearby templates is the squared distance):

- ``"lattice"`` (non-spinning regions, a 2-D template surface): a hexagonal
  (A2*) lattice, the thinnest covering of the plane, in the plane that best fits the
  surface (Owen 1996; Owen & Sathyaprakash 1999; Cokelaer 2007). Its covering radius
  is ``sqrt(1 - MM)``, so every point of the plane lies within the minimal mismatch of
  a lattice point. Lattice points within that radius of the region are kept (so the
  edges are covered) and mapped back to masses; points beyond the equal-mass edge move
  onto it.
- ``"stochastic"`` (aligned spins, or any region): random proposals drawn uniformly in
  the region are kept when no template lies within the minimal mismatch of them
  (Babak 2008; Harry, Allen & Sathyaprakash 2009), until fewer than
  :data:`STOCHASTIC_STOP` of a batch are kept.

Both end with the same check-and-fill step: points drawn in the region (and on its
edges) whose exact fitting factor (:func:`chirpsift.fitting_factor`) falls below the
minimal match become templates, until a fresh draw finds fewer than
:data:`FILL_TARGET` of them below it. The metric is an approximation; this step
makes the exact match the judge.
"""

from __future__ import annotations

import math
import time

import numpy as np

from .._validate import integer, positive_scalar, real_scalar
from .coverage import SweepSetup, _durations
from .region import Region
from .templates import Bank

__all__ = ["place_bank", "estimate_bank_size", "METHODS", "lattice_covering_density", "BankEstimate"]

METHODS = ("auto", "lattice", "stochastic")
#: Stop the stochastic proposals once a batch keeps fewer than this fraction.
STOCHASTIC_STOP = 0.005
#: Fill step: draw points until a draw finds fewer than this fraction below the
#: minimal match; the coverage target asks for under 1% (1e-3 leaves margin).
FILL_TARGET = 1e-3
#: Points per fill draw (at least), and how many of them lie on the region's edges.
FILL_POINTS = 2000
EDGE_FRACTION = 0.25
#: Fill rounds at most (each adds the failed points of one draw).
FILL_ROUNDS = 8
#: Template count above which place_bank refuses unless max_templates allows it.
DEFAULT_MAX_TEMPLATES = 200_000


def lattice_covering_density(dim: int) -> float:
    """Thickness of the A_n* lattice covering: mean number of covering spheres over a point.

    ``theta = V_n sqrt(n + 1) (n (n + 2) / (12 (n + 1)))^(n/2)`` with ``V_n`` the unit
    ball's volume; 1.2092 in 2-D (hexagonal), 1.4635 in 3-D (body-centred cubic).
    A covering of a volume ``V`` by spheres of radius ``r`` needs ``theta V / (V_n r^n)``
    of them (Conway & Sloane 1988, Sphere Packings, Lattices and Groups, ch. 2,
    Table 2.1; from memory).

    Examples
    --------
    >>> from chirpsift.bank.place import lattice_covering_density
    >>> round(lattice_covering_density(2), 4), round(lattice_covering_density(3), 4)
    (1.2092, 1.4635)
    """
    n = int(dim)
    vn = math.pi ** (n / 2) / math.gamma(n / 2 + 1)
    return vn * math.sqrt(n + 1) * (n * (n + 2) / (12 * (n + 1))) ** (n / 2)


def _canonical_grid(region: Region, n: int):
    """Lay a grid over the heavier and lighter masses of the region's binaries."""
    lo = min(region.m1[0], region.m2[0])
    hi = max(region.m1[1], region.m2[1])
    big, small = np.meshgrid(np.linspace(lo, hi, n), np.linspace(lo, hi, n), indexing="ij")
    return big, small


class _Surface:
    """The region's template surface in flat coordinates, for the lattice and estimates."""

    def __init__(self, region: Region, setup: SweepSetup, n_grid: int = 241):
        self.region, self.setup = region, setup
        big, small = _canonical_grid(region, n_grid)
        self.big, self.small = big, small
        self.inside = (big >= small) & region.contains(big, small)
        xi = setup.coordinates(big.ravel(), small.ravel()).reshape(n_grid, n_grid, -1)
        self.xi_grid = xi
        pts = xi[self.inside]
        self.centre = pts.mean(axis=0)
        _, sv, vt = np.linalg.svd(pts - self.centre, full_matrices=False)
        self.axes = vt[:2].T  # (r, 2): the best-fitting plane
        self.singular_values = sv

    def plane(self, xi: np.ndarray) -> np.ndarray:
        return (xi - self.centre) @ self.axes

    def area(self) -> float:
        """Area of the surface (metric units): sum of sqrt(det J^T J) dM dm over the region."""
        xi = self.xi_grid
        d_big = self.big[1, 0] - self.big[0, 0]
        d_small = self.small[0, 1] - self.small[0, 0]
        j1 = np.gradient(xi, d_big, axis=0)
        j2 = np.gradient(xi, d_small, axis=1)
        a = np.einsum("ijk,ijk->ij", j1, j1)
        b = np.einsum("ijk,ijk->ij", j1, j2)
        c = np.einsum("ijk,ijk->ij", j2, j2)
        density = np.sqrt(np.maximum(a * c - b * b, 0.0))
        return float(density[self.inside].sum() * d_big * d_small)


def _mc_eta(m1, m2):
    m = m1 + m2
    eta = m1 * m2 / (m * m)
    return m * eta ** 0.6, eta


def _masses(mc, eta):
    eta = np.minimum(eta, 0.25)
    m = mc * eta ** -0.6
    root = np.sqrt(np.maximum(1.0 - 4.0 * eta, 0.0))
    return 0.5 * m * (1 + root), 0.5 * m * (1 - root)


def _lattice(surface: _Surface, radius: float):
    """Lay hexagonal lattice points and map them back to masses (non-spinning).

    The lattice has covering radius ``radius``; points within ``radius`` of the
    region's image in the plane are kept.
    """
    from scipy.spatial import cKDTree

    inside_xi = surface.xi_grid[surface.inside]
    uv = surface.plane(inside_xi)
    lo, hi = uv.min(axis=0) - radius, uv.max(axis=0) + radius
    a = math.sqrt(3.0) * radius  # nearest-neighbour spacing of a hexagonal lattice
    rows = np.arange(0, int(math.ceil((hi[1] - lo[1]) / (a * math.sqrt(3) / 2))) + 1)
    cols = np.arange(-1, int(math.ceil((hi[0] - lo[0]) / a)) + 2)
    j, i = np.meshgrid(rows, cols, indexing="ij")
    lat = np.stack([lo[0] + (i + 0.5 * (j % 2)) * a, lo[1] + j * a * math.sqrt(3) / 2], axis=-1).reshape(-1, 2)
    tree = cKDTree(uv)
    # the grid's spacing in the plane is far below the radius; the slack keeps edge cells
    step = float(np.median(cKDTree(uv).query(uv, k=2)[0][:, 1]))
    dist, near = tree.query(lat, k=1)
    keep = dist <= radius + step
    lat, near = lat[keep], near[keep]
    # invert (chirp mass, eta) -> plane by Newton steps from the nearest grid point
    big, small = surface.big[surface.inside][near], surface.small[surface.inside][near]
    mc, eta = _mc_eta(big, small)
    x = np.stack([np.log(mc), eta])
    eta_floor = 0.5 * float(_mc_eta(*_extreme_ratio(surface.region))[1][0])

    def plane_of(x):
        m1, m2 = _masses(np.exp(x[0]), x[1])
        return surface.plane(surface.setup.coordinates(m1, m2))

    for _ in range(12):
        f = plane_of(x) - lat
        h = np.array([1e-7, 1e-7])
        cols_ = []
        for k in range(2):
            dx = np.zeros_like(x)
            dx[k] = h[k]
            cols_.append((plane_of(x + dx) - plane_of(x - dx)) / (2 * h[k]))
        jac = np.stack(cols_, axis=-1)  # (n, 2, 2)
        det = jac[:, 0, 0] * jac[:, 1, 1] - jac[:, 0, 1] * jac[:, 1, 0]
        safe = np.abs(det) > 1e-300
        inv = np.zeros_like(jac)
        inv[:, 0, 0], inv[:, 1, 1] = jac[:, 1, 1], jac[:, 0, 0]
        inv[:, 0, 1], inv[:, 1, 0] = -jac[:, 0, 1], -jac[:, 1, 0]
        step_ = np.where(safe, np.einsum("nij,nj->in", inv, f) / np.where(safe, det, 1.0), 0.0)
        step_[1] = np.clip(step_[1], -0.02, 0.02)
        step_[0] = np.clip(step_[0], -0.05, 0.05)
        x = x - step_
        x[1] = np.clip(x[1], eta_floor, 0.25)  # beyond the equal-mass edge: onto it
    m1, m2 = _masses(np.exp(x[0]), x[1])
    return m1, m2


def _extreme_ratio(region: Region):
    """Return the most unequal binary of the region (heavier, lighter)."""
    hi = max(region.m1[1], region.m2[1])
    lo = min(region.m1[0], region.m2[0])
    return np.array([hi]), np.array([lo])


def _dedupe(p: np.ndarray, setup: SweepSetup, radius: float) -> np.ndarray:
    """Drop templates within ``radius`` of an earlier one (in order)."""
    from scipy.spatial import cKDTree

    xi = setup.xi(p)
    pairs = cKDTree(xi).query_pairs(radius, output_type="ndarray")
    drop = np.zeros(p.shape[1], dtype=bool)
    for i, j in sorted(map(tuple, pairs)):
        if not drop[i]:
            drop[j] = True
    return p[:, ~drop]


def _edge_points(region: Region, n: int, rng) -> np.ndarray:
    """Points on the edges of the region's mass box (and spin ranges), inside its cuts."""
    m1, m2, c1, c2 = (np.asarray(v) for v in region.sample(n, seed=rng))
    which = rng.integers(0, 4, n)
    m1 = np.where(which == 0, region.m1[0], np.where(which == 1, region.m1[1], m1))
    m2 = np.where(which == 2, region.m2[0], np.where(which == 3, region.m2[1], m2))
    ok = region.contains(m1, m2, c1, c2)
    p = np.stack([m1, m2, c1, c2])[:, ok]
    swap = p[1] > p[0]
    p[[0, 1]] = np.where(swap, p[[1, 0]], p[[0, 1]])
    p[[2, 3]] = np.where(swap, p[[3, 2]], p[[2, 3]])
    return p


def _stochastic(region: Region, setup: SweepSetup, radius: float, rng, max_templates: int, batch: int = 4000):
    from scipy.spatial import cKDTree

    bank = np.zeros((4, 0))
    xi_bank = np.zeros((0, setup.coordinates.transform.shape[0]))
    while True:
        p = np.stack(region.sample(batch, seed=rng))
        xi = setup.xi(p)
        if xi_bank.shape[0]:
            d, _ = cKDTree(xi_bank).query(xi, k=1)
            fresh = np.flatnonzero(d > radius)
        else:
            fresh = np.arange(batch)
        kept = []
        for i in fresh:  # greedy within the batch, in draw order
            if not kept or np.min(np.sum((xi[kept] - xi[i]) ** 2, axis=1)) > radius * radius:
                kept.append(i)
        bank = np.hstack([bank, p[:, kept]])
        xi_bank = np.vstack([xi_bank, xi[kept]])
        if bank.shape[1] > max_templates:
            raise ValueError(f"the bank passed max_templates={max_templates} while still growing; raise it or "
                             "shrink the region")
        if len(kept) < STOCHASTIC_STOP * batch:
            return bank


def _fill(bank: np.ndarray, region: Region, setup: SweepSetup, mm: float, rng, max_templates: int, log):
    """Add points whose exact fitting factor is below ``mm`` until a draw finds almost none."""
    radius = math.sqrt(1.0 - mm)
    for round_ in range(FILL_ROUNDS):
        n = max(FILL_POINTS, bank.shape[1] // 2)
        n_edge = int(EDGE_FRACTION * n)
        pts = np.hstack([np.stack(region.sample(n - n_edge, seed=rng)), _edge_points(region, n_edge, rng)])
        ff, _ = setup.sweep(pts, bank)
        low = np.flatnonzero(ff < mm)
        log(f"fill round {round_ + 1}: {low.size} of {pts.shape[1]} points below {mm} ({bank.shape[1]} templates)")
        if low.size < FILL_TARGET * pts.shape[1]:
            return bank
        order = low[np.argsort(ff[low])]
        new = _dedupe(pts[:, order], setup, 0.5 * radius)
        bank = np.hstack([bank, new])
        if bank.shape[1] > max_templates:
            raise ValueError(f"the bank passed max_templates={max_templates}; raise it or shrink the region")
    return bank


class BankEstimate(dict):
    """The metric's estimate of a bank: ``templates``, ``dimension``, ``volume``, ``seconds``."""


def estimate_bank_size(region: Region, setup: SweepSetup, minimal_match: float) -> BankEstimate:
    """Templates an ideal lattice would need: metric volume times the A_n* covering density.

    Non-spinning regions: the 2-D surface's area over the hexagonal cell
    ``(3 sqrt 3 / 2)(1 - MM)``. With spins, the surface of equal spins
    ``chi1 = chi2`` (3-D) over the A3* cell: an approximation (unequal spins add a
    little volume at unequal masses).
    """
    radius2 = 1.0 - minimal_match
    if not region.spinning:
        area = _Surface(region, setup).area()
        n = area / (1.5 * math.sqrt(3.0) * radius2)
        return BankEstimate(templates=n, dimension=2, volume=area)
    vol = _spin_volume(region, setup)
    theta = lattice_covering_density(3)
    n = theta * vol / (4.0 / 3.0 * math.pi * radius2 ** 1.5)
    return BankEstimate(templates=n, dimension=3, volume=vol)


def _spin_volume(region: Region, setup: SweepSetup, n: int = 48) -> float:
    big, small = _canonical_grid(region, n)
    lo, hi = max(region.chi1[0], region.chi2[0]), min(region.chi1[1], region.chi2[1])
    if hi <= lo:
        lo, hi = min(region.chi1[0], region.chi2[0]), max(region.chi1[1], region.chi2[1])
    chi = np.linspace(lo, hi, n)
    b3, s3, c3 = np.meshgrid(big[:, 0], small[0], chi, indexing="ij")
    xi = setup.coordinates(b3.ravel(), s3.ravel(), c3.ravel(), c3.ravel()).reshape(n, n, n, -1)
    h = [b3[1, 0, 0] - b3[0, 0, 0], s3[0, 1, 0] - s3[0, 0, 0], c3[0, 0, 1] - c3[0, 0, 0]]
    j = [np.gradient(xi, h[k], axis=k) for k in range(3)]
    g = np.stack([np.stack([np.einsum("...k,...k->...", j[a], j[b]) for b in range(3)], -1) for a in range(3)], -2)
    density = np.sqrt(np.maximum(np.linalg.det(g), 0.0))
    inside = (b3 >= s3) & region.contains(b3, s3, c3, c3)
    return float(density[inside].sum() * h[0] * h[1] * h[2])


def place_bank(*, m1, m2, chi1=(0.0, 0.0), chi2=(0.0, 0.0), mtotal=None, mass_ratio=None, psd, f_low,
               minimal_match=0.97, sample_rate=4096.0, seed=0, method="auto", max_templates=None,
               progress=False) -> Bank:
    """Place a bank covering a region of binaries at a minimal match.

    Parameters
    ----------
    m1, m2 : (float, float)
        Component-mass ranges (solar masses).
    chi1, chi2 : (float, float), optional
        Aligned-spin ranges, inside (-1, 1); default non-spinning.
    mtotal, mass_ratio : (float, float), optional
        Cuts on total mass and on ``m_heavier / m_lighter``.
    psd : str, callable or (freqs, values)
        Noise curve: a design-curve name, a callable of frequency, or samples.
    f_low : float
        Lower frequency cutoff (Hz) of the search.
    minimal_match : float, optional
        Every point of the region should keep at least this fraction of its optimal SNR
        with its best template (default 0.97: at most ~10% of events lost).
    sample_rate : float, optional
        The search's sample rate (Hz); templates end at ISCO or Nyquist.
    seed : int, optional
        Random seed: the same inputs give the same bank, bit for bit, for any thread count.
    method : {"auto", "lattice", "stochastic"}, optional
        ``"auto"``: the lattice for non-spinning regions, stochastic otherwise.
    max_templates : int, optional
        Refuse (before placing) when the metric estimate exceeds this (default 200,000).
    progress : bool, optional
        Print the stages and the fill rounds on stderr.

    Returns
    -------
    Bank
        With :attr:`Bank.metadata` holding the region, noise curve (when named),
        ``f_low``, minimal match, method, seed, sample rate and the estimate.

    Raises
    ------
    ValueError
        An empty or inverted range, a minimal match outside (0, 1), ``f_low`` at or
        above the ISCO frequency of every binary in the region, spins outside (-1, 1),
        a PSD infinite over the whole band, or an estimate above ``max_templates``.

    References
    ----------
    .. [1] Owen, B. J. 1996, PRD 53, 6749, arXiv:gr-qc/9511032.
    .. [2] Owen, B. J. and Sathyaprakash, B. S. 1999, PRD 60, 022002, arXiv:gr-qc/9808076.
    .. [3] Cokelaer, T. 2007, PRD 76, 102004, arXiv:0706.4437 (hexagonal placement).
    .. [4] Babak, S. 2008, CQG 25, 195011, arXiv:0801.4070 (stochastic placement).
    .. [5] Harry, I. W., Allen, B. and Sathyaprakash, B. S. 2009, PRD 80, 104014,
       arXiv:0908.2090.

    Examples
    --------
    >>> from chirpsift import place_bank
    >>> bank = place_bank(m1=(10, 12), m2=(10, 12), psd="gen2-zero-detuned", f_low=30.0)
    >>> len(bank) > 1, bank.metadata["method"]
    (True, 'lattice')
    """
    started = time.perf_counter()
    region = Region(m1=m1, m2=m2, chi1=chi1, chi2=chi2, mtotal=mtotal, mass_ratio=mass_ratio)
    mm = real_scalar("minimal_match", minimal_match)
    if not 0.0 < mm < 1.0:
        raise ValueError(f"minimal_match must lie in (0, 1), got {minimal_match!r}")
    fl = positive_scalar("f_low", f_low)
    fs = positive_scalar("sample_rate", sample_rate)
    if method not in METHODS:
        raise ValueError(f"method must be one of {METHODS}, got {method!r}")
    if method == "auto":
        method = "stochastic" if region.spinning else "lattice"
    if method == "lattice" and region.spinning:
        raise ValueError("method='lattice' places non-spinning regions (2-D); use 'stochastic' with spins")
    cap = DEFAULT_MAX_TEMPLATES if max_templates is None else integer("max_templates", max_templates)
    m_lo = region.total_mass_range[0]
    from ..waveform import isco_frequency

    top = float(isco_frequency(m_lo / 2, m_lo / 2))
    if fl >= min(top, 0.5 * fs):
        raise ValueError(f"f_low={fl} Hz is at or above the ISCO frequency ({top:.1f} Hz) of every binary in the "
                         f"region (or Nyquist, {0.5 * fs:g} Hz)")
    rng = np.random.default_rng(seed)

    def log(msg):
        if progress:
            import sys

            print(f"[place_bank {time.perf_counter() - started:6.1f} s] {msg}", file=sys.stderr, flush=True)

    m_small = min(region.m1[0], region.m2[0])
    pts = np.array([[m_small], [m_small], [0.0], [0.0]])
    longest = float(_durations(pts, fl)[0]) * 1.05  # spins and the edges' overshoot
    setup = SweepSetup.build(psd, fl, fs, longest, m_lo)
    estimate = estimate_bank_size(region, setup, mm)
    log(f"metric estimate: {estimate['templates']:.0f} templates ({estimate['dimension']}-D)")
    if estimate["templates"] > cap:
        raise ValueError(f"the region needs about {estimate['templates']:.0f} templates by the metric (more than "
                         f"max_templates={cap}); raise max_templates or shrink the region")
    radius = math.sqrt(1.0 - mm)
    if method == "lattice":
        surface = _Surface(region, setup)
        b1, b2 = _lattice(surface, radius)
        bank = _dedupe(np.stack([b1, b2, np.zeros_like(b1), np.zeros_like(b1)]), setup, 0.25 * radius)
    else:
        bank = _stochastic(region, setup, radius, rng, cap)
    log(f"{method}: {bank.shape[1]} templates")
    bank = _fill(bank, region, setup, mm, rng, cap, log)
    log(f"done: {bank.shape[1]} templates")
    metadata = {
        "region": region.as_dict(),
        "psd": psd if isinstance(psd, str) else None,
        "f_low": fl,
        "minimal_match": mm,
        "method": method,
        "seed": int(seed),
        "sample_rate": fs,
        "metric_estimate": float(estimate["templates"]),
        "metric_dimension": int(estimate["dimension"]),
    }
    return Bank(bank[0], bank[1], bank[2], bank[3], metadata=metadata)
