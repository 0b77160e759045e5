"""Fixtures of the pytest-benchmark suite (``pytest bench/ --benchmark-only``).

The suite is not part of the test run (``testpaths = ["tests"]``). Every group times a
compiled kernel, its ``chirpsift.reference`` twin and a bare inverse FFT of the
kernel's transform length on the standard workloads of :mod:`chirpsift.benchmarks`;
``bench/ratios.py`` turns ``--benchmark-json`` output into per-group ratios.
"""

import pytest

from chirpsift import benchmarks


def pytest_addoption(parser):
    group = parser.getgroup("chirpsift bench")
    group.addoption("--bench-scale", type=float, default=benchmarks.FULL_DATA_SCALE,
                    help="workload scale (default %(default)s: full data lengths, few templates)")
    group.addoption("--bench-threads", type=int, default=1,
                    help="threads of the compiled kernels (default 1, like the yardstick)")
    group.addoption("--bank-region-b", action="store_true", default=False,
                    help="also place and check region (b) of the bank targets (hours on 2 cores)")


@pytest.fixture(scope="session")
def scale(request):
    """Workload scale."""
    return request.config.getoption("--bench-scale")


@pytest.fixture(scope="session", autouse=True)
def threads(request):
    """Pin the kernels' thread count for the session, restoring it afterwards."""
    import chirpsift

    before = chirpsift.get_threads()
    n = request.config.getoption("--bench-threads")
    chirpsift.set_threads(n)
    yield n
    chirpsift.set_threads(before)


@pytest.fixture(scope="session")
def w1(scale):
    """Standard workload W1 (see :func:`chirpsift.benchmarks.workload`)."""
    return benchmarks.workload("W1", scale)


@pytest.fixture(scope="session")
def w2(scale):
    """Standard workload W2."""
    return benchmarks.workload("W2", scale)


@pytest.fixture(scope="session")
def w1_templates(w1):
    """W1's templates as a ``(K, n_freq)`` complex64 array (generated once)."""
    import chirpsift

    b = w1.bank
    return chirpsift.taylorf2(b.m1, b.m2, f_low=w1.f_low, df=w1.df, n_freq=w1.n_freq)

