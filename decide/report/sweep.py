"""Renderers for sensitivity, probabilistic and simulation results: rich tables and CSV.

Nothing is computed here; every number comes from the result objects of
:mod:`decide.decision.sensitivity`, :mod:`decide.decision.uncertainty` and
:mod:`decide.decision.simulate`.
"""

from __future__ import annotations

import csv
import io
from typing import Any

from rich.console import Group
from rich.table import Table
from rich.text import Text

from ..decision.sensitivity import EndPoint, Tornado, TwoWay
from ..decision.simulate import Check, Simulation
from ..decision.uncertainty import Probabilistic
from ..designs import get_design
from . import numbers as nb
from .text import CAUTION, fmt, literal

_ACTION_LETTER = {"study": "S", "flag-now": "F", "clear-now": "C", "not-available": "-"}


def _money(value: float | None) -> str:
    """Money in the sweep tables: short, with k/M/bn (the scenario's unit is named in the title)."""
    return nb.money(value, compact=True)


def _caution() -> Text:
    return Text(CAUTION, style="dim italic")


def _end(e: EndPoint) -> str:
    alpha = "-" if e.alpha is None else f"alpha {fmt(e.alpha, 3)}"
    if e.attained_alpha is not None and e.alpha is not None and abs(e.attained_alpha - e.alpha) > 1e-9:
        alpha += f" ({fmt(e.attained_alpha, 3)} attained)"
    size = "-" if e.n_per_group is None else f"n {fmt(e.n_per_group)}"
    power = "-" if e.power is None else f"power {fmt(e.power, 3)}"
    lines = [f"{alpha}, {power}, {size}", f"loss {_money(e.expected_loss)}; {e.action}"]
    if e.least_loss_policy is not None:
        lines.append(f"best standard: {e.least_loss_policy}")
    return "\n".join(lines)


def tornado_tables(t: Tornado, unit: str = "") -> Group:
    """The one-way table (inputs by swing) and the break-even values beneath."""
    cost = f" ({unit})" if unit else ""
    head = Table(title=f"{literal(t.title)}\nOne-way sensitivity of the loss-optimal choice", show_lines=True)
    head.add_column("input", overflow="fold")
    for col in ("range", f"swing in loss{cost}", "at the low end", "at the high end"):
        head.add_column(col)
    for r in t.rows:
        head.add_row(
            r.input,
            f"{fmt(r.low.value, 3)} to {fmt(r.high.value, 3)}\n(central {fmt(r.central, 3)})",
            _money(r.swing),
            _end(r.low),
            _end(r.high),
        )
    roots = Table(title="Break-even values (Brent's method on the loss difference)")
    roots.add_column("input", overflow="fold")
    for col in ("changes", "at", "from", "to", "losses compared"):
        roots.add_column(col)
    for r in t.rows:
        if not r.thresholds:
            roots.add_row(r.input, "-", "no change within the range", "", "", "")
        for th in r.thresholds:
            at = (
                fmt(th.value, 6)
                if th.value is not None
                else (f"between {fmt(th.between[0], 4)} and {fmt(th.between[1], 4)} (a policy becomes infeasible)")
            )
            losses = "-" if th.losses is None else f"{_money(th.losses[0])} = {_money(th.losses[1])}"
            roots.add_row(
                r.input, "action" if th.kind == "action" else "least-loss standard", at, th.below, th.above, losses
            )
    centre = Text(f"At the central inputs: {_end(t.central)}".replace("\n", "; "))
    note = Text(
        f"Method: {t.method}. Standards compared: {', '.join(t.policies) or 'none'} "
        "(the fully loss-optimal policy is the benchmark, not a contender).",
        style="dim",
    )
    return Group(centre, head, roots, note, _caution())


def two_way_tables(w: TwoWay) -> Group:
    """The action map and the attained alpha over the grid (rows: the second input)."""
    maps = []
    for title, cells in (
        ("recommended action (S study, F flag now, C clear now)", w.action),
        ("loss-optimal attained alpha", w.attained_alpha),
        ("loss-optimal size per group", w.n_per_group),
    ):
        t = Table(title=f"{literal(w.title)}\n{title}", box=None, pad_edge=False)
        t.add_column(f"{w.y} \\ {w.x}", style="bold")
        for x in w.x_values:
            t.add_column(fmt(x, 2), justify="right")
        for y, row in zip(w.y_values, cells, strict=True):
            t.add_row(fmt(y, 3), *(_ACTION_LETTER.get(c, str(c)) if isinstance(c, str) else fmt(c, 2) for c in row))
        maps.append(t)
    return Group(*maps, Text(f"Method: {w.method}.", style="dim"), _caution())


def probabilistic_tables(p: Probabilistic, unit: str = "") -> Group:
    """Quantiles of the optimum, action and policy probabilities, averaged-loss design, regret, EVPI."""
    inputs = Table(
        title=f"{literal(p.title)}\nProbabilistic inputs ({p.draws:,} draws, seed {p.seed})", show_header=False
    )
    inputs.add_column("input", style="bold")
    inputs.add_column("distribution")
    for k, v in p.inputs.items():
        inputs.add_row(k, v)
    q = Table(title="Loss-optimal design over the draws")
    q.add_column("quantity")
    q.add_column("mean", justify="right")
    for level in p.quantile_levels:
        q.add_column(f"{level:.0%}", justify="right")
    for s in p.spreads:
        q.add_row(s.name, fmt(s.mean, 3), *(fmt(v, 3) for v in s.quantiles))
    odds = Table(title="How often")
    odds.add_column("what")
    odds.add_column("probability", justify="right")
    for a, share in p.action_probability.items():
        odds.add_row(f"best action: {a}", fmt(share, 3))
    for k, share in p.policy_least_loss_probability.items():
        odds.add_row(f"least loss: design of {k}", fmt(share, 3))
    summary = Table(
        title="Commit before the doubt is resolved" + (f" (costs in {unit})" if unit else ""), show_header=False
    )
    summary.add_column("quantity", style="bold")
    summary.add_column("value")
    for d in (p.central_optimum, p.average_optimum):
        summary.add_row(
            d.label,
            f"alpha {fmt(d.alpha, 3)} (attained {fmt(d.attained_alpha, 3)}), "
            f"n {fmt(d.n_per_group)}; average loss {fmt(d.average_loss, 5)}",
        )
    summary.add_row("expected regret of committing to the central optimum", fmt(p.expected_regret_of_central, 5))
    summary.add_row("expected value of perfect information (EVPI)", fmt(p.evpi, 5))
    summary.add_row("average of each draw's own least loss", fmt(p.mean_optimal_loss, 5))
    notes = Text(
        f"Seed {p.seed}: the same seed gives the same numbers. Method: {p.method}. Policies' designs "
        "are those chosen at the central inputs; ties credit every tied policy.",
        style="dim",
    )
    return Group(inputs, q, odds, summary, notes, _caution())


def _check_row(c: Check) -> list[str]:
    ci = "-" if c.interval is None else f"{fmt(c.interval.low, 4)} to {fmt(c.interval.high, 4)}"
    flag = Text("DIFFERS", style="bold red") if c.flagged else Text("agrees", style="green")
    return [c.name, fmt(c.simulated, 5), ci, fmt(c.analytic, 5), fmt(c.standard_error, 3), flag]  # type: ignore[list-item]


def simulation_table(s: Simulation, unit: str = "") -> Group:
    """Simulated against analytic false-alarm probability, power and loss."""
    t = Table(
        title=f"{literal(s.title)}\nSimulated check of the {s.policy} design: {s.studies:,} studies under each "
        f"hypothesis, seed {s.seed}"
    )
    for col in ("quantity", "simulated", "95% interval", "analytic", "standard error", "within 4 SE"):
        t.add_column(col)
    for c in (s.false_alarm, s.power, s.loss):
        t.add_row(*_check_row(c))
    sided = "one-sided" if s.sides == 1 else "two-sided"
    words = get_design(s.design)
    design = Text(
        f"Design: {s.design}, {fmt(s.n_per_group)} {words.size_name}"
        + (f" and {fmt(s.n_comparison)} {words.comparison_name}" if s.n_comparison else "")
        + f"; {sided} {s.test} test at alpha {fmt(s.alpha, 4)}. Tests applied: {s.method}."
        + (f" Costs in {unit}." if unit else ""),
        style="dim",
    )
    if not s.flagged:
        return Group(t, design, _caution())
    return Group(t, design, Text(difference_note(s.test)), _caution())


def difference_note(test: str) -> str:
    """What a difference beyond 4 standard errors means, for the test the design runs."""
    if test == "exact":
        return (
            "A difference beyond 4 standard errors: the exact test's numbers are exact sums, so this points to "
            "a fault or to a different analysis than the one planned. Do not rely on the design until it is "
            "explained."
        )
    return (
        "A difference beyond 4 standard errors: the normal test's numbers are approximations, and a large "
        "simulation can measure their error. Judge whether the gap (simulated minus analytic) matters for "
        "the decision; if it does, plan with the simulated values or an exact test."
    )


def _csv(rows: list[dict[str, Any]]) -> str:
    buf = io.StringIO()
    if not rows:
        return ""
    w = csv.DictWriter(buf, fieldnames=list(rows[0]), lineterminator="\n")
    w.writeheader()
    for row in rows:
        w.writerow({k: "" if v is None else v for k, v in nb.for_json(row).items()})
    return buf.getvalue()


def tornado_csv(t: Tornado) -> str:
    """One row per input end and per break-even value."""
    rows: list[dict[str, Any]] = []
    for r in t.rows:
        for end, e in (("low", r.low), ("high", r.high)):
            rows.append(
                {
                    "input": r.input,
                    "row": end,
                    "value": e.value,
                    "swing": r.swing,
                    "alpha": e.alpha,
                    "attained_alpha": e.attained_alpha,
                    "power": e.power,
                    "n_per_group": e.n_per_group,
                    "expected_loss": e.expected_loss,
                    "action": e.action,
                    "from": None,
                    "to": e.least_loss_policy,
                }
            )
        for th in r.thresholds:
            rows.append(
                {
                    "input": r.input,
                    "row": f"break-even {th.kind}",
                    "value": th.value,
                    "swing": r.swing,
                    "alpha": None,
                    "attained_alpha": None,
                    "power": None,
                    "n_per_group": None,
                    "expected_loss": None if th.losses is None else th.losses[0],
                    "action": None,
                    "from": th.below,
                    "to": th.above,
                }
            )
    return _csv(rows)


def two_way_csv(w: TwoWay) -> str:
    """One row per grid cell."""
    rows = []
    for i, y in enumerate(w.y_values):
        for j, x in enumerate(w.x_values):
            rows.append(
                {
                    w.x: x,
                    w.y: y,
                    "alpha": w.alpha[i][j],
                    "attained_alpha": w.attained_alpha[i][j],
                    "n_per_group": w.n_per_group[i][j],
                    "expected_loss": w.expected_loss[i][j],
                    "action": w.action[i][j],
                }
            )
    return _csv(rows)


def probabilistic_csv(p: Probabilistic) -> str:
    """Quantile rows, then one row per probability and summary figure."""
    rows: list[dict[str, Any]] = []
    for s in p.spreads:
        rows.append(
            {
                "quantity": s.name,
                "mean": s.mean,
                **{f"q{lv:g}": v for lv, v in zip(p.quantile_levels, s.quantiles, strict=True)},
            }
        )
    blank = {f"q{lv:g}": None for lv in p.quantile_levels}
    for a, v in p.action_probability.items():
        rows.append({"quantity": f"P(best action {a})", "mean": v, **blank})
    for k, v in p.policy_least_loss_probability.items():
        rows.append({"quantity": f"P(least loss: {k})", "mean": v, **blank})
    for k, v in (
        ("average loss, central optimum", p.central_optimum.average_loss),
        ("average loss, averaged-loss design", p.average_optimum.average_loss),
        ("expected regret of the central optimum", p.expected_regret_of_central),
        ("EVPI", p.evpi),
        ("seed", p.seed),
    ):
        rows.append({"quantity": k, "mean": v, **blank})
    return _csv(rows)


def simulation_csv(s: Simulation) -> str:
    """One row per checked quantity."""
    return _csv(
        [
            {
                "quantity": c.name,
                "simulated": c.simulated,
                "ci_low": None if c.interval is None else c.interval.low,
                "ci_high": None if c.interval is None else c.interval.high,
                "analytic": c.analytic,
                "standard_error": c.standard_error,
                "flagged": c.flagged,
                "studies": s.studies,
                "seed": s.seed,
            }
            for c in (s.false_alarm, s.power, s.loss)
        ]
    )
