"""Injections at two invented sites: projection against the sites' geometry, and a
whole campaign (search, coincidences, time-slide background, found/missed)."""

import numpy as np
import pytest
from astropy.time import Time

import chirpsift as cs
from chirpsift import synthetic
from chirpsift.inject import run_campaign, site_response
from chirpsift.network import Site, coincidences

FS = 512.0
F_LOW = 30.0
T0 = 1_000_000_000.0
CURVE = "gen2-early"
C = 299792458.0

#: Two invented sites about 2,100 km apart (no real observatory).
SITES = [Site("Aster", 46.0, 7.5, 300.0, 10.0, 100.0), Site("Borealis", 60.0, 30.0, 100.0, 200.0, 290.0)]


def _wgs84(lat_deg, lon_deg, h):
    # REFERENCES item 16: WGS-84 geodetic to Earth-fixed, a = 6378137 m, f = 1/298.257223563.
    a, f = 6378137.0, 1 / 298.257223563
    e2 = f * (2 - f)
    lat, lon = np.radians(lat_deg), np.radians(lon_deg)
    n = a / np.sqrt(1 - e2 * np.sin(lat) ** 2)
    return np.array([(n + h) * np.cos(lat) * np.cos(lon), (n + h) * np.cos(lat) * np.sin(lon),
                     (n * (1 - e2) + h) * np.sin(lat)])


def _geometric_arrival(site, ra, dec, t_geo):
    # t_site = t_geo - r . n / c with n toward the source in Earth-fixed axes, its
    # azimuth ra - GMST (GMST from astropy's GPS time scale; REFERENCES item 16), with
    # UT1 = UTC (|UT1 - UTC| < 0.9 s moves a delay by < 1.5 microseconds) so that no
    # Earth-orientation table is fetched.
    t = Time(t_geo, format="gps")
    t.delta_ut1_utc = 0.0
    gmst = t.sidereal_time("mean", "greenwich").radian
    phi = ra - gmst
    n = np.array([np.cos(dec) * np.cos(phi), np.cos(dec) * np.sin(phi), np.sin(dec)])
    return t_geo - _wgs84(site.latitude, site.longitude, site.elevation) @ n / C


def test_projected_signal_peaks_at_the_geometric_arrival_time_with_the_psd_snr():
    # Matched filter with the exact template, evaluated at any fractional time (Allen et
    # al. 2012): SNR = optimal SNR from the PSD within 0.5%, at the arrival time from the
    # WGS-84 position and astropy's sidereal time within 0.1 sample, at both sites.
    from scipy.optimize import minimize_scalar

    duration = 64.0
    inj = cs.draw_injections(1, m1=6.0, m2=4.0, chi1=0.2, distance=(200.0, 201.0), start=T0 + 30, end=T0 + 40,
                             f_low=F_LOW, seed=12)
    n = int(duration * FS)
    f = np.arange(n // 2 + 1) / duration
    h = cs.taylorf2(6.0, 4.0, 0.2, 0.0, f_low=F_LOW, df=1 / duration, n_freq=f.size, dtype=np.complex128)[0]
    w = np.where(f >= F_LOW, 1 / cs.design_psd(f, CURVE), 0.0)
    sig = np.sqrt(4 / duration * np.sum(np.abs(h) ** 2 * w))
    peaks = []
    for site in SITES:
        x = cs.project(inj, site, start=T0, duration=duration, sample_rate=FS, f_low=F_LOW)
        q = 4 / duration * np.fft.rfft(x) / FS * np.conj(h) * w / sig
        expect = _geometric_arrival(site, inj["ra"][0], inj["dec"][0], inj["time"][0]) - T0
        res = minimize_scalar(lambda tau: -abs(np.sum(q * np.exp(2j * np.pi * f * tau))),
                              bounds=(expect - 3 / FS, expect + 3 / FS), method="bounded", options={"xatol": 1e-10})
        rho = cs.injection_snr(inj, site, CURVE, f_low=F_LOW, f_high=FS / 2)[0]
        assert abs(-res.fun / rho - 1) < 0.005
        assert abs(res.x - expect) * FS < 0.1
        peaks.append(-res.fun)
    # amplitude ratio = ratio of the sites' antenna responses |F+ (1 + cos^2 i)/2 - i Fx cos i|
    ci = np.cos(inj["inclination"][0])
    resp = [np.hypot(*(np.array(s.antenna_pattern(inj["ra"], inj["dec"], inj["polarisation"], inj["time"]))[:, 0]
                       * [(1 + ci**2) / 2, ci])) for s in SITES]
    assert abs(peaks[0] / peaks[1] / (resp[0] / resp[1]) - 1) < 1e-3


@pytest.fixture(scope="module")
def campaign():
    # Fourteen 3+3 Msun injections at two invented sites in Gaussian noise (gen2-early,
    # 512 Hz, 20 minutes): every other one loud (SNR 12 at the weaker site), the others
    # at SNR 0.5 at the stronger site. The analysis's own background (time slides of the
    # noise without injections) sets the false-alarm rates.
    duration = 1200.0
    inj = cs.draw_injections(14, m1=3.0, m2=3.0, distance=(1, 2), start=T0 + 60, end=T0 + duration - 30,
                             f_low=F_LOW, seed=4)
    response = np.array([np.abs(site_response(inj, s)) for s in SITES])
    sig = cs.inject.optimal_sigma(3.0, 3.0, 0.0, 0.0, CURVE, f_low=F_LOW, f_high=FS / 2)[0]
    loud = np.arange(inj.size) % 2 == 0
    inj["distance"] = np.where(loud, sig * response.min(0) / 12.0, sig * response.max(0) / 0.5)
    noise = {s.name: synthetic.colored_gaussian_noise(int(duration * FS), FS, CURVE, seed=10 + i, f_low=20.0)
             for i, s in enumerate(SITES)}
    bank = cs.Bank.from_any({"m1": [2.8, 3.0, 3.2], "m2": [2.8, 3.0, 3.2]})
    settings = {"segment_duration": 64.0}
    triggers, analysed = {}, {}
    for s in SITES:
        trig, info = cs.search(noise[s.name], FS, bank, t0=T0, f_low=F_LOW, psd=CURVE, full_output=True, **settings)
        triggers[s.name], analysed[s.name] = trig, np.asarray(info["analysed"])
    _, bg, info = coincidences(triggers, SITES, analysed=analysed, n_slides=300, full_output=True)
    result = run_campaign(noise, SITES, inj, bank, sample_rate=FS, t0=T0, f_low=F_LOW, psd=CURVE, settings=settings,
                          background=(bg["statistic"], info["background_time"]), ifar_threshold=0.001)
    return inj, loud, result, info, noise, bank, settings


def test_close_injections_found_at_the_background_reach_far_ones_missed(campaign):
    # Two sites, SNR 12 or more at each: the network statistic (quadrature sum, Babak et
    # al. 2013) is at least 17 while noise coincidences in 20 minutes of Gaussian noise
    # stay near the single-site threshold; so the loud injections' IFAR is the
    # background's reach (the bound 1 / T_b: nothing in the background is as loud), and
    # SNR-0.5 injections are not candidates at all.
    inj, loud, result, info, *_ = campaign
    table = result.found_missed
    reach = info["background_time"] / (365.25 * 86400)
    assert table["analysed"].all()
    np.testing.assert_array_equal(table["found"], loud)
    np.testing.assert_allclose(table["ifar"][loud], reach, rtol=1e-12)
    assert np.all(table["ifar"][~loud] == 0) and np.all(table["template"][~loud] == -1)
    assert np.all(table["template"][loud] == 1)  # the injected masses are the bank's row 1
    # the statistic is the network's optimal SNR plus noise of unit variance per site
    assert np.all(np.abs(table["statistic"][loud] - table["network_optimal_snr"][loud]) < 4.0)
    assert np.all(np.abs(table["recovered_time"][loud] - table["time"][loud]) < 0.03)
    for s in SITES:
        np.testing.assert_allclose(table[f"{s.name}_optimal_snr"],
                                   cs.injection_snr(inj, s, CURVE, f_low=F_LOW, f_high=FS / 2), rtol=1e-12)
    assert abs(result.analysed_time - info["live_time"]) < 1e-9


def test_campaign_with_its_own_time_slides(campaign):
    # Without the analysis's background the candidates' rates come from slides of the
    # data with injections; loud injections still come out as the loudest candidates.
    inj, loud, _, _, noise, bank, settings = campaign
    result = run_campaign(noise, SITES, inj, bank, sample_rate=FS, t0=T0, f_low=F_LOW, psd=CURVE,
                          settings=settings, n_slides=100)
    table = result.found_missed
    assert np.all(table["ifar"][loud] > 0) and np.all(np.isfinite(table["far"][loud]))
    assert table["found"][loud].all() and not table["found"][~loud].any()
    assert result.background.dtype.names is not None


def test_campaign_bad_input(campaign):
    inj, loud, _, _, noise, bank, settings = campaign
    with pytest.raises(ValueError, match="'Cormorant', which is not in the site set"):
        run_campaign({"Cormorant": noise["Aster"], "Aster": noise["Aster"]}, SITES, inj, bank, sample_rate=FS,
                     t0=T0, f_low=F_LOW, psd=CURVE, settings=settings)
    with pytest.raises(ValueError, match="none of the 14 signals"):
        run_campaign(noise, SITES, inj, bank, sample_rate=FS, t0=T0 + 1e6, f_low=F_LOW, psd=CURVE,
                     settings=settings)
