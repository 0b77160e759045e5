"""The match metric of TaylorF2 templates, and coordinates in which it is flat.

The TaylorF2 phase is linear in its post-Newtonian coefficients: with ``x = f / f_low``,

``Psi(f) = 2 pi f t_c - phi_c + sum_a lambda_a b_a(x)``,

over eight basis functions ``b_a`` (``x^(-5/3), x^(-1), x^(-2/3), x^(-1/3), ln x,
x^(1/3), x^(1/3) ln x, x^(2/3)``), each coefficient ``lambda_a`` a function of the
masses and aligned spins. For templates of equal amplitude shape the mismatch of
two nearby templates is, to second order (Owen 1996),

``1 - match = g_ab d(lambda_a) d(lambda_b)``,

``g_ab = (1/2) (J[b_a b_b] - J[b_a] J[b_b]) - (time term)``, projected over ``t_c``
and ``phi_c``, with ``J[q] = int q(f) f^(-7/3) / S(f) df / int f^(-7/3) / S(f) df``.
Because ``g`` does not depend on ``lambda``, the coordinates ``xi = W lambda`` with
``W^T W = g`` are globally flat: the mismatch is ``|d xi|^2`` everywhere (the
approach of Brown et al. 2012, from memory). Templates of a region form a curved
2-D (non-spinning) or 3- to 4-D (aligned-spin) surface in this 8-D space; placement
works on that surface.

References
----------
.. [1] Owen, B. J. 1996, PRD 53, 6749, arXiv:gr-qc/9511032.
.. [2] Owen, B. J. and Sathyaprakash, B. S. 1999, PRD 60, 022002, arXiv:gr-qc/9808076.
.. [3] Brown, D. A. et al. 2012, PRD 86, 084017, arXiv:1207.6406 (flat coordinates
   from the PN coefficients; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..reference.constants import T_SUN
from ..reference.waveform import taylorf2_coefficients
from ..spectrum import psd_on_grid

__all__ = ["projected_metric", "pn_coefficients", "FlatCoordinates", "flat_coordinates", "BASIS_NAMES"]

#: The basis functions of the phase, in the order of :func:`pn_coefficients`.
BASIS_NAMES = ("x^(-5/3)", "x^(-1)", "x^(-2/3)", "x^(-1/3)", "ln x", "x^(1/3)", "x^(1/3) ln x", "x^(2/3)")
#: Frequencies the moments are integrated over, log-spaced from f_low to the upper
#: cutoff. Doubling it changes the metric entries by less than 1e-6 (relative), for
#: both the analytic check of tests/test_bank_metric.py and a 30-2048 Hz design curve.
MOMENT_SAMPLES = 8192


def _basis(x: np.ndarray) -> np.ndarray:
    lx = np.log(x)
    c = np.cbrt(x)
    return np.stack([x ** (-5.0 / 3.0), 1.0 / x, 1.0 / (c * c), 1.0 / c, lx, c, c * lx, c * c])


def projected_metric(basis: np.ndarray, weight: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Metric of phase coefficients, projected over coalescence time and phase.

    Parameters
    ----------
    basis : ndarray, shape (n_basis, n_x)
        Phase basis functions at ``x`` (the phase is ``sum_a lambda_a basis[a]``).
    weight : ndarray, shape (n_x,)
        ``f^(-7/3) / S(f)`` at ``x`` (any scale): the SNR density of a TaylorF2 template.
    x : ndarray, shape (n_x,)
        Increasing dimensionless frequencies ``f / f_0``; the time coordinate is
        ``lambda_t = 2 pi f_0 t_c`` with basis ``x``.

    Returns
    -------
    ndarray, shape (n_basis, n_basis)
        ``g`` with ``1 - match = g_ab d(lambda_a) d(lambda_b)`` to second order.

    Notes
    -----
    With moments ``J[q]`` (weighted averages over the band), the metric before the time
    projection is ``gamma_ab = (J[psi_a psi_b] - J[psi_a] J[psi_b]) / 2`` over
    ``psi = (x, basis)`` (the phase projection is the subtraction of the means);
    projecting out the time coordinate ``0`` gives
    ``g_ij = gamma_ij - gamma_0i gamma_0j / gamma_00`` (Owen 1996; Owen &
    Sathyaprakash 1999, their moments ``J(q)``).

    References
    ----------
    .. [1] Owen, B. J. and Sathyaprakash, B. S. 1999, PRD 60, 022002, arXiv:gr-qc/9808076.

    Examples
    --------
    Newtonian and 1.5PN terms only, flat noise from 40 to 1000 Hz
    (``theta0, theta3`` coordinates):

    >>> import numpy as np
    >>> from chirpsift.bank.metric import projected_metric
    >>> x = np.geomspace(1.0, 25.0, 20001)
    >>> b = np.stack([0.6 * x ** (-5 / 3), -1.5 * x ** (-2 / 3)])
    >>> np.round(projected_metric(b, x ** (-7 / 3), x), 5)
    array([[ 0.00948, -0.01449],
           [-0.01449,  0.0231 ]])
    """
    psi = np.vstack([x[None, :], basis])
    # trapezoid weights in x
    dx = np.diff(x)
    q = np.zeros_like(x)
    q[:-1] += 0.5 * dx
    q[1:] += 0.5 * dx
    w = weight * q
    w = w / w.sum()
    mean = psi @ w
    centred = psi - mean[:, None]
    gamma = 0.5 * (centred * w) @ centred.T
    g = gamma[1:, 1:] - np.outer(gamma[0, 1:], gamma[0, 1:]) / gamma[0, 0]
    return 0.5 * (g + g.T)


def pn_coefficients(m1, m2, chi1, chi2, f_low: float) -> np.ndarray:
    """Coefficients ``lambda_a`` of the TaylorF2 phase on the basis :data:`BASIS_NAMES`.

    Parameters
    ----------
    m1, m2 : array_like
        Component masses (solar masses).
    chi1, chi2 : array_like
        Aligned dimensionless spins.
    f_low : float
        The frequency ``f_0`` the basis is scaled by (``x = f / f_0``), Hz.

    Returns
    -------
    ndarray, shape (8, n)
        The phase minus its time, phase and constant terms is ``lambda @ basis(x)``;
        constants (the ``ln`` parts that do not multiply ``f``) go to ``phi_c``.

    Notes
    -----
    From ``Psi = 3 / (128 eta v^5) sum_k psi_k v^k`` with ``v = (pi M f)^(1/3)``
    (coefficients ``psi_k``: :func:`chirpsift.reference.taylorf2_coefficients`, with
    their references), ``v^(k-5) = (pi M f_0)^((k-5)/3) x^((k-5)/3)``; the 2.5PN term
    ``psi_5 (1 + 3 ln v)`` contributes ``psi_5 ln x`` and the 3PN
    ``-(6848/21) ln(4 v) v`` contributes ``-(6848/63) (pi M f_0)^(1/3) x^(1/3) ln x``
    plus a multiple of ``x^(1/3)``.

    Examples
    --------
    >>> from chirpsift.bank.metric import pn_coefficients
    >>> lam = pn_coefficients(1.4, 1.4, 0.0, 0.0, 40.0)
    >>> round(float(lam[0, 0]), 1)  # (3/5) theta0 of Owen & Sathyaprakash 1999
    3749.2
    """
    m1, m2, chi1, chi2 = (np.atleast_1d(np.asarray(a, dtype=np.float64)) for a in (m1, m2, chi1, chi2))
    m1, m2, chi1, chi2 = np.broadcast_arrays(m1, m2, chi1, chi2)
    m = m1 + m2
    eta = m1 * m2 / (m * m)
    psi = taylorf2_coefficients(m1, m2, chi1, chi2)
    u = np.pi * m * T_SUN * f_low  # v_0^3
    pre = 3.0 / (128.0 * eta)
    lam = np.empty((8,) + m.shape)
    lam[0] = pre * u ** (-5.0 / 3.0) * psi[0]
    lam[1] = pre / u * psi[2]
    lam[2] = pre * u ** (-2.0 / 3.0) * psi[3]
    lam[3] = pre * u ** (-1.0 / 3.0) * psi[4]
    lam[4] = pre * psi[5]
    log_coef = 6848.0 / 21.0
    lam[5] = pre * np.cbrt(u) * (psi[6] - log_coef * (np.log(4.0) + np.log(u) / 3.0))
    lam[6] = -pre * np.cbrt(u) * log_coef / 3.0
    lam[7] = pre * u ** (2.0 / 3.0) * psi[7]
    return lam


@dataclass(frozen=True)
class FlatCoordinates:
    """Map from template parameters to coordinates where the mismatch is ``|d xi|^2``.

    Attributes
    ----------
    f_low, f_high : float
        Band of the metric (Hz).
    metric : ndarray, shape (8, 8)
        :func:`projected_metric` of the phase basis under the noise curve.
    transform : ndarray, shape (r, 8)
        ``W`` with ``W^T W = metric`` (``r`` = the metric's numerical rank).
    """

    f_low: float
    f_high: float
    metric: np.ndarray
    transform: np.ndarray

    def __call__(self, m1, m2, chi1=0.0, chi2=0.0) -> np.ndarray:
        """Flat coordinates ``xi``, shape ``(n, r)``, of templates ``(m1, m2, chi1, chi2)``."""
        return (self.transform @ pn_coefficients(m1, m2, chi1, chi2, self.f_low)).T


#: Eigenvalues of the metric below this fraction of the largest are numerically zero
#: (directions the band cannot resolve); 1e-14 keeps every direction whose
#: mismatch per unit coefficient is above round-off.
_RANK_TOLERANCE = 1e-14


def flat_coordinates(psd, f_low: float, f_high: float) -> FlatCoordinates:
    """Flat coordinates for templates observed from ``f_low`` to ``f_high`` in noise ``psd``.

    Parameters
    ----------
    psd : str, callable or (freqs, values)
        Noise curve, as :func:`chirpsift.spectrum.psd_on_grid` takes it.
    f_low, f_high : float
        Band (Hz). Templates that end earlier (ISCO below ``f_high``) have a metric a
        little smaller than this one, so a bank laid out with it is a little denser
        than it need be there, never sparser.

    Returns
    -------
    FlatCoordinates

    Examples
    --------
    >>> from chirpsift.bank.metric import flat_coordinates
    >>> xi = flat_coordinates("gen2-zero-detuned", 30.0, 2048.0)
    >>> a, b = xi(1.4, 1.4), xi(1.41, 1.39)
    >>> float(((a - b) ** 2).sum()) < 0.03   # mismatch of nearby templates
    True
    """
    x = np.geomspace(1.0, f_high / f_low, MOMENT_SAMPLES)
    f = x * f_low
    s = _psd_at(psd, f)
    with np.errstate(divide="ignore"):
        weight = np.where(np.isfinite(s) & (s > 0), f ** (-7.0 / 3.0) / np.where(s > 0, s, 1.0), 0.0)
    if not weight.any():
        raise ValueError(f"psd is infinite over the whole band [{f_low}, {f_high}] Hz")
    g = projected_metric(_basis(x), weight, x)
    vals, vecs = np.linalg.eigh(g)
    keep = vals > _RANK_TOLERANCE * vals.max()
    transform = (np.sqrt(vals[keep])[:, None] * vecs[:, keep].T)[::-1]
    return FlatCoordinates(float(f_low), float(f_high), g, transform)


def _psd_at(psd, f: np.ndarray) -> np.ndarray:
    """Evaluate the PSD at the moment frequencies.

    On a uniform grid by the one rule that reads a PSD
    (:func:`chirpsift.spectrum.psd_on_grid`), then linearly interpolated (the grid's
    spacing, ``f_low / 64``, is far finer than the curve's features).
    """
    df = f[0] / 64.0
    n = int(np.ceil(f[-1] / df)) + 2
    grid = psd_on_grid(psd, df, n)
    return np.interp(f, np.arange(n) * df, grid)
