"""The explorer's detector part: the predicted time-of-flight traces at the scenario's
``[detector]``, and a measured trace loaded from a file and drawn over them.

The part follows the main explorer's settings. The predicted traces need the captured
particles (the decelerated packet is made of the tracked survivors), so they are computed
in the background: on the part's button (:func:`tiltwell.workflows.traces.predicted_traces`
runs the whole estimate) or, at no extra cost, when the main explorer's Monte-Carlo check
and yield budget are done (:meth:`DetectorPart.take`). A result that arrives after the
settings changed is discarded; a change clears the predicted lines.

A measured trace (two columns, time [s] and signal, ``#`` comments:
:func:`tiltwell.workflows.calibration.read_trace`) is drawn as it is in the file, on its own
axis (right): its time runs from its own trigger and its signal is in its own unit, while
the prediction runs from the valve opening and counts detected particles per µs. The
fit button fits the free-beam model to it (:func:`tiltwell.workflows.calibration.fit_traces`,
the detector distance and valve opening of the scenario) and draws the fitted curve; its
speed, spread and valve delay are shown beside the scenario's own. A bad file never raises
out of a button: the message line names the file and the line.
"""

from __future__ import annotations

import html
import os
import threading
from collections.abc import Callable
from concurrent.futures import Future
from typing import Any

import ipywidgets as widgets
import numpy as np
from bokeh.models import ColumnDataSource, DataRange1d, LinearAxis
from bokeh.models.annotations import Legend, LegendItem
from bokeh.plotting import figure

from . import style
from .plumbing import Callbacks, bokeh_views, reserialise, start
from .readouts import warning
from .tasks import Tasks
from .widgets import CONTROL_LAYOUT, readout_table
from .._base.validation import TiltwellError
from ..dynamics.capture import CaptureEstimates
from ..workflows.assemble import build
from ..workflows.calibration import Calibration, Trace, fit_traces, read_trace
from ..workflows.scenario import Scenario
from ..workflows.traces import Traces, predicted_traces
from ..workflows.yields import YieldBudget

__all__ = ["COLUMNS", "READOUTS", "TITLE", "DetectorPart"]

#: The section's title in the explorer.
TITLE = "detector: predicted time-of-flight traces, and a measured one"
#: Column names of each source: time [ms] and the value drawn.
COLUMNS: dict[str, tuple[str, ...]] = {"free": ("time", "rate"), "packet": ("time", "rate"),
                                       "measured": ("time", "signal"), "fitted": ("time", "signal")}
#: Readout keys and labels, in display order.
READOUTS: tuple[tuple[str, str], ...] = (
    ("free", "free beam detected per shot"),
    ("packet", "decelerated packet detected per shot"),
    ("measured", "measured trace"),
    ("fit", "fit of the measured trace"),
)
MS, US = 1e3, 1e6  # s -> ms, s -> µs
_MEASURED = "#3d8bd4"


def _empty(name: str) -> dict[str, list[float]]:
    return {column: [] for column in COLUMNS[name]}


def _make_figure() -> tuple[Any, dict[str, ColumnDataSource]]:
    """The traces figure: predicted detected particles per µs (left axis), the measured
    signal and its fit in the file's own unit (right axis); the legend below the plot."""
    sources = {name: ColumnDataSource(_empty(name)) for name in COLUMNS}
    fig = figure(title="time-of-flight traces at the detector", x_axis_label="time [ms]",
                 y_axis_label="predicted: detected per µs (lines)", **style.FIGURE | {"width": 2 * style.FIGURE_WIDTH})
    measured_range = DataRange1d()
    fig.extra_y_ranges = {"measured": measured_range}
    fig.add_layout(LinearAxis(y_range_name="measured", axis_label="measured signal, file's unit (dots, dashes)"), "right")
    free = fig.line("time", "rate", source=sources["free"], color=style.WELL, line_width=2)
    packet = fig.line("time", "rate", source=sources["packet"], color=style.KEPT, line_width=2)
    measured = fig.scatter("time", "signal", source=sources["measured"], color=_MEASURED, size=3,
                           y_range_name="measured")
    fitted = fig.line("time", "signal", source=sources["fitted"], color=style.LOST, line_width=1.5,
                      line_dash="dashed", y_range_name="measured")
    measured_range.renderers = [measured, fitted]
    fig.y_range = DataRange1d(renderers=[free, packet])
    items = [LegendItem(label=label, renderers=[renderer]) for label, renderer in  # type: ignore[list-item]
             (("free beam, predicted", free), ("decelerated packet, predicted", packet), ("measured", measured),
              ("fit to the measured", fitted))]
    legend = Legend(items=items, orientation="horizontal", location="center")
    fig.add_layout(legend, "below")
    return fig, sources


def _fit_text(c: Calibration, scenario: Scenario, distance: float) -> str:
    """The fitted speed, spread and valve delay with their errors, the scenario's own beam
    beside them, the reduced chi-square and the speed-delay correlation."""
    beam = build(scenario).beam
    text = (f"v = {c.velocity:.4g} ± {c.velocity_error:.2g} m/s (scenario {beam.velocity:.4g}), spread "
            f"{c.relative_spread:.3g} ± {c.relative_spread_error:.2g} (scenario "
            f"{beam.longitudinal.sigma_velocity / beam.velocity:.3g}), valve delay {c.time_offset * US:.4g} ± "
            f"{c.time_offset_error * US:.2g} µs, reduced χ² {c.reduced_chi_square:.3g}")
    if "velocity" in c.names and "time_offset" in c.names:
        r = c.correlation[c.names.index("velocity"), c.names.index("time_offset")]
        text += f"; at one distance ({distance:g} m) speed and delay are correlated, r = {r:.2f}"
    return text


class DetectorPart:
    """The detector part of :class:`tiltwell.explorer.Explorer` (its ``detector``).

    Attributes
    ----------
    section : ipywidgets.Accordion
        What the explorer shows: :attr:`widget` in a section, closed at first.
    widget : ipywidgets.VBox
        The part itself (CSS class ``tiltwell-detector``).
    trace_path : ipywidgets.Text
        The measured trace's file.
    actions : dict of str to ipywidgets.Button
        ``predict``, ``load``, ``fit``.
    readouts : dict of str to ipywidgets.HTML
        Keyed as in :data:`READOUTS`.
    figure : bokeh figure
        The traces (time in ms).
    sources : dict of str to ColumnDataSource
        ``free``, ``packet`` (predicted, detected per µs), ``measured`` and ``fitted`` (the
        file's signal), columns as in :data:`COLUMNS`.
    views : dict of str to jupyter_bokeh.BokehModel
        ``traces``: the figure as a widget.
    traces : Traces or None
        The predicted traces shown.
    trace : Trace or None
        The measured trace shown.
    calibration : Calibration or None
        The fit shown.
    message, status : ipywidgets.HTML
        What is wrong; the outcome of the last action.
    """

    def __init__(self, lock: threading.RLock, unexpected: Callable[[Exception], None]) -> None:
        self._lock = lock
        self._scenario: Scenario | None = None
        self._generation = 0
        self.traces: Traces | None = None
        self.trace: Trace | None = None
        self.calibration: Calibration | None = None
        self.message = widgets.HTML("")
        self.status = widgets.HTML("")
        self._tasks = Tasks(lock, self._report, unexpected)
        self._callbacks = Callbacks(lambda text: setattr(self.message, "value", warning(text)), unexpected)
        self.trace_path = widgets.Text(value="", placeholder="trace.csv: time [s], signal", description="measured trace",
                                       layout=CONTROL_LAYOUT, style={"description_width": style.LABEL_WIDTH})
        self.actions = {
            "predict": widgets.Button(description="predict traces", tooltip="tracks the beam: a few seconds"),
            "load": widgets.Button(description="load and overlay"),
            "fit": widgets.Button(description="fit the measured trace", disabled=True),
        }
        for button in self.actions.values():
            button.layout = widgets.Layout(width="auto")
        self.readouts = {key: widgets.HTML("—") for key, _ in READOUTS}
        self.figure, self.sources = _make_figure()
        self.views = bokeh_views({"traces": self.figure})
        self.widget = widgets.VBox([
            widgets.HBox([self.actions["predict"]]), widgets.HBox([self.trace_path, self.actions["load"],
                                                                  self.actions["fit"]]),
            readout_table(READOUTS, self.readouts, ("260px", "620px"), "tiltwell-detector-readouts"),
            self.message, self.status, self.views["traces"]])
        self.widget.add_class("tiltwell-detector")
        self.section = widgets.Accordion(children=[self.widget], titles=(TITLE,))
        on = self._callbacks
        on.on_click(self.actions["predict"], self.predict)
        on.on_click(self.actions["load"], lambda: self.load())
        on.on_click(self.actions["fit"], self.fit)

    def _report(self, text: str) -> None:
        self.status.value = text

    # --- the scenario -------------------------------------------------------------------------

    def follow(self, scenario: Scenario | None) -> None:
        """Take the main explorer's current scenario (None: its settings make none); the
        predicted lines are cleared and a fit of the old setting's model is kept (it
        depends on the file, the distance and the valve opening only)."""
        with self._lock:
            self._generation += 1
            self._scenario = scenario
            self.traces = None
            for name in ("free", "packet"):
                self.sources[name].data = _empty(name)
            missing = self._missing()
            self.actions["predict"].disabled = missing is not None
            self.readouts["free"].value = self.readouts["packet"].value = "—"
            self.message.value = "" if missing is None else warning(html.escape(missing))

    def _missing(self) -> str | None:
        """Why nothing can be predicted, or None."""
        if self._scenario is None:
            return "the settings make no scenario: nothing to predict"
        if self._scenario.detector is None:
            return ("the scenario has no [detector] section: give distance [m] and radius [m] (efficiency, time_bin "
                    "[s] optional) in the file for predicted traces and fits")
        return None

    def _needs_detector(self) -> Scenario:
        with self._lock:
            missing, scenario = self._missing(), self._scenario
        if missing is not None or scenario is None:
            raise TiltwellError(missing or "no scenario")
        return scenario

    # --- predicted traces ---------------------------------------------------------------------

    def predict(self) -> Future[Traces | None]:
        """Start :func:`tiltwell.workflows.traces.predicted_traces` of the current scenario
        in the background (it tracks the beam); drawn when done if the settings have not
        changed. Returns its future (None when it failed: :attr:`status` says why)."""
        scenario = self._needs_detector()
        return self._start("predicted traces", lambda: predicted_traces(scenario), self._show_traces)

    def take(self, scenario: Scenario, estimates: CaptureEstimates, budget: YieldBudget) -> Future[Traces | None] | None:
        """Predict the traces from a finished Monte-Carlo check and yield budget of
        ``scenario`` (the main explorer's), in the background, without tracking again.
        Does nothing (returns None) when the scenario has no ``[detector]``. The caller
        hands over only results of the setting it still shows (so the one followed)."""
        if scenario.detector is None:
            return None
        return self._start("predicted traces",
                           lambda: predicted_traces(scenario, estimates, built=build(scenario), budget=budget),
                           self._show_traces)

    def _start(self, name: str, compute: Callable[[], Any], apply: Callable[[Any], None]) -> Future[Any]:
        generation = self._generation
        return start(self._tasks, name, compute, apply, lambda: self._generation == generation, text=name,
                     show=self._progress, button=self.actions["predict"])

    def _progress(self, text: str) -> None:
        self.status.value = html.escape(text)

    def _show_traces(self, traces: Traces) -> None:
        self.traces = traces
        centres = 0.5 * (traces.edges[1:] + traces.edges[:-1]) * MS
        per_us = 1.0 / (float(np.diff(traces.edges).mean()) * US)
        self.sources["free"].data = {"time": centres, "rate": traces.free * per_us}
        packet = traces.packet
        self.sources["packet"].data = (_empty("packet") if packet is None
                                       else {"time": centres, "rate": packet * per_us})
        unit = "" if traces.absolute else " (relative: no [beam] pressure)"
        self.readouts["free"].value = html.escape(f"{traces.free_detected:.3g}{unit}, "
                                                  f"{100.0 * traces.free_share:.3g} % of the beam inside the disc")
        self.readouts["packet"].value = ("— (no tracked survivors)" if traces.packet_detected is None else html.escape(
            f"{traces.packet_detected:.3g}{unit}, released at {traces.release_distance:.4g} m, "
            f"{traces.release_time * MS:.4g} ms"))

    # --- the measured trace -------------------------------------------------------------------

    def load(self, path: str | os.PathLike[str] | None = None) -> Trace | None:
        """Read the measured trace at ``path`` (default: :attr:`trace_path`) and draw it.
        A bad file shows its one-line error in :attr:`message` and returns None; the
        trace shown before stays."""
        name = os.fspath(path) if path is not None else self.trace_path.value.strip()
        if not name:
            self.message.value = warning("give the measured trace's file (CSV: time [s], signal)")
            return None
        try:
            trace = read_trace(name)
        except TiltwellError as error:
            self.message.value = warning(html.escape(str(error)))
            return None
        with self._lock:
            self.trace, self.calibration = trace, None
            self.sources["measured"].data = {"time": trace.times * MS, "signal": trace.signal}
            self.sources["fitted"].data = _empty("fitted")
            kind = "counts (Poisson fit)" if trace.is_counts else "analog signal (Gaussian fit)"
            self.readouts["measured"].value = html.escape(
                f"{trace.path}: {trace.times.size} samples, {trace.times[0] * MS:.4g}–{trace.times[-1] * MS:.4g} ms, "
                f"peak at {trace.times[int(np.argmax(trace.signal))] * MS:.4g} ms; {kind}")
            self.readouts["fit"].value = "—"
            self.actions["fit"].disabled = False
            self.message.value = ""
        return trace

    def fit(self) -> Future[tuple[Calibration, str] | None]:
        """Fit the loaded trace (:func:`tiltwell.workflows.calibration.fit_traces`) at the
        scenario's detector distance with its valve opening, in the background; the
        fitted curve and numbers are shown when done (:attr:`calibration`). Returns its
        future: ``.result()`` gives (the Calibration, the text shown), None when it failed."""
        scenario = self._needs_detector()
        trace = self.trace
        if trace is None:
            raise TiltwellError("load a measured trace first")
        detector = scenario.detector
        assert detector is not None
        open_time = scenario.beam.valve_open_time

        def compute() -> tuple[Calibration, str]:
            calibration = fit_traces([trace], [detector.distance], open_time)
            return calibration, _fit_text(calibration, scenario, detector.distance)

        def apply(result: tuple[Calibration, str]) -> None:
            if self.trace is not trace:  # another trace was loaded since
                return
            self.calibration, text = result
            self.sources["fitted"].data = {"time": trace.times * MS, "signal": self.calibration.fitted(trace)}
            self.readouts["fit"].value = html.escape(text)

        return start(self._tasks, "fit", compute, apply, lambda: True, text="fitting the measured trace",
                     show=self._progress, button=self.actions["fit"])

    # --- life ---------------------------------------------------------------------------------

    def fresh(self) -> None:
        """Re-serialise the view before it is displayed again."""
        reserialise(self.views, {"traces": self.figure})

    def wait(self, timeout: float | None = None) -> None:
        """Wait for the part's background work."""
        self._tasks.flush(timeout)

    def close(self) -> None:
        """Stop the background work."""
        self._tasks.shutdown()
