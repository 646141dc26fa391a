"""Speed of :func:`tiltwell.separatrix` against a straightforward reference written here.

The well is ``U = -cos z - 0.4 z`` on [-2 pi, 2 pi], 2,000 samples, unit mass. The reference
takes the same piecewise-linear potential (``np.interp`` of the samples): the bottom and the
barrier on the samples, the turning points by ``scipy.optimize.brentq``, and the area by
``scipy.integrate.quad`` of ``sqrt(2 (E - U) / m)``. Both compute the area of one and the
same piecewise-linear well, so they must agree to the quadrature's tolerance.

Run standalone (``python benchmarks/bench_separatrix.py``) or call :func:`run`.
"""

from __future__ import annotations

import numpy as np
from scipy import integrate, optimize

from bench_fields import median_time
from tiltwell import separatrix

SAMPLES = 2_000
MASS = 1.0
TARGET_S = 1e-3


def tilted_cosine() -> tuple[np.ndarray, np.ndarray]:
    """Positions [m] and potential [J] of the benchmark well."""
    z = np.linspace(-2 * np.pi, 2 * np.pi, SAMPLES)
    return z, -np.cos(z) - 0.4 * z


def reference_area(z: np.ndarray, U: np.ndarray, mass: float) -> float:
    """Separatrix area the plain way: a loop over minima, brentq, quad."""
    best = None
    for i in range(1, z.size - 1):
        if U[i] < U[i - 1] and U[i] < U[i + 1]:  # an interior local minimum
            left, right = int(np.argmax(U[:i])), i + 1 + int(np.argmax(U[i + 1 :]))
            energy = min(U[left], U[right])
            if best is None or energy - U[i] > best[0]:
                best = (energy - U[i], i, energy)
    if best is None:
        return 0.0
    _, bottom, energy = best

    def excess(s: float) -> float:
        return float(np.interp(s, z, U)) - energy

    above = np.flatnonzero(U >= energy)
    back = above[above < bottom].max()  # first sample at or above E, walking out
    front = above[above > bottom].min()
    z_back = optimize.brentq(excess, z[back], z[bottom], xtol=1e-13)
    z_front = optimize.brentq(excess, z[bottom], z[front], xtol=1e-13)

    def speed(s: float) -> float:
        return float(np.sqrt(2.0 * max(energy - float(np.interp(s, z, U)), 0.0) / mass))

    half, _ = integrate.quad(speed, z_back, z_front, limit=200, epsrel=1e-6)
    return 2.0 * half


def run() -> tuple[list[dict[str, object]], list[str]]:
    """One table row and the check lines printed under the table."""
    z, U = tilted_cosine()
    ours = separatrix(z, U, MASS).area
    theirs = reference_area(z, U, MASS)
    tiltwell_s = median_time(lambda: separatrix(z, U, MASS))
    reference_s = median_time(lambda: reference_area(z, U, MASS))
    row = {
        "case": f"separatrix, {SAMPLES:,} samples (ref: brentq + quad)",
        "tiltwell_s": tiltwell_s,
        "reference_s": reference_s,
        "ratio": tiltwell_s / reference_s,
        "target": f"<= {TARGET_S * 1e3:g} ms",
        "met": tiltwell_s <= TARGET_S,
    }
    check = (
        f"separatrix area: tiltwell {ours:.10f}, reference {theirs:.10f}, "
        f"relative difference {abs(ours - theirs) / abs(theirs):.1e} (should be ~1e-4 or less)"
    )
    return [row], [check]


if __name__ == "__main__":
    rows, checks = run()
    print(rows[0])
    print("\n".join(checks))
