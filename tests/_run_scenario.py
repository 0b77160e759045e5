"""A small two-site scenario for the run and report tests: invented sites, synthetic noise."""

from pathlib import Path

import numpy as np

import chirpsift as cs
from chirpsift import synthetic
from chirpsift.network import EXAMPLE_SITES

FS = 256.0
T0 = 1_100_000_000.0
F_LOW = 30.0
DURATION = 480.0
T_SIGNAL = T0 + 200.0 + 3.3 / FS
BANK = cs.Bank(m1=[10.0, 14.0, 20.0], m2=[8.0, 12.0, 15.0])


def write_scenario(folder, *, slides=40, extra="") -> Path:
    """Write strain files, a bank, vetoes and an analysis file into ``folder``; return the analysis file.

    Kestrel: two abutting files. Heron: three files with a 20 s gap and one veto. One
    14+12 Msun inspiral at optimal SNR about 12 at each site, Heron's 4 ms later.
    """
    folder = Path(folder)
    distance = float(synthetic.optimal_snr(14.0, 12.0, psd="gen2-zero-detuned", f_low=F_LOW, sample_rate=FS,
                                           n=int(128 * FS))) / 12.0
    n = int(DURATION * FS)
    for k, (site, delay, cuts, gap) in enumerate([("kestrel", 0.0, [int(230 * FS) + 5], None),
                                                  ("heron", 0.004, [int(150 * FS), int(330 * FS)], 1)]):
        x = synthetic.colored_gaussian_noise(n, FS, "gen2-zero-detuned", seed=20 + k, f_low=20.0)
        x = synthetic.inject_taylorf2(x, FS, m1=14.0, m2=12.0, t_coalescence=T_SIGNAL + delay, distance=distance,
                                      f_low=F_LOW, t0=T0)
        (folder / site).mkdir(parents=True, exist_ok=True)
        edges = [0, *cuts, n]
        for i, (a, b) in enumerate(zip(edges, edges[1:])):
            if gap is not None and i == 2:
                a += int(20 * FS)  # the third file starts 20 s late: a gap
            np.savez(folder / site / f"{site}-{i:02d}.npz", strain=x[a:b], sample_rate=FS, t0=T0 + a / FS)
    (folder / "heron-vetoes.txt").write_text(f"# start end\n{T0 + 400.0} {T0 + 410.0}\n")
    BANK.save(folder / "bank.parquet")
    (folder / "sites.toml").write_text(Path(EXAMPLE_SITES).read_text())
    analysis = folder / "analysis.toml"
    analysis.write_text(f"""\
version = 1
output = "out"

[sites]
file = "sites.toml"

[data.Kestrel]
files = "kestrel/*.npz"

[data.Heron]
files = ["heron/heron-*.npz"]
vetoes = "heron-vetoes.txt"

[bank]
file = "bank.parquet"

[search]
f-low = {F_LOW}
welch-duration = 2.0
min-snr = 5.0
peak-window = 0.5

[network]
slides = {slides}

[report]
top = 5
{extra}""")
    return analysis


def outputs(folder) -> dict:
    """Relative path -> bytes of every file under ``folder``."""
    folder = Path(folder)
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def temporaries(folder) -> list:
    """Temporary (dot-prefixed) files left under ``folder``."""
    return [p for p in Path(folder).rglob(".*") if p.is_file()]


_DONE = {}


def completed_run(tmp_path_factory):
    """One completed run of the scenario per test session (shared by the run and report tests)."""
    if "folder" not in _DONE:
        from chirpsift.run import load_analysis, run_analysis

        folder = tmp_path_factory.mktemp("scenario")
        analysis = write_scenario(folder)
        result = run_analysis(load_analysis(analysis))
        _DONE["folder"], _DONE["analysis"], _DONE["result"] = folder, analysis, result
    return _DONE["folder"], _DONE["analysis"], _DONE["result"]


def second_output(folder, name):
    """A copy of the scenario's output folder and an analysis file pointing at it (same analysis otherwise)."""
    import shutil

    folder = Path(folder)
    shutil.copytree(folder / "out", folder / name)
    text = (folder / "analysis.toml").read_text().replace('output = "out"', f'output = "{name}"')
    path = folder / f"analysis-{name}.toml"
    path.write_text(text)
    return path
