"""Tests for the command line (chirpsift.cli) and its configuration files (chirpsift.config).

The end-to-end search test injects a signal of known time and masses into synthetic
Gaussian noise and checks that the loudest trigger written by ``chirpsift search``
lies at the injected time; the truth comes from the injection, not from this code.
Exit-status conventions are those of common command-line practice (0 success, 2 usage
error, as argparse itself uses).
"""

import json
import math
import os
import sys

import numpy as np
import pytest

from chirpsift.bank import Bank
from chirpsift.cli import main
from chirpsift.config import load_config, merge_settings

chirpsift = pytest.importorskip("chirpsift")
HAVE_SEARCH = callable(getattr(chirpsift, "search", None))
needs_search = pytest.mark.skipif(not HAVE_SEARCH, reason="chirpsift.search is not available")


# ---------------------------------------------------------------------------
# config files
# ---------------------------------------------------------------------------
def test_config_maps_keys_and_resolves_paths(tmp_path):
    p = tmp_path / "run.toml"
    p.write_text(
        """
[input]
strain = "data/site_a.npz"
bank = "/abs/bank.parquet"
sample-rate = 1024
t0 = 12.5

[search]
f-low = 30
segment-duration = 32.0
min-snr = 6.0
peak-window = 0.5
chi2-bands = 8
gate-threshold = 40.0
welch-duration = 2.0
bank-cluster = true
"""
    )
    cfg = load_config(p)
    assert cfg.input == {
        "strain": str(tmp_path / "data" / "site_a.npz"),
        "bank": "/abs/bank.parquet",
        "sample_rate": 1024.0,
        "t0": 12.5,
    }
    assert cfg.search == {
        "f_low": 30.0,
        "segment_duration": 32.0,
        "min_snr": 6.0,
        "peak_window": 0.5,
        "chi2_bands": 8,
        "gate_threshold": 40.0,
        "welch_duration": 2.0,
        "bank_cluster": True,
    }


def test_config_unknown_key_lists_allowed(tmp_path):
    p = tmp_path / "run.toml"
    p.write_text("[search]\nflow = 20\n")
    with pytest.raises(ValueError, match=r"unknown key\(s\) \['flow'\] in \[search\]") as e:
        load_config(p)
    for key in ("f-low", "segment-duration", "min-snr", "bank-cluster"):
        assert key in str(e.value)
    p.write_text("[output]\nx = 1\n")
    with pytest.raises(ValueError, match="allowed tables"):
        load_config(p)


@pytest.mark.parametrize(
    "body, pattern",
    [
        ("[search]\nf-low = -3\n", "f-low must be positive"),
        ("[search]\nchi2-bands = 2.5\n", "chi2-bands must be a positive integer"),
        ("[search]\nbank-cluster = 1\n", "bank-cluster must be true or false"),
        ("[search]\nmin-snr = 'high'\n", "min-snr must be a number"),
        ("[input]\nstrain = 3\n", "strain must be a non-empty string"),
        ("[search\n", "invalid TOML"),
    ],
)
def test_config_bad_values(tmp_path, body, pattern):
    p = tmp_path / "run.toml"
    p.write_text(body)
    with pytest.raises(ValueError, match=pattern):
        load_config(p)


def test_config_missing_file(tmp_path):
    with pytest.raises(FileNotFoundError, match="none.toml"):
        load_config(tmp_path / "none.toml")


def test_merge_cli_overrides_file():
    merged = merge_settings({"f_low": 20.0, "chi2_bands": 16}, {"f_low": 30.0, "chi2_bands": None, "x": 1})
    assert merged == {"f_low": 30.0, "chi2_bands": 16, "x": 1}


# ---------------------------------------------------------------------------
# command line: usage and input errors (no search needed)
# ---------------------------------------------------------------------------
def test_help_exits_zero(capsys):
    assert main(["--help"]) == 0
    assert "search" in capsys.readouterr().out
    assert main(["search", "--help"]) == 0
    assert "--strain" in capsys.readouterr().out


def test_no_command_is_usage_error(capsys):
    assert main([]) == 2


def test_bad_flag_value_is_usage_error(capsys):
    assert main(["search", "--f-low", "-5"]) == 2
    assert "positive" in capsys.readouterr().err


def test_missing_strain_file_reports_without_traceback(tmp_path, capsys):
    bank = tmp_path / "bank.npz"
    Bank.mass_grid(5.0, 6.0, 2).save(bank)
    rc = main(["search", "--strain", str(tmp_path / "absent.npz"), "--bank", str(bank), "--f-low", "30",
               "--output", str(tmp_path / "t.parquet")])
    err = capsys.readouterr().err
    assert rc == 2
    assert err.startswith("chirpsift: error: ") and "absent.npz" in err
    assert "Traceback" not in err


def test_required_inputs_named(tmp_path, capsys):
    assert main(["search", "--bank", "b.npz", "--f-low", "30"]) == 2
    assert "--strain is required" in capsys.readouterr().err
    assert main(["search", "--strain", "s.npz", "--bank", "b.npz"]) == 2
    assert "--f-low is required" in capsys.readouterr().err


def test_missing_output_folder_is_caught_before_reading(tmp_path, capsys):
    rc = main(["search", "--strain", "s.npz", "--bank", "b.npz", "--f-low", "30",
               "--output", str(tmp_path / "nowhere" / "t.parquet")])
    assert rc == 2
    assert "does not exist" in capsys.readouterr().err


def test_bad_sample_rate_in_file_is_input_error(tmp_path, capsys):
    s = tmp_path / "s.npz"
    np.savez(s, strain=np.zeros(64), sample_rate=-1.0)
    b = tmp_path / "b.npz"
    Bank.mass_grid(5.0, 6.0, 2).save(b)
    rc = main(["search", "--strain", str(s), "--bank", str(b), "--f-low", "30", "--output", str(tmp_path / "t.parquet")])
    err = capsys.readouterr().err
    assert rc == 2 and "sample_rate" in err and "s.npz" in err
    assert not (tmp_path / "t.parquet").exists()


def test_bench_hook_without_module(monkeypatch, capsys):
    import importlib

    real = importlib.import_module

    def fake(name, *a, **k):
        if name == "chirpsift.benchmarks":
            raise ModuleNotFoundError("No module named 'chirpsift.benchmarks'", name="chirpsift.benchmarks")
        return real(name, *a, **k)

    monkeypatch.setattr(importlib, "import_module", fake)
    assert main(["bench", "--quick"]) == 2
    assert "chirpsift.benchmarks" in capsys.readouterr().err


def test_bench_hook_forwards_arguments(monkeypatch):
    import types

    seen = {}
    mod = types.ModuleType("chirpsift.benchmarks")
    mod.main = lambda args: seen.setdefault("args", args) and 0
    monkeypatch.setitem(sys.modules, "chirpsift.benchmarks", mod)
    assert main(["bench", "--quick", "-n", "3"]) == 0
    assert seen["args"] == ["--quick", "-n", "3"]


def test_unexpected_failure_exits_one(tmp_path, monkeypatch, capsys):
    s = tmp_path / "s.npz"
    np.savez(s, strain=np.zeros(1024), sample_rate=64.0, t0=0.0)
    b = tmp_path / "b.npz"
    Bank.mass_grid(5.0, 6.0, 2).save(b)

    def boom(*a, **k):
        raise RuntimeError("kernel exploded")

    monkeypatch.setattr(chirpsift.pipeline, "search", boom)
    rc = main(["search", "--strain", str(s), "--bank", str(b), "--f-low", "30", "--output", str(tmp_path / "t.parquet")])
    err = capsys.readouterr().err
    assert rc == 1 and "kernel exploded" in err
    assert not (tmp_path / "t.parquet").exists() and not (tmp_path / "t.json").exists()


# ---------------------------------------------------------------------------
# end to end with the real search
# ---------------------------------------------------------------------------
@pytest.fixture(scope="module")
def small_run(tmp_path_factory):
    """64 s at 1024 Hz of design-curve noise for an invented Site B, with one 10+8 Msun
    inspiral (about 2 s long from 30 Hz) at optimal SNR 15."""
    from chirpsift.synthetic import colored_gaussian_noise, inject_taylorf2, optimal_snr

    d = tmp_path_factory.mktemp("cli")
    fs, n, t0 = 1024.0, 64 * 1024, 2000.0
    tc = t0 + 41.3
    rho1 = optimal_snr(10.0, 8.0, psd="gen2-zero-detuned", f_low=30.0, sample_rate=fs, n=n)
    noise = colored_gaussian_noise(n, fs, "gen2-zero-detuned", seed=31)
    data = inject_taylorf2(noise, fs, m1=10.0, m2=8.0, t_coalescence=tc, distance=rho1 / 15.0, f_low=30.0, t0=t0)
    np.savez(d / "site_b.npz", strain=data, sample_rate=fs, t0=t0)
    Bank.mass_grid(7.0, 11.0, 5).save(d / "bank.parquet")
    return dict(dir=d, tc=tc, fs=fs, t0=t0, n=n)


@needs_search
def test_search_end_to_end(small_run, capsys):
    d = small_run["dir"]
    out = d / "triggers.parquet"
    summary = d / "run.json"
    argv = ["search", "--strain", str(d / "site_b.npz"), "--bank", str(d / "bank.parquet"), "--f-low", "30",
            "--segment-duration", "32", "--threads", "2", "--output", str(out), "--summary", str(summary),
            "--no-progress"]
    rc = main(argv)
    captured = capsys.readouterr()
    assert rc == 0, captured.err
    assert "triggers" in captured.out and "Loudest" in captured.out

    from chirpsift.io import read_triggers

    trig, meta = read_triggers(out)
    doc = json.loads(summary.read_text())
    assert meta["counts"] == doc["counts"]
    assert doc["counts"]["triggers"] == len(trig) > 0
    assert doc["counts"]["templates"] == 15
    assert doc["inputs"]["strain"]["path"] == os.path.abspath(d / "site_b.npz")
    assert doc["inputs"]["strain"]["sample_rate"] == small_run["fs"]
    assert doc["settings"]["f_low"] == 30.0 and doc["settings"]["segment_duration"] == 32.0
    assert set(doc["versions"]) == {"chirpsift", "numpy", "python"}
    assert doc["wall_time_s"] > 0
    # the loudest trigger is the injection: within a few samples plus the clustering
    # window's resolution of the injected coalescence time
    loud = doc["loudest"]
    assert abs(loud["time"] - small_run["tc"]) < 0.05
    assert loud["snr"] > 8.0
    # and every analysed interval lies inside the data
    t0, t_end = small_run["t0"], small_run["t0"] + small_run["n"] / small_run["fs"]
    assert all(t0 <= a < b <= t_end for a, b in doc["analysed"])


@needs_search
def test_search_from_config_with_cli_override(small_run, capsys):
    d = small_run["dir"]
    cfg = d / "run.toml"
    cfg.write_text(
        '[input]\nstrain = "site_b.npz"\nbank = "bank.parquet"\n\n'
        "[search]\nf-low = 30\nsegment-duration = 32\nmin-snr = 50\n"
    )
    out = d / "cfg.parquet"
    rc = main(["search", "--config", str(cfg), "--min-snr", "6", "--output", str(out), "--no-progress"])
    assert rc == 0, capsys.readouterr().err
    doc = json.loads((d / "cfg.json").read_text())
    assert doc["settings"]["min_snr"] == 6.0
    assert doc["inputs"]["config"] == os.path.abspath(cfg)
    assert doc["counts"]["triggers"] > 0


@needs_search
def test_search_leaves_out_nan_runs(small_run, tmp_path, capsys):
    d = small_run["dir"]
    with np.load(d / "site_b.npz") as z:
        data = z["strain"].copy()
    data[5000:5100] = np.nan
    np.savez(tmp_path / "gappy.npz", strain=data, sample_rate=small_run["fs"], t0=small_run["t0"])
    with pytest.warns(UserWarning, match="non-finite"):
        rc = main(["search", "--strain", str(tmp_path / "gappy.npz"), "--bank", str(d / "bank.parquet"),
                   "--f-low", "30", "--segment-duration", "32", "--output", str(tmp_path / "t.parquet"),
                   "--summary", str(tmp_path / "run.json"), "--no-progress"])
    err = capsys.readouterr().err
    # the finite stretches around the NaN run are searched; the run itself is not analysed
    assert rc == 0, err
    doc = json.loads((tmp_path / "run.json").read_text())
    nan_start, nan_stop = small_run["t0"] + 5000 / small_run["fs"], small_run["t0"] + 5100 / small_run["fs"]
    assert doc["analysed"] and all(b <= nan_start or a >= nan_stop for a, b in doc["analysed"])
    assert any(a <= small_run["tc"] < b for a, b in doc["analysed"])


@needs_search
def test_demo_runs(capsys, tmp_path):
    rc = main(["demo", "--duration", "512", "--threads", "2", "--no-progress", "--output-dir", str(tmp_path)])
    out = capsys.readouterr().out
    assert rc == 0
    assert "Site A" in out and "injected" in out and "loudest" in out
    doc = json.loads((tmp_path / "summary.json").read_text())
    inj = doc["injection"]
    assert abs(doc["loudest"]["time"] - inj["time"]) < 0.05
    # recovered SNR of an optimal-SNR-12 signal in unit-variance noise: 12 +- a few
    assert math.isfinite(doc["loudest"]["snr"]) and abs(doc["loudest"]["snr"] - 12.0) < 5.0
