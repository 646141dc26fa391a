"""A row of overlapping coils whose currents hand a field zero along the beam axis.

A moving trap is made by a row of equal coaxial coils at a fixed pitch. At each trap
position the ``active`` coils nearest to it carry currents chosen so that on the axis
``B_z(z_trap) = 0`` and ``dB_z/dz(z_trap) = G`` (the wanted axial gradient), with the least
sum of squared currents, weighted so that each coil is handed over smoothly. Moving
``z_trap`` along a :class:`tiltwell.coils.schedule.Schedule` gives the current waveforms of every
coil.

- :class:`CoilArray`: the geometry and the per-coil current limit;
- :func:`on_axis_response`: on-axis field and slope of every coil per ampere (closed form);
- :func:`trap_currents` / :func:`waveforms`: the currents, as a :class:`CurrentPlan`;
- :func:`tiltwell.coils.moving.moving_trap_phases`: depth and acceptances as the zero crosses one pitch.

SI units throughout (m, A, T, T/m, s). Output that sizes coil currents carries
:data:`tiltwell.physics.hardware.ELECTRICAL_CAUTION`.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.files import write_table
from .._base.validation import MAX_GRADIENT, TiltwellError, as_finite_array, as_integer, as_scalar
from ..physics.constants import VACUUM_PERMEABILITY
from ..physics.fields import Coil, CoilSet
from ..physics.hardware import ELECTRICAL_CAUTION
from .schedule import Schedule

__all__ = [
    "MAX_ACTIVE",
    "MAX_PHASES",
    "CoilArray",
    "CurrentPlan",
    "check_coil_array",
    "check_on_row",
    "local_currents",
    "on_axis_response",
    "row_layout",
    "trap_currents",
    "waveforms",
]

FloatArray = NDArray[np.float64]


#: Most coils carrying current at once, and most trap positions across one pitch: each
#: phase is a field table and an acceptance of the row (about 0.05 s on the demo's six
#: active coils, measured), so 64 x 64 is already minutes; the ranges keep a request runnable.
MAX_ACTIVE = 64
MAX_PHASES = 64


@dataclass(frozen=True)
class CoilArray:
    """A row of ``count`` equal coaxial coils at z_k = ``first`` + k ``pitch``.

    Parameters
    ----------
    count : int
        Number of coils, >= 2 and >= ``active``.
    pitch : float
        Coil spacing [m], > 0.
    radius : float
        Mean winding radius [m], > 0 and > ``width / 2``.
    first : float, default 0.0
        Axial position of coil 0 [m].
    turns : int, default 1
        Turns per coil.
    width, height : float, default 0.0
        Radial and axial extent of each winding [m], >= 0.
    max_current : float, default inf
        Peak current per turn allowed in any coil [A], > 0.
    active : int, default 4
        How many coils nearest to the trap may carry current at each position: even, >= 2.
    handover : float, default 0.5
        Distance over which a coil entering or leaving the window of ``active`` coils is
        weighted in or out, in pitches, in [0, active / 2]; 0 hands over abruptly (the
        currents jump). Ignored for ``active = 2``, where two coils have no freedom. See
        :func:`trap_currents`.
    """

    count: int
    pitch: float
    radius: float
    first: float = 0.0
    turns: int = 1
    width: float = 0.0
    height: float = 0.0
    max_current: float = math.inf
    active: int = 4
    handover: float = 0.5

    def __post_init__(self) -> None:
        count = as_integer(self.count, "count", 2)
        active = as_integer(self.active, "active", 2, min(count, MAX_ACTIVE))
        if active % 2:
            raise TiltwellError(f"active must be an even integer in [2, {min(count, MAX_ACTIVE)}]; got {active!r}")
        limit = self.max_current
        if limit != math.inf:
            limit = as_scalar(limit, "max_current", "A", low=0.0, low_open=True)
        checked = {
            "count": count,
            "pitch": as_scalar(self.pitch, "pitch", "m", low=0.0, low_open=True),
            "first": as_scalar(self.first, "first", "m"),
            "turns": as_integer(self.turns, "turns", 1),
            "max_current": limit,
            "active": active,
            "handover": as_scalar(self.handover, "handover", "pitches", low=0.0, high=0.5 * active),
        }
        for name, value in checked.items():
            object.__setattr__(self, name, value)
        # radius, width and height are checked by Coil, whose messages name them.
        probe = Coil(self.radius, 0.0, 1.0, self.turns, self.width, self.height)
        for name in ("radius", "width", "height"):
            object.__setattr__(self, name, getattr(probe, name))

    @property
    def positions(self) -> FloatArray:
        """Coil mid-planes z_k [m], shape (count,)."""
        return np.asarray(self.first + self.pitch * np.arange(self.count), dtype=np.float64)

    def coil(self, k: int, current: float) -> Coil:
        """Coil ``k`` (0 <= k < count) carrying ``current`` [A] per turn."""
        index = as_integer(k, "k", 0, self.count - 1)
        return Coil(self.radius, float(self.positions[index]), current, self.turns, self.width, self.height)

    def field_set(self, currents: ArrayLike) -> CoilSet:
        """The coils that carry current, as a :class:`CoilSet`.

        Parameters
        ----------
        currents : array_like, shape (count,)
            Current per turn of each coil [A]; coils with zero current are left out.
        """
        values = as_finite_array(currents, "currents", "A", ndim=1)
        if values.shape != (self.count,):
            raise TiltwellError(f"currents [A] must have shape ({self.count},); got shape {values.shape}")
        carrying = np.flatnonzero(values)
        if carrying.size == 0:
            raise TiltwellError("currents [A] must have at least one nonzero value; got all zeros")
        return CoilSet(tuple(self.coil(int(k), float(values[k])) for k in carrying))


def row_layout(length: float, pitch: float, active: int, handover: float) -> tuple[int, float]:
    """Count and first position [m] of the coils that a trap zero moving from z = 0 to
    ``length`` [m] energises, on a row of ``pitch`` [m] with ``active`` coils carrying
    current and a ``handover`` [pitches] (see :class:`CoilArray`).

    Returns ``(count, first)``: coil k at z_k = first + k pitch with first = -(active/2 - 1)
    pitch. On such a row the window of :func:`trap_currents` at z_trap in [0, length] is
    coils floor(z_trap / pitch) ... + active - 1, so coil k carries current exactly while
    |z_trap - z_k| < D = (active / 2) pitch, both for an abrupt and a tapered hand-over
    (a window coil at distance D has weight 0). The count is the number of coils with
    z_k in (-D, length + D): floor(length / pitch) + active, less one when the hand-over is
    tapered (``handover > 0`` and ``active > 2``) and length / pitch is a whole number n,
    where the coil at length + D would be reached only with weight 0. Every coil of the
    row carries current at some point, none further out ever would.

    >>> row_layout(0.05, 0.01, 4, 0.5)
    (8, -0.01)
    >>> row_layout(0.055, 0.01, 4, 0.5)
    (9, -0.01)
    """
    spacing = as_scalar(pitch, "pitch", "m", low=0.0, low_open=True)
    distance = as_scalar(length, "length", "m", low=0.0, low_open=True)
    count = as_integer(active, "active", 2, MAX_ACTIVE, even=True)
    weighted = as_scalar(handover, "handover", "pitches", low=0.0) > 0.0 and count > 2
    steps = distance / spacing
    whole = math.floor(steps * (1.0 + 1e-12))
    exact = abs(steps - round(steps)) <= 1e-9 * max(steps, 1.0)
    return whole + count - (1 if weighted and exact else 0), -(count // 2 - 1) * spacing


def on_axis_response(array: CoilArray, z: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """On-axis field and its slope per ampere of every coil of ``array``.

    Parameters
    ----------
    array : CoilArray
    z : array_like, shape (M,)
        Positions on the axis [m].

    Returns
    -------
    b : ndarray, shape (count, M)
        B_z [T/A] of each coil carrying 1 A per turn.
    db : ndarray, shape (count, M)
        dB_z/dz [T/(A m)].

    Notes
    -----
    Each winding is the sum of its filaments (:meth:`Coil.loops`), each a thin loop with the
    textbook on-axis field B_z = mu0 I a^2 / (2 (a^2 + d^2)^(3/2)), d = z - z_loop (e.g.
    Jackson, Classical Electrodynamics, 3rd ed., section 5.5, from memory), whose slope is
    dB_z/dz = -3 mu0 I a^2 d / (2 (a^2 + d^2)^(5/2)).
    """
    check_coil_array(array)
    points = as_finite_array(z, "z", "m", ndim=1)
    radii, offsets, weights = Coil(array.radius, 0.0, 1.0, array.turns, array.width, array.height).loops()
    planes = array.positions[:, None] + offsets[None, :]  # (N, F) filament planes
    d = points[None, None, :] - planes[:, :, None]  # (N, F, M)
    a2 = (radii**2)[None, :, None]
    scale = (0.5 * VACUUM_PERMEABILITY * weights * radii**2)[None, :, None]
    inverse = 1.0 / (a2 + d * d)
    b = scale * inverse**1.5
    db = -3.0 * d * b * inverse
    return b.sum(axis=1), db.sum(axis=1)


@dataclass(frozen=True, eq=False)
class CurrentPlan:
    """Coil currents that put the field zero at each trap position.

    Attributes
    ----------
    positions : ndarray, shape (M,)
        Trap positions z_trap [m].
    currents : ndarray, shape (M, count)
        Current per turn of each coil [A] (zero for coils not active there).
    gradient : ndarray, shape (M,)
        Achieved on-axis gradient dB_z/dz at z_trap [T/m].
    limited : ndarray of bool, shape (M,)
        Where the current limit scaled the currents (and the gradient) down.
    """

    positions: FloatArray
    currents: FloatArray
    gradient: FloatArray
    limited: NDArray[np.bool_]

    def to_csv(self, path: str | os.PathLike[str], times: ArrayLike, positions: ArrayLike | None = None) -> None:
        """Write the waveforms to ``path`` as CSV, atomically (the old file survives errors).

        Parameters
        ----------
        path : str or path-like
            Target file, in an existing folder.
        times : array_like, shape (M,)
            Time [s] of each row (one per trap position).
        positions : array_like, shape (count,), optional
            The coil planes z_k [m] (:attr:`CoilArray.positions`), evenly spaced; the title
            line then states them as ``coil k at z = <first> m + k x <pitch> m``.

        Notes
        -----
        tiltwell's table layout (:func:`tiltwell._base.files.table_text`): three lines
        starting with ``#`` (a title, the units, the electrical caution), one header row
        ``time [s],coil_0 [A],coil_1 [A],...`` with a column for every coil of the row
        (k = 0 ... count - 1, the numbering of :class:`CoilArray`), then one comma-separated
        row per time. ``numpy.loadtxt(path, delimiter=",", skiprows=4)`` reads the numbers
        back; ``numpy.genfromtxt(path, delimiter=",", skip_header=3, names=True)`` also
        names the columns (``time_s``, ``coil_<k>_A``).
        """
        t = as_finite_array(times, "times", "s", ndim=1)
        if t.shape != self.positions.shape:
            raise TiltwellError(f"times [s] must have shape {self.positions.shape} (one per position); got shape {t.shape}")
        title = "tiltwell moving-trap coil currents: current per turn of each coil, signed"
        count = self.currents.shape[1]
        if positions is not None:
            planes = as_finite_array(positions, "positions", "m", ndim=1)
            if planes.shape != (count,):
                raise TiltwellError(f"positions [m] must have shape ({count},) (one per coil); got shape {planes.shape}")
            step = float(planes[1] - planes[0]) if count > 1 else 0.0
            title += f"; coil k at z = {float(planes[0])!r} m + k x {step!r} m"
        columns = [("time", "s"), *((f"coil_{k}", "A") for k in range(count))]
        rows = ((t[j], *self.currents[j]) for j in range(t.size))
        write_table(path, title, columns, rows, caution=ELECTRICAL_CAUTION)


def check_coil_array(array: object) -> None:
    """Raise :class:`~tiltwell.TiltwellError` naming ``array`` unless it is a :class:`CoilArray`."""
    if not isinstance(array, CoilArray):
        raise TiltwellError(f"array must be a CoilArray; got {type(array).__name__}")


def check_on_row(array: CoilArray, z: FloatArray, name: str) -> None:
    """Raise unless all trap positions ``z`` [m] (any shape) lie between the first and the last coil.

    ``name`` is the argument named in the message (e.g. ``"z_trap"``)."""
    low, high = float(array.positions[0]), float(array.positions[-1])
    if z.size and (z.min() < low or z.max() > high):
        raise TiltwellError(
            f"{name} [m] must lie in [{low:g}, {high:g}] (the coil row); got values in [{float(z.min())!r}, {float(z.max())!r}]"
        )


def _windows(array: CoilArray, z: FloatArray) -> NDArray[np.int64]:
    """Indices (M, active) of the ``active`` coils around each position: half on each side
    when possible, shifted inwards at the ends of the row."""
    half = array.active // 2
    start = np.floor((z - array.first) / array.pitch).astype(np.int64) - half + 1
    start = np.clip(start, 0, array.count - array.active)
    return start[:, None] + np.arange(array.active)[None, :]


def _taper(array: CoilArray, distance: FloatArray) -> FloatArray:
    """Weight g(d) [1] of a window coil at ``distance`` d [m] from the trap:
    sin^2(pi/2 min(1, (D - d) / w)) for d < D = (active / 2) pitch, else 0, with
    w = handover pitch; all ones when w = 0 or active = 2."""
    if array.active == 2 or array.handover == 0.0:
        return np.ones_like(distance)
    reach = 0.5 * array.active * array.pitch
    ramp = np.clip((reach - distance) / (array.handover * array.pitch), 0.0, 1.0)
    return np.sin(0.5 * np.pi * ramp) ** 2


def local_currents(array: CoilArray, z: FloatArray, target: float
                   ) -> tuple[NDArray[np.int64], FloatArray, FloatArray, NDArray[np.bool_]]:
    """The currents of :func:`trap_currents`, for the active coils only, unchecked.

    Parameters
    ----------
    array : CoilArray
    z : ndarray, shape (M,)
        Trap positions [m], float64 (the caller checks them, e.g. with :func:`check_on_row`;
        positions off the row get the window of the nearest end).
    target : float
        Wanted on-axis gradient at the zero [T/m], > 0.

    Returns
    -------
    coils : ndarray of int, shape (M, active)
        Indices of the active coils at each position.
    currents : ndarray, shape (M, active)
        Their currents per turn [A].
    gradient : ndarray, shape (M,)
        Achieved on-axis gradient [T/m].
    limited : ndarray of bool, shape (M,)
        Where the current limit scaled the currents down.

    Notes
    -----
    Only the active coils' on-axis response is evaluated, so memory grows as M x active,
    not M x count (see :func:`trap_currents` for the solve). Each position is solved on
    its own: splitting ``z`` into pieces gives the same numbers.
    """
    window = _windows(array, z)  # (M, active)
    centres = array.first + array.pitch * window  # (M, active)
    radii, offsets, weights = Coil(array.radius, 0.0, 1.0, array.turns, array.width, array.height).loops()
    d = z[:, None, None] - (centres[:, :, None] + offsets[None, None, :])  # (M, active, F)
    a2 = radii**2
    scale = 0.5 * VACUUM_PERMEABILITY * weights * a2
    inverse = 1.0 / (a2 + d * d)
    b = scale * inverse**1.5
    db = -3.0 * d * b * inverse
    system = np.stack((b.sum(axis=2), db.sum(axis=2)), axis=1)  # (M, 2, active)
    taper = _taper(array, np.abs(centres - z[:, None]))  # (M, active)
    normal = np.einsum("mia,ma,mja->mij", system, taper, system)  # A G A^T, (M, 2, 2)
    right = np.zeros((z.size, 2, 1))
    right[:, 1, 0] = target
    multipliers = np.linalg.solve(normal, right)[:, :, 0] if z.size else np.zeros((0, 2))
    local = taper * np.einsum("mia,mi->ma", system, multipliers)  # G A^T (A G A^T)^-1 (0, G)
    peak = np.max(np.abs(local), axis=1) if z.size else np.zeros(0)
    limited = peak > array.max_current
    with np.errstate(divide="ignore"):
        scale_down = np.where(limited, array.max_current / np.where(limited, peak, 1.0), 1.0)
    local = local * scale_down[:, None]
    achieved = np.einsum("ma,ma->m", system[:, 1, :], local)
    return window, local, achieved, limited


def trap_currents(array: CoilArray, z_trap: ArrayLike, gradient: float) -> CurrentPlan:
    """Minimum-norm currents that put a field zero of axial gradient ``gradient`` at ``z_trap``.

    Parameters
    ----------
    array : CoilArray
    z_trap : array_like, shape (M,)
        Trap positions [m], within [first coil, last coil].
    gradient : float
        Wanted on-axis gradient dB_z/dz at the zero [T/m], > 0.

    Returns
    -------
    CurrentPlan

    Notes
    -----
    With A (2 x active) the on-axis field and slope per ampere of the active coils
    (:func:`on_axis_response`), the currents solve A I = (0, G) with the least weighted
    norm sum_k I_k^2 / g_k: I = G A^T (A G A^T)^-1 (0, G) with G = diag(g) (Lagrange
    multipliers; batched over positions). The weight g_k = 1 for coils well inside the
    window; over the last ``handover`` pitches before the window's edge at
    D = (active / 2) pitch from the trap it falls as sin^2(pi/2 (D - d_k) / w) to 0. A coil
    is thus handed over smoothly: its current falls to zero as it leaves the window instead
    of jumping, so the waveforms are continuous (a current step in a coil would need an
    unbounded L dI/dt). ``handover = 0`` gives the plain minimum norm over the window, whose
    currents jump where the window moves on; so do those of ``active = 2``. Continuity has
    a price: for a row of 8 mm coils at a 5 mm pitch with four active, a half-pitch
    hand-over gave a depth ripple of 0.06 against 0.03 for the abrupt one and an 8 % higher
    peak current (measured in ``tests/test_coilarray.py``). Where the largest |I| exceeds
    ``max_current`` all currents there are scaled down to meet it: the zero stays, the
    gradient falls by the same factor.
    """
    check_coil_array(array)
    z = as_finite_array(z_trap, "z_trap", "m", ndim=1)
    check_on_row(array, z, "z_trap")
    target = as_scalar(gradient, "gradient", "T/m", low=0.0, high=MAX_GRADIENT, low_open=True)
    window, local, achieved, limited = local_currents(array, z, target)
    currents = np.zeros((z.size, array.count))
    np.put_along_axis(currents, window, local, axis=1)
    return CurrentPlan(z, currents, achieved, limited)


def waveforms(array: CoilArray, schedule: Schedule, gradient: float, times: ArrayLike) -> CurrentPlan:
    """Coil currents [A] at ``times`` [s], shape (M,), following ``schedule``.

    The trap position is ``schedule.position(times)`` (z = v0 t - a t^2 / 2 while
    decelerating); see :func:`trap_currents` for ``gradient`` [T/m] and the result.
    """
    if not isinstance(schedule, Schedule):
        raise TiltwellError(f"schedule must be a Schedule; got {type(schedule).__name__}")
    t = as_finite_array(times, "times", "s", ndim=1)
    return trap_currents(array, schedule.position(t), gradient)
