"""A finished study read against a scenario: sentences, a rich table, JSON and Markdown.

Every number comes from :class:`~decide.decision.interpret.Interpretation`;
this module only words and lays them out.  Infinite limits are said in words
("no upper limit") on screen and are ``null`` in JSON.
"""

from __future__ import annotations

import math
from typing import Any

from ..decision.interpret import Interpretation, PolicyVerdict
from ..decision.observed import reader_of
from .numbers import count, for_json, money, number, percent, probability
from .text import CAUTION, literal, markdown_literal

_ACTION = {"flag": "flag the exposure", "clear": "clear the exposure"}


def _a(name: str) -> str:
    """The name with its indefinite article."""
    return ("an " if name[:1].lower() in "aeiou" else "a ") + name


def _limit(x: float) -> str:
    return "no upper limit" if not math.isfinite(x) else number(x)


def _observed(value: float) -> str:
    """A count as a whole number; person-years and expected counts as quantities."""
    return count(value) if isinstance(value, int) else number(value)


def rules_out(r: Interpretation) -> str:
    """What the data rule out and what they cannot, in plain words."""
    level = percent(r.confidence)
    name = r.effect_name
    if not math.isfinite(r.excludes_above):
        return (
            f"The data set no upper limit on the {name} at {level} confidence: this study cannot "
            f"exclude any {name}, however large."
        )
    return (
        f"At {level} confidence the data are compatible with {name}s from {number(r.ci_low)} to "
        f"{number(r.ci_high)}: this study cannot exclude {_a(name)} of {number(r.excludes_above)}; "
        f"it rules out only {name}s above that."
    )


def power_note(r: Interpretation) -> str:
    """What the study could detect, and the warning against reading 'not significant' as 'safe'."""
    if r.detectable is None:
        could = (
            f"the study had less than {percent(r.detect_power)} power against every {r.effect_name} "
            "in the design's range"
        )
    else:
        could = (
            f"the study had {percent(r.detect_power)} power only against {_a(r.effect_name)} of "
            f"{number(r.detectable)} or more (alpha {r.detect_alpha_shown or probability(r.detect_alpha)})"
        )
    if r.p_value > r.detect_alpha:
        return f"A result that is not significant is not evidence of safety: {could}."
    return f"For scale: {could}."


def bayes_sentence(r: Interpretation, unit: str = "") -> str:
    """The posterior probability of harm and the action of least posterior expected loss."""
    return (
        f"Given the data, the probability of harm is {probability(r.posterior_harm)} "
        f"({probability(r.prior_harm)} before the study). Expected loss of flagging "
        f"{money(r.loss_flag, literal(unit))}, of clearing {money(r.loss_clear, literal(unit))}: "
        f"the loss-minimising action is to {_ACTION[r.recommendation]}." + _disagreement(r)
    )


def _disagreement(r: Interpretation) -> str:
    """Why the loss-minimising action may differ from the loss-optimal policy's test."""
    if r.loss_optimal_verdict is None or r.loss_optimal_verdict == r.recommendation:
        return ""
    return (
        f" The loss-optimal policy's test says {r.loss_optimal_verdict}: its threshold was fixed before the "
        "data, for the planned size and design effect, while this action weighs these data's exact "
        "likelihood over the whole prior."
    )


def estimate_sentence(r: Interpretation) -> str:
    """The estimate, its interval and the one-sided p-value."""
    why = reader_of(r.design).no_estimate
    est = f"not estimable ({why})" if r.estimate is None else number(r.estimate)
    return (
        f"{r.effect_name.capitalize()} {est}; {percent(r.confidence)} interval {number(r.ci_low)} to "
        f"{_limit(r.ci_high)}; exact one-sided p-value {probability(r.p_value)}."
    )


def alpha_text(pv: PolicyVerdict) -> str:
    """A policy's nominal alpha as its plan shows it (rounded into its cut-off interval)."""
    return pv.alpha_shown or probability(pv.alpha)


def verdict_text(pv: PolicyVerdict) -> str:
    """A policy's verdict in words: flag, clear or no test, and 'policy unmet' where its study was not allowed."""
    verdict: str = pv.verdict or "no test"
    if not pv.available and pv.verdict is not None:
        verdict += " (policy unmet)"
    return verdict


#: How verdicts are read, said once beneath their table.
VERDICT_NOTE = (
    "Verdicts apply each policy's test and nominal alpha to these data; 'policy unmet' marks a policy "
    "whose study the limits did not allow."
)


def reading_sentences(r: Interpretation, unit: str = "") -> dict[str, str]:
    """The reading in plain words, in the order every format shows it.

    The estimate, what the data rule out, what the study could detect, and
    the posterior with the action of least expected loss; the console, the
    Markdown, the JSON and the board's report all take them from here.
    """
    return {
        "estimate": estimate_sentence(r),
        "rules_out": rules_out(r),
        "power": power_note(r),
        "posterior": bayes_sentence(r, unit),
    }


def interpretation_record(r: Interpretation, title: str = "", unit: str = "") -> dict[str, Any]:
    """Plain data for JSON: every field, the sentences, and the caution."""
    record = {"scenario": title, **r.to_dict()}
    record["verdicts"] = [v.to_dict() for v in r.verdicts]
    record["sentences"] = reading_sentences(r, unit)
    record["caution"] = CAUTION
    return dict(for_json(record))


def interpretation_table(r: Interpretation, title: str, unit: str = "") -> Any:
    """The reading as rich tables: the estimate, the verdicts, the sentences and the caution."""
    from rich.console import Group
    from rich.panel import Panel
    from rich.table import Table
    from rich.text import Text

    money_unit = f" ({literal(unit)})" if unit else ""
    t = Table(title=Text(f"{literal(title)}\nObserved data"), show_header=False)
    t.add_column("quantity", style="bold")
    t.add_column("value")
    for key, value in r.observed.items():
        t.add_row(key.replace("_", " "), _observed(value))
    t.add_row(r.effect_name, "not estimable" if r.estimate is None else number(r.estimate))
    t.add_row(f"{percent(r.confidence)} interval (exact)", f"{number(r.ci_low)} to {_limit(r.ci_high)}")
    t.add_row("exact p-value, one-sided (harm)", probability(r.p_value))
    t.add_row("mid-p-value, one-sided", probability(r.p_value_mid))
    t.add_row("posterior probability of harm", f"{probability(r.posterior_harm)} (prior {probability(r.prior_harm)})")
    t.add_row("expected loss of flagging" + money_unit, money(r.loss_flag))
    t.add_row("expected loss of clearing" + money_unit, money(r.loss_clear))
    t.add_row("loss-minimising action", Text(r.recommendation, style="bold"))
    t.add_row(f"ratio detectable with {percent(r.detect_power)} power", number(r.detectable))
    v = Table(title="Verdict of each policy's test on these data")
    v.add_column("policy", no_wrap=True)  # a name is never cut: it is what the reader looks up
    for col in ("test", "alpha (nominal)", "attained alpha (planned size)", "verdict"):
        v.add_column(col)
    for pv in r.verdicts:
        v.add_row(
            Text(literal(pv.policy)), pv.test or "-", alpha_text(pv), probability(pv.attained_alpha), verdict_text(pv)
        )
    notes = [Text(s) for s in reading_sentences(r, unit).values()]
    notes.append(Text(f"Method: {r.method}. {VERDICT_NOTE}", style="dim"))
    notes += [Text(f"Note: {w}", style="yellow") for w in r.warnings]
    notes.append(Text(CAUTION, style="dim italic"))
    return Group(t, v, Panel(Group(*notes), border_style="dim"))


def to_markdown(r: Interpretation, title: str, unit: str = "") -> str:
    """The reading as Markdown a board can read, with the caution."""
    cur = f" {markdown_literal(unit)}" if unit else ""
    lines = [f"# {markdown_literal(title)}: observed data", "", "| quantity | value |", "|---|---|"]
    for key, value in r.observed.items():
        lines.append(f"| {key.replace('_', ' ')} | {_observed(value)} |")
    lines += [
        f"| {r.effect_name} | {'not estimable' if r.estimate is None else number(r.estimate)} |",
        f"| {percent(r.confidence)} interval (exact) | {number(r.ci_low)} to {_limit(r.ci_high)} |",
        f"| exact p-value, one-sided | {probability(r.p_value)} |",
        f"| mid-p-value, one-sided | {probability(r.p_value_mid)} |",
        f"| posterior probability of harm | {probability(r.posterior_harm)} |",
        f"| expected loss of flagging | {money(r.loss_flag)}{cur} |",
        f"| expected loss of clearing | {money(r.loss_clear)}{cur} |",
        f"| loss-minimising action | {r.recommendation} |",
        "",
        "| policy | test | alpha | attained alpha | verdict |",
        "|---|---|---|---|---|",
    ]
    for pv in r.verdicts:
        lines.append(
            f"| {markdown_literal(pv.policy)} | {pv.test or '-'} | {alpha_text(pv)} | "
            f"{probability(pv.attained_alpha)} | {verdict_text(pv)} |"
        )
    lines += [
        *(part for sentence in reading_sentences(r, unit).values() for part in ("", markdown_literal(sentence))),
        "",
        f"Method: {r.method}.",
        "",
        f"> {CAUTION}",
        "",
    ]
    return "\n".join(lines)
