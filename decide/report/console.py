"""Rich tables for people at a terminal.

Every piece of user text (titles, summaries, reasons, currency) goes into a
:class:`rich.text.Text` through :func:`~decide.report.text.literal`, never
through rich's markup parser, and the consoles made by :func:`make_console`
have markup, emoji codes and highlighting switched off as well.  Numbers are
formatted by :mod:`decide.report.numbers`.
"""

from __future__ import annotations

import io
from collections.abc import Callable, Iterable, Sequence
from typing import IO, Any

from rich.console import Console, Group, RenderableType
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from ..decision.audit import Audit
from ..decision.optimize import Comparison, Decision
from ..decision.policies import Policy
from ..designs import StudyDesign, get_design
from ..engine.solve import Solution
from . import audit_words, rule_words
from . import numbers as nb
from .sentences import best_action, recommendation
from .text import CAUTION, NO_FINITE_RATIO, literal, one_line

_LABELS = {
    "alpha": "alpha (nominal)",
    "power": "power",
    "n_per_group": "size per group",
    "effect": "effect",
}


def make_console(
    width: int | None = None, file: IO[str] | None = None, stderr: bool = False, colour: bool | None = None
) -> Console:
    """A console that prints text literally: no markup, no emoji codes, no highlighting."""
    return Console(
        width=width,
        file=file,
        stderr=stderr,
        markup=False,
        emoji=False,
        highlight=False,
        no_color=None if colour is None else not colour,
    )


def literal_text(value: Any, style: str = "") -> Text:
    """Text shown exactly as written (control characters escaped), never parsed as markup."""
    return Text(literal(value), style=style)


_text = literal_text


def _notes_panel(notes: Iterable[Text]) -> Panel:
    return Panel(Group(*notes, Text(CAUTION, style="dim italic")), border_style="dim")


def _two_columns(title: str) -> Table:
    t = Table(title=_text(title), show_header=False)
    t.add_column("quantity", style="bold")
    t.add_column("value")
    return t


def solution_table(s: Solution) -> Group:
    """The solved study as a two-column table with notes beneath."""
    d = get_design(s.design)
    t = _two_columns(f"{d.title}: solved for {_LABELS[s.solved_for]}")

    def row(label: str, value: str, solved: bool = False) -> None:
        t.add_row(label, Text(value, style="bold green" if solved else ""))

    row(f"alpha (nominal, {'one' if s.sides == 1 else 'two'}-sided)", nb.probability(s.alpha), s.solved_for == "alpha")
    row("alpha attained (real false-alarm probability)",
        rule_words.NOT_COMPUTED if s.false_alarm is None else nb.probability(s.false_alarm))
    row("power", nb.probability(s.power), s.solved_for == "power")
    row("beta (miss probability)", nb.probability(s.beta))
    row(d.effect_name, nb.number(s.effect), s.solved_for == "effect")
    row(d.size_name, nb.count(s.n_per_group), s.solved_for == "n_per_group")
    if s.n_stable is not None and s.n_stable != s.n_per_group:
        row("size where power stays above target", nb.count(s.n_stable))
    row("subjects in all", nb.count(s.n_total))
    row(d.baseline_name, nb.number(s.baseline))
    if d.groups == 2:
        row(str(d.allocation_name), nb.number(s.allocation))
    if d.uses_years:
        row("follow-up years per subject", nb.number(s.years))
    for name, value in s.expected_cases.items():
        row(f"expected {name}", nb.number(value))
    row("test", s.method)
    notes = [_text(f"Test choice: {s.test_reason}.", "dim")]
    notes += [_text(f"Warning: {w}", "yellow") for w in s.warnings]
    return Group(t, _notes_panel(notes))


def inputs_table(rows: Sequence[tuple[str, str]], unit: str) -> Table:
    """The scenario's inputs, as stated."""
    title = "Inputs" + (f" (money in {one_line(unit)})" if unit else "")
    t = Table(title=_text(title), show_header=False, box=None)
    t.add_column("input", style="dim")
    t.add_column("value")
    for label, value in rows:
        t.add_row(_text(label), _text(value))
    return t


def decision_table(d: Decision, title: str, unit: str) -> Group:
    """One policy's decision, its loss and what it implies."""
    design = get_design(d.design)
    cur = one_line(unit)
    t = _two_columns(f"{one_line(title)}\n{one_line(d.title)}")
    t.add_row("feasible", "yes" if d.feasible else _text(f"no: {d.reason}", "red"))
    if d.n_per_group is not None:
        t.add_row("test", _text(d.method or nb.MISSING))
        for label, value in rule_words.alpha_rows(d):
            t.add_row(label, value)
        t.add_row("beta (miss probability, averaged over the effect)", nb.probability(d.beta))
        t.add_row(
            f"power at the design {design.effect_name} {nb.number(d.design_effect)}",
            nb.probability(d.power_at_design_effect),
        )
        t.add_row(design.size_name, nb.count(d.n_per_group))
        t.add_row("subjects in all", nb.count(d.n_total))
        parts = d.loss_parts or {}
        t.add_row("expected loss", nb.money(d.expected_loss, cur))
        t.add_row("  from missed hazards", nb.money(parts.get("missed"), cur))
        t.add_row("  from false alarms", nb.money(parts.get("false_alarm"), cur))
        t.add_row("  study cost", nb.money(parts.get("study"), cur))
    t.add_row("loss if flagged now, no study", nb.money(d.no_study["flag_now"], cur))
    t.add_row("loss if cleared now, no study", nb.money(d.no_study["clear_now"], cur))
    if d.net_benefit is not None:
        style = "green" if d.net_benefit > 0 else "red"
        t.add_row("expected net benefit of the study", Text(nb.money(d.net_benefit, cur), style=style))
    if d.p_harm_given_negative is not None:
        t.add_row("P(harmful | negative result)", nb.probability(d.p_harm_given_negative))
    if d.p_harm_given_positive is not None:
        t.add_row("P(harmful | positive result), the share of flags that are true",
                  nb.probability(d.p_harm_given_positive))
    if d.detectable_effect is not None:
        t.add_row(f"smallest {design.effect_name} detected with power 0.8", nb.number(d.detectable_effect))
    t.add_row("implied cost ratio (miss : false alarm)", _ratio(d))
    stated = NO_FINITE_RATIO if d.stated_cost_ratio is None else nb.number(d.stated_cost_ratio)
    t.add_row("stated cost ratio (miss : false alarm)", stated)
    notes = [_text(recommendation(d, cur), "bold")]
    notes += [_text(f"Warning: {w}", "yellow") for w in d.warnings]
    notes += rule_words.decision_notes([d])
    return Group(t, rule_words.console_rule(d.rule), _notes_panel(notes))


def _ratio(d: Decision | Audit) -> str:
    if d.implied_cost_ratio is None:
        return nb.MISSING
    rng = d.implied_cost_ratio_range
    if rng is not None and rng[1] > rng[0] * (1 + 1e-6):
        return f"{nb.number(d.implied_cost_ratio)} (range {nb.number_range(*rng)})"
    return nb.number(d.implied_cost_ratio)


#: Characters that close a line of a boxed table on the right.
RIGHT_EDGES = frozenset("┐┓┤┨┩┫┥┘┛│┃╮╯╗╝║╣")


def _fits(table: Table, console: Console, width: int) -> bool:
    """Whether the table renders in ``width`` columns whole: no border cut off, no heading shortened."""
    probe = make_console(width=width, file=io.StringIO(), colour=False)
    with probe.capture() as captured:
        probe.print(table)
    lines = [line.rstrip() for line in captured.get().splitlines()]
    boxed = [line for line in lines if line[:1] in "┌┏├┡┣│┃└┗╭╰"]
    return all(line[-1] in RIGHT_EDGES for line in boxed) and "…" not in captured.get()


def compare_table(
    decisions: Sequence[Decision], title: str, unit: str, width: int = 80, console: Console | None = None
) -> Group:
    """Policies side by side, split into as few blocks as fit ``width``, each block whole."""
    design = get_design(decisions[0].design)
    con = console or make_console(width=width)
    cur = one_line(unit)
    blocks: list[list[Decision]] = []
    for d in decisions:
        trial = blocks[-1] + [d] if blocks else [d]
        if blocks and _fits(_compare_part(trial, design, cur, ""), con, width):
            blocks[-1] = trial
        else:
            blocks.append([d])
    blocks = _balanced(blocks, list(decisions), design, cur, con, width)
    tables = [_compare_part(part, design, cur, title if i == 0 else "") for i, part in enumerate(blocks)]
    note = f"Money in {cur}; " if cur else "Money in the scenario's unit; "
    tables[-1].caption = Text(note + nb.SUFFIX_NOTE + ".")
    best = next((d for d in decisions if d.policy == "loss-optimal"), None)
    shown = rule_words.console_rule(best.rule, "Loss-optimal decision rule") if best is not None else Group()
    return Group(*tables, shown, Panel(Group(*_notes(decisions, cur)), border_style="dim"))


def _balanced(
    blocks: list[list[Decision]], decisions: list[Decision], design: StudyDesign, cur: str, con: Console, width: int
) -> list[list[Decision]]:
    """The same number of blocks, with the policies spread evenly if every block still fits."""
    k = len(blocks)
    if k < 2:
        return blocks
    base, extra = divmod(len(decisions), k)
    sizes = [base + (1 if i < extra else 0) for i in range(k)]
    even, start = [], 0
    for size in sizes:
        even.append(decisions[start : start + size])
        start += size
    if all(_fits(_compare_part(part, design, cur, ""), con, width) for part in even):
        return even
    return blocks


def _compare_rows(design: StudyDesign, cur: str) -> list[tuple[str, Callable[[Decision], RenderableType]]]:
    money_unit = f" ({cur})" if cur else ""
    return [
        ("meets the constraints", lambda d: Text("yes", style="green") if d.feasible else Text("no", style="red")),
        ("alpha, nominal", rule_words.nominal_text),
        ("alpha, attained", lambda d: nb.probability(rule_words.attained(d))),
        ("beta (averaged)", lambda d: nb.probability(d.beta)),
        ("power at design effect", lambda d: nb.probability(d.power_at_design_effect)),
        (f"{design.size_name} per group", lambda d: nb.count(d.n_per_group)),
        ("subjects in all", lambda d: nb.count(d.n_total)),
        (f"expected loss{money_unit}", lambda d: nb.money(d.expected_loss, compact=True)),
        (f"regret{money_unit}", lambda d: nb.money(d.regret, compact=True)),
        ("P(harm | negative)", lambda d: nb.probability(d.p_harm_given_negative)),
        ("P(harm | positive)", lambda d: nb.probability(d.p_harm_given_positive)),
        (f"{design.effect_name} detected at 80%", lambda d: nb.number(d.detectable_effect)),
        ("implied cost ratio", lambda d: nb.number(d.implied_cost_ratio)),
    ]


def _compare_part(decisions: list[Decision], design: StudyDesign, cur: str, title: str) -> Table:
    t = Table(title=_text(title) if title else None)
    t.add_column("", style="bold", min_width=16)
    for d in decisions:
        t.add_column(_text(one_line(d.title)), justify="right", min_width=9)
    for label, cell in _compare_rows(design, cur):
        t.add_row(label, *(cell(d) for d in decisions))
    return t


def _notes(decisions: Sequence[Decision], currency: str = "") -> list[Text]:
    notes = [
        Text(
            f"Stated cost ratio (expected missed-hazard cost : false-alarm cost): "
            f"{_stated(decisions[0].stated_cost_ratio)}. A policy's implied cost ratio is the one at "
            "which its alpha would minimise expected loss for its size. Regret is the extra "
            "expected loss over the best of all actions (a study, or flagging or clearing now).",
            style="dim",
        )
    ]
    if isinstance(decisions, Comparison):
        notes.insert(0, _text(best_action(decisions, currency), "bold"))
    notes += [_text(f"{one_line(d.title)}: {d.reason}.", "red") for d in decisions if not d.feasible]
    best = next((d for d in decisions if d.policy == "loss-optimal"), None)
    if best is not None:
        notes.append(_text(f"Loss-optimal: {recommendation(best, currency)}", "bold"))
    notes += rule_words.decision_notes(list(decisions))
    notes.append(Text(CAUTION, style="dim italic"))
    return notes


def audit_table(a: Audit, unit: str) -> Group:
    """A protocol's implied value judgments, and its losses by its own costs when given."""
    design = get_design(a.design)
    cur = one_line(unit)
    t = _two_columns(f"Audit of a {design.title.lower()} protocol")
    t.add_row("test", _text(a.method))
    for label, value in rule_words.alpha_rows(a):
        t.add_row(label, value)
    t.add_row(f"power against {design.effect_name} {nb.number(a.effect)}", nb.probability(a.power))
    t.add_row(design.size_name, nb.count(a.n_per_group))
    t.add_row("subjects in all", nb.count(a.n_total))
    if a.prior is not None:
        t.add_row(f"{design.effect_name} if harmful (prior, as entered)", a.prior)
    t.add_row("implied cost ratio (miss : false alarm)", _ratio(a))
    t.add_row(f"power gained per extra {audit_words.one_subject(a.design)}", nb.number(a.marginal_power_per_subject))
    t.add_row("implied cost of a missed hazard", nb.money(a.implied_missed_hazard, cur))
    t.add_row("implied cost of a false alarm", nb.money(a.implied_false_alarm, cur))
    t.add_row("P(harmful | negative result)", nb.probability(a.p_harm_given_negative))
    t.add_row("P(harmful | positive result)",
              "none: a positive result cannot happen" if a.p_harm_given_positive is None
              else nb.probability(a.p_harm_given_positive))
    for level, effect in a.detectable_effects.items():
        t.add_row(f"{design.effect_name} detected with power {level}", nb.number(effect))
    for label, value in audit_words.loss_rows(a, cur):
        t.add_row(label, value)
    notes = [_text(a.rules_out, "bold")]
    notes += [_text(line) for line in audit_words.explanations(a, cur)]
    notes += [_text(f"Note: {w}", "yellow") for w in a.warnings]
    notes += rule_words.decision_notes([a])
    return Group(t, rule_words.console_rule(a.rule), _notes_panel(notes))


def _policy_rule(p: Policy) -> tuple[str, str]:
    power = nb.MISSING if p.power is None else f"{p.power:g}" + (", beta <= alpha" if p.beta_at_most_alpha else "")
    rule = p.alpha_rule + (f" {p.alpha:g}" if p.alpha is not None else "")
    rule += f" {p.posterior_threshold:g}" if p.posterior_threshold is not None else ""
    return rule, power


def policies_table(policies: Sequence[Policy], width: int, console: Console | None = None) -> Group:
    """The policies: names in full (a user types them), rules, and summaries beneath.

    If even the narrowest table would not fit ``width`` (a very long policy
    name), each policy is listed on its own lines instead.
    """
    con = console or make_console(width=width)
    t = Table(title="Policies")
    t.add_column("name", no_wrap=True)
    t.add_column("alpha rule", no_wrap=True)
    t.add_column("power at the design effect")
    t.add_column("size rule", no_wrap=True)
    for p in policies:
        rule, power = _policy_rule(p)
        t.add_row(_text(p.name), _text(rule), _text(power), _text(p.size_rule))
    lines: list[RenderableType] = []
    if _fits(t, con, width):
        lines.append(t)
    for p in policies:
        line = Text()
        line.append(one_line(p.title), style="bold")
        line.append(f" ({one_line(p.name)}): {one_line(p.summary)}")
        lines.append(line)
        if lines[0] is not t:
            rule, power = _policy_rule(p)
            lines.append(Text(f"  alpha rule {rule}; power {power}; size rule {one_line(p.size_rule)}"))
    return Group(*lines)


def _stated(ratio: float | None) -> str:
    return NO_FINITE_RATIO if ratio is None else nb.number(ratio)
