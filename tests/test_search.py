"""The single-site search pipeline: segmentation, recovery of injections, gating,
bad input."""


import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

import chirpsift as cs
from chirpsift import synthetic
from chirpsift.reference import chirp_duration as ref_chirp_duration
from chirpsift.reference import design_psd as ref_design_psd

FS = 1024.0
T_SUN = 4.925490947641267e-6  # s, IAU 2015 B3 nominal GM_sun / c^3 (REFERENCES item 14)
MPC = 3.0856775814913673e22  # m
C = 299792458.0  # m/s


def _sigma_spa(m1, m2, f_low, n, fs):
    """Template norm at 1 Mpc, independent of the code under test: the leading-order SPA
    amplitude |h~| = sqrt(5/24) pi^(-2/3) (c / D) (G Mc / c^3)^(5/6) f^(-7/6) (REFERENCES
    item 2, Cutler & Flanagan 1994) summed directly, sigma^2 = 4 df sum |h~|^2 / S over
    the rfft bins f_low <= f < f_ISCO of n samples (Allen et al. 2012), with the design
    PSD from the numpy twin."""
    df = fs / n
    mtot = m1 + m2
    mc = (m1 * m2) ** 0.6 / mtot**0.2
    amp = np.sqrt(5 / 24) * np.pi ** (-2 / 3) * C / MPC * (mc * T_SUN) ** (5 / 6)
    f = np.arange(n // 2 + 1) * df
    band = (f >= f_low) & (f < 1 / (6**1.5 * np.pi * mtot * T_SUN))
    return float(np.sqrt(4 * df * np.sum(amp**2 * f[band] ** (-7 / 3) / ref_design_psd(f[band]))))


@settings(max_examples=200, deadline=None)
@given(
    n=st.integers(1000, 200000),
    length=st.integers(64, 50000),
    pad_start=st.integers(0, 20000),
    pad_end=st.integers(0, 5000),
)
def test_segments_tile_the_analysable_span_exactly_once(n, length, pad_start, pad_end):
    # Overlap-save (common practice): analysable parts of consecutive segments abut.
    if length - pad_start - pad_end < 1 or n < length:
        with pytest.raises(ValueError):
            cs.plan_segments(n, length, pad_start, pad_end)
        return
    plans = cs.plan_segments(n, length, pad_start, pad_end)
    hits = np.zeros(n, dtype=int)
    for p in plans:
        assert 0 <= p.start and p.start + p.length <= n
        assert pad_start <= p.valid_start < p.valid_stop <= length - pad_end
        hits[p.start + p.valid_start:p.start + p.valid_stop] += 1
    assert np.all(hits[pad_start:n - pad_end] == 1)
    assert np.all(hits[:pad_start] == 0) and np.all(hits[n - pad_end:] == 0)


def _documented_pads(longest, welch_duration, fs):
    """The discard of the search's docs: the first 1.1 x longest template + T_spec / 2 and
    the last T_spec / 2 seconds wrap round (Allen et al. 2012, overlap-save segments),
    plus one sample each side for the peak refinement."""
    return int(np.ceil((1.1 * longest + welch_duration / 2) * fs)) + 1, int(np.ceil(welch_duration / 2 * fs)) + 1


@pytest.mark.parametrize("longest, t_spec, fs, expected", [
    (10.0, 4.0, 1024.0, (13313, 2049)),  # (1.1 x 10 + 2) x 1024 + 1 and 2 x 1024 + 1, by hand
    (0.0, 2.0, 128.0, (129, 129)),  # 1 x 128 + 1 each
    (3.3, 1.0, 4096.0, (16918, 2049)),  # (3.63 + 0.5) x 4096 = 16916.48, rounded up, + 1
])
def test_padding_is_the_documented_discard(longest, t_spec, fs, expected):
    assert cs.segments.padding(longest, t_spec, fs) == expected == _documented_pads(longest, t_spec, fs)


def test_search_reports_the_documented_pads():
    bank = cs.Bank.from_any({"m1": [8.0, 10.0], "m2": [6.0, 8.0]})
    info = cs.search(_data(4, duration=64.0), FS, bank, f_low=30.0, segment_duration=64.0, full_output=True)[1]
    longest = max(ref_chirp_duration(m1, m2, 30.0) for m1, m2 in zip(bank.m1, bank.m2))
    pad_start, pad_end = _documented_pads(longest, 4.0, FS)
    assert (info["pad_start"], info["pad_end"]) == (pad_start / FS, pad_end / FS)
    assert info["analysed"] == [(pad_start / FS, (64 * FS - pad_end) / FS)]


def _data(seed, duration=256.0, inject=None):
    n = int(duration * FS)
    x = synthetic.colored_gaussian_noise(n, FS, "gen2-zero-detuned", seed=seed, f_low=20.0)
    if inject:
        x = synthetic.inject_taylorf2(x, FS, f_low=25.0, **inject)
    return x


def test_injection_recovered_at_right_time_template_and_snr():
    # Matched filter property (Allen et al. 2012): the matching template recovers the
    # optimal SNR within the unit-variance noise, at the coalescence time.
    m1, m2 = 9.0, 7.0
    bank = cs.Bank.from_any({"m1": [6.0, 9.0, 12.0], "m2": [5.0, 7.0, 9.0]})
    t0 = 1_000_000.0
    distance = _sigma_spa(m1, m2, 30.0, int(256 * FS), FS) / 10.0  # optimal SNR 10
    t_c = t0 + 150.123
    x = _data(1, inject=dict(m1=m1, m2=m2, t_coalescence=t_c, distance=distance, phase=0.3, t0=t0))
    trig, info = cs.search(x, FS, bank, t0=t0, f_low=30.0, segment_duration=64.0, full_output=True)
    best = trig[np.argmax(trig["snr"])]
    assert best["template"] == 1
    assert abs(best["time"] - t_c) < 1.0 / FS
    assert abs(best["snr"] - 10.0) < 3.5  # |z| fluctuates by ~1 around the optimal SNR
    assert info["segments"] >= 4
    start, stop = info["analysed"][0]
    assert t0 < start < t_c < stop <= t0 + 256.0
    assert np.all(np.diff(trig["time"]) >= 0)


def test_search_on_one_segment_matches_numpy_twin():
    # With one segment the pipeline is: median Welch PSD, inverse spectrum truncation,
    # the segment kernel, clustering. The pure-numpy twins of each step (full SNR
    # series by numpy's FFT, direct TaylorF2) must give the same triggers; float32
    # transforms in the kernel allow ~1e-5 relative differences.
    from chirpsift import reference as ref
    from chirpsift.reference import fused as ref_fused

    x = _data(4, duration=64.0)
    bank = cs.Bank.from_any({"m1": [8.0, 10.0], "m2": [6.0, 8.0]})
    trig = cs.search(x, FS, bank, f_low=30.0, segment_duration=64.0, min_snr=4.0, peak_window=0.5)
    psd = ref.truncate_inverse_psd(ref.psd_to_grid(*ref.welch(x, FS, 4.0), 1 / 64.0, x.size // 2 + 1), FS, 4.0, 30.0)
    longest = max(ref.chirp_duration(m1, m2, 30.0) for m1, m2 in zip(bank.m1, bank.m2))
    pad_start, pad_end = _documented_pads(longest, 4.0, FS)
    direct = ref_fused.filter_segment(np.fft.rfft(x) / FS, psd, 1 / 64.0, bank.m1, bank.m2, f_low=30.0,
                                        min_snr=4.0, cluster_samples=512, valid=(pad_start, x.size - pad_end))
    assert len(trig) == len(direct["snr"]) > 0
    order = np.argsort(direct["position"], kind="stable")
    np.testing.assert_array_equal(trig["template"], direct["template"][order])
    np.testing.assert_allclose(trig["time"], direct["position"][order] / FS, atol=1e-3 / FS)
    np.testing.assert_allclose(trig["snr"], direct["snr"][order], rtol=1e-4)


def test_gating_removes_loud_glitch_and_reports_it():
    x = _data(5, duration=128.0)
    n = x.size
    t = np.arange(n) / FS
    glitch = 5e-20 * np.exp(-(((t - 70.0) / 0.01) ** 2)) * np.sin(2 * np.pi * 150 * t)
    bank = cs.Bank.from_any({"m1": [8.0], "m2": [6.0]})
    with pytest.warns(cs.GatingWarning):
        trig, info = cs.search(x + glitch, FS, bank, f_low=30.0, segment_duration=64.0, gate_threshold=8.0,
                               full_output=True)
    assert len(info["gates"]) == 1
    a, b = info["gates"][0]
    # The whitened glitch rings for at most the truncated whitening filter (4 s) plus
    # the zeroed half-widths either side.
    assert a < 70.0 < b and b - a < 4.0 + 2 * 0.25
    # Gated time is not live: the analysed span (documented pads) minus the gate.
    longest = ref_chirp_duration(8.0, 6.0, 30.0)
    pad_start, pad_end = _documented_pads(longest, 4.0, FS)
    assert info["analysed"] == [(pad_start / FS, a), (b, (n - pad_end) / FS)]
    assert info["gated_time"] == pytest.approx(b - a, abs=1e-12)
    assert info["live_time"] == pytest.approx((n - pad_start - pad_end) / FS - (b - a), abs=1e-9)
    ungated = cs.search(x + glitch, FS, bank, f_low=30.0, segment_duration=64.0)
    assert ungated["snr"].max() > 20  # the glitch rings the template loudly without gating
    assert trig["snr"].max(initial=0.0) < 8


@pytest.mark.parametrize("psd", [None, "gen2-zero-detuned"])
def test_gating_everything_says_how_much_was_gated(psd):
    # A whitened Gaussian sample exceeds 0.5 standard deviations with probability 0.62
    # (erfc(0.5 / sqrt 2), common practice): with half-widths of 0.25 s the gates merge
    # into one covering the data.
    x = _data(5, duration=128.0)
    gated_all = r"gating left nothing to search: gate_threshold=0.5 gated 12\d\.\d+ s in 1 gate"
    with pytest.raises(ValueError, match=gated_all):
        cs.search(x, FS, {"m1": [8.0], "m2": [6.0]}, f_low=30.0, segment_duration=64.0, gate_threshold=0.5, psd=psd)


def test_psd_that_gating_leaves_without_noise_is_explained():
    # 40 s of data 100 times louder gate away most of the first 64 s segment, so more
    # than half its Welch segments are zero and their median PSD is 0.
    x = _data(5, duration=128.0)
    x[int(10 * FS):int(50 * FS)] *= 100
    explained = r"cannot estimate the PSD .* at t=0 s: .* s of them gated \(gate_threshold=6.0"
    with pytest.raises(ValueError, match=explained), pytest.warns(cs.GatingWarning):
        cs.search(x, FS, {"m1": [8.0], "m2": [6.0]}, f_low=30.0, segment_duration=64.0, gate_threshold=6.0)
    x[int(10 * FS):int(50 * FS)] = 0.0
    with pytest.raises(ValueError, match=r"zero over 40 s; mark missing data as NaN"):
        cs.search(x, FS, {"m1": [8.0], "m2": [6.0]}, f_low=30.0, segment_duration=64.0)


def test_bank_clustering_keeps_one_trigger_per_window():
    x = _data(6, duration=64.0)
    bank = cs.Bank.from_any({"m1": np.linspace(6, 12, 6), "m2": np.full(6, 6.0)})
    per_template = cs.search(x, FS, bank, f_low=30.0, segment_duration=64.0, min_snr=4.0)
    across = cs.search(x, FS, bank, f_low=30.0, segment_duration=64.0, min_snr=4.0, bank_cluster=True)
    assert 0 < len(across) < len(per_template)
    t = across["time"]
    close = np.abs(t[:, None] - t[None, :]) <= 1.0
    np.fill_diagonal(close, False)
    assert not close.any()


@pytest.mark.parametrize(
    "kwargs, match",
    [
        (dict(f_low=600.0), "f_low"),
        (dict(f_low=30.0, segment_duration=512.0), "shorter than segment_duration"),
        (dict(f_low=30.0, segment_duration=4.0), "too short"),
        (dict(f_low=30.0, min_snr=-1.0), "min_snr"),
        (dict(f_low=30.0, chi2_bands=1), "chi2_bands"),
        (dict(f_low=30.0, psd_duration=32.0), "psd_duration"),
    ],
)
def test_search_rejects_bad_settings(kwargs, match):
    x = _data(7, duration=64.0)
    with pytest.raises(ValueError, match=match):
        cs.search(x, FS, {"m1": [8.0], "m2": [6.0]}, **{"segment_duration": 64.0, **kwargs})


def test_search_names_nan_runs_when_asked_to_refuse_them():
    x = _data(8, duration=64.0)
    x[5000:5100] = np.nan
    with pytest.raises(ValueError, match="strain has 100 non-finite samples in 1 run.*nonfinite='skip'"):
        cs.search(x, FS, {"m1": [8.0], "m2": [6.0]}, f_low=30.0, nonfinite="error")
    with pytest.raises(ValueError, match="nonfinite must be one of 'skip', 'error', got 'drop'"):
        cs.search(x, FS, {"m1": [8.0], "m2": [6.0]}, f_low=30.0, nonfinite="drop")


def test_nan_run_splits_the_search_into_stretches_searched_separately():
    # A NaN run costs only its neighbourhood: the stretches either side are searched as
    # if given one by one (their own PSDs and clustering; absolute times). Two chirps of
    # the same template sit 20 s apart across the gap, closer than peak_window: the
    # quieter one must survive, because clustering does not reach across stretches.
    t0, a, b = 1_000_000.0, int(60 * FS), int(60.5 * FS)
    bank = cs.Bank.from_any({"m1": [6.0, 9.0, 12.0], "m2": [5.0, 7.0, 9.0]})
    sigma = _sigma_spa(9.0, 7.0, 30.0, int(128 * FS), FS)
    x = _data(40, duration=128.0)
    for t_c, snr in ((55.0, 20.0), (75.0, 12.0)):
        x = synthetic.inject_taylorf2(x, FS, f_low=25.0, m1=9.0, m2=7.0, t_coalescence=t0 + t_c,
                                      distance=sigma / snr, t0=t0)
    x[a:b] = np.nan
    kw = dict(f_low=30.0, min_snr=6.0, peak_window=25.0)
    with pytest.warns(cs.ExcludedDataWarning, match=r"left out 512 non-finite samples \(0.5 s\) in 1 run"):
        trig, info = cs.search(x, FS, bank, t0=t0, full_output=True, **kw)
    first = cs.search(x[:a], FS, bank, t0=t0, **kw)
    second = cs.search(x[b:], FS, bank, t0=t0 + b / FS, **kw)
    both = np.concatenate([first, second])
    np.testing.assert_array_equal(trig, both[np.argsort(both["time"], kind="stable")])
    for t_c in (55.0, 75.0):
        near = trig[(trig["template"] == 1) & (np.abs(trig["time"] - t0 - t_c) < 1 / FS)]
        assert len(near) == 1
    assert info["excluded"] == [(t0 + 60.0, t0 + 60.5)] and info["short_stretches"] == []
    assert [(s["start"], s["stop"]) for s in info["stretches"]] == [(t0, t0 + 60.0), (t0 + 60.5, t0 + 128.0)]
    pad_start, pad_end = _documented_pads(ref_chirp_duration(6.0, 5.0, 30.0), 4.0, FS)
    assert info["analysed"] == [(t0 + pad_start / FS, t0 + (a - pad_end) / FS),
                                (t0 + (b + pad_start) / FS, t0 + (x.size - pad_end) / FS)]
    assert info["live_time"] == pytest.approx((x.size - (b - a) - 2 * (pad_start + pad_end)) / FS, abs=1e-9)


def test_stretches_too_short_to_search_are_reported():
    x = _data(41, duration=64.0)
    x[3 * 1024] = np.inf  # leaves 3 s before it: less than one segment's pads
    with pytest.warns(cs.ExcludedDataWarning, match=r"1 finite stretch\(es\), 3 s in all, too short"):
        info = cs.search(x, FS, {"m1": [8.0], "m2": [6.0]}, f_low=30.0, full_output=True)[1]
    assert info["short_stretches"] == [(0.0, 3.0)] and info["excluded"] == [(3.0, 3.0 + 1 / FS)]
    x[40 * 1024] = np.nan  # now no stretch holds a segment of the documented pads
    with pytest.raises(ValueError, match=r"the longest finite stretch of strain has .* \(36.999 s; strain has 2 "
                                         r"non-finite samples in 2 run\(s\)"):
        cs.search(x, FS, {"m1": [8.0], "m2": [6.0]}, f_low=30.0, segment_duration=40.0)


def test_signals_at_segment_joins_are_found_exactly_once():
    # Overlap-save (common practice): a coalescence at, just before or just after the
    # boundary between two segments' analysable parts is reported once, by one segment.
    # The joins follow from the documented pads: segments advance by their length minus
    # both pads, so the k-th analysable part ends at pad_start + k (length - pads).
    bank = cs.Bank.from_any({"m1": [9.0], "m2": [7.0]})
    duration, seg = 192.0, 32.0
    n = int(duration * FS)
    pad_start, pad_end = _documented_pads(ref_chirp_duration(9.0, 7.0, 30.0), 4.0, FS)
    stride = int(seg * FS) - pad_start - pad_end
    joins = [(pad_start + k * stride) / FS for k in range(1, (n - pad_start - pad_end - 1) // stride + 1)]
    distance = _sigma_spa(9.0, 7.0, 30.0, n, FS) / 30.0  # optimal SNR 30
    offsets = [-0.3 / FS, 0.0, 0.4 / FS, 2.5 / FS]
    assert len(joins) >= len(offsets)
    times = [joins[i] + offsets[i] for i in range(len(offsets))]  # one join each, chirps far apart
    x = _data(9, duration)
    for t_c in times:
        x = synthetic.inject_taylorf2(x, FS, f_low=25.0, m1=9.0, m2=7.0, t_coalescence=t_c, distance=distance)
    trig = cs.search(x, FS, bank, f_low=30.0, segment_duration=seg, min_snr=15.0, peak_window=0.5)
    assert len(trig) == len(times)
    np.testing.assert_allclose(np.sort(trig["time"]), np.sort(times), atol=1.0 / FS)


def test_gates_found_in_every_whitening_block_and_nowhere_else():
    # Gating whitens block by block (64 PSD segments each). Gaussian noise exceeds 6
    # standard deviations with probability 2e-9 per sample (erfc(6 / sqrt 2), scipy
    # free: common practice), so ~0.001 false gates are expected in 600 s at 1024 Hz.
    from chirpsift.gating import find_gates

    x = _data(10, duration=600.0)
    t = np.arange(x.size) / FS
    for t0 in (100.0, 430.0):  # different blocks
        x = x + 5e-20 * np.exp(-(((t - t0) / 0.01) ** 2)) * np.sin(2 * np.pi * 150 * t)
    gates = find_gates(x, FS, 6.0, f_low=30.0, welch_duration=4.0)
    assert len(gates) == 2
    for (a, b), t0 in zip(gates, (100.0, 430.0)):
        assert a / FS < t0 < b / FS


@pytest.mark.parametrize("psd_kwargs", [dict(psd="gen2-zero-detuned"), dict(psd=None, psd_duration=1024.0)],
                         ids=["known-psd", "estimated-from-1024s"])
def test_noise_only_trigger_rate_matches_gaussian_expectation(psd_kwargs):
    # Through the whole pipeline (segments, PSD truncation, clustering, merging), noise
    # triggers above u = 4.5 follow Rice's up-crossing rate of the SNR envelope,
    # u sqrt(Delta / 2 pi) exp(-u^2 / 2) per template (Rice 1945, from memory), summed
    # over templates and the analysed time. The PSD is given, or estimated from all
    # 1024 s (a PSD from few averages inflates the SNR variance: see search's Notes).
    # Poisson counting error, 4 sigma.
    bank = cs.Bank.from_any({"m1": [6.0, 10.0, 14.0], "m2": [5.0, 8.0, 10.0]})
    u = 4.5
    x = _data(21, duration=1024.0)
    trig, info = cs.search(x, FS, bank, f_low=30.0, segment_duration=64.0, min_snr=u, peak_window=0.05,
                           full_output=True, **psd_kwargs)
    [(start, stop)] = info["analysed"]
    expected = 0.0
    for m1, m2 in zip(bank.m1, bank.m2):
        # Delta: variance of the angular frequency under the template's SNR weight, which
        # depends only on the amplitude: |h~|^2 / S ~ f^(-7/3) / S on [f_low, f_ISCO)
        # (REFERENCES item 2), evaluated on the 64 s segment grid with the twin's PSD.
        f = np.arange(int(64 * FS) // 2 + 1) / 64.0
        f = f[(f >= 30.0) & (f < 1 / (6**1.5 * np.pi * (m1 + m2) * T_SUN))]
        w = f ** (-7 / 3) / ref_design_psd(f)
        w /= w.sum()
        omega = 2 * np.pi * f
        delta = (w * omega**2).sum() - (w * omega).sum() ** 2
        expected += (stop - start) * u * np.sqrt(delta / (2 * np.pi)) * np.exp(-u * u / 2)
    assert abs(len(trig) - expected) < 4 * np.sqrt(expected), (len(trig), expected)


@settings(max_examples=200, deadline=None)
@given(longest=st.floats(0.0, 3000.0), t_spec=st.sampled_from([0.5, 1.0, 4.0, 16.0]),
       fs=st.sampled_from([256.0, 1000.0, 4096.0]), n=st.one_of(st.none(), st.integers(2, 10**8)))
def test_default_segment_length_follows_its_documented_rule(longest, t_spec, fs, n):
    # Documented: the smallest power of two of samples at least 4 (1.1 T + T_spec) s (pads
    # then take at most ~1/4) and at least 64 T_spec s, capped by the data (rounded to even).
    need = max(4 * (1.1 * longest + t_spec), 64 * t_spec) * fs
    power = 2.0 ** np.ceil(np.log2(need))
    expected = power if n is None else min(power, n // 2 * 2)
    length = cs.segments.default_length(longest, t_spec, fs, n)
    assert length == expected
    if n is None or power <= n // 2 * 2:
        assert length >= need > length / 2
        pads = sum(cs.segments.padding(longest, t_spec, fs))
        assert pads / length <= 0.25 + 2 / need


def test_bank_reaching_one_solar_mass_from_20_hz_searches_600_s():
    # 1 + 1 Msun lasts ~281 s from 20 Hz (REFERENCES item 3: 1.4 + 1.4 lasts 161 s, and
    # durations scale as the chirp mass^(-5/3)), longer than a 256 s segment's worth of
    # pads. The segment is sized from the bank and capped by the 600 s of data, so one
    # segment analyses all but the documented pads, and the search warns that less than
    # half of the input is analysed. A loud injection near the end is found.
    from chirpsift.reference import chirp_duration

    fs, dur, t_c = 1024.0, 600.0, 560.25
    bank = cs.Bank.from_any({"m1": [1.0, 1.4, 3.0], "m2": [1.0, 1.4, 3.0]})
    x = synthetic.colored_gaussian_noise(int(dur * fs), fs, "gen2-zero-detuned", seed=31, f_low=15.0)
    x = synthetic.inject_taylorf2(x, fs, f_low=20.0, m1=1.0, m2=1.0, t_coalescence=t_c, distance=100.0)
    with pytest.warns(cs.AnalysedFractionWarning, match="only 48% of the 600 s"):
        trig, info = cs.search(x, fs, bank, f_low=20.0, min_snr=8.0, full_output=True)
    pad_start, pad_end = _documented_pads(chirp_duration(1.0, 1.0, 20.0), 4.0, fs)
    assert info["segment_duration"] == dur and info["segments"] == 1
    assert info["analysed"] == [(pad_start / fs, dur - pad_end / fs)]
    assert info["analysed_fraction"] == pytest.approx((dur * fs - pad_start - pad_end) / (dur * fs), abs=1e-12)
    best = trig[np.argmax(trig["snr"])]
    assert best["template"] == 0 and abs(best["time"] - t_c) < 1 / fs


def test_no_fraction_warning_when_most_data_are_analysed():
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error", cs.AnalysedFractionWarning)
        info = cs.search(_data(4, duration=64.0), FS, {"m1": [8.0], "m2": [6.0]}, f_low=30.0,
                         full_output=True)[1]
    assert info["analysed_fraction"] > 0.5 and info["segment_duration"] == 64.0  # capped by the data
