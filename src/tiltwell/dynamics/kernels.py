"""The static trap forces :func:`tiltwell.track` steps with, as accelerations on component rows.

A kernel writes ``scale`` times the trap's acceleration [m/s^2] at positions held as rows
(3, n) [m] into ``out`` (3, n), with no per-call validation: :class:`QuadrupoleKernel`
inlines an :class:`~tiltwell.physics.fields.IdealQuadrupole`, :class:`MapKernel`
interpolates a :class:`~tiltwell.dynamics.fieldmap.FieldMap`, :class:`TrapKernel` calls
``Trap.force`` for any other source. :func:`force_kernel` picks one, by the registry
:data:`SOURCE_KERNELS` of source types that have an inline kernel.

The first two also describe themselves for the compiled route (:meth:`QuadrupoleKernel.compiled`,
:meth:`MapKernel.compiled`: a :class:`CompiledForce` of plain arrays for
:mod:`tiltwell.dynamics.compiled`); a quadrupole with a Zeeman model other than
:class:`~tiltwell.physics.zeeman.LinearZeeman` or :class:`~tiltwell.physics.zeeman.BreitRabi`,
and :class:`TrapKernel`, have none and run on numpy.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Protocol

import numpy as np
from numpy.typing import NDArray

from ..physics.constants import BOHR_MAGNETON
from ..physics.fields import IdealQuadrupole
from ..physics.zeeman import BreitRabi, LinearZeeman
from ..wells.traps import Trap
from . import compiled
from .fieldmap import FieldMap

__all__ = [
    "SOURCE_KERNELS", "CompiledForce", "ForceKernel", "MapKernel", "QuadrupoleKernel", "TrapKernel", "force_kernel",
]

FloatArray = NDArray[np.float64]

#: Below this |B|/B' [m] the quadrupole's cone tip is regularised (force magnitude stays <= the slope).
_TIP = 1e-150
#: Lost particles ride along until they are this fraction of the working set, then are removed.
COMPACT_FRACTION = 0.125


class ForceKernel(Protocol):
    """What :func:`tiltwell.track` calls: ``kernel(positions, out, scratch, scale)``.

    Writes ``scale`` [1] times the static trap acceleration [m/s^2] into ``out``, shape
    (3, n), at ``positions``, shape (3, n) [m] (rows x, y, z; left unchanged); ``scratch``,
    shape (2, n), is free to use. ``compact_fraction`` [1]: how large a share of the
    working set lost particles may reach before the tracker removes them (0: at once).
    """

    compact_fraction: float

    def __call__(self, positions: FloatArray, out: FloatArray, scratch: FloatArray, scale: float) -> None: ...


@dataclass(frozen=True, eq=False)
class CompiledForce:
    """A force kernel as plain arrays for :mod:`tiltwell.dynamics.compiled`.

    ``kind`` is one of the module's force kinds, ``parameters`` and ``counts`` its
    constants, ``table`` the field map's nodes (nx ny nz, 3) flattened (empty for the
    quadrupole); ``factor(pulls)`` turns the kick schedule ``scale`` [s^2] into the
    per-evaluation factor the kernel multiplies by, with the numpy kernel's own arithmetic.
    """

    kind: int
    parameters: FloatArray
    counts: NDArray[np.int64]
    table: FloatArray
    factor: Callable[[FloatArray], FloatArray]


class QuadrupoleKernel:
    """``IdealQuadrupole`` inline: ``-W'(B' s) B' (x/4, y/4, z') / (m s)``, ``s = |B| / B'``.

    The same formula as ``IdealQuadrupole.magnitude_gradient`` (zero where the field is
    capped), without re-validating the positions at every step. ``trap`` gives the mass
    [kg] and the Zeeman state (a linear one is folded into one constant), ``source`` its
    gradient [T/m], centre [m] and cap [T].
    """

    compact_fraction = COMPACT_FRACTION

    def __init__(self, trap: Trap, source: IdealQuadrupole) -> None:
        self.gradient, self.center, self.mass = source.gradient, source.center, trap.mass
        self.cap = source.max_field / source.gradient
        zeeman = trap.species.zeeman
        self.moment = zeeman.moment if type(zeeman) is LinearZeeman else None
        self.zeeman = zeeman

    def __call__(self, positions: FloatArray, out: FloatArray, scratch: FloatArray, scale: float) -> None:
        x, y, z = positions
        size, factor = scratch[0], scratch[1]
        np.multiply(x, x, out=size)
        np.multiply(y, y, out=factor)
        size += factor
        size *= 0.25
        shifted = z
        if self.center != 0.0:
            shifted = np.subtract(z, self.center, out=out[2])
        np.multiply(shifted, shifted, out=factor)
        size += factor
        np.sqrt(size, out=size)
        np.maximum(size, _TIP, out=factor)
        if self.moment is not None:
            np.divide(-scale * self.moment * self.gradient / self.mass, factor, out=factor)
        else:
            slope = np.asarray(self.zeeman.derivative(self.gradient * size))
            np.divide(slope, factor, out=factor)
            factor *= -scale * self.gradient / self.mass
        if math.isfinite(self.cap):
            np.putmask(factor, size > self.cap, 0.0)
        np.multiply(factor, shifted, out=out[2])
        factor *= 0.25
        np.multiply(factor, x, out=out[0])
        np.multiply(factor, y, out=out[1])

    def compiled(self) -> CompiledForce | None:
        """This kernel for the compiled route, or None for a Zeeman model it does not
        compile (only :class:`LinearZeeman` and :class:`BreitRabi`, by exact type).

        The factor is the numerator the numpy kernel forms per call, ``-scale moment B' / m``
        (linear) or ``-scale B' / m`` (Breit–Rabi, times ``W'(|B|)`` per particle); the
        Breit–Rabi constants repeat ``BreitRabi.derivative``'s scalar prefactors."""
        gradient, mass, zeeman = self.gradient, self.mass, self.zeeman
        constants = [0.0] * 7
        if self.moment is not None:
            kind, moment = compiled.QUADRUPOLE_LINEAR, self.moment

            def factor(pulls: FloatArray) -> FloatArray:
                return -pulls * moment * gradient / mass
        elif type(zeeman) is BreitRabi:
            kind = compiled.QUADRUPOLE_BREIT_RABI
            half = 2 * zeeman.mF / (2 * zeeman.nuclear_spin + 1)
            sign = 1.0 if zeeman.F > zeeman.nuclear_spin else -1.0
            constants = [
                (zeeman.g_J - zeeman.g_I) * BOHR_MAGNETON, zeeman.hyperfine_splitting, half, 2 * half,
                sign * (zeeman.g_J - zeeman.g_I) * BOHR_MAGNETON / 2, zeeman.g_I * BOHR_MAGNETON * zeeman.mF,
                math.copysign(1.0, zeeman.mF) if abs(zeeman.mF) == zeeman.nuclear_spin + 0.5 else 0.0,
            ]

            def factor(pulls: FloatArray) -> FloatArray:
                return -pulls * gradient / mass
        else:
            return None
        parameters = np.array([gradient, self.center, self.cap, _TIP, *constants])
        return CompiledForce(kind, parameters, np.zeros(3, dtype=np.int64), np.zeros(0), factor)


class MapKernel:
    """A :class:`FieldMap`'s interpolated force [N] divided by the ``mass`` [kg]."""

    compact_fraction = COMPACT_FRACTION

    def __init__(self, field_map: FieldMap, mass: float) -> None:
        self.field_map, self.mass = field_map, mass

    def __call__(self, positions: FloatArray, out: FloatArray, scratch: FloatArray, scale: float) -> None:
        self.field_map.interpolate_rows(positions, out, scale / self.mass)

    def compiled(self) -> CompiledForce:
        """This kernel for the compiled route: the grid's lower corner [m] and inverse
        spacings [1/m] as :meth:`FieldMap.interpolate_rows` forms them, the node counts and
        the nodes' forces [N]; the factor ``scale / m``."""
        field_map, mass = self.field_map, self.mass
        low = np.array([low for low, _ in field_map.bounds])
        inverse = 1.0 / np.array(field_map.spacing)
        counts = np.array(field_map.shape, dtype=np.int64)

        def factor(pulls: FloatArray) -> FloatArray:
            return pulls / mass
        return CompiledForce(compiled.FIELD_MAP, np.concatenate([low, inverse]), counts,
                             field_map.forces.ravel().copy(), factor)


class TrapKernel:
    """Any source, through ``Trap.force`` (lost particles are removed at once: outside the
    box a coil source may be singular)."""

    compact_fraction = 0.0

    def __init__(self, trap: Trap) -> None:
        self.trap = trap

    def __call__(self, positions: FloatArray, out: FloatArray, scratch: FloatArray, scale: float) -> None:
        np.multiply(self.trap.force(positions.T, 0.0).T, scale / self.trap.mass, out=out)


#: Source types with an inline kernel, by exact type (a subclass may change the field):
#: each entry builds the kernel from the trap.
SOURCE_KERNELS: dict[type, Callable[[Trap], ForceKernel]] = {
    IdealQuadrupole: lambda trap: QuadrupoleKernel(trap, trap.source),  # type: ignore[arg-type]
}


def force_kernel(trap: Trap, field_map: FieldMap | None = None) -> ForceKernel:
    """The kernel of ``trap``'s force: the ``field_map`` when given (checked by the caller to
    cover the box), else the inline kernel of the source's type from :data:`SOURCE_KERNELS`,
    else ``Trap.force`` (:class:`TrapKernel`)."""
    if field_map is not None:
        return MapKernel(field_map, trap.mass)
    build = SOURCE_KERNELS.get(type(trap.source))
    return TrapKernel(trap) if build is None else build(trap)
