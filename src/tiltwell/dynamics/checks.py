"""The input checks both trackers share: particle arrays, the step count and its limit,
the progress flag and its bar.

:func:`tiltwell.track` (trap frame) and :func:`tiltwell.track_device` (lab frame, coil row)
validate these inputs here, once, so their messages and limits are the same.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.validation import TiltwellError, as_finite_array, as_scalar

__all__ = ["MAX_STEPS", "check_flag", "check_particles", "fixed_steps", "progress_bar"]

FloatArray = NDArray[np.float64]

#: Most time steps one tracking call may take. Both trackers tabulate a schedule per force
#: evaluation (``track``: kick weights and forces, ``track_device``: trap position and the
#: active coils' currents), about 100 bytes each, so 1e7 steps keep those tables near 1 GB
#: for Verlet; a run of 1e5 particles over that many steps would take days, so a larger
#: count means a mistaken ``time_step``. (This was ``track``'s limit; ``track_device`` had 2e6.)
MAX_STEPS = 10_000_000
#: Relative slack of ``ceil(duration / time_step)``, so that a step dividing the duration up
#: to rounding is used as given.
_STEP_ROUNDING = 1e-12


def check_particles(particles: ArrayLike) -> FloatArray:
    """Particles as a float array of shape (N, 6), N >= 1, all finite.

    Parameters
    ----------
    particles : array_like, shape (N, 6)
        (x, y, z, vx, vy, vz) [m, m/s].

    Returns
    -------
    ndarray, shape (N, 6)
        A float64 array (a copy where the input is not one already).

    Examples
    --------
    >>> check_particles([[0.0, 0.0, 1e-3, 0.0, 0.0, 2.0]]).shape
    (1, 6)
    """
    state = as_finite_array(particles, "particles", "m, m/s")
    if state.ndim != 2 or state.shape[1] != 6 or state.shape[0] < 1:
        raise TiltwellError(f"particles [m, m/s] must have shape (N, 6) with N >= 1; got shape {state.shape}")
    return state


def fixed_steps(duration: float, time_step: float) -> tuple[float, int, float]:
    """The fixed steps of a run: ``duration`` [s] > 0 cut into steps no longer than ``time_step``.

    Parameters
    ----------
    duration : float
        Tracking time [s], > 0.
    time_step : float
        Largest step [s], in (0, duration].

    Returns
    -------
    duration : float
        The checked duration [s].
    steps : int
        ``ceil(duration / time_step)`` (a step that divides the duration to 1e-12 is kept),
        at most :data:`MAX_STEPS`.
    step : float
        The step used [s], ``duration / steps``.

    Examples
    --------
    >>> fixed_steps(1e-3, 3e-5)[1]
    34
    """
    total = as_scalar(duration, "duration", "s", low=0.0, low_open=True)
    largest = as_scalar(time_step, "time_step", "s", low=0.0, low_open=True, high=total)
    steps = math.ceil(total / largest * (1.0 - _STEP_ROUNDING))
    if steps > MAX_STEPS:
        raise TiltwellError(f"duration / time_step must be at most {MAX_STEPS:g} steps; got {steps:g}",
                            argument="time_step")
    return total, steps, total / steps


def check_flag(value: object, name: str) -> bool:
    """``value`` as a bool; raise unless it is True or False (numpy's too)."""
    if not isinstance(value, (bool, np.bool_)):
        raise TiltwellError(f"{name} must be True or False; got {value!r}")
    return bool(value)


@contextmanager
def progress_bar(shown: bool, total: int, unit: str = "step") -> Iterator[Any]:
    """A tqdm progress bar over ``total`` units while the block runs, or None if not ``shown``.

    tqdm is imported only when a bar is asked for (no display code otherwise); the bar is
    closed when the block ends, also on errors. Callers call ``bar.update(n)`` when not None.
    """
    if not shown:
        yield None
        return
    try:
        from tqdm.auto import tqdm
    except ImportError:
        raise TiltwellError("progress=True needs the tqdm package (pip install tqdm); got progress=True") from None
    bar = tqdm(total=total, desc="tracking", unit=unit)
    try:
        yield bar
    finally:
        bar.close()
