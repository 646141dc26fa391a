"""``tiltwell search SCENARIO --vary KEY=LOW:HIGH[:N] ... [--sample N] [--optimise FIGURE]
--out DIR``: a design search (:mod:`tiltwell.workflows.search`) or the best design under the
limits (:mod:`tiltwell.workflows.optimise`).

A search writes into ``DIR``: ``points.jsonl`` (the results file, kept point by point: the
same command after a kill or Ctrl-C resumes it), ``search.csv`` (one row per point, units
in the header), ``search.nc`` (a grid as a labelled netCDF data set), and the figures
``front-length.png`` (figure of merit against device length), ``front-voltage.png``
(against the largest coil voltage, where there is a coil row) and ``map.png`` (over the
first two keys). ``--optimise`` writes ``optimum.json`` and ``optimum.toml`` (the scenario
at the best design) instead.
"""

from __future__ import annotations

import argparse
import json
import os
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

from .._base.files import atomic_write_text
from .._base.validation import TiltwellError
from ..physics.hardware import ELECTRICAL_CAUTION
from ..workflows import scenario as scenario_module
from ..workflows.optimise import front_of, optimise
from ..workflows.search import SearchResult, parse_vary, search
from .paths import refuse_in_folder

__all__ = ["INTERRUPTED", "WRITTEN", "search_command"]

#: Exit status after Ctrl-C (128 + SIGINT), as shells report it.
INTERRUPTED = 130
#: The files a search or an optimisation writes into ``--out`` by name (and figures, ``*.png``).
WRITTEN = ("points.jsonl", "search.csv", "search.nc", "optimum.json", "optimum.toml")


def _workers(count: int) -> int:
    cores = os.cpu_count() or 1
    if not 1 <= count <= cores:
        raise TiltwellError(f"--workers must be in [1, {cores}] (the cores of this machine); got {count}")
    return count


def _figures(result: SearchResult, folder: Path) -> list[Path]:
    from ..figures import design_front, design_map, save  # matplotlib is loaded only for the figures

    drawn = []
    for name, cost in (("front-length", "length"), ("front-voltage", "worst_voltage")):
        if np.any(np.isfinite(result.values(cost))) and front_of(result, cost).size:
            drawn.append(save(design_front(result, cost), folder / f"{name}.png", dpi=200))
    if len(result.names) >= 2:
        drawn.append(save(design_map(result), folder / "map.png", dpi=200))
    return drawn


def _print_front(result: SearchResult) -> None:
    figure = result.figure_name()
    on = front_of(result, "length")
    print(f"front of {figure} against device length ({on.size} of {len(result.points)} points; feasible only):")
    for i in on:
        row = result.rows[i]
        assert row is not None
        keys = ", ".join(f"{name} = {result.points[i][name]:.4g}" for name in result.names)
        print(f"  length {row['length']:.3g} m: {figure} {row[figure]:.4g}  ({keys})")


def _optimise(arguments: argparse.Namespace, scenario: scenario_module.Scenario, folder: Path) -> None:
    varies = [parse_vary(text) for text in arguments.vary]
    workers = _workers(arguments.workers)
    found = optimise(scenario, varies, arguments.optimise, max_length=arguments.max_length, seed=arguments.seed,
                     workers=workers)
    atomic_write_text(folder / "optimum.json", json.dumps(found.to_dict(), indent=2) + "\n")
    scenario_module.save(found.scenario, folder / "optimum.toml")
    if arguments.json:
        print(json.dumps(found.to_dict()))
        return
    print("\n".join(found.lines()))
    print(f"wrote {folder / 'optimum.json'} and {folder / 'optimum.toml'} ({found.evaluations} designs computed)")


def search_command(arguments: argparse.Namespace) -> None:
    """Run ``tiltwell search`` as parsed by :func:`tiltwell.cli.parser.build_parser`."""
    folder = Path(arguments.out)
    if folder.exists() and not folder.is_dir():
        raise TiltwellError(f"--out must be a folder; {str(folder)!r} is a file")
    refuse_in_folder("--out", folder, WRITTEN, {".png"}, [("the scenario", arguments.file)])
    scenario = scenario_module.load(arguments.file)
    folder.mkdir(parents=True, exist_ok=True)
    if arguments.optimise is not None:
        _optimise(arguments, scenario, folder)
        return
    varies = [parse_vary(text) for text in arguments.vary]
    workers = _workers(arguments.workers)
    store = folder / "points.jsonl"
    executor = ProcessPoolExecutor(workers) if workers > 1 else None
    try:
        result = search(scenario, varies, sample=arguments.sample, method=arguments.method, seed=arguments.seed,
                        max_length=arguments.max_length, executor=executor, store=store,
                        progress=not arguments.quiet)
    except KeyboardInterrupt:
        if executor is not None:
            executor.shutdown(wait=False, cancel_futures=True)
        kept = max(store.read_bytes().count(b"\n") - 1, 0) if store.exists() else 0
        print(f"tiltwell: interrupted; {kept} finished points are kept in {store}: the same command resumes")
        raise SystemExit(INTERRUPTED) from None
    finally:
        if executor is not None:
            executor.shutdown(cancel_futures=True)
    result.to_csv(folder / "search.csv")
    written = [folder / "search.csv"]
    if result.grid:
        written.append(result.to_netcdf(folder / "search.nc"))
    written += _figures(result, folder)
    if arguments.json:
        print(json.dumps({"points": len(result.points), "failed": len(result.errors),
                          "front_length": [int(i) for i in front_of(result, "length")],
                          "files": [str(path) for path in written],
                          **({"caution": ELECTRICAL_CAUTION} if scenario.coils is not None else {})}))
        return
    else:
        failed = f", {len(result.errors)} failed (their errors are in search.csv)" if result.errors else ""
        print(f"search of {len(result.points)} points{failed}")
        _print_front(result)
        print("wrote " + ", ".join(str(path) for path in written))
    if scenario.coils is not None:
        print(ELECTRICAL_CAUTION)
