"""Tests for chirpsift.bank.Bank.

Outside references: the textbook definitions of total mass, symmetric mass ratio and
chirp mass (e.g. Cutler & Flanagan 1994, PRD 49, 2658: Mc = (m1 m2)^(3/5) / M^(1/5),
eta = m1 m2 / M^2), numpy's structured arrays and pyarrow's Parquet reader.
"""

import itertools
import re

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from chirpsift.bank import BANK_FORMAT, BANK_VERSION, Bank

pq = pytest.importorskip("pyarrow.parquet")
pa = pytest.importorskip("pyarrow")


@pytest.fixture
def bank():
    return Bank([1.4, 10.0, 30.0, 2.0], [1.3, 8.0, 25.0, 1.1], [0.0, 0.5, -0.9, 0.1], [0.0, -0.2, 0.3, 0.0])


def test_arrays_are_float64_and_read_only(bank):
    for name in ("m1", "m2", "chi1", "chi2"):
        arr = getattr(bank, name)
        assert arr.dtype == np.float64 and arr.shape == (4,)
        with pytest.raises(ValueError):
            arr[0] = 1.0


def test_inputs_are_copied():
    m1 = np.array([2.0, 3.0])
    b = Bank(m1, [1.0, 1.0])
    m1[0] = 100.0
    assert b.m1[0] == 2.0


def test_derived_masses_match_definitions(bank):
    m1, m2 = bank.m1, bank.m2
    np.testing.assert_allclose(bank.mtotal, m1 + m2, rtol=1e-15)
    np.testing.assert_allclose(bank.eta, m1 * m2 / (m1 + m2) ** 2, rtol=1e-15)
    np.testing.assert_allclose(bank.mchirp, (m1 * m2) ** 0.6 / (m1 + m2) ** 0.2, rtol=1e-15)
    # equal masses: eta = 1/4 and Mc = m 2^(-1/5) (1.4 + 1.4 -> 1.2188 Msun, the commonly quoted value)
    eq = Bank([1.4], [1.4])
    assert eq.eta[0] == pytest.approx(0.25, rel=1e-15)
    assert eq.mchirp[0] == pytest.approx(1.4 * 2 ** -0.2, rel=1e-14)
    assert eq.mchirp[0] == pytest.approx(1.2188, abs=5e-5)


def test_spins_default_to_zero_and_scalars_broadcast():
    b = Bank([1.0, 2.0], [1.0, 1.0])
    np.testing.assert_array_equal(b.chi1, [0.0, 0.0])
    b2 = Bank([1.0, 2.0], [1.0, 1.0], chi1=0.3)
    np.testing.assert_array_equal(b2.chi1, [0.3, 0.3])
    one = Bank(1.4, 1.3)
    assert len(one) == 1


@pytest.mark.parametrize(
    "kwargs, pattern",
    [
        (dict(m1=[1.0, -2.0], m2=[1.0, 1.0]), r"m1 must be positive.*m1\[1\] = -2\.0"),
        (dict(m1=[1.0], m2=[0.0]), r"m2 must be positive.*m2\[0\] = 0\.0"),
        (dict(m1=[1.0, 2.0], m2=[1.0]), r"equal lengths.*2 and 1"),
        (dict(m1=[1.0], m2=[1.0], chi1=[1.0]), r"\|chi1\| < 1.*chi1\[0\] = 1\.0"),
        (dict(m1=[1.0], m2=[1.0], chi2=[-1.5]), r"\|chi2\| < 1.*chi2\[0\] = -1\.5"),
        (dict(m1=[1.0, np.nan], m2=[1.0, 1.0]), r"m1 must be finite.*m1\[1\] = nan"),
        (dict(m1=[1.0], m2=[np.inf]), r"m2 must be finite"),
        (dict(m1=[1.0, 2.0], m2=[1.0, 1.0], chi1=[0.1, 0.2, 0.3]), r"chi1 must have the bank's length 2"),
        (dict(m1=[[1.0, 2.0]], m2=[[1.0, 1.0]]), r"m1 must be 1-D"),
    ],
)
def test_validation_messages(kwargs, pattern):
    with pytest.raises(ValueError, match=pattern):
        Bank(**kwargs)


def test_type_errors():
    with pytest.raises(TypeError, match="m1"):
        Bank(["a"], [1.0])
    with pytest.raises(TypeError, match="complex"):
        Bank([1.0 + 1j], [1.0])


def test_indexing_and_slicing(bank):
    one = bank[1]
    assert isinstance(one, Bank) and len(one) == 1 and one.m1[0] == 10.0
    assert bank[-1].m1[0] == 2.0
    sub = bank[1:3]
    np.testing.assert_array_equal(sub.m2, [8.0, 25.0])
    np.testing.assert_array_equal(bank[[3, 0]].chi1, [0.1, 0.0])
    np.testing.assert_array_equal(bank[bank.m1 > 5].m1, [10.0, 30.0])
    assert len(bank[4:]) == 0
    with pytest.raises(IndexError, match="out of range"):
        bank[4]
    with pytest.raises(IndexError, match="mask"):
        bank[np.array([True, False])]
    with pytest.raises(TypeError, match="index"):
        bank[1.5]


def test_iteration_and_equality(bank):
    rows = list(bank)
    assert rows[1] == (10.0, 8.0, 0.5, -0.2)
    assert Bank.from_any(bank.to_records()) == bank
    assert bank != bank[:2]


def test_to_records(bank):
    rec = bank.to_records()
    assert rec.dtype.names == ("m1", "m2", "chi1", "chi2")
    assert all(rec.dtype[n] == np.float64 for n in rec.dtype.names)
    np.testing.assert_array_equal(rec["chi2"], bank.chi2)


def test_from_any_forms(bank):
    assert Bank.from_any(bank) is bank
    rec = np.zeros(2, dtype=[("m1", "f4"), ("m2", "f8"), ("template", "i8")])
    rec["m1"], rec["m2"] = [3.0, 4.0], [1.0, 2.0]
    b = Bank.from_any(rec)
    np.testing.assert_array_equal(b.m1, [3.0, 4.0])
    np.testing.assert_array_equal(b.chi1, [0.0, 0.0])
    b2 = Bank.from_any({"m1": [3.0], "m2": [1.0], "chi2": [0.4]})
    assert b2.chi2[0] == 0.4
    b3 = Bank.from_any(np.array([[3.0, 1.0, 0.1, 0.2]]))
    assert tuple(next(iter(b3))) == (3.0, 1.0, 0.1, 0.2)


def test_from_any_errors():
    with pytest.raises(ValueError, match=r"missing field\(s\) \['m2'\]"):
        Bank.from_any({"m1": [1.0]})
    with pytest.raises(ValueError, match="spin_1"):
        Bank.from_any({"m1": [1.0], "m2": [1.0], "spin_1": [0.5]})
    with pytest.raises(ValueError, match=r"\(K, 2\) or \(K, 4\)"):
        Bank.from_any(np.zeros((3, 3)))
    with pytest.raises(TypeError, match="list"):
        Bank.from_any([1.0, 2.0])


@pytest.mark.parametrize("ext", [".npz", ".parquet"])
def test_save_load_round_trip(tmp_path, bank, ext):
    p = tmp_path / f"bank{ext}"
    bank.save(p)
    back = Bank.load(p)
    assert back == bank


def test_parquet_layout_is_as_documented(tmp_path, bank):
    p = tmp_path / "bank.parquet"
    bank.save(p)
    table = pq.read_table(p)
    assert table.column_names == ["m1", "m2", "chi1", "chi2"]
    assert all(t == pa.float64() for t in table.schema.types)
    meta = table.schema.metadata
    assert meta[b"format"] == BANK_FORMAT.encode() == b"chirpsift-bank"
    assert meta[b"version"] == str(BANK_VERSION).encode() == b"1"


def test_npz_layout_is_as_documented(tmp_path, bank):
    p = tmp_path / "bank.npz"
    bank.save(p)
    with np.load(p) as z:
        assert set(z.files) == {"m1", "m2", "chi1", "chi2", "format", "version", "metadata"}
        assert str(z["format"]) == "chirpsift-bank" and int(z["version"]) == 1
        assert json.loads(str(z["metadata"])) == {}


def test_load_foreign_parquet_without_spins(tmp_path):
    p = tmp_path / "plain.parquet"
    pq.write_table(pa.table({"m1": [5.0, 6.0], "m2": [5.0, 1.0]}), p)
    b = Bank.load(p)
    np.testing.assert_array_equal(b.m2, [5.0, 1.0])
    np.testing.assert_array_equal(b.chi1, [0.0, 0.0])


def test_load_errors(tmp_path):
    with pytest.raises(FileNotFoundError, match="nothing.npz"):
        Bank.load(tmp_path / "nothing.npz")
    p = tmp_path / "bank.csv"
    p.write_text("m1,m2\n")
    with pytest.raises(ValueError, match="unknown bank file extension"):
        Bank.load(p)
    p = tmp_path / "wrong.npz"
    np.savez(p, m1=[1.0], m2=[1.0], format="something-else")
    with pytest.raises(ValueError, match="format marker"):
        Bank.load(p)
    p = tmp_path / "newer.parquet"
    t = pa.table({"m1": [1.0], "m2": [1.0]}).replace_schema_metadata({"format": "chirpsift-bank", "version": "2"})
    pq.write_table(t, p)
    with pytest.raises(ValueError, match="version 2 is newer"):
        Bank.load(p)
    p = tmp_path / "bad.npz"
    np.savez(p, m1=[1.0, -1.0], m2=[1.0, 1.0])
    with pytest.raises(ValueError, match=r"bad\.npz.*m1\[1\] = -1\.0"):
        Bank.load(p)
    p = tmp_path / "nom2.npz"
    np.savez(p, m1=[1.0])
    with pytest.raises(ValueError, match=r"missing column\(s\) \['m2'\]"):
        Bank.load(p)


def test_save_unknown_extension(tmp_path, bank):
    with pytest.raises(ValueError, match="unknown bank file extension"):
        bank.save(tmp_path / "bank.txt")


def test_mass_grid_against_enumeration():
    b = Bank.mass_grid(1.3, 1.5, 5)
    grid = np.linspace(1.3, 1.5, 5)
    expected = sorted((a, c) for a, c in itertools.product(grid, grid) if a >= c)
    assert len(b) == 5 * 6 // 2
    assert sorted(zip(b.m1.tolist(), b.m2.tolist())) == expected
    assert np.all(b.m1 >= b.m2)
    assert np.all(b.chi1 == 0) and np.all(b.chi2 == 0)
    assert len(Bank.mass_grid(2.0, 2.0, 1)) == 1


@pytest.mark.parametrize(
    "args, exc, pattern",
    [
        ((0.0, 2.0, 3), ValueError, "m_min"),
        ((3.0, 2.0, 3), ValueError, "m_max"),
        ((1.0, 2.0, 0), ValueError, "n must be at least 1"),
        ((1.0, 2.0, 1), ValueError, "n=1"),
        ((1.0, 2.0, 2.5), TypeError, "n must be an integer"),
    ],
)
def test_mass_grid_errors(args, exc, pattern):
    with pytest.raises(exc, match=pattern):
        Bank.mass_grid(*args)


@settings(max_examples=100, deadline=None)
@given(
    st.lists(
        st.tuples(
            st.floats(0.1, 500), st.floats(0.1, 500), st.floats(-0.99, 0.99), st.floats(-0.99, 0.99)
        ),
        min_size=1,
        max_size=20,
    )
)
def test_records_round_trip_property(rows):
    arr = np.array(rows)
    b = Bank.from_any(arr)
    assert Bank.from_any(b.to_records()) == b
    assert np.all(b.eta <= 0.25 + 1e-15) and np.all(b.mchirp <= b.mtotal)


@pytest.mark.parametrize("suffix", [".npz", ".parquet"])
@pytest.mark.parametrize("cut", [0, 10, 0.5])
def test_damaged_bank_file_is_a_value_error_naming_the_file(tmp_path, suffix, cut):
    # An empty or truncated bank file must be reported as bad input (exit 2 on the command
    # line), naming the file, not leak the parser's own exception.
    good = tmp_path / f"good{suffix}"
    Bank.mass_grid(1.0, 2.0, 3).save(good)
    data = good.read_bytes()
    keep = int(len(data) * cut) if isinstance(cut, float) else cut
    bad = tmp_path / f"bad{suffix}"
    bad.write_bytes(data[:keep])
    with pytest.raises(ValueError, match=re.escape(str(bad))):
        Bank.load(bad)
