"""Tests of tiltwell.physics.beam and tiltwell.source. Every numerical check names its outside reference beside it.

Demo numbers are invented (an invented lab's krypton-seeded source), not a published setup.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest
import scipy.constants as sc
from scipy import integrate, stats

from tiltwell._base.validation import TiltwellError
from tiltwell.physics.beam import Beam, PhasePlane
from tiltwell.physics.source import (
    Aperture,
    Gas,
    Source,
    gas,
    gases,
    mixture,
    terminal_velocity,
)

from conftest import AMU as U
#: Standard atomic weights [u] (IUPAC/CIAAW abridged table, from memory).
WEIGHTS = {"He": 4.002602, "Ne": 20.1797, "Ar": 39.948, "Kr": 83.798, "Xe": 131.293,
           "H2": 2 * 1.00794, "N2": 2 * 14.0067, "O2": 2 * 15.9994}
#: Cv/R of an ideal gas: 3/2 for atoms, 5/2 for rigid diatomics (equipartition, any
#: kinetic-theory text, e.g. Reif, Fundamentals of Statistical and Thermal Physics, from memory).
CV = {"He": 1.5, "Ne": 1.5, "Ar": 1.5, "Kr": 1.5, "Xe": 1.5, "H2": 2.5, "N2": 2.5, "O2": 2.5}


def closed_form_speed(weight: float, cv: float, temperature: float) -> float:
    """v = sqrt(2 Cp T0 / m) with Cp = (Cv + 1) k per particle: Miller, ch. 2 of Scoles (ed.),
    Atomic and Molecular Beam Methods Vol. 1 (from memory), written with scipy.constants."""
    return math.sqrt(2.0 * (cv + 1.0) * sc.k * temperature / (weight * U))


def invented_source(**changes: Any) -> Source:
    """An invented lab's source: 2 % of a 50 u paramagnetic molecule in krypton."""
    carrier = mixture({"Kr": 98.0, Gas("seed", 50 * U, 7 / 5): 2.0})
    values: dict[str, Any] = dict(
        gas=carrier, temperature=295.0, mass=50 * U, valve_open_time=12e-6, nozzle_diameter=0.8e-3,
        nozzle_skimmer_distance=0.14, skimmer_diameter=2.5e-3, flight_distance=0.37, speed_ratio=9.0,
    )
    values.update(changes)
    return Source(**values)


def random_plane(seed: int) -> PhasePlane:
    """A random correlated plane of beam-like scale (mm, m/s), built from numpy draws."""
    rng = np.random.default_rng(seed)
    sq, sv = 10 ** rng.uniform(-4, -2), 10 ** rng.uniform(-1, 1.5)
    r = rng.uniform(-0.95, 0.95)
    return PhasePlane(np.array([[sq * sq, r * sq * sv], [r * sq * sv, sv * sv]]))


def covariance_standard_errors(cov: np.ndarray, n: int) -> np.ndarray:
    """Standard error of each entry of a normal sample covariance, sqrt((s_ii s_jj + s_ij^2)/n)
    (Wishart second moments; T. W. Anderson, An Introduction to Multivariate Statistical
    Analysis, from memory); on the diagonal this is sigma^2 sqrt(2/n)."""
    d = np.diag(cov)
    return np.sqrt((np.outer(d, d) + cov**2) / n)


# --- terminal velocity ---------------------------------------------------------------------------

@pytest.mark.parametrize("name", list(WEIGHTS))
def test_terminal_velocity_against_closed_form(name: str) -> None:
    """Catalogue mass and gamma against the closed form with scipy.constants (above)."""
    g = gas(name)
    got = terminal_velocity(g.mass, g.heat_capacity_ratio, 300.0)
    assert got == pytest.approx(closed_form_speed(WEIGHTS[name], CV[name], 300.0), rel=1e-12)


@pytest.mark.parametrize(
    ("name", "textbook"),
    [("He", 1765.0), ("Ne", 785.0), ("Ar", 558.0), ("Kr", 385.0), ("Xe", 309.0), ("N2", 790.0)],
)
def test_terminal_velocity_against_textbook_numbers(name: str, textbook: float) -> None:
    """Room-temperature (300 K) terminal velocities as tabulated for sqrt(5kT/m) (sqrt(7kT/m)
    for N2); from memory, Scoles (ed.), Atomic and Molecular Beam Methods Vol. 1, ch. 2."""
    g = gas(name)
    assert terminal_velocity(g.mass, g.heat_capacity_ratio, 300.0) == pytest.approx(textbook, rel=1e-2)


@pytest.mark.parametrize("name", list(WEIGHTS))
def test_catalogue_gamma_is_cp_over_cv(name: str) -> None:
    """gamma = (Cv + R)/Cv with equipartition Cv (CV above): 5/3 atoms, 7/5 diatomics."""
    assert gas(name).heat_capacity_ratio == pytest.approx((CV[name] + 1) / CV[name], rel=1e-15)


def test_catalogue_lists_every_gas_and_accepts_english_names() -> None:
    assert set(gases()) == set(WEIGHTS)
    assert gas(" Krypton ") == gas("kr")


@pytest.mark.parametrize(("typo", "suggested"), [("Kry", "Kr"), ("Neon2", "Ne"), ("argn", "Ar")])
def test_unknown_gas_lists_close_matches(typo: str, suggested: str) -> None:
    with pytest.raises(TiltwellError, match=f"unknown gas.*close matches:.*{suggested}"):
        gas(typo)


# --- mixtures ------------------------------------------------------------------------------------

def test_equal_helium_nitrogen_mixture_by_hand() -> None:
    """By hand: gamma = (5/2 + 7/2) / (3/2 + 5/2) = 3/2; mass = (4.002602 + 28.0134)/2 u."""
    mix = mixture({"He": 0.5, gas("N2"): 0.5})
    assert mix.heat_capacity_ratio == pytest.approx(1.5, rel=1e-14)
    assert mix.mass == pytest.approx((4.002602 + 28.0134) / 2 * U, rel=1e-14)


def test_seeded_krypton_by_hand() -> None:
    """By hand: 2 % O2 in Kr, gamma = (0.98·5/2 + 0.02·7/2)/(0.98·3/2 + 0.02·5/2) = 2.52/1.52."""
    mix = mixture({"Kr": 98, "O2": 2})
    assert mix.heat_capacity_ratio == pytest.approx(2.52 / 1.52, rel=1e-14)
    assert mix.mass == pytest.approx((0.98 * 83.798 + 0.02 * 31.9988) * U, rel=1e-14)


@pytest.mark.parametrize(
    "parts",
    [{"Ar": 1.0}, {"argon": 100.0}, {"Ar": 0.3, "argon": 0.7}],
    ids=["fraction-1", "percent", "name-twice"],
)
def test_single_gas_mixture_returns_the_gas(parts: dict[str, float]) -> None:
    assert mixture(parts) == gas("Ar")


def test_mixture_amounts_are_normalised() -> None:
    """Percentages and fractions describe the same mixture."""
    assert mixture({"He": 80, "Xe": 20}) == mixture({"He": 0.8, "Xe": 0.2})


# --- one plane: Twiss parameters and free flight -------------------------------------------------

@pytest.mark.parametrize("seed", range(6))
def test_twiss_identity_and_definitions(seed: int) -> None:
    """beta gamma - alpha^2 = 1 (Courant–Snyder; Wiedemann, Particle Accelerator Physics, from
    memory); emittance against numpy.linalg.det, Twiss entries against the matrix."""
    plane = random_plane(seed)
    c = plane.covariance
    eps = math.sqrt(np.linalg.det(c))
    assert plane.emittance == pytest.approx(eps, rel=1e-10)
    assert (plane.alpha, plane.beta, plane.gamma) == pytest.approx(
        (-c[0, 1] / eps, c[0, 0] / eps, c[1, 1] / eps), rel=1e-10
    )
    assert plane.beta * plane.gamma - plane.alpha**2 == pytest.approx(1.0, rel=1e-9)
    assert plane.correlation == pytest.approx(np.corrcoef(np.random.default_rng(seed).multivariate_normal(
        [0, 0], c, size=200_000).T)[0, 1], abs=4 * (1 - plane.correlation**2) / math.sqrt(200_000))


@pytest.mark.parametrize(("alpha", "beta", "emittance"), [(0.0, 1e-4, 1e-3), (-2.5, 3e-5, 2e-4), (0.7, 0.02, 5e-6)])
def test_from_twiss_round_trip(alpha: float, beta: float, emittance: float) -> None:
    """Covariance = eps [[beta, -alpha], [-alpha, (1 + alpha^2)/beta]] (Wiedemann, from memory),
    and back."""
    plane = PhasePlane.from_twiss(alpha, beta, emittance)
    gamma = (1 + alpha**2) / beta
    np.testing.assert_allclose(plane.covariance, emittance * np.array([[beta, -alpha], [-alpha, gamma]]), rtol=1e-14)
    assert (plane.alpha, plane.beta, plane.emittance) == pytest.approx((alpha, beta, emittance), rel=1e-9, abs=1e-12)
    again = PhasePlane.from_twiss(plane.alpha, plane.beta, plane.emittance)
    np.testing.assert_allclose(again.covariance, plane.covariance, rtol=1e-9)


@pytest.mark.parametrize("seed", range(3))
@pytest.mark.parametrize("time", [-2e-3, 1e-5, 1e-3, 1e-2])
def test_drift_conserves_emittance(seed: int, time: float) -> None:
    """Liouville: det [[1, t], [0, 1]] = 1 keeps sqrt(det C); the drifted covariance against
    M C M^T multiplied out by numpy."""
    plane = random_plane(seed)
    transfer = np.array([[1.0, time], [0.0, 1.0]])
    assert np.linalg.det(transfer) == pytest.approx(1.0, rel=1e-15)
    moved = plane.drift(time)
    np.testing.assert_allclose(moved.covariance, transfer @ plane.covariance @ transfer.T, rtol=1e-12)
    assert moved.emittance == pytest.approx(plane.emittance, rel=1e-8)
    np.testing.assert_allclose(moved.drift(-time).covariance, plane.covariance, rtol=1e-8, atol=0)


def beam_for_sampling() -> Beam:
    return Beam(450.0, random_plane(10), random_plane(11), random_plane(12))


@pytest.mark.parametrize("time", [3e-4, 2e-3])
def test_drift_against_drifted_particles(time: float) -> None:
    """Independent route: move sampled particles by q += v t and take numpy.cov; it agrees with
    Beam.drift within 4 standard errors (see covariance_standard_errors)."""
    beam, n = beam_for_sampling(), 200_000
    particles = beam.sample(n, seed=5)
    particles[:, :3] += particles[:, 3:] * time
    expected = beam.drift(time).covariance()
    error = np.abs(np.cov(particles.T) - expected)
    assert np.all(error <= 4 * covariance_standard_errors(expected, n) + 1e-30)


@pytest.mark.parametrize("time", [0.0, 1e-5, 1e-3, 0.1])
def test_chirp_after_flight(time: float) -> None:
    """An uncorrelated plane after time t: <q v> / sigma_v^2 = t exactly and correlation
    sigma_v t / sqrt(sigma_q0^2 + sigma_v^2 t^2) (multiplying out M C M^T by hand)."""
    sq, sv = 1.5e-3, 20.0
    moved = PhasePlane.from_sigmas(sq, sv).drift(time)
    assert moved.covariance[0, 1] / sv**2 == pytest.approx(time, rel=1e-14, abs=0)
    assert moved.correlation == pytest.approx(sv * time / math.hypot(sq, sv * time), rel=1e-12, abs=0)


def test_correlation_tends_to_one_after_long_flight() -> None:
    """1 - r = 1 - 1/sqrt(1 + x^2) ~ x^2/2 with x = sigma_q0 / (sigma_v t) -> 0 (Taylor)."""
    sq, sv = 1.5e-3, 20.0
    gaps = [1 - PhasePlane.from_sigmas(sq, sv).drift(t).correlation for t in (1e-3, 1e-2, 1e-1)]
    assert gaps == pytest.approx([0.5 * (sq / (sv * t)) ** 2 for t in (1e-3, 1e-2, 1e-1)], rel=2e-2)
    assert gaps[0] > gaps[1] > gaps[2] > 0


# --- the 6-D beam and its samples ----------------------------------------------------------------

def test_covariance_columns_follow_the_convention() -> None:
    """(x, y, z, vx, vy, vz): horizontal in columns (0, 3), vertical (1, 4), longitudinal (2, 5)."""
    beam = beam_for_sampling()
    cov = beam.covariance()
    for plane, cols in ((beam.horizontal, [0, 3]), (beam.vertical, [1, 4]), (beam.longitudinal, [2, 5])):
        np.testing.assert_array_equal(cov[np.ix_(cols, cols)], plane.covariance)
    assert np.count_nonzero(cov) == 12


def test_sampling_is_reproducible() -> None:
    beam = beam_for_sampling()
    np.testing.assert_array_equal(beam.sample(1000, seed=7), beam.sample(1000, seed=7))
    assert not np.array_equal(beam.sample(1000, seed=7), beam.sample(1000, seed=8))
    assert beam.sample(0).shape == (0, 6)


@pytest.mark.parametrize("chunk", [1, 7, 100, 999, 1000, 5000])
def test_chunks_concatenate_to_the_sample(chunk: int) -> None:
    beam = beam_for_sampling()
    parts = list(beam.chunks(1000, chunk=chunk, seed=3))
    assert all(p.shape == (chunk, 6) for p in parts[:-1]) and parts[-1].shape[1] == 6
    np.testing.assert_array_equal(np.concatenate(parts), beam.sample(1000, seed=3))


def test_default_chunks_span_several_chunks() -> None:
    beam = beam_for_sampling()
    parts = list(beam.chunks(250_000, seed=1))
    assert [len(p) for p in parts] == [100_000, 100_000, 50_000]
    np.testing.assert_array_equal(np.concatenate(parts), beam.sample(250_000, seed=1))


def test_sample_moments_match_covariance() -> None:
    """numpy.cov of 2e5 particles within 4 standard errors of every covariance entry; the mean
    within 4 sigma / sqrt(n) of zero (normal sampling theory)."""
    beam, n = beam_for_sampling(), 200_000
    particles = beam.sample(n, seed=2)
    cov = beam.covariance()
    assert np.all(np.abs(np.cov(particles.T) - cov) <= 4 * covariance_standard_errors(cov, n) + 1e-30)
    assert np.all(np.abs(particles.mean(axis=0)) <= 4 * np.sqrt(np.diag(cov) / n))


def test_beam_drift_keeps_velocity_and_moves_every_plane() -> None:
    beam = beam_for_sampling()
    moved = beam.drift(1e-3)
    assert moved.velocity == beam.velocity
    assert moved.horizontal == beam.horizontal.drift(1e-3)
    assert moved.vertical == beam.vertical.drift(1e-3)
    assert moved.longitudinal == beam.longitudinal.drift(1e-3)


# --- the source ----------------------------------------------------------------------------------

def test_source_speed_and_arrival_time() -> None:
    """v0 of the 98:2 Kr/seed mixture by hand: Cp/k = 0.98·5/2 + 0.02·7/2 per particle."""
    source = invented_source()
    mass = (0.98 * WEIGHTS["Kr"] + 0.02 * 50) * U
    v0 = math.sqrt(2 * (0.98 * 2.5 + 0.02 * 3.5) * sc.k * 295.0 / mass)
    assert source.terminal_velocity == pytest.approx(v0, rel=1e-12)
    assert source.beam().velocity == pytest.approx(v0, rel=1e-12)
    assert source.arrival_time == pytest.approx(0.37 / v0, rel=1e-12)


def test_longitudinal_size_of_the_pulse() -> None:
    """Back at the nozzle (drift by -t) the rms length is that of a top-hat of length v0 tau
    (scipy.stats.uniform std); at the trap sigma_z^2 = (v0 tau)^2/12 + sigma_v^2 t^2."""
    source = invented_source()
    v0, t, sv = source.terminal_velocity, source.arrival_time, source.velocity_spread
    at_nozzle = source.beam().drift(-t).longitudinal
    top_hat = stats.uniform(scale=v0 * 12e-6).std()
    assert at_nozzle.sigma_position == pytest.approx(top_hat, rel=1e-9)
    assert at_nozzle.correlation == pytest.approx(0.0, abs=1e-9)
    along = source.beam().longitudinal
    assert along.sigma_position == pytest.approx(math.sqrt(top_hat**2 + (sv * t) ** 2), rel=1e-12)
    assert along.covariance[0, 1] == pytest.approx(sv**2 * t, rel=1e-12)


@pytest.mark.parametrize("speed_ratio", [5.0, 12.0, 40.0])
def test_speed_ratio_gives_velocity_spread(speed_ratio: float) -> None:
    """sigma_v = v0 / (S sqrt 2): the rms of exp(-(v - v0)^2 / a^2), a = v0/S, integrated by
    scipy.integrate.quad; T_par = m a^2 / (2k) from the definition a = sqrt(2 k T_par / m)."""
    source = invented_source(speed_ratio=speed_ratio)
    v0 = source.terminal_velocity
    a = v0 / speed_ratio
    weight = integrate.quad(lambda v: math.exp(-((v - v0) / a) ** 2), v0 - 20 * a, v0 + 20 * a)[0]
    second = integrate.quad(lambda v: (v - v0) ** 2 * math.exp(-((v - v0) / a) ** 2), v0 - 20 * a, v0 + 20 * a)[0]
    assert source.beam().longitudinal.sigma_velocity == pytest.approx(math.sqrt(second / weight), rel=1e-9)
    assert source.velocity_spread == pytest.approx(v0 / (speed_ratio * math.sqrt(2)), rel=1e-12)
    assert source.parallel_temperature == pytest.approx(50 * U * a**2 / (2 * sc.k), rel=1e-12)


def test_relative_spread_gives_velocity_spread() -> None:
    source = invented_source(speed_ratio=None, relative_spread=0.04)
    assert source.beam().longitudinal.sigma_velocity == pytest.approx(0.04 * source.terminal_velocity, rel=1e-12)


@pytest.mark.parametrize(
    "changes", [{"relative_spread": 0.05}, {"speed_ratio": None}], ids=["both", "neither"]
)
def test_exactly_one_spread_is_given(changes: dict[str, Any]) -> None:
    with pytest.raises(TiltwellError, match="exactly one of speed_ratio.*relative_spread"):
        invented_source(**changes)


def test_transverse_model_against_disc_moments() -> None:
    """A uniform disc of radius R has <x^2> = R^2/4 (scipy.integrate.dblquad below): source rms
    nozzle_diameter/4; angular rms (D/4)/L of the skimmer; then free flight for t."""
    source = invented_source()
    radius = 0.4e-3  # nozzle_diameter / 2; the disc integral is done for radius 1 and scaled
    second, _ = integrate.dblquad(lambda y, x: x * x, -1.0, 1.0,
                                  lambda x: -math.sqrt(1.0 - x * x), lambda x: math.sqrt(1.0 - x * x))
    sigma0 = radius * math.sqrt(second / math.pi)
    assert sigma0 == pytest.approx(radius / 2, rel=1e-7)
    v0, t = source.terminal_velocity, source.arrival_time
    sigma_v = v0 * (2.5e-3 / 4) / 0.14
    for plane in (source.beam().horizontal, source.beam().vertical):
        assert plane.sigma_velocity == pytest.approx(sigma_v, rel=1e-12)
        assert plane.sigma_position == pytest.approx(math.hypot(sigma0, sigma_v * t), rel=1e-9)


@pytest.mark.parametrize("factor", [0.5, 0.25])
def test_narrower_skimmer_narrows_transverse_velocity_in_proportion(factor: float) -> None:
    wide = invented_source().beam().horizontal.sigma_velocity
    narrow = invented_source(skimmer_diameter=2.5e-3 * factor).beam().horizontal.sigma_velocity
    assert narrow / wide == pytest.approx(factor, rel=1e-12)


@pytest.mark.parametrize(("distance", "diameter", "limits"), [(0.30, 3e-3, "aperture"), (0.30, 10e-3, "skimmer")])
def test_tightest_aperture_sets_the_transverse_spread(distance: float, diameter: float, limits: str) -> None:
    """The smallest D/L seen from the nozzle wins: 3 mm at 0.30 m (0.010) beats the skimmer's
    2.5 mm at 0.14 m (0.018); 10 mm at 0.30 m (0.033) does not."""
    source = invented_source(apertures=(Aperture(distance, diameter),))
    ratio = diameter / distance if limits == "aperture" else 2.5e-3 / 0.14
    expected = source.terminal_velocity * ratio / 4
    assert source.beam().vertical.sigma_velocity == pytest.approx(expected, rel=1e-12)


# --- bad input -----------------------------------------------------------------------------------

BAD_CALLS = {
    "negative-temperature": (lambda: terminal_velocity(U, 5 / 3, -1.0), r"temperature \[K\].*\(0, inf.*-1\.0"),
    "gamma-one": (lambda: terminal_velocity(U, 1.0, 300.0), r"heat_capacity_ratio \[1\].*\(1, inf"),
    "zero-mass": (lambda: terminal_velocity(0.0, 1.4, 300.0), r"mass \[kg\]"),
    "gas-gamma": (lambda: Gas("x", U, 0.9), r"heat_capacity_ratio"),
    "gas-name": (lambda: Gas("", U, 1.4), r"name"),
    "mixture-zero": (lambda: mixture({"He": 1.0, "Ne": 0.0}), r"parts\['Ne'\] \[1\]"),
    "mixture-empty": (lambda: mixture({}), r"parts"),
    "mixture-key": (lambda: mixture({3: 1.0}), r"parts keys"),  # type: ignore[dict-item]
    "not-positive-definite": (lambda: PhasePlane(np.array([[1.0, 2.0], [2.0, 1.0]])), r"covariance.*positive definite"),
    "not-symmetric": (lambda: PhasePlane(np.array([[1.0, 0.1], [0.2, 1.0]])), r"covariance must be symmetric"),
    "covariance-shape": (lambda: PhasePlane(np.eye(3)), r"covariance must have shape \(2, 2\)"),
    "covariance-nan": (lambda: PhasePlane(np.array([[1.0, np.nan], [np.nan, 1.0]])), r"covariance.*finite"),
    "twiss-beta": (lambda: PhasePlane.from_twiss(0.0, -1.0, 1.0), r"beta \[s\]"),
    "correlation-one": (lambda: PhasePlane.from_sigmas(1.0, 1.0, 1.0), r"correlation \[1\].*\(-1, 1\)"),
    "drift-time": (lambda: PhasePlane.from_sigmas(1.0, 1.0).drift(math.inf), r"time \[s\]"),
    "beam-velocity": (lambda: Beam(-1.0, *[PhasePlane.from_sigmas(1.0, 1.0)] * 3), r"velocity \[m/s\]"),
    "beam-plane": (lambda: Beam(1.0, np.eye(2), *[PhasePlane.from_sigmas(1.0, 1.0)] * 2), r"longitudinal"),  # type: ignore[arg-type]
    "sample-n": (lambda: beam_for_sampling().sample(-1), r"n must be an integer >= 0"),
    "sample-n-float": (lambda: beam_for_sampling().sample(10.0), r"n must be an integer"),  # type: ignore[arg-type]
    "chunk-zero": (lambda: beam_for_sampling().chunks(10, chunk=0), r"chunk must be an integer >= 1"),
    "seed-negative": (lambda: beam_for_sampling().sample(10, seed=-3), r"seed"),
    "aperture-diameter": (lambda: Aperture(0.2, -1e-3), r"diameter \[m\]"),
    "aperture-beyond-flight": (lambda: invented_source(apertures=(Aperture(0.5, 3e-3),)),
                               r"apertures\[0\]\.distance \[m\] must be <= flight_distance"),
    "skimmer-beyond-flight": (lambda: invented_source(nozzle_skimmer_distance=0.5),
                              r"nozzle_skimmer_distance \[m\] must be <= flight_distance"),
    "apertures-not-apertures": (lambda: invented_source(apertures=((0.2, 1e-3),)), r"apertures must be"),
    "source-temperature": (lambda: invented_source(temperature=-5.0), r"temperature \[K\]"),
    "valve-open-time": (lambda: invented_source(valve_open_time=0.0), r"valve_open_time \[s\]"),
    "speed-ratio": (lambda: invented_source(speed_ratio=-3.0), r"speed_ratio \[1\]"),
    "relative-spread": (lambda: invented_source(speed_ratio=None, relative_spread=0.0), r"relative_spread \[1\]"),
    "source-gas": (lambda: invented_source(gas="Kr"), r"gas must be a Gas"),
}


@pytest.mark.parametrize("case", list(BAD_CALLS))
def test_bad_input_names_the_argument(case: str) -> None:
    call, message = BAD_CALLS[case]
    with pytest.raises(TiltwellError, match=message):
        call()


def test_unknown_keyword_is_an_error() -> None:
    with pytest.raises(TypeError, match="nozzle_temperature"):
        invented_source(nozzle_temperature=300.0)


def test_phase_plane_is_read_only_and_compares_by_value() -> None:
    plane = PhasePlane.from_sigmas(1e-3, 5.0, 0.3)
    with pytest.raises(ValueError):
        plane.covariance[0, 0] = 1.0
    assert plane == PhasePlane(plane.covariance.copy())
    assert hash(plane) == hash(PhasePlane(plane.covariance.copy()))
