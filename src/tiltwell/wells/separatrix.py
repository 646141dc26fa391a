"""The separatrix of a 1-D potential well: the last closed orbit, and the area inside it.

A particle of mass ``m`` in a potential ``U(z)`` with energy ``E`` moves on the curve
``m v^2 / 2 + U(z) = E`` of the (z, v) plane. The well's separatrix is the orbit at the
escape energy, the lowest energy at which a particle starting at the bottom reaches an end
of the sampled range; the phase-space area inside it is the longitudinal acceptance.

Between samples ``U`` is taken as linear, and the area is the exact integral of that
piecewise-linear potential: on a segment where ``E - U`` goes linearly from ``e0`` to
``e1`` over a length ``h``,

    integral of sqrt(E - U) dz = (2/3) h (e0 + sqrt(e0 e1) + e1) / (sqrt(e0) + sqrt(e1)),

so the square-root turning points cost nothing and the error is that of linear
interpolation, O(h^2) relative, about 1e-6 for a smooth well on 2,000 samples.

The scan itself (bottom, barriers, turning points, the area sum) is compiled, in
:mod:`tiltwell.wells.scan`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.display import html_table
from ..physics.constants import millikelvin
from .._base.validation import TiltwellError, as_finite_array, as_increasing, as_scalar
from .scan import BOUND, samples_valid, scan_well

__all__ = ["Separatrix", "separatrix"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True, eq=False)
class Separatrix:
    """The separatrix of one well of a sampled potential; build it with :func:`separatrix`.

    Attributes
    ----------
    area : float
        Phase-space area inside the separatrix [m·m/s]; 0.0 when unbound.
    escape_energy : float
        Energy of the separatrix [J]; NaN when unbound.
    depth : float
        ``escape_energy`` minus the bottom of the well [J]; 0.0 when unbound.
    bound : bool
        Whether the sampled potential has a well at all.
    z_bottom, z_back, z_front : float
        Bottom of the well and the upstream and downstream turning points at the escape
        energy [m]; NaN when unbound.
    mass : float
        Particle mass [kg].
    knots_z, knots_potential : ndarray, shape (K,)
        Positions [m] and potential [J] of the piecewise-linear potential between the two
        turning points, the turning points included; empty when unbound.
    """

    area: float
    escape_energy: float
    depth: float
    bound: bool
    z_bottom: float
    z_back: float
    z_front: float
    mass: float
    knots_z: FloatArray = field(repr=False)
    knots_potential: FloatArray = field(repr=False)

    def velocity_limit(self, z: ArrayLike) -> FloatArray:
        """Half-height of the separatrix, ``sqrt(2 (E - U(z)) / m)`` [m/s], 0 outside it.

        Parameters
        ----------
        z : array_like, any shape
            Positions [m].
        """
        positions = np.asarray(z, dtype=np.float64)
        if not self.bound:
            return np.zeros_like(positions)
        potential = np.interp(positions, self.knots_z, self.knots_potential)
        inside = (positions >= self.z_back) & (positions <= self.z_front)
        kinetic = np.where(inside, self.escape_energy - potential, 0.0)
        return np.sqrt(2.0 * np.maximum(kinetic, 0.0) / self.mass)

    def contains(self, z: ArrayLike, v: ArrayLike) -> NDArray[np.bool_]:
        """Whether each point (z [m], v [m/s]) lies strictly inside the separatrix.

        ``z`` and ``v`` broadcast against each other; the result has their common shape.
        """
        positions, velocities = np.broadcast_arrays(
            np.asarray(z, dtype=np.float64), np.asarray(v, dtype=np.float64)
        )
        if not self.bound:
            return np.zeros(positions.shape, dtype=bool)
        potential = np.interp(positions, self.knots_z, self.knots_potential)
        energy = 0.5 * self.mass * velocities**2 + potential
        inside = (positions > self.z_back) & (positions < self.z_front)
        return inside & (energy < self.escape_energy)

    def boundary(self) -> tuple[FloatArray, FloatArray]:
        """The closed separatrix curve as ``(z [m], v [m/s])``, upper branch left to right,
        then the lower branch back; the first point is repeated at the end. Empty arrays
        when unbound."""
        if not self.bound:
            return np.empty(0), np.empty(0)
        speed = self.velocity_limit(self.knots_z)
        speed[[0, -1]] = np.sqrt(
            2.0 * np.maximum(self.escape_energy - self.knots_potential[[0, -1]], 0.0) / self.mass
        )
        z = np.concatenate([self.knots_z, self.knots_z[::-1], self.knots_z[:1]])
        v = np.concatenate([speed, -speed[::-1], speed[:1]])
        return z, v

    def _repr_html_(self) -> str:
        if not self.bound:
            return "<b>Separatrix</b>: no bound well (the tilt has removed it)"
        rows = [
            ("area", f"{self.area * 1e3:.4g} mm·m/s"),
            ("depth", f"{millikelvin(self.depth):.4g} mK"),
            ("bottom", f"{self.z_bottom * 1e3:.4g} mm"),
            ("turning points", f"{self.z_back * 1e3:.4g} … {self.z_front * 1e3:.4g} mm"),
        ]
        return html_table("Separatrix", rows)


def separatrix(
    z: ArrayLike,
    U: ArrayLike,
    mass: float,
    near: float | None = None,
    *,
    max_energy: float | None = None,
) -> Separatrix:
    """Separatrix and phase-space area of the well of a sampled 1-D potential.

    Parameters
    ----------
    z : array_like, shape (N,)
        Strictly increasing positions [m], N >= 3.
    U : array_like, shape (N,)
        Potential energy at ``z`` [J].
    mass : float
        Particle mass [kg], > 0.
    near : float, optional
        A position [m]: the well is the one reached by walking downhill from the sample
        nearest to it. By default the well is the interior minimum with the largest depth.
    max_energy : float, optional
        Cap on the energy of the orbit [J]: the result describes the orbit at
        ``min(escape energy, max_energy)`` (used for a transverse cut whose particles can
        leave the trap in another direction below the cut's own barrier).

    Returns
    -------
    Separatrix
        ``bound`` is False, ``area`` 0.0, when there is no interior minimum (the tilt has
        removed the well) or when ``near`` lies on a slope that falls to an end of the range.

    Notes
    -----
    The escape energy is ``min(max U between bottom and left end, max U between bottom and
    right end)`` over the samples. Between samples the potential is linear and the area is
    integrated exactly for that potential.

    Examples
    --------
    The stationary bucket of ``U = -cos z`` (unit mass) has area 16:

    >>> import numpy as np
    >>> z = np.linspace(-np.pi, np.pi, 2001)
    >>> round(separatrix(z, -np.cos(z), 1.0).area, 5)
    16.0
    """
    positions, potential = _checked_samples(z, U)
    mass = _plain(mass) if _plain(mass) > 0.0 else as_scalar(mass, "mass", "kg", low=0.0, low_open=True)
    if near is not None:
        near = _plain(near) if math.isfinite(_plain(near)) else as_scalar(near, "near", "m")
    if max_energy is not None:
        cap = _plain(max_energy)
        max_energy = cap if math.isfinite(cap) else as_scalar(max_energy, "max_energy", "J")

    status, bottom, energy, back_z, front_z, knots_z, knots_u, integral = scan_well(
        positions, potential, near is not None, 0.0 if near is None else near,
        max_energy is not None, 0.0 if max_energy is None else max_energy,
    )
    if status != BOUND:
        return _unbound(mass)
    area = 2.0 * np.sqrt(2.0 / mass) * integral
    return Separatrix(
        area=float(area),
        escape_energy=float(energy),
        depth=float(energy - potential[bottom]),
        bound=True,
        z_bottom=float(positions[bottom]),
        z_back=float(back_z),
        z_front=float(front_z),
        mass=mass,
        knots_z=knots_z,
        knots_potential=knots_u,
    )


def _plain(value: object) -> float:
    """``value`` as a float when it is a finite Python or numpy float, else NaN (so the
    caller's range test fails and the validator names the argument). The validator gives
    the very same float for these; this spares it on the many calls of a curve."""
    if type(value) in (float, np.float64):
        number = float(value)  # type: ignore[arg-type]
        return number if math.isfinite(number) else math.nan
    return math.nan


def _checked_samples(z: ArrayLike, U: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """``z`` [m] and ``U`` [J] as float64 arrays, checked in one compiled pass; only when
    that finds a fault do the validators run, to raise their message."""
    try:
        if np.iscomplexobj(z) or np.iscomplexobj(U):  # the validators below refuse them
            raise TypeError
        positions = np.ascontiguousarray(z, dtype=np.float64)
        potential = np.ascontiguousarray(U, dtype=np.float64)
    except (TypeError, ValueError):
        positions = potential = np.empty(0)
    if (positions.ndim == 1 and positions.size >= 3 and potential.shape == positions.shape
            and samples_valid(positions, potential)):
        return positions, potential
    positions = as_increasing(z, "z", "m")
    potential = as_finite_array(U, "U", "J", ndim=1)
    if potential.shape != positions.shape:
        raise TiltwellError(
            f"U [J] must have the same length as z; got {potential.size} values for {positions.size} positions"
        )
    raise AssertionError("the validators accept what samples_valid refuses")  # pragma: no cover


def _unbound(mass: float) -> Separatrix:
    nan = float("nan")
    return Separatrix(0.0, nan, 0.0, False, nan, nan, nan, mass, np.empty(0), np.empty(0))
