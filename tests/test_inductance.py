"""Mutual and self-inductance of coaxial loops and wound coils, and the axial force, against
outside references named beside each check: Maxwell's closed form written out here with
scipy's elliptic integrals, a brute-force Neumann sum of dl1.dl2/r, the dipole and log limits,
magpylib's Biot-Savart field for the force, and textbook coil formulas (Maxwell's square
self-distance, Nagaoka's coefficient)."""

from __future__ import annotations

import math

import magpylib
import numpy as np
import pytest
import scipy.constants as sc
from scipy.special import ellipe, ellipk

import tiltwell
from tiltwell import Coil, TiltwellError
from tiltwell.physics.hardware import ring_inductance
from tiltwell.physics.inductance import (
    coil_mutual_gradient,
    coil_mutual_inductance,
    coil_self_inductance,
    loop_mutual,
    mutual_inductance_gradient,
)

MU0 = sc.mu_0  # CODATA vacuum permeability from scipy.constants, independent of tiltwell's

#: Geometries (radius_a, radius_b, distance) [m] well away from the wire.
GEOMETRIES = [(0.01, 0.01, 0.01), (0.01, 0.02, 0.0), (0.02, 0.005, 0.003), (0.01, 0.012, 0.05), (0.03, 0.01, -0.02)]
#: Agreement of two routes to M that both keep full double precision.
CLOSED_FORM_RTOL = 1e-12
#: A trapezoid sum over 1,500 points per loop of a periodic analytic integrand converges
#: exponentially; measured ~1e-13 here, asserted with room.
NEUMANN_RTOL = 1e-9


def maxwell(a: float, b: float, d: float) -> float:
    """Maxwell's M = mu0 sqrt(ab) [(2/k - k) K(k) - (2/k) E(k)], k^2 = 4ab/((a+b)^2+d^2)
    (Maxwell, A Treatise on Electricity and Magnetism, vol. 2, section 701; from memory),
    written out directly with scipy.special (parameter m = k^2)."""
    m = 4 * a * b / ((a + b) ** 2 + d**2)
    k = math.sqrt(m)
    return MU0 * math.sqrt(a * b) * ((2 / k - k) * ellipk(m) - 2 / k * ellipe(m))


def neumann(a: float, b: float, d: float, points: int = 1500) -> float:
    """Neumann's M = mu0/(4 pi) double loop integral of dl1.dl2/|r1 - r2|, as a brute-force
    double sum over ``points`` nodes on each loop (exact tangents, trapezoid in angle)."""
    phi = 2 * np.pi * np.arange(points) / points
    step = 2 * np.pi / points
    p1 = np.stack((a * np.cos(phi), a * np.sin(phi), np.zeros(points)), axis=1)
    p2 = np.stack((b * np.cos(phi), b * np.sin(phi), np.full(points, d)), axis=1)
    t1 = np.stack((-np.sin(phi), np.cos(phi), np.zeros(points)), axis=1) * a * step
    t2 = np.stack((-np.sin(phi), np.cos(phi), np.zeros(points)), axis=1) * b * step
    distance = np.linalg.norm(p1[:, None, :] - p2[None, :, :], axis=2)
    return float(MU0 / (4 * np.pi) * np.sum((t1 @ t2.T) / distance))


@pytest.mark.parametrize("a, b, d", GEOMETRIES)
def test_mutual_inductance_matches_maxwell_closed_form(a: float, b: float, d: float) -> None:
    # Reference: Maxwell's formula, written out independently in this file.
    assert tiltwell.mutual_inductance(a, b, d) == pytest.approx(maxwell(a, b, d), rel=CLOSED_FORM_RTOL)


@pytest.mark.parametrize("a, b, d", GEOMETRIES)
def test_mutual_inductance_matches_neumann_double_sum(a: float, b: float, d: float) -> None:
    # Reference: brute-force Neumann double integral of dl1.dl2/r over both loops.
    assert tiltwell.mutual_inductance(a, b, d) == pytest.approx(neumann(a, b, d), rel=NEUMANN_RTOL)


@pytest.mark.parametrize("ratio, rtol", [(1e3, 1e-5), (1e5, 1e-9), (1e8, 1e-14)])
def test_far_apart_reaches_the_dipole_limit(ratio: float, rtol: float) -> None:
    # Reference: two point dipoles, M -> mu0 pi a^2 b^2 / (2 d^3) (Jackson, Classical
    # Electrodynamics, dipole field, from memory); the correction is O((a + b)^2 / d^2), so
    # the bound tightens with the distance where a direct formula would cancel to nothing.
    a, b = 0.01, 0.02
    d = ratio * a
    assert tiltwell.mutual_inductance(a, b, d) == pytest.approx(MU0 * math.pi * a**2 * b**2 / (2 * d**3), rel=rtol)


@pytest.mark.parametrize("gap", [1e-4, 1e-6, 1e-8])
def test_close_loops_reach_the_log_limit(gap: float) -> None:
    # Reference: two close equal loops a distance r apart, M -> mu0 a (ln(8 a / r) - 2)
    # (Maxwell, Treatise vol. 2, section 705; from memory), error O((r/a)^2 ln(a/r)).
    a = 0.01
    r = gap * a
    expected = MU0 * a * (math.log(8 * a / r) - 2)
    assert tiltwell.mutual_inductance(a, a, r) == pytest.approx(expected, rel=10 * gap)


def test_series_and_elliptic_branches_join() -> None:
    # Reference: the continuity of M, checked against Maxwell's closed form on both sides
    # of the series limit (k^2 = 0.1), where that form is still accurate to ~1e-13.
    a = b = 0.01
    d = math.sqrt(4 * a * b / 0.1 - (a + b) ** 2)
    for distance in (d * (1 - 1e-9), d * (1 + 1e-9)):
        assert tiltwell.mutual_inductance(a, b, distance) == pytest.approx(maxwell(a, b, distance), rel=1e-12)


def test_vectorised_kernel_equals_scalar_function() -> None:
    # Reference: the checked scalar function (itself tested against Maxwell and Neumann).
    a, b, d = (np.array(v) for v in zip(*GEOMETRIES))
    expected = [tiltwell.mutual_inductance(*g) for g in GEOMETRIES]
    np.testing.assert_allclose(loop_mutual(a, b, d), expected, rtol=1e-15)


@pytest.mark.parametrize("a, b, d", GEOMETRIES)
def test_gradient_matches_central_difference(a: float, b: float, d: float) -> None:
    # Reference: central difference of Maxwell's closed form (written out here), step 1e-5 a:
    # truncation ~1e-10 relative, rounding ~1e-11 (absolute bound, dM/dd is 0 at d = 0).
    h = 1e-5 * a
    expected = (maxwell(a, b, d + h) - maxwell(a, b, d - h)) / (2 * h)
    scale = MU0  # dM/dd ~ mu0 for loops ~ their radius apart
    assert mutual_inductance_gradient(a, b, d) == pytest.approx(expected, rel=1e-7, abs=1e-9 * scale)


def biot_savart_force(a: float, b: float, d: float, current_a: float, current_b: float, points: int = 2000) -> float:
    """F_z on loop b = I_b sum over loop b of (dl x B_a)_z, B_a from magpylib's exact loop."""
    source = magpylib.current.Circle(current=current_a, diameter=2 * a, position=(0, 0, 0))
    phi = 2 * np.pi * np.arange(points) / points
    where = np.stack((b * np.cos(phi), b * np.sin(phi), np.full(points, d)), axis=1)
    dl = np.stack((-np.sin(phi), np.cos(phi), np.zeros(points)), axis=1) * b * 2 * np.pi / points
    field = source.getB(where)
    return float(current_b * np.sum(np.cross(dl, field)[:, 2]))


@pytest.mark.parametrize("a, b, d", [(0.01, 0.01, 0.01), (0.02, 0.005, 0.003), (0.01, 0.012, -0.05)])
def test_force_between_loops_matches_magpylib_biot_savart(a: float, b: float, d: float) -> None:
    # Reference: magpylib's field of loop a, F = I_b closed integral of dl x B over loop b.
    i_a, i_b = 300.0, -120.0
    expected = biot_savart_force(a, b, d, i_a, i_b)
    assert i_a * i_b * mutual_inductance_gradient(a, b, d) == pytest.approx(expected, rel=1e-8)


def test_parallel_currents_attract() -> None:
    # Reference: parallel currents attract (Ampere; textbook): loop b above loop a is pulled
    # down (dM/dd < 0), below it pulled up, and the slope is odd in d.
    above, below = mutual_inductance_gradient(0.01, 0.01, 0.005), mutual_inductance_gradient(0.01, 0.01, -0.005)
    assert above < 0 < below
    assert below == pytest.approx(-above, rel=1e-15)
    assert mutual_inductance_gradient(0.01, 0.02, 0.0) == 0.0


def midpoint_filaments(coil: Coil, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Radii and planes of an n x n midpoint grid of equal filaments over the winding."""
    r = coil.radius - coil.width / 2 + coil.width * (np.arange(n) + 0.5) / n
    z = coil.z - coil.height / 2 + coil.height * (np.arange(n) + 0.5) / n
    rr, zz = np.meshgrid(r, z, indexing="ij")
    return rr.ravel(), zz.ravel()


@pytest.mark.parametrize("gap", [0.0, 0.002, 0.01])
def test_coil_mutual_matches_midpoint_grid_of_maxwell_loops(gap: float) -> None:
    # Reference: Maxwell's closed form (scipy elliptic integrals, here) summed over a fine
    # 40 x 40 midpoint grid of each winding (error O(1/n^2), ~1e-4 for touching windings).
    first = Coil(0.02, 0.0, 1.0, 50, 0.004, 0.004)
    second = Coil(0.022, 0.004 + gap, 1.0, 30, 0.004, 0.004)
    ra, za = midpoint_filaments(first, 40)
    rb, zb = midpoint_filaments(second, 40)
    m = 4 * ra[:, None] * rb[None, :] / ((ra[:, None] + rb[None, :]) ** 2 + (zb[None, :] - za[:, None]) ** 2)
    k = np.sqrt(m)
    pairs = MU0 * np.sqrt(ra[:, None] * rb[None, :]) * ((2 / k - k) * ellipk(m) - 2 / k * ellipe(m))
    expected = 50 * 30 * pairs.mean()
    assert coil_mutual_inductance(first, second) == pytest.approx(expected, rel=3e-4 if gap == 0 else 2e-5)


def test_coil_force_matches_magpylib_biot_savart() -> None:
    # Reference: magpylib's field of the filaments of coil a and the Biot-Savart force summed
    # over the filaments of coil b; I_a I_b dM/dz from the filament sum of dM/dd.
    first = Coil(0.02, 0.0, 1.0, 20, 0.004, 0.006, filaments=4)
    second = Coil(0.02, 0.009, 1.0, 20, 0.004, 0.006, filaments=4)
    i_a, i_b = 50.0, 80.0
    ra, za, wa = first.loops()
    rb, zb, wb = second.loops()
    force = sum(biot_savart_force(r1, r2, z2 - z1, i_a * w1, i_b * w2, points=600)
                for r1, z1, w1 in zip(ra, za, wa) for r2, z2, w2 in zip(rb, zb, wb))
    assert i_a * i_b * coil_mutual_gradient(first, second, filaments=4) == pytest.approx(force, rel=1e-8)


@pytest.mark.parametrize("side", [0.001, 0.002])
def test_self_inductance_of_small_square_section_matches_maxwell_ring(side: float) -> None:
    # Reference: thin ring of square section, L = mu0 N^2 R (ln(8 R / g) - 2) with Maxwell's
    # self-distance of a square g = 0.44705 side (Maxwell, Treatise vol. 2, section 692; from
    # memory); the formula neglects terms O((side / R)^2) (measured ~0.07 (side / R)^2),
    # bounded here by 0.1 (side / R)^2 plus the filament sums' 1e-4.
    radius, turns = 0.02, 40
    expected = MU0 * turns**2 * radius * (math.log(8 * radius / (0.44705 * side)) - 2)
    got = coil_self_inductance(Coil(radius, 0.0, 1.0, turns, side, side))
    assert got == pytest.approx(expected, rel=0.1 * (side / radius) ** 2 + 1e-4)


def test_self_inductance_near_hardware_round_ring_formula() -> None:
    # Reference: the round-section ring of the same area (Grover, from memory; in
    # hardware.py): a round and a square section of one area differ in self-distance by 1.7 %,
    # so in L by ~0.4 % here; the square winding is the smaller.
    radius, side, turns = 0.02, 0.002, 40
    got = coil_self_inductance(Coil(radius, 0.0, 1.0, turns, side, side))
    round_ring = turns**2 * ring_inductance(radius, side / math.sqrt(math.pi))
    assert 0.99 * round_ring < got < round_ring


def test_self_inductance_of_long_thin_winding_matches_nagaoka() -> None:
    # Reference: a current sheet of length l = 2 R, L = K mu0 pi R^2 N^2 / l with Nagaoka's
    # coefficient K = 0.6884 for 2R/l = 1 (Nagaoka 1909; Grover, Inductance Calculations,
    # tables; from memory). A winding 0.005 R thick lies below the sheet by ~0.5 w/R (measured
    # 2.4e-3 here, 1.2e-3 at half the thickness).
    radius, turns = 0.02, 100
    length = 2 * radius
    got = coil_self_inductance(Coil(radius, 0.0, 1.0, turns, 0.005 * radius, length), cells=800)
    expected = 0.6884 * MU0 * math.pi * radius**2 * turns**2 / length
    assert got == pytest.approx(expected, rel=3.5e-3)
    assert got < expected


def test_errors_name_the_arguments() -> None:
    with pytest.raises(TiltwellError, match=r"radius_a and radius_b \[m\] at distance 0 must differ"):
        tiltwell.mutual_inductance(0.01, 0.01, 0.0)
    with pytest.raises(TiltwellError, match=r"radius_b \[m\] must be finite and in \(0, 1e\+09\]"):
        tiltwell.mutual_inductance(0.01, -0.01, 0.0)
    with pytest.raises(TiltwellError, match=r"distance \[m\] must be finite"):
        tiltwell.mutual_inductance(0.01, 0.02, math.nan)
    with pytest.raises(TiltwellError, match="radius_a and radius_b"):
        mutual_inductance_gradient(0.02, 0.02, 0.0)
    with pytest.raises(TiltwellError, match="must not overlap"):
        coil_mutual_inductance(Coil(0.02, 0.0, 1.0, 1, 0.004, 0.004), Coil(0.02, 0.003, 1.0, 1, 0.004, 0.004))
    with pytest.raises(TiltwellError, match=r"width and height \[m\] must be > 0"):
        coil_self_inductance(Coil(0.02, 0.0, 1.0, 1, 0.0, 0.004))
    with pytest.raises(TiltwellError, match="coil_b must be a Coil"):
        coil_mutual_gradient(Coil(0.02, 0.0, 1.0), 0.02)  # type: ignore[arg-type]
