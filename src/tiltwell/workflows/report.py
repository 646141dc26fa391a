"""A whole scenario in, one summary out: the numbers a proposal needs.

:func:`build` (from :mod:`tiltwell.workflows.assemble`) turns a
:class:`~tiltwell.workflows.scenario.Scenario` into the physics objects (species, trap,
source and beam, schedule); :func:`summarise` computes the acceptances, the three
captured-fraction estimates, the schedule and, when the scenario gives a coil pitch and
current, the coil count with the electrical caution. The CLI, the sweeps, the figures and
the notebooks all go through these two functions.

One device model (:mod:`tiltwell.workflows.devicemodel`): where the scenario has a
``[coils]`` section every number comes from its coil row, the phase-averaged rigid twin,
and the summary adds the row's worst phase across one pitch (``depth_worst_phase``,
``longitudinal_acceptance_worst_phase``, ``transverse_acceptance_worst_phase``); else, or
with ``[simulation] first_estimate = true``, from the ``[trap]`` section (an ideal
quadrupole: the quick first estimate). ``trap_model`` says which, in words; ``bound`` is
False beyond the critical deceleration, where every acceptance and fraction is 0.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..dynamics.capture import CaptureEstimates
from ..physics.hardware import ELECTRICAL_CAUTION
from .assemble import Built, build, timing
from .devicemodel import model_of, phase_acceptances
from .rowtrack import estimate
from .scenario import Scenario
from .yields import YIELD_UNITS, YieldBudget, yield_budget

__all__ = ["Built", "UNITS", "build", "estimate", "summarise", "summarise_parts", "timing", "worst_phase"]

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
    "depth_worst_phase": "J",
    "longitudinal_acceptance_worst_phase": "m*m/s",
    "transverse_acceptance_worst_phase": "m*m/s",
} | YIELD_UNITS

def worst_phase(scenario: Scenario, built: Built) -> tuple[float, float, float]:
    """Depth [J], longitudinal and transverse acceptance [m·m/s] of the row's trap at its
    worst phase (the smallest longitudinal acceptance of ``[coils] phases`` positions
    across one pitch), at the schedule's deceleration with ``[simulation] samples`` per cut
    (:func:`tiltwell.workflows.devicemodel.phase_acceptances`, in the one trap box)."""
    depth, longitudinal, transverse = phase_acceptances(scenario, built.species, built.schedule.deceleration,
                                                        scenario.simulation.samples)
    worst = int(np.argmin(longitudinal))
    return float(depth[worst]), float(longitudinal[worst]), float(transverse[worst])


def summarise(scenario: Scenario, *, progress: bool = False) -> dict[str, Any]:
    """All numbers of a scenario as a JSON-ready dict (SI), with a ``units`` map; the
    ``trap_model`` and ``bound`` keys and the worst phase are described in the module notes."""
    return summarise_parts(scenario, progress=progress)[0]


def summarise_parts(scenario: Scenario, *, progress: bool = False
                    ) -> tuple[dict[str, Any], Built, CaptureEstimates, YieldBudget]:
    """:func:`summarise`'s dict with the physics objects, estimates and yield budget behind
    it, for callers that go on from them (the predicted detector traces) without computing
    them again."""
    built = build(scenario)
    sim = scenario.simulation
    schedule = built.schedule
    estimates = estimate(scenario, built, progress=progress)
    summary = _numbers(built, estimates, sim.samples)
    if model_of(scenario) == "row":
        (summary["depth_worst_phase"], summary["longitudinal_acceptance_worst_phase"],
         summary["transverse_acceptance_worst_phase"]) = worst_phase(scenario, built)
    if sim.detector_distance is not None and estimates.tracking is not None:
        times = estimates.arrival_times(schedule.final_velocity, sim.detector_distance)
        arrived = times[np.isfinite(times)]
        summary["arrival_time_mean"] = float(arrived.mean()) if arrived.size else None
        summary["arrival_time_rms"] = float(arrived.std()) if arrived.size else None
    budget = yield_budget(scenario, built, estimates)
    summary.update(budget.to_dict())
    table = timing(scenario, schedule)
    if table is not None:
        summary["coils"] = int(table.positions.size)
        summary["caution"] = ELECTRICAL_CAUTION
    summary["units"] = {key: UNITS[key] for key in summary if key in UNITS}
    return summary, built, estimates, budget


def _numbers(built: Built, estimates: CaptureEstimates, samples: int) -> dict[str, Any]:
    acceptance = estimates.acceptance
    schedule = built.schedule

    def finite(x: float) -> float | None:
        return float(x) if math.isfinite(x) else None

    return {
        "species": built.species.name,
        "trap_model": built.trap_model,
        "bound": bool(acceptance.longitudinal.bound),
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
