"""Mutual and self-inductance of coaxial circular loops and wound coils, and their axial slope.

Three tiers, bottom up:

- :func:`loop_mutual` and :func:`loop_mutual_gradient`, unchecked kernels that broadcast
  over many pairs of thin loops (Maxwell's formula with complete elliptic integrals);
- :func:`mutual_inductance` and :func:`mutual_inductance_gradient`, the checked functions
  for one pair of loops (``tiltwell.mutual_inductance`` is fixed in DESIGN.md);
- :func:`coil_mutual_inductance`, :func:`coil_mutual_gradient` and
  :func:`coil_self_inductance`, sums over the filaments of wound :class:`~tiltwell.Coil`
  windings.

SI units: m, H, H/m. The axial force between two coaxial coils is I_a I_b dM/dz.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.special import ellipe, ellipkm1

from .._base.validation import MAX_LENGTH, TiltwellError, as_finite_array, as_integer, as_scalar
from .constants import VACUUM_PERMEABILITY
from .fields import Coil
from .hardware import ring_inductance
from .loop import loop_field_cylindrical

__all__ = [
    "COIL_FILAMENTS",
    "MUTUAL_SERIES_LIMIT",
    "RADIUS_STEP",
    "SELF_CELLS",
    "coil_mutual_gradient",
    "coil_mutual_inductance",
    "coil_self_inductance",
    "shifted_mutual",
    "loop_mutual",
    "radius_slopes",
    "loop_mutual_gradient",
    "mutual_inductance",
    "mutual_inductance_gradient",
]

FloatArray = NDArray[np.float64]

#: Below this elliptic parameter m = k^2, h(m) (see :func:`loop_mutual`) is summed as a series.
MUTUAL_SERIES_LIMIT = 0.1
#: Relative step of the mean radius in :func:`radius_slopes`.
RADIUS_STEP = 1e-6
#: Default Gauss-Legendre nodes per direction of each winding in the coil-pair sums.
COIL_FILAMENTS = 8
#: Default cells along the longer side of a winding in :func:`coil_self_inductance`.
SELF_CELLS = 16


def _series_coefficients(count: int) -> FloatArray:
    """Coefficients of h(m) = [(1 - m/2) K(m) - E(m)] / m^2 in powers of m, highest first.

    With K = (pi/2) sum c_n m^n and E = (pi/2) sum c_n m^n / (1 - 2n), c_n = ((1/2)_n / n!)^2
    (Abramowitz & Stegun, Handbook of Mathematical Functions, eqs. 17.3.11-12, from memory),
    the coefficient of m^n in (1 - m/2) K - E is (pi/2) c_(n-1) (n - 1) / (2 n), zero for
    n = 0, 1; h(m) = pi / 32 + O(m).
    """
    coefficients = np.empty(count)
    c_previous = 0.25  # c_1
    for index in range(count):
        n = index + 2
        coefficients[index] = 0.5 * math.pi * c_previous * (n - 1) / (2 * n)
        c_previous *= ((2 * n - 1) / (2 * n)) ** 2
    return coefficients[::-1]


_H_SERIES = _series_coefficients(24)


def loop_mutual(radius_a: ArrayLike, radius_b: ArrayLike, distance: ArrayLike) -> FloatArray:
    """Mutual inductance [H] of coaxial thin loops; arguments [m] broadcast, no checks.

    See :func:`mutual_inductance`; equal radii at distance 0 give inf.
    """
    a, b, d = (np.asarray(x, dtype=np.float64) for x in (radius_a, radius_b, distance))
    beta2 = (a + b) ** 2 + d * d
    m = 4.0 * a * b / beta2  # k^2
    p = ((a - b) ** 2 + d * d) / beta2  # 1 - k^2 without cancellation
    root = np.sqrt(a * b)
    small = m < MUTUAL_SERIES_LIMIT
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.sqrt(m)
        direct = VACUUM_PERMEABILITY * root * (2.0 / k) * (0.5 * (1.0 + p) * ellipkm1(p) - ellipe(m))
        series = 2.0 * VACUUM_PERMEABILITY * root * k**3 * np.polyval(_H_SERIES, np.where(small, m, 0.0))
    return np.asarray(np.where(small, series, direct), dtype=np.float64)


def loop_mutual_gradient(radius_a: ArrayLike, radius_b: ArrayLike, distance: ArrayLike) -> FloatArray:
    """dM/dd [H/m] of coaxial thin loops, d = z_b - z_a; arguments [m] broadcast, no checks.

    See :func:`mutual_inductance_gradient`; NaN where loop b lies on the wire of loop a.
    """
    a, b, d = (np.asarray(x, dtype=np.float64) for x in (radius_a, radius_b, distance))
    ratio, _ = loop_field_cylindrical(b, d, a, 1.0)  # B_rho / rho of loop a (1 A) on loop b
    return np.asarray(-2.0 * math.pi * b * b * ratio, dtype=np.float64)


def _pair(radius_a: float, radius_b: float, distance: float) -> tuple[float, float, float]:
    a = as_scalar(radius_a, "radius_a", "m", low=0.0, high=MAX_LENGTH, low_open=True)
    b = as_scalar(radius_b, "radius_b", "m", low=0.0, high=MAX_LENGTH, low_open=True)
    d = as_scalar(distance, "distance", "m", low=-MAX_LENGTH, high=MAX_LENGTH)
    if a == b and d == 0.0:
        raise TiltwellError(
            f"radius_a and radius_b [m] at distance 0 must differ (equal loops in one plane coincide: "
            f"their mutual inductance is infinite); got radius_a = radius_b = {a!r}, distance = 0.0"
        )
    return a, b, d


def mutual_inductance(radius_a: float, radius_b: float, distance: float) -> float:
    """Mutual inductance of two coaxial circular thin loops.

    Parameters
    ----------
    radius_a, radius_b : float
        Loop radii a, b [m], > 0.
    distance : float
        Distance d between the loop planes [m], finite (the sign does not matter).

    Returns
    -------
    float
        M [H]; multiply by N_a N_b for windings of N_a and N_b turns at these radii.

    Notes
    -----
    Maxwell's formula, M = mu0 sqrt(a b) [(2/k - k) K(k) - (2/k) E(k)] with
    k^2 = 4 a b / ((a + b)^2 + d^2) (Maxwell, A Treatise on Electricity and Magnetism,
    vol. 2, section 701; also Smythe, Static and Dynamic Electricity, section 8.02; from
    memory), written as M = mu0 sqrt(a b) (2/k) [(1 - k^2/2) K - E]. Far apart (k^2 < 0.1)
    the bracket cancels to O(k^4), so M = 2 mu0 sqrt(a b) k^3 h(k^2) with h summed from its
    power series (h = pi/32 + ...: the dipole limit mu0 pi a^2 b^2 / (2 d^3)). Close loops
    (k -> 1) take K through ``scipy.special.ellipkm1`` of 1 - k^2 =
    ((a - b)^2 + d^2) / ((a + b)^2 + d^2), computed without cancellation, so M keeps full
    precision down to the log limit mu0 a (ln(8 a / r) - 2), r the distance between the
    wires. Measured relative error ~1e-14 against an independent route (see the tests).
    Equal radii at distance 0 (coincident loops) raise :class:`~tiltwell.TiltwellError`.

    Examples
    --------
    Two 1 cm loops 1 cm apart:

    >>> round(mutual_inductance(0.01, 0.01, 0.01) * 1e9, 4)
    4.9408
    """
    a, b, d = _pair(radius_a, radius_b, distance)
    return float(loop_mutual(a, b, d))


def mutual_inductance_gradient(radius_a: float, radius_b: float, distance: float) -> float:
    """Derivative dM/dd [H/m] of :func:`mutual_inductance` with respect to ``distance``.

    Parameters are those of :func:`mutual_inductance`; d = z_b - z_a is signed here.

    Notes
    -----
    dM/dd = -16 mu0 a^2 b^2 d g(m) / (alpha^2 beta^3), alpha^2 = (a - b)^2 + d^2,
    beta^2 = (a + b)^2 + d^2, g(m) = [(1 - m/2) E(m) - (1 - m) K(m)] / m^2: the force
    F_z = -2 pi b I_b B_rho on loop b in the radial field of loop a (Simpson et al., see
    :func:`tiltwell.loop_field`), divided by I_a I_b, evaluated by the same cancellation-free
    kernel. The force on loop b along +z is I_a I_b dM/dd: negative (attraction) for
    parallel currents. Zero at d = 0.

    >>> round(mutual_inductance_gradient(0.01, 0.01, 0.01) * 1e6, 4)
    -0.7184
    """
    a, b, d = _pair(radius_a, radius_b, distance)
    return float(loop_mutual_gradient(a, b, d))


def _unit_loops(coil: Coil, filaments: int) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Filament radii, planes and turn weights (summing to ``turns``) of ``coil``."""
    return dataclasses.replace(coil, current=1.0, filaments=filaments).loops()


def _check_apart(coil_a: Coil, coil_b: Coil, shifts: FloatArray) -> None:
    """Raise unless both are Coils and ``coil_a`` overlaps no copy of ``coil_b`` moved by ``shifts`` [m]."""
    for name, coil in (("coil_a", coil_a), ("coil_b", coil_b)):
        if not isinstance(coil, Coil):
            raise TiltwellError(f"{name} must be a Coil; got {type(coil).__name__}")
    gap = np.abs(coil_b.z + shifts - coil_a.z) - 0.5 * (coil_a.height + coil_b.height)
    radial_gap = abs(coil_b.radius - coil_a.radius) - 0.5 * (coil_a.width + coil_b.width)
    if radial_gap < 0.0 and np.any(gap < 0.0):
        where = coil_b.z + float(shifts[np.argmax(gap < 0.0)])
        raise TiltwellError(
            f"coil_a and coil_b must not overlap (windings of {coil_a.width!r} x {coil_a.height!r} m and "
            f"{coil_b.width!r} x {coil_b.height!r} m at z = {coil_a.z!r} and {where!r} m, radii "
            f"{coil_a.radius!r} and {coil_b.radius!r} m); for one coil use coil_self_inductance"
        )


def _coil_pair(coil_a: Coil, coil_b: Coil, filaments: int) -> tuple[FloatArray, ...]:
    _check_apart(coil_a, coil_b, np.zeros(1))
    count = as_integer(filaments, "filaments", 1)
    ra, za, wa = _unit_loops(coil_a, count)
    rb, zb, wb = _unit_loops(coil_b, count)
    return ra[:, None], rb[None, :], zb[None, :] - za[:, None], wa[:, None] * wb[None, :]


def coil_mutual_inductance(coil_a: Coil, coil_b: Coil, filaments: int = COIL_FILAMENTS) -> float:
    """Mutual inductance [H] of two coaxial wound coils (all their turns).

    Parameters
    ----------
    coil_a, coil_b : Coil
        The windings (their ``current`` and ``filaments`` are ignored); they must not overlap.
    filaments : int, default 8
        Gauss-Legendre nodes per direction of each cross-section.

    Notes
    -----
    M = N_a N_b times the mean of :func:`loop_mutual` over both cross-sections, uniform
    current density, by Gauss-Legendre quadrature (the grid of :meth:`Coil.loops`). For
    windings in contact the integrand has a log kink at the shared face and the quadrature
    converges more slowly (measured: 8 nodes within 6e-5 of 24 for touching square windings
    of a fifth of the radius; 1e-14 for windings one height apart).
    """
    a, b, d, w = _coil_pair(coil_a, coil_b, filaments)
    return float(np.sum(w * loop_mutual(a, b, d)))


def coil_mutual_gradient(coil_a: Coil, coil_b: Coil, filaments: int = COIL_FILAMENTS) -> float:
    """dM/dz_b [H/m] of two coaxial wound coils: the force on ``coil_b`` along +z is I_a I_b times it.

    Parameters as for :func:`coil_mutual_inductance` (currents per turn I_a, I_b [A]); the
    filament sum of :func:`loop_mutual_gradient`.
    """
    a, b, d, w = _coil_pair(coil_a, coil_b, filaments)
    return float(np.sum(w * loop_mutual_gradient(a, b, d)))


def shifted_mutual(coil_a: Coil, coil_b: Coil, distances: ArrayLike,
                   filaments: int = COIL_FILAMENTS) -> tuple[FloatArray, FloatArray]:
    """M [H] and dM/dz [H/m] of ``coil_a`` with copies of ``coil_b`` moved by ``distances``.

    Parameters
    ----------
    coil_a, coil_b : Coil
        As for :func:`coil_mutual_inductance`; copy j of ``coil_b`` sits at
        ``coil_b.z + distances[j]`` and must not overlap ``coil_a``.
    distances : array_like, shape (S,)
        Axial shifts [m].
    filaments : int, default 8

    Returns
    -------
    mutual, gradient : ndarray, shape (S,)
        :func:`coil_mutual_inductance` and :func:`coil_mutual_gradient` of each copy, in one
        vectorised filament sum (e.g. for every neighbour of a coil in a row).
    """
    shifts = as_finite_array(distances, "distances", "m", ndim=1)
    _check_apart(coil_a, coil_b, shifts)
    count = as_integer(filaments, "filaments", 1)
    ra, za, wa = _unit_loops(coil_a, count)
    rb, zb, wb = _unit_loops(coil_b, count)
    a, b = ra[None, :, None], rb[None, None, :]
    d = shifts[:, None, None] + (zb[None, None, :] - za[None, :, None])
    weights = (wa[:, None] * wb[None, :])[None, :, :]
    return (np.sum(weights * loop_mutual(a, b, d), axis=(1, 2)),
            np.sum(weights * loop_mutual_gradient(a, b, d), axis=(1, 2)))


def coil_self_inductance(coil: Coil, cells: int = SELF_CELLS) -> float:
    """Self-inductance [H] of a wound coil of rectangular cross-section (all its turns).

    Parameters
    ----------
    coil : Coil
        The winding; ``width`` and ``height`` must be > 0 (a thin filament has no finite
        inductance). ``current`` and ``filaments`` are ignored.
    cells : int, default 16
        Cells along the longer side of the cross-section; the shorter side gets as many as
        keep the cells near square (at least 1).

    Notes
    -----
    The method of filaments (Grover, Inductance Calculations, on Lyle's and the filament
    method for coils of rectangular section; from memory): the section is cut into n equal
    cells with 1/n of the current each; L = (N / n)^2 [sum over pairs i != j of
    M(r_i, r_j, z_j - z_i) + sum over i of L_i], with M from :func:`loop_mutual` and L_i the
    cell's own ring of round section of the same area (:func:`~tiltwell.physics.hardware.ring_inductance`;
    the round section's self-distance a e^(-1/4) = 0.4394 side against 0.4470 side for the
    square, Maxwell, from memory, a 2 % bias in one term of n^2, so ~1e-4 of L for 16 cells).
    The cell-centre sums err by O(1/n^2); measured 16 cells within 4e-5 of 64 for a square
    section of a fifth of the radius.
    """
    if not isinstance(coil, Coil):
        raise TiltwellError(f"coil must be a Coil; got {type(coil).__name__}")
    count = as_integer(cells, "cells", 1)
    if coil.width <= 0.0 or coil.height <= 0.0:
        raise TiltwellError(
            f"coil width and height [m] must be > 0 for a finite self-inductance; got {coil.width!r} x {coil.height!r}"
        )
    longer = max(coil.width, coil.height)
    n_r = max(1, round(count * coil.width / longer))
    n_z = max(1, round(count * coil.height / longer))
    dr, dz = coil.width / n_r, coil.height / n_z
    radial = coil.radius - 0.5 * coil.width + dr * (np.arange(n_r) + 0.5)
    axial = dz * (np.arange(n_z) + 0.5)
    radii = np.repeat(radial, n_z)
    planes = np.tile(axial, n_r)
    pairs = loop_mutual(radii[:, None], radii[None, :], planes[None, :] - planes[:, None])
    np.fill_diagonal(pairs, 0.0)
    section = math.sqrt(dr * dz / math.pi)
    own = sum(ring_inductance(float(r), section) for r in radial) * n_z
    n = radii.size
    return float(coil.turns**2 * (pairs.sum() + own) / n**2)


def radius_slopes(coil: Coil, distances: ArrayLike, filaments: int = COIL_FILAMENTS) -> tuple[float, FloatArray]:
    """dL/dR [H/m] of ``coil`` and dM/dR [H/m] with copies of it moved by ``distances`` [m], shape (S,).

    R is the mean radius of ``coil`` alone (the copies keep theirs). By virtual work the
    outward force on a coil is I^2 dL/dR / 2 + sum_j I I_j dM_j/dR, and its hoop tension that
    over 2 pi (e.g. for the hoop stress of a winding in a row). Central differences with a
    step of 1e-6 R (:data:`RADIUS_STEP`): truncation ~1e-12, rounding ~1e-8 relative.
    """
    shifts = as_finite_array(distances, "distances", "m", ndim=1)
    if not isinstance(coil, Coil):
        raise TiltwellError(f"coil must be a Coil; got {type(coil).__name__}")
    step = RADIUS_STEP * coil.radius
    plus, minus = (dataclasses.replace(coil, radius=coil.radius + sign * step) for sign in (1.0, -1.0))
    own = (coil_self_inductance(plus) - coil_self_inductance(minus)) / (2.0 * step)
    mutual = (shifted_mutual(plus, coil, shifts, filaments)[0] - shifted_mutual(minus, coil, shifts, filaments)[0])
    return own, mutual / (2.0 * step)
