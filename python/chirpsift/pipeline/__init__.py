"""The single-site search workflow: long strain in, a table of clustered triggers out.

It composes the numpy API's arrows (gating, spectrum, segments, the fused filter,
clustering, ranking) and never reaches into the compiled core. :func:`search` takes
strain held in memory; :func:`search_catalogue` runs the same search over a
catalogue of files (:mod:`chirpsift.io.catalogue`), reading them block by block.
"""

from ..gating import GatingWarning
from ..triggers import TRIGGER_DTYPE
from .live_time import CATEGORIES, LiveTimeTable
from .settings import SEARCH_OPTIONS, SearchOption, SearchSettings
from .single_site import MIN_ANALYSED_FRACTION, AnalysedFractionWarning, ExcludedDataWarning, search
from .streaming import cluster_across_bank, search_catalogue

__all__ = ["search", "SearchSettings", "SearchOption", "SEARCH_OPTIONS", "TRIGGER_DTYPE", "GatingWarning",
           "AnalysedFractionWarning", "ExcludedDataWarning", "MIN_ANALYSED_FRACTION",
           "search_catalogue", "cluster_across_bank", "LiveTimeTable", "CATEGORIES"]
