"""The report's section on a finished study: its counts read against the plan, as page data.

What ``decide interpret`` shows, for the templates: the observed counts, the
estimate and its exact interval, the p-values, the posterior probability of
harm, the expected loss of each action, each policy's verdict and the
sentences.  Numbers are :class:`~decide.report.page.Num` with keys under
``interpretation.`` (fields of :class:`~decide.decision.interpret.Interpretation`);
the words come from :mod:`decide.report.interpretation`, the same functions
the console, the Markdown and the JSON use.
"""

from __future__ import annotations

import math
from typing import Any

from ..decision.interpret import Interpretation
from .document import ReportResults
from .interpretation import VERDICT_NOTE, alpha_text, reading_sentences, verdict_text
from .numbers import percent
from .page import Num, num

_ACTIONS = {"flag": "flag the exposure", "clear": "clear the exposure"}


def _observed_rows(r: Interpretation) -> list[tuple[str, Num]]:
    """The counts as read from the file: whole numbers as counts, person-years and expected counts as quantities."""
    return [
        (key.replace("_", " "), num(f"interpretation.observed.{key}", v, "count" if isinstance(v, int) else "number"))
        for key, v in r.observed.items()
    ]


def _interval(r: Interpretation) -> list[Any]:
    """The exact interval; an upper end the data do not bound is said in words."""
    high: Any = num("interpretation.ci_high", r.ci_high, "number") if math.isfinite(r.ci_high) else "no upper limit"
    return [num("interpretation.ci_low", r.ci_low, "number"), " to ", high]


def _estimate_rows(r: Interpretation, currency: str) -> list[tuple[str, Any]]:
    """The estimate, interval, p-values, posterior, expected losses and the loss-minimising action."""
    estimate = "not estimable" if r.estimate is None else num("interpretation.estimate", r.estimate, "number")
    detect = f"{r.effect_name} detectable with {percent(r.detect_power)} power"
    return [
        (r.effect_name, estimate),
        (f"{percent(r.confidence)} interval (exact)", _interval(r)),
        ("exact p-value, one-sided (harm)", num("interpretation.p_value", r.p_value, "probability")),
        ("mid-p-value, one-sided", num("interpretation.p_value_mid", r.p_value_mid, "probability")),
        (
            "posterior probability of harm",
            [
                num("interpretation.posterior_harm", r.posterior_harm, "probability"),
                " (prior ",
                num("interpretation.prior_harm", r.prior_harm, "probability"),
                ")",
            ],
        ),
        ("expected loss of flagging", num("interpretation.loss_flag", r.loss_flag, "money", currency)),
        ("expected loss of clearing", num("interpretation.loss_clear", r.loss_clear, "money", currency)),
        ("loss-minimising action", _ACTIONS[r.recommendation]),
        (detect, num("interpretation.detectable", r.detectable, "number")),
    ]


def _verdict_rows(r: Interpretation) -> list[dict[str, Any]]:
    """Each policy's test on the data: alpha as its plan shows it, attained alpha, verdict."""
    rows = []
    for i, pv in enumerate(r.verdicts):
        k = f"interpretation.verdicts[{i}]"
        alpha = num(f"{k}.alpha", pv.alpha, "probability")
        rows.append(
            {
                "policy": pv.title,
                "name": pv.policy,
                "test": pv.test or "-",
                "alpha": Num(alpha.key, alpha.value, alpha_text(pv)),
                "attained_alpha": num(f"{k}.attained_alpha", pv.attained_alpha, "probability"),
                "verdict": verdict_text(pv),
            }
        )
    return rows


def after_study(r: ReportResults) -> dict[str, Any] | None:
    """The section's data, or ``None`` when the report was made without observed counts."""
    if r.after is None:
        return None
    reading, currency = r.after.reading, r.loaded.currency or ""
    return {
        "file_name": r.after.file_name,
        "sha256": r.after.sha256,
        "observed": _observed_rows(reading),
        "rows": _estimate_rows(reading, currency),
        "verdicts": _verdict_rows(reading),
        "sentences": list(reading_sentences(reading, currency).values()),
        "method": reading.method,
        "verdict_note": VERDICT_NOTE,
        "warnings": list(reading.warnings),
    }
