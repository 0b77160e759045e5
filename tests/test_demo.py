"""chirpsift demo: the scenario it writes, the run it makes, and what it prints.

One reduced demo (10 minutes per site, 200 slides, 8 injections; about 15 s) is run
once per module through the command line, exactly as a user runs it, and checked
against things outside the code: the optimal SNR of what was added to the data,
recomputed with numpy from the strain files (Cutler & Flanagan 1994); the network SNR
as the quadrature sum of the sites' SNRs (common practice); the arrival delays from
the sites' geodetic positions by astropy; the bank's coverage by a numpy match.
"""

import contextlib
import io
import json
import math
import re
from pathlib import Path

import numpy as np
import pytest
from astropy import units as u
from astropy.coordinates import EarthLocation
from astropy.time import Time

import chirpsift as cs
from chirpsift.cli import main
from chirpsift.demo import make_scenario
from chirpsift.demo import scenario as sc
from chirpsift.demo.outcome import GLITCH_WINDOW
from chirpsift.inject import MATCH_WINDOW
from chirpsift.bank import Bank
from chirpsift.io import read_triggers
from chirpsift.network import EXAMPLE_SITES, light_travel_time, load_sites
from chirpsift.synthetic import colored_gaussian_noise

ARGS = ["--minutes", "10", "--slides", "200", "--injections", "8", "--quiet"]


def _demo(*argv):
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        rc = main(["demo", *argv])
    return rc, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo") / "chirpsift-demo"
    rc, out, err = _demo("--output", str(folder), *ARGS)
    assert rc == 0, err
    truth = json.loads((folder / sc.SCENARIO_FILE).read_text())
    cands, meta = read_triggers(folder / sc.RESULTS / "candidates.parquet")
    return {"folder": folder, "out": out, "truth": truth, "cands": cands, "meta": meta}


def _site_strain(folder, name):
    """A site's samples from its files on one time line (NaN in the missing file), and their start."""
    n = int(round(10 * 60 * sc.SAMPLE_RATE))
    x = np.full(n, np.nan)
    for path in sorted((Path(folder) / name).glob("*.npz")):
        with np.load(path) as f:
            i = int(round((float(f["t0"]) - sc.START) * sc.SAMPLE_RATE))
            x[i:i + f["strain"].size] = f["strain"]
    return x


def _added(folder, name, seed=sc.NOISE_SEED):
    """What the demo added to a site's noise: its files less the same noise drawn again."""
    x = _site_strain(folder, name)
    noise = colored_gaussian_noise(x.size, sc.SAMPLE_RATE, sc.CURVES[name], seed=[seed, sc.SITES.index(name)],
                                   f_low=sc.NOISE_F_LOW)
    return x - noise


def _optimal_snr(h, curve):
    """sqrt(4 df sum |h~|^2 / S) over [F_LOW, Nyquist), with numpy's FFT (Cutler & Flanagan 1994, eq. 2.4)."""
    hf = np.fft.rfft(h) / sc.SAMPLE_RATE
    f = np.fft.rfftfreq(h.size, 1.0 / sc.SAMPLE_RATE)
    band = (f >= sc.F_LOW) & (f < sc.SAMPLE_RATE / 2)
    return math.sqrt(4.0 * (f[1] - f[0]) * np.sum(np.abs(hf[band]) ** 2 / cs.design_psd(f[band], curve)))


# ---------------------------------------------------------------------------
# the run's outcome
# ---------------------------------------------------------------------------
def test_the_hidden_binary_is_the_top_candidate_beyond_the_background(demo):
    top, meta, hidden = demo["cands"][0], demo["meta"], demo["truth"]["hidden"]
    names = list(meta["sites"])
    assert len(demo["cands"]) >= 1
    for n in names:  # seen at every site, within the injection match window of its arrival there
        assert abs(float(top[f"{n}_time"]) - hidden["arrival"][n]) <= MATCH_WINDOW
    # no background coincidence was as loud: the IFAR is the bound 1 / background time
    assert bool(top["far_bound"])
    assert float(top["ifar"]) == pytest.approx(meta["background_time_years"], rel=1e-12)
    # the loudest template's chirp mass: a template 0.1% off keeps about 60% of the SNR
    # from 40 Hz (measured with chirpsift's match of neighbouring templates), so the
    # loudest is much closer than that
    mc = lambda m1, m2: (m1 * m2) ** 0.6 / (m1 + m2) ** 0.2  # noqa: E731
    assert abs(mc(top["m1"], top["m2"]) / mc(hidden["m1"], hidden["m2"]) - 1) < 1e-3
    # the statistic: network SNR 15 less the template mismatch, give or take unit-variance noise per site
    assert 11.0 < float(top["statistic"]) < 18.0


def test_recovered_delays_between_sites_match_the_injected_ones(demo):
    # timing error ~ 1 / (2 pi rho sigma_f), a few tenths of a ms at SNR 7 for a neutron-star
    # binary (Fairhurst 2009, arXiv:0908.2356); a common template bias cancels in differences
    top, hidden = demo["cands"][0], demo["truth"]["hidden"]
    ref = sc.SITES[0]
    for n in sc.SITES[1:]:
        measured = float(top[f"{n}_time"]) - float(top[f"{ref}_time"])
        assert abs(measured - (hidden["arrival"][n] - hidden["arrival"][ref])) < 1e-3


def test_the_glitch_is_gated_and_makes_no_candidate(demo):
    glitch = demo["truth"]["glitch"]
    # it is really there and loud: numpy's optimal SNR of what was added around it
    added = _added(demo["folder"], glitch["site"])
    i = int(round((glitch["time"] - sc.START) * sc.SAMPLE_RATE))
    half = int(sc.SAMPLE_RATE)
    assert _optimal_snr(added[i - half:i + half], sc.CURVES[glitch["site"]]) == pytest.approx(glitch["snr"], rel=0.01)
    _, meta = read_triggers(demo["folder"] / sc.RESULTS / "triggers" / f"{glitch['site']}.parquet")
    assert any(a <= glitch["time"] < b for a, b in meta["gates"])
    for row in demo["cands"]:
        for n in sc.SITES:
            t = float(row[f"{n}_time"])
            assert not (math.isfinite(t) and abs(t - glitch["time"]) <= GLITCH_WINDOW)


def test_the_data_have_their_gap_veto_and_files(demo):
    folder, truth = demo["folder"], demo["truth"]
    missing_site, missing = sc.MISSING_FILE
    for n in sc.SITES:
        files = sorted((folder / n).glob("*.npz"))
        assert len(files) == sc.FILES_PER_SITE - (n == missing_site)
        _, meta = read_triggers(folder / sc.RESULTS / "triggers" / f"{n}.parquet")
        seconds = meta["live_time_table"]["seconds"]
        assert sum(seconds.values()) == pytest.approx(600.0, abs=1e-6)  # every second in one category
        assert seconds["gap"] == pytest.approx(100.0 if n == missing_site else 0.0, abs=1e-6)
        assert seconds["vetoed"] == pytest.approx(sc.VETO[2] if n == sc.VETO[0] else 0.0, abs=1e-6)
    # the scenario's own estimate of the common time, against the run's (gates and short stretches differ)
    estimate = sum(b - a for a, b in sc.estimated_common_time(make_scenario(10, slides=200, injections=8)))
    assert demo["meta"]["live_time"] == pytest.approx(estimate, abs=2.0)
    assert truth["gap"] == [sc.START + 300.0, sc.START + 400.0]


def test_the_report_exists_with_every_plot(demo):
    page = (demo["folder"] / sc.RESULTS / "report" / "report.html").read_text()
    images = re.findall(r'<img src="([^"]+)"', page)
    assert len(images) == 7 and all(src.startswith("data:image/png;base64,") for src in images)
    assert "Sensitivity" in page


# ---------------------------------------------------------------------------
# what it prints
# ---------------------------------------------------------------------------
def test_the_printed_summary_sets_injected_beside_recovered(demo):
    out, hidden, top = demo["out"], demo["truth"]["hidden"], demo["cands"][0]
    lines = out.splitlines()
    start = lines.index("The hidden binary, injected and recovered:")
    table = lines[start + 1:start + 14]
    assert table[0].split() == ["injected", "recovered"]
    rows = {re.split(r"\s{2,}", line.strip())[0]: re.split(r"\s{2,}", line.strip())[1:] for line in table[1:]}
    assert rows["m1 (Msun)"] == [f"{hidden['m1']:.3f}", f"{top['m1']:.3f}"]
    assert rows["m2 (Msun)"] == [f"{hidden['m2']:.3f}", f"{top['m2']:.3f}"]
    assert rows["network SNR / statistic"] == [f"{hidden['network_snr']:.2f}", f"{top['statistic']:.2f}"]
    assert rows["IFAR (yr)"] == ["-", f">{top['ifar']:.3g}"]
    for n in sc.SITES:
        assert rows[f"{n} SNR (optimal / measured)"] == [f"{hidden['optimal_snr'][n]:.2f}", f"{top[f'{n}_snr']:.2f}"]
    assert rows["rank among candidates"] == ["-", "1"]
    # the top candidates with their IFAR, the first named as the hidden binary
    head = next(i for i, line in enumerate(lines) if line.startswith("Top candidates"))
    assert "IFAR (yr)" in lines[head + 1] and lines[head + 2].split()[0] == "1"
    assert lines[head + 2].endswith("the hidden binary")
    assert re.search(r"^Sensitive range: \d+ \+/- \d+ Mpc", out, re.M)
    report = re.search(r"^Report: (.+report\.html)$", out, re.M).group(1)
    assert Path(report).is_file()
    assert "gated; no candidate within 1 s of it" in out


def test_a_second_demo_in_the_same_folder_resumes(demo):
    rc, out, err = _demo("--output", str(demo["folder"]), *ARGS)
    assert rc == 0, err
    assert "already holds this scenario" in out
    assert "0 units run" in out and "The hidden binary, injected and recovered:" in out


def test_folders_and_settings_it_refuses(demo, tmp_path):
    rc, _, err = _demo("--output", str(demo["folder"]), *ARGS, "--seed", "5")
    assert rc == 2 and err.count("\n") == 1 and "other settings: seed 2027 (now 5)" in err
    other = tmp_path / "mine"
    other.mkdir()
    (other / "notes.txt").write_text("keep me")
    rc, _, err = _demo("--output", str(other), *ARGS)
    assert rc == 2 and err.count("\n") == 1 and "not a complete chirpsift demo" in err
    assert sorted(p.name for p in other.iterdir()) == ["notes.txt"]
    rc, _, err = _demo("--output", str(tmp_path / "short"), "--minutes", "10")  # 1,000 slides need more data
    assert rc == 2 and err.count("\n") == 1 and "--slides 1000 do not fit" in err and "at most" in err
    assert not (tmp_path / "short").exists()


# ---------------------------------------------------------------------------
# the scenario against outside references
# ---------------------------------------------------------------------------
def test_injected_network_snr_is_the_quadrature_sum_of_the_sites_numpy_snrs(demo):
    # per site: numpy's optimal SNR of what the demo added around the binary (the noise drawn
    # again and subtracted); network SNR = sqrt(sum of squares), common practice for
    # independent sites (e.g. Schutz 2011, arXiv:1102.5421)
    hidden = demo["truth"]["hidden"]
    snrs = {}
    for n in sc.SITES:
        added = _added(demo["folder"], n)
        t = hidden["arrival"][n]
        i0 = int(round((t - 70.0 - sc.START) * sc.SAMPLE_RATE))
        i1 = int(round((t + 3.0 - sc.START) * sc.SAMPLE_RATE))
        assert np.all(np.isfinite(added[i0:i1]))
        snrs[n] = _optimal_snr(added[i0:i1], sc.CURVES[n])
        assert snrs[n] == pytest.approx(hidden["optimal_snr"][n], rel=2e-3)
    network = math.sqrt(sum(v * v for v in snrs.values()))
    assert network == pytest.approx(sc.HIDDEN_NETWORK_SNR, rel=2e-3)
    assert hidden["network_snr"] == pytest.approx(sc.HIDDEN_NETWORK_SNR, rel=1e-9)
    assert len({round(v, 1) for v in snrs.values()}) == 3  # the antenna responses differ per site


def test_injected_arrival_delays_match_the_geometry_by_astropy(demo):
    # delay at a site = -(r . n) / c, r its geocentric position (astropy's WGS-84), n the unit
    # vector to the source in Earth-fixed axes at the Greenwich mean sidereal time (astropy,
    # UT1 taken equal to UTC as the sites module does); common practice
    hidden = demo["truth"]["hidden"]
    t = Time(hidden["time"], format="gps")
    t.delta_ut1_utc = 0.0
    gmst = t.sidereal_time("mean", "greenwich").rad
    ha = hidden["ra"] - gmst
    n = np.array([math.cos(hidden["dec"]) * math.cos(ha), math.cos(hidden["dec"]) * math.sin(ha),
                  math.sin(hidden["dec"])])
    sites = load_sites(EXAMPLE_SITES)
    for name in sc.SITES:
        s = sites[name]
        r = EarthLocation.from_geodetic(s.longitude * u.deg, s.latitude * u.deg, s.elevation * u.m,
                                        ellipsoid="WGS84").get_itrs().cartesian.xyz.to_value(u.m)
        assert hidden["arrival"][name] - hidden["time"] == pytest.approx(-float(r @ n) / 299792458.0, abs=2e-6)


def test_the_bank_covers_its_region_by_a_numpy_match(demo):
    # minimal match 0.97 is common practice; the run placed the bank (chirpsift.place_bank)
    # and every source drawn in the region keeps at least that, by a match written here
    bank = Bank.load(demo["folder"] / sc.RESULTS / "bank.parquet")
    assert bank.metadata["minimal_match"] == sc.BANK_MINIMAL_MATCH and bank.metadata["method"] == "lattice"
    fs, dur = sc.SAMPLE_RATE, 64.0
    n = int(fs * dur)
    f = np.fft.rfftfreq(n, 1.0 / fs)
    df = f[1]
    inv = np.where((f >= sc.F_LOW) & (f < fs / 2), 1.0 / cs.design_psd(np.maximum(f, 1.0)), 0.0)
    tau = bank.mchirp ** (-5.0 / 3.0)  # Newtonian chirp time, up to a factor
    rng = np.random.default_rng(4)
    for m1, m2 in rng.uniform(*sc.REGION, size=(6, 2)):
        h = cs.taylorf2(m1, m2, f_low=sc.F_LOW, df=df, n_freq=f.size, dtype=np.complex128)[0]
        hh = math.sqrt(4 * df * np.sum(np.abs(h) ** 2 * inv))
        near = np.argsort(np.abs(tau - ((m1 * m2) ** 0.6 / (m1 + m2) ** 0.2) ** (-5.0 / 3.0)))[:40]
        best = 0.0
        for k in near:
            t = cs.taylorf2(bank.m1[k], bank.m2[k], f_low=sc.F_LOW, df=df, n_freq=f.size, dtype=np.complex128)[0]
            tt = math.sqrt(4 * df * np.sum(np.abs(t) ** 2 * inv))
            # complex overlap at every time shift at once (positive frequencies only, so its
            # modulus is the overlap maximised over phase), then over time, on a grid 4 times
            # finer than the samples (at the sampling rate itself the peak of a band reaching
            # Nyquist can fall between samples and lose a percent)
            q = np.zeros(4 * n, dtype=np.complex128)
            q[:f.size] = 4 * df * h * np.conj(t) * inv
            best = max(best, float(np.max(np.abs(np.fft.ifft(q) * 4 * n))) / (hh * tt))
        assert best >= sc.BANK_MINIMAL_MATCH, (m1, m2, best)


def test_the_default_scenario_holds_1000_slides_and_20_minutes():
    s = make_scenario()
    assert s.minutes >= 20 and s.slides >= 1000 and len(sc.SITES) == 3
    assert len(s.files[sc.MISSING_FILE[0]]) == sc.FILES_PER_SITE - 1
    assert 0 < sc.MISSING_FILE[1] < sc.FILES_PER_SITE - 1  # a file in the middle, not at an end
    live = sum(b - a for a, b in sc.estimated_common_time(s))
    # chirpsift.coincidences' rule for distinct slides: n (n_sites - 1) step <= L - step
    assert s.slides * (len(sc.SITES) - 1) * sc.SLIDE_STEP <= live - sc.SLIDE_STEP - 5.0
    # the slide step exceeds the widest coincidence window plus twice the clustering window
    sites = load_sites(EXAMPLE_SITES)
    widest = max(light_travel_time(sites[a], sites[b]) for a in sc.SITES for b in sc.SITES if a != b)
    assert sc.SLIDE_STEP > widest + 0.005 + 2 * sc.PEAK_WINDOW
