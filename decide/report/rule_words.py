"""Rendering a decision rule in counts, and the words for nominal and attained alpha.

Shared by the console and Markdown renderers; no number is computed here
beyond grouping the thresholds of neighbouring totals that agree.
"""

from __future__ import annotations

from typing import Any

from ..engine.rule import DecisionRule
from . import numbers as nb

NOMINAL_AND_ATTAINED = (
    "Nominal alpha is the cut-off a p-value is compared with (the study flags when p <= alpha); "
    "the value shown reproduces the rule exactly. Attained alpha is the real probability of a flag "
    "when the exposure is harmless, from the exact distribution of the counts; for a discrete test "
    "it is below the nominal one, and for the normal approximation it can lie on either side."
)
NORMAL_LOSS_NOTE = (
    "The expected loss of a normal test counts its false alarms at the normal approximation's level "
    "(the nominal alpha); its attained alpha, from the exact distribution of the counts, is shown beside it."
)

#: Shown where the normal test's real false-alarm probability was not computed.
NOT_COMPUTED = "not computed (counts too large to lay out)"

#: Columns of (totals, threshold) pairs in a console rule table.
PAIRS_PER_LINE = 3
#: Most lines of a console rule table; longer tables show evenly spaced totals.
MOST_LINES = 20


def runs(rule: DecisionRule) -> list[tuple[int, int, int | None, int | None]]:
    """Neighbouring totals with the same thresholds, as ``(first, last, at_least, at_most)``."""
    out: list[tuple[int, int, int | None, int | None]] = []
    for row in rule.thresholds:
        if out and out[-1][2:] == (row.flag_at_least, row.flag_at_most) and out[-1][1] == row.total - 1:
            first = out[-1][0]
            out[-1] = (first, row.total, row.flag_at_least, row.flag_at_most)
        else:
            out.append((row.total, row.total, row.flag_at_least, row.flag_at_most))
    return out


def totals_text(first: int, last: int) -> str:
    return f"{first:,}" if first == last else f"{first:,}-{last:,}"


def threshold_text(at_least: int | None, at_most: int | None) -> str:
    """``>= 13``, ``>= 13 or <= 2``, or ``never``."""
    parts = []
    if at_least is not None:
        parts.append(f">= {at_least:,}")
    if at_most is not None:
        parts.append(f"<= {at_most:,}")
    return " or ".join(parts) if parts else "never"


def attained(d: Any) -> float | None:
    """The attained alpha of a decision or audit: the exact test's, or the normal test's real one.

    ``None`` where it was not computed (a normal test on counts too large to
    lay out): the nominal level is then not shown as attained.
    """
    if getattr(d, "test", None) == "exact":
        return d.attained_alpha  # type: ignore[no-any-return]
    rule = getattr(d, "rule", None)
    return None if rule is None else rule.false_alarm


def nominal_text(d: Any) -> str:
    """The nominal alpha as the rule shows it (rounded into its cut-off interval)."""
    rule = getattr(d, "rule", None)
    if rule is not None:
        return str(rule.cutoff_shown)
    return nb.probability(getattr(d, "alpha", None))


def alpha_rows(d: Any) -> list[tuple[str, str]]:
    """Label and value of the nominal and attained alpha, for a two-column table."""
    sided = "one-sided" if getattr(d, "sides", 1) == 1 else "two-sided"
    sides = getattr(getattr(d, "rule", None), "sides", None)
    if sides is not None:
        sided = "one-sided" if sides == 1 else "two-sided"
    value = attained(d)
    rows = [(f"alpha, nominal ({sided}; flag when p <= alpha)", nominal_text(d))]
    rows.append(
        ("alpha, attained (real false-alarm probability)", nb.probability(value) if value is not None else NOT_COMPUTED)
    )
    return rows


def console_rule(rule: DecisionRule | None, title: str = "Decision rule") -> Any:
    """The rule as a rich renderable: its sentence, then its thresholds."""
    from rich.console import Group
    from rich.table import Table
    from rich.text import Text

    if rule is None:
        return Group()
    parts: list[Any] = [Text(f"{title}: {rule.statement}", style="bold")]
    groups = runs(rule)
    every = 1
    if len(groups) > PAIRS_PER_LINE * MOST_LINES:
        every = -(-len(groups) // (PAIRS_PER_LINE * MOST_LINES))
        groups = groups[::every]
    if groups:
        t = Table(box=None, show_edge=False, pad_edge=False, title=None)
        for _ in range(min(PAIRS_PER_LINE, len(groups))):
            t.add_column("total", justify="right", style="dim")
            t.add_column("flag if", justify="left")
        lines = [groups[i : i + PAIRS_PER_LINE] for i in range(0, len(groups), PAIRS_PER_LINE)]
        for line in lines:
            cells: list[str] = []
            for first, last, up, down in line:
                cells += [totals_text(first, last), threshold_text(up, down)]
            cells += [""] * (2 * min(PAIRS_PER_LINE, len(groups)) - len(cells))
            t.add_row(*cells)
        parts.append(t)
        if every > 1:
            parts.append(
                Text(f"One group of totals in {every} is shown; --markdown and --json list them all.", style="dim")
            )
        parts.append(Text(_coverage(rule), style="dim"))
    return Group(*parts)


def _coverage(rule: DecisionRule) -> str:
    sided = "one-sided" if rule.sides == 1 else "two-sided"
    return (
        f"The table covers the totals that carry 99.9% of the probability both if the exposure is harmful "
        f"(at the design effect) and if it is harmless. On any other total, flag when the {sided} "
        f"{rule.test} test gives p <= {rule.cutoff_shown}."
    )


def markdown_rule(rule: DecisionRule | None, heading: str = "") -> list[str]:
    """The rule as Markdown lines: its sentence and a table of thresholds."""
    if rule is None:
        return []
    lines = [f"### {heading}", ""] if heading else []
    lines += [rule.statement, ""]
    groups = runs(rule)
    if groups:
        lines += [f"| total {rule.total_name} | flag if {rule.count_name} |", "|---:|---|"]
        lines += [f"| {totals_text(a, b)} | {threshold_text(up, down)} |" for a, b, up, down in groups]
        lines += ["", _coverage(rule), ""]
    return lines


def decision_notes(decisions: list[Any]) -> list[Any]:
    """The once-per-screen sentence on nominal and attained alpha (and the normal test's loss)."""
    from rich.text import Text

    notes = [Text(NOMINAL_AND_ATTAINED, style="dim")]
    if any(getattr(d, "test", None) in ("normal", "normal-cc") for d in decisions):
        notes.append(Text(NORMAL_LOSS_NOTE, style="dim"))
    return notes
