"""The integrator registry shared by both trackers: symmetric splitting schemes by name.

A scheme is a symmetric splitting ``K(k0) D(d1) K(k1) ... D(ds) K(ks)`` of one step ``h``
into kicks (velocity changes by ``k_j h`` times the acceleration) and drifts (position
changes by ``d_j h`` times the velocity), its coefficients in units of the step. Time is
advanced with the drifts, and the force is evaluated after each drift at the time the
drifts have reached (the last at the end of the step), so a time-dependent force keeps the
order.

- ``"verlet"``: velocity Verlet (kick-drift-kick), 2nd order, one force evaluation per step;
- ``"yoshida4"``: the symmetric composition of three Verlet steps of sizes ``w1 h, w0 h,
  w1 h`` with ``w1 = 1 / (2 - 2^(1/3))``, ``w0 = -2^(1/3) w1`` (H. Yoshida, Phys. Lett. A
  150, 262 (1990); E. Forest and R. D. Ruth, Physica D 43, 105 (1990); from memory), 4th
  order, three force evaluations per step, at times up to ``w1 - 1 = 0.35`` steps outside
  the step (its middle sub-step runs backwards).

:func:`tiltwell.track` and :func:`tiltwell.track_device` look their ``method`` up here with
:func:`integrator`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .._base.validation import TiltwellError

__all__ = ["INTEGRATORS", "SplittingScheme", "integrator"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class SplittingScheme:
    """A symmetric kick-drift splitting of one step, coefficients in units of the step.

    Attributes
    ----------
    order : int
        Order of the global error in the step (2: halving the step quarters the error).
    kicks : tuple of float, length s + 1
        ``k0 ... ks``: kick ``j`` changes the velocity by ``k_j h a``, ``a`` the
        acceleration [m/s^2] after drift ``j`` (before the first drift: at the step's start).
    drifts : tuple of float, length s
        ``d1 ... ds``: drift ``j`` changes the position by ``d_j h v``; they sum to 1.
    """

    order: int
    kicks: tuple[float, ...]
    drifts: tuple[float, ...]

    @property
    def evaluations(self) -> int:
        """Force evaluations per step, ``s``."""
        return len(self.drifts)

    def force_offsets(self) -> FloatArray:
        """Times of the force evaluations within a step, shape (s,), in units of the step:
        the running sums of the drifts, the last exactly 1."""
        offsets = np.cumsum(self.drifts)
        offsets[-1] = 1.0
        return offsets

    def force_times(self, steps: int, time_step: float) -> FloatArray:
        """All times [s] at which a run of ``steps`` steps of ``time_step`` [s] evaluates the force.

        Returns
        -------
        ndarray, shape (steps * s + 1,)
            ``0``, then for each step ``k`` the times ``(k + offset_j) time_step``; entry
            ``k s`` is the end of step ``k`` (for Verlet these are the step ends ``k h``).
        """
        moments = np.arange(steps)[:, None] + self.force_offsets()[None, :]
        return np.concatenate([[0.0], moments.ravel()]) * time_step

    def merged_kicks(self, steps: int, time_step: float) -> FloatArray:
        """Kick weights [s^2] at every force evaluation of :meth:`force_times`, with the last
        kick of a step and the first of the next merged into one.

        Returns
        -------
        ndarray, shape (steps * s + 1,)
            ``k0 h^2``, then per step ``k1 h^2 ... k_{s-1} h^2, (ks + k0) h^2`` (the last
            step's final entry includes the next step's first kick too, taken back by
            :attr:`resync` when the velocities are read).
        """
        k = self.kicks
        return np.concatenate([[k[0]], np.tile(np.append(k[1:-1], k[-1] + k[0]), steps)]) * time_step * time_step

    @property
    def resync(self) -> float:
        """Share of a merged kick that belongs to the next step, ``k0 / (ks + k0)``."""
        return self.kicks[0] / (self.kicks[-1] + self.kicks[0])


_W1 = 1.0 / (2.0 - 2.0 ** (1.0 / 3.0))
_W0 = -(2.0 ** (1.0 / 3.0)) * _W1

#: The methods ``track`` and ``track_device`` accept, by name.
INTEGRATORS: dict[str, SplittingScheme] = {
    "verlet": SplittingScheme(2, (0.5, 0.5), (1.0,)),
    "yoshida4": SplittingScheme(
        4, (0.5 * _W1, 0.5 * (_W1 + _W0), 0.5 * (_W0 + _W1), 0.5 * _W1), (_W1, _W0, _W1)
    ),
}


def integrator(method: object) -> SplittingScheme:
    """The registered scheme called ``method`` (a key of :data:`INTEGRATORS`).

    Raises
    ------
    TiltwellError
        If ``method`` is not one of the registered names; the message lists them.

    Examples
    --------
    >>> integrator("verlet").order, integrator("yoshida4").evaluations
    (2, 3)
    """
    if not isinstance(method, str) or method not in INTEGRATORS:
        raise TiltwellError(f"method must be one of {', '.join(map(repr, INTEGRATORS))}; got {method!r}")
    return INTEGRATORS[method]
