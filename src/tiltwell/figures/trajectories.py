"""Figures of tracked trajectories: survival in the decelerating trap, the time of
flight to a detector, and the predicted detector traces of the free beam and the packet.

Re-exported by :mod:`tiltwell.figures` (see there for units, gids and the look).
"""

from __future__ import annotations

from matplotlib.axes import Axes
from matplotlib.figure import Figure
from numpy.typing import ArrayLike

from .._base.validation import TiltwellError
from ..coils.schedule import arrival_histogram
from ..dynamics.tracking import TrackingResult
from ..workflows.traces import Traces
from .style import PALETTE, add_legend, canvas, styled

__all__ = ["detector_traces", "survival", "time_of_flight"]


@styled
def time_of_flight(times: ArrayLike, *, bins: int | ArrayLike = 50, ax: Axes | None = None) -> Figure:
    """Time-of-flight histogram (gid ``time-of-flight``) from arrival ``times`` [s], shape
    (N,); ``inf`` (never arrives) is left out. ``bins``: a count or increasing edges [s]
    (:func:`tiltwell.coils.schedule.arrival_histogram`)."""
    counts, edges = arrival_histogram(times, bins)
    figure, ax = canvas(ax)
    ax.stairs(counts, edges * 1e3, color=PALETTE["blue"], fill=True, alpha=0.35, gid="time-of-flight-fill")
    ax.stairs(counts, edges * 1e3, color=PALETTE["blue"], lw=1.0, label=f"{int(counts.sum())} particles arrive",
              gid="time-of-flight")
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("time after release [ms]")
    ax.set_ylabel("particles per bin")
    ax.set_title("time of flight to the detector")
    add_legend(ax, loc="upper right")
    return figure


@styled
def survival(result: TrackingResult, *, ax: Axes | None = None) -> Figure:
    """Fraction of tracked particles still trapped (gid ``survival``) against time [ms]."""
    if not isinstance(result, TrackingResult):
        raise TiltwellError(f"result must be a TrackingResult; got {type(result).__name__}")
    figure, ax = canvas(ax)
    ax.plot(result.times * 1e3, result.survival, color=PALETTE["blue"],
            label=f"kept {result.fraction:.3g} ± {result.binomial_error:.2g} of {result.kept.size}", gid="survival")
    ax.set_ylim(0.0, 1.02)
    ax.set_xlabel("time since switch-on [ms]")
    ax.set_ylabel("fraction still trapped")
    ax.set_title(f"survival in the decelerating trap ({result.method})")
    add_legend(ax, loc="upper right")
    return figure


@styled
def detector_traces(traces: Traces, *, ax: Axes | None = None) -> Figure:
    """Predicted detector signal against time since the valve opened [ms]: the free beam
    (gid ``free-beam-trace``) and the decelerated packet (gid ``packet-trace``, when there is
    one), expected detected particles per bin (:class:`tiltwell.workflows.traces.Traces`)."""
    if not isinstance(traces, Traces):
        raise TiltwellError(f"traces must be a Traces (tiltwell.workflows.traces); got {type(traces).__name__}")
    figure, ax = canvas(ax)
    edges = traces.edges * 1e3
    ax.stairs(traces.free, edges, color=PALETTE["blue"], lw=1.0, gid="free-beam-trace",
              label=f"free beam: {traces.free_detected:.3g} detected")
    if traces.packet is not None and traces.packet_detected is not None:
        ax.stairs(traces.packet, edges, color=PALETTE["rose"], lw=1.0, ls="--", gid="packet-trace",
                  label=f"decelerated packet: {traces.packet_detected:.3g} detected")
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("time since the valve opened [ms]")
    ax.set_ylabel("detected per bin " + ("[particles per shot]" if traces.absolute else "[relative]"))
    ax.set_title("predicted time of flight to the detector")
    add_legend(ax, loc="upper right")
    return figure
