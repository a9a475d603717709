"""File formats: scenario and policy files in TOML, their JSON Schemas.

Every problem with a file raises :class:`ScenarioError` (a
:class:`~decide.errors.DecideError`) whose message is one line::

    <file>: <key.path>: <reason> (got <value>)
"""

from __future__ import annotations

from ._messages import PolicyFileError, ScenarioError
from .bundled import bundled_dir, example_names, example_path, example_text
from .files import (
    MAX_FILE_BYTES,
    LoadedScenario,
    check_output_path,
    load_scenario,
    parse_scenario,
    scenario_json_schema,
    scenario_template,
    write_text_atomic,
)
from .models import ScenarioModel
from .policy_files import (
    BUILTIN_ORDER,
    PolicyFileModel,
    builtin_policy_dir,
    load_policies,
    load_policy_file,
    policy_json_schema,
)

__all__ = [
    "BUILTIN_ORDER",
    "MAX_FILE_BYTES",
    "LoadedScenario",
    "PolicyFileError",
    "PolicyFileModel",
    "ScenarioError",
    "ScenarioModel",
    "builtin_policy_dir",
    "bundled_dir",
    "check_output_path",
    "example_names",
    "example_path",
    "example_text",
    "load_policies",
    "load_policy_file",
    "load_scenario",
    "parse_scenario",
    "policy_json_schema",
    "scenario_json_schema",
    "scenario_template",
    "write_text_atomic",
]
