"""Template banks: the :class:`Bank` of templates, and placing and checking one.

- :mod:`~chirpsift.bank.templates`: :class:`Bank` (parameters, files, metadata).
- :mod:`~chirpsift.bank.region`: :class:`Region`, the source region and its measure.
- :mod:`~chirpsift.bank.metric`: the match metric and flat coordinates.
- :mod:`~chirpsift.bank.place`: :func:`place_bank` (hexagonal lattice, stochastic).
- :mod:`~chirpsift.bank.coverage`: :func:`fitting_factor`, :func:`bank_coverage`.
- :mod:`~chirpsift.bank.plot`: the coverage figure.
"""

from .templates import BANK_FORMAT, BANK_VERSION, Bank
from .region import Region
from .coverage import Coverage, bank_coverage, coverage_summary, fitting_factor
from .place import METHODS, CoverageWarning, estimate_bank_size, place_bank

__all__ = ["Bank", "BANK_FORMAT", "BANK_VERSION", "Region", "place_bank", "estimate_bank_size", "METHODS",
           "fitting_factor", "bank_coverage", "Coverage", "coverage_summary", "CoverageWarning"]
