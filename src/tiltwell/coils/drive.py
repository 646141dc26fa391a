"""What a coil row's current table asks of its drivers, windings and mounts, over a whole shot.

:func:`drive_load` takes a :class:`~tiltwell.coils.array.CoilArray` and the currents of every
coil at a table of times, adds the switch-on and switch-off as linear ramps, and returns a
:class:`DriveLoad`: per coil and for the hottest and the most stressed coil, the voltage
(self and mutual induction and I R), current density, power, heat and temperature rise per
shot and at a repetition rate, the axial forces and the hoop stress, each against
:class:`~tiltwell.physics.limits.HardwareLimits`. SI units. Every output keeps
:data:`~tiltwell.physics.hardware.ELECTRICAL_CAUTION`.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._base.display import html_table
from .._base.validation import TiltwellError, as_finite_array, as_increasing, as_integer, as_scalar
from ..physics.hardware import COPPER_DENSITY, COPPER_RESISTIVITY, COPPER_SPECIFIC_HEAT, ELECTRICAL_CAUTION
from ..physics.inductance import coil_self_inductance, radius_slopes, shifted_mutual
from ..physics.limits import LIMIT_UNITS, HardwareLimits, ScalingContext, Verdict, judge
from .array import CoilArray, check_coil_array

__all__ = ["DEFAULT_FILL_FACTOR", "DEFAULT_HEAT_TRANSFER", "DEFAULT_REPETITION_RATE", "MUTUAL_TOLERANCE", "UNITS",
           "DriveLoad", "drive_load"]

FloatArray = NDArray[np.float64]

#: Copper fraction of a winding section, as the scenario's ``[coils] fill_factor`` default.
DEFAULT_FILL_FACTOR = 0.6
#: Cooling [W/(m^2 K)] over the winding's outer cylinder to a sink at room temperature: a
#: winding bonded to a water-cooled mount (common practice, no source).
DEFAULT_HEAT_TRANSFER = 500.0
#: Shots per second [Hz] of a pulsed beam machine (common practice, no source).
DEFAULT_REPETITION_RATE = 10.0
#: Mutual terms are summed out to the first neighbour whose M falls below this fraction of L
#: (and at least over every pair of coils that carry or change current together).
MUTUAL_TOLERANCE = 1e-4
#: Neighbours whose coupling is computed at once while looking for the tolerance.
_BLOCK = 16

_PER_COIL = ("peak_voltage", "switch_on_voltage", "switch_off_voltage", "running_voltage", "induced_voltage",
             "peak_current", "current_density", "current_squared_time", "peak_power", "energy", "temperature_rise",
             "average_power", "steady_temperature_rise", "axial_force", "hoop_stress")


@dataclasses.dataclass(frozen=True, eq=False)
class DriveLoad:
    """Whole-shot loads of every coil of a row, with verdicts against limits.

    Attributes
    ----------
    times : ndarray, shape (T + 2,)
        The table times [s] with one zero-current sample ``rise_time`` before and after.
    inductance, resistance : float
        Self-inductance [H] and resistance [Ohm] of one coil (all equal).
    mutual, mutual_gradient : ndarray, shape (K,)
        M [H] and dM/dz [H/m] of coil k with coil k + s, s = 1..K (``neighbours`` = K).
    wire_area : float
        Copper section of one turn [m^2], fill w h / N.
    peak_voltage, switch_on_voltage, switch_off_voltage, running_voltage : ndarray, shape (count,)
        Largest |V| [V] over the shot, during the switch-on ramp, during the switch-off ramp
        and between them (over the table itself).
    induced_voltage : ndarray, shape (count,)
        Largest |L dI/dt + sum M dI/dt| [V] over the shot, ramps included (without I R).
    peak_current [A], current_density [A/m^2] : ndarray, shape (count,)
        Largest |I| per turn and |I| / wire_area.
    current_squared_time [A^2 s], peak_power [W], energy [J], temperature_rise [K] : ndarray, shape (count,)
        Integral of I^2 dt, R I_max^2, R times the integral, and the adiabatic rise per shot.
    average_power [W], steady_temperature_rise [K] : ndarray, shape (count,)
        ``energy * repetition_rate`` and its steady rise over the sink.
    axial_force : ndarray, shape (count,)
        Largest |net axial force| [N] on each coil from the others.
    neighbour_force : ndarray, shape (count - 1,)
        Largest |force| [N] between coils k and k + 1.
    hoop_stress : ndarray, shape (count,)
        Largest |hoop stress| [Pa] in the copper.
    hottest, most_stressed : int
        Index of the coil with the largest ``current_squared_time`` and largest ``peak_voltage``.
    verdicts : tuple of Verdict
        Worst value of each quantity over the row against ``limits``.
    limits : HardwareLimits
    settings : dict
        The assumptions: rise_time, fill_factor, resistivity, density, specific_heat,
        repetition_rate, heat_transfer, cooled_area (SI).
    caution : str
    """

    times: FloatArray
    inductance: float
    resistance: float
    mutual: FloatArray
    mutual_gradient: FloatArray
    wire_area: float
    peak_voltage: FloatArray
    switch_on_voltage: FloatArray
    switch_off_voltage: FloatArray
    running_voltage: FloatArray
    induced_voltage: FloatArray
    peak_current: FloatArray
    current_density: FloatArray
    current_squared_time: FloatArray
    peak_power: FloatArray
    energy: FloatArray
    temperature_rise: FloatArray
    average_power: FloatArray
    steady_temperature_rise: FloatArray
    axial_force: FloatArray
    neighbour_force: FloatArray
    hoop_stress: FloatArray
    hottest: int
    most_stressed: int
    verdicts: tuple[Verdict, ...]
    limits: HardwareLimits
    settings: dict[str, float]
    caution: str = ELECTRICAL_CAUTION

    @property
    def neighbours(self) -> int:
        """K, the farthest neighbour whose mutual terms were summed."""
        return int(self.mutual.size)

    @property
    def passed(self) -> bool:
        """Whether every quantity is within its limit."""
        return all(v.passed for v in self.verdicts)

    def coil_numbers(self, k: int) -> dict[str, float]:
        """The per-coil numbers (SI, names of the attributes) of coil ``k``."""
        index = as_integer(k, "k", 0, self.peak_voltage.size - 1)
        return {name: float(getattr(self, name)[index]) for name in _PER_COIL}

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready numbers in SI with a ``units`` map, the verdicts and the caution."""
        out: dict[str, Any] = {
            "inductance": self.inductance,
            "resistance": self.resistance,
            "mutual": self.mutual.tolist(),
            "mutual_gradient": self.mutual_gradient.tolist(),
            "neighbours": self.neighbours,
            "wire_area": self.wire_area,
            "hottest": self.hottest,
            "most_stressed": self.most_stressed,
            "hottest_coil": self.coil_numbers(self.hottest),
            "most_stressed_coil": self.coil_numbers(self.most_stressed),
            "neighbour_force": float(self.neighbour_force.max()) if self.neighbour_force.size else 0.0,
            "passed": self.passed,
            "verdicts": [v.to_dict() for v in self.verdicts],
            "limits": self.limits.to_dict(),
            "settings": dict(self.settings),
            "assumptions": self.assumptions,
            "caution": self.caution,
        }
        out["units"] = {**UNITS, "limits": dict(LIMIT_UNITS)}
        return out

    def _rows(self) -> list[tuple[str, str]]:
        rows = [("coil inductance", f"{self.inductance * 1e6:.4g} µH, resistance {self.resistance:.4g} Ohm"),
                ("hottest coil", f"{self.hottest}"), ("most stressed coil", f"{self.most_stressed}")]
        for v in self.verdicts:
            state = "pass" if v.passed else "FAIL"
            rows.append((v.quantity.replace("_", " "), f"{v.value:.4g} {v.unit} (limit {v.limit:.4g}, {state})"))
            if v.advice:
                rows.append(("  advice", v.advice))
        return rows

    def summary(self) -> list[str]:
        """Readable lines: the numbers against their limits, the advice, the assumptions, the caution last."""
        return [f"{name}: {value}" for name, value in self._rows()] + [self.assumptions, self.caution]

    @property
    def assumptions(self) -> str:
        """The model behind the numbers, in one line."""
        s = self.settings
        return (f"assumptions: currents linear between table times, switched on and off by linear ramps of "
                f"{s['rise_time'] * 1e6:.4g} µs; copper fill {s['fill_factor']:.3g}, resistivity constant "
                f"({s['resistivity']:.3g} Ohm m; copper's rises ~0.4 %/K), no cooling within a shot; "
                f"{s['repetition_rate']:.4g} shots/s cooled through {s['heat_transfer']:.4g} W/(m^2 K) over the "
                "winding's outer cylinder (common practice, no source)")

    def _repr_html_(self) -> str:
        return html_table("Coil-row hardware load",
                          [*self._rows(), ("assumptions", self.assumptions), ("caution", self.caution)])


#: SI unit of each number of :meth:`DriveLoad.to_dict` and of each per-coil number.
UNITS: dict[str, str] = {
    "inductance": "H", "resistance": "Ohm", "mutual": "H", "mutual_gradient": "H/m", "wire_area": "m^2",
    "neighbour_force": "N", "peak_voltage": "V", "switch_on_voltage": "V", "switch_off_voltage": "V",
    "running_voltage": "V", "induced_voltage": "V",
    "peak_current": "A", "current_density": "A/m^2", "current_squared_time": "A^2 s", "peak_power": "W",
    "energy": "J", "temperature_rise": "K", "average_power": "W", "steady_temperature_rise": "K",
    "axial_force": "N", "hoop_stress": "Pa", "rise_time": "s", "fill_factor": "1", "resistivity": "Ohm m",
    "density": "kg/m^3", "specific_heat": "J/(kg K)", "repetition_rate": "Hz", "heat_transfer": "W/(m^2 K)",
    "cooled_area": "m^2",
}


def _span(mask: NDArray[np.bool_]) -> int:
    """Largest index distance between two True entries of one row of ``mask`` (T, count)."""
    rows = mask[np.any(mask, axis=1)]
    if rows.size == 0:
        return 0
    first = np.argmax(rows, axis=1)
    last = rows.shape[1] - 1 - np.argmax(rows[:, ::-1], axis=1)
    return int(np.max(last - first))


def _toeplitz(count: int, diagonal: float, weights: FloatArray, sign: float) -> FloatArray:
    """(count, count) matrix C with C[k, k] = diagonal, C[k - s, k] = weights[s-1] and
    C[k + s, k] = sign weights[s-1] for s = 1..K, zero beyond: ``values @ C`` sums, for each
    coil k, its own value times ``diagonal`` and weights[s-1] (values[k - s] + sign values[k + s])."""
    index = np.arange(count)
    offset = index[None, :] - index[:, None]  # k - j for row j, column k
    matrix = np.zeros((count, count))
    matrix[offset == 0] = diagonal
    for s, weight in enumerate(weights, start=1):
        matrix[offset == s] = weight
        matrix[offset == -s] = sign * weight
    return matrix


def _couplings(array: CoilArray, inductance: float, span: int, fixed: int | None
               ) -> tuple[FloatArray, FloatArray, FloatArray]:
    """M_s [H], dM_s/dz [H/m] and dM_s/dR [H/m] of coil 0 with coil s, s = 1..K, and (first
    in the last) dL/dR / 2, with K as :func:`drive_load` says for ``neighbours``."""
    first = array.coil(0, 1.0)
    last = array.count - 1 if fixed is None else fixed
    mutual, gradient = np.zeros(0), np.zeros(0)
    while mutual.size < last:  # blocks of neighbours until the tolerance is met
        shifts = array.pitch * np.arange(mutual.size + 1, min(last, mutual.size + _BLOCK) + 1)
        block, block_gradient = shifted_mutual(first, first, shifts)
        mutual, gradient = np.concatenate((mutual, block)), np.concatenate((gradient, block_gradient))
        if fixed is None and mutual.size >= span:
            small = np.flatnonzero(np.abs(mutual[span:]) < MUTUAL_TOLERANCE * inductance)
            if small.size:
                mutual, gradient = mutual[: span + small[0] + 1], gradient[: span + small[0] + 1]
                break
    own, radial = radius_slopes(first, array.pitch * np.arange(1, mutual.size + 1))
    return mutual, gradient, np.concatenate(([0.5 * own], radial))


def _voltages(slope: FloatArray, amps: FloatArray, coupling: FloatArray, resistance: float) -> dict[str, FloatArray]:
    """Largest |V| [V] per coil over the shot, the two ramps and the table between them."""
    induced = slope @ coupling  # (T + 1, count), constant over each interval
    buffer = np.empty_like(induced)
    ends = []
    for currents in (amps[:-1], amps[1:]):  # |V| is largest at an end of an interval
        np.multiply(currents, resistance, out=buffer)
        buffer += induced
        np.abs(buffer, out=buffer)
        ends.append((buffer[0].copy(), buffer[-1].copy(), buffer[1:-1].max(axis=0, initial=0.0)))
    switch_on, switch_off, running = (np.maximum(start, end) for start, end in zip(*ends))
    return {"peak_voltage": np.maximum(np.maximum(switch_on, switch_off), running), "switch_on_voltage": switch_on,
            "switch_off_voltage": switch_off, "running_voltage": running,
            "induced_voltage": np.abs(induced).max(axis=0)}


def drive_load(array: CoilArray, times: ArrayLike, currents: ArrayLike, *, rise_time: float,
               fill_factor: float = DEFAULT_FILL_FACTOR, resistivity: float = COPPER_RESISTIVITY,
               density: float = COPPER_DENSITY, specific_heat: float = COPPER_SPECIFIC_HEAT,
               repetition_rate: float = DEFAULT_REPETITION_RATE, heat_transfer: float = DEFAULT_HEAT_TRANSFER,
               limits: HardwareLimits | None = None, neighbours: int | None = None) -> DriveLoad:
    """Voltages, heating and forces of every coil of ``array`` over one shot of ``currents``.

    Parameters
    ----------
    array : CoilArray
        The row; ``width`` and ``height`` must be > 0.
    times : array_like, shape (T,)
        Strictly increasing table times [s].
    currents : array_like, shape (T, count)
        Current per turn of every coil [A] at ``times`` (e.g. ``CurrentPlan.currents``),
        linear in between.
    rise_time : float
        Switch-on and switch-off ramp [s], > 0: a zero-current sample is added ``rise_time``
        before the first and after the last time.
    fill_factor : float, default 0.6
        Copper fraction of the winding section, in (0, 1].
    resistivity [Ohm m], density [kg/m^3], specific_heat [J/(kg K)] : float
        The conductor; copper at 20 °C by default.
    repetition_rate : float, default 10.0
        Shots per second [Hz], > 0 and at most one per shot length.
    heat_transfer : float, default 500.0
        Cooling [W/(m^2 K)] over the winding's outer cylinder 2 pi (R + w/2) h to a sink at
        room temperature (common practice, no source).
    limits : HardwareLimits, optional
        Defaults to ``HardwareLimits()``.
    neighbours : int, optional
        K, the farthest neighbour whose mutual terms and forces are summed. By default at
        least the largest distance between two coils that change current in one table
        interval or carry current at one time (no term between driven coils is left out), and
        out to the first neighbour with M_K < 1e-4 L (:data:`MUTUAL_TOLERANCE`), for the
        voltage induced in idle coils.

    Returns
    -------
    DriveLoad

    Notes
    -----
    Voltage: V_k = L dI_k/dt + sum_(0 < |s| <= K) M_s dI_(k+s)/dt + R I_k, with L and M_s of
    the wound coils (:func:`~tiltwell.physics.inductance.coil_self_inductance`,
    :func:`~tiltwell.physics.inductance.shifted_mutual`); dI/dt is constant on each
    interval, so |V| peaks at an interval end and both ends are evaluated. A row plan has at
    most ``active`` coils carrying current at once, so the driven coils are all within
    ``active`` (+1 where the window moves on within an interval) of each other, and every
    such pair is summed. Beyond that M_s falls as (s pitch)^-3 once s pitch exceeds the
    radius, so the neglected terms, each below 1e-4 L, sum to below ~(K/2) 1e-4 L dI/dt (the
    dipole tail): ~2e-3 of a switching neighbour's L dI/dt for K ~ 30, in idle coils only.

    Heating: the exact integral of I^2 for linear segments, R = rho N 2 pi R_c / A_w,
    A_w = fill w h / N, the adiabatic rise rho integral(I^2) / (A_w^2 d c) (resistivity
    constant), average power energy f, steady rise average power /
    (heat_transfer 2 pi (R_c + w/2) h).

    Forces, at the table samples: the force on coil k + s from coil k is
    I_k I_(k+s) dM_s/dz. Hoop stress: the thin-ring sigma = J B R (Wilson, Superconducting
    Magnets, ch. on mechanical stress; from memory), J = I_k / A_w, with B the section
    average of r B_z / R_c on coil k by virtual work, B = sum_j I_j dM_kj/dR_k / (2 pi N R_c)
    (dL/dR / 2 for j = k; :func:`~tiltwell.physics.inductance.radius_slopes`); a compressive
    stress counts by its magnitude.

    Cost: three (T, count) x (count, count) products and a few passes over the table;
    0.13 s for 130 coils and 0.27 s for 300 coils at 1e4 times (benchmarks/bench_drive.py).
    """
    check_coil_array(array)
    if array.width <= 0.0 or array.height <= 0.0:
        raise TiltwellError(f"array width and height [m] must be > 0 (a winding of finite section); "
                            f"got {array.width!r} x {array.height!r}")
    t = as_increasing(times, "times", "s", min_size=1)
    table = as_finite_array(currents, "currents", "A", ndim=2)
    if table.shape != (t.size, array.count):
        raise TiltwellError(f"currents [A] must have shape ({t.size}, {array.count}) (times x coils); "
                            f"got {table.shape}")
    rise = as_scalar(rise_time, "rise_time", "s", low=0.0, low_open=True)
    fill = as_scalar(fill_factor, "fill_factor", "", low=0.0, high=1.0, low_open=True)
    rho = as_scalar(resistivity, "resistivity", "Ohm m", low=0.0, low_open=True)
    mass_density = as_scalar(density, "density", "kg/m^3", low=0.0, low_open=True)
    heat = as_scalar(specific_heat, "specific_heat", "J/(kg K)", low=0.0, low_open=True)
    shot = float(t[-1] - t[0]) + 2.0 * rise
    rate = as_scalar(repetition_rate, "repetition_rate", "Hz", low=0.0, high=1.0 / shot, low_open=True)
    cooling = as_scalar(heat_transfer, "heat_transfer", "W/(m^2 K)", low=0.0, low_open=True)
    limits = HardwareLimits() if limits is None else limits
    if not isinstance(limits, HardwareLimits):
        raise TiltwellError(f"limits must be HardwareLimits; got {type(limits).__name__}")

    time = np.concatenate(([t[0] - rise], t, [t[-1] + rise]))
    amps = np.vstack((np.zeros(array.count), table, np.zeros(array.count)))  # (T + 2, count)
    dt = np.diff(time)
    slope = np.diff(amps, axis=0) / dt[:, None]  # (T + 1, count)
    span = max(_span(slope != 0.0), _span(amps != 0.0))
    fixed = None if neighbours is None else as_integer(neighbours, "neighbours", 0, array.count - 1)

    turns, radius = array.turns, array.radius
    inductance = coil_self_inductance(array.coil(0, 1.0))
    mutual, gradient, radial = _couplings(array, inductance, span, fixed)
    reach = mutual.size
    wire_area = fill * array.width * array.height / turns
    resistance = rho * turns * 2.0 * math.pi * radius / wire_area

    voltages = _voltages(slope, amps, _toeplitz(array.count, inductance, mutual, 1.0), resistance)
    before, after = amps[:-1], amps[1:]
    action = dt @ (before * (before + after) + after * after) / 3.0  # exact for linear segments
    peak_current = np.abs(amps).max(axis=0)
    energy = resistance * action
    copper_mass = mass_density * fill * array.width * array.height * 2.0 * math.pi * radius
    cooled_area = 2.0 * math.pi * (radius + 0.5 * array.width) * array.height
    average_power = energy * rate

    # Net axial force on coil k: from k - s (k is the far coil of that pair) minus from k + s.
    pair = (amps @ _toeplitz(array.count, 0.0, gradient, -1.0)) * amps
    neighbour = (np.abs(amps[:, :-1] * amps[:, 1:]).max(axis=0) * abs(gradient[0]) if reach >= 1
                 else np.zeros(array.count - 1))
    field = amps @ (_toeplitz(array.count, radial[0], radial[1:], 1.0) / (2.0 * math.pi * turns * radius))
    hoop = np.abs(amps * field).max(axis=0) * radius / wire_area

    numbers = {
        **voltages,
        "peak_current": peak_current, "current_density": peak_current / wire_area, "current_squared_time": action,
        "peak_power": resistance * peak_current**2, "energy": energy, "temperature_rise": energy / (copper_mass * heat),
        "average_power": average_power, "steady_temperature_rise": average_power / (cooling * cooled_area),
        "axial_force": np.abs(pair).max(axis=0), "hoop_stress": hoop,
    }
    worst = {"voltage": float(voltages["peak_voltage"].max()), "current": float(peak_current.max()),
             **{name: float(numbers[name].max()) for name in ("current_density", "temperature_rise",
                                                                "steady_temperature_rise", "hoop_stress",
                                                                "axial_force")}}
    context = ScalingContext(turns, worst["current"], worst["voltage"], rate, cooling)
    settings = {"rise_time": rise, "fill_factor": fill, "resistivity": rho, "density": mass_density,
                "specific_heat": heat, "repetition_rate": rate, "heat_transfer": cooling, "cooled_area": cooled_area}
    for value in (time, mutual, gradient, neighbour, *numbers.values()):
        value.flags.writeable = False
    return DriveLoad(time, inductance, resistance, mutual, gradient, wire_area, neighbour_force=neighbour,
                     hottest=int(np.argmax(action)), most_stressed=int(np.argmax(voltages["peak_voltage"])),
                     verdicts=judge(worst, limits, context), limits=limits, settings=settings, **numbers)
