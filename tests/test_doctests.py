"""The examples in the docstrings of the ``decide`` that is imported run as written.

Collected here, rather than with ``--doctest-modules`` over the checkout's
folder, so that they run against the same ``decide`` as the rest of the suite
(after ``pip install .``, the installed copy).
"""

from __future__ import annotations

import doctest
import importlib
import io
import pkgutil

import pytest

import decide


def _module_names() -> list[str]:
    found = pkgutil.walk_packages(decide.__path__, prefix="decide.")
    return ["decide", *sorted(m.name for m in found if m.name != "decide.__main__")]


@pytest.mark.parametrize("name", _module_names())
def test_docstring_examples_run(name: str) -> None:
    module = importlib.import_module(name)
    # ELLIPSIS as pytest's doctest runner uses by default.
    finder, report = doctest.DocTestFinder(exclude_empty=True), io.StringIO()
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS)
    for test in finder.find(module, name):  # globals: a copy of the module's
        runner.run(test, out=report.write)
    result = runner.summarize(verbose=False)
    assert result.failed == 0, report.getvalue()


def test_the_examples_are_found() -> None:
    # A check that the finder looks where the examples are: the engine's
    # power() documents itself with examples.
    module = importlib.import_module("decide.engine.power")
    tests = doctest.DocTestFinder(exclude_empty=True).find(module, module.__name__)
    assert sum(len(t.examples) for t in tests) > 0
