"""The explorer's coil-array part: a row of thin coils whose currents carry the field zero
along the beam axis, with sliders for the row and three Bokeh views.

The species and the deceleration are the main explorer's; so is the trap box, within
which the trap made by the coils must hold its particles. The part works only while its
section is open. Every change redraws the currents (cheap:
:func:`tiltwell.coils.array.waveforms`); the depth and acceptances against the trap's phase
between two coils (:func:`tiltwell.coils.moving.moving_trap_phases`, ~0.5 s) are recomputed in
the background a moment after the settings stop changing, or on the button, and a result
that arrives after the settings changed is discarded. Bad settings never raise out of a
control: the message line says what is wrong.
"""

from __future__ import annotations

import contextlib
import html
import math
import threading
from collections.abc import Callable, Iterator
from typing import Any

import ipywidgets as widgets
import numpy as np
from jupyter_bokeh import BokehModel

from . import coilviews as views
from .coilmodel import (
    NO_INPUTS,
    PHASES,
    CoilSettings,
    Inputs,
    currents,
    inputs_of,
    problems,
    scan,
)
from .model import Picture
from .readouts import warning
from .tasks import Tasks
from .widgets import grid
from .._base.validation import TiltwellError
from ..physics.hardware import ELECTRICAL_CAUTION
from ..coils.moving import PhaseScan

__all__ = ["READOUTS", "SCAN_DELAY", "TITLE", "CoilPart"]

#: Seconds of quiet after a change before the phase scan is recomputed.
SCAN_DELAY = 0.5
#: The section's title in the explorer.
TITLE = "coil array: currents, and the trap between two coils"
#: Readout keys and labels, in display order.
READOUTS: tuple[tuple[str, str], ...] = (
    ("peak_current", "peak current per turn"),
    ("limit", "current limit reached"),
    ("ripple", "depth ripple (peak-to-peak / mean)"),
    ("worst", "worst phase: longitudinal / transverse"),
    ("mean", "mean over the phases: long. / trans."),
    ("zero_offset", "largest field-zero offset"),
)
_SCANNED = ("ripple", "worst", "mean", "zero_offset")
_STYLE = {"description_width": "190px"}
_WIDE = widgets.Layout(width="440px")
_TITLES = {"depth": "well depth between two coils", "acceptance": "acceptances between two coils"}


def _slider(value: float, low: float, high: float, step: float, description: str, tooltip: str) -> widgets.FloatSlider:
    low, high, step = grid(value, low, high, step)
    return widgets.FloatSlider(value=value, min=low, max=high, step=step, description=description, tooltip=tooltip,
                               readout_format=".4g", style=_STYLE, layout=_WIDE)


def make_controls(s: CoilSettings) -> dict[str, widgets.Widget]:
    """Sliders set to ``s``; ``pitch`` and ``radius`` in mm, the rest SI."""
    pitch, radius = s.pitch * 1e3, s.radius * 1e3
    return {
        "pitch": _slider(pitch, 0.25 * pitch, 3.0 * pitch, pitch / 200.0, "coil pitch [mm]",
                         "distance between neighbouring coils"),
        "radius": _slider(radius, 0.2 * radius, 3.0 * radius, radius / 200.0, "coil radius [mm]",
                          "mean radius of the (thin) windings: the bore"),
        "turns": widgets.IntSlider(value=s.turns, min=1, max=max(10, 4 * s.turns), description="turns per coil",
                                   style=_STYLE, layout=_WIDE),
        "active": widgets.IntSlider(value=s.active, min=2, max=12, step=2, description="coils carrying current",
                                    tooltip="how many coils nearest the trap carry current at once",
                                    style=_STYLE, layout=_WIDE),
        "max_current": _slider(s.max_current, 0.05 * s.max_current, 4.0 * s.max_current, s.max_current / 200.0,
                               "current limit per turn [A]", "largest current per turn the drivers give"),
        "gradient": _slider(s.gradient, 0.1 * s.gradient, 4.0 * s.gradient, s.gradient / 200.0,
                            "wanted gradient [T/m]", "axial gradient dB_z/dz asked of the coils at the field zero"),
    }


class CoilPart:
    """The coil-array part of :class:`tiltwell.explorer.Explorer` (its ``coil_array``).

    Attributes
    ----------
    section : ipywidgets.Accordion
        What the explorer shows: :attr:`widget` in a section, closed at first.
    widget : ipywidgets.VBox
        The part itself (CSS class ``tiltwell-coils``).
    controls : dict of str to Widget
        ``pitch`` [mm], ``radius`` [mm], ``turns``, ``active``, ``max_current`` [A],
        ``gradient`` [T/m].
    actions : dict of str to Widget
        Buttons ``scan`` and ``reset``.
    readouts : dict of str to ipywidgets.HTML
        Keyed as in :data:`READOUTS`.
    state : dict of str to float
        The numbers shown, SI: ``peak_current`` [A], ``limited`` (1 or 0),
        ``lowest_gradient`` [T/m], ``ripple``, ``worst_phase`` [pitch],
        ``worst_longitudinal``, ``worst_transverse``, ``mean_longitudinal``,
        ``mean_transverse`` [m·m/s], ``max_zero_offset`` [m]; NaN when not computed.
    sources, figures : dict
        The drawn data (see :mod:`tiltwell.explorer.coilviews`) and the Bokeh figures
        ``currents``, ``depth``, ``acceptance``.
    message, status : ipywidgets.HTML
        What is wrong with the settings; the outcome of the last phase scan.
    auto_scan : bool
        Rescan in the background after changes (else only on the button or :meth:`scan`).
    """

    def __init__(self, defaults: CoilSettings, lock: threading.RLock, unexpected: Callable[[Exception], None],
                 *, auto_scan: bool = True) -> None:
        self.defaults = defaults
        self.auto_scan = auto_scan
        self._lock = lock
        self._unexpected = unexpected
        self._quiet = 0
        self._inputs: Inputs = NO_INPUTS
        self._drawn: tuple[Any, ...] | None = None
        self._scanned: tuple[Any, ...] | None = None
        self.state: dict[str, float] = {}
        self.message = widgets.HTML("")
        self.status = widgets.HTML("")
        self._tasks = Tasks(lock, self._report, unexpected)
        self.controls = make_controls(defaults)
        self.actions = {
            "scan": widgets.Button(description="scan the phases now", tooltip="depth and acceptances at each phase"),
            "reset": widgets.Button(description="reset the coils", tooltip="back to the starting coil settings"),
        }
        self.readouts = {key: widgets.HTML("—") for key, _ in READOUTS}
        self.figures, self.sources, self._spans = views.make_views()
        self._views = {name: BokehModel(figure) for name, figure in self.figures.items()}
        self.widget = self._layout()
        self.section = widgets.Accordion(children=[self.widget], titles=(TITLE,))
        self.section.add_class("tiltwell-coils-section")
        self.section.observe(lambda change: self._guard(self.refresh) if change["new"] == 0 else None,
                             names="selected_index")
        for control in self.controls.values():
            control.observe(self._on_control, names="value")
        self.actions["scan"].on_click(lambda _: self._guard(lambda: self.scan(wait=False)))
        self.actions["reset"].on_click(lambda _: self._guard(self.reset))

    def _layout(self) -> widgets.VBox:
        title = widgets.HTML("<b>coil array</b> — the trap made by a row of thin coils; species, deceleration and "
                             "trap box are those set above")
        left = widgets.VBox([*self.controls.values(), widgets.HBox(list(self.actions.values()))],
                            layout=widgets.Layout(width="450px"))
        cells: list[widgets.Widget] = []
        for key, label in READOUTS:
            cells += [widgets.HTML(html.escape(label)), self.readouts[key]]
        table = widgets.GridBox(cells, layout=widgets.Layout(grid_template_columns="250px 300px", width="560px"))
        table.add_class("tiltwell-coils-readouts")
        caution = widgets.HTML(f"<small>{html.escape(ELECTRICAL_CAUTION)}</small>", layout=widgets.Layout(width="440px"))
        for name, view in self._views.items():
            view.add_class(f"tiltwell-coils-view-{name}")
        plots = widgets.GridBox([widgets.VBox([self._views["currents"], caution]), self._views["depth"],
                                 self._views["acceptance"]],
                                layout=widgets.Layout(grid_template_columns="repeat(2, 460px)"))
        root = widgets.VBox([title, widgets.HBox([left, table]), self.message, self.status, plots])
        root.add_class("tiltwell-coils")
        return root

    # --- settings -----------------------------------------------------------------------------

    @property
    def is_open(self) -> bool:
        """Whether the section is open (the part computes only then)."""
        return self.section.selected_index == 0

    def open(self) -> None:
        """Open the section (and draw)."""
        self.section.selected_index = 0

    def settings(self) -> CoilSettings:
        """The control values, SI."""
        c = self.controls
        return CoilSettings(pitch=float(c["pitch"].value) * 1e-3, radius=float(c["radius"].value) * 1e-3,
                            turns=int(c["turns"].value), active=int(c["active"].value),
                            max_current=float(c["max_current"].value), gradient=float(c["gradient"].value))

    def update(self, **values: Any) -> None:
        """Set several controls at once, by their :attr:`controls` names, and redraw once.
        An unknown name or a value outside a control's range raises TiltwellError."""
        for name, value in values.items():
            if name not in self.controls:
                raise TiltwellError(f"unknown control {name!r}; known: {', '.join(self.controls)}")
            control = self.controls[name]
            if isinstance(value, bool) or not isinstance(value, (int, float)) or not (
                    control.min <= value <= control.max):
                raise TiltwellError(f"{name} must be a number in [{control.min:g}, {control.max:g}] (the control's "
                                    f"range); got {value!r}")
        with self._quieted():
            for name, value in values.items():
                self.controls[name].value = value
        self._guard(self.refresh)

    def reset(self) -> None:
        """Set every control back to :attr:`defaults`."""
        d = self.defaults
        self.update(pitch=d.pitch * 1e3, radius=d.radius * 1e3, turns=d.turns, active=d.active,
                    max_current=d.max_current, gradient=d.gradient)

    def follow(self, picture: Picture | None) -> None:
        """Take the main explorer's current picture (None: its settings make no trap)."""
        if picture is None:
            inputs = NO_INPUTS
        else:
            reference = (picture.acceptance.longitudinal.depth, picture.acceptance.longitudinal.area,
                         picture.acceptance.transverse.area)
            inputs = inputs_of(picture.trap, picture.settings.deceleration, reference, picture.schedule,
                               "; ".join(picture.problems))
        with self._lock:
            self._inputs = inputs
        if self.is_open:
            self._guard(self.refresh)

    @contextlib.contextmanager
    def _quieted(self) -> Iterator[None]:
        self._quiet += 1
        try:
            yield
        finally:
            self._quiet -= 1

    def _on_control(self, change: dict[str, Any]) -> None:
        if not self._quiet:
            self._guard(self.refresh)

    def _guard(self, action: Callable[[], object]) -> None:
        try:
            action()
        except TiltwellError as error:
            self.message.value = warning(html.escape(str(error)))
        except Exception as error:  # noqa: BLE001 - a widget callback must never raise
            self._unexpected(error)

    def _report(self, text: str) -> None:
        self.status.value = text

    # --- the cheap path -----------------------------------------------------------------------

    def refresh(self) -> None:
        """Redraw the currents and the reference lines, and mark the phase scan out of
        date (rescanning in the background when :attr:`auto_scan`). Does nothing while
        the section is closed."""
        if not self.is_open:
            return
        with self._lock:
            settings, inputs = self.settings(), self._inputs
            key = (settings, inputs.current_key, inputs.scan_key, inputs.reference)
            if key == self._drawn:
                return
            self._drawn = key
            found_scan, found_currents = problems(settings, inputs)
            found = list(dict.fromkeys(found_scan + found_currents))
            found += self._draw_currents(settings, inputs, found_currents)
            lines = views.reference_columns(*inputs.reference) if inputs.species is not None else {}
            for name in views.PHASE_FIGURES:
                self._fill(name + "_reference", lines)
            self._mark_scan(settings, inputs, found_scan)
            self.message.value = warning("<br>".join(html.escape(text) for text in found))

    def _draw_currents(self, settings: CoilSettings, inputs: Inputs, found: list[str]) -> list[str]:
        """Draw the currents; returns what went wrong beyond ``found``."""
        nan, more = math.nan, []
        self.state.update(peak_current=nan, limited=nan, lowest_gradient=nan)
        if not found and inputs.schedule is not None:
            try:
                array, times, plan = currents(settings, inputs.schedule)
            except TiltwellError as error:
                more.append(str(error))
            else:
                self.sources["currents"].data = views.current_columns(plan, times, array.positions)
                self._spans["limit_high"].location, self._spans["limit_low"].location = (settings.max_current,
                                                                                          -settings.max_current)
                peak = float(np.max(np.abs(plan.currents)))
                limited = bool(np.any(plan.limited))
                lowest = float(np.min(plan.gradient))
                self.state.update(peak_current=peak, limited=float(limited), lowest_gradient=lowest)
                self.readouts["peak_current"].value = html.escape(
                    f"{peak:.4g} A (limit {settings.max_current:.4g} A; {settings.turns} turns)")
                self.readouts["limit"].value = html.escape(
                    f"yes: the gradient falls to {lowest:.4g} T/m (wanted {settings.gradient:.4g})" if limited else
                    f"no: the peak is {100.0 * peak / settings.max_current:.0f} % of the limit")
                v = float(inputs.schedule.velocity(times[:1])[0])
                z = inputs.schedule.position(times[[0, -1]]) * 1e3
                self.figures["currents"].title.text = (f"coil currents as the trap passes z = {z[0]:.4g}–{z[1]:.4g} mm "
                                                       f"at {v:.4g} m/s")
                return more
        self.sources["currents"].data = views.empty_columns("currents")
        self.figures["currents"].title.text = "coil currents as the trap passes"
        for key in ("peak_current", "limit"):
            self.readouts[key].value = "—"
        return more

    def _fill(self, name: str, columns: dict[str, dict[str, Any]]) -> None:
        """Source ``name`` from ``columns`` (keyed by source name), empty when absent."""
        self.sources[name].data = columns.get(name, views.empty_columns(name))

    # --- the phase scan -----------------------------------------------------------------------

    def _scan_key(self) -> tuple[Any, ...]:
        return (self.settings(), self._inputs.scan_key)

    def _mark_scan(self, settings: CoilSettings, inputs: Inputs, found: list[str]) -> None:
        if (settings, inputs.scan_key) == self._scanned:
            return
        self._scanned = None  # what is drawn is out of date from here on
        self._tasks.cancel()
        self.state.update({key: math.nan for key in ("ripple", "worst_phase", "worst_longitudinal", "worst_transverse",
                                                      "mean_longitudinal", "mean_transverse", "max_zero_offset")})
        if found:
            for name in views.PHASE_FIGURES:
                self._fill(name, {})
                self._fill(name + "_worst", {})
            note, suffix = "—", ""
        elif self.auto_scan:
            note, suffix = "— (scanning…)", " (out of date: updating…)"
            self._tasks.later(SCAN_DELAY, lambda: self._guard(lambda: self.scan(wait=False)))
        else:
            note, suffix = "— (press “scan the phases now”)", " (out of date: press “scan the phases now”)"
        for key in _SCANNED:
            self.readouts[key].value = note
        for name, title in _TITLES.items():
            self.figures[name].title.text = title + (suffix if len(self.sources[name].data["phase"]) else "")

    def scan(self, wait: bool = True) -> Any:
        """The phase scan at the current settings, in the background; shown when done
        unless the settings changed meanwhile. Returns the :class:`tiltwell.coils.moving.PhaseScan`
        (``wait``; None if it failed or was discarded, the reason in :attr:`status`) or a
        ``concurrent.futures.Future``. Raises TiltwellError when the settings make no scan."""
        with self._lock:
            settings, inputs = self.settings(), self._inputs
            found, _ = problems(settings, inputs)
            if found:
                raise TiltwellError(found[0])
            key = (settings, inputs.scan_key)

        def busy(on: bool) -> None:
            self.actions["scan"].disabled = on

        stop = self._tasks.ticking(f"phase scan ({PHASES} phases)", self._report, busy)

        def compute() -> PhaseScan:
            try:
                return scan(settings, inputs)
            finally:
                stop()

        return self._tasks.run("phase scan", compute, lambda result: self._show_scan(key, settings, result),
                               lambda: self._scan_key() == key, wait=wait)

    def _show_scan(self, key: tuple[Any, ...], settings: CoilSettings, result: PhaseScan) -> None:
        pitch, worst = settings.pitch, result.worst
        for name, data in views.phase_columns(result, pitch).items():
            self.sources[name].data = data
        mean_depth = float(np.mean(result.depth))
        ripple = result.ripple if mean_depth > 0.0 else math.nan
        offset = float(np.max(np.abs(result.zero_offset)))
        self.state.update(
            ripple=ripple, worst_phase=float(result.phases[worst] / pitch),
            worst_longitudinal=float(result.longitudinal[worst]), worst_transverse=float(result.transverse[worst]),
            mean_longitudinal=result.mean_longitudinal, mean_transverse=result.mean_transverse, max_zero_offset=offset)
        unbound = int(np.count_nonzero(~result.bound))
        s = self.state
        self.readouts["ripple"].value = html.escape(
            f"{100.0 * ripple:.3g} %" + (f" (no well at {unbound} of {result.bound.size} phases)" if unbound else "")
            if math.isfinite(ripple) else f"— (no well at {unbound} of {result.bound.size} phases)")
        self.readouts["worst"].value = html.escape(
            f"{s['worst_longitudinal'] * 1e3:.4g} / {s['worst_transverse'] * 1e3:.4g} mm·m/s "
            f"at {s['worst_phase']:.3g} pitch")
        self.readouts["mean"].value = html.escape(
            f"{s['mean_longitudinal'] * 1e3:.4g} / {s['mean_transverse'] * 1e3:.4g} mm·m/s")
        self.readouts["zero_offset"].value = html.escape(f"{offset * 1e6:.3g} µm")
        for name, title in _TITLES.items():
            self.figures[name].title.text = title
        self._scanned = key

    # --- display and shutdown -----------------------------------------------------------------

    def fresh(self) -> None:
        """Re-serialise the Bokeh views (see :meth:`tiltwell.explorer.Explorer._fresh_widget`)."""
        for view, figure in zip(self._views.values(), self.figures.values()):
            view.update_from_model(figure)

    def wait(self, timeout: float | None = None) -> None:
        """Start a pending rescan at once and wait for all background work."""
        self._tasks.flush(timeout)

    def close(self) -> None:
        """Stop background work (waiting for a running scan to end)."""
        self._tasks.shutdown()
