"""A region of source parameters, and the uniform measure points are drawn from.

Component-mass and aligned-spin ranges, with optional total-mass and mass-ratio cuts.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._validate import real_scalar

__all__ = ["Region", "heavier_first"]

_SPIN_LIMIT = 1.0


def _range(name: str, value, *, positive: bool = False, spin: bool = False) -> tuple[float, float]:
    try:
        lo, hi = value
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a (lo, hi) pair, got {value!r}") from None
    lo = real_scalar(f"{name}[0]", lo)
    hi = real_scalar(f"{name}[1]", hi)
    if not (math.isfinite(lo) and math.isfinite(hi)):
        raise ValueError(f"{name} must be finite, got {value!r}")
    if hi < lo:
        raise ValueError(f"{name} is inverted: lo={lo!r} > hi={hi!r}")
    if positive and lo <= 0:
        raise ValueError(f"{name} must be positive (solar masses), got {value!r}")
    if spin and not (-_SPIN_LIMIT < lo and hi < _SPIN_LIMIT):
        raise ValueError(f"{name} must lie inside (-1, 1), got {value!r}")
    return lo, hi


def _chirp_times(m1, m2):
    """``(1 / (eta M^(5/3)), 1 / (eta M^(2/3)))``: the chirp times tau0, tau3 without their constant factors."""
    total = m1 + m2
    eta = m1 * m2 / (total * total)
    return 1.0 / (eta * total ** (5.0 / 3.0)), 1.0 / (eta * total ** (2.0 / 3.0))


def _draw_until(n: int, draw, attempts: int):
    """Return the first ``n`` binaries kept from calls of ``draw()``, heavier first.

    ``draw()`` returns binaries ``(m1, m2, chi1, chi2)`` and a mask of those to keep; it
    is called until ``n`` are kept or ``attempts`` calls are made.
    """
    parts, have = [], 0
    for _ in range(attempts):
        drawn, keep = draw()
        parts.append(tuple(x[keep] for x in drawn))
        have += int(keep.sum())
        if have >= n:
            break
    drawn = np.stack([np.concatenate([p[i] for p in parts])[:n] for i in range(4)])
    return tuple(heavier_first(drawn))


def heavier_first(p: np.ndarray) -> np.ndarray:
    """Label binaries so the first component is the heavier, the spins following their masses.

    Parameters
    ----------
    p : ndarray, shape (4, n)
        Rows ``m1, m2, chi1, chi2``.

    Returns
    -------
    ndarray, shape (4, n)
        A new array; TaylorF2 templates do not depend on the labelling.

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift.bank.region import heavier_first
    >>> heavier_first(np.array([[1.0], [2.0], [0.1], [0.2]]))[:, 0].tolist()
    [2.0, 1.0, 0.2, 0.1]
    """
    p = np.array(p, dtype=np.float64)
    swap = p[1] > p[0]
    p[[0, 1]] = np.where(swap, p[[1, 0]], p[[0, 1]])
    p[[2, 3]] = np.where(swap, p[[3, 2]], p[[2, 3]])
    return p


@dataclass(frozen=True)
class Region:
    """A region of binaries: ``m1``, ``m2`` in ranges, aligned spins ``chi1``, ``chi2`` in ranges.

    Parameters
    ----------
    m1, m2 : (float, float)
        Component-mass ranges (solar masses). A binary is in the region when its masses,
        in either labelling, fall in them (with the spins labelled alike).
    chi1, chi2 : (float, float), optional
        Ranges of the dimensionless spin components along the orbital angular momentum,
        inside (-1, 1). Default (0, 0): non-spinning.
    mtotal : (float, float), optional
        Total-mass cut (solar masses).
    mass_ratio : (float, float), optional
        Cut on ``q = m_heavier / m_lighter >= 1``.

    Raises
    ------
    ValueError
        An empty, inverted or non-finite range, a non-positive mass, a spin bound outside
        (-1, 1), or cuts that leave nothing of the mass box.

    Examples
    --------
    >>> from chirpsift.bank import Region
    >>> r = Region(m1=(1.0, 3.0), m2=(1.0, 3.0))
    >>> r.spinning
    False
    >>> m1, m2, chi1, chi2 = r.sample(4, seed=0)
    >>> bool(((m1 >= 1) & (m1 <= 3)).all())
    True
    """

    m1: tuple[float, float]
    m2: tuple[float, float]
    chi1: tuple[float, float] = (0.0, 0.0)
    chi2: tuple[float, float] = (0.0, 0.0)
    mtotal: tuple[float, float] | None = None
    mass_ratio: tuple[float, float] | None = None

    def __post_init__(self):
        object.__setattr__(self, "m1", _range("m1", self.m1, positive=True))
        object.__setattr__(self, "m2", _range("m2", self.m2, positive=True))
        object.__setattr__(self, "chi1", _range("chi1", self.chi1, spin=True))
        object.__setattr__(self, "chi2", _range("chi2", self.chi2, spin=True))
        if self.mtotal is not None:
            object.__setattr__(self, "mtotal", _range("mtotal", self.mtotal, positive=True))
        if self.mass_ratio is not None:
            q = _range("mass_ratio", self.mass_ratio, positive=True)
            if q[1] < 1.0:
                raise ValueError(f"mass_ratio is m_heavier / m_lighter >= 1, got {self.mass_ratio!r}")
            object.__setattr__(self, "mass_ratio", q)
        m1, m2, _, _ = self.sample(4096, seed=0, strict=False)
        if m1.size == 0:
            raise ValueError(f"the cuts mtotal={self.mtotal!r} and mass_ratio={self.mass_ratio!r} leave nothing of "
                             f"m1={self.m1!r}, m2={self.m2!r}")

    @property
    def spinning(self) -> bool:
        """Whether any spin range has width."""
        return self.chi1 != (0.0, 0.0) or self.chi2 != (0.0, 0.0)

    @property
    def total_mass_range(self) -> tuple[float, float]:
        """Smallest and largest total mass in the region (solar masses)."""
        lo, hi = self.m1[0] + self.m2[0], self.m1[1] + self.m2[1]
        if self.mtotal is not None:
            lo, hi = max(lo, self.mtotal[0]), min(hi, self.mtotal[1])
        return lo, hi

    def _cuts(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        ok = np.ones(a.shape, dtype=bool)
        if self.mtotal is not None:
            t = a + b
            ok &= (t >= self.mtotal[0]) & (t <= self.mtotal[1])
        if self.mass_ratio is not None:
            q = np.maximum(a, b) / np.minimum(a, b)
            ok &= (q >= self.mass_ratio[0]) & (q <= self.mass_ratio[1])
        return ok

    def contains(self, m1, m2, chi1=0.0, chi2=0.0) -> np.ndarray:
        """Whether binaries are in the region, in either labelling of their components."""
        m1, m2, chi1, chi2 = np.broadcast_arrays(*(np.asarray(x, dtype=np.float64) for x in (m1, m2, chi1, chi2)))

        def inside(a, b, sa, sb):
            return ((a >= self.m1[0]) & (a <= self.m1[1]) & (b >= self.m2[0]) & (b <= self.m2[1])
                    & (sa >= self.chi1[0]) & (sa <= self.chi1[1]) & (sb >= self.chi2[0]) & (sb <= self.chi2[1]))

        return (inside(m1, m2, chi1, chi2) | inside(m2, m1, chi2, chi1)) & self._cuts(m1, m2)

    def sample(self, n: int, *, seed=0, strict: bool = True):
        """Draw binaries uniformly in component masses and spins, then apply the cuts.

        Parameters
        ----------
        n : int
            Number of binaries wanted.
        seed : int or numpy.random.Generator, optional
            Random state; the same seed gives the same points.
        strict : bool, optional
            Keep drawing until ``n`` binaries pass the cuts (default); otherwise return
            those of one draw of ``n``.

        Returns
        -------
        m1, m2, chi1, chi2 : ndarray
            Each of length ``n`` (``strict``), labelled so ``m1 >= m2`` (spins alike).
        """
        rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)

        def draw():
            a = rng.uniform(*self.m1, n)
            b = rng.uniform(*self.m2, n)
            sa = rng.uniform(*self.chi1, n)
            sb = rng.uniform(*self.chi2, n)
            return (a, b, sa, sb), self._cuts(a, b)

        return _draw_until(n, draw, 1000 if strict else 1)

    def sample_in_chirp_times(self, n: int, *, seed=0):
        """Draw binaries uniformly in the chirp times ``(tau0, tau3)`` and spins, inside the region.

        The chirp times (Sathyaprakash 1994, PRD 50, R7111; citation from memory) are, up to constant factors,
        ``u = 1 / (eta M^(5/3))`` and ``v = 1 / (eta M^(2/3))``; the non-spinning metric is
        nearly constant in them, so points uniform in them are near uniform in the
        template space's volume, where points uniform in the component masses leave the
        light corner, which holds much of that volume in little mass area, thinly drawn.
        Draws ``(u, v)`` uniformly over the bounds of the region's image (its extremes lie
        on the mass box's boundary: neither has a stationary point inside), maps them to
        masses, labels the pair either way at random with each spin uniform in its range,
        and keeps what lies in the region.

        Parameters
        ----------
        n : int
            Number of binaries.
        seed : int or numpy.random.Generator, optional

        Returns
        -------
        m1, m2, chi1, chi2 : ndarray
            Each of length ``n``, labelled so ``m1 >= m2`` (spins alike).
        """
        rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
        edge = np.linspace(0.0, 1.0, 1025)
        (a0, a1), (b0, b1) = self.m1, self.m2
        box_a = np.concatenate([a0 + (a1 - a0) * edge, a0 + (a1 - a0) * edge, np.full(edge.size, a0),
                                np.full(edge.size, a1)])
        box_b = np.concatenate([np.full(edge.size, b0), np.full(edge.size, b1), b0 + (b1 - b0) * edge,
                                b0 + (b1 - b0) * edge])
        u_box, v_box = _chirp_times(box_a, box_b)
        (u_lo, u_hi), (v_lo, v_hi) = (u_box.min(), u_box.max()), (v_box.min(), v_box.max())

        def draw():
            u = rng.uniform(u_lo, u_hi, 4 * n)
            v = rng.uniform(v_lo, v_hi, 4 * n)
            total = v / u
            eta = 1.0 / (u * total ** (5.0 / 3.0))
            root = np.sqrt(np.clip(1.0 - 4.0 * eta, 0.0, None))
            heavy, light = 0.5 * total * (1.0 + root), 0.5 * total * (1.0 - root)
            swap = rng.random(4 * n) < 0.5
            a, b = np.where(swap, light, heavy), np.where(swap, heavy, light)
            sa = rng.uniform(*self.chi1, 4 * n)
            sb = rng.uniform(*self.chi2, 4 * n)
            return (a, b, sa, sb), (eta <= 0.25) & self.contains(a, b, sa, sb)

        return _draw_until(n, draw, 10_000)

    def as_dict(self) -> dict:
        """Return the region as plain lists (for file metadata and JSON)."""
        out = {"m1": list(self.m1), "m2": list(self.m2), "chi1": list(self.chi1), "chi2": list(self.chi2)}
        if self.mtotal is not None:
            out["mtotal"] = list(self.mtotal)
        if self.mass_ratio is not None:
            out["mass_ratio"] = list(self.mass_ratio)
        return out
