"""The standard benchmark workloads are built as documented and ``chirpsift bench``
prints its table. Nothing here times anything: speed is measured in ``bench/`` and by
``chirpsift bench``, never asserted in tests."""

import json
import re
import statistics
from pathlib import Path

import chirpsift
import numpy as np
import pytest
from chirpsift import benchmarks
from chirpsift.benchmarks.suite import SCALING_NOTE, scaling_summary
from chirpsift.cli.bench import QUICK_SECONDS
from chirpsift.synthetic import colored_gaussian_noise

TINY = 0.004  # smoke-test scale: a few templates, shortened data
ROOT = Path(__file__).resolve().parents[1]


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
    mc = b.mchirp
    assert np.allclose(np.diff(mc), np.diff(mc)[0], rtol=1e-9)
    # chirp mass of equal masses m: m 2^(-1/5) (from Mc = (m1 m2)^(3/5) / M^(1/5))
    assert mc[0] == pytest.approx(1.2 * 2**-0.2)
    assert mc[-1] == pytest.approx(2.0 * 2**-0.2)


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
    assert not tiny.templates_fit
    assert tiny.valid() == (tiny.segment_samples // 4, 3 * tiny.segment_samples // 4)
    assert q.templates_fit and q.valid()[0] > 0


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


def test_workload_settings_are_the_search_defaults():
    w = benchmarks.workload("W1", TINY)
    assert w.settings == chirpsift.SearchSettings(f_low=20.0, segment_duration=w.segment_duration)
    kw = w.filter_kwargs()
    assert kw["min_snr"] == chirpsift.SearchSettings.min_snr and kw["chi2_bands"] == chirpsift.SearchSettings.chi2_bands
    assert kw["cluster_samples"] == round(chirpsift.SearchSettings.peak_window * w.sample_rate)


def test_scaling_is_judged_on_the_median():
    # the seven 2-thread ratios of one shared 2-core machine quoted in the README
    ratios = [1.51, 1.61, 1.72, 1.82, 1.83, 1.84, 1.89]
    s = scaling_summary(ratios, threads=2)
    assert s["median"] == np.median(ratios) == 1.82
    assert (s["low"], s["high"], s["target"]) == (1.51, 1.89, 1.8)
    assert s["met"] is True  # although the slowest single run missed the target
    assert scaling_summary([1.5, 1.7, 1.95], threads=2)["met"] is False
    assert scaling_summary([3.5], threads=4)["met"] is False
    with pytest.raises(ValueError, match="at least one"):
        scaling_summary([], threads=2)


def test_main_quick_tiny_prints_every_measurement(tmp_path, capsys):
    out = tmp_path / "bench.json"
    before = chirpsift.get_threads()
    rc = benchmarks.main(["--quick", "--scale", str(TINY), "--threads", "2", "--repeats", "1",
                          "--scaling-runs", "3", "--quiet", "--json", str(out)])
    assert rc == 0
    table = capsys.readouterr().out
    doc = json.loads(out.read_text())
    keys = [m["key"] for m in doc["measurements"]]
    assert len(keys) == len(set(keys))  # unique
    assert {"yardstick_ifft_ms", "w1_fused_per_ifft", "w2_over_w1_per_template", "w1_speedup_over_reference",
            "w1_thread_scaling", "w1_thread_scaling_range", "w1_identical_across_threads",
            "w1_generation_in_kernel_per_fused", "w3_peak_rss_ratio", "w3_peak_rss_small_mib",
            "w3_peak_rss_full_mib", "w1_search_quarter_bank_per_ifft", "w1_search_full_bank_per_ifft",
            "slides_background_s", "slides_identical_to_loop"} <= set(keys)
    by_key = {m["key"]: m for m in doc["measurements"]}
    assert by_key["slides_identical_to_loop"]["met"] is True
    # the scaling row is the median of the paired runs, its verdict the median's
    ratios = doc["context"]["thread_scaling_ratios"]
    assert len(ratios) == 3
    scaling = by_key["w1_thread_scaling"]
    assert scaling["value"] == pytest.approx(statistics.median(ratios), rel=1e-3)
    assert scaling["met"] == (statistics.median(ratios) >= 1.8)
    assert by_key["w1_thread_scaling_range"]["value"] == f"{min(ratios):.3g} - {max(ratios):.3g}"
    assert SCALING_NOTE in table and "README" in SCALING_NOTE
    lines = table.splitlines()
    assert lines[0] == "| measurement | value | target | met |"
    for m in doc["measurements"]:
        assert any(line.startswith(f"| {m['name']} |") for line in lines), m["name"]
    for label in ("CPU", "cores available", "threads", "numpy / chirpsift", "date (UTC)"):
        assert label in table
    assert doc["context"]["threads"] == 2 and doc["context"]["scale"] == TINY
    assert doc["context"]["cpu"]
    # every ratio is a finite positive number (the range row: two of them); a targeted
    # row says whether it is met
    for m in doc["measurements"]:
        if m["unit"] == "x" and m["value"] is not None:
            values = [float(v) for v in m["value"].split(" - ")] if isinstance(m["value"], str) else [m["value"]]
            assert all(np.isfinite(v) and v > 0 for v in values), m
        if m["target"]:
            assert isinstance(m["met"], bool)
    assert chirpsift.get_threads() == before  # restored


def test_main_rejects_bad_arguments(capsys):
    assert benchmarks.main(["--workloads", "W1,W9"]) == 2
    assert "W9" in capsys.readouterr().err
    assert benchmarks.main(["--scale", "-1"]) == 2
    assert "--scale" in capsys.readouterr().err
    assert benchmarks.main(["--threads", "0"]) == 2
    assert benchmarks.main(["--no-such-option"]) == 2
    assert benchmarks.main(["--help"]) == 0
    assert "--workloads" in capsys.readouterr().out


def test_quick_time_in_help_matches_the_docs(capsys):
    # one measured figure for `--quick`, the same in the help, the README and the guide
    assert benchmarks.main(["--help"]) == 0
    help_text = " ".join(capsys.readouterr().out.split())
    assert f"about {QUICK_SECONDS} s" in help_text
    for doc in ("README.md", "DEVELOPERS.md"):
        text = " ".join((ROOT / doc).read_text(encoding="utf-8").split())
        quoted = {int(x) for x in re.findall(r"--quick.{0,80}?about (\d+) s", text)}
        assert quoted == {QUICK_SECONDS}, doc


def test_cli_forwards_to_benchmarks(capsys):
    from chirpsift.cli import main as cli_main

    assert cli_main(["bench", "--workloads", "nope"]) == 2
    assert "unknown workload" in capsys.readouterr().err


def test_table_marks_rows_not_measured():
    rows = [benchmarks.Measurement("w1_thread_scaling", "thread scaling", None, "x"),
            benchmarks.Measurement("w1_fused_per_ifft", "ratio", 0.5, "x", "<= 1.3", True)]
    text = benchmarks.format_table(rows, {"cpu": "test cpu", "workloads": {}})
    assert "| thread scaling | not measured | n/a |  |" in text
    assert "| ratio | 0.5 x | <= 1.3 | yes |" in text
