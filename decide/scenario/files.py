"""Reading and writing scenario files.

:func:`load_scenario` reads a TOML scenario file into a
:class:`LoadedScenario` holding the core :class:`~decide.problem.Problem`.
Whatever is wrong with the file (it is missing, it is not TOML, a key is
unknown, a value has the wrong type or range, the constraints leave no study
possible) raises :class:`ScenarioError` with a one-line message::

    scenario.toml: consequences.false_alarm: must be a finite number not below 0 (got -3)

:func:`scenario_template` gives a commented template that loads as it is;
:func:`scenario_json_schema` the JSON Schema of the format.
"""

from __future__ import annotations

import os
import secrets
import tomllib
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ValidationError
from pydantic.json_schema import GenerateJsonSchema, JsonSchemaValue
from pydantic_core import core_schema

from decide.decision.problem import Problem
from decide.designs import DESIGNS
from decide.errors import DecideError

from ._messages import (
    ScenarioError,
    from_core_error,
    from_toml_error,
    from_validation_error,
)
from .models import ScenarioModel

#: The JSON Schema dialect :func:`scenario_json_schema` writes.
JSON_SCHEMA_DIALECT = "https://json-schema.org/draft/2020-12/schema"


@dataclass(frozen=True)
class LoadedScenario:
    """A scenario read from a file.

    Attributes
    ----------
    problem : Problem
        The decision problem, validated.
    title, description, currency : str
        Text from the file (``currency`` is a label only, possibly empty).
    path : Path
        The file it came from.
    model : ScenarioModel
        The file's contents as validated, for showing the inputs back.
    """

    problem: Problem
    title: str
    description: str
    currency: str
    path: Path
    model: ScenarioModel


def read_toml(
    path: str | os.PathLike[str], cls: type[ScenarioError] = ScenarioError
) -> dict[str, Any]:
    """Parse a TOML file, raising ``cls`` with a one-line message on failure."""
    file = os.fspath(path)
    try:
        data = Path(file).read_bytes()
    except FileNotFoundError:
        raise cls(file, "", "no such file") from None
    except IsADirectoryError:
        raise cls(file, "", "is a folder, not a file") from None
    except OSError as e:
        raise cls(file, "", f"cannot be read: {e.strerror or e}") from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as e:
        raise cls(file, "", f"is not UTF-8 text (bad byte at offset {e.start})") from None
    return parse_toml(text, file, cls)


def parse_toml(text: str, file: str, cls: type[ScenarioError] = ScenarioError) -> dict[str, Any]:
    """Parse TOML text; whatever is wrong with it becomes one line naming ``file``."""
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        raise from_toml_error(file, e, cls) from None
    except RecursionError:
        raise cls(file, "", "not valid TOML here: arrays or tables are nested too deeply to read") from None
    except ValueError as e:  # Python's own limit on the digits of a whole number
        raise cls(file, "", f"not valid TOML here: {str(e).split(';')[0]}") from None


def validate_model(
    file: str, data: dict[str, Any], model: type[BaseModel], cls: type[ScenarioError]
) -> Any:
    """``model.model_validate(data)``, its errors as one line."""
    try:
        return model.model_validate(data)
    except ValidationError as e:
        raise from_validation_error(file, e, model, cls) from None


def scenario_from_data(data: dict[str, Any], file: str) -> LoadedScenario:
    """Validate parsed TOML (``file`` names it in messages)."""
    model: ScenarioModel = validate_model(file, data, ScenarioModel, ScenarioError)
    try:
        problem = model.to_problem()
    except DecideError as e:
        raise from_core_error(file, e) from None
    return LoadedScenario(
        problem=problem,
        title=model.title,
        description=model.description,
        currency=model.consequences.currency,
        path=Path(file),
        model=model,
    )


def load_scenario(path: str | os.PathLike[str]) -> LoadedScenario:
    """Read and validate a scenario file.

    Raises
    ------
    ScenarioError
        With the one-line message ``<file>: <key.path>: <reason> (got <value>)``.
    """
    return scenario_from_data(read_toml(path), os.fspath(path))


def parse_scenario(text: str, file: str = "<scenario>") -> LoadedScenario:
    """Validate a scenario given as TOML text (``file`` names it in messages)."""
    return scenario_from_data(parse_toml(text, file), file)


class _TomlJsonSchema(GenerateJsonSchema):
    """JSON Schema of what may be written in TOML: no nulls, no ``null`` defaults.

    An optional key is absent or a value; TOML has no null to write.
    """

    def nullable_schema(self, schema: core_schema.NullableSchema) -> JsonSchemaValue:
        return self.generate_inner(schema["schema"])

    def default_schema(self, schema: core_schema.WithDefaultSchema) -> JsonSchemaValue:
        if schema.get("default", 0) is None:
            return self.generate_inner(schema["schema"])
        return super().default_schema(schema)


def toml_json_schema(model: type[BaseModel]) -> dict[str, Any]:
    """The JSON Schema of a TOML file format described by ``model``."""
    schema = model.model_json_schema(schema_generator=_TomlJsonSchema)
    return {"$schema": JSON_SCHEMA_DIALECT, **schema}


def scenario_json_schema() -> dict[str, Any]:
    """The JSON Schema of a scenario file (field descriptions are the documentation)."""
    return toml_json_schema(ScenarioModel)


def scenario_template() -> str:
    """A commented scenario file to start from; it loads as it is.

    Its numbers are an invented example, and it says so.  The designs it
    lists are read from the registry.
    """
    text = (resources.files("decide.scenario") / "template.toml").read_text(encoding="utf-8")
    designs = "".join(f"# {name:<22}{d.title}\n" for name, d in DESIGNS.items())
    baselines = "".join(f"# {name:<22}{d.baseline_name}\n" for name, d in DESIGNS.items())
    return text.replace("# {designs}\n", designs).replace("# {baselines}\n", baselines)


def write_text_atomic(path: str | os.PathLike[str], text: str, overwrite: bool = False) -> Path:
    """Write ``text`` to ``path`` so that readers see the old file or the new one.

    The text goes to a temporary file in the same folder, which then replaces
    ``path`` in one step (``os.replace``).  An existing file is refused unless
    ``overwrite`` is true.

    Raises
    ------
    DecideError
        If the file exists and ``overwrite`` is false, or it cannot be written.
    """
    target = Path(path)
    if not overwrite and target.exists():
        raise DecideError(f"{target}: already exists; not overwriting it", (str(target),))
    temp = target.with_name(f".{target.name}.{secrets.token_hex(6)}.tmp")
    try:
        # 0o666 less the umask, as for any new file (a temp file would get 0o600).
        fd = os.open(temp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as f:
            f.write(text)
            f.flush()
            os.fsync(f.fileno())
        os.replace(temp, target)
    except OSError as e:
        temp.unlink(missing_ok=True)
        raise DecideError(
            f"{target}: cannot be written: {e.strerror or e}", (str(target),)
        ) from None
    return target
