"""``decide report --data``: the reading of a finished study's counts in the board's report.

The section's numbers are held against ``decide interpret --json`` on the same
files, run as its own command (its own comparison of the policies): each
shown number is the JSON value formatted by :mod:`decide.report.numbers`, and
each sentence is the JSON's sentence.  Without ``--data`` the report has no
such section, and the section is the only difference.  Bad data are refused
as ``decide interpret`` refuses them, before anything is written.
"""

from __future__ import annotations

import json
import re
import shutil
from dataclasses import replace
from pathlib import Path
from typing import Any

import html5lib  # type: ignore[import-untyped]
import pytest
from typer.testing import CliRunner

from decide.report import numbers as nb
from decide.report.text import CAUTION, markdown_literal
from decide.scenario import load_policies, load_scenario
from decide.scenario.observed_file import load_observed

REPO = Path(__file__).resolve().parents[1]
OBSERVED = sorted((REPO / "scenarios" / "observed").glob("*.toml"))
SOLVENT = REPO / "scenarios" / "solvent-cohort.toml"
SOLVENT_DATA = REPO / "scenarios" / "observed" / "solvent-cohort.toml"
#: Fields of the reading every section shows (as keys under ``interpretation.``).
SHOWN = (
    "estimate",
    "ci_low",
    "p_value",
    "p_value_mid",
    "posterior_harm",
    "prior_harm",
    "loss_flag",
    "loss_clear",
    "detectable",
)
PROBABILITIES = {"p_value", "p_value_mid", "posterior_harm", "prior_harm", "attained_alpha"}
MONEY = {"loss_flag", "loss_clear"}


def run(*args: str) -> Any:
    from decide.cli import app

    return CliRunner().invoke(app, list(args), env={"COLUMNS": "100"})


def parse(text: str) -> Any:
    return html5lib.HTMLParser(strict=True, namespaceHTMLElements=False).parse(text)


def words(element: Any) -> str:
    return " ".join("".join(element.itertext()).split())


def interpret_json(scenario: Path, data: Path) -> dict[str, Any]:
    res = run("interpret", str(scenario), "--data", str(data), "--json")
    assert res.exit_code == 0, res.output
    return dict(json.loads(res.stdout))


def _resolve(record: dict[str, Any], key: str) -> Any:
    """A data-key under ``interpretation.`` looked up in the interpret JSON."""
    head, _, rest = key.partition(".")
    assert head == "interpretation", key
    obj: Any = record
    for name, index in re.findall(r"([^.\[\]]+)|\[(\d+)\]", rest):
        obj = obj[int(index)] if index else obj[name]
    return obj


def _shown(key: str, value: Any, currency: str) -> str:
    """The JSON value as the report must show it, through decide.report.numbers."""
    field = key.rsplit(".", 1)[-1]
    if ".observed." in key:
        return nb.count(value) if isinstance(value, int) else nb.number(value)
    if field in PROBABILITIES:
        return nb.probability(value)
    if field in MONEY:
        return nb.money(value, currency)
    return nb.number(value)


@pytest.mark.parametrize("data", OBSERVED, ids=[p.stem for p in OBSERVED])
def test_html_section_shows_what_interpret_computes(data: Path, tmp_path: Path) -> None:
    scenario = REPO / "scenarios" / data.name
    hostile = tmp_path / "<b>data.toml"  # the data file's name is shown, as text
    shutil.copy(data, hostile)
    out = tmp_path / "r.html"
    res = run("report", str(scenario), "-o", str(out), "--quick", "--data", str(hostile))
    assert res.exit_code == 0, res.output
    record = interpret_json(scenario, data)
    currency = load_scenario(scenario).currency or ""
    root = parse(out.read_text(encoding="utf-8"))
    section = root.find(".//section[@id='after-study']")
    assert section is not None
    assert words(section.find("h2")) == "9. After the study: reading the observed counts"
    keys = set()
    for e in section.iter():
        key = e.get("data-key")
        if key is None or key.endswith("].alpha"):
            continue
        value = _resolve(record, key)
        assert e.get("data-value") == repr(value), key
        assert "".join(e.itertext()) == _shown(key, value, currency), key
        keys.add(key)
    assert {f"interpretation.{k}" for k in SHOWN if record[k] is not None} <= keys
    assert {f"interpretation.observed.{k}" for k in record["observed"]} <= keys
    paragraphs = [words(p) for p in section.findall("p")]
    for sentence in record["sentences"].values():
        assert sentence in paragraphs, sentence
    assert CAUTION in paragraphs and record["caution"] == CAUTION
    assert "<b>data.toml" in words(section) and section.find(".//b") is None
    rows = section.findall(".//table[@class='verdicts']/tbody/tr")
    assert len(rows) == len(record["verdicts"])
    for row, v in zip(rows, record["verdicts"], strict=True):
        cells = [words(c) for c in row]
        unmet = " (policy unmet)" if not v["available"] and v["verdict"] is not None else ""
        verdict = (v["verdict"] or "no test") + unmet
        assert cells == [v["title"], v["test"] or "-", v["alpha_shown"], nb.probability(v["attained_alpha"]), verdict]


def _markdown_section(text: str) -> str:
    section = text.split("## 9. After the study: reading the observed counts\n", 1)[1]
    return section.split("## 10. Assumptions and cautions\n", 1)[0]


def test_markdown_section_shows_what_interpret_computes(tmp_path: Path) -> None:
    out = tmp_path / "r.md"
    res = run("report", str(SOLVENT), "-o", str(out), "--quick", "--data", str(SOLVENT_DATA))
    assert res.exit_code == 0, res.output
    record = interpret_json(SOLVENT, SOLVENT_DATA)
    section = _markdown_section(out.read_text(encoding="utf-8"))
    money = {k: nb.money(record[k], "EUR") for k in MONEY}
    for row in (
        f"| cases exposed | {nb.count(record['observed']['cases_exposed'])} |",
        f"| n unexposed | {nb.count(record['observed']['n_unexposed'])} |",
        f"| risk ratio | {nb.number(record['estimate'])} |",
        f"| 95% interval (exact) | {nb.number(record['ci_low'])} to {nb.number(record['ci_high'])} |",
        f"| exact p-value, one-sided (harm) | {nb.probability(record['p_value'])} |",
        f"| mid-p-value, one-sided | {nb.probability(record['p_value_mid'])} |",
        f"| posterior probability of harm | {nb.probability(record['posterior_harm'])} "
        f"(prior {nb.probability(record['prior_harm'])}) |",
        f"| expected loss of flagging | {money['loss_flag']} |",
        f"| expected loss of clearing | {money['loss_clear']} |",
        f"| loss-minimising action | {record['recommendation']} the exposure |",
        f"| risk ratio detectable with 80% power | {nb.number(record['detectable'])} |",
    ):
        assert row + "\n" in section, row
    for v in record["verdicts"]:
        unmet = " (policy unmet)" if not v["available"] else ""
        row = (
            f"| {markdown_literal(v['title'])} | {v['test']} | {v['alpha_shown']} | "
            f"{nb.probability(v['attained_alpha'])} | {v['verdict']}{unmet} |"
        )
        assert row + "\n" in section, row
    for sentence in record["sentences"].values():
        assert f"\n{markdown_literal(sentence)}\n" in section, sentence
    assert f"> {CAUTION}\n" in section


def test_without_data_the_section_is_absent_and_is_the_only_difference() -> None:
    from decide.report.document import gather
    from decide.report.html import render_html, render_markdown

    loaded = load_scenario(SOLVENT)
    counts = load_observed(SOLVENT_DATA, loaded.problem)
    r = gather(loaded, list(load_policies(()).values()), quick=True, observed=counts, observed_path=SOLVENT_DATA)
    plain = replace(r, after=None)
    with_html, without_html = render_html(r), render_html(plain)
    assert parse(without_html).find(".//section[@id='after-study']") is None
    assert "After the study" not in without_html and "interpretation." not in without_html
    cut = re.sub(r'<section id="after-study">.*?</section>\n\n', "", with_html, count=1, flags=re.S)
    assert cut != with_html
    assert cut.replace("<h2>10. Assumptions", "<h2>9. Assumptions") == without_html
    with_md, _ = render_markdown(r, "r.md")
    without_md, _ = render_markdown(plain, "r.md")
    assert "After the study" not in without_md and "## 9. Assumptions and cautions" in without_md
    cut = re.sub(r"## 9\. After the study.*?(?=## 10\. )", "", with_md, count=1, flags=re.S)
    assert cut != with_md
    assert cut.replace("## 10. Assumptions", "## 9. Assumptions") == without_md


def test_verdict_alpha_is_the_alpha_the_plan_shows() -> None:
    """Each verdict's alpha is the text of the same policy's alpha in the policies table, and its rule's cut-off."""
    from decide.report.document import gather
    from decide.report.html import render_html

    loaded = load_scenario(SOLVENT)
    counts = load_observed(SOLVENT_DATA, loaded.problem)
    r = gather(loaded, list(load_policies(()).values()), quick=True, observed=counts, observed_path=SOLVENT_DATA)
    root = parse(render_html(r))
    plan = {
        words(row[0]): words(row[2]) for row in root.findall(".//section[@id='policies']//table/tbody/tr")
    }  # policy title -> alpha as the plan shows it
    verdicts = root.findall(".//section[@id='after-study']//table[@class='verdicts']/tbody/tr")
    assert r.after is not None and len(verdicts) == len(r.after.reading.verdicts) > 0
    rounded = 0
    for row, d in zip(verdicts, r.comparison, strict=False):
        title, alpha = words(row[0]), words(row[2])
        assert title == d.title
        assert alpha == plan[title]
        assert alpha == (d.rule.cutoff_shown if d.rule is not None else nb.probability(d.alpha))
        rounded += alpha != nb.probability(d.alpha)
    assert rounded > 0  # the check can tell the plan's alpha from the plainly rounded one (0.8066, not 0.807)


def _bad_data(tmp_path: Path, case: str) -> Path:
    if case == "missing":
        return tmp_path / "no-such-data.toml"
    text = {
        "wrong-design": (REPO / "scenarios" / "observed" / "trade-case-control.toml").read_text(encoding="utf-8"),
        "cases-above-group": "[observed]\ncases_exposed = 3000\nn_exposed = 2150\n"
        "cases_unexposed = 1\nn_unexposed = 2150\n",
        "negative-count": "[observed]\ncases_exposed = 4\nn_exposed = 2150\ncases_unexposed = -1\nn_unexposed = 2150\n",
        "key-of-another-design": "[observed]\ncases = 4\nexpected = 1.5\n",
    }[case]
    path = tmp_path / f"{case}.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.mark.parametrize(
    "case", ["missing", "wrong-design", "cases-above-group", "negative-count", "key-of-another-design"]
)
@pytest.mark.parametrize("suffix", [".html", ".md"])
def test_bad_data_is_refused_as_interpret_refuses_it_and_nothing_is_written(
    tmp_path: Path, case: str, suffix: str
) -> None:
    data = _bad_data(tmp_path, case)
    out = tmp_path / f"new{suffix}"
    res = run("report", str(SOLVENT), "-o", str(out), "--quick", "--data", str(data))
    assert res.exit_code == 2
    line = res.stderr.strip()
    assert "\n" not in line and "Traceback" not in res.output
    assert line.startswith("decide report: ")
    told = run("interpret", str(SOLVENT), "--data", str(data))
    assert told.exit_code == 2
    assert line.removeprefix("decide report: ") == told.stderr.strip().removeprefix("decide interpret: ")
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(p.name for p in tmp_path.glob("*.toml"))
    old = tmp_path / f"old{suffix}"
    old.write_text("previous report", encoding="utf-8")
    res = run("report", str(SOLVENT), "-o", str(old), "--quick", "--force", "--data", str(data))
    assert res.exit_code == 2 and old.read_text(encoding="utf-8") == "previous report"
    assert not (tmp_path / "old_figures").exists() and not (tmp_path / "new_figures").exists()
