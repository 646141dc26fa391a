"""The compiled floods (escape level, well region, exit checks) against the ndimage path
they replaced and against a brute-force minimax search, on random grids and on traps.

The references, written here:

- the ndimage path: bisection over the sorted grid values, each trial level labelled
  with ``scipy.ndimage.label`` (face connectivity) and its start component tested for a
  node on the grid's faces -- tiltwell's exit check before the flood, kept only here;
- a brute force: the same bisection with a breadth-first search in plain Python;
- for the traps, the whole grid computed at once (``Trap.potential`` on the sparse mesh),
  where tiltwell computes only the blocks its floods reach.

A minimax over face paths is always one of the grid values, so all routes must agree
exactly, not to a tolerance.
"""

from __future__ import annotations

import math
from collections import deque

import numpy as np
import pytest
from scipy import ndimage

from tiltwell import IdealQuadrupole, Trap, acceptance_curve, anti_helmholtz, species, trap_acceptance
from tiltwell.wells.acceptance import TrapSampler
from tiltwell.wells.energetic import KNOWN_ESCAPE_SLACK, escape_level, well_component
from tiltwell.wells.lazygrid import GivenGrid, LazyGrid, run_fill, run_fills, run_flood

# --- references ------------------------------------------------------------------------


def reference_touches_wall(region: np.ndarray) -> bool:
    return any(region.take(0, axis).any() or region.take(-1, axis).any() for axis in range(region.ndim))


def reference_component(mask: np.ndarray, start: tuple[int, ...]) -> np.ndarray:
    """scipy.ndimage.label's face-connected component holding ``start``."""
    if not mask[start]:
        return np.zeros_like(mask)
    labels, _ = ndimage.label(mask)
    return np.asarray(labels == labels[start])


def reference_escape_level(values: np.ndarray, start: tuple[int, ...]) -> float:
    """Bisection over the sorted values with ndimage labelling (the replaced path)."""
    levels = np.unique(values[values >= values[start]])
    low, high = 0, levels.size - 1
    while low < high:
        middle = (low + high) // 2
        if reference_touches_wall(reference_component(values <= levels[middle], start)):
            high = middle
        else:
            low = middle + 1
    return float(levels[low])


def brute_force_escape_level(values: np.ndarray, start: tuple[int, ...]) -> float:
    """Bisection over the sorted values, each level tried by a plain-Python BFS."""
    shape = values.shape

    def leaks(level: float) -> bool:
        if values[start] > level:
            return False
        seen, queue = {start}, deque([start])
        while queue:
            node = queue.popleft()
            if any(c in (0, n - 1) for c, n in zip(node, shape)):
                return True
            for axis in range(len(shape)):
                for side in (-1, 1):
                    step = list(node)
                    step[axis] += side
                    other = tuple(step)
                    if 0 <= step[axis] < shape[axis] and other not in seen and values[other] <= level:
                        seen.add(other)
                        queue.append(other)
        return False

    levels = sorted(set(values.ravel().tolist()))
    low, high = 0, len(levels) - 1
    while low < high:
        middle = (low + high) // 2
        if leaks(levels[middle]):
            high = middle
        else:
            low = middle + 1
    return levels[low]


def _random_grid(seed: int, ndim: int) -> tuple[np.ndarray, tuple[int, ...]]:
    """Smooth-ish or integer-valued (many ties) random grids, a random interior start."""
    rng = np.random.default_rng(seed)
    shape = tuple(int(n) for n in rng.integers(3, 12 if ndim == 3 else 25, size=ndim))
    if seed % 2:
        values = rng.integers(0, 4, size=shape).astype(float)  # ties everywhere
    else:
        values = ndimage.gaussian_filter(rng.normal(size=shape), 1.0) + 0.05 * rng.normal(size=shape)
    start = tuple(int(rng.integers(0, n)) for n in shape)
    return values, start


SEEDS = range(60)


# --- random grids ----------------------------------------------------------------------


@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("seed", SEEDS)
def test_escape_level_equals_the_ndimage_bisection_and_brute_force(seed: int, ndim: int) -> None:
    values, start = _random_grid(seed, ndim)
    level = escape_level(values, start)
    assert level == reference_escape_level(values, start)
    assert level == brute_force_escape_level(values, start)


@pytest.mark.parametrize("ndim", [2, 3])
@pytest.mark.parametrize("seed", SEEDS)
def test_component_and_flood_region_equal_ndimage_labels(seed: int, ndim: int) -> None:
    """The fill's component of {v <= L} and {v < L}, and the flood's nodes below L (the
    region the 6-D volume integrates), against ndimage.label at several levels L."""
    values, start = _random_grid(seed, ndim)
    grid = GivenGrid(values)
    node = int(np.ravel_multi_index(start, values.shape))
    run = run_flood(grid, node, stop_at_wall=False)
    assert np.array_equal(np.sort(run.order), np.arange(values.size))  # every node, once
    assert np.all(np.diff(run.levels) >= 0)
    for level in np.quantile(values, [0.2, 0.5, 0.8]):
        closed = reference_component(values <= level, start)
        assert np.array_equal(well_component(values <= level, start), closed)
        assert np.array_equal(run_fill(grid, node, level)[0].reshape(values.shape), closed)
        strict = reference_component(values < level, start)
        assert np.array_equal(run_fill(grid, node, level, inclusive=False)[0].reshape(values.shape), strict)
        below = np.zeros(values.size, dtype=bool)
        below[run.order[run.levels < level]] = True
        assert np.array_equal(below.reshape(values.shape), strict)


@pytest.mark.parametrize("seed", range(20))
def test_lazy_grid_gives_the_same_levels_and_regions(seed: int) -> None:
    """A grid computed block by block where the flood asks (blocks of 2 nodes, so many
    requests) gives the same levels as the whole grid given at once, with and without a
    hint, and only ever holds the true values."""
    values, start = _random_grid(seed, 3)
    axes = [np.arange(n, dtype=float) for n in values.shape]

    def lookup(x: np.ndarray, y: np.ndarray, z: np.ndarray) -> np.ndarray:
        return values[x.astype(int), y.astype(int), z.astype(int)]

    node = int(np.ravel_multi_index(start, values.shape))
    whole = run_flood(GivenGrid(values), node)
    for hint in (None, float(np.median(values))):
        lazy = LazyGrid(lookup, axes, block=2)
        run = run_flood(lazy, node, hint=hint)
        assert run.wall_level == whole.wall_level == reference_escape_level(values, start)
        assert np.array_equal(np.sort(run.order[run.levels < run.wall_level]),
                              np.sort(whole.order[whole.levels < whole.wall_level]))
        known = lazy.known.astype(bool)
        assert np.array_equal(lazy.values[known], values.ravel()[known])


@pytest.mark.parametrize("seed", range(20))
def test_many_tilted_fills_equal_ndimage(seed: int) -> None:
    """run_fills (one compiled call, a tilt - m a z per fill along the last axis) against
    ndimage labelling of each tilted grid, on a lazily computed grid."""
    values, _ = _random_grid(seed, 3)
    rng = np.random.default_rng(100 + seed)
    count = 12
    tilts = rng.uniform(-0.3, 0.3, size=(count, 1)) * np.arange(values.shape[2])
    starts = rng.integers(0, values.size, size=count)
    thresholds = rng.uniform(values.min(), values.max(), size=count)
    axes = [np.arange(n, dtype=float) for n in values.shape]
    lazy = LazyGrid(lambda x, y, z: values[x.astype(int), y.astype(int), z.astype(int)], axes, block=3)
    reached = run_fills(lazy, starts, thresholds, tilts)
    for i in range(count):
        tilted = values - tilts[i]
        start = np.unravel_index(int(starts[i]), values.shape)
        expected = reference_touches_wall(reference_component(tilted <= thresholds[i], start))
        assert reached[i] == expected


def test_state_arrays_grow_past_their_first_capacity() -> None:
    """A 24^3 grid (more nodes than the heap and stacks first hold) flooded whole, filled
    whole, and the escape level, against ndimage."""
    rng = np.random.default_rng(5)
    values = ndimage.gaussian_filter(rng.normal(size=(24, 24, 24)), 2.0)
    start = (12, 12, 12)
    node = int(np.ravel_multi_index(start, values.shape))
    run = run_flood(GivenGrid(values), node, stop_at_wall=False)
    assert np.array_equal(np.sort(run.order), np.arange(values.size))
    visited, _ = run_fill(GivenGrid(values), node, float(values.max()))
    assert visited.all()
    assert escape_level(values, start) == reference_escape_level(values, start)
    level = float(np.quantile(values, 0.7))
    lazy = LazyGrid(lambda x, y, z: values[x.astype(int), y.astype(int), z.astype(int)],
                    [np.arange(24.0)] * 3, block=3)
    strict = run_fill(lazy, node, level, inclusive=False)[0].reshape(values.shape)
    assert np.array_equal(strict, reference_component(values < level, start))


# --- traps: grids computed lazily and by mirror images ---------------------------------

#: The coil trap of benchmarks/bench_acceptance.py (invented; rewritten here).
def coil_trap() -> Trap:
    pair = anti_helmholtz(0.01, 0.012, 40.0, turns=50, width=2e-3, height=2e-3)
    return Trap(pair, species("Rb-87"), ((-6e-3, 6e-3), (-6e-3, 6e-3), (-12e-3, 12e-3)))


def quadrupole_trap() -> Trap:
    """An ideal quadrupole in a cube: past half its critical deceleration the lowest exit
    is on the side walls downstream of the bottom, (X/2) sqrt(c^2 - f^2) against the
    radial cut's c X / 2 (c = mu B', f = m a), more than the 5 % slack below the 1-D
    barriers, so the curve's coarse 3-D check must find it."""
    return Trap(IdealQuadrupole(30.0), species("Rb-87"), ((-3e-3, 3e-3),) * 3)


TRAPS = {"coils": coil_trap, "quadrupole": quadrupole_trap}


@pytest.mark.parametrize("name", TRAPS)
@pytest.mark.parametrize("n", [27, 33, 40])
def test_mirror_images_share_their_value_to_the_last_bit(name: str, n: int) -> None:
    """The sources treated as mirror symmetric give the very same float at (x, y),
    (-x, y), (x, -y), (y, x): a lazily computed, mirror-sharing grid equals the whole grid
    computed at once, node for node; on a box off the axis, too."""
    trap = TRAPS[name]()
    for box in (trap.bounds, ((-2e-3, 3e-3), (-1e-3, 3e-3), trap.bounds[2])):
        axes = [np.linspace(low, high, n) for low, high in box]
        x, y, z = np.meshgrid(*axes, indexing="ij", sparse=True)
        whole = trap.potential(x, y, z)
        grid = LazyGrid(trap.potential, axes, mirror_xy=True)
        grid.fill_all()
        assert np.array_equal(grid.grid, whole)
        if box == trap.bounds:  # a square box centred on the axis: at least the x <-> y swap
            assert grid.points < 0.6 * whole.size


def one_d_cap(sampler: TrapSampler, a: float) -> float:
    """The 1-D bound on the 3-D escape energy [J] as trap_acceptance takes it: the radial
    cut through the axis bottom capped at the axis barrier (NaN when unbound)."""
    axis = sampler.longitudinal(a)
    if not axis.bound:
        return math.nan
    radial = sampler.transverse(axis.z_bottom, a, axis.escape_energy)
    return radial.escape_energy if radial.bound else axis.escape_energy


def reference_escapes(trap: Trap, decelerations: np.ndarray, samples: int = 1001) -> tuple[np.ndarray, np.ndarray]:
    """The curve's 3-D escape energies by the replaced path: the whole 33^3 coarse grid
    (acceptance.py's check grid), one ndimage labelling per deceleration, the ndimage
    bisection where the component reaches a wall. Also returns the 1-D caps."""
    sampler = TrapSampler(trap, samples)
    axes = [np.linspace(low, high, 33) for low, high in trap.bounds]
    x, y, z = np.meshgrid(*axes, indexing="ij", sparse=True)
    values0 = trap.potential(x, y, z)
    escapes, caps = np.full(decelerations.size, np.nan), np.full(decelerations.size, np.nan)
    for i, a in enumerate(decelerations):
        axis, cap = sampler.longitudinal(a), one_d_cap(sampler, a)
        if not axis.bound:
            continue
        tilted = values0 - trap.mass * a * z
        start = tuple(int(np.argmin(np.abs(ax - c))) for ax, c in zip(axes, (0.0, 0.0, axis.z_bottom)))
        bottom = axis.escape_energy - axis.depth
        caps[i] = escapes[i] = cap
        if reference_touches_wall(reference_component(tilted <= cap - KNOWN_ESCAPE_SLACK * (cap - bottom), start)):
            escapes[i] = min(cap, reference_escape_level(tilted, start))
    return escapes, caps


@pytest.mark.parametrize("name", TRAPS)
def test_acceptance_curve_equals_the_ndimage_path(name: str) -> None:
    """200 decelerations from 0 to 1.1 x critical: escape energies exactly those of the
    replaced path; where they fall below the 1-D caps, the transverse areas are those of
    the radial cut at that energy."""
    trap = TRAPS[name]()
    decelerations = np.linspace(0.0, 1.1 * trap.critical_deceleration(1001), 200)
    curve = acceptance_curve(trap, decelerations)
    escapes, caps = reference_escapes(trap, decelerations)
    assert np.array_equal(curve.escape_energy, escapes, equal_nan=True)
    lower = np.flatnonzero(escapes < caps)
    if name == "quadrupole":
        assert lower.size >= 40  # the 3-D check found the side exits (from f ~ c/2 until the front is lower)
    sampler = TrapSampler(trap, 1001)
    for i in lower:
        axis = sampler.longitudinal(decelerations[i])
        assert curve.transverse[i] == sampler.transverse(axis.z_bottom, decelerations[i], escapes[i]).area


def reference_six_d(trap: Trap, a: float, n: int) -> tuple[float, float, np.ndarray]:
    """Volume, energy and region on the n^3 grid by the replaced path: the whole grid, the
    downhill walk from the axis bottom, the ndimage bisection, the known-escape rule with
    the 1-D cap and the ndimage component, then the same integrand and sum as
    energetic.py (trap_acceptance's default of 2001 samples for the 1-D cuts)."""
    axes = [np.linspace(low, high, n) for low, high in trap.bounds]
    x, y, z = np.meshgrid(*axes, indexing="ij", sparse=True)
    values = trap.effective_potential(x, y, z, a)
    sampler = TrapSampler(trap, 2001)
    known_escape = one_d_cap(sampler, a)
    near = (0.0, 0.0, sampler.longitudinal(a).z_bottom)
    index = [int(np.argmin(np.abs(axis - c))) for axis, c in zip(axes, near)]
    while True:
        window = tuple(slice(max(i - 1, 0), min(i + 2, n)) for i in index)
        best = np.unravel_index(int(np.argmin(values[window])), values[window].shape)
        candidate = [w.start + int(b) for w, b in zip(window, best)]
        if values[tuple(candidate)] >= values[tuple(index)]:
            break
        index = candidate
    bottom = tuple(index)
    level = region_level = reference_escape_level(values, bottom)
    if level >= known_escape - KNOWN_ESCAPE_SLACK * (known_escape - values[bottom]):
        level = known_escape
    region = reference_component(values < min(level, region_level), bottom)
    kinetic = np.where(region, np.maximum(level - values, 0.0), 0.0)
    cell = math.prod(float(ax[1] - ax[0]) for ax in axes)
    volume = (4.0 * math.pi / 3.0) * float(np.sum((2.0 * kinetic / trap.mass) ** 1.5)) * cell
    return volume, level, region


@pytest.mark.parametrize(("name", "fraction"), [("coils", 0.3), ("coils", 0.0), ("quadrupole", 0.3)])
def test_six_d_acceptance_equals_the_ndimage_path(name: str, fraction: float) -> None:
    """trap_acceptance's 6-D volume, escape energy and well region on its final grid
    equal the replaced path's on the same grid, to the last bit."""
    trap = TRAPS[name]()
    a = fraction * trap.critical_deceleration()
    result = trap_acceptance(trap, a)
    six = result.energetic
    assert six is not None and six.converged
    volume, level, region = reference_six_d(trap, a, six.grid_points)
    assert (result.volume, result.escape_energy) == (volume, level)
    assert np.array_equal(six.region, region)
