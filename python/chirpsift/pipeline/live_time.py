"""Live-time bookkeeping: every second from a catalogue's first sample to its last, in one category.

The categories, in the order a second is claimed by them:

``gap``
    covered by no file;
``vetoed``
    inside a user's veto;
``nonfinite``
    a NaN or infinite sample in a file;
``short``
    in a stretch (between the above) too short to hold one segment;
``pads``
    at the start or end of a searched stretch, where no segment's filter output is
    valid (the template's duration and half the whitening filter at the start, half
    the whitening filter at the end);
``gated``
    inside a gate in what the segments analyse;
``analysed``
    searched: the live time.

Within files, counts are whole samples, so the categories of each span add up to its
length exactly; gaps are differences of start times.
"""

from __future__ import annotations

from dataclasses import dataclass, field

__all__ = ["LiveTimeTable", "CATEGORIES"]

#: Categories of :class:`LiveTimeTable`, in the order a second is claimed by them.
CATEGORIES = ("gap", "vetoed", "nonfinite", "short", "pads", "gated", "analysed")

_LABELS = {
    "gap": "no file (gap)",
    "vetoed": "vetoed",
    "nonfinite": "non-finite samples",
    "short": "stretch too short",
    "pads": "stretch edge pads",
    "gated": "gated",
    "analysed": "analysed (live)",
}


@dataclass(frozen=True)
class LiveTimeTable:
    """Seconds of one search of a catalogue per category (module docstring).

    Attributes
    ----------
    start, end : float
        The catalogue's first sample and the time just after its last (s).
    seconds : dict of str to float
        Seconds per category, every one of :data:`CATEGORIES` present.
    intervals : dict of str to list of (float, float)
        The absolute time intervals (s) of each category, sorted.

    Examples
    --------
    >>> from chirpsift.pipeline import LiveTimeTable
    >>> t = LiveTimeTable.from_samples(
    ...     1000.0, 1100.0, 2.0,
    ...     spans=[(1000.0, {"pads": [(0, 20)], "analysed": [(20, 80)]}),
    ...            (1060.0, {"vetoed": [(0, 10)], "short": [(10, 80)]})],
    ...     gaps=[(1040.0, 1060.0)])
    >>> t.seconds["analysed"], t.seconds["gap"], t.total == t.end - t.start
    (30.0, 20.0, True)
    >>> print(t.format())
    category                seconds  fraction
    no file (gap)              20.0    20.00%
    vetoed                      5.0     5.00%
    non-finite samples          0.0     0.00%
    stretch too short          35.0    35.00%
    stretch edge pads          10.0    10.00%
    gated                       0.0     0.00%
    analysed (live)            30.0    30.00%
    total                     100.0   100.00%
    """

    start: float
    end: float
    seconds: dict[str, float]
    intervals: dict[str, list[tuple[float, float]]] = field(repr=False)

    @classmethod
    def from_samples(cls, start, end, sample_rate, spans, gaps) -> LiveTimeTable:
        """Build the table from per-span sample intervals and the gaps between spans.

        Parameters
        ----------
        start, end : float
            First sample and the time after the last (s).
        sample_rate : float
            Hz.
        spans : iterable of (float, dict)
            Per span, the time of its sample 0 (s) and its half-open sample intervals
            per category (categories absent count as empty).
        gaps : iterable of (float, float)
            Time intervals (s) covered by no file.

        Returns
        -------
        LiveTimeTable
        """
        counts = dict.fromkeys(CATEGORIES, 0)
        intervals: dict[str, list[tuple[float, float]]] = {c: [] for c in CATEGORIES}
        for t0, parts in spans:
            for category, found in parts.items():
                if category not in counts or category == "gap":
                    raise ValueError(f"unknown live-time category {category!r} for samples; one of {CATEGORIES[1:]}")
                for a, b in found:
                    counts[category] += b - a
                    intervals[category].append((t0 + a / sample_rate, t0 + b / sample_rate))
        seconds = {c: counts[c] / sample_rate for c in CATEGORIES}
        gaps = [(float(a), float(b)) for a, b in gaps]
        seconds["gap"] = float(sum(b - a for a, b in gaps))
        intervals["gap"] = gaps
        return cls(float(start), float(end), seconds, {c: sorted(v) for c, v in intervals.items()})

    @property
    def total(self) -> float:
        """Sum over the categories (s): ``end - start`` up to rounding."""
        return sum(self.seconds[c] for c in CATEGORIES)

    @property
    def live_time(self) -> float:
        """Seconds analysed."""
        return self.seconds["analysed"]

    def rows(self) -> list[tuple[str, float, float]]:
        """Return ``(category, seconds, fraction of end - start)`` per category, in order."""
        span = self.end - self.start
        return [(c, self.seconds[c], self.seconds[c] / span if span > 0 else 0.0) for c in CATEGORIES]

    def format(self) -> str:
        """Return the table as aligned text, one category a line, then the total."""
        lines = [f"{'category':<20}{'seconds':>11}{'fraction':>10}"]
        for c, sec, frac in self.rows():
            lines.append(f"{_LABELS[c]:<20}{sec:>11.1f}{frac:>10.2%}")
        span = self.end - self.start
        lines.append(f"{'total':<20}{self.total:>11.1f}{(self.total / span if span > 0 else 0.0):>10.2%}")
        return "\n".join(lines)

    def as_dict(self) -> dict:
        """Return a JSON-friendly dict: ``start``, ``end``, ``seconds`` and ``intervals``."""
        return {"start": self.start, "end": self.end, "seconds": dict(self.seconds),
                "intervals": {c: [list(iv) for iv in v] for c, v in self.intervals.items()}}
