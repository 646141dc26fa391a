"""A scenario's three captured-fraction estimates (:func:`estimate`), and the Monte-Carlo
one through the time-dependent coil row itself (``[simulation] track_through = "row"``),
in place of its rigid twin.

:func:`track_through_row` takes the overlap and energetic estimates made in the twin and
tracks the same sample with :func:`tiltwell.track_device` in the lab frame through the
currents the row's waveform table plans (every ``[coils] plan_step``, interpolated
linearly between, as :func:`tiltwell.workflows.coilreport.device_check` does), lost at
the walls of the one trap box (:func:`tiltwell.workflows.devicemodel.trap_box`). SI units.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from .._base.validation import TiltwellError
from ..dynamics.capture import CaptureEstimates, capture_estimates, checked_step, default_time_step
from ..dynamics.device import track_device
from .assemble import Built, build
from .coilrun import coil_run
from .devicemodel import model_of, trap_box
from .scenario import Scenario

__all__ = ["estimate", "track_through_row"]


def track_through_row(scenario: Scenario, built: Built, estimates: CaptureEstimates, *,
                      progress: bool = False) -> CaptureEstimates:
    """``estimates`` (made without trajectories) with ``tracked``, ``tracked_error`` and
    ``tracking`` from the sample tracked through the coil row.

    The sample (trap frame at switch-on) starts at z + z_trap(0), vz + v_trap(0); the step
    is ``[simulation] time_step``, else the twin's default
    (:func:`tiltwell.dynamics.capture.default_time_step`). ``final`` comes back in the trap
    frame, as from the twin. Without a bound well nothing is tracked and 0 is kept. The row
    is on at full current from t = 0 (``[simulation] switch_on_time`` acts on the twin only).
    """
    sample = estimates.sample
    assert sample is not None  # capture_estimates records its sample
    if not estimates.acceptance.longitudinal.bound:
        return replace(estimates, tracked=0.0, tracked_error=0.0)
    schedule = built.schedule
    run = coil_run(scenario, schedule)
    step = scenario.simulation.time_step
    if step is None:
        step = default_time_step(estimates.acceptance, built.species.mass)
    else:
        try:
            checked_step(step, estimates.acceptance, built.species.mass)
        except TiltwellError as error:
            raise TiltwellError(f"[simulation] {error}") from None
    start = np.array([0.0, 0.0, float(schedule.position(0.0)), 0.0, 0.0, float(schedule.velocity(0.0))])
    result = track_device(run.array, run.times, built.species, sample + start, schedule=schedule,
                          gradient=run.gradient, time_step=min(step, schedule.duration), duration=schedule.duration,
                          box_half_widths=trap_box(scenario), method=scenario.simulation.method, progress=progress)
    return replace(estimates, tracked=result.fraction, tracked_error=result.binomial_error, tracking=result)


def estimate(scenario: Scenario, built: Built | None = None, *, progress: bool = False) -> CaptureEstimates:
    """The three captured-fraction estimates of a scenario (its [simulation] settings
    passed to :func:`tiltwell.dynamics.capture.capture_estimates`); ``built`` reuses a :func:`build`.

    With ``[simulation] track_through = "row"`` (and the coil row as the trap) the
    trajectories go through the time-dependent row instead of its twin
    (:func:`tiltwell.workflows.rowtrack.track_through_row`; no switch-on ramp there)."""
    built = build(scenario) if built is None else built
    sim, schedule = scenario.simulation, built.schedule
    through_row = sim.track and sim.track_through == "row" and model_of(scenario) == "row"
    if sim.track and sim.switch_on_time > schedule.duration:
        raise TiltwellError(f"[simulation] switch_on_time [s] must be at most the run, {schedule.duration:.4g} s from "
                            f"switch-on to the end of the deceleration; got {sim.switch_on_time:g}")
    try:
        estimates = capture_estimates(
            built.trap, schedule.deceleration, built.beam, schedule.duration,
            particles=sim.particles, seed=sim.seed, mismatch=built.mismatch, time_step=sim.time_step,
            method=sim.method, track_particles=sim.track and not through_row, rtol=sim.rtol, samples=sim.samples,
            switch_on_time=min(sim.switch_on_time, schedule.duration), progress=progress,
            spin_flips=sim.spin_flips and not through_row,
        )
    except TiltwellError as error:  # name the scenario's key where the refused argument is one
        if error.argument not in ("time_step", "particles"):
            raise
        raise TiltwellError(f"[simulation] {error.argument}: {error} (the run is {schedule.duration:.4g} s)",
                            argument=error.argument) from None
    return track_through_row(scenario, built, estimates, progress=progress) if through_row else estimates
