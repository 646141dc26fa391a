"""The ipywidgets of the explorer's coil-array part: its sliders, buttons, readouts and
layout, in the look of the main explorer (:mod:`.widgets`, :mod:`.style`).

The CSS classes ``tiltwell-coils``, ``tiltwell-coils-readouts``, ``tiltwell-coils-hardware``
and ``tiltwell-coils-view-*`` let a browser test find the part, its readouts, its hardware
verdicts and its plots.
"""

from __future__ import annotations

import html
import math
from collections.abc import Mapping, Sequence

import ipywidgets as widgets

from . import style
from .coilmodel import CoilSettings
from .readouts import warning
from .widgets import CONTROL_LAYOUT, LABEL_STYLE, readout_table, slider
from ..physics.hardware import ELECTRICAL_CAUTION
from ..physics.limits import Verdict

__all__ = ["READOUTS", "TITLE", "VERDICT_UNITS", "make_actions", "make_controls", "make_layout", "make_readouts",
           "settings_of", "verdict_table"]

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


#: How each verdict is shown: label, the unit people read and its size in SI.
VERDICT_UNITS: dict[str, tuple[str, str, float]] = {
    "voltage": ("driver voltage", "V", 1.0),
    "current": ("current per turn", "A", 1.0),
    "current_density": ("current density", "A/mm²", 1e6),
    "temperature_rise": ("temperature rise per shot", "K", 1.0),
    "steady_temperature_rise": ("steady temperature rise", "K", 1.0),
    "hoop_stress": ("hoop stress", "MPa", 1e6),
    "axial_force": ("axial force on a coil", "N", 1.0),
}


def verdict_table(verdicts: Sequence[Verdict]) -> str:
    """The verdicts as an HTML table: quantity, worst value and limit in the unit people
    read (:data:`VERDICT_UNITS`), pass or FAIL, and under a failing row its advice."""
    rows = ["<tr><th align='left'>quantity</th><th align='right'>worst value</th><th align='right'>limit</th>"
            "<th>unit</th><th></th></tr>"]
    for v in verdicts:
        label, unit, size = VERDICT_UNITS.get(v.quantity, (v.quantity.replace("_", " "), v.unit, 1.0))
        state = "pass" if v.passed else f"<b style='color:{style.WARNING}'>FAIL</b>"
        value = f"{v.value / size:.4g}" if math.isfinite(v.value) else "—"
        rows.append(f"<tr><td>{html.escape(label)}</td><td align='right'>{value}</td>"
                    f"<td align='right'>{v.limit / size:.4g}</td><td>{html.escape(unit)}</td><td>{state}</td></tr>")
        if v.advice:
            rows.append(f"<tr><td></td><td colspan='4'><small>{warning(html.escape(v.advice))}</small></td></tr>")
    return "<table class='tiltwell-verdicts'>" + "".join(rows) + "</table>"


def make_controls(s: CoilSettings) -> dict[str, widgets.Widget]:
    """Sliders set to ``s``; ``pitch`` and ``radius`` in mm, the rest SI."""
    pitch, radius = s.pitch * 1e3, s.radius * 1e3
    return {
        "pitch": slider(pitch, 0.25 * pitch, 3.0 * pitch, pitch / 200.0, "coil pitch [mm]",
                        "distance between neighbouring coils"),
        "radius": slider(radius, 0.2 * radius, 3.0 * radius, radius / 200.0, "coil radius [mm]",
                         "mean radius of the (thin) windings: the bore"),
        "turns": widgets.IntSlider(value=s.turns, min=1, max=max(10, 4 * s.turns), description="turns per coil",
                                   style=LABEL_STYLE, layout=CONTROL_LAYOUT),
        "active": widgets.IntSlider(value=s.active, min=2, max=12, step=2, description="coils carrying current",
                                    tooltip="how many coils nearest the trap carry current at once",
                                    style=LABEL_STYLE, layout=CONTROL_LAYOUT),
        "max_current": slider(s.max_current, 0.05 * s.max_current, 4.0 * s.max_current, s.max_current / 200.0,
                              "current limit per turn [A]", "largest current per turn the drivers give"),
        "gradient": slider(s.gradient, 0.1 * s.gradient, 4.0 * s.gradient, s.gradient / 200.0,
                           "wanted gradient [T/m]", "axial gradient dB_z/dz asked of the coils at the field zero"),
    }


def settings_of(controls: Mapping[str, widgets.Widget], winding: CoilSettings | None = None) -> CoilSettings:
    """The values of :func:`make_controls`' sliders as :class:`CoilSettings`, SI, with the
    winding (width, height, hand-over; no sliders) of ``winding`` (default: thin)."""
    c = controls
    fixed = {} if winding is None else {"width": winding.width, "height": winding.height, "handover": winding.handover}
    return CoilSettings(pitch=float(c["pitch"].value) * 1e-3, radius=float(c["radius"].value) * 1e-3,
                        turns=int(c["turns"].value), active=int(c["active"].value),
                        max_current=float(c["max_current"].value), gradient=float(c["gradient"].value), **fixed)


def make_actions() -> dict[str, widgets.Button]:
    """The buttons ``scan`` and ``reset``."""
    return {
        "scan": widgets.Button(description="scan the phases now", tooltip="depth and acceptances at each phase",
                               layout=widgets.Layout(width="auto")),  # wide enough for its label, never cut
        "reset": widgets.Button(description="reset the coils", tooltip="back to the starting coil settings",
                                layout=widgets.Layout(width="auto")),
    }


def make_readouts() -> dict[str, widgets.HTML]:
    """One value widget per key of :data:`READOUTS`."""
    return {key: widgets.HTML("—") for key, _ in READOUTS}


def make_layout(controls: Mapping[str, widgets.Widget], actions: Mapping[str, widgets.Widget],
                readouts: Mapping[str, widgets.HTML], views: Mapping[str, widgets.Widget],
                message: widgets.HTML, status: widgets.HTML, hardware: widgets.HTML | None = None,
                hardware_status: widgets.HTML | None = None) -> widgets.VBox:
    """The part: sliders and buttons beside the readouts, the messages, the hardware
    verdicts beside the electrical caution, then the current view and the two phase views;
    without the verdicts the caution stands under the current view instead (once either way)."""
    title = widgets.HTML("<b>coil array</b> — the trap made by a row of thin coils; species, deceleration and "
                         "trap box are those set above")
    left = widgets.VBox([*controls.values(), widgets.HBox(list(actions.values()))],
                        layout=widgets.Layout(width=style.COLUMN_WIDTH))
    table = readout_table(READOUTS, readouts, ("250px", "300px"), "tiltwell-coils-readouts")
    caution = widgets.HTML(f"<small>{html.escape(ELECTRICAL_CAUTION)}</small>",
                           layout=widgets.Layout(width=style.CONTROL_WIDTH))
    for name, view in views.items():
        view.add_class(f"tiltwell-coils-view-{name}")
    under = [views["currents"]] if hardware is not None else [views["currents"], caution]
    plots = widgets.GridBox([widgets.VBox(under), views["depth"], views["acceptance"]],
                            layout=widgets.Layout(grid_template_columns=style.VIEW_COLUMNS))
    parts: list[widgets.Widget] = [title, widgets.HBox([left, table]), message, status]
    if hardware is not None:
        hardware.add_class("tiltwell-coils-hardware")
        head = widgets.HTML("<b>hardware over the whole shot</b> — every coil of the row, worst value against "
                            "[limits] (tiltwell.drive_load)")
        beside = widgets.HTML(f"<small>{html.escape(ELECTRICAL_CAUTION)}</small>",
                              layout=widgets.Layout(width=style.CONTROL_WIDTH))
        column = [head, hardware] + ([] if hardware_status is None else [hardware_status])
        parts.append(widgets.HBox([widgets.VBox(column, layout=widgets.Layout(width=style.COLUMN_WIDTH)), beside]))
    root = widgets.VBox([*parts, plots])
    root.add_class("tiltwell-coils")
    return root
