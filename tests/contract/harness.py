"""The contract every public function keeps under hostile input, and its tools.

The contract: a call either returns results of the documented shape that are finite
(or ``inf`` where the docs say so, never NaN), or raises ``ValueError`` / ``TypeError``
whose message names the offending argument. Anything else (a Rust panic,
``RuntimeError``, ``OverflowError``, a numpy message that names no argument, a crash or
a hang) is a failure.

This module holds the checker (:func:`call`), the hypothesis strategies for junk and for
odd but valid input, and small valid baselines of every public function; the tests in
this folder and ``tests/test_bad_input.py`` (regressions) use them.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from hypothesis import HealthCheck, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

import chirpsift as cs
from chirpsift import Bank

FAST = settings(
    max_examples=60,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large, HealthCheck.filter_too_much],
)
SLOW = settings(FAST, max_examples=25)

# ---------------------------------------------------------------------------
# the contract
# ---------------------------------------------------------------------------


def numeric_leaves(out):
    """Every numeric array inside a result (tuples, lists, dicts, Banks, records)."""
    if isinstance(out, Bank):
        yield from (out.m1, out.m2, out.chi1, out.chi2)
    elif isinstance(out, dict):
        for v in out.values():
            yield from numeric_leaves(v)
    elif isinstance(out, (tuple, list)):
        for v in out:
            yield from numeric_leaves(v)
    elif out is not None:
        a = np.asarray(out)
        if a.dtype.names:
            for name in a.dtype.names:
                yield from numeric_leaves(a[name])
        elif a.dtype.kind in "biufc":
            yield a


def names_argument(message: str, names) -> bool:
    return any(re.search(rf"(?<![A-Za-z0-9_]){re.escape(n)}(?![A-Za-z0-9_])", message) for n in names)


def call(fn, *args, names, allow_inf=False, **kwargs):
    """Call ``fn``; return its result (checked for NaN/inf) or None after a clean error."""
    try:
        out = fn(*args, **kwargs)
    except (ValueError, TypeError) as exc:
        msg = str(exc)
        assert names is None or names_argument(msg, names), (
            f"{type(exc).__name__}({msg!r}) names none of {sorted(names)}"
        )
        return None
    except (KeyboardInterrupt, SystemExit):
        raise
    except BaseException as exc:  # PanicException derives from BaseException
        pytest.fail(f"{fn.__name__} raised {type(exc).__module__}.{type(exc).__name__}: {exc}")
    for a in numeric_leaves(out):
        if a.dtype.kind in "fc":
            assert not np.isnan(a).any(), f"{fn.__name__} returned NaN"
            if not allow_inf:
                assert np.isfinite(a).all(), f"{fn.__name__} returned inf"
    return out


# ---------------------------------------------------------------------------
# strategies
# ---------------------------------------------------------------------------

DTYPES = [
    np.float16, np.float32, np.float64, np.int8, np.int32, np.int64, np.uint16, np.bool_, np.complex64, np.complex128
]
NONFINITE = st.sampled_from([np.nan, np.inf, -np.inf])


def floats_or_nonfinite(width=64):
    lim = 6e4 if width == 16 else 1e6
    return st.one_of(st.floats(-lim, lim, width=width, allow_subnormal=False), NONFINITE, st.just(0.0))


def elements_of(dtype):
    dt = np.dtype(dtype)
    if dt.kind == "b":
        return st.booleans()
    if dt.kind in "iu":
        info = np.iinfo(dt)
        return st.integers(max(int(info.min), -10**6), min(int(info.max), 10**6))
    if dt.kind == "f":
        return floats_or_nonfinite(dt.itemsize * 8)
    part = floats_or_nonfinite(dt.itemsize * 4)
    return st.builds(complex, part, part)


def layout(a: np.ndarray, how: str):
    if how == "fortran":
        return np.asfortranarray(a)
    if how == "strided" and a.ndim >= 1:
        return np.repeat(a, 2, axis=-1)[..., ::2]
    if how == "reversed" and a.ndim >= 1:
        return a[..., ::-1]
    if how == "list":
        return a.tolist()
    if how == "object":
        return a.astype(object)
    return a


LAYOUTS = st.sampled_from(["c", "fortran", "strided", "reversed", "list", "object"])


@st.composite
def any_array(draw, max_side=40, max_dims=3):
    dtype = draw(st.sampled_from(DTYPES))
    shape = draw(hnp.array_shapes(min_dims=0, max_dims=max_dims, min_side=0, max_side=max_side))
    a = draw(hnp.arrays(dtype, shape, elements=elements_of(dtype)))
    return layout(a, draw(LAYOUTS))


JUNK_SCALARS = st.one_of(
    st.none(),
    st.text(max_size=4),
    st.binary(max_size=2),
    st.booleans(),
    st.integers(-10**6, 10**6),
    floats_or_nonfinite(),
    st.complex_numbers(max_magnitude=1e3),
    st.just(complex(np.nan, 1.0)),
    st.lists(floats_or_nonfinite(), max_size=3),
    st.just([[1.0], [1.0, 2.0]]),
    st.just({"m1": 1.0}),
    st.just(object()),
    st.just(np.float32(3.0)),
    st.just(np.array(2.0)),
    st.just(np.array("abc")),
)
JUNK = st.one_of(JUNK_SCALARS, any_array())


# Functions whose ``psd`` may be a design-curve name: an unknown name is reported as the
# ``curve`` of chirpsift.design_psd, as search() does.
CURVE_NAMED_PSD = {"fitting_factor", "bank_coverage"}


def names_for(fn_name, arg, value, extra=()):
    curve = {"curve"} if arg == "psd" and fn_name in CURVE_NAMED_PSD else set()
    return {arg} | RELATED.get(arg, set()) | set(extra) | curve


def corrupt(data, base: dict):
    """Replace one argument of ``base`` with junk; return (kwargs, argument name)."""
    arg = data.draw(st.sampled_from(sorted(base)), label="argument")
    kwargs = dict(base)
    kwargs[arg] = data.draw(JUNK, label=arg)
    return kwargs, arg


# ---------------------------------------------------------------------------
# valid baselines (small, fast)
# ---------------------------------------------------------------------------

_rng = np.random.default_rng(7)
NOISE = _rng.normal(size=512)
FS = 256.0
N_SEG = 512
DF = FS / N_SEG
NF = N_SEG // 2 + 1
WHITE_PSD = np.full(NF, 2.0 / FS)
DATA_FD = np.fft.rfft(NOISE) / FS
TEMPLATES = cs.taylorf2(1.4, 1.3, f_low=20.0, df=DF, n_freq=NF)
STRAIN = _rng.normal(size=int(16 * 128.0)) * 1e-21
TINY_BANK = Bank([10.0], [10.0])
MATCH_BANK = Bank([10.0, 11.0], [10.0, 9.0])

BASES = {
    "welch": (cs.welch, dict(x=NOISE, sample_rate=64.0, segment_duration=2.0, overlap=0.5, average="median",
                              window="hann", detrend=False)),
    "design_psd": (cs.design_psd, dict(freqs=np.linspace(0.0, 512.0, 33), curve="gen2-early")),
    "psd_to_grid": (cs.psd_to_grid, dict(freqs=np.linspace(0.0, 32.0, 33), psd=np.ones(33), df=0.5, n_freq=65)),
    "truncate_inverse_psd": (cs.truncate_inverse_psd, dict(psd=np.ones(65), sample_rate=128.0, max_duration=0.25,
                                                            f_low=5.0)),
    "whiten": (cs.whiten, dict(x=NOISE[:128], psd=np.ones(65), sample_rate=128.0, f_low=None)),
    "taylorf2": (cs.taylorf2, dict(m1=1.4, m2=1.3, chi1=0.1, chi2=-0.2, f_low=20.0, df=1.0, n_freq=257, f_high=None,
                                    distance=1.0, phase_order=7, dtype=np.complex64)),
    "chirp_duration": (cs.chirp_duration, dict(m1=1.4, m2=[1.3, 2.0], f_low=20.0, phase_order=7)),
    "isco_frequency": (cs.isco_frequency, dict(m1=[1.4, 5.0], m2=1.3)),
    "sigma": (cs.sigma, dict(templates=TEMPLATES, psd=WHITE_PSD, df=DF, f_low=20.0, f_high=None)),
    "snr_series": (cs.snr_series, dict(data_fd=DATA_FD, templates=TEMPLATES, psd=WHITE_PSD, df=DF, f_low=20.0,
                                       f_high=None, dtype=np.complex64)),
    "correlate": (cs.correlate, dict(data=NOISE[:64], templates=NOISE[64:88].reshape(3, 8), mode="valid")),
    "filter_segment": (cs.filter_segment, dict(data_fd=DATA_FD, psd=WHITE_PSD, df=DF, m1=[5.0, 8.0], m2=5.0,
                                               chi1=0.0, chi2=0.0, f_low=20.0, f_high=None, min_snr=3.0,
                                               cluster_samples=4, chi2_bands=4, valid=None, phase_order=7)),
    "reweighted_snr": (cs.reweighted_snr, dict(snr=[6.0, 8.0], chi2=[10.0, 60.0], dof=[14, 14])),
    "plan_segments": (cs.plan_segments, dict(n_samples=1000, length=200, pad_start=30, pad_end=10)),
    "cluster_in_time": (cs.cluster_in_time, dict(times=[0.0, 0.5, 3.0], values=[5.0, 6.0, 7.0], window=1.0,
                                                 groups=None)),
    "match": (cs.match, dict(h1=TEMPLATES[0], h2=np.conj(TEMPLATES), psd=WHITE_PSD, df=DF, f_low=20.0, f_high=None)),
    "fitting_factor": (cs.fitting_factor, dict(points=[[10.5, 9.5]], bank=MATCH_BANK, psd="gen2-zero-detuned",
                                               f_low=40.0, sample_rate=256.0, search="metric", return_index=False)),
    "bank_coverage": (cs.bank_coverage, dict(bank=MATCH_BANK, n_points=3, m1=(10.0, 11.0), m2=(9.0, 10.0),
                                             chi1=(0.0, 0.0), chi2=(0.0, 0.0), mtotal=None, mass_ratio=None,
                                             psd="gen2-zero-detuned", f_low=40.0, sample_rate=256.0,
                                             minimal_match=0.97, seed=0, progress=False)),
}

# Arguments whose corruption may legitimately surface as a complaint about a
# neighbour (e.g. a junk sample_rate makes `x` shorter than one segment).
RELATED = {
    "sample_rate": {"x", "segment_duration", "f_low", "max_duration", "strain"},
    "segment_duration": {"x"},
    "df": {"f_low", "f_high", "n_freq", "freqs"},
    "n_freq": {"f_low"},
    "f_low": {"f_high", "psd"},
    "f_high": {"f_low"},
    "freqs": {"psd"},
    "psd": {"x", "data_fd", "templates", "n", "freqs", "max_duration"},
    "x": {"psd", "segment_duration", "window"},
    "data_fd": {"psd", "templates"},
    "templates": {"data", "psd"},
    "data": {"templates"},
    "m1": {"m2", "f_high", "chi1", "chi2"},
    "m2": {"m1", "f_high", "chi1", "chi2"},
    "chi1": {"m1", "m2", "chi2"},
    # chi2 is the second spin in the waveform kernels and the chi-squared in reweighted_snr
    "chi2": {"m1", "m2", "chi1", "snr", "dof"},
    "max_duration": set(),
    "times": {"values", "groups"},
    "values": {"times"},
    "groups": {"times"},
    "snr": {"chi2", "dof"},
    "dof": {"snr", "chi2"},
    "h1": {"h2", "psd"},
    "h2": {"h1", "psd"},
    "points": set(),
    "bank": set(),
    "search": set(),
    "n_points": set(),
    "minimal_match": set(),
    "seed": set(),
    "mtotal": {"mass_ratio", "m1", "m2"},
    "mass_ratio": {"mtotal", "m1", "m2"},
    "n_samples": {"length"},
    "length": {"n_samples", "pad_start", "pad_end"},
    "pad_start": {"length", "pad_end"},
    "pad_end": {"length", "pad_start"},
}

# Outputs documented to contain inf, plus two whose true value can exceed the float64
# range for legal inputs (a duration from f_low -> 0, the ISCO of a vanishing mass).
ALLOW_INF = {"design_psd", "psd_to_grid", "truncate_inverse_psd", "chirp_duration", "isco_frequency"}


# ---------------------------------------------------------------------------
# odd but valid input
# ---------------------------------------------------------------------------

REAL_DTYPES = st.sampled_from([np.float16, np.float32, np.float64, np.int16, np.int64])


@st.composite
def real_data(draw, n_min, n_max, channels=False):
    """Finite real samples of any real dtype and layout, ``(n,)`` or (optionally) ``(channels, n)``."""
    dtype = draw(REAL_DTYPES)
    n = draw(st.integers(n_min, n_max))
    shape = (draw(st.integers(1, 3)), n) if channels and draw(st.booleans()) else (n,)
    lim = 1e3 if np.dtype(dtype).kind == "f" and np.dtype(dtype).itemsize == 2 else 1e6
    if np.dtype(dtype).kind == "f":
        el = st.floats(-lim, lim, width=16 if dtype == np.float16 else 64)
    else:
        el = st.integers(-1000, 1000)
    a = draw(hnp.arrays(dtype, shape, elements=el))
    return layout(a, draw(st.sampled_from(["c", "fortran", "strided", "reversed", "list"])))


def variants(a: np.ndarray):
    """Non-contiguous, Fortran-ordered, float32 and list forms of ``a``."""
    wide = np.zeros(a.shape[:-1] + (2 * a.shape[-1],), dtype=a.dtype)
    wide[..., ::2] = a
    yield "strided", wide[..., ::2]
    yield "fortran", np.asfortranarray(a)
    yield "list", a.tolist()


# ---------------------------------------------------------------------------
# single bad values
# ---------------------------------------------------------------------------

PSD65 = np.ones(65)
X128 = NOISE[:128]


def put(a, index, value):
    """A copy of ``a`` (widened to hold ``value``) with ``value`` at ``index``."""
    b = np.array(a, dtype=np.result_type(a, type(value)))
    b[index] = value
    return b
