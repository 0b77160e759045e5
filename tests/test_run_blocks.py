"""chirpsift run over blocks of time: the merged triggers equal one search of the whole catalogue.

A span is split into blocks of ``seconds-per-unit`` and the bank into sub-banks. The
clustering over a stretch keeps a trigger when no louder one lies within the peak
window, a rule that cannot be applied block by block: here three loud signals of
different templates straddle block edges in a chain (the loudest suppresses the second,
which suppresses the third across the edge, though the first is too far from the third),
the case where clustering each block and then the union of the survivors keeps a
trigger that the search of the whole stretch does not. The bit-identity checks are
consistency tests (expected values from :func:`chirpsift.pipeline.search_catalogue`,
itself checked against :func:`chirpsift.search` in test_streaming.py); the outside
truths are the injected times and masses, and the samples a block needs (its own
segments, from the segment length and block length given).
"""

import json
import warnings
from pathlib import Path

import numpy as np
import pytest

import chirpsift as cs
from chirpsift import synthetic
from chirpsift.io import read_triggers
from chirpsift.io.catalogue import read_catalogue
from chirpsift.network import EXAMPLE_SITES
from chirpsift.pipeline import search_catalogue
from chirpsift.pipeline.streaming import PEAK_DTYPE, CatalogueSearch
from chirpsift.run import load_analysis, plan, run_analysis

from _run_scenario import outputs, temporaries

FS = 256.0
T0 = 1_200_000_000.0
F_LOW = 30.0
DURATION = 720.0
BLOCK = 60.0  # s: 12 blocks per 720 s span
SEGMENT = 32.0
WINDOW = 0.5
# bank-cluster chain per edge: (masses, offset from the edge in s, optimal SNR), loudest first
CHAIN = (((8.0, 6.0), -0.3, 20.0), ((14.0, 12.0), -0.05, 14.0), ((30.0, 25.0), 0.3, 7.0))
BANK = cs.Bank(m1=[30.0, 14.0, 8.0, 20.0], m2=[25.0, 12.0, 6.0, 15.0])
SEARCH = dict(welch_duration=2.0, min_snr=5.0, peak_window=WINDOW, segment_duration=SEGMENT, bank_cluster=True)


def _edges(search, span):
    """Times (s) where the valid output of the first segment of each block after the first starts."""
    layout = search.lay_out(span)
    size = int(BLOCK * FS)
    out = []
    for a in range(size, span.n, size):
        (plans,) = search.block_plans(layout, (a, a + size))
        if plans:
            out.append(span.t0 + (layout.stretches[0].start + plans[0].start + plans[0].valid_start) / FS)
    return out


def _analysis(folder: Path, search: str, engine: str) -> Path:
    """Write the bank, the sites and an analysis of Kestrel's and Heron's files with these tables' bodies."""
    BANK.save(folder / "bank.parquet")
    (folder / "sites.toml").write_text(Path(EXAMPLE_SITES).read_text())
    path = folder / "analysis.toml"
    path.write_text(f"""\
version = 1
output = "out"

[sites]
file = "sites.toml"

[data.Kestrel]
files = "kestrel/*.npz"

[data.Heron]
files = "heron/*.npz"

[bank]
file = "bank.parquet"

[search]
{search}
[network]
slides = 0

[engine]
{engine}""")
    return path


def _write(folder: Path) -> tuple[Path, list[float]]:
    """Kestrel: one span with the chain at three block edges; Heron: noise in two spans."""
    n = int(DURATION * FS)
    x = synthetic.colored_gaussian_noise(n, FS, "gen2-zero-detuned", seed=7, f_low=20.0)
    (folder / "kestrel").mkdir(parents=True)
    np.savez(folder / "kestrel" / "plain.npz", strain=x, sample_rate=FS, t0=T0)
    search = CatalogueSearch(FS, BANK, f_low=F_LOW, **SEARCH)
    edges = _edges(search, read_catalogue(str(folder / "kestrel" / "plain.npz")).spans[0])[2:8:2]
    (folder / "kestrel" / "plain.npz").unlink()
    for edge in edges:
        for (m1, m2), offset, snr in CHAIN:
            unit = float(synthetic.optimal_snr(m1, m2, psd="gen2-zero-detuned", f_low=F_LOW, sample_rate=FS,
                                               n=int(64 * FS)))
            x = synthetic.inject_taylorf2(x, FS, m1=m1, m2=m2, t_coalescence=edge + offset, distance=unit / snr,
                                          f_low=F_LOW, t0=T0)
    half = n // 2
    np.savez(folder / "kestrel" / "kestrel-0.npz", strain=x[:half], sample_rate=FS, t0=T0)
    np.savez(folder / "kestrel" / "kestrel-1.npz", strain=x[half:], sample_rate=FS, t0=T0 + half / FS)
    y = synthetic.colored_gaussian_noise(n, FS, "gen2-zero-detuned", seed=8, f_low=20.0)
    (folder / "heron").mkdir()
    cut, late = int(300 * FS), int(320 * FS)  # a 20 s gap
    np.savez(folder / "heron" / "heron-0.npz", strain=y[:cut], sample_rate=FS, t0=T0)
    np.savez(folder / "heron" / "heron-1.npz", strain=y[late:], sample_rate=FS, t0=T0 + late / FS)
    path = _analysis(folder, f"""\
f-low = {F_LOW}
welch-duration = 2.0
min-snr = 5.0
peak-window = {WINDOW}
segment-duration = {SEGMENT}
bank-cluster = true
""", f"""\
templates-per-unit = 2
seconds-per-unit = {BLOCK}
""")
    return path, edges


@pytest.fixture(scope="module")
def blocked(tmp_path_factory):
    folder = tmp_path_factory.mktemp("blocks")
    path, edges = _write(folder)
    result = run_analysis(load_analysis(path), stop_after="merge")
    return folder, path, edges, result


def _as_peaks(columns) -> np.ndarray:
    out = np.zeros(len(columns["time"]), dtype=PEAK_DTYPE)
    for name in PEAK_DTYPE.names:
        out[name] = columns[name]
    return out


def test_the_plan_splits_spans_into_blocks_and_sub_banks(blocked):
    folder, path, _, result = blocked
    units = plan(load_analysis(path))
    search = [u for u in units if u.stage == "search"]
    # Kestrel: 720 s in 12 blocks; Heron: spans of 300 s and 400 s, 5 + 7 blocks; 2 sub-banks each
    assert sum(u.site == "Kestrel" for u in search) == 24 and sum(u.site == "Heron" for u in search) == 24
    assert [u.key for u in units if u.stage == "layout"] == [
        f"layout/Kestrel/{T0:.3f}", f"layout/Heron/{T0:.3f}", f"layout/Heron/{T0 + 320:.3f}"]
    assert f"search/Kestrel/{T0 + 660:.3f}/2-3" in {u.key for u in search}  # the last block, the second sub-bank
    assert {u.templates for u in search} == {(0, 2), (2, 4)}
    ran = [u for u in units if u.stage in ("bank", "scan", "gates", "layout", "search", "merge")]
    assert sorted(result.ran) == sorted(u.key for u in ran)
    position = {k: i for i, k in enumerate(result.ran)}
    assert all(position[k] < position[u.key] for u in ran for k in u.after)  # each after its inputs
    # the layout's first steps run per block: Kestrel's 12, Heron's 5 + 7 (one scan and one gates unit each)
    for stage in ("scan", "gates"):
        assert [u.block for u in units if u.stage == stage and u.site == "Kestrel"] == [
            (a, a + int(BLOCK * FS)) for a in range(0, int(DURATION * FS), int(BLOCK * FS))]
        assert sum(u.stage == stage and u.site == "Heron" for u in units) == 12


def test_merged_blocks_equal_the_whole_catalogues_search_and_the_chain_across_edges_is_kept(blocked):
    folder, path, edges, _ = blocked
    analysis = load_analysis(path)
    bank = cs.Bank.load(folder / "out" / "bank.parquet")
    for site in analysis.site_names:
        merged, meta = read_triggers(folder / "out" / "triggers" / f"{site}.parquet")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            whole, info = search_catalogue(read_catalogue(list(analysis.data[site].files)), bank, f_low=F_LOW,
                                           **SEARCH)
        assert len(merged) and merged.tobytes() == whole.tobytes()
        assert meta["analysed"] == [list(iv) for iv in info["analysed"]] and meta["units"] == 24
    merged, _ = read_triggers(folder / "out" / "triggers" / "Kestrel.parquet")
    # outside truth: the loudest of each chain is found at its injected time with its own template
    for edge in edges:
        near = merged[np.abs(merged["time"] - (edge + CHAIN[0][1])) < 0.01]
        assert len(near) == 1 and (near["m1"][0], near["m2"][0]) == CHAIN[0][0]
    # the tricky case occurs: clustering block by block, then the union of the survivors,
    # keeps the third trigger of each chain, which the whole stretch's clustering drops
    search = CatalogueSearch(FS, bank, f_low=F_LOW, **SEARCH)
    blocks = {}
    for p in sorted((folder / "out" / "peaks" / "Kestrel").glob("*.parquet")):
        table, meta = read_triggers(p)
        assert meta["rows"] == [len(table)]  # one stretch
        blocks.setdefault(meta["block"][0], []).append(table)
    assert len(blocks) == 12
    blockwise = search.rank([_as_peaks(search.rank(parts)) for parts in blocks.values()])
    exact = search.rank([t for parts in blocks.values() for t in parts])
    assert exact["time"].tobytes() == merged["time"].tobytes()  # consistency: the merge's own rule
    extra = sorted(set(blockwise["time"].tolist()) - set(exact["time"].tolist()))
    third = [t for t in extra if any(abs(t - (e + CHAIN[2][1])) < 0.01 for e in edges)]
    assert len(third) == 3 and not set(exact["time"].tolist()) - set(blockwise["time"].tolist())
    for edge in edges:  # the chain straddles two blocks: its second trigger in one, its third in the next
        where = {k: next(start for start, parts in blocks.items() for t in parts
                         if np.any((t["template"] == k) & (np.abs(t["time"] - (edge + offset)) < 0.01)))
                 for k, (_, offset, _) in zip((2, 1, 0), CHAIN)}
        assert where[2] == where[1] < where[0]


def test_a_block_unit_reads_its_own_segments_not_its_span(blocked):
    folder, _, _, _ = blocked
    n = int(DURATION * FS)
    layout = json.loads((folder / "out" / "layouts" / "Kestrel" / f"span-{T0:.3f}.json").read_text())
    assert layout["n"] == n and layout["samples_read"] == n  # no gates asked for: the layout reads each sample once
    reads = []
    for p in (folder / "out" / "peaks" / "Kestrel").glob("*.parquet"):
        _, meta = read_triggers(p)
        reads.append(meta["samples_read"])
        # its segments start in its block, less one segment: at most a block and a segment of samples
        assert meta["samples_read"] <= (BLOCK + SEGMENT) * FS
        assert meta["largest_block"] <= 2 * SEGMENT * FS
    assert sum(r > 0 for r in reads) >= 22 and max(reads) < n / 5


def _another_output(folder: Path, name: str) -> Path:
    path = folder / f"{name}.toml"
    path.write_text((folder / "analysis.toml").read_text().replace('output = "out"', f'output = "{name}"'))
    return path


def test_a_run_interrupted_among_its_blocks_resumes_to_the_same_bytes(blocked, monkeypatch):
    import chirpsift.run.driver as driver

    folder, _, _, _ = blocked
    path = _another_output(folder, "out-resume")
    real, seen = driver.execute, []

    def interrupted(unit, analysis, **kwargs):
        if unit.stage == "search":
            seen.append(unit.key)
            if len(seen) == 17:
                raise KeyboardInterrupt
        return real(unit, analysis, **kwargs)

    monkeypatch.setattr(driver, "execute", interrupted)
    with pytest.raises(KeyboardInterrupt):
        run_analysis(load_analysis(path), stop_after="merge")
    monkeypatch.setattr(driver, "execute", real)
    recorded = json.loads((folder / "out-resume" / "manifest.json").read_text())["units"]
    assert sum(k.startswith("search/") for k in recorded) == 16 and not temporaries(folder / "out-resume")
    result = run_analysis(load_analysis(path), stop_after="merge")
    assert len(result.ran) == 48 - 16 + 2 and not any(k.startswith("layout/") for k in result.ran)
    assert outputs(folder / "out-resume") == outputs(folder / "out")


def test_a_block_file_of_another_unit_is_named_by_the_merge(blocked):
    import shutil

    from chirpsift.run.stages import UnitOutputError, execute

    folder, _, _, _ = blocked
    shutil.copytree(folder / "out", folder / "out-swapped")
    analysis = load_analysis(_another_output(folder, "out-swapped"))
    merge = next(u for u in plan(analysis) if u.key == "merge/Kestrel")
    first, second = (folder / "out-swapped" / "peaks" / "Kestrel" / f"block-{T0 + k * BLOCK:.3f}-templates-0-1.parquet"
                     for k in (3, 4))
    first.write_bytes(second.read_bytes())  # a whole, valid file, of the next block
    with pytest.raises(UnitOutputError, match=rf"merge/Kestrel: search/Kestrel/{T0 + 3 * BLOCK:.3f}/0-1: its file "
                                              rf"holds the peaks of another unit \(block from {T0 + 4 * BLOCK!r} s"):
        execute(merge, analysis)


def test_a_merge_planned_before_the_files_changed_names_the_change(blocked):
    from chirpsift.run.stages import UnitOutputError, execute

    folder, path, _, _ = blocked
    analysis = load_analysis(path)
    merge = next(u for u in plan(analysis) if u.key == "merge/Kestrel")
    extra = folder / "kestrel" / "kestrel-9.npz"  # a new file after a gap: a span no layout covers
    np.savez(extra, strain=np.zeros(int(10 * FS)), sample_rate=FS, t0=T0 + 1000.0)
    try:
        with pytest.raises(UnitOutputError, match="merge/Kestrel: the layouts cover 1 of the 2 spans of the site's "
                                                  "files: its files changed during the run"):
            execute(merge, analysis)
    finally:
        extra.unlink()


def test_a_span_laid_out_block_by_block_equals_the_whole_span_laid_out(tmp_path):
    # Outside truths: where the non-finite samples were put, and where the glitch is (each
    # must be excluded or gated); consistency: the layout the run publishes from its
    # per-block scan and gates units equals CatalogueSearch.lay_out + find_gates of the
    # whole span, which search_catalogue uses.
    n = int(DURATION * FS)
    x = synthetic.colored_gaussian_noise(n, FS, "gen2-zero-detuned", seed=11, f_low=20.0)
    nan_runs = [(int(119.5 * FS), int(120.5 * FS)), (int(599.9 * FS), int(600.1 * FS))]  # across block edges
    for a, b in nan_runs:
        x[a:b] = np.nan
    # a loud burst at the edge of the second stretch's second whitening block (64 x 2 s from
    # its start at 120.5 s), so its loud samples come from two gates units
    t = np.arange(n) / FS
    glitch = 120.5 + 128.0
    x += 500 * np.nanstd(x) * np.exp(-0.5 * ((t - glitch) / 0.05) ** 2) * np.sin(2 * np.pi * 60.0 * (t - glitch))
    for site in ("kestrel", "heron"):  # a run needs two sites; the second holds the same data
        (tmp_path / site).mkdir()
        np.savez(tmp_path / site / "k.npz", strain=x, sample_rate=FS, t0=T0)
    path = _analysis(tmp_path, f"""\
f-low = {F_LOW}
welch-duration = 2.0
segment-duration = {SEGMENT}
gate-threshold = 20.0
nonfinite = "skip"
""", f"""\
seconds-per-unit = {BLOCK}
""")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = run_analysis(load_analysis(path), stop_after="layout")
    assert sum(k.startswith("scan/Kestrel/") for k in result.ran) == 12
    assert sum(k.startswith("gates/Kestrel/") for k in result.ran) == 12
    published = json.loads((tmp_path / "out" / "layouts" / "Kestrel" / f"span-{T0:.3f}.json").read_text())

    span = read_catalogue(str(tmp_path / "kestrel" / "k.npz")).spans[0]
    search = CatalogueSearch(FS, BANK, f_low=F_LOW, welch_duration=2.0, segment_duration=SEGMENT,
                             gate_threshold=20.0, nonfinite="skip")
    whole = search.find_gates(search.lay_out(span)).as_dict()
    for key in ("vetoed", "nonfinite", "short", "stretches", "gates"):
        assert published[key] == whole[key], key
    assert published["nonfinite"] == [list(r) for r in nan_runs]
    gates = [(s[0] + a, s[0] + b) for s, gs in zip(published["stretches"], published["gates"]) for a, b in gs]
    assert len(gates) == 1 and gates[0][0] < glitch * FS < gates[0][1]
    # each block's units read about their block: the scans tile the span, and a gates unit
    # reads its whitening blocks (128 s) with their pads, or nothing
    scans = [json.loads(p.read_text()) for p in sorted((tmp_path / "out" / "scans" / "Kestrel").glob("*.json"))]
    assert sum(d["samples_read"] for d in scans) == n
    found = [json.loads(p.read_text()) for p in (tmp_path / "out" / "gates" / "Kestrel").glob("*.json")]
    assert max(d["samples_read"] for d in found) <= (128 + 2 * 2) * FS + 2
    # the burst's gate was joined from the loud samples of two units (blocks 240-300 s and 120-180 s)
    assert sum(any(d["gates"][k] for k in range(len(d["gates"]))) for d in found) == 2
