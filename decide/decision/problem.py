"""A decision problem: the study, the prior, the consequences and the limits.

These are the pure inputs of the decision engine.  Scenario files
(:mod:`decide.scenario`) are parsed into them; nothing here reads files.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .._checks import non_negative, open_unit, positive
from ..designs import get_design
from ..designs._base import FloatArray
from ..engine.study import Setting, check_setting
from ..errors import DecideError
from .prior import EffectPrior


@dataclass(frozen=True)
class Study:
    """The study design and how it is analysed."""

    design: str
    baseline: float
    allocation: float = 1.0
    years: float = 1.0
    sides: int = 1
    test: str = "auto"
    continuity: bool = False

    def setting(self) -> Setting:
        d = get_design(self.design)
        return check_setting(
            d,
            self.baseline,
            None if d.allocation_name is None else self.allocation,
            self.years if d.uses_years else None,
            self.sides,
            self.test,
            self.continuity,
        )


@dataclass(frozen=True)
class Consequences:
    """What each outcome costs, in one currency or unit of the user's choice.

    The missed-hazard cost is either given (``missed_hazard``) or derived
    from the excess cases a missed hazard lets happen:
    ``exposed_population * background_rate * (effect - 1) * cost_per_case *
    horizon_years``, which then varies with the effect.
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
        non_negative("consequences.false_alarm", self.false_alarm)
        non_negative("consequences.per_subject", self.per_subject)
        non_negative("consequences.fixed", self.fixed)
        derived = (self.exposed_population, self.background_rate, self.cost_per_case, self.horizon_years)
        if self.missed_hazard is not None:
            non_negative("consequences.missed_hazard", self.missed_hazard)
            if any(v is not None for v in derived):
                raise DecideError(
                    "consequences.missed_hazard: give it, or derive it from exposed_population, "
                    "background_rate, cost_per_case and horizon_years, not both",
                    ("consequences.missed_hazard",),
                )
        elif any(v is None for v in derived):
            raise DecideError(
                "consequences.missed_hazard: give it, or all of exposed_population, "
                "background_rate, cost_per_case and horizon_years to derive it",
                ("consequences.missed_hazard",),
            )
        else:
            for name, v in zip(
                ("exposed_population", "background_rate", "cost_per_case", "horizon_years"),
                derived,
                strict=True,
            ):
                positive(f"consequences.{name}", float(v))  # type: ignore[arg-type]

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
            positive("constraints.max_n_per_group", self.max_n_per_group)
        positive("constraints.min_n_per_group", self.min_n_per_group)
        if self.max_n_per_group is not None and self.max_n_per_group < self.min_n_per_group:
            raise DecideError(
                "constraints.max_n_per_group must not be below constraints.min_n_per_group, "
                f"but got {self.max_n_per_group} and {self.min_n_per_group}",
                ("constraints.max_n_per_group",),
            )
        if self.max_alpha != 1.0:
            open_unit("constraints.max_alpha", self.max_alpha)
        if self.min_power != 0.0:
            open_unit("constraints.min_power", self.min_power)
        if self.budget is not None:
            positive("constraints.budget", self.budget)


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
        open_unit("prior.p_harm", self.p_harm)
        setting = self.study.setting()
        limit = float(setting.design.effect_limit(setting.baseline))
        top = self.effect.median if self.effect.is_point else self.effect.quantile(1 - 1e-6)
        if top >= limit:
            raise DecideError(
                f"effect: the effect must stay below {limit:g} for baseline {self.study.baseline:g} "
                f"(the exposed risk must stay below 1), but the effect reaches {top:g}",
                ("effect",),
            )
        cons, cost = self.constraints, self.consequences
        if cons.budget is not None:
            smallest = float(cons.min_n_per_group)
            n_total = smallest + float(setting.design.comparison_size(np.asarray(smallest), setting.allocation))
            need = cost.fixed + cost.per_subject * n_total
            if need > cons.budget:
                raise DecideError(
                    f"constraints.budget must cover the fixed cost and the smallest study ({need:g}), "
                    f"but got {cons.budget:g}",
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
            missed = (f"{c.exposed_population:g} exposed x {c.background_rate:g} cases per person-year x "
                      f"(effect - 1) x {c.cost_per_case:g} per case x {c.horizon_years:g} years")
        rows = [
            ("design", d.title),
            (d.baseline_name, f"{self.study.baseline:g}"),
            (f"{d.effect_name} if harmful", effect),
            ("prior probability of harm", f"{self.p_harm:g}"),
            ("cost of a missed hazard", missed),
            ("cost of a false alarm", f"{c.false_alarm:g}"),
            ("study cost", f"{c.per_subject:g} per subject + {c.fixed:g} fixed"),
        ]
        if d.allocation_name is not None:
            rows.insert(2, (d.allocation_name, f"{self.study.allocation:g}"))
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

