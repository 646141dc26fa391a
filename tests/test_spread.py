"""A beam tracked in seeded chunks through executors (tiltwell.dynamics.spread).

References: the same particles drawn in the test straight from numpy's spawned seed
sequences (numpy's documented recipe for independent parallel streams) and shaped by a
Cholesky factor with a plain matrix product, then tracked in one call of ``track``; and the
result through a thread pool, a process pool and a Dask LocalCluster equal to the serial
one. The trap and beam are invented (an ideal quadrupole, a Gaussian of 2 mm and 8 m/s).
"""

from __future__ import annotations

from concurrent.futures import ProcessPoolExecutor, ThreadPoolExecutor

import numpy as np
import pytest

from tiltwell import Beam, IdealQuadrupole, PhasePlane, TiltwellError, Trap, track
from tiltwell.dynamics.spread import BeamTracking, chunk_seeds, track_beam

from conftest import TEST_PARTICLE as PARTICLE

GRADIENT, MAX_FIELD = 50.0, 0.3  # T/m, T
EDGE = MAX_FIELD / GRADIENT
TRAP = Trap(IdealQuadrupole(GRADIENT, MAX_FIELD), PARTICLE, ((-4 * EDGE, 4 * EDGE),) * 2 + ((-2 * EDGE, 2 * EDGE),))
PLANE = PhasePlane.from_sigmas(2e-3, 8.0)
BEAM = Beam(300.0, PLANE, PLANE, PLANE)
DURATION, STEP = 2e-3, 1e-5  # s
COUNT, CHUNK, SEED = 2500, 700, 11  # four chunks, the last one short


def reference_particles(count: int, chunk: int, seed: int, mismatch: float = 0.0) -> np.ndarray:
    sequences = np.random.SeedSequence(seed).spawn(-(-count // chunk))
    factor = np.linalg.cholesky(BEAM.covariance())
    parts = [np.random.default_rng(s).standard_normal((min(chunk, count - k * chunk), 6)) @ factor.T
             for k, s in enumerate(sequences)]
    particles = np.concatenate(parts)
    particles[:, 5] -= mismatch
    return particles


@pytest.fixture(scope="module")
def serial() -> BeamTracking:
    return track_beam(TRAP, BEAM, COUNT, DURATION, STEP, chunk=CHUNK, seed=SEED, mismatch=1.5, deceleration=2000.0)


def test_chunks_equal_one_track_of_the_same_particles(serial: BeamTracking) -> None:
    whole = track(TRAP, reference_particles(COUNT, CHUNK, SEED, 1.5), DURATION, STEP, deceleration=2000.0)
    assert serial.particles == COUNT and serial.chunks == 4
    assert serial.kept == int(np.count_nonzero(whole.kept))
    assert 0.05 < serial.fraction < 0.95  # a test that can tell kept from lost
    np.testing.assert_allclose(serial.survival, whole.survival, rtol=0, atol=1e-12)
    np.testing.assert_array_equal(serial.times, whole.times)
    assert serial.kept_after_flips == pytest.approx(serial.fraction, rel=1e-15)  # the check is off
    assert serial.binomial_error == pytest.approx((serial.fraction * (1 - serial.fraction) / COUNT) ** 0.5, rel=1e-12)


def test_thread_and_process_pools_give_the_serial_result(serial: BeamTracking) -> None:
    for pool in (ThreadPoolExecutor(3), ProcessPoolExecutor(2)):
        with pool:
            spread = track_beam(TRAP, BEAM, COUNT, DURATION, STEP, chunk=CHUNK, seed=SEED, mismatch=1.5,
                                deceleration=2000.0, executor=pool)
        assert spread.kept == serial.kept
        np.testing.assert_array_equal(spread.survival, serial.survival)


@pytest.mark.slow
def test_a_dask_local_cluster_gives_the_serial_result(serial: BeamTracking) -> None:
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, dashboard_address=None) as cluster:
        with distributed.Client(cluster) as client:
            spread = track_beam(TRAP, BEAM, COUNT, DURATION, STEP, chunk=CHUNK, seed=SEED, mismatch=1.5,
                                deceleration=2000.0, executor=client.get_executor())
    assert spread.kept == serial.kept
    np.testing.assert_array_equal(spread.survival, serial.survival)


def test_spin_flips_pass_through_and_only_lower_the_count() -> None:
    found = track_beam(TRAP, BEAM, 800, DURATION, STEP, chunk=300, seed=2, spin_flips=True)
    assert found.kept_after_flips <= found.fraction


def test_seeds_are_numpys_spawned_sequences() -> None:
    mine = chunk_seeds(7, 3)
    theirs = np.random.SeedSequence(7).spawn(3)
    assert [m.generate_state(4).tolist() for m in mine] == [t.generate_state(4).tolist() for t in theirs]


@pytest.mark.parametrize("kwargs, word", [({"particles": 0}, "particles"), ({"chunk": 0}, "chunk"),
                                          ({"progress": True}, "progress"), ({"seed": -1}, "seed")])
def test_bad_arguments_are_named(kwargs: dict[str, object], word: str) -> None:
    arguments: dict[str, object] = {"particles": 10, **kwargs}
    with pytest.raises(TiltwellError, match=word):
        track_beam(TRAP, BEAM, duration=DURATION, time_step=STEP, **arguments)  # type: ignore[arg-type]
