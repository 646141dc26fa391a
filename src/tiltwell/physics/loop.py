"""The exact magnetic field of one thin circular current loop (complete elliptic integrals).

:func:`loop_field` is the public function of the fixed interface; :func:`loop_field_cylindrical`
is its kernel in cylindrical components, shared by the coil sets of :mod:`.fields` and
broadcasting over many loops at once. SI units: m, A, T.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.special import ellipe, ellipkm1

from .._base.validation import MAX_LENGTH, as_points, as_scalar
from .constants import VACUUM_PERMEABILITY

__all__ = ["BRACKET_SERIES", "SERIES_LIMIT", "WIRE_TOLERANCE", "loop_field", "loop_field_cylindrical"]

FloatArray = NDArray[np.float64]

#: Points closer to a wire than this fraction of its radius get NaN (see ``loop_field``).
WIRE_TOLERANCE = 1e-12
#: Below this elliptic parameter m the bracket g(m) is summed as a power series.
SERIES_LIMIT = 0.1


def _bracket_series_coefficients(count: int) -> FloatArray:
    """Coefficients of g(m) = [(1 - m/2) E(m) - (1 - m) K(m)] / m^2 as a power series in m.

    From K = (pi/2) sum c_n m^n and E = (pi/2) sum c_n m^n / (1 - 2n), c_n = ((1/2)_n / n!)^2
    (Abramowitz & Stegun, Handbook of Mathematical Functions, eqs. 17.3.11-12, from memory),
    collecting powers gives the coefficient of m^n in the bracket as
    (pi/2) c_(n-1) 3 (n - 1) / (2 n (2 n - 3)), which is zero for n = 0, 1.
    """
    coefficients = np.empty(count)
    c_previous = 0.25  # c_1
    for index in range(count):
        n = index + 2
        coefficients[index] = 0.5 * math.pi * c_previous * 3 * (n - 1) / (2 * n * (2 * n - 3))
        c_previous *= ((2 * n - 1) / (2 * n)) ** 2
    return coefficients


#: Power-series coefficients of the bracket g(m) (see :func:`loop_field`), highest power
#: first for ``np.polyval``; used below :data:`SERIES_LIMIT`.
BRACKET_SERIES = _bracket_series_coefficients(20)[::-1]


def loop_field_cylindrical(
    rho: FloatArray, dz: FloatArray, radius: FloatArray | float, current: FloatArray | float
) -> tuple[FloatArray, FloatArray]:
    """Return (B_rho / rho [T/m], B_z [T]) of thin loops; all arguments broadcast together.

    ``rho`` [m] is the distance from the axis, ``dz`` [m] the height above the loop plane,
    ``radius`` [m] and ``current`` [A] those of the loops. No input checks: the callers
    (:func:`loop_field`, :class:`tiltwell.CoilSet`) validate. Points within
    ``WIRE_TOLERANCE * radius`` of the wire give NaN.
    """
    alpha2 = (rho - radius) ** 2 + dz**2  # squared distances to the nearest and
    beta2 = (rho + radius) ** 2 + dz**2  # farthest points of the wire
    beta = np.sqrt(beta2)
    m = np.minimum(4.0 * radius * rho / beta2, 1.0)  # parameter k^2 of K and E
    p = alpha2 / beta2  # complementary parameter 1 - m, computed without cancellation
    with np.errstate(divide="ignore", invalid="ignore"):  # only on the wire; set NaN below
        e_integral = ellipe(m)
        bracket = 0.5 * (1.0 + p) * e_integral - p * ellipkm1(p)  # = m^2 g(m)
        small = m < SERIES_LIMIT
        g = np.divide(bracket, m * m, out=np.empty_like(bracket), where=~small)
        if np.any(small):
            g[small] = np.polyval(BRACKET_SERIES, m[small])
        scale = (VACUUM_PERMEABILITY / math.pi) * current * radius**2 / (alpha2 * beta)
        b_z = scale * (e_integral - 8.0 * rho**2 * g / beta2)
        b_rho_over_rho = scale * 8.0 * dz * g / beta2
    on_wire = alpha2 <= (WIRE_TOLERANCE * radius) ** 2
    if np.any(on_wire):
        b_z[on_wire] = np.nan
        b_rho_over_rho[on_wire] = np.nan
    return b_rho_over_rho, b_z


def loop_field(points: ArrayLike, radius: float, z: float, current: float) -> FloatArray:
    """Exact magnetic field of a thin circular current loop centred on the z axis.

    Parameters
    ----------
    points : array_like, shape (N, 3)
        Positions (x, y, z) [m] where the field is wanted.
    radius : float
        Loop radius [m], > 0.
    z : float
        Axial position of the loop plane [m].
    current : float
        Current [A]; positive runs counter-clockwise seen from +z, so the field on the
        axis points along +z.

    Returns
    -------
    ndarray, shape (N, 3)
        Field (B_x, B_y, B_z) [T]. A point on the wire itself (within ``WIRE_TOLERANCE``
        times the radius of it), where the field of a thin wire is infinite, gets NaN in
        all three components: the answer, not an error, so the other points of the call
        keep theirs.

    Notes
    -----
    The cylindrical components of Simpson, Lane, Immer and Youngquist, "Simple analytic
    expressions for the magnetic field of a circular current loop" (NASA Technical
    Memorandum, 2001) in C = mu0 I / pi, alpha^2, beta^2 and
    k^2 = m = 4 a rho / beta^2, are rewritten with alpha^2 = beta^2 (1 - m) and
    a^2 + r^2 = beta^2 (1 - m/2) as

        B_rho / rho = 8 C a^2 (z - z_loop) g(m) / (alpha^2 beta^3)
        B_z = C a^2 [E(m) - 8 rho^2 g(m) / beta^2] / (alpha^2 beta)

    with g(m) = [(1 - m/2) E(m) - (1 - m) K(m)] / m^2 = 3 pi / 32 + O(m). The bracket
    cancels to O(m^2), both near the axis and far from the loop, so for m < 0.1 g is summed
    from its power series (coefficients from the hypergeometric series of K and E), and
    above from ``scipy.special.ellipe`` and ``ellipkm1`` (K through 1 - m, accurate near the
    wire). B_rho / rho is finite on the axis (-dB_z/dz / 2 there) and multiplies x and y;
    nothing divides by rho.

    The relative error is below 1e-9 (measured ~1e-14 against magpylib and a brute-force
    Biot-Savart sum) on and near the axis, far away, and anywhere farther than ~1e-6
    ``radius`` from the wire; at a distance d from it, rounding of the coordinates alone
    limits the accuracy to ~1e-16 ``radius`` / d. On the wire the field is singular: points
    closer than 1e-12 ``radius`` return NaN in all three components. Near the wire
    |B| ~ mu0 I / (2 pi d).

    Examples
    --------
    At the centre, B_z = mu0 I / (2 a) = 6.283e-3 T for 100 A in a 1 cm loop:

    >>> import numpy as np
    >>> loop_field(np.zeros((1, 3)), radius=0.01, z=0.0, current=100.0)
    array([[0.        , 0.        , 0.00628319]])
    """
    positions = as_points(points)
    a = as_scalar(radius, "radius", "m", low=0.0, high=MAX_LENGTH, low_open=True)
    plane = as_scalar(z, "z", "m", low=-MAX_LENGTH, high=MAX_LENGTH)
    amps = as_scalar(current, "current", "A")
    x, y = positions[:, 0], positions[:, 1]
    b_rho_over_rho, b_z = loop_field_cylindrical(np.hypot(x, y), positions[:, 2] - plane, a, amps)
    return np.stack((b_rho_over_rho * x, b_rho_over_rho * y, b_z), axis=1)

