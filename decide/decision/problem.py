"""A decision problem: the study, the prior, the consequences and the limits.

These are the pure inputs of the decision engine.  Scenario files
(:mod:`decide.scenario`) are parsed into them; nothing here reads files.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .. import _checks
from ..designs import StudyDesign
from ..designs._base import FloatArray
from ..engine.study import Setting, check_setting
from ..errors import DecideError
from .prior import EffectPrior


@dataclass(frozen=True)
class Study:
    """The study design and how it is analysed.

    ``allocation`` and ``years`` apply to the designs that have them; any
    other value than 1 for a design without them is refused (as in
    :func:`decide.power`), and every value is checked when the study is made.
    """

    design: str | StudyDesign
    baseline: float
    allocation: float = 1.0
    years: float = 1.0
    sides: int = 1
    test: str = "auto"
    continuity: bool = False

    def __post_init__(self) -> None:
        for name in ("baseline", "allocation", "years"):
            _checks.scalar(name, getattr(self, name))
        self.setting()

    def setting(self) -> Setting:
        """The validated setting of the power engine."""
        return check_setting(
            self.design, self.baseline, self.allocation, self.years, self.sides, self.test, self.continuity
        )


_DERIVATION = ("exposed_population", "background_rate", "cost_per_case", "horizon_years")


def _derivation_limit(name: str, value: float) -> None:
    key = f"consequences.{name}"
    v = _checks.positive(key, value)
    if name == "exposed_population":
        _checks.at_most(key, v, _checks.LARGEST_POPULATION, "the largest population decide works with")
    elif name == "background_rate":
        _checks.within(key, v, *_checks.BASELINE_RATE_RANGE)
    elif name == "horizon_years":
        _checks.at_most(key, v, _checks.LONGEST_HORIZON, "the longest horizon decide works with")
    else:
        _checks.cost(key, v)


@dataclass(frozen=True)
class Consequences:
    """What each outcome costs, in one currency or unit of the user's choice.

    The missed-hazard cost is either given (``missed_hazard``) or derived
    from the excess cases a missed hazard lets happen:
    ``exposed_population * background_rate * (effect - 1) * cost_per_case *
    horizon_years``, which then varies with the effect.  Costs are finite,
    not below 0 and at most :data:`decide._checks.LARGEST_COST`; a problem in
    which neither error costs anything has nothing to decide and is refused.
    """

    false_alarm: float
    per_subject: float
    fixed: float = 0.0
    missed_hazard: float | None = None
    exposed_population: float | None = None
    background_rate: float | None = None
    cost_per_case: float | None = None
    horizon_years: float | None = None

    def __post_init__(self) -> None:
        self._check_form()
        for name in ("false_alarm", "per_subject", "fixed"):
            _checks.cost(f"consequences.{name}", _checks.scalar(f"consequences.{name}", getattr(self, name)))
        if self.missed_hazard is not None:
            _checks.cost("consequences.missed_hazard", _checks.scalar("consequences.missed_hazard", self.missed_hazard))
            if self.missed_hazard == 0 and self.false_alarm == 0:
                raise DecideError(
                    "consequences: missed_hazard and false_alarm are both 0: no error costs anything, "
                    "so there is nothing to decide",
                    ("consequences",),
                )
        else:
            for name in _DERIVATION:
                _derivation_limit(name, _checks.scalar(f"consequences.{name}", getattr(self, name)))

    def _check_form(self) -> None:
        """The missed-hazard cost given, or all four parts of its derivation, not both."""
        given = [k for k in _DERIVATION if getattr(self, k) is not None]
        if self.missed_hazard is not None and given:
            k = given[0]
            raise DecideError(
                f"consequences.{k}: give missed_hazard, or derive it from exposed_population, "
                "background_rate, cost_per_case and horizon_years, not both, "
                f"but got {_checks.show(getattr(self, k))}",
                (f"consequences.{k}",),
            )
        if self.missed_hazard is None and not given:
            raise DecideError(
                "consequences.missed_hazard: is required, unless exposed_population, background_rate, "
                "cost_per_case and horizon_years are all given to derive it",
                ("consequences.missed_hazard",),
            )
        missing = [k for k in _DERIVATION if getattr(self, k) is None]
        if self.missed_hazard is None and missing:
            raise DecideError(
                f"consequences.{missing[0]}: is required with consequences.{given[0]}: deriving "
                "missed_hazard needs exposed_population, background_rate, cost_per_case and horizon_years",
                (f"consequences.{missing[0]}",),
            )

    @property
    def is_derived(self) -> bool:
        return self.missed_hazard is None

    def missed_cost(self, effect: FloatArray) -> FloatArray:
        """Cost of missing a hazard of the given effect (zero if the effect is not above 1)."""
        if self.missed_hazard is not None:
            return np.full_like(np.asarray(effect, dtype=np.float64), self.missed_hazard)
        assert self.exposed_population is not None and self.background_rate is not None
        assert self.cost_per_case is not None and self.horizon_years is not None
        excess = self.exposed_population * self.background_rate * np.maximum(effect - 1.0, 0.0)
        return np.asarray(excess * self.cost_per_case * self.horizon_years, dtype=np.float64)


@dataclass(frozen=True)
class Constraints:
    """Limits every policy must respect (all optional)."""

    max_n_per_group: int | None = None
    min_n_per_group: int = 1
    max_alpha: float = 1.0
    min_power: float = 0.0
    budget: float | None = None

    def __post_init__(self) -> None:
        if self.max_n_per_group is not None:
            _checks.whole_at_least_one("constraints.max_n_per_group", self.max_n_per_group)
        _checks.whole_at_least_one("constraints.min_n_per_group", self.min_n_per_group)
        if self.max_n_per_group is not None and self.max_n_per_group < self.min_n_per_group:
            raise DecideError(
                "constraints.max_n_per_group must not be below constraints.min_n_per_group "
                f"({self.min_n_per_group}), but got {self.max_n_per_group}",
                ("constraints.max_n_per_group",),
            )
        if _checks.scalar("constraints.max_alpha", self.max_alpha) != 1.0:
            _checks.probability("constraints.max_alpha", self.max_alpha)
        if _checks.scalar("constraints.min_power", self.min_power) != 0.0:
            _checks.probability("constraints.min_power", self.min_power)
        if self.budget is not None:
            _checks.positive("constraints.budget", _checks.scalar("constraints.budget", self.budget))


@dataclass(frozen=True)
class Problem:
    """Everything the decision engine needs about one scenario.

    Attributes
    ----------
    title : str
    study : Study

    Notes
    -----
    The prior is checked up to its 1 - 1e-6 quantile against the design's
    effect limit (an exposed risk below 1); quadrature nodes beyond the limit,
    which carry less than 1e-6 of the mass, are clipped just below it.
    effect : EffectPrior
        The effect if the exposure is harmful.
    p_harm : float
        Prior probability that the exposure is harmful, in (0, 1).
    consequences : Consequences
    constraints : Constraints
    """

    study: Study
    effect: EffectPrior
    p_harm: float
    consequences: Consequences
    constraints: Constraints = field(default_factory=Constraints)
    title: str = ""

    def __post_init__(self) -> None:
        for name, kind in (
            ("study", Study),
            ("effect", EffectPrior),
            ("consequences", Consequences),
            ("constraints", Constraints),
        ):
            if not isinstance(getattr(self, name), kind):
                raise DecideError(
                    f"{name} must be a {kind.__name__}, but got {_checks.show(getattr(self, name))}", (name,)
                )
        if not isinstance(self.title, str):
            raise DecideError(f"title must be text, but got {_checks.show(self.title)}", ("title",))
        _checks.probability("prior.p_harm", _checks.scalar("prior.p_harm", self.p_harm))
        setting = self.study.setting()
        limit = float(setting.design.effect_limit(setting.baseline))
        top = self.effect.median if self.effect.is_point else self.effect.quantile(1 - 1e-6)
        if top >= limit:
            raise DecideError(
                f"effect: the effect must stay below {limit:g} for baseline {self.study.baseline:g} "
                f"({setting.design.effect_limit_reason}), but the effect reaches {top:g}",
                ("effect",),
            )
        largest = _checks.EFFECT_RANGE[1]
        if top > largest:
            raise DecideError(
                f"effect: the effect must stay below {largest:g}, the largest effect decide considers, "
                f"but the prior reaches {top:.3g} at its 1 - 1e-6 quantile; narrow the prior",
                ("effect",),
            )
        cons, cost = self.constraints, self.consequences
        if cons.budget is not None:
            smallest = float(cons.min_n_per_group)
            n_total = smallest + float(setting.design.comparison_size(np.asarray(smallest), setting.allocation))
            need = cost.fixed + cost.per_subject * n_total
            if need > cons.budget:
                raise DecideError(
                    "constraints.budget must at least cover the fixed cost plus the smallest allowed study "
                    f"({cost.fixed:g} + {n_total:.0f} subjects x {cost.per_subject:g} = {need:g}), "
                    f"but got {_checks.show(cons.budget)}",
                    ("constraints.budget",),
                )
        if self.effect.median <= 1:
            raise DecideError(
                f"effect: the effect under harm must be above 1, but its median is {self.effect.median:g}",
                ("effect",),
            )

    def describe(self) -> list[tuple[str, str]]:
        """The inputs in words, for showing a scenario back to its readers."""
        setting = self.study.setting()
        d = setting.design
        e = self.effect
        effect = e.describe()
        c = self.consequences
        if c.missed_hazard is not None:
            missed = f"{c.missed_hazard:g}"
        else:
            missed = (
                f"{c.exposed_population:g} exposed x {c.background_rate:g} cases per person-year x "
                f"(effect - 1) x {c.cost_per_case:g} per case x {c.horizon_years:g} years"
            )
        rows = [
            ("design", d.title),
            (d.baseline_name, f"{self.study.baseline:g}"),
            (f"{d.effect_name} if harmful", effect),
            ("prior probability of harm", f"{self.p_harm:g}"),
            ("cost of a missed hazard", missed),
            ("cost of a false alarm", f"{c.false_alarm:g}"),
            ("study cost", f"{c.per_subject:g} per subject + {c.fixed:g} fixed"),
        ]
        if d.groups == 2:
            rows.insert(2, (str(d.allocation_name), f"{self.study.allocation:g}"))
        rows[1:1] = [(f"design setting: {key}", f"{value:g}") for key, value in d.setting_values().items()]
        if d.uses_years:
            rows.insert(2, ("follow-up years per subject", f"{self.study.years:g}"))
        k = self.constraints
        limits = []
        if k.max_n_per_group is not None:
            limits.append(f"at most {k.max_n_per_group:,} {d.size_name}")
        if k.min_n_per_group > 1:
            limits.append(f"at least {k.min_n_per_group:,} {d.size_name}")
        if k.budget is not None:
            limits.append(f"budget {k.budget:g}")
        if k.max_alpha < 1:
            limits.append(f"alpha at most {k.max_alpha:g}")
        if k.min_power > 0:
            limits.append(f"power at least {k.min_power:g}")
        rows.append(("constraints", "; ".join(limits) or "none"))
        return rows


def check_problem(problem: object) -> None:
    """Refuse anything but a :class:`Problem` where one is needed."""
    if not isinstance(problem, Problem):
        raise DecideError(f"problem must be a Problem, but got {_checks.show(problem)}", ("problem",))
