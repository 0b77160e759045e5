"""The per-segment fixed work done in the core for many segments at once: the PSD
chain (Welch, resampling, truncation) and the data transform with preparation."""

import numpy as np
import pytest

import chirpsift as cs

FS = 1024.0
N = 2**15  # 32 s segments
NF = N // 2 + 1
DF = FS / N


@pytest.fixture(scope="module")
def strain():
    # Gaussian noise of one-sided PSD S (the second-generation design fit, flat below
    # 10 Hz): E|X_k|^2 = S fs n / 2 for x = irfft(X) (common practice).
    rng = np.random.default_rng(31)
    n = 3 * N
    s = cs.design_psd(np.maximum(np.fft.rfftfreq(n, 1 / FS), 10.0))
    white = rng.normal(size=n // 2 + 1) + 1j * rng.normal(size=n // 2 + 1)
    return np.fft.irfft(white * np.sqrt(s * FS * n / 4), n)


def test_segment_psds_equal_the_chain_row_by_row(strain):
    # Consistency: the one-call chain is the three numpy-API calls, bit for bit (each
    # of which is checked against scipy and the literature in test_physics_spectrum).
    starts = [0, N // 2, N, 2 * N]
    rows = cs.segment_psds(strain, FS, starts, N, NF, welch_duration=2.0, f_low=15.0)
    for s, row in zip(starts, rows):
        f, p = cs.welch(strain[s:s + N], FS, 2.0, average="median")
        expected = cs.truncate_inverse_psd(cs.psd_to_grid(f, p, DF, NF), FS, 2.0, 15.0)
        assert row.tobytes() == expected.tobytes()


def test_prepared_segments_filter_like_numpy_transformed_data(strain):
    # The core's real FFT against numpy's (pocketfft): the same peaks, SNRs to float32.
    starts = [0, N]
    psds = cs.segment_psds(strain, FS, starts, N, NF, welch_duration=2.0, f_low=20.0)
    bank = cs.prepare_bank([8.0, 10.0], 7.0, f_low=20.0)
    kw = dict(min_snr=3.5, cluster_samples=512, valid=(4096, N - 1024))
    for seg, s, p in zip(cs.prepare_segments(strain, FS, starts, N, psds), starts, psds):
        assert seg.n == N and seg.df == DF
        a = cs.filter_segment(seg, bank=bank, **kw)
        b = cs.filter_segment(np.fft.rfft(strain[s:s + N]) / FS, p, DF, bank=bank, **kw)
        assert a["snr"].size > 0
        np.testing.assert_array_equal(a["index"], b["index"])
        np.testing.assert_allclose(a["snr"], b["snr"], rtol=1e-5)
        np.testing.assert_allclose(a["chi2"], b["chi2"], rtol=1e-4, atol=1e-4)


@pytest.mark.parametrize("blocks", ["segments", "other"])
def test_estimating_preparation_equals_the_chain_then_the_preparation(strain, blocks):
    # Consistency: prepare_segments estimating the PSDs (chain and data transform side
    # by side in one core call) against segment_psds handed to prepare_segments, bit
    # for bit in what the kernel finds; the chain itself is checked against scipy and
    # the literature in test_physics_spectrum, the data transform against numpy above.
    starts = [0, N // 2, 2 * N]
    if blocks == "segments":
        kw, psds = {}, cs.segment_psds(strain, FS, starts, N, NF, welch_duration=2.0, f_low=20.0)
    else:  # longer blocks, cut from another array, placed elsewhere
        other = strain[::-1].copy()
        b_starts, b_len = [0, N, N // 4], 2 * N
        kw = dict(psd_strain=other, psd_starts=b_starts, psd_samples=b_len)
        psds = cs.segment_psds(other, FS, b_starts, b_len, NF, welch_duration=2.0, f_low=20.0)
    one = cs.prepare_segments(strain, FS, starts, N, welch_duration=2.0, f_low=20.0, **kw)
    two = cs.prepare_segments(strain, FS, starts, N, psds)
    bank = cs.prepare_bank([8.0, 10.0], 7.0, f_low=20.0)
    for a, b in zip(one, two):
        fa = cs.filter_segment(a, bank=bank, min_snr=3.0)
        fb = cs.filter_segment(b, bank=bank, min_snr=3.0)
        assert fa["snr"].size > 0
        for key in ("index", "snr", "phase", "sigma", "chi2"):
            assert fa[key].tobytes() == fb[key].tobytes(), key


def test_chain_is_bitwise_identical_across_thread_counts(strain):
    before = cs.get_threads()
    out = []
    try:
        for n in (1, 2, 3):
            cs.set_threads(n)
            psds = cs.segment_psds(strain, FS, [0, N, 2 * N], N, NF, welch_duration=2.0, f_low=20.0)
            seg = cs.prepare_segments(strain, FS, [0, N, 2 * N], N, psds)[1]
            found = cs.filter_segment(seg, bank=cs.prepare_bank(9.0, 7.0, f_low=20.0), min_snr=3.0)
            out.append(psds.tobytes() + found["snr"].tobytes() + found["chi2"].tobytes())
            seg = cs.prepare_segments(strain, FS, [0, N, 2 * N], N, welch_duration=2.0, f_low=20.0)[2]
            found = cs.filter_segment(seg, bank=cs.prepare_bank(9.0, 7.0, f_low=20.0), min_snr=3.0)
            out[-1] += found["snr"].tobytes() + found["chi2"].tobytes()
    finally:
        cs.set_threads(before)
    assert out[0] == out[1] == out[2]


@pytest.mark.parametrize("call, pattern", [
    (lambda x: cs.segment_psds(x, FS, [2 * N + 1], N, NF, f_low=20.0), "starts"),
    (lambda x: cs.segment_psds(x, FS, [0], N, NF, welch_duration=64.0, f_low=20.0), "welch_duration"),
    (lambda x: cs.prepare_segments(x, FS, [0], N, np.ones(NF - 1)), "psd"),
    (lambda x: cs.prepare_segments(x, FS, [0], N + 1, np.ones(NF)), "segment_samples"),
    (lambda x: cs.prepare_segments(x, FS, [0], N, welch_duration=2.0), "f_low"),
    (lambda x: cs.prepare_segments(x, FS, [0, N], N, psd_starts=[0], f_low=20.0), "psd_starts"),
    (lambda x: cs.prepare_segments(x, FS, [0], N, psd_starts=[2 * N + 1], f_low=20.0), "psd_starts must keep"),
    (lambda x: cs.prepare_segments(x, FS, [0], N, np.ones(NF), psd_samples=N), "psd_samples"),
    (lambda x: cs.prepare_segments(x, FS, [0], N, psd_strain=x[:10], f_low=20.0), "10 samples of psd_strain"),
    (lambda x: cs.prepare_segments(x, FS, [0], N, psd_samples=100, f_low=20.0), "psd_samples=100"),
    (lambda x: cs.prepare_segments(x, FS, [0], N, psd_strain=np.full(N, np.nan), f_low=20.0), "psd_strain"),
    (lambda x: cs.prepare_segments(x, FS, [0], N, welch_duration=64.0, f_low=20.0), "welch_duration"),
    (lambda x: cs.prepare_segments(np.zeros(N), FS, [0], N, f_low=20.0), "median PSD estimate is zero"),
    (lambda x: cs.filter_segment(cs.prepare_segments(x, FS, [0], N, np.ones(NF))[0], np.ones(NF), DF,
                                 bank=cs.prepare_bank(9.0, 7.0, f_low=20.0)), "PreparedSegment"),
])
def test_bad_input_names_the_argument(strain, call, pattern):
    with pytest.raises((ValueError, TypeError), match=pattern):
        call(strain)
