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
from . import numbers as nb
from . import rule_words

#: The no-study actions in words ("to ... now").
_VERB = {"flag-now": "flag", "clear-now": "clear"}


def _now(action: str) -> str:
    return f"{_VERB[action]} now"


def recommendation(d: Decision, currency: str = "") -> str:
    """What the decision recommends, in one or two sentences (money in ``currency``)."""
    if d.action == "not-available":
        return (
            f"{d.title} cannot be met: {d.reason}. Without a study, the better action is to "
            f"{_now(d.no_study_action)} (expected loss {nb.money(d.no_study_loss, currency)})."
        )
    if d.action != "study":
        return (
            f"No study is worth its cost under {d.title.lower()}: {_now(d.action)} "
            f"(expected loss {nb.money(d.no_study_loss, currency)}, against "
            f"{nb.money(d.expected_loss, currency)} with the study)."
        )
    size_name = get_design(d.design).size_name
    sided = "one-sided" if d.sides == 1 else "two-sided"
    return (
        f"Study {d.n_per_group:,} {size_name} ({d.n_total:,} subjects in all); flag the exposure "
        f"if the {sided} {d.test} test is significant at alpha = {rule_words.nominal_text(d)}. "
        f"Expected net benefit over deciding now (to {_VERB[d.no_study_action]}): "
        f"{nb.money(d.net_benefit, currency)}."
    )


def best_action(c: Comparison, currency: str = "") -> str:
    """The best of all actions in a comparison, a study or none, in one sentence (money in ``currency``)."""
    now = (
        f"without a study, flagging now would cost {nb.money(c.flag_now, currency)} and clearing now "
        f"{nb.money(c.clear_now, currency)}"
    )
    if c.best_action == "study":
        # the best study may belong to a policy left out of the comparison shown (--policy)
        title = next((d.title for d in c if d.policy == c.best_policy), c.best_policy)
        loss = nb.money(c.best_loss, currency)
        return f"Best of all actions: the study of the {title} policy (expected loss {loss}; {now})."
    return f"No study is worth its cost: the best action is to {_now(c.best_action)} ({now})."


def decision_record(d: Decision, currency: str = "") -> dict[str, Any]:
    """A decision as plain data for machines, with its recommendation in words."""
    return {**d.to_dict(), "recommendation": recommendation(d, currency)}
