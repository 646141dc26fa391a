"""Deceleration schedule, coil timing, hardware estimates and time of flight.

A constant-deceleration :class:`Schedule` moves the trap centre from z = 0 at t = 0 with
speed ``v0`` to ``vf``; :func:`coil_timing` turns it into switching windows for a row of
overlapping coils (:mod:`tiltwell.physics.hardware` sizes one coil's pulse); :func:`arrival_times`
follows released particles to a detector plane. SI units throughout; the two ``*_csv``
methods are the only file output (in :func:`tiltwell._base.files.write_table`'s layout).
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.display import html_table
from .._base.validation import TiltwellError, as_finite_array, as_integer, as_scalar
from .._base.files import write_table
from ..physics.hardware import ELECTRICAL_CAUTION

__all__ = [
    "CoilTiming",
    "Schedule",
    "arrival_histogram",
    "arrival_times",
    "coil_timing",
    "constant_deceleration",
]

FloatArray = NDArray[np.float64]

#: Most coils a timing table holds (a guard against a pitch or deceleration typed wrong).
MAX_COILS = 100_000

#: Relative slack for positions that overshoot the schedule's length by rounding.
_ROUNDING = 1e-12


def _times(t: ArrayLike, name: str = "t") -> FloatArray:
    times = as_finite_array(t, name, "s")
    if np.any(times < 0.0):
        raise TiltwellError(f"{name} [s] must be >= 0 (the schedule starts at t = 0); got min {float(times.min())!r}")
    return times


@dataclass(frozen=True)
class Schedule:
    """Constant deceleration of the trap centre from ``initial_velocity`` to ``final_velocity``.

    Parameters
    ----------
    initial_velocity : float
        ``v0`` [m/s], > 0; the trap centre is at z = 0 at t = 0.
    final_velocity : float
        ``vf`` [m/s], 0 <= vf < v0.
    deceleration : float
        ``a`` [m/s^2], > 0 slows the trap down.

    Notes
    -----
    For 0 <= t <= duration, z = v0 t - a t^2 / 2 and v = v0 - a t. After the duration the
    trap moves on at ``vf`` (z = length + vf (t - duration)); with vf = 0 it rests at
    ``length``. Times before 0 are errors.
    """

    initial_velocity: float
    final_velocity: float
    deceleration: float

    def __post_init__(self) -> None:
        v0 = as_scalar(self.initial_velocity, "initial_velocity", "m/s", low=0.0, low_open=True)
        vf = as_scalar(self.final_velocity, "final_velocity", "m/s", low=0.0, high=v0, high_open=True)
        a = as_scalar(self.deceleration, "deceleration", "m/s^2", low=0.0, low_open=True)
        object.__setattr__(self, "initial_velocity", v0)
        object.__setattr__(self, "final_velocity", vf)
        object.__setattr__(self, "deceleration", a)

    @property
    def duration(self) -> float:
        """(v0 - vf) / a [s]."""
        return (self.initial_velocity - self.final_velocity) / self.deceleration

    @property
    def length(self) -> float:
        """(v0^2 - vf^2) / (2 a) [m], the distance covered while decelerating."""
        v0, vf = self.initial_velocity, self.final_velocity
        return (v0 - vf) * (v0 + vf) / (2.0 * self.deceleration)

    def velocity(self, t: ArrayLike) -> FloatArray:
        """Trap speed [m/s] at times ``t`` [s] >= 0 (any shape; the result has that shape)."""
        times = _times(t)
        return self.initial_velocity - self.deceleration * np.minimum(times, self.duration)

    def position(self, t: ArrayLike) -> FloatArray:
        """Trap-centre position z [m] at times ``t`` [s] >= 0 (any shape)."""
        times = _times(t)
        during = np.minimum(times, self.duration)
        after = np.maximum(times - self.duration, 0.0)
        return during * (self.initial_velocity - 0.5 * self.deceleration * during) + self.final_velocity * after

    def time_at(self, z: ArrayLike) -> FloatArray:
        """Time [s] at which the trap centre passes ``z`` [m], 0 <= z <= length (any shape).

        t = (v0 - sqrt(v0^2 - 2 a z)) / a, evaluated as 2 z / (v0 + sqrt(v0^2 - 2 a z)) to
        avoid cancellation.
        """
        positions = as_finite_array(z, "z", "m")
        length = self.length
        if np.any(positions < 0.0) or np.any(positions > length * (1.0 + _ROUNDING)):
            raise TiltwellError(
                f"z [m] must be in [0, {length:g}] (the schedule's length); "
                f"got values in [{float(positions.min())!r}, {float(positions.max())!r}]"
            )
        positions = np.minimum(positions, length)
        v0, a = self.initial_velocity, self.deceleration
        root = np.sqrt(np.maximum(v0 * v0 - 2.0 * a * positions, 0.0))
        return 2.0 * positions / (v0 + root)

    def _repr_html_(self) -> str:
        rows = [
            ("initial velocity", f"{self.initial_velocity:.4g} m/s"),
            ("final velocity", f"{self.final_velocity:.4g} m/s"),
            ("deceleration", f"{self.deceleration:.4g} m/s²"),
            ("duration", f"{self.duration * 1e3:.4g} ms"),
            ("length", f"{self.length:.4g} m"),
        ]
        return html_table("Deceleration schedule", rows)


def constant_deceleration(
    initial_velocity: float,
    final_velocity: float,
    *,
    deceleration: float | None = None,
    length: float | None = None,
) -> Schedule:
    """A :class:`Schedule` from its deceleration [m/s^2] or its length [m] (exactly one).

    Given the length L, a = (v0^2 - vf^2) / (2 L).

    >>> constant_deceleration(400.0, 0.0, length=0.5).deceleration
    160000.0
    """
    if (deceleration is None) == (length is None):
        raise TiltwellError(
            "give exactly one of deceleration [m/s^2] and length [m]; "
            f"got deceleration={deceleration!r}, length={length!r}"
        )
    if deceleration is None:
        v0 = as_scalar(initial_velocity, "initial_velocity", "m/s", low=0.0, low_open=True)
        vf = as_scalar(final_velocity, "final_velocity", "m/s", low=0.0, high=v0, high_open=True)
        distance = as_scalar(length, "length", "m", low=0.0, low_open=True)
        deceleration = (v0 - vf) * (v0 + vf) / (2.0 * distance)
    return Schedule(initial_velocity, final_velocity, deceleration)


@dataclass(frozen=True, eq=False)
class CoilTiming:
    """Switching windows of the coils a schedule passes, with a trapezoidal current envelope.

    Attributes
    ----------
    positions : ndarray, shape (K,)
        Coil centres z_k [m].
    passing_times : ndarray, shape (K,)
        When the trap centre passes each coil centre [s].
    on_times, off_times : ndarray, shape (K,)
        Start of the current rise and end of the fall [s].
    peak_current : float
        Flat-top current [A].
    rise_time : float
        Duration of each linear ramp [s], in [0, 1]; 0 gives rectangular pulses. The ramps
        lie inside the window; a window shorter than 2 ``rise_time`` (an end coil whose
        window the schedule cuts short) gives a triangle peaking below ``peak_current``.

    Notes
    -----
    These are envelopes |I(t)| of each coil. The sign pattern that makes neighbouring coils
    form a quadrupole belongs to the coil array, not to this table.
    """

    positions: FloatArray
    passing_times: FloatArray
    on_times: FloatArray
    off_times: FloatArray
    peak_current: float
    rise_time: float

    def __post_init__(self) -> None:
        for name in ("positions", "passing_times", "on_times", "off_times"):
            array = as_finite_array(getattr(self, name), name, "m" if name == "positions" else "s", ndim=1).copy()
            if array.shape != np.shape(self.positions):
                raise TiltwellError(f"{name} must have shape {np.shape(self.positions)}; got {array.shape}")
            array.setflags(write=False)
            object.__setattr__(self, name, array)
        object.__setattr__(self, "peak_current", as_scalar(self.peak_current, "peak_current", "A", low=0.0, low_open=True))
        shortest = float(np.min(self.off_times - self.on_times, initial=math.inf))
        if shortest <= 0.0:
            raise TiltwellError(f"off_times [s] must be later than on_times; shortest window {shortest!r} s")
        object.__setattr__(self, "rise_time", as_scalar(self.rise_time, "rise_time", "s", low=0.0, high=1.0))

    @property
    def pulse_durations(self) -> FloatArray:
        """off_times - on_times [s], shape (K,)."""
        return self.off_times - self.on_times

    def current(self, t: ArrayLike) -> FloatArray:
        """Current envelope |I| [A], shape (K, T), of every coil at times ``t`` [s], shape (T,).

        Zero outside [on, off], linear ramps of ``rise_time`` at both ends, flat top
        ``peak_current`` between; with ``rise_time`` = 0 the pulse is rectangular (closed
        at both ends).
        """
        times = as_finite_array(t, "t", "s", ndim=1)[None, :]
        on, off = self.on_times[:, None], self.off_times[:, None]
        if self.rise_time == 0.0:
            return np.where((times >= on) & (times <= off), self.peak_current, 0.0)
        ramp = np.minimum(times - on, off - times) / self.rise_time
        return self.peak_current * np.clip(ramp, 0.0, 1.0)

    def to_csv(self, path: str | os.PathLike[str]) -> None:
        """Write one row per coil to ``path``, atomically, in tiltwell's table layout
        (:func:`tiltwell._base.files.table_text`): three ``#`` lines (title, units, the
        electrical caution), the header row, the rows.

        Columns: ``index [1]``, ``position [m]``, ``passing_time [s]``, ``on_time [s]``,
        ``off_time [s]``, ``peak_current [A]``, ``rise_time [s]``. Read it back with
        ``numpy.genfromtxt(path, delimiter=",", skip_header=3, names=True)`` (named columns
        ``position_m``, ...) or ``numpy.loadtxt(path, delimiter=",", skiprows=4)``.
        """
        columns = [("index", "1"), ("position", "m"), ("passing_time", "s"), ("on_time", "s"), ("off_time", "s"),
                   ("peak_current", "A"), ("rise_time", "s")]
        rows = (
            (k, z, tp, ton, toff, self.peak_current, self.rise_time)
            for k, (z, tp, ton, toff) in enumerate(zip(self.positions, self.passing_times, self.on_times, self.off_times))
        )
        write_table(path, "tiltwell coil timing: one row per coil; envelopes |I|, polarity not included", columns,
                    rows, caution=ELECTRICAL_CAUTION)

    def waveform_csv(self, path: str | os.PathLike[str], times: ArrayLike) -> None:
        """Write ``times`` [s], shape (T,), and each coil's envelope [A] as columns, atomically,
        in the layout of :meth:`to_csv`: columns ``time [s]``, ``coil_0 [A]``, ``coil_1 [A]``, ...
        (one per coil); ``numpy.loadtxt(path, delimiter=",", skiprows=4)`` reads it."""
        t = as_finite_array(times, "times", "s", ndim=1)
        currents = self.current(t)
        columns = [("time", "s"), *((f"coil_{k}", "A") for k in range(currents.shape[0]))]
        rows = ((t[j], *currents[:, j]) for j in range(t.size))
        write_table(path, "tiltwell coil current envelopes |I|; polarity not included", columns, rows,
                    caution=ELECTRICAL_CAUTION)

    def _repr_html_(self) -> str:
        rows = [
            ("coils", str(self.positions.size)),
            ("peak current", f"{self.peak_current:.4g} A"),
            ("rise time", f"{self.rise_time * 1e6:.4g} µs"),
            ("longest pulse", f"{float(np.max(self.pulse_durations)) * 1e3:.4g} ms"),
            ("caution", ELECTRICAL_CAUTION),
        ]
        return html_table("Coil timing", rows)


def coil_timing(
    schedule: Schedule,
    pitch: float,
    *,
    first_coil: float | None = None,
    count: int | None = None,
    window: float = 1.0,
    rise_time: float = 0.0,
    peak_current: float,
) -> CoilTiming:
    """Switching windows of coils at z_k = first_coil + k pitch.

    Coil k is on while the trap centre is within ``window * pitch`` of z_k, so with
    ``window`` = 1 neighbouring coils overlap. Windows are clipped to the schedule: a coil
    near the start is on from t = 0, one near the end until t = duration (holding or
    releasing the trap afterwards is up to the experiment's sequence).

    Parameters
    ----------
    schedule : Schedule
    pitch : float
        Coil spacing [m], > 0.
    first_coil : float, optional
        Centre of coil 0 [m]; default ``pitch / 2``. Without ``count`` it must lie in
        [0, length].
    count : int, optional
        Number of coils, >= 1. Default: every coil k with z_k in [0, length]. With a
        count, a coil may lie outside [0, length] (a coil row's end coils, see
        :func:`tiltwell.coils.array.row_layout`) as long as its window reaches into it;
        the trap "passes" a coil before the start at t = 0 and one beyond the end at the
        duration.
    window : float
        Half-width of the on-window in units of ``pitch``, > 0.
    rise_time : float
        Linear ramp time [s], 0 <= 2 rise_time <= the shortest window that the schedule does
        not cut short (the windows of end coils clipped at t = 0 or at the duration may be
        shorter: their pulses are triangles, see :class:`CoilTiming`).
    peak_current : float
        Flat-top current [A], > 0.
    """
    if not isinstance(schedule, Schedule):
        raise TiltwellError(f"schedule must be a Schedule; got {type(schedule).__name__}")
    length = schedule.length
    spacing = as_scalar(pitch, "pitch", "m", low=0.0, low_open=True)
    half = as_scalar(window, "window", "pitch", low=0.0, low_open=True) * spacing
    if count is None:
        start = spacing / 2.0 if first_coil is None else as_scalar(first_coil, "first_coil", "m", low=0.0, high=length)
        number = math.floor((length * (1.0 + _ROUNDING) - start) / spacing) + 1
    else:
        start = spacing / 2.0 if first_coil is None else as_scalar(first_coil, "first_coil", "m")
        number = as_integer(count, "count", 1)
    if number < 1:
        raise TiltwellError(f"pitch [m] puts no coil inside [0, {length:g}] m; got pitch={spacing!r}, first coil at {start!r} m")
    if number > MAX_COILS:
        raise TiltwellError(
            f"pitch [m] gives {number} coils over {length:g} m, more than {MAX_COILS}; got pitch={spacing!r}"
        )
    positions = np.asarray(start + spacing * np.arange(number), dtype=np.float64)
    if count is None:
        positions = np.minimum(positions, length)  # only rounding can push the last one past
    low = np.clip(positions - half, 0.0, length)
    high = np.clip(positions + half, 0.0, length)
    if np.any(high <= low):
        k = int(np.argmax(high <= low))
        raise TiltwellError(f"count: coil {k} at {positions[k]!r} m has no window inside [0, {length:g}] m "
                            f"(window +- {half:g} m); got count={count!r}, first_coil={start!r}")
    on, off = schedule.time_at(low), schedule.time_at(high)
    whole = (positions - half >= 0.0) & (positions + half <= length)
    shortest = float(np.min((off - on)[whole] if np.any(whole) else off - on))
    rise = as_scalar(rise_time, "rise_time", "s", low=0.0, high=0.5 * shortest)
    amps = as_scalar(peak_current, "peak_current", "A", low=0.0, low_open=True)
    return CoilTiming(positions, schedule.time_at(np.clip(positions, 0.0, length)), on, off, amps, rise)


def arrival_times(final: ArrayLike, release_velocity: float, distance: float) -> FloatArray:
    """Free-flight arrival times [s], shape (N,), at a plane ``distance`` [m] downstream.

    Parameters
    ----------
    final : array_like, shape (N, 6)
        (x, y, z, vx, vy, vz) [m, m/s] relative to the trap centre at release.
    release_velocity : float
        Trap speed at release [m/s], >= 0; a particle's lab speed is release_velocity + vz.
    distance : float
        Detector plane [m] downstream of the trap centre at release; no particle may lie
        beyond it.

    Returns
    -------
    ndarray, shape (N,)
        t = (distance - z) / v_lab from release; ``inf`` where v_lab <= 0 (never arrives).
        No forces act after release; transverse motion and apertures are ignored.
    """
    points = as_finite_array(final, "final", "m, m/s", ndim=2)
    if points.shape[1] != 6:
        raise TiltwellError(f"final [m, m/s] must have shape (N, 6); got shape {points.shape}")
    speed = as_scalar(release_velocity, "release_velocity", "m/s", low=0.0)
    plane = as_scalar(distance, "distance", "m", low=0.0, low_open=True)
    z, lab = points[:, 2], speed + points[:, 5]
    if np.any(z > plane):
        raise TiltwellError(f"distance [m] must be >= every particle's z; got {plane!r} with max z {float(z.max())!r}")
    moving = lab > 0.0
    return np.divide(plane - z, lab, out=np.full(z.shape, np.inf), where=moving)


def arrival_histogram(times: ArrayLike, bins: int | ArrayLike = 50) -> tuple[NDArray[np.int64], FloatArray]:
    """Counts and bin edges [s] of the finite arrival ``times`` [s], shape (N,).

    ``bins`` is a number of equal bins over the finite times or increasing edges [s].
    Particles that never arrive (``inf``) are left out; the counts sum to the number that do.
    """
    values = np.asarray(times, dtype=np.float64)
    if values.ndim != 1 or np.any(np.isnan(values)) or np.any(values == -np.inf):
        raise TiltwellError(f"times [s] must be a 1-D array without NaN or -inf; got shape {values.shape}")
    arrived = values[np.isfinite(values)]
    if isinstance(bins, (int, np.integer)) and not isinstance(bins, bool):
        if bins < 1:
            raise TiltwellError(f"bins must be an integer >= 1 or increasing edges [s]; got {bins!r}")
        counts, edges = np.histogram(arrived, bins=int(bins))
    else:
        edges_in = as_finite_array(bins, "bins", "s", ndim=1)
        if edges_in.size < 2 or np.any(np.diff(edges_in) <= 0):
            raise TiltwellError(f"bins [s] as edges must be >= 2 strictly increasing values; got {edges_in.size} value(s)")
        counts, edges = np.histogram(arrived, bins=edges_in)
    return counts.astype(np.int64), edges.astype(np.float64)
