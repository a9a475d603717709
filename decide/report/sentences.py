"""Sentences for people, composed from the facts the decision core returns.

The core says which action a policy leads to and with which numbers
(:class:`~decide.decision.optimize.Decision`,
:class:`~decide.decision.optimize.Comparison`); every renderer (console,
Markdown, CSV, JSON) takes its plain-words recommendation from here, so the
wording lives in one place.
"""

from __future__ import annotations

from typing import Any

from ..decision.optimize import Comparison, Decision
from ..designs import get_design
from .text import fmt

#: The no-study actions in words ("to ... now").
_VERB = {"flag-now": "flag", "clear-now": "clear"}


def _now(action: str) -> str:
    return f"{_VERB[action]} now"


def recommendation(d: Decision) -> str:
    """What the decision recommends, in one or two sentences."""
    if d.action == "not-available":
        return (f"{d.title} cannot be met: {d.reason}. Without a study, the better action is to "
                f"{_now(d.no_study_action)} (expected loss {fmt(d.no_study_loss)}).")
    if d.action != "study":
        return (f"No study is worth its cost under {d.title.lower()}: {_now(d.action)} "
                f"(expected loss {fmt(d.no_study_loss)}, against {fmt(d.expected_loss)} with the study).")
    size_name = get_design(d.design).size_name
    sided = "one-sided" if d.sides == 1 else "two-sided"
    return (f"Study {d.n_per_group:,} {size_name} ({d.n_total:,} subjects in all); flag the exposure "
            f"if the {sided} {d.test} test is significant at alpha = {d.alpha:.4g}. "
            f"Expected net benefit over deciding now (to {_VERB[d.no_study_action]}): {fmt(d.net_benefit)}.")


def best_action(c: Comparison) -> str:
    """The best of all actions in a comparison, a study or none, in one sentence."""
    now = f"without a study, flagging now would cost {fmt(c.flag_now)} and clearing now {fmt(c.clear_now)}"
    if c.best_action == "study":
        title = next(d.title for d in c if d.policy == c.best_policy)
        return f"Best of all actions: the study of the {title} policy (expected loss {fmt(c.best_loss)}; {now})."
    return f"No study is worth its cost: the best action is to {_now(c.best_action)} ({now})."


def decision_record(d: Decision) -> dict[str, Any]:
    """A decision as plain data for machines, with its recommendation in words."""
    return {**d.to_dict(), "recommendation": recommendation(d)}
