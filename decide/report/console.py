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
from dataclasses import dataclass
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
from .text import CAUTION, NO_FINITE_RATIO, POSTERIOR_NOTE, RANGE_NOTE, literal, one_line

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
    row(
        "alpha attained (real false-alarm probability)",
        rule_words.NOT_COMPUTED if s.false_alarm is None else nb.probability(s.false_alarm),
    )
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
        t.add_row(
            "P(harmful | positive result), the share of flags that are true", nb.probability(d.p_harm_given_positive)
        )
    if d.detectable_effect is not None:
        t.add_row(f"smallest {design.effect_name} detected with power 0.8", nb.number(d.detectable_effect))
    t.add_row("implied cost ratio (miss : false alarm)", _ratio(d))
    stated = NO_FINITE_RATIO if d.stated_cost_ratio is None else nb.number(d.stated_cost_ratio)
    t.add_row("stated cost ratio (miss : false alarm)", stated)
    notes = [_text(recommendation(d, cur), "bold")]
    if _has_ratio_range([d]):
        notes.append(Text(RANGE_NOTE, style="dim"))
    notes += [_text(f"Warning: {w}", "yellow") for w in d.warnings]
    notes += rule_words.decision_notes([d])
    return Group(t, rule_words.console_rule(d.rule), _notes_panel(notes))


def _ratio(d: Decision | Audit) -> str:
    return nb.ratio_range(d.implied_cost_ratio, d.implied_cost_ratio_range)


def _has_ratio_range(decisions: Iterable[Decision | Audit]) -> bool:
    return any(nb.is_range(d.implied_cost_ratio_range) for d in decisions)


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


@dataclass(frozen=True)
class _NowColumn:
    """A no-study action shown beside the policies: its expected loss and its regret."""

    title: str
    expected_loss: float
    regret: float


_Column = Decision | _NowColumn
_Rows = list[tuple[str, Callable[[Any], RenderableType]]]


def _now_columns(decisions: Sequence[Decision] | Comparison) -> list[_NowColumn]:
    """Flagging and clearing now, as two more columns of a comparison (none for a bare list)."""
    if not isinstance(decisions, Comparison):
        return []
    c = decisions
    return [
        _NowColumn("Flag now, no study", c.flag_now, c.flag_now - c.best_loss),
        _NowColumn("Clear now, no study", c.clear_now, c.clear_now - c.best_loss),
    ]


def compare_table(
    decisions: Sequence[Decision] | Comparison, title: str, unit: str, width: int = 80, console: Console | None = None
) -> Group:
    """Deciding now and the available policies side by side, then the policies not available, set apart.

    Each table is split into as few blocks as fit ``width``, each block whole.
    A policy whose study the constraints do not allow is never shown beside
    the others: its own table says what it would need and what it would cost.
    """
    design = get_design(decisions[0].design)
    con = console or make_console(width=width)
    cur = one_line(unit)
    available: list[_Column] = [*_now_columns(decisions), *(d for d in decisions if d.feasible)]
    tables = _blocks(available, _compare_rows(design, cur), title, con, width)
    unavailable = [d for d in decisions if not d.feasible]
    if unavailable:
        heading = "Not available under the constraints: what each policy would need"
        tables += _blocks(list(unavailable), _unavailable_rows(design, cur), heading, con, width)
    note = f"Money in {cur}; " if cur else "Money in the scenario's unit; "
    tables[-1].caption = Text(note + nb.SUFFIX_NOTE + ".")
    best = next((d for d in decisions if d.policy == "loss-optimal"), None)
    shown = rule_words.console_rule(best.rule, "Loss-optimal decision rule") if best is not None else Group()
    return Group(*tables, shown, Panel(Group(*_notes(decisions, cur)), border_style="dim"))


def _blocks(columns: list[_Column], rows: _Rows, title: str, con: Console, width: int) -> list[Table]:
    """``columns`` in as few tables as fit ``width``, spread evenly where that still fits."""
    blocks: list[list[_Column]] = []
    for col in columns:
        trial = blocks[-1] + [col] if blocks else [col]
        if blocks and _fits(_compare_part(trial, rows, ""), con, width):
            blocks[-1] = trial
        else:
            blocks.append([col])
    blocks = _balanced(blocks, columns, rows, con, width)
    return [_compare_part(part, rows, title if i == 0 else "") for i, part in enumerate(blocks)]


def _balanced(
    blocks: list[list[_Column]], columns: list[_Column], rows: _Rows, con: Console, width: int
) -> list[list[_Column]]:
    """The same number of blocks, with the columns spread evenly if every block still fits."""
    k = len(blocks)
    if k < 2:
        return blocks
    base, extra = divmod(len(columns), k)
    even, start = [], 0
    for i in range(k):
        size = base + (1 if i < extra else 0)
        even.append(columns[start : start + size])
        start += size
    if all(_fits(_compare_part(part, rows, ""), con, width) for part in even):
        return even
    return blocks


def _study_only(cell: Callable[[Decision], RenderableType]) -> Callable[[_Column], RenderableType]:
    """A row's cell for a policy; ``-`` for a no-study column, which has no study to describe."""
    return lambda c: nb.MISSING if isinstance(c, _NowColumn) else cell(c)


def _compare_rows(design: StudyDesign, cur: str) -> _Rows:
    money_unit = f" ({cur})" if cur else ""
    rows: list[tuple[str, Callable[[Decision], RenderableType]]] = [
        ("alpha, nominal", rule_words.nominal_text),
        ("alpha, attained", lambda d: nb.probability(rule_words.attained(d))),
        ("beta (averaged)", lambda d: nb.probability(d.beta)),
        ("power at design effect", lambda d: nb.probability(d.power_at_design_effect)),
        (f"{design.size_name} per group", lambda d: nb.count(d.n_per_group)),
        ("subjects in all", lambda d: nb.count(d.n_total)),
    ]
    after: list[tuple[str, Callable[[Decision], RenderableType]]] = [
        ("P(harm | negative)", lambda d: nb.probability(d.p_harm_given_negative)),
        ("P(harm | positive)", lambda d: nb.probability(d.p_harm_given_positive)),
        (f"{design.effect_name} detected at 80%", lambda d: nb.number(d.detectable_effect)),
        ("implied cost ratio", lambda d: _ratio(d)),
    ]
    return [
        ("action", lambda c: "no study" if isinstance(c, _NowColumn) else _ACTION_WORDS.get(c.action, c.action)),
        *((label, _study_only(cell)) for label, cell in rows),
        (f"expected loss{money_unit}", lambda c: nb.money(c.expected_loss, compact=True)),
        (f"regret{money_unit}", lambda c: nb.money(c.regret, compact=True)),
        *((label, _study_only(cell)) for label, cell in after),
    ]


#: A policy's action in a comparison's column.
_ACTION_WORDS = {"study": "study", "flag-now": "flag now", "clear-now": "clear now"}


def _unavailable_rows(design: StudyDesign, cur: str) -> _Rows:
    money_unit = f" ({cur})" if cur else ""
    return [
        ("available", lambda d: Text("no", style="red")),
        (f"would need: {design.size_name} per group", lambda d: nb.count(d.n_per_group)),
        ("would need: subjects in all", lambda d: nb.count(d.n_total)),
        ("alpha, nominal", rule_words.nominal_text),
        ("power at design effect", lambda d: nb.probability(d.power_at_design_effect)),
        (f"would cost: study{money_unit}", lambda d: nb.money((d.loss_parts or {}).get("study"), compact=True)),
        (f"if allowed, expected loss{money_unit}", lambda d: nb.money(d.expected_loss, compact=True)),
    ]


def _compare_part(columns: list[_Column], rows: _Rows, title: str) -> Table:
    t = Table(title=_text(title) if title else None)
    t.add_column("", style="bold", min_width=16)
    for col in columns:
        t.add_column(_text(one_line(col.title)), justify="right", min_width=9)
    for label, cell in rows:
        t.add_row(label, *(cell(c) for c in columns))
    return t


def _notes(decisions: Sequence[Decision] | Comparison, currency: str = "") -> list[Text]:
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
    notes.append(Text(POSTERIOR_NOTE, style="dim"))
    if _has_ratio_range(decisions):
        notes.append(Text(RANGE_NOTE, style="dim"))
    notes += [_text(f"Not available, {one_line(d.title)}: {d.reason}.", "red") for d in decisions if not d.feasible]
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
    t.add_row(
        "P(harmful | positive result)",
        "none: a positive result cannot happen"
        if a.p_harm_given_positive is None
        else nb.probability(a.p_harm_given_positive),
    )
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
