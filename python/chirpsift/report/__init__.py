"""What a run tells people: the run summary, screen wording, and the HTML report of a run.

``summary``
    The JSON run summary written beside a trigger table (:func:`run_summary`).
``text``
    Small wording helpers shared by the command line and the benchmark table.
``html``
    The self-contained HTML report of a run folder (:func:`chirpsift.report.html.write_report`).
``plots``
    Its matplotlib figures and the colour scheme they share.
``refilter``
    SNR and chi-squared series around a candidate, filtered again for the report.
``command``
    The ``chirpsift report`` subcommand.
"""

from .summary import SUMMARY_VERSION, loudest, run_summary
from .text import plural

__all__ = ["SUMMARY_VERSION", "loudest", "run_summary", "plural"]
