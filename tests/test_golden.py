"""Golden screens of every human-facing command, and checks no regeneration can erase.

Each command below runs through the command line at terminal widths 80, 100,
120 and 140 (``COLUMNS`` set, output not a terminal, so no colour) and its
stdout is compared with ``tests/golden/<case>-<width>.txt``.

To regenerate the golden files after an intended change of wording or layout::

    DECIDE_REGENERATE_GOLDEN=1 python -m pytest tests/test_golden.py

then read the diff (``git diff tests/golden``) before committing it.

The structural checks run on the same output and do not depend on its exact
text: no line wider than the terminal, every boxed line closed by its right
border, no heading or cell shortened with an ellipsis, no e-notation in a
table, money in a compare table as its JSON value with the right suffix, and
every policy name a user must type shown in full.
"""

from __future__ import annotations

import dataclasses
import functools
import io
import json
import os
import re
from collections.abc import Callable, Iterator, Mapping
from pathlib import Path
from typing import Any

import pytest
from rich.cells import cell_len
from typer.testing import CliRunner

from decide import cli
from decide.cli import app
from decide.decision import interpret as interpret_module
from decide.report import numbers as nb
from decide.scenario import BUILTIN_ORDER

REPO = Path(__file__).resolve().parents[1]
GOLDEN = Path(__file__).resolve().parent / "golden"
REGENERATE = os.environ.get("DECIDE_REGENERATE_GOLDEN") == "1"
WIDTHS = (80, 100, 120, 140)
SCENARIOS = {p.stem: p for p in sorted((REPO / "scenarios").glob("*.toml"))}

CASES: dict[str, list[str]] = {
    "solve-cohort-risk-size": [
        "solve",
        "--design",
        "cohort-risk",
        "--baseline",
        "8e-4",
        "--effect",
        "3",
        "--alpha",
        "0.05",
        "--power",
        "0.8",
    ],
    "solve-cohort-rate-power-normal": [
        "solve",
        "--design",
        "cohort-rate",
        "--baseline",
        "5e-5",
        "--years",
        "5",
        "--effect",
        "2.5",
        "--alpha",
        "0.05",
        "--n-per-group",
        "30000",
        "--test",
        "normal",
    ],
    "solve-reference-rate-effect": [
        "solve",
        "--design",
        "reference-rate",
        "--baseline",
        "3e-5",
        "--alpha",
        "0.05",
        "--power",
        "0.8",
        "--n-per-group",
        "9000",
        "--years",
        "8",
    ],
    "audit-cohort-risk": [
        "audit",
        "--design",
        "cohort-risk",
        "--baseline",
        "8e-4",
        "--alpha",
        "0.05",
        "--effect",
        "3",
        "--p-harm",
        "0.15",
        "--per-subject",
        "250",
        "--n-per-group",
        "2150",
        "--unit",
        "EUR",
    ],
    "policies": ["policies"],
}
for _stem, _path in SCENARIOS.items():
    CASES[f"optimize-{_stem}"] = ["optimize", str(_path.relative_to(REPO))]
    CASES[f"compare-{_stem}"] = ["compare", str(_path.relative_to(REPO))]
    _data = REPO / "scenarios" / "observed" / _path.name
    if _data.exists():  # the after-study reading of the invented counts bundled with it
        CASES[f"interpret-{_stem}"] = ["interpret", str(_path.relative_to(REPO))]
        CASES[f"interpret-{_stem}"] += ["--data", str(_data.relative_to(REPO))]

#: Left and right border characters of rich's boxes (tables and panels).
LEFT_EDGES = "┌┏├┡┣│┃└┗╭╰"
RIGHT_EDGES = "┐┓┤┨┩┫┥┘┛│┃╮╯"
E_NOTATION = re.compile(r"\d(\.\d+)?e[+-]?\d")


def invoke(args: list[str], width: int) -> Any:
    env = {"COLUMNS": str(width), "LINES": "60", "NO_COLOR": "1", "FORCE_COLOR": None, "TTY_COMPATIBLE": None}
    result = CliRunner().invoke(app, args, env=env)
    assert result.exit_code == 0, result.stdout + result.stderr
    return result


def remembered(call: Callable[..., Any]) -> Callable[..., Any]:
    """``call`` computing each distinct question once: the four widths render one result."""
    seen: dict[str, Any] = {}

    def again(*args: Any, **kwargs: Any) -> Any:
        key = repr((args, sorted(kwargs.items())))
        if key not in seen:
            seen[key] = call(*args, **kwargs)
        return seen[key]

    return again


@functools.cache
def case_screens(name: str) -> dict[int, str]:
    """One case at every width (run in the repository, so file names print the same everywhere).

    The computations behind the command line are remembered between widths;
    everything from the command line's parsing to the rendered text runs anew
    at each width.  Each case runs when a test first asks for it, so the
    cases spread over the test workers.
    """
    with pytest.MonkeyPatch.context() as mp:
        for attr in ("_solve", "_optimize", "_compare", "_audit"):
            mp.setattr(cli, attr, remembered(getattr(cli, attr)))
        mp.setattr(interpret_module, "interpret", remembered(interpret_module.interpret))
        mp.chdir(REPO)
        return {w: invoke(CASES[name], w).stdout for w in WIDTHS}


class Screens(Mapping[tuple[str, int], str]):
    """Every case at every width, each case run on first use (see :func:`case_screens`)."""

    def __getitem__(self, key: tuple[str, int]) -> str:
        name, width = key
        return case_screens(name)[width]

    def __iter__(self) -> Iterator[tuple[str, int]]:
        return iter([(name, w) for name in CASES for w in WIDTHS])

    def __len__(self) -> int:
        return len(CASES) * len(WIDTHS)


@pytest.fixture
def screens() -> Screens:
    return Screens()


PAIRS = [(name, w) for name in CASES for w in WIDTHS]
IDS = [f"{name}-{w}" for name, w in PAIRS]


@pytest.mark.parametrize(("name", "width"), PAIRS, ids=IDS)
def test_golden_screen(screens: Screens, name: str, width: int) -> None:
    path = GOLDEN / f"{name}-{width}.txt"
    text = screens[name, width]
    if REGENERATE:
        GOLDEN.mkdir(exist_ok=True)
        path.write_text(text, encoding="utf-8")
    assert path.exists(), f"no golden file {path.name}; run with DECIDE_REGENERATE_GOLDEN=1"
    assert text == path.read_text(encoding="utf-8"), f"{name} at {width} columns differs from {path.name}"


def boxed_blocks(text: str) -> list[tuple[str, list[str]]]:
    """(kind, lines) for each box in the output: kind "table" or "panel"."""
    blocks: list[tuple[str, list[str]]] = []
    for line in text.splitlines():
        stripped = line.rstrip()
        if stripped[:1] in "┌┏╭":
            blocks.append(("panel" if stripped[0] == "╭" else "table", [stripped]))
        elif blocks and stripped[:1] in LEFT_EDGES and blocks[-1][1][-1][:1] not in "└┗╰":
            blocks[-1][1].append(stripped)
    return blocks


@pytest.mark.parametrize(("name", "width"), PAIRS, ids=IDS)
def test_nothing_is_cropped(screens: Screens, name: str, width: int) -> None:
    text = screens[name, width]
    for line in text.splitlines():
        assert cell_len(line) <= width, f"line wider than {width}: {line!r}"
    assert "…" not in text, "a heading or cell was shortened"
    blocks = boxed_blocks(text)
    assert blocks, "expected at least one table"
    for _, lines in blocks:
        assert lines[-1][:1] in "└┗╰", f"box not closed at the bottom: {lines[-1]!r}"
        top, bottom = cell_len(lines[0]), cell_len(lines[-1])
        for line in lines:
            assert line[-1] in RIGHT_EDGES, f"right border missing: {line!r}"
            assert cell_len(line) == top == bottom, f"ragged box: {line!r}"


@pytest.mark.parametrize(("name", "width"), PAIRS, ids=IDS)
def test_no_e_notation_in_tables(screens: Screens, name: str, width: int) -> None:
    text = screens[name, width]
    for kind, lines in boxed_blocks(text):
        if kind == "table":
            for line in lines:
                assert not E_NOTATION.search(line), line
    table_free = [line for line in text.splitlines() if line.rstrip()[:1] not in LEFT_EDGES]
    for line in table_free:
        assert not E_NOTATION.search(line), line


def test_no_e_notation_in_the_notes(screens: Screens) -> None:
    # the sentences beneath the tables once read "net benefit ... 1.516e+07" beside "14.8M"
    for (name, _), text in screens.items():
        if name.startswith(("optimize", "compare")):
            for kind, lines in boxed_blocks(text):
                if kind == "panel":
                    assert not any(E_NOTATION.search(line) for line in lines), name


def table_row(text: str, label: str) -> list[str]:
    """The cells of every table line whose first cell starts with ``label``, block after block."""
    cells: list[str] = []
    for line in text.splitlines():
        parts = [p.strip() for p in re.split(r"[│┃]", line)[1:-1]]
        if parts and parts[0].startswith(label):
            cells += parts[1:]
    return cells


def parsed_tables(text: str) -> list[dict[str, Any]]:
    """Each boxed table with a header: its section, its column headings and its rows, wrapped text joined.

    ``section`` is ``"not available"`` for tables printed after the heading
    of the policies the constraints rule out, else ``"main"``.  A line whose
    value cells are all empty continues the label of the row above it.
    """
    tables: list[dict[str, Any]] = []
    section: str = "main"
    current: dict[str, Any] | None = None
    for line in text.splitlines():
        if line[:1] not in LEFT_EDGES and "Not available under the constraints" in line:
            section = "not available"
        if line.startswith("┏"):
            current = {"section": section, "columns": [], "rows": []}
            tables.append(current)
            continue
        if current is None or line[:1] not in "┃│":
            continue
        parts = [p.strip() for p in re.split(r"[│┃]", line)[1:-1]]
        if line.startswith("┃"):
            if not current["columns"]:
                current["columns"] = ["" for _ in parts[1:]]
            pieces = zip(current["columns"], parts[1:], strict=True)
            current["columns"] = [f"{old} {new}".strip() for old, new in pieces]
        elif any(parts[1:]) or not current["rows"]:
            current["rows"].append([parts[0], *parts[1:]])
        else:
            current["rows"][-1][0] = f"{current['rows'][-1][0]} {parts[0]}".strip()
    return tables


def table_cells(text: str, label: str, section: str = "main") -> list[tuple[str, str]]:
    """(column heading, cell) of the row called ``label`` (or starting so), across the blocks of ``section``."""
    out: list[tuple[str, str]] = []
    for table in parsed_tables(text):
        if table["section"] != section:
            continue
        for row in table["rows"]:
            if row[0].startswith(label):
                out += list(zip(table["columns"], row[1:], strict=True))
    return out


@functools.cache
def compare_json(stem: str) -> dict[str, Any]:
    """``decide compare --json`` of a bundled scenario, run once per scenario (the tests only read it)."""
    result = CliRunner().invoke(app, ["compare", str(SCENARIOS[stem]), "--json"])
    document: dict[str, Any] = json.loads(result.stdout)
    return document


NOW_TITLES = {"flag_now": "Flag now, no study", "clear_now": "Clear now, no study"}


@pytest.mark.parametrize("stem", list(SCENARIOS))
def test_compare_money_matches_json_with_the_right_suffix(screens: Screens, stem: str) -> None:
    document = compare_json(stem)
    available = [p for p in document["policies"] if p["feasible"]]
    for width in WIDTHS:
        text = screens[f"compare-{stem}", width]
        losses = [cell for _, cell in table_cells(text, "expected loss")]
        regrets = [cell for _, cell in table_cells(text, "regret")]
        # deciding now first, then every policy whose study the constraints allow
        assert len(losses) == len(regrets) == 2 + len(available)
        for cell, row in zip(losses[2:], available, strict=True):
            assert cell == nb.money(row["expected_loss"], compact=True)
            value = row["expected_loss"]
            if value is not None and value >= 1e4:
                assert cell[-1] in "kM" or cell.endswith("bn")
        for cell, row in zip(regrets[2:], available, strict=True):
            assert cell == nb.money(row["regret"], compact=True)


@pytest.mark.parametrize("stem", list(SCENARIOS))
def test_compare_sets_deciding_now_beside_the_policies(screens: Screens, stem: str) -> None:
    # Once a scenario where flagging now cost less than every study showed the loss-optimal study
    # with regret 0: flagging and clearing now are columns, and regret is against the best of all.
    document = compare_json(stem)
    best = document["best"]["expected_loss"]
    for width in WIDTHS:
        text = screens[f"compare-{stem}", width]
        losses = dict(table_cells(text, "expected loss"))
        regrets = dict(table_cells(text, "regret"))
        for key, title in NOW_TITLES.items():
            loss = document["no_study"][key]
            assert losses[title] == nb.money(loss, compact=True)
            assert regrets[title] == nb.money(loss - best, compact=True)
            assert loss - best >= 0


def test_regret_is_against_deciding_now_when_that_is_best() -> None:
    # An invented case where flagging now beats every study: costly subjects, a likely and costly harm.
    from decide.decision.optimize import compare
    from decide.report import console
    from decide.scenario import load_policies, load_scenario

    problem = load_scenario(SCENARIOS["solvent-cohort"]).problem
    costly = dataclasses.replace(
        problem,
        p_harm=0.9,
        consequences=dataclasses.replace(problem.consequences, per_subject=30_000.0),
        constraints=dataclasses.replace(problem.constraints, budget=None),
    )
    policies = load_policies()
    cmp = compare(costly, [policies["loss-optimal"], policies["conventional-fixed-size"]])
    assert cmp.best_action != "study"
    con = console.make_console(width=120, file=io.StringIO(), colour=False)
    with con.capture() as cap:
        con.print(console.compare_table(cmp, "t", "EUR", 120, con))
    text = cap.get()
    regrets = dict(table_cells(text, "regret"))
    best_title = NOW_TITLES[cmp.best_action.replace("-", "_")]
    assert regrets[best_title] == "0"
    for d in cmp:
        if d.feasible and d.expected_loss is not None:
            assert regrets[d.title] == nb.money(d.expected_loss - cmp.best_loss, compact=True) != "0"


@pytest.mark.parametrize("stem", list(SCENARIOS))
def test_policies_out_of_reach_are_set_apart(screens: Screens, stem: str) -> None:
    # Conventional science once showed 11.2M beside the optimum's 14.8M with only "meets the constraints: no".
    document = compare_json(stem)
    out = [p for p in document["policies"] if not p["feasible"]]
    for width in WIDTHS:
        text = screens[f"compare-{stem}", width]
        main_columns = {c for t in parsed_tables(text) if t["section"] == "main" for c in t["columns"]}
        apart = dict(table_cells(text, "if allowed, expected loss", "not available"))
        needs: dict[str, str] = {}
        for title, cell in table_cells(text, "would need:", "not available"):
            needs.setdefault(title, cell)  # the first need is the size per group
        for row in out:
            assert row["title"] not in main_columns
            assert apart[row["title"]] == nb.money(row["expected_loss"], compact=True)
            assert needs[row["title"]] == nb.count(row["n_per_group"])
        assert bool(apart) == bool(out)
        if out:
            assert "Not available under the constraints" in text


@pytest.mark.parametrize("kind", ["compare", "optimize"])
@pytest.mark.parametrize("stem", list(SCENARIOS))
def test_share_of_true_flags_beside_p_harm_negative(screens: Screens, kind: str, stem: str) -> None:
    document = compare_json(stem)
    by_title = {p["title"]: p for p in document["policies"]}
    for width in WIDTHS:
        text = screens[f"{kind}-{stem}", width]
        if kind == "compare":
            positive = dict(table_cells(text, "P(harm | positive)"))
            negative = dict(table_cells(text, "P(harm | negative)"))
            for title, p in by_title.items():
                if p["feasible"]:
                    assert positive[title] == nb.probability(p["p_harm_given_positive"])
                    assert negative[title] == nb.probability(p["p_harm_given_negative"])
            assert "share of flags that would be true" in " ".join(text.split())
        else:
            optimal = by_title["Loss-optimal"]
            rows = {
                t["rows"][i][0]: t["rows"][i][1]
                for t in parsed_tables(text.replace("┌", "┏"))
                for i in range(len(t["rows"]))
            }
            positive_label = next(k for k in rows if k.startswith("P(harmful | positive result)"))
            assert "share of flags that are true" in positive_label
            assert rows[positive_label] == nb.probability(optimal["p_harm_given_positive"])
            assert rows["P(harmful | negative result)"] == nb.probability(optimal["p_harm_given_negative"])


@pytest.mark.parametrize("kind", ["compare", "optimize"])
@pytest.mark.parametrize("stem", list(SCENARIOS))
def test_implied_cost_ratio_shows_its_range(screens: Screens, kind: str, stem: str) -> None:
    document = compare_json(stem)
    by_title = {p["title"]: p for p in document["policies"]}
    ranged = False
    for width in WIDTHS:
        text = screens[f"{kind}-{stem}", width]
        if kind == "compare":
            cells = dict(table_cells(text, "implied cost ratio"))
            shown = [(by_title[t], c) for t, c in cells.items() if t in by_title]
        else:
            tables = parsed_tables(text.replace("┌", "┏"))
            cell = next(r[1] for t in tables for r in t["rows"] if r[0].startswith("implied cost ratio"))
            shown = [(by_title["Loss-optimal"], cell)]
        for p, c in shown:
            rng = p["implied_cost_ratio_range"]
            if rng is not None and (rng[1] is None or nb.number(rng[1]) != nb.number(rng[0])):
                ranged = True
                high = "or more" if rng[1] is None else f"to {nb.number(rng[1])}"
                assert c == f"{nb.number(rng[0])} {high}"
                assert "infinity" not in c
            else:
                assert c == nb.number(p["implied_cost_ratio"])
        flat = " ".join(text.split())
        assert ("cut-off moves in whole counts" in flat) == ranged, "the one line saying why appears with a range"


def test_a_regret_of_454778_reads_455k() -> None:
    # The defect as first seen: a regret of 454,778 shown as "45.5k".
    assert nb.money(454_778.0, compact=True) == "455k"


@pytest.mark.parametrize("width", WIDTHS)
def test_policies_show_every_name_in_full(screens: Screens, width: int) -> None:
    text = screens["policies", width]
    first_cells = {re.split(r"[│┃]", line)[1].strip() for line in text.splitlines() if line.startswith(("│", "┃"))}
    for name in BUILTIN_ORDER:
        assert name in first_cells, f"{name} not shown whole in the name column at {width} columns"


@pytest.mark.parametrize("stem", [s for s in SCENARIOS if f"interpret-{s}" in CASES])
def test_the_reading_shows_the_plans_alpha(screens: Screens, stem: str) -> None:
    """The loss-optimal verdict and the power sentence print the alpha the plan (optimize) prints."""
    for width in WIDTHS:
        plan = screens[f"optimize-{stem}", width]
        planned = next(
            cell.strip() for line in plan.splitlines() if "alpha, nominal" in line for cell in [line.split("│")[-2]]
        )
        reading = screens[f"interpret-{stem}", width]
        row = next(line for line in reading.splitlines() if line.startswith("│ loss-optimal "))
        assert row.split("│")[3].strip() == planned
        words = " ".join(reading.replace("│", " ").split())
        if "power only against" in words:  # the sentence of a result that is not significant
            assert f"(alpha {planned})" in words
