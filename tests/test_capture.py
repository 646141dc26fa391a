"""Captured fraction three ways, against closed forms and brute-force counting."""

from __future__ import annotations

import math

import numpy as np
import pytest

from tiltwell import (
    Beam,
    IdealQuadrupole,
    LinearZeeman,
    PhasePlane,
    Species,
    Trap,
    capture_estimates,
    gaussian_fraction,
    longitudinal_acceptance,
    plane_product_fraction,
    separatrix,
    trap_acceptance,
)
from tiltwell.physics.constants import ATOMIC_MASS, BOHR_MAGNETON

PARTICLE = Species("test-particle", 20 * ATOMIC_MASS, LinearZeeman(2 * BOHR_MAGNETON))


@pytest.mark.parametrize("ratio", [0.5, 2.0, 6.0, 15.0])
def test_matched_beam_in_an_elliptical_acceptance(ratio: float) -> None:
    """A beam matched to an elliptical acceptance of area A (same ellipse shape) keeps
    1 - exp(-A / (2 pi eps)), eps the rms emittance (the rms ellipse has area pi eps; with
    areas quoted in units of pi, as accelerator physicists often do, this is the familiar
    1 - exp(-A / (2 eps)); e.g. Reiser, Theory and Design of Charged Particle Beams, sec. 5.3,
    from memory)."""
    omega, mass, half_width = 40.0, 1.0, 1e-3
    z = np.linspace(-half_width, half_width, 2001)
    bucket = separatrix(z, 0.5 * mass * omega**2 * z**2, mass)
    emittance = bucket.area / (math.pi * ratio)
    plane = PhasePlane.from_twiss(0.0, 1.0 / omega, emittance)  # beta = L / (omega L)
    expected = 1.0 - math.exp(-bucket.area / (2.0 * math.pi * emittance))
    assert gaussian_fraction(bucket, [0.0, 0.0], plane.covariance) == pytest.approx(expected, abs=1e-5)


def _trap() -> Trap:
    gradient, cap = 100.0, 0.5
    edge = cap / gradient
    return Trap(IdealQuadrupole(gradient, cap), PARTICLE, ((-4 * edge, 4 * edge),) * 2 + ((-2 * edge, 2 * edge),))


def _beam(sigma_z: float = 4e-3, sigma_v: float = 6.0, sigma_x: float = 2e-3, sigma_vx: float = 3.0) -> Beam:
    return Beam(
        300.0,
        longitudinal=PhasePlane.from_sigmas(sigma_z, sigma_v, 0.3),
        horizontal=PhasePlane.from_sigmas(sigma_x, sigma_vx),
        vertical=PhasePlane.from_sigmas(sigma_x, sigma_vx),
    )


def test_product_of_planes_against_sampling() -> None:
    """For independent planes the joint fraction is the product: count sampled particles
    inside all three 1-D separatrices at once (a brute-force count, 2e5 particles)."""
    trap, beam, a = _trap(), _beam(), 2e3
    acceptance = trap_acceptance(trap, a, include_6d=False)
    sample = beam.sample(200_000, seed=3)
    inside = (
        acceptance.longitudinal.contains(sample[:, 2], sample[:, 5])
        & acceptance.transverse.contains(sample[:, 0], sample[:, 3])
        & acceptance.transverse.contains(sample[:, 1], sample[:, 4])
    )
    p = inside.mean()
    sigma = math.sqrt(p * (1 - p) / sample.shape[0])
    fraction = plane_product_fraction(acceptance.longitudinal, acceptance.transverse, beam)
    assert abs(fraction - p) < 4 * sigma


def test_mismatch_shifts_the_beam_in_the_trap_frame() -> None:
    """A trap faster than the beam by dv sees the beam moving backwards at -dv: the
    longitudinal factor equals gaussian_fraction with mean (0, -dv)."""
    trap, beam, a = _trap(), _beam(sigma_x=1e-5, sigma_vx=1e-3), 2e3
    well = longitudinal_acceptance(trap, a)
    expected = gaussian_fraction(well, [0.0, -5.0], beam.longitudinal.covariance)
    acceptance = trap_acceptance(trap, a, include_6d=False)
    assert plane_product_fraction(well, acceptance.transverse, beam, mismatch=5.0) == pytest.approx(expected, rel=1e-6)


def test_static_trap_keeps_every_energetically_bound_particle() -> None:
    """At a = 0 the potential is static: energy conservation keeps every particle below the
    escape energy in the well, so the tracked survivors include all of them and the
    tracked fraction is at least the energetic one (the integrator's energy error is far
    below the margin of the few particles near the escape energy)."""
    trap, beam = _trap(), _beam()
    result = capture_estimates(trap, 0.0, beam, 2e-3, particles=4000, seed=1)
    assert result.tracking is not None
    sample = beam.sample(4000, seed=1)
    energy = 0.5 * trap.mass * np.sum(sample[:, 3:] ** 2, axis=1) + trap.potential(*sample[:, :3].T)
    assert result.acceptance.energetic is not None
    bound = (energy < 0.999 * result.acceptance.escape_energy) & result.acceptance.energetic.in_well(sample[:, :3])
    assert bound.sum() > 100
    assert np.all(result.tracking.kept[bound])
    assert result.tracked >= result.energetic - 3 * result.energetic_error


def test_past_the_critical_deceleration_nothing_is_kept() -> None:
    trap = _trap()
    critical = trap.critical_deceleration()
    result = capture_estimates(trap, 1.05 * critical, _beam(), 1e-3, particles=100)
    assert (result.overlap, result.energetic, result.tracked) == (0.0, 0.0, 0.0)
    assert not result.acceptance.bound


def test_switch_on_ramp_reaches_only_the_trajectories() -> None:
    """A trap switched on slowly holds fewer particles than one switched on at once (the
    beam spreads while the well is shallow); the overlap and energetic estimates, which
    assume a trap fully on, do not change. A zero ramp is the default."""
    trap, beam = _trap(), _beam()
    sudden = capture_estimates(trap, 2e3, beam, 2e-3, particles=3000, seed=4)
    zero = capture_estimates(trap, 2e3, beam, 2e-3, particles=3000, seed=4, switch_on_time=0.0)
    slow = capture_estimates(trap, 2e3, beam, 2e-3, particles=3000, seed=4, switch_on_time=1e-3)
    assert zero.tracked == sudden.tracked
    assert (slow.overlap, slow.energetic) == (sudden.overlap, sudden.energetic)
    assert slow.tracked < sudden.tracked - 3 * sudden.tracked_error


def test_arrival_times_against_stepping_free_flight() -> None:
    """Time of flight of the kept particles to a plane 5 cm beyond the trap, against a
    brute-force free flight stepped in 1 us increments until each particle crosses."""
    trap, beam = _trap(), _beam()
    result = capture_estimates(trap, 0.0, beam, 1e-3, particles=400, seed=2)
    assert result.tracking is not None
    release, distance = 15.0, 0.05
    times = result.arrival_times(release, distance)
    final = result.tracking.final[result.tracking.kept]
    z, speed = final[:, 2].copy(), release + final[:, 5]
    crossed = np.full(len(z), np.nan)
    horizon = float(np.max(times[np.isfinite(times)]))
    for step in range(1, int(horizon / 1e-6) + 3):
        z += speed * 1e-6
        newly = np.isnan(crossed) & (z >= distance)
        crossed[newly] = step * 1e-6
    never = np.isinf(times)  # moving backwards in the lab: never arrives
    assert np.array_equal(never, np.isnan(crossed)) and never.sum() < len(times)
    assert np.all(np.abs(times[~never] - crossed[~never]) <= 1e-6)


@pytest.mark.parametrize("fraction", [0.0, 1.05], ids=["static trap", "past the critical deceleration"])
def test_the_result_carries_the_sample_it_counted_and_tracked(fraction: float) -> None:
    """The sample on the result is the beam's own draw for the seed, in the trap frame (vz
    shifted by -mismatch), read-only; in a static trap its rows are the tracked ones:
    energy conservation keeps every row below the escape energy in the well (the check of
    test_static_trap_keeps_every_energetically_bound_particle, on the result's own rows)."""
    trap, beam, mismatch = _trap(), _beam(), 3.0
    result = capture_estimates(trap, fraction * trap.critical_deceleration(), beam, 2e-3, particles=3000, seed=5,
                               mismatch=mismatch)
    drawn = beam.sample(3000, seed=5)
    drawn[:, 5] -= mismatch
    assert result.sample is not None
    np.testing.assert_array_equal(result.sample, drawn)
    assert not result.sample.flags.writeable
    if fraction > 1.0:
        assert result.tracking is None and result.sample.shape == (3000, 6)
        return
    assert result.tracking is not None and result.tracking.kept.shape == (3000,)
    sample = result.sample
    energy = 0.5 * trap.mass * np.sum(sample[:, 3:] ** 2, axis=1) + trap.potential(*sample[:, :3].T)
    assert result.acceptance.energetic is not None
    bound = (energy < 0.999 * result.acceptance.escape_energy) & result.acceptance.energetic.in_well(sample[:, :3])
    assert bound.sum() > 100
    assert np.all(result.tracking.kept[bound])
    assert result.tracked == np.mean(result.tracking.kept)
