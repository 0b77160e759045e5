"""The fused segment kernel: agreement with its numpy twin and the statistics of
matched filtering and Allen's chi-squared in Gaussian noise."""

import numpy as np
import pytest

import chirpsift as cs
import chirpsift.reference as ref
from chirpsift.reference import fused as ref_fused

FS = 1024.0
T = 128.0
N = int(FS * T)
DF = 1.0 / T
NF = N // 2 + 1
FREQS = np.arange(NF) * DF
PSD = cs.design_psd(FREQS)  # second-generation design fit, realistic 1e-47/Hz scale
F_LOW = 30.0


def gaussian_noise_fd(rng):
    """Stationary Gaussian noise in the frequency domain: E|n~|^2 = T S / 2
    (one-sided PSD convention, Allen et al. 2012)."""
    s = np.where(np.isfinite(PSD), PSD, 0.0)
    return (rng.normal(size=NF) + 1j * rng.normal(size=NF)) * np.sqrt(T * s / 4)


def injection(m1, m2, snr, t_c, phase=0.0, chi1=0.0, chi2=0.0, psd=PSD, f_low=F_LOW, df=DF):
    """A TaylorF2 signal of optimal SNR ``snr`` coalescing at ``t_c``, built by the
    pure-numpy twin (direct phase formula, direct norm sum), not by the kernels
    under test."""
    nf = psd.shape[0]
    f = np.arange(nf) * df
    h = ref.taylorf2(m1, m2, chi1, chi2, f_low=f_low, df=df, n_freq=nf, dtype=np.complex128)[0]
    sig = float(np.ravel(ref.sigma(h, psd, df, f_low))[0])
    return h * np.exp(-2j * np.pi * f * t_c) * np.exp(1j * phase) * (snr / sig)


def newtonian_weight(m1, m2, psd, f_low, df):
    """Normalised weight |h~|^2 / S of a TaylorF2 template: f^(-7/3) / S on
    [f_low, f_ISCO), analytic (Cutler & Flanagan 1994 amplitude; ISCO frequency
    1 / (6^(3/2) pi M T_sun), REFERENCES item 4)."""
    f = np.arange(psd.shape[0]) * df
    f_isco = 1.0 / (6**1.5 * np.pi * (m1 + m2) * ref.T_SUN)
    inside = (f >= f_low) & (f < f_isco) & np.isfinite(psd)
    w = np.zeros(f.shape)
    w[inside] = f[inside] ** (-7 / 3) / psd[inside]
    return f, w / w.sum()


def test_fused_kernel_equals_numpy_twin():
    # The twin builds full SNR series with numpy's FFT and the direct TaylorF2 formula.
    rng = np.random.default_rng(11)
    data = gaussian_noise_fd(rng) + injection(9.0, 7.0, 14.0, 70.3, 0.4)
    m1 = np.array([9.0, 8.5, 10.0, 6.0])
    m2 = np.array([7.0, 7.0, 7.5, 6.0])
    kw = dict(f_low=F_LOW, min_snr=4.5, cluster_samples=256, chi2_bands=8, valid=(int(20 * FS), int(120 * FS)))
    a = cs.filter_segment(data, PSD, DF, m1, m2, **kw)
    b = ref_fused.filter_segment(data, PSD, DF, m1, m2, **kw)
    assert len(a["snr"]) > 4  # loud injection plus noise peaks in every template
    np.testing.assert_array_equal(a["template"], b["template"])
    np.testing.assert_array_equal(a["index"], b["index"])
    # float32 transform in the kernel vs float64 numpy: agreement to ~1e-5 relative.
    np.testing.assert_allclose(a["position"], b["position"], atol=1e-3)
    np.testing.assert_allclose(a["snr"], b["snr"], rtol=1e-4)
    np.testing.assert_allclose(a["sigma"], b["sigma"], rtol=1e-6)
    np.testing.assert_allclose(a["chi2"], b["chi2"], rtol=1e-3, atol=1e-3)
    np.testing.assert_allclose(np.angle(np.exp(1j * (a["phase"] - b["phase"]))), 0.0, atol=1e-3)


def test_results_do_not_depend_on_thread_count():
    rng = np.random.default_rng(3)
    data = gaussian_noise_fd(rng)
    m1 = np.linspace(5, 12, 9)
    kw = dict(f_low=F_LOW, min_snr=4.0, cluster_samples=100, valid=(int(10 * FS), int(120 * FS)))
    before = cs.get_threads()
    try:
        cs.set_threads(1)
        one = cs.filter_segment(data, PSD, DF, m1, 5.0, **kw)
        cs.set_threads(2)
        two = cs.filter_segment(data, PSD, DF, m1, 5.0, **kw)
    finally:
        cs.set_threads(before)
    for key in one:
        np.testing.assert_array_equal(one[key], two[key])


def test_noise_peak_rate_follows_rice_formula():
    # Rice (1945) / Cramer & Leadbetter (1967) (from memory): the envelope R = |z| of a
    # stationary complex Gaussian process with unit-variance quadratures crosses level
    # u upwards at rate u sqrt(Delta / (2 pi)) exp(-u^2 / 2), Delta the variance of the
    # angular frequency under the normalised spectrum |h~|^2 / S. At u = 4 each
    # excursion holds one peak, so peaks above threshold count the up-crossings.
    m1, m2, u = 10.0, 8.0, 4.0
    _, w = newtonian_weight(m1, m2, PSD, F_LOW, DF)
    omega = 2 * np.pi * FREQS
    delta = (w * omega**2).sum() - (w * omega).sum() ** 2
    valid = (int(10 * FS), int(120 * FS))
    rng = np.random.default_rng(2024)
    trials = 8
    count = 0
    for _ in range(trials):
        out = cs.filter_segment(gaussian_noise_fd(rng), PSD, DF, m1, m2, f_low=F_LOW, min_snr=u, valid=valid)
        count += len(out["snr"])
    expected = trials * (valid[1] - valid[0]) / FS * u * np.sqrt(delta / (2 * np.pi)) * np.exp(-u * u / 2)
    # Poisson counting error; 4 sigma.
    assert abs(count - expected) < 4 * np.sqrt(expected), (count, expected)


def test_chi2_in_noise_has_allen_mean():
    # Allen 2005 (PRD 71, 062001): in Gaussian noise chi^2 has 2p - 2 degrees of
    # freedom, mean 2p - 2. At peaks of |z| the condition d|z|/dt = 0 is one linear
    # constraint on the band sums, which can remove up to one degree of freedom
    # (our derivation), so the mean lies in [2p - 3, 2p - 2]; statistical error
    # sqrt(2 (2p - 2) / n) per peak sample, 4 sigma allowed.
    p = 16
    rng = np.random.default_rng(7)
    chis = []
    for _ in range(3):
        out = cs.filter_segment(gaussian_noise_fd(rng), PSD, DF, 10.0, 8.0, f_low=F_LOW, min_snr=2.0,
                                chi2_bands=p, valid=(int(10 * FS), int(120 * FS)))
        chis.append(out["chi2"])
        assert np.all(out["chi2_dof"] == 2 * p - 2)
    chis = np.concatenate(chis)
    err = 4 * np.sqrt(2 * (2 * p - 2) / chis.size)
    assert 2 * p - 3 - err < chis.mean() < 2 * p - 2 + err, (chis.mean(), chis.size)


@pytest.mark.parametrize("snr", [10.0, 40.0])
def test_exactly_matching_signal_leaves_chi2_at_noise_level(snr):
    # Allen 2005: a signal matching the template contributes z/p to every band, which
    # cancels in z_l - z/p, so chi^2 keeps its noise distribution at any amplitude.
    # With 2p - 2 = 14 dof (p = 8), P(chi^2 > 40) = scipy.stats.chi2.sf(40, 14) = 2.6e-4,
    # so a single trial exceeding 40 signals a failure.
    rng = np.random.default_rng(int(snr))
    data = gaussian_noise_fd(rng) + injection(9.0, 7.0, snr, 64.0 + 0.37 / FS)
    out = cs.filter_segment(data, PSD, DF, 9.0, 7.0, f_low=F_LOW, min_snr=snr / 2, chi2_bands=8,
                            cluster_samples=int(FS), valid=(int(10 * FS), int(120 * FS)))
    loud = int(np.argmax(out["snr"]))
    assert abs(out["snr"][loud] - snr) < 4.0  # SNR of a matching template: optimal SNR +- noise
    assert abs(out["position"][loud] / FS - (64.0 + 0.37 / FS)) < 1.0 / FS
    assert out["chi2"][loud] < 40.0


def sine_gaussian_fd(f0, q, t0, snr):
    """A sine-Gaussian burst (invented glitch) of SNR ``snr`` in the data's noise."""
    tau = q / (np.sqrt(2) * np.pi * f0)
    g = np.exp(-((FREQS - f0) ** 2) * (np.pi * tau) ** 2) * np.exp(-2j * np.pi * FREQS * t0)
    norm = np.sqrt(4 * DF * np.sum(np.abs(g) ** 2 * np.where(np.isfinite(PSD), 1 / PSD, 0)))
    return g * snr / norm


def test_glitch_is_down_weighted_but_signal_is_not():
    # Allen 2005: power concentrated in one band gives a large chi^2; Babak et al. 2013
    # reweighted SNR then falls well below the SNR. A matching chirp keeps its SNR.
    rng = np.random.default_rng(99)
    data = gaussian_noise_fd(rng) + sine_gaussian_fd(120.0, 9.0, 40.0, 300.0) + injection(9.0, 7.0, 12.0, 90.0)
    out = cs.filter_segment(data, PSD, DF, 9.0, 7.0, f_low=F_LOW, min_snr=6.0, chi2_bands=16,
                            cluster_samples=int(2 * FS), valid=(int(10 * FS), int(120 * FS)))
    t = out["position"] / FS
    rw = cs.reweighted_snr(out["snr"], out["chi2"], out["chi2_dof"])
    glitch = np.argmin(np.abs(t - 40.0))
    chirp = np.argmin(np.abs(t - 90.0))
    assert abs(t[glitch] - 40.0) < 0.5 and abs(t[chirp] - 90.0) < 1.0 / FS
    assert out["chi2"][glitch] / out["chi2_dof"][glitch] > 10
    assert rw[glitch] < 0.5 * out["snr"][glitch]
    assert rw[chirp] > 0.9 * out["snr"][chirp]


def test_reweighted_snr_matches_published_check_values():
    # Babak et al. 2013 (arXiv:1208.3491) formula; check values from shared REFERENCES item 7
    # (computed from the formula, which is from memory).
    rho = np.array([10, 10, 10, 8, 12.0])
    chi2 = np.array([30, 60, 150, 100, 20.0])
    p = np.array([16, 16, 16, 16, 4])
    expected = [10, 7.782717, 5.013141, 4.896591, 7.344887]
    np.testing.assert_allclose(cs.reweighted_snr(rho, chi2, 2 * p - 2), expected, rtol=1e-6)


def test_reweighted_snr_far_beyond_the_float_range_takes_the_formulas_limit():
    # Babak et al. 2013 (arXiv:1208.3491): for a reduced chi-squared r >> 1 the factor
    # ((1 + r^3) / 2)^(-1/6) tends to 2^(1/6) r^(-1/2), and to 0 as r overflows; no
    # overflow warning on the way (pytest runs with warnings as errors).
    r = np.array([3e99, 3e101])
    got = cs.reweighted_snr(np.full(2, 10.0), r * 6.0, np.array([6.0, 6.0]))
    np.testing.assert_allclose(got, 10.0 * 2 ** (1 / 6) / np.sqrt(r), rtol=1e-12)
    assert cs.reweighted_snr(10.0, 1e200, 6.26e-175) == 0.0
    assert cs.reweighted_snr(10.0, 1.0, 6.26e-175) == pytest.approx(10.0 * 2 ** (1 / 6) / np.sqrt(1 / 6.26e-175))


def test_filter_segment_rejects_bad_input():
    d = np.zeros(NF, complex)
    with pytest.raises(ValueError, match="f_low"):
        cs.filter_segment(d, PSD, DF, 9.0, 7.0, f_low=600.0)
    with pytest.raises(ValueError, match="m2"):
        cs.filter_segment(d, PSD, DF, 9.0, -7.0, f_low=30.0)
    with pytest.raises(ValueError, match="valid"):
        cs.filter_segment(d, PSD, DF, 9.0, 7.0, f_low=30.0, valid=(0, N))
    with pytest.raises(ValueError, match="psd"):
        cs.filter_segment(d, PSD[:-1], DF, 9.0, 7.0, f_low=30.0)
    with pytest.raises(ValueError, match="data_fd"):
        cs.filter_segment(d * np.nan, PSD, DF, 9.0, 7.0, f_low=30.0)


@pytest.mark.parametrize("m1, m2", [(1.6, 1.3), (12.0, 9.0), (30.0, 25.0)])
def test_decimated_search_matches_full_rate_series(m1, m2):
    # At 4096 Hz the kernel runs each template's inverse FFT on a shortened grid
    # (decimation chosen from its rms bandwidth) and re-evaluates candidates exactly.
    # Against the full-rate numpy twin (numpy FFT of the whole series) the refined
    # peaks of injections must agree to < 0.5% in SNR and < 0.1 sample in time
    # (the accuracy budget of the decimated path).
    fs, t = 4096.0, 64.0
    n = int(fs * t)
    nf = n // 2 + 1
    f = np.arange(nf) / t
    psd = cs.design_psd(f)
    rng = np.random.default_rng(int(m1 * 10))
    noise = (rng.normal(size=nf) + 1j * rng.normal(size=nf)) * np.sqrt(t * np.where(np.isfinite(psd), psd, 0) / 4)
    f_low = 30.0
    t_c = 50.0 + 0.31 / fs
    data = noise + injection(m1, m2, 15.0, t_c, psd=psd, f_low=f_low, df=1 / t)
    kw = dict(f_low=f_low, min_snr=8.0, cluster_samples=int(fs), chi2_bands=8, valid=(int(30 * fs), int(62 * fs)))
    a = cs.filter_segment(data, psd, 1 / t, m1, m2, **kw)
    b = ref_fused.filter_segment(data, psd, 1 / t, m1, m2, **kw)
    assert len(a["snr"]) == len(b["snr"]) == 1
    assert a["index"][0] == b["index"][0]
    assert abs(a["snr"][0] / b["snr"][0] - 1) < 5e-3
    assert abs(a["position"][0] - b["position"][0]) < 0.1
    # Against the true time: noise moves the peak by ~ 1 / (2 pi sigma_f rho), the
    # timing accuracy of a matched filter (Cramer-Rao bound; common practice); 4 sigma.
    _, w = newtonian_weight(m1, m2, psd, f_low, 1 / t)
    sigma_f = np.sqrt((w * f**2).sum() - (w * f).sum() ** 2)
    assert abs(a["position"][0] / fs - t_c) < 4 / (2 * np.pi * sigma_f * 15.0)


def test_folded_decimation_matches_full_rate_series():
    # A PSD rising steeply above 40 Hz concentrates a light template's weight at low
    # frequency (small rms bandwidth, so large decimation) while its band still runs
    # to the ISCO frequency: the band is wider than the decimated transform and bins
    # fold modulo its length. The refined peaks must still equal the full-rate numpy
    # twin's (same budget as above: < 0.5% in SNR, < 0.1 sample).
    fs, t = 4096.0, 32.0
    n = int(fs * t)
    nf = n // 2 + 1
    f = np.arange(nf) / t
    psd = cs.design_psd(f) * np.maximum(f / 40.0, 1.0) ** 8
    rng = np.random.default_rng(8)
    noise = (rng.normal(size=nf) + 1j * rng.normal(size=nf)) * np.sqrt(t * np.where(np.isfinite(psd), psd, 0) / 4)
    _, w = newtonian_weight(2.0, 1.5, psd, 30.0, 1 / t)
    sigma_f = np.sqrt((w * f**2).sum() - (w * f).sum() ** 2)
    band = np.count_nonzero(w)
    assert band > n / 16 and 0.5 * (np.pi * sigma_f * 16 / fs) ** 2 < 0.02  # folds at D >= 16
    data = noise + injection(2.0, 1.5, 20.0, 28.0, psd=psd, f_low=30.0, df=1 / t)
    kw = dict(f_low=30.0, min_snr=10.0, cluster_samples=int(fs), chi2_bands=8, valid=(int(20 * fs), int(31 * fs)))
    a = cs.filter_segment(data, psd, 1 / t, 2.0, 1.5, **kw)
    b = ref_fused.filter_segment(data, psd, 1 / t, 2.0, 1.5, **kw)
    assert len(a["snr"]) == len(b["snr"]) == 1
    assert a["index"][0] == b["index"][0]
    assert abs(a["snr"][0] / b["snr"][0] - 1) < 5e-3
    assert abs(a["position"][0] - b["position"][0]) < 0.1
    assert abs(a["chi2"][0] - b["chi2"][0]) < 1e-3 * max(1.0, b["chi2"][0])


def test_prepared_bank_gives_the_same_peaks_as_parameter_arrays():
    # Consistency (same kernel both ways): a bank built once and reused equals the
    # per-call parameters; the outside checks above cover the values themselves.
    rng = np.random.default_rng(5)
    data = gaussian_noise_fd(rng) + injection(9.0, 7.0, 12.0, 70.0)
    m1, m2 = np.array([9.0, 8.0]), np.array([7.0, 7.5])
    kw = dict(min_snr=5.0, cluster_samples=256, valid=(int(20 * FS), int(120 * FS)))
    bank = cs.prepare_bank(m1, m2, f_low=F_LOW)
    assert len(bank) == 2 and bank.f_low == F_LOW
    np.testing.assert_allclose(bank.f_high, ref.isco_frequency(m1, m2), rtol=1e-12)
    np.testing.assert_allclose(bank.durations, ref.chirp_duration(m1, m2, F_LOW), rtol=1e-12)
    a = cs.filter_segment(data, PSD, DF, bank=bank, **kw)
    b = cs.filter_segment(data, PSD, DF, m1, m2, f_low=F_LOW, **kw)
    for key in cs.PEAK_COLUMNS:
        np.testing.assert_array_equal(a[key], b[key])
    with pytest.raises(TypeError, match="bank"):
        cs.filter_segment(data, PSD, DF, m1, m2, bank=bank, **kw)
    with pytest.raises(ValueError, match="f_low"):
        cs.filter_segment(data, PSD, DF, bank=bank, f_low=25.0, **kw)


def test_peak_columns_match_the_twin():
    out = ref_fused.filter_segment(np.zeros(NF, complex), PSD, DF, 9.0, 7.0, f_low=F_LOW)
    assert tuple(out) == cs.PEAK_COLUMNS
