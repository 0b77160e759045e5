"""Deterministic benchmark banks: many templates spread over a mass range, not a covering bank."""

from __future__ import annotations

import math

import numpy as np

from .._validate import integer
from ..bank import Bank

__all__ = ["component_mass_bank", "total_mass_bank"]

_GOLDEN = (math.sqrt(5.0) - 1.0) / 2.0


def _weyl(k: int) -> np.ndarray:
    """``k`` points of the golden-ratio (Weyl) sequence in ``[0, 1)``, deterministic."""
    return np.mod((np.arange(k) + 0.5) * _GOLDEN, 1.0)


def component_mass_bank(k: int, m_min: float, m_max: float) -> Bank:
    """Build a non-spinning bank of ``k`` templates with both components in ``[m_min, m_max]``.

    Parameters
    ----------
    k : int
        Number of templates (>= 1).
    m_min, m_max : float
        Component mass range, solar masses (``0 < m_min <= m_max``).

    Returns
    -------
    chirpsift.Bank
        ``m1 >= m2``, chirp masses uniformly spaced from that of ``(m_min, m_min)`` to
        that of ``(m_max, m_max)``; at each chirp mass the mass ratio is placed inside its
        allowed interval by the golden-ratio sequence, so the bank is deterministic.

    Notes
    -----
    A benchmark bank, not a covering one: spacing is not chosen from a match metric.
    For a chirp mass ``Mc`` and ratio ``q = m2 / m1 <= 1``,
    ``m1 = Mc (1 + q)^(1/5) q^(-3/5)`` decreases and ``m2 = q m1`` increases with
    ``q``, so the constraints ``m1 <= m_max`` and ``m2 >= m_min`` give
    ``q in [q_lo(Mc), 1]``; ``q_lo`` is found by bisection.

    Examples
    --------
    >>> from chirpsift.benchmarks import component_mass_bank
    >>> b = component_mass_bank(4, 1.2, 2.0)
    >>> len(b), bool(b.m2.min() >= 1.2 - 1e-12), bool(b.m1.max() <= 2.0 + 1e-12)
    (4, True, True)
    """
    k = integer("k", k)
    lo, hi = float(m_min), float(m_max)
    if not (0 < lo <= hi and math.isfinite(hi)):
        raise ValueError(f"need 0 < m_min <= m_max (solar masses), got m_min={m_min!r}, m_max={m_max!r}")
    ends = Bank([lo, hi], [lo, hi]).mchirp
    mc = np.linspace(ends[0], ends[1], k)

    def m1_of(q):
        return mc * (1.0 + q) ** 0.2 * q**-0.6

    # bisection in log q on [1e-6, 1] for the smallest q meeting both constraints
    a = np.full(k, math.log(1e-6))
    b = np.zeros(k)
    for _ in range(80):
        mid = 0.5 * (a + b)
        q = np.exp(mid)
        m1 = m1_of(q)
        ok = (m1 <= hi) & (q * m1 >= lo)
        b = np.where(ok, mid, b)
        a = np.where(ok, a, mid)
    q_lo = np.minimum(np.exp(b), 1.0)
    q = q_lo + _weyl(k) * (1.0 - q_lo)
    m1 = np.clip(m1_of(q), lo, hi)
    m2 = np.clip(q * m1_of(q), lo, hi)
    return Bank(np.maximum(m1, m2), np.minimum(m1, m2))


def total_mass_bank(k: int, mtotal_min: float, mtotal_max: float, m_min: float = 1.0) -> Bank:
    """Build a non-spinning bank of ``k`` templates spanning a total-mass range.

    Parameters
    ----------
    k : int
        Number of templates (>= 1).
    mtotal_min, mtotal_max : float
        Total mass range, solar masses; ``mtotal_min >= 2 m_min``.
    m_min : float, optional
        Smallest component mass (solar masses).

    Returns
    -------
    chirpsift.Bank
        Total masses uniformly spaced in ``log M``; the mass ratio at each is placed
        in ``[m_min / (M - m_min), 1]`` by the golden-ratio sequence; ``m1 >= m2``.

    Examples
    --------
    >>> from chirpsift.benchmarks import total_mass_bank
    >>> b = total_mass_bank(3, 2.0, 40.0)
    >>> [round(float(m), 6) for m in b.mtotal]
    [2.0, 8.944272, 40.0]
    """
    k = integer("k", k)
    lo, hi, mm = float(mtotal_min), float(mtotal_max), float(m_min)
    if not (mm > 0 and 2 * mm <= lo <= hi and math.isfinite(hi)):
        raise ValueError(
            "need 0 < 2 m_min <= mtotal_min <= mtotal_max (solar masses), "
            f"got m_min={m_min!r}, mtotal_min={mtotal_min!r}, mtotal_max={mtotal_max!r}"
        )
    mt = np.exp(np.linspace(math.log(lo), math.log(hi), k))
    q_lo = np.minimum(mm / (mt - mm), 1.0)
    q = q_lo + _weyl(k) * (1.0 - q_lo)
    m2 = np.maximum(mt * q / (1.0 + q), mm)
    m1 = mt - m2
    return Bank(np.maximum(m1, m2), np.minimum(m1, m2))
