"""The optional [uncertainty] table of a scenario file: distributions of inputs.

Each uncertain input is a sub-table named by the input's key path::

    [uncertainty.prior.p_harm]            # beta, by mean and sd (or a and b)
    mean = 0.15
    sd = 0.08
    [uncertainty.consequences.false_alarm]  # lognormal, by a central interval
    low = 1.0e7
    high = 1.6e8
    level = 0.9
    [uncertainty.study.baseline]           # lognormal
    low = 3.0e-4
    high = 6.0e-4
    level = 0.9

Costs (``missed_hazard``, or ``cost_per_case`` when the missed-hazard cost is
derived; ``false_alarm``; ``per_subject``) and the baseline are lognormal; the
prior probability of harm is beta.  An sd of 0 or ``low = high`` is a point
mass.  ``decide sweep --draws N`` draws from these; a one-way sweep takes its
ranges from them (each distribution's central 90 %).
"""

from __future__ import annotations

import math
from typing import Annotated, Any

from pydantic import BaseModel, ConfigDict, Field, model_validator
from pydantic_core import PydanticCustomError

from decide.decision.uncertainty import BetaInput, Distribution, LognormalInput

#: The central probability of a beta distribution that a one-way sweep spans.
BETA_SPAN = 0.9


def _config(title: str) -> ConfigDict:
    return ConfigDict(extra="forbid", frozen=True, strict=True, allow_inf_nan=False, title=title)


_NOTHING = object()


def _rule(key: str, reason: str, got: Any = _NOTHING) -> PydanticCustomError:
    from .models import rule_error  # models imports this module for its field

    return rule_error(key, reason) if got is _NOTHING else rule_error(key, reason, got)


class BetaModel(BaseModel):
    """A beta distribution for a probability: mean and sd, or shapes a and b."""

    model_config = _config("beta distribution")

    mean: Annotated[float | None, Field(gt=0, lt=1, description="Mean, strictly between 0 and 1.")] = None
    sd: Annotated[
        float | None,
        Field(ge=0, description="Standard deviation, below sqrt(mean (1 - mean)); 0 is a point mass."),
    ] = None
    a: Annotated[float | None, Field(gt=0, description="First shape parameter (instead of mean and sd).")] = None
    b: Annotated[float | None, Field(gt=0, description="Second shape parameter (instead of mean and sd).")] = None

    @model_validator(mode="after")
    def _one_form(self) -> BetaModel:
        moments, shapes = (self.mean, self.sd), (self.a, self.b)
        if any(v is not None for v in moments) and any(v is not None for v in shapes):
            raise _rule("a", "give mean and sd, or a and b, not both", self.a if self.a is not None else self.b)
        if all(v is None for v in moments + shapes):
            raise _rule("mean", "give mean and sd, or a and b")
        if any(v is not None for v in shapes):
            if self.a is None or self.b is None:
                raise _rule("b" if self.b is None else "a", "is required with the other shape parameter")
            return self
        if self.mean is None or self.sd is None:
            raise _rule("sd" if self.sd is None else "mean", "mean and sd go together")
        limit = math.sqrt(self.mean * (1 - self.mean))
        if self.sd >= limit:
            raise _rule("sd", f"must be below sqrt(mean (1 - mean)) = {limit:.4g} for a beta distribution", self.sd)
        return self

    def to_input(self, name: str) -> BetaInput:
        if self.a is not None and self.b is not None:
            return BetaInput.from_shapes(self.a, self.b, name)
        assert self.mean is not None and self.sd is not None
        return BetaInput.from_mean_sd(self.mean, self.sd, name)


class LognormalModel(BaseModel):
    """A lognormal distribution by a central interval."""

    model_config = _config("lognormal distribution")

    low: Annotated[float, Field(gt=0, description="Lower end of the central interval.")]
    high: Annotated[float, Field(gt=0, description="Upper end (at least low; equal ends are a point mass).")]
    level: Annotated[float, Field(gt=0, lt=1, description="Probability of the interval, e.g. 0.9.")]

    @model_validator(mode="after")
    def _ordered(self) -> LognormalModel:
        if self.high < self.low:
            raise _rule("high", f"must be at least low ({self.low:g})", self.high)
        return self

    def to_input(self, name: str) -> LognormalInput:
        return LognormalInput.from_interval(self.low, self.high, self.level, name)


class PriorUncertainty(BaseModel):
    model_config = _config("[uncertainty.prior]")
    p_harm: BetaModel | None = Field(default=None, description="Beta distribution of prior.p_harm.")


class ConsequencesUncertainty(BaseModel):
    model_config = _config("[uncertainty.consequences]")
    missed_hazard: LognormalModel | None = Field(default=None, description="Lognormal (a given missed-hazard cost).")
    cost_per_case: LognormalModel | None = Field(
        default=None, description="Lognormal (when the missed-hazard cost is derived from excess cases)."
    )
    false_alarm: LognormalModel | None = Field(default=None, description="Lognormal false-alarm cost.")
    per_subject: LognormalModel | None = Field(default=None, description="Lognormal per-subject cost.")


class StudyUncertainty(BaseModel):
    model_config = _config("[uncertainty.study]")
    baseline: LognormalModel | None = Field(default=None, description="Lognormal baseline.")


class UncertaintyModel(BaseModel):
    """The [uncertainty] table: distributions of inputs for probabilistic analysis."""

    model_config = _config("[uncertainty]")

    prior: PriorUncertainty = Field(default_factory=PriorUncertainty)
    consequences: ConsequencesUncertainty = Field(default_factory=ConsequencesUncertainty)
    study: StudyUncertainty = Field(default_factory=StudyUncertainty)

    def to_inputs(self) -> dict[str, Distribution]:
        """The distributions by input name (key path in the scenario)."""
        out: dict[str, Distribution] = {}
        for section in ("prior", "consequences", "study"):
            table = getattr(self, section)
            for key in type(table).model_fields:
                spec = getattr(table, key)
                if spec is not None:
                    name = f"{section}.{key}"
                    out[name] = spec.to_input(name)
        return out

    def check_against(self, derived_missed: bool) -> None:
        """Raise a rule error when a cost's distribution does not fit how the cost is given."""
        c = self.consequences
        if derived_missed and c.missed_hazard is not None:
            raise _rule(
                "uncertainty.consequences.missed_hazard",
                "the missed-hazard cost is derived from excess cases here; give the "
                "distribution of cost_per_case instead",
            )
        if not derived_missed and c.cost_per_case is not None:
            raise _rule(
                "uncertainty.consequences.cost_per_case",
                "applies only when the missed-hazard cost is derived; give the distribution of missed_hazard instead",
            )


def sweep_range(spec: Distribution) -> tuple[float, float]:
    """The range a one-way sweep takes from a distribution: its central interval."""
    if isinstance(spec, BetaInput):
        return spec.quantile((1 - BETA_SPAN) / 2), spec.quantile((1 + BETA_SPAN) / 2)
    return spec.quantile(0.05), spec.quantile(0.95)
