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


def _examples(name):
    module = importlib.import_module(name)
    runnable = [
        test for test in doctest.DocTestFinder().find(module)
        if any(not example.options.get(doctest.SKIP) for example in test.examples)
    ]
    return runnable  # examples marked +SKIP (need files or a browser) do not count


MODULES = sorted(
    name for _, name, _ in pkgutil.walk_packages(pointsift.__path__, prefix="pointsift.") if _examples(name)
)


def test_the_package_has_docstring_examples():
    # the public entry points carry examples (numpydoc habit, STYLE.md)
    assert {"pointsift.pipeline", "pointsift.config"} <= set(MODULES)


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    runner = doctest.DocTestRunner(optionflags=OPTIONS)
    for test in _examples(name):
        runner.run(test)
    result = runner.summarize(verbose=False)
    assert result.attempted > 0
    assert result.failed == 0, f"{result.failed} of {result.attempted} docstring examples failed in {name}"
