"""Whole analyses: ``chirpsift run ANALYSIS.toml`` from strain catalogues to a report.

``analysis``
    The analysis file (:func:`load_analysis`, :data:`SCHEMA`).
``stages``
    The plan of units with stable keys, what each reads and publishes (:func:`plan`).
``manifest``
    The run manifest, written by the driver alone: settings hash, published files and
    their hashes (:class:`Manifest`).
``driver``
    Runs the plan, skipping complete units (:func:`run_analysis`).
``progress``
    The progress display (a tqdm bar, or lines for batch logs).
``command``
    The ``chirpsift run`` subcommand.

A workflow over the numpy API: it never touches the compiled core.
"""

from .analysis import FORMAT_VERSION, SCHEMA, Analysis, SiteData, load_analysis, write_analysis
from .driver import FolderInUse, RunResult, UnitsFailed, run_analysis
from .manifest import MANIFEST_NAME, Manifest, ManifestMismatch
from .stages import STAGES, Unit, plan

__all__ = ["Analysis", "SiteData", "load_analysis", "write_analysis", "SCHEMA", "FORMAT_VERSION", "run_analysis",
           "RunResult", "UnitsFailed", "FolderInUse", "Manifest", "ManifestMismatch", "MANIFEST_NAME", "STAGES",
           "Unit", "plan"]
