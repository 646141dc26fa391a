"""Figures of a design search: the trade-off front of a figure of merit against a cost, and
the figure of merit over two varied keys.

Re-exported by :mod:`tiltwell.figures` (see there for units, gids and the look). Both draw
a :class:`~tiltwell.workflows.search.SearchResult` and compute nothing beyond the front
(:func:`~tiltwell.workflows.optimise.front_of`).
"""

from __future__ import annotations

import numpy as np
from matplotlib.axes import Axes
from matplotlib.cm import ScalarMappable
from matplotlib.figure import Figure

from .._base.validation import TiltwellError
from ..physics.hardware import ELECTRICAL_CAUTION
from ..workflows.optimise import front_of
from ..workflows.search import COLUMN_UNITS, COLUMNS, SearchResult
from .export import CAUTION_GID
from .style import PALETTE, canvas, styled

__all__ = ["design_front", "design_map"]

#: Axis words of the columns a search figure draws most (others: the column name and unit).
_WORDS = {
    "slow_particles": "slow particles per shot",
    "captured_fraction_energy": "captured fraction (energetic 6-D)",
    "captured_fraction_overlap": "captured fraction (phase-space overlap)",
    "length": "device length [m]",
    "worst_voltage": "largest coil voltage [V]",
    "worst_temperature_rise": "largest temperature rise per shot [K]",
}


def _words(name: str) -> str:
    unit = COLUMN_UNITS.get(name, "")
    return _WORDS.get(name, f"{name} [{unit}]" if unit and unit != "1" else name)


def _hardware_caution(ax: Axes, names: tuple[str, ...]) -> None:
    """Carry the electrical caution in the file's metadata where a drawn quantity sizes hardware."""
    if any(name.startswith("worst_") for name in names):
        note = ax.text(0.0, 0.0, ELECTRICAL_CAUTION, transform=ax.transAxes, fontsize=6.0, gid=CAUTION_GID)
        note.set_visible(False)


@styled
def design_front(result: SearchResult, cost: str = "length", *, gain: str | None = None,
                 ax: Axes | None = None) -> Figure:
    """Every computed point of ``result`` as ``gain`` (default: slow particles per shot
    where the absolute yield exists, else the energetic captured fraction) against
    ``cost`` (``length``, ``worst_voltage``, any column), the feasible ones filled (gid
    ``feasible``), the others as crosses (gid ``beyond-limits``), and the front of the
    feasible ones as a line (gid ``front``), with the 68 % interval of the slow particles
    on it (gid ``front-interval``)."""
    if not isinstance(result, SearchResult):
        raise TiltwellError(f"result must be a SearchResult; got {type(result).__name__}")
    gain = result.figure_name() if gain is None else gain
    on = front_of(result, cost, gain)
    g, c, feasible = result.values(gain), result.values(cost), result.values("feasible") == 1.0
    figure, ax = canvas(ax)
    ax.plot(c[feasible], g[feasible], ls="none", marker="o", ms=3.0, color=PALETTE["blue"], alpha=0.6,
            label=f"within the limits ({int(np.sum(feasible))})", gid="feasible")
    beyond = ~feasible & np.isfinite(g) & np.isfinite(c)
    if np.any(beyond):
        ax.plot(c[beyond], g[beyond], ls="none", marker="x", ms=3.5, color=PALETTE["slate"],
                label=f"beyond a limit ({int(np.sum(beyond))})", gid="beyond-limits")
    if on.size:
        ax.plot(c[on], g[on], ls="-", marker="s", ms=4.0, color=PALETTE["rose"], drawstyle="steps-post",
                label="front (none within the limits is better at less cost)", gid="front")
        if gain == "slow_particles":
            low, high = result.values("slow_particles_low")[on], result.values("slow_particles_high")[on]
            ax.errorbar(c[on], g[on], yerr=[g[on] - low, high - g[on]], fmt="none", ecolor=PALETTE["rose"],
                        elinewidth=0.6, capsize=0, gid="front-interval")
    positive = g[np.isfinite(g) & (g > 0)]
    if positive.size and positive.max() > 100 * positive.min():
        ax.set_yscale("log")
    ax.set_xlabel(_words(cost))
    ax.set_ylabel(_words(gain))
    ax.set_title(f"{_words(gain).split(' [')[0]} against {_words(cost).split(' [')[0]}")
    ax.legend(loc="best")
    _hardware_caution(ax, (cost, gain))
    return figure


@styled
def design_map(result: SearchResult, x: str | None = None, y: str | None = None, *, gain: str | None = None,
               ax: Axes | None = None) -> Figure:
    """``gain`` over two varied keys ``x`` and ``y`` (default the first two): a colour map of
    a grid (the best over any other varied key; gid ``map``), coloured points of a sample
    (gid ``points``); points beyond a limit crossed out (gid ``beyond-limits``)."""
    if not isinstance(result, SearchResult):
        raise TiltwellError(f"result must be a SearchResult; got {type(result).__name__}")
    names = result.names
    if len(names) < 2:
        raise TiltwellError("a map needs a search over at least two keys")
    x = names[0] if x is None else x
    y = names[1] if y is None else y
    for name in (x, y):
        if name not in names:
            raise TiltwellError(f"{name!r} is not a varied key of this search; varied: {', '.join(names)}")
    gain = result.figure_name() if gain is None else gain
    if gain not in COLUMNS:
        raise TiltwellError(f"unknown search column {gain!r}")
    g = result.values(gain)
    px = np.array([p[x] for p in result.points])
    py = np.array([p[y] for p in result.points])
    figure, ax = canvas(ax)
    if result.grid:
        shape = tuple(len(v.values) for v in result.varies)
        cube = g.reshape(shape)
        i, j = names.index(x), names.index(y)
        others = tuple(k for k in range(len(names)) if k not in (i, j))
        with np.errstate(all="ignore"):
            best = np.fmax.reduce(cube, axis=others) if others else cube
        plane = best if i < j else best.T  # axes (x, y)
        mesh: ScalarMappable = ax.pcolormesh(result.varies[i].values, result.varies[j].values, plane.T, shading="nearest",
                             cmap="cividis", gid="map")
    else:
        mesh = ax.scatter(px, py, c=g, s=14, cmap="cividis", gid="points")
    beyond = result.values("feasible") == 0.0
    if np.any(beyond):
        ax.plot(px[beyond], py[beyond], ls="none", marker="x", ms=4.0, color=PALETTE["rose"],
                label="beyond a limit", gid="beyond-limits")
        ax.legend(loc="upper right")
    figure.colorbar(mesh, ax=ax, label=_words(gain))
    ax.set_xlabel(f"{x} [{result.varies[names.index(x)].unit or '1'}]")
    ax.set_ylabel(f"{y} [{result.varies[names.index(y)].unit or '1'}]")
    ax.set_title(f"{_words(gain).split(' [')[0]} over {x} and {y}")
    return figure
