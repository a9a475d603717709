"""What every result object shares: plain data for JSON and tables."""

from __future__ import annotations

from dataclasses import asdict
from typing import Any


class PlainData:
    """Mixin for frozen result dataclasses: ``to_dict`` with tuples as lists."""

    def to_dict(self) -> dict[str, Any]:
        """Plain data (dicts, lists, numbers, strings) for JSON output."""
        return {k: list(v) if isinstance(v, tuple) else v for k, v in asdict(self).items()}  # type: ignore[call-overload]
