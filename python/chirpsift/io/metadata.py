"""A strain file's own sample rate and start time, settled against the values a caller gives.

One rule for every reader (:func:`chirpsift.io.read_strain` and the catalogue's header
readers): a value stored in the file is used unless the caller gives one; a given value
must agree with the stored one to :data:`TIME_STEP_TOLERANCE` of a sample over the file,
else it is an error naming both; a value neither stored nor given is an error saying how
to supply it.
"""

from __future__ import annotations

import numpy as np

from .._validate import positive_scalar, real_scalar

__all__ = ["TIME_STEP_TOLERANCE", "import_h5py", "metadata_name", "settle_sample_rate", "settle_t0",
           "stored_number"]

#: Largest disagreement between two times that name the same sample, as a fraction of the
#: sampling step: a tenth keeps every sample unambiguous while tolerating times stored in
#: decimal with a few significant digits (common practice for text and attribute values).
TIME_STEP_TOLERANCE = 0.1


def import_h5py():
    """Import the optional ``h5py`` module, or raise an ImportError saying how to install it."""
    try:
        import h5py
    except ImportError as exc:
        raise ImportError(
            "reading HDF5 strain files needs the optional h5py package: pip install chirpsift[hdf5]"
        ) from exc
    return h5py


def stored_number(value, origin: str, where: str) -> float:
    """One real number stored in a file (a scalar or a single-element array), as a float.

    ``origin`` says where the file keeps it ("attribute 't0'") and ``where`` names the file,
    both for the message of the ValueError raised otherwise.
    """
    arr = np.asarray(value)
    if arr.size != 1 or arr.dtype.kind not in "iuf":
        shown = repr(value)
        shown = shown if len(shown) <= 60 else shown[:57] + "..."
        raise ValueError(f"{where}: {origin} must hold one real number, got {shown}")
    return float(arr.reshape(()))


def metadata_name(name: str, value) -> str:
    """Check a name of an array or attribute (``sample_rate_attr``, ``t0_attr``): a non-empty string."""
    if not isinstance(value, str) or not value:
        raise TypeError(f"{name} must be a non-empty string, got {value!r}")
    return value


def settle_sample_rate(stored, given, n: int, *, where: str, origin: str, missing: str) -> float:
    """Settle the sample rate (Hz) of an ``n``-sample file: ``stored`` in it (or None) against ``given``.

    They agree when the file's last sample lands within :data:`TIME_STEP_TOLERANCE` of a
    step of the same time under both rates. ``missing`` says how to supply a rate the file
    lacks.
    """
    if stored is None:
        if given is None:
            raise ValueError(f"{where}: no sample rate: {missing}")
        return given
    stored = positive_scalar(origin, stored, where=where)
    if given is None:
        return stored
    steps = max(n - 1, 1)
    if abs(steps / given - steps / stored) > TIME_STEP_TOLERANCE / stored:
        raise ValueError(
            f"{where}: sample_rate={given!r} Hz (the sample_rate argument, --sample-rate) conflicts with "
            f"{stored!r} Hz from the file's {origin}; leave it out to use the file's value"
        )
    return given


def settle_t0(stored, given, sample_rate: float, *, where: str, origin: str, missing: str | None) -> float:
    """Settle the start time (s): ``stored`` in the file (or None) against ``given`` (or None).

    They agree within :data:`TIME_STEP_TOLERANCE` of a sample. ``missing`` says how to
    supply a start time the file lacks; None means the format holds none and time counts
    from 0.
    """
    if stored is None:
        if given is not None:
            return given
        if missing is None:
            return 0.0
        raise ValueError(f"{where}: no start time: {missing}")
    stored = real_scalar(origin, stored, where=where)
    if given is None:
        return stored
    if abs(given - stored) > TIME_STEP_TOLERANCE / sample_rate:
        raise ValueError(
            f"{where}: t0={given!r} s (the t0 argument, --t0) conflicts with {stored!r} s from the "
            f"file's {origin}; leave it out to use the file's value"
        )
    return given
