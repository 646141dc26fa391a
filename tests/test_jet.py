"""The free jet: choked flow two ways, a worked number, the peaking factors and their source,
the cone solid angle against quadrature, and bad inputs."""

from __future__ import annotations

import math

import pytest
import scipy.constants as sc
from scipy.integrate import dblquad

from tiltwell import TiltwellError, cone, free_jet
from tiltwell.physics.jet import PEAKING_FACTORS, choked_flow_factor, default_peaking_factor

from conftest import AMU, K_B

ARGON = 39.948 * AMU  # kg (standard atomic weight, from memory)
NITROGEN = 28.0134 * AMU  # kg


def hand_flow(p0: float, t0: float, d: float, m: float, g: float) -> float:
    """The choked-flow formula written out (Miller, ch. 2 of Scoles (ed.), Atomic and
    Molecular Beam Methods Vol. 1, from memory)."""
    f = math.sqrt(g / (g + 1)) * (2 / (g + 1)) ** (1 / (g - 1))
    return f * p0 / (K_B * t0) * math.sqrt(2 * K_B * t0 / m) * math.pi * d**2 / 4


def gas_dynamics_flow(p0: float, t0: float, d: float, m: float, g: float) -> float:
    """Independent route: mass flow rho* a* A of an isentropic choked nozzle divided by m,
    with rho* = rho0 (2/(g+1))^(1/(g-1)), T* = T0 2/(g+1), a* = sqrt(g k T*/m)
    (J. D. Anderson, Modern Compressible Flow, ch. 5, from memory)."""
    rho0 = p0 * m / (K_B * t0)
    rho_star = rho0 * (2 / (g + 1)) ** (1 / (g - 1))
    t_star = t0 * 2 / (g + 1)
    a_star = math.sqrt(g * K_B * t_star / m)
    return rho_star * a_star * math.pi * (d / 2) ** 2 / m


CASES = [
    (1e5, 300.0, 0.5e-3, ARGON, 5 / 3),
    (3e6, 80.0, 1e-3, NITROGEN, 7 / 5),
    (2e4, 500.0, 0.2e-3, 4.0026 * AMU, 1.55),
    (1e6, 295.0, 0.3e-3, 44.0 * AMU, 1.29),
]


@pytest.mark.parametrize("p0, t0, d, m, g", CASES)
def test_flow_matches_the_formula_and_gas_dynamics(p0: float, t0: float, d: float, m: float, g: float) -> None:
    jet = free_jet(p0, t0, d, m, g, peaking_factor=1.5)
    assert jet.flow == pytest.approx(hand_flow(p0, t0, d, m, g), rel=1e-12)
    assert jet.flow == pytest.approx(gas_dynamics_flow(p0, t0, d, m, g), rel=1e-12)
    assert choked_flow_factor(g) == pytest.approx(hand_flow(p0, t0, d, m, g) / (
        p0 / (K_B * t0) * math.sqrt(2 * K_B * t0 / m) * math.pi * d**2 / 4), rel=1e-12)


def test_worked_number_argon() -> None:
    """Argon, 1 bar, 300 K, 0.5 mm, by hand: n0 = 1e5 / (1.380649e-23 * 300) = 2.4144e25
    /m^3; sqrt(2 k T0 / m) = 353.39 m/s (m = 6.6335e-26 kg); F(5/3) = sqrt(5/8) (3/4)^1.5
    = 0.51349; A = pi (0.5e-3)^2 / 4 = 1.9635e-7 m^2; flow = 8.603e20 /s. Centreline
    intensity with kappa = 1.98: 1.98 / pi * 8.603e20 = 5.422e20 /(sr s)."""
    jet = free_jet(1e5, 300.0, 0.5e-3, ARGON, 5 / 3)
    assert jet.flow == pytest.approx(8.603e20, rel=2e-4)
    assert jet.peaking_factor == 1.98
    assert jet.centreline_intensity == pytest.approx(5.422e20, rel=2e-4)


def test_cited_peaking_factors() -> None:
    """Beijerinck & Verster, Physica 111C (1981) 327 (from memory): kappa = 1.98 for
    gamma = 5/3, 1.38 for 7/5; between them linear in gamma (midpoint 1.68)."""
    assert PEAKING_FACTORS == {7 / 5: 1.38, 5 / 3: 1.98}
    assert default_peaking_factor(5 / 3) == 1.98
    assert default_peaking_factor(1.4) == 1.38
    assert default_peaking_factor(0.5 * (1.4 + 5 / 3)) == pytest.approx(1.68, rel=1e-12)
    assert default_peaking_factor(1.667) == 1.98  # 5/3 typed to four digits
    assert free_jet(1e5, 300.0, 1e-4, NITROGEN, 1.4).centreline_intensity == pytest.approx(
        1.38 / math.pi * hand_flow(1e5, 300.0, 1e-4, NITROGEN, 1.4), rel=1e-12)


def test_no_default_below_seven_fifths() -> None:
    with pytest.raises(TiltwellError, match="peaking_factor"):
        free_jet(1e5, 300.0, 1e-4, 44.0 * AMU, 1.29)
    assert free_jet(1e5, 300.0, 1e-4, 44.0 * AMU, 1.29, peaking_factor=1.1).peaking_factor == 1.1


def test_flow_is_linear_in_pressure_and_goes_as_d_squared() -> None:
    base = free_jet(1e5, 300.0, 0.5e-3, ARGON, 5 / 3)
    assert free_jet(3.7e5, 300.0, 0.5e-3, ARGON, 5 / 3).flow == pytest.approx(3.7 * base.flow, rel=1e-13)
    assert free_jet(1e5, 300.0, 1e-3, ARGON, 5 / 3).flow == pytest.approx(4 * base.flow, rel=1e-13)
    # at fixed p0: n0 ~ 1/T0, speed ~ sqrt(T0): flow ~ T0^(-1/2)
    assert free_jet(1e5, 75.0, 0.5e-3, ARGON, 5 / 3).flow == pytest.approx(2 * base.flow, rel=1e-13)


def disc_solid_angle(diameter: float, distance: float) -> float:
    """Independent route: integrate L / (L^2 + x^2 + y^2)^(3/2) over the disc
    (scipy.integrate.dblquad)."""
    r = diameter / 2
    value, _ = dblquad(
        lambda y, x: distance / (distance**2 + x * x + y * y) ** 1.5,
        -r, r, lambda x: -math.sqrt(max(r * r - x * x, 0.0)), lambda x: math.sqrt(max(r * r - x * x, 0.0)),
        epsabs=0.0, epsrel=1e-11,
    )
    return value


@pytest.mark.parametrize("diameter, distance", [(2e-3, 0.3), (1e-2, 0.05), (0.1, 0.05), (1.0, 0.01)])
def test_cone_against_quadrature(diameter: float, distance: float) -> None:
    assert cone(diameter, distance) == pytest.approx(disc_solid_angle(diameter, distance), rel=1e-8)


def test_cone_limits() -> None:
    """Small aperture: area / L^2; huge aperture: the half sphere 2 pi."""
    assert cone(1e-4, 1.0) == pytest.approx(math.pi * (0.5e-4) ** 2, rel=1e-8)
    assert cone(1e6, 1e-3) == pytest.approx(2 * math.pi, rel=1e-8)


def test_into_and_per_pulse() -> None:
    jet = free_jet(1e5, 300.0, 0.5e-3, ARGON, 5 / 3)
    omega = cone(2e-3, 0.3)  # a 2 mm skimmer 30 cm away
    assert jet.into(omega) == pytest.approx(1.98 / math.pi * hand_flow(1e5, 300.0, 0.5e-3, ARGON, 5 / 3) * omega,
                                            rel=1e-12)
    assert jet.per_pulse(1e-4) == pytest.approx(hand_flow(1e5, 300.0, 0.5e-3, ARGON, 5 / 3) * 1e-4, rel=1e-12)


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"pressure": 0.0}, "pressure"),
        ({"pressure": -1.0}, "pressure"),
        ({"temperature": 0.0}, "temperature"),
        ({"nozzle_diameter": -1e-3}, "nozzle_diameter"),
        ({"mass": 0.0}, "mass"),
        ({"heat_capacity_ratio": 1.0}, "heat_capacity_ratio"),
        ({"heat_capacity_ratio": 1.8}, "heat_capacity_ratio"),
        ({"peaking_factor": 0.0}, "peaking_factor"),
        ({"pressure": float("nan")}, "pressure"),
        ({"pressure": "1 bar"}, "pressure"),
    ],
)
def test_bad_inputs(kwargs: dict[str, object], name: str) -> None:
    args: dict[str, object] = dict(pressure=1e5, temperature=300.0, nozzle_diameter=1e-3, mass=ARGON,
                                   heat_capacity_ratio=5 / 3)
    args.update(kwargs)
    with pytest.raises(TiltwellError, match=name):
        free_jet(**args)  # type: ignore[arg-type]


def test_bad_method_inputs() -> None:
    jet = free_jet(1e5, 300.0, 0.5e-3, ARGON, 5 / 3)
    for bad in (0.0, -1e-3, 7.0):
        with pytest.raises(TiltwellError, match="solid_angle"):
            jet.into(bad)
    with pytest.raises(TiltwellError, match="open_time"):
        jet.per_pulse(0.0)
    with pytest.raises(TiltwellError, match="distance"):
        cone(1e-3, 0.0)
    with pytest.raises(TiltwellError, match="diameter"):
        cone(-1e-3, 1.0)


def test_constants_are_codata() -> None:
    """The hand formulas use scipy's CODATA k_B, the same as tiltwell's (conftest)."""
    assert K_B == sc.k
