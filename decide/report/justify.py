"""The plain-language justification of a report, composed from its numbers.

Three paragraphs, each a list of pieces (text, or a :class:`~.page.Num`
that keeps its result field): which cost ratio the conventional standard
implicitly assumes beside the stated one; what a negative study of the
chosen size would not rule out; how robust the choice is (the inputs whose
break-even values lie within their ranges).
"""

from __future__ import annotations

from typing import Any

from .document import ReportResults
from .page import num

#: The policy taken as "the conventional standard".
CONVENTIONAL = "conventional-science"

Pieces = list[Any]


def convention(r: ReportResults) -> Pieces:
    """Which cost ratio the conventional standard implies, and how far it is from the stated one."""
    d = r.decision
    stated = num("decision.stated_cost_ratio", d.stated_cost_ratio, "number")
    found = [(i, c) for i, c in enumerate(r.comparison) if c.policy == CONVENTIONAL]
    if d.stated_cost_ratio is None:
        return [
            "The stated inputs give no finite cost ratio of a missed hazard to a false alarm, so no standard's "
            "implied ratio can be set beside it."
        ]
    if not found or found[0][1].implied_cost_ratio is None:
        return ["The stated inputs make a missed hazard cost ", stated, " times a false alarm (in expectation)."]
    i, c = found[0]
    implied = num(f"comparison.decisions[{i}].implied_cost_ratio", c.implied_cost_ratio, "number")
    side = "more" if d.stated_cost_ratio > float(c.implied_cost_ratio or 0.0) else "less"
    return [
        f"The conventional standard ({c.title}) chooses its alpha as if a missed hazard cost ",
        implied,
        " times a false alarm. The stated inputs make it cost ",
        stated,
        f" times as much: {side} than the "
        "convention assumes. Following the convention would adopt a value judgment the responsible body "
        "has not stated.",
    ]


def negative_study(r: ReportResults) -> Pieces:
    """What a negative study of the chosen size would not rule out."""
    d = r.decision
    if d.n_per_group is None or d.p_harm_given_negative is None:
        return [
            "No study within the constraints meets the loss-optimal rule, so there is no negative result to interpret."
        ]
    out: Pieces = [
        "A negative study of ",
        num("decision.n_per_group", d.n_per_group, "count"),
        " per group would leave the probability of harm at ",
        num("decision.p_harm_given_negative", d.p_harm_given_negative, "probability"),
        " (from ",
        num("inputs.prior.p_harm", r.loaded.problem.p_harm, "number"),
        " before the study)",
    ]
    if d.detectable_effect is not None:
        out += [
            "; effects below ",
            num("decision.detectable_effect", d.detectable_effect, "number"),
            " are detected with power under 0.8, so a negative result does not rule them out.",
        ]
    else:
        out += ["; no effect within the design's range is detected with power 0.8."]
    return out


def robustness(r: ReportResults) -> Pieces:
    """Which inputs' break-even values lie within their ranges."""
    if r.tornado is None:
        return ["Robustness was not assessed in this draft (the one-way sensitivity was skipped)."]
    inside: Pieces = []
    for i, w in enumerate(r.tornado.rows):
        for j, t in enumerate(w.thresholds):
            if t.kind == "action" and t.value is not None and w.low.value <= t.value <= w.high.value:
                inside += [
                    ("; " if inside else "") + f"{w.input} at ",
                    num(f"tornado.rows[{i}].thresholds[{j}].value", t.value, "number"),
                    f" (range {w.input} ",
                    num(f"tornado.rows[{i}].low.value", w.low.value, "number"),
                    " to ",
                    num(f"tornado.rows[{i}].high.value", w.high.value, "number"),
                    ")",
                ]
    if not inside:
        return [
            "The recommended action stays the same over the whole range of every input examined one at a "
            "time: no break-even value lies within its range."
        ]
    return [
        "The recommended action changes within the examined range of: ",
        *inside,
        ". Where the responsible body is unsure on which side of these values the truth lies, the choice "
        "is not robust and the input deserves a closer look.",
    ]


def justification(r: ReportResults) -> list[Pieces]:
    """The three paragraphs of the justification."""
    return [convention(r), negative_study(r), robustness(r)]
