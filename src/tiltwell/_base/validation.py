"""Checks made once, at the public boundary; every message names the argument.

Each helper returns the value converted to what the computation wants (a float or a
float64 array), so a public function validates and converts in one line per argument.
"""

from __future__ import annotations

import difflib
import math
import numbers
from collections.abc import Mapping
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "TiltwellError",
    "look_up",
    "as_finite_array",
    "as_integer",
    "as_points",
    "as_scalar",
    "as_bounds",
    "as_increasing",
]


class TiltwellError(ValueError):
    """Bad input to a tiltwell function. A ``ValueError``, so callers may catch either."""


def _describe(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def as_scalar(
    value: Any,
    name: str,
    unit: str,
    *,
    low: float = -math.inf,
    high: float = math.inf,
    low_open: bool = False,
    high_open: bool = False,
) -> float:
    """Return ``value`` as a finite float inside the given range, or raise.

    ``low_open``/``high_open`` exclude the end point; the message prints the range in
    interval notation with the unit, e.g. ``mass [kg] must be in (0, inf); got -1.0``.
    """
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise TiltwellError(
            f"{name} [{unit}] must be a real number; got {_describe(value)}"
        ) from None
    if isinstance(value, bool):
        raise TiltwellError(f"{name} [{unit}] must be a real number; got {value!r}")
    left = "(" if low_open or low == -math.inf else "["
    right = ")" if high_open or high == math.inf else "]"
    allowed = f"{left}{low:g}, {high:g}{right}"
    inside = (
        math.isfinite(number)
        and (number > low if low_open else number >= low)
        and (number < high if high_open else number <= high)
    )
    if not inside:
        raise TiltwellError(f"{name} [{unit}] must be finite and in {allowed}; got {number!r}")
    return number


def as_integer(value: Any, name: str, low: int, high: int | None = None) -> int:
    """Return ``value`` as an int in [low, high] (no upper end when ``high`` is None), or
    raise naming ``name``; bools are not integers here."""
    if isinstance(value, bool) or not isinstance(value, numbers.Integral) or not (
        low <= int(value) and (high is None or int(value) <= high)
    ):
        allowed = f"[{low}, {high}]" if high is not None else f">= {low}"
        raise TiltwellError(f"{name} must be an integer {allowed}; got {value!r}")
    return int(value)


def as_finite_array(value: ArrayLike, name: str, unit: str, *, ndim: int | None = None) -> NDArray[np.float64]:
    """Return ``value`` as a float64 array with no NaN or infinity, or raise."""
    try:
        array = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise TiltwellError(f"{name} [{unit}] must be an array of real numbers; got {_describe(value)}") from None
    if ndim is not None and array.ndim != ndim:
        raise TiltwellError(f"{name} [{unit}] must be a {ndim}-D array; got shape {array.shape}")
    if not np.all(np.isfinite(array)):
        bad = int(np.count_nonzero(~np.isfinite(array)))
        raise TiltwellError(f"{name} [{unit}] must be finite; got {bad} NaN or infinite value(s)")
    return array


def as_points(value: ArrayLike, name: str = "points") -> NDArray[np.float64]:
    """Return ``value`` as an (N, 3) float64 array of positions [m], or raise."""
    array = as_finite_array(value, name, "m")
    if array.ndim != 2 or array.shape[1] != 3:
        raise TiltwellError(f"{name} [m] must have shape (N, 3); got shape {array.shape}")
    return array


def as_increasing(value: ArrayLike, name: str, unit: str, *, min_size: int = 3) -> NDArray[np.float64]:
    """Return a 1-D strictly increasing float64 array with at least ``min_size`` entries."""
    array = as_finite_array(value, name, unit, ndim=1)
    if array.size < min_size:
        raise TiltwellError(f"{name} [{unit}] needs at least {min_size} samples; got {array.size}")
    steps = np.diff(array)
    if np.any(steps <= 0):
        where = int(np.argmax(steps <= 0))
        raise TiltwellError(
            f"{name} [{unit}] must be strictly increasing; "
            f"{name}[{where}]={array[where]!r} >= {name}[{where + 1}]={array[where + 1]!r}"
        )
    return array


def as_bounds(value: Any, name: str = "bounds") -> tuple[tuple[float, float], ...]:
    """Return ``((x0, x1), (y0, y1), (z0, z1))`` in metres with each low < high, or raise."""
    try:
        pairs = tuple(tuple(float(v) for v in pair) for pair in value)
    except (TypeError, ValueError):
        raise TiltwellError(
            f"{name} [m] must be ((x0, x1), (y0, y1), (z0, z1)); got {_describe(value)}"
        ) from None
    if len(pairs) != 3 or any(len(pair) != 2 for pair in pairs):
        raise TiltwellError(f"{name} [m] must be three (low, high) pairs; got {_describe(value)}")
    for axis, (low, high) in zip("xyz", pairs):
        if not (math.isfinite(low) and math.isfinite(high)) or not low < high:
            raise TiltwellError(
                f"{name} [m] for {axis} must be finite with low < high; got ({low!r}, {high!r})"
            )
    return tuple((low, high) for low, high in pairs)


def look_up(name: Any, index: Mapping[str, str], what: str, listing: str) -> str:
    """Canonical name for ``name`` in ``index`` (lower-case keys, any alias -> canonical),
    ignoring case and surrounding spaces; otherwise an error naming close matches, or
    ``listing`` (how to see every name) when there are none."""
    if not isinstance(name, str):
        raise TiltwellError(f"name must be a string (a {what} name); got {type(name).__name__}")
    key = name.strip().lower()
    if key in index:
        return index[key]
    close = dict.fromkeys(index[k] for k in difflib.get_close_matches(key, list(index), n=6, cutoff=0.5))
    hint = f"close matches: {', '.join(close)}" if close else "no close match"
    raise TiltwellError(f"unknown {what} {name!r}; {hint}. {listing}")
