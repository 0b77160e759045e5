"""Trigger tables as Parquet files, with the run's description as JSON in the schema metadata.

Any 1-D structured array with scalar fields (or a mapping of equal-length columns) is
written one Parquet column per field, keeping the numpy dtype, so pyarrow, pandas or any
Parquet reader can open the result; :func:`read_triggers` gives back the structured
array and the metadata document. Writing is atomic (:func:`chirpsift.io.atomic.atomic_path`).
"""

from __future__ import annotations

import json
import os
from collections.abc import Mapping
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from .atomic import atomic_path, to_json
from .readers import one_line, read_parquet

__all__ = ["write_triggers", "read_triggers", "METADATA_KEY"]

#: Key of the JSON document in a Parquet file's schema metadata.
METADATA_KEY = "chirpsift"


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
        if any(len(s) != 1 for s in lengths.values()) or len(set(lengths.values())) > 1:
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
        ``"chirpsift"`` (see :func:`chirpsift.io.atomic.to_json` for the conversions).

    Notes
    -----
    The table is written to a temporary file beside ``path`` and renamed into place only
    once it is complete, so a failed run never leaves a file that looks finished.

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift.io import read_triggers, write_triggers
    >>> table = np.zeros(2, dtype=[("time", "f8"), ("snr", "f4")])
    >>> write_triggers("triggers.parquet", table, {"f_low": 20.0})
    >>> back, meta = read_triggers("triggers.parquet")
    >>> back.dtype.names, meta
    (('time', 'snr'), {'f_low': 20.0})
    """
    cols = _columns_of(triggers)
    meta_json = to_json({} if metadata is None else dict(metadata))
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
    with atomic_path(path) as tmp:
        pq.write_table(table, tmp)


def _metadata_of(table: pa.Table, path: Path) -> dict:
    raw = (table.schema.metadata or {}).get(METADATA_KEY.encode())
    if raw is None:
        return {}
    try:
        metadata = json.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, ValueError) as exc:
        raise ValueError(f"{path}: the {METADATA_KEY!r} schema metadata is not valid JSON: {one_line(exc)}") from None
    if not isinstance(metadata, dict):
        raise ValueError(
            f"{path}: the {METADATA_KEY!r} schema metadata must be a JSON object, got {type(metadata).__name__}"
        )
    return metadata


def _column_as_numpy(name: str, column: pa.ChunkedArray, path: Path) -> np.ndarray:
    if column.null_count:
        raise ValueError(f"{path}: column {name!r} has {column.null_count} missing values")
    if pa.types.is_string(column.type) or pa.types.is_large_string(column.type):
        items = column.to_pylist()
        width = max((len(s) for s in items), default=1) or 1
        return np.array(items, dtype=f"U{width}")
    if pa.types.is_binary(column.type) or pa.types.is_large_binary(column.type):
        items = column.to_pylist()
        width = max((len(s) for s in items), default=1) or 1
        return np.array(items, dtype=f"S{width}")
    try:
        arr = column.to_numpy()
    except Exception as exc:  # types pyarrow cannot hand to numpy
        raise ValueError(f"{path}: column {name!r} of type {column.type} cannot be read: {one_line(exc)}") from None
    if arr.dtype == object:
        raise ValueError(f"{path}: column {name!r} of type {column.type} has no numpy equivalent")
    return arr


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

    Raises
    ------
    FileNotFoundError
        If the file does not exist.
    ValueError
        If the file is empty, truncated or not Parquet, its metadata is not a JSON
        object, or a column has missing values or no numpy equivalent; the one-line
        message names the file.
    """
    path = Path(os.fspath(path))
    if not path.exists():
        raise FileNotFoundError(f"trigger file not found: {path}")
    table = read_parquet(path, what="trigger table")
    metadata = _metadata_of(table, path)
    if len(set(table.column_names)) != len(table.column_names):
        raise ValueError(f"{path}: column names repeat: {table.column_names}")
    values = [_column_as_numpy(name, column, path) for name, column in zip(table.column_names, table.columns)]
    out = np.empty(table.num_rows, dtype=[(name, arr.dtype) for name, arr in zip(table.column_names, values)])
    for name, arr in zip(table.column_names, values):
        out[name] = arr
    return out, metadata
