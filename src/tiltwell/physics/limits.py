"""Limits a coil row must stay within, a verdict per quantity, and advice from scaling laws.

:class:`HardwareLimits` holds the limits (user-settable, defaults marked "common practice, no
source"); :func:`judge` compares a coil's worst numbers with them and, where one is exceeded,
says what brings it back, from how each number scales with the winding (see :func:`judge`).
SI units: V, A, A/m^2, K, Pa, N. Every output that sizes hardware keeps
:data:`~tiltwell.physics.hardware.ELECTRICAL_CAUTION`.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass

from .._base.validation import TiltwellError, as_integer, as_scalar

__all__ = ["LIMIT_UNITS", "HardwareLimits", "ScalingContext", "Verdict", "judge", "turns_range"]

#: SI unit of each limit, in the order of :class:`HardwareLimits`.
LIMIT_UNITS: dict[str, str] = {
    "voltage": "V",
    "current": "A",
    "current_density": "A/m^2",
    "temperature_rise": "K",
    "steady_temperature_rise": "K",
    "hoop_stress": "Pa",
    "axial_force": "N",
}


@dataclass(frozen=True)
class HardwareLimits:
    """Largest values a coil of the row may reach; every default is common practice, no source.

    Parameters
    ----------
    voltage : float, default 1000.0
        Driver voltage [V]: 1.2 kV IGBT and MOSFET half bridges are usually run at or below
        ~1 kV (common practice, no source).
    current : float, default 1000.0
        Driver current per coil [A] (common practice, no source).
    current_density : float, default 3e8
        Current density in the copper [A/m^2], 300 A/mm^2 for millisecond pulses of a
        pulsed coil (continuous duty is ~5-20 A/mm^2; common practice, no source).
    temperature_rise : float, default 10.0
        Adiabatic temperature rise per shot [K] (common practice, no source).
    steady_temperature_rise : float, default 40.0
        Steady rise of the winding over the sink at the repetition rate [K], within what
        epoxy-impregnated windings and enamel stand near room temperature (common practice,
        no source).
    hoop_stress : float, default 5e7
        Hoop stress in the copper [Pa], below the ~60-70 MPa yield of annealed copper
        (common practice, no source).
    axial_force : float, default 200.0
        Net axial force on one coil that its mount takes [N] (common practice, no source).
    """

    voltage: float = 1000.0
    current: float = 1000.0
    current_density: float = 3e8
    temperature_rise: float = 10.0
    steady_temperature_rise: float = 40.0
    hoop_stress: float = 5e7
    axial_force: float = 200.0

    def __post_init__(self) -> None:
        for name, unit in LIMIT_UNITS.items():
            value = as_scalar(getattr(self, name), name, unit, low=0.0, low_open=True)
            object.__setattr__(self, name, value)

    def to_dict(self) -> dict[str, float]:
        """The limits in SI units (names as in :data:`LIMIT_UNITS`)."""
        return dataclasses.asdict(self)


@dataclass(frozen=True)
class ScalingContext:
    """What the advice of :func:`judge` scales: the winding and its operation.

    Attributes
    ----------
    turns : int
        Turns per coil N.
    current : float
        Peak current per turn [A] of the row.
    voltage : float
        Peak |V| [V] of the row (any coil).
    repetition_rate : float
        Shots per second [Hz].
    heat_transfer : float
        Cooling coefficient [W/(m^2 K)].
    """

    turns: int
    current: float
    voltage: float
    repetition_rate: float
    heat_transfer: float


@dataclass(frozen=True)
class Verdict:
    """One quantity against its limit.

    Attributes
    ----------
    quantity : str
        A name of :data:`LIMIT_UNITS`.
    value, limit : float
        The worst value over the row and the run, and its limit, in ``unit`` (SI).
    unit : str
    margin : float
        ``limit / value - 1`` (inf for a zero value): negative when the limit is exceeded.
    passed : bool
        ``value <= limit``.
    advice : str
        What brings the value back within the limit; empty when it passes.
    """

    quantity: str
    value: float
    limit: float
    unit: str
    margin: float
    passed: bool
    advice: str

    def to_dict(self) -> dict[str, object]:
        """The verdict as JSON-ready numbers and text (SI); an infinite margin becomes None."""
        out: dict[str, object] = dataclasses.asdict(self)
        if not math.isfinite(self.margin):
            out["margin"] = None
        return out


def turns_range(context: ScalingContext, limits: HardwareLimits) -> tuple[int, int]:
    """Turn counts N' (low, high) that keep the ampere-turns and meet both driver limits.

    At fixed ampere-turns N I, winding section and fill factor, the current per turn is
    I N / N' (within ``limits.current`` needs N' >= N I / I_max) and every term of the
    voltage, L dI/dt, M dI/dt and I R, scales as N' / N (L, M and R as N'^2, dI/dt as 1 / N'),
    so N' <= N V_max / V. Empty (low > high) when no turn count meets both.
    """
    n = context.turns
    low = max(1, math.ceil(n * context.current / limits.current * (1 - 1e-12)))
    high = math.floor(n * limits.voltage / context.voltage * (1 + 1e-12)) if context.voltage > 0 else 10**9
    return low, high


def _turns_advice(context: ScalingContext, limits: HardwareLimits) -> str:
    low, high = turns_range(context, limits)
    n, current = context.turns, context.current
    if low > high:
        return (f"no turn count keeps {n * current:.4g} ampere-turns within both {limits.voltage:.4g} V and "
                f"{limits.current:.4g} A; lengthen the rise time (the switching voltage falls as 1 / rise time), "
                "lower the gradient (ampere-turns in proportion) or split each coil over two drivers")
    pick = high if high < n else low
    return (f"{pick} turns at {current * n / pick:.4g} A keep the ampere-turns and scale the voltage by "
            f"{pick / n:.3g} (any of {low}-{high} turns meets both driver limits); current density and "
            "heating are unchanged at the same copper area")


def _section_advice(power: float) -> Callable[[float, float, ScalingContext, HardwareLimits], str]:
    def advice(value: float, limit: float, context: ScalingContext, limits: HardwareLimits) -> str:
        factor = (value / limit) ** power
        return (f"a {factor:.3g}x larger copper area (winding section x fill factor) at the same ampere-turns, "
                f"or {1 / factor:.3g}x the ampere-turns (a lower gradient)")
    return advice


def _steady_advice(value: float, limit: float, context: ScalingContext, limits: HardwareLimits) -> str:
    ratio = value / limit
    return (f"at most {context.repetition_rate / ratio:.4g} Hz, or cooling of at least "
            f"{context.heat_transfer * ratio:.4g} W/(m^2 K), or less heat per shot (larger copper area)")


def _force_advice(value: float, limit: float, context: ScalingContext, limits: HardwareLimits) -> str:
    return (f"a mount that takes {value:.4g} N, or {math.sqrt(limit / value):.3g}x the ampere-turns (the force "
            "goes as their square); turns alone do not change it")


_ADVICE: dict[str, Callable[[float, float, ScalingContext, HardwareLimits], str]] = {
    "voltage": lambda value, limit, context, limits: _turns_advice(context, limits),
    "current": lambda value, limit, context, limits: _turns_advice(context, limits),
    "current_density": _section_advice(1.0),  # J = N I / (fill w h)
    "temperature_rise": _section_advice(0.5),  # rise per shot ~ J^2 t
    "steady_temperature_rise": _steady_advice,
    "hoop_stress": _section_advice(1.0),  # sigma = J B R at fixed field
    "axial_force": _force_advice,
}


def judge(values: Mapping[str, float], limits: HardwareLimits, context: ScalingContext) -> tuple[Verdict, ...]:
    """A :class:`Verdict` for each quantity of :data:`LIMIT_UNITS` in ``values``.

    Parameters
    ----------
    values : mapping of str to float
        Worst value of each quantity (SI, names of :data:`LIMIT_UNITS`).
    limits : HardwareLimits
    context : ScalingContext
        The winding and its operation, for the advice.

    Notes
    -----
    The advice follows the scaling at fixed ampere-turns N I and fixed geometry:
    N' turns change the voltage as N' / N and the current as N / N' (:func:`turns_range`);
    the current density J = N I / (fill w h), the hoop stress J B R and (as J^2) the
    temperature rise per shot fall with the copper area; the steady rise is
    f E / (h S), linear in the repetition rate f and inverse in the cooling h; the axial
    force goes as (N I)^2.
    """
    if not isinstance(limits, HardwareLimits):
        raise TiltwellError(f"limits must be HardwareLimits; got {type(limits).__name__}")
    as_integer(context.turns, "turns", 1)
    verdicts = []
    for name, unit in LIMIT_UNITS.items():
        if name not in values:
            continue
        value = abs(float(values[name]))
        limit = float(getattr(limits, name))
        passed = value <= limit
        margin = limit / value - 1.0 if value > 0.0 else math.inf
        advice = "" if passed else _ADVICE[name](value, limit, context, limits)
        verdicts.append(Verdict(name, value, limit, unit, margin, passed, advice))
    return tuple(verdicts)
