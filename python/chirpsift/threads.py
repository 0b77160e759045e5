"""Process-wide worker thread count for every kernel."""

from __future__ import annotations

from . import _core
from ._validate import integer

__all__ = ["set_threads", "get_threads"]


def set_threads(n):
    """Set the number of worker threads all kernels use from now on.

    Parameters
    ----------
    n : int
        1 or more. The default comes from the ``CHIRPSIFT_THREADS`` environment
        variable, else the number of CPUs. Results are bitwise identical for any
        thread count: work is split per template or channel and reduced in a fixed
        order.
    """
    _core.set_threads(integer("n", n, maximum=_core.MAX_THREADS))


def get_threads():
    """The number of worker threads kernels use."""
    return _core.get_threads()
