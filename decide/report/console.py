"""Rich tables for people at a terminal."""

from __future__ import annotations

from rich.console import Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from ..designs import get_design
from ..solve import Solution
from .text import CAUTION, fmt

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
