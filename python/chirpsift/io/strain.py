"""Strain files: NumPy, HDF5 and text formats read into a :class:`StrainSeries`.

Each format has one reader that reports the samples and what the file itself says about
the sample rate and the start time; :func:`read_strain` then settles those against the
values the caller gave, by one rule for every format:

- a value the file holds and the caller also gives must agree (within
  :data:`TIME_STEP_TOLERANCE` of a sampling step; see :func:`read_strain`), otherwise
  the read fails naming both values;
- a value a format can hold (``.npz`` arrays, HDF5 attributes, a time column) but the
  file lacks must be given, otherwise the read fails naming the argument and the
  command-line flag that supply it, and the one that names where the file keeps it;
- ``.npy`` and one-column text hold no metadata at all: the sample rate must be given,
  and the start time counts from 0 unless given.

A damaged or malformed file always raises ``ValueError`` with a one-line message that
names the file (:mod:`chirpsift.io.readers`).

Units: seconds, Hz; strain is dimensionless.
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .._validate import positive_scalar, real_scalar
from .metadata import (TIME_STEP_TOLERANCE, import_h5py, metadata_name, settle_sample_rate, settle_t0,
                       stored_number)
from .readers import load_npy, load_npz, one_line

__all__ = ["StrainSeries", "read_strain", "TIME_STEP_TOLERANCE", "STRAIN_EXTENSIONS"]


_NUMPY_EXT = (".npy",)
_NPZ_EXT = (".npz",)
_HDF5_EXT = (".h5", ".hdf5")
_TEXT_EXT = (".txt", ".dat", ".csv")
#: File extensions :func:`read_strain` understands (case-insensitive).
STRAIN_EXTENSIONS = _NUMPY_EXT + _NPZ_EXT + _HDF5_EXT + _TEXT_EXT

_DEFAULT_RATE_NAME = "sample_rate"
_DEFAULT_T0_NAME = "t0"


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

    def __len__(self) -> int:
        return int(self.data.size)

    def __repr__(self) -> str:
        return (
            f"StrainSeries(n={self.data.size}, sample_rate={self.sample_rate!r}, "
            f"t0={self.t0!r}, source={self.source!r})"
        )


@dataclass(frozen=True)
class _InFile:
    """What one file says: its samples and, where the format holds them, rate and start."""

    data: object
    where: str
    sample_rate: float | None
    t0: float | None
    rate_origin: str  # where the file keeps the rate, for messages ("array 'sample_rate'")
    t0_origin: str
    rate_missing: str  # how to supply a rate the file lacks
    t0_missing: str | None  # how to supply a start time the file lacks; None: it counts from 0


# ---------------------------------------------------------------------------
# values read from files
# ---------------------------------------------------------------------------
def _check_samples(data, where: str) -> np.ndarray:
    """Return a file's strain samples as a fresh float64 1-D array, or raise ValueError naming the file."""
    arr = np.asarray(data)
    if arr.dtype.kind == "c":
        raise ValueError(f"{where}: strain must be real, got complex dtype {arr.dtype}")
    if arr.dtype.kind not in "biuf":
        raise ValueError(f"{where}: strain must be numeric, got dtype {arr.dtype}")
    if arr.ndim != 1:
        raise ValueError(f"{where}: strain must be 1-D, got an array of shape {arr.shape}")
    if arr.size == 0:
        raise ValueError(f"{where}: strain is empty (0 samples)")
    return np.array(arr, dtype=np.float64, order="C", copy=True)


# ---------------------------------------------------------------------------
# one reader per format
# ---------------------------------------------------------------------------
def _read_npy(path: Path, rate_name: str, t0_name: str) -> _InFile:
    return _InFile(
        data=load_npy(path, what="strain array"),
        where=str(path),
        sample_rate=None,
        t0=None,
        rate_origin="",
        t0_origin="",
        rate_missing="a .npy file stores only samples, so pass sample_rate (--sample-rate)",
        t0_missing=None,
    )


def _supply(argument: str, flag: str, name_argument: str, name_flag: str, holder: str) -> str:
    return f"pass {argument} ({flag}) or name the {holder} holding it with {name_argument} ({name_flag})"


def _read_npz(path: Path, rate_name: str, t0_name: str) -> _InFile:
    where = str(path)
    members, arrays = load_npz(path, ["strain", rate_name, t0_name], what="strain archive")
    if "strain" not in arrays:
        raise ValueError(f"{where}: no array named 'strain' in the archive (it holds {members or 'nothing'})")
    rate_origin, t0_origin = f"array {rate_name!r}", f"array {t0_name!r}"
    return _InFile(
        data=arrays["strain"],
        where=where,
        sample_rate=stored_number(arrays[rate_name], rate_origin, where) if rate_name in arrays else None,
        t0=stored_number(arrays[t0_name], t0_origin, where) if t0_name in arrays else None,
        rate_origin=rate_origin,
        t0_origin=t0_origin,
        rate_missing=f"the archive has no array {rate_name!r} (it holds {members}); "
        + _supply("sample_rate", "--sample-rate", "sample_rate_attr", "--sample-rate-attr", "array"),
        t0_missing=f"the archive has no array {t0_name!r} (it holds {members}); "
        + _supply("t0", "--t0", "t0_attr", "--t0-attr", "array"),
    )


def _hdf5_datasets(h5file) -> list[str]:
    names: list[str] = []

    def visit(name, obj):
        if hasattr(obj, "shape") and hasattr(obj, "dtype"):
            names.append(name)

    h5file.visititems(visit)
    return names


def _read_hdf5(path: Path, dataset, rate_name: str, t0_name: str) -> _InFile:
    h5py = import_h5py()
    where = str(path)
    if dataset is not None and not isinstance(dataset, str):
        raise TypeError(f"{where}: dataset must be a string, got {dataset!r}")
    try:
        h5file = h5py.File(path, "r")
    except (FileNotFoundError, PermissionError, IsADirectoryError):
        raise
    except Exception as exc:  # not HDF5, truncated superblock, ...
        raise ValueError(f"{where}: cannot open as an HDF5 file: {one_line(exc)}") from None
    with h5file:
        try:
            available = _hdf5_datasets(h5file)
            if dataset is None:
                raise ValueError(
                    f"{where}: name the HDF5 dataset holding the strain (dataset=, --dataset); "
                    f"the file holds {available or 'no datasets'}"
                )
            obj = h5file.get(dataset)
            if obj is None or not isinstance(obj, h5py.Dataset):
                raise ValueError(
                    f"{where}: no dataset named {dataset!r} (the file holds {available or 'no datasets'})"
                )
            where = f"{path}:{dataset}"
            data = obj[()]
            attrs = dict(obj.attrs)
        except ValueError:
            raise
        except Exception as exc:  # damaged object headers or data chunks
            raise ValueError(f"{where}: cannot read the HDF5 file: {one_line(exc)}") from None
    rate_origin, t0_origin = f"attribute {rate_name!r}", f"attribute {t0_name!r}"
    listed = sorted(attrs) or "none"
    return _InFile(
        data=data,
        where=where,
        sample_rate=stored_number(attrs[rate_name], rate_origin, where) if rate_name in attrs else None,
        t0=stored_number(attrs[t0_name], t0_origin, where) if t0_name in attrs else None,
        rate_origin=rate_origin,
        t0_origin=t0_origin,
        rate_missing=f"the dataset has no attribute {rate_name!r} (attributes: {listed}); "
        + _supply("sample_rate", "--sample-rate", "sample_rate_attr", "--sample-rate-attr", "attribute"),
        t0_missing=f"the dataset has no attribute {t0_name!r} (attributes: {listed}); "
        + _supply("t0", "--t0", "t0_attr", "--t0-attr", "attribute"),
    )


def _load_text(path: Path) -> np.ndarray:
    delimiter = "," if path.suffix.lower() == ".csv" else None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # "input contained no data": reported below
        try:
            return np.loadtxt(path, delimiter=delimiter, comments="#", ndmin=2, dtype=np.float64)
        except Exception as exc:  # ragged rows, words, undecodable bytes
            raise ValueError(f"{path}: cannot parse as numeric text columns: {one_line(exc)}") from None


def _uniform_times(times: np.ndarray, where: str) -> tuple[float, float]:
    """Sample rate and start time of a time column, checked to be uniform within tolerance."""
    if times.size < 2:
        raise ValueError(f"{where}: a two-column file needs at least 2 rows to derive the sample rate")
    if not np.all(np.isfinite(times)):
        bad = int(np.flatnonzero(~np.isfinite(times))[0])
        raise ValueError(f"{where}: time column is not finite at data row {bad} ({float(times[bad])!r})")
    steps = np.diff(times)
    median = float(np.median(steps))
    if not median > 0:
        raise ValueError(f"{where}: time column does not increase (median step {median!r} s)")
    deviation = np.abs(steps - median) / median
    worst = int(np.argmax(deviation))
    if deviation[worst] > TIME_STEP_TOLERANCE:
        raise ValueError(
            f"{where}: time column is not uniformly spaced: the step between data rows {worst} and "
            f"{worst + 1} is {float(steps[worst])!r} s, {float(deviation[worst]):.3g} of the median step "
            f"{median!r} s away from it (tolerance {TIME_STEP_TOLERANCE:g} of a step)"
        )
    dt = float((times[-1] - times[0]) / (times.size - 1))
    drift = (times - times[0]) / dt - np.arange(times.size)
    worst = int(np.argmax(np.abs(drift)))
    if abs(drift[worst]) > TIME_STEP_TOLERANCE:
        raise ValueError(
            f"{where}: time column drifts: data row {worst} is at {float(times[worst])!r} s, "
            f"{float(drift[worst]):+.3g} of a step from where uniform sampling between the first and last rows "
            f"puts it (tolerance {TIME_STEP_TOLERANCE:g} of a step)"
        )
    return 1.0 / dt, float(times[0])


def _read_text(path: Path, rate_name: str, t0_name: str) -> _InFile:
    where = str(path)
    table = _load_text(path)
    if table.size == 0:
        raise ValueError(f"{where}: strain is empty (0 samples)")
    ncol = table.shape[1]
    if ncol == 1:
        return _InFile(
            data=table[:, 0],
            where=where,
            sample_rate=None,
            t0=None,
            rate_origin="",
            t0_origin="",
            rate_missing="a one-column text file holds strain only, so pass sample_rate (--sample-rate)",
            t0_missing=None,
        )
    if ncol != 2:
        raise ValueError(f"{where}: expected 1 column (strain) or 2 columns (time, strain), got {ncol} columns")
    rate, start = _uniform_times(table[:, 0], where)
    return _InFile(
        data=table[:, 1],
        where=where,
        sample_rate=rate,
        t0=start,
        rate_origin="time column",
        t0_origin="time column (first row)",
        rate_missing="",
        t0_missing="",
    )


# ---------------------------------------------------------------------------
# settling the file's values against the caller's
# ---------------------------------------------------------------------------
def read_strain(
    path,
    *,
    dataset: str | None = None,
    sample_rate: float | None = None,
    t0: float | None = None,
    sample_rate_attr: str = _DEFAULT_RATE_NAME,
    t0_attr: str = _DEFAULT_T0_NAME,
) -> StrainSeries:
    """Read a uniformly sampled strain series from a file.

    Parameters
    ----------
    path : str or os.PathLike
        File to read; the format follows the extension (case-insensitive):

        ``.npy``
            A 1-D array. ``sample_rate`` is required; ``t0`` defaults to 0 (the format
            holds no start time).
        ``.npz``
            Array ``strain`` (1-D) and single-number arrays named by ``sample_rate_attr``
            (Hz) and ``t0_attr`` (s); each is required unless given as an argument.
        ``.h5``, ``.hdf5``
            The 1-D dataset named by ``dataset``, with the sample rate (Hz) and start time
            (s) in the dataset's attributes named by ``sample_rate_attr`` and ``t0_attr``;
            each is required unless given as an argument. Needs the optional ``h5py``
            package (``pip install chirpsift[hdf5]``).
        ``.txt``, ``.dat``, ``.csv``
            Numeric columns (whitespace separated; comma separated for ``.csv``; lines
            starting with ``#`` are ignored). One column: strain; ``sample_rate`` is
            required and ``t0`` defaults to 0. Two columns: time (s), strain; the sample
            rate is derived from the time column and ``t0`` is its first time.
    dataset : str, optional
        HDF5 dataset path inside the file (HDF5 only; ``--dataset``).
    sample_rate : float, optional
        Sampling rate in Hz (``--sample-rate``). Required where the file holds none; where
        it holds one, the two must agree.
    t0 : float, optional
        Time of the first sample in seconds (``--t0``). Required where the file could
        hold one but does not; where it holds one, the two must agree.
    sample_rate_attr, t0_attr : str
        Name of the ``.npz`` array or HDF5 dataset attribute holding the sample rate (Hz)
        and the start time (s) (``--sample-rate-attr``, ``--t0-attr``). Other formats
        hold no such names and refuse anything but the defaults.

    Returns
    -------
    StrainSeries
        Float64 samples, sample rate, start time and the source description.

    Raises
    ------
    FileNotFoundError
        If ``path`` does not exist.
    ValueError
        For anything wrong with the file: an unknown extension, an empty, truncated or
        damaged file, a missing dataset or array, missing metadata not given as an
        argument, metadata that conflicts with the argument given, a non-positive or
        non-finite stored sample rate, data that is not 1-D real numbers or is empty, or
        a non-uniform time column. The one-line message names the file.
    TypeError
        For arguments of the wrong type (non-numeric ``sample_rate`` or ``t0``, a
        non-string ``dataset`` or attribute name).
    ImportError
        For HDF5 input without ``h5py`` installed.

    Notes
    -----
    One tolerance, :data:`TIME_STEP_TOLERANCE` (0.1 of a sampling step), decides whether
    two statements about time agree:

    - a time column is uniform when every step is within 0.1 of the median step (this
      names the worst step, such as a missing or repeated row, which is off by 100%) and
      every time is within 0.1 step of where uniform sampling between the first and last
      rows puts it (this catches slow drift). The rate comes from the first and last
      times, which averages rounding away. Times written with microsecond resolution are
      off by at most 0.5 us each, so their steps and their distances from the uniform
      grid are off by at most 1 us: they pass up to 65,536 Hz (1 us is 6.6% of a
      15.3 us step). Treating the samples as uniform then misplaces none by more than
      0.1 step; at a quarter of the sample rate that is a phase error of at most 0.16 rad
      (cos 0.16 = 0.988, so about 1% of the SNR where every sample is off by that much);
    - a ``sample_rate`` argument agrees with the file's when the two place the last
      sample within 0.1 step of each other, and a ``t0`` argument agrees when it is within
      0.1 step of the file's start time. Agreeing values are accepted and the argument's
      value is used (it is exact, while a time column is rounded); conflicting values
      raise, naming both.

    Non-finite samples (NaN, inf) are kept: the search analyses the finite stretches
    between them and reports the excluded spans (see
    :func:`chirpsift.condition.find_nonfinite_runs`).

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift.io import read_strain
    >>> np.savez("site_a.npz", strain=np.zeros(1024), sample_rate=1024.0, t0=100.0)
    >>> s = read_strain("site_a.npz")
    >>> s.sample_rate, s.t0, s.duration
    (1024.0, 100.0, 1.0)
    >>> read_strain("site_a.npz", sample_rate=2048.0)
    Traceback (most recent call last):
    ...
    ValueError: site_a.npz: sample_rate=2048.0 Hz (the sample_rate argument, --sample-rate) conflicts with 1024.0 Hz from the file's array 'sample_rate'; leave it out to use the file's value
    """  # noqa: E501 (the doctest's expected message is one line)
    path = Path(os.fspath(path))
    if not path.exists():
        raise FileNotFoundError(f"strain file not found: {path}")
    if path.is_dir():
        raise ValueError(f"{path}: is a directory, not a strain file")
    ext = path.suffix.lower()
    if sample_rate is not None:
        sample_rate = positive_scalar("sample_rate", sample_rate, where=str(path))
    if t0 is not None:
        t0 = real_scalar("t0", t0, where=str(path))
    rate_name = metadata_name("sample_rate_attr", sample_rate_attr)
    t0_name = metadata_name("t0_attr", t0_attr)
    if dataset is not None and ext not in _HDF5_EXT:
        raise ValueError(f"{path}: dataset={dataset!r} applies to HDF5 files only (extension {ext!r})")
    if ext in _NUMPY_EXT + _TEXT_EXT:
        for arg, value, default in (("sample_rate_attr", rate_name, _DEFAULT_RATE_NAME), ("t0_attr", t0_name,
                                                                                             _DEFAULT_T0_NAME)):
            if value != default:
                raise ValueError(f"{path}: {arg}={value!r} applies to .npz and HDF5 files only (extension {ext!r})")

    if ext in _NUMPY_EXT:
        found = _read_npy(path, rate_name, t0_name)
    elif ext in _NPZ_EXT:
        found = _read_npz(path, rate_name, t0_name)
    elif ext in _HDF5_EXT:
        found = _read_hdf5(path, dataset, rate_name, t0_name)
    elif ext in _TEXT_EXT:
        found = _read_text(path, rate_name, t0_name)
    else:
        raise ValueError(
            f"{path}: unknown strain file extension {ext or '(none)'!r}; supported: {', '.join(STRAIN_EXTENSIONS)}"
        )
    data = _check_samples(found.data, found.where)
    rate = settle_sample_rate(found.sample_rate, sample_rate, data.size, where=found.where,
                              origin=found.rate_origin, missing=found.rate_missing)
    start = settle_t0(found.t0, t0, rate, where=found.where, origin=found.t0_origin, missing=found.t0_missing)
    return StrainSeries(data=data, sample_rate=rate, t0=start, source=found.where)
