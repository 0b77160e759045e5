"""Placing a template bank that covers a region at a minimal match.

Two published methods, in the flat coordinates of :mod:`chirpsift.bank.metric`
(where the mismatch of nearby templates is the squared distance):

- ``"lattice"`` (non-spinning regions, a 2-D template surface): a hexagonal
  (A2*) lattice, the thinnest covering of the plane, in the plane that best fits the
  surface (Owen 1996; Owen & Sathyaprakash 1999; Cokelaer 2007), its middle row along
  the region's centre line. Its covering radius is ``sqrt(1 - MM)``, so every point of
  the plane lies within the minimal mismatch of a lattice point. Lattice points whose
  preimage lies in the region are mapped back to masses; of those outside, a greedy
  cover keeps the ones the region's edges need; points beyond the equal-mass edge move
  onto it.
- ``"stochastic"`` (aligned spins, or any region): random proposals drawn uniformly in
  the chirp times and spins over the region (:meth:`Region.sample_in_chirp_times`, near
  uniform in the template space's volume) are kept when no template lies within the
  minimal mismatch of them (Babak 2008; Harry, Allen & Sathyaprakash 2009), until fewer
  than :data:`STOCHASTIC_STOP` of a batch are kept. Proposals uniform in the component
  masses drew the light corner, which holds much of the volume in little mass area, so
  thinly that the stage stopped with it under-covered.

Both end with the same check rounds: points drawn in the region the same way (and on its edges)
whose exact fitting factor (:func:`chirpsift.fitting_factor`) falls below the minimal
match become templates, until a fresh draw finds fewer than :data:`FILL_TARGET` of
them below it. The metric is an approximation; these rounds make the exact match the
judge.
"""

from __future__ import annotations

import math
import time
import warnings

import numpy as np

from .._validate import choice, integer, positive_scalar, real_scalar, switch
from .coverage import SweepSetup, template_durations
from .region import Region, heavier_first
from .templates import Bank

__all__ = ["place_bank", "estimate_bank_size", "METHODS", "lattice_covering_density", "BankEstimate", "CoverageWarning"]

METHODS = ("auto", "lattice", "stochastic")


class CoverageWarning(UserWarning):
    """A placed bank's last check round still found points below the minimal match."""


#: Stop the stochastic proposals once a batch keeps fewer than this fraction.
STOCHASTIC_STOP = 0.005
#: Check rounds: draw points until a draw finds fewer than this fraction below the
#: minimal match; the coverage target asks for under 1% (1e-3 leaves margin).
FILL_TARGET = 1e-3
#: A bank whose last check draw still has this fraction below the minimal match misses
#: the coverage target (99%): place_bank warns (CoverageWarning). Between FILL_TARGET
#: and this, the rounds ran out short of their own margin (aligned-spin regions: 5-10
#: Msun with |chi| <= 0.5 from 30 Hz ended at 0.5%, and 4,000 points found 99.8%
#: covered, 0.1 percentile 0.969); the metadata records it.
COVERAGE_WARNING_FRACTION = 0.01
#: Points per check draw (at least), and how many of them lie on the region's edges.
FILL_POINTS = 2000
EDGE_FRACTION = 0.25
#: Check rounds at most (each adds the short points of one draw).
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


def _mc_eta(m1, m2):
    m = m1 + m2
    eta = m1 * m2 / (m * m)
    return m * eta ** 0.6, eta


def _masses(mc, eta):
    eta = np.minimum(eta, 0.25)
    m = mc * eta ** -0.6
    root = np.sqrt(np.maximum(1.0 - 4.0 * eta, 0.0))
    return 0.5 * m * (1 + root), 0.5 * m * (1 - root)


#: The non-spinning surface is laid out on a grid in (Mc^(-5/3), eta): the first
#: coordinate is nearly proportional to the Newtonian chirp time, so grid steps are
#: nearly even in metric length. Cells per axis for the area integral and the
#: Newton starting points (the integrand is smooth).
AREA_GRID = (2000, 100)
#: The region's edges are found on a finer grid whose steps are at most this fraction
#: of the covering radius in the plane (components of 1-3 Msun from 30 Hz: 40,000 x
#: 60 cells), within EDGE_GRID_LIMITS cells per axis.
EDGE_STEP = 0.2
EDGE_GRID_LIMITS = ((200, 100_000), (20, 2_000))


class _Surface:
    """The region's non-spinning template surface in flat coordinates.

    Its best-fitting plane, area and edges, and the way back from the plane to masses.
    """

    def __init__(self, region: Region, setup: SweepSetup):
        self.region, self.setup = region, setup
        hi_m, lo_m = max(region.m1[1], region.m2[1]), min(region.m1[0], region.m2[0])
        mc_lo, mc_hi = float(_mc_eta(lo_m, lo_m)[0]), float(_mc_eta(hi_m, hi_m)[0])
        self.a_range = (mc_hi ** (-5 / 3), mc_lo ** (-5 / 3))
        self.eta_range = (float(_mc_eta(hi_m, lo_m)[1]), 0.25)
        a, eta, inside, xi = self._grid(AREA_GRID)
        self.area_grid = (a, eta, inside, xi)
        pts = xi[inside]
        self.centre = pts.mean(axis=0)
        _, _, vt = np.linalg.svd(pts - self.centre, full_matrices=False)
        self.axes = vt[:2].T  # (r, 2): the best-fitting plane
        self.start_params = np.stack([a[inside], eta[inside]])
        self.start_plane = self.plane(pts)
        self._edges: dict[float, np.ndarray] = {}

    def _grid(self, shape):
        a = np.linspace(*self.a_range, shape[0])
        eta = np.linspace(*self.eta_range, shape[1])
        a, eta = np.meshgrid(a, eta, indexing="ij")
        m1, m2 = _masses(a ** (-0.6), eta)
        inside = self.region.contains(m1, m2)
        xi = self.setup.coordinates(m1.ravel(), m2.ravel()).reshape(*shape, -1)
        return a, eta, inside, xi

    def plane(self, xi: np.ndarray) -> np.ndarray:
        return (xi - self.centre) @ self.axes

    def to_plane(self, a, eta) -> np.ndarray:
        m1, m2 = _masses(np.asarray(a) ** (-0.6), eta)
        return self.plane(self.setup.coordinates(m1, m2))

    def area(self) -> float:
        """Area of the surface (metric units): the sum of sqrt(det J^T J) da deta over it."""
        a, eta, inside, xi = self.area_grid
        da, de = a[1, 0] - a[0, 0], eta[0, 1] - eta[0, 0]
        j1 = np.gradient(xi, da, axis=0)
        j2 = np.gradient(xi, de, axis=1)
        p = np.einsum("ijk,ijk->ij", j1, j1)
        q = np.einsum("ijk,ijk->ij", j1, j2)
        r = np.einsum("ijk,ijk->ij", j2, j2)
        density = np.sqrt(np.maximum(p * r - q * q, 0.0))
        return float(density[inside].sum() * da * de)

    def perimeter(self, radius: float, bins: int = 2000) -> float:
        """Length of the region's edge in the plane (metric units).

        From its upper and lower edge over ``bins`` slices of the long axis, and the two ends.
        """
        e = self.edges(radius)
        cuts = np.linspace(e[:, 0].min(), e[:, 0].max(), bins + 1)
        which = np.clip(np.digitize(e[:, 0], cuts) - 1, 0, bins - 1)
        top = np.full(bins, -np.inf)
        bottom = np.full(bins, np.inf)
        np.maximum.at(top, which, e[:, 1])
        np.minimum.at(bottom, which, e[:, 1])
        ok = np.isfinite(top)
        x = 0.5 * (cuts[:-1] + cuts[1:])[ok]
        top, bottom = top[ok], bottom[ok]
        sides = np.hypot(np.diff(x), np.diff(top)).sum() + np.hypot(np.diff(x), np.diff(bottom)).sum()
        return float(sides + (top[0] - bottom[0]) + (top[-1] - bottom[-1]))

    def edges(self, radius: float) -> np.ndarray:
        """Plane coordinates of the region's edge: grid cells inside with a neighbour outside.

        The grid's steps are at most :data:`EDGE_STEP` times ``radius`` in the plane.
        Computed once per radius (the estimate and the lattice both need them).
        """
        if radius not in self._edges:
            self._edges[radius] = self._find_edges(radius)
        return self._edges[radius]

    def _find_edges(self, radius: float) -> np.ndarray:
        _, _, inside, xi = self.area_grid
        uv = self.plane(xi)
        # plane length of one area-grid step along each axis, at its longest
        step = [float(np.max(np.hypot(*np.diff(uv, axis=k).transpose(2, 0, 1)))) for k in (0, 1)]
        shape = [int(np.clip(np.ceil(step[k] * (AREA_GRID[k] - 1) / (EDGE_STEP * radius)), *EDGE_GRID_LIMITS[k]))
                 for k in (0, 1)]
        a = np.linspace(*self.a_range, shape[0])
        eta = np.linspace(*self.eta_range, shape[1])
        aa, ee = np.meshgrid(a, eta, indexing="ij")
        inside = np.pad(self.region.contains(*_masses(aa ** (-0.6), ee)), 1)
        core = inside[:-2, 1:-1] & inside[2:, 1:-1] & inside[1:-1, :-2] & inside[1:-1, 2:]
        edge = inside[1:-1, 1:-1] & ~core
        return self.to_plane(aa[edge], ee[edge])


def _lattice(surface: _Surface, radius: float):
    """Lay hexagonal lattice points and map them back to masses (non-spinning).

    The lattice has covering radius ``radius``. A lattice point whose preimage lies in
    the region is kept; of the others, :func:`_edge_cover` keeps those the region's
    edge needs; a preimage beyond the equal-mass edge moves onto it.
    """
    from scipy.spatial import cKDTree

    edge = surface.edges(radius)
    lat = _centred_lattice(edge, radius)
    # preimages: Newton steps in (Mc^(-5/3), eta) from the nearest area-grid point
    _, start = cKDTree(surface.start_plane).query(lat, k=1)
    x = surface.start_params[:, start].copy()
    scale = np.array([surface.a_range[1] - surface.a_range[0], surface.eta_range[1] - surface.eta_range[0]])
    for _ in range(20):
        f = surface.to_plane(x[0], x[1]) - lat
        jac = np.empty((lat.shape[0], 2, 2))
        for k in range(2):
            dx = np.zeros_like(x)
            dx[k] = 1e-6 * scale[k]
            jac[:, :, k] = (surface.to_plane(*(x + dx)) - surface.to_plane(*(x - dx))) / (2e-6 * scale[k])
        det = jac[:, 0, 0] * jac[:, 1, 1] - jac[:, 0, 1] * jac[:, 1, 0]
        safe = np.abs(det) > 0
        d = np.where(safe, det, 1.0)
        step = np.stack([(jac[:, 1, 1] * f[:, 0] - jac[:, 0, 1] * f[:, 1]) / d,
                         (-jac[:, 1, 0] * f[:, 0] + jac[:, 0, 0] * f[:, 1]) / d])
        step = np.clip(np.where(safe, step, 0.0), -0.05 * scale[:, None], 0.05 * scale[:, None])
        x = x - step
        x[0] = np.clip(x[0], 0.5 * surface.a_range[0], 2.0 * surface.a_range[1])
        x[1] = np.clip(x[1], 0.5 * surface.eta_range[0], 0.25)  # beyond the equal-mass edge: onto it
    m1, m2 = _masses(x[0] ** (-0.6), x[1])
    # where the templates really are: a lattice point off the surface (beyond the
    # equal-mass fold, or past the region's range) lands on its edge instead
    pos = surface.to_plane(x[0], x[1])
    on_surface = np.hypot(*(pos - lat).T) <= 1e-3 * radius
    inside = surface.region.contains(m1, m2) & on_surface
    near_edge = cKDTree(edge).query(pos, k=1)[0] <= radius
    keep = inside | _edge_cover(pos, inside, near_edge, edge, radius)
    return m1[keep], m2[keep]


#: Polynomial degree of the centre line the lattice rows follow, and the bins of the
#: long axis the centre is measured in. The non-spinning surfaces are long, thin
#: and gently curved in their plane (1-3 Msun from 30 Hz: 1,400 long, 0.1-1.9 wide,
#: radius 0.17); degree 8 follows the centre to well under a radius.
CENTRE_DEGREE = 8
CENTRE_BINS = 400


def _centred_lattice(edge: np.ndarray, radius: float) -> np.ndarray:
    """Hexagonal lattice whose middle row runs along the centre line of the region.

    Rows are ``1.5 radius`` apart across the region and points ``sqrt(3) radius``
    apart along them. A region thinner than a row spacing is covered by its middle
    row alone; an unaligned lattice would often straddle it with two half-used rows.
    Across the long axis the rows follow the centre line, a shear that changes
    distances by a factor ``sqrt(1 + c'^2)``, ``c'`` the centre's slope (below 1e-2 on
    the non-spinning surfaces); the check rounds catch what remains.
    """
    s, n = edge[:, 0], edge[:, 1]
    bins = np.linspace(s.min(), s.max(), CENTRE_BINS + 1)
    which = np.clip(np.digitize(s, bins) - 1, 0, CENTRE_BINS - 1)
    lo = np.full(CENTRE_BINS, np.inf)
    hi = np.full(CENTRE_BINS, -np.inf)
    np.minimum.at(lo, which, n)
    np.maximum.at(hi, which, n)
    filled = np.isfinite(lo)
    mid_s = 0.5 * (bins[:-1] + bins[1:])[filled]
    degree = min(CENTRE_DEGREE, int(filled.sum()) - 1)
    centre = np.polynomial.Polynomial.fit(mid_s, 0.5 * (lo[filled] + hi[filled]), deg=degree)
    offset = n - centre(s)
    spacing, row = math.sqrt(3.0) * radius, 1.5 * radius
    j_lo = int(math.floor((offset.min() - radius) / row))
    j_hi = int(math.ceil((offset.max() + radius) / row))
    k_lo = int(math.floor((s.min() - radius) / spacing)) - 1
    k_hi = int(math.ceil((s.max() + radius) / spacing)) + 1
    j, k = np.meshgrid(np.arange(j_lo, j_hi + 1), np.arange(k_lo, k_hi + 1), indexing="ij")
    along = (k + 0.5 * (j % 2)) * spacing
    return np.stack([along, j * row + centre(along)], axis=-1).reshape(-1, 2)


def _edge_cover(lat: np.ndarray, inside: np.ndarray, near_edge: np.ndarray, edge: np.ndarray, radius: float):
    """Choose the outside lattice points that cover the edge samples inside ones miss.

    Greedy set cover (the candidate covering most uncovered samples first), so a thin
    region is not paid for twice, once by the lattice points inside it and again by
    every lattice point within reach of its edges. What is left between edge samples
    and the nearest kept point is for the check rounds to catch.
    """
    from scipy.spatial import cKDTree

    chosen = np.zeros(lat.shape[0], dtype=bool)
    if inside.any():
        missed = cKDTree(lat[inside]).query(edge, k=1)[0] > radius
    else:
        missed = np.ones(edge.shape[0], dtype=bool)
    uncovered = edge[missed]
    cand = np.flatnonzero(near_edge & ~inside)
    if uncovered.shape[0] == 0 or cand.size == 0:
        return chosen
    reach = cKDTree(uncovered).query_ball_point(lat[cand], r=radius)
    covers = [np.asarray(r_, dtype=np.int64) for r_ in reach]
    by_sample = [[] for _ in range(uncovered.shape[0])]
    for c, samples in enumerate(covers):
        for u in samples:
            by_sample[u].append(c)
    counts = np.array([len(c) for c in covers])
    done = np.zeros(uncovered.shape[0], dtype=bool)
    while counts.max(initial=0) > 0:
        c = int(np.argmax(counts))  # ties: the lowest index, so the result is deterministic
        chosen[cand[c]] = True
        for u in covers[c]:
            if not done[u]:
                done[u] = True
                for other in by_sample[u]:
                    counts[other] -= 1
    return chosen


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
    return heavier_first(np.stack([m1, m2, c1, c2])[:, ok])


def _stochastic(region: Region, setup: SweepSetup, radius: float, rng, max_templates: int, batch: int = 4000):
    from scipy.spatial import cKDTree

    bank = np.zeros((4, 0))
    xi_bank = np.zeros((0, setup.coordinates.transform.shape[0]))
    while True:
        p = np.stack(region.sample_in_chirp_times(batch, seed=rng))
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
            raise ValueError(f"the region needs more than max_templates={max_templates} templates (the metric-only "
                             "stochastic stage passed it while still growing); raise max_templates or shrink the "
                             "region")
        if len(kept) < STOCHASTIC_STOP * batch:
            return bank


def _check_rounds(bank: np.ndarray, region: Region, setup: SweepSetup, mm: float, rng, max_templates: int, log,
                  progress: bool = False):
    """Add points whose exact fitting factor is below ``mm`` until a draw finds almost none.

    Returns the bank and a record of the rounds: their count and the fraction of the
    last draw below ``mm`` (above :data:`FILL_TARGET` when the rounds ran out).
    """
    radius = math.sqrt(1.0 - mm)
    fraction = 1.0
    for round_ in range(FILL_ROUNDS):
        n = max(FILL_POINTS, bank.shape[1] // 2)
        n_edge = int(EDGE_FRACTION * n)
        pts = np.hstack([np.stack(region.sample_in_chirp_times(n - n_edge, seed=rng)),
                         _edge_points(region, n_edge, rng)])
        bar = None
        if progress:
            from tqdm.auto import tqdm

            bar = tqdm(total=pts.shape[1], desc=f"check round {round_ + 1}", unit="point", leave=False)
        try:
            ff, _ = setup.sweep(pts, bank, progress=bar)
        finally:
            if bar is not None:
                bar.close()
        low = np.flatnonzero(ff < mm)
        fraction = low.size / pts.shape[1]
        log(f"check round {round_ + 1}: {low.size} of {pts.shape[1]} points below {mm} ({bank.shape[1]} templates)")
        if fraction < FILL_TARGET:
            return bank, {"rounds": round_ + 1, "last_fraction_below": fraction}
        order = low[np.argsort(ff[low])]
        new = _dedupe(pts[:, order], setup, 0.5 * radius)
        bank = np.hstack([bank, new])
        if bank.shape[1] > max_templates:
            raise ValueError(f"the bank passed max_templates={max_templates}; raise it or shrink the region")
    log(f"check rounds ran out with {100 * fraction:.2f}% of the last draw below {mm}: check the coverage")
    return bank, {"rounds": FILL_ROUNDS, "last_fraction_below": fraction}


class BankEstimate(dict):
    """The metric's estimate of a bank.

    Keys ``templates``, ``dimension``, ``volume`` and, 2-D, ``templates_with_edges``.
    """


def estimate_bank_size(region: Region, setup: SweepSetup, minimal_match: float, *, surface=None) -> BankEstimate:
    """Templates an ideal lattice would need: metric volume times the A_n* covering density.

    Non-spinning regions: the 2-D surface's area over the hexagonal cell
    ``(3 sqrt 3 / 2)(1 - MM)`` (``templates``), and with the edges' share added, half a
    lattice row per unit length of edge, ``perimeter / (2 sqrt 3 r)``
    (``templates_with_edges``): regions thin in metric terms need far more than the
    area alone says. With spins, the surface of equal spins
    ``chi1 = chi2`` (3-D) over the A3* cell: an approximation (unequal spins add a
    little volume at unequal masses). ``surface``: the region's non-spinning surface,
    when the caller has already built it for the lattice.
    """
    radius2 = 1.0 - minimal_match
    if not region.spinning:
        surface = surface if surface is not None else _Surface(region, setup)
        area = surface.area()
        n = area / (1.5 * math.sqrt(3.0) * radius2)
        # the edges' share: half a lattice row (points sqrt(3) r apart) per unit of edge
        edge = surface.perimeter(math.sqrt(radius2)) / (2.0 * math.sqrt(3.0) * math.sqrt(radius2))
        return BankEstimate(templates=n, dimension=2, volume=area, templates_with_edges=n + edge)
    vol = _spin_volume(region, setup)
    theta = lattice_covering_density(3)
    n = theta * vol / (4.0 / 3.0 * math.pi * radius2 ** 1.5)
    return BankEstimate(templates=n, dimension=3, volume=vol)


def _spin_volume(region: Region, setup: SweepSetup, n: int = 48) -> float:
    lo_m, hi_m = min(region.m1[0], region.m2[0]), max(region.m1[1], region.m2[1])
    big, small = np.meshgrid(np.linspace(lo_m, hi_m, n), np.linspace(lo_m, hi_m, n), indexing="ij")
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
        Print the stages on stderr, with a progress bar (tqdm) over each check round.

    Returns
    -------
    Bank
        With :attr:`Bank.metadata` holding the region, noise curve (when named),
        ``f_low``, minimal match, method, seed, sample rate, the estimate and the
        fraction of the last check draw below the minimal match.

    Raises
    ------
    ValueError
        An empty (``lo == hi`` masses) or inverted range, a minimal match outside (0, 1),
        ``f_low`` at or above the ISCO frequency of every binary in the region or at or
        above Nyquist, spins outside (-1, 1) or fixed at non-zero values, a PSD infinite
        over the whole band, a negative ``seed``, or an estimate or a placed bank above
        ``max_templates``.

    Warns
    -----
    CoverageWarning
        When the check rounds ran out with that fraction still at or above
        :data:`COVERAGE_WARNING_FRACTION` (the bank misses the 99% coverage target).

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
    for name, (lo, hi) in (("m1", region.m1), ("m2", region.m2)):
        if not lo < hi:
            raise ValueError(f"{name}=({lo!r}, {hi!r}) is empty: place_bank needs a mass range with lo < hi")
    if region.spinning and region.chi1[0] == region.chi1[1] and region.chi2[0] == region.chi2[1]:
        raise ValueError(f"chi1={region.chi1!r} and chi2={region.chi2!r} fix the spins at non-zero values; place_bank "
                         "places non-spinning regions or spin ranges with lo < hi")
    mm = real_scalar("minimal_match", minimal_match)
    if not 0.0 < mm < 1.0:
        raise ValueError(f"minimal_match must lie in (0, 1), got {minimal_match!r}")
    fl = positive_scalar("f_low", f_low)
    fs = positive_scalar("sample_rate", sample_rate)
    choice("method", method, METHODS)
    switch("progress", progress)
    if method == "auto":
        method = "stochastic" if region.spinning else "lattice"
    if method == "lattice" and region.spinning:
        raise ValueError("method='lattice' places non-spinning regions (2-D); use 'stochastic' with spins")
    cap = DEFAULT_MAX_TEMPLATES if max_templates is None else integer("max_templates", max_templates)
    seed = integer("seed", seed, minimum=0)
    m_lo = region.total_mass_range[0]
    from ..waveform import isco_frequency

    top = float(isco_frequency(m_lo / 2, m_lo / 2))
    if fl >= 0.5 * fs:
        raise ValueError(f"sample_rate={fs:g} Hz puts Nyquist ({0.5 * fs:g} Hz) at or below f_low={fl} Hz")
    if fl >= top:
        raise ValueError(f"f_low={fl} Hz is at or above the ISCO frequency ({top:.1f} Hz) of every binary in the "
                         "region")
    rng = np.random.default_rng(seed)

    def log(msg):
        if progress:
            import sys

            print(f"[place_bank {time.perf_counter() - started:6.1f} s] {msg}", file=sys.stderr, flush=True)

    m_small = min(region.m1[0], region.m2[0])
    longest = float(template_durations(m_small, m_small, fl)[0]) * 1.05  # spins and the edges' overshoot
    setup = SweepSetup.build(psd, fl, fs, longest, m_lo)
    surface = _Surface(region, setup) if method == "lattice" else None
    estimate = estimate_bank_size(region, setup, mm, surface=surface)
    expected = estimate.get("templates_with_edges", estimate["templates"])
    log(f"metric estimate: {expected:.0f} templates ({estimate['dimension']}-D)")
    # The 3-D estimate of a spinning region is a lower bound only (a region thin in one
    # direction has almost no volume yet needs templates along it); there the cap is
    # enforced by the metric-only stochastic stage, which stops when it passes it.
    if expected > cap and estimate["dimension"] == 2:
        raise ValueError(f"the region needs about {expected:.0f} templates by the metric (more than "
                         f"max_templates={cap}); raise max_templates or shrink the region")
    radius = math.sqrt(1.0 - mm)
    if method == "lattice":
        b1, b2 = _lattice(surface, radius)
        bank = _dedupe(np.stack([b1, b2, np.zeros_like(b1), np.zeros_like(b1)]), setup, 0.25 * radius)
    else:
        bank = _stochastic(region, setup, radius, rng, cap)
    log(f"{method}: {bank.shape[1]} templates")
    bank, fill = _check_rounds(bank, region, setup, mm, rng, cap, log, progress)
    below = fill["last_fraction_below"]
    if bank.shape[1] > cap:
        raise ValueError(f"the bank needs {bank.shape[1]} templates, more than max_templates={cap}; raise it or "
                         "shrink the region")
    log(f"done: {bank.shape[1]} templates")
    if below >= COVERAGE_WARNING_FRACTION:
        warnings.warn(f"place_bank: after {FILL_ROUNDS} check rounds {below:.1%} of points drawn in the region still "
                      f"fall below minimal_match={mm}; the bank does not cover the region (is f_low={fl} Hz near "
                      "the ISCO frequency of part of it?)", CoverageWarning, stacklevel=2)
    metadata = {
        "region": region.as_dict(),
        "psd": psd if isinstance(psd, str) else None,
        "f_low": fl,
        "minimal_match": mm,
        "method": method,
        "seed": int(seed),
        "sample_rate": fs,
        "metric_estimate": float(estimate["templates"]),
        "metric_estimate_with_edges": float(expected),
        "metric_dimension": int(estimate["dimension"]),
        "check_rounds": fill["rounds"],
        "last_check_fraction_below": fill["last_fraction_below"],
    }
    return Bank(bank[0], bank[1], bank[2], bank[3], metadata=metadata)
