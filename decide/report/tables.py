"""Plain machine and document formats: JSON rows, CSV, Markdown."""

from __future__ import annotations

import csv
import io
from collections.abc import Sequence
from typing import Any

from ..decision.optimize import Comparison, Decision
from . import rule_words
from .sentences import best_action, recommendation
from .text import CAUTION, fmt, json_safe

#: Columns of the flat comparison formats (CSV, Markdown).
COMPARE_COLUMNS = (
    "policy", "feasible", "action", "test", "alpha", "attained_alpha", "beta", "power",
    "power_at_design_effect", "n_per_group", "n_total", "expected_loss", "regret",
    "p_harm_given_negative", "p_harm_given_positive", "detectable_effect", "implied_cost_ratio",
    "net_benefit", "reason",
)


def decision_rows(decisions: Sequence[Decision]) -> list[dict[str, Any]]:
    """One flat row per policy."""
    return [{k: json_safe(d.to_dict()[k]) for k in COMPARE_COLUMNS} for d in decisions]


def to_csv(decisions: Sequence[Decision]) -> str:
    """The comparison as CSV, full precision, empty cells for missing values."""
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=COMPARE_COLUMNS, lineterminator="\n")
    w.writeheader()
    for row in decision_rows(decisions):
        w.writerow({k: "" if v is None else v for k, v in row.items()})
    return buf.getvalue()


def to_markdown(decisions: Sequence[Decision], title: str, inputs: list[tuple[str, str]] | None = None) -> str:
    """The comparison as a Markdown table a board can read, with the inputs and the caution."""
    head = ["policy", "feasible", "alpha", "attained alpha", "beta", "power (design)",
            "per group", "in all", "expected loss", "regret", "P(harm \\| negative)",
            "detects (80%)", "implied cost ratio"]
    lines = [f"# {title}", ""]
    if inputs:
        lines += ["## Inputs", ""] + [f"- {label}: {value}" for label, value in inputs] + ["", "## Policies", ""]
    lines += ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    for d in decisions:
        cells = [d.title, "yes" if d.feasible else "no", rule_words.nominal_text(d), fmt(rule_words.attained(d), 3),
                 fmt(d.beta, 3), fmt(d.power_at_design_effect, 3), fmt(d.n_per_group), fmt(d.n_total),
                 fmt(d.expected_loss, 3), fmt(d.regret, 3), fmt(d.p_harm_given_negative, 3),
                 fmt(d.detectable_effect, 3), fmt(d.implied_cost_ratio, 3)]
        lines.append("| " + " | ".join(cells) + " |")
    lines += ["", f"Stated cost ratio (miss : false alarm): {fmt(decisions[0].stated_cost_ratio)}.", ""]
    lines += [f"- **{d.title}**: {d.reason}." for d in decisions if not d.feasible]
    if isinstance(decisions, Comparison):
        lines += ["", best_action(decisions)]
    lines += ["", rule_words.NOMINAL_AND_ATTAINED, ""]
    if any(d.test in ("normal", "normal-cc") for d in decisions):
        lines += [rule_words.NORMAL_LOSS_NOTE, ""]
    lines += ["## Decision rules", ""]
    for d in decisions:
        lines += rule_words.markdown_rule(d.rule, d.title)
    lines += ["", f"_{CAUTION}_", ""]
    return "\n".join(lines)


def decision_markdown(d: Decision, title: str, inputs: list[tuple[str, str]], unit: str) -> str:
    """One policy's decision as a Markdown document: inputs, the choice, its rule, the caution."""
    lines = [f"# {title}", "", f"## {d.title}", ""]
    lines += ["### Inputs", ""] + [f"- {label}: {value}" for label, value in inputs] + [""]

    def money(v: float | None) -> str:
        return "-" if v is None else f"{fmt(v)} {unit}".strip()

    rows: list[tuple[str, str]] = [("meets the constraints", "yes" if d.feasible else f"no: {d.reason}")]
    if d.n_per_group is not None and d.loss_parts is not None:
        rows += [("test", d.method or "-"), *rule_words.alpha_rows(d),
                 ("beta (miss probability, averaged over the effect)", fmt(d.beta)),
                 (f"power at the design effect {fmt(d.design_effect)}", fmt(d.power_at_design_effect)),
                 ("size per group", fmt(d.n_per_group)), ("subjects in all", fmt(d.n_total)),
                 ("expected loss", money(d.expected_loss)),
                 ("from missed hazards", money(d.loss_parts["missed"])),
                 ("from false alarms", money(d.loss_parts["false_alarm"])),
                 ("study cost", money(d.loss_parts["study"]))]
    rows += [("loss if flagged now, no study", money(d.no_study["flag_now"])),
             ("loss if cleared now, no study", money(d.no_study["clear_now"])),
             ("expected net benefit of the study", money(d.net_benefit)),
             ("P(harmful \\| negative result)", fmt(d.p_harm_given_negative)),
             ("P(harmful \\| positive result)", fmt(d.p_harm_given_positive)),
             ("smallest effect detected with power 0.8", fmt(d.detectable_effect)),
             ("implied cost ratio (miss : false alarm)", fmt(d.implied_cost_ratio)),
             ("stated cost ratio (miss : false alarm)", fmt(d.stated_cost_ratio))]
    lines += ["| quantity | value |", "|---|---|"] + [f"| {k} | {v} |" for k, v in rows]
    lines += ["", f"**{recommendation(d)}**", ""]
    lines += [f"- Warning: {w}" for w in d.warnings] + ([""] if d.warnings else [])
    lines += ["### Decision rule", ""] + rule_words.markdown_rule(d.rule)
    lines += [rule_words.NOMINAL_AND_ATTAINED, ""]
    if d.test in ("normal", "normal-cc"):
        lines += [rule_words.NORMAL_LOSS_NOTE, ""]
    lines += [f"_{CAUTION}_", ""]
    return "\n".join(lines)
