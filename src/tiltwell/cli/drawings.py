"""A scenario's figures in one call: the workflow computes, the figures draw and save.

What ``tiltwell figures FILE --out DIR`` runs. It goes through
:func:`tiltwell.workflows.figure_data.scenario_figure_data` (the computation) and then
:func:`tiltwell.figures.scenario_figures` (the drawing and the files); matplotlib is loaded
only when this module is.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path

from .._base.validation import TiltwellError
from ..figures import scenario_figures
from ..figures.export import check_export
from ..workflows.figure_data import scenario_figure_data
from ..workflows.scenario import Scenario

__all__ = ["write_scenario_figures"]


def write_scenario_figures(scenario: Scenario, out: str | os.PathLike[str], *,
                           formats: str | Sequence[str] = ("pdf", "svg", "png"), width: float = 6.0,
                           height: float = 4.0, dpi: float = 300, particles: int | None = None,
                           draw_caution: bool = False) -> list[Path]:
    """Compute a scenario's figure data and write every figure to the folder ``out``.

    The options are checked before anything is computed or created
    (:func:`tiltwell.figures.export.check_export`): ``formats`` from pdf, svg, png;
    ``width``, ``height`` [in] and ``dpi`` [1/in] as for :func:`tiltwell.figures.save`.
    ``particles`` replaces the scenario's ``[simulation] particles``. Returns the written
    paths, figure by figure (the names of :func:`tiltwell.figures.scenario_drawings`);
    ``draw_caution`` draws the electrical caution on the coil-current figure (it is in the
    files' metadata either way).
    """
    if not isinstance(scenario, Scenario):
        raise TiltwellError(f"scenario must be a Scenario (tiltwell.workflows.scenario.load); "
                            f"got {type(scenario).__name__}")
    check_export(out, formats=formats, width=width, height=height, dpi=dpi)
    data = scenario_figure_data(scenario, particles=particles)
    return scenario_figures(data, out, formats=formats, width=width, height=height, dpi=dpi, draw_caution=draw_caution)
