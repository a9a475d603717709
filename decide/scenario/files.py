"""Reading and writing scenario files.

:func:`load_scenario` reads a TOML scenario file into a
:class:`LoadedScenario` holding the core :class:`~decide.problem.Problem`.
Whatever is wrong with the file (it is missing, it is not TOML, a key is
unknown, a value has the wrong type or range, the constraints leave no study
possible) raises :class:`ScenarioError` with a one-line message::

    scenario.toml: consequences.false_alarm: must be a finite number not below 0 (got -3)

Only regular files of at most :data:`MAX_FILE_BYTES` are read (a named pipe
or a device is refused before reading); a UTF-8 byte-order mark is allowed.
:func:`write_text_atomic` (in :mod:`decide.scenario._writing`) writes files
safely; :func:`check_output_path` checks a path before a long computation.

:func:`scenario_template` gives a commented template that loads as it is;
:func:`scenario_json_schema` the JSON Schema of the format.
"""

from __future__ import annotations

import os
import stat
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
from ._writing import check_output_path, write_text_atomic
from .models import ScenarioModel

__all__ = [
    "MAX_FILE_BYTES",
    "LoadedScenario",
    "check_output_path",
    "load_scenario",
    "parse_scenario",
    "parse_toml",
    "read_small_file",
    "read_toml",
    "scenario_json_schema",
    "scenario_template",
    "write_text_atomic",
]

#: The most bytes read from a scenario or policy file (they are a few kilobytes).
MAX_FILE_BYTES = 1_000_000
#: What a path that is not a regular file is, for messages.
_KINDS = (
    (stat.S_ISFIFO, "a named pipe"),
    (stat.S_ISCHR, "a character device"),
    (stat.S_ISBLK, "a block device"),
    (stat.S_ISSOCK, "a socket"),
)

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


def _not_regular(mode: int) -> str:
    kind = next((name for test, name in _KINDS if test(mode)), "not a regular file")
    return f"is {kind}, not a regular file; give the path of a file"


def _too_large() -> str:
    return f"is larger than {MAX_FILE_BYTES:,} bytes, the most read from a scenario or policy file"


def _read_at_most(fd: int, limit: int) -> bytes:
    parts: list[bytes] = []
    while limit > 0 and (part := os.read(fd, min(limit, 1 << 16))):
        parts.append(part)
        limit -= len(part)
    return b"".join(parts)


def read_small_file(file: str, cls: type[ScenarioError] = ScenarioError) -> bytes:
    """The bytes of a regular file of at most :data:`MAX_FILE_BYTES`.

    Named pipes, devices and sockets are refused before anything is read (a
    pipe is opened without waiting for a writer), and no more than
    ``MAX_FILE_BYTES + 1`` bytes are ever read.
    """
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
    try:
        fd = os.open(file, flags | getattr(os, "O_CLOEXEC", 0))
    except FileNotFoundError:
        raise cls(file, "", "no such file") from None
    except IsADirectoryError:
        raise cls(file, "", "is a folder, not a file") from None
    except OSError as e:
        raise cls(file, "", f"cannot be read: {e.strerror or e}") from None
    try:
        info = os.fstat(fd)
        if stat.S_ISDIR(info.st_mode):
            raise cls(file, "", "is a folder, not a file")
        if not stat.S_ISREG(info.st_mode):
            raise cls(file, "", _not_regular(info.st_mode))
        if info.st_size > MAX_FILE_BYTES:
            raise cls(file, "", _too_large())
        data = _read_at_most(fd, MAX_FILE_BYTES + 1)
    except OSError as e:
        raise cls(file, "", f"cannot be read: {e.strerror or e}") from None
    finally:
        os.close(fd)
    if len(data) > MAX_FILE_BYTES:
        raise cls(file, "", _too_large())
    return data


def read_toml(path: str | os.PathLike[str], cls: type[ScenarioError] = ScenarioError) -> dict[str, Any]:
    """Parse a TOML file, raising ``cls`` with a one-line message on failure."""
    file = os.fspath(path)
    data = read_small_file(file, cls)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as e:
        raise cls(file, "", f"is not UTF-8 text (bad byte at offset {e.start})") from None
    return parse_toml(text, file, cls)


def parse_toml(text: str, file: str, cls: type[ScenarioError] = ScenarioError) -> dict[str, Any]:
    """Parse TOML text; whatever is wrong with it becomes one line naming ``file``.

    A leading byte-order mark is allowed (some editors write one).
    """
    try:
        return tomllib.loads(text.removeprefix("\ufeff"))
    except tomllib.TOMLDecodeError as e:
        raise from_toml_error(file, e, cls) from None
    except RecursionError:
        raise cls(file, "", "not valid TOML here: arrays or tables are nested too deeply to read") from None
    except ValueError as e:  # Python's own limit on the digits of a whole number
        raise cls(file, "", f"not valid TOML here: {str(e).split(';')[0]}") from None


def validate_model(file: str, data: dict[str, Any], model: type[BaseModel], cls: type[ScenarioError]) -> Any:
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
