"""Plain machine and document formats: JSON rows, CSV, Markdown."""

from __future__ import annotations

import csv
import io
from collections.abc import Sequence
from typing import Any

from ..decision.optimize import Comparison, Decision
from .sentences import best_action
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
        cells = [d.title, "yes" if d.feasible else "no", fmt(d.alpha, 3), fmt(d.attained_alpha, 3),
                 fmt(d.beta, 3), fmt(d.power_at_design_effect, 3), fmt(d.n_per_group), fmt(d.n_total),
                 fmt(d.expected_loss, 3), fmt(d.regret, 3), fmt(d.p_harm_given_negative, 3),
                 fmt(d.detectable_effect, 3), fmt(d.implied_cost_ratio, 3)]
        lines.append("| " + " | ".join(cells) + " |")
    lines += ["", f"Stated cost ratio (miss : false alarm): {fmt(decisions[0].stated_cost_ratio)}.", ""]
    lines += [f"- **{d.title}**: {d.reason}." for d in decisions if not d.feasible]
    if isinstance(decisions, Comparison):
        lines += ["", best_action(decisions)]
    lines += ["", f"_{CAUTION}_", ""]
    return "\n".join(lines)
