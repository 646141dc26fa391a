"""Whole-shot loads of a coil row (tiltwell.coils.drive) and the limits' verdicts and advice,
against references named beside each check: L I / t_rise and I R by hand for an isolated coil,
M dI/dt with M from Maxwell's closed form summed over a fine filament grid, I^2 R t / (m c)
by hand, Maxwell's thin-ring self-inductance for the hoop stress (thin-ring formula), magpylib's
Biot-Savart force, and the advice recomputed."""

from __future__ import annotations

import dataclasses
import json
import math

import magpylib
import numpy as np
import pytest
import scipy.constants as sc
from scipy.special import ellipe, ellipk

import tiltwell
from tiltwell import CoilArray, HardwareLimits, TiltwellError
from tiltwell.coils.drive import drive_load
from tiltwell.physics.limits import ScalingContext, judge, turns_range

MU0 = sc.mu_0  # CODATA, from scipy.constants
RHO_CU, DENSITY_CU, HEAT_CU = 1.68e-8, 8960.0, 385.0  # copper at 20 °C, CRC Handbook (from memory)
#: Maxwell's self-distance of a square section, 0.44705 of its side (Treatise vol. 2, s. 692;
#: from memory).
SQUARE_GMD = 0.44705
#: The thin-ring formulas neglect O((side / R)^2) (measured ~0.07 (side/R)^2 for L).
RING_RTOL = 1e-3

RADIUS, SIDE, TURNS, FILL = 0.02, 0.001, 40, 0.6


def isolated(pitch: float = 1.0, count: int = 3) -> CoilArray:
    """A row whose coils sit far apart (1 m), with a small square winding."""
    return CoilArray(count, pitch, RADIUS, turns=TURNS, width=SIDE, height=SIDE, active=2)


def ring_inductance_by_hand() -> float:
    """Maxwell's thin ring of square section: mu0 N^2 R (ln(8 R / g) - 2), g = 0.44705 side."""
    return MU0 * TURNS**2 * RADIUS * (math.log(8 * RADIUS / (SQUARE_GMD * SIDE)) - 2)


def resistance_by_hand() -> float:
    wire = FILL * SIDE * SIDE / TURNS
    return RHO_CU * TURNS * 2 * math.pi * RADIUS / wire


def constant_table(current: float, count: int = 3, coil: int = 0, points: int = 11, duration: float = 1e-3
                   ) -> tuple[np.ndarray, np.ndarray]:
    times = np.linspace(0.0, duration, points)
    table = np.zeros((points, count))
    table[:, coil] = current
    return times, table


def test_switching_voltage_of_isolated_coil_is_l_i_over_rise_time() -> None:
    # Reference: a linear ramp of an isolated coil, V = L I / t_rise + I R at its top (L by
    # Maxwell's square-section ring formula, R = rho N 2 pi R / A by hand); flat top: I R.
    current, rise = 50.0, 2e-5
    times, table = constant_table(current)
    load = drive_load(isolated(), times, table, rise_time=rise, fill_factor=FILL, repetition_rate=1.0)
    inductive, resistive = ring_inductance_by_hand() * current / rise, resistance_by_hand() * current
    assert load.switch_on_voltage[0] == pytest.approx(inductive + resistive, rel=RING_RTOL)
    assert load.switch_off_voltage[0] == pytest.approx(max(inductive, abs(resistive - inductive)), rel=RING_RTOL)
    assert load.running_voltage[0] == pytest.approx(resistive, rel=1e-12)
    assert load.peak_voltage[0] == pytest.approx(inductive + resistive, rel=RING_RTOL)
    assert load.resistance == pytest.approx(resistance_by_hand(), rel=1e-12)
    assert load.most_stressed == 0 and load.hottest == 0


def maxwell_grid_mutual(distance: float, n: int = 40) -> float:
    """M of two equal windings ``distance`` apart: Maxwell's closed form (scipy elliptic
    integrals) averaged over n x n midpoint filament grids of both, times N^2."""
    r = RADIUS - SIDE / 2 + SIDE * (np.arange(n) + 0.5) / n
    z = -SIDE / 2 + SIDE * (np.arange(n) + 0.5) / n
    rr, zz = (v.ravel() for v in np.meshgrid(r, z, indexing="ij"))
    a, b, d = rr[:, None], rr[None, :], distance + zz[None, :] - zz[:, None]
    m = 4 * a * b / ((a + b) ** 2 + d**2)
    k = np.sqrt(m)
    return float(TURNS**2 * np.mean(MU0 * np.sqrt(a * b) * ((2 / k - k) * ellipk(m) - 2 / k * ellipe(m))))


def test_idle_neighbour_sees_m_di_dt() -> None:
    # Reference: the induced voltage M dI/dt in an idle coil next to a ramping one, M from
    # Maxwell's closed form over fine filament grids (independent of the code's quadrature).
    pitch, current, rise = 0.003, 50.0, 2e-5
    times, table = constant_table(current)
    load = drive_load(isolated(pitch), times, table, rise_time=rise, fill_factor=FILL, repetition_rate=1.0)
    assert load.switch_on_voltage[1] == pytest.approx(maxwell_grid_mutual(pitch) * current / rise, rel=1e-5)
    assert load.switch_on_voltage[2] == pytest.approx(maxwell_grid_mutual(2 * pitch) * current / rise, rel=1e-5)


def test_opposite_ramps_of_neighbours_lower_the_voltage() -> None:
    # Reference: V_0 = (L - M) I / t_rise + I R for two coils ramped with opposite currents
    # (anti-Helmholtz-like pair), L by Maxwell's ring formula, M as in the test above.
    pitch, current, rise = 0.003, 50.0, 2e-5
    times, table = constant_table(current)
    table[:, 1] = -current
    load = drive_load(isolated(pitch), times, table, rise_time=rise, fill_factor=FILL, repetition_rate=1.0)
    inductive = (ring_inductance_by_hand() - maxwell_grid_mutual(pitch)) * current / rise
    expected = inductive + resistance_by_hand() * current
    assert load.switch_on_voltage[0] == pytest.approx(expected, rel=RING_RTOL)


def test_temperature_rise_is_i2_r_t_over_m_c() -> None:
    # Reference: by hand, integral of I^2 for a flat top of D with linear ramps of t_r each
    # side, I^2 (D + 2 t_r / 3); heat R times it; rise E / (m c), m = d fill w h 2 pi R.
    current, rise, duration = 30.0, 1e-4, 2e-3
    times, table = constant_table(current, duration=duration)
    load = drive_load(isolated(), times, table, rise_time=rise, fill_factor=FILL, repetition_rate=5.0,
                      heat_transfer=200.0)
    action = current**2 * (duration + 2 * rise / 3)
    heat = resistance_by_hand() * action
    mass = DENSITY_CU * FILL * SIDE * SIDE * 2 * math.pi * RADIUS
    assert load.current_squared_time[0] == pytest.approx(action, rel=1e-12)
    assert load.energy[0] == pytest.approx(heat, rel=1e-12)
    assert load.temperature_rise[0] == pytest.approx(heat / (mass * HEAT_CU), rel=1e-12)
    assert load.peak_power[0] == pytest.approx(resistance_by_hand() * current**2, rel=1e-12)
    assert load.current_density[0] == pytest.approx(current * TURNS / (FILL * SIDE * SIDE), rel=1e-12)
    # Steady rise: 5 shots/s of that heat through 200 W/(m^2 K) over the outer cylinder.
    outer = 2 * math.pi * (RADIUS + SIDE / 2) * SIDE
    assert load.steady_temperature_rise[0] == pytest.approx(5.0 * heat / (200.0 * outer), rel=1e-12)


def test_hoop_stress_of_isolated_coil_matches_thin_ring_formula() -> None:
    # Reference: the thin-ring formula sigma = B I R / A (Wilson, Superconducting Magnets, ch.
    # on stresses; from memory) with B the ring's mean self-field from virtual work on
    # Maxwell's square-section ring, B = N I (dL_1/dR) / (4 pi R), dL_1/dR = mu0 (ln(8R/g) - 1).
    current = 80.0
    times, table = constant_table(current)
    load = drive_load(isolated(), times, table, rise_time=1e-5, fill_factor=FILL, repetition_rate=1.0)
    field = TURNS * current * MU0 * (math.log(8 * RADIUS / (SQUARE_GMD * SIDE)) - 1) / (4 * math.pi * RADIUS)
    expected = field * current * RADIUS / (FILL * SIDE * SIDE / TURNS)
    assert load.hoop_stress[0] == pytest.approx(expected, rel=RING_RTOL)


def test_hoop_stress_from_a_neighbour_matches_magpylib_field() -> None:
    # Reference: sigma = J B R with B the field of the neighbour from magpylib (Circle
    # filaments of its winding, section average of r B_z / R over coil 0, 8 x 8 Gauss points),
    # plus the self part of the test above; the windings are 5 sides apart.
    pitch, i0, i1 = 5 * SIDE, 80.0, 60.0
    times, table = constant_table(i0)
    table[:, 1] = i1
    array = isolated(pitch)
    load = drive_load(array, times, table, rise_time=1e-5, fill_factor=FILL, repetition_rate=1.0)
    radii, planes, currents = array.coil(1, i1).loops()
    sources = magpylib.Collection(*(magpylib.current.Circle(current=c, diameter=2 * r, position=(0, 0, z))
                                    for r, z, c in zip(radii, planes, currents)))
    nodes, weights = np.polynomial.legendre.leggauss(8)
    rr, zz = np.meshgrid(RADIUS + 0.5 * SIDE * nodes, 0.5 * SIDE * nodes, indexing="ij")
    points = np.stack((rr.ravel(), np.zeros(rr.size), zz.ravel()), axis=1)
    b_z = sources.getB(points)[:, 2]
    mean = float(np.sum(np.outer(weights, weights).ravel() / 4 * b_z * rr.ravel() / RADIUS))
    own = TURNS * i0 * MU0 * (math.log(8 * RADIUS / (SQUARE_GMD * SIDE)) - 1) / (4 * math.pi * RADIUS)
    wire = FILL * SIDE * SIDE / TURNS
    assert load.hoop_stress[0] == pytest.approx((own + mean) * i0 * RADIUS / wire, rel=RING_RTOL)


def test_axial_force_matches_magpylib_biot_savart() -> None:
    # Reference: magpylib's field of the filaments of coil 0 and F = I closed integral of
    # dl x B over the filaments of coil 1 (discrete sum of 400 segments per loop), both on
    # the 8 x 8 Gauss grid the row's sums use.
    pitch, i0, i1 = 0.002, 70.0, -40.0
    times, table = constant_table(i0)
    table[:, 1] = i1
    array = isolated(pitch)
    load = drive_load(array, times, table, rise_time=1e-5, fill_factor=FILL, repetition_rate=1.0)
    r0, z0, c0 = dataclasses.replace(array.coil(0, i0), filaments=8).loops()
    sources = magpylib.Collection(*(magpylib.current.Circle(current=c, diameter=2 * r, position=(0, 0, z))
                                    for r, z, c in zip(r0, z0, c0)))
    phi = 2 * np.pi * np.arange(400) / 400
    force = 0.0
    for r, z, c in zip(*dataclasses.replace(array.coil(1, i1), filaments=8).loops()):
        where = np.stack((r * np.cos(phi), r * np.sin(phi), np.full(phi.size, z)), axis=1)
        dl = np.stack((-np.sin(phi), np.cos(phi), np.zeros(phi.size)), axis=1) * r * 2 * np.pi / phi.size
        force += c * float(np.sum(np.cross(dl, sources.getB(where))[:, 2]))
    # Coil 1 is pushed away (opposite currents repel): it feels +force, coil 0 the reaction.
    assert force > 0
    assert load.neighbour_force[0] == pytest.approx(abs(force), rel=1e-6)
    assert load.axial_force[1] == pytest.approx(abs(force), rel=1e-6)
    assert load.axial_force[0] == pytest.approx(abs(force), rel=1e-6)


def test_default_neighbours_match_all_pairs() -> None:
    # Reference: the sum over every pair of coils of the row (neighbours = count - 1); the
    # default stops where M falls below 1e-4 L, and keeps all pairs that carry current at once:
    # coils that carry current agree to rounding, idle ones to 2e-3 of the largest voltage.
    array = CoilArray(48, 0.012, 0.019, turns=20, width=0.006, height=0.01, active=4)
    schedule = tiltwell.constant_deceleration(300.0, 150.0, length=0.2)
    times = np.linspace(0.0, schedule.duration, 800)
    plan = tiltwell.waveforms(array, schedule, 40.0, times)
    default = drive_load(array, times, plan.currents, rise_time=5e-6)
    everything = drive_load(array, times, plan.currents, rise_time=5e-6, neighbours=array.count - 1)
    assert default.neighbours < array.count - 1
    driven = np.any(plan.currents != 0.0, axis=0)
    np.testing.assert_allclose(default.peak_voltage[driven], everything.peak_voltage[driven], rtol=1e-9)
    np.testing.assert_allclose(default.peak_voltage, everything.peak_voltage, rtol=0.0,
                               atol=2e-3 * everything.peak_voltage.max())
    np.testing.assert_allclose(default.axial_force, everything.axial_force, rtol=1e-9)
    np.testing.assert_allclose(default.hoop_stress, everything.hoop_stress, rtol=1e-9)


def test_verdicts_and_turns_advice_really_meet_the_limits() -> None:
    # Reference: the advice recomputed: N' turns at I N / N' keep the ampere-turns; the whole
    # computation repeated with them must meet the voltage and current limits.
    array = CoilArray(24, 0.012, 0.019, turns=200, width=0.006, height=0.01, active=4)
    schedule = tiltwell.constant_deceleration(300.0, 150.0, length=0.2)
    times = np.linspace(0.0, schedule.duration, 800)
    currents = tiltwell.waveforms(array, schedule, 40.0, times).currents
    limits = HardwareLimits(voltage=3000.0, current=1000.0)
    load = drive_load(array, times, currents, rise_time=5e-5, limits=limits)
    verdict = {v.quantity: v for v in load.verdicts}["voltage"]
    assert not verdict.passed and verdict.value > 3000.0
    assert verdict.margin == pytest.approx(3000.0 / verdict.value - 1, rel=1e-12)
    low, high = turns_range(ScalingContext(200, float(load.peak_current.max()), verdict.value, 10.0, 500.0), limits)
    assert low <= high < 200
    assert f"{high} turns" in verdict.advice
    fewer = CoilArray(24, 0.012, 0.019, turns=high, width=0.006, height=0.01, active=4)
    again = drive_load(fewer, times, currents * 200 / high, rise_time=5e-5, limits=limits)
    checks = {v.quantity: v for v in again.verdicts}
    assert checks["voltage"].passed and checks["current"].passed
    assert again.peak_voltage.max() == pytest.approx(verdict.value * high / 200, rel=1e-9)
    # Current density, heat and forces do not change at the same ampere-turns and copper area.
    assert again.current_density.max() == pytest.approx(load.current_density.max(), rel=1e-12)
    assert again.axial_force.max() == pytest.approx(load.axial_force.max(), rel=1e-9)


def test_judge_registry_gives_a_verdict_and_advice_per_quantity() -> None:
    # Reference: the scaling laws written out: J and sigma ~ 1 / area, rise per shot ~ 1 / area^2,
    # steady rise ~ f / h, force ~ (N I)^2.
    limits = HardwareLimits()
    values = {"current_density": 6e8, "temperature_rise": 40.0, "steady_temperature_rise": 80.0,
              "hoop_stress": 1e8, "axial_force": 800.0, "voltage": 10.0, "current": 10.0}
    verdicts = {v.quantity: v for v in judge(values, limits, ScalingContext(100, 10.0, 10.0, 10.0, 500.0))}
    assert "a 2x larger copper area" in verdicts["current_density"].advice
    assert "a 2x larger copper area" in verdicts["temperature_rise"].advice  # sqrt(40 / 10)
    assert "at most 5 Hz" in verdicts["steady_temperature_rise"].advice
    assert "1000 W/(m^2 K)" in verdicts["steady_temperature_rise"].advice
    assert "a 2x larger copper area" in verdicts["hoop_stress"].advice
    assert "0.5x the ampere-turns" in verdicts["axial_force"].advice  # sqrt(200 / 800)
    assert verdicts["voltage"].passed and verdicts["voltage"].advice == ""


def test_result_is_json_ready_and_keeps_the_caution() -> None:
    times, table = constant_table(50.0)
    load = drive_load(isolated(), times, table, rise_time=1e-5, repetition_rate=1.0)
    data = json.loads(json.dumps(load.to_dict(), allow_nan=False))  # strict JSON: no inf or NaN
    assert {v["quantity"]: v["margin"] for v in data["verdicts"]}["axial_force"] is None  # no force: no margin
    assert data["caution"] == tiltwell.ELECTRICAL_CAUTION
    assert data["units"]["peak_voltage"] == "V" and data["units"]["limits"]["hoop_stress"] == "Pa"
    assert data["hottest_coil"]["peak_current"] == 50.0
    assert "CAUTION" in load._repr_html_() and load.summary()[-1] == tiltwell.ELECTRICAL_CAUTION
    with pytest.raises(ValueError):
        load.peak_voltage[0] = 1.0


@pytest.mark.parametrize("change, message", [
    ({"rise_time": 0.0}, r"rise_time \[s\] must be finite and in \(0, inf\)"),
    ({"fill_factor": 1.5}, r"fill_factor must be finite and in \(0, 1\]"),
    ({"repetition_rate": 1e4}, r"repetition_rate \[Hz\] must be finite and in \(0, "),
    ({"heat_transfer": -1.0}, r"heat_transfer \[W/\(m\^2 K\)\]"),
    ({"neighbours": 5}, r"neighbours must be an integer in \[0, 2\]"),
    ({"limits": 3}, "limits must be HardwareLimits"),
])
def test_bad_input_names_the_argument(change: dict[str, object], message: str) -> None:
    times, table = constant_table(50.0)
    arguments: dict[str, object] = {"rise_time": 1e-5, "repetition_rate": 1.0, **change}
    with pytest.raises(TiltwellError, match=message):
        drive_load(isolated(), times, table, **arguments)  # type: ignore[arg-type]


def test_bad_tables_name_the_argument() -> None:
    times, table = constant_table(50.0)
    with pytest.raises(TiltwellError, match=r"currents \[A\] must have shape \(11, 3\)"):
        drive_load(isolated(), times, table[:, :2], rise_time=1e-5)
    with pytest.raises(TiltwellError, match=r"width and height \[m\] must be > 0"):
        drive_load(CoilArray(3, 1.0, RADIUS, active=2), times, table, rise_time=1e-5)
    with pytest.raises(TiltwellError, match=r"voltage \[V\] must be finite and in \(0, inf\)"):
        HardwareLimits(voltage=0.0)
