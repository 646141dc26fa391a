"""Figures of one trap at one deceleration: the potential on its axis and a phase plane
with the separatrix, the beam's sigma ellipses and sampled particles.

Re-exported by :mod:`tiltwell.figures` (see there for units, gids and the look).
"""

from __future__ import annotations

from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from numpy.typing import ArrayLike

from .._base.validation import TiltwellError, as_finite_array, as_scalar
from ..physics.beam import PhasePlane
from ..physics.constants import millikelvin
from ..wells.acceptance import longitudinal_acceptance
from ..wells.separatrix import Separatrix
from ..wells.traps import Trap
from .style import PALETTE, FloatArray, add_legend, canvas, display_number, styled

__all__ = ["phase_plane", "potential"]


@styled
def potential(trap: Trap, deceleration: float, *, ax: Axes | None = None) -> Figure:
    """Potential on the trap axis, in the lab frame and the decelerating frame.

    Draws ``U`` (``a = 0``, gid ``potential-lab``) and ``U_eff = U - m a z`` (gid
    ``potential-decelerating``) from :meth:`Trap.axis_cut` in mK against z in mm, the
    escape energy of :func:`tiltwell.longitudinal_acceptance` (gid ``escape-energy``) and
    the back and front barriers, the highest ``U_eff`` on each side of the bottom
    (gids ``barrier-back``, ``barrier-front``) where it is a maximum of the potential; where
    the potential still rises at the wall of the box, that point is marked as the box wall
    (gids ``box-wall-back``, ``box-wall-front``), not as a barrier.

    ``deceleration`` in m/s^2; ``ax`` an optional matplotlib Axes to draw into.
    """
    a = as_scalar(deceleration, "deceleration", "m/s^2")
    figure, ax = canvas(ax)
    z, lab = trap.axis_cut(0.0)
    _, tilted = trap.axis_cut(a)
    well = longitudinal_acceptance(trap, a)
    ax.plot(z * 1e3, millikelvin(lab), color=PALETTE["slate"], ls="--", label="lab frame, a = 0", gid="potential-lab")
    ax.plot(z * 1e3, millikelvin(tilted), color=PALETTE["blue"],
            label=f"decelerating frame, a = {display_number(a)} m/s²", gid="potential-decelerating")
    if well.bound:
        escape = millikelvin(well.escape_energy)
        ax.axhline(escape, color=PALETTE["rose"], ls=":", lw=0.9, label=f"escape energy {escape:.4g} mK",
                   gid="escape-energy")
        # on each side, the highest sample nearest the bottom (walking outwards from it); a
        # barrier only where that is a maximum of the potential, not the wall of the box
        for side, outwards in (("back", np.flatnonzero(z < well.z_bottom)[::-1]),
                               ("front", np.flatnonzero(z > well.z_bottom))):
            top = int(outwards[np.argmax(tilted[outwards])])
            height = millikelvin(tilted[top])
            at_wall = top == int(outwards[-1])
            gid, words = (f"box-wall-{side}", f"box wall {height:.4g} mK, still rising") if at_wall else (
                f"barrier-{side}", f"{side} barrier {height:.4g} mK")
            ax.plot([z[top] * 1e3], [height], ls="none", marker="s" if at_wall else "o", mfc="none",
                    mec=PALETTE["slate" if at_wall else "amber"], mew=1.0, ms=5, label=None, gid=gid)
            ax.annotate(words, (z[top] * 1e3, height), xytext=(0, 7), textcoords="offset points",
                        ha="left" if side == "back" else "center", va="bottom", fontsize=7, color=PALETTE["ink"])
    else:
        ax.text(0.5, 0.92, "no well: the tilt exceeds the critical deceleration", transform=ax.transAxes,
                ha="center", color=PALETTE["rose"], gid="no-well")
    ax.set_xlabel("z [mm]")
    ax.set_ylabel("potential energy / $k_B$ [mK]")
    ax.set_title(f"{trap.species.name} on the trap axis")
    ax.margins(y=0.1)
    add_legend(ax, loc="lower left")
    return figure


def _ellipse(covariance: FloatArray, scale: float, points: int = 361) -> FloatArray:
    """Vertices, shape (2, points), of ``q^T C^-1 q = scale^2`` (closed: last = first), from
    the eigen-decomposition ``C = V diag(w) V^T``: ``q = V sqrt(w) scale (cos t, sin t)``."""
    eigenvalues, eigenvectors = np.linalg.eigh(covariance)
    angle = np.linspace(0.0, 2.0 * np.pi, points)
    circle = np.vstack([np.cos(angle), np.sin(angle)])
    return np.asarray(eigenvectors @ (scale * np.sqrt(eigenvalues)[:, None] * circle))


_PLANES = {"longitudinal": "z", "transverse": "x"}


@styled
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
    figure, ax = canvas(ax)
    q = _PLANES[axis]
    if particles is not None:
        _scatter(ax, particles, kept)
    if separatrix.bound:
        zs, vs = separatrix.boundary()
        ax.plot(zs * 1e3, vs, color=PALETTE["ink"], lw=1.2, label=f"separatrix, {separatrix.area * 1e3:.3g} mm·m/s",
                gid="separatrix")
    else:
        ax.text(0.5, 0.92, "no bound well", transform=ax.transAxes, ha="center", color=PALETTE["rose"], gid="no-well")
    if plane is not None:
        if not isinstance(plane, PhasePlane):
            raise TiltwellError(f"plane must be a PhasePlane; got {type(plane).__name__}")
        display = np.diag([1e3, 1.0])  # (m, m/s) -> (mm, m/s)
        covariance = display @ plane.covariance @ display
        for k, style in ((1, "-"), (2, "--")):
            x, v = _ellipse(covariance, float(k))
            ax.plot(x + centre[0] * 1e3, v + centre[1], color=PALETTE["teal"], ls=style, lw=1.1,
                    label=f"beam, {k}σ", gid=f"beam-{k}sigma")
    ax.set_xlabel(f"{q} [mm]")
    ax.set_ylabel(f"$v_{q}$ [m/s]")
    ax.set_title(f"{axis} phase space, relative to the trap centre")
    add_legend(ax, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)  # outside: the cloud fills the axes
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
        ax.scatter(q * 1e3, v, color=PALETTE["slate"], label=f"particles ({q.size})", gid="particles", **common)
        return
    flags = np.asarray(kept)
    if flags.dtype != np.bool_ or flags.shape != q.shape:
        raise TiltwellError(f"kept must be a bool array of shape {q.shape}; got {flags.dtype} of shape {flags.shape}")
    ax.scatter(q[~flags] * 1e3, v[~flags], color=PALETTE["amber"], marker="o",
               label=f"lost ({int(np.count_nonzero(~flags))})", gid="particles-lost", **common)
    ax.scatter(q[flags] * 1e3, v[flags], color=PALETTE["blue"], marker="o",
               label=f"kept ({int(np.count_nonzero(flags))})", gid="particles-kept", **common)
