"""The explorer's design-space part: a finished (or running) design search's points and
front, and a chosen design loaded into the sliders.

It reads the results file a search keeps (``tiltwell search ... --out DIR`` writes
``DIR/points.jsonl``; :func:`tiltwell.workflows.search.read_search`), draws the figure of
merit of every computed point against the device length or the largest coil voltage, the
points within the limits filled and the others crossed, and the front of the ones within
the limits (:func:`tiltwell.workflows.optimise.front_of`) as a line. A front point chosen
in the list goes into the explorer's sliders: the deceleration of its row, and each varied
key that has a slider; a varied key without one (a coil count, the nozzle temperature) is
named in the status line with its value, to set in the scenario file. Loading never
raises out of a button: a bad file keeps the points shown and the message says why.
"""

from __future__ import annotations

import html
import os
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

import ipywidgets as widgets
import numpy as np
from bokeh.models import ColumnDataSource
from bokeh.plotting import figure

from . import style
from .plumbing import Callbacks, bokeh_views, reserialise
from .readouts import warning
from .widgets import CONTROL_LAYOUT
from .._base.validation import TiltwellError
from ..workflows.optimise import front_of
from ..workflows.search import SearchResult, read_search

__all__ = ["COSTS", "SLIDER_OF_KEY", "TITLE", "DesignPart", "slider_values"]

#: The section's title in the explorer.
TITLE = "design space: a search's front, and a chosen design in the sliders"

#: The costs a front is drawn against: search column -> axis words.
COSTS: dict[str, str] = {"length": "device length [m]", "worst_voltage": "largest coil voltage [V]"}

#: The explorer control that holds each scenario key a search may vary.
SLIDER_OF_KEY: dict[str, str] = {
    "trap.gradient": "gradient", "trap.max_field": "max_field", "trap.current": "current",
    "deceleration.final_velocity": "final_velocity", "beam.relative_spread": "relative_spread",
    "beam.mismatch": "mismatch",
}

_COLUMNS = ("cost", "gain", "index")


def slider_values(point: Mapping[str, float], row: Mapping[str, Any], controls: Mapping[str, Any]
                  ) -> tuple[dict[str, float], dict[str, float]]:
    """``(control values, keys without a control)`` of a search point: the row's
    deceleration [m/s^2] (a varied length becomes the deceleration it implies), and each
    varied key whose control the explorer has (:data:`SLIDER_OF_KEY`)."""
    values = {"deceleration": float(row["deceleration"])}
    elsewhere = {}
    for name, value in point.items():
        control = SLIDER_OF_KEY.get(name)
        if control is not None and control in controls:
            values[control] = float(value)
        elif name not in ("deceleration.deceleration", "deceleration.length"):
            elsewhere[name] = float(value)
    return values, elsewhere


class DesignPart:
    """The design-space part of :class:`tiltwell.explorer.Explorer` (its ``design``).

    Attributes
    ----------
    section : ipywidgets.Accordion
        What the explorer shows: :attr:`widget` in a section, closed at first.
    widget : ipywidgets.VBox
        The part itself (CSS class ``tiltwell-design``).
    results_path : ipywidgets.Text
        The search's results file (or its folder).
    cost : ipywidgets.ToggleButtons
        The front's cost, a key of :data:`COSTS`.
    choice : ipywidgets.Dropdown
        The front's points (value: the point's index in the search).
    actions : dict of str to ipywidgets.Button
        ``load``, ``use``.
    figure : bokeh figure
    sources : dict of str to ColumnDataSource
        ``within``, ``beyond``, ``front``, ``chosen``; columns ``cost`` (display unit),
        ``gain``, ``index``.
    result : SearchResult or None
        The search shown.
    message, status : ipywidgets.HTML
    """

    def __init__(self, apply: Callable[[Mapping[str, float], Mapping[str, Any]], str],
                 unexpected: Callable[[Exception], None]) -> None:
        self._apply = apply
        self.result: SearchResult | None = None
        self.message = widgets.HTML("")
        self.status = widgets.HTML("")
        self._callbacks = Callbacks(lambda text: setattr(self.message, "value", warning(text)), unexpected)
        self.results_path = widgets.Text(value="", placeholder="DIR/points.jsonl of `tiltwell search`",
                                         description="search results", layout=CONTROL_LAYOUT,
                                         style={"description_width": style.LABEL_WIDTH})
        self.cost = widgets.ToggleButtons(options=[(words.split(" [")[0], name) for name, words in COSTS.items()],
                                          value="length", description="against", disabled=True)
        self.choice = widgets.Dropdown(options=[], description="front design", layout=widgets.Layout(width="620px"),
                                       style={"description_width": style.LABEL_WIDTH}, disabled=True)
        self.actions = {"load": widgets.Button(description="load the search"),
                        "use": widgets.Button(description="put this design in the sliders", disabled=True)}
        for button in self.actions.values():
            button.layout = widgets.Layout(width="auto")
        self.sources = {name: ColumnDataSource({column: [] for column in _COLUMNS})
                        for name in ("within", "beyond", "front", "chosen")}
        self.figure = figure(title="designs of the search", x_axis_label=COSTS["length"],
                             y_axis_label="figure of merit", **style.FIGURE | {"width": 2 * style.FIGURE_WIDTH})
        self.figure.scatter("cost", "gain", source=self.sources["within"], color=style.WELL, size=5,
                            legend_label="within the limits")
        self.figure.scatter("cost", "gain", source=self.sources["beyond"], marker="x", color=style.REFERENCE,
                            size=6, legend_label="beyond a limit")
        self.figure.line("cost", "gain", source=self.sources["front"], color=style.LOST, line_width=2,
                         legend_label="front")
        self.figure.scatter("cost", "gain", source=self.sources["chosen"], color=style.BEAM, size=11,
                            legend_label="chosen")
        self.figure.legend.location = "bottom_right"
        self.views = bokeh_views({"designs": self.figure})
        self.widget = widgets.VBox([widgets.HBox([self.results_path, self.actions["load"]]), self.cost,
                                    widgets.HBox([self.choice, self.actions["use"]]), self.message, self.status,
                                    self.views["designs"]])
        self.widget.add_class("tiltwell-design")
        self.section = widgets.Accordion(children=[self.widget], titles=(TITLE,))
        on = self._callbacks
        on.on_click(self.actions["load"], lambda: self.load())
        on.on_click(self.actions["use"], lambda: self.use())
        on.observe(self.cost, lambda change: self._draw())
        on.observe(self.choice, lambda change: self._mark())

    def load(self, path: str | os.PathLike[str] | None = None) -> SearchResult | None:
        """Read the search at ``path`` (default :attr:`results_path`; a folder means its
        ``points.jsonl``) and draw it; a bad file keeps what is shown and returns None."""
        name = os.fspath(path) if path is not None else self.results_path.value.strip()
        if not name:
            self.message.value = warning("give the results file of a search (DIR/points.jsonl of `tiltwell search`)")
            return None
        target = Path(name) / "points.jsonl" if Path(name).is_dir() else Path(name)
        try:
            result = read_search(target)
        except TiltwellError as error:
            self.message.value = warning(html.escape(str(error)))
            return None
        except OSError as error:
            self.message.value = warning(html.escape(f"cannot read {target}: {error.strerror}"))
            return None
        self.result = result
        self.message.value = ""
        hardware = bool(np.any(np.isfinite(result.values("worst_voltage"))))
        self.cost.disabled = not hardware
        if not hardware:
            self.cost.value = "length"
        done = sum(row is not None for row in result.rows)
        self.status.value = html.escape(f"{target}: {done} of {len(result.points)} points computed, "
                                        f"{len(result.errors)} failed; varied: {', '.join(result.names)}")
        self._draw()
        return result

    def _draw(self) -> None:
        result = self.result
        if result is None:
            return
        cost, gain = self.cost.value, result.figure_name()
        g, c = result.values(gain), result.values(cost)
        feasible = result.values("feasible") == 1.0
        shown = np.isfinite(g) & np.isfinite(c)
        for name, mask in (("within", feasible & shown), ("beyond", ~feasible & shown)):
            self.sources[name].data = {"cost": c[mask], "gain": g[mask], "index": np.flatnonzero(mask)}
        on = front_of(result, cost, gain) if np.any(shown) else np.array([], dtype=int)
        self.sources["front"].data = {"cost": c[on], "gain": g[on], "index": on}
        self.figure.xaxis.axis_label = COSTS[cost]
        self.figure.yaxis.axis_label = "slow particles per shot" if gain == "slow_particles" else \
            "captured fraction (energetic 6-D)"
        options = []
        for i in on:
            keys = ", ".join(f"{name} = {result.points[i][name]:.4g}" for name in result.names)
            options.append((f"{COSTS[cost].split(' [')[0]} {c[i]:.4g}: {g[i]:.4g}  ({keys})", int(i)))
        self.choice.options = options
        self.choice.disabled = not options
        self.actions["use"].disabled = not options
        self._mark()

    def _mark(self) -> None:
        index = self.choice.value
        data: dict[str, list[float]] = {column: [] for column in _COLUMNS}
        front = self.sources["front"].data
        if index is not None and index in list(front["index"]):
            k = list(front["index"]).index(index)
            data = {"cost": [front["cost"][k]], "gain": [front["gain"][k]], "index": [index]}
        self.sources["chosen"].data = data

    def use(self, index: int | None = None) -> dict[str, float]:
        """Put the search point ``index`` (default: the chosen front point) into the
        explorer's sliders; returns that point's varied keys. A value beyond a slider's
        range raises TiltwellError (from a button: the message line says it)."""
        if self.result is None:
            raise TiltwellError("load a search first")
        index = self.choice.value if index is None else int(index)
        if index is None or not 0 <= index < len(self.result.points) or self.result.rows[index] is None:
            raise TiltwellError(f"no computed design {index!r} in this search")
        point, row = self.result.points[index], self.result.rows[index]
        assert row is not None
        self.status.value = html.escape(self._apply(point, row))
        return dict(point)

    def fresh(self) -> None:
        """Re-serialise the view before it is displayed again."""
        reserialise(self.views, {"designs": self.figure})
