"""Bad input to the bank functions: a clear ValueError or TypeError naming the argument and value.

Project rule (RULES.md, "Bad input") and the placement work's list: empty or inverted
ranges, a minimal match outside (0, 1), ``f_low`` at or above the ISCO frequency of
every binary in the region, spins outside (-1, 1), a PSD infinite over the whole band,
points of the wrong shape, and for :func:`chirpsift.match` mismatched shapes or a
template with no power. Property-based where a family of values is bad; few examples,
since every call builds a little state. The junk-argument contract of
tests/contract/ covers ``match``, ``fitting_factor`` and ``bank_coverage`` too.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import chirpsift as cs
from chirpsift import reference
from chirpsift.bank import Bank, CoverageWarning, bank_coverage, fitting_factor, place_bank
from chirpsift.bank import place as place_module

FEW = settings(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.too_slow])
# a small valid heavy region (fast to validate; placing it is never reached in these tests)
BASE = dict(m1=(10.0, 12.0), m2=(10.0, 12.0), psd="gen2-zero-detuned", f_low=30.0, sample_rate=1024.0)
BANK = Bank([10.0, 11.0], [10.0, 9.0])
FF = dict(psd="gen2-zero-detuned", f_low=30.0, sample_rate=1024.0)


def _raises_naming(fn, name, exc=(ValueError, TypeError), value=None):
    with pytest.raises(exc) as err:
        fn()
    msg = str(err.value)
    assert re.search(rf"(?<![A-Za-z0-9_]){re.escape(name)}(?![A-Za-z0-9_])", msg), msg
    if value is not None:
        assert value in msg, msg
    return msg


finite = st.floats(-1e3, 1e3, allow_nan=False)
masses = st.floats(0.5, 100.0)


# ---------------------------------------------------------------------------
# ranges
# ---------------------------------------------------------------------------


@FEW
@given(arg=st.sampled_from(["m1", "m2", "chi1", "chi2"]), a=st.floats(0.01, 0.9), b=st.floats(0.01, 0.9))
def test_inverted_range_is_refused(arg, a, b):
    lo, hi = sorted((a, b))
    if lo == hi:
        hi = lo + 0.05
    scale = 10.0 if arg in ("m1", "m2") else 1.0
    kw = dict(BASE, **{arg: (hi * scale, lo * scale)})
    _raises_naming(lambda: place_bank(**kw), arg, ValueError, "inverted")
    _raises_naming(lambda: bank_coverage(BANK, 10, **kw), arg, ValueError, "inverted")


@pytest.mark.parametrize("arg", ["m1", "m2", "chi1", "chi2", "mtotal", "mass_ratio"])
@pytest.mark.parametrize("value", [(), (1.0,), (1.0, 2.0, 3.0), "ab", 5.0, None])
def test_range_that_is_not_a_pair_is_refused(arg, value):
    if value is None and arg in ("mtotal", "mass_ratio"):
        return  # None is the documented "no cut"
    _raises_naming(lambda: place_bank(**dict(BASE, **{arg: value})), arg)


@FEW
@given(arg=st.sampled_from(["m1", "m2"]), m=masses)
def test_empty_mass_range_is_refused_by_place_bank(arg, m):
    _raises_naming(lambda: place_bank(**dict(BASE, **{arg: (m, m)})), arg, ValueError, "empty")


def test_fixed_nonzero_spins_are_refused_by_place_bank():
    _raises_naming(lambda: place_bank(**BASE, chi1=(0.2, 0.2), chi2=(0.2, 0.2)), "chi1", ValueError, "0.2")


@FEW
@given(arg=st.sampled_from(["m1", "m2"]), lo=st.floats(-100.0, 0.0), hi=st.floats(0.0, 100.0))
def test_non_positive_mass_is_refused(arg, lo, hi):
    _raises_naming(lambda: place_bank(**dict(BASE, **{arg: (lo, hi)})), arg, ValueError)


@FEW
@given(arg=st.sampled_from(["m1", "m2", "chi1", "chi2"]), bad=st.sampled_from([np.nan, np.inf, -np.inf]),
       first=st.booleans())
def test_non_finite_range_is_refused(arg, bad, first):
    good = 10.0 if arg in ("m1", "m2") else 0.1
    pair = (bad, good) if first else (good, bad)
    _raises_naming(lambda: place_bank(**dict(BASE, **{arg: pair})), arg, ValueError)


@FEW
@given(arg=st.sampled_from(["chi1", "chi2"]), out=st.floats(1.0, 50.0), inside=st.floats(-0.99, 0.99),
       high=st.booleans())
def test_spin_bound_outside_unit_interval_is_refused(arg, out, inside, high):
    pair = (min(inside, out), out) if high else (-out, max(inside, -out))
    _raises_naming(lambda: place_bank(**dict(BASE, **{arg: pair})), arg, ValueError, "(-1, 1)")
    _raises_naming(lambda: bank_coverage(BANK, 10, **dict(BASE, **{arg: pair})), arg, ValueError, "(-1, 1)")


def test_cuts_that_leave_nothing_are_refused():
    _raises_naming(lambda: place_bank(**BASE, mtotal=(100.0, 200.0)), "mtotal", ValueError)
    _raises_naming(lambda: place_bank(**BASE, mass_ratio=(0.2, 0.5)), "mass_ratio", ValueError)


# ---------------------------------------------------------------------------
# minimal match, f_low, sample rate, PSD, seed, caps
# ---------------------------------------------------------------------------


@FEW
@given(mm=st.one_of(st.floats(max_value=0.0), st.floats(min_value=1.0), st.sampled_from([np.nan, np.inf])))
def test_minimal_match_outside_unit_interval_is_refused(mm):
    _raises_naming(lambda: place_bank(**BASE, minimal_match=mm), "minimal_match", ValueError)
    _raises_naming(lambda: bank_coverage(BANK, 10, **BASE, minimal_match=mm), "minimal_match", ValueError)


@FEW
@given(lo=st.floats(1.0, 40.0), width=st.floats(0.1, 20.0), above=st.floats(0.0, 500.0))
def test_f_low_at_or_above_isco_of_every_binary_is_refused(lo, width, above):
    # source: Schwarzschild ISCO f = c^3 / (6^(3/2) pi G M) (REFERENCES item 4): the
    # lightest binary of the region has the highest ISCO
    top = float(cs.isco_frequency(lo, lo))
    f_low = top + above
    kw = dict(BASE, m1=(lo, lo + width), m2=(lo, lo + width), f_low=f_low, sample_rate=2.0 ** 20)
    _raises_naming(lambda: place_bank(**kw), "f_low", ValueError, "ISCO")


def test_f_low_just_below_isco_gives_a_clean_result():
    # the post-Newtonian duration turns negative just below ISCO; once that surfaced as an
    # error about an internal 'longest'
    ff = fitting_factor(np.array([[10.0, 10.0]]), Bank([10.0], [10.0]), **dict(FF, f_low=215.0))
    assert ff[0] == pytest.approx(1.0, abs=1e-6)  # ISCO of 10 + 10 Msun: 219.9 Hz


def test_a_bank_that_does_not_cover_its_region_says_so(monkeypatch):
    # f_low = 214 Hz lies above the ISCO frequency of the region's heaviest binaries
    # (209.4 Hz at 21 Msun; REFERENCES item 4) though below that of the lightest: no bank
    # can cover those, and the fill rounds run out. The bank must not look complete.
    monkeypatch.setattr(place_module, "FILL_ROUNDS", 2)  # the outcome is the same after 8 rounds, 4x slower
    with pytest.warns(CoverageWarning, match=r"minimal_match=0.97.*f_low=214.0"):
        bank = place_bank(**dict(BASE, m1=(10.0, 10.5), m2=(10.0, 10.5), f_low=214.0))
    assert bank.metadata["last_check_fraction_below"] > 0.5


def test_f_low_at_or_above_nyquist_names_sample_rate():
    _raises_naming(lambda: place_bank(**dict(BASE, sample_rate=50.0)), "sample_rate", ValueError, "Nyquist")


@pytest.mark.parametrize("psd", [
    lambda f: np.full_like(f, np.inf),
    (np.array([1.0, 20.0]), np.array([1e-46, 1e-46])),  # samples end below f_low: inf above
    lambda f: np.where(f < 25.0, 1e-46, np.inf),
], ids=["callable-inf", "samples-below-band", "finite-only-below-band"])
def test_psd_infinite_over_the_whole_band_is_refused(psd):
    _raises_naming(lambda: place_bank(**dict(BASE, psd=psd)), "psd", ValueError, "whole band")
    _raises_naming(lambda: fitting_factor([[10.0, 10.0]], BANK, **dict(FF, psd=psd)), "psd", ValueError, "whole band")
    _raises_naming(lambda: bank_coverage(BANK, 5, **dict(BASE, psd=psd)), "psd", ValueError, "whole band")


@pytest.mark.parametrize("psd", ["no-such-curve", None, 3.0, [1.0, 2.0], lambda f: -np.ones_like(f)])
def test_psd_that_is_not_a_noise_curve_is_refused(psd):
    names = "psd" if not isinstance(psd, str) else "curve"
    _raises_naming(lambda: place_bank(**dict(BASE, psd=psd)), names)


@pytest.mark.parametrize("seed", [-1, 1.5, "x", None, np.array([1, 2])])
def test_bad_seed_is_refused(seed):
    _raises_naming(lambda: place_bank(**BASE, seed=seed), "seed")
    _raises_naming(lambda: bank_coverage(BANK, 5, **BASE, seed=seed), "seed")


def test_bank_above_max_templates_is_refused():
    # the metric estimate of this region is below 1, the placed bank is not: the cap
    # applies to what is placed, not only to the estimate
    msg = _raises_naming(lambda: place_bank(**BASE, max_templates=1), "max_templates", ValueError)
    assert "needs" in msg
    _raises_naming(lambda: place_bank(**BASE, max_templates=0), "max_templates", ValueError)


@pytest.mark.parametrize("method", ["grid", "", 3, None])
def test_unknown_method_is_refused(method):
    _raises_naming(lambda: place_bank(**BASE, method=method), "method", ValueError)


def test_lattice_with_spins_is_refused():
    _raises_naming(lambda: place_bank(**BASE, chi1=(0.0, 0.1), method="lattice"), "method", ValueError)


# ---------------------------------------------------------------------------
# points and banks
# ---------------------------------------------------------------------------


@FEW
@given(shape=st.one_of(
    st.tuples(st.integers(1, 4), st.sampled_from([1, 3, 5, 8])),      # wrong column count
    st.tuples(st.integers(1, 8)),                                      # 1-D
    st.tuples(st.integers(1, 3), st.integers(1, 3), st.integers(1, 3)),  # 3-D
    st.just((0, 2)), st.just((0, 4)),                                   # empty
))
def test_points_of_the_wrong_shape_are_refused(shape):
    pts = np.full(shape, 10.0)
    msg = _raises_naming(lambda: fitting_factor(pts, BANK, **FF), "points", ValueError)
    assert str(shape) in msg  # the value: the shape given


@FEW
@given(which=st.sampled_from(["mass", "spin"]), value=st.one_of(st.floats(-100.0, 0.0), st.floats(1.0, 10.0)))
def test_points_with_impossible_parameters_are_refused(which, value):
    row = [10.0, 10.0, 0.0, 0.0]
    if which == "mass":
        row[1] = value if value <= 0 else -value
    else:
        row[2] = value if value >= 1 else -1.0 + value  # |chi| >= 1
    _raises_naming(lambda: fitting_factor(np.array([row]), BANK, **FF), "points", ValueError)


def test_points_not_finite_or_not_numbers_are_refused():
    _raises_naming(lambda: fitting_factor(np.array([[10.0, np.nan]]), BANK, **FF), "points", ValueError, "nan")
    _raises_naming(lambda: fitting_factor("ab", BANK, **FF), "points", TypeError)


def test_bank_that_is_not_a_bank_is_refused():
    _raises_naming(lambda: fitting_factor([[10.0, 10.0]], [[10.0, 10.0]], **FF), "bank", TypeError, "list")
    _raises_naming(lambda: bank_coverage([[10.0, 10.0]], 5, **BASE), "bank", TypeError, "list")
    _raises_naming(lambda: fitting_factor([[10.0, 10.0]], Bank([], []), **FF), "bank", ValueError, "no templates")


def test_coverage_without_a_region_is_refused():
    _raises_naming(lambda: bank_coverage(BANK, 5, psd="gen2-zero-detuned", f_low=30.0), "m1", ValueError)
    _raises_naming(lambda: bank_coverage(BANK, 0, **BASE), "n_points", ValueError, "0")


# ---------------------------------------------------------------------------
# match
# ---------------------------------------------------------------------------

_DF = 0.25
_N = 2049
_H = cs.taylorf2(10.0, 10.0, f_low=30.0, df=_DF, n_freq=_N, dtype=np.complex128)[0]
_PSD = np.ones(_N)


@FEW
@given(n1=st.integers(1, 3000), n2=st.integers(1, 3000))
def test_match_with_mismatched_bins_is_refused(n1, n2):
    a = np.ones(n1, complex)
    b = np.ones(n2, complex)
    p = np.ones(n1)
    if n1 == n2:
        return
    _raises_naming(lambda: cs.match(a, b, p, _DF, 1.0), "h2", ValueError, str(n2))


@FEW
@given(r1=st.integers(2, 6), r2=st.integers(2, 6))
def test_match_with_rows_that_neither_pair_nor_broadcast_is_refused(r1, r2):
    if r1 == r2:
        return
    a, b = np.tile(_H, (r1, 1)), np.tile(_H, (r2, 1))
    _raises_naming(lambda: cs.match(a, b, _PSD, _DF, 30.0), "h1", ValueError, f"{r1} rows")


@pytest.mark.parametrize("impl", [cs, reference], ids=["rust", "reference"])
@pytest.mark.parametrize("where", ["h1", "h2"])
def test_match_with_a_template_without_power_is_refused(impl, where):
    zero = np.zeros_like(_H)
    below = np.where(np.arange(_N) * _DF < 30.0, 1.0 + 0j, 0.0)  # power only below f_low
    for bad in (zero, below):
        a, b = (bad, _H) if where == "h1" else (_H, bad)
        _raises_naming(lambda: impl.match(a, b, _PSD, _DF, 30.0), where, ValueError, "no power")
    # power only where the PSD is infinite
    psd = np.where(np.arange(_N) * _DF < 100.0, np.inf, 1.0)
    short = np.where(np.arange(_N) * _DF < 100.0, _H, 0.0)
    a, b = (short, _H) if where == "h1" else (_H, short)
    _raises_naming(lambda: impl.match(a, b, psd, _DF, 30.0), where, ValueError, "no power")


def test_a_spinning_region_above_max_templates_is_refused_while_placing():
    # the 3-D volume estimate of a spinning region is only a lower bound, so the cap is
    # enforced by the metric-only stochastic stage: it stops once it passes the cap
    with pytest.raises(ValueError, match=r"needs more than max_templates=50 templates"):
        place_bank(m1=(5.0, 10.0), m2=(5.0, 10.0), chi1=(-0.5, 0.5), chi2=(-0.5, 0.5), psd="gen2-zero-detuned",
                   f_low=30.0, max_templates=50)
