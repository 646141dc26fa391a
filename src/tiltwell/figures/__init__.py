"""Static figures for proposals: matplotlib renderings of tiltwell's result objects.

A view layer: every function draws what the computation modules return (separatrices,
beam planes, acceptance curves, sweep rows, tracking results) and computes nothing of its
own beyond the drawing. Each figure function takes ``ax=None`` (then it makes a new
:class:`matplotlib.figure.Figure`, without pyplot state) and returns the figure.

Display units: positions in mm, velocities in m/s, energies in mK (E / k_B), phase-space
areas in mm·m/s, decelerations in 10³ m/s², times in ms. Every drawn data artist carries
a ``gid`` (e.g. ``"separatrix"``, ``"beam-1sigma"``, ``"escape-energy"``), so scripts and
tests can find it, and SVG exports name it.

The look is tiltwell's own: 9-pt DejaVu Sans, thin lines, and the six colours of
:data:`PALETTE`, whose lightness steps keep paired series apart in greyscale print and for
the common colour-vision deficiencies; series that share an axis also differ in line
style or marker, so no figure relies on colour alone.
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from numpy.typing import ArrayLike

from ..wells import acceptance as _acceptance
from .style import (
    _C,
    PALETTE,
    FloatArray,
    _canvas,
    _formats,
    _kilo,
    _legend,
    _mark_current,
    _number,
    _styled,
    save,
)
from .device import current_pulses, device_arrivals, device_phase_space, device_survival, phase_scan
from .._base.validation import TiltwellError, as_finite_array, as_scalar
from ..wells.acceptance import AcceptanceCurve, longitudinal_acceptance
from ..physics.beam import PhasePlane
from ..coils.array import CurrentPlan
from ..workflows.coilreport import CoilRun, coil_run, coil_scan
from ..physics.constants import millikelvin
from ..workflows.report import build, estimate
from ..workflows.scenario import Scenario
from ..coils.schedule import arrival_histogram
from ..coils.moving import PhaseScan
from ..wells.separatrix import Separatrix
from ..workflows.sweep import sweep
from ..dynamics.tracking import TrackingResult
from ..wells.traps import Trap

__all__ = ["PALETTE", "acceptance_curve", "arrival_times", "phase_plane", "potential", "save", "scenario_figures",
           "survival", "tradeoff",
           "coil_figures", "current_pulses", "device_arrivals", "device_phase_space", "device_survival", "phase_scan"]

#: Particles drawn in a scenario's phase planes (the first ones of the random sample).
DRAWN_PARTICLES = 3000
#: Trade-off sweep of scenario_figures, in units of the critical deceleration.
SWEEP_FRACTIONS = (0.2, 0.35, 0.5, 0.65, 0.8, 0.95)


@_styled
def potential(trap: Trap, deceleration: float, *, ax: Axes | None = None) -> Figure:
    """Potential on the trap axis, in the lab frame and the decelerating frame.

    Draws ``U`` (``a = 0``, gid ``potential-lab``) and ``U_eff = U - m a z`` (gid
    ``potential-decelerating``) from :meth:`Trap.axis_cut` in mK against z in mm, the
    escape energy of :func:`tiltwell.longitudinal_acceptance` (gid ``escape-energy``) and
    the back and front barriers, the highest ``U_eff`` on each side of the bottom
    (gids ``barrier-back``, ``barrier-front``).

    ``deceleration`` in m/s^2; ``ax`` an optional matplotlib Axes to draw into.
    """
    a = as_scalar(deceleration, "deceleration", "m/s^2")
    figure, ax = _canvas(ax)
    z, lab = trap.axis_cut(0.0)
    _, tilted = trap.axis_cut(a)
    well = longitudinal_acceptance(trap, a)
    ax.plot(z * 1e3, millikelvin(lab), color=_C["slate"], ls="--", label="lab frame, a = 0", gid="potential-lab")
    ax.plot(z * 1e3, millikelvin(tilted), color=_C["blue"], label=f"decelerating frame, a = {_number(a)} m/s²",
            gid="potential-decelerating")
    if well.bound:
        escape = millikelvin(well.escape_energy)
        ax.axhline(escape, color=_C["rose"], ls=":", lw=0.9, label=f"escape energy {escape:.4g} mK",
                   gid="escape-energy")
        # on each side, the highest sample nearest the bottom (walking outwards from it)
        for side, outwards in (("back", np.flatnonzero(z < well.z_bottom)[::-1]),
                               ("front", np.flatnonzero(z > well.z_bottom))):
            top = int(outwards[np.argmax(tilted[outwards])])
            height = millikelvin(tilted[top])
            ax.plot([z[top] * 1e3], [height], ls="none", marker="o", mfc="none", mec=_C["amber"], mew=1.0, ms=5,
                    label=None, gid=f"barrier-{side}")
            ax.annotate(f"{side} barrier {height:.4g} mK", (z[top] * 1e3, height), xytext=(0, 7),
                        textcoords="offset points", ha="left" if side == "back" else "center", va="bottom",
                        fontsize=7, color=_C["ink"])
    else:
        ax.text(0.5, 0.92, "no well: the tilt exceeds the critical deceleration", transform=ax.transAxes,
                ha="center", color=_C["rose"], gid="no-well")
    ax.set_xlabel("z [mm]")
    ax.set_ylabel("potential energy / $k_B$ [mK]")
    ax.set_title(f"{trap.species.name} on the trap axis")
    ax.margins(y=0.1)
    _legend(ax, loc="lower left")
    return figure


def _ellipse(covariance: FloatArray, scale: float, points: int = 361) -> FloatArray:
    """Vertices, shape (2, points), of ``q^T C^-1 q = scale^2`` (closed: last = first), from
    the eigen-decomposition ``C = V diag(w) V^T``: ``q = V sqrt(w) scale (cos t, sin t)``."""
    eigenvalues, eigenvectors = np.linalg.eigh(covariance)
    angle = np.linspace(0.0, 2.0 * np.pi, points)
    circle = np.vstack([np.cos(angle), np.sin(angle)])
    return np.asarray(eigenvectors @ (scale * np.sqrt(eigenvalues)[:, None] * circle))


_PLANES = {"longitudinal": "z", "transverse": "x"}


@_styled
def phase_plane(separatrix: Separatrix, *, plane: PhasePlane | None = None,
                particles: tuple[ArrayLike, ArrayLike] | None = None, kept: ArrayLike | None = None,
                axis: str = "longitudinal", mean: tuple[float, float] = (0.0, 0.0), ax: Axes | None = None) -> Figure:
    """A phase plane: the separatrix, the beam's sigma ellipses, sampled particles.

    Parameters
    ----------
    separatrix : Separatrix
        Drawn from :meth:`Separatrix.boundary` (gid ``separatrix``); a note when unbound.
    plane : PhasePlane, optional
        The beam in this plane; its 1- and 2-sigma ellipses ``q^T C^-1 q = k^2`` (gids
        ``beam-1sigma``, ``beam-2sigma``), centred on ``mean``.
    particles : (positions, velocities), optional
        Two arrays of shape (N,) [m, m/s] relative to the trap centre.
    kept : array_like of bool, shape (N,), optional
        Kept/lost flags: kept particles (gid ``particles-kept``) and lost ones
        (``particles-lost``) are drawn apart; without flags, gid ``particles``.
    axis : {"longitudinal", "transverse"}
        Labels the plane (z, v_z) or (x, v_x).
    mean : (float, float)
        Beam centre (position [m], velocity [m/s]) relative to the trap centre.
    ax : matplotlib Axes, optional
    """
    if axis not in _PLANES:
        raise TiltwellError(f"axis must be 'longitudinal' or 'transverse'; got {axis!r}")
    if not isinstance(separatrix, Separatrix):
        raise TiltwellError(f"separatrix must be a Separatrix; got {type(separatrix).__name__}")
    centre = as_finite_array(mean, "mean", "m, m/s", ndim=1)
    if centre.shape != (2,):
        raise TiltwellError(f"mean [m, m/s] must be (position, velocity); got shape {centre.shape}")
    figure, ax = _canvas(ax)
    q = _PLANES[axis]
    if particles is not None:
        _scatter(ax, particles, kept)
    if separatrix.bound:
        zs, vs = separatrix.boundary()
        ax.plot(zs * 1e3, vs, color=_C["ink"], lw=1.2, label=f"separatrix, {separatrix.area * 1e3:.3g} mm·m/s",
                gid="separatrix")
    else:
        ax.text(0.5, 0.92, "no bound well", transform=ax.transAxes, ha="center", color=_C["rose"], gid="no-well")
    if plane is not None:
        if not isinstance(plane, PhasePlane):
            raise TiltwellError(f"plane must be a PhasePlane; got {type(plane).__name__}")
        display = np.diag([1e3, 1.0])  # (m, m/s) -> (mm, m/s)
        covariance = display @ plane.covariance @ display
        for k, style in ((1, "-"), (2, "--")):
            x, v = _ellipse(covariance, float(k))
            ax.plot(x + centre[0] * 1e3, v + centre[1], color=_C["teal"], ls=style, lw=1.1,
                    label=f"beam, {k}σ", gid=f"beam-{k}sigma")
    ax.set_xlabel(f"{q} [mm]")
    ax.set_ylabel(f"$v_{q}$ [m/s]")
    ax.set_title(f"{axis} phase space, relative to the trap centre")
    _legend(ax, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)  # outside: the cloud fills the axes
    return figure


def _scatter(ax: Axes, particles: tuple[ArrayLike, ArrayLike], kept: ArrayLike | None) -> None:
    try:
        raw_q, raw_v = particles
    except (TypeError, ValueError):
        raise TiltwellError("particles must be a pair (positions [m], velocities [m/s]) of 1-D arrays") from None
    q = as_finite_array(raw_q, "particles positions", "m", ndim=1)
    v = as_finite_array(raw_v, "particles velocities", "m/s", ndim=1)
    if q.shape != v.shape:
        raise TiltwellError(f"particles positions and velocities must have one length; got {q.size} and {v.size}")
    common: dict[str, Any] = {"s": 2.0, "linewidths": 0.0, "rasterized": True, "zorder": 1}
    if kept is None:
        ax.scatter(q * 1e3, v, color=_C["slate"], label=f"particles ({q.size})", gid="particles", **common)
        return
    flags = np.asarray(kept)
    if flags.dtype != np.bool_ or flags.shape != q.shape:
        raise TiltwellError(f"kept must be a bool array of shape {q.shape}; got {flags.dtype} of shape {flags.shape}")
    ax.scatter(q[~flags] * 1e3, v[~flags], color=_C["amber"], marker="o",
               label=f"lost ({int(np.count_nonzero(~flags))})", gid="particles-lost", **common)
    ax.scatter(q[flags] * 1e3, v[flags], color=_C["blue"], marker="o",
               label=f"kept ({int(np.count_nonzero(flags))})", gid="particles-kept", **common)


_FRACTIONS = (
    ("captured_fraction_overlap", "phase-space overlap", "blue", "-", "o"),
    ("captured_fraction_energy", "energetic 6-D", "rose", "--", "s"),
    ("captured_fraction_mc", "trajectories", "teal", "-.", "D"),
)


@_styled
def tradeoff(rows: Sequence[Mapping[str, Any]], *, current: float | None = None, ax: Axes | None = None) -> Figure:
    """Captured fractions (left axis) and device length (right axis) against deceleration.

    Parameters
    ----------
    rows : sequence of dict
        Rows of :func:`tiltwell.sweep`: ``deceleration`` [m/s^2], ``length`` [m] and any of
        ``captured_fraction_overlap``, ``captured_fraction_energy``, ``captured_fraction_mc``
        (with their ``_error`` columns drawn as bars); None or missing: not drawn. The
        lines have the column names as gids; the length line is ``length``.
    current : float, optional
        The chosen deceleration [m/s^2], marked (gid ``current-deceleration``).
    ax : matplotlib Axes, optional
    """
    if not isinstance(rows, Sequence) or isinstance(rows, str) or not rows or not all(
            isinstance(row, Mapping) and "deceleration" in row and "length" in row for row in rows):
        raise TiltwellError("rows must be a non-empty list of sweep rows with 'deceleration' [m/s^2] and 'length' [m]")

    order = np.argsort([float(row["deceleration"]) for row in rows], kind="stable")

    def column(key: str) -> FloatArray:
        """One column in order of deceleration; None or missing -> NaN."""
        values = [row.get(key) for row in rows]
        return np.array([np.nan if value is None else float(value) for value in values])[order]

    figure, ax = _canvas(ax)
    x = _kilo(column("deceleration"))
    right = ax.twinx()
    for key, label, colour, style, marker in _FRACTIONS:
        y = column(key)
        if np.all(np.isnan(y)):
            continue
        ax.plot(x, y, color=_C[colour], ls=style, marker=marker, ms=3.5, label=label, gid=key)
        error = column(f"{key}_error")
        if not np.all(np.isnan(error)):
            ax.errorbar(x, y, yerr=error, fmt="none", ecolor=_C[colour], elinewidth=0.6, capsize=0)
    right.plot(x, column("length"), color=_C["slate"], ls=":", marker="^", ms=3.5, label="device length",
               gid="length")
    _mark_current(ax, current)
    ax.set_ylim(bottom=0.0)
    right.set_ylim(bottom=0.0)
    ax.set_xlabel("deceleration [10³ m/s²]")
    ax.set_ylabel("captured fraction")
    right.set_ylabel("device length [m]")
    ax.set_title("captured fraction and length against deceleration")
    handles, labels = ax.get_legend_handles_labels()
    more, more_labels = right.get_legend_handles_labels()
    ax.legend(handles + more, labels + more_labels, loc="upper right")
    return figure


@_styled
def acceptance_curve(curve: AcceptanceCurve, *, current: float | None = None, ax: Axes | None = None) -> Figure:
    """Longitudinal and transverse acceptance [mm·m/s] against deceleration [10³ m/s²].

    Gids ``acceptance-longitudinal``, ``acceptance-transverse``, ``critical-deceleration``
    and, when ``current`` [m/s^2] is given, ``current-deceleration``.
    """
    if not isinstance(curve, AcceptanceCurve):
        raise TiltwellError(f"curve must be an AcceptanceCurve; got {type(curve).__name__}")
    figure, ax = _canvas(ax)
    x = _kilo(curve.decelerations)
    ax.plot(x, curve.longitudinal * 1e3, color=_C["blue"], label="longitudinal (z, $v_z$)",
            gid="acceptance-longitudinal")
    ax.plot(x, curve.transverse * 1e3, color=_C["rose"], ls="--", label="transverse (x, $v_x$)",
            gid="acceptance-transverse")
    critical = curve.critical_deceleration
    ax.axvline(float(_kilo(critical)), color=_C["amber"], lw=1.0, ls=":",
               label=f"critical, {_number(critical)} m/s²", gid="critical-deceleration")
    _mark_current(ax, current)
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("deceleration [10³ m/s²]")
    ax.set_ylabel("acceptance [mm·m/s]")
    ax.set_title("acceptance against deceleration")
    _legend(ax, loc="upper right")
    return figure


@_styled
def arrival_times(times: ArrayLike, *, bins: int | ArrayLike = 50, ax: Axes | None = None) -> Figure:
    """Time-of-flight histogram (gid ``time-of-flight``) from arrival ``times`` [s], shape
    (N,); ``inf`` (never arrives) is left out. ``bins``: a count or increasing edges [s]
    (:func:`tiltwell.coils.schedule.arrival_histogram`)."""
    counts, edges = arrival_histogram(times, bins)
    figure, ax = _canvas(ax)
    ax.stairs(counts, edges * 1e3, color=_C["blue"], fill=True, alpha=0.35, gid="time-of-flight-fill")
    ax.stairs(counts, edges * 1e3, color=_C["blue"], lw=1.0, label=f"{int(counts.sum())} particles arrive",
              gid="time-of-flight")
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("time after release [ms]")
    ax.set_ylabel("particles per bin")
    ax.set_title("time of flight to the detector")
    _legend(ax, loc="upper right")
    return figure


@_styled
def survival(result: TrackingResult, *, ax: Axes | None = None) -> Figure:
    """Fraction of tracked particles still trapped (gid ``survival``) against time [ms]."""
    if not isinstance(result, TrackingResult):
        raise TiltwellError(f"result must be a TrackingResult; got {type(result).__name__}")
    figure, ax = _canvas(ax)
    ax.plot(result.times * 1e3, result.survival, color=_C["blue"],
            label=f"kept {result.fraction:.3g} ± {result.binomial_error:.2g} of {result.kept.size}", gid="survival")
    ax.set_ylim(0.0, 1.02)
    ax.set_xlabel("time since switch-on [ms]")
    ax.set_ylabel("fraction still trapped")
    ax.set_title(f"survival in the decelerating trap ({result.method})")
    _legend(ax, loc="upper right")
    return figure


def scenario_figures(scenario: Scenario, out: str | os.PathLike[str], *, formats: Sequence[str] = ("pdf", "svg", "png"),
                     width: float = 6.0, height: float = 4.0, dpi: float = 300,
                     particles: int | None = None) -> list[Path]:
    """Every figure of a scenario, written to the folder ``out`` (created if missing).

    Computes through :func:`tiltwell.workflows.report.build` and :func:`tiltwell.workflows.report.estimate`
    as :func:`tiltwell.workflows.report.summarise` does,
    then writes ``potential``, ``phase-longitudinal`` and ``phase-transverse`` (beam
    ellipses and the first :data:`DRAWN_PARTICLES` sampled particles, kept/lost after
    tracking), ``acceptance`` (0 to 1.1 x the critical deceleration), ``tradeoff`` (a
    sweep at :data:`SWEEP_FRACTIONS` of the critical deceleration, trajectories off),
    ``survival`` (when the scenario tracks) and ``time-of-flight`` (when it also sets
    ``detector_distance``), and with a ``[coils]`` section ``coil-currents`` (a window of
    coils while the trap crosses its first three pitches, where it is fastest) and
    ``coil-phases`` (depth and acceptances across one pitch), each in every one of
    ``formats``.

    ``particles`` replaces the scenario's ``[simulation] particles``; ``formats``,
    ``width``, ``height`` [in] and ``dpi`` are as for :func:`save`. Returns the written
    paths, figure by figure.
    """
    if not isinstance(scenario, Scenario):
        raise TiltwellError(f"scenario must be a Scenario (tiltwell.workflows.scenario.load); got {type(scenario).__name__}")
    kinds = _formats(formats)
    for value, name in ((width, "width"), (height, "height")):
        as_scalar(value, name, "in", low=0.0, high=100.0, low_open=True)
    as_scalar(dpi, "dpi", "1/in", low=0.0, high=2400.0, low_open=True)
    if particles is not None:
        scenario = scenario.replace("simulation", particles=particles)
    folder = Path(out)
    if folder.exists() and not folder.is_dir():
        raise TiltwellError(f"out must be a folder; got the file {str(out)!r}")
    folder.mkdir(parents=True, exist_ok=True)

    return [save(figure, folder / f"{name}.{kind}", width=width, height=height, dpi=dpi)
            for name, figure in _scenario_drawings(scenario).items() for kind in kinds]


def _scenario_drawings(scenario: Scenario) -> dict[str, Figure]:
    built = build(scenario)
    sim = scenario.simulation
    plan = built.schedule
    a = plan.deceleration
    estimates = estimate(scenario, built)
    tracking = estimates.tracking
    # the sample capture_estimates drew (same seed), relative to the trap; the first ones drawn
    sample = built.beam.sample(sim.particles, seed=sim.seed)[:DRAWN_PARTICLES]
    sample[:, 5] -= built.mismatch
    kept = None if tracking is None else tracking.kept[:DRAWN_PARTICLES]
    figures = {"potential": potential(built.trap, a)}
    figures["phase-longitudinal"] = phase_plane(
        estimates.acceptance.longitudinal, plane=built.beam.longitudinal, particles=(sample[:, 2], sample[:, 5]),
        kept=kept, axis="longitudinal", mean=(0.0, -built.mismatch),
    )
    figures["phase-transverse"] = phase_plane(
        estimates.acceptance.transverse, plane=built.beam.horizontal, particles=(sample[:, 0], sample[:, 3]),
        kept=kept, axis="transverse",
    )
    critical = built.trap.critical_deceleration(sim.samples)
    if critical > 0.0:
        curve = _acceptance.acceptance_curve(built.trap, np.linspace(0.0, 1.1 * critical, 45), samples=sim.samples)
        figures["acceptance"] = acceptance_curve(curve, current=a)
        rows = sweep(scenario.replace("simulation", track=False), np.array(SWEEP_FRACTIONS) * critical)
        figures["tradeoff"] = tradeoff(rows, current=a)
    if scenario.coils is not None:
        run = coil_run(scenario, plan)
        figures.update(coil_figures(run, coil_scan(scenario, run)))
    if tracking is not None:
        figures["survival"] = survival(tracking)
        if sim.detector_distance is not None:
            figures["time-of-flight"] = arrival_times(
                estimates.arrival_times(plan.final_velocity, sim.detector_distance)
            )
    return figures


def coil_figures(run: CoilRun, scan: PhaseScan) -> dict[str, Figure]:
    """The coil row's figures by name: ``coil-currents`` (:func:`current_pulses` for the
    coils that carry current while the trap crosses its first three pitches, where it is
    fastest) and ``coil-phases`` (:func:`phase_scan`), from a
    :func:`tiltwell.workflows.coilreport.coil_run` and its :func:`~tiltwell.workflows.coilreport.coil_scan`."""
    plan = run.plan
    rows = slice(0, max(int(np.count_nonzero(plan.positions <= 3.0 * run.array.pitch)), 2))
    early = CurrentPlan(plan.positions[rows], plan.currents[rows], plan.gradient[rows], plan.limited[rows])
    return {"coil-currents": current_pulses(early, run.times[rows]), "coil-phases": phase_scan(scan)}
