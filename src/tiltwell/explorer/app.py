"""The notebook explorer: sliders for a scenario, four live Bokeh views, readouts, and
buttons for the heavy checks. In a notebook cell::

    app = tiltwell.explore()     # the invented demo scenario; or explore("my.toml")
    app                          # the last line of a cell shows it

Every control change redraws from the library's answers at that setting (acceptances
without 6-D, the plane overlap, the axis cut, the separatrices, the beam ellipses and a
fixed drawn sample of particles classified by :meth:`tiltwell.Separatrix.contains`). The
trade-off curve is recomputed in the background a moment after the trap or the beam
stops changing; the 6-D acceptance and the Monte-Carlo check run in the background only
when their buttons are pressed, and a result that arrives after the settings changed is
discarded. Bad settings never raise out of a control: the views show what can be shown
and the message area says what is wrong. From code, each background action
(:meth:`Explorer.run_monte_carlo`, :meth:`Explorer.compute_6d`, :meth:`Explorer.save_figures`,
and the coil part's ``scan``) returns a ``concurrent.futures.Future`` at once;
``app.run_monte_carlo().result()`` waits for the check and gives its result.

BokehJS reaches the notebook through the ``jupyter_bokeh`` extension, and
:meth:`Explorer.save_html` inlines it: nothing is fetched from a content network, and
nothing here calls ``bokeh.io.output_notebook``.
"""

from __future__ import annotations

import html
import importlib
import logging
import math
import os
import threading
from collections.abc import Callable, Mapping
from concurrent.futures import Future
from pathlib import Path
from typing import Any, TypeVar

import ipywidgets as widgets
import numpy as np

from . import readouts, views
from .checks import budget_state, monte_carlo, monte_carlo_state, slow_particles, tracked_particles, volume_6d
from .coilmodel import default_settings as default_coils
from .coils import CoilPart
from .design import DesignPart, slider_values
from .detector import DetectorPart
from .model import Model, Picture, Settings, as_scenario
from .plumbing import Callbacks, bokeh_views, display_with_bokehjs, reserialise, start
from .tasks import Tasks
from .tradeoff import TradeoffCurve
from .widgets import (check_values, control_values, fit_deceleration, make_actions, make_controls, make_layout,
                      make_readouts, output_paths, read_settings, sync_log)
from .._base.files import atomic_write_text, make_folder
from .._base.validation import TiltwellError
from ..dynamics.capture import CaptureEstimates
from ..workflows.demo import DEMO_SCENARIO
from ..workflows.scenario import Scenario, save
from ..workflows.yields import YieldBudget

__all__ = ["DEMO", "Explorer", "explore"]

_log = logging.getLogger(__name__)
_T = TypeVar("_T")
#: The invented demo scenario shipped with the package.
DEMO = DEMO_SCENARIO


class Explorer:
    """Interactive planning of one scenario in a notebook; build it with :func:`explore`.

    Attributes
    ----------
    widget : ipywidgets.VBox
        The whole app; displaying the explorer displays it.
    controls : dict of str to Widget
        ``species``, ``gradient`` and ``max_field`` (quadrupole) or ``current`` (coils),
        ``deceleration``, ``deceleration_log``, ``log_scale``, ``initial_velocity`` (mean
        beam velocity), ``final_velocity``, ``relative_spread``, ``transverse_scale``,
        ``mismatch``, ``particles``. Setting a value in code acts like a slider move.
    actions : dict of str to Widget
        Buttons ``monte_carlo``, ``acceptance_6d``, ``tradeoff``, ``reset``,
        ``save_scenario``, ``save_figures``; path boxes ``scenario_path``, ``figures_path``;
        ``progress``.
    readouts : dict of str to ipywidgets.HTML
        The numbers as shown (mm·m/s, mK, m, ms), keyed as in
        ``tiltwell.explorer.widgets.READOUTS``, and ``critical``.
    state : dict of str to float
        The numbers shown, SI, named as in :data:`tiltwell.workflows.report.UNITS` where they appear
        there; NaN when not (yet) computed.
    sources : dict of str to bokeh ColumnDataSource
        The drawn data (positions in mm, energies in mK, velocities in m/s), keyed as in
        ``tiltwell.explorer.views.COLUMNS``: the particles drawn kept and lost in each
        phase plane are ``<plane>_kept`` and ``<plane>_lost``.
    figures : dict of str to bokeh figure
        ``potential``, ``longitudinal``, ``transverse``, ``tradeoff``.
    views : dict of str to jupyter_bokeh.BokehModel
        The figures as widgets, keyed alike (what the page shows).
    spans : dict of str to bokeh Span
        ``critical``: the critical deceleration marked on the trade-off figure.
    deceleration_box : ipywidgets.Box
        Holds the deceleration slider shown: the linear one, or the logarithmic one
        while ``log_scale`` is ticked.
    message : ipywidgets.HTML
        What is wrong with the current setting (empty when nothing is).
    status : ipywidgets.HTML
        Outcome of the last action.
    errors : list of Exception
        Unexpected errors caught in callbacks (a bug if not empty); also logged.
    coil_array : tiltwell.explorer.coils.CoilPart
        The coil-array part (a closed section under the buttons; it computes only while open).
    detector : tiltwell.explorer.detector.DetectorPart
        The detector part (a closed section under it): predicted time-of-flight traces, and
        a measured trace loaded and drawn over them. A Monte-Carlo check of a scenario with
        a ``[detector]`` also predicts its traces.
    design : tiltwell.explorer.design.DesignPart
        The design-space part (closed): a search's front, a chosen design into the sliders.
    """

    def __init__(self, scenario: Scenario | str | os.PathLike[str] | None = None, *,
                 auto_tradeoff: bool = True) -> None:
        base = as_scenario(scenario, DEMO)
        self._model = Model(base)
        self._kind = base.trap.kind
        self._lock = threading.RLock()
        self._generation = 0
        self._picture: Picture | None = None
        self._tracked: tuple[np.ndarray, np.ndarray] | None = None
        self.errors: list[Exception] = []
        self.state: dict[str, float] = {}
        self.message = widgets.HTML("")
        self.status = widgets.HTML("")
        self._tasks = Tasks(self._lock, self._report, self._unexpected)
        self._callbacks = on = Callbacks(self._report, self._unexpected)

        settings = self._settings = self._first = self._model.initial_settings()
        ref = self._model.reference
        top_velocity = ref.velocity * math.sqrt(5000.0 / ref.temperature)  # a scenario's hottest nozzle, 5000 K
        self.controls = make_controls(settings, self._kind, ref.critical, ref.velocity, top_velocity,
                                      base.species.mass is not None)
        self.actions = make_actions(*output_paths())
        self.readouts = make_readouts()
        self.figures, self.sources, self.spans = views.make_views()
        self.views = bokeh_views(self.figures)
        self._curve = TradeoffCurve(self._tasks, self.figures["tradeoff"], self.sources["tradeoff"],
                                    auto=bool(auto_tradeoff))
        self.deceleration_box = widgets.Box([self.controls["deceleration"]])
        self.widget = make_layout(self.controls, self.actions, self.readouts, self.views, self.message,
                                  self.status, self.deceleration_box)
        self.coil_array = CoilPart(default_coils(self._model), self._lock, self._unexpected)
        self.detector = DetectorPart(self._lock, self._unexpected)
        self.design = DesignPart(self._use_design, self._unexpected)
        self.widget.children = (*self.widget.children, self.coil_array.section, self.detector.section,
                                self.design.section)
        for name, control in self.controls.items():
            if name == "log_scale":
                on.observe(control, self._on_log_scale, even_when_quiet=True)
            elif name != "particles":
                on.observe(control, self._on_control)
        clicks: dict[str, Callable[[], object]] = {
            "monte_carlo": self.run_monte_carlo,
            "acceptance_6d": self.compute_6d,
            "tradeoff": self.update_tradeoff,
            "reset": self.reset,
            "save_scenario": lambda: self._report(
                html.escape(f"saved the scenario to {self.save_scenario(self.actions['scenario_path'].value)}")),
            "save_figures": lambda: self.save_figures(self.actions["figures_path"].value),
        }
        for name, action in clicks.items():
            on.on_click(self.actions[name], action)
        self._refresh()
        self.update_tradeoff()

    # --- display ------------------------------------------------------------------------------

    def _ipython_display_(self) -> None:
        """Publish BokehJS for the views, then the widget
        (:func:`tiltwell.explorer.plumbing.display_with_bokehjs`)."""
        display_with_bokehjs(self._fresh_widget())

    def _repr_mimebundle_(self, **kwargs: Any) -> Any:
        """The widget's bundle (IPython prefers :meth:`_ipython_display_`, which also
        loads BokehJS)."""
        return self._fresh_widget()._repr_mimebundle_(**kwargs)

    def _fresh_widget(self) -> widgets.VBox:
        """:attr:`widget`, its Bokeh views first re-serialised
        (:func:`tiltwell.explorer.plumbing.reserialise`)."""
        with self._lock:
            reserialise(self.views, self.figures)
            self.coil_array.fresh()
            self.detector.fresh()
            self.design.fresh()
        return self.widget

    # --- settings -----------------------------------------------------------------------------

    def _read_settings(self) -> Settings:
        return read_settings(self.controls, self._kind, self._first)

    def scenario(self) -> Scenario:
        """The scenario the controls describe, built from the loaded one with
        :meth:`tiltwell.Scenario.replace` and checked by :func:`tiltwell.workflows.report.build`.
        Raises TiltwellError when it is not valid (e.g. a zero deceleration or a final
        velocity not below the initial one)."""
        return self._model.scenario(self._read_settings())

    def update(self, **values: Any) -> None:
        """Set several controls at once, by their :attr:`controls` names, and redraw once.
        A value outside a control's range raises TiltwellError (a slider would clip it)."""
        check_values(self.controls, values)
        with self._callbacks.quieted():
            for name, value in values.items():
                self.controls[name].value = value
            if "deceleration_log" in values and "deceleration" not in values:
                self.controls["deceleration"].value = values["deceleration_log"]
            sync_log(self.controls)
        self._callbacks.guard(self._refresh)

    def _use_design(self, point: Mapping[str, float], row: Mapping[str, Any]) -> str:
        values, elsewhere = slider_values(point, row, self.controls)
        self.update(**values)
        rest = "; not sliders, set them in the scenario file: " + ", ".join(
            f"{name} = {value:.6g}" for name, value in elsewhere.items()) if elsewhere else ""
        return "design in the sliders: " + ", ".join(f"{name} = {value:.6g}" for name, value in values.items()) + rest

    def reset(self) -> None:
        """Set every control back to the loaded scenario."""
        self.update(**control_values(self._first, self._kind))
        self.update(deceleration=self._first.deceleration)

    def _report(self, text: str) -> None:
        self.status.value = text

    def _unexpected(self, error: Exception) -> None:
        self.errors.append(error)
        _log.error("tiltwell explorer: unexpected error", exc_info=error)
        self.message.value = readouts.warning(
            html.escape(f"internal error (please report it): {type(error).__name__}: {error}"))

    def _on_log_scale(self, change: dict[str, Any]) -> None:
        key = "deceleration_log" if change["new"] else "deceleration"
        self.deceleration_box.children = (self.controls[key],)

    def _on_control(self, change: dict[str, Any]) -> None:
        """A control moved (not in code inside :meth:`Callbacks.quieted`): keep the two
        deceleration sliders together, then redraw."""
        with self._callbacks.quieted():
            if change["owner"] is self.controls["deceleration_log"]:
                self.controls["deceleration"].value = change["new"]
            elif change["owner"] is self.controls["deceleration"]:
                sync_log(self.controls)
        self._refresh()

    # --- the cheap path: every control change ------------------------------------------------

    def _refresh(self) -> None:
        settings = self._read_settings()
        with self._lock:
            if self._picture is not None and settings == self._settings:
                return  # e.g. a slider drawn in the browser sending its value back
            if settings != self._settings:
                self._generation += 1
                self._tracked = None
            self._settings = settings
            try:
                with self._callbacks.quieted():
                    fit_deceleration(self.controls, self._model.critical(settings))
                picture = self._model.picture(settings)
            except TiltwellError as error:
                self._picture = None
                for name, source in self.sources.items():
                    source.data = views.empty_columns(name)
                self.state = {key: math.nan for key in self.state}
                for readout in self.readouts.values():
                    readout.value = "—"
                self.message.value = readouts.warning(html.escape(str(error)))
                self.coil_array.follow(None)
                self.detector.follow(None)
                return
            same = self._picture is not None and self._picture.settings == settings
            heavy = {key: self.state[key] for key in readouts.HEAVY if key in self.state} if same else {}
            self._picture = picture
            self.state = readouts.state_of(picture) | heavy
            views.draw(self.sources, self.figures, self.spans, picture, self.state["length"], self._tracked)
            self._show_readouts()
            self.message.value = readouts.warning("<br>".join(html.escape(t) for t in readouts.problems(picture)))
            if settings.tradeoff_key != self._curve.shown:
                key = settings.tradeoff_key
                self._curve.schedule(lambda: self._model.tradeoff_inputs(settings), key, lambda: self._current(key))
            self.coil_array.follow(picture)
            self.detector.follow(picture.scenario)

    def _show_readouts(self) -> None:
        for key, text in readouts.texts(self.state).items():
            self.readouts[key].value = text
        if self._picture is not None and self._picture.coils is None:
            self.readouts["coils"].value = f"— ({html.escape(self._picture.coils_note)})"

    # --- the trade-off curve ------------------------------------------------------------------

    def _current(self, key: tuple[Any, ...]) -> bool:
        return self._settings.tradeoff_key == key

    def update_tradeoff(self) -> None:
        """Recompute the trade-off curve now, in this thread."""
        with self._lock:
            if self._picture is None:
                return
            key, inputs = self._settings.tradeoff_key, self._model.tradeoff_inputs(self._settings)
        self._curve.compute_now(inputs, key, lambda: self._current(key))

    # --- heavy checks, in the background ------------------------------------------------------

    def _start(self, name: str, text: str, button: str, compute: Callable[[], _T],
               apply: Callable[[_T], None]) -> Future[_T | None]:
        """``compute`` in the background, its progress shown, ``apply`` if the settings
        have not changed by then (:func:`tiltwell.explorer.plumbing.start`)."""
        generation = self._generation
        return start(self._tasks, name, compute, apply, lambda: self._generation == generation, text=text,
                     show=lambda value: setattr(self.actions["progress"], "value", value), button=self.actions[button])

    def run_monte_carlo(self) -> Future[CaptureEstimates | None]:
        """Start the three captured-fraction estimates of :func:`tiltwell.capture_estimates`,
        called as :func:`tiltwell.summarise` calls it (:func:`tiltwell.explorer.checks.monte_carlo`),
        for the current settings (the ``particles`` control sets the sample), in the
        background. When they are shown, the phase planes mark the first particles of the
        check's own sample (:attr:`tiltwell.CaptureEstimates.sample`) kept or lost by
        their trajectories.

        Returns its ``concurrent.futures.Future``: ``.result()`` waits and gives the
        :class:`~tiltwell.CaptureEstimates` (also when discarded because the settings
        changed, then not shown), or None when it failed; the outcome is in
        :attr:`status`. Raises TiltwellError when the settings make no valid scenario.
        """
        scenario = self.scenario()
        picture = self._picture
        if picture is None or picture.schedule is None:
            raise TiltwellError("the settings make no schedule: nothing to check")

        def apply(estimates: CaptureEstimates) -> None:
            self.state.update(monte_carlo_state(estimates))
            tracked = tracked_particles(estimates)
            if tracked is not None and self._picture is not None:
                self._tracked = tracked
                views.draw(self.sources, self.figures, self.spans, self._picture, self.state["length"], tracked)
            self._show_readouts()
            self._start("yield budget", "slow particles per shot", "monte_carlo",
                        lambda: slow_particles(scenario, estimates), lambda budget: show_budget(budget, estimates))

        def show_budget(budget: YieldBudget, estimates: CaptureEstimates) -> None:
            self.state.update(budget_state(budget))
            self._show_readouts()
            self.detector.take(scenario, estimates, budget)

        return self._start("Monte-Carlo check", f"Monte-Carlo check, {scenario.simulation.particles} particles",
                           "monte_carlo", lambda: monte_carlo(picture, scenario), apply)

    def compute_6d(self) -> Future[float | None]:
        """Start the energetic 6-D acceptance (:func:`tiltwell.trap_acceptance` with 6-D)
        at the current settings, in the background; shown when done. Returns its future:
        ``.result()`` gives the volume [(m·m/s)^3], or None when it failed."""
        picture = self._picture
        if picture is None:
            raise TiltwellError("the settings make no trap: nothing to compute")
        samples, rtol = self._model.samples, self._model.rtol

        def apply(volume: float) -> None:
            self.state["acceptance_6d"] = volume
            self._show_readouts()

        return self._start("6-D acceptance", "6-D acceptance", "acceptance_6d",
                           lambda: volume_6d(picture, samples, rtol), apply)

    def wait(self, timeout: float | None = None) -> None:
        """Start a pending trade-off update at once and wait for all background work."""
        self._tasks.flush(timeout)
        self.coil_array.wait(timeout)
        self.detector.wait(timeout)

    def close(self) -> None:
        """Stop background work (waiting for a running task to end) and close the page.
        The Bokeh views close themselves when collected (closing one twice fails in
        jupyter_bokeh 4.1)."""
        self._tasks.shutdown()
        self.coil_array.close()
        self.detector.close()
        self.widget.close()

    # --- files --------------------------------------------------------------------------------

    def save_scenario(self, path: str | os.PathLike[str]) -> Path:
        """Write :meth:`scenario` to ``path`` (TOML, atomically, :func:`tiltwell.workflows.scenario.save`)."""
        if not str(path).strip():  # Path("") would be the current folder
            raise TiltwellError(f"scenario file must be named; got {str(path)!r}")
        make_folder(Path(path).parent, "scenario folder")
        return save(self.scenario(), path)

    def save_figures(self, out: str | os.PathLike[str]) -> Future[list[Path] | None]:
        """Start writing the static figures of :meth:`scenario` to the folder ``out``, in
        the background: :func:`tiltwell.workflows.figure_data.scenario_figure_data` runs
        the whole scenario (trajectories included), ``tiltwell.figures.scenario_figures``
        draws and writes. Returns the future of the list of paths (None when it failed,
        or at once when the figures module is missing; :attr:`status` says so). A bad folder
        name (empty, a file, not creatable) raises TiltwellError at once."""
        try:
            make = importlib.import_module("tiltwell.figures").scenario_figures
        except (ImportError, AttributeError):
            self._report("static figures need tiltwell.figures.scenario_figures, which this installation lacks")
            return Tasks.finished(None)
        from ..workflows.figure_data import scenario_figure_data

        make_folder(out, "figures folder")  # a bad name is a TiltwellError (a status line) at once
        scenario = self.scenario()

        def apply(paths: object) -> None:
            self._report(html.escape(f"figures written to {out}"))

        return self._tasks.run("save figures", lambda: list(make(scenario_figure_data(scenario), Path(out))), apply,
                               lambda: True)

    def save_html(self, path: str | os.PathLike[str]) -> Path:
        """Write the readouts and the four views as one standalone interactive HTML page,
        BokehJS inlined (``bokeh.resources.INLINE``: no network needed), atomically."""
        with self._lock:
            species = self._settings.species
            shown = {key: readout.value for key, readout in self.readouts.items()}
            page = views.standalone_html(self.figures, readouts.page_header(species, shown),
                                         f"tiltwell explorer: {species}")
        return atomic_write_text(Path(path), page)


def explore(scenario: Scenario | str | os.PathLike[str] | None = None, *, auto_tradeoff: bool = True) -> Explorer:
    """The explorer for ``scenario`` (a :class:`tiltwell.Scenario` or the path of a TOML
    file); by default the invented demo. With ``auto_tradeoff=False`` the trade-off curve
    is recomputed only when asked (its button or :meth:`Explorer.update_tradeoff`)."""
    return Explorer(scenario, auto_tradeoff=auto_tradeoff)

