"""The standard benchmark workloads are built as documented and ``chirpsift bench``
prints its table. Nothing here times anything: speed is measured in ``bench/`` and by
``chirpsift bench``, never asserted in tests."""

import json

import numpy as np
import pytest

import chirpsift
from chirpsift import benchmarks
from chirpsift.synthetic import colored_gaussian_noise

TINY = 0.004  # smoke-test scale: a few templates, shortened data


def _mchirp(bank):
    return (bank.m1 * bank.m2) ** 0.6 / (bank.m1 + bank.m2) ** 0.2


def test_w1_full_size_bank_and_data_shape():
    w = benchmarks.workload("W1")
    b = w.bank
    assert len(b) >= 256
    assert w.sample_rate == 4096.0 and w.duration == 256.0 and w.f_low == 20.0
    assert w.n == 2**20 and w.segment_samples == 2**20 and w.n_freq == 2**19 + 1
    assert w.df == pytest.approx(1 / 256)
    tol = 1e-9
    assert b.m2.min() >= 1.2 - tol and b.m1.max() <= 2.0 + tol
    assert np.all(b.m1 >= b.m2)
    assert np.all(b.chi1 == 0) and np.all(b.chi2 == 0)
    # uniform in chirp mass, end to end over the range the component bounds allow
    mc = _mchirp(b)
    assert np.allclose(np.diff(mc), np.diff(mc)[0], rtol=1e-9)
    assert mc[0] == pytest.approx(_mchirp(chirpsift.Bank(1.2, 1.2))[0])
    assert mc[-1] == pytest.approx(_mchirp(chirpsift.Bank(2.0, 2.0))[0])


def test_w2_spans_total_mass_2_to_40():
    w = benchmarks.workload("W2")
    b = w.bank
    assert len(b) >= 256
    assert b.mtotal.min() == pytest.approx(2.0) and b.mtotal.max() == pytest.approx(40.0)
    assert b.m2.min() >= 1.0 - 1e-12 and np.all(b.m1 >= b.m2)
    w1 = benchmarks.workload("W1")
    assert (w.n, w.sample_rate, w.seed, w.f_low) == (w1.n, w1.sample_rate, w1.seed, w1.f_low)


def test_w3_size_without_generating_data():
    w = benchmarks.workload("W3")
    assert len(w.bank) == 10_000
    assert w.duration == 2048.0 and w.segment_duration == 256.0
    b = w.bank
    assert b.mtotal.min() == pytest.approx(10.0) and b.mtotal.max() == pytest.approx(40.0)
    assert b.m2.min() >= 3.0 - 1e-12
    # the longest template leaves most of every segment analysable
    start, stop = w.valid()
    assert 0 < start < stop and (stop - start) > w.segment_samples // 2


def test_valid_window_follows_the_longest_template():
    w = benchmarks.workload("W1")
    start, stop = w.valid()
    longest = float(np.max(chirpsift.chirp_duration(w.bank.m1, w.bank.m2, w.f_low)))
    assert start > longest * w.sample_rate
    assert stop <= w.segment_samples - 2 * w.sample_rate
    assert w.filter_kwargs()["valid"] == (start, stop)


def test_scale_reduces_templates_and_keeps_data_at_quick_scale():
    q = benchmarks.workload("W1", benchmarks.QUICK_SCALE)
    assert len(q.bank) == round(256 * benchmarks.QUICK_SCALE)
    assert q.n == 2**20
    assert len(benchmarks.workload("W3", benchmarks.QUICK_SCALE).bank) == 2500
    tiny = benchmarks.workload("W1", TINY)
    assert len(tiny.bank) >= 1 and tiny.n < 2**20
    assert tiny.n & (tiny.n - 1) == 0  # still a power of two
    # the tiny bank's templates outlast its data: the window falls back to the middle
    assert tiny.valid() == (tiny.segment_samples // 4, 3 * tiny.segment_samples // 4)


def test_data_are_deterministic_and_match_the_generator():
    w = benchmarks.workload("W1", TINY)
    x = w.strain()
    expected = colored_gaussian_noise(w.n, w.sample_rate, "gen2-zero-detuned", seed=w.seed, f_low=w.f_low)
    np.testing.assert_array_equal(x, expected)
    again = benchmarks.workload("W1", TINY)
    np.testing.assert_array_equal(again.strain(), x)
    assert not x.flags.writeable
    d, psd = w.segment()
    assert d.shape == psd.shape == (w.n_freq,)
    assert np.all(np.isinf(psd[: int(w.f_low / w.df)]))  # nothing below f_low
    assert np.all(np.isfinite(psd[int(np.ceil(w.f_low / w.df)) + 1:]))


def test_banks_are_deterministic_and_checked():
    a = benchmarks.component_mass_bank(37, 1.0, 3.0)
    assert a == benchmarks.component_mass_bank(37, 1.0, 3.0)
    assert len(a) == 37 and a.m2.min() >= 1.0 - 1e-12 and a.m1.max() <= 3.0 + 1e-12
    one = benchmarks.total_mass_bank(1, 5.0, 5.0)
    assert len(one) == 1 and one.mtotal[0] == pytest.approx(5.0)
    with pytest.raises(ValueError):
        benchmarks.component_mass_bank(0, 1.0, 2.0)
    with pytest.raises(ValueError):
        benchmarks.component_mass_bank(4, 2.0, 1.0)
    with pytest.raises(ValueError):
        benchmarks.total_mass_bank(4, 1.0, 10.0, m_min=1.0)
    with pytest.raises(ValueError, match="unknown workload"):
        benchmarks.workload("W4")
    with pytest.raises(ValueError, match="scale"):
        benchmarks.workload("W1", 0.0)


def test_main_quick_tiny_prints_every_measurement(tmp_path, capsys):
    out = tmp_path / "bench.json"
    before = chirpsift.get_threads()
    rc = benchmarks.main(["--quick", "--scale", str(TINY), "--threads", "2", "--repeats", "1", "--quiet",
                          "--json", str(out)])
    assert rc == 0
    table = capsys.readouterr().out
    doc = json.loads(out.read_text())
    keys = {m["key"] for m in doc["measurements"]}
    assert {"a", "b", "c", "d", "e", "e2", "f", "g", "g1", "g2"} <= keys
    lines = table.splitlines()
    assert lines[0] == "| measurement | value | target | met |"
    for m in doc["measurements"]:
        assert any(line.startswith(f"| {m['name']} |") for line in lines), m["name"]
    for label in ("CPU", "cores available", "threads", "numpy / chirpsift", "date (UTC)"):
        assert label in table
    assert doc["context"]["threads"] == 2 and doc["context"]["scale"] == TINY
    assert doc["context"]["cpu"]
    # every ratio is a finite positive number; a targeted row says whether it is met
    for m in doc["measurements"]:
        if m["unit"] == "x" and m["value"] is not None:
            assert np.isfinite(m["value"]) and m["value"] > 0
        if m["target"]:
            assert isinstance(m["met"], bool)
    assert chirpsift.get_threads() == before  # restored


def test_main_rejects_bad_arguments(capsys):
    assert benchmarks.main(["--workloads", "W1,W9"]) == 2
    assert "W9" in capsys.readouterr().err
    assert benchmarks.main(["--scale", "-1"]) == 2
    assert benchmarks.main(["--no-such-option"]) == 2
    assert benchmarks.main(["--help"]) == 0
    assert "--workloads" in capsys.readouterr().out


def test_cli_forwards_to_benchmarks(capsys):
    from chirpsift.cli import main as cli_main

    assert cli_main(["bench", "--workloads", "nope"]) == 2
    assert "unknown workload" in capsys.readouterr().err


def test_table_marks_rows_not_measured():
    rows = [benchmarks.Measurement("e", "thread scaling", None, "x"),
            benchmarks.Measurement("b", "ratio", 0.5, "x", "<= 1.3", True)]
    text = benchmarks.format_table(rows, {"cpu": "test cpu", "workloads": {}})
    assert "| thread scaling | not measured | n/a |  |" in text
    assert "| ratio | 0.5 x | <= 1.3 | yes |" in text
