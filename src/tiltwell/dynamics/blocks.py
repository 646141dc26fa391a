"""The compiled route of :func:`tiltwell.track`: the working set of one chunk of particles
stepped by :mod:`tiltwell.dynamics.compiled`, many steps per call.

Which route runs. :func:`block_stepper` gives a :class:`BlockStepper` (compiled) when the
force has a compiled form (:meth:`~tiltwell.dynamics.kernels.QuadrupoleKernel.compiled`: an
exact :class:`~tiltwell.physics.fields.IdealQuadrupole` with a linear or Breit–Rabi Zeeman
state; :meth:`~tiltwell.dynamics.kernels.MapKernel.compiled`: any ``field_map``) and, with
the spin-flip check on, when that check reads the field of an ideal quadrupole (the source
itself, or the ``near_zero`` quadrupole of a |B| table); else None, and ``track`` runs its
numpy stepper (any other source through ``Trap.force``, other Zeeman models, the spin-flip
check on a field grid or on ``source.field``). Setting :data:`ENABLED` to False forces the
numpy route everywhere (the tests' reference).

Threads. A call steps every block through :data:`CALL_WORK` particle-steps' worth of steps
(at least :data:`MIN_CALL_STEPS`), so a parallel region always covers many steps. It runs on
``numba.get_num_threads()`` threads (``numba.set_num_threads`` chooses; one thread: the
serial kernel) when called from the main thread of the process that imported this module;
from another thread, or in a process forked from it (GNU OpenMP is not fork-safe), on one.
The result does not depend on the thread count: every particle is stepped on its own.
Between calls the progress bar advances and the particles that left are dropped from the
working set once they are :data:`~tiltwell.dynamics.kernels.COMPACT_FRACTION` of it.
"""

from __future__ import annotations

import math
import os
import threading
from typing import Any

import numba
import numpy as np
from numpy.typing import NDArray

from ..physics.fields import IdealQuadrupole
from ..wells.traps import Trap
from . import compiled
from .fieldmap import FieldMap
from .integrators import SplittingScheme
from .kernels import COMPACT_FRACTION, CompiledForce, ForceKernel, force_kernel
from .spinflip import SpinFlipCheck, flip_quadrupole

__all__ = ["CALL_WORK", "ENABLED", "MIN_CALL_STEPS", "BlockStepper", "block_stepper", "route"]

FloatArray = NDArray[np.float64]

#: Use the compiled route where it exists (False: numpy everywhere, for reference runs).
ENABLED = True
#: Particle-steps per compiled call (about 10 ms at 4e8/s): the progress bar's grain.
CALL_WORK = 1 << 22
#: Fewest steps per compiled call, so that each parallel region covers many steps.
MIN_CALL_STEPS = 16
_HOME = os.getpid()  #: the process whose main thread may start threads


class BlockStepper:
    """Steps one chunk of particles on the compiled route (same interface as ``track``'s
    numpy stepper: :meth:`run`).

    Parameters
    ----------
    force : CompiledForce
        The same force for the compiled kernels.
    scheme : SplittingScheme
        The splitting.
    dt : float
        The step [s].
    tilts, scales : ndarray, shape (steps s + 1,)
        Deceleration [m/s^2] and ramp [1] at every force evaluation.
    walls : ndarray, shape (6,)
        x0, x1, y0, y1, z0, z1 [m].
    flips : SpinFlipCheck, optional
        The spin-flip check (its field an ideal quadrupole's, ``quadrupole``), or None.
    quadrupole : IdealQuadrupole, optional
        The field the check reads.
    """

    def __init__(self, force: CompiledForce, scheme: SplittingScheme, dt: float, tilts: FloatArray,
                 scales: FloatArray, walls: FloatArray, flips: SpinFlipCheck | None = None,
                 quadrupole: IdealQuadrupole | None = None) -> None:
        weights = scheme.merged_kicks((tilts.size - 1) // scheme.evaluations, dt)
        self.force, self.dt, self.back, self.walls = force, dt, scheme.resync, walls
        self.drifts = np.array(scheme.drifts)
        self.coefficients = force.factor(weights * scales)
        self.pushes = weights * tilts
        self.flips = flips
        self.flip, self.flip_scales, self.terms = np.zeros(0), np.zeros(0), np.zeros((0, 3))
        if flips is not None and quadrupole is not None:
            self.flip = np.array([quadrupole.gradient, quadrupole.center, -math.pi * flips.gamma, flips.time_step])
            self.flip_scales = np.array(flips.scales)
            self.terms = survival_terms(flips.spin, flips.projection)

    def run(self, initial: FloatArray, start: int, steps: int, final: FloatArray, lost_step: NDArray[np.int64],
            bar: Any, weights: FloatArray | None = None) -> None:
        """Integrate ``initial`` (n, 6), particles ``start...`` of the whole set, writing
        ``final`` (N, 6) and ``lost_step`` (N,) for them; ``bar`` is a progress bar or None;
        with the spin-flip check on, ``weights`` (N,) gets their survival weights."""
        walls, checking, c, pushes = self.walls, self.flips is not None, self.coefficients, self.pushes
        force = (self.force.kind, self.force.parameters, self.force.counts, self.force.table)
        rows, alive, index = compiled.load(np.ascontiguousarray(initial.T), self.dt, walls, start, c[0], pushes[0],
                                           *force, lost_step)
        living = int(np.count_nonzero(alive))
        fields, survival = np.zeros((2, 3, alive.size if checking else 0)), np.ones(alive.size)
        if self.flips is not None:
            fields[0], survival = self.flips.start(rows[:3])
        out = weights if weights is not None else np.zeros(0)
        step = 0
        while step < steps and living:
            last = min(steps, step + max(MIN_CALL_STEPS, CALL_WORK // living))
            advance = compiled.advance_threads if _threaded(living) else compiled.advance
            advance(rows, alive, fields, survival, index, final, lost_step, out, *force, c, pushes, self.drifts,
                    walls, step, last, self.dt, self.back, self.flip, self.flip_scales, self.terms)
            if bar is not None:
                bar.update(last - step)
            step = last
            living = int(np.count_nonzero(alive))
            if living < (1.0 - COMPACT_FRACTION) * alive.size - compiled.BLOCK:
                keep = alive.astype(bool)
                rows, alive, index = _padded(rows, alive, index, keep=keep)
                if checking:
                    fields, survival = _padded(fields, survival, keep=keep)
        if bar is not None and step < steps:
            bar.update(steps - step)
        compiled.finish(rows, alive, index, final, c[-1], pushes[-1], self.back, self.dt, *force)
        if weights is not None:
            keep = alive.astype(bool)
            weights[index[keep]] = survival[keep]


def _padded(*arrays: Any, keep: NDArray[np.bool_]) -> Any:
    """The particles ``keep`` of ``arrays`` (their last axis the particles), padded with
    zeros to a multiple of :data:`~tiltwell.dynamics.compiled.BLOCK`, contiguous."""
    count = int(np.count_nonzero(keep))
    size = count + (-count % compiled.BLOCK)
    padded = []
    for array in arrays:
        out = np.zeros(array.shape[:-1] + (size,), array.dtype)
        out[..., :count] = np.compress(keep, array, axis=-1)
        padded.append(out)
    return tuple(padded)


def survival_terms(spin: float, projection: float) -> FloatArray:
    """The terms of ``|d^j_mm|^2`` for :mod:`tiltwell.dynamics.compiled`: ``[[2 j, 0, 0]]``
    for the stretched state, else per ``k`` the coefficient ``(-1)^k C(j+m, k) C(j-m, k)``
    and the powers ``j - k`` of ``1 - p`` and ``k`` of ``p`` (the sum of
    :func:`tiltwell.dynamics.spinflip.state_survival`)."""
    if projection == spin:
        return np.array([[2.0 * spin, 0.0, 0.0]])
    up, down = round(spin + projection), round(spin - projection)
    return np.array([[(-1) ** k * math.comb(up, k) * math.comb(down, k), spin - k, k] for k in range(down + 1)],
                    dtype=np.float64)


def _threaded(living: int) -> bool:
    """Whether to use the threaded kernel for ``living`` particles (module notes)."""
    threads = numba.get_num_threads()
    return (threads > 1 and living > compiled.BLOCK * threads and os.getpid() == _HOME
            and threading.current_thread() is threading.main_thread())


def block_stepper(kernel: ForceKernel, trap: Trap, scheme: SplittingScheme, dt: float, tilts: FloatArray,
                  scales: FloatArray, flips: SpinFlipCheck | None) -> BlockStepper | None:
    """The compiled stepper of ``track``'s run, or None where the numpy route must run
    (module notes): ``kernel`` from :func:`~tiltwell.dynamics.kernels.force_kernel`, the
    schedule ``tilts`` [m/s^2] and ``scales`` [1] at every force evaluation, ``flips`` the
    spin-flip check or None."""
    describe = getattr(kernel, "compiled", None)
    force = describe() if ENABLED and describe is not None else None
    if force is None:
        return None
    quadrupole = None
    if flips is not None:
        quadrupole = flip_quadrupole(trap)
        if quadrupole is None:
            return None
    walls = np.array([bound for pair in trap.bounds for bound in pair], dtype=np.float64)
    return BlockStepper(force, scheme, dt, tilts, scales, walls, flips, quadrupole)


def route(trap: Trap, field_map: FieldMap | None = None, spin_flips: object = None) -> str:
    """Which route ``track(trap, ..., field_map=field_map, spin_flips=spin_flips)`` takes:
    ``"compiled"`` or ``"numpy"`` (module notes).

    Examples
    --------
    >>> import tiltwell
    >>> trap = tiltwell.Trap(tiltwell.IdealQuadrupole(20.0), tiltwell.species("Rb-87"),
    ...                      ((-0.01, 0.01),) * 3)
    >>> route(trap), route(trap, spin_flips=True)
    ('compiled', 'compiled')
    """
    describe = getattr(force_kernel(trap, field_map), "compiled", None)
    if not ENABLED or describe is None or describe() is None:
        return "numpy"
    flips = spin_flips is not None and spin_flips is not False
    return "numpy" if flips and flip_quadrupole(trap) is None else "compiled"
