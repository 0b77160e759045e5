"""Pure-numpy reference implementation of chirpsift's kernels.

Every function here has the same signature and, to floating-point precision,
the same result as its fast counterpart in the main package. It favours the
direct formula over speed and is the executable specification of each
kernel. It depends on numpy only.
"""

from .constants import AU_SI, C_SI, GM_SUN_SI, MPC, T_SUN
from .filter import band, correlate, sigma, snr_series
from .fused import filter_segment
from .overlap import match
from .spectrum import (
    DESIGN_CURVES,
    design_psd,
    median_bias,
    psd_to_grid,
    truncate_inverse_psd,
    welch,
    whiten,
)
from .waveform import (
    chirp_duration,
    isco_frequency,
    taylorf2,
    taylorf2_coefficients,
    taylorf2_phase,
    time_to_coalescence,
)

__all__ = [
    "AU_SI", "C_SI", "GM_SUN_SI", "MPC", "T_SUN",
    "welch", "median_bias", "DESIGN_CURVES", "design_psd", "psd_to_grid",
    "truncate_inverse_psd", "whiten",
    "taylorf2", "taylorf2_phase", "taylorf2_coefficients",
    "time_to_coalescence", "chirp_duration", "isco_frequency",
    "band", "sigma", "snr_series", "correlate",
    "filter_segment", "match",
]
