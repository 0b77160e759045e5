"""TaylorF2 inspiral templates and the time-frequency facts used to place them.

A numpy API over the core's ``waveform`` module.
"""

from __future__ import annotations

import numpy as np

from . import _core
from ._validate import broadcast, check_allocation, dtype_choice, finite_output, integer, positive_scalar
from ._template_params import masses, phase_order as _order, template_arrays

__all__ = ["taylorf2", "chirp_duration", "isco_frequency", "T_SUN", "MPC", "C_SI"]

#: G M_sun / c^3 in seconds (IAU 2015 Resolution B3 nominal solar mass parameter).
T_SUN = _core.T_SUN
#: One megaparsec in metres.
MPC = _core.MPC
#: Speed of light in m/s.
C_SI = _core.C_SI


def isco_frequency(m1, m2):
    """Gravitational-wave frequency at the Schwarzschild innermost stable circular orbit.

    Parameters
    ----------
    m1, m2 : float or array_like
        Component masses in solar masses (broadcast).

    Returns
    -------
    float or ndarray
        ``f_ISCO = 1 / (6^(3/2) pi M T_sun)`` in Hz, twice the orbital frequency at
        ``r = 6 G M / c^2`` (about 4400 Hz / (M / Msun)).
    """
    a, b = masses(m1, m2)
    m = broadcast(("m1", "m2"), (a, b))
    total = np.ascontiguousarray((m[0] + m[1]).reshape(-1))
    out = _core.isco_frequency(total).reshape(m[0].shape)
    return float(out) if out.ndim == 0 else out


def chirp_duration(m1, m2, f_low, phase_order=7):
    """Time from frequency ``f_low`` to coalescence of a non-spinning binary.

    Parameters
    ----------
    m1, m2 : float or array_like
        Component masses in solar masses (broadcast).
    f_low : float
        Starting gravitational-wave frequency in Hz.
    phase_order : int, optional
        Highest power ``v^k`` kept in the TaylorT2 series (7 = 3.5PN, 0 = Newtonian).

    Returns
    -------
    float or ndarray
        ``t_c - t(f_low) = 5 M / (256 eta v^8) sum_k tau_k v^k`` in seconds,
        ``v = (pi M f_low)^(1/3)``.

    References
    ----------
    .. [1] B. S. Sathyaprakash, Phys. Rev. D 50, R7111 (1994) (chirp times).
    .. [2] A. Buonanno, B. R. Iyer, E. Ochsner, Y. Pan and B. S. Sathyaprakash,
       Phys. Rev. D 80, 084043 (2009), arXiv:0907.0700 (TaylorT2 time to 3.5PN).

    Examples
    --------
    >>> import chirpsift
    >>> round(chirpsift.chirp_duration(1.4, 1.4, 40.0, phase_order=4), 2)
    25.43
    """
    a, b = masses(m1, m2)
    fl = positive_scalar("f_low", f_low)
    m = broadcast(("m1", "m2"), (a, b))
    m1v, m2v = (np.ascontiguousarray(x.reshape(-1)) for x in m)
    above = fl >= _core.isco_frequency(np.ascontiguousarray(m1v + m2v))
    if above.any():
        i = int(np.argmax(above))
        raise ValueError(f"f_low={fl} Hz is at or above the ISCO frequency of m1={m1v[i]}, m2={m2v[i]}: no inspiral from there")
    out = _core.chirp_duration(m1v, m2v, fl, _order(phase_order)).reshape(m[0].shape)
    finite_output(out, "m1, m2 or f_low", " (parameters too extreme for the post-Newtonian series)")
    return float(out) if out.ndim == 0 else out


def taylorf2(m1, m2, chi1=0.0, chi2=0.0, *, f_low, df, n_freq, f_high=None, distance=1.0, phase_order=7, dtype=np.complex64):
    """Frequency-domain TaylorF2 inspiral templates.

    Parameters
    ----------
    m1, m2 : float or array_like
        Component masses in solar masses.
    chi1, chi2 : float or array_like, optional
        Dimensionless spins along the orbital angular momentum, ``|chi| < 1``.
        All four broadcast to ``K`` templates.
    f_low : float
        Lowest frequency (Hz) of the templates; bins below are zero.
    df : float
        Frequency spacing in Hz (``1 / segment duration``).
    n_freq : int
        Number of bins, ``k = 0 .. n_freq - 1`` at ``f = k df``.
    f_high : float or array_like, optional
        Templates are zero at and above this frequency (Hz); default the
        Schwarzschild ISCO frequency of each template's total mass.
    distance : float, optional
        Luminosity distance in Mpc of an optimally oriented source (overhead, face on).
    phase_order : int, optional
        Highest power ``v^k`` of the phase kept (7 = 3.5PN).
    dtype : {numpy.complex64, numpy.complex128}, optional
        Output precision. The phase is always accumulated in float64.

    Returns
    -------
    ndarray, shape (K, n_freq)
        ``h~(f) = A f^(-7/6) exp(-i Psi(f))`` with ``t_c = 0`` and ``phi_c = 0``, in
        strain per Hz, so a matched filter against data peaks at the coalescence time.

    Notes
    -----
    ``A = sqrt(5/24) pi^(-2/3) (c / D) (G Mc / c^3)^(5/6)``, the Newtonian
    stationary-phase amplitude of an optimally oriented source. The phase is

    ``Psi(f) = -pi/4 + 3 / (128 eta v^5) sum_k psi_k v^k``, ``v = (pi G M f / c^3)^(1/3)``,

    with the non-spinning coefficients to 3.5PN (``psi_5`` carries ``1 + 3 ln v``,
    ``psi_6`` carries ``ln(4 v)``) and aligned-spin corrections: spin-orbit at
    1.5, 2.5, 3 and 3.5PN, spin-spin at 2PN (including the self-spin,
    quadrupole-monopole terms of black holes) and 3PN.

    The generator evaluates the exact phase at four nodes per block of up to 2048 bins
    and steps a cubic through them with a complex rotation recurrence; block widths
    keep the interpolation error below 1e-6 rad (checked against the direct formula in
    the tests, and available in :func:`chirpsift.reference.taylorf2`).

    References
    ----------
    .. [1] A. Buonanno, B. R. Iyer, E. Ochsner, Y. Pan and B. S. Sathyaprakash,
       Phys. Rev. D 80, 084043 (2009), arXiv:0907.0700.
    .. [2] K. G. Arun, B. R. Iyer, B. S. Sathyaprakash and P. A. Sundararajan,
       Phys. Rev. D 71, 084008 (2005), gr-qc/0411146.
    .. [3] E. Poisson and C. M. Will, Phys. Rev. D 52, 848 (1995), gr-qc/9502040
       (1.5PN spin-orbit, 2PN spin-spin).
    .. [4] S. Khan et al., Phys. Rev. D 93, 044007 (2016), arXiv:1508.07253, appendix B
       (compilation of the aligned-spin terms to 3.5PN).
    .. [5] C. Cutler and E. E. Flanagan, Phys. Rev. D 49, 2658 (1994) (amplitude).

    Examples
    --------
    >>> import numpy as np, chirpsift
    >>> h = chirpsift.taylorf2([1.4, 1.6], 1.3, f_low=20.0, df=1 / 64, n_freq=64 * 1024 + 1)
    >>> h.shape, h.dtype
    ((2, 65537), dtype('complex64'))
    """
    fl = positive_scalar("f_low", f_low)
    m1v, m2v, c1v, c2v, fh = template_arrays(m1, m2, chi1, chi2, f_low=fl, f_high=f_high)
    dfv = positive_scalar("df", df)
    nf = integer("n_freq", n_freq)
    dist = positive_scalar("distance", distance)
    order = _order(phase_order)
    dt = dtype_choice("dtype", dtype, (np.complex64, np.complex128))
    check_allocation("n_freq", m1v.shape[0] * nf, dt.itemsize)
    f_top = (nf - 1) * dfv
    if fl >= f_top:
        raise ValueError(f"f_low={fl} Hz must be below the highest bin frequency (n_freq - 1) * df = {f_top} Hz")
    out = _core.taylorf2(m1v, m2v, c1v, c2v, fl, dfv, nf, fh, dist, order, dt.name)
    return finite_output(out, "m1, m2, distance or df", f" (template values do not fit in {dt.name})")
