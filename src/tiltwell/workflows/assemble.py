"""A scenario's physics objects: species, trap (from :mod:`.devicemodel`), source, beam at
switch-on, schedule, and the coil timing table.

:func:`build` is the one place a :class:`~tiltwell.workflows.scenario.Scenario` becomes
physics objects; :mod:`tiltwell.workflows.report` (which re-exports these names), the coil
row's workflows and the views all start from it. SI units.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TypeVar

from .._base.validation import TiltwellError
from ..coils.schedule import CoilTiming, Schedule, coil_timing, constant_deceleration
from ..physics.beam import Beam
from ..physics.source import Aperture, Source, gas
from ..physics.species import LinearZeeman, Species, species
from ..wells.traps import Trap
from .devicemodel import row_array, trap_field
from .scenario import Scenario, check_scenario

__all__ = ["Built", "build", "timing"]


_T = TypeVar("_T")


@dataclass(frozen=True)
class Built:
    """The physics objects of a scenario; ``trap_model`` says in words which trap ``trap``
    is (:data:`tiltwell.workflows.devicemodel.TRAP_MODELS`)."""

    species: Species
    trap: Trap
    source: Source
    beam: Beam
    schedule: Schedule
    mismatch: float
    trap_model: str


def build(scenario: Scenario) -> Built:
    """Species, trap, source, beam at switch-on and schedule of a scenario.

    The trap is the coil row's phase-averaged field where the scenario has ``[coils]``
    (unless ``[simulation] first_estimate``), else the ``[trap]`` section's, in the box of
    :func:`tiltwell.workflows.devicemodel.trap_box` (see that module)."""
    particle = _species(check_scenario(scenario))
    field, bounds, model = trap_field(scenario)
    trap = Trap(field, particle, bounds)
    b = scenario.beam
    source = Source(
        gas=_named("[beam] gas", lambda: gas(b.gas)),
        temperature=b.temperature,
        speed_ratio=b.speed_ratio,
        relative_spread=b.relative_spread,
        valve_open_time=b.valve_open_time,
        nozzle_diameter=b.nozzle_diameter,
        nozzle_skimmer_distance=b.nozzle_skimmer_distance,
        skimmer_diameter=b.skimmer_diameter,
        apertures=tuple(Aperture(distance, diameter) for distance, diameter in b.apertures),
        flight_distance=b.flight_distance,
        mass=particle.mass,
    )
    beam = source.beam()
    d = scenario.deceleration
    start = beam.velocity + b.mismatch
    schedule = constant_deceleration(start, d.final_velocity, deceleration=d.deceleration, length=d.length)
    return Built(particle, trap, source, beam, schedule, b.mismatch, model)


def _named(key: str, look_up: Callable[[], _T], argument: str | None = None) -> _T:
    """``look_up()``, its TiltwellError prefixed with the scenario key that named the thing
    (only an error about ``argument`` when one is given; others pass unchanged)."""
    try:
        return look_up()
    except TiltwellError as error:
        if argument is not None and error.argument != argument:
            raise
        raise TiltwellError(f"{key}: {error}", argument=error.argument) from None


def _species(scenario: Scenario) -> Species:
    s = scenario.species
    if s.mass is None or s.moment is None:
        return _named("[species] name", lambda: species(s.name))
    return Species(s.name, s.mass, LinearZeeman(s.moment), state="custom, linear Zeeman", source="scenario file")


def timing(scenario: Scenario, schedule: Schedule) -> CoilTiming | None:
    """The coil timing table when the scenario gives a pitch and a peak current.

    With ``[coils]``: one row per coil of the row (:func:`tiltwell.workflows.devicemodel.row_array`,
    coil k at its z_k), each on while its planned current is nonzero, i.e. while the trap
    is within (active / 2) pitch of it (:func:`tiltwell.coils.array.row_layout`), clipped to
    the schedule. Without: coils at (k + 1/2) pitch inside the length, each on within one
    pitch (:func:`tiltwell.coils.schedule.coil_timing`'s default)."""
    d = scenario.deceleration
    if d.pitch is None or d.peak_current is None:
        return None
    pitch, peak = d.pitch, d.peak_current
    why = (f"[deceleration] rise_time: each coil's pulse must hold both ramps, and the shortest pulse comes at "
           f"the top speed ({schedule.initial_velocity:.4g} m/s, the beam's mean plus [beam] mismatch) over the "
           "coil's window of the pitch: lower rise_time or check mismatch and pitch")
    if scenario.coils is None:
        return _named(why, lambda: coil_timing(schedule, pitch, peak_current=peak, rise_time=d.rise_time), "rise_time")
    row = row_array(scenario, schedule.length)
    return _named(why, lambda: coil_timing(schedule, row.pitch, first_coil=row.first, count=row.count,
                                           window=0.5 * row.active, peak_current=peak,
                                           rise_time=d.rise_time), "rise_time")
