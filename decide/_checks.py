"""Validation helpers used once, at the API boundary, and the domain limits.

Each helper raises :class:`~decide.errors.DecideError` with a message of the
form ``"<name> must be <rule>, but got <value>"``.  Numerical code behind the
boundary assumes clean input.

The domain limits below keep every computation finite and bounded; inputs
outside them are refused (status 2 on the command line).  They are stated
in the contributor guide (DEVELOPERS.md, "Limits") and in the README.
"""

from __future__ import annotations

import math
import numbers
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import DecideError

FloatArray = NDArray[np.float64]

#: Probabilities a question is asked about (alpha and power of a solve, prior
#: probabilities, levels) lie in ``[SMALLEST_PROBABILITY, 1 - LARGEST_COMPLEMENT]``:
#: closer to 0 or 1 the normal quantiles and exact tails lose their digits.
#: The lower end is the smallest level the exact tests resolve
#: (``engine.exact.ALPHA_FLOOR``), so any alpha the engine reports is a valid
#: input again.
SMALLEST_PROBABILITY = 1e-15
LARGEST_COMPLEMENT = 1e-12
#: Baselines: rates per person-year (cohort-rate, reference-rate); risks and
#: prevalences below 1 from the same lower end.
BASELINE_RATE_RANGE = (1e-12, 1e3)
#: Unexposed subjects per exposed subject, or controls per case.
ALLOCATION_RANGE = (1e-2, 1e2)
#: Follow-up years per subject.
YEARS_RANGE = (1e-6, 1e6)
#: The effect (risk, rate or odds ratio, SIR).
EFFECT_RANGE = (1e-4, 1e4)
#: The largest group size (exposed subjects or cases) considered anywhere.
LARGEST_SIZE = 10**9
#: The largest cost (missed hazard, false alarm, per subject, fixed, per case).
LARGEST_COST = 1e100
#: The largest exposed population and the longest horizon of a derived cost.
LARGEST_POPULATION = 1e10
LONGEST_HORIZON = 1e4

_LONGEST_SHOWN = 40


def show(value: Any) -> str:
    """A value as a message shows it: numbers in short form, long text cut."""
    if isinstance(value, bool) or value is None:
        return repr(value)
    if isinstance(value, numbers.Integral):
        text = str(int(value))
        return text if len(text) <= 15 else f"an integer of {len(text)} digits"
    if isinstance(value, numbers.Real):
        v = float(value)
        if math.isnan(v):
            return "NaN"
        short = f"{v:g}"
        return short if float(short) == v else repr(v)
    text = repr(value)
    return text if len(text) <= _LONGEST_SHOWN else text[: _LONGEST_SHOWN - 3] + "..."


def _first_bad(values: FloatArray, bad: NDArray[np.bool_]) -> str:
    return show(float(values[bad].flat[0]))


def as_float_array(name: str, value: ArrayLike) -> FloatArray:
    """Convert to a float array, refusing NaN, truth values and non-numbers."""
    if value is None or isinstance(value, bool | np.bool_ | str | bytes):
        raise DecideError(f"{name} must be a number, but got {show(value)}")
    try:
        raw = np.asarray(value)
        if raw.dtype.kind in "bUSV":  # truth values and text are not numbers
            raise TypeError
        arr = np.asarray(raw, dtype=np.float64)
    except OverflowError:
        raise DecideError(f"{name} must be a number below 1e308, but got {show(value)}", (name,)) from None
    except (TypeError, ValueError):
        raise DecideError(f"{name} must be a number, but got {show(value)}", (name,)) from None
    if np.isnan(arr).any():
        raise DecideError(f"{name} must be a number, but got NaN", (name,))
    return arr


def scalar(name: str, value: Any) -> float:
    """A single number (not an array)."""
    arr = as_float_array(name, value)
    if arr.ndim:
        raise DecideError(f"{name} must be a single number, but got an array of shape {arr.shape}", (name,))
    return float(arr)


def open_unit(name: str, value: ArrayLike) -> FloatArray:
    """A probability strictly between 0 and 1."""
    arr = as_float_array(name, value)
    bad = (arr <= 0) | (arr >= 1)
    if bad.any():
        raise DecideError(f"{name} must be strictly between 0 and 1, but got {_first_bad(arr, bad)}", (name,))
    return arr


def probability(name: str, value: ArrayLike) -> FloatArray:
    """A probability a question is asked about: from 1e-15 to 1 - 1e-12.

    The array function :func:`decide.power` takes any level in (0, 1), as a
    curve may; solves, audits, problems and policies take these.
    """
    arr = open_unit(name, value)
    near = (arr < SMALLEST_PROBABILITY) | (arr > 1 - LARGEST_COMPLEMENT)
    if near.any():
        raise DecideError(
            f"{name} must be between 1e-15 and 1 - 1e-12 (nearer 0 or 1 is beyond what decide "
            f"computes reliably), but got {_first_bad(arr, near)}",
            (name,),
        )
    return arr


def positive(name: str, value: ArrayLike) -> FloatArray:
    """A finite number above 0."""
    arr = as_float_array(name, value)
    bad = ~np.isfinite(arr) | (arr <= 0)
    if bad.any():
        raise DecideError(f"{name} must be a finite number above 0, but got {_first_bad(arr, bad)}", (name,))
    return arr


def non_negative(name: str, value: ArrayLike) -> FloatArray:
    """A finite number not below 0."""
    arr = as_float_array(name, value)
    bad = ~np.isfinite(arr) | (arr < 0)
    if bad.any():
        raise DecideError(f"{name} must be a finite number not below 0, but got {_first_bad(arr, bad)}", (name,))
    return arr


def within(name: str, arr: FloatArray, low: float, high: float) -> FloatArray:
    """A (checked, finite) value inside the domain limits ``[low, high]``."""
    bad = (arr < low) | (arr > high)
    if bad.any():
        raise DecideError(
            f"{name} must be between {low:g} and {high:g} (the range decide works in), but got {_first_bad(arr, bad)}",
            (name,),
        )
    return arr


def at_most(name: str, arr: FloatArray, high: float, what: str) -> FloatArray:
    """A (checked, finite) value not above the domain limit ``high``."""
    bad = arr > high
    if bad.any():
        raise DecideError(f"{name} must be at most {high:g} ({what}), but got {_first_bad(arr, bad)}", (name,))
    return arr


def cost(name: str, value: ArrayLike) -> FloatArray:
    """A cost: finite, not below 0, at most :data:`LARGEST_COST`."""
    return at_most(name, non_negative(name, value), LARGEST_COST, "the largest cost decide works with")


def whole_at_least_one(name: str, value: ArrayLike) -> FloatArray:
    """A whole number of subjects from 1 to :data:`LARGEST_SIZE` (returned as floats)."""
    if isinstance(value, numbers.Integral) and not isinstance(value, bool) and int(value) > LARGEST_SIZE:
        raise DecideError(
            f"{name} must be at most {LARGEST_SIZE:,} (the largest group decide considers), but got {show(value)}",
            (name,),
        )
    arr = as_float_array(name, value)
    bad = ~np.isfinite(arr) | (arr < 1) | (arr != np.floor(arr))
    if bad.any():
        raise DecideError(f"{name} must be a whole number not less than 1, but got {_first_bad(arr, bad)}", (name,))
    return at_most(name, arr, LARGEST_SIZE, "the largest group decide considers")


def sides(value: Any) -> int:
    """The number of tails of the test: the whole number 1 (harm only) or 2."""
    whole = isinstance(value, numbers.Integral) and not isinstance(value, bool | np.bool_)
    if not whole or value not in (1, 2):
        raise DecideError(f"sides must be 1 or 2 (a whole number), but got {show(value)}", ("sides",))
    return int(value)


def choice(name: str, value: Any, options: tuple[str, ...]) -> str:
    """One of a fixed set of words."""
    if not isinstance(value, str) or value not in options:
        raise DecideError(f"{name} must be one of {', '.join(options)}, but got {show(value)}", (name,))
    return str(value)


def broadcast(names: tuple[str, ...], *arrays: FloatArray) -> tuple[FloatArray, ...]:
    """Arrays broadcast to one shape, or an error naming the arguments that clash."""
    try:
        return tuple(np.broadcast_arrays(*arrays))
    except ValueError:
        shapes = ", ".join(f"{n} {a.shape}" for n, a in zip(names, arrays, strict=True) if a.ndim)
        raise DecideError(
            f"{', '.join(names)} must have shapes that broadcast together, but got {shapes}", names
        ) from None
