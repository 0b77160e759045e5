"""Conditioning: strain checks, non-finite runs, finite stretches and interval arithmetic.

Each interval rule is checked against a brute-force boolean mask over the samples
(common practice): an interval list is exactly the set of indices it covers.
"""

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from chirpsift import condition


def _mask(n, intervals):
    m = np.zeros(n, dtype=bool)
    for a, b in intervals:
        m[int(a):int(b)] = True
    return m


def _runs(mask):
    """Half-open runs of True, by walking the samples one by one."""
    out, start = [], None
    for i, v in enumerate(mask):
        if v and start is None:
            start = i
        if not v and start is not None:
            out.append((start, i))
            start = None
    if start is not None:
        out.append((start, len(mask)))
    return out


@settings(max_examples=200, deadline=None)
@given(st.lists(st.sampled_from([0.0, 1.0, np.nan, np.inf, -np.inf]), max_size=60))
def test_finite_stretches_are_the_runs_of_finite_samples(values):
    x = np.array(values, dtype=float)
    finite = np.isfinite(x)
    assert condition.finite_stretches(x) == _runs(finite)
    assert condition.find_nonfinite_runs(x) == _runs(~finite)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.booleans(), max_size=80), st.lists(st.booleans(), max_size=80))
def test_subtract_intervals_matches_masks(keep, cut):
    n = max(len(keep), len(cut))
    a = np.zeros(n, bool)
    a[:len(keep)] = keep
    c = np.zeros(n, bool)
    c[:len(cut)] = cut
    got = condition.subtract_intervals(_runs(a), _runs(c))
    assert got == _runs(a & ~c)
    assert condition.stretches_between(n, _runs(c)) == _runs(~c)


def test_stretches_between_rejects_unsorted_or_outside_intervals():
    with pytest.raises(ValueError, match="sorted"):
        condition.stretches_between(10, [(5, 6), (1, 2)])
    with pytest.raises(ValueError, match="within"):
        condition.stretches_between(10, [(5, 12)])


def test_io_keeps_the_nonfinite_run_finder():
    from chirpsift import io

    assert io.find_nonfinite_runs is condition.find_nonfinite_runs


@pytest.mark.parametrize("strain", [np.zeros(100), np.r_[np.zeros(50), np.nan, np.zeros(49)]])
def test_check_strain_refuses_data_without_noise(strain):
    with pytest.raises(ValueError, match="strain is identically zero"):
        condition.check_strain(strain)
