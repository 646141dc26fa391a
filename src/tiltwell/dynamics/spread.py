"""Large clouds beyond one process: a beam tracked in seeded chunks through any executor.

:func:`track_beam` draws ``particles`` from a :class:`~tiltwell.physics.beam.Beam` in
chunks of ``chunk`` and tracks each chunk with :func:`tiltwell.track`, the chunks sent
through ``executor.map`` (a ``concurrent.futures`` pool, or a Dask cluster's
``Client.get_executor()``). Chunk ``k`` draws its particles from its own generator,
``numpy.random.default_rng(SeedSequence(seed).spawn(count)[k])`` (numpy's recommended way
to make independent streams for parallel work), so the result depends on ``seed`` and
``chunk`` only: not on the executor, the number of workers or the order the chunks finish.
Only counts come back from the workers (kept particles, the survival curve, the no-flip
weights summed), never the particles, so memory stays at one chunk per worker.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from concurrent.futures import Executor
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .._base.display import html_table
from .._base.validation import TiltwellError, as_integer, as_scalar
from ..physics.beam import Beam
from ..wells.traps import Trap
from .tracking import track

__all__ = ["BeamTracking", "chunk_seeds", "track_beam"]

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class BeamTracking:
    """What :func:`track_beam` keeps of a cloud tracked in chunks.

    Attributes
    ----------
    particles, kept : int
        Particles tracked and kept (inside the box at the end).
    times : ndarray
        Times [s] of ``survival``, shape (K,).
    survival : ndarray
        Fraction still inside the box at ``times``, shape (K,).
    kept_after_flips : float
        Fraction kept and not flipped (the mean of the kept no-flip weights over all
        particles); ``kept / particles`` with the spin-flip check off.
    chunks : int
        Number of chunks.
    """

    particles: int
    kept: int
    times: FloatArray
    survival: FloatArray
    kept_after_flips: float
    chunks: int

    @property
    def fraction(self) -> float:
        """``kept / particles``."""
        return self.kept / self.particles

    @property
    def binomial_error(self) -> float:
        """Standard error ``sqrt(p (1 - p) / N)`` of :attr:`fraction`."""
        p = self.fraction
        return math.sqrt(p * (1.0 - p) / self.particles)

    def _repr_html_(self) -> str:
        rows = [("kept", f"{self.fraction:.4g} ± {self.binomial_error:.2g}"),
                ("particles, chunks", f"{self.particles}, {self.chunks}")]
        return html_table("Beam tracked in chunks", rows)


def chunk_seeds(seed: int, count: int) -> list[np.random.SeedSequence]:
    """The ``count`` independent seed sequences of :func:`track_beam`'s chunks."""
    return list(np.random.SeedSequence(as_integer(seed, "seed", 0)).spawn(as_integer(count, "count", 1)))


def _one_chunk(task: tuple[Trap, Beam, int, np.random.SeedSequence, float, float, dict[str, Any]]
               ) -> tuple[int, int, FloatArray, FloatArray, float]:
    """Track one chunk; a top-level function so process and cluster executors can send it."""
    trap, beam, size, sequence, duration, time_step, options = task
    particles = beam.from_normals(np.random.default_rng(sequence).standard_normal((size, 6)))
    particles[:, 5] -= options.pop("mismatch")
    result = track(trap, particles, duration, time_step, **options)
    weights = result.survival_weights
    flips = float(np.count_nonzero(result.kept)) if weights is None else float(np.sum(weights[result.kept]))
    return size, int(np.count_nonzero(result.kept)), result.times, result.survival, flips


def track_beam(trap: Trap, beam: Beam, particles: int, duration: float, time_step: float, *,
               chunk: int = 100_000, seed: int = 0, executor: Executor | None = None, mismatch: float = 0.0,
               **options: Any) -> BeamTracking:
    """Track ``particles`` of ``beam`` in ``trap``, chunk by chunk, through ``executor``.

    Parameters
    ----------
    trap : Trap
    beam : Beam
        The beam at switch-on; particles are drawn relative to the trap centre.
    particles : int
        How many, >= 1.
    duration, time_step : float
        As for :func:`tiltwell.track` [s].
    chunk : int
        Particles per chunk, >= 1 (the last may be smaller). The result depends on it
        (each chunk has its own random stream), not on how the chunks are spread.
    seed : int
        Root seed, >= 0 (:func:`chunk_seeds`).
    executor : concurrent.futures.Executor, optional
        Where the chunks run; default this process, one after another. Everything sent
        must pickle for a process or cluster executor (traps, beams and field maps do).
    mismatch : float
        Trap velocity minus the beam's mean velocity [m/s], taken off each particle's vz.
    **options
        Passed to :func:`tiltwell.track` (``deceleration``, ``method``, ``field_map``,
        ``spin_flips``, ...; not ``ramp`` for another process: a lambda does not pickle).

    Returns
    -------
    BeamTracking
    """
    total = as_integer(particles, "particles", 1)
    size = as_integer(chunk, "chunk", 1)
    mismatch = as_scalar(mismatch, "mismatch", "m/s")
    if "progress" in options or "chunk" in options:
        raise TiltwellError("track_beam sets progress and chunk itself; do not pass them in options")
    sizes = [min(size, total - start) for start in range(0, total, size)]
    sequences = chunk_seeds(seed, len(sizes))
    tasks = [(trap, beam, n, sequence, duration, time_step, {**options, "mismatch": mismatch})
             for n, sequence in zip(sizes, sequences)]
    mapped: Iterable[Any] = executor.map(_one_chunk, tasks) if executor is not None else map(_one_chunk, tasks)
    done = list(mapped)
    times = done[0][2]
    survival = sum(n * curve for n, _, _, curve, _ in done) / total
    return BeamTracking(total, sum(k for _, k, _, _, _ in done), times, np.asarray(survival, dtype=np.float64),
                        sum(w for *_, w in done) / total, len(done))
