"""Where the beam comes from: carrier gases, the supersonic terminal velocity, and the
source geometry (nozzle, skimmer, apertures, flight path) that sets the beam at switch-on.

- Mean speed: the terminal velocity of an ideal isentropic expansion from a stagnation
  temperature T0, ``v0 = sqrt(2 gamma / (gamma - 1) k T0 / m)`` (enthalpy conservation;
  D. R. Miller, "Free jet sources", ch. 2 of G. Scoles (ed.), Atomic and Molecular Beam
  Methods Vol. 1 (Oxford UP, 1988); from memory). A seeded species moves with its carrier.
  Real beams are slower (incomplete cooling, clusters, a hot valve reads cooler than the gas).
- :meth:`Source.beam` builds the Gaussian :class:`~tiltwell.physics.beam.Beam` (see that module
  for the phase-space model and its limits).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from .._base.validation import TiltwellError, as_scalar, look_up
from .beam import Beam, PhasePlane
from .constants import ATOMIC_MASS, BOLTZMANN

__all__ = ["Aperture", "Gas", "Source", "gas", "gases", "mixture", "terminal_velocity"]

Array = NDArray[np.float64]

def terminal_velocity(mass: float, heat_capacity_ratio: float, temperature: float) -> float:
    """Terminal speed [m/s] of an ideal supersonic expansion, ``sqrt(2 g/(g-1) k T0 / m)``.

    Parameters
    ----------
    mass : float
        Mean particle mass of the gas [kg], > 0.
    heat_capacity_ratio : float
        gamma = Cp/Cv [1], > 1 (5/3 monatomic, 7/5 diatomic with rotation).
    temperature : float
        Nozzle stagnation temperature T0 [K], > 0.

    Notes
    -----
    All the stagnation enthalpy ``Cp T0`` goes into flow: Miller, ch. 2 of Scoles (ed.),
    Atomic and Molecular Beam Methods Vol. 1; H. Pauly, Atom, Molecule and Cluster Beams I
    (both from memory).

    Examples
    --------
    >>> round(terminal_velocity(39.948 * ATOMIC_MASS, 5 / 3, 300.0))
    559
    """
    m = as_scalar(mass, "mass", "kg", low=0.0, low_open=True)
    g = as_scalar(heat_capacity_ratio, "heat_capacity_ratio", "1", low=1.0, low_open=True)
    t = as_scalar(temperature, "temperature", "K", low=0.0, low_open=True)
    return math.sqrt(2.0 * g / (g - 1.0) * BOLTZMANN * t / m)


@dataclass(frozen=True)
class Gas:
    """A carrier gas, a seed, or a mixture of them.

    Parameters
    ----------
    name : str
        Label.
    mass : float
        (Mean) particle mass [kg], > 0.
    heat_capacity_ratio : float
        gamma = Cp/Cv [1], > 1.
    """

    name: str
    mass: float
    heat_capacity_ratio: float

    def __post_init__(self) -> None:
        if not isinstance(self.name, str) or not self.name.strip():
            raise TiltwellError(f"name must be a non-empty string; got {self.name!r}")
        object.__setattr__(self, "mass", as_scalar(self.mass, "mass", "kg", low=0.0, low_open=True))
        g = as_scalar(self.heat_capacity_ratio, "heat_capacity_ratio", "1", low=1.0, low_open=True)
        object.__setattr__(self, "heat_capacity_ratio", g)


# Standard atomic weights (IUPAC/CIAAW abridged values, from memory) [u]; molecules as sums.
_GASES = {
    "He": (4.002602, 5 / 3, "helium"), "Ne": (20.1797, 5 / 3, "neon"),
    "Ar": (39.948, 5 / 3, "argon"), "Kr": (83.798, 5 / 3, "krypton"),
    "Xe": (131.293, 5 / 3, "xenon"), "H2": (2 * 1.00794, 7 / 5, "hydrogen"),
    "N2": (2 * 14.0067, 7 / 5, "nitrogen"), "O2": (2 * 15.9994, 7 / 5, "oxygen"),
}
_GAS_INDEX = {key.lower(): key for key in _GASES} | {v[2]: key for key, v in _GASES.items()}


def gases() -> tuple[str, ...]:
    """Names of the built-in gases (monatomic gamma 5/3, diatomic 7/5)."""
    return tuple(_GASES)


def gas(name: str) -> Gas:
    """Built-in gas by symbol or English name, ignoring case (``"Kr"``, ``"krypton"``).

    Raises
    ------
    TiltwellError
        For an unknown name; the message lists close matches.

    Examples
    --------
    >>> gas("argon").heat_capacity_ratio
    1.6666666666666667
    """
    symbol = look_up(name, _GAS_INDEX, "gas", f"Built-in gases: {', '.join(_GASES)}")
    weight, gamma, _ = _GASES[symbol]
    return Gas(symbol, weight * ATOMIC_MASS, gamma)


def mixture(parts: Mapping[Gas | str, float]) -> Gas:
    """Ideal mixture of gases, e.g. a 2 % seed in krypton.

    Parameters
    ----------
    parts : mapping of Gas or str to float
        Each gas (or built-in name) with its amount [1], > 0. The amounts are normalised, so
        mole fractions, percentages or partial pressures all work; a gas given twice (as a
        name and as a Gas) is summed.

    Returns
    -------
    Gas
        Mole-fraction-weighted mean mass ``sum x_i m_i`` and ``gamma = sum x_i Cp_i / sum
        x_i Cv_i`` with ``Cv_i = R/(gamma_i - 1)``, ``Cp_i = gamma_i Cv_i`` (ideal mixture;
        Miller, ch. 2 of Scoles (ed.), from memory). A single gas is returned unchanged.

    Examples
    --------
    >>> mixture({"He": 1, "N2": 1}).heat_capacity_ratio
    1.5
    """
    if not isinstance(parts, Mapping) or not parts:
        raise TiltwellError(f"parts must be a non-empty mapping {{Gas or name: amount}}; got {parts!r}")
    amounts: dict[Gas, float] = {}
    for key, amount in parts.items():
        item = gas(key) if isinstance(key, str) else key
        if not isinstance(item, Gas):
            raise TiltwellError(f"parts keys must be Gas or gas names; got {type(key).__name__}")
        value = as_scalar(amount, f"parts[{item.name!r}]", "1", low=0.0, low_open=True)
        amounts[item] = amounts.get(item, 0.0) + value
    if len(amounts) == 1:
        return next(iter(amounts))
    total = sum(amounts.values())
    x = {g: a / total for g, a in amounts.items()}
    mass = sum(f * g.mass for g, f in x.items())
    cv = sum(f / (g.heat_capacity_ratio - 1.0) for g, f in x.items())
    cp = sum(f * g.heat_capacity_ratio / (g.heat_capacity_ratio - 1.0) for g, f in x.items())
    name = " + ".join(f"{f:.4g} {g.name}" for g, f in x.items())
    return Gas(name, mass, cp / cv)


@dataclass(frozen=True)
class Aperture:
    """A round aperture on the beam axis: ``distance`` from the nozzle [m] and ``diameter`` [m]."""

    distance: float
    diameter: float

    def __post_init__(self) -> None:
        object.__setattr__(self, "distance", as_scalar(self.distance, "distance", "m", low=0.0, low_open=True))
        object.__setattr__(self, "diameter", as_scalar(self.diameter, "diameter", "m", low=0.0, low_open=True))


@dataclass(frozen=True, kw_only=True)
class Source:
    """A pulsed supersonic source and the flight to the trap (all keywords).

    Parameters
    ----------
    gas : Gas
        Carrier (or mixture, :func:`mixture`); sets the speed.
    temperature : float
        Nozzle stagnation temperature [K], > 0.
    mass : float
        Mass of the paramagnetic species [kg], > 0; it moves with the carrier.
    valve_open_time : float
        Duration of the gas pulse [s], > 0, taken as a uniform (top-hat) pulse.
    nozzle_diameter, skimmer_diameter : float
        [m], > 0.
    nozzle_skimmer_distance, flight_distance : float
        From the nozzle to the skimmer and to where the trap is switched on [m];
        ``0 < nozzle_skimmer_distance <= flight_distance``.
    speed_ratio : float, optional
        ``S = v0 / a`` with ``a = sqrt(2 k T_par / m)`` [1], > 0. Give this ...
    relative_spread : float, optional
        ... or this, the rms ``sigma_v / v0`` [1], > 0; exactly one of the two.
    apertures : tuple of Aperture
        Further round apertures, each at ``distance <= flight_distance``.

    Notes
    -----
    :meth:`beam` builds a Gaussian stand-in for hard-edged reality; it keeps the second
    moments of the uniform shapes below, not their edges:

    - longitudinal: at the nozzle, position rms ``v0 tau / sqrt(12)`` (a top-hat pulse of
      length ``v0 tau``) and velocity rms ``sigma_v = v0 relative_spread``, uncorrelated.
      For a speed ratio the parallel distribution ``exp(-(v - v0)^2 / a^2)`` gives
      ``sigma_v = a / sqrt(2)``, i.e. ``relative_spread = 1 / (S sqrt(2))`` (Miller, ch. 2 of
      Scoles (ed.); Pauly, vol. I; from memory; the ``v^3`` prefactor is neglected, fine for
      S >~ 5). Free flight for ``t = flight_distance / v0`` builds the chirp
      ``<z vz> = sigma_v^2 t``.
    - transverse (x and y alike): source rms ``nozzle_diameter / 4`` (a uniform disc of
      radius R has rms R/2); velocity rms ``v0 (D / 4) / L`` for the aperture (skimmer
      included) with the smallest ``D / L`` seen from the nozzle, as if the transmitted
      directions filled that disc uniformly; then free flight to ``flight_distance``. Real
      transmission depends on position and direction together and has sharp edges; the
      flight is modelled as free (no skimmer interference, no gravity).
    """

    gas: Gas
    temperature: float
    mass: float
    valve_open_time: float
    nozzle_diameter: float
    nozzle_skimmer_distance: float
    skimmer_diameter: float
    flight_distance: float
    speed_ratio: float | None = None
    relative_spread: float | None = None
    apertures: tuple[Aperture, ...] = field(default_factory=tuple)

    def __post_init__(self) -> None:
        if not isinstance(self.gas, Gas):
            raise TiltwellError(f"gas must be a Gas (see tiltwell.physics.beam.gas); got {type(self.gas).__name__}")
        positive = {"temperature": "K", "mass": "kg", "valve_open_time": "s", "nozzle_diameter": "m",
                    "nozzle_skimmer_distance": "m", "skimmer_diameter": "m", "flight_distance": "m"}
        for name, unit in positive.items():
            object.__setattr__(self, name, as_scalar(getattr(self, name), name, unit, low=0.0, low_open=True))
        if (self.speed_ratio is None) == (self.relative_spread is None):
            raise TiltwellError(
                "give exactly one of speed_ratio [1] and relative_spread [1]; "
                f"got speed_ratio={self.speed_ratio!r}, relative_spread={self.relative_spread!r}"
            )
        for name in ("speed_ratio", "relative_spread"):
            if getattr(self, name) is not None:
                object.__setattr__(self, name, as_scalar(getattr(self, name), name, "1", low=0.0, low_open=True))
        if isinstance(self.apertures, Aperture) or not all(isinstance(a, Aperture) for a in self.apertures):
            raise TiltwellError(f"apertures must be a sequence of Aperture; got {self.apertures!r}")
        object.__setattr__(self, "apertures", tuple(self.apertures))
        places = [("nozzle_skimmer_distance", self.nozzle_skimmer_distance)]
        places += [(f"apertures[{i}].distance", a.distance) for i, a in enumerate(self.apertures)]
        for name, distance in places:
            if distance > self.flight_distance:
                raise TiltwellError(
                    f"{name} [m] must be <= flight_distance ({self.flight_distance!r} m); got {distance!r}"
                )

    @property
    def terminal_velocity(self) -> float:
        """Mean forward speed v0 [m/s]: the carrier's terminal velocity."""
        return terminal_velocity(self.gas.mass, self.gas.heat_capacity_ratio, self.temperature)

    @property
    def arrival_time(self) -> float:
        """Flight time of the synchronous particle to the trap, ``flight_distance / v0`` [s]."""
        return self.flight_distance / self.terminal_velocity

    @property
    def velocity_spread(self) -> float:
        """rms forward-velocity spread ``sigma_v`` [m/s]."""
        if self.relative_spread is not None:
            return self.terminal_velocity * self.relative_spread
        assert self.speed_ratio is not None
        return self.terminal_velocity / (self.speed_ratio * math.sqrt(2.0))

    @property
    def parallel_temperature(self) -> float:
        """Translational temperature along the beam, ``m sigma_v^2 / k`` [K], with the species mass."""
        return self.mass * self.velocity_spread**2 / BOLTZMANN

    @property
    def limiting_aperture(self) -> tuple[float, float]:
        """``(diameter, distance)`` [m] of the aperture (skimmer included) with the smallest
        ``diameter / distance`` seen from the nozzle: it sets the beam's divergence."""
        limits = [(self.skimmer_diameter, self.nozzle_skimmer_distance)]
        limits += [(a.diameter, a.distance) for a in self.apertures]
        return min(limits, key=lambda pair: pair[0] / pair[1])

    def beam(self) -> Beam:
        """The Gaussian beam where the trap is switched on (see the class notes)."""
        v0 = self.terminal_velocity
        t = self.arrival_time
        along = PhasePlane.from_sigmas(v0 * self.valve_open_time / math.sqrt(12.0), self.velocity_spread)
        diameter, distance = self.limiting_aperture
        angle = diameter / 4.0 / distance
        across = PhasePlane.from_sigmas(self.nozzle_diameter / 4.0, v0 * angle).drift(t)
        return Beam(v0, along.drift(t), across, across)
