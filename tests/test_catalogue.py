"""Strain catalogues and veto files: placing files on the time line from their headers,
reading samples back block by block, and clear errors for files that do not fit."""

import os
import tracemalloc

import h5py
import numpy as np
import pytest

from chirpsift.io.catalogue import read_catalogue
from chirpsift.io.strain import TIME_STEP_TOLERANCE
from chirpsift.io.vetoes import check_vetoes, read_vetoes

FS = 128.0
T0 = 1_200_000_000.0  # start times of order 1e9 s, where float64 resolves ~1e-7 s


def _samples(n, seed):
    return np.random.default_rng(seed).standard_normal(n)


def _npz(folder, name, x, t0, fs=FS, compressed=False):
    path = os.path.join(folder, name)
    (np.savez_compressed if compressed else np.savez)(path, strain=x, sample_rate=fs, t0=t0)
    return path


def _h5(folder, name, x, t0, fs=FS):
    path = os.path.join(folder, name)
    with h5py.File(path, "w") as f:
        ds = f.create_dataset("site/strain", data=x, chunks=(min(100, len(x)),))
        ds.attrs["sample_rate"] = fs
        ds.attrs["t0"] = t0
    return path


def test_files_in_any_order_make_spans_and_gaps_as_their_times_say(tmp_path):
    # Outside truth: the (start, samples) of each file as written.
    written = [(T0 + 40.0, 20), (T0, 20), (T0 + 20.0, 20), (T0 + 100.0, 30), (T0 + 70.0, 30)]  # seconds
    for i, (t0, sec) in enumerate(written):
        _npz(tmp_path, f"part{i}.npz", _samples(int(sec * FS), i), t0)
    cat = read_catalogue(str(tmp_path / "part*.npz"))
    assert [f.t0 for f in cat.files] == sorted(t for t, _ in written)
    assert [(s.t0, s.end) for s in cat.spans] == [(T0, T0 + 60.0), (T0 + 70.0, T0 + 130.0)]
    assert [len(s.files) for s in cat.spans] == [3, 2]
    assert cat.gaps == [(T0 + 60.0, T0 + 70.0)]
    assert cat.covered == sum(sec for _, sec in written)
    assert (cat.start, cat.end) == (T0, T0 + 130.0)


def test_a_file_missing_in_the_middle_is_a_gap(tmp_path):
    paths = [_npz(tmp_path, f"hour{i}.npz", _samples(int(10 * FS), i), T0 + 10.0 * i) for i in range(4)]
    os.remove(paths[2])
    cat = read_catalogue(str(tmp_path / "hour*.npz"))
    assert len(cat.spans) == 2
    assert cat.gaps == [(T0 + 20.0, T0 + 30.0)]


@pytest.mark.parametrize("shift, spans", [(0.5 * TIME_STEP_TOLERANCE, 1), (2 * TIME_STEP_TOLERANCE, 2)])
def test_abutting_means_within_the_tolerance_in_samples(tmp_path, shift, spans):
    # Tolerance stated in samples: a start 0.05 sample late still abuts, 0.2 is a gap.
    _npz(tmp_path, "a.npz", _samples(256, 1), T0)
    _npz(tmp_path, "b.npz", _samples(256, 2), T0 + (256 + shift) / FS)
    assert len(read_catalogue(str(tmp_path / "*.npz")).spans) == spans


def test_overlapping_files_are_an_error_naming_both(tmp_path):
    a = _npz(tmp_path, "a.npz", _samples(256, 1), T0)
    b = _npz(tmp_path, "b.npz", _samples(256, 2), T0 + 1.5)  # a ends at T0 + 2 s
    with pytest.raises(ValueError, match="overlaps") as err:
        read_catalogue([b, a])
    assert a in str(err.value) and b in str(err.value) and "0.5 s" in str(err.value)


def test_mismatched_sample_rates_are_an_error_naming_both(tmp_path):
    a = _npz(tmp_path, "a.npz", _samples(256, 1), T0)
    b = _npz(tmp_path, "b.npz", _samples(512, 2), T0 + 2.0, fs=256.0)
    with pytest.raises(ValueError, match="sample rate") as err:
        read_catalogue([a, b])
    assert a in str(err.value) and b in str(err.value)


@pytest.mark.parametrize("kind", ["npz", "npz-compressed", "npy", "hdf5"])
def test_span_reads_the_samples_numpy_and_h5py_read(tmp_path, kind):
    # Outside truth: the arrays as written (np.load / h5py would give the same).
    parts = [_samples(n, i).astype(np.float32 if i == 1 else np.float64) for i, n in enumerate([300, 257, 410])]
    starts = np.cumsum([0] + [p.size for p in parts])[:-1] / FS + T0
    paths = []
    for i, (x, t0) in enumerate(zip(parts, starts)):
        if kind.startswith("npz"):
            paths.append(_npz(tmp_path, f"p{i}.npz", x, t0, compressed=kind == "npz-compressed"))
        elif kind == "npy":
            paths.append(str(tmp_path / f"p{i}.npy"))
            np.save(paths[-1], x)
        else:
            paths.append(_h5(tmp_path, f"p{i}.h5", x, t0))
    extra = {"npy": dict(sample_rate=FS, t0={p: t for p, t in zip(paths, starts)}),
             "hdf5": dict(dataset="site/strain")}.get(kind, {})
    cat = read_catalogue(paths[::-1], **extra)
    (span,) = cat.spans
    whole = np.concatenate(parts).astype(np.float64)
    assert span.n == whole.size
    for a, b in [(0, whole.size), (290, 310), (299, 300), (300, 557), (10, 900), (556, 558), (5, 5)]:
        got = span.read(a, b)
        assert got.dtype == np.float64
        np.testing.assert_array_equal(got, whole[a:b])


@pytest.mark.parametrize("kind", ["npz", "npy", "hdf5"])
def test_reading_the_catalogue_reads_headers_not_samples(tmp_path, kind):
    # Outside truth: the file's size on disk. numpy reports its allocations to
    # tracemalloc, so loading the samples would show up as a peak of that size.
    x = _samples(200_000, 3)  # 1.6 MB
    if kind == "npz":
        path = _npz(tmp_path, "big.npz", x, T0)
        extra = {}
    elif kind == "npy":
        path = str(tmp_path / "big.npy")
        np.save(path, x)
        extra = dict(sample_rate=FS, t0=T0)
    else:
        path = _h5(tmp_path, "big.h5", x, T0)
        extra = dict(dataset="site/strain")
    tracemalloc.start()
    try:
        cat = read_catalogue(path, **extra)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert cat.files[0].n == x.size
    assert peak < os.path.getsize(path) / 20


def test_file_problems_are_errors_naming_the_file(tmp_path):
    text = tmp_path / "a.txt"
    np.savetxt(text, _samples(10, 1))
    with pytest.raises(ValueError, match="text strain files .*convert") as err:
        read_catalogue(str(text), sample_rate=FS, t0=T0)
    assert str(text) in str(err.value)
    npy = str(tmp_path / "b.npy")
    np.save(npy, _samples(10, 1))
    with pytest.raises(ValueError, match=r"b\.npy: no start time"):
        read_catalogue(npy, sample_rate=FS)
    no_rate = str(tmp_path / "c.npz")
    np.savez(no_rate, strain=_samples(10, 1), t0=T0)
    with pytest.raises(ValueError, match=r"c\.npz: no sample rate"):
        read_catalogue(no_rate)
    stored = _npz(tmp_path, "d.npz", _samples(10, 1), T0)
    with pytest.raises(ValueError, match=r"d\.npz: t0=.* conflicts"):
        read_catalogue(stored, t0=T0 + 1.0)
    no_strain = str(tmp_path / "e.npz")
    np.savez(no_strain, data=_samples(10, 1), sample_rate=FS, t0=T0)
    with pytest.raises(ValueError, match=r"e\.npz: .*no array named 'strain'"):
        read_catalogue(no_strain)
    h5 = _h5(tmp_path, "f.h5", _samples(10, 1), T0)
    with pytest.raises(ValueError, match=r"f\.h5: no dataset named 'strain' .*site/strain"):
        read_catalogue(h5, dataset="strain")
    two_d = str(tmp_path / "g.npz")
    np.savez(two_d, strain=np.zeros((3, 4)), sample_rate=FS, t0=T0)
    with pytest.raises(ValueError, match=r"g\.npz: strain must be 1-D"):
        read_catalogue(two_d)
    broken = tmp_path / "h.npz"
    broken.write_bytes(b"PK\x03\x04 not really")
    with pytest.raises(ValueError, match=r"h\.npz: cannot read"):
        read_catalogue(str(broken))


def test_naming_problems_are_clear(tmp_path):
    with pytest.raises(FileNotFoundError, match="matches no strain files"):
        read_catalogue(str(tmp_path / "*.h5"))
    with pytest.raises(FileNotFoundError, match="not found"):
        read_catalogue(str(tmp_path / "nothing.npz"))
    a = _npz(tmp_path, "a.npz", _samples(10, 1), T0)
    with pytest.raises(ValueError, match="listed twice"):
        read_catalogue([a, str(tmp_path / "." / "a.npz")])
    with pytest.raises(ValueError, match="is a directory"):
        read_catalogue(str(tmp_path))
    with pytest.raises(ValueError, match="t0 names files not in the catalogue"):
        read_catalogue(a, t0={str(tmp_path / "other.npz"): T0})


def test_samples_within_follows_half_open_times_at_large_start_times(tmp_path):
    # Sample k at T0 + k / FS is vetoed when start <= t < end (common practice: half-open).
    _npz(tmp_path, "a.npz", _samples(1000, 1), T0)
    (span,) = read_catalogue(str(tmp_path / "a.npz")).spans
    k = np.arange(span.n)
    for start, end in [(T0 + 1.0, T0 + 2.0), (T0 + 1.004, T0 + 2.004), (T0 - 5.0, T0 + 0.5), (T0 + 7.5, T0 + 99.0)]:
        inside = np.flatnonzero((start - T0 <= k / FS) & (k / FS < end - T0))
        expected = [(int(inside[0]), int(inside[-1]) + 1)] if inside.size else []
        assert span.samples_within([(start, end)]) == expected


def test_veto_files_in_both_formats(tmp_path):
    text = tmp_path / "vetoes.txt"
    text.write_text("# invented site: a fan and a test tone\n\n1000.5 1003  # fan\n990\t991.25\n1002 1004\n")
    toml = tmp_path / "vetoes.toml"
    toml.write_text("vetoes = [[1000.5, 1003], [990, 991.25], [1002, 1004]]\n")
    expected = [(990.0, 991.25), (1000.5, 1004.0)]  # sorted, overlapping ones merged
    assert read_vetoes(text) == read_vetoes(toml) == expected
    assert check_vetoes(str(text)) == check_vetoes([(1002, 1004), (990, 991.25), (1000.5, 1003)]) == expected


@pytest.mark.parametrize("content, suffix, match", [
    ("1000 999\n", ".txt", r":1: a veto must end after it starts"),
    ("1 2\n1000\n", ".txt", r":2: expected two times"),
    ("1 2\nten 20\n", ".txt", r":2: veto times must be numbers"),
    ("1 inf\n", ".txt", r":1: veto times must be finite"),
    ("veto = [[1, 2]]\n", ".toml", r"unknown key 'veto'; did you mean 'vetoes'"),
    ("vetoes = [[1, 2], [3]]\n", ".toml", r"vetoes\[1\]: a veto is two times"),
    ("vetoes = [[1, 2]\n", ".toml", r"cannot parse as TOML"),
])
def test_bad_veto_files_name_the_line(tmp_path, content, suffix, match):
    path = tmp_path / f"v{suffix}"
    path.write_text(content)
    with pytest.raises(ValueError, match=match) as err:
        read_vetoes(path)
    assert str(path) in str(err.value)
