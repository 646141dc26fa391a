"""The explorer's ipywidgets: controls, action buttons, readouts and the page layout.

Names and labels are plain physics words. The CSS classes ``tiltwell-readouts`` and
``tiltwell-view-*`` let a browser test find the readouts and the plots.
"""

from __future__ import annotations

import html
import math
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import ipywidgets as widgets

from . import style
from .model import Settings
from .._base.validation import TiltwellError
from ..physics.species import catalogue

__all__ = [
    "DECELERATION_SPAN",
    "READOUTS",
    "CONTROL_LAYOUT",
    "LABEL_STYLE",
    "TRAP_CONTROLS",
    "check_values",
    "control_values",
    "deceleration_range",
    "fit_deceleration",
    "grid",
    "make_actions",
    "make_controls",
    "make_layout",
    "make_readouts",
    "read_settings",
    "readout_table",
    "slider",
    "sync_log",
]

#: The style of every control's label, and the layout of a control (:mod:`.style`).
LABEL_STYLE = {"description_width": style.LABEL_WIDTH}
CONTROL_LAYOUT = widgets.Layout(width=style.CONTROL_WIDTH)
#: The trap controls of each trap kind, in the order of :attr:`Settings.trap`.
TRAP_CONTROLS: dict[str, tuple[str, ...]] = {"quadrupole": ("gradient", "max_field"), "coils": ("current",)}
#: A value within this relative (and absolute) distance of the loaded one is taken as it: a
#: browser slider sends back the value it drew, rounded in its last digits.
SAME_VALUE = (1e-9, 1e-12)

#: Readout keys and their labels, in display order.
READOUTS: tuple[tuple[str, str], ...] = (
    ("longitudinal", "longitudinal acceptance"),
    ("transverse", "transverse acceptance"),
    ("acceptance_6d", "6-D acceptance"),
    ("depth", "well depth on the axis"),
    ("escape_energy", "escape energy (3-D)"),
    ("overlap", "captured: phase-space overlap"),
    ("energetic", "captured: energetic 6-D count"),
    ("tracked", "captured: trajectories"),
    ("slow", "slow particles per shot (68 %)"),
    ("final_cloud", "final cloud: temperature, peak density"),
    ("initial_velocity", "trap velocity at switch-on"),
    ("temperature", "nozzle temperature"),
    ("length", "device length"),
    ("duration", "deceleration time"),
    ("coils", "number of coils"),
)

#: Fraction of the deceleration slider's top that its logarithmic twin starts at.
LOG_DECADES = 3.0


def grid(value: float, low: float, high: float, step: float, *, fixed_low: bool = False,
         inside: bool = False) -> tuple[float, float, float]:
    """``(min, max, step)`` of a slider whose grid ``min + k step`` holds ``value``.

    A browser slider snaps its value to that grid when it is drawn and sends the snapped
    value back; on the grid, a value survives being drawn. ``fixed_low`` keeps ``low``
    and adjusts the step instead; ``inside`` keeps the top at or below ``high`` (a hard
    limit), else it may pass it by less than a step.
    """
    if fixed_low:
        count = round((value - low) / step)
        step = (value - low) / count if count >= 1 else step
    else:
        low = value - step * math.ceil((value - low) / step - 1e-9)
    steps = (max(high, value) - low) / step
    top = low + step * (math.floor(steps + 1e-9) if inside else math.ceil(steps - 1e-9))
    return low, max(top, value), step


def slider(value: float, low: float, high: float, step: float, description: str, tooltip: str,
           fmt: str = ".4g", *, fixed_low: bool = False, inside: bool = False) -> widgets.FloatSlider:
    """A float slider at ``value`` on the grid of :func:`grid` (``low``, ``high``,
    ``step`` in the control's unit), labelled ``description``, shown with ``fmt``."""
    low, high, step = grid(value, low, high, step, fixed_low=fixed_low, inside=inside)
    return widgets.FloatSlider(value=value, min=low, max=high, step=step, description=description,
                               tooltip=tooltip, readout_format=fmt, style=LABEL_STYLE, layout=CONTROL_LAYOUT,
                               continuous_update=True)


#: Top of the deceleration slider in units of the critical deceleration: a little past it,
#: so most of the slider is where a well exists (the readout under it names the rest).
DECELERATION_SPAN = 1.25


def deceleration_range(critical: float, deceleration: float) -> float:
    """Top of the deceleration slider [m/s^2]: :data:`DECELERATION_SPAN` times the critical
    deceleration, or the current value when that is higher (never clips a value)."""
    top = max(DECELERATION_SPAN * critical, deceleration)
    return top if top > 0.0 else 1.0


def make_controls(settings: Settings, kind: str, critical: float, reference_velocity: float,
                  top_velocity: float, custom_species: bool) -> dict[str, widgets.Widget]:
    """Controls set to ``settings``; ``kind`` is the scenario's trap kind ("quadrupole" or
    "coils"); ``top_velocity`` is the highest initial velocity the source allows [m/s]."""
    names = list(catalogue())
    if custom_species or settings.species not in names:
        names.insert(0, settings.species)
    controls: dict[str, widgets.Widget] = {
        "species": widgets.Dropdown(options=names, value=settings.species, description="species",
                                    style=LABEL_STYLE, layout=CONTROL_LAYOUT),
    }
    if kind == "quadrupole":
        gradient, max_field = settings.trap
        controls["gradient"] = slider(gradient, 0.1 * gradient, 4.0 * gradient, gradient / 200.0,
                                      "trap gradient [T/m]", "axial field gradient of the quadrupole")
        controls["max_field"] = slider(max_field, 0.1 * max_field, 4.0 * max_field, max_field / 200.0,
                                       "depth field [T]", "field magnitude where the quadrupole's depth is cut")
    else:
        (current,) = settings.trap
        # a new coil current samples the coils' field afresh (~0.15 s): redraw when the slider is let go
        controls["current"] = slider(current, 0.05 * current, 4.0 * current, current / 200.0,
                                     "coil current [A]", "current per turn in each coil of the pair (redraws on release)")
        controls["current"].continuous_update = False
    top = deceleration_range(critical, settings.deceleration)
    a = settings.deceleration
    controls["deceleration"] = slider(a, 0.0, top, top / 2000.0, "deceleration [m/s²]",
                                      "constant deceleration of the trap; the well vanishes at the critical one",
                                      fixed_low=True)
    controls["deceleration_log"] = widgets.FloatLogSlider(
        value=max(a, top * 10**-LOG_DECADES), base=10.0, min=math.log10(top) - LOG_DECADES, max=math.log10(top),
        step=0.001, description="deceleration [m/s²]", readout_format=".3e", style=LABEL_STYLE,
        layout=CONTROL_LAYOUT, tooltip="constant deceleration of the trap (logarithmic scale)")
    controls["log_scale"] = widgets.Checkbox(value=False, description="logarithmic deceleration scale",
                                             indent=False)
    v = settings.initial_velocity
    controls["initial_velocity"] = slider(v, 0.3 * reference_velocity, min(3.0 * reference_velocity, top_velocity),
                                          0.5, "initial velocity [m/s]",
                                          "mean beam velocity at switch-on (sets the nozzle temperature)", inside=True)
    controls["final_velocity"] = slider(settings.final_velocity, 0.0, controls["initial_velocity"].max, 0.5,
                                        "final velocity [m/s]", "trap velocity at the end of the deceleration",
                                        fixed_low=True)
    controls["relative_spread"] = slider(settings.relative_spread, 0.002, 0.3, 0.0005,
                                         "velocity spread (rms / mean)", "relative rms spread of the forward velocity",
                                         ".4f")
    controls["transverse_scale"] = slider(settings.transverse_scale, 0.1, 4.0, 0.01, "transverse spread ×",
                                          "scales the transverse velocity spread (skimmer and aperture diameters)",
                                          ".2f")
    span = 0.25 * reference_velocity
    controls["mismatch"] = slider(settings.mismatch, -span, span, 0.5, "velocity mismatch [m/s]",
                                  "trap velocity minus mean beam velocity at switch-on", ".2f")
    controls["particles"] = widgets.BoundedIntText(value=settings.particles, min=1, max=100_000_000,
                                                   description="Monte-Carlo particles", style=LABEL_STYLE,
                                                   layout=CONTROL_LAYOUT)
    return controls


def output_paths() -> tuple[str, str]:
    """Where the save buttons write unless told otherwise: ``scenario.toml`` and
    ``figures/`` in the folder named by the environment variable ``TILTWELL_OUTPUT``, else
    in ``~/tiltwell-output`` — outside the notebook's folder, so running a tracked notebook
    leaves its checkout clean (the folder is made when something is saved)."""
    folder = Path(os.environ.get("TILTWELL_OUTPUT", "").strip() or Path.home() / "tiltwell-output")
    return str(folder / "scenario.toml"), str(folder / "figures")


def make_actions(scenario_path: str, figures_path: str) -> dict[str, widgets.Widget]:
    """Buttons and their path boxes; ``progress`` reports background work."""
    def button(text: str, tip: str) -> widgets.Button:
        return widgets.Button(description=text, tooltip=tip, layout=widgets.Layout(width="210px"))

    return {
        "monte_carlo": button("run Monte-Carlo check", "energetic count and trajectories (background)"),
        "acceptance_6d": button("compute 6-D acceptance", "energetic 6-D phase-space volume (background)"),
        "tradeoff": button("update trade-off now", "recompute the trade-off curve at once"),
        "reset": button("reset to the scenario", "every control back to the loaded scenario"),
        "scenario_path": widgets.Text(value=scenario_path, description="scenario file", style={"description_width": "90px"},
                                      layout=widgets.Layout(width="330px")),
        "save_scenario": button("save scenario", "write the settings as a scenario file (TOML)"),
        "figures_path": widgets.Text(value=figures_path, description="figures folder", style={"description_width": "90px"},
                                     layout=widgets.Layout(width="330px")),
        "save_figures": button("save figures", "static figures of the scenario (tiltwell.figures)"),
        "progress": widgets.HTML(value=""),
    }


def make_readouts() -> dict[str, widgets.HTML]:
    """One value widget per readout key, plus ``critical`` (shown by the deceleration)."""
    readouts = {key: widgets.HTML(value="—") for key, _ in READOUTS}
    readouts["critical"] = widgets.HTML(value="—")
    return readouts


def readout_table(labels: tuple[tuple[str, str], ...], readouts: Mapping[str, widgets.Widget],
                  columns: tuple[str, str], css_class: str) -> widgets.GridBox:
    """A two-column grid of (label, value widget) rows, one per ``(key, label)`` of ``labels``;
    ``columns`` are the CSS widths of the two columns, ``css_class`` names the grid for tests
    and the browser."""
    cells: list[widgets.Widget] = []
    for key, label in labels:
        cells += [widgets.HTML(html.escape(label)), readouts[key]]
    width = f"{sum(int(c.removesuffix('px')) for c in columns) + 10}px"
    table = widgets.GridBox(cells, layout=widgets.Layout(grid_template_columns=" ".join(columns), width=width))
    table.add_class(css_class)
    return table


def make_layout(controls: dict[str, widgets.Widget], actions: dict[str, widgets.Widget],
                readouts: dict[str, widgets.HTML], views: dict[str, widgets.Widget],
                message: widgets.HTML, status: widgets.HTML, deceleration_box: widgets.Box) -> widgets.VBox:
    """The page: controls beside the readouts, the messages under them, the four views
    in a 2 x 2 grid and the buttons. (The electrical caution stands once, in the coil-array
    section, beside the hardware it sizes.)"""
    title = widgets.HTML("<b>tiltwell explorer</b> — acceptance of a decelerating moving magnetic trap")
    order = ["species", "gradient", "max_field", "current"]
    physics = [controls[name] for name in order if name in controls]
    beam = [controls[name] for name in ("initial_velocity", "final_velocity", "relative_spread",
                                        "transverse_scale", "mismatch")]
    left = widgets.VBox([*physics, deceleration_box, controls["log_scale"], readouts["critical"], *beam],
                        layout=widgets.Layout(width=style.COLUMN_WIDTH))
    table = readout_table(READOUTS, readouts, ("220px", "260px"), "tiltwell-readouts")
    buttons = widgets.VBox([
        widgets.HBox([actions["monte_carlo"], controls["particles"]]),
        widgets.HBox([actions["acceptance_6d"], actions["tradeoff"], actions["reset"]]),
        widgets.HBox([actions["scenario_path"], actions["save_scenario"]]),
        widgets.HBox([actions["figures_path"], actions["save_figures"]]),
        actions["progress"],
    ])
    for name, view in views.items():
        view.add_class(f"tiltwell-view-{name}")
        if name in ("longitudinal", "transverse"):
            view.add_class("tiltwell-view-phase")
    plots = widgets.GridBox(list(views.values()), layout=widgets.Layout(grid_template_columns=style.VIEW_COLUMNS))
    return widgets.VBox([title, widgets.HBox([left, table]), message, status, plots, buttons])


def check_values(controls: Mapping[str, widgets.Widget], values: Mapping[str, Any]) -> None:
    """Raise TiltwellError for an unknown control name or a number outside a control's
    range (a slider would silently clip it)."""
    unknown = sorted(set(values) - set(controls))
    if unknown:
        raise TiltwellError(f"unknown control(s) {', '.join(unknown)}; known: {', '.join(controls)}")
    for name, value in values.items():
        control = controls[name]
        if isinstance(control, (widgets.FloatSlider, widgets.IntSlider, widgets.BoundedIntText,
                                widgets.FloatLogSlider)):
            low, high = control.min, control.max
            if isinstance(control, widgets.FloatLogSlider):
                low, high = control.base**low, control.base**high
            kinds = int if isinstance(control, (widgets.IntSlider, widgets.BoundedIntText)) else (int, float)
            if isinstance(value, bool) or not (isinstance(value, kinds) and low <= value <= high):
                raise TiltwellError(f"{name} must be a number in [{low:g}, {high:g}] (the control's range); "
                                    f"got {value!r}")


def sync_log(controls: Mapping[str, widgets.Widget]) -> None:
    """Move the logarithmic deceleration slider to the linear one's value (clipped to its
    range: it cannot show 0)."""
    log = controls["deceleration_log"]
    log.value = min(max(controls["deceleration"].value, 10**log.min), 10**log.max)


def fit_deceleration(controls: Mapping[str, widgets.Widget], critical: float) -> None:
    """Set both deceleration sliders' range to 0 ... :data:`DECELERATION_SPAN` x
    ``critical`` [m/s^2], or up to the current value when that is higher: a range change
    never moves the value."""
    linear, log = controls["deceleration"], controls["deceleration_log"]
    top = deceleration_range(critical, linear.value)
    if math.isclose(top, linear.max, rel_tol=1e-3):
        return
    _, top, step = grid(linear.value, 0.0, top, top / 2000.0, fixed_low=True)
    linear.max, linear.step = top, step
    high = math.log10(top)
    if high > log.max:
        log.max, log.min = high, high - LOG_DECADES
    else:
        log.min, log.max = high - LOG_DECADES, high
    sync_log(controls)


def read_settings(controls: Mapping[str, widgets.Widget], kind: str, loaded: Settings) -> Settings:
    """The control values as :class:`Settings`, SI; ``kind`` is the trap kind (a key of
    :data:`TRAP_CONTROLS`). A value within :data:`SAME_VALUE` of the ``loaded`` one counts
    as it, so a value a browser sends back rounded changes nothing."""
    rel, abs_ = SAME_VALUE

    def value(name: str, first: float) -> float:
        number = float(controls[name].value)
        return first if math.isclose(number, first, rel_tol=rel, abs_tol=abs_) else number

    return Settings(
        species=controls["species"].value,
        trap=tuple(value(name, first) for name, first in zip(TRAP_CONTROLS[kind], loaded.trap)),
        deceleration=value("deceleration", loaded.deceleration),
        initial_velocity=value("initial_velocity", loaded.initial_velocity),
        final_velocity=value("final_velocity", loaded.final_velocity),
        relative_spread=value("relative_spread", loaded.relative_spread),
        transverse_scale=value("transverse_scale", loaded.transverse_scale),
        mismatch=value("mismatch", loaded.mismatch), particles=int(controls["particles"].value),
    )


def control_values(settings: Settings, kind: str) -> dict[str, Any]:
    """The control values that show ``settings`` (keyed by control name), the
    deceleration apart: it goes last, once the trap's range is known."""
    return {"species": settings.species, **dict(zip(TRAP_CONTROLS[kind], settings.trap)),
            "initial_velocity": settings.initial_velocity, "final_velocity": settings.final_velocity,
            "relative_spread": settings.relative_spread, "transverse_scale": settings.transverse_scale,
            "mismatch": settings.mismatch, "particles": settings.particles}
