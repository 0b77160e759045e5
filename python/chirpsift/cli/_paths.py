"""Checks on the files a command will write, made before anything is read or computed.

An output must not be one of the run's inputs (compared as files: a symbolic or hard link
to an input counts), must carry the extension of what is written into it, and must land
in an existing, writable folder.
"""

from __future__ import annotations

import os
from pathlib import Path

from ._errors import UsageError

__all__ = ["same_file", "check_output"]

#: What each kind of output holds: extension and format.
_FORMATS = {".parquet": "a Parquet table", ".json": "a JSON document"}


def same_file(a, b) -> bool:
    """Whether paths ``a`` and ``b`` name the same file.

    The same inode when both exist, otherwise the same resolved path.
    """
    try:
        return os.path.samefile(a, b)
    except OSError:
        return Path(a).expanduser().resolve() == Path(b).expanduser().resolve()


def check_output(text, flag: str, suffix: str, inputs: dict) -> Path:
    """Check the path to write for ``flag`` and return it.

    Parameters
    ----------
    text : str or os.PathLike
        The path as given.
    flag : str
        The option it came from, for messages (``"--output"``).
    suffix : str
        The extension of what is written (``".parquet"``, ``".json"``).
    inputs : dict
        Input role (``"strain file (--strain)"``) to path; ``None`` paths are skipped.

    Raises
    ------
    UsageError
        Naming ``flag`` and the value, if the extension differs, the path is an input,
        a directory, or its folder is missing or not writable.
    """
    path = Path(os.fspath(text)).expanduser()
    shown = os.fspath(text)
    if path.suffix.lower() != suffix:
        raise UsageError(
            f"{flag} {shown!r}: it is written as {_FORMATS[suffix]}; give a file name ending in {suffix}"
        )
    for role, other in inputs.items():
        if other is not None and same_file(path, other):
            raise UsageError(f"{flag} {shown!r} is the {role}; refusing to write over an input")
    if path.is_dir():
        raise UsageError(f"{flag} {shown!r} is a directory, not a file")
    folder = path.parent
    if not folder.is_dir():
        raise UsageError(f"{flag} {shown!r}: the folder {os.fspath(folder)!r} does not exist")
    if not os.access(folder, os.W_OK):
        raise UsageError(f"{flag} {shown!r}: cannot write into the folder {os.fspath(folder)!r}")
    return path
