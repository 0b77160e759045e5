"""Projection of simulated sources onto a site: their strain, optimal SNR and effective distance.

A site is any object with the two methods of :class:`chirpsift.Site` used here:
``antenna_pattern(ra, dec, psi, gps_time) -> (F_plus, F_cross)`` and
``arrival_delay(ra, dec, gps_time)`` (seconds after the signal passes the Earth's
centre), both batched over arrays, angles in radians, times in GPS seconds.

Conventions
-----------
With ``h~_T(f) = A f^(-7/6) exp(-i Psi(f))`` the TaylorF2 signal of
:func:`chirpsift.taylorf2` (an optimally oriented source at the injection's distance,
``t_c = 0``, ``phi_c = 0``), the signal at a site is

``h~(f) = h~_T(f) exp(i phi_c) [F+ (1 + cos^2 i) / 2 - i Fx cos i] exp(-2 pi i f t_site)``

so that in the time domain ``h+ = A(t) (1 + cos^2 i) / 2 cos(Phi(t) + phi_c)`` and
``hx = A(t) cos i sin(Phi(t) + phi_c)``, with ``Phi`` the gravitational-wave phase of the
template, ``phi_c`` the injection's ``phase`` (``Psi(f) = 2 pi f t_c - phi_c - pi/4 + ...``
as in Buonanno et al. 2009), ``i`` its ``inclination``, ``F+, Fx`` the antenna pattern at
the geocentric coalescence time for the injection's sky position and ``polarisation``,
and ``t_site = time + arrival_delay``. The antenna pattern is held fixed over the
signal: the Earth turns by 0.1 degree in 25 s, by 4 degrees in 1000 s.
"""

from __future__ import annotations

import math

import numpy as np

from .._validate import positive_scalar, real_scalar
from ..filter import sigma
from ..segments import DURATION_MARGIN
from ..spectrum import psd_on_grid
from ..waveform import chirp_duration, isco_frequency, taylorf2
from .population import injection_table

__all__ = ["project", "injection_snr", "effective_distance", "site_response", "arrival_times",
           "optimal_sigma", "psd_on_grid", "APPROXIMANTS", "TAPER_START", "TAPER_END", "SNR_DF"]

#: Signal models :func:`project` can add.
APPROXIMANTS = ("taylorf2",)

#: Signals are generated from ``TAPER_START * f_low`` and switched on by a Hann taper that
#: ends where the frequency reaches ``TAPER_END * f_low``: the taper (and the ringing of the
#: spectrum's sharp start) stays below ``f_low``, where the search does not look, with room
#: for aligned spins changing the duration by the search's margin (10%).
TAPER_START = 0.8
TAPER_END = 0.9

#: Seconds kept after coalescence in each signal's buffer: the sharp high-frequency end of
#: the spectrum rings on after the merger and must not wrap round the buffer.
POST_MERGER = 2.0

#: Default frequency step (Hz) of the optimal-SNR integral: the left Riemann sum of the
#: smooth f^(-7/3) / S misses about 2 df / (3 f_low) of sigma^2 at the band's start
#: (0.03% at 20 Hz).
SNR_DF = 1.0 / 64.0

#: Largest template batch (bytes of complex64 spectra) held at once by :func:`optimal_sigma`.
_BATCH_BYTES = 64 * 2**20


def _check_site(site, name="site"):
    for method in ("antenna_pattern", "arrival_delay"):
        if not callable(getattr(site, method, None)):
            raise TypeError(f"{name} must have an {method}() method like chirpsift.Site, got {type(site).__name__}")
    return site


def _site_name(site) -> str:
    return str(getattr(site, "name", type(site).__name__))


def arrival_times(injections, site) -> np.ndarray:
    """Coalescence time of each injection at ``site``: ``time + site.arrival_delay(ra, dec, time)``, s."""
    inj = injection_table(injections)
    _check_site(site)
    delay = np.broadcast_to(np.asarray(site.arrival_delay(inj["ra"], inj["dec"], inj["time"]), dtype=np.float64),
                            inj.shape)
    return inj["time"] + delay


def site_response(injections, site) -> np.ndarray:
    """Complex factor ``exp(i phi_c) [F+ (1 + cos^2 i)/2 - i Fx cos i]`` of each injection at ``site``.

    Its modulus is the site's amplitude relative to an optimally oriented source at the
    same distance (overhead, face on): ``Theta / 4`` of Finn & Chernoff (1993), between 0
    and 1. Antenna patterns are evaluated at the geocentric coalescence time.

    References
    ----------
    .. [1] L. S. Finn and D. F. Chernoff, Phys. Rev. D 47, 2198 (1993), gr-qc/9301003.
    """
    inj = injection_table(injections)
    _check_site(site)
    fp, fx = site.antenna_pattern(inj["ra"], inj["dec"], inj["polarisation"], inj["time"])
    fp = np.broadcast_to(np.asarray(fp, dtype=np.float64), inj.shape)
    fx = np.broadcast_to(np.asarray(fx, dtype=np.float64), inj.shape)
    ci = np.cos(inj["inclination"])
    return np.exp(1j * inj["phase"]) * (fp * (1.0 + ci**2) / 2.0 - 1j * fx * ci)


def effective_distance(injections, site) -> np.ndarray:
    """Effective distance (Mpc) of each injection at ``site``.

    ``D_eff = D / sqrt(F+^2 (1 + cos^2 i)^2 / 4 + Fx^2 cos^2 i)``: the distance of an
    optimally oriented source (overhead, face on) giving the same SNR there. Infinite
    where the site is blind to the source.

    References
    ----------
    .. [1] B. Allen et al., Phys. Rev. D 85, 122006 (2012), arXiv:gr-qc/0509116.
    .. [2] L. S. Finn and D. F. Chernoff, Phys. Rev. D 47, 2198 (1993), gr-qc/9301003.
    """
    amp = np.abs(site_response(injections, site))
    with np.errstate(divide="ignore"):
        return np.where(amp > 0, injection_table(injections)["distance"] / np.where(amp > 0, amp, 1.0), np.inf)


def _band_top(m1, m2, f_high):
    top = np.asarray(isco_frequency(m1, m2), dtype=np.float64).reshape(-1)
    return top if f_high is None else np.minimum(top, f_high)


def optimal_sigma(m1, m2, spin1, spin2, psd, *, f_low, f_high=None, df=SNR_DF) -> np.ndarray:
    """``sigma = sqrt(<h|h>)`` of optimally oriented TaylorF2 signals at 1 Mpc.

    Parameters
    ----------
    m1, m2, spin1, spin2 : array_like
        Masses (Msun) and aligned spins, one entry per signal.
    psd : str, callable or (freqs, values)
        One-sided PSD (1/Hz): a :func:`chirpsift.design_psd` curve name, a function of
        frequency (Hz), or samples.
    f_low : float
        Lower end of the band (Hz).
    f_high : float, optional
        Upper end of the band (Hz), e.g. the Nyquist frequency of the data; each signal
        also ends at its ISCO frequency.
    df : float, optional
        Frequency step (Hz) of the sum ``4 df sum |h~|^2 / S`` (:data:`SNR_DF`).

    Returns
    -------
    ndarray of float64
        ``sigma`` at 1 Mpc: the optimal SNR at distance ``D`` is ``sigma / D``.

    Raises
    ------
    ValueError
        If the PSD is infinite (or not positive) anywhere inside a signal's band.
    """
    m1v, m2v, s1v, s2v = (np.atleast_1d(np.asarray(v, dtype=np.float64)) for v in np.broadcast_arrays(m1, m2, spin1,
                                                                                                          spin2))
    fl = positive_scalar("f_low", f_low)
    fh = None if f_high is None else positive_scalar("f_high", f_high)
    if fh is not None and fh <= fl:
        raise ValueError(f"f_high={fh} Hz must exceed f_low={fl} Hz")
    step = positive_scalar("df", df)
    tops = _band_top(m1v, m2v, fh)
    if (tops <= fl).any():
        i = int(np.argmax(tops <= fl))
        raise ValueError(f"signal {i} (m1={m1v[i]}, m2={m2v[i]}) ends at {tops[i]:.4g} Hz, not above f_low={fl} Hz")
    keys = np.stack([m1v, m2v, s1v, s2v, tops], axis=1)
    uniq, inverse = np.unique(keys, axis=0, return_inverse=True)
    n_freq = int(math.ceil(uniq[:, 4].max() / step)) + 2
    freqs = np.arange(n_freq) * step
    grid = psd_on_grid(psd, step, n_freq)
    in_band = (freqs >= fl) & (freqs < uniq[:, 4].max())
    bad = in_band & ~(np.isfinite(grid) & (grid > 0))
    if bad.any():
        k = int(np.argmax(bad))
        raise ValueError(f"psd must be finite and positive inside the band [{fl}, {uniq[:, 4].max():.6g}) Hz, "
                         f"got {grid[k]} at {freqs[k]:.6g} Hz")
    grid = np.where(in_band, grid, np.inf)
    batch = max(1, _BATCH_BYTES // (8 * n_freq))
    out = np.empty(uniq.shape[0])
    for lo in range(0, uniq.shape[0], batch):
        u = uniq[lo:lo + batch]
        h = taylorf2(u[:, 0], u[:, 1], u[:, 2], u[:, 3], f_low=fl, df=step, n_freq=n_freq, f_high=u[:, 4])
        out[lo:lo + batch] = sigma(h, grid, step, fl)
    return out[inverse.reshape(-1)]


def injection_snr(injections, site, psd, *, f_low, f_high=None, df=SNR_DF) -> np.ndarray:
    """Optimal matched-filter SNR of each injection at a site, from a PSD.

    Parameters
    ----------
    injections : ndarray of :data:`chirpsift.inject.INJECTION_DTYPE`
        The sources (see :func:`chirpsift.draw_injections`).
    site : chirpsift.Site or None
        The site (antenna pattern); ``None`` gives the SNR of each source as if it
        were optimally oriented (overhead, face on).
    psd : str, callable or (freqs, values)
        The site's one-sided noise PSD (1/Hz): a :func:`chirpsift.design_psd` curve
        name, a function of frequency (Hz), or samples. Must be finite in band.
    f_low : float
        Lower end of the band (Hz), as in the search.
    f_high : float, optional
        Upper end (Hz), e.g. the data's Nyquist frequency; signals also end at their
        ISCO frequency, as :func:`chirpsift.taylorf2`.
    df : float, optional
        Frequency step (Hz) of the integral.

    Returns
    -------
    ndarray of float64, shape (n,)
        ``rho = |R| sigma_1Mpc / D`` with ``sigma_1Mpc^2 = 4 int |h~_T|^2 / S df`` over
        the band (:func:`chirpsift.sigma`) and ``R`` the :func:`site_response`. A
        matched filter with the exact template recovers this SNR in noiseless data.

    References
    ----------
    .. [1] B. Allen et al., Phys. Rev. D 85, 122006 (2012), arXiv:gr-qc/0509116.
    .. [2] C. Cutler and E. E. Flanagan, Phys. Rev. D 49, 2658 (1994), gr-qc/9402014.

    Examples
    --------
    >>> import chirpsift
    >>> inj = chirpsift.draw_injections(2, m1=1.4, m2=1.4, distance=(100, 100.001), start=0, end=100,
    ...                                 f_low=40.0)
    >>> snr = chirpsift.injection_snr(inj, None, "gen1-4km", f_low=40.0)
    >>> bool(abs(snr[0] * 100 / 8 - 31.2) < 0.2)  # horizon 31.2 Mpc (Sathyaprakash & Schutz 2009 fit)
    True
    """
    inj = injection_table(injections)
    sig = optimal_sigma(inj["m1"], inj["m2"], inj["spin1"], inj["spin2"], psd, f_low=f_low, f_high=f_high, df=df)
    amp = 1.0 if site is None else np.abs(site_response(inj, site))
    return sig * amp / inj["distance"]


def _fast_length(n: int) -> int:
    """Smallest 2^a or 3 * 2^a >= n (both fast for numpy's FFT; at most a third wasted)."""
    pow2 = 1 << max(1, int(n - 1).bit_length())
    three = 3 * (pow2 >> 2)
    return three if three >= n else pow2


#: Frequency bins per block when applying the delay ramp (bounds the temporaries).
_RAMP_BLOCK = 1 << 18


def project(injections, site, *, start, duration, sample_rate, f_low, approximant="taylorf2", require_overlap=True):
    """Strain that a set of simulated sources adds at one site.

    Parameters
    ----------
    injections : ndarray of :data:`chirpsift.inject.INJECTION_DTYPE`
        The sources (see :func:`chirpsift.draw_injections`).
    site : chirpsift.Site
        Where the strain is recorded (any object with ``antenna_pattern`` and
        ``arrival_delay``, see the module notes).
    start : float
        GPS time (s) of the first output sample.
    duration : float
        Seconds of output; ``round(duration * sample_rate)`` samples.
    sample_rate : float
        Hz.
    f_low : float
        Frequency (Hz) from which each signal has its full amplitude (as in the
        search); below it the signal is switched on smoothly (Notes).
    approximant : {"taylorf2"}, optional
        Signal model: :func:`chirpsift.taylorf2` with the injection's masses and spins.
    require_overlap : bool, optional
        Raise if no signal overlaps the span (the usual sign of injection times that do
        not belong to these data). Pass False when projecting long data block by block,
        where some blocks hold no signal; they come back as zeros.

    Returns
    -------
    ndarray of float64, shape (round(duration * sample_rate),)
        The summed strain, to be added to the site's data starting at ``start``.

    Raises
    ------
    ValueError
        If no injection's signal overlaps ``[start, start + duration)`` (unless
        ``require_overlap`` is False), or ``f_low``
        is at or above an injection's ISCO frequency.

    Notes
    -----
    Each signal is built on its own buffer (``2^a`` or ``3 2^a`` samples) that starts on the output's
    sample grid and holds the signal from ``TAPER_START * f_low`` to
    ``POST_MERGER`` s after coalescence: the frequency-domain model (module notes) is
    delayed to the site's coalescence time by the phase ramp
    ``exp(-2 pi i f t_offset)`` (exact to a fraction of a sample), transformed
    (``h = irfft(h~) * sample_rate``), switched on by a Hann taper between the times the
    frequency passes ``TAPER_START * f_low`` and ``TAPER_END * f_low`` (3.5PN chirp
    times), and added where it overlaps the output. Memory is one buffer of the longest
    signal beside the output, whatever the number of signals; projecting adjacent spans
    gives the same samples as one long span. Signals that only partly overlap the span
    are cut at its edges, as data would cut them.

    The model's spectrum ends sharply at the ISCO frequency (or at the Nyquist frequency
    if lower), as the search's templates do, so a matched filter with the same template
    recovers :func:`injection_snr`.

    References
    ----------
    .. [1] A. Buonanno et al., Phys. Rev. D 80, 084043 (2009), arXiv:0907.0700 (TaylorF2).
    .. [2] W. G. Anderson, P. R. Brady, J. D. E. Creighton and E. E. Flanagan, Phys. Rev. D 63,
       042003 (2001), gr-qc/0008066 (antenna patterns, polarisations).

    Examples
    --------
    >>> import numpy as np, chirpsift
    >>> class Overhead:  # a site that sees every source as overhead (F+ = 1, Fx = 0)
    ...     name = "overhead"
    ...     def antenna_pattern(self, ra, dec, psi, t): return np.ones_like(ra), np.zeros_like(ra)
    ...     def arrival_delay(self, ra, dec, t): return np.zeros_like(ra)
    >>> inj = chirpsift.draw_injections(1, m1=1.4, m2=1.4, distance=(50, 60), start=100, end=140, f_low=40.0)
    >>> h = chirpsift.project(inj, Overhead(), start=0.0, duration=160.0, sample_rate=2048.0, f_low=40.0)
    >>> h.shape
    (327680,)
    """
    inj = injection_table(injections)
    _check_site(site)
    if not isinstance(approximant, str) or approximant not in APPROXIMANTS:
        raise ValueError(f"approximant must be one of {', '.join(map(repr, APPROXIMANTS))}, got {approximant!r}")
    t0 = real_scalar("start", start)
    span = positive_scalar("duration", duration)
    fs = positive_scalar("sample_rate", sample_rate)
    fl = positive_scalar("f_low", f_low)
    n = int(round(span * fs))
    if n < 2:
        raise ValueError(f"duration={span} s at sample_rate={fs} Hz gives {n} samples; need at least 2")
    if fl >= fs / 2:
        raise ValueError(f"f_low={fl} Hz must be below the Nyquist frequency {fs / 2} Hz")
    isco = np.atleast_1d(isco_frequency(inj["m1"], inj["m2"]))
    if (fl >= isco).any():
        i = int(np.argmax(fl >= isco))
        raise ValueError(f"f_low={fl} Hz is at or above the ISCO frequency {isco[i]:.4g} Hz of injection {i} "
                         f"(m1={inj['m1'][i]}, m2={inj['m2'][i]})")
    f_gen = TAPER_START * fl
    t_gen = np.atleast_1d(chirp_duration(inj["m1"], inj["m2"], f_gen))
    t_full = np.atleast_1d(chirp_duration(inj["m1"], inj["m2"], TAPER_END * fl))
    pre = t_gen * DURATION_MARGIN + 1.0
    t_site = arrival_times(inj, site)
    response = site_response(inj, site)
    first = np.floor((t_site - t0 - pre) * fs).astype(np.int64)
    length = np.array([_fast_length(int(math.ceil((p + POST_MERGER) * fs)) + 1) for p in pre], dtype=np.int64)
    overlaps = (first < n) & (first + length > 0)
    if require_overlap and not overlaps.any():
        raise ValueError(
            f"injections: none of the {inj.size} signals (coalescence times {inj['time'].min():.6f} to "
            f"{inj['time'].max():.6f} s) overlaps the data [{t0}, {t0 + n / fs}) s"
        )
    out = np.zeros(n)
    for i in np.flatnonzero(overlaps):
        size = int(length[i])
        offset = (t_site[i] - t0) - first[i] / fs  # coalescence, seconds into this buffer
        n_freq = size // 2 + 1
        df = fs / size
        top = min(float(isco[i]), fs / 2)
        h = taylorf2(inj["m1"][i], inj["m2"][i], inj["spin1"][i], inj["spin2"][i], f_low=f_gen, df=df,
                     n_freq=n_freq, f_high=top, distance=inj["distance"][i], dtype=np.complex128)[0]
        h *= response[i]
        for k in range(0, n_freq, _RAMP_BLOCK):
            bins = np.arange(k, min(k + _RAMP_BLOCK, n_freq), dtype=np.float64)
            h[k:k + bins.size] *= np.exp((-2j * np.pi * df * offset) * bins)
        x = np.fft.irfft(h, size) * fs
        on, full = offset - t_gen[i], offset - t_full[i]  # seconds into the buffer
        j_on, j_full = (min(max(int(math.ceil(t * fs)), 0), size) for t in (on, full))
        x[:j_on] = 0.0
        ramp = (np.arange(j_on, j_full) / fs - on) / (full - on)
        x[j_on:j_full] *= 0.5 - 0.5 * np.cos(np.pi * ramp)
        lo, hi = max(int(first[i]), 0), min(int(first[i]) + size, n)
        out[lo:hi] += x[lo - int(first[i]):hi - int(first[i])]
    return out
