"""Settings of the single-site search: every tunable once, with its default, unit and check.

:class:`SearchSettings` is the one place that knows the search's options. :func:`chirpsift.search`
builds one from its keyword arguments, the TOML ``[search]`` table and the command-line flags are
generated from :data:`SEARCH_OPTIONS`, and run summaries and benchmarks record
:meth:`SearchSettings.as_dict`. A key is the option's name with dashes for underscores
(``min_snr`` -> ``min-snr``, ``--min-snr``).
"""

from __future__ import annotations

import difflib
from dataclasses import asdict, dataclass


from .._validate import choice, nonnegative_scalar, integer, positive_scalar, switch

__all__ = ["SearchSettings", "SearchOption", "SEARCH_OPTIONS", "option_key"]


@dataclass(frozen=True)
class SearchOption:
    """Description of one search option (for help screens, config files and summaries).

    Attributes
    ----------
    name : str
        Keyword argument of :func:`chirpsift.search`.
    unit : str
        Unit of the value ("Hz", "s") or "" for a pure number or switch.
    kind : str
        ``"positive"``, ``"nonnegative"``, ``"count"`` (integer >= 1), ``"order"``
        (integer 0-7), ``"switch"`` (True/False) or ``"choice"`` (one of ``choices``).
    optional : bool
        Whether ``None`` is allowed (it then means what ``help`` says).
    help : str
        One line for help screens, ending with what ``None`` means where allowed.
    choices : tuple of str
        The allowed values of a ``"choice"`` option; empty otherwise.
    """

    name: str
    unit: str
    kind: str
    optional: bool
    help: str
    choices: tuple[str, ...] = ()

    @property
    def key(self) -> str:
        """Config-file key and command-line flag name (without the leading dashes)."""
        return option_key(self.name)


def option_key(name: str) -> str:
    """``min_snr`` -> ``min-snr``: the spelling used in TOML files and on the command line."""
    return name.replace("_", "-")


SEARCH_OPTIONS: tuple[SearchOption, ...] = (
    SearchOption("f_low", "Hz", "positive", False, "lower frequency cutoff of templates and filters (required)"),
    SearchOption("segment_duration", "s", "positive", True,
                 "analysis segment length; default: sized from the bank's longest template T, the smallest "
                 "power of two of samples at least 4 (1.1 T + welch_duration) and 64 welch_duration, capped "
                 "by the data"),
    SearchOption("min_snr", "", "positive", False, "smallest SNR kept as a trigger"),
    SearchOption("peak_window", "s", "nonnegative", False,
                 "half-width of the clustering window: a trigger is kept only if no louder peak of the "
                 "same template lies within this many seconds either side"),
    SearchOption("chi2_bands", "", "count", False,
                 "number p of frequency bands of the chi-squared test (2p - 2 degrees of freedom); at least 2"),
    SearchOption("gate_threshold", "", "positive", True,
                 "whitened amplitude (in units of the noise standard deviation) above which data are "
                 "gated; default: no gating"),
    SearchOption("gate_half_width", "s", "nonnegative", False, "time zeroed on either side of each loud sample"),
    SearchOption("gate_taper", "s", "nonnegative", False, "length of the half-cosine taper on each side of a gate"),
    SearchOption("welch_duration", "s", "positive", False,
                 "Welch segment length of the PSD estimate, also the length of the truncated inverse-PSD filter"),
    SearchOption("psd_duration", "s", "positive", True,
                 "seconds of data, centred on each segment, from which its PSD is estimated; default: the segment"),
    SearchOption("bank_cluster", "", "switch", False,
                 "after clustering each template in time, keep only the loudest trigger (by reweighted SNR) "
                 "within the peak window across the whole bank"),
    SearchOption("phase_order", "", "order", False, "post-Newtonian order of the template phase, twice the PN order"),
    SearchOption("nonfinite", "", "choice", False,
                 "what to do with NaN or infinite strain samples: 'skip' searches the finite stretches between "
                 "them separately and reports what was left out, 'error' refuses the data",
                 choices=("skip", "error")),
)

_BY_NAME = {o.name: o for o in SEARCH_OPTIONS}


def _check(option: SearchOption, value):
    name = option.name
    if value is None:
        if option.optional:
            return None
        raise ValueError(f"{name} must be given, got None")
    if option.kind == "positive":
        return positive_scalar(name, value)
    if option.kind == "nonnegative":
        return nonnegative_scalar(name, value)
    if option.kind == "count":
        return integer(name, value, minimum=2 if name == "chi2_bands" else 1)
    if option.kind == "order":
        return integer(name, value, minimum=0, maximum=7)
    if option.kind == "switch":
        return switch(name, value)
    if option.kind == "choice":
        return choice(name, value, option.choices)
    raise AssertionError(f"unknown option kind {option.kind!r}")


@dataclass(frozen=True)
class SearchSettings:
    """Validated settings of :func:`chirpsift.search` (see :data:`SEARCH_OPTIONS` for units).

    Every field is checked on construction; a bad value raises ``ValueError`` or
    ``TypeError`` naming the field and the value. The class attributes hold the
    defaults, so ``SearchSettings.min_snr`` is the default minimum SNR.

    Examples
    --------
    >>> from chirpsift.pipeline import SEARCH_OPTIONS, SearchSettings
    >>> s = SearchSettings(f_low=20.0, min_snr=6)
    >>> s.min_snr, s.peak_window
    (6.0, 1.0)
    >>> SearchSettings.from_mapping({"f-low": 30, "chi2-bands": 8}).chi2_bands
    8
    >>> s.segment_duration is None  # sized from the bank's longest template
    True
    >>> s.nonfinite, s.replace(nonfinite="error").nonfinite
    ('skip', 'error')
    >>> SearchSettings(f_low=20.0, nonfinite="drop")
    Traceback (most recent call last):
    ...
    ValueError: nonfinite must be one of 'skip', 'error', got 'drop'
    >>> [o.key for o in SEARCH_OPTIONS if o.kind == "choice"], SEARCH_OPTIONS[-1].choices
    (['nonfinite'], ('skip', 'error'))
    """

    f_low: float
    segment_duration: float | None = None
    min_snr: float = 5.5
    peak_window: float = 1.0
    chi2_bands: int = 16
    gate_threshold: float | None = None
    gate_half_width: float = 0.25
    gate_taper: float = 0.125
    welch_duration: float = 4.0
    psd_duration: float | None = None
    bank_cluster: bool = False
    phase_order: int = 7
    nonfinite: str = "skip"

    def __post_init__(self):
        for option in SEARCH_OPTIONS:
            object.__setattr__(self, option.name, _check(option, getattr(self, option.name)))
        for name in ("gate_half_width", "gate_taper") if self.gate_threshold is not None else ():
            if getattr(self, name) > self.welch_duration:
                raise ValueError(
                    f"{name}={getattr(self, name)} s is longer than welch_duration={self.welch_duration} s: "
                    "gates are for short transients"
                )
        seg = self.segment_duration
        if seg is not None:
            if self.welch_duration > seg:
                raise ValueError(f"welch_duration={self.welch_duration} s is longer than segment_duration={seg} s")
            if self.psd_duration is not None and self.psd_duration < seg:
                raise ValueError(f"psd_duration={self.psd_duration} s must be at least segment_duration={seg} s")

    def as_dict(self) -> dict:
        """Plain ``{name: value}`` (for summaries and ``search(**settings.as_dict())``)."""
        return asdict(self)

    def replace(self, **changes) -> "SearchSettings":
        """A copy with some fields changed (checked again)."""
        return SearchSettings(**{**self.as_dict(), **changes})

    @classmethod
    def from_mapping(cls, mapping, *, where: str = "search settings") -> "SearchSettings":
        """Build from a mapping with underscore names or dashed keys (a TOML ``[search]`` table).

        Unknown keys raise ``ValueError`` naming the key and the nearest valid one.
        """
        kwargs = {}
        for key, value in dict(mapping).items():
            name = str(key).replace("-", "_")
            if name not in _BY_NAME:
                valid = [o.key for o in SEARCH_OPTIONS]
                near = difflib.get_close_matches(option_key(name), valid, n=1)
                hint = f"; did you mean {near[0]!r}?" if near else f"; valid keys: {', '.join(valid)}"
                raise ValueError(f"{where}: unknown key {key!r}{hint}")
            kwargs[name] = value
        if "f_low" not in kwargs:
            raise ValueError(f"{where}: f-low (Hz) must be given")
        try:
            return cls(**kwargs)
        except (TypeError, ValueError) as exc:
            raise type(exc)(f"{where}: {exc}") from None

