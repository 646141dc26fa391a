"""Gaussian beam inside a separatrix against scipy.stats and brute-force sampling."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from tiltwell import TiltwellError, gaussian_fraction, separatrix


def _harmonic(half_width: float, omega: float = 1.0, mass: float = 1.0):  # type: ignore[no-untyped-def]
    z = np.linspace(-half_width, half_width, 2001)
    return separatrix(z, 0.5 * mass * omega**2 * z**2, mass)


@pytest.mark.parametrize("sigmas", [0.5, 1.0, 2.0, 3.0])
def test_sigma_ellipse_against_chi2(sigmas: float) -> None:
    """A matched beam (sigma_v / sigma_z = omega) inside the ellipse at r sigma holds
    1 - exp(-r^2 / 2): the chi-square distribution with 2 degrees of freedom at r^2
    (scipy.stats.chi2.cdf)."""
    omega, sigma_z = 2.0, 0.1
    bucket = _harmonic(sigmas * sigma_z, omega)
    cov = np.diag([sigma_z**2, (omega * sigma_z) ** 2])
    expected = stats.chi2.cdf(sigmas**2, df=2)
    assert gaussian_fraction(bucket, [0.0, 0.0], cov) == pytest.approx(expected, abs=1e-5)


def _moving_bucket():  # type: ignore[no-untyped-def]
    z = np.linspace(-2 * math.pi, 2 * math.pi, 2000)
    return separatrix(z, -np.cos(z) - 0.4 * z, 1.0)


@pytest.mark.slow
@pytest.mark.parametrize(
    ("mean", "cov"),
    [
        ([0.4, 0.0], [[1.0, 0.0], [0.0, 0.6]]),
        ([0.0, 0.3], [[2.0, -0.8], [-0.8, 1.0]]),
        ([1.5, -0.5], [[0.05, 0.02], [0.02, 0.04]]),
        ([-3.0, 1.0], [[4.0, 1.9], [1.9, 1.0]]),
    ],
    ids=["upright", "chirped", "narrow", "far-and-correlated"],
)
def test_against_two_dimensional_quadrature(mean: list[float], cov: list[list[float]]) -> None:
    """The same fraction by scipy.integrate.dblquad of scipy.stats.multivariate_normal's
    density over the region |v| < v_max(z) (a different route: the 2-D density, not our
    conditional-normal reduction)."""
    bucket = _moving_bucket()
    density = stats.multivariate_normal(mean, cov)
    reference, _ = integrate.dblquad(
        lambda v, z: density.pdf([z, v]),
        bucket.z_back, bucket.z_front,
        lambda z: -float(bucket.velocity_limit(z)), lambda z: float(bucket.velocity_limit(z)),
        epsabs=1e-7,
    )
    assert gaussian_fraction(bucket, mean, cov) == pytest.approx(reference, abs=1e-5)


def test_against_sampling() -> None:
    """Brute force: draw 4e5 particles and count those inside (binomial error ~8e-4)."""
    bucket = _moving_bucket()
    mean, cov = np.array([0.2, 0.1]), np.array([[1.5, 0.5], [0.5, 0.8]])
    sample = np.random.default_rng(11).multivariate_normal(mean, cov, size=400_000)
    p = bucket.contains(sample[:, 0], sample[:, 1]).mean()
    sigma = math.sqrt(p * (1 - p) / sample.shape[0])
    assert abs(gaussian_fraction(bucket, mean, cov) - p) < 4 * sigma


def test_unbound_and_far_beams_give_zero() -> None:
    z = np.linspace(-1.0, 1.0, 101)
    assert gaussian_fraction(separatrix(z, z, 1.0), [0, 0], np.eye(2)) == 0.0
    assert gaussian_fraction(_harmonic(1.0), [50.0, 0.0], np.eye(2) * 1e-2) == 0.0


def test_beam_much_smaller_than_bucket_is_all_inside() -> None:
    assert gaussian_fraction(_moving_bucket(), [0.4, 0.0], np.eye(2) * 1e-4) == pytest.approx(1.0, abs=1e-9)


@pytest.mark.parametrize(
    ("mean", "cov", "word"),
    [
        ([0.0], np.eye(2), "mean"),
        ([0.0, float("nan")], np.eye(2), "mean"),
        ([0.0, 0.0], np.eye(3), "cov"),
        ([0.0, 0.0], [[1.0, 0.5], [0.4, 1.0]], "symmetric"),
        ([0.0, 0.0], [[1.0, 1.0], [1.0, 1.0]], "positive definite"),
        ([0.0, 0.0], [[-1.0, 0.0], [0.0, 1.0]], "positive definite"),
    ],
    ids=["short-mean", "nan-mean", "3x3", "asymmetric", "singular", "negative"],
)
def test_bad_input(mean: list[float], cov: object, word: str) -> None:
    with pytest.raises(TiltwellError, match=word):
        gaussian_fraction(_harmonic(1.0), mean, cov)  # type: ignore[arg-type]


def test_wrong_separatrix_type() -> None:
    with pytest.raises(TiltwellError, match="separatrix"):
        gaussian_fraction("bucket", [0, 0], np.eye(2))  # type: ignore[arg-type]


def test_nearly_degenerate_beam_against_sampling() -> None:
    """Correlation 0.99999 (a strongly chirped beam): the conditional spread is tiny and
    the integrand nearly a step; 2e6 sampled particles (binomial error ~3e-4) agree."""
    bucket = _moving_bucket()
    cov = np.array([[1.0, 0.99999], [0.99999, 1.0]])
    sample = np.random.default_rng(1).multivariate_normal([0.4, 0.0], cov, size=2_000_000)
    p = bucket.contains(sample[:, 0], sample[:, 1]).mean()
    sigma = math.sqrt(p * (1 - p) / sample.shape[0])
    assert abs(gaussian_fraction(bucket, [0.4, 0.0], cov) - p) < max(4 * sigma, 1e-3)
