"""The optional sections of a scenario file: ``[coils]``, ``[hold]``, ``[limits]`` and
``[detector]``.

Each is a frozen dataclass whose fields are declared with
:func:`tiltwell.workflows.keys.key` (kind, unit, range, default), read and written by
:mod:`tiltwell.workflows.scenario`, which re-exports every name here. SI units.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

from ..coils.array import MAX_ACTIVE, MAX_PHASES
from ..coils.drive import DEFAULT_HEAT_TRANSFER, DEFAULT_REPETITION_RATE
from ..physics.limits import HardwareLimits
from .keys import key

__all__ = ["CoilsSection", "DetectorSection", "HoldSection", "LimitsSection"]


@dataclass(frozen=True)
class HoldSection:
    """A hold in the stopped trap after the deceleration, in a background gas."""

    time: float = key("number", "s", "hold time in the stopped trap after the deceleration", 0.0, 1e4, required=True)
    vacuum_pressure: float = key("number", "Pa", "background-gas pressure during the hold", 0.0, 1e5, default=0.0)
    vacuum_temperature: float = key("number", "K", "background-gas temperature", 0.0, 1000.0, open_low=True,
                                    default=295.0)


@dataclass(frozen=True)
class CoilsSection:
    """The coil row: the coaxial coils at [deceleration] pitch that ever carry current while
    the trap runs from 0 to length, i.e. z_k = -(active/2 - 1) pitch + k pitch up to
    length + (active/2 - 1) pitch (coil k carries current while the trap is within
    active/2 pitches of it). Where this section is given, every number comes from this row
    (see [simulation] first_estimate)."""

    radius: float = key("number", "m", "mean winding radius of each coil", 0.0, 1.0, open_low=True, required=True)
    turns: int = key("integer", "", "turns per coil", 1, 1e5, required=True)
    width: float = key("number", "m", "radial extent of a winding (the trap box's corner is kept inside 0.99 of the "
                       "bore, radius - width/2)", 0.0, 1.0, open_low=True, required=True)
    height: float = key("number", "m", "axial extent of a winding (at most the pitch)", 0.0, 1.0, open_low=True,
                        required=True)
    fill_factor: float = key("number", "", "copper fraction of the winding cross-section (round wire, square packing: "
                             "at most pi/4)", 0.0, 1.0, default=0.6, open_low=True)
    max_current: float | None = key("number", "A", "largest current per turn (default: [deceleration] peak_current)",
                                    0.0, 1e6, open_low=True)
    active: int = key("even integer", "", "coils carrying current at once", 2, MAX_ACTIVE, default=4)
    handover: float = key("number", "pitches", "distance over which a coil is weighted into or out of the active "
                          "window, at most active/2 (0: abrupt, the currents jump)", 0.0, 500.0, default=0.5)
    gradient: float | None = key("number", "T/m", "wanted axial gradient at the zero (default: the [trap] quadrupole "
                                 "gradient; required for other traps)", 0.0, 1e5, open_low=True)
    plan_step: float = key("number", "s", "time between the points of the current waveform table", 0.0, 1.0,
                           default=2e-6, open_low=True)
    phases: int = key("integer", "", "trap positions across one pitch in the phase scan", 1, MAX_PHASES, default=16)
    repetition_rate: float = key("number", "Hz", "shots per second, for the average power and the steady temperature "
                                 "rise", 0.0, 1e4, default=DEFAULT_REPETITION_RATE, open_low=True)
    heat_transfer: float = key("number", "W/(m^2 K)", "cooling of the winding's outer surface to a sink at room "
                               "temperature (default: common practice, no source)", 0.0, 1e7,
                               default=DEFAULT_HEAT_TRANSFER, open_low=True)


_LIMITS = HardwareLimits()  # the defaults, each marked common practice, no source (tiltwell.physics.limits)


@dataclass(frozen=True)
class LimitsSection:
    """What the coil row's hardware must stay within; each verdict of ``tiltwell coils`` is
    judged against these. Defaults: common practice, no source — set your own driver's and
    coil's ratings."""

    voltage: float = key("number", "V", "largest voltage the driver may see across one coil, switching included",
                         0.0, 1e7, default=_LIMITS.voltage, open_low=True)
    current: float = key("number", "A", "largest current per turn the driver can give", 0.0, 1e7,
                         default=_LIMITS.current, open_low=True)
    current_density: float = key("number", "A/m^2", "largest current density in the wire", 0.0, 1e12,
                                 default=_LIMITS.current_density, open_low=True)
    temperature_rise: float = key("number", "K", "largest temperature rise of a coil in one shot", 0.0, 1e4,
                                  default=_LIMITS.temperature_rise, open_low=True)
    steady_temperature_rise: float = key("number", "K", "largest steady temperature rise at the repetition rate",
                                         0.0, 1e4, default=_LIMITS.steady_temperature_rise, open_low=True)
    hoop_stress: float = key("number", "Pa", "largest hoop stress in a winding", 0.0, 1e11,
                             default=_LIMITS.hoop_stress, open_low=True)
    axial_force: float = key("number", "N", "largest axial force on a coil", 0.0, 1e9,
                             default=_LIMITS.axial_force, open_low=True)

    def hardware_limits(self) -> HardwareLimits:
        """These limits as :class:`tiltwell.HardwareLimits`."""
        return HardwareLimits(**{item.name: getattr(self, item.name) for item in dataclasses.fields(self)})




@dataclass(frozen=True)
class DetectorSection:
    """The time-of-flight detector on the beam axis: it counts the particles crossing a
    disc of the given radius (a flux detector), each with the given efficiency; the
    predicted traces are binned in time_bin (tiltwell.workflows.traces)."""

    distance: float = key("number", "m", "detector plane on the beam axis, from the nozzle", 0.0, 100.0,
                          open_low=True, required=True)
    radius: float = key("number", "m", "radius of the detected disc around the beam axis", 0.0, 1.0, open_low=True,
                        required=True)
    efficiency: float = key("number", "1", "detected share of the particles that cross the disc", 0.0, 1.0,
                            open_low=True, default=1.0)
    time_bin: float = key("number", "s", "width of a time bin of the predicted traces", 0.0, 1.0, open_low=True,
                          default=1e-6)
