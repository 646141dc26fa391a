"""Cost of the error bar: the demo's whole summary with its uncertain inputs (pressure, seed
fraction and rotational temperature, propagated through 64 sampled input sets), side by
side with the same summary where those inputs are plain values. Target: within 5x of it.

Both run the demo as shipped (1e5 tracked particles, the coil row as the trap, spin flips
on); the store of captured fractions the propagation keeps is emptied before every call,
so each timed call pays for its first energetic estimate.

Run standalone (``python benchmarks/bench_yield.py``) or call :func:`run`.
"""

from __future__ import annotations

import dataclasses
from typing import Any

import tiltwell
from bench_fields import median_time
from tiltwell import scenario as sc
from tiltwell.cli import DEMO_SCENARIO
from tiltwell.workflows.keys import Uncertainties
from tiltwell.workflows.yields import forget_fractions

TARGET_RATIO = 5.0
REPEATS = 2


def run() -> tuple[list[dict[str, object]], list[str]]:
    uncertain = sc.load(DEMO_SCENARIO)
    plain = dataclasses.replace(uncertain, uncertainties=Uncertainties())  # same values, none uncertain
    assert len(uncertain.uncertainties) == 3 and len(plain.uncertainties) == 0
    kept: dict[str, Any] = {}

    def ours() -> None:
        forget_fractions()
        kept["uncertain"] = tiltwell.summarise(uncertain)

    def reference() -> None:
        forget_fractions()
        kept["plain"] = tiltwell.summarise(plain)

    hot = uncertain.replace("beam", temperature={"value": uncertain.beam.temperature, "uncertainty": 5.0})

    def ours_hot() -> None:
        forget_fractions()
        kept["hot"] = tiltwell.summarise(hot)

    ours()  # builds the row's twin table once, for both
    without_s = median_time(reference, repeats=REPEATS)
    rows = []
    for case, call in (("3 uncertain inputs that scale the number", ours),
                       ("4, the nozzle temperature too (each sample new fractions)", ours_hot)):
        with_s = median_time(call, repeats=REPEATS)
        rows.append({
            "case": f"demo summary, {case}, 64 samples (ref: the same summary, plain inputs)",
            "tiltwell_s": with_s,
            "reference_s": without_s,
            "ratio": with_s / without_s,
            "target": f"ratio <= {TARGET_RATIO:g}",
            "met": with_s / without_s <= TARGET_RATIO,
        })
    a, b = kept["uncertain"], kept["plain"]
    check = (f"yield: {a['slow_particles']:.3g} slow particles per shot (68 % {a['slow_particles_low']:.3g} to "
             f"{a['slow_particles_high']:.3g}) with uncertain inputs; {b['slow_particles']:.3g} "
             f"({b['slow_particles_low']:.3g} to {b['slow_particles_high']:.3g}) from the plain ones; with the "
             f"nozzle temperature uncertain too {kept['hot']['slow_particles_low']:.3g} to "
             f"{kept['hot']['slow_particles_high']:.3g}")
    return rows, [check]


if __name__ == "__main__":
    rows, checks = run()
    for entry in rows:
        print(entry)
    for line in checks:
        print(line)
