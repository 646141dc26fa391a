"""An axially symmetric field magnitude tabulated once and interpolated: the coil row's
rigid twin at the cost of a look-up.

The phase-averaged field of a coil row (:class:`tiltwell.dynamics.compare.PhaseAveragedField`)
costs P phases x ``active`` coils of elliptic integrals per point, so acceptances, the
energetic fraction and the critical deceleration through it directly take several times
longer than through an ideal quadrupole. The row is coaxial, so |B| depends on
(rho, z) only; :class:`AxisymmetricTable` samples it once on a (rho, z) grid and
interpolates it with a bicubic spline. SI units throughout.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.interpolate import RectBivariateSpline

from .._base.validation import TiltwellError, as_integer, as_points, as_scalar
from ..physics.fields import FieldSource, IdealQuadrupole

__all__ = ["TABLE_SHAPE", "AxisymmetricTable", "table_points"]

FloatArray = NDArray[np.float64]

#: Default (rho, z) nodes of a table: a 16 mm x 13 mm box at ~0.13 mm steps, where the
#: interpolated |B| of the demo row's twin errs by 1.8e-6 of its largest value at most (measured in
#: tests/test_devicemodel.py against the direct phase average).
TABLE_SHAPE = (121, 101)

#: Step [relative to the box's half length] at which the slope of |B| at the zero is read.
_ZERO_STEP = 1e-6


def table_points(rho_max: float, z_range: tuple[float, float], shape: tuple[int, int] = TABLE_SHAPE) -> FloatArray:
    """The nodes of a table, shape (nr * nz, 3) [m]: (rho, 0, z) for rho = linspace(0,
    rho_max, nr) and z = linspace(low, high, nz), rho varying slowest (the order
    :class:`AxisymmetricTable` reads its values in).

    Raises
    ------
    TiltwellError
        Unless rho_max > 0, low < 0 < high and both counts >= 4.
    """
    radius = as_scalar(rho_max, "rho_max", "m", low=0.0, low_open=True)
    low, high = (as_scalar(v, "z_range", "m") for v in z_range)
    if not low < 0.0 < high:
        raise TiltwellError(f"z_range [m] must be (low, high) with low < 0 < high; got {z_range!r}")
    nr, nz = (as_integer(n, "shape", 4) for n in shape)
    grid_r, grid_z = np.meshgrid(np.linspace(0.0, radius, nr), np.linspace(low, high, nz), indexing="ij")
    return np.column_stack([grid_r.ravel(), np.zeros(grid_r.size), grid_z.ravel()])


class AxisymmetricTable:
    """|B|(rho, z) of a coaxial source sampled on a grid and interpolated.

    Parameters
    ----------
    magnitudes : array_like, shape (nr, nz)
        |B| [T] at the nodes of :func:`table_points` (rho from 0 to ``rho_max``, z over
        ``z_range``), each count >= 4; a source symmetric about the z axis, with a linear
        zero at the origin (|B| ~ G sqrt(z^2 + rho^2 / 4) there, as for every
        divergence-free axisymmetric quadrupole zero).
    rho_max : float
        Largest radius tabulated [m], > 0.
    z_range : (float, float)
        Axial span tabulated [m], low < 0 < high.
    axial_gradient : float
        d|B|/dz at the zero [T/m], > 0.

    :meth:`sample` tabulates a source.

    Notes
    -----
    What is tabulated is the ratio q = |B| / s with s = sqrt(z^2 + rho^2 / 4): near a
    linear zero q tends to the axial gradient from every direction, so q is continuous
    where |B| has its cone, and a bicubic spline (scipy's ``RectBivariateSpline``, the
    table mirrored to negative rho so the spline is even in rho) interpolates it to fourth
    order in the grid step away from the zero. ``magnitude`` returns q s; its gradient is
    s grad q + q grad s. Points outside the table are clipped to its edge (in rho and z).
    Nodes within h = 1e-6 of the half length of the origin take q = ``axial_gradient``
    (there |B| is all rounding).

    Examples
    --------
    An uncapped ideal quadrupole has q = B' everywhere, which the table holds exactly:

    >>> import numpy as np, tiltwell
    >>> table = AxisymmetricTable.sample(tiltwell.IdealQuadrupole(100.0), 0.01, (-0.01, 0.01), (11, 11))
    >>> point = np.array([[0.003, 0.004, 0.002]])
    >>> bool(abs(table.magnitude(point)[0] / tiltwell.IdealQuadrupole(100.0).magnitude(point)[0] - 1) < 1e-12)
    True
    """

    def __init__(self, magnitudes: ArrayLike, rho_max: float, z_range: tuple[float, float],
                 axial_gradient: float) -> None:
        values = np.asarray(magnitudes, dtype=np.float64)
        if values.ndim != 2:
            raise TiltwellError(f"magnitudes [T] must have shape (nr, nz); got shape {values.shape}")
        points = table_points(rho_max, z_range, values.shape)  # checks rho_max, z_range and the counts
        self.rho_max = float(rho_max)
        self.z_range = (float(z_range[0]), float(z_range[1]))
        self.shape = (values.shape[0], values.shape[1])
        self.axial_gradient = as_scalar(axial_gradient, "axial_gradient", "T/m", low=0.0, low_open=True)
        rho, z = points[:, 0].reshape(values.shape), points[:, 2].reshape(values.shape)
        s = np.sqrt(z**2 + 0.25 * rho**2)
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = values / s
        ratio[s <= _ZERO_STEP * 0.5 * (self.z_range[1] - self.z_range[0])] = self.axial_gradient
        if not np.all(np.isfinite(ratio)):
            raise TiltwellError("the field is singular inside the table (on a winding?); keep rho_max [m] inside the bore")
        mirrored = np.concatenate([ratio[:0:-1], ratio])
        self._spline = RectBivariateSpline(np.concatenate([-rho[:0:-1, 0], rho[:, 0]]), z[0], mirrored, kx=3, ky=3)

    @classmethod
    def sample(cls, source: FieldSource, rho_max: float, z_range: tuple[float, float],
               shape: tuple[int, int] = TABLE_SHAPE) -> AxisymmetricTable:
        """Tabulate ``source.magnitude`` [T] at the :func:`table_points` of ``shape``; the
        axial gradient is |B|(0, 0, h) / h, h = 1e-6 of the half length."""
        if not hasattr(source, "magnitude"):
            raise TiltwellError(f"source must have magnitude(points); got {type(source).__name__}")
        points = table_points(rho_max, z_range, shape)
        h = _ZERO_STEP * 0.5 * (float(z_range[1]) - float(z_range[0]))
        values = np.asarray(source.magnitude(np.vstack([points, [[0.0, 0.0, h]]])), dtype=np.float64)
        return cls(values[:-1].reshape(shape), rho_max, z_range, float(values[-1] / h))

    def __repr__(self) -> str:
        return (f"AxisymmetricTable(<{self.shape[0]}x{self.shape[1]} nodes, rho <= {self.rho_max:g} m, "
                f"z in [{self.z_range[0]:g}, {self.z_range[1]:g}] m>)")

    def _coordinates(self, points: ArrayLike) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
        positions = as_points(points)
        x, y = positions[:, 0], positions[:, 1]
        rho = np.minimum(np.hypot(x, y), self.rho_max)
        z = np.clip(positions[:, 2], *self.z_range)
        return x, y, rho, z

    def magnitude(self, points: ArrayLike) -> FloatArray:
        """Interpolated |B| [T], shape (N,), at ``points`` [m], shape (N, 3)."""
        _, _, rho, z = self._coordinates(points)
        return np.asarray(self._spline.ev(rho, z) * np.sqrt(z * z + 0.25 * rho * rho))

    def magnitude_gradient(self, points: ArrayLike) -> FloatArray:
        """Gradient of the interpolated |B| [T/m], shape (N, 3), at ``points`` [m], shape (N, 3);
        0 at the zero itself (the mean of the one-sided slopes of the cone)."""
        x, y, rho, z = self._coordinates(points)
        s = np.sqrt(z * z + 0.25 * rho * rho)
        q = self._spline.ev(rho, z)
        with np.errstate(divide="ignore", invalid="ignore"):
            d_rho = self._spline.ev(rho, z, dx=1) * s + q * np.where(s > 0.0, 0.25 * rho / s, 0.0)
            d_z = self._spline.ev(rho, z, dy=1) * s + q * np.where(s > 0.0, z / s, 0.0)
            unit_x = np.where(rho > 0.0, x / rho, 0.0)
            unit_y = np.where(rho > 0.0, y / rho, 0.0)
        return np.column_stack([d_rho * unit_x, d_rho * unit_y, d_z])

    @property
    def near_zero(self) -> IdealQuadrupole:
        """The linear field of the zero, ``B' (-x/2, -y/2, z)`` with ``B'`` the axial
        gradient: the field vector where spin flips happen (within microns of the zero),
        which the tracker's spin-flip check uses (:mod:`tiltwell.dynamics.spinflip`)."""
        return IdealQuadrupole(self.axial_gradient)

    def field(self, points: ArrayLike) -> FloatArray:
        """Not available: the table holds |B| only (see :attr:`near_zero`)."""
        raise TiltwellError("an AxisymmetricTable holds |B| only; use the source it was built from for the field vector")

