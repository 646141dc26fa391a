"""Speed and memory of the full-device tracker: particles through a 300-coil array.

The device is invented: 300 coils at a 6 mm pitch, 8 mm mean radius, 40 turns in a
2 x 4 mm winding, four coils active, 400 A per turn allowed, making a 200 T/m trap that
carries OH from 400 m/s down to 20 m/s over the row (about 45 000 m/s^2, 0.57 of the
critical mu B' / m). The beam is a Gaussian cloud (0.7 mm, 4 m/s rms per axis) around the
trap centre at switch-on.

- The whole run: 1e5 particles, time step 1 us, switch-on to release (8 391 steps), on the
  compiled route (tiltwell.dynamics.devicekernel). Target: <= 15 s. Reported: wall time and
  particle-steps per second (computed, i.e. counting each particle only while it is
  inside), and the first-call compile time of the kernels (a fresh process with an empty
  numba cache; ``cache=True`` keeps them for later processes).
- The compiled route against the numpy route (devicekernel.ENABLED False, the tests'
  reference) on the same cloud over the first 200 steps, side by side, the compiled one on
  1 and on 2 threads; the rigid trap-frame tracker (``tiltwell.track`` with the inline ideal
  quadrupole) on the same cloud printed beside them: the price of following 300 coils'
  time-dependent field instead of a fixed analytic force. No target.
- Per step, ``method="yoshida4"`` against the default ``"verlet"`` of ``track_device`` on the
  same cloud over the first 100 steps (three force evaluations a step against one, so
  about 3x; the price of 4th order), both compiled. No target.
- Peak memory (tracemalloc, which sees numpy's allocations) of 1e5 particles x 50 steps.
  Target: <= 1 GB.

Run standalone (``python benchmarks/bench_device.py``) or call :func:`run`.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
import tracemalloc

import numba
import numpy as np

import tiltwell
from bench_fields import median_time
from tiltwell.dynamics import devicekernel
from tiltwell.dynamics.device import track_device

PARTICLES = 100_000
TIME_STEP = 1e-6
GRADIENT = 200.0
BOX = (0.0035, 0.0035, 0.004)
SHORT_STEPS = 200
YOSHIDA_STEPS = 100
MEMORY_STEPS = 50
TIME_TARGET = 15.0
MEMORY_TARGET = 1e9
#: Flops of one Verlet particle-step of the compiled device step, counted in
#: tiltwell/dynamics/devicekernel.py: 68 in the force (6 quantities x 6 for the bilinear
#: look-up, 32 around it), 18 in the three kicks and the drift.
FLOPS = 86
ARRAY = tiltwell.CoilArray(count=300, pitch=0.006, radius=0.008, first=-0.012, turns=40, width=0.002,
                           height=0.004, max_current=400.0, active=4)
SPECIES = tiltwell.species("OH")
SCHEDULE = tiltwell.constant_deceleration(400.0, 20.0, length=float(ARRAY.positions[-1]) - 0.02)


def cloud(count: int, seed: int = 0) -> np.ndarray:
    """Trap-frame Gaussian cloud (count, 6) [m, m/s]."""
    rng = np.random.default_rng(seed)
    return np.hstack([rng.normal(0.0, 7e-4, (count, 3)), rng.normal(0.0, 4.0, (count, 3))])


def lab(states: np.ndarray) -> np.ndarray:
    return states + (0.0, 0.0, float(SCHEDULE.position(0.0)), 0.0, 0.0, float(SCHEDULE.velocity(0.0)))


def _computed_steps(result: tiltwell.TrackingResult, steps: int) -> float:
    return float(np.sum(np.minimum(np.round(result.lost_time / result.time_step), steps)))


_COMPILE = """
import time, numpy as np, tiltwell
from tiltwell.dynamics.device import track_device
row = tiltwell.CoilArray(count=40, pitch=0.005, radius=0.008, first=-0.02, turns=50)
schedule = tiltwell.constant_deceleration(20.0, 19.0, deceleration=3000.0)
cloud = np.zeros((100, 6)); cloud[:, 5] = 20.0
for method in ("verlet", "yoshida4"):
    for _ in range(2):
        started = time.perf_counter()
        track_device(row, None, tiltwell.species("OH"), cloud, schedule=schedule, gradient=20.0, time_step=2e-6,
                     duration=2e-5, box_half_widths=(0.004, 0.004, 0.006), method=method)
        print(time.perf_counter() - started)
"""


def compile_seconds() -> tuple[float, float]:
    """First-call time [s] of a tiny run (Verlet then Yoshida-4) in a fresh process with an
    empty numba cache, less the second call's: the kernels' compile time; and the first
    call's time in a second process that finds them in that cache."""
    with tempfile.TemporaryDirectory() as folder:
        env = dict(os.environ, NUMBA_CACHE_DIR=folder)
        times = []
        for _ in range(2):
            out = subprocess.run([sys.executable, "-c", _COMPILE], env=env, capture_output=True, text=True, check=True)
            t = [float(v) for v in out.stdout.split()]
            times.append(t[0] - t[1] + t[2] - t[3])
    return times[0], times[1]


def full_row() -> tuple[dict[str, object], list[str]]:
    compiling, cached = compile_seconds()
    particles = lab(cloud(PARTICLES))
    started = time.perf_counter()
    result = track_device(ARRAY, None, SPECIES, particles, schedule=SCHEDULE, gradient=GRADIENT,
                          time_step=TIME_STEP, duration=SCHEDULE.duration, box_half_widths=BOX)
    seconds = time.perf_counter() - started
    steps = round(SCHEDULE.duration / result.time_step)
    computed = _computed_steps(result, steps)
    rate = computed / seconds
    case = (f"track_device, 300 coils, 1e5 particles x {steps} steps (switch-on to release): "
            f"{rate:.3g} particle-steps/s")
    checks = [
        f"full device: {seconds:.1f} s for {computed:.3g} computed particle-steps ({rate:.3g}/s); "
        f"{result.fraction:.4f} of {PARTICLES} kept to 20 m/s (deceleration {SCHEDULE.deceleration:.4g} m/s^2), "
        f"{numba.get_num_threads()} threads",
        f"device kernels: first-call compile {compiling:.1f} s (empty numba cache), {cached:.2f} s from the cache",
        f"device roofline: about {FLOPS} flops (1 sqrt, 1 divide) and 24 gathered table values (192 bytes, from "
        f"L1/L2) per Verlet particle-step: {rate * FLOPS / 1e9:.2g} GFLOP/s on {numba.get_num_threads()} threads",
    ]
    row = {"case": case, "tiltwell_s": seconds, "reference_s": TIME_TARGET, "ratio": seconds / TIME_TARGET,
           "target": f"<= {TIME_TARGET:.0f} s (ref column: the target)", "met": seconds <= TIME_TARGET}
    return row, checks


def rigid_row() -> tuple[dict[str, object], list[str]]:
    states = cloud(PARTICLES, seed=1)
    duration = SHORT_STEPS * TIME_STEP
    trap = tiltwell.Trap(tiltwell.IdealQuadrupole(GRADIENT), SPECIES, tuple((-h, h) for h in BOX))
    kept: dict[str, tiltwell.TrackingResult] = {}

    def device(name: str) -> None:
        kept[name] = track_device(ARRAY, None, SPECIES, lab(states), schedule=SCHEDULE, gradient=GRADIENT,
                                  time_step=TIME_STEP, duration=duration, box_half_widths=BOX)

    def numpy_route() -> None:
        devicekernel.ENABLED = False
        try:
            device("numpy")
        finally:
            devicekernel.ENABLED = True

    def rigid() -> None:
        kept["rigid"] = tiltwell.track(trap, states, duration, TIME_STEP, deceleration=SCHEDULE.deceleration)

    threads = numba.get_num_threads()
    seconds = {}
    for count in sorted({1, threads}):
        numba.set_num_threads(count)
        seconds[count] = median_time(lambda: device("compiled"), repeats=3)
    numba.set_num_threads(threads)
    numpy_s = median_time(numpy_route, repeats=3)
    rigid_s = median_time(rigid, repeats=3)
    device_s = seconds[threads]
    per_step = _computed_steps(kept["compiled"], SHORT_STEPS) / device_s
    same = (np.array_equal(kept["compiled"].kept, kept["numpy"].kept)
            and np.array_equal(kept["compiled"].final, kept["numpy"].final))
    case = (f"track_device compiled ({threads} threads) vs its numpy route, 1e5 particles x {SHORT_STEPS} steps: "
            f"{per_step:.3g} particle-steps/s")
    checks = [f"first {SHORT_STEPS} steps kept: device {kept['compiled'].fraction:.4f}, "
              f"rigid ideal quadrupole {kept['rigid'].fraction:.4f}; compiled = numpy route bit for bit: {same}",
              "device, 1e5 x 200 steps: " + ", ".join(f"compiled {n} thread(s) {t:.3f} s" for n, t in seconds.items())
              + f", numpy route {numpy_s:.3f} s ({numpy_s / device_s:.1f}x the compiled), "
              f"rigid track (ideal quadrupole) {rigid_s:.3f} s"]
    row = {"case": case, "tiltwell_s": device_s, "reference_s": numpy_s, "ratio": device_s / numpy_s,
           "target": "none set (ref column: numpy route)", "met": None}
    return row, checks


def yoshida_row() -> tuple[dict[str, object], list[str]]:
    states = lab(cloud(PARTICLES, seed=1))
    duration = YOSHIDA_STEPS * TIME_STEP
    kept: dict[str, tiltwell.TrackingResult] = {}

    def run(method: str) -> None:
        kept[method] = track_device(ARRAY, None, SPECIES, states, schedule=SCHEDULE, gradient=GRADIENT,
                                    time_step=TIME_STEP, duration=duration, box_half_widths=BOX, method=method)

    yoshida_s = median_time(lambda: run("yoshida4"), repeats=3)
    verlet_s = median_time(lambda: run("verlet"), repeats=3)
    case = (f"track_device yoshida4 vs verlet (compiled), 1e5 particles x {YOSHIDA_STEPS} steps: "
            f"{_computed_steps(kept['yoshida4'], YOSHIDA_STEPS) / yoshida_s:.3g} particle-steps/s")
    checks = [f"first {YOSHIDA_STEPS} steps kept: yoshida4 {kept['yoshida4'].fraction:.4f}, "
              f"verlet {kept['verlet'].fraction:.4f}"]
    row = {"case": case, "tiltwell_s": yoshida_s, "reference_s": verlet_s, "ratio": yoshida_s / verlet_s,
           "target": "none set (ref column: verlet)", "met": None}
    return row, checks


def memory_row() -> tuple[dict[str, object], list[str]]:
    particles = lab(cloud(PARTICLES, seed=2))
    tracemalloc.start()
    try:
        tracemalloc.reset_peak()
        before = tracemalloc.get_traced_memory()[0]
        track_device(ARRAY, None, SPECIES, particles, schedule=SCHEDULE, gradient=GRADIENT, time_step=TIME_STEP,
                     duration=MEMORY_STEPS * TIME_STEP, box_half_widths=BOX)
        peak = float(tracemalloc.get_traced_memory()[1] - before)
    finally:
        tracemalloc.stop()
    case = f"track_device peak memory, 1e5 particles x {MEMORY_STEPS} steps: {peak / 1e6:.0f} MB"
    row = {"case": case, "tiltwell_s": float("nan"), "reference_s": float("nan"), "ratio": peak / MEMORY_TARGET,
           "target": f"<= {MEMORY_TARGET / 1e9:.0f} GB (ratio: peak / target)", "met": peak <= MEMORY_TARGET}
    return row, [f"device tracker peak memory {peak / 1e6:.1f} MB for {PARTICLES} particles"]


#: Wall-clock target of ``tiltwell coils DEMO --track 3000`` (issue 12).
COILS_TRACK_TARGET_S = 10.0


def coils_track_row() -> tuple[dict[str, object], list[str]]:
    """``tiltwell coils`` on the demo with ``--track 3000`` as a user runs it: a fresh
    process (imports, the numba cache loaded, the row's twin table built), wall clock."""
    from tiltwell.cli import DEMO_SCENARIO

    command = [sys.executable, "-m", "tiltwell", "coils", str(DEMO_SCENARIO), "--track", "3000", "--json"]
    started = time.perf_counter()
    done = subprocess.run(command, capture_output=True, text=True, check=True)
    seconds = time.perf_counter() - started
    found = json.loads(done.stdout)["device_check"]
    row = {"case": "tiltwell coils demo --track 3000, a fresh process, wall clock (ref column: the target)",
           "tiltwell_s": seconds, "reference_s": COILS_TRACK_TARGET_S, "ratio": seconds / COILS_TRACK_TARGET_S,
           "target": f"<= {COILS_TRACK_TARGET_S:g} s", "met": seconds <= COILS_TRACK_TARGET_S}
    check = (f"tiltwell coils --track 3000: kept through the row {found['kept_coil_row']:.4f}, by the twin "
             f"{found['kept_rigid_twin']:.4f}, ripple loss {found['ripple_loss']:.4f} +- {found['ripple_loss_error']:.4f}")
    return row, [check]


def run() -> tuple[list[dict[str, object]], list[str]]:
    rows, checks = [], []
    for make in (memory_row, rigid_row, yoshida_row, full_row, coils_track_row):
        row, more = make()
        rows.append(row)
        checks += more
    return rows, checks


if __name__ == "__main__":
    found, notes = run()
    for entry in found:
        print(entry)
    for note in notes:
        print("-", note)
