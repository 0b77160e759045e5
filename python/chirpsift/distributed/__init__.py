"""Scale-out of ``chirpsift run``: where units execute, in this process or on Dask.

``settings``
    The ``[engine]`` table and flags (:class:`EngineSettings`, :data:`ENGINE_KEYS`);
    imports no Dask.
``cluster``
    The one cluster factory (:func:`make_client`): a ``LocalCluster``, a running
    scheduler, HTCondor or SLURM through dask-jobqueue (:func:`batch_cluster` builds
    their job scripts without submitting), all with Dask's housekeeping intervals
    lengthened for long units (:data:`HOUSEKEEPING`).
``executor``
    Run named tasks in-process or on Dask with bounded attempts (:func:`executor`).

Dask is an extra (``pip install "chirpsift[cluster]"``), imported only when an engine
other than ``"process"`` is used. A workflow over the numpy API: never imports the
compiled core.
"""

from .cluster import HOUSEKEEPING, batch_cluster, make_client
from .executor import DaskExecutor, InProcess, Outcome, executor
from .settings import DEFAULT_TEMPLATES_PER_UNIT, ENGINE_KEYS, ENGINE_KINDS, EngineSettings, engine_settings

__all__ = ["EngineSettings", "ENGINE_KEYS", "ENGINE_KINDS", "DEFAULT_TEMPLATES_PER_UNIT", "engine_settings",
           "make_client", "batch_cluster", "HOUSEKEEPING", "executor", "InProcess", "DaskExecutor", "Outcome"]
