"""Spin flips at the field zero: the Landau–Zener closed form and the tracker's check.

Outside references, named beside each check:
- the Landau–Zener formula P = exp(-2 pi delta), delta = Delta^2 / (4 hbar alpha) (C. Zener,
  Proc. R. Soc. A 137, 696 (1932); notation of S. N. Shevchenko, S. Ashhab, F. Nori,
  Phys. Rep. 492, 1 (2010); from memory), written out here by hand for each path;
- a brute-force integration of the Schrödinger equation of a spin j in the field seen along
  the straight path (scipy.integrate.solve_ivp; spin matrices and adiabatic states built
  here with numpy.linalg.eigh, independently of tiltwell);
- the binomial standard error sqrt(p (1 - p) / N).
Particles are invented: a spin-1/2 of one Bohr magneton, and a 1000 kg "heavy" twin whose
trap force is negligible (its path through the zero is straight to ~1e-20 m).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants
from scipy.integrate import solve_ivp

from tiltwell import IdealQuadrupole, LinearZeeman, Species, TiltwellError, Trap
from tiltwell.dynamics.results import tracking_result
from tiltwell.dynamics.spinflip import (
    SpinFlips,
    adiabaticity,
    flip_probability,
    landau_zener_probability,
    quadrupole_pass_probability,
    state_survival,
)
from tiltwell.dynamics.tracking import FieldMap, track

from conftest import MU_B

HBAR = constants.hbar
GRADIENT = 1.0  # axial gradient B' [T/m] of the test quadrupole
HEAVY = Species("heavy", 1000.0, LinearZeeman(MU_B))
BOX = ((-0.01, 0.01),) * 3


def spin_matrices(j: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(J_x, J_y, J_z) / hbar of spin j in the basis m = j, ..., -j (textbook ladder form)."""
    m = np.arange(j, -j - 1, -1)
    plus = np.diag(np.sqrt(j * (j + 1) - m[1:] * (m[1:] + 1)), 1).astype(complex)
    return (plus + plus.T) / 2, (plus - plus.T) / 2j, np.diag(m).astype(complex)


def eigenstate(field: np.ndarray, j: float, m: float) -> np.ndarray:
    """The state of projection m on the direction of ``field``."""
    jx, jy, jz = spin_matrices(j)
    unit = field / np.linalg.norm(field)
    values, vectors = np.linalg.eigh(unit[0] * jx + unit[1] * jy + unit[2] * jz)
    return vectors[:, int(np.argmin(abs(values - m)))]


def brute_force_flip(moment: float, r0: np.ndarray, u: np.ndarray, j: float = 0.5, m: float = 0.5,
                     reach: float = 60.0) -> float:
    """Probability of leaving |j, m> (quantised along B) on the straight line r0 + u t in
    B = B' (-x/2, -y/2, z), from H = hbar gamma B.J, gamma = moment / (m hbar), integrated from
    ``reach`` transition times before the closest approach to as many after it."""
    g = GRADIENT * np.array([-0.5, -0.5, 1.0])
    b0, rate = g * r0, g * u
    t0 = -np.dot(b0, rate) / np.dot(rate, rate)  # closest approach in field space
    gamma = moment / (m * HBAR)
    # the transition lasts ~ max(B_min, sqrt(|Bdot| / gamma)) / |Bdot| (adiabatic / diabatic limit)
    size = np.linalg.norm(rate)
    span = reach * max(np.linalg.norm(b0 + rate * t0), math.sqrt(size / gamma)) / size
    jx, jy, jz = spin_matrices(j)
    n = jx.shape[0]

    def rhs(t: float, y: np.ndarray) -> np.ndarray:
        b = b0 + rate * t
        psi = y[:n] + 1j * y[n:]
        d = -1j * gamma * ((b[0] * jx + b[1] * jy + b[2] * jz) @ psi)
        return np.concatenate([d.real, d.imag])

    start, end = t0 - span, t0 + span
    psi0 = eigenstate(b0 + rate * start, j, m)
    solution = solve_ivp(rhs, (start, end), np.concatenate([psi0.real, psi0.imag]), method="DOP853",
                         rtol=1e-10, atol=1e-12)
    psi = solution.y[:n, -1] + 1j * solution.y[n:, -1]
    return 1.0 - abs(np.vdot(eigenstate(b0 + rate * end, j, m), psi)) ** 2


# --- the closed form against the Schrödinger equation ------------------------------------------

#: (point on the line [m], velocity [m/s]): paths across the axis, along it, and oblique,
#: with impact parameters and speeds giving flip probabilities from 0.03 to 0.98.
PASSES = {
    "across-b1um-v1": ([0.0, 0.0, 1.0e-6], [1.0, 0.0, 0.0]),
    "across-b2um-v3": ([0.0, 0.0, 2.0e-6], [3.0, 0.0, 0.0]),
    "across-b0.5um-v0.5": ([0.0, 0.0, 0.5e-6], [0.5, 0.0, 0.0]),
    "across-b2.5um-v1": ([0.0, 0.0, 2.5e-6], [1.0, 0.0, 0.0]),
    "across-b0.2um-v1": ([0.0, 0.0, 0.2e-6], [1.0, 0.0, 0.0]),
    "along-b3um-v1": ([3.0e-6, 0.0, 0.0], [0.0, 0.0, 1.0]),
    "along-b5um-v8": ([0.0, 5.0e-6, 0.0], [0.0, 0.0, 8.0]),
    "oblique": ([1.0e-6, -2.0e-6, 0.5e-6], [0.7, 0.4, -1.1]),
}


@pytest.mark.parametrize("case", PASSES, ids=list(PASSES))
def test_pass_probability_matches_schrodinger_spin_half(case: str) -> None:
    r0, u = (np.array(c) for c in PASSES[case])
    expected = brute_force_flip(MU_B, r0, u)
    got = quadrupole_pass_probability(MU_B, GRADIENT, [r0], [u])[0]
    assert 0.01 < expected < 0.99  # a pass neither fully adiabatic nor fully diabatic
    # measured |got - expected| < 3.2e-6 (1e-7 from 200 transition times): the finite start and end
    assert got == pytest.approx(expected, abs=1e-5)


@pytest.mark.parametrize(("j", "m"), [(1.0, 1.0), (1.5, 0.5), (2.0, 1.0)], ids=["1,1", "3/2,1/2", "2,1"])
def test_larger_spin_matches_schrodinger(j: float, m: float) -> None:
    """Majorana's spin-j result against the (2j+1)-level Schrödinger equation."""
    r0, u = np.array([0.0, 0.0, 1.5e-6]), np.array([2.0, 0.0, 0.0])
    moment = m * MU_B  # gamma = mu_B / hbar for every state
    expected = brute_force_flip(moment, r0, u, j, m)
    got = quadrupole_pass_probability(moment, GRADIENT, [r0], [u], spin=j, projection=m)[0]
    assert 0.05 < expected < 0.95
    assert got == pytest.approx(expected, abs=1e-5)  # measured < 1.5e-6


@pytest.mark.parametrize(("b", "v"), [(1e-6, 1.0), (3e-6, 20.0), (0.2e-6, 0.05)], ids=["1um-1", "3um-20", "0.2um-0.05"])
def test_isotropic_model_is_landau_zener(b: float, v: float) -> None:
    """B = B'(b e_perp + v t e_par): Delta = 2 mu B' b, alpha = 2 mu B' v, so
    P = exp(-2 pi Delta^2 / (4 hbar alpha)) = exp(-pi mu B' b^2 / (hbar v)) (Zener 1932)."""
    delta, alpha = 2 * MU_B * GRADIENT * b, 2 * MU_B * GRADIENT * v
    expected = math.exp(-2 * math.pi * delta**2 / (4 * HBAR * alpha))
    assert float(flip_probability(MU_B, GRADIENT, b, v)) == pytest.approx(expected, rel=1e-12)


def test_peak_adiabaticity_gives_the_probability() -> None:
    """Along the path, max kappa (sampled; rate by central differences of the field) gives
    exp(-pi / (2 kappa_max)), the same number as the Landau–Zener formula written out."""
    b, v = 1.0e-6, 1.0
    t = np.linspace(-5e-6, 5e-6, 20001)
    fields = GRADIENT * np.column_stack([-v * t / 2, 0 * t, np.full_like(t, b)])
    rates = np.gradient(fields, t, axis=0)
    kappa = adiabaticity(MU_B, fields, rates)
    expected = math.exp(-2 * math.pi * MU_B * GRADIENT * b**2 / (HBAR * v))  # Zener, Bdot = B' v / 2
    assert math.exp(-math.pi / (2 * kappa.max())) == pytest.approx(expected, rel=1e-6)


def test_state_survival_closed_forms() -> None:
    """d^1_11 = cos^2(beta/2), d^{3/2}_{1/2,1/2} = cos(beta/2)(3 cos beta - 1)/2 (Wigner
    small-d tables, e.g. Sakurai, Modern Quantum Mechanics, from memory)."""
    p = np.array([0.0, 0.1, 0.5, 0.9, 1.0])
    beta = 2 * np.arcsin(np.sqrt(p))
    assert np.allclose(state_survival(p, 1.0, 1.0), np.cos(beta / 2) ** 4, atol=1e-15)
    half = np.cos(beta / 2) * (3 * np.cos(beta) - 1) / 2
    assert np.allclose(state_survival(p, 1.5, 0.5), half**2, atol=1e-15)
    assert np.allclose(state_survival(p), 1 - p, atol=1e-15)


# --- the tracker's per-trajectory check on straight passes --------------------------------------


def straight_passes() -> tuple[np.ndarray, np.ndarray]:
    """Start points 5 mm before the closest approach and velocities [m/s] of the heavy twin."""
    lines = np.array([[0, 0, 1.0e-6], [0, 0, 2.0e-6], [3.0e-6, 0, 0], [0, 5.0e-6, 0], [1e-6, -2e-6, 0.5e-6]])
    velocities = np.array([[1.0, 0, 0], [3.0, 0, 0], [0, 0, 1.0], [0, 0, 8.0], [0.7, 0.4, -1.1]])
    speeds = np.linalg.norm(velocities, axis=1)[:, None]
    return np.hstack([lines - velocities / speeds * 5e-3, velocities]), speeds[:, 0]


def textbook(particles: np.ndarray) -> np.ndarray:
    """Zener's formula written out for each path (see :func:`straight_passes`): across the
    axis at height b, Bdot = B' v / 2 and B_min = B' b; along it at radius b, Bdot = B' v and
    B_min = B' b / 2; the oblique one from G r0 x G u."""
    out = []
    g = GRADIENT * np.array([-0.5, -0.5, 1.0])
    for row in particles:
        b0, rate = g * row[:3], g * row[3:]
        minimum = np.linalg.norm(np.cross(b0, rate)) / np.linalg.norm(rate)
        out.append(math.exp(-math.pi * MU_B * minimum**2 / (HBAR * np.linalg.norm(rate))))
    return np.array(out)


@pytest.mark.parametrize("method", ["verlet", "yoshida4"])
@pytest.mark.parametrize("step", [2e-5, 1e-4], ids=["fine", "coarse"])
def test_tracker_check_reproduces_landau_zener(method: str, step: float) -> None:
    particles, speeds = straight_passes()
    duration = 1e-2 / speeds.min()  # every particle passes the zero (5 mm) and may leave
    result = track(Trap(IdealQuadrupole(GRADIENT), HEAVY, BOX), particles, duration, step, method=method,
                   spin_flips=SpinFlips(spin=0.5))
    assert result.survival_weights is not None
    expected = textbook(particles)
    assert np.all(expected > 0.01) and np.all(expected < 0.95)
    assert np.allclose(1 - result.survival_weights, expected, rtol=1e-10, atol=0)  # measured 3e-13
    assert result.spin_flip_loss == pytest.approx(expected.mean(), rel=1e-10)


@pytest.mark.parametrize("route", ["field_map", "source_field"])
def test_other_field_routes_agree(route: str) -> None:
    """The field-vector grid next to a force map (trilinear: exact for a linear field) and
    the plain ``source.field`` route (a subclass of the quadrupole has no inline kernel)."""

    class Quadrupole(IdealQuadrupole):
        pass

    particles, speeds = straight_passes()
    source = Quadrupole(GRADIENT) if route == "source_field" else IdealQuadrupole(GRADIENT)
    trap = Trap(source, HEAVY, BOX)
    field_map = FieldMap.from_trap(trap, (5, 6, 7)) if route == "field_map" else None
    result = track(trap, particles, 1e-2 / speeds.min(), 5e-5, field_map=field_map, spin_flips=True)
    assert result.survival_weights is not None
    assert np.allclose(1 - result.survival_weights, textbook(particles), rtol=1e-7, atol=0)


def test_ramped_field_is_scaled() -> None:
    """With the trap at half strength the field is B'/2: the textbook formula with B'/2."""
    particles, speeds = straight_passes()
    result = track(Trap(IdealQuadrupole(GRADIENT), HEAVY, BOX), particles, 1e-2 / speeds.min(), 5e-5,
                   ramp=lambda t: 0.5, spin_flips=True)
    assert result.survival_weights is not None
    exponent = np.log(textbook(particles))
    assert np.allclose(1 - result.survival_weights, np.exp(exponent / 2), rtol=1e-8, atol=0)


# --- switching, bookkeeping, errors ---------------------------------------------------------------


def thermal_run(spin_flips: object) -> object:
    rng = np.random.default_rng(11)
    species = Species("light", 7 * constants.atomic_mass, LinearZeeman(MU_B))
    particles = np.column_stack([rng.normal(0, 1e-3, (200, 3)), rng.normal(0, 0.3, (200, 3))])
    trap = Trap(IdealQuadrupole(20.0, 0.2), species, ((-0.008, 0.008),) * 3)
    return track(trap, particles, 0.02, 2e-5, method="yoshida4", deceleration=100.0, chunk=60, spin_flips=spin_flips,
                 ramp=lambda t: min(max(t / 1e-3, 0.0), 1.0))


def test_check_does_not_change_trajectories() -> None:
    """The check is passive: on or off, every array of the result is identical bit for bit
    (the off run is the tracker without the check; the existing tests keep its values)."""
    off, also_off, on = thermal_run(None), thermal_run(False), thermal_run(True)
    for name in ("times", "survival", "final", "kept", "lost_time"):
        assert np.array_equal(getattr(off, name), getattr(on, name))
        assert np.array_equal(getattr(off, name), getattr(also_off, name))
    assert off.survival_weights is None and math.isnan(off.spin_flip_loss)  # type: ignore[attr-defined]
    assert off.kept_after_flips == off.fraction  # type: ignore[attr-defined]
    assert on.spin_flip_loss > 0.0  # a light spin-1/2 at 0.3 m/s flips at 20 T/m  # type: ignore[attr-defined]


def test_loss_channels_add_up_and_errors_are_binomial() -> None:
    weights = np.array([1.0, 0.0, 1.0, 1.0, 0.0, 1.0, 1.0, 1.0])
    lost = np.array([9, 9, 3, 9, 9, 9, 2, 9])
    result = tracking_result(np.zeros((8, 6)), lost, 8, 1e-3, 1, "verlet", weights=weights)
    assert result.spin_flip_loss == 0.25
    assert result.spin_flip_error == pytest.approx(math.sqrt(0.25 * 0.75 / 8), rel=1e-14)  # binomial
    assert result.kept_after_flips == pytest.approx(4 / 8)
    assert result.kept_after_flips_error == pytest.approx(math.sqrt(0.5 * 0.5 / 8), rel=1e-14)
    assert "spin-flip loss" in result._repr_html_()


@pytest.mark.parametrize(
    ("call", "words"),
    [
        (lambda: flip_probability(MU_B, 1.0, 1e-6, -1.0), "speed [m/s]"),
        (lambda: flip_probability(MU_B, 0.0, 1e-6, 1.0), "gradient [T/m]"),
        (lambda: flip_probability(MU_B, 1.0, -1e-6, 1.0), "impact [m]"),
        (lambda: landau_zener_probability(0.0, 1e-6, 1.0), "moment [J/T]"),
        (lambda: state_survival(0.5, 0.7), "spin [1]"),
        (lambda: state_survival(0.5, 1.0, 0.0), "projection [1]"),
        (lambda: state_survival(1.5), "probability [1]"),
        (lambda: thermal_run("yes"), "spin_flips"),
    ],
    ids=["speed", "gradient", "impact", "moment", "spin", "projection", "probability", "switch"],
)
def test_bad_input_is_named(call: object, words: str) -> None:
    with pytest.raises(TiltwellError, match=words.replace("[", r"\[").replace("]", r"\]")):
        call()  # type: ignore[operator]
