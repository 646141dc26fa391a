"""Energetic 6-D acceptance against closed forms and independent quadrature."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, special

from tiltwell import TiltwellError, acceptance_6d, energetic_acceptance


def _quadrupole_volume(energy: float, moment_gradient: float, mass: float) -> float:
    """6-D volume of U = c sqrt(z^2 + rho^2/4) below E (c = mu B'_z).

    Derivation: with x = 2x', y = 2y' (d^3r = 4 d^3r') U = c |r'|, so
    V = 4 (4 pi / 3) (2/m)^(3/2) integral_0^{E/c} (E - c s)^(3/2) 4 pi s^2 ds
      = 4 (4 pi / 3) (2/m)^(3/2) 4 pi (E/c)^3 E^(3/2) B(3, 5/2),
    with the Euler Beta function B(3, 5/2) = 16/315 (scipy.special.beta).
    """
    z0 = energy / moment_gradient
    return 4 * (4 * math.pi / 3) * (2 / mass) ** 1.5 * 4 * math.pi * z0**3 * energy**1.5 * special.beta(3, 2.5)


@pytest.mark.parametrize(
    ("moment_gradient", "mass", "half_length"),
    [(1.0, 1.0, 1.0), (2.78e-23 * 50.0, 1.4e-25, 0.01)],
    ids=["normalised", "atom-scale"],
)
def test_linear_quadrupole_at_its_escape_energy(moment_gradient: float, mass: float, half_length: float) -> None:
    """In the box |z| < Z, |x|, |y| < 2Z the escape energy is c Z (the axial walls; the
    radial walls are reached at the same energy) and the volume is the Beta closed form."""
    def potential(x, y, z):  # type: ignore[no-untyped-def]
        return moment_gradient * np.sqrt(z**2 + (x**2 + y**2) / 4)

    box = ((-2 * half_length, 2 * half_length),) * 2 + ((-half_length, half_length),)
    result = energetic_acceptance(potential, mass, box)
    energy = moment_gradient * half_length
    assert result.converged
    assert result.escape_energy == pytest.approx(energy, rel=1e-12)
    assert result.volume == pytest.approx(_quadrupole_volume(energy, moment_gradient, mass), rel=1e-2)


@pytest.mark.parametrize("rtol", [1e-2, 2e-3])
def test_energy_below_escape_and_tighter_tolerance(rtol: float) -> None:
    """A given energy E < escape: the same closed form; asking for more accuracy delivers it."""
    def potential(x, y, z):  # type: ignore[no-untyped-def]
        return np.sqrt(z**2 + (x**2 + y**2) / 4)

    volume = acceptance_6d(potential, 1.0, ((-2, 2), (-2, 2), (-1, 1)), energy=0.6, rtol=rtol)
    assert volume == pytest.approx(_quadrupole_volume(0.6, 1.0, 1.0), rel=rtol)


def test_harmonic_well_is_a_six_ball() -> None:
    """U = k r^2 / 2 below E: in the scaled coordinates (r sqrt(k/2E), v sqrt(m/2E)) the
    region is the unit 6-ball, of volume pi^3 / 6 (volume of an n-ball,
    pi^(n/2) / Gamma(n/2 + 1); from memory), so V = pi^3/6 (2E/k)^(3/2) (2E/m)^(3/2)."""
    k, m, half = 3.0, 2.0, 0.5
    energy = 0.5 * k * half**2  # the walls' centres
    volume = acceptance_6d(lambda x, y, z: 0.5 * k * (x**2 + y**2 + z**2), m, ((-half, half),) * 3)
    expected = math.pi**3 / 6 * (2 * energy / k) ** 1.5 * (2 * energy / m) ** 1.5
    assert volume == pytest.approx(expected, rel=1e-2)


@pytest.mark.slow
def test_escape_is_a_minimax_path_not_the_lowest_wall() -> None:
    """A spherical rim U = H (r/R)^2 exp(1 - (r/R)^2) peaks at H on r = R and falls to
    ~0.03 H at the walls: the escape energy is the rim, H, not the lowest wall value. The
    volume is checked by radial quadrature (scipy.integrate.quad)."""
    height, rim = 1.0, 1.0

    def radial(r: float) -> float:
        return height * (r / rim) ** 2 * math.exp(1 - (r / rim) ** 2)

    def potential(x, y, z):  # type: ignore[no-untyped-def]
        s = (x**2 + y**2 + z**2) / rim**2
        return height * s * np.exp(1 - s)

    result = energetic_acceptance(potential, 1.0, ((-2.5, 2.5),) * 3, rtol=3e-3)
    assert result.escape_energy == pytest.approx(height, rel=1e-2)  # a smooth crest, sampled to O(h^2)
    integral, _ = integrate.quad(lambda r: (height - radial(r)) ** 1.5 * 4 * math.pi * r * r, 0.0, rim)
    expected = (4 * math.pi / 3) * 2**1.5 * integral
    assert result.volume == pytest.approx(expected, rel=1e-2)


def test_near_picks_the_well() -> None:
    """Two wells joined over a barrier of 1 at z = 0: below it they are separate regions,
    the deeper one by default, `near` selects the other; above it they are one region."""
    def potential(x, y, z):  # type: ignore[no-untyped-def]
        return x**2 + y**2 + (z**2 - 1) ** 2 + 0.2 * z

    box = ((-1.5, 1.5), (-1.5, 1.5), (-1.8, 1.8))
    deep = energetic_acceptance(potential, 1.0, box, energy=0.9)
    shallow = energetic_acceptance(potential, 1.0, box, energy=0.9, near=(0.0, 0.0, 1.0))
    assert deep.bottom[2] < 0 < shallow.bottom[2]
    assert shallow.volume < deep.volume
    joined = energetic_acceptance(potential, 1.0, box, near=(0.0, 0.0, 1.0))
    assert joined.volume > deep.volume + shallow.volume


@pytest.mark.parametrize(
    ("kwargs", "word"),
    [
        ({"mass": 0.0}, "mass"),
        ({"bounds": ((1, -1), (-1, 1), (-1, 1))}, "bounds"),
        ({"bounds": ((-1, 1), (-1, 1))}, "bounds"),
        ({"potential": 3.0}, "potential"),
        ({"rtol": 0.0}, "rtol"),
        ({"energy": float("nan")}, "energy"),
    ],
    ids=["mass", "reversed", "two-axes", "not-callable", "rtol", "nan-energy"],
)
def test_bad_input(kwargs: dict, word: str) -> None:  # type: ignore[type-arg]
    arguments = {
        "potential": lambda x, y, z: x * x + y * y + z * z,
        "mass": 1.0,
        "bounds": ((-1, 1), (-1, 1), (-1, 1)),
    }
    arguments.update(kwargs)
    with pytest.raises(TiltwellError, match=word):
        acceptance_6d(**arguments)


def test_nan_potential_is_reported() -> None:
    with pytest.raises(TiltwellError, match="potential"):
        acceptance_6d(lambda x, y, z: np.where(x + 0 * y * z > 0.5, np.nan, 1.0), 1.0, ((-1, 1), (-1, 1), (-1, 1)))


@pytest.mark.slow
def test_a_slope_falling_to_a_wall_is_not_the_well() -> None:
    """Tilted so far that the lowest grid value sits on a wall: the default start is still
    the interior minimum, and the volume is that of the tilted V-cone well (it equals the
    volume found when starting from the centre explicitly, and its escape energy is the
    truncated front barrier 0.8 - 0.5 * 0.8 = 0.4)."""
    def potential(x, y, z):  # type: ignore[no-untyped-def]
        return np.minimum(np.sqrt(z**2 + (x**2 + y**2) / 4), 0.8) - 0.5 * z

    box = ((-2, 2), (-2, 2), (-1, 3))
    assert potential(0.0, 0.0, 3.0) < potential(0.0, 0.0, 0.0)  # the front wall is lower
    default = energetic_acceptance(potential, 1.0, box)
    explicit = energetic_acceptance(potential, 1.0, box, near=(0.0, 0.0, 0.0))
    assert default.bottom == pytest.approx((0.0, 0.0, 0.0), abs=0.08)  # one grid step
    assert default.volume == explicit.volume > 0
    assert default.escape_energy == pytest.approx(0.4, rel=3e-2)  # a kinked crest: O(h)


def _kinked_reference() -> float:
    """6-D volume of the tilted truncated cone below its exact escape energy 0.4, by
    scipy.integrate.dblquad in cylindrical coordinates (an independent quadrature)."""
    def integrand(rho: float, z: float) -> float:
        kinetic = 0.4 - (min(math.sqrt(z * z + rho * rho / 4), 0.8) - 0.5 * z)
        return (4 * math.pi / 3) * (2 * kinetic) ** 1.5 * 2 * math.pi * rho if kinetic > 0 else 0.0

    value, _ = integrate.dblquad(integrand, -1.0, 0.8, 0.0, 1.7, epsabs=1e-9)
    return value


@pytest.mark.slow
def test_known_escape_energy_fixes_an_undersampled_kink() -> None:
    """The grid samples a kinked exit only to O(h): told the exact escape energy (as the
    trap code does from a fine 1-D cut), the volume meets the 1e-2 target; on its own
    the grid's volume still lands within 2e-2 of the independent quadrature."""
    def potential(x, y, z):  # type: ignore[no-untyped-def]
        return np.minimum(np.sqrt(z**2 + (x**2 + y**2) / 4), 0.8) - 0.5 * z

    box = ((-2, 2), (-2, 2), (-1, 3))
    reference = _kinked_reference()
    told = energetic_acceptance(potential, 1.0, box, known_escape=0.4)
    assert told.escape_energy == 0.4
    assert told.volume == pytest.approx(reference, rel=1e-2)
    assert energetic_acceptance(potential, 1.0, box).volume == pytest.approx(reference, rel=2e-2)
