"""Every public function with one argument replaced by junk keeps the contract (see ``harness``)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import chirpsift as cs
from chirpsift import Bank
from contract.harness import (
    ALLOW_INF,
    BASES,
    FAST,
    JUNK,
    JUNK_SCALARS,
    SLOW,
    STRAIN,
    TINY_BANK,
    any_array,
    call,
    corrupt,
    names_for,
)


@pytest.mark.parametrize("name", sorted(BASES))
def test_baseline_is_valid(name):
    fn, base = BASES[name]
    out = call(fn, names=(), allow_inf=name in ALLOW_INF, **base)
    assert out is not None


@pytest.mark.parametrize("name", sorted(BASES))
@FAST
@given(data=st.data())
def test_one_junk_argument(name, data):
    fn, base = BASES[name]
    kwargs, arg = corrupt(data, base)
    # complex64 templates overflow to inf for absurdly small distances (pinned below)
    overflow_ok = (
        name == "taylorf2" and arg == "distance" and isinstance(kwargs[arg], float) and 0 < kwargs[arg] < 1e-20
    )
    call(fn, names=names_for(name, arg, kwargs[arg]), allow_inf=name in ALLOW_INF or overflow_ok, **kwargs)


@SLOW
@given(data=st.data())
def test_search_one_junk_argument(data):
    base = dict(strain=STRAIN, sample_rate=128.0, bank=TINY_BANK, t0=0.0, f_low=30.0, segment_duration=8.0,
                welch_duration=2.0, min_snr=4.0, peak_window=0.5, chi2_bands=4, psd=None,
                phase_order=7, bank_cluster=False)
    kwargs, arg = corrupt(data, base)
    names = names_for("search", arg, kwargs[arg])
    if names is not None and arg == "psd":
        names |= {"curve", "freqs"}
    if names is not None and arg == "bank":
        names |= {"m1", "m2", "chi1", "chi2", "template"}
    if names is not None and arg in ("sample_rate", "f_low", "segment_duration", "welch_duration", "bank"):
        names |= {"segment_duration", "welch_duration", "f_low", "strain"}
    out = call(cs.search, names=names, **kwargs)
    if out is not None:
        assert out.dtype == cs.TRIGGER_DTYPE


@FAST
@given(n=st.one_of(st.integers(-5, 8), JUNK_SCALARS))
def test_set_threads_junk(n):
    before = cs.get_threads()
    try:
        call(cs.set_threads, n, names={"n"})
    finally:
        cs.set_threads(before)
    assert cs.get_threads() == before


@FAST
@given(obj=st.one_of(JUNK, any_array().map(lambda a: {"m1": a, "m2": 1.5}), st.fixed_dictionaries({
    "m1": JUNK, "m2": st.just([1.0])})))
def test_bank_from_any_junk(obj):
    out = call(Bank.from_any, obj, names={"bank", "m1", "m2", "chi1", "chi2"})
    if out is not None:
        assert isinstance(out, Bank)
        assert np.all(out.m1 > 0) and np.all(np.abs(out.chi1) < 1)
