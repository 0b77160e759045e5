"""Injection populations: stated densities, spacing, and bad input."""

import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy import stats

import chirpsift as cs
from chirpsift.inject import INJECTION_COLUMNS, SPACING_MARGIN, longest_signal

N = 4000
KW = dict(m1=(1.2, 2.0), m2=(1.0, 1.6), chi1=(-0.5, 0.5), chi2=(0.0, 0.3), start=1e9, end=1e9 + 1e6, f_low=40.0)


@pytest.fixture(scope="module")
def population():
    return cs.draw_injections(N, distance=(20.0, 400.0), seed=11, **KW)


def _ks(sample, cdf):
    # Kolmogorov-Smirnov test (scipy) against the stated density; with a fixed seed the
    # p-value is a fixed number, and a wrong density gives p ~ 0 at N = 4000.
    return stats.kstest(sample, cdf).pvalue


def test_table_fields_sorted_and_within_range(population):
    assert population.dtype.names == INJECTION_COLUMNS
    t = population["time"]
    assert np.all(np.diff(t) > 0) and t[0] >= KW["start"] and t[-1] < KW["end"]
    for name, (lo, hi) in (("m1", KW["m1"]), ("m2", KW["m2"]), ("spin1", KW["chi1"]), ("spin2", KW["chi2"])):
        assert population[name].min() >= lo and population[name].max() <= hi


def test_spacing_exceeds_the_longest_signal(population):
    # The lightest pair lasts longest (chirp time ~ Mc^(-5/3), Sathyaprakash 1994); no two
    # signals may overlap, so consecutive times are at least that far apart.
    longest = cs.chirp_duration(KW["m1"][0], KW["m2"][0], KW["f_low"])
    gaps = np.diff(population["time"])
    assert gaps.min() >= longest + SPACING_MARGIN - 1e-6
    assert longest_signal(KW["m1"], KW["m2"], KW["f_low"]) >= longest


def test_isotropic_sky_and_orientation(population):
    # Isotropy (common practice): ra uniform, sin(dec) and cos(inclination) uniform on
    # [-1, 1], polarisation uniform on [0, pi), phase uniform on [0, 2 pi).
    checks = [
        (population["ra"], stats.uniform(0, 2 * np.pi).cdf),
        (np.sin(population["dec"]), stats.uniform(-1, 2).cdf),
        (np.cos(population["inclination"]), stats.uniform(-1, 2).cdf),
        (population["polarisation"], stats.uniform(0, np.pi).cdf),
        (population["phase"], stats.uniform(0, 2 * np.pi).cdf),
        (population["m1"], stats.uniform(1.2, 0.8).cdf),
    ]
    for sample, cdf in checks:
        assert _ks(sample, cdf) > 1e-3


@pytest.mark.parametrize("kind", ["volume", "uniform", "log"])
def test_distance_follows_the_stated_density(kind):
    lo, hi = 5.0, 300.0
    inj = cs.draw_injections(N, distance=(lo, hi), distance_distribution=kind, seed=3, **KW)
    d = inj["distance"]
    cdf = {
        "volume": lambda x: (x**3 - lo**3) / (hi**3 - lo**3),
        "uniform": lambda x: (x - lo) / (hi - lo),
        "log": lambda x: np.log(x / lo) / np.log(hi / lo),
    }[kind]
    assert _ks(d, cdf) > 1e-3
    # The recorded density integrates the stated CDF: its mean of 1/p is the range's
    # length (E[1/p(d)] = hi - lo for any density on [lo, hi]); relative error of the
    # mean is about std/sqrt(N), far below 10% here.
    assert abs(np.mean(1 / inj["distance_density"]) / (hi - lo) - 1) < 0.1
    assert np.all(d >= lo) and np.all(d <= hi)


def test_same_seed_same_set_and_different_seed_different_set():
    a = cs.draw_injections(10, distance=(10, 100), seed=5, **KW)
    b = cs.draw_injections(10, distance=(10, 100), seed=5, **KW)
    c = cs.draw_injections(10, distance=(10, 100), seed=6, **KW)
    assert a.tobytes() == b.tobytes() and a.tobytes() != c.tobytes()


def test_volume_distribution_from_zero_is_allowed_and_positive():
    inj = cs.draw_injections(500, distance=(0.0, 50.0), seed=1, **KW)
    assert np.all(inj["distance"] > 0)


BAD = [
    (dict(n=0), "n"),
    (dict(m1=(2.0, 1.0)), "m1"),
    (dict(m2=(-1.0, 1.0)), "m2"),
    (dict(chi1=(-0.5, 1.0)), "chi1"),
    (dict(distance=(100.0, 10.0)), "distance"),
    (dict(distance=(-5.0, 10.0)), "distance"),
    (dict(distance=(0.0, 0.0)), "distance"),
    (dict(distance=50.0), "distance"),
    (dict(distance=(0.0, 10.0), distance_distribution="log"), "distance"),
    (dict(distance_distribution="sphere"), "distance_distribution"),
    (dict(start=10.0, end=10.0), "end"),
    (dict(spacing=5.0), "spacing"),
    (dict(f_low=5000.0), "f_low"),
    (dict(n=10**6), "n="),
]


@pytest.mark.parametrize("change, word", BAD)
def test_bad_input_names_the_argument(change, word):
    kw = dict(KW, n=5, distance=(10.0, 100.0), start=0.0, end=1e4)
    kw.update(change)
    n = kw.pop("n")
    with pytest.raises(ValueError, match=word):
        cs.draw_injections(n, **kw)


def test_spacing_error_names_the_value_and_minimum():
    with pytest.raises(ValueError) as err:
        cs.draw_injections(2, m1=1.4, m2=1.4, distance=(1, 2), start=0, end=1e4, f_low=40.0, spacing=20.0)
    text = str(err.value)
    assert "spacing=20.0" in text and f"{cs.chirp_duration(1.4, 1.4, 40.0) * 1.1 + SPACING_MARGIN:.4g}" in text


@settings(max_examples=60, deadline=None)
@given(lo=st.floats(-1e3, 1e3, allow_nan=False), width=st.floats(-1e3, 0.0, exclude_max=True, allow_nan=False))
def test_inverted_or_empty_distance_ranges_are_refused(lo, width):
    # Property: any range with high <= low, or reaching below zero, is an error naming distance.
    hi = lo + width if width < 0 else lo
    with pytest.raises(ValueError, match="distance"):
        cs.draw_injections(1, m1=1.4, m2=1.4, distance=(lo, hi), start=0.0, end=100.0, f_low=40.0)


@settings(max_examples=40, deadline=None)
@given(n=st.integers(1, 30), seed=st.integers(0, 2**31))
def test_any_draw_keeps_its_spacing(n, seed):
    step = longest_signal(1.4, 1.4, 40.0) + SPACING_MARGIN
    span = math.ceil(n * step * 1.5)
    inj = cs.draw_injections(n, m1=1.4, m2=1.4, distance=(1, 2), start=0.0, end=span, f_low=40.0, seed=seed)
    assert inj.size == n and np.all(np.diff(inj["time"]) >= step - 1e-9)
    assert inj["time"].min() >= 0 and inj["time"].max() < span
