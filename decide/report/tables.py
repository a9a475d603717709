"""Plain machine and document formats: JSON documents, CSV, Markdown.

Machines (JSON, CSV) get full precision, snake_case keys and ``null`` / an
empty cell for every value that is not a finite number; people (Markdown) get
the formats of :mod:`decide.report.numbers`, as on screen.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Sequence
from typing import Any

from ..decision.optimize import Comparison, Decision
from ..decision.problem import Problem
from ..designs import get_design
from . import numbers as nb
from . import rule_words
from .sentences import best_action, decision_record, recommendation
from .text import CAUTION, NO_FINITE_RATIO, literal, markdown_literal

#: Columns of the flat comparison formats (CSV).
COMPARE_COLUMNS = (
    "policy", "feasible", "action", "test", "alpha", "attained_alpha", "beta", "power",
    "power_at_design_effect", "n_per_group", "n_total", "expected_loss", "regret",
    "p_harm_given_negative", "p_harm_given_positive", "detectable_effect", "implied_cost_ratio",
    "net_benefit", "reason",
)


def decision_rows(decisions: Sequence[Decision]) -> list[dict[str, Any]]:
    """One flat row per policy, for machines."""
    return [{k: nb.for_json(d.to_dict().get(k)) for k in COMPARE_COLUMNS} for d in decisions]


def to_csv(decisions: Sequence[Decision]) -> str:
    """The comparison as CSV, full precision, empty cells for missing or non-finite values."""
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=COMPARE_COLUMNS, lineterminator="\n")
    w.writeheader()
    for row in decision_rows(decisions):
        w.writerow({k: "" if v is None else literal(v) if isinstance(v, str) else v for k, v in row.items()})
    return buf.getvalue()


def units(problem: Problem, currency: str) -> dict[str, str]:
    """What the numbers of a comparison are measured in."""
    d = get_design(problem.study.design)
    return {
        "money": currency,
        "baseline": d.baseline_name,
        "effect": d.effect_name,
        "n_per_group": d.size_name,
    }


def compare_document(
    decisions: Sequence[Decision], problem: Problem, scenario: dict[str, Any], currency: str
) -> dict[str, Any]:
    """``compare --json``: the inputs, the no-study options, the best action and one entry per policy.

    ``scenario`` echoes the scenario as read (title, description, file, and
    its validated contents).  The no-study options do not depend on the
    policy, so they appear once, not in every policy's entry.  ``best`` is
    the best of all actions (a study or deciding now) when ``decisions`` is
    a :class:`~decide.decision.optimize.Comparison`.
    """
    policies = []
    for d in decisions:
        entry = decision_record(d, currency)
        entry.pop("no_study", None)
        policies.append(entry)
    best = None
    if isinstance(decisions, Comparison):
        best = {"action": decisions.best_action, "policy": decisions.best_policy, "expected_loss": decisions.best_loss,
                "in_words": best_action(decisions, currency)}
    document: dict[str, Any] = nb.for_json(
        {
            "scenario": scenario,
            "currency": currency,
            "units": units(problem, currency),
            "stated_cost_ratio": decisions[0].stated_cost_ratio if decisions else None,
            "no_study": dict(decisions[0].no_study) if decisions else {},
            "best": best,
            "policies": policies,
        }
    )
    return document


_HEAD = ["policy", "meets the constraints", "alpha", "attained alpha", "beta", "power (design)",
         "per group", "in all", "expected loss", "regret", "P(harm \\| negative)",
         "P(harm \\| positive)", "detects (80%)", "implied cost ratio"]


def _markdown_row(d: Decision, cur: str) -> str:
    cells = [markdown_literal(d.title), "yes" if d.feasible else "no", rule_words.nominal_text(d),
             nb.probability(rule_words.attained(d)), nb.probability(d.beta), nb.probability(d.power_at_design_effect),
             nb.count(d.n_per_group), nb.count(d.n_total), nb.money(d.expected_loss, cur),
             nb.money(d.regret, cur), nb.probability(d.p_harm_given_negative),
             nb.probability(d.p_harm_given_positive), nb.number(d.detectable_effect),
             nb.number(d.implied_cost_ratio)]
    return "| " + " | ".join(cells) + " |"


def to_markdown(
    decisions: Sequence[Decision], title: str, inputs: list[tuple[str, str]] | None = None, currency: str = ""
) -> str:
    """The comparison as a Markdown table a board can read, with the inputs and the caution."""
    cur = markdown_literal(currency)
    lines = [f"# {markdown_literal(title)}", ""]
    if inputs:
        lines += ["## Inputs", ""]
        lines += [f"- {markdown_literal(label)}: {markdown_literal(value)}" for label, value in inputs]
        lines += ["", "## Policies", ""]
    lines += ["| " + " | ".join(_HEAD) + " |", "|" + "---|" * len(_HEAD)]
    lines += [_markdown_row(d, cur) for d in decisions]
    ratio = decisions[0].stated_cost_ratio
    stated = NO_FINITE_RATIO if ratio is None else nb.number(ratio)
    lines += ["", f"Stated cost ratio (miss : false alarm): {stated}.", ""]
    lines += [f"- **{markdown_literal(d.title)}**: {markdown_literal(d.reason)}." for d in decisions if not d.feasible]
    if isinstance(decisions, Comparison):
        lines += ["", markdown_literal(best_action(decisions, currency))]
    lines += ["", rule_words.NOMINAL_AND_ATTAINED, ""]
    if any(d.test in ("normal", "normal-cc") for d in decisions):
        lines += [rule_words.NORMAL_LOSS_NOTE, ""]
    lines += ["## Decision rules", ""]
    for d in decisions:
        lines += rule_words.markdown_rule(d.rule, markdown_literal(d.title))
    lines += ["", f"_{CAUTION}_", ""]
    return "\n".join(lines)


def decision_markdown(d: Decision, title: str, inputs: list[tuple[str, str]], currency: str) -> str:
    """One policy's decision as a Markdown document: inputs, the choice, its rule, the caution."""
    cur = markdown_literal(currency)
    lines = [f"# {markdown_literal(title)}", "", f"## {markdown_literal(d.title)}", ""]
    lines += ["### Inputs", ""]
    lines += [f"- {markdown_literal(label)}: {markdown_literal(value)}" for label, value in inputs] + [""]
    rows: list[tuple[str, str]] = [
        ("meets the constraints", "yes" if d.feasible else f"no: {markdown_literal(d.reason)}")]
    if d.n_per_group is not None and d.loss_parts is not None:
        rows += [("test", d.method or nb.MISSING), *rule_words.alpha_rows(d),
                 ("beta (miss probability, averaged over the effect)", nb.probability(d.beta)),
                 (f"power at the design effect {nb.number(d.design_effect)}", nb.probability(d.power_at_design_effect)),
                 ("size per group", nb.count(d.n_per_group)), ("subjects in all", nb.count(d.n_total)),
                 ("expected loss", nb.money(d.expected_loss, cur)),
                 ("from missed hazards", nb.money(d.loss_parts["missed"], cur)),
                 ("from false alarms", nb.money(d.loss_parts["false_alarm"], cur)),
                 ("study cost", nb.money(d.loss_parts["study"], cur))]
    rows += [("loss if flagged now, no study", nb.money(d.no_study["flag_now"], cur)),
             ("loss if cleared now, no study", nb.money(d.no_study["clear_now"], cur)),
             ("expected net benefit of the study", nb.money(d.net_benefit, cur)),
             ("P(harmful \\| negative result)", nb.probability(d.p_harm_given_negative)),
             ("P(harmful \\| positive result), the share of flags that are true",
              nb.probability(d.p_harm_given_positive)),
             ("smallest effect detected with power 0.8", nb.number(d.detectable_effect)),
             ("implied cost ratio (miss : false alarm)", nb.number(d.implied_cost_ratio)),
             ("stated cost ratio (miss : false alarm)", nb.number(d.stated_cost_ratio))]
    lines += ["| quantity | value |", "|---|---|"] + [f"| {k} | {v} |" for k, v in rows]
    lines += ["", f"**{markdown_literal(recommendation(d, currency))}**", ""]
    lines += [f"- Warning: {markdown_literal(w)}" for w in d.warnings] + ([""] if d.warnings else [])
    lines += ["### Decision rule", ""] + rule_words.markdown_rule(d.rule)
    lines += [rule_words.NOMINAL_AND_ATTAINED, ""]
    if d.test in ("normal", "normal-cc"):
        lines += [rule_words.NORMAL_LOSS_NOTE, ""]
    lines += [f"_{CAUTION}_", ""]
    return "\n".join(lines)
