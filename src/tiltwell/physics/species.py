"""Particles that a moving magnetic trap can hold: mass, the Zeeman energy of the trapped
state (the models of :mod:`.zeeman`), and a catalogue of species with their sources.
"""

from __future__ import annotations

from dataclasses import dataclass

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


# ---------------------------------------------------------------------------------------------
# Catalogue. Masses: atomic (neutral) masses of AME2020 (Wang et al., Chinese Phys. C 45,
# 030003 (2021)), from memory; molecules are sums of atomic masses (binding neglected, ~1e-9).
# Spin-only moments use the free-electron g (ELECTRON_G) and neglect rotational g-factors.

_MASS_NOTE = "mass: AME2020 atomic mass(es) from memory"
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
_ENTRIES = (
    _hyperfine("H", 1.00782503223, 0.5, 1420.405751768e6, ELECTRON_G, _G_I_PROTON,
               ("hydrogen", "H-1", "H1", "1H"),
               "hyperfine 1420.405751768 MHz (hydrogen maser), from memory; g_J free electron "
               "(bound-state correction ~2e-5 neglected); g_I from CODATA proton moment (scipy)"),
    _hyperfine("D", 2.01410177812, 1.0, 327.384352522e6, ELECTRON_G, _G_I_DEUTERON,
               ("deuterium", "H-2", "2H"),
               "hyperfine 327.384352522 MHz, from memory; g_J free electron; "
               "g_I from CODATA deuteron moment (scipy)"),
    _hyperfine("Li-7", 7.0160034366, 1.5, 803.5040866e6, 2.0023010, -0.0011822130,
               ("Li7", "7Li", "lithium-7"), f"hyperfine 2A = 803.5040866 MHz, g_J, {_ALKALI}"),
    _hyperfine("Na-23", 22.9897692820, 1.5, 1771.6261288e6, 2.0022960, -0.0008046108,
               ("Na23", "23Na", "sodium", "Na"), f"hyperfine 2A = 1771.6261288 MHz, g_J, {_ALKALI}"),
    _hyperfine("K-39", 38.9637064864, 1.5, 461.7197202e6, 2.00229421, -0.00014193489,
               ("K39", "39K", "potassium-39"), f"hyperfine 2A = 461.7197202 MHz, g_J, {_ALKALI}"),
    _hyperfine("Rb-87", 86.909180531, 1.5, 6834.682610904290e6, 2.00233113, -0.0009951414,
               ("Rb87", "87Rb", "rubidium-87"),
               "hyperfine 6834.682610904290 MHz, g_J, g_I: D. A. Steck, 'Rubidium 87 D Line Data', "
               "from memory"),
    _linear("N", 14.00307400443, _GS * 3 / 2, "4S3/2 M=3/2", ("N-14", "14N", "atomic nitrogen"),
            "14N; spin-only moment g_s M_S mu_B (L = 0)"),
    _linear("O2", 2 * 15.99491461957, _GS, "X3Sigma_g- N=1 J=2 M=2", ("molecular oxygen", "16O2"),
            "16O2; stretched state M_N = M_S = 1: g_s mu_B, linear at all fields"),
    _linear("Ne*", 19.9924401762, 2 * (1 + (_GS - 1) / 2), "3P2 (2p5 3s) M=2",
            ("Ne-20*", "20Ne*", "metastable neon"),
            "20Ne; LS-coupling Lande g_J = 1 + (g_s - 1)/2 = 3/2, moment g_J M mu_B; "
            "the measured g_J differs by a few 1e-3, from memory"),
    _linear("Ar*", 39.9623831237, 2 * (1 + (_GS - 1) / 2), "3P2 (3p5 4s) M=2",
            ("Ar-40*", "40Ar*", "metastable argon"),
            "40Ar; LS-coupling Lande g_J = 3/2, moment g_J M mu_B; measured g_J differs "
            "by a few 1e-3, from memory"),
    _linear("Cr", 51.9405062, _GS * 3, "7S3 M=3", ("Cr-52", "52Cr", "chromium-52"),
            "52Cr; spin-only moment g_s M_S mu_B (L = 0)"),
    _linear("NH", 14.00307400443 + 1.00782503223, _GS, "X3Sigma- N=0 J=1 M=1",
            ("imidogen", "14NH"), "14N1H; spin-only moment g_s M_S mu_B (N = 0)"),
    # OH X2Pi3/2 in Hund's case (a): W = (Lambda + g_s Sigma) Omega M mu_B B / (J(J+1))
    # with Lambda = 1, Sigma = 1/2, Omega = 3/2, J = M = 3/2: (1 + g_s/2)(9/4)/(15/4) = 1.2.
    _linear("OH", 15.99491461957 + 1.00782503223, (1 + _GS / 2) * 1.5 * 1.5 / (1.5 * 2.5),
            "X2Pi3/2 J=3/2 M=3/2", ("hydroxyl", "16OH"),
            "16O1H; Hund's case (a) moment (Lambda + g_s Sigma) Omega M / (J(J+1)) mu_B; "
            "Lambda doubling, hyperfine and case (b) mixing neglected"),
    _linear("CaF", 39.962590863 + 18.99840316273, _GS / 2, "X2Sigma+ N=1 M_S=1/2",
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
