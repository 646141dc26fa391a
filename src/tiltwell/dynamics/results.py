"""What both trackers return: :class:`TrackingResult`, and its one assembly from the step
at which each particle left, :func:`tracking_result`."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .._base.display import html_table

__all__ = ["TrackingResult", "tracking_result"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True, eq=False)
class TrackingResult:
    """What :func:`tiltwell.track` and :func:`tiltwell.track_device` return.

    Attributes
    ----------
    times : ndarray, shape (K,)
        Recorded times [s], from 0 to the duration.
    survival : ndarray, shape (K,)
        Fraction of all particles still inside the box at ``times``.
    final : ndarray, shape (N, 6)
        Phase-space points (x, y, z, vx, vy, vz) [m, m/s] at the end, or at the end of the
        step in which a particle left the box (just outside it).
    kept : ndarray of bool, shape (N,)
        Whether each particle is still inside at the end.
    lost_time : ndarray, shape (N,)
        End of the step in which each particle left [s]; 0 for one that started outside,
        ``inf`` for kept ones.
    method : str
        The integration method.
    time_step : float
        The step used [s]: ``duration / ceil(duration / time_step)``.

    Examples
    --------
    >>> import numpy as np
    >>> result = tracking_result(np.zeros((4, 6)), np.array([0, 2, 5, 5]), 4, 1e-3, 1, "verlet")
    >>> result.fraction, result.survival.tolist()
    (0.5, [0.75, 0.75, 0.5, 0.5, 0.5])
    """

    times: FloatArray
    survival: FloatArray
    final: FloatArray
    kept: NDArray[np.bool_]
    lost_time: FloatArray
    method: str
    time_step: float

    @property
    def fraction(self) -> float:
        """Fraction of the particles kept to the end."""
        return float(np.count_nonzero(self.kept)) / self.kept.size

    @property
    def binomial_error(self) -> float:
        """Standard error ``sqrt(p (1 - p) / N)`` of :attr:`fraction` as an estimate."""
        p = self.fraction
        return math.sqrt(p * (1.0 - p) / self.kept.size)

    def _repr_html_(self) -> str:
        rows = [
            ("particles", f"{self.kept.size}"),
            ("kept", f"{self.fraction:.4g} ± {self.binomial_error:.2g}"),
            ("duration", f"{self.times[-1] * 1e3:.4g} ms"),
            ("method, step", f"{self.method}, {self.time_step * 1e6:.4g} µs"),
        ]
        return html_table("Tracking", rows)


def tracking_result(final: FloatArray, lost_step: NDArray[np.int64], steps: int, time_step: float, every: int,
                    method: str) -> TrackingResult:
    """Assemble the :class:`TrackingResult` of a run of ``steps`` steps of ``time_step`` [s].

    Parameters
    ----------
    final : ndarray, shape (N, 6)
        Phase-space points [m, m/s] at the end or at the end of the step of loss; kept
        (made read-only), not copied.
    lost_step : ndarray of int, shape (N,)
        The step at whose end each particle left: 0 if it started outside, ``steps + 1``
        if it stayed.
    steps : int
        Number of steps taken, >= 1.
    time_step : float
        The step [s].
    every : int
        Steps between recorded survival values, >= 1 (the end is always recorded).
    method : str
        The name stored in ``method``.
    """
    count = lost_step.size
    recorded = np.unique(np.append(np.arange(0, steps + 1, every), steps))
    survival = (count - np.searchsorted(np.sort(lost_step), recorded, side="right")) / count
    kept = lost_step > steps
    lost_time = np.where(kept, np.inf, lost_step * time_step)
    arrays = (recorded * time_step, survival, final, kept, lost_time)
    for array in arrays:
        array.setflags(write=False)
    return TrackingResult(*arrays, method, time_step)
