"""Where each input came from: the optional ``[sources]`` table of a scenario file.

The table maps an input's key path to a short source string::

    [sources]
    "prior.p_harm" = "expert panel, 2026 (invented)"
    "consequences.false_alarm" = "trade association estimate (invented)"

Keys may also be written as nested tables (``[sources.prior]`` with
``p_harm = "..."``); both forms give the same dotted key paths.  A key path
that names no input of the scenario format is an error naming it.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from pydantic import BaseModel

#: What a report says for an input without a source.
NO_SOURCE = "no source given"

#: The scenario tables whose keys are inputs that may carry a source.
INPUT_TABLES = ("study", "effect", "prior", "consequences", "constraints")


def input_key_paths(tables: Mapping[str, type[BaseModel]]) -> tuple[str, ...]:
    """Every input key path of the scenario format (``prior.p_harm``, ...), in file order."""
    return tuple(f"{t}.{k}" for t in INPUT_TABLES for k in tables[t].model_fields)


def flatten_sources(data: Any, prefix: str = "") -> dict[str, Any]:
    """The ``[sources]`` table as ``{dotted key path: value}`` (nested tables joined by dots)."""
    if not isinstance(data, dict):
        return {prefix: data} if prefix else {}
    out: dict[str, Any] = {}
    for key, value in data.items():
        path = f"{prefix}.{key}" if prefix else str(key)
        if isinstance(value, dict):
            out.update(flatten_sources(value, path))
        else:
            out[path] = value
    return out


def unknown_source_key(sources: dict[str, str], known: tuple[str, ...]) -> str | None:
    """The first key path of ``sources`` that names no input, or None."""
    return next((k for k in sources if k not in known), None)


def source_of(sources: dict[str, str], key: str) -> str:
    """The source of input ``key``, or :data:`NO_SOURCE`."""
    text = sources.get(key, "").strip()
    return text or NO_SOURCE
