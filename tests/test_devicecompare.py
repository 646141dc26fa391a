"""The coil-array device against its rigid, phase-averaged twin (tiltwell.dynamics.compare).

All geometry is invented for the tests: rows of thin 8 mm radius coils of 50 turns at
pitches of 1.0, 0.6 and 0.35 radius, a 2 T/m trap, OH molecules, a 4 x 4 x 6 mm
half-width box. The current window spans about 3.5 radii at each pitch (4, 6 and 10
active coils), so the finer rows make the same trap with a smoother hand-over.
"""

from __future__ import annotations

import functools
import math

import magpylib
import numpy as np
import pytest
from scipy.constants import mu_0

import tiltwell as tw
from tiltwell.dynamics.device import UniformMotion
from tiltwell.dynamics.compare import DeviceComparison, PhaseAveragedField, compare_device
from tiltwell.dynamics.tracking import TrackingResult

RADIUS = 0.008  # m
TURNS = 50
GRADIENT = 2.0  # T/m
from conftest import COIL_BOX as BOX
OH = tw.species("OH")  # linear Zeeman state
PITCHES = {1.0: 4, 0.6: 6, 0.35: 10}  # pitch / radius -> active coils (a window of ~3.5 radii)
SCHEDULE = tw.constant_deceleration(3.0, 1.0, deceleration=400.0)  # 5 ms, about half the critical mu B'/m


def _row(ratio: float) -> tw.CoilArray:
    pitch = ratio * RADIUS
    active = PITCHES[ratio]
    return tw.CoilArray(count=math.ceil(0.07 / pitch) + 2 * active, pitch=pitch, radius=RADIUS, first=-0.02,
                        turns=TURNS, active=active)


def _cloud(count: int, seed: int = 4) -> np.ndarray:
    """A Gaussian cloud in the trap frame, wider than the trap, so many particles sit near its edge."""
    rng = np.random.default_rng(seed)
    cloud = np.zeros((count, 6))
    cloud[:, :3] = rng.normal(0.0, 2e-3, (count, 3))
    cloud[:, 3:] = rng.normal(0.0, 1.2, (count, 3))
    return cloud


def _phase_currents(array: tw.CoilArray, phases: int) -> tuple[np.ndarray, np.ndarray]:
    """Trap positions (P,) and currents (P, count) of the phases, as the average defines them."""
    reference = array.positions[(array.count - 1) // 2]
    plan = tw.trap_currents(array, reference + array.pitch * np.arange(phases) / phases, GRADIENT)
    return plan.positions, plan.currents


# ---- the phase-averaged field ---------------------------------------------------------------


def _jackson_on_axis(array: tw.CoilArray, phases: int, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """B_z [T] on the axis of each phase in the trap frame, shape (P, M), and dB_z/dz at the
    zero, shape (P,), from the textbook thin-loop field B_z = mu0 N I a^2 / (2 (a^2 + d^2)^(3/2))
    and its slope -3 mu0 N I a^2 d / (2 (a^2 + d^2)^(5/2)) (Jackson, Classical Electrodynamics,
    3rd ed., sect. 5.5, from memory), summed coil by coil."""
    positions, currents = _phase_currents(array, phases)
    a2 = RADIUS**2
    fields, slopes = [], []
    for z_trap, amps in zip(positions, currents):
        d = z[None, :] + z_trap - array.positions[:, None]  # (count, M)
        scale = mu_0 * TURNS * amps[:, None] * a2 / 2.0
        fields.append(np.sum(scale / (a2 + d * d) ** 1.5, axis=0))
        d0 = z_trap - array.positions
        slopes.append(np.sum(-3.0 * mu_0 * TURNS * amps * a2 * d0 / (2.0 * (a2 + d0 * d0) ** 2.5)))
    return np.array(fields), np.array(slopes)


@pytest.mark.parametrize("ratio", [1.0, 0.6])
def test_on_axis_average_is_the_brute_force_average_of_the_loop_formula(ratio: float) -> None:
    # Reference: Jackson's on-axis loop field (above), averaged over the phases by hand.
    # On the axis B = (0, 0, B_z); "field" averages B_z, "magnitude" averages |B_z|.
    # Measured: largest difference 5.6e-18 T on fields up to 1.4e-2 T.
    array = _row(ratio)
    z = np.linspace(-0.012, 0.012, 49)
    points = np.column_stack((np.zeros_like(z), np.zeros_like(z), z))
    per_phase, _ = _jackson_on_axis(array, 5, z)
    field_average = PhaseAveragedField(array, GRADIENT, 5, "field")
    magnitude_average = PhaseAveragedField(array, GRADIENT, 5)
    scale = float(np.max(np.abs(per_phase)))
    assert np.allclose(field_average.field(points)[:, 2], per_phase.mean(axis=0), rtol=0.0, atol=1e-12 * scale)
    assert np.allclose(field_average.field(points)[:, :2], 0.0, atol=1e-15)
    assert np.allclose(field_average.magnitude(points), np.abs(per_phase.mean(axis=0)), rtol=0.0, atol=1e-12 * scale)
    assert np.allclose(magnitude_average.magnitude(points), np.abs(per_phase).mean(axis=0), rtol=0.0,
                       atol=1e-12 * scale)


@pytest.mark.parametrize("average", ["field", "magnitude"])
def test_off_axis_average_matches_magpylib_loops(average: str) -> None:
    # Reference: magpylib (current.Circle, its own closed form of the loop field), one
    # loop per coil and phase, placed in the trap frame and averaged here over 6 phases.
    # Measured: relative difference 9.4e-16 at most for both averages (field and magnitude).
    array = _row(1.0)
    positions, currents = _phase_currents(array, 6)
    rng = np.random.default_rng(7)
    points = rng.uniform(-1.0, 1.0, (300, 3)) * BOX
    fields = []
    for z_trap, amps in zip(positions, currents):
        loops = [magpylib.current.Circle(current=TURNS * amps[k], diameter=2 * RADIUS,
                                         position=(0.0, 0.0, array.positions[k] - z_trap))
                 for k in np.flatnonzero(amps)]
        fields.append(magpylib.getB(loops, points, sumup=True))
    fields_arr = np.array(fields)  # (P, N, 3)
    source = PhaseAveragedField(array, GRADIENT, 6, average)
    mean_field = fields_arr.mean(axis=0)
    expected = np.linalg.norm(mean_field, axis=1) if average == "field" else np.linalg.norm(fields_arr, axis=2).mean(axis=0)
    scale = float(np.max(expected))
    assert np.max(np.abs(source.field(points) - mean_field)) < 1e-10 * scale
    assert np.max(np.abs(source.magnitude(points) - expected)) < 1e-10 * scale


@pytest.mark.parametrize("average", ["field", "magnitude"])
def test_magnitude_gradient_is_the_slope_of_the_magnitude(average: str) -> None:
    # Reference: a brute-force 4th-order central difference of magnitude() with a 1 um step,
    # (-f(2h) + 8 f(h) - 8 f(-h) + f(-2h)) / 12h, at points at least 1 mm from the zero
    # (|B| has a kink there). Measured: largest relative difference 2.2e-9 for both averages.
    source = PhaseAveragedField(_row(1.0), GRADIENT, 5, average)
    rng = np.random.default_rng(8)
    points = rng.uniform(-1.0, 1.0, (400, 3)) * BOX
    points = points[np.linalg.norm(points, axis=1) > 1e-3][:100]
    h = 1e-6
    slopes = np.empty_like(points)
    for axis in range(3):
        step = np.zeros(3)
        step[axis] = h
        f = [source.magnitude(points + k * step) for k in (2, 1, -1, -2)]
        slopes[:, axis] = (-f[0] + 8 * f[1] - 8 * f[2] + f[3]) / (12 * h)
    error = np.linalg.norm(source.magnitude_gradient(points) - slopes, axis=1) / np.linalg.norm(slopes, axis=1)
    assert error.max() < 1e-6


@pytest.mark.parametrize("average", ["field", "magnitude"])
def test_zero_at_the_centre_with_the_mean_gradient(average: str) -> None:
    # References: each phase's currents put a zero at its trap centre, so the average of
    # fields or magnitudes vanishes at the origin; the axial gradient there is the mean of
    # the phases' slopes from Jackson's on-axis formula (above); the radial one is half of
    # it, from div B = 0 for an axisymmetric field (B_rho = -rho/2 dB_z/dz near the axis;
    # Maxwell, any electromagnetism text). Measured: |B(0)| <= 5.5e-18 T; axial slope off by
    # 8e-9 relative (finite difference), axial_gradient by 0; radial slope / (G/2) - 1 <= 8e-9.
    array = _row(1.0)
    source = PhaseAveragedField(array, GRADIENT, 8, average)
    _, slopes = _jackson_on_axis(array, 8, np.zeros(1))
    assert source.magnitude([[0.0, 0.0, 0.0]])[0] < 1e-12
    assert np.linalg.norm(source.field([[0.0, 0.0, 0.0]])) < 1e-12
    h = 1e-6
    axial = (source.magnitude([[0.0, 0.0, h]])[0] + source.magnitude([[0.0, 0.0, -h]])[0]) / (2 * h)
    assert axial == pytest.approx(np.mean(slopes), rel=1e-6)
    assert source.axial_gradient == pytest.approx(np.mean(slopes), rel=1e-9)
    radial = source.magnitude([[h, 0.0, 0.0], [0.0, h, 0.0]]) / h
    assert radial == pytest.approx([np.mean(slopes) / 2] * 2, rel=1e-6)


# ---- the comparison's statistics, on hand-built results ----------------------------------------


def _result(kept: np.ndarray, lost_time: np.ndarray | None = None, final: np.ndarray | None = None,
            times: np.ndarray | None = None) -> TrackingResult:
    """A TrackingResult written by hand (survival counted from lost_time)."""
    n = kept.size
    grid = np.array([0.0, 1e-3]) if times is None else times
    lost = np.where(kept, np.inf, 0.5e-3) if lost_time is None else lost_time
    survival = np.array([np.count_nonzero(lost > t) / n for t in grid])
    states = np.zeros((n, 6)) if final is None else final
    return TrackingResult(grid, survival, states, kept, lost, "by hand", 1e-5)


def test_paired_error_matches_a_bootstrap() -> None:
    # Reference: the bootstrap (Efron; resample the particles with replacement, numpy) of
    # the difference of kept fractions on the same particles. Synthetic runs: 2000
    # particles, 60 % kept by the rigid twin, 3 % of them lost by the device and 1 % of the
    # rest gained. Measured: bootstrap 0.00316 vs paired formula 0.00319 (0.9 %; the
    # bootstrap's own spread with 4000 resamples is ~1.1 %); the unpaired error would be 0.0155.
    rng = np.random.default_rng(11)
    rigid = rng.random(2000) < 0.6
    device = np.where(rigid, rng.random(2000) > 0.03, rng.random(2000) < 0.01)
    comparison = DeviceComparison(_result(rigid), _result(device), SCHEDULE)
    resamples = rng.integers(0, 2000, (4000, 2000))
    differences = rigid[resamples].mean(axis=1) - device[resamples].mean(axis=1)
    assert comparison.ripple_loss == pytest.approx(rigid.mean() - device.mean(), abs=1e-15)
    assert comparison.ripple_loss_error == pytest.approx(np.std(differences), rel=0.04)
    unpaired = math.hypot(comparison.rigid.binomial_error, comparison.device.binomial_error)
    assert comparison.ripple_loss_error < 0.5 * unpaired


def test_survival_difference_counts_the_discordant_particles_at_each_time() -> None:
    # Reference: a plain loop over times and particles (brute force), with the paired
    # error sqrt(n01 + n10 - (n01 - n10)^2 / n) / n at each time.
    rng = np.random.default_rng(12)
    times = np.linspace(0.0, 2e-3, 21)
    rigid_lost = np.where(rng.random(300) < 0.5, np.inf, rng.choice(times[1:], 300))
    device_lost = np.where(rng.random(300) < 0.1, rng.choice(times[1:], 300), rigid_lost)
    comparison = DeviceComparison(_result(np.isinf(rigid_lost), rigid_lost, times=times),
                                  _result(np.isinf(device_lost), device_lost, times=times), SCHEDULE)
    got_times, difference, error = comparison.survival_difference()
    for k, t in enumerate(times):
        inside_rigid = [lost > t for lost in rigid_lost]
        inside_device = [lost > t for lost in device_lost]
        n01 = sum(a and not b for a, b in zip(inside_rigid, inside_device))
        n10 = sum(b and not a for a, b in zip(inside_rigid, inside_device))
        assert got_times[k] == t
        assert difference[k] == pytest.approx((n01 - n10) / 300, abs=1e-15)
        assert error[k] == pytest.approx(math.sqrt(n01 + n10 - (n01 - n10) ** 2 / 300) / 300, abs=1e-15)
    assert difference[-1] == pytest.approx(comparison.ripple_loss, abs=1e-15)
    assert error[-1] == pytest.approx(comparison.ripple_loss_error, abs=1e-15)


@pytest.mark.parametrize("release", [4e-3, 7e-3], ids=["decelerating", "coasting"])
def test_arrival_times_are_free_flight_from_the_release(release: float) -> None:
    # Reference: free flight after release at T, t = T + (d - z) / (v_z + v_trap(T)) by
    # hand, with v_trap = v0 - a T = 20 - 3750 T while decelerating (until 4.8 ms), then
    # 2 m/s (Schedule's notes); a particle moving backwards in the lab never arrives.
    schedule = tw.constant_deceleration(20.0, 2.0, deceleration=3750.0)
    v_trap = 20.0 - 3750.0 * release if release <= schedule.duration else 2.0
    final = np.zeros((4, 6))
    final[:, 2] = [1e-3, -2e-3, 0.0, 4e-3]
    final[:, 5] = [0.5, -1.0, 2.0, -v_trap - 1.0]
    times = np.array([0.0, release])
    rigid = _result(np.array([True, True, False, True]), final=final, times=times)
    device = _result(np.array([True, False, True, False]), final=final, times=times)
    got_rigid, got_device = DeviceComparison(rigid, device, schedule).arrival_times(0.1)
    lab = v_trap + final[:, 5]
    assert got_rigid[:2] == pytest.approx([release + (0.1 - 1e-3) / lab[0], release + (0.1 + 2e-3) / lab[1]], rel=1e-14)
    assert got_rigid[2] == math.inf
    assert got_device == pytest.approx([release + (0.1 - 1e-3) / lab[0], release + 0.1 / lab[2]], rel=1e-14)


# ---- tracking: the device approaches its rigid twin as the pitch shrinks -----------------------


@functools.lru_cache(maxsize=None)
def _scan_and_comparison(ratio: float) -> tuple[tw.PhaseScan, DeviceComparison]:
    array = _row(ratio)
    scan = tw.moving_trap_phases(array, GRADIENT, OH, box_half_widths=BOX, phases=8, samples=401)
    comparison = compare_device(array, OH, _cloud(1500), schedule=SCHEDULE, gradient=GRADIENT, time_step=5e-6,
                                box_half_widths=BOX, phases=8, field_map_shape=(21, 21, 31))
    return scan, comparison


@pytest.mark.slow
def test_ripple_and_disagreement_fall_as_the_pitch_shrinks() -> None:
    # Physics trend (independent routes agreeing in a limit): as the pitch shrinks at fixed
    # radius, gradient and window, the hand-over ripple vanishes and the lab-frame tracking
    # through the coils (track_device) must approach the trap-frame tracking through the
    # rigid twin (track). 1500 particles, the same in every run, 5 ms at 400 m/s^2.
    # Measured (pitch/radius 1.0, 0.6, 0.35): ripple 0.894, 0.089, 0.011; particles kept by
    # one run only 37, 10, 1; ripple loss 0.0073 +- 0.0041, -0.0013 +- 0.0021,
    # -0.0007 +- 0.0007; rms final z difference of particles both keep 3.4e-4, 6.3e-5, 4.0e-5 m.
    rows = [_scan_and_comparison(ratio) for ratio in (1.0, 0.6, 0.35)]
    ripples = [scan.ripple for scan, _ in rows]
    disagreeing = [sum(comparison.discordant) for _, comparison in rows]
    spread = []
    for _, comparison in rows:
        both = comparison.rigid.kept & comparison.device.kept
        spread.append(float(np.sqrt(np.mean((comparison.rigid.final[both, 2] - comparison.device.final[both, 2]) ** 2))))
    assert ripples[0] > 0.5 and ripples[2] < 0.03
    assert ripples[0] > ripples[1] > ripples[2]
    assert disagreeing[0] > disagreeing[1] > disagreeing[2]
    assert disagreeing[2] <= 3
    assert spread[0] > 3 * spread[2] and spread[2] < 1e-4
    for _, comparison in rows[1:]:
        assert abs(comparison.ripple_loss) <= 3 * comparison.ripple_loss_error + 1e-12


def test_small_ripple_survival_curves_agree_within_errors() -> None:
    # Reference: the rigid twin's survival curve (track), against the device's, at each of
    # the 1001 recorded times, within 3 paired standard errors (ripple 0.011 at pitch =
    # 0.35 radius). Measured: largest |difference| / error 2.0; differences up to 4 of 1500 particles.
    _, comparison = _scan_and_comparison(0.35)
    _, difference, error = comparison.survival_difference()
    assert comparison.rigid.times.size == 1001
    assert np.all(np.abs(difference) <= 3 * error + 1e-12)
    assert np.max(np.abs(difference)) * 1500 <= 8
    assert 0.3 < comparison.device.fraction < 0.5  # the comparison is informative: much is lost


@pytest.mark.slow
def test_fast_ripple_device_follows_the_phase_averaged_potential() -> None:
    # Reference: averaging over a rapidly oscillating force (Landau and Lifshitz, Mechanics,
    # sect. 30, from memory): to first order the slow motion feels the time average of the
    # potential, mu <|B_j|> for OH, not mu |<B_j>|. Pitch = radius (ripple 0.89), trap at a
    # steady 3 m/s (375 Hz hand-over), 3000 particles for 16.7 ms. Measured: the device
    # keeps 0.0033 +- 0.0029 less than the averaged-magnitude twin (1.2 paired sigma) but
    # 0.0113 +- 0.0031 more than the averaged-field twin (3.7 sigma), whose |B| is lower off the axis.
    common = dict(schedule=UniformMotion(3.0), gradient=GRADIENT, time_step=1e-5, box_half_widths=BOX, phases=8,
                  field_map_shape=(21, 21, 31), duration=0.0167)
    magnitude = compare_device(_row(1.0), OH, _cloud(3000), average="magnitude", **common)  # type: ignore[arg-type]
    assert abs(magnitude.ripple_loss) < 2.5 * magnitude.ripple_loss_error
    field = PhaseAveragedField(_row(1.0), GRADIENT, 8, "field")
    trap = tw.Trap(field, OH, tuple((-h, h) for h in BOX))
    rigid = tw.track(trap, _cloud(3000), 0.0167, 1e-5, field_map=tw.FieldMap.from_trap(trap, (21, 21, 31)))
    against_field = DeviceComparison(rigid, magnitude.device, magnitude.schedule)
    assert against_field.ripple_loss < -3.0 * against_field.ripple_loss_error


@pytest.mark.slow
def test_coasting_after_the_schedule_and_recording_every_few_steps() -> None:
    # Reference: the device run, which follows the schedule's z_trap(t) itself, including
    # the coast at v_f after its duration (1 ms of decelerating, then 2 ms at 2.6 m/s). The
    # rigid twin must drop the fictitious force at 1 ms to agree: measured 5 particles of
    # 400 kept by one run only, against 17 when the deceleration is held on. Recording
    # every 10th step keeps every 10th entry of the full record (independent runs).
    schedule = tw.constant_deceleration(3.0, 2.6, deceleration=400.0)
    common = dict(schedule=schedule, gradient=GRADIENT, time_step=5e-6, box_half_widths=BOX, phases=8,
                  field_map_shape=(21, 21, 31), duration=3e-3)
    every = compare_device(_row(0.6), OH, _cloud(400), **common)  # type: ignore[arg-type]
    sparse = compare_device(_row(0.6), OH, _cloud(400), record_every=10, **common)  # type: ignore[arg-type]
    assert sparse.rigid.times.size == 61
    for full, part in ((every.rigid, sparse.rigid), (every.device, sparse.device)):
        assert np.array_equal(part.times, full.times[::10])
        assert np.array_equal(part.survival, full.survival[::10])
        assert np.array_equal(part.kept, full.kept)
    assert sum(every.discordant) <= 8
    trap = tw.Trap(PhaseAveragedField(_row(0.6), GRADIENT, 8), OH, tuple((-h, h) for h in BOX))
    held = tw.track(trap, _cloud(400), 3e-3, 5e-6, deceleration=400.0, field_map=tw.FieldMap.from_trap(trap, (21, 21, 31)))
    assert sum(DeviceComparison(held, every.device, schedule).discordant) > 2 * sum(every.discordant)


def test_repr_html_shows_the_ripple_loss() -> None:
    rigid = np.array([True] * 6 + [False] * 4)
    device = np.array([True] * 4 + [False] * 6)
    html = DeviceComparison(_result(rigid), _result(device), SCHEDULE)._repr_html_()
    # 0.6 - 0.4 = 0.2, paired error sqrt(2 - 4 / 10) / 10 = 0.126
    assert "0.2 ± 0.13 (paired)" in html and "rigid 2, device 0" in html


# ---- bad input ------------------------------------------------------------------------------


def _compare(**changes: object) -> DeviceComparison:
    options: dict[str, object] = dict(schedule=SCHEDULE, gradient=GRADIENT, time_step=5e-6, box_half_widths=BOX)
    options.update(changes)
    particles = options.pop("particles", np.zeros((2, 6)))
    return compare_device(_row(1.0), OH, particles, **options)  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda: _compare(particles=np.zeros((2, 5))), "particles"),
        (lambda: _compare(schedule="fast"), "schedule"),
        (lambda: _compare(schedule=UniformMotion(1.0)), "duration"),
        (lambda: _compare(duration=0.2), "duration"),
        (lambda: _compare(box_half_widths=(0.006, 0.006, 0.006)), "box_half_widths"),
        (lambda: _compare(time_step=-1.0), "time_step"),
        (lambda: _compare(record_every=0), "record_every"),
        (lambda: _compare(average="mean"), "average"),
        (lambda: _compare(phases=0), "phases"),
        (lambda: PhaseAveragedField(tw.CoilArray(count=4, pitch=0.005, radius=0.008), GRADIENT), "count"),
        (lambda: PhaseAveragedField(_row(1.0), -1.0), "gradient"),
        (lambda: DeviceComparison(_result(np.ones(3, bool)), _result(np.ones(4, bool)), SCHEDULE), "device"),
        (lambda: DeviceComparison(_result(np.ones(3, bool)), _result(np.ones(3, bool), times=np.array([0.0, 2e-3])),
                                  SCHEDULE), "times"),
        (lambda: DeviceComparison(_result(np.ones(3, bool)), _result(np.ones(3, bool)), SCHEDULE).arrival_times(-1.0),
         "distance"),
    ],
)
def test_bad_input_names_the_argument(call, name: str) -> None:  # type: ignore[no-untyped-def]
    with pytest.raises(tw.TiltwellError, match=name):
        call()
