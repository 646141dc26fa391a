"""Three estimates of the captured fraction, side by side.

- ``overlap``: the product of the longitudinal and two transverse Gaussian overlaps with
  the 1-D separatrices (:func:`tiltwell.wells.overlap.plane_product_fraction`). Quick, smooth in
  every parameter, blind to coupling between the planes.
- ``energetic``: sampled particles whose energy in the tilted trap is below the 6-D escape
  energy, in the well's connected region (:func:`tiltwell.wells.overlap.energetic_fraction`).
  For a static potential, energy conservation keeps every such particle: a lower bound.
- ``tracked``: the same sample integrated through the decelerating trap for the whole
  deceleration (:func:`tiltwell.dynamics.tracking.track`). It includes everything the model has:
  particles above the escape energy that stay for the duration because their way out is
  slow to find, and whatever the time dependence (a deceleration profile, a switch-on
  ramp) adds. For a static trap it is never below ``energetic`` beyond the binomial noise
  and the integrator's energy error.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from .._base.display import html_table
from .._base.validation import TiltwellError, as_boolean, as_integer, as_scalar
from ..wells.acceptance import TrapAcceptance, trap_acceptance
from ..physics.beam import Beam
from ..physics.fields import IdealQuadrupole
from ..wells.overlap import energetic_fraction, plane_product_fraction
from ..coils.schedule import arrival_times
from .spinflip import SpinFlips
from .tracking import FieldMap, TrackingResult, track
from ..wells.traps import Trap

__all__ = ["CaptureEstimates", "capture_estimates", "default_time_step"]

#: Integration steps per characteristic crossing time of the well (see default_time_step).
STEPS_PER_CROSSING = 100


@dataclass(frozen=True, eq=False)
class CaptureEstimates:
    """The captured fraction three ways, with the acceptance and tracking behind them.

    Attributes
    ----------
    overlap : float
        Product of the plane overlaps, in [0, 1].
    energetic, energetic_error : float
        Energetic 6-D fraction and its binomial standard error.
    tracked, tracked_error : float
        Fraction kept by trajectory integration, and its binomial standard error; NaN when
        tracking was skipped.
    particles : int
        Sample size of the two Monte-Carlo estimates.
    acceptance : TrapAcceptance
        Longitudinal, transverse and 6-D acceptance at this deceleration.
    tracking : TrackingResult or None
        Survival against time, final phase space and per-particle kept flags.
    sample : ndarray, shape (N, 6), or None
        The Monte-Carlo sample both estimates counted, at the start: (x, y, z, vx, vy, vz)
        [m, m/s] relative to the trap centre moving at the trap's initial velocity (the
        beam's drawn particles, their vz shifted by ``-mismatch``); row i is the particle
        whose fate ``tracking.kept[i]`` records. Read-only. :func:`capture_estimates`
        always fills it; None only for results built without one.
    """

    overlap: float
    energetic: float
    energetic_error: float
    tracked: float
    tracked_error: float
    particles: int
    acceptance: TrapAcceptance
    tracking: TrackingResult | None
    sample: NDArray[np.float64] | None = field(default=None, repr=False)

    def arrival_times(self, release_velocity: float, distance: float) -> NDArray[np.float64]:
        """Arrival times [s] of the kept particles at a detector ``distance`` [m] beyond
        the trap centre after release at ``release_velocity`` [m/s] (free flight from the
        tracked final phase space, :func:`tiltwell.coils.schedule.arrival_times`)."""
        if self.tracking is None:
            raise TiltwellError("no trajectories were tracked: nothing to release (track_particles=True)")
        return arrival_times(self.tracking.final[self.tracking.kept], release_velocity, distance)

    def _repr_html_(self) -> str:
        rows = [
            ("phase-space overlap", f"{self.overlap:.4g}"),
            ("energetic 6-D", f"{self.energetic:.4g} ± {self.energetic_error:.2g}"),
            ("trajectories", f"{self.tracked:.4g} ± {self.tracked_error:.2g}"),
            ("particles", f"{self.particles}"),
        ]
        return html_table("Captured fraction", rows)


def default_time_step(acceptance: TrapAcceptance, mass: float) -> float:
    """A time step [s]: the crossing time of the longitudinal well, (z_front - z_back) /
    sqrt(2 depth / m), divided by ``STEPS_PER_CROSSING``."""
    well = acceptance.longitudinal
    if not well.bound:
        raise TiltwellError("no bound well at this deceleration: nothing to track (give time_step [s] explicitly)")
    speed = math.sqrt(2.0 * well.depth / mass)
    return (well.z_front - well.z_back) / speed / STEPS_PER_CROSSING


#: The largest time step allowed, as a share of the well's crossing time: ten steps per
#: crossing at least (the default takes STEPS_PER_CROSSING). Coarser steps lose particles to
#: the integrator, not to the trap (measured on the demo: kept 0.174 at the default step,
#: 0.046 at a fifth of a crossing, 0 at two crossings).
MAX_STEP_SHARE = 0.1


def checked_step(time_step: float, acceptance: TrapAcceptance, mass: float) -> float:
    """``time_step`` [s] if it is at most :data:`MAX_STEP_SHARE` of the longitudinal well's
    crossing time, else a TiltwellError naming the largest allowed step."""
    well = acceptance.longitudinal
    if not well.bound:
        return time_step
    largest = default_time_step(acceptance, mass) * STEPS_PER_CROSSING * MAX_STEP_SHARE
    if time_step > largest:
        raise TiltwellError(f"time_step [s] must be in (0, {largest:.3g}] here: at most {MAX_STEP_SHARE:g} of the "
                            f"well's crossing time ({largest / MAX_STEP_SHARE:.3g} s), or the integrator, not the "
                            f"trap, loses particles; got {time_step:g}", argument="time_step")
    return time_step


def capture_estimates(
    trap: Trap,
    deceleration: float,
    beam: Beam,
    duration: float,
    *,
    particles: int = 10_000,
    seed: int = 0,
    mismatch: float = 0.0,
    time_step: float | None = None,
    method: str = "verlet",
    track_particles: bool = True,
    rtol: float = 1e-2,
    samples: int = 2001,
    switch_on_time: float = 0.0,
    progress: bool = False,
    spin_flips: SpinFlips | bool | None = None,
) -> CaptureEstimates:
    """Captured fraction of ``beam`` in ``trap`` decelerating at ``deceleration`` [m/s^2]
    for ``duration`` [s], three ways (see the module notes for how they differ).

    Parameters
    ----------
    particles : int
        Monte-Carlo sample size (>= 1), drawn with ``seed``.
    mismatch : float
        Trap velocity minus the beam's mean velocity [m/s].
    time_step : float, optional
        Integrator step [s]; by default :func:`default_time_step`.
    method : str
        Integrator name, see :func:`tiltwell.dynamics.tracking.track`.
    track_particles : bool
        False skips the trajectories (``tracked`` is NaN).
    samples : int
        Samples of each 1-D cut (axis, radial) of the acceptance.
    switch_on_time : float
        The trap depth ramps up linearly over this time [s] (0: on at once). Only the
        trajectories see it; the overlap and energetic estimates assume a trap that is
        fully on.
    spin_flips : SpinFlips or bool, optional
        Passed to :func:`~tiltwell.dynamics.tracking.track` (off by default): the loss
        channel is in ``tracking`` (``spin_flip_loss``, ``kept_after_flips``); ``tracked``
        counts the walls only.
    """
    a = as_scalar(deceleration, "deceleration", "m/s^2")
    duration = as_scalar(duration, "duration", "s", low=0.0, low_open=True)
    mismatch = as_scalar(mismatch, "mismatch", "m/s")
    switch_on_time = as_scalar(switch_on_time, "switch_on_time", "s", low=0.0, high=duration)
    particles = as_integer(particles, "particles", 1)
    if not isinstance(beam, Beam):
        raise TiltwellError(f"beam must be a tiltwell.Beam; got {type(beam).__name__}")
    track_particles = as_boolean(track_particles, "track_particles")
    if time_step is not None:
        time_step = as_scalar(time_step, "time_step", "s", low=0.0, low_open=True)
    acceptance = trap_acceptance(trap, a, samples=samples, rtol=rtol)
    overlap = plane_product_fraction(acceptance.longitudinal, acceptance.transverse, beam, mismatch)
    sample = beam.sample(int(particles), seed=seed)
    sample[:, 5] -= mismatch
    sample.flags.writeable = False  # the result's record of what was counted and tracked
    if acceptance.energetic is None:
        return CaptureEstimates(overlap, 0.0, 0.0, 0.0 if track_particles else math.nan, 0.0, int(particles),
                                acceptance, None, sample)
    energetic, energetic_error = energetic_fraction(trap, acceptance.energetic, a, sample)
    if not track_particles:
        return CaptureEstimates(overlap, energetic, energetic_error, math.nan, math.nan, int(particles), acceptance,
                                None, sample)
    step = default_time_step(acceptance, trap.mass) if time_step is None else checked_step(time_step, acceptance,
                                                                                           trap.mass)
    step = min(step, duration)
    # Coil fields are costly to differentiate at every step: interpolate a precomputed map.
    field_map = None if isinstance(trap.source, IdealQuadrupole) else FieldMap.from_trap(trap)
    ramp = None if switch_on_time == 0.0 else (lambda t: min(max(t / switch_on_time, 0.0), 1.0))
    result = track(trap, sample, duration, step, deceleration=a, method=method, field_map=field_map,
                   ramp=ramp, progress=progress, spin_flips=spin_flips)
    return CaptureEstimates(
        overlap, energetic, energetic_error, result.fraction, result.binomial_error, int(particles), acceptance, result,
        sample,
    )
