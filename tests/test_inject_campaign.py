"""Injection campaigns: matching candidates to injections, and found/missed through a
real search of Gaussian noise at one site."""

import numpy as np
import pytest

import chirpsift as cs
from chirpsift import synthetic
from chirpsift.inject import MATCH_WINDOW, found_missed, match_injections
from _sky_fixed_sites import two_sites

FS = 512.0
F_LOW = 30.0
T0 = 1_000_000_000.0
CURVE = "gen2-early"


def test_match_takes_the_loudest_candidate_inside_the_window():
    times = np.array([10.0, 20.0, 30.0])
    cand_t = np.array([9.95, 10.02, 10.5, 20.0 + MATCH_WINDOW, 29.0])
    cand_s = np.array([7.0, 9.0, 50.0, 6.0, 40.0])
    # 10.5 is outside the 0.1 s window; 20.1 is on its edge (inclusive); nothing near 30
    np.testing.assert_array_equal(match_injections(times, cand_t, cand_s), [1, 3, -1])
    np.testing.assert_array_equal(match_injections(times, cand_t[:0], cand_s[:0]), [-1, -1, -1])
    with pytest.raises(ValueError, match="candidate_statistic"):
        match_injections(times, cand_t, cand_s[:2])
    with pytest.raises(ValueError, match="window"):
        match_injections(times, cand_t, cand_s, window=-1.0)


@pytest.fixture(scope="module")
def single_site_run():
    # Ten 3+3 Msun injections at one invented site, half loud (optimal SNR 12-30), half
    # far beyond the horizon (SNR <= 1.5), in Gaussian noise from the gen2-early curve,
    # searched with the analysis's settings and the known PSD.
    site = two_sites()[0]
    inj = cs.draw_injections(10, m1=3.0, m2=3.0, distance=(1, 2), start=T0 + 40, end=T0 + 440, f_low=F_LOW, seed=4)
    per_mpc = cs.injection_snr(inj, site, CURVE, f_low=F_LOW, f_high=FS / 2) * inj["distance"]
    target = np.array([30, 20, 15, 12, 25, 1, 0.5, 0.8, 1.5, 0.3])
    inj["distance"] = per_mpc / target
    duration = 480.0
    x = synthetic.colored_gaussian_noise(int(duration * FS), FS, CURVE, seed=3, f_low=15.0)
    x += cs.project(inj, site, start=T0, duration=duration, sample_rate=FS, f_low=F_LOW)
    bank = cs.Bank.from_any({"m1": [2.8, 3.0, 3.2], "m2": [2.8, 3.0, 3.2]})
    trig, info = cs.search(x, FS, bank, t0=T0, f_low=F_LOW, psd=CURVE, segment_duration=64.0, full_output=True)
    rho = cs.injection_snr(inj, site, CURVE, f_low=F_LOW, f_high=FS / 2)
    return site, inj, trig, info, rho, target


def test_close_injections_found_far_ones_missed(single_site_run):
    # Matched-filter statistics (Allen et al. 2012): with the exact template the
    # recovered SNR is the optimal SNR plus unit-variance noise, so optimal SNR >= 12
    # clears a threshold of 8 (by 4 sigma) and SNR <= 1.5 in a 0.1 s window does not
    # (Gaussian-noise SNR above 8 has probability exp(-32) per sample).
    site, inj, trig, info, rho, target = single_site_run
    np.testing.assert_allclose(rho, target, rtol=1e-9)
    table = found_missed(inj, trig, optimal_snr={site.name: rho}, analysed={site.name: info["analysed"]},
                         statistic="snr", min_statistic=8.0)
    assert table["analysed"].all()
    np.testing.assert_array_equal(table["found"], target >= 12)
    loud = table["found"]
    assert np.all(np.abs(table["statistic"][loud] - target[loud]) < 4.0)
    assert np.all(bank_template_is_exact(table["template"][loud]))
    # recovered at the site's arrival time: within the site's delay (< 21 ms) plus the
    # timing error of a few ms at these SNRs
    assert np.all(np.abs(table["recovered_time"][loud] - table["time"][loud]) < 0.03)
    assert np.all(table["template"][~loud] == -1) and np.all(np.isnan(table["statistic"][~loud]))
    np.testing.assert_allclose(table[f"{site.name}_optimal_snr"], table["network_optimal_snr"])


def bank_template_is_exact(template):
    return template == 1  # row 1 of the bank is the injected 3+3 Msun


def test_found_missed_bad_input(single_site_run):
    site, inj, trig, info, rho, _ = single_site_run
    with pytest.raises(ValueError, match="'loudness'"):
        found_missed(inj, trig, optimal_snr={site.name: rho}, statistic="loudness")
    with pytest.raises(ValueError, match="ifar"):
        found_missed(inj, trig, optimal_snr={site.name: rho}, statistic="snr", ifar_threshold=1.0)
    with pytest.raises(ValueError, match="optimal_snr"):
        found_missed(inj, trig, optimal_snr={site.name: rho[:3]}, statistic="snr")
    with pytest.raises(TypeError, match="candidates"):
        found_missed(inj, [1, 2], optimal_snr={site.name: rho})
