"""Pydantic models of the scenario file.

A scenario file is TOML with one table per part of the decision problem::

    title = "..."
    description = "..."   # optional
    [study]               # the design and how it is analysed
    [effect]              # what "harmful" means: a ratio or a lognormal prior
    [prior]               # how likely harm is before the study
    [consequences]        # what each outcome costs
    [constraints]         # limits every policy must respect (optional)

The models check the shape of the file and the type of every value, nothing
more: which keys may appear, numbers where numbers belong, whole numbers for
sizes, the two ways of giving the effect.  Every rule about the values
(ranges, domain limits, which settings a design takes, costs and budget
together) belongs to the core: :meth:`ScenarioModel.to_problem` builds the
core :class:`~decide.decision.problem.Problem`, whose constructors check
them, and :mod:`decide.scenario._messages` turns the core's error into the
file's key path.  So a file and the Python API refuse the same input for the
same reason.

Field descriptions are user documentation: they appear in the JSON Schema
(:func:`decide.scenario.scenario_json_schema`).

A shape broken across keys (ratio and an interval both given) is raised as a
:class:`PydanticCustomError` of type ``decide_rule`` whose context names the
key (relative to the table that raised it), the reason and the value
received; :mod:`decide.scenario._messages` turns it into the one-line message.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator
from pydantic_core import PydanticCustomError

from decide.decision.prior import EffectPrior
from decide.decision.problem import Consequences, Constraints, Problem, Study
from decide.designs import DESIGNS, get_design

from .sources import flatten_sources, input_key_paths, unknown_source_key
from .uncertainty import UncertaintyModel

if TYPE_CHECKING:
    DesignName = str
else:  # the designs' names, read from the registry
    DesignName = Literal[tuple(DESIGNS)]
TestName = Literal["normal", "exact", "auto"]


def _designs_where(test: Any) -> str:
    return ", ".join(name for name, d in DESIGNS.items() if test(d))


#: Marks "no value to show" in a rule error.
NO_VALUE = "\x00no value"
RULE_ERROR = "decide_rule"


def rule_error(key: str, reason: str, got: Any = NO_VALUE) -> PydanticCustomError:
    """A broken rule about ``key`` (dotted, relative to the raising table)."""
    return PydanticCustomError(RULE_ERROR, "{reason}", {"key": key, "reason": reason, "got": got})


def _config(title: str) -> ConfigDict:
    return ConfigDict(extra="forbid", frozen=True, strict=True, allow_inf_nan=True, title=title)


class StudyModel(BaseModel):
    """The [study] table: the design and how it is analysed."""

    model_config = _config("[study]")

    design: DesignName = Field(
        description="The study design. " + " ".join(f"{name}: {d.title}." for name, d in DESIGNS.items())
    )
    baseline: Annotated[
        float,
        Field(
            description="The baseline, by design. "
            + " ".join(f"{name}: {d.baseline_name}." for name, d in DESIGNS.items()),
        ),
    ]
    allocation: Annotated[
        float | None,
        Field(
            description="By design (default 1): "
            + " ".join(f"{name}: {d.allocation_name}." for name, d in DESIGNS.items() if d.groups == 2)
            + " Not for one-group designs ("
            + _designs_where(lambda x: x.groups == 1)
            + ").",
        ),
    ] = None
    design_settings: Annotated[
        dict[str, float] | None,
        Field(
            description="Settings of the design itself (default none). "
            + " ".join(f"{name}: {key}, {text}." for name, d in DESIGNS.items() for key, text in d.settings.items()),
        ),
    ] = None
    years: Annotated[
        float | None,
        Field(
            description=(
                "Follow-up years per subject (person-time designs cohort-rate and reference-rate only). Default 1."
            ),
        ),
    ] = None
    sides: int = Field(
        default=1,
        description="1: test for harm only (one-sided); 2: test for any difference (two-sided).",
    )
    test: TestName = Field(
        default="auto",
        description=(
            "The analysis: normal (normal approximation), exact (the design's exact test) or "
            "auto (exact when the smallest expected cell count is below 10)."
        ),
    )
    continuity: bool | None = Field(
        default=None,
        description=(
            "Continuity correction of the normal approximation (two-proportion designs "
            "cohort-risk and case-control only). Default false."
        ),
    )

    def to_study(self) -> Study:
        return Study(
            design=get_design(self.design).configure(self.design_settings) if self.design_settings else self.design,
            baseline=self.baseline,
            allocation=1.0 if self.allocation is None else self.allocation,
            years=1.0 if self.years is None else self.years,
            sides=self.sides,
            test=self.test,
            continuity=bool(self.continuity),
        )


class EffectModel(BaseModel):
    """The [effect] table: the effect if the exposure is harmful."""

    model_config = _config("[effect]")

    ratio: Annotated[
        float | None,
        Field(
            description=(
                "The effect if harmful, as the design's ratio (risk ratio, rate ratio, "
                "standardised incidence ratio or odds ratio). Give this, or low, high and "
                "level for a lognormal prior, not both."
            ),
        ),
    ] = None
    low: Annotated[
        float | None,
        Field(description="Lower end of a central interval of a lognormal prior on the effect."),
    ] = None
    high: Annotated[
        float | None,
        Field(description="Upper end of that interval (above low)."),
    ] = None
    level: Annotated[
        float | None,
        Field(
            description="Prior probability that the effect lies between low and high, e.g. 0.9.",
        ),
    ] = None
    median: Annotated[
        float | None,
        Field(
            description=(
                "Median of the lognormal prior, between low and high (optional; default the "
                "geometric mean of low and high). Power targets refer to it."
            ),
        ),
    ] = None

    @model_validator(mode="after")
    def _one_form(self) -> EffectModel:
        interval = {"low": self.low, "high": self.high, "level": self.level}
        given = [k for k, v in interval.items() if v is not None]
        if self.ratio is not None:
            if given or self.median is not None:
                extra = (given or ["median"])[0]
                raise rule_error(
                    extra,
                    "give either ratio (a single effect) or low, high and level (a lognormal prior), not both",
                    getattr(self, extra),
                )
            return self
        if not given:
            raise rule_error(
                "",
                "give ratio (a single effect), or low, high and level (a lognormal prior)",
            )
        missing = [k for k, v in interval.items() if v is None]
        if missing:
            raise rule_error(
                missing[0],
                f"is required with effect.{given[0]}: a lognormal prior needs low, high and level",
            )
        return self

    def to_prior(self) -> EffectPrior:
        if self.ratio is not None:
            return EffectPrior.point(self.ratio)
        assert self.low is not None and self.high is not None and self.level is not None
        return EffectPrior.from_interval(self.low, self.high, self.level, self.median)


class PriorModel(BaseModel):
    """The [prior] table: how likely harm is before the study."""

    model_config = _config("[prior]")

    p_harm: Annotated[
        float,
        Field(
            description=(
                "Prior probability that the exposure is harmful (has the effect in [effect]), "
                "strictly between 0 and 1. A value judgment of the responsible body."
            ),
        ),
    ]


class ConsequencesModel(BaseModel):
    """The [consequences] table: what each outcome costs, in one unit."""

    model_config = _config("[consequences]")

    missed_hazard: Annotated[
        float | None,
        Field(
            description=(
                "Cost of missing a real hazard (no finding when the exposure is harmful). Give "
                "it, or derive it from exposed_population, background_rate, cost_per_case and "
                "horizon_years, not both."
            ),
        ),
    ] = None
    exposed_population: Annotated[
        float | None,
        Field(
            description=("People who stay exposed if a hazard is missed (to derive missed_hazard)."),
        ),
    ] = None
    background_rate: Annotated[
        float | None,
        Field(
            description=(
                "Cases per person-year among the unexposed (to derive missed_hazard); excess "
                "cases are exposed_population * background_rate * (effect - 1) per year."
            ),
        ),
    ] = None
    cost_per_case: Annotated[
        float | None,
        Field(description="Cost of one excess case (to derive missed_hazard)."),
    ] = None
    horizon_years: Annotated[
        float | None,
        Field(
            description=("Years the exposure goes on if a hazard is missed (to derive missed_hazard)."),
        ),
    ] = None
    false_alarm: Annotated[
        float,
        Field(
            description=(
                "Cost of a false alarm: flagging a harmless exposure (needless restrictions, substitution, lost trust)."
            ),
        ),
    ]
    per_subject: Annotated[
        float,
        Field(
            description=(
                "Cost of enrolling one subject, in every group alike (exposed and unexposed, cases and controls)."
            ),
        ),
    ]
    fixed: Annotated[
        float,
        Field(description="Fixed cost of running the study at all. Default 0."),
    ] = 0.0
    currency: Annotated[
        str,
        Field(
            description=("Label of the unit all costs are in (e.g. EUR, or QALY); a label only, nothing is converted."),
        ),
    ] = ""

    def to_consequences(self) -> Consequences:
        return Consequences(
            false_alarm=self.false_alarm,
            per_subject=self.per_subject,
            fixed=self.fixed,
            missed_hazard=self.missed_hazard,
            exposed_population=self.exposed_population,
            background_rate=self.background_rate,
            cost_per_case=self.cost_per_case,
            horizon_years=self.horizon_years,
        )


class ConstraintsModel(BaseModel):
    """The [constraints] table: limits every policy must respect."""

    model_config = _config("[constraints]")

    max_n_per_group: Annotated[
        int | None,
        Field(
            description=(
                "Most exposed subjects (or cases) that can be enrolled; the comparison group "
                "follows from the allocation. Default: no cap."
            ),
        ),
    ] = None
    min_n_per_group: Annotated[
        int,
        Field(description="Fewest exposed subjects (or cases) worth enrolling. Default 1."),
    ] = 1
    max_alpha: Annotated[
        float,
        Field(
            description="Largest false-alarm probability any policy may accept. Default 1 (none).",
        ),
    ] = 1.0
    min_power: Annotated[
        float,
        Field(
            description=("Smallest power at the design effect any policy must reach. Default 0 (none)."),
        ),
    ] = 0.0
    budget: Annotated[
        float | None,
        Field(
            description=(
                "Most that may be spent on the study (fixed plus per-subject costs), in the "
                "unit of [consequences]. Default: no budget limit."
            ),
        ),
    ] = None

    def to_constraints(self) -> Constraints:
        return Constraints(
            max_n_per_group=self.max_n_per_group,
            min_n_per_group=self.min_n_per_group,
            max_alpha=self.max_alpha,
            min_power=self.min_power,
            budget=self.budget,
        )


class ScenarioModel(BaseModel):
    """A scenario file: one decision problem about one exposure."""

    model_config = _config("decide scenario")

    title: Annotated[str, Field(min_length=1, description="A short name for the scenario, shown in reports.")]
    description: Annotated[str, Field(description="Free text: the setting, the sources of the numbers, caveats.")] = ""
    study: StudyModel = Field(description="The study design and how it is analysed.")
    effect: EffectModel = Field(description='What "harmful" means: the effect if harmful.')
    prior: PriorModel = Field(description="How likely harm is before the study.")
    consequences: ConsequencesModel = Field(
        description="What each outcome costs, all in one currency or unit of the user's choice."
    )
    constraints: ConstraintsModel = Field(
        default_factory=ConstraintsModel,
        description="Limits every policy must respect (all optional).",
    )
    uncertainty: UncertaintyModel | None = Field(
        default=None,
        description="Distributions of uncertain inputs, for 'decide sweep --draws' (optional).",
    )

    sources: dict[str, Annotated[str, Field(max_length=500)]] = Field(
        default_factory=dict,
        description='Where each input came from: key path to a source, e.g. "prior.p_harm" = "expert panel, 2026" '
        "(optional; shown in reports, inputs without one are marked 'no source given').",
    )

    @field_validator("sources", mode="before")
    @classmethod
    def _flat_sources(cls, value: Any) -> Any:
        return flatten_sources(value) if isinstance(value, dict) else value

    @model_validator(mode="after")
    def _sources_name_inputs(self) -> ScenarioModel:
        tables: dict[str, type[BaseModel]] = {
            "study": StudyModel,
            "effect": EffectModel,
            "prior": PriorModel,
            "consequences": ConsequencesModel,
            "constraints": ConstraintsModel,
        }
        settings = tuple(f"study.design_settings.{k}" for k in get_design(self.study.design).settings)
        bad = unknown_source_key(self.sources, input_key_paths(tables) + settings)
        if bad is not None:
            raise rule_error(f"sources.{bad}", "names no input of a scenario file (e.g. prior.p_harm)")
        return self

    @model_validator(mode="after")
    def _uncertainty_fits(self) -> ScenarioModel:
        if self.uncertainty is not None:
            self.uncertainty.check_against(self.consequences.missed_hazard is None)
        return self

    def to_problem(self) -> Problem:
        """The core decision problem (its constructors may raise DecideError)."""
        return Problem(
            study=self.study.to_study(),
            effect=self.effect.to_prior(),
            p_harm=self.prior.p_harm,
            consequences=self.consequences.to_consequences(),
            constraints=self.constraints.to_constraints(),
            title=self.title,
        )
