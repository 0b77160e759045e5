"""Strain catalogues: one site's strain files placed on one time line, read block by block.

A :class:`Catalogue` is built from the files' headers alone (HDF5 dataset shapes and
attributes, ``.npy`` headers, the ``strain`` member header of a ``.npz`` archive), so
listing months of data costs no memory; samples are read later, a block at a time,
by :meth:`Span.read`.

The rules that place files on the time line, in samples of the common sample rate:

- files are ordered by start time, whatever order they are listed in;
- a file *abuts* the one before it when it starts within
  :data:`~chirpsift.io.metadata.TIME_STEP_TOLERANCE` (a tenth) of a sample of where that
  one ends, the rule by which :func:`~chirpsift.io.read_strain` settles a file's times
  against the caller's; abutting files form one :class:`Span`, sampled on the grid of
  its first file;
- a later start is a gap (the next span begins), an earlier one an overlap, which is
  an error naming both files; so are sample rates that differ.

Units: seconds, Hz; strain is dimensionless.
"""

from __future__ import annotations

import bisect
import glob
import math
import os
import struct
import zipfile
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .._validate import positive_scalar, real_scalar
from .readers import one_line
from .metadata import (TIME_STEP_TOLERANCE, import_h5py, metadata_name, settle_sample_rate, settle_t0,
                       stored_number)

__all__ = ["Catalogue", "Span", "StrainFile", "read_catalogue", "CATALOGUE_EXTENSIONS"]

#: Extensions a catalogue reads block by block (case-insensitive).
CATALOGUE_EXTENSIONS = (".npy", ".npz", ".h5", ".hdf5")

_TEXT_EXT = (".txt", ".dat", ".csv")
_GLOB_CHARS = "*?["
_LOCAL_HEADER = struct.Struct("<IHHHHHIIIHH")  # zip local file header (30 bytes)
_LOCAL_SIGNATURE = 0x04034B50


@dataclass(frozen=True)
class _Layout:
    """How a file's samples are reached: raw bytes, a compressed zip member, or HDF5."""

    kind: str  # "raw", "zip" or "hdf5"
    dtype: np.dtype
    offset: int = 0  # raw: byte offset of sample 0; zip: bytes of .npy header in the member
    name: str = ""  # zip member or HDF5 dataset


@dataclass(frozen=True)
class StrainFile:
    """One strain file of a catalogue, known by its header.

    Attributes
    ----------
    path : pathlib.Path
        The file.
    where : str
        How messages name it (the path, with ``:dataset`` for HDF5).
    t0 : float
        Time of its first sample (s).
    n : int
        Number of samples.
    sample_rate : float
        Hz.
    """

    path: Path
    where: str
    t0: float
    n: int
    sample_rate: float
    layout: _Layout

    @property
    def duration(self) -> float:
        """Length in seconds, ``n / sample_rate``."""
        return self.n / self.sample_rate

    @property
    def end(self) -> float:
        """Time just after its last sample (s)."""
        return self.t0 + self.n / self.sample_rate

    def read(self, start: int, stop: int) -> np.ndarray:
        """Read samples ``[start, stop)`` of the file as float64.

        Parameters
        ----------
        start, stop : int
            Sample indices, ``0 <= start <= stop <= n``.

        Returns
        -------
        ndarray of float64, shape (stop - start,)

        Raises
        ------
        ValueError
            If the file is shorter than its header said or cannot be read; the message
            names the file.
        """
        if not 0 <= start <= stop <= self.n:
            raise ValueError(f"{self.where}: samples [{start}, {stop}) are outside the file's {self.n}")
        count = stop - start
        lay = self.layout
        try:
            if lay.kind == "raw":
                with open(self.path, "rb") as fh:
                    fh.seek(lay.offset + start * lay.dtype.itemsize)
                    raw = np.fromfile(fh, dtype=lay.dtype, count=count)
            elif lay.kind == "zip":
                with zipfile.ZipFile(self.path) as archive, archive.open(lay.name) as member:
                    member.seek(lay.offset + start * lay.dtype.itemsize)  # decompresses up to there
                    raw = np.frombuffer(member.read(count * lay.dtype.itemsize), dtype=lay.dtype)
            else:
                h5py = import_h5py()
                with h5py.File(self.path, "r") as h5file:
                    raw = h5file[lay.name][start:stop]
        except (FileNotFoundError, PermissionError):
            raise
        except Exception as exc:  # damaged data the header did not reveal
            raise ValueError(f"{self.where}: cannot read samples [{start}, {stop}): {one_line(exc)}") from None
        if raw.shape != (count,):
            raise ValueError(f"{self.where}: file ends before sample {stop} (its header promised {self.n})")
        return np.asarray(raw, dtype=np.float64)


@dataclass(frozen=True)
class Span:
    """Abutting files read as one uniformly sampled series.

    Sample ``k`` of the span is at time ``t0 + k / sample_rate``, on the grid of its
    first file; each later file starts within
    :data:`~chirpsift.io.metadata.TIME_STEP_TOLERANCE` of a sample of its place on that grid.

    Attributes
    ----------
    t0 : float
        Time of the first sample (s).
    sample_rate : float
        Hz.
    files : tuple of StrainFile
        In time order.
    offsets : tuple of int
        Index of each file's first sample in the span.
    n : int
        Number of samples.
    """

    t0: float
    sample_rate: float
    files: tuple[StrainFile, ...]
    offsets: tuple[int, ...]
    n: int

    @property
    def duration(self) -> float:
        """Length in seconds, ``n / sample_rate``."""
        return self.n / self.sample_rate

    @property
    def end(self) -> float:
        """Time just after the last sample (s)."""
        return self.t0 + self.n / self.sample_rate

    def file_at(self, index: int) -> StrainFile:
        """Return the file holding sample ``index`` of the span."""
        return self.files[bisect.bisect_right(self.offsets, index) - 1]

    def read(self, start: int, stop: int) -> np.ndarray:
        """Read samples ``[start, stop)`` of the span, from as many files as they cover.

        Parameters
        ----------
        start, stop : int
            Sample indices, ``0 <= start <= stop <= n``.

        Returns
        -------
        ndarray of float64, shape (stop - start,)
        """
        if not 0 <= start <= stop <= self.n:
            raise ValueError(f"samples [{start}, {stop}) are outside the span's {self.n}")
        parts = []
        i = max(bisect.bisect_right(self.offsets, start) - 1, 0)
        while start < stop:
            first, f = self.offsets[i], self.files[i]
            upto = min(stop, first + f.n)
            parts.append(f.read(start - first, upto - first))
            start, i = upto, i + 1
        if len(parts) == 1:
            return parts[0]
        return np.concatenate(parts) if parts else np.zeros(0)

    def samples_within(self, intervals) -> list[tuple[int, int]]:
        """Sample intervals of the span whose times lie in the given time intervals.

        Sample ``k`` is inside ``[start, stop)`` when ``start <= t0 + k / sample_rate <
        stop``; an edge within a thousandth of a sample of a sample's time counts as on
        it, so rounding of large start times does not move an edge by a sample.

        Parameters
        ----------
        intervals : iterable of (float, float)
            Half-open time intervals (s), sorted and disjoint.

        Returns
        -------
        list of (int, int)
            Sorted, disjoint, non-empty half-open sample intervals within ``[0, n)``.
        """
        fs, out = self.sample_rate, []
        for start, stop in intervals:
            a = min(max(math.ceil((start - self.t0) * fs - 1e-3), 0), self.n)
            b = min(max(math.ceil((stop - self.t0) * fs - 1e-3), 0), self.n)
            if b > a:
                out.append((a, b))
        return out


@dataclass(frozen=True)
class Catalogue:
    """One site's strain files, ordered in time and grouped into contiguous spans.

    Build one with :func:`read_catalogue`; search it with
    :func:`chirpsift.pipeline.search_catalogue`.

    Attributes
    ----------
    files : tuple of StrainFile
        In time order.
    spans : tuple of Span
        Runs of abutting files, in time order; gaps lie between them.
    sample_rate : float
        Hz, common to every file.
    """

    files: tuple[StrainFile, ...]
    spans: tuple[Span, ...]
    sample_rate: float

    @property
    def start(self) -> float:
        """Time of the first sample (s)."""
        return self.spans[0].t0

    @property
    def end(self) -> float:
        """Time just after the last sample (s)."""
        return self.spans[-1].end

    @property
    def covered(self) -> float:
        """Seconds of data in the files (gaps excluded)."""
        return sum(s.n for s in self.spans) / self.sample_rate

    @property
    def gaps(self) -> list[tuple[float, float]]:
        """Time intervals (s) between spans, not covered by any file."""
        return [(a.end, b.t0) for a, b in zip(self.spans, self.spans[1:])]

    def __repr__(self) -> str:
        return (f"Catalogue({len(self.files)} files, {len(self.spans)} spans, {self.covered:g} s of data from "
                f"{self.start!r} to {self.end!r} s at {self.sample_rate:g} Hz)")


# ---------------------------------------------------------------------------
# headers, one reader per format
# ---------------------------------------------------------------------------
def _strain_dtype(dtype: np.dtype, shape, where: str) -> np.dtype:
    if dtype.kind == "c":
        raise ValueError(f"{where}: strain must be real, got complex dtype {dtype}")
    if dtype.kind not in "biuf" or dtype.fields is not None:
        raise ValueError(f"{where}: strain must be numeric, got dtype {dtype}")
    if len(shape) != 1:
        raise ValueError(f"{where}: strain must be 1-D, got an array of shape {tuple(shape)}")
    if shape[0] == 0:
        raise ValueError(f"{where}: strain is empty (0 samples)")
    return np.dtype(dtype)


def _npy_header(fh, where: str):
    """Shape and dtype from an open ``.npy`` stream, leaving it at the first sample."""
    version = np.lib.format.read_magic(fh)
    if version == (1, 0):
        shape, _, dtype = np.lib.format.read_array_header_1_0(fh)
    elif version == (2, 0):
        shape, _, dtype = np.lib.format.read_array_header_2_0(fh)
    else:
        raise ValueError(f"unsupported .npy format version {version[0]}.{version[1]}")
    return shape, dtype


def _header_npy(path: Path, where: str, rate_name, t0_name):
    with open(path, "rb") as fh:
        try:
            shape, dtype = _npy_header(fh, where)
        except Exception as exc:
            raise ValueError(f"{where}: cannot read as a .npy strain array: {one_line(exc)}") from None
        offset = fh.tell()
    dtype = _strain_dtype(dtype, shape, where)
    if os.path.getsize(path) < offset + shape[0] * dtype.itemsize:
        raise ValueError(f"{where}: file is shorter than the {shape[0]} samples its header promises")
    return shape[0], _Layout("raw", dtype, offset), None, None


def _header_npz(path: Path, where: str, rate_name, t0_name):
    try:
        with zipfile.ZipFile(path) as archive:
            members = {Path(m).stem: m for m in archive.namelist() if m.endswith(".npy")}
            if "strain" not in members:
                raise ValueError(f"no array named 'strain' in the archive (it holds {sorted(members) or 'nothing'})")
            info = archive.getinfo(members["strain"])
            with archive.open(info) as member:
                shape, dtype = _npy_header(member, where)
                header = member.tell()
            stored = {}
            for name in (rate_name, t0_name):
                if name in members:
                    with archive.open(members[name]) as member:
                        stored[name] = stored_number(np.load(member, allow_pickle=False), f"array {name!r}", where)
            if info.compress_type == zipfile.ZIP_STORED:
                with open(path, "rb") as fh:
                    fh.seek(info.header_offset)
                    fields = _LOCAL_HEADER.unpack(fh.read(_LOCAL_HEADER.size))
                if fields[0] != _LOCAL_SIGNATURE:
                    raise ValueError("damaged zip entry for 'strain'")
                start = info.header_offset + _LOCAL_HEADER.size + fields[9] + fields[10]
                layout = ("raw", start + header, "")
            else:
                layout = ("zip", header, info.filename)
    except ValueError as exc:
        if str(exc).startswith(where):
            raise
        raise ValueError(f"{where}: cannot read as a .npz strain archive: {one_line(exc)}") from None
    except (FileNotFoundError, PermissionError):
        raise
    except Exception as exc:  # not a zip file, truncated directory, damaged member
        raise ValueError(f"{where}: cannot read as a .npz strain archive: {one_line(exc)}") from None
    dtype = _strain_dtype(dtype, shape, where)
    kind, offset, name = layout
    return shape[0], _Layout(kind, dtype, offset, name), stored.get(rate_name), stored.get(t0_name)


def _header_hdf5(path: Path, where: str, rate_name, t0_name, dataset):
    h5py = import_h5py()
    if dataset is None:
        raise ValueError(f"{where}: name the HDF5 dataset holding the strain (dataset=)")
    if not isinstance(dataset, str):
        raise TypeError(f"dataset must be a string, got {dataset!r}")
    try:
        h5file = h5py.File(path, "r")
    except (FileNotFoundError, PermissionError):
        raise
    except Exception as exc:
        raise ValueError(f"{where}: cannot open as an HDF5 file: {one_line(exc)}") from None
    with h5file:
        obj = h5file.get(dataset)
        if not isinstance(obj, h5py.Dataset):
            names = []
            h5file.visititems(lambda name, o: names.append(name) if isinstance(o, h5py.Dataset) else None)
            raise ValueError(f"{where}: no dataset named {dataset!r} (the file holds {names or 'no datasets'})")
        where = f"{path}:{dataset}"
        dtype = _strain_dtype(obj.dtype, obj.shape, where)
        n = obj.shape[0]
        attrs = dict(obj.attrs)
    rate = stored_number(attrs[rate_name], f"attribute {rate_name!r}", where) if rate_name in attrs else None
    t0 = stored_number(attrs[t0_name], f"attribute {t0_name!r}", where) if t0_name in attrs else None
    return n, _Layout("hdf5", dtype, 0, dataset), rate, t0, where


def _read_header(path: Path, *, dataset, sample_rate, t0, rate_name, t0_name) -> StrainFile:
    ext = path.suffix.lower()
    where = str(path)
    if ext in _TEXT_EXT:
        raise ValueError(f"{where}: text strain files are read whole; a catalogue reads files block by block from "
                         f"{', '.join(CATALOGUE_EXTENSIONS)} (convert with numpy.save)")
    if ext not in CATALOGUE_EXTENSIONS:
        raise ValueError(f"{where}: unknown strain file extension {ext or '(none)'!r}; a catalogue reads "
                         f"{', '.join(CATALOGUE_EXTENSIONS)}")
    if dataset is not None and ext not in (".h5", ".hdf5"):
        raise ValueError(f"{where}: dataset={dataset!r} applies to HDF5 files only")
    if ext == ".npy":
        n, layout, rate, start = _header_npy(path, where, rate_name, t0_name)
        rate_missing, t0_missing = "a .npy file holds only samples: pass sample_rate", \
            "a .npy file holds only samples: pass t0 (a mapping from file to start time)"
        holder = "array"
    elif ext == ".npz":
        n, layout, rate, start = _header_npz(path, where, rate_name, t0_name)
        rate_missing = f"the archive has no array {rate_name!r}: store one or pass sample_rate"
        t0_missing = f"the archive has no array {t0_name!r}: store one or pass t0"
        holder = "array"
    else:
        n, layout, rate, start, where = _header_hdf5(path, where, rate_name, t0_name, dataset)
        rate_missing = f"the dataset has no attribute {rate_name!r}: store one or pass sample_rate"
        t0_missing = f"the dataset has no attribute {t0_name!r}: store one or pass t0"
        holder = "attribute"
    if start is not None and not math.isfinite(start):
        raise ValueError(f"{where}: stored start time must be finite, got {start!r}")
    rate = settle_sample_rate(rate, sample_rate, n, where=where, origin=f"{holder} {rate_name!r}",
                              missing=rate_missing)
    start = settle_t0(start, t0, rate, where=where, origin=f"{holder} {t0_name!r}", missing=t0_missing)
    return StrainFile(path=path, where=where, t0=start, n=int(n), sample_rate=rate, layout=layout)


# ---------------------------------------------------------------------------
# the catalogue
# ---------------------------------------------------------------------------
def _expand(paths) -> tuple[list[Path], bool]:
    """Files named by a path, a glob pattern or a list of them; whether any was a pattern."""
    items = [paths] if isinstance(paths, (str, os.PathLike)) else list(paths)
    if not items:
        raise ValueError("paths must name at least one strain file, got an empty list")
    out, patterned = [], False
    for item in items:
        if not isinstance(item, (str, os.PathLike)):
            raise TypeError(f"paths must be file paths or glob patterns, got {item!r}")
        text = os.fspath(item)
        if isinstance(item, str) and any(c in text for c in _GLOB_CHARS):
            patterned = True
            found = sorted(glob.glob(text, recursive=True))
            files = [Path(f) for f in found if not os.path.isdir(f)]
            if not files:
                raise FileNotFoundError(f"glob pattern {text!r} matches no strain files")
            out += files
        else:
            path = Path(text)
            if not path.exists():
                raise FileNotFoundError(f"strain file not found: {path}")
            if path.is_dir():
                raise ValueError(f"{path}: is a directory; give its files, e.g. the pattern '{path / '*.h5'}'")
            out.append(path)
    seen = {}
    for path in out:
        key = path.resolve()
        if key in seen:
            raise ValueError(f"{path}: listed twice (also as {seen[key]})")
        seen[key] = path
    return out, patterned


def _start_times(t0, paths: list[Path], patterned: bool) -> list[float | None]:
    """Return the caller's start time of each file (None where not given)."""
    if t0 is None:
        return [None] * len(paths)
    if isinstance(t0, Mapping):
        given = {Path(os.fspath(k)).resolve(): real_scalar(f"t0[{k!r}]", v) for k, v in t0.items()}
        unknown = set(given) - {p.resolve() for p in paths}
        if unknown:
            raise ValueError(f"t0 names files not in the catalogue: {sorted(str(u) for u in unknown)}")
        return [given.get(p.resolve()) for p in paths]
    if isinstance(t0, Iterable) and not isinstance(t0, (str, bytes)):
        values = list(t0)
        if patterned:
            raise ValueError("t0 as a sequence needs an explicit list of files; with glob patterns give a mapping "
                             "from file to start time")
        if len(values) != len(paths):
            raise ValueError(f"t0 has {len(values)} start times for {len(paths)} files")
        return [real_scalar(f"t0[{i}]", v) for i, v in enumerate(values)]
    if len(paths) != 1:
        raise ValueError(f"t0={t0!r} is one start time for {len(paths)} files; give a mapping from file to "
                         "start time")
    return [real_scalar("t0", t0)]


def read_catalogue(paths, *, dataset=None, sample_rate=None, t0=None, sample_rate_attr="sample_rate",
                   t0_attr="t0") -> Catalogue:
    """List one site's strain files and place them on one time line, reading headers only.

    Parameters
    ----------
    paths : str, os.PathLike, or a list of them
        Files, or glob patterns (``"site-a/*.h5"``, ``**`` for sub-folders), in any
        order. Formats, by extension (case-insensitive):

        ``.h5``, ``.hdf5``
            The 1-D dataset named by ``dataset`` in each file, with the sample rate
            (Hz) and start time (s) in its attributes ``sample_rate_attr`` and
            ``t0_attr``. Needs ``h5py``.
        ``.npz``
            Array ``strain`` (1-D) with single-number arrays ``sample_rate_attr`` and
            ``t0_attr``, as :func:`numpy.savez` writes them. Uncompressed archives are
            read in place; compressed ones (:func:`numpy.savez_compressed`) are
            decompressed from their start at every read, so prefer the former for long
            files.
        ``.npy``
            A 1-D array; ``sample_rate`` and ``t0`` must be given.

        Text files are refused: they cannot be read in blocks.
    dataset : str, optional
        HDF5 dataset path (HDF5 only).
    sample_rate : float, optional
        Hz, for every file. Required where a file holds none; where it holds one, the
        two must agree to a tenth of a sample over the file.
    t0 : float, sequence of float, or mapping, optional
        Start times (s) of files that hold none (``.npy``), or to check those they
        hold (within a tenth of a sample): a mapping from file path to start time, a
        sequence in the order of an explicit ``paths`` list, or one number for one file.
        A start time is never assumed: a file without one is an error.
    sample_rate_attr, t0_attr : str
        Names of the ``.npz`` arrays or HDF5 attributes holding the sample rate and
        the start time.

    Returns
    -------
    Catalogue

    Raises
    ------
    FileNotFoundError
        A listed file does not exist, or a pattern matches none.
    ValueError
        A file that cannot be read, lacks its sample rate or start time, disagrees with
        the values given, has a sample rate differing from the others, or overlaps
        another file (the message names the files); a file listed twice.
    TypeError
        Arguments of the wrong type.

    Notes
    -----
    Files abut when one starts within :data:`~chirpsift.io.metadata.TIME_STEP_TOLERANCE`
    (0.1) of a sample of where the previous one ends: well above the rounding of start
    times of order 1e9 s in float64 (about 1e-7 s), well below a sample. A file missing
    from the middle of a run is simply a gap. Only headers are read: the samples of HDF5
    datasets, ``.npy`` files and uncompressed ``.npz`` members are later read from their
    byte offsets, a block at a time.

    Examples
    --------
    Three files of an invented site, the last one after a 2 s gap, listed in any order:

    >>> import numpy as np, os
    >>> from chirpsift.io.catalogue import read_catalogue
    >>> d = "site-x"
    >>> os.makedirs(d, exist_ok=True)
    >>> for name, start in [("b", 1008.0), ("a", 1000.0), ("c", 1018.0)]:
    ...     np.savez(os.path.join(d, f"site-x-{name}.npz"), strain=np.zeros(8 * 256), sample_rate=256.0, t0=start)
    >>> cat = read_catalogue(os.path.join(d, "site-x-*.npz"))
    >>> [(s.t0, s.end, len(s.files)) for s in cat.spans]
    [(1000.0, 1016.0, 2), (1018.0, 1026.0, 1)]
    >>> cat.gaps, cat.covered
    ([(1016.0, 1018.0)], 24.0)
    """
    files, patterned = _expand(paths)
    rate_name = metadata_name("sample_rate_attr", sample_rate_attr)
    t0_name = metadata_name("t0_attr", t0_attr)
    rate_given = None if sample_rate is None else positive_scalar("sample_rate", sample_rate)
    starts = _start_times(t0, files, patterned)
    found = [_read_header(p, dataset=dataset, sample_rate=rate_given, t0=s, rate_name=rate_name, t0_name=t0_name)
             for p, s in zip(files, starts)]
    found.sort(key=lambda f: (f.t0, str(f.path)))
    fs = found[0].sample_rate
    for f in found[1:]:
        if f.sample_rate != fs:
            raise ValueError(f"{f.where}: sample rate {f.sample_rate!r} Hz differs from {fs!r} Hz of "
                             f"{found[0].where}; a catalogue holds one sample rate")
    spans, group, offsets, n, t_first = [], [found[0]], [0], found[0].n, found[0].t0
    for prev, f in zip(found, found[1:]):
        end = t_first + n / fs
        late = (f.t0 - end) * fs  # samples between the span's end and this file's start
        if late < -TIME_STEP_TOLERANCE:
            overlap = min(end, f.end) - f.t0
            raise ValueError(f"{f.where} overlaps {prev.where} by {overlap:g} s (from {f.t0!r} s); "
                             "a catalogue holds each time once")
        if late <= TIME_STEP_TOLERANCE:
            group.append(f)
            offsets.append(n)
            n += f.n
            continue
        spans.append(Span(t_first, fs, tuple(group), tuple(offsets), n))
        group, offsets, n, t_first = [f], [0], f.n, f.t0
    spans.append(Span(t_first, fs, tuple(group), tuple(offsets), n))
    return Catalogue(files=tuple(found), spans=tuple(spans), sample_rate=fs)
