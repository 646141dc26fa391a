"""A scenario's real coil row (its ``[coils]`` section) driven along its schedule.

:func:`coil_array` builds the :class:`~tiltwell.coils.array.CoilArray` of the section
(:func:`coil_positions` its z_k, the one numbering of every output);
:func:`coil_run` plans every coil's current at the waveform table's times (a
:class:`CoilRun`); :func:`coil_scan` follows the row's trap across one pitch;
:func:`device_box` is the one trap box (:func:`tiltwell.workflows.devicemodel.trap_box`). The summary of all this,
with the hardware numbers, is :func:`tiltwell.workflows.coilreport.coil_summary` (which
also re-exports these names). SI units; no plotting, no file output.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .._base.validation import TiltwellError
from ..coils.array import CoilArray, CurrentPlan, waveforms
from ..coils.moving import PhaseScan, moving_trap_phases
from ..coils.schedule import Schedule
from .assemble import build
from .devicemodel import coils_section, row_array, row_gradient, trap_box
from .scenario import Scenario

__all__ = ["CoilRun", "MAX_TABLE_VALUES", "coil_array", "coil_positions", "coil_run", "coil_scan", "coils_section",
           "device_box"]

FloatArray = NDArray[np.float64]

#: Most numbers (points x coils) a waveform table may hold: a guard against a plan_step typed wrong.
MAX_TABLE_VALUES = 20_000_000

#: Trap positions planned at once (bounds the memory of the on-axis response).
_CHUNK = 512


def coil_array(scenario: Scenario, schedule: Schedule | None = None) -> CoilArray:
    """The coil row of ``scenario``'s ``[coils]`` section.

    Parameters
    ----------
    scenario : Scenario
        Must have a ``[coils]`` section (which makes ``[deceleration] pitch`` required).
    schedule : Schedule, optional
        The scenario's schedule, when already built; only needed when the scenario gives a
        deceleration rather than a length.

    Raises
    ------
    TiltwellError
        When the row would need more than ``MAX_COILS`` coils. (The trap box is fitted into
        the bore by :func:`device_box`'s one rule; it does not constrain the row.)

    Returns
    -------
    CoilArray
        :func:`tiltwell.workflows.devicemodel.row_array`: the coils the trap zero, running
        from z = 0 to z = length, energises (:func:`tiltwell.coils.array.row_layout`), coil
        k at z_k = -(active/2 - 1) pitch + k pitch; the one numbering of every output.
        ``max_current`` is ``[coils] max_current``, else ``[deceleration] peak_current``.
    """
    coils_section(scenario)
    length = scenario.deceleration.length
    if length is None:
        length = (build(scenario).schedule if schedule is None else schedule).length
    return row_array(scenario, length)


def coil_positions(scenario: Scenario, schedule: Schedule | None = None) -> FloatArray:
    """z_k [m], shape (count,), of the scenario's coil row: the positions every output
    (timing and waveform tables, ``tiltwell coils``, figures, the explorer) uses."""
    return coil_array(scenario, schedule).positions


@dataclass(frozen=True, eq=False)
class CoilRun:
    """The coil row driven along a scenario's schedule.

    Attributes
    ----------
    array : CoilArray
    gradient : float
        Wanted axial gradient [T/m] (the current limit may lower it: ``plan.gradient``).
    schedule : Schedule
    times : ndarray, shape (M,)
        Table times [s]: 0, plan_step, 2 plan_step, ... and the schedule's duration last.
    plan : CurrentPlan
        Currents per turn [A], shape (M, count), at ``schedule.position(times)``.
    """

    array: CoilArray
    gradient: float
    schedule: Schedule
    times: FloatArray
    plan: CurrentPlan


def coil_run(scenario: Scenario, schedule: Schedule | None = None) -> CoilRun:
    """The currents of every coil from t = 0 to the end of the deceleration, every
    ``[coils] plan_step`` seconds (:func:`tiltwell.coils.array.waveforms`)."""
    coils = coils_section(scenario)
    schedule = build(scenario).schedule if schedule is None else schedule
    array = coil_array(scenario, schedule)
    duration, step = schedule.duration, coils.plan_step
    points = math.floor(duration / step * (1.0 - 1e-12)) + 2  # the steps, then the end point
    if points * array.count > MAX_TABLE_VALUES:
        raise TiltwellError(
            f"[coils] plan_step [s] gives {points} points x {array.count} coils over {duration:g} s, more than "
            f"{MAX_TABLE_VALUES} table values; choose plan_step >= "
            f"{duration * array.count / MAX_TABLE_VALUES:.3g} s; got {step!r}")
    times = np.append(step * np.arange(points - 1), duration)
    gradient = row_gradient(scenario)
    parts = [waveforms(array, schedule, gradient, times[i:i + _CHUNK]) for i in range(0, times.size, _CHUNK)]
    plan = CurrentPlan(*(np.concatenate([getattr(p, name) for p in parts])
                         for name in ("positions", "currents", "gradient", "limited")))
    return CoilRun(array, gradient, schedule, times, plan)


def coil_scan(scenario: Scenario, run: CoilRun) -> PhaseScan:
    """The row's trap at ``[coils] phases`` positions across one pitch, decelerating as the
    scenario does (:func:`tiltwell.moving_trap_phases`; ``[simulation] samples`` per cut)."""
    species = build(scenario).species
    return moving_trap_phases(run.array, run.gradient, species, box_half_widths=trap_box(scenario),
                              phases=coils_section(scenario).phases, deceleration=run.schedule.deceleration,
                              samples=scenario.simulation.samples)


def device_box(scenario: Scenario, array: CoilArray) -> tuple[float, float, float]:
    """Half widths (hx, hy, hz) [m] of the trap box: the one box of every number,
    :func:`tiltwell.workflows.devicemodel.trap_box` (hx and hy scaled down together where
    needed so the corner stays inside 0.99 of the bore). ``array`` is checked only."""
    coils_section(scenario)
    if not isinstance(array, CoilArray):
        raise TiltwellError(f"array must be a CoilArray; got {type(array).__name__}")
    return trap_box(scenario)
