"""chirpsift: fast matched-filter searches for compact-binary chirps in strain data.

Plain numpy arrays in and out; a Rust core does the work. ``chirpsift.reference``
holds a pure-numpy twin of every kernel.
"""

from .filter import correlate, sigma, snr_series
from .bank import Bank, bank_coverage, fitting_factor, place_bank
from .overlap import match
from .clustering import cluster_in_time
from .fused import PEAK_COLUMNS, PreparedBank, PreparedSegment, filter_segment, prepare_bank, prepare_segments
from .triggers import TRIGGER_COLUMNS, TRIGGER_DTYPE
from .gating import GatingWarning
from .pipeline import AnalysedFractionWarning, ExcludedDataWarning, SearchSettings, search
from .ranking import reweighted_snr
from .segments import plan_segments
from .spectrum import DESIGN_CURVES, design_psd, psd_to_grid, segment_psds, truncate_inverse_psd, welch, whiten
from .threads import get_threads, set_threads
from .waveform import C_SI, MPC, T_SUN, chirp_duration, isco_frequency, taylorf2
from .network import Site, coincidences, light_travel_time, load_sites
from .inject import draw_injections, efficiency, horizon_distance, injection_snr, project, sensitive_volume, sensitivity

from ._core import __version__ as __version__

__all__ = [
    "AnalysedFractionWarning",
    "Bank",
    "bank_coverage",
    "fitting_factor",
    "match",
    "place_bank",
    "ExcludedDataWarning",
    "GatingWarning",
    "SearchSettings",
    "TRIGGER_COLUMNS",
    "PEAK_COLUMNS",
    "PreparedBank",
    "prepare_bank",
    "PreparedSegment",
    "prepare_segments",
    "segment_psds",
    "TRIGGER_DTYPE",
    "cluster_in_time",
    "plan_segments",
    "reweighted_snr",
    "search",
    "C_SI",
    "DESIGN_CURVES",
    "MPC",
    "T_SUN",
    "chirp_duration",
    "correlate",
    "design_psd",
    "filter_segment",
    "get_threads",
    "isco_frequency",
    "psd_to_grid",
    "set_threads",
    "sigma",
    "snr_series",
    "taylorf2",
    "truncate_inverse_psd",
    "welch",
    "whiten",
    "Site",
    "coincidences",
    "light_travel_time",
    "load_sites",
    "draw_injections",
    "efficiency",
    "horizon_distance",
    "injection_snr",
    "project",
    "sensitive_volume",
    "sensitivity",
]
