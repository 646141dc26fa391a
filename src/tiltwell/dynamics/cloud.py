"""Statistics of a cloud of particles in 6-D phase space: size, temperature, density and
phase-space density, from the second moments of a sample.

- Moments are population moments (``ddof=0``: divide by N, not N - 1), so the temperature
  of a sample is ``m <(v - <v>)^2> / k_B`` per axis, what the sample itself holds.
- ``density`` is the peak density of the Gaussian with the same second moments in position,
  ``N / ((2 pi)^(3/2) s_x s_y s_z)`` (the rms sizes along x, y, z, cross-correlations
  ignored as the fixed interface says); ``phase_space_density`` uses the full 6-D covariance
  C6, ``N (h/m)^3 / ((2 pi)^3 sqrt(det C6))``, which a Hamiltonian flow leaves unchanged
  (Liouville) and which for an uncorrelated cloud is ``n lambda_dB^3``,
  ``lambda_dB = h / sqrt(2 pi m k T)`` (e.g. Ketterle, Durfee and Stamper-Kurn, "Making,
  probing and understanding Bose-Einstein condensates", Varenna lectures 1999, where the
  peak phase-space density of a thermal cloud is ``n0 lambda_dB^3``; from memory).
- A cloud whose 6-D covariance is singular (fewer than 6 independent directions: all
  particles on a plane or a line of phase space) has no finite phase-space density; it is
  an error, as is a cloud of fewer than two particles.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.display import html_table
from .._base.validation import MAX_MASS, TiltwellError, as_finite_array, as_scalar, read_only_copy
from ..physics.constants import BOLTZMANN, PLANCK

__all__ = ["CloudStats", "cloud_stats"]

Array = NDArray[np.float64]

#: Fewest rows for which a variance means anything.
MIN_PARTICLES = 2


@dataclass(frozen=True, eq=False)
class CloudStats:
    """Second-moment statistics of a particle cloud (build with :func:`cloud_stats`).

    Attributes
    ----------
    number : float
        Real particles the cloud stands for [1]: the sample rows times ``scale``.
    samples : int
        Rows of the sample.
    centre : ndarray, shape (3,)
        Mean position [m].
    velocity : ndarray, shape (3,)
        Mean velocity [m/s].
    sizes : ndarray, shape (3,)
        rms sizes along x, y, z [m] (population standard deviations).
    temperatures : ndarray, shape (3,)
        ``m var(v_i) / k_B`` [K] along x, y, z.
    temperature : float
        Mean of ``temperatures`` [K].
    density : float
        Peak density of the Gaussian with the same sizes [1/m^3].
    phase_space_density : float
        ``number (h/m)^3 / ((2 pi)^3 sqrt(det C6))`` [1].
    covariance : ndarray, shape (6, 6)
        C6 of (x, y, z, vx, vy, vz) [m^2, m^2/s, m^2/s^2]. Arrays are read-only.
    """

    number: float
    samples: int
    centre: Array = field(repr=False)
    velocity: Array = field(repr=False)
    sizes: Array
    temperatures: Array
    temperature: float
    density: float
    phase_space_density: float
    covariance: Array = field(repr=False)

    def _repr_html_(self) -> str:
        rows = [
            ("particles", f"{self.number:.4g} ({self.samples} sampled)"),
            ("rms sizes x, y, z", ", ".join(f"{s * 1e3:.4g}" for s in self.sizes) + " mm"),
            ("temperatures x, y, z", ", ".join(f"{t * 1e3:.4g}" for t in self.temperatures) + " mK"),
            ("peak density", f"{self.density * 1e-6:.4g} /cm^3"),
            ("phase-space density", f"{self.phase_space_density:.4g}"),
        ]
        return html_table("Cloud", rows)


def cloud_stats(particles: ArrayLike, mass: float, *, scale: float = 1.0,
                weights: ArrayLike | None = None) -> CloudStats:
    """Number, sizes, temperatures, density and phase-space density of a cloud.

    Parameters
    ----------
    particles : array_like, shape (N, 6)
        Rows (x, y, z, vx, vy, vz) [m, m/s], N >= 2, finite.
    mass : float
        Particle mass [kg], > 0.
    scale : float, keyword-only
        Real particles per sampled particle [1], > 0 (a Monte-Carlo sample of 1e4 standing
        for a pulse of 1e9: ``scale=1e5``). It multiplies ``number``, ``density`` and
        ``phase_space_density``; sizes and temperatures do not depend on it.
    weights : array_like, shape (N,), keyword-only, optional
        Weight of each row [1], >= 0 with a positive sum (e.g. a survival probability, or
        rows of several samples that stand for different numbers of real particles). The
        moments are weighted means and ``number`` is ``scale * sum(weights)``; by default
        every row weighs 1.

    Returns
    -------
    CloudStats

    Raises
    ------
    TiltwellError
        Wrong shape, non-finite values, fewer than 2 particles, a bad mass or scale, or a
        singular 6-D covariance (no finite phase-space density).

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> cloud = cloud_stats(rng.normal(size=(100_000, 6)) * ([1e-3] * 3 + [1.0] * 3), 1e-26)
    >>> round(float(cloud.sizes[0]) * 1e3, 2)
    1.0
    """
    points = as_finite_array(particles, "particles", "m, m/s", ndim=2)
    if points.shape[1] != 6:
        raise TiltwellError(f"particles [m, m/s] must have shape (N, 6); got shape {points.shape}")
    if points.shape[0] < MIN_PARTICLES:
        raise TiltwellError(f"particles [m, m/s] needs at least {MIN_PARTICLES} rows; got {points.shape[0]}")
    m = as_scalar(mass, "mass", "kg", low=0.0, high=MAX_MASS, low_open=True)
    weight = as_scalar(scale, "scale", "1", low=0.0, low_open=True)
    samples = points.shape[0]
    w = np.ones(samples) if weights is None else as_finite_array(weights, "weights", "1", ndim=1)
    if w.shape != (samples,) or np.any(w < 0.0) or not float(w.sum()) > 0.0:
        raise TiltwellError(f"weights [1] must be {samples} values >= 0 with a positive sum, one per row of "
                            f"particles; got shape {w.shape}, sum {float(w.sum())!r}")
    total = float(w.sum())
    mean = w @ points / total
    centred = points - mean
    covariance = (centred * w[:, None]).T @ centred / total  # population moments (ddof = 0)
    variances = np.diag(covariance).copy()
    if np.any(variances <= 0.0):
        axis = ("x", "y", "z", "vx", "vy", "vz")[int(np.argmin(variances))]
        raise TiltwellError(f"particles [m, m/s] have no spread along {axis}: the cloud is degenerate")
    # det of the correlation matrix times the product of variances: well scaled in SI
    spreads = np.sqrt(variances)
    sign, log_det_correlation = np.linalg.slogdet(covariance / np.outer(spreads, spreads))
    if sign <= 0.0 or not math.isfinite(log_det_correlation):
        raise TiltwellError("particles [m, m/s] span fewer than 6 independent directions of phase space")
    log_det = log_det_correlation + 2.0 * float(np.sum(np.log(spreads)))
    number = weight * total
    sizes = spreads[:3].copy()
    temperatures = m * variances[3:] / BOLTZMANN
    density = number / ((2.0 * math.pi) ** 1.5 * float(np.prod(sizes)))
    psd = number * (PLANCK / m) ** 3 / (2.0 * math.pi) ** 3 * math.exp(-0.5 * log_det)
    return CloudStats(
        number=number,
        samples=samples,
        centre=read_only_copy(mean[:3]),
        velocity=read_only_copy(mean[3:]),
        sizes=read_only_copy(sizes),
        temperatures=read_only_copy(temperatures),
        temperature=float(np.mean(temperatures)),
        density=density,
        phase_space_density=psd,
        covariance=read_only_copy(covariance),
    )
