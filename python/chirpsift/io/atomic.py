"""Atomic file writing and the JSON conversion of run documents.

Every file chirpsift writes goes through :func:`atomic_path`: the content is written to
a temporary file in the destination folder, flushed to disk and renamed over the
destination only once complete, so readers see either the old file or the whole new
one, and an interrupted run never leaves a file that looks finished. The temporary
file lives in the same folder because a rename is atomic only within one file system.

Other packages (the bank files, the run summary) import :func:`atomic_path`,
:func:`write_json_atomic` and :func:`to_json` from here.
"""

from __future__ import annotations

import contextlib
import json
import math
import os
import tempfile
from collections.abc import Iterator, Mapping
from pathlib import Path

import numpy as np

__all__ = ["atomic_path", "to_json", "write_json_atomic"]


def _new_file_mode(final: Path) -> int:
    """Permissions for a new file: those of the file it replaces, else 0o666 less the umask."""
    try:
        return final.stat().st_mode & 0o7777
    except OSError:
        mask = os.umask(0)
        os.umask(mask)
        return 0o666 & ~mask


@contextlib.contextmanager
def atomic_path(path) -> Iterator[str]:
    """Yield a temporary path beside ``path``; rename it onto ``path`` on success.

    Parameters
    ----------
    path : str or os.PathLike
        The destination. Its folder must exist.

    Yields
    ------
    str
        A fresh empty file in the destination folder (named ``.NAME.*.partial``) for
        the caller to write. When the ``with`` block ends normally it is flushed to
        disk, given the permissions of the file it replaces (or the usual ones for a
        new file) and renamed onto ``path``, and the folder is flushed too (so the
        rename survives a crash); when the block raises, it is removed and
        ``path`` is left as it was.

    Raises
    ------
    FileNotFoundError
        If the destination folder does not exist.

    Examples
    --------
    >>> from pathlib import Path
    >>> from chirpsift.io.atomic import atomic_path
    >>> with atomic_path("notes.txt") as tmp:
    ...     _ = Path(tmp).write_text("complete")
    >>> Path("notes.txt").read_text()
    'complete'
    """
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
        _sync_folder(folder)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def _sync_folder(folder: Path) -> None:
    """Flush the folder's entry for a renamed file to disk, so a crash cannot undo the rename.

    POSIX only: where a folder cannot be opened or synced (Windows), the rename stands
    as the operating system keeps it.
    """
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


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


def to_json(obj, **kwargs) -> str:
    """Serialise a run document to strict JSON text.

    Parameters
    ----------
    obj : object
        JSON-serialisable data. Numpy scalars and arrays become numbers and lists, paths
        become strings, sets become sorted lists, and non-finite floats (NaN, inf)
        become ``null`` because JSON has no representation for them.
    **kwargs
        Passed to :func:`json.dumps` (for example ``indent=2``).

    Returns
    -------
    str

    Raises
    ------
    TypeError
        For an object of another type, naming the type.

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift.io.atomic import to_json
    >>> to_json({"snr": np.float32(8.5), "far": float("inf"), "n": np.arange(2)})
    '{"snr": 8.5, "far": null, "n": [0, 1]}'
    """
    return json.dumps(_sanitize(obj), default=_json_default, allow_nan=False, **kwargs)


def write_json_atomic(path, obj) -> None:
    """Write ``obj`` as JSON to ``path`` atomically.

    Parameters
    ----------
    path : str or os.PathLike
        Destination file; its folder must exist.
    obj : object
        JSON-serialisable data, converted as :func:`to_json` describes (non-finite
        floats are written as ``null``).

    Notes
    -----
    The document is written to a temporary file in the destination folder, flushed to
    disk and renamed over ``path`` (:func:`atomic_path`), so readers see either the old
    file or the complete new one, never a partial write.

    Examples
    --------
    >>> import json
    >>> from pathlib import Path
    >>> from chirpsift.io import write_json_atomic
    >>> write_json_atomic("summary.json", {"triggers": 3, "live_time": 512.0})
    >>> json.loads(Path("summary.json").read_text())
    {'triggers': 3, 'live_time': 512.0}
    """
    text = to_json(obj, indent=2) + "\n"
    with atomic_path(path) as tmp:
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(text)
