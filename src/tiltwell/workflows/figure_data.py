"""The numbers behind a scenario's figures, computed once, drawn elsewhere.

A workflow: :func:`scenario_figure_data` runs a scenario as
:func:`tiltwell.workflows.report.summarise` does (:func:`~tiltwell.workflows.report.build`,
:func:`~tiltwell.workflows.report.estimate`) and adds what the figures show beyond the
summary: the acceptance against deceleration, a trade-off sweep, the coil row and its
phase scan, the arrival times at the detector. It returns them in one frozen
:class:`ScenarioFigureData`; :mod:`tiltwell.figures` draws that object and computes
nothing. :func:`coil_figure_data` picks the stretch of a coil run that the coil-current
figure shows.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .._base.validation import TiltwellError, read_only_copy
from ..coils.array import CurrentPlan
from ..coils.moving import PhaseScan
from ..dynamics.tracking import TrackingResult
from ..physics.beam import Beam
from ..wells.acceptance import AcceptanceCurve, TrapAcceptance, acceptance_curve
from ..wells.traps import Trap
from .coilreport import CoilRun, coil_run, coil_scan
from .report import build, estimate
from .yields import YieldBudget, yield_budget
from .scenario import Scenario
from .sweep import sweep

__all__ = ["ACCEPTANCE_POINTS", "ACCEPTANCE_SPAN", "CURRENT_PITCHES", "DRAWN_PARTICLES", "SWEEP_FRACTIONS",
           "SWEEP_PARTICLES", "CoilFigureData", "ScenarioFigureData", "coil_figure_data", "scenario_figure_data"]

FloatArray = NDArray[np.float64]

#: Particles drawn in a scenario's phase planes (the first ones of the random sample).
DRAWN_PARTICLES = 3000
#: Trade-off sweep of a scenario's figures, in units of the critical deceleration.
SWEEP_FRACTIONS = (0.2, 0.35, 0.5, 0.65, 0.8, 0.95)
#: Particles tracked at each point of that sweep (at most; the scenario's own count if
#: fewer), so the trade-off figure shows the trajectories' estimate beside the other two at
#: a few seconds' cost (binomial error about 0.005 at a fraction of 0.2).
SWEEP_PARTICLES = 5000
#: The acceptance curve spans 0 to this multiple of the critical deceleration ...
ACCEPTANCE_SPAN = 1.1
#: ... at this many equally spaced decelerations.
ACCEPTANCE_POINTS = 45
#: The coil-current figure shows the coils that carry current while the trap crosses its
#: first this many pitches, where it is fastest (and the pulses are shortest).
CURRENT_PITCHES = 3.0


@dataclass(frozen=True, eq=False)
class CoilFigureData:
    """The coil row as the coil figures show it.

    Attributes
    ----------
    plan : CurrentPlan
        Currents per turn [A] of the first rows of the run's table (shape (M, count)): at
        least two, and all those while the trap is within :data:`CURRENT_PITCHES` pitches
        of its start.
    times : ndarray, shape (M,)
        Time [s] of each row of ``plan``.
    scan : PhaseScan
        Depth and acceptances across one pitch (:func:`tiltwell.workflows.coilreport.coil_scan`).
    positions : ndarray, shape (count,)
        z_k [m] of every coil of the row, column k of ``plan.currents``
        (:func:`tiltwell.workflows.coilreport.coil_positions`).
    duration : float
        The whole run [s] (the last time of the run's table), which the figure names beside
        the stretch it shows.
    """

    plan: CurrentPlan
    times: FloatArray
    scan: PhaseScan
    positions: FloatArray
    duration: float = float("nan")


def coil_figure_data(run: CoilRun, scan: PhaseScan) -> CoilFigureData:
    """The stretch of a :func:`~tiltwell.workflows.coilreport.coil_run` drawn as coil
    currents (see :class:`CoilFigureData`), with its ``scan``."""
    if not isinstance(run, CoilRun):
        raise TiltwellError(f"run must be a CoilRun (tiltwell.workflows.coilreport.coil_run); got {type(run).__name__}")
    if not isinstance(scan, PhaseScan):
        raise TiltwellError(f"scan must be a PhaseScan (tiltwell.workflows.coilreport.coil_scan); "
                            f"got {type(scan).__name__}")
    plan = run.plan
    rows = slice(0, max(int(np.count_nonzero(plan.positions <= CURRENT_PITCHES * run.array.pitch)), 2))
    early = CurrentPlan(plan.positions[rows], plan.currents[rows], plan.gradient[rows], plan.limited[rows])
    return CoilFigureData(early, read_only_copy(run.times[rows]), scan, read_only_copy(run.array.positions),
                          float(run.times[-1]))


@dataclass(frozen=True, eq=False)
class ScenarioFigureData:
    """What a scenario's figures draw (SI units; arrays read-only).

    Attributes
    ----------
    trap : Trap
    trap_model : str
        Which trap ``trap`` is, in words (the summary's ``trap_model``).
    deceleration : float
        The schedule's deceleration [m/s^2].
    acceptance : TrapAcceptance
        Longitudinal and transverse separatrices at ``deceleration``.
    beam : Beam
        The beam at switch-on: its ``longitudinal`` and ``horizontal`` phase planes.
    mismatch : float
        Beam velocity minus trap velocity at switch-on [m/s].
    sample : ndarray, shape (N, 6)
        The first (at most :data:`DRAWN_PARTICLES`) particles of the estimates' random
        sample (x, y, z, vx, vy, vz) [m, m/s], relative to the trap: ``vz`` has the
        mismatch taken off.
    kept : ndarray of bool, shape (N,), or None
        Whether tracking kept each of them; None when the scenario does not track.
    curve : AcceptanceCurve or None
        Acceptances from 0 to :data:`ACCEPTANCE_SPAN` x the critical deceleration; None
        when the trap has no well even at rest.
    sweep_rows : tuple of dict, or None
        :func:`tiltwell.workflows.sweep.sweep` rows at :data:`SWEEP_FRACTIONS` of the
        critical deceleration, with trajectories of at most :data:`SWEEP_PARTICLES` particles
        a point where the scenario tracks; None with ``curve``.
    coils : CoilFigureData or None
        With a ``[coils]`` section.
    tracking : TrackingResult or None
        The trajectories, when the scenario tracks.
    arrivals : ndarray, shape (K,), or None
        Arrival times [s] of the kept particles at ``[simulation] detector_distance``
        (:meth:`tiltwell.dynamics.capture.CaptureEstimates.arrival_times`); None without
        tracking or a detector.
    budget : YieldBudget or None
        :func:`tiltwell.workflows.yields.yield_budget` of the same estimates; None without
        ``[beam] pressure`` (no absolute numbers).
    """

    trap: Trap
    trap_model: str
    deceleration: float
    acceptance: TrapAcceptance
    beam: Beam
    mismatch: float
    sample: FloatArray
    kept: NDArray[np.bool_] | None
    curve: AcceptanceCurve | None
    sweep_rows: tuple[dict[str, Any], ...] | None
    coils: CoilFigureData | None
    tracking: TrackingResult | None
    arrivals: FloatArray | None
    budget: YieldBudget | None = None


def scenario_figure_data(scenario: Scenario, *, particles: int | None = None) -> ScenarioFigureData:
    """Compute everything a scenario's figures show (see :class:`ScenarioFigureData`).

    ``particles`` replaces the scenario's ``[simulation] particles``. The acceptance and
    tracking are those of :func:`tiltwell.workflows.report.estimate`; the sample is the first
    :data:`DRAWN_PARTICLES` of the one it counted and tracked (``CaptureEstimates.sample``),
    so ``kept`` belongs to exactly those particles; the trade-off rows come from
    :func:`tiltwell.workflows.sweep.sweep`, the curve from
    :func:`tiltwell.wells.acceptance.acceptance_curve` at ``[simulation] samples``.
    """
    if not isinstance(scenario, Scenario):
        raise TiltwellError(f"scenario must be a Scenario (tiltwell.workflows.scenario.load); "
                            f"got {type(scenario).__name__}")
    if particles is not None:
        scenario = scenario.replace("simulation", particles=particles)
    built = build(scenario)
    sim, plan = scenario.simulation, built.schedule
    a = plan.deceleration
    estimates = estimate(scenario, built)
    tracking = estimates.tracking
    assert estimates.sample is not None  # capture_estimates always records its sample
    sample = estimates.sample[:DRAWN_PARTICLES]  # the particles counted and tracked, trap frame
    kept = None if tracking is None else read_only_copy(tracking.kept[:DRAWN_PARTICLES])
    critical = built.trap.critical_deceleration(sim.samples)
    curve, rows = None, None
    if critical > 0.0:
        curve = acceptance_curve(built.trap, np.linspace(0.0, ACCEPTANCE_SPAN * critical, ACCEPTANCE_POINTS),
                                 samples=sim.samples)
        swept = scenario.replace("simulation", particles=min(sim.particles, SWEEP_PARTICLES)) if sim.track else scenario
        rows = tuple(sweep(swept, np.array(SWEEP_FRACTIONS) * critical))
    coils = None
    if scenario.coils is not None:
        run = coil_run(scenario, plan)
        coils = coil_figure_data(run, coil_scan(scenario, run))
    arrivals = None
    if tracking is not None and sim.detector_distance is not None:
        arrivals = read_only_copy(estimates.arrival_times(plan.final_velocity, sim.detector_distance))
    budget = yield_budget(scenario, built, estimates) if scenario.beam.pressure is not None else None
    return ScenarioFigureData(trap=built.trap, trap_model=built.trap_model, deceleration=a,
                              acceptance=estimates.acceptance, beam=built.beam, mismatch=built.mismatch,
                              sample=sample, kept=kept, curve=curve, sweep_rows=rows, coils=coils,
                              tracking=tracking, arrivals=arrivals, budget=budget)
