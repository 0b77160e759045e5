"""Injection populations: the sources whose signals are added to the data.

One row per simulated source, in a numpy structured array of :data:`INJECTION_DTYPE`.
Every density a parameter is drawn from is stated, because sensitive-volume estimates
re-weight the found injections by the density their distances were drawn from (each
row carries it in ``distance_density``).
"""

from __future__ import annotations

import math

import numpy as np

from .._validate import integer, positive_scalar, real_scalar
from ..segments import DURATION_MARGIN
from ..waveform import chirp_duration, isco_frequency

__all__ = ["INJECTION_DTYPE", "INJECTION_COLUMNS", "DISTANCE_DISTRIBUTIONS", "draw_injections",
           "injection_table", "longest_signal", "SPACING_MARGIN"]

#: Fields of an injection table (units in the comments).
INJECTION_DTYPE = np.dtype(
    [
        ("time", "f8"),  # geocentric coalescence time, GPS s
        ("m1", "f8"),  # component masses, solar masses
        ("m2", "f8"),
        ("spin1", "f8"),  # dimensionless spins along the orbital angular momentum, |spin| < 1
        ("spin2", "f8"),
        ("distance", "f8"),  # luminosity distance, Mpc
        ("ra", "f8"),  # right ascension, rad
        ("dec", "f8"),  # declination, rad
        ("inclination", "f8"),  # angle between orbital angular momentum and line of sight, rad
        ("polarisation", "f8"),  # polarisation angle psi, rad (the sites' convention)
        ("phase", "f8"),  # gravitational-wave phase at coalescence phi_c, rad
        ("distance_density", "f8"),  # density the distance was drawn from, at this distance, 1/Mpc
    ]
)

#: Column names of an injection table, in order.
INJECTION_COLUMNS: tuple[str, ...] = INJECTION_DTYPE.names

#: Names accepted by ``distance_distribution``.
DISTANCE_DISTRIBUTIONS = ("volume", "uniform", "log")

#: Seconds added to the longest signal to give the default (and smallest) spacing of
#: coalescence times: covers the search's whitening filter (``welch_duration`` = 4 s by
#: default, half of it on each side of a signal) and its clustering window (1 s).
SPACING_MARGIN = 8.0


def _range(name: str, value, *, positive: bool = False, lower_zero_ok: bool = False,
           bound: float | None = None) -> tuple[float, float]:
    """Check a fixed value ``x`` (-> (x, x)) or an interval ``(lo, hi)`` with ``lo <= hi``."""
    if np.ndim(value) == 0:
        lo = hi = real_scalar(name, value)
    else:
        arr = np.asarray(value, dtype=object)
        if arr.shape != (2,):
            raise ValueError(f"{name} must be a number or a (low, high) pair, got {value!r}")
        lo, hi = real_scalar(f"{name}[0]", arr[0]), real_scalar(f"{name}[1]", arr[1])
        if hi < lo:
            raise ValueError(f"{name} must be an increasing (low, high) range, got ({lo}, {hi})")
    if positive and not (lo > 0 or (lower_zero_ok and lo == 0 and hi > 0)):
        raise ValueError(f"{name} must be positive, got ({lo}, {hi})")
    if bound is not None and (abs(lo) >= bound or abs(hi) >= bound):
        raise ValueError(f"{name} must lie strictly between -{bound} and {bound}, got ({lo}, {hi})")
    return lo, hi


def longest_signal(m1, m2, f_low) -> float:
    """Longest time (s) in band from ``f_low`` to coalescence of binaries in the mass ranges.

    The lightest pair's 3.5PN chirp duration times the search's safety factor for
    aligned spins (:data:`chirpsift.segments.DURATION_MARGIN`).
    """
    (a, _), (b, _) = _range("m1", m1, positive=True), _range("m2", m2, positive=True)
    return float(chirp_duration(a, b, f_low)) * DURATION_MARGIN


def _draw_distance(rng, lo, hi, kind, n):
    u = rng.random(n)
    if kind == "volume":
        d = np.cbrt(lo**3 + u * (hi**3 - lo**3))
        dens = 3.0 * d**2 / (hi**3 - lo**3)
    elif kind == "uniform":
        d = lo + u * (hi - lo)
        dens = np.full(n, 1.0 / (hi - lo))
    else:
        d = lo * (hi / lo) ** u
        dens = 1.0 / (d * math.log(hi / lo))
    return d, dens


def draw_injections(n, *, m1, m2, chi1=(0.0, 0.0), chi2=(0.0, 0.0), distance, distance_distribution="volume",
                    start, end, f_low, spacing=None, seed=0):
    """Draw a population of simulated binaries with non-overlapping signals.

    Parameters
    ----------
    n : int
        Number of injections (at least 1).
    m1, m2 : float or (float, float)
        Component masses in solar masses: fixed, or uniform on ``[low, high]`` independently.
    chi1, chi2 : float or (float, float), optional
        Aligned dimensionless spins, fixed or uniform on ``[low, high]``, ``|chi| < 1``
        (default no spin).
    distance : (float, float)
        Luminosity-distance range in Mpc, ``0 <= low < high`` (``low > 0`` for ``"log"``).
    distance_distribution : {"volume", "uniform", "log"}, optional
        Density of the distance ``d`` on ``[low, high]``:
        ``"volume"`` ``p(d) = 3 d^2 / (high^3 - low^3)`` (uniform in Euclidean volume),
        ``"uniform"`` ``p(d) = 1 / (high - low)``,
        ``"log"`` ``p(d) = 1 / (d ln(high / low))``.
        The density at each drawn distance is stored in ``distance_density``.
    start, end : float
        GPS seconds: coalescence times lie in ``[start, end)``.
    f_low : float
        Frequency (Hz) from which signals will be added and searched for; it sets the
        longest signal, :func:`longest_signal`.
    spacing : float, optional
        Seconds between consecutive coalescence times; at least (and by default) the
        longest signal plus :data:`SPACING_MARGIN`, so that no two signals overlap in
        the filter.
    seed : int or numpy.random.Generator, optional
        Seed of :func:`numpy.random.default_rng`; the same seed gives the same set.

    Returns
    -------
    ndarray of :data:`INJECTION_DTYPE`, shape (n,)
        Sorted by ``time``. Fields: ``time`` (geocentric coalescence time, s), ``m1``,
        ``m2`` (Msun), ``spin1``, ``spin2``, ``distance`` (Mpc), ``ra``, ``dec``,
        ``inclination``, ``polarisation``, ``phase`` (rad), ``distance_density`` (1/Mpc).

    Notes
    -----
    Densities of the other parameters: sky position isotropic (``ra`` uniform on
    ``[0, 2 pi)``, ``sin(dec)`` uniform on ``[-1, 1]``); orientation isotropic
    (``cos(inclination)`` uniform on ``[-1, 1]``, ``polarisation`` uniform on
    ``[0, pi)``, the period of the antenna patterns in it); ``phase`` uniform on
    ``[0, 2 pi)``; masses and spins uniform on their ranges, independently.

    Times lie on a grid of step ``spacing`` shifted by a random offset (uniform on
    ``[0, (end - start) - (slots - 1) spacing)``, so all stay inside ``[start, end)``): of
    the ``slots = ceil((end - start) / spacing)`` grid points the ``n`` injections take
    ``n`` chosen at random without repetition, so the range must hold at least ``n``
    slots. A signal starts up to :func:`longest_signal` before its coalescence time:
    put ``start`` at least that far (plus the search's padding) into the data.

    References
    ----------
    .. [1] L. S. Finn and D. F. Chernoff, Phys. Rev. D 47, 2198 (1993), gr-qc/9301003
       (isotropic sky and orientation).
    .. [2] V. Tiwari, Class. Quantum Grav. 35, 145009 (2018), arXiv:1712.00482 (volume
       estimates re-weighted by the density injections were drawn from).

    Examples
    --------
    >>> import chirpsift
    >>> inj = chirpsift.draw_injections(4, m1=1.4, m2=(1.2, 1.6), distance=(10, 200), start=0, end=1000,
    ...                                 f_low=40.0)
    >>> inj.shape, bool(inj["time"][1] - inj["time"][0] >= 33)
    ((4,), True)
    """
    count = integer("n", n)
    m1r = _range("m1", m1, positive=True)
    m2r = _range("m2", m2, positive=True)
    c1r = _range("chi1", chi1, bound=1.0)
    c2r = _range("chi2", chi2, bound=1.0)
    kind = distance_distribution
    if not isinstance(kind, str) or kind not in DISTANCE_DISTRIBUTIONS:
        raise ValueError(f"distance_distribution must be one of {', '.join(map(repr, DISTANCE_DISTRIBUTIONS))}, "
                         f"got {kind!r}")
    if np.ndim(distance) == 0:
        raise ValueError(f"distance must be a (low, high) range in Mpc, got {distance!r}")
    d_lo, d_hi = _range("distance", distance, positive=True, lower_zero_ok=kind != "log")
    if not d_hi > d_lo:
        raise ValueError(f"distance must be a range with low < high (Mpc), got ({d_lo}, {d_hi})")
    t_start, t_end = real_scalar("start", start), real_scalar("end", end)
    if not t_end > t_start:
        raise ValueError(f"end={t_end} must be after start={t_start}")
    fl = positive_scalar("f_low", f_low)
    heaviest = float(isco_frequency(m1r[1], m2r[1]))
    if fl >= heaviest:
        raise ValueError(f"f_low={fl} Hz is at or above the ISCO frequency {heaviest:.4g} Hz of the heaviest "
                         f"binary (m1={m1r[1]}, m2={m2r[1]}): such signals have no inspiral in band")
    longest = longest_signal(m1r, m2r, fl)
    minimum = longest + SPACING_MARGIN
    step = minimum if spacing is None else positive_scalar("spacing", spacing)
    if step < minimum:
        raise ValueError(f"spacing={step} s is shorter than the longest signal ({longest:.4g} s from f_low={fl} Hz "
                         f"for m1={m1r[0]}, m2={m2r[0]}) plus a margin of {SPACING_MARGIN} s; use at least "
                         f"{minimum:.4g} s")
    span = t_end - t_start
    slots = int(math.ceil(span / step))  # grid points k * step < span
    if slots < count:
        raise ValueError(f"[start, end) = [{t_start}, {t_end}) holds only {slots} injections spaced {step:.4g} s "
                         f"apart, fewer than n={count}; widen the range or lower n")

    rng = np.random.default_rng(seed)
    out = np.zeros(count, dtype=INJECTION_DTYPE)
    offset = rng.random() * (span - (slots - 1) * step)  # keeps the last slot before end
    chosen = np.sort(rng.choice(slots, size=count, replace=False))
    out["time"] = t_start + offset + chosen * step
    out["m1"] = rng.uniform(*m1r, count)
    out["m2"] = rng.uniform(*m2r, count)
    out["spin1"] = rng.uniform(*c1r, count)
    out["spin2"] = rng.uniform(*c2r, count)
    out["distance"], out["distance_density"] = _draw_distance(rng, d_lo, d_hi, kind, count)
    out["ra"] = rng.uniform(0.0, 2.0 * np.pi, count)
    out["dec"] = np.arcsin(rng.uniform(-1.0, 1.0, count))
    out["inclination"] = np.arccos(rng.uniform(-1.0, 1.0, count))
    out["polarisation"] = rng.uniform(0.0, np.pi, count)
    out["phase"] = rng.uniform(0.0, 2.0 * np.pi, count)
    return out


def injection_table(injections, name: str = "injections") -> np.ndarray:
    """Check an injection table and return it unchanged.

    It must be a 1-D structured array with every field of :data:`INJECTION_DTYPE`
    (extra fields allowed), finite values, positive masses and distances, ``|spin| < 1``.
    """
    if not isinstance(injections, np.ndarray) or injections.dtype.names is None:
        raise TypeError(f"{name} must be a structured array with the fields of INJECTION_DTYPE, "
                        f"got {type(injections).__name__}")
    if injections.ndim != 1:
        raise ValueError(f"{name} must be 1-D, got shape {injections.shape}")
    missing = [f for f in INJECTION_COLUMNS if f not in injections.dtype.names]
    if missing:
        raise ValueError(f"{name} lacks the field(s) {', '.join(missing)}")
    if injections.size == 0:
        raise ValueError(f"{name} is empty")
    for field in INJECTION_COLUMNS:
        v = np.asarray(injections[field], dtype=np.float64)
        bad = ~np.isfinite(v)
        if field in ("m1", "m2", "distance", "distance_density"):
            bad |= ~(v > 0)
        elif field in ("spin1", "spin2"):
            bad |= ~(np.abs(v) < 1)
        if bad.any():
            i = int(np.argmax(bad))
            want = {"m1": "positive", "m2": "positive", "distance": "positive (Mpc)", "distance_density": "positive",
                    "spin1": "in (-1, 1)", "spin2": "in (-1, 1)"}.get(field, "finite")
            raise ValueError(f"{name}[{i}]['{field}'] must be {want}, got {v[i]}")
    return injections

