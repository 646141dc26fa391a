"""Spin flips near the field zero: the Landau–Zener closed form and the tracker's check.

The model. Near its zero a trap field is linear, ``B(r) = G (r - r0)``. A particle moving
in a straight line at constant velocity ``u`` sees ``B(t) = B0 + Bdot t`` with ``Bdot = G u``
constant: split along ``e = Bdot / |Bdot|``, ``B(t) = B_perp + (B0.e + |Bdot| t) e`` with a
constant transverse part ``B_perp`` (``|B_perp| = B_min``, the smallest |B| on the path) and a
longitudinal part swept linearly. For a spin-1/2 with ``H = (hbar gamma / 2) B.sigma``
(``gamma`` the gyromagnetic ratio [rad/(s T)]) that is exactly the Landau–Zener Hamiltonian
``H = -(Delta/2) sigma_x - (eps(t)/2) sigma_z`` with gap ``Delta = hbar gamma B_min`` and
sweep ``eps = hbar gamma |Bdot| t``. The probability of a diabatic passage, i.e. of ending
in the other adiabatic state (a spin flip relative to the field: the trapped state is lost),
after the whole pass ``t = -inf ... +inf`` is

    p = exp(-2 pi delta),  delta = Delta^2 / (4 hbar |d eps/dt|) = gamma B_min^2 / (4 |Bdot|)

(L. D. Landau, Phys. Z. Sowjetunion 2, 46 (1932); C. Zener, Proc. R. Soc. A 137, 696
(1932); in this notation S. N. Shevchenko, S. Ashhab and F. Nori, Phys. Rep. 492, 1
(2010), eqs. for ``P_LZ``; from memory). For the straight-line model of a gradient ``B'``
seen along the path, ``B(t) = B' (b e_perp + v t e_par)`` at impact parameter ``b`` and
speed ``v``, ``B_min = B' b`` and ``|Bdot| = B' v``: ``p = exp(-pi gamma B' b^2 / (2 v))``.
In the ideal quadrupole the gradient is not isotropic (``G = B' diag(-1/2, -1/2, 1)``) and
:func:`quadrupole_pass_probability` uses ``G`` itself.

Larger spins. For a state ``|j, m>`` whose Zeeman energy is linear, ``H = hbar gamma B.J``,
the evolution is the spin-``j`` image of the spin-1/2 one (E. Majorana, Nuovo Cimento 9, 43
(1932); from memory), so the probability of staying in ``m`` after a pass is
``|d^j_mm(beta)|^2`` with ``sin^2(beta/2) = p``, ``p`` the spin-1/2 probability at the same
``gamma``:

    d^j_mm = sum_k (-1)^k C(j+m, k) C(j-m, k) (1-p)^(j-k) p^k,

``(1-p)^(2j)`` for the stretched state ``m = j``. ``gamma = mu / (|m| hbar)`` from the
weak-field moment ``mu = dW/d|B|`` at zero field. Every departure from ``m`` is counted as a
loss, though ``m - 1 > 0`` would still be (more weakly) trapped: an upper bound on the loss
for ``j > 1/2``.

Adiabaticity. The direction of ``B`` turns at ``|d(B/|B|)/dt| = |B x Bdot| / |B|^2``; its
ratio to the Larmor frequency ``gamma |B|`` is ``kappa`` (:func:`adiabaticity`). On a
straight pass ``kappa`` peaks at the closest approach at ``|Bdot| / (gamma B_min^2) =
1 / (4 delta)``, so ``p = exp(-pi / (2 kappa_max))``: the two pictures of the issue (the
ratio of rates, and the Landau–Zener probability of a pass) are the same number.

The tracker's check (:class:`SpinFlips`, ``track(..., spin_flips=...)``). After every whole
step the field vector is evaluated at the particles' positions (the ideal quadrupole
inline, a coil trap on a field-vector grid interpolated trilinearly when the tracker has a
force map, else ``source.field``), times the ramp ``s(t)``. Between two step ends the field
seen is taken as linear in time, ``B_a -> B_b``. Where ``|B|`` along that segment has its
minimum strictly after ``B_a`` and not after ``B_b`` (``B_a.D < 0 <= B_b.D``, ``D = B_b -
B_a``) the particle makes a close pass with ``B_min = |B_a x D| / |D|`` and ``|Bdot| = |D| /
h``; the pass multiplies its survival weight by ``|d^j_mm|^2``. On a straight path through a
linear field ``B(t)`` is exactly linear, so the check reproduces the closed form for any
step, once per pass. Limits: the path must be near straight and the field near linear over
the transition (it lasts about ``max(B_min, sqrt(|Bdot| / gamma)) / |Bdot|``: ``B_min /
|Bdot|`` when adiabatic, longer by ``1 / sqrt(4 delta)`` when ``delta << 1``); each pass is
treated as a complete Landau–Zener passage, independent of the others (no coherence
between passes, no repopulation); the step must resolve the minimum of |B| (the check sees
one minimum per step at most; on a curved path keep the step short against the transition
time); spins start aligned with the field; a capped ideal quadrupole is taken as uncapped
(far from the zero, ``p`` is 0).
Weights, not random draws: the result is deterministic and has less noise.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.validation import TiltwellError, as_finite_array, as_points, as_scalar
from ..physics.constants import PLANCK
from ..physics.fields import IdealQuadrupole
from ..wells.traps import Trap
from .fieldmap import FieldMap

__all__ = [
    "SpinFlipCheck",
    "SpinFlips",
    "flip_quadrupole",
    "adiabaticity",
    "flip_probability",
    "landau_zener_probability",
    "quadrupole_pass_probability",
    "state_survival",
]

FloatArray = NDArray[np.float64]

_HBAR = PLANCK / (2.0 * math.pi)  #: J s


def _spin_pair(spin: float, projection: float | None) -> tuple[float, float]:
    """Checked ``(j, |m|)``: j a positive multiple of 1/2, m in -j..j, m != 0."""
    j = as_scalar(spin, "spin", "1", low=0.5)
    if abs(2 * j - round(2 * j)) > 1e-9:
        raise TiltwellError(f"spin [1] must be a multiple of 1/2, >= 1/2; got {spin!r}")
    j = round(2 * j) / 2
    m = j if projection is None else as_scalar(projection, "projection", "1", low=-j, high=j)
    if abs(m) < 0.25 or abs(2 * m - round(2 * m)) > 1e-9 or abs(round(j - m) - (j - m)) > 1e-9:
        raise TiltwellError(f"projection [1] must be one of -j, ..., j except 0 for spin j = {j:g}; got {projection!r}")
    return j, abs(round(2 * m) / 2)


def state_survival(probability: ArrayLike, spin: float = 0.5, projection: float | None = None) -> FloatArray:
    """Probability [1] that ``|j, m>`` stays in ``m`` after a pass with spin-1/2 flip ``probability``.

    ``|d^j_mm(beta)|^2`` with ``sin^2(beta/2) = probability`` (Majorana 1932, see the module
    notes): ``1 - p`` for spin 1/2, ``(1 - p)^(2j)`` for the stretched state.

    Parameters
    ----------
    probability : array_like
        Spin-1/2 flip probability of the pass, in [0, 1].
    spin : float
        ``j``, a positive multiple of 1/2.
    projection : float, optional
        ``m`` (default ``j``); not 0 (its sign does not matter).

    Examples
    --------
    >>> float(state_survival(0.25, 1.0, 1.0))  # stretched spin 1: (1 - p)^2
    0.5625
    """
    j, m = _spin_pair(spin, projection)
    p = as_finite_array(probability, "probability", "1")
    if np.any((p < 0.0) | (p > 1.0)):
        raise TiltwellError(f"probability [1] must be in [0, 1]; got {p[(p < 0.0) | (p > 1.0)].flat[0]!r}")
    return _survival(p, j, m)


def _survival(p: FloatArray, j: float, m: float) -> FloatArray:
    """Unchecked ``|d^j_mm|^2`` for ``m > 0``."""
    if m == j:
        with np.errstate(divide="ignore"):
            return np.asarray(np.exp(2.0 * j * np.log1p(-p)))
    up, down = round(j + m), round(j - m)
    q = 1.0 - p
    amplitude = sum((-1) ** k * math.comb(up, k) * math.comb(down, k) * q ** (j - k) * p**k for k in range(down + 1))
    return np.asarray(amplitude * amplitude, dtype=np.float64)


def landau_zener_probability(
    moment: float, minimum_field: ArrayLike, sweep_rate: ArrayLike, *, spin: float = 0.5,
    projection: float | None = None,
) -> FloatArray:
    """Flip probability [1] of one straight pass: leaving the state ``|j, m>``.

    Spin-1/2 probability ``p = exp(-pi gamma B_min^2 / (2 |Bdot|))``, ``gamma = moment /
    (|m| hbar)`` (Landau 1932; Zener, Proc. R. Soc. A 137, 696 (1932); see the module
    notes), then ``1 - |d^j_mm|^2`` (:func:`state_survival`).

    Parameters
    ----------
    moment : float
        Weak-field magnetic moment ``dW/d|B|`` of the state [J/T], not 0 (sign ignored).
    minimum_field : array_like
        Smallest |B| on the pass [T], >= 0.
    sweep_rate : array_like
        ``|dB/dt|`` [T/s], > 0, broadcastable with ``minimum_field``.
    spin, projection : float
        ``j`` and ``m`` (default ``j``); for ``j = m = 1/2``, ``gamma = 2 moment / hbar``.

    Examples
    --------
    >>> import math
    >>> p = landau_zener_probability(9.274e-24, 1e-4, 1e3)
    >>> round(float(p), 6) == round(math.exp(-math.pi * 9.274e-24 * 1e-8 / (1.0545718e-34 * 1e3)), 6)
    True
    """
    mu = as_scalar(moment, "moment", "J/T")
    if mu == 0.0:
        raise TiltwellError("moment [J/T] must be nonzero; got 0.0")
    j, m = _spin_pair(spin, projection)
    b = as_finite_array(minimum_field, "minimum_field", "T")
    rate = as_finite_array(sweep_rate, "sweep_rate", "T/s")
    if np.any(b < 0.0):
        raise TiltwellError(f"minimum_field [T] must be >= 0; got {b[b < 0.0].flat[0]!r}")
    if np.any(rate <= 0.0):
        raise TiltwellError(f"sweep_rate [T/s] must be > 0; got {rate[rate <= 0.0].flat[0]!r}")
    gamma = abs(mu) / (m * _HBAR)
    p = np.exp(-math.pi * gamma * b * b / (2.0 * rate))
    return 1.0 - _survival(p, j, m)


def flip_probability(
    moment: float, gradient: ArrayLike, impact: ArrayLike, speed: ArrayLike, *, spin: float = 0.5,
    projection: float | None = None,
) -> FloatArray:
    """Flip probability [1] of a straight pass through ``B = B' (b e_perp + v t e_par)``.

    The field seen grows by the same ``gradient`` across and along the path, so ``B_min =
    B' b`` and ``|Bdot| = B' v``; for spin 1/2, ``p = exp(-pi moment B' b^2 / (hbar v))``.

    Parameters
    ----------
    moment : float
        Weak-field moment [J/T], not 0.
    gradient : array_like
        ``B'`` [T/m], > 0.
    impact : array_like
        Impact parameter ``b`` [m], >= 0: distance of the path from the zero.
    speed : array_like
        ``v`` [m/s], > 0. The three arrays broadcast.
    spin, projection : float
        ``j`` and ``m`` of the state, see :func:`landau_zener_probability`.

    Examples
    --------
    >>> float(flip_probability(9.274e-24, 10.0, 0.0, 1.0))
    1.0
    """
    g = as_finite_array(gradient, "gradient", "T/m")
    if np.any(g <= 0.0):
        raise TiltwellError(f"gradient [T/m] must be > 0; got {g[g <= 0.0].flat[0]!r}")
    b = as_finite_array(impact, "impact", "m")
    if np.any(b < 0.0):
        raise TiltwellError(f"impact [m] must be >= 0; got {b[b < 0.0].flat[0]!r}")
    v = as_finite_array(speed, "speed", "m/s")
    if np.any(v <= 0.0):
        raise TiltwellError(f"speed [m/s] must be > 0; got {v[v <= 0.0].flat[0]!r}")
    return landau_zener_probability(moment, g * b, g * v, spin=spin, projection=projection)


def quadrupole_pass_probability(
    moment: float, gradient: float, positions: ArrayLike, velocities: ArrayLike, *, spin: float = 0.5,
    projection: float | None = None,
) -> FloatArray:
    """Flip probability [1] of straight lines through an ideal quadrupole's zero region.

    ``B = B' (-x/2, -y/2, z)``; each line ``r(t) = r + u t`` sees ``B0 = G r``, ``Bdot = G u``,
    ``B_min = |B0 x Bdot| / |Bdot|`` (the whole line, ``t`` from -inf to +inf).

    Parameters
    ----------
    moment : float
        Weak-field moment [J/T], not 0.
    gradient : float
        Axial gradient ``B'`` [T/m], > 0.
    positions : array_like, shape (N, 3)
        A point on each line [m], relative to the zero.
    velocities : array_like, shape (N, 3)
        Velocities [m/s], not zero.
    spin, projection : float
        ``j`` and ``m`` of the state, see :func:`landau_zener_probability`.

    Examples
    --------
    Along x at height z = b the field is ``B' (-v t / 2, 0, b)``: the isotropic model at
    half the speed.

    >>> p = quadrupole_pass_probability(9.274e-24, 10.0, [[0, 0, 1e-6]], [[5.0, 0, 0]])
    >>> bool(abs(p[0] - flip_probability(9.274e-24, 10.0, 1e-6, 2.5)) < 1e-12)
    True
    """
    g = as_scalar(gradient, "gradient", "T/m", low=0.0, low_open=True)
    r = as_points(positions, "positions")
    u = as_points(velocities, "velocities")
    if r.shape != u.shape:
        raise TiltwellError(f"positions and velocities [m, m/s] must have the same shape; got {r.shape}, {u.shape}")
    scale = np.array([-0.5, -0.5, 1.0]) * g
    b0, rate = r * scale, u * scale
    size = np.linalg.norm(rate, axis=1)
    if np.any(size == 0.0):
        raise TiltwellError("velocities [m/s] must be nonzero; got a zero row")
    minimum = np.linalg.norm(np.cross(b0, rate), axis=1) / size
    return landau_zener_probability(moment, minimum, size, spin=spin, projection=projection)


def adiabaticity(moment: float, fields: ArrayLike, rates: ArrayLike, *, projection: float = 0.5) -> FloatArray:
    """Rotation rate of the field direction over the Larmor frequency, ``kappa`` [1].

    ``kappa = |B x dB/dt| / |B|^2 / (gamma |B|)``, ``gamma = moment / (|m| hbar)``: the
    spin follows the field (adiabatic) for ``kappa << 1``. On a straight pass
    ``p = exp(-pi / (2 max kappa))`` (module notes).

    Parameters
    ----------
    moment : float
        Weak-field moment [J/T], not 0.
    fields : array_like, shape (N, 3)
        Field seen [T], not zero.
    rates : array_like, shape (N, 3)
        Its rate of change [T/s].
    projection : float
        ``m``, not 0 (default 1/2).

    Examples
    --------
    >>> float(adiabaticity(9.274e-24, [[1e-3, 0, 0]], [[0, 0, 0]])[0])
    0.0
    """
    mu = as_scalar(moment, "moment", "J/T")
    if mu == 0.0:
        raise TiltwellError("moment [J/T] must be nonzero; got 0.0")
    m = abs(as_scalar(projection, "projection", "1"))
    if m < 0.25 or abs(2 * m - round(2 * m)) > 1e-9:
        raise TiltwellError(f"projection [1] must be a nonzero multiple of 1/2; got {projection!r}")
    field, rate = as_points(fields, "fields"), as_points(rates, "rates")
    if field.shape != rate.shape:
        raise TiltwellError(f"fields and rates [T, T/s] must have the same shape; got {field.shape}, {rate.shape}")
    size = np.linalg.norm(field, axis=1)
    if np.any(size == 0.0):
        raise TiltwellError("fields [T] must be nonzero (the direction is undefined at the zero); got a zero row")
    turning = np.linalg.norm(np.cross(field, rate), axis=1) / size**2
    return np.asarray(turning / (abs(mu) / (m * _HBAR) * size))


@dataclass(frozen=True)
class SpinFlips:
    """Switch on the tracker's spin-flip check: ``track(..., spin_flips=SpinFlips())``.

    Parameters
    ----------
    spin, projection : float, optional
        ``j`` and ``m`` of the trapped state in weak field. Default: the ``F``, ``mF`` of a
        Breit–Rabi state, else ``j = m = 1/2`` (the two-level picture, Larmor frequency
        ``2 mu |B| / hbar``). For a linear state of moment ``g M mu_B`` give ``spin=J,
        projection=M``: the two-level default overstates its Larmor frequency ``2M``-fold
        and so understates the flips.
    moment : float, optional
        Weak-field moment [J/T]; default ``|dW/d|B||`` of the species at zero field.
    """

    spin: float | None = None
    projection: float | None = None
    moment: float | None = None

    def check(self, trap: Trap, field_map: FieldMap | None, scales: FloatArray, time_step: float) -> SpinFlipCheck:
        """The per-step check for ``trap``; ``scales`` (steps + 1,) the ramp at step ends."""
        zeeman = trap.species.zeeman
        spin = self.spin
        projection = self.projection
        if spin is None:
            spin = float(getattr(zeeman, "F", 0.5))
            projection = float(getattr(zeeman, "mF", 0.5)) if projection is None else projection
        j, m = _spin_pair(spin, projection)
        moment = abs(float(np.asarray(zeeman.derivative(0.0)))) if self.moment is None else self.moment
        mu = as_scalar(moment, "moment", "J/T", low=0.0, low_open=True)
        return SpinFlipCheck(_field_rows(trap, field_map), mu / (m * _HBAR), j, m, scales, time_step)


class SpinFlipCheck:
    """The tracker's per-step close-pass check on component rows (see the module notes).

    ``field(positions)`` gives the static field rows (3, n) [T]; ``gamma`` [rad/(s T)];
    ``scales`` the ramp at the step ends; ``time_step`` [s].
    """

    def __init__(self, field: object, gamma: float, spin: float, projection: float, scales: FloatArray,
                 time_step: float) -> None:
        self.field, self.gamma, self.spin, self.projection = field, gamma, spin, projection
        self.scales, self.time_step = scales.tolist(), time_step

    def start(self, positions: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Field rows at time 0 and unit weights for particles at ``positions`` (3, n)."""
        return self.field(positions) * self.scales[0], np.ones(positions.shape[1])  # type: ignore[operator]

    def step(self, positions: FloatArray, previous: FloatArray, weights: FloatArray, step: int) -> FloatArray:
        """Field rows at the end of ``step`` (0-based); multiplies ``weights`` by the
        survival of each close pass since ``previous`` (the field rows at its start)."""
        current: FloatArray = self.field(positions)  # type: ignore[operator]
        current *= self.scales[step + 1]
        change = current - previous
        passing = (np.einsum("ij,ij->j", previous, change) < 0.0) & (np.einsum("ij,ij->j", current, change) >= 0.0)
        if np.any(passing):
            where = np.flatnonzero(passing)
            start, delta = previous[:, where], change[:, where]
            size = np.sqrt(np.einsum("ij,ij->j", delta, delta))
            across = np.cross(start, delta, axis=0)
            minimum_squared = np.einsum("ij,ij->j", across, across) / (size * size)
            p = np.exp(-math.pi * self.gamma * minimum_squared * self.time_step / (2.0 * size))
            weights[where] *= _survival(p, self.spin, self.projection)
        return current


class _QuadrupoleField:
    """``B' (-x/2, -y/2, z - c)`` on rows, uncapped."""

    def __init__(self, source: IdealQuadrupole) -> None:
        self.gradient, self.center = source.gradient, source.center

    def __call__(self, positions: FloatArray) -> FloatArray:
        out = positions * self.gradient
        out[:2] *= -0.5
        if self.center != 0.0:
            out[2] -= self.center * self.gradient
        return out


class _GridField:
    """The field vector sampled on the force map's grid, interpolated trilinearly (held in a
    :class:`FieldMap`, whose interpolation is generic in what the 3-vectors mean): exact
    for a linear field, so near a zero it is good where a map of |B| would not be."""

    def __init__(self, trap: Trap, like: FieldMap) -> None:
        axes = [np.linspace(low, high, n) for (low, high), n in zip(like.bounds, like.shape)]
        grid = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
        self.grid = FieldMap(like.bounds, trap.source.field(grid).reshape(*like.shape, 3))

    def __call__(self, positions: FloatArray) -> FloatArray:
        return self.grid.interpolate_rows(positions, np.empty_like(positions))


class _SourceField:
    """``source.field`` at every step (exact; slow for coils)."""

    def __init__(self, trap: Trap) -> None:
        self.source = trap.source

    def __call__(self, positions: FloatArray) -> FloatArray:
        return np.ascontiguousarray(self.source.field(positions.T).T)


def flip_quadrupole(trap: Trap) -> IdealQuadrupole | None:
    """The ideal quadrupole whose field the check reads inline for ``trap``, or None: the
    source's ``near_zero`` when it holds |B| only (a phase-averaged table: the linear field
    of its zero, where flips happen, within microns of it), else the source itself when it
    is exactly an :class:`~tiltwell.physics.fields.IdealQuadrupole`."""
    near_zero = getattr(trap.source, "near_zero", None)
    if isinstance(near_zero, IdealQuadrupole):
        return near_zero
    return trap.source if type(trap.source) is IdealQuadrupole else None


def _field_rows(trap: Trap, field_map: FieldMap | None) -> object:
    """The field evaluator: inline for :func:`flip_quadrupole`'s quadrupole; a field grid
    alongside a force map; else the source's own ``field``."""
    quadrupole = flip_quadrupole(trap)
    if quadrupole is not None:
        return _QuadrupoleField(quadrupole)
    if field_map is not None:
        return _GridField(trap, field_map)
    return _SourceField(trap)
