"""Compiled (numba) kernels of :func:`tiltwell.track`: many steps of the rigid-trap splitting
per call, particles in blocks, on plain arrays.

Layout. The working set is one array ``rows`` (6, n): positions x, y, z [m] and ``u = v dt``
[m], each row a separate contiguous array, cut into blocks of :data:`BLOCK`. A block is
copied into a buffer of fixed shape and runs every step of a call before the next block
starts (the step loop around the particle loop), so it stays in L1 while the particle
loop, innermost and of a fixed trip count, vectorises (no dependency from one particle to
the next; a one-particle-all-steps loop would chain the square root and divide of each step
to the next and run slower than numpy). Each substep is one pass over the block: drift,
force, kick and the count of particles now outside the box; the rare step where one leaves
takes a second pass that records it. :func:`advance` runs the blocks one after the other,
:func:`advance_threads` on ``numba.get_num_threads()`` threads (``prange`` over blocks:
each parallel region covers all the steps of a call).

Arithmetic. The same operations in the same order as the numpy route
(:class:`~tiltwell.dynamics.kernels.QuadrupoleKernel`, :class:`~tiltwell.dynamics.kernels.MapKernel`,
:meth:`~tiltwell.dynamics.fieldmap.FieldMap.interpolate_rows`, the tracker's merged kicks and
:class:`~tiltwell.dynamics.spinflip.SpinFlipCheck`), compiled without ``fastmath`` (no
reassociation, no fused multiply-add): the trajectories are the numpy route's bit for bit
(``tests/test_compiled_track.py`` checks it); only the spin-flip weights, through ``exp``
and ``log1p`` of another library, may differ in the last bits.

Force kinds (:data:`QUADRUPOLE_LINEAR`, :data:`QUADRUPOLE_BREIT_RABI`, :data:`FIELD_MAP`) and
their parameter vectors are built by :mod:`tiltwell.dynamics.kernels`; the per-moment factor
``coefficients[k]`` carries the kick weight, the ramp and the constants of the force.
"""

from __future__ import annotations

import math

import numba
import numpy as np
from numba import prange

__all__ = [
    "BLOCK", "FIELD_MAP", "QUADRUPOLE_BREIT_RABI", "QUADRUPOLE_LINEAR", "advance", "advance_threads", "finish", "load",
]

#: Particles per block: 32 float64 = 256 bytes a row (four 512-bit vectors), a block's 6 rows
#: 1.5 kB of L1. (Measured here on the quadrupole step: 32 and 64 about 1.5x as fast as 16,
#: whose two vectors per row leave the square-root unit waiting on the step-to-step chain.)
BLOCK = 32
#: Force kinds. Quadrupole parameters (11): gradient [T/m], centre [m], cap |B|/B' [m] (inf:
#: uncapped), tip [m], then the Breit–Rabi slope's constants (see
#: :meth:`tiltwell.dynamics.kernels.QuadrupoleKernel.compiled`). Field map parameters (6): the
#: lower corner [m] and the inverse spacings [1/m] of the grid; ``counts`` its node counts.
QUADRUPOLE_LINEAR, QUADRUPOLE_BREIT_RABI, FIELD_MAP = 0, 1, 2

_jit = numba.njit(cache=True, error_model="numpy")  # numpy's error model: no divide-by-zero branch


@_jit
def _breit_rabi_slope(b: float, c1: float, splitting: float, half: float, twice: float, electronic: float,
                      nuclear: float, stretched: float) -> float:
    """``BreitRabi.derivative`` at |B| = ``b`` [T], from its scalar prefactors (``stretched``:
    the electronic term's sign for a stretched state, 0 otherwise)."""
    if stretched != 0.0:
        return nuclear + electronic * stretched
    x = c1 * b / splitting
    factor = (half + x) / math.sqrt(1.0 + twice * x + x * x)
    return nuclear + electronic * factor


@_jit
def _size(x: float, y: float, z: float, center: float) -> tuple[float, float]:
    """``|B| / B'`` [m] of the quadrupole and ``z - centre`` [m]."""
    size = x * x + y * y
    size = size * 0.25
    shifted = z - center
    size = size + shifted * shifted
    return math.sqrt(size), shifted


@_jit
def _pull(x: float, y: float, shifted: float, size: float, factor: float, cap: float) -> tuple[float, float, float]:
    """``factor (x/4, y/4, z - centre)``, zero where ``size`` = |B|/B' [m] is beyond the cap."""
    if size > cap:
        factor = 0.0
    gz = factor * shifted
    factor = factor * 0.25
    return factor * x, factor * y, gz


@_jit
def _linear(x: float, y: float, z: float, center: float, cap: float, tip: float, c: float,
            slope: float) -> tuple[float, float, float]:
    """The quadrupole's change of u for a linear state: ``c / max(s, tip)`` times ``(x/4,
    y/4, z - centre)``, ``s = |B|/B'`` (``slope`` unused)."""
    size, shifted = _size(x, y, z, center)
    return _pull(x, y, shifted, size, c / (size if size > tip else tip), cap)


@_jit
def _stretched(x: float, y: float, z: float, center: float, cap: float, tip: float, c: float,
               slope: float) -> tuple[float, float, float]:
    """As :func:`_linear` for a Breit–Rabi state of constant ``slope`` [J/T]:
    ``slope / max(s, tip) c``."""
    size, shifted = _size(x, y, z, center)
    return _pull(x, y, shifted, size, slope / (size if size > tip else tip) * c, cap)


@_jit
def _breit_rabi(x: float, y: float, z: float, p: tuple[float, ...], c: float) -> tuple[float, float, float]:
    """As :func:`_stretched` with the slope ``W'(B' s)`` of :func:`_breit_rabi_slope`; ``p``
    the first ten quadrupole parameters."""
    size, shifted = _size(x, y, z, p[1])
    slope = _breit_rabi_slope(p[0] * size, p[4], p[5], p[6], p[7], p[8], p[9], 0.0)
    return _pull(x, y, shifted, size, slope / (size if size > p[3] else p[3]) * c, p[2])


@_jit
def _cell(position: float, low: float, inverse: float, count: int) -> tuple[int, float]:
    """Grid cell and fraction along one axis, clipped to the map (``interpolate_rows``)."""
    u = position - low
    u = u * inverse
    if u < 0.0:
        u = 0.0
    top = float(count - 1)
    if u > top:
        u = top
    cell = int(u)
    if cell > count - 2:
        cell = count - 2
    return cell, u - cell


@_jit
def _field_map(x: float, y: float, z: float, p: np.ndarray, counts: np.ndarray, table: np.ndarray,
               c: float) -> tuple[float, float, float]:
    """``c`` times the trilinearly interpolated 3-vector of ``table`` ((nx ny nz, 3) flat),
    corners and products in ``interpolate_rows``' order."""
    nx, ny, nz = counts[0], counts[1], counts[2]
    cx, fx = _cell(x, p[0], p[3], nx)
    cy, fy = _cell(y, p[1], p[4], ny)
    cz, fz = _cell(z, p[2], p[5], nz)
    flat = (cx * ny + cy) * nz + cz
    ox, oy, oz = 0.0, 0.0, 0.0
    for i in range(2):
        wx = fx if i else 1.0 - fx
        for j in range(2):
            wy = fy if j else 1.0 - fy
            for k in range(2):
                wz = fz if k else 1.0 - fz
                weight = wx * wy
                weight = weight * (wz * c)
                corner = 3 * (flat + (i * ny + j) * nz + k)
                ox += table[corner] * weight
                oy += table[corner + 1] * weight
                oz += table[corner + 2] * weight
    return ox, oy, oz


@_jit
def _drift(buf: np.ndarray, i: int, drift: float) -> tuple[float, float, float]:
    """Particle ``i`` of the block moved by ``drift`` times its u; the new position."""
    x, y, z = buf[0, i] + buf[3, i] * drift, buf[1, i] + buf[4, i] * drift, buf[2, i] + buf[5, i] * drift
    buf[0, i], buf[1, i], buf[2, i] = x, y, z
    return x, y, z


@_jit
def _kick(buf: np.ndarray, i: int, gx: float, gy: float, gz: float, push: float) -> None:
    """u of particle ``i`` changed by the force's (gx, gy, gz) and u_z by ``push``."""
    buf[3, i] += gx
    buf[4, i] += gy
    buf[5, i] = (buf[5, i] + gz) + push


@_jit
def _outside(x: float, y: float, z: float, w: tuple[float, float, float, float, float, float]) -> int:
    """1 if (x, y, z) is not strictly inside the walls ``w`` = (x0, x1, y0, y1, z0, z1), else 0."""
    return 1 - ((x > w[0]) & (x < w[1]) & (y > w[2]) & (y < w[3]) & (z > w[4]) & (z < w[5]))


@numba.njit(cache=True, error_model="numpy", inline="always")
def _substep(buf: np.ndarray, live: np.ndarray, w: tuple[float, float, float, float, float, float], drift: float,
             c: float, push: float, kind: int, p: np.ndarray, counts: np.ndarray, table: np.ndarray,
             moves: bool) -> int:
    """One drift and kick of the block ``buf`` (6, BLOCK); returns how many ``live``
    particles the drift took outside the walls ``w`` (no drift unless ``moves``, a constant
    at each call). One loop per force kind, with no branch on anything but the particle,
    over a buffer of fixed shape (inlined into the caller, which allocates it): it
    vectorises."""
    leaving = 0
    if kind == FIELD_MAP:
        for i in range(BLOCK):
            x, y, z = _drift(buf, i, drift) if moves else (buf[0, i], buf[1, i], buf[2, i])
            leaving += live[i] * _outside(x, y, z, w)
            gx, gy, gz = _field_map(x, y, z, p, counts, table, c)
            _kick(buf, i, gx, gy, gz, push)
        return leaving
    center, cap, tip = p[1], p[2], p[3]
    if kind == QUADRUPOLE_LINEAR:
        for i in range(BLOCK):
            x, y, z = _drift(buf, i, drift) if moves else (buf[0, i], buf[1, i], buf[2, i])
            leaving += live[i] * _outside(x, y, z, w)
            gx, gy, gz = _linear(x, y, z, center, cap, tip, c, 0.0)
            _kick(buf, i, gx, gy, gz, push)
        return leaving
    if p[10] != 0.0:
        slope = _breit_rabi_slope(0.0, p[4], p[5], p[6], p[7], p[8], p[9], p[10])
        for i in range(BLOCK):
            x, y, z = _drift(buf, i, drift) if moves else (buf[0, i], buf[1, i], buf[2, i])
            leaving += live[i] * _outside(x, y, z, w)
            gx, gy, gz = _stretched(x, y, z, center, cap, tip, c, slope)
            _kick(buf, i, gx, gy, gz, push)
        return leaving
    q = (p[0], p[1], p[2], p[3], p[4], p[5], p[6], p[7], p[8], p[9])
    for i in range(BLOCK):
        x, y, z = _drift(buf, i, drift) if moves else (buf[0, i], buf[1, i], buf[2, i])
        leaving += live[i] * _outside(x, y, z, w)
        gx, gy, gz = _breit_rabi(x, y, z, q, c)
        _kick(buf, i, gx, gy, gz, push)
    return leaving


@numba.njit(cache=True, error_model="numpy", inline="always")
def _force(x: float, y: float, z: float, c: float, kind: int, p: np.ndarray, counts: np.ndarray,
           table: np.ndarray) -> tuple[float, float, float]:
    """The change of u at one point, as the loops of :func:`_substep` give it."""
    if kind == FIELD_MAP:
        return _field_map(x, y, z, p, counts, table, c)
    if kind == QUADRUPOLE_LINEAR:
        return _linear(x, y, z, p[1], p[2], p[3], c, 0.0)
    if p[10] != 0.0:
        slope = _breit_rabi_slope(0.0, p[4], p[5], p[6], p[7], p[8], p[9], p[10])
        return _stretched(x, y, z, p[1], p[2], p[3], c, slope)
    return _breit_rabi(x, y, z, (p[0], p[1], p[2], p[3], p[4], p[5], p[6], p[7], p[8], p[9]), c)


@_jit
def load(columns: np.ndarray, dt: float, walls: np.ndarray, first: int, c: float, push: float, kind: int,
         p: np.ndarray, counts: np.ndarray, table: np.ndarray, lost_step: np.ndarray) -> tuple[
             np.ndarray, np.ndarray, np.ndarray]:
    """The working set of ``columns`` (6, n) [m, m/s] (the (n, 6) particles transposed, rows
    ``first ...`` of the whole set) after the first kick (factor ``c``, ``push`` [m]):
    ``rows`` (6, n'), positions and ``u = v dt`` [m], n' padded to a multiple of
    :data:`BLOCK` with particles at rest at 0; ``alive`` (n',) uint8, 0 outside the ``walls``
    (``lost_step`` set to 0) and for the padding; ``index`` (n',) the rows in the whole set."""
    n = columns.shape[1]
    m = n + (-n % BLOCK)
    rows = np.zeros((6, m))
    for k in range(3):
        rows[k, :n] = columns[k]
        for i in range(n):
            rows[3 + k, i] = columns[3 + k, i] * dt
    alive = np.zeros(m, dtype=np.uint8)
    w = (walls[0], walls[1], walls[2], walls[3], walls[4], walls[5])
    for i in range(n):
        alive[i] = 1 - _outside(rows[0, i], rows[1, i], rows[2, i], w)
    for i in range(n):
        if not alive[i]:
            lost_step[first + i] = 0
    buf = np.empty((6, BLOCK))
    for lo in range(0, m, BLOCK):
        buf[:, :] = rows[:, lo:lo + BLOCK]
        _substep(buf, alive[lo:lo + BLOCK], w, 0.0, c, push, kind, p, counts, table, False)
        rows[:, lo:lo + BLOCK] = buf
    return rows, alive, np.arange(first, first + m)


@_jit
def finish(rows: np.ndarray, alive: np.ndarray, index: np.ndarray, final: np.ndarray, c: float, push: float,
           back: float, dt: float, kind: int, p: np.ndarray, counts: np.ndarray, table: np.ndarray) -> None:
    """Every particle still ``alive`` into its row of ``final`` (N, 6) [m, m/s], the
    velocity re-synchronised at the last step's end (``c`` and ``push`` the schedules' last
    entries) as :func:`_block` does for a leaver."""
    for i in range(rows.shape[1]):
        if alive[i]:
            _resync(rows, i, final, index[i], c, push, back, dt, kind, p, counts, table)


@numba.njit(cache=True, error_model="numpy", inline="always")
def _resync(buf: np.ndarray, i: int, final: np.ndarray, where: int, c: float, push: float, back: float, dt: float,
            kind: int, p: np.ndarray, counts: np.ndarray, table: np.ndarray) -> None:
    """Particle ``i`` of ``buf`` (6, m) into row ``where`` of ``final``: the velocity
    ``(u - back g) / dt`` (u_z less ``back push`` too), ``g`` the last kick's force
    evaluated again at the same point with the same factor ``c`` (so the same bits)."""
    gx, gy, gz = _force(buf[0, i], buf[1, i], buf[2, i], c, kind, p, counts, table)
    final[where, 0], final[where, 1], final[where, 2] = buf[0, i], buf[1, i], buf[2, i]
    final[where, 3] = (buf[3, i] - back * gx) / dt
    final[where, 4] = (buf[4, i] - back * gy) / dt
    final[where, 5] = ((buf[5, i] - back * gz) - back * push) / dt


@_jit
def _power(base: float, exponent: float) -> float:
    """``base ** exponent`` as numpy's array power takes it (square root for 1/2, a product
    for 2, ``pow`` otherwise)."""
    if exponent == 0.5:
        return math.sqrt(base)
    if exponent == 2.0:
        return base * base
    return base**exponent


@_jit
def _survival(p: float, terms: np.ndarray) -> float:
    """``|d^j_mm|^2`` of a pass with spin-1/2 flip probability ``p``: ``terms[0, 0] = 2 j``
    for the stretched state (one row), else rows (coefficient, power of 1 - p, power of p)."""
    if terms.shape[0] == 1:
        return math.exp(terms[0, 0] * math.log1p(-p))
    q = 1.0 - p
    amplitude = 0.0
    for k in range(terms.shape[0]):
        amplitude += terms[k, 0] * _power(q, terms[k, 1]) * _power(p, terms[k, 2])
    return amplitude * amplitude


@_jit
def _flips(buf: np.ndarray, lo: int, fields: np.ndarray, parity: int, survival: np.ndarray, flip: np.ndarray,
           scale: float, terms: np.ndarray) -> None:
    """The close-pass check after a whole step for the block at ``lo``: the quadrupole field
    ``flip[0] (-x/2, -y/2, z) - flip[0] flip[1] z_hat`` times ``scale`` into
    ``fields[1 - parity]``, against the previous one in ``fields[parity]`` (``flip[2]`` =
    -pi gamma [rad/(s T)], ``flip[3]`` the step [s]); a pass multiplies ``survival``
    (``SpinFlipCheck.step``'s arithmetic)."""
    old, new = fields[parity], fields[1 - parity]
    g, shift, rate, dt = flip[0], flip[0] * flip[1], flip[2], flip[3]
    for i in range(BLOCK):
        bx = buf[0, i] * g * -0.5 * scale
        by = buf[1, i] * g * -0.5 * scale
        bz = (buf[2, i] * g - shift) * scale
        j = lo + i
        px, py, pz = old[0, j], old[1, j], old[2, j]
        new[0, j], new[1, j], new[2, j] = bx, by, bz
        dx, dy, dz = bx - px, by - py, bz - pz
        if px * dx + py * dy + pz * dz < 0.0 and bx * dx + by * dy + bz * dz >= 0.0:
            size = math.sqrt(dx * dx + dy * dy + dz * dz)
            cx, cy, cz = py * dz - pz * dy, pz * dx - px * dz, px * dy - py * dx
            minimum = (cx * cx + cy * cy + cz * cz) / (size * size)
            survival[j] *= _survival(math.exp(rate * minimum * dt / (2.0 * size)), terms)


@_jit
def _block(lo: int, rows: np.ndarray, alive: np.ndarray, fields: np.ndarray, survival: np.ndarray,
           index: np.ndarray, final: np.ndarray, lost_step: np.ndarray, weights: np.ndarray, kind: int,
           p: np.ndarray, counts: np.ndarray, table: np.ndarray, coefficients: np.ndarray, pushes: np.ndarray,
           drifts: np.ndarray, walls: np.ndarray, first: int, last: int, dt: float, back: float,
           flip: np.ndarray, scales: np.ndarray, terms: np.ndarray) -> None:
    """Steps ``first ... last - 1`` of the block of particles ``lo ... lo + BLOCK - 1``,
    copied into a buffer of fixed shape; records each leaver."""
    live = alive[lo:lo + BLOCK]
    living = 0
    for i in range(BLOCK):
        living += live[i]
    if living == 0:
        return
    buf = np.empty((6, BLOCK))
    buf[:, :] = rows[:, lo:lo + BLOCK]
    evaluations = drifts.size
    checking = flip.size > 0
    w = (walls[0], walls[1], walls[2], walls[3], walls[4], walls[5])
    for step in range(first, last):
        moment = step * evaluations
        leaving = 0
        for j in range(evaluations):
            moment += 1
            leaving = _substep(buf, live, w, drifts[j], coefficients[moment], pushes[moment], kind, p, counts, table,
                               True)
        if checking:
            _flips(buf, lo, fields, step % 2, survival, flip, scales[step + 1], terms)
        if leaving == 0:
            continue
        for i in range(BLOCK):
            if live[i] and _outside(buf[0, i], buf[1, i], buf[2, i], w):
                live[i] = 0
                where = index[lo + i]
                lost_step[where] = step + 1
                _resync(buf, i, final, where, coefficients[moment], pushes[moment], back, dt, kind, p, counts, table)
                if checking:
                    weights[where] = survival[lo + i]
        living -= leaving
        if living == 0:
            break
    rows[:, lo:lo + BLOCK] = buf


@_jit
def advance(rows: np.ndarray, alive: np.ndarray, fields: np.ndarray, survival: np.ndarray, index: np.ndarray,
            final: np.ndarray, lost_step: np.ndarray, weights: np.ndarray, kind: int, p: np.ndarray,
            counts: np.ndarray, table: np.ndarray, coefficients: np.ndarray, pushes: np.ndarray, drifts: np.ndarray,
            walls: np.ndarray, first: int, last: int, dt: float, back: float, flip: np.ndarray,
            scales: np.ndarray, terms: np.ndarray) -> None:
    """Steps ``first ... last - 1`` (0-based) of the working set, block after block.

    Parameters
    ----------
    rows : ndarray, shape (6, n)
        Positions [m] and ``u = v dt`` [m] (after the merged kick of step ``first - 1``),
        updated in place; n a multiple of :data:`BLOCK` (padding particles have ``alive``
        0), as :func:`load` makes it.
    alive : ndarray of uint8, shape (n,)
        1 for particles inside the box; set to 0 when one leaves.
    fields, survival : ndarray, shapes (2, 3, n) and (n,)
        Spin-flip check: the field [T] at the last step end in ``fields[first % 2]``, and the
        survival weights; unused (any size) when ``flip`` is empty.
    index : ndarray of int64, shape (n,)
        Each particle's row in ``final`` (N, 6) [m, m/s], ``lost_step`` and ``weights``.
    kind, p, counts, table
        The force (module notes).
    coefficients, pushes, drifts : ndarray, shapes (steps s + 1,) and (s,)
        Per force evaluation the force factor and the change of u_z by the deceleration
        [m]; the scheme's drifts [steps].
    walls : ndarray, shape (6,)
        x0, x1, y0, y1, z0, z1 [m]: inside is strictly between.
    dt, back : float
        The step [s]; the share of a merged kick that belongs to the next step [1].
    flip, scales, terms
        Spin-flip check: (gradient [T/m], centre [m], -pi gamma [rad/(s T)], step [s]), or
        empty for off; the ramp at the step ends; see :func:`_survival`.
    """
    for lo in range(0, rows.shape[1], BLOCK):
        _block(lo, rows, alive, fields, survival, index, final, lost_step, weights, kind, p, counts, table,
               coefficients, pushes, drifts, walls, first, last, dt, back, flip, scales, terms)


@numba.njit(cache=True, error_model="numpy", parallel=True)
def advance_threads(rows: np.ndarray, alive: np.ndarray, fields: np.ndarray, survival: np.ndarray,
                    index: np.ndarray, final: np.ndarray, lost_step: np.ndarray, weights: np.ndarray, kind: int,
                    p: np.ndarray, counts: np.ndarray, table: np.ndarray, coefficients: np.ndarray,
                    pushes: np.ndarray, drifts: np.ndarray, walls: np.ndarray, first: int, last: int, dt: float,
                    back: float, flip: np.ndarray, scales: np.ndarray, terms: np.ndarray) -> None:
    """:func:`advance` with the blocks shared among ``numba.get_num_threads()`` threads."""
    for b in prange(rows.shape[1] // BLOCK):
        _block(b * BLOCK, rows, alive, fields, survival, index, final, lost_step, weights, kind, p, counts, table,
               coefficients, pushes, drifts, walls, first, last, dt, back, flip, scales, terms)
