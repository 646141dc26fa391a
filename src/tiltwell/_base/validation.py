"""Checks made once, at the public boundary; every message names the argument.

Each helper returns the value converted to what the computation wants (a float, an int,
a tuple of floats or a float64 array), so a public function validates and converts in one
line per argument. Allowed ranges are printed by :class:`Interval` alone, so a message and
a listing of keys (``tiltwell keys``) show the same text.
"""

from __future__ import annotations

import difflib
import math
import numbers
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "MAX_GRADIENT",
    "MAX_LENGTH",
    "MAX_MASS",
    "MAX_SAMPLES",
    "read_only_copy",
    "Interval",
    "TiltwellError",
    "look_up",
    "as_boolean",
    "as_choice",
    "as_finite_array",
    "as_integer",
    "as_points",
    "as_real_table",
    "as_real_tuple",
    "as_scalar",
    "as_bounds",
    "as_increasing",
    "as_text",
]


class TiltwellError(ValueError):
    """Bad input to a tiltwell function. A ``ValueError``, so callers may catch either.

    ``argument`` names the argument refused where a validator knows it (None otherwise), so
    a caller that passed it on from a file can name the file's key instead, without reading
    the message."""

    def __init__(self, *args: object, argument: str | None = None) -> None:
        super().__init__(*args)
        self.argument = argument


#: Ceilings of this tool's inputs where physics sets none (not physical limits: far beyond any
#: laboratory device, so that a mistyped exponent is refused before it overflows a square or a
#: cube): a length [m] (1e9: the dipole limit of two loops is still checked at 1e6 m), a
#: particle mass [kg] (~6e6 u), a field gradient [T/m], samples of a 1-D cut.
MAX_LENGTH = 1e9
MAX_MASS = 1e-20
MAX_GRADIENT = 1e6
MAX_SAMPLES = 10**6


def _describe(value: Any) -> str:
    """``repr(value)`` cut to 60 characters (a long string or list is cut before its repr
    is made, so a 50 MB value costs nothing to describe)."""
    if isinstance(value, (str, bytes)) and len(value) > 60:
        value = value[:60]
    elif isinstance(value, (list, tuple)) and len(value) > 20:
        value = value[:20]
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _not_a_number(value: Any) -> bool:
    """Whether ``value`` must never pass as a real number: a bool (numpy's too), or a
    complex number (``float()`` of numpy's complex types silently drops the imaginary part)."""
    return isinstance(value, (bool, np.bool_, complex, np.complexfloating)) or (
        isinstance(value, np.ndarray) and value.dtype.kind in "bc")


def _label(name: str, unit: str) -> str:
    """``name [unit]``, or ``name`` alone for an empty unit."""
    return f"{name} [{unit}]" if unit else name


def _bound(value: float) -> str:
    return str(value) if isinstance(value, int) else f"{value:g}"


@dataclass(frozen=True)
class Interval:
    """A range of allowed real values; ``str()`` prints it in interval notation.

    An infinite end is always open. This is the one place where tiltwell formats a range,
    for error messages and for listings alike.

    >>> str(Interval(0.0, 1e6, low_open=True))
    '(0, 1e+06]'
    >>> str(Interval(2, 1000)), str(Interval())
    ('[2, 1000]', '(-inf, inf)')
    >>> 0.0 in Interval(0.0, 1.0, low_open=True)
    False
    """

    low: float = -math.inf
    high: float = math.inf
    low_open: bool = False
    high_open: bool = False

    def __str__(self) -> str:
        left = "(" if self.low_open or self.low == -math.inf else "["
        right = ")" if self.high_open or self.high == math.inf else "]"
        return f"{left}{_bound(self.low)}, {_bound(self.high)}{right}"

    def __contains__(self, number: object) -> bool:
        if not isinstance(number, numbers.Real):
            return False
        x = float(number)
        return (
            math.isfinite(x)
            and (x > self.low if self.low_open else x >= self.low)
            and (x < self.high if self.high_open else x <= self.high)
        )

    @property
    def bounded(self) -> bool:
        """Whether either end is finite (an unbounded range goes unmentioned in listings)."""
        return math.isfinite(self.low) or math.isfinite(self.high)


def as_scalar(
    value: Any,
    name: str,
    unit: str,
    *,
    low: float = -math.inf,
    high: float = math.inf,
    low_open: bool = False,
    high_open: bool = False,
    strict: bool = False,
) -> float:
    """Return ``value`` as a finite float inside the given range, or raise.

    ``low_open``/``high_open`` exclude the end point; the message prints the range in
    interval notation (:class:`Interval`) with the unit, e.g. ``mass [kg] must be finite
    and in (0, inf); got -1.0``; an empty ``unit`` prints the name alone. ``strict``
    accepts real numbers only (int, float, numpy reals), not strings or other objects that
    ``float()`` would convert, as for values read from a file. Bools, complex numbers and
    text are never numbers.
    """
    label = _label(name, unit)
    if _not_a_number(value) or isinstance(value, (str, bytes)) or (strict and not isinstance(value, numbers.Real)):
        raise TiltwellError(f"{label} must be a real number; got {_describe(value)}", argument=name)
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise TiltwellError(f"{label} must be a real number; got {_describe(value)}", argument=name) from None
    allowed = Interval(low, high, low_open, high_open)
    if number not in allowed:
        raise TiltwellError(f"{label} must be finite and in {allowed}; got {number!r}", argument=name)
    return number


def as_real_tuple(
    value: Any,
    name: str,
    unit: str,
    *,
    length: int | None = None,
    form: str = "",
    low: float = -math.inf,
    high: float = math.inf,
    low_open: bool = False,
    high_open: bool = False,
) -> tuple[float, ...]:
    """Return a list or tuple of real numbers (exactly ``length`` when given) as a tuple of
    floats, each checked like :func:`as_scalar` with ``strict``; ``form`` says in words
    what is wanted (default: "a list of N real numbers")."""
    if isinstance(value, (str, bytes)) or not isinstance(value, Sequence) or (
        length is not None and len(value) != length
    ):
        wanted = form or f"a list of {length if length is not None else 'real'} numbers"
        raise TiltwellError(f"{_label(name, unit)} must be {wanted}; got {_describe(value)}")
    return tuple(
        as_scalar(v, f"{name}[{i}]", unit, low=low, high=high, low_open=low_open, high_open=high_open, strict=True)
        for i, v in enumerate(value)
    )


def as_real_table(
    value: Any,
    name: str,
    unit: str,
    *,
    columns: int,
    form: str = "",
    low: float = -math.inf,
    high: float = math.inf,
    low_open: bool = False,
    high_open: bool = False,
) -> tuple[tuple[float, ...], ...]:
    """Return a list of rows of ``columns`` real numbers each as a tuple of tuples of floats
    (each number checked like :func:`as_scalar` with ``strict``); ``form`` says in words
    what is wanted (default: "a list of rows of N numbers"). An empty list is allowed."""
    wanted = form or f"a list of rows of {columns} numbers"
    if isinstance(value, (str, bytes)) or not isinstance(value, Sequence) or not all(
        isinstance(row, Sequence) and not isinstance(row, (str, bytes)) and len(row) == columns for row in value
    ):
        raise TiltwellError(f"{_label(name, unit)} must be {wanted}; got {_describe(value)}")
    return tuple(
        as_real_tuple(row, f"{name}[{i}]", unit, length=columns, low=low, high=high, low_open=low_open,
                      high_open=high_open)
        for i, row in enumerate(value)
    )


def as_integer(value: Any, name: str, low: int, high: int | None = None, *, even: bool = False) -> int:
    """Return ``value`` as an int in [low, high] (no upper end when ``high`` is None), or
    raise naming ``name``; bools are not integers here. ``even`` also requires an even
    number."""
    allowed = f"in {Interval(low, high)}" if high is not None else f">= {low}"
    kind = "an even integer" if even else "an integer"
    if isinstance(value, bool) or not isinstance(value, numbers.Integral) or not (
        low <= int(value) and (high is None or int(value) <= high) and not (even and int(value) % 2)
    ):
        raise TiltwellError(f"{name} must be {kind} {allowed}; got {_describe(value)}", argument=name)
    return int(value)


def as_boolean(value: Any, name: str) -> bool:
    """Return ``value`` if it is a bool (true or false), or raise naming ``name``; numbers
    are not booleans here."""
    if not isinstance(value, (bool, np.bool_)):
        raise TiltwellError(f"{name} must be true or false; got {_describe(value)}")
    return bool(value)


def as_text(value: Any, name: str) -> str:
    """Return ``value`` if it is a string with something besides spaces, or raise."""
    if not isinstance(value, str) or not value.strip():
        raise TiltwellError(f"{name} must be a non-empty string; got {_describe(value)}")
    return value


def as_choice(value: Any, name: str, choices: Sequence[str]) -> str:
    """Return the one of ``choices`` that ``value`` names (case and surrounding spaces aside,
    as names are everywhere in tiltwell), or raise naming them and the close match, if any."""
    if isinstance(value, str) and value in choices:
        return value
    if isinstance(value, str):
        same = [choice for choice in choices if choice.lower() == value.strip().lower()]
        if same:
            return same[0]
    close = difflib.get_close_matches(value, list(choices), n=1) if isinstance(value, str) and len(value) < 100 else []
    hint = f"; did you mean '{close[0]}'?" if close else ""
    raise TiltwellError(f"{name} must be one of {', '.join(choices)}; got {_describe(value)}{hint}")


def as_finite_array(value: ArrayLike, name: str, unit: str, *, ndim: int | None = None) -> NDArray[np.float64]:
    """Return ``value`` as a float64 array with no NaN or infinity, or raise; booleans,
    complex numbers and text are not real numbers here."""
    if _not_a_number(value) or (isinstance(value, (list, tuple)) and any(_not_a_number(v) for v in value)):
        raise TiltwellError(f"{name} [{unit}] must be an array of real numbers; got {_describe(value)}")
    try:
        raw = np.asarray(value)
        if raw.dtype.kind not in "iuf" and raw.dtype != object:
            raise TypeError
        array = np.asarray(raw, dtype=np.float64)
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


def read_only_copy(values: ArrayLike) -> NDArray[Any]:
    """A copy of ``values`` as a numpy array (its dtype kept) that cannot be written to: how
    results hand out their arrays."""
    copy = np.array(values)
    copy.setflags(write=False)
    return copy
