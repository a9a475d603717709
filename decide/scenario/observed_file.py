"""The observed-data file: a finished study's counts, read with a scenario.

A data file is TOML with an ``[observed]`` table holding the counts of the
scenario's design::

    title = "..."                 # optional
    design = "cohort-risk"        # optional; checked against the scenario
    [observed]
    cases_exposed = 4
    n_exposed = 2150
    cases_unexposed = 1
    n_unexposed = 2150

The model checks the shape and the types; the decision core
(:func:`decide.decision.observed.reader_for`) owns every other rule: that the
keys fit the design, that counts are whole and not negative, sizes above 0,
and counts within their groups.  Every problem is one line,
``<file>: <key.path>: <reason> (got <value>)``.
"""

from __future__ import annotations

import os
from typing import Annotated, Any

from pydantic import BaseModel, ConfigDict, Field

from decide.decision.observed import Counts, reader_for
from decide.decision.problem import Problem
from decide.designs import get_design
from decide.errors import DecideError

from ._messages import ScenarioError, from_core_error
from .files import read_toml, toml_json_schema, validate_model

# Ranges are the core's to check (one owner for every rule); the descriptions say them.
Count = Annotated[int, Field(description="A count of subjects or cases (a whole number, 0 or more).")]
Size = Annotated[float, Field(description="A number of subjects or person-years, above 0.")]
Group = Annotated[int, Field(description="A number of subjects (a whole number, above 0).")]


def _config(title: str) -> ConfigDict:
    return ConfigDict(extra="forbid", frozen=True, strict=True, allow_inf_nan=False, title=title)


class ObservedModel(BaseModel):
    """The [observed] table: the counts of the scenario's design (only its keys)."""

    model_config = _config("[observed]")

    cases_exposed: Count | None = Field(None, description="Cases among the exposed (cohort-risk, cohort-rate).")
    n_exposed: Group | None = Field(None, description="Exposed subjects (cohort-risk).")
    cases_unexposed: Count | None = Field(None, description="Cases among the unexposed (cohort-risk, cohort-rate).")
    n_unexposed: Group | None = Field(None, description="Unexposed subjects (cohort-risk).")
    person_years_exposed: Size | None = Field(None, description="Person-years of the exposed (cohort-rate).")
    person_years_unexposed: Size | None = Field(None, description="Person-years of the unexposed (cohort-rate).")
    cases: Count | None = Field(None, description="Cases observed (reference-rate); cases enrolled (case-control).")
    expected: Size | None = Field(
        None, description="Cases expected at the reference rate (reference-rate; or give person_years)."
    )
    person_years: Size | None = Field(
        None, description="Person-years of the exposed cohort, at the scenario's reference rate (reference-rate)."
    )
    exposed_cases: Count | None = Field(None, description="Exposed among the cases (case-control).")
    controls: Group | None = Field(None, description="Controls enrolled (case-control).")
    exposed_controls: Count | None = Field(None, description="Exposed among the controls (case-control).")
    both_exposed: Count | None = Field(
        None, description="Matched pairs with the case and the control exposed (matched-case-control, 1:1)."
    )
    case_only_exposed: Count | None = Field(
        None, description="Matched pairs with only the case exposed (matched-case-control, 1:1)."
    )
    control_only_exposed: Count | None = Field(
        None, description="Matched pairs with only the control exposed (matched-case-control, 1:1)."
    )
    neither_exposed: Count | None = Field(
        None, description="Matched pairs with neither the case nor the control exposed (matched-case-control, 1:1)."
    )

    def given(self) -> dict[str, float]:
        """The keys written in the file, with their values."""
        return {k: v for k, v in self.model_dump().items() if v is not None}


class ObservedFileModel(BaseModel):
    """A file of observed data for one scenario."""

    model_config = _config("decide observed data")

    title: str = Field("", description="What the data are (say if they are invented).")
    description: str = Field("", description="Longer notes on the data.")
    design: str | None = Field(None, description="The design the counts belong to; checked against the scenario.")
    observed: ObservedModel


def counts_from_data(data: dict[str, object], file: str, problem: Problem) -> Counts:
    """Validate parsed TOML of a data file against the scenario's design."""
    model: ObservedFileModel = validate_model(file, data, ObservedFileModel, ScenarioError)
    design = get_design(problem.study.design).name
    if model.design is not None and model.design != design:
        err = ScenarioError(file, "design", f"the scenario's design is {design} (got {model.design!r})")
        err.params = (file,)  # a key of this file, not the command-line option of the same name
        raise err
    reader = reader_for(problem.study.design, problem.study.allocation)  # the scenario's to refuse, not the file's
    try:
        return reader.read(model.observed.given(), float(problem.study.baseline))
    except DecideError as e:
        raise from_core_error(file, e) from None


def load_observed(path: str | os.PathLike[str], problem: Problem) -> Counts:
    """Read and validate a data file for a scenario.

    Raises
    ------
    ScenarioError
        With the one-line message ``<file>: <key.path>: <reason> (got <value>)``.
    """
    return counts_from_data(read_toml(path), os.fspath(path), problem)


def observed_json_schema() -> dict[str, Any]:
    """The JSON Schema of an observed-data file."""
    return toml_json_schema(ObservedFileModel)
