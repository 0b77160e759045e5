"""The stages of ``chirpsift run`` and their units: what each reads, computes and publishes.

A run is a plan of units, each with a stable key, run in plan order. A unit reads only
published files (the analysis's inputs and earlier units' outputs), publishes its files
atomically into the output folder and returns facts for the manifest; it never writes
the manifest. Running a unit twice on the same inputs publishes the same bytes (no
clock time, no host name in any output), so a unit can be redone at any time.

======================================  ========================================  ===================================
unit key                                publishes                                 what
======================================  ========================================  ===================================
``bank``                                ``bank.parquet``                          the template bank (Bank.save layout)
``scan/<site>/<start>``                 ``scans/<site>/block-<start>.json``       the non-finite runs of one block of
                                                                                  time (:meth:`~chirpsift.pipeline.
                                                                                  CatalogueSearch.scan`)
``gates/<site>/<start>``                ``gates/<site>/block-<start>.json``       the gates from the whitening blocks
                                                                                  that start in the block
                                                                                  (:meth:`~chirpsift.pipeline.
                                                                                  CatalogueSearch.find_gates`)
``layout/<site>/<t0>``                  ``layouts/<site>/span-<t0>.json``         one span of abutting files: its
                                                                                  stretches, segment plans, gates,
                                                                                  vetoed and non-finite samples, from
                                                                                  its blocks' scans and gates
``search/<site>/<start>/<lo>-<hi>``     ``peaks/<site>/block-<start>-``           the segments of one block of time
                                        ``templates-<lo>-<hi>.parquet``           (from ``<start>`` s) filtered with
                                                                                  templates lo to hi: their kernel
                                                                                  peaks, not yet clustered
``merge/<site>``                        ``triggers/<site>.parquet``               every block's peaks clustered and
                                                                                  ranked per stretch, in one table and
                                                                                  summary
``spectrum/<site>``                     ``spectra/<site>.parquet``                amplitude spectral density
``background``                          ``background.parquet``                    time-slide coincidences
``candidates``                          ``candidates.parquet``                    zero-lag coincidences with FARs
``injections``                          ``injections/injections.parquet``         simulated binaries
``inject-gates/<site>/<start>``         ``injections/gates/...``                  a block's gates with the signals
``inject-layout/<site>/<t0>``           ``injections/layouts/...``                a span laid out with the signals
``inject-search/<site>/<start>/...``    ``injections/peaks/...``                  a block filtered with the signals
``inject-merge/<site>``                 ``injections/triggers/<site>.parquet``    the site's blocks in one table
``found-missed``                        ``injections/found_missed.parquet``       each injection found or missed
``sensitivity``                         ``injections/sensitivity.json``           efficiency, range and VT
``report``                              ``report/...``                            the HTML report and its plots
======================================  ========================================  ===================================

Unit size: one layout unit per span of abutting files (``<t0>`` its start time, in s with
millisecond digits); per block of ``seconds-per-unit`` seconds of the span
(``[engine]``; blocks counted from the span's start, ``<start>`` the block's start time,
the last block shorter), one scan unit, one gates unit and one search unit per sub-bank
of ``templates-per-unit`` templates (``<lo>-<hi>`` the first and last template, counted
from 0). The plan follows from the files' headers and the bank alone, before any unit
runs.

Each step is a method of :class:`~chirpsift.pipeline.streaming.CatalogueSearch`, the
steps :func:`~chirpsift.pipeline.search_catalogue` runs in one process. A span is laid
out in three steps, so that no unit reads more than about a block: the scan units read
their blocks for non-finite samples; each gates unit plans the span's stretches from all
its scans (reading no strain) and examines the gating whitening blocks that start in its
block (each whitened with its own PSD, so they can be examined apart); the layout unit
joins the runs and gates (reading no strain) and publishes the plan of the whole span as
:func:`~chirpsift.pipeline.search_catalogue` makes it (segments planned over each whole
stretch from the whole bank's longest template), identical to a layout of the whole span
in one process. The injection stages reuse the scans (added signals change no sample's
finiteness) and find their own gates. A search unit reads the layout and only its own
segments and the blocks their PSDs come from; a segment belongs to the block where its
valid output starts, so the blocks share out every segment once. It publishes the
kernel's peaks of its segments before any clustering over the stretch: that clustering
keeps a peak when no louder peak lies within ``peak-window``, a rule that cannot be
applied block by block (a peak suppressed within its own block may still suppress one
across the block's edge), so the merge gathers every block's and sub-bank's peaks of a stretch and clusters and ranks
them at once, as the search of the whole stretch does. The merged triggers are therefore
bit-identical to one search of the whole catalogue with the whole bank, and so to an
in-memory search of each span, for any block and sub-bank size. A span with nothing long
enough to search publishes a layout without stretches and empty peak tables; the merged
live-time table says why.
"""

from __future__ import annotations

import bisect
import glob
import json
import os
import re
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..bank import Bank, place_bank
from ..io import read_triggers, write_triggers
from ..inject import draw_injections, efficiency, found_missed, injection_snr, project, sensitivity
from ..io.atomic import write_json_atomic
from ..io.catalogue import Span, read_catalogue
from ..network import coincidences
from ..network.coincidence import CAUTIONS
from ..network.far import YEAR, false_alarm_rate
from ..io.vetoes import check_vetoes
from ..condition import merge_intervals
from ..pipeline.streaming import PEAK_DTYPE, CatalogueSearch
from ..spectrum import welch

__all__ = ["Unit", "STAGES", "plan", "unit_inputs", "execute", "catalogue_of", "read_times", "sub_banks", "blocks",
           "UnitOutputError", "SPECTRUM_CHUNKS", "SPECTRUM_CHUNK_WELCH", "CANDIDATE_EXTRA"]

#: Stages in the order they run.
STAGES = ("bank", "scan", "gates", "layout", "search", "merge", "spectrum", "background", "candidates", "injections",
          "inject-gates", "inject-layout", "inject-search", "inject-merge", "found-missed", "sensitivity", "report")
#: Distance bins of the efficiency table.
EFFICIENCY_BINS = 8
#: At most this many stretches of analysed data go into a site's spectrum.
SPECTRUM_CHUNKS = 64
#: Each spectrum stretch lasts this many Welch segments (``welch_duration``).
SPECTRUM_CHUNK_WELCH = 16
#: Columns the candidates unit adds to :func:`chirpsift.coincidences`' table.
CANDIDATE_EXTRA = (("m1", "f8"), ("m2", "f8"), ("spin1", "f8"), ("spin2", "f8"), ("far_bound", "?"))

_GLOB_CHARS = "*?["


@dataclass(frozen=True)
class Unit:
    """One unit of work of a run.

    Attributes
    ----------
    key : str
        Stable key (``"merge/Kestrel"``), the unit's name in the manifest.
    stage : str
        One of :data:`STAGES`.
    outputs : tuple of str
        Files it publishes, relative to the output folder; the last is written last.
    after : tuple of str
        Keys of the units whose outputs it reads.
    site : str or None
        The site of a per-site unit.
    span : float or None
        Start time (s) of the span a scan, gates, layout or search unit covers.
    files : tuple of str
        The strain files such a unit reads (its span's).
    templates : (int, int) or None
        The templates ``lo <= k < hi`` of the bank a search unit filters.
    block : (int, int) or None
        The samples ``a <= k < b`` of the span a scan or gates unit covers, and where the
        valid output of the segments a search unit filters starts (its block of time).
    """

    key: str
    stage: str
    outputs: tuple[str, ...]
    after: tuple[str, ...] = ()
    site: str | None = None
    span: float | None = None
    files: tuple[str, ...] = ()
    templates: tuple[int, int] | None = None
    block: tuple[int, int] | None = None


class UnitOutputError(ValueError):
    """Files of planned units are missing, damaged or not what the manifest recorded (merge)."""


def sub_banks(n: int, size: int) -> list[tuple[int, int]]:
    """Split ``n`` templates into consecutive ``(lo, hi)`` ranges of at most ``size``, as even as possible.

    Examples
    --------
    >>> from chirpsift.run.stages import sub_banks
    >>> sub_banks(10, 4)
    [(0, 3), (3, 7), (7, 10)]
    >>> sub_banks(3, 256)
    [(0, 3)]
    """
    if n <= 0:
        return []
    k = -(-n // size)
    edges = [round(i * n / k) for i in range(k + 1)]
    return list(zip(edges[:-1], edges[1:]))


def blocks(n: int, size: int) -> list[tuple[int, int]]:
    """Split ``n`` samples into consecutive ``(a, b)`` blocks of ``size``, the last shorter.

    Examples
    --------
    >>> from chirpsift.run.stages import blocks
    >>> blocks(10, 4)
    [(0, 4), (4, 8), (8, 10)]
    """
    return [(a, min(a + size, n)) for a in range(0, n, size)]


def _bank_size(analysis) -> int:
    """Templates in the analysis's bank (0 when it cannot be read yet: the bank unit says why).

    A bank placed from a region is known once the bank unit has published it; the driver
    runs that unit before it plans the rest.
    """
    source = analysis.bank_file if analysis.bank_region is None else analysis.output / "bank.parquet"
    try:
        return len(Bank.load(source))
    except (OSError, ValueError):
        return 0


def plan(analysis) -> list[Unit]:
    """Every unit of a run, in the order they run.

    Parameters
    ----------
    analysis : chirpsift.run.Analysis
        The loaded analysis file.

    Returns
    -------
    list of Unit
    """
    from ..report.html import report_files

    names = analysis.site_names
    units = [Unit("bank", "bank", ("bank.parquet",))]
    found = {n: catalogue_of(analysis.data[n]).spans for n in names}
    banks = sub_banks(_bank_size(analysis), analysis.engine.templates_per_unit)
    seconds = analysis.engine.seconds_per_unit

    def span_blocks(span):
        size = max(1, int(round(seconds * span.sample_rate)))
        return [(a, b, _block_label(span, a)) for a, b in blocks(span.n, size)]

    # per site, per span: its label, files and blocks
    spans = {n: [(span, f"{span.t0:.3f}", tuple(str(f.path) for f in span.files), span_blocks(span))
                 for span in found[n]] for n in names}

    def span_units(layout, stage, prefix, after):
        gates_stage = "gates" if stage == "search" else "inject-gates"
        out = []
        # the layout's first steps, per block: non-finite runs (found once, for both flows), then gates
        for n in names if stage == "search" else ():
            for span, _, paths, parts in spans[n]:
                out += [Unit(f"scan/{n}/{start}", "scan", (_block_file("", "scans", n, start),), (), n, span.t0,
                             paths, None, (a, b)) for a, b, start in parts]
        for n in names:
            for span, _, paths, parts in spans[n]:
                scans = tuple(f"scan/{n}/{start}" for _, _, start in parts)
                out += [Unit(f"{gates_stage}/{n}/{start}", gates_stage, (_block_file(prefix, "gates", n, start),),
                             (*after, *scans), n, span.t0, paths, None, (a, b)) for a, b, start in parts]
        for n in names:
            for span, label, paths, parts in spans[n]:
                steps = tuple(f"{kind}/{n}/{start}" for kind in ("scan", gates_stage) for _, _, start in parts)
                out.append(Unit(f"{layout}/{n}/{label}", layout, (_layout_file(prefix, n, label),),
                                (*after, *steps), n, span.t0, paths))
        for n in names:
            for span, label, paths, parts in spans[n]:
                for a, b, start in parts:
                    for lo, hi in banks:
                        out.append(Unit(f"{stage}/{n}/{start}/{lo}-{hi - 1}", stage,
                                        (_peaks_file(prefix, n, start, lo, hi - 1),),
                                        (*after, f"{layout}/{n}/{label}"), n, span.t0, paths, (lo, hi), (a, b)))
        merge = "merge" if stage == "search" else "inject-merge"
        out += [Unit(f"{merge}/{n}", merge, (f"{prefix}triggers/{n}.parquet",),
                     ("bank", *(u.key for u in out if u.site == n and u.stage in (layout, stage))), n)
                for n in names]
        return out

    units += span_units("layout", "search", "", ("bank",))
    units += [Unit(f"spectrum/{n}", "spectrum", (f"spectra/{n}.parquet",), (f"merge/{n}",), n) for n in names]
    merged = tuple(f"merge/{n}" for n in names)
    units.append(Unit("background", "background", ("background.parquet",), merged))
    units.append(Unit("candidates", "candidates", ("candidates.parquet",), ("bank", *merged, "background")))
    if analysis.injections is not None:
        units.append(Unit("injections", "injections", ("injections/injections.parquet",),
                          (*merged, *(f"spectrum/{n}" for n in names))))
        units += span_units("inject-layout", "inject-search", "injections/", ("bank", "injections"))
        units.append(Unit("found-missed", "found-missed", ("injections/found_missed.parquet",),
                          ("injections", "background", *(f"inject-merge/{n}" for n in names))))
        units.append(Unit("sensitivity", "sensitivity", ("injections/sensitivity.json",),
                          ("found-missed", "candidates")))
    everything = tuple(u.key for u in units)
    pages = report_files(analysis.injections is not None)
    units.append(Unit("report", "report", tuple(f"report/{f}" for f in pages), everything))
    outputs = [rel for u in units for rel in u.outputs]
    if len(set(outputs)) != len(outputs) or len({u.key for u in units}) != len(units):  # pragma: no cover
        raise AssertionError("two units of the plan share a key or an output")
    return units



def _data_files(patterns) -> list[list]:
    """``[path, bytes, mtime_ns]`` of every file the patterns name now (missing ones left out)."""
    out = []
    for pattern in patterns:
        found = sorted(glob.glob(pattern, recursive=True)) if any(c in pattern for c in _GLOB_CHARS) else [pattern]
        for f in found:
            try:
                st = os.stat(f)
            except OSError:
                continue
            if not os.path.isdir(f):
                out.append([os.path.abspath(f), st.st_size, st.st_mtime_ns])
    return out


def _veto_stamp(vetoes):
    if isinstance(vetoes, str):
        return _data_files([vetoes])
    return vetoes


def unit_inputs(unit: Unit, analysis, manifest) -> dict:
    """Describe what a unit reads, for its fingerprint.

    The upstream units' published digests, the settings the unit uses and, for units
    that read strain, the data files' paths, sizes and modification times. The analysis
    as a whole is pinned by the manifest's settings hash.

    Parameters
    ----------
    unit : Unit
        The unit.
    analysis : chirpsift.run.Analysis
        The analysis.
    manifest : chirpsift.run.Manifest
        The manifest, holding every unit of ``unit.after`` as complete.

    Returns
    -------
    dict
    """
    inputs = {"unit": unit.key, "after": {k: manifest.digest(k) for k in unit.after}}
    if unit.stage == "bank":
        inputs["bank"] = (_data_files([str(analysis.bank_file)]) if analysis.bank_region is None
                          else {"place": analysis.bank_region})
    if unit.files:  # a span's search reads its own files only
        inputs["data"] = {unit.site: {"files": _data_files(unit.files),
                                      "vetoes": _veto_stamp(analysis.data[unit.site].vetoes)}}
    elif unit.stage in ("spectrum", "report"):
        sites = [unit.site] if unit.site is not None else analysis.site_names
        inputs["data"] = {n: {"files": _data_files(analysis.data[n].files),
                              "vetoes": _veto_stamp(analysis.data[n].vetoes)} for n in sites}
    return inputs


# ---------------------------------------------------------------------------
# reading what earlier units published
# ---------------------------------------------------------------------------
def catalogue_of(data):
    """Return the strain catalogue of one site's input (a :class:`~chirpsift.run.SiteData` or its dict form)."""
    d = data if isinstance(data, dict) else {
        "files": data.files, "dataset": data.dataset, "sample_rate": data.sample_rate,
        "sample_rate_attr": data.sample_rate_attr, "t0_attr": data.t0_attr}
    return read_catalogue(list(d["files"]), dataset=d["dataset"], sample_rate=d["sample_rate"],
                          sample_rate_attr=d["sample_rate_attr"], t0_attr=d["t0_attr"])


def read_times(catalogue, start: float, stop: float) -> tuple[float, np.ndarray]:
    """Read the samples of a catalogue from ``start`` to ``stop`` (s), clipped to the span holding ``start``.

    Returns
    -------
    t0 : float
        Time of the first sample returned (s).
    x : ndarray of float64
    """
    for span in catalogue.spans:
        if span.t0 <= start < span.end:
            fs = span.sample_rate
            i0 = int(np.ceil((start - span.t0) * fs - 1e-6))
            i1 = min(int(np.floor((stop - span.t0) * fs + 1e-6)), span.n)
            return span.t0 + i0 / fs, span.read(i0, max(i0, i1))
    raise ValueError(f"no data at t={start!r} s in the catalogue")


def _site_tables(folder: Path, names):
    tables, analysed, meta = {}, {}, {}
    for n in names:
        tables[n], meta[n] = read_triggers(folder / "triggers" / f"{n}.parquet")
        analysed[n] = np.asarray(meta[n]["analysed"], dtype=np.float64).reshape(-1, 2)
    return tables, analysed, meta


def _network_call(analysis, tables, analysed, n_slides):
    return coincidences(tables, list(analysis.sites), analysed=analysed, n_slides=n_slides,
                        slide_step=analysis.slide_step, window=analysis.allowance,
                        peak_window=analysis.search.peak_window, full_output=True)


# ---------------------------------------------------------------------------
# the units
# ---------------------------------------------------------------------------
def _bank(analysis, folder: Path, unit: Unit, progress: bool) -> dict:
    if analysis.bank_region is not None:
        bank = place_bank(**analysis.bank_region, progress=progress)
    else:
        bank = Bank.load(analysis.bank_file)
        if len(bank) == 0:
            raise ValueError(f"{analysis.bank_file}: the bank holds no templates")
    bank.save(folder / unit.outputs[0])
    return {"rows": len(bank)}


def _span_of(analysis, folder: Path, unit: Unit):
    """Return the span a scan, gates, layout or search unit reads (with the signals added for the injection stages)."""
    whole = catalogue_of(analysis.data[unit.site])
    span = next((s for s in whole.spans if s.t0 == unit.span), None)
    if span is None:
        raise ValueError(f"site {unit.site}: no span of its files starts at {unit.span!r} s any more; the files "
                         "changed during the run")
    if unit.stage.startswith("inject-"):
        injections, _ = read_triggers(folder / "injections" / "injections.parquet")
        site_obj = next(s for s in analysis.sites if s.name == unit.site)
        span = _InjectedSpan(span.t0, span.sample_rate, span.files, span.offsets, span.n, injections=injections,
                             site=site_obj, f_low=analysis.search.f_low)
    return span


def _catalogue_search(analysis, folder: Path, sample_rate: float, templates=None) -> CatalogueSearch:
    """Return the search's steps with the analysis's settings and the run's bank (whole, or a sub-bank)."""
    settings = analysis.search.as_dict()
    f_low = settings.pop("f_low")
    return CatalogueSearch(sample_rate, Bank.load(folder / "bank.parquet"), f_low=f_low, templates=templates,
                           **settings)


def _layout_file(prefix: str, site: str, span: str) -> str:
    """Return the file a span's layout unit publishes (``span``: its start, s, with millisecond digits)."""
    return f"{prefix}layouts/{site}/span-{span}.json"


def _peaks_file(prefix: str, site: str, start: str, lo, last) -> str:
    """Return the file a search unit publishes: the block from ``start`` s, templates ``lo`` to ``last``."""
    return f"{prefix}peaks/{site}/block-{start}-templates-{lo}-{last}.parquet"


def _block_label(span, a: int) -> str:
    """Return the label of the block of ``span`` from sample ``a``: its start time, s, with millisecond digits."""
    return f"{span.t0 + a / span.sample_rate:.3f}"


def _block_file(prefix: str, kind: str, site: str, start: str) -> str:
    """Return the file a scan or gates unit publishes: ``kind`` of the block from ``start`` s."""
    return f"{prefix}{kind}/{site}/block-{start}.json"


def _scan(analysis, folder: Path, unit: Unit, progress: bool) -> dict:
    span = _span_of(analysis, folder, unit)
    runs, read = CatalogueSearch.scan(span, unit.block)
    write_json_atomic(folder / unit.outputs[0], {
        "table": "scan", "site": unit.site, "span": span.t0, "n": span.n, "block": list(unit.block),
        "runs": [list(r) for r in runs], "samples_read": read})
    return {"runs": len(runs)}


def _read_block_docs(folder: Path, unit: Unit, kind: str, span) -> list[dict]:
    """Return the scan or gates documents of ``unit``'s span, in block order, each checked against its unit."""
    prefix = "injections/" if kind == "gates" and unit.stage.startswith("inject-") else ""
    docs = []
    for key in unit.after:
        if key.split("/")[0] not in (("scan",) if kind == "scan" else ("gates", "inject-gates")):
            continue
        start = key.split("/")[2]
        rel = _block_file(prefix, "scans" if kind == "scan" else "gates", unit.site, start)
        try:
            doc = json.loads((folder / rel).read_text(encoding="utf-8"))
            a, b = doc["block"]
            fits = (doc["table"] == kind and doc["span"] == span.t0 and doc["n"] == span.n
                    and _block_label(span, a) == start)
        except (OSError, ValueError, KeyError, TypeError) as exc:
            raise UnitOutputError(f"{unit.key}: {key}: {rel} is not a readable {kind} of its block ({exc}); run "
                                  "the same command again") from None
        if not fits:
            raise UnitOutputError(f"{unit.key}: {key}: {rel} describes another block or span; run the same command "
                                  "again")
        docs.append(doc)
    return docs


def _stretches_of(analysis, folder: Path, unit: Unit, span, search, strict: bool):
    """Return the span's layout without gates, from its blocks' scans (reads no strain)."""
    docs = _read_block_docs(folder, unit, "scan", span)
    runs = merge_intervals(tuple(r) for doc in docs for r in doc["runs"])  # a run across a block edge made one
    vetoes = check_vetoes(analysis.data[unit.site].vetoes)
    return search.lay_out(span, vetoes, scanned=(runs, sum(doc["samples_read"] for doc in docs)), strict=strict)


def _gates(analysis, folder: Path, unit: Unit, progress: bool) -> dict:
    span = _span_of(analysis, folder, unit)
    search = _catalogue_search(analysis, folder, span.sample_rate)
    # The stretches are planned here as the layout unit plans them; a span refused for its
    # non-finite samples is refused there, once, by the layout unit.
    layout = search.find_gates(_stretches_of(analysis, folder, unit, span, search, strict=False), unit.block)
    write_json_atomic(folder / unit.outputs[0], {
        "table": "gates", "site": unit.site, "span": span.t0, "n": span.n, "block": list(unit.block),
        "stretches": [[s.start, s.stop] for s in layout.stretches],
        "gates": [[list(g) for g in gates] for gates in layout.gates],
        "samples_read": layout.samples_read, "largest": layout.largest})
    return {"gates": sum(len(g) for g in layout.gates)}


def _layout(analysis, folder: Path, unit: Unit, progress: bool) -> dict:
    span = _span_of(analysis, folder, unit)
    search = _catalogue_search(analysis, folder, span.sample_rate)
    layout = _stretches_of(analysis, folder, unit, span, search, strict=True)
    parts, read, largest = [], layout.samples_read, layout.largest
    stretches = [[s.start, s.stop] for s in layout.stretches]
    for doc in _read_block_docs(folder, unit, "gates", span):
        if doc["stretches"] != stretches:
            start = _block_label(span, doc['block'][0])
            raise UnitOutputError(f"{unit.key}: the gates of the block from {start} s were found in other stretches "
                                  "than the span's; run the same command again")
        parts.append([[tuple(g) for g in gates] for gates in doc["gates"]])
        read, largest = read + doc["samples_read"], max(largest, doc["largest"])
    layout = search.join_gates(layout, parts)._replace(samples_read=read, largest=largest)
    with warnings.catch_warnings():  # the merge warns, once for the site
        warnings.simplefilter("ignore")
        search.check_layouts([layout], allow_empty=True)
    doc = {"table": "layout", "site": unit.site, "files": list(unit.files), **layout.as_dict()}
    write_json_atomic(folder / unit.outputs[0], doc)
    return {"stretches": len(layout.stretches), "segments": sum(len(s.plans) for s in layout.stretches)}


def _search(analysis, folder: Path, unit: Unit, progress: bool) -> dict:
    from ..pipeline.single_site import progress_bar

    span = _span_of(analysis, folder, unit)
    search = _catalogue_search(analysis, folder, span.sample_rate, unit.templates)
    prefix = "injections/" if unit.stage == "inject-search" else ""
    doc = json.loads((folder / _layout_file(prefix, unit.site, f"{span.t0:.3f}")).read_text(encoding="utf-8"))
    layout = search.layout_from_dict(span, doc)
    bar = None
    if progress:
        chosen = search.block_plans(layout, unit.block)
        bar = progress_bar([s._replace(plans=p) for s, p in zip(layout.stretches, chosen)], search.sub)
    try:
        done = search.filter(layout, block=unit.block, bar=bar)
    finally:
        if bar is not None:
            bar.close()
    peaks = np.concatenate(done.peaks) if done.peaks else np.zeros(0, dtype=PEAK_DTYPE)
    fs = span.sample_rate
    write_triggers(folder / unit.outputs[0], peaks, {
        "table": "peaks",
        "site": unit.site,
        "span": [span.t0, span.end],
        "block": [span.t0 + unit.block[0] / fs, span.t0 + unit.block[1] / fs],
        "templates": list(unit.templates),
        "rows": [int(len(p)) for p in done.peaks],  # per stretch of the layout, in order
        "segments": done.segments,
        "samples_read": done.samples_read,
        "largest_block": done.largest,
    })
    return {"rows": int(len(peaks))}


_PEAK_SCHEMA = [(name, str(np.dtype(PEAK_DTYPE[name]))) for name in PEAK_DTYPE.names]
_UNIT_OUTPUT = re.compile(r"^(?P<stage>[a-z-]+)/(?P<site>[^/]+)/(?P<start>[^/]+)/(?P<lo>\d+)-(?P<last>\d+)$")
_LAYOUT_KEY = re.compile(r"^(?P<stage>[a-z-]+)/(?P<site>[^/]+)/(?P<span>[^/]+)$")


def _unit_file(prefix: str, key: str) -> str:
    """Return the file a layout or search unit publishes, from its key."""
    m = _UNIT_OUTPUT.match(key)
    if m is None:
        m = _LAYOUT_KEY.match(key)
        return _layout_file(prefix, m["site"], m["span"])
    return _peaks_file(prefix, m["site"], m["start"], m["lo"], m["last"])


def _check_unit_files(folder: Path, unit: Unit, prefix: str, upstream) -> tuple[dict, list]:
    """Every planned unit of a merge, present once and valid, or a UnitOutputError naming the rest.

    Valid: a layout that reads as JSON; a block's peaks with a readable Parquet footer,
    the peak table's columns and the row count the manifest recorded (when ``upstream``
    holds the manifest's entries). Returns the layouts (key to document) and the blocks'
    ``(key, path)`` in plan order.
    """
    import pyarrow.parquet as pq

    keys = [k for k in unit.after if k != "bank"]
    layouts, found, problems = {}, [], []
    for key in keys:
        rel = next(iter(upstream[key]["files"])) if upstream and key in upstream else _unit_file(prefix, key)
        path = folder / rel
        if rel.endswith(".json"):
            try:
                doc = json.loads(path.read_text(encoding="utf-8"))
                doc["stretches"], doc["gates"]
                layouts[key] = doc
            except FileNotFoundError:
                problems.append(f"{key}: {rel} is missing")
            except (OSError, ValueError, KeyError, TypeError, UnicodeDecodeError):
                problems.append(f"{key}: {rel} is not a readable layout")
            continue
        try:
            meta = pq.read_metadata(path)
            schema = meta.schema.to_arrow_schema()
        except FileNotFoundError:
            problems.append(f"{key}: {rel} is missing")
            continue
        except (OSError, ValueError) as exc:  # pyarrow's ArrowInvalid is a ValueError
            problems.append(f"{key}: {rel} has no readable Parquet footer ({str(exc).splitlines()[0]})")
            continue
        if [(f.name, str(f.type)) for f in schema] != _expected_columns():
            problems.append(f"{key}: {rel} does not hold the peak table's columns")
            continue
        rows = upstream[key].get("rows") if upstream and key in upstream else None
        if rows is not None and meta.num_rows != rows:
            problems.append(f"{key}: {rel} holds {meta.num_rows} rows, the manifest recorded {rows}")
            continue
        found.append((key, path))
    planned = {Path(_unit_file(prefix, k)).name for k in keys}
    for sub in ("peaks", "layouts"):
        site_folder = folder / f"{prefix}{sub}" / unit.site
        stray = sorted(p.name for p in site_folder.iterdir() if p.is_file() and not p.name.startswith(".")
                       and p.name not in planned) if site_folder.is_dir() else []
        if stray:
            problems.append(f"{len(stray)} file(s) in {site_folder} belong to no planned unit "
                            f"({', '.join(stray[:3])}); they would be read with the site's results by a dataset "
                            "reader: remove them")
    if problems:
        raise UnitOutputError(f"{unit.key}: {len(problems)} problem(s) with the units it merges: "
                              + "; ".join(problems[:10]) + ("; ..." if len(problems) > 10 else "")
                              + "; run the same command again to redo them")
    return layouts, found


def _expected_columns() -> list[tuple[str, str]]:
    """Column names and Arrow types of a published peak table."""
    import pyarrow as pa

    return [(name, str(pa.from_numpy_dtype(np.dtype(kind)))) for name, kind in _PEAK_SCHEMA]


#: The run information of the site's search a merged trigger table carries, in this order.
_SUMMARY_KEYS = ("settings", "analysed", "live_time", "analysed_fraction", "live_time_table", "gates", "gated_time",
                 "excluded", "vetoed", "gaps", "short_stretches", "stretches", "segments", "segment_duration",
                 "sample_rate", "templates")


def _merge(analysis, folder: Path, unit: Unit, progress: bool, upstream=None) -> dict:
    prefix = "injections/" if unit.stage == "inject-merge" else ""
    docs, found = _check_unit_files(folder, unit, prefix, upstream)
    catalogue = catalogue_of(analysis.data[unit.site])
    search = _catalogue_search(analysis, folder, catalogue.sample_rate)
    spans = {f"{span.t0:.3f}": span for span in catalogue.spans}
    starts = [span.t0 for span in catalogue.spans]
    by_span: dict[float, list] = {}
    for key, path in found:  # plan order: blocks in time, sub-banks in template order
        k = max(0, bisect.bisect_right(starts, float(key.split("/")[2]) + 5e-4) - 1)
        by_span.setdefault(starts[k], []).append((key, path))
    layouts, ranked = [], []
    for key, doc in docs.items():
        label = key.split("/")[2]
        span = spans.get(label)
        if span is None:
            raise UnitOutputError(f"{unit.key}: no span of the site's files starts at {label} s any more: its files "
                                  "changed during the run; run the same command again")
        try:
            layout = search.layout_from_dict(span, doc)
        except ValueError as exc:
            raise UnitOutputError(f"{unit.key}: {key}: {exc}; run the same command again") from None
        parts: list[list] = [[] for _ in layout.stretches]
        covered: dict[tuple, list] = {}
        for bkey, path in by_span.get(span.t0, []):
            table, meta = read_triggers(path)
            m = _UNIT_OUTPUT.match(bkey)
            block, templates = meta.get("block", [None])[0], meta.get("templates")
            if block is None or f"{block:.3f}" != m["start"] or templates != [int(m["lo"]), int(m["last"]) + 1]:
                raise UnitOutputError(f"{unit.key}: {bkey}: its file holds the peaks of another unit (block from "
                                      f"{block!r} s, templates {templates}); run the same command again")
            rows = meta.get("rows", [])
            if meta.get("span", [None])[0] != span.t0 or len(rows) != len(layout.stretches) or sum(rows) != len(table):
                raise UnitOutputError(f"{unit.key}: {bkey}: its peaks do not fit the layout of the span from {label} "
                                      "s; run the same command again")
            edges = np.cumsum([0, *rows])
            for k in range(len(rows)):
                parts[k].append(table[edges[k]:edges[k + 1]])
            done = covered.setdefault(tuple(meta["templates"]), [0] * len(rows))
            for k, count in enumerate(meta["segments"]):
                done[k] += count
        expected = [len(s.plans) for s in layout.stretches]
        for templates, done in covered.items():
            if done != expected:
                raise UnitOutputError(f"{unit.key}: the blocks of templates {templates[0]}-{templates[1] - 1} of the "
                                      f"span from {label} s filtered {sum(done)} segments of its {sum(expected)}; "
                                      "run the same command again")
        layouts.append(layout)
        ranked.append([search.rank(p) for p in parts])
    laid_out = {p.span.t0 for p in layouts}
    if not layouts or laid_out != set(starts):  # the plan was made from other files
        raise UnitOutputError(f"{unit.key}: the layouts cover {len(laid_out)} of the {len(starts)} spans of the "
                              "site's files: its files changed during the run; run the same command again")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        search.check_layouts(layouts, allow_empty=True)
        search.check_gates(layouts, allow_empty=True)
        triggers, info = search.finish(catalogue, layouts, ranked)
    info["live_time_table"] = info["live_time_table"].as_dict()
    meta = {
        "table": "triggers",
        "site": unit.site,
        "spans": [[p.span.t0, p.span.end] for p in layouts],
        "files": [str(f.path) for f in catalogue.files],
        **{k: info[k] for k in _SUMMARY_KEYS},
        "units": len(found),
        "max_template_duration": info["max_template_duration"],
        "warnings": [f"{w.category.__name__}: {w.message}" for w in caught],
    }
    write_triggers(folder / unit.outputs[0], triggers, meta)
    return {"rows": int(len(triggers)), "live_time": float(info["live_time"])}


def _spectrum_chunks(analysed, length: float) -> list[tuple[float, float]]:
    """Up to SPECTRUM_CHUNKS stretches of ``length`` s inside the analysed intervals, spread evenly."""
    chunks = []
    for a, b in analysed:
        k = int((b - a) // length)
        chunks += [(a + i * length, a + (i + 1) * length) for i in range(k)]
    if len(chunks) > SPECTRUM_CHUNKS:
        pick = np.unique(np.round(np.linspace(0, len(chunks) - 1, SPECTRUM_CHUNKS)).astype(int))
        chunks = [chunks[i] for i in pick]
    return chunks


def _spectrum(analysis, folder: Path, unit: Unit, progress: bool) -> dict:
    _, meta = read_triggers(folder / "triggers" / f"{unit.site}.parquet")
    catalogue = catalogue_of(analysis.data[unit.site])
    fs = catalogue.sample_rate
    wd = analysis.search.welch_duration
    analysed = np.asarray(meta["analysed"], dtype=np.float64).reshape(-1, 2)
    length = SPECTRUM_CHUNK_WELCH * wd
    chunks = _spectrum_chunks(analysed, length)
    if not chunks and analysed.size:  # only short intervals: take the longest, if it holds 2 Welch segments
        a, b = max(analysed.tolist(), key=lambda iv: iv[1] - iv[0])
        if b - a >= 2 * wd:
            length, chunks = b - a, [(a, b)]
    n = int(round(length * fs))
    rows, used, freqs = [], [], None  # one PSD per stretch: memory of one stretch of data at a time
    for a, _ in chunks:
        _, x = read_times(catalogue, a, a + length + 1.0 / fs)
        if x.shape[0] >= n and np.all(np.isfinite(x[:n])):
            freqs, psd = welch(x[:n], fs, segment_duration=wd)
            rows.append(psd)
            used.append([a, a + length])
    cols = {"frequency": np.zeros(0), "asd_median": np.zeros(0), "asd_low": np.zeros(0), "asd_high": np.zeros(0)}
    if rows:
        asd = np.sqrt(np.stack(rows))
        low, med, high = np.percentile(asd, [10.0, 50.0, 90.0], axis=0)
        cols = {"frequency": freqs, "asd_median": med, "asd_low": low, "asd_high": high}
    write_triggers(folder / unit.outputs[0], cols, {
        "table": "spectrum", "site": unit.site, "chunks": used,
        "chunk_duration": length, "welch_duration": wd, "percentiles": [10, 50, 90],
        "unit": "1/sqrt(Hz)"})
    return {"rows": int(len(cols["frequency"])), "chunks": len(rows)}


def _background(analysis, folder: Path, unit: Unit, progress: bool) -> dict:
    tables, analysed, _ = _site_tables(folder, analysis.site_names)
    _, bg, info = _network_call(analysis, tables, analysed, analysis.slides)
    write_triggers(folder / unit.outputs[0], bg, {
        "table": "background", "sites": info["sites"], "windows": info["windows"], "allowance": info["allowance"],
        "peak_window": info["peak_window"], "slide_step": info["slide_step"], "n_slides": info["n_slides"],
        "common": info["common"], "live_time": info["live_time"], "background_time": info["background_time"],
        "excluded": info["excluded"], "cautions": CAUTIONS})
    return {"rows": int(len(bg))}


def _candidates(analysis, folder: Path, unit: Unit, progress: bool) -> dict:
    tables, analysed, _ = _site_tables(folder, analysis.site_names)
    cands, _, info = _network_call(analysis, tables, analysed, 0)
    bg, bg_meta = read_triggers(folder / "background.parquet")
    out = np.zeros(len(cands), dtype=cands.dtype.descr + list(CANDIDATE_EXTRA))
    for f in cands.dtype.names:
        out[f] = cands[f]
    bank = Bank.load(folder / "bank.parquet")
    t = cands["template"].astype(np.int64)
    out["m1"], out["m2"], out["spin1"], out["spin2"] = bank.m1[t], bank.m2[t], bank.chi1[t], bank.chi2[t]
    background_time = float(bg_meta["background_time"])
    if bg_meta["n_slides"]:
        far, bound = false_alarm_rate(cands["statistic"], bg["statistic"], background_time)
        out["far"], out["far_bound"] = far, bound
        with np.errstate(divide="ignore"):
            out["ifar"] = 1.0 / far
    write_triggers(folder / unit.outputs[0], out, {
        "table": "candidates", "sites": info["sites"], "live_time": info["live_time"],
        "live_time_years": info["live_time"] / YEAR, "background_time": background_time,
        "background_time_years": background_time / YEAR, "n_slides": bg_meta["n_slides"],
        "slide_step": bg_meta["slide_step"], "windows": info["windows"], "cautions": CAUTIONS})
    return {"rows": int(len(out))}


@dataclass(frozen=True, eq=False)
class _InjectedSpan(Span):
    """A span whose samples carry the simulated signals (added block by block as read)."""

    injections: np.ndarray | None = None
    site: object = None
    f_low: float = 0.0

    def read(self, start: int, stop: int) -> np.ndarray:
        """Read samples ``[start, stop)`` with the signals added (:func:`chirpsift.project`)."""
        x = super().read(start, stop)
        if stop > start and self.injections is not None and len(self.injections):
            fs = self.sample_rate
            x = x + project(self.injections, self.site, start=self.t0 + start / fs, duration=(stop - start) / fs,
                            sample_rate=fs, f_low=self.f_low, require_overlap=False)
        return x


def _common(analysed: dict) -> list[tuple[float, float]]:
    """Time analysed by every site (intervals in s)."""
    names = list(analysed)
    common = [tuple(iv) for iv in analysed[names[0]]]
    for n in names[1:]:
        out, other = [], [tuple(iv) for iv in analysed[n]]
        i = j = 0
        while i < len(common) and j < len(other):
            lo, hi = max(common[i][0], other[j][0]), min(common[i][1], other[j][1])
            if hi > lo:
                out.append((lo, hi))
            if common[i][1] < other[j][1]:
                i += 1
            else:
                j += 1
        common = out
    return common


def _psd_of(folder: Path, site: str):
    sp, _ = read_triggers(folder / "spectra" / f"{site}.parquet")
    return sp["frequency"], sp["asd_median"] ** 2


def _injections(analysis, folder: Path, unit: Unit, progress: bool) -> dict:
    cfg = analysis.injections
    _, analysed, _ = _site_tables(folder, analysis.site_names)
    common = _common(analysed)
    if not common:
        raise ValueError("no time is analysed by all sites at once: nowhere to put injections")
    inj = draw_injections(cfg["count"], m1=cfg["m1"], m2=cfg["m2"], chi1=cfg["spin1"], chi2=cfg["spin2"],
                          distance=cfg["distance"], distance_distribution=cfg["distance_distribution"],
                          start=common[0][0], end=common[-1][1], f_low=analysis.search.f_low, seed=cfg["seed"])
    write_triggers(folder / unit.outputs[0], inj, {"table": "injections", "settings": cfg,
                                                   "start": common[0][0], "end": common[-1][1]})
    return {"rows": int(len(inj))}


def _found_missed(analysis, folder: Path, unit: Unit, progress: bool) -> dict:
    names = analysis.site_names
    inj, _ = read_triggers(folder / "injections" / "injections.parquet")
    tables, analysed = {}, {}
    for n in names:
        tables[n], meta = read_triggers(folder / "injections" / "triggers" / f"{n}.parquet")
        analysed[n] = np.asarray(meta["analysed"], dtype=np.float64).reshape(-1, 2)
    cands, _, _ = _network_call(analysis, tables, analysed, 0)
    bg, bg_meta = read_triggers(folder / "background.parquet")
    if bg_meta["n_slides"]:  # ranked against the analysis's own background
        far, _ = false_alarm_rate(cands["statistic"], bg["statistic"], float(bg_meta["background_time"]))
        cands["far"] = far
        with np.errstate(divide="ignore"):
            cands["ifar"] = 1.0 / far
    f_low = analysis.search.f_low
    optimal = {}
    for site in analysis.sites:
        freqs, psd = _psd_of(folder, site.name)
        optimal[site.name] = injection_snr(inj, site, (freqs, psd), f_low=f_low, f_high=float(freqs[-1]) * 0.999)
    threshold = analysis.injections["found_ifar"]
    table = found_missed(inj, cands, optimal_snr=optimal, analysed=analysed,
                         ifar_threshold=threshold if threshold > 0 else None)
    write_triggers(folder / unit.outputs[0], table, {"table": "found-missed", "found_ifar": threshold,
                                                     "n_slides": bg_meta["n_slides"]})
    return {"rows": int(len(table)), "found": int(table["found"].sum())}


def _sensitivity(analysis, folder: Path, unit: Unit, progress: bool) -> dict:
    table, meta = read_triggers(folder / "injections" / "found_missed.parquet")
    _, c_meta = read_triggers(folder / "candidates.parquet")
    counted = table[table["analysed"]]
    doc = {"found_ifar": meta["found_ifar"], "injections": int(len(table)), "analysed_injections": int(len(counted)),
           "analysed_time": c_meta["live_time"], "sensitivity": None, "efficiency": []}
    if len(counted):
        sens = sensitivity(counted, counted["found"], analysed_time=c_meta["live_time"])
        doc["sensitivity"] = sens.as_dict()
        eff = efficiency(counted["distance"], counted["found"], bins=EFFICIENCY_BINS)
        doc["efficiency"] = [{k: row[k].item() for k in eff.dtype.names} for row in eff]
    doc["cautions"] = ("The sensitivity holds for this population and these data only; VT assumes the "
                       "sensitivity measured by the injections holds over all the analysed time.")
    write_json_atomic(folder / unit.outputs[0], doc)
    return {"found": int(counted["found"].sum()) if len(counted) else 0}


def _report(analysis, folder: Path, unit: Unit, progress: bool) -> dict:
    from ..report.html import write_report

    write_report(folder, top=analysis.top)
    return {}


_RUNNERS = {"bank": _bank, "scan": _scan, "gates": _gates, "inject-gates": _gates,
            "layout": _layout, "inject-layout": _layout, "search": _search, "merge": _merge,
            "spectrum": _spectrum, "background": _background,
            "candidates": _candidates, "injections": _injections, "inject-search": _search,
            "inject-merge": _merge, "found-missed": _found_missed, "sensitivity": _sensitivity, "report": _report}


def execute(unit: Unit, analysis, *, progress: bool = False, upstream: dict | None = None) -> dict:
    """Run one unit: compute and publish its files atomically.

    The same call in the driver's process or on a Dask worker: it reads only the
    analysis's inputs and the files of ``unit.after``, and never writes the manifest.

    Parameters
    ----------
    unit : Unit
        The unit.
    analysis : chirpsift.run.Analysis
        The analysis.
    progress : bool, optional
        Show the search's own progress bar.
    upstream : dict, optional
        The manifest's entries of ``unit.after`` (files, sizes, hashes, rows), which a
        merge checks its inputs against.

    Returns
    -------
    dict
        Facts for the manifest (``rows``: rows of its table).

    Raises
    ------
    UnitOutputError
        A merge found planned units missing or damaged (the message names them).
    """
    folder = Path(analysis.output)
    for rel in unit.outputs:
        (folder / rel).parent.mkdir(parents=True, exist_ok=True)
    if unit.stage in ("merge", "inject-merge"):
        return _merge(analysis, folder, unit, progress, upstream)
    return _RUNNERS[unit.stage](analysis, folder, unit, progress)


def execute_unit(unit: Unit, analysis, upstream: dict | None = None) -> dict:
    """:func:`execute` without a progress bar: the task a Dask worker runs for a unit."""
    return execute(unit, analysis, upstream=upstream)


