"""Guarded readers for NumPy and Parquet files: any failure becomes one clear ValueError.

``np.load`` and ``pyarrow.parquet.read_table`` fail on a damaged file in many ways
(``EOFError``, ``zipfile.BadZipFile``, ``zlib.error``, ``SyntaxError`` from a mangled
header, ``pyarrow.ArrowInvalid``, ``OSError``, ...), often with multi-line messages
that do not say which file. Every reader of a user's file (strain, banks, trigger
tables) goes through these helpers instead, so a bad file always gives a
``ValueError`` whose one-line message names the file and what is wrong. A missing
file, a folder or a permission problem keeps its own ``OSError`` subclass.
"""

from __future__ import annotations

import os
import tomllib
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

__all__ = ["load_npy", "load_npz", "read_parquet", "one_line"]

# Raised before the file's content is looked at: not a problem of the file's format.
_FILE_SYSTEM_ERRORS = (FileNotFoundError, IsADirectoryError, NotADirectoryError, PermissionError)

_NPY_MAGIC = b"\x93NUMPY"
_ZIP_MAGICS = (b"PK\x03\x04", b"PK\x05\x06")


def one_line(exc: BaseException, limit: int = 200) -> str:
    r"""Return the message of ``exc`` on one line (whitespace collapsed, at most ``limit`` characters).

    Parameters
    ----------
    exc : BaseException
        Any exception; one with an empty message is described by its type.
    limit : int
        Longest text returned; longer messages are cut and end in ``...``.

    Returns
    -------
    str

    Examples
    --------
    >>> from chirpsift.io.readers import one_line
    >>> one_line(ValueError("bad\n   header"))
    'bad header'
    >>> one_line(EOFError())
    'EOFError'
    """
    text = " ".join(str(exc).split()) or type(exc).__name__
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _head(path: Path, what: str, kind: str) -> bytes:
    """Return the first bytes of ``path``; raise ValueError naming the file if it is empty."""
    with open(path, "rb") as fh:
        head = fh.read(8)
    if not head:
        raise ValueError(f"{path}: cannot read as a {kind} {what}: the file is empty (0 bytes)")
    return head


def load_npy(path, *, what: str = "array") -> np.ndarray:
    r"""Read a ``.npy`` file without unpickling, turning every failure into a ValueError.

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    what : str
        What the file should hold, for the message (``"strain array"``).

    Returns
    -------
    numpy.ndarray

    Raises
    ------
    ValueError
        If the file is empty, has no NumPy header, is truncated, holds Python objects,
        or cannot be parsed for any other reason; the message names the file.
    FileNotFoundError, IsADirectoryError, PermissionError
        As :func:`open` raises them.

    Examples
    --------
    >>> from pathlib import Path
    >>> from chirpsift.io.readers import load_npy
    >>> _ = Path("broken.npy").write_bytes(b"\x93NUMPY\x01\x00")
    >>> load_npy("broken.npy", what="strain array")
    Traceback (most recent call last):
    ...
    ValueError: broken.npy: cannot read as a .npy strain array: EOF: reading array header ...
    """
    path = Path(os.fspath(path))
    if not _head(path, what, ".npy").startswith(_NPY_MAGIC):
        raise ValueError(f"{path}: cannot read as a .npy {what}: no NumPy header (not a .npy file)")
    try:
        with open(path, "rb") as fh:
            return np.load(fh, allow_pickle=False)
    except _FILE_SYSTEM_ERRORS:
        raise
    except Exception as exc:  # the parser of an untrusted file: every failure means a bad file
        raise ValueError(f"{path}: cannot read as a .npy {what}: {one_line(exc)}") from None


def load_npz(path, names, *, what: str = "archive") -> tuple[list[str], dict[str, np.ndarray]]:
    """Read the arrays ``names`` (those present) from a ``.npz`` archive, without unpickling.

    Parameters
    ----------
    path : str or os.PathLike
        The archive.
    names : iterable of str
        Arrays to read; names the archive lacks are left out of the result (the caller
        decides which are required and says so).
    what : str
        What the archive should hold, for the message (``"bank archive"``).

    Returns
    -------
    members : list of str
        Every array name in the archive, in archive order.
    arrays : dict of str to numpy.ndarray
        The requested arrays that are present, fully read.

    Raises
    ------
    ValueError
        If the archive is empty, not a zip archive, truncated, or a requested array is
        damaged or holds Python objects; the message names the file (and the array).
    FileNotFoundError, IsADirectoryError, PermissionError
        As :func:`open` raises them.

    Examples
    --------
    >>> import numpy as np
    >>> from chirpsift.io.readers import load_npz
    >>> np.savez("a.npz", strain=np.zeros(3), sample_rate=4.0)
    >>> members, arrays = load_npz("a.npz", ["strain", "t0"])
    >>> members, sorted(arrays)
    (['strain', 'sample_rate'], ['strain'])
    """
    path = Path(os.fspath(path))
    head = _head(path, what, ".npz")
    if head.startswith(_NPY_MAGIC):
        raise ValueError(f"{path}: cannot read as a .npz {what}: it is a single .npy array, not a .npz archive")
    if not head.startswith(_ZIP_MAGICS):
        raise ValueError(f"{path}: cannot read as a .npz {what}: not a zip archive")
    # np.load leaves the file open when the zip directory is damaged: own the handle here
    with open(path, "rb") as fh:
        try:
            archive = np.load(fh, allow_pickle=False)
        except Exception as exc:  # truncated or damaged zip directory
            raise ValueError(f"{path}: cannot read as a .npz {what}: {one_line(exc)}") from None
        with archive:
            members = list(archive.files)
            arrays = {}
            for name in names:
                if name not in members:
                    continue
                try:
                    arrays[name] = archive[name]
                except Exception as exc:  # damaged member, object array, bad header
                    raise ValueError(
                        f"{path}: cannot read array {name!r} of the .npz {what}: {one_line(exc)}"
                    ) from None
    return members, arrays


def read_parquet(path, *, what: str = "table") -> pa.Table:
    """Read a Parquet file into a :class:`pyarrow.Table`, turning every failure into a ValueError.

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    what : str
        What the file should hold, for the message (``"trigger table"``).

    Returns
    -------
    pyarrow.Table

    Raises
    ------
    ValueError
        If the file is empty, truncated or not Parquet; the message names the file.
    FileNotFoundError, IsADirectoryError, PermissionError
        As :func:`open` raises them.

    Examples
    --------
    >>> from pathlib import Path
    >>> from chirpsift.io.readers import read_parquet
    >>> _ = Path("notes.parquet").write_text("not a table")
    >>> read_parquet("notes.parquet", what="trigger table")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    ValueError: notes.parquet: cannot read as a Parquet trigger table: ...
    """
    path = Path(os.fspath(path))
    _head(path, what, "Parquet")
    try:
        return pq.read_table(path)
    except _FILE_SYSTEM_ERRORS:
        raise
    except Exception as exc:  # ArrowInvalid, OSError from a damaged footer, ...
        raise ValueError(f"{path}: cannot read as a Parquet {what}: {one_line(exc)}") from None


def read_toml(path, *, what: str) -> tuple[Path, dict]:
    """Read a TOML file, turning every failure into one message naming the file.

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    what : str
        What the file should hold, for the messages (``"sites file"``).

    Returns
    -------
    path : pathlib.Path
        The path as given.
    doc : dict
        The parsed document.

    Raises
    ------
    FileNotFoundError
        If there is no such file (the message starts with ``what``).
    ValueError
        If the path is a folder, or the file is not UTF-8 text or not valid TOML.

    Examples
    --------
    >>> from pathlib import Path
    >>> from chirpsift.io.readers import read_toml
    >>> _ = Path("a.toml").write_text("y = 1")
    >>> read_toml("a.toml", what="config file")[1]
    {'y': 1}
    """
    p = Path(os.fspath(path))
    if p.is_dir():
        raise ValueError(f"{what} {p}: is a directory, not a TOML file")
    if not p.is_file():
        raise FileNotFoundError(f"{what} not found: {p}")
    try:
        with open(p, "rb") as fh:
            return p, tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{what} {p}: not valid TOML ({exc})") from None
    except UnicodeDecodeError:
        raise ValueError(f"{what} {p}: not a UTF-8 text file (TOML must be UTF-8)") from None
