"""The single-site search: long strain in, a table of clustered triggers out.

The flow, one step per function, in the order :func:`search` calls them:

1. settings: :class:`~chirpsift.pipeline.SearchSettings` checks every option;
2. :func:`longest_template`: the bank against ``f_low`` and the sample rate;
3. :func:`_lay_out`: the finite stretches of the strain (:mod:`chirpsift.condition`),
   and the segments of each (:mod:`chirpsift.segments`);
4. :func:`_gate_stretches`: loud transients zeroed, live time counted;
5. :func:`_search_stretches`: per stretch, per segment, the PSD (given or estimated),
   the data FFT and the fused kernel (:func:`filter_stretch`, :func:`_filter_segments`),
   then clustering and ranking within the stretch (:func:`cluster_and_rank`);
6. the trigger table (:func:`chirpsift.triggers.trigger_table`) and :func:`_info`.

The steps that concern one stretch (:func:`plan_stretch`, :func:`find_stretch_gates`,
:func:`live_after_gates`, :func:`filter_stretch`, :func:`cluster_and_rank`) take the
stretch's data as an array or as a lazy view that slices into arrays, so
:mod:`chirpsift.pipeline.streaming` runs the very same steps over data read from files
block by block, and ``chirpsift run`` over blocks of time in separate units.
"""

from __future__ import annotations

import sys
import warnings
from typing import NamedTuple

import numpy as np

from .._validate import positive_scalar, psd_array, real_array, real_scalar
from ..bank import Bank
from ..clustering import cluster_in_time
from ..condition import check_strain, find_nonfinite_runs, stretches_between, subtract_intervals
from ..fused import filter_segment, prepare_bank, prepare_segments
from ..gating import GatingWarning, apply_gates, find_gates
from ..ranking import reweighted_snr
from ..segments import DURATION_MARGIN, SegmentPlan, default_length, padding, plan_segments
from ..spectrum import design_psd, psd_to_grid, truncate_inverse_psd
from ..triggers import trigger_table
from ..waveform import chirp_duration, isco_frequency
from .settings import SearchSettings

__all__ = ["search", "AnalysedFractionWarning", "ExcludedDataWarning", "MIN_ANALYSED_FRACTION"]

_DEFAULT = SearchSettings  # class attributes are the defaults

#: Below this fraction of the input's duration searched (live), :func:`search` warns.
MIN_ANALYSED_FRACTION = 0.5


class AnalysedFractionWarning(UserWarning):
    """Less than :data:`MIN_ANALYSED_FRACTION` of the input was searched (see
    ``info["analysed_fraction"]``): most of the data lay in segment pads, gates or
    excluded stretches."""


class ExcludedDataWarning(UserWarning):
    """Parts of the input were not searched: non-finite runs (``info["excluded"]``) and
    finite stretches too short to hold a segment (``info["short_stretches"]``)."""


# --- the bank against the settings ---
def longest_template(bank, settings, sample_rate):
    """Duration (s, from ``f_low``, without margin) of the bank's longest template."""
    fl, fs = settings.f_low, sample_rate
    if fl >= fs / 2:
        raise ValueError(f"f_low={fl} Hz must be below the Nyquist frequency {fs / 2} Hz of sample_rate={fs} Hz")
    ends_below = np.atleast_1d(isco_frequency(bank.m1, bank.m2)) <= fl
    if ends_below.any():
        i = int(np.argmax(ends_below))
        raise ValueError(f"template {i} (m1={bank.m1[i]}, m2={bank.m2[i]}) ends below f_low={fl} Hz")
    return float(np.max(chirp_duration(bank.m1, bank.m2, fl)))


# --- where to search: finite stretches, and the segments of each ---
class Stretch(NamedTuple):
    """Input samples ``[start, stop)``, searched in ``plans`` (segments of ``length``
    samples; positions relative to ``start``)."""

    start: int
    stop: int
    length: int
    plans: list[SegmentPlan]


class _Layout(NamedTuple):
    """Which samples of the input are searched, and how."""

    n: int  # input samples
    sample_rate: float
    t0: float  # absolute time of input sample 0, s
    longest: float  # longest template from f_low (s, without margin)
    pads: tuple[int, int]  # samples discarded at each segment's start and end
    runs: list[tuple[int, int]]  # non-finite runs, left out
    short: list[tuple[int, int]]  # finite stretches too short to hold a segment
    stretches: list[Stretch]  # what is searched

    def seconds(self, intervals):
        """Sample intervals of the input as absolute ``(start, stop)`` times in s."""
        return [(self.t0 + a / self.sample_rate, self.t0 + b / self.sample_rate) for a, b in intervals]


def fixed_segment_length(settings, psd, sample_rate, longest, pads):
    """Segment length (samples) fixed by ``segment_duration`` or by a PSD given on a
    grid; None when it is sized from the bank, stretch by stretch."""
    seg = settings.segment_duration
    if seg is not None:
        length = int(round(seg * sample_rate)) // 2 * 2
        what = f"segment_duration={seg} s"
    elif isinstance(psd, np.ndarray):
        length = 2 * (psd.shape[0] - 1)
        what = f"the {length}-sample segment fixed by the psd array ({psd.shape[0]} bins)"
    else:
        return None
    if length - sum(pads) < 1:
        raise ValueError(
            f"{what} is too short for templates lasting {longest * DURATION_MARGIN:.1f} s from "
            f"f_low={settings.f_low} Hz plus the {settings.welch_duration} s whitening filter: each segment "
            f"discards {sum(pads) / sample_rate:g} s; raise segment_duration or f_low"
        )
    return length


def _nonfinite_message(runs, sample_rate):
    count = sum(b - a for a, b in runs)
    first = runs[0][0]
    return (f"strain has {count} non-finite samples in {len(runs)} run(s), the first at sample {first} "
            f"({first / sample_rate:g} s after t0)")


def _nothing_to_search(n, sample_rate, runs, settings, longest, pads, fixed_length):
    """Why no stretch of the strain could be searched (the message of a ValueError)."""
    fs = sample_rate
    m = max(b - a for a, b in stretches_between(n, runs))
    where = (f"strain has {n} samples ({n / fs:g} s)" if not runs else
             f"the longest finite stretch of strain has {m} samples ({m / fs:g} s; {_nonfinite_message(runs, fs)})")
    if fixed_length is not None and m < fixed_length:
        if settings.segment_duration is not None:
            return (f"{where}, shorter than segment_duration={settings.segment_duration} s; "
                    "use a shorter segment_duration or more data")
        return f"{where}, fewer than the {fixed_length}-sample segment fixed by the psd array"
    return (
        f"templates last up to {longest * DURATION_MARGIN:.4g} s from f_low={settings.f_low} Hz: with the "
        f"{settings.welch_duration} s whitening filter each segment discards {sum(pads) / fs:g} s, and {where}; "
        "raise f_low or give more data"
    )


def _excluded_message(layout):
    fs, runs, short = layout.sample_rate, layout.runs, layout.short
    parts = []
    if runs:
        count = sum(b - a for a, b in runs)
        parts.append(f"left out {count} non-finite samples ({count / fs:g} s) in {len(runs)} run(s), the first "
                     f"{runs[0][0] / fs:g} s after t0, and searched {len(layout.stretches)} finite stretch(es) "
                     "separately")
    if short:
        parts.append(f"{len(short)} finite stretch(es), {sum(b - a for a, b in short) / fs:g} s in all, too short "
                     "to hold a segment were not searched")
    return "; ".join(parts) + "; see info['excluded'] and info['short_stretches']"


def plan_stretch(start, stop, fixed_length, longest, settings, sample_rate, pads):
    """Return the :class:`Stretch` of input samples ``[start, stop)``, or None when it is
    too short to hold a segment.

    Its segments have the fixed length (:func:`fixed_segment_length`), or else
    :func:`chirpsift.segments.default_length` capped by the stretch, and are placed by
    :func:`chirpsift.segments.plan_segments` over the whole stretch.
    """
    length = fixed_length or default_length(longest, settings.welch_duration, sample_rate, stop - start)
    if stop - start < length or length - sum(pads) < 1:
        return None
    return Stretch(start, stop, length, plan_segments(stop - start, length, *pads))


def check_psd_duration(stretches, settings, sample_rate):
    """Refuse a ``psd_duration`` shorter than a segment of any stretch."""
    if settings.psd_duration is None:
        return
    for s in stretches:
        if settings.psd_duration * sample_rate < s.length:
            raise ValueError(
                f"psd_duration={settings.psd_duration} s is shorter than the {s.length / sample_rate:g} s segments "
                "sized from the bank's longest template; give a longer psd_duration or a segment_duration"
            )


def _lay_out(x, sample_rate, t0, settings, psd, longest):
    """Split the input into finite stretches and plan the segments of each.

    Each stretch between non-finite runs gets segments of the fixed length, or of
    :func:`chirpsift.segments.default_length` capped by the stretch; a stretch shorter
    than that, or than the pads, is reported and left out.
    """
    fs, n = sample_rate, x.shape[0]
    pads = padding(longest, settings.welch_duration, fs)
    fixed_length = fixed_segment_length(settings, psd, fs, longest, pads)
    runs = find_nonfinite_runs(x)
    if runs and settings.nonfinite == "error":
        raise ValueError(f"{_nonfinite_message(runs, fs)}; remove them, or pass nonfinite='skip' to search the "
                         "finite stretches between them")
    stretches, short = [], []
    for a, b in stretches_between(n, runs):
        stretch = plan_stretch(a, b, fixed_length, longest, settings, fs, pads)
        if stretch is None:
            short.append((a, b))
        else:
            stretches.append(stretch)
    if not stretches:
        raise ValueError(_nothing_to_search(n, fs, runs, settings, longest, pads, fixed_length))
    check_psd_duration(stretches, settings, fs)
    layout = _Layout(n, fs, t0, longest, pads, runs, short, stretches)
    if runs or short:
        warnings.warn(_excluded_message(layout), ExcludedDataWarning, stacklevel=3)
    return layout


# --- gating ---
def find_stretch_gates(x, sample_rate, settings, blocks=None):
    """Return the gates (sample intervals of ``x``) of one stretch ``x``, an array or a
    lazy view that slices into arrays (see :func:`chirpsift.gating.find_gates`); none
    without a ``gate_threshold``. ``blocks``: only the whitening blocks starting there."""
    if settings.gate_threshold is None:
        return []
    return find_gates(x, sample_rate, settings.gate_threshold, f_low=settings.f_low,
                      welch_duration=settings.welch_duration, half_width=settings.gate_half_width, blocks=blocks)


def _gate(x, sample_rate, settings):
    """Zero loud transients of one stretch; returns the gated data and the gates
    (sample intervals of ``x``)."""
    gates = find_stretch_gates(x, sample_rate, settings)
    if gates:
        x = apply_gates(x, sample_rate, gates, taper=settings.gate_taper)
    return x, gates


def gating_summary(settings, gates, sample_rate):
    total = sum(b - a for a, b in gates) / sample_rate
    return f"gate_threshold={settings.gate_threshold} gated {total:g} s in {len(gates)} gate(s)"


def _gate_stretches(x, layout, settings):
    """Gate each stretch on its own.

    Returns the gated stretches (each with its gates, relative to the stretch), all
    gates as input sample intervals, and the live intervals: what the segments analyse
    minus the gates. Refuses a gating that leaves nothing live.
    """
    fs = layout.sample_rate
    gated = [_gate(x[s.start:s.stop], fs, settings) for s in layout.stretches]
    gates = [(s.start + a, s.start + b) for s, (_, own) in zip(layout.stretches, gated) for a, b in own]
    live = live_after_gates(layout.stretches, layout.pads, gates, settings, fs, stacklevel=4)
    return gated, gates, live


def live_after_gates(stretches, pads, gates, settings, sample_rate, stacklevel=2):
    """Return the live sample intervals: what the segments of ``stretches`` analyse
    (each stretch less its pads) minus ``gates`` (same sample numbering).

    Warns (:class:`GatingWarning`, at ``stacklevel`` as :func:`warnings.warn` counts
    from here) when gates take analysed time, and refuses a gating that leaves nothing
    live.
    """
    fs, (pad_start, pad_end) = sample_rate, pads
    analysed = [(s.start + pad_start, s.stop - pad_end) for s in stretches]
    live = subtract_intervals(analysed, gates)
    if gates:
        analysed_time = sum(b - a for a, b in analysed) / fs
        if not live:
            raise ValueError(
                f"gating left nothing to search: {gating_summary(settings, gates, fs)}, covering all "
                f"{analysed_time:g} s that the segments analyse; raise gate_threshold"
            )
        lost = analysed_time - sum(b - a for a, b in live) / fs
        warnings.warn(f"{gating_summary(settings, gates, fs)}, {lost:g} s of the analysed time; see info['gates']",
                      GatingWarning, stacklevel=stacklevel)
    return live


def _low_fraction_message(layout, live, gates):
    fs, n, (pad_start, pad_end) = layout.sample_rate, layout.n, layout.pads
    searched = sum(s.stop - s.start for s in layout.stretches) / fs
    analysed = searched - len(layout.stretches) * (pad_start + pad_end) / fs
    live_time = sum(b - a for a, b in live) / fs
    parts = [f"{searched - analysed:g} s in segment pads (each segment discards its first {pad_start / fs:g} s "
             f"for templates up to {layout.longest * DURATION_MARGIN:.4g} s, and its last {pad_end / fs:g} s)"]
    if gates:
        parts.append(f"{analysed - live_time:g} s gated")
    if n / fs > searched:
        parts.append(f"{n / fs - searched:g} s not searched (non-finite or too short)")
    return (
        f"only {100 * live_time / (n / fs):.0f}% of the {n / fs:g} s of strain is searched ({live_time:g} s live): "
        f"{'; '.join(parts)}; raise f_low or give longer data; see info['analysed']"
    )


# --- the PSD of a segment: given (on the segment's grid) or estimated (from a block) ---
def check_psd_argument(psd):
    """Validate what can be validated before the segment grid is known."""
    if psd is None or callable(psd):
        return psd
    if isinstance(psd, str):
        return psd  # validated by design_psd
    if isinstance(psd, tuple):
        if len(psd) != 2:
            raise ValueError(f"psd given as a tuple must be (freqs, values), got {len(psd)} items")
        return (real_array("psd", psd[0], ndim=1), psd_array("psd", psd[1], ndim=1))
    return psd_array("psd", psd, ndim=1)


def _given_psd(psd, n_freq, df):
    """A user's PSD (curve name, callable, ``(freqs, values)`` or grid values) on the
    grid ``k df``, ``k < n_freq``."""
    freqs = np.arange(n_freq) * df
    if isinstance(psd, str):
        return design_psd(freqs, psd)
    if callable(psd):
        grid = psd_array("psd", psd(freqs), ndim=1)
        if grid.shape != (n_freq,):
            raise ValueError(f"psd callable must return one value per frequency ({n_freq}), got shape {grid.shape}")
        return grid
    if isinstance(psd, tuple):
        return psd_to_grid(psd[0], psd[1], df, n_freq)
    if psd.shape != (n_freq,):
        raise ValueError(f"psd given as an array must have {n_freq} bins (the segment's rfft grid), "
                         f"got shape {psd.shape}")
    return psd


def _no_noise_message(block_start, block, t_first, plan, sample_rate, settings, gates):
    fs, lo, hi = sample_rate, block_start, block_start + block.shape[0]
    msg = (f"cannot estimate the PSD of the segment starting at t={t_first + plan.start / fs:.6g} s: its "
           f"{block.shape[0] / fs:g} s of data are zero over {np.count_nonzero(block == 0) / fs:g} s")
    in_block = [(max(a, lo), min(b, hi)) for a, b in gates if b > lo and a < hi]
    if in_block:
        return msg + (f", {sum(b - a for a, b in in_block) / fs:g} s of them gated "
                      f"({gating_summary(settings, gates, fs)} in this stretch); raise gate_threshold or give psd")
    return msg + "; mark missing data as NaN (non-finite runs are left out of the search) or give psd"


# --- filtering ---
def _filter_segments(plans, bank, settings, prepare, cluster_samples):
    """Run the fused kernel over each planned segment; yields ``(plan, peaks)``.

    ``prepare(plan)`` gives the segment transformed and weighted by its truncated PSD
    (a :class:`~chirpsift.fused.PreparedSegment`).
    """
    templates = prepare_bank(bank.m1, bank.m2, bank.chi1, bank.chi2, f_low=settings.f_low,
                             phase_order=settings.phase_order)  # checked and built once, not per segment
    for plan in plans:
        peaks = filter_segment(
            prepare(plan), bank=templates, min_snr=settings.min_snr, cluster_samples=cluster_samples,
            chi2_bands=settings.chi2_bands, valid=(plan.valid_start, plan.valid_stop),
        )
        yield plan, peaks


def cluster_and_rank(peaks, settings):
    """Per-template clustering in time, reweighted SNR, then optionally across the bank.

    ``peaks`` are the columns of every segment's kernel peaks of one stretch (with
    absolute ``time``), in any order: the survivors of :func:`chirpsift.clustering.cluster_in_time`
    depend on the set of peaks, not on their order (no two peaks of a template share a
    time), which is what lets a run filter a stretch's segments in separate units.
    """
    window = settings.peak_window
    keep = cluster_in_time(peaks["time"], peaks["snr"], window, groups=peaks["template"])
    peaks = {k: v[keep] for k, v in peaks.items()}
    peaks["reweighted_snr"] = reweighted_snr(peaks["snr"], peaks["chi2"], peaks["chi2_dof"])
    if settings.bank_cluster and peaks["snr"].size:
        keep = cluster_in_time(peaks["time"], peaks["reweighted_snr"], window)
        peaks = {k: v[keep] for k, v in peaks.items()}
    return peaks


def filter_stretch(x, t_first, sample_rate, stretch, bank, settings, psd, psd_cache, bar, gates=(), plans=None):
    """Filter segments of one stretch ``x`` (whose first sample is at ``t_first``); returns
    the fused kernel's peaks of each segment with absolute ``time``, before the clustering
    over the stretch (:func:`cluster_and_rank`). ``gates`` (sample intervals of ``x``
    already zeroed) only serve to explain a PSD that cannot be estimated.

    ``plans`` (default all of ``stretch.plans``, in order) selects the segments: each
    segment's PSD comes from its own block of the stretch and the kernel clusters within
    the segment, so the peaks of a segment do not depend on which others are filtered.

    ``x`` is read only through ``x.shape[0]`` and slices ``x[a:b]``, per segment in
    order: the segment, then the block its PSD is estimated from (which starts at most
    ``psd_duration - segment`` samples before the segment).
    """
    fs = sample_rate
    length = stretch.length
    n_freq, df = length // 2 + 1, fs / length
    fl, t_spec = settings.f_low, settings.welch_duration
    if psd is not None and length not in psd_cache:  # a given PSD is the same for every segment of a length
        psd_cache[length] = truncate_inverse_psd(_given_psd(psd, n_freq, df), fs, t_spec, fl)
    m = x.shape[0]
    psd_len = length if settings.psd_duration is None else int(round(settings.psd_duration * fs))

    def prepare(plan):
        segment = x[plan.start:plan.start + length]
        if psd is not None:
            (prepared,) = prepare_segments(segment, fs, [0], length, psd_cache[length])  # data FFT in the core
            return prepared
        lo = min(max(0, plan.start + length // 2 - psd_len // 2), max(0, m - psd_len))
        hi = min(lo + psd_len, m)
        # the block the PSD is estimated from (at most the stretch); the segment itself by default
        block = None if (lo, hi) == (plan.start, plan.start + length) else x[lo:hi]
        try:  # Welch, resampling, truncation and the data FFT in one core call, side by side
            (prepared,) = prepare_segments(segment, fs, [0], length, psd_strain=block, psd_samples=hi - lo,
                                           welch_duration=t_spec, f_low=fl)
            return prepared
        except ValueError as exc:
            if "median PSD estimate is zero" not in str(exc):
                raise
            raise ValueError(_no_noise_message(lo, segment if block is None else block, t_first, plan, fs,
                                               settings, gates)) from None

    cluster_samples = int(round(min(settings.peak_window, m / fs) * fs))
    columns: dict[str, list[np.ndarray]] = {}
    chosen = stretch.plans if plans is None else plans
    for plan, found in _filter_segments(chosen, bank, settings, prepare, cluster_samples):
        found["time"] = t_first + (plan.start + found["position"]) / fs
        for key, value in found.items():
            columns.setdefault(key, []).append(value)
        if bar is not None:
            bar.update(len(bank))
    return {k: np.concatenate(v) for k, v in columns.items()}


def search_stretch(x, t_first, sample_rate, stretch, bank, settings, psd, psd_cache, bar, gates=()):
    """Filter one stretch ``x`` (whose first sample is at ``t_first``) segment by segment;
    returns its clustered, ranked peaks with absolute ``time`` (:func:`filter_stretch`,
    then :func:`cluster_and_rank`).

    Each stretch is its own analysis (PSDs from its own data, clustering within it), so
    a search of the whole input equals searches of its stretches one by one.
    """
    peaks = filter_stretch(x, t_first, sample_rate, stretch, bank, settings, psd, psd_cache, bar, gates)
    return cluster_and_rank(peaks, settings)


def progress_bar(stretches, bank):
    """Return a tqdm bar on stderr counting segments x templates of ``stretches``."""
    from tqdm import tqdm

    return tqdm(total=sum(len(s.plans) for s in stretches) * len(bank), unit="tmpl", desc="chirpsift search",
                file=sys.stderr)


def _search_stretches(gated, layout, bank, settings, psd, progress):
    """Search every gated stretch; returns the merged peak columns (not yet sorted)."""
    fs = layout.sample_rate
    bar = progress_bar(layout.stretches, bank) if progress else None
    found, psd_cache = [], {}
    try:
        for stretch, (xs, own_gates) in zip(layout.stretches, gated):
            found.append(search_stretch(xs, layout.t0 + stretch.start / fs, fs, stretch, bank, settings, psd,
                                         psd_cache, bar, own_gates))
    finally:
        if bar is not None:
            bar.close()
    return {k: np.concatenate([f[k] for f in found]) for k in found[0]}


def _info(layout, gates, live, bank, settings):
    fs = layout.sample_rate
    live_time = float(sum(b - a for a, b in live) / fs)
    return {
        "segments": sum(len(s.plans) for s in layout.stretches),
        "analysed": layout.seconds(live),
        "live_time": live_time,
        "analysed_fraction": live_time / (layout.n / fs),
        "gates": layout.seconds(gates),
        "gated_time": float(sum(b - a for a, b in gates) / fs),
        "excluded": layout.seconds(layout.runs),
        "short_stretches": layout.seconds(layout.short),
        "stretches": [{"start": layout.t0 + s.start / fs, "stop": layout.t0 + s.stop / fs,
                       "segments": len(s.plans), "segment_duration": s.length / fs} for s in layout.stretches],
        "templates": len(bank),
        "max_template_duration": layout.longest * DURATION_MARGIN,
        "pad_start": layout.pads[0] / fs,
        "pad_end": layout.pads[1] / fs,
        "segment_duration": max(s.length for s in layout.stretches) / fs,
        "sample_rate": fs,
        "settings": settings.as_dict(),
    }


def search(
    strain,
    sample_rate,
    bank,
    *,
    t0=0.0,
    f_low,
    psd=None,
    segment_duration=_DEFAULT.segment_duration,
    min_snr=_DEFAULT.min_snr,
    peak_window=_DEFAULT.peak_window,
    chi2_bands=_DEFAULT.chi2_bands,
    gate_threshold=_DEFAULT.gate_threshold,
    gate_half_width=_DEFAULT.gate_half_width,
    gate_taper=_DEFAULT.gate_taper,
    welch_duration=_DEFAULT.welch_duration,
    psd_duration=_DEFAULT.psd_duration,
    bank_cluster=_DEFAULT.bank_cluster,
    phase_order=_DEFAULT.phase_order,
    nonfinite=_DEFAULT.nonfinite,
    progress=False,
    full_output=False,
):
    """Matched-filter search of one site's strain with a template bank.

    Parameters
    ----------
    strain : array_like, shape (n,)
        Strain samples (dimensionless). NaN or infinite samples mark missing data: by
        default the finite stretches between them are searched separately (see
        ``nonfinite``).
    sample_rate : float
        Hz.
    bank : Bank, structured array or mapping
        Template parameters with fields ``m1``, ``m2`` (solar masses) and optionally
        ``chi1``, ``chi2`` (aligned spins); see :class:`chirpsift.Bank`.
    t0 : float, optional
        Absolute time (s) of the first sample; trigger times are ``t0`` + offset.
    f_low : float
        Lower frequency cutoff of templates and filters (Hz).
    psd : None, str, callable, (freqs, values) or ndarray, optional
        ``None`` (default): estimated per segment (Welch, median average) from the
        segment itself or from ``psd_duration`` seconds around it. A design-curve name,
        a function of frequency (Hz) or a sampled ``(freqs, values)`` pair is placed on
        each segment's rfft grid; an array holds the values on that grid and so fixes
        the segment length to ``2 (len(psd) - 1)`` samples when ``segment_duration`` is
        not given. Any given PSD is then truncated like an estimated one.
    segment_duration : float, optional
        Segment length (s). Each segment discards its first
        ``1.1 T + welch_duration / 2`` and its last ``welch_duration / 2`` seconds of
        filter output (wrap-around; ``T`` is the longest template's duration from
        ``f_low``, 1.1 a margin for spins), see :func:`chirpsift.segments.padding`.
        Default: sized from the bank, stretch by stretch: the smallest power of two of
        samples at least ``4 (1.1 T + welch_duration)`` seconds (so at most about a
        quarter of each segment is discarded) and at least ``64 welch_duration``
        (so an estimated PSD averages many Welch segments), capped by the stretch's
        length (see :func:`chirpsift.segments.default_length`).
    min_snr : float, optional
        Minimum SNR of a peak.
    peak_window : float, optional
        Half-width (s) of the per-template clustering window: a trigger is kept only
        if no louder peak of the same template lies within it (in the same stretch).
    chi2_bands : int, optional
        Number ``p`` of frequency bands of the chi-squared test (dof ``2p - 2``).
    gate_threshold : float, optional
        If set, samples whose whitened amplitude exceeds this many noise standard
        deviations are gated (zeroed over ``gate_half_width`` s either side with
        ``gate_taper`` s inverse Tukey tapers, each at most ``welch_duration``) before
        filtering. Gated time is not live time; gates are reported (a
        :class:`GatingWarning` and ``info``). A threshold that gates away everything
        is an error that says how much was gated.
    gate_half_width : float, optional
        Seconds zeroed on either side of each loud sample (at most ``welch_duration``).
    gate_taper : float, optional
        Length (s) of the half-cosine taper on each side of a gate (at most
        ``welch_duration``).
    welch_duration : float, optional
        Welch segment length (s) and length of the truncated inverse-PSD filter.
    psd_duration : float, optional
        Seconds of data, centred on each segment (shifted inward at the ends of its
        stretch, and at most the stretch), from which its PSD is estimated when ``psd``
        is None; default the segment itself. Must be at least the segment. Longer blocks
        average more and shrink the excess noise variance an estimated PSD brings
        (Notes), at the cost of following changes of the noise more slowly.
    bank_cluster : bool, optional
        After per-template clustering, also keep only the trigger with the largest
        reweighted SNR within ``peak_window`` across the whole bank.
    phase_order : int, optional
        PN order of the template phase (twice the PN order).
    nonfinite : {"skip", "error"}, optional
        ``"skip"`` (default): non-finite runs are left out and each finite stretch
        between them is searched as if given on its own (its own segments, PSDs, gates
        and clustering; times stay absolute); stretches too short to hold a segment are
        left out too. Both are reported (an :class:`ExcludedDataWarning` and ``info``).
        ``"error"``: a ``ValueError`` naming the runs instead.
    progress : bool, optional
        Show a progress bar (segments x templates) on stderr.
    full_output : bool, optional
        Also return a dict of run information.

    Returns
    -------
    triggers : ndarray with dtype :data:`TRIGGER_DTYPE`
        Sorted by time.
    info : dict, only if ``full_output``
        Times are absolute seconds and intervals ``(start, stop)`` pairs.

        - ``analysed``: the intervals whose filter output was searched (each stretch
          less its segment pads) minus the gates; ``live_time``: their total (s);
        - ``analysed_fraction``: ``live_time`` over the input's duration (NaN runs
          included); below :data:`MIN_ANALYSED_FRACTION` an
          :class:`AnalysedFractionWarning` says where the rest went;
        - ``gates`` and ``gated_time`` (s, all gates, some possibly within pads);
        - ``excluded``: non-finite runs; ``short_stretches``: finite stretches too
          short to search; ``stretches``: one dict per searched stretch (``start``,
          ``stop``, ``segments``, ``segment_duration``);
        - ``segments`` (count), ``segment_duration`` (s, the longest used),
          ``templates`` (count), ``max_template_duration`` (s, ``1.1 T``),
          ``pad_start`` / ``pad_end`` (s discarded per segment), ``sample_rate``,
          ``settings`` (:meth:`SearchSettings.as_dict`, ``segment_duration`` None
          when sized from the bank).

    Raises
    ------
    ValueError
        For bad settings or input (the message names the argument); when no stretch
        of the strain can hold a segment; when gating leaves nothing to search; when a
        segment's PSD cannot be estimated because its data are mostly zero.

    Warns
    -----
    GatingWarning, ExcludedDataWarning, AnalysedFractionWarning
        Data were gated, left out, or less than half the input was searched.

    Notes
    -----
    Triggers are local maxima of the SNR, refined to sub-sample time by a parabola
    through the peak and its neighbours, with SNR, phase and chi-squared evaluated
    at the refined time. The chi-squared is Allen's (2005), ``p`` bands of equal
    template power; in Gaussian noise it follows a chi-squared distribution with
    ``2p - 2`` degrees of freedom. The reweighted SNR is that of Babak et al. (2013).
    An SNR alone is not a detection claim: its significance needs a background
    estimate (e.g. time slides between sites) under the same data quality, over the
    same live time.

    With the PSD estimated from the data (``psd=None``), each bin's estimate carries
    the scatter of a finite number of Welch averages, which inflates the variance of
    the SNR in noise by roughly that relative scatter. Near threshold this matters:
    in 1,024 s of Gaussian noise at 1024 Hz with 64 s segments and 4 s Welch segments
    we counted 94 triggers above SNR 4.5 where the known PSD gave 76 and Rice's formula
    predicts 70. A longer ``psd_duration`` (more averages) shrinks the effect;
    Gaussian-noise rates should not be used as a false-alarm estimate either way.
    Short stretches between NaN runs get short segments and so noisier PSD estimates.

    No segment can analyse the first ``1.1 T + welch_duration / 2`` seconds of its data,
    so a stretch shorter than a few template durations is mostly pads: templates
    lasting 281 s from 20 Hz (1 + 1 solar masses) leave 48% of 600 s of data live.
    ``info["analysed_fraction"]`` says how much was searched; lowering the sensitivity
    estimate accordingly is up to the user.

    References
    ----------
    .. [1] B. Allen et al., Phys. Rev. D 85, 122006 (2012), arXiv:gr-qc/0509116.
    .. [2] B. Allen, Phys. Rev. D 71, 062001 (2005), gr-qc/0405045.
    .. [3] S. Babak et al., Phys. Rev. D 87, 024033 (2013), arXiv:1208.3491.

    Examples
    --------
    Noise for an invented site, with a gap of missing samples, and a small bank:

    >>> import numpy as np
    >>> import chirpsift as cs
    >>> from chirpsift.synthetic import colored_gaussian_noise
    >>> fs = 512.0
    >>> x = colored_gaussian_noise(int(96 * fs), fs, "gen2-zero-detuned", seed=1, f_low=20.0)
    >>> x[int(40 * fs):int(41 * fs)] = np.nan
    >>> bank = cs.Bank(m1=[10.0, 12.0], m2=[8.0, 10.0])
    >>> import warnings
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     triggers, info = cs.search(x, fs, bank, t0=1000.0, f_low=30.0, min_snr=5.0, full_output=True)
    >>> [type(w.message).__name__ for w in caught]
    ['ExcludedDataWarning']
    >>> info["excluded"]
    [(1040.0, 1041.0)]
    >>> [(s["start"], s["stop"], s["segment_duration"]) for s in info["stretches"]]
    [(1000.0, 1040.0, 40.0), (1041.0, 1096.0, 55.0)]
    >>> round(info["live_time"], 3), round(info["analysed_fraction"], 3)
    (81.73, 0.851)
    >>> triggers.dtype.names[:4]
    ('time', 'template', 'snr', 'phase')
    """
    fs = positive_scalar("sample_rate", sample_rate)
    x = check_strain(strain)
    b = Bank.from_any(bank)
    if len(b) == 0:
        raise ValueError("bank must hold at least one template")
    t_start = real_scalar("t0", t0)
    psd = check_psd_argument(psd)
    settings = SearchSettings(
        f_low=f_low, segment_duration=segment_duration, min_snr=min_snr, peak_window=peak_window,
        chi2_bands=chi2_bands, gate_threshold=gate_threshold, gate_half_width=gate_half_width,
        gate_taper=gate_taper, welch_duration=welch_duration, psd_duration=psd_duration,
        bank_cluster=bank_cluster, phase_order=phase_order, nonfinite=nonfinite,
    )
    longest = longest_template(b, settings, fs)
    layout = _lay_out(x, fs, t_start, settings, psd, longest)
    gated, gates, live = _gate_stretches(x, layout, settings)
    if sum(bb - a for a, bb in live) < MIN_ANALYSED_FRACTION * layout.n:
        warnings.warn(_low_fraction_message(layout, live, gates), AnalysedFractionWarning, stacklevel=2)
    peaks = _search_stretches(gated, layout, b, settings, psd, progress)
    out = trigger_table(peaks, peaks["time"], peaks["reweighted_snr"], b)
    if not full_output:
        return out
    return out, _info(layout, gates, live, b, settings)
