"""Placing banks, their fitting factors and coverage, at quick sizes.

Outside sources, named beside each check:

- Conway & Sloane 1988, Sphere Packings, Lattices and Groups, ch. 2 (from memory):
  covering thickness of the hexagonal lattice ``2 pi / (3 sqrt 3)`` (also common
  practice) and of the body-centred cubic lattice ``5 sqrt 5 pi / 24 = 1.4635``.
- REFERENCES item 15 (derived, 0PN + 1.5PN metric): about 1.9e3 hexagonal templates
  for m1, m2 in [1, 3] Msun at MM 0.97 on the first-generation 4-km fit (item 9a,
  ``"gen1-4km"``) from 40 to 2048 Hz, about 7.7e3 on the early second-generation fit
  (item 9e, ``"gen2-early"``) from 20 to 2048 Hz.
- The coverage target of the placement work (at least 99% of points at or above the
  minimal match, 0.1 percentile at least MM - 0.01), measured with fitting factors
  from :func:`chirpsift.match`'s kernel (brute-force checked in tests/test_match.py).
- numpy.percentile for the coverage summary.

The fitting factor's candidate search (``search="metric"``) against the full sweep
(``search="all"``) and the determinism checks are consistency tests.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

import chirpsift as cs
from chirpsift.bank import Bank, Region, bank_coverage, coverage_summary, estimate_bank_size, fitting_factor, place_bank
from chirpsift.bank.coverage import SweepSetup
from chirpsift.bank.place import lattice_covering_density
from chirpsift.overlap import required_period

MM = 0.97
# a small non-spinning region (lattice) and a small aligned-spin region (stochastic)
BNS = dict(m1=(1.3, 1.6), m2=(1.3, 1.6), psd="gen2-zero-detuned", f_low=40.0, sample_rate=2048.0, minimal_match=MM)
SPIN = dict(m1=(8.0, 10.0), m2=(8.0, 10.0), chi1=(-0.3, 0.3), chi2=(-0.3, 0.3), psd="gen2-zero-detuned",
            f_low=30.0, sample_rate=2048.0, minimal_match=MM)
# a shorter-template non-spinning region for the full sweeps (seconds, not minutes)
MID = dict(m1=(3.0, 5.0), m2=(3.0, 5.0), psd="gen2-zero-detuned", f_low=30.0, sample_rate=2048.0, minimal_match=MM)


def _ff_args(kw):
    return dict(psd=kw["psd"], f_low=kw["f_low"], sample_rate=kw["sample_rate"])


def _region(kw):
    return Region(**{k: kw[k] for k in ("m1", "m2", "chi1", "chi2") if k in kw})


@pytest.fixture(scope="module")
def bns_bank():
    return place_bank(**BNS, seed=1)


@pytest.fixture(scope="module")
def spin_bank():
    return place_bank(**SPIN, seed=1)


@pytest.fixture(scope="module")
def mid_bank():
    return place_bank(**MID, seed=1)


# ---------------------------------------------------------------------------
# lattices and bank size
# ---------------------------------------------------------------------------


def test_lattice_covering_density():
    # source: Conway & Sloane 1988, ch. 2 (from memory); hexagonal value common practice
    assert lattice_covering_density(1) == pytest.approx(1.0, rel=1e-12)  # segments tile a line
    assert lattice_covering_density(2) == pytest.approx(2 * math.pi / (3 * math.sqrt(3)), rel=1e-12)
    assert lattice_covering_density(3) == pytest.approx(5 * math.sqrt(5) * math.pi / 24, rel=1e-12)
    assert lattice_covering_density(3) == pytest.approx(1.4635, abs=5e-5)
    # the hexagonal cell (3 sqrt 3 / 2) r^2 of REFERENCES item 11 is pi r^2 / theta_2
    assert math.pi / lattice_covering_density(2) == pytest.approx(1.5 * math.sqrt(3), rel=1e-12)


@pytest.mark.parametrize("curve, f_low, published", [("gen1-4km", 40.0, 1.9e3), ("gen2-early", 20.0, 7.7e3)])
def test_bank_size_estimate_for_a_published_comparable_region(curve, f_low, published):
    # source: REFERENCES item 15 self-consistency counts (derived with the 0PN + 1.5PN
    # metric; the fits are item 9a and 9e, named "gen1-4km" and "gen2-early" in
    # chirpsift.DESIGN_CURVES). chirpsift's metric keeps every PN order to 3.5PN, which
    # changes the area by some ten per cent, hence the wide tolerance (factor 1.5).
    assert curve in cs.DESIGN_CURVES
    region = Region(m1=(1.0, 3.0), m2=(1.0, 3.0))
    sample_rate = 4096.0  # Nyquist 2048 Hz, the upper cutoff of the published count
    setup = SweepSetup.build(curve, f_low, sample_rate, float(cs.chirp_duration(1.0, 1.0, f_low)) * 1.05, 2.0)
    assert setup.coordinates.f_high == pytest.approx(2048.0)
    est = estimate_bank_size(region, setup, MM)
    assert est["dimension"] == 2
    assert published / 1.5 < est["templates"] < published * 1.5
    # the count is the area over the hexagonal cell (3 sqrt 3 / 2)(1 - MM) (REFERENCES item 11)
    assert est["templates"] == pytest.approx(est["volume"] / (1.5 * math.sqrt(3) * (1 - MM)), rel=1e-12)
    # the guard counts the edges' share too (half a lattice row per unit of edge length)
    assert est["templates_with_edges"] > est["templates"]
    # place_bank says so before placing a bank larger than max_templates
    with pytest.raises(ValueError, match=r"needs about (\d+) templates") as err:
        place_bank(m1=(1.0, 3.0), m2=(1.0, 3.0), psd=curve, f_low=f_low, sample_rate=sample_rate, max_templates=500)
    said = float(re.search(r"about (\d+) templates", str(err.value)).group(1))
    assert said == pytest.approx(est["templates_with_edges"], abs=1.0)


# ---------------------------------------------------------------------------
# coverage at quick size
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("which", ["bns", "spin"])
def test_coverage_target_at_quick_size(which, bns_bank, spin_bank):
    # source: the coverage target (>= 99% of points at FF >= MM, 0.1 percentile >= MM - 0.01),
    # points uniform in component masses and spins (the documented measure)
    bank, kw = (bns_bank, BNS) if which == "bns" else (spin_bank, SPIN)
    cov = bank_coverage(bank, 3000, seed=11)  # region, psd, f_low, rate, MM from the bank's metadata
    s = cov.summary
    assert s["points"] == 3000 and s["minimal_match"] == MM
    assert s["fraction_covered"] >= 0.99, s
    assert s["percentile_0.1"] >= MM - 0.01, s
    region = _region(kw)
    assert region.contains(*cov.points.T).all()
    assert (cov.points[:, 0] >= cov.points[:, 1]).all()


def test_coverage_summary_against_numpy(spin_bank):
    # source: numpy.percentile / numpy.median / the fraction counted directly
    cov = bank_coverage(spin_bank, 400, seed=3)
    ff = cov.fitting_factors
    assert ff.shape == (400,) and np.all((ff > 0) & (ff <= 1))
    s = cov.summary
    assert set(s) == {"points", "minimal_match", "minimum", "percentile_0.1", "percentile_1", "percentile_5",
                      "median", "fraction_covered"}
    assert s["minimum"] == ff.min()
    for q in (0.1, 1, 5):
        assert s[f"percentile_{q}"] == pytest.approx(np.percentile(ff, q), rel=0, abs=0)
    assert s["median"] == np.median(ff)
    assert s["fraction_covered"] == np.count_nonzero(ff >= MM) / ff.size
    assert coverage_summary(np.array([0.95, 0.98, 0.99, 1.0]), 0.97)["fraction_covered"] == 0.75
    # the same seed draws the same points and gives the same fitting factors
    again = bank_coverage(spin_bank, 400, seed=3)
    np.testing.assert_array_equal(again.points, cov.points)
    np.testing.assert_array_equal(again.fitting_factors, ff)


# ---------------------------------------------------------------------------
# fitting factors
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("which, n_points, seed", [("spin", 100, 5), ("mid", 30, 6)])
def test_metric_candidate_search_equals_the_full_sweep(request, which, n_points, seed):
    # consistency test: the candidate search must find the template the full sweep finds,
    # on a stochastic (spinning) bank and on a lattice bank. Values may differ in the last
    # digits (each point is compared on a grid sized to its longest comparison, which the
    # full sweep makes longer); the best template must not.
    bank, kw = request.getfixturevalue(f"{which}_bank"), {"spin": SPIN, "mid": MID}[which]
    pts = np.stack(_region(kw).sample(n_points, seed=seed), axis=1)
    a, ia = fitting_factor(pts, bank, **_ff_args(kw), search="metric", return_index=True)
    b, ib = fitting_factor(pts, bank, **_ff_args(kw), search="all", return_index=True)
    np.testing.assert_array_equal(ia, ib)
    np.testing.assert_allclose(a, b, rtol=0, atol=1e-4)


def test_a_point_on_a_template_has_fitting_factor_one(spin_bank, mid_bank):
    # source: the match of a template with itself is 1 (Cauchy-Schwarz; tests/test_match.py)
    for bank, kw in ((spin_bank, SPIN), (mid_bank, MID)):
        rows = np.arange(0, len(bank), max(1, len(bank) // 25))
        pts = np.stack([bank.m1, bank.m2, bank.chi1, bank.chi2], axis=1)[rows]
        ff, idx = fitting_factor(pts, bank, **_ff_args(kw), return_index=True)
        np.testing.assert_allclose(ff, 1.0, rtol=0, atol=1e-6)
        np.testing.assert_array_equal(idx, rows)
    # labels swapped (m2 > m1, spins alike) is the same binary
    swapped = np.stack([spin_bank.m2, spin_bank.m1, spin_bank.chi2, spin_bank.chi1], axis=1)[:5]
    np.testing.assert_allclose(fitting_factor(swapped, spin_bank, **_ff_args(SPIN)), 1.0, rtol=0, atol=1e-6)


def test_fitting_factor_against_explicit_matches():
    # source: chirpsift.match (brute-force checked in tests/test_match.py) of the point's
    # and every template's TaylorF2 (each ending at its own ISCO or at Nyquist), maximised
    # over the bank by hand, on the grid the kernel documents: period 1/df the next power
    # of two above required_period of the longest template compared
    bank = Bank([10.0, 11.0, 12.5], [9.0, 10.0, 8.0], [0.1, 0.0, -0.2], [0.0, 0.3, 0.0])
    pts = np.array([[10.05, 8.95, 0.1, 0.01], [11.1, 9.9, 0.02, 0.28], [12.4, 8.1, -0.15, 0.0], [10.9, 9.7, 0.0, 0.1],
                    [15.0, 4.0, 0.0, 0.0]])
    got, idx = fitting_factor(pts, bank, psd="gen2-zero-detuned", f_low=30.0, sample_rate=1024.0, search="all",
                              return_index=True)

    def f_high(m1, m2):
        return np.minimum(cs.isco_frequency(m1, m2), 512.0)

    for p, g, i in zip(pts, got, idx):
        longest = max(cs.chirp_duration(p[0], p[1], 30.0), cs.chirp_duration(bank.m1, bank.m2, 30.0).max())
        df = 1.0 / 2.0 ** math.ceil(math.log2(required_period(longest)))
        n = int(512 / df) + 1
        psd = cs.design_psd(np.arange(n) * df, "gen2-zero-detuned")
        h_bank = cs.taylorf2(bank.m1, bank.m2, bank.chi1, bank.chi2, f_low=30.0, df=df, n_freq=n,
                             f_high=f_high(bank.m1, bank.m2), dtype=np.complex128)
        h = cs.taylorf2(*p, f_low=30.0, df=df, n_freq=n, f_high=f_high(p[0], p[1]), dtype=np.complex128)
        matches = cs.match(h[0], h_bank, psd, df, 30.0)
        assert i == np.argmax(matches)
        assert g == pytest.approx(matches.max(), abs=1e-6)
    assert got.min() < 0.9 < got.max()


def test_fitting_factor_does_not_depend_on_the_thread_count(spin_bank):
    # project rule: identical results for any thread count (bit for bit)
    pts = np.stack(_region(SPIN).sample(200, seed=8), axis=1)
    before = cs.get_threads()
    try:
        cs.set_threads(1)
        one = fitting_factor(pts, spin_bank, **_ff_args(SPIN), return_index=True)
        cs.set_threads(2)
        two = fitting_factor(pts, spin_bank, **_ff_args(SPIN), return_index=True)
    finally:
        cs.set_threads(before)
    np.testing.assert_array_equal(one[0], two[0])
    np.testing.assert_array_equal(one[1], two[1])


# ---------------------------------------------------------------------------
# determinism, metadata, files
# ---------------------------------------------------------------------------


def _same(a: Bank, b: Bank):
    for f in ("m1", "m2", "chi1", "chi2"):
        np.testing.assert_array_equal(getattr(a, f), getattr(b, f))
    assert a.metadata == b.metadata


def test_same_seed_same_bank_for_any_thread_count(spin_bank, mid_bank):
    # project rule: seedable, the same bank bit for bit for any thread count
    before = cs.get_threads()
    try:
        cs.set_threads(1)
        spin_one = place_bank(**SPIN, seed=1)
        mid_one = place_bank(**MID, seed=1)
        cs.set_threads(2)
        spin_two = place_bank(**SPIN, seed=1)
    finally:
        cs.set_threads(before)
    _same(spin_one, spin_bank)
    _same(spin_two, spin_bank)
    _same(mid_one, mid_bank)
    # the seed matters for the stochastic method
    other = place_bank(**SPIN, seed=2)
    assert other.metadata["seed"] == 2
    assert len(other) != len(spin_bank) or not np.array_equal(other.m1, spin_bank.m1)


def test_bank_metadata_records_how_it_was_placed(bns_bank, spin_bank):
    # documented metadata (consistency with the call's arguments)
    for bank, kw, method in ((bns_bank, BNS, "lattice"), (spin_bank, SPIN, "stochastic")):
        meta = bank.metadata
        assert meta["region"] == _region(kw).as_dict()
        assert meta["psd"] == kw["psd"]
        assert meta["f_low"] == kw["f_low"]
        assert meta["minimal_match"] == MM
        assert meta["method"] == method
        assert meta["seed"] == 1
        assert meta["sample_rate"] == kw["sample_rate"]
        assert meta["metric_dimension"] == (3 if method == "stochastic" else 2)
        assert 0.0 <= meta["last_check_fraction_below"] < 1e-3  # the fill converged (no CoverageWarning)
        assert _region(kw).contains(bank.m1, bank.m2, bank.chi1, bank.chi2).mean() > 0.5
    assert not spin_bank.metadata["region"] == bns_bank.metadata["region"]
    assert np.any(spin_bank.chi1 != 0) and np.all(bns_bank.chi1 == 0)


@pytest.mark.parametrize("ext", [".npz", ".parquet"])
def test_save_load_round_trip_keeps_metadata(tmp_path, spin_bank, ext):
    path = tmp_path / f"bank{ext}"
    spin_bank.save(path)
    _same(Bank.load(path), spin_bank)
    assert [p.name for p in tmp_path.iterdir()] == [path.name]  # no temporary left behind


def test_stochastic_proposals_are_uniform_in_the_chirp_times():
    # Outside check: within a rectangle of (tau0, tau3) that lies wholly inside the
    # region's image, draws uniform in the chirp times (Sathyaprakash 1994, PRD 50,
    # R7111: tau0 ~ 1 / (eta M^(5/3)), tau3 ~ 1 / (eta M^(2/3)), constants dropped) are
    # uniform: scipy's Kolmogorov-Smirnov test against the uniform law, on both axes.
    from scipy.stats import kstest

    region = Region(m1=(1.0, 10.0), m2=(1.0, 10.0), chi1=(-0.5, 0.5), chi2=(-0.5, 0.5))
    m1, m2, c1, c2 = region.sample_in_chirp_times(40_000, seed=3)
    assert region.contains(m1, m2, c1, c2).all() and np.all(m1 >= m2)
    again = region.sample_in_chirp_times(40_000, seed=3)
    assert all(np.array_equal(a, b) for a, b in zip((m1, m2, c1, c2), again))

    def chirp_times(a, b):
        total, eta = a + b, a * b / (a + b) ** 2
        return 1.0 / (eta * total ** (5 / 3)), 1.0 / (eta * total ** (2 / 3))

    # a rectangle around 4 + 1.5 Msun; every point of a fine grid over it maps into the region
    u0, v0 = chirp_times(4.0, 1.5)
    box = (0.95 * u0, 1.05 * u0, 0.98 * v0, 1.02 * v0)
    gu, gv = np.meshgrid(np.linspace(box[0], box[1], 41), np.linspace(box[2], box[3], 41))
    total = gv / gu
    eta = 1.0 / (gu * total ** (5 / 3))
    assert np.all(eta <= 0.25)
    root = np.sqrt(1.0 - 4.0 * eta)
    assert region.contains(total * (1 + root) / 2, total * (1 - root) / 2).all()
    u, v = chirp_times(m1, m2)
    inside = (u >= box[0]) & (u < box[1]) & (v >= box[2]) & (v < box[3])
    assert inside.sum() > 150
    assert kstest((u[inside] - box[0]) / (box[1] - box[0]), "uniform").pvalue > 1e-3
    assert kstest((v[inside] - box[2]) / (box[3] - box[2]), "uniform").pvalue > 1e-3
    # the light corner, thinly drawn by points uniform in the masses, gets its share
    light = np.mean(m2 < 1.3)
    assert light > 4 * np.mean(region.sample(40_000, seed=3)[1] < 1.3)
