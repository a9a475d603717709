"""The package's layers import only inward (as drawn in DEVELOPERS.md).

``designs`` <- ``engine`` <- ``decision`` <- ``scenario``, ``report`` <- ``cli``;
the foundation (``errors``, ``_checks``, ``_results``) may be imported by any
layer and imports no layer.  ``decide/__init__.py`` and ``__main__.py`` are the
package's front door and may import anything.  Imports inside functions count
too: a lazy import is still a dependency.
"""

from __future__ import annotations

import ast
from pathlib import Path

import decide

PACKAGE = Path(decide.__file__).parent

#: rank of each layer; a module may import its own layer and lower ranks
RANK = {"foundation": 0, "designs": 1, "engine": 2, "decision": 3, "scenario": 4, "report": 5, "cli": 6}
FOUNDATION = {"errors", "_checks", "_results"}
FRONT_DOOR = {"__init__", "__main__"}


def _layer(parts: tuple[str, ...]) -> str | None:
    """The layer of a module given its dotted parts below ``decide``."""
    if not parts or parts[0] in FRONT_DOOR:
        return None
    if parts[0] in FOUNDATION:
        return "foundation"
    if parts[0] == "cli":
        return "cli"
    return parts[0] if parts[0] in RANK else None


def _imported(path: Path) -> list[tuple[int, tuple[str, ...]]]:
    """(line, dotted parts below ``decide``) of every import of our own modules."""
    here = path.relative_to(PACKAGE).with_suffix("").parts
    package = here[:-1] if here[-1] != "__init__" else here[:-1]
    found = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - (node.level - 1)] if node.level > 1 else package
                target = base + tuple((node.module or "").split(".")) if node.module else base
                names = [target + (a.name,) for a in node.names] if not node.module else [target]
            elif node.module and node.module.split(".")[0] == "decide":
                names = [tuple(node.module.split(".")[1:])]
            else:
                continue
            found += [(node.lineno, tuple(p for p in n if p)) for n in names]
        elif isinstance(node, ast.Import):
            for a in node.names:
                if a.name.split(".")[0] == "decide":
                    found.append((node.lineno, tuple(a.name.split(".")[1:])))
    return found


def _violations() -> list[str]:
    out = []
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = path.relative_to(PACKAGE).with_suffix("").parts
        mine = _layer(parts)
        if mine is None:
            continue
        for line, target in _imported(path):
            theirs = _layer(target)
            if theirs is None or theirs == mine:
                continue
            if RANK[theirs] > RANK[mine] or (mine == "foundation" and theirs != "foundation"):
                out.append(f"{'/'.join(parts)}.py:{line} ({mine}) imports {'.'.join(target)} ({theirs})")
    return out


def test_every_module_has_a_layer() -> None:
    tops = {p.relative_to(PACKAGE).parts[0].removesuffix(".py") for p in PACKAGE.rglob("*.py")}
    unplaced = {t for t in tops if t not in RANK and t not in FOUNDATION and t not in FRONT_DOOR and t != "cli"}
    assert unplaced == set()


def test_layers_import_only_inward() -> None:
    assert _violations() == []


def test_the_check_sees_a_violation() -> None:
    """The checker itself can fail: an engine module importing the decision layer is caught."""
    tree = "from ..decision.optimize import optimize\n"
    node = ast.parse(tree).body[0]
    assert isinstance(node, ast.ImportFrom) and node.level == 2
    # an outward import, resolved the way _imported resolves it for decide/engine/power.py
    target = ("engine",)[: 1 - (node.level - 1)] + tuple((node.module or "").split("."))
    mine, theirs = _layer(("engine", "power")), _layer(target)
    assert mine == "engine" and theirs == "decision" and RANK[theirs] > RANK[mine]
