"""Run every benchmark and print one markdown table of median wall times.

Usage, from the repository root: ``make bench`` or ``.venv/bin/python benchmarks/run.py``.
Each time is the median of several calls (``time.perf_counter``) after one warm-up call;
tiltwell and its reference are timed one after the other in the same process. A target
that is not reached says "missed"; the numbers are never adjusted to pass.
"""

from __future__ import annotations

import os
import platform
import sys
import time

import bench_acceptance
import bench_device
import bench_device_model
import bench_drive
import bench_explorer
import bench_fields
import bench_report
import bench_search
import bench_separatrix
import bench_tracking
import bench_yield

COLUMNS = ("case", "tiltwell [s]", "reference [s]", "ratio (tiltwell/reference)", "target", "met?")


def field_rows() -> list[dict[str, object]]:
    """bench_fields' rows, with the target set for them here (loop_field: not slower than magpylib)."""
    rows = []
    for entry in bench_fields.run():
        case = str(entry["case"])
        if case.startswith("loop_field"):
            target, met = "ratio <= 1", float(entry["ratio"]) <= 1.0  # type: ignore[arg-type]
        else:
            target, met = "none set", None
        rows.append({**entry, "case": f"{case} (ref: magpylib)", "target": target, "met": met})
    return rows


def cell(entry: dict[str, object]) -> list[str]:
    met = entry["met"]
    return [
        str(entry["case"]),
        f"{entry['tiltwell_s']:.3g}",
        f"{entry['reference_s']:.3g}",
        f"{entry['ratio']:.3g}",
        str(entry["target"]),
        "-" if met is None else ("yes" if met else "missed"),
    ]


def main() -> None:
    started = time.perf_counter()
    rows: list[dict[str, object]] = []
    checks: list[str] = []
    rows_1, checks_1 = bench_separatrix.run()
    rows += rows_1
    checks += checks_1
    rows += field_rows()
    for module in (bench_acceptance, bench_tracking, bench_device, bench_device_model, bench_drive, bench_report,
                   bench_yield, bench_search, bench_explorer):
        more_rows, more_checks = module.run()
        rows += more_rows
        checks += more_checks

    print(f"Ran on {cpu_name()}, python {sys.version.split()[0]}, {time.strftime('%Y-%m-%d', time.gmtime())} (UTC)\n")
    print("| " + " | ".join(COLUMNS) + " |")
    print("|" + "|".join("---" for _ in COLUMNS) + "|")
    for entry in rows:
        print("| " + " | ".join(cell(entry)) + " |")
    print()
    for line in checks:
        print(f"- {line}")
    print(f"\n(total {time.perf_counter() - started:.0f} s)")


def cpu_name() -> str:
    """The processor's model name (Linux /proc/cpuinfo; platform.processor() elsewhere) and the core count."""
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as info:
            name = next(line.split(":", 1)[1].strip() for line in info if line.startswith("model name"))
    except (OSError, StopIteration):
        name = platform.processor() or "unknown"
    return f"{name}, {os.cpu_count()} cores"


if __name__ == "__main__":
    main()
