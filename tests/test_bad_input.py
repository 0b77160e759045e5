"""Regressions: hostile inputs that once broke the contract of ``tests/contract/harness.py``.

Each test pins one defect found by the contract tests (a Rust panic, a NaN result, an
allocation abort, a numpy message naming no argument) so it cannot come back.
"""

from __future__ import annotations

import subprocess
import sys
import textwrap

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import chirpsift as cs
from chirpsift import Bank
from contract.harness import DATA_FD, DF, FAST, FS, NOISE, STRAIN, TEMPLATES, TINY_BANK, WHITE_PSD, call


# ---------------------------------------------------------------------------
# pinned defects
# ---------------------------------------------------------------------------


def _run_isolated(code: str) -> subprocess.CompletedProcess:
    """Run ``code`` in a child interpreter (an allocation abort would kill pytest)."""
    return subprocess.run([sys.executable, "-c", textwrap.dedent(code)], capture_output=True, text=True, timeout=60)


def _expect_clean_error(call_src: str, name: str):
    proc = _run_isolated(f"""
        import numpy as np, chirpsift as cs
        try:
            {call_src}
        except (ValueError, TypeError, MemoryError) as exc:
            print("CLEAN", type(exc).__name__, exc)
        else:
            print("RETURNED")
    """)
    assert proc.returncode == 0, f"child died with {proc.returncode}: {proc.stderr[-300:]}"
    assert "CLEAN" in proc.stdout and name in proc.stdout, proc.stdout


def test_regression_psd_to_grid_huge_n_freq_is_refused():
    _expect_clean_error("cs.psd_to_grid([1.0, 2.0], [1.0, 1.0], 0.5, 10**15)", "n_freq")


def test_regression_taylorf2_huge_n_freq_is_refused():
    _expect_clean_error("cs.taylorf2(1.4, 1.4, f_low=20.0, df=1.0, n_freq=10**13)", "n_freq")


def test_regression_filter_segment_huge_chi2_bands_is_refused():
    _expect_clean_error(
        "cs.filter_segment(np.ones(513, complex), np.ones(513), 0.5, 5.0, 5.0, f_low=20.0, chi2_bands=10**12)",
        "chi2_bands",
    )


def test_regression_welch_overflow_raises_instead_of_nan():
    call(cs.welch, np.full(512, 1e308), 256.0, 1.0, names={"x"}, allow_inf=True)


@pytest.mark.parametrize("curve", ["gen1-600m", "gen2-early"])
def test_regression_design_psd_inf_not_nan_at_high_frequency(curve):
    call(cs.design_psd, [1e200], curve, names={"freqs"}, allow_inf=True)


def test_regression_whiten_tiny_psd_raises_instead_of_nan():
    call(cs.whiten, NOISE[:128], np.full(65, 5e-324), 128.0, names={"psd"})


def test_regression_whiten_huge_x_raises_instead_of_nan():
    call(cs.whiten, np.full(128, 1e308), np.ones(65), 128.0, names={"x"})


def test_regression_taylorf2_tiny_mass_raises_instead_of_nan():
    call(cs.taylorf2, 1e-200, 1e-200, f_low=20.0, df=0.25, n_freq=1025, names={"m1", "m2"})


def test_regression_taylorf2_tiny_df_raises_instead_of_nan():
    call(cs.taylorf2, 1.4, 1.4, f_low=1e-300, df=1e-300, n_freq=8, names={"df", "f_low"})


@pytest.mark.parametrize("m, f_low", [(1e-200, 20.0), (1e200, 20.0), (1.4, 1e300)])
def test_regression_chirp_duration_raises_instead_of_nan(m, f_low):
    call(cs.chirp_duration, m, m, f_low, names={"m1", "m2", "f_low"})


def test_regression_snr_series_complex64_overflow_raises_instead_of_nan():
    call(cs.snr_series, DATA_FD * 1e39 * FS, TEMPLATES, WHITE_PSD, DF, 20.0, names={"data_fd", "dtype"}, allow_inf=True)


def test_regression_correlate_overflow_raises_instead_of_nan():
    call(cs.correlate, np.full(100, 1e200), np.full(10, 1e200), names={"data", "templates"}, allow_inf=True)


def test_regression_set_threads_huge_int_no_overflow_error():
    before = cs.get_threads()
    try:
        call(cs.set_threads, 10**30, names={"n"})
    finally:
        cs.set_threads(before)


@pytest.mark.parametrize("arg", ["chi2_bands", "cluster_samples"])
def test_regression_filter_segment_huge_int_no_overflow_error(arg):
    call(cs.filter_segment, DATA_FD, WHITE_PSD, DF, 5.0, 5.0, f_low=20.0, names={arg}, **{arg: 10**30})


@pytest.mark.parametrize("fn", [cs.chirp_duration, cs.isco_frequency, cs.filter_segment])
def test_regression_mass_broadcast_message(fn):
    args = {
        cs.chirp_duration: ([1.0, 2.0], [1.0, 2.0, 3.0], 20.0),
        cs.isco_frequency: ([1.0, 2.0], [1.0, 2.0, 3.0]),
        cs.filter_segment: (DATA_FD, WHITE_PSD, DF, [5.0, 6.0], [5.0, 6.0, 7.0]),
    }[fn]
    kwargs = {"f_low": 20.0} if fn is cs.filter_segment else {}
    with pytest.raises(ValueError, match=r"\bm1\b|\bm2\b"):
        fn(*args, **kwargs)


FUSED_BAD = [
    pytest.param({"f_high": "a"}, "f_high", id="f_high-str"),
    pytest.param({"f_high": 100.0 + 1j}, "f_high", id="f_high-complex"),
    pytest.param({"f_high": [100.0, 100.0, 100.0]}, "f_high", id="f_high-shape"),
    pytest.param({"valid": 5}, "valid", id="valid-int"),
    pytest.param({"valid": "ab"}, "valid", id="valid-str"),
    pytest.param({"valid": (np.nan, 5)}, "valid", id="valid-nan"),
    pytest.param({"valid": {"a": 1}}, "valid", id="valid-dict-keyerror"),
    pytest.param({"valid": (5,)}, "valid", id="valid-short-indexerror"),
    pytest.param({"valid": np.float32(3.0)}, "valid", id="valid-scalar-indexerror"),
    pytest.param({"valid": (np.inf, np.inf)}, "valid", id="valid-inf-overflowerror"),
]


@pytest.mark.parametrize("kwargs, name", FUSED_BAD)
def test_regression_filter_segment_unvalidated_arguments(kwargs, name):
    call(cs.filter_segment, DATA_FD, WHITE_PSD, DF, [5.0, 6.0], 5.0, f_low=20.0, names={name}, **kwargs)


SEARCH_KW = dict(sample_rate=128.0, bank=TINY_BANK, f_low=30.0, segment_duration=8.0, welch_duration=2.0)
SEARCH_BAD = [
    pytest.param({"t0": "a"}, "t0", id="t0-str"),
    pytest.param({"t0": 1j}, "t0", id="t0-complex"),
    pytest.param({"t0": [1.0, 2.0]}, "t0", id="t0-array"),
    pytest.param({"psd": 1j}, "psd", id="psd-complex"),
    pytest.param({"psd": object()}, "psd", id="psd-object"),
    pytest.param({"psd": np.array(["a"] * 513)}, "psd", id="psd-str-array"),
    pytest.param({"psd": lambda f: np.ones(3)}, "psd", id="psd-callable-wrong-shape"),
    pytest.param({"peak_window": 1e30}, "peak_window", id="peak_window-huge"),
    pytest.param({"chi2_bands": 10**30}, "chi2_bands", id="chi2_bands-huge"),
    pytest.param({"gate_threshold": 1.0, "gate_half_width": 1e300}, "gate_half_width", id="gate_half_width-huge"),
    pytest.param({"gate_threshold": 1.0, "gate_taper": 1e300}, "gate_taper", id="gate_taper-huge"),
    pytest.param({"strain": np.zeros(STRAIN.size)}, "strain", id="strain-all-zero"),
    pytest.param({"bank_cluster": np.array([])}, "bank_cluster", id="bank_cluster-empty-array"),
    pytest.param({"f_low": 1e-297}, "f_low", id="f_low-tiny-overflowerror"),
]


@pytest.mark.parametrize("kwargs, name", SEARCH_BAD)
def test_regression_search_unvalidated_arguments(kwargs, name):
    kw = dict(SEARCH_KW, **kwargs)
    strain = kw.pop("strain", STRAIN)
    call(cs.search, strain, names={name}, **kw)


def test_regression_bank_ragged_field_message():
    call(Bank.from_any, {"m1": [[1.0], [1.0, 2.0]], "m2": [1.0]}, names={"m1", "bank"})


@pytest.mark.parametrize("fn", ["taylorf2", "snr_series"])
def test_regression_dtype_junk_message(fn):
    if fn == "taylorf2":
        call(cs.taylorf2, 1.4, 1.4, f_low=20.0, df=1.0, n_freq=65, dtype=0.0, names={"dtype"})
    else:
        call(cs.snr_series, DATA_FD, TEMPLATES, WHITE_PSD, DF, 20.0, dtype=0.0, names={"dtype"})


def test_regression_cluster_ragged_groups_message():
    call(cs.cluster_in_time, [0.0, 1.0], [1.0, 2.0], 1.0, groups=[[1.0], [1.0, 2.0]], names={"groups"})


@pytest.mark.parametrize("args", [(10, 20, 1, 1), (100, 20, 15, 5)], ids=["data-short", "no-stride"])
def test_regression_plan_segments_messages(args):
    call(cs.plan_segments, *args, names={"n_samples", "length", "pad_start", "pad_end"})


@pytest.mark.parametrize("detrend", [np.zeros(3), np.array([]), np.zeros(1)], ids=["3", "empty", "1"])
def test_regression_welch_array_detrend(detrend):
    call(cs.welch, NOISE, 64.0, 2.0, detrend=detrend, names={"detrend"})


def test_regression_taylorf2_tiny_distance_raises_instead_of_inf():
    call(cs.taylorf2, 1.4, 1.4, f_low=20.0, df=0.25, n_freq=1025, distance=1e-300, names={"distance"})


@pytest.mark.parametrize("junk", [b"0\x00", "i4,(2", "0", b"\xff", "f8,,", "(", "S-1"], ids=repr)
@pytest.mark.parametrize("fn", ["taylorf2", "snr_series"])
def test_regression_dtype_parser_failures_name_the_argument(fn, junk):
    # numpy's dtype parser raises ValueError ("format number 1 of ...") or SyntaxError for
    # some strings and bytes, with a message that names no argument
    if fn == "taylorf2":
        call(cs.taylorf2, 1.4, 1.4, f_low=20.0, df=1.0, n_freq=65, dtype=junk, names={"dtype"})
    else:
        call(cs.snr_series, DATA_FD, TEMPLATES, WHITE_PSD, DF, 20.0, dtype=junk, names={"dtype"})


@FAST
@given(junk=st.one_of(st.binary(max_size=6), st.text(max_size=6)))
def test_dtype_from_any_string_or_bytes_names_the_argument(junk):
    call(cs.snr_series, DATA_FD, TEMPLATES, WHITE_PSD, DF, 20.0, dtype=junk, names={"dtype"})
