"""Tests for chirpsift.io: strain readers, non-finite runs, Parquet triggers, atomic writes.

Outside references: numpy's own writers (np.save, np.savez, np.savetxt), h5py, and
pyarrow's Parquet reader; brute-force loops for the run finder.
"""

import json
import os

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from chirpsift import io as cio
from chirpsift.io import (
    StrainSeries,
    find_nonfinite_runs,
    read_strain,
    read_triggers,
    write_json_atomic,
    write_triggers,
)

pa = pytest.importorskip("pyarrow")
pq = pytest.importorskip("pyarrow.parquet")


@pytest.fixture
def samples():
    rng = np.random.default_rng(12)
    return rng.standard_normal(1000) * 1e-21


# ---------------------------------------------------------------------------
# round trips
# ---------------------------------------------------------------------------
def test_npy_round_trip(tmp_path, samples):
    p = tmp_path / "site_a.npy"
    np.save(p, samples)
    s = read_strain(p, sample_rate=512.0, t0=1000.5)
    assert isinstance(s, StrainSeries)
    np.testing.assert_array_equal(s.data, samples)
    assert s.data.dtype == np.float64 and s.data.ndim == 1
    assert s.sample_rate == 512.0 and s.t0 == 1000.5
    assert str(p) in s.source
    assert s.duration == pytest.approx(1000 / 512.0)


def test_npy_float32_is_promoted(tmp_path, samples):
    p = tmp_path / "a.npy"
    np.save(p, samples.astype(np.float32))
    s = read_strain(p, sample_rate=512)
    assert s.data.dtype == np.float64
    np.testing.assert_array_equal(s.data, samples.astype(np.float32).astype(np.float64))
    assert s.t0 == 0.0


def test_npz_round_trip(tmp_path, samples):
    p = tmp_path / "site_b.npz"
    np.savez(p, strain=samples, sample_rate=256.0, t0=42.25)
    s = read_strain(p)
    np.testing.assert_array_equal(s.data, samples)
    assert (s.sample_rate, s.t0) == (256.0, 42.25)
    # the same values given explicitly are not a conflict
    s2 = read_strain(p, sample_rate=256, t0=42.25)
    assert (s2.sample_rate, s2.t0) == (256.0, 42.25)


def test_npz_metadata_under_other_names(tmp_path, samples):
    p = tmp_path / "a.npz"
    np.savez(p, strain=samples, fs=256.0, start=-3.5)
    s = read_strain(p, sample_rate_attr="fs", t0_attr="start")
    assert (s.sample_rate, s.t0) == (256.0, -3.5)


def test_hdf5_round_trip_with_attributes(tmp_path, samples):
    h5py = pytest.importorskip("h5py")
    p = tmp_path / "site_a.h5"
    with h5py.File(p, "w") as f:
        d = f.create_dataset("group/strain", data=samples)
        d.attrs["sample_rate"] = 2048.0
        d.attrs["t0"] = 1234.5
        d2 = f.create_dataset("other", data=samples[:10])
        d2.attrs["fs"] = 16.0
        d2.attrs["start"] = -3.0
    s = read_strain(p, dataset="group/strain")
    np.testing.assert_array_equal(s.data, samples)
    assert (s.sample_rate, s.t0) == (2048.0, 1234.5)
    assert "group/strain" in s.source
    s2 = read_strain(p, dataset="other", sample_rate_attr="fs", t0_attr="start")
    assert (s2.sample_rate, s2.t0) == (16.0, -3.0)
    s3 = read_strain(p, dataset="group/strain", sample_rate=2048.0, t0=1234.5)
    assert (s3.sample_rate, s3.t0) == (2048.0, 1234.5)


def test_hdf5_errors_name_dataset_and_file(tmp_path, samples):
    h5py = pytest.importorskip("h5py")
    p = tmp_path / "b.hdf5"
    with h5py.File(p, "w") as f:
        f.create_dataset("strain", data=samples)
    with pytest.raises(ValueError, match="dataset") as e:
        read_strain(p)
    assert str(p) in str(e.value) and "strain" in str(e.value)
    with pytest.raises(ValueError, match="no dataset named 'nope'") as e:
        read_strain(p, dataset="nope")
    assert str(p) in str(e.value)
    with pytest.raises(ValueError, match="sample_rate") as e:
        read_strain(p, dataset="strain")
    assert str(p) in str(e.value)
    for words in ("sample_rate", "--sample-rate", "sample_rate_attr", "--sample-rate-attr"):
        assert f" {words} " in str(e.value) or f"({words})" in str(e.value)


def test_hdf5_without_h5py_says_how_to_install(tmp_path, monkeypatch):
    import builtins

    real_import = builtins.__import__

    def fake_import(name, *args, **kwargs):
        if name == "h5py":
            raise ImportError("no h5py")
        return real_import(name, *args, **kwargs)

    p = tmp_path / "c.h5"
    p.write_bytes(b"")
    monkeypatch.setattr(builtins, "__import__", fake_import)
    with pytest.raises(ImportError, match=r"pip install chirpsift\[hdf5\]"):
        read_strain(p, dataset="x", sample_rate=1.0)


def test_text_one_column(tmp_path, samples):
    p = tmp_path / "a.txt"
    np.savetxt(p, samples, header="strain")
    s = read_strain(p, sample_rate=1024.0, t0=5.0)
    np.testing.assert_allclose(s.data, samples, rtol=1e-15)  # savetxt writes %.18e: exact round trip
    assert (s.sample_rate, s.t0) == (1024.0, 5.0)


def test_text_two_columns_derives_rate_and_start(tmp_path, samples):
    fs, start = 256.0, 1e5 + 0.125
    t = start + np.arange(samples.size) / fs
    p = tmp_path / "a.dat"
    np.savetxt(p, np.column_stack([t, samples]))
    s = read_strain(p)
    np.testing.assert_allclose(s.data, samples, rtol=1e-15)
    assert s.sample_rate == pytest.approx(fs, rel=1e-9)
    assert s.t0 == pytest.approx(start, abs=1e-9)


def test_csv_two_columns(tmp_path, samples):
    fs = 64.0
    t = np.arange(samples.size) / fs
    p = tmp_path / "a.csv"
    np.savetxt(p, np.column_stack([t, samples]), delimiter=",", header="time,strain")
    s = read_strain(p)
    assert s.sample_rate == pytest.approx(fs, rel=1e-12)
    np.testing.assert_allclose(s.data, samples, rtol=1e-15)


def test_text_non_uniform_time_column(tmp_path):
    t = np.delete(np.arange(101) / 16.0, 50)  # one missing row: a step of 2 / 16 s
    p = tmp_path / "bad.txt"
    np.savetxt(p, np.column_stack([t, np.zeros(100)]))
    with pytest.raises(ValueError, match="not uniformly spaced") as e:
        read_strain(p)
    msg = str(e.value)
    assert str(p) in msg and "data rows 49 and 50" in msg and "0.125 s" in msg and "0.0625 s" in msg
    assert " 1 of the median step" in msg  # the worst deviation, as a fraction of a step


def test_text_conflicting_sample_rate(tmp_path):
    t = np.arange(100) / 16.0
    p = tmp_path / "a.txt"
    np.savetxt(p, np.column_stack([t, np.zeros(100)]))
    with pytest.raises(ValueError, match="conflicts") as e:
        read_strain(p, sample_rate=32.0)
    assert "32.0 Hz" in str(e.value) and "16.0 Hz" in str(e.value) and "time column" in str(e.value)


def test_text_three_columns(tmp_path):
    p = tmp_path / "a.txt"
    np.savetxt(p, np.zeros((10, 3)))
    with pytest.raises(ValueError, match="3 columns"):
        read_strain(p)


def test_nan_samples_are_kept(tmp_path, samples):
    data = samples.copy()
    data[10:20] = np.nan
    p = tmp_path / "a.npy"
    np.save(p, data)
    s = read_strain(p, sample_rate=100.0)
    assert np.isnan(s.data[10:20]).all()
    assert find_nonfinite_runs(s.data) == [(10, 20)]


# ---------------------------------------------------------------------------
# errors name the file and the problem
# ---------------------------------------------------------------------------
def test_missing_file(tmp_path):
    p = tmp_path / "absent.npy"
    with pytest.raises(FileNotFoundError, match="absent.npy"):
        read_strain(p, sample_rate=1.0)


def test_unknown_extension(tmp_path):
    p = tmp_path / "strain.wav"
    p.write_bytes(b"RIFF")
    with pytest.raises(ValueError, match="unknown strain file extension") as e:
        read_strain(p)
    assert str(p) in str(e.value) and ".npz" in str(e.value)


def test_npy_needs_sample_rate(tmp_path, samples):
    p = tmp_path / "a.npy"
    np.save(p, samples)
    with pytest.raises(ValueError, match="sample_rate") as e:
        read_strain(p)
    assert str(p) in str(e.value)


def test_npz_needs_strain_array(tmp_path):
    p = tmp_path / "a.npz"
    np.savez(p, data=np.zeros(4))
    with pytest.raises(ValueError, match="'strain'") as e:
        read_strain(p, sample_rate=1.0)
    assert "data" in str(e.value) and str(p) in str(e.value)


@pytest.mark.parametrize("rate", [0.0, -5.0, np.inf, np.nan])
def test_bad_sample_rate_argument(tmp_path, samples, rate):
    p = tmp_path / "a.npy"
    np.save(p, samples)
    with pytest.raises(ValueError, match="sample_rate") as e:
        read_strain(p, sample_rate=rate)
    assert str(p) in str(e.value)


def test_bad_stored_sample_rate(tmp_path, samples):
    p = tmp_path / "a.npz"
    np.savez(p, strain=samples, sample_rate=-1.0)
    with pytest.raises(ValueError, match="positive") as e:
        read_strain(p)
    assert "-1.0" in str(e.value)


def test_non_1d_and_empty(tmp_path):
    p = tmp_path / "two.npy"
    np.save(p, np.zeros((3, 4)))
    with pytest.raises(ValueError, match=r"1-D.*\(3, 4\)"):
        read_strain(p, sample_rate=1.0)
    p = tmp_path / "empty.npy"
    np.save(p, np.zeros(0))
    with pytest.raises(ValueError, match="empty"):
        read_strain(p, sample_rate=1.0)


def test_complex_rejected(tmp_path):
    # a problem with a file's content is a ValueError naming the file
    p = tmp_path / "c.npy"
    np.save(p, np.zeros(4, complex))
    with pytest.raises(ValueError, match="complex") as e:
        read_strain(p, sample_rate=1.0)
    assert str(p) in str(e.value)


def test_dataset_for_non_hdf5(tmp_path, samples):
    p = tmp_path / "a.npy"
    np.save(p, samples)
    with pytest.raises(ValueError, match="dataset"):
        read_strain(p, dataset="x", sample_rate=1.0)


# ---------------------------------------------------------------------------
# non-finite runs, against a brute-force scan
# ---------------------------------------------------------------------------
def _runs_brute_force(x):
    runs, start = [], None
    for i, v in enumerate(x):
        bad = not np.isfinite(v)
        if bad and start is None:
            start = i
        if not bad and start is not None:
            runs.append((start, i))
            start = None
    if start is not None:
        runs.append((start, len(x)))
    return runs


@settings(max_examples=200, deadline=None)
@given(st.lists(st.sampled_from([0.0, 1.5, np.nan, np.inf, -np.inf]), max_size=60))
def test_nonfinite_runs_match_brute_force(values):
    x = np.array(values, dtype=np.float64)
    assert find_nonfinite_runs(x) == _runs_brute_force(x)


def test_nonfinite_runs_rejects_2d():
    with pytest.raises(ValueError, match="1-D"):
        find_nonfinite_runs(np.zeros((2, 2)))


# ---------------------------------------------------------------------------
# Parquet triggers
# ---------------------------------------------------------------------------
def _triggers(n=25):
    rng = np.random.default_rng(3)
    t = np.empty(n, dtype=[("time", "f8"), ("template", "i4"), ("snr", "f4"), ("label", "U8"), ("flag", "?")])
    t["time"] = 1e9 + rng.uniform(0, 100, n)
    t["template"] = rng.integers(0, 50, n)
    t["snr"] = rng.uniform(5, 20, n)
    t["label"] = [f"site_{'ab'[i % 2]}" for i in range(n)]
    t["flag"] = rng.integers(0, 2, n).astype(bool)
    return t


def test_parquet_round_trip_with_metadata(tmp_path):
    trig = _triggers()
    meta = {"run": {"f_low": 20.0, "bank": str(tmp_path / "bank.npz")}, "count": np.int64(3), "nan": float("nan")}
    p = tmp_path / "triggers.parquet"
    write_triggers(p, trig, meta)
    back, meta_back = read_triggers(p)
    assert back.dtype.names == trig.dtype.names
    for name in trig.dtype.names:
        np.testing.assert_array_equal(back[name], trig[name])
        assert back[name].dtype.kind == trig[name].dtype.kind
    assert back["time"].dtype == np.float64 and back["snr"].dtype == np.float32
    assert meta_back == {"run": {"f_low": 20.0, "bank": str(tmp_path / "bank.npz")}, "count": 3, "nan": None}
    # readable by pyarrow directly, metadata as JSON under the documented key
    table = pq.read_table(p)
    assert table.num_rows == len(trig)
    assert json.loads(table.schema.metadata[b"chirpsift"])["count"] == 3


def test_parquet_empty_table(tmp_path):
    trig = _triggers(0)
    p = tmp_path / "none.parquet"
    write_triggers(p, trig, {})
    back, meta = read_triggers(p)
    assert len(back) == 0 and back.dtype.names == trig.dtype.names and meta == {}


def test_parquet_rejects_non_tables(tmp_path):
    with pytest.raises(TypeError, match="structured array"):
        write_triggers(tmp_path / "x.parquet", np.zeros(3), {})


def test_failed_write_leaves_no_file(tmp_path, monkeypatch):
    p = tmp_path / "triggers.parquet"

    def broken(table, where, *a, **k):
        with open(where, "wb") as fh:
            fh.write(b"PAR1 half a file")
        raise OSError("disk full")

    monkeypatch.setattr(pq, "write_table", broken)
    with pytest.raises(OSError, match="disk full"):
        write_triggers(p, _triggers(), {})
    assert os.listdir(tmp_path) == []


def test_overwrite_is_atomic_replacement(tmp_path):
    p = tmp_path / "t.parquet"
    write_triggers(p, _triggers(5), {"v": 1})
    write_triggers(p, _triggers(7), {"v": 2})
    back, meta = read_triggers(p)
    assert len(back) == 7 and meta == {"v": 2}
    assert sorted(os.listdir(tmp_path)) == ["t.parquet"]


def test_missing_output_folder(tmp_path):
    with pytest.raises(FileNotFoundError, match="does not exist"):
        write_triggers(tmp_path / "no" / "t.parquet", _triggers(2), {})


def test_json_atomic(tmp_path):
    p = tmp_path / "run.json"
    obj = {"a": np.float32(1.5), "b": np.arange(3), "c": [np.inf, 2.0], "p": tmp_path}
    write_json_atomic(p, obj)
    assert json.loads(p.read_text()) == {"a": 1.5, "b": [0, 1, 2], "c": [None, 2.0], "p": str(tmp_path)}
    assert os.listdir(tmp_path) == ["run.json"]


def test_json_unserialisable_leaves_nothing(tmp_path):
    p = tmp_path / "run.json"
    with pytest.raises(TypeError, match="object"):
        write_json_atomic(p, {"x": object()})
    assert not p.exists()


def test_new_files_get_normal_permissions(tmp_path):
    p = tmp_path / "run.json"
    write_json_atomic(p, {})
    mask = os.umask(0)
    os.umask(mask)
    assert p.stat().st_mode & 0o777 == 0o666 & ~mask


def test_metadata_key_constant():
    assert cio.METADATA_KEY == "chirpsift"


# ---------------------------------------------------------------------------
# a file's own metadata against the caller's values
# ---------------------------------------------------------------------------
def _h5(tmp_path, samples, **attrs):
    h5py = pytest.importorskip("h5py")
    p = tmp_path / "site.h5"
    with h5py.File(p, "w") as f:
        d = f.create_dataset("strain", data=samples)
        for k, v in attrs.items():
            d.attrs[k] = v
    return p


def _npz(tmp_path, samples, **arrays):
    p = tmp_path / "site.npz"
    np.savez(p, strain=samples, **arrays)
    return p


@pytest.mark.parametrize("fmt", ["npz", "hdf5"])
@pytest.mark.parametrize(
    "given, words",
    [
        ({"sample_rate": 2048.0}, ("sample_rate=2048.0 Hz", "--sample-rate", "4096.0 Hz")),
        ({"t0": 7.0}, ("t0=7.0 s", "--t0", "1000.5 s")),
    ],
    ids=["sample_rate", "t0"],
)
def test_regression_argument_conflicting_with_file_metadata_is_refused(tmp_path, samples, fmt, given, words):
    make = _npz if fmt == "npz" else _h5
    p = make(tmp_path, samples, sample_rate=4096.0, t0=1000.5)
    kwargs = {"dataset": "strain"} if fmt == "hdf5" else {}
    with pytest.raises(ValueError, match="conflicts") as e:
        read_strain(p, **kwargs, **given)
    msg = str(e.value)
    assert str(p) in msg and "\n" not in msg
    for w in words:
        assert w in msg, (w, msg)


@pytest.mark.parametrize("fmt", ["npz", "hdf5"])
def test_arguments_agreeing_with_file_metadata_are_accepted(tmp_path, samples, fmt):
    # agreement means the two put every sample within a tenth of a step of the same time
    make = _npz if fmt == "npz" else _h5
    p = make(tmp_path, samples, sample_rate=4096.0, t0=1000.5)
    kwargs = {"dataset": "strain"} if fmt == "hdf5" else {}
    n_steps = samples.size - 1
    # a rate that moves the last sample by 0.05 step passes, 0.2 step fails
    ok_rate = n_steps / (n_steps / 4096.0 + 0.05 / 4096.0)
    bad_rate = n_steps / (n_steps / 4096.0 + 0.2 / 4096.0)
    s = read_strain(p, sample_rate=ok_rate, t0=1000.5 + 0.05 / 4096.0, **kwargs)
    assert s.sample_rate == ok_rate and s.t0 == 1000.5 + 0.05 / 4096.0
    with pytest.raises(ValueError, match="conflicts"):
        read_strain(p, sample_rate=bad_rate, **kwargs)
    with pytest.raises(ValueError, match="conflicts"):
        read_strain(p, t0=1000.5 + 0.2 / 4096.0, **kwargs)


def test_regression_hdf5_start_time_under_another_name_is_not_zero(tmp_path, samples):
    p = _h5(tmp_path, samples, sample_rate=4096.0, gps_start=1000.5)
    with pytest.raises(ValueError, match="no start time") as e:
        read_strain(p, dataset="strain")
    msg = str(e.value)
    assert str(p) in msg and "'t0'" in msg and "gps_start" in msg and "\n" not in msg
    for words in ("t0 (--t0)", "t0_attr (--t0-attr)"):
        assert words in msg
    assert read_strain(p, dataset="strain", t0_attr="gps_start").t0 == 1000.5
    assert read_strain(p, dataset="strain", t0=1000.5).t0 == 1000.5


def test_npz_without_start_time_needs_one(tmp_path, samples):
    p = _npz(tmp_path, samples, sample_rate=256.0)
    with pytest.raises(ValueError, match="no start time") as e:
        read_strain(p)
    assert "t0 (--t0)" in str(e.value) and "t0_attr (--t0-attr)" in str(e.value)
    assert read_strain(p, t0=3.0).t0 == 3.0


def test_formats_without_metadata_refuse_metadata_names(tmp_path, samples):
    p = tmp_path / "a.npy"
    np.save(p, samples)
    with pytest.raises(ValueError, match="t0_attr='start'"):
        read_strain(p, sample_rate=1.0, t0_attr="start")
    with pytest.raises(TypeError, match="sample_rate_attr"):
        read_strain(p, sample_rate=1.0, sample_rate_attr=3)
    assert read_strain(p, sample_rate=1.0, t0_attr="t0").t0 == 0.0


def test_stored_metadata_of_the_wrong_kind(tmp_path, samples):
    p = _h5(tmp_path, samples, sample_rate="fast", t0=0.0)
    with pytest.raises(ValueError, match="attribute 'sample_rate' must hold one real number") as e:
        read_strain(p, dataset="strain")
    assert str(p) in str(e.value)
    p = _npz(tmp_path, samples, sample_rate=np.array([1.0, 2.0]), t0=0.0)
    with pytest.raises(ValueError, match="array 'sample_rate' must hold one real number"):
        read_strain(p)


# ---------------------------------------------------------------------------
# time columns rounded to microseconds
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("fs", [4096.0, 16384.0, 65536.0])
def test_regression_text_times_rounded_to_microseconds_are_accepted(tmp_path, fs):
    n = 3000
    start = 1_000_000_000.123456
    times = np.round(start + np.arange(n) / fs, 6)
    rng = np.random.default_rng(5)
    strain = rng.standard_normal(n)
    p = tmp_path / "rounded.txt"
    np.savetxt(p, np.column_stack([times, strain]), fmt=["%.6f", "%.18e"])
    s = read_strain(p)
    # the rate from the end points averages the rounding: off by at most 1 us over the span
    assert s.sample_rate == pytest.approx(fs, rel=1e-6 * fs / (n - 1) * 1.01)
    assert s.t0 == pytest.approx(start, abs=0.51e-6)
    np.testing.assert_array_equal(s.data, strain)
    # the exact rate and start time agree with the rounded column and are used as given
    s2 = read_strain(p, sample_rate=fs, t0=start)
    assert (s2.sample_rate, s2.t0) == (fs, start)


@pytest.mark.parametrize("deviation, ok", [(0.09, True), (0.11, False)])
def test_text_step_tolerance_is_a_tenth_of_the_median_step(tmp_path, deviation, ok):
    # one step longer by `deviation` of a step, the next shorter by as much: no drift
    t = np.arange(200) / 16.0
    t[100] += deviation / 16.0
    p = tmp_path / "jitter.txt"
    np.savetxt(p, np.column_stack([t, np.zeros(200)]))
    assert cio.TIME_STEP_TOLERANCE == 0.1
    if ok:
        assert read_strain(p).sample_rate == pytest.approx(16.0, rel=1e-12)
    else:
        with pytest.raises(ValueError, match=r"0\.11 of the median step"):
            read_strain(p)


def test_text_slow_drift_is_refused(tmp_path):
    # every step within 4% of the median, but the middle rows sit 0.2 step off the line
    # through the first and last times
    steps = np.r_[np.full(10, 1.04), np.full(10, 0.96)] / 16.0
    t = np.r_[0.0, np.cumsum(steps)]
    p = tmp_path / "drift.txt"
    np.savetxt(p, np.column_stack([t, np.zeros(t.size)]))
    with pytest.raises(ValueError, match="drifts") as e:
        read_strain(p)
    assert "data row 10" in str(e.value)


# ---------------------------------------------------------------------------
# damaged files: always a one-line ValueError naming the file
# ---------------------------------------------------------------------------
def _one_line_value_error(fn, path):
    with pytest.raises(ValueError) as e:
        fn()
    assert type(e.value) is ValueError
    msg = str(e.value)
    assert str(path) in msg and "\n" not in msg, msg
    return msg


def _valid_strain_files(tmp_path, samples):
    npy = tmp_path / "good.npy"
    np.save(npy, samples[:8])
    npz = tmp_path / "good.npz"
    np.savez(npz, strain=samples[:8], sample_rate=64.0, t0=1.0)
    npzc = tmp_path / "goodc.npz"
    np.savez_compressed(npzc, strain=samples[:8], sample_rate=64.0, t0=1.0)
    return {npy: {"sample_rate": 64.0}, npz: {}, npzc: {}}


@pytest.mark.parametrize("kind", ["npy", "npz", "compressed npz"])
def test_regression_empty_numpy_strain_files(tmp_path, kind):
    p = tmp_path / ("e.npy" if kind == "npy" else "e.npz")
    p.write_bytes(b"")
    msg = _one_line_value_error(lambda: read_strain(p, sample_rate=1.0, t0=0.0), p)
    assert "empty" in msg


def test_regression_every_truncation_of_a_numpy_strain_file(tmp_path, samples):
    # every prefix of a valid file (every third one past the first 160 bytes, where the
    # headers are) is refused with a one-line ValueError naming it
    for good, kwargs in _valid_strain_files(tmp_path, samples).items():
        whole = good.read_bytes()
        cut = tmp_path / f"cut{good.suffix}"
        for k in [*range(160), *range(160, len(whole), 3)]:
            cut.write_bytes(whole[:k])
            _one_line_value_error(lambda: read_strain(cut, **kwargs), cut)


def test_damaged_numpy_strain_files_never_raise_anything_else(tmp_path, samples):
    # random byte damage may leave a readable file (other numbers); otherwise ValueError
    rng = np.random.default_rng(17)
    for good, kwargs in _valid_strain_files(tmp_path, samples).items():
        whole = bytearray(good.read_bytes())
        bad = tmp_path / f"bad{good.suffix}"
        for _ in range(60):
            damaged = np.frombuffer(bytes(whole), dtype=np.uint8).copy()
            at = rng.integers(0, damaged.size, size=rng.integers(1, 4))
            damaged[at] = rng.integers(0, 256, size=at.size)
            bad.write_bytes(damaged.tobytes())
            try:
                out = read_strain(bad, **kwargs)
            except ValueError as exc:
                assert str(bad) in str(exc) and "\n" not in str(exc)
            else:
                assert isinstance(out, StrainSeries)


def test_malformed_strain_files(tmp_path, samples):
    cases = []
    p = tmp_path / "words.npy"
    p.write_text("not numpy at all")
    cases.append((p, {"sample_rate": 1.0}, "no NumPy header"))
    p = tmp_path / "objects.npy"
    np.save(p, np.array([1.0, None], dtype=object), allow_pickle=True)
    cases.append((p, {"sample_rate": 1.0}, "pickle"))
    p = tmp_path / "single.npz"
    with open(p, "wb") as fh:
        np.save(fh, samples)
    cases.append((p, {"sample_rate": 1.0}, "not a .npz archive"))
    p = tmp_path / "words.npz"
    p.write_text("hello")
    cases.append((p, {"sample_rate": 1.0}, "not a zip archive"))
    p = tmp_path / "strings.npz"
    np.savez(p, strain=np.array(["a", "b"]), sample_rate=1.0, t0=0.0)
    cases.append((p, {}, "numeric"))
    p = tmp_path / "ragged.txt"
    p.write_text("1 2\n3\n")
    cases.append((p, {}, "cannot parse"))
    p = tmp_path / "empty.txt"
    p.write_text("# only a comment\n")
    cases.append((p, {"sample_rate": 1.0}, "empty"))
    p = tmp_path / "binary.csv"
    p.write_bytes(bytes(range(256)))
    cases.append((p, {}, "cannot parse"))
    for path, kwargs, words in cases:
        msg = _one_line_value_error(lambda: read_strain(path, **kwargs), path)
        assert words in msg, msg


def test_malformed_hdf5_files(tmp_path, samples):
    h5py = pytest.importorskip("h5py")
    good = _h5(tmp_path, samples, sample_rate=64.0, t0=0.0)
    whole = good.read_bytes()
    for k in (0, 8, 100, len(whole) // 2, len(whole) - 10):
        p = tmp_path / f"cut{k}.h5"
        p.write_bytes(whole[:k])
        _one_line_value_error(lambda: read_strain(p, dataset="strain"), p)
    p = tmp_path / "table.h5"
    with h5py.File(p, "w") as f:
        d = f.create_dataset("strain", data=np.zeros(3, dtype=[("a", "f8"), ("b", "i4")]))
        d.attrs["sample_rate"] = 1.0
        d.attrs["t0"] = 0.0
    assert "numeric" in _one_line_value_error(lambda: read_strain(p, dataset="strain"), p)


def test_malformed_trigger_files(tmp_path):
    good = tmp_path / "good.parquet"
    write_triggers(good, _triggers(4), {"v": 1})
    whole = good.read_bytes()
    for k in range(0, len(whole), 7):
        p = tmp_path / "cut.parquet"
        p.write_bytes(whole[:k])
        _one_line_value_error(lambda: read_triggers(p), p)
    p = tmp_path / "words.parquet"
    p.write_text("time,snr\n1,2\n")
    _one_line_value_error(lambda: read_triggers(p), p)
    table = pa.table({"time": [1.0]}).replace_schema_metadata({"chirpsift": "{not json"})
    p = tmp_path / "badmeta.parquet"
    pq.write_table(table, p)
    assert "not valid JSON" in _one_line_value_error(lambda: read_triggers(p), p)
    table = pa.table({"time": [1.0]}).replace_schema_metadata({"chirpsift": "[1, 2]"})
    pq.write_table(table, p)
    assert "JSON object" in _one_line_value_error(lambda: read_triggers(p), p)
    p = tmp_path / "nested.parquet"
    pq.write_table(pa.table({"time": [[1.0, 2.0]]}), p)
    assert "'time'" in _one_line_value_error(lambda: read_triggers(p), p)
    p = tmp_path / "nulls.parquet"
    pq.write_table(pa.table({"snr": [1.0, None]}), p)
    assert "missing values" in _one_line_value_error(lambda: read_triggers(p), p)


def test_public_names_of_the_io_package():
    # the names other code imports from chirpsift.io, unchanged
    for name in ("read_strain", "StrainSeries", "write_triggers", "read_triggers", "write_json_atomic",
                 "find_nonfinite_runs"):
        assert name in cio.__all__ and callable(getattr(cio, name))
    from chirpsift.io.atomic import atomic_path

    assert cio.atomic_path is atomic_path


@pytest.mark.skipif(not os.path.isdir("/proc/self/fd"), reason="needs /proc to name the synced files")
def test_atomic_write_flushes_the_file_and_then_its_folder(tmp_path, monkeypatch):
    # The folder is synced after the rename, so a crash cannot lose a published file
    # (common practice for atomic publication on POSIX: fsync the file, rename, fsync the folder).
    synced = []
    real = os.fsync

    def recording(fd):
        synced.append(os.readlink(f"/proc/self/fd/{fd}"))
        return real(fd)

    monkeypatch.setattr(os, "fsync", recording)
    write_json_atomic(tmp_path / "doc.json", {"a": 1})
    assert len(synced) == 2 and synced[0].endswith(".partial") and synced[1] == str(tmp_path)
