"""``decide sweep`` and ``decide simulate`` from the command line.

Outputs are read from ``--json`` and ``--csv`` and checked against the Python
API; bad input exits with status 2 and one line naming the option or key,
before anything is computed.
"""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import pytest
from typer.testing import CliRunner, Result

from decide import optimize
from decide.decision.inputs import with_value
from decide.report.text import CAUTION
from decide.scenario import load_scenario

REPO = Path(__file__).resolve().parents[1]
MILL = str(REPO / "scenarios" / "mill-dust-uncertain.toml")
SOLVENT = str(REPO / "scenarios" / "solvent-cohort.toml")
ENV = {"COLUMNS": "100"}


def run(*args: str) -> Result:
    from decide.cli import app

    return CliRunner().invoke(app, list(args), env=ENV)


def test_sweep_json_break_even_matches_optimize() -> None:
    res = run("sweep", MILL, "--policy", "loss-optimal", "--vary", "consequences.false_alarm=1e6:2e8", "--json")
    assert res.exit_code == 0, res.output
    data = json.loads(res.stdout)
    assert data["caution"] == CAUTION
    rows = {r["input"]: r for r in data["rows"]}
    fa = rows["consequences.false_alarm"]
    assert fa["low"]["value"] == 1e6 and fa["high"]["value"] == 2e8
    (th,) = [t for t in fa["thresholds"] if t["kind"] == "action"]
    problem = load_scenario(MILL).problem
    d = optimize(with_value(problem, "consequences.false_alarm", th["value"]))
    assert d.expected_loss == pytest.approx(d.no_study["flag_now"], rel=1e-6)
    # ranges of inputs with a distribution come from the [uncertainty] table (central 90 %)
    assert rows["consequences.per_subject"]["low"]["value"] == pytest.approx(300.0)


def test_sweep_table_and_csv_run() -> None:
    res = run("sweep", MILL, "--policy", "conventional-science", "--policy", "loss-optimal")
    assert res.exit_code == 0, res.output
    assert "Break-even values" in res.stdout and "Decision support, not a decision" in res.stdout
    res = run("sweep", MILL, "--policy", "loss-optimal", "--csv")
    rows = list(csv.DictReader(io.StringIO(res.stdout)))
    assert {r["row"] for r in rows} >= {"low", "high"}


def test_two_way_json_and_csv() -> None:
    res = run("sweep", MILL, "--two-way", "--points", "4", "--json")
    assert res.exit_code == 0, res.output
    grid = json.loads(res.stdout)
    assert grid["x"] == "prior.p_harm" and grid["y"] == "consequences.cost_ratio"
    assert len(grid["action"]) == 4 and len(grid["action"][0]) == 4
    res = run("sweep", MILL, "--two-way", "--points", "3", "--axes", "prior.p_harm,consequences.false_alarm", "--csv")
    assert len(list(csv.DictReader(io.StringIO(res.stdout)))) == 9


def test_draws_print_the_seed_and_repeat() -> None:
    a = run("sweep", MILL, "--draws", "200", "--seed", "99", "--json")
    b = run("sweep", MILL, "--draws", "200", "--seed", "99", "--json")
    assert a.exit_code == 0, a.output
    assert json.loads(a.stdout)["seed"] == 99 and a.stdout == b.stdout
    table = run("sweep", MILL, "--draws", "50")
    assert table.exit_code == 0 and "seed " in table.stdout


def test_simulate_json_and_table() -> None:
    res = run("simulate", SOLVENT, "--studies", "5000", "--seed", "4", "--json")
    assert res.exit_code == 0, res.output
    data = json.loads(res.stdout)
    assert data["seed"] == 4 and data["studies"] == 5000 and data["policy"] == "loss-optimal"
    assert 0 <= data["power"]["simulated"] <= 1
    res = run("simulate", SOLVENT, "--studies", "2000", "--policy", "conventional-fixed-size")
    assert res.exit_code == 0 and "seed" in res.stdout


@pytest.mark.parametrize(
    ("args", "named"),
    [
        (("sweep", MILL, "--vary", "prior.harm=0.1:0.2"), "--vary"),
        (("sweep", MILL, "--vary", "prior.p_harm=0.1:1.5"), "--vary"),
        (("sweep", MILL, "--vary", "consequences.per_subject=-5:10"), "--vary"),
        (("sweep", MILL, "--vary", "prior.p_harm"), "--vary"),
        (("sweep", MILL, "--draws", "0"), "--draws"),
        (("sweep", SOLVENT, "--draws", "10"), "--draws"),
        (("sweep", MILL, "--two-way", "--axes", "prior.p_harm"), "--axes"),
        (("sweep", MILL, "--policy", "nonsense"), "--policy"),
        (("simulate", MILL, "--studies", "0"), "--studies"),
        (("simulate", MILL, "--policy", "nonsense"), "--policy"),
    ],
)
def test_bad_input_exits_2_with_one_line(args: tuple[str, ...], named: str) -> None:
    res = run(*args)
    assert res.exit_code == 2
    lines = [x for x in res.stderr.splitlines() if x.strip()]
    assert len(lines) == 1 and named in lines[0] and "Traceback" not in res.output


def test_impossible_distribution_in_the_file_names_the_key(tmp_path: Path) -> None:
    text = Path(MILL).read_text(encoding="utf-8").replace("sd = 0.12", "sd = 0.6")
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    res = run("sweep", str(path), "--draws", "10")
    assert res.exit_code == 2
    assert "uncertainty.prior.p_harm.sd" in res.stderr and len(res.stderr.strip().splitlines()) == 1
