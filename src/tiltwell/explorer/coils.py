"""The explorer's coil-array part: a row of thin coils whose currents carry the field zero
along the beam axis, with sliders for the row and three Bokeh views.

The species and the deceleration are the main explorer's; so is the trap box, within
which the trap made by the coils must hold its particles. The part works only while its
section is open. Every change redraws the currents (cheap:
:func:`tiltwell.coils.array.waveforms`); the depth and acceptances against the trap's phase
between two coils (:func:`tiltwell.coils.moving.moving_trap_phases`, ~0.5 s) are recomputed in
the background a moment after the settings stop changing, or on the button, and a result
that arrives after the settings changed is discarded. The hardware verdicts of the whole
row over the whole shot (:func:`tiltwell.coils.drive.drive_load`, ~1 s on the demo) follow
the same way: in the background, :data:`HARDWARE_DELAY` after the settings stop changing,
a stale result discarded. Bad settings never raise out of a control: the message line says
what is wrong.
"""

from __future__ import annotations

import html
import math
import threading
from collections.abc import Callable
from concurrent.futures import Future
from typing import Any

import ipywidgets as widgets
import numpy as np
from numpy.typing import NDArray

from . import coilviews as views
from .coilmodel import (
    NO_HARDWARE,
    NO_INPUTS,
    PHASES,
    CoilSettings,
    Hardware,
    Inputs,
    currents,
    device_load,
    hardware_problems,
    inputs_of,
    problems,
    scan,
)
from .coilwidgets import (
    READOUTS,
    TITLE,
    make_actions,
    make_controls,
    make_layout,
    make_readouts,
    settings_of,
    verdict_table,
)
from .model import Picture
from .plumbing import Callbacks, bokeh_views, reserialise, start
from .readouts import warning
from .tasks import Tasks
from .widgets import check_values
from .._base.validation import TiltwellError
from ..coils.drive import DriveLoad
from ..coils.moving import PhaseScan
from ..coils.schedule import Schedule
from ..physics.limits import Verdict

__all__ = ["HARDWARE_DELAY", "READOUTS", "SCAN_DELAY", "TITLE", "CoilPart", "offset_text"]

#: Seconds of quiet after a change before the phase scan is recomputed.
SCAN_DELAY = 0.5
#: Seconds of quiet after a change before the hardware verdicts are recomputed.
HARDWARE_DELAY = 0.3
_SCANNED = ("ripple", "worst", "mean", "zero_offset")
_TITLES = {"depth": "well depth between two coils", "acceptance": "acceptances between two coils"}


def offset_text(offset: float, positions: NDArray[np.float64]) -> str:
    """The largest field-zero offset [m] for the readout, in µm to three digits, or "0" below
    the resolution of the positions it is computed from (16 float64 spacings of the largest
    |z|: the root finder stops there, so a smaller offset is rounding, not a number)."""
    resolution = 16.0 * np.finfo(np.float64).eps * max(float(np.max(np.abs(positions))), 1e-3)
    if not offset > resolution:
        return f"0 (below the {resolution * 1e12:.2g} pm resolution)"
    return f"{offset * 1e6:.3g} µm"


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
    views : dict of str to jupyter_bokeh.BokehModel
        The figures as widgets, keyed alike (what the page shows).
    spans : dict of str to bokeh Span
        ``limit_high``, ``limit_low``: the current limit per turn drawn on the currents [A].
    message, status : ipywidgets.HTML
        What is wrong with the settings; the outcome of the last phase scan.
    hardware, hardware_status : ipywidgets.HTML
        The verdict table (CSS class ``tiltwell-coils-hardware``) and the outcome of the last
        hardware check.
    verdicts : tuple of Verdict
        The verdicts shown (empty while none is shown), each quantity's worst value over the
        row and the shot against the scenario's ``[limits]``.
    load : DriveLoad or None
        The :func:`tiltwell.drive_load` result they come from.
    auto_scan : bool
        Rescan in the background after changes (else only on the button or :meth:`scan`).
    auto_hardware : bool
        Recompute the verdicts in the background after changes (else only on :meth:`check_hardware`).
    """

    def __init__(self, defaults: CoilSettings, lock: threading.RLock, unexpected: Callable[[Exception], None],
                 *, auto_scan: bool = True, auto_hardware: bool = True) -> None:
        self.defaults = defaults
        self.auto_scan = auto_scan
        self.auto_hardware = auto_hardware
        self._lock = lock
        self._inputs: Inputs = NO_INPUTS
        self._drawn: tuple[Any, ...] | None = None
        self._scanned: tuple[Any, ...] | None = None
        self.state: dict[str, float] = {}
        self.message = widgets.HTML("")
        self.status = widgets.HTML("")
        self.hardware = widgets.HTML("—")
        self.hardware_status = widgets.HTML("")
        self.verdicts: tuple[Verdict, ...] = ()
        self.load: DriveLoad | None = None
        self._judged: tuple[Any, ...] | None = None
        self._tasks = Tasks(lock, self._report, unexpected)
        self._hardware_tasks = Tasks(lock, self._report_hardware, unexpected)
        self._callbacks = Callbacks(lambda text: setattr(self.message, "value", warning(text)), unexpected)
        self.controls = make_controls(defaults)
        self.actions = make_actions()
        self.readouts = make_readouts()
        self.figures, self.sources, self.spans = views.make_views()
        self.views = bokeh_views(self.figures)
        self.widget = make_layout(self.controls, self.actions, self.readouts, self.views, self.message, self.status,
                                  self.hardware, self.hardware_status)
        self.section = widgets.Accordion(children=[self.widget], titles=(TITLE,))
        self.section.add_class("tiltwell-coils-section")
        on = self._callbacks
        on.observe(self.section, lambda change: self.refresh() if change["new"] == 0 else None,
                   names="selected_index", even_when_quiet=True)
        for control in self.controls.values():
            on.observe(control, lambda _: self.refresh())
        on.on_click(self.actions["scan"], self.scan)
        on.on_click(self.actions["reset"], self.reset)

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
        return settings_of(self.controls, self.defaults)

    def update(self, **values: Any) -> None:
        """Set several controls at once, by their :attr:`controls` names, and redraw once.
        An unknown name or a value outside a control's range raises TiltwellError."""
        check_values(self.controls, values)
        with self._callbacks.quieted():
            for name, value in values.items():
                self.controls[name].value = value
        self._callbacks.guard(self.refresh)

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
                               "; ".join(picture.problems), picture.scenario)
        with self._lock:
            self._inputs = inputs
        if self.is_open:
            self._callbacks.guard(self.refresh)

    def _report(self, text: str) -> None:
        self.status.value = text

    def _report_hardware(self, text: str) -> None:
        self.hardware_status.value = text

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
            found_hardware = hardware_problems(settings, inputs, found_currents)
            found += found_hardware
            self._mark_hardware(settings, inputs, bool(found_currents or found_hardware))
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
                self.spans["limit_high"].location, self.spans["limit_low"].location = (settings.max_current,
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
            self._tasks.later(SCAN_DELAY, lambda: self._callbacks.guard(self.scan))
        else:
            note, suffix = "— (press “scan the phases now”)", " (out of date: press “scan the phases now”)"
        for key in _SCANNED:
            self.readouts[key].value = note
        for name, title in _TITLES.items():
            self.figures[name].title.text = title + (suffix if len(self.sources[name].data["phase"]) else "")

    def scan(self) -> Future[PhaseScan | None]:
        """Start the phase scan at the current settings, in the background; it is shown
        when done unless the settings changed meanwhile.

        Returns its ``concurrent.futures.Future``: ``.result()`` waits and gives the
        :class:`tiltwell.coils.moving.PhaseScan` (also when discarded, not shown), or None
        when it failed; the outcome is in :attr:`status`. Raises TiltwellError when the
        settings make no scan."""
        with self._lock:
            settings, inputs = self.settings(), self._inputs
            found, _ = problems(settings, inputs)
            if found:
                raise TiltwellError(found[0])
            key = (settings, inputs.scan_key)

        return start(self._tasks, "phase scan", lambda: scan(settings, inputs),
                     lambda result: self._show_scan(key, settings, result), lambda: self._scan_key() == key,
                     text=f"phase scan ({PHASES} phases)", show=self._report, button=self.actions["scan"])

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
        self.readouts["zero_offset"].value = html.escape(offset_text(offset, result.positions))
        for name, title in _TITLES.items():
            self.figures[name].title.text = title
        self._scanned = key

    # --- the hardware verdicts ----------------------------------------------------------------

    def _hardware_key(self, settings: CoilSettings, inputs: Inputs) -> tuple[Any, ...]:
        return (settings, inputs.current_key, inputs.hardware)

    def _mark_hardware(self, settings: CoilSettings, inputs: Inputs, blocked: bool) -> None:
        """Clear the verdicts when out of date and (with :attr:`auto_hardware`) recompute them later."""
        key = self._hardware_key(settings, inputs)
        if key == self._judged:
            return
        self._judged = None
        self._hardware_tasks.cancel()
        self.verdicts, self.load = (), None
        if inputs.hardware is None or not (settings.width > 0.0 and settings.height > 0.0):
            self.hardware.value, self.hardware_status.value = NO_HARDWARE, ""
        elif blocked:
            self.hardware.value, self.hardware_status.value = "— (see the message above)", ""
        elif self.auto_hardware:
            self.hardware.value = "— (checking the whole shot…)"
            self._hardware_tasks.later(HARDWARE_DELAY, lambda: self._callbacks.guard(self.check_hardware))
        else:
            self.hardware.value = "— (call check_hardware())"

    def check_hardware(self) -> Future[DriveLoad | None]:
        """Judge the whole row over the whole shot at the current settings against the
        scenario's limits, in the background (:func:`tiltwell.coils.drive.drive_load`); shown
        when done unless the settings changed meanwhile.

        Returns the task's future: its result is the DriveLoad, or None when it failed (the
        outcome in :attr:`hardware_status`). Raises TiltwellError when the settings make no
        verdicts (the reason is also in :attr:`message`)."""
        with self._lock:
            settings, inputs = self.settings(), self._inputs
            found = problems(settings, inputs)[1]
            found = found + hardware_problems(settings, inputs, found)
            if found:
                raise TiltwellError(found[0])
            schedule, hardware = inputs.schedule, inputs.hardware
            if hardware is None or not (settings.width > 0.0 and settings.height > 0.0):
                raise TiltwellError(NO_HARDWARE.removeprefix("— (").removesuffix(")"))
            assert schedule is not None  # problems() says so otherwise
            key = self._hardware_key(settings, inputs)
        stop = self._hardware_tasks.ticking("hardware check (whole row, whole shot)", self._report_hardware,
                                            lambda _: None)

        def compute(s: CoilSettings = settings, plan: Schedule = schedule, h: Hardware = hardware) -> DriveLoad:
            try:
                return device_load(s, plan, h)
            except TiltwellError:
                self.hardware.value = "— (the check failed: see below)"
                raise
            finally:
                stop()

        return self._hardware_tasks.run("hardware check", compute, lambda load: self._show_hardware(key, load),
                                        lambda: self._hardware_key(self.settings(), self._inputs) == key)

    def _show_hardware(self, key: tuple[Any, ...], load: DriveLoad) -> None:
        self.load, self.verdicts = load, load.verdicts
        self.hardware.value = verdict_table(load.verdicts)
        self._judged = key

    # --- display and shutdown -----------------------------------------------------------------

    def fresh(self) -> None:
        """Re-serialise the Bokeh views (:func:`tiltwell.explorer.plumbing.reserialise`)."""
        reserialise(self.views, self.figures)

    def wait(self, timeout: float | None = None) -> None:
        """Start a pending rescan and hardware check at once and wait for all background work."""
        self._tasks.flush(timeout)
        self._hardware_tasks.flush(timeout)

    def close(self) -> None:
        """Stop background work (waiting for a running scan or hardware check to end)."""
        self._tasks.shutdown()
        self._hardware_tasks.shutdown()
