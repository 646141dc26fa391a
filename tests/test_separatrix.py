"""The separatrix of sampled 1-D wells against closed forms and independent quadrature."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, optimize

from tiltwell import TiltwellError, separatrix


# --- closed forms ---------------------------------------------------------------------


@pytest.mark.parametrize(
    ("depth", "wavenumber", "mass"),
    [(1.0, 1.0, 1.0), (2.5e-26, 40.0, 1.4e-25), (3.0, 0.2, 7.0)],
    ids=["normalised", "atom-scale", "wide"],
)
def test_stationary_bucket_area(depth: float, wavenumber: float, mass: float) -> None:
    """U = -U0 cos(k z): the separatrix v = 2 sqrt(U0/m) cos(k z / 2) encloses
    16 sqrt(U0/m) / k -- the stationary RF bucket of longitudinal accelerator physics,
    area 16 in normalised units (S. Y. Lee, Accelerator Physics, ch. 3, "stationary
    bucket"; the integral is elementary: 4 sqrt(U0/m) * 4/k)."""
    z = np.linspace(-math.pi / wavenumber, math.pi / wavenumber, 2000)
    result = separatrix(z, -depth * np.cos(wavenumber * z), mass)
    expected = 16.0 * math.sqrt(depth / mass) / wavenumber
    assert result.bound
    assert result.area == pytest.approx(expected, rel=1e-5)
    # the bottom z = 0 falls between samples: depth is short by U0 k^2 h^2 / 8 at most
    assert result.depth == pytest.approx(2.0 * depth, rel=1e-5)


def _moving_bucket_reference(sin_phase: float) -> tuple[float, float, float]:
    """Area, back and front turning points of U = -cos z - F z (unit mass, F = sin phi_s)
    by root finding (scipy.optimize.brentq) and adaptive quadrature (scipy.integrate.quad),
    an independent route to the same number."""
    crest = math.pi - math.asin(sin_phase)  # the unstable fixed point: U' = sin z - F = 0
    energy = -math.cos(crest) - sin_phase * crest
    bottom = math.asin(sin_phase)

    def u(z: float) -> float:
        return -math.cos(z) - sin_phase * z

    upstream_crest = crest - 2 * math.pi
    back = optimize.brentq(lambda z: u(z) - energy, upstream_crest, bottom, xtol=1e-15)
    value, _ = integrate.quad(lambda z: math.sqrt(max(energy - u(z), 0.0)), back, crest, limit=400, epsabs=1e-13)
    return 2.0 * math.sqrt(2.0) * value, back, crest


@pytest.mark.parametrize("sin_phase", [0.05, 0.2, 0.4, 0.6, 0.8, 0.95])
def test_moving_bucket_against_quadrature(sin_phase: float) -> None:
    """Tilted cosine well (the moving bucket of a synchrotron, S. Y. Lee, Accelerator
    Physics, ch. 3): 2,000 samples give the area to better than 1e-3 (DESIGN.md)."""
    z = np.linspace(-2 * math.pi, 2 * math.pi, 2000)
    result = separatrix(z, -np.cos(z) - sin_phase * z, 1.0)
    area, back, front = _moving_bucket_reference(sin_phase)
    assert result.area == pytest.approx(area, rel=1e-4)
    assert result.z_back == pytest.approx(back, abs=1e-4)
    assert result.z_front == pytest.approx(front, abs=1e-2)


@pytest.mark.parametrize(
    ("slope", "tilt", "mass"),
    [(2.0, 0.0, 1.0), (2.0, 0.7, 3.0), (5e-21, 4e-21, 1.2e-26)],
    ids=["untilted", "tilted", "atom-scale"],
)
def test_tilted_v_well(slope: float, tilt: float, mass: float) -> None:
    """U = c|z| - f z on [-L, L] with f < c.

    Derivation: the right end is the lower barrier, E = (c - f) L. With
    v(z) = sqrt(2 (E - U) / m), each side integrates to sqrt(2/m) (2/3) E^(3/2) / s with
    s the side's slope (c - f on the right, c + f on the left), so
    A = (4/3) sqrt(2/m) E^(3/2) (1/(c - f) + 1/(c + f)) = (4/3) sqrt(2/m) E^(3/2) 2c/(c^2 - f^2).
    The back turning point sits at -E / (c + f).
    """
    length = 1e-2
    z = np.linspace(-length, length, 2001)
    result = separatrix(z, slope * np.abs(z) - tilt * z, mass)
    energy = (slope - tilt) * length
    expected = (4.0 / 3.0) * math.sqrt(2.0 / mass) * energy**1.5 * 2.0 * slope / (slope**2 - tilt**2)
    assert result.area == pytest.approx(expected, rel=1e-9)
    assert result.escape_energy == pytest.approx(energy, rel=1e-12)
    assert result.z_back == pytest.approx(-energy / (slope + tilt), rel=1e-9)
    assert result.z_front == pytest.approx(length, rel=1e-12)


@pytest.mark.parametrize("omega", [0.5, 3.0, 2e3])
def test_harmonic_well_is_an_ellipse(omega: float) -> None:
    """U = m w^2 z^2 / 2 on [-L, L]: the separatrix is the ellipse z_max = L,
    v_max = w L, of area pi w L^2 (area of an ellipse, pi a b)."""
    mass, length = 2.0, 0.3
    z = np.linspace(-length, length, 2001)
    result = separatrix(z, 0.5 * mass * omega**2 * z**2, mass)
    assert result.area == pytest.approx(math.pi * omega * length**2, rel=1e-6)


# --- independent routes and invariants -------------------------------------------------


def _bucket(sin_phase: float = 0.3):  # type: ignore[no-untyped-def]
    z = np.linspace(-2 * math.pi, 2 * math.pi, 2000)
    return separatrix(z, -np.cos(z) - sin_phase * z, 1.0)


def test_boundary_polygon_encloses_the_area() -> None:
    """Shoelace area of the boundary() polygon (an independent formula) equals `area`."""
    result = _bucket()
    z, v = result.boundary()
    assert (z[0], v[0]) == (z[-1], v[-1])
    shoelace = 0.5 * abs(np.dot(z[:-1], v[1:]) - np.dot(z[1:], v[:-1]))
    assert shoelace == pytest.approx(result.area, rel=1e-3)


def test_contains_agrees_with_monte_carlo_area() -> None:
    """Fraction of uniform random points inside, times the box area, estimates the area
    (a brute-force count; binomial standard error ~0.2 % at 4e5 points)."""
    result = _bucket()
    rng = np.random.default_rng(7)
    z0, z1 = result.z_back, result.z_front
    v1 = float(np.max(result.velocity_limit(np.linspace(z0, z1, 4001)))) * 1.01
    n = 400_000
    inside = result.contains(rng.uniform(z0, z1, n), rng.uniform(-v1, v1, n))
    p = inside.mean()
    estimate = p * (z1 - z0) * 2 * v1
    sigma = math.sqrt(p * (1 - p) / n) * (z1 - z0) * 2 * v1
    assert abs(estimate - result.area) < 4 * sigma


def test_area_scales_with_the_square_root_of_depth() -> None:
    """A = 2 integral sqrt(2 (E - U)/m) dz: scaling U by s scales A by sqrt(s) exactly."""
    z = np.linspace(-2 * math.pi, 2 * math.pi, 2000)
    base = -np.cos(z) - 0.3 * z
    areas = [separatrix(z, s * base, 1.0).area for s in (1.0, 4.0, 9.0)]
    assert areas[1] == pytest.approx(2.0 * areas[0], rel=1e-12)
    assert areas[2] == pytest.approx(3.0 * areas[0], rel=1e-12)


def test_area_falls_with_tilt_and_vanishes_past_critical() -> None:
    """For U = -cos z - F z the well exists for F < 1 (U' = sin z - F has a zero)."""
    z = np.linspace(-2 * math.pi, 2 * math.pi, 2000)
    tilts = np.linspace(0.0, 0.99, 12)
    areas = np.array([separatrix(z, -np.cos(z) - f * z, 1.0).area for f in tilts])
    assert np.all(np.diff(areas) < 0.0)
    beyond = separatrix(z, -np.cos(z) - 1.05 * z, 1.0)
    assert not beyond.bound
    assert beyond.area == 0.0
    assert beyond.boundary()[0].size == 0
    assert not beyond.contains(0.0, 0.0)


def test_untilted_symmetric_well_is_symmetric() -> None:
    z = np.linspace(-1.0, 1.0, 2001)
    result = separatrix(z, np.abs(z) ** 1.5, 1.0)
    assert result.z_bottom == pytest.approx(0.0, abs=1e-15)
    assert result.z_back == pytest.approx(-result.z_front, rel=1e-12)


def test_near_selects_the_well() -> None:
    """Two wells of U = (z^2 - 1)^2 + 0.1 z: the default is the deeper (left) one."""
    z = np.linspace(-2.0, 2.0, 4001)
    potential = (z**2 - 1) ** 2 + 0.1 * z
    deep = separatrix(z, potential, 1.0)
    shallow = separatrix(z, potential, 1.0, near=0.9)
    assert deep.z_bottom == pytest.approx(-1.0124, abs=2e-3)  # root of 4z(z^2-1) + 0.1 = 0
    assert shallow.z_bottom == pytest.approx(0.9874, abs=2e-3)
    assert shallow.depth < deep.depth
    slope_only = separatrix(z, potential, 1.0, near=1.99)
    assert slope_only.bound  # downhill from the right end leads into the right well


def test_max_energy_caps_the_orbit() -> None:
    """Capping the harmonic well at E gives the ellipse of that energy, pi E / (w / 2)... for
    m = w = 1: area = 2 pi E."""
    z = np.linspace(-1.0, 1.0, 2001)
    result = separatrix(z, 0.5 * z**2, 1.0, max_energy=0.125)
    assert result.escape_energy == 0.125
    assert result.area == pytest.approx(2 * math.pi * 0.125, rel=1e-6)


def test_monotone_potential_has_no_well() -> None:
    z = np.linspace(0.0, 1.0, 50)
    assert not separatrix(z, z**2, 1.0).bound
    assert not separatrix(z, np.zeros_like(z), 1.0).bound


# --- bad input --------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("z", "u", "mass", "word"),
    [
        ([0.0, 1.0, 2.0], [1.0, 0.0], 1.0, "U"),
        ([0.0, 2.0, 1.0], [1.0, 0.0, 1.0], 1.0, "increasing"),
        ([0.0, 1.0, 2.0], [1.0, float("nan"), 1.0], 1.0, "U"),
        ([0.0, 1.0, 2.0], [1.0, 0.0, 1.0], 0.0, "mass"),
        ([0.0, 1.0, 2.0], [1.0, 0.0, 1.0], -3.0, "mass"),
        ([[0.0, 1.0, 2.0]], [1.0, 0.0, 1.0], 1.0, "z"),
    ],
    ids=["lengths", "not-increasing", "nan", "zero-mass", "negative-mass", "2-d"],
)
def test_bad_input_names_the_argument(z: list, u: list, mass: float, word: str) -> None:  # type: ignore[type-arg]
    with pytest.raises(TiltwellError, match=word) as caught:
        separatrix(z, u, mass)
    assert isinstance(caught.value, ValueError)


def test_notebook_summary_shows_area_and_depth_in_display_units() -> None:
    """_repr_html_ shows the area in mm·m/s (x 1e3) and the depth in mK (E / k_B x 1e3,
    k_B from scipy.constants)."""
    from scipy import constants

    z = np.linspace(-1.0, 1.0, 2001)
    result = separatrix(z, constants.k * 1e-3 * 0.5 * (1 - np.cos(math.pi * z)), 1e-26)
    text = result._repr_html_()
    assert f"{result.area * 1e3:.4g} mm·m/s" in text
    assert "1 mK" in text
    assert "no bound well" in separatrix(z, z, 1.0)._repr_html_()


# --- the compiled scan against the numpy route it replaced ------------------------------


def _numpy_separatrix(z: np.ndarray, U: np.ndarray, mass: float, near: float | None, cap: float | None):  # type: ignore[no-untyped-def]
    """tiltwell's separatrix before the compiled scan (issue 12), whole-array numpy
    operations; returns (area, escape_energy, depth, z_bottom, z_back, z_front, knots_z,
    knots_u), or None when unbound. Kept here only as the reference."""
    changes = np.flatnonzero(np.diff(U) != 0.0)
    if changes.size == 0:
        return None
    starts = np.concatenate([[0], changes + 1])
    values = U[starts]
    interior = np.arange(1, starts.size - 1)
    is_min = (values[interior] < values[interior - 1]) & (values[interior] < values[interior + 1])
    is_max = (values[interior] > values[interior - 1]) & (values[interior] > values[interior + 1])
    minima = interior[is_min]
    if minima.size == 0:
        return None
    if near is not None:
        run = int(np.searchsorted(starts, np.argmin(np.abs(z - near)), side="right")) - 1
        maxima = interior[is_max]
        lower = maxima[maxima < run].max(initial=-1)
        upper = maxima[maxima > run].min(initial=starts.size)
        candidates = minima[(minima > lower) & (minima < upper)]
        if candidates.size == 0:
            return None
        chosen = candidates[np.argmin(values[candidates])]
    else:
        prefix = np.maximum.accumulate(values)
        suffix = np.maximum.accumulate(values[::-1])[::-1]
        escape = np.minimum(prefix[minima - 1], suffix[minima + 1])
        chosen = minima[int(np.argmax(escape - values[minima]))]
    bottom = int((starts[chosen] + starts[chosen + 1] - 1) // 2)
    left = bottom - 1 - int(np.argmax(U[:bottom][::-1]))
    right = bottom + 1 + int(np.argmax(U[bottom + 1:]))
    energy = min(U[left], U[right])
    if cap is not None:
        energy = min(energy, cap)
    if energy <= U[bottom]:
        return None

    def turning(barrier: int) -> tuple[float, int]:
        step = 1 if barrier > bottom else -1
        path = np.arange(bottom + step, barrier + step, step)
        above = np.flatnonzero(U[path] >= energy)
        index = int(path[above[0]]) if above.size else barrier
        inner = index - step
        rise = U[index] - U[inner]
        if U[index] < energy or rise <= 0.0:
            return float(z[index]), index
        return float(z[inner] + (energy - U[inner]) / rise * (z[index] - z[inner])), index

    (back_z, back), (front_z, front) = turning(left), turning(right)
    knots_z = np.concatenate([[back_z], z[back + 1: front], [front_z]])
    knots_u = np.concatenate([[min(energy, np.interp(back_z, z, U))], U[back + 1: front],
                              [min(energy, np.interp(front_z, z, U))]])
    root = np.sqrt(np.maximum(energy - knots_u, 0.0))
    a, b = root[:-1], root[1:]
    total = a + b
    safe = np.where(total > 0.0, total, 1.0)
    segment = np.where(total > 0.0, (2.0 / 3.0) * np.diff(knots_z) * (a * a + a * b + b * b) / safe, 0.0)
    area = 2.0 * np.sqrt(2.0 / mass) * float(segment.sum())
    return area, energy, energy - U[bottom], z[bottom], back_z, front_z, knots_z, knots_u


@pytest.mark.parametrize("seed", range(400))
def test_compiled_scan_equals_the_numpy_route(seed: int) -> None:
    """Random wells (noise, flat runs and ties, tilted cosines, rounded parabolas; with and
    without `near` and a cap; up to 6,000 samples, so the area sum runs numpy's pairwise
    order over several levels): every number and knot bit-identical to the numpy route."""
    rng = np.random.default_rng(seed)
    z = np.unique(rng.uniform(-1.0, 1.0, int(rng.integers(3, 6000 if seed % 10 == 0 else 400))))
    if z.size < 3:
        return
    kind = seed % 4
    if kind == 0:
        u = rng.normal(size=z.size)
    elif kind == 1:
        u = rng.integers(0, 4, z.size).astype(float)
    elif kind == 2:
        u = -np.cos(5 * z) - rng.uniform(0, 1.2) * 5 * z + 1e-3 * rng.normal(size=z.size)
    else:
        u = np.round(z**2 - rng.uniform(0, 2) * z, 2)
    near = None if seed % 3 == 0 else float(rng.uniform(-1.2, 1.2))
    cap = None if seed % 5 else float(rng.normal())
    mass = float(rng.uniform(0.1, 3.0))
    result = separatrix(z, u, mass, near, max_energy=cap)
    expected = _numpy_separatrix(z, u, mass, near, cap)
    if expected is None:
        assert not result.bound and result.area == 0.0
        return
    area, energy, depth, bottom, back, front, knots_z, knots_u = expected
    assert result.bound
    assert (result.area, result.escape_energy, result.depth) == (area, energy, depth)
    assert (result.z_bottom, result.z_back, result.z_front) == (bottom, back, front)
    assert np.array_equal(result.knots_z, knots_z) and np.array_equal(result.knots_potential, knots_u)
