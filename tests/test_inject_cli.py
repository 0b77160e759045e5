"""The inject, campaign and sensitivity commands end to end, and their bad input."""

import json

import numpy as np
import pytest

import chirpsift as cs
from chirpsift import synthetic
from chirpsift.cli import main
from chirpsift.inject.command import read_injections
from chirpsift.io import read_triggers
from chirpsift.network import load_sites

FS = 512.0
T0 = 1_000_000_000.0
DURATION = 1200.0
SITES_TOML = """version = 1

[[site]]
name = "Aster"
latitude = 46.0
longitude = 7.5
elevation = 300.0
x_azimuth = 10.0
y_azimuth = 100.0

[[site]]
name = "Borealis"
latitude = 60.0
longitude = 30.0
elevation = 100.0
x_azimuth = 200.0
y_azimuth = 290.0
"""


@pytest.fixture(scope="module")
def workdir(tmp_path_factory):
    d = tmp_path_factory.mktemp("campaign")
    (d / "sites.toml").write_text(SITES_TOML)
    for i, name in enumerate(("Aster", "Borealis")):
        x = synthetic.colored_gaussian_noise(int(DURATION * FS), FS, "gen2-early", seed=30 + i, f_low=20.0)
        np.savez(d / f"{name}.npz", strain=x, sample_rate=FS, t0=T0)
    cs.Bank.from_any({"m1": [2.8, 3.0, 3.2], "m2": [2.8, 3.0, 3.2]}).save(d / "bank.npz")
    (d / "injected").mkdir()
    return d


def _draw_args(d, *extra):
    return ["inject", "--count", "8", "--m1", "3.0", "--m2", "3.0", "--distance", "50", "1500",
            "--distance-distribution", "uniform",
            "--start", str(T0 + 60), "--end", str(T0 + DURATION - 30), "--f-low", "30", "--seed", "6",
            "--output", str(d / "injections.parquet"), *extra]


def test_inject_campaign_sensitivity_end_to_end(workdir, capsys):
    d = workdir
    assert main(_draw_args(d)) == 0
    inj, meta = read_injections(d / "injections.parquet")
    assert inj.size == 8 and meta["densities"]["distance"] == "uniform"
    # the drawn set equals the API's with the same arguments (the command adds nothing)
    same = cs.draw_injections(8, m1=3.0, m2=3.0, distance=(50.0, 1500.0), distance_distribution="uniform",
                              start=T0 + 60, end=T0 + DURATION - 30, f_low=30.0, seed=6)
    assert same.tobytes() == inj.tobytes()

    assert main(["inject", "--injections", str(d / "injections.parquet"), "--f-low", "30", "--sites",
                 str(d / "sites.toml"), "--strain", f"Aster={d / 'Aster.npz'}", "--strain",
                 f"Borealis={d / 'Borealis.npz'}", "--output-dir", str(d / "injected")]) == 0
    site = load_sites(d / "sites.toml")["Aster"]
    with np.load(d / "injected" / "Aster.npz") as z, np.load(d / "Aster.npz") as orig:
        added = z["strain"] - orig["strain"]
        assert float(z["t0"]) == T0 and float(z["sample_rate"]) == FS
    np.testing.assert_allclose(added, cs.project(inj, site, start=T0, duration=DURATION, sample_rate=FS,
                                                 f_low=30.0), rtol=0, atol=1e-30)

    assert main(["campaign", "--injections", str(d / "injections.parquet"), "--sites", str(d / "sites.toml"),
                 "--strain", f"Aster={d / 'Aster.npz'}", "--strain", f"Borealis={d / 'Borealis.npz'}",
                 "--bank", str(d / "bank.npz"), "--f-low", "30", "--segment-duration", "64", "--psd", "gen2-early",
                 "--slides", "50", "--output", str(d / "fm.parquet"), "--no-progress"]) == 0
    table, meta = read_triggers(d / "fm.parquet")
    assert table.size == 8 and "Aster_optimal_snr" in table.dtype.names
    assert meta["analysed_time"] > 0 and "stationary" in meta["caution"]
    # loud injections (network optimal SNR above 14) are found, very quiet ones not
    loud, quiet = table["network_optimal_snr"] > 14, table["network_optimal_snr"] < 3
    assert loud.any() and quiet.any()
    assert table["found"][loud].all() and not table["found"][quiet].any()

    assert main(["sensitivity", "--found-missed", str(d / "fm.parquet"), "--bins", "4", "--plot",
                 str(d / "eff.png"), "--output", str(d / "sens.json")]) == 0
    doc = json.loads((d / "sens.json").read_text())
    assert doc["injections"] == 8 and doc["found"] == int(table["found"].sum())
    assert (d / "eff.png").read_bytes()[:4] == b"\x89PNG"
    out = capsys.readouterr().out
    assert "sensitive volume" in out and "Caution" in out


def _fails(argv, capsys, *words):
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err, err
    for w in words:
        assert w in err, err


def test_bad_input_is_one_line_and_exit_2(workdir, capsys):
    d = workdir
    bad = _draw_args(d)
    bad[bad.index("--distance") + 1:bad.index("--distance") + 3] = ["900", "100"]
    _fails(bad, capsys, "distance")
    _fails(_draw_args(d, "--spacing", "3"), capsys, "spacing=3.0")
    _fails(["inject", "--f-low", "30", "--count", "3"], capsys, "--m1")
    _fails(["inject", "--injections", str(d / "injections.parquet"), "--f-low", "30", "--sites", str(d / "sites.toml"),
            "--strain", f"Cormorant={d / 'Aster.npz'}", "--output-dir", str(d / "injected")],
           capsys, "'Cormorant'", "not in the site set")
    _fails(["sensitivity", "--found-missed", str(d / "missing.parquet")], capsys, "missing.parquet")
    _fails(["campaign", "--injections", str(d / "injections.parquet"), "--sites", str(d / "sites.toml"),
            "--strain", f"Aster={d / 'Aster.npz'}", "--bank", str(d / "bank.npz"), "--f-low", "30"],
           capsys, "at least two sites")
