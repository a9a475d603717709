"""A report's results as plain data for the templates: text, and numbers that know their source.

Every number is a :class:`Num`: the engine's value, its shown text (from
:mod:`decide.report.numbers`) and ``key``, the result field it comes from
(``decision.alpha``, ``comparison.decisions[2].regret``,
``simulation.power.simulated``, ``inputs.prior.p_harm``).  Templates print
``text`` and carry ``key`` and ``value`` as attributes, so a test can hold
every shown number against the result object.  Sentences are lists of
pieces, text and numbers; they are composed in :mod:`.justify`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from ..designs import get_design
from ..scenario.sources import INPUT_TABLES, source_of
from . import numbers as nb
from . import rule_words
from .document import ReportResults
from .sentences import best_action, recommendation
from .text import CAUTION

#: How each kind of number is shown.
KINDS = ("money", "probability", "number", "count")


@dataclass(frozen=True)
class Num:
    """One shown number: ``text`` is ``value`` formatted; ``key`` names its result field."""

    key: str
    value: float | int | None
    text: str

    @property
    def plain(self) -> str:
        return self.text


def num(key: str, value: Any, kind: str, currency: str = "") -> Num:
    """A number of ``kind`` (money, probability, number, count), formatted by :mod:`.numbers`."""
    v = None if value is None else (int(value) if kind == "count" else float(value))
    if kind == "money":
        text = nb.money(v, currency)
    elif kind == "probability":
        text = nb.probability(v)
    elif kind == "count":
        text = nb.count(v)
    else:
        text = nb.number(v)
    return Num(key, v, text)


def _nominal(key: str, d: Any) -> Num:
    """The nominal alpha as the rule shows it: rounded into its cut-off interval, never below the cut-off."""
    shown = num(key, d.alpha, "probability")
    return Num(key, shown.value, rule_words.nominal_text(d)) if d.alpha is not None else shown


#: Units of the inputs, by key path ("$" is the currency; "@..." a design word).
_UNITS = {
    "study.baseline": "@baseline_name",
    "study.allocation": "@allocation_name",
    "study.years": "years per subject",
    "study.sides": "1 one-sided, 2 two-sided",
    "effect.ratio": "@effect_name",
    "effect.low": "@effect_name",
    "effect.high": "@effect_name",
    "effect.median": "@effect_name",
    "effect.level": "share of the prior",
    "prior.p_harm": "probability",
    "consequences.missed_hazard": "$",
    "consequences.false_alarm": "$",
    "consequences.per_subject": "$ per subject",
    "consequences.fixed": "$",
    "consequences.cost_per_case": "$ per case",
    "consequences.exposed_population": "people",
    "consequences.background_rate": "cases per person-year",
    "consequences.horizon_years": "years",
    "constraints.max_n_per_group": "@size_name",
    "constraints.min_n_per_group": "@size_name",
    "constraints.max_alpha": "probability",
    "constraints.min_power": "probability",
    "constraints.budget": "$",
}
_MONEY = {k for k, u in _UNITS.items() if u.startswith("$")}
_COUNTS = {
    "constraints.max_n_per_group",
    "constraints.min_n_per_group",
    "consequences.exposed_population",
    "study.sides",
}


def _unit(key: str, design: Any, currency: str) -> str:
    unit = _UNITS.get(key, "")
    if unit.startswith("@"):
        return str(getattr(design, unit[1:]) or "")
    return unit.replace("$", currency or "cost units").strip()


def _stated(table: str, part: Any) -> list[tuple[str, Any]]:
    """(key path, value) of each input the file states; a table of settings gives one row per setting."""
    out: list[tuple[str, Any]] = []
    for name in type(part).model_fields:
        value = getattr(part, name)
        if value is None or name == "currency" or name not in part.model_fields_set:
            continue
        if isinstance(value, dict):
            out += [(f"{table}.{name}.{k}", v) for k, v in value.items()]
        else:
            out.append((f"{table}.{name}", value))
    return out


def input_rows(r: ReportResults) -> list[dict[str, Any]]:
    """The inputs as stated in the file: key path, value, unit, source."""
    model, currency = r.loaded.model, r.loaded.currency
    design = get_design(model.study.design)
    rows = []
    for table in INPUT_TABLES:
        part = getattr(model, table)
        for key, value in _stated(table, part):
            if isinstance(value, bool) or isinstance(value, str):
                shown: Any = str(value).lower() if isinstance(value, bool) else value
            else:
                kind = "money" if key in _MONEY else "count" if key in _COUNTS else "number"
                shown = num(f"inputs.{key}", value, kind, "")
            rows.append(
                {
                    "key": key,
                    "value": shown,
                    "unit": _unit(key, design, currency),
                    "source": source_of(model.sources, key),
                    "sourced": key in model.sources,
                }
            )
    return rows


def _action_words(action: str) -> str:
    return {
        "study": "run the study",
        "flag-now": "flag now",
        "clear-now": "clear now",
        "not-available": "not available",
    }.get(action, action)


def chosen(r: ReportResults) -> dict[str, Any]:
    """The recommended study's numbers."""
    d, cur = r.decision, r.loaded.currency
    parts = d.loss_parts or {}
    rule = getattr(d, "rule", None)
    return {
        "sentence": recommendation(d, cur),
        "best": best_action(r.comparison, cur),
        "action": _action_words(d.action),
        "test": d.method or "-",
        "alpha": _nominal("decision.alpha", d),
        "attained_alpha": num("decision.attained_alpha", d.attained_alpha, "probability"),
        "power": num("decision.power", d.power, "probability"),
        "power_at_design_effect": num("decision.power_at_design_effect", d.power_at_design_effect, "probability"),
        "design_effect": num("decision.design_effect", d.design_effect, "number"),
        "n_per_group": num("decision.n_per_group", d.n_per_group, "count"),
        "n_total": num("decision.n_total", d.n_total, "count"),
        "size_name": get_design(d.design).size_name,
        "rule": rule_rows(rule),
        "expected_loss": num("decision.expected_loss", d.expected_loss, "money", cur),
        "missed": num("decision.loss_parts.missed", parts.get("missed"), "money", cur),
        "false_alarm": num("decision.loss_parts.false_alarm", parts.get("false_alarm"), "money", cur),
        "study": num("decision.loss_parts.study", parts.get("study"), "money", cur),
        "flag_now": num("decision.no_study.flag_now", d.no_study["flag_now"], "money", cur),
        "clear_now": num("decision.no_study.clear_now", d.no_study["clear_now"], "money", cur),
        "no_study_action": _action_words(d.no_study_action),
        "net_benefit": num("decision.net_benefit", d.net_benefit, "money", cur),
        "stated_cost_ratio": num("decision.stated_cost_ratio", d.stated_cost_ratio, "number"),
        "warnings": list(d.warnings),
    }


#: Most rows of the rule's threshold table in a report; longer tables show evenly spaced rows.
RULE_ROWS = 24


def rule_rows(rule: Any) -> dict[str, Any] | None:
    """The decision rule in counts: its sentence, its thresholds by total, and what the table covers."""
    if rule is None:
        return None
    from .rule_words import _coverage, runs, threshold_text, totals_text

    groups = runs(rule)
    shown = groups
    if len(groups) > RULE_ROWS:
        picks = sorted({round(i * (len(groups) - 1) / (RULE_ROWS - 1)) for i in range(RULE_ROWS)})
        shown = [groups[i] for i in picks]
    single = None  # one group: the sentence already names the threshold
    return {
        "statement": rule.statement,
        "total_name": rule.total_name or "",
        "count_name": rule.count_name,
        "rows": [(totals_text(a, b), threshold_text(up, down)) for a, b, up, down in shown],
        "thinned": len(shown) < len(groups),
        "all_rows": len(groups),
        "single": single,
        "coverage": _coverage(rule) if groups else "",
        "cutoff": rule.cutoff_shown,
    }


def _implied(i: int, d: Any) -> Any:
    """The implied cost ratio in pieces that read as :func:`~.numbers.ratio_range` does on screen."""
    key = f"comparison.decisions[{i}]"
    bounds = d.implied_cost_ratio_range
    if not nb.is_range(bounds):
        return [num(f"{key}.implied_cost_ratio", d.implied_cost_ratio, "number")]
    lo, hi = bounds
    low, high = (
        num(f"{key}.implied_cost_ratio_range[0]", lo, "number"),
        num(f"{key}.implied_cost_ratio_range[1]", hi, "number"),
    )
    if math.isinf(hi):
        return [low, " or more"]
    if lo <= 0:
        return [high, " or less"]
    return [low, " to ", high]


def policy_rows(r: ReportResults) -> list[dict[str, Any]]:
    """The policies side by side, as in the comparison."""
    cur = r.loaded.currency
    rows = []
    for i, d in enumerate(r.comparison):
        k = f"comparison.decisions[{i}]"
        rows.append(
            {
                "title": d.title,
                "summary": d.summary,
                "action": _action_words(d.action),
                "reason": d.reason or "",
                "alpha": _nominal(f"{k}.alpha", d),
                "attained_alpha": num(f"{k}.attained_alpha", d.attained_alpha, "probability"),
                "power": num(f"{k}.power", d.power, "probability"),
                "n_per_group": num(f"{k}.n_per_group", d.n_per_group, "count"),
                "expected_loss": num(f"{k}.expected_loss", d.expected_loss, "money", cur),
                "regret": num(f"{k}.regret", d.regret, "money", cur),
                "true_flags": num(f"{k}.p_harm_given_positive", d.p_harm_given_positive, "probability"),
                "harm_if_negative": num(f"{k}.p_harm_given_negative", d.p_harm_given_negative, "probability"),
                "detectable": num(f"{k}.detectable_effect", d.detectable_effect, "number"),
                "implied": _implied(i, d),
            }
        )
    return rows


def tornado_rows(r: ReportResults) -> list[dict[str, Any]]:
    """The one-way sensitivity: each input's range, the loss at its ends, its break-even values."""
    if r.tornado is None:
        return []
    cur, rows = r.loaded.currency, []
    for i, w in enumerate(r.tornado.rows):
        k = f"tornado.rows[{i}]"
        breaks = [
            [
                num(f"{k}.thresholds[{j}].value", t.value, "number"),
                f" ({_action_words(t.below)} below, {_action_words(t.above)} above)",
            ]
            for j, t in enumerate(w.thresholds)
            if t.value is not None and t.kind == "action"
        ]
        rows.append(
            {
                "input": w.input,
                "central": num(f"{k}.central", w.central, "number"),
                "low": num(f"{k}.low.value", w.low.value, "number"),
                "high": num(f"{k}.high.value", w.high.value, "number"),
                "low_loss": num(f"{k}.low.expected_loss", w.low.expected_loss, "money", cur),
                "high_loss": num(f"{k}.high.expected_loss", w.high.expected_loss, "money", cur),
                "low_action": _action_words(w.low.action),
                "high_action": _action_words(w.high.action),
                "breaks": breaks,
            }
        )
    return rows


def simulation_rows(r: ReportResults) -> list[dict[str, Any]]:
    """Analytic beside simulated, with the simulated value's interval."""
    s = r.simulation
    if s is None:
        return []
    cur, rows = r.loaded.currency, []
    for name, label in (
        ("false_alarm", "false-alarm probability"),
        ("power", "power (over the prior)"),
        ("loss", "loss"),
    ):
        c = getattr(s, name)
        kind = "money" if name == "loss" else "probability"
        k = f"simulation.{name}"
        rows.append(
            {
                "label": label,
                "analytic": num(f"{k}.analytic", c.analytic, kind, cur),
                "simulated": num(f"{k}.simulated", c.simulated, kind, cur),
                "low": num(f"{k}.interval.low", c.interval.low, kind, cur) if c.interval else nb.MISSING,
                "high": num(f"{k}.interval.high", c.interval.high, kind, cur) if c.interval else nb.MISSING,
                "se": num(f"{k}.standard_error", c.standard_error, kind, cur),
                "agrees": "no, differs by more than 4 standard errors" if c.flagged else "yes",
            }
        )
    return rows


def probabilistic_rows(r: ReportResults) -> dict[str, Any] | None:
    """The draws' summary: how often each action is best, and the value of perfect information."""
    p = r.probabilistic
    if p is None:
        return None
    cur = r.loaded.currency
    return {
        "draws": num("probabilistic.draws", p.draws, "count"),
        "inputs": [f"{k}: {v}" for k, v in p.inputs.items()],
        "actions": [
            (_action_words(a), num(f"probabilistic.action_probability.{a}", v, "probability"))
            for a, v in p.action_probability.items()
        ],
        "regret": num("probabilistic.expected_regret_of_central", p.expected_regret_of_central, "money", cur),
        "evpi": num("probabilistic.evpi", p.evpi, "money", cur),
    }


def cautions(r: ReportResults) -> list[str]:
    """The assumptions and cautions every report carries."""
    d = r.decision
    exact = d.test == "exact"
    test = (
        "The chosen study is analysed with an exact test (" + (d.method or "") + "); its attained alpha "
        "is below the nominal one because counts are whole numbers."
        if exact
        else "The chosen study is analysed with a normal approximation (" + (d.method or "-") + "); it can be "
        "inaccurate when few cases are expected, where an exact test is used instead."
    )
    return [
        CAUTION,
        "The prior probability of harm, the effect worth detecting and the costs are value judgments; the "
        "responsible body must own them. The report only shows what follows from them.",
        test,
        "Confounding, selection and information bias and misclassification of exposure or disease are outside "
        "the model: the power and losses assume a study free of them.",
        "Costs are in one currency or unit, as stated; nothing is discounted or converted.",
    ]
