"""Projection of injections onto sites: matched-filter SNR and arrival time against the
PSD and the geometry, antenna-response ratios, the Newtonian amplitude, the
polarisation convention, block-wise addition, and bad input.

Sites here are test doubles fixed in the equatorial frame (``_sky_fixed_sites``) whose
response and delay formulas are written out independently of chirpsift."""

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.optimize import minimize_scalar

import chirpsift as cs
from chirpsift.inject import arrival_times, effective_distance, site_response
from _sky_fixed_sites import C, FixedResponse, SkyFixedSite, source_direction, two_sites

FS = 1024.0
T = 64.0
T0 = 1_000_000_000.0
F_LOW = 30.0
PSD = "gen2-zero-detuned"
M1, M2, S1, S2 = 6.0, 4.0, 0.3, -0.2

T_SUN = 4.925490947641267e-6  # G Msun / c^3, IAU 2015 B3 (REFERENCES item 14)
MPC = 3.0856775814913673e22  # m (IAU 2012 B2, 2015 B2)


def _one_injection(seed=2, **fields):
    inj = cs.draw_injections(1, m1=M1, m2=M2, chi1=S1, chi2=S2, distance=(100.0, 101.0), start=T0 + 30.0,
                             end=T0 + 40.0, f_low=F_LOW, seed=seed)
    for k, v in fields.items():
        inj[k] = v
    return inj


class _Filter:
    """Matched filter with the exact template, evaluated at any fractional time:
    z(tau) = 4 df sum d~ h~* / S exp(2 pi i f tau) / sigma (Allen et al. 2012,
    REFERENCES item 6), maximised over tau by scipy."""

    def __init__(self, m1=M1, m2=M2, s1=S1, s2=S2, duration=T, fs=FS):
        n = int(fs * duration)
        self.fs, self.df = fs, 1.0 / duration
        self.f = np.arange(n // 2 + 1) * self.df
        psd = cs.design_psd(self.f, PSD)
        self.h = cs.taylorf2(m1, m2, s1, s2, f_low=F_LOW, df=self.df, n_freq=self.f.size, dtype=np.complex128)[0]
        self.w = np.where(self.f >= F_LOW, 1.0 / psd, 0.0)
        self.sigma = np.sqrt(4 * self.df * np.sum(np.abs(self.h) ** 2 * self.w))

    def z(self, x, tau):
        d = np.fft.rfft(x) / self.fs
        return np.sum(4 * self.df * d * np.conj(self.h) * self.w * np.exp(2j * np.pi * self.f * tau)) / self.sigma

    def peak(self, x, guess):
        d = np.fft.rfft(x) / self.fs
        q = 4 * self.df * d * np.conj(self.h) * self.w / self.sigma
        res = minimize_scalar(lambda tau: -abs(np.sum(q * np.exp(2j * np.pi * self.f * tau))),
                              bounds=(guess - 3 / self.fs, guess + 3 / self.fs), method="bounded",
                              options={"xatol": 1e-10})
        return res.x, np.sum(q * np.exp(2j * np.pi * self.f * res.x))


@pytest.fixture(scope="module")
def matched():
    return _Filter()


@pytest.mark.parametrize("seed", [2, 7])
def test_matched_filter_snr_and_time_match_psd_and_geometry_at_every_site(matched, seed):
    # Matched-filter theory (Allen et al. 2012, PRD 85, 122006): in noiseless data the
    # exact template recovers the optimal SNR sqrt(<h|h>), at the coalescence time; the
    # arrival time is t_geo - r.k/c (REFERENCES item 16), computed here from the site's
    # position, not from chirpsift.
    inj = _one_injection(seed)
    for site in two_sites():
        x = cs.project(inj, site, start=T0, duration=T, sample_rate=FS, f_low=F_LOW)
        expect_t = inj["time"][0] - source_direction(inj["ra"][0], inj["dec"][0]) @ site.position / C
        tau, z = matched.peak(x, expect_t - T0)
        rho = cs.injection_snr(inj, site, PSD, f_low=F_LOW, f_high=FS / 2)[0]
        assert abs(abs(z) / rho - 1) < 0.005
        assert abs((T0 + tau - expect_t) * FS) < 0.1
        # the complex SNR carries the response's phase (module convention): arg z = arg R
        r = site_response(inj, site)[0]
        assert abs(np.angle(z / r)) < 1e-3


def test_amplitude_ratio_between_sites_is_the_ratio_of_antenna_responses(matched):
    # Antenna response |F+ (1 + cos^2 i)/2 + i Fx cos i| (REFERENCES items 2, 16),
    # computed from the test double's own F+, Fx.
    inj = _one_injection(5)
    a, b = two_sites()
    peaks, resp = [], []
    for site in (a, b):
        x = cs.project(inj, site, start=T0, duration=T, sample_rate=FS, f_low=F_LOW)
        guess = arrival_times(inj, site)[0] - T0
        peaks.append(abs(matched.peak(x, guess)[1]))
        fp, fx = site.antenna_pattern(inj["ra"], inj["dec"], inj["polarisation"], inj["time"])
        ci = np.cos(inj["inclination"][0])
        resp.append(np.hypot(fp[0] * (1 + ci**2) / 2, fx[0] * ci))
    assert abs((peaks[0] / peaks[1]) / (resp[0] / resp[1]) - 1) < 1e-3


def test_overhead_face_on_source_has_the_newtonian_amplitude():
    # REFERENCES item 2: |h~(f)| = sqrt(5/24) pi^(-2/3) (c / D) (G Mc / c^3)^(5/6) f^(-7/6)
    # for an optimally oriented source (F+ = 1, face on); checked on 40-400 Hz.
    inj = _one_injection(1, inclination=0.0, phase=0.0)
    x = cs.project(inj, FixedResponse("overhead", 1.0, 0.0), start=T0, duration=T, sample_rate=FS, f_low=F_LOW)
    f = np.fft.rfftfreq(x.size, 1 / FS)
    hf = np.abs(np.fft.rfft(x) / FS)
    mc = (M1 * M2) ** 0.6 / (M1 + M2) ** 0.2
    amp = np.sqrt(5 / 24) * np.pi ** (-2 / 3) * (299792458.0 / (inj["distance"][0] * MPC)) * (mc * T_SUN) ** (5 / 6)
    band = (f > 40) & (f < 400)
    ratio = hf[band] / (amp * f[band] ** (-7 / 6))
    assert np.all(np.abs(ratio - 1) < 0.01)


def test_cross_polarisation_lags_plus_by_a_quarter_cycle(matched):
    # For a face-on source h+ = A cos(Phi), hx = A sin(Phi) (common practice; Anderson
    # et al. 2001): seen by a plus-only and a cross-only site, the complex SNRs have the
    # same modulus and phases a quarter cycle apart, with the sign of the stated
    # convention R = F+ (1 + cos^2 i)/2 - i Fx cos i.
    inj = _one_injection(4, inclination=0.0)
    zs = []
    for site in (FixedResponse("plus", 1.0, 0.0, 0.01), FixedResponse("cross", 0.0, 1.0, 0.01)):
        x = cs.project(inj, site, start=T0, duration=T, sample_rate=FS, f_low=F_LOW)
        zs.append(matched.peak(x, inj["time"][0] + 0.01 - T0)[1])
    assert abs(abs(zs[1]) / abs(zs[0]) - 1) < 1e-4
    assert abs(np.angle(zs[1] / zs[0]) + np.pi / 2) < 1e-3


def test_effective_distance_is_distance_over_response():
    # REFERENCES item 2: D_eff = D / sqrt(F+^2 (1 + cos^2 i)^2 / 4 + Fx^2 cos^2 i).
    inj = cs.draw_injections(50, m1=1.4, m2=1.4, distance=(10, 100), start=0, end=1e4, f_low=40.0, seed=3)
    site = two_sites()[0]
    fp, fx = site.antenna_pattern(inj["ra"], inj["dec"], inj["polarisation"], inj["time"])
    ci = np.cos(inj["inclination"])
    expect = inj["distance"] / np.sqrt(fp**2 * (1 + ci**2) ** 2 / 4 + fx**2 * ci**2)
    np.testing.assert_allclose(effective_distance(inj, site), expect, rtol=1e-12)
    # and the optimal SNR scales as 1 / D_eff: consistency between the two functions
    rho = cs.injection_snr(inj, site, PSD, f_low=40.0)
    rho_opt_1mpc = cs.injection_snr(inj, None, PSD, f_low=40.0) * inj["distance"]
    np.testing.assert_allclose(rho, rho_opt_1mpc / effective_distance(inj, site), rtol=1e-12)


def test_adjacent_spans_add_up_to_one_long_span():
    # Block-wise projection (bounded memory for long data) must not change a sample:
    # consistency of the implementation with itself, beside the physics checks above.
    inj = cs.draw_injections(3, m1=M1, m2=M2, distance=(50, 100), start=T0 + 20, end=T0 + 100, f_low=F_LOW,
                             seed=9)
    site = two_sites()[1]
    whole = cs.project(inj, site, start=T0, duration=128.0, sample_rate=FS, f_low=F_LOW)
    parts = [cs.project(inj, site, start=T0 + s, duration=32.0, sample_rate=FS, f_low=F_LOW, require_overlap=False)
             for s in (0.0, 32.0, 64.0, 96.0)]
    np.testing.assert_array_equal(np.concatenate(parts), whole)
    assert not np.any(parts[3]) and np.any(parts[1])  # the last block holds no signal


def test_signal_is_switched_on_below_f_low_and_silent_before():
    # Nothing before the start of the taper (the generated signal begins at 0.8 f_low):
    # samples earlier than the 3.5PN chirp time from 0.8 f_low are exactly zero, and the
    # in-band power (f >= f_low) carries no ringing from the start: the spectrum of the
    # first half of the taper is far below f_low.
    inj = _one_injection(6, inclination=0.0)
    site = FixedResponse("overhead", 1.0, 0.0)
    x = cs.project(inj, site, start=T0, duration=T, sample_rate=FS, f_low=F_LOW)
    t = T0 + np.arange(x.size) / FS
    t_on = inj["time"][0] - cs.chirp_duration(M1, M2, 0.8 * F_LOW)
    assert np.all(x[t < t_on - 1 / FS] == 0.0) and np.any(x[t < t_on + 1.0] != 0.0)


def test_distances_change_amplitude_as_one_over_d(matched):
    # SNR ~ 1/D (REFERENCES item 2).
    inj = _one_injection(8)
    site = two_sites()[0]
    far = inj.copy()
    far["distance"] *= 3.0
    a = cs.project(inj, site, start=T0, duration=T, sample_rate=FS, f_low=F_LOW)
    b = cs.project(far, site, start=T0, duration=T, sample_rate=FS, f_low=F_LOW)
    np.testing.assert_allclose(b * 3.0, a, rtol=1e-9, atol=1e-12 * np.abs(a).max())


# ---------------------------------------------------------------------------
# bad input
# ---------------------------------------------------------------------------
def test_injections_outside_the_data_are_an_error_naming_the_times():
    inj = _one_injection(1)
    with pytest.raises(ValueError, match="none of the 1 signals"):
        cs.project(inj, two_sites()[0], start=T0 + 1e5, duration=T, sample_rate=FS, f_low=F_LOW)


@pytest.mark.parametrize("field, value, word", [("distance", 0.0, "distance"), ("distance", -3.0, "distance"),
                                                 ("m1", -1.0, "m1"), ("spin1", 1.5, "spin1"),
                                                 ("ra", np.nan, "ra")])
def test_bad_injection_rows_name_the_field_and_value(field, value, word):
    inj = _one_injection(1)
    inj[field] = value
    with pytest.raises(ValueError, match=rf"\['{word}'\] must be .*got {value}"):
        cs.project(inj, two_sites()[0], start=T0, duration=T, sample_rate=FS, f_low=F_LOW)
    with pytest.raises(ValueError, match=word):
        cs.injection_snr(inj, two_sites()[0], PSD, f_low=F_LOW)


def test_other_bad_input():
    inj = _one_injection(1)
    site = two_sites()[0]
    with pytest.raises(ValueError, match="approximant"):
        cs.project(inj, site, start=T0, duration=T, sample_rate=FS, f_low=F_LOW, approximant="other")
    with pytest.raises(TypeError, match="antenna_pattern"):
        cs.project(inj, object(), start=T0, duration=T, sample_rate=FS, f_low=F_LOW)
    with pytest.raises(ValueError, match="f_low"):
        cs.project(inj, site, start=T0, duration=T, sample_rate=FS, f_low=600.0)
    with pytest.raises(ValueError, match="duration"):
        cs.project(inj, site, start=T0, duration=-1.0, sample_rate=FS, f_low=F_LOW)
    with pytest.raises(TypeError, match="injections"):
        cs.project({"time": [1.0]}, site, start=T0, duration=T, sample_rate=FS, f_low=F_LOW)
    with pytest.raises(ValueError, match="lacks the field"):
        cs.project(np.zeros(2, dtype=[("time", "f8")]), site, start=T0, duration=T, sample_rate=FS, f_low=F_LOW)


def test_psd_infinite_in_band_is_an_error_naming_psd_and_frequency():
    inj = _one_injection(1)

    def notched(f):
        out = cs.design_psd(f, PSD)
        out[(f > 100) & (f < 101)] = np.inf
        return out

    with pytest.raises(ValueError, match=r"psd must be finite .* got inf at 100\.0"):
        cs.injection_snr(inj, two_sites()[0], notched, f_low=F_LOW)
    # below the band an infinite PSD is fine (design curves are inf below their validity)
    assert cs.injection_snr(inj, None, "gen2-early", f_low=F_LOW)[0] > 0
    with pytest.raises(TypeError, match="psd"):
        cs.injection_snr(inj, None, 3.0, f_low=F_LOW)


def test_sky_fixed_site_double_matches_the_literature():
    # The test double itself, against REFERENCES item 16: at the zenith of an L-shaped
    # detector F+^2 + Fx^2 = 1; at polar angle 0.7, azimuth 1.1 from the arms it is 0.599897.
    site = SkyFixedSite("pole", [0, 0, 6.4e6], [1, 0, 0], [0, 1, 0])
    fp, fx = site.antenna_pattern(np.array([0.3]), np.array([np.pi / 2]), np.array([0.2]), 0.0)
    assert abs(fp[0] ** 2 + fx[0] ** 2 - 1) < 1e-12
    fp, fx = site.antenna_pattern(np.array([1.1]), np.array([np.pi / 2 - 0.7]), np.array([0.9]), 0.0)
    assert abs(fp[0] ** 2 + fx[0] ** 2 - 0.599897) < 1e-6


@settings(max_examples=40, deadline=None)
@given(distance=st.floats(-1e6, 0.0, allow_nan=False), shift=st.floats(1e3, 1e8))
def test_any_non_positive_distance_or_far_off_time_is_refused(distance, shift):
    # Property: a non-positive distance is an error naming the field and value; a set
    # whose signals all lie outside the data is an error naming the data span.
    inj = _one_injection(1)
    bad = inj.copy()
    bad["distance"] = distance
    with pytest.raises(ValueError, match=r"\['distance'\] must be positive"):
        cs.project(bad, FixedResponse("o", 1.0, 0.0), start=T0, duration=8.0, sample_rate=256.0, f_low=F_LOW)
    with pytest.raises(ValueError, match=r"overlaps the data \["):
        cs.project(inj, FixedResponse("o", 1.0, 0.0), start=T0 + shift, duration=8.0, sample_rate=256.0,
                   f_low=F_LOW)
