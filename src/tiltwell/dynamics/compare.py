"""The real coil-array device against its rigid twin: what the ripple of the hand-over costs.

A row of coils (:class:`~tiltwell.coils.array.CoilArray`) moves a field zero along a schedule;
its trap changes shape as the zero crosses each pitch (the ripple of
:func:`~tiltwell.coils.moving.moving_trap_phases`). :class:`PhaseAveragedField` is the trap it
makes on average over that phase, with no ripple; :func:`compare_device` tracks the same
particles through it (:func:`tiltwell.track`, trap frame) and through the coils' moving
field (:func:`tiltwell.track_device`, lab frame); :class:`DeviceComparison` holds both runs
and gives the loss caused by the ripple with a paired standard error, the survival
difference over time and the time of flight to a detector. SI units throughout.
"""

from __future__ import annotations

import dataclasses
import functools
import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.display import html_table
from .._base.validation import TiltwellError, as_integer, as_points, as_scalar
from ..coils.array import MAX_PHASES, CoilArray, CurrentPlan, check_coil_array, trap_currents
from .device import UniformMotion, check_device_run, track_device
from .fieldmap import FieldMap
from ..physics.fields import Coil, CoilSet, FieldSource
from ..coils.schedule import Schedule
from ..coils.schedule import arrival_times as _free_flight
from ..physics.species import Species
from .tracking import TrackingResult, track
from ..wells.traps import Trap

__all__ = ["DeviceComparison", "PhaseAveragedField", "compare_device"]

FloatArray = NDArray[np.float64]


#: What :class:`PhaseAveragedField` averages over the phases (see its Notes).
AVERAGES = ("magnitude", "field")


@dataclass(frozen=True)
class PhaseAveragedField:
    """The coil array's trap averaged over the phase of its zero within one pitch.

    Phase j = 0 ... P - 1 puts the zero at z_ref + p_j, p_j = j pitch / P, with the currents
    of :func:`~tiltwell.coils.array.trap_currents`; z_ref is coil ``(count - 1) // 2`` (the
    phases of :func:`~tiltwell.coils.moving.moving_trap_phases`). In the trap frame (zero at the
    origin) its field is B_j(r) = B_array,j(r + (0, 0, z_ref + p_j)), and

    - ``field`` is B̄ = (1 / P) sum_j B_j: the field of every phase's coils, at
      z_k - z_ref - p_j carrying I_k / P, a static field with its zero at the origin and
      the mean achieved axial gradient there;
    - ``magnitude`` is (1 / P) sum_j |B_j| with ``average="magnitude"`` (default), or |B̄|
      with ``average="field"``; ``magnitude_gradient`` is its gradient.

    Parameters
    ----------
    array : CoilArray
        At least ``active + 1`` coils, so the current window is centred at every phase.
    gradient : float
        Wanted axial gradient dB_z/dz at the zero [T/m], > 0 (the current limit may lower it).
    phases : int, default 16
        Number P of phases averaged, >= 1.
    average : {"magnitude", "field"}, default "magnitude"
        What ``magnitude`` averages.

    Notes
    -----
    A particle crossing the pitch fast compared with its own motion feels, to first order,
    the phase average of its potential W(|B_j|) (averaging over a rapidly oscillating
    force; e.g. Landau and Lifshitz, Mechanics, sect. 30, from memory). For a linear
    Zeeman state that is W(mean |B_j|): ``average="magnitude"`` is the rigid twin of the
    device. (For a curved W, e.g. Breit-Rabi, W(mean |B_j|) differs from mean W(|B_j|) at
    second order in the phase variation of |B|.) By the triangle inequality
    |B̄| <= mean |B_j|, equal where all B_j are parallel (on the axis inside the well), so
    the ``"field"`` average is a slightly shallower trap off the axis: for a 8 mm radius
    row at pitch = radius, 1.2 % lower |B| on average over a 4 x 4 x 6 mm half-width box
    (5.5 % at most), enough for the device to keep 3.7 paired standard errors more
    particles than that twin (see the tests); at pitch = 0.35 radius they agree to 1.5e-4.

    ``magnitude_gradient`` comes from :class:`~tiltwell.physics.fields.CoilSet` (central
    differences, step 1e-5 radius) phase by phase. One evaluation costs P x ``active``
    coils' worth of loops.

    Examples
    --------
    >>> import tiltwell
    >>> row = tiltwell.CoilArray(count=12, pitch=0.005, radius=0.008, turns=50)
    >>> twin = tiltwell.PhaseAveragedField(row, 2.0, phases=4)
    >>> bool(twin.magnitude([[0.0, 0.0, 0.0]])[0] < 1e-12), round(twin.axial_gradient, 9)
    (True, 2.0)
    """

    array: CoilArray
    gradient: float
    phases: int = 16
    average: str = "magnitude"

    def __post_init__(self) -> None:
        check_coil_array(self.array)
        if self.array.count < self.array.active + 1:
            raise TiltwellError(
                f"array.count must be >= active + 1 = {self.array.active + 1} for a phase average; "
                f"got {self.array.count}"
            )
        object.__setattr__(self, "gradient", as_scalar(self.gradient, "gradient", "T/m", low=0.0, low_open=True))
        object.__setattr__(self, "phases", as_integer(self.phases, "phases", 1, MAX_PHASES))
        if not isinstance(self.average, str) or self.average not in AVERAGES:
            raise TiltwellError(f"average must be one of {', '.join(map(repr, AVERAGES))}; got {self.average!r}")

    @property
    def reference(self) -> float:
        """z_ref [m]: the plane of coil ``(count - 1) // 2``."""
        return float(self.array.positions[(self.array.count - 1) // 2])

    @functools.cached_property
    def plan(self) -> CurrentPlan:
        """The currents at the P trap positions z_ref + j pitch / P."""
        offsets = self.array.pitch * np.arange(self.phases) / self.phases
        return trap_currents(self.array, self.reference + offsets, self.gradient)

    @property
    def axial_gradient(self) -> float:
        """dB̄_z/dz at the zero [T/m]: the mean of the achieved gradients of the phases."""
        return float(np.mean(self.plan.gradient))

    @functools.cached_property
    def phase_fields(self) -> tuple[CoilSet, ...]:
        """The P phases' coils in the trap frame (zero at the origin): B_j."""
        array, found = self.array, []
        for z_trap, currents in zip(self.plan.positions.tolist(), self.plan.currents):
            found.append(CoilSet(tuple(
                Coil(array.radius, float(array.positions[k]) - z_trap, float(currents[k]), array.turns, array.width,
                     array.height)
                for k in np.flatnonzero(currents).tolist()
            )))
        return tuple(found)

    @functools.cached_property
    def coils(self) -> CoilSet:
        """All phases' coils, each carrying 1 / P of its current: the source of B̄."""
        share = 1.0 / self.phases
        return CoilSet(tuple(dataclasses.replace(coil, current=coil.current * share)
                             for phase in self.phase_fields for coil in phase.coils))

    def field(self, points: ArrayLike) -> FloatArray:
        """B̄ [T], shape (N, 3), at ``points`` [m], shape (N, 3), in the trap frame."""
        return self.coils.field(points)

    def magnitude(self, points: ArrayLike) -> FloatArray:
        """Mean |B_j| or |B̄| [T] (see ``average``), shape (N,), at ``points`` [m], shape (N, 3)."""
        if self.average == "field":
            return self.coils.magnitude(points)
        positions = as_points(points)
        return np.asarray(sum(phase.magnitude(positions) for phase in self.phase_fields) / self.phases)

    def magnitude_gradient(self, points: ArrayLike) -> FloatArray:
        """Gradient [T/m], shape (N, 3), of :meth:`magnitude` at ``points`` [m], shape (N, 3)."""
        if self.average == "field":
            return self.coils.magnitude_gradient(points)
        positions = as_points(points)
        return np.asarray(sum(phase.magnitude_gradient(positions) for phase in self.phase_fields) / self.phases)


@dataclass(frozen=True, eq=False)
class DeviceComparison:
    """The same particles tracked through the rigid twin and through the coil array.

    Attributes
    ----------
    rigid : TrackingResult
        Through :class:`PhaseAveragedField` with :func:`tiltwell.track` (trap frame).
    device : TrackingResult
        Through the coils' moving field with :func:`tiltwell.track_device` (``final`` in
        the trap frame), recorded at the same ``times``.
    schedule : Schedule or UniformMotion
        The trap's motion; the particles are released at ``rigid.times[-1]``.
    """

    rigid: TrackingResult
    device: TrackingResult
    schedule: Schedule | UniformMotion

    def __post_init__(self) -> None:
        for name in ("rigid", "device"):
            if not isinstance(getattr(self, name), TrackingResult):
                raise TiltwellError(f"{name} must be a TrackingResult; got {type(getattr(self, name)).__name__}")
        if not isinstance(self.schedule, (Schedule, UniformMotion)):
            raise TiltwellError(f"schedule must be a Schedule or UniformMotion; got {type(self.schedule).__name__}")
        if self.rigid.kept.shape != self.device.kept.shape:
            raise TiltwellError(
                f"device must track the same particles as rigid: {self.rigid.kept.size} particles; "
                f"got {self.device.kept.size}"
            )
        same = self.rigid.times.shape == self.device.times.shape
        if not same or not np.allclose(self.rigid.times, self.device.times, rtol=1e-9, atol=0.0):
            raise TiltwellError(
                f"device times [s] must equal rigid times ({self.rigid.times.size} from 0 to "
                f"{self.rigid.times[-1]:g} s); got {self.device.times.size} up to {self.device.times[-1]:g} s"
            )

    @property
    def release_time(self) -> float:
        """End of the tracking [s], when the particles are released."""
        return float(self.rigid.times[-1])

    @property
    def discordant(self) -> tuple[int, int]:
        """(kept by the rigid trap only, kept by the device only): the discordant pairs."""
        rigid, device = self.rigid.kept, self.device.kept
        return int(np.count_nonzero(rigid & ~device)), int(np.count_nonzero(device & ~rigid))

    @property
    def ripple_loss(self) -> float:
        """Kept fraction of the rigid twin minus that of the device (> 0: the ripple loses)."""
        return self.rigid.fraction - self.device.fraction

    @property
    def ripple_loss_error(self) -> float:
        """Paired standard error of :attr:`ripple_loss`.

        With n particles and the discordant counts n01 (rigid only) and n10 (device only),
        sqrt(n01 + n10 - (n01 - n10)^2 / n) / n: the standard error of a difference of two
        proportions measured on the same sample (the variance behind McNemar's test). The
        particles kept or lost by both runs carry no noise, so this is far below the
        unpaired sqrt(sigma_rigid^2 + sigma_device^2) when the two runs mostly agree.
        """
        only_rigid, only_device = self.discordant
        n = self.rigid.kept.size
        return math.sqrt(max(only_rigid + only_device - (only_rigid - only_device) ** 2 / n, 0.0)) / n

    def survival_difference(self) -> tuple[FloatArray, FloatArray, FloatArray]:
        """Rigid minus device survival at each recorded time, with its paired standard error.

        Returns
        -------
        times : ndarray, shape (K,)
            [s], as in ``rigid.times``.
        difference : ndarray, shape (K,)
            ``rigid.survival - device.survival``; the last entry is :attr:`ripple_loss`.
        error : ndarray, shape (K,)
            Paired standard error (see :attr:`ripple_loss_error`) from the particles still
            inside at each time.
        """
        times, n = self.rigid.times, self.rigid.kept.size
        limit = times * (1.0 + 1e-12)  # lost by t: lost_time <= t (both runs take their times from one step)

        def gone(lost: FloatArray) -> NDArray[np.int64]:
            return np.searchsorted(np.sort(lost), limit, side="right")

        both = gone(np.maximum(self.rigid.lost_time, self.device.lost_time))
        only_rigid = gone(self.device.lost_time) - both  # inside the rigid twin, lost by the device
        only_device = gone(self.rigid.lost_time) - both
        spread = only_rigid + only_device - (only_rigid - only_device) ** 2 / n
        return times.copy(), self.rigid.survival - self.device.survival, np.sqrt(np.maximum(spread, 0.0)) / n

    def arrival_times(self, distance: float) -> tuple[FloatArray, FloatArray]:
        """Time of flight [s] from switch-on to a detector plane, for each run's kept particles.

        Parameters
        ----------
        distance : float
            Detector plane [m] downstream of the trap centre at release, > 0 and beyond
            every kept particle.

        Returns
        -------
        rigid, device : ndarray, shapes (kept by each,)
            t = T + (distance - z) / (v_z + v_trap(T)), T the release time, z and v_z from
            ``final`` (trap frame): free flight, no forces after release, transverse motion
            and apertures ignored; ``inf`` where the lab speed is <= 0.
        """
        plane = as_scalar(distance, "distance", "m", low=0.0, low_open=True)
        release = self.release_time
        speed = float(self.schedule.velocity(release))
        rigid, device = (release + _free_flight(result.final[result.kept], speed, plane)
                         for result in (self.rigid, self.device))
        return rigid, device

    def _repr_html_(self) -> str:
        rows = [
            ("particles", f"{self.rigid.kept.size}"),
            ("kept, rigid twin", f"{self.rigid.fraction:.4g} ± {self.rigid.binomial_error:.2g}"),
            ("kept, coil array", f"{self.device.fraction:.4g} ± {self.device.binomial_error:.2g}"),
            ("ripple loss", f"{self.ripple_loss:.3g} ± {self.ripple_loss_error:.2g} (paired)"),
            ("kept by one run only", "rigid {0}, device {1}".format(*self.discordant)),
            ("duration, step", f"{self.release_time * 1e3:.4g} ms, {self.rigid.time_step * 1e6:.4g} µs"),
        ]
        return html_table("Coil array against its rigid twin", rows)


def compare_device(
    array: CoilArray,
    species: Species,
    particles: ArrayLike,
    *,
    schedule: Schedule | UniformMotion,
    gradient: float,
    time_step: float,
    box_half_widths: tuple[float, float, float],
    duration: float | None = None,
    plan_times: ArrayLike | None = None,
    phases: int = 16,
    average: str = "magnitude",
    twin: FieldSource | None = None,
    field_map_shape: tuple[int, int, int] = (41, 41, 41),
    record_every: int = 1,
    progress: bool = False,
) -> DeviceComparison:
    """Track the same particles through the rigid twin and through the coil array.

    Parameters
    ----------
    array : CoilArray
        At least ``active + 1`` coils; the trap must stay on the row for the whole run.
    species : Species
    particles : array_like, shape (N, 6)
        (x, y, z, vx, vy, vz) [m, m/s] in the trap frame at t = 0, as for
        :func:`tiltwell.track`; the device run starts them at z + z_trap(0), vz + v_trap(0).
    schedule : Schedule or UniformMotion
        The trap's motion; the rigid run feels its deceleration (zero after
        ``schedule.duration``, and for uniform motion).
    gradient : float
        Wanted axial gradient at the zero [T/m], > 0.
    time_step : float
        Largest step [s] of both runs (see :func:`tiltwell.track`).
    box_half_widths : (float, float, float)
        (hx, hy, hz) [m] of the box around the trap centre, hypot(hx, hy) < the bore
        (radius - width / 2); reaching its walls loses a particle in both runs.
    duration : float, optional
        Tracking time [s], > 0. Default: ``schedule.duration`` (required for uniform motion).
    plan_times : array_like, optional
        As for :func:`tiltwell.track_device` (only the device run uses planned currents).
    phases : int, default 16
        Phases averaged by :class:`PhaseAveragedField`, >= 1.
    average : {"magnitude", "field"}, default "magnitude"
        What the rigid twin averages (see :class:`PhaseAveragedField`).
    twin : field source, optional
        The rigid run's source (trap frame, zero at the origin), from which its field map
        is built. Default: ``PhaseAveragedField(array, gradient, phases, average)`` itself,
        P x ``active`` coils of elliptic integrals per node of the map. A tabulated copy of
        the same average (e.g. :class:`tiltwell.workflows.fieldtable.AxisymmetricTable` of
        the row's phases, which ``tiltwell coils --track`` passes) builds the map at a
        look-up's cost, to the table's accuracy.
    field_map_shape : (int, int, int), default (41, 41, 41)
        Grid of the rigid run's :class:`~tiltwell.dynamics.tracking.FieldMap` over the box.
    record_every : int, default 1
        Steps between recorded survival values, >= 1 (the end is always recorded).
    progress : bool, default False
        Progress bars (tqdm) for both runs.

    Returns
    -------
    DeviceComparison

    Notes
    -----
    Both runs use velocity Verlet with the same step. The rigid run interpolates the force
    on the field map (second order in its grid step, see
    :class:`~tiltwell.dynamics.tracking.FieldMap`), the device run on its per-coil table; the
    difference of the two runs also holds these interpolation errors, which a finer
    ``field_map_shape`` reduces.
    """
    state, halves = check_device_run(array, species, schedule, particles, box_half_widths)
    if duration is None:
        if not isinstance(schedule, Schedule):
            raise TiltwellError("duration [s] must be given for a UniformMotion schedule; got None")
        duration = schedule.duration
    total = as_scalar(duration, "duration", "s", low=0.0, low_open=True)
    as_scalar(time_step, "time_step", "s", low=0.0, low_open=True, high=total)
    every = as_integer(record_every, "record_every", 1)
    ends = schedule.position(np.array([0.0, total]))
    low, high = float(array.positions[0]), float(array.positions[-1])
    if ends[0] < low or ends[1] > high:
        raise TiltwellError(
            f"duration [s] must keep the trap on the coil row [{low:g}, {high:g}] m; got {total!r} s, "
            f"which moves it over [{ends[0]:g}, {ends[1]:g}] m"
        )
    reference = PhaseAveragedField(array, gradient, phases, average)
    if twin is not None and not (callable(getattr(twin, "magnitude", None))
                                 and callable(getattr(twin, "magnitude_gradient", None))):
        raise TiltwellError(f"twin must be a field source with magnitude and magnitude_gradient, or None; "
                            f"got {type(twin).__name__}")
    trap = Trap(reference if twin is None else twin, species, tuple((-h, h) for h in halves.tolist()))
    field_map = FieldMap.from_trap(trap, field_map_shape)
    rigid = track(trap, state, total, time_step, deceleration=_deceleration(schedule, total),
                  field_map=field_map, record_every=every, progress=progress)

    start = np.array([0.0, 0.0, float(schedule.position(0.0)), 0.0, 0.0, float(schedule.velocity(0.0))])
    device = track_device(array, plan_times, species, state + start, schedule=schedule, gradient=reference.gradient,
                          time_step=time_step, duration=total, box_half_widths=(halves[0], halves[1], halves[2]),
                          record_every=every, progress=progress)
    return DeviceComparison(rigid, device, schedule)


def _deceleration(schedule: Schedule | UniformMotion, duration: float) -> float | Callable[[float], float]:
    """The trap's deceleration [m/s^2]: a constant while the whole run decelerates, else a
    step down to 0 at the schedule's end (the trap coasts on at its final speed)."""
    if isinstance(schedule, UniformMotion):
        return 0.0
    value, end = schedule.deceleration, schedule.duration
    return value if duration <= end else (lambda t: value if t <= end else 0.0)
