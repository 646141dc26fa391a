"""Trade-off sweeps: one scenario, many decelerations (or lengths), any executor.

Every point is a whole :func:`tiltwell.workflows.report.summarise` of the scenario with the
deceleration (or the length) replaced, so a sweep row holds the acceptances, the three
captured-fraction estimates, the length, the duration and the number of coils for the
same target final velocity. Points run through ``executor.map``: by default in this
process; a ``concurrent.futures.ProcessPoolExecutor`` uses the local cores, and a Dask
client's ``get_executor()`` sends the same points to a cluster.
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Iterator, Sequence
from concurrent.futures import Executor
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import ArrayLike
from tqdm.auto import tqdm

from .._base.validation import TiltwellError, as_finite_array
from .report import UNITS, summarise
from .._base.files import table_text, write_table
from .scenario import Scenario, check_scenario

__all__ = ["COLUMNS", "sweep", "sweep_csv"]

#: Columns of a sweep row, in order.
COLUMNS: tuple[str, ...] = (
    "deceleration",
    "length",
    "duration",
    "coils",
    "longitudinal_acceptance",
    "transverse_acceptance",
    "acceptance_6d",
    "escape_energy",
    "captured_fraction_overlap",
    "captured_fraction_energy",
    "captured_fraction_energy_error",
    "captured_fraction_mc",
    "captured_fraction_mc_error",
    "slow_particles",
    "slow_particles_low",
    "slow_particles_high",
)


def _point(task: tuple[Scenario, str, float]) -> dict[str, Any]:
    """One sweep point; a top-level function so process and cluster executors can send it."""
    scenario, key, value = task
    other = "length" if key == "deceleration" else "deceleration"
    varied = scenario.replace("deceleration", **{key: value, other: None})
    summary = summarise(varied)
    return {**{name: summary.get(name) for name in COLUMNS}, "trap_model": summary["trap_model"]}


def sweep(
    scenario: Scenario,
    decelerations: ArrayLike | None = None,
    *,
    lengths: ArrayLike | None = None,
    executor: Executor | None = None,
    progress: bool = False,
) -> list[dict[str, Any]]:
    """Rows of :data:`COLUMNS` (SI units) for each deceleration [m/s^2] or each length [m],
    each with the summary's ``trap_model`` too (the coil row's twin table is built once per
    process and reused, :func:`tiltwell.workflows.devicemodel.row_tables`).

    Give exactly one of ``decelerations`` and ``lengths`` (1-D, positive). The rows come
    back in the order of the input whatever the executor.
    """
    check_scenario(scenario)
    if decelerations is not None and lengths is None:
        key, unit, given = "deceleration", "m/s^2", decelerations
    elif lengths is not None and decelerations is None:
        key, unit, given = "length", "m", lengths
    else:
        raise TiltwellError("give exactly one of decelerations [m/s^2] and lengths [m]")
    values = as_finite_array(given, f"{key}s", unit, ndim=1)
    if values.size == 0 or np.any(values <= 0):
        raise TiltwellError(f"{key}s [{unit}] must be a non-empty list of positive numbers")
    tasks = [(scenario, key, float(v)) for v in values]
    mapped: Iterable[dict[str, Any]] = executor.map(_point, tasks) if executor is not None else map(_point, tasks)
    rows: Iterator[dict[str, Any]] = iter(mapped)
    if progress:
        rows = iter(tqdm(rows, total=len(tasks), desc="sweep", unit="point"))
    return list(rows)


def sweep_csv(rows: Sequence[dict[str, Any]], path: str | os.PathLike[str] | None = None) -> str:
    """The rows as CSV text in tiltwell's table layout; written atomically to ``path`` if given.

    Three ``#`` lines (title, units, a note on the rows naming the rows' ``trap_model``), one header row
    ``deceleration [m/s^2],length [m],...`` (:data:`COLUMNS` with their units), then one
    row per point; a value the summary does not have (e.g. the Monte-Carlo fraction when
    ``[simulation] track`` is false) is an empty cell. Read it with
    ``numpy.genfromtxt(path, delimiter=",", skip_header=3, names=True)`` (empty cells
    become NaN; ``numpy.loadtxt`` refuses them).
    """
    columns = [(name, UNITS.get(name, "1")) for name in COLUMNS]
    table = ([row.get(name) for name in COLUMNS] for row in rows)
    title = "tiltwell trade-off sweep: one row per deceleration (or length), same target final velocity"
    models = sorted({str(row["trap_model"]) for row in rows if row.get("trap_model") is not None})
    trap = f"; trap model: {', '.join(models)}" if models else ""
    note = f"each row: tiltwell.workflows.report.summarise of the scenario so changed{trap}; empty cell: not computed"
    if path is None:
        return table_text(title, columns, table, caution=note)
    return write_table(Path(path), title, columns, table, caution=note)
