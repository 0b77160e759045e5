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


def test_npz_round_trip_and_overrides(tmp_path, samples):
    p = tmp_path / "site_b.npz"
    np.savez(p, strain=samples, sample_rate=256.0, t0=42.25)
    s = read_strain(p)
    np.testing.assert_array_equal(s.data, samples)
    assert (s.sample_rate, s.t0) == (256.0, 42.25)
    s2 = read_strain(p, sample_rate=128.0, t0=7.0)
    assert (s2.sample_rate, s2.t0) == (128.0, 7.0)


def test_npz_without_t0_defaults_to_zero(tmp_path, samples):
    p = tmp_path / "a.npz"
    np.savez(p, strain=samples, sample_rate=256.0)
    assert read_strain(p).t0 == 0.0


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
    s3 = read_strain(p, dataset="group/strain", sample_rate=100.0, t0=0.0)
    assert (s3.sample_rate, s3.t0) == (100.0, 0.0)


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
    t = np.arange(100) / 16.0
    t[50] += 1e-3  # 1.6% of a step: far beyond the 1e-6 relative tolerance
    p = tmp_path / "bad.txt"
    np.savetxt(p, np.column_stack([t, np.zeros(100)]))
    with pytest.raises(ValueError, match="not uniformly spaced") as e:
        read_strain(p)
    assert str(p) in str(e.value)


def test_text_conflicting_sample_rate(tmp_path):
    t = np.arange(100) / 16.0
    p = tmp_path / "a.txt"
    np.savetxt(p, np.column_stack([t, np.zeros(100)]))
    with pytest.raises(ValueError, match="disagrees"):
        read_strain(p, sample_rate=32.0)


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
    p = tmp_path / "c.npy"
    np.save(p, np.zeros(4, complex))
    with pytest.raises(TypeError, match="complex"):
        read_strain(p, sample_rate=1.0)


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
