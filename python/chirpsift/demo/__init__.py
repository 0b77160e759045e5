"""The demo scenario of ``chirpsift demo``: invented sites, synthetic data, and what the run found.

``chirpsift demo`` writes a scenario (:func:`make_scenario`, :func:`write_scenario`: three
invented sites, coloured Gaussian noise from design curves, one hidden binary, one loud
glitch, a veto and a missing file), runs ``chirpsift run`` on the analysis file it wrote,
and prints :func:`summary_lines` of :func:`read_outcome`. A workflow package: it never
imports the compiled core.
"""

from .outcome import GLITCH_WINDOW, match_hidden, near_glitch, read_outcome, summary_lines
from .scenario import (
    ANALYSIS_FILE,
    DEFAULT_FOLDER,
    RESULTS,
    SCENARIO_FILE,
    Scenario,
    analysis_mapping,
    bank_table,
    estimated_common_time,
    make_scenario,
    read_scenario,
    write_scenario,
)

__all__ = [
    "ANALYSIS_FILE", "DEFAULT_FOLDER", "RESULTS", "SCENARIO_FILE", "GLITCH_WINDOW", "Scenario", "analysis_mapping",
    "bank_table", "estimated_common_time", "make_scenario", "read_scenario", "write_scenario",
    "match_hidden", "near_glitch", "read_outcome", "summary_lines",
]
