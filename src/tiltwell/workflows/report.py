"""A whole scenario in, one summary out: the numbers a proposal needs.

:func:`build` turns a :class:`~tiltwell.workflows.scenario.Scenario` into the physics objects
(species, trap, source and beam, schedule); :func:`summarise` computes the acceptances, the
three captured-fraction estimates, the schedule and, when the scenario gives a coil pitch
and current, the coil timing and hardware estimates with their cautions. The CLI, the
sweeps and the notebooks all go through these two functions.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..physics.beam import Beam
from ..dynamics.capture import CaptureEstimates, capture_estimates
from ..physics.fields import FieldSource, IdealQuadrupole, anti_helmholtz
from ..physics.hardware import ELECTRICAL_CAUTION
from .scenario import Scenario, box_half_widths
from ..coils.schedule import CoilTiming, Schedule, coil_timing, constant_deceleration
from ..physics.source import Aperture, Source, gas
from ..physics.species import LinearZeeman, Species, species
from ..wells.traps import Trap

__all__ = ["Built", "UNITS", "build", "estimate", "summarise", "timing"]

#: SI unit of every number in a summary.
UNITS: dict[str, str] = {
    "longitudinal_acceptance": "m*m/s",
    "transverse_acceptance": "m*m/s",
    "acceptance_6d": "(m*m/s)^3",
    "escape_energy": "J",
    "depth": "J",
    "captured_fraction_overlap": "1",
    "captured_fraction_energy": "1",
    "captured_fraction_energy_error": "1",
    "captured_fraction_mc": "1",
    "captured_fraction_mc_error": "1",
    "mc_particles": "1",
    "deceleration": "m/s^2",
    "critical_deceleration": "m/s^2",
    "initial_velocity": "m/s",
    "final_velocity": "m/s",
    "length": "m",
    "duration": "s",
    "coils": "1",
    "mismatch": "m/s",
    "arrival_time_mean": "s",
    "arrival_time_rms": "s",
}

@dataclass(frozen=True)
class Built:
    """The physics objects of a scenario."""

    species: Species
    trap: Trap
    source: Source
    beam: Beam
    schedule: Schedule
    mismatch: float


def build(scenario: Scenario) -> Built:
    """Species, trap, source, beam at switch-on and schedule of a scenario."""
    particle = _species(scenario)
    trap = Trap(_field_source(scenario), particle, _bounds(scenario))
    b = scenario.beam
    source = Source(
        gas=gas(b.gas),
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
    return Built(particle, trap, source, beam, schedule, b.mismatch)


def _species(scenario: Scenario) -> Species:
    s = scenario.species
    if s.mass is None or s.moment is None:
        return species(s.name)
    return Species(s.name, s.mass, LinearZeeman(s.moment), state="custom, linear Zeeman", source="scenario file")


def _field_source(scenario: Scenario) -> FieldSource:
    t = scenario.trap
    if t.kind == "quadrupole":
        assert t.gradient is not None and t.max_field is not None
        return IdealQuadrupole(t.gradient, t.max_field)
    assert t.radius is not None and t.separation is not None and t.current is not None
    return anti_helmholtz(t.radius, t.separation, t.current, turns=t.turns or 1, width=t.width or 0.0,
                          height=t.height or 0.0)


def _bounds(scenario: Scenario) -> tuple[tuple[float, float], ...]:
    hx, hy, hz = box_half_widths(scenario.trap)  # a quadrupole's default: twice its truncation surface
    return ((-hx, hx), (-hy, hy), (-hz, hz))


def timing(scenario: Scenario, schedule: Schedule) -> CoilTiming | None:
    """The coil timing table when the scenario gives a pitch and a peak current."""
    d = scenario.deceleration
    if d.pitch is None or d.peak_current is None:
        return None
    return coil_timing(schedule, d.pitch, peak_current=d.peak_current, rise_time=d.rise_time)


def estimate(scenario: Scenario, built: Built | None = None, *, progress: bool = False) -> CaptureEstimates:
    """The three captured-fraction estimates of a scenario (its [simulation] settings
    passed to :func:`tiltwell.dynamics.capture.capture_estimates`); ``built`` reuses a :func:`build`."""
    built = build(scenario) if built is None else built
    sim, schedule = scenario.simulation, built.schedule
    return capture_estimates(
        built.trap, schedule.deceleration, built.beam, schedule.duration,
        particles=sim.particles, seed=sim.seed, mismatch=built.mismatch, time_step=sim.time_step,
        method=sim.method, track_particles=sim.track, rtol=sim.rtol, samples=sim.samples,
        switch_on_time=min(sim.switch_on_time, schedule.duration), progress=progress,
    )


def summarise(scenario: Scenario, *, progress: bool = False) -> dict[str, Any]:
    """All numbers of a scenario as a JSON-ready dict (SI), with a ``units`` map."""
    built = build(scenario)
    sim = scenario.simulation
    schedule = built.schedule
    estimates = estimate(scenario, built, progress=progress)
    summary = _numbers(built, estimates, sim.samples)
    if sim.detector_distance is not None and estimates.tracking is not None:
        times = estimates.arrival_times(schedule.final_velocity, sim.detector_distance)
        arrived = times[np.isfinite(times)]
        summary["arrival_time_mean"] = float(arrived.mean()) if arrived.size else None
        summary["arrival_time_rms"] = float(arrived.std()) if arrived.size else None
    table = timing(scenario, schedule)
    if table is not None:
        summary["coils"] = int(table.positions.size)
        summary["caution"] = ELECTRICAL_CAUTION
    summary["units"] = {key: UNITS[key] for key in summary if key in UNITS}
    return summary


def _numbers(built: Built, estimates: CaptureEstimates, samples: int) -> dict[str, Any]:
    acceptance = estimates.acceptance
    schedule = built.schedule

    def finite(x: float) -> float | None:
        return float(x) if math.isfinite(x) else None

    return {
        "species": built.species.name,
        "longitudinal_acceptance": acceptance.longitudinal.area,
        "transverse_acceptance": acceptance.transverse.area,
        "acceptance_6d": finite(acceptance.volume),
        "escape_energy": finite(acceptance.escape_energy),
        "depth": acceptance.longitudinal.depth,
        "captured_fraction_overlap": estimates.overlap,
        "captured_fraction_energy": estimates.energetic,
        "captured_fraction_energy_error": estimates.energetic_error,
        "captured_fraction_mc": finite(estimates.tracked),
        "captured_fraction_mc_error": finite(estimates.tracked_error),
        "mc_particles": estimates.particles,
        "deceleration": schedule.deceleration,
        "critical_deceleration": built.trap.critical_deceleration(samples),
        "initial_velocity": schedule.initial_velocity,
        "final_velocity": schedule.final_velocity,
        "length": schedule.length,
        "duration": schedule.duration,
        "mismatch": built.mismatch,
    }
