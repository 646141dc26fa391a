"""A scenario's real coil row (its ``[coils]`` section): the array, the current waveforms
that move the field zero along the schedule, the trap as it crosses one pitch, and one
coil's hardware numbers, as one JSON-ready summary.

:func:`coil_array` builds the :class:`~tiltwell.coils.array.CoilArray`; :func:`coil_run` plans
the currents at the table's times; :func:`coil_scan` follows the trap across one pitch
(these three, :func:`coil_positions`, :class:`CoilRun` and :func:`device_box` live in
:mod:`tiltwell.workflows.coilrun` and are importable from here too); :func:`coil_summary`
adds the hardware estimates; :func:`device_check` tracks the beam through the row.
Everything stays in SI (the ``units`` map names each unit); the CLI shows depths in mK and
acceptances in mm·m/s. No plotting, no file output here (the waveform table is written by
:meth:`~tiltwell.coils.array.CurrentPlan.to_csv`). Every number sizes dangerous hardware,
so the summary carries :data:`tiltwell.physics.hardware.ELECTRICAL_CAUTION`.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .._base.validation import as_integer
from ..coils.array import trap_currents
from ..coils.drive import DriveLoad, drive_load
from ..coils.moving import PhaseScan
from ..dynamics.capture import default_time_step
from ..dynamics.compare import DeviceComparison, compare_device
from ..physics.hardware import ELECTRICAL_CAUTION
from ..wells.acceptance import trap_acceptance
from .coilrun import (
    MAX_TABLE_VALUES,
    CoilRun,
    coil_array,
    coil_positions,
    coil_run,
    coil_scan,
    coils_section,
    device_box,
)
from .devicemodel import twin_table
from .report import build
from .scenario import Scenario

__all__ = [
    "row_load",
    "CoilRun",
    "MAX_TABLE_VALUES",
    "UNITS",
    "coil_array",
    "coil_positions",
    "coil_run",
    "coil_scan",
    "coil_summary",
    "coils_section",
    "device_box",
    "device_check",
]

FloatArray = NDArray[np.float64]

#: SI unit of every number in a coil summary.
UNITS: dict[str, str] = {
    "count": "1",
    "pitch": "m",
    "first": "m",
    "last": "m",
    "positions": "m",
    "active": "1",
    "gradient": "T/m",
    "peak_current": "A",
    "limited_fraction": "1",
    "achieved_gradient_min": "T/m",
    "achieved_gradient_mean": "T/m",
    "phases": "1",
    "phase_deceleration": "m/s^2",
    "depth_worst": "J",
    "depth_mean": "J",
    "ripple": "1",
    "longitudinal_acceptance_worst": "m*m/s",
    "longitudinal_acceptance_mean": "m*m/s",
    "transverse_acceptance_worst": "m*m/s",
    "transverse_acceptance_mean": "m*m/s",
    "zero_offset_max": "m",
    "duration": "s",
    "plan_step": "s",
    "plan_points": "1",
    "pulse_duration_max": "s",
    "pulse_duration_min": "s",
    "wire_area": "m^2",
    "inductance": "H",
    "resistance": "Ohm",
    "max_slope": "A/s",
    "running_voltage": "V",
    "inductive_voltage": "V",
    "peak_voltage": "V",
    "switch_on_voltage": "V",
    "switch_off_voltage": "V",
    "hardware_passed": "1",
    "handover_step": "A",
    "rise_time": "s",
    "handover_voltage": "V",
    "current_squared_time": "A^2*s",
    "temperature_rise": "K",
    "temperature_rise_bound": "K",
    "stored_energy": "J",
}


def _pulse_durations(run: CoilRun) -> FloatArray:
    """Pulse duration [s], first to last table point with current, of each coil that
    carries current."""
    currents, times = run.plan.currents, run.times
    used = np.flatnonzero(np.any(currents != 0.0, axis=0))
    durations = np.empty(used.size)
    for j, k in enumerate(used):
        on = np.flatnonzero(currents[:, k])
        durations[j] = times[on[-1]] - times[on[0]]
    return durations


def _slope(run: CoilRun, samples: int = 4001) -> float:
    """Steepest |dI/dt| = |dI/dz| v [A/s] of any coil between hand-overs.

    The currents at a given offset from a coil plane are the same in every pitch (an
    unclipped window sees the same row), and the trap is fastest at the start, so the
    first two pitches hold the steepest slope: sampled at ``samples`` points and beside each
    coil plane there, with one-sided differences that stay inside one window.
    """
    array, schedule = run.array, run.schedule
    span = min(2.0 * array.pitch, schedule.length)
    h = 1e-6 * array.pitch
    planes = array.positions[(array.positions >= 0.0) & (array.positions <= span)]
    z = np.clip(np.concatenate([np.linspace(0.0, span, samples), planes - 2 * h, planes + 2 * h]), h, span - h)
    middle, ahead, behind = (trap_currents(array, s, run.gradient).currents for s in (z, z + h, z - h))
    same_ahead = np.all((middle != 0.0) == (ahead != 0.0), axis=1)
    same_behind = np.all((middle != 0.0) == (behind != 0.0), axis=1)
    forward = np.where(same_ahead, np.abs(ahead - middle).max(axis=1), 0.0)
    backward = np.where(same_behind, np.abs(middle - behind).max(axis=1), 0.0)
    speed = schedule.velocity(schedule.time_at(z))
    return float(np.max(np.maximum(forward, backward) / h * speed))


def _handover_step(run: CoilRun) -> float:
    """Largest jump [A] of any coil's current where the trap passes a window boundary
    (a coil plane, z = first + j pitch) between 0 and the length: with an abrupt hand-over
    ([coils] handover = 0) the minimum-norm currents of the two windows differ there and
    the waveform steps; a tapered one (handover > 0, active > 2) is continuous by
    construction (tests/test_coilarray.py), so its step is 0."""
    array, length = run.array, run.schedule.length
    if array.handover > 0.0 and array.active > 2:
        return 0.0
    boundaries = array.positions[(array.positions > 0.0) & (array.positions < length)]
    if boundaries.size == 0:
        return 0.0
    delta = 1e-9 * array.pitch
    plan = trap_currents(array, np.concatenate([boundaries - delta, boundaries + delta]), run.gradient)
    before, after = np.split(plan.currents, 2)
    return float(np.abs(after - before).max())


def _scan_numbers(scan: PhaseScan) -> dict[str, Any]:
    mean_depth = float(np.mean(scan.depth))
    return {
        "phases": int(scan.phases.size),
        "depth_worst": float(np.min(scan.depth)),
        "depth_mean": mean_depth,
        "ripple": scan.ripple if mean_depth > 0.0 else None,
        "longitudinal_acceptance_worst": float(np.min(scan.longitudinal)),
        "longitudinal_acceptance_mean": scan.mean_longitudinal,
        "transverse_acceptance_worst": float(np.min(scan.transverse)),
        "transverse_acceptance_mean": scan.mean_transverse,
        "zero_offset_max": float(np.max(np.abs(scan.zero_offset))),
    }


def coil_summary(scenario: Scenario, run: CoilRun | None = None, scan: PhaseScan | None = None) -> dict[str, Any]:
    """All numbers of the scenario's coil row as a JSON-ready dict (SI) with a ``units`` map
    and the ``caution``.

    Parameters
    ----------
    scenario : Scenario
        With a ``[coils]`` section.
    run : CoilRun, optional
        A :func:`coil_run` of the same scenario, to reuse.
    scan : PhaseScan, optional
        Its :func:`coil_scan`, to reuse.

    Returns
    -------
    dict
        The row (``count``, ``pitch``, ``first``, ``last``, ``positions`` = every z_k, ``active``;
        :func:`coil_array`'s numbering, which every output shares); the waveforms
        (``peak_current`` = max |I| over the run, ``limited_fraction`` of the planned points
        where the current limit lowered the gradient, ``achieved_gradient_min`` and
        ``_mean``); the phase scan at the schedule's deceleration (depth, longitudinal and
        transverse acceptance, worst and mean over ``[coils] phases`` positions across one
        pitch, ``ripple`` = peak-to-peak depth over its mean, ``zero_offset_max``); and one
        coil's hardware numbers, all from the one :func:`row_load` of the run
        (:func:`tiltwell.drive_load`): ``pulse_duration_max``/``_min`` (first to last point with
        current, to within one plan_step), ``inductance`` (the wound coil's self-inductance by
        filaments) and ``resistance``, ``max_slope`` (steepest |dI/dt| = |dI/dz| v of any
        coil between hand-overs, for the driver's slew rate); over the whole shot, switch-on
        and switch-off within ``[deceleration] rise_time`` included and the neighbours'
        mutual terms summed: ``inductive_voltage`` (largest L dI/dt + sum M dI/dt of any
        coil), ``peak_voltage`` (with I R), ``running_voltage`` (between the switching
        ramps), ``switch_on_voltage`` and ``switch_off_voltage``; ``hardware`` (every coil's
        loads, the hottest and most stressed coil and a verdict per quantity against
        ``[limits]``, with its units and the caution) and ``hardware_passed``;
        ``handover_step`` (largest jump of a coil's current where the active coils change,
        from the currents just before and after) and ``handover_voltage`` = L step /
        ``[deceleration] rise_time`` (None when that is 0; self-inductance only),
        ``current_squared_time`` (integral of I^2 dt of the hottest coil, switching ramps
        included) and its adiabatic ``temperature_rise``, ``temperature_rise_bound`` (the
        peak current for the whole longest pulse, an upper bound) and ``stored_energy`` =
        L I^2 / 2 at the peak current.

    Notes
    -----
    Copper at 20 °C with its resistivity held constant, no cooling during a pulse (the
    assumptions of :func:`tiltwell.drive_load`, listed in ``hardware``).
    """
    coils = coils_section(scenario)
    run = coil_run(scenario) if run is None else run
    array, plan = run.array, run.plan
    scan = coil_scan(scenario, run) if scan is None else scan
    durations = _pulse_durations(run)
    slope, step = _slope(run), _handover_step(run)
    peak = float(np.abs(plan.currents).max())
    longest = float(durations.max())
    rise = scenario.deceleration.rise_time
    load = row_load(scenario, run)
    inductance, hottest = load.inductance, load.hottest
    conductor = load.settings
    per_action = conductor["resistivity"] / (load.wire_area**2 * conductor["density"] * conductor["specific_heat"])
    summary: dict[str, Any] = {
        "count": array.count,
        "pitch": array.pitch,
        "first": array.first,
        "last": float(array.positions[-1]),
        "positions": array.positions.tolist(),
        "active": array.active,
        "gradient": run.gradient,
        "peak_current": peak,
        "limited_fraction": float(np.mean(plan.limited)),
        "achieved_gradient_min": float(plan.gradient.min()),
        "achieved_gradient_mean": float(plan.gradient.mean()),
        "phase_deceleration": run.schedule.deceleration,
        **_scan_numbers(scan),
        "duration": run.schedule.duration,
        "plan_step": coils.plan_step,
        "plan_points": int(run.times.size),
        "pulse_duration_max": longest,
        "pulse_duration_min": float(durations.min()),
        "wire_area": load.wire_area,
        "inductance": inductance,
        "resistance": load.resistance,
        "max_slope": slope,
        "inductive_voltage": float(load.induced_voltage.max()),
        "peak_voltage": float(load.peak_voltage.max()),
        "running_voltage": float(load.running_voltage.max()),
        "switch_on_voltage": float(load.switch_on_voltage.max()),
        "switch_off_voltage": float(load.switch_off_voltage.max()),
        "handover_step": step,
        "rise_time": rise,
        "handover_voltage": inductance * step / rise if rise > 0.0 else None,
        "current_squared_time": float(load.current_squared_time[hottest]),
        "temperature_rise": float(load.temperature_rise[hottest]),
        "temperature_rise_bound": per_action * peak**2 * longest,
        "stored_energy": 0.5 * inductance * peak**2,
        "hardware_passed": load.passed,
        "caution": ELECTRICAL_CAUTION,
    }
    for key, value in summary.items():  # JSON has no NaN: an unbound phase gives None
        if isinstance(value, float) and not math.isfinite(value):
            summary[key] = None
    summary["units"] = {key: UNITS[key] for key in summary if key in UNITS}
    summary["hardware"] = load.to_dict()  # every coil's loads against [limits], with its own units map
    return summary


def row_load(scenario: Scenario, run: CoilRun | None = None) -> DriveLoad:
    """Voltages, heating and forces of every coil of the scenario's row over one shot
    (:func:`tiltwell.drive_load`), switch-on and switch-off included as linear ramps of
    ``[deceleration] rise_time`` (``[coils] plan_step`` where that is 0), judged against
    ``[limits]``, at ``[coils] repetition_rate`` with ``[coils] heat_transfer``."""
    coils = coils_section(scenario)
    run = coil_run(scenario) if run is None else run
    rise = scenario.deceleration.rise_time
    return drive_load(run.array, run.times, run.plan.currents, rise_time=rise if rise > 0.0 else coils.plan_step,
                      fill_factor=coils.fill_factor, repetition_rate=coils.repetition_rate,
                      heat_transfer=coils.heat_transfer, limits=scenario.limits.hardware_limits())


def device_check(scenario: Scenario, particles: int | None = None, *, run: CoilRun | None = None,
                 progress: bool = False) -> DeviceComparison:
    """The scenario's beam through its coil row and through the row's rigid twin.

    ``particles`` (default ``[simulation] particles``) are drawn from the beam at switch-on
    with ``[simulation] seed``, in the trap frame as for the captured fraction, and tracked
    from switch-on to the end of the deceleration by :func:`tiltwell.compare_device`: the
    device run follows the currents planned every ``[coils] plan_step`` (the waveform
    table) and interpolated linearly between, as a pulse generator would play them. Time
    step: ``[simulation] time_step``, else the rigid trap's default
    (:func:`tiltwell.dynamics.capture.default_time_step`). Both runs lose particles at the walls of
    :func:`device_box`. ``run``: a :func:`coil_run` of the same scenario, to reuse. The rigid
    twin's field map is built from the row's own table of the twin
    (:func:`~tiltwell.workflows.devicemodel.twin_table`, cached, the same ``[coils] phases``
    over the same box) rather than from the coils' filaments.
    """
    coils = coils_section(scenario)
    built = build(scenario)
    run = coil_run(scenario, built.schedule) if run is None else run
    count = scenario.simulation.particles if particles is None else as_integer(particles, "particles", 1)
    step = scenario.simulation.time_step
    if step is None:
        acceptance = trap_acceptance(built.trap, built.schedule.deceleration, include_6d=False)
        step = default_time_step(acceptance, built.species.mass)
    sample = built.beam.sample(count, seed=scenario.simulation.seed)
    sample[:, 5] -= built.mismatch
    return compare_device(run.array, built.species, sample, schedule=built.schedule, gradient=run.gradient,
                          time_step=min(step, built.schedule.duration), box_half_widths=device_box(scenario, run.array),
                          plan_times=run.times, phases=coils.phases, twin=twin_table(scenario), progress=progress)
