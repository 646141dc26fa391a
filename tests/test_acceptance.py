"""Traps and their longitudinal, transverse and 6-D acceptance against closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants, special

from tiltwell import (
    IdealQuadrupole,
    TiltwellError,
    Trap,
    acceptance_curve,
    anti_helmholtz,
    loop_field,
    separatrix,
    trap_acceptance,
)
from tiltwell.wells.acceptance import TrapSampler, acceptances_at

from conftest import MU_B, TEST_PARTICLE as PARTICLE

GRADIENT, MAX_FIELD = 2.0, 0.5  # T/m, T: a 0.5 T deep, 2 T/m quadrupole
C = MU_B * GRADIENT  # axial slope of U [N]
DEPTH = MU_B * MAX_FIELD  # [J]
EDGE = MAX_FIELD / GRADIENT  # axial position of the truncation [m]


def _quadrupole_trap() -> Trap:
    """Axial box |z| < 2 * EDGE (so the truncation sits on a sample of a 2001-point cut),
    radial box |x|, |y| < 4 * EDGE (past the radial truncation at 2 * EDGE, on a sample too)."""
    box = ((-4 * EDGE, 4 * EDGE),) * 2 + ((-2 * EDGE, 2 * EDGE),)
    return Trap(IdealQuadrupole(GRADIENT, MAX_FIELD), PARTICLE, box)


def _v_area(energy: float, slope: float, tilt: float, mass: float) -> float:
    """Area inside E of U = slope |z| - tilt z: (4/3) sqrt(2/m) E^1.5 (1/(s-f) + 1/(s+f))
    (derived in tests/test_separatrix.py::test_tilted_v_well)."""
    return (4 / 3) * math.sqrt(2 / mass) * energy**1.5 * (1 / (slope - tilt) + 1 / (slope + tilt))


@pytest.mark.parametrize("fraction", [0.0, 0.2, 0.5, 0.9])
def test_truncated_quadrupole_longitudinal_and_transverse(fraction: float) -> None:
    """Closed forms for U = min(c sqrt(z^2 + rho^2/4), D) - m a z, f = m a = fraction * c:
    the front barrier sits at the truncation z = D/c, so E = D (1 - f/c); the axis is a
    tilted V of slopes c -/+ f; the radial cut through the bottom (z = 0) is a V of
    slope c/2 capped at the same 3-D escape energy."""
    trap = _quadrupole_trap()
    tilt = fraction * C
    result = trap_acceptance(trap, tilt / PARTICLE.mass, include_6d=False)
    energy = DEPTH * (1 - fraction)
    assert result.escape_energy == pytest.approx(energy, rel=1e-9)
    assert result.longitudinal.area == pytest.approx(_v_area(energy, C, tilt, PARTICLE.mass), rel=1e-6)
    assert result.transverse.area == pytest.approx(_v_area(energy, C / 2, 0.0, PARTICLE.mass), rel=1e-6)


def test_one_sampler_for_many_decelerations_meets_the_closed_forms() -> None:
    """acceptances_at on one TrapSampler, the decelerations out of order and one repeated:
    each result, in order, meets the tilted-V closed forms of the test above (escape
    energy D (1 - f/c), axis and radial V areas) and equals trap_acceptance there."""
    trap = _quadrupole_trap()
    fractions = [0.9, 0.0, 0.5, 0.9, 0.2]
    sampler = TrapSampler(trap, 2001)
    results = acceptances_at(sampler, [f * C / PARTICLE.mass for f in fractions])
    assert len(results) == len(fractions)
    for fraction, result in zip(fractions, results):
        tilt, energy = fraction * C, DEPTH * (1 - fraction)
        assert result.deceleration == tilt / PARTICLE.mass
        assert result.escape_energy == pytest.approx(energy, rel=1e-9)
        assert result.longitudinal.area == pytest.approx(_v_area(energy, C, tilt, PARTICLE.mass), rel=1e-6)
        assert result.transverse.area == pytest.approx(_v_area(energy, C / 2, 0.0, PARTICLE.mass), rel=1e-6)
        assert math.isnan(result.volume)
        single = trap_acceptance(trap, result.deceleration, include_6d=False)
        assert (result.longitudinal.area, result.transverse.area) == (single.longitudinal.area,
                                                                      single.transverse.area)
    with pytest.raises(TiltwellError, match="decelerations"):
        acceptances_at(sampler, [0.0, math.nan])


def test_truncated_quadrupole_critical_deceleration() -> None:
    """The well vanishes when m a reaches the axial restoring force mu B'_z: a_c = mu B'/m."""
    trap = _quadrupole_trap()
    critical = C / PARTICLE.mass
    assert trap.critical_deceleration() == pytest.approx(critical, rel=1e-12)
    assert trap_acceptance(trap, 0.99 * critical, include_6d=False).bound
    beyond = trap_acceptance(trap, 1.01 * critical, include_6d=False)
    assert not beyond.bound
    assert beyond.longitudinal.area == 0.0 and beyond.transverse.area == 0.0


def test_truncated_quadrupole_six_d_at_rest() -> None:
    """At a = 0 the region below D is the ellipsoid z^2 + rho^2/4 < (D/c)^2 and the 6-D
    volume is 4 (4 pi/3) (2/m)^1.5 4 pi (D/c)^3 D^1.5 B(3, 5/2) (derived in
    tests/test_energetic.py; Euler Beta from scipy.special.beta)."""
    result = trap_acceptance(_quadrupole_trap(), 0.0)
    expected = (
        4 * (4 * math.pi / 3) * (2 / PARTICLE.mass) ** 1.5 * 4 * math.pi * EDGE**3 * DEPTH**1.5 * special.beta(3, 2.5)
    )
    assert result.escape_energy == pytest.approx(DEPTH, rel=1e-12)
    assert result.volume == pytest.approx(expected, rel=1e-2)


@pytest.mark.slow
def test_acceptance_curve_falls_to_zero_at_the_critical_deceleration() -> None:
    trap = _quadrupole_trap()
    critical = C / PARTICLE.mass
    decelerations = np.linspace(0.0, 1.2 * critical, 13)
    curve = acceptance_curve(trap, decelerations, include_6d=True)
    below = decelerations < critical
    assert np.all(np.diff(curve.longitudinal[below]) < 0)
    assert np.all(np.diff(curve.transverse[below]) < 0)
    assert np.all(np.diff(curve.volume[below]) < 0)
    assert np.all(curve.longitudinal[~below] == 0) and np.all(curve.volume[~below] == 0)
    assert curve.critical_deceleration == pytest.approx(critical, rel=1e-12)
    single = trap_acceptance(trap, decelerations[7], samples=1001)
    assert curve.transverse[7] == pytest.approx(single.transverse.area, rel=1e-12)


# --- a trap made of coils ----------------------------------------------------------------

RADIUS, SEPARATION, AMPERE_TURNS = 0.01, 0.012, 2000.0


def _coil_trap() -> Trap:
    coils = anti_helmholtz(RADIUS, SEPARATION, AMPERE_TURNS / 50, turns=50, width=2e-3, height=2e-3)
    half = 0.6 * RADIUS  # the box corners stay inside the winding's bore (0.9 RADIUS)
    return Trap(coils, PARTICLE, ((-half, half), (-half, half), (-SEPARATION, SEPARATION)))


@pytest.mark.slow
def test_coil_trap_critical_deceleration_against_bisection() -> None:
    """Brent's maximisation of the axial force against brute force: bisection on whether
    a 20,001-point tilted axis cut still holds a well (an independent route)."""
    trap = _coil_trap()
    z = np.linspace(-SEPARATION, SEPARATION, 20001)
    low, high = 0.0, 1e7
    for _ in range(60):
        middle = 0.5 * (low + high)
        if separatrix(z, trap.effective_potential(0.0, 0.0, z, middle), PARTICLE.mass, near=0.0).bound:
            low = middle
        else:
            high = middle
    assert trap.critical_deceleration() == pytest.approx(low, rel=1e-4)


def test_coil_trap_at_rest_is_symmetric() -> None:
    result = trap_acceptance(_coil_trap(), 0.0, include_6d=False)
    assert result.longitudinal.z_bottom == pytest.approx(0.0, abs=1e-12)
    assert result.longitudinal.z_back == pytest.approx(-result.longitudinal.z_front, rel=1e-9)


def test_coil_trap_axis_depth_against_closed_form_loop_field() -> None:
    """On the axis |B| is the sum of the textbook on-axis loop fields
    mu0 I a^2 / (2 (a^2 + z^2)^(3/2)) (thin-loop limit of the windings: use the
    Gauss-Legendre filaments' mean radius and planes, i.e. compare with 1-filament coils)."""
    coils = anti_helmholtz(RADIUS, SEPARATION, AMPERE_TURNS, filaments=1)
    trap = Trap(coils, PARTICLE, _coil_trap().bounds)
    z = np.linspace(-SEPARATION, SEPARATION, 4001)

    def on_axis(z0: float, current: float) -> np.ndarray:
        return constants.mu_0 * current * RADIUS**2 / (2 * (RADIUS**2 + (z - z0) ** 2) ** 1.5)

    field = np.abs(on_axis(SEPARATION / 2, AMPERE_TURNS) + on_axis(-SEPARATION / 2, -AMPERE_TURNS))
    expected = separatrix(z, MU_B * field, PARTICLE.mass)
    assert trap_acceptance(trap, 0.0, samples=4001, include_6d=False).longitudinal.area == pytest.approx(
        expected.area, rel=1e-9
    )


def test_force_is_minus_the_gradient_of_the_effective_potential() -> None:
    """Analytic force against central differences of U_eff (an independent route)."""
    trap = _coil_trap()
    rng = np.random.default_rng(3)
    points = rng.uniform(-3e-3, 3e-3, size=(20, 3)) + (0.0, 0.0, 1e-4)
    a, h = 2e4, 1e-7
    numeric = np.empty_like(points)
    for axis in range(3):
        step = np.zeros(3)
        step[axis] = h
        up, down = points + step, points - step
        numeric[:, axis] = -(
            trap.effective_potential(*up.T, deceleration=a) - trap.effective_potential(*down.T, deceleration=a)
        ) / (2 * h)
    assert np.allclose(trap.force(points, a), numeric, rtol=1e-5, atol=1e-8 * np.abs(numeric).max())


@pytest.mark.slow
def test_six_d_acceptance_falls_with_deceleration_in_a_coil_trap() -> None:
    trap = _coil_trap()
    critical = trap.critical_deceleration()
    volumes = [trap_acceptance(trap, f * critical).volume for f in (0.0, 0.3, 0.6)]
    assert volumes[0] > volumes[1] > volumes[2] > 0


def test_trap_rejects_bad_input() -> None:
    with pytest.raises(TiltwellError, match="bounds"):
        Trap(IdealQuadrupole(1.0), PARTICLE, ((1, -1), (-1, 1), (-1, 1)))
    with pytest.raises(TiltwellError, match="species"):
        Trap(IdealQuadrupole(1.0), "Rb", ((-1, 1), (-1, 1), (-1, 1)))  # type: ignore[arg-type]
    with pytest.raises(TiltwellError, match="source"):
        Trap(object(), PARTICLE, ((-1, 1), (-1, 1), (-1, 1)))  # type: ignore[arg-type]
    with pytest.raises(TiltwellError, match="deceleration"):
        trap_acceptance(_quadrupole_trap(), float("inf"))
    with pytest.raises(TiltwellError, match="samples"):
        _quadrupole_trap().axis_cut(0.0, samples=2)


def test_loop_field_is_exported() -> None:
    """The core interface names are importable from the package (DESIGN.md)."""
    assert loop_field(np.zeros((1, 3)), 1.0, 0.0, 1.0)[0, 2] == pytest.approx(constants.mu_0 / 2, rel=1e-12)


def test_transverse_acceptance_function_is_capped_like_trap_acceptance() -> None:
    """At a tilt the radial cut's own barrier (D) lies above the 3-D escape energy
    D (1 - f/c): the function caps at the latter by default, and gives the raw cut when
    asked for a height explicitly."""
    from tiltwell import transverse_acceptance

    trap = _quadrupole_trap()
    a = 0.5 * C / PARTICLE.mass
    capped = transverse_acceptance(trap, a)
    raw = transverse_acceptance(trap, a, z=0.0)
    assert capped.escape_energy == pytest.approx(0.5 * DEPTH, rel=1e-9)
    assert raw.escape_energy == pytest.approx(DEPTH, rel=1e-9)
    assert capped.area == pytest.approx(_v_area(0.5 * DEPTH, C / 2, 0.0, PARTICLE.mass), rel=1e-6)
