"""Files in and out: strain readers, trigger tables, atomic writes.

Modules
-------
strain
    :func:`read_strain` reads NumPy (``.npy``, ``.npz``), HDF5 (``.h5``, ``.hdf5``, with
    the optional ``h5py``) and text (``.txt``, ``.dat``, ``.csv``) files into a
    :class:`StrainSeries`, settling the file's own sample rate and start time against the
    caller's by one rule.
tables
    :func:`write_triggers` and :func:`read_triggers`: Parquet trigger tables with the run
    description as JSON in the schema metadata.
atomic
    :func:`atomic_path` and :func:`write_json_atomic`: every file is written under a
    temporary name in its destination folder and renamed into place only once complete,
    so an interrupted run never leaves a file that looks finished.
readers
    Guarded ``np.load`` and Parquet readers: a damaged file always gives a ``ValueError``
    whose one-line message names the file.

A problem with a file's content is a ``ValueError`` naming the file; a wrong argument
type is a ``TypeError``; a missing file is ``FileNotFoundError``.

Units: seconds, Hz; strain is dimensionless.
"""

from ..condition import find_nonfinite_runs  # re-exported: readers keep NaN runs for the search
from .atomic import atomic_path, write_json_atomic
from .metadata import TIME_STEP_TOLERANCE
from .strain import STRAIN_EXTENSIONS, StrainSeries, read_strain
from .tables import METADATA_KEY, read_triggers, write_triggers

__all__ = [
    "StrainSeries",
    "read_strain",
    "find_nonfinite_runs",
    "write_triggers",
    "read_triggers",
    "write_json_atomic",
    "atomic_path",
    "METADATA_KEY",
    "TIME_STEP_TOLERANCE",
    "STRAIN_EXTENSIONS",
]
