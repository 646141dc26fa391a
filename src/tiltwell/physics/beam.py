"""A pulsed supersonic beam as a Gaussian in 6-D phase space.

The model, and where it stops being true:

- Mean speed: given (from the source, :mod:`tiltwell.physics.source`).
- Each plane (horizontal x, vertical y, longitudinal z) is an independent bivariate normal
  in (position, velocity) relative to the synchronous particle, described by its covariance
  (:class:`PhasePlane`). Hard edges of the valve pulse and of the apertures are replaced by
  Gaussians with the same second moments: tails are longer than the real ones and the
  planes do not couple.
- Flight from the nozzle is free (no fields, no gravity, no collisions after the skimmer),
  so every plane evolves by the drift map ``[[1, t], [0, 1]]`` and keeps its emittance.

Phase-space arrays have shape (N, 6), columns (x, y, z, vx, vy, vz) [m, m/s].
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .._base.display import html_table
from .._base.resources import BYTES_PER_PARTICLE, check_memory
from .._base.validation import TiltwellError, as_finite_array, as_integer, as_scalar

__all__ = ["Beam", "PhasePlane"]

Array = NDArray[np.float64]

@dataclass(frozen=True, eq=False)
class PhasePlane:
    """Gaussian beam in one plane: covariance of (position [m], velocity [m/s]).

    Parameters
    ----------
    covariance : array_like, shape (2, 2)
        ``[[<q q>, <q v>], [<q v>, <v v>]]`` [m^2, m·m/s, (m/s)^2], symmetric positive
        definite; stored read-only.

    Notes
    -----
    Twiss (Courant–Snyder) form ``covariance = emittance [[beta, -alpha], [-alpha, gamma]]``
    with ``beta gamma - alpha^2 = 1`` (H. Wiedemann, Particle Accelerator Physics, ch. on
    beam emittance; from memory), in time units because the second coordinate is a
    velocity: beta [s], gamma [1/s]. A diverging beam (after a drift) has alpha < 0.
    """

    covariance: Array

    def __post_init__(self) -> None:
        c = as_finite_array(self.covariance, "covariance", "m^2, m·m/s, (m/s)^2")
        if c.shape != (2, 2):
            raise TiltwellError(f"covariance must have shape (2, 2); got shape {c.shape}")
        if not np.allclose(c, c.T, rtol=1e-12, atol=0.0):
            raise TiltwellError(f"covariance must be symmetric; got [0,1]={c[0, 1]!r}, [1,0]={c[1, 0]!r}")
        c = 0.5 * (c + c.T)
        if c[0, 0] <= 0 or c[1, 1] <= 0 or c[0, 0] * c[1, 1] - c[0, 1] ** 2 <= 0:
            raise TiltwellError(
                "covariance must be positive definite (variances > 0 and |correlation| < 1); "
                f"got {c.tolist()!r}"
            )
        c.setflags(write=False)
        object.__setattr__(self, "covariance", c)

    def __eq__(self, other: object) -> bool:
        return isinstance(other, PhasePlane) and bool(np.array_equal(self.covariance, other.covariance))

    def __hash__(self) -> int:
        return hash(tuple(self.covariance.ravel()))

    @classmethod
    def from_twiss(cls, alpha: float, beta: float, emittance: float) -> PhasePlane:
        """Plane from Twiss ``alpha`` [1], ``beta`` [s] > 0 and rms ``emittance`` [m·m/s] > 0."""
        a = as_scalar(alpha, "alpha", "1")
        b = as_scalar(beta, "beta", "s", low=0.0, low_open=True)
        e = as_scalar(emittance, "emittance", "m·m/s", low=0.0, low_open=True)
        return cls(e * np.array([[b, -a], [-a, (1.0 + a * a) / b]]))

    @classmethod
    def from_sigmas(cls, sigma_position: float, sigma_velocity: float, correlation: float = 0.0) -> PhasePlane:
        """Plane from rms ``sigma_position`` [m], ``sigma_velocity`` [m/s] and ``correlation`` in (-1, 1)."""
        sq = as_scalar(sigma_position, "sigma_position", "m", low=0.0, low_open=True)
        sv = as_scalar(sigma_velocity, "sigma_velocity", "m/s", low=0.0, low_open=True)
        r = as_scalar(correlation, "correlation", "1", low=-1.0, high=1.0, low_open=True, high_open=True)
        return cls(np.array([[sq * sq, r * sq * sv], [r * sq * sv, sv * sv]]))

    @property
    def sigma_position(self) -> float:
        """rms position [m]."""
        return math.sqrt(self.covariance[0, 0])

    @property
    def sigma_velocity(self) -> float:
        """rms velocity [m/s]."""
        return math.sqrt(self.covariance[1, 1])

    @property
    def correlation(self) -> float:
        """Position-velocity correlation coefficient [1], in (-1, 1)."""
        return float(self.covariance[0, 1]) / (self.sigma_position * self.sigma_velocity)

    @property
    def emittance(self) -> float:
        """rms emittance ``sqrt(det covariance)`` [m·m/s]; the 1-sigma ellipse has area pi times it."""
        c = self.covariance
        return math.sqrt(c[0, 0] * c[1, 1] - c[0, 1] ** 2)

    @property
    def alpha(self) -> float:
        """Twiss alpha ``-<q v> / emittance`` [1]."""
        return -float(self.covariance[0, 1]) / self.emittance

    @property
    def beta(self) -> float:
        """Twiss beta ``sigma_position^2 / emittance`` [s]."""
        return float(self.covariance[0, 0]) / self.emittance

    @property
    def gamma(self) -> float:
        """Twiss gamma ``sigma_velocity^2 / emittance`` [1/s]."""
        return float(self.covariance[1, 1]) / self.emittance

    def drift(self, time: float) -> PhasePlane:
        """The plane after free flight for ``time`` [s] (negative: back in time).

        ``C -> M C M^T`` with ``M = [[1, t], [0, 1]]``, ``det M = 1``: the emittance is kept.
        """
        t = as_scalar(time, "time", "s")
        transfer = np.array([[1.0, t], [0.0, 1.0]])
        return PhasePlane(transfer @ self.covariance @ transfer.T)


#: (position, velocity) column pairs of each plane in the (x, y, z, vx, vy, vz) order.
_COLUMNS = {"horizontal": (0, 3), "vertical": (1, 4), "longitudinal": (2, 5)}


@dataclass(frozen=True)
class Beam:
    """A Gaussian beam relative to its synchronous particle.

    Parameters
    ----------
    velocity : float
        Forward speed of the synchronous particle [m/s], > 0.
    longitudinal, horizontal, vertical : PhasePlane
        (z - z_sync, vz - velocity), (x, vx) and (y, vy); the planes are independent.
    """

    velocity: float
    longitudinal: PhasePlane
    horizontal: PhasePlane
    vertical: PhasePlane

    def __post_init__(self) -> None:
        object.__setattr__(self, "velocity", as_scalar(self.velocity, "velocity", "m/s", low=0.0, low_open=True))
        for name in _COLUMNS:
            if not isinstance(getattr(self, name), PhasePlane):
                raise TiltwellError(f"{name} must be a PhasePlane; got {type(getattr(self, name)).__name__}")

    def covariance(self) -> Array:
        """The (6, 6) covariance in the column order (x, y, z, vx, vy, vz) [m, m/s]."""
        full = np.zeros((6, 6))
        for name, cols in _COLUMNS.items():
            full[np.ix_(cols, cols)] = getattr(self, name).covariance
        return full

    def chunks(self, n: int, chunk: int = 100_000, seed: int | None = 0) -> Iterator[Array]:
        """``n`` particles, ``chunk`` at a time, as (m, 6) arrays relative to the synchronous particle.

        One ``numpy.random.default_rng(seed)`` draws standard normals chunk after chunk and
        a Cholesky factor of :meth:`covariance` shapes them, so the concatenation equals
        :meth:`sample` ``(n, seed)``, whatever ``chunk`` is.
        """
        n = as_integer(n, "n", 0)
        chunk = as_integer(chunk, "chunk", 1)
        if seed is not None:
            as_integer(seed, "seed", 0)
        factor = np.linalg.cholesky(self.covariance())
        rng = np.random.default_rng(seed)

        def draw() -> Iterator[Array]:
            for start in range(0, n, chunk):
                yield _shaped(rng.standard_normal((min(chunk, n - start), 6)), factor)

        return draw()

    def from_normals(self, normals: Array) -> Array:
        """Particles (m, 6) [m, m/s] from standard normals (m, 6) of any generator, shaped
        by the Cholesky factor of :meth:`covariance` as :meth:`chunks` shapes its own."""
        return _shaped(normals, np.linalg.cholesky(self.covariance()))

    def sample(self, n: int, seed: int | None = 0) -> Array:
        """``n`` particles as an (n, 6) array (x, y, z, vx, vy, vz) [m, m/s] relative to the
        synchronous particle; the same ``seed`` gives the same particles. A count that
        cannot be held and tracked in this machine's free memory is refused before any
        is drawn (:func:`tiltwell._base.resources.check_memory`)."""
        count = as_integer(n, "n", 0)
        check_memory(count * BYTES_PER_PARTICLE, f"{count} particles (sampled and tracked)",
                     "ask for fewer particles (the statistical error falls only as 1/sqrt(N))", argument="particles")
        parts = list(self.chunks(count, seed=seed))
        return np.concatenate(parts) if parts else np.empty((0, 6))

    def drift(self, time: float) -> Beam:
        """The beam after free flight for ``time`` [s]; the synchronous particle flies too."""
        planes = {name: getattr(self, name).drift(time) for name in _COLUMNS}
        return Beam(self.velocity, **planes)

    def _repr_html_(self) -> str:
        rows = [("velocity", f"{self.velocity:.5g} m/s")]
        for name in _COLUMNS:
            p = getattr(self, name)
            rows.append((name, f"σ {p.sigma_position * 1e3:.3g} mm, σv {p.sigma_velocity:.3g} m/s, "
                               f"ε {p.emittance * 1e3:.3g} mm·m/s"))
        return html_table("Beam", rows)


def _shaped(normals: Array, factor: NDArray[np.floating[Any]]) -> Array:
    """``normals @ factor.T`` column by column, not a BLAS product: every row's rounding is
    then the same whatever the number of rows, so chunk sizes never change the particles."""
    particles = np.zeros_like(normals)
    for k in range(6):
        particles += normals[:, k : k + 1] * factor[:, k]
    return particles
