"""Rich tables for people at a terminal."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from rich.console import Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from ..decision.audit import Audit
from ..decision.optimize import Comparison, Decision
from ..designs import StudyDesign, get_design
from ..engine.solve import Solution
from .sentences import best_action, recommendation
from .text import CAUTION, fmt, fmt_compact

_LABELS = {
    "alpha": "alpha (nominal)",
    "power": "power",
    "n_per_group": "size per group",
    "effect": "effect",
}


def solution_table(s: Solution) -> Group:
    """The solved study as a two-column table with notes beneath."""
    d = get_design(s.design)
    t = Table(title=f"{d.title}: solved for {_LABELS[s.solved_for]}", show_header=False)
    t.add_column("quantity", style="bold")
    t.add_column("value")

    def row(label: str, value: str, solved: bool = False) -> None:
        t.add_row(label, Text(value, style="bold green") if solved else value)

    row(f"alpha (nominal, {'one' if s.sides == 1 else 'two'}-sided)", fmt(s.alpha), s.solved_for == "alpha")
    row("alpha attained (false-alarm probability)", fmt(s.attained_alpha))
    row("power", fmt(s.power), s.solved_for == "power")
    row("beta (miss probability)", fmt(s.beta))
    row(d.effect_name, fmt(s.effect), s.solved_for == "effect")
    row(d.size_name, fmt(s.n_per_group), s.solved_for == "n_per_group")
    if s.n_stable is not None and s.n_stable != s.n_per_group:
        row("size where power stays above target", fmt(s.n_stable))
    row("subjects in all", fmt(s.n_total))
    row(d.baseline_name, fmt(s.baseline))
    if d.allocation_name is not None:
        row(d.allocation_name, fmt(s.allocation))
    if d.uses_years:
        row("follow-up years per subject", fmt(s.years))
    for name, value in s.expected_cases.items():
        row(f"expected {name}", fmt(value))
    row("test", s.method)
    notes = [Text(f"Test choice: {s.test_reason}.", style="dim")]
    notes += [Text(f"Warning: {w}", style="yellow") for w in s.warnings]
    notes.append(Text(CAUTION, style="dim italic"))
    return Group(t, Panel(Group(*notes), border_style="dim"))


def _money(value: float | None, unit: str) -> str:
    return "-" if value is None else f"{fmt(value)} {unit}".strip()


def inputs_table(rows: list[tuple[str, str]], unit: str) -> Table:
    """The scenario's inputs, as stated."""
    t = Table(title="Inputs" + (f" (costs in {unit})" if unit else ""), show_header=False, box=None)
    t.add_column("input", style="dim")
    t.add_column("value")
    for label, value in rows:
        t.add_row(label, value)
    return t


def decision_table(d: Decision, title: str, unit: str) -> Group:
    """One policy's decision, its loss and what it implies."""
    design = get_design(d.design)
    t = Table(title=f"{title}\n{d.title}", show_header=False)
    t.add_column("quantity", style="bold")
    t.add_column("value")
    t.add_row("feasible", "yes" if d.feasible else Text(f"no: {d.reason}", style="red"))
    if d.n_per_group is not None:
        t.add_row("test", d.method or "-")
        t.add_row("alpha (nominal)", fmt(d.alpha))
        t.add_row("alpha attained (false-alarm probability)", fmt(d.attained_alpha))
        t.add_row("beta (miss probability, averaged over the effect)", fmt(d.beta))
        t.add_row(f"power at the design {design.effect_name} {fmt(d.design_effect)}", fmt(d.power_at_design_effect))
        t.add_row(design.size_name, fmt(d.n_per_group))
        t.add_row("subjects in all", fmt(d.n_total))
        assert d.loss_parts is not None
        t.add_row("expected loss", _money(d.expected_loss, unit))
        t.add_row("  from missed hazards", _money(d.loss_parts["missed"], unit))
        t.add_row("  from false alarms", _money(d.loss_parts["false_alarm"], unit))
        t.add_row("  study cost", _money(d.loss_parts["study"], unit))
    t.add_row("loss if flagged now, no study", _money(d.no_study["flag_now"], unit))
    t.add_row("loss if cleared now, no study", _money(d.no_study["clear_now"], unit))
    if d.net_benefit is not None:
        style = "green" if d.net_benefit > 0 else "red"
        t.add_row("expected net benefit of the study", Text(_money(d.net_benefit, unit), style=style))
    if d.p_harm_given_negative is not None:
        t.add_row("P(harmful | negative result)", fmt(d.p_harm_given_negative))
    if d.p_harm_given_positive is not None:
        t.add_row("P(harmful | positive result), the share of flags that are true", fmt(d.p_harm_given_positive))
    if d.detectable_effect is not None:
        t.add_row(f"smallest {design.effect_name} detected with power 0.8", fmt(d.detectable_effect))
    t.add_row("implied cost ratio (miss : false alarm)", _ratio(d))
    t.add_row("stated cost ratio (miss : false alarm)", fmt(d.stated_cost_ratio))
    notes = [Text(recommendation(d), style="bold")]
    notes += [Text(f"Warning: {w}", style="yellow") for w in d.warnings]
    notes.append(Text(CAUTION, style="dim italic"))
    return Group(t, Panel(Group(*notes), border_style="dim"))


def _ratio(d: Decision | Audit) -> str:
    if d.implied_cost_ratio is None:
        return "-"
    rng = d.implied_cost_ratio_range
    if rng is not None and rng[1] > rng[0] * (1 + 1e-6):
        return f"{fmt(d.implied_cost_ratio)} (range {fmt(rng[0])} to {fmt(rng[1])})"
    return fmt(d.implied_cost_ratio)


def compare_table(decisions: Sequence[Decision], title: str, unit: str, width: int = 80) -> Group:
    """Policies side by side: one column per policy, one row per quantity."""
    design = get_design(decisions[0].design)
    per_table = max(1, (width - 22) // 15)
    parts = [list(decisions[i : i + per_table]) for i in range(0, len(decisions), per_table)]
    tables = [_compare_part(part, design, title if i == 0 else "") for i, part in enumerate(parts)]
    tables[-1].caption = f"Costs in {unit or 'the scenario unit'} (k = thousand, M = million)."
    return Group(*tables, Panel(Group(*_notes(decisions)), border_style="dim"))


def _compare_part(decisions: list[Decision], design: StudyDesign, title: str) -> Table:
    t = Table(title=title or None)
    t.add_column("", style="bold", min_width=16)
    for d in decisions:
        t.add_column(d.title, justify="right", min_width=9, no_wrap=False)
    rows: list[tuple[str, Any]] = [
        ("meets the constraints", lambda d: Text("yes", style="green") if d.feasible else Text("no", style="red")),
        ("alpha, nominal", lambda d: fmt(d.alpha, 3)),
        ("alpha, attained", lambda d: fmt(d.attained_alpha, 3)),
        ("beta (averaged)", lambda d: fmt(d.beta, 3)),
        ("power at design effect", lambda d: fmt(d.power_at_design_effect, 3)),
        (f"{design.size_name} per group", lambda d: fmt(d.n_per_group)),
        ("subjects in all", lambda d: fmt(d.n_total)),
        ("expected loss", lambda d: fmt_compact(d.expected_loss)),
        ("regret", lambda d: fmt_compact(d.regret)),
        ("P(harm | negative)", lambda d: fmt(d.p_harm_given_negative, 3)),
        ("P(harm | positive)", lambda d: fmt(d.p_harm_given_positive, 3)),
        (f"{design.effect_name} detected at 80%", lambda d: fmt(d.detectable_effect, 3)),
        ("implied cost ratio", lambda d: fmt(d.implied_cost_ratio, 3)),
    ]
    for label, cell in rows:
        t.add_row(label, *(cell(d) for d in decisions))
    return t


def _notes(decisions: Sequence[Decision]) -> list[Text]:
    notes = [Text(f"Stated cost ratio (expected missed-hazard cost : false-alarm cost): "
                  f"{fmt(decisions[0].stated_cost_ratio)}. A policy's implied cost ratio is the one at "
                  "which its alpha would minimise expected loss for its size. Regret is the extra "
                  "expected loss over the best of all actions (a study, or flagging or clearing now).",
                  style="dim")]
    if isinstance(decisions, Comparison):
        notes.insert(0, Text(best_action(decisions), style="bold"))
    for d in decisions:
        if not d.feasible:
            notes.append(Text(f"{d.title}: {d.reason}.", style="red"))
    best = next((d for d in decisions if d.policy == "loss-optimal"), None)
    if best is not None:
        notes.append(Text(f"Loss-optimal: {recommendation(best)}", style="bold"))
    notes.append(Text(CAUTION, style="dim italic"))
    return notes


def audit_table(a: Audit, unit: str) -> Group:
    """A protocol's implied value judgments."""
    design = get_design(a.design)
    t = Table(title=f"Audit of a {design.title.lower()} protocol", show_header=False)
    t.add_column("quantity", style="bold")
    t.add_column("value")
    t.add_row("test", a.method)
    t.add_row("alpha (nominal / attained)", f"{fmt(a.alpha)} / {fmt(a.attained_alpha)}")
    t.add_row(f"power against {design.effect_name} {fmt(a.effect)}", fmt(a.power))
    t.add_row(design.size_name, fmt(a.n_per_group))
    t.add_row("subjects in all", fmt(a.n_total))
    t.add_row("implied cost ratio (miss : false alarm)", _ratio(a))
    t.add_row("power gained per extra exposed subject", fmt(a.marginal_power_per_subject))
    t.add_row("implied cost of a missed hazard", _money(a.implied_missed_hazard, unit))
    t.add_row("implied cost of a false alarm", _money(a.implied_false_alarm, unit))
    t.add_row("P(harmful | negative result)", fmt(a.p_harm_given_negative))
    t.add_row("P(harmful | positive result)", fmt(a.p_harm_given_positive))
    for level, effect in a.detectable_effects.items():
        t.add_row(f"{design.effect_name} detected with power {level}", fmt(effect))
    notes = [Text(a.rules_out, style="bold")]
    notes += [Text(f"Note: {w}", style="yellow") for w in a.warnings]
    notes.append(Text(CAUTION, style="dim italic"))
    return Group(t, Panel(Group(*notes), border_style="dim"))
