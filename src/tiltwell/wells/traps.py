"""A trap: a field source and a species, seen in the frame of the decelerating trap.

The potential is ``U(r) = W(|B(r)|)`` with ``W`` the species' Zeeman energy. In the frame
of a trap decelerating at ``a`` (> 0 slows the trap down, which moves towards +z) the
particle feels the fictitious force ``+m a`` along +z, so

    U_eff(r) = U(r) - m a z,

and the downstream (front) barrier is lowered. The well on the axis disappears when the
largest restoring force in front of the bottom, ``max dU/dz``, no longer exceeds ``m a``.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import optimize

from .._base.validation import TiltwellError, as_bounds, as_integer, as_points, as_scalar
from ..physics.fields import FieldSource
from ..physics.species import Species

__all__ = ["Trap"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class Trap:
    """A species in a static field, inside a box that defines "still trapped".

    Parameters
    ----------
    source : FieldSource
        Anything with ``magnitude(points)`` [T] and ``magnitude_gradient(points)`` [T/m],
        e.g. :class:`tiltwell.physics.fields.IdealQuadrupole` or :class:`tiltwell.physics.fields.CoilSet`.
    species : Species
        Mass and Zeeman energy of the low-field-seeking state.
    bounds : ((x0, x1), (y0, y1), (z0, z1))
        The trap region [m] in the trap frame; a particle that reaches its walls is lost.
        The acceptance functions seek the well near the middle of the box, so centre it
        on the field zero.
    """

    source: FieldSource
    species: Species
    bounds: tuple[tuple[float, float], ...]

    def __post_init__(self) -> None:
        if not (hasattr(self.source, "magnitude") and hasattr(self.source, "magnitude_gradient")):
            raise TiltwellError(
                f"source must have magnitude(points) and magnitude_gradient(points); got {type(self.source).__name__}"
            )
        if not isinstance(self.species, Species):
            raise TiltwellError(f"species must be a Species; got {type(self.species).__name__}")
        object.__setattr__(self, "bounds", as_bounds(self.bounds))

    @property
    def mass(self) -> float:
        """Particle mass [kg]."""
        return self.species.mass

    def potential(self, x: ArrayLike, y: ArrayLike, z: ArrayLike) -> FloatArray:
        """Zeeman potential ``U = W(|B|)`` [J] at broadcastable positions [m]."""
        points, shape = _stack(x, y, z)
        magnitude = self.source.magnitude(points)
        if not np.all(np.isfinite(magnitude)):
            where = points[int(np.argmax(~np.isfinite(magnitude)))]
            raise TiltwellError(
                f"the field is singular at {tuple(float(c) for c in where)} m (on a winding?); "
                "keep the trap bounds [m] inside the coils' bore"
            )
        return np.asarray(self.species.zeeman.energy(magnitude)).reshape(shape)

    def effective_potential(self, x: ArrayLike, y: ArrayLike, z: ArrayLike, deceleration: float = 0.0) -> FloatArray:
        """``U(r) - m a z`` [J]: the potential in the frame decelerating at ``a`` [m/s^2]."""
        a = as_scalar(deceleration, "deceleration", "m/s^2")
        return self.potential(x, y, z) - self.mass * a * np.asarray(z, dtype=np.float64)

    def tilted(self, deceleration: float) -> Callable[[ArrayLike, ArrayLike, ArrayLike], FloatArray]:
        """``U_eff`` at a fixed deceleration [m/s^2] as a function ``(x, y, z) -> J``, the
        form :func:`tiltwell.acceptance_6d` takes."""
        a = as_scalar(deceleration, "deceleration", "m/s^2")
        return lambda x, y, z: self.effective_potential(x, y, z, a)

    def force(self, points: ArrayLike, deceleration: float = 0.0) -> FloatArray:
        """Force [N], shape (N, 3), on particles at ``points`` (N, 3) [m] in the trap frame:
        ``-W'(|B|) grad|B| + m a z_hat``."""
        positions = as_points(points)
        a = as_scalar(deceleration, "deceleration", "m/s^2")
        slope = np.asarray(self.species.zeeman.derivative(self.source.magnitude(positions)))
        result = -slope[:, None] * self.source.magnitude_gradient(positions)
        result[:, 2] += self.mass * a
        return result

    def axis_cut(self, deceleration: float = 0.0, samples: int = 2001) -> tuple[FloatArray, FloatArray]:
        """Effective potential on the z axis: ``(z [m], U_eff [J])`` across the trap region."""
        z = np.linspace(*self.bounds[2], as_integer(samples, "samples", 3))
        return z, self.effective_potential(0.0, 0.0, z, deceleration)

    def radial_cut(self, z: float, deceleration: float = 0.0, samples: int = 2001) -> tuple[FloatArray, FloatArray]:
        """Effective potential along x through ``(0, 0, z)``: ``(x [m], U_eff [J])``."""
        x = np.linspace(*self.bounds[0], as_integer(samples, "samples", 3))
        return x, self.effective_potential(x, 0.0, as_scalar(z, "z", "m"), deceleration)

    def axial_slope(self, z: ArrayLike) -> FloatArray:
        """``dU/dz`` on the axis [N] at positions ``z`` [m] (from the analytic gradient)."""
        zs = np.atleast_1d(np.asarray(z, dtype=np.float64))
        points = np.column_stack([np.zeros_like(zs), np.zeros_like(zs), zs])
        slope = np.asarray(self.species.zeeman.derivative(self.source.magnitude(points)))
        return np.asarray(slope * self.source.magnitude_gradient(points)[:, 2])

    def critical_deceleration(self, samples: int = 2001) -> float:
        """Deceleration [m/s^2] at which the well on the axis disappears.

        It is the largest axial restoring force downstream of the bottom divided by the
        mass, ``max_{z > z_bottom} dU/dz / m``: the maximum is bracketed on ``samples``
        axis points and then located by bounded scalar minimisation (Brent's method) on
        the analytic gradient. Returns 0.0 when the untilted axis has no well.
        """
        z, potential = self.axis_cut(0.0, samples)
        interior = potential[1:-1]
        bottom = 1 + int(np.argmin(interior))
        slopes = self.axial_slope(z[bottom:])
        k = int(np.argmax(slopes))
        if slopes[k] <= 0.0:
            return 0.0
        index = bottom + k
        low, high = z[max(index - 1, bottom)], z[min(index + 1, z.size - 1)]
        best = optimize.minimize_scalar(
            lambda s: -float(self.axial_slope(s)[0]), bounds=(low, high), method="bounded",
            options={"xatol": 1e-9 * (z[-1] - z[0])},
        )
        peak = max(float(-best.fun), float(slopes[k]))
        return peak / self.mass


def _stack(x: ArrayLike, y: ArrayLike, z: ArrayLike) -> tuple[FloatArray, tuple[int, ...]]:
    """Broadcast x, y, z [m] and stack them into (N, 3) points, with the common shape."""
    bx, by, bz = np.broadcast_arrays(*(np.asarray(c, dtype=np.float64) for c in (x, y, z)))
    points = np.stack([bx.ravel(), by.ravel(), bz.ravel()], axis=1)
    return as_points(points, "positions"), bx.shape
