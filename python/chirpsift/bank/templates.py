"""Template banks: component masses and aligned spins of the templates to search with.

A :class:`Bank` holds four float64 arrays of equal length: ``m1`` and ``m2`` (component
masses, solar masses) and ``chi1`` and ``chi2`` (dimensionless spin components along the
orbital angular momentum, ``|chi| < 1``). It is immutable: its arrays are read-only.

File layout
-----------
``.npz``
    Arrays ``m1``, ``m2``, ``chi1``, ``chi2`` (float64, 1-D) plus 0-d arrays ``format``
    (``"chirpsift-bank"``) and ``version`` (``1``), and a 0-d string ``metadata`` (JSON:
    :attr:`Bank.metadata`). ``chi1``/``chi2`` and ``metadata`` are optional on reading.
``.parquet``
    Columns ``m1``, ``m2``, ``chi1``, ``chi2`` (float64), and the schema metadata
    key-value pairs ``format = "chirpsift-bank"``, ``version = "1"`` and ``metadata`` (JSON:
    :attr:`Bank.metadata`; for a placed bank ``region``, ``psd``, ``f_low``,
    ``minimal_match``, ``method``, ``seed``, ``sample_rate``). Files without
    that metadata (e.g. written by other tools) are accepted if they have the columns;
    ``chi1``/``chi2`` are optional on reading.
"""

from __future__ import annotations

import json
import numbers
import os
from collections.abc import Mapping
from pathlib import Path

import numpy as np

from ..io.readers import load_npz, read_parquet

__all__ = ["Bank", "BANK_FORMAT", "BANK_VERSION"]

BANK_FORMAT = "chirpsift-bank"
BANK_VERSION = 1
_FIELDS = ("m1", "m2", "chi1", "chi2")
_RECORD_DTYPE = np.dtype([(name, np.float64) for name in _FIELDS])


def _column(values, name: str) -> np.ndarray:
    try:
        arr = np.asarray(values)
    except ValueError:
        raise ValueError(f"{name} must be a 1-D array of numbers (got a ragged sequence)") from None
    if arr.dtype.kind in "c":
        raise TypeError(f"{name} must be real, got complex dtype {arr.dtype}")
    if arr.dtype.kind not in "iuf":
        raise TypeError(f"{name} must be an array of real numbers, got dtype {arr.dtype}")
    arr = np.atleast_1d(arr)
    if arr.ndim != 1:
        raise ValueError(f"{name} must be 1-D, got an array of shape {arr.shape}")
    out = np.array(arr, dtype=np.float64, copy=True)
    bad = ~np.isfinite(out)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise ValueError(f"{name} must be finite; {name}[{i}] = {float(out[i])!r}")
    return out


class Bank:
    """An immutable set of aligned-spin templates.

    Parameters
    ----------
    m1, m2 : array_like
        Component masses in solar masses (> 0), 1-D (scalars give a one-template bank).
    chi1, chi2 : array_like, optional
        Dimensionless aligned spin components, ``-1 < chi < 1``; zero if omitted.
        Scalars broadcast to the bank's length.
    metadata : mapping, optional
        JSON-serialisable description of how the bank was made; saved with it.

    Raises
    ------
    ValueError
        If lengths differ, a value is not finite, a mass is not positive, or
        ``|chi| >= 1``; the message names the array, the index and the value.
    TypeError
        If an input is not real-valued numeric.

    Notes
    -----
    The masses are taken as given; no ordering ``m1 >= m2`` is imposed. A bank may be
    empty (e.g. an empty slice).

    Examples
    --------
    >>> from chirpsift.bank import Bank
    >>> b = Bank([1.4, 10.0], [1.4, 8.0])
    >>> len(b), round(float(b.mchirp[0]), 4)
    (2, 1.2188)
    """

    __slots__ = ("_m1", "_m2", "_chi1", "_chi2", "_metadata")

    def __init__(self, m1, m2, chi1=None, chi2=None, *, metadata=None):
        m1 = _column(m1, "m1")
        m2 = _column(m2, "m2")
        if m1.size != m2.size:
            raise ValueError(f"m1 and m2 must have equal lengths, got {m1.size} and {m2.size}")
        n = m1.size
        spins = []
        for name, chi in (("chi1", chi1), ("chi2", chi2)):
            if chi is None:
                arr = np.zeros(n)
            else:
                arr = _column(chi, name)
                if arr.size == 1 and n != 1:
                    arr = np.full(n, arr[0])
                if arr.size != n:
                    raise ValueError(f"{name} must have the bank's length {n}, got {arr.size}")
            spins.append(arr)
        for name, arr in (("m1", m1), ("m2", m2)):
            bad = arr <= 0
            if bad.any():
                i = int(np.flatnonzero(bad)[0])
                raise ValueError(f"{name} must be positive (solar masses); {name}[{i}] = {float(arr[i])!r}")
        for name, arr in zip(("chi1", "chi2"), spins):
            bad = np.abs(arr) >= 1
            if bad.any():
                i = int(np.flatnonzero(bad)[0])
                raise ValueError(f"{name} must satisfy |{name}| < 1; {name}[{i}] = {float(arr[i])!r}")
        for arr in (m1, m2, *spins):
            arr.setflags(write=False)
        self._m1, self._m2 = m1, m2
        self._chi1, self._chi2 = spins
        if metadata is not None and not isinstance(metadata, Mapping):
            raise TypeError(f"metadata must be a mapping (JSON-serialisable), got {type(metadata).__name__}")
        self._metadata = json.loads(json.dumps(dict(metadata or {})))

    @property
    def metadata(self) -> dict:
        """How the bank was made (a copy): for a placed bank the region, noise curve,
        ``f_low``, minimal match, method, seed and sample rate; empty otherwise.
        """
        return json.loads(json.dumps(self._metadata))

    # -- arrays -------------------------------------------------------------
    @property
    def m1(self) -> np.ndarray:
        """Primary component masses, solar masses (read-only float64)."""
        return self._m1

    @property
    def m2(self) -> np.ndarray:
        """Secondary component masses, solar masses (read-only float64)."""
        return self._m2

    @property
    def chi1(self) -> np.ndarray:
        """Aligned dimensionless spin of component 1 (read-only float64)."""
        return self._chi1

    @property
    def chi2(self) -> np.ndarray:
        """Aligned dimensionless spin of component 2 (read-only float64)."""
        return self._chi2

    @property
    def mtotal(self) -> np.ndarray:
        """Total mass ``M = m1 + m2``, solar masses."""
        return self._m1 + self._m2

    @property
    def eta(self) -> np.ndarray:
        """Symmetric mass ratio ``eta = m1 m2 / M^2`` (dimensionless, at most 1/4)."""
        return self._m1 * self._m2 / self.mtotal**2

    @property
    def mchirp(self) -> np.ndarray:
        """Chirp mass ``Mc = (m1 m2)^(3/5) / M^(1/5)``, solar masses."""
        return (self._m1 * self._m2) ** 0.6 / self.mtotal**0.2

    # -- container protocol ------------------------------------------------
    def __len__(self) -> int:
        return int(self._m1.size)

    def __getitem__(self, index) -> "Bank":
        """Select templates; an integer gives a one-template Bank, slices and index or
        boolean arrays give a Bank of the selection.
        """
        if isinstance(index, (numbers.Integral, np.integer)) and not isinstance(index, bool):
            n = len(self)
            i = int(index)
            if not -n <= i < n:
                raise IndexError(f"template index {i} out of range for a bank of {n} templates")
            index = slice(i if i >= 0 else i + n, (i if i >= 0 else i + n) + 1)
        elif not isinstance(index, slice):
            index = np.asarray(index)
            if index.dtype.kind not in "biu" or index.ndim != 1:
                raise TypeError(
                    f"bank index must be an integer, slice, or 1-D integer/boolean array, got {index!r}"
                )
            if index.dtype.kind == "b" and index.size != len(self):
                raise IndexError(f"boolean mask of length {index.size} for a bank of {len(self)} templates")
        return Bank(self._m1[index], self._m2[index], self._chi1[index], self._chi2[index])

    def __iter__(self):
        """Iterate over templates as ``(m1, m2, chi1, chi2)`` tuples of floats."""
        for row in zip(self._m1.tolist(), self._m2.tolist(), self._chi1.tolist(), self._chi2.tolist()):
            yield row

    def __eq__(self, other) -> bool:
        if not isinstance(other, Bank):
            return NotImplemented
        return all(np.array_equal(getattr(self, f), getattr(other, f)) for f in _FIELDS)

    __hash__ = None  # mutable-looking container semantics; banks compare by value

    def __repr__(self) -> str:
        n = len(self)
        if n == 0:
            return "Bank(0 templates)"
        return (
            f"Bank({n} templates, m1 {self._m1.min():g}..{self._m1.max():g}, "
            f"m2 {self._m2.min():g}..{self._m2.max():g}, "
            f"chi1 {self._chi1.min():g}..{self._chi1.max():g}, chi2 {self._chi2.min():g}..{self._chi2.max():g})"
        )

    # -- conversions -----------------------------------------------------------
    @classmethod
    def from_any(cls, obj) -> "Bank":
        """Build a Bank from a Bank, a structured array, a mapping or a 2-D array.

        Parameters
        ----------
        obj : Bank, numpy.ndarray or Mapping
            - a :class:`Bank` (returned as is);
            - a structured array with fields ``m1``, ``m2`` and optionally ``chi1``,
              ``chi2`` (zero when absent); other fields are ignored, except that an
              unrecognised field whose name starts with ``chi`` or ``spin`` is an error
              (it is probably a misspelt spin that would otherwise be silently zero);
            - a mapping (e.g. a dict of arrays, or any object with ``keys()`` and item
              access such as a data frame) with the same keys and rules;
            - a plain 2-D array of shape ``(K, 2)`` (m1, m2) or ``(K, 4)`` (m1, m2, chi1, chi2).

        Returns
        -------
        Bank
        """
        if isinstance(obj, Bank):
            return obj
        if isinstance(obj, np.ndarray) and obj.dtype.names is None:
            if obj.ndim != 2 or obj.shape[1] not in (2, 4):
                raise ValueError(
                    f"a plain array bank must have shape (K, 2) or (K, 4) (m1, m2[, chi1, chi2]), "
                    f"got shape {obj.shape}"
                )
            return cls(*obj.T)
        if isinstance(obj, np.ndarray):
            names = list(obj.dtype.names)
            getter = obj.__getitem__
        elif isinstance(obj, Mapping) or (hasattr(obj, "keys") and hasattr(obj, "__getitem__")):
            names = [str(k) for k in obj.keys()]
            getter = obj.__getitem__
        else:
            raise TypeError(
                "a bank must be a Bank, a structured array or mapping with fields m1, m2[, chi1, chi2], "
                f"or a (K, 2)/(K, 4) array; got {type(obj).__name__}"
            )
        missing = [f for f in ("m1", "m2") if f not in names]
        if missing:
            raise ValueError(f"bank is missing field(s) {missing}; it has {names}")
        suspicious = [
            n for n in names if n not in _FIELDS and n.lower().startswith(("chi", "spin"))
        ]
        if suspicious:
            raise ValueError(
                f"bank has unrecognised spin-like field(s) {suspicious}; spins must be named chi1, chi2"
            )
        return cls(
            getter("m1"),
            getter("m2"),
            getter("chi1") if "chi1" in names else None,
            getter("chi2") if "chi2" in names else None,
        )

    def to_records(self) -> np.ndarray:
        """The bank as a structured array with float64 fields ``m1, m2, chi1, chi2``."""
        out = np.empty(len(self), dtype=_RECORD_DTYPE)
        for f in _FIELDS:
            out[f] = getattr(self, f)
        return out

    # -- files ----------------------------------------------------------------
    def save(self, path) -> None:
        """Write the bank to ``.npz`` or ``.parquet`` (layout in the module docstring).

        Parameters
        ----------
        path : str or os.PathLike
            Destination; the format follows the extension. Written atomically.
        """
        from ..io.atomic import atomic_path

        path = Path(os.fspath(path))
        ext = path.suffix.lower()
        if ext == ".npz":
            with atomic_path(path) as tmp:
                with open(tmp, "wb") as fh:
                    np.savez(
                        fh,
                        m1=self._m1,
                        m2=self._m2,
                        chi1=self._chi1,
                        chi2=self._chi2,
                        format=np.array(BANK_FORMAT),
                        version=np.array(BANK_VERSION),
                        metadata=np.array(json.dumps(self._metadata)),
                    )
        elif ext == ".parquet":
            import pyarrow as pa
            import pyarrow.parquet as pq

            table = pa.table({f: pa.array(getattr(self, f), type=pa.float64()) for f in _FIELDS})
            table = table.replace_schema_metadata({"format": BANK_FORMAT, "version": str(BANK_VERSION),
                                                   "metadata": json.dumps(self._metadata)})
            with atomic_path(path) as tmp:
                pq.write_table(table, tmp)
        else:
            raise ValueError(f"{path}: unknown bank file extension {ext or '(none)'!r}; use .npz or .parquet")

    @classmethod
    def load(cls, path) -> "Bank":
        """Read a bank from ``.npz`` or ``.parquet`` (layout in the module docstring).

        Parameters
        ----------
        path : str or os.PathLike
            Bank file.

        Returns
        -------
        Bank

        Raises
        ------
        FileNotFoundError
            If the file does not exist.
        ValueError
            For an unknown extension, missing columns, a foreign ``format`` marker, a
            newer ``version``, or invalid values (the message names the file).
        """
        path = Path(os.fspath(path))
        if not path.exists():
            raise FileNotFoundError(f"bank file not found: {path}")
        ext = path.suffix.lower()
        if ext == ".npz":
            names, arrays = load_npz(path, (*_FIELDS, "format", "version", "metadata"), what="bank archive")
            extra = str(arrays["metadata"]) if "metadata" in arrays else None
            fmt = str(arrays["format"]) if "format" in arrays else None
            version = arrays["version"].item() if "version" in arrays else None
            cols = {k: arrays[k] for k in _FIELDS if k in arrays}
        elif ext == ".parquet":
            table = read_parquet(path, what="bank")
            meta = table.schema.metadata or {}
            fmt = meta[b"format"].decode(errors="replace") if b"format" in meta else None
            version = meta[b"version"].decode(errors="replace") if b"version" in meta else None
            extra = meta[b"metadata"].decode(errors="replace") if b"metadata" in meta else None
            names = table.column_names
            cols = {k: table.column(k).to_numpy() for k in _FIELDS if k in names}
        else:
            raise ValueError(f"{path}: unknown bank file extension {ext or '(none)'!r}; use .npz or .parquet")
        if fmt is not None and fmt != BANK_FORMAT:
            raise ValueError(f"{path}: format marker is {fmt!r}, expected {BANK_FORMAT!r}")
        if version is not None:
            try:
                version_int = int(version)
            except (TypeError, ValueError):
                raise ValueError(f"{path}: bank version {version!r} is not an integer") from None
            if version_int > BANK_VERSION:
                raise ValueError(
                    f"{path}: bank version {version_int} is newer than this chirpsift reads ({BANK_VERSION})"
                )
        missing = [k for k in ("m1", "m2") if k not in cols]
        if missing:
            raise ValueError(f"{path}: bank is missing column(s) {missing}; it has {list(names)}")
        try:
            metadata = json.loads(extra) if extra else None
        except json.JSONDecodeError:
            raise ValueError(f"{path}: the bank's metadata is not valid JSON") from None
        try:
            return cls(cols["m1"], cols["m2"], cols.get("chi1"), cols.get("chi2"), metadata=metadata)
        except (ValueError, TypeError) as exc:
            raise type(exc)(f"{path}: {exc}") from None

    # -- simple constructions -----------------------------------------------------
    @classmethod
    def mass_grid(cls, m_min: float, m_max: float, n: int) -> "Bank":
        """A crude non-spinning bank: all pairs ``m1 >= m2`` from a uniform mass grid.

        Parameters
        ----------
        m_min, m_max : float
            Smallest and largest component mass, solar masses (``0 < m_min <= m_max``).
        n : int
            Number of grid masses, uniformly spaced in ``[m_min, m_max]``; ``n = 1``
            needs ``m_min == m_max``.

        Returns
        -------
        Bank
            ``n (n + 1) / 2`` templates, ordered by ``m1`` then ``m2``, spins zero.

        Notes
        -----
        This is a demonstration and benchmarking bank. It is not a covering bank: its
        spacing is not chosen from a match metric, so it neither guarantees a minimal
        match nor avoids redundant templates. Between its points a source can lose most
        of its SNR: for 16 random sources in the 1.3-1.5 Msun range of the Example's
        grid, the best template kept 14-59% of the optimal SNR (median 27%), because
        the chirp mass, which the phase depends on most, is sampled far too coarsely.

        Examples
        --------
        >>> from chirpsift.bank import Bank
        >>> len(Bank.mass_grid(1.3, 1.5, 5))
        15
        """
        lo = float(m_min)
        hi = float(m_max)
        if not (np.isfinite(lo) and lo > 0):
            raise ValueError(f"m_min must be a positive finite mass in solar masses, got {m_min!r}")
        if not (np.isfinite(hi) and hi >= lo):
            raise ValueError(f"m_max must be finite and >= m_min={lo!r}, got {m_max!r}")
        if isinstance(n, bool) or not isinstance(n, (numbers.Integral, np.integer)):
            raise TypeError(f"n must be an integer, got {n!r}")
        n = int(n)
        if n < 1:
            raise ValueError(f"n must be at least 1, got {n}")
        if n == 1 and hi != lo:
            raise ValueError(f"n=1 gives a single mass; it needs m_min == m_max, got {lo!r} and {hi!r}")
        masses = np.linspace(lo, hi, n)
        i, j = np.tril_indices(n)
        return cls(masses[i], masses[j])
