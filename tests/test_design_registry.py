"""Designs are named once, in the registry, and asked for capabilities, never tested by name.

Every list of designs a user sees (the command line's choices, the scenario
schema's enum, the README's table, the scenario template) is checked here
against :data:`decide.designs.DESIGNS`, and the code outside
``decide/designs/`` is read (with :mod:`ast`) to show it never compares a
value with a design's name nor infers one group from a missing label.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

from typer.testing import CliRunner

from decide.cli import app
from decide.designs import DESIGNS
from decide.scenario import scenario_json_schema

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "decide"


def test_command_line_design_choices_are_the_registry() -> None:
    for command in ("solve", "audit"):
        res = CliRunner().invoke(app, [command, "--help"], env={"COLUMNS": "200"})
        (choices,) = re.findall(r"--design [<\[]([^>\]]*)[>\]]", res.stdout)
        assert choices.split("|") == list(DESIGNS)
    bad = CliRunner().invoke(app, ["solve", "--design", "cohort", "--baseline", "0.1"])
    assert bad.exit_code == 2
    assert ", ".join(repr(name) for name in DESIGNS) in bad.stderr


def test_schema_enum_is_the_registry() -> None:
    study = scenario_json_schema()["$defs"]["StudyModel"]["properties"]
    assert study["design"]["enum"] == list(DESIGNS)
    for name, d in DESIGNS.items():
        assert f"{name}: {d.title}." in study["design"]["description"]
        assert f"{name}: {d.baseline_name}." in study["baseline"]["description"]


def test_readme_table_is_the_registry() -> None:
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    rows = [line for line in readme.splitlines() if line.startswith("| `") and line.count("|") == 7]
    want = [
        f"| `{name}` | {d.title} | {d.baseline_name} | {d.effect_name} | {d.size_name} | {d.allocation_name or '-'} |"
        for name, d in DESIGNS.items()
    ]
    assert rows == want


def test_every_design_states_its_capabilities() -> None:
    for name, d in DESIGNS.items():
        assert d.name == name
        assert d.groups in (1, 2)
        assert (d.allocation_name is None) == (d.groups == 1)
        assert d.exact_test in ("fisher", "binomial", "poisson")
        assert isinstance(d.uses_years, bool) and isinstance(d.binomial_groups, bool)


def _offences(path: Path) -> list[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Compare):
            for side in [node.left, *node.comparators]:
                if isinstance(side, ast.Constant) and side.value in DESIGNS:
                    found.append(f"{path.name}:{node.lineno} compares with the design name {side.value!r}")
                if isinstance(side, ast.Attribute) and side.attr == "allocation_name":
                    found.append(f"{path.name}:{node.lineno} infers the groups from allocation_name")
        if isinstance(node, ast.Dict):
            for key in node.keys:
                if isinstance(key, ast.Constant) and key.value in DESIGNS:
                    found.append(f"{path.name}:{node.lineno} keys a table on the design name {key.value!r}")
    return found


#: Tables keyed by design name outside ``decide/designs/``, each a table of one
#: extension per design in its own layer (not a test on a name): the
#: after-study readers of ``decide interpret`` and the words for their methods.
KEYED_TABLES = {"observed.py", "interpret.py"}
#: The Monte Carlo check of ``decide simulate`` shares no code with the designs
#: on purpose (it is the independent check of their power), so it states each
#: design's sampling and test itself and names the designs it can draw.
INDEPENDENT = {"simulate.py"}


def test_no_code_outside_the_designs_tests_a_design_by_name() -> None:
    files = [
        p for p in PACKAGE.rglob("*.py") if "designs" not in p.relative_to(PACKAGE).parts and p.name not in INDEPENDENT
    ]
    assert len(files) > 20
    offences = [o for p in files for o in _offences(p)]
    offences = [o for o in offences if not (o.split(":")[0] in KEYED_TABLES and "keys a table" in o)]
    assert offences == []


def test_every_design_names_its_groups() -> None:
    """The words the screens use for a design's groups come from the design (one group: no comparison)."""
    from decide.designs import DESIGNS

    for d in DESIGNS.values():
        assert d.size_name
        assert (d.comparison_name is None) == (d.groups == 1) == (d.allocation_name is None), d.name
