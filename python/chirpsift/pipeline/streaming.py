"""The search of a strain catalogue, block by block: any amount of data in bounded memory.

:func:`search_catalogue` runs the steps of :func:`chirpsift.search` (those of
:mod:`chirpsift.pipeline.single_site` that concern one stretch) over data read from the
catalogue's files as they are needed, each step a method of :class:`CatalogueSearch`
(which ``chirpsift run`` calls from separate units: a span's layout, a block of time's
filtering, a site's ranking):

1. per span of abutting files, vetoed times and non-finite runs (found by reading the
   span in chunks of :data:`SCAN_SAMPLES`, all at once or block by block) split it into
   stretches, planned exactly as :func:`chirpsift.search` plans the stretches between
   non-finite runs (segments from :func:`chirpsift.segments.plan_segments` over the whole
   stretch);
2. gates are found per stretch in the whitening blocks of
   :func:`chirpsift.gating.find_gates`, read one at a time (all at once, or the whitening
   blocks that start in one block of the span, then joined);
3. each stretch is filtered segment by segment; a segment and the block its PSD is
   estimated from are read (and gated) when the search reaches them, and samples are
   dropped once no later segment needs them;
4. each stretch's kernel peaks are clustered and ranked as :func:`chirpsift.search`
   does, and the live-time bookkeeping accounts for every sample.

So each sample is read at most three times (once per step), the memory held is a
few segments (and a PSD block) whatever the amount of data, and the triggers are those of
:func:`chirpsift.search` over the same samples held in memory, bit for bit.
"""

from __future__ import annotations

import operator
import warnings
from typing import NamedTuple

import numpy as np

from ..bank import Bank
from ..clustering import cluster_in_time
from ..condition import find_nonfinite_runs, merge_intervals, stretches_between, subtract_intervals
from ..gating import apply_gates, whitening_blocks
from ..io.catalogue import Catalogue, Span
from ..io.vetoes import check_vetoes
from ..segments import DURATION_MARGIN, padding, plan_segments
from ..triggers import TRIGGER_DTYPE, trigger_table
from .live_time import LiveTimeTable
from .settings import SearchSettings
from .single_site import (
    MIN_ANALYSED_FRACTION,
    AnalysedFractionWarning,
    ExcludedDataWarning,
    check_psd_argument,
    check_psd_duration,
    find_stretch_gates,
    fixed_segment_length,
    live_after_gates,
    longest_template,
    Stretch,
    cluster_and_rank,
    filter_stretch,
    plan_stretch,
    progress_bar,
)

__all__ = ["search_catalogue", "cluster_across_bank", "CatalogueSearch", "SpanLayout", "Filtered", "PEAK_DTYPE",
           "SCAN_SAMPLES"]

#: Samples read at a time when a span is scanned for non-finite samples.
SCAN_SAMPLES = 1 << 20


class _StretchData:
    """Samples ``[start, stop)`` of a span as a read-only 1-D sliceable, read on demand.

    Slices are served from a buffer that grows forward by reading only samples not
    yet held, and drops samples more than ``retain`` before the latest slice's start;
    a slice reaching behind the buffer is read again. With ``gates`` (intervals of
    the stretch), samples are gated as :func:`chirpsift.gating.apply_gates` gates the
    whole stretch.
    """

    def __init__(self, span: Span, start: int, stop: int, *, gates=(), sample_rate=1.0, taper=0.0, retain=0):
        self.shape = (stop - start,)
        self._span, self._start = span, start
        self._gates, self._fs, self._taper = list(gates), sample_rate, taper
        self._retain = retain
        self._lo = 0
        self._buf = np.zeros(0)
        self.samples_read = 0
        self.largest = 0

    def __len__(self) -> int:
        return self.shape[0]

    def _load(self, lo: int, hi: int) -> np.ndarray:
        x = self._span.read(self._start + lo, self._start + hi)
        self.samples_read += hi - lo
        if self._gates:
            x = apply_gates(x, self._fs, self._gates, taper=self._taper, start=lo)
        return x

    def __getitem__(self, key):
        if not isinstance(key, slice) or key.step not in (None, 1):
            raise TypeError("stretch data are read by contiguous slices only")
        lo, hi, _ = key.indices(self.shape[0])
        hi = max(hi, lo)
        blo, bhi = self._lo, self._lo + self._buf.shape[0]
        if lo < blo or lo > bhi:  # behind the buffer, or beyond it: start afresh
            buf, new_lo = self._load(lo, hi), lo
        else:
            new_lo = max(blo, lo - self._retain)
            kept = self._buf[new_lo - blo:]
            buf = np.concatenate([kept, self._load(bhi, hi)]) if hi > bhi else kept
        buf.flags.writeable = False
        self._buf, self._lo = buf, new_lo
        self.largest = max(self.largest, buf.shape[0])
        return buf[lo - new_lo:hi - new_lo]


#: Columns of a stretch's kernel peaks as :class:`CatalogueSearch` passes them between its
#: steps (:meth:`CatalogueSearch.filter` to :meth:`CatalogueSearch.rank`): those of
#: :data:`chirpsift.fused.PEAK_COLUMNS` that the trigger table keeps, with absolute time, in
#: the kernel's own types.
PEAK_DTYPE = np.dtype([("time", "f8"), ("template", "i8"), ("snr", "f8"), ("phase", "f8"), ("sigma", "f8"),
                       ("chi2", "f8"), ("chi2_dof", "i8")])


class SpanLayout(NamedTuple):
    """What becomes of each sample of one span: :meth:`CatalogueSearch.lay_out`'s result.

    Intervals are ``(start, stop)`` sample positions in the span; ``gates`` holds, per
    searched stretch, its gates relative to the stretch's start (empty until
    :meth:`CatalogueSearch.find_gates`). ``samples_read`` and ``largest`` count the
    samples read from files and the most held at once while it was made.
    """

    span: Span
    vetoed: list[tuple[int, int]]
    nonfinite: list[tuple[int, int]]  # outside vetoes
    short: list[tuple[int, int]]
    stretches: list  # single_site.Stretch, positions in the span
    gates: list[list[tuple[int, int]]]
    samples_read: int = 0
    largest: int = 0

    def as_dict(self) -> dict:
        """Return the layout as a JSON-friendly dict (the span as its start time and length).

        Each stretch is ``[start, stop, length]``: its segment plan follows from those and
        the search's pads (:meth:`CatalogueSearch.layout_from_dict`).
        """
        return {"t0": self.span.t0, "n": self.span.n, "sample_rate": self.span.sample_rate,
                "vetoed": [list(iv) for iv in self.vetoed], "nonfinite": [list(iv) for iv in self.nonfinite],
                "short": [list(iv) for iv in self.short],
                "stretches": [[s.start, s.stop, s.length] for s in self.stretches],
                "gates": [[list(g) for g in gates] for gates in self.gates],
                "samples_read": self.samples_read, "largest": self.largest}


def _nonfinite_runs(span: Span, start: int = 0, stop: int | None = None) -> tuple[list[tuple[int, int]], int]:
    """Non-finite runs of samples ``[start, stop)`` of a span (default all), read in chunks; also the samples read."""
    stop = span.n if stop is None else stop
    runs: list[tuple[int, int]] = []
    for lo in range(start, stop, SCAN_SAMPLES):
        hi = min(lo + SCAN_SAMPLES, stop)
        runs += [(lo + a, lo + b) for a, b in find_nonfinite_runs(span.read(lo, hi))]
    return merge_intervals(runs), stop - start  # a run across a chunk boundary made one


def _nothing_to_search(plans, settings, longest, pads, fixed_length, fs):
    longest_run = max((b - a for p in plans for a, b in p.short), default=0)
    where = (f"the longest stretch of the catalogue left by gaps, vetoes and non-finite samples has "
             f"{longest_run} samples ({longest_run / fs:g} s)")
    if fixed_length is not None and longest_run < fixed_length:
        return f"{where}, fewer than the {fixed_length}-sample ({fixed_length / fs:g} s) segments asked for"
    return (f"templates last up to {longest * DURATION_MARGIN:.4g} s from f_low={settings.f_low} Hz: with the "
            f"{settings.welch_duration} s whitening filter each segment discards {sum(pads) / fs:g} s, and {where}; "
            "raise f_low or give longer stretches of data")


def _seconds(span: Span, intervals):
    fs = span.sample_rate
    return [(span.t0 + a / fs, span.t0 + b / fs) for a, b in intervals]


def _as_peaks(columns: dict) -> np.ndarray:
    out = np.zeros(columns["time"].shape[0], dtype=PEAK_DTYPE)
    for name in PEAK_DTYPE.names:
        out[name] = columns[name]
    return out


class CatalogueSearch:
    """The steps of :func:`search_catalogue`, one call per step, for searches split into units.

    :func:`search_catalogue` is these steps run one after another; ``chirpsift run``
    runs the same steps in separate units: one :meth:`lay_out` (with
    :meth:`find_gates`) per span, one :meth:`filter` per block of time and sub-bank,
    and one :meth:`rank` per stretch and :meth:`finish` per site in the merge.

    1. :meth:`lay_out`: per span, vetoed times and non-finite runs (read in chunks of
       :data:`SCAN_SAMPLES`) split it into stretches, and segments are planned over each
       whole stretch; :meth:`check_layouts` then refuses a catalogue with nothing to
       search and warns of what is left out;
    2. :meth:`find_gates`: gates per stretch, in the whitening blocks of
       :func:`chirpsift.gating.find_gates`, read one at a time; :meth:`check_gates`
       warns of gated time (and refuses a gating that leaves nothing);
    3. :meth:`filter`: the segments of a span (all, or those whose valid output starts in
       a block of samples), each read (and gated) with the block its PSD is estimated
       from; returns each stretch's kernel peaks, not yet clustered;
    4. :meth:`rank`: a stretch's peaks, from any number of :meth:`filter` calls, clustered
       per template (and across the bank) and ranked, as :func:`chirpsift.search` does;
    5. :meth:`finish`: the trigger table and the run information of the catalogue.

    The kernel clusters peaks within each segment and a segment's PSD comes from its own
    block of data, so a segment's peaks do not depend on which other segments one
    :meth:`filter` call holds; clustering over a stretch is a local-maximum rule that
    cannot be split (a peak suppressed in one block may have suppressed one in the
    next), so :meth:`rank` takes the stretch's peaks from every block at once.

    Parameters
    ----------
    sample_rate : float
        Hz, the catalogue's.
    bank : Bank, structured array or mapping
        Template parameters (``m1``, ``m2`` in solar masses, optional ``chi1``, ``chi2``).
    f_low : float
        Lower frequency cutoff (Hz).
    psd, templates, **options
        As for :func:`search_catalogue`.

    Examples
    --------
    One file searched in two blocks of time, each filtered on its own, then ranked as one:

    >>> import numpy as np, os, warnings
    >>> import chirpsift as cs
    >>> from chirpsift.io.catalogue import read_catalogue
    >>> from chirpsift.pipeline import search_catalogue
    >>> from chirpsift.pipeline.streaming import CatalogueSearch
    >>> from chirpsift.synthetic import colored_gaussian_noise
    >>> fs = 256.0
    >>> x = colored_gaussian_noise(int(120 * fs), fs, "gen2-zero-detuned", seed=4, f_low=30.0)
    >>> np.savez("steps-0.npz", strain=x, sample_rate=fs, t0=500.0)
    >>> cat = read_catalogue("steps-0.npz")
    >>> bank = cs.Bank(m1=[14.0, 16.0], m2=[12.0, 14.0])
    >>> s = CatalogueSearch(fs, bank, f_low=40.0, welch_duration=1.0, min_snr=4.0, segment_duration=16.0)
    >>> layout = s.find_gates(s.lay_out(cat.spans[0]))
    >>> half = cat.spans[0].n // 2
    >>> first, second = s.filter(layout, block=(0, half)), s.filter(layout, block=(half, cat.spans[0].n))
    >>> ranked = [s.rank([first.peaks[0], second.peaks[0]])]
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     triggers, info = s.finish(cat, [layout], [ranked])
    ...     whole, _ = search_catalogue(cat, bank, f_low=40.0, welch_duration=1.0, min_snr=4.0,
    ...                                 segment_duration=16.0)
    >>> len(triggers) > 0 and triggers.tobytes() == whole.tobytes()
    True
    """

    def __init__(self, sample_rate, bank, *, f_low, psd=None, templates=None, **options):
        b = Bank.from_any(bank)
        if len(b) == 0:
            raise ValueError("bank must hold at least one template")
        self.psd = check_psd_argument(psd)
        self.settings = SearchSettings.from_mapping({**options, "f_low": f_low}, where="search_catalogue")
        self.lo, self.hi = _template_range(templates, len(b))
        self.bank = b
        self.sub = b if (self.lo, self.hi) == (0, len(b)) else b[self.lo:self.hi]
        self.filter_settings = self.settings if templates is None else self.settings.replace(bank_cluster=False)
        self.sample_rate = fs = float(sample_rate)
        self.longest = longest_template(b, self.settings, fs)
        self.pads = padding(self.longest, self.settings.welch_duration, fs)
        self.fixed_length = fixed_segment_length(self.settings, self.psd, fs, self.longest, self.pads)
        self._psd_cache: dict = {}

    # --- 1. the layout of a span ---
    @staticmethod
    def scan(span: Span, block=None) -> tuple[list[tuple[int, int]], int]:
        """Non-finite runs of samples ``block = (a, b)`` of a span (default all), read in chunks.

        Returns the runs (sample positions in the span) and the samples read. The runs of
        blocks that tile the span, joined in order by :func:`chirpsift.condition.merge_intervals`,
        are the span's.
        """
        return _nonfinite_runs(span, *(block or (0, span.n)))

    def lay_out(self, span: Span, vetoes=(), *, scanned=None, strict=True) -> SpanLayout:
        """Split a span into stretches and plan their segments (reads it once, in chunks).

        Parameters
        ----------
        span : chirpsift.io.catalogue.Span
        vetoes : iterable of (float, float), optional
            Checked veto intervals (s, :func:`chirpsift.io.vetoes.check_vetoes`).
        scanned : (runs, samples read), optional
            The span's non-finite runs, already found by :meth:`scan` (then nothing is read).
        strict : bool
            Refuse non-finite samples outside the vetoes when ``nonfinite="error"``
            (``False``: plan the stretches between them all the same).

        Returns
        -------
        SpanLayout
            Without gates.

        Raises
        ------
        ValueError
            ``nonfinite="error"`` and the span holds non-finite samples outside the
            vetoes (the message names the file).
        """
        settings, fs = self.settings, span.sample_rate
        vetoed = span.samples_within(vetoes)
        runs, read = self.scan(span) if scanned is None else scanned
        nonfinite = subtract_intervals(runs, vetoed)
        if nonfinite and settings.nonfinite == "error" and strict:
            a, b = nonfinite[0]
            count = sum(y - x for x, y in nonfinite)
            raise ValueError(
                f"{span.file_at(a).where}: {count} non-finite samples in {len(nonfinite)} run(s) of the span from "
                f"{span.t0!r} s, the first from t={span.t0 + a / fs!r} s; veto them, or pass nonfinite='skip' to "
                "search the finite stretches between them"
            )
        short, stretches = [], []
        for a, b in stretches_between(span.n, merge_intervals(sorted([*vetoed, *nonfinite]))):
            stretch = plan_stretch(a, b, self.fixed_length, self.longest, settings, fs, self.pads)
            if stretch is None:
                short.append((a, b))
            else:
                stretches.append(stretch)
        return SpanLayout(span, vetoed, nonfinite, short, stretches, [[] for _ in stretches], read)

    def layout_from_dict(self, span: Span, doc: dict) -> SpanLayout:
        """Return the :class:`SpanLayout` of ``span`` that :meth:`SpanLayout.as_dict` wrote.

        Raises
        ------
        ValueError
            ``doc`` describes another span (start, length or sample rate).
        """
        if (doc["t0"], doc["n"], doc["sample_rate"]) != (span.t0, span.n, span.sample_rate):
            raise ValueError(f"the layout of the span from {doc['t0']!r} s ({doc['n']} samples) does not describe "
                             f"the span from {span.t0!r} s ({span.n} samples): its files changed")
        pairs = [[tuple(iv) for iv in doc[k]] for k in ("vetoed", "nonfinite", "short")]
        stretches = [Stretch(a, b, length, plan_segments(b - a, length, *self.pads))
                     for a, b, length in doc["stretches"]]
        gates = [[tuple(g) for g in gs] for gs in doc["gates"]]
        return SpanLayout(span, *pairs, stretches, gates, doc["samples_read"], doc["largest"])

    def check_layouts(self, layouts, *, allow_empty=False, stacklevel=2) -> None:
        """Refuse layouts with nothing to search, or a ``psd_duration`` shorter than a segment.

        Nothing to search is allowed with ``allow_empty``; warns
        (:class:`ExcludedDataWarning`, at ``stacklevel`` as :func:`warnings.warn` counts
        from the caller) of what is left out.
        """
        settings, fs = self.settings, self.sample_rate
        searched = [s for p in layouts for s in p.stretches]
        if not searched and not allow_empty:
            raise ValueError(_nothing_to_search(layouts, settings, self.longest, self.pads, self.fixed_length, fs))
        check_psd_duration(searched, settings, fs)
        nonfinite = [iv for p in layouts for iv in _seconds(p.span, p.nonfinite)]
        short = [iv for p in layouts for iv in _seconds(p.span, p.short)]
        if nonfinite or short:
            warnings.warn(
                f"left out {len(nonfinite)} run(s) of non-finite samples ({sum(b - a for a, b in nonfinite):g} s) "
                f"and {len(short)} stretch(es) too short to hold a segment ({sum(b - a for a, b in short):g} s); "
                "see info['excluded'], info['short_stretches'] and info['live_time_table']",
                ExcludedDataWarning, stacklevel=stacklevel + 1)

    # --- 2. gates ---
    def find_gates(self, layout: SpanLayout, block=None) -> SpanLayout:
        """Return ``layout`` with the gates of each stretch (reads each stretch once, by whitening block).

        With ``block = (a, b)``, only the whitening blocks
        (:func:`chirpsift.gating.whitening_blocks`, counted from each stretch's start)
        that start at a sample ``a <= k < b`` of the span are examined: blocks that tile
        the span share out the whitening blocks, and their gates, joined stretch by
        stretch in block order (:meth:`join_gates`), are the gates of the whole.
        ``samples_read`` and ``largest`` then count this block's reads alone.
        """
        read, largest = (0, 0) if block is not None else (layout.samples_read, layout.largest)
        gates = []
        fs, settings = self.sample_rate, self.settings
        for s in layout.stretches:
            starts = None
            if block is not None:
                starts = [k for k in whitening_blocks(s.stop - s.start, fs, settings.welch_duration)
                          if block[0] <= s.start + k < block[1]]
                if not starts:
                    gates.append([])
                    continue
            view = _StretchData(layout.span, s.start, s.stop)
            gates.append(find_stretch_gates(view, fs, settings, blocks=starts))
            read += view.samples_read
            largest = max(largest, view.largest)
        return layout._replace(gates=gates, samples_read=read, largest=largest)

    @staticmethod
    def join_gates(layout: SpanLayout, parts) -> SpanLayout:
        """Return ``layout`` with each stretch's gates joined from ``parts``.

        ``parts``: the :meth:`find_gates` results (gates per stretch) of blocks that tile
        the span, in block order.
        """
        gates = [merge_intervals(g for part in parts for g in part[k]) for k in range(len(layout.stretches))]
        return layout._replace(gates=gates)

    def check_gates(self, layouts, *, allow_empty=False, stacklevel=2) -> None:
        """Warn (:class:`GatingWarning`) when gates take analysed time.

        A gating that leaves nothing live is refused, unless ``allow_empty`` (then
        nothing is said: the live-time table tells).
        """
        base, numbered, numbered_gates = 0, [], []
        for p in layouts:  # one numbering of all spans' samples, for the check over the whole search
            for s, gates in zip(p.stretches, p.gates):
                numbered.append(s._replace(start=base + s.start, stop=base + s.stop))
                numbered_gates += [(base + s.start + a, base + s.start + g) for a, g in gates]
            base += p.span.n
        pads = self.pads
        region = [(s.start + pads[0], s.stop - pads[1]) for s in numbered]
        if not allow_empty or subtract_intervals(region, numbered_gates):
            live_after_gates(numbered, pads, numbered_gates, self.settings, self.sample_rate,
                             stacklevel=stacklevel + 2)

    # --- 3. filtering ---
    def filter(self, layout: SpanLayout, block=None, bar=None) -> "Filtered":
        """Filter the segments of a span with the sub-bank; the peaks of each stretch, not yet clustered.

        Parameters
        ----------
        layout : SpanLayout
            With its gates.
        block : (int, int), optional
            Filter only the segments whose valid output starts at a sample ``k`` of the
            span with ``block[0] <= k < block[1]`` (default: every segment). Blocks that
            tile the span filter every segment once.
        bar : tqdm bar, optional
            Advanced by the sub-bank's size per segment.

        Returns
        -------
        Filtered
            ``peaks``: per stretch of the layout, an array of :data:`PEAK_DTYPE` (empty
            for a stretch with no segment in the block), ``template`` indexing the
            whole bank; ``segments``: segments filtered per stretch; ``samples_read``
            and ``largest``.
        """
        fs, settings, psd = self.sample_rate, self.settings, self.psd
        span = layout.span
        psd_len = None if settings.psd_duration is None else int(round(settings.psd_duration * fs))
        peaks, counts, read, largest = [], [], 0, 0
        for s, gates, plans in zip(layout.stretches, layout.gates, self.block_plans(layout, block)):
            counts.append(len(plans))
            if not plans:
                peaks.append(np.zeros(0, dtype=PEAK_DTYPE))
                continue
            retain = max(0, (s.length if psd_len is None else psd_len) - s.length) if psd is None else 0
            data = _StretchData(span, s.start, s.stop, gates=gates, sample_rate=fs, taper=settings.gate_taper,
                                retain=retain)
            found = _as_peaks(filter_stretch(data, span.t0 + s.start / fs, fs, s, self.sub, self.filter_settings,
                                             psd, self._psd_cache, bar, gates, plans=plans))
            found["template"] += self.lo  # sub-bank positions to whole-bank indices
            peaks.append(found)
            read += data.samples_read
            largest = max(largest, data.largest)
        return Filtered(peaks, counts, read, largest)

    @staticmethod
    def block_plans(layout: SpanLayout, block=None) -> list:
        """Per stretch of ``layout``, the segment plans whose valid output starts in ``block``.

        A segment belongs to the block of samples ``[block[0], block[1])`` of the span
        where its valid output starts, so blocks that tile a span share out its segments,
        each once; ``block=None`` gives every segment.
        """
        if block is None:
            return [s.plans for s in layout.stretches]
        a, b = block
        return [[p for p in s.plans if a <= s.start + p.start + p.valid_start < b] for s in layout.stretches]

    # --- 4. clustering and ranking, per stretch ---
    def rank(self, parts) -> np.ndarray:
        """Cluster and rank one stretch's peaks, given as the :meth:`filter` results of any split.

        Parameters
        ----------
        parts : sequence of ndarray of :data:`PEAK_DTYPE`
            The stretch's peaks from each block and sub-bank (together: every segment
            of the stretch, once, with the templates searched).

        Returns
        -------
        dict of ndarray
            The survivors' columns, with ``reweighted_snr``
            (:func:`chirpsift.pipeline.single_site.cluster_and_rank`).
        """
        joined = np.concatenate(list(parts)) if len(parts) else np.zeros(0, dtype=PEAK_DTYPE)
        return cluster_and_rank({k: joined[k] for k in PEAK_DTYPE.names}, self.filter_settings)

    # --- 5. the table and the run information ---
    def finish(self, catalogue, layouts, ranked, *, stacklevel=2):
        """Return the trigger table and run information of a catalogue (:func:`search_catalogue`'s).

        Parameters
        ----------
        catalogue : Catalogue
            The catalogue the layouts are of.
        layouts : list of SpanLayout
            One per span, with gates.
        ranked : list of list of dict
            Per layout, per stretch, :meth:`rank`'s result.
        stacklevel : int, optional
            Of the :class:`AnalysedFractionWarning`, as :func:`warnings.warn` counts from here.

        Returns
        -------
        triggers, info
            As :func:`search_catalogue` (``samples_read`` and ``largest_block`` count the
            layouts' reading only).
        """
        fs, settings, b = self.sample_rate, self.settings, self.bank
        found = [r for per_span in ranked for r in per_span]
        if found:
            peaks = {key: np.concatenate([f[key] for f in found]) for key in found[0]}
            triggers = trigger_table(peaks, peaks["time"], peaks["reweighted_snr"], b)
        else:  # allow_empty, and nothing to search
            triggers = np.zeros(0, dtype=TRIGGER_DTYPE)
        searched = [(p.span, s) for p in layouts for s in p.stretches]
        # bookkeeping: every sample of every span in one category
        pad_start, pad_end = self.pads
        per_span, live, gates_abs = [], [], []
        for p in layouts:
            parts = {"vetoed": p.vetoed, "nonfinite": p.nonfinite, "short": p.short, "pads": [], "gated": [],
                     "analysed": []}
            for s, own in zip(p.stretches, p.gates):
                gates = [(s.start + a, s.start + g) for a, g in own]
                region = [(s.start + pad_start, s.stop - pad_end)]
                analysed = subtract_intervals(region, gates)
                parts["pads"] += [(s.start, s.start + pad_start), (s.stop - pad_end, s.stop)]
                parts["gated"] += subtract_intervals(region, analysed)
                parts["analysed"] += analysed
                gates_abs += _seconds(p.span, gates)
            live += _seconds(p.span, parts["analysed"])
            per_span.append((p.span.t0, parts))
        table = LiveTimeTable.from_samples(catalogue.start, catalogue.end, fs, per_span, catalogue.gaps)
        analysed_fraction = table.live_time / catalogue.covered
        if analysed_fraction < MIN_ANALYSED_FRACTION:
            rows = ", ".join(f"{c} {sec:g} s" for c, sec, _ in table.rows() if sec > 0)
            warnings.warn(f"only {100 * analysed_fraction:.0f}% of the {catalogue.covered:g} s of data in files is "
                          f"searched: {rows}; see info['live_time_table']", AnalysedFractionWarning,
                          stacklevel=stacklevel + 1)
        info = {
            "segments": sum(len(s.plans) for _, s in searched),
            "analysed": live,
            "live_time": table.live_time,
            "analysed_fraction": analysed_fraction,
            "gates": gates_abs,
            "gated_time": float(sum(g - a for p in layouts for gates in p.gates for a, g in gates) / fs),
            "excluded": [iv for p in layouts for iv in _seconds(p.span, p.nonfinite)],
            "vetoed": [iv for p in layouts for iv in _seconds(p.span, p.vetoed)],
            "gaps": catalogue.gaps,
            "short_stretches": [iv for p in layouts for iv in _seconds(p.span, p.short)],
            "stretches": [{"start": span.t0 + s.start / fs, "stop": span.t0 + s.stop / fs, "segments": len(s.plans),
                           "segment_duration": s.length / fs} for span, s in searched],
            "templates": len(b),
            "template_range": [self.lo, self.hi],
            "max_template_duration": self.longest * DURATION_MARGIN,
            "pad_start": pad_start / fs,
            "pad_end": pad_end / fs,
            "segment_duration": max((s.length for _, s in searched), default=0) / fs,
            "sample_rate": fs,
            "settings": settings.as_dict(),
            "files": len(catalogue.files),
            "spans": len(catalogue.spans),
            "live_time_table": table,
            "samples_read": sum(p.samples_read for p in layouts),
            "largest_block": max((p.largest for p in layouts), default=0),
        }
        return triggers, info


class Filtered(NamedTuple):
    """What :meth:`CatalogueSearch.filter` returns (see there)."""

    peaks: list
    segments: list
    samples_read: int
    largest: int


def search_catalogue(catalogue, bank, *, f_low, vetoes=None, psd=None, progress=False, allow_empty=False,
                     templates=None, **options):
    """Matched-filter search of a strain catalogue, reading its files block by block.

    The result is that of :func:`chirpsift.search` run on each span of abutting files
    held in memory, with vetoed samples set to NaN, bit for bit; the memory used
    depends on the segment length (set by the bank's longest template, or
    ``segment_duration``) and ``psd_duration``, never on the amount of data.

    Parameters
    ----------
    catalogue : Catalogue
        One site's strain files (:func:`chirpsift.io.catalogue.read_catalogue`).
    bank : Bank, structured array or mapping
        Template parameters (``m1``, ``m2`` in solar masses, optional aligned spins
        ``chi1``, ``chi2``).
    f_low : float
        Lower frequency cutoff (Hz).
    vetoes : None, path, or iterable of (float, float), optional
        Time intervals (s) to leave out before anything is filtered: a file
        (:func:`chirpsift.io.vetoes.read_vetoes`) or the intervals. A sample is vetoed
        when its time lies in ``[start, end)``.
    psd : None, str, callable, (freqs, values) or ndarray, optional
        As for :func:`chirpsift.search`.
    progress : bool, optional
        Show a progress bar (segments x templates) on stderr.
    allow_empty : bool, optional
        When no stretch can hold a segment, or gates cover all that the segments
        analyse, return no triggers (the live-time table says where the time went)
        instead of raising. For searches of parts of a catalogue (one span each),
        where another part may hold the data.
    templates : (int, int), optional
        Filter only the bank's templates ``lo <= k < hi`` (a sub-bank), for searches
        split over the bank. Everything else is planned from the whole bank (segment
        lengths and pads from its longest template), the ``template`` column indexes
        the whole bank, and ``bank_cluster`` is not applied, since it needs every
        template's triggers: the triggers of all sub-banks, re-clustered by
        :func:`cluster_across_bank`, are those of the search with the whole bank, bit
        for bit. ``info["settings"]`` still holds ``bank_cluster`` as given.
    **options
        Any other option of :func:`chirpsift.search` (``min_snr``, ``segment_duration``,
        ``gate_threshold``, ``psd_duration``, ``nonfinite``, ...), with its meaning
        there; an unknown name is an error naming the nearest valid one.

    Returns
    -------
    triggers : ndarray with dtype :data:`chirpsift.TRIGGER_DTYPE`
        Sorted by time.
    info : dict
        The keys of :func:`chirpsift.search`'s ``info`` (``excluded`` lists the
        non-finite runs; ``analysed_fraction`` is the live time over the seconds of
        data in files), and:

        - ``vetoed``, ``gaps``: time intervals (s) left out;
        - ``live_time_table``: a :class:`chirpsift.pipeline.LiveTimeTable` placing every
          second from the first sample to the last in one category; its total is the
          catalogue's span;
        - ``files``, ``spans``: counts; ``template_range``: ``[lo, hi)`` of the
          templates filtered (``templates``, default the whole bank);
        - ``samples_read``: samples read from files over all steps (at most three per
          sample); ``largest_block``: the most samples held at once by one step.

    Raises
    ------
    ValueError
        As :func:`chirpsift.search`, and when no stretch of the catalogue can hold a
        segment, or (``nonfinite="error"``) a file holds non-finite samples outside
        the vetoes; the message names the file.
    TypeError
        If ``catalogue`` is not a :class:`Catalogue`.

    Warns
    -----
    GatingWarning, ExcludedDataWarning, AnalysedFractionWarning
        As :func:`chirpsift.search`.

    Notes
    -----
    Each stretch (a run of samples between gaps, vetoes and non-finite samples) is its
    own analysis: segments placed over the whole stretch, PSDs from its own data,
    clustering within it. A stretch too short to hold a segment is not searched and is
    reported (``short_stretches``, the ``short`` row of the live-time table), as are
    the pads at each searched stretch's ends, where no segment's output is valid.

    Examples
    --------
    Two abutting files and a third after a gap, with one veto:

    >>> import numpy as np, os, warnings
    >>> import chirpsift as cs
    >>> from chirpsift.io.catalogue import read_catalogue
    >>> from chirpsift.pipeline import search_catalogue
    >>> from chirpsift.synthetic import colored_gaussian_noise
    >>> d, fs = "site-x-search", 256.0
    >>> os.makedirs(d, exist_ok=True)
    >>> for i, start in enumerate([2000.0, 2040.0, 2100.0]):
    ...     x = colored_gaussian_noise(int(40 * fs), fs, "gen2-zero-detuned", seed=i, f_low=30.0)
    ...     np.savez(os.path.join(d, f"site-x-{i}.npz"), strain=x, sample_rate=fs, t0=start)
    >>> cat = read_catalogue(os.path.join(d, "*.npz"))
    >>> bank = cs.Bank(m1=[14.0, 16.0], m2=[12.0, 14.0])
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     triggers, info = search_catalogue(cat, bank, f_low=40.0, welch_duration=1.0,
    ...                                       vetoes=[(2050.0, 2052.0)], min_snr=5.0)
    >>> [(s["start"], s["stop"]) for s in info["stretches"]]
    [(2000.0, 2050.0), (2052.0, 2080.0), (2100.0, 2140.0)]
    >>> table = info["live_time_table"]
    >>> table.seconds["gap"], table.seconds["vetoed"], table.total == cat.end - cat.start
    (20.0, 2.0, True)
    """
    if not isinstance(catalogue, Catalogue):
        raise TypeError(f"catalogue must be a Catalogue (see read_catalogue), got {type(catalogue).__name__}")
    search = CatalogueSearch(catalogue.sample_rate, bank, f_low=f_low, psd=psd, templates=templates, **options)
    veto_times = check_vetoes(vetoes)
    layouts = [search.lay_out(span, veto_times) for span in catalogue.spans]
    search.check_layouts(layouts, allow_empty=allow_empty, stacklevel=2)
    layouts = [search.find_gates(p) for p in layouts]  # before anything is filtered (as the in-memory search)
    search.check_gates(layouts, allow_empty=allow_empty, stacklevel=2)
    bar = progress_bar([s for p in layouts for s in p.stretches], search.sub) if progress else None
    ranked, read, largest = [], 0, 0
    try:
        for p in layouts:
            done = search.filter(p, bar=bar)
            ranked.append([search.rank([part]) for part in done.peaks])
            read, largest = read + done.samples_read, max(largest, done.largest)
    finally:
        if bar is not None:
            bar.close()
    triggers, info = search.finish(catalogue, layouts, ranked, stacklevel=2)
    info["samples_read"] += read
    info["largest_block"] = max(info["largest_block"], largest)
    return triggers, info


def _template_range(templates, n: int) -> tuple[int, int]:
    if templates is None:
        return 0, n
    try:
        lo, hi = (int(operator.index(v)) for v in templates)
    except (TypeError, ValueError):
        raise TypeError(f"templates must be a pair of integers (lo, hi), got {templates!r}") from None
    if not 0 <= lo < hi <= n:
        raise ValueError(f"templates must satisfy 0 <= lo < hi <= {n} (the bank's size), got {templates!r}")
    return lo, hi


def cluster_across_bank(triggers, stretches, peak_window):
    """Keep the loudest trigger (reweighted SNR) within ``peak_window`` across the bank, per stretch.

    The bank-wide clustering of :func:`chirpsift.search` (``bank_cluster``), applied to
    the union of the trigger tables of sub-bank searches (:func:`search_catalogue`
    with ``templates``), which leave it out because it needs every template's
    triggers.

    Parameters
    ----------
    triggers : ndarray with dtype :data:`chirpsift.TRIGGER_DTYPE`
        Triggers of one or more stretches, each already clustered per template, in any
        order.
    stretches : sequence of (float, float)
        ``(start, stop)`` times (s) of the searched stretches holding them; the search
        clusters within each stretch only.
    peak_window : float
        Half-width of the clustering window (s), the search's ``peak_window``.

    Returns
    -------
    ndarray with dtype :data:`chirpsift.TRIGGER_DTYPE`
        The survivors sorted by time, then template (the search's order). Equal
        reweighted SNRs within a window are resolved as the search resolves them: the
        earlier trigger, then the lower template index, survives.

    Raises
    ------
    ValueError
        A trigger lies outside every stretch.

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift import TRIGGER_DTYPE
    >>> from chirpsift.pipeline import cluster_across_bank
    >>> t = np.zeros(3, dtype=TRIGGER_DTYPE)
    >>> t["time"], t["template"], t["reweighted_snr"] = [10.0, 10.2, 14.0], [1, 0, 0], [7.0, 9.0, 6.0]
    >>> kept = cluster_across_bank(t, [(0.0, 20.0)], 0.5)
    >>> kept["time"].tolist(), kept["template"].tolist()
    ([10.2, 14.0], [0, 0])
    """
    table = np.asarray(triggers)
    if table.shape[0] == 0:
        return table.copy()
    edges = np.asarray(stretches, dtype=np.float64).reshape(-1, 2)
    which = np.searchsorted(edges[:, 0], table["time"], side="right") - 1
    outside = (which < 0) | (table["time"] >= edges[np.maximum(which, 0), 1])
    if outside.any():
        t = float(table["time"][np.argmax(outside)])
        raise ValueError(f"a trigger at t={t!r} s lies outside every stretch given")
    order = np.lexsort((table["time"], table["template"]))  # as the search holds them: template, then time
    table, which = table[order], which[order]
    keep = cluster_in_time(table["time"], table["reweighted_snr"], peak_window, groups=which)
    kept = table[keep]
    return kept[np.lexsort((kept["template"], kept["time"]))]
