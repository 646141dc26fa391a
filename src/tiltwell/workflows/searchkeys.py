"""The varied keys of a design search (:mod:`tiltwell.workflows.search`) and its points.

A :class:`Vary` names one scenario key ``section.key`` and its values (a grid or a list)
or its range (for a sample); :func:`parse_vary` reads the command line's
``section.key=LOW:HIGH[:N][:log]`` and ``section.key=A,B,C``; every value is checked by the
key's own converter, so a bad one is refused with the key's unit and range.
:func:`design_points` makes the grid (the cartesian product, first key slowest) or a
scrambled Latin-hypercube or Sobol' sample (:mod:`scipy.stats.qmc`) of the ranges.
"""

from __future__ import annotations

import itertools
import math
import warnings
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.stats import qmc

from .._base.validation import TiltwellError, as_integer
from .scenario import key_spec

__all__ = ["MAX_POINTS", "Vary", "check_varies", "design_points", "key_value", "make_vary", "parse_vary"]

#: Largest number of points of one search (a grid's product or a sample).
MAX_POINTS = 1_000_000

@dataclass(frozen=True)
class Vary:
    """One varied key: ``name`` is ``section.key``; ``values`` the points of a grid or list,
    ``low``/``high`` the range a sample fills (a ``LOW:HIGH:N`` grid has both). ``log``
    spaces a grid and a sample evenly in the logarithm."""

    name: str
    values: tuple[float, ...] = ()
    low: float | None = None
    high: float | None = None
    log: bool = False

    @property
    def unit(self) -> str:
        """The key's SI unit."""
        return key_spec(self.name).unit

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "values": list(self.values), "low": self.low, "high": self.high, "log": self.log}


def _check_value(name: str, value: float) -> float:
    """``value`` through the key's own converter: the range check and its message."""
    spec = key_spec(name)
    if spec.kind not in ("number", "integer", "even integer"):
        raise TiltwellError(f"{name} holds {spec.kind}; a search varies keys that hold one number")
    section, key_name = name.split(".")
    return float(spec.convert(f"[{section}] {key_name}", int(value) if spec.kind != "number" and value == int(value)
                              else value))


def key_value(name: str, value: float) -> float:
    """``value`` as the key ``name`` holds it: a real number as is, an integer key rounded
    to the nearest integer, an even-integer key to the nearest even one."""
    kind = key_spec(name).kind
    if kind == "number":
        return float(value)
    return float(2 * round(value / 2)) if kind == "even integer" else float(round(value))


def make_vary(name: str, *, values: Iterable[float] = (), low: float | None = None, high: float | None = None,
              count: int | None = None, log: bool = False) -> Vary:
    """A checked :class:`Vary`: a list of ``values``, or a range ``low``..``high`` (with
    ``count`` points for a grid, without for a sample), each value within the key's range."""
    spec = key_spec(name)
    listed = tuple(_check_value(name, v) for v in values)
    if listed and (low is not None or high is not None):
        raise TiltwellError(f"{name}: give a list of values or a range LOW:HIGH, not both")
    if not listed:
        if low is None or high is None:
            raise TiltwellError(f"{name}: give a range LOW:HIGH[:N] or a list A,B,C")
        low, high = _check_value(name, low), _check_value(name, high)
        if not low < high:
            raise TiltwellError(f"{name} [{spec.unit}]: the range must have LOW < HIGH; got {low:g}:{high:g}")
        if log and low <= 0.0:
            raise TiltwellError(f"{name} [{spec.unit}]: a logarithmic range needs LOW > 0; got {low:g}")
        if count is not None:
            count = as_integer(count, f"{name} points", 2, MAX_POINTS)
            grid = np.geomspace(low, high, count) if log else np.linspace(low, high, count)
            if spec.kind != "number":
                grid = np.unique([key_value(name, float(v)) for v in grid])
            listed = tuple(_check_value(name, float(v)) for v in grid)
    return Vary(name, listed, low, high, log)


def parse_vary(text: str) -> Vary:
    """``section.key=LOW:HIGH[:N]`` (a range; ``N`` points make it a grid; a trailing
    ``:log`` spaces it logarithmically) or ``section.key=A,B,C`` (a list) as a :class:`Vary`.

    >>> parse_vary("deceleration.deceleration=1e4:3e4:3").values
    (10000.0, 20000.0, 30000.0)
    """
    name, equals, spec = str(text).partition("=")
    name, spec = name.strip(), spec.strip()
    form = "section.key=LOW:HIGH[:N][:log] or section.key=A,B,C"
    if not equals or not name or not spec:
        raise TiltwellError(f"a varied key is {form}; got {text!r}")
    parts = [p.strip() for p in spec.split(":" if ":" in spec else ",")]
    log = ":" in spec and parts[-1].lower() == "log"
    parts = parts[:-1] if log else parts
    try:
        numbers = [float(p) for p in parts]
    except ValueError:
        raise TiltwellError(f"a varied key is {form}; got {text!r}") from None
    if ":" not in spec:
        return make_vary(name, values=numbers)
    if len(numbers) not in (2, 3) or (len(numbers) == 3 and numbers[2] != int(numbers[2])):
        raise TiltwellError(f"a varied key is {form}; got {text!r}")
    return make_vary(name, low=numbers[0], high=numbers[1], count=int(numbers[2]) if len(numbers) == 3 else None,
                     log=log)


def check_varies(varies: Sequence[Vary | str] | str) -> list[Vary]:
    """``varies`` as a list of :class:`Vary` (a text is read by :func:`parse_vary`), refused
    when empty, with a key twice, or with both the deceleration and the length (one fixes
    the other)."""
    items = [varies] if isinstance(varies, str) else varies
    if not isinstance(items, (list, tuple)):
        raise TiltwellError(f"varies must be a list of Vary or of texts section.key=LOW:HIGH[:N]; "
                            f"got {type(varies).__name__}")
    checked: list[Vary] = []
    for v in items:
        item = parse_vary(v) if isinstance(v, str) else v
        if not isinstance(item, Vary):
            raise TiltwellError(f"each varied key must be a Vary or a text section.key=LOW:HIGH[:N]; "
                                f"got {type(v).__name__}")
        checked.append(item)
    if not checked:
        raise TiltwellError("a search needs at least one varied key")
    names = [v.name for v in checked]
    for name in names:
        if names.count(name) > 1:
            raise TiltwellError(f"{name} is varied twice; give each key once")
    if "deceleration.deceleration" in names and "deceleration.length" in names:
        raise TiltwellError("vary deceleration.deceleration or deceleration.length, not both: one fixes the other "
                            "at the target final velocity")
    return checked


def design_points(varies: Sequence[Vary | str] | str, sample: int | None = None, *, method: str = "lhs",
                  seed: int = 0) -> list[dict[str, float]]:
    """The points of a search, each a ``{name: value}`` dict.

    Without ``sample``: the grid, the cartesian product of every key's values (first key
    slowest, as :func:`itertools.product`). With ``sample`` points: a scrambled Latin
    hypercube (``method="lhs"``) or Sobol' sequence (``"sobol"``; a power of two keeps its
    balance) of :mod:`scipy.stats.qmc` with ``seed``, scaled to each key's range (in the
    logarithm for a ``log`` key; an integer key rounded).
    """
    varies = check_varies(varies)
    if sample is None:
        missing = [v.name for v in varies if not v.values]
        if missing:
            raise TiltwellError(f"{', '.join(missing)}: a range without N points needs a sample size (--sample N)")
        if math.prod(len(v.values) for v in varies) > MAX_POINTS:
            raise TiltwellError(f"the grid has more than {MAX_POINTS} points; use fewer or a sample")
        return [dict(zip((v.name for v in varies), combo)) for combo in itertools.product(*(v.values for v in varies))]
    count = as_integer(sample, "sample", 1, MAX_POINTS)
    listed = [v.name for v in varies if v.low is None]
    if listed:
        raise TiltwellError(f"{', '.join(listed)}: a sample fills ranges; give LOW:HIGH instead of a list")
    if method == "lhs":
        sampler: qmc.QMCEngine = qmc.LatinHypercube(d=len(varies), seed=np.random.default_rng(seed))
    elif method == "sobol":
        sampler = qmc.Sobol(d=len(varies), scramble=True, seed=np.random.default_rng(seed))
    else:
        raise TiltwellError(f"method must be 'lhs' or 'sobol'; got {method!r}")
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=".*balance properties of Sobol.*")
        unit = sampler.random(count)
    points = []
    for row in unit:
        point = {}
        for v, u in zip(varies, row):
            low, high = float(v.low), float(v.high)  # type: ignore[arg-type]
            value = math.exp(math.log(low) + u * math.log(high / low)) if v.log else low + u * (high - low)
            point[v.name] = key_value(v.name, min(max(value, low), high))
        points.append(point)
    return points
