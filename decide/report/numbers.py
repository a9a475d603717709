"""How every renderer writes numbers: one policy for screens, documents and machines.

People read (console tables, Markdown):

- money: whole units with thousands separators (``14,838,123 EUR``), or, in
  narrow columns, three significant digits with a suffix for thousand,
  million or billion (``14.8M``, ``455k``, ``1.2bn``); amounts under 100 keep up to
  two decimals (``12.5``);
- probabilities: three significant digits in fixed-point notation, trailing
  zeros kept (``0.0500``, ``0.800``); a value that would round to 1 or to 0
  without being 1 or 0 is written ``> 0.999`` or ``< 0.000001``;
- counts: whole numbers with thousands separators (``41,429``);
- other quantities (ratios, rates, expected counts): three significant digits,
  fixed-point, trailing zeros dropped, separators from 1,000 up.

No human format ever uses e-notation, so ``1.5e+07`` never stands beside
``14.8M``.  A missing or undefined value is ``-``; an unbounded one is
``infinity``.

Machines read (JSON, CSV): full precision, keys in snake_case, and every value
that is not a finite number (missing, undefined or unbounded) is ``null`` in
JSON and an empty cell in CSV.
"""

from __future__ import annotations

import math
import re
from typing import Any

#: Significant digits of every human number format.
DIGITS = 3
#: Significant digits of a stated level shown as a percentage (:func:`percent`).
PERCENT_DIGITS = 4
#: Below this a positive probability or quantity is written as a bound.
SMALLEST_SHOWN = 1e-6
#: What a missing or undefined value looks like to people.
MISSING = "-"
#: What an unbounded value looks like to people.
UNBOUNDED = "infinity"
#: Compact suffixes for money, largest first.
SUFFIXES = ((1e9, "bn"), (1e6, "M"), (1e3, "k"))
#: Written under a table that uses the suffixes.
SUFFIX_NOTE = "k = thousand, M = million, bn = billion"


def _missing(value: Any) -> bool:
    return value is None or (isinstance(value, float) and math.isnan(value))


def _round_sig(value: float, digits: int) -> float:
    """``value`` rounded to ``digits`` significant digits (decimal, not binary, rounding)."""
    if value == 0:
        return 0.0
    return float(f"{value:.{digits - 1}e}")


def _decimals_for(value: float, digits: int) -> int:
    """Decimals that show ``digits`` significant digits of an already rounded value."""
    if value == 0:
        return 0
    return max(0, digits - 1 - math.floor(math.log10(abs(value))))


def _trim(text: str) -> str:
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def count(value: Any) -> str:
    """A whole number of subjects, cases or groups: ``41,429``.

    Examples
    --------
    >>> count(41429), count(None)
    ('41,429', '-')
    """
    if _missing(value):
        return MISSING
    return f"{round(value):,}"


def probability(value: Any, digits: int = DIGITS) -> str:
    """A probability with ``digits`` significant digits, never rounded onto 0 or 1.

    Examples
    --------
    >>> probability(0.05), probability(0.99996), probability(1.0)
    ('0.0500', '> 0.999', '1')
    """
    if _missing(value):
        return MISSING
    p = float(value)
    if p in (0.0, 1.0):
        return f"{p:.0f}"
    if 0 < p < SMALLEST_SHOWN:
        return f"< {SMALLEST_SHOWN:.6f}"
    rounded = _round_sig(p, digits)
    if rounded >= 1 and p < 1:
        return "> 0." + "9" * digits
    return f"{rounded:.{_decimals_for(rounded, digits)}f}"


def number(value: Any, digits: int = DIGITS) -> str:
    """A ratio, rate or expected count: ``digits`` significant digits, no e-notation.

    Whole parts of ``digits`` or more digits are shown in full with separators.

    Examples
    --------
    >>> number(5.796), number(3e-5), number(12605.4), number(float("inf"))
    ('5.8', '0.00003', '12,605', 'infinity')
    """
    if _missing(value):
        return MISSING
    x = float(value)
    if math.isinf(x):
        return UNBOUNDED if x > 0 else "-" + UNBOUNDED
    if 0 < abs(x) < SMALLEST_SHOWN:
        return ("> -" if x < 0 else "< ") + f"{SMALLEST_SHOWN:.6f}"
    if abs(x) >= 10 ** (digits - 1):
        return _trim(f"{x:,.0f}")
    rounded = _round_sig(x, digits)
    if abs(rounded) >= 10 ** (digits - 1):
        return _trim(f"{rounded:,.0f}")
    return _trim(f"{rounded:,.{_decimals_for(rounded, digits)}f}")


def percent(value: Any) -> str:
    """A stated level (confidence, power target) as a percentage: up to four significant digits.

    Levels are stated, not estimated, so they keep the digits they were given
    (``97.5%``, ``99.95%``); a level below 1 is never shown as ``100%``.

    Examples
    --------
    >>> percent(0.95), percent(0.975), percent(0.8), percent(0.9995), percent(0.999999), percent(None)
    ('95%', '97.5%', '80%', '99.95%', '> 99.99%', '-')
    """
    if _missing(value):
        return MISSING
    p = float(value)
    shown = number(100 * p, PERCENT_DIGITS)
    if 0 < p < 1 and shown == "100":
        return "> 99." + "9" * (PERCENT_DIGITS - 2) + "%"
    return shown + "%"


def money(value: Any, currency: str = "", compact: bool = False) -> str:
    """An amount of money, followed by its currency when one is given.

    In full (the default) to the unit with thousands separators; amounts under
    100 keep up to two decimals.  ``compact=True`` gives three significant
    digits and a suffix (k, M, bn) for narrow columns.

    Examples
    --------
    >>> money(14838123.4, "EUR"), money(454778.0, compact=True), money(None, "EUR")
    ('14,838,123 EUR', '455k', '-')
    """
    if _missing(value):
        return MISSING
    x = float(value)
    if math.isinf(x):
        text = UNBOUNDED if x > 0 else "-" + UNBOUNDED
    elif compact:
        text = _compact(x)
    elif abs(x) >= 100:
        text = _trim(f"{x:,.0f}")
    else:
        text = _trim(f"{x:,.2f}")
    return f"{text} {currency}" if currency else text


def _compact(x: float) -> str:
    rounded = _round_sig(x, DIGITS)
    for scale, suffix in SUFFIXES:
        if abs(rounded) >= scale:
            mantissa = rounded / scale
            places = _decimals_for(_round_sig(mantissa, DIGITS), DIGITS)
            return _trim(f"{mantissa:,.{places}f}") + suffix
    return _trim(f"{rounded:.{_decimals_for(rounded, DIGITS)}f}")


def number_range(low: Any, high: Any) -> str:
    """A range of quantities: ``3.87 to 8.69``, ``6.43 to infinity``."""
    return f"{number(low)} to {number(high)}"


def is_range(bounds: tuple[float, float] | None) -> bool:
    """Whether ``bounds`` (low, high) shows as a range, not as one value once rounded."""
    return bounds is not None and number(bounds[0]) != number(bounds[1])


def ratio_range(value: Any, bounds: tuple[float, float] | None = None) -> str:
    """A ratio that may be a range: ``5.8``, ``3.87 to 8.69``, ``6.43 or more``.

    ``bounds`` (low, high) replaces ``value`` when its ends differ once rounded;
    an unbounded high end reads "or more", a zero low end "or less".

    Examples
    --------
    >>> ratio_range(5.8), ratio_range(7.1, (3.87, 8.69)), ratio_range(9.0, (6.43, float("inf")))
    ('5.8', '3.87 to 8.69', '6.43 or more')
    """
    if _missing(value) and bounds is None:
        return MISSING
    if bounds is None or not is_range(bounds):
        return number(value)
    low, high = bounds
    if math.isinf(high):
        return f"{number(low)} or more"
    if low <= 0:
        return f"{number(high)} or less"
    return number_range(low, high)


def snake_key(key: str) -> str:
    """A JSON key in snake_case: ``"exposed cases"`` becomes ``"exposed_cases"``.

    Dots are kept so that keys holding numbers (power levels ``"0.8"``) stay
    readable as numbers.
    """
    return re.sub(r"[^0-9a-z.]+", "_", key.lower()).strip("_")


def for_json(value: Any) -> Any:
    """Data ready for standard JSON: snake_case keys, non-finite numbers as ``None``.

    Tuples become lists; numpy scalars become Python numbers.
    """
    if isinstance(value, dict):
        return {snake_key(str(k)): for_json(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [for_json(v) for v in value]
    if hasattr(value, "item") and callable(value.item) and getattr(value, "ndim", None) == 0:
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value
