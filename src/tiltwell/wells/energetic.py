"""The energetic 6-D acceptance of a 3-D potential well, computed on a grid.

A particle at position r with speed v stays in the well as long as its energy
``m v^2 / 2 + U(r)`` is below the escape energy E: the lowest energy at which the region
``{U < E}`` around the bottom reaches the walls of the box (a minimax path: the lowest
possible highest point of any path from the bottom to a wall). The 6-D phase-space volume
of such particles is

    V6 = integral over {U < E} of (4 pi / 3) (2 (E - U(r)) / m)^(3/2) d^3r,

the volume of a velocity ball of radius sqrt(2 (E - U) / m) at each point.

On a grid the minimax path is found in one pass by a compiled priority flood from the
bottom (:mod:`tiltwell.wells.flood`): nodes are taken in order of the highest value on
their lowest path from the bottom, face neighbours only, and the first wall node taken
gives the escape level; the nodes taken before it at lower levels are the well's region.
Given a start (``near``), the potential is computed only in the blocks of the grid the
flood reaches (:mod:`tiltwell.wells.lazygrid`). The grid is refined until two successive
volumes agree to the requested relative tolerance.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field, replace

import numpy as np
from numpy.typing import NDArray
from scipy import ndimage

from .._base.validation import TiltwellError, as_bounds, as_scalar
from .lazygrid import GivenGrid, LazyGrid, run_fill, run_flood

__all__ = [
    "EnergeticAcceptance",
    "acceptance_6d",
    "energetic_acceptance",
    "escape_level",
    "touches_wall",
    "well_component",
]

Potential3D = Callable[[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]], NDArray[np.float64]]
Bounds = tuple[tuple[float, float], ...]

#: Grid points per axis tried in turn: odd, so a symmetric box has nodes on its mid-planes,
#: and n - 1 = 2 p with p prime, so two grids share no other planes (a kink or saddle that
#: one grid straddles is not straddled the same way by the next, and the comparison of
#: successive volumes sees the error). Each step has about 3 times the points of the last.
_GRID_SIZES = (27, 39, 59, 87, 123, 179)


#: A grid escape level this fraction of the depth below a known escape energy is taken as
#: the grid's under-sampling of that exit (the grid samples a saddle to O(h^2), a kink to O(h)).
KNOWN_ESCAPE_SLACK = 0.05


@dataclass(frozen=True, eq=False)
class EnergeticAcceptance:
    """Result of :func:`energetic_acceptance`.

    Attributes
    ----------
    volume : float
        6-D phase-space volume [(m·m/s)^3].
    escape_energy : float
        Energy bounding the volume [J]: the escape energy, or the energy asked for.
    bottom_energy : float
        Lowest grid value of the potential in the well [J].
    bottom : tuple of float
        Grid point (x, y, z) [m] of the bottom.
    grid_points : int
        Points per axis of the finest grid used.
    converged : bool
        Whether the last two grids agreed to the requested tolerance.
    axes : tuple of ndarray
        Grid coordinates [m] along x, y, z of the finest grid.
    region : ndarray of bool, shape (n, n, n)
        Grid nodes of the well below ``escape_energy`` (the connected component).
    """

    volume: float
    escape_energy: float
    bottom_energy: float
    bottom: tuple[float, float, float]
    grid_points: int
    converged: bool
    axes: tuple[NDArray[np.float64], ...] = field(repr=False, default=())
    region: NDArray[np.bool_] = field(repr=False, default_factory=lambda: np.zeros((0, 0, 0), dtype=bool))

    def in_well(self, points: NDArray[np.float64]) -> NDArray[np.bool_]:
        """Whether each of ``points`` (N, 3) [m] lies in the well's connected region.

        A point counts when its nearest grid node is in the region grown by one node, so
        points just inside the region's edge count; other wells stay out because they
        are separated from this one by at least one node at or above the escape energy.
        Points outside the grid's box are not in the well.
        """
        positions = np.asarray(points, dtype=np.float64)
        grown = ndimage.binary_dilation(self.region)
        inside = np.ones(len(positions), dtype=bool)
        index = []
        for axis, column in zip(self.axes, positions.T):
            step = axis[1] - axis[0]
            inside &= (column >= axis[0]) & (column <= axis[-1])
            index.append(np.clip(np.rint((column - axis[0]) / step).astype(np.intp), 0, axis.size - 1))
        return inside & grown[tuple(index)]

    @property
    def depth(self) -> float:
        """Escape energy minus the bottom [J]."""
        return self.escape_energy - self.bottom_energy


def acceptance_6d(
    potential: Potential3D,
    mass: float,
    bounds: Bounds,
    energy: float | None = None,
    *,
    rtol: float = 1e-2,
    near: tuple[float, float, float] | None = None,
) -> float:
    """Energetic 6-D acceptance [(m·m/s)^3] of the well of ``potential`` inside ``bounds``.

    Parameters
    ----------
    potential : callable
        ``potential(x, y, z)`` [J] for broadcastable arrays of positions [m].
    mass : float
        Particle mass [kg], > 0.
    bounds : ((x0, x1), (y0, y1), (z0, z1))
        The box [m]; particles reaching its walls are lost.
    energy : float, optional
        Energy [J] bounding the volume; by default the escape energy.
    rtol : float
        Requested relative accuracy, in [1e-4, 0.5]; the grid is refined until two
        successive refinements each change the volume by less than this.
    near : (x, y, z), optional
        Start the well from the grid minimum reached by walking downhill from this point
        [m]; by default the well is around the lowest interior local minimum of the grid
        (a tilted potential may fall lower at a wall; that is not a well).

    Examples
    --------
    An isotropic harmonic well ``U = r^2 / 2`` (unit mass) in a box of half-width 1 has
    escape energy 1/2; below it the 6-D volume is pi^3 / 6 (a 6-ball of radius 1).

    >>> import math
    >>> well = lambda x, y, z: 0.5 * (x**2 + y**2 + z**2)
    >>> volume = acceptance_6d(well, 1.0, ((-1, 1), (-1, 1), (-1, 1)))
    >>> abs(volume / (math.pi**3 / 6) - 1) < 1e-2
    True
    """
    return energetic_acceptance(potential, mass, bounds, energy, rtol=rtol, near=near).volume


def energetic_acceptance(
    potential: Potential3D,
    mass: float,
    bounds: Bounds,
    energy: float | None = None,
    *,
    rtol: float = 1e-2,
    near: tuple[float, float, float] | None = None,
    known_escape: float | None = None,
    mirror_xy: bool = False,
) -> EnergeticAcceptance:
    """Like :func:`acceptance_6d`, returning the escape energy and grid facts too.

    ``known_escape`` [J] is an escape energy known more precisely from elsewhere (a finely
    sampled cut through the exit). When the grid's own escape level lies within
    ``KNOWN_ESCAPE_SLACK`` of the depth below it, the grid is taken to have merely
    under-sampled that exit: the region stays the grid's closed component and the
    integrand uses ``known_escape``. Otherwise the grid has found a lower exit and its
    level stands.

    ``mirror_xy`` says that ``potential`` returns the very same number at (x, y, z),
    (-x, y, z), (x, -y, z) and (y, x, z) (a trap symmetric about the z axis whose field is
    computed from x^2, y^2 and hypot(x, y), as :class:`tiltwell.CoilSet` and
    :class:`tiltwell.IdealQuadrupole` are): grid nodes related so share one evaluation.
    The result is the same; only the number of positions evaluated changes.

    With ``near`` the potential is computed only on the grid blocks the flood from the
    bottom reaches (:class:`tiltwell.wells.lazygrid.LazyGrid`), so a NaN elsewhere in the
    box goes unseen; without it the whole grid is computed to find the bottom.
    """
    if not callable(potential):
        raise TiltwellError(f"potential must be a callable potential(x, y, z) -> J; got {type(potential).__name__}")
    if not isinstance(mirror_xy, (bool, np.bool_)):
        raise TiltwellError(f"mirror_xy must be True or False; got {mirror_xy!r}")
    mass = as_scalar(mass, "mass", "kg", low=0.0, low_open=True)
    box = as_bounds(bounds)
    if energy is not None:
        energy = as_scalar(energy, "energy", "J")
    rtol = as_scalar(rtol, "rtol", "1", low=1e-4, high=0.5)
    if known_escape is not None:
        known_escape = as_scalar(known_escape, "known_escape", "J")
    start = None
    if near is not None:
        start = tuple(as_scalar(c, f"near[{i}]", "m") for i, c in enumerate(near))

    # Converged when two successive refinements each change the volume by less than rtol:
    # one agreement alone can be luck (two grids that straddle the exit alike).
    volumes: list[float] = []
    result: EnergeticAcceptance | None = None
    for n in _GRID_SIZES:
        # The last grid's level (or the known escape) tells the next where its flood ends.
        hint = known_escape if result is None or known_escape is not None else result.escape_energy
        result = _on_grid(LazyGrid(potential, [np.linspace(low, high, n) for low, high in box],
                                   mirror_xy=bool(mirror_xy)), mass, energy, start, known_escape, hint)
        volumes.append(result.volume)
        if len(volumes) >= 3 and all(
            abs(new - old) <= rtol * max(abs(new), abs(old)) for old, new in zip(volumes[-3:-1], volumes[-2:])
        ):
            return _replace_converged(result, True)
    assert result is not None
    return _replace_converged(result, False)


def _replace_converged(result: EnergeticAcceptance, converged: bool) -> EnergeticAcceptance:
    return replace(result, converged=converged)


def _on_grid(
    grid: LazyGrid,
    mass: float,
    energy: float | None,
    start: tuple[float, ...] | None,
    known_escape: float | None,
    hint: float | None,
) -> EnergeticAcceptance:
    axes = grid.axes
    if start is None:
        grid.fill_all()  # the default bottom is sought over the whole grid
    bottom = _bottom_index(grid, start)
    node = int(np.ravel_multi_index(bottom, grid.shape))
    values = grid.grid  # +inf where the flood never looked: outside the region
    bottom_energy = float(values[bottom])
    if energy is None:
        run = run_flood(grid, node, hint=hint)  # stops at the first wall node: its level is the escape level
        assert run.wall_level is not None  # every node is reachable, and a grid has walls
        level = region_level = run.wall_level
        if known_escape is not None:
            if level >= known_escape - KNOWN_ESCAPE_SLACK * (known_escape - bottom_energy):
                level = known_escape  # the integrand's energy; the region stays closed
        # Every node whose level is below the wall's has left the heap before the wall node.
        inside = run.order[run.levels < min(level, region_level)]
    else:
        level = energy
        inside = np.flatnonzero(run_fill(grid, node, level, inclusive=False)[0])
    flags = np.zeros(values.size, dtype=bool)
    flags[inside] = True
    region = flags.reshape(values.shape)
    cell = math.prod(float(a[1] - a[0]) for a in axes)
    kinetic = np.where(region, np.maximum(level - values, 0.0), 0.0)
    volume = (4.0 * math.pi / 3.0) * float(np.sum((2.0 * kinetic / mass) ** 1.5)) * cell
    point = (float(axes[0][bottom[0]]), float(axes[1][bottom[1]]), float(axes[2][bottom[2]]))
    return EnergeticAcceptance(volume, float(level), bottom_energy, point, grid.shape[0], True, tuple(axes), region)


def escape_level(values: NDArray[np.float64], start: tuple[int, ...]) -> float:
    """Lowest grid value L such that the component of ``{values <= L}`` holding ``start``
    touches the array's faces: the minimax escape level of a gridded potential.

    Parameters
    ----------
    values : ndarray, any number of axes
        Finite grid values [J].
    start : tuple of int
        Index of the start node.

    Notes
    -----
    One compiled priority flood from ``start`` over face neighbours
    (:func:`tiltwell.wells.flood.priority_flood`); the level returned is one of the
    grid values, the same one a bisection over the sorted values would find.

    Examples
    --------
    >>> import numpy as np
    >>> ring = np.array([[5., 5., 5.], [3., 0., 4.], [5., 5., 5.]])
    >>> escape_level(ring, (1, 1))
    3.0
    """
    array = np.asarray(values, dtype=np.float64)
    node = int(np.ravel_multi_index(tuple(int(i) for i in start), array.shape))
    level = run_flood(GivenGrid(array), node).wall_level
    assert level is not None  # a grid always has walls, and every node is reachable
    return level


def well_component(mask: NDArray[np.bool_], start: tuple[int, ...]) -> NDArray[np.bool_]:
    """The face-connected component of ``mask`` that holds the grid node ``start``.

    Parameters
    ----------
    mask : ndarray of bool, any number of axes
        Grid nodes that qualify, e.g. ``values <= level`` of a gridded potential.
    start : tuple of int
        Index (i, j, k) of one node of ``mask``'s grid.

    Returns
    -------
    ndarray of bool, same shape
        The nodes connected to ``start`` through shared faces (the components of
        ``scipy.ndimage.label`` with its default, face connectivity; found here by a
        compiled fill from ``start``); all False when ``mask[start]`` is False.

    Examples
    --------
    >>> import numpy as np
    >>> mask = np.zeros((3, 3, 3), dtype=bool)
    >>> mask[0, 0, 0] = mask[0, 0, 1] = mask[2, 2, 2] = True
    >>> int(well_component(mask, (0, 0, 0)).sum())
    2
    """
    flags = np.asarray(mask, dtype=bool)
    node = int(np.ravel_multi_index(tuple(int(i) for i in start), flags.shape))
    visited, _ = run_fill(GivenGrid(np.where(flags, 0.0, 1.0)), node, 0.0)
    return visited.reshape(flags.shape)


def touches_wall(region: NDArray[np.bool_]) -> bool:
    """Whether ``region`` (ndarray of bool, shape (nx, ny, nz)) has a node on any face of
    its grid: for the well's component, whether particles in it reach the box's walls.

    Examples
    --------
    >>> import numpy as np
    >>> region = np.zeros((3, 3, 3), dtype=bool)
    >>> region[1, 1, 1] = True
    >>> touches_wall(region)
    False
    >>> region[1, 1, 2] = True
    >>> touches_wall(region)
    True
    """
    return bool(
        region[0].any() or region[-1].any()
        or region[:, 0].any() or region[:, -1].any()
        or region[:, :, 0].any() or region[:, :, -1].any()
    )


def _bottom_index(grid: LazyGrid, start: tuple[float, ...] | None) -> tuple[int, int, int]:
    """The lowest interior grid point that is a minimum among its 26 neighbours (walls
    included, so a slope falling to a wall is no well), or the grid minimum reached
    downhill from ``start``. A grid with no such point yields its global minimum, on a
    wall, whose region is empty. Without ``start`` the grid must be filled already."""
    values = grid.grid
    if start is None:
        minima = values == ndimage.minimum_filter(values, size=3, mode="nearest")
        minima[[0, -1], :, :] = minima[:, [0, -1], :] = minima[:, :, [0, -1]] = False
        candidates = np.where(minima, values, np.inf)
        if not np.isfinite(candidates).any():
            candidates = values
        i, j, k = np.unravel_index(int(np.argmin(candidates)), values.shape)
        return int(i), int(j), int(k)
    index = [int(np.argmin(np.abs(axis - c))) for axis, c in zip(grid.axes, start)]
    shape = values.shape
    while True:
        low = [max(i - 1, 0) for i in index]
        high = [min(i + 2, s) for i, s in zip(index, shape)]
        grid.fill_box(low, high)
        block = values[tuple(slice(lo, hi) for lo, hi in zip(low, high))]
        best = np.unravel_index(int(np.argmin(block)), block.shape)
        candidate = [lo + int(b) for lo, b in zip(low, best)]
        if values[tuple(candidate)] >= values[tuple(index)]:
            return index[0], index[1], index[2]
        index = candidate
