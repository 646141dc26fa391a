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
- The compiled route (issue 12), 1e5 particles x 1000 steps (5 oscillation periods, so the
  fixed cost of a call, printed apart, does not dominate), on one thread
  (``numba.set_num_threads(1)``), against a plain numpy velocity Verlet written here (the
  same force on (N, 3) arrays, the walls checked every step). Targets: >= 4e8 particle-steps
  per second and >= 12x the plain Verlet. Beside it: the same call on two threads, and on
  ``track``'s numpy route (the reference the tests compare with); the roofline estimate
  (flops and bytes per particle-step against a peak measured here: an FMA loop compiled
  with numba, a large numpy copy, and a square-root-and-divide loop, the unit this step
  waits on); the first-call compile time (cold, and loaded from the ``cache=True`` cache, in
  a fresh process each) and the install size of numba and llvmlite.

Run standalone (``python benchmarks/bench_tracking.py``) or call :func:`run`.
"""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import tempfile
import time
import tracemalloc
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numba
import numpy as np
from scipy.integrate import solve_ivp

import tiltwell
from bench_fields import median_time
from tiltwell.dynamics import blocks
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
COMPILED_STEPS = 1000
COMPILED_RATE_TARGET = 4e8
PLAIN_SPEEDUP_TARGET = 12.0
COMPILED_REPEATS = 5
#: Per particle-step of the compiled linear-quadrupole Verlet step: 6 (drift) + 7 (|B|/B')
#: + 1 sqrt + 1 divide + 4 (force) + 4 (kick) = 23 flops; from memory, a call of S steps
#: reads and writes the 6 rows of 8 bytes and reads the 1-byte flag: 97 / S bytes.
STEP_FLOPS = 23
#: The numpy route: about 21 whole-array passes of ~3 arrays of 8 bytes (issue 12's count).
NUMPY_STEP_BYTES = 500


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


def _row(case: str, tiltwell_s: float, reference_s: float, target: str, met: bool | None) -> dict[str, object]:
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


# --- the compiled route (issue 12) -------------------------------------------------------------------


def plain_verlet(trap: tiltwell.Trap, particles: np.ndarray, steps: int, dt: float) -> tuple[np.ndarray, np.ndarray]:
    """A plain numpy velocity Verlet on (N, 3) arrays: the capped quadrupole's force
    ``-mu B' (x/4, y/4, z) / (m s)`` plus ``m a z_hat``, the walls checked after every
    step. Returns the kept mask (N,) and the final states (N, 6), NaN for the lost."""
    source = trap.source
    assert isinstance(source, tiltwell.IdealQuadrupole)
    slope = trap.species.zeeman.moment * source.gradient / trap.mass  # type: ignore[attr-defined]
    cap = source.max_field / source.gradient
    lower, upper = np.array([b[0] for b in trap.bounds]), np.array([b[1] for b in trap.bounds])

    def acceleration(r: np.ndarray) -> np.ndarray:
        s = np.sqrt(0.25 * (r[:, 0] ** 2 + r[:, 1] ** 2) + r[:, 2] ** 2)
        f = -slope / np.maximum(s, 1e-300)
        f[s > cap] = 0.0
        a = r * f[:, None]
        a[:, :2] *= 0.25
        a[:, 2] += DECELERATION
        return a

    index = np.arange(particles.shape[0])
    inside = np.all((particles[:, :3] > lower) & (particles[:, :3] < upper), axis=1)
    r, v, index = particles[inside, :3].copy(), particles[inside, 3:].copy(), index[inside]
    a = acceleration(r)
    for _ in range(steps):
        v += 0.5 * dt * a
        r += dt * v
        a = acceleration(r)
        v += 0.5 * dt * a
        inside = np.all((r > lower) & (r < upper), axis=1)
        if not inside.all():
            r, v, a, index = r[inside], v[inside], a[inside], index[inside]
    kept = np.zeros(particles.shape[0], dtype=bool)
    kept[index] = True
    final = np.full(particles.shape, np.nan)
    final[index] = np.hstack([r, v])
    return kept, final


def side_by_side(calls: dict[str, Callable[[], object]], repeats: int) -> dict[str, float]:
    """Median wall times [s] of ``calls`` timed in turn (A, B, C, A, B, C, ...) after one
    warm-up each, so that a noisy machine slows them alike."""
    for call in calls.values():
        call()
    times: dict[str, list[float]] = {name: [] for name in calls}
    for _ in range(repeats):
        for name, call in calls.items():
            start = time.perf_counter()
            call()
            times[name].append(time.perf_counter() - start)
    return {name: statistics.median(values) for name, values in times.items()}


@numba.njit(fastmath={"contract"}, cache=True)
def _fma_loop(values: np.ndarray, repeats: int) -> float:
    """8 dependent multiply-adds per element per repeat on an L1-resident array (``contract``
    lets LLVM fuse each into one FMA, and nothing else: no reassociation folds the chain):
    16 flops each."""
    for _ in range(repeats):
        for i in range(values.size):
            v = values[i]
            for _k in range(8):
                v = v * 0.999999 + 1e-7
            values[i] = v
    return float(values[0])


@numba.njit(cache=True, error_model="numpy")
def _root_divide_loop(values: np.ndarray, repeats: int) -> float:
    """One square root and one divide per element per repeat (no fastmath, as the step)."""
    for _ in range(repeats):
        for i in range(values.size):
            values[i] = 2.0 / np.sqrt(values[i] + 1.0)
    return float(values[0])


def machine_peaks() -> tuple[float, float, float, float]:
    """(flops/s of the FMA loop, square root + divide pairs/s, copy bandwidth of memory and
    of an L3-sized copy [bytes/s]), one thread, best of 5."""
    values = np.full(512, 1.0)
    _fma_loop(values, 10)
    _root_divide_loop(values, 10)
    fma, pairs = [], []
    for _ in range(5):
        start = time.perf_counter()
        _fma_loop(values, 20_000)
        fma.append(16 * values.size * 20_000 / (time.perf_counter() - start))
        values[:] = 1.0
        start = time.perf_counter()
        _root_divide_loop(values, 20_000)
        pairs.append(values.size * 20_000 / (time.perf_counter() - start))
    bandwidths = []
    for count in (25_000_000, 500_000):  # 200 MB (memory) and 4 MB (cache) each way
        source, target = np.ones(count), np.empty(count)
        copies = []
        for _ in range(5):
            start = time.perf_counter()
            np.copyto(target, source)
            copies.append(2 * source.nbytes / (time.perf_counter() - start))  # read + write
        bandwidths.append(max(copies))
    return max(fma), max(pairs), bandwidths[0], bandwidths[1]


_FIRST_CALL = """
import time
start = time.perf_counter()
import numba, numpy as np, tiltwell
from tiltwell.dynamics.tracking import track
imported = time.perf_counter()
trap = tiltwell.Trap(tiltwell.IdealQuadrupole(30.0, 0.6), tiltwell.species("O2"), ((-0.02, 0.02),) * 3)
cloud = np.random.default_rng(0).normal(0.0, 1e-3, (1000, 6))
numba.set_num_threads(1)
begin = time.perf_counter(); track(trap, cloud, 1e-4, 1e-5); serial = time.perf_counter() - begin
numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
begin = time.perf_counter(); track(trap, cloud, 1e-4, 1e-5); threaded = time.perf_counter() - begin
print(imported - start, serial, threaded)
"""


def first_calls() -> list[tuple[float, float, float]]:
    """(import, first serial call, first threaded call) [s] in a fresh process: cold (an
    empty numba cache), then warm (the cache the cold run wrote)."""
    results = []
    with tempfile.TemporaryDirectory() as cache:
        env = {**os.environ, "NUMBA_CACHE_DIR": cache}
        for _ in range(2):
            out = subprocess.run([sys.executable, "-c", _FIRST_CALL], env=env, capture_output=True, text=True,
                                 check=True)
            first, serial, threaded = (float(word) for word in out.stdout.split())
            results.append((first, serial, threaded))
    return results


def install_size(module: Any) -> str:
    """``du -sh`` of a package's folder (the sum of its files' sizes where ``du`` is missing)."""
    folder = Path(module.__file__).parent
    try:
        return subprocess.run(["du", "-sh", str(folder)], capture_output=True, text=True, check=True).stdout.split()[0]
    except (OSError, subprocess.CalledProcessError):
        return f"{sum(path.stat().st_size for path in folder.rglob('*') if path.is_file()) / 1e6:.0f} MB"


def cpu_name() -> str:
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return "unknown CPU"


def compiled_rows(trap: tiltwell.Trap) -> tuple[list[dict[str, object]], list[str]]:
    particles = beam(PARTICLES, seed=2)
    duration = COMPILED_STEPS * TIME_STEP
    threads = numba.get_num_threads()
    two = min(2, numba.config.NUMBA_NUM_THREADS)  # type: ignore[attr-defined]
    kept: dict[str, Any] = {}

    def on(count: int) -> Callable[[], None]:
        def call() -> None:
            numba.set_num_threads(count)
            kept[f"threads {count}"] = track(trap, particles, duration, TIME_STEP, deceleration=DECELERATION)
        return call

    def numpy_route() -> None:
        blocks.ENABLED = False
        try:
            kept["numpy"] = track(trap, particles, duration, TIME_STEP, deceleration=DECELERATION)
        finally:
            blocks.ENABLED = True

    def plain() -> None:
        kept["plain"] = plain_verlet(trap, particles, COMPILED_STEPS, TIME_STEP)

    try:
        times = side_by_side({"one": on(1), "two": on(two), "plain": plain, "numpy": numpy_route}, SLOW_REPEATS)
        numba.set_num_threads(1)
        small = side_by_side({"fixed": lambda: track(trap, particles, TIME_STEP, TIME_STEP,
                                                     deceleration=DECELERATION)}, COMPILED_REPEATS)["fixed"]
    finally:
        numba.set_num_threads(threads)
    result, reference = kept["threads 1"], kept["numpy"]
    same = all(np.array_equal(getattr(result, name), getattr(reference, name)) for name in ("final", "kept", "lost_time"))
    plain_kept, plain_final = kept["plain"]
    both = result.kept & plain_kept
    nominal = PARTICLES * COMPILED_STEPS
    rate, speedup = nominal / times["one"], times["plain"] / times["one"]
    fma, pairs, bandwidth, cached = machine_peaks()
    per_call = max(blocks.MIN_CALL_STEPS, blocks.CALL_WORK // PARTICLES)
    step_bytes = 97.0 / per_call
    bound = min(fma / STEP_FLOPS, bandwidth / step_bytes)
    cold, warm = first_calls()
    rows = [
        _row(f"track, ideal quadrupole, 1e5 particles x {COMPILED_STEPS} steps, one thread: {rate:.3g} "
             f"particle-steps/s, {speedup:.3g}x a plain numpy velocity Verlet (ref: that Verlet)",
             times["one"], times["plain"], f">= {COMPILED_RATE_TARGET:.0e} particle-steps/s and >= "
             f"{PLAIN_SPEEDUP_TARGET:g}x", rate >= COMPILED_RATE_TARGET and speedup >= PLAIN_SPEEDUP_TARGET),
        _row(f"track on {two} threads vs one (same call): {nominal / times['two']:.3g} particle-steps/s",
             times["two"], times["one"], "none set (ref column: one thread)", None),
        _row(f"track compiled vs its numpy route (today's reference), one thread: numpy "
             f"{nominal / times['numpy']:.3g} particle-steps/s", times["one"], times["numpy"],
             "none set (ref column: numpy route)", None),
    ]
    checks = [
        f"compiled route on {cpu_name()}, numba {numba.__version__}, threading layer "
        f"{numba.threading_layer()}: {rate:.3g} particle-steps/s on one thread, {nominal / times['two']:.3g} on "
        f"{two}; fixed cost of a call (1 step of 1e5 particles: checks, loading, result) {small * 1e3:.1f} ms",
        f"compiled vs numpy route: final, kept and lost_time bit-identical: {same}; vs the plain Verlet: kept sets "
        f"differ in {np.count_nonzero(result.kept != plain_kept)} of {PARTICLES} particles, largest position "
        f"difference of the kept {np.max(np.abs(result.final[both, :3] - plain_final[both, :3])):.1e} m",
        f"roofline (one thread): {STEP_FLOPS} flops (1 sqrt, 1 divide among them) and {step_bytes:.2g} bytes from "
        f"memory per particle-step ({per_call} steps per call); measured peaks {fma / 1e9:.3g} GFLOP/s (numba FMA "
        f"loop), {bandwidth / 1e9:.3g} GB/s (numpy copy): bound {bound:.3g} particle-steps/s, reached "
        f"{rate / bound:.0%}; the step waits on the square-root-and-divide unit, measured at {pairs:.3g} pairs/s "
        f"(that alone caps it at {pairs:.3g}/s, reached {rate / pairs:.0%}); numpy route: ~{NUMPY_STEP_BYTES} "
        f"bytes per particle-step, bound {bandwidth / NUMPY_STEP_BYTES:.3g}/s by memory, "
        f"{cached / NUMPY_STEP_BYTES:.3g}/s by a 4 MB copy ({cached / 1e9:.3g} GB/s; its 1e5-particle arrays sit in "
        f"the L3), reached {nominal / times['numpy']:.3g}",
        f"first call (cache=True, fresh process each): cold cache: import {cold[0]:.2f} s, serial kernels "
        f"{cold[1]:.1f} s, threaded kernel {cold[2]:.1f} s; warm cache: import {warm[0]:.2f} s, first calls "
        f"{warm[1]:.2f} s and {warm[2]:.2f} s",
        f"install size (du -sh of the site-packages folders): numba {install_size(numba)}, llvmlite "
        f"{install_size(sys.modules['llvmlite'])}",
    ]
    return rows, checks


def run() -> tuple[list[dict[str, object]], list[str]]:
    """Six table rows and the check lines printed under the table."""
    trap = quadrupole_trap()
    rows, checks = [], []
    for make in (throughput_row, solve_ivp_row, memory_row):
        start = time.perf_counter()
        row, lines = make(trap)
        rows.append(row)
        checks.extend(lines)
        checks.append(f"({make.__name__} took {time.perf_counter() - start:.0f} s)")
    start = time.perf_counter()
    more, lines = compiled_rows(trap)
    rows.extend(more)
    checks.extend(lines)
    checks.append(f"(compiled_rows took {time.perf_counter() - start:.0f} s)")
    return rows, checks


if __name__ == "__main__":
    rows, checks = run()
    for entry in rows:
        print(entry)
    print("\n".join(checks))
