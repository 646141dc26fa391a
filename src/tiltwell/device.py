"""Particles tracked in the lab frame through the time-dependent field of a coil array.

The currents of a :class:`~tiltwell.coilarray.CoilArray` move a field zero along a schedule
(:func:`~tiltwell.coilarray.trap_currents`). Here the field itself is followed, coil by coil,
instead of a rigid trap: the hand-over from coil to coil (the ripple of
:func:`~tiltwell.moving.moving_trap_phases`) acts on the particles as it happens.

- :class:`CoilFieldMap`: the field of one coil carrying 1 A per turn, and its Jacobian,
  tabulated once on an axisymmetric grid and interpolated bilinearly (all coils are equal);
- :class:`UniformMotion`: a trap moving at constant speed (a :class:`Schedule` must slow down);
- :func:`track_device`: velocity-Verlet trajectories in the lab frame, lost at the walls of a
  box that moves with the trap; returns a :class:`~tiltwell.tracking.TrackingResult`
  (``final`` in the trap frame: z - z_trap, vz - v_trap).

SI units throughout (m, s, T, A, J).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._validation import TiltwellError, as_finite_array, as_points, as_scalar
from .coilarray import CoilArray, _check_array, trap_currents
from .fields import Coil, loop_field
from .schedule import Schedule
from .species import Species
from .tracking import TrackingResult

__all__ = ["CoilFieldMap", "UniformMotion", "track_device"]

FloatArray = NDArray[np.float64]

#: Finite-difference steps of the tabulated derivatives, relative to radius (z) and radius^2 (rho^2).
_DIFFERENCE_STEP = 1e-4
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
        Half length covered along the axis around the coil plane [m], > 0.
    shape : (int, int), default (65, 401)
        Grid nodes (n_rho, n_z), each >= 2; the rho nodes are uniform in rho^2.

    Notes
    -----
    The table holds f = B_rho / rho and B_z and their derivatives with respect to
    u = rho^2 and z, from :func:`tiltwell.fields.loop_field` summed over
    :meth:`tiltwell.fields.Coil.loops` (derivatives by 2nd-order finite differences of the
    exact field with steps 1e-4 radius in z and 1e-4 radius^2 in u). Both f and B_z are
    smooth functions of u (the field is even in rho), so with B = (f x, f y, B_z) the
    Jacobian, e.g. dB_x/dx = f + 2 x^2 df/du, dB_z/dx = 2 x dB_z/du, stays finite on the axis.
    Interpolation is bilinear in (u, z): error second order in the grid steps.

    Truncation: beyond ``|z - z_coil| > z_span`` the coil's field is taken as zero and points
    with rho > rho_max are clipped to rho_max. :func:`track_device` superposes only the
    ``active`` coils, all within ``active / 2`` pitches of the trap, so a map with
    ``z_span >= hz + (active / 2 + 1) pitch`` (hz the box half length) never truncates the
    field inside the box.
    """

    def __init__(self, array: CoilArray, rho_max: float, z_span: float, shape: tuple[int, int] = (65, 401)) -> None:
        _check_array(array)
        bore = array.radius - 0.5 * array.width
        self.rho_max = as_scalar(rho_max, "rho_max", "m", low=0.0, high=bore, low_open=True, high_open=True)
        self.z_span = as_scalar(z_span, "z_span", "m", low=0.0, low_open=True)
        if (not isinstance(shape, tuple) or len(shape) != 2
                or any(isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 2 for n in shape)):
            raise TiltwellError(f"shape must be a pair of integers (n_rho, n_z), each >= 2; got {shape!r}")
        self.shape: tuple[int, int] = (int(shape[0]), int(shape[1]))
        self.u_step = self.rho_max**2 / (self.shape[0] - 1)
        self.z_step = 2.0 * self.z_span / (self.shape[1] - 1)
        u = np.linspace(0.0, self.rho_max**2, self.shape[0])
        z = np.linspace(-self.z_span, self.z_span, self.shape[1])
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
        table = np.stack(
            (
                f0, (-3.0 * f0 + 4.0 * f1 - f2) / (2.0 * du), (fp - fm) / (2.0 * dz),
                b0, (-3.0 * b0 + 4.0 * b1 - b2) / (2.0 * du), (bp - bm) / (2.0 * dz),
            ),
            axis=-1,
        )
        self.table: FloatArray = table.reshape(-1, 6)  # rows (i_u * n_z + i_z): f, f_u, f_z, B_z, B_z_u, B_z_z
        self.table.setflags(write=False)

    def __repr__(self) -> str:
        return f"CoilFieldMap(rho_max={self.rho_max!r}, z_span={self.z_span!r}, shape={self.shape!r})"

    def _corners(self, x: FloatArray, y: FloatArray, dz: FloatArray) -> tuple[FloatArray, NDArray[np.bool_]]:
        """Interpolated table rows (n, 6) at the points, and which points lie within z_span."""
        n_u, n_z = self.shape
        su = np.minimum((x * x + y * y) / self.u_step, n_u - 1.0)
        sz = (dz + self.z_span) / self.z_step
        inside = (sz >= 0.0) & (sz <= n_z - 1.0)
        sz = np.clip(sz, 0.0, n_z - 1.0)
        iu = np.minimum(su.astype(np.int64), n_u - 2)
        iz = np.minimum(sz.astype(np.int64), n_z - 2)
        wu, wz = (su - iu)[:, None], (sz - iz)[:, None]
        base = iu * n_z + iz
        t = self.table
        rows = (t[base] * (1.0 - wz) + t[base + 1] * wz) * (1.0 - wu) + (t[base + n_z] * (1.0 - wz) + t[base + n_z + 1] * wz) * wu
        return rows, inside

    def _accumulate(self, x: FloatArray, y: FloatArray, z: FloatArray, centre: float, current: float,
                    field: FloatArray, jacobian: FloatArray) -> None:
        """Add ``current`` [A] times the unit coil at ``centre`` [m] into field (n, 3), jacobian (n, 3, 3)."""
        rows, inside = self._corners(x, y, z - centre)
        rows *= np.where(inside, current, 0.0)[:, None]
        f, fu, fz, bz, bzu, bzz = rows.T
        field[:, 0] += f * x
        field[:, 1] += f * y
        field[:, 2] += bz
        jacobian[:, 0, 0] += f + 2.0 * x * x * fu
        jacobian[:, 0, 1] += 2.0 * x * y * fu
        jacobian[:, 0, 2] += x * fz
        jacobian[:, 1, 0] += 2.0 * x * y * fu
        jacobian[:, 1, 1] += f + 2.0 * y * y * fu
        jacobian[:, 1, 2] += y * fz
        jacobian[:, 2, 0] += 2.0 * x * bzu
        jacobian[:, 2, 1] += 2.0 * y * bzu
        jacobian[:, 2, 2] += bzz

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
        field = np.zeros((positions.shape[0], 3))
        jacobian = np.zeros((positions.shape[0], 3, 3))
        self._accumulate(positions[:, 0], positions[:, 1], positions[:, 2], plane, 1.0, field, jacobian)
        return field, jacobian


@dataclass(frozen=True)
class UniformMotion:
    """A trap centre moving at constant ``speed`` [m/s] (> 0) from z = 0 at t = 0.

    Offers the ``position(t)`` and ``velocity(t)`` of :class:`~tiltwell.schedule.Schedule`,
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


def _device_force(field_map: CoilFieldMap, species: Species, positions: FloatArray, centres: FloatArray,
                  currents: FloatArray) -> FloatArray:
    """Force -W'(|B|) grad|B| [N], shape (n, 3), with grad|B| = J^T B / |B| (zero where B = 0)."""
    n = positions.shape[0]
    field = np.zeros((n, 3))
    jacobian = np.zeros((n, 3, 3))
    x, y, z = positions[:, 0], positions[:, 1], positions[:, 2]
    for centre, current in zip(centres.tolist(), currents.tolist()):
        field_map._accumulate(x, y, z, centre, current, field, jacobian)
    size = np.sqrt(np.einsum("ni,ni->n", field, field))
    safe = np.where(size > 0.0, size, 1.0)
    gradient = np.einsum("nij,ni->nj", jacobian, field) / safe[:, None]
    slope = np.asarray(species.zeeman.derivative(size), dtype=np.float64)
    return -(slope * (size > 0.0))[:, None] * gradient


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

    Returns
    -------
    TrackingResult
        As from :func:`tiltwell.track`, with ``final`` in the trap frame
        (x, y, z - z_trap, vx, vy, vz - v_trap) and ``lost_time`` 0 for particles that
        start outside the moving box.

    Notes
    -----
    Velocity Verlet (kick-drift-kick) with the force -W'(|B|) grad|B| of the coils that carry
    current at the time of each kick; grad|B| = J^T B / |B| with J the summed Jacobian. Only
    coils with nonzero current are superposed (the ``active`` ones, one more while a
    planned waveform hands over). Particles are tested against the box after whole steps.
    The same caution about the cone at the zero as in :func:`tiltwell.track` applies.
    """
    _check_array(array)
    if not isinstance(species, Species):
        raise TiltwellError(f"species must be a Species; got {type(species).__name__}")
    if not isinstance(schedule, (Schedule, UniformMotion)):
        raise TiltwellError(f"schedule must be a Schedule or UniformMotion; got {type(schedule).__name__}")
    state = as_finite_array(particles, "particles", "m, m/s")
    if state.ndim != 2 or state.shape[1] != 6 or state.shape[0] < 1:
        raise TiltwellError(f"particles [m, m/s] must have shape (N, 6) with N >= 1; got shape {state.shape}")
    total = as_scalar(duration, "duration", "s", low=0.0, low_open=True)
    largest = as_scalar(time_step, "time_step", "s", low=0.0, low_open=True, high=total)
    target = as_scalar(gradient, "gradient", "T/m", low=0.0, low_open=True)
    halves = as_finite_array(box_half_widths, "box_half_widths", "m", ndim=1)
    bore = array.radius - 0.5 * array.width
    if halves.shape != (3,) or np.any(halves <= 0.0) or math.hypot(halves[0], halves[1]) >= bore:
        raise TiltwellError(
            f"box_half_widths [m] must be three values > 0 with hypot(hx, hy) < {bore:g} m (the bore); "
            f"got {halves.tolist()!r}"
        )
    steps = math.ceil(total / largest * (1.0 - 1e-12))
    if steps > _MAX_STEPS:
        raise TiltwellError(f"duration / time_step must be at most {_MAX_STEPS:g} steps; got {steps:g}")
    dt = total / steps
    times: FloatArray = np.arange(steps + 1, dtype=np.float64) * dt
    if plan_times is None:
        currents = trap_currents(array, schedule.position(times), target).currents  # (K, count)
    else:
        planned = as_finite_array(plan_times, "plan_times", "s", ndim=1)
        if planned.size < 2 or np.any(np.diff(planned) <= 0.0) or planned[0] != 0.0 or planned[-1] < total:
            raise TiltwellError(
                f"plan_times [s] must increase from 0 to at least the duration {total:g} s; "
                f"got {planned.size} values in [{planned.min():g}, {planned.max():g}]"
            )
        table = trap_currents(array, schedule.position(planned), target).currents
        currents = np.column_stack([np.interp(times, planned, table[:, k]) for k in range(array.count)])
    if field_map is None:
        field_map = CoilFieldMap(array, math.hypot(halves[0], halves[1]),
                                 halves[2] + (array.active / 2 + 1) * array.pitch)
    elif not isinstance(field_map, CoilFieldMap):
        raise TiltwellError(f"field_map must be a CoilFieldMap or None; got {type(field_map).__name__}")
    centres_all = array.positions
    trap_z = schedule.position(times)
    trap_v = schedule.velocity(times)
    mass = species.mass

    def acceleration(positions: FloatArray, k: int) -> FloatArray:
        carrying = np.flatnonzero(currents[k])
        return _device_force(field_map, species, positions, centres_all[carrying], currents[k, carrying]) / mass

    def inside(positions: FloatArray, k: int) -> NDArray[np.bool_]:
        offsets = np.abs(positions - (0.0, 0.0, trap_z[k]))
        return np.all(offsets < halves, axis=1)

    count = state.shape[0]
    final = state.copy()
    lost_step = np.full(count, steps + 1, dtype=np.int64)
    alive = inside(state[:, :3], 0)
    lost_step[~alive] = 0
    index = np.flatnonzero(alive)
    r, v = state[index, :3].copy(), state[index, 3:].copy()
    a = acceleration(r, 0)
    for k in range(1, steps + 1):
        if index.size == 0:
            break
        v += 0.5 * dt * a
        r += dt * v
        a = acceleration(r, k)
        v += 0.5 * dt * a
        keep = inside(r, k)
        if not np.all(keep):
            gone = ~keep
            final[index[gone], :3], final[index[gone], 3:] = r[gone], v[gone]
            final[index[gone], 2] -= trap_z[k]
            final[index[gone], 5] -= trap_v[k]
            lost_step[index[gone]] = k
            index, r, v, a = index[keep], r[keep], v[keep], a[keep]
    final[index, :3], final[index, 3:] = r, v
    final[index, 2] -= trap_z[steps]
    final[index, 5] -= trap_v[steps]
    survival = (count - np.searchsorted(np.sort(lost_step), np.arange(steps + 1), side="right")) / count
    kept = lost_step > steps
    lost_time = np.where(kept, np.inf, lost_step * dt)
    for item in (times, survival, final, kept, lost_time):
        item.setflags(write=False)
    return TrackingResult(times, survival, final, kept, lost_time, "verlet (lab frame, coil array)", dt)
