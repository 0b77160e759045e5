"""Shared fixtures: every physics and scipy-comparison test runs against both
implementations of the kernels, the compiled one (``chirpsift``) and the
pure-numpy twin (``chirpsift.reference``)."""

import importlib

import numpy as np
import pytest

_MODULES = {"rust": "chirpsift", "reference": "chirpsift.reference"}


@pytest.fixture(params=["rust", "reference"], ids=["rust", "reference"])
def impl(request):
    """The kernel namespace under test. The compiled one is never skipped:
    if it cannot be imported the test errors, so a missing build is loud."""
    return importlib.import_module(_MODULES[request.param])


@pytest.fixture
def ref():
    """The pure-numpy reference, for comparisons against the direct formula."""
    return importlib.import_module("chirpsift.reference")


@pytest.fixture
def rng():
    """A fresh generator with a fixed seed, so every test is reproducible."""
    return np.random.default_rng(20240611)
