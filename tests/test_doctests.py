"""Run the docstring examples of the installed pointsift modules.

Collected through the importable package (not the source files), so the
examples run against what was installed, as the other tests do. Only
modules that have examples are listed, so no case passes vacuously.
"""

import doctest
import importlib
import pkgutil

import pytest

import pointsift

OPTIONS = doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE


def _modules_with_examples():
    finder = doctest.DocTestFinder()
    names = []
    for _, name, _ in pkgutil.walk_packages(pointsift.__path__, prefix="pointsift."):
        module = importlib.import_module(name)
        if any(test.examples for test in finder.find(module)):
            names.append(name)
    return sorted(names)


MODULES = _modules_with_examples()


def test_the_package_has_docstring_examples():
    # the public entry points carry examples (numpydoc habit, STYLE.md)
    assert {"pointsift.pipeline", "pointsift.config"} <= set(MODULES)


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    result = doctest.testmod(importlib.import_module(name), optionflags=OPTIONS, verbose=False)
    assert result.attempted > 0
    assert result.failed == 0, f"{result.failed} of {result.attempted} docstring examples failed in {name}"
