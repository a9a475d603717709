"""One-line messages for files that cannot be used.

Every problem with a scenario or policy file is reported as
``<file>: <key.path>: <reason> (got <value>)``, for example::

    scenario.toml: consequences.false_alarm: must be a finite number not below 0 (got -3)

The value is shown as it was written in TOML (strings quoted, ``true`` and
``false`` in lower case); ``(got ...)`` is left out where there is no single
value to show (a missing key).  A TOML syntax error names the line and column
in place of the key path.
"""

from __future__ import annotations

import json
import re
import tomllib
from collections.abc import Sequence
from datetime import date, datetime, time
from typing import Any

from pydantic import BaseModel, ValidationError

from decide.errors import DecideError

from .models import NO_VALUE, RULE_ERROR

_LONGEST_VALUE = 60
#: Names the core validates without their table; where they live in a scenario file.
_STUDY_KEYS = ("design", "baseline", "allocation", "years", "sides", "test", "continuity")


class ScenarioError(DecideError):
    """A scenario or policy file that cannot be used.

    ``str(error)`` is one line: ``<file>: <key.path>: <reason> (got <value>)``.
    ``file``, ``key`` (dotted path, empty when the file as a whole is at
    fault) and ``reason`` are kept for front ends; ``params`` is ``(key,)``.
    """

    def __init__(self, file: str, key: str, reason: str) -> None:
        self.file = file
        self.key = key
        self.reason = reason
        where = f"{file}: {key}: " if key else f"{file}: "
        super().__init__(where + " ".join(reason.split()), (key,) if key else (file,))


class PolicyFileError(ScenarioError):
    """A policy file that cannot be used (same message format)."""


def show_value(value: Any) -> str:
    """A value as TOML spells it, shortened if long."""
    if isinstance(value, bool):
        text = "true" if value else "false"
    elif isinstance(value, int | float):
        text = repr(value)
    elif isinstance(value, str):
        text = json.dumps(value, ensure_ascii=False)
    elif isinstance(value, dict):
        text = "a table"
    elif isinstance(value, list):
        text = "an array"
    elif isinstance(value, datetime | date | time):
        text = value.isoformat()
    else:
        text = repr(value)
    if len(text) > _LONGEST_VALUE:
        text = text[: _LONGEST_VALUE - 3] + "..."
    return text


def _reason(value: Any, reason: str) -> str:
    return reason if value is NO_VALUE else f"{reason} (got {show_value(value)})"


def _bound(x: Any) -> str:
    return f"{x:g}" if isinstance(x, float) else str(x)


def _known_keys(model: type[BaseModel], loc: Sequence[Any]) -> list[str] | None:
    """The keys allowed in the table holding ``loc``'s last key."""
    for part in loc[:-1]:
        field = model.model_fields.get(str(part))
        ann = None if field is None else field.annotation
        if not (isinstance(ann, type) and issubclass(ann, BaseModel)):
            return None
        model = ann
    return list(model.model_fields)


def _explain(error: Any, model: type[BaseModel]) -> tuple[str, str]:
    """Key path and reason for one pydantic error."""
    loc = [str(p) for p in error["loc"]]
    kind = error["type"]
    ctx = error.get("ctx") or {}
    got = error.get("input", NO_VALUE)
    if kind == RULE_ERROR:
        if ctx["key"]:
            loc.append(ctx["key"])
        return ".".join(loc), _reason(ctx["got"], ctx["reason"])
    key = ".".join(loc)
    if kind == "missing":
        return key, "is required but missing"
    if kind == "extra_forbidden":
        known = _known_keys(model, error["loc"])
        hint = "" if known is None else f"; the keys allowed here are {', '.join(known)}"
        return key, "is not a known key" + hint
    simple = {
        "greater_than": f"must be > {_bound(ctx.get('gt'))}",
        "greater_than_equal": f"must be >= {_bound(ctx.get('ge'))}",
        "less_than": f"must be < {_bound(ctx.get('lt'))}",
        "less_than_equal": f"must be <= {_bound(ctx.get('le'))}",
        "float_type": "must be a number",
        "finite_number": "must be a finite number",
        "bool_type": "must be true or false",
        "string_type": "must be text in quotes",
        "string_too_short": "must not be empty",
        "literal_error": f"must be {ctx.get('expected')}",
        "model_type": "must be a table",
        "dict_type": "must be a table",
    }
    if kind == "int_type":
        if isinstance(got, float) and got.is_integer():
            return key, _reason(got, "must be a whole number, written without a decimal point")
        return key, _reason(got, "must be a whole number")
    if kind in simple:
        reason = simple[kind]
        if kind in ("model_type", "dict_type"):
            reason += " (a [section] in TOML)"
        return key, _reason(got, reason)
    msg = str(error["msg"])
    return key, _reason(got, msg[:1].lower() + msg[1:])


def from_validation_error(
    file: str,
    err: ValidationError,
    model: type[BaseModel],
    cls: type[ScenarioError] = ScenarioError,
) -> ScenarioError:
    """The first of pydantic's errors as one line, with a count of the rest."""
    errors = err.errors()
    key, reason = _explain(errors[0], model)
    if len(errors) > 1:
        reason += f" (and {len(errors) - 1} more)"
    return cls(file, key, reason)


def from_core_error(
    file: str, err: DecideError, cls: type[ScenarioError] = ScenarioError, prefix: str = ""
) -> ScenarioError:
    """A core constructor's message, re-keyed to the file's key path.

    The core says ``"<name> must be ..., but got <value>"``; ``prefix`` is a
    leading ``"policy <name>: "`` that policy messages carry.
    """
    message = str(err)
    if prefix and message.startswith(prefix):
        message = message[len(prefix) :]
    name = err.params[0] if err.params else ""
    key = f"study.{name}" if name in _STUDY_KEYS or name.startswith("design_settings.") else name
    if name and message.startswith(f"{name}: "):
        message = message[len(name) + 2 :]
    elif name and message.startswith(f"{name} "):
        message = message[len(name) + 1 :]
    match = re.fullmatch(r"(.*), but got (.*)", message, flags=re.DOTALL)
    if match:
        got = {"True": "true", "False": "false"}.get(match[2], match[2])  # as TOML spells them
        message = f"{match[1]} (got {got})"
    return cls(file, key, message)


def from_toml_error(file: str, err: tomllib.TOMLDecodeError, cls: type[ScenarioError] = ScenarioError) -> ScenarioError:
    """A TOML syntax error, located by line and column."""
    message = str(err)
    match = re.fullmatch(r"(.*) \(at line (\d+), column (\d+)\)", message)
    if match:
        return cls(file, f"line {match[2]}, column {match[3]}", f"not valid TOML: {match[1]}")
    match = re.fullmatch(r"(.*) \(at end of document\)", message)
    if match:
        return cls(file, "end of file", f"not valid TOML: {match[1]}")
    return cls(file, "", f"not valid TOML: {message}")
