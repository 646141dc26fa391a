"""The explorer's trade-off curve: the captured fraction and the device length against
deceleration, computed from :class:`TradeoffInputs` (no widgets) and kept up to date on
its figure, in the background, a moment after the trap or the beam stops changing."""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .tasks import Tasks
from ..coils.schedule import constant_deceleration
from ..physics.beam import Beam
from ..wells.acceptance import TrapSampler, acceptances_at
from ..wells.overlap import plane_product_fraction
from ..wells.traps import Trap

__all__ = ["TITLE", "TRADEOFF_DELAY", "TRADEOFF_POINTS", "TRADEOFF_SPAN", "TradeoffCurve", "TradeoffInputs",
           "tradeoff"]

FloatArray = NDArray[np.float64]

#: Points of the trade-off curve, from TRADEOFF_SPAN[0] to TRADEOFF_SPAN[1] x critical.
TRADEOFF_POINTS = 28
TRADEOFF_SPAN = (0.04, 1.1)
#: Seconds of quiet after a trap or beam change before the trade-off curve is recomputed.
TRADEOFF_DELAY = 0.4
#: The figure's title when the curve is up to date.
TITLE = "trade-off against deceleration"


@dataclass(frozen=True, eq=False)
class TradeoffInputs:
    """What the trade-off curve needs, taken in the control thread so that the curve can
    be computed in another one: the trap, the beam, the trap's critical deceleration
    [m/s^2], samples per cut, the 6-D tolerance, the mismatch [m/s], the trap's initial
    velocity [m/s] (None without a schedule) and the final velocity [m/s]."""

    trap: Trap
    beam: Beam
    critical: float
    samples: int
    rtol: float
    mismatch: float
    start_velocity: float | None
    final_velocity: float


def tradeoff(inputs: TradeoffInputs) -> dict[str, FloatArray]:
    """Captured fraction (plane overlap, :func:`tiltwell.plane_product_fraction`) and
    device length [m] (:func:`tiltwell.constant_deceleration`) against deceleration
    [m/s^2] over TRADEOFF_SPAN x critical, on fresh samples of the trap (the acceptances
    of :func:`tiltwell.acceptance_curve`, kept with their separatrices)."""
    if not inputs.critical > 0.0:
        return {"deceleration": np.empty(0), "overlap": np.empty(0), "length": np.empty(0)}
    grid = inputs.critical * np.linspace(*TRADEOFF_SPAN, TRADEOFF_POINTS)
    results = acceptances_at(TrapSampler(inputs.trap, inputs.samples), grid, rtol=inputs.rtol)
    overlap = np.array([plane_product_fraction(r.longitudinal, r.transverse, inputs.beam, inputs.mismatch)
                        for r in results])
    length = np.full(grid.size, math.nan)
    if inputs.start_velocity is not None:
        start = inputs.start_velocity
        length = np.array([constant_deceleration(start, inputs.final_velocity, deceleration=a).length for a in grid])
    return {"deceleration": grid, "overlap": overlap, "length": length}


class TradeoffCurve:
    """The curve on its figure: what is drawn, for which settings, and its recomputation.

    Parameters
    ----------
    tasks : Tasks
        The explorer's background work (its lock guards the drawing).
    figure, source
        The Bokeh trade-off figure and the data source of its curve.
    auto : bool
        Recompute in the background after changes; else only on :meth:`compute_now`.

    Attributes
    ----------
    shown : tuple or None
        The settings' ``tradeoff_key`` of the drawn curve (None before the first one).
    """

    def __init__(self, tasks: Tasks, figure: Any, source: Any, *, auto: bool) -> None:
        self._tasks, self._figure, self._source = tasks, figure, source
        self.auto = auto
        self.shown: tuple[Any, ...] | None = None

    def schedule(self, inputs_of: Callable[[], TradeoffInputs], key: tuple[Any, ...],
                 current: Callable[[], bool]) -> None:
        """Mark the curve out of date and, when :attr:`auto`, recompute it for ``key``
        after :data:`TRADEOFF_DELAY` in the background, drawn if ``current()`` still holds.
        ``inputs_of()`` is called here, in the calling thread, and only when :attr:`auto`
        (it builds the scenario: not worth it for a curve nobody asked for yet)."""
        if not self.auto:
            self._figure.title.text = f"{TITLE} (out of date: press “update trade-off now”)"
            return
        self._figure.title.text = f"{TITLE} (updating…)"
        inputs = inputs_of()

        def due() -> None:
            self._tasks.run("trade-off curve", lambda: tradeoff(inputs), lambda data: self.show(key, data), current)

        self._tasks.later(TRADEOFF_DELAY, due)

    def compute_now(self, inputs: TradeoffInputs, key: tuple[Any, ...], current: Callable[[], bool]) -> None:
        """Drop a pending recomputation and compute the curve in this thread; drawn if
        ``current()`` still holds then."""
        self._tasks.cancel()
        data = tradeoff(inputs)
        with self._tasks.lock:
            if current():
                self.show(key, data)

    def show(self, key: tuple[Any, ...], data: dict[str, FloatArray]) -> None:
        """Draw ``data`` (columns of :func:`tradeoff`) as the curve of ``key``."""
        self._source.data = data
        self._figure.title.text = TITLE
        self.shown = key
