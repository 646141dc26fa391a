"""Deceleration schedule, coil timing, hardware estimates and time of flight, each checked
against a closed form, a general-purpose library or a brute-force computation named beside it."""

from __future__ import annotations

import csv
import math
import os
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest
from scipy import integrate

from tiltwell import TiltwellError, loop_field
from tiltwell.physics.hardware import (
    COPPER_DENSITY,
    COPPER_RESISTIVITY,
    COPPER_SPECIFIC_HEAT,
    ELECTRICAL_CAUTION,
    HardwareEstimate,
    hardware_estimate,
)
from tiltwell.coils.schedule import (
    CoilTiming,
    Schedule,
    arrival_histogram,
    arrival_times,
    coil_timing,
    constant_deceleration,
)

MU0 = 4e-7 * math.pi  # vacuum permeability to 1e-9 relative (pre-2019 exact SI value, from memory)

# v0, vf, a: invented demo numbers
SCHEDULES = {
    "stop": (500.0, 0.0, 1.25e5),
    "partial": (450.0, 50.0, 1.0e5),
    "gentle": (320.0, 120.0, 2.2e4),
}


def _schedule(key: str) -> Schedule:
    v0, vf, a = SCHEDULES[key]
    return constant_deceleration(v0, vf, deceleration=a)


# --- the schedule ---------------------------------------------------------------------


@pytest.mark.parametrize(
    ("speed", "length", "expected"),
    [(500.0, 1.0, 1.25e5), (400.0, 0.5, 1.6e5)],
    ids=["500m/s-in-1m", "400m/s-in-0.5m"],
)
def test_stopping_deceleration(speed: float, length: float, expected: float) -> None:
    """Stopping distance L = v^2 / (2 a) (uniform deceleration, any mechanics textbook;
    the two numbers are common practice, no source, and DESIGN.md's 1.6e5 m/s^2)."""
    schedule = constant_deceleration(speed, 0.0, length=length)
    assert schedule.deceleration == pytest.approx(expected, rel=1e-14)
    assert schedule.length == pytest.approx(length, rel=1e-14)
    # mean speed v0 / 2 over the stop: duration 2 L / v0 (4 ms and 2.5 ms)
    assert schedule.duration == pytest.approx(2.0 * length / speed, rel=1e-14)


def test_partial_deceleration_by_hand() -> None:
    """450 -> 50 m/s at 1e5 m/s^2: L = (450^2 - 50^2) / 2e5 = 1.0 m, T = 400 / 1e5 = 4 ms
    (arithmetic by hand); a second later... 1 ms after the end the trap is 50 mm further."""
    schedule = _schedule("partial")
    assert schedule.length == pytest.approx(1.0, rel=1e-14)
    assert schedule.duration == pytest.approx(4e-3, rel=1e-14)
    assert float(schedule.position(5e-3)) == pytest.approx(1.05, rel=1e-14)
    assert float(schedule.velocity(5e-3)) == 50.0


def test_stopped_trap_rests_after_the_end() -> None:
    schedule = _schedule("stop")
    later = schedule.duration * np.array([1.0, 1.5, 3.0])
    np.testing.assert_allclose(schedule.position(later), 1.0, rtol=1e-14)
    np.testing.assert_array_equal(schedule.velocity(later), 0.0)


@pytest.mark.parametrize("key", list(SCHEDULES))
def test_position_velocity_time_at_agree(key: str) -> None:
    """time_at inverts position; velocity is the derivative of position (central
    differences, an independent route); position(duration) = length."""
    schedule = _schedule(key)
    t = np.linspace(0.0, schedule.duration, 201)
    np.testing.assert_allclose(schedule.time_at(schedule.position(t)), t, rtol=1e-11, atol=1e-15)
    step = 1e-7 * schedule.duration
    inner = t[1:-1]
    slope = (schedule.position(inner + step) - schedule.position(inner - step)) / (2 * step)
    np.testing.assert_allclose(slope, schedule.velocity(inner), rtol=1e-7)
    assert float(schedule.position(schedule.duration)) == pytest.approx(schedule.length, rel=1e-14)
    assert float(schedule.velocity(schedule.duration)) == pytest.approx(schedule.final_velocity, abs=1e-9)


@pytest.mark.parametrize("key", list(SCHEDULES))
def test_position_against_solve_ivp(key: str) -> None:
    """Brute force: scipy.integrate.solve_ivp of dz/dt = v, dv/dt = -a (DOP853)."""
    schedule = _schedule(key)
    t = np.linspace(0.0, schedule.duration, 57)
    solution = integrate.solve_ivp(
        lambda _t, y: [y[1], -schedule.deceleration], (0.0, schedule.duration),
        [0.0, schedule.initial_velocity], method="DOP853", t_eval=t, rtol=1e-12, atol=1e-14,
    )
    assert solution.success
    np.testing.assert_allclose(schedule.position(t), solution.y[0], rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(schedule.velocity(t), solution.y[1], rtol=1e-10, atol=1e-9)


def test_vectorised_shapes_kept() -> None:
    schedule = _schedule("partial")
    t = np.full((2, 3), 1e-3)
    assert schedule.position(t).shape == (2, 3)
    assert schedule.velocity(t).shape == (2, 3)
    # z = 450 * 1e-3 - 1e5 * 1e-6 / 2 = 0.4 m (by hand)
    np.testing.assert_allclose(schedule.position(t), 0.4, rtol=1e-14)
    np.testing.assert_allclose(schedule.time_at(np.full((4,), 0.4)), 1e-3, rtol=1e-13)


# --- coil timing ----------------------------------------------------------------------

# key -> (schedule, pitch, first_coil, window, rise_time)
TIMINGS = {
    "default": ("stop", 0.02, None, 1.0, 0.0),
    "half-window-from-0": ("partial", 0.025, 0.0, 0.5, 0.0),
    "ramped": ("gentle", 0.03, 0.01, 1.0, 5e-6),
}


def _timing(key: str) -> tuple[Schedule, CoilTiming, float, float, float]:
    name, pitch, first, window, rise = TIMINGS[key]
    schedule = _schedule(name)
    timing = coil_timing(schedule, pitch, first_coil=first, window=window, rise_time=rise, peak_current=250.0)
    start = pitch / 2 if first is None else first
    return schedule, timing, pitch, start, window


def test_default_coil_row_by_hand() -> None:
    """1 m at a 20 mm pitch from 10 mm: 50 coils, 10 mm ... 990 mm (arithmetic by hand)."""
    _, timing, *_ = _timing("default")
    assert timing.positions.size == 50
    assert timing.positions[0] == pytest.approx(0.01, rel=1e-14)
    assert timing.positions[-1] == pytest.approx(0.99, rel=1e-14)


@pytest.mark.parametrize("key", list(TIMINGS))
def test_timing_table_follows_the_trajectory(key: str) -> None:
    """Closed form z(t) = v0 t - a t^2 / 2 at the tabulated times gives back the coil
    centres and the window edges z_k -/+ window * pitch, clipped to [0, length]."""
    schedule, timing, pitch, start, window = _timing(key)
    v0, a = schedule.initial_velocity, schedule.deceleration

    def z(t: np.ndarray) -> np.ndarray:
        return v0 * t - 0.5 * a * t**2

    expected = start + pitch * np.arange(timing.positions.size)
    np.testing.assert_allclose(timing.positions, expected, rtol=1e-14)
    assert expected[-1] <= schedule.length < expected[-1] + pitch
    np.testing.assert_allclose(z(timing.passing_times), expected, rtol=1e-10, atol=1e-13)
    np.testing.assert_allclose(z(timing.on_times), np.maximum(expected - window * pitch, 0.0), atol=1e-12)
    np.testing.assert_allclose(z(timing.off_times), np.minimum(expected + window * pitch, schedule.length), atol=1e-12)


@pytest.mark.parametrize("key", list(TIMINGS))
def test_coils_on_where_the_trap_is(key: str) -> None:
    """Brute force: on a fine time grid, the coils carrying current are exactly those
    whose centre lies within window * pitch of the trap centre (strictly inside the flat
    top when there are ramps)."""
    schedule, timing, pitch, _, window = _timing(key)
    t = np.linspace(0.0, schedule.duration, 3001)[1:-1]  # clipped ramps start at 0, end at T
    distance = np.abs(schedule.position(t)[None, :] - timing.positions[:, None])
    current = timing.current(t)
    assert current.shape == (timing.positions.size, t.size)
    clear = np.abs(distance - window * pitch) > 1e-9  # away from the window edges
    np.testing.assert_array_equal((current > 0)[clear], (distance < window * pitch)[clear])


def test_neighbours_overlap_with_window_one() -> None:
    """With window = 1, midway between two coils exactly those two are on (geometry:
    |z - z_j| < pitch only for the two neighbours)."""
    schedule, timing, pitch, *_ = _timing("default")
    middles = timing.positions[:-1] + pitch / 2
    on = timing.current(schedule.time_at(middles)) > 0
    np.testing.assert_array_equal(on.sum(axis=0), 2)


def test_rectangular_envelope() -> None:
    _, timing, *_ = _timing("default")
    on, off = timing.on_times[5], timing.off_times[5]
    width = off - on
    t = np.array([on - 1e-3 * width, on + 1e-3 * width, 0.5 * (on + off), off - 1e-3 * width, off + 1e-3 * width])
    np.testing.assert_array_equal(timing.current(t)[5], [0.0, 250.0, 250.0, 250.0, 0.0])


def test_trapezoid_ramps_are_linear() -> None:
    """Ramp samples lie on the line through (on, 0) and (on + rise, peak), and its mirror
    at the end (trapezoid by construction; values by hand)."""
    _, timing, *_ = _timing("ramped")
    rise, k = timing.rise_time, 3
    on, off = timing.on_times[k], timing.off_times[k]
    fractions = np.linspace(0.0, 1.0, 11)
    np.testing.assert_allclose(timing.current(on + fractions * rise)[k], 250.0 * fractions, atol=1e-9)
    np.testing.assert_allclose(timing.current(off - fractions * rise)[k], 250.0 * fractions, atol=1e-9)
    middle = np.linspace(on + rise, off - rise, 7)
    np.testing.assert_allclose(timing.current(middle)[k], 250.0, rtol=1e-12)
    outside = np.array([on - rise, off + rise])
    np.testing.assert_array_equal(timing.current(outside)[k], 0.0)


def test_an_end_window_cut_short_gives_a_triangle() -> None:
    """Coils 10 mm apart from 19.8 mm, each on within +-10 mm: the last (109.8 mm) has its
    window cut to the last 0.4 mm of a 100.2 mm schedule. A rise time that fits every whole
    window is accepted and that coil's pulse is the triangle of two ramps meeting
    mid-window, peak I (window / 2) / rise (geometry by hand); one too long for a whole
    window is refused."""
    schedule = constant_deceleration(100.0, 10.0, length=0.1002)
    timing = coil_timing(schedule, 0.01, first_coil=0.0198, count=10, window=1.0, rise_time=5e-5, peak_current=100.0)
    windows = timing.pulse_durations
    assert windows[-1] < 2 * timing.rise_time < windows[:-1].min()
    middle = 0.5 * (timing.on_times[-1] + timing.off_times[-1])
    peak = timing.current(np.array([middle]))[-1, 0]
    assert peak == pytest.approx(100.0 * 0.5 * windows[-1] / 5e-5, rel=1e-9)
    with pytest.raises(TiltwellError, match=r"rise_time \[s\]"):
        coil_timing(schedule, 0.01, first_coil=0.0198, count=10, window=1.0, rise_time=0.5 * windows[:-1].min() * 1.01,
                    peak_current=100.0)


# --- CSV export -----------------------------------------------------------------------


def _read_table(path: Path) -> tuple[list[str], list[str], list[list[str]]]:
    """Comments, header and rows through the csv module."""
    lines = path.read_text(encoding="utf-8").splitlines()
    comments = [line for line in lines if line.startswith("#")]
    rows = list(csv.reader(line for line in lines if not line.startswith("#")))
    return comments, rows[0], rows[1:]


def test_timing_csv_round_trip(tmp_path: Path) -> None:
    _, timing, *_ = _timing("ramped")
    path = tmp_path / "timing.csv"
    timing.to_csv(path)
    comments, header, rows = _read_table(path)
    assert header == ["index [1]", "position [m]", "passing_time [s]", "on_time [s]", "off_time [s]",
                      "peak_current [A]", "rise_time [s]"]
    assert len(comments) == 3 and path.read_text(encoding="utf-8").splitlines()[:3] == comments  # comments first
    assert ELECTRICAL_CAUTION in " ".join(line.lstrip("# ") for line in comments)
    assert "can kill" in ELECTRICAL_CAUTION and "licensed" in ELECTRICAL_CAUTION
    table = np.loadtxt([",".join(row) for row in rows], delimiter=",", ndmin=2)  # numpy's own parser
    np.testing.assert_array_equal(table[:, 0], np.arange(timing.positions.size))
    for column, values in enumerate([timing.positions, timing.passing_times, timing.on_times, timing.off_times], start=1):
        np.testing.assert_array_equal(table[:, column], values)
    np.testing.assert_array_equal(table[:, 5], 250.0)
    np.testing.assert_array_equal(table[:, 6], timing.rise_time)
    assert [p.name for p in tmp_path.iterdir()] == ["timing.csv"]  # no temporary file left


def test_waveform_csv_round_trip(tmp_path: Path) -> None:
    schedule, timing, *_ = _timing("ramped")
    times = np.linspace(0.0, schedule.duration, 40)
    path = tmp_path / "waveform.csv"
    timing.waveform_csv(path, times)
    comments, header, rows = _read_table(path)
    assert header[0] == "time [s]" and header[1:] == [f"coil_{k} [A]" for k in range(timing.positions.size)]
    assert any("can kill" in line for line in comments)
    table = np.array(rows, dtype=float)
    np.testing.assert_array_equal(table[:, 0], times)
    np.testing.assert_array_equal(table[:, 1:].T, timing.current(times))


def test_failed_replace_keeps_the_old_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    _, timing, *_ = _timing("default")
    path = tmp_path / "timing.csv"
    path.write_text("old contents\n", encoding="utf-8")

    def refuse(*_args: object) -> None:
        raise OSError("disk full (simulated)")

    monkeypatch.setattr(os, "replace", refuse)
    with pytest.raises(OSError, match="simulated"):
        timing.to_csv(path)
    assert path.read_text(encoding="utf-8") == "old contents\n"
    assert [p.name for p in tmp_path.iterdir()] == ["timing.csv"]


def test_bad_times_leave_the_old_file(tmp_path: Path) -> None:
    _, timing, *_ = _timing("default")
    path = tmp_path / "waveform.csv"
    path.write_text("old contents\n", encoding="utf-8")
    with pytest.raises(TiltwellError, match=r"times \[s\]"):
        timing.waveform_csv(path, [0.0, float("nan")])
    assert path.read_text(encoding="utf-8") == "old contents\n"


def test_missing_folder_is_an_error(tmp_path: Path) -> None:
    _, timing, *_ = _timing("default")
    with pytest.raises(TiltwellError, match="path"):
        timing.to_csv(tmp_path / "absent" / "timing.csv")
    assert not (tmp_path / "absent").exists()


# --- hardware estimates ---------------------------------------------------------------


def test_copper_constants_from_the_handbook() -> None:
    """CRC Handbook of Chemistry and Physics, copper at 20 °C (from memory)."""
    assert COPPER_RESISTIVITY == 1.68e-8
    assert COPPER_DENSITY == 8960.0
    assert COPPER_SPECIFIC_HEAT == 385.0


def _estimate(**changes: object) -> HardwareEstimate:
    arguments: dict[str, object] = dict(
        peak_current=300.0, pulse_duration=1e-3, wire_area=1e-6, turns=12,
        coil_radius=0.015, rise_time=2e-5, winding_radius=2e-3,
    )
    arguments.update(changes)
    return hardware_estimate(**arguments)  # type: ignore[arg-type]


def test_rectangular_heating_closed_form() -> None:
    """300 A for 1 ms in 1 mm^2 of copper: dT = I^2 t rho / (A^2 d c)
    = 9e4 * 1e-3 * 1.68e-8 / (1e-12 * 8960 * 385) = 0.43831 K (adiabatic heating, by hand)."""
    estimate = _estimate()
    assert estimate.temperature_rise == pytest.approx(0.4383117, rel=1e-6)


def test_heating_by_energy_balance() -> None:
    """Independent route: heat I^2 R t with R = rho l / A over the wire length
    l = 2 pi R N, into the heat capacity d A l c of that wire."""
    estimate = _estimate()
    wire_length = 2 * math.pi * 0.015 * 12
    resistance = 1.68e-8 * wire_length / 1e-6
    heat = 300.0**2 * resistance * 1e-3
    assert estimate.resistance == pytest.approx(resistance, rel=1e-12)
    assert estimate.temperature_rise == pytest.approx(heat / (8960 * 1e-6 * wire_length * 385), rel=1e-12)
    assert estimate.resistive_voltage == pytest.approx(300.0 * resistance, rel=1e-12)


@pytest.mark.parametrize(("duration", "rise"), [(1e-3, 2e-5), (4e-4, 1e-4), (2e-4, 1e-4)], ids=["short-ramps", "long-ramps", "triangle"])
def test_trapezoid_heating_against_numerical_integral(duration: float, rise: float) -> None:
    """Direct numerical integral of I(t)^2 (numpy.trapezoid on a fine grid) over the
    trapezoid (0, rise, duration - rise, duration) -> (0, I, I, 0), built with np.interp."""
    estimate = _estimate(pulse_duration=duration, rise_time=rise)
    t = np.linspace(0.0, duration, 400_001)
    current = np.interp(t, [0.0, rise, duration - rise, duration], [0.0, 300.0, 300.0, 0.0])
    action = np.trapezoid(current**2, t)
    assert estimate.temperature_rise_trapezoid == pytest.approx(action * 1.68e-8 / (1e-12 * 8960 * 385), rel=1e-8)
    assert estimate.pulse_energy == pytest.approx(action * estimate.resistance, rel=1e-8)


def test_envelope_heating_matches_estimate() -> None:
    """The coil-timing envelope integrated numerically (numpy.trapezoid) gives the same
    I^2 t as the estimate for that coil's pulse (two routes through the project)."""
    _, timing, *_ = _timing("ramped")
    k = 4
    t = np.linspace(timing.on_times[k], timing.off_times[k], 20_001)
    action = np.trapezoid(timing.current(t)[k] ** 2, t)
    estimate = hardware_estimate(250.0, float(timing.pulse_durations[k]), 1e-6, turns=1, coil_radius=0.02, rise_time=timing.rise_time, inductance=1e-6)
    assert estimate.temperature_rise_trapezoid == pytest.approx(action * 1.68e-8 / (1e-12 * 8960 * 385), rel=1e-7)


def _neumann_mutual(radius: float, offset: float) -> float:
    """Mutual inductance [H] of two coaxial circles of equal radius a distance ``offset``
    apart, from Neumann's formula M = mu0/(4 pi) double loop integral dl1.dl2 / |r1 - r2|,
    reduced to mu0 R^2 / 2 * integral_0^2pi cos(p) / sqrt(2 R^2 (1 - cos p) + d^2) dp and
    done by scipy.integrate.quad (split where the integrand peaks)."""

    def integrand(p: float) -> float:
        return math.cos(p) / math.sqrt(2 * radius**2 * (1 - math.cos(p)) + offset**2)

    split = min(50 * offset / radius, 1.0)
    near, _ = integrate.quad(integrand, 0.0, split, limit=200, epsabs=0.0, epsrel=1e-12)
    far, _ = integrate.quad(integrand, split, math.pi, limit=200, epsabs=0.0, epsrel=1e-12)
    return MU0 * radius**2 * (near + far)


@pytest.mark.parametrize("turns", [1, 25], ids=["one-turn", "25-turns"])
@pytest.mark.parametrize("ratio", [1e-3, 1e-2, 5e-2], ids=["a/R=1e-3", "a/R=1e-2", "a/R=5e-2"])
def test_inductance_against_neumann_integral(ratio: float, turns: int) -> None:
    """Self-inductance of a thin ring = mutual inductance between the wire's axis and a
    loop on its surface (Neumann's formula, numerically; the classic derivation, e.g.
    Landau & Lifshitz, Electrodynamics of Continuous Media, sec. 34, from memory), times
    N^2 for N coincident turns, plus the internal inductance of a round conductor with
    uniform current, mu0 / (8 pi) per unit length, i.e. mu0 R / 4 per turn squared (any
    magnetostatics text, e.g. Griffiths, Introduction to Electrodynamics, problem 7.x on the
    inductance of a coaxial wire; from memory). The two differ by O((a/R)^2 ln(8R/a));
    measured below 0.5 (a/R)^2."""
    radius = 0.02
    estimate = _estimate(turns=turns, coil_radius=radius, winding_radius=ratio * radius)
    expected = turns**2 * (_neumann_mutual(radius, ratio * radius) + MU0 * radius / 4)
    assert estimate.inductance == pytest.approx(expected, rel=0.5 * ratio**2)


@pytest.mark.parametrize(("turns", "radius"), [(1, 0.01), (40, 0.0125)], ids=["single", "40-turns"])
def test_central_field_against_loop_field(turns: int, radius: float) -> None:
    """mu0 N I / (2 R) against tiltwell.loop_field (elliptic integrals; checked in its
    own tests against magpylib) for N I ampere-turns at the centre."""
    estimate = _estimate(turns=turns, coil_radius=radius, winding_radius=radius / 10)
    field = loop_field(np.zeros((1, 3)), radius, 0.0, turns * 300.0)[0]
    assert estimate.central_field == pytest.approx(field[2], rel=1e-12)


def test_inductive_voltage_and_stored_energy() -> None:
    """V = L dI/dt on a linear ramp: 10 uH * 500 A / 50 us = 100 V; E = L I^2 / 2 = 1.25 J
    (by hand). Independent route: the steepest slope of the coil-timing envelope
    (numpy.gradient) times L."""
    estimate = hardware_estimate(500.0, 1e-3, 2e-6, turns=5, coil_radius=0.02, rise_time=5e-5, inductance=1e-5)
    assert estimate.inductive_voltage == pytest.approx(100.0, rel=1e-12)
    assert estimate.stored_energy == pytest.approx(1.25, rel=1e-12)
    timing = CoilTiming(np.array([0.0]), np.array([5e-4]), np.array([0.0]), np.array([1e-3]), 500.0, 5e-5)
    t = np.linspace(0.0, 1e-3, 100_001)
    slope = np.max(np.abs(np.gradient(timing.current(t)[0], t)))
    assert 1e-5 * slope == pytest.approx(estimate.inductive_voltage, rel=1e-6)


def test_summary_has_units_and_caution() -> None:
    estimate = _estimate()
    lines = estimate.summary()
    text = "\n".join(lines)
    for unit in (" A ", " K ", " V ", " T", " µH", " J", "mOhm"):
        assert unit in text
    assert "adiabatic" in text and "0.4 %/K" in text
    assert lines[-1] == ELECTRICAL_CAUTION
    assert "electrical-safety codes" in ELECTRICAL_CAUTION
    assert estimate.caution == ELECTRICAL_CAUTION


def test_notebook_tables_carry_the_caution() -> None:
    _, timing, *_ = _timing("default")
    for html in (timing._repr_html_(), _estimate()._repr_html_()):
        assert "can kill" in html and "licensed" in html


# --- time of flight -------------------------------------------------------------------


def test_arrival_of_single_particles_by_hand() -> None:
    """t = (D - z) / (v + vz): 0.5/50 = 10 ms; 0.499/52 s; lab speed <= 0 never arrives."""
    final = np.zeros((4, 6))
    final[1, 2], final[1, 5] = 1e-3, 2.0
    final[2, 5] = -50.0
    final[3, 5] = -60.0
    times = arrival_times(final, 50.0, 0.5)
    assert times[0] == pytest.approx(0.01, rel=1e-15)
    assert times[1] == pytest.approx(0.499 / 52.0, rel=1e-15)
    assert times[2] == math.inf and times[3] == math.inf


def test_release_from_a_stopped_trap() -> None:
    final = np.zeros((1, 6))
    final[0, 5] = 4.0
    assert arrival_times(final, 0.0, 0.2)[0] == pytest.approx(0.05, rel=1e-15)


def test_gaussian_cloud_mean_and_spread() -> None:
    """Narrow Gaussian cloud (seeded numpy Generator): mean arrival D / v and spread
    D sigma_v / v^2 to first order (propagation of errors, J. R. Taylor, An Introduction to
    Error Analysis, ch. 3). Second-order bias (sigma_v/v)^2 = 1e-4, sampling error ~1e-4."""
    rng = np.random.default_rng(20240601)
    final = np.zeros((40_000, 6))
    final[:, 2] = rng.normal(0.0, 1e-4, final.shape[0])
    final[:, 5] = rng.normal(0.0, 1.0, final.shape[0])
    times = arrival_times(final, 100.0, 0.5)
    assert np.mean(times) == pytest.approx(0.5 / 100.0, rel=1e-3)
    assert np.std(times) == pytest.approx(0.5 * 1.0 / 100.0**2, rel=3e-2)


def test_histogram_against_counting() -> None:
    """Counts against a plain Python count per half-open bin (last bin closed);
    particles that never arrive are left out."""
    times = np.array([0.1, 0.2, 0.2, 0.35, 0.4, math.inf, 0.05, math.inf])
    edges = np.array([0.0, 0.1, 0.2, 0.3, 0.4])
    counts, got_edges = arrival_histogram(times, edges)
    expected = [sum(1 for t in times if lo <= t < hi or (hi == edges[-1] and t == hi)) for lo, hi in zip(edges[:-1], edges[1:])]
    assert counts.tolist() == expected == [1, 1, 2, 2]
    np.testing.assert_array_equal(got_edges, edges)
    counts, got_edges = arrival_histogram(times, 3)
    assert counts.sum() == 6 and got_edges[0] == 0.05 and got_edges[-1] == 0.4


# --- bad input ------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("call", "pattern"),
    [
        (lambda: constant_deceleration(0.0, 0.0, deceleration=1e5), r"initial_velocity \[m/s\].*got 0\.0"),
        (lambda: constant_deceleration(-3.0, 0.0, length=1.0), r"initial_velocity \[m/s\]"),
        (lambda: constant_deceleration(400.0, 400.0, deceleration=1e5), r"final_velocity \[m/s\].*\[0, 400\).*got 400\.0"),
        (lambda: constant_deceleration(400.0, -1.0, length=1.0), r"final_velocity \[m/s\]"),
        (lambda: constant_deceleration(400.0, 0.0, deceleration=0.0), r"deceleration \[m/s\^2\].*got 0\.0"),
        (lambda: constant_deceleration(400.0, 0.0, deceleration=1e5, length=1.0), r"exactly one of deceleration.*length"),
        (lambda: constant_deceleration(400.0, 0.0), r"exactly one of deceleration.*length"),
        (lambda: constant_deceleration(400.0, 0.0, length=-0.5), r"length \[m\].*got -0\.5"),
        (lambda: Schedule(400.0, 0.0, float("nan")), r"deceleration \[m/s\^2\]"),
        (lambda: _schedule("stop").time_at(1.5), r"z \[m\].*\[0, 1\]"),
        (lambda: _schedule("stop").position(-1e-3), r"t \[s\].*>= 0"),
        (lambda: coil_timing(_schedule("stop"), 0.0, peak_current=100.0), r"pitch \[m\].*got 0\.0"),
        (lambda: coil_timing(_schedule("stop"), 2.5, peak_current=100.0), r"pitch \[m\].*no coil"),
        (lambda: coil_timing(_schedule("stop"), 0.02, first_coil=1.2, peak_current=100.0), r"first_coil \[m\]"),
        (lambda: coil_timing(_schedule("stop"), 0.02, window=0.0, peak_current=100.0), r"window \[pitch\]"),
        (lambda: coil_timing(_schedule("stop"), 0.02, rise_time=1e-3, peak_current=100.0), r"rise_time \[s\].*got 0\.001"),
        (lambda: coil_timing(_schedule("stop"), 0.02, peak_current=-5.0), r"peak_current \[A\]"),
        (lambda: _estimate(rise_time=0.0), r"rise_time \[s\].*got 0\.0"),
        (lambda: _estimate(rise_time=6e-4), r"rise_time \[s\]"),
        (lambda: _estimate(inductance=1e-6), r"exactly one of winding_radius.*inductance"),
        (lambda: _estimate(winding_radius=None), r"exactly one of winding_radius.*inductance"),
        (lambda: _estimate(winding_radius=0.02), r"winding_radius \[m\].*got 0\.02"),
        (lambda: _estimate(turns=0), r"turns.*got 0"),
        (lambda: _estimate(wire_area=0.0), r"wire_area \[m\^2\]"),
        (lambda: arrival_times(np.zeros((3, 5)), 10.0, 0.5), r"final \[m, m/s\].*\(N, 6\)"),
        (lambda: arrival_times(np.zeros((3, 6)), -1.0, 0.5), r"release_velocity \[m/s\]"),
        (lambda: arrival_times(np.zeros((3, 6)), 10.0, 0.0), r"distance \[m\]"),
        (lambda: arrival_times(np.full((3, 6), 0.7), 10.0, 0.5), r"distance \[m\].*max z 0\.7"),
        (lambda: arrival_histogram(np.array([0.1, np.nan]), 3), r"times \[s\]"),
        (lambda: arrival_histogram(np.array([0.1]), np.array([0.2, 0.1])), r"bins \[s\]"),
    ],
    ids=[
        "v0-zero", "v0-negative", "vf-equals-v0", "vf-negative", "a-zero", "both-a-and-length",
        "neither", "length-negative", "a-nan", "time_at-outside", "t-negative", "pitch-zero",
        "pitch-too-long", "first-coil-beyond", "window-zero", "rise-longer-than-window",
        "peak-current-negative", "hw-rise-zero", "hw-rise-over-half-pulse", "hw-both-L-and-a",
        "hw-neither-L-nor-a", "hw-winding-radius-too-big", "hw-turns-zero", "hw-wire-area-zero",
        "final-shape", "release-negative", "distance-zero", "particles-beyond-plane",
        "histogram-nan", "histogram-edges",
    ],
)
def test_bad_input_names_the_argument(call: Callable[[], object], pattern: str) -> None:
    with pytest.raises(TiltwellError, match=pattern):
        call()


def test_unknown_keyword_is_an_error() -> None:
    with pytest.raises(TypeError):
        coil_timing(_schedule("stop"), 0.02, peak_current=100.0, windw=1.0)  # type: ignore[call-arg]


def test_absurd_coil_count_is_refused() -> None:
    """A pitch that would give millions of coils is a typo, not a plan: a clear error
    instead of an allocation failure."""
    plan = constant_deceleration(400.0, 0.0, deceleration=1e-3)  # 80,000 km
    with pytest.raises(TiltwellError, match="pitch"):
        coil_timing(plan, 0.01, peak_current=100.0)


def test_timing_of_a_counted_row_reaching_beyond_the_ends() -> None:
    """With ``count`` the coils may lie outside [0, L] (a coil row's end coils): coil k at
    z_k = first + k pitch is on from t(max(z_k - w, 0)) to t(min(z_k + w, L)) and is passed at
    t(clip(z_k, 0, L)), t(z) = (v0 - sqrt(v0^2 - 2 a z)) / a (constant-deceleration
    kinematics, written here); a coil whose window misses [0, L] is an error naming count."""
    v0, vf, a = 300.0, 30.0, 5e4  # invented numbers
    schedule = constant_deceleration(v0, vf, deceleration=a)
    length, pitch, reach = (v0**2 - vf**2) / (2 * a), 0.01, 0.02
    count = math.floor(length / pitch) + 4
    timing = coil_timing(schedule, pitch, first_coil=-0.01, count=count, window=2.0, peak_current=100.0)
    z = -0.01 + pitch * np.arange(count)

    def t(s: np.ndarray) -> np.ndarray:
        return (v0 - np.sqrt(np.maximum(v0**2 - 2 * a * s, 0.0))) / a

    np.testing.assert_allclose(timing.positions, z, rtol=0, atol=1e-15)
    np.testing.assert_allclose(timing.on_times, t(np.clip(z - reach, 0.0, length)), rtol=1e-12, atol=1e-18)
    np.testing.assert_allclose(timing.off_times, t(np.clip(z + reach, 0.0, length)), rtol=1e-12)
    np.testing.assert_allclose(timing.passing_times, t(np.clip(z, 0.0, length)), rtol=1e-12, atol=1e-18)
    with pytest.raises(ValueError, match="count"):
        coil_timing(schedule, pitch, first_coil=-0.03, count=count, window=2.0, peak_current=100.0)
