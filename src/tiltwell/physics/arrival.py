"""Arrival times of a free pulsed beam at a detector: the density-to-flux transformation.

Particles leave the nozzle at times ``t0`` spread uniformly over the valve's opening
``[0, open_time]`` (a top-hat pulse) with forward speeds ``v`` of the Gaussian density
``g(v)`` of mean ``velocity`` and rms ``spread``, and fly freely over ``distance`` L. A
particle arrives at ``t = t0 + L / v``. For a point source in time (``open_time -> 0``) the
change of variables ``v = L / t`` gives the arrival-time density of the particles crossing
the detector plane (the flux, what a counting detector sees):

    f(t) = (L / t^2) g(L / t),

and averaging over the opening, ``f(t) = [G(L / max(t - open_time, 0)) - G(L / t)] / open_time``
with ``G`` the Gaussian cumulative distribution (exact, no quadrature). A detector that
samples the density in a thin volume (e.g. laser ionisation) sees instead the number per
unit length at L, ``n(t) = f(t) / v``, for a point source ``(t / L) f(t)``: slow particles
stay longer in the volume and weigh more (H. Pauly, Atom, Molecule, and Cluster Beams I
(Springer, 2000), the chapter on velocity measurement by time of flight; G. Scoles (ed.),
Atomic and Molecular Beam Methods Vol. 1 (Oxford UP, 1988); both from memory). Particles
with ``v <= 0`` never arrive. SI units.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.special import ndtr

from .._base.validation import TiltwellError, as_finite_array, as_integer, as_scalar

__all__ = ["binned_flux", "flux_density", "line_density"]

FloatArray = NDArray[np.float64]

#: Gauss–Legendre nodes per time bin in :func:`binned_flux` (the density is smooth on a bin).
BIN_NODES = 16


def _checked(distance: float, velocity: float, spread: float, open_time: float) -> tuple[float, float, float, float]:
    return (as_scalar(distance, "distance", "m", low=0.0, low_open=True),
            as_scalar(velocity, "velocity", "m/s", low=0.0, low_open=True),
            as_scalar(spread, "spread", "m/s", low=0.0, low_open=True),
            as_scalar(open_time, "open_time", "s", low=0.0))


def _speed_cdf(speed: FloatArray, velocity: float, spread: float) -> FloatArray:
    return np.asarray(ndtr((speed - velocity) / spread), dtype=np.float64)


def flux_density(times: ArrayLike, distance: float, velocity: float, spread: float, open_time: float) -> FloatArray:
    """Arrival-time density [1/s] of the particles crossing the plane at ``distance``.

    Parameters
    ----------
    times : array_like, any shape
        Times [s] since the valve began to open; the result has their shape.
    distance : float
        Nozzle to detector plane L [m], > 0.
    velocity, spread : float
        Mean and rms of the Gaussian forward-speed distribution [m/s], both > 0.
    open_time : float
        Valve opening [s], >= 0 (0: a point source in time).

    Returns
    -------
    ndarray
        ``f(t)`` of the module notes; it integrates over all t to ``G(inf) - G(0)``, the
        share of particles with v > 0. Zero for t <= 0.
    """
    length, v0, sigma, tau = _checked(distance, velocity, spread, open_time)
    t = as_finite_array(times, "times", "s")
    out = np.zeros(t.shape)
    later = t > 0.0
    if tau == 0.0:
        u = length / t[later]
        out[later] = length / t[later] ** 2 * np.exp(-0.5 * ((u - v0) / sigma) ** 2) / (sigma * np.sqrt(2 * np.pi))
        return out
    begun = t[later] - tau
    fast = np.where(begun > 0.0, length / np.where(begun > 0.0, begun, 1.0), np.inf)
    out[later] = (_speed_cdf(fast, v0, sigma) - _speed_cdf(length / t[later], v0, sigma)) / tau
    return out


def line_density(times: ArrayLike, distance: float, velocity: float, spread: float, open_time: float, *,
                 nodes: int = 64) -> FloatArray:
    """Particles per metre [1/m] at ``distance`` against ``times`` [s] (what a density
    detector sees), per particle emitted: ``n(t) = mean over t0 of g(L/s) / s`` with
    ``s = t - t0`` (``(t / L) f(t)`` for a point source). Arguments as :func:`flux_density`;
    ``nodes`` Gauss–Legendre points across the opening (>= 1)."""
    length, v0, sigma, tau = _checked(distance, velocity, spread, open_time)
    count = as_integer(nodes, "nodes", 1, 10_000)
    t = as_finite_array(times, "times", "s")
    x, w = np.polynomial.legendre.leggauss(count)
    starts, weights = 0.5 * tau * (x + 1.0), 0.5 * w
    s = t[..., None] - starts
    flying = s > 0.0
    safe = np.where(flying, s, 1.0)
    g = np.exp(-0.5 * ((length / safe - v0) / sigma) ** 2) / (sigma * np.sqrt(2 * np.pi))
    result: FloatArray = np.sum(np.where(flying, g / safe, 0.0) * weights, axis=-1)
    return result


def binned_flux(edges: ArrayLike, distance: float, velocity: float, spread: float, open_time: float) -> FloatArray:
    """Share of the emitted particles arriving in each time bin [1], shape (K,), for bin
    ``edges`` [s], shape (K + 1,), strictly increasing: :func:`flux_density` integrated over
    each bin by ``BIN_NODES``-point Gauss–Legendre quadrature."""
    bounds = as_finite_array(edges, "edges", "s", ndim=1)
    if bounds.size < 2 or np.any(np.diff(bounds) <= 0.0):
        raise TiltwellError(f"edges [s] must be >= 2 strictly increasing values; got {bounds.size} value(s)")
    x, w = np.polynomial.legendre.leggauss(BIN_NODES)
    low, width = bounds[:-1, None], np.diff(bounds)[:, None]
    points = low + 0.5 * width * (x + 1.0)
    values = flux_density(points, distance, velocity, spread, open_time)
    result: FloatArray = np.sum(values * 0.5 * w, axis=1) * width[:, 0]
    return result
