"""chirpsift run: the analysis file, the plan of units, resuming from the manifest, the command."""

import dataclasses
import io
import json
import re
import warnings
from pathlib import Path

import numpy as np
import pytest

import chirpsift as cs
from chirpsift.run.manifest import read_units
from chirpsift.io import read_triggers
from chirpsift.io.catalogue import read_catalogue
from chirpsift.io.vetoes import read_vetoes
from chirpsift.network import EXAMPLE_SITES, YEAR, Site, coincidences, load_sites
from chirpsift.run import SCHEMA, ManifestMismatch, load_analysis, plan, run_analysis
from chirpsift.run.progress import Progress

from _run_scenario import FS, T0, T_SIGNAL, completed_run, outputs, second_output, temporaries, write_scenario

README = Path(__file__).resolve().parents[1] / "README.md"


@pytest.fixture(scope="module")
def done(tmp_path_factory):
    return completed_run(tmp_path_factory)


# ---------------------------------------------------------------------------
# the analysis file
# ---------------------------------------------------------------------------
def _edit(path: Path, old: str, new: str) -> Path:
    text = path.read_text()
    assert old in text
    out = path.with_name("edited.toml")
    out.write_text(text.replace(old, new))
    return out


@pytest.mark.parametrize("old, new, message", [
    ('output = "out"', 'outptu = "out"', "unknown key 'outptu'; did you mean 'output'?"),
    ("min-snr = 5.0", "min-snrr = 5.0", "unknown key 'min-snrr'; did you mean 'min-snr'?"),
    ('files = "kestrel/*.npz"', 'file = "kestrel/*.npz"', "unknown key 'file'; did you mean 'files'?"),
    ("slides = 40", "slide = 40", "unknown key 'slide'; did you mean 'slides'?"),
    ("top = 5", "tops = 5", "unknown key 'tops'; did you mean 'top'?"),
    ('[data.Heron]', '[data.Heorn]', "no site named 'Heorn' among the sites (Kestrel, Heron, Plover); did you "
                                      "mean 'Heron'?"),
    ("slides = 40", "slides = -1", "slides must be a finite number >= 0, got -1"),
    ("slides = 40", "slides = 2.5", "slides must be an integer, got 2.5"),
    ("min-snr = 5.0", "min-snr = -5.0", "min_snr must be positive"),
    ('[bank]\nfile = "bank.parquet"', "[bank]", "give file (a template bank) or a region"),
])
def test_bad_analysis_files_are_refused_naming_the_key(tmp_path, old, new, message):
    path = _edit(write_scenario(tmp_path), old, new)
    with pytest.raises(ValueError) as err:
        load_analysis(path)
    assert message in str(err.value)
    assert str(path) in str(err.value)


def test_paths_are_relative_to_the_analysis_file_and_sites_may_be_inline(tmp_path, monkeypatch):
    path = write_scenario(tmp_path)
    monkeypatch.chdir("/")
    a = load_analysis(path)
    assert a.output == tmp_path / "out"
    assert a.data["Heron"].files == (str(tmp_path / "heron/heron-*.npz"),)
    assert a.data["Heron"].vetoes == str(tmp_path / "heron-vetoes.txt")
    assert a.site_names == ["Kestrel", "Heron"]  # the sites file's order, not the [data] tables'
    sites = load_sites(EXAMPLE_SITES)
    inline = "\n".join(
        "[[sites.site]]\n" + "\n".join(f"{f.name} = {getattr(sites[n], f.name)!r}" for f in dataclasses.fields(Site))
        for n in ("Kestrel", "Heron"))
    inline_path = _edit(path, '[sites]\nfile = "sites.toml"', "[sites]\n" + inline)
    b = load_analysis(inline_path)
    assert b.sites == a.sites
    assert b.settings_hash() == a.settings_hash()  # the same analysis, however the sites are given
    assert _edit(path, "peak-window = 0.5", "peak-window = 0.25") and \
        load_analysis(path.with_name("edited.toml")).settings_hash() != a.settings_hash()


def test_one_site_is_not_a_network(tmp_path):
    path = _edit(write_scenario(tmp_path), '[data.Heron]\nfiles = ["heron/heron-*.npz"]\nvetoes = "heron-vetoes.txt"\n',
                 "")
    with pytest.raises(ValueError, match="at least two sites"):
        load_analysis(path)


def test_every_key_of_the_analysis_file_is_documented_in_the_readme():
    text = README.read_text()
    section = text[text.index("### The analysis file"):]
    section = section[:section.index("\n## ")]
    for table, keys in SCHEMA.items():
        for key in keys:
            assert f"`{key}`" in section, (table, key)


# ---------------------------------------------------------------------------
# the run
# ---------------------------------------------------------------------------
def _in_memory(folder: Path, site: str, analysis):
    """chirpsift.search on each span of the site's files held in memory, vetoed samples set to NaN."""
    data = analysis.data[site]
    cat = read_catalogue(list(data.files))
    vetoes = read_vetoes(data.vetoes) if data.vetoes else []
    settings = analysis.search.as_dict()
    out = []
    for span in cat.spans:
        x = span.read(0, span.n)
        t = span.t0 + np.arange(span.n) / span.sample_rate
        for a, b in vetoes:
            x[(t >= a) & (t < b)] = np.nan
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            out.append(cs.search(x, span.sample_rate, cs.Bank.load(folder / "out" / "bank.parquet"), t0=span.t0,
                                 **settings))
    return np.concatenate(out)


def test_each_sites_triggers_equal_the_in_memory_search_bit_for_bit(done):
    # Consistency test (expected values from chirpsift.search, which the stage runs block by
    # block); the outside checks: the injected time and the gap known from the file times.
    folder, path, _ = done
    analysis = load_analysis(path)
    for site in analysis.site_names:
        table, meta = read_triggers(folder / "out" / "triggers" / f"{site}.parquet")
        assert table.tobytes() == _in_memory(folder, site, analysis).tobytes()
        near = table[np.argmin(np.abs(table["time"] - T_SIGNAL))]
        assert abs(near["time"] - T_SIGNAL) < 0.01 and near["snr"] > 8
        seconds = meta["live_time_table"]["seconds"]
        assert sum(seconds.values()) == pytest.approx(480.0, abs=1e-9)  # first sample to last
    _, meta = read_triggers(folder / "out" / "triggers" / "Heron.parquet")
    assert meta["live_time_table"]["seconds"]["gap"] == 20.0 and meta["live_time_table"]["seconds"]["vetoed"] == 10.0


def test_candidates_and_false_alarm_rates(done):
    folder, path, _ = done
    analysis = load_analysis(path)
    out = folder / "out"
    tables, analysed = {}, {}
    for n in analysis.site_names:
        tables[n], meta = read_triggers(out / "triggers" / f"{n}.parquet")
        analysed[n] = meta["analysed"]
    cands, cmeta = read_triggers(out / "candidates.parquet")
    bg, bmeta = read_triggers(out / "background.parquet")
    # consistency: the stages split one coincidences() call into background and FAR units
    ref, ref_bg, info = coincidences(tables, list(analysis.sites), analysed=analysed, n_slides=40,
                                     peak_window=0.5, full_output=True)
    assert bg.tobytes() == ref_bg.tobytes()
    for name in ref.dtype.names:
        np.testing.assert_array_equal(cands[name], ref[name])
    np.testing.assert_array_equal(cands["far_bound"], info["far_bound"])
    # outside check: the FAR by its definition, louder background count over background time, per year
    louder = np.array([(bg["statistic"] >= s).sum() for s in cands["statistic"]])
    years = bmeta["background_time"] / YEAR
    np.testing.assert_allclose(cands["far"], np.where(louder == 0, 1, louder) / years, rtol=1e-12)
    assert bmeta["background_time"] == pytest.approx(40 * cmeta["live_time"])
    top = cands[0]
    assert abs(top["time"] - T_SIGNAL) < 0.01 and (top["m1"], top["m2"]) == (14.0, 12.0)
    assert abs(top["Heron_time"] - top["Kestrel_time"] - 0.004) < 2.0 / FS  # the injected delay


def test_a_second_run_does_nothing_and_changes_no_byte(done):
    folder, path, first = done
    assert first.ran == [u.key for u in plan(load_analysis(path))]
    before = outputs(folder / "out")
    again = run_analysis(load_analysis(path))
    assert again.ran == [] and len(again.skipped) == len(first.ran)
    assert outputs(folder / "out") == before
    assert not temporaries(folder / "out")


def test_a_deleted_or_damaged_unit_output_is_redone_alone(done):
    folder, _, _ = done
    path = second_output(folder, "out-redo")
    out = folder / "out-redo"
    before = outputs(out)
    late = sorted((out / "peaks" / "Heron").glob("block-*.parquet"))[-1]  # the span after the gap: one block
    late.unlink()
    span = late.stem.split("-")[1]  # block-<t0>-templates-0-2
    spectrum = out / "spectra" / "Kestrel.parquet"
    spectrum.write_bytes(spectrum.read_bytes()[:-10])  # truncated
    result = run_analysis(load_analysis(path))
    # later units: same inputs, same bytes
    assert result.ran == [f"search/Heron/{span}/0-2", "spectrum/Kestrel"]
    assert outputs(out) == before


def test_a_changed_analysis_is_refused_naming_what_changed(done, capsys):
    folder, path, _ = done
    changed = _edit(path, "min-snr = 5.0", "min-snr = 5.5")
    with pytest.raises(ManifestMismatch, match=r"different analysis .*changed: search\.min_snr"):
        run_analysis(load_analysis(changed))
    from chirpsift.cli import main

    assert main(["run", str(changed)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "chirpsift: error:" in err and "search.min_snr" in err


def test_an_interrupted_run_leaves_no_partial_file_and_resumes(done, monkeypatch):
    folder, _, _ = done
    path = second_output(folder, "out-stop")
    out = folder / "out-stop"
    before = outputs(out)
    for rel in ("background.parquet", "candidates.parquet", "report/report.html"):
        (out / rel).unlink()
    import pyarrow.parquet as pq

    real = pq.write_table

    def interrupted(table, where, *args, **kwargs):
        real(table, where, *args, **kwargs)
        Path(where).write_bytes(Path(where).read_bytes()[:100])  # half written when Ctrl-C arrives
        raise KeyboardInterrupt

    monkeypatch.setattr(pq, "write_table", interrupted)
    with pytest.raises(KeyboardInterrupt):
        run_analysis(load_analysis(path))
    assert not (out / "background.parquet").exists() and not temporaries(out)
    manifest = json.loads((out / "manifest.json").read_text())
    assert "merge/Heron" in manifest["units"]
    monkeypatch.setattr(pq, "write_table", real)
    result = run_analysis(load_analysis(path))
    assert result.ran == ["background", "candidates", "report"]
    assert outputs(out) == before


def test_the_command_runs_and_reports(done, capsys):
    from chirpsift.cli import main

    folder, path, _ = done
    assert main(["run", str(path), "--quiet"]) == 0
    text = capsys.readouterr().out
    assert f"0 units run, {len(plan(load_analysis(path)))} already complete" in text and "report.html" in text
    assert text.count("where each second went") == 2 and "Cautions:" in text
    top = re.search(r"^\s+1\s+(\d+\.\d+)\s+14.00 \+ 12.00\s", text, flags=re.M)  # the injected binary ranks first
    assert top and abs(float(top.group(1)) - T_SIGNAL) < 0.01
    assert main(["run", str(folder / "missing.toml")]) == 2
    assert "analysis file not found" in capsys.readouterr().err
    assert main(["run", str(path), "--stop-after", "nothing"]) == 2


def test_quiet_progress_prints_a_line_per_n_units_or_per_minute():
    now = [0.0]
    stream = io.StringIO()
    p = Progress(7, "lines", every=3, seconds=60.0, stream=stream, clock=lambda: now[0])
    for k in range(7):
        p.started(f"u{k}")
        now[0] += 1.0 if k != 4 else 90.0  # unit 4 takes a minute and a half
        p.finished(f"u{k}", 1.0)
    p.close()
    lines = stream.getvalue().splitlines()
    assert [re.match(r"chirpsift run: (\d+)/7", ln).group(1) for ln in lines] == ["3", "5", "7"]
    assert "left" in lines[0] and "u4 took" in lines[1]


def test_a_run_that_finds_nothing_publishes_empty_tables_and_says_so(tmp_path):
    path = _edit(write_scenario(tmp_path, slides=0), "min-snr = 5.0", "min-snr = 30.0")
    first = run_analysis(load_analysis(path), stop_after="search")
    # Kestrel: one span; Heron: two, split by the gap; one block each: a scan, gates, layout and search unit per span
    assert first.ran[0] == "bank" and len(first.ran) == 13
    for k, stage in enumerate(("scan", "gates", "layout", "search")):
        assert all(key.startswith((f"{stage}/Kestrel/", f"{stage}/Heron/")) for key in first.ran[1 + 3 * k:4 + 3 * k])
    rest = run_analysis(load_analysis(path))
    assert rest.skipped == first.ran and rest.ran[-1] == "report"
    out = tmp_path / "out"
    for rel in ("triggers/Kestrel.parquet", "background.parquet", "candidates.parquet"):
        table, _ = read_triggers(out / rel)
        assert len(table) == 0
    cands, meta = read_triggers(out / "candidates.parquet")
    assert meta["n_slides"] == 0 and "far_bound" in cands.dtype.names
    page = (out / "report" / "report.html").read_text()
    assert "0 zero-lag candidates" in page and "<p>None.</p>" in page


def test_ctrl_c_on_the_command_exits_130_and_the_next_run_finishes(tmp_path):
    import os
    import signal
    import subprocess
    import sys
    import time

    path = write_scenario(tmp_path)
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(p for p in sys.path if p)}
    command = [sys.executable, "-m", "chirpsift.cli", "run", str(path), "--quiet"]
    proc = subprocess.Popen(command, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    manifest = tmp_path / "out" / "manifest.json"
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and proc.poll() is None:
        if any(k.startswith("search/Kestrel/") for k in read_units(manifest.parent)):
            break
        time.sleep(0.02)
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    assert "interrupted" in err and "Traceback" not in err
    assert not temporaries(tmp_path / "out")
    units = json.loads(manifest.read_text())["units"]
    assert any(k.startswith("search/Kestrel/") for k in units) and "report" not in units
    for entry in units.values():  # everything the manifest lists is there, whole
        for rel, meta in entry["files"].items():
            assert (tmp_path / "out" / rel).stat().st_size == meta["bytes"]
    done = subprocess.run(command + ["--stop-after", "candidates"], env=env, capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0, done.stderr
    assert "already complete" in done.stdout and (tmp_path / "out" / "candidates.parquet").exists()


def test_span_units_merge_to_the_whole_catalogues_search_and_a_short_span_is_reported(tmp_path):
    # Consistency test (expected values from search_catalogue over the whole catalogue, which
    # the span units split); the outside truth: the short file's and the gap's lengths.
    from chirpsift import synthetic
    from chirpsift.pipeline import search_catalogue

    path = write_scenario(tmp_path)
    analysis = load_analysis(path)
    run_analysis(analysis, stop_after="merge")
    short = synthetic.colored_gaussian_noise(int(4 * FS), FS, "gen2-zero-detuned", seed=3, f_low=20.0)
    np.savez(tmp_path / "kestrel" / "kestrel-99.npz", strain=short, sample_rate=FS, t0=T0 + 600.0)
    result = run_analysis(analysis, stop_after="merge")
    label = f"{T0 + 600.0:.3f}"
    assert result.ran == [f"scan/Kestrel/{label}", f"gates/Kestrel/{label}", f"layout/Kestrel/{label}",
                          f"search/Kestrel/{label}/0-2", "merge/Kestrel"]  # a new span
    merged, meta = read_triggers(tmp_path / "out" / "triggers" / "Kestrel.parquet")
    cat = read_catalogue(list(analysis.data["Kestrel"].files))
    settings = analysis.search.as_dict()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        whole, info = search_catalogue(cat, cs.Bank.load(tmp_path / "out" / "bank.parquet"), **settings)
    assert merged.tobytes() == whole.tobytes()
    seconds = meta["live_time_table"]["seconds"]
    assert seconds["short"] == 4.0 and seconds["gap"] == 120.0
    for category, value in info["live_time_table"].seconds.items():
        assert seconds[category] == pytest.approx(value, abs=1e-9)
    assert meta["analysed"] == [list(iv) for iv in info["analysed"]]
    assert any("too short" in w or "left out" in w for w in meta["warnings"])


INJECTIONS = """
[injections]
count = 10
m1 = 14.0
m2 = 12.0
distance = [100.0, 1000.0]
seed = 3
"""


def test_an_injection_campaign_finds_what_its_optimal_snr_says_and_measures_a_sensitivity(tmp_path):
    # Outside checks (facts of matched filtering, common practice): with a template equal to
    # the signal, the recovered network SNR scatters about the optimal SNR by about one
    # per site, and a signal of optimal SNR 8 or more at each site clears min-snr 5 at both.
    path = write_scenario(tmp_path, extra=INJECTIONS)
    analysis = load_analysis(path)
    assert analysis.injections["count"] == 10 and analysis.injections["distance"] == [100.0, 1000.0]
    result = run_analysis(analysis)
    assert {"injections", "found-missed", "sensitivity"} <= set(result.ran)
    out = tmp_path / "out"
    table, _ = read_triggers(out / "injections" / "found_missed.parquet")
    counted = table[table["analysed"]]
    assert len(table) == 10 and len(counted) >= 8
    sites = analysis.site_names
    loud = np.all([counted[f"{n}_optimal_snr"] >= 8.0 for n in sites], axis=0)
    assert loud.any() and counted["found"][loud].all()
    found = counted[counted["found"] & (counted["network_optimal_snr"] >= 10.0)]
    assert found.size and np.all(np.abs(found["statistic"] - found["network_optimal_snr"]) < 3.0)
    sens = json.loads((out / "injections" / "sensitivity.json").read_text())
    s = sens["sensitivity"]
    assert s["found"] == int(counted["found"].sum()) and s["injections"] == len(counted)
    assert 100.0 < s["range"] < 1000.0 and s["volume_time"] == pytest.approx(s["volume"] * s["analysed_time"] / YEAR)
    page = (out / "report" / "report.html").read_text()
    assert "<h2>Sensitivity</h2>" in page and page.count("<img ") == 7
    assert run_analysis(analysis).ran == []


def test_quiet_progress_passes_a_long_units_own_bar_on_once_a_minute():
    import sys

    now = [0.0]
    stream = io.StringIO()
    p = Progress(2, "lines", every=10, seconds=60.0, stream=stream, clock=lambda: now[0])
    p.started("search/Kestrel/1.000")
    with p.inside("search/Kestrel/1.000"):
        for k in range(1, 301):  # a bar updating every second for five minutes
            now[0] += 1.0
            sys.stderr.write(f"\rchirpsift search:  {k}/300 [{k}s<{300 - k}s, 1.00tmpl/s]")
    p.finished("search/Kestrel/1.000", 300.0)
    lines = stream.getvalue().splitlines()
    assert len(lines) == 5  # one a minute
    assert "search/Kestrel/1.000: chirpsift search:  60/300" in lines[0] and "tmpl/s" in lines[0]


def test_hdf5_files_with_their_own_attribute_names(tmp_path):
    h5py = pytest.importorskip("h5py")
    path = write_scenario(tmp_path)
    for npz in sorted((tmp_path / "heron").glob("*.npz")):
        with np.load(npz) as z, h5py.File(npz.with_suffix(".h5"), "w") as f:
            d = f.create_dataset("data/strain", data=z["strain"])
            d.attrs["fs"], d.attrs["start"] = float(z["sample_rate"]), float(z["t0"])
        npz.unlink()
    h5 = _edit(path, 'files = ["heron/heron-*.npz"]',
               'files = ["heron/heron-*.h5"]\ndataset = "data/strain"\nsample-rate-attr = "fs"\nt0-attr = "start"')
    done_npz = run_analysis(load_analysis(write_scenario(tmp_path / "npz")), stop_after="merge")
    done_h5 = run_analysis(load_analysis(h5), stop_after="merge")
    assert len(done_h5.ran) == len(done_npz.ran)
    a, _ = read_triggers(tmp_path / "npz" / "out" / "triggers" / "Heron.parquet")
    b, _ = read_triggers(tmp_path / "out" / "triggers" / "Heron.parquet")
    assert len(a) and a.tobytes() == b.tobytes()  # the same samples, whatever the file format


def test_each_sites_spectrum_follows_the_curve_its_noise_was_drawn_from(done):
    # Outside check: the scenario's noise is drawn from the gen2-zero-detuned design curve
    # (REFERENCES item 9). Each stretch's Welch median estimate averages about 31 segments
    # (relative error of the PSD about 0.2 per bin, 0.1 on the ASD), and the run's median
    # over stretches and over the bins 35-100 Hz shrinks that to well under 5%.
    folder, _, _ = done
    for site in ("Kestrel", "Heron"):
        sp, meta = read_triggers(folder / "out" / "spectra" / f"{site}.parquet")
        band = (sp["frequency"] >= 35.0) & (sp["frequency"] <= 100.0)
        truth = np.sqrt(cs.design_psd(sp["frequency"][band]))
        assert abs(np.median(sp["asd_median"][band] / truth) - 1.0) < 0.05
        assert np.all(sp["asd_low"] <= sp["asd_median"]) and np.all(sp["asd_median"] <= sp["asd_high"])
        assert len(meta["chunks"]) >= 5 and meta["chunk_duration"] == 32.0


def test_an_unexpected_failure_exits_1_with_the_traceback(tmp_path, monkeypatch, capsys):
    from chirpsift.cli import main
    from chirpsift.run import stages

    def broken(*args, **kwargs):
        raise RuntimeError("a defect")

    monkeypatch.setitem(stages._RUNNERS, "bank", broken)
    assert main(["run", str(write_scenario(tmp_path)), "--quiet"]) == 1
    err = capsys.readouterr().err
    assert "unexpected failure" in err and "RuntimeError: a defect" in err
    assert not temporaries(tmp_path / "out")


def test_write_analysis_round_trips_through_the_standard_toml_reader(tmp_path):
    # Outside check: Python's own TOML parser (tomllib) reads back what was written.
    import tomllib

    from chirpsift.run import write_analysis

    scenario = write_scenario(tmp_path)
    doc = tomllib.loads(scenario.read_text())
    doc["data"]["Heron"]["vetoes"] = [[T0 + 400.0, T0 + 410.0]]
    doc["bank"]["file"] = 'odd "name" \\ bank.parquet'
    written = write_analysis(tmp_path / "again.toml", doc)
    assert tomllib.loads(written.read_text()) == doc
    inline = dict(doc, sites={"site": [{f.name: getattr(s, f.name) for f in dataclasses.fields(Site)}
                                       for s in load_sites(EXAMPLE_SITES).values()]})
    assert tomllib.loads(write_analysis(tmp_path / "inline.toml", inline).read_text()) == inline
    assert load_analysis(tmp_path / "inline.toml").site_names == ["Kestrel", "Heron"]
