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
from .text import CAUTION, NO_FINITE_RATIO, POSTERIOR_NOTE, RANGE_NOTE, literal, markdown_literal

#: Columns of the flat comparison formats (CSV).
COMPARE_COLUMNS = (
    "policy",
    "feasible",
    "action",
    "test",
    "alpha",
    "attained_alpha",
    "beta",
    "power",
    "power_at_design_effect",
    "n_per_group",
    "n_total",
    "expected_loss",
    "regret",
    "p_harm_given_negative",
    "p_harm_given_positive",
    "detectable_effect",
    "implied_cost_ratio",
    "implied_cost_ratio_low",
    "implied_cost_ratio_high",
    "net_benefit",
    "study_cost",
    "expected_loss_if_allowed",
    "reason",
)


def _flat(d: Decision) -> dict[str, Any]:
    """A decision's facts as one flat row; a policy not available keeps its loss apart.

    The study a policy would need but the constraints do not allow has no
    ``expected_loss``, ``regret`` or ``net_benefit`` in the row, so a sort or a minimum over
    that column never ranks it above the available choices; its loss stands
    in ``expected_loss_if_allowed``.
    """
    row = d.to_dict()
    low, high = d.implied_cost_ratio_range or (None, None)
    row.update(
        implied_cost_ratio_low=low,
        implied_cost_ratio_high=high,
        study_cost=(d.loss_parts or {}).get("study"),
        expected_loss_if_allowed=None,
    )
    if not d.feasible:
        row.update(expected_loss=None, regret=None, net_benefit=None, expected_loss_if_allowed=d.expected_loss)
    return row


def _now_rows(decisions: Sequence[Decision]) -> list[dict[str, Any]]:
    """Flagging and clearing now as rows of a comparison (none for a bare list of decisions)."""
    if not isinstance(decisions, Comparison):
        return []
    c = decisions
    return [
        {"policy": action, "action": action, "expected_loss": loss, "regret": loss - c.best_loss}
        for action, loss in (("flag-now", c.flag_now), ("clear-now", c.clear_now))
    ]


def decision_rows(decisions: Sequence[Decision]) -> list[dict[str, Any]]:
    """One flat row per policy, for machines, after one row per no-study action in a comparison."""
    rows = [*_now_rows(decisions), *(_flat(d) for d in decisions)]
    return [{k: nb.for_json(row.get(k)) for k in COMPARE_COLUMNS} for row in rows]


def to_csv(decisions: Sequence[Decision]) -> str:
    """The comparison as CSV, full precision, empty cells for missing or non-finite values.

    In a comparison the first two rows are the no-study actions (``policy``
    ``flag-now`` and ``clear-now``); a policy that is not available has its
    loss in ``expected_loss_if_allowed`` only (see :func:`_flat`).
    """
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
        best = {
            "action": decisions.best_action,
            "policy": decisions.best_policy,
            "expected_loss": decisions.best_loss,
            "in_words": best_action(decisions, currency),
        }
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


_HEAD = [
    "choice",
    "action",
    "alpha",
    "attained alpha",
    "beta",
    "power (design)",
    "per group",
    "in all",
    "expected loss",
    "regret",
    "P(harm \\| negative)",
    "P(harm \\| positive)",
    "detects (80%)",
    "implied cost ratio",
]

_UNAVAILABLE_HEAD = [
    "policy",
    "would need: per group",
    "would need: in all",
    "alpha",
    "power (design)",
    "would cost: study",
    "if allowed, expected loss",
]

_ACTION_WORDS = {"study": "study", "flag-now": "flag now", "clear-now": "clear now"}


def _markdown_row(d: Decision, cur: str) -> str:
    cells = [
        markdown_literal(d.title),
        _ACTION_WORDS.get(d.action, d.action),
        rule_words.nominal_text(d),
        nb.probability(rule_words.attained(d)),
        nb.probability(d.beta),
        nb.probability(d.power_at_design_effect),
        nb.count(d.n_per_group),
        nb.count(d.n_total),
        nb.money(d.expected_loss, cur),
        nb.money(d.regret, cur),
        nb.probability(d.p_harm_given_negative),
        nb.probability(d.p_harm_given_positive),
        nb.number(d.detectable_effect),
        nb.ratio_range(d.implied_cost_ratio, d.implied_cost_ratio_range),
    ]
    return "| " + " | ".join(cells) + " |"


def _markdown_now_rows(decisions: Sequence[Decision], cur: str) -> list[str]:
    """Flagging and clearing now as the first rows of a comparison's table."""
    if not isinstance(decisions, Comparison):
        return []
    c = decisions
    dashes = [nb.MISSING] * 6
    return [
        f"| {title} | no study | " + " | ".join(dashes) + f" | {nb.money(loss, cur)} | "
        f"{nb.money(loss - c.best_loss, cur)} | " + " | ".join([nb.MISSING] * 4) + " |"
        for title, loss in (("Flag now, no study", c.flag_now), ("Clear now, no study", c.clear_now))
    ]


def _markdown_unavailable(decisions: Sequence[Decision], cur: str) -> list[str]:
    """The policies the constraints rule out, in their own table: what each would need and cost."""
    out = [d for d in decisions if not d.feasible]
    if not out:
        return []
    lines = [
        "",
        "## Not available under the constraints",
        "",
        "What each policy would need; the constraints do not allow it, so it is not a choice.",
        "",
        "| " + " | ".join(_UNAVAILABLE_HEAD) + " |",
        "|" + "---|" * len(_UNAVAILABLE_HEAD),
    ]
    for d in out:
        cells = [
            markdown_literal(d.title),
            nb.count(d.n_per_group),
            nb.count(d.n_total),
            rule_words.nominal_text(d),
            nb.probability(d.power_at_design_effect),
            nb.money((d.loss_parts or {}).get("study"), cur),
            nb.money(d.expected_loss, cur),
        ]
        lines.append("| " + " | ".join(cells) + " |")
    lines += [""] + [f"- **{markdown_literal(d.title)}**: {markdown_literal(d.reason)}." for d in out]
    return lines


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
    lines += _markdown_now_rows(decisions, cur)
    lines += [_markdown_row(d, cur) for d in decisions if d.feasible]
    ratio = decisions[0].stated_cost_ratio
    stated = NO_FINITE_RATIO if ratio is None else nb.number(ratio)
    lines += ["", f"Stated cost ratio (miss : false alarm): {stated}. {POSTERIOR_NOTE}"]
    if any(nb.is_range(d.implied_cost_ratio_range) for d in decisions):
        lines += ["", RANGE_NOTE]
    lines += _markdown_unavailable(decisions, cur)
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
        ("meets the constraints", "yes" if d.feasible else f"no: {markdown_literal(d.reason)}")
    ]
    if d.n_per_group is not None and d.loss_parts is not None:
        rows += [
            ("test", d.method or nb.MISSING),
            *rule_words.alpha_rows(d),
            ("beta (miss probability, averaged over the effect)", nb.probability(d.beta)),
            (f"power at the design effect {nb.number(d.design_effect)}", nb.probability(d.power_at_design_effect)),
            ("size per group", nb.count(d.n_per_group)),
            ("subjects in all", nb.count(d.n_total)),
            ("expected loss", nb.money(d.expected_loss, cur)),
            ("from missed hazards", nb.money(d.loss_parts["missed"], cur)),
            ("from false alarms", nb.money(d.loss_parts["false_alarm"], cur)),
            ("study cost", nb.money(d.loss_parts["study"], cur)),
        ]
    rows += [
        ("loss if flagged now, no study", nb.money(d.no_study["flag_now"], cur)),
        ("loss if cleared now, no study", nb.money(d.no_study["clear_now"], cur)),
        ("expected net benefit of the study", nb.money(d.net_benefit, cur)),
        ("P(harmful \\| negative result)", nb.probability(d.p_harm_given_negative)),
        ("P(harmful \\| positive result), the share of flags that are true", nb.probability(d.p_harm_given_positive)),
        ("smallest effect detected with power 0.8", nb.number(d.detectable_effect)),
        ("implied cost ratio (miss : false alarm)", nb.number(d.implied_cost_ratio)),
        ("stated cost ratio (miss : false alarm)", nb.number(d.stated_cost_ratio)),
    ]
    lines += ["| quantity | value |", "|---|---|"] + [f"| {k} | {v} |" for k, v in rows]
    lines += ["", f"**{markdown_literal(recommendation(d, currency))}**", ""]
    lines += [f"- Warning: {markdown_literal(w)}" for w in d.warnings] + ([""] if d.warnings else [])
    lines += ["### Decision rule", ""] + rule_words.markdown_rule(d.rule)
    lines += [rule_words.NOMINAL_AND_ATTAINED, ""]
    if d.test in ("normal", "normal-cc"):
        lines += [rule_words.NORMAL_LOSS_NOTE, ""]
    lines += [f"_{CAUTION}_", ""]
    return "\n".join(lines)
