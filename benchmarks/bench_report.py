"""Speed of a whole scenario run: the invented demo with 1e5 trajectories.

The reference is the same summary without trajectories (acceptances, overlap and the
energetic 6-D count only), so the ratio shows what the trajectories cost. Target: the full
demo run in at most 30 s on this machine.

Run standalone (``python benchmarks/bench_report.py``) or call :func:`run`.
"""

from __future__ import annotations

from typing import Any

import tiltwell
from bench_fields import median_time
from tiltwell import scenario as sc
from tiltwell.cli import DEMO_SCENARIO

TARGET_S = 30.0
REPEATS = 3


def run() -> tuple[list[dict[str, object]], list[str]]:
    demo = sc.load(DEMO_SCENARIO)
    lean = demo.replace("simulation", track=False)
    kept: dict[str, Any] = {}

    def ours() -> None:
        kept["full"] = tiltwell.summarise(demo)

    def reference() -> None:
        kept["lean"] = tiltwell.summarise(lean)

    full_s = median_time(ours, repeats=REPEATS)
    lean_s = median_time(reference, repeats=REPEATS)
    full = kept["full"]
    row = {
        "case": f"demo scenario run, {full['mc_particles']} trajectories (ref: same run without trajectories)",
        "tiltwell_s": full_s,
        "reference_s": lean_s,
        "ratio": full_s / lean_s,
        "target": f"<= {TARGET_S:g} s",
        "met": full_s <= TARGET_S,
    }
    check = (
        "demo captured fraction: overlap {:.4f}, energetic {:.4f} +- {:.4f}, trajectories {:.4f} +- {:.4f}".format(
            full["captured_fraction_overlap"], full["captured_fraction_energy"],
            full["captured_fraction_energy_error"], full["captured_fraction_mc"], full["captured_fraction_mc_error"])
    )
    return [row], [check]


if __name__ == "__main__":
    rows, checks = run()
    print(rows[0])
    print("\n".join(checks))
