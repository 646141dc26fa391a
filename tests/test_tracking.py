"""Trajectory tracking in the trap frame, against closed forms and independent routes.

References named beside each check. Traps and particles are invented: a 7 u particle with
a moment of one Bohr magneton, in an ideal quadrupole or in a smooth test well.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pytest
from numpy.typing import ArrayLike, NDArray
from scipy import constants

from tiltwell import (
    BreitRabi,
    IdealQuadrupole,
    Species,
    TiltwellError,
    Trap,
    energetic_acceptance,
    gaussian_fraction,
    longitudinal_acceptance,
)
from tiltwell.dynamics.integrators import INTEGRATORS
from tiltwell.dynamics.tracking import FieldMap, TrackingResult, track

from conftest import AMU, MU_B, WrappedSource, TEST_PARTICLE as PARTICLE

# --- a smooth well: |B| = B0 + b r^2 / 2 + c r^4 / 4 ---------------------------------------

FREQUENCY = 2 * math.pi * 100.0  # angular frequency of the harmonic well [1/s]
CURVATURE = FREQUENCY**2 * PARTICLE.mass / MU_B  # b [T/m^2]: omega^2 = mu b / m
PERIOD = 2 * math.pi / FREQUENCY
AMPLITUDE = 1e-3  # [m]
SMOOTH_BOX = ((-0.01, 0.01),) * 3


@dataclass(frozen=True)
class SmoothSource:
    """|B| = offset + curvature r^2 / 2 + quartic r^4 / 4 (never zero), gradient by hand."""

    offset: float = 0.1
    curvature: float = CURVATURE
    quartic: float = 0.0

    def magnitude(self, points: ArrayLike) -> NDArray[np.float64]:
        r2 = np.sum(np.asarray(points, dtype=float) ** 2, axis=1)
        return self.offset + 0.5 * self.curvature * r2 + 0.25 * self.quartic * r2**2

    def magnitude_gradient(self, points: ArrayLike) -> NDArray[np.float64]:
        p = np.asarray(points, dtype=float)
        r2 = np.sum(p**2, axis=1)
        return (self.curvature + self.quartic * r2)[:, None] * p


def smooth_trap(quartic: float = 0.0) -> Trap:
    """The smooth well in a 20 mm box (a test source: no ``field``, which a trap never uses)."""
    return Trap(SmoothSource(quartic=quartic), PARTICLE, SMOOTH_BOX)  # type: ignore[arg-type]


def smooth_energy(states: NDArray[np.float64], quartic: float = 0.0) -> NDArray[np.float64]:
    """m v^2 / 2 + mu |B| [J] of (N, 6) states in the smooth well (closed form)."""
    return 0.5 * PARTICLE.mass * np.sum(states[:, 3:] ** 2, axis=1) + MU_B * SmoothSource(
        quartic=quartic
    ).magnitude(states[:, :3])


def harmonic_solution(start: NDArray[np.float64], t: float) -> NDArray[np.float64]:
    """r(t) = r0 cos(w t) + v0 / w sin(w t) of the isotropic oscillator (Landau & Lifshitz,
    Mechanics, sec. 21, eq. 21.5, from memory)."""
    c, s = math.cos(FREQUENCY * t), math.sin(FREQUENCY * t)
    r0, v0 = start[:, :3], start[:, 3:]
    return np.hstack([r0 * c + v0 / FREQUENCY * s, -r0 * FREQUENCY * s + v0 * c])


def harmonic_starts() -> NDArray[np.float64]:
    """A few starts of amplitude ~AMPLITUDE in different directions, some moving."""
    w, a = FREQUENCY, AMPLITUDE
    return np.array([
        [a, 0, 0, 0, 0, 0],
        [0, 0, -a, 0, 0, 0.5 * a * w],
        [0.3 * a, -0.6 * a, 0.2 * a, 0.4 * a * w, 0.1 * a * w, -0.7 * a * w],
    ])


def phase_error(result: TrackingResult, start: NDArray[np.float64], t: float) -> float:
    exact = harmonic_solution(start, t)
    scale = np.array([1, 1, 1, 1 / FREQUENCY, 1 / FREQUENCY, 1 / FREQUENCY]) / AMPLITUDE
    return float(np.max(np.abs((result.final - exact) * scale)))


# --- an ideal quadrupole: 50 T/m, capped at 0.3 T --------------------------------------------

GRADIENT, MAX_FIELD = 50.0, 0.3  # [T/m], [T]
EDGE = MAX_FIELD / GRADIENT  # axial position of the cap [m]
SLOPE_FORCE = MU_B * GRADIENT  # axial force of the quadrupole [N]


def quadrupole_trap(species: Species = PARTICLE) -> Trap:
    """Axial box |z| < 2 EDGE, radial |x|, |y| < 4 EDGE (beyond the radial cap at 2 EDGE)."""
    box = ((-4 * EDGE, 4 * EDGE),) * 2 + ((-2 * EDGE, 2 * EDGE),)
    return Trap(IdealQuadrupole(GRADIENT, MAX_FIELD), species, box)


def quadrupole_beam(count: int, seed: int, sigma_r: float = 2e-3, sigma_v: float = 8.0) -> NDArray[np.float64]:
    rng = np.random.default_rng(seed)
    return np.hstack([rng.normal(0.0, sigma_r, (count, 3)), rng.normal(0.0, sigma_v, (count, 3))])


# --- closed forms in the smooth well ---------------------------------------------------------


@pytest.mark.parametrize("method", ["verlet", "yoshida4"])
def test_harmonic_closed_form_over_many_periods(method: str) -> None:
    """Static smooth well, 30 periods at 100 steps a period: the trajectory follows the
    closed form r0 cos(w t) + v0/w sin(w t) (Landau & Lifshitz, Mechanics, sec. 21, from
    memory) and the energy is conserved. Verlet's phase error grows as (w h)^2 / 24 per unit
    phase, i.e. 30 periods x 2 pi x (2 pi / 100)^2 / 24 ~ 3.1e-2 rad (the frequency of the
    discrete oscillator, Hairer, Lubich & Wanner, Geometric Numerical Integration, sec.
    I.5, from memory); Yoshida's is bounded here by (w h)^4 per unit phase (4th order,
    constant < 1). Lower bounds: Verlet's error is at least 0.8 of that phase; Yoshida's
    falls by 2^4 = 16 when the step is halved (4th order: H. Yoshida, Phys. Lett. A 150,
    262 (1990), from memory; measured 16.009), so it is no artefact of rounding."""
    start = harmonic_starts()
    duration = 30 * PERIOD
    result = track(smooth_trap(), start, duration, PERIOD / 100, method=method)
    assert result.kept.all()
    h = result.time_step * FREQUENCY
    phase = duration * FREQUENCY * h**2 / 24
    tolerance = {"verlet": 1.2 * phase, "yoshida4": duration * FREQUENCY * h**4}[method]
    error = phase_error(result, start, duration)
    assert error < tolerance
    if method == "verlet":
        assert error > 0.8 * phase
    else:
        finer = track(smooth_trap(), start, duration, PERIOD / 200, method=method)
        assert error / phase_error(finer, start, duration) == pytest.approx(2**4, rel=0.1)
    energy0 = smooth_energy(start)
    # Energy above the bottom mu B0; the Verlet bound (w h)^2 / 4 is from its conserved
    # modified energy (Hairer, Lubich & Wanner, sec. I.5 / IX.8, from memory).
    bottom = MU_B * SmoothSource().offset
    relative = np.abs(smooth_energy(result.final) - energy0) / (energy0 - bottom)
    assert relative.max() < {"verlet": h**2 / 4, "yoshida4": 1e-6}[method]


@pytest.mark.parametrize("method", sorted(INTEGRATORS))
def test_registered_scheme_coefficients(method: str) -> None:
    """Coefficient invariants of a consistent symmetric splitting: kicks and drifts each sum
    to one step and read the same backwards (time-reversible). For the composition
    w1, w0, w1 of Yoshida (Phys. Lett. A 150, 262 (1990), from memory): 2 w1 + w0 = 1 and
    the 4th-order condition 2 w1^3 + w0^3 = 0."""
    scheme = INTEGRATORS[method]
    assert sum(scheme.kicks) == pytest.approx(1.0, abs=1e-15)
    assert sum(scheme.drifts) == pytest.approx(1.0, abs=1e-15)
    assert scheme.kicks == pytest.approx(scheme.kicks[::-1], abs=1e-15)
    assert scheme.drifts == pytest.approx(scheme.drifts[::-1], abs=1e-15)
    assert len(scheme.kicks) == len(scheme.drifts) + 1
    if method == "yoshida4":
        w1, w0 = scheme.drifts[0], scheme.drifts[1]
        assert 2 * w1**3 + w0**3 == pytest.approx(0.0, abs=1e-14)
        assert scheme.kicks[1] == pytest.approx(0.5 * (w1 + w0), abs=1e-15)


@pytest.mark.parametrize(("method", "order", "steps"), [
    ("verlet", 2, (100, 200, 400, 800)),
    ("yoshida4", 4, (60, 120, 240, 480)),
])
def test_order_of_convergence(method: str, order: int, steps: tuple[int, ...]) -> None:
    """Error at a fixed time (2.3 periods) against the harmonic closed form scales as
    h^order: the log-log slope is fitted with numpy.polyfit (reference: the closed form
    above; the orders from Yoshida, Phys. Lett. A 150, 262 (1990), from memory)."""
    start = harmonic_starts()
    duration = 2.3 * PERIOD
    dts, errors = [], []
    for n in steps:
        result = track(smooth_trap(), start, duration, duration / n, method=method)
        dts.append(result.time_step)
        errors.append(phase_error(result, start, duration))
    slope = np.polyfit(np.log(dts), np.log(errors), 1)[0]
    assert slope == pytest.approx(order, abs=0.3)


def test_verlet_energy_has_no_drift() -> None:
    """Anharmonic smooth well (quartic term as large as the harmonic one at the amplitude),
    1e4 Verlet steps at 50 a period: the largest energy error over 200 particles is no
    larger after 1e4 steps than after 1e3 (a symplectic method conserves a modified energy
    over long times: Hairer, Lubich & Wanner, Geometric Numerical Integration, Thm IX.8.1,
    from memory; a non-symplectic 2nd-order method would grow ~10x) and stays at the size
    (w h)^2 of the step's modified-energy offset."""
    quartic = CURVATURE / (3 * AMPLITUDE) ** 2
    trap = smooth_trap(quartic)
    rng = np.random.default_rng(3)
    start = np.hstack([rng.normal(0, AMPLITUDE, (200, 3)), rng.normal(0, AMPLITUDE * FREQUENCY, (200, 3))])
    dt = PERIOD / 50
    energy0 = smooth_energy(start, quartic)
    depth = energy0 - MU_B * SmoothSource().offset
    errors = []
    for steps in (1_000, 10_000):
        result = track(trap, start, steps * dt, dt)
        assert result.kept.all()
        errors.append(float(np.max(np.abs(smooth_energy(result.final, quartic) - energy0) / depth)))
    h = dt * FREQUENCY
    assert errors[1] < 1.3 * errors[0]
    assert errors[1] < h**2


# --- 1-D and 3-D survival against the acceptance -------------------------------------------


@pytest.mark.slow
@pytest.mark.parametrize("fraction", [0.2, 0.5])
def test_axis_survival_matches_separatrix(fraction: float) -> None:
    """Particles on the axis (no transverse motion) in a quadrupole decelerating at
    ``fraction`` of the slope: the tracked survival equals the Gaussian fraction inside the
    longitudinal separatrix within 4 binomial standard errors. Independent routes: time
    integration against the phase-space area under ``m v^2/2 + U_eff = E_escape``
    (``longitudinal_acceptance`` + ``gaussian_fraction``).

    Every orbit crosses the kink of the V at z = 0, where a fixed step changes the energy by
    ~ c v h at random (see ``track``'s notes): 1 us steps (~4000 a period) keep the
    misclassified particles near 0.3 %; 5 us steps lose ~1.5 %. By 6 ms the unbound ones
    have left (survival levels off after ~4.5 ms)."""
    trap = quadrupole_trap()
    a = fraction * SLOPE_FORCE / PARTICLE.mass
    bucket = longitudinal_acceptance(trap, a)
    mean, cov = np.array([0.5e-3, 2.0]), np.array([[(3e-3) ** 2, 0.3 * 3e-3 * 12.0], [0.3 * 3e-3 * 12.0, 12.0**2]])
    count = 20_000
    rng = np.random.default_rng(11)
    zv = rng.multivariate_normal(mean, cov, count)
    particles = np.zeros((count, 6))
    particles[:, 2], particles[:, 5] = zv[:, 0], zv[:, 1]
    result = track(trap, particles, 6e-3, 1e-6, deceleration=a)
    assert np.all(result.final[:, [0, 1, 3, 4]] == 0.0)
    expected = gaussian_fraction(bucket, mean, cov)
    assert 0.2 < expected < 0.8
    assert abs(result.fraction - expected) < 4 * math.sqrt(expected * (1 - expected) / count)


def test_energetically_bound_particles_all_survive() -> None:
    """Static 3-D quadrupole: every particle with m v^2/2 + U below the escape energy of
    ``energetic_acceptance`` (less a margin larger than the integrator's energy error,
    checked too) is still there at the end (energy conservation), and some unbound ones are
    lost. Reference: the energetic criterion, computed by a grid labelling of the potential."""
    trap = quadrupole_trap()
    particles = quadrupole_beam(4_000, seed=5)
    energy0 = 0.5 * PARTICLE.mass * np.sum(particles[:, 3:] ** 2, axis=1) + trap.potential(*particles[:, :3].T)
    escape = energetic_acceptance(trap.tilted(0.0), trap.mass, trap.bounds).escape_energy
    margin = 1e-3 * escape
    bound = energy0 < escape - margin
    result = track(trap, particles, 10e-3, 2e-6)
    survivors = result.final[result.kept]
    energy1 = 0.5 * PARTICLE.mass * np.sum(survivors[:, 3:] ** 2, axis=1) + trap.potential(*survivors[:, :3].T)
    assert np.max(np.abs(energy1 - energy0[result.kept])) < margin
    assert 0.2 < bound.mean() < 0.9
    assert np.count_nonzero(bound & ~result.kept) == 0
    assert np.count_nonzero(result.kept) >= np.count_nonzero(bound)
    assert np.count_nonzero(~result.kept) > 0.05 * particles.shape[0]


@pytest.mark.parametrize("species", ["linear", "breit-rabi"])
def test_inline_quadrupole_matches_trap_force(species: str) -> None:
    """The inline quadrupole force agrees with the general ``Trap.force`` route (the
    analytic gradient of ``IdealQuadrupole``, itself tested against closed forms) over 50
    steps: the same particles kept and final states equal to 1e-9."""
    chosen = PARTICLE if species == "linear" else Species(
        "test-hyperfine", 7 * AMU, BreitRabi(1.5, constants.h * 2e8, F=2, mF=1)
    )
    inline = quadrupole_trap(chosen)
    general = Trap(WrappedSource(inline.source), chosen, inline.bounds)  # type: ignore[arg-type]
    particles = quadrupole_beam(500, seed=2, sigma_v=20.0)
    fast, slow = (track(t, particles, 200e-6, 2e-6, deceleration=3e3) for t in (inline, general))
    assert np.array_equal(fast.kept, slow.kept)
    assert not fast.kept.all()
    np.testing.assert_allclose(fast.final, slow.final, rtol=1e-9, atol=1e-12)


# --- field maps --------------------------------------------------------------------------------


def test_field_map_error_is_second_order() -> None:
    """Trilinear interpolation of the force of the anharmonic smooth well against its closed
    form -mu (b + c r^2) r on grids of 11^3 and 21^3 nodes: the largest error falls as h^2
    (log2 of the ratio within 2 +- 0.3) and stays below the bound sum h^2/8 max|F''| of
    linear interpolation (Burden & Faires, Numerical Analysis, Thm 3.3, from memory)."""
    quartic = CURVATURE / (4e-3) ** 2
    trap = smooth_trap(quartic)
    points = np.random.default_rng(4).uniform(-0.01, 0.01, (20_000, 3))
    r2 = np.sum(points**2, axis=1)
    exact = -MU_B * (CURVATURE + quartic * r2)[:, None] * points
    errors = []
    for n in (11, 21):
        field_map = FieldMap.from_trap(trap, (n, n, n))
        errors.append(float(np.max(np.abs(field_map.force(points) - exact))))
        h = 0.02 / (n - 1)
        # d^2 F_x/dx^2 = -6 mu c x, d^2 F_x/dy^2 = d^2 F_x/dz^2 = -2 mu c x: sum <= 10 mu c L.
        assert errors[-1] <= h**2 / 8 * 10 * MU_B * quartic * 0.01
    assert math.log2(errors[0] / errors[1]) == pytest.approx(2.0, abs=0.3)


def test_field_map_is_exact_at_nodes_and_clips() -> None:
    """At the grid nodes the map returns the sampled force itself (numpy reference: the
    values the trap gives there); outside the box it returns the wall value."""
    trap = quadrupole_trap()
    field_map = FieldMap.from_trap(trap, (5, 7, 9))
    axes = [np.linspace(low, high, n) for (low, high), n in zip(trap.bounds, (5, 7, 9))]
    nodes = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
    reference = trap.force(nodes)
    np.testing.assert_allclose(field_map.force(nodes), reference, rtol=1e-12, atol=1e-12 * np.abs(reference).max())
    outside = np.array([[0.0, 0.0, 1.0], [0.0, 0.0, -1.0]])
    walls = np.array([[0.0, 0.0, trap.bounds[2][1]], [0.0, 0.0, trap.bounds[2][0]]])
    np.testing.assert_array_equal(field_map.force(outside), field_map.force(walls))


def test_field_map_tracking_matches_analytic_survival() -> None:
    """A 41 x 41 x 41 map of the decelerating quadrupole keeps the same fraction as the
    analytic force within 4 binomial standard errors (independent force routes)."""
    trap = quadrupole_trap()
    particles = quadrupole_beam(3_000, seed=8)
    a = 0.3 * SLOPE_FORCE / PARTICLE.mass
    field_map = FieldMap.from_trap(trap, (41, 41, 41))
    analytic = track(trap, particles, 4e-3, 4e-6, deceleration=a)
    mapped = track(trap, particles, 4e-3, 4e-6, deceleration=a, field_map=field_map)
    assert 0.1 < analytic.fraction < 0.9
    assert abs(mapped.fraction - analytic.fraction) < 4 * analytic.binomial_error


# --- time profiles, chunking, bookkeeping ----------------------------------------------------


@pytest.mark.parametrize("method", ["verlet", "yoshida4"])
def test_constant_profiles_equal_plain_values(method: str) -> None:
    """a(t) = a0 gives the same numbers as a0, and s(t) = 1 as no ramp (bit for bit)."""
    trap = quadrupole_trap()
    particles = quadrupole_beam(300, seed=1)
    a0 = 0.4 * SLOPE_FORCE / PARTICLE.mass
    plain = track(trap, particles, 1e-3, 1e-5, deceleration=a0, method=method)
    profiled = track(trap, particles, 1e-3, 1e-5, deceleration=lambda t: a0, ramp=lambda t: 1.0, method=method)
    assert not plain.kept.all()
    for name in ("final", "lost_time", "survival", "times"):
        np.testing.assert_array_equal(getattr(plain, name), getattr(profiled, name))


@pytest.mark.parametrize("method", ["verlet", "yoshida4"])
def test_ramp_scales_only_the_trap_force(method: str) -> None:
    """With the trap switched off (s = 0) only the fictitious force m a acts: uniformly
    accelerated motion z = z0 + v0 t + a t^2 / 2 (elementary kinematics), which both
    splittings integrate exactly."""
    trap = quadrupole_trap()
    start = np.array([[1e-3, 0.0, -5e-3, 0.5, 0.0, 1.0]])
    a, t = 4e3, 1e-3
    result = track(trap, start, t, 1e-5, deceleration=a, ramp=lambda time: 0.0, method=method)
    expected = [1e-3 + 0.5 * t, 0.0, -5e-3 + 1.0 * t + 0.5 * a * t**2, 0.5, 0.0, 1.0 + a * t]
    np.testing.assert_allclose(result.final[0], expected, rtol=1e-12, atol=1e-15)


@pytest.mark.parametrize("method", ["verlet", "yoshida4"])
def test_time_dependent_deceleration(method: str) -> None:
    """Trap off, a(t) = alpha t: v = v0 + alpha t^2/2, z = z0 + v0 t + alpha t^3/6. Verlet
    takes the trapezoid rule for the velocity (exact here) and misses the position by
    alpha h^2 T / 6 (each step's Taylor remainder alpha h^3/6, summed); the 4th-order
    composition is exact for a cubic trajectory."""
    trap = quadrupole_trap()
    alpha, t, dt = 2e6, 2e-3, 2e-5
    start = np.array([[0.0, 0.0, -6e-3, 0.0, 0.0, 0.5]])
    result = track(trap, start, t, dt, deceleration=lambda time: alpha * time, ramp=lambda time: 0.0, method=method)
    z, v = -6e-3 + 0.5 * t + alpha * t**3 / 6, 0.5 + alpha * t**2 / 2
    offset = {"verlet": -alpha * dt**2 * t / 6, "yoshida4": 0.0}[method]
    assert result.final[0, 5] == pytest.approx(v, rel=1e-12)
    assert result.final[0, 2] == pytest.approx(z + offset, rel=1e-10, abs=1e-14)


@pytest.mark.parametrize("route", ["inline", "field_map"])
def test_chunking_does_not_change_results(route: str) -> None:
    """chunk=7 and chunk=N give identical arrays (every particle is stepped by element-wise
    operations on its own); with losses along the way."""
    trap = quadrupole_trap()
    particles = quadrupole_beam(120, seed=9)
    field_map = FieldMap.from_trap(trap, (9, 9, 9)) if route == "field_map" else None
    a = 0.3 * SLOPE_FORCE / PARTICLE.mass
    whole, pieces = (
        track(trap, particles, 1e-3, 1e-5, deceleration=a, field_map=field_map, chunk=c) for c in (120, 7)
    )
    assert 0 < whole.fraction < 1
    for name in ("final", "lost_time", "survival", "kept"):
        np.testing.assert_array_equal(getattr(whole, name), getattr(pieces, name))


def test_progress_bar_changes_nothing(capsys: pytest.CaptureFixture[str]) -> None:
    """progress=True draws a bar (on stderr) and returns the same numbers."""
    trap = quadrupole_trap()
    particles = quadrupole_beam(50, seed=6)
    quiet = track(trap, particles, 1e-4, 1e-5, chunk=20)
    shown = track(trap, particles, 1e-4, 1e-5, chunk=20, progress=True)
    np.testing.assert_array_equal(quiet.final, shown.final)
    assert "30/30" in capsys.readouterr().err


def test_bookkeeping_of_losses() -> None:
    """Known fates in the static quadrupole: a particle at rest near the bottom stays; one
    starting outside the box is lost at t = 0; one fired out along z at 100 m/s (far above
    the 0.3 T depth) climbs the slope c to the cap at EDGE and coasts on to the wall at
    2 EDGE; it is lost at the end of the step in which it crosses (uniformly decelerated
    motion, then free flight) and frozen just outside the wall; survival and times follow."""
    trap = quadrupole_trap()
    particles = np.array([
        [0.0, 0.0, 1e-4, 0.0, 0.0, 0.0],
        [0.0, 0.0, 1.0, 0.0, 0.0, 0.0],
        [0.0, 0.0, 0.0, 0.0, 0.0, 100.0],
    ])
    result = track(trap, particles, 1e-3, 1e-5, record_every=7)
    assert result.kept.tolist() == [True, False, False]
    assert result.lost_time[0] == math.inf and result.lost_time[1] == 0.0
    k = SLOPE_FORCE / PARTICLE.mass
    coast = math.sqrt(100.0**2 - 2 * k * EDGE)
    crossing = (100.0 - coast) / k + EDGE / coast
    assert crossing <= result.lost_time[2] < crossing + result.time_step
    assert trap.bounds[2][1] <= result.final[2, 2] < trap.bounds[2][1] + 100.0 * 1e-5
    np.testing.assert_array_equal(result.final[1], particles[1])
    assert result.times[0] == 0.0 and result.times[-1] == pytest.approx(1e-3, rel=1e-12)
    assert np.all(np.diff(result.times) <= 7 * result.time_step * (1 + 1e-12))
    assert result.survival[0] == pytest.approx(2 / 3) and result.survival[-1] == pytest.approx(1 / 3)
    assert result.fraction == pytest.approx(1 / 3)
    assert result.binomial_error == pytest.approx(math.sqrt(1 / 3 * 2 / 3 / 3))
    assert "0.3333" in result._repr_html_()
    with pytest.raises(ValueError):
        result.final[0, 0] = 1.0  # the result's arrays are read-only


def test_time_step_is_fitted_to_duration() -> None:
    """The step used divides the duration: ceil(1e-3 / 3e-5) = 34 steps."""
    result = track(quadrupole_trap(), np.zeros((1, 6)) + [0, 0, 1e-4, 0, 0, 0], 1e-3, 3e-5)
    assert result.time_step == pytest.approx(1e-3 / 34, rel=1e-14)
    assert result.times.size == 35


# --- bad input ------------------------------------------------------------------------------


GOOD = dict(particles=np.zeros((2, 6)), duration=1e-3, time_step=1e-5)


@pytest.mark.parametrize(("changes", "named"), [
    ({"particles": np.zeros((2, 5))}, "particles"),
    ({"particles": np.full((2, 6), np.nan)}, "particles"),
    ({"particles": np.zeros((0, 6))}, "particles"),
    ({"duration": 0.0}, "duration"),
    ({"duration": -1.0}, "duration"),
    ({"time_step": 0.0}, "time_step"),
    ({"time_step": 2e-3}, "time_step"),
    ({"time_step": float("nan")}, "time_step"),
    ({"time_step": 1e-12}, "time_step"),
    ({"chunk": 0}, "chunk"),
    ({"chunk": 2.5}, "chunk"),
    ({"record_every": 0}, "record_every"),
    ({"method": "rk4"}, "'verlet', 'yoshida4'"),
    ({"deceleration": "fast"}, "deceleration"),
    ({"deceleration": float("inf")}, "deceleration"),
    ({"deceleration": lambda t: float("nan")}, r"deceleration\(t\)"),
    ({"deceleration": lambda t: [1.0, 2.0]}, r"deceleration\(t\)"),
    ({"ramp": 1.0}, "ramp"),
    ({"ramp": lambda t: 1.5}, r"ramp\(t\)"),
    ({"field_map": "map"}, "field_map"),
    ({"field_map": FieldMap(((-1e-3, 1e-3),) * 3, np.zeros((2, 2, 2, 3)))}, "field_map"),
    ({"progress": "yes"}, "progress"),
    ({"trap": "trap"}, "trap"),
])
def test_bad_input_names_the_argument(changes: dict[str, object], named: str) -> None:
    arguments: dict[str, object] = {"trap": quadrupole_trap(), **GOOD, **changes}
    with pytest.raises(TiltwellError, match=named):
        track(**arguments)  # type: ignore[arg-type]


@pytest.mark.parametrize(("call", "named"), [
    (lambda: FieldMap.from_trap(quadrupole_trap(), (1, 5, 5)), "shape"),
    (lambda: FieldMap.from_trap(quadrupole_trap(), (5, 5)), "shape"),  # type: ignore[arg-type]
    (lambda: FieldMap.from_trap("trap", (5, 5, 5)), "trap"),  # type: ignore[arg-type]
    (lambda: FieldMap(((0, 1),) * 3, np.zeros((2, 2, 2))), "forces"),
    (lambda: FieldMap(((1, 0),) * 3, np.zeros((2, 2, 2, 3))), "bounds"),
    (lambda: FieldMap.from_trap(quadrupole_trap(), (3, 3, 3)).force(np.zeros((4, 2))), "points"),
])
def test_bad_field_map_input_names_the_argument(call: object, named: str) -> None:
    with pytest.raises(TiltwellError, match=named):
        call()  # type: ignore[operator]
