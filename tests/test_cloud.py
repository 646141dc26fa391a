"""Cloud statistics against Gaussian closed forms, the n lambda_dB^3 identity, Liouville's
theorem under a free drift, the ``scale`` keyword and bad input."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc

from tiltwell import TiltwellError, cloud_stats

from conftest import AMU, K_B

MASS = 87.0 * AMU  # kg
H = sc.h


def gaussian_cloud(sizes: tuple[float, float, float], temperatures: tuple[float, float, float],
                   n: int = 1_000_000, seed: int = 3, correlation: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """A sample of numpy's multivariate normal with a known covariance, and that covariance;
    ``correlation`` couples each position to its velocity."""
    sv = [math.sqrt(K_B * t / MASS) for t in temperatures]
    cov = np.diag([s * s for s in sizes] + [v * v for v in sv])
    for i in range(3):
        cov[i, i + 3] = cov[i + 3, i] = correlation * sizes[i] * sv[i]
    sample = np.random.default_rng(seed).multivariate_normal(np.zeros(6), cov, size=n)
    return sample, cov


def test_uncorrelated_gaussian_closed_forms() -> None:
    sizes, temps = (1e-3, 2e-3, 0.5e-3), (1e-3, 2e-3, 4e-3)
    sample, cov = gaussian_cloud(sizes, temps)
    n = len(sample)
    cloud = cloud_stats(sample, MASS)
    # 1e6 samples: a standard deviation is known to ~1/sqrt(2N) = 7e-4, a variance to 1.4e-3
    assert cloud.number == n and cloud.samples == n
    np.testing.assert_allclose(cloud.sizes, sizes, rtol=4e-3)
    np.testing.assert_allclose(cloud.temperatures, temps, rtol=8e-3)
    assert cloud.temperature == pytest.approx(np.mean(temps), rel=8e-3)
    peak = n / ((2 * math.pi) ** 1.5 * np.prod(sizes))  # Gaussian peak density (closed form)
    assert cloud.density == pytest.approx(peak, rel=1e-2)
    psd = n * (H / MASS) ** 3 / ((2 * math.pi) ** 3 * math.sqrt(np.linalg.det(cov)))
    assert cloud.phase_space_density == pytest.approx(psd, rel=2e-2)


def test_phase_space_density_is_n_lambda_cubed() -> None:
    """For an isotropic uncorrelated cloud, N (h/m)^3 / ((2 pi)^3 s^3 sv^3) with
    sv^2 = k T / m equals n lambda_dB^3, n = N / ((2 pi)^(3/2) s^3),
    lambda_dB = h / sqrt(2 pi m k T): (h/m)^3 / ((2 pi)^(3/2) (kT/m)^(3/2)) = lambda^3.
    Checked here by hand on numbers and on a sample (Ketterle, Durfee and Stamper-Kurn,
    Varenna lectures 1999, peak PSD n0 lambda^3; from memory)."""
    t, s, n = 1e-4, 1e-3, 1e9
    sv = math.sqrt(K_B * t / MASS)
    lam = H / math.sqrt(2 * math.pi * MASS * K_B * t)
    by_definition = n * (H / MASS) ** 3 / ((2 * math.pi) ** 3 * s**3 * sv**3)
    assert by_definition == pytest.approx(n / ((2 * math.pi) ** 1.5 * s**3) * lam**3, rel=1e-13)

    sample, _ = gaussian_cloud((s, s, s), (t, t, t), n=400_000, seed=8)
    cloud = cloud_stats(sample, MASS)
    lam_sample = H / math.sqrt(2 * math.pi * MASS * K_B * cloud.temperature)
    assert cloud.phase_space_density == pytest.approx(cloud.density * lam_sample**3, rel=3e-2)


def test_correlated_cloud_uses_the_full_covariance() -> None:
    """A position-velocity correlation r shrinks det C6 by (1 - r^2)^3: PSD grows by
    (1 - r^2)^(-3/2) while sizes, temperatures and density stay."""
    sizes, temps = (1e-3, 1e-3, 2e-3), (1e-3, 1e-3, 1e-3)
    plain = cloud_stats(gaussian_cloud(sizes, temps, n=500_000, seed=1)[0], MASS)
    tilted = cloud_stats(gaussian_cloud(sizes, temps, n=500_000, seed=1, correlation=0.8)[0], MASS)
    assert tilted.density == pytest.approx(plain.density, rel=1e-2)
    assert tilted.phase_space_density / plain.phase_space_density == pytest.approx((1 - 0.64) ** -1.5, rel=2e-2)


def test_liouville_under_free_drift() -> None:
    """x += v t is a shear of phase space with unit Jacobian: det C6 and the phase-space
    density stay (Liouville's theorem), the density falls as the cloud grows."""
    sample, _ = gaussian_cloud((1e-3, 1e-3, 1e-3), (1e-3, 1e-3, 1e-3), n=200_000, seed=5)
    before = cloud_stats(sample, MASS)
    for t in (1e-3, 1e-2, 5e-2):
        drifted = sample.copy()
        drifted[:, :3] += drifted[:, 3:] * t
        after = cloud_stats(drifted, MASS)
        assert after.phase_space_density == pytest.approx(before.phase_space_density, rel=1e-10)
        # each rms size grows as sqrt(s^2 + sv^2 t^2) (uncorrelated start), to sampling error
        expected = np.sqrt(before.sizes**2 + (K_B * 1e-3 / MASS) * t**2)
        np.testing.assert_allclose(after.sizes, expected, rtol=1e-2)
        assert after.density < before.density


def test_scale_multiplies_number_density_and_psd() -> None:
    sample, _ = gaussian_cloud((1e-3, 1e-3, 1e-3), (1e-3, 1e-3, 1e-3), n=20_000, seed=2)
    one = cloud_stats(sample, MASS)
    many = cloud_stats(sample, MASS, scale=2.5e4)
    assert many.number == pytest.approx(2.5e4 * 20_000, rel=1e-15)
    assert many.samples == 20_000
    assert many.density == pytest.approx(2.5e4 * one.density, rel=1e-14)
    assert many.phase_space_density == pytest.approx(2.5e4 * one.phase_space_density, rel=1e-14)
    np.testing.assert_array_equal(many.sizes, one.sizes)
    np.testing.assert_array_equal(many.temperatures, one.temperatures)


def test_units_and_population_variance() -> None:
    """Two points per axis at +-a (positions) and +-u (velocities), arranged so C6 is
    diagonal: population rms a, temperature m u^2 / k_B exactly (ddof = 0)."""
    a, u = 2e-3, 0.3
    signs = np.array([[(i >> k) & 1 for k in range(6)] for i in range(64)], dtype=float) * 2 - 1
    cloud = cloud_stats(signs * np.array([a, a, a, u, u, u]), MASS)
    np.testing.assert_allclose(cloud.sizes, [a] * 3, rtol=1e-14)
    np.testing.assert_allclose(cloud.temperatures, [MASS * u * u / K_B] * 3, rtol=1e-14)
    assert cloud.density == pytest.approx(64 / ((2 * math.pi) ** 1.5 * a**3), rel=1e-13)
    assert cloud.phase_space_density == pytest.approx(64 * (H / MASS) ** 3 / ((2 * math.pi) ** 3 * a**3 * u**3),
                                                      rel=1e-12)
    np.testing.assert_allclose(cloud.centre, 0.0, atol=1e-18)
    with pytest.raises(ValueError):
        cloud.sizes[0] = 1.0  # read-only


@pytest.mark.parametrize(
    "particles, match",
    [
        (np.zeros((10, 5)), "shape"),
        (np.zeros(6), "2-D"),
        (np.ones((1, 6)), "at least 2"),
        (np.full((4, 6), np.nan), "finite"),
        (np.zeros((10, 6)), "degenerate"),
    ],
)
def test_bad_particles(particles: np.ndarray, match: str) -> None:
    with pytest.raises(TiltwellError, match=match):
        cloud_stats(particles, MASS)


def test_singular_covariance_is_an_error() -> None:
    sample = np.random.default_rng(0).normal(size=(100, 6))
    sample[:, 5] = 2.0 * sample[:, 0]  # vz tied to x: a 5-D cloud
    with pytest.raises(TiltwellError, match="fewer than 6"):
        cloud_stats(sample, MASS)


def test_bad_mass_and_scale() -> None:
    sample = np.random.default_rng(0).normal(size=(100, 6))
    with pytest.raises(TiltwellError, match="mass"):
        cloud_stats(sample, 0.0)
    with pytest.raises(TiltwellError, match="scale"):
        cloud_stats(sample, MASS, scale=-1.0)
    with pytest.raises(TypeError):
        cloud_stats(sample, MASS, 2.0)  # type: ignore[call-arg]  # scale is keyword-only


def test_integer_weights_equal_repeated_rows() -> None:
    """A row of weight k is k copies of that row (brute force: numpy.repeat)."""
    rng = np.random.default_rng(4)
    rows = rng.normal(size=(500, 6)) * ([1e-3] * 3 + [2.0] * 3)
    counts = rng.integers(0, 4, size=500)
    weighted = cloud_stats(rows, 17 * AMU, weights=counts.astype(float), scale=2.0)
    repeated = cloud_stats(np.repeat(rows, counts, axis=0), 17 * AMU, scale=2.0)
    assert weighted.number == pytest.approx(repeated.number, rel=1e-12)
    for name in ("sizes", "temperatures", "centre", "velocity", "covariance"):
        assert np.allclose(getattr(weighted, name), getattr(repeated, name), rtol=1e-10, atol=1e-300), name
    assert weighted.density == pytest.approx(repeated.density, rel=1e-10)
    assert weighted.phase_space_density == pytest.approx(repeated.phase_space_density, rel=1e-9)
    assert weighted.samples == 500


@pytest.mark.parametrize("weights, word", [([1.0] * 3, "one per row"), ([-1.0] + [1.0] * 9, ">= 0"),
                                           ([0.0] * 10, "positive sum")])
def test_bad_weights(weights: list[float], word: str) -> None:
    rows = np.random.default_rng(0).normal(size=(10, 6))
    with pytest.raises(TiltwellError, match=word):
        cloud_stats(rows, 17 * AMU, weights=weights)
