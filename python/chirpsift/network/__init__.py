"""Sites and significance: geometry, coincidence, time slides and false-alarm rates.

Detector geometry, multi-site coincidence, the time-slide background and false-alarm
rates. A workflow over the numpy API: it never touches the compiled core.
"""

from .bench import benchmark_slides
from .coincidence import (
    CAUTIONS,
    DEFAULT_ALLOWANCE,
    background_dtype,
    candidate_dtype,
    coincidences,
)
from .far import YEAR, false_alarm_rate
from .sites import (
    EXAMPLE_SITES,
    Site,
    greenwich_sidereal_time,
    light_travel_time,
    load_sites,
)
from .statistic import network_statistic

__all__ = [
    "CAUTIONS",
    "DEFAULT_ALLOWANCE",
    "EXAMPLE_SITES",
    "YEAR",
    "Site",
    "background_dtype",
    "benchmark_slides",
    "candidate_dtype",
    "coincidences",
    "false_alarm_rate",
    "greenwich_sidereal_time",
    "light_travel_time",
    "load_sites",
    "network_statistic",
]
