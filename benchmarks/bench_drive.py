"""Speed of a coil row's whole-shot loads (:func:`tiltwell.coils.drive.drive_load`) next to
planning the same table's currents (:func:`tiltwell.waveforms`), which every coil run does.

Run standalone (``PYTHONPATH=src python benchmarks/bench_drive.py``) to print the rows, or
call :func:`run`. The row is an invented one: 300 coils at a 12 mm pitch, 6 active, and a
table of 10,000 times over a 0.5 m deceleration.
"""

from __future__ import annotations

import numpy as np

from bench_fields import median_time
from tiltwell import CoilArray, constant_deceleration, waveforms
from tiltwell.coils.drive import drive_load

REPEATS = 5
TIMES = 10_000


#: The whole-shot loads of a row must not slow ``tiltwell coils`` down: under a second for
#: 300 coils (ours, a usability target; no source).
TARGET_S = 1.0


def run() -> tuple[list[dict[str, object]], list[str]]:
    """drive_load against waveforms on one table; ``ratio`` is drive_load's time over the plan's.
    Rows and check lines in the format of ``benchmarks/run.py``."""
    rows: list[dict[str, object]] = []
    checks: list[str] = []
    for count in (130, 300):
        array = CoilArray(count, 0.012, 0.019, turns=200, width=0.006, height=0.010, active=6, first=-0.036)
        schedule = constant_deceleration(420.0, 60.0, length=min(0.5, 0.012 * (count - 7)))
        times = np.linspace(0.0, schedule.duration, TIMES)
        currents = waveforms(array, schedule, 60.0, times).currents
        ours = median_time(lambda: drive_load(array, times, currents, rise_time=5e-6, repetition_rate=1.0), REPEATS)
        plan = median_time(lambda: waveforms(array, schedule, 60.0, times), REPEATS)
        rows.append({"case": f"drive_load {count} coils x {TIMES} times (ref: waveforms of the same table)",
                     "tiltwell_s": ours, "reference_s": plan, "ratio": ours / plan, "target": f"<= {TARGET_S:g} s",
                     "met": ours <= TARGET_S})
        load = drive_load(array, times, currents, rise_time=5e-6, repetition_rate=1.0)
        checks.append(f"drive_load {count} coils: {load.neighbours} neighbours summed per coil, peak voltage "
                      f"{load.peak_voltage.max():.4g} V")
    return rows, checks


if __name__ == "__main__":
    found, notes = run()
    for entry in found:
        print(entry)
    for note in notes:
        print(note)
