"""Longitudinal, transverse and 6-D acceptance of a trap, and how they fall with deceleration.

- Longitudinal: the separatrix of the effective potential on the z axis (a particle on the
  axis with no transverse velocity stays on it, so this 1-D cut is exact for it).
- Transverse: the separatrix of the effective potential along x through the tilted bottom,
  its energy capped at the 3-D escape energy (a particle may leave over the lowered front
  barrier before it climbs the radial wall).
- 6-D: the energetic acceptance (:mod:`tiltwell.energetic`) of the tilted potential.
"""

from __future__ import annotations

import html
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._validation import as_finite_array, as_scalar
from .constants import millikelvin
from .energetic import _component, _touches_wall, energetic_acceptance, escape_level
from .separatrix import Separatrix, separatrix
from .traps import Trap

__all__ = [
    "AcceptanceCurve",
    "TrapAcceptance",
    "acceptance_curve",
    "longitudinal_acceptance",
    "trap_acceptance",
    "transverse_acceptance",
]

FloatArray = NDArray[np.float64]

#: A 3-D grid escape energy within this fraction of the depth below the 1-D barriers is
#: taken as grid error, not as a lower exit (the grid samples a saddle only to O(h^2)).
_GRID_SLACK = 0.03
#: Points per axis of the coarse grid that decides whether a lower 3-D exit exists.
_CHECK_GRID = 41


def longitudinal_acceptance(trap: Trap, deceleration: float = 0.0, samples: int = 2001) -> Separatrix:
    """Separatrix of ``U_eff`` on the axis, the well taken near the field zero."""
    z, potential = trap.axis_cut(deceleration, samples)
    return separatrix(z, potential, trap.mass, near=_centre(trap)[2])


def transverse_acceptance(
    trap: Trap,
    deceleration: float = 0.0,
    samples: int = 2001,
    *,
    z: float | None = None,
    max_energy: float | None = None,
) -> Separatrix:
    """Separatrix of ``U_eff`` along x through ``(0, 0, z)``.

    ``z`` defaults to the bottom of the tilted axis well; ``max_energy`` [J] caps the orbit
    energy (:func:`trap_acceptance` passes the 3-D escape energy). Unbound when the axis
    has no well.
    """
    if z is None:
        axis = longitudinal_acceptance(trap, deceleration, samples)
        if not axis.bound:
            return axis
        z = axis.z_bottom
    x, potential = trap.radial_cut(z, deceleration, samples)
    return separatrix(x, potential, trap.mass, near=_centre(trap)[0], max_energy=max_energy)


@dataclass(frozen=True, eq=False)
class TrapAcceptance:
    """Acceptances of one trap at one deceleration.

    Attributes
    ----------
    deceleration : float
        [m/s^2].
    longitudinal, transverse : Separatrix
        The axis and radial separatrices (areas in m·m/s).
    escape_energy : float
        3-D escape energy of the tilted well [J] (NaN when unbound).
    volume : float
        Energetic 6-D acceptance [(m·m/s)^3]; NaN when not computed.
    """

    deceleration: float
    longitudinal: Separatrix
    transverse: Separatrix
    escape_energy: float
    volume: float

    @property
    def bound(self) -> bool:
        return self.longitudinal.bound

    def _repr_html_(self) -> str:
        rows = [
            ("deceleration", f"{self.deceleration:.4g} m/s²"),
            ("longitudinal acceptance", f"{self.longitudinal.area * 1e3:.4g} mm·m/s"),
            ("transverse acceptance", f"{self.transverse.area * 1e3:.4g} mm·m/s"),
            ("6-D acceptance", f"{self.volume * 1e9:.4g} (mm·m/s)³"),
            ("depth", f"{millikelvin(self.longitudinal.depth):.4g} mK (axis)"),
        ]
        cells = "".join(f"<tr><td>{html.escape(k)}</td><td>{html.escape(v)}</td></tr>" for k, v in rows)
        return f"<b>Trap acceptance</b><table>{cells}</table>"


def trap_acceptance(
    trap: Trap,
    deceleration: float = 0.0,
    *,
    samples: int = 2001,
    include_6d: bool = True,
    rtol: float = 1e-2,
    _check: _EscapeCheck | None = None,
) -> TrapAcceptance:
    """Longitudinal, transverse and (optionally) 6-D acceptance at one deceleration.

    The 3-D escape energy caps the transverse orbit. With ``include_6d`` it comes from
    the energetic 6-D grid; without, a coarse grid checks whether an exit lies clearly
    below the 1-D barriers (else the lower of the axis and radial barriers is used).
    """
    a = as_scalar(deceleration, "deceleration", "m/s^2")
    axis = longitudinal_acceptance(trap, a, samples)
    if not axis.bound:
        return TrapAcceptance(a, axis, axis, float("nan"), 0.0 if include_6d else float("nan"))
    radial = transverse_acceptance(trap, a, samples, z=axis.z_bottom)
    cap = min(axis.escape_energy, radial.escape_energy) if radial.bound else axis.escape_energy
    volume = float("nan")
    if include_6d:
        six = energetic_acceptance(
            lambda x, y, z: trap.effective_potential(x, y, z, a), trap.mass, trap.bounds,
            rtol=rtol, near=(*_centre(trap)[:2], axis.z_bottom),
        )
        volume = six.volume  # self-consistent on its own converged grid
        escape = _settle(cap, six.escape_energy, six.bottom_energy)
    else:
        escape = (_check or _EscapeCheck(trap)).escape(a, axis, cap)
    radial = transverse_acceptance(trap, a, samples, z=axis.z_bottom, max_energy=escape)
    return TrapAcceptance(a, axis, radial, escape, volume)


@dataclass(frozen=True, eq=False)
class AcceptanceCurve:
    """Acceptances against deceleration, as arrays of one length.

    Attributes
    ----------
    decelerations : ndarray
        [m/s^2].
    longitudinal, transverse : ndarray
        Areas [m·m/s] (0 where unbound).
    volume : ndarray
        6-D acceptance [(m·m/s)^3], NaN where not computed.
    escape_energy, depth : ndarray
        3-D escape energy [J] (NaN where unbound) and axis depth [J].
    critical_deceleration : float
        Where the axis well disappears [m/s^2].
    """

    decelerations: FloatArray
    longitudinal: FloatArray
    transverse: FloatArray
    volume: FloatArray
    escape_energy: FloatArray
    depth: FloatArray
    critical_deceleration: float


def acceptance_curve(
    trap: Trap,
    decelerations: ArrayLike,
    *,
    samples: int = 1001,
    include_6d: bool = False,
    rtol: float = 1e-2,
) -> AcceptanceCurve:
    """Acceptances of ``trap`` at each of ``decelerations`` [m/s^2] (1-D array)."""
    values = as_finite_array(decelerations, "decelerations", "m/s^2", ndim=1)
    check = None if include_6d else _EscapeCheck(trap)
    results = [
        trap_acceptance(trap, a, samples=samples, include_6d=include_6d, rtol=rtol, _check=check) for a in values
    ]
    return AcceptanceCurve(
        decelerations=values,
        longitudinal=np.array([r.longitudinal.area for r in results]),
        transverse=np.array([r.transverse.area for r in results]),
        volume=np.array([r.volume for r in results]),
        escape_energy=np.array([r.escape_energy for r in results]),
        depth=np.array([r.longitudinal.depth for r in results]),
        critical_deceleration=trap.critical_deceleration(),
    )


def _centre(trap: Trap) -> tuple[float, float, float]:
    """Where the well is sought: the middle of the trap region (see :class:`Trap`)."""
    (x0, x1), (y0, y1), (z0, z1) = trap.bounds
    return 0.5 * (x0 + x1), 0.5 * (y0 + y1), 0.5 * (z0 + z1)


def _settle(cap: float, grid_escape: float, bottom: float) -> float:
    """Accept the 1-D cap unless the grid finds an exit clearly below it."""
    if grid_escape >= cap - _GRID_SLACK * (cap - bottom):
        return cap
    return grid_escape


class _EscapeCheck:
    """Coarse 3-D grid of the untilted potential, to ask cheaply for each deceleration
    whether some exit lies clearly below the 1-D barriers (one labelling when none does)."""

    def __init__(self, trap: Trap) -> None:
        self.axes = [np.linspace(low, high, _CHECK_GRID) for low, high in trap.bounds]
        x, y, z = np.meshgrid(*self.axes, indexing="ij", sparse=True)
        self.values = trap.potential(x, y, z)
        self.z = np.broadcast_to(z, self.values.shape)
        self.centre = _centre(trap)
        self.mass = trap.mass

    def escape(self, deceleration: float, axis: Separatrix, cap: float) -> float:
        values = self.values - self.mass * deceleration * self.z
        near = (self.centre[0], self.centre[1], axis.z_bottom)
        start = tuple(int(np.argmin(np.abs(ax - c))) for ax, c in zip(self.axes, near))
        bottom = axis.escape_energy - axis.depth
        if not _touches_wall(_component(values <= cap - _GRID_SLACK * (cap - bottom), start)):
            return cap
        return min(cap, escape_level(values, start))
