"""Input checks shared by the whole package: every message names the argument and the value.

One rule per kind of value lives here (finite real number, positive number, bounded
integer, dtype, choice, arrays of a given shape, PSDs), so the numpy API, the file
readers and the workflows refuse bad input with the same words. A ``where=`` prefix
puts a context, such as the file a value was read from, in front of the message.
Wrong types raise ``TypeError``; wrong values raise ``ValueError``.
"""

from __future__ import annotations

import math
import numbers

import numpy as np

__all__ = [
    "broadcast",
    "check_allocation",
    "dtype_choice",
    "finite_output",
    "real_scalar",
    "real_array",
    "complex_array",
    "positive_scalar",
    "nonnegative_scalar",
    "integer",
    "psd_array",
    "choice",
    "switch",
    "table_number",
]


def _describe(x) -> str:
    text = repr(x)
    return text if len(text) <= 80 else text[:77] + "..."


def _as_array(name: str, x, kind: str) -> np.ndarray:
    if isinstance(x, (str, bytes)) or x is None:
        raise TypeError(f"{name} must be an array of numbers, got {_describe(x)}")
    try:
        a = np.asarray(x)
    except Exception as exc:  # ragged lists and similar
        raise TypeError(f"{name} must be an array of numbers, got {_describe(x)}") from exc
    if a.dtype == object or a.dtype.kind not in ("b", "i", "u", "f", "c"):
        raise TypeError(f"{name} must hold numbers, got dtype {a.dtype}")
    if kind == "real" and a.dtype.kind == "c":
        raise TypeError(f"{name} must be real, got complex dtype {a.dtype}")
    return a


def _check_shape(name: str, a: np.ndarray, ndim, allow_empty: bool = False) -> None:
    allowed = (ndim,) if isinstance(ndim, int) else tuple(ndim)
    if a.ndim not in allowed:
        want = " or ".join(f"{d}-D" for d in allowed)
        raise ValueError(f"{name} must be {want}, got shape {a.shape}")
    if a.size == 0 and not allow_empty:
        raise ValueError(f"{name} must not be empty, got shape {a.shape}")


def _check_finite(name: str, a: np.ndarray) -> None:
    bad = ~np.isfinite(a)
    if bad.any():
        idx = np.unravel_index(int(np.argmax(bad)), a.shape)
        where = idx[0] if len(idx) == 1 else idx
        raise ValueError(f"{name} must be finite, found {a[idx]} at index {where} ({int(bad.sum())} non-finite values)")


def real_array(
    name: str, x, ndim=(1, 2), dtype=np.float64, finite: bool = True, allow_empty: bool = False
) -> np.ndarray:
    """C-contiguous real array of `dtype`, checked for shape, emptiness and finiteness."""
    a = _as_array(name, x, "real")
    _check_shape(name, a, ndim, allow_empty)
    a = np.asarray(a, dtype=dtype, order="C")  # keeps 0-d arrays 0-d
    if finite:
        _check_finite(name, a)
    return a


def complex_array(name: str, x, ndim=(1, 2), dtype=None, finite: bool = True) -> np.ndarray:
    """C-contiguous complex64/complex128 array (kept at its precision unless `dtype`).

    ``finite=False`` leaves the finiteness check to a kernel that reads only part of the
    array (and checks what it reads).
    """
    a = _as_array(name, x, "complex")
    _check_shape(name, a, ndim)
    if dtype is None:
        dtype = np.complex64 if a.dtype in (np.complex64, np.float32, np.float16) else np.complex128
    a = np.asarray(a, dtype=dtype, order="C")
    if finite:
        _check_finite(name, a)
    return a


def _prefix(where) -> str:
    """``"where: "`` for messages about a value read from a file, else nothing."""
    return f"{where}: " if where else ""


def real_scalar(name: str, x, *, where: str | None = None) -> float:
    """Check that ``x`` is one finite real number and return it as a float.

    Parameters
    ----------
    name : str
        Argument name used in the error message.
    x : object
        A Python or numpy real number, or a 0-d real array. Booleans are refused
        (``True`` is almost always a mistake for a number of Hz or seconds).
    where : str, optional
        Context put in front of the message, e.g. the file a value belongs to.

    Returns
    -------
    float

    Raises
    ------
    TypeError
        If ``x`` is not a real number.
    ValueError
        If ``x`` is NaN or infinite.
    """
    if isinstance(x, (bool, np.bool_)) or not isinstance(x, (numbers.Real, np.floating, np.integer)):
        if isinstance(x, np.ndarray) and x.ndim == 0 and x.dtype.kind in "iuf":
            x = x.item()
        else:
            raise TypeError(f"{_prefix(where)}{name} must be a real number, got {_describe(x)}")
    v = float(x)
    if not np.isfinite(v):
        raise ValueError(f"{_prefix(where)}{name} must be finite, got {v}")
    return v


def positive_scalar(name: str, x, *, where: str | None = None) -> float:
    """Check that ``x`` is a finite real number greater than zero (see :func:`real_scalar`)."""
    v = real_scalar(name, x, where=where)
    if v <= 0:
        raise ValueError(f"{_prefix(where)}{name} must be positive, got {v}")
    return v


def nonnegative_scalar(name: str, x, *, where: str | None = None) -> float:
    """Check that ``x`` is a finite real number at least zero (see :func:`real_scalar`)."""
    v = real_scalar(name, x, where=where)
    if v < 0:
        raise ValueError(f"{_prefix(where)}{name} must be non-negative, got {v}")
    return v


def integer(name: str, x, minimum: int = 1, maximum: int = 2**53, *, where: str | None = None) -> int:
    """Check that ``x`` is an integer in ``[minimum, maximum]`` and return it as an int.

    Parameters
    ----------
    name : str
        Argument name used in the error message.
    x : object
        A Python or numpy integer (not a bool, not a float that happens to be whole).
    minimum, maximum : int
        Inclusive bounds. The default maximum, 2**53, keeps the value exact as a float64
        and far below what any allocation could hold, so huge integers fail here with a
        message instead of overflowing in the core.
    where : str, optional
        Context put in front of the message.

    Returns
    -------
    int

    Raises
    ------
    TypeError
        If ``x`` is not an integer.
    ValueError
        If ``x`` is out of bounds.
    """
    if isinstance(x, (bool, np.bool_)) or not isinstance(x, (numbers.Integral, np.integer)):
        raise TypeError(f"{_prefix(where)}{name} must be an integer, got {_describe(x)}")
    v = int(x)
    if v < minimum:
        raise ValueError(f"{_prefix(where)}{name} must be at least {minimum}, got {v}")
    if v > maximum:
        raise ValueError(f"{_prefix(where)}{name} must be at most {maximum}, got {v}")
    return v


def broadcast(names, arrays):
    """``np.broadcast_arrays`` with an error that names the arguments."""
    try:
        return np.broadcast_arrays(*arrays)
    except ValueError:
        shapes = ", ".join(f"{n} {np.shape(a)}" for n, a in zip(names, arrays))
        raise ValueError(f"{', '.join(names)} must broadcast together, got shapes {shapes}") from None


def _physical_memory() -> int:
    try:
        import os

        return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):
        return 2**40


def check_allocation(name: str, n_elements: int, itemsize: int) -> None:
    """Refuse outputs larger than the machine's memory (Rust would abort, not raise)."""
    need = int(n_elements) * int(itemsize)
    have = _physical_memory()
    if need > have:
        raise ValueError(
            f"{name} asks for an output of {need / 2**30:.3g} GiB, more than this machine's {have / 2**30:.3g} GiB"
        )


def finite_output(out: np.ndarray, blame: str, hint: str = "") -> np.ndarray:
    """Raise instead of returning NaN/inf produced from finite but extreme inputs."""
    if not np.all(np.isfinite(out)):
        raise ValueError(f"{blame}: the result overflowed or is undefined (non-finite values){hint}")
    return out


def dtype_choice(name: str, dtype, allowed) -> np.dtype:
    """Check that ``dtype`` names one of the ``allowed`` numpy dtypes and return it.

    Parameters
    ----------
    name : str
        Argument name used in the error message.
    dtype : object
        Anything :class:`numpy.dtype` accepts (a type, a name such as ``"complex64"``).
    allowed : sequence
        The dtypes accepted.

    Returns
    -------
    numpy.dtype

    Raises
    ------
    TypeError
        If ``dtype`` is not a dtype, or not one of ``allowed``. Every failure of
        :class:`numpy.dtype` is caught: for some strings and bytes numpy raises
        ``ValueError`` or even ``SyntaxError`` with a message that names no argument.
    """
    names = ", ".join(np.dtype(a).name for a in allowed)
    try:
        dt = np.dtype(dtype)
    except Exception:  # numpy's parser raises TypeError, ValueError, SyntaxError, ...
        raise TypeError(f"{name} must be one of {names}, got {_describe(dtype)}") from None
    if dt not in [np.dtype(a) for a in allowed]:
        raise TypeError(f"{name} must be one of {names}, got {dt}")
    return dt


def psd_array(name: str, x, ndim=(1, 2), *, allow_zero: bool = False) -> np.ndarray:
    """float64 PSD: positive or +inf (inf marks excluded bins), never NaN or negative.

    Zero (a bin without noise) is refused unless ``allow_zero``: only simulated noise
    can use it, since a filter weighs each bin by ``1/S``.
    """
    a = real_array(name, x, ndim=ndim, finite=False)
    if np.isnan(a).any():
        i = np.unravel_index(int(np.argmax(np.isnan(a))), a.shape)
        raise ValueError(f"{name} must not contain NaN, found one at index {i if a.ndim > 1 else i[0]}")
    bad = a < 0 if allow_zero else a <= 0
    if bad.any():
        i = np.unravel_index(int(np.argmax(bad)), a.shape)
        at = i if a.ndim > 1 else i[0]
        rule = "non-negative" if allow_zero else "positive"
        raise ValueError(f"{name} must be {rule} (use inf to exclude a bin), found {a[i]} at index {at}")
    return a


def choice(name: str, x, options) -> str:
    """Check that ``x`` is one of the strings in ``options`` (ValueError naming ``name`` if not)."""
    if not isinstance(x, str) or x not in options:
        raise ValueError(f"{name} must be one of {', '.join(map(repr, options))}, got {_describe(x)}")
    return x


def switch(name: str, x) -> bool:
    """``x`` as a bool, or a ``TypeError`` naming ``name`` (arrays, numbers and strings are not switches)."""
    if not isinstance(x, (bool, np.bool_)):
        raise TypeError(f"{name} must be True or False, got {x!r}")
    return bool(x)


def table_number(where: str, key: str, value, *, integer: bool = False, minimum=None, positive: bool = False):
    """Check a number read from a TOML table; a ``ValueError`` names the table and key otherwise.

    Parameters
    ----------
    where : str
        The file and table, e.g. ``"run.toml [network]"``.
    key : str
        The key as the file spells it.
    value : object
        What the file holds (TOML gives int or float).
    integer : bool, optional
        Require an integer (a float that happens to be whole is refused).
    minimum : float, optional
        Inclusive lower bound.
    positive : bool, optional
        Require ``value > 0``.

    Returns
    -------
    int or float

    Examples
    --------
    >>> from chirpsift._validate import table_number
    >>> table_number("run.toml [network]", "slides", 40, integer=True, minimum=0)
    40
    """
    if isinstance(value, bool) or not isinstance(value, (int, float)) or (integer and not isinstance(value, int)):
        kind = "an integer" if integer else "a number"
        raise ValueError(f"{where}: {key} must be {kind}, got {value!r}")
    if not math.isfinite(value) or (positive and value <= 0) or (minimum is not None and value < minimum):
        need = "positive" if positive else f">= {minimum}"
        raise ValueError(f"{where}: {key} must be a finite number {need}, got {value!r}")
    return int(value) if integer else float(value)
