"""Speed of tiltwell's coil fields against magpylib on the same points.

Run standalone (``PYTHONPATH=src python benchmarks/bench_fields.py``) to print a table, or
call :func:`run` for the rows. magpylib is only the yardstick; the package never imports it.
"""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable

import magpylib
import numpy as np

from tiltwell.physics.fields import anti_helmholtz, loop_field

REPEATS = 7
POINTS = 100_000


def median_time(call: Callable[[], object], repeats: int = REPEATS) -> float:
    """Median wall time [s] of ``repeats`` calls, after one warm-up call."""
    call()
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        call()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def row(case: str, ours: Callable[[], object], reference: Callable[[], object]) -> dict[str, object]:
    tiltwell_s, reference_s = median_time(ours), median_time(reference)
    return {"case": case, "tiltwell_s": tiltwell_s, "reference_s": reference_s, "ratio": tiltwell_s / reference_s}


def run() -> list[dict[str, object]]:
    """Time tiltwell against magpylib; ``ratio`` < 1 means tiltwell is faster."""
    rng = np.random.default_rng(0)
    radius, plane, current = 0.02, 0.005, 150.0
    points = rng.uniform(-3 * radius, 3 * radius, (POINTS, 3))
    loop = magpylib.current.Circle(current=current, diameter=2 * radius, position=(0, 0, plane))

    pair = anti_helmholtz(radius, 0.03, current, turns=20, width=0.004, height=0.004)
    filaments = [
        magpylib.current.Circle(current=amps, diameter=2 * r, position=(0, 0, z))
        for coil in pair.coils
        for r, z, amps in zip(*coil.loops())
    ]
    return [
        row("loop_field 1e5 points", lambda: loop_field(points, radius, plane, current), lambda: loop.getB(points)),
        row(
            f"CoilSet {len(filaments)} filaments 1e5 points",
            lambda: pair.field(points),
            lambda: magpylib.getB(filaments, points, sumup=True),
        ),
    ]


def main() -> None:
    print(f"{'case':<36} {'tiltwell [s]':>13} {'magpylib [s]':>13} {'ratio':>7}")
    for entry in run():
        print(f"{entry['case']:<36} {entry['tiltwell_s']:>13.4f} {entry['reference_s']:>13.4f} {entry['ratio']:>7.3f}")


if __name__ == "__main__":
    main()
