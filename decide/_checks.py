"""Validation helpers used once, at the API boundary.

Each helper raises :class:`~decide.errors.DecideError` with a message of the
form ``"<name> must be <rule>, but got <value>"``.  Numerical code behind the
boundary assumes clean input.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import DecideError

FloatArray = NDArray[np.float64]


def _first_bad(values: FloatArray, bad: NDArray[np.bool_]) -> float:
    return float(values[bad].flat[0])


def as_float_array(name: str, value: ArrayLike) -> FloatArray:
    """Convert to a float array, refusing NaN and non-numbers."""
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise DecideError(f"{name} must be a number, but got {value!r}") from None
    if np.isnan(arr).any():
        raise DecideError(f"{name} must be a number, but got NaN")
    return arr


def open_unit(name: str, value: ArrayLike) -> FloatArray:
    """A probability strictly between 0 and 1."""
    arr = as_float_array(name, value)
    bad = (arr <= 0) | (arr >= 1)
    if bad.any():
        raise DecideError(
            f"{name} must be strictly between 0 and 1, but got {_first_bad(arr, bad):g}"
        )
    return arr


def positive(name: str, value: ArrayLike) -> FloatArray:
    """A finite number above 0."""
    arr = as_float_array(name, value)
    bad = ~np.isfinite(arr) | (arr <= 0)
    if bad.any():
        raise DecideError(f"{name} must be a finite number above 0, but got {_first_bad(arr, bad):g}")
    return arr


def non_negative(name: str, value: ArrayLike) -> FloatArray:
    """A finite number not below 0."""
    arr = as_float_array(name, value)
    bad = ~np.isfinite(arr) | (arr < 0)
    if bad.any():
        raise DecideError(f"{name} must be a finite number not below 0, but got {_first_bad(arr, bad):g}")
    return arr


def whole_at_least_one(name: str, value: ArrayLike) -> FloatArray:
    """A whole number of subjects, at least 1 (returned as floats)."""
    arr = as_float_array(name, value)
    bad = ~np.isfinite(arr) | (arr < 1) | (arr != np.floor(arr))
    if bad.any():
        raise DecideError(
            f"{name} must be a whole number not less than 1, but got {_first_bad(arr, bad):g}"
        )
    return arr


def sides(value: Any) -> int:
    """The number of tails of the test: 1 (harm only) or 2."""
    if value not in (1, 2) or isinstance(value, bool):
        raise DecideError(f"sides must be 1 or 2, but got {value!r}")
    return int(value)


def choice(name: str, value: Any, options: tuple[str, ...]) -> str:
    """One of a fixed set of words."""
    if value not in options:
        raise DecideError(f"{name} must be one of {', '.join(options)}, but got {value!r}")
    return str(value)
