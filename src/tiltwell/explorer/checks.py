"""The explorer's heavy checks as plain computations on a :class:`~tiltwell.explorer.model.Picture`
(no widgets): the Monte-Carlo check, called as :func:`tiltwell.summarise` calls
:func:`tiltwell.capture_estimates`, the yield budget of its estimates, and the energetic
6-D acceptance; and what of their results the explorer shows. :mod:`tiltwell.explorer.app`
runs them in the background.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

from .model import VIEW_PARTICLES, Picture
from .._base.validation import TiltwellError
from ..dynamics.capture import CaptureEstimates, capture_estimates
from ..wells.acceptance import trap_acceptance
from ..workflows.assemble import build
from ..workflows.scenario import Scenario
from ..workflows.yields import YieldBudget, yield_budget

__all__ = ["budget_state", "monte_carlo", "monte_carlo_state", "slow_particles", "tracked_particles", "volume_6d"]


def monte_carlo(picture: Picture, scenario: Scenario) -> CaptureEstimates:
    """The three captured-fraction estimates at ``picture``'s setting, with the
    ``[simulation]`` settings of ``scenario`` (the whole scenario of that setting): its
    sample size, seed, integrator, time step, tracking switch, tolerance, switch-on
    time (capped at the deceleration's duration) and spin-flip check. Raises TiltwellError when the picture
    has no schedule."""
    schedule = picture.schedule
    if schedule is None:
        raise TiltwellError("the settings make no schedule: nothing to check")
    sim = scenario.simulation
    return capture_estimates(
        picture.trap, schedule.deceleration, picture.beam, schedule.duration, particles=sim.particles, seed=sim.seed,
        mismatch=picture.settings.mismatch, time_step=sim.time_step, method=sim.method, track_particles=sim.track,
        rtol=sim.rtol, switch_on_time=min(sim.switch_on_time, schedule.duration), spin_flips=sim.spin_flips)


def monte_carlo_state(estimates: CaptureEstimates) -> dict[str, float]:
    """The explorer's state entries (SI, keys of :data:`tiltwell.explorer.readouts.HEAVY`)
    of a Monte-Carlo check."""
    return {
        "acceptance_6d": estimates.acceptance.volume,
        "captured_fraction_energy": estimates.energetic,
        "captured_fraction_energy_error": estimates.energetic_error,
        "captured_fraction_mc": estimates.tracked,
        "captured_fraction_mc_error": estimates.tracked_error,
        "mc_particles": float(estimates.particles),
    }


def slow_particles(scenario: Scenario, estimates: CaptureEstimates) -> YieldBudget:
    """The yield budget of ``scenario`` (:func:`tiltwell.yield_budget`) with the check's
    ``estimates`` for the scenario's own state (the other states and the sampled input
    uncertainties computed here)."""
    return yield_budget(scenario, build(scenario), estimates)


def budget_state(budget: YieldBudget) -> dict[str, float]:
    """The explorer's state entries (SI; NaN for what the budget lacks) of a yield budget."""
    final = budget.final_cloud
    values = {"slow_particles": budget.slow_particles, "slow_particles_low": budget.low,
              "slow_particles_high": budget.high, "final_temperature": None if final is None else final.temperature,
              "final_density": None if final is None or budget.reaching_trap is None else final.density}
    return {key: math.nan if value is None else float(value) for key, value in values.items()}


def tracked_particles(estimates: CaptureEstimates,
                      limit: int = VIEW_PARTICLES) -> tuple[NDArray[np.float64], NDArray[np.bool_]] | None:
    """The first ``limit`` particles the check tracked, (n, 6) [m, m/s] in the trap frame
    at the start (:attr:`tiltwell.CaptureEstimates.sample`), and their kept flags after
    the trajectories; None when nothing was tracked."""
    if estimates.tracking is None or estimates.sample is None:
        return None
    return estimates.sample[:limit], estimates.tracking.kept[:limit]


def volume_6d(picture: Picture, samples: int, rtol: float) -> float:
    """The energetic 6-D acceptance [(m·m/s)^3] of ``picture``'s trap at its deceleration
    (:func:`tiltwell.trap_acceptance` with 6-D, ``samples`` per cut, relative tolerance
    ``rtol``)."""
    return trap_acceptance(picture.trap, picture.settings.deceleration, samples=samples, rtol=rtol).volume
