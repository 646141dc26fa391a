"""Physical constants (CODATA, through ``scipy.constants``) and display conversions.

Everything inside tiltwell is SI. People read energies in millikelvin (E / k_B) and
phase-space areas in mm·m/s; the two helpers here are the only place those factors live.
"""

from __future__ import annotations

from typing import TypeVar

import numpy as np
import scipy.constants as _sc

__all__ = [
    "BOLTZMANN",
    "BOHR_MAGNETON",
    "NUCLEAR_MAGNETON",
    "VACUUM_PERMEABILITY",
    "ATOMIC_MASS",
    "PLANCK",
    "ELECTRON_G",
    "millikelvin",
    "from_millikelvin",
]

BOLTZMANN: float = _sc.k  #: J/K
BOHR_MAGNETON: float = _sc.physical_constants["Bohr magneton"][0]  #: J/T
NUCLEAR_MAGNETON: float = _sc.physical_constants["nuclear magneton"][0]  #: J/T
VACUUM_PERMEABILITY: float = _sc.mu_0  #: T·m/A
ATOMIC_MASS: float = _sc.physical_constants["atomic mass constant"][0]  #: kg
PLANCK: float = _sc.h  #: J·s
#: free-electron g-factor, positive convention (CODATA "electron g factor" is negative)
ELECTRON_G: float = -_sc.physical_constants["electron g factor"][0]

T = TypeVar("T", float, np.ndarray)


def millikelvin(energy: T) -> T:
    """Energy [J] expressed as a temperature in mK (E / k_B × 1e3).

    >>> round(millikelvin(BOLTZMANN * 1e-3), 12)
    1.0
    """
    return energy / BOLTZMANN * 1e3


def from_millikelvin(temperature: T) -> T:
    """Temperature in mK converted to an energy [J]."""
    return temperature * 1e-3 * BOLTZMANN
