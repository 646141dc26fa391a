"""A scenario's real coil row (its ``[coils]`` section) driven along its schedule.

:func:`coil_array` builds the :class:`~tiltwell.coils.array.CoilArray` of the section;
:func:`coil_run` plans every coil's current at the waveform table's times (a
:class:`CoilRun`); :func:`coil_scan` follows the row's trap across one pitch;
:func:`device_box` is the trap box that fits inside the bore. The summary of all this,
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
from ..coils.schedule import MAX_COILS, Schedule
from .report import build
from .scenario import CoilsSection, Scenario, box_half_widths

__all__ = ["CoilRun", "MAX_TABLE_VALUES", "coil_array", "coil_run", "coil_scan", "coils_section", "device_box"]

FloatArray = NDArray[np.float64]

#: Most numbers (points x coils) a waveform table may hold: a guard against a plan_step typed wrong.
MAX_TABLE_VALUES = 20_000_000

#: Trap positions planned at once (bounds the memory of the on-axis response).
_CHUNK = 512


def coils_section(scenario: Scenario) -> CoilsSection:
    """The ``[coils]`` section of ``scenario``, or an error saying it has none."""
    if not isinstance(scenario, Scenario):
        raise TiltwellError(f"scenario must be a Scenario; got {type(scenario).__name__}")
    if scenario.coils is None:
        raise TiltwellError("the scenario has no [coils] section (tiltwell keys lists its keys)")
    return scenario.coils


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
        When the bore (radius - width/2) does not clear the trap box's transverse half widths,
        or the row would need more than ``MAX_COILS`` coils.

    Returns
    -------
    CoilArray
        ``count = ceil(length / pitch) + active + 1`` coils from ``first = -(active/2) pitch``,
        so the last one lies at or beyond ``length + (active/2) pitch`` and the trap zero,
        running from z = 0 to z = length, always has ``active / 2`` coils on either side.
        ``max_current`` is ``[coils] max_current``, else ``[deceleration] peak_current``.
    """
    coils = coils_section(scenario)
    bore = coils.radius - 0.5 * coils.width
    hx, hy, _ = box_half_widths(scenario.trap)
    if bore <= max(hx, hy):
        raise TiltwellError(
            f"[coils] radius - width/2 [m] (the bore) must exceed the trap box's transverse half widths "
            f"{hx:g}, {hy:g} m ([trap] half_widths, or 4 max_field/gradient for a quadrupole); got "
            f"{bore:g} m from radius = {coils.radius!r}, width = {coils.width!r}")
    pitch, limit = scenario.deceleration.pitch, coils.max_current or scenario.deceleration.peak_current
    assert pitch is not None and limit is not None  # the scenario's own checks
    length = scenario.deceleration.length
    if length is None:
        length = (build(scenario).schedule if schedule is None else schedule).length
    count = math.ceil(length / pitch - 1e-9) + coils.active + 1
    if count > MAX_COILS:
        raise TiltwellError(
            f"[deceleration] pitch [m] and length [m] need {count} coils, more than {MAX_COILS}; "
            f"got pitch = {pitch!r}, length = {length:g}")
    return CoilArray(count=count, pitch=pitch, radius=coils.radius, first=-0.5 * coils.active * pitch,
                     turns=coils.turns, width=coils.width, height=coils.height, max_current=limit,
                     active=coils.active, handover=coils.handover)


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


def _gradient(scenario: Scenario) -> float:
    coils = coils_section(scenario)
    gradient = coils.gradient if coils.gradient is not None else scenario.trap.gradient
    assert gradient is not None  # [coils] gradient is required unless the trap is a quadrupole
    return gradient


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
    gradient = _gradient(scenario)
    parts = [waveforms(array, schedule, gradient, times[i:i + _CHUNK]) for i in range(0, times.size, _CHUNK)]
    plan = CurrentPlan(*(np.concatenate([getattr(p, name) for p in parts])
                         for name in ("positions", "currents", "gradient", "limited")))
    return CoilRun(array, gradient, schedule, times, plan)


def coil_scan(scenario: Scenario, run: CoilRun) -> PhaseScan:
    """The row's trap at ``[coils] phases`` positions across one pitch, decelerating as the
    scenario does (:func:`tiltwell.moving_trap_phases`; ``[simulation] samples`` per cut)."""
    species = build(scenario).species
    return moving_trap_phases(run.array, run.gradient, species, box_half_widths=box_half_widths(scenario.trap),
                              phases=coils_section(scenario).phases, deceleration=run.schedule.deceleration,
                              samples=scenario.simulation.samples)


def device_box(scenario: Scenario, array: CoilArray) -> tuple[float, float, float]:
    """Half widths (hx, hy, hz) [m] of the trap box, with hx and hy scaled down together
    where needed so the box's corner stays inside 0.99 of the bore (radius - width / 2):
    the coil field is tabulated only inside the bore, and a particle beyond it would be in
    the winding."""
    hx, hy, hz = box_half_widths(scenario.trap)
    room = 0.99 * (array.radius - 0.5 * array.width)
    scale = min(1.0, room / math.hypot(hx, hy))
    return (hx * scale, hy * scale, hz)
