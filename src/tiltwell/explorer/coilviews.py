"""Bokeh views of the explorer's coil-array part: the currents while the trap passes, and
the depth and acceptances against the phase of the trap between two coils.

Nothing here computes physics: the columns are library results (a
:class:`tiltwell.coils.array.CurrentPlan`, a :class:`tiltwell.coils.moving.PhaseScan`) rescaled
for people (time in µs, phase in pitches, energies in mK, acceptances in mm·m/s, offsets
in µm). :mod:`tiltwell.explorer.coils` fills the sources.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from bokeh.models import ColumnDataSource, HoverTool
from bokeh.models.annotations import Span, Title
from bokeh.plotting import figure
from numpy.typing import NDArray

from . import style
from .views import legend_below
from ..coils.array import CurrentPlan
from ..physics.constants import millikelvin
from ..coils.moving import PhaseScan

__all__ = ["COLUMNS", "PHASE_FIGURES", "current_columns", "empty_columns", "make_views", "phase_columns",
           "reference_columns"]

FloatArray = NDArray[np.float64]

#: Column names of every source (an empty source has the same columns as a full one).
#: Each figure has its own sources (a Bokeh model lives in one document, one per view):
#: ``<figure>`` the scan, ``<figure>_worst`` the worst phase, ``<figure>_reference`` the
#: main explorer's trap.
COLUMNS: dict[str, tuple[str, ...]] = {
    "currents": ("xs", "ys", "coil", "position", "colour"),
    "depth": ("phase", "depth", "offset"),
    "depth_worst": ("phase", "depth"),
    "depth_reference": ("phase", "depth"),
    "acceptance": ("phase", "longitudinal", "transverse"),
    "acceptance_worst": ("phase", "longitudinal", "transverse"),
    "acceptance_reference": ("phase", "longitudinal", "transverse"),
}
#: The phase figures.
PHASE_FIGURES = ("depth", "acceptance")
#: A caution on the current figure itself (a saved image keeps it).
FIGURE_CAUTION = "planning numbers, not a design: see the electrical caution beside the verdicts"

_ALONG, _ACROSS, _LIMIT, _REFERENCE = style.WELL, style.KEPT, style.WARNING, style.REFERENCE
US, MM, UM, AREA = 1e6, 1e3, 1e6, 1e3  # s -> µs, m -> mm, m -> µm, m·m/s -> mm·m/s


def empty_columns(name: str) -> dict[str, Any]:
    """Empty columns for the source ``name``."""
    return {column: [] for column in COLUMNS[name]}


def current_columns(plan: CurrentPlan, times: FloatArray, positions: FloatArray) -> dict[str, Any]:
    """One line per coil that carries current at some time: ``times`` [s] -> µs, the
    current per turn [A], the coil's index and position ``positions[k]`` [m] -> mm."""
    used = np.flatnonzero(np.any(plan.currents != 0.0, axis=0))
    return {
        "xs": [times * US for _ in used],
        "ys": [plan.currents[:, k] for k in used],
        "coil": [int(k) for k in used],
        "position": [float(positions[k]) * MM for k in used],
        "colour": [style.PALETTE[i % len(style.PALETTE)] for i in range(used.size)],
    }


def _split(columns: dict[str, Any], suffix: str) -> dict[str, dict[str, Any]]:
    """Columns for each phase figure's source ``<figure><suffix>``."""
    return {name + suffix: {key: columns[key] for key in COLUMNS[name + suffix]} for name in PHASE_FIGURES}


def phase_columns(result: PhaseScan, pitch: float) -> dict[str, dict[str, Any]]:
    """The scan against the phase in pitches: depth [mK], acceptances [mm·m/s], zero
    offset [µm]; keyed by source name."""
    columns = {
        "phase": result.phases / pitch,
        "depth": millikelvin(result.depth),
        "longitudinal": result.longitudinal * AREA,
        "transverse": result.transverse * AREA,
        "offset": result.zero_offset * UM,
    }
    worst = {key: [value[result.worst]] for key, value in columns.items()}
    return _split(columns, "") | _split(worst, "_worst")


def reference_columns(depth: float, longitudinal: float, transverse: float) -> dict[str, dict[str, Any]]:
    """Level lines across the pitch: the rigid trap's ``depth`` [J] -> mK and acceptances
    [m·m/s] -> mm·m/s; keyed by source name."""
    return _split({"phase": [0.0, 1.0], "depth": [float(millikelvin(depth))] * 2,
                   "longitudinal": [longitudinal * AREA] * 2, "transverse": [transverse * AREA] * 2}, "_reference")


def make_views() -> tuple[dict[str, Any], dict[str, ColumnDataSource], dict[str, Span]]:
    """Empty sources and the three figures drawing them.

    Returns
    -------
    figures : dict
        ``currents``, ``depth``, ``acceptance`` (Bokeh figures).
    sources : dict of ColumnDataSource
        Keys as in :data:`COLUMNS`.
    spans : dict of Span
        ``limit_high``, ``limit_low``: the current limit per turn, +- [A].
    """
    sources = {name: ColumnDataSource(empty_columns(name)) for name in COLUMNS}
    spans = {name: Span(location=0.0, dimension="width", line_color=_LIMIT, line_dash="dotted", line_width=1.5)
             for name in ("limit_high", "limit_low")}
    figures = {"currents": _currents_figure(sources, spans), "depth": _depth_figure(sources),
               "acceptance": _acceptance_figure(sources)}
    return figures, sources, spans


def _currents_figure(sources: dict[str, ColumnDataSource], spans: dict[str, Span]) -> Any:
    p = figure(**style.FIGURE, title="coil currents as the trap passes",
               x_axis_label="time since switch-on [µs]", y_axis_label="current per turn [A]")
    lines = p.multi_line("xs", "ys", source=sources["currents"], line_color="colour", line_width=2)
    for span in spans.values():
        p.add_layout(span)
    p.add_tools(HoverTool(renderers=[lines], tooltips=[("coil", "@coil at @position{0.0} mm"),
                                                       ("t", "$x{0.0} µs"), ("I", "$y{0.0} A")]))
    p.add_layout(Title(text=FIGURE_CAUTION, text_font_size="8pt", text_font_style="italic"), "below")
    return p


def _depth_figure(sources: dict[str, ColumnDataSource]) -> Any:
    p = figure(**style.FIGURE, title="well depth between two coils", x_axis_label="trap phase [pitch]",
               y_axis_label=r"$$\mathrm{depth} / k_\mathrm{B}\ \mathrm{[mK]}$$")
    line = p.line("phase", "depth", source=sources["depth"], line_color=_ALONG, line_width=2,
                  legend_label="coil array")
    p.scatter("phase", "depth", source=sources["depth"], color=_ALONG, size=5)
    p.scatter("phase", "depth", source=sources["depth_worst"], marker="inverted_triangle", size=13, fill_color=_LIMIT,
              line_color="black", legend_label="worst phase")
    p.line("phase", "depth", source=sources["depth_reference"], line_color=_REFERENCE, line_dash="dashed",
           line_width=2, legend_label="main explorer's trap")
    p.add_tools(HoverTool(renderers=[line], tooltips=[("phase", "@phase{0.000} pitch"), ("depth", "@depth{0.0} mK"),
                                                      ("zero offset", "@offset{0.000} µm")]))
    legend_below(p)
    return p


def _acceptance_figure(sources: dict[str, ColumnDataSource]) -> Any:
    p = figure(**style.FIGURE, title="acceptances between two coils",
               x_axis_label="trap phase [pitch]", y_axis_label="acceptance [mm·m/s]")
    drawn: list[Any] = []
    for plane, colour in (("longitudinal", _ALONG), ("transverse", _ACROSS)):
        drawn.append(p.line("phase", plane, source=sources["acceptance"], line_color=colour, line_width=2,
                            legend_label=plane))
        p.scatter("phase", plane, source=sources["acceptance"], color=colour, size=5)
        p.scatter("phase", plane, source=sources["acceptance_worst"], marker="inverted_triangle", size=13,
                  fill_color=_LIMIT, line_color="black", legend_label="worst phase")
        p.line("phase", plane, source=sources["acceptance_reference"], line_color=colour, line_dash="dashed",
               line_width=1.5, alpha=0.6, legend_label=f"{plane}, main explorer's trap")
    p.add_tools(HoverTool(renderers=drawn, tooltips=[("phase", "@phase{0.000} pitch"),
                                                     ("longitudinal", "@longitudinal{0.00} mm·m/s"),
                                                     ("transverse", "@transverse{0.00} mm·m/s")]))
    legend_below(p)
    return p
