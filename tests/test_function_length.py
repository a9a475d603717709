"""No function in ``decide/`` is over :data:`LONGEST` lines.

A function's length is counted as ``ast`` gives it: from its ``def`` line to
the end of its body, docstring and nested functions included
(``end_lineno - lineno + 1``).  Long functions are split into named helpers
(DEVELOPERS.md, "short functions").
"""

from __future__ import annotations

import ast
from pathlib import Path

import decide

PACKAGE = Path(decide.__file__).parent
#: The most lines a function may have.
LONGEST = 60

#: Functions known to be over the limit while they are being split elsewhere,
#: as ``module.qualname`` below ``decide``.  This set must stay empty once the
#: splits have landed (it is now); a name in it that is no longer long fails the
#: test until it is taken out, so the set cannot go stale.
PENDING: set[str] = set()


def _functions(tree: ast.Module) -> list[tuple[str, ast.FunctionDef | ast.AsyncFunctionDef]]:
    """Every function and method of a module with its qualified name, nested ones too."""
    found: list[tuple[str, ast.FunctionDef | ast.AsyncFunctionDef]] = []

    def visit(node: ast.AST, prefix: str) -> None:
        for child in ast.iter_child_nodes(node):
            if isinstance(child, ast.FunctionDef | ast.AsyncFunctionDef):
                found.append((prefix + child.name, child))
                visit(child, f"{prefix}{child.name}.<locals>.")
            elif isinstance(child, ast.ClassDef):
                visit(child, f"{prefix}{child.name}.")
            else:
                visit(child, prefix)

    visit(tree, "")
    return found


def _lengths() -> dict[str, tuple[str, int]]:
    """``module.qualname`` -> (``path:line``, length) of every function under ``decide/``."""
    out: dict[str, tuple[str, int]] = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        rel = path.relative_to(PACKAGE)
        module = ".".join(rel.with_suffix("").parts)
        for name, node in _functions(ast.parse(path.read_text(encoding="utf-8"))):
            assert node.end_lineno is not None
            out[f"{module}.{name}"] = (f"decide/{rel.as_posix()}:{node.lineno}", node.end_lineno - node.lineno + 1)
    return out


def test_the_counting_sees_nested_functions_and_methods() -> None:
    tree = ast.parse("def f():\n    def g():\n        pass\n\nclass C:\n    def m(self):\n        return 1\n")
    named = {name: n.end_lineno - n.lineno + 1 for name, n in _functions(tree) if n.end_lineno is not None}
    assert named == {"f": 3, "f.<locals>.g": 2, "C.m": 2}


def _over_limit(lengths: dict[str, tuple[str, int]], pending: set[str]) -> list[str]:
    """``path:line name length`` of each function over the limit and not pending."""
    return [
        f"{where} {name} {length}"
        for name, (where, length) in lengths.items()
        if length > LONGEST and name not in pending
    ]


def _stale(lengths: dict[str, tuple[str, int]], pending: set[str]) -> list[str]:
    """Pending names that are no longer over the limit, or no longer exist."""
    return sorted(name for name in pending if name not in lengths or lengths[name][1] <= LONGEST)


def test_the_checks_flag_long_functions_and_stale_pending_names() -> None:
    lengths = {"a.f": ("decide/a.py:1", LONGEST + 1), "a.g": ("decide/a.py:9", LONGEST)}
    assert _over_limit(lengths, set()) == [f"decide/a.py:1 a.f {LONGEST + 1}"]
    assert _over_limit(lengths, {"a.f"}) == []
    assert _stale(lengths, {"a.f", "a.g", "a.h"}) == ["a.g", "a.h"]


def test_no_function_over_the_limit() -> None:
    lengths = _lengths()
    assert len(lengths) > 100  # the walk found the package
    too_long = _over_limit(lengths, PENDING)
    assert not too_long, f"functions over {LONGEST} lines:\n" + "\n".join(too_long)


def test_pending_names_are_still_long() -> None:
    stale = _stale(_lengths(), PENDING)
    assert not stale, "no longer over the limit (or gone): take them out of PENDING: " + ", ".join(stale)
