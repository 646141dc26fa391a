"""Speed of the one device model: the demo's summary (no trajectories) with its coil row as
the trap, side by side with the same summary through the ideal quadrupole of its [trap]
section (``[simulation] first_estimate = true``). Target: within 3x of it.

The row's run builds the phase-averaged twin table once per row geometry (cached, see
tiltwell.workflows.devicemodel.twin_table) and adds the worst-phase scan; the first call is
timed apart (cold: the table is built), the median is over warm calls, as a sweep makes them.

Run standalone (``python benchmarks/bench_device_model.py``) or call :func:`run`.
"""

from __future__ import annotations

import time
from typing import Any

import tiltwell
from bench_fields import median_time
from tiltwell import scenario as sc
from tiltwell.cli import DEMO_SCENARIO
from tiltwell.workflows.devicemodel import twin_cache_info

TARGET_RATIO = 3.0
REPEATS = 3


def run() -> tuple[list[dict[str, object]], list[str]]:
    lean = sc.load(DEMO_SCENARIO).replace("simulation", track=False)
    quick = lean.replace("simulation", first_estimate=True)
    kept: dict[str, Any] = {}

    def ours() -> None:
        kept["row"] = tiltwell.summarise(lean)

    def reference() -> None:
        kept["quick"] = tiltwell.summarise(quick)

    misses = twin_cache_info()[1]
    started = time.perf_counter()
    ours()
    cold_s = time.perf_counter() - started
    built = twin_cache_info()[1] - misses
    row_s = median_time(ours, repeats=REPEATS)
    quick_s = median_time(reference, repeats=REPEATS)
    row = {
        "case": "demo summary without trajectories, coil row as the trap (ref: ideal quadrupole, first estimate)",
        "tiltwell_s": row_s,
        "reference_s": quick_s,
        "ratio": row_s / quick_s,
        "target": f"ratio <= {TARGET_RATIO:g}",
        "met": row_s / quick_s <= TARGET_RATIO,
    }
    summary, first = kept["row"], kept["quick"]
    check = (
        f"device model: first row run {cold_s:.2f} s ({built} twin table built), warm {row_s:.2f} s; "
        f"longitudinal acceptance {summary['longitudinal_acceptance'] * 1e3:.4g} mm*m/s from the row "
        f"(worst phase {summary['longitudinal_acceptance_worst_phase'] * 1e3:.4g}) against "
        f"{first['longitudinal_acceptance'] * 1e3:.4g} from the first estimate"
    )
    return [row], [check]


if __name__ == "__main__":
    rows, checks = run()
    print(rows[0])
    print("\n".join(checks))
