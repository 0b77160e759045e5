"""The standard workloads W1, W2 and W3: data, bank and search settings, defined once.

``W1``
    One 256 s segment at 4096 Hz (``N = 2**20``), ``f_low = 20`` Hz, Gaussian noise
    coloured by the ``"gen2-zero-detuned"`` design curve, and 256 non-spinning
    templates with component masses in 1.2-2.0 Msun (uniform in chirp mass).
``W2``
    The same data with 256 templates spanning total mass 2-40 Msun (uniform in
    ``log M``, components of at least 1 Msun).
``W3``
    2,048 s of the same kind of noise searched with :func:`chirpsift.search` (256 s
    segments) and 10,000 templates of total mass 10-40 Msun (components of at least
    3 Msun, so that each segment keeps most of its samples).

Every other search setting is :class:`chirpsift.SearchSettings`' default.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from ..bank import Bank
from ..pipeline import SearchSettings
from .banks import component_mass_bank, total_mass_bank

__all__ = ["QUICK_SCALE", "FULL_DATA_SCALE", "WORKLOADS", "Workload", "workload"]

#: Scale used by ``--quick`` (a quarter of the templates, the full data lengths).
QUICK_SCALE = 1.0 / 4.0

#: Below this scale the data are shortened as well (smoke tests only).
FULL_DATA_SCALE = 1.0 / 16.0

#: Names of the standard workloads.
WORKLOADS = ("W1", "W2", "W3")

CURVE = "gen2-zero-detuned"
SAMPLE_RATE = 4096.0
F_LOW = 20.0
_SEED = {"W1": 20260101, "W2": 20260101, "W3": 20260303}
_FULL = {  # templates, data duration (s), segment duration (s)
    "W1": (256, 256.0, 256.0),
    "W2": (256, 256.0, 256.0),
    "W3": (10_000, 2048.0, 256.0),
}
_MIN_TEMPLATES = {"W1": 4, "W2": 4, "W3": 8}
_MIN_DURATION = {"W1": 8.0, "W2": 8.0, "W3": 64.0}


@lru_cache(maxsize=4)
def _noise(n: int, sample_rate: float, seed: int, f_low: float) -> np.ndarray:
    from ..synthetic import colored_gaussian_noise

    x = colored_gaussian_noise(n, sample_rate, CURVE, seed=seed, f_low=f_low)
    x.setflags(write=False)
    return x


@dataclass
class Workload:
    """One standard workload: data, bank and search settings.

    Attributes
    ----------
    name : str
        ``"W1"``, ``"W2"`` or ``"W3"``.
    scale : float
        The scale it was built with.
    bank : chirpsift.Bank
        The templates.
    sample_rate, duration : float
        Hz, s.
    settings : chirpsift.SearchSettings
        ``f_low`` (Hz) and ``segment_duration`` (s) of the workload, every other
        setting at the search's default.
    seed : int
        Seed of the noise.
    description : str
        One line for tables.
    """

    name: str
    scale: float
    bank: Bank
    sample_rate: float
    duration: float
    settings: SearchSettings
    seed: int
    description: str
    _cache: dict = field(default_factory=dict, repr=False, compare=False)

    @property
    def f_low(self) -> float:
        """Lower frequency cutoff, Hz."""
        return self.settings.f_low

    @property
    def segment_duration(self) -> float:
        """Length of one filtered segment, s."""
        return self.settings.segment_duration

    @property
    def n(self) -> int:
        """Number of strain samples."""
        return int(round(self.duration * self.sample_rate))

    @property
    def segment_samples(self) -> int:
        """Samples per filtered segment (the inverse FFT length)."""
        return int(round(self.segment_duration * self.sample_rate))

    @property
    def df(self) -> float:
        """Frequency spacing of one segment (Hz)."""
        return 1.0 / self.segment_duration

    @property
    def n_freq(self) -> int:
        """Frequency bins of one segment."""
        return self.segment_samples // 2 + 1

    @property
    def cluster_samples(self) -> int:
        """Per-template clustering half-width (the search's ``peak_window``) in samples."""
        return int(round(self.settings.peak_window * self.sample_rate))

    def strain(self) -> np.ndarray:
        """Return the noise (read-only float64, deterministic for the workload's seed)."""
        return _noise(self.n, self.sample_rate, self.seed, self.f_low)

    def segment(self):
        """Frequency-domain data and truncated PSD of the first segment.

        Returns
        -------
        data_fd : ndarray, complex128
            ``rfft(segment) / sample_rate``.
        psd : ndarray, float64
            Welch median estimate from the segment, on its rfft grid, after inverse
            spectrum truncation (as :func:`chirpsift.search` does).
        """
        if "segment" not in self._cache:
            from ..spectrum import psd_to_grid, truncate_inverse_psd, welch

            x = self.strain()[: self.segment_samples]
            fs = self.sample_rate
            t_welch = self.settings.welch_duration
            freqs, est = welch(x, fs, t_welch, average="median")
            psd = truncate_inverse_psd(psd_to_grid(freqs, est, self.df, self.n_freq), fs, t_welch, self.f_low)
            self._cache["segment"] = (np.fft.rfft(x) / fs, psd)
        return self._cache["segment"]

    def _analysable(self) -> tuple[int, int]:
        from ..segments import padding
        from ..waveform import chirp_duration

        longest = float(np.max(chirp_duration(self.bank.m1, self.bank.m2, self.f_low)))
        pad_start, pad_end = padding(longest, self.settings.welch_duration, self.sample_rate)
        return pad_start, self.segment_samples - pad_end

    @property
    def templates_fit(self) -> bool:
        """Whether a segment keeps any samples after the search's pads for the longest template.

        False only at smoke-test scales, whose data are shortened.
        """
        start, stop = self._analysable()
        return 1 <= start < stop <= self.segment_samples - 1

    def valid(self) -> tuple[int, int]:
        """Analysable samples ``[start, stop)`` of one segment, as the search computes them.

        If the bank's longest template does not fit in the segment (only at smoke-test
        scales) the middle half of the segment is used; the timing is unaffected.
        """
        n = self.segment_samples
        return self._analysable() if self.templates_fit else (n // 4, 3 * n // 4)

    def filter_kwargs(self) -> dict:
        """Keyword arguments of :func:`chirpsift.filter_segment` for this workload."""
        s = self.settings
        return {
            "f_low": s.f_low,
            "min_snr": s.min_snr,
            "cluster_samples": self.cluster_samples,
            "chi2_bands": s.chi2_bands,
            "valid": self.valid(),
        }


def _scaled(name: str, scale: float) -> tuple[int, float, float]:
    k_full, dur_full, seg_full = _FULL[name]
    k = max(_MIN_TEMPLATES[name], int(round(k_full * scale)))
    if scale >= FULL_DATA_SCALE:
        return k, dur_full, seg_full
    # smoke-test sizes: shorten the data by a power of two
    factor = 2.0 ** math.floor(math.log2(max(scale / FULL_DATA_SCALE, 1e-9)))
    dur = max(_MIN_DURATION[name], dur_full * factor)
    seg = min(seg_full, dur) if name != "W3" else min(seg_full, dur / 2)
    return k, dur, seg


def workload(name: str, scale: float = 1.0) -> Workload:
    """Build a standard workload.

    Parameters
    ----------
    name : {"W1", "W2", "W3"}
        Which workload.
    scale : float, optional
        Multiplies the template count (``scale=1``: 256, 256 and 10,000 templates);
        below :data:`FULL_DATA_SCALE` the data are shortened too.

    Returns
    -------
    Workload

    Examples
    --------
    >>> from chirpsift import benchmarks
    >>> w = benchmarks.workload("W1", scale=1 / 16)
    >>> len(w.bank), w.n
    (16, 1048576)
    """
    key = str(name).upper()
    if key not in WORKLOADS:
        raise ValueError(f"unknown workload {name!r}; choose from {', '.join(WORKLOADS)}")
    s = float(scale)
    if not (math.isfinite(s) and s > 0):
        raise ValueError(f"scale must be a positive number, got {scale!r}")
    k, dur, seg = _scaled(key, s)
    if key == "W1":
        bank = component_mass_bank(k, 1.2, 2.0)
        desc = f"{k} templates, components 1.2-2.0 Msun"
    elif key == "W2":
        bank = total_mass_bank(k, 2.0, 40.0, m_min=1.0)
        desc = f"{k} templates, total mass 2-40 Msun"
    else:
        bank = total_mass_bank(k, 10.0, 40.0, m_min=3.0)
        desc = f"{k} templates, total mass 10-40 Msun"
    desc += f", {dur:g} s at {SAMPLE_RATE:g} Hz, f_low {F_LOW:g} Hz"
    settings = SearchSettings(f_low=F_LOW, segment_duration=seg)
    return Workload(key, s, bank, SAMPLE_RATE, dur, settings, _SEED[key], desc)
