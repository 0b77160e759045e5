"""Random but type-valid input gives results of the right shape, and odd layouts the same answer."""

from __future__ import annotations

import numpy as np
import numpy.testing as npt
from hypothesis import given
from hypothesis import strategies as st

import chirpsift as cs
from chirpsift import Bank
from contract.harness import (
    DATA_FD,
    DF,
    FAST,
    NF,
    NOISE,
    N_SEG,
    STRAIN,
    TEMPLATES,
    TINY_BANK,
    WHITE_PSD,
    call,
    real_data,
    variants,
)


# ---------------------------------------------------------------------------
# random but type-valid inputs: right shape, finite output
# ---------------------------------------------------------------------------


@FAST
@given(x=real_data(64, 4096, channels=True), seg=st.sampled_from([0.25, 0.5, 1.0]), ov=st.floats(0, 0.9),
       avg=st.sampled_from(["mean", "median"]), det=st.sampled_from([False, "constant"]))
def test_welch_random_valid(x, seg, ov, avg, det):
    a = np.asarray(x)
    names = {"x", "segment_duration", "overlap"}
    freqs, psd = call(cs.welch, x, 64.0, seg, ov, avg, detrend=det, names=names) or (None, None)
    if freqs is not None:
        nperseg = int(round(seg * 64.0))
        assert freqs.shape == (nperseg // 2 + 1,)
        assert psd.shape == a.shape[:-1] + freqs.shape and psd.dtype == np.float64
        assert np.all(psd >= 0)


@FAST
@given(x=real_data(2, 2048, channels=True), fl=st.one_of(st.none(), st.floats(0, 70)), lo=st.floats(1e-10, 1e10))
def test_whiten_random_valid(x, fl, lo):
    a = np.asarray(x)
    psd = np.full(a.shape[-1] // 2 + 1, lo)
    out = call(cs.whiten, x, psd, 128.0, fl, names={"f_low"})
    if out is not None:
        assert out.shape == a.shape and out.dtype == np.float64


@FAST
@given(m1=st.floats(0.5, 100), m2=st.floats(0.5, 100), c1=st.floats(-0.99, 0.99), c2=st.floats(-0.99, 0.99),
       order=st.integers(0, 7), fl=st.floats(5, 60), dist=st.floats(1e-3, 1e4))
def test_waveform_random_valid(m1, m2, c1, c2, order, fl, dist):
    h = call(cs.taylorf2, m1, m2, c1, c2, f_low=fl, df=0.5, n_freq=513, distance=dist, phase_order=order,
             names={"f_high", "f_low"})
    if h is not None:
        assert h.shape == (1, 513) and h.dtype == np.complex64
    f_isco = cs.isco_frequency(m1, m2)
    assert np.isfinite(f_isco) and f_isco > 0
    if fl < f_isco:
        t = call(cs.chirp_duration, m1, m2, fl, order, names=())
        assert np.isfinite(t)


@FAST
@given(k=st.integers(1, 3), nf=st.integers(3, 1025), fl=st.floats(0, 50), scale=st.floats(1e-30, 1e30),
       dt=st.sampled_from([np.complex64, np.complex128]))
def test_filter_random_valid(k, nf, fl, scale, dt):
    rng = np.random.default_rng(nf)
    h = (rng.normal(size=(k, nf)) + 1j * rng.normal(size=(k, nf))) * scale
    d = rng.normal(size=nf) + 1j * rng.normal(size=nf)
    psd = rng.uniform(0.5, 2.0, size=nf)
    s = call(cs.sigma, h.astype(dt), psd, 0.25, fl, names={"f_low", "f_high"})
    if s is not None:
        assert s.shape == (k,) and np.all(s > 0)
    z = call(cs.snr_series, d, h, psd, 0.25, fl, dtype=dt, names={"f_low", "f_high", "templates"})
    if z is not None:
        assert z.shape == (k, 2 * (nf - 1)) and z.dtype == dt


@FAST
@given(data=real_data(1, 300), k=st.integers(1, 3), m=st.integers(1, 50),
       mode=st.sampled_from(["valid", "same", "full"]))
def test_correlate_random_valid(data, k, m, mode):
    n = len(np.asarray(data))
    t = np.random.default_rng(m).normal(size=(k, m))
    out = call(cs.correlate, data, t, mode, names={"templates"})
    if out is not None:
        length = {"valid": n - m + 1, "same": n, "full": n + m - 1}[mode]
        assert out.shape == (k, length)
    else:
        assert mode == "valid" and m > n


# ---------------------------------------------------------------------------
# odd but valid layouts give the same answer as contiguous float64
# ---------------------------------------------------------------------------


def test_welch_layouts_match():
    x = np.random.default_rng(1).normal(size=(2, 1024))
    f0, p0 = cs.welch(x, 128.0, 1.0)
    for label, v in variants(x):
        f, p = cs.welch(v, 128.0, 1.0)
        npt.assert_array_equal(f, f0, err_msg=label)
        npt.assert_allclose(p, p0, rtol=1e-12, err_msg=label)
    x32 = x.astype(np.float32)
    npt.assert_allclose(cs.welch(x32, 128.0, 1.0)[1], cs.welch(x32.astype(np.float64), 128.0, 1.0)[1], rtol=1e-12)
    npt.assert_allclose(cs.welch(x[0], 128.0, 1.0)[1], p0[0], rtol=1e-12)


def test_whiten_and_truncate_layouts_match():
    rng = np.random.default_rng(2)
    x = rng.normal(size=(3, 256))
    psd = cs.design_psd(np.arange(129) * 0.5 + 10.0) * 1e46
    w0 = cs.whiten(x, psd, 64.0, 12.0)
    t0 = cs.truncate_inverse_psd(psd, 64.0, 1.0, 12.0)
    for label, v in variants(x):
        npt.assert_allclose(cs.whiten(v, psd, 64.0, 12.0), w0, rtol=1e-12, atol=1e-12, err_msg=label)
    for label, v in variants(psd):
        npt.assert_allclose(cs.whiten(x, v, 64.0, 12.0), w0, rtol=1e-12, atol=1e-12, err_msg=label)
        npt.assert_allclose(cs.truncate_inverse_psd(v, 64.0, 1.0, 12.0), t0, rtol=1e-12, err_msg=label)
    x32 = x.astype(np.float32)
    npt.assert_allclose(cs.whiten(x32, psd, 64.0, 12.0), cs.whiten(x32.astype(np.float64), psd, 64.0, 12.0), rtol=1e-12)
    p32 = psd.astype(np.float32)
    npt.assert_allclose(cs.truncate_inverse_psd(p32, 64.0, 1.0, 12.0),
                        cs.truncate_inverse_psd(p32.astype(np.float64), 64.0, 1.0, 12.0), rtol=1e-12)


def test_psd_to_grid_and_design_layouts_match():
    f = np.linspace(5.0, 200.0, 64)
    p = cs.design_psd(f, "gen1-3km")
    g0 = cs.psd_to_grid(f, p, 0.5, 301)
    for (label, fv), (_, pv) in zip(variants(f), variants(p)):
        npt.assert_array_equal(cs.psd_to_grid(fv, pv, 0.5, 301), g0, err_msg=label)
        npt.assert_array_equal(cs.design_psd(fv, "gen1-3km"), p, err_msg=label)
    grid = np.arange(12.0, 60.0).reshape(6, 8)
    npt.assert_array_equal(cs.design_psd(np.asfortranarray(grid)), cs.design_psd(grid))
    npt.assert_array_equal(cs.design_psd(grid.T), cs.design_psd(np.ascontiguousarray(grid.T)))
    f32 = f.astype(np.float32)
    npt.assert_array_equal(cs.design_psd(f32), cs.design_psd(f32.astype(np.float64)))


def test_filter_layouts_match():
    rng = np.random.default_rng(3)
    h = cs.taylorf2([1.4, 2.0], 1.3, f_low=20.0, df=DF, n_freq=NF, dtype=np.complex128)
    s0 = cs.sigma(h, WHITE_PSD, DF, 20.0)
    z0 = cs.snr_series(DATA_FD, h, WHITE_PSD, DF, 20.0, dtype=np.complex128)
    for label, hv in variants(h):
        npt.assert_allclose(cs.sigma(hv, WHITE_PSD, DF, 20.0), s0, rtol=1e-12, err_msg=label)
        npt.assert_allclose(cs.snr_series(DATA_FD, hv, WHITE_PSD, DF, 20.0, dtype=np.complex128), z0, rtol=1e-10,
                            atol=1e-10, err_msg=label)
    for label, dv in variants(DATA_FD):
        npt.assert_allclose(cs.snr_series(dv, h, WHITE_PSD, DF, 20.0, dtype=np.complex128), z0, rtol=1e-10,
                            atol=1e-10, err_msg=label)
    h64 = h.astype(np.complex64)
    npt.assert_allclose(cs.sigma(h64, WHITE_PSD, DF, 20.0), cs.sigma(h64.astype(np.complex128), WHITE_PSD, DF, 20.0),
                        rtol=1e-12)
    psd32 = WHITE_PSD.astype(np.float32)
    npt.assert_allclose(cs.sigma(h, psd32, DF, 20.0), cs.sigma(h, psd32.astype(np.float64), DF, 20.0), rtol=1e-12)
    d = rng.normal(size=200)
    t = rng.normal(size=(3, 17))
    c0 = cs.correlate(d, t, "same")
    for label, tv in variants(t):
        npt.assert_allclose(cs.correlate(d, tv, "same"), c0, rtol=1e-10, atol=1e-10, err_msg=label)
    for label, dv in variants(d):
        npt.assert_allclose(cs.correlate(dv, t, "same"), c0, rtol=1e-10, atol=1e-10, err_msg=label)
    d32, t32 = d.astype(np.float32), t.astype(np.float32)
    out32 = cs.correlate(d32, t32, "full")
    assert out32.dtype == np.float32
    out64 = cs.correlate(d32.astype(np.float64), t32.astype(np.float64), "full")
    npt.assert_allclose(out32, out64, rtol=1e-5, atol=1e-5)


def test_waveform_layouts_match():
    m1 = np.array([1.4, 3.0, 10.0, 1.2])
    chi = np.array([0.1, -0.3, 0.5, 0.0])
    h0 = cs.taylorf2(m1, 1.3, chi, 0.0, f_low=20.0, df=0.5, n_freq=1025)
    for (label, mv), (_, cv) in zip(variants(m1), variants(chi)):
        npt.assert_array_equal(cs.taylorf2(mv, 1.3, cv, 0.0, f_low=20.0, df=0.5, n_freq=1025), h0, err_msg=label)
        npt.assert_array_equal(cs.chirp_duration(mv, 1.3, 20.0), cs.chirp_duration(m1, 1.3, 20.0), err_msg=label)
        npt.assert_array_equal(cs.isco_frequency(mv, 1.3), cs.isco_frequency(m1, 1.3), err_msg=label)
    m32 = m1.astype(np.float32)
    npt.assert_array_equal(cs.taylorf2(m32, 1.3, f_low=20.0, df=0.5, n_freq=1025),
                           cs.taylorf2(m32.astype(np.float64), 1.3, f_low=20.0, df=0.5, n_freq=1025))
    assert isinstance(cs.isco_frequency(np.float32(1.4), 1), float)


def test_filter_segment_layouts_match():
    base = dict(f_low=20.0, min_snr=3.0, cluster_samples=4, chi2_bands=4)
    r0 = cs.filter_segment(DATA_FD, WHITE_PSD, DF, [5.0, 8.0], 5.0, **base)
    assert len(r0["snr"]) > 0
    for label, dv in variants(DATA_FD):
        r = cs.filter_segment(dv, WHITE_PSD, DF, [5.0, 8.0], 5.0, **base)
        for col in r0:
            npt.assert_allclose(r[col], r0[col], rtol=1e-9, err_msg=f"{label} {col}")
    r = cs.filter_segment(DATA_FD, WHITE_PSD.astype(np.float32).astype(np.float64), DF,
                          np.array([5.0, 8.0])[::-1][::-1],
                          (5.0,), **base)
    npt.assert_array_equal(r["index"], r0["index"])


def test_search_accepts_lists_and_strided_strain():
    kw = dict(sample_rate=128.0, bank=TINY_BANK, f_low=30.0, segment_duration=8.0, welch_duration=2.0,
              min_snr=3.5)
    t0 = cs.search(STRAIN, **kw)
    wide = np.zeros(2 * STRAIN.size)
    wide[::2] = STRAIN
    t1 = cs.search(wide[::2], **kw)
    t2 = cs.search(STRAIN.tolist(), **dict(kw, bank={"m1": [10.0], "m2": [10.0]}))
    assert len(t0) > 0
    for other in (t1, t2):
        npt.assert_array_equal(other["time"], t0["time"])
        npt.assert_array_equal(other["snr"], t0["snr"])


def test_lists_accepted_everywhere():
    f, p = cs.welch(NOISE.tolist(), 64.0, 2.0)
    npt.assert_allclose(p, cs.welch(NOISE, 64.0, 2.0)[1])
    assert cs.design_psd([20.0, 100.0]).shape == (2,)
    assert cs.psd_to_grid([0.0, 10.0], [1.0, 2.0], 1.0, 11).shape == (11,)
    assert cs.truncate_inverse_psd([1.0] * 65, 128.0, 0.25, 5.0).shape == (65,)
    assert cs.whiten(NOISE[:16].tolist(), [1.0] * 9, 16.0).shape == (16,)
    assert cs.taylorf2([1.4], [1.3], [0.0], [0.0], f_low=20.0, df=1.0, n_freq=65).shape == (1, 65)
    assert cs.chirp_duration([1.4, 2.0], [1.3, 1.3], 20.0).shape == (2,)
    assert cs.isco_frequency([1.4], [1.3]).shape == (1,)
    assert cs.sigma(TEMPLATES.tolist(), WHITE_PSD.tolist(), DF, 20.0).shape == (1,)
    assert cs.snr_series(DATA_FD.tolist(), TEMPLATES[0].tolist(), WHITE_PSD.tolist(), DF, 20.0).shape == (1, N_SEG)
    npt.assert_allclose(cs.correlate([1.0, 2.0, 3.0], [1.0, 1.0]), [3.0, 5.0])
    assert isinstance(cs.filter_segment(DATA_FD.tolist(), WHITE_PSD.tolist(), DF, [5.0], [5.0], f_low=20.0), dict)
    npt.assert_allclose(cs.reweighted_snr([8.0], [10.0], [14]), [8.0])
    npt.assert_array_equal(cs.cluster_in_time([0.0, 0.5, 3.0], [5.0, 6.0, 7.0], 1.0), [1, 2])
    assert len(Bank.from_any({"m1": [1.0, 2.0], "m2": [1.0, 1.5]})) == 2
