"""The explorer's Bokeh views: four figures over named data sources, and the small
conversions that turn library results into their columns.

Nothing here computes physics. The columns are library results rescaled for people
(positions in mm, energies in mK) plus the drawing of a covariance ellipse; the figures
only draw what the sources hold. :mod:`tiltwell.explorer` fills the sources.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from bokeh.embed import file_html
from bokeh.models import (
    ColumnDataSource,
    DataRange1d,
    HoverTool,
    LinearAxis,
)
from bokeh.models.annotations import Span
from bokeh.models.widgets import Div
from bokeh.plotting import figure
from bokeh.resources import INLINE
from numpy.typing import ArrayLike, NDArray

from . import style
from .model import Picture
from ..physics.constants import millikelvin

__all__ = [
    "legend_below",
    "KEPT_COLOUR",
    "LOST_COLOUR",
    "SIGMAS",
    "barrier_columns",
    "barrier_picks",
    "draw",
    "ellipse_columns",
    "empty_columns",
    "make_views",
    "particle_columns",
    "potential_columns",
    "sci",
    "separatrix_columns",
    "standalone_html",
]

FloatArray = NDArray[np.float64]

#: Beam ellipses drawn, in standard deviations.
SIGMAS: tuple[float, ...] = (1.0, 2.0)
#: Points on each drawn ellipse.
ELLIPSE_POINTS = 121
MM = 1e3  # metres -> millimetres

#: Colours of the kept and the lost particles (:mod:`.style`).
KEPT_COLOUR = style.KEPT
LOST_COLOUR = style.LOST

#: Column names of every source, so an empty source has the same columns as a full one.
COLUMNS: dict[str, tuple[str, ...]] = {
    "potential": ("z", "lab", "moving"),
    "escape": ("z", "energy"),
    "barriers": ("z", "energy", "height", "name"),
    "longitudinal_separatrix": ("q", "v"),
    "longitudinal_ellipses": ("xs", "ys", "sigma"),
    "longitudinal_kept": ("q", "v"),
    "longitudinal_lost": ("q", "v"),
    "transverse_separatrix": ("q", "v"),
    "transverse_ellipses": ("xs", "ys", "sigma"),
    "transverse_kept": ("q", "v"),
    "transverse_lost": ("q", "v"),
    "tradeoff": ("deceleration", "overlap", "length"),
    "tradeoff_current": ("deceleration", "overlap", "length"),
}



def empty_columns(name: str) -> dict[str, Any]:
    """Empty columns for the source ``name``."""
    return {column: [] for column in COLUMNS[name]}


def sci(value: float, digits: int = 2) -> str:
    """A number in short scientific form, ``6.3e4``; plain for zero and non-finite values.

    >>> sci(63012.0)
    '6.3e4'
    >>> sci(0.0)
    '0'
    """
    if not math.isfinite(value) or value == 0.0:
        return f"{value:g}"
    mantissa, exponent = f"{value:.{digits - 1}e}".split("e")
    return f"{mantissa}e{int(exponent)}"


def potential_columns(z: FloatArray, lab: FloatArray, moving: FloatArray) -> dict[str, Any]:
    """Axis cuts: ``z`` [m] and the potentials at rest and in the decelerating frame [J]
    -> mm and mK."""
    return {"z": z * MM, "lab": millikelvin(lab), "moving": millikelvin(moving)}


def barrier_picks(z: FloatArray, potential: FloatArray, z_bottom: float) -> tuple[int, int, int] | None:
    """Indices of the sample nearest the well's bottom ``z_bottom`` [m] and of the highest
    sample on each side of it (the back and front barriers of the sampled potential);
    None when ``z_bottom`` is NaN (no well) or on an end."""
    if not math.isfinite(z_bottom):
        return None
    bottom = int(np.argmin(np.abs(z - z_bottom)))
    if bottom == 0 or bottom == z.size - 1:
        return None
    return bottom, int(np.argmax(potential[:bottom])), bottom + int(np.argmax(potential[bottom:]))


def barrier_columns(z: FloatArray, potential: FloatArray, picks: tuple[int, int, int] | None) -> dict[str, Any]:
    """The back and front barriers of :func:`barrier_picks`: positions in mm, energies
    and heights above the bottom in mK; empty without a well."""
    if picks is None:
        return empty_columns("barriers")
    bottom, back, front = picks
    energies = potential[[back, front]]
    return {
        "z": z[[back, front]] * MM,
        "energy": millikelvin(energies),
        "height": millikelvin(energies - potential[bottom]),
        "name": ["back barrier", "front barrier"],
    }


def separatrix_columns(curve: tuple[FloatArray, FloatArray]) -> dict[str, Any]:
    """A closed curve ``(position [m], velocity [m/s])`` -> position in mm."""
    position, velocity = curve
    return {"q": np.asarray(position) * MM, "v": np.asarray(velocity)}


def ellipse_columns(covariance: ArrayLike, mean: ArrayLike, sigmas: tuple[float, ...] = SIGMAS) -> dict[str, Any]:
    """The ``k``-sigma ellipses ``(u - mean)^T C^-1 (u - mean) = k^2`` of a Gaussian in
    (position [m], velocity [m/s]), drawn as ``mean + k L (cos t, sin t)`` with ``L`` the
    Cholesky factor of ``C`` (``L L^T = C``); positions in mm."""
    factor = np.linalg.cholesky(np.asarray(covariance, dtype=np.float64))
    centre = np.asarray(mean, dtype=np.float64)
    angle = np.linspace(0.0, 2.0 * np.pi, ELLIPSE_POINTS)
    circle = np.stack([np.cos(angle), np.sin(angle)])
    xs, ys = [], []
    for k in sigmas:
        points = centre[:, None] + k * (factor @ circle)
        xs.append(points[0] * MM)
        ys.append(points[1])
    return {"xs": xs, "ys": ys, "sigma": [f"{k:g} σ" for k in sigmas]}


def particle_columns(position: FloatArray, velocity: FloatArray,
                     kept: NDArray[np.bool_]) -> tuple[dict[str, Any], dict[str, Any]]:
    """Sampled particles (position [m] -> mm, velocity [m/s]) split into the kept and
    the lost ones, each in sample order (numeric columns only: they reach the browser
    as binary arrays)."""
    return ({"q": position[kept] * MM, "v": velocity[kept]},
            {"q": position[~kept] * MM, "v": velocity[~kept]})


def make_views() -> tuple[dict[str, Any], dict[str, ColumnDataSource], dict[str, Span]]:
    """Empty sources and the four figures drawing them; also the movable marker lines.

    Returns
    -------
    figures : dict
        ``potential``, ``longitudinal``, ``transverse``, ``tradeoff`` (Bokeh figures).
    sources : dict of ColumnDataSource
        Keys as in :data:`COLUMNS`.
    spans : dict of Span
        ``critical`` (the critical deceleration on the trade-off figure).
    """
    sources = {name: ColumnDataSource(empty_columns(name)) for name in COLUMNS}
    critical = Span(location=0.0, dimension="height", line_color=LOST_COLOUR, line_dash="dotted", line_width=1.5)
    figures = {
        "potential": _potential_figure(sources),
        "longitudinal": _phase_figure(sources, "longitudinal", (r"$$z - z_\mathrm{trap}\ \mathrm{[mm]}$$", "Δz"),
                                      (r"$$v_z - v_\mathrm{trap}\ \mathrm{[m/s]}$$", "Δv")),
        "transverse": _phase_figure(sources, "transverse", ("x [mm]", "x"), (r"$$v_x\ \mathrm{[m/s]}$$", "vx")),
        "tradeoff": _tradeoff_figure(sources, critical),
    }
    return figures, sources, {"critical": critical}


def legend_below(p: Any) -> None:
    """Move the figure's legend under the plot, in one row, so that it never covers the data
    (a click on an entry still hides its curve)."""
    legend = p.legend[0]
    p.center.remove(legend)
    legend.location, legend.orientation, legend.click_policy = "center", "horizontal", "hide"
    legend.margin, legend.padding, legend.spacing = 2, 2, 6
    legend.label_text_font_size, legend.glyph_width = "8pt", 16
    if len(legend.items) > 3:  # two rows, so that no entry is cut at the figure's width
        legend.nrows = 2
    p.add_layout(legend, "below")


def _potential_figure(sources: dict[str, ColumnDataSource]) -> Any:
    p = figure(**style.FIGURE, title="potential on the beam axis",
               x_axis_label="z [mm]", y_axis_label=r"$$U / k_\mathrm{B}\ \mathrm{[mK]}$$")
    rest = p.line("z", "lab", source=sources["potential"], line_color=style.REFERENCE, line_dash="dashed",
                  line_width=2, legend_label="trap at rest (a = 0)")
    moving = p.line("z", "moving", source=sources["potential"], line_color=style.WELL, line_width=2,
                    legend_label="decelerating frame")
    escape = p.line("z", "energy", source=sources["escape"], line_color=style.ESCAPE, line_dash="dotdash",
                    legend_label="escape energy (3-D)")
    barriers = p.scatter("z", "energy", source=sources["barriers"], marker="triangle", size=11,
                         fill_color=style.ESCAPE, line_color=style.ESCAPE, legend_label="barriers")
    p.add_tools(
        HoverTool(renderers=[rest], mode="vline", tooltips=[("z", "@z{0.000} mm"), ("at rest", "@lab{0.000} mK")]),
        HoverTool(renderers=[moving], mode="vline",
                  tooltips=[("z", "@z{0.000} mm"), ("decelerating", "@moving{0.000} mK")]),
        HoverTool(renderers=[escape], tooltips=[("escape energy", "@energy{0.000} mK")]),
        HoverTool(renderers=[barriers], tooltips=[("", "@name"), ("z", "@z{0.000} mm"), ("energy", "@energy{0.000} mK"),
                                                  ("above the bottom", "@height{0.000} mK")]),
    )
    legend_below(p)
    return p


def _phase_figure(sources: dict[str, ColumnDataSource], plane: str, x: tuple[str, str], y: tuple[str, str]) -> Any:
    """``x`` and ``y``: (axis label, math text between ``$$`` where it has subscripts; the
    plain words the hover shows)."""
    (x_label, coordinate), (y_label, velocity) = x, y
    p = figure(**style.FIGURE, title=f"{plane} phase plane",
               x_axis_label=x_label, y_axis_label=y_label)
    kept = p.scatter("q", "v", source=sources[f"{plane}_kept"], color=KEPT_COLOUR, size=3, alpha=0.5,
                     legend_label="kept")
    lost = p.scatter("q", "v", source=sources[f"{plane}_lost"], color=LOST_COLOUR, size=3, alpha=0.5,
                     legend_label="lost")
    rings = p.multi_line("xs", "ys", source=sources[f"{plane}_ellipses"], line_color=style.BEAM, line_width=2,
                         legend_label="beam 1σ, 2σ")
    edge = p.line("q", "v", source=sources[f"{plane}_separatrix"], line_color=style.WELL, line_width=2.5,
                  legend_label="separatrix")
    p.add_tools(
        HoverTool(renderers=[kept], tooltips=[(coordinate, "@q{0.000} mm"), (velocity, "@v{0.00} m/s"), ("", "kept")]),
        HoverTool(renderers=[lost], tooltips=[(coordinate, "@q{0.000} mm"), (velocity, "@v{0.00} m/s"), ("", "lost")]),
        HoverTool(renderers=[edge], tooltips=[("separatrix " + coordinate, "@q{0.000} mm"),
                                              (velocity, "@v{0.00} m/s")]),
        HoverTool(renderers=[rings], tooltips=[("beam ellipse", "@sigma")]),
    )
    legend_below(p)
    return p


def _tradeoff_figure(sources: dict[str, ColumnDataSource], critical: Span) -> Any:
    p = figure(**style.FIGURE, title="trade-off against deceleration",
               x_axis_label="deceleration [m/s²]", y_axis_label="captured fraction (phase-space overlap)")
    kept = p.line("deceleration", "overlap", source=sources["tradeoff"], line_color=KEPT_COLOUR, line_width=2,
                  legend_label="captured fraction")
    here = p.scatter("deceleration", "overlap", source=sources["tradeoff_current"], size=10, marker="circle",
                     fill_color=KEPT_COLOUR, line_color="black", legend_label="this setting")
    length = p.line("deceleration", "length", source=sources["tradeoff"], line_color=style.WELL, line_dash="dashed",
                    line_width=2, y_range_name="length", legend_label="device length")
    here_length = p.scatter("deceleration", "length", source=sources["tradeoff_current"], size=10, marker="square",
                            fill_color=style.WELL, line_color="black", y_range_name="length")
    # each axis ranges over its own curves only, from zero
    p.y_range = DataRange1d(renderers=[kept, here], start=0.0)
    p.extra_y_ranges = {"length": DataRange1d(renderers=[length, here_length], start=0.0)}
    p.add_layout(LinearAxis(y_range_name="length", axis_label="device length [m]"), "right")
    p.add_layout(critical)
    tips = [("deceleration", "@deceleration{0.000a} m/s²"), ("captured", "@overlap{0.0000}"), ("length", "@length{0.000} m")]
    p.add_tools(HoverTool(renderers=[kept, here, length, here_length], tooltips=tips))
    legend_below(p)
    return p


def draw(sources: dict[str, ColumnDataSource], figures: dict[str, Any], spans: dict[str, Span], picture: Picture,
         length: float, tracked: tuple[FloatArray, NDArray[np.bool_]] | None = None) -> None:
    """Fill every source (but the trade-off curve) from ``picture``; the device
    ``length`` [m] marks the trade-off. The particles are the picture's drawn sample in the
    trap frame, kept when inside each plane's separatrix, or ``tracked``: particles (n, 6)
    in the trap frame and their kept flags after trajectory integration."""
    acceptance, beam, s = picture.acceptance, picture.beam, picture.settings
    z, moving = picture.moving
    sources["potential"].data = potential_columns(z, picture.rest[1], moving)
    escape = acceptance.escape_energy
    sources["escape"].data = ({"z": z[[0, -1]] * MM, "energy": np.full(2, millikelvin(escape))}
                              if math.isfinite(escape) else empty_columns("escape"))
    sources["barriers"].data = barrier_columns(z, moving, barrier_picks(z, moving, acceptance.longitudinal.z_bottom))
    particles, how = picture.particles.copy(), "inside the separatrix"
    particles[:, 5] -= s.mismatch  # trap frame: the beam moves at -mismatch
    along = acceptance.longitudinal.contains(particles[:, 2], particles[:, 5])
    across = acceptance.transverse.contains(particles[:, 0], particles[:, 3])
    if tracked is not None:
        particles, along = tracked
        across, how = along, "tracked trajectories"
    planes = (("longitudinal", acceptance.longitudinal, beam.longitudinal, (0.0, -s.mismatch), 2, along),
              ("transverse", acceptance.transverse, beam.horizontal, (0.0, 0.0), 0, across))
    for name, well, plane, mean, column, flags in planes:
        sources[f"{name}_separatrix"].data = separatrix_columns(well.boundary())
        sources[f"{name}_ellipses"].data = ellipse_columns(plane.covariance, mean)
        sources[f"{name}_kept"].data, sources[f"{name}_lost"].data = particle_columns(
            particles[:, column], particles[:, column + 3], flags)
        title = f"{name} phase plane (kept: {how})"
        if figures[name].title.text != title:
            figures[name].title.text = title
    sources["tradeoff_current"].data = {"deceleration": [s.deceleration], "overlap": [picture.overlap],
                                        "length": [length]}
    spans["critical"].location = picture.critical


def standalone_html(figures: dict[str, Any], header: str, title: str) -> str:
    """One HTML page: ``header`` (HTML) over the figures, BokehJS inlined
    (``bokeh.resources.INLINE``), so the page opens without any network."""
    return str(file_html([Div(text=header), *figures.values()], INLINE, title=title))
