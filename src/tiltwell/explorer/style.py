"""The explorer's look, in one place: the colours of what is drawn (by meaning), the size
and tools of every Bokeh figure, and the widths of the widgets. The main explorer and its
coil-array part both draw with these, so the two halves of the page match.

Plain values only (hex colours, CSS widths): the modules that build figures and widgets
turn them into Bokeh and ipywidgets objects.
"""

from __future__ import annotations

from typing import Any

__all__ = [
    "BEAM",
    "COLUMN_WIDTH",
    "CONTROL_WIDTH",
    "ESCAPE",
    "FIGURE",
    "FIGURE_HEIGHT",
    "FIGURE_WIDTH",
    "KEPT",
    "LABEL_WIDTH",
    "LOST",
    "PALETTE",
    "REFERENCE",
    "TOOLS",
    "VIEW_COLUMNS",
    "WARNING",
    "WELL",
]

#: The trap: its potential and separatrices (and the longitudinal plane of the coil part).
WELL = "#1d3557"
#: Particles kept (and the transverse plane of the coil part, the captured-fraction curve).
KEPT = "#2a7f62"
#: Particles lost, and the critical-deceleration marker.
LOST = "#c8553d"
#: Reference lines: the trap at rest; the main explorer's trap in the coil part.
REFERENCE = "#8d99ae"
#: The beam's sigma ellipses.
BEAM = "#e09f3e"
#: The escape energy and the barriers.
ESCAPE = "#6a4c93"
#: Messages that say what is wrong, and the current limit of the coil drivers.
WARNING = "#a4161a"
#: One colour per coil in the current view, in turn.
PALETTE: tuple[str, ...] = (WELL, LOST, KEPT, BEAM, ESCAPE, "#3d8bd4", "#9c6644", "#d17a9c", "#5c7a29", "#4a4e69")

#: Every Bokeh figure: its size [px] and its tools, and these as the figure's keywords.
FIGURE_WIDTH, FIGURE_HEIGHT = 440, 330
TOOLS = "pan,wheel_zoom,box_zoom,reset,save"
FIGURE: dict[str, Any] = {"width": FIGURE_WIDTH, "height": FIGURE_HEIGHT, "tools": TOOLS}

#: Widgets: the width of a control's label, of a control, of the column of controls, and
#: the grid of views (two figures side by side, a little margin each).
LABEL_WIDTH = "190px"
CONTROL_WIDTH = "440px"
COLUMN_WIDTH = "450px"
VIEW_COLUMNS = "repeat(2, 460px)"
