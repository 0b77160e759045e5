"""Simulated signals and measured sensitivity.

Draw a population of sources (:func:`draw_injections`), add their signals to each
site's strain (:func:`project`), compute their optimal SNRs and effective distances
(:func:`injection_snr`, :func:`effective_distance`), match them to the candidates of a
search (:mod:`chirpsift.inject.campaign`), and turn found and missed injections into
efficiency, sensitive volume, volume-time and range (:mod:`chirpsift.inject.sensitivity`).

This workflow uses only chirpsift's numpy API, never the compiled core.
"""

from .campaign import (
    MATCH_WINDOW,
    CampaignResult,
    analysed_mask,
    found_missed,
    found_missed_dtype,
    match_injections,
    run_campaign,
)
from .population import (
    DISTANCE_DISTRIBUTIONS,
    INJECTION_COLUMNS,
    INJECTION_DTYPE,
    SPACING_MARGIN,
    draw_injections,
    longest_signal,
)
from .project import (
    APPROXIMANTS,
    arrival_times,
    effective_distance,
    injection_snr,
    optimal_sigma,
    project,
    site_response,
)
from .sensitivity import (
    EFFICIENCY_DTYPE,
    FINN_CHERNOFF_RATIO,
    SECONDS_PER_YEAR,
    Sensitivity,
    chirp_distance,
    efficiency,
    horizon_distance,
    plot_efficiency,
    sensitive_volume,
    sensitivity,
)

__all__ = [
    "APPROXIMANTS",
    "MATCH_WINDOW",
    "CampaignResult",
    "run_campaign",
    "analysed_mask",
    "found_missed",
    "found_missed_dtype",
    "match_injections",
    "DISTANCE_DISTRIBUTIONS",
    "EFFICIENCY_DTYPE",
    "FINN_CHERNOFF_RATIO",
    "INJECTION_COLUMNS",
    "INJECTION_DTYPE",
    "SECONDS_PER_YEAR",
    "SPACING_MARGIN",
    "Sensitivity",
    "arrival_times",
    "chirp_distance",
    "draw_injections",
    "effective_distance",
    "efficiency",
    "horizon_distance",
    "injection_snr",
    "longest_signal",
    "optimal_sigma",
    "plot_efficiency",
    "project",
    "sensitive_volume",
    "sensitivity",
    "site_response",
]
