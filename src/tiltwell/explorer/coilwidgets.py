"""The ipywidgets of the explorer's coil-array part: its sliders, buttons, readouts and
layout, in the look of the main explorer (:mod:`.widgets`, :mod:`.style`).

The CSS classes ``tiltwell-coils``, ``tiltwell-coils-readouts`` and
``tiltwell-coils-view-*`` let a browser test find the part, its readouts and its plots.
"""

from __future__ import annotations

import html
from collections.abc import Mapping

import ipywidgets as widgets

from . import style
from .coilmodel import CoilSettings
from .widgets import CONTROL_LAYOUT, LABEL_STYLE, readout_table, slider
from ..physics.hardware import ELECTRICAL_CAUTION

__all__ = ["READOUTS", "TITLE", "make_actions", "make_controls", "make_layout", "make_readouts", "settings_of"]

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


def settings_of(controls: Mapping[str, widgets.Widget]) -> CoilSettings:
    """The values of :func:`make_controls`' sliders as :class:`CoilSettings`, SI."""
    c = controls
    return CoilSettings(pitch=float(c["pitch"].value) * 1e-3, radius=float(c["radius"].value) * 1e-3,
                        turns=int(c["turns"].value), active=int(c["active"].value),
                        max_current=float(c["max_current"].value), gradient=float(c["gradient"].value))


def make_actions() -> dict[str, widgets.Button]:
    """The buttons ``scan`` and ``reset``."""
    return {
        "scan": widgets.Button(description="scan the phases now", tooltip="depth and acceptances at each phase"),
        "reset": widgets.Button(description="reset the coils", tooltip="back to the starting coil settings"),
    }


def make_readouts() -> dict[str, widgets.HTML]:
    """One value widget per key of :data:`READOUTS`."""
    return {key: widgets.HTML("—") for key, _ in READOUTS}


def make_layout(controls: Mapping[str, widgets.Widget], actions: Mapping[str, widgets.Widget],
                readouts: Mapping[str, widgets.HTML], views: Mapping[str, widgets.Widget],
                message: widgets.HTML, status: widgets.HTML) -> widgets.VBox:
    """The part: sliders and buttons beside the readouts, the messages, then the current
    view (with the electrical caution under it) and the two phase views."""
    title = widgets.HTML("<b>coil array</b> — the trap made by a row of thin coils; species, deceleration and "
                         "trap box are those set above")
    left = widgets.VBox([*controls.values(), widgets.HBox(list(actions.values()))],
                        layout=widgets.Layout(width=style.COLUMN_WIDTH))
    table = readout_table(READOUTS, readouts, ("250px", "300px"), "tiltwell-coils-readouts")
    caution = widgets.HTML(f"<small>{html.escape(ELECTRICAL_CAUTION)}</small>",
                           layout=widgets.Layout(width=style.CONTROL_WIDTH))
    for name, view in views.items():
        view.add_class(f"tiltwell-coils-view-{name}")
    plots = widgets.GridBox([widgets.VBox([views["currents"], caution]), views["depth"], views["acceptance"]],
                            layout=widgets.Layout(grid_template_columns=style.VIEW_COLUMNS))
    root = widgets.VBox([title, widgets.HBox([left, table]), message, status, plots])
    root.add_class("tiltwell-coils")
    return root
