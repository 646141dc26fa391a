"""Hardware estimates for one pulsed coil: heating, inductance and voltage, field.

Planning numbers with the usual cautions; they size dangerous equipment, so every output
carries :data:`ELECTRICAL_CAUTION` and defers to local electrical-safety codes and licensed
practice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from .._base.display import html_table
from .._base.validation import TiltwellError, as_integer, as_scalar
from .constants import VACUUM_PERMEABILITY

__all__ = [
    "COPPER_DENSITY",
    "COPPER_RESISTIVITY",
    "COPPER_SPECIFIC_HEAT",
    "ELECTRICAL_CAUTION",
    "HardwareEstimate",
    "hardware_estimate",
    "ring_inductance",
]

#: Copper at 20 °C, CRC Handbook of Chemistry and Physics (from memory). The resistivity
#: rises by about 0.4 %/K (temperature coefficient ~3.9e-3 /K, same source, from memory).
COPPER_RESISTIVITY: float = 1.68e-8  #: Ohm·m
COPPER_DENSITY: float = 8960.0  #: kg/m^3
COPPER_SPECIFIC_HEAT: float = 385.0  #: J/(kg·K)

ELECTRICAL_CAUTION: str = (
    "CAUTION: pulsed coil currents of this size, and the voltages induced when they switch, "
    "can kill. Coils heat up and feel strong magnetic forces. These are planning estimates, "
    "not a design: follow local electrical-safety codes, and have current drivers, interlocks "
    "and coil mounts designed and reviewed by qualified, licensed people."
)


def ring_inductance(radius: float, section_radius: float) -> float:
    """Self-inductance [H] of one thin ring of round cross-section, uniform current.

    ``mu0 R (ln(8 R / a) - 7/4)`` for mean radius ``radius`` R [m] and section radius
    ``section_radius`` a [m], a << R (Grover, Inductance Calculations, ch. on circular rings;
    from memory; the round section's geometric mean distance from itself is a e^(-1/4)).
    No checks: callers validate (0 < a < R); multiply by N^2 for N turns in that section.
    """
    return VACUUM_PERMEABILITY * radius * (math.log(8.0 * radius / section_radius) - 1.75)


@dataclass(frozen=True)
class HardwareEstimate:
    """Order-of-magnitude numbers for one pulsed coil, with the safety caution.

    Attributes
    ----------
    peak_current [A], pulse_duration [s], rise_time [s], turns, coil_radius [m], wire_area [m^2]
        The inputs.
    resistance : float
        rho_e N 2 pi R / A [Ohm] at 20 °C.
    inductance : float
        [H], from the ring formula (uniform current) or as given.
    temperature_rise : float
        Adiabatic rise [K] for a rectangular pulse of the peak current lasting
        ``pulse_duration``: I^2 t rho_e / (A^2 d c) (conservative).
    temperature_rise_trapezoid : float
        The same for the trapezoid with ramps of ``rise_time`` inside ``pulse_duration``
        (integral of I^2 = I^2 (t - 4 rise_time / 3)).
    pulse_energy : float
        Heat per trapezoidal pulse [J], R times the integral of I^2.
    resistive_voltage : float
        I R [V] at the flat top.
    inductive_voltage : float
        L I / rise_time [V] during a linear ramp.
    stored_energy : float
        L I^2 / 2 [J], which must go somewhere when the coil switches off.
    central_field : float
        mu0 N I / (2 R) [T] at the coil centre.
    caution : str
    """

    peak_current: float
    pulse_duration: float
    rise_time: float
    turns: int
    coil_radius: float
    wire_area: float
    resistance: float
    inductance: float
    temperature_rise: float
    temperature_rise_trapezoid: float
    pulse_energy: float
    resistive_voltage: float
    inductive_voltage: float
    stored_energy: float
    central_field: float
    caution: str = field(default=ELECTRICAL_CAUTION)

    def _rows(self) -> list[tuple[str, str]]:
        return [
            ("peak current", f"{self.peak_current:.4g} A ({self.turns} turns, radius {self.coil_radius * 1e3:.4g} mm)"),
            ("pulse", f"{self.pulse_duration * 1e3:.4g} ms, ramps of {self.rise_time * 1e6:.4g} µs"),
            ("resistance", f"{self.resistance * 1e3:.4g} mOhm (20 °C)"),
            ("inductance", f"{self.inductance * 1e6:.4g} µH"),
            ("temperature rise per pulse", f"{self.temperature_rise:.4g} K (rectangular pulse, adiabatic)"),
            ("  with the ramps", f"{self.temperature_rise_trapezoid:.4g} K"),
            ("heat per pulse", f"{self.pulse_energy:.4g} J"),
            ("resistive voltage", f"{self.resistive_voltage:.4g} V"),
            ("inductive voltage", f"{self.inductive_voltage:.4g} V (L I / rise time)"),
            ("stored magnetic energy", f"{self.stored_energy:.4g} J"),
            ("field at the centre", f"{self.central_field:.4g} T"),
        ]

    def summary(self) -> list[str]:
        """Readable lines with units, the assumptions, and the caution last."""
        lines = [f"{name}: {value}" for name, value in self._rows()]
        lines.append(
            "assumptions: no cooling during the pulse, constant resistivity (copper's rises by "
            "~0.4 %/K, so a large rise is underestimated), ring inductance with uniform current"
        )
        lines.append(self.caution)
        return lines

    def _repr_html_(self) -> str:
        return html_table("Hardware estimate", [*self._rows(), ("caution", self.caution)])


def hardware_estimate(
    peak_current: float,
    pulse_duration: float,
    wire_area: float,
    *,
    turns: int,
    coil_radius: float,
    rise_time: float,
    winding_radius: float | None = None,
    inductance: float | None = None,
    resistivity: float = COPPER_RESISTIVITY,
    density: float = COPPER_DENSITY,
    specific_heat: float = COPPER_SPECIFIC_HEAT,
) -> HardwareEstimate:
    """Heating, inductance, voltages and central field of one coil's current pulse.

    Parameters
    ----------
    peak_current : float
        Flat-top current per turn [A], > 0.
    pulse_duration : float
        Whole pulse, ramps included [s], > 0 (e.g. the longest of ``CoilTiming.pulse_durations``).
    wire_area : float
        Conductor cross-section [m^2], > 0.
    turns : int
        Number of turns N >= 1.
    coil_radius : float
        Mean winding radius R [m], > 0.
    rise_time : float
        Linear ramp time [s], 0 < 2 rise_time <= pulse_duration.
    winding_radius, inductance : float
        Exactly one: the radius a [m] of the winding's (round) cross-section, 0 < a < R
        (for one turn, the wire radius), or the coil's inductance [H] if known.
    resistivity [Ohm·m], density [kg/m^3], specific_heat [J/(kg·K)] : float
        Conductor properties; copper at 20 °C by default.

    Notes
    -----
    Heating is adiabatic (no cooling during the pulse) with constant resistivity, which is
    conservative for short pulses as long as the rise stays small (rho_e grows ~0.4 %/K).
    Inductance: L = mu0 N^2 R (ln(8 R / a) - 7/4), the ring of round cross-section with the
    current spread uniformly over it (F. W. Grover, Inductance Calculations, ch. on circular
    rings; from memory): the surface-current ring's ln(8R/a) - 2 plus the conductor's
    internal inductance mu0 R / 4 per turn squared. The uniform-current value is the larger
    of the two, so the inductive voltage estimate errs on the safe side. The central field
    is mu0 N I / (2 R) (Biot-Savart).
    """
    current = as_scalar(peak_current, "peak_current", "A", low=0.0, high=1e7, low_open=True)
    duration = as_scalar(pulse_duration, "pulse_duration", "s", low=0.0, low_open=True)
    area = as_scalar(wire_area, "wire_area", "m^2", low=0.0, high=1.0, low_open=True)
    as_integer(turns, "turns", 1)
    radius = as_scalar(coil_radius, "coil_radius", "m", low=0.0, low_open=True)
    rise = as_scalar(rise_time, "rise_time", "s", low=0.0, high=0.5 * duration, low_open=True)
    rho = as_scalar(resistivity, "resistivity", "Ohm·m", low=0.0, low_open=True)
    mass_density = as_scalar(density, "density", "kg/m^3", low=0.0, low_open=True)
    heat = as_scalar(specific_heat, "specific_heat", "J/(kg·K)", low=0.0, low_open=True)
    if (winding_radius is None) == (inductance is None):
        raise TiltwellError(
            "give exactly one of winding_radius [m] and inductance [H]; "
            f"got winding_radius={winding_radius!r}, inductance={inductance!r}"
        )
    n = int(turns)
    if inductance is None:
        a = as_scalar(winding_radius, "winding_radius", "m", low=0.0, high=radius, low_open=True, high_open=True)
        henry = n * n * ring_inductance(radius, a)
    else:
        henry = as_scalar(inductance, "inductance", "H", low=0.0, low_open=True)
    resistance = rho * n * 2.0 * math.pi * radius / area
    action = current**2 * duration  # integral of I^2 over the rectangular pulse [A^2 s]
    action_trapezoid = current**2 * (duration - 4.0 * rise / 3.0)
    per_action = rho / (area**2 * mass_density * heat)  # K per A^2 s
    return HardwareEstimate(
        peak_current=current,
        pulse_duration=duration,
        rise_time=rise,
        turns=n,
        coil_radius=radius,
        wire_area=area,
        resistance=resistance,
        inductance=henry,
        temperature_rise=action * per_action,
        temperature_rise_trapezoid=action_trapezoid * per_action,
        pulse_energy=resistance * action_trapezoid,
        resistive_voltage=current * resistance,
        inductive_voltage=henry * current / rise,
        stored_energy=0.5 * henry * current**2,
        central_field=VACUUM_PERMEABILITY * n * current / (2.0 * radius),
    )
