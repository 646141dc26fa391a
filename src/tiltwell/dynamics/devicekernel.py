"""Compiled (numba) device step of :func:`tiltwell.track_device`: many steps per call,
particles in blocks, a small window of summed coil tables per force evaluation.

Layout. The working set is one array ``rows`` (9, n): positions x, y, z [m], velocities
vx, vy, vz [m/s] and the last accelerations ax, ay, az [m/s^2], each row contiguous, cut
into blocks of :data:`BLOCK` particles. A call covers a few steps: first it sums, for each
of its force evaluations, the tables of the coils carrying current over the window of nodes
around the trap and stores each cell's 24 bilinear coefficients (6 quantities x c0, cu, cz,
cuz, as ``SummedCoilField.load`` forms them; about 1 MB a window on the default map with a
4 mm box, within the 2 MB L2), then every block runs all the call's steps before the next
block starts, the particle loop innermost. A particle found outside the box
at a step end is recorded at once and dropped from the working set at the end of the call
(the arrays are compacted in order); within the call it is stepped on, unread.

Threads. :func:`advance_threads` runs the blocks under ``prange`` on
``numba.get_num_threads()`` threads (each parallel region covers all the call's steps; a
call of fewer than :data:`THREAD_WORK` particle evaluations runs on one). It is also the
fast kernel on one thread: inside a parallel region numba marks the arrays as not aliasing
one another, so the particle loop, whose table look-ups are gathers, vectorises; the serial
:func:`advance` (same arithmetic, scalar) serves calls from another thread or from a
forked process (GNU OpenMP is not fork-safe). The result does not depend on the route or
the thread count: every particle is stepped on its own.

Arithmetic. The same operations in the same order as the numpy route
(:meth:`~tiltwell.dynamics.coilmap.CoilFieldMap.window`,
:meth:`~tiltwell.dynamics.coilmap.SummedCoilField.load` and ``acceleration``, the kicks and
drifts and the box test of :func:`tiltwell.track_device`), compiled without ``fastmath`` (no
reassociation, no fused multiply-add): the trajectories are the numpy route's bit for bit
(``tests/test_compiled_device.py`` checks it). Only a linear Zeeman state is compiled (its
constant slope); other Zeeman models run the numpy route.

:func:`step` drives the calls from :func:`tiltwell.track_device`; :data:`ENABLED` False
forces the numpy route (the tests' reference).
"""

from __future__ import annotations

import math
import os
import threading
from typing import Any

import numba
import numpy as np
from numba import prange
from numpy.typing import NDArray

__all__ = [
    "BLOCK", "ENABLED", "THREAD_WORK", "WINDOWS", "accelerate", "advance", "advance_threads", "step", "sum_windows",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

#: Use the compiled device step (False: the numpy route, for reference runs).
ENABLED = True
#: Particles per block: 32 float64 = 256 bytes a row, a block's 9 rows 2.3 kB of L1.
BLOCK = 32
#: Particle force evaluations a call must hold to run on more than one thread (about 10 ms;
#: smaller calls run on one, where waking a second thread on a shared machine costs more).
THREAD_WORK = 1 << 19
#: Force evaluations per call (8 Verlet steps, 2 Yoshida-4 steps). Measured on the 300-coil
#: row of benchmarks/bench_device.py, one thread: 4 and 8 within 2 %, so 8, which lets a call
#: of 1e5 particles pass :data:`THREAD_WORK`.
WINDOWS = 8

_jit = numba.njit(cache=True, error_model="numpy")  # numpy's error model: no divide-by-zero branch
_HOME = os.getpid()


@_jit
def sum_windows(table: FloatArray, coils: IntArray, currents: FloatArray, starts: IntArray, per_pitch: int,
                half_nodes: int, out: FloatArray) -> None:
    """The cells ``out`` (W, n_rho - 1, nodes - 1, 24) of the summed tables of the unit-coil
    ``table`` (n_rho, n_z, 6): entry w sums coils ``coils[w]`` (coil k on node k
    ``per_pitch``) carrying ``currents[w]`` [A] on the row's nodes ``starts[w]`` ...
    ``starts[w] + nodes - 1`` (``CoilFieldMap.window``), and holds each cell's bilinear
    coefficients (c0, cu, cz, cuz; 6 quantities each) as ``SummedCoilField.load`` forms them."""
    n_u, n_z = table.shape[0], table.shape[1]
    nodes = out.shape[2] + 1
    source = table.reshape(-1)
    t = np.empty((n_u, nodes, 6))
    flat = t.reshape(-1)
    for w in range(coils.shape[0]):
        flat[:] = 0.0
        for c in range(coils.shape[1]):
            current = currents[w, c]
            low = starts[w] - coils[w, c] * per_pitch + half_nodes  # table column of the first window node
            first, last = max(low, 0), min(low + nodes, n_z)
            for iu in range(n_u):
                into, at = (iu * nodes + first - low) * 6, (iu * n_z + first) * 6
                for e in range(max(last - first, 0) * 6):  # the nodes first ... last - 1, 6 values each
                    flat[into + e] += current * source[at + e]
        cells = out[w]
        for iu in range(n_u - 1):
            for iz in range(nodes - 1):
                for j in range(6):
                    c0 = t[iu, iz, j]
                    cz = t[iu, iz + 1, j] - c0
                    cells[iu, iz, j] = c0
                    cells[iu, iz, 6 + j] = t[iu + 1, iz, j] - c0
                    cells[iu, iz, 12 + j] = cz
                    cells[iu, iz, 18 + j] = t[iu + 1, iz + 1, j] - t[iu + 1, iz, j] - cz


@numba.njit(cache=True, error_model="numpy", inline="always")
def _corner(cells: FloatArray, w: int, iu: int, iz: int, j: int, wu: float, wz: float) -> float:
    """Quantity ``j`` interpolated bilinearly in cell (iu, iz) of window ``w`` of ``cells`` at
    fractions (wu, wz), in ``SummedCoilField.acceleration``'s order."""
    value = cells[w, iu, iz, 12 + j] + wu * cells[w, iu, iz, 18 + j]
    value = value * wz
    value = value + cells[w, iu, iz, j]
    return value + wu * cells[w, iu, iz, 6 + j]


@numba.njit(cache=True, error_model="numpy", inline="always")
def _force(x: float, y: float, z: float, cells: FloatArray, w: int, start: float,
           g: tuple[float, float, float, float, float]) -> tuple[float, float, float]:
    """Acceleration [m/s^2] at lab position (x, y, z) [m] from window ``w`` of ``cells``
    (W, n_rho - 1, nodes - 1, 24), a summed table starting on row node ``start``; ``g`` =
    (1/u_step, 1/z_step, first, moment, -1/m) as ``SummedCoilField.acceleration`` forms
    them. (The window is indexed, not sliced: no view inside a parallel region, so numba
    finds no aliases there and the loop vectorises.)"""
    n_u, nodes = cells.shape[1] + 1, cells.shape[2] + 1
    u = x * x + y * y
    su = u * g[0]
    if su > n_u - 1.0:
        su = n_u - 1.0
    sz = (z - g[2]) * g[1] - start
    if sz < 0.0:
        sz = 0.0
    if sz > nodes - 1.0:
        sz = nodes - 1.0
    iu = min(int(su), n_u - 2)
    iz = min(int(sz), nodes - 2)
    wu = su - iu
    wz = sz - iz
    f = _corner(cells, w, iu, iz, 0, wu, wz)
    fu = _corner(cells, w, iu, iz, 1, wu, wz)
    fz = _corner(cells, w, iu, iz, 2, wu, wz)
    bz = _corner(cells, w, iu, iz, 3, wu, wz)
    bzu = _corner(cells, w, iu, iz, 4, wu, wz)
    bzz = _corner(cells, w, iu, iz, 5, wu, wz)
    size = math.sqrt(f * f * u + bz * bz)
    inverse = 1.0 / size if size > 0.0 else 0.0
    inverse = inverse * g[3]
    inverse = inverse * g[4]
    radial = f * (fu * u + 0.5 * f) + bz * bzu
    radial = radial * (2.0 * inverse)
    return radial * x, radial * y, (f * fz * u + bz * bzz) * inverse


@_jit
def accelerate(rows: FloatArray, count: int, windows: FloatArray, start: int, geometry: FloatArray) -> None:
    """Write the accelerations of the first ``count`` particles of ``rows`` (9, n) into rows 6-8
    (window 0 of the cells ``windows``, from row node ``start``)."""
    g = (geometry[0], geometry[1], geometry[2], geometry[3], geometry[4])
    for i in range(count):
        rows[6, i], rows[7, i], rows[8, i] = _force(rows[0, i], rows[1, i], rows[2, i], windows, 0, float(start), g)


@numba.njit(cache=True, error_model="numpy", inline="always")
def _block(rows: FloatArray, ids: IntArray, low: int, high: int, windows: FloatArray, starts: IntArray,
           geometry: FloatArray, schedule: FloatArray, motion: FloatArray, first_step: int, final: FloatArray,
           lost_step: IntArray) -> None:
    """Steps ``first_step + 1`` ... of particles ``low`` ... ``high - 1`` (the block at
    ``low``, copied into a buffer of fixed shape (9, BLOCK); ``rows`` is padded to whole
    blocks): ``schedule`` (3, s) holds each step's first kick, drifts and kicks [s];
    ``motion`` (5, steps + 1) the step ends' trap position [m] and speed [m/s] and the box
    half widths [m] (rows 2-4, column 0)."""
    evaluations = schedule.shape[1]
    steps = windows.shape[0] // evaluations
    hx, hy, hz = motion[2, 0], motion[3, 0], motion[4, 0]
    first_kick = schedule[0, 0]
    g = (geometry[0], geometry[1], geometry[2], geometry[3], geometry[4])
    buf = np.empty((9, BLOCK))
    for r in range(9):
        for i in range(BLOCK):
            buf[r, i] = rows[r, low + i]
    for s in range(steps):
        for j in range(evaluations):
            w = s * evaluations + j
            start = float(starts[w])
            drift, kick = schedule[1, j], schedule[2, j]
            if j == 0:
                for i in range(BLOCK):
                    buf[3, i] += first_kick * buf[6, i]
                    buf[4, i] += first_kick * buf[7, i]
                    buf[5, i] += first_kick * buf[8, i]
            for i in range(BLOCK):
                x = buf[0, i] + drift * buf[3, i]
                y = buf[1, i] + drift * buf[4, i]
                z = buf[2, i] + drift * buf[5, i]
                buf[0, i], buf[1, i], buf[2, i] = x, y, z
                gx, gy, gz = _force(x, y, z, windows, w, start, g)
                buf[6, i], buf[7, i], buf[8, i] = gx, gy, gz
                buf[3, i] += kick * gx
                buf[4, i] += kick * gy
                buf[5, i] += kick * gz
        k = first_step + s + 1
        centre, speed = motion[0, k], motion[1, k]
        for i in range(high - low):
            x, y, shifted = buf[0, i], buf[1, i], buf[2, i] - centre
            if (x <= -hx or x >= hx or y <= -hy or y >= hy or shifted <= -hz or shifted >= hz) \
                    and lost_step[ids[low + i]] > k:
                n = ids[low + i]
                final[n, 0], final[n, 1], final[n, 2] = x, y, shifted
                final[n, 3], final[n, 4], final[n, 5] = buf[3, i], buf[4, i], buf[5, i] - speed
                lost_step[n] = k
    for r in range(9):
        for i in range(BLOCK):
            rows[r, low + i] = buf[r, i]


@_jit
def _compact(rows: FloatArray, ids: IntArray, count: int, lost_step: IntArray, staying: int) -> int:
    """Move the particles still inside (``lost_step`` == ``staying``) to the front, in order;
    returns their number."""
    kept = 0
    for i in range(count):
        if lost_step[ids[i]] == staying:
            if kept != i:
                rows[:, kept] = rows[:, i]
                ids[kept] = ids[i]
            kept += 1
    return kept


@_jit
def advance(rows: FloatArray, ids: IntArray, count: int, windows: FloatArray, starts: IntArray, geometry: FloatArray,
            schedule: FloatArray, motion: FloatArray, first_step: int, final: FloatArray, lost_step: IntArray,
            staying: int) -> int:
    """Step the first ``count`` particles of ``rows`` (9, n) (their indices ``ids``) through
    the ``windows.shape[0] / s`` steps after ``first_step``, the blocks one after the other;
    record those that leave into ``final`` (N, 6) and ``lost_step`` (N,) (``staying``: still
    inside). Returns ``count``: the leavers stay in place (stepped on, unread) until
    :func:`step` compacts the working set."""
    for low in range(0, count, BLOCK):
        _block(rows, ids, low, min(low + BLOCK, count), windows, starts, geometry, schedule, motion, first_step,
               final, lost_step)
    return count


@numba.njit(cache=True, error_model="numpy", parallel=True)
def advance_threads(rows: FloatArray, ids: IntArray, count: int, windows: FloatArray, starts: IntArray,
                    geometry: FloatArray, schedule: FloatArray, motion: FloatArray, first_step: int,
                    final: FloatArray, lost_step: IntArray, staying: int) -> int:
    """:func:`advance` with the blocks on ``numba.get_num_threads()`` threads (each particle
    on its own: the result does not depend on the thread count)."""
    blocks = (count + BLOCK - 1) // BLOCK
    for b in prange(blocks):
        low = b * BLOCK
        _block(rows, ids, low, min(low + BLOCK, count), windows, starts, geometry, schedule, motion, first_step,
               final, lost_step)
    return count


def step(table: Any, nodes: int, plan: tuple[IntArray, FloatArray, IntArray], geometry: FloatArray,
         schedule: FloatArray, motion: FloatArray, state: FloatArray, index: IntArray, final: FloatArray,
         lost_step: IntArray, bar: Any) -> IntArray:
    """Run the compiled device step for the particles ``index`` (those inside at t = 0).

    Parameters
    ----------
    table : CoilFieldMap
        The unit coil's map (its ``table``, ``per_pitch``, ``half_nodes``).
    nodes : int
        Nodes of the window along z (``SummedCoilField.nodes``).
    plan : (coils, currents, starts)
        Per force evaluation: coil indices (M, K), currents (M, K) [A] and the first row
        node of the window (M,).
    geometry, schedule, motion : ndarray
        As :func:`advance` takes them (``motion`` (5, steps + 1)).
    state : ndarray, shape (N, 6)
        Lab-frame start [m, m/s].
    index : ndarray of int
        The particles that start inside the box.
    final, lost_step : ndarray
        Filled in place for the particles that leave (trap frame; the step they left).
    bar : progress bar or None

    Returns
    -------
    ndarray of int
        The indices of the particles still inside, in order; their lab-frame state is in
        ``state[...]`` on return (written back).
    """
    coils, currents, starts = plan
    evaluations = schedule.shape[1]
    steps = motion.shape[1] - 1
    per_call = max(WINDOWS // evaluations, 1)
    n_u = table.table.shape[0]
    windows = np.empty((per_call * evaluations, n_u - 1, nodes - 1, 24))
    rows = np.zeros((9, index.size + (-index.size % BLOCK)))  # padded to whole blocks
    rows[:6, :index.size] = state[index].T
    ids = np.ascontiguousarray(index, dtype=np.int64)
    count = index.size
    sum_windows(table.table, coils[:1], currents[:1], starts[:1], table.per_pitch, table.half_nodes, windows[:1])
    accelerate(rows, count, windows, int(starts[0]), geometry)
    staying = steps + 1
    for done in range(0, steps, per_call):
        if count == 0:
            break
        span = min(per_call, steps - done)
        moments = slice(done * evaluations + 1, (done + span) * evaluations + 1)
        used = windows[:span * evaluations]
        sum_windows(table.table, coils[moments], currents[moments], starts[moments], table.per_pitch,
                    table.half_nodes, used)
        if _threaded(count):
            threads = numba.get_num_threads()
            numba.set_num_threads(threads if count * used.shape[0] >= THREAD_WORK else 1)
            try:
                advance_threads(rows, ids, count, used, starts[moments], geometry, schedule, motion, done, final,
                                lost_step, staying)
            finally:
                numba.set_num_threads(threads)
        else:
            advance(rows, ids, count, used, starts[moments], geometry, schedule, motion, done, final, lost_step,
                    staying)
        count = _compact(rows, ids, count, lost_step, staying)
        if bar is not None:
            bar.update(span)
    state[ids[:count]] = rows[:6, :count].T
    return ids[:count]


def _threaded(living: int) -> bool:
    """Whether to run :func:`advance_threads` (module notes): called from the main thread of
    the importing process (GNU OpenMP is not fork-safe, and a parallel region is not entered
    from two threads at once), with at least one block."""
    return living > 0 and os.getpid() == _HOME and threading.current_thread() is threading.main_thread()
