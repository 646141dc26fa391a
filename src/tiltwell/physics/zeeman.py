"""Zeeman energy curves of one low-field-seeking state: |B| [T] -> W [J].

A Zeeman model maps the field magnitude ``|B|`` [T] to the energy ``W`` [J] of one
low-field-seeking state, measured from that state's own zero-field energy, so
``energy(0) == 0`` for every model. Four models are given: a constant moment
(:class:`LinearZeeman`), the Breit–Rabi formula for a ``J = 1/2`` hyperfine state
(:class:`BreitRabi`), one eigenvalue of a field-dependent Hamiltonian matrix
(:class:`MatrixZeeman`) and a user table (:class:`TabulatedZeeman`). The Wigner 3-j and 6-j
symbols (:func:`wigner_3j`, :func:`wigner_6j`) build such matrices. Any object with the two
methods of :class:`ZeemanModel` works wherever a model is expected.

Shapes: ``energy`` and ``derivative`` accept a scalar or an array of any shape and return a
float64 ndarray of the same shape; a scalar input gives a 0-d array (use ``float(...)``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Protocol, runtime_checkable

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.interpolate import PchipInterpolator

from .._base.validation import TiltwellError, as_finite_array, as_increasing, as_integer, as_scalar
from .constants import BOHR_MAGNETON, ELECTRON_G

__all__ = [
    "ZeemanModel",
    "LinearZeeman",
    "BreitRabi",
    "TabulatedZeeman",
    "MatrixZeeman",
    "wigner_3j",
    "wigner_6j",
    "STRONG_FIELD",
    "half_integer_text",
]

#: Field [T] at which :attr:`Species.moment` takes the slope dW/dB.
STRONG_FIELD: float = 1.0

Array = NDArray[np.float64]


def _as_field(field: ArrayLike) -> Array:
    """Field magnitudes [T] as a float64 array, finite and >= 0, or raise."""
    b = as_finite_array(field, "field", "T")
    if np.any(b < 0):
        raise TiltwellError(f"field [T] is a magnitude |B| and must be >= 0; got minimum {b.min()!r}")
    return b


def half_integer_text(value: float) -> str:
    """Print a half-integer as ``3/2`` and an integer as ``1``."""
    twice = round(2 * value)
    return str(twice // 2) if twice % 2 == 0 else f"{twice}/2"


@runtime_checkable
class ZeemanModel(Protocol):
    """Zeeman energy of one state as a function of the field magnitude.

    Both methods take ``field``, ``|B|`` [T] >= 0, scalar or array of any shape, and return a
    float64 ndarray of the same shape (0-d for a scalar).
    """

    def energy(self, field: ArrayLike) -> Array:
        """Energy W [J] relative to the zero-field energy of the state; ``energy(0) == 0``."""
        ...

    def derivative(self, field: ArrayLike) -> Array:
        """Slope dW/d|B| [J/T]; positive for a low-field seeker."""
        ...


@dataclass(frozen=True)
class LinearZeeman:
    """Constant magnetic moment: ``W = moment * |B|``.

    Parameters
    ----------
    moment : float
        Effective moment [J/T]; positive for a low-field seeker.

    Examples
    --------
    >>> from tiltwell.physics.constants import BOHR_MAGNETON
    >>> float(LinearZeeman(2 * BOHR_MAGNETON).energy(0.5) / BOHR_MAGNETON)
    1.0
    """

    moment: float

    def __post_init__(self) -> None:
        object.__setattr__(self, "moment", as_scalar(self.moment, "moment", "J/T"))

    def energy(self, field: ArrayLike) -> Array:
        """Energy [J], same shape as ``field`` [T]."""
        return np.asarray(self.moment * _as_field(field), dtype=np.float64)

    def derivative(self, field: ArrayLike) -> Array:
        """Slope [J/T], same shape as ``field`` [T] (the constant ``moment``)."""
        return np.full(np.shape(_as_field(field)), self.moment)


@dataclass(frozen=True)
class BreitRabi:
    """Hyperfine state ``|F, mF>`` of a ``J = 1/2`` atom (2S1/2 ground state) in a field.

    Breit–Rabi formula (G. Breit and I. I. Rabi, Phys. Rev. 38, 2082 (1931); as written in
    D. A. Steck, "Rubidium 87 D Line Data", eq. for the 2S1/2 ground state), with
    ``H = A I·J + mu_B (g_J J_z + g_I I_z) B`` and ``x = (g_J - g_I) mu_B B / dE``::

        E(B) = -dE / (2(2I+1)) + g_I mu_B m B + s (dE/2) sqrt(1 + 4 m x / (2I+1) + x^2)

    where ``s = +1`` for ``F = I + 1/2`` and ``-1`` for ``F = I - 1/2``. For the stretched
    states ``|m| = I + 1/2`` the root is ``1 + sign(m) x`` (analytic continuation, so the
    state ``m = -(I+1/2)`` crosses over to high-field seeking for ``x > 1``).

    Parameters
    ----------
    nuclear_spin : float
        I, a positive multiple of 1/2.
    hyperfine_splitting : float
        dE [J], zero-field energy of ``F = I+1/2`` minus that of ``F = I-1/2``; positive
        for normal ordering, negative for inverted; not zero.
    F, mF : float
        The state, ``F = I ± 1/2`` and ``mF`` in ``-F, ..., F``.
    g_J : float
        Electronic g-factor, positive convention (default: free electron).
    g_I : float
        Nuclear g-factor in units of mu_B with the sign of ``H`` above, i.e.
        ``g_I = -(mu_I / (I mu_N)) mu_N / mu_B`` (hydrogen: -0.00304). Default 0 neglects the
        nuclear Zeeman term (a ~1e-3 relative effect on the slope).

    Notes
    -----
    :meth:`energy` subtracts the zero-field energy; :attr:`zero_field_energy` gives it,
    relative to the centroid of the hyperfine Hamiltonian ``A I·J`` (whose trace is zero).

    Examples
    --------
    >>> from tiltwell.physics.constants import PLANCK
    >>> h = BreitRabi(0.5, PLANCK * 1420.405751768e6, F=1, mF=0)
    >>> float(h.energy(0.0))
    0.0
    """

    nuclear_spin: float
    hyperfine_splitting: float
    F: float
    mF: float
    g_J: float = ELECTRON_G
    g_I: float = 0.0

    def __post_init__(self) -> None:
        spin = as_scalar(self.nuclear_spin, "nuclear_spin", "1", low=0.5)
        if abs(2 * spin - round(2 * spin)) > 1e-9:
            raise TiltwellError(f"nuclear_spin [1] must be a multiple of 1/2; got {spin!r}")
        spin = round(2 * spin) / 2
        split = as_scalar(self.hyperfine_splitting, "hyperfine_splitting", "J")
        if split == 0:
            raise TiltwellError("hyperfine_splitting [J] must be nonzero; got 0.0")
        allowed_f = (spin - 0.5, spin + 0.5)
        f = as_scalar(self.F, "F", "1")
        if not any(abs(f - a) < 1e-9 for a in allowed_f):
            raise TiltwellError(
                f"F must be one of {half_integer_text(allowed_f[0])}, {half_integer_text(allowed_f[1])} for "
                f"nuclear_spin {half_integer_text(spin)} and J = 1/2; got {f!r}"
            )
        f = min(allowed_f, key=lambda a: abs(f - a))
        m = as_scalar(self.mF, "mF", "1")
        allowed_m = [-f + k for k in range(round(2 * f) + 1)]
        if not any(abs(m - a) < 1e-9 for a in allowed_m):
            listed = ", ".join(half_integer_text(a) for a in allowed_m)
            raise TiltwellError(f"mF must be one of {listed} for F = {half_integer_text(f)}; got {m!r}")
        m = min(allowed_m, key=lambda a: abs(m - a))
        for name, value in (("nuclear_spin", spin), ("hyperfine_splitting", split), ("F", f), ("mF", m)):
            object.__setattr__(self, name, value)
        object.__setattr__(self, "g_J", as_scalar(self.g_J, "g_J", "1"))
        object.__setattr__(self, "g_I", as_scalar(self.g_I, "g_I", "1"))

    @property
    def _sign(self) -> float:
        return 1.0 if self.F > self.nuclear_spin else -1.0

    @property
    def _stretched(self) -> bool:
        return abs(self.mF) == self.nuclear_spin + 0.5

    @property
    def zero_field_energy(self) -> float:
        """Energy [J] of this F level at zero field, relative to the hyperfine centroid."""
        dE, spin = self.hyperfine_splitting, self.nuclear_spin
        return -dE / (2 * (2 * spin + 1)) + self._sign * dE / 2

    def _x(self, b: Array) -> Array:
        return (self.g_J - self.g_I) * BOHR_MAGNETON * b / self.hyperfine_splitting

    def energy(self, field: ArrayLike) -> Array:
        """Energy [J] relative to the zero-field level, same shape as ``field`` [T]."""
        b = _as_field(field)
        x = self._x(b)
        if self._stretched:
            root_minus_one = math.copysign(1.0, self.mF) * x
        else:
            slope = 4 * self.mF / (2 * self.nuclear_spin + 1)
            # sqrt(R) - 1 = (R - 1) / (sqrt(R) + 1): no cancellation at weak field
            root_minus_one = (slope + x) * x / (np.sqrt(1 + slope * x + x * x) + 1)
        nuclear = self.g_I * BOHR_MAGNETON * self.mF * b
        return np.asarray(nuclear + self._sign * self.hyperfine_splitting / 2 * root_minus_one, dtype=np.float64)

    def derivative(self, field: ArrayLike) -> Array:
        """Slope dW/d|B| [J/T], same shape as ``field`` [T]; analytic."""
        b = _as_field(field)
        x = self._x(b)
        if self._stretched:
            factor = math.copysign(1.0, self.mF) * np.ones_like(x)
        else:
            half = 2 * self.mF / (2 * self.nuclear_spin + 1)
            factor = (half + x) / np.sqrt(1 + 2 * half * x + x * x)
        electronic = self._sign * (self.g_J - self.g_I) * BOHR_MAGNETON / 2 * factor
        return np.asarray(self.g_I * BOHR_MAGNETON * self.mF + electronic, dtype=np.float64)


class TabulatedZeeman:
    """Zeeman curve from a table, interpolated by a shape-preserving cubic (PCHIP).

    Between samples the curve is SciPy's ``PchipInterpolator`` (Fritsch & Carlson, SIAM J.
    Numer. Anal. 17, 238 (1980)): monotone wherever the data are, with no overshoot. Above
    the last sample it continues as a straight line with the interpolant's slope there.

    Parameters
    ----------
    fields : array_like, shape (n,)
        ``|B|`` [T], strictly increasing, starting at exactly 0, ``n >= 2``.
    energies : array_like, shape (n,)
        ``W`` [J] at ``fields``. ``energies[0]`` is subtracted, so a table of absolute
        energies (e.g. from a diagonalisation) may be given as it is.

    Examples
    --------
    >>> table = TabulatedZeeman([0.0, 1.0, 2.0], [0.0, 1e-23, 2e-23])
    >>> float(table.energy(3.0))
    3e-23
    """

    def __init__(self, fields: ArrayLike, energies: ArrayLike) -> None:
        b = as_increasing(fields, "fields", "T", min_size=2).copy()
        if b[0] != 0:
            raise TiltwellError(f"fields [T] must start at 0; got fields[0]={b[0]!r}")
        w = as_finite_array(energies, "energies", "J", ndim=1)
        if w.shape != b.shape:
            raise TiltwellError(
                f"energies [J] must have the same length as fields ({b.size}); got {w.size}"
            )
        w = w - w[0]
        b.setflags(write=False)
        w.setflags(write=False)
        self.fields: Array = b
        self.energies: Array = w
        self._curve = PchipInterpolator(b, w, extrapolate=False)
        self._slope = self._curve.derivative()
        self._end_slope = float(self._slope(b[-1]))

    def __repr__(self) -> str:
        return f"TabulatedZeeman(<{self.fields.size} points, 0 to {self.fields[-1]:g} T>)"

    def energy(self, field: ArrayLike) -> Array:
        """Energy [J], same shape as ``field`` [T]; linear beyond the table."""
        b = _as_field(field)
        end = self.fields[-1]
        inside = self._curve(np.minimum(b, end))
        return np.asarray(np.where(b <= end, inside, self.energies[-1] + self._end_slope * (b - end)), dtype=np.float64)

    def derivative(self, field: ArrayLike) -> Array:
        """Slope [J/T] of the interpolant, same shape as ``field`` [T]; constant beyond the table."""
        b = _as_field(field)
        end = self.fields[-1]
        return np.asarray(np.where(b <= end, self._slope(np.minimum(b, end)), self._end_slope), dtype=np.float64)




class MatrixZeeman:
    """One adiabatic level of ``H(B) = H0 + |B| H1``: eigenvalue number ``index`` (ascending).

    Within a block of fixed total ``M`` (and parity) the levels of ``H(B)`` do not cross
    (von Neumann–Wigner non-crossing rule), so the ``index``-th eigenvalue is the curve a
    slowly moving particle follows; pass one such block. Non-adiabatic passage through
    avoided crossings is not modelled. The slope is the Hellmann–Feynman expectation value
    ``<v|H1|v>``.

    Parameters
    ----------
    zero_field : array_like, shape (d, d)
        ``H0`` [J], real symmetric.
    per_tesla : array_like, shape (d, d)
        ``H1`` [J/T], real symmetric (the Zeeman operator per tesla along the quantisation axis).
    index : int
        Which eigenvalue, 0 for the lowest, in ``[0, d)``.

    Examples
    --------
    >>> import numpy as np
    >>> two = MatrixZeeman(np.diag([0.0, 1.0]), np.diag([2.0, -3.0]), 0)
    >>> float(two.energy(1.0))
    -2.0
    """

    def __init__(self, zero_field: ArrayLike, per_tesla: ArrayLike, index: int) -> None:
        h0 = as_finite_array(zero_field, "zero_field", "J", ndim=2)
        h1 = as_finite_array(per_tesla, "per_tesla", "J/T", ndim=2)
        for name, m, unit in (("zero_field", h0, "J"), ("per_tesla", h1, "J/T")):
            if m.shape[0] != m.shape[1] or m.shape != h0.shape:
                raise TiltwellError(f"{name} [{unit}] must be square, shape (d, d) like zero_field; got {m.shape}")
            if not np.allclose(m, m.T, rtol=1e-12, atol=1e-12 * float(np.max(np.abs(m), initial=0.0))):
                raise TiltwellError(f"{name} [{unit}] must be symmetric; got an asymmetric matrix")
        self.index = as_integer(index, "index", 0, h0.shape[0] - 1)
        self.zero_field: Array = np.array(h0)
        self.per_tesla: Array = np.array(h1)
        self.zero_field.setflags(write=False)
        self.per_tesla.setflags(write=False)
        self.offset = float(np.linalg.eigvalsh(h0)[self.index])

    def __repr__(self) -> str:
        return f"MatrixZeeman(<{self.zero_field.shape[0]}x{self.zero_field.shape[0]}>, index={self.index})"

    def _solve(self, field: ArrayLike) -> tuple[Array, Array, Array]:
        b = _as_field(field)
        values, vectors = np.linalg.eigh(self.zero_field + b.reshape(-1, 1, 1) * self.per_tesla)
        return b, values[:, self.index], vectors[:, :, self.index]

    def energy(self, field: ArrayLike) -> Array:
        """Energy [J] relative to the zero-field eigenvalue, same shape as ``field`` [T]."""
        b, values, _ = self._solve(field)
        return np.asarray((values - self.offset).reshape(b.shape), dtype=np.float64)

    def derivative(self, field: ArrayLike) -> Array:
        """Slope dW/d|B| [J/T] (Hellmann–Feynman), same shape as ``field`` [T]."""
        b, _, v = self._solve(field)
        slope = np.einsum("ni,ij,nj->n", v, self.per_tesla, v)
        return np.asarray(slope.reshape(b.shape), dtype=np.float64)


def _factorial(x: float) -> float:
    return float(math.factorial(round(x)))


def _triangle(a: float, b: float, c: float) -> float:
    """Racah's Delta(abc), or 0 when a, b, c break the triangle rule or are not integral."""
    s = a + b + c
    if a + b < c or a + c < b or b + c < a or abs(s - round(s)) > 1e-9:
        return 0.0
    return math.sqrt(_factorial(a + b - c) * _factorial(a - b + c) * _factorial(-a + b + c) / _factorial(s + 1))


def wigner_3j(j1: float, j2: float, j3: float, m1: float, m2: float, m3: float) -> float:
    """Wigner 3-j symbol ``(j1 j2 j3; m1 m2 m3)`` by Racah's sum (Edmonds, *Angular
    Momentum in Quantum Mechanics*, eq. 3.7.3); arguments integers or half-integers."""
    if abs(m1 + m2 + m3) > 1e-9 or any(abs(m) > j + 1e-9 for m, j in ((m1, j1), (m2, j2), (m3, j3))):
        return 0.0
    delta = _triangle(j1, j2, j3)
    if delta == 0.0 or any(abs((j - m) - round(j - m)) > 1e-9 for j, m in ((j1, m1), (j2, m2), (j3, m3))):
        return 0.0
    front = math.sqrt(math.prod(_factorial(j + m) * _factorial(j - m) for j, m in ((j1, m1), (j2, m2), (j3, m3))))
    low = round(max(0, j2 - j3 - m1, j1 - j3 + m2))
    high = round(min(j1 + j2 - j3, j1 - m1, j2 + m2))
    total = sum((-1) ** t / (_factorial(t) * _factorial(j3 - j2 + t + m1) * _factorial(j3 - j1 + t - m2)
                             * _factorial(j1 + j2 - j3 - t) * _factorial(j1 - t - m1) * _factorial(j2 - t + m2))
                for t in range(low, high + 1))
    return float((-1) ** round(j1 - j2 - m3) * delta * front * total)


def wigner_6j(j1: float, j2: float, j3: float, j4: float, j5: float, j6: float) -> float:
    """Wigner 6-j symbol ``{j1 j2 j3; j4 j5 j6}`` by Racah's sum (Edmonds, eq. 6.3.7)."""
    triads = ((j1, j2, j3), (j1, j5, j6), (j4, j2, j6), (j4, j5, j3))
    deltas = [_triangle(*t) for t in triads]
    if min(deltas) == 0.0:
        return 0.0
    sums = [sum(t) for t in triads]
    pairs = (j1 + j2 + j4 + j5, j2 + j3 + j5 + j6, j3 + j1 + j6 + j4)
    total = 0.0
    for t in range(round(max(sums)), round(min(pairs)) + 1):
        denominator = math.prod(_factorial(t - s) for s in sums) * math.prod(_factorial(p - t) for p in pairs)
        total += (-1) ** t * _factorial(t + 1) / denominator
    return float(math.prod(deltas) * total)

