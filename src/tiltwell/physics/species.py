"""Particles that a moving magnetic trap can hold: mass, the Zeeman energy of the trapped
state (the models of :mod:`.zeeman`), and a catalogue of species with their sources.
"""

from __future__ import annotations

from dataclasses import dataclass

import math

import numpy as np
import scipy.constants as _sc

from .._base.validation import TiltwellError, as_scalar, look_up
from .constants import ATOMIC_MASS, BOHR_MAGNETON, ELECTRON_G, NUCLEAR_MAGNETON, PLANCK
from .zeeman import STRONG_FIELD, BreitRabi, LinearZeeman, TabulatedZeeman, ZeemanModel, half_integer_text

__all__ = [
    "ZeemanModel",
    "LinearZeeman",
    "BreitRabi",
    "TabulatedZeeman",
    "Species",
    "STRONG_FIELD",
    "species",
    "catalogue",
    "doublet_pi_level",
    "OH_SPIN_ORBIT",
    "OH_ROTATION",
]


@dataclass(frozen=True)
class Species:
    """A particle in one trappable state.

    Parameters
    ----------
    name : str
        Label, e.g. ``"Rb-87"``.
    mass : float
        Mass [kg], > 0.
    zeeman : ZeemanModel
        Zeeman energy of the state (anything with ``energy`` and ``derivative``).
    state : str
        Human-readable state, e.g. ``"2S1/2 F=2 mF=2"``.
    source : str
        Where the numbers come from.
    aliases : tuple of str
        Other names :func:`species` accepts.
    """

    name: str
    mass: float
    zeeman: ZeemanModel
    state: str = ""
    source: str = ""
    aliases: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        if not isinstance(self.name, str) or not self.name.strip():
            raise TiltwellError(f"name must be a non-empty string; got {self.name!r}")
        object.__setattr__(self, "mass", as_scalar(self.mass, "mass", "kg", low=0, low_open=True))
        if not isinstance(self.zeeman, ZeemanModel):
            raise TiltwellError(
                f"zeeman must have energy(field) and derivative(field) methods; got {type(self.zeeman).__name__}"
            )
        object.__setattr__(self, "aliases", tuple(self.aliases))

    @property
    def moment(self) -> float:
        """Effective moment [J/T]: the slope dW/d|B| at ``STRONG_FIELD`` (1 T)."""
        return float(self.zeeman.derivative(STRONG_FIELD))


def doublet_pi_level(j: float, spin_orbit: float, rotation: float, omega: float = 1.5,
                     g_s: float = ELECTRON_G, g_l: float = 1.0) -> tuple[float, float]:
    """Energy [J] and Zeeman g-factor of one ``J`` level of a 2Pi state in intermediate
    Hund's case (a)/(b) coupling.

    The 2x2 effective Hamiltonian in the case (a) basis ``|Omega = 3/2>, |Omega = 1/2>``
    (J. M. Brown and A. Carrington, *Rotational Spectroscopy of Diatomic Molecules* (2003),
    ch. 7; E. Hill and J. H. Van Vleck, Phys. Rev. 32, 250 (1928)), with ``X = J + 1/2``::

        H = [[A/2 + B (X^2 - 2),   -B sqrt(X^2 - 1)],
             [-B sqrt(X^2 - 1),    -A/2 + B X^2   ]]

    is diagonalised; the Zeeman operator ``mu_B (g_l L_z + g_s S_Z)`` in the same basis has
    diagonal ``(g_l Lambda + g_s Sigma) Omega / (J(J+1))`` and off-diagonal
    ``g_s sqrt(X^2 - 1) / (2 J(J+1))`` (per ``M mu_B B``), and ``g`` is its expectation value
    in the eigenvector. Lambda doubling, centrifugal distortion, hyperfine structure and the
    Zeeman mixing of neighbouring ``J`` (relative size ``mu_B B`` over the rotational spacing)
    are neglected, so ``W = g M mu_B |B|``.

    Parameters
    ----------
    j : float
        J >= 3/2 (a half-integer) for ``omega = 3/2``; J >= 1/2 for ``omega = 1/2``.
    spin_orbit, rotation : float
        Spin-orbit constant A [J] (negative for an inverted state such as OH) and rotational
        constant B [J], > 0.
    omega : float
        3/2 or 1/2: the level whose eigenvector is dominantly that case (a) component.
    g_s, g_l : float
        Electron spin and orbital g-factors.

    Returns
    -------
    energy, g : float
        Energy [J] (zero: the centre of the ``A/2`` terms) and dimensionless g-factor.

    Examples
    --------
    >>> level = doublet_pi_level(1.5, -1e6 * PLANCK * 1e6, PLANCK * 1e6, g_s=2.0)  # |A| >> B
    >>> round(level[1], 4)
    0.8
    """
    two_j = 2 * as_scalar(j, "j", "1", low=0.5)
    if abs(two_j - round(two_j)) > 1e-9 or round(two_j) % 2 == 0:
        raise TiltwellError(f"j [1] must be a half-integer >= 1/2; got {j!r}")
    if omega not in (0.5, 1.5):
        raise TiltwellError(f"omega [1] must be 3/2 or 1/2; got {omega!r}")
    jj = round(two_j) / 2
    if omega == 1.5 and jj < 1.5:
        raise TiltwellError(f"j [1] must be >= 3/2 for omega = 3/2; got {j!r}")
    a = as_scalar(spin_orbit, "spin_orbit", "J")
    b = as_scalar(rotation, "rotation", "J", low=0, low_open=True)
    x2 = (jj + 0.5) ** 2
    off = math.sqrt(max(x2 - 1.0, 0.0))
    if jj < 1.5:  # J = 1/2 exists in Omega = 1/2 only
        return -a / 2 + b * x2, (g_l - g_s / 2) * 0.5 / (jj * (jj + 1))
    values, vectors = np.linalg.eigh(np.array([[a / 2 + b * (x2 - 2), -b * off], [-b * off, -a / 2 + b * x2]]))
    pick = int(np.argmax(np.abs(vectors[0 if omega == 1.5 else 1, :])))
    c = vectors[:, pick]
    jj1 = jj * (jj + 1)
    zeeman = np.array([[(g_l + g_s / 2) * 1.5 / jj1, g_s * off / (2 * jj1)],
                       [g_s * off / (2 * jj1), (g_l - g_s / 2) * 0.5 / jj1]])
    return float(values[pick]), float(c @ zeeman @ c)


# ---------------------------------------------------------------------------------------------
# Catalogue. Masses: atomic (neutral) masses of AME2020 (M. Wang et al., Chinese Phys. C 45,
# 030003 (2021)) to the digits the periodictable package prints them (tests compare each with
# it); molecules are sums of atomic masses (binding neglected, ~1e-9 relative).
# Spin-only moments use the free-electron g (ELECTRON_G) and neglect rotational g-factors.

_MASS_NOTE = "mass: AME2020 atomic mass(es)"
_G_I_PROTON = -2 * _sc.physical_constants["proton mag. mom. to nuclear magneton ratio"][0] * NUCLEAR_MAGNETON / BOHR_MAGNETON
_G_I_DEUTERON = -_sc.physical_constants["deuteron mag. mom. to nuclear magneton ratio"][0] * NUCLEAR_MAGNETON / BOHR_MAGNETON


def _hyperfine(name: str, mass: float, spin: float, splitting: float, g_j: float, g_i: float,
               aliases: tuple[str, ...], source: str) -> Species:
    """Stretched low-field seeker F = mF = I + 1/2 of a 2S1/2 atom; splitting in Hz."""
    f = spin + 0.5
    model = BreitRabi(spin, PLANCK * splitting, f, f, g_j, g_i)
    return Species(name, mass * ATOMIC_MASS, model, f"2S1/2 F={half_integer_text(f)} mF={half_integer_text(f)}",
                   f"{_MASS_NOTE} ({mass} u); {source}", aliases)


def _linear(name: str, mass: float, moment: float, state: str, aliases: tuple[str, ...], source: str) -> Species:
    """Constant moment, given in units of mu_B."""
    return Species(name, mass * ATOMIC_MASS, LinearZeeman(moment * BOHR_MAGNETON), state,
                   f"{_MASS_NOTE} ({mass} u); {source}", aliases)


_ALKALI = ("Arimondo, Inguscio & Violino, Rev. Mod. Phys. 49, 31 (1977), from memory; "
           "g_I as tabulated in D. A. Steck's alkali D-line data notes, from memory")
_GS = ELECTRON_G
_WAVENUMBER = PLANCK * _sc.c * 100  # J per cm^-1
#: OH X2Pi spin-orbit constant A [J] and rotational constant B [J] of v = 0: -139.05 cm^-1 and
#: 18.535 cm^-1 (Huber & Herzberg, Constants of Diatomic Molecules (1979), from memory).
OH_SPIN_ORBIT: float = -139.05 * _WAVENUMBER
OH_ROTATION: float = 18.535 * _WAVENUMBER
_OH_G = doublet_pi_level(1.5, OH_SPIN_ORBIT, OH_ROTATION)[1]
_ENTRIES = (
    _hyperfine("H", 1.0078250319, 0.5, 1420.405751768e6, ELECTRON_G, _G_I_PROTON,
               ("hydrogen", "H-1", "H1", "1H"),
               "hyperfine 1420.405751768 MHz (hydrogen maser), from memory; g_J free electron "
               "(bound-state correction ~2e-5 neglected); g_I from CODATA proton moment (scipy)"),
    _hyperfine("D", 2.01410177784, 1.0, 327.384352522e6, ELECTRON_G, _G_I_DEUTERON,
               ("deuterium", "H-2", "2H"),
               "hyperfine 327.384352522 MHz, from memory; g_J free electron; "
               "g_I from CODATA deuteron moment (scipy)"),
    _hyperfine("Li-7", 7.016003434, 1.5, 803.5040866e6, 2.0023010, -0.0011822130,
               ("Li7", "7Li", "lithium-7"), f"hyperfine 2A = 803.5040866 MHz, g_J, {_ALKALI}"),
    _hyperfine("Na-23", 22.989769282, 1.5, 1771.6261288e6, 2.0022960, -0.0008046108,
               ("Na23", "23Na", "sodium", "Na"), f"hyperfine 2A = 1771.6261288 MHz, g_J, {_ALKALI}"),
    _hyperfine("K-39", 38.963706485, 1.5, 461.7197202e6, 2.00229421, -0.00014193489,
               ("K39", "39K", "potassium-39"), f"hyperfine 2A = 461.7197202 MHz, g_J, {_ALKALI}"),
    _hyperfine("Rb-87", 86.909180529, 1.5, 6834.682610904290e6, 2.00233113, -0.0009951414,
               ("Rb87", "87Rb", "rubidium-87"),
               "hyperfine 6834.682610904290 MHz, g_J, g_I: D. A. Steck, 'Rubidium 87 D Line Data', "
               "from memory"),
    _linear("N", 14.00307400425, _GS * 3 / 2, "4S3/2 M=3/2", ("N-14", "14N", "atomic nitrogen"),
            "14N; spin-only moment g_s M_S mu_B (L = 0)"),
    _linear("O2", 2 * 15.9949146193, _GS, "X3Sigma_g- N=1 J=2 M=2", ("molecular oxygen", "16O2"),
            "16O2; stretched state M_N = M_S = 1: g_s mu_B, linear at all fields"),
    _linear("Ne*", 19.9924401753, 2 * (1 + (_GS - 1) / 2), "3P2 (2p5 3s) M=2",
            ("Ne-20*", "20Ne*", "metastable neon"),
            "20Ne; LS-coupling Lande g_J = 1 + (g_s - 1)/2 = 3/2, moment g_J M mu_B; "
            "the measured g_J differs by a few 1e-3, from memory"),
    _linear("Ar*", 39.962383122, 2 * (1 + (_GS - 1) / 2), "3P2 (3p5 4s) M=2",
            ("Ar-40*", "40Ar*", "metastable argon"),
            "40Ar; LS-coupling Lande g_J = 3/2, moment g_J M mu_B; measured g_J differs "
            "by a few 1e-3, from memory"),
    _linear("Cr", 51.94050471, _GS * 3, "7S3 M=3", ("Cr-52", "52Cr", "chromium-52"),
            "52Cr; spin-only moment g_s M_S mu_B (L = 0)"),
    _linear("NH", 14.00307400425 + 1.0078250319, _GS, "X3Sigma- N=0 J=1 M=1",
            ("imidogen", "14NH"), "14N1H; spin-only moment g_s M_S mu_B (N = 0)"),
    # OH X2Pi3/2 J = M = 3/2 in intermediate case (a)/(b) coupling (doublet_pi_level):
    # g = 0.9346, moment 1.402 mu_B (pure case (a) would give 1.2 mu_B).
    _linear("OH", 15.9949146193 + 1.0078250319, _OH_G * 1.5,
            "X2Pi3/2 J=3/2 M=3/2", ("hydroxyl", "16OH"),
            "16O1H; g_J of the 2Pi3/2 J=3/2 level with case (a)/(b) mixing from A = -139.05 cm-1, "
            "B = 18.535 cm-1 (Huber & Herzberg, Constants of Diatomic Molecules (1979), from "
            "memory); Lambda doubling and hyperfine neglected; either Lambda component"),
    _linear("CaF", 39.962590851 + 18.9984031621, _GS / 2, "X2Sigma+ N=1 M_S=1/2",
            ("calcium monofluoride", "40CaF"),
            "40Ca19F; strong-field limit g_s/2 mu_B, valid above the spin-rotation and "
            "hyperfine scale (few mT); weak-field structure not modelled"),
)

_CATALOGUE: dict[str, Species] = {entry.name: entry for entry in _ENTRIES}
_INDEX: dict[str, str] = {}
for _entry in _ENTRIES:
    for _key in (_entry.name, *_entry.aliases):
        if _key.lower() in _INDEX:
            raise RuntimeError(f"species catalogue: name {_key!r} used twice")
        _INDEX[_key.lower()] = _entry.name


def catalogue() -> tuple[str, ...]:
    """Canonical names of the built-in species, in catalogue order."""
    return tuple(_CATALOGUE)


def species(name: str) -> Species:
    """Built-in species by name or alias, ignoring case and surrounding spaces.

    Raises
    ------
    TiltwellError
        For an unknown name; the message lists close matches.

    Examples
    --------
    >>> species("rubidium-87").name
    'Rb-87'
    """
    return _CATALOGUE[look_up(name, _INDEX, "species", "tiltwell.catalogue() lists every name")]
