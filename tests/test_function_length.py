"""No function in ``decide/`` is over :data:`LONGEST` lines of code.

A function's length runs from its ``def`` line to the end of its body, as
``ast`` gives it (``end_lineno - lineno + 1``), nested functions included
and its docstring left out: a public function's numpydoc docstring
(parameters, references, examples) is documentation, and shortening it
would not make the code any shorter.  Long functions are split into named
helpers (DEVELOPERS.md, "short functions").
"""

from __future__ import annotations

import ast
from pathlib import Path

import decide

PACKAGE = Path(decide.__file__).parent
#: The most lines of code a function may have.
LONGEST = 60


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


def _length(node: ast.FunctionDef | ast.AsyncFunctionDef) -> int:
    """Lines from ``def`` to the end of the body, less the docstring's lines."""
    assert node.end_lineno is not None
    lines = node.end_lineno - node.lineno + 1
    first = node.body[0]
    if isinstance(first, ast.Expr) and isinstance(first.value, ast.Constant) and isinstance(first.value.value, str):
        assert first.end_lineno is not None
        lines -= first.end_lineno - first.lineno + 1
    return lines


def _lengths() -> dict[str, tuple[str, int]]:
    """``module.qualname`` -> (``path:line``, length) of every function under ``decide/``."""
    out: dict[str, tuple[str, int]] = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        rel = path.relative_to(PACKAGE)
        module = ".".join(rel.with_suffix("").parts)
        for name, node in _functions(ast.parse(path.read_text(encoding="utf-8"))):
            out[f"{module}.{name}"] = (f"decide/{rel.as_posix()}:{node.lineno}", _length(node))
    return out


def test_the_counting_sees_nested_functions_and_methods_and_leaves_out_docstrings() -> None:
    source = (
        'def f():\n    """Two\n    lines."""\n    def g():\n        pass\n\n'
        "class C:\n    def m(self):\n        return 1\n"
    )
    named = {name: _length(n) for name, n in _functions(ast.parse(source))}
    assert named == {"f": 3, "f.<locals>.g": 2, "C.m": 2}


def test_no_function_over_the_limit() -> None:
    lengths = _lengths()
    assert len(lengths) > 100  # the walk found the package
    too_long = [f"{where} {name} {n}" for name, (where, n) in lengths.items() if n > LONGEST]
    assert not too_long, f"functions over {LONGEST} lines of code:\n" + "\n".join(too_long)
