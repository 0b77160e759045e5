"""Coincidences at zero lag and in every time slide at once.

Times are handled as integer nanoseconds from a reference epoch, so every comparison is
exact and the all-at-once search and the slide-by-slide loop agree bit for bit.

The ring
    The time analysed by every site at once (the *common time*) is laid end to end,
    gaps removed, into a ring of circumference ``L``; a trigger's ring position is the
    common time before it. In slide ``k`` site number ``j`` (in the order given) is
    moved by ``k j step`` around the ring, so every slide covers exactly ``L`` seconds.

All slides at once
    Triggers ``a`` of site ``i`` and ``b`` of site ``j > i`` (same template) are
    coincident in slide ``k >= 1`` when the ring distance between ``u_a`` and
    ``u_b + k (j - i) step`` is at most the pair's window ``w``. With
    ``D = (u_a - u_b) mod L`` this reads ``|D - k M| <= w`` for ``M = (j - i) step``:
    the residues ``D mod M`` of coincident pairs lie within ``w`` of 0. Sorting each
    site's triggers once by (template, ring position mod ``M``) and joining windows of
    width ``2 w`` finds the pairs of every slide in one pass; ``k`` is then
    ``round(D / M)``. The work is that of the pairs coincident in some shift of the
    ring, whatever ``n_slides`` is, and memory holds the triggers, the pairs found and
    one chunk of the join.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "NS",
    "Ring",
    "SiteTriggers",
    "assemble",
    "cluster_by_slide",
    "order_by_time",
    "site_values",
    "slide_pairs",
    "slide_pairs_loop",
    "zero_lag_pairs",
]

#: Nanoseconds per second: the integer time grid of the coincidence search.
NS = 1_000_000_000
#: Pairs expanded per chunk of a window join (bounds the join's scratch memory).
JOIN_CHUNK = 1 << 21


def to_ns(seconds: float) -> int:
    """Seconds to whole nanoseconds (nearest)."""
    return round(seconds * NS)


@dataclass(frozen=True)
class Ring:
    """The common analysed time laid end to end (nanoseconds from ``t_ref``)."""

    t_ref: float
    starts: np.ndarray  # int64 start of each common interval (ns from t_ref)
    ends: np.ndarray  # int64 end (exclusive)
    offsets: np.ndarray  # int64 ring position of each start

    @property
    def length(self) -> int:
        """Circumference (ns)."""
        return int(np.sum(self.ends - self.starts))

    @classmethod
    def from_intervals(cls, intervals: np.ndarray, t_ref: float) -> Ring:
        """Build the ring of sorted, disjoint ``(k, 2)`` intervals (s) relative to ``t_ref``."""
        starts = np.array([to_ns(a - t_ref) for a in intervals[:, 0]], dtype=np.int64)
        ends = np.array([to_ns(b - t_ref) for b in intervals[:, 1]], dtype=np.int64)
        keep = ends > starts
        starts, ends = starts[keep], ends[keep]
        offsets = np.concatenate([[0], np.cumsum(ends - starts)[:-1]]).astype(np.int64)
        return cls(t_ref, starts, ends, offsets)

    def locate(self, t_ns: np.ndarray):
        """Ring positions of times (ns) and whether each lies in the common time."""
        if self.starts.size == 0:
            return np.full(t_ns.shape, -1, dtype=np.int64), np.zeros(t_ns.shape, dtype=bool)
        i = np.searchsorted(self.starts, t_ns, side="right") - 1
        ic = np.maximum(i, 0)
        inside = (i >= 0) & (t_ns < self.ends[ic])
        u = np.where(inside, self.offsets[ic] + (t_ns - self.starts[ic]), -1)
        return u.astype(np.int64), inside

    def time_of(self, u: np.ndarray) -> np.ndarray:
        """Return the times (ns from t_ref) of ring positions."""
        i = np.searchsorted(self.offsets, u, side="right") - 1
        return self.starts[i] + (u - self.offsets[i])


@dataclass(frozen=True)
class SiteTriggers:
    """One site's triggers inside the common time, in the form the search uses."""

    t: np.ndarray  # float64 absolute time (s), as given
    t_ns: np.ndarray  # int64 ns from the ring's t_ref
    u: np.ndarray  # int64 ring position (ns)
    template: np.ndarray  # int64 dense template label (shared by all sites)
    rw: np.ndarray  # float64 reweighted SNR
    row: np.ndarray  # int64 row in the caller's trigger table

    def __len__(self) -> int:
        return self.t.shape[0]


# ---------------------------------------------------------------------------
# an exact ordering of integer keys
# ---------------------------------------------------------------------------
def order_by_time(major: np.ndarray, t: np.ndarray, ties: np.ndarray) -> np.ndarray:
    """Order by ``(major, t, ties[:, 0], ties[:, 1], ...)``.

    ``major`` is int64 and >= 0, ``t`` nanosecond times and ``ties`` an ``(n, c)`` int64
    tie-breaker whose rows are unique.

    Sorts one combined key of ``major`` and ``t`` coarsened to a power of two that keeps
    it in int64, then re-sorts the rare runs that tie on it by the full key. The result
    depends only on the values, not on the input order.
    """
    n = t.size
    if n == 0:
        return np.zeros(0, dtype=np.int64)
    rel = t - int(t.min())
    span = int(rel.max()) + 1
    n_major = int(major.max()) + 1
    g = 1
    while n_major * (span // g + 1) >= 2**62:
        g *= 2
    coarse = major * (span // g + 1) + rel // g
    order = np.argsort(coarse, kind="stable")
    c = coarse[order]
    tie = np.flatnonzero(c[1:] == c[:-1])
    if tie.size:
        pos = np.union1d(tie, tie + 1)
        sub = order[pos]
        keys = tuple(ties[sub, col] for col in range(ties.shape[1] - 1, -1, -1))
        order[pos] = sub[np.lexsort(keys + (rel[sub], coarse[sub]))]
    return order


# ---------------------------------------------------------------------------
# windowed joins
# ---------------------------------------------------------------------------
def _expand(lo: np.ndarray, hi: np.ndarray, chunk: int = JOIN_CHUNK):
    """Yield ``(query, position)`` for every position in ``[lo[q], hi[q])``, in chunks."""
    counts = hi - lo
    ends = np.cumsum(counts)
    n = lo.shape[0]
    start = 0
    while start < n:
        base = int(ends[start - 1]) if start else 0
        stop = int(np.searchsorted(ends, base + chunk, side="right"))
        stop = min(max(stop, start + 1), n)
        c = counts[start:stop]
        total = int(c.sum())
        if total:
            q = np.repeat(np.arange(start, stop, dtype=np.int64), c)
            first = np.repeat(lo[start:stop] - (np.cumsum(c) - c), c)
            yield q, first + np.arange(total, dtype=np.int64)
        start = stop


def _join(ta, xa, tb, xb, w: int):
    """Yield index pairs ``(ia, ib)`` with ``ta == tb`` and ``|xb - xa| <= w`` (exact, int64).

    The candidates come from a sorted key ``template * P + floor(x / g)``; ``g`` is the
    smallest power of two that keeps the key in int64, and the exact test follows.
    """
    if ta.size == 0 or tb.size == 0:
        return
    lo_x = min(int(xa.min()), int(xb.min())) - w
    span = max(int(xa.max()), int(xb.max())) + w - lo_x
    n_templates = int(max(ta.max(), tb.max())) + 1
    g = 1
    while n_templates * (span // g + 3) >= 2**62:
        g *= 2
    period = span // g + 3
    kb = tb * period + (xb - lo_x) // g
    order = np.argsort(kb, kind="stable")
    kbs = kb[order]
    qa = np.argsort(ta * period + (xa - lo_x) // g, kind="stable")  # sorted needles search faster
    base = ta[qa] * period
    lo = np.searchsorted(kbs, base + (xa[qa] - w - lo_x) // g, side="left")
    hi = np.searchsorted(kbs, base + (xa[qa] + w - lo_x) // g, side="right")
    for q, pos in _expand(lo, hi):
        ia, ib = qa[q], order[pos]
        ok = np.abs(xb[ib] - xa[ia]) <= w
        yield ia[ok], ib[ok]


def _with_images(x: np.ndarray, period: int, w: int):
    """Add images to values on a circle of ``period``, so a linear window join is circular.

    Images sit at ``x + period`` (for ``x <= w``) and ``x - period`` (for ``x >= period - w``).
    """
    low = np.flatnonzero(x <= w)
    high = np.flatnonzero(x >= period - w)
    index = np.concatenate([np.arange(x.size, dtype=np.int64), low, high])
    values = np.concatenate([x, x[low] + period, x[high] - period])
    return index, values


def _concat(parts, n_cols):
    if not parts:
        return tuple(np.zeros(0, dtype=np.int64) for _ in range(n_cols))
    return tuple(np.concatenate([p[c] for p in parts]) for c in range(n_cols))


def ring_close(ua, ub, i: int, j: int, k, step: int, length: int, w: int) -> np.ndarray:
    """Test slide coincidence: the one rule both background methods apply.

    True where ``a`` (site ``i``) and ``b`` (site ``j``) lie within ``w`` ns of each
    other on the ring after slide ``k`` (int64, exact).
    """
    k = np.asarray(k, dtype=np.int64)
    pa = (ua + (k * i * step) % length) % length
    pb = (ub + (k * j * step) % length) % length
    d = (pb - pa) % length
    return np.minimum(d, length - d) <= w


# ---------------------------------------------------------------------------
# pairs
# ---------------------------------------------------------------------------
def zero_lag_pairs(a: SiteTriggers, b: SiteTriggers, w: int):
    """Same-template pairs with ``|t_b - t_a| <= w`` ns in real time: ``(slide=0, ia, ib)``."""
    parts = [(ia, ib) for ia, ib in _join(a.template, a.t_ns, b.template, b.t_ns, w)]
    ia, ib = _concat(parts, 2)
    return np.zeros(ia.shape, dtype=np.int64), ia, ib


def slide_pairs(a: SiteTriggers, b: SiteTriggers, i: int, j: int, w: int, step: int, length: int, n_slides: int):
    """Same-template pairs of sites ``i < j`` coincident in slides ``1..n_slides``, all at once.

    Returns ``(slide, ia, ib)`` int64 arrays. Requires ``n_slides (j - i) step <= length - step``
    and ``step > 2 w`` (checked by the caller), so each pair has at most one slide.
    """
    m = (j - i) * step
    qa = a.u % m
    qb = b.u % m
    shift = length % m
    parts = []
    # A pair's residue is (qa - qb) mod m when u_a >= u_b and (qa - qb + L) mod m otherwise.
    for wraps, values in ((False, qb), (True, (qb - shift) % m)):
        index, images = _with_images(values, m, w)
        for ia, jb in _join(a.template, qa, b.template[index], images, w):
            ib = index[jb]
            ua, ub = a.u[ia], b.u[ib]
            sel = (ua < ub) if wraps else (ua >= ub)
            ia, ib, ua, ub = ia[sel], ib[sel], ua[sel], ub[sel]
            d = ua - ub + (length if wraps else 0)
            k = (d + m // 2) // m
            ok = (k >= 1) & (k <= n_slides)
            ok[ok] = ring_close(ua[ok], ub[ok], i, j, k[ok], step, length, w)
            parts.append((k[ok], ia[ok], ib[ok]))
    return _concat(parts, 3)


def slide_pairs_loop(a: SiteTriggers, b: SiteTriggers, i: int, j: int, w: int, step: int, length: int, k: int):
    """Pairs of sites ``i < j`` coincident in slide ``k`` alone: shift, then join on the ring.

    The slide-by-slide reference for :func:`slide_pairs`; cost grows with the number of
    slides it is called for.
    """
    pa = (a.u + (k * i * step) % length) % length
    pb = (b.u + (k * j * step) % length) % length
    index, images = _with_images(pb, length, w)
    parts = []
    for ia, jb in _join(a.template, pa, b.template[index], images, w):
        ib = index[jb]
        ok = ring_close(a.u[ia], b.u[ib], i, j, np.full(ia.shape, k), step, length, w)
        parts.append((np.full(int(ok.sum()), k, dtype=np.int64), ia[ok], ib[ok]))
    return _concat(parts, 3)


# ---------------------------------------------------------------------------
# from pairs to coincidences of two or more sites
# ---------------------------------------------------------------------------
def _void_rows(rows: np.ndarray) -> np.ndarray:
    rows = np.ascontiguousarray(rows, dtype=np.int64)
    return rows.view(np.dtype((np.void, 8 * rows.shape[1]))).ravel()


def assemble(pairs: dict, n_sites: int, sizes) -> tuple[np.ndarray, np.ndarray]:
    """Coincidences of two or more sites from the pairs of every two sites.

    Parameters
    ----------
    pairs : dict
        ``(i, j) -> (slide, ia, ib)`` for every ``i < j``.
    n_sites : int
    sizes : sequence of int
        Triggers per site.

    Returns
    -------
    slide : int64 array, shape (n,)
    rows : int64 array, shape (n, n_sites)
        Trigger index per site, -1 where the site has no trigger in the coincidence.
        The order of the coincidences is not defined; :func:`cluster_by_slide` sets it.

    Notes
    -----
    A set of triggers from sites ``S`` is a coincidence when every two of them are a pair
    in the same slide. Only maximal sets are kept: a pair that is part of a coincident
    triple is not also reported on its own.
    """
    levels = {(i, j): (p[0], np.stack([p[1], p[2]], axis=1)) for (i, j), p in pairs.items()}
    current = dict(levels)
    for _ in range(3, n_sites + 1):
        grown = {}
        for sset, (k, idx) in current.items():
            first = sset[0]
            for new in range(sset[-1] + 1, n_sites):
                pk, pa, pb = pairs[(first, new)]
                key_p = pk * sizes[first] + pa
                order = np.argsort(key_p, kind="stable")
                key_sorted = key_p[order]
                key_q = k * sizes[first] + idx[:, 0]
                lo = np.searchsorted(key_sorted, key_q, side="left")
                hi = np.searchsorted(key_sorted, key_q, side="right")
                found = list(_expand(lo, hi))
                q, pos = _concat(found, 2)
                c = pb[order[pos]]
                ok = np.ones(q.shape, dtype=bool)
                for col, s in enumerate(sset[1:], 1):
                    sk, sa, sb = pairs[(s, new)]
                    have = _void_rows(np.stack([sk, sa, sb], axis=1))
                    want = _void_rows(np.stack([k[q], idx[q, col], c], axis=1))
                    ok &= np.isin(want, have)
                grown[sset + (new,)] = (k[q][ok], np.column_stack([idx[q][ok], c[ok]]))
        levels.update(grown)
        current = grown
    covered = {s: np.zeros(v[0].shape, dtype=bool) for s, v in levels.items()}
    for sset, (k, idx) in levels.items():
        if len(sset) < 3 or k.size == 0:
            continue
        for drop in range(len(sset)):
            sub = sset[:drop] + sset[drop + 1:]
            sk, sidx = levels[sub]
            keep_cols = [c for c in range(len(sset)) if c != drop]
            big = _void_rows(np.column_stack([k, idx[:, keep_cols]]))
            covered[sub] |= np.isin(_void_rows(np.column_stack([sk, sidx])), big)
    slides, rows = [], []
    for sset, (k, idx) in levels.items():
        if len(sset) == n_sites:  # nothing covers a coincidence of every site
            slides.append(k)
            rows.append(idx)
            continue
        free = ~covered[sset]
        r = np.full((int(free.sum()), n_sites), -1, dtype=np.int64)
        r[:, list(sset)] = idx[free]
        slides.append(k[free])
        rows.append(r)
    if len(rows) == 1:
        return slides[0], rows[0]
    slide = np.concatenate(slides) if slides else np.zeros(0, dtype=np.int64)
    rows_all = np.concatenate(rows) if rows else np.zeros((0, n_sites), dtype=np.int64)
    return slide, rows_all


def site_values(rows: np.ndarray, sites: list[SiteTriggers], field: str) -> np.ndarray:
    """``(n, n_sites)`` float64 values of a per-trigger field, NaN where a site is absent."""
    out = np.full(rows.shape, np.nan)
    for col, s in enumerate(sites):
        present = rows[:, col] >= 0
        out[present, col] = getattr(s, field)[rows[present, col]]
    return out


def reference_positions(rows: np.ndarray, slide: np.ndarray, sites: list[SiteTriggers], step: int, length: int):
    """Return the ring position, after its slide, of each coincidence's first site (int64 ns).

    The first listed site never moves.
    """
    u = np.full(rows.shape[0], -1, dtype=np.int64)
    for col in range(len(sites) - 1, -1, -1):
        present = rows[:, col] >= 0
        shift = (slide[present] * col * step) % length if length else 0
        u[present] = (sites[col].u[rows[present, col]] + shift) % max(length, 1)
    return u


def cluster_by_slide(slide: np.ndarray, time_ns: np.ndarray, value: np.ndarray, window: int,
                     rows: np.ndarray) -> np.ndarray:
    """Return the entries with no louder entry of the same slide within ``window`` ns.

    Indices ordered by slide, then time, then trigger rows.

    Equal values favour the earlier entry in that order. Exact integer time differences
    and an order set by the values alone, so clustering one slide alone or all slides
    together, from inputs in any order, gives the same survivors in the same order.
    """
    n = slide.shape[0]
    order = order_by_time(slide, time_ns, rows)
    s, t, v = slide[order], time_ns[order], value[order]
    keep = np.ones(n, dtype=bool)
    active = np.arange(n - 1, dtype=np.int64)
    d = 1
    while active.size:
        nxt = active + d
        near = (s[nxt] == s[active]) & (t[nxt] - t[active] <= window)
        a, b = active[near], nxt[near]
        louder_later = v[b] > v[a]
        keep[a[louder_later]] = False
        keep[b[~louder_later]] = False
        d += 1
        active = a[a + d < n]
    return order[keep]
