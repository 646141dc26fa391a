"""Compiled floods over a gridded potential: the minimax escape level and the well's region.

Kernels compiled with numba, over a grid stored flat in C order (any number of axes;
:func:`fill_many` 3-D only), neighbours sharing a face (the connectivity of
``scipy.ndimage.label``'s default):

- :func:`priority_flood` grows the region from a start node in order of its *level*, the
  highest value on the lowest path from the start (a binary heap keyed by (level, node)).
  Each node enters the heap once, when first reached, with ``max(its value, the level of
  the node that reached it)``; nodes leave it in non-decreasing level. The level of the
  first wall node to leave is the minimax escape level, the lowest L for which the
  component of ``{value <= L}`` holding the start touches a wall: one pass, where a
  bisection over the sorted values labels the grid about log2(size) times. That level is
  always one of the grid values, so the two routes agree exactly, not to a tolerance.
- :func:`threshold_fill` is a plain depth-first fill of ``{value <= threshold}`` (or ``<``)
  from the start: the component itself, or whether it reaches a wall; :func:`fill_many`
  asks the second question for many tilts of one 3-D grid in one call.

Node values are ``values[node] - tilt[k]``, ``k`` the node's index along the last axis, so
one untilted grid serves every deceleration (``tilt`` = m a z); zeros leave values as they
are. Values may be filled in lazily: a node whose ``known`` flag is 0 is never read. A
kernel that meets one returns :data:`NEED` with the nodes in ``need``; the caller fills
them in and calls again with the same state arrays, and the run continues where it
stopped (:func:`fill_many` runs the interrupted fill again from its start; it is short).
:mod:`tiltwell.wells.lazygrid` drives them.

State between calls lives in ``meta`` (int64): heap or stack size, nodes popped, nodes
needed, the wall node reached (-1 if none), deferred nodes (the fill only), and for
:func:`fill_many` the fill under way.
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = [
    "EMPTY",
    "FULL",
    "LIMIT",
    "NEED",
    "WALL",
    "fill_many",
    "priority_flood",
    "threshold_fill",
]

#: Return codes of the kernels.
EMPTY, LIMIT, WALL, NEED, FULL = 0, 1, 2, 3, 4
#: Slots of ``meta`` (six of them; the last only for :func:`fill_many`).
SIZE, POPPED, NEEDED, WALL_NODE, DEFERRED, CURRENT = 0, 1, 2, 3, 4, 5


@numba.njit(cache=True)
def _before(p1: float, i1: int, p2: float, i2: int) -> bool:
    """Heap order: by level, ties by node index (so a run is deterministic)."""
    return p1 < p2 or (p1 == p2 and i1 < i2)


@numba.njit(cache=True)
def _push(heap_p, heap_i, size, p, i):  # type: ignore[no-untyped-def]
    position = size
    while position > 0:
        parent = (position - 1) >> 1
        if _before(p, i, heap_p[parent], heap_i[parent]):
            heap_p[position] = heap_p[parent]
            heap_i[position] = heap_i[parent]
            position = parent
        else:
            break
    heap_p[position] = p
    heap_i[position] = i
    return size + 1


@numba.njit(cache=True)
def _pop(heap_p, heap_i, size):  # type: ignore[no-untyped-def]
    """Remove the root; returns the new size."""
    size -= 1
    p, i = heap_p[size], heap_i[size]
    position = 0
    while True:
        child = 2 * position + 1
        if child >= size:
            break
        if child + 1 < size and _before(heap_p[child + 1], heap_i[child + 1], heap_p[child], heap_i[child]):
            child += 1
        if _before(heap_p[child], heap_i[child], p, i):
            heap_p[position] = heap_p[child]
            heap_i[position] = heap_i[child]
            position = child
        else:
            break
    if size > 0:
        heap_p[position] = p
        heap_i[position] = i
    return size


@numba.njit(cache=True)
def _coordinates(node, dims, out):  # type: ignore[no-untyped-def]
    rest = node
    for axis in range(dims.size - 1, -1, -1):
        out[axis] = rest % dims[axis]
        rest //= dims[axis]


@numba.njit(cache=True)
def _strides(dims):  # type: ignore[no-untyped-def]
    steps = np.empty(dims.size, np.int64)
    step = 1
    for axis in range(dims.size - 1, -1, -1):
        steps[axis] = step
        step *= dims[axis]
    return steps


@numba.njit(cache=True)
def _on_wall(coords, dims):  # type: ignore[no-untyped-def]
    for axis in range(dims.size):
        if coords[axis] == 0 or coords[axis] == dims[axis] - 1:
            return True
    return False


@numba.njit(cache=True)
def priority_flood(  # type: ignore[no-untyped-def]
    values, tilt, known, dims, heap_p, heap_i, queued, order, order_p, need, meta, limit, inclusive, stop_at_wall
):
    """Grow the region in order of level; see the module notes.

    Parameters
    ----------
    values : float64 (N,)
        Flat grid values [J] (read only where ``known``).
    tilt : float64 (dims[-1],)
        Subtracted from the values along the last axis [J].
    known : uint8 (N,)
        Which values are filled in.
    dims : int64 (d,)
        Grid shape.
    heap_p, heap_i : float64, int64 (capacity,)
        The heap; seed it with the start node (``meta[SIZE]`` = 1, ``queued[start]`` = 1).
    queued : uint8 (N,)
        Nodes that have entered the heap.
    order, order_p : int64, float64 (N,)
        Nodes in the order they left the heap and their levels; ``meta[POPPED]`` of them.
    need : int64 (2 d,)
        Out: nodes whose values are needed to go on.
    meta : int64 (5,)
        State, see the module notes.
    limit : float
        Stop before a node whose level exceeds ``limit`` (``inclusive``) or reaches it.
    stop_at_wall : bool
        Stop after the first node on a wall leaves the heap (its index in ``meta[WALL_NODE]``).

    Returns
    -------
    int
        EMPTY (all reachable nodes done), LIMIT, WALL, NEED or FULL (the heap needs room).
    """
    d = dims.size
    steps = _strides(dims)
    coords = np.empty(d, np.int64)
    size = meta[SIZE]
    count = meta[POPPED]
    last = d - 1
    status = EMPTY
    while size > 0:
        p = heap_p[0]
        u = heap_i[0]
        if (inclusive and p > limit) or (not inclusive and p >= limit):
            status = LIMIT
            break
        _coordinates(u, dims, coords)
        wanted = 0
        for axis in range(d):
            for side in (-1, 1):
                c = coords[axis] + side
                if 0 <= c < dims[axis]:
                    v = u + side * steps[axis]
                    if queued[v] == 0 and known[v] == 0:
                        need[wanted] = v
                        wanted += 1
        if wanted > 0:
            meta[NEEDED] = wanted
            status = NEED
            break
        if size - 1 + 2 * d > heap_p.size or count >= order.size:
            status = FULL
            break
        size = _pop(heap_p, heap_i, size)
        order[count] = u
        order_p[count] = p
        count += 1
        if stop_at_wall and _on_wall(coords, dims):
            meta[WALL_NODE] = u
            status = WALL
            break
        for axis in range(d):
            for side in (-1, 1):
                c = coords[axis] + side
                if 0 <= c < dims[axis]:
                    v = u + side * steps[axis]
                    if queued[v] == 0:
                        k = c if axis == last else coords[last]
                        q = values[v] - tilt[k]
                        if q < p:
                            q = p
                        size = _push(heap_p, heap_i, size, q, v)
                        queued[v] = 1
    meta[SIZE] = size
    meta[POPPED] = count
    return status


@numba.njit(cache=True)
def threshold_fill(  # type: ignore[no-untyped-def]
    values, tilt, known, dims, stack, places, visited, deferred, need, meta, threshold, inclusive, stop_at_wall
):
    """Fill ``{value <= threshold}`` (``inclusive``) or ``{value < threshold}`` from the
    start; see the module notes.

    ``stack`` holds visited nodes still to expand, ``places`` (same length, d columns)
    their grid coordinates; seed both with the start (``visited`` set, ``meta[SIZE]`` = 1).
    A node with neighbours whose values are not known goes to ``deferred``; when the stack
    runs dry and some are deferred, their unknown neighbours go to ``need`` (as many as it
    holds; the rest are asked for the round after) and the kernel returns NEED, so one
    round asks for all the values it wants at once. The next call takes the deferred nodes
    up again. Returns EMPTY (the component is complete in ``visited``), WALL (a visited
    node lies on a wall; ``meta[WALL_NODE]``), NEED, or FULL (``stack`` needs room for
    ``meta[SIZE] + meta[DEFERRED] + 2 d`` nodes, ``deferred`` for one more than it holds).
    """
    d = dims.size
    steps = _strides(dims)
    last = d - 1
    size = meta[SIZE]
    if size + meta[DEFERRED] + 2 * d > stack.size:
        return FULL
    if meta[DEFERRED] == 0 and size == 1 and stop_at_wall and _on_wall(places[0], dims):  # the seed
        meta[WALL_NODE] = stack[0]
        return WALL
    for j in range(meta[DEFERRED]):
        stack[size] = deferred[j]
        _coordinates(deferred[j], dims, places[size])
        size += 1
    meta[DEFERRED] = 0
    held = 0
    wanted = 0
    here = np.empty(d, np.int64)
    while size > 0:
        if size + 2 * d > stack.size or held >= deferred.size:
            meta[SIZE] = size
            meta[DEFERRED] = held
            return FULL
        size -= 1
        u = stack[size]
        for axis in range(d):
            here[axis] = places[size, axis]
        waits = False
        for axis in range(d):
            c0 = here[axis]
            for side in (-1, 1):
                c = c0 + side
                if c < 0 or c >= dims[axis]:
                    continue
                v = u + side * steps[axis]
                if visited[v] != 0:
                    continue
                if known[v] == 0:
                    if wanted < need.size:
                        need[wanted] = v
                        wanted += 1
                    waits = True
                    continue
                q = values[v] - tilt[c if axis == last else here[last]]
                if (inclusive and q <= threshold) or (not inclusive and q < threshold):
                    visited[v] = 1
                    wall = c == 0 or c == dims[axis] - 1
                    for other in range(d):
                        places[size, other] = here[other]
                        if other != axis and (here[other] == 0 or here[other] == dims[other] - 1):
                            wall = True
                    places[size, axis] = c
                    if stop_at_wall and wall:
                        meta[WALL_NODE] = v
                        meta[SIZE] = 0
                        return WALL
                    stack[size] = v
                    size += 1
        if waits:
            deferred[held] = u
            held += 1
    meta[SIZE] = 0
    meta[DEFERRED] = held
    meta[NEEDED] = wanted
    return NEED if held > 0 else EMPTY


@numba.njit(cache=True)
def _fill3(values, tilt, known, dims, start, threshold, visited, stack, need):  # type: ignore[no-untyped-def]
    """Depth-first fill of ``{value <= threshold}`` on a 3-D grid from ``start`` (its value
    known and within the threshold, not on a wall), until a wall node joins it.

    Nodes with unknown values are skipped and listed in ``need`` (as many as it holds).
    Returns (WALL, count): the component reaches a wall along known nodes (so it does,
    whatever the unknown values); (EMPTY, 0): it is closed; (NEED, count): closed as far
    as the known values go, ``count`` nodes needed.
    """
    nx, ny, nz = dims[0], dims[1], dims[2]
    sy, sx = nz, ny * nz
    visited[:] = 0
    visited[start] = 1
    stack[0] = start
    size = 1
    wanted = 0
    while size > 0:
        size -= 1
        u = stack[size]
        i = u // sx
        rest = u - i * sx
        j = rest // sy
        k = rest - j * sy
        for move in range(6):
            if move == 0:
                ok, v, c, n, kk = i > 0, u - sx, i - 1, nx, k
            elif move == 1:
                ok, v, c, n, kk = i < nx - 1, u + sx, i + 1, nx, k
            elif move == 2:
                ok, v, c, n, kk = j > 0, u - sy, j - 1, ny, k
            elif move == 3:
                ok, v, c, n, kk = j < ny - 1, u + sy, j + 1, ny, k
            elif move == 4:
                ok, v, c, n, kk = k > 0, u - 1, k - 1, nz, k - 1
            else:
                ok, v, c, n, kk = k < nz - 1, u + 1, k + 1, nz, k + 1
            if not ok or visited[v] != 0:
                continue
            if known[v] == 0:
                if wanted < need.size:
                    need[wanted] = v
                wanted += 1
                continue
            if values[v] - tilt[kk] <= threshold:
                visited[v] = 1
                if c == 0 or c == n - 1:
                    return WALL, wanted
                stack[size] = v
                size += 1
    return (NEED, min(wanted, need.size)) if wanted > 0 else (EMPTY, 0)


@numba.njit(cache=True)
def fill_many(values, tilts, known, dims, starts, thresholds, reached, visited, stack, need, meta):  # type: ignore[no-untyped-def]
    """For many tilts of one 3-D grid, whether ``{values - tilts[i] <= thresholds[i]}``
    holds a path of face neighbours from node ``starts[i]`` to a wall (``reached[i]``).

    ``meta[CURRENT]`` is the fill under way (start at 0). A fill that meets unknown values
    before a wall returns NEED (nodes in ``need``, their number in ``meta[NEEDED]``); the
    next call runs that fill again from its start. Returns EMPTY when all are done.
    ``stack`` must hold every node of the grid.
    """
    last = dims.size - 1
    while meta[CURRENT] < starts.size:
        i = meta[CURRENT]
        start = starts[i]
        if known[start] == 0:
            need[0] = start
            meta[NEEDED] = 1
            return NEED
        k = start % dims[last]
        if values[start] - tilts[i, k] > thresholds[i]:
            reached[i] = False
        else:
            rest, wall = start, False
            for axis in range(dims.size - 1, -1, -1):
                c = rest % dims[axis]
                rest //= dims[axis]
                wall = wall or c == 0 or c == dims[axis] - 1
            if wall:
                reached[i] = True
            else:
                status, count = _fill3(values, tilts[i], known, dims, start, thresholds[i], visited, stack, need)
                if status == NEED:
                    meta[NEEDED] = count
                    return NEED
                reached[i] = status == WALL
        meta[CURRENT] = i + 1
    return EMPTY
