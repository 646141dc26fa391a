"""Particles tracked in the lab frame through the time-dependent field of a coil array.

The currents of a :class:`~tiltwell.coils.array.CoilArray` move a field zero along a schedule
(:func:`~tiltwell.coils.array.trap_currents`). Here the field itself is followed, coil by coil,
instead of a rigid trap: the hand-over from coil to coil (the ripple of
:func:`~tiltwell.coils.moving.moving_trap_phases`) acts on the particles as it happens.

- :class:`UniformMotion`: a trap moving at constant speed (a :class:`Schedule` must slow down);
- :func:`check_device_run`: the checks of a device run's inputs, shared with
  :func:`tiltwell.compare_device`;
- :func:`track_device`: trajectories in the lab frame, by a splitting scheme of the
  integrator registry (:data:`~tiltwell.dynamics.integrators.INTEGRATORS`, velocity Verlet
  by default), lost at the walls of a box that moves with the trap; returns a
  :class:`~tiltwell.dynamics.results.TrackingResult` (``final`` in the trap frame:
  z - z_trap, vz - v_trap). At each force evaluation the tables of the coils carrying
  current (:class:`~tiltwell.dynamics.coilmap.CoilFieldMap`) are summed once over a window
  around the trap (:class:`~tiltwell.dynamics.coilmap.SummedCoilField`), so a particle
  costs one bilinear look-up whatever the number of coils.

A run is four steps: the input checks, the current planning (:class:`_Currents`: the
active coils and their currents at every force evaluation), the map building and the
stepping (:func:`_step_lab_frame`). The stepping has two routes, the same numbers: for a
linear Zeeman state the compiled kernels of :mod:`tiltwell.dynamics.devicekernel` (many
steps per call, particles in blocks, the summed tables in L2; the operations of the numpy
route in its order, so bit for bit the same trajectories, ``tests/test_compiled_device.py``),
otherwise, or with ``devicekernel.ENABLED`` False (the tests' reference), the numpy route
below (whole-array passes over blocks of :data:`_BLOCK` particles).

SI units throughout (m, s, T, A, J).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.validation import TiltwellError, as_finite_array, as_integer, as_scalar
from ..coils.array import CoilArray, check_coil_array, check_on_row, local_currents
from ..coils.schedule import Schedule
from ..physics.species import Species
from . import devicekernel
from .checks import check_flag, check_particles, fixed_steps, progress_bar
from .coilmap import CoilFieldMap, SummedCoilField
from .integrators import SplittingScheme, integrator
from .results import TrackingResult, tracking_result

__all__ = ["CoilFieldMap", "UniformMotion", "check_device_run", "track_device"]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

#: Particles pushed together through one step (their arrays stay in the processor's cache).
_BLOCK = 8192
#: Trap positions whose currents are solved together (bounds the solve's temporaries,
#: about 100 bytes x active x filaments per position; the results do not depend on it).
_PLAN_BLOCK = 65_536


@dataclass(frozen=True)
class UniformMotion:
    """A trap centre moving at constant ``speed`` [m/s] (> 0) from z = 0 at t = 0.

    Offers the ``position(t)`` and ``velocity(t)`` of :class:`~tiltwell.coils.schedule.Schedule`,
    which always decelerates.
    """

    speed: float

    def __post_init__(self) -> None:
        object.__setattr__(self, "speed", as_scalar(self.speed, "speed", "m/s", low=0.0, low_open=True))

    def position(self, t: ArrayLike) -> FloatArray:
        """Trap-centre position v t [m] at times ``t`` [s] (any shape)."""
        return self.speed * as_finite_array(t, "t", "s")

    def velocity(self, t: ArrayLike) -> FloatArray:
        """Trap speed [m/s] at times ``t`` [s] (any shape)."""
        return np.full(np.shape(as_finite_array(t, "t", "s")), self.speed)


def check_device_run(array: CoilArray, species: Species, schedule: Schedule | UniformMotion, particles: ArrayLike,
                     box_half_widths: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """Check the inputs of a device run (also for :func:`tiltwell.compare_device`, before its costly rigid twin).

    Parameters
    ----------
    array : CoilArray
    species : Species
    schedule : Schedule or UniformMotion
    particles : array_like, shape (N, 6)
        (x, y, z, vx, vy, vz) [m, m/s], N >= 1, finite.
    box_half_widths : array_like, shape (3,)
        (hx, hy, hz) [m], each > 0, with hypot(hx, hy) below the bore (radius - width / 2).

    Returns
    -------
    particles : ndarray, shape (N, 6)
        [m, m/s], float64.
    box_half_widths : ndarray, shape (3,)
        [m], float64.
    """
    check_coil_array(array)
    if not isinstance(species, Species):
        raise TiltwellError(f"species must be a Species; got {type(species).__name__}")
    if not isinstance(schedule, (Schedule, UniformMotion)):
        raise TiltwellError(f"schedule must be a Schedule or UniformMotion; got {type(schedule).__name__}")
    state = check_particles(particles)
    halves = as_finite_array(box_half_widths, "box_half_widths", "m", ndim=1)
    bore = array.radius - 0.5 * array.width
    if halves.shape != (3,) or np.any(halves <= 0.0) or math.hypot(halves[0], halves[1]) >= bore:
        raise TiltwellError(
            f"box_half_widths [m] must be three values > 0 with hypot(hx, hy) < {bore:g} m (the bore); "
            f"got {halves.tolist()!r}"
        )
    return state, halves


def track_device(
    array: CoilArray,
    plan_times: ArrayLike | None,
    species: Species,
    particles: ArrayLike,
    *,
    schedule: Schedule | UniformMotion,
    gradient: float,
    time_step: float,
    duration: float,
    box_half_widths: tuple[float, float, float],
    method: str = "verlet",
    field_map: CoilFieldMap | None = None,
    record_every: int = 1,
    progress: bool = False,
) -> TrackingResult:
    """Track particles in the lab frame through the coil array's moving field.

    Parameters
    ----------
    array : CoilArray
    plan_times : array_like, shape (M,), or None
        Times [s] (increasing, from 0 to at least ``duration``) at which the currents are
        planned, as a waveform generator would be programmed; between them each coil's
        current is interpolated linearly. ``None``: exact currents at every step.
    species : Species
    particles : array_like, shape (N, 6)
        (x, y, z, vx, vy, vz) [m, m/s] in the lab frame at t = 0, N >= 1.
    schedule : Schedule or UniformMotion
        The trap position z_trap(t) [m] and speed [m/s]; z_trap must stay on the coil row.
    gradient : float
        Wanted axial gradient at the zero [T/m], > 0 (see :func:`trap_currents`).
    time_step : float
        Largest step [s], in (0, duration]; used: duration / ceil(duration / time_step).
    duration : float
        Tracking time [s], > 0.
    box_half_widths : (float, float, float)
        (hx, hy, hz) [m] of the box centred on (0, 0, z_trap(t)); hypot(hx, hy) must be
        below the bore (radius - width / 2). Reaching its walls loses a particle.
    method : {"verlet", "yoshida4"}, default "verlet"
        The splitting scheme, as for :func:`tiltwell.track`: velocity Verlet (2nd order,
        one force evaluation per step) or Yoshida's 4th-order composition (three per step).
    field_map : CoilFieldMap, optional
        Default: rho_max = hypot(hx, hy), z_span = hz + (active / 2 + 1) pitch, shape (65, 401).
    record_every : int, default 1
        Steps between entries of ``times`` and ``survival``, >= 1 (the end is always one).
    progress : bool, default False
        Show a progress bar (tqdm) over the steps.

    Returns
    -------
    TrackingResult
        As from :func:`tiltwell.track`, with ``final`` in the trap frame
        (x, y, z - z_trap, vx, vy, vz - v_trap) and ``lost_time`` 0 for particles that
        start outside the moving box.

    Notes
    -----
    The splitting scheme of ``method`` (kick-drift-kick for Verlet) with the force
    -W'(|B|) grad|B| of the coils that carry current at the time of each force evaluation.
    There, the tables of those coils (the ``active`` ones; the union of two neighbouring
    plans' coils while a planned waveform hands over), weighted by their currents, are
    summed over a window of the map's nodes that covers the box, so each particle needs
    one bilinear look-up of the summed field, whatever the number of coils (all coil planes
    lie on nodes, so the sum is exact to the tables). Particles are tested against the box
    after whole steps. ``"yoshida4"`` evaluates the field at times up to 0.36 steps outside
    each step: before t = 0 the trap is taken to move on at its initial speed, and planned
    currents are extrapolated linearly beyond ``plan_times``. The same caution about the
    cone at the zero as in :func:`tiltwell.track` applies.
    """
    state, halves = check_device_run(array, species, schedule, particles, box_half_widths)
    total, steps, dt = fixed_steps(duration, time_step)
    target = as_scalar(gradient, "gradient", "T/m", low=0.0, low_open=True)
    scheme = integrator(method)
    every = as_integer(record_every, "record_every", 1)
    shown = check_flag(progress, "progress")
    moments = scheme.force_times(steps, dt)
    trap_z = _trap_positions(schedule, moments)
    ends = slice(None, None, scheme.evaluations)  # the moments that end a step
    check_on_row(array, trap_z[ends], "schedule.position(t)")
    currents = _Currents(array, schedule, plan_times, total, target, moments, trap_z)
    table = _device_map(array, halves, field_map)
    field = SummedCoilField(table, array.first, halves[2] + table.z_step, species)
    motion = (trap_z, trap_z[ends], np.asarray(schedule.velocity(moments[ends]), dtype=np.float64))
    with progress_bar(shown, steps) as bar:
        final, lost_step = _step_lab_frame(field, scheme, currents, motion, state, halves, dt, bar)
    return tracking_result(final, lost_step, steps, dt, every, f"{method} (lab frame, coil array)")


def _trap_positions(schedule: Schedule | UniformMotion, times: FloatArray) -> FloatArray:
    """Trap-centre positions [m] at ``times`` [s], shape (K,); before t = 0 (the first
    force evaluation of ``"yoshida4"``) the trap moves on at its initial speed."""
    positions = np.asarray(schedule.position(np.maximum(times, 0.0)), dtype=np.float64)
    early = times < 0.0
    if np.any(early):
        positions[early] += float(schedule.velocity(0.0)) * times[early]
    return positions


class _Currents:
    """The current planning: the coils carrying current and their currents [A] at every
    force evaluation ``m`` (times ``moments`` [s], trap positions ``trap_z`` [m]).

    ``plan_times`` None: the exact currents of :func:`~tiltwell.coils.array.trap_currents`
    at each trap position. Otherwise the currents planned at ``plan_times`` (checked here),
    interpolated linearly in time between neighbouring plans (the union of their coils).
    """

    def __init__(self, array: CoilArray, schedule: Schedule | UniformMotion, plan_times: ArrayLike | None,
                 total: float, target: float, moments: FloatArray, trap_z: FloatArray) -> None:
        if plan_times is None:
            self.coils, self.local = _solve_currents(array, trap_z, target)  # (K, active) each
            self.slot: IntArray | None = None
            return
        planned = as_finite_array(plan_times, "plan_times", "s", ndim=1)
        if planned.size < 2 or np.any(np.diff(planned) <= 0.0) or planned[0] != 0.0 or planned[-1] < total:
            raise TiltwellError(
                f"plan_times [s] must increase from 0 to at least the duration {total:g} s; "
                f"got {planned.size} values in [{planned.min():g}, {planned.max():g}]"
            )
        planned_z = np.asarray(schedule.position(planned), dtype=np.float64)
        check_on_row(array, planned_z, "schedule.position(plan_times)")
        self.coils, self.local = _solve_currents(array, planned_z, target)
        self.slot = np.clip(np.searchsorted(planned, moments, side="right") - 1, 0, planned.size - 2)
        self.weight = (moments - planned[self.slot]) / (planned[self.slot + 1] - planned[self.slot])

    def at(self, m: int) -> tuple[IntArray, FloatArray]:
        """Coil indices (K,) and their currents (K,) [A] at force evaluation ``m``."""
        if self.slot is None:
            return self.coils[m], self.local[m]
        p, w = self.slot[m], self.weight[m]  # linear interpolation between planned points p and p + 1
        return (np.concatenate((self.coils[p], self.coils[p + 1])),
                np.concatenate(((1.0 - w) * self.local[p], w * self.local[p + 1])))


def _solve_currents(array: CoilArray, z: FloatArray, target: float) -> tuple[IntArray, FloatArray]:
    """Active coils (M, active) and their currents (M, active) [A] at positions ``z`` [m],
    solved in pieces of ``_PLAN_BLOCK`` positions."""
    pieces = [local_currents(array, z[k:k + _PLAN_BLOCK], target)[:2] for k in range(0, z.size, _PLAN_BLOCK)]
    return np.concatenate([p[0] for p in pieces]), np.concatenate([p[1] for p in pieces])


def _device_map(array: CoilArray, halves: FloatArray, field_map: CoilFieldMap | None) -> CoilFieldMap:
    """The map building: ``field_map`` checked against the row's pitch, or the default map
    (rho_max = hypot(hx, hy), z_span = hz + (active / 2 + 1) pitch, shape (65, 401))."""
    if field_map is None:
        return CoilFieldMap(array, math.hypot(halves[0], halves[1]), halves[2] + (array.active / 2 + 1) * array.pitch)
    if not isinstance(field_map, CoilFieldMap):
        raise TiltwellError(f"field_map must be a CoilFieldMap or None; got {type(field_map).__name__}")
    if not math.isclose(field_map.per_pitch * field_map.z_step, array.pitch, rel_tol=1e-12):
        raise TiltwellError(f"field_map must be built for this array's pitch {array.pitch:g} m; "
                            f"its pitch is {field_map.per_pitch * field_map.z_step:g} m")
    return field_map


def _compiled_plan(field: SummedCoilField, currents: _Currents, trap_z: FloatArray) -> tuple[IntArray, FloatArray,
                                                                                             IntArray]:
    """The coils (M, K), their currents (M, K) [A] and the window's first node (M,) at every
    force evaluation, as :meth:`_Currents.at` and :meth:`SummedCoilField.load` form them."""
    if currents.slot is None:
        coils, local = currents.coils, currents.local
    else:
        p, w = currents.slot, currents.weight[:, None]
        coils = np.concatenate((currents.coils[p], currents.coils[p + 1]), axis=1)
        local = np.concatenate(((1.0 - w) * currents.local[p], w * currents.local[p + 1]), axis=1)
    half = 0.5 * (field.nodes - 1) * field.map.z_step
    starts = np.floor((trap_z - half - field.first) / field.map.z_step).astype(np.int64)
    return (np.ascontiguousarray(coils, dtype=np.int64), np.ascontiguousarray(local, dtype=np.float64), starts)


def _step_lab_frame(field: SummedCoilField, scheme: SplittingScheme, currents: _Currents,
                    motion: tuple[FloatArray, FloatArray, FloatArray], state: FloatArray, halves: FloatArray,
                    dt: float, bar: Any) -> tuple[FloatArray, IntArray]:
    """The stepping: integrate ``state`` (N, 6) [m, m/s] (lab frame) by ``scheme`` with steps ``dt`` [s].

    ``motion`` holds the trap position [m] at every force evaluation, and the trap position
    [m] and speed [m/s] at every step end (0 ... steps). Returns ``final`` (N, 6) in the trap
    frame and the step at whose end each particle left the box (0: it started outside;
    steps + 1: it stayed), as :func:`~tiltwell.dynamics.results.tracking_result` takes them.
    The kicks are not merged across steps: positions and velocities are synchronised at
    every step end. ``bar`` is a progress bar or None.
    """
    trap_z, end_z, end_v = motion
    steps = end_z.size - 1
    count = state.shape[0]
    final = state.copy()
    lost_step = np.full(count, steps + 1, dtype=np.int64)
    lower = np.array([-halves[0], -halves[1], -halves[2]])[:, None]
    upper = -lower

    def outside(rows: FloatArray, k: int) -> NDArray[np.bool_]:
        shifted = rows - np.array([0.0, 0.0, end_z[k]])[:, None]
        return np.any((shifted <= lower) | (shifted >= upper), axis=0)

    starts_out = outside(state[:, :3].T, 0)
    lost_step[starts_out] = 0
    index = np.flatnonzero(~starts_out)
    if devicekernel.ENABLED and field.moment is not None:  # the compiled route (module notes)
        plan = _compiled_plan(field, currents, trap_z)
        schedule = np.array([[scheme.kicks[0] * dt] * len(scheme.drifts), [d * dt for d in scheme.drifts],
                             [k * dt for k in scheme.kicks[1:]]])
        ends = np.zeros((5, steps + 1))
        ends[0], ends[1], ends[2:, 0] = end_z, end_v, halves
        geometry = np.array([1.0 / field.map.u_step, 1.0 / field.map.z_step, field.first, field.moment, field.scale])
        moved = state.copy()
        index = devicekernel.step(field.map, field.nodes, plan, geometry, schedule, ends, moved, index, final,
                                  lost_step, bar)
        final[index] = moved[index]
        final[index, 2] -= end_z[steps]
        final[index, 5] -= end_v[steps]
        return final, lost_step
    r = np.ascontiguousarray(state[index, :3].T)  # rows (3, n)
    v = np.ascontiguousarray(state[index, 3:].T)
    a = np.empty_like(r)
    field.load(*currents.at(0), float(trap_z[0]))
    for block in range(0, index.size, _BLOCK):
        field.acceleration(r[:, block:block + _BLOCK], a[:, block:block + _BLOCK])
    first_kick = scheme.kicks[0] * dt
    parts = [(drift * dt, kick * dt) for drift, kick in zip(scheme.drifts, scheme.kicks[1:])]
    last = len(parts) - 1
    for k in range(1, steps + 1):
        if index.size == 0:
            break
        gone = np.zeros(index.size, dtype=bool)
        for j, (drift, kick) in enumerate(parts):
            moment = (k - 1) * len(parts) + j + 1
            field.load(*currents.at(moment), float(trap_z[moment]))
            for block in range(0, index.size, _BLOCK):  # blocks small enough to stay in cache
                part = slice(block, block + _BLOCK)
                rb, vb, ab = r[:, part], v[:, part], a[:, part]
                if j == 0:
                    vb += first_kick * ab
                rb += drift * vb
                field.acceleration(rb, ab)
                vb += kick * ab
                if j == last:
                    gone[part] = outside(rb, k)
        if gone.any():
            lost = index[gone]
            final[lost, :3], final[lost, 3:] = r[:, gone].T, v[:, gone].T
            final[lost, 2] -= end_z[k]
            final[lost, 5] -= end_v[k]
            lost_step[lost] = k
            keep = ~gone
            index, r, v, a = index[keep], r[:, keep], v[:, keep], a[:, keep]
        if bar is not None:
            bar.update(1)
    final[index, :3], final[index, 3:] = r.T, v.T
    final[index, 2] -= end_z[steps]
    final[index, 5] -= end_v[steps]
    return final, lost_step
