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
    survival_weights : ndarray, shape (N,), or None
        With the spin-flip check on (``track(..., spin_flips=...)``): the probability that
        each particle has not flipped, up to the end or to its leaving the box; None when off.
        :attr:`fraction`, ``survival`` and ``kept`` count the walls only.

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
    survival_weights: FloatArray | None = None

    @property
    def fraction(self) -> float:
        """Fraction of the particles kept to the end."""
        return float(np.count_nonzero(self.kept)) / self.kept.size

    @property
    def binomial_error(self) -> float:
        """Standard error ``sqrt(p (1 - p) / N)`` of :attr:`fraction` as an estimate."""
        p = self.fraction
        return math.sqrt(p * (1.0 - p) / self.kept.size)

    @property
    def spin_flip_loss(self) -> float:
        """Fraction lost to spin flips, ``mean(1 - w)`` over all particles (NaN with the check off)."""
        return math.nan if self.survival_weights is None else float(np.mean(1.0 - self.survival_weights))

    @property
    def spin_flip_error(self) -> float:
        """Standard error ``std(1 - w) / sqrt(N)`` of :attr:`spin_flip_loss` (the binomial
        error when every weight is 0 or 1); NaN with the check off."""
        w = self.survival_weights
        return math.nan if w is None else float(np.std(1.0 - w) / math.sqrt(w.size))

    @property
    def kept_after_flips(self) -> float:
        """Fraction kept by the walls and not flipped, ``mean(kept w)``; :attr:`fraction`
        with the check off."""
        w = self.survival_weights
        return self.fraction if w is None else float(np.mean(np.where(self.kept, w, 0.0)))

    @property
    def kept_after_flips_error(self) -> float:
        """Standard error ``std(kept w) / sqrt(N)`` of :attr:`kept_after_flips`."""
        w = self.survival_weights
        if w is None:
            return self.binomial_error
        return float(np.std(np.where(self.kept, w, 0.0)) / math.sqrt(w.size))

    def _repr_html_(self) -> str:
        rows = [
            ("particles", f"{self.kept.size}"),
            ("kept", f"{self.fraction:.4g} ± {self.binomial_error:.2g}"),
            ("duration", f"{self.times[-1] * 1e3:.4g} ms"),
            ("method, step", f"{self.method}, {self.time_step * 1e6:.4g} µs"),
        ]
        if self.survival_weights is not None:
            rows[2:2] = [
                ("spin-flip loss", f"{self.spin_flip_loss:.4g} ± {self.spin_flip_error:.2g}"),
                ("kept, not flipped", f"{self.kept_after_flips:.4g} ± {self.kept_after_flips_error:.2g}"),
            ]
        return html_table("Tracking", rows)


def tracking_result(final: FloatArray, lost_step: NDArray[np.int64], steps: int, time_step: float, every: int,
                    method: str, *, weights: FloatArray | None = None) -> TrackingResult:
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
    weights : ndarray, shape (N,), optional
        Spin-flip survival weights [1] (kept, made read-only), or None with the check off.
    """
    count = lost_step.size
    recorded = np.unique(np.append(np.arange(0, steps + 1, every), steps))
    survival = (count - np.searchsorted(np.sort(lost_step), recorded, side="right")) / count
    kept = lost_step > steps
    lost_time = np.where(kept, np.inf, lost_step * time_step)
    arrays = (recorded * time_step, survival, final, kept, lost_time)
    for array in arrays:
        array.setflags(write=False)
    if weights is not None:
        weights.setflags(write=False)
    return TrackingResult(*arrays, method, time_step, weights)
