"""A finished study read against a scenario: sentences, a rich table, JSON and Markdown.

Every number comes from :class:`~decide.decision.interpret.Interpretation`;
this module only words and lays them out.  Infinite limits are said in words
("no upper limit") on screen and are ``null`` in JSON.
"""

from __future__ import annotations

import math
from typing import Any

from ..decision.interpret import Interpretation
from .text import CAUTION, fmt, json_safe

_ACTION = {"flag": "flag the exposure", "clear": "clear the exposure"}


def _a(name: str) -> str:
    """The name with its indefinite article."""
    return ("an " if name[:1].lower() in "aeiou" else "a ") + name


def _limit(x: float) -> str:
    return "no upper limit" if not math.isfinite(x) else fmt(x, 3)


def rules_out(r: Interpretation) -> str:
    """What the data rule out and what they cannot, in plain words."""
    level = f"{r.confidence:.0%}"
    name = r.effect_name
    if not math.isfinite(r.excludes_above):
        return (f"The data set no upper limit on the {name} at {level} confidence: this study cannot "
                f"exclude any {name}, however large.")
    return (f"At {level} confidence the data are compatible with {name}s from {fmt(r.ci_low, 3)} to "
            f"{fmt(r.ci_high, 3)}: this study cannot exclude {_a(name)} of {fmt(r.excludes_above, 3)}; "
            f"it rules out only {name}s above that.")


def power_note(r: Interpretation) -> str:
    """What the study could detect, and the warning against reading 'not significant' as 'safe'."""
    if r.detectable is None:
        could = (f"the study had less than {r.detect_power:.0%} power against every {r.effect_name} "
                 "in the design's range")
    else:
        could = (f"the study had {r.detect_power:.0%} power only against {_a(r.effect_name)} of "
                 f"{fmt(r.detectable, 3)} or more (alpha {fmt(r.detect_alpha, 3)})")
    if r.p_value > r.detect_alpha:
        return f"A result that is not significant is not evidence of safety: {could}."
    return f"For scale: {could}."


def bayes_sentence(r: Interpretation, unit: str = "") -> str:
    """The posterior probability of harm and the action of least posterior expected loss."""
    cost = f" {unit}" if unit else ""
    return (f"Given the data, the probability of harm is {fmt(r.posterior_harm, 3)} ({fmt(r.prior_harm, 3)} "
            f"before the study). Expected loss of flagging {fmt(r.loss_flag)}{cost}, of clearing "
            f"{fmt(r.loss_clear)}{cost}: the loss-minimising action is to {_ACTION[r.recommendation]}."
            + _disagreement(r))


def _disagreement(r: Interpretation) -> str:
    """Why the loss-minimising action may differ from the loss-optimal policy's test."""
    if r.loss_optimal_verdict is None or r.loss_optimal_verdict == r.recommendation:
        return ""
    return (f" The loss-optimal policy's test says {r.loss_optimal_verdict}: its threshold was fixed before the "
            "data, for the planned size and design effect, while this action weighs these data's exact "
            "likelihood over the whole prior.")


def estimate_sentence(r: Interpretation) -> str:
    """The estimate, its interval and the one-sided p-value."""
    est = "not estimable (no case in the comparison group)" if r.estimate is None else fmt(r.estimate, 3)
    return (f"{r.effect_name.capitalize()} {est}; {r.confidence:.0%} interval {fmt(r.ci_low, 3)} to "
            f"{_limit(r.ci_high)}; exact one-sided p-value {fmt(r.p_value, 3)}.")


def interpretation_record(r: Interpretation, title: str = "", unit: str = "") -> dict[str, Any]:
    """Plain data for JSON: every field, the sentences, and the caution."""
    record = {"scenario": title, **r.to_dict()}
    record["verdicts"] = [v.to_dict() for v in r.verdicts]
    record["sentences"] = {
        "estimate": estimate_sentence(r),
        "rules_out": rules_out(r),
        "power": power_note(r),
        "posterior": bayes_sentence(r, unit),
    }
    record["caution"] = CAUTION
    return dict(json_safe(record))


def interpretation_table(r: Interpretation, title: str, unit: str = "") -> Any:
    """The reading as rich tables: the estimate, the verdicts, the sentences and the caution."""
    from rich.console import Group
    from rich.panel import Panel
    from rich.table import Table
    from rich.text import Text

    t = Table(title=f"{title}\nObserved data", show_header=False)
    t.add_column("quantity", style="bold")
    t.add_column("value")
    for key, value in r.observed.items():
        t.add_row(key.replace("_", " "), fmt(value))
    t.add_row(r.effect_name, "not estimable" if r.estimate is None else fmt(r.estimate))
    t.add_row(f"{r.confidence:.0%} interval (exact)", f"{fmt(r.ci_low)} to {_limit(r.ci_high)}")
    t.add_row("exact p-value, one-sided (harm)", fmt(r.p_value))
    t.add_row("posterior probability of harm", f"{fmt(r.posterior_harm)} (prior {fmt(r.prior_harm)})")
    t.add_row("expected loss of flagging" + (f" ({unit})" if unit else ""), fmt(r.loss_flag))
    t.add_row("expected loss of clearing" + (f" ({unit})" if unit else ""), fmt(r.loss_clear))
    t.add_row("loss-minimising action", Text(r.recommendation, style="bold"))
    t.add_row(f"ratio detectable with {r.detect_power:.0%} power", fmt(r.detectable))
    v = Table(title="Verdict of each policy's test on these data")
    for col in ("policy", "test", "alpha (nominal)", "attained alpha (planned size)", "verdict"):
        v.add_column(col)
    for pv in r.verdicts:
        verdict: str = pv.verdict or "no test"
        if not pv.available and pv.verdict is not None:
            verdict += " (policy unmet)"
        v.add_row(pv.policy, pv.test or "-", fmt(pv.alpha), fmt(pv.attained_alpha), verdict)
    notes = [Text(s) for s in (estimate_sentence(r), rules_out(r), power_note(r), bayes_sentence(r, unit))]
    notes.append(Text(f"Method: {r.method}. Verdicts apply each policy's test and nominal alpha to these "
                      "data; 'policy unmet' marks a policy whose study the limits did not allow.", style="dim"))
    notes += [Text(f"Note: {w}", style="yellow") for w in r.warnings]
    notes.append(Text(CAUTION, style="dim italic"))
    return Group(t, v, Panel(Group(*notes), border_style="dim"))


def to_markdown(r: Interpretation, title: str, unit: str = "") -> str:
    """The reading as Markdown a board can read, with the caution."""
    lines = [f"# {title}: observed data", "", "| quantity | value |", "|---|---|"]
    for key, value in r.observed.items():
        lines.append(f"| {key.replace('_', ' ')} | {fmt(value)} |")
    lines += [
        f"| {r.effect_name} | {'not estimable' if r.estimate is None else fmt(r.estimate)} |",
        f"| {r.confidence:.0%} interval (exact) | {fmt(r.ci_low)} to {_limit(r.ci_high)} |",
        f"| exact p-value, one-sided | {fmt(r.p_value)} |",
        f"| posterior probability of harm | {fmt(r.posterior_harm)} |",
        f"| expected loss of flagging | {fmt(r.loss_flag)} {unit} |".replace("  |", " |"),
        f"| expected loss of clearing | {fmt(r.loss_clear)} {unit} |".replace("  |", " |"),
        f"| loss-minimising action | {r.recommendation} |",
        "", "| policy | test | alpha | attained alpha | verdict |", "|---|---|---|---|---|",
    ]
    for pv in r.verdicts:
        lines.append(f"| {pv.policy} | {pv.test or '-'} | {fmt(pv.alpha)} | {fmt(pv.attained_alpha)} | "
                     f"{pv.verdict or 'no test'} |")
    lines += ["", estimate_sentence(r), "", rules_out(r), "", power_note(r), "", bayes_sentence(r, unit), "",
              f"Method: {r.method}.", "", f"> {CAUTION}", ""]
    return "\n".join(lines)
