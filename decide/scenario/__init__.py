"""File formats: scenario and policy files in TOML, their JSON Schemas.

Every problem with a file raises :class:`ScenarioError` (a
:class:`~decide.errors.DecideError`) whose message is one line::

    <file>: <key.path>: <reason> (got <value>)
"""

from __future__ import annotations

from ._messages import PolicyFileError, ScenarioError
from .files import (
    LoadedScenario,
    load_scenario,
    parse_scenario,
    scenario_json_schema,
    scenario_template,
    write_text_atomic,
)
from .models import ScenarioModel

__all__ = [
    "LoadedScenario",
    "PolicyFileError",
    "ScenarioError",
    "ScenarioModel",
    "load_scenario",
    "parse_scenario",
    "scenario_json_schema",
    "scenario_template",
    "write_text_atomic",
]
