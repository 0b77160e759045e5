"""The linter's verdict on the package and the tests, as CI sees it.

Runs ``ruff check`` with the configuration in ``pyproject.toml`` (line length 120,
pycodestyle, pyflakes and numpydoc docstring rules with the numpy convention) over
``python/`` and ``tests/``. Ruff is part of the ``test`` extra.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def _ruff(*args: str, stdin: str | None = None) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "ruff", *args],
        cwd=ROOT,
        input=stdin,
        capture_output=True,
        text=True,
        timeout=300,
        check=False,
    )


def test_ruff_is_installed():
    proc = _ruff("--version")
    assert proc.returncode == 0, f"ruff is not installed for {sys.executable}: pip install '.[test]'\n{proc.stderr}"


def test_ruff_check_passes_on_package_and_tests():
    proc = _ruff("check", "--no-cache", "--output-format", "concise", "python", "tests")
    assert proc.returncode == 0, f"ruff check found problems:\n{proc.stdout}{proc.stderr}"


def _probe(source: str) -> str:
    """Ruff's findings on ``source`` as if it were a module of the package ("" if none)."""
    proc = _ruff("check", "--no-cache", "--output-format", "concise", "--stdin-filename",
                 "python/chirpsift/probe.py", "-", stdin=source)
    assert proc.returncode in (0, 1), proc.stderr
    return proc.stdout if proc.returncode else ""


def test_ruff_uses_the_project_configuration():
    # the project's settings are in force: 120 columns (ruff's default is 88) and
    # numpydoc docstring rules for public functions of the package
    line_100 = '"""Probe."""\n\nX = "' + "x" * 94 + '"\n'
    line_130 = '"""Probe."""\n\nX = "' + "x" * 124 + '"\n'
    assert "E501" not in _probe(line_100)
    assert "E501" in _probe(line_130)
    assert "D103" in _probe('"""Probe."""\n\n\ndef shown():\n    return 1\n')
    numpy_style = '"""Probe."""\n\n\ndef shown(a):\n    """Return a.\n\n    Parameters\n    ----------\n' \
        '    a : int\n        A number.\n\n    Returns\n    -------\n    int\n    """\n    return a\n'
    assert _probe(numpy_style) == ""
