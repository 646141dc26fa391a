"""tiltwell's figure look: the palette, the rc settings and the small axes helpers every
figure module uses. :mod:`tiltwell.figures` re-exports :data:`PALETTE`; the helpers are
public to the figure modules (:mod:`.export` saves with the same settings)."""

from __future__ import annotations

import contextlib
import functools
import math
from collections.abc import Callable
from typing import Any, ParamSpec, TypeVar

import matplotlib
import numpy as np
from cycler import cycler
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from numpy.typing import ArrayLike, NDArray

from .._base.validation import TiltwellError, as_scalar

__all__ = ["PALETTE", "FloatArray", "add_legend", "canvas", "display_number", "kilo", "mark_current", "style_context",
           "styled"]

FloatArray = NDArray[np.float64]

#: tiltwell's colours, darkest to lightest (CIE 1976 L* 10, 37, 46, 59, 62, 69).
PALETTE: dict[str, str] = {"ink": "#1b1b1f", "blue": "#24589a", "rose": "#b8475e", "slate": "#8a8f98",
                           "teal": "#4aa59b", "amber": "#e39b2d"}

_STYLE: dict[Any, Any] = {  # (keys typed loosely: matplotlib types them as literals)
    "font.family": "sans-serif", "font.sans-serif": ["DejaVu Sans"], "mathtext.fontset": "dejavusans",
    "font.size": 9.0, "axes.titlesize": 9.0, "axes.titlelocation": "left", "axes.labelsize": 9.0,
    "xtick.labelsize": 8.0, "ytick.labelsize": 8.0, "legend.fontsize": 7.5,
    "legend.frameon": True, "legend.framealpha": 0.85, "legend.edgecolor": "none",
    "axes.linewidth": 0.6, "axes.edgecolor": PALETTE["ink"], "axes.labelcolor": PALETTE["ink"],
    "axes.prop_cycle": cycler(color=[PALETTE[k] for k in ("blue", "rose", "teal", "amber", "slate", "ink")]),
    "lines.linewidth": 1.0, "lines.markersize": 3.5,
    "xtick.direction": "in", "ytick.direction": "in", "xtick.major.width": 0.6, "ytick.major.width": 0.6,
    "xtick.color": PALETTE["ink"], "ytick.color": PALETTE["ink"],
    "pdf.fonttype": 42,  # embedded TrueType: text stays editable in a proposal's layout
    "svg.hashsalt": "tiltwell",  # stable SVG ids: the same figure gives the same file
}

_P = ParamSpec("_P")
_R = TypeVar("_R")


def style_context() -> contextlib.AbstractContextManager[None]:
    """tiltwell's rc parameters for the duration of a ``with`` block (artists take them
    when created, files when saved)."""
    return matplotlib.rc_context(_STYLE)


def styled(function: Callable[_P, _R]) -> Callable[_P, _R]:
    """Run ``function`` with tiltwell's rc parameters (:func:`style_context`)."""

    @functools.wraps(function)
    def wrapper(*args: _P.args, **kwargs: _P.kwargs) -> _R:
        with style_context():
            return function(*args, **kwargs)

    return wrapper


def canvas(ax: Axes | None) -> tuple[Figure, Axes]:
    """A new 6 x 4 in figure (no pyplot state) and its axes when ``ax`` is None; else the
    figure that holds ``ax`` (climbing out of sub-figures) and ``ax``."""
    if ax is None:
        figure = Figure(figsize=(6.0, 4.0), layout="constrained")
        return figure, figure.add_subplot()
    if not isinstance(ax, Axes):
        raise TiltwellError(f"ax must be a matplotlib Axes or None; got {type(ax).__name__}")
    root: Any = ax.figure
    while not isinstance(root, Figure):  # a SubFigure: climb to the figure that is saved
        root = root.figure
    return root, ax


def display_number(value: float) -> str:
    """``value`` to 3 significant digits, as mathtext ``a×10^n`` outside [1e-3, 1e4)."""
    if value == 0.0 or 1e-3 <= abs(value) < 1e4 or not math.isfinite(value):
        return f"{value:.3g}"
    mantissa, exponent = f"{value:.2e}".split("e")
    return rf"${mantissa}\times10^{{{int(exponent)}}}$"


def kilo(deceleration: ArrayLike) -> FloatArray:
    """Decelerations [m/s^2] in the display unit 10³ m/s²."""
    return np.asarray(deceleration, dtype=np.float64) * 1e-3


def add_legend(ax: Axes, **options: Any) -> None:
    """A legend of the labelled artists, if there are any."""
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        ax.legend(handles, labels, **options)


def mark_current(ax: Axes, current: float | None) -> None:
    """A vertical line at the chosen deceleration [m/s^2] (gid ``current-deceleration``)."""
    if current is not None:
        a = as_scalar(current, "current", "m/s^2")
        ax.axvline(float(kilo(a)), color=PALETTE["ink"], lw=0.8, ls=(0, (4, 2)),
                   label=f"chosen, {display_number(a)} m/s²", gid="current-deceleration")
