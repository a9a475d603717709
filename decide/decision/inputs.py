"""The inputs a sensitivity analysis can vary, by their scenario key paths.

Each input is named by its key in the scenario file (``prior.p_harm``,
``consequences.false_alarm``, ``study.baseline``, ...).  :func:`with_value`
returns a copy of a :class:`~decide.decision.problem.Problem` with one input
changed (``dataclasses.replace``, so the problem's own checks run again);
:func:`default_range` gives the range a one-way analysis sweeps when none is
stated.

One derived input is not a key of the file: ``consequences.cost_ratio``, the
ratio of the expected missed-hazard cost to the false-alarm cost.  Setting it
rescales the missed-hazard cost (or, when that cost is derived from excess
cases, the cost per case) and leaves the false-alarm cost alone.

References
----------
.. [1] Eschenbach, T. G. (1992). Spiderplots versus tornado diagrams for
   sensitivity analysis. *Interfaces* 22(6), 40-46 (one-way ranges, inputs
   ordered by swing).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from scipy import special

from ..errors import DecideError
from .prior import EffectPrior
from .problem import Problem

#: Factor either way for the default range of a cost.
COST_FACTOR = 10.0
#: Factor either way for the baseline and the non-cost parts of a derived missed-hazard cost.
RATE_FACTOR = 2.0
#: Factor either way for a point effect.
EFFECT_FACTOR = 1.5
#: Default range of the prior probability of harm.
P_HARM_RANGE = (0.01, 0.99)
#: Factor either way for the default range of the cost ratio (two-way analyses).
RATIO_FACTOR = 100.0

COST_RATIO = "consequences.cost_ratio"
_DERIVED_PARTS = ("exposed_population", "background_rate", "cost_per_case", "horizon_years")


@dataclass(frozen=True)
class InputRange:
    """A range of one input, and whether it is spaced on a log scale.

    ``scale`` is ``"logit"`` for a probability, ``"log"`` for a positive
    quantity whose range does not reach 0, else ``"linear"``.
    """

    name: str
    low: float
    high: float
    central: float
    scale: str


def input_names(problem: Problem) -> tuple[str, ...]:
    """The inputs a one-way analysis of ``problem`` varies by default."""
    c = problem.consequences
    missed = tuple(f"consequences.{k}" for k in _DERIVED_PARTS) if c.is_derived else ("consequences.missed_hazard",)
    effect = "effect.ratio" if problem.effect.is_point else "effect.median"
    return ("prior.p_harm", *missed, "consequences.false_alarm", "consequences.per_subject", "study.baseline", effect)


def known_names(problem: Problem) -> tuple[str, ...]:
    """Every input name that can be varied for ``problem``."""
    return (*input_names(problem), COST_RATIO)


def check_name(problem: Problem, name: str) -> None:
    """Raise :class:`DecideError` unless ``name`` is an input of ``problem``."""
    known = known_names(problem)
    if name not in known:
        raise DecideError(f"vary: unknown input {name!r} for this scenario; choose from {', '.join(known)}", ("vary",))


def expected_missed_cost(problem: Problem) -> float:
    """``E[M(effect)]`` over the effect prior, in closed form.

    A given missed-hazard cost is constant.  A derived one is ``k * (effect - 1)``
    above 1, whose mean under a lognormal prior with log-median ``mu`` and
    log-scale ``s`` is ``k * (exp(mu + s**2/2) Phi(mu/s + s) - Phi(mu/s))``
    (the expectation of a call payoff with strike 1; Black and Scholes 1973),
    divided by the prior's mass above 1 (the effect under harm is the prior
    truncated at 1).
    """
    c = problem.consequences
    if c.missed_hazard is not None:
        return c.missed_hazard
    assert c.exposed_population is not None and c.background_rate is not None
    assert c.cost_per_case is not None and c.horizon_years is not None
    k = c.exposed_population * c.background_rate * c.cost_per_case * c.horizon_years
    e = problem.effect
    if e.is_point:
        return k * max(e.median - 1.0, 0.0)
    mu, s = math.log(e.median), e.log_sd
    excess = math.exp(mu + s * s / 2) * special.ndtr(mu / s + s) - special.ndtr(mu / s)
    return float(k * excess / (1 - e.truncated_share))  # the effect under harm is above 1


def value_of(problem: Problem, name: str) -> float:
    """The value of input ``name`` in ``problem``."""
    check_name(problem, name)
    section, key = name.split(".", 1)
    if name == COST_RATIO:
        f = problem.consequences.false_alarm
        return math.inf if f == 0 else expected_missed_cost(problem) / f
    if section == "prior":
        return problem.p_harm
    if section == "study":
        return problem.study.baseline
    if section == "effect":
        return problem.effect.median
    value = getattr(problem.consequences, key)
    return float(value)


def with_value(problem: Problem, name: str, value: float) -> Problem:
    """A copy of ``problem`` with input ``name`` set to ``value`` (checked again).

    Raises
    ------
    DecideError
        If ``name`` is unknown or the problem with that value is invalid.
    """
    check_name(problem, name)
    value = float(value)
    if not math.isfinite(value):
        raise DecideError(f"{name} must be finite, but got {value:g}", (name,))
    section, key = name.split(".", 1)
    if name == COST_RATIO:
        return _with_cost_ratio(problem, value)
    if section == "prior":
        return replace(problem, p_harm=value)
    if section == "study":
        return replace(problem, study=replace(problem.study, baseline=value))
    if section == "effect":
        if problem.effect.is_point:
            return replace(problem, effect=EffectPrior.point(value))
        return replace(problem, effect=replace(problem.effect, median=value))
    return replace(problem, consequences=replace(problem.consequences, **{key: value}))


def _with_cost_ratio(problem: Problem, ratio: float) -> Problem:
    c = problem.consequences
    if ratio < 0 or c.false_alarm == 0:
        raise DecideError(
            f"{COST_RATIO} must be >= 0 with a false-alarm cost above 0, but got {ratio:g}", (COST_RATIO,)
        )
    target = ratio * c.false_alarm
    if c.missed_hazard is not None:
        return replace(problem, consequences=replace(c, missed_hazard=target))
    now = expected_missed_cost(problem)
    assert c.cost_per_case is not None
    if ratio == 0:
        raise DecideError(f"{COST_RATIO} must be above 0 when the missed-hazard cost is derived", (COST_RATIO,))
    return replace(problem, consequences=replace(c, cost_per_case=c.cost_per_case * target / now))


def scale_of(name: str, low: float, high: float) -> str:
    """How a range is spaced: logit for a probability, log for positive ranges."""
    if name == "prior.p_harm":
        return "logit"
    return "log" if low > 0 else "linear"


def _factor_range(problem: Problem, name: str, central: float, factor: float) -> tuple[float, float]:
    """``central / factor`` to ``central * factor``, pulled in where the problem would be invalid."""
    ends = []
    for sign in (-1, 1):
        f = factor
        for _ in range(12):
            v = central * f**sign
            try:
                with_value(problem, name, v)
            except DecideError:
                f = math.sqrt(f)
                continue
            ends.append(v)
            break
        else:
            ends.append(central)
    return ends[0], ends[1]


def default_range(problem: Problem, name: str) -> InputRange:
    """The range a one-way analysis sweeps for ``name`` when none is stated.

    Costs a factor of 10 either way; the prior probability of harm 0.01 to
    0.99; the baseline and the non-cost parts of a derived missed-hazard cost
    a factor of 2; a point effect a factor of 1.5 (kept above 1), the median
    of a lognormal effect over the prior's central 90 % interval; the cost
    ratio a factor of 100.  Ends that would make the problem invalid (an
    exposed risk above 1, an effect not above 1) are pulled in towards the
    central value until it is valid.
    """
    central = value_of(problem, name)
    if name == "prior.p_harm":
        lo, hi = P_HARM_RANGE
    elif name == "effect.median":
        e = problem.effect
        lo, hi = _valid_ends(problem, name, central, max(e.quantile(0.05), 1 + (e.median - 1) / 2), e.quantile(0.95))
    elif name == "effect.ratio":
        lo, hi = _factor_range(problem, name, central, EFFECT_FACTOR)
        lo = max(lo, 1 + (central - 1) / 2)
    elif name == COST_RATIO:
        lo, hi = central / RATIO_FACTOR, central * RATIO_FACTOR
    else:
        cost = name in (
            "consequences.missed_hazard",
            "consequences.false_alarm",
            "consequences.per_subject",
            "consequences.cost_per_case",
        )
        if central == 0:
            lo, hi = 0.0, 0.0
        else:
            lo, hi = _factor_range(problem, name, central, COST_FACTOR if cost else RATE_FACTOR)
    lo, hi = min(lo, central), max(hi, central)
    return InputRange(name, float(lo), float(hi), float(central), scale_of(name, lo, hi))


def _valid_ends(problem: Problem, name: str, central: float, lo: float, hi: float) -> tuple[float, float]:
    """Pull ``lo`` and ``hi`` towards ``central`` (geometrically) until the problem is valid at each."""
    out = []
    for end in (lo, hi):
        v = end
        for _ in range(12):
            try:
                with_value(problem, name, v)
                break
            except DecideError:
                v = math.sqrt(v * central)
        else:
            v = central
        out.append(v)
    return out[0], out[1]


def checked_range(problem: Problem, name: str, low: float, high: float) -> InputRange:
    """A stated range, checked: both ends must give a valid problem and ``low < high``.

    Raises
    ------
    DecideError
        Naming ``vary`` and the input, with the reason.
    """
    check_name(problem, name)
    if not (math.isfinite(low) and math.isfinite(high)) or not low < high:
        raise DecideError(
            f"vary: {name}: the range must run from a lower to a higher value, but got {low:g}:{high:g}", ("vary",)
        )
    for end in (low, high):
        try:
            with_value(problem, name, end)
        except DecideError as exc:
            raise DecideError(f"vary: {name}={low:g}:{high:g} leaves the valid domain: {exc}", ("vary",)) from None
    return InputRange(name, float(low), float(high), value_of(problem, name), scale_of(name, low, high))
