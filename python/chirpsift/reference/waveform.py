"""Frequency-domain inspiral templates (TaylorF2) and PN timing helpers.

Masses in solar masses, frequencies in Hz, times in seconds, distances in
Mpc. Spins ``chi1, chi2`` are dimensionless components along the orbital
angular momentum (aligned spins).
"""

import numpy as np

from .constants import C_SI, MPC, T_SUN
from .grid import in_band

__all__ = [
    "isco_frequency",
    "taylorf2_coefficients",
    "taylorf2_phase",
    "taylorf2",
    "time_to_coalescence",
    "chirp_duration",
]

_PI = np.pi
_GAMMA_E = np.euler_gamma


def _mass_parameters(m1, m2):
    m1 = np.asarray(m1, dtype=np.float64)
    m2 = np.asarray(m2, dtype=np.float64)
    m = m1 + m2
    eta = m1 * m2 / (m * m)
    delta = (m1 - m2) / m
    return m, eta, delta


def isco_frequency(m1, m2):
    """Gravitational-wave frequency at the Schwarzschild innermost stable
    circular orbit of the total mass.

    Parameters
    ----------
    m1, m2 : array_like
        Component masses in solar masses.

    Returns
    -------
    f_isco : float or ndarray
        ``1 / (6^(3/2) pi M T_SUN)`` in Hz, about ``4397 Hz / (M / Msun)``
        (twice the orbital frequency at ``r = 6 G M / c^2``).
    """
    m = np.asarray(m1, dtype=np.float64) + np.asarray(m2, dtype=np.float64)
    out = 1.0 / (6.0**1.5 * _PI * m * T_SUN)
    return out[()] if out.ndim == 0 else out


def taylorf2_coefficients(m1, m2, chi1=0.0, chi2=0.0):
    """Post-Newtonian coefficients ``psi_k`` of the TaylorF2 phase.

    Parameters
    ----------
    m1, m2 : array_like
        Component masses in solar masses.
    chi1, chi2 : array_like, optional
        Dimensionless aligned spins.

    Returns
    -------
    psi : ndarray, shape (8, ...)
        ``psi_0 .. psi_7`` (``psi_1 = 0``) without their ``v`` dependence:
        the phase uses ``psi[5] (1 + 3 ln v)`` at ``k = 5`` and
        ``psi[6] - (6848/21) ln(4 v)`` at ``k = 6``.

    Notes
    -----
    With ``eta = m1 m2 / M^2``, ``delta = (m1 - m2) / M``,
    ``chi_s = (chi1 + chi2) / 2`` and ``chi_a = (chi1 - chi2) / 2``:

    - ``psi2 = 3715/756 + 55 eta / 9``
    - ``psi3 = -16 pi + 4 beta``, with the 1.5PN spin-orbit
      ``beta = (113/12)(chi_s + delta chi_a) - (19/3) eta chi_s``
    - ``psi4 = 15293365/508032 + 27145 eta/504 + 3085 eta^2/72 - 10 sigma``,
      with the 2PN spin-spin term including the self-spin (quadrupole-
      monopole, black-hole) contributions:
      ``-10 sigma = (-405/8 + 5 eta/2) chi_s^2 + (-405/8 + 200 eta) chi_a^2
      - (405/4) delta chi_s chi_a``
    - ``psi5 = [pi (38645/756 - 65 eta/9) - gamma] (1 + 3 ln v)``, with
      ``gamma = (732985/2268 - 24260 eta/81 - 340 eta^2/9) chi_s
      + (732985/2268 + 140 eta/9) delta chi_a``
    - ``psi6 = 11583231236531/4694215680 - 640 pi^2/3 - 6848 gamma_E/21
      - (6848/21) ln(4v) + eta (-15737765635/3048192 + 2255 pi^2/12)
      + 76055 eta^2/1728 - 127825 eta^3/1296`` plus the 3PN spin-orbit
      ``pi [(2270/3) delta chi_a + (2270/3 - 520 eta) chi_s]`` and spin-spin
      ``(75515/144 - 8225 eta/18) delta chi_a chi_s
      + (75515/288 - 263245 eta/252 - 480 eta^2) chi_a^2
      + (75515/288 - 232415 eta/504 + 1255 eta^2/9) chi_s^2``
    - ``psi7 = pi (77096675/254016 + 378515 eta/1512 - 74045 eta^2/756)``
      plus the 3.5PN spin-orbit
      ``(-25150083775/3048192 + 10566655595 eta/762048 - 1042165 eta^2/3024
      + 5345 eta^3/36) chi_s + (-25150083775/3048192 + 26804935 eta/6048
      - 1985 eta^2/48) delta chi_a``

    References
    ----------
    .. [1] Buonanno, A., Iyer, B. R., Ochsner, E., Pan, Y. and
       Sathyaprakash, B. S. 2009, PRD 80, 084043, arXiv:0907.0700.
    .. [2] Arun, K. G., Iyer, B. R., Sathyaprakash, B. S. and
       Sundararajan, P. A. 2005, PRD 71, 084008, arXiv:gr-qc/0411146.
    .. [3] Poisson, E. and Will, C. M. 1995, PRD 52, 848, arXiv:gr-qc/9502040.
    .. [4] Khan, S. et al. 2016, PRD 93, 044007, arXiv:1508.07253, Appendix B
       (compilation of the aligned-spin terms).
    .. [5] Bohe, A., Marsat, S. and Blanchet, L. 2013, CQG 30, 135009,
       arXiv:1303.7412; Bohe, A., Marsat, S., Faye, G. and Blanchet, L. 2013,
       CQG 30, 075017, arXiv:1212.5520.
    """
    _, eta, delta = _mass_parameters(m1, m2)
    chi1 = np.asarray(chi1, dtype=np.float64)
    chi2 = np.asarray(chi2, dtype=np.float64)
    eta, delta, chi1, chi2 = np.broadcast_arrays(eta, delta, chi1, chi2)
    cs = 0.5 * (chi1 + chi2)
    ca = 0.5 * (chi1 - chi2)
    eta2 = eta * eta
    eta3 = eta2 * eta
    pi2 = _PI * _PI

    beta = (113.0 / 12.0) * (cs + delta * ca) - (19.0 / 3.0) * eta * cs
    minus_10_sigma = ((-405.0 / 8.0 + 5.0 * eta / 2.0) * cs * cs
                      + (-405.0 / 8.0 + 200.0 * eta) * ca * ca
                      - (405.0 / 4.0) * delta * cs * ca)
    gamma = ((732985.0 / 2268.0 - 24260.0 * eta / 81.0 - 340.0 * eta2 / 9.0) * cs
             + (732985.0 / 2268.0 + 140.0 * eta / 9.0) * delta * ca)

    psi = np.zeros((8,) + eta.shape)
    psi[0] = 1.0
    psi[2] = 3715.0 / 756.0 + 55.0 * eta / 9.0
    psi[3] = -16.0 * _PI + 4.0 * beta
    psi[4] = (15293365.0 / 508032.0 + 27145.0 * eta / 504.0
              + 3085.0 * eta2 / 72.0 + minus_10_sigma)
    psi[5] = _PI * (38645.0 / 756.0 - 65.0 * eta / 9.0) - gamma
    psi[6] = (11583231236531.0 / 4694215680.0 - 640.0 * pi2 / 3.0
              - 6848.0 * _GAMMA_E / 21.0
              + eta * (-15737765635.0 / 3048192.0 + 2255.0 * pi2 / 12.0)
              + 76055.0 * eta2 / 1728.0 - 127825.0 * eta3 / 1296.0
              + _PI * ((2270.0 / 3.0) * delta * ca + (2270.0 / 3.0 - 520.0 * eta) * cs)
              + (75515.0 / 144.0 - 8225.0 * eta / 18.0) * delta * ca * cs
              + (75515.0 / 288.0 - 263245.0 * eta / 252.0 - 480.0 * eta2) * ca * ca
              + (75515.0 / 288.0 - 232415.0 * eta / 504.0 + 1255.0 * eta2 / 9.0) * cs * cs)
    psi[7] = (_PI * (77096675.0 / 254016.0 + 378515.0 * eta / 1512.0
                     - 74045.0 * eta2 / 756.0)
              + (-25150083775.0 / 3048192.0 + 10566655595.0 * eta / 762048.0
                 - 1042165.0 * eta2 / 3024.0 + 5345.0 * eta3 / 36.0) * cs
              + (-25150083775.0 / 3048192.0 + 26804935.0 * eta / 6048.0
                 - 1985.0 * eta2 / 48.0) * delta * ca)
    return psi


def _check_order(phase_order):
    phase_order = int(phase_order)
    if not 0 <= phase_order <= 7:
        raise ValueError("phase_order must be between 0 and 7 (twice the PN order)")
    return phase_order


def taylorf2_phase(m1, m2, chi1, chi2, f, phase_order=7):
    """TaylorF2 stationary-phase phase ``Psi(f)`` with ``t_c = phi_c = 0``.

    Parameters
    ----------
    m1, m2 : array_like
        Component masses in solar masses.
    chi1, chi2 : array_like
        Dimensionless aligned spins.
    f : array_like
        Gravitational-wave frequencies in Hz (``f > 0``); broadcast against
        the mass and spin arrays.
    phase_order : int, optional
        Highest power ``k`` of ``v`` kept (twice the PN order, 0..7).

    Returns
    -------
    psi : ndarray
        ``Psi = -pi/4 + 3 / (128 eta v^5) sum_{k <= phase_order} psi_k v^k``
        in radians (float64), ``v = (pi M T_SUN f)^(1/3)``, with ``psi_5``
        multiplied by ``(1 + 3 ln v)`` and the ``ln(4v)`` term at ``k = 6``;
        coefficients from :func:`taylorf2_coefficients`. The template is
        ``h~(f) = A(f) exp(-i Psi(f))``.

    References
    ----------
    .. [1] Buonanno, A. et al. 2009, PRD 80, 084043, arXiv:0907.0700.
    .. [2] Khan, S. et al. 2016, PRD 93, 044007, arXiv:1508.07253.
    """
    phase_order = _check_order(phase_order)
    m, eta, _ = _mass_parameters(m1, m2)
    psi = taylorf2_coefficients(m1, m2, chi1, chi2)
    f = np.asarray(f, dtype=np.float64)
    v = np.cbrt(_PI * m * T_SUN * f)
    lnv = np.log(v)
    total = np.zeros(np.broadcast_shapes(v.shape, psi.shape[1:]))
    vk = np.ones_like(v)
    for k in range(phase_order + 1):
        if k == 5:
            term = psi[5] * (1.0 + 3.0 * lnv)
        elif k == 6:
            term = psi[6] - (6848.0 / 21.0) * (np.log(4.0) + lnv)
        else:
            term = psi[k]
        total = total + term * vk
        vk = vk * v
    return -0.25 * _PI + 3.0 / (128.0 * eta * v**5) * total


def taylorf2(m1, m2, chi1=0.0, chi2=0.0, *, f_low, df, n_freq, f_high=None,
             distance=1.0, phase_order=7, dtype=np.complex64):
    """Frequency-domain stationary-phase inspiral templates (TaylorF2).

    Parameters
    ----------
    m1, m2 : array_like
        Component masses in solar masses; broadcast with the spins,
        ``distance`` and ``f_high`` to ``K`` templates.
    chi1, chi2 : array_like, optional
        Dimensionless aligned spins (black holes).
    f_low : float
        Lowest frequency in Hz.
    df : float
        Frequency spacing in Hz; bin ``k`` is ``f = k df``.
    n_freq : int
        Number of frequency bins.
    f_high : array_like, optional
        Highest frequency in Hz (exclusive); default
        :func:`isco_frequency` ``(m1, m2)``.
    distance : array_like, optional
        Luminosity distance in Mpc (optimal orientation).
    phase_order : int, optional
        Twice the PN order of the phase, 0..7.
    dtype : numpy dtype, optional
        Complex output dtype; computed in complex128 and cast.

    Returns
    -------
    h : ndarray, shape (K, n_freq)
        ``h~_k = A f^(-7/6) exp(-i Psi(f))`` for ``f_low <= f < f_high``,
        else 0, in 1/Hz (``h~ = rfft(h) dt``), with
        ``A = sqrt(5/24) pi^(-2/3) (c / D) (Mc T_SUN)^(5/6)``,
        ``D = distance * MPC`` metres, ``Mc = eta^(3/5) M`` and ``Psi`` from
        :func:`taylorf2_phase` (``t_c = phi_c = 0``, so a filter output
        peaks at the coalescence time). The spin-spin term at 2PN includes
        the self-spin (black-hole) contributions.

    References
    ----------
    .. [1] Cutler, C. and Flanagan, E. E. 1994, PRD 49, 2658,
       arXiv:gr-qc/9402014 (stationary-phase amplitude).
    .. [2] Buonanno, A. et al. 2009, PRD 80, 084043, arXiv:0907.0700.
    .. [3] Khan, S. et al. 2016, PRD 93, 044007, arXiv:1508.07253.
    """
    phase_order = _check_order(phase_order)
    if f_high is None:
        f_high = isco_frequency(m1, m2)
    m1, m2, chi1, chi2, f_low, f_high, distance = (
        np.atleast_1d(a).astype(np.float64) for a in np.broadcast_arrays(
            m1, m2, chi1, chi2, f_low, f_high, distance))
    if m1.ndim != 1:
        raise ValueError("template parameters must be scalars or 1-D")
    m, eta, _ = _mass_parameters(m1, m2)
    f = np.arange(int(n_freq)) * float(df)
    band = in_band(int(n_freq), df, f_low, f_high) & (f[None, :] > 0)
    fs = np.where(band, f[None, :], 1.0)
    psi = taylorf2_phase(m1[:, None], m2[:, None], chi1[:, None], chi2[:, None],
                         fs, phase_order)
    mc = eta**0.6 * m
    amp = (np.sqrt(5.0 / 24.0) * _PI ** (-2.0 / 3.0) * (C_SI / (distance * MPC))
           * (mc * T_SUN) ** (5.0 / 6.0))
    h = amp[:, None] * fs ** (-7.0 / 6.0) * np.exp(-1j * psi)
    h[~band] = 0.0
    return h.astype(dtype, copy=False)


# TaylorT2 time-to-coalescence coefficients (non-spinning)
def _tau_coefficients(eta):
    eta2 = eta * eta
    eta3 = eta2 * eta
    pi2 = _PI * _PI
    tau = np.zeros((8,) + np.shape(eta))
    tau[0] = 1.0
    tau[2] = 743.0 / 252.0 + 11.0 * eta / 3.0
    tau[3] = -32.0 * _PI / 5.0
    tau[4] = 3058673.0 / 508032.0 + 5429.0 * eta / 504.0 + 617.0 * eta2 / 72.0
    tau[5] = -_PI * (7729.0 / 252.0 - 13.0 * eta / 3.0)
    tau[6] = (-10052469856691.0 / 23471078400.0 + 128.0 * pi2 / 3.0
              + 6848.0 * _GAMMA_E / 105.0
              + eta * (3147553127.0 / 3048192.0 - 451.0 * pi2 / 12.0)
              - 15211.0 * eta2 / 1728.0 + 25565.0 * eta3 / 1296.0)
    tau[7] = _PI * (-15419335.0 / 127008.0 - 75703.0 * eta / 756.0
                    + 14809.0 * eta2 / 378.0)
    return tau


def time_to_coalescence(m1, m2, f, phase_order=7):
    """Time from frequency ``f`` to coalescence, ``t_c - t(f)`` (TaylorT2).

    Parameters
    ----------
    m1, m2 : array_like
        Component masses in solar masses (non-spinning).
    f : array_like
        Gravitational-wave frequency in Hz, broadcast against the masses.
    phase_order : int, optional
        Highest power of ``v`` kept, 0..7.

    Returns
    -------
    tau : ndarray or float
        ``5 M T_SUN / (256 eta v^8) sum_{k <= phase_order} tau_k v^k`` in
        seconds, with ``tau_0 = 1``, ``tau_1 = 0``,
        ``tau_2 = 743/252 + 11 eta/3``, ``tau_3 = -32 pi/5``,
        ``tau_4 = 3058673/508032 + 5429 eta/504 + 617 eta^2/72``,
        ``tau_5 = -pi (7729/252 - 13 eta/3)``,
        ``tau_6 = -10052469856691/23471078400 + 128 pi^2/3 + 6848 gamma_E/105
        + (3424/105) ln(16 v^2) + eta (3147553127/3048192 - 451 pi^2/12)
        - 15211 eta^2/1728 + 25565 eta^3/1296``,
        ``tau_7 = pi (-15419335/127008 - 75703 eta/756 + 14809 eta^2/378)``.
        It satisfies ``dPsi/df = -2 pi tau`` term by term with
        :func:`taylorf2_phase` at zero spin.

    References
    ----------
    .. [1] Sathyaprakash, B. S. 1994, PRD 50, R7111 (chirp times).
    .. [2] Buonanno, A. et al. 2009, PRD 80, 084043, arXiv:0907.0700
       (TaylorT2).
    """
    phase_order = _check_order(phase_order)
    m, eta, _ = _mass_parameters(m1, m2)
    tau = _tau_coefficients(eta)
    f = np.asarray(f, dtype=np.float64)
    v = np.cbrt(_PI * m * T_SUN * f)
    total = np.zeros(np.broadcast_shapes(v.shape, eta.shape))
    vk = np.ones_like(v)
    for k in range(phase_order + 1):
        term = tau[k]
        if k == 6:
            term = term + (3424.0 / 105.0) * np.log(16.0 * v * v)
        total = total + term * vk
        vk = vk * v
    out = 5.0 * m * T_SUN / (256.0 * eta * v**8) * total
    return out[()] if out.ndim == 0 else out


def chirp_duration(m1, m2, f_low, phase_order=7):
    """Signal duration from ``f_low`` to coalescence, in seconds.

    Parameters
    ----------
    m1, m2 : array_like
        Component masses in solar masses.
    f_low : array_like
        Starting frequency in Hz.
    phase_order : int, optional
        Highest power of ``v`` kept, 0..7 (``4`` is the 2PN duration
        ``tau_0 + tau_2 - tau_3 + tau_4`` of the chirp times).

    Returns
    -------
    duration : float or ndarray
        :func:`time_to_coalescence` ``(m1, m2, f_low, phase_order)``; about
        25 s for 1.4 + 1.4 Msun from 40 Hz.

    References
    ----------
    .. [1] Sathyaprakash, B. S. 1994, PRD 50, R7111.
    .. [2] Owen, B. J. and Sathyaprakash, B. S. 1999, PRD 60, 022002,
       arXiv:gr-qc/9808076.
    """
    return time_to_coalescence(m1, m2, f_low, phase_order)
