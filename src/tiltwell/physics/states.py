"""Which states of a species a magnetic trap can hold, and how the beam populates them.

A species is a set of :class:`ZeemanState` objects (one Zeeman curve each, with the
field-free energy of its level and a degeneracy); :func:`states` gives the levels the
catalogue knows. :func:`populations` weights them: Boltzmann factors
``degeneracy * exp(-level_energy / (k T_rot))`` at the beam's rotational temperature for
molecules; equal weights per state for atoms, whose hyperfine and Zeeman sublevels are split
by far less than ``k T`` of the source and are not cooled by the expansion (no rotation);
or weights given outright for a custom species. :func:`trappable_fraction` is the share in
low-field-seeking states; high-field seekers and states with no moment are lost.

Truncation: only the catalogued levels are populated. For a molecule the share that the
first omitted rotational level would take (all its states at its lowest energy, an upper
bound for that level) is :attr:`Populations.neglected`, and :func:`populations` refuses a
temperature at which it exceeds ``tolerance`` (default 1 %), naming the largest one allowed.

What is modelled, per species (molecular constants from memory, as cited below):

- OH X2Pi3/2 J = 3/2: 2 Lambda-doublet components x M = +-3/2, +-1/2. With their 0.08 K
  splitting (and the hyperfine structure) neglected the field's eigenstates are the signed-Omega
  combinations of e and f, ``W = g M sgn(Omega) mu_B |B|`` with the case (a)/(b) g-factor of
  :func:`.species.doublet_pi_level`; the trapped set is M Omega > 0 (the upper Lambda component
  of every M at low field): 1/2 of the level. Omitted: J = 5/2.
- O2 X3Sigma_g- N = 1 (J = 0, 1, 2) and N = 3 (J = 2, 3, 4): eigenvalues of the case (b)
  Hamiltonian ``B N^2 - D N^4 + (2 lambda/3)(3 S_z^2 - S^2) + gamma N.S + g_s mu_B B S_Z``
  (spin-spin couples N to N +- 2; basis N = 1, 3, 5, 7; rotational and anisotropic g
  corrections neglected). Omitted: N = 5.
- NH X3Sigma- N = 0 J = 1, M = +1, 0, -1 (spin only; hyperfine neglected). Omitted: N = 1.
- CaF X2Sigma+ N = 0: the four 19F hyperfine states by Breit–Rabi; N = 1 ... 15 as two
  groups each (M_S = +-1/2, degeneracy 2(2N+1)) in the strong-field limit ``+-g_s mu_B B/2``,
  valid above the ~100 MHz spin-rotation and hyperfine scale (a few mT). Omitted: N = 16.
- H, D, Li-7, Na-23, K-39, Rb-87: every |F, mF> by Breit–Rabi; N and Cr: every M_S (spin
  only); Ne* and Ar* 3P2: M = -2 ... 2 with the LS g_J.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, replace
from typing import Any, Union

import numpy as np
import scipy.constants as _sc
from numpy.typing import NDArray
from scipy.optimize import brentq

from .._base.validation import TiltwellError, as_integer, as_scalar, as_text, look_up
from .constants import BOHR_MAGNETON, BOLTZMANN, ELECTRON_G, NUCLEAR_MAGNETON, PLANCK
from .species import OH_ROTATION, OH_SPIN_ORBIT, Species, catalogue, doublet_pi_level, species
from .zeeman import STRONG_FIELD, BreitRabi, LinearZeeman, MatrixZeeman, ZeemanModel, half_integer_text, wigner_3j, wigner_6j

__all__ = [
    "TRAP_FIELD_RANGE",
    "ZeemanState",
    "Populations",
    "states",
    "populations",
    "trappable_fraction",
    "species_of_state",
    "is_molecule",
    "triplet_sigma_block",
    "O2_CONSTANTS",
]

#: Field range [T] over which a low-field seeker's energy must rise: (0, 1 T].
TRAP_FIELD_RANGE: float = 1.0
_LOWEST_FIELD = 1e-6  # T; the slope test starts here (m = 0 Breit–Rabi slopes vanish at 0)
_SLOPE_SAMPLES = 400
_LOW_T, _HIGH_T = 1e-3, 1e4  # K; where the largest allowed temperature is searched


@dataclass(frozen=True)
class ZeemanState:
    """One Zeeman state (or a group of degenerate ones) of a species.

    Parameters
    ----------
    label : str
        E.g. ``"X2Pi3/2 J=3/2 e M=3/2"``.
    zeeman : ZeemanModel
        ``W(|B|)`` [J] from the state's zero-field energy, with its sign: a falling curve is a
        high-field seeker.
    level_energy : float
        Field-free energy [J] above the species' lowest catalogued level, >= 0.
    degeneracy : int
        Number of states this entry stands for (1 for one M state), >= 1.
    """

    label: str
    zeeman: ZeemanModel
    level_energy: float = 0.0
    degeneracy: int = 1

    def __post_init__(self) -> None:
        as_text(self.label, "label")
        if not isinstance(self.zeeman, ZeemanModel):
            raise TiltwellError(
                f"zeeman must have energy(field) and derivative(field) methods; got {type(self.zeeman).__name__}"
            )
        object.__setattr__(self, "level_energy", as_scalar(self.level_energy, "level_energy", "J", low=0))
        object.__setattr__(self, "degeneracy", as_integer(self.degeneracy, "degeneracy", 1))

    @property
    def moment(self) -> float:
        """Slope dW/d|B| [J/T] at ``STRONG_FIELD`` (1 T)."""
        return float(self.zeeman.derivative(STRONG_FIELD))

    def seeks_low_field(self, field_range: float = TRAP_FIELD_RANGE) -> bool:
        """Whether dW/d|B| > 0 at every field in (0, ``field_range``] [T] (sampled at 400
        log-spaced fields from 1e-6 T): the trap's field minimum holds the state everywhere
        in that range. A curve that turns over below ``field_range`` (Breit–Rabi
        ``|I+1/2, -(I+1/2)>`` above its crossover) does not count, nor does ``W = 0``."""
        top = as_scalar(field_range, "field_range", "T", low=_LOWEST_FIELD, low_open=True)
        slopes = self.zeeman.derivative(np.geomspace(_LOWEST_FIELD, top, _SLOPE_SAMPLES))
        return bool(np.all(slopes > 0))

    @property
    def low_field_seeking(self) -> bool:
        """:meth:`seeks_low_field` over ``TRAP_FIELD_RANGE`` (0 to 1 T)."""
        return self.seeks_low_field()


@dataclass(frozen=True)
class Populations:
    """Normalised weights of a species' states in the beam; iterate for ``(state, weight)``.

    Attributes
    ----------
    states : tuple of ZeemanState
    weights : ndarray, shape (n,)
        Share of the particles in each entry [1] (a grouped entry carries its whole group);
        read-only, sums to 1.
    temperature : float or None
        Rotational temperature [K] used, or None (atoms, explicit weights).
    neglected : float
        Upper bound [1] on the share the first omitted level would take (0 when nothing is
        omitted or the weights were given).
    """

    states: tuple[ZeemanState, ...]
    weights: NDArray[np.float64]
    temperature: float | None = None
    neglected: float = 0.0

    def __iter__(self) -> Iterator[tuple[ZeemanState, float]]:
        return iter(zip(self.states, (float(w) for w in self.weights)))

    def __len__(self) -> int:
        return len(self.states)

    def trapped(self, field_range: float = TRAP_FIELD_RANGE) -> tuple[tuple[ZeemanState, float], ...]:
        """The ``(state, weight)`` pairs of the low-field seekers over ``field_range`` [T]."""
        return tuple((s, w) for s, w in self if s.seeks_low_field(field_range))

    @property
    def trappable_fraction(self) -> float:
        """Share [1] in low-field-seeking states (over ``TRAP_FIELD_RANGE``)."""
        return trappable_fraction(self)


@dataclass(frozen=True)
class _Entry:
    states: tuple[ZeemanState, ...]
    rotational: bool = False
    omitted: tuple[float, int] | None = None  # lowest energy [J] and number of states of the next level
    omitted_label: str = ""


def _normalise(pairs: Sequence[tuple[ZeemanState, float]], temperature: float | None, neglected: float) -> Populations:
    weights = np.array([w for _, w in pairs], dtype=np.float64)
    total = float(weights.sum())
    if not total > 0:
        raise TiltwellError(f"weights [1] must have a positive sum; got {total!r}")
    weights = weights / total
    weights.setflags(write=False)
    return Populations(tuple(s for s, _ in pairs), weights, temperature, neglected)


def _boltzmann(entries: Sequence[ZeemanState], temperature: float) -> NDArray[np.float64]:
    energies = np.array([s.level_energy for s in entries])
    return np.array([s.degeneracy for s in entries]) * np.exp(-(energies - energies.min()) / (BOLTZMANN * temperature))


def _omitted_share(entry: _Entry, temperature: float) -> float:
    if entry.omitted is None:
        return 0.0
    energy, count = entry.omitted
    low = min(s.level_energy for s in entry.states)
    extra = count * math.exp(-(energy - low) / (BOLTZMANN * temperature))
    return extra / (float(_boltzmann(entry.states, temperature).sum()) + extra)


StateSpec = Union[str, Sequence[Any]]


def populations(source: StateSpec, rotational_temperature: float | None = None, *,
                tolerance: float = 0.01) -> Populations:
    """Normalised populations of a species' Zeeman states in the beam.

    Parameters
    ----------
    source : str or sequence
        A catalogue name (see :func:`states`); or a sequence of :class:`ZeemanState`
        (Boltzmann weights over them, nothing omitted); or a sequence of
        ``(state, weight)`` pairs for a custom species, ``state`` a :class:`ZeemanState` or
        a constant moment [J/T] (``W = moment |B|``), ``weight`` >= 0 [1], normalised here.
    rotational_temperature : float, optional
        T_rot [K], > 0; needed for molecules and for a list of states, ignored for atoms
        and for explicit weights.
    tolerance : float
        Largest share [1] the omitted levels may take (``neglected``), in (0, 1).

    Raises
    ------
    TiltwellError
        For an unknown name, a missing temperature, or a temperature at which the omitted
        levels would carry more than ``tolerance``; the message gives the largest allowed.

    Examples
    --------
    >>> round(populations("NH", 5.0).trappable_fraction, 6)
    0.333333
    """
    tol = as_scalar(tolerance, "tolerance", "1", low=0, high=1, low_open=True, high_open=True)
    if isinstance(source, str):
        name = _CATALOGUE_NAMES[look_up(source, _INDEX, "species", "tiltwell.catalogue() lists every name")]
        entry = _entry(name)
        if not entry.rotational:
            return _normalise([(s, float(s.degeneracy)) for s in entry.states], None, 0.0)
        temperature = _temperature(rotational_temperature, name)
        share = _omitted_share(entry, temperature)
        if share > tol:
            top = math.exp(brentq(lambda u: _omitted_share(entry, math.exp(u)) - tol,
                                  math.log(_LOW_T), math.log(_HIGH_T)))
            scale = 10.0 ** (2 - math.floor(math.log10(top)))
            shown = math.floor(top * scale) / scale  # 3 digits, rounded down: the bound shown is allowed
            raise TiltwellError(
                f"rotational_temperature [K] must be in (0, {shown:g}] for {name}: above it the omitted "
                f"{entry.omitted_label} would hold more than {tol:g} of the molecules; got {temperature!r}")
        return _normalise(list(zip(entry.states, _boltzmann(entry.states, temperature))), temperature, share)
    if isinstance(source, (bytes, ZeemanState)) or not isinstance(source, Sequence) or len(source) == 0:
        raise TiltwellError(f"source must be a species name, a list of ZeemanState or of (state, weight) pairs; "
                            f"got {source!r}"[:200])
    given = [s for s in source if isinstance(s, ZeemanState)]
    if len(given) == len(source):
        temperature = _temperature(rotational_temperature, "a list of states")
        return _normalise(list(zip(given, _boltzmann(given, temperature))), temperature, 0.0)
    pairs = []
    for i, item in enumerate(source):
        if not (isinstance(item, Sequence) and not isinstance(item, str) and len(item) == 2):
            raise TiltwellError(f"source[{i}] must be a (state, weight) pair; got {item!r}")
        state, weight = item
        if not isinstance(state, ZeemanState):
            moment = as_scalar(state, f"source[{i}] moment", "J/T")
            state = ZeemanState(f"moment {moment / BOHR_MAGNETON:g} mu_B", LinearZeeman(moment))
        pairs.append((state, as_scalar(weight, f"source[{i}] weight", "1", low=0)))
    return _normalise(pairs, None, 0.0)


def _temperature(value: float | None, what: str) -> float:
    if value is None:
        raise TiltwellError(f"rotational_temperature [K] is needed for {what}; got None")
    return as_scalar(value, "rotational_temperature", "K", low=0, low_open=True)


def trappable_fraction(weights: Populations | Sequence[tuple[ZeemanState, float]],
                       field_range: float = TRAP_FIELD_RANGE) -> float:
    """Share [1] of the population in low-field-seeking states (:meth:`ZeemanState.seeks_low_field`
    over ``field_range`` [T]); ``weights`` is a :class:`Populations` or ``(state, weight)``
    pairs already normalised."""
    return float(sum(w for s, w in weights if s.seeks_low_field(field_range)))


def species_of_state(name: str, state: ZeemanState) -> Species:
    """The catalogue species ``name`` in ``state``: a :class:`Species` whose trap potential,
    acceptance and captured fraction follow that state's Zeeman curve."""
    base = species(name)
    return Species(f"{base.name} {state.label}", base.mass, state.zeeman, state.label, base.source)


# --- molecular Hamiltonians ------------------------------------------------------------------

def triplet_sigma_block(m: float, rotations: Sequence[int], rotation: float, distortion: float,
                        spin_spin: float, spin_rotation: float, g_s: float = ELECTRON_G,
                        ) -> tuple[NDArray[np.float64], NDArray[np.float64], tuple[tuple[int, int], ...]]:
    """Zero-field Hamiltonian [J] and Zeeman matrix [J/T] of a 3Sigma state in the Hund's
    case (b) basis ``|N S=1 J M>`` for one ``M``, with the labels ``(N, J)`` of the basis.

    ``H = B N^2 - D N^4 + (2 lambda/3)(3 S_z^2 - S^2) + gamma N.S + g_s mu_B B S_Z``; matrix
    elements from the tensor-operator formulas of A. R. Edmonds, *Angular Momentum in
    Quantum Mechanics* (1957), eqs. 5.4.5, 7.1.6 and 7.1.8 (spin-spin as
    ``(2 lambda/3) sqrt(6) C^2(n) . T^2(S, S)``, J. M. Brown and A. Carrington (2003), ch. 9).
    Constants ``rotation`` B, ``distortion`` D, ``spin_spin`` lambda, ``spin_rotation``
    gamma in J; ``rotations`` the N values of the basis.
    """
    s = 1
    basis = tuple((n, j) for n in rotations for j in (n - 1, n, n + 1) if j >= abs(m) and j >= 0)
    t2 = (3 * s * s - s * (s + 1)) / math.sqrt(6) / wigner_3j(s, 2, s, -s, 0, s)  # <S||T2(S,S)||S>
    s1 = math.sqrt(s * (s + 1) * (2 * s + 1))  # <S||S||S>
    h0 = np.zeros((len(basis), len(basis)))
    h1 = np.zeros_like(h0)
    for a, (n, j) in enumerate(basis):
        for b, (n2, j2) in enumerate(basis):
            if j == j2:
                c2 = (-1) ** n * math.sqrt((2 * n + 1) * (2 * n2 + 1)) * wigner_3j(n, 2, n2, 0, 0, 0)
                h0[a, b] = (2 * spin_spin / 3) * math.sqrt(6) * (-1) ** (n2 + s + j) * wigner_6j(j, s, n, 2, n2, s) * c2 * t2
                if n == n2:
                    nn = n * (n + 1)
                    h0[a, b] += rotation * nn - distortion * nn**2 + spin_rotation * (j * (j + 1) - nn - s * (s + 1)) / 2
            if n == n2:
                reduced = (-1) ** (n + s + j + 1) * math.sqrt((2 * j + 1) * (2 * j2 + 1)) * wigner_6j(s, j, n, j2, s, 1) * s1
                h1[a, b] = g_s * BOHR_MAGNETON * (-1) ** round(j - m) * wigner_3j(j, 1, j2, -m, 0, m) * reduced
    return h0, h1, basis


_MHZ = PLANCK * 1e6
_WAVENUMBER = PLANCK * _sc.c * 100
#: 16O2 X3Sigma_g- v = 0 constants [J]: B = 43100.44 MHz, D = 0.14518 MHz, lambda = 59501.34 MHz,
#: gamma = -252.59 MHz (fits to the 60 GHz and 118 GHz fine-structure bands, from memory).
O2_CONSTANTS: dict[str, float] = {"rotation": 43100.44 * _MHZ, "distortion": 0.14518 * _MHZ,
                                  "spin_spin": 59501.34 * _MHZ, "spin_rotation": -252.59 * _MHZ}
_O2_BASIS = (1, 3, 5, 7)


def _o2() -> _Entry:
    found = []
    for two_m in range(-10, 11, 2):
        m = two_m / 2
        h0, h1, basis = triplet_sigma_block(m, _O2_BASIS, **O2_CONSTANTS)
        values, vectors = np.linalg.eigh(h0)
        owners = [basis[int(np.argmax(np.abs(vectors[:, k])))] for k in range(len(basis))]
        if len(set(owners)) != len(owners):
            raise RuntimeError("O2 catalogue: zero-field levels not uniquely assigned")
        for k, (n, j) in enumerate(owners):
            found.append((n, j, m, float(values[k]), h0, h1, k))
    ground = min(f[3] for f in found)
    kept = sorted((f for f in found if f[0] <= 3), key=lambda f: (f[0], f[1], -f[2]))
    result = tuple(ZeemanState(f"X3Sigma_g- N={n} J={j} M={m:g}", MatrixZeeman(h0, h1, k), e - ground)
                   for n, j, m, e, h0, h1, k in kept)
    return _Entry(result, True, (min(f[3] for f in found if f[0] == 5) - ground, 33), "N=5 level")


def _oh() -> _Entry:
    low, g = doublet_pi_level(1.5, OH_SPIN_ORBIT, OH_ROTATION)
    result = tuple(ZeemanState(f"X2Pi3/2 J=3/2 M={half_integer_text(m)} MOmega{'>' if m * s > 0 else '<'}0",
                               LinearZeeman(g * m * s * BOHR_MAGNETON)) for s in (1, -1) for m in (1.5, 0.5, -0.5, -1.5))
    next_level = doublet_pi_level(2.5, OH_SPIN_ORBIT, OH_ROTATION)[0] - low
    return _Entry(result, True, (next_level, 12), "X2Pi3/2 J=5/2 level")


#: NH X3Sigma- B_0 = 16.343 cm^-1 (Huber & Herzberg (1979), from memory): N = 1 at 2 B.
_NH_ROTATION = 16.343 * _WAVENUMBER
#: CaF X2Sigma+ v = 0: B = 10267.54 MHz; N = 0 Fermi-contact splitting b + c/3 = 122.56 MHz
#: (Childs, Goodman & Renhorn, J. Mol. Spectrosc. 87, 522 (1981), from memory); 19F moment
#: 2.628868 mu_N (from memory).
_CAF_ROTATION, _CAF_SPLITTING = 10267.54 * _MHZ, 122.56 * _MHZ
_G_I_F19 = -2.628868 / 0.5 * NUCLEAR_MAGNETON / BOHR_MAGNETON
_CAF_TOP = 15


def _hyperfine_states(model: BreitRabi, prefix: str) -> tuple[ZeemanState, ...]:
    levels = [replace(model, F=f, mF=f - k) for f in (model.nuclear_spin + 0.5, model.nuclear_spin - 0.5)
              for k in range(round(2 * f) + 1)]
    low = min(lv.zero_field_energy for lv in levels)
    return tuple(ZeemanState(f"{prefix}F={half_integer_text(lv.F)} mF={half_integer_text(lv.mF)}", lv,
                             lv.zero_field_energy - low) for lv in levels)


def _caf() -> _Entry:
    base = _hyperfine_states(BreitRabi(0.5, _CAF_SPLITTING, 1, 1, ELECTRON_G, _G_I_F19), "X2Sigma+ N=0 ")
    shift = 0.75 * _CAF_SPLITTING  # the N = 0 centroid lies 3 dE/4 above its F = 0 level (I = 1/2)
    ladder = tuple(ZeemanState(f"X2Sigma+ N={n} M_S={'+' if sign > 0 else '-'}1/2",
                               LinearZeeman(sign * ELECTRON_G * BOHR_MAGNETON / 2),
                               _CAF_ROTATION * n * (n + 1) + shift, 2 * (2 * n + 1))
                   for n in range(1, _CAF_TOP + 1) for sign in (1, -1))
    top = _CAF_TOP + 1
    return _Entry(base + ladder, True, (_CAF_ROTATION * top * (top + 1) + shift, 4 * (2 * top + 1)), f"N={top} level")


def _spin_states(prefix: str, top: float, per_m: float) -> _Entry:
    ms = [top - k for k in range(round(2 * top) + 1)]
    return _Entry(tuple(ZeemanState(f"{prefix} M={half_integer_text(m)}", LinearZeeman(per_m * m)) for m in ms))


def _linear_per_m(name: str, top: float) -> float:
    return species(name).moment / top  # catalogue moment of the stretched state, per unit M


def _build() -> dict[str, _Entry]:
    table: dict[str, _Entry] = {}
    for name in ("H", "D", "Li-7", "Na-23", "K-39", "Rb-87"):
        model = species(name).zeeman
        assert isinstance(model, BreitRabi)
        table[name] = _Entry(_hyperfine_states(model, "2S1/2 "))
    table["N"] = _spin_states("4S3/2", 1.5, _linear_per_m("N", 1.5))
    table["Cr"] = _spin_states("7S3", 3, _linear_per_m("Cr", 3))
    table["Ne*"] = _spin_states("3P2", 2, _linear_per_m("Ne*", 2))
    table["Ar*"] = _spin_states("3P2", 2, _linear_per_m("Ar*", 2))
    nh = _spin_states("X3Sigma- N=0 J=1", 1, ELECTRON_G * BOHR_MAGNETON)
    table["NH"] = _Entry(nh.states, True, (2 * _NH_ROTATION, 9), "N=1 level")
    table["OH"], table["O2"], table["CaF"] = _oh(), _o2(), _caf()
    return table


_TABLE: dict[str, _Entry] = {}
_CATALOGUE_NAMES = {n: n for n in catalogue()}
_INDEX = {key.lower(): n for n in _CATALOGUE_NAMES for key in (n, *species(n).aliases)}


def _entry(name: str) -> _Entry:
    if not _TABLE:
        _TABLE.update(_build())
    return _TABLE[name]


def is_molecule(name: str) -> bool:
    """Whether catalogue species ``name`` has rotational levels, so that :func:`populations`
    needs a rotational temperature."""
    return _entry(_CATALOGUE_NAMES[look_up(name, _INDEX, "species", "tiltwell.catalogue() lists every name")]).rotational


def states(name: str) -> tuple[ZeemanState, ...]:
    """The Zeeman states the catalogue knows for species ``name`` (a name or alias of
    :func:`.species.species`), lowest level first within each group.

    Examples
    --------
    >>> [s.label for s in states("NH")]
    ['X3Sigma- N=0 J=1 M=1', 'X3Sigma- N=0 J=1 M=0', 'X3Sigma- N=0 J=1 M=-1']
    """
    return _entry(_CATALOGUE_NAMES[look_up(name, _INDEX, "species", "tiltwell.catalogue() lists every name")]).states
