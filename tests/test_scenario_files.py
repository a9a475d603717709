"""Scenario files: bundled examples, the template, the schema, and every error path.

Expected values here are closed-form identities (the lognormal interval, the
derived missed-hazard cost, the smallest study's cost), computed in the test.
"""

from __future__ import annotations

import json
import os
import re
import stat
from pathlib import Path

import numpy as np
import pytest
from pydantic import BaseModel
from scipy import special

from decide.decision.problem import Problem
from decide.designs import DESIGNS
from decide.engine.solve import solve
from decide.errors import DecideError
from decide.scenario import (
    LoadedScenario,
    ScenarioError,
    ScenarioModel,
    load_scenario,
    parse_scenario,
    scenario_json_schema,
    scenario_template,
    write_text_atomic,
)
from decide.scenario.models import DesignName, TestName

REPO = Path(__file__).resolve().parents[1]
SCENARIOS = sorted((REPO / "scenarios").glob("*.toml"))

# A small valid scenario the error cases below edit one line at a time.
BASE = """\
title = "Invented test case"
[study]
design = "cohort-risk"
baseline = 0.001
allocation = 1.0
[effect]
ratio = 3.0
[prior]
p_harm = 0.2
[consequences]
missed_hazard = 1.0e8
false_alarm = 1.0e7
per_subject = 100.0
fixed = 1000.0
[constraints]
max_n_per_group = 2000
budget = 1.0e6
"""


def edit(text: str, old: str, new: str) -> str:
    assert old in text, old
    return text.replace(old, new)


def load_text(tmp_path: Path, text: str, name: str = "scenario.toml") -> LoadedScenario:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return load_scenario(path)


# --- bundled scenarios -----------------------------------------------------


def test_there_are_bundled_scenarios() -> None:
    assert len(SCENARIOS) >= 3
    assert (REPO / "scenarios" / "solvent-cohort.toml") in SCENARIOS


@pytest.mark.parametrize("path", SCENARIOS, ids=lambda p: p.name)
def test_bundled_scenario_loads_and_says_it_is_invented(path: Path) -> None:
    s = load_scenario(path)
    assert isinstance(s.problem, Problem)
    assert s.path == path
    assert s.problem.title == s.title
    assert s.title.startswith("Invented example")
    assert "Invented demonstration data" in s.description
    assert "INVENTED DEMONSTRATION DATA" in path.read_text(encoding="utf-8")
    assert s.currency == "EUR"


def test_bundled_scenarios_cover_every_design_a_prior_and_a_derived_cost() -> None:
    loaded = [load_scenario(p) for p in SCENARIOS]
    assert {s.problem.study.setting().design.name for s in loaded} == set(DESIGNS)
    assert any(not s.problem.effect.is_point for s in loaded)
    assert any(s.problem.consequences.is_derived for s in loaded)


def test_solvent_cohort_cap_is_below_the_conventional_size() -> None:
    # The main example is meant to make policies differ: alpha 0.05 with
    # power 0.80 needs more exposed workers than the cap allows.
    p = load_scenario(REPO / "scenarios" / "solvent-cohort.toml").problem
    assert p.study.design == "cohort-risk"
    need = solve(
        p.study.design,
        baseline=p.study.baseline,
        effect=p.effect.median,
        alpha=0.05,
        power=0.80,
        allocation=p.study.allocation,
        sides=p.study.sides,
        test=p.study.test,
    )
    assert p.constraints.max_n_per_group is not None
    assert need.n_per_group > 2 * p.constraints.max_n_per_group


def test_depot_budget_allows_conventional_power_but_not_strict() -> None:
    # The comment in the file says so; check it (cost = fixed + per subject
    # times exposed plus unexposed workers).
    p = load_scenario(REPO / "scenarios" / "depot-cohort-rate.toml").problem
    c, st = p.consequences, p.study

    def cost(target: float) -> float:
        s = solve(
            st.design,
            baseline=st.baseline,
            effect=p.effect.median,
            alpha=0.05,
            power=target,
            allocation=st.allocation,
            years=st.years,
            test=st.test,
        )
        return c.fixed + c.per_subject * s.n_total

    assert p.constraints.budget is not None
    assert cost(0.80) <= p.constraints.budget < cost(0.95)


def test_water_supply_maps_interval_and_derived_cost() -> None:
    s = load_scenario(REPO / "scenarios" / "water-supply-reference.toml")
    e, c = s.problem.effect, s.problem.consequences
    # Central 90 % interval [1.5, 6]: the 5 % and 95 % quantiles (identity).
    assert e.quantile(0.05) == pytest.approx(1.5, rel=1e-12)
    assert e.quantile(0.95) == pytest.approx(6.0, rel=1e-12)
    assert e.median == pytest.approx(3.0, rel=1e-12)
    # Derived cost at SIR 3: 12000 * 3e-5 * (3 - 1) * 1.5e6 * 20.
    assert c.missed_cost(np.array([3.0]))[0] == pytest.approx(12000 * 3e-5 * 2 * 1.5e6 * 20)
    assert s.problem.study.years == 8.0


# --- the template -------------------------------------------------------


def test_template_loads_and_is_marked_invented(tmp_path: Path) -> None:
    text = scenario_template()
    s = load_text(tmp_path, text)
    assert "INVENTED EXAMPLE" in text
    assert s.title.startswith("Invented example")
    assert s.problem.study.design == "cohort-risk"


def _all_keys() -> list[str]:
    keys = []
    for name, field in ScenarioModel.model_fields.items():
        sub = field.annotation
        if isinstance(sub, type) and issubclass(sub, BaseModel):
            keys += list(sub.model_fields)
        else:
            keys.append(name)
    return keys


def test_template_shows_every_key() -> None:
    text = scenario_template()
    keys = _all_keys()
    assert {"design", "ratio", "p_harm", "horizon_years", "budget"} <= set(keys)
    for key in keys:
        assert re.search(rf"^#? ?({key} = |\[{key}\])", text, flags=re.MULTILINE), key
    for table in ("study", "effect", "prior", "consequences", "constraints"):
        assert f"\n[{table}]\n" in text


def test_template_alternatives_load_when_uncommented(tmp_path: Path) -> None:
    text = scenario_template()
    prior = edit(text, "\nratio = 3.0", "\n# ratio = 3.0")
    for key in ("low", "high", "level", "median"):
        prior = re.sub(rf"^# {key} = ", f"{key} = ", prior, flags=re.MULTILINE)
    assert not load_text(tmp_path, prior, "prior.toml").problem.effect.is_point

    derived = edit(text, "\nmissed_hazard = ", "\n# missed_hazard = ")
    for key in ("exposed_population", "background_rate", "cost_per_case", "horizon_years"):
        derived = re.sub(rf"^# {key} = ", f"{key} = ", derived, flags=re.MULTILINE)
    assert load_text(tmp_path, derived, "derived.toml").problem.consequences.is_derived

    rate = edit(text, 'design = "cohort-risk"', 'design = "cohort-rate"')
    rate = edit(edit(rate, "# years = 5.0", "years = 5.0"), "\ncontinuity = false", "\n")
    assert load_text(tmp_path, rate, "rate.toml").problem.study.years == 5.0

    matched = edit(text, 'design = "cohort-risk"', 'design = "matched-case-control"')
    matched = edit(matched, "# design_settings = ", "design_settings = ")
    matched = edit(edit(matched, "baseline = 0.001", "baseline = 0.2"), "\ncontinuity = false", "\n")
    study = load_text(tmp_path, matched, "matched.toml").problem.study
    assert study.setting().design.setting_values() == {"correlation": 0.2}


def test_template_names_every_design() -> None:
    text = scenario_template()
    for name in DESIGNS:
        assert re.search(rf"^# {re.escape(name)} ", text, flags=re.MULTILINE), name


# --- conversion to the core problem -----------------------------------------


def test_defaults_and_fields_reach_the_problem(tmp_path: Path) -> None:
    text = """\
title = "Invented defaults"
[study]
design = "reference-rate"
baseline = 2.0e-5
[effect]
ratio = 2.0
[prior]
p_harm = 0.3
[consequences]
missed_hazard = 5.0
false_alarm = 4.0
per_subject = 3.0
"""
    s = load_text(tmp_path, text)
    p = s.problem
    assert (p.study.allocation, p.study.years, p.study.sides, p.study.test) == (1.0, 1.0, 1, "auto")
    assert p.study.continuity is False
    assert (p.consequences.missed_hazard, p.consequences.false_alarm) == (5.0, 4.0)
    assert (p.consequences.per_subject, p.consequences.fixed) == (3.0, 0.0)
    assert p.constraints.max_n_per_group is None and p.constraints.budget is None
    assert p.p_harm == 0.3 and p.effect.is_point and p.effect.median == 2.0
    assert s.description == "" and s.currency == ""


def test_interval_level_maps_to_log_sd(tmp_path: Path) -> None:
    text = edit(BASE, "ratio = 3.0", "low = 1.2\nhigh = 4.8\nlevel = 0.8\nmedian = 2.0")
    e = load_text(tmp_path, text).problem.effect
    z = special.ndtri(0.9)  # central 80 % interval
    assert e.log_sd == pytest.approx(np.log(4.8 / 1.2) / (2 * z), rel=1e-12)
    assert e.median == 2.0


@pytest.mark.parametrize(
    ("design", "alloc", "min_n", "subjects"),
    [
        ("cohort-risk", 1.0, 1, 2),
        ("case-control", 4.0, 3, 15),
        ("cohort-rate", 2.5, 1, 4),  # 2.5 unexposed rounds half up to 3
    ],
)
def test_budget_must_cover_the_smallest_study(
    tmp_path: Path, design: str, alloc: float, min_n: int, subjects: int
) -> None:
    text = edit(BASE, 'design = "cohort-risk"', f'design = "{design}"')
    text = edit(text, "allocation = 1.0", f"allocation = {alloc}")
    text = edit(text, "[constraints]\n", f"[constraints]\nmin_n_per_group = {min_n}\n")
    least = 1000.0 + 100.0 * subjects
    ok = load_text(tmp_path, edit(text, "budget = 1.0e6", f"budget = {least}"))
    assert ok.problem.constraints.budget == least
    with pytest.raises(ScenarioError) as info:
        load_text(tmp_path, edit(text, "budget = 1.0e6", f"budget = {least - 1}"))
    assert str(info.value).endswith(f"= {least:g}) (got {least - 1:g})")
    assert info.value.key == "constraints.budget"


# --- malformed files --------------------------------------------------------

MALFORMED = [
    (
        "toml syntax",
        edit(BASE, "p_harm = 0.2", "p_harm = = 0.2"),
        "line 9, column 10",
        r"not valid TOML",
    ),
    ("unterminated", BASE + 'currency = "EUR', "end of file", r"not valid TOML"),
    (
        "unknown key",
        edit(BASE, "allocation = 1.0", "alocation = 1.0"),
        "study.alocation",
        r"is not a known key; the keys allowed here are design, baseline, allocation",
    ),
    ("unknown table", BASE + "[extras]\nx = 1\n", "extras", r"is not a known key"),
    (
        "wrong type",
        edit(BASE, "p_harm = 0.2", 'p_harm = "0.2"'),
        "prior.p_harm",
        r'must be a number \(got "0\.2"\)',
    ),
    (
        "bool for number",
        edit(BASE, "baseline = 0.001", "baseline = true"),
        "study.baseline",
        r"must be a number \(got true\)",
    ),
    (
        "table expected",
        edit(BASE, "[prior]\np_harm = 0.2\n", "").replace("title", "prior = 0.2\ntitle", 1),
        "prior",
        r"must be a table",
    ),
    (
        "probability above 1",
        edit(BASE, "p_harm = 0.2", "p_harm = 1.2"),
        "prior.p_harm",
        r"must be strictly between 0 and 1 \(got 1\.2\)",
    ),
    (
        "probability zero",
        edit(BASE, "p_harm = 0.2", "p_harm = 0"),
        "prior.p_harm",
        r"must be strictly between 0 and 1 \(got 0\)",
    ),
    (
        "negative cost",
        edit(BASE, "false_alarm = 1.0e7", "false_alarm = -3"),
        "consequences.false_alarm",
        r"must be a finite number not below 0 \(got -3\)",
    ),
    (
        "not finite",
        edit(BASE, "per_subject = 100.0", "per_subject = inf"),
        "consequences.per_subject",
        r"must be a finite number not below 0 \(got inf\)",
    ),
    (
        "ratio and interval",
        edit(BASE, "ratio = 3.0", "ratio = 3.0\nlow = 1.5\nhigh = 6.0"),
        "effect.low",
        r"give either ratio .* not both \(got 1\.5\)",
    ),
    ("no effect", edit(BASE, "ratio = 3.0", ""), "effect", r"give ratio .*or low, high and level"),
    (
        "interval incomplete",
        edit(BASE, "ratio = 3.0", "low = 1.5\nhigh = 6.0"),
        "effect.level",
        r"is required with effect\.low",
    ),
    (
        "ratio not above 1",
        edit(BASE, "ratio = 3.0", "ratio = 0.8"),
        "effect.ratio",
        r"must be above 1 \(the effect if harmful\) \(got 0\.8\)",
    ),
    (
        "high below low",
        edit(BASE, "ratio = 3.0", "low = 3.0\nhigh = 2.0\nlevel = 0.9"),
        "effect.high",
        r"must be above effect\.low",
    ),
    (
        "effect beyond risk limit",
        edit(BASE, "baseline = 0.001", "baseline = 0.4"),
        "effect",
        r"must stay below 2\.5",
    ),
    (
        "baseline risk above 1",
        edit(BASE, "baseline = 0.001", "baseline = 1.5"),
        "study.baseline",
        r"must be strictly between 0 and 1 \(got 1\.5\)",
    ),
    (
        "cost given and derived",
        edit(BASE, "missed_hazard = 1.0e8", "missed_hazard = 1.0e8\nexposed_population = 1000"),
        "consequences.exposed_population",
        r"not both \(got 1000(\.0)?\)",
    ),
    (
        "derivation keys missing",
        edit(BASE, "missed_hazard = 1.0e8", "exposed_population = 1000\nbackground_rate = 1e-4"),
        "consequences.cost_per_case",
        r"is required with consequences\.exposed_population",
    ),
    (
        "no missed-hazard cost",
        edit(BASE, "missed_hazard = 1.0e8", ""),
        "consequences.missed_hazard",
        r"is required, unless",
    ),
    (
        "allocation with reference-rate",
        edit(edit(BASE, 'design = "cohort-risk"', 'design = "reference-rate"'), "allocation = 1.0", "allocation = 2.0"),
        "study.allocation",
        r"does not apply to the reference-rate design .*\(got 2\)",
    ),
    (
        "years with cohort-risk",
        edit(BASE, "allocation = 1.0", "years = 5.0"),
        "study.years",
        r"does not apply to the cohort-risk design",
    ),
    (
        "continuity with cohort-rate",
        edit(
            edit(BASE, 'design = "cohort-risk"', 'design = "cohort-rate"'),
            "allocation = 1.0",
            "continuity = true",
        ),
        "study.continuity",
        r"does not apply to the cohort-rate design \(a correction of two proportions\); it applies to "
        r"cohort-risk, case-control \(got true\)",
    ),
    (
        "unknown design",
        edit(BASE, 'design = "cohort-risk"', 'design = "cohort"'),
        "study.design",
        # the list of designs is read from the registry
        r"must be "
        + re.escape(", ".join(repr(d) for d in list(DESIGNS)[:-1]))
        + f" or {list(DESIGNS)[-1]!r}"
        + r" \(got \"cohort\"\)",
    ),
    (
        "sides true",
        edit(BASE, "allocation = 1.0", "sides = true"),
        "study.sides",
        r"must be a whole number \(got true\)",
    ),
    (
        "sides 3",
        edit(BASE, "allocation = 1.0", "sides = 3"),
        "study.sides",
        r"must be 1 or 2 \(a whole number\) \(got 3\)",
    ),
    ("missing key", edit(BASE, "p_harm = 0.2", ""), "prior.p_harm", r"is required but missing$"),
    ("empty title", edit(BASE, '"Invented test case"', '""'), "title", r"must not be empty"),
    (
        "budget below fixed cost",
        edit(BASE, "budget = 1.0e6", "budget = 500.0"),
        "constraints.budget",
        r"must at least cover the fixed cost .*\(got 500\)",
    ),
    (
        "max below min",
        edit(BASE, "max_n_per_group = 2000", "max_n_per_group = 5\nmin_n_per_group = 6"),
        "constraints.max_n_per_group",
        r"must not be below constraints\.min_n_per_group \(6\) \(got 5\)",
    ),
    (
        "size written as float",
        edit(BASE, "max_n_per_group = 2000", "max_n_per_group = 2e3"),
        "constraints.max_n_per_group",
        r"whole number, written without a decimal point \(got 2000\.0\)",
    ),
    (
        "two errors",
        edit(edit(BASE, "p_harm = 0.2", 'p_harm = "high"'), "false_alarm = 1.0e7", 'false_alarm = "low"'),
        "prior.p_harm",
        r"\(got \"high\"\) \(and 1 more\)$",
    ),
]


@pytest.mark.parametrize(("text", "key", "reason"), [m[1:] for m in MALFORMED], ids=[m[0] for m in MALFORMED])
def test_malformed_scenario_gives_one_line_naming_file_and_key(
    tmp_path: Path, text: str, key: str, reason: str
) -> None:
    path = tmp_path / "scenario.toml"
    with pytest.raises(ScenarioError) as info:
        load_text(tmp_path, text)
    message = str(info.value)
    assert "\n" not in message
    assert message.startswith(f"{path}: {key}: "), message
    assert re.search(reason, message[len(f"{path}: {key}: ") :]), message
    assert info.value.key == key and info.value.file == str(path)
    assert isinstance(info.value, DecideError) and isinstance(info.value, ValueError)


def test_message_matches_the_documented_example(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    Path("scenario.toml").write_text(edit(BASE, "false_alarm = 1.0e7", "false_alarm = -3"))
    with pytest.raises(ScenarioError) as info:
        load_scenario("scenario.toml")
    assert str(info.value) == "scenario.toml: consequences.false_alarm: must be a finite number not below 0 (got -3)"
    assert info.value.params == ("consequences.false_alarm",)


def test_unreadable_files(tmp_path: Path) -> None:
    with pytest.raises(ScenarioError, match=r": no such file$"):
        load_scenario(tmp_path / "absent.toml")
    with pytest.raises(ScenarioError, match=r": is a folder, not a file$"):
        load_scenario(tmp_path)
    (tmp_path / "latin1.toml").write_bytes(b'title = "caf\xe9"\n')
    with pytest.raises(ScenarioError, match=r"latin1\.toml: is not UTF-8 text"):
        load_scenario(tmp_path / "latin1.toml")


def test_parse_scenario_names_the_given_source() -> None:
    assert parse_scenario(BASE, "inline").title == "Invented test case"
    with pytest.raises(ScenarioError, match=r"^inline: line 1, column 9: not valid TOML"):
        parse_scenario("title = = 1", "inline")


# --- JSON Schema ----------------------------------------------------------


def test_json_schema_describes_every_table_and_key() -> None:
    schema = scenario_json_schema()
    json.loads(json.dumps(schema))  # plain JSON
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert schema["type"] == "object" and schema["additionalProperties"] is False
    assert set(schema["required"]) == {"title", "study", "effect", "prior", "consequences"}
    tables = {"study", "effect", "prior", "consequences", "constraints"}
    assert tables < set(schema["properties"])
    for table in tables:
        ref = schema["properties"][table]["$ref"]
        sub = schema["$defs"][ref.rsplit("/", 1)[1]]
        assert sub["type"] == "object" and sub["additionalProperties"] is False
        for key, prop in sub["properties"].items():
            assert prop.get("description"), f"{table}.{key} has no description"
    text = json.dumps(schema)
    assert "null" not in text  # TOML cannot write null; optional keys are simply absent
    study = schema["$defs"]["StudyModel"]["properties"]
    assert study["design"]["enum"] == list(DESIGNS)
    prior = schema["$defs"]["PriorModel"]["properties"]["p_harm"]
    assert prior["type"] == "number" and "strictly between 0 and 1" in prior["description"]


def test_model_vocabulary_matches_the_core() -> None:
    from typing import get_args

    from decide.engine.study import TESTS

    assert set(get_args(DesignName)) == set(DESIGNS)
    assert set(get_args(TestName)) == set(TESTS)


def test_models_are_frozen() -> None:
    model = load_scenario(SCENARIOS[0]).model
    with pytest.raises(ValueError, match="frozen"):
        model.title = "changed"


# --- atomic writes ----------------------------------------------------------


def test_write_text_atomic_writes_and_refuses_to_clobber(tmp_path: Path) -> None:
    target = tmp_path / "new.toml"
    assert write_text_atomic(target, "a = 1\n") == target
    assert target.read_text() == "a = 1\n"
    with pytest.raises(DecideError, match=re.escape(f"{target}: already exists")) as info:
        write_text_atomic(target, "a = 2\n")
    assert info.value.params == (str(target),)
    assert target.read_text() == "a = 1\n"  # old file intact
    write_text_atomic(target, "a = 3\n", overwrite=True)
    assert target.read_text() == "a = 3\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["new.toml"]  # no temp files left


def test_write_text_atomic_gives_new_files_the_usual_mode(tmp_path: Path) -> None:
    umask = os.umask(0o022)
    os.umask(umask)
    target = write_text_atomic(tmp_path / "mode.toml", "x = 1\n")
    assert stat.S_IMODE(target.stat().st_mode) == 0o666 & ~umask


def test_write_text_atomic_reports_an_unwritable_path(tmp_path: Path) -> None:
    target = tmp_path / "no-such-folder" / "x.toml"
    with pytest.raises(DecideError, match=re.escape(f"{target}: cannot be written")):
        write_text_atomic(target, "x = 1\n")
    assert list(tmp_path.iterdir()) == []


def test_written_template_round_trips(tmp_path: Path) -> None:
    path = write_text_atomic(tmp_path / "mine.toml", scenario_template())
    assert load_scenario(path).problem == parse_scenario(scenario_template()).problem


def test_a_design_setting_may_carry_a_source_in_either_form() -> None:
    """``[sources.study.design_settings]`` names each setting, as the report's input rows do."""

    matched = (REPO / "scenarios" / "quillmere-matched.toml").read_text(encoding="utf-8")
    dotted = matched + '\n[sources]\n"study.design_settings.correlation" = "pilot survey (invented)"\n'
    nested = matched + '\n[sources.study.design_settings]\ncorrelation = "pilot survey (invented)"\n'
    for text in (dotted, nested):
        loaded = parse_scenario(text, "s.toml")
        assert loaded.model.sources == {"study.design_settings.correlation": "pilot survey (invented)"}
    with pytest.raises(ScenarioError, match=r"sources\.study\.design_settings\.corelation: names no input"):
        parse_scenario(matched + '\n[sources.study.design_settings]\ncorelation = "x"\n', "s.toml")
    solvent = (REPO / "scenarios" / "solvent-cohort.toml").read_text(encoding="utf-8")
    with pytest.raises(ScenarioError, match=r"sources\.study\.design_settings\.correlation: names no input"):
        parse_scenario(solvent + '\n[sources.study.design_settings]\ncorrelation = "x"\n', "s.toml")
