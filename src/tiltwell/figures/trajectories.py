"""Figures of tracked trajectories: survival in the decelerating trap, the time of
flight to a detector, and the predicted detector traces of the free beam and the packet.

Re-exported by :mod:`tiltwell.figures` (see there for units, gids and the look).
"""

from __future__ import annotations

from matplotlib.axes import Axes
from matplotlib.figure import Figure
import numpy as np
from numpy.typing import ArrayLike

from .._base.validation import TiltwellError
from ..coils.schedule import arrival_histogram
from ..dynamics.tracking import TrackingResult
from ..workflows.calibration import Calibration, Trace
from ..workflows.traces import Traces
from .export import DETAILS_GID
from .style import PALETTE, add_legend, canvas, styled

__all__ = ["calibration_fit", "detector_traces", "survival", "time_of_flight"]


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
    """Fraction of tracked particles still trapped (gid ``survival``) against time [ms].

    Where the count at switch-on is below 1 (the sampled beam is wider than the trap box,
    and the particles outside it are lost at once), a note says how much (gid
    ``outside-box``). The integrator and its step are in the file's metadata
    (:data:`~tiltwell.figures.export.DETAILS_GID`), not in the title."""
    if not isinstance(result, TrackingResult):
        raise TiltwellError(f"result must be a TrackingResult; got {type(result).__name__}")
    figure, ax = canvas(ax)
    ax.plot(result.times * 1e3, result.survival, color=PALETTE["blue"],
            label=f"kept {result.fraction:.3g} ± {result.binomial_error:.2g} of {result.kept.size}", gid="survival")
    start = float(result.survival[0]) if result.survival.size else 1.0
    if start < 1.0:
        note = ax.text(0.02, 0.04, f"{100 * (1 - start):.3g} % of the sample starts outside\nthe trap box and is "
                       "lost at switch-on", transform=ax.transAxes, fontsize=7, color=PALETTE["ink"],
                       gid="outside-box")
        note.set_in_layout(False)
    details = ax.text(0.0, 0.0, f"integrator: {result.method}, time step {result.time_step:.3g} s",
                      transform=ax.transAxes, gid=DETAILS_GID)
    details.set_visible(False)
    details.set_in_layout(False)
    ax.set_ylim(0.0, 1.02)
    ax.set_xlabel("time since switch-on [ms]")
    ax.set_ylabel("fraction still trapped")
    ax.set_title("survival in the decelerating trap")
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


@styled
def calibration_fit(calibration: Calibration, traces: list[Trace]) -> Figure:
    """Measured traces, the fit and its residuals against time [ms]: above, each trace's
    samples (gid ``data-k``) and the fitted signal (gid ``fit-k``); below, the residuals
    (gid ``residual-k``), normalised by the model's Poisson sigma for counts, in signal
    units for an analog trace (:class:`tiltwell.workflows.calibration.Calibration`)."""
    if not isinstance(calibration, Calibration):
        raise TiltwellError(f"calibration must be a Calibration; got {type(calibration).__name__}")
    if len(traces) != len(calibration.paths):
        raise TiltwellError(f"traces must be the {len(calibration.paths)} fitted trace(s); got {len(traces)}")
    figure = Figure(figsize=(6.0, 4.5), layout="constrained")
    top, bottom = figure.subplots(2, 1, sharex=True, height_ratios=(3, 1))
    colours = (PALETTE["blue"], PALETTE["teal"], PALETTE["rose"])
    for k, trace in enumerate(traces):
        model = calibration.fitted(trace, k)
        ms = trace.times * 1e3
        colour = colours[k % len(colours)]
        top.plot(ms, trace.signal, ".", ms=2.5, color=colour, gid=f"data-{k}", label=f"measured at {calibration.distances[k]:g} m")
        top.plot(ms, model, "-", lw=1.0, color=PALETTE["ink"], gid=f"fit-{k}", label="fit" if k == 0 else None)
        scale = np.sqrt(np.maximum(model, 1.0)) if calibration.counts else 1.0
        bottom.plot(ms, (trace.signal - model) / scale, ".", ms=2.0, color=colour, gid=f"residual-{k}")
    bottom.axhline(0.0, color=PALETTE["ink"], lw=0.6)
    top.set_ylabel("signal per sample")
    bottom.set_ylabel("residual / sigma" if calibration.counts else "residual")
    bottom.set_xlabel("time after the trigger [ms]")
    top.set_title(f"free-beam trace: {calibration.velocity:.4g} ± {calibration.velocity_error:.2g} m/s, "
                  f"spread {calibration.relative_spread:.3g}")
    add_legend(top, loc="upper right")
    return figure
