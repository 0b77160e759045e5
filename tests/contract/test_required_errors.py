"""Required errors, one by one: each bad input gives the documented exception naming its argument."""

from __future__ import annotations

import numpy as np
import pytest

import chirpsift as cs
from chirpsift import Bank
from contract.harness import (
    DATA_FD,
    DF,
    NF,
    NOISE,
    PSD65,
    STRAIN,
    TEMPLATES,
    TINY_BANK,
    WHITE_PSD,
    X128,
    put,
)


# ---------------------------------------------------------------------------
# required errors, one by one
# ---------------------------------------------------------------------------


NAN_INF_CASES = [
    ("welch x nan", lambda: cs.welch(put(NOISE, 3, np.nan), 64.0, 2.0), r"\bx\b"),
    ("welch x inf", lambda: cs.welch(put(NOISE, 3, np.inf), 64.0, 2.0), r"\bx\b"),
    ("welch window nan", lambda: cs.welch(NOISE, 64.0, 2.0, window=put(np.ones(128), 0, np.nan)), r"\bwindow\b"),
    ("design freqs nan", lambda: cs.design_psd([np.nan]), r"\bfreqs\b"),
    ("grid freqs nan", lambda: cs.psd_to_grid([0.0, np.nan], [1.0, 1.0], 1.0, 4), r"\bfreqs\b"),
    ("grid psd nan", lambda: cs.psd_to_grid([0.0, 1.0], [1.0, np.nan], 1.0, 4), r"\bpsd\b"),
    ("truncate psd nan", lambda: cs.truncate_inverse_psd(put(PSD65, 9, np.nan), 128.0, 0.25, 5.0), r"\bpsd\b"),
    ("whiten x nan", lambda: cs.whiten(put(X128, 0, np.nan), PSD65, 128.0), r"\bx\b"),
    ("whiten x -inf", lambda: cs.whiten(put(X128, 0, -np.inf), PSD65, 128.0), r"\bx\b"),
    ("whiten psd nan", lambda: cs.whiten(X128, put(PSD65, 4, np.nan), 128.0), r"\bpsd\b"),
    ("sigma templates nan", lambda: cs.sigma(put(TEMPLATES, (0, 40), np.nan), WHITE_PSD, DF, 20.0), r"\btemplates\b"),
    ("sigma psd nan", lambda: cs.sigma(TEMPLATES, put(WHITE_PSD, 50, np.nan), DF, 20.0), r"\bpsd\b"),
    ("snr data nan", lambda: cs.snr_series(put(DATA_FD, 50, np.nan), TEMPLATES, WHITE_PSD, DF, 20.0), r"\bdata_fd\b"),
    ("snr data inf", lambda: cs.snr_series(put(DATA_FD, 50, complex(np.inf, 0)), TEMPLATES, WHITE_PSD, DF, 20.0),
     r"\bdata_fd\b"),
    ("snr templates inf", lambda: cs.snr_series(DATA_FD, put(TEMPLATES, (0, 5), np.inf), WHITE_PSD, DF, 20.0),
     r"\btemplates\b"),
    ("snr psd nan", lambda: cs.snr_series(DATA_FD, TEMPLATES, put(WHITE_PSD, 50, np.nan), DF, 20.0), r"\bpsd\b"),
    ("correlate data nan", lambda: cs.correlate(put(NOISE[:20], 2, np.nan), np.ones(3)), r"\bdata\b"),
    ("correlate templates inf", lambda: cs.correlate(NOISE[:20], put(np.ones(3), 1, np.inf)), r"\btemplates\b"),
    ("fused data nan", lambda: cs.filter_segment(put(DATA_FD, 9, np.nan), WHITE_PSD, DF, 5.0, 5.0, f_low=20.0),
     r"\bdata_fd\b"),
    ("fused psd nan", lambda: cs.filter_segment(DATA_FD, put(WHITE_PSD, 9, np.nan), DF, 5.0, 5.0, f_low=20.0),
     r"\bpsd\b"),
    ("search strain nan", lambda: cs.search(put(STRAIN, 100, np.nan), 128.0, TINY_BANK, f_low=30.0,
                                             segment_duration=8.0, welch_duration=2.0, nonfinite="error"),
     r"\bstrain\b"),
    ("search strain inf", lambda: cs.search(put(STRAIN, 100, np.inf), 128.0, TINY_BANK, f_low=30.0,
                                             segment_duration=8.0, welch_duration=2.0, nonfinite="error"),
     r"\bstrain\b"),
    ("search psd nan", lambda: cs.search(STRAIN, 128.0, TINY_BANK, f_low=30.0, segment_duration=8.0,
                                          welch_duration=2.0, psd=np.full(513, np.nan)), r"\bpsd\b"),
    ("taylorf2 f_low nan", lambda: cs.taylorf2(1.4, 1.4, f_low=np.nan, df=1.0, n_freq=65), r"\bf_low\b"),
    ("taylorf2 df inf", lambda: cs.taylorf2(1.4, 1.4, f_low=20.0, df=np.inf, n_freq=65), r"\bdf\b"),
    ("taylorf2 f_high nan", lambda: cs.taylorf2(1.4, 1.4, f_low=20.0, df=1.0, n_freq=65, f_high=np.nan), r"\bf_high\b"),
    ("taylorf2 distance inf", lambda: cs.taylorf2(1.4, 1.4, f_low=20.0, df=1.0, n_freq=65, distance=np.inf),
     r"\bdistance\b"),
    ("sample_rate nan", lambda: cs.welch(NOISE, np.nan, 2.0), r"\bsample_rate\b"),
    ("reweighted snr nan", lambda: cs.reweighted_snr([np.nan], [1.0], [2]), r"\bsnr\b"),
    ("reweighted chi2 inf", lambda: cs.reweighted_snr([1.0], [np.inf], [2]), r"\bchi2\b"),
    ("cluster times nan", lambda: cs.cluster_in_time([0.0, np.nan], [1.0, 2.0], 1.0), r"\btimes\b"),
    ("cluster values inf", lambda: cs.cluster_in_time([0.0, 1.0], [1.0, np.inf], 1.0), r"\bvalues\b"),
    ("cluster window nan", lambda: cs.cluster_in_time([0.0, 1.0], [1.0, 2.0], np.nan), r"\bwindow\b"),
    ("bank m1 nan", lambda: Bank.from_any({"m1": [np.nan], "m2": [1.0]}), r"\bm1\b"),
    ("bank chi2 inf", lambda: Bank.from_any(np.array([[1.0, 1.0, 0.0, np.inf]])), r"\bchi2\b"),
]

BAD_PSD_CASES = [
    ("grid psd zero", lambda: cs.psd_to_grid([0.0, 1.0], [1.0, 0.0], 1.0, 4), r"\bpsd\b"),
    ("grid psd negative", lambda: cs.psd_to_grid([0.0, 1.0], [-1.0, 1.0], 1.0, 4), r"\bpsd\b"),
    ("truncate psd zero", lambda: cs.truncate_inverse_psd(put(PSD65, 30, 0.0), 128.0, 0.25, 5.0), r"\bpsd\b"),
    ("truncate psd -inf", lambda: cs.truncate_inverse_psd(put(PSD65, 30, -np.inf), 128.0, 0.25, 5.0), r"\bpsd\b"),
    ("whiten psd zero", lambda: cs.whiten(X128, put(PSD65, 30, 0.0), 128.0), r"\bpsd\b"),
    ("whiten psd negative", lambda: cs.whiten(X128, -PSD65, 128.0), r"\bpsd\b"),
    ("sigma psd zero", lambda: cs.sigma(TEMPLATES, put(WHITE_PSD, 60, 0.0), DF, 20.0), r"\bpsd\b"),
    ("snr psd negative", lambda: cs.snr_series(DATA_FD, TEMPLATES, put(WHITE_PSD, 60, -1.0), DF, 20.0), r"\bpsd\b"),
    ("fused psd zero", lambda: cs.filter_segment(DATA_FD, put(WHITE_PSD, 60, 0.0), DF, 5.0, 5.0, f_low=20.0),
     r"\bpsd\b"),
    ("search psd negative", lambda: cs.search(STRAIN, 128.0, TINY_BANK, f_low=30.0, segment_duration=8.0,
                                               welch_duration=2.0, psd=-np.ones(513)), r"\bpsd\b"),
    ("sigma psd inf over band", lambda: cs.sigma(TEMPLATES, np.full(NF, np.inf), DF, 20.0), r"\bpsd\b"),
    ("fused psd inf over band", lambda: cs.filter_segment(DATA_FD, np.full(NF, np.inf), DF, 5.0, 5.0, f_low=20.0),
     r"\bpsd\b"),
]

MASS_SPIN_CASES = [
    ("taylorf2 m1 zero", lambda: cs.taylorf2(0.0, 1.4, f_low=20.0, df=1.0, n_freq=65), r"\bm1\b"),
    ("taylorf2 m2 negative", lambda: cs.taylorf2(1.4, [1.0, -1.0], f_low=20.0, df=1.0, n_freq=65), r"\bm2\b"),
    ("taylorf2 chi1 one", lambda: cs.taylorf2(1.4, 1.4, 1.0, f_low=20.0, df=1.0, n_freq=65), r"\bchi1\b"),
    ("taylorf2 chi2 below -1", lambda: cs.taylorf2(1.4, 1.4, 0.0, -1.5, f_low=20.0, df=1.0, n_freq=65), r"\bchi2\b"),
    ("taylorf2 chi1 nan", lambda: cs.taylorf2(1.4, 1.4, np.nan, f_low=20.0, df=1.0, n_freq=65), r"\bchi1\b"),
    ("chirp_duration m1 negative", lambda: cs.chirp_duration(-1.4, 1.4, 20.0), r"\bm1\b"),
    ("chirp_duration m2 zero", lambda: cs.chirp_duration(1.4, 0.0, 20.0), r"\bm2\b"),
    ("isco m1 zero", lambda: cs.isco_frequency([1.0, 0.0], 1.4), r"\bm1\b"),
    ("isco m2 inf", lambda: cs.isco_frequency(1.0, np.inf), r"\bm2\b"),
    ("fused m1 negative", lambda: cs.filter_segment(DATA_FD, WHITE_PSD, DF, -5.0, 5.0, f_low=20.0), r"\bm1\b"),
    ("fused chi2 one", lambda: cs.filter_segment(DATA_FD, WHITE_PSD, DF, 5.0, 5.0, 0.0, -1.0, f_low=20.0), r"\bchi2\b"),
    ("bank m2 zero", lambda: Bank.from_any({"m1": [1.0], "m2": [0.0]}), r"\bm2\b"),
    ("bank chi1 one", lambda: Bank.from_any({"m1": [1.0], "m2": [1.0], "chi1": [1.0]}), r"\bchi1\b"),
    ("search bank spin", lambda: cs.search(STRAIN, 128.0, {"m1": [10.0], "m2": [10.0], "chi2": [-1.0]}, f_low=30.0,
                                            segment_duration=8.0, welch_duration=2.0), r"\bchi2\b"),
]

BAND_CASES = [
    ("sigma f_high below f_low", lambda: cs.sigma(TEMPLATES, WHITE_PSD, DF, 40.0, 30.0), r"\bf_high\b"),
    ("sigma f_high equal f_low", lambda: cs.sigma(TEMPLATES, WHITE_PSD, DF, 40.0, 40.0), r"\bf_high\b"),
    ("sigma f_low above nyquist", lambda: cs.sigma(TEMPLATES, WHITE_PSD, DF, 200.0), r"\bf_low\b"),
    ("snr f_low above nyquist", lambda: cs.snr_series(DATA_FD, TEMPLATES, WHITE_PSD, DF, 129.0), r"\bf_low\b"),
    ("snr f_high below f_low", lambda: cs.snr_series(DATA_FD, TEMPLATES, WHITE_PSD, DF, 40.0, 39.0), r"\bf_high\b"),
    ("taylorf2 f_high below f_low", lambda: cs.taylorf2(1.4, 1.4, f_low=40.0, df=1.0, n_freq=65, f_high=30.0),
     r"\bf_high\b"),
    ("taylorf2 f_low above top bin", lambda: cs.taylorf2(1.4, 1.4, f_low=64.0, df=1.0, n_freq=65), r"\bf_low\b"),
    ("taylorf2 isco below f_low", lambda: cs.taylorf2(1000.0, 1000.0, f_low=20.0, df=1.0, n_freq=65), r"\bf_high\b"),
    ("truncate f_low at nyquist", lambda: cs.truncate_inverse_psd(PSD65, 128.0, 0.25, 64.0), r"\bf_low\b"),
    ("whiten f_low above nyquist", lambda: cs.whiten(X128, PSD65, 128.0, 100.0), r"\bf_low\b"),
    ("fused f_low at nyquist", lambda: cs.filter_segment(DATA_FD, WHITE_PSD, DF, 5.0, 5.0, f_low=128.0), r"\bf_low\b"),
    ("fused f_high below f_low", lambda: cs.filter_segment(DATA_FD, WHITE_PSD, DF, 5.0, 5.0, f_low=40.0, f_high=30.0),
     r"\bf_high\b"),
    ("search f_low at nyquist", lambda: cs.search(STRAIN, 128.0, TINY_BANK, f_low=64.0, segment_duration=8.0,
                                                   welch_duration=2.0), r"\bf_low\b"),
    ("chirp_duration f_low zero", lambda: cs.chirp_duration(1.4, 1.4, 0.0), r"\bf_low\b"),
    ("negative sample_rate", lambda: cs.whiten(X128, PSD65, -128.0), r"\bsample_rate\b"),
    ("zero df", lambda: cs.sigma(TEMPLATES, WHITE_PSD, 0.0, 20.0), r"\bdf\b"),
    ("negative f_low", lambda: cs.snr_series(DATA_FD, TEMPLATES, WHITE_PSD, DF, -1.0), r"\bf_low\b"),
    ("zero min_snr", lambda: cs.filter_segment(DATA_FD, WHITE_PSD, DF, 5.0, 5.0, f_low=20.0, min_snr=0.0),
     r"\bmin_snr\b"),
    ("negative peak_window", lambda: cs.search(STRAIN, 128.0, TINY_BANK, f_low=30.0, segment_duration=8.0,
                                                   welch_duration=2.0, peak_window=-1.0), r"\bpeak_window\b"),
    ("zero threads", lambda: cs.set_threads(0), r"\bn\b"),
    ("overlap one", lambda: cs.welch(NOISE, 64.0, 2.0, overlap=1.0), r"\boverlap\b"),
    ("negative dof", lambda: cs.reweighted_snr([5.0], [1.0], [-2]), r"\bdof\b"),
    ("negative pad", lambda: cs.plan_segments(100, 20, -1, 0), r"\bpad_start\b"),
    ("zero length", lambda: cs.plan_segments(100, 0, 0, 0), r"\blength\b"),
    ("correlate mode None", lambda: cs.correlate(np.ones(5), np.ones(2), mode=None), r"\bmode\b"),
    ("welch average", lambda: cs.welch(NOISE, 64.0, 2.0, average="mode"), r"\baverage\b"),
    ("design curve", lambda: cs.design_psd([10.0], "gen3"), r"\bcurve\b"),
]

LENGTH_CASES = [
    ("grid lengths", lambda: cs.psd_to_grid([0.0, 1.0, 2.0], [1.0, 1.0], 1.0, 4), r"\bpsd\b"),
    ("whiten psd length", lambda: cs.whiten(X128, np.ones(64), 128.0), r"\bpsd\b"),
    ("whiten psd rows", lambda: cs.whiten(np.ones((2, 8)), np.ones((3, 5)), 8.0), r"\bpsd\b"),
    ("sigma templates bins", lambda: cs.sigma(TEMPLATES[:, :-1], WHITE_PSD, DF, 20.0), r"\btemplates\b"),
    ("snr psd bins", lambda: cs.snr_series(DATA_FD, TEMPLATES, WHITE_PSD[:-1], DF, 20.0), r"\bpsd\b"),
    ("snr templates bins", lambda: cs.snr_series(DATA_FD[:-2], TEMPLATES, WHITE_PSD[:-2], DF, 20.0), r"\btemplates\b"),
    ("fused psd bins", lambda: cs.filter_segment(DATA_FD, WHITE_PSD[:-1], DF, 5.0, 5.0, f_low=20.0), r"\bpsd\b"),
    ("correlate valid too long", lambda: cs.correlate(np.ones(4), np.ones(5)), r"\btemplates\b"),
    ("welch window length", lambda: cs.welch(NOISE, 64.0, 2.0, window=np.ones(100)), r"\bwindow\b"),
    ("welch x shorter than segment", lambda: cs.welch(NOISE[:100], 64.0, 2.0), r"\bx\b"),
    ("taylorf2 masses do not broadcast", lambda: cs.taylorf2([1.0, 2.0], [1.0, 2.0, 3.0], f_low=20.0, df=1.0,
                                                              n_freq=65), r"\bm1\b"),
    ("taylorf2 f_high length", lambda: cs.taylorf2([1.0, 2.0], 1.0, f_low=20.0, df=1.0, n_freq=65,
                                                    f_high=[50.0, 60.0, 70.0]), r"\bf_high\b"),
    ("search psd array bins", lambda: cs.search(STRAIN, 128.0, TINY_BANK, f_low=30.0, segment_duration=8.0,
                                                 welch_duration=2.0, psd=np.ones(100)), r"\bpsd\b"),
    ("search psd pair lengths", lambda: cs.search(STRAIN, 128.0, TINY_BANK, f_low=30.0, segment_duration=8.0,
                                                   welch_duration=2.0, psd=(np.arange(10.0), np.ones(9))),
     r"\bpsd\b"),
    ("search strain too short", lambda: cs.search(STRAIN[:500], 128.0, TINY_BANK, f_low=30.0, segment_duration=8.0,
                                                   welch_duration=2.0), r"\bstrain\b"),
    ("reweighted lengths", lambda: cs.reweighted_snr([1.0, 2.0], [1.0, 2.0, 3.0], [2]), r"\bsnr\b"),
    ("cluster lengths", lambda: cs.cluster_in_time([0.0, 1.0], [1.0], 1.0), r"\btimes\b"),
    ("cluster groups length", lambda: cs.cluster_in_time([0.0, 1.0], [1.0, 2.0], 1.0, groups=[0]), r"\bgroups\b"),
    ("bank lengths", lambda: Bank.from_any({"m1": [1.0, 2.0], "m2": [1.0]}), r"\bm1\b"),
]

DIM_CASES = [
    ("welch 3-D", lambda: cs.welch(NOISE.reshape(2, 2, 128), 64.0, 2.0), r"\bx\b"),
    ("welch 0-D", lambda: cs.welch(np.float64(1.0), 64.0, 2.0), r"\bx\b"),
    ("design 9-D", lambda: cs.design_psd(np.ones((1,) * 9)), r"\bfreqs\b"),
    ("grid 2-D freqs", lambda: cs.psd_to_grid(np.ones((2, 2)), np.ones((2, 2)), 1.0, 4), r"\bfreqs\b"),
    ("truncate 3-D", lambda: cs.truncate_inverse_psd(np.ones((1, 1, 65)), 128.0, 0.25, 5.0), r"\bpsd\b"),
    ("whiten 3-D", lambda: cs.whiten(np.ones((1, 1, 8)), np.ones(5), 8.0), r"\bx\b"),
    ("taylorf2 2-D mass", lambda: cs.taylorf2(np.ones((2, 2)), 1.4, f_low=20.0, df=1.0, n_freq=65), r"\bm1\b"),
    ("chirp_duration 2-D mass", lambda: cs.chirp_duration(1.4, np.ones((2, 2)), 20.0), r"\bm2\b"),
    ("sigma 3-D templates", lambda: cs.sigma(TEMPLATES[None], WHITE_PSD, DF, 20.0), r"\btemplates\b"),
    ("sigma 2-D psd", lambda: cs.sigma(TEMPLATES, WHITE_PSD[None], DF, 20.0), r"\bpsd\b"),
    ("snr 2-D data", lambda: cs.snr_series(DATA_FD[None], TEMPLATES, WHITE_PSD, DF, 20.0), r"\bdata_fd\b"),
    ("correlate 2-D data", lambda: cs.correlate(np.ones((2, 5)), np.ones(2)), r"\bdata\b"),
    ("correlate 3-D templates", lambda: cs.correlate(np.ones(5), np.ones((1, 1, 2))), r"\btemplates\b"),
    ("fused 2-D data", lambda: cs.filter_segment(DATA_FD[None], WHITE_PSD, DF, 5.0, 5.0, f_low=20.0), r"\bdata_fd\b"),
    ("search 2-D strain", lambda: cs.search(STRAIN[None], 128.0, TINY_BANK, f_low=30.0, segment_duration=8.0,
                                             welch_duration=2.0), r"\bstrain\b"),
    ("cluster 2-D times", lambda: cs.cluster_in_time(np.ones((2, 2)), np.ones((2, 2)), 1.0), r"\btimes\b"),
    ("bank 1-D array", lambda: Bank.from_any(np.ones(2)), r"\bbank\b"),
    ("bank 3 columns", lambda: Bank.from_any(np.ones((2, 3))), r"\bbank\b"),
    ("bank 2-D field", lambda: Bank.from_any({"m1": [[1.0]], "m2": [[1.0]]}), r"\bm1\b"),
]

EMPTY_CASES = [
    ("welch", lambda: cs.welch([], 64.0, 2.0), r"\bx\b"),
    ("welch no channels", lambda: cs.welch(np.ones((0, 256)), 64.0, 2.0), r"\bx\b"),
    ("design", lambda: cs.design_psd([]), r"\bfreqs\b"),
    ("grid", lambda: cs.psd_to_grid([], [], 1.0, 4), r"\bfreqs\b"),
    ("truncate", lambda: cs.truncate_inverse_psd(np.ones((0, 65)), 128.0, 0.25, 5.0), r"\bpsd\b"),
    ("whiten", lambda: cs.whiten([], [1.0], 128.0), r"\bx\b"),
    ("taylorf2", lambda: cs.taylorf2([], 1.4, f_low=20.0, df=1.0, n_freq=65), r"\bm1\b"),
    ("chirp_duration", lambda: cs.chirp_duration(1.4, [], 20.0), r"\bm2\b"),
    ("isco", lambda: cs.isco_frequency([], 1.0), r"\bm1\b"),
    ("sigma", lambda: cs.sigma(np.ones((0, NF)), WHITE_PSD, DF, 20.0), r"\btemplates\b"),
    ("snr data", lambda: cs.snr_series([], TEMPLATES, WHITE_PSD, DF, 20.0), r"\bdata_fd\b"),
    ("correlate data", lambda: cs.correlate([], np.ones(2), "full"), r"\bdata\b"),
    ("correlate templates", lambda: cs.correlate(np.ones(5), np.ones((0, 3))), r"\btemplates\b"),
    ("fused masses", lambda: cs.filter_segment(DATA_FD, WHITE_PSD, DF, [], 5.0, f_low=20.0), r"\bm1\b"),
    ("search strain", lambda: cs.search([], 128.0, TINY_BANK, f_low=30.0, segment_duration=8.0,
                                         welch_duration=2.0), r"\bstrain\b"),
    ("search bank", lambda: cs.search(STRAIN, 128.0, Bank([], []), f_low=30.0, segment_duration=8.0,
                                       welch_duration=2.0), r"\bbank\b"),
]

TYPE_CASES = [
    ("welch x None", lambda: cs.welch(None, 64.0), r"\bx\b"),
    ("welch x str", lambda: cs.welch("abc", 64.0), r"\bx\b"),
    ("welch x object", lambda: cs.welch(np.array([1.0, None] * 200, dtype=object), 64.0, 2.0), r"\bx\b"),
    ("welch x complex", lambda: cs.welch(NOISE.astype(complex), 64.0, 2.0), r"\bx\b"),
    ("welch rate str", lambda: cs.welch(NOISE, "64"), r"\bsample_rate\b"),
    ("welch rate bool", lambda: cs.welch(NOISE, True), r"\bsample_rate\b"),
    ("design freqs ragged", lambda: cs.design_psd([[1.0], [1.0, 2.0]]), r"\bfreqs\b"),
    ("grid n_freq float", lambda: cs.psd_to_grid([0.0, 1.0], [1.0, 1.0], 1.0, 4.0), r"\bn_freq\b"),
    ("truncate rate complex", lambda: cs.truncate_inverse_psd(PSD65, 128 + 0j, 0.25, 5.0), r"\bsample_rate\b"),
    ("whiten psd str array", lambda: cs.whiten(X128, np.array(["1"] * 65), 128.0), r"\bpsd\b"),
    ("taylorf2 dtype", lambda: cs.taylorf2(1.4, 1.4, f_low=20.0, df=1.0, n_freq=65, dtype=np.float64), r"\bdtype\b"),
    ("taylorf2 phase_order float", lambda: cs.taylorf2(1.4, 1.4, f_low=20.0, df=1.0, n_freq=65, phase_order=7.0),
     r"\bphase_order\b"),
    ("taylorf2 mass complex", lambda: cs.taylorf2(1.4 + 0j, 1.4, f_low=20.0, df=1.0, n_freq=65), r"\bm1\b"),
    ("isco mass None", lambda: cs.isco_frequency(None, 1.0), r"\bm1\b"),
    ("sigma templates str", lambda: cs.sigma(np.array(["a"] * NF), WHITE_PSD, DF, 20.0), r"\btemplates\b"),
    ("snr dtype", lambda: cs.snr_series(DATA_FD, TEMPLATES, WHITE_PSD, DF, 20.0, dtype=np.float32), r"\bdtype\b"),
    ("correlate complex", lambda: cs.correlate(np.ones(5, complex), np.ones(2)), r"\bdata\b"),
    ("fused chi2_bands float", lambda: cs.filter_segment(DATA_FD, WHITE_PSD, DF, 5.0, 5.0, f_low=20.0,
                                                          chi2_bands=4.0), r"\bchi2_bands\b"),
    ("search bank list", lambda: cs.search(STRAIN, 128.0, [[10.0, 10.0]], f_low=30.0), r"\bbank\b"),
    ("set_threads float", lambda: cs.set_threads(2.0), r"\bn\b"),
    ("set_threads None", lambda: cs.set_threads(None), r"\bn\b"),
    ("plan str", lambda: cs.plan_segments("100", 20, 1, 1), r"\bn_samples\b"),
    ("cluster window str", lambda: cs.cluster_in_time([0.0], [1.0], "1"), r"\bwindow\b"),
    ("reweighted None", lambda: cs.reweighted_snr(None, [1.0], [2]), r"\bsnr\b"),
    ("bank None", lambda: Bank.from_any(None), r"\bbank\b"),
    ("bank object field", lambda: Bank.from_any({"m1": [None], "m2": [1.0]}), r"\bm1\b"),
]

ALL_REQUIRED = {
    "nan_inf": NAN_INF_CASES,
    "bad_psd": BAD_PSD_CASES,
    "mass_spin": MASS_SPIN_CASES,
    "band": BAND_CASES,
    "length": LENGTH_CASES,
    "dim": DIM_CASES,
    "empty": EMPTY_CASES,
    "type": TYPE_CASES,
}
VALUE_ERROR_GROUPS = {"nan_inf", "bad_psd", "mass_spin", "band", "length", "dim", "empty"}


def _required(group):
    return [pytest.param(fn, pattern, id=label) for label, fn, pattern in ALL_REQUIRED[group]]


@pytest.mark.parametrize("group", sorted(VALUE_ERROR_GROUPS))
def test_required_value_errors_are_grouped(group):
    assert len(ALL_REQUIRED[group]) >= 5


@pytest.mark.parametrize("fn, pattern", [p for g in sorted(VALUE_ERROR_GROUPS) for p in _required(g)])
def test_required_value_error(fn, pattern):
    with pytest.raises(ValueError, match=pattern) as info:
        fn()
    assert type(info.value) is ValueError


@pytest.mark.parametrize("fn, pattern", _required("type"))
def test_required_type_error(fn, pattern):
    with pytest.raises(TypeError, match=pattern) as info:
        fn()
    assert type(info.value) is TypeError


def test_documented_infs_are_not_errors():
    p = cs.design_psd([-5.0, 0.0, 1.0, np.inf, 100.0])
    assert np.isinf(p[:4]).all() and np.isfinite(p[4])
    g = cs.psd_to_grid([10.0, 20.0, 30.0], [1.0, np.inf, 2.0], 1.0, 40)
    assert np.isinf(g[:10]).all() and np.isinf(g[31:]).all() and not np.isnan(g).any()
    t = cs.truncate_inverse_psd(cs.design_psd(np.arange(65) * 1.0), 128.0, 0.25, 20.0)
    assert np.isinf(t[:20]).all() and np.isfinite(t[20:]).all()
