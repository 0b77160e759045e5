"""What a run tells people: the run summary document and the wording of screen output.

``summary``
    The JSON run summary written beside a trigger table (:func:`run_summary`).
``text``
    Small wording helpers shared by the command line and the benchmark table.
"""

from .summary import SUMMARY_VERSION, loudest, run_summary
from .text import plural

__all__ = ["SUMMARY_VERSION", "loudest", "run_summary", "plural"]
