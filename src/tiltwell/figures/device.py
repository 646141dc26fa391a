"""Figures of the coil-array device: coil current pulses, the trap across one pitch, and the
device against its rigid twin (survival, final phase space, time of flight).

Re-exported by :mod:`tiltwell.figures`; the same conventions hold: each function takes
``ax=None`` and returns the :class:`~matplotlib.figure.Figure`, draws in display units (mm,
m/s, mK, mm·m/s, ms) and gives every data artist a ``gid``. The rigid twin is drawn in teal
with dashed lines and open markers, the coil array in blue with solid lines and filled
markers, so the two differ in more than colour.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from numpy.typing import ArrayLike

from .style import PALETTE, add_legend, canvas, styled
from .._base.validation import TiltwellError, as_finite_array, as_integer, as_scalar
from ..coils.array import CurrentPlan
from ..physics.constants import millikelvin
from ..dynamics.compare import DeviceComparison
from ..physics.hardware import ELECTRICAL_CAUTION
from ..coils.moving import PhaseScan
from ..coils.schedule import arrival_histogram

__all__ = ["current_pulses", "device_arrivals", "device_phase_space", "device_survival", "phase_scan"]

#: Coils drawn by :func:`current_pulses` when none are named.
DEFAULT_COILS = 6
_SERIES = (("blue", "-"), ("rose", "--"), ("teal", "-."), ("amber", ":"), ("slate", "-"), ("ink", "--"))
_RIGID: dict[str, Any] = {"color": PALETTE["teal"], "ls": "--"}
_DEVICE: dict[str, Any] = {"color": PALETTE["blue"], "ls": "-"}


def _caution(ax: Axes, drawn: bool) -> None:
    """The electrical caution (gid ``electrical-caution``): in small type under the x label,
    wrapped at draw time to the figure's width, when ``drawn``; otherwise carried invisibly,
    so that :func:`tiltwell.figures.save` writes it into the file's metadata either way."""
    note = ax.annotate(ELECTRICAL_CAUTION, xy=(0.0, 0.0), xycoords=("axes fraction", ax.xaxis.label),
                       xytext=(0.0, -4.0), textcoords="offset points", ha="left", va="top", fontsize=6.0,
                       color=PALETTE["ink"], wrap=True, gid="electrical-caution")
    note.set_visible(drawn)


def _window(plan: CurrentPlan, coils: Sequence[int] | None) -> list[int]:
    """The coils to draw: those named, or :data:`DEFAULT_COILS` around the middle of the
    coils that ever carry current."""
    count = plan.currents.shape[1]
    if coils is not None:
        if isinstance(coils, (str, bytes)) or not isinstance(coils, Sequence) or not coils:
            raise TiltwellError(f"coils must be a non-empty list of coil indices in [0, {count - 1}]; got {coils!r}")
        return [as_integer(k, "coils", 0, count - 1) for k in coils]
    used = np.flatnonzero(np.any(plan.currents != 0.0, axis=0))
    if used.size == 0:
        raise TiltwellError("plan must have at least one coil carrying current; got all zeros")
    start = max(0, min(used.size // 2 - DEFAULT_COILS // 2, used.size - DEFAULT_COILS))
    return [int(k) for k in used[start:start + DEFAULT_COILS]]


@styled
def current_pulses(plan: CurrentPlan, times: ArrayLike, *, coils: Sequence[int] | None = None,
                   draw_caution: bool = False, run_duration: float | None = None, ax: Axes | None = None) -> Figure:
    """Current per turn of a window of coils against time, with the electrical caution.

    Parameters
    ----------
    plan : CurrentPlan
        From :func:`tiltwell.waveforms` (one row per time).
    times : array_like, shape (M,)
        Time [s] of each row of ``plan``.
    coils : sequence of int, optional
        Coil indices to draw (gids ``coil-<k>``); default :data:`DEFAULT_COILS` neighbours
        around the middle of the coils that ever carry current.
    run_duration : float, optional
        The whole run [s], when ``times`` is a stretch of it: the title names the stretch
        shown and the run ("the first 0.09 ms of the 7.39 ms run").
    ax : matplotlib Axes, optional

    Notes
    -----
    The figure sizes coil currents, so it carries the caution
    (:data:`tiltwell.physics.hardware.ELECTRICAL_CAUTION`, gid ``electrical-caution``):
    :func:`tiltwell.figures.save` writes it into the file's metadata, and the command line
    prints it; ``draw_caution=True`` also prints it under the axes.
    """
    if not isinstance(plan, CurrentPlan):
        raise TiltwellError(f"plan must be a CurrentPlan; got {type(plan).__name__}")
    t = as_finite_array(times, "times", "s", ndim=1)
    if t.shape != plan.positions.shape:
        raise TiltwellError(f"times [s] must have shape {plan.positions.shape} (one per plan row); got shape {t.shape}")
    chosen = _window(plan, coils)
    figure, ax = canvas(ax)
    for n, k in enumerate(chosen):
        colour, style = _SERIES[n % len(_SERIES)]
        ax.plot(t * 1e3, plan.currents[:, k], color=PALETTE[colour], ls=style, label=f"coil {k}", gid=f"coil-{k}")
    ax.axhline(0.0, color=PALETTE["slate"], lw=0.5, zorder=0)
    ax.set_xlabel("time since switch-on [ms]")
    ax.set_ylabel("current per turn [A]")
    title = f"coil currents, coils {chosen[0]} to {chosen[-1]}" if len(chosen) > 1 else f"coil {chosen[0]} current"
    if run_duration is not None and math.isfinite(run_duration) and t[-1] < run_duration * (1 - 1e-9):
        span = "the first" if t[0] <= 0.0 else f"{t[0] * 1e3:.3g} ms to"
        title += f": {span} {t[-1] * 1e3:.3g} ms of the {run_duration * 1e3:.3g} ms run"
    ax.set_title(title)
    add_legend(ax, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    _caution(ax, bool(draw_caution))
    return figure


@styled
def phase_scan(scan: PhaseScan, *, ax: Axes | None = None) -> Figure:
    """Depth [mK] (left axis) and acceptances [mm·m/s] (right axis) against phase / pitch.

    Gids: ``depth``, ``acceptance-longitudinal``, ``acceptance-transverse``, their phase
    averages ``mean-depth``, ``mean-longitudinal``, ``mean-transverse`` (thin lines, one
    legend entry, so the legend fits small figures), and the phase of the smallest
    longitudinal acceptance ``worst-phase``. The phases of a scan are
    k pitch / P, so the pitch is P times the second phase (a single phase is drawn at 0).
    """
    if not isinstance(scan, PhaseScan):
        raise TiltwellError(f"scan must be a PhaseScan; got {type(scan).__name__}")
    count = scan.phases.size
    x = np.arange(count) / count if count > 1 else np.zeros(1)
    figure, ax = canvas(ax)
    right = ax.twinx()
    depth = millikelvin(scan.depth)
    ax.plot(x, depth, color=PALETTE["ink"], marker="o", ms=3.5, label="depth", gid="depth")
    ax.axhline(float(np.mean(depth)), color=PALETTE["ink"], lw=0.7, ls=(0, (1, 2)),
               label="phase averages (thin lines)", gid="mean-depth")
    for values, mean, colour, style, marker, name, label in (
        (scan.longitudinal, scan.mean_longitudinal, "blue", "-", "s", "longitudinal", "longitudinal (z, $v_z$)"),
        (scan.transverse, scan.mean_transverse, "rose", "--", "D", "transverse", "transverse (x, $v_x$)"),
    ):
        right.plot(x, values * 1e3, color=PALETTE[colour], ls=style, marker=marker, ms=3.5, label=label,
                   gid=f"acceptance-{name}")
        right.axhline(mean * 1e3, color=PALETTE[colour], lw=0.7, ls=(0, (4, 2)), label="_nolegend_", gid=f"mean-{name}")
    worst = scan.worst
    ax.axvline(float(x[worst]), color=PALETTE["amber"], lw=1.0, ls=":", label=f"worst phase {x[worst]:.3g}",
               gid="worst-phase")
    ax.set_ylim(bottom=0.0)
    right.set_ylim(bottom=0.0)
    ax.set_xlabel("phase of the zero / pitch")
    ax.set_ylabel("depth / $k_B$ [mK]")
    right.set_ylabel("acceptance [mm·m/s]")
    ax.set_title(f"the trap across one pitch (depth ripple {scan.ripple:.3g})")
    handles, labels = ax.get_legend_handles_labels()
    more, more_labels = right.get_legend_handles_labels()
    legend = ax.legend(handles + more, labels + more_labels, loc="lower left", ncols=2, fontsize="small")
    legend.set_in_layout(False)  # inside the axes: it must not shrink them (small figures collapse otherwise)
    return figure


def _check(comparison: DeviceComparison) -> None:
    if not isinstance(comparison, DeviceComparison):
        raise TiltwellError(f"comparison must be a DeviceComparison; got {type(comparison).__name__}")


@styled
def device_survival(comparison: DeviceComparison, *, ax: Axes | None = None) -> Figure:
    """Fraction still trapped against time [ms] in the rigid twin (gid ``survival-rigid``)
    and the coil array (gid ``survival-device``); the title gives the ripple loss with its
    paired standard error."""
    _check(comparison)
    figure, ax = canvas(ax)
    for result, name, label, style in ((comparison.rigid, "rigid", "rigid twin (phase-averaged)", _RIGID),
                                       (comparison.device, "device", "coil array", _DEVICE)):
        ax.plot(result.times * 1e3, result.survival, **style,
                label=f"{label}, kept {result.fraction:.3g} ± {result.binomial_error:.2g}", gid=f"survival-{name}")
    ax.set_ylim(0.0, 1.02)
    ax.set_xlabel("time since switch-on [ms]")
    ax.set_ylabel("fraction still trapped")
    ax.set_title(f"survival: ripple loss {comparison.ripple_loss:.3g} ± {comparison.ripple_loss_error:.2g} "
                 f"(paired, {comparison.rigid.kept.size} particles)")
    add_legend(ax, loc="upper right")
    return figure


@styled
def device_phase_space(comparison: DeviceComparison, *, ax: Axes | None = None) -> Figure:
    """Final (z [mm], v_z [m/s]) in the trap frame of the particles each run keeps (gids
    ``phase-space-rigid``, open circles, and ``phase-space-device``, dots)."""
    _check(comparison)
    figure, ax = canvas(ax)
    common: dict[str, Any] = {"linewidths": 0.6, "rasterized": True}
    rigid, device = comparison.rigid, comparison.device
    ax.scatter(rigid.final[rigid.kept, 2] * 1e3, rigid.final[rigid.kept, 5], s=9.0, facecolors="none",
               edgecolors=PALETTE["teal"], marker="o", label=f"rigid twin ({int(np.count_nonzero(rigid.kept))} kept)",
               gid="phase-space-rigid", zorder=1, **common)
    ax.scatter(device.final[device.kept, 2] * 1e3, device.final[device.kept, 5], s=2.5, color=PALETTE["blue"],
               marker="o", label=f"coil array ({int(np.count_nonzero(device.kept))} kept)", gid="phase-space-device",
               zorder=2, **common)
    ax.set_xlabel("z [mm]")
    ax.set_ylabel("$v_z$ [m/s]")
    ax.set_title(f"final phase space relative to the trap centre, t = {comparison.release_time * 1e3:.3g} ms")
    add_legend(ax, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    return figure


@styled
def device_arrivals(comparison: DeviceComparison, distance: float, *, bins: int | ArrayLike = 50,
                    ax: Axes | None = None) -> Figure:
    """Time-of-flight histograms, from switch-on, of both runs' kept particles at a detector
    ``distance`` [m] beyond the trap centre at release (:meth:`DeviceComparison.arrival_times`).

    ``bins``: a count of equal bins, or increasing edges [s]; both histograms share the
    edges (gids ``time-of-flight-rigid``, ``time-of-flight-device``). A count spans the
    finite times of both runs up to the median + 5 interquartile ranges: particles nearly
    at rest in the lab arrive much later, and those beyond the last edge are counted in
    the legend as off scale.
    """
    _check(comparison)
    plane = as_scalar(distance, "distance", "m", low=0.0, low_open=True)
    rigid, device = comparison.arrival_times(plane)
    if isinstance(bins, (int, np.integer)) and not isinstance(bins, bool):
        if bins < 1:
            raise TiltwellError(f"bins must be an integer >= 1 or increasing edges [s]; got {bins!r}")
        both = np.concatenate((rigid, device))
        arrived = both[np.isfinite(both)]
        if arrived.size:
            first = float(arrived.min())
            low, median, high = np.quantile(arrived, [0.25, 0.5, 0.75])
            top = min(float(arrived.max()), median + 5.0 * (high - low))
            edges = np.linspace(first, top if top > first else first + 1e-6, int(bins) + 1)  # one time: a 1 µs bin
        else:
            edges = np.linspace(0.0, 1.0, int(bins) + 1)
    else:
        edges = np.asarray(bins, dtype=np.float64)
    figure, ax = canvas(ax)
    for times, name, label, style in ((rigid, "rigid", "rigid twin", _RIGID), (device, "device", "coil array", _DEVICE)):
        counts, shared = arrival_histogram(times, edges)
        late = int(np.count_nonzero(np.isfinite(times) & (times > shared[-1])))
        ax.stairs(counts, shared * 1e3, lw=1.1, **style,
                  label=f"{label}, {int(counts.sum())} arrive" + (f" ({late} later, off scale)" if late else ""),
                  gid=f"time-of-flight-{name}")
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("time since switch-on [ms]")
    ax.set_ylabel("particles per bin")
    ax.set_title(f"time of flight to a detector {plane * 1e3:.4g} mm beyond the release point")
    add_legend(ax, loc="upper right")
    return figure
