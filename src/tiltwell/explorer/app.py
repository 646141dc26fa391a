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
and the message area says what is wrong.

BokehJS reaches the notebook through the ``jupyter_bokeh`` extension, and
:meth:`Explorer.save_html` inlines it: nothing is fetched from a content network, and
nothing here calls ``bokeh.io.output_notebook``.
"""

from __future__ import annotations

import contextlib
import html
import importlib
import logging
import math
import os
import threading
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import ipywidgets as widgets
import numpy as np
from bokeh.resources import INLINE
from jupyter_bokeh import BokehModel

from . import readouts
from . import views
from .coilmodel import default_settings as default_coils
from .coils import CoilPart
from .model import VIEW_PARTICLES, Model, Picture, Settings, tradeoff
from .tasks import Tasks
from .widgets import (
    READOUTS,
    check_values,
    fit_deceleration,
    make_actions,
    make_controls,
    make_layout,
    make_readouts,
    sync_log,
)
from .._base.files import atomic_write_text
from .._base.validation import TiltwellError
from ..wells.acceptance import trap_acceptance
from ..dynamics.capture import CaptureEstimates, capture_estimates
from ..workflows.demo import DEMO_SCENARIO
from ..workflows.scenario import Scenario, load, save

__all__ = ["DEMO", "Explorer", "explore"]

_log = logging.getLogger(__name__)
#: The invented demo scenario shipped with the package.
DEMO = DEMO_SCENARIO
#: Seconds of quiet after a trap or beam change before the trade-off curve is recomputed.
TRADEOFF_DELAY = 0.4
_TRADEOFF_TITLE = "trade-off against deceleration"


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
        The drawn data (positions in mm, energies in mK, velocities in m/s).
    figures : dict of str to bokeh figure
        ``potential``, ``longitudinal``, ``transverse``, ``tradeoff``.
    message : ipywidgets.HTML
        What is wrong with the current setting (empty when nothing is).
    status : ipywidgets.HTML
        Outcome of the last action.
    errors : list of Exception
        Unexpected errors caught in callbacks (a bug if not empty); also logged.
    coil_array : tiltwell.explorer.coils.CoilPart
        The coil-array part (a closed section under the buttons; it computes only while open).
    """

    def __init__(self, scenario: Scenario | str | os.PathLike[str] | None = None, *,
                 auto_tradeoff: bool = True) -> None:
        base = _scenario(scenario)
        self._model = Model(base)
        self._kind = base.trap.kind
        self._auto_tradeoff = bool(auto_tradeoff)
        self._lock = threading.RLock()
        self._quiet = 0
        self._generation = 0
        self._picture: Picture | None = None
        self._tracked: tuple[np.ndarray, np.ndarray] | None = None
        self._tradeoff_shown: tuple[Any, ...] | None = None
        self.errors: list[Exception] = []
        self.state: dict[str, float] = {}
        self.message = widgets.HTML("")
        self.status = widgets.HTML("")
        self._tasks = Tasks(self._lock, self._report, self._unexpected)

        settings = self._settings = self._first = self._model.initial_settings()
        ref = self._model.reference
        top_velocity = ref.velocity * math.sqrt(5000.0 / ref.temperature)  # a scenario's hottest nozzle, 5000 K
        self.controls = make_controls(settings, self._kind, ref.critical, ref.velocity, top_velocity,
                                      base.species.mass is not None)
        self.actions = make_actions("tiltwell-scenario.toml", "tiltwell-figures")
        self.readouts = make_readouts()
        self.figures, self.sources, self._spans = views.make_views()
        self._views = {name: BokehModel(figure) for name, figure in self.figures.items()}
        self._deceleration_box = widgets.Box([self.controls["deceleration"]])
        self.widget = make_layout(self.controls, self.actions, self.readouts, self._views, self.message,
                                  self.status, self._deceleration_box)
        self.coil_array = CoilPart(default_coils(self._model), self._lock, self._unexpected)
        self.widget.children = (*self.widget.children[:-1], self.coil_array.section, self.widget.children[-1])
        for name, control in self.controls.items():
            if name == "log_scale":
                control.observe(self._on_log_scale, names="value")
            elif name != "particles":
                control.observe(self._on_control, names="value")
        clicks: dict[str, Callable[[], object]] = {
            "monte_carlo": lambda: self.run_monte_carlo(wait=False),
            "acceptance_6d": lambda: self.compute_6d(wait=False),
            "tradeoff": self.update_tradeoff,
            "reset": self.reset,
            "save_scenario": lambda: self._report(
                html.escape(f"saved the scenario to {self.save_scenario(self.actions['scenario_path'].value)}")),
            "save_figures": lambda: self.save_figures(self.actions["figures_path"].value, wait=False),
        }
        for name, action in clicks.items():
            self.actions[name].on_click(lambda _, act=action: self._guard(act))
        self._refresh()
        self.update_tradeoff()

    # --- display ------------------------------------------------------------------------------

    def _ipython_display_(self) -> None:
        """Publish BokehJS (inline, from the installed bokeh: no network) for the views,
        then the widget. jupyter_bokeh's views need BokehJS in the page (bokeh/jupyter_bokeh
        issue 150); publishing it with each display keeps a re-opened notebook working."""
        from bokeh.io.notebook import load_notebook
        from IPython.display import display

        load_notebook(resources=INLINE, hide_banner=True)
        display(self._fresh_widget())

    def _repr_mimebundle_(self, **kwargs: Any) -> Any:
        """The widget's bundle (IPython prefers :meth:`_ipython_display_`, which also
        loads BokehJS)."""
        return self._fresh_widget()._repr_mimebundle_(**kwargs)

    def _fresh_widget(self) -> widgets.VBox:
        """:attr:`widget`, its Bokeh views first re-serialised: a jupyter_bokeh view draws
        the document as it was serialised, and changes made before any view existed
        reach no view."""
        with self._lock:
            for view, figure in zip(self._views.values(), self.figures.values()):
                view.update_from_model(figure)
            self.coil_array.fresh()
        return self.widget

    # --- settings -----------------------------------------------------------------------------

    def _read_settings(self) -> Settings:
        """The control values, SI. A value within 1e-9 of the loaded scenario's counts as
        it: a browser slider sends back the value it drew, rounded in its last digits."""
        c, first = self.controls, self._first

        def value(name: str, loaded: float) -> float:
            number = float(c[name].value)
            return loaded if math.isclose(number, loaded, rel_tol=1e-9, abs_tol=1e-12) else number

        names = ("gradient", "max_field") if self._kind == "quadrupole" else ("current",)
        return Settings(
            species=c["species"].value, trap=tuple(value(n, v) for n, v in zip(names, first.trap)),
            deceleration=value("deceleration", first.deceleration),
            initial_velocity=value("initial_velocity", first.initial_velocity),
            final_velocity=value("final_velocity", first.final_velocity),
            relative_spread=value("relative_spread", first.relative_spread),
            transverse_scale=value("transverse_scale", first.transverse_scale),
            mismatch=value("mismatch", first.mismatch), particles=int(c["particles"].value),
        )

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
        with self._quieted():
            for name, value in values.items():
                self.controls[name].value = value
            if "deceleration_log" in values and "deceleration" not in values:
                self.controls["deceleration"].value = values["deceleration_log"]
            sync_log(self.controls)
        self._guard(self._refresh)

    def reset(self) -> None:
        """Set every control back to the loaded scenario."""
        first = self._first
        trap = dict(zip(("gradient", "max_field") if self._kind == "quadrupole" else ("current",), first.trap))
        self.update(species=first.species, **trap, initial_velocity=first.initial_velocity,
                    final_velocity=first.final_velocity, relative_spread=first.relative_spread,
                    transverse_scale=first.transverse_scale, mismatch=first.mismatch, particles=first.particles)
        self.update(deceleration=first.deceleration)

    @contextlib.contextmanager
    def _quieted(self) -> Iterator[None]:
        self._quiet += 1
        try:
            yield
        finally:
            self._quiet -= 1

    def _guard(self, action: Callable[[], object]) -> None:
        """Run a callback; a TiltwellError goes to the status line, anything else there
        too and into :attr:`errors`. Nothing escapes."""
        try:
            action()
        except TiltwellError as error:
            self._report(html.escape(str(error)))
        except Exception as error:  # noqa: BLE001 - a widget callback must never raise
            self._unexpected(error)

    def _report(self, text: str) -> None:
        self.status.value = text

    def _unexpected(self, error: Exception) -> None:
        self.errors.append(error)
        _log.error("tiltwell explorer: unexpected error", exc_info=error)
        self.message.value = readouts.warning(
            html.escape(f"internal error (please report it): {type(error).__name__}: {error}"))

    def _on_log_scale(self, change: dict[str, Any]) -> None:
        key = "deceleration_log" if change["new"] else "deceleration"
        self._deceleration_box.children = (self.controls[key],)

    def _on_control(self, change: dict[str, Any]) -> None:
        if self._quiet:
            return
        with self._quieted():
            if change["owner"] is self.controls["deceleration_log"]:
                self.controls["deceleration"].value = change["new"]
            elif change["owner"] is self.controls["deceleration"]:
                sync_log(self.controls)
        self._guard(self._refresh)

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
                with self._quieted():
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
                return
            same = self._picture is not None and self._picture.settings == settings
            heavy = {key: self.state[key] for key in readouts.HEAVY if key in self.state} if same else {}
            self._picture = picture
            self.state = readouts.state_of(picture) | heavy
            views.draw(self.sources, self.figures, self._spans, picture, self.state["length"], self._tracked)
            self._show_readouts()
            self.message.value = readouts.warning("<br>".join(html.escape(t) for t in readouts.problems(picture)))
            if settings.tradeoff_key != self._tradeoff_shown:
                self._schedule_tradeoff(settings)
            self.coil_array.follow(picture)

    def _show_readouts(self) -> None:
        for key, text in readouts.texts(self.state).items():
            self.readouts[key].value = text
        if self._picture is not None and self._picture.coils is None:
            self.readouts["coils"].value = f"— ({html.escape(self._picture.coils_note)})"

    # --- the trade-off curve ------------------------------------------------------------------

    def _schedule_tradeoff(self, settings: Settings) -> None:
        if not self._auto_tradeoff:
            self.figures["tradeoff"].title.text = f"{_TRADEOFF_TITLE} (out of date: press “update trade-off now”)"
            return
        self.figures["tradeoff"].title.text = f"{_TRADEOFF_TITLE} (updating…)"
        inputs, key = self._model.tradeoff_inputs(settings), settings.tradeoff_key
        self._tasks.later(TRADEOFF_DELAY, lambda: self._tasks.run(
            "trade-off curve", lambda: tradeoff(inputs), lambda data: self._show_tradeoff(key, data),
            lambda: self._settings.tradeoff_key == key, wait=False))

    def update_tradeoff(self) -> None:
        """Recompute the trade-off curve now, in this thread."""
        self._tasks.cancel()
        with self._lock:
            settings = self._settings
            if self._picture is None:
                return
            inputs = self._model.tradeoff_inputs(settings)
        data = tradeoff(inputs)
        with self._lock:
            if self._settings.tradeoff_key == settings.tradeoff_key:
                self._show_tradeoff(settings.tradeoff_key, data)

    def _show_tradeoff(self, key: tuple[Any, ...], data: dict[str, np.ndarray]) -> None:
        self.sources["tradeoff"].data = data
        self.figures["tradeoff"].title.text = _TRADEOFF_TITLE
        self._tradeoff_shown = key

    # --- heavy checks, in the background ------------------------------------------------------

    def _progress(self, text: str, button: str) -> Callable[[], None]:
        def busy(on: bool) -> None:
            self.actions[button].disabled = on

        def show(value: str) -> None:
            self.actions["progress"].value = value

        return self._tasks.ticking(text, show, busy)

    def run_monte_carlo(self, wait: bool = True) -> Any:
        """The three captured-fraction estimates of :func:`tiltwell.capture_estimates`,
        called as :func:`tiltwell.summarise` calls it, for the current settings (the
        ``particles`` control sets the sample). The phase planes then mark the first
        drawn particles by their trajectories.

        Returns the :class:`~tiltwell.CaptureEstimates` (``wait``; None if it failed or
        was discarded, with the reason in :attr:`status`) or a ``concurrent.futures.Future``.
        Raises TiltwellError when the settings make no valid scenario.
        """
        scenario = self.scenario()
        picture = self._picture
        if picture is None or picture.schedule is None:
            raise TiltwellError("the settings make no schedule: nothing to check")
        sim, schedule, generation = scenario.simulation, picture.schedule, self._generation
        trap, beam, mismatch = picture.trap, picture.beam, picture.settings.mismatch
        stop = self._progress(f"Monte-Carlo check, {sim.particles} particles", "monte_carlo")

        def compute() -> CaptureEstimates:
            try:
                return capture_estimates(
                    trap, schedule.deceleration, beam, schedule.duration, particles=sim.particles, seed=sim.seed,
                    mismatch=mismatch, time_step=sim.time_step, method=sim.method, track_particles=sim.track,
                    rtol=sim.rtol, switch_on_time=min(sim.switch_on_time, schedule.duration))
            finally:
                stop()

        def apply(estimates: CaptureEstimates) -> None:
            self.state.update(
                acceptance_6d=estimates.acceptance.volume, captured_fraction_energy=estimates.energetic,
                captured_fraction_energy_error=estimates.energetic_error, captured_fraction_mc=estimates.tracked,
                captured_fraction_mc_error=estimates.tracked_error, mc_particles=float(estimates.particles))
            if estimates.tracking is not None and self._picture is not None:
                # capture_estimates' own sample, drawn again: the same call with the same seed
                sample = beam.sample(estimates.particles, seed=sim.seed)[:VIEW_PARTICLES]
                sample[:, 5] -= mismatch
                self._tracked = (sample, estimates.tracking.kept[: sample.shape[0]])
                views.draw(self.sources, self.figures, self._spans, self._picture, self.state["length"],
                           self._tracked)
            self._show_readouts()

        return self._tasks.run("Monte-Carlo check", compute, apply, lambda: self._generation == generation,
                               wait=wait)

    def compute_6d(self, wait: bool = True) -> Any:
        """The energetic 6-D acceptance (:func:`tiltwell.trap_acceptance` with 6-D) at the
        current settings, shown when done. Returns the volume [(m·m/s)^3] (``wait``) or a
        future."""
        picture = self._picture
        if picture is None:
            raise TiltwellError("the settings make no trap: nothing to compute")
        trap, a, generation = picture.trap, picture.settings.deceleration, self._generation
        samples, rtol = self._model.samples, self._model.rtol
        stop = self._progress("6-D acceptance", "acceptance_6d")

        def compute() -> float:
            try:
                return trap_acceptance(trap, a, samples=samples, rtol=rtol).volume
            finally:
                stop()

        def apply(volume: float) -> None:
            self.state["acceptance_6d"] = volume
            self._show_readouts()

        return self._tasks.run("6-D acceptance", compute, apply, lambda: self._generation == generation, wait=wait)

    def wait(self, timeout: float | None = None) -> None:
        """Start a pending trade-off update at once and wait for all background work."""
        self._tasks.flush(timeout)
        self.coil_array.wait(timeout)

    def close(self) -> None:
        """Stop background work (waiting for a running task to end) and close the page.
        The Bokeh views close themselves when collected (closing one twice fails in
        jupyter_bokeh 4.1)."""
        self._tasks.shutdown()
        self.coil_array.close()
        self.widget.close()

    # --- files --------------------------------------------------------------------------------

    def save_scenario(self, path: str | os.PathLike[str]) -> Path:
        """Write :meth:`scenario` to ``path`` (TOML, atomically, :func:`tiltwell.workflows.scenario.save`)."""
        return save(self.scenario(), path)

    def save_figures(self, out: str | os.PathLike[str], wait: bool = True) -> Any:
        """Static figures of :meth:`scenario` in the folder ``out``, through
        ``tiltwell.figures.scenario_figures`` (in the background unless ``wait``; it runs
        the whole scenario, trajectories included). Returns its list of paths (``wait``)
        or a future; None, saying so in :attr:`status`, when that module is missing."""
        try:
            make = importlib.import_module("tiltwell.figures").scenario_figures
        except (ImportError, AttributeError):
            self._report("static figures need tiltwell.figures.scenario_figures, which this installation lacks")
            return None
        scenario = self.scenario()

        def apply(paths: object) -> None:
            self._report(html.escape(f"figures written to {out}"))

        return self._tasks.run("save figures", lambda: make(scenario, Path(out)), apply, lambda: True, wait=wait)

    def save_html(self, path: str | os.PathLike[str]) -> Path:
        """Write the readouts and the four views as one standalone interactive HTML page,
        BokehJS inlined (``bokeh.resources.INLINE``: no network needed), atomically."""
        with self._lock:
            species = self._settings.species
            rows = "".join(f"<tr><td>{html.escape(label)}</td><td>{self.readouts[key].value}</td></tr>"
                           for key, label in READOUTS)
            header = (f"<b>tiltwell explorer</b>: {html.escape(species)}, {self.readouts['critical'].value}"
                      f"<table>{rows}</table>")
            page = views.standalone_html(self.figures, header, f"tiltwell explorer: {species}")
        return atomic_write_text(Path(path), page)


def explore(scenario: Scenario | str | os.PathLike[str] | None = None, *, auto_tradeoff: bool = True) -> Explorer:
    """The explorer for ``scenario`` (a :class:`tiltwell.Scenario` or the path of a TOML
    file); by default the invented demo. With ``auto_tradeoff=False`` the trade-off curve
    is recomputed only when asked (its button or :meth:`Explorer.update_tradeoff`)."""
    return Explorer(scenario, auto_tradeoff=auto_tradeoff)


def _scenario(scenario: Scenario | str | os.PathLike[str] | None) -> Scenario:
    if scenario is None:
        return load(DEMO)
    if isinstance(scenario, Scenario):
        return scenario
    if isinstance(scenario, (str, os.PathLike)):
        return load(scenario)
    raise TiltwellError(f"scenario must be a Scenario, a path to a TOML file, or None; got {type(scenario).__name__}")
