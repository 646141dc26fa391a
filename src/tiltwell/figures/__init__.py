"""Static figures for proposals: matplotlib renderings of tiltwell's result objects.

A view layer: every function draws what the computation and workflow modules return
(separatrices, beam planes, acceptance curves, sweep rows, tracking results, a scenario's
:class:`~tiltwell.workflows.figure_data.ScenarioFigureData`) and computes nothing of its
own beyond the drawing. Each figure function takes ``ax=None`` (then it makes a new
:class:`matplotlib.figure.Figure`, without pyplot state) and returns the figure.

Display units: positions in mm, velocities in m/s, energies in mK (E / k_B), phase-space
areas in mm·m/s, decelerations in 10³ m/s², times in ms. Every drawn data artist carries
a ``gid`` (e.g. ``"separatrix"``, ``"beam-1sigma"``, ``"escape-energy"``), so scripts and
tests can find it, and SVG exports name it.

The look is tiltwell's own: 9-pt DejaVu Sans, thin lines, and the six colours of
:data:`PALETTE`, whose lightness steps keep paired series apart in greyscale print and for
the common colour-vision deficiencies; series that share an axis also differ in line
style or marker, so no figure relies on colour alone.

Modules, one kind of figure each: :mod:`.well` (the potential, a phase plane),
:mod:`.curves` (against deceleration), :mod:`.trajectories` (survival, time of flight, detector traces),
:mod:`.device` (the coil row and its device check), :mod:`.budget` (the yield budget),
:mod:`.search` (a design search's front and map), :mod:`.sets` (a scenario's named set),
:mod:`.style` (the look) and :mod:`.export` (files).
"""

from __future__ import annotations

from .budget import yield_waterfall
from .curves import acceptance_against_deceleration, tradeoff_plot
from .device import current_pulses, device_arrivals, device_phase_space, device_survival, phase_scan
from .export import save, write_figures
from .search import design_front, design_map
from .sets import coil_figures, scenario_drawings, scenario_figures
from .style import PALETTE
from .trajectories import calibration_fit, detector_traces, survival, time_of_flight
from .well import phase_plane, potential

__all__ = ["PALETTE", "acceptance_against_deceleration", "calibration_fit", "coil_figures", "current_pulses",
           "design_front", "design_map", "detector_traces", "device_arrivals", "device_phase_space", "device_survival",
           "phase_plane", "phase_scan", "potential", "save",
           "scenario_drawings", "scenario_figures", "survival", "time_of_flight", "tradeoff_plot", "write_figures",
           "yield_waterfall"]
