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
import types

import pytest

import decide


def _module_names() -> list[str]:
    found = pkgutil.walk_packages(decide.__path__, prefix="decide.")
    return ["decide", *sorted(m.name for m in found if m.name != "decide.__main__")]


def _failures(module: types.ModuleType) -> tuple[int, str]:
    """Run the module's docstring examples (globals: a copy of the module's); failures and report."""
    # ELLIPSIS as pytest's doctest runner uses by default.
    finder, report = doctest.DocTestFinder(exclude_empty=True), io.StringIO()
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS)
    for test in finder.find(module, module.__name__):
        runner.run(test, out=report.write)
    return runner.summarize(verbose=False).failed, report.getvalue()


@pytest.mark.parametrize("name", _module_names())
def test_docstring_examples_run(name: str) -> None:
    failed, report = _failures(importlib.import_module(name))
    assert failed == 0, report


def test_the_runner_finds_examples_and_fails_on_a_wrong_one() -> None:
    # The engine's power() documents itself with examples ...
    module = importlib.import_module("decide.engine.power")
    tests = doctest.DocTestFinder(exclude_empty=True).find(module, module.__name__)
    assert sum(len(t.examples) for t in tests) > 0
    # ... and a wrong example is caught.
    wrong = types.ModuleType("wrong", "An example that does not hold.\n\n>>> 1 + 1\n3\n")
    failed, report = _failures(wrong)
    assert failed == 1 and "Expected:\n    3\nGot:\n    2" in report
