"""Named sets of figures: everything a scenario shows, and the coil row's pair, drawn from
the data the workflow layer computed (:mod:`tiltwell.workflows.figure_data`); nothing is
computed here.

Re-exported by :mod:`tiltwell.figures`. A scenario's set in one call, computation
included, is :func:`tiltwell.cli.drawings.write_scenario_figures` (``tiltwell figures``).
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from matplotlib.figure import Figure

from .._base.validation import TiltwellError
from ..workflows.figure_data import CoilFigureData, ScenarioFigureData
from .budget import yield_waterfall
from .curves import acceptance_against_deceleration, tradeoff_plot
from .device import current_pulses, phase_scan
from .export import check_export, write_figures
from .trajectories import survival, time_of_flight
from .well import phase_plane, potential

__all__ = ["coil_figures", "scenario_drawings", "scenario_figures"]


def coil_figures(data: CoilFigureData, *, draw_caution: bool = False) -> dict[str, Figure]:
    """The coil row's figures by name: ``coil-currents`` (:func:`current_pulses` of the
    stretch in ``data``, carrying the electrical caution into its files' metadata, and
    drawing it with ``draw_caution``) and ``coil-phases`` (:func:`phase_scan`), from
    :func:`tiltwell.workflows.figure_data.coil_figure_data`."""
    if not isinstance(data, CoilFigureData):
        raise TiltwellError(f"data must be a CoilFigureData (tiltwell.workflows.figure_data.coil_figure_data); "
                            f"got {type(data).__name__}")
    return {"coil-currents": current_pulses(data.plan, data.times, draw_caution=draw_caution,
                                            run_duration=data.duration),
            "coil-phases": phase_scan(data.scan)}


def scenario_drawings(data: ScenarioFigureData, *, draw_caution: bool = False) -> dict[str, Figure]:
    """A scenario's figures by name, from
    :func:`tiltwell.workflows.figure_data.scenario_figure_data`.

    ``potential``, ``phase-longitudinal`` and ``phase-transverse`` (beam ellipses and the
    drawn sample, kept/lost after tracking), ``acceptance`` and ``tradeoff`` (when the
    trap has a well at rest), ``coil-currents`` and ``coil-phases`` (with ``[coils]``),
    ``survival`` (when the scenario tracks) and ``time-of-flight`` (when it also has a
    detector distance), and ``yield-budget`` (with ``[beam] pressure``, when every stage
    keeps something), in this order. ``draw_caution`` draws the electrical caution on the
    coil-current figure (it is in the files' metadata either way).
    """
    if not isinstance(data, ScenarioFigureData):
        raise TiltwellError(f"data must be a ScenarioFigureData (tiltwell.workflows.figure_data."
                            f"scenario_figure_data); got {type(data).__name__}")
    sample, a = data.sample, data.deceleration
    figures = {"potential": potential(data.trap, a)}
    figures["phase-longitudinal"] = phase_plane(
        data.acceptance.longitudinal, plane=data.beam.longitudinal, particles=(sample[:, 2], sample[:, 5]),
        kept=data.kept, axis="longitudinal", mean=(0.0, -data.mismatch),
    )
    figures["phase-transverse"] = phase_plane(
        data.acceptance.transverse, plane=data.beam.horizontal, particles=(sample[:, 0], sample[:, 3]),
        kept=data.kept, axis="transverse",
    )
    if data.curve is not None:
        figures["acceptance"] = acceptance_against_deceleration(data.curve, current=a)
    if data.sweep_rows is not None:
        figures["tradeoff"] = tradeoff_plot(data.sweep_rows, current=a)
    if data.coils is not None:
        figures.update(coil_figures(data.coils, draw_caution=draw_caution))
    if data.tracking is not None:
        figures["survival"] = survival(data.tracking)
        if data.arrivals is not None:
            figures["time-of-flight"] = time_of_flight(data.arrivals)
    budget = data.budget
    if budget is not None and budget.steps and all(step["number"] > 0 for step in budget.steps):
        interval = None if budget.low is None or budget.high is None or budget.low <= 0 else (budget.low, budget.high)
        figures["yield-budget"] = yield_waterfall(budget.steps, interval=interval)
    return figures


def scenario_figures(data: ScenarioFigureData, out: str | os.PathLike[str], *, formats: Any = ("pdf", "svg", "png"),
                     width: float = 6.0, height: float = 4.0, dpi: float = 300, draw_caution: bool = False
                     ) -> list[Path]:
    """Every figure of :func:`scenario_drawings` written to the folder ``out`` (created if
    missing) in every one of ``formats``; ``width``, ``height`` [in] and ``dpi`` [1/in] as
    for :func:`tiltwell.figures.save`. Returns the written paths, figure by figure."""
    check_export(out, formats=formats, width=width, height=height, dpi=dpi)
    return write_figures(scenario_drawings(data, draw_caution=draw_caution), out, formats=formats, width=width, height=height, dpi=dpi)
