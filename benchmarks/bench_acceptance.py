"""Speed of tiltwell's trap acceptances on a small coil-built trap.

The trap is invented: an anti-Helmholtz pair (radius 10 mm, separation 12 mm, 40 A x 50
turns, 2 x 2 mm windings) holding Rb-87 in a 12 x 12 x 24 mm box.

- The acceptance curve over 200 decelerations from 0 to 1.1 x critical, against the same
  200 points computed one by one with ``trap_acceptance(..., include_6d=False)``: no shared
  sampling, so each point samples the field again. Target: <= 50 ms.
- The 6-D acceptance at 0.3 x critical (``rtol=1e-2``), against ``energetic_acceptance`` of
  the same tilted potential at ``rtol=1e-3`` on the grid alone (no ``known_escape``).
  Target: <= 0.2 s.
- The two exit checks against the route they replaced (issue 12), written here: the
  whole grid computed at once and ``scipy.ndimage.label`` of it, once per deceleration
  for the curve's coarse 33^3 check, and per trial level of a bisection over the sorted
  grid values for the 6-D escape level. Both routes give the same numbers to the bit
  (printed); the ratio is the speed-up of the compiled floods and the lazily computed grid.
- The first-call cost of the compiled kernels (numba, ``cache=True``): a fresh process
  with an empty cache directory (compiling), then again with the cache written.

Run standalone (``python benchmarks/bench_acceptance.py``) or call :func:`run`.
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
import tempfile
from typing import Any

import numpy as np

import tiltwell
from bench_fields import median_time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), os.pardir, "tests"))
from test_flood import reference_component, reference_escape_level, reference_touches_wall  # noqa: E402

from tiltwell.wells.acceptance import TrapSampler
from tiltwell.wells.energetic import KNOWN_ESCAPE_SLACK

POINTS = 200
CURVE_SAMPLES = 1001  # acceptance_curve's default, given to the reference too
SIX_D_FRACTION = 0.3
CURVE_TARGET_S = 0.05
SIX_D_TARGET_S = 0.2
SLOW_REPEATS = 3  # the one-by-one references take ~10 s a call
CHECK_GRID = 33  # tiltwell.wells.acceptance's coarse check grid, per axis
GRID_SIZES = (27, 39, 59, 87, 123, 179)  # tiltwell.wells.energetic's refinement sequence


def coil_trap() -> tiltwell.Trap:
    pair = tiltwell.anti_helmholtz(0.01, 0.012, 40.0, turns=50, width=2e-3, height=2e-3)
    return tiltwell.Trap(pair, tiltwell.species("Rb-87"), ((-6e-3, 6e-3), (-6e-3, 6e-3), (-12e-3, 12e-3)))


def _relative(ours: np.ndarray, theirs: np.ndarray) -> float:
    """Largest relative difference, NaN where both are NaN counted as agreement."""
    ours, theirs = np.asarray(ours, float), np.asarray(theirs, float)
    both_nan = np.isnan(ours) & np.isnan(theirs)
    scale = np.maximum(np.abs(theirs), np.finfo(float).tiny)
    return float(np.max(np.where(both_nan, 0.0, np.abs(ours - theirs) / scale)))


def _row(case: str, tiltwell_s: float, reference_s: float, target_s: float | None) -> dict[str, object]:
    return {
        "case": case,
        "tiltwell_s": tiltwell_s,
        "reference_s": reference_s,
        "ratio": tiltwell_s / reference_s,
        "target": "none set" if target_s is None else f"<= {target_s:g} s",
        "met": None if target_s is None else tiltwell_s <= target_s,
    }


# --- the replaced route: the whole grid and scipy.ndimage.label ------------------------


def replaced_escapes(trap: tiltwell.Trap, decelerations: np.ndarray, axes: list[Any], caps: np.ndarray) -> np.ndarray:
    """The curve's coarse 3-D check as it was: the whole 33^3 grid, one labelling per
    deceleration, the labelling bisection where the component reaches a wall."""
    grid_axes = [np.linspace(low, high, CHECK_GRID) for low, high in trap.bounds]
    x, y, z = np.meshgrid(*grid_axes, indexing="ij", sparse=True)
    values0 = trap.potential(x, y, z)
    result = np.array(caps, dtype=float)
    for i, (a, axis, cap) in enumerate(zip(decelerations, axes, caps)):
        tilted = values0 - trap.mass * a * z
        start = tuple(int(np.argmin(np.abs(ax - c))) for ax, c in zip(grid_axes, (0.0, 0.0, axis.z_bottom)))
        bottom = axis.escape_energy - axis.depth
        if reference_touches_wall(reference_component(tilted <= cap - KNOWN_ESCAPE_SLACK * (cap - bottom), start)):
            result[i] = min(cap, reference_escape_level(tilted, start))
    return result


def replaced_six_d(trap: tiltwell.Trap, a: float, rtol: float = 1e-2) -> tuple[float, float, int]:
    """``trap_acceptance(trap, a).volume`` as it was computed: the 1-D cap as the known
    escape, then per grid the whole grid, the downhill walk, the labelling bisection and
    the labelled component, refined until two successive refinements agree to ``rtol``."""
    sampler = TrapSampler(trap, 2001)
    axis = sampler.longitudinal(a)
    radial = sampler.transverse(axis.z_bottom, a, axis.escape_energy)
    known = radial.escape_energy if radial.bound else axis.escape_energy
    volumes: list[float] = []
    for n in GRID_SIZES:
        grid_axes = [np.linspace(low, high, n) for low, high in trap.bounds]
        x, y, z = np.meshgrid(*grid_axes, indexing="ij", sparse=True)
        values = trap.effective_potential(x, y, z, a)
        index = [int(np.argmin(np.abs(g - c))) for g, c in zip(grid_axes, (0.0, 0.0, axis.z_bottom))]
        while True:
            window = tuple(slice(max(i - 1, 0), min(i + 2, n)) for i in index)
            best = np.unravel_index(int(np.argmin(values[window])), values[window].shape)
            step = [w.start + int(b) for w, b in zip(window, best)]
            if values[tuple(step)] >= values[tuple(index)]:
                break
            index = step
        bottom = tuple(index)
        level = region_level = reference_escape_level(values, bottom)
        if level >= known - KNOWN_ESCAPE_SLACK * (known - values[bottom]):
            level = known
        region = reference_component(values < min(level, region_level), bottom)
        kinetic = np.where(region, np.maximum(level - values, 0.0), 0.0)
        cell = math.prod(float(g[1] - g[0]) for g in grid_axes)
        volumes.append((4.0 * math.pi / 3.0) * float(np.sum((2.0 * kinetic / trap.mass) ** 1.5)) * cell)
        if len(volumes) >= 3 and all(
            abs(new - old) <= rtol * max(abs(new), abs(old)) for old, new in zip(volumes[-3:-1], volumes[-2:])
        ):
            break
    return volumes[-1], level, n


# --- rows ------------------------------------------------------------------------------


def curve_row(trap: tiltwell.Trap, critical: float) -> tuple[list[dict[str, object]], list[str]]:
    decelerations = np.linspace(0.0, 1.1 * critical, POINTS)
    kept: dict[str, Any] = {}

    def ours() -> None:
        kept["curve"] = tiltwell.acceptance_curve(trap, decelerations, samples=CURVE_SAMPLES)

    def reference() -> None:
        kept["points"] = [
            tiltwell.trap_acceptance(trap, a, samples=CURVE_SAMPLES, include_6d=False) for a in decelerations
        ]

    tiltwell_s = median_time(ours)
    reference_s = median_time(reference, repeats=SLOW_REPEATS)
    curve, points = kept["curve"], kept["points"]
    differences = {
        "longitudinal": _relative(curve.longitudinal, np.array([p.longitudinal.area for p in points])),
        "transverse": _relative(curve.transverse, np.array([p.transverse.area for p in points])),
        "escape energy": _relative(curve.escape_energy, np.array([p.escape_energy for p in points])),
    }
    bound = int(np.count_nonzero(curve.longitudinal > 0))
    checks = [
        f"acceptance curve: {bound}/{POINTS} decelerations bound; largest relative difference to the "
        "one-by-one reference: " + ", ".join(f"{k} {v:.1e}" for k, v in differences.items())
    ]
    case = f"acceptance_curve, {POINTS} decelerations (ref: trap_acceptance one by one)"
    rows = [_row(case, tiltwell_s, reference_s, CURVE_TARGET_S)]

    # The coarse exit check alone, on a fresh sampler (its grid computed where the fills reach).
    one_d = TrapSampler(trap, CURVE_SAMPLES)
    axes = [one_d.longitudinal(a) for a in decelerations]
    radials = [one_d.transverse(ax.z_bottom, a, ax.escape_energy) if ax.bound else ax
               for a, ax in zip(decelerations, axes)]
    bound_at = [i for i, ax in enumerate(axes) if ax.bound]
    caps = np.array([radials[i].escape_energy if radials[i].bound else axes[i].escape_energy for i in bound_at])
    chosen, bound_axes = decelerations[bound_at], [axes[i] for i in bound_at]

    def flood() -> None:
        sampler = TrapSampler(trap, CURVE_SAMPLES)
        kept["flood"] = sampler.escapes(chosen, bound_axes, caps)
        kept["evaluated"] = sampler.grid.points if sampler.grid is not None else 0

    def labelled() -> None:
        kept["labelled"] = replaced_escapes(trap, chosen, bound_axes, caps)

    def cuts() -> None:
        sampler = TrapSampler(trap, CURVE_SAMPLES)
        walls = [sampler.longitudinal(a) for a in decelerations]
        sampler.prefetch_radial([ax.z_bottom for ax in walls if ax.bound])
        for a, ax in zip(decelerations, walls):
            if ax.bound:
                sampler.transverse(ax.z_bottom, a, ax.escape_energy)

    flood_s, labelled_s = median_time(flood), median_time(labelled, repeats=SLOW_REPEATS)
    critical_s = median_time(lambda: trap.critical_deceleration(CURVE_SAMPLES))
    cuts_s = median_time(cuts)
    same = np.array_equal(kept["flood"], kept["labelled"])
    checks.append(
        f"curve's 3-D exit check, {len(bound_at)} decelerations: flood and ndimage route bit-identical: {same}; "
        f"field evaluated at {kept['evaluated']} of {CHECK_GRID ** 3} grid nodes' positions"
    )
    checks.append(
        f"acceptance_curve's parts, timed alone in this run (medians): Trap.critical_deceleration "
        f"{critical_s * 1e3:.1f} ms, the 1-D cuts (sampler, {POINTS} axis and {len(bound_at)} radial separatrices) "
        f"{cuts_s * 1e3:.1f} ms, the 3-D exit check {flood_s * 1e3:.1f} ms"
    )
    case = f"curve's 3-D exit check, {len(bound_at)} decelerations (ref: whole 33^3 grid + ndimage.label each)"
    rows.append(_row(case, flood_s, labelled_s, None))
    return rows, checks


def six_d_row(trap: tiltwell.Trap, critical: float) -> tuple[list[dict[str, object]], list[str]]:
    a = SIX_D_FRACTION * critical
    kept: dict[str, Any] = {}

    def potential(x: np.ndarray, y: np.ndarray, z: np.ndarray) -> np.ndarray:
        return trap.effective_potential(x, y, z, a)

    def ours() -> None:
        kept["ours"] = tiltwell.trap_acceptance(trap, a)

    def reference() -> None:
        near = (0.0, 0.0, tiltwell.longitudinal_acceptance(trap, a).z_bottom)
        kept["near"] = near
        kept["reference"] = tiltwell.energetic_acceptance(potential, trap.mass, trap.bounds, rtol=1e-3, near=near)

    def replaced() -> None:
        kept["replaced"] = replaced_six_d(trap, a)

    tiltwell_s = median_time(ours)
    reference_s = median_time(reference, repeats=SLOW_REPEATS)
    replaced_s = median_time(replaced, repeats=SLOW_REPEATS)
    result, grid = kept["ours"], kept["reference"]
    # The same call given the 1-D escape energy, as trap_acceptance gives it (not timed).
    hinted = tiltwell.energetic_acceptance(
        potential, trap.mass, trap.bounds, rtol=1e-3, near=kept["near"], known_escape=result.escape_energy
    )
    old_volume, old_level, old_n = kept["replaced"]
    checks = [
        f"6-D volume: tiltwell {result.volume:.6e}, reference {grid.volume:.6e} (grid {grid.grid_points}^3, "
        f"converged={grid.converged}): relative difference {abs(result.volume - grid.volume) / grid.volume:.1e} "
        "(claim: <= 1e-2)",
        f"6-D escape energy: tiltwell {result.escape_energy:.6e} J, reference grid {grid.escape_energy:.6e} J",
        f"6-D with known_escape at rtol=1e-3 (untimed): {hinted.volume:.6e} on grid {hinted.grid_points}^3, "
        f"relative difference to tiltwell {abs(result.volume - hinted.volume) / hinted.volume:.1e}",
        f"6-D against the replaced whole-grid ndimage route: volume {old_volume:.10e} on {old_n}^3, "
        f"bit-identical: {(result.volume, result.escape_energy, result.energetic.grid_points) == kept['replaced']}",
    ]
    case = f"trap_acceptance 6-D at {SIX_D_FRACTION} x critical, rtol 1e-2 (ref: energetic_acceptance rtol 1e-3)"
    rows = [_row(case, tiltwell_s, reference_s, SIX_D_TARGET_S)]
    case = f"trap_acceptance 6-D at {SIX_D_FRACTION} x critical (ref: the replaced whole-grid + ndimage route)"
    rows.append(_row(case, tiltwell_s, replaced_s, None))
    return rows, checks


_FIRST_CALL = """
import sys, time
sys.path.insert(0, {here!r})
import numpy as np
from bench_acceptance import coil_trap
import tiltwell
trap = coil_trap()
critical = trap.critical_deceleration()
start = time.perf_counter()
tiltwell.acceptance_curve(trap, np.linspace(0.0, 1.1 * critical, 20))
first = time.perf_counter() - start
start = time.perf_counter()
tiltwell.acceptance_curve(trap, np.linspace(0.0, 1.1 * critical, 20))
print(first, time.perf_counter() - start)
"""


def compile_check() -> list[str]:
    """First call of the compiled kernels in fresh processes: empty cache, then written."""
    here = os.path.dirname(os.path.abspath(__file__))
    times = []
    with tempfile.TemporaryDirectory() as cache:
        environment = {**os.environ, "NUMBA_CACHE_DIR": cache}
        for _ in range(2):
            done = subprocess.run([sys.executable, "-c", _FIRST_CALL.format(here=here)], env=environment,
                                  capture_output=True, text=True, check=True)
            times.append([float(t) for t in done.stdout.split()])
    (cold, warm_a), (cached, warm_b) = times
    return [
        f"first call of acceptance_curve (20 decelerations) in a fresh process: {cold:.2f} s with an empty numba "
        f"cache (compiling the kernels; the second call {warm_a:.3f} s), {cached:.2f} s with the cache written "
        f"(second call {warm_b:.3f} s)"
    ]


def run() -> tuple[list[dict[str, object]], list[str]]:
    """The table rows and the check lines printed under the table."""
    trap = coil_trap()
    critical = trap.critical_deceleration()
    rows, checks = [], [f"coil trap: critical deceleration {critical:.6g} m/s^2"]
    for make in (curve_row, six_d_row):
        more_rows, lines = make(trap, critical)
        rows.extend(more_rows)
        checks.extend(lines)
    checks.extend(compile_check())
    return rows, checks


if __name__ == "__main__":
    rows, checks = run()
    for entry in rows:
        print(entry)
    print("\n".join(checks))
