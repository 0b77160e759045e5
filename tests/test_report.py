"""The run report: its page, its plots, their colours and statistics, and a real browser's view of it."""

import html
import re
import shutil
import subprocess
from itertools import combinations

import numpy as np
import pytest
from scipy import stats

import chirpsift as cs
from chirpsift import synthetic
from chirpsift.report.html import CAUTIONS, REPORT_FILES
from chirpsift.report.plots import PALETTE, poisson_interval, relative_luminance
from chirpsift.report.refilter import candidate_series, upsampling

from _run_scenario import completed_run, outputs, second_output


@pytest.fixture(scope="module")
def done(tmp_path_factory):
    return completed_run(tmp_path_factory)


def test_poisson_interval_matches_scipy():
    # Outside check: scipy.stats.poisson.ppf gives the same quantiles.
    mu = np.array([0.0, 0.01, 0.3, 1.0, 2.5, 7.0, 40.0, 333.3])
    for p in (0.6827, 0.9545):
        lo, hi = poisson_interval(mu, p)
        np.testing.assert_array_equal(lo, stats.poisson.ppf((1 - p) / 2, mu).astype(int))
        np.testing.assert_array_equal(hi, stats.poisson.ppf((1 + p) / 2, mu).astype(int))


def test_palette_reads_in_greyscale():
    # WCAG 2 relative luminance (common practice; mid grey #808080 is 0.2159 by the formula's definition).
    assert relative_luminance("#808080") == pytest.approx(0.2159, abs=1e-4)
    lum = [relative_luminance(c) for c in PALETTE]
    assert min(abs(a - b) for a, b in combinations(lum, 2)) >= 0.1


def test_candidate_series_in_noise_and_at_a_signal():
    # Outside checks (facts of matched filtering, Allen 2005): in Gaussian noise with the
    # true PSD, |z|^2 has mean 2 and chi-squared / (2p - 2) mean 1; a signal matching the
    # template peaks at its coalescence time with chi-squared about its degrees of freedom.
    # Tolerances: the series are correlated over about 1/(bandwidth) ~ 10 ms, so 8 s give
    # about 800 independent values; the mean of |z|^2 (sd 2) is then within 0.07 at 1
    # sigma: 0.3 is over 4 sigma; for chi2/dof (sd sqrt(2/30) per value) 0.15 is over 4 sigma.
    fs, f_low, dur = 2048.0, 30.0, 40.0
    assert upsampling(fs) == 1 and upsampling(256.0) == 8
    t0, t_c = 1000.0, 1030.0
    x = synthetic.colored_gaussian_noise(int(dur * fs), fs, "gen2-zero-detuned", seed=5, f_low=20.0)
    freqs = np.linspace(0, fs / 2, 4097)
    psd = cs.design_psd(freqs)
    psd[~np.isfinite(psd)] = 1e-30  # below the curve's validity: any finite value, the band starts at f_low
    t, snr, chi = candidate_series(t0, x, fs, freqs, psd, t_c=t_c - 6.0, m1=14.0, m2=12.0, f_low=f_low,
                                   chi2_bands=16, half_width=4.0)
    assert t.size == 8 * 2048 + 1
    assert abs(np.mean(snr ** 2) - 2.0) < 0.3
    assert abs(np.mean(chi) - 1.0) < 0.15
    distance = float(synthetic.optimal_snr(14.0, 12.0, psd="gen2-zero-detuned", f_low=f_low, sample_rate=fs,
                                           n=int(32 * fs))) / 20.0
    y = synthetic.inject_taylorf2(x, fs, m1=14.0, m2=12.0, t_coalescence=t_c, distance=distance, f_low=f_low, t0=t0)
    t, snr, chi = candidate_series(t0, y, fs, freqs, psd, t_c=t_c, m1=14.0, m2=12.0, f_low=f_low, chi2_bands=16)
    k = int(np.argmax(snr))
    assert abs(t[k] - t_c) <= 1.0 / fs
    assert 15.0 < snr[k] < 25.0
    assert chi[k] < 2.0


def test_report_files_and_page(done):
    folder, _, _ = done
    out = folder / "out" / "report"
    assert sorted(p.name for p in out.iterdir()) == sorted(REPORT_FILES)
    page = (out / "report.html").read_text()
    # self-contained: every image a data URI, nothing fetched from anywhere
    images = re.findall(r'<img src="([^"]+)"', page)
    assert len(images) == 6 and all(src.startswith("data:image/png;base64,") for src in images)
    assert not re.search(r'(src|href)="(https?:|//)', page)
    for caution in CAUTIONS:
        assert html.escape(caution) in page
    assert "14.00 + 12.00" in page  # the injected binary is the top candidate (masses to 4 digits)
    import matplotlib.image

    for name in REPORT_FILES:
        if name.endswith(".png"):
            assert matplotlib.image.imread(out / name).shape[2] in (3, 4)


def test_the_report_drawn_again_has_the_same_bytes(done, capsys):
    from chirpsift.cli import main

    folder, _, _ = done
    second_output(folder, "out-report")
    before = outputs(folder / "out-report")
    assert main(["report", str(folder / "out-report")]) == 0
    assert outputs(folder / "out-report") == before
    assert main(["report", str(folder)]) == 2
    assert "not a run folder" in capsys.readouterr().err


CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
_PROBE = """<script>
window.addEventListener("load", () => {
  const imgs = Array.from(document.images);
  const broken = imgs.filter(i => !(i.complete && i.naturalWidth > 0)).length;
  const wide = document.documentElement.scrollWidth - document.documentElement.clientWidth;
  const r = document.createElement("pre");
  r.id = "probe";
  r.textContent = `images=${imgs.length} broken=${broken} overflow=${wide}`;
  document.body.appendChild(r);
});
</script>"""


@pytest.mark.skipif(CHROMIUM is None, reason="headless Chromium is not installed (Debian package 'chromium')")
@pytest.mark.parametrize("width", [390, 1280])
def test_the_page_in_a_real_browser(done, tmp_path, width):
    folder, _, _ = done
    page = (folder / "out" / "report" / "report.html").read_text()
    probe = tmp_path / "probe.html"
    probe.write_text(page.replace("</body>", _PROBE + "</body>"))
    run = subprocess.run([CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars",
                          f"--window-size={width},900", "--virtual-time-budget=5000", "--dump-dom",
                          probe.as_uri()], capture_output=True, text=True, timeout=120)
    found = re.search(r"images=(\d+) broken=(\d+) overflow=(-?\d+)", run.stdout)
    assert found, run.stderr[-2000:]
    images, broken, overflow = map(int, found.groups())
    assert images == 6 and broken == 0
    assert overflow <= 0  # nothing wider than the window: wide tables scroll inside their own box
