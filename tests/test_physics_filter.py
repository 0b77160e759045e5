"""Matched-filter kernels against outside sources: the direct formulas of
Allen et al. 2012 (PRD 85, 122006, arXiv:gr-qc/0509116), the horizon formula
(REFERENCES item 10), Gaussian-noise statistics, and scipy.signal.correlate."""

import math

import numpy as np
import pytest
import scipy.signal

C = 299792458.0                                   # m/s, exact SI
T_SUN = 1.3271244e20 / C**3                       # s, IAU 2015 B3 (REFERENCES 14)

FS = 4096.0
N = 2**16                                         # 16 s segments
DF = FS / N
NF = N // 2 + 1
F = np.arange(NF) * DF


def _isco(m):
    return 1.0 / (6**1.5 * math.pi * m * T_SUN)    # REFERENCES item 4


def _noise_fd(rng, s, shape=()):
    """Frequency-domain Gaussian noise, E|n~|^2 = T S/2 (real and imaginary
    parts each of variance T S/4), zero where S is inf (Allen et al. 2012:
    <n~(f) n~*(f')> = S/2 delta(f - f'))."""
    t = N / FS
    sd = np.sqrt(np.where(np.isfinite(s), t * s / 4.0, 0.0))
    return sd * (rng.standard_normal(shape + s.shape) + 1j * rng.standard_normal(shape + s.shape))


@pytest.fixture(scope="module")
def psd():
    # realistic scale: second-generation design curve, ~1e-47 /Hz in band
    # (REFERENCES item 9 f); computed directly from the published fit so the
    # filter tests do not depend on design_psd
    x = np.where(F >= 10.0, F, 10.0) / 245.4
    s = 1e-48 * (0.0152 * x**-4 + 0.2935 * x**2.25 + 2.7951 * x**1.5 - 6.5080 * x**0.75 + 17.7622)
    return np.where(F >= 10.0, s, np.inf)


# ---------------------------------------------------------------------------
# sigma
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("f_low,f_high", [(20.0, None), (30.0, 700.0), (0.0, None)])
def test_sigma_direct_formula(impl, rng, psd, f_low, f_high):
    """sigma = sqrt(4 df sum_band |h~|^2 / S) (Allen et al. 2012), random
    strain-scale templates (|h~| ~ 1e-23 /Hz), inf PSD bins contribute 0."""
    h = 1e-23 * (rng.standard_normal((3, NF)) + 1j * rng.standard_normal((3, NF)))
    band = (F >= f_low) & (F < (np.inf if f_high is None else f_high)) & np.isfinite(psd)
    expected = np.sqrt(4 * DF * np.sum(np.abs(h[:, band]) ** 2 / psd[band], axis=1))
    for dtype in (np.complex128, np.complex64):
        got = impl.sigma(h.astype(dtype), psd, DF, f_low, f_high)
        assert got.shape == (3,) and got.dtype == np.float64
        # complex64 input rounds each |h~|^2 by ~1e-7 relative
        np.testing.assert_allclose(got, expected, rtol=1e-10 if dtype == np.complex128 else 1e-6)


@pytest.mark.parametrize("curve_params", [
    # (fit parameters of REFERENCES item 9, f_L, published horizon in Mpc)
    ("gen2-zero-detuned", 20.0, 436.0),
    ("gen2-zero-detuned", 10.0, 446.0),
    ("gen1-4km", 40.0, 31.2),
])
def test_sigma_gives_horizon(impl, curve_params):
    """REFERENCES item 10: a template at D = 1 Mpc has sigma = optimal SNR at
    1 Mpc, so sigma/8 is the horizon in Mpc for SNR 8 (1.4+1.4, Newtonian
    SPA to f_ISCO). Published table values (V-derived), within 1%; the sum
    on a 1/16-Hz grid differs from the integral by far less."""
    curve, f_low, horizon = curve_params
    df = 1.0 / 16
    nf = int(2048 / df) + 1
    f = np.arange(nf) * df
    s = impl.design_psd(f, curve)
    h = impl.taylorf2(1.4, 1.4, f_low=f_low, df=df, n_freq=nf, distance=1.0,
                      dtype=np.complex128)
    assert impl.sigma(h, s, df, f_low)[0] / 8.0 == pytest.approx(horizon, rel=0.01)
    # same with float32 storage of the template (strain ~1e-19 /Hz at 1 Mpc)
    h32 = impl.taylorf2(1.4, 1.4, f_low=f_low, df=df, n_freq=nf, distance=1.0)
    assert impl.sigma(h32, s, df, f_low)[0] / 8.0 == pytest.approx(horizon, rel=0.01)


# ---------------------------------------------------------------------------
# snr_series
# ---------------------------------------------------------------------------

def _weights(h, s, f_low):
    """Per-bin weights w_k = 8 df |h~_k|^2 / (S_k sigma^2): mean |z|^2 over
    the series equals sum_k w_k E_k with E_k ~ Exp(1) (Parseval), so its
    expectation is sum w = 2 and its variance sum w^2."""
    band = (F >= f_low) & np.isfinite(s)
    p = np.zeros(NF)
    p[band] = np.abs(h[band]) ** 2 / s[band]
    sig2 = 4 * DF * p.sum()
    return 8 * DF * p / sig2


@pytest.mark.parametrize("dtype", [np.complex64, np.complex128])
def test_snr_gaussian_noise_mean_two(impl, rng, psd, dtype):
    """Allen et al. 2012: in Gaussian noise |z|^2 is chi-squared with 2
    degrees of freedom, mean 2. Per realisation the series mean has
    variance sum_k w_k^2 (see _weights); over R independent realisations the
    grand mean has standard error sqrt(sum w^2 / R); accept 5 sigma.
    Also P(|z|^2 > 2 x) = exp(-x): check the tail fraction above 9.21
    (p = 0.01) within 5 binomial sigma of the effective number of
    independent samples."""
    f_low = 20.0
    temp = impl.taylorf2([1.4, 10.0], [1.4, 8.0], f_low=f_low, df=DF, n_freq=NF,
                         distance=100.0, dtype=np.complex128)
    reps = 4
    means = np.zeros((reps, 2))
    tail = np.zeros((reps, 2))
    for r in range(reps):
        d = _noise_fd(rng, psd)
        z = impl.snr_series(d, temp.astype(dtype), psd, DF, f_low, dtype=dtype)
        assert z.shape == (2, N) and z.dtype == dtype
        a2 = np.abs(z.astype(np.complex128)) ** 2
        means[r] = a2.mean(axis=1)
        tail[r] = (a2 > -2 * math.log(0.01)).mean(axis=1)
    for i in range(2):
        w = _weights(temp[i], psd, f_low)
        assert w.sum() == pytest.approx(2.0, rel=1e-12)
        se = math.sqrt(np.sum(w**2) / reps)
        assert abs(means[:, i].mean() - 2.0) < 5 * se, (i, means[:, i], se)
        # effective number of independent |z|^2 samples per series:
        # n_eff = (sum w)^2 / sum w^2 (Kish), and the tail fraction's
        # standard error is sqrt(p (1-p) / (reps n_eff))
        n_eff = w.sum() ** 2 / np.sum(w**2)
        se_tail = math.sqrt(0.01 * 0.99 / (reps * n_eff))
        assert abs(tail[:, i].mean() - 0.01) < 5 * se_tail


def test_snr_injection_recovered(impl, rng, psd):
    """A template injected with a time shift t0 (exp(-2 pi i f t0)) at
    optimal SNR 12 (amplitude 12 / sigma, sigma of Allen et al. 2012) is
    recovered: without noise z = 12 exactly at sample t0 fs (phase 0);
    with noise z(t0) = 12 + n, n complex Gaussian with E|n|^2 = 2, so
    |z(t0) - 12| < 5.26 except with probability exp(-5.26^2/2) = 1e-6. The
    global peak lies where the noise-free |z| is within 2 x 5.26 of 12, and
    no noise excursion elsewhere (prob. N exp(-(12 - 5.26)^2/2) < 1e-5)
    can outgrow it."""
    f_low = 20.0
    h = impl.taylorf2(1.4, 1.4, f_low=f_low, df=DF, n_freq=NF, distance=100.0,
                      dtype=np.complex128)[0]
    band = (F >= f_low) & np.isfinite(psd)
    sig = math.sqrt(4 * DF * np.sum(np.abs(h[band]) ** 2 / psd[band]))
    j0 = 23456
    t0 = j0 / FS
    signal = (12.0 / sig) * h * np.exp(-2j * math.pi * F * t0)
    # realistic scale: the injected template is a strain of ~1e-22
    assert 1e-24 < np.max(np.abs(np.fft.irfft(signal / (1 / FS), N))) < 1e-20

    z_clean = impl.snr_series(signal, h, psd, DF, f_low, dtype=np.complex128)[0]
    assert np.argmax(np.abs(z_clean)) == j0
    assert z_clean[j0] == pytest.approx(12.0 + 0j, abs=1e-8)

    z_clean32 = impl.snr_series(signal.astype(np.complex64), h.astype(np.complex64),
                                psd, DF, f_low)[0]
    assert abs(z_clean32[j0] - 12.0) < 1e-4            # float32 storage

    r = math.sqrt(-2 * math.log(1e-6))
    data = signal + _noise_fd(rng, psd)
    z = impl.snr_series(data, h, psd, DF, f_low, dtype=np.complex128)[0]
    assert abs(z[j0] - 12.0) < r
    jp = np.argmax(np.abs(z))
    assert np.abs(z_clean[jp]) >= 12.0 - 2 * r
    assert abs(jp - j0) < 0.05 * FS                  # and near t0 in any case


def test_snr_band_limits(impl, rng, psd):
    """z_j = 4 df sum_band d~ h~* / S e^(2 pi i j k / N) / sigma, evaluated
    literally at a few samples (a DFT sum by hand), f_high honoured."""
    f_low, f_high = 25.0, 600.0
    h = 1e-23 * (rng.standard_normal(NF) + 1j * rng.standard_normal(NF))
    d = _noise_fd(rng, psd)
    band = (F >= f_low) & (F < f_high)
    k = np.nonzero(band)[0]
    sig = math.sqrt(4 * DF * np.sum(np.abs(h[k]) ** 2 / psd[k]))
    z = impl.snr_series(d, h, psd, DF, f_low, f_high, dtype=np.complex128)[0]
    for j in (0, 1, 777, N // 2, N - 1):
        zj = 4 * DF * np.sum(d[k] * np.conj(h[k]) / psd[k] * np.exp(2j * math.pi * j * k / N)) / sig
        assert z[j] == pytest.approx(zj, rel=1e-9, abs=1e-9 * abs(zj) + 1e-12)


# ---------------------------------------------------------------------------
# correlate: scipy.signal.correlate per row
# ---------------------------------------------------------------------------

# lengths odd and even; templates longer than the data only for "full" and
# "same" ("valid" needs m <= n, see test_correlate_valid_rejects_long_template)
_SHORT = [(1000, 37), (1001, 64), (256, 256), (97, 1), (333, 332)]
_LONG = [(50, 81), (64, 201), (7, 8)]
CORR_CASES = ([("valid", n, m) for n, m in _SHORT]
              + [(mode, n, m) for mode in ("full", "same") for n, m in _SHORT + _LONG])


@pytest.mark.parametrize("mode,n,m", CORR_CASES)
@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_correlate_matches_scipy(impl, rng, mode, dtype, n, m):
    data = rng.standard_normal(n).astype(dtype)
    temps = rng.standard_normal((3, m)).astype(dtype)
    got = impl.correlate(data, temps, mode=mode)
    expected = np.stack([scipy.signal.correlate(data.astype(np.float64), t.astype(np.float64), mode=mode)
                         for t in temps])
    assert got.dtype == dtype
    assert got.shape == expected.shape
    # each output is a dot product of m terms: FFT or direct evaluation
    # differ by ~ eps sqrt(log2 n) |data| |template|; allow 20 eps |d| |t|
    eps = np.finfo(dtype).eps
    atol = 20 * eps * np.linalg.norm(data.astype(float)) * np.linalg.norm(temps.astype(float), axis=1).max()
    np.testing.assert_allclose(got, expected, rtol=0, atol=atol)
    # same thing with scipy in the input precision (its own dtype rule)
    sp = scipy.signal.correlate(data, temps[0], mode=mode)
    assert sp.dtype == got.dtype


def test_correlate_mixed_dtype_and_1d(impl, rng):
    data = rng.standard_normal(300).astype(np.float32)
    t = rng.standard_normal(40)                        # float64
    got = impl.correlate(data, t, mode="full")
    # a 1-D template gives a 1-D result, like scipy
    assert got.dtype == np.float64 and got.shape == (339,)
    np.testing.assert_allclose(got, scipy.signal.correlate(data.astype(float), t, mode="full"),
                               rtol=0, atol=1e-12 * np.linalg.norm(data) * np.linalg.norm(t))


def test_correlate_valid_rejects_long_template(impl, rng):
    """DEVELOPERS contract: "valid" needs m <= n."""
    with pytest.raises(ValueError):
        impl.correlate(rng.standard_normal(10), rng.standard_normal((2, 11)), mode="valid")
