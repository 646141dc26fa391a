"""Particles tracked in the lab frame through the time-dependent field of a coil array.

The currents of a :class:`~tiltwell.coils.array.CoilArray` move a field zero along a schedule
(:func:`~tiltwell.coils.array.trap_currents`). Here the field itself is followed, coil by coil,
instead of a rigid trap: the hand-over from coil to coil (the ripple of
:func:`~tiltwell.coils.moving.moving_trap_phases`) acts on the particles as it happens.

- :class:`CoilFieldMap`: the field of one coil carrying 1 A per turn, and its Jacobian,
  tabulated once on an axisymmetric grid whose axial step divides the pitch (all coils are
  equal, and every coil plane falls on a node);
- :class:`UniformMotion`: a trap moving at constant speed (a :class:`Schedule` must slow down);
- :func:`track_device`: velocity-Verlet trajectories in the lab frame, lost at the walls of a
  box that moves with the trap; returns a :class:`~tiltwell.dynamics.tracking.TrackingResult`
  (``final`` in the trap frame: z - z_trap, vz - v_trap). At each step the tables of the
  coils carrying current are summed once over a window around the trap, so a particle
  costs one bilinear look-up whatever the number of coils (benchmarks/bench_device.py:
  1e5 particles through 300 coils, switch-on to release, in a few minutes).

SI units throughout (m, s, T, A, J).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.validation import TiltwellError, as_finite_array, as_integer, as_points, as_scalar
from ..coils.array import CoilArray, _check_array, _check_on_row, _local_currents
from ..physics.fields import Coil, loop_field
from ..coils.schedule import Schedule
from ..physics.species import LinearZeeman, Species
from .tracking import TrackingResult, _progress_bar, _result

__all__ = ["CoilFieldMap", "UniformMotion", "track_device"]

FloatArray = NDArray[np.float64]

#: Finite-difference steps of the tabulated derivatives, relative to radius (z) and radius^2 (rho^2).
_DIFFERENCE_STEP = 1e-4
#: Particles pushed together through one step (their arrays stay in the processor's cache).
_BLOCK = 8192
#: Most time steps one call of track_device may take.
_MAX_STEPS = 2_000_000


class CoilFieldMap:
    """Field of one coil of ``array`` carrying 1 A per turn, tabulated on a (rho^2, z) grid.

    Parameters
    ----------
    array : CoilArray
        Its coil geometry (radius, turns, winding cross-section) is used; all coils are equal.
    rho_max : float
        Largest distance from the axis covered [m], in (0, bore) with bore = radius - width/2.
    z_span : float
        Half length covered along the axis around the coil plane [m], > 0 (rounded up to a
        whole number of axial steps).
    shape : (int, int), default (65, 401)
        Grid nodes (n_rho, n_z) asked for, each >= 2; the rho nodes are uniform in rho^2.
        The axial step 2 z_span / (n_z - 1) is shortened to the next whole fraction of the
        pitch, so every coil plane of the row falls on a node.

    Attributes
    ----------
    u_step, z_step : float
        Grid steps in rho^2 [m^2] and z [m]; ``pitch / z_step`` is an integer.
    table : ndarray, shape (n_rho, n_z, 6)
        f = B_rho / rho [T/(A m)], df/du, df/dz, B_z [T/A], dB_z/du, dB_z/dz at the nodes.

    Notes
    -----
    The table holds f = B_rho / rho and B_z and their derivatives with respect to
    u = rho^2 and z, from :func:`tiltwell.physics.fields.loop_field` summed over
    :meth:`tiltwell.physics.fields.Coil.loops` (derivatives by 2nd-order finite differences of the
    exact field with steps 1e-4 radius in z and 1e-4 radius^2 in u). Both f and B_z are
    smooth functions of u (the field is even in rho), so with B = (f x, f y, B_z) the
    Jacobian, e.g. dB_x/dx = f + 2 x^2 df/du, dB_z/dx = 2 x dB_z/du, stays finite on the axis.
    Interpolation is bilinear in (u, z): error second order in the grid steps.

    Truncation: beyond ``|z - z_coil| > z_span`` the coil's field is taken as zero and points
    with rho > rho_max are clipped to rho_max. :func:`track_device` superposes only the
    coils that carry current, all within ``active / 2`` pitches of the trap, so a map with
    ``z_span >= hz + (active / 2 + 1) pitch`` (hz the box half length) never truncates the
    field inside the box.
    """

    def __init__(self, array: CoilArray, rho_max: float, z_span: float, shape: tuple[int, int] = (65, 401)) -> None:
        _check_array(array)
        bore = array.radius - 0.5 * array.width
        self.rho_max = as_scalar(rho_max, "rho_max", "m", low=0.0, high=bore, low_open=True, high_open=True)
        span = as_scalar(z_span, "z_span", "m", low=0.0, low_open=True)
        if (not isinstance(shape, tuple) or len(shape) != 2
                or any(isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 2 for n in shape)):
            raise TiltwellError(f"shape must be a pair of integers (n_rho, n_z), each >= 2; got {shape!r}")
        n_u = int(shape[0])
        self.per_pitch = math.ceil(array.pitch * (int(shape[1]) - 1) / (2.0 * span) * (1.0 - 1e-12))
        self.z_step = array.pitch / self.per_pitch
        self.half_nodes = math.ceil(span / self.z_step * (1.0 - 1e-12))
        self.z_span = self.half_nodes * self.z_step
        self.shape: tuple[int, int] = (n_u, 2 * self.half_nodes + 1)
        self.u_step = self.rho_max**2 / (n_u - 1)
        u = np.linspace(0.0, self.rho_max**2, n_u)
        z = self.z_step * np.arange(-self.half_nodes, self.half_nodes + 1)
        uu, zz = np.meshgrid(u, z, indexing="ij")
        radii, planes, currents = Coil(array.radius, 0.0, 1.0, array.turns, array.width, array.height).loops()

        def exact(uv: FloatArray, zv: FloatArray) -> tuple[FloatArray, FloatArray]:
            """(B_rho / rho, B_z) of the unit coil at rho = sqrt(uv), z = zv; rho along x."""
            rho = np.sqrt(uv.ravel())
            points = np.column_stack((np.maximum(rho, 1e-300), np.zeros(rho.size), zv.ravel()))
            total = np.zeros((rho.size, 3))
            for a, plane, current in zip(radii.tolist(), planes.tolist(), currents.tolist()):
                total += loop_field(points, a, plane, current)
            f = total[:, 0] / np.maximum(rho, 1e-300)
            if np.any(rho == 0.0):  # on the axis B_rho / rho is its limit: from a tiny offset
                tiny = np.column_stack((np.full(rho.size, 1e-9 * array.radius), np.zeros(rho.size), zv.ravel()))
                near = np.zeros((rho.size, 3))
                for a, plane, current in zip(radii.tolist(), planes.tolist(), currents.tolist()):
                    near += loop_field(tiny, a, plane, current)
                f = np.where(rho == 0.0, near[:, 0] / (1e-9 * array.radius), f)
            return f.reshape(uv.shape), total[:, 2].reshape(uv.shape)

        dz = _DIFFERENCE_STEP * array.radius
        du = _DIFFERENCE_STEP * array.radius**2
        f0, b0 = exact(uu, zz)
        f1, b1 = exact(uu + du, zz)
        f2, b2 = exact(uu + 2.0 * du, zz)
        fp, bp = exact(uu, zz + dz)
        fm, bm = exact(uu, zz - dz)
        self.table: FloatArray = np.stack(
            (
                f0, (-3.0 * f0 + 4.0 * f1 - f2) / (2.0 * du), (fp - fm) / (2.0 * dz),
                b0, (-3.0 * b0 + 4.0 * b1 - b2) / (2.0 * du), (bp - bm) / (2.0 * dz),
            ),
            axis=-1,
        )
        self.table.setflags(write=False)

    def __repr__(self) -> str:
        return f"CoilFieldMap(rho_max={self.rho_max!r}, z_span={self.z_span!r}, shape={self.shape!r})"

    def window(self, coils: NDArray[np.int64], currents: FloatArray, start: int, nodes: int) -> FloatArray:
        """The summed table (n_rho, nodes, 6) of ``coils`` (indices into the row, coil k on
        node k ``per_pitch``) carrying ``currents`` [A], on the row's nodes start ... start + nodes - 1."""
        total = np.zeros((self.shape[0], nodes, 6))
        for coil, current in zip(coils.tolist(), currents.tolist()):
            low = start - coil * self.per_pitch + self.half_nodes  # table column of the first window node
            first, last = max(low, 0), min(low + nodes, self.shape[1])
            if first < last:
                total[:, first - low:last - low] += current * self.table[:, first:last]
        return total

    def field_and_jacobian(self, points: ArrayLike, centre: float) -> tuple[FloatArray, FloatArray]:
        """Field and Jacobian of the unit coil (1 A per turn) whose plane is at ``centre``.

        Parameters
        ----------
        points : array_like, shape (N, 3)
            Positions (x, y, z) [m] in the lab frame.
        centre : float
            Axial position of the coil plane [m].

        Returns
        -------
        field : ndarray, shape (N, 3)
            (B_x, B_y, B_z) [T/A]; zero where ``|z - centre| > z_span``.
        jacobian : ndarray, shape (N, 3, 3)
            dB_i/dx_j [T/(A m)].
        """
        positions = as_points(points)
        plane = as_scalar(centre, "centre", "m")
        x, y, z = positions[:, 0], positions[:, 1], positions[:, 2]
        n_u, n_z = self.shape
        su = np.minimum((x * x + y * y) / self.u_step, n_u - 1.0)
        sz = (z - plane + self.z_span) / self.z_step
        inside = (sz >= 0.0) & (sz <= n_z - 1.0)
        sz = np.clip(sz, 0.0, n_z - 1.0)
        iu = np.minimum(su.astype(np.int64), n_u - 2)
        iz = np.minimum(sz.astype(np.int64), n_z - 2)
        wu, wz = (su - iu)[:, None], (sz - iz)[:, None]
        t = self.table
        rows = ((t[iu, iz] * (1.0 - wz) + t[iu, iz + 1] * wz) * (1.0 - wu)
                + (t[iu + 1, iz] * (1.0 - wz) + t[iu + 1, iz + 1] * wz) * wu)
        f, fu, fz, bz, bzu, bzz = (rows * inside[:, None]).T
        field = np.column_stack((f * x, f * y, bz))
        jacobian = np.empty((positions.shape[0], 3, 3))
        jacobian[:, 0] = np.column_stack((f + 2.0 * x * x * fu, 2.0 * x * y * fu, x * fz))
        jacobian[:, 1] = np.column_stack((2.0 * x * y * fu, f + 2.0 * y * y * fu, y * fz))
        jacobian[:, 2] = np.column_stack((2.0 * x * bzu, 2.0 * y * bzu, bzz))
        return field, jacobian


class _StepField:
    """The force of the coils' summed field at one instant, by bilinear interpolation of
    their summed table over a window of the row's nodes that covers the trap box.

    Per particle: one gather of the cell's 24 bilinear coefficients (6 quantities x 4
    corners), then |B| = sqrt(f^2 u + B_z^2) and, with u = rho^2,
    d|B|/du = (f f_u u + f^2 / 2 + B_z B_z,u) / |B|, d|B|/dz = (f f_z u + B_z B_z,z) / |B|,
    grad|B| = (2 x d|B|/du, 2 y d|B|/du, d|B|/dz): the same as J^T B / |B| from the
    Jacobian of :meth:`CoilFieldMap.field_and_jacobian`, with fewer operations. Particles
    are stored as rows (3, n) so every operation runs over one contiguous axis.
    """

    def __init__(self, field_map: CoilFieldMap, first: float, half_length: float, species: Species) -> None:
        self.map = field_map
        self.first = first
        self.nodes = math.ceil(2.0 * half_length / field_map.z_step) + 4
        self.cells = np.empty((24, 0))
        self.start = 0
        self.zeeman = species.zeeman
        self.moment = float(species.zeeman.moment) if isinstance(species.zeeman, LinearZeeman) else None
        self.scale = -1.0 / species.mass

    def load(self, coils: NDArray[np.int64], currents: FloatArray, centre: float) -> None:
        """Sum the table of ``coils`` carrying ``currents`` [A] around the trap at ``centre`` [m]."""
        half = 0.5 * (self.nodes - 1) * self.map.z_step
        self.start = math.floor((centre - half - self.first) / self.map.z_step)
        t = self.map.window(coils, currents, self.start, self.nodes)
        c0 = t[:-1, :-1]
        cu = t[1:, :-1] - c0
        cz = t[:-1, 1:] - c0
        cuz = t[1:, 1:] - t[1:, :-1] - cz
        self.cells = np.ascontiguousarray(np.concatenate((c0, cu, cz, cuz), axis=-1).reshape(-1, 24).T)

    def acceleration(self, r: FloatArray, out: FloatArray) -> None:
        """Write -W'(|B|) grad|B| / m [m/s^2] at lab positions ``r`` (3, n) [m] into ``out`` (3, n)."""
        n_u = self.map.shape[0]
        x, y, z = r
        u = x * x + y * y
        su = np.minimum(u * (1.0 / self.map.u_step), n_u - 1.0)
        sz = np.clip((z - self.first) * (1.0 / self.map.z_step) - self.start, 0.0, self.nodes - 1.0)
        iu = np.minimum(su.astype(np.int64), n_u - 2)
        iz = np.minimum(sz.astype(np.int64), self.nodes - 2)
        wu = su - iu
        wz = sz - iz
        iu *= self.nodes - 1
        iu += iz
        c = np.take(self.cells, iu, axis=1)
        q = c[12:18] + wu * c[18:24]
        q *= wz
        q += c[0:6]
        q += wu * c[6:12]
        f, fu, fz, bz, bzu, bzz = q
        size = np.sqrt(f * f * u + bz * bz)
        positive = size > 0.0
        inverse = np.divide(1.0, size, out=np.zeros_like(size), where=positive)
        if self.moment is None:
            inverse *= np.asarray(self.zeeman.derivative(size), dtype=np.float64)
        else:
            inverse *= self.moment
        inverse *= self.scale
        radial = f * (fu * u + 0.5 * f) + bz * bzu
        radial *= 2.0 * inverse
        np.multiply(radial, x, out=out[0])
        np.multiply(radial, y, out=out[1])
        np.multiply(f * fz * u + bz * bzz, inverse, out=out[2])


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


def _device_inputs(array: CoilArray, species: Species, schedule: Schedule | UniformMotion, particles: ArrayLike,
                   box_half_widths: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """The particles (N, 6) [m, m/s] and box half widths (3,) [m] of a device run, checked
    (also by :func:`tiltwell.compare_device`, before its costly rigid twin)."""
    _check_array(array)
    if not isinstance(species, Species):
        raise TiltwellError(f"species must be a Species; got {type(species).__name__}")
    if not isinstance(schedule, (Schedule, UniformMotion)):
        raise TiltwellError(f"schedule must be a Schedule or UniformMotion; got {type(schedule).__name__}")
    state = as_finite_array(particles, "particles", "m, m/s")
    if state.ndim != 2 or state.shape[1] != 6 or state.shape[0] < 1:
        raise TiltwellError(f"particles [m, m/s] must have shape (N, 6) with N >= 1; got shape {state.shape}")
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
    Velocity Verlet (kick-drift-kick) with the force -W'(|B|) grad|B| of the coils that carry
    current at the time of each kick. At each kick the tables of those coils (the
    ``active`` ones; the union of two neighbouring plans' coils while a planned waveform
    hands over), weighted by their currents, are summed over a window of the map's nodes
    that covers the box, so each particle needs one bilinear look-up of the summed field,
    whatever the number of coils (all coil planes lie on nodes, so the sum is exact to the
    tables). Particles are tested against the box after whole steps. The same caution
    about the cone at the zero as in :func:`tiltwell.track` applies.
    """
    state, halves = _device_inputs(array, species, schedule, particles, box_half_widths)
    total = as_scalar(duration, "duration", "s", low=0.0, low_open=True)
    largest = as_scalar(time_step, "time_step", "s", low=0.0, low_open=True, high=total)
    target = as_scalar(gradient, "gradient", "T/m", low=0.0, low_open=True)
    every = as_integer(record_every, "record_every", 1)
    if not isinstance(progress, (bool, np.bool_)):
        raise TiltwellError(f"progress must be True or False; got {progress!r}")
    steps = math.ceil(total / largest * (1.0 - 1e-12))
    if steps > _MAX_STEPS:
        raise TiltwellError(f"duration / time_step must be at most {_MAX_STEPS:g} steps; got {steps:g}")
    dt = total / steps
    times: FloatArray = np.arange(steps + 1, dtype=np.float64) * dt
    trap_z = np.asarray(schedule.position(times), dtype=np.float64)
    trap_v = np.asarray(schedule.velocity(times), dtype=np.float64)
    _check_on_row(array, trap_z, "schedule.position(t)")
    if plan_times is None:
        coils, local, _, _ = _local_currents(array, trap_z, target)  # (K, active) each

        def currents_at(k: int) -> tuple[NDArray[np.int64], FloatArray]:
            return coils[k], local[k]
    else:
        planned = as_finite_array(plan_times, "plan_times", "s", ndim=1)
        if planned.size < 2 or np.any(np.diff(planned) <= 0.0) or planned[0] != 0.0 or planned[-1] < total:
            raise TiltwellError(
                f"plan_times [s] must increase from 0 to at least the duration {total:g} s; "
                f"got {planned.size} values in [{planned.min():g}, {planned.max():g}]"
            )
        planned_z = np.asarray(schedule.position(planned), dtype=np.float64)
        _check_on_row(array, planned_z, "schedule.position(plan_times)")
        plan_coils, plan_local, _, _ = _local_currents(array, planned_z, target)
        slot = np.clip(np.searchsorted(planned, times, side="right") - 1, 0, planned.size - 2)
        weight = (times - planned[slot]) / (planned[slot + 1] - planned[slot])

        def currents_at(k: int) -> tuple[NDArray[np.int64], FloatArray]:
            p, w = slot[k], weight[k]  # linear interpolation between planned points p and p + 1
            return (np.concatenate((plan_coils[p], plan_coils[p + 1])),
                    np.concatenate(((1.0 - w) * plan_local[p], w * plan_local[p + 1])))
    if field_map is None:
        field_map = CoilFieldMap(array, math.hypot(halves[0], halves[1]),
                                 halves[2] + (array.active / 2 + 1) * array.pitch)
    elif not isinstance(field_map, CoilFieldMap):
        raise TiltwellError(f"field_map must be a CoilFieldMap or None; got {type(field_map).__name__}")
    elif not math.isclose(field_map.per_pitch * field_map.z_step, array.pitch, rel_tol=1e-12):
        raise TiltwellError(f"field_map must be built for this array's pitch {array.pitch:g} m; "
                            f"its pitch is {field_map.per_pitch * field_map.z_step:g} m")
    step_field = _StepField(field_map, array.first, halves[2] + field_map.z_step, species)

    count = state.shape[0]
    final = state.copy()
    lost_step = np.full(count, steps + 1, dtype=np.int64)
    lower = np.array([-halves[0], -halves[1], -halves[2]])[:, None]
    upper = -lower

    def outside(rows: FloatArray, k: int) -> NDArray[np.bool_]:
        shifted = rows - np.array([0.0, 0.0, trap_z[k]])[:, None]
        return np.any((shifted <= lower) | (shifted >= upper), axis=0)

    starts_out = outside(state[:, :3].T, 0)
    lost_step[starts_out] = 0
    index = np.flatnonzero(~starts_out)
    r = np.ascontiguousarray(state[index, :3].T)  # rows (3, n)
    v = np.ascontiguousarray(state[index, 3:].T)
    a = np.empty_like(r)
    step_field.load(*currents_at(0), float(trap_z[0]))
    for block in range(0, index.size, _BLOCK):
        step_field.acceleration(r[:, block:block + _BLOCK], a[:, block:block + _BLOCK])
    half = 0.5 * dt
    bar = _progress_bar(steps) if progress else None
    try:
        for k in range(1, steps + 1):
            if index.size == 0:
                break
            step_field.load(*currents_at(k), float(trap_z[k]))
            gone = np.zeros(index.size, dtype=bool)
            for block in range(0, index.size, _BLOCK):  # blocks small enough to stay in cache
                part = slice(block, block + _BLOCK)
                rb, vb, ab = r[:, part], v[:, part], a[:, part]
                vb += half * ab
                rb += dt * vb
                step_field.acceleration(rb, ab)
                vb += half * ab
                gone[part] = outside(rb, k)
            if gone.any():
                lost = index[gone]
                final[lost, :3], final[lost, 3:] = r[:, gone].T, v[:, gone].T
                final[lost, 2] -= trap_z[k]
                final[lost, 5] -= trap_v[k]
                lost_step[lost] = k
                keep = ~gone
                index, r, v, a = index[keep], r[:, keep], v[:, keep], a[:, keep]
            if bar is not None:
                bar.update(1)
    finally:
        if bar is not None:
            bar.close()
    r, v = r.T, v.T
    final[index, :3], final[index, 3:] = r, v
    final[index, 2] -= trap_z[steps]
    final[index, 5] -= trap_v[steps]
    return _result(final, lost_step, steps, dt, every, "verlet (lab frame, coil array)")
