"""Figures against deceleration: the acceptance curve of a trap and the trade-off of a
sweep (captured fractions and device length).

Re-exported by :mod:`tiltwell.figures` (see there for units, gids and the look).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from .._base.validation import TiltwellError
from ..wells.acceptance import AcceptanceCurve
from .style import PALETTE, FloatArray, add_legend, canvas, display_number, kilo, mark_current, styled

__all__ = ["acceptance_against_deceleration", "tradeoff_plot"]

_FRACTIONS = (
    ("captured_fraction_overlap", "phase-space overlap", "blue", "-", "o"),
    ("captured_fraction_energy", "energetic 6-D", "rose", "--", "s"),
    ("captured_fraction_mc", "trajectories", "teal", "-.", "D"),
)


@styled
def tradeoff_plot(rows: Sequence[Mapping[str, Any]], *, current: float | None = None,
                  ax: Axes | None = None) -> Figure:
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

    figure, ax = canvas(ax)
    x = kilo(column("deceleration"))
    right = ax.twinx()
    for key, label, colour, style, marker in _FRACTIONS:
        y = column(key)
        if np.all(np.isnan(y)):
            continue
        ax.plot(x, y, color=PALETTE[colour], ls=style, marker=marker, ms=3.5, label=label, gid=key)
        error = column(f"{key}_error")
        if not np.all(np.isnan(error)):
            ax.errorbar(x, y, yerr=error, fmt="none", ecolor=PALETTE[colour], elinewidth=0.6, capsize=0)
    right.plot(x, column("length"), color=PALETTE["slate"], ls=":", marker="^", ms=3.5, label="device length",
               gid="length")
    mark_current(ax, current)
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


@styled
def acceptance_against_deceleration(curve: AcceptanceCurve, *, current: float | None = None,
                                    ax: Axes | None = None) -> Figure:
    """Longitudinal and transverse acceptance [mm·m/s] against deceleration [10³ m/s²].

    Gids ``acceptance-longitudinal``, ``acceptance-transverse``, ``critical-deceleration``
    and, when ``current`` [m/s^2] is given, ``current-deceleration``.
    """
    if not isinstance(curve, AcceptanceCurve):
        raise TiltwellError(f"curve must be an AcceptanceCurve; got {type(curve).__name__}")
    figure, ax = canvas(ax)
    x = kilo(curve.decelerations)
    ax.plot(x, curve.longitudinal * 1e3, color=PALETTE["blue"], label="longitudinal (z, $v_z$)",
            gid="acceptance-longitudinal")
    ax.plot(x, curve.transverse * 1e3, color=PALETTE["rose"], ls="--", label="transverse (x, $v_x$)",
            gid="acceptance-transverse")
    critical = curve.critical_deceleration
    ax.axvline(float(kilo(critical)), color=PALETTE["amber"], lw=1.0, ls=":",
               label=f"critical, {display_number(critical)} m/s²", gid="critical-deceleration")
    mark_current(ax, current)
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("deceleration [10³ m/s²]")
    ax.set_ylabel("acceptance [mm·m/s]")
    ax.set_title("acceptance against deceleration")
    add_legend(ax, loc="upper right")
    return figure
