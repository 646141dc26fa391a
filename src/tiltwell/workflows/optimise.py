"""The best design under the limits, and the trade-off fronts of a search.

:func:`optimise` maximises one figure of a search row (slow particles per shot by default,
the energetic captured fraction where the scenario has no absolute yield) over the
continuous ranges of the varied keys with :func:`scipy.optimize.differential_evolution`,
subject to the scenario's hardware limits (``[limits]``: voltage, current, current density,
temperature rise, stress, force) and a device-length limit. A design beyond a limit, or
with no bound well, scores worse than every design within them (a penalty growing with how
far it is beyond: the feasibility rule of constrained evolutionary search), so the search
keeps to the buildable region and settles on its edge where the figure rises towards it.
The :class:`Optimum` names the best design, how close it is to each limit and the
figure's sensitivity to each key there.

:func:`pareto_front` is the non-dominated set of a search's rows, a gain maximised against
a cost minimised (yield against device length, or against peak voltage).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import differential_evolution

from .._base.validation import TiltwellError, as_integer
from ..physics.limits import LIMIT_UNITS
from .scenario import Scenario, check_scenario, key_spec
from .search import COLUMNS, SearchResult, Vary, check_varies, evaluate, key_value, point_scenario

__all__ = ["FIGURES", "Optimum", "front_of", "optimise", "pareto_front"]

#: Columns of a row an optimiser may maximise.
FIGURES: tuple[str, ...] = ("slow_particles", "slow_particles_low", "captured_fraction_energy",
                            "captured_fraction_overlap", "captured_fraction_mc", "longitudinal_acceptance",
                            "transverse_acceptance", "acceptance_6d")

#: Score of a design that could not be computed (worse than any design beyond a limit).
FAILED_SCORE = 1e6

#: Relative step of the sensitivity's central difference (an integer key steps by 1).
SENSITIVITY_STEP = 1e-2


def pareto_front(gain: ArrayLike, cost: ArrayLike) -> NDArray[np.bool_]:
    """Mask of the points no other point dominates, maximising ``gain`` and minimising
    ``cost``: ``j`` dominates ``i`` when ``gain[j] >= gain[i]`` and ``cost[j] <= cost[i]``
    with one of them strict. Points with a NaN are never on the front; identical points
    are both on it. One sort, O(n log n)."""
    try:
        g, c = np.asarray(gain, dtype=float), np.asarray(cost, dtype=float)
    except (TypeError, ValueError):
        raise TiltwellError("gain and cost must be arrays of real numbers (NaN: not on the front)") from None
    if g.shape != c.shape or g.ndim != 1:
        raise TiltwellError(f"gain and cost must be 1-D of one length; got shapes {g.shape} and {c.shape}")
    mask = np.zeros(g.size, dtype=bool)
    kept = np.flatnonzero(np.isfinite(g) & np.isfinite(c))
    best_gain, best_cost = -math.inf, math.nan
    for k in kept[np.lexsort((-g[kept], c[kept]))]:  # cost rising, within one cost the gain falling
        if g[k] > best_gain or (g[k] == best_gain and c[k] == best_cost):
            mask[k] = True
            best_gain, best_cost = g[k], c[k]
    return mask


def front_of(result: SearchResult, cost: str = "length", gain: str | None = None,
             feasible_only: bool = True) -> NDArray[np.intp]:
    """Indices of ``result``'s points on the front of ``gain`` (default
    :meth:`~tiltwell.workflows.search.SearchResult.figure_name`) against ``cost`` (a column
    such as ``length`` or ``worst_voltage``), in rising cost; only feasible points unless
    ``feasible_only`` is False."""
    gain = result.figure_name() if gain is None else gain
    for name in (gain, cost):
        if name not in COLUMNS:
            raise TiltwellError(f"unknown search column {name!r}; known: {', '.join(COLUMNS)}")
    g, c = result.values(gain), result.values(cost)
    if feasible_only:
        g = np.where(result.values("feasible") == 1.0, g, np.nan)
    on = np.flatnonzero(pareto_front(g, c))
    return on[np.argsort(c[on], kind="stable")]


def _violation(row: Mapping[str, Any], max_length: float | None) -> float:
    """How far a row is beyond its limits, summed as relative excesses (0 within all)."""
    excess = 0.0 if row["bound"] else 1.0
    for name in LIMIT_UNITS:
        margin = row.get(f"{name}_margin")
        if margin is not None and margin < 0.0:
            excess += -margin / (1.0 + margin) if margin > -1.0 else 1.0
    if max_length is not None and row["length"] is not None and row["length"] > max_length:
        excess += row["length"] / max_length - 1.0
    return excess


@dataclass
class _Objective:
    """Minus the figure of a feasible design, ``1 + violation`` of an infeasible one; a
    picklable callable so ``differential_evolution`` can spread it over workers."""

    scenario: Scenario
    varies: tuple[Vary, ...]
    figure: str
    max_length: float | None
    seen: dict[tuple[float, ...], tuple[float, dict[str, Any] | None, str]] = field(default_factory=dict)

    def point(self, x: ArrayLike) -> dict[str, float]:
        out = {}
        for v, xi in zip(self.varies, np.asarray(x, dtype=float)):
            value = math.exp(xi) if v.log else float(xi)
            out[v.name] = key_value(v.name, value)
        return out

    def __call__(self, x: NDArray[np.float64]) -> float:
        key = tuple(float(xi) for xi in x)
        if key not in self.seen:
            try:
                row = evaluate(self.scenario, self.point(x), self.max_length)
            except Exception as error:  # a design that cannot be computed is the worst design
                self.seen[key] = (FAILED_SCORE, None, str(error))
            else:
                excess = _violation(row, self.max_length)
                value = row.get(self.figure)
                score = 1.0 + excess if excess > 0.0 else (FAILED_SCORE if value is None else -float(value))
                self.seen[key] = (score, row, "")
        return self.seen[key][0]


@dataclass(frozen=True)
class Optimum:
    """The best design an :func:`optimise` run found.

    Attributes
    ----------
    point : dict
        The varied keys' values, ``section.key`` -> value (SI).
    scenario : Scenario
        The scenario at that point.
    row : dict
        Its :func:`~tiltwell.workflows.search.evaluate` row.
    figure : str
        The maximised column; ``value`` its value there.
    feasible : bool
        Whether the design is within every limit (False: no design in the ranges was).
    margins : dict
        ``limit / value - 1`` of each hardware quantity and of the length (where limited):
        how close each limit is (0: on it).
    sensitivity : dict
        ``d ln(figure) / d ln(key)`` at the point for each varied key, by a central
        difference of :data:`SENSITIVITY_STEP` (one-sided at a range's end; limits aside).
    evaluations : int
        Designs computed; ``message`` the optimiser's own word on how it stopped.
    """

    point: dict[str, float]
    scenario: Scenario
    row: dict[str, Any]
    figure: str
    value: float
    feasible: bool
    margins: dict[str, float]
    sensitivity: dict[str, float]
    evaluations: int
    message: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready numbers (SI)."""
        return {"point": self.point, "figure": self.figure, "value": self.value, "feasible": self.feasible,
                "margins": self.margins, "sensitivity": self.sensitivity, "evaluations": self.evaluations,
                "message": self.message, "row": self.row}

    def lines(self) -> list[str]:
        """The optimum in words: the design, the figure, each limit's margin, each sensitivity."""
        out = [f"best design ({'within every limit' if self.feasible else 'NO design in the ranges meets the limits'}):"]
        out += [f"  {name} = {value:.6g} {key_spec(name).unit}" for name, value in self.point.items()]
        out.append(f"  {self.figure} = {self.value:.4g}")
        out += [f"  margin to the {name} limit: {100 * margin:+.1f} %" for name, margin in self.margins.items()]
        out += [f"  d ln({self.figure}) / d ln({name}) = {value:+.3g}" for name, value in self.sensitivity.items()]
        return out


def _bounds(varies: Sequence[Vary]) -> list[tuple[float, float]]:
    missing = [v.name for v in varies if v.low is None or v.high is None]
    if missing:
        raise TiltwellError(f"{', '.join(missing)}: the optimiser needs a range LOW:HIGH for each key")
    return [(math.log(v.low), math.log(v.high)) if v.log else (float(v.low), float(v.high))  # type: ignore[arg-type]
            for v in varies]


def _sensitivity(objective: _Objective, x: NDArray[np.float64], bounds: Sequence[tuple[float, float]],
                 value: float) -> dict[str, float]:
    out = {}
    for j, v in enumerate(objective.varies):
        integer = key_spec(v.name).kind != "number"
        here = objective.point(x)[v.name]
        ends = []
        for sign in (-1.0, 1.0):
            moved = here + sign if integer else here * (1.0 + sign * SENSITIVITY_STEP)
            xj = math.log(moved) if v.log else moved
            if not bounds[j][0] <= xj <= bounds[j][1] or moved <= 0.0:
                ends.append((here, value))
                continue
            trial = x.copy()
            trial[j] = xj
            objective(trial)
            row = objective.seen[tuple(float(t) for t in trial)][1]
            ends.append((moved, math.nan if row is None or row.get(objective.figure) is None
                         else float(row[objective.figure])))
        (x0, f0), (x1, f1) = ends
        ok = f0 > 0.0 and f1 > 0.0 and x0 > 0.0 and x1 > 0.0 and x1 != x0
        out[v.name] = math.log(f1 / f0) / math.log(x1 / x0) if ok else math.nan
    return out


def optimise(scenario: Scenario, varies: Sequence[Vary | str] | str, figure: str | None = None, *,
             max_length: float | None = None, seed: int = 0, popsize: int = 10, maxiter: int = 40,
             tol: float = 1e-4, workers: int | Callable[[Callable[..., Any], Iterable[Any]], Iterable[Any]] = 1,
             polish: bool = False) -> Optimum:
    """Maximise ``figure`` (:data:`FIGURES`; default ``slow_particles``, else the energetic
    captured fraction where the scenario has no absolute yield) over the ranges of
    ``varies`` within the scenario's limits and ``max_length`` [m].

    :func:`scipy.optimize.differential_evolution` (``seed``, ``popsize`` per key,
    ``maxiter`` generations, relative ``tol``; an integer key is searched as an integer; a
    ``log`` key in its logarithm). ``workers``: processes, or a map-like callable such as a
    Dask executor's ``map``. ``polish``: end with a local gradient search (off: the
    figure is a sampled estimate and its limits are edges, where a gradient search gains
    nothing).
    """
    check_scenario(scenario)
    varies = tuple(check_varies(varies))
    bounds = _bounds(varies)
    if figure is None:
        figure = "slow_particles" if scenario.beam.pressure is not None else "captured_fraction_energy"
    if figure not in FIGURES:
        raise TiltwellError(f"figure must be one of {', '.join(FIGURES)}; got {figure!r}")
    if figure.startswith("slow_particles") and scenario.beam.pressure is None:
        raise TiltwellError(f"{figure} needs the absolute yield: give [beam] pressure and seed_fraction, or "
                            "optimise captured_fraction_energy")
    if max_length is not None and not (isinstance(max_length, (int, float)) and math.isfinite(max_length)
                                       and max_length > 0):
        raise TiltwellError(f"max_length [m] must be a positive number; got {max_length!r}")
    objective = _Objective(scenario, varies, figure, max_length)
    integrality = [key_spec(v.name).kind != "number" and not v.log for v in varies]
    found = differential_evolution(objective, bounds, seed=seed, popsize=as_integer(popsize, "popsize", 2, 1000),
                                   maxiter=as_integer(maxiter, "maxiter", 1, 100_000), tol=tol, polish=polish,
                                   workers=workers, updating="deferred" if workers != 1 else "immediate",
                                   integrality=integrality if any(integrality) else None, init="sobol")
    x = np.asarray(found.x, dtype=float)
    objective(x)  # computed here too when the workers were other processes
    _, row, error = objective.seen[tuple(float(t) for t in x)]
    if row is None:
        raise TiltwellError(f"no design in the ranges could be computed ({error})")
    point = objective.point(x)
    value = float(row[figure]) if row.get(figure) is not None else math.nan
    margins = {name: float(row[f"{name}_margin"]) for name in LIMIT_UNITS if row.get(f"{name}_margin") is not None}
    if max_length is not None and row["length"] is not None:
        margins["length"] = max_length / row["length"] - 1.0
    return Optimum(point, point_scenario(scenario, point), row, figure, value, _violation(row, max_length) == 0.0,
                   margins, _sensitivity(objective, x, bounds, value), int(found.nfev), str(found.message))
