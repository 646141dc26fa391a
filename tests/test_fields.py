"""Coil fields against the world: textbook closed forms, magpylib, and brute-force Biot-Savart.

magpylib (a general-purpose magnetic-field library; Circle fields in SI tesla, see
``help(magpylib.current.Circle)``: "SI units are used for all inputs and outputs") is used
here only as an outside reference; the package never imports it.
"""

from __future__ import annotations

import math

import magpylib
import numpy as np
import pytest
from scipy.constants import mu_0
from scipy.special import ellipe, ellipk

from tiltwell.physics import fields, loop
from tiltwell._base.validation import TiltwellError
from tiltwell.physics.fields import (
    Coil,
    CoilSet,
    FieldSource,
    IdealQuadrupole,
    anti_helmholtz,
    loop_field,
)

# (radius [m], loop plane [m], current [A])
LOOPS = {
    "unit": (1.0, 0.0, 1.0),
    "small-shifted": (0.012, 0.034, 250.0),
    "negative-current": (0.3, -0.1, -7.0),
}


def relative(value: np.ndarray, reference: np.ndarray) -> np.ndarray:
    """Per-point relative error of (N, 3) vectors: |value - reference| / |reference|."""
    return np.linalg.norm(value - reference, axis=1) / np.linalg.norm(reference, axis=1)


def points_off_wire(radius: float, plane: float, count: int, reach: float, tube: float, seed: int) -> np.ndarray:
    """Uniform random points within ``reach`` radii of the loop centre, >= ``tube`` radii from the wire."""
    rng = np.random.default_rng(seed)
    points = rng.uniform(-reach * radius, reach * radius, (4 * count, 3)) + (0.0, 0.0, plane)
    distance = np.hypot(np.hypot(points[:, 0], points[:, 1]) - radius, points[:, 2] - plane)
    return points[distance > tube * radius][:count]


def circle(radius: float, plane: float, current: float) -> magpylib.current.Circle:
    return magpylib.current.Circle(current=current, diameter=2 * radius, position=(0, 0, plane))


def on_axis(radius: float, dz: float, current: float) -> float:
    """B_z on the axis of a loop: mu0 I a^2 / (2 (a^2 + z^2)^(3/2)).

    Griffiths, Introduction to Electrodynamics, Example 5.6 (from memory).
    """
    return mu_0 * current * radius**2 / (2 * (radius**2 + dz**2) ** 1.5)


# --- loop_field ---------------------------------------------------------------------------


@pytest.mark.parametrize("height", [0.0, 0.3, -1.0, 5.0, 100.0], ids=lambda h: f"z/a={h}")
@pytest.mark.parametrize("loop", LOOPS.values(), ids=LOOPS.keys())
def test_on_axis_matches_closed_form(loop: tuple[float, float, float], height: float) -> None:
    radius, plane, current = loop
    point = np.array([[0.0, 0.0, plane + height * radius]])
    b = loop_field(point, radius, plane, current)
    # closed form: Griffiths, Introduction to Electrodynamics, Example 5.6 (from memory)
    assert b[0, 2] == pytest.approx(on_axis(radius, height * radius, current), rel=1e-12)
    assert b[0, 0] == 0.0 and b[0, 1] == 0.0


@pytest.mark.parametrize("loop", LOOPS.values(), ids=LOOPS.keys())
def test_off_axis_matches_magpylib(loop: tuple[float, float, float]) -> None:
    radius, plane, current = loop
    points = points_off_wire(radius, plane, 2000, reach=3.0, tube=1e-3, seed=1)
    reference = circle(radius, plane, current).getB(points)  # magpylib 6, tesla
    assert np.max(relative(loop_field(points, radius, plane, current), reference)) < 1e-9


@pytest.mark.parametrize("distance", [10.0, 1e3, 1e5], ids=lambda r: f"r/a={r:g}")
def test_far_field_matches_magpylib(distance: float) -> None:
    """Far from the loop the closed form cancels to O((a/r)^2); the series keeps it exact."""
    radius, plane, current = LOOPS["negative-current"]
    rng = np.random.default_rng(2)
    directions = rng.normal(size=(500, 3))
    points = distance * radius * directions / np.linalg.norm(directions, axis=1)[:, None]
    reference = circle(radius, plane, current).getB(points)  # magpylib 6, tesla
    assert np.max(relative(loop_field(points, radius, plane, current), reference)) < 1e-9


NEAR_AXIS = [1e-12, 1e-9, 1e-6, 1e-4, 1e-3, 1e-2]
HEIGHTS = [0.0, 0.37, -2.0, 20.0]


def cylindrical(b: np.ndarray, phi: float) -> tuple[float, float]:
    """(B_rho, B_phi) of one field vector at azimuth phi."""
    return (b[0] * math.cos(phi) + b[1] * math.sin(phi), -b[0] * math.sin(phi) + b[1] * math.cos(phi))


def near_axis_point(radius: float, plane: float, ratio: float, height: float, phi: float = 0.7) -> np.ndarray:
    rho = ratio * radius
    return np.array([[rho * math.cos(phi), rho * math.sin(phi), plane + height * radius]])


@pytest.mark.parametrize("height", HEIGHTS, ids=lambda h: f"z/a={h}")
@pytest.mark.parametrize("ratio", NEAR_AXIS, ids=lambda r: f"rho/a={r:g}")
def test_near_axis_matches_magpylib(ratio: float, height: float) -> None:
    radius, plane, current = LOOPS["small-shifted"]
    point = near_axis_point(radius, plane, ratio, height)
    b = loop_field(point, radius, plane, current)[0]
    reference = circle(radius, plane, current).getB(point).reshape(3)  # magpylib squeezes (1, 3)
    scale = np.linalg.norm(reference)
    for component in range(3):
        if abs(reference[component]) > 1e-6 * scale:  # B_rho vanishes in the loop plane
            assert b[component] == pytest.approx(reference[component], rel=1e-9)
        else:
            assert abs(b[component] - reference[component]) < 1e-15 * scale


@pytest.mark.parametrize("height", HEIGHTS[1:], ids=lambda h: f"z/a={h}")
@pytest.mark.parametrize("ratio", NEAR_AXIS[:-1], ids=lambda r: f"rho/a={r:g}")
def test_near_axis_matches_paraxial_series(ratio: float, height: float) -> None:
    """Paraxial expansion of an axisymmetric field, derived from div B = 0 and curl B = 0:

    B_rho = -(rho/2) B0'(z) + (rho^3/16) B0'''(z) - ...,  B_z = B0 - (rho^2/4) B0'' + ...,
    with B0 = K s^(-3/2), s = a^2 + z^2, K = mu0 I a^2 / 2 (Griffiths Example 5.6, from memory),
    differentiated by hand: B0' = -3 K z s^(-5/2), B0'' = -3 K (a^2 - 4 z^2) s^(-7/2),
    B0''' = 15 K z (3 a^2 - 4 z^2) s^(-9/2). The first omitted terms are smaller by about
    (rho/a)^4 <= 1e-12 relative for rho/a <= 1e-3.
    """
    radius, plane, current = LOOPS["small-shifted"]
    phi = 0.7
    point = near_axis_point(radius, plane, ratio, height, phi)
    b = loop_field(point, radius, plane, current)[0]
    rho, dz, k = ratio * radius, height * radius, mu_0 * current * radius**2 / 2
    s = radius**2 + dz**2
    d1 = -3 * k * dz * s**-2.5
    d2 = -3 * k * (radius**2 - 4 * dz**2) * s**-3.5
    d3 = 15 * k * dz * (3 * radius**2 - 4 * dz**2) * s**-4.5
    b_rho, b_phi = cylindrical(b, phi)
    assert b_rho == pytest.approx(-rho / 2 * d1 + rho**3 / 16 * d3, rel=1e-9)
    assert b[2] == pytest.approx(k * s**-1.5 - rho**2 / 4 * d2, rel=1e-12)
    assert abs(b_phi) < 1e-15 * abs(b[2])


def polygon_field(points: np.ndarray, radius: float, plane: float, current: float, sides: int) -> np.ndarray:
    """Biot-Savart field of an inscribed regular polygon, summed exactly segment by segment.

    Exact field of a straight segment P1 -> P2, with r_i = P_i - point:
    B = mu0 I / (4 pi) (r1 x r2) (|r1| + |r2|) / (|r1| |r2| (|r1| |r2| + r1 . r2))
    (integral of the Biot-Savart law along the segment; checked by hand against the
    infinite straight wire, mu0 I / (2 pi d)).
    """
    angles = np.linspace(0.0, 2.0 * np.pi, sides + 1)
    corners = np.stack((radius * np.cos(angles), radius * np.sin(angles), np.full_like(angles, plane)), axis=1)
    r1 = corners[None, :-1, :] - points[:, None, :]
    r2 = corners[None, 1:, :] - points[:, None, :]
    n1, n2 = np.linalg.norm(r1, axis=2), np.linalg.norm(r2, axis=2)
    factor = (n1 + n2) / (n1 * n2 * (n1 * n2 + np.sum(r1 * r2, axis=2)))
    return mu_0 * current / (4 * np.pi) * np.sum(np.cross(r1, r2) * factor[:, :, None], axis=1)


@pytest.mark.parametrize("loop", LOOPS.values(), ids=LOOPS.keys())
def test_matches_brute_force_biot_savart(loop: tuple[float, float, float]) -> None:
    """Independent brute force: polygons of 4096 and 8192 sides, Richardson-extrapolated.

    The polygon's error is ~1e-6 relative and falls as sides^-2 (measured: x4 per doubling
    at 0.1 radius from the wire); the extrapolation (4 B_8192 - B_4096) / 3 removes that
    term and leaves ~1e-12 (measured 1.0e-12), so the tolerance is 1e-10.
    """
    radius, plane, current = loop
    points = points_off_wire(radius, plane, 40, reach=2.0, tube=0.1, seed=3)
    coarse = polygon_field(points, radius, plane, current, 4096)
    fine = polygon_field(points, radius, plane, current, 8192)
    reference = (4 * fine - coarse) / 3
    assert np.max(relative(loop_field(points, radius, plane, current), reference)) < 1e-10


@pytest.mark.parametrize("loop", LOOPS.values(), ids=LOOPS.keys())
def test_far_field_is_dipole(loop: tuple[float, float, float]) -> None:
    """At r = 100 a: B = mu0/(4 pi) (3 (m.r) r / r^5 - m / r^3), m = I pi a^2 z-hat.

    Jackson, Classical Electrodynamics 3rd ed., eq. (5.56) (from memory). The next multipole
    corrects it by ~(a/r)^2 = 1e-4 (measured 1.5e-4), hence rtol 1e-3.
    """
    radius, plane, current = loop
    rng = np.random.default_rng(4)
    directions = rng.normal(size=(200, 3))
    offsets = 100 * radius * directions / np.linalg.norm(directions, axis=1)[:, None]
    moment = np.array([0.0, 0.0, current * np.pi * radius**2])
    r = np.linalg.norm(offsets, axis=1)[:, None]
    dipole = mu_0 / (4 * np.pi) * (3 * (offsets @ moment)[:, None] * offsets / r**5 - moment / r**3)
    b = loop_field(offsets + (0.0, 0.0, plane), radius, plane, current)
    assert np.max(relative(b, dipole)) < 1e-3


def test_wire_gives_nan_and_neighbours_do_not() -> None:
    """Documented in loop_field Notes: NaN within 1e-12 radius of the wire."""
    radius, plane, current = 0.2, 0.1, 3.0
    on_wire = np.array([[radius, 0.0, plane], [0.0, -radius, plane], [radius * 0.6, radius * 0.8, plane]])
    assert np.all(np.isnan(loop_field(on_wire, radius, plane, current)))
    near = np.array([[radius * (1 + 1e-6), 0.0, plane], [radius, 0.0, plane + 1e-6 * radius]])
    b = loop_field(near, radius, plane, current)
    # long straight wire, |B| = mu0 I / (2 pi d) (Ampere's law, any EM textbook);
    # the loop's curvature corrects it by ~ (d/a) ln(a/d) ~ 1e-5
    assert np.linalg.norm(b, axis=1) == pytest.approx(mu_0 * current / (2 * np.pi * 1e-6 * radius), rel=1e-4)


@pytest.mark.parametrize("m", [0.02, 0.1, 0.3], ids=lambda m: f"m={m}")
def test_bracket_series_matches_scipy_elliptic_integrals(m: float) -> None:
    """The series of g(m) used below m = 0.1 against scipy.special.ellipk/ellipe directly.

    Computed directly the bracket loses ~1e-16 / m^2 relative (< 1e-12 here), hence rtol 1e-11.
    """
    direct = ((1 - m / 2) * ellipe(m) - (1 - m) * ellipk(m)) / m**2
    assert np.polyval(loop.BRACKET_SERIES, m) == pytest.approx(direct, rel=1e-11)


# --- coils ---------------------------------------------------------------------------------


def test_thin_coil_carries_all_ampere_turns() -> None:
    coil = Coil(radius=0.05, z=0.02, current=12.0, turns=30)
    points = points_off_wire(0.05, 0.02, 200, reach=3.0, tube=1e-2, seed=5)
    reference = circle(0.05, 0.02, 30 * 12.0).getB(points)  # magpylib 6, tesla
    assert np.max(relative(coil.field(points), reference)) < 1e-9


def magpylib_midpoint_coil(coil: Coil, cells: int, points: np.ndarray) -> np.ndarray:
    """magpylib sum of cells x cells loops at the midpoints of the winding cross-section."""
    u = (np.arange(cells) + 0.5) / cells - 0.5
    loops = [
        circle(coil.radius + coil.width * du, coil.z + coil.height * dz, coil.turns * coil.current / cells**2)
        for du in u
        for dz in u
    ]
    return magpylib.getB(loops, points, sumup=True)


@pytest.mark.slow
@pytest.mark.parametrize(
    "coil",
    [Coil(0.1, 0.01, 5.0, 40, width=0.02, height=0.03, filaments=8), Coil(0.03, -0.2, -80.0, 7, 0.01, 0.004, 8)],
    ids=["wide", "flat"],
)
def test_wound_coil_matches_magpylib_filament_grid(coil: Coil) -> None:
    """Independent route: magpylib midpoint grids of 40^2 and 80^2 loops, Richardson-extrapolated.

    Midpoint error ~1e-5 relative at half a radius from the winding, falling as cells^-2
    (measured); the extrapolation leaves ~1e-10. Our 8-node Gauss-Legendre grid is then
    exact to that level, hence rtol 1e-8.
    """
    points = points_off_wire(coil.radius, coil.z, 30, reach=3.0, tube=0.5, seed=6)
    reference = (4 * magpylib_midpoint_coil(coil, 80, points) - magpylib_midpoint_coil(coil, 40, points)) / 3
    assert np.max(relative(coil.field(points), reference)) < 1e-8


def test_coil_set_chunks_agree_with_magpylib(monkeypatch: pytest.MonkeyPatch) -> None:
    """Force many small chunks; the result must still be the plain sum (magpylib reference)."""
    monkeypatch.setattr(fields, "_CHUNK_PAIRS", 7)
    coils = CoilSet((Coil(0.1, -0.05, 10.0, 3), Coil(0.07, 0.05, -4.0, 2)))
    points = points_off_wire(0.1, 0.0, 50, reach=2.0, tube=0.5, seed=7)
    reference = magpylib.getB([circle(0.1, -0.05, 30.0), circle(0.07, 0.05, -8.0)], points, sumup=True)
    assert np.max(relative(coils.field(points), reference)) < 1e-9


AH_CASES = {
    "helmholtz-spacing": (0.05, 0.05, 100.0, 1),
    "wide": (0.02, 0.06, 30.0, 50),
    "reversed": (0.1, 0.03, -5.0, 3),
}


def axis_derivative(source: CoilSet, point: np.ndarray, axis: int, component: int, step: float) -> float:
    """Five-point central derivative d B_component / d x_axis (error ~ step^4)."""
    shift = np.zeros(3)
    shift[axis] = step
    stencil = np.array([point - 2 * shift, point - shift, point + shift, point + 2 * shift])
    b = source.field(stencil)[:, component]
    return float((b[0] - 8 * b[1] + 8 * b[2] - b[3]) / (12 * step))


@pytest.mark.parametrize("case", AH_CASES.values(), ids=AH_CASES.keys())
def test_anti_helmholtz_centre_gradient(case: tuple[float, float, float, int]) -> None:
    """dB_z/dz = 3 mu0 N I a^2 d / (2 (a^2 + d^2/4)^(5/2)): derivative of Griffiths
    Example 5.6 (from memory), summed over the two coils; the radial gradient is -1/2 of it
    (div B = 0). Five-point derivative with step 1e-3 a: error <~1e-11 (measured), hence rtol 1e-9."""
    radius, separation, current, turns = case
    centre = 0.013
    pair = anti_helmholtz(radius, separation, current, turns=turns, z=centre)
    expected = 3 * mu_0 * turns * current * radius**2 * separation / (2 * (radius**2 + separation**2 / 4) ** 2.5)
    point, step = np.array([0.0, 0.0, centre]), 1e-3 * radius
    assert axis_derivative(pair, point, 2, 2, step) == pytest.approx(expected, rel=1e-9)
    assert axis_derivative(pair, point, 0, 0, step) == pytest.approx(-expected / 2, rel=1e-9)
    assert axis_derivative(pair, point, 1, 1, step) == pytest.approx(-expected / 2, rel=1e-9)
    assert np.max(np.abs(pair.field(point[None]))) < 1e-12 * abs(expected) * radius


def test_anti_helmholtz_polarity() -> None:
    lower, upper = anti_helmholtz(0.05, 0.04, 10.0, z=0.1).coils
    assert (lower.z, lower.current, upper.z, upper.current) == (0.08, -10.0, pytest.approx(0.12), 10.0)


@pytest.mark.parametrize("case", AH_CASES.values(), ids=AH_CASES.keys())
def test_magnitude_gradient_matches_magpylib(case: tuple[float, float, float, int]) -> None:
    """grad |B| against a five-point stencil (step 1e-3 a, error ~1e-12) on magpylib's field
    of the same filaments; our central step is 1e-5 a (measured error <= 7e-9), rtol 1e-7."""
    radius, separation, current, turns = case
    pair = anti_helmholtz(radius, separation, current, turns=turns, width=0.1 * radius, filaments=4)
    reference_sources = [
        circle(loop_radius, plane, loop_current)
        for coil in pair.coils
        for loop_radius, plane, loop_current in zip(*coil.loops())
    ]
    points = points_off_wire(radius, 0.0, 20, reach=0.8, tube=0.3, seed=8)
    step = 1e-3 * radius
    expected = np.empty_like(points)
    for axis in range(3):
        shift = np.zeros(3)
        shift[axis] = step
        b = [magpylib.getB(reference_sources, points + k * shift, sumup=True) for k in (-2, -1, 1, 2)]
        size = [np.linalg.norm(v, axis=1) for v in b]
        expected[:, axis] = (size[0] - 8 * size[1] + 8 * size[2] - size[3]) / (12 * step)
    assert np.max(relative(pair.magnitude_gradient(points), expected)) < 1e-7


# --- ideal quadrupole ----------------------------------------------------------------------

QUAD = IdealQuadrupole(gradient=2.5, max_field=0.05, center=0.01)


def test_quadrupole_is_divergence_free() -> None:
    rng = np.random.default_rng(9)
    points = rng.uniform(-0.005, 0.005, (20, 3)) + (0.0, 0.0, 0.01)  # inside the cap
    step = 1e-6
    divergence = sum(
        (QUAD.field(points + step * np.eye(3)[i])[:, i] - QUAD.field(points - step * np.eye(3)[i])[:, i]) / (2 * step)
        for i in range(3)
    )
    assert np.max(np.abs(divergence)) < 1e-8 * QUAD.gradient


def test_quadrupole_magnitude_and_cap() -> None:
    """|B| = B' sqrt(z'^2 + (x^2 + y^2)/4) (DESIGN.md; radial gradient half the axial by
    div B = 0), capped at max_field."""
    points = np.array([[0.004, -0.002, 0.013], [0.0, 0.0, 0.01], [0.1, 0.0, 0.01], [0.0, 0.0, -0.5]])
    x, y, z = points.T
    raw = 2.5 * np.sqrt((z - 0.01) ** 2 + (x**2 + y**2) / 4)
    np.testing.assert_allclose(QUAD.magnitude(points), np.minimum(raw, 0.05), rtol=1e-14)
    np.testing.assert_allclose(np.linalg.norm(QUAD.field(points), axis=1), np.minimum(raw, 0.05), rtol=1e-14)
    assert QUAD.magnitude(points)[2] == 0.05


def test_quadrupole_gradient_matches_finite_difference() -> None:
    rng = np.random.default_rng(10)
    points = rng.uniform(-0.01, 0.01, (30, 3))
    points = points[QUAD.magnitude(points) < 0.049]
    step = 1e-7
    numeric = np.stack(
        [(QUAD.magnitude(points + step * e) - QUAD.magnitude(points - step * e)) / (2 * step) for e in np.eye(3)],
        axis=1,
    )
    np.testing.assert_allclose(QUAD.magnitude_gradient(points), numeric, rtol=1e-6, atol=1e-9)


def test_quadrupole_gradient_zero_at_centre_and_beyond_cap() -> None:
    gradient = QUAD.magnitude_gradient([[0.0, 0.0, 0.01], [0.0, 0.0, 1.0], [0.0, 0.0, 0.011]])
    assert np.all(gradient[:2] == 0.0)
    assert gradient[2] == pytest.approx([0.0, 0.0, 2.5], rel=1e-14)


def test_anti_helmholtz_centre_looks_like_ideal_quadrupole() -> None:
    """Independent routes meet: near the centre the coil pair is linear with the closed-form
    gradient; the cubic terms correct |B| by ~(r/a)^2 = 1e-6 at r = 1e-3 a."""
    radius, separation, current = 0.05, 0.06, 200.0
    g = 3 * mu_0 * current * radius**2 * separation / (2 * (radius**2 + separation**2 / 4) ** 2.5)
    rng = np.random.default_rng(11)
    points = rng.normal(size=(50, 3)) * 1e-3 * radius
    pair = anti_helmholtz(radius, separation, current)
    np.testing.assert_allclose(pair.magnitude(points), IdealQuadrupole(g).magnitude(points), rtol=1e-5)


def test_sources_follow_the_protocol() -> None:
    assert isinstance(QUAD, FieldSource)
    assert isinstance(anti_helmholtz(0.05, 0.05, 1.0), FieldSource)
    assert not isinstance(Coil(0.05, 0.0, 1.0), FieldSource)  # a single coil only gives field()


# --- bad input -----------------------------------------------------------------------------

GOOD_POINTS = np.zeros((2, 3))

BAD_CALLS = {
    "radius-zero": (lambda: loop_field(GOOD_POINTS, 0.0, 0.0, 1.0), "radius"),
    "radius-negative": (lambda: loop_field(GOOD_POINTS, -1.0, 0.0, 1.0), "radius"),
    "points-nan": (lambda: loop_field([[0.0, np.nan, 0.0]], 1.0, 0.0, 1.0), "points"),
    "points-shape-3": (lambda: loop_field([0.0, 0.0, 0.0], 1.0, 0.0, 1.0), "points"),
    "points-shape-n2": (lambda: loop_field(np.zeros((4, 2)), 1.0, 0.0, 1.0), "points"),
    "z-nan": (lambda: loop_field(GOOD_POINTS, 1.0, np.nan, 1.0), "z"),
    "current-inf": (lambda: loop_field(GOOD_POINTS, 1.0, 0.0, np.inf), "current"),
    "current-text": (lambda: loop_field(GOOD_POINTS, 1.0, 0.0, "1 A"), "current"),  # type: ignore[arg-type]
    "coil-narrow-radius": (lambda: Coil(0.01, 0.0, 1.0, width=0.02), "radius"),
    "coil-negative-height": (lambda: Coil(0.1, 0.0, 1.0, height=-0.01), "height"),
    "coil-turns-zero": (lambda: Coil(0.1, 0.0, 1.0, turns=0), "turns"),
    "coil-turns-float": (lambda: Coil(0.1, 0.0, 1.0, turns=2.5), "turns"),  # type: ignore[arg-type]
    "coil-filaments-zero": (lambda: Coil(0.1, 0.0, 1.0, filaments=0), "filaments"),
    "coilset-empty": (lambda: CoilSet(()), "coils"),
    "coilset-not-coils": (lambda: CoilSet((1.0,)), "coils"),  # type: ignore[arg-type]
    "ah-separation-zero": (lambda: anti_helmholtz(0.1, 0.0, 1.0), "separation"),
    "ah-overlap": (lambda: anti_helmholtz(0.1, 0.01, 1.0, height=0.02), "separation"),
    "coilset-points-nan": (lambda: anti_helmholtz(0.1, 0.1, 1.0).magnitude([[np.nan] * 3]), "points"),
    "quad-gradient-zero": (lambda: IdealQuadrupole(0.0), "gradient"),
    "quad-max-field-negative": (lambda: IdealQuadrupole(1.0, max_field=-1.0), "max_field"),
    "quad-max-field-nan": (lambda: IdealQuadrupole(1.0, max_field=np.nan), "max_field"),
}


@pytest.mark.parametrize("call, name", BAD_CALLS.values(), ids=BAD_CALLS.keys())
def test_bad_input_raises_naming_the_argument(call: object, name: str) -> None:
    with pytest.raises(TiltwellError, match=rf"^{name}\b"):
        call()  # type: ignore[operator]
    assert issubclass(TiltwellError, ValueError)
