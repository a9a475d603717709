"""Words and rows for an audit, shared by the console and Markdown renderers."""

from __future__ import annotations

from ..decision.audit import Audit
from ..designs import get_design
from . import numbers as nb
from .text import NO_FINITE_RATIO

IMPLIED_MISSED_HAZARD = (
    "Implied cost of a missed hazard: the cost of missing a real hazard at which one more {unit} would "
    "cost exactly what it saves in expected missed-hazard loss, so that the protocol's size would be the "
    "loss-optimal one."
)


def one_subject(design: str) -> str:
    """One unit of the design's size, in the singular: ``exposed subject`` or ``case``."""
    name = get_design(design).size_name
    return name[:-1] if name.endswith("s") else name


def _money(value: float | None, unit: str) -> str:
    return nb.money(value, unit)


def loss_rows(a: Audit, unit: str) -> list[tuple[str, str]]:
    """The protocol's losses by its stated costs (none when no costs were given)."""
    x = a.losses
    if x is None:
        return []
    rows = [
        ("stated cost of a missed hazard", _money(x.missed_hazard, unit)),
        ("stated cost of a false alarm", _money(x.false_alarm, unit)),
        (
            "stated cost ratio (miss : false alarm)",
            NO_FINITE_RATIO if x.stated_cost_ratio is None else nb.number(x.stated_cost_ratio),
        ),
        ("expected loss of the protocol", _money(x.expected_loss, unit)),
        ("  from missed hazards", _money(x.loss_parts["missed"], unit)),
        ("  from false alarms", _money(x.loss_parts["false_alarm"], unit)),
        ("  study cost", _money(x.loss_parts["study"], unit)),
        ("loss if flagged now, no study", _money(x.no_study["flag_now"], unit)),
        ("loss if cleared now, no study", _money(x.no_study["clear_now"], unit)),
        ("net benefit of running the protocol", _money(x.net_benefit, unit)),
        ("best action for the same problem", x.optimal_action.replace("-", " ")),
        ("loss-optimal design: size per group", nb.count(x.optimal_n_per_group)),
        ("loss-optimal design: alpha (nominal)", x.optimal_alpha or "-"),
        ("expected loss of the best action", _money(x.optimal_expected_loss, unit)),
        ("regret of the protocol (extra loss over the best action)", _money(x.regret, unit)),
    ]
    return rows


def explanations(a: Audit, unit: str = "") -> list[str]:
    """Sentences that say what the audit's derived quantities mean."""
    out = [IMPLIED_MISSED_HAZARD.format(unit=one_subject(a.design))]
    x = a.losses
    if x is not None:
        size_name = get_design(a.design).size_name
        if x.optimal_action == "study":
            out.append(
                f"Loss-optimal design for the same costs and prior: {nb.count(x.optimal_n_per_group)} "
                f"{size_name}, the {x.optimal_test} test at alpha = {x.optimal_alpha}, expected loss "
                f"{nb.money(x.optimal_expected_loss, unit)}."
            )
        else:
            verb = "flag" if x.optimal_action == "flag-now" else "clear"
            out.append(
                f"By the same costs and prior no study is worth its cost: the best action is to {verb} "
                f"now (expected loss {nb.money(x.optimal_expected_loss, unit)}); the regret is measured "
                "against it."
            )
        if x.net_benefit <= 0:
            better = "flag" if x.no_study["flag_now"] < x.no_study["clear_now"] else "clear"
            out.append(
                f"By the stated costs the protocol is not worth running: deciding now (to {better}) "
                "has the smaller expected loss."
            )
    return out


def markdown(a: Audit, unit: str) -> str:
    """The audit as a Markdown document, with the rule, the notes and the caution."""
    from .rule_words import NOMINAL_AND_ATTAINED, alpha_rows, markdown_rule
    from .text import CAUTION

    d = get_design(a.design)
    rows = [
        ("test", a.method),
        *alpha_rows(a),
        (f"power against {d.effect_name} {nb.number(a.effect)}", nb.probability(a.power)),
        (d.size_name, nb.count(a.n_per_group)),
        ("subjects in all", nb.count(a.n_total)),
    ]
    if a.prior is not None:
        rows.append((f"{d.effect_name} if harmful (prior, as entered)", a.prior))
    ratio = nb.ratio_range(a.implied_cost_ratio, a.implied_cost_ratio_range)
    rows += [
        ("implied cost ratio (miss : false alarm)", ratio),
        (f"power gained per extra {one_subject(a.design)}", nb.number(a.marginal_power_per_subject)),
        ("implied cost of a missed hazard", _money(a.implied_missed_hazard, unit)),
        ("implied cost of a false alarm", _money(a.implied_false_alarm, unit)),
        ("P(harmful \\| negative result)", nb.probability(a.p_harm_given_negative)),
        ("P(harmful \\| positive result)", nb.probability(a.p_harm_given_positive)),
    ]
    rows += [(f"{d.effect_name} detected with power {lv}", nb.number(e)) for lv, e in a.detectable_effects.items()]
    rows += loss_rows(a, unit)
    lines = [f"# Audit of a {d.title.lower()} protocol", "", "| quantity | value |", "|---|---|"]
    lines += [f"| {label} | {value} |" for label, value in rows]
    lines += ["", a.rules_out, ""]
    for line in explanations(a, unit):
        lines += [line, ""]
    lines += [f"- Note: {w}" for w in a.warnings] + ([""] if a.warnings else [])
    lines += ["## Decision rule", ""] + markdown_rule(a.rule)
    lines += [NOMINAL_AND_ATTAINED, "", f"_{CAUTION}_", ""]
    return "\n".join(lines)
