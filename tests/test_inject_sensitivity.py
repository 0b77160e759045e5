"""Sensitivity estimators: horizon against published design-curve values, the
Finn-Chernoff range at one site, binomial efficiency intervals against scipy, the
Monte-Carlo volume and its error, and the efficiency plot."""

import math

import numpy as np
import pytest
from scipy import stats

import chirpsift as cs
from chirpsift.inject import FINN_CHERNOFF_RATIO, SECONDS_PER_YEAR, chirp_distance, plot_efficiency
from _sky_fixed_sites import SkyFixedSite

F_LOW = 20.0


def test_horizon_of_design_curves_matches_published_values():
    # REFERENCES items 9 and 18 (derived from the Sathyaprakash & Schutz 2009 fits):
    # 1.4+1.4 Msun at SNR 8, Newtonian amplitude to ISCO: gen2-early from 20 Hz 497 Mpc,
    # gen1-4km from 40 Hz 31.2 Mpc. Wide tolerance for gen2-early (fit and cut-offs).
    assert abs(cs.horizon_distance(1.4, 1.4, "gen2-early", f_low=20.0)[0] / 497.0 - 1) < 0.05
    assert abs(cs.horizon_distance(1.4, 1.4, "gen1-4km", f_low=40.0)[0] / 31.2 - 1) < 0.01


def _isotropic_at_one_site(n, d_max, seed):
    # One L-shaped site (arms at right angles); the population is isotropic, so where
    # the site sits does not matter.
    site = SkyFixedSite("Cairn", [0.0, 0.0, 6.4e6], [1.0, 0.0, 0.0], [0.0, 1.0, 0.0])
    step = cs.inject.longest_signal(1.4, 1.4, F_LOW) + cs.inject.SPACING_MARGIN
    inj = cs.draw_injections(n, m1=1.4, m2=1.4, distance=(0.0, d_max), start=0.0, end=n * step * 1.2,
                             f_low=F_LOW, seed=seed)
    return inj, cs.injection_snr(inj, site, "gen2-early", f_low=F_LOW, f_high=256.0)


def test_sensitive_range_is_horizon_over_finn_chernoff_factor():
    # Finn & Chernoff 1993 (PRD 47, 2198; REFERENCES items 10, 18): for one site, an
    # isotropic population and a plain SNR threshold of 8, range = horizon / 2.2648.
    # Detection model (stated): the SNR a matched filter with the exact template
    # measures in Gaussian noise, |rho_opt + n1 + i n2| with n1, n2 unit normals
    # (Allen et al. 2012; the phase-maximised SNR), and, for the exact statement of the
    # factor, the optimal SNR alone. Low band (to 256 Hz, the Nyquist frequency of a
    # 512 Hz search) for both horizon and range.
    horizon = cs.horizon_distance(1.4, 1.4, "gen2-early", f_low=F_LOW, f_high=256.0)[0]
    inj, rho = _isotropic_at_one_site(40000, 2.0 * horizon, seed=21)
    rng = np.random.default_rng(4)
    measured = np.abs(rho + rng.standard_normal(rho.size) + 1j * rng.standard_normal(rho.size))
    expect = horizon / FINN_CHERNOFF_RATIO
    exact = cs.sensitivity(inj, rho >= 8.0)
    noisy = cs.sensitivity(inj, measured >= 8.0)
    assert exact.range_error / exact.range < 0.05 and noisy.range_error / noisy.range < 0.05
    # optimal SNR: Finn & Chernoff's factor within 4 standard errors
    assert abs(exact.range - expect) < 4 * exact.range_error
    # with noise: within the statistical error plus 5% (noise lets some quieter signals
    # over the threshold and keeps some louder ones under) ...
    assert abs(noisy.range - expect) < noisy.range_error + 0.05 * expect
    # ... and, sharper, against the range this noise model predicts: the detection
    # probability at optimal SNR r is the non-central chi-squared (2 dof, non-centrality
    # r^2) tail above 8^2 (scipy), so V_noisy / V_exact = 3 int P(8 / u) u^2 du = 1.1365
    # and the range grows by its cube root, 1.0436.
    u = np.linspace(1e-3, 3.0, 3001)
    gain = (3 * np.trapezoid(stats.ncx2.sf(64.0, 2, (8.0 / u) ** 2) * u**2, u)) ** (1 / 3)
    assert abs(gain - 1.0436) < 1e-3
    assert abs(noisy.range - gain * expect) < 3 * noisy.range_error
    print(f"horizon {horizon:.2f} Mpc, horizon/2.2648 {expect:.2f} Mpc, range (optimal SNR) "
          f"{exact.range:.2f} +- {exact.range_error:.2f}, "
          f"range (with noise) {noisy.range:.2f} +- {noisy.range_error:.2f}")


def test_mean_square_orientation_factor_is_sixteen_hundredths():
    # REFERENCES item 18: <(Theta/4)^2> = 0.16 exactly over isotropic sky, polarisation
    # and inclination for one L-shaped site; the SNR ratio to an optimally oriented source
    # is Theta/4. Standard error of the mean of (Theta/4)^2 at N = 40000 is ~0.001.
    inj, rho = _isotropic_at_one_site(40000, 100.0, seed=8)
    opt = cs.injection_snr(inj, None, "gen2-early", f_low=F_LOW, f_high=256.0)
    ratio2 = (rho / opt) ** 2
    assert abs(ratio2.mean() - 0.16) < 4 * ratio2.std() / math.sqrt(ratio2.size)


@pytest.mark.parametrize("kind", ["volume", "uniform", "log"])
def test_monte_carlo_volume_reweights_by_the_drawn_density(kind):
    # A step efficiency (everything inside R found) has V = 4 pi R^3 / 3 exactly
    # (Euclidean volume); the importance-weighted estimator (Tiwari 2018) must find it
    # whatever distance density the injections were drawn from, within its error.
    r_found = 60.0
    inj = cs.draw_injections(5000, m1=1.4, m2=1.4, distance=(1.0, 100.0), distance_distribution=kind, start=0.0,
                             end=1e6, f_low=40.0, seed=13)
    v, dv = cs.sensitive_volume(inj, inj["distance"] < r_found, assume_found_within=1.0)
    assert abs(v - 4 * np.pi * r_found**3 / 3) < 4 * dv
    assert dv / v < 0.1


def test_volume_error_matches_the_scatter_of_repeated_draws():
    # The stated variance (REFERENCES item 18, derived) against the empirical scatter of
    # 300 independent sets; the standard deviation of 300 values is itself uncertain by
    # 1/sqrt(2 * 299) = 4%, so 20% covers it at 5 sigma.
    values, errors = [], []
    for seed in range(300):
        inj = cs.draw_injections(200, m1=1.4, m2=1.4, distance=(2.0, 100.0), distance_distribution="log",
                                 start=0.0, end=1e5, f_low=40.0, seed=seed)
        v, dv = cs.sensitive_volume(inj, inj["distance"] < 50.0)
        values.append(v)
        errors.append(dv)
    assert abs(np.mean(errors) / np.std(values, ddof=1) - 1) < 0.2
    assert abs(np.mean(values) - 4 * np.pi * (50.0**3 - 2.0**3) / 3) < 4 * np.std(values) / math.sqrt(300)


def test_binomial_interval_matches_scipy_wilson():
    # scipy.stats.binomtest(...).proportion_ci(method="wilson") (Wilson 1927).
    rng = np.random.default_rng(5)
    d = rng.uniform(0, 100, 3000)
    found = rng.random(3000) < np.clip(1.2 - d / 70.0, 0, 1)
    table = cs.efficiency(d, found, bins=np.linspace(0, 100, 11))
    assert table["injected"].sum() == 3000
    for row in table:
        ci = stats.binomtest(int(row["found"]), int(row["injected"])).proportion_ci(
            confidence_level=0.6827, method="wilson")
        assert abs(row["lower"] - ci.low) < 1e-9 and abs(row["upper"] - ci.high) < 1e-9
        e = row["found"] / row["injected"]
        assert row["efficiency"] == e and abs(row["error"] - math.sqrt(e * (1 - e) / row["injected"])) < 1e-12


def test_chirp_distance_makes_sources_of_different_chirp_mass_equally_loud():
    # Leading-order amplitude ~ Mc^(5/6) / D (REFERENCES item 2): in a band below both
    # ISCO frequencies, 1.4+1.4 and 2.8+2.8 Msun at equal chirp distance have equal SNR.
    inj = cs.draw_injections(2, m1=1.4, m2=1.4, distance=(100, 101), start=0, end=1e3, f_low=40.0)
    inj["m1"][1] = inj["m2"][1] = 2.8
    inj["distance"][1] = inj["distance"][0] * 2 ** (5 / 6)
    dc = chirp_distance(inj["distance"], inj["m1"], inj["m2"])
    assert abs(dc[0] - inj["distance"][0]) < 1e-9 * dc[0] and abs(dc[1] / dc[0] - 1) < 1e-12
    rho = cs.injection_snr(inj, None, "gen1-4km", f_low=40.0, f_high=400.0)
    assert abs(rho[1] / rho[0] - 1) < 1e-3


def test_volume_time_and_range_follow_from_the_volume():
    inj = cs.draw_injections(1000, m1=1.4, m2=1.4, distance=(0, 100), start=0, end=1e6, f_low=40.0, seed=2)
    s = cs.sensitivity(inj, inj["distance"] < 70, analysed_time=2 * SECONDS_PER_YEAR)
    assert abs(s.volume_time - 2 * s.volume) < 1e-9 * s.volume
    assert abs(4 * np.pi * s.range**3 / 3 - s.volume) < 1e-9 * s.volume
    assert s.found == int(np.sum(inj["distance"] < 70)) and s.injections == 1000


def test_efficiency_plot_is_a_png(tmp_path):
    rng = np.random.default_rng(1)
    d = rng.uniform(0, 100, 500)
    table = cs.efficiency(d, d < 60 + rng.normal(0, 8, 500), bins=10)
    out = tmp_path / "efficiency.png"
    plot_efficiency(table, out, title="step at 60 Mpc", sensitive_range=(58.0, 2.0))
    data = out.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 10_000
    assert [p.name for p in tmp_path.iterdir()] == ["efficiency.png"]  # no temporary left behind


def test_sensitivity_bad_input():
    inj = cs.draw_injections(10, m1=1.4, m2=1.4, distance=(0, 100), start=0, end=1e4, f_low=40.0)
    with pytest.raises(TypeError, match="found"):
        cs.sensitivity(inj, np.ones(10))
    with pytest.raises(ValueError, match="found"):
        cs.sensitivity(inj, np.ones(9, bool))
    with pytest.raises(ValueError, match="analysed_time"):
        cs.sensitivity(inj, np.ones(10, bool), analysed_time=-1.0)
    with pytest.raises(ValueError, match="bins"):
        cs.efficiency(inj["distance"], np.ones(10, bool), bins=[3.0, 1.0])
    with pytest.raises(ValueError, match="snr"):
        cs.horizon_distance(1.4, 1.4, "gen2-early", f_low=20.0, snr=0.0)
    with pytest.raises(ValueError, match="f_high"):
        cs.horizon_distance(1.4, 1.4, "gen2-early", f_low=20.0, f_high=10.0)
