"""The command line as a well-made tool: literal user text, plain help and messages, JSON for machines.

User text from scenario and policy files (titles, summaries, currency) is
printed literally: rich markup, emoji codes and hyperlink markup show as
typed, and control characters (ESC, BEL, the C1 OSC introducer) are escaped
before they reach a terminal.  Warnings are one plain line on stderr; usage
is checked before any computing; help shows no internal placeholders; JSON
keys are snake_case and non-finite numbers are null.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import math
import re
from pathlib import Path
from typing import Any

import pytest
from rich.console import Console
from typer.testing import CliRunner

from decide.cli import app
from decide.decision.optimize import compare
from decide.report import console as render
from decide.report import numbers as nb
from decide.report import tables
from decide.report.progress import busy
from decide.scenario import load_policies, load_scenario

REPO = Path(__file__).resolve().parents[1]
DEPOT = REPO / "scenarios" / "depot-cohort-rate.toml"
ENV = {"COLUMNS": "100"}

#: Text a file might hold that a careless renderer would interpret (TOML escapes).
NASTY_TOML = (
    r"Bad [/] title [red]x[/red] :warning: [link=http://example.invalid]here[/link] "
    r"\u001b[31mred\u001b[0m \u001b]8;;http://example.invalid\u001b\\osc\u001b]8;;\u001b\\ bell\u0007"
)
#: What must be printed for it, literally.
SHOWN = [
    "[/]",
    "[red]x[/red]",
    ":warning:",
    "[link=http://example.invalid]here[/link]",
    "\\x1b[31mred\\x1b[0m",
    "\\x1b]8;;http://example.invalid",
    "bell\\x07",
]


def run(*args: Any, env: dict[str, str] | None = None) -> Any:
    return CliRunner().invoke(app, [str(a) for a in args], env=env or ENV)


def nasty_policy_dir(tmp_path: Path) -> Path:
    folder = tmp_path / "policies"
    folder.mkdir()
    (folder / "nasty.toml").write_text(
        f'title = "{NASTY_TOML}"\nsummary = "{NASTY_TOML}"\n'
        '[alpha]\nrule = "fixed"\nvalue = 0.01\n[size]\nrule = "largest-allowed"\n',
        encoding="utf-8",
    )
    return folder


def nasty_scenario(tmp_path: Path) -> Path:
    text = DEPOT.read_text(encoding="utf-8")
    text = re.sub(r'^title = ".*"$', lambda _: f'title = "{NASTY_TOML}"', text, count=1, flags=re.M)
    path = tmp_path / "nasty.toml"
    path.write_text(text, encoding="utf-8")
    assert "Bad [/]" in load_scenario(path).title
    return path


def assert_literal(out: str) -> None:
    assert "\x1b" not in out and "\x07" not in out, "a control character reached the output"
    assert "⚠" not in out, "an emoji code was rendered"
    flat = " ".join(out.split())
    for piece in SHOWN:
        assert piece in flat, piece


def test_policies_prints_titles_and_summaries_literally(tmp_path: Path) -> None:
    result = run("policies", "--policy-dir", nasty_policy_dir(tmp_path))
    assert result.exit_code == 0, result.stderr
    assert_literal(result.stdout)


@pytest.mark.parametrize("fmt", ["", "--markdown", "--csv"])
def test_compare_prints_policy_and_scenario_titles_literally(tmp_path: Path, fmt: str) -> None:
    args = ["compare", nasty_scenario(tmp_path), "--policy-dir", nasty_policy_dir(tmp_path)]
    args += ["--policy", "nasty", "--policy", "loss-optimal"] + ([fmt] if fmt else [])
    result = run(*args)
    assert result.exit_code == 0, result.stderr
    if fmt == "--csv":  # the CSV names policies; the text fields it holds are escaped (see below)
        assert "\x1b" not in result.stdout
    else:
        if fmt == "--markdown":  # Markdown escapes its own specials; undo that to read the text
            result_text = re.sub(r"\\([\\`*_{}\[\]<>()#+!|~])", r"\1", result.stdout)
        else:
            result_text = result.stdout
        assert_literal(result_text)


def test_csv_escapes_control_characters_in_text_fields() -> None:
    (d,) = compare(load_scenario(DEPOT).problem, [load_policies()["loss-optimal"]])
    text = tables.to_csv([dataclasses.replace(d, reason="cap \x1b[31mreached\x07")])
    assert "\x1b" not in text and "cap \\x1b[31mreached\\x07" in text


def test_optimize_prints_the_scenario_title_literally(tmp_path: Path) -> None:
    result = run("optimize", nasty_scenario(tmp_path))
    assert result.exit_code == 0, result.stderr
    assert_literal(result.stdout)


def test_json_escapes_control_characters(tmp_path: Path) -> None:
    result = run("compare", nasty_scenario(tmp_path), "--policy", "loss-optimal", "--json")
    assert result.exit_code == 0, result.stderr
    assert "\x1b" not in result.stdout
    assert json.loads(result.stdout)["scenario"]["title"].startswith("Bad [/] title")


def test_renderers_never_use_markup_even_on_a_markup_console(tmp_path: Path) -> None:
    # A terminal console with markup and emoji switched ON: the renderers must still
    # hand it plain text objects, so nothing the user wrote is interpreted.
    policies = list(load_policies([nasty_policy_dir(tmp_path)]).values())
    buf = io.StringIO()
    con = Console(file=buf, width=100, force_terminal=True, markup=True, emoji=True, color_system="standard")
    con.print(render.policies_table(policies, 100, con))
    out = buf.getvalue()
    assert "[red]x[/red]" in out and "[/]" in out and ":warning:" in out
    assert "\x1b]8;" not in out, "a hyperlink escape reached the terminal"
    assert "\x1b[31mred" not in out and "\\x1b[31mred" in out


def test_solve_warning_is_one_plain_line_on_stderr() -> None:
    result = run(
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
        "--power",
        "0.8",
        "--test",
        "normal",
    )
    assert result.exit_code == 0, result.stderr
    lines = result.stderr.splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("decide solve: warning: normal approximation")
    assert ".py" not in result.stderr and "Warning:" not in result.stderr


@pytest.mark.parametrize(
    ("flags", "fragment"),
    [(["--json", "--csv"], "choose one"), (["--csv", "--markdown"], "choose one"), (["--output", "x.txt"], "--output")],
)
def test_compare_usage_is_checked_before_computing(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, flags: list[str], fragment: str
) -> None:
    def never(*args: Any, **kwargs: Any) -> Any:
        raise AssertionError("computed before checking usage")

    monkeypatch.setattr("decide.cli._compare", never)
    monkeypatch.setattr("decide.cli.load_scenario", never)
    monkeypatch.chdir(tmp_path)
    result = run("compare", DEPOT, *flags)
    assert result.exit_code == 2
    assert result.stderr.count("\n") == 1 and fragment in result.stderr
    assert "Traceback" not in result.stderr


COMMANDS = ["solve", "optimize", "compare", "audit", "policies", "schema", "new"]


@pytest.mark.parametrize("command", [None, *COMMANDS])
def test_help_has_no_internal_placeholders(command: str | None) -> None:
    result = run(*([command] if command else []), "--help")
    assert result.exit_code == 0
    for placeholder in ("<", ">", "{", "}", "list[", "Path]", "<float>", "<int>"):
        assert placeholder not in result.stdout, (placeholder, result.stdout)


def test_messages_carry_no_internal_prefixes() -> None:
    result = run("solve", "--design", "cohort-risk", "--baseline", "0.5", "--effect", "3", "--power", "1.2")
    assert result.exit_code == 2
    assert "error," not in result.stderr.lower() and "Traceback" not in result.stderr


def keys_of(data: Any) -> list[str]:
    if isinstance(data, dict):
        return [str(k) for k in data] + [k for v in data.values() for k in keys_of(v)]
    if isinstance(data, list):
        return [k for v in data for k in keys_of(v)]
    return []


MACHINE_RUNS: list[list[Any]] = [
    [
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
        "--json",
    ],
    ["optimize", DEPOT, "--json"],
    ["compare", DEPOT, "--policy", "loss-optimal", "--policy", "equal-errors", "--json"],
    [
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
        "--json",
    ],
    ["policies", "--json"],
]


@pytest.mark.parametrize("args", MACHINE_RUNS, ids=[str(a[0]) for a in MACHINE_RUNS])
def test_json_keys_are_snake_case(args: list[Any]) -> None:
    result = run(*args)
    assert result.exit_code == 0, result.stderr
    assert result.stderr == "" or "warning" in result.stderr
    data = json.loads(result.stdout, parse_constant=lambda c: pytest.fail(f"non-standard {c}"))
    bad = [k for k in keys_of(data) if not re.fullmatch(r"[a-z0-9_.]+", k)]
    assert not bad, bad
    if args[0] == "solve":
        assert set(data["expected_cases"]) == {"exposed_cases", "unexposed_cases"}


def test_compare_json_is_one_object_with_the_inputs() -> None:
    result = run("compare", DEPOT, "--policy", "loss-optimal", "--json")
    data = json.loads(result.stdout)
    assert set(data) >= {"scenario", "currency", "units", "no_study", "policies"}
    assert data["currency"] == "EUR" and data["units"]["money"] == "EUR"
    assert data["scenario"]["title"] == load_scenario(DEPOT).title
    assert data["scenario"]["contents"]["study"]["design"] == "cohort-rate"
    assert set(data["no_study"]) == {"flag_now", "clear_now"}
    assert [p["policy"] for p in data["policies"]] == ["loss-optimal"]


def test_non_finite_values_have_one_representation_per_format() -> None:
    problem = load_scenario(DEPOT).problem
    (d,) = compare(problem, [load_policies()["loss-optimal"]])
    unbounded = dataclasses.replace(d, implied_cost_ratio=math.inf, implied_cost_ratio_range=(6.43, math.inf))
    row = tables.decision_rows([unbounded])[0]
    assert row["implied_cost_ratio"] is None
    (csv_row,) = csv.DictReader(io.StringIO(tables.to_csv([unbounded])))
    assert csv_row["implied_cost_ratio"] == ""
    doc = tables.compare_document([unbounded], problem, {"title": "t"}, "EUR")
    assert doc["policies"][0]["implied_cost_ratio_range"] == [6.43, None]
    json.dumps(doc, allow_nan=False)  # standard JSON, no Infinity
    assert nb.number(math.inf) == "infinity"
    assert render._ratio(unbounded) == "6.43 or more"  # an unbounded range reads "or more", not "to infinity"


def test_progress_is_silent_off_a_terminal_and_shown_on_one() -> None:
    quiet = io.StringIO()
    with busy("Comparing policies...", console=Console(file=quiet, force_terminal=False), delay=0):
        pass
    assert quiet.getvalue() == ""
    off = io.StringIO()
    with busy("Comparing policies...", enabled=False, console=Console(file=off, force_terminal=True), delay=0):
        pass
    assert off.getvalue() == ""
    shown = io.StringIO()
    with busy("Comparing policies...", console=Console(file=shown, force_terminal=True), delay=0):
        pass
    assert "Comparing policies..." in shown.getvalue()


def test_cli_progress_never_reaches_a_captured_stderr() -> None:
    result = run("compare", DEPOT, "--policy", "loss-optimal")
    assert result.exit_code == 0 and result.stderr == ""


def test_policies_at_80_columns_keep_a_long_name_whole(tmp_path: Path) -> None:
    name = "a-very-long-policy-name-that-a-board-wrote-for-its-own-standard-of-proof"
    folder = tmp_path / "mine"
    folder.mkdir()
    (folder / f"{name}.toml").write_text(
        'title = "Invented long one"\nsummary = "Alpha fixed at 0.01."\n'
        '[alpha]\nrule = "fixed"\nvalue = 0.01\n[size]\nrule = "largest-allowed"\n',
        encoding="utf-8",
    )
    result = run("policies", "--policy-dir", folder, env={"COLUMNS": "80"})
    assert result.exit_code == 0, result.stderr
    lines = result.stdout.splitlines()
    assert all(len(line) <= 80 for line in lines)
    assert any(name in line for line in lines), "the long name was broken or shortened"
    assert "…" not in result.stdout
    for builtin in load_policies():
        assert any(re.search(rf"(^|[\s(]){re.escape(builtin)}($|[\s)])", line) for line in lines), builtin


def test_one_line_errors_drop_validation_library_prefixes(capsys: pytest.CaptureFixture[str]) -> None:
    from decide.cli import _fail

    with pytest.raises(SystemExit) as stopped:
        _fail("decide optimize: s.toml: effect.high: Value error, must be above effect.low\x1b[0m", 2)
    assert stopped.value.code == 2
    err = capsys.readouterr().err
    assert err == "decide optimize: s.toml: effect.high: must be above effect.low\\x1b[0m\n"


@pytest.mark.parametrize("fmt", [[], ["--json"], ["--markdown"]])
def test_compare_without_the_best_policy_still_names_the_best_action(fmt: list[str]) -> None:
    # the best study is the loss-optimal policy's, which is not among those shown
    result = run("compare", DEPOT, "--policy", "equal-errors", *fmt)
    assert result.exit_code == 0, result.stderr
    assert "loss-optimal" in result.stdout
