"""Reading strain, writing triggers and run summaries.

Strain is read from NumPy (``.npy``, ``.npz``), HDF5 (``.h5``, ``.hdf5``, needs the
optional ``h5py`` dependency) and plain text (``.txt``, ``.dat``, ``.csv``) files into a
:class:`StrainSeries`. Triggers are written as a Parquet table with the run's metadata
stored as JSON in the schema metadata; every writer here is atomic (a temporary file in
the destination folder, renamed into place only once it is complete), so an interrupted
run never leaves a file that looks finished.

Units: seconds, Hz; strain is dimensionless.
"""

from __future__ import annotations

import contextlib
import json
import math
import numbers
import os
import tempfile
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .condition import find_nonfinite_runs  # re-exported: readers keep NaN runs for the search

__all__ = [
    "StrainSeries",
    "read_strain",
    "find_nonfinite_runs",
    "write_triggers",
    "read_triggers",
    "write_json_atomic",
    "METADATA_KEY",
]

#: Key of the JSON document in a Parquet file's schema metadata.
METADATA_KEY = "chirpsift"

_NUMPY_EXT = (".npy",)
_NPZ_EXT = (".npz",)
_HDF5_EXT = (".h5", ".hdf5")
_TEXT_EXT = (".txt", ".dat", ".csv")
_SUPPORTED = _NUMPY_EXT + _NPZ_EXT + _HDF5_EXT + _TEXT_EXT

#: Relative tolerance on the spacing of a text file's time column.
TIME_SPACING_RTOL = 1e-6


@dataclass(frozen=True, eq=False)
class StrainSeries:
    """A uniformly sampled strain time series.

    Attributes
    ----------
    data : numpy.ndarray
        Strain samples, float64, 1-D (dimensionless).
    sample_rate : float
        Sampling rate in Hz.
    t0 : float
        Time of the first sample in seconds (float64).
    source : str
        Where the samples came from (a file path, optionally with ``:dataset``).
    """

    data: np.ndarray
    sample_rate: float
    t0: float
    source: str

    @property
    def duration(self) -> float:
        """Length of the series in seconds (``len(data) / sample_rate``)."""
        return self.data.size / self.sample_rate

    @property
    def dt(self) -> float:
        """Sampling interval in seconds."""
        return 1.0 / self.sample_rate

    def times(self) -> np.ndarray:
        """Absolute time of every sample in seconds, float64."""
        return self.t0 + np.arange(self.data.size) / self.sample_rate

    def __len__(self) -> int:
        return int(self.data.size)

    def __repr__(self) -> str:
        return (
            f"StrainSeries(n={self.data.size}, sample_rate={self.sample_rate!r}, "
            f"t0={self.t0!r}, source={self.source!r})"
        )


# ---------------------------------------------------------------------------
# scalar validation
# ---------------------------------------------------------------------------
def _as_real_scalar(value, what: str, where: str) -> float:
    """Convert ``value`` (number or 0-d/size-1 array) to float, or raise naming it."""
    if isinstance(value, (bool, np.bool_)):
        raise TypeError(f"{where}: {what} must be a real number, got {value!r}")
    if isinstance(value, numbers.Real):
        return float(value)
    arr = np.asarray(value)
    if arr.size != 1 or arr.dtype.kind not in "iuf":
        raise TypeError(f"{where}: {what} must be a real number, got {value!r}")
    return float(arr.reshape(()))


def _check_sample_rate(value, where: str) -> float:
    fs = _as_real_scalar(value, "sample_rate", where)
    if not math.isfinite(fs) or fs <= 0:
        raise ValueError(f"{where}: sample_rate must be a positive finite number of Hz, got {fs!r}")
    return fs


def _check_t0(value, where: str) -> float:
    t0 = _as_real_scalar(value, "t0", where)
    if not math.isfinite(t0):
        raise ValueError(f"{where}: t0 must be a finite number of seconds, got {t0!r}")
    return t0


def _check_data(data, where: str) -> np.ndarray:
    arr = np.asarray(data)
    if arr.dtype.kind == "c":
        raise TypeError(f"{where}: strain must be real, got complex dtype {arr.dtype}")
    if arr.dtype.kind not in "biuf":
        raise TypeError(f"{where}: strain must be numeric, got dtype {arr.dtype}")
    if arr.ndim != 1:
        raise ValueError(f"{where}: strain must be 1-D, got an array of shape {arr.shape}")
    if arr.size == 0:
        raise ValueError(f"{where}: strain is empty (0 samples)")
    return np.array(arr, dtype=np.float64, order="C", copy=True)


def _missing_rate(where: str, how: str) -> ValueError:
    return ValueError(f"{where}: no sample rate; {how}")


# ---------------------------------------------------------------------------
# readers per format
# ---------------------------------------------------------------------------
def _read_npy(path: Path, sample_rate, t0):
    where = str(path)
    try:
        data = np.load(path, allow_pickle=False)
    except ValueError as exc:  # object arrays, corrupt headers
        raise ValueError(f"{where}: cannot read as a .npy array ({exc})") from None
    if sample_rate is None:
        raise _missing_rate(where, "a .npy file stores none, so pass sample_rate (--sample-rate)")
    return data, sample_rate, (0.0 if t0 is None else t0), where


def _npz_scalar(npz, name: str, where: str):
    value = npz[name]
    if value.size != 1:
        raise ValueError(f"{where}: array {name!r} must hold a single number, got shape {value.shape}")
    return value.reshape(())


def _read_npz(path: Path, sample_rate, t0):
    where = str(path)
    try:
        npz = np.load(path, allow_pickle=False)
    except ValueError as exc:
        raise ValueError(f"{where}: cannot read as a .npz archive ({exc})") from None
    with npz:
        names = list(npz.files)
        if "strain" not in names:
            raise ValueError(
                f"{where}: no array named 'strain' in the archive (it holds {names or 'nothing'})"
            )
        data = npz["strain"]
        if sample_rate is None:
            if "sample_rate" not in names:
                raise _missing_rate(
                    where, "store a scalar 'sample_rate' in the archive or pass sample_rate (--sample-rate)"
                )
            sample_rate = _npz_scalar(npz, "sample_rate", where)
        if t0 is None:
            t0 = _npz_scalar(npz, "t0", where) if "t0" in names else 0.0
    return data, sample_rate, t0, where


def _import_h5py():
    try:
        import h5py
    except ImportError as exc:
        raise ImportError(
            "reading HDF5 strain files needs the optional h5py package: pip install chirpsift[hdf5]"
        ) from exc
    return h5py


def _hdf5_datasets(h5file) -> list[str]:
    names: list[str] = []

    def visit(name, obj):
        if hasattr(obj, "shape") and hasattr(obj, "dtype"):
            names.append(name)

    h5file.visititems(visit)
    return names


def _read_hdf5(path: Path, dataset, sample_rate, t0, sample_rate_attr, t0_attr):
    h5py = _import_h5py()
    where = str(path)
    try:
        h5file = h5py.File(path, "r")
    except OSError as exc:
        raise ValueError(f"{where}: cannot open as an HDF5 file ({exc})") from None
    with h5file:
        available = _hdf5_datasets(h5file)
        if dataset is None:
            raise ValueError(
                f"{where}: name the HDF5 dataset holding the strain (dataset=, --dataset); "
                f"the file holds {available or 'no datasets'}"
            )
        if not isinstance(dataset, str):
            raise TypeError(f"{where}: dataset must be a string, got {dataset!r}")
        obj = h5file.get(dataset)
        if obj is None or not isinstance(obj, h5py.Dataset):
            raise ValueError(
                f"{where}: no dataset named {dataset!r} (the file holds {available or 'no datasets'})"
            )
        where = f"{path}:{dataset}"
        data = obj[()]
        attrs = obj.attrs
        if sample_rate is None:
            if sample_rate_attr not in attrs:
                raise _missing_rate(
                    where,
                    f"the dataset has no attribute {sample_rate_attr!r} "
                    f"(attributes: {sorted(attrs.keys()) or 'none'}); pass sample_rate (--sample-rate) "
                    "or name the attribute with sample_rate_attr",
                )
            sample_rate = attrs[sample_rate_attr]
        if t0 is None:
            t0 = attrs[t0_attr] if t0_attr in attrs else 0.0
    return data, sample_rate, t0, where


def _read_text(path: Path, sample_rate, t0):
    where = str(path)
    delimiter = "," if path.suffix.lower() == ".csv" else None
    try:
        table = np.loadtxt(path, delimiter=delimiter, comments="#", ndmin=2, dtype=np.float64)
    except ValueError as exc:
        raise ValueError(f"{where}: cannot parse as numeric text columns ({exc})") from None
    if table.size == 0:
        raise ValueError(f"{where}: strain is empty (0 samples)")
    ncol = table.shape[1]
    if ncol == 1:
        if sample_rate is None:
            raise _missing_rate(
                where, "a one-column text file holds strain only, so pass sample_rate (--sample-rate)"
            )
        return table[:, 0], sample_rate, (0.0 if t0 is None else t0), where
    if ncol != 2:
        raise ValueError(
            f"{where}: expected 1 column (strain) or 2 columns (time, strain), got {ncol} columns"
        )
    times, data = table[:, 0], table[:, 1]
    if times.size < 2:
        raise ValueError(f"{where}: a two-column file needs at least 2 rows to derive the sample rate")
    if not np.all(np.isfinite(times)):
        bad = int(np.flatnonzero(~np.isfinite(times))[0])
        raise ValueError(f"{where}: time column is not finite at row {bad} ({float(times[bad])!r})")
    dt = float((times[-1] - times[0]) / (times.size - 1))
    if not dt > 0:
        raise ValueError(f"{where}: time column does not increase (first {float(times[0])!r}, last {float(times[-1])!r})")
    steps = np.diff(times)
    dev = np.abs(steps - dt)
    worst = int(np.argmax(dev))
    if dev[worst] > TIME_SPACING_RTOL * dt:
        raise ValueError(
            f"{where}: time column is not uniformly spaced: step {worst} -> {worst + 1} is "
            f"{float(steps[worst])!r} s against a mean step of {dt!r} s (relative tolerance {TIME_SPACING_RTOL:g})"
        )
    derived = 1.0 / dt
    if sample_rate is not None:
        given = _check_sample_rate(sample_rate, where)
        if abs(given - derived) > TIME_SPACING_RTOL * derived:
            raise ValueError(
                f"{where}: sample_rate={given!r} Hz disagrees with the time column ({derived!r} Hz)"
            )
    if t0 is not None:
        given_t0 = _check_t0(t0, where)
        if abs(given_t0 - times[0]) > 0.5 * dt:
            raise ValueError(
                f"{where}: t0={given_t0!r} s disagrees with the first time in the file ({float(times[0])!r} s)"
            )
    return data, derived, float(times[0]), where


def read_strain(
    path,
    *,
    dataset: str | None = None,
    sample_rate: float | None = None,
    t0: float | None = None,
    sample_rate_attr: str = "sample_rate",
    t0_attr: str = "t0",
) -> StrainSeries:
    """Read a uniformly sampled strain series from a file.

    Parameters
    ----------
    path : str or os.PathLike
        File to read; the format follows the extension (case-insensitive):

        ``.npy``
            A 1-D array. ``sample_rate`` is required; ``t0`` defaults to 0.
        ``.npz``
            Array ``strain`` (1-D) and optional single-number arrays ``sample_rate`` (Hz)
            and ``t0`` (s). Explicit arguments override the stored values.
        ``.h5``, ``.hdf5``
            The 1-D dataset named by ``dataset``. The sample rate and start time come from
            the arguments or else from the dataset's attributes named by
            ``sample_rate_attr`` and ``t0_attr`` (``t0`` defaults to 0 if absent).
            Needs the optional ``h5py`` package (``pip install chirpsift[hdf5]``).
        ``.txt``, ``.dat``, ``.csv``
            Numeric columns (whitespace separated; comma separated for ``.csv``; lines
            starting with ``#`` are ignored). One column: strain, ``sample_rate``
            required. Two columns: time (s), strain; the sample rate is derived from the
            time column, which must be uniform to a relative 1e-6, and ``t0`` is the first
            time. A ``sample_rate`` or ``t0`` given for a two-column file must agree with
            the column.
    dataset : str, optional
        HDF5 dataset path inside the file (HDF5 only).
    sample_rate : float, optional
        Sampling rate in Hz.
    t0 : float, optional
        Time of the first sample in seconds.
    sample_rate_attr, t0_attr : str
        HDF5 attribute names holding the sample rate (Hz) and the start time (s).

    Returns
    -------
    StrainSeries
        Float64 samples, sample rate, start time and the source description.

    Raises
    ------
    FileNotFoundError
        If ``path`` does not exist.
    ValueError
        For an unknown extension, a missing dataset or sample rate, a non-positive or
        non-finite sample rate, non-1-D or empty data, or a non-uniform time column; the
        message names the file.
    TypeError
        For non-numeric or complex data, or non-numeric ``sample_rate``/``t0``.
    ImportError
        For HDF5 input without ``h5py`` installed.

    Notes
    -----
    Non-finite samples (NaN, inf) are kept: the search analyses the finite stretches
    between them and reports the excluded spans (see
    :func:`chirpsift.condition.find_nonfinite_runs`).

    Examples
    --------
    >>> import numpy as np, tempfile, os
    >>> from chirpsift.io import read_strain
    >>> d = tempfile.mkdtemp()
    >>> p = os.path.join(d, "site_a.npz")
    >>> np.savez(p, strain=np.zeros(1024), sample_rate=1024.0, t0=100.0)
    >>> s = read_strain(p)
    >>> s.sample_rate, s.t0, s.duration
    (1024.0, 100.0, 1.0)
    """
    path = Path(os.fspath(path))
    if not path.exists():
        raise FileNotFoundError(f"strain file not found: {path}")
    if path.is_dir():
        raise ValueError(f"{path}: is a directory, not a strain file")
    ext = path.suffix.lower()
    if sample_rate is not None:
        sample_rate = _check_sample_rate(sample_rate, str(path))
    if t0 is not None:
        t0 = _check_t0(t0, str(path))
    if dataset is not None and ext not in _HDF5_EXT:
        raise ValueError(f"{path}: dataset={dataset!r} applies to HDF5 files only (extension {ext!r})")

    if ext in _NUMPY_EXT:
        data, fs, start, where = _read_npy(path, sample_rate, t0)
    elif ext in _NPZ_EXT:
        data, fs, start, where = _read_npz(path, sample_rate, t0)
    elif ext in _HDF5_EXT:
        data, fs, start, where = _read_hdf5(path, dataset, sample_rate, t0, sample_rate_attr, t0_attr)
    elif ext in _TEXT_EXT:
        data, fs, start, where = _read_text(path, sample_rate, t0)
    else:
        raise ValueError(
            f"{path}: unknown strain file extension {ext or '(none)'!r}; supported: {', '.join(_SUPPORTED)}"
        )
    data = _check_data(data, where)
    fs = _check_sample_rate(fs, where)
    start = _check_t0(start, where)
    return StrainSeries(data=data, sample_rate=fs, t0=start, source=where)


# ---------------------------------------------------------------------------
# atomic writing
# ---------------------------------------------------------------------------
def _new_file_mode(final: Path) -> int:
    """Permissions for a new file: those of the file it replaces, else 0o666 less the umask."""
    try:
        return final.stat().st_mode & 0o7777
    except OSError:
        mask = os.umask(0)
        os.umask(mask)
        return 0o666 & ~mask


@contextlib.contextmanager
def _atomic_target(path):
    """Yield a temporary path beside ``path``; rename it onto ``path`` on success."""
    final = Path(os.fspath(path))
    folder = final.parent if str(final.parent) else Path(".")
    if not folder.is_dir():
        raise FileNotFoundError(f"output folder does not exist: {folder} (for {final})")
    fd, tmp = tempfile.mkstemp(prefix=f".{final.name}.", suffix=".partial", dir=folder)
    os.close(fd)
    try:
        yield tmp
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.chmod(tmp, _new_file_mode(final))
        os.replace(tmp, final)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def _json_default(obj):
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, os.PathLike):
        return os.fspath(obj)
    if isinstance(obj, (set, frozenset)):
        return sorted(obj)
    raise TypeError(f"cannot store an object of type {type(obj).__name__} in JSON: {obj!r}")


def _sanitize(obj):
    """Replace non-finite floats by None (JSON has no NaN/inf) and numpy values by Python ones."""
    if isinstance(obj, (float, np.floating)):
        value = float(obj)
        return value if math.isfinite(value) else None
    if isinstance(obj, np.ndarray):
        return _sanitize(obj.tolist())
    if isinstance(obj, np.generic):
        return _sanitize(obj.item())
    if isinstance(obj, Mapping):
        return {str(k): _sanitize(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_sanitize(v) for v in obj]
    return obj


def _to_json(obj, **kwargs) -> str:
    return json.dumps(_sanitize(obj), default=_json_default, allow_nan=False, **kwargs)


def write_json_atomic(path, obj) -> None:
    """Write ``obj`` as JSON to ``path`` atomically.

    Parameters
    ----------
    path : str or os.PathLike
        Destination file; its folder must exist.
    obj : object
        JSON-serialisable data; numpy scalars and arrays, paths and sets are converted,
        and non-finite floats (NaN, inf) are written as ``null`` because JSON has no
        representation for them.

    Notes
    -----
    The document is written to a temporary file in the destination folder, flushed to
    disk and renamed over ``path``, so readers see either the old file or the complete new
    one, never a partial write.
    """
    text = _to_json(obj, indent=2) + "\n"
    with _atomic_target(path) as tmp:
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(text)


# ---------------------------------------------------------------------------
# Parquet triggers
# ---------------------------------------------------------------------------
def _import_pyarrow():
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq
    except ImportError as exc:  # pragma: no cover - pyarrow is a hard dependency
        raise ImportError("reading and writing Parquet files needs pyarrow: pip install pyarrow") from exc
    return pa, pq


def _columns_of(triggers) -> dict[str, np.ndarray]:
    if isinstance(triggers, np.ndarray) and triggers.dtype.names is not None:
        if triggers.ndim != 1:
            raise ValueError(f"triggers must be a 1-D structured array, got shape {triggers.shape}")
        cols = {}
        for name in triggers.dtype.names:
            if triggers.dtype[name].shape:
                raise ValueError(
                    f"triggers field {name!r} is a sub-array of shape {triggers.dtype[name].shape}; "
                    "only scalar fields can be stored as columns"
                )
            cols[name] = np.ascontiguousarray(triggers[name])
        return cols
    if isinstance(triggers, Mapping):
        cols = {str(k): np.asarray(v) for k, v in triggers.items()}
        lengths = {k: v.shape for k, v in cols.items()}
        if any(len(s) != 1 for s in lengths.values()) or len({s for s in lengths.values()}) > 1:
            raise ValueError(f"triggers columns must be 1-D and of equal length, got shapes {lengths}")
        return cols
    raise TypeError(
        f"triggers must be a numpy structured array or a mapping of 1-D arrays, got {type(triggers).__name__}"
    )


def write_triggers(path, triggers, metadata: Mapping | None = None) -> None:
    """Write a trigger table to a Parquet file, atomically.

    Parameters
    ----------
    path : str or os.PathLike
        Destination ``.parquet`` file; its folder must exist.
    triggers : numpy.ndarray or Mapping
        1-D structured array with scalar fields (one Parquet column per field, in field
        order, keeping the numpy dtype), or a mapping of equal-length 1-D arrays.
    metadata : Mapping, optional
        JSON-serialisable run description stored in the schema metadata under the key
        ``"chirpsift"`` (see :func:`write_json_atomic` for the conversions).

    Notes
    -----
    The table is written to a temporary file beside ``path`` and renamed into place only
    once it is complete, so a failed run never leaves a file that looks finished.
    """
    pa, pq = _import_pyarrow()
    cols = _columns_of(triggers)
    meta_json = _to_json({} if metadata is None else dict(metadata))
    arrays = []
    for name, values in cols.items():
        if values.dtype.kind == "U":
            arrays.append(pa.array(values.tolist(), type=pa.string()))
        elif values.dtype.kind == "S":
            arrays.append(pa.array(values.tolist(), type=pa.binary()))
        elif values.dtype.kind == "O":
            raise TypeError(f"triggers column {name!r} has object dtype; use numeric or fixed-width string fields")
        else:
            arrays.append(pa.array(values))
    table = pa.Table.from_arrays(arrays, names=list(cols))
    table = table.replace_schema_metadata({METADATA_KEY: meta_json})
    with _atomic_target(path) as tmp:
        pq.write_table(table, tmp)


def read_triggers(path):
    """Read a trigger table written by :func:`write_triggers`.

    Parameters
    ----------
    path : str or os.PathLike
        Parquet file.

    Returns
    -------
    triggers : numpy.ndarray
        1-D structured array, one field per column (string columns become fixed-width
        unicode fields).
    metadata : dict
        The JSON document stored under the schema metadata key ``"chirpsift"``; empty if
        the file has none.
    """
    pa, pq = _import_pyarrow()
    path = Path(os.fspath(path))
    if not path.exists():
        raise FileNotFoundError(f"trigger file not found: {path}")
    try:
        table = pq.read_table(path)
    except (pa.ArrowInvalid, OSError) as exc:
        raise ValueError(f"{path}: cannot read as a Parquet file ({exc})") from None
    raw = (table.schema.metadata or {}).get(METADATA_KEY.encode())
    metadata = json.loads(raw.decode("utf-8")) if raw is not None else {}
    fields = []
    values = []
    for name, column in zip(table.column_names, table.columns):
        if column.null_count:
            raise ValueError(f"{path}: column {name!r} has {column.null_count} missing values")
        if pa.types.is_string(column.type) or pa.types.is_large_string(column.type):
            items = column.to_pylist()
            width = max((len(s) for s in items), default=1) or 1
            arr = np.array(items, dtype=f"U{width}")
        elif pa.types.is_binary(column.type) or pa.types.is_large_binary(column.type):
            items = column.to_pylist()
            width = max((len(s) for s in items), default=1) or 1
            arr = np.array(items, dtype=f"S{width}")
        else:
            arr = column.to_numpy()
            if arr.dtype == object:
                raise ValueError(f"{path}: column {name!r} of type {column.type} has no numpy equivalent")
        fields.append((name, arr.dtype))
        values.append(arr)
    out = np.empty(table.num_rows, dtype=fields)
    for (name, _), arr in zip(fields, values):
        out[name] = arr
    return out, metadata
