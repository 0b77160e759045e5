"""Shared fixtures and the hypothesis profiles.

Every physics and scipy-comparison test runs against both implementations of the
kernels, the compiled one (``chirpsift``) and the pure-numpy twin
(``chirpsift.reference``).

Property-based tests draw fresh random examples on every local run (and keep failures
in hypothesis' example database), which is how they find new bugs. In CI (the ``CI``
environment variable set to anything but ``""``, ``0`` or ``false``) the ``ci`` profile
derandomises them: the examples come from a fixed seed per test, no database is read or
written, so a CI run's outcome never depends on luck and a failure reproduces exactly.
``HYPOTHESIS_PROFILE=ci`` (or ``dev``) chooses a profile explicitly.
"""

import importlib
import os

import numpy as np
import pytest
from hypothesis import settings

# Explicit parents: recent hypothesis versions load their own "ci" profile when they see
# a CI variable, and a profile registered without a parent would inherit from it.
settings.register_profile("dev", settings.get_profile("default"))
settings.register_profile("ci", settings.get_profile("default"), derandomize=True, database=None, print_blob=True)


def _hypothesis_profile() -> str:
    chosen = os.environ.get("HYPOTHESIS_PROFILE")
    if chosen:
        return chosen
    return "ci" if os.environ.get("CI", "").strip().lower() not in ("", "0", "false", "no") else "dev"


settings.load_profile(_hypothesis_profile())

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
