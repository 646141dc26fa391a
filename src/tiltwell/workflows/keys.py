"""Typed specifications of scenario keys: what each key holds, its unit, range and default.

Every field of a scenario section (:mod:`tiltwell.workflows.scenario`) is declared with
:func:`key`, which puts a :class:`KeySpec` in the field's metadata. Loading a file converts
each value with :meth:`KeySpec.convert`, which hands it to the one validation helper
(:mod:`tiltwell._base.validation`) chosen by the key's ``kind`` from a registry; listing the
keys (``tiltwell keys``) prints :meth:`KeySpec.describe`. The allowed range is an
:class:`~tiltwell._base.validation.Interval`, so messages and the listing print the same
range text.

A real-number key may carry a standard uncertainty (:data:`UNCERTAINTY_SYNTAX`): the
section keeps the nominal value, and the scenario keeps the uncertainties apart in an
:class:`Uncertainties` (:meth:`KeySpec.convert_uncertain` reads both).
"""

from __future__ import annotations

import dataclasses
import difflib
import math
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass
from typing import Any, Literal

from .._base.validation import (
    Interval,
    TiltwellError,
    as_boolean,
    as_choice,
    as_integer,
    as_real_table,
    as_real_tuple,
    as_scalar,
    as_text,
)

__all__ = ["Kind", "KeySpec", "UNCERTAINTY_SYNTAX", "Uncertainties", "key", "spec_of"]

#: What a key holds; each kind names one converter of the validation helper.
Kind = Literal["number", "integer", "even integer", "boolean", "text", "choice", "triple", "pairs"]

#: Where :func:`key` stores the specification in a dataclass field's metadata.
_METADATA = "tiltwell.key"

#: How a file gives an uncertain input, in the words of ``tiltwell keys``.
UNCERTAINTY_SYNTAX = ("a real-number key may carry a standard uncertainty (Gaussian, one sigma, in the key's unit): "
                      "key = { value = X, uncertainty = U }, or key = { value = X, relative = R } for U = R |X|; "
                      "sampling keeps to the key's range (the Gaussian truncated there)")

#: What a key that may not carry an uncertainty holds, in words.
_HOLDS = {"integer": "an integer", "even integer": "an even integer", "boolean": "true or false", "text": "text",
          "choice": "one of its choices", "triple": "three numbers", "pairs": "a list of pairs"}

#: The fields of an uncertain input's inline table; the last two exclude each other.
_UNCERTAIN_FIELDS = ("value", "uncertainty", "relative")


@dataclass(frozen=True)
class KeySpec:
    """One scenario key.

    Attributes
    ----------
    kind : Kind
        What the value is: a real ``number``, an ``integer`` (or ``even integer``), a
        ``boolean``, non-empty ``text``, a ``choice`` among ``choices``, a ``triple`` of
        numbers, or ``pairs`` (a list of two-number rows).
    unit : str
        SI unit of the number(s), "" for none.
    doc : str
        What the key means, one line.
    allowed : Interval
        The range of the number(s).
    choices : tuple of str
        The allowed values of a ``choice``.
    default : object
        The value when the key is left out; None means "not given".
    required : bool
        Whether the key must be given.
    form : str
        For ``triple`` and ``pairs``: what the list looks like, in words.
    """

    kind: Kind
    unit: str
    doc: str
    allowed: Interval = Interval()
    choices: tuple[str, ...] = ()
    default: Any = None
    required: bool = False
    form: str = ""

    def convert(self, label: str, value: Any) -> Any:
        """``value`` as the section's dataclass holds it (floats, ints, tuples), or a
        :class:`~tiltwell._base.validation.TiltwellError` naming ``label``, the unit, the
        range and the value."""
        return _CONVERTERS[self.kind](self, label, value)

    def convert_uncertain(self, label: str, value: Any) -> tuple[Any, float | None]:
        """``(nominal, standard uncertainty)`` of a value that may be an uncertain input
        (:data:`UNCERTAINTY_SYNTAX`); the uncertainty is None for a plain value, and is in
        the key's unit. The nominal value is checked like a plain one; an uncertainty on a
        key that is not one real number (an integer, a list, ...), a negative one, or a
        missing or unknown field of the table is a
        :class:`~tiltwell._base.validation.TiltwellError` naming ``label``.

        >>> spec_of(key("number", "Pa", "a pressure", 0.0, 1e8)).convert_uncertain("p", {"value": 2e5, "relative": 0.1})
        (200000.0, 20000.0)
        """
        if not isinstance(value, Mapping):
            return self.convert(label, value), None
        unit = f" [{self.unit}]" if self.unit else ""
        if self.kind != "number":
            holds = self.form or _HOLDS[self.kind]
            raise TiltwellError(f"{label} cannot carry an uncertainty: only a key holding one real number can "
                                f"(this one holds {holds}); got {value!r}")
        for name in value:
            if name not in _UNCERTAIN_FIELDS:
                close = difflib.get_close_matches(str(name), _UNCERTAIN_FIELDS, n=1)
                hint = f"; did you mean '{close[0]}'?" if close else f"; known: {', '.join(_UNCERTAIN_FIELDS)}"
                raise TiltwellError(f"unknown field '{name}' of the uncertain input {label}{hint}")
        if "value" not in value or ("uncertainty" in value) == ("relative" in value):
            raise TiltwellError(f"{label}{unit} as an uncertain input must be {{ value = X, uncertainty = U }} or "
                                f"{{ value = X, relative = R }}; got {value!r}")
        nominal = self.convert(label, value["value"])
        if "uncertainty" in value:
            return nominal, as_scalar(value["uncertainty"], f"{label} uncertainty", self.unit, low=0.0, strict=True)
        relative = as_scalar(value["relative"], f"{label} relative uncertainty", "", low=0.0, strict=True)
        return nominal, relative * abs(nominal)

    def describe(self, name: str) -> str:
        """One listing line: ``name [unit] in (0, 1] (default 0.6): meaning``, or
        ``(required)`` in place of the default."""
        unit = f" [{self.unit}]" if self.unit else ""
        if self.kind == "choice":
            allowed = " one of " + ", ".join(self.choices)
        elif self.allowed.bounded:
            allowed = f" in {self.allowed}" + (", even" if self.kind == "even integer" else "")
        else:
            allowed = ""
        default = " (required)" if self.required else "" if self.default in (None, ()) else f" (default {self.default!r})"
        return f"{name}{unit}{allowed}{default}: {self.doc}"


def _bounds(spec: KeySpec) -> dict[str, Any]:
    # the four fields by hand: dataclasses.asdict deep-copies, and this runs for every key of
    # every scenario a sweep, a search or an uncertainty sample validates (a fifth of a point's time)
    allowed = spec.allowed
    return {"low": allowed.low, "high": allowed.high, "low_open": allowed.low_open, "high_open": allowed.high_open}


def _integer(spec: KeySpec, label: str, value: Any) -> int:
    low, high = spec.allowed.low, spec.allowed.high
    return as_integer(value, label, int(low), None if high == math.inf else int(high), even=spec.kind == "even integer")


_CONVERTERS: dict[str, Callable[[KeySpec, str, Any], Any]] = {
    "number": lambda spec, label, value: as_scalar(value, label, spec.unit, strict=True, **_bounds(spec)),
    "integer": _integer,
    "even integer": _integer,
    "boolean": lambda spec, label, value: as_boolean(value, label),
    "text": lambda spec, label, value: as_text(value, label),
    "choice": lambda spec, label, value: as_choice(value, label, spec.choices),
    "triple": lambda spec, label, value: as_real_tuple(value, label, spec.unit, length=3, form=spec.form,
                                                       **_bounds(spec)),
    "pairs": lambda spec, label, value: as_real_table(value, label, spec.unit, columns=2, form=spec.form,
                                                      **_bounds(spec)),
}


def key(kind: Kind, unit: str, doc: str, low: float = -math.inf, high: float = math.inf, *, open_low: bool = False,
        default: Any = None, required: bool = False, choices: tuple[str, ...] = (), form: str = "") -> Any:
    """A dataclass field (default ``default``) carrying its :class:`KeySpec`.

    ``low``/``high`` bound the number(s), ``open_low`` excludes ``low``; an integer key's
    finite bounds are kept as ints, so its range prints as the integer check prints it.

    >>> spec_of(key("number", "m", "a length", 0.0, 1.0, open_low=True)).describe("x")
    'x [m] in (0, 1]: a length'
    >>> spec_of(key("integer", "", "a count", 1, 1e5, default=10)).describe("n")
    'n in [1, 100000] (default 10): a count'
    """
    if kind in ("integer", "even integer"):
        low, high = (int(v) if math.isfinite(v) else v for v in (low, high))
    spec = KeySpec(kind, unit, doc, Interval(low, high, low_open=open_low), choices, default, required, form)
    return dataclasses.field(default=default, metadata={_METADATA: spec})


def spec_of(item: dataclasses.Field[Any]) -> KeySpec:
    """The :class:`KeySpec` of a section field declared with :func:`key`."""
    spec = item.metadata[_METADATA]
    assert isinstance(spec, KeySpec)
    return spec


@dataclass(frozen=True)
class Uncertainties(Mapping[str, float]):
    """The standard uncertainties of a scenario's inputs: ``"section.key"`` -> uncertainty
    in the key's unit. Read-only, hashable and compared by content (the entries are kept
    sorted), so a :class:`~tiltwell.workflows.scenario.Scenario` holding one stays equal,
    hashable and usable as a cache key.

    >>> u = Uncertainties({"beam.pressure": 3e4})
    >>> u["beam.pressure"], dict(u) == {"beam.pressure": 3e4}, u == Uncertainties((("beam.pressure", 3e4),))
    (30000.0, True, True)
    """

    entries: tuple[tuple[str, float], ...] = ()

    def __init__(self, entries: Mapping[str, float] | tuple[tuple[str, float], ...] = ()) -> None:
        pairs = entries.items() if isinstance(entries, Mapping) else entries
        object.__setattr__(self, "entries", tuple(sorted((str(name), float(u)) for name, u in pairs)))

    def __getitem__(self, name: str) -> float:
        for known, uncertainty in self.entries:
            if known == name:
                return uncertainty
        raise KeyError(name)

    def __iter__(self) -> Iterator[str]:
        return iter(name for name, _ in self.entries)

    def __len__(self) -> int:
        return len(self.entries)

