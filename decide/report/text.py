"""Shared wording and number formatting for every renderer."""

from __future__ import annotations

import math
from typing import Any

CAUTION = (
    "Decision support, not a decision: the value judgments (prior, costs, acceptable risks) "
    "belong to the responsible body. Defer to applicable regulations, the competent authority "
    "and licensed professional judgment."
)


def fmt(value: Any, digits: int = 4) -> str:
    """Format a number for people: significant digits, thousands separators for counts."""
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return f"{value:,}"
    if isinstance(value, float):
        if math.isnan(value):
            return "-"
        if math.isinf(value):  # an unbounded quantity, in words
            return "unbounded" if value > 0 else "-unbounded"
        if value != 0 and (abs(value) < 1e-3 or abs(value) >= 1e7):
            return f"{value:.{digits - 1}e}"
        if float(value).is_integer() and abs(value) >= 1000:
            return f"{value:,.0f}"
        return f"{value:.{digits}g}"
    return str(value)


#: How a ratio that does not exist (a false alarm that costs nothing) is put in words.
NO_FINITE_RATIO = "none: a false alarm costs nothing"


def fmt_ratio(value: float | None) -> str:
    """A stated cost ratio, or why there is none."""
    return NO_FINITE_RATIO if value is None else fmt(value)


def json_safe(value: Any) -> Any:
    """Replace non-finite floats by ``None`` so the JSON is standard.

    The one JSON representation of a value that is not a finite number is
    ``null``.  The core never produces NaN; infinity appears only as the
    open upper end of a range (``implied_cost_ratio_range``: no upper
    bound), and a quantity that does not exist (the stated cost ratio when
    a false alarm costs nothing) is ``None`` already.
    """
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: json_safe(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [json_safe(v) for v in value]
    return value


def fmt_compact(value: Any, digits: int = 3) -> str:
    """Short form for narrow columns: 3 significant digits, k/M/G for large values."""
    if not isinstance(value, float) or math.isnan(value) or math.isinf(value):
        return fmt(value)
    size = abs(value)
    for scale, suffix in ((1e9, "G"), (1e6, "M"), (1e4, "k")):
        if size >= scale:
            return f"{value / scale:.{digits}g}{suffix}"
    return fmt(value, digits)
