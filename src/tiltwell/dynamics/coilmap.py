"""The field of a coil row on a per-coil table: one coil tabulated once, the active coils summed.

- :class:`CoilFieldMap`: the field of one coil carrying 1 A per turn, and its Jacobian,
  tabulated once on an axisymmetric grid whose axial step divides the pitch (all coils are
  equal, and every coil plane falls on a node);
- :class:`SummedCoilField`: the force of the coils carrying current at one instant, their
  tables summed over a window of nodes around the trap, so a particle costs one bilinear
  look-up whatever the number of coils. :func:`tiltwell.track_device` loads it at every
  force evaluation.

SI units throughout (m, T, A, J).
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.validation import TiltwellError, as_points, as_scalar
from ..coils.array import CoilArray, check_coil_array
from ..physics.fields import Coil, loop_field
from ..physics.species import LinearZeeman, Species

__all__ = ["CoilFieldMap", "SummedCoilField"]

FloatArray = NDArray[np.float64]

#: Finite-difference steps of the tabulated derivatives, relative to radius (z) and radius^2 (rho^2).
_DIFFERENCE_STEP = 1e-4


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
        check_coil_array(array)
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


class SummedCoilField:
    """The force of the coils' summed field at one instant, by bilinear interpolation of
    their summed table over a window of the row's nodes that covers the trap box.

    Per particle: one gather of the cell's 24 bilinear coefficients (6 quantities x 4
    corners), then |B| = sqrt(f^2 u + B_z^2) and, with u = rho^2,
    d|B|/du = (f f_u u + f^2 / 2 + B_z B_z,u) / |B|, d|B|/dz = (f f_z u + B_z B_z,z) / |B|,
    grad|B| = (2 x d|B|/du, 2 y d|B|/du, d|B|/dz): the same as J^T B / |B| from the
    Jacobian of :meth:`CoilFieldMap.field_and_jacobian`, with fewer operations. Particles
    are stored as rows (3, n) so every operation runs over one contiguous axis.

    Parameters
    ----------
    field_map : CoilFieldMap
        The unit coil's table, built for the row's pitch.
    first : float
        Plane of coil 0 of the row [m] (``CoilArray.first``); coil k lies on node
        k ``per_pitch`` counted from it.
    half_length : float
        Half length [m] the window must cover around the trap centre (the box's, plus a
        margin); the window has ``ceil(2 half_length / z_step) + 4`` nodes.
    species : Species
        Mass and Zeeman state of the particles.

    Notes
    -----
    Call :meth:`load` with the coils carrying current and the trap centre, then
    :meth:`acceleration` for the particles (as often as needed) until the next load.
    Positions outside the window or beyond ``rho_max`` are clipped to its edge. Inputs are
    not checked (the tracker checks them once).
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
        """Sum the tables of ``coils`` (indices into the row, shape (K,)) carrying ``currents``
        [A] per turn (shape (K,); an index may repeat, its currents add) over the window
        around the trap centre ``centre`` [m]."""
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
