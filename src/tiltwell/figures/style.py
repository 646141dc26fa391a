"""tiltwell's figure style and export: palette, rc settings, axes helpers and atomic saving
to PDF/SVG/PNG. Private to :mod:`tiltwell.figures`, which re-exports :data:`PALETTE` and
:func:`save`."""

from __future__ import annotations

import functools
import io
import math
import os
from collections.abc import Callable
from pathlib import Path
from typing import Any, ParamSpec, TypeVar

import matplotlib
import numpy as np
from cycler import cycler
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from numpy.typing import ArrayLike, NDArray

from .._base.files import atomic_write_bytes
from .._base.validation import TiltwellError, as_scalar

FloatArray = NDArray[np.float64]

#: tiltwell's colours, darkest to lightest (CIE 1976 L* 10, 37, 46, 59, 62, 69).
PALETTE: dict[str, str] = {"ink": "#1b1b1f", "blue": "#24589a", "rose": "#b8475e", "slate": "#8a8f98",
                           "teal": "#4aa59b", "amber": "#e39b2d"}
_C = PALETTE

_STYLE: dict[Any, Any] = {  # (keys typed loosely: matplotlib types them as literals)
    "font.family": "sans-serif", "font.sans-serif": ["DejaVu Sans"], "mathtext.fontset": "dejavusans",
    "font.size": 9.0, "axes.titlesize": 9.0, "axes.titlelocation": "left", "axes.labelsize": 9.0,
    "xtick.labelsize": 8.0, "ytick.labelsize": 8.0, "legend.fontsize": 7.5,
    "legend.frameon": True, "legend.framealpha": 0.85, "legend.edgecolor": "none",
    "axes.linewidth": 0.6, "axes.edgecolor": _C["ink"], "axes.labelcolor": _C["ink"],
    "axes.prop_cycle": cycler(color=[_C[k] for k in ("blue", "rose", "teal", "amber", "slate", "ink")]),
    "lines.linewidth": 1.0, "lines.markersize": 3.5,
    "xtick.direction": "in", "ytick.direction": "in", "xtick.major.width": 0.6, "ytick.major.width": 0.6,
    "xtick.color": _C["ink"], "ytick.color": _C["ink"],
    "pdf.fonttype": 42,  # embedded TrueType: text stays editable in a proposal's layout
    "svg.hashsalt": "tiltwell",  # stable SVG ids: the same figure gives the same file
}
#: Suffix -> matplotlib format, and the metadata that would make files differ run to run.
_FORMATS: dict[str, tuple[str, dict[str, Any]]] = {
    ".pdf": ("pdf", {"CreationDate": None}), ".svg": ("svg", {"Date": None}), ".png": ("png", {})}

_P = ParamSpec("_P")
_R = TypeVar("_R")


def _styled(function: Callable[_P, _R]) -> Callable[_P, _R]:
    """Run ``function`` with tiltwell's rc parameters (artists take them when created)."""

    @functools.wraps(function)
    def wrapper(*args: _P.args, **kwargs: _P.kwargs) -> _R:
        with matplotlib.rc_context(_STYLE):
            return function(*args, **kwargs)

    return wrapper


def _canvas(ax: Axes | None) -> tuple[Figure, Axes]:
    if ax is None:
        figure = Figure(figsize=(6.0, 4.0), layout="constrained")
        return figure, figure.add_subplot()
    if not isinstance(ax, Axes):
        raise TiltwellError(f"ax must be a matplotlib Axes or None; got {type(ax).__name__}")
    root: Any = ax.figure
    while not isinstance(root, Figure):  # a SubFigure: climb to the figure that is saved
        root = root.figure
    return root, ax


def _number(value: float) -> str:
    """``value`` to 3 significant digits, as mathtext ``a×10^n`` outside [1e-3, 1e4)."""
    if value == 0.0 or 1e-3 <= abs(value) < 1e4 or not math.isfinite(value):
        return f"{value:.3g}"
    mantissa, exponent = f"{value:.2e}".split("e")
    return rf"${mantissa}\times10^{{{int(exponent)}}}$"


def _kilo(deceleration: ArrayLike) -> FloatArray:
    """Decelerations [m/s^2] in the display unit 10³ m/s²."""
    return np.asarray(deceleration, dtype=np.float64) * 1e-3


def _legend(ax: Axes, **options: Any) -> None:
    """A legend of the labelled artists, if there are any."""
    handles, labels = ax.get_legend_handles_labels()
    if handles:
        ax.legend(handles, labels, **options)


def _mark_current(ax: Axes, current: float | None) -> None:
    """A vertical line at the chosen deceleration [m/s^2] (gid ``current-deceleration``)."""
    if current is not None:
        a = as_scalar(current, "current", "m/s^2")
        ax.axvline(float(_kilo(a)), color=_C["ink"], lw=0.8, ls=(0, (4, 2)), label=f"chosen, {_number(a)} m/s²",
                   gid="current-deceleration")


def save(figure: Figure, path: str | os.PathLike[str], *, width: float | None = None, height: float | None = None,
         dpi: float = 300) -> Path:
    """Write ``figure`` to ``path`` as PDF, SVG or PNG (chosen by the suffix), atomically.

    Parameters
    ----------
    width, height : float, optional
        Size [in], in (0, 100]; by default the figure's own. The figure gets its size back
        afterwards. A PNG is ``int(width * dpi)`` x ``int(height * dpi)`` pixels.
    dpi : float
        Dots per inch, in (0, 2400]: the PNG's resolution and that of rasterised parts of
        PDF and SVG (dense particle clouds).

    Returns the ``path``, replaced only once the whole file is written.
    """
    if not isinstance(figure, Figure):
        raise TiltwellError(f"figure must be a matplotlib Figure; got {type(figure).__name__}")
    target = Path(path)
    if target.suffix.lower() not in _FORMATS:
        raise TiltwellError(f"path must end in .pdf, .svg or .png; got {str(path)!r}")
    if not target.parent.is_dir():
        raise TiltwellError(f"path must be in an existing folder; got {str(path)!r}")
    kind, metadata = _FORMATS[target.suffix.lower()]
    old = (float(figure.get_size_inches()[0]), float(figure.get_size_inches()[1]))
    size = (
        old[0] if width is None else as_scalar(width, "width", "in", low=0.0, high=100.0, low_open=True),
        old[1] if height is None else as_scalar(height, "height", "in", low=0.0, high=100.0, low_open=True),
    )
    dots = as_scalar(dpi, "dpi", "1/in", low=0.0, high=2400.0, low_open=True)
    buffer = io.BytesIO()
    try:
        figure.set_size_inches(size)
        with matplotlib.rc_context(_STYLE):
            figure.savefig(buffer, format=kind, dpi=dots, metadata=metadata)
    finally:
        figure.set_size_inches(old)
    return atomic_write_bytes(target, buffer.getvalue())


def _formats(formats: Any) -> tuple[str, ...]:
    kinds = (formats,) if isinstance(formats, str) else tuple(formats)
    allowed = [suffix[1:] for suffix in _FORMATS]
    if not kinds or any(kind not in allowed for kind in kinds):
        raise TiltwellError(f"formats must be a non-empty list of {', '.join(allowed)}; got {formats!r}")
    return tuple(dict.fromkeys(kinds))
