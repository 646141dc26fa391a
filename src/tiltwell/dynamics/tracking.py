"""Monte-Carlo trajectories of particles in the frame of a decelerating trap.

A particle of mass ``m`` feels ``F = -W'(|B|) grad|B| s(t) + m a(t) z_hat``: the trap force
(switched on by the ramp ``s``) and the fictitious force of the deceleration ``a``. It is
lost when it reaches the walls of the trap's box. :func:`track` integrates many particles
at once with a symplectic splitting method and returns who stays and when the others left.

Methods (``method=``): ``"verlet"``, velocity Verlet (kick-drift-kick, 2nd order), and
``"yoshida4"``, the symmetric composition of three Verlet steps of sizes ``w1 h, w0 h,
w1 h`` with ``w1 = 1 / (2 - 2^(1/3))``, ``w0 = -2^(1/3) w1`` (H. Yoshida, Phys. Lett. A
150, 262 (1990); E. Forest and R. D. Ruth, Physica D 43, 105 (1990); from memory), 4th
order. Time is advanced with the drifts, so a time-dependent force keeps the order. Both
come from the registry :data:`~tiltwell.dynamics.integrators.INTEGRATORS`, which
:func:`tiltwell.track_device` uses too; the inputs both trackers share are checked in
:mod:`tiltwell.dynamics.checks`.

Two routes, the same numbers. The compiled route (:mod:`tiltwell.dynamics.blocks` driving
the numba kernels of :mod:`tiltwell.dynamics.compiled`: blocks of 32 particles, many steps
per call, on ``numba.get_num_threads()`` threads from the main thread) runs an exact
:class:`~tiltwell.physics.fields.IdealQuadrupole` with a linear or Breit–Rabi Zeeman state,
and any :class:`FieldMap`; with ``spin_flips`` on, only where the check reads an ideal
quadrupole's field (the source, or a |B| table's ``near_zero``). Everything else runs the
numpy route below: another source through ``Trap.force``, another Zeeman model, the
spin-flip check on a field grid or on ``source.field``
(:func:`tiltwell.dynamics.blocks.route` tells which). The compiled kernels repeat the numpy
route's operations in its order without fastmath, so the trajectories agree bit for bit
(``tests/test_compiled_track.py``). The numpy route holds the particles as component rows
(6, n), steps them by whole-array operations and removes those that leave; its force
kernels are in :mod:`tiltwell.dynamics.kernels` (the quadrupole inline, a
:class:`FieldMap` for coil traps, else ``Trap.force``).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.validation import TiltwellError, as_integer, as_scalar
from ..wells.traps import Trap
from .blocks import BlockStepper, block_stepper
from .checks import check_flag, check_particles, fixed_steps, progress_bar
from .fieldmap import FieldMap
from .integrators import SplittingScheme, integrator
from .kernels import ForceKernel, force_kernel
from .results import TrackingResult, tracking_result
from .spinflip import SpinFlipCheck, SpinFlips

__all__ = ["FieldMap", "SpinFlips", "TrackingResult", "track"]

FloatArray = NDArray[np.float64]
Profile = Callable[[float], float]


# --- the driver ---------------------------------------------------------------------------


def track(
    trap: Trap,
    particles: ArrayLike,
    duration: float,
    time_step: float,
    *,
    deceleration: float | Profile = 0.0,
    method: str = "verlet",
    ramp: Profile | None = None,
    field_map: FieldMap | None = None,
    chunk: int = 100_000,
    record_every: int = 1,
    progress: bool = False,
    spin_flips: SpinFlips | bool | None = None,
) -> TrackingResult:
    """Track particles in the frame of a decelerating trap until they leave its box.

    Parameters
    ----------
    trap : Trap
        Source, species and box; a particle reaching the box's walls is lost.
    particles : array_like, shape (N, 6)
        Initial (x, y, z, vx, vy, vz) [m, m/s] in the trap frame, N >= 1. Particles
        that start on or outside the walls are lost at time 0.
    duration : float
        Time to track [s], > 0.
    time_step : float
        Largest step [s], in (0, duration]; the step used is ``duration / ceil(duration /
        time_step)`` (at most :data:`~tiltwell.dynamics.checks.MAX_STEPS` = 1e7 steps).
    deceleration : float or callable
        ``a`` [m/s^2] (> 0 slows the trap, which moves to +z), or ``a(t)`` of the time [s].
    method : {"verlet", "yoshida4"}
        Velocity Verlet (2nd order, one force evaluation per step) or Yoshida's 4th-order
        composition (three per step).
    ramp : callable, optional
        ``s(t)`` in [0, 1] multiplying the trap force (its switch-on); the fictitious force
        ``m a(t)`` is not scaled. ``"yoshida4"`` evaluates ``a`` and ``s`` at times up to
        0.36 steps outside each step (also before 0).
    field_map : FieldMap, optional
        Precomputed force of this trap (see :meth:`FieldMap.from_trap`), covering its box.
    chunk : int
        Particles integrated together, >= 1: bounds the memory (about 150 bytes each).
    record_every : int
        Steps between entries of ``times`` and ``survival``, >= 1 (the end is always one).
    progress : bool
        Show a tqdm progress bar over chunks x steps (on the compiled route it advances
        between compiled calls, each about 4e6 particle-steps).
    spin_flips : SpinFlips or bool, optional
        Off by default (None or False: the run is the same, bit for bit). True or a
        :class:`~tiltwell.dynamics.spinflip.SpinFlips` checks every step for a close pass
        by the field zero and multiplies each particle's survival weight by its
        Landau–Zener survival (:mod:`tiltwell.dynamics.spinflip`); the trajectories do not
        change, and the result's ``survival_weights``, ``spin_flip_loss`` and
        ``kept_after_flips`` report the loss channel.

    Returns
    -------
    TrackingResult

    Notes
    -----
    Each particle is integrated independently by element-wise operations, so with the
    built-in forces (ideal quadrupole, field map) the result does not depend on ``chunk``,
    on the route (compiled or numpy, see the module notes) or on the number of threads.
    Particles are tested against the box after whole steps only.

    Both methods assume a smooth force. At the zero of a quadrupole the force jumps (the
    potential is a cone), and a fixed step that crosses it changes the energy by up to about
    ``|F| v h`` (force, speed, step), with either sign: an orbit through the zero, e.g. on
    the axis, random-walks in energy, and ``"yoshida4"``, with its longer sub-steps, does
    worse there than ``"verlet"``. Keep ``|F| v h`` per crossing well below the depth
    (thousands of steps per oscillation period for axis orbits).

    Examples
    --------
    >>> import tiltwell
    >>> trap = tiltwell.Trap(tiltwell.IdealQuadrupole(20.0, 0.5), tiltwell.species("Rb-87"),
    ...                      ((-0.02, 0.02), (-0.02, 0.02), (-0.01, 0.01)))
    >>> start = [[0.0, 0.0, 1e-3, 0.0, 0.0, 0.0], [0.0, 0.0, 0.0, 0.0, 0.0, 20.0]]
    >>> result = track(trap, start, 0.01, 1e-5)
    >>> result.kept.tolist()
    [True, False]
    """
    if not isinstance(trap, Trap):
        raise TiltwellError(f"trap must be a Trap; got {type(trap).__name__}")
    state = check_particles(particles)
    total, steps, dt = fixed_steps(duration, time_step)
    scheme = integrator(method)
    if field_map is not None:
        if not isinstance(field_map, FieldMap):
            raise TiltwellError(f"field_map must be a FieldMap or None; got {type(field_map).__name__}")
        if not field_map.covers(trap.bounds):
            raise TiltwellError(f"field_map must cover the trap bounds {trap.bounds} m; it covers {field_map.bounds} m")
    size = as_integer(chunk, "chunk", 1)
    every = as_integer(record_every, "record_every", 1)
    shown = check_flag(progress, "progress")
    moments = scheme.force_times(steps, dt)
    tilts = _profile(deceleration, "deceleration", "m/s^2", moments, -math.inf, math.inf)
    scales = np.ones(moments.size) if ramp is None else _profile(ramp, "ramp", "1", moments, 0.0, 1.0, needs_callable=True)
    if isinstance(spin_flips, (bool, np.bool_)):
        spin_flips = SpinFlips() if spin_flips else None
    if spin_flips is not None and not isinstance(spin_flips, SpinFlips):
        raise TiltwellError(f"spin_flips must be a SpinFlips, True, False or None; got {spin_flips!r}")
    flips = None if spin_flips is None else spin_flips.check(trap, field_map, scales[:: scheme.evaluations], dt)
    weights = np.ones(state.shape[0]) if flips is not None else None

    count = state.shape[0]
    final = state.copy()
    lost_step = np.full(count, steps + 1, dtype=np.int64)
    lower, upper = (np.array([pair[k] for pair in trap.bounds])[:, None] for k in (0, 1))
    kernel = force_kernel(trap, field_map)
    stepper: _Stepper | BlockStepper | None = block_stepper(kernel, trap, scheme, dt, tilts, scales, flips)
    if stepper is None:
        stepper = _Stepper(kernel, scheme, dt, tilts, scales, lower, upper, steps, flips)
    with progress_bar(shown, math.ceil(count / size) * steps) as bar:
        for start in range(0, count, size):
            stop = min(start + size, count)
            stepper.run(state[start:stop], start, steps, final, lost_step, bar, weights)
    return tracking_result(final, lost_step, steps, dt, every, method, weights=weights)


class _Stepper:
    """Steps one chunk of particles with one scheme; holds the schedule and the box.

    The working rows are positions and ``u = v dt`` (3 + 3, n), so a unit drift is one
    addition. Adjacent kicks of consecutive steps are merged (the force at a step's end
    serves both), and the forces come pre-multiplied by their kick weight, so a kick is one
    addition too; velocities are re-synchronised (half the merged kick taken back) only for
    particles that leave and at the end.
    """

    def __init__(
        self, kernel: ForceKernel, scheme: SplittingScheme, dt: float, tilts: FloatArray, scales: FloatArray,
        lower: FloatArray, upper: FloatArray, steps: int, flips: SpinFlipCheck | None = None,
    ) -> None:
        weights = scheme.merged_kicks(steps, dt)
        self.kernel, self.drifts, self.dt = kernel, scheme.drifts, dt
        self.pulls, self.pushes = (weights * scales).tolist(), (weights * tilts).tolist()
        self.back = scheme.resync  # share of a merged kick that belongs to the next step
        self.lower, self.upper = lower, upper
        self.flips = flips  # the spin-flip check, or None (off)

    def inside(self, positions: FloatArray, flags: NDArray[np.bool_]) -> NDArray[np.bool_]:
        """Whether each particle is strictly inside the box; ``flags`` (2, 3, n) is scratch."""
        np.greater(positions, self.lower, out=flags[0])
        np.less(positions, self.upper, out=flags[1])
        flags[0] &= flags[1]
        return np.logical_and(np.logical_and(flags[0, 0], flags[0, 1], out=flags[1, 0]), flags[0, 2], out=flags[1, 0])

    def kick(self, rows: FloatArray, acceleration: FloatArray, scratch: FloatArray, moment: int) -> None:
        """Force at schedule entry ``moment`` into ``acceleration`` (as a change of u), then kick."""
        self.kernel(rows[:3], acceleration, scratch, self.pulls[moment])
        rows[3:] += acceleration
        rows[5] += self.pushes[moment]

    def synchronised(self, rows: FloatArray, acceleration: FloatArray, moment: int) -> FloatArray:
        """Phase-space points (n, 6) [m, m/s] at the end of the step ending at ``moment``."""
        state = rows.T.copy()
        state[:, 3:] -= self.back * acceleration.T
        state[:, 5] -= self.back * self.pushes[moment]
        state[:, 3:] /= self.dt
        return state

    def run(
        self, initial: FloatArray, start: int, steps: int, final: FloatArray, lost_step: NDArray[np.int64], bar: Any,
        weights: FloatArray | None = None,
    ) -> None:
        """Integrate ``initial`` (n, 6), particles ``start...`` of the whole set, writing
        ``final`` and ``lost_step`` for them; ``bar`` is a progress bar or None; with the
        spin-flip check on, ``weights`` (N,) gets their survival weights."""
        n = initial.shape[0]
        rows = np.ascontiguousarray(initial.T)
        rows[3:] *= self.dt
        index = np.arange(start, start + n)
        buffers = np.empty((5, n))
        flags = np.empty((2, 3, n), dtype=bool)
        alive = self.inside(rows[:3], flags).copy()
        lost_step[index[~alive]] = 0
        rows, index = np.compress(alive, rows, axis=1), index[alive]  # compress keeps rows contiguous
        living, riders = index.size, 0
        alive = np.ones(living, dtype=bool)
        acceleration = np.empty((3, living))
        self.kick(rows, acceleration, buffers[:2, :living], 0)
        flips = self.flips
        if flips is not None:
            field, weight = flips.start(rows[:3])
        drifts, moment = self.drifts, 0
        for step in range(steps):
            if living == 0:
                if bar is not None:
                    bar.update(steps - step)
                break
            width = rows.shape[1]
            scratch, change = buffers[:2, :width], buffers[2:, :width]
            for drift in drifts:
                if drift == 1.0:
                    rows[:3] += rows[3:]
                else:
                    np.multiply(rows[3:], drift, out=change)
                    rows[:3] += change
                moment += 1
                self.kick(rows, acceleration, scratch, moment)
            if flips is not None:
                field = flips.step(rows[:3], field, weight, step)
            inside = self.inside(rows[:3], flags[:, :, :width])
            if riders:
                inside &= alive
            if np.count_nonzero(inside) < living:
                leaving = np.flatnonzero(alive & ~inside)
                final[index[leaving]] = self.synchronised(rows[:, leaving], acceleration[:, leaving], moment)
                lost_step[index[leaving]] = step + 1
                if weights is not None:
                    weights[index[leaving]] = weight[leaving]
                alive[leaving] = False
                living -= leaving.size
                riders += leaving.size
                if riders > self.kernel.compact_fraction * width:
                    rows, acceleration = np.compress(alive, rows, axis=1), np.compress(alive, acceleration, axis=1)
                    if flips is not None:
                        field, weight = np.compress(alive, field, axis=1), weight[alive]
                    index, alive, riders = index[alive], alive[alive], 0
            if bar is not None:
                bar.update(1)
        final[index[alive]] = self.synchronised(rows[:, alive], acceleration[:, alive], moment)
        if weights is not None:
            weights[index[alive]] = weight[alive]


def _profile(
    value: Any, name: str, unit: str, times: FloatArray, low: float, high: float, needs_callable: bool = False
) -> FloatArray:
    """``value`` (a number, or a callable of the time [s]) at every one of ``times`` [s]."""
    if not callable(value):
        if needs_callable:
            raise TiltwellError(f"{name} must be a callable {name}(t) of the time [s] or None; got {value!r}")
        return np.full(times.size, as_scalar(value, name, unit, low=low, high=high))
    values = np.empty(times.size)
    for k, t in enumerate(times.tolist()):
        try:
            values[k] = float(value(t))
        except (TypeError, ValueError):
            raise TiltwellError(f"{name}(t) [{unit}] must return a real number; failed at t={t!r} s") from None
    bad = ~(np.isfinite(values) & (values >= low) & (values <= high))
    if np.any(bad):
        k = int(np.argmax(bad))
        raise TiltwellError(
            f"{name}(t) [{unit}] must be finite and in [{low:g}, {high:g}]; got {values[k]!r} at t={times[k]!r} s"
        )
    return values
