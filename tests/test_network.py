"""Sites and significance: site geometry against published constants and formulas,
coincidences and time slides against direct definitions, false-alarm rates calibrated
on Gaussian noise, an injected signal at two invented sites, bad input, the command.

Outside references (see the shared REFERENCES notes, items 2, 10, 16 and 17):
- WGS-84 defining constants a = 6378137 m, f = 1/298.257223563 and the closed-form
  geodetic-to-Earth-fixed conversion (NIMA TR8350.2, 3rd ed. 2000, "Department of Defense
  World Geodetic System 1984", chapter 4; equation numbers from memory).
- Antenna patterns: Anderson, Brady, Creighton & Flanagan 2001, PRD 63, 042003,
  gr-qc/0008066, app. B (from memory); F+^2 + Fx^2 for an L-shaped detector at the pole
  (K. S. Thorne, "Gravitational radiation", in 300 Years of Gravitation, 1987, from
  memory; the shared notes derive it); sky and polarisation average 2/5 for 90-degree
  arms (Finn & Chernoff 1993, PRD 47, 2198, gr-qc/9301003; shared notes item 2,
  Monte-Carlo verified there).
- Accidental coincidences of two Poisson streams with rates R_A, R_B in a window
  |dt| <= w: rate 2 w R_A R_B (derived in the shared notes, item 17).
- Noise-only zero-lag counts with FAR <= f in time T are Poisson with mean f T (item 17).
"""

from __future__ import annotations

import ast
import itertools
import math
import re
from pathlib import Path

import chirpsift as cs
import numpy as np
import pytest
from chirpsift.network import (
    CAUTIONS,
    EXAMPLE_SITES,
    YEAR,
    Site,
    coincidences,
    false_alarm_rate,
    greenwich_sidereal_time,
    light_travel_time,
    load_sites,
)
from chirpsift.network.bench import synthetic_triggers
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import stats

HYP = settings(max_examples=40, deadline=None, derandomize=True,
               suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])

C = 299792458.0  # m/s, exact (SI)
A_WGS84 = 6378137.0
F_WGS84 = 1 / 298.257223563
E2_WGS84 = F_WGS84 * (2 - F_WGS84)

SITES = load_sites(EXAMPLE_SITES)


def _site(name="Wren", **kw):
    args = {"latitude": 12.0, "longitude": -40.0, "elevation": 100.0, "x_azimuth": 90.0, "y_azimuth": 0.0}
    args.update(kw)
    return Site(name, **args)


def _zenith(site, gps):
    """(ra, dec) of the geodetic zenith of a site at a GPS time."""
    return math.radians(site.longitude) + greenwich_sidereal_time(gps), math.radians(site.latitude)


# ---------------------------------------------------------------------------
# geometry
# ---------------------------------------------------------------------------
def test_wgs84_constants_at_pole_and_equator():
    """Published WGS-84: b = a (1 - f) = 6356752.314245 m (NIMA TR8350.2 table 3.3)."""
    assert A_WGS84 * (1 - F_WGS84) == pytest.approx(6356752.314245, abs=1e-6)
    assert E2_WGS84 == pytest.approx(6.694379990141e-3, rel=1e-12)
    np.testing.assert_allclose(_site(latitude=90.0, elevation=0.0).position, [0, 0, 6356752.314245], atol=1e-5)
    np.testing.assert_allclose(_site(latitude=0.0, longitude=0.0, elevation=0.0).position, [A_WGS84, 0, 0], atol=1e-6)
    np.testing.assert_allclose(_site(latitude=0.0, longitude=90.0, elevation=0.0).position, [0, A_WGS84, 0],
                               atol=1e-6)


@pytest.mark.parametrize("lat, lon, h", [(45.0, 45.0, 0.0), (-33.9, 151.2, 58.0), (51.3, 18.9, 210.0),
                                         (-89.5, -179.0, 2835.0), (10.0, 20.0, 5.0)])
def test_wgs84_worked_examples(lat, lon, h):
    """The closed form of the geodetic to Earth-fixed conversion (NIMA TR8350.2 ch. 4):
    N = a / sqrt(1 - e^2 sin^2 phi), X = (N + h) cos phi cos lam, Y = (N + h) cos phi sin lam,
    Z = (N (1 - e^2) + h) sin phi."""
    phi, lam = math.radians(lat), math.radians(lon)
    n = A_WGS84 / math.sqrt(1 - E2_WGS84 * math.sin(phi) ** 2)
    want = [(n + h) * math.cos(phi) * math.cos(lam), (n + h) * math.cos(phi) * math.sin(lam),
            (n * (1 - E2_WGS84) + h) * math.sin(phi)]
    np.testing.assert_allclose(_site(latitude=lat, longitude=lon, elevation=h).position, want, atol=1e-6)
    if lat == 45.0:  # N(45 deg) = a / sqrt(1 - e^2 / 2) = 6388838.290 m
        assert n == pytest.approx(6388838.2901, abs=1e-3)


def test_gmst_against_the_standard_approximation():
    """GMST [h] = 18.697374558 + 24.06570982441908 D, D = JD(UT1) - 2451545 (the standard
    approximate formula, from memory; ~0.1 s of time over a century); GPS - UTC = 18 s
    since 2017-01-01 (common practice), the GPS epoch is JD 2444244.5."""
    gps = np.array([1.2e9 + 3600.0 * 7.3, 1.3e9, 1.4e9 + 12345.6])
    jd = 2444244.5 + (gps - 18.0) / 86400.0
    hours = np.mod(18.697374558 + 24.06570982441908 * (jd - 2451545.0), 24.0)
    got = greenwich_sidereal_time(gps)
    diff = np.angle(np.exp(1j * (got - hours * np.pi / 12)))
    assert np.max(np.abs(diff)) < 2e-5  # radians: 0.3 s of time


@pytest.mark.parametrize("lat, lon", [(0.0, 0.0), (46.2, -119.0), (-60.0, 170.0)])
def test_zenith_response_of_an_l_shaped_site(lat, lon):
    """Source at the zenith, x arm East, y arm North: F+ = cos 2 psi, Fx = -sin 2 psi with
    our psi (measured from the direction of increasing right ascension); papers differ in
    the sign of Fx and the origin of psi (Anderson et al. 2001)."""
    site = _site(latitude=lat, longitude=lon, x_azimuth=90.0, y_azimuth=0.0)
    gps = 1.25e9
    ra, dec = _zenith(site, gps)
    psi = np.linspace(0, np.pi, 13)
    fp, fx = site.antenna_pattern(ra, dec, psi, gps)
    np.testing.assert_allclose(fp, np.cos(2 * psi), atol=1e-12)
    np.testing.assert_allclose(fx, -np.sin(2 * psi), atol=1e-12)
    # any orientation of the L: F+^2 + Fx^2 = 1 overhead
    turned = _site(latitude=lat, longitude=lon, x_azimuth=33.0, y_azimuth=123.0)
    fp, fx = turned.antenna_pattern(ra, dec, psi, gps)
    np.testing.assert_allclose(fp ** 2 + fx ** 2, 1.0, atol=1e-12)


def test_response_at_the_pole_matches_the_closed_form():
    """At the pole, arms along the meridians 0 and 90 degrees East: F+^2 + Fx^2 =
    (1 + cos^2 t)^2 cos^2 2p / 4 + cos^2 t sin^2 2p for a source at polar angle t and
    azimuth p from the x arm (Thorne 1987, from memory; derived in the shared notes,
    0.599897 at (0.7, 1.1))."""
    site = Site("Pole", latitude=90.0, longitude=0.0, elevation=0.0, x_azimuth=0.0, y_azimuth=90.0)
    gps = 1.1e9
    rng = np.random.default_rng(7)
    theta = np.concatenate([[0.7], rng.uniform(0, np.pi, 50)])
    phi = np.concatenate([[1.1], rng.uniform(0, 2 * np.pi, 50)])
    # the x arm at the pole with longitude 0 points along -X (toward longitude 180)
    ra = phi + np.pi + greenwich_sidereal_time(gps)
    fp, fx = site.antenna_pattern(ra, np.pi / 2 - theta, rng.uniform(0, np.pi, 51), gps)
    ct = np.cos(theta)
    want = 0.25 * (1 + ct ** 2) ** 2 * np.cos(2 * phi) ** 2 + ct ** 2 * np.sin(2 * phi) ** 2
    np.testing.assert_allclose(fp ** 2 + fx ** 2, want, atol=1e-12)
    assert fp[0] ** 2 + fx[0] ** 2 == pytest.approx(0.599897, abs=1e-6)


def _sky_average(site, gps):
    """Sky and polarisation averages of F+^2 and Fx^2 by quadrature: Gauss-Legendre in
    declination (weight cos dec), a uniform grid in right ascension and psi (exact for
    the trigonometric polynomials of degree <= 8 that appear)."""
    nodes, weights = np.polynomial.legendre.leggauss(48)
    dec = nodes * np.pi / 2
    w_dec = weights * np.cos(dec) * np.pi / 2 / 2  # integral of cos(dec) over [-pi/2, pi/2] is 2
    ra = np.arange(24) * 2 * np.pi / 24
    psi = np.arange(8) * np.pi / 8
    r, d, p = np.meshgrid(ra, dec, psi, indexing="ij")
    fp, fx = site.antenna_pattern(r, d, p, gps)
    w = w_dec[None, :, None] / (ra.size * psi.size)
    return float(np.sum(w * fp ** 2)), float(np.sum(w * fx ** 2))


@pytest.mark.parametrize("name", list(SITES))
def test_sky_and_polarisation_average_is_two_fifths(name):
    """<F+^2 + Fx^2> = 2/5 and <F+^2> = <Fx^2> = 1/5 for 90-degree arms (Finn & Chernoff
    1993; shared notes items 2 and 16)."""
    fp2, fx2 = _sky_average(SITES[name], 1.2e9)
    assert fp2 + fx2 == pytest.approx(0.4, abs=1e-12)
    assert fp2 == pytest.approx(0.2, abs=1e-12)
    assert fx2 == pytest.approx(0.2, abs=1e-12)


def test_sky_average_scales_with_the_arm_opening():
    """For arms an angle z apart the average is (2/5) sin^2 z (from memory; it follows
    from tr(D^2) = sin^2(z) / 2, since the average is (4/5) tr(D^2))."""
    site = _site(x_azimuth=10.0, y_azimuth=70.0)
    fp2, fx2 = _sky_average(site, 1.2e9)
    assert fp2 + fx2 == pytest.approx(0.4 * math.sin(math.radians(60.0)) ** 2, abs=1e-12)
    assert 2 * np.trace(site.tensor @ site.tensor) == pytest.approx(math.sin(math.radians(60.0)) ** 2, abs=1e-12)


def test_3000_km_apart_is_10_ms():
    """Two sites 3,000 km apart: 10.0 ms of light travel (common practice)."""
    dlon = math.degrees(2 * math.asin(1.5e6 / A_WGS84))
    a = _site("East", latitude=0.0, longitude=0.0, elevation=0.0)
    b = _site("West", latitude=0.0, longitude=dlon, elevation=0.0)
    assert np.linalg.norm(a.position - b.position) == pytest.approx(3.0e6, abs=1e-3)
    assert round(light_travel_time(a, b) * 1e3, 1) == 10.0
    assert light_travel_time(a, b) == pytest.approx(3.0e6 / C, rel=1e-12)


_lat = st.floats(-90, 90)
_lon = st.floats(-180, 179.999)
_elev = st.floats(-500, 5000)


@HYP
@given(lat1=_lat, lon1=_lon, h1=_elev, lat2=_lat, lon2=_lon, h2=_elev, ra=st.floats(0, 2 * np.pi),
       dec=st.floats(-np.pi / 2, np.pi / 2), gps=st.floats(7e8, 1.5e9))
def test_delays_never_exceed_the_baseline(lat1, lon1, h1, lat2, lon2, h2, ra, dec, gps):
    """|t_A - t_B| <= |r_A - r_B| / c for every direction (Cauchy-Schwarz)."""
    a = Site("A", lat1, lon1, h1, 0.0, 90.0)
    b = Site("B", lat2, lon2, h2, 45.0, 135.0)
    dt = a.arrival_delay(ra, dec, gps) - b.arrival_delay(ra, dec, gps)
    assert abs(dt) <= light_travel_time(a, b) + 1e-15
    assert abs(a.arrival_delay(ra, dec, gps)) <= np.linalg.norm(a.position) / C + 1e-15


def test_delay_differences_are_uniform_for_isotropic_sources():
    """For isotropic directions dt = t_A - t_B is uniform on [-d/c, d/c] (shared notes
    item 16): a Kolmogorov-Smirnov test (scipy) with seeded draws."""
    rng = np.random.default_rng(11)
    n = 4000
    ra = rng.uniform(0, 2 * np.pi, n)
    dec = np.arcsin(rng.uniform(-1, 1, n))
    a, b = SITES["Kestrel"], SITES["Plover"]
    dt = a.arrival_delay(ra, dec, 1.2e9) - b.arrival_delay(ra, dec, 1.2e9)
    tau = light_travel_time(a, b)
    assert stats.kstest(dt, stats.uniform(loc=-tau, scale=2 * tau).cdf).pvalue > 1e-3


def test_antenna_pattern_broadcasts_and_shapes():
    s = SITES["Heron"]
    fp, fx = s.antenna_pattern(np.zeros((3, 1)), np.linspace(-1, 1, 4), 0.3, 1.2e9)
    assert fp.shape == fx.shape == (3, 4)
    fp1, fx1 = s.antenna_pattern(0.0, -1.0, 0.3, 1.2e9)
    assert isinstance(fp1, float) and fp1 == fp[0, 0] and fx1 == fx[0, 0]
    assert s.arrival_delay([0.1, 0.2], 0.3, [1.2e9, 1.3e9]).shape == (2,)


def test_example_sites_are_ours():
    """Only invented sites ship; they are far enough apart for the default allowance."""
    assert list(SITES) == ["Kestrel", "Heron", "Plover"]
    for a, b in itertools.combinations(SITES.values(), 2):
        assert light_travel_time(a, b) > cs.network.DEFAULT_ALLOWANCE


# ---------------------------------------------------------------------------
# coincidences and slides against direct definitions
# ---------------------------------------------------------------------------
T0 = 1.0e9


def _within(table, intervals):
    t = table["time"]
    ok = np.zeros(t.size, dtype=bool)
    for a, b in intervals:
        ok |= (t >= a) & (t < b)
    return table[ok]


def _synthetic_case(names, n=1500, templates=4, seed=5):
    rng = np.random.default_rng(seed)
    analysed, triggers = {}, {}
    for k, name in enumerate(names):
        shift = rng.uniform(0, 40)
        iv = np.array([[T0 + shift, T0 + 1800.0], [T0 + 1900.0 + shift, T0 + 3700.0]])
        analysed[name] = iv
        triggers[name] = _within(synthetic_triggers(n, 3700.0, templates, seed=seed * 10 + k), iv)
    return triggers, analysed


@pytest.mark.parametrize("names", [["Kestrel", "Heron"], ["Kestrel", "Heron", "Plover"]])
def test_all_slides_at_once_equal_the_slide_by_slide_loop(names):
    """Consistency: both methods give the same candidates and background, bit for bit."""
    triggers, analysed = _synthetic_case(names)
    kw = {"analysed": analysed, "n_slides": 150, "slide_step": 3.0, "peak_window": 0.3}
    sites = [SITES[n] for n in names]
    c1, b1 = coincidences(triggers, sites, **kw)
    c2, b2 = coincidences(triggers, sites, method="slide-by-slide", **kw)
    assert b1.size > 100
    assert b1.dtype == b2.dtype and b1.tobytes() == b2.tobytes()
    assert c1.tobytes() == c2.tobytes()
    assert np.all(np.diff(b1["slide"]) >= 0) and b1["slide"].min() >= 1 and b1["slide"].max() <= 150


def test_background_matches_the_definition_of_ring_slides():
    """Direct, float-valued evaluation of the documented rule on one analysed interval:
    in slide k the second site moves k * step around the ring of length L; a pair is
    coincident when their ring distance is within the light travel time + allowance."""
    names = ["Kestrel", "Plover"]
    L, step, K = 2000.0, 1.0, 1500
    trig = {}
    for k, n in enumerate(names):
        t = synthetic_triggers(700, L, 3, seed=k + 40)
        # as a search leaves them: one trigger per template within 0.1 s, so no trigger can
        # have two partners and clustering with peak_window=0 removes nothing
        trig[n] = t[np.sort(cs.cluster_in_time(t["time"], t["snr"], 0.1, groups=t["template"]))]
    analysed = {n: [[T0, T0 + L]] for n in names}
    sites = [SITES[n] for n in names]
    cands, bg, info = coincidences(trig, sites, analysed=analysed, n_slides=K, slide_step=step,
                                   peak_window=0.0, full_output=True)
    w = light_travel_time(*sites) + info["allowance"]
    a, b = trig[names[0]], trig[names[1]]
    ua, ub = a["time"] - T0, b["time"] - T0
    want = set()
    zero = set()
    for tmpl in range(3):
        ia, ib = np.flatnonzero(a["template"] == tmpl), np.flatnonzero(b["template"] == tmpl)
        d = (ua[ia][:, None] - ub[ib][None, :]) % L  # needed forward shift of b
        k = np.rint(d / step)
        dist = np.abs(d - k * step)
        hit = (k >= 1) & (k <= K) & (dist <= w)
        for i, j in zip(*np.nonzero(hit)):
            want.add((int(k[i, j]), int(ia[i]), int(ib[j])))
        near = np.abs(a["time"][ia][:, None] - b["time"][ib][None, :]) <= w
        zero |= {(float(a["time"][ia[i]]), float(b["time"][ib[j]])) for i, j in zip(*np.nonzero(near))}
    got = set(zip(bg["slide"].tolist(), bg[f"{names[0]}_trigger"].tolist(), bg[f"{names[1]}_trigger"].tolist()))
    assert len(want) > 200
    assert got == want
    assert set(zip(cands[f"{names[0]}_time"].tolist(), cands[f"{names[1]}_time"].tolist())) == zero
    # statistic: quadrature sum of the two reweighted SNRs
    rw = np.hypot(a["reweighted_snr"][bg[f"{names[0]}_trigger"]].astype(float),
                  b["reweighted_snr"][bg[f"{names[1]}_trigger"]].astype(float))
    np.testing.assert_allclose(bg["statistic"], rw, rtol=1e-15)


def test_background_count_matches_the_accidental_rate():
    """Uniform triggers: the expected number of coincidences per slide is
    sum over templates of 2 w n_A n_B / L (shared notes item 17); over K slides the
    count is close to Poisson, checked at five standard deviations."""
    names = ["Kestrel", "Heron"]
    L, K, templates = 6000.0, 2000, 5
    trig = {n: synthetic_triggers(3000, L, templates, seed=k + 60) for k, n in enumerate(names)}
    sites = [SITES[n] for n in names]
    _, bg, info = coincidences(trig, sites, analysed={n: [[T0, T0 + L]] for n in names}, n_slides=K,
                               slide_step=2.5, peak_window=0.0, full_output=True)
    w = light_travel_time(*sites) + info["allowance"]
    na = np.bincount(trig[names[0]]["template"], minlength=templates)
    nb = np.bincount(trig[names[1]]["template"], minlength=templates)
    expected = K * np.sum(2 * w * na * nb / L)
    assert abs(bg.size - expected) < 5 * math.sqrt(expected)
    assert info["background_time"] == pytest.approx(K * L)


def test_three_sites_keep_the_largest_coincidence():
    """A triple is one candidate (not also three pairs); a pair alone leaves the third
    site's columns NaN and adds nothing to the statistic."""
    names = ["Kestrel", "Heron", "Plover"]

    def table(times, rw):
        t = np.zeros(len(times), dtype=cs.TRIGGER_DTYPE)
        t["time"], t["snr"], t["reweighted_snr"], t["m1"], t["m2"] = times, rw, rw, 10.0, 10.0
        return t

    trig = {"Kestrel": table([T0 + 100.0, T0 + 500.0], [8.0, 6.0]),
            "Heron": table([T0 + 100.003, T0 + 500.002], [7.0, 9.0]),
            "Plover": table([T0 + 100.010, T0 + 900.0], [6.0, 5.0])}
    analysed = {n: [[T0, T0 + 1000.0]] for n in names}
    cands, _ = coincidences(trig, [SITES[n] for n in names], analysed=analysed)
    assert len(cands) == 2
    triple, pair = (cands[0], cands[1]) if np.isfinite(cands[0]["Plover_time"]) else (cands[1], cands[0])
    assert triple["statistic"] == pytest.approx(math.sqrt(64 + 49 + 36))
    assert triple["time"] == T0 + 100.0  # the first listed site's trigger time
    assert np.isnan(pair["Plover_snr"]) and np.isnan(pair["Plover_time"])
    assert pair["statistic"] == pytest.approx(math.sqrt(36 + 81))


def test_far_counts_background_at_least_as_loud_and_bounds_zero_counts():
    far, bound = false_alarm_rate([1.0, 2.0, 3.0, 9.0], [1.0, 2.0, 2.0, 4.0], background_time=2 * YEAR)
    np.testing.assert_allclose(far, [2.0, 1.5, 0.5, 0.5])
    assert bound.tolist() == [False, False, False, True]
    with pytest.raises(ValueError, match="background_time"):
        false_alarm_rate([1.0], [1.0], background_time=0.0)


# ---------------------------------------------------------------------------
# Gaussian noise at two invented sites, searched with chirpsift.search
# ---------------------------------------------------------------------------
FS = 256.0
DURATION = 4096.0
F_LOW = 25.0
MASSES = np.geomspace(8.0, 24.0, 10)
BANK = cs.Bank(m1=MASSES, m2=0.8 * MASSES)
SEARCH = {"f_low": F_LOW, "segment_duration": 64.0, "min_snr": 3.6, "peak_window": 0.25, "full_output": True}
PAIR = ("Kestrel", "Plover")
CURVE = "gen2-zero-detuned"
#: The injected source: geocentric time, sky position, orientation (radians) and the
#: template (bank row) it is made from.
SOURCE = {"tc": T0 + 2000.3712, "ra": 2.1, "dec": -0.45, "psi": 0.6, "iota": 0.5, "phase": 1.3, "template": 4}


def _noise(site_index):
    from chirpsift.synthetic import colored_gaussian_noise

    return colored_gaussian_noise(int(FS * DURATION), FS, CURVE, seed=2024 + site_index, f_low=15.0)


def _responses():
    """Per site: arrival time and complex amplitude factor F+ (1 + cos^2 i) / 2 - i Fx cos i
    (h+ = A (1 + cos^2 i)/2 cos phi, hx = A cos i sin phi; the SPA gives hx~ = -i hx-amplitude)."""
    out = {}
    ci = math.cos(SOURCE["iota"])
    for name in PAIR:
        s = SITES[name]
        delay = s.arrival_delay(SOURCE["ra"], SOURCE["dec"], SOURCE["tc"])
        fp, fx = s.antenna_pattern(SOURCE["ra"], SOURCE["dec"], SOURCE["psi"], SOURCE["tc"])
        out[name] = (SOURCE["tc"] + delay, fp * (1 + ci ** 2) / 2 - 1j * fx * ci)
    return out


@pytest.fixture(scope="module")
def runs():
    """Triggers of noise alone and of noise plus the source, per site."""
    from chirpsift.synthetic import inject_taylorf2, optimal_snr

    m1, m2 = BANK.m1[SOURCE["template"]], BANK.m2[SOURCE["template"]]
    snr_1mpc = optimal_snr(m1, m2, distance=1.0, psd=CURVE, f_low=F_LOW, sample_rate=FS, n=int(FS * DURATION))
    resp = _responses()
    weakest = min(abs(f) for _, f in resp.values())
    distance = snr_1mpc * weakest / 10.0  # SNR 10 at the less sensitive site
    out = {"noise": {}, "signal": {}, "analysed": {}, "expected": {}}
    for k, name in enumerate(PAIR):
        noise = _noise(k)
        trig, info = cs.search(noise, FS, BANK, t0=T0, **SEARCH)
        out["noise"][name] = trig
        out["analysed"][name] = np.array(info["analysed"])
        t_site, factor = resp[name]
        data = inject_taylorf2(noise, FS, m1=m1, m2=m2, t_coalescence=t_site, distance=distance / abs(factor),
                               phase=SOURCE["phase"] + np.angle(factor), f_low=F_LOW, t0=T0)
        out["signal"][name], _ = cs.search(data, FS, BANK, t0=T0, **SEARCH)
        out["expected"][name] = (t_site, snr_1mpc * abs(factor) / distance)
    return out


def test_far_is_calibrated_on_gaussian_noise(runs):
    """Zero-lag candidates with FAR <= f in live time T are Poisson with mean f T (shared
    notes item 17). Checked at five values of f T; each count must lie in the central
    Poisson interval of probability 1 - 2e-4 (scipy.stats.poisson), so a calibrated
    estimate fails the test with probability below 1e-3 (Bonferroni). The background
    of 1,000 slides measures the rates to about 1/sqrt(1000 f T), small beside the
    Poisson scatter."""
    sites = [SITES[n] for n in PAIR]
    cands, _bg, info = coincidences(runs["noise"], sites, analysed=runs["analysed"], n_slides=1000,
                                   peak_window=SEARCH["peak_window"], full_output=True)
    live = info["live_time"]
    assert live > 3600.0
    assert info["background_time"] == pytest.approx(1000 * live)
    scaled = cands["far"] / YEAR * live  # expected number at least as loud, f T
    levels = [5, 10, 20, 50, 100]
    alpha = 1e-3 / len(levels)
    for mu in levels:
        count = int(np.sum(scaled <= mu))
        lo, hi = stats.poisson.ppf(alpha / 2, mu), stats.poisson.isf(alpha / 2, mu)
        assert lo <= count <= hi, (mu, count, lo, hi)
    assert len(cands) > 120  # enough candidates for the largest level to be meaningful


def test_injected_signal_is_the_loudest_candidate(runs):
    """The source with the right delays and antenna responses at two invented sites comes
    out loudest, at the expected times and SNRs, with no background as loud (IFAR at the
    background's reach)."""
    sites = [SITES[n] for n in PAIR]
    cands, bg, info = coincidences(runs["signal"], sites, analysed=runs["analysed"], n_slides=1000,
                                   peak_window=SEARCH["peak_window"], full_output=True)
    assert bg.size > 100_000
    top = cands[0]
    for name in PAIR:
        t_site, snr = runs["expected"][name]
        # timing: within the allowance; SNR: within 3.5 unit-variance noise deviations plus 5% mismatch
        assert abs(top[f"{name}_time"] - t_site) < info["allowance"], name
        assert abs(top[f"{name}_snr"] - snr) < 3.5 + 0.05 * snr, name
    delta = top[f"{PAIR[1]}_time"] - top[f"{PAIR[0]}_time"]
    want = runs["expected"][PAIR[1]][0] - runs["expected"][PAIR[0]][0]
    assert abs(delta - want) < info["allowance"]
    assert top["statistic"] > bg["statistic"].max()
    assert info["far_bound"][0]
    assert top["ifar"] == pytest.approx(info["background_time_years"])


def test_signal_at_one_site_only_is_not_a_candidate(runs):
    sites = [SITES[n] for n in PAIR]
    trig = {PAIR[0]: runs["signal"][PAIR[0]], PAIR[1]: runs["noise"][PAIR[1]]}
    loud = {n: t[t["snr"] >= 5.5] for n, t in trig.items()}
    t_site, _snr = runs["expected"][PAIR[0]]
    assert np.any(np.abs(loud[PAIR[0]]["time"] - t_site) < 0.01)  # seen at the first site
    cands, _ = coincidences(loud, sites, analysed=runs["analysed"], n_slides=100, peak_window=0.25)
    assert not np.any(np.abs(cands[f"{PAIR[0]}_time"] - t_site) < 1.0)


# ---------------------------------------------------------------------------
# bad input
# ---------------------------------------------------------------------------
def _good():
    names = ["Kestrel", "Heron"]
    trig = {n: synthetic_triggers(50, 1000.0, 3, seed=k) for k, n in enumerate(names)}
    return trig, [SITES[n] for n in names], {n: [[T0, T0 + 1000.0]] for n in names}


def _call(**changes):
    trig, sites, analysed = _good()
    kw = {"triggers": trig, "sites": sites, "analysed": analysed}
    kw.update(changes)
    return coincidences(kw.pop("triggers"), kw.pop("sites"), **kw)


@pytest.mark.parametrize("change, match", [
    (lambda t, s, a: {"triggers": {**t, "Nowhere": t["Heron"]}}, "'Nowhere'"),
    (lambda t, s, a: {"triggers": {"Kestrel": t["Kestrel"]}}, "no entry for site 'Heron'"),
    (lambda t, s, a: {"sites": s[:1], "triggers": {"Kestrel": t["Kestrel"]}, "analysed": {"Kestrel": a["Kestrel"]}},
     "at least two sites"),
    (lambda t, s, a: {"sites": [s[0], s[0]]}, "more than once"),
    (lambda t, s, a: {"analysed": {"Kestrel": a["Kestrel"]}}, "analysed has no entry for site 'Heron'"),
    (lambda t, s, a: {"analysed": {**a, "Heron": [[T0 + 500.0, T0 + 1000.0]]}}, "outside the site's analysed"),
    (lambda t, s, a: {"analysed": {**a, "Heron": [[T0 + 10.0, T0]]}}, "does not end after it starts"),
    (lambda t, s, a: {"analysed": {**a, "Heron": [T0, T0 + 1000.0]}}, r"shape \(k, 2\)"),
    (lambda t, s, a: {"analysed": {**a, "Heron": [[T0, np.nan]]}}, "finite"),
    (lambda t, s, a: {"n_slides": 10, "slide_step": 0.5}, "slide_step=0.5"),
    (lambda t, s, a: {"n_slides": 10_000, "slide_step": 3.0}, "n_slides=10000"),
    (lambda t, s, a: {"n_slides": -1}, "n_slides"),
    (lambda t, s, a: {"n_slides": 2.5}, "n_slides"),
    (lambda t, s, a: {"window": 0.02}, "not more than the timing allowance window=0.02"),
    (lambda t, s, a: {"window": -1.0}, "window"),
    (lambda t, s, a: {"peak_window": np.inf}, "peak_window"),
    (lambda t, s, a: {"method": "quick"}, "method"),
    (lambda t, s, a: {"triggers": {**t, "Heron": t["Heron"][["time", "snr"]]}}, "lacks the field"),
    (lambda t, s, a: {"triggers": {**t, "Heron": [1, 2]}}, "structured array"),
    (lambda t, s, a: {"sites": "Kestrel"}, "sequence or mapping"),
])
def test_bad_input_is_named(change, match):
    trig, sites, analysed = _good()
    with pytest.raises((ValueError, TypeError), match=match):
        _call(**change(trig, sites, analysed))


def test_sites_closer_than_the_allowance_are_refused():
    trig, _, analysed = _good()
    a = _site("Kestrel", latitude=10.0, longitude=10.0)
    b = _site("Heron", latitude=10.0, longitude=10.005)  # about 550 m apart
    with pytest.raises(ValueError, match="'Kestrel' and 'Heron' are .* ms of light apart"):
        coincidences(trig, [a, b], analysed=analysed)


def test_templates_must_agree_between_sites():
    trig, _sites, _analysed = _good()
    trig["Heron"] = trig["Heron"].copy()
    trig["Heron"]["m1"] += 1.0
    with pytest.raises(ValueError, match="template .* has m1=.* at site 'Kestrel' but m1=.* at site 'Heron'"):
        _call(triggers=trig)


@HYP
@given(step=st.floats(0.0001, 1.013))
def test_any_step_below_the_minimum_is_refused(step):
    with pytest.raises(ValueError, match=r"slide_step=.* is too small"):
        _call(n_slides=5, slide_step=step)


@HYP
@given(n=st.integers(333, 10**9))
def test_too_many_slides_are_refused(n):
    """1000 s of common time and 3 s steps hold at most 1000 // 3 - 1 = 332 slides
    (332 slides of 3 s leave 4 s, more than a step, before the ring comes back to zero lag)."""
    with pytest.raises(ValueError, match=rf"n_slides={n} slides .* at most 332"):
        _call(n_slides=n, slide_step=3.0)


_RANGED = {"latitude": 90.0, "x_altitude": 90.0, "elevation": 1e5}
_KEYS = ["latitude", "longitude", "elevation", "x_azimuth", "y_azimuth", "x_altitude"]


@settings(HYP, max_examples=30)
@given(data=st.data(), key=st.sampled_from(_KEYS))
def test_malformed_site_values_are_named(tmp_path_factory, data, key):
    """Non-numbers, non-finite numbers and out-of-range angles or heights: the error names
    the file, the site and the key."""
    printable = st.characters(min_codepoint=32, max_codepoint=126)
    bad = st.sampled_from([math.nan, math.inf, -math.inf]) | st.text(printable, max_size=3) | st.booleans()
    if key in _RANGED:
        limit = _RANGED[key]
        bad = bad | st.floats(limit * 1.0001, 1e300) | st.floats(-1e300, -limit * 1.0001)
    if key == "longitude":
        bad = bad | st.floats(360.0, 1e300) | st.floats(-1e300, -180.0001)
    value = data.draw(bad)
    values = {"latitude": 10.0, "longitude": 20.0, "elevation": 5.0, "x_azimuth": 0.0, "y_azimuth": 90.0,
              "x_altitude": 0.0}
    values[key] = value
    body = "\n".join(f"{k} = {_toml(v)}" for k, v in values.items())
    path = tmp_path_factory.getbasetemp() / "malformed_site.toml"
    path.write_text(f'[[site]]\nname = "Wren"\n{body}\n', encoding="utf-8")
    with pytest.raises(ValueError, match=f"{re.escape(str(path))}.*Wren.*{key}"):
        load_sites(path)


def _toml(v):
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if math.isnan(v):
        return "nan"
    if math.isinf(v):
        return "inf" if v > 0 else "-inf"
    return repr(v)


@pytest.mark.parametrize("text, match", [
    ("[[site]\n", "not valid TOML"),
    ("version = 2\n[[site]]\nname='A'\n", "version must be 1"),
    ("", r"one or more \[\[site\]\]"),
    ("[[site]]\nname = 'A'\nlatitude = 1.0\n", "lacks the key 'longitude'"),
    ("[[site]]\nname='A'\nlatitude=1\nlongitude=2\nelevation=3\nx_azimuth=0\ny_azimuth=90\ncolour='red'\n",
     "unknown key 'colour'"),
    ("[[site]]\nname='A B'\nlatitude=1\nlongitude=2\nelevation=3\nx_azimuth=0\ny_azimuth=90\n", "site name"),
    ("[[site]]\nname='A'\nlatitude=1\nlongitude=2\nelevation=3\nx_azimuth=0\ny_azimuth=180\n", "parallel"),
    ("[[site]]\nname='A'\nlatitude=1\nlongitude=2\nelevation=3\nx_azimuth=0\ny_azimuth=90\n" * 2, "more than once"),
    ("wavelength = 3\n", "unknown top-level key 'wavelength'"),
])
def test_malformed_site_files(tmp_path, text, match):
    path = tmp_path / "sites.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ValueError, match=match):
        load_sites(path)
    with pytest.raises(FileNotFoundError, match="sites file not found"):
        load_sites(tmp_path / "absent.toml")


# ---------------------------------------------------------------------------
# the command
# ---------------------------------------------------------------------------
def _trigger_files(tmp_path, n=3000, duration=3600.0):
    from chirpsift.io import write_triggers

    files = {}
    for k, name in enumerate(["Kestrel", "Heron"]):
        t = synthetic_triggers(n, duration, 10, seed=k + 80)
        path = tmp_path / f"{name}.parquet"
        write_triggers(path, t, {"analysed": [[T0, T0 + duration]], "settings": {"peak_window": 0.5}})
        files[name] = path
    return files


def test_command_writes_tables_and_prints_cautions(tmp_path, capsys):
    from chirpsift.cli import main
    from chirpsift.io import read_triggers

    files = _trigger_files(tmp_path)
    out_c, out_b = tmp_path / "c.parquet", tmp_path / "b.parquet"
    argv = ["network", "--sites", str(EXAMPLE_SITES), "--triggers", f"Heron={files['Heron']}",
            "--triggers", f"Kestrel={files['Kestrel']}", "--slides", "300", "--candidates", str(out_c),
            "--background", str(out_b), "--top", "3"]
    assert main(argv) == 0
    printed = capsys.readouterr().out
    assert CAUTIONS in printed and "IFAR (yr)" in printed
    cands, meta = read_triggers(out_c)
    bg, _ = read_triggers(out_b)
    # same as the API on the same inputs (sites in sites-file order; peak window from the run summaries)
    trig = {n: read_triggers(files[n])[0] for n in ("Kestrel", "Heron")}
    want_c, want_b = coincidences(trig, [SITES["Kestrel"], SITES["Heron"]], n_slides=300, peak_window=0.5,
                                  analysed={n: [[T0, T0 + 3600.0]] for n in trig})
    assert cands.dtype.names == want_c.dtype.names and cands.tobytes() == want_c.tobytes()
    assert bg.tobytes() == want_b.tobytes()
    assert meta["settings"]["slides"] == 300 and meta["cautions"] == CAUTIONS
    assert not list(tmp_path.glob("*.partial"))


@pytest.mark.parametrize("extra, match", [
    (["--slides", "-3"], "--slides must be"),
    (["--slides", "many"], "--slides must be an integer, got 'many'"),
    (["--slides", "5", "--slide-step", "0.2"], "--slide-step=0.2"),
    (["--allowance", "0.05"], "--allowance=0.05"),
    (["--triggers", "Nowhere=x.parquet"], "site 'Nowhere'"),
    (["--triggers", "Heron"], "SITE=FILE"),
])
def test_command_bad_input_exits_2_with_one_line(tmp_path, capsys, extra, match):
    from chirpsift.cli import main

    files = _trigger_files(tmp_path, n=200)
    argv = ["network", "--sites", str(EXAMPLE_SITES), "--triggers", f"Kestrel={files['Kestrel']}",
            "--triggers", f"Heron={files['Heron']}", "--candidates", str(tmp_path / "c.parquet"),
            "--background", str(tmp_path / "b.parquet")] + extra
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and match in err
    assert not (tmp_path / "c.parquet").exists() and not (tmp_path / "b.parquet").exists()


def test_command_needs_the_analysed_time(tmp_path, capsys):
    from chirpsift.cli import main
    from chirpsift.io import write_triggers

    files = _trigger_files(tmp_path, n=100)
    write_triggers(files["Heron"], synthetic_triggers(100, 3600.0, 10, seed=1), {"settings": {}})
    argv = ["network", "--sites", str(EXAMPLE_SITES), "--triggers", f"Kestrel={files['Kestrel']}",
            "--triggers", f"Heron={files['Heron']}", "--candidates", str(tmp_path / "c.parquet"),
            "--background", str(tmp_path / "b.parquet")]
    assert main(argv) == 2
    assert "no analysed time for trigger file" in capsys.readouterr().err


# ---------------------------------------------------------------------------
# layering
# ---------------------------------------------------------------------------
def test_network_never_imports_the_core():
    folder = Path(cs.__file__).parent / "network"
    for path in folder.glob("*.py"):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom):
                names = [node.module or ""] + [a.name for a in node.names]
            elif isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            else:
                continue
            assert not any("_core" in n for n in names), f"{path.name} imports the compiled core"
