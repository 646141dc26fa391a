"""What the explorer's coil-array part computes, from its settings and the main explorer's
trap, species, deceleration and schedule; no widgets.

The coil row is the device's, numbered as every output numbers it: coil k at
z_k = first + k ``pitch`` with first = -(active/2 - 1) ``pitch``
(:func:`tiltwell.coils.array.row_layout`, as in the timing and waveform tables and
``tiltwell coils``), with the scenario's winding section (``[coils]`` width, height and
hand-over; thin windings, every turn at the mean radius, without a ``[coils]`` section),
so that at the starting settings it is :func:`tiltwell.workflows.coilreport.coil_run`'s
row. Three library calls make the part:

- the currents (cheap, every change): :func:`tiltwell.coils.array.waveforms` while the trap
  crosses two pitches at the start of the deceleration, from z = pitch / 2 to
  z = 5 pitch / 2 (midway between coils, so that it passes two hand-overs, at the planes of
  coils h and h + 1, h = ``active / 2``); on the first ``active + 3`` coils of the row (no
  further coil carries current there);
- the phase scan (about 0.05 s per phase, in the background):
  :func:`tiltwell.coils.moving.moving_trap_phases` on ``active + 1`` coils, :data:`PHASES`
  phases, in the box of the main explorer's trap;
- the hardware verdicts (about 1 s on the demo's 380 coils x 7,400 table times, in the
  background): :func:`tiltwell.drive_load` of the whole row over the whole shot, at the
  waveform table's times, as :func:`tiltwell.workflows.coilreport.row_load` does, with the
  ``[limits]``, ``[coils]`` fill factor, repetition rate and cooling and ``[deceleration]``
  rise time of the scenario the explorer was opened with (:class:`Hardware`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .model import Model, physics_scenario
from .._base.validation import TiltwellError
from ..coils.array import CoilArray, CurrentPlan, row_layout, trap_currents, waveforms
from ..coils.drive import DriveLoad, drive_load
from ..coils.moving import PhaseScan, moving_trap_phases
from ..physics.limits import HardwareLimits
from ..workflows.coilrun import MAX_TABLE_VALUES
from ..workflows.scenario import Scenario
from ..workflows.devicemodel import row_gradient
from ..workflows.report import build
from ..coils.schedule import Schedule
from ..physics.species import Species
from ..wells.traps import Trap

__all__ = [
    "PHASES",
    "SAMPLES",
    "TIMES",
    "CoilSettings",
    "Hardware",
    "Inputs",
    "MAX_VERDICT_VALUES",
    "NO_HARDWARE",
    "axial_gradient",
    "current_array",
    "current_window",
    "currents",
    "default_settings",
    "device_array",
    "device_coils",
    "device_load",
    "hardware_of",
    "hardware_problems",
    "inputs_of",
    "phase_array",
    "problems",
    "row_first",
    "scan",
    "table_times",
]

FloatArray = NDArray[np.float64]

#: Phases across one pitch in the interactive scan (moving_trap_phases' default is 16;
#: 12 phases with 501 samples per cut take 0.4-0.7 s on the demo on a shared 2-core machine).
PHASES = 12
#: Samples per 1-D cut in the interactive scan (areas change by ~1e-6 relative from 1001).
SAMPLES = 501
#: Time samples of the current view.
TIMES = 201
#: Pitch [m], current limit per turn [A] and active coils when the scenario gives none
#: (invented values).
DEFAULT_PITCH = 0.012
DEFAULT_LIMIT = 500.0
DEFAULT_ACTIVE = 4
#: Default coil radius over the radius of the trap box's corner, sqrt(hx^2 + hy^2).
BORE_MARGIN = 1.25
#: Default turns bring the peak current per turn to this fraction of the limit, or below.
LIMIT_USE = 0.8
MAX_TURNS = 100_000
#: What the verdict table says without a ``[coils]`` section (no winding to judge).
NO_HARDWARE = "— (the hardware verdicts need the scenario's [coils] section: its winding width and height)"
#: Most table values (coils x times) the explorer judges against the limits: the cost of
#: :func:`tiltwell.drive_load` grows as times x coils^2 (~1 s for the demo's 2.8e6 values).
MAX_VERDICT_VALUES = min(8_000_000, MAX_TABLE_VALUES)


@dataclass(frozen=True)
class CoilSettings:
    """The coil part's control values, SI: ``pitch`` and ``radius`` [m], ``turns``,
    ``active`` coils, ``max_current`` per turn [A], wanted axial ``gradient`` [T/m]; and the
    winding, fixed by the scenario (no control): radial ``width`` and axial ``height`` [m]
    (0: thin) and the ``handover`` [pitches] of :class:`tiltwell.coils.array.CoilArray`."""

    pitch: float
    radius: float
    turns: int
    active: int
    max_current: float
    gradient: float
    width: float = 0.0
    height: float = 0.0
    handover: float = CoilArray.handover


@dataclass(frozen=True)
class Hardware:
    """What the hardware verdicts take from the scenario, SI: the switching ``rise_time``
    [s] (``[deceleration] rise_time``, else ``[coils] plan_step`` where that is 0, as
    :func:`tiltwell.workflows.coilreport.row_load`), the table's ``plan_step`` [s], the
    ``fill_factor``, ``repetition_rate`` [Hz], ``heat_transfer`` [W/(m^2 K)] and ``limits``."""

    rise_time: float
    plan_step: float
    fill_factor: float
    repetition_rate: float
    heat_transfer: float
    limits: HardwareLimits


def hardware_of(scenario: Scenario | None) -> Hardware | None:
    """:class:`Hardware` of ``scenario``'s ``[coils]``, ``[limits]`` and ``[deceleration]``
    (None without a scenario or a ``[coils]`` section)."""
    if scenario is None or scenario.coils is None:
        return None
    c, rise = scenario.coils, scenario.deceleration.rise_time
    return Hardware(rise if rise > 0.0 else c.plan_step, c.plan_step, c.fill_factor, c.repetition_rate,
                    c.heat_transfer, scenario.limits.hardware_limits())


@dataclass(frozen=True, eq=False)
class Inputs:
    """What the part takes from the main explorer's current picture.

    ``half_widths`` (hx, hy, hz) [m] is the main trap's box; ``reference`` the main
    (rigid) trap's depth [J] and longitudinal and transverse acceptances [m·m/s] at the
    same deceleration; ``schedule`` None when the main settings make none (``why`` says
    why). ``species`` None when the main settings make no trap at all; ``hardware`` None
    without a ``[coils]`` section or a schedule.
    """

    species: Species | None
    deceleration: float
    half_widths: tuple[float, float, float]
    reference: tuple[float, float, float]
    schedule: Schedule | None
    why: str
    hardware: Hardware | None = None

    @property
    def scan_key(self) -> tuple[object, ...]:
        name = None if self.species is None else self.species.name
        return (name, self.deceleration, self.half_widths)

    @property
    def current_key(self) -> tuple[object, ...]:
        s = self.schedule
        return (None,) if s is None else (s.initial_velocity, s.final_velocity, s.deceleration)


NO_INPUTS = Inputs(None, math.nan, (math.nan,) * 3, (math.nan,) * 3, None, "the main settings make no trap")


def inputs_of(trap: Trap | None, deceleration: float, reference: tuple[float, float, float],
              schedule: Schedule | None, why: str, scenario: Scenario | None = None) -> Inputs:
    """:class:`Inputs` from the main explorer's trap (None: no trap), deceleration
    [m/s^2], reference numbers, schedule and scenario (for :func:`hardware_of`)."""
    if trap is None:
        return NO_INPUTS
    (x0, x1), (y0, y1), (z0, z1) = trap.bounds
    halves = (0.5 * (x1 - x0), 0.5 * (y1 - y0), 0.5 * (z1 - z0))
    return Inputs(trap.species, deceleration, halves, reference, schedule, why, hardware_of(scenario))


def axial_gradient(trap: Trap) -> float:
    """On-axis gradient [T/m] of ``trap``'s field at its zero (the box centre):
    ``|B|(0, 0, h) / h`` with h = 1e-6 of the box's half length (the field is linear
    there; exact for an ideal quadrupole, ~1e-12 relative for a coil pair)."""
    (x0, x1), (y0, y1), (z0, z1) = trap.bounds
    centre = np.array([0.5 * (x0 + x1), 0.5 * (y0 + y1), 0.5 * (z0 + z1)])
    h = 0.5e-6 * (z1 - z0)
    return float(trap.source.magnitude((centre + [0.0, 0.0, h])[None, :])[0] / h)


def row_first(settings: CoilSettings) -> float:
    """z_0 [m] of the device row: -(active/2 - 1) pitch (:func:`tiltwell.coils.array.row_layout`)."""
    return -(settings.active // 2 - 1) * settings.pitch


def _row(settings: CoilSettings, count: int) -> CoilArray:
    """The first ``count`` coils of the device row at ``settings``."""
    s = settings
    return CoilArray(count=count, pitch=s.pitch, radius=s.radius, first=row_first(s), turns=s.turns, width=s.width,
                     height=s.height, max_current=s.max_current, active=s.active, handover=s.handover)


def phase_array(settings: CoilSettings) -> CoilArray:
    """The first ``active + 1`` coils of the row, for the phase scan."""
    return _row(settings, settings.active + 1)


def current_array(settings: CoilSettings) -> CoilArray:
    """The first ``active + 3`` coils of the row: coil k at the z_k of every output."""
    return _row(settings, settings.active + 3)


def device_coils(length: float, pitch: float, active: int, handover: float = CoilArray.handover) -> int:
    """Coils of the device row of ``pitch`` [m] with ``active`` coils carrying current over
    a ``length`` [m] (:func:`tiltwell.coils.array.row_layout`; ``handover`` [pitches])."""
    return row_layout(length, pitch, active, handover)[0]


def device_array(settings: CoilSettings, length: float) -> CoilArray:
    """The whole device row for a deceleration over ``length`` [m]
    (:func:`tiltwell.workflows.devicemodel.row_array` at these settings)."""
    return _row(settings, device_coils(length, settings.pitch, settings.active, settings.handover))


def table_times(schedule: Schedule, plan_step: float) -> FloatArray:
    """The waveform table's times [s]: 0, plan_step, 2 plan_step, ... and the schedule's
    duration last (:func:`tiltwell.workflows.coilreport.coil_run`'s table)."""
    points = math.floor(schedule.duration / plan_step * (1.0 - 1e-12)) + 2
    return np.append(plan_step * np.arange(points - 1), schedule.duration)


def device_load(settings: CoilSettings, schedule: Schedule, hardware: Hardware) -> DriveLoad:
    """:func:`tiltwell.drive_load` of the whole row over the whole shot: the currents of
    :func:`tiltwell.coils.array.waveforms` at :func:`table_times`, planned 512 times at a
    time (bounded memory), judged with ``hardware``."""
    array = device_array(settings, schedule.length)
    times = table_times(schedule, hardware.plan_step)
    parts = [waveforms(array, schedule, settings.gradient, times[i:i + 512]).currents for i in range(0, times.size, 512)]
    h = hardware
    return drive_load(array, times, np.concatenate(parts), rise_time=h.rise_time, fill_factor=h.fill_factor,
                      repetition_rate=h.repetition_rate, heat_transfer=h.heat_transfer, limits=h.limits)


def current_window(settings: CoilSettings, schedule: Schedule) -> FloatArray:
    """:data:`TIMES` times [s] from when the trap passes z = pitch / 2 to when it passes
    z = 5 pitch / 2 (:meth:`tiltwell.Schedule.time_at`)."""
    ends = schedule.time_at(np.array([0.5, 2.5]) * settings.pitch)
    return np.linspace(ends[0], ends[1], TIMES)


def currents(settings: CoilSettings, schedule: Schedule) -> tuple[CoilArray, FloatArray, CurrentPlan]:
    """The array, the times [s] and the :func:`tiltwell.coils.array.waveforms` drawn."""
    array = current_array(settings)
    times = current_window(settings, schedule)
    return array, times, waveforms(array, schedule, settings.gradient, times)


def scan(settings: CoilSettings, inputs: Inputs) -> PhaseScan:
    """:func:`tiltwell.coils.moving.moving_trap_phases` at these settings (raises TiltwellError
    when they make no scan)."""
    if inputs.species is None:
        raise TiltwellError(inputs.why)
    return moving_trap_phases(phase_array(settings), settings.gradient, inputs.species,
                              box_half_widths=inputs.half_widths, phases=PHASES,
                              deceleration=inputs.deceleration, samples=SAMPLES)


def problems(settings: CoilSettings, inputs: Inputs) -> tuple[list[str], list[str]]:
    """What stops the phase scan and what stops the current view, in words."""
    s, common = settings, []
    if s.active < 2 or s.active % 2:
        common.append(f"active coils must be an even number >= 2; got {s.active}")
    if inputs.species is None:
        return common + [inputs.why], common + [inputs.why]
    hx, hy, _ = inputs.half_widths
    corner = math.hypot(hx, hy)
    scan_problems = list(common)
    if not corner < s.radius - 0.5 * s.width:
        scan_problems.append(
            f"coil radius [mm] must be > {(corner + 0.5 * s.width) * 1e3:.4g} mm: the bore (radius less half the "
            f"{s.width * 1e3:.4g} mm winding width) must exceed the corner of the trap box, sqrt(hx^2 + hy^2) = "
            f"{corner * 1e3:.4g} mm (the main trap's box; the field is singular on a winding); got "
            f"{s.radius * 1e3:.4g} mm")
    current_problems = list(common)
    if not s.radius > 0.5 * s.width:
        current_problems.append(f"coil radius [mm] must be > {s.width * 500:.4g} mm, half the winding width "
                                f"([coils] width); got {s.radius * 1e3:.4g} mm")
    schedule = inputs.schedule
    if schedule is None:
        current_problems.append(f"no schedule, so no currents to draw: {inputs.why}")
    elif not common:
        n, needed = device_coils(schedule.length, s.pitch, s.active, s.handover), s.active + 3
        if n < needed:  # fewer than active + 3 coils: the trap's path is shorter than 3 pitches
            current_problems.append(
                f"the device is {schedule.length:.3g} m long: {n} coils of pitch {s.pitch * 1e3:.4g} mm, fewer "
                f"than the active + 3 = {needed} the current view needs ({s.active} active coils)")
    return scan_problems, current_problems


def hardware_problems(settings: CoilSettings, inputs: Inputs, current_problems: list[str]) -> list[str]:
    """What stops the hardware verdicts, in words, beyond ``current_problems`` (which stop them too)."""
    s, schedule, hardware = settings, inputs.schedule, inputs.hardware
    if current_problems or schedule is None:
        return []
    if hardware is None or not (s.width > 0.0 and s.height > 0.0):
        return []  # not a bad setting: the part says so in place of the verdicts (NO_HARDWARE)
    found = []
    if s.height > s.pitch:
        found.append(f"coil pitch [mm] must be >= {s.height * 1e3:.4g} mm, the winding height ([coils] height), "
                     f"for the neighbours not to overlap; got {s.pitch * 1e3:.4g} mm")
    coils = device_coils(schedule.length, s.pitch, s.active, s.handover)
    points = table_times(schedule, hardware.plan_step).size
    if coils * points > MAX_VERDICT_VALUES:
        found.append(f"no hardware verdicts here: {coils} coils x {points} table times is more than the "
                     f"{MAX_VERDICT_VALUES:.3g} values the explorer judges; a coil pitch [mm] of at least "
                     f"{s.pitch * 1e3 * coils * points / MAX_VERDICT_VALUES:.3g} mm fits (or run tiltwell coils on "
                     "the saved scenario)")
    return found


def default_settings(model: Model) -> CoilSettings:
    """The part's starting point for the main explorer's loaded scenario.

    With a ``[coils]`` section: its radius, turns, active coils, current limit and
    gradient (:func:`tiltwell.workflows.devicemodel.row_gradient`; the windings are taken
    as thin here). Otherwise pitch and
    current limit from ``[deceleration]`` ``pitch`` and ``peak_current`` when given (else
    :data:`DEFAULT_PITCH`, :data:`DEFAULT_LIMIT`); the trap's axial gradient; a radius
    :data:`BORE_MARGIN` times the box corner's, rounded up to a millimetre; the fewest turns
    that keep the peak current per turn at :data:`LIMIT_USE` of the limit.
    """
    base = model.base
    physics = physics_scenario(base, model.reference, model.initial_settings())
    pitch = base.deceleration.pitch or DEFAULT_PITCH
    limit = base.deceleration.peak_current or DEFAULT_LIMIT
    coils = base.coils
    if coils is not None:  # the row's own gradient rule: [coils] gradient, else the [trap] quadrupole's
        return CoilSettings(pitch, coils.radius, coils.turns, coils.active, coils.max_current or limit,
                            row_gradient(physics), coils.width, coils.height, coils.handover)
    trap = build(physics).trap
    gradient = axial_gradient(trap)
    (x0, x1), (y0, y1), _ = trap.bounds
    radius = math.ceil(BORE_MARGIN * 0.5 * math.hypot(x1 - x0, y1 - y0) * 1e3) * 1e-3
    one_turn = CoilArray(count=DEFAULT_ACTIVE + 1, pitch=pitch, radius=radius, active=DEFAULT_ACTIVE)
    phases = one_turn.positions[DEFAULT_ACTIVE // 2] + np.linspace(0.0, pitch, 4 * TIMES)
    peak = float(np.max(np.abs(trap_currents(one_turn, phases, gradient).currents)))
    turns = min(max(math.ceil(peak / (LIMIT_USE * limit)), 1), MAX_TURNS)
    return CoilSettings(pitch, radius, turns, DEFAULT_ACTIVE, limit, gradient)
