"""The search of a strain catalogue read block by block: the same triggers as the
in-memory search, bit for bit; every second accounted for; memory held independent of
the amount of data."""

import os
import warnings

import numpy as np
import pytest

import chirpsift as cs
from chirpsift import synthetic
from chirpsift.io.catalogue import read_catalogue
from chirpsift.pipeline import CATEGORIES, ExcludedDataWarning, GatingWarning, search_catalogue
from chirpsift.reference import chirp_duration as ref_chirp_duration

FS = 256.0
T0 = 1_100_000_000.0
F_LOW = 30.0
WELCH = 2.0  # s; default segments are then 64 x 2 = 128 s
BANK = cs.Bank(m1=[10.0, 14.0, 20.0], m2=[8.0, 12.0, 15.0])  # heavy: templates of a few seconds from 30 Hz
OPTIONS = dict(f_low=F_LOW, welch_duration=WELCH, min_snr=4.5)


def _noise(seconds, seed):
    return synthetic.colored_gaussian_noise(int(seconds * FS), FS, "gen2-zero-detuned", seed=seed, f_low=20.0)


def _write(folder, x, cuts, t0=T0, fmt="npz"):
    """Split ``x`` at sample indices ``cuts`` into files starting at ``t0 + cut / FS``."""
    edges = [0, *cuts, x.size]
    paths = []
    for i, (a, b) in enumerate(zip(edges, edges[1:])):
        path = os.path.join(folder, f"site-q-{i:02d}.{fmt}")
        if fmt == "npz":
            np.savez(path, strain=x[a:b], sample_rate=FS, t0=t0 + a / FS)
        else:
            np.save(path, x[a:b])
        paths.append(path)
    return paths


def _quiet(fn, *args, **kwargs):
    """Call with the search's warnings about gated or left-out data recorded, not raised."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out = fn(*args, **kwargs)
    return out, [type(w.message) for w in caught]


def _with_vetoes_as_nan(x, t0, vetoes):
    y = x.copy()
    t = t0 + np.arange(x.size) / FS
    for start, end in vetoes:
        y[(t >= start) & (t < end)] = np.nan
    return y


@pytest.fixture(scope="module")
def glitchy(tmp_path_factory):
    """900 s of noise in four files (joins not on segment edges), with a NaN run, a loud
    glitch, and a signal whose chirp crosses a file join."""
    folder = tmp_path_factory.mktemp("glitchy")
    x = _noise(900.0, seed=11)
    x[int(610.3 * FS)] += 3e-19  # a loud single-sample glitch, gated at threshold 8
    x[int(400 * FS):int(401.5 * FS)] = np.nan
    distance = float(synthetic.optimal_snr(14.0, 12.0, psd="gen2-zero-detuned", f_low=F_LOW, sample_rate=FS,
                                           n=int(128 * FS))) / 12.0  # optimal SNR about 12
    t_c = T0 + 250.0 + 3.3 / FS  # between samples; the chirp crosses the join at 249 s
    x = synthetic.inject_taylorf2(x, FS, m1=14.0, m2=12.0, t_coalescence=t_c, distance=distance, f_low=F_LOW, t0=T0)
    paths = _write(folder, x, [int(249 * FS) + 7, int(500 * FS), int(700 * FS) - 3])
    return x, paths, t_c


@pytest.mark.parametrize("extra", [
    dict(gate_threshold=8.0),
    dict(gate_threshold=8.0, psd_duration=300.0),  # PSD blocks reach behind their segments
    dict(psd="gen2-zero-detuned", segment_duration=96.0, bank_cluster=True),
])
def test_streaming_equals_the_in_memory_search_bit_for_bit(glitchy, extra):
    # Consistency test (expected values from chirpsift.search, the code this mirrors);
    # the outside checks are beside it: the injection's known time and the span from
    # the file list.
    x, paths, t_c = glitchy
    vetoes = [(T0 + 702.5, T0 + 704.0)]
    cat = read_catalogue(paths[::-1])
    (trig, info), streamed_warnings = _quiet(search_catalogue, cat, BANK, vetoes=vetoes, **OPTIONS, **extra)
    (ref, ref_info), ref_warnings = _quiet(cs.search, _with_vetoes_as_nan(x, T0, vetoes), FS, BANK, t0=T0,
                                           full_output=True, **OPTIONS, **extra)
    assert len(trig) == len(ref) > 0
    assert trig.tobytes() == ref.tobytes()
    for key in ("analysed", "gates", "stretches", "segments", "live_time", "pad_start", "pad_end"):
        assert info[key] == ref_info[key], key
    assert info["segments"] > 2 * len(info["stretches"])  # several segments per stretch
    expected = {ExcludedDataWarning} | ({GatingWarning} if "gate_threshold" in extra else set())
    assert set(streamed_warnings) == set(ref_warnings) == expected
    nearest = trig[np.argmin(np.abs(trig["time"] - t_c))]  # the injection's own trigger (ungated: not the loudest)
    assert abs(nearest["time"] - t_c) < 1.0 / FS and nearest["snr"] > 8.0


def test_a_gap_gives_two_spans_each_searched_as_in_memory(tmp_path):
    # Consistency test per span (in-memory search of each span's samples), with the
    # outside truth of the gap's length from the files' start times.
    first, second = _noise(300.0, 1), _noise(260.0, 2)
    t1 = T0 + 300.0 + 37.25  # 37.25 s without data
    paths = _write(tmp_path, first, [int(150 * FS)]) + [os.path.join(tmp_path, "late.npz")]
    np.savez(paths[-1], strain=second, sample_rate=FS, t0=t1)
    cat = read_catalogue(paths)
    assert len(cat.spans) == 2
    trig, info = search_catalogue(cat, BANK, progress=True, **OPTIONS)  # the bar changes nothing
    ref = np.concatenate([cs.search(first, FS, BANK, t0=T0, **OPTIONS), cs.search(second, FS, BANK, t0=t1, **OPTIONS)])
    assert trig.tobytes() == ref.tobytes()
    assert info["gaps"] == [(T0 + 300.0, t1)]
    assert info["live_time_table"].seconds["gap"] == 37.25


def test_live_time_table_adds_up_to_the_span_of_the_file_list(tmp_path):
    # Outside truth: the catalogue's span computed directly from the files written
    # (start times and lengths), and the documented pad rule (Allen et al. 2012
    # overlap-save: 1.1 T + T_spec / 2 at a segment's start, T_spec / 2 at its end,
    # plus one sample each) with T from the numpy twin's chirp duration.
    x = _noise(700.0, 5)
    x[int(100 * FS):int(103 * FS)] = np.nan
    x[int(350.2 * FS)] += 3e-19
    paths = _write(tmp_path, x[:int(520 * FS)], [int(200 * FS)])
    late_t0, late_n = T0 + 560.0, int(60 * FS)
    np.savez(os.path.join(tmp_path, "late.npz"), strain=x[-late_n:], sample_rate=FS, t0=late_t0)
    paths.append(os.path.join(tmp_path, "late.npz"))
    vetoes = [(T0 + 300.0, T0 + 310.0), (T0 + 490.0, T0 + 600.0)]  # the second crosses the gap
    cat = read_catalogue(paths)
    (trig, info), caught = _quiet(search_catalogue, cat, BANK, vetoes=vetoes, gate_threshold=8.0, **OPTIONS)
    table = info["live_time_table"]
    span_of_files = max(T0 + 200.0, T0 + 520.0, late_t0 + late_n / FS) - T0
    assert table.total == pytest.approx(span_of_files, rel=1e-12)
    assert table.end - table.start == span_of_files
    assert set(table.seconds) == set(CATEGORIES)
    # each category, seconds from its intervals; all intervals disjoint
    every = sorted(iv for c in CATEGORIES for iv in table.intervals[c])
    assert all(b1 <= a2 + 1e-6 for (_, b1), (a2, _) in zip(every, every[1:]))
    for c in CATEGORIES:
        assert sum(b - a for a, b in table.intervals[c]) == pytest.approx(table.seconds[c], abs=1e-5)
    assert table.seconds["gap"] == 40.0
    assert table.seconds["vetoed"] == pytest.approx(10.0 + (520.0 - 490.0) + (600.0 - 560.0))
    assert table.seconds["nonfinite"] == 3.0
    assert table.seconds["gated"] > 0 and GatingWarning in caught
    assert table.intervals["analysed"] == info["analysed"] and table.live_time == info["live_time"]
    longest = max(ref_chirp_duration(m1, m2, F_LOW) for m1, m2 in zip(BANK.m1, BANK.m2))
    pads = np.ceil((1.1 * longest + WELCH / 2) * FS) + 1 + np.ceil(WELCH / 2 * FS) + 1
    searched = len(info["stretches"])
    assert searched == 4  # [0, 100), [103, 300), [310, 490) and [600, 620) s after T0
    assert table.seconds["pads"] == pytest.approx(searched * pads / FS)


def test_stretches_too_short_are_reported_not_dropped(tmp_path):
    x = _noise(400.0, 7)
    cat = read_catalogue(_write(tmp_path, x, [int(200 * FS)]))
    vetoes = [(T0 + 4.0, T0 + 5.0)]  # leaves [0, 4) s: shorter than the 4.6 s of pads
    (trig, info), caught = _quiet(search_catalogue, cat, BANK, vetoes=vetoes, **OPTIONS)
    assert info["short_stretches"] == [(T0, T0 + 4.0)]
    assert info["live_time_table"].seconds["short"] == 4.0
    assert ExcludedDataWarning in caught


def test_memory_held_does_not_grow_with_the_data(tmp_path):
    # The most samples any step holds at once is set by the segment and PSD block, and
    # each sample is read at most once per step (scan, gates, filter).
    x = _noise(1200.0, 9)
    short_dir, long_dir = tmp_path / "short", tmp_path / "long"
    short_dir.mkdir()
    long_dir.mkdir()
    held, read = [], []
    for folder, seconds in [(short_dir, 400.0), (long_dir, 1200.0)]:
        n = int(seconds * FS)
        cat = read_catalogue(_write(folder, x[:n], list(range(int(100 * FS), n, int(100 * FS)))))
        (trig, info), _ = _quiet(search_catalogue, cat, BANK, gate_threshold=8.0, psd_duration=200.0, **OPTIONS)
        held.append(info["largest_block"])
        read.append(info["samples_read"] / n)
    assert held[0] == held[1] <= 200.0 * FS + 128.0 * FS  # a PSD block and what it reaches behind
    assert read[0] <= 3 and read[1] <= 3


def test_nonfinite_error_names_the_file(tmp_path):
    x = _noise(300.0, 4)
    x[int(180 * FS)] = np.inf
    paths = _write(tmp_path, x, [int(150 * FS)])
    with pytest.raises(ValueError, match=r"site-q-01\.npz: 1 non-finite samples .*nonfinite='skip'"):
        search_catalogue(read_catalogue(paths), BANK, nonfinite="error", **OPTIONS)
    (trig, info), _ = _quiet(search_catalogue, read_catalogue(paths), BANK, nonfinite="error",
                             vetoes=[(T0 + 179.0, T0 + 181.0)], **OPTIONS)  # vetoed: nothing left to refuse
    assert info["excluded"] == []


def test_bad_arguments_are_named(tmp_path):
    cat = read_catalogue(_write(tmp_path, _noise(60.0, 3), []))
    with pytest.raises(ValueError, match="unknown key 'min_snrr'.*did you mean 'min-snr'"):
        search_catalogue(cat, BANK, f_low=F_LOW, min_snrr=5.0)
    with pytest.raises(TypeError, match="catalogue must be a Catalogue"):
        search_catalogue(_noise(60.0, 3), BANK, f_low=F_LOW)
    with pytest.raises(ValueError, match=r"longest stretch of the catalogue .*\(60 s\), fewer than the 16384-sample"):
        search_catalogue(cat, BANK, f_low=F_LOW, segment_duration=64.0)
    with pytest.raises(ValueError, match=r"vetoes\[0\]: a veto must end after it starts"):
        search_catalogue(cat, BANK, vetoes=[(T0 + 5.0, T0 + 1.0)], **OPTIONS)


@pytest.mark.parametrize("bank_cluster", [False, True])
def test_sub_banks_reclustered_equal_the_whole_banks_search_bit_for_bit(glitchy, bank_cluster):
    # Consistency test (expected values from the whole bank's search_catalogue); the outside
    # check: the injection's known time is found by the sub-bank holding the 14 + 12 template.
    from chirpsift.pipeline import cluster_across_bank

    x, paths, t_c = glitchy
    cat = read_catalogue(paths)
    bank = cs.Bank(m1=[10.0, 14.0, 20.0, 12.0, 9.0], m2=[8.0, 12.0, 15.0, 6.0, 9.0])
    options = dict(OPTIONS, gate_threshold=8.0, bank_cluster=bank_cluster)
    (whole, info), _ = _quiet(search_catalogue, cat, bank, **options)
    parts = []
    for lo, hi in [(0, 1), (1, 3), (3, 5)]:
        (part, part_info), _ = _quiet(search_catalogue, cat, bank, templates=(lo, hi), **options)
        assert set(part["template"]) <= set(range(lo, hi)) and part_info["template_range"] == [lo, hi]
        for key in ("analysed", "gates", "stretches", "live_time", "settings"):
            assert part_info[key] == info[key], key
        parts.append(part)
        if lo == 1:
            near = part[np.argmin(np.abs(part["time"] - t_c))]
            assert abs(near["time"] - t_c) < 1.0 / FS and near["template"] == 1
    union = np.concatenate(parts[::-1])  # any order
    stretches = [(s["start"], s["stop"]) for s in info["stretches"]]
    merged = cluster_across_bank(union, stretches, options.get("peak_window", 1.0)) if bank_cluster else \
        union[np.lexsort((union["template"], union["time"]))]
    assert len(whole) > 0 and merged.tobytes() == whole.tobytes()
    if not bank_cluster:
        assert len(cluster_across_bank(union, stretches, 1.0)) < len(union)  # clustering across the bank removes some
    with pytest.raises(ValueError, match="templates must satisfy 0 <= lo < hi <= 5"):
        search_catalogue(cat, bank, templates=(3, 9), **OPTIONS)
    with pytest.raises(ValueError, match="outside every stretch"):
        cluster_across_bank(union, [(T0 + 1e6, T0 + 2e6)], 1.0)
