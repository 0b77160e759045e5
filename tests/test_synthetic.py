"""Tests for chirpsift.synthetic: coloured Gaussian noise and TaylorF2 injections.

Outside references
------------------
- scipy.signal.welch as the PSD estimator, with the covariance of Welch estimates for
  Gaussian noise (Welch 1967, IEEE Trans. Audio Electroacoust. 15, 70; Percival & Walden
  1993, "Spectral Analysis for Physical Applications", sec. 6.17): for locally white
  noise the normalised periodograms P/S of two windowed segments offset by ``d`` samples,
  at bins ``k`` and ``k + j``, have covariance ``|sum_t w_t w_{t+d} e^{-2 pi i j t / L}|^2 /
  (sum_t w_t^2)^2`` (Isserlis' theorem). The tolerances below are computed from it.
- The one-sided PSD's defining property ``var x = integral_0^inf S df`` (Parseval).
- The matched filter and optimal SNR of Allen et al. 2012, PRD 85, 122006
  (arXiv:gr-qc/0509116): filtering a signal with its own template gives
  ``z(t_c) = sigma e^{i phi}``.
- The leading-order SPA amplitude and the horizon distance of the second-generation
  zero-detuned design fit (shared REFERENCES items 2, 9, 10: 436 Mpc for 1.4+1.4 Msun,
  SNR 8, f_L = 20 Hz, Newtonian SPA up to f_ISCO; V-derived there).
"""

import math

import numpy as np
import pytest

chirpsift = pytest.importorskip("chirpsift")
scipy_signal = pytest.importorskip("scipy.signal")
scipy_integrate = pytest.importorskip("scipy.integrate")

from chirpsift.synthetic import colored_gaussian_noise, inject_taylorf2, optimal_snr  # noqa: E402

T_SUN = 4.925490947641267e-6  # s, IAU 2015 B3 nominal GM_sun / c^3
MPC = 3.0856775814913673e22  # m
C = 299792458.0  # m/s


# ---------------------------------------------------------------------------
# noise
# ---------------------------------------------------------------------------
def _welch_band_mean_std(window: np.ndarray, step: int, n_seg: int, band: int) -> float:
    """Standard deviation of the mean of ``band`` adjacent normalised Welch bins.

    Welch mean over ``n_seg`` segments; covariance of normalised periodograms from
    Isserlis' theorem (see module docstring). Only segment offsets with overlap
    (0 and ``step`` for 50 %) contribute.
    """
    L = window.size
    norm = np.sum(window**2)
    total = 0.0
    for m in range(0, n_seg):
        d = m * step
        if d >= L:
            break
        prod = window[: L - d] * window[d:]
        g = np.fft.fft(prod, L) / norm  # g[j]: correlation between bins k and k + j
        c = np.abs(g) ** 2
        lags = np.arange(-(band - 1), band)
        # sum over k, k' in the band of c[k - k'] = sum over lags of (band - |lag|) c[lag]
        s = np.sum((band - np.abs(lags)) * c[lags % L])
        weight = n_seg if m == 0 else 2 * (n_seg - m)
        total += weight * s
    return math.sqrt(total) / (n_seg * band)


def test_noise_welch_psd_matches_design_curve():
    fs, duration, seg = 2048.0, 512.0, 4.0
    n = int(fs * duration)
    x = colored_gaussian_noise(n, fs, "gen2-zero-detuned", seed=2024)
    nperseg = int(seg * fs)
    step = nperseg // 2
    f, p = scipy_signal.welch(x, fs, window="hann", nperseg=nperseg, noverlap=nperseg - step,
                              detrend=False, average="mean")
    n_seg = (n - nperseg) // step + 1
    window = scipy_signal.get_window("hann", nperseg)
    expected = chirpsift.design_psd(f, "gen2-zero-detuned")
    band = 32  # 8 Hz bands
    sd = _welch_band_mean_std(window, step, n_seg, band)
    sel = np.flatnonzero((f >= 24.0) & (f < 1000.0))
    sel = sel[: sel.size // band * band].reshape(-1, band)
    ratio = (p[sel] / expected[sel]).mean(axis=1)
    z = (ratio - 1.0) / sd
    # every band within 4.5 sigma (false-alarm chance about 1e-3 over ~120 bands), and the
    # scatter consistent with the predicted one: mean z^2 of n_b roughly independent
    # bands has standard deviation sqrt(2 / n_b); allow 5 of those
    assert np.max(np.abs(z)) < 4.5, (np.max(np.abs(z)), sd)
    assert abs(np.mean(z**2) - 1.0) < 5 * math.sqrt(2.0 / z.size), np.mean(z**2)


def test_noise_variance_is_integral_of_psd():
    # var x = integral S df (Parseval); for the frequency-domain recipe the mean of x^2
    # has expectation df sum_k S_k and standard deviation df sqrt(sum_k S_k^2)
    fs, n = 1024.0, 2**18
    df = fs / n
    f = np.fft.rfftfreq(n, 1 / fs)
    s = chirpsift.design_psd(f, "gen2-zero-detuned")
    s = np.where(np.isfinite(s), s, 0.0)
    s[-1] = 0.0  # keep to bins whose variance is T S / 2 complex (Nyquist handled below)
    x = colored_gaussian_noise(n, fs, lambda ff: np.where(ff < fs / 2, chirpsift.design_psd(ff), np.inf), seed=7)
    mean_sq = np.mean(x**2)
    expect = df * np.sum(s)
    sd = df * math.sqrt(np.sum(s**2))
    assert abs(mean_sq - expect) < 5 * sd, (mean_sq, expect, sd)


def test_white_noise_variance_and_independence():
    # flat one-sided PSD S0 -> per-sample variance S0 fs / 2 and white samples
    fs, n, s0 = 512.0, 2**16, 4e-46
    x = colored_gaussian_noise(n, fs, lambda f: np.full(f.shape, s0), seed=11)
    var = s0 * fs / 2
    # sample variance of n independent normals: relative standard deviation sqrt(2 / n)
    assert abs(np.var(x) / var - 1) < 5 * math.sqrt(2 / n)
    # lag-1 autocorrelation of white noise: mean 0, standard deviation 1/sqrt(n)
    r1 = np.dot(x[:-1], x[1:]) / np.dot(x, x)
    assert abs(r1) < 5 / math.sqrt(n)


def test_noise_seed_reproducible_and_f_low_empty_below():
    fs, n = 1024.0, 2**14
    a = colored_gaussian_noise(n, fs, seed=5, f_low=50.0)
    b = colored_gaussian_noise(n, fs, seed=5, f_low=50.0)
    c = colored_gaussian_noise(n, fs, seed=6, f_low=50.0)
    np.testing.assert_array_equal(a, b)
    assert not np.array_equal(a, c)
    spec = np.abs(np.fft.rfft(a))
    f = np.fft.rfftfreq(n, 1 / fs)
    assert np.max(spec[f < 50.0]) <= 1e-12 * np.max(spec)
    assert np.all(spec[(f >= 60) & (f < 400)] > 0)


def test_zero_psd_bins_are_noise_free_in_simulation_but_refused_by_a_filter():
    # One PSD rule (chirpsift.spectrum.psd_on_grid) serves both; only simulated noise may
    # have bins without noise. Outside check: numpy's rfft of the simulated series holds
    # no power in the band where S = 0 (the expected power in a bin is proportional to S).
    fs, n = 256.0, 2**12
    quiet = lambda f: np.where((f > 40.0) & (f < 60.0), 0.0, 1.0)  # noqa: E731
    x = colored_gaussian_noise(n, fs, quiet, seed=2)
    spec = np.abs(np.fft.rfft(x))
    f = np.fft.rfftfreq(n, 1 / fs)
    assert np.max(spec[(f > 40.0) & (f < 60.0)]) <= 1e-12 * np.max(spec)
    assert np.all(spec[(f > 70.0) & (f < 120.0)] > 0)
    with pytest.raises(ValueError, match="psd must be positive"):
        optimal_snr(1.4, 1.4, psd=quiet, sample_rate=fs, n=n, f_low=30.0)


def test_noise_odd_length_and_generator_seed():
    rng = np.random.default_rng(3)
    x = colored_gaussian_noise(1001, 256.0, lambda f: np.full(f.shape, 1.0), seed=rng)
    assert x.shape == (1001,) and x.dtype == np.float64 and np.all(np.isfinite(x))


@pytest.mark.parametrize(
    "kwargs, exc, pattern",
    [
        (dict(n=1, sample_rate=10.0), ValueError, "n must be at least 2"),
        (dict(n=10.5, sample_rate=10.0), TypeError, "n must be an integer"),
        (dict(n=100, sample_rate=0.0), ValueError, "sample_rate must be positive"),
        (dict(n=100, sample_rate=10.0, psd=3), TypeError, "psd"),
        (dict(n=100, sample_rate=10.0, psd=lambda f: -np.ones_like(f)), ValueError, "psd must be non-negative.*-1.0"),
        (dict(n=100, sample_rate=10.0, psd=lambda f: np.full(f.shape, np.nan)), ValueError, "psd must not contain NaN"),
        (dict(n=100, sample_rate=10.0, psd=lambda f: np.ones(3)), ValueError, "returned shape"),
        (dict(n=100, sample_rate=10.0, f_low=-1.0), ValueError, "f_low"),
    ],
)
def test_noise_errors(kwargs, exc, pattern):
    with pytest.raises(exc, match=pattern):
        colored_gaussian_noise(**kwargs)


# ---------------------------------------------------------------------------
# injections
# ---------------------------------------------------------------------------
def _matched_filter(data, template_fd, psd, fs, f_low):
    """Complex SNR series z_j = 4 df N ifft(d~ h~* / S) / sigma (Allen et al. 2012), numpy only."""
    n = data.size
    df = fs / n
    d = np.fft.rfft(data) / fs
    f = np.arange(d.size) * df
    band = (f >= f_low) & np.isfinite(psd) & (psd > 0)
    w = np.zeros(d.size, complex)
    w[band] = d[band] * np.conj(template_fd[band]) / psd[band]
    sigma = math.sqrt(4 * df * np.sum(np.abs(template_fd[band]) ** 2 / psd[band]))
    full = np.zeros(n, complex)
    full[: d.size] = w
    return 4 * df * n * np.fft.ifft(full) / sigma, sigma


@pytest.fixture(scope="module")
def setup():
    fs, n = 2048.0, 2**17  # 64 s
    f_low = 30.0
    m1, m2 = 3.0, 2.0
    df = fs / n
    psd = chirpsift.design_psd(np.arange(n // 2 + 1) * df, "gen2-zero-detuned")
    tmpl = chirpsift.taylorf2(m1, m2, f_low=f_low, df=df, n_freq=n // 2 + 1, dtype=np.complex128)[0]
    return dict(fs=fs, n=n, f_low=f_low, m1=m1, m2=m2, psd=psd, tmpl=tmpl)


def test_injection_recovers_optimal_snr_and_phase(setup):
    """Consistency test: ``optimal_snr``, ``inject_taylorf2`` and the matched filter here
    are all built from ``chirpsift.taylorf2``, so their 1e-9 agreement shows they share
    one convention, not that the convention is right (a common scale or phase error
    would cancel). The outside checks beside it are
    ``test_optimal_snr_matches_spa_integral`` (the SPA amplitude integrated with scipy)
    and ``test_optimal_snr_horizon_of_design_fit`` (a published horizon distance)."""
    fs, n, f_low = setup["fs"], setup["n"], setup["f_low"]
    t0 = 500.0
    j0 = 50 * int(fs) + 123  # on the sample grid
    tc = t0 + j0 / fs
    phase = 0.9
    distance = 40.0
    x = inject_taylorf2(np.zeros(n), fs, m1=setup["m1"], m2=setup["m2"], t_coalescence=tc,
                        distance=distance, phase=phase, f_low=f_low, t0=t0)
    z, sigma_1mpc = _matched_filter(x, setup["tmpl"], setup["psd"], fs, f_low)
    rho = optimal_snr(setup["m1"], setup["m2"], distance=distance, psd="gen2-zero-detuned",
                      f_low=f_low, sample_rate=fs, n=n)
    assert rho == pytest.approx(sigma_1mpc / distance, rel=1e-9)
    assert int(np.argmax(np.abs(z))) == j0
    assert abs(z[j0]) == pytest.approx(rho, rel=1e-6)
    assert np.angle(z[j0]) == pytest.approx(phase, abs=1e-6)


def test_injection_in_noise_recovers_optimal_snr(setup):
    # in Gaussian noise z(t_c) = sigma e^{i phi} + n with E|n|^2 = 2, so |z| - sigma is
    # about N(0, 1) for sigma >> 1; allow 5 standard deviations
    fs, n, f_low = setup["fs"], setup["n"], setup["f_low"]
    t0 = 0.0
    j0 = 40 * int(fs)
    rho_1mpc = optimal_snr(setup["m1"], setup["m2"], psd="gen2-zero-detuned", f_low=f_low, sample_rate=fs, n=n)
    distance = rho_1mpc / 20.0
    noise = colored_gaussian_noise(n, fs, "gen2-zero-detuned", seed=99)
    x = inject_taylorf2(noise, fs, m1=setup["m1"], m2=setup["m2"], t_coalescence=t0 + j0 / fs,
                        distance=distance, f_low=f_low)
    z, _ = _matched_filter(x, setup["tmpl"], setup["psd"], fs, f_low)
    assert abs(abs(z[j0]) - 20.0) < 5.0
    z_noise, _ = _matched_filter(noise, setup["tmpl"], setup["psd"], fs, f_low)
    # noise alone: <|z|^2> = 2 (chi-squared with 2 degrees of freedom); the mean over n
    # samples is correlated over about a template autocorrelation length, so a 10%
    # tolerance is generous yet tests the normalisation
    assert np.mean(np.abs(z_noise) ** 2) == pytest.approx(2.0, rel=0.1)


def test_injection_energy_ends_at_coalescence(setup):
    # an inspiral ends at coalescence: essentially all its energy lies in the SPA time
    # span [t_c - chirp duration, t_c]
    fs, n, f_low = setup["fs"], setup["n"], setup["f_low"]
    j0 = 50 * int(fs)
    x = inject_taylorf2(np.zeros(n), fs, m1=setup["m1"], m2=setup["m2"], t_coalescence=j0 / fs,
                        distance=1.0, f_low=f_low)
    dur = float(np.asarray(chirpsift.chirp_duration(setup["m1"], setup["m2"], f_low)).reshape(-1)[0])
    margin = int(0.5 * fs)
    start = max(0, j0 - int(dur * fs) - margin)
    inside = np.sum(x[start: j0 + margin] ** 2)
    assert inside / np.sum(x**2) > 0.99
    # and the strain is of the size of the leading-order amplitude at ~1 Mpc (1e-20 - 1e-18)
    assert 1e-21 < np.max(np.abs(x)) < 1e-17


def test_optimal_snr_horizon_of_design_fit():
    # REFERENCES item 9 (f): horizon 436 Mpc for 1.4+1.4 Msun at SNR 8 from 20 Hz
    rho = optimal_snr(1.4, 1.4, distance=436.0, psd="gen2-zero-detuned", f_low=20.0, sample_rate=4096.0, n=2**20)
    assert rho == pytest.approx(8.0, rel=5e-3)


def test_optimal_snr_matches_spa_integral():
    # rho^2 = 4 int A^2 f^(-7/3) / S df from f_low to f_ISCO, A of REFERENCES item 2
    m1, m2, f_low, dist = 10.0, 5.0, 25.0, 100.0
    mtot = m1 + m2
    mc = (m1 * m2) ** 0.6 / mtot**0.2
    amp = math.sqrt(5 / 24) * math.pi ** (-2 / 3) * C / (dist * MPC) * (mc * T_SUN) ** (5 / 6)
    f_isco = 1 / (6**1.5 * math.pi * mtot * T_SUN)

    def integrand(f):
        return amp**2 * f ** (-7 / 3) / float(chirpsift.design_psd(np.array([f]))[0])

    val, _ = scipy_integrate.quad(integrand, f_low, f_isco, limit=200)
    expect = math.sqrt(4 * val)
    rho = optimal_snr(m1, m2, distance=dist, psd="gen2-zero-detuned", f_low=f_low, sample_rate=2048.0, n=2**19)
    # the discrete sum on a 1/256 Hz grid differs from the integral by ~1e-4
    assert rho == pytest.approx(expect, rel=2e-3)


def test_optimal_snr_psd_samples_and_arrays(setup):
    fs, n = setup["fs"], setup["n"]
    f = np.arange(0, fs / 2 + 0.25, 0.25)
    samples = chirpsift.design_psd(f)
    a = optimal_snr(setup["m1"], setup["m2"], psd=samples, psd_freqs=f, f_low=30.0, sample_rate=fs, n=n)
    b = optimal_snr(setup["m1"], setup["m2"], psd="gen2-zero-detuned", f_low=30.0, sample_rate=fs, n=n)
    # linear interpolation of a smooth curve sampled every 0.25 Hz: sub-percent difference
    assert a == pytest.approx(b, rel=1e-2)
    arr = optimal_snr([3.0, 6.0], [2.0, 6.0], psd="gen2-zero-detuned", f_low=30.0, sample_rate=fs, n=n)
    assert arr.shape == (2,) and arr[0] == pytest.approx(b, rel=1e-12)
    with pytest.raises(ValueError, match="psd_freqs is required"):
        optimal_snr(3.0, 2.0, psd=samples, f_low=30.0, sample_rate=fs, n=n)


def test_injection_errors_and_wrap_warning(setup):
    fs = 256.0
    data = np.zeros(int(16 * fs))
    with pytest.raises(ValueError, match="t_coalescence=20.0 s lies outside"):
        inject_taylorf2(data, fs, m1=10.0, m2=10.0, t_coalescence=20.0, distance=1.0, f_low=30.0)
    with pytest.raises(ValueError, match="distance"):
        inject_taylorf2(data, fs, m1=10.0, m2=10.0, t_coalescence=8.0, distance=-1.0, f_low=30.0)
    with pytest.raises(ValueError, match="m2"):
        inject_taylorf2(data, fs, m1=10.0, m2=0.0, t_coalescence=8.0, distance=1.0, f_low=30.0)
    with pytest.raises(ValueError, match="chi1"):
        inject_taylorf2(data, fs, m1=10.0, m2=1.0, chi1=1.2, t_coalescence=8.0, distance=1.0, f_low=30.0)
    with pytest.raises(ValueError, match="1-D"):
        inject_taylorf2(np.zeros((2, 8)), fs, m1=10.0, m2=1.0, t_coalescence=0.0, distance=1.0, f_low=30.0)
    with pytest.warns(UserWarning, match="wraps round"):
        inject_taylorf2(data, fs, m1=1.4, m2=1.4, t_coalescence=8.0, distance=1.0, f_low=30.0)
    out = inject_taylorf2(data, fs, m1=20.0, m2=20.0, t_coalescence=8.0, distance=1.0, f_low=30.0)
    assert out is not data and np.all(data == 0)
