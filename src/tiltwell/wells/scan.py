"""Compiled scan of a sampled 1-D potential: the well, its barriers, turning points and area.

The kernel behind :func:`tiltwell.wells.separatrix.separatrix`, compiled with numba. It
does in one pass what the numpy route did with a dozen whole-array operations, and does
each floating-point operation as that route did, in the same order, so the results are
the same to the last bit (tests/test_separatrix.py compares them):

- the bottom: runs of equal samples count as one; among the interior minima of the runs,
  the one in the basin holding ``near`` (between the nearest maxima on either side) with
  the lowest value, or without ``near`` the one with the largest depth below the lower
  of the highest samples on either side; the middle sample of its run;
- the barriers: the highest sample on each side (the one nearest the bottom on a tie);
- the turning points: the first crossing of the energy walking out from the bottom,
  interpolated linearly (``np.interp`` for the knots' potential, as numpy computes it);
- the area integral of sqrt(E - U) over the piecewise-linear potential, segment by
  segment in closed form, summed in numpy's pairwise order.
"""

from __future__ import annotations

import numba
import numpy as np

__all__ = ["BOUND", "UNBOUND", "samples_valid", "scan_well"]

#: Status codes of :func:`scan_well`.
UNBOUND, BOUND = 0, 1
#: numpy's pairwise summation: blocks of this many are summed with 8 partial sums.
_PAIRWISE_BLOCK = 128


@numba.njit(cache=True)
def _block_sum(a, start, n):  # type: ignore[no-untyped-def]
    """numpy's sum of at most one block: plain below 8 terms, else 8 partial sums."""
    if n < 8:
        total = 0.0
        for i in range(n):
            total += a[start + i]
        return total
    r = np.empty(8)
    for j in range(8):
        r[j] = a[start + j]
    i = 8
    while i < n - (n % 8):
        for j in range(8):
            r[j] += a[start + i + j]
        i += 8
    total = ((r[0] + r[1]) + (r[2] + r[3])) + ((r[4] + r[5]) + (r[6] + r[7]))
    while i < n:
        total += a[start + i]
        i += 1
    return total


@numba.njit(cache=True)
def _pairwise_sum(a, start, n):  # type: ignore[no-untyped-def]
    """Sum of a[start:start + n] in the order of numpy's float64 ``add.reduce``: halves
    (the first a multiple of 8 long) summed apart down to blocks of
    :data:`_PAIRWISE_BLOCK`. numpy recurses; this walks the same tree with a stack (a
    cached numba function must not call itself)."""
    if n <= _PAIRWISE_BLOCK:
        return _block_sum(a, start, n)
    depth = 64  # halving n each level: enough for any array
    first, length, stage = np.empty(depth, np.int64), np.empty(depth, np.int64), np.empty(depth, np.int64)
    left = np.empty(depth)
    first[0], length[0], stage[0] = start, n, 0
    top = 1
    value, returned = 0.0, False
    while True:
        i = top - 1
        if returned:
            if i < 0:
                return value
            if stage[i] == 1:  # the first half is done: now the second
                left[i], stage[i], returned = value, 2, False
                half = length[i] // 2
                half -= half % 8
                first[top], length[top], stage[top] = first[i] + half, length[i] - half, 0
                top += 1
            else:
                value = left[i] + value
                top -= 1
            continue
        if length[i] <= _PAIRWISE_BLOCK:
            value, returned = _block_sum(a, first[i], length[i]), True
            top -= 1
            continue
        half = length[i] // 2
        half -= half % 8
        stage[i] = 1
        first[top], length[top], stage[top] = first[i], half, 0
        top += 1


@numba.njit(cache=True)
def _interp(x, xp, fp):  # type: ignore[no-untyped-def]
    """``np.interp(x, xp, fp)`` for one x inside [xp[0], xp[-1]], as numpy computes it."""
    n = xp.size
    if x >= xp[n - 1]:
        return fp[n - 1]
    if x < xp[0]:
        return fp[0]
    j = np.searchsorted(xp, x, side="right") - 1
    if xp[j] == x:
        return fp[j]
    slope = (fp[j + 1] - fp[j]) / (xp[j + 1] - xp[j])
    result = slope * (x - xp[j]) + fp[j]
    if np.isnan(result):
        result = slope * (x - xp[j + 1]) + fp[j + 1]
        if np.isnan(result) and fp[j] == fp[j + 1]:
            result = fp[j]
    return result


@numba.njit(cache=True)
def _bottom(z, u, use_near, near):  # type: ignore[no-untyped-def]
    """Index of the chosen interior minimum, or -1."""
    n = u.size
    starts = np.empty(n, np.int64)
    starts[0] = 0
    runs = 1
    for i in range(n - 1):
        if u[i + 1] - u[i] != 0.0:
            starts[runs] = i + 1
            runs += 1
    if runs == 1:
        return -1
    values = np.empty(runs)
    for r in range(runs):
        values[r] = u[starts[r]]
    chosen = -1
    if use_near:
        closest, best = 0, abs(z[0] - near)
        for i in range(1, n):
            gap = abs(z[i] - near)
            if gap < best:
                closest, best = i, gap
        run = np.searchsorted(starts[:runs], closest, side="right") - 1
        lower, upper = -1, runs
        for r in range(1, runs - 1):
            if values[r] > values[r - 1] and values[r] > values[r + 1]:
                if r < run:
                    lower = r
                elif r > run and upper == runs:
                    upper = r
        for r in range(max(lower + 1, 1), min(upper, runs - 1)):
            if values[r] < values[r - 1] and values[r] < values[r + 1]:
                if chosen < 0 or values[r] < values[chosen]:
                    chosen = r
    else:
        prefix = np.empty(runs)
        suffix = np.empty(runs)
        prefix[0] = values[0]
        for r in range(1, runs):
            prefix[r] = max(prefix[r - 1], values[r])
        suffix[runs - 1] = values[runs - 1]
        for r in range(runs - 2, -1, -1):
            suffix[r] = max(suffix[r + 1], values[r])
        deepest = 0.0
        for r in range(1, runs - 1):
            if values[r] < values[r - 1] and values[r] < values[r + 1]:
                depth = min(prefix[r - 1], suffix[r + 1]) - values[r]
                if chosen < 0 or depth > deepest:
                    chosen, deepest = r, depth
    if chosen < 0:
        return -1
    end = starts[chosen + 1] - 1
    return (starts[chosen] + end) // 2


@numba.njit(cache=True)
def _turning_point(z, u, energy, bottom, barrier):  # type: ignore[no-untyped-def]
    """First crossing of ``energy`` walking from ``bottom`` to ``barrier``: the
    interpolated position and the index of the first sample at or above the energy (or
    the barrier's when none is)."""
    step = 1 if barrier > bottom else -1
    index = barrier
    i = bottom + step
    while i != barrier + step:
        if u[i] >= energy:
            index = i
            break
        i += step
    inner = index - step
    rise = u[index] - u[inner]
    if u[index] < energy or rise <= 0.0:
        return z[index], index
    fraction = (energy - u[inner]) / rise
    return z[inner] + fraction * (z[index] - z[inner]), index


@numba.njit(cache=True)
def samples_valid(z, u):  # type: ignore[no-untyped-def]
    """Whether ``z`` is finite and strictly increasing (``np.diff(z) > 0``) and ``u``
    finite, both 1-D of one length (checked by the caller)."""
    for i in range(z.size):
        if not (np.isfinite(z[i]) and np.isfinite(u[i])):
            return False
        if i > 0 and z[i] - z[i - 1] <= 0.0:
            return False
    return True


@numba.njit(cache=True)
def scan_well(z, u, use_near, near, use_cap, cap):  # type: ignore[no-untyped-def]
    """The separatrix of the sampled potential ``u`` [J] at positions ``z`` [m].

    The samples must pass :func:`samples_valid`. Returns ``(status, bottom, energy,
    z_back, z_front, knots_z, knots_u, integral)``: status UNBOUND or BOUND; the bottom's
    index; the orbit's energy [J]; the turning points [m]; the knots of the
    piecewise-linear potential between them, turning points included; and the integral
    of sqrt(E - U) dz over them [J^(1/2) m].
    """
    n = z.size
    empty = np.empty(0)
    bottom = _bottom(z, u, use_near, near)
    if bottom < 0:
        return UNBOUND, -1, 0.0, 0.0, 0.0, empty, empty, 0.0
    left = bottom - 1
    for i in range(bottom - 1, -1, -1):  # the highest sample, nearest the bottom on a tie
        if u[i] > u[left]:
            left = i
    right = bottom + 1
    for i in range(bottom + 2, n):
        if u[i] > u[right]:
            right = i
    energy = u[right] if u[right] < u[left] else u[left]
    if use_cap and cap < energy:
        energy = cap
    if energy <= u[bottom]:
        return UNBOUND, bottom, 0.0, 0.0, 0.0, empty, empty, 0.0
    back_z, back = _turning_point(z, u, energy, bottom, left)
    front_z, front = _turning_point(z, u, energy, bottom, right)
    count = front - back + 1
    knots_z = np.empty(count)
    knots_u = np.empty(count)
    knots_z[0], knots_z[count - 1] = back_z, front_z
    for k in range(1, count - 1):
        knots_z[k] = z[back + k]
        knots_u[k] = u[back + k]
    level = _interp(back_z, z, u)
    knots_u[0] = level if level < energy else energy
    level = _interp(front_z, z, u)
    knots_u[count - 1] = level if level < energy else energy
    segments = np.empty(count - 1)
    third = 2.0 / 3.0
    for k in range(count - 1):
        e0, e1 = energy - knots_u[k], energy - knots_u[k + 1]
        a = np.sqrt(e0 if e0 >= 0.0 else 0.0)
        b = np.sqrt(e1 if e1 >= 0.0 else 0.0)
        total = a + b
        if total > 0.0:
            segments[k] = third * (knots_z[k + 1] - knots_z[k]) * (a * a + a * b + b * b) / total
        else:
            segments[k] = 0.0
    return BOUND, bottom, energy, back_z, front_z, knots_z, knots_u, _pairwise_sum(segments, 0, count - 1)
