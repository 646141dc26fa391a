"""Speed and memory of tiltwell's trajectory tracking in a decelerating ideal quadrupole.

The trap is invented: an ideal quadrupole of 30 T/m capped at 0.6 T holding O2 (2 mu_B,
linear Zeeman shift) in a 40 x 40 x 20 mm box, decelerating at 3000 m/s^2 (about 0.3 of
the axial slope); the beam is Gaussian (1.5 mm, 3 m/s rms per axis) around the centre, so
most particles stay and the nominal particle-steps are nearly all computed.

- Throughput of ``track`` (velocity Verlet, 1e5 particles x 200 steps of 10 us, about one
  oscillation period; the target is judged on the particle-steps actually computed), against the
  same call through the general ``Trap.force`` route (the source behind a plain wrapper, so
  the inline quadrupole force is not used). Target: >= 2e7 particle-steps per second.
- Per-particle ``scipy.integrate.solve_ivp`` (RK45, a terminal event at each wall) on 20 of
  the particles over the same time, with ``rtol`` the loosest of 1e-3 ... 1e-10 whose energy
  error is no larger than ours; time per particle-step compared. Target: tiltwell >= 500x
  faster per particle-step.
- Peak memory (tracemalloc, which sees numpy's allocations) of 1e6 particles x 20 steps in
  chunks of 1e5, against the same in one chunk. Target: <= 1 GB.

Run standalone (``python benchmarks/bench_tracking.py``) or call :func:`run`.
"""

from __future__ import annotations

import time
import tracemalloc
from typing import Any

import numpy as np
from scipy.integrate import solve_ivp

import tiltwell
from bench_fields import median_time
from tiltwell.dynamics.tracking import track

PARTICLES = 100_000
STEPS = 200
TIME_STEP = 1e-5
DECELERATION = 3000.0
RATE_TARGET = 2e7
IVP_PARTICLES = 20
SPEEDUP_TARGET = 500.0
MEMORY_PARTICLES, MEMORY_CHUNK, MEMORY_STEPS = 1_000_000, 100_000, 20
MEMORY_TARGET = 1e9
SLOW_REPEATS = 3


class _Wrapped:
    """The quadrupole behind a plain object: ``track`` then uses ``Trap.force``."""

    def __init__(self, source: tiltwell.IdealQuadrupole) -> None:
        self.source = source

    def magnitude(self, points: np.ndarray) -> np.ndarray:
        return self.source.magnitude(points)

    def magnitude_gradient(self, points: np.ndarray) -> np.ndarray:
        return self.source.magnitude_gradient(points)


def quadrupole_trap() -> tiltwell.Trap:
    box = ((-0.02, 0.02), (-0.02, 0.02), (-0.01, 0.01))
    return tiltwell.Trap(tiltwell.IdealQuadrupole(30.0, 0.6), tiltwell.species("O2"), box)


def beam(count: int, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return np.hstack([rng.normal(0.0, 1.5e-3, (count, 3)), rng.normal(0.0, 3.0, (count, 3))])


def energies(trap: tiltwell.Trap, states: np.ndarray) -> np.ndarray:
    """``m v^2 / 2 + U - m a z`` [J], conserved in the frame decelerating at DECELERATION."""
    kinetic = 0.5 * trap.mass * np.sum(states[:, 3:] ** 2, axis=1)
    x, y, z = states[:, :3].T
    return kinetic + trap.effective_potential(x, y, z, DECELERATION)


def _row(case: str, tiltwell_s: float, reference_s: float, target: str, met: bool) -> dict[str, object]:
    return {
        "case": case,
        "tiltwell_s": tiltwell_s,
        "reference_s": reference_s,
        "ratio": tiltwell_s / reference_s,
        "target": target,
        "met": met,
    }


def throughput_row(trap: tiltwell.Trap) -> tuple[dict[str, object], list[str]]:
    particles = beam(PARTICLES)
    general = tiltwell.Trap(_Wrapped(trap.source), trap.species, trap.bounds)  # type: ignore[arg-type]
    kept: dict[str, Any] = {}

    def ours() -> None:
        kept["ours"] = track(trap, particles, STEPS * TIME_STEP, TIME_STEP, deceleration=DECELERATION)

    def reference() -> None:
        kept["reference"] = track(general, particles, STEPS * TIME_STEP, TIME_STEP, deceleration=DECELERATION)

    tiltwell_s = median_time(ours)
    reference_s = median_time(reference, repeats=SLOW_REPEATS)
    result, other = kept["ours"], kept["reference"]
    nominal = PARTICLES * STEPS
    lost_steps = np.minimum(np.round(result.lost_time / result.time_step), STEPS)
    computed = float(np.sum(lost_steps))
    rate = nominal / tiltwell_s
    checks = [
        f"track throughput: {rate:.3g} nominal particle-steps/s ({computed / tiltwell_s:.3g} computed: "
        f"{result.fraction:.4f} of {PARTICLES} kept to the end); via Trap.force {nominal / reference_s:.3g}/s",
        "inline vs Trap.force route: same particles kept: "
        f"{bool(np.array_equal(result.kept, other.kept))}, largest position difference "
        f"{np.max(np.abs(result.final[:, :3] - other.final[:, :3])):.1e} m",
    ]
    case = (f"track verlet, quadrupole, 1e5 particles x {STEPS} steps: {rate:.3g} particle-steps/s "
            "(ref: same via Trap.force)")
    met = computed / tiltwell_s >= RATE_TARGET
    return _row(case, tiltwell_s, reference_s, f">= {RATE_TARGET:.0e} particle-steps/s", met), checks


def _ivp_final(trap: tiltwell.Trap, start: np.ndarray, rtol: float) -> np.ndarray:
    """Final states (n, 6) of a per-particle RK45 loop, each stopped at the first wall."""
    mass, duration = trap.mass, STEPS * TIME_STEP

    def rate(t: float, y: np.ndarray) -> np.ndarray:
        force = trap.force(y[None, :3], DECELERATION)[0]
        return np.concatenate([y[3:], force / mass])

    walls = []
    for axis, (low, high) in enumerate(trap.bounds):
        for wall in (low, high):
            def event(t: float, y: np.ndarray, axis: int = axis, wall: float = wall) -> float:
                return float(y[axis] - wall)
            event.terminal = True  # type: ignore[attr-defined]
            walls.append(event)
    atol = rtol * np.array([1e-3] * 3 + [1.0] * 3)  # scales: mm and m/s
    finals = [
        solve_ivp(rate, (0.0, duration), y0, method="RK45", rtol=rtol, atol=atol, events=walls).y[:, -1]
        for y0 in start
    ]
    return np.array(finals)


def solve_ivp_row(trap: tiltwell.Trap) -> tuple[dict[str, object], list[str]]:
    start = beam(PARTICLES)[:IVP_PARTICLES]
    depth = tiltwell.longitudinal_acceptance(trap, DECELERATION).depth
    energy0 = energies(trap, start)
    batch = beam(PARTICLES)
    ours_result = track(trap, start, STEPS * TIME_STEP, TIME_STEP, deceleration=DECELERATION)
    ours_error = float(np.max(np.abs(energies(trap, ours_result.final) - energy0)) / depth)
    tried, chosen = [], None
    for rtol in (1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8, 1e-9, 1e-10):
        error = float(np.max(np.abs(energies(trap, _ivp_final(trap, start, rtol)) - energy0)) / depth)
        tried.append(f"{rtol:.0e}: {error:.1e}")
        chosen = rtol
        if error <= ours_error:
            break
    assert chosen is not None
    reference_s = median_time(lambda: _ivp_final(trap, start, chosen), repeats=SLOW_REPEATS)
    batch_s = median_time(lambda: track(trap, batch, STEPS * TIME_STEP, TIME_STEP, deceleration=DECELERATION))
    tiltwell_s = batch_s * IVP_PARTICLES / PARTICLES  # our time per particle, for 20 particles
    speedup = reference_s / tiltwell_s
    checks = [
        f"energy error (largest |dE| / depth over {IVP_PARTICLES} particles, {STEPS} steps): tiltwell verlet "
        f"{ours_error:.1e}; solve_ivp RK45 by rtol {', '.join(tried)}; chosen rtol {chosen:.0e}",
        f"per particle-step: tiltwell {batch_s / (PARTICLES * STEPS):.3g} s (batch of {PARTICLES}), solve_ivp "
        f"{reference_s / (IVP_PARTICLES * STEPS):.3g} s: tiltwell {speedup:.3g}x faster",
    ]
    case = (f"track per particle-step vs solve_ivp RK45 loop (rtol {chosen:.0e}, {IVP_PARTICLES} particles; "
            f"tiltwell time scaled from a batch of {PARTICLES})")
    return _row(case, tiltwell_s, reference_s, f"ratio <= 1/{SPEEDUP_TARGET:g}", speedup >= SPEEDUP_TARGET), checks


def _peak(call: Any) -> float:
    """Peak traced memory [bytes] allocated during ``call()``."""
    tracemalloc.start()
    try:
        tracemalloc.reset_peak()
        before = tracemalloc.get_traced_memory()[0]
        call()
        return float(tracemalloc.get_traced_memory()[1] - before)
    finally:
        tracemalloc.stop()


def memory_row(trap: tiltwell.Trap) -> tuple[dict[str, object], list[str]]:
    particles = beam(MEMORY_PARTICLES, seed=1)
    duration = MEMORY_STEPS * TIME_STEP

    def chunked() -> None:
        track(trap, particles, duration, TIME_STEP, deceleration=DECELERATION, chunk=MEMORY_CHUNK)

    def whole() -> None:
        track(trap, particles, duration, TIME_STEP, deceleration=DECELERATION, chunk=MEMORY_PARTICLES)

    tiltwell_s = median_time(chunked, repeats=SLOW_REPEATS)
    reference_s = median_time(whole, repeats=SLOW_REPEATS)
    peak_chunked, peak_whole = _peak(chunked), _peak(whole)
    checks = [
        f"memory, 1e6 particles x {MEMORY_STEPS} steps: peak {peak_chunked / 1e6:.0f} MB in chunks of 1e5, "
        f"{peak_whole / 1e6:.0f} MB in one chunk (input array of {particles.nbytes / 1e6:.0f} MB not counted)",
    ]
    case = (f"track 1e6 particles in chunks of 1e5: peak {peak_chunked / 1e6:.0f} MB "
            "(ref: one chunk of 1e6, time)")
    return _row(case, tiltwell_s, reference_s, "peak <= 1 GB", peak_chunked <= MEMORY_TARGET), checks


def run() -> tuple[list[dict[str, object]], list[str]]:
    """Three table rows and the check lines printed under the table."""
    trap = quadrupole_trap()
    rows, checks = [], []
    for make in (throughput_row, solve_ivp_row, memory_row):
        start = time.perf_counter()
        row, lines = make(trap)
        rows.append(row)
        checks.extend(lines)
        checks.append(f"({make.__name__} took {time.perf_counter() - start:.0f} s)")
    return rows, checks


if __name__ == "__main__":
    rows, checks = run()
    for entry in rows:
        print(entry)
    print("\n".join(checks))
