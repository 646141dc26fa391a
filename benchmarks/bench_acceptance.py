"""Speed of tiltwell's trap acceptances on a small coil-built trap.

The trap is invented: an anti-Helmholtz pair (radius 10 mm, separation 12 mm, 40 A x 50
turns, 2 x 2 mm windings) holding Rb-87 in a 12 x 12 x 24 mm box.

- The acceptance curve over 200 decelerations from 0 to 1.1 x critical, against the same
  200 points computed one by one with ``trap_acceptance(..., include_6d=False)``: no shared
  sampling, so each point samples the field again.
- The 6-D acceptance at 0.3 x critical (``rtol=1e-2``), against ``energetic_acceptance`` of
  the same tilted potential at ``rtol=1e-3`` on the grid alone (no ``known_escape``).

Run standalone (``python benchmarks/bench_acceptance.py``) or call :func:`run`.
"""

from __future__ import annotations

from typing import Any

import numpy as np

import tiltwell
from bench_fields import median_time

POINTS = 200
CURVE_SAMPLES = 1001  # acceptance_curve's default, given to the reference too
SIX_D_FRACTION = 0.3
CURVE_TARGET_S = 0.2
SIX_D_TARGET_S = 1.0
SLOW_REPEATS = 3  # the references take ~20 s a call


def coil_trap() -> tiltwell.Trap:
    pair = tiltwell.anti_helmholtz(0.01, 0.012, 40.0, turns=50, width=2e-3, height=2e-3)
    return tiltwell.Trap(pair, tiltwell.species("Rb-87"), ((-6e-3, 6e-3), (-6e-3, 6e-3), (-12e-3, 12e-3)))


def _relative(ours: np.ndarray, theirs: np.ndarray) -> float:
    """Largest relative difference, NaN where both are NaN counted as agreement."""
    ours, theirs = np.asarray(ours, float), np.asarray(theirs, float)
    both_nan = np.isnan(ours) & np.isnan(theirs)
    scale = np.maximum(np.abs(theirs), np.finfo(float).tiny)
    return float(np.max(np.where(both_nan, 0.0, np.abs(ours - theirs) / scale)))


def _row(case: str, tiltwell_s: float, reference_s: float, target_s: float) -> dict[str, object]:
    return {
        "case": case,
        "tiltwell_s": tiltwell_s,
        "reference_s": reference_s,
        "ratio": tiltwell_s / reference_s,
        "target": f"<= {target_s:g} s",
        "met": tiltwell_s <= target_s,
    }


def curve_row(trap: tiltwell.Trap, critical: float) -> tuple[dict[str, object], list[str]]:
    decelerations = np.linspace(0.0, 1.1 * critical, POINTS)
    kept: dict[str, Any] = {}

    def ours() -> None:
        kept["curve"] = tiltwell.acceptance_curve(trap, decelerations, samples=CURVE_SAMPLES)

    def reference() -> None:
        kept["points"] = [
            tiltwell.trap_acceptance(trap, a, samples=CURVE_SAMPLES, include_6d=False) for a in decelerations
        ]

    tiltwell_s = median_time(ours)
    reference_s = median_time(reference, repeats=SLOW_REPEATS)
    curve, points = kept["curve"], kept["points"]
    differences = {
        "longitudinal": _relative(curve.longitudinal, np.array([p.longitudinal.area for p in points])),
        "transverse": _relative(curve.transverse, np.array([p.transverse.area for p in points])),
        "escape energy": _relative(curve.escape_energy, np.array([p.escape_energy for p in points])),
    }
    bound = int(np.count_nonzero(curve.longitudinal > 0))
    check = (
        f"acceptance curve: {bound}/{POINTS} decelerations bound; largest relative difference to the "
        "one-by-one reference: " + ", ".join(f"{k} {v:.1e}" for k, v in differences.items())
    )
    case = f"acceptance_curve, {POINTS} decelerations (ref: trap_acceptance one by one)"
    return _row(case, tiltwell_s, reference_s, CURVE_TARGET_S), [check]


def six_d_row(trap: tiltwell.Trap, critical: float) -> tuple[dict[str, object], list[str]]:
    a = SIX_D_FRACTION * critical
    kept: dict[str, Any] = {}

    def potential(x: np.ndarray, y: np.ndarray, z: np.ndarray) -> np.ndarray:
        return trap.effective_potential(x, y, z, a)

    def ours() -> None:
        kept["ours"] = tiltwell.trap_acceptance(trap, a)

    def reference() -> None:
        near = (0.0, 0.0, tiltwell.longitudinal_acceptance(trap, a).z_bottom)
        kept["near"] = near
        kept["reference"] = tiltwell.energetic_acceptance(potential, trap.mass, trap.bounds, rtol=1e-3, near=near)

    tiltwell_s = median_time(ours)
    reference_s = median_time(reference, repeats=SLOW_REPEATS)
    result, grid = kept["ours"], kept["reference"]
    # The same call given the 1-D escape energy, as trap_acceptance gives it (not timed).
    hinted = tiltwell.energetic_acceptance(
        potential, trap.mass, trap.bounds, rtol=1e-3, near=kept["near"], known_escape=result.escape_energy
    )
    checks = [
        f"6-D volume: tiltwell {result.volume:.6e}, reference {grid.volume:.6e} (grid {grid.grid_points}^3, "
        f"converged={grid.converged}): relative difference {abs(result.volume - grid.volume) / grid.volume:.1e} "
        "(claim: <= 1e-2)",
        f"6-D escape energy: tiltwell {result.escape_energy:.6e} J, reference grid {grid.escape_energy:.6e} J",
        f"6-D with known_escape at rtol=1e-3 (untimed): {hinted.volume:.6e} on grid {hinted.grid_points}^3, "
        f"relative difference to tiltwell {abs(result.volume - hinted.volume) / hinted.volume:.1e}",
    ]
    case = f"trap_acceptance 6-D at {SIX_D_FRACTION} x critical, rtol 1e-2 (ref: energetic_acceptance rtol 1e-3)"
    return _row(case, tiltwell_s, reference_s, SIX_D_TARGET_S), checks


def run() -> tuple[list[dict[str, object]], list[str]]:
    """Two table rows and the check lines printed under the table."""
    trap = coil_trap()
    critical = trap.critical_deceleration()
    rows, checks = [], [f"coil trap: critical deceleration {critical:.6g} m/s^2"]
    for make in (curve_row, six_d_row):
        row, lines = make(trap, critical)
        rows.append(row)
        checks.extend(lines)
    return rows, checks


if __name__ == "__main__":
    rows, checks = run()
    for entry in rows:
        print(entry)
    print("\n".join(checks))
