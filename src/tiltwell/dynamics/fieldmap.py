"""The static force of a trap sampled once on a regular grid and interpolated trilinearly,
so trajectories through coil traps need no field evaluation per step."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.validation import TiltwellError, as_bounds, as_finite_array, as_points
from ..wells.traps import Trap

__all__ = ["FieldMap"]

FloatArray = NDArray[np.float64]


class FieldMap:
    """The static trap force sampled on a regular grid, interpolated trilinearly.

    Parameters
    ----------
    bounds : ((x0, x1), (y0, y1), (z0, z1))
        The box covered [m]; the grid nodes include its walls.
    forces : array_like, shape (nx, ny, nz, 3)
        Force [N] at the nodes ``linspace(x0, x1, nx)`` x ... (``ij`` order), each n >= 2.

    Notes
    -----
    Accuracy: where the force is twice continuously differentiable, trilinear interpolation
    errs by at most ``sum_c h_c^2 / 8 max|d^2F/dx_c^2|`` (the 1-D linear-interpolation bound
    applied along each axis in turn), second order in the grid step ``h``. Across a kink of
    the field (the zero of a quadrupole, the surface where a capped field saturates) the
    error in the cells that hold it is of the size of the force jump there. Points outside
    the box are clipped to its walls.

    Examples
    --------
    On its axis, away from the zero, a quadrupole pulls with a constant force, which the map
    reproduces:

    >>> import tiltwell
    >>> trap = tiltwell.Trap(tiltwell.IdealQuadrupole(20.0), tiltwell.species("Cr"),
    ...                      ((-0.01, 0.01), (-0.01, 0.01), (0.01, 0.02)))
    >>> field_map = FieldMap.from_trap(trap, (21, 21, 21))
    >>> points = [[0.0, 0.0, 0.0123]]
    >>> bool(abs(field_map.force(points)[0, 2] / trap.force(points)[0, 2] - 1) < 1e-12)
    True
    """

    def __init__(self, bounds: Any, forces: ArrayLike) -> None:
        self.bounds = as_bounds(bounds)
        values = as_finite_array(forces, "forces", "N", ndim=4)
        if values.shape[3] != 3 or min(values.shape[:3]) < 2:
            raise TiltwellError(f"forces [N] must have shape (nx, ny, nz, 3) with each n >= 2; got shape {values.shape}")
        self.shape: tuple[int, int, int] = (values.shape[0], values.shape[1], values.shape[2])
        self.forces: FloatArray = values.copy()
        self.forces.setflags(write=False)
        self._tables = tuple(np.ascontiguousarray(self.forces[..., c]).ravel() for c in range(3))
        self._low = np.array([low for low, _ in self.bounds])
        self.spacing: tuple[float, ...] = tuple((high - low) / (n - 1) for (low, high), n in zip(self.bounds, self.shape))
        self._inverse = 1.0 / np.array(self.spacing)
        nx, ny, nz = self.shape
        self._offsets = [(i * ny + j) * nz + k for i in (0, 1) for j in (0, 1) for k in (0, 1)]

    def __repr__(self) -> str:
        return f"FieldMap(<{'x'.join(map(str, self.shape))} nodes over {self.bounds} m>)"

    @classmethod
    def from_trap(cls, trap: Trap, shape: tuple[int, int, int] = (41, 41, 41)) -> FieldMap:
        """Sample ``trap.force(points, 0.0)`` [N] on a ``shape`` grid over ``trap.bounds``."""
        if not isinstance(trap, Trap):
            raise TiltwellError(f"trap must be a Trap; got {type(trap).__name__}")
        try:
            counts = tuple(int(n) for n in shape if not isinstance(n, bool) and int(n) == n)
        except (TypeError, ValueError):
            counts = ()
        if len(counts) != 3 or min(counts) < 2 or math.prod(counts) > 10**8:
            raise TiltwellError(f"shape must be three integers >= 2 (nx, ny, nz), at most 1e8 nodes; got {shape!r}")
        axes = [np.linspace(low, high, n) for (low, high), n in zip(trap.bounds, counts)]
        grid = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
        forces = trap.force(grid, 0.0)
        if not np.all(np.isfinite(forces)):
            where = grid[int(np.argmax(~np.all(np.isfinite(forces), axis=1)))]
            raise TiltwellError(
                f"the trap force is singular at {tuple(float(c) for c in where)} m (on a winding?); "
                "keep the trap bounds [m] inside the coils' bore"
            )
        return cls(trap.bounds, forces.reshape(*counts, 3))

    def force(self, points: ArrayLike) -> FloatArray:
        """Interpolated force [N], shape (N, 3), at ``points`` [m], shape (N, 3)."""
        positions = as_points(points)
        return self.interpolate_rows(positions.T, np.empty((3, positions.shape[0]))).T.copy()

    def covers(self, bounds: tuple[tuple[float, float], ...]) -> bool:
        """Whether the map's box contains ``bounds`` (to 1e-12 of its size)."""
        return all(
            low >= mine_low - 1e-12 * (mine_high - mine_low) and high <= mine_high + 1e-12 * (mine_high - mine_low)
            for (low, high), (mine_low, mine_high) in zip(bounds, self.bounds)
        )

    def interpolate_rows(self, positions: FloatArray, out: FloatArray, factor: float = 1.0) -> FloatArray:
        """``factor`` times the interpolated force [N] into ``out`` at ``positions``, held as rows.

        The unchecked kernel behind :meth:`force`, for trackers that keep particles as
        component rows.

        Parameters
        ----------
        positions : ndarray, shape (3, n)
            Rows x, y, z [m], float64; not modified (points outside the box are clipped).
        out : ndarray, shape (3, n)
            Overwritten with ``factor`` times the force [N x the unit of factor].
        factor : float
            Scale of the result, e.g. 1 / mass for an acceleration [m/s^2].

        Returns
        -------
        ndarray
            ``out``.
        """
        flat: NDArray[np.intp] | None = None
        fractions = []
        for axis, count in enumerate(self.shape):
            u = positions[axis] - self._low[axis]
            u *= self._inverse[axis]
            np.clip(u, 0.0, count - 1, out=u)
            cell = u.astype(np.intp)  # u >= 0, so truncation is the floor
            np.minimum(cell, count - 2, out=cell)
            u -= cell
            fractions.append(u)
            flat = cell if flat is None else flat * count + cell
        assert flat is not None
        fx, fy, fz = fractions
        gx, gy, gz = 1.0 - fx, 1.0 - fy, 1.0 - fz
        out[...] = 0.0
        corner, value = np.empty_like(flat), np.empty_like(fx)
        for (wx, wy, wz), offset in zip(
            ((w, v, u) for w in (gx, fx) for v in (gy, fy) for u in (gz, fz)), self._offsets
        ):
            weight = wx * wy
            weight *= wz * factor
            np.add(flat, offset, out=corner)
            for component in range(3):
                np.take(self._tables[component], corner, out=value)
                value *= weight
                out[component] += value
        return out

