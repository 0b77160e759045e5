"""Tests for the command line (chirpsift.cli) and its configuration files (chirpsift.config).

The end-to-end search test injects a signal of known time and masses into synthetic
Gaussian noise and checks that the loudest trigger written by ``chirpsift search``
lies at the injected time; the truth comes from the injection, not from this code.
Exit-status conventions are those of common command-line practice (0 success, 2 usage
error, as argparse itself uses).
"""

import json
import os
import re
from pathlib import Path

import chirpsift
import numpy as np
import pytest
from chirpsift.bank import Bank
from chirpsift.cli import main
from chirpsift.config import TABLES, keys_table, load_config, merge_settings
from chirpsift.pipeline import SEARCH_OPTIONS, SearchSettings
from chirpsift.triggers import TRIGGER_DTYPE

ROOT = Path(__file__).resolve().parents[1]


def _help(capsys, *argv) -> str:
    assert main([*argv, "--help"]) == 0
    return capsys.readouterr().out


def _flags(help_text: str) -> set:
    return set(re.findall(r"(?<![\w-])--[a-z0-9][a-z0-9-]*", help_text))


# ---------------------------------------------------------------------------
# config files
# ---------------------------------------------------------------------------
def test_config_maps_keys_and_resolves_paths(tmp_path):
    p = tmp_path / "run.toml"
    p.write_text(
        """
[input]
strain = "data/site_a.h5"
dataset = "strain"
sample-rate-attr = "rate"
t0-attr = "start"
bank = "/abs/bank.parquet"

[search]
f-low = 30
segment-duration = 32.0
min-snr = 6.0
peak-window = 0.5
chi2-bands = 8
gate-threshold = 40.0
welch-duration = 2.0
bank-cluster = true

[run]
threads = 2
output = "out/t.parquet"
progress = false
"""
    )
    cfg = load_config(p)
    assert cfg.input == {
        "strain": str(tmp_path / "data" / "site_a.h5"),
        "dataset": "strain",
        "sample_rate_attr": "rate",
        "t0_attr": "start",
        "bank": "/abs/bank.parquet",
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
    assert cfg.run == {"threads": 2, "output": str(tmp_path / "out" / "t.parquet"), "progress": False}


def test_config_unknown_key_names_the_nearest_valid_key(tmp_path):
    p = tmp_path / "run.toml"
    p.write_text("[search]\nflow = 20\n")
    with pytest.raises(ValueError, match=r"\[search\]: unknown key 'flow'; did you mean 'f-low'\?"):
        load_config(p)
    p.write_text("[run]\nthread = 2\n")
    with pytest.raises(ValueError, match=r"\[run\]: unknown key 'thread'; did you mean 'threads'\?"):
        load_config(p)
    p.write_text("[output]\nx = 1\n")
    with pytest.raises(ValueError, match="unknown table or top-level key 'output'"):
        load_config(p)
    p.write_text("f-low = 20\n")
    with pytest.raises(ValueError, match=r"put it under \[search\]"):
        load_config(p)


@pytest.mark.parametrize(
    "body, pattern",
    [
        ("[search]\nf-low = -3\n", "f-low must be positive"),
        ("[search]\nchi2-bands = 2.5\n", "chi2-bands must be an integer"),
        ("[search]\nchi2-bands = 1\n", "chi2-bands must be at least 2"),
        ("[search]\nbank-cluster = 1\n", "bank-cluster must be True or False"),
        ("[search]\nmin-snr = 'high'\n", "min-snr must be a real number"),
        ("[search]\nwelch-duration = 8\nsegment-duration = 4\n",
         "welch-duration=8.0 s is longer than segment-duration"),
        ("[search]\nf-low = 20\nf_low = 30\n", "given twice"),
        ("[input]\nstrain = 3\n", "strain must be a non-empty string"),
        ("[input]\nsample-rate = -1\n", r"\[input\]: sample-rate must be positive"),
        ("[run]\nthreads = 0\n", r"\[run\]: threads must be at least 1"),
        ("[run]\nprogress = 'no'\n", r"\[run\]: progress must be true or false"),
        ("[search\n", "not valid TOML"),
    ],
)
def test_config_bad_values(tmp_path, body, pattern):
    p = tmp_path / "run.toml"
    p.write_text(body)
    with pytest.raises((ValueError, TypeError), match=pattern):
        load_config(p)


def test_config_missing_file(tmp_path):
    with pytest.raises(FileNotFoundError, match="none.toml"):
        load_config(tmp_path / "none.toml")


def test_merge_cli_overrides_file():
    merged = merge_settings({"f_low": 20.0, "chi2_bands": 16}, {"f_low": 30.0, "chi2_bands": None, "x": 1})
    assert merged == {"f_low": 30.0, "chi2_bands": 16, "x": 1}


def test_config_search_table_has_exactly_the_search_options():
    assert [o.key for o in TABLES["search"]] == [o.key for o in SEARCH_OPTIONS]


def test_every_search_flag_has_a_config_key_and_back(capsys):
    flags = _flags(_help(capsys, "search"))
    keys = {f"--{entry.key}" for table in TABLES.values() for entry in table}
    switches = {f"--no-{entry.key}" for table in TABLES.values() for entry in table if entry.kind == "switch"}
    assert flags == keys | switches | {"--help", "--config"}
    for name in ("threads", "output", "summary", "progress"):  # the ones the README once promised
        assert name in {entry.key for entry in TABLES["run"]}


def test_readme_keys_table_matches_the_code():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    assert keys_table() in readme, "regenerate the README table with chirpsift.config.keys_table()"


# ---------------------------------------------------------------------------
# command line: help and usage errors (no search needed)
# ---------------------------------------------------------------------------
def test_help_exits_zero(capsys):
    assert "search" in _help(capsys)
    assert "--strain" in _help(capsys, "search")


def test_help_shows_defaults_units_and_meanings(capsys):
    text = " ".join(_help(capsys, "search").split("options:", 1)[1].split())  # past the usage lines
    assert "--peak-window S half-width of the clustering window" in text
    assert "(default: 1.0 s)" in text and "(default: 5.5)" in text and "(default: 16)" in text
    assert "--f-low HZ" in text and "--welch-duration S" in text
    assert re.search(r"--gate-threshold X whitened amplitude \(in units of the noise standard deviation\)", text)
    # every search option's default appears beside its flag
    for option in SEARCH_OPTIONS:
        default = getattr(SearchSettings, option.name, None)
        if default is not None and not isinstance(default, bool):
            segment = text.split(f"--{option.key} ", 1)[1].split(" --", 1)[0]
            assert f"(default: {default}" in segment, option.key


def test_no_command_is_usage_error(capsys):
    assert main([]) == 2


def test_bad_flag_value_names_the_flag_and_value(capsys):
    assert main(["search", "--f-low", "-5"]) == 2
    err = capsys.readouterr().err
    assert "--f-low" in err and "'-5'" in err and "> 0" in err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err


def test_misspelt_flag_suggests_the_nearest(capsys):
    assert main(["search", "--peak-windw", "1"]) == 2
    err = capsys.readouterr().err
    assert "did you mean --peak-window?" in err and "see chirpsift search --help" in err
    assert len(err.strip().splitlines()) == 1
    assert main(["serch"]) == 2
    assert "did you mean search?" in capsys.readouterr().err


def test_a_flag_that_conflicts_with_the_file_is_named_as_a_flag(inputs, capsys):
    rc = main(["search", "--strain", str(inputs["strain"]), "--sample-rate", "512", "--bank", str(inputs["bank"]),
               "--f-low", "30", "--output", str(inputs["strain"].with_name("t.parquet"))])
    err = capsys.readouterr().err
    assert rc == 2 and "--sample-rate=512.0 Hz conflicts with 256.0 Hz" in err and "argument" not in err


def test_file_errors_point_to_flags_not_python_keywords(tmp_path, capsys):
    s = tmp_path / "s.npy"
    np.save(s, np.zeros(64))
    rc = main(["search", "--strain", str(s), "--bank", "b.npz", "--f-low", "30",
               "--output", str(tmp_path / "t.parquet")])
    err = capsys.readouterr().err
    assert rc == 2 and "pass --sample-rate" in err and "sample_rate (" not in err


def test_settings_errors_name_flags_not_python_keywords(capsys):
    assert main(["search", "--strain", "s.npz", "--bank", "b.npz", "--f-low", "20", "--welch-duration", "8",
                 "--segment-duration", "4"]) == 2
    err = capsys.readouterr().err
    assert "--welch-duration=8.0 s is longer than --segment-duration=4.0 s" in err
    assert "welch_duration" not in err
    assert main(["search", "--strain", "s.npz", "--bank", "b.npz", "--f-low", "20", "--phase-order", "9"]) == 2
    assert "--phase-order must be at most 7" in capsys.readouterr().err


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
    rc = main(["search", "--strain", str(s), "--bank", str(b), "--f-low", "30",
               "--output", str(tmp_path / "t.parquet")])
    err = capsys.readouterr().err
    assert rc == 2 and "sample_rate" in err and "s.npz" in err
    assert not (tmp_path / "t.parquet").exists()


@pytest.mark.parametrize("flag", ["--strain", "--bank", "--config", "--output"])
def test_single_file_options_given_twice_are_refused(tmp_path, capsys, flag):
    # with the last value silently winning, "--strain a --strain b" searched only b
    given = {"--strain": "a.npz", "--bank": "b.npz", "--f-low": "30"}
    argv = ["search", *[x for f, v in given.items() if f != flag for x in (f, v)], flag, "x1", flag, "x2"]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert f"argument {flag}: given twice ('x1' and 'x2')" in err


# ---------------------------------------------------------------------------
# outputs never overwrite inputs, and carry the extension of what they hold
# ---------------------------------------------------------------------------
@pytest.fixture
def inputs(tmp_path):
    s = tmp_path / "site_c.npz"
    np.savez(s, strain=np.random.default_rng(2).normal(size=8192), sample_rate=256.0, t0=0.0)
    b = tmp_path / "bank.parquet"
    Bank.mass_grid(5.0, 6.0, 2).save(b)
    c = tmp_path / "run.toml"
    c.write_text("[search]\nf-low = 30\n")
    return {"strain": s, "bank": b, "config": c}


def _refused(capsys, inputs, extra, flag, value):
    before = {k: p.read_bytes() for k, p in inputs.items()}
    argv = ["search", "--strain", str(inputs["strain"]), "--bank", str(inputs["bank"]), "--config",
            str(inputs["config"]), "--no-progress", *extra]
    rc = main(argv)
    err = capsys.readouterr().err
    assert rc == 2, err
    assert err.startswith(f"chirpsift: error: {flag} {str(value)!r}") and len(err.strip().splitlines()) == 1
    assert {k: p.read_bytes() for k, p in inputs.items()} == before  # nothing overwritten


def test_output_over_the_bank_is_refused(inputs, capsys):
    _refused(capsys, inputs, ["--output", str(inputs["bank"])], "--output", inputs["bank"])


def test_summary_over_an_input_is_refused(inputs, tmp_path, capsys):
    link = tmp_path / "s.json"
    os.link(inputs["config"], link)  # a hard link: another name, the same file
    _refused(capsys, inputs, ["--output", str(tmp_path / "t.parquet"), "--summary", str(link)], "--summary", link)


def test_output_through_a_symbolic_link_to_an_input_is_refused(inputs, tmp_path, capsys):
    link = tmp_path / "t.parquet"
    link.symlink_to(inputs["bank"])
    _refused(capsys, inputs, ["--output", str(link)], "--output", link)


@pytest.mark.parametrize("flag, value", [("--output", "t.csv"), ("--output", "t.npz"), ("--summary", "s.txt")])
def test_output_extension_must_match_what_is_written(inputs, tmp_path, capsys, flag, value):
    target = tmp_path / value
    extra = ["--output", str(tmp_path / "t.parquet")] if flag == "--summary" else []
    _refused(capsys, inputs, [*extra, flag, str(target)], flag, target)
    assert not target.exists()


def test_strain_file_as_output_is_refused_by_extension_and_identity(inputs, tmp_path, capsys):
    strain_pq = tmp_path / "strain_copy.parquet"
    os.link(inputs["strain"], strain_pq)
    inputs = {**inputs, "strain": strain_pq}
    _refused(capsys, inputs, ["--output", str(strain_pq)], "--output", strain_pq)


def test_bench_json_extension_is_checked(tmp_path, capsys):
    assert main(["bench", "--json", str(tmp_path / "out.txt"), "--workloads", "W1", "--quiet"]) == 2
    assert "--json" in capsys.readouterr().err


# ---------------------------------------------------------------------------
# HDF5 attribute names from the command line
# ---------------------------------------------------------------------------
def test_metadata_name_flags_are_refused_where_a_format_has_no_names(tmp_path, capsys):
    s = tmp_path / "s.npy"
    np.save(s, np.zeros(64))
    rc = main(["search", "--strain", str(s), "--sample-rate", "64", "--bank", "b.npz", "--f-low", "30",
               "--t0-attr", "start", "--output", str(tmp_path / "t.parquet")])
    err = capsys.readouterr().err
    assert rc == 2 and "--t0-attr" in err and "t0_attr" not in err


def test_hdf5_missing_attribute_message_points_to_flags(tmp_path, capsys):
    h5py = pytest.importorskip("h5py")
    p = tmp_path / "site_d.h5"
    with h5py.File(p, "w") as f:
        f.create_dataset("strain", data=np.zeros(4096)).attrs["start"] = 10.0
    b = tmp_path / "bank.npz"
    Bank.mass_grid(5.0, 6.0, 2).save(b)
    rc = main(["search", "--strain", str(p), "--dataset", "strain", "--bank", str(b), "--f-low", "30",
               "--output", str(tmp_path / "t.parquet")])
    err = capsys.readouterr().err
    assert rc == 2 and "--sample-rate-attr" in err and "sample_rate_attr" not in err


# ---------------------------------------------------------------------------
# failures and screen wording, with the search replaced
# ---------------------------------------------------------------------------
def test_unexpected_failure_exits_one(tmp_path, monkeypatch, capsys):
    s = tmp_path / "s.npz"
    np.savez(s, strain=np.zeros(1024), sample_rate=64.0, t0=0.0)
    b = tmp_path / "b.npz"
    Bank.mass_grid(5.0, 6.0, 2).save(b)

    def boom(*a, **k):
        raise RuntimeError("kernel exploded")

    monkeypatch.setattr(chirpsift.pipeline, "search", boom)
    rc = main(["search", "--strain", str(s), "--bank", str(b), "--f-low", "30",
               "--output", str(tmp_path / "t.parquet")])
    err = capsys.readouterr().err
    assert rc == 1 and "kernel exploded" in err
    assert not (tmp_path / "t.parquet").exists() and not (tmp_path / "t.json").exists()


def test_warnings_are_one_line_in_the_command_s_words(tmp_path, monkeypatch, capsys):
    import warnings

    s = tmp_path / "s.npz"
    np.savez(s, strain=np.ones(1024), sample_rate=64.0, t0=5.0)
    b = tmp_path / "b.npz"
    Bank([5.0], [5.0]).save(b)
    shown = {}

    def warn_and_find_nothing(strain, sample_rate, bank, *, t0, **kwargs):
        shown["line"] = warnings.formatwarning("gated 2 intervals;\nsee info['gates']", chirpsift.GatingWarning,
                                               "single_site.py", 231)
        warnings.warn("gated 2 intervals", chirpsift.GatingWarning, stacklevel=2)
        return np.zeros(0, dtype=TRIGGER_DTYPE), {"segments": 1, "templates": 1, "analysed": [(t0, t0 + 16.0)],
                                                  "gates": []}

    monkeypatch.setattr(chirpsift.pipeline, "search", warn_and_find_nothing)
    plain = warnings.formatwarning
    with pytest.warns(chirpsift.GatingWarning, match="gated 2 intervals"):
        rc = main(["search", "--strain", str(s), "--bank", str(b), "--f-low", "30",
                   "--output", str(tmp_path / "t.parquet"), "--no-progress"])
    assert rc == 0
    assert shown["line"] == "chirpsift: warning: gated 2 intervals; see 'gates' in the run summary\n"
    assert warnings.formatwarning is plain  # restored when the command returns
    out = capsys.readouterr().out
    assert "Found 0 triggers with SNR >= 5.5." in out and "Loudest" not in out


def test_screen_counts_use_the_singular_for_one(tmp_path, monkeypatch, capsys):
    s = tmp_path / "s.npz"
    np.savez(s, strain=np.ones(1024), sample_rate=64.0, t0=5.0)
    b = tmp_path / "b.npz"
    Bank([5.0], [5.0]).save(b)
    one = np.zeros(1, dtype=TRIGGER_DTYPE)
    one[0] = (9.0, 0, 7.0, 0.1, 1.0, 30.0, 30, 7.0, 5.0, 5.0, 0.0, 0.0)

    def one_trigger(strain, sample_rate, bank, *, t0, **kwargs):
        info = {"segments": 1, "templates": 1, "analysed": [(t0 + 2.0, t0 + 14.0)], "gates": [(t0 + 3.0, t0 + 3.5)]}
        return one, info

    monkeypatch.setattr(chirpsift.pipeline, "search", one_trigger)
    rc = main(["search", "--strain", str(s), "--bank", str(b), "--f-low", "30", "--output", str(tmp_path / "t.parquet"),
               "--no-progress"])
    out = capsys.readouterr().out
    assert rc == 0
    for phrase in ("1 template ", "1 trigger ", "1 segment", "1 gate "):
        assert phrase in out, phrase
    assert not re.search(r"\b1 (triggers|templates|segments|gates)\b", out)
    assert "Analysed 12 s of the 16 s (75.0%)" in out


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
    return dict(dir=d, tc=tc, fs=fs, t0=t0, n=n, data=data)


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
    assert "triggers" in captured.out and "Loudest" in captured.out and "Analysed" in captured.out

    from chirpsift.io import read_triggers

    trig, meta = read_triggers(out)
    doc = json.loads(summary.read_text())
    assert meta["counts"] == doc["counts"]
    assert doc["counts"]["triggers"] == len(trig) > 0
    assert doc["counts"]["templates"] == 15
    assert doc["inputs"]["strain"]["path"] == os.path.abspath(d / "site_b.npz")
    assert doc["inputs"]["strain"]["sample_rate"] == small_run["fs"]
    # the summary records the settings as the settings type gives them
    assert doc["settings"] == SearchSettings(f_low=30.0, segment_duration=32.0).as_dict()
    assert doc["run"]["threads"] == 2
    assert set(doc["versions"]) == {"chirpsift", "numpy", "python"}
    assert doc["wall_time_s"] > 0
    # the loudest trigger is the injection: within a few samples plus the clustering
    # window's resolution of the injected coalescence time
    loud = doc["loudest"]
    assert abs(loud["time"] - small_run["tc"]) < 0.05
    assert loud["snr"] > 8.0
    # every analysed interval lies inside the data, and the fraction is their share of it
    t0, t_end = small_run["t0"], small_run["t0"] + small_run["n"] / small_run["fs"]
    assert all(t0 <= a < b <= t_end for a, b in doc["analysed"])
    assert doc["live_time"] == pytest.approx(sum(b - a for a, b in doc["analysed"]))
    assert doc["analysed_fraction"] == pytest.approx(doc["live_time"] / (t_end - t0))


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


def test_run_table_of_the_config_sets_outputs_and_threads(small_run, tmp_path, capsys):
    d = small_run["dir"]
    (tmp_path / "results").mkdir()
    cfg = tmp_path / "run.toml"
    cfg.write_text(
        f'[input]\nstrain = "{d / "site_b.npz"}"\nbank = "{d / "bank.parquet"}"\n\n'
        "[search]\nf-low = 30\nsegment-duration = 32\n\n"
        '[run]\nthreads = 1\noutput = "results/t.parquet"\nsummary = "results/s.json"\nprogress = false\n'
    )
    rc = main(["search", "--config", str(cfg)])
    captured = capsys.readouterr()
    assert rc == 0, captured.err
    assert "chirpsift search" not in captured.err  # no progress bar
    doc = json.loads((tmp_path / "results" / "s.json").read_text())
    assert (tmp_path / "results" / "t.parquet").exists()
    assert doc["run"]["threads"] == 1


def test_hdf5_attributes_named_on_the_command_line(small_run, tmp_path, capsys):
    h5py = pytest.importorskip("h5py")
    p = tmp_path / "site_b.hdf5"
    with h5py.File(p, "w") as f:
        ds = f.create_dataset("data/strain", data=small_run["data"])
        ds.attrs["rate"] = small_run["fs"]
        ds.attrs["start"] = small_run["t0"]
    rc = main(["search", "--strain", str(p), "--dataset", "data/strain", "--sample-rate-attr", "rate",
               "--t0-attr", "start", "--bank", str(small_run["dir"] / "bank.parquet"), "--f-low", "30",
               "--segment-duration", "32", "--output", str(tmp_path / "t.parquet"), "--no-progress"])
    assert rc == 0, capsys.readouterr().err
    doc = json.loads((tmp_path / "t.json").read_text())
    assert doc["inputs"]["strain"]["t0"] == small_run["t0"]
    assert doc["inputs"]["strain"]["sample_rate"] == small_run["fs"]
    assert abs(doc["loudest"]["time"] - small_run["tc"]) < 0.05


def test_search_leaves_out_nan_runs(small_run, tmp_path, capsys):
    d = small_run["dir"]
    data = small_run["data"].copy()
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
    assert doc["excluded"] == [pytest.approx([nan_start, nan_stop])]  # recorded in the summary
