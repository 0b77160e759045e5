"""The test run's own settings: reproducible property tests in CI, strict pytest options.

Outside reference: hypothesis' documented settings (``derandomize``, ``database``) and
pytest's configuration (``--strict-markers``, ``xfail_strict``, ``filterwarnings``);
that CI services set a ``CI`` variable is common practice.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

TESTS = Path(__file__).resolve().parent

# Draws 40 integers twice under the profile conftest.py selects and prints them with the
# profile's settings, in a fresh interpreter so the environment decides.
_DRAW = textwrap.dedent(
    """
    import json, sys
    sys.path.insert(0, sys.argv[1])
    import conftest  # noqa: F401  (selects the hypothesis profile)
    from hypothesis import given, settings, strategies as st

    seen = []

    @settings(max_examples=40)
    @given(st.integers(-10**9, 10**9))
    def draw(x):
        seen.append(x)

    draw()
    again = list(seen)
    seen.clear()
    draw()
    print(json.dumps({"derandomize": settings.default.derandomize,
                      "database": repr(settings.default.database), "seen": again, "again": seen}))
    """
)


def _draw(env_ci: str | None) -> dict:
    env = {k: v for k, v in os.environ.items() if k not in ("CI", "HYPOTHESIS_PROFILE")}
    if env_ci is not None:
        env["CI"] = env_ci
    proc = subprocess.run(
        [sys.executable, "-c", _DRAW, str(TESTS)], capture_output=True, text=True, env=env, timeout=120, check=False
    )
    assert proc.returncode == 0, proc.stderr[-2000:]
    return json.loads(proc.stdout.strip().splitlines()[-1])


def test_property_tests_are_derandomised_in_ci():
    first, second = _draw("true"), _draw("true")
    assert first["derandomize"] is True and first["database"] == "None"
    assert len(first["seen"]) == 40
    assert first["seen"] == first["again"] == second["seen"]


@pytest.mark.parametrize("value", [None, "false"])
def test_property_tests_are_random_outside_ci(value):
    run = _draw(value)
    assert run["derandomize"] is False and run["database"] != "None"
    # 40 draws from 2e9 integers: two independent runs agree with negligible probability
    assert run["seen"] != run["again"]


def test_warnings_are_errors_in_the_test_run():
    import warnings

    with pytest.raises(UserWarning, match="surfaces"):
        warnings.warn("a warning nobody expected surfaces as an error", UserWarning, stacklevel=1)


def test_strict_pytest_options_are_in_force(pytestconfig):
    assert pytestconfig.getini("xfail_strict") is True
    assert pytestconfig.getoption("strict_markers") is True
    assert "error" in pytestconfig.getini("filterwarnings")
