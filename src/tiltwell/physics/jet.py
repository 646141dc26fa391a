"""Absolute numbers from the source: how many particles a free jet sends down the beam axis.

- Flow: an ideal gas leaving a sonic (choked) orifice of diameter ``d`` from stagnation
  pressure ``p0`` and temperature ``T0`` carries ``F(g) n0 sqrt(2 k T0/m) pi d^2/4``
  particles per second, ``F(g) = sqrt(g/(g+1)) (2/(g+1))^(1/(g-1))``, ``n0 = p0/(k T0)``
  (isentropic flow to Mach 1 at the throat; D. R. Miller, "Free jet sources", ch. 2 of
  G. Scoles (ed.), Atomic and Molecular Beam Methods Vol. 1 (Oxford UP, 1988); from memory).
  It equals ``rho* a* A / m`` of gas dynamics (J. D. Anderson, Modern Compressible Flow).
- Centreline intensity: far from the nozzle the jet looks like a point source whose
  intensity on the axis is ``kappa / pi * flow`` [1/(sr s)]; an effusive (cosine) source has
  ``kappa = 1``. The peaking factor ``kappa`` depends on gamma: 1.98 for gamma = 5/3 and 1.38
  for gamma = 7/5 (H. C. W. Beijerinck and N. F. Verster, "Absolute intensities and
  perpendicular temperatures of supersonic beams of polyatomic gases", Physica 111C (1981)
  327, their method-of-characteristics values; from memory, also quoted in Pauly, Atom,
  Molecule and Cluster Beams I). Between 7/5 and 5/3 the default interpolates linearly
  in gamma (our choice, no source); outside that range give ``peaking_factor`` yourself.
- Limits: continuous, ideal, no skimmer interference, no background-gas attenuation, no
  clusters. A pulsed valve delivers less than the steady jet over its open time.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from .._base.display import html_table
from .._base.validation import TiltwellError, as_scalar
from .constants import BOLTZMANN

__all__ = ["FreeJet", "PEAKING_FACTORS", "choked_flow_factor", "cone", "default_peaking_factor", "free_jet"]

#: Peaking factor kappa [1] of an ideal free jet by heat-capacity ratio gamma:
#: Beijerinck & Verster, Physica 111C (1981) 327 (from memory).
PEAKING_FACTORS: dict[float, float] = {7.0 / 5.0: 1.38, 5.0 / 3.0: 1.98}

_GAMMA_LOW, _GAMMA_HIGH = min(PEAKING_FACTORS), max(PEAKING_FACTORS)
#: Heat-capacity ratios accepted at all: above 1, at most the monatomic 5/3 (plus a
#: rounding margin so that 1.6667 typed by hand is accepted as 5/3).
_GAMMA_MAX = 5.0 / 3.0 + 1e-3


def choked_flow_factor(heat_capacity_ratio: float) -> float:
    """``F(g) = sqrt(g/(g+1)) (2/(g+1))^(1/(g-1))`` [1] of the choked-flow formula.

    Parameters
    ----------
    heat_capacity_ratio : float
        gamma = Cp/Cv [1], in (1, 5/3].

    Examples
    --------
    >>> round(choked_flow_factor(5 / 3), 4)
    0.5135
    """
    g = _gamma(heat_capacity_ratio)
    return math.sqrt(g / (g + 1.0)) * (2.0 / (g + 1.0)) ** (1.0 / (g - 1.0))


def default_peaking_factor(heat_capacity_ratio: float) -> float:
    """Default peaking factor kappa [1] of an ideal free jet for ``heat_capacity_ratio``.

    The tabulated values :data:`PEAKING_FACTORS` (Beijerinck & Verster 1981, from memory)
    at gamma = 7/5 and 5/3, linear in gamma between them (our choice, no source). Below
    7/5 there is no default: a :class:`TiltwellError` asks for ``peaking_factor``.

    Examples
    --------
    >>> default_peaking_factor(5 / 3), default_peaking_factor(1.4)
    (1.98, 1.38)
    """
    g = _gamma(heat_capacity_ratio)
    if g < _GAMMA_LOW:
        raise TiltwellError(
            f"heat_capacity_ratio [1] = {g!r} has no default peaking factor (tabulated for "
            f"gamma in [{_GAMMA_LOW:.4g}, {_GAMMA_HIGH:.4g}]); give peaking_factor [1] > 0"
        )
    g = min(g, _GAMMA_HIGH)
    k_low, k_high = PEAKING_FACTORS[_GAMMA_LOW], PEAKING_FACTORS[_GAMMA_HIGH]
    if g == _GAMMA_HIGH:
        return k_high
    return k_low + (k_high - k_low) * (g - _GAMMA_LOW) / (_GAMMA_HIGH - _GAMMA_LOW)


def cone(diameter: float, distance: float) -> float:
    """Solid angle [sr] of a round aperture of ``diameter`` [m] seen from a point on its
    axis at ``distance`` [m]: exactly ``2 pi (1 - cos theta)``, ``tan theta = d / (2 L)``.

    Examples
    --------
    >>> round(cone(2e-3, 1.0) / (math.pi * 1e-6), 6)  # small cone: area / L^2
    1.0
    """
    d = as_scalar(diameter, "diameter", "m", low=0.0, low_open=True)
    length = as_scalar(distance, "distance", "m", low=0.0, low_open=True)
    radius = 0.5 * d
    # 1 - cos(theta) = r^2 / (sqrt(L^2 + r^2) (sqrt(L^2 + r^2) + L)): no cancellation
    hypotenuse = math.hypot(length, radius)
    return 2.0 * math.pi * radius * radius / (hypotenuse * (hypotenuse + length))


@dataclass(frozen=True)
class FreeJet:
    """An ideal continuous free jet from a sonic orifice (build with :func:`free_jet`).

    Attributes
    ----------
    pressure : float
        Stagnation pressure p0 [Pa].
    temperature : float
        Stagnation temperature T0 [K].
    nozzle_diameter : float
        Orifice diameter d [m].
    mass : float
        Mean particle mass of the gas [kg].
    heat_capacity_ratio : float
        gamma [1].
    peaking_factor : float
        kappa [1] (1 for an effusive cosine source).
    flow : float
        Particles per second through the orifice [1/s].
    centreline_intensity : float
        ``peaking_factor / pi * flow`` [1/(sr s)].
    """

    pressure: float
    temperature: float
    nozzle_diameter: float
    mass: float
    heat_capacity_ratio: float
    peaking_factor: float
    flow: float = field(init=False)
    centreline_intensity: float = field(init=False)

    def __post_init__(self) -> None:
        p0 = as_scalar(self.pressure, "pressure", "Pa", low=0.0, low_open=True)
        t0 = as_scalar(self.temperature, "temperature", "K", low=0.0, low_open=True)
        d = as_scalar(self.nozzle_diameter, "nozzle_diameter", "m", low=0.0, low_open=True)
        m = as_scalar(self.mass, "mass", "kg", low=0.0, low_open=True)
        g = _gamma(self.heat_capacity_ratio)
        kappa = as_scalar(self.peaking_factor, "peaking_factor", "1", low=0.0, low_open=True)
        n0 = p0 / (BOLTZMANN * t0)
        flow = choked_flow_factor(g) * n0 * math.sqrt(2.0 * BOLTZMANN * t0 / m) * math.pi * d * d / 4.0
        for name, value in (("pressure", p0), ("temperature", t0), ("nozzle_diameter", d), ("mass", m),
                            ("heat_capacity_ratio", g), ("peaking_factor", kappa), ("flow", flow),
                            ("centreline_intensity", kappa / math.pi * flow)):
            object.__setattr__(self, name, value)

    def into(self, solid_angle: float) -> float:
        """Particles per second [1/s] into a small cone of ``solid_angle`` [sr] about the
        axis: ``centreline_intensity * solid_angle``.

        Holds for small cones (the intensity falls off away from the axis; for an aperture
        of a few mrad half-angle the centreline value is what counts). Use :func:`cone`
        for the solid angle of a round aperture. Allowed: (0, 2 pi] sr; the result is an
        upper bound for wide cones.
        """
        omega = as_scalar(solid_angle, "solid_angle", "sr", low=0.0, high=2.0 * math.pi, low_open=True)
        return self.centreline_intensity * omega

    def per_pulse(self, open_time: float) -> float:
        """Particles [1] through the orifice in ``open_time`` [s] of steady flow:
        ``flow * open_time``.

        A pulsed valve delivers less than this: it opens and closes in a finite time and the
        jet needs time to reach the steady state, so this is an upper bound; scale it by your
        valve's measured fraction. Multiply by ``into(...) / flow`` for the particles of one
        pulse inside a cone.
        """
        t = as_scalar(open_time, "open_time", "s", low=0.0, low_open=True)
        return self.flow * t

    def _repr_html_(self) -> str:
        rows = [
            ("stagnation pressure", f"{self.pressure / 1e5:.4g} bar"),
            ("stagnation temperature", f"{self.temperature:.4g} K"),
            ("nozzle diameter", f"{self.nozzle_diameter * 1e3:.4g} mm"),
            ("flow", f"{self.flow:.4g} /s"),
            ("peaking factor", f"{self.peaking_factor:.4g}"),
            ("centreline intensity", f"{self.centreline_intensity:.4g} /(sr s)"),
        ]
        return html_table("Free jet", rows)


def free_jet(
    pressure: float,
    temperature: float,
    nozzle_diameter: float,
    mass: float,
    heat_capacity_ratio: float,
    peaking_factor: float | None = None,
) -> FreeJet:
    """Ideal continuous free jet from a sonic orifice (see the module notes).

    Parameters
    ----------
    pressure : float
        Stagnation pressure p0 [Pa], > 0.
    temperature : float
        Stagnation temperature T0 [K], > 0.
    nozzle_diameter : float
        Orifice diameter d [m], > 0.
    mass : float
        Mean particle mass of the gas [kg], > 0 (of the mixture for a seeded beam).
    heat_capacity_ratio : float
        gamma = Cp/Cv [1], in (1, 5/3].
    peaking_factor : float, optional
        kappa [1], > 0; by default from gamma (:func:`default_peaking_factor`: tabulated at
        7/5 and 5/3, linear between; an error below 7/5).

    Returns
    -------
    FreeJet
        With ``flow`` [1/s] and ``centreline_intensity`` [1/(sr s)].

    Examples
    --------
    >>> from tiltwell.physics.constants import ATOMIC_MASS
    >>> jet = free_jet(1e5, 300.0, 0.5e-3, 39.948 * ATOMIC_MASS, 5 / 3)
    >>> f"{jet.flow:.3e}", jet.peaking_factor
    ('8.603e+20', 1.98)
    """
    kappa = default_peaking_factor(heat_capacity_ratio) if peaking_factor is None else peaking_factor
    return FreeJet(pressure, temperature, nozzle_diameter, mass, heat_capacity_ratio, kappa)


def _gamma(value: float) -> float:
    return as_scalar(value, "heat_capacity_ratio", "1", low=1.0, high=_GAMMA_MAX, low_open=True)
