"""The yield budget as a waterfall: particles per pulse down to slow particles per shot.

Re-exported by :mod:`tiltwell.figures` (see there for units, gids and the look).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from .._base.validation import TiltwellError
from .style import PALETTE, canvas, display_number, styled

__all__ = ["yield_waterfall"]


@styled
def yield_waterfall(steps: Sequence[Mapping[str, Any]], *, interval: tuple[float, float] | None = None,
                    ax: Axes | None = None) -> Figure:
    """Each stage of the yield budget as a bar on a logarithmic axis, the drop to the next
    stage shaded.

    Parameters
    ----------
    steps : sequence of dict
        The budget's stages in order, each with ``label`` (str) and ``number`` [1] (> 0;
        e.g. :func:`tiltwell.workflows.yields.yield_budget`'s ``steps``). Bar k has gid
        ``stage-k``; the drop below it (to stage k + 1) ``drop-k``.
    interval : (float, float), optional
        The 68 % interval of the last stage [1], drawn as an error bar (gid ``interval``).
    ax : matplotlib Axes, optional

    Notes
    -----
    A waterfall on a logarithmic axis: each stage is a bar from the axis floor up to its
    number, and the share lost to the next stage is the lighter band between the two tops,
    labelled with the kept fraction. Numbers are labelled with 3 significant digits.
    """
    if (not isinstance(steps, Sequence) or isinstance(steps, str) or not steps
            or not all(isinstance(s, Mapping) and "label" in s and "number" in s for s in steps)):
        raise TiltwellError("steps must be a non-empty list of stages, each with 'label' and 'number' [1]")
    labels = [str(s["label"]) for s in steps]
    numbers = np.array([float(s["number"]) for s in steps])
    if not np.all(np.isfinite(numbers)) or np.any(numbers <= 0.0):
        raise TiltwellError(f"steps: every number [1] must be finite and > 0 for a logarithmic axis; got {numbers.tolist()}")
    figure, ax = canvas(ax)
    floor = 10.0 ** math.floor(math.log10(numbers.min()) - 0.5)
    x = np.arange(numbers.size)
    tops = numbers.copy()
    if interval is not None:
        low, high = (float(v) for v in interval)
        if not (0.0 < low <= numbers[-1] <= high and math.isfinite(high)):
            raise TiltwellError(f"interval [1] must bracket the last stage ({numbers[-1]:.3g}) and be > 0; "
                                f"got {interval!r}")
        ax.errorbar([x[-1]], [numbers[-1]], yerr=[[numbers[-1] - low], [high - numbers[-1]]], fmt="none",
                    ecolor=PALETTE["ink"], elinewidth=0.9, capsize=3, gid="interval")
        tops[-1] = high
    for k, number in enumerate(numbers):
        colour = PALETTE["blue"] if k < numbers.size - 1 else PALETTE["teal"]
        ax.bar(k, number - floor, bottom=floor, width=0.62, color=colour, edgecolor=PALETTE["ink"], linewidth=0.4,
               gid=f"stage-{k}")
        ax.annotate(display_number(number), (k, tops[k]), xytext=(0, 2), textcoords="offset points", ha="center",
                    va="bottom", fontsize=7.5)
        if k + 1 < numbers.size:
            following = numbers[k + 1]
            ax.bar(k + 0.5, number - following, bottom=following, width=0.22, color=PALETTE["rose"], alpha=0.35,
                   linewidth=0, gid=f"drop-{k}")
            ax.annotate(f"× {following / number:.2g}", (k + 0.5, math.sqrt(number * following)), ha="center",
                        va="center", fontsize=7.0, color=PALETTE["ink"])
    ax.set_yscale("log")
    ax.set_ylim(floor, numbers.max() * 8.0)
    ax.set_xticks(x, labels, rotation=20, ha="right")
    ax.set_ylabel("particles per shot")
    ax.set_title("yield budget, nozzle to slow particles")
    return figure
