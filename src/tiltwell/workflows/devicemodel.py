"""One device model: which trap a scenario's numbers come from, in which box.

Where a scenario has a ``[coils]`` section the trap is its coil row: the row's field
averaged over the phase of the zero across one pitch
(:class:`tiltwell.dynamics.compare.PhaseAveragedField`, the rigid twin of the device),
tabulated once per row geometry (:class:`~tiltwell.workflows.fieldtable.AxisymmetricTable`,
cached, so a sweep over the deceleration or the length builds it once). Without
``[coils]``, or with ``[simulation] first_estimate = true``, the ``[trap]`` section gives
the trap: an ideal quadrupole capped at its ``max_field`` (the quick first estimate) or
an anti-Helmholtz pair. :data:`TRAP_MODELS` names each in words, as the summary's
``trap_model`` says it.

The box (one rule for every number of a scenario, acceptances, captured fractions, the
phase scan and both trackers): the ``[trap]`` half widths (a quadrupole's default: 4, 4
and 2 x max_field / gradient), and, with a ``[coils]`` section, hx and hy scaled down
together where needed so that the box's corner stays inside 0.99 of the bore
(radius - width / 2): the coil field is singular on the winding.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .._base.validation import TiltwellError
from ..coils.array import CoilArray, row_layout
from ..coils.schedule import MAX_COILS
from ..dynamics.compare import PhaseAveragedField
from ..physics.fields import FieldSource, IdealQuadrupole, anti_helmholtz
from ..physics.species import Species
from ..wells.acceptance import trap_acceptance
from ..wells.traps import Trap
from .fieldtable import TABLE_SHAPE, AxisymmetricTable, table_points
from .scenario import CoilsSection, Scenario, box_half_widths

FloatArray = NDArray[np.float64]

__all__ = ["BORE_FILL", "TRAP_MODELS", "RowTables", "coils_section", "model_of", "phase_acceptances", "row_array", "row_gradient",
           "row_tables", "trap_box", "trap_field", "twin_cache_info", "twin_table"]

#: The ``trap_model`` of a summary, by the trap that produced its numbers.
TRAP_MODELS: dict[str, str] = {
    "row": "coil row, phase-averaged",
    "quadrupole": "ideal quadrupole (first estimate)",
    "coils": "anti-Helmholtz pair ([trap] section)",
}

#: The trap box's corner stays inside this fraction of the bore (the field is singular on a winding).
BORE_FILL = 0.99


def coils_section(scenario: Scenario) -> CoilsSection:
    """The ``[coils]`` section of ``scenario``, or an error saying it has none."""
    if not isinstance(scenario, Scenario):
        raise TiltwellError(f"scenario must be a Scenario; got {type(scenario).__name__}")
    if scenario.coils is None:
        raise TiltwellError("the scenario has no [coils] section (tiltwell keys lists its keys)")
    return scenario.coils


def model_of(scenario: Scenario) -> str:
    """The key of :data:`TRAP_MODELS` that ``scenario``'s numbers come from."""
    if scenario.coils is not None and not scenario.simulation.first_estimate:
        return "row"
    return scenario.trap.kind


def trap_box(scenario: Scenario) -> tuple[float, float, float]:
    """Half widths (hx, hy, hz) [m] of the scenario's trap box (the rule in the module notes)."""
    hx, hy, hz = box_half_widths(scenario.trap)
    coils = scenario.coils
    if coils is None:
        return hx, hy, hz
    bore = coils.radius - 0.5 * coils.width
    if bore <= 0.0:
        raise TiltwellError(f"[coils] radius - width/2 [m] (the bore) must be > 0; got {bore:g} m from "
                            f"radius = {coils.radius!r}, width = {coils.width!r}")
    room = BORE_FILL * bore
    scale = min(1.0, room / math.hypot(hx, hy))
    return hx * scale, hy * scale, hz


def row_gradient(scenario: Scenario) -> float:
    """Wanted axial gradient of the row [T/m]: ``[coils] gradient``, else the quadrupole's."""
    coils = coils_section(scenario)
    gradient = coils.gradient if coils.gradient is not None else scenario.trap.gradient
    assert gradient is not None  # [coils] gradient is required unless the trap is a quadrupole
    return gradient


def row_array(scenario: Scenario, length: float) -> CoilArray:
    """The coil row of ``scenario``'s ``[coils]`` for a deceleration over ``length`` [m]:
    :func:`tiltwell.coils.array.row_layout` coils (every one energised at some point),
    coil k at z_k = -(active/2 - 1) pitch + k pitch.

    The ``[trap]`` box does not constrain the row: :func:`trap_box` fits it into the bore.

    Raises
    ------
    TiltwellError
        When the row would need more than ``MAX_COILS`` coils.
    """
    coils = coils_section(scenario)
    pitch, limit = scenario.deceleration.pitch, coils.max_current or scenario.deceleration.peak_current
    assert pitch is not None and limit is not None  # the scenario's own checks
    count, first = row_layout(length, pitch, coils.active, coils.handover)
    if count > MAX_COILS:
        raise TiltwellError(
            f"[deceleration] pitch [m] and length [m] need {count} coils, more than {MAX_COILS}; "
            f"got pitch = {pitch!r}, length = {length:g}")
    return CoilArray(count=count, pitch=pitch, radius=coils.radius, first=first, turns=coils.turns,
                     width=coils.width, height=coils.height, max_current=limit, active=coils.active,
                     handover=coils.handover)


@dataclass(frozen=True, eq=False)
class RowTables:
    """The row's trap tabulated in the trap frame (zero at the origin) over the trap box.

    Attributes
    ----------
    twin : AxisymmetricTable
        (1 / P) sum_j |B_j|: the phase-averaged field of
        :class:`~tiltwell.dynamics.compare.PhaseAveragedField` (``average="magnitude"``).
    phases : tuple of AxisymmetricTable
        |B_j| of each phase j = 0 ... P - 1 (zero at z_ref + j pitch / P), as
        :func:`tiltwell.moving_trap_phases` places them.
    """

    twin: AxisymmetricTable
    phases: tuple[AxisymmetricTable, ...]


def row_tables(scenario: Scenario) -> RowTables:
    """The twin and its ``[coils] phases`` phases tabulated over :func:`trap_box`.

    The twin does not depend on the row's length (only the window of ``active`` coils
    around the zero carries current, the same at every pitch), so it is built on a short
    row of ``active + 1`` coils and cached by the row's geometry, gradient, phases and
    box: sweep points that change only the deceleration, the length, the beam or the
    species reuse it (:func:`twin_cache_info` counts the hits). Each phase's |B| is
    evaluated once at the nodes; the twin's is their mean.
    """
    coils = coils_section(scenario)
    pitch, limit = scenario.deceleration.pitch, coils.max_current or scenario.deceleration.peak_current
    assert pitch is not None and limit is not None
    return _cached_tables((coils.radius, coils.turns, coils.width, coils.height, pitch, limit, coils.active,
                           coils.handover), row_gradient(scenario), coils.phases, trap_box(scenario))


def twin_table(scenario: Scenario) -> AxisymmetricTable:
    """The row's phase-averaged |B| tabulated over the trap box (:func:`row_tables`)."""
    return row_tables(scenario).twin


def twin_cache_info() -> tuple[int, int]:
    """(hits, misses) of the table cache of :func:`row_tables` in this process."""
    info = _cached_tables.cache_info()
    return info.hits, info.misses


@functools.lru_cache(maxsize=16)
def _cached_tables(geometry: tuple[float, int, float, float, float, float, int, float], gradient: float,
                   phases: int, box: tuple[float, float, float]) -> RowTables:
    radius, turns, width, height, pitch, limit, active, handover = geometry
    short = CoilArray(count=active + 1, pitch=pitch, radius=radius, turns=turns, width=width, height=height,
                      max_current=limit, active=active, handover=handover)
    twin = PhaseAveragedField(short, gradient, phases)
    rho_max, z_range = math.hypot(box[0], box[1]), (-box[2], box[2])
    h = 1e-6 * box[2]  # the slope at the zero, as AxisymmetricTable.sample reads it
    points = np.vstack([table_points(rho_max, z_range, TABLE_SHAPE), [[0.0, 0.0, h]]])
    values = [np.asarray(phase.magnitude(points)) for phase in twin.phase_fields]
    mean = np.mean(values, axis=0)
    tables = tuple(AxisymmetricTable(v[:-1].reshape(TABLE_SHAPE), rho_max, z_range, float(v[-1] / h)) for v in values)
    return RowTables(AxisymmetricTable(mean[:-1].reshape(TABLE_SHAPE), rho_max, z_range, float(mean[-1] / h)), tables)


def phase_acceptances(scenario: Scenario, species: Species, deceleration: float,
                      samples: int) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Depth [J], longitudinal and transverse acceptance [m·m/s] of each phase's trap,
    shapes (P,): :func:`tiltwell.trap_acceptance` (no 6-D) of the :func:`row_tables` phases
    in the trap box, at ``deceleration`` [m/s^2] with ``samples`` per cut; the tabulated
    counterpart of :func:`tiltwell.moving_trap_phases` (tests/test_devicemodel.py compares them)."""
    hx, hy, hz = trap_box(scenario)
    bounds = ((-hx, hx), (-hy, hy), (-hz, hz))
    rows = []
    for table in row_tables(scenario).phases:
        result = trap_acceptance(Trap(table, species, bounds), deceleration, samples=samples, include_6d=False)
        rows.append((result.longitudinal.depth, result.longitudinal.area, result.transverse.area))
    depth, longitudinal, transverse = (np.array(column, dtype=np.float64) for column in zip(*rows))
    return depth, longitudinal, transverse


def trap_field(scenario: Scenario) -> tuple[FieldSource, tuple[tuple[float, float], ...], str]:
    """The field source, the box ((x0, x1), (y0, y1), (z0, z1)) [m] and the ``trap_model``
    words of ``scenario`` (:func:`model_of` chooses from :data:`_SOURCES`)."""
    hx, hy, hz = trap_box(scenario)
    model = model_of(scenario)
    return _SOURCES[model](scenario), ((-hx, hx), (-hy, hy), (-hz, hz)), TRAP_MODELS[model]


def _quadrupole(scenario: Scenario) -> FieldSource:
    t = scenario.trap
    assert t.gradient is not None and t.max_field is not None
    return IdealQuadrupole(t.gradient, t.max_field)


def _pair(scenario: Scenario) -> FieldSource:
    t = scenario.trap
    assert t.radius is not None and t.separation is not None and t.current is not None
    return anti_helmholtz(t.radius, t.separation, t.current, turns=t.turns or 1, width=t.width or 0.0,
                          height=t.height or 0.0)


#: How each trap model makes its field source.
_SOURCES = {"row": twin_table, "quadrupole": _quadrupole, "coils": _pair}
