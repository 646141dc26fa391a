"""A potential on a regular grid, evaluated block by block where a flood needs it.

The compiled floods of :mod:`tiltwell.wells.flood` grow the well from its bottom and read
only the nodes they reach and their neighbours: in a trap at work a few per cent to a
fifth of the box. :class:`LazyGrid` computes the potential in cubes of
:data:`BLOCK` nodes per axis the first time a flood asks for one of their nodes, each
block the same numbers the whole grid would have given (the potential is evaluated point
by point). :class:`GivenGrid` wraps values already known everywhere.

:func:`run_flood` and :func:`run_fill` drive the kernels, filling in values and making
room in the state arrays until the kernels finish.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any, TypeVar, cast

import numpy as np
from numpy.typing import NDArray

from .._base.validation import TiltwellError
from . import flood

__all__ = ["BLOCK", "FloodRun", "GivenGrid", "LazyGrid", "run_fill", "run_fills", "run_flood"]

FloatArray = NDArray[np.float64]
ArrayT = TypeVar("ArrayT", bound=NDArray[Any])
Evaluate = Callable[[FloatArray, FloatArray, FloatArray], FloatArray]

#: Nodes per axis of one lazily evaluated block: small enough that the blocks a flood
#: reaches hug the well, large enough that the per-call cost of the potential stays small.
BLOCK = 4
#: How far from the start's value towards a hinted level :func:`run_flood` fills ahead.
PREFETCH = 0.98
#: Slots of the kernels' state array.
_META = 6
#: First capacity of a heap or a stack, in nodes (they grow by doubling).
_FIRST_CAPACITY = 4096


class GivenGrid:
    """Grid values known everywhere: ``values`` (any shape, finite) as the floods read them."""

    def __init__(self, values: NDArray[np.float64]) -> None:
        array = np.ascontiguousarray(values, dtype=np.float64)
        self.shape: tuple[int, ...] = array.shape
        self.dims = np.array(array.shape, dtype=np.int64)
        self.values = array.reshape(-1)
        self.known = np.ones(self.values.size, dtype=np.uint8)

    def need(self, nodes: NDArray[np.int64]) -> None:
        """Nothing to compute: every value is known."""


class LazyGrid:
    """``evaluate(x, y, z)`` [J] on the grid ``axes`` [m], computed a block at a time.

    Parameters
    ----------
    evaluate : callable
        The potential [J] at broadcastable positions [m], point by point.
    axes : three 1-D arrays
        Grid coordinates [m] along x, y, z.
    block : int
        Nodes per axis of a block.
    mirror_xy : bool
        The potential is unchanged, to the last bit, by x -> -x, y -> -y and x <-> y (as
        for a field symmetric about the z axis computed from x^2, y^2 and hypot(x, y)):
        nodes whose (|x|, |y|) are the same pair at the same z share one evaluation.

    Attributes
    ----------
    values : ndarray, shape (nx * ny * nz,)
        The potential [J] in C order; +inf where not yet computed.
    known : ndarray of uint8, same shape
        1 where ``values`` is computed.
    points : int
        Positions handed to ``evaluate`` so far.
    """

    def __init__(self, evaluate: Evaluate, axes: Sequence[FloatArray], block: int = BLOCK,
                 mirror_xy: bool = False) -> None:
        self.evaluate = evaluate
        self.axes = [np.asarray(axis, dtype=np.float64) for axis in axes]
        self.shape = tuple(axis.size for axis in self.axes)
        self.dims = np.array(self.shape, dtype=np.int64)
        self.block = block
        self.blocks = tuple(-(-n // block) for n in self.shape)
        self.values = np.full(math.prod(self.shape), np.inf)
        self.known = np.zeros(self.values.size, dtype=np.uint8)
        self.done = np.zeros(self.blocks, dtype=bool)
        self._offsets = np.stack(np.meshgrid(*[np.arange(block)] * 3, indexing="ij"), axis=-1).reshape(-1, 3)
        self.points = 0
        self.mirror_xy = mirror_xy
        if mirror_xy:  # class of each |x| and |y|: its rank among all distinct |x| and |y|
            sizes = np.abs(np.concatenate(self.axes[:2]))
            distinct, rank = np.unique(sizes, return_inverse=True)
            self.classes = distinct.size
            self.rank_x, self.rank_y = rank[: self.shape[0]], rank[self.shape[0]:]
            self.class_values = np.empty(self.classes**2 * self.shape[2])
            self.class_known = np.zeros(self.class_values.size, dtype=bool)

    @property
    def grid(self) -> FloatArray:
        """``values`` as an (nx, ny, nz) view."""
        return self.values.reshape(self.shape)

    def fill_all(self) -> None:
        """Compute every node; without ``mirror_xy`` in one call on the sparse grid, as a
        whole-grid evaluation does."""
        if self.done.all():
            return
        if self.mirror_xy:
            self._compute(np.flatnonzero(self.known == 0))
        else:
            x, y, z = np.meshgrid(*self.axes, indexing="ij", sparse=True)
            result = self._evaluated((x, y, z), self.shape)
            self.values[:] = result.reshape(-1)
            self.known[:] = 1
        self.done[...] = True

    def need(self, nodes: NDArray[np.int64]) -> None:
        """Compute the blocks holding ``nodes`` (flat indices), all in one call."""
        nodes = np.asarray(nodes, dtype=np.int64)
        if self.known[nodes].all():
            return
        coords = np.unravel_index(nodes, self.shape)
        owners = np.unique(np.ravel_multi_index(tuple(c // self.block for c in coords), self.blocks))
        self._fill_blocks(np.stack(np.unravel_index(owners, self.blocks), axis=1))

    def fill_box(self, low: Sequence[int], high: Sequence[int]) -> None:
        """Compute the blocks covering nodes ``low[i] <= index[i] < high[i]``."""
        ranges = [np.arange(lo // self.block, (hi - 1) // self.block + 1) for lo, hi in zip(low, high)]
        self._fill_blocks(np.stack(np.meshgrid(*ranges, indexing="ij"), axis=-1).reshape(-1, 3))

    def _fill_blocks(self, blocks: NDArray[np.int64]) -> None:
        """Compute the blocks with indices ``blocks`` (k, 3) not computed yet."""
        todo = blocks[~self.done[tuple(blocks.T)]]
        if todo.size == 0:
            return
        self.done[tuple(todo.T)] = True
        coords = todo[:, None, :] * self.block + self._offsets[None, :, :]  # (blocks, B^3, 3)
        inside = np.all(coords < self.dims, axis=2)
        nodes = np.ravel_multi_index(tuple(coords[inside].T), self.shape)
        self._compute(nodes[self.known[nodes] == 0])

    def _compute(self, nodes: NDArray[np.int64]) -> None:
        """Fill in ``nodes`` (flat indices, not yet known) with one call of ``evaluate``."""
        if nodes.size == 0:
            return
        coords = np.unravel_index(nodes, self.shape)
        if not self.mirror_xy:
            points = tuple(axis[c] for axis, c in zip(self.axes, coords))
            self.values[nodes] = self._evaluated(points, nodes.shape)
        else:
            rx, ry = self.rank_x[coords[0]], self.rank_y[coords[1]]
            keys = (np.minimum(rx, ry) * self.classes + np.maximum(rx, ry)) * self.shape[2] + coords[2]
            fresh, first = np.unique(keys, return_index=True)
            first = first[~self.class_known[fresh]]
            if first.size:
                points = tuple(axis[c[first]] for axis, c in zip(self.axes, coords))
                self.class_values[keys[first]] = self._evaluated(points, first.shape)
                self.class_known[keys[first]] = True
            self.values[nodes] = self.class_values[keys]
        self.known[nodes] = 1

    def _evaluated(self, points: tuple[FloatArray, ...], shape: tuple[int, ...]) -> FloatArray:
        self.points += math.prod(np.broadcast_shapes(*(p.shape for p in points)))
        result = np.broadcast_to(np.asarray(self.evaluate(*points), dtype=np.float64), shape)
        if not np.all(np.isfinite(result)):
            raise TiltwellError("potential returned NaN or infinite values inside bounds [J]")
        return result


Grid = GivenGrid | LazyGrid


@dataclass(frozen=True)
class FloodRun:
    """What :func:`run_flood` found.

    Attributes
    ----------
    order : ndarray of int64
        Flat indices of the nodes in the order they left the heap.
    levels : ndarray of float64
        Their levels [J] (non-decreasing): the minimax value from the start to each.
    wall_level : float or None
        The level of the first wall node: the escape level; None if the flood stopped first.
    """

    order: NDArray[np.int64]
    levels: FloatArray
    wall_level: float | None


def _zero_tilt(grid: Grid, tilt: FloatArray | None) -> FloatArray:
    return np.zeros(int(grid.dims[-1])) if tilt is None else np.ascontiguousarray(tilt, dtype=np.float64)


def run_flood(
    grid: Grid,
    start: int,
    *,
    tilt: FloatArray | None = None,
    limit: float = math.inf,
    inclusive: bool = True,
    stop_at_wall: bool = True,
    hint: float | None = None,
) -> FloodRun:
    """Priority flood from node ``start`` (flat index) of ``grid``; see :func:`flood.priority_flood`.

    ``hint`` [J], a guess of the level where the flood will stop, lets a lazy grid compute
    the blocks the flood will need in a few rounds of one call each: :func:`run_fill` up
    to :data:`PREFETCH` of the way from the start's value to the hint, a component that
    is likely closed, so the fill covers it whole rather than running to a wall. The
    flood then asks only for the rest. The result is the same with or without a hint.
    """
    shift = _zero_tilt(grid, tilt)
    if hint is not None and isinstance(grid, LazyGrid):
        grid.need(np.array([start]))
        floor = grid.values[start] - shift[start % int(grid.dims[-1])]
        run_fill(grid, start, floor + PREFETCH * (hint - floor), tilt=tilt, stop_at_wall=True)
    grid.need(np.array([start]))
    size = grid.values.size
    capacity = min(size, _FIRST_CAPACITY)
    heap_p, heap_i = np.empty(capacity), np.empty(capacity, dtype=np.int64)
    order, order_p = np.empty(capacity, dtype=np.int64), np.empty(capacity)
    queued = np.zeros(size, dtype=np.uint8)
    need = np.empty(2 * grid.dims.size, dtype=np.int64)
    meta = np.zeros(_META, dtype=np.int64)
    heap_p[0] = grid.values[start] - shift[start % int(grid.dims[-1])]
    heap_i[0] = start
    queued[start] = 1
    meta[flood.SIZE], meta[flood.WALL_NODE] = 1, -1
    while True:
        status = flood.priority_flood(grid.values, shift, grid.known, grid.dims, heap_p, heap_i, queued,
                                      order, order_p, need, meta, limit, inclusive, stop_at_wall)
        if status == flood.NEED:
            wanted = need[: meta[flood.NEEDED]]
            if hint is not None:  # and what the heap's nodes below the hint will want
                size = int(meta[flood.SIZE])
                ahead = heap_i[:size][heap_p[:size] <= max(hint, heap_p[0])]
                wanted = np.concatenate([wanted, _unknown_neighbours(grid, ahead, queued)])
            grid.need(wanted)
        elif status == flood.FULL:
            heap_p, heap_i = _grown(heap_p), _grown(heap_i)
            order, order_p = _grown(order), _grown(order_p)
        else:
            break
    popped = int(meta[flood.POPPED])
    wall = float(order_p[popped - 1]) if status == flood.WALL else None
    return FloodRun(order[:popped].copy(), order_p[:popped].copy(), wall)


def run_fill(
    grid: Grid,
    start: int,
    threshold: float,
    *,
    tilt: FloatArray | None = None,
    inclusive: bool = True,
    stop_at_wall: bool = False,
) -> tuple[NDArray[np.bool_], bool]:
    """Component of ``{value <= threshold}`` (or ``<``) holding node ``start`` (flat index).

    Returns the visited nodes (flat bool; complete unless a wall was reached with
    ``stop_at_wall``) and whether a wall was reached. An empty component when the start
    itself does not qualify.
    """
    shift = _zero_tilt(grid, tilt)
    grid.need(np.array([start]))
    size = grid.values.size
    visited = np.zeros(size, dtype=np.uint8)
    value = grid.values[start] - shift[start % int(grid.dims[-1])]
    if not (value <= threshold if inclusive else value < threshold):
        return visited.view(bool), False
    capacity = min(size + 2 * grid.dims.size, _FIRST_CAPACITY)
    stack, deferred = np.empty(capacity, dtype=np.int64), np.empty(capacity, dtype=np.int64)
    places = np.empty((capacity, grid.dims.size), dtype=np.int64)
    need = np.empty(capacity, dtype=np.int64)
    meta = np.zeros(_META, dtype=np.int64)
    stack[0] = start
    places[0] = np.unravel_index(start, grid.shape)
    visited[start] = 1
    meta[flood.SIZE], meta[flood.WALL_NODE] = 1, -1
    while True:
        status = flood.threshold_fill(grid.values, shift, grid.known, grid.dims, stack, places, visited,
                                      deferred, need, meta, threshold, inclusive, stop_at_wall)
        if status == flood.NEED:
            grid.need(need[: meta[flood.NEEDED]])
        elif status == flood.FULL:
            stack, deferred, places = _grown(stack), _grown(deferred), _grown(places)
        else:
            break
    return visited.view(bool), status == flood.WALL


def run_fills(grid: Grid, starts: NDArray[np.int64], thresholds: FloatArray, tilts: FloatArray) -> NDArray[np.bool_]:
    """For each i, whether the component of ``{value - tilts[i] <= thresholds[i]}`` holding
    node ``starts[i]`` reaches a wall: :func:`run_fill` with ``stop_at_wall`` for many
    tilts (``tilts`` shape (n, nz) [J]) of a 3-D grid in one compiled call."""
    count = len(starts)
    reached = np.zeros(count, dtype=np.bool_)
    if count == 0:
        return reached
    visited = np.zeros(grid.values.size, dtype=np.uint8)
    stack = np.empty(grid.values.size, dtype=np.int64)
    need = np.empty(min(grid.values.size, _FIRST_CAPACITY), dtype=np.int64)
    meta = np.zeros(_META, dtype=np.int64)
    starts = np.ascontiguousarray(starts, dtype=np.int64)
    thresholds = np.ascontiguousarray(thresholds, dtype=np.float64)
    tilts = np.ascontiguousarray(tilts, dtype=np.float64)
    while flood.fill_many(grid.values, tilts, grid.known, grid.dims, starts, thresholds, reached, visited, stack,
                          need, meta) == flood.NEED:
        grid.need(need[: meta[flood.NEEDED]])
    return reached


def _unknown_neighbours(grid: Grid, nodes: NDArray[np.int64], queued: NDArray[np.uint8]) -> NDArray[np.int64]:
    """Face neighbours of ``nodes`` (flat indices) not yet queued whose values are unknown."""
    coords = np.unravel_index(nodes, grid.shape)
    found = []
    for axis, n in enumerate(grid.shape):
        for side in (-1, 1):
            moved = coords[axis] + side
            keep = (moved >= 0) & (moved < n)
            shifted = [c[keep] for c in coords]
            shifted[axis] = moved[keep]
            found.append(np.ravel_multi_index(tuple(shifted), grid.shape))
    candidates = np.concatenate(found)
    return candidates[(grid.known[candidates] == 0) & (queued[candidates] == 0)]


def _grown(array: ArrayT) -> ArrayT:
    """A copy of ``array`` with twice the rows."""
    bigger = np.empty((2 * array.shape[0],) + array.shape[1:], dtype=array.dtype)
    bigger[: array.shape[0]] = array
    return cast(ArrayT, bigger)
