"""The trap made by a coil array as its zero crosses one pitch: depth, gradients, zero
offset and acceptances at each phase, the worst phase and the averages (the ripple the
hand-over from coil to coil costs)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy import optimize

from .._base.validation import TiltwellError, as_finite_array, as_integer, as_scalar
from ..wells.acceptance import trap_acceptance
from .array import (
    MAX_PHASES,
    CoilArray,
    check_coil_array,
    on_axis_response,
    trap_currents,
)
from ..physics.species import Species
from ..wells.traps import Trap

__all__ = ["PhaseScan", "moving_trap_phases"]

FloatArray = NDArray[np.float64]

#: Step of the radial finite difference of |B| at the zero, relative to the coil radius.
_RADIAL_STEP = 1e-6


@dataclass(frozen=True, eq=False)
class PhaseScan:
    """The moving trap at phases across one pitch (all arrays shape (P,)).

    Attributes
    ----------
    phases : ndarray
        Offset p of the trap from the reference coil [m], in [0, pitch).
    positions : ndarray
        Trap positions z_trap [m].
    depth : ndarray
        Depth of the axis well [J] (from the longitudinal separatrix).
    zero_offset : ndarray
        Position of the on-axis field zero minus z_trap [m].
    axial_gradient : ndarray
        Achieved dB_z/dz at the zero [T/m].
    radial_gradient : ndarray
        d|B|/dx at the zero [T/m] (half the axial one for a divergence-free field).
    longitudinal, transverse : ndarray
        Acceptance areas [m·m/s] (0 where unbound).
    bound : ndarray of bool
        Whether the axis well exists.
    volume : ndarray
        Energetic 6-D acceptance [(m·m/s)^3] (0 where unbound); NaN where not computed.
    escape_energy : ndarray
        3-D escape energy of the tilted well [J], as in
        :class:`tiltwell.wells.acceptance.TrapAcceptance` (NaN where unbound).
    """

    phases: FloatArray
    positions: FloatArray
    depth: FloatArray
    zero_offset: FloatArray
    axial_gradient: FloatArray
    radial_gradient: FloatArray
    longitudinal: FloatArray
    transverse: FloatArray
    bound: NDArray[np.bool_]
    volume: FloatArray
    escape_energy: FloatArray

    @property
    def worst(self) -> int:
        """Index of the phase with the smallest longitudinal acceptance."""
        return int(np.argmin(self.longitudinal))

    @property
    def mean_longitudinal(self) -> float:
        """Mean longitudinal acceptance over the phases [m·m/s]."""
        return float(np.mean(self.longitudinal))

    @property
    def mean_transverse(self) -> float:
        """Mean transverse acceptance over the phases [m·m/s]."""
        return float(np.mean(self.transverse))

    @property
    def mean_volume(self) -> float:
        """Mean 6-D acceptance over the phases [(m·m/s)^3]; NaN when not computed."""
        return float(np.mean(self.volume))

    @property
    def worst_volume(self) -> float:
        """Smallest 6-D acceptance over the phases [(m·m/s)^3]; NaN when not computed."""
        return float(np.min(self.volume))

    @property
    def ripple(self) -> float:
        """Peak-to-peak of the depth over its mean (dimensionless)."""
        return float(np.ptp(self.depth) / np.mean(self.depth))


def _axis_zero(array: CoilArray, currents: FloatArray, z0: float) -> float:
    """Position [m] of the least on-axis |B_z| within half a pitch of ``z0``: the sign
    change of the closed-form B_z located by Brent's root finder, or, without a sign
    change, bounded minimisation of |B_z|."""
    def axial(s: float) -> float:
        return float(currents @ on_axis_response(array, [s])[0][:, 0])

    low, high = z0 - 0.5 * array.pitch, z0 + 0.5 * array.pitch
    if axial(low) * axial(high) < 0.0:
        return float(optimize.brentq(axial, low, high, xtol=1e-15, rtol=4 * np.finfo(float).eps))
    best = optimize.minimize_scalar(lambda s: abs(axial(s)), bounds=(low, high), method="bounded",
                                    options={"xatol": 1e-12 * array.pitch})
    return float(best.x)


def moving_trap_phases(
    array: CoilArray,
    gradient: float,
    species: Species,
    *,
    box_half_widths: tuple[float, float, float],
    phases: int = 16,
    deceleration: float = 0.0,
    samples: int = 1001,
    include_6d: bool = False,
    rtol: float = 1e-2,
) -> PhaseScan:
    """Depth, field zero and acceptances of the trap at ``phases`` positions across one pitch.

    Parameters
    ----------
    array : CoilArray
        Needs at least ``active + 1`` coils so the window is centred at every phase.
    gradient : float
        Wanted axial gradient [T/m], > 0 (the current limit may lower it).
    species : Species
    box_half_widths : (float, float, float)
        Half widths (hx, hy, hz) [m] of the trap box centred on z_trap; hx and hy must stay
        inside the bore (< radius - width / 2).
    phases : int, default 16
        Number of evenly spaced offsets p = k pitch / phases from the reference coil
        (coil (count - 1) // 2), >= 1.
    deceleration : float, default 0.0
        [m/s^2], passed to :func:`tiltwell.trap_acceptance`.
    samples : int, default 1001
        Samples per cut for the acceptance.
    include_6d : bool, default False
        Also compute the energetic 6-D acceptance at each phase (about a second per phase).
    rtol : float, default 1e-2
        Relative accuracy of the 6-D acceptance.

    Returns
    -------
    PhaseScan
    """
    check_coil_array(array)
    if array.count < array.active + 1:
        raise TiltwellError(f"array.count must be >= active + 1 = {array.active + 1} for a phase scan; got {array.count}")
    if not isinstance(species, Species):
        raise TiltwellError(f"species must be a Species; got {type(species).__name__}")
    count = as_integer(phases, "phases", 1, MAX_PHASES)
    halves = as_finite_array(box_half_widths, "box_half_widths", "m", ndim=1)
    bore = array.radius - 0.5 * array.width
    if halves.shape != (3,) or np.any(halves <= 0.0) or np.any(halves[:2] >= bore):
        raise TiltwellError(
            f"box_half_widths [m] must be three values > 0 with hx, hy < {bore:g} m (the bore); got {halves.tolist()!r}"
        )
    a = as_scalar(deceleration, "deceleration", "m/s^2")
    if not isinstance(include_6d, (bool, np.bool_)):
        raise TiltwellError(f"include_6d must be True or False; got {include_6d!r}")
    reference = float(array.positions[(array.count - 1) // 2])
    offsets = array.pitch * np.arange(count) / count
    plan = trap_currents(array, reference + offsets, gradient)
    step = _RADIAL_STEP * array.radius
    rows = []
    for z0, currents in zip(plan.positions, plan.currents):
        source = array.field_set(currents)
        zero = _axis_zero(array, currents, z0)
        radial = float(source.magnitude(np.array([[step, 0.0, zero]]))[0] / step)
        bounds = ((-halves[0], halves[0]), (-halves[1], halves[1]), (z0 - halves[2], z0 + halves[2]))
        result = trap_acceptance(Trap(source, species, bounds), a, include_6d=bool(include_6d), samples=samples,
                                 rtol=rtol)
        rows.append((result.longitudinal.depth, zero - z0, radial, result.longitudinal.area, result.transverse.area,
                     result.bound, result.volume, result.escape_energy))
    depth, offset, radial_gradient, longitudinal, transverse, bound, volume, escape = (
        np.array(column) for column in zip(*rows))
    return PhaseScan(offsets, plan.positions, depth, offset, plan.gradient, radial_gradient, longitudinal,
                     transverse, bound.astype(bool), volume.astype(float), escape.astype(float))
