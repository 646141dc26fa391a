"""Design searches: many scenario keys varied together, every point a whole summary with its
hardware verdicts, on any executor, kept point by point so a killed search resumes.

A search varies numeric scenario keys named ``section.key`` (:class:`Vary`, written on the
command line as ``section.key=LOW:HIGH[:N]`` or ``section.key=A,B,C``; both live in
:mod:`tiltwell.workflows.searchkeys` and are importable from here) over a grid (the
cartesian product, first key slowest) or over a space-filling sample of the ranges (Latin
hypercube or Sobol', :mod:`scipy.stats.qmc`). Each point is the scenario with those keys
replaced (:func:`point_scenario`) and becomes one row (:func:`evaluate`): the
:func:`~tiltwell.workflows.report.summarise` numbers (slow particles per shot with its 68 %
interval where the absolute yield exists, the three captured fractions, acceptances,
length, duration, coils) and, where the scenario has a ``[coils]`` row, the worst value of
each hardware quantity over the row and the shot with its margin against ``[limits]``
(:func:`~tiltwell.workflows.coilreport.row_load`).

Finished points go to a :class:`SearchStore` (JSON lines: one header line naming the
scenario and the points, then one line per finished point, each appended in one ``write``
and flushed to disk), so a search stopped at any instant (Ctrl-C, SIGKILL, a lost worker)
starts again where it was, recomputes nothing finished and never loses a finished point.
A point that fails keeps its error as its row and the search goes on; a resumed search
runs its failed points again.
"""

from __future__ import annotations

import hashlib
import itertools
import math
import os
from collections.abc import Mapping, Sequence
from concurrent.futures import Executor, Future, as_completed
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray
from tqdm.auto import tqdm

from .._base.files import atomic_write_bytes, table_text, write_table
from .._base.validation import TiltwellError
from ..physics.limits import LIMIT_UNITS
from .coilreport import row_load
from .report import UNITS, summarise
from .scenario import Scenario, check_scenario, dumps, key_spec
from .searchkeys import Vary, check_varies, design_points, key_value, make_vary, parse_vary
from .searchstore import STORE_FORMAT, SearchStore, read_store

__all__ = ["COLUMNS", "COLUMN_UNITS", "SearchResult", "SearchStore", "Vary", "check_varies", "design_points", "evaluate",
           "key_value", "make_vary", "parse_vary", "point_scenario", "read_search", "search"]

#: Summary numbers of every search row, in order (SI units: :data:`tiltwell.workflows.report.UNITS`).
SUMMARY_COLUMNS: tuple[str, ...] = (
    "deceleration", "critical_deceleration", "final_velocity", "length", "duration", "coils",
    "longitudinal_acceptance", "transverse_acceptance", "acceptance_6d", "depth",
    "captured_fraction_overlap", "captured_fraction_energy", "captured_fraction_energy_error",
    "captured_fraction_mc", "captured_fraction_mc_error",
    "slow_particles", "slow_particles_low", "slow_particles_high",
)

#: Hardware numbers of a row with a coil row: the worst value of each quantity of
#: :data:`tiltwell.physics.limits.LIMIT_UNITS` (``worst_voltage`` ...) and its margin
#: ``limit / value - 1`` (``voltage_margin`` ..., negative beyond the limit).
HARDWARE_COLUMNS: tuple[str, ...] = tuple(
    itertools.chain.from_iterable((f"worst_{name}", f"{name}_margin") for name in LIMIT_UNITS))

#: Every number column of a row after the varied keys (``bound``, ``hardware_passed`` and
#: ``feasible`` are 1 or 0; ``feasible``: bound, within every hardware limit and the length limit).
COLUMNS: tuple[str, ...] = SUMMARY_COLUMNS + HARDWARE_COLUMNS + ("bound", "hardware_passed", "feasible")

#: SI unit of every column.
COLUMN_UNITS: dict[str, str] = ({name: UNITS[name] for name in SUMMARY_COLUMNS}
                                | {f"worst_{name}": unit for name, unit in LIMIT_UNITS.items()}
                                | {name: "1" for name in COLUMNS if name not in SUMMARY_COLUMNS
                                   and not name.startswith("worst_")})

def point_scenario(scenario: Scenario, point: Mapping[str, float]) -> Scenario:
    """``scenario`` with each ``section.key`` of ``point`` replaced (an integer key as an
    integer); varying ``[deceleration] deceleration`` drops ``length`` and vice versa, as
    the two fix each other at the target final velocity."""
    changes: dict[str, dict[str, Any]] = {}
    for name, value in point.items():
        section, key_name = name.split(".")
        changes.setdefault(section, {})[key_name] = int(value) if key_spec(name).kind != "number" else float(value)
    if "deceleration" in changes.get("deceleration", {}):
        changes["deceleration"]["length"] = None
    elif "length" in changes.get("deceleration", {}):
        changes["deceleration"]["deceleration"] = None
    for section, values in changes.items():
        scenario = scenario.replace(section, **values)
    return scenario


def _finite(value: Any) -> float | None:
    if value is None or isinstance(value, str):
        return None
    number = float(value)
    return number if math.isfinite(number) else None


def evaluate(scenario: Scenario, point: Mapping[str, float], max_length: float | None = None) -> dict[str, Any]:
    """One search row: the point's varied keys, then :data:`COLUMNS` (None where not
    computed, e.g. the hardware of a scenario without ``[coils]`` or the tracked fraction
    with ``[simulation] track = false``), and the summary's ``trap_model``."""
    varied = point_scenario(scenario, point)
    summary = summarise(varied)
    row: dict[str, Any] = dict(point)
    row.update({name: _finite(summary.get(name)) for name in SUMMARY_COLUMNS})
    row["bound"] = 1.0 if summary["bound"] else 0.0
    passed = True
    if varied.coils is not None:
        load = row_load(varied)
        for verdict in load.verdicts:
            row[f"worst_{verdict.quantity}"] = verdict.value
            row[f"{verdict.quantity}_margin"] = _finite(verdict.margin)
        passed = load.passed
        row["hardware_passed"] = 1.0 if passed else 0.0
    short = max_length is None or (row["length"] is not None and row["length"] <= max_length)
    row["feasible"] = 1.0 if (summary["bound"] and passed and short) else 0.0
    row["trap_model"] = summary["trap_model"]
    return {name: row.get(name) for name in (*point, *COLUMNS, "trap_model")}


def _task(task: tuple[Scenario, dict[str, float], float | None]) -> dict[str, Any]:
    """One point for an executor (a top-level function, so processes and clusters can send it)."""
    return evaluate(*task)


def _header(scenario: Scenario, varies: Sequence[Vary], points: Sequence[Mapping[str, float]],
            grid: bool, max_length: float | None) -> dict[str, Any]:
    text = dumps(scenario)
    return {"format": STORE_FORMAT, "scenario_sha256": hashlib.sha256(text.encode()).hexdigest(), "scenario": text,
            "varies": [v.to_dict() for v in varies], "grid": grid, "max_length": max_length,
            "points": [dict(p) for p in points]}


@dataclass(frozen=True)
class SearchResult:
    """A search's points and rows, in the order of the points.

    ``rows[i]`` is point ``i``'s :func:`evaluate` row, or None where it failed
    (``errors[i]`` says why) or has not run. ``grid`` says whether the points are a grid
    (then :meth:`to_dataset` labels them by the keys' values)."""

    scenario_text: str
    varies: tuple[Vary, ...]
    points: tuple[dict[str, float], ...]
    rows: tuple[dict[str, Any] | None, ...]
    errors: Mapping[int, str] = field(default_factory=dict)
    grid: bool = False
    max_length: float | None = None

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(v.name for v in self.varies)

    def values(self, column: str) -> NDArray[np.float64]:
        """One column over the points [SI], NaN where not computed or failed."""
        out = np.full(len(self.points), np.nan)
        for i, row in enumerate(self.rows):
            if row is not None and row.get(column) is not None:
                out[i] = float(row[column])
        return out

    def figure_name(self) -> str:
        """``slow_particles`` where the absolute yield exists, else the energetic captured fraction."""
        return "slow_particles" if np.any(np.isfinite(self.values("slow_particles"))) else "captured_fraction_energy"

    def to_csv(self, path: str | os.PathLike[str] | None = None) -> str:
        """One CSV row per point in tiltwell's table layout (:func:`~tiltwell._base.files.table_text`):
        the varied keys, :data:`COLUMNS`, the trap model and the error of a failed point;
        written atomically to ``path`` if given."""
        columns = [(name, key_spec(name).unit or "1") for name in self.names]
        columns += [(name, COLUMN_UNITS[name]) for name in COLUMNS] + [("trap_model", "text"), ("error", "text")]
        table = []
        for i, (point, row) in enumerate(zip(self.points, self.rows)):
            cells: list[Any] = [point[name] for name in self.names]
            cells += [None if row is None else row.get(name) for name in COLUMNS]
            table.append(cells + [None if row is None else row.get("trap_model"), self.errors.get(i)])
        limit = "" if self.max_length is None else f"; length limit {self.max_length:g} m"
        title = f"tiltwell design search: {len(self.points)} points over {', '.join(self.names)}"
        note = ("each row: tiltwell.workflows.search.evaluate of the scenario with the keys so changed" + limit
                + "; empty cell: not computed; hardware rows size pulsed high-current coils: follow local "
                "electrical-safety codes")
        if path is None:
            return table_text(title, columns, table, caution=note)
        return write_table(Path(path), title, columns, table, caution=note)

    def to_dataset(self) -> Any:
        """A grid's rows as an :class:`xarray.Dataset`: one dimension per varied key (named
        ``section.key``, its values as coordinates), one variable per column of
        :data:`COLUMNS`, each with its ``units``; NaN where not computed or failed."""
        import xarray as xr

        if not self.grid:
            raise TiltwellError("only a grid search is a labelled data set; write a sampled search as CSV")
        shape = tuple(len(v.values) for v in self.varies)
        coords = {v.name: (v.name, np.asarray(v.values), {"units": v.unit or "1"}) for v in self.varies}
        variables = {name: (self.names, self.values(name).reshape(shape), {"units": COLUMN_UNITS[name]})
                     for name in COLUMNS}
        attrs = {"title": "tiltwell design search", "scenario": self.scenario_text,
                 "max_length": "none" if self.max_length is None else self.max_length,
                 "failed_points": len(self.errors)}
        return xr.Dataset(variables, coords=coords, attrs=attrs)

    def to_netcdf(self, path: str | os.PathLike[str]) -> Path:
        """:meth:`to_dataset` written atomically as netCDF (version 3, scipy's writer)."""
        data = self.to_dataset().to_netcdf(engine="scipy")
        return atomic_write_bytes(path, bytes(data))


def read_search(path: str | os.PathLike[str]) -> SearchResult:
    """The :class:`SearchResult` held by a results file (finished points; others None)."""
    header, done, _ = read_store(Path(path))
    varies = tuple(Vary(v["name"], tuple(v["values"]), v["low"], v["high"], v["log"]) for v in header["varies"])
    return _result(header, varies, done)


def _result(header: Mapping[str, Any], varies: tuple[Vary, ...], done: Mapping[int, Mapping[str, Any]]) -> SearchResult:
    points = tuple(dict(p) for p in header["points"])
    rows = tuple(dict(done[i]["row"]) if i in done and "row" in done[i] else None for i in range(len(points)))
    errors = {i: str(entry["error"]) for i, entry in done.items() if "error" in entry}
    return SearchResult(header["scenario"], varies, points, rows, errors, header["grid"], header["max_length"])


def _describe(error: BaseException) -> str:
    text = str(error) if isinstance(error, TiltwellError) else f"{type(error).__name__}: {error}"
    return " ".join(text.split())[:500]


def search(scenario: Scenario, varies: Sequence[Vary | str] | str, *, sample: int | None = None, method: str = "lhs",
           seed: int = 0, max_length: float | None = None, executor: Executor | None = None,
           store: str | os.PathLike[str] | None = None, progress: bool = False) -> SearchResult:
    """Evaluate every point of :func:`design_points` (``varies``, ``sample``, ``method``,
    ``seed``) with :func:`evaluate` and return them as a :class:`SearchResult`.

    ``max_length`` [m]: a device-length limit; a longer point is not ``feasible``.
    ``executor``: any :class:`concurrent.futures.Executor` (a process pool, a Dask client's
    ``get_executor()``); points are submitted together and kept as they finish. ``store``:
    a results file (:class:`SearchStore`): finished points there are not run again, and
    each point is written as soon as it finishes. A point that raises keeps the error and
    the search goes on; resumed, it runs again (a lost worker says nothing of the design);
    a KeyboardInterrupt cancels what has not started and propagates
    (the store keeps everything finished). ``progress``: a tqdm bar over points.
    """
    check_scenario(scenario)
    varies = check_varies(varies)
    if max_length is not None and not (isinstance(max_length, (int, float)) and math.isfinite(max_length)
                                       and max_length > 0):
        raise TiltwellError(f"max_length [m] must be a positive number; got {max_length!r}")
    points = design_points(varies, sample, method=method, seed=seed)
    header = _header(scenario, varies, points, sample is None, max_length)
    writer = SearchStore(store) if store is not None else None
    done: dict[int, dict[str, Any]] = writer.start(header) if writer is not None else {}
    todo = [i for i in range(len(points)) if "row" not in done.get(i, {})]  # a failed point runs again
    bar = tqdm(total=len(points), initial=len(points) - len(todo), desc="search", unit="point", disable=not progress)

    def keep(index: int, row: dict[str, Any] | None, error: BaseException | None) -> None:
        entry: dict[str, Any] = {"index": index, "row": row} if error is None else {"index": index,
                                                                                   "error": _describe(error)}
        done[index] = entry
        if writer is not None:
            writer.append(index, row, None if error is None else entry["error"])
        bar.update(1)

    try:
        if executor is None:
            for i in todo:
                try:
                    row = evaluate(scenario, points[i], max_length)
                except Exception as error:  # a failed point is a result; the search goes on
                    keep(i, None, error)
                else:
                    keep(i, row, None)
        else:
            futures: dict[Future[dict[str, Any]], int] = {
                executor.submit(_task, (scenario, points[i], max_length)): i for i in todo}
            try:
                for future in as_completed(futures):
                    try:
                        row = future.result()
                    except Exception as error:
                        keep(futures[future], None, error)
                    else:
                        keep(futures[future], row, None)
            except BaseException:
                for future in futures:
                    future.cancel()
                raise
    finally:
        bar.close()
        if writer is not None:
            writer.close()
    return _result(header, tuple(varies), done)
