"""Speed and memory of the full-device tracker: particles through a 300-coil array.

The device is invented: 300 coils at a 6 mm pitch, 8 mm mean radius, 40 turns in a
2 x 4 mm winding, four coils active, 400 A per turn allowed, making a 200 T/m trap that
carries OH from 400 m/s down to 20 m/s over the row (about 45 000 m/s^2, 0.57 of the
critical mu B' / m). The beam is a Gaussian cloud (0.7 mm, 4 m/s rms per axis) around the
trap centre at switch-on.

- The whole run: 1e5 particles, time step 1 us, switch-on to release (8 390 steps).
  Target: <= 300 s on this machine. Reported: wall time and particle-steps per second
  (computed, i.e. counting each particle only while it is inside).
- Per particle-step against the rigid trap-frame tracker (``tiltwell.track`` with the
  inline ideal quadrupole) on the same cloud over the first 200 steps: the price of
  following 300 coils' time-dependent field instead of a fixed analytic force. No target.
- Per step, ``method="yoshida4"`` against the default ``"verlet"`` of ``track_device`` on the
  same cloud over the first 100 steps (three force evaluations a step against one, so
  about 3x; the price of 4th order). No target.
- Peak memory (tracemalloc, which sees numpy's allocations) of 1e5 particles x 50 steps.
  Target: <= 1 GB.

Run standalone (``python benchmarks/bench_device.py``) or call :func:`run`.
"""

from __future__ import annotations

import time
import tracemalloc

import numpy as np

import tiltwell
from bench_fields import median_time
from tiltwell.dynamics.device import track_device

PARTICLES = 100_000
TIME_STEP = 1e-6
GRADIENT = 200.0
BOX = (0.0035, 0.0035, 0.004)
SHORT_STEPS = 200
YOSHIDA_STEPS = 100
MEMORY_STEPS = 50
TIME_TARGET = 300.0
MEMORY_TARGET = 1e9
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


def full_row() -> tuple[dict[str, object], list[str]]:
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
        f"{result.fraction:.4f} of {PARTICLES} kept to 20 m/s (deceleration {SCHEDULE.deceleration:.4g} m/s^2)",
    ]
    row = {"case": case, "tiltwell_s": seconds, "reference_s": TIME_TARGET, "ratio": seconds / TIME_TARGET,
           "target": f"<= {TIME_TARGET:.0f} s (ref column: the target)", "met": seconds <= TIME_TARGET}
    return row, checks


def rigid_row() -> tuple[dict[str, object], list[str]]:
    states = cloud(PARTICLES, seed=1)
    duration = SHORT_STEPS * TIME_STEP
    trap = tiltwell.Trap(tiltwell.IdealQuadrupole(GRADIENT), SPECIES, tuple((-h, h) for h in BOX))
    kept: dict[str, tiltwell.TrackingResult] = {}

    def device() -> None:
        kept["device"] = track_device(ARRAY, None, SPECIES, lab(states), schedule=SCHEDULE, gradient=GRADIENT,
                                      time_step=TIME_STEP, duration=duration, box_half_widths=BOX)

    def rigid() -> None:
        kept["rigid"] = tiltwell.track(trap, states, duration, TIME_STEP, deceleration=SCHEDULE.deceleration)

    device_s = median_time(device, repeats=3)
    rigid_s = median_time(rigid, repeats=3)
    per_step = _computed_steps(kept["device"], SHORT_STEPS) / device_s
    case = (f"track_device vs rigid track (ideal quadrupole), 1e5 particles x {SHORT_STEPS} steps: "
            f"{per_step:.3g} particle-steps/s")
    checks = [f"first {SHORT_STEPS} steps kept: device {kept['device'].fraction:.4f}, "
              f"rigid ideal quadrupole {kept['rigid'].fraction:.4f}"]
    row = {"case": case, "tiltwell_s": device_s, "reference_s": rigid_s, "ratio": device_s / rigid_s,
           "target": "none set", "met": None}
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
    case = (f"track_device yoshida4 vs verlet, 1e5 particles x {YOSHIDA_STEPS} steps: "
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


def run() -> tuple[list[dict[str, object]], list[str]]:
    rows, checks = [], []
    for make in (memory_row, rigid_row, yoshida_row, full_row):
        row, more = make()
        rows.append(row)
        checks += more
    return rows, checks


if __name__ == "__main__":
    for entry in run()[0]:
        print(entry)
