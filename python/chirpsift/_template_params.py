"""Template parameters as every kernel takes them.

One rule for masses, spins, the PN order and the upper frequency, shared by
:func:`chirpsift.taylorf2` and the fused kernel's :func:`chirpsift.prepare_bank`.
"""

from __future__ import annotations

import numpy as np

from . import _core
from ._validate import broadcast, integer, real_array

__all__ = ["masses", "spins", "phase_order", "template_arrays"]


def masses(m1, m2):
    """``m1``, ``m2`` as float64 arrays (0-d or 1-d), positive and finite (solar masses)."""
    a = real_array("m1", m1, ndim=range(0, 2), finite=False)
    b = real_array("m2", m2, ndim=range(0, 2), finite=False)
    for name, v in (("m1", a), ("m2", b)):
        bad = ~(np.isfinite(v) & (v > 0))
        if bad.any():
            first = v.reshape(-1)[np.argmax(bad.reshape(-1))]
            raise ValueError(f"{name} must be positive and finite (solar masses), got {first}")
    return a, b


def spins(chi1, chi2):
    """``chi1``, ``chi2`` as float64 arrays with ``|chi| < 1``."""
    out = []
    for name, c in (("chi1", chi1), ("chi2", chi2)):
        v = real_array(name, c, ndim=range(0, 2), finite=False)
        bad = ~(np.abs(v) < 1)
        if bad.any():
            raise ValueError(f"{name} must satisfy |{name}| < 1, got {v.reshape(-1)[np.argmax(bad.reshape(-1))]}")
        out.append(v)
    return out


def phase_order(order) -> int:
    """Return the PN order of the phase as twice the PN order, 0..7."""
    p = integer("phase_order", order, minimum=0)
    if p > 7:
        raise ValueError(f"phase_order must be 0..7 (twice the PN order), got {p}")
    return p


def template_arrays(m1, m2, chi1, chi2, *, f_low, f_high=None):
    """Broadcast template parameters to ``K`` templates.

    Parameters
    ----------
    m1, m2, chi1, chi2 : float or array_like
        Component masses (solar masses) and aligned spins, broadcast together.
    f_low : float
        Lower frequency cutoff (Hz), already checked positive.
    f_high : float or array_like, optional
        Upper cutoffs (Hz, exclusive), one or one per template; default each
        template's Schwarzschild ISCO frequency (from the core).

    Returns
    -------
    m1, m2, chi1, chi2, f_high : ndarray of float64, shape (K,)
        C-contiguous, with ``f_high > f_low`` for every template.
    """
    a, b = masses(m1, m2)
    c1, c2 = spins(chi1, chi2)
    arrays = broadcast(("m1", "m2", "chi1", "chi2"), (a, b, c1, c2))
    m1v, m2v, c1v, c2v = (np.ascontiguousarray(x.reshape(-1), dtype=np.float64) for x in arrays)
    if f_high is None:
        fh = _core.isco_frequency(np.ascontiguousarray(m1v + m2v))
    else:
        fh = real_array("f_high", f_high, ndim=range(0, 2))
        try:
            fh = np.ascontiguousarray(np.broadcast_to(fh, m1v.shape), dtype=np.float64)
        except ValueError:
            raise ValueError(f"f_high must be a scalar or hold one value per template ({m1v.shape[0]}), "
                             f"got shape {fh.shape}") from None
    bad = ~(fh > f_low)
    if bad.any():
        i = int(np.argmax(bad))
        raise ValueError(f"f_high must exceed f_low={f_low} Hz for every template, got {fh[i]} Hz (template {i})")
    return m1v, m2v, c1v, c2v, fh
