"""Longitudinal, transverse and 6-D acceptance of a trap, and how they fall with deceleration.

- Longitudinal: the separatrix of the effective potential on the z axis (a particle on the
  axis with no transverse velocity stays on it, so this 1-D cut is exact for it).
- Transverse: the separatrix of the effective potential along x through the tilted bottom,
  its energy capped at the 3-D escape energy (a particle may leave over the lowered front
  barrier before it climbs the radial wall).
- 6-D: the energetic acceptance (:mod:`tiltwell.wells.energetic`) of the tilted potential.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.display import html_table
from .._base.validation import MAX_SAMPLES, TiltwellError, as_boolean, as_finite_array, as_integer, as_scalar
from ..physics.constants import millikelvin
from ..physics.fields import CoilSet, IdealQuadrupole
from .energetic import KNOWN_ESCAPE_SLACK, EnergeticAcceptance, energetic_acceptance
from .lazygrid import LazyGrid, run_fills, run_flood
from .separatrix import Separatrix, separatrix
from .traps import Trap

__all__ = [
    "AcceptanceCurve",
    "TrapAcceptance",
    "TrapSampler",
    "acceptance_curve",
    "acceptances_at",
    "longitudinal_acceptance",
    "trap_acceptance",
    "transverse_acceptance",
]

FloatArray = NDArray[np.float64]

#: Points per axis of the coarse grid that decides whether a lower 3-D exit exists.
_CHECK_GRID = 33
#: Field sources whose |B| is the same float at (x, y), (-x, y), (x, -y) and (y, x): they
#: depend on x and y through x^2, y^2 and hypot(x, y) only (tests/test_flood.py checks it).
#: Exact types: a subclass may compute its field otherwise.
MIRROR_SYMMETRIC = (CoilSet, IdealQuadrupole)


def longitudinal_acceptance(trap: Trap, deceleration: float = 0.0, samples: int = 2001) -> Separatrix:
    """Separatrix of ``U_eff`` on the trap's axis, the well taken near the box's middle."""
    a = as_scalar(deceleration, "deceleration", "m/s^2")
    return TrapSampler(trap, samples).longitudinal(a)


def transverse_acceptance(
    trap: Trap,
    deceleration: float = 0.0,
    samples: int = 2001,
    *,
    z: float | None = None,
    max_energy: float | None = None,
) -> Separatrix:
    """Transverse acceptance: the separatrix of ``U_eff`` along x through ``(x_mid, y_mid, z)``.

    By default ``z`` is the bottom of the tilted axis well and the orbit energy is capped
    at the 3-D escape energy, as in :func:`trap_acceptance` (whose ``transverse`` this
    returns). Giving ``z`` [m] or ``max_energy`` [J] returns that raw radial cut instead,
    capped only at ``max_energy``. Unbound when the axis has no well.
    """
    a = as_scalar(deceleration, "deceleration", "m/s^2")
    if z is None and max_energy is None:
        return trap_acceptance(trap, a, samples=samples, include_6d=False).transverse
    sampler = TrapSampler(trap, samples)
    if z is None:
        axis = sampler.longitudinal(a)
        if not axis.bound:
            return axis
        z = axis.z_bottom
    if max_energy is not None:
        max_energy = as_scalar(max_energy, "max_energy", "J")
    return sampler.transverse(as_scalar(z, "z", "m"), a, max_energy)


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
    energetic : EnergeticAcceptance or None
        The 6-D grid result behind ``volume`` (its well region, for counting particles);
        None when not computed or unbound.
    """

    deceleration: float
    longitudinal: Separatrix
    transverse: Separatrix
    escape_energy: float
    volume: float
    energetic: EnergeticAcceptance | None = None

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
        return html_table("Trap acceptance", rows)


def trap_acceptance(
    trap: Trap,
    deceleration: float = 0.0,
    *,
    samples: int = 2001,
    include_6d: bool = True,
    rtol: float = 1e-2,
) -> TrapAcceptance:
    """Longitudinal, transverse and (optionally) 6-D acceptance at one deceleration.

    The 3-D escape energy caps the transverse orbit. With ``include_6d`` it comes from
    the energetic 6-D grid; without, a coarse grid checks whether an exit lies clearly
    below the 1-D barriers (else the lower of the axis and radial barriers is used).
    """
    a = as_scalar(deceleration, "deceleration", "m/s^2")
    six = as_boolean(include_6d, "include_6d")
    return acceptances_at(TrapSampler(trap, samples), np.array([a]), include_6d=six, rtol=rtol)[0]


def acceptances_at(
    sampler: TrapSampler, decelerations: ArrayLike, *, include_6d: bool = False, rtol: float = 1e-2
) -> list[TrapAcceptance]:
    """:func:`trap_acceptance` at each of many decelerations, on one trap's samples.

    Parameters
    ----------
    sampler : TrapSampler
        The trap, sampled once; its cuts (and the wells it has seen) are reused, so a
        sampler kept between calls makes each new deceleration cheap.
    decelerations : array_like, shape (n,)
        Decelerations [m/s^2].
    include_6d : bool
        Compute the energetic 6-D acceptance at each bound deceleration (slow: a 3-D grid
        each); without it, all 3-D exits are checked on one shared coarse grid (one
        compiled fill from the bottom per deceleration) and ``volume`` is NaN.
    rtol : float
        Relative accuracy of the 6-D volume, in [1e-4, 0.5] (checked where it is used,
        by :func:`tiltwell.wells.energetic.energetic_acceptance`).

    Returns
    -------
    list of TrapAcceptance
        One per deceleration, in order; equal to :func:`trap_acceptance` of the sampler's
        trap at each (with the sampler's number of samples).

    Examples
    --------
    Deeper tilts lower the front barrier, so the longitudinal acceptance falls:

    >>> import tiltwell as tw
    >>> trap = tw.Trap(tw.IdealQuadrupole(250.0, 1.0), tw.species("OH"), ((-4e-3, 4e-3),) * 2 + ((-4e-3, 4e-3),))
    >>> sampler = TrapSampler(trap, 1001)
    >>> slow, fast = acceptances_at(sampler, [0.0, 0.5 * trap.critical_deceleration(1001)])
    >>> slow.longitudinal.area > fast.longitudinal.area > 0.0
    True
    """
    values = as_finite_array(decelerations, "decelerations", "m/s^2", ndim=1)
    trap = sampler.trap
    axes = [sampler.longitudinal(a) for a in values]
    sampler.prefetch_radial([axis.z_bottom for axis in axes if axis.bound])
    # Capped at the axis barrier, the radial orbit's energy is min(axis, radial barrier):
    # the 1-D bound on the 3-D escape energy, and usually the answer itself.
    radials = [sampler.transverse(ax.z_bottom, a, ax.escape_energy) if ax.bound else ax for a, ax in zip(values, axes)]
    caps = np.array([r.escape_energy if r.bound else ax.escape_energy for r, ax in zip(radials, axes)])
    volumes = np.full(values.size, 0.0 if include_6d else np.nan)
    escapes = caps.copy()
    grids: list[EnergeticAcceptance | None] = [None] * values.size
    bound = np.array([ax.bound for ax in axes], dtype=bool)
    if include_6d:
        for k in np.flatnonzero(bound):
            six = energetic_acceptance(
                trap.tilted(float(values[k])), trap.mass, trap.bounds,
                rtol=rtol, near=(sampler.centre[0], sampler.centre[1], axes[k].z_bottom), known_escape=caps[k],
                mirror_xy=sampler.mirror_xy,
            )
            volumes[k], escapes[k], grids[k] = six.volume, six.escape_energy, six
    elif bound.any():
        escapes[bound] = sampler.escapes(values[bound], [axes[k] for k in np.flatnonzero(bound)], caps[bound])
    results = []
    for i, (a, axis, radial) in enumerate(zip(values, axes, radials)):
        if axis.bound and escapes[i] != caps[i]:
            radial = sampler.transverse(axis.z_bottom, a, escapes[i])
        escape = float(escapes[i]) if axis.bound else float("nan")
        results.append(
            TrapAcceptance(float(a), axis, radial if axis.bound else axis, escape, float(volumes[i]), grids[i])
        )
    return results


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
    results = acceptances_at(TrapSampler(trap, samples), values, include_6d=as_boolean(include_6d, "include_6d"),
                             rtol=rtol)
    return AcceptanceCurve(
        decelerations=values,
        longitudinal=np.array([r.longitudinal.area for r in results]),
        transverse=np.array([r.transverse.area for r in results]),
        volume=np.array([r.volume for r in results]),
        escape_energy=np.array([r.escape_energy for r in results]),
        depth=np.array([r.longitudinal.depth for r in results]),
        critical_deceleration=trap.critical_deceleration(samples),
    )


class TrapSampler:
    """The untilted potential of one trap, sampled once and reused for every deceleration
    (the tilt only adds ``-m a z``): the axis, radial cuts by height, a coarse 3-D grid.

    Parameters
    ----------
    trap : Trap
        The trap; its box gives the sampled ranges.
    samples : int
        Samples of each 1-D cut (>= 3): the axis along z through the box's middle in x
        and y, and radial cuts along x at given heights z.

    Attributes
    ----------
    trap : Trap
    mass : float
        The species' mass [kg].
    centre : tuple of float
        The box's middle (x, y, z) [m].
    z, x : ndarray, shape (samples,)
        Sample positions [m] of the axis and of the radial cuts.
    axis : ndarray, shape (samples,)
        The untilted potential on the axis [J].

    Notes
    -----
    The sampler remembers every axis well and radial cut it has computed (keyed by the
    deceleration and the height): a long-lived sampler grows with the number of distinct
    decelerations asked of it. Use it from one thread at a time.
    """

    def __init__(self, trap: Trap, samples: int) -> None:
        if not isinstance(trap, Trap):
            raise TiltwellError(f"trap must be a tiltwell.Trap; got {type(trap).__name__}")
        (x0, x1), (y0, y1), (z0, z1) = trap.bounds
        self.trap = trap
        self.mass = trap.mass
        self.centre = (0.5 * (x0 + x1), 0.5 * (y0 + y1), 0.5 * (z0 + z1))
        self.z = np.linspace(z0, z1, as_integer(samples, "samples", 3, MAX_SAMPLES))
        self.x = np.linspace(x0, x1, self.z.size)
        self.axis = trap.potential(self.centre[0], self.centre[1], self.z)
        self.radial: dict[float, FloatArray] = {}
        self.axis_wells: dict[float, Separatrix] = {}
        self.grid: LazyGrid | None = None
        #: Mirror-image grid nodes share one evaluation (see :data:`MIRROR_SYMMETRIC`).
        self.mirror_xy = type(trap.source) in MIRROR_SYMMETRIC

    def longitudinal(self, a: float) -> Separatrix:
        """Separatrix of the tilted axis potential at deceleration ``a`` [m/s^2] (the well
        near the box's middle), computed once per deceleration."""
        if a not in self.axis_wells:
            self.axis_wells[a] = separatrix(self.z, self.axis - self.mass * a * self.z, self.mass, near=self.centre[2])
        return self.axis_wells[a]

    def prefetch_radial(self, heights: list[float]) -> None:
        """Sample the radial cuts at all new ``heights`` [m] in one field evaluation."""
        new = sorted({h for h in heights if np.isfinite(h) and h not in self.radial})
        if new:
            values = self.trap.potential(self.x[None, :], self.centre[1], np.array(new)[:, None])
            self.radial.update(zip(new, values))

    def transverse(self, z: float, a: float, max_energy: float | None = None) -> Separatrix:
        """Separatrix of the radial cut along x at height ``z`` [m] at deceleration ``a``
        [m/s^2], its energy capped at ``max_energy`` [J] when given."""
        self.prefetch_radial([z])
        cut = self.radial[z] - self.mass * a * z
        return separatrix(self.x, cut, self.mass, near=self.centre[0], max_energy=max_energy)

    def escapes(self, decelerations: FloatArray, axes: list[Separatrix], caps: FloatArray) -> FloatArray:
        """3-D escape energies [J]: each ``cap`` unless a coarse grid shows an exit
        clearly below it.

        For each deceleration a compiled fill from the node nearest the axis bottom over
        ``{U_eff <= cap - KNOWN_ESCAPE_SLACK * depth}`` asks whether it reaches a wall (all
        decelerations in one call); only where one does, a priority flood finds the
        grid's escape level. The untilted grid is shared by all decelerations and
        computed block by block where the fills reach (``U_eff = U - m a z`` is applied
        inside the kernels).
        """
        if self.grid is None:
            axes3 = [np.linspace(low, high, _CHECK_GRID) for low, high in self.trap.bounds]
            self.grid = LazyGrid(self.trap.potential, axes3, mirror_xy=self.mirror_xy)
        grid = self.grid
        result = np.array(caps, dtype=np.float64)
        tilts = (self.mass * np.asarray(decelerations, dtype=np.float64))[:, None] * grid.axes[2]
        bottoms = np.array([axis.z_bottom for axis in axes]).reshape(-1, 1)
        k = np.argmin(np.abs(grid.axes[2] - bottoms), axis=1)
        ix, iy = (int(np.argmin(np.abs(ax - c))) for ax, c in zip(grid.axes[:2], self.centre[:2]))
        starts = np.ravel_multi_index((np.full_like(k, ix), np.full_like(k, iy), k), grid.shape)
        floors = np.array([axis.escape_energy - axis.depth for axis in axes])
        thresholds = result - KNOWN_ESCAPE_SLACK * (result - floors)
        for i in np.flatnonzero(run_fills(grid, starts, thresholds, tilts)):
            level = run_flood(grid, int(starts[i]), tilt=tilts[i]).wall_level
            assert level is not None  # the fill reached a wall, so the flood does
            result[i] = min(result[i], level)
        return result
