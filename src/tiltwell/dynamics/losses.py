"""Losses of a trapped cloud while it is held: Majorana spin flips at the field zero of a
linear quadrupole, collisions with the background gas, and the survival they give together.

- Majorana: a particle passing within ``~ sqrt(hbar v / (mu B'))`` of the zero flips its
  spin and is lost; averaged over a thermal cloud the rate scales as
  ``(hbar / m) (mu B' / k_B T)^2`` with a constant of order one (W. Petrich, M. H. Anderson,
  J. R. Ensher and E. A. Cornell, "Stable, tightly confining magnetic trap for evaporative
  cooling of neutral atoms", Phys. Rev. Lett. 74, 3352 (1995); from memory). The constant
  ``chi`` was measured by R. Dubessy et al., "Rubidium-87 Bose-Einstein condensate in an
  optically plugged quadrupole trap", Phys. Rev. A 85, 013411 (2012): about 0.16 for
  87Rb |F=1, m_F=-1> (from memory, not re-read: the gradient convention of that fit,
  axial or radial, was not checked here; treat the default as good to a factor of a few).
  The formula is for a thermal cloud held in a linear quadrupole; a cloud far from
  equilibrium, or a trap with a bias field, needs its own estimate.
- Background gas: a rate ``n sigma <v>`` with ``n = p / (k T)`` and ``<v> = sqrt(8 k T /
  (pi m_gas))`` the mean speed of the background particles (the trapped ones are taken at
  rest: mK against room temperature). The default cross-section is
  :data:`BACKGROUND_CROSS_SECTION`.
- Survival after holding for ``t`` at constant rates: ``exp(-(sum of rates) t)``.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.validation import MAX_GRADIENT, MAX_MASS, TiltwellError, as_finite_array, as_scalar
from ..physics.constants import ATOMIC_MASS, BOLTZMANN, PLANCK

__all__ = [
    "BACKGROUND_CROSS_SECTION",
    "BACKGROUND_MASS",
    "MAJORANA_CHI",
    "background_gas_rate",
    "hold_survival",
    "majorana_rate",
]

HBAR: float = PLANCK / (2.0 * math.pi)  #: J s

#: Dimensionless Majorana constant chi [1]: Dubessy et al., Phys. Rev. A 85, 013411 (2012),
#: 87Rb |F=1, m_F=-1> (from memory; see the module notes for its uncertainty).
MAJORANA_CHI = 0.16

#: Loss cross-section [m^2] of a trapped particle on a room-temperature background gas.
#: Common practice, no source: chosen so that nitrogen at 1e-8 mbar (1e-6 Pa) and 295 K
#: gives a lifetime of about 1 s (0.96 s), the usual rule of thumb for a shallow trap;
#: measured total loss cross-sections are a few 1e-18 to about 1e-17 m^2 depending on
#: the pair (from memory).
BACKGROUND_CROSS_SECTION = 9e-18

#: Mass [kg] of the background gas by default: nitrogen (28.0134 u), the gas ion gauges
#: are calibrated for, so a gauge reading is an N2-equivalent pressure.
BACKGROUND_MASS = 28.0134 * ATOMIC_MASS


def majorana_rate(
    mass: float, moment: float, gradient: float, temperature: float, chi: float = MAJORANA_CHI
) -> float:
    """Thermal Majorana spin-flip loss rate [1/s] of a cloud in a linear quadrupole,
    ``chi (hbar / mass) (moment gradient / (k_B temperature))^2``.

    Parameters
    ----------
    mass : float
        Particle mass [kg], > 0.
    moment : float
        Magnetic moment of the trapped state [J/T], > 0 (e.g. ``mu_B / 2`` for 87Rb
        |F=1, m_F=-1>).
    gradient : float
        Axial field gradient B'_z of the quadrupole [T/m], > 0.
    temperature : float
        Cloud temperature [K], > 0.
    chi : float
        Dimensionless constant [1], > 0; default :data:`MAJORANA_CHI` (Dubessy et al. 2012,
        from memory).

    Examples
    --------
    >>> from tiltwell.physics.constants import BOHR_MAGNETON
    >>> rate = majorana_rate(86.909 * ATOMIC_MASS, BOHR_MAGNETON / 2, 1.0, 1e-4)
    >>> f"{rate:.3g}"  # [1/s] at 1 T/m (100 G/cm) and 100 uK
    '0.00132'
    """
    m = as_scalar(mass, "mass", "kg", low=0.0, high=MAX_MASS, low_open=True)
    mu = as_scalar(moment, "moment", "J/T", low=0.0, low_open=True)
    b = as_scalar(gradient, "gradient", "T/m", low=0.0, high=MAX_GRADIENT, low_open=True)
    t = as_scalar(temperature, "temperature", "K", low=0.0, low_open=True)
    c = as_scalar(chi, "chi", "1", low=0.0, low_open=True)
    return c * HBAR / m * (mu * b / (BOLTZMANN * t)) ** 2


def background_gas_rate(
    pressure: float,
    temperature: float = 295.0,
    cross_section: float = BACKGROUND_CROSS_SECTION,
    *,
    gas_mass: float = BACKGROUND_MASS,
) -> float:
    """Loss rate [1/s] from collisions with the background gas, ``n sigma <v>``.

    Parameters
    ----------
    pressure : float
        Background pressure [Pa], > 0 (1 mbar = 100 Pa; 1e-8 mbar = 1e-6 Pa).
    temperature : float
        Background gas temperature [K], > 0.
    cross_section : float
        Loss cross-section sigma [m^2], > 0; default :data:`BACKGROUND_CROSS_SECTION`
        (common practice, no source).
    gas_mass : float, keyword-only
        Mass of a background particle [kg], > 0; default nitrogen.

    Notes
    -----
    ``n = p / (k T)``; ``<v> = sqrt(8 k T / (pi m_gas))``, the mean of the Maxwell speed
    distribution, is the mean relative speed for trapped particles at rest.

    Examples
    --------
    >>> round(1 / background_gas_rate(1e-6), 2)  # lifetime [s] at 1e-8 mbar of N2
    0.96
    """
    p = as_scalar(pressure, "pressure", "Pa", low=0.0, low_open=True)
    t = as_scalar(temperature, "temperature", "K", low=0.0, low_open=True)
    sigma = as_scalar(cross_section, "cross_section", "m^2", low=0.0, low_open=True)
    m = as_scalar(gas_mass, "gas_mass", "kg", low=0.0, low_open=True)
    density = p / (BOLTZMANN * t)
    mean_speed = math.sqrt(8.0 * BOLTZMANN * t / (math.pi * m))
    return density * sigma * mean_speed


def hold_survival(time: ArrayLike, *rates: float) -> Any:
    """Fraction [1] still trapped after holding for ``time`` [s] at constant loss
    ``rates`` [1/s]: ``exp(-(sum of rates) time)``.

    Parameters
    ----------
    time : float or array_like
        Hold time(s) [s], >= 0.
    *rates : float
        Loss rates [1/s], each >= 0 (none: survival 1).

    Returns
    -------
    float, or ndarray of the shape of ``time``

    Examples
    --------
    >>> round(hold_survival(2.0, 0.1, 0.4), 6)
    0.367879
    """
    total = sum(as_scalar(r, f"rates[{i}]", "1/s", low=0.0) for i, r in enumerate(rates))
    times: NDArray[np.float64] = as_finite_array(time, "time", "s")
    if np.any(times < 0.0):
        raise TiltwellError(f"time [s] must be >= 0; got {float(times.min())!r}")
    survival = np.exp(-total * times)
    return float(survival) if survival.ndim == 0 else survival
