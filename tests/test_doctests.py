"""Every Examples section of the installed package runs and shows what it says.

Walks the modules of the imported ``chirpsift`` (the installed package in CI, where
the source tree lacks the compiled core) and runs each module's doctests with
:mod:`doctest`. Examples must be self-contained (they import what they use); each
module's run happens in a fresh scratch folder as the working directory, so examples
may write files by relative name.
"""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import chirpsift

OPTIONS = doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE


def _module_names() -> list[str]:
    names = [chirpsift.__name__]
    for info in pkgutil.walk_packages(chirpsift.__path__, prefix=chirpsift.__name__ + "."):
        if info.name.rsplit(".", 1)[-1] == "__main__":
            continue  # importing it would run the program
        names.append(info.name)
    return sorted(names)


MODULES = _module_names()


def test_the_walk_finds_the_package():
    # the compiled core and the subpackages are visited, not only the top level
    assert {"chirpsift._core", "chirpsift.io.strain", "chirpsift.reference"} <= set(MODULES)


def test_examples_exist_and_are_collected():
    finder = doctest.DocTestFinder(exclude_empty=True)
    found = {
        name: sum(len(t.examples) for t in finder.find(importlib.import_module(name))) for name in MODULES
    }
    assert found["chirpsift.io.strain"] > 0 and found["chirpsift.synthetic"] > 0


@pytest.mark.parametrize("name", MODULES)
def test_module_examples(name, tmp_path, monkeypatch):
    module = importlib.import_module(name)
    monkeypatch.chdir(tmp_path)
    finder = doctest.DocTestFinder(exclude_empty=True)
    runner = doctest.DocTestRunner(optionflags=OPTIONS)
    report: list[str] = []
    failed = sum(runner.run(test, out=report.append).failed for test in finder.find(module, name, globs={}))
    assert failed == 0, "".join(report)
