"""The compiled route of ``track`` against its numpy route, case by case.

Reference: the numpy stepper of ``tiltwell.dynamics.tracking`` (whole-array numpy
operations, kept as the reference; it is itself checked against closed forms and the
``Trap.force`` route in ``tests/test_tracking.py`` and against the Landau–Zener formula in
``tests/test_spinflip.py``). Both routes do the same IEEE operations in the same order and
the compiled one runs without fastmath, so the trajectories must agree bit for bit: every
array of the result (``final``, ``kept``, ``lost_time``, ``survival``, ``times``) is
compared with ``np.array_equal``. The spin-flip weights go through ``exp`` and ``log1p`` of
libm on one side and numpy's on the other, so they are compared to 1e-12 relative.

Traps and particles are invented.
"""

from __future__ import annotations

import math
import threading
from collections.abc import Iterator

import numba
import numpy as np
import pytest
from numpy.typing import ArrayLike, NDArray
from scipy import constants

from tiltwell import BreitRabi, IdealQuadrupole, LinearZeeman, Species, TabulatedZeeman, Trap, anti_helmholtz, species
from tiltwell.dynamics import blocks
from tiltwell.dynamics.results import TrackingResult
from tiltwell.dynamics.spinflip import SpinFlips
from tiltwell.dynamics.tracking import FieldMap, track

from conftest import AMU, MU_B, WrappedSource

ARRAYS = ("final", "kept", "lost_time", "survival", "times")
LIGHT = Species("light", 7 * AMU, LinearZeeman(MU_B))  # a 7 u particle of one Bohr magneton
#: Breit–Rabi states of an invented I = 3/2 atom (splitting h x 2 GHz): F=2, mF=1 (the root
#: form), F=2, mF=2 (stretched: the constant slope) and F=1, mF=-1 (the lower level; with
#: h x 20 GHz, so that it stays low-field seeking up to the cap).
HYPERFINE = {
    "2,1": Species("test-21", 7 * AMU, BreitRabi(1.5, constants.h * 2e9, F=2, mF=1)),
    "2,2": Species("test-22", 7 * AMU, BreitRabi(1.5, constants.h * 2e9, F=2, mF=2)),
    "1,-1": Species("test-1-1", 7 * AMU, BreitRabi(1.5, constants.h * 2e10, F=1, mF=-1)),
}
GRADIENT = 50.0  # [T/m]
BOX = ((-0.012, 0.012), (-0.012, 0.012), (-0.006, 0.006))


@pytest.fixture
def numpy_route(monkeypatch: pytest.MonkeyPatch) -> Iterator[None]:
    """Within the test, ``track`` runs its numpy route (the reference)."""
    monkeypatch.setattr(blocks, "ENABLED", False)
    yield


def both(trap: Trap, particles: ArrayLike, duration: float, step: float, **options: object) -> tuple[
        TrackingResult, TrackingResult]:
    """(compiled, numpy) results of the same call."""
    fast = track(trap, particles, duration, step, **options)  # type: ignore[arg-type]
    blocks.ENABLED = False
    try:
        reference = track(trap, particles, duration, step, **options)  # type: ignore[arg-type]
    finally:
        blocks.ENABLED = True
    return fast, reference


def assert_same(fast: TrackingResult, reference: TrackingResult) -> None:
    for name in ARRAYS:
        assert np.array_equal(getattr(fast, name), getattr(reference, name)), name
    assert fast.time_step == reference.time_step and fast.method == reference.method
    if reference.survival_weights is None:
        assert fast.survival_weights is None
    else:
        assert fast.survival_weights is not None
        np.testing.assert_allclose(fast.survival_weights, reference.survival_weights, rtol=1e-12, atol=1e-15)


def beam(count: int, seed: int, sigma_r: float = 2e-3, sigma_v: float = 6.0) -> NDArray[np.float64]:
    rng = np.random.default_rng(seed)
    return np.hstack([rng.normal(0.0, sigma_r, (count, 3)), rng.normal(0.0, sigma_v, (count, 3))])


def quadrupole_trap(chosen: Species = LIGHT, cap: float = 0.2) -> Trap:
    return Trap(IdealQuadrupole(GRADIENT, cap), chosen, BOX)


# --- the ideal quadrupole ------------------------------------------------------------------


@pytest.mark.parametrize("method", ["verlet", "yoshida4"])
@pytest.mark.parametrize("cap", [0.2, math.inf], ids=["capped", "uncapped"])
@pytest.mark.parametrize("state", ["linear", *HYPERFINE])
def test_quadrupole_equals_numpy(method: str, cap: float, state: str) -> None:
    """Linear and Breit–Rabi states, capped and uncapped, both schemes, decelerating: bit
    for bit the numpy route, with some particles lost along the way and some kept."""
    chosen = LIGHT if state == "linear" else HYPERFINE[state]
    trap = quadrupole_trap(chosen, cap)
    assert blocks.route(trap) == "compiled"
    fast, reference = both(trap, beam(300, seed=1, sigma_v=10.0), 2e-3, 1e-5, method=method, deceleration=2e3)
    assert 0.05 < reference.fraction < 0.95
    assert_same(fast, reference)


def test_off_centre_quadrupole_and_ramp() -> None:
    """A quadrupole whose zero sits off the box centre, a switch-on ramp s(t) and a
    time-dependent deceleration a(t), with Yoshida's negative middle drift."""
    trap = Trap(IdealQuadrupole(GRADIENT, 0.3, center=1e-3), LIGHT, BOX)
    ramp = lambda t: min(max(t / 5e-4, 0.0), 1.0)  # noqa: E731
    fast, reference = both(trap, beam(200, seed=2), 1.5e-3, 1e-5, method="yoshida4", ramp=ramp,
                           deceleration=lambda t: 1e3 + 1e6 * t)
    assert 0.05 < reference.fraction < 0.95
    assert_same(fast, reference)


@pytest.mark.parametrize("method", ["verlet", "yoshida4"])
def test_losses_at_each_wall(method: str) -> None:
    """Particles fired from near the centre at each of the six walls at 60 m/s (far above
    the depth), one started outside and two at rest near the bottom: the same step of loss
    and the same frozen state for each, just beyond its wall."""
    starts = [[0.0, 0.0, 1e-4, 0.0, 0.0, 0.0], [1e-4, 0.0, 0.0, 0.0, 0.0, 0.0], [0.0, 0.0, 0.02, 0.0, 0.0, 0.0]]
    for axis in range(3):
        for sign in (-1.0, 1.0):
            start = [1e-4, -2e-4, 3e-4, 0.0, 0.0, 0.0]
            start[3 + axis] = 60.0 * sign
            starts.append(start)
    trap = quadrupole_trap()
    fast, reference = both(trap, starts, 1e-3, 1e-5, method=method)
    assert_same(fast, reference)
    assert fast.kept.tolist() == [True, True] + [False] * 7
    assert fast.lost_time[2] == 0.0 and np.all(np.isfinite(fast.lost_time[3:]))
    for k, row in enumerate(fast.final[3:]):
        axis, wall = k // 2, trap.bounds[k // 2][k % 2]
        assert (row[axis] - wall) * (1 if k % 2 else -1) >= 0.0  # beyond the wall it was fired at


@pytest.mark.parametrize("chunk", [1, 7, 33, 1000])
def test_chunks_blocks_and_calls_do_not_change_results(chunk: int, monkeypatch: pytest.MonkeyPatch) -> None:
    """Chunks of particles of any size (blocks part-filled, padding), one step per compiled
    call (compaction between calls as particles leave): the same as the numpy route."""
    monkeypatch.setattr(blocks, "CALL_WORK", 1)
    monkeypatch.setattr(blocks, "MIN_CALL_STEPS", 1)
    trap = quadrupole_trap()
    fast, reference = both(trap, beam(100, seed=3, sigma_v=10.0), 1e-3, 1e-5, chunk=chunk, deceleration=3e3)
    assert 0.05 < reference.fraction < 0.95
    assert_same(fast, reference)


def test_threads_and_worker_threads_give_the_same_numbers() -> None:
    """One thread, two threads (numba.set_num_threads), and a call from a worker thread
    (which runs the serial kernel): identical results, equal to the numpy route."""
    trap = quadrupole_trap()
    particles = beam(3000, seed=4)
    threads = numba.get_num_threads()
    results = []
    try:
        for count in sorted({1, min(2, numba.config.NUMBA_NUM_THREADS)}):  # type: ignore[attr-defined]
            numba.set_num_threads(count)
            results.append(track(trap, particles, 5e-4, 1e-5, deceleration=2e3))
    finally:
        numba.set_num_threads(threads)
    box: list[TrackingResult] = []
    worker = threading.Thread(target=lambda: box.append(track(trap, particles, 5e-4, 1e-5, deceleration=2e3)))
    worker.start()
    worker.join()
    blocks.ENABLED = False
    try:
        reference = track(trap, particles, 5e-4, 1e-5, deceleration=2e3)
    finally:
        blocks.ENABLED = True
    for result in [*results, *box]:
        assert_same(result, reference)


def test_progress_bar_counts_every_step(capsys: pytest.CaptureFixture[str]) -> None:
    """progress=True: the bar advances between compiled calls to chunks x steps in all, and
    the numbers are the numpy route's."""
    trap = quadrupole_trap()
    fast, reference = both(trap, beam(50, seed=6), 4e-4, 1e-5, chunk=20, progress=True, deceleration=2e3)
    assert_same(fast, reference)
    assert "120/120" in capsys.readouterr().err


# --- field maps ------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def coil_trap() -> tuple[Trap, FieldMap]:
    """The small anti-Helmholtz pair of the benchmarks (Rb-87) and its map, built as
    ``capture`` builds it (``FieldMap.from_trap(trap)``, 41^3 nodes)."""
    trap = Trap(anti_helmholtz(0.01, 0.012, 40.0, turns=50, width=2e-3, height=2e-3), species("Rb-87"),
                ((-6e-3, 6e-3), (-6e-3, 6e-3), (-12e-3, 12e-3)))
    return trap, FieldMap.from_trap(trap)


@pytest.mark.parametrize("method", ["verlet", "yoshida4"])
def test_coil_field_map_equals_numpy(coil_trap: tuple[Trap, FieldMap], method: str) -> None:
    """Trilinear map of a coil trap, decelerating, with a switch-on ramp; particles lost at
    the walls (where the interpolation clips) and kept."""
    trap, field_map = coil_trap
    assert blocks.route(trap, field_map) == "compiled"
    particles = beam(400, seed=7, sigma_r=1.5e-3, sigma_v=1.5)
    fast, reference = both(trap, particles, 6e-3, 2e-5, method=method, field_map=field_map, deceleration=200.0,
                           ramp=lambda t: min(max(t / 1e-3, 0.0), 1.0))
    assert 0.05 < reference.fraction < 0.95
    assert_same(fast, reference)


def test_quadrupole_map_equals_numpy() -> None:
    """A map of the ideal quadrupole on an anisotropic grid (5 x 9 x 12 nodes)."""
    trap = quadrupole_trap()
    field_map = FieldMap.from_trap(trap, (5, 9, 12))
    fast, reference = both(trap, beam(200, seed=8), 1e-3, 1e-5, field_map=field_map, deceleration=1e3)
    assert_same(fast, reference)


# --- spin flips ------------------------------------------------------------------------------------


class NearZero:
    """|B| of a quadrupole behind a plain object that offers only ``near_zero`` for the
    field vector (as a |B| table does), so a force map and the quadrupole flip check go
    together."""

    def __init__(self, source: IdealQuadrupole) -> None:
        self.source = source

    @property
    def near_zero(self) -> IdealQuadrupole:
        return IdealQuadrupole(self.source.gradient)

    def magnitude(self, points: ArrayLike) -> NDArray[np.float64]:
        return self.source.magnitude(points)

    def magnitude_gradient(self, points: ArrayLike) -> NDArray[np.float64]:
        return self.source.magnitude_gradient(points)


HEAVY = Species("heavy", 1000.0, LinearZeeman(MU_B))  # trap force negligible: straight paths


def straight_passes() -> NDArray[np.float64]:
    """Lines along z past the zero of a 20 T/m quadrupole at impact parameters 0.1-1.5 um
    and 1-3 m/s (flip probabilities from ~1 to ~0.1 for spin 1/2), and a few oblique ones."""
    count = 40
    impact = np.linspace(1e-7, 1.5e-6, count)
    speed = np.linspace(1.0, 3.0, count)
    particles = np.zeros((count, 6))
    particles[:, 0], particles[:, 2], particles[:, 5] = impact, -4e-3, speed
    particles[::5, 3] = 0.01 * speed[::5]
    particles[1::5, 1], particles[1::5, 0] = impact[1::5], 0.0
    return particles


@pytest.mark.parametrize(("spin", "projection"), [(0.5, 0.5), (1.0, 1.0), (1.5, 0.5), (2.0, 1.0)],
                         ids=["half", "stretched-1", "3/2,1/2", "2,1"])
def test_spin_flip_weights_equal_numpy(spin: float, projection: float) -> None:
    """The close-pass check in the compiled loop: stretched and non-stretched states (the
    sum of d^j_mm terms, with powers 1/2 and 2), Yoshida, the weights recorded as each
    particle leaves through the far wall."""
    trap = Trap(IdealQuadrupole(20.0), HEAVY, ((-0.008, 0.008),) * 3)
    flips = SpinFlips(spin=spin, projection=projection)
    assert blocks.route(trap, spin_flips=flips) == "compiled"
    fast, reference = both(trap, straight_passes(), 1.3e-2, 2e-5, method="yoshida4", spin_flips=flips)
    weights = reference.survival_weights
    assert weights is not None and np.count_nonzero((weights > 0.01) & (weights < 0.99)) >= 10
    assert not reference.kept.any()
    assert_same(fast, reference)


def test_spin_flips_in_a_decelerating_ramped_cloud() -> None:
    """A slow light cloud at 20 T/m, switched on by a ramp and decelerated, Yoshida, chunks
    of 60: the check's weights and the kept set as the numpy route gives them."""
    rng = np.random.default_rng(11)
    particles = np.column_stack([rng.normal(0, 1e-3, (200, 3)), rng.normal(0, 0.3, (200, 3))])
    trap = Trap(IdealQuadrupole(20.0, 0.2), LIGHT, ((-0.008, 0.008),) * 3)
    fast, reference = both(trap, particles, 0.02, 2e-5, method="yoshida4", deceleration=100.0, chunk=60,
                           spin_flips=True, ramp=lambda t: min(max(t / 1e-3, 0.0), 1.0))
    assert reference.survival_weights is not None and np.count_nonzero(reference.survival_weights < 1.0) >= 1
    assert_same(fast, reference)


def test_spin_flips_with_a_map_and_near_zero() -> None:
    """A |B|-only source with a force map: the check reads its ``near_zero`` quadrupole
    (compiled), the force the map."""
    trap = Trap(NearZero(IdealQuadrupole(20.0)), HEAVY, ((-0.008, 0.008),) * 3)  # type: ignore[arg-type]
    field_map = FieldMap.from_trap(trap, (17, 17, 17))
    assert blocks.route(trap, field_map, True) == "compiled"
    fast, reference = both(trap, straight_passes(), 6e-3, 2e-5, field_map=field_map, spin_flips=True)
    assert reference.survival_weights is not None and np.count_nonzero(reference.survival_weights < 0.99) >= 10
    assert_same(fast, reference)


# --- where the numpy route runs ---------------------------------------------------------------------


def test_routes_named_and_numpy_fallbacks_run() -> None:
    """The numpy route runs for a source without a compiled force, a Zeeman model other than
    linear or Breit–Rabi, and the spin-flip check on a field grid; ``ENABLED = False``
    forces it everywhere. Those calls still give the numpy numbers (they are that route)."""
    tabulated = Species("table", 7 * AMU, TabulatedZeeman([0.0, 0.1, 0.2, 0.4], [0.0, 1e-24, 1.9e-24, 3.5e-24]))
    plain = Trap(WrappedSource(IdealQuadrupole(GRADIENT, 0.2)), LIGHT, BOX)
    assert blocks.route(quadrupole_trap(tabulated)) == "numpy"
    assert blocks.route(plain) == "numpy"
    field_map = FieldMap.from_trap(plain, (9, 9, 9))
    assert blocks.route(plain, field_map) == "compiled"
    assert blocks.route(plain, field_map, SpinFlips()) == "numpy"
    assert blocks.route(plain, field_map, False) == "compiled"
    blocks.ENABLED = False
    try:
        assert blocks.route(quadrupole_trap()) == "numpy"
    finally:
        blocks.ENABLED = True
    fast, reference = both(quadrupole_trap(tabulated), beam(50, seed=9), 2e-4, 1e-5)
    assert_same(fast, reference)


def test_numpy_fixture_switches_route(numpy_route: None) -> None:
    assert blocks.route(quadrupole_trap()) == "numpy"
