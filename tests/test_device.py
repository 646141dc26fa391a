"""Lab-frame tracking through a coil array's moving field (tiltwell.dynamics.device).

All geometry below is invented for the tests (a 5 mm pitch row of 8 mm coils, OH molecules).
"""

from __future__ import annotations

import magpylib
import numpy as np
import pytest
from scipy import optimize
from scipy.integrate import solve_ivp

import tiltwell as tw
from tiltwell.dynamics.coilmap import SummedCoilField
from tiltwell.dynamics.device import CoilFieldMap, UniformMotion, track_device
from tiltwell.physics.fields import Coil, loop_field

WOUND = tw.CoilArray(count=12, pitch=0.006, radius=0.008, first=-0.02, turns=20, width=0.002, height=0.003)
ROW = tw.CoilArray(count=40, pitch=0.005, radius=0.008, first=-0.02, turns=50)
OH = tw.species("OH")  # linear Zeeman state
GRADIENT = 1.0
from conftest import COIL_BOX as BOX


def _exact_unit_coil(points: np.ndarray) -> np.ndarray:
    """Reference: the exact elliptic-integral loop field (tiltwell.loop_field) summed over the winding's loops."""
    radii, planes, currents = Coil(WOUND.radius, 0.0, 1.0, WOUND.turns, WOUND.width, WOUND.height).loops()
    return sum(loop_field(points, a, p, c) for a, p, c in zip(radii, planes, currents))  # type: ignore[return-value]


def _random_points(count: int) -> np.ndarray:
    rng = np.random.default_rng(1)
    rho = 0.004 * np.sqrt(rng.random(count))
    phi = 2 * np.pi * rng.random(count)
    return np.column_stack((rho * np.cos(phi), rho * np.sin(phi), rng.uniform(-0.02, 0.02, count)))


def _rms_error(shape: tuple[int, int], part: str) -> float:
    points = _random_points(200)
    field, jacobian = CoilFieldMap(WOUND, 0.005, 0.025, shape).field_and_jacobian(points, 0.0)
    if part == "field":
        reference = _exact_unit_coil(points)
        mine = field
    else:  # reference Jacobian: central differences of the exact field, step 1e-7 m (brute force)
        step = 1e-7
        reference = np.stack(
            [(_exact_unit_coil(points + step * e) - _exact_unit_coil(points - step * e)) / (2 * step) for e in np.eye(3)],
            axis=-1,
        )
        mine = jacobian
    return float(np.sqrt(np.mean((mine - reference) ** 2) / np.mean(reference**2)))


@pytest.mark.parametrize("part", ["field", "jacobian"])
def test_map_matches_exact_loop_field_and_error_falls_as_h_squared(part: str) -> None:
    # Reference: tiltwell.loop_field (Simpson et al., NASA TM 2001, closed form with K and E),
    # independent of the tabulation; bilinear interpolation errs as O(h^2), so halving both
    # grid steps should divide the rms error by ~4. Measured: field 2.6e-4 -> 6.2e-5 (ratio 4.19),
    # Jacobian 9.4e-4 -> 2.3e-4 (ratio 4.01).
    coarse = _rms_error((33, 201), part)
    fine = _rms_error((65, 401), part)
    assert fine < (1e-4 if part == "field" else 5e-4)
    assert 3.0 < coarse / fine < 5.5


@pytest.mark.parametrize("time", [0.0, 3.1e-4, 7.7e-4])
def test_superposed_map_field_has_its_zero_at_the_trap(time: float) -> None:
    # Reference: trap_currents puts the on-axis zero exactly at z_trap (closed-form on-axis
    # field of a loop, Jackson 3rd ed. sect. 5.5, from memory); the map's zero must agree
    # within its interpolation error / gradient: measured |offset| <= 1.1e-7 m; asserted 1e-6 m (2e-4 pitch).
    motion = UniformMotion(20.0)
    z_trap = float(motion.position(time))
    currents = tw.trap_currents(ROW, [z_trap], GRADIENT).currents[0]
    field_map = CoilFieldMap(ROW, 0.0056, BOX[2] + 3 * ROW.pitch)

    def axial(z: float) -> float:
        total = 0.0
        for k in np.flatnonzero(currents):
            total += currents[k] * field_map.field_and_jacobian([[0.0, 0.0, z]], float(ROW.positions[k]))[0][0, 2]
        return total

    zero = optimize.brentq(axial, z_trap - 0.4 * ROW.pitch, z_trap + 0.4 * ROW.pitch, xtol=1e-12)
    assert abs(zero - z_trap) < 1e-6
    # Outside reference beside trap_currents: magpylib's field of the same coils and currents
    # (current.Circle, its own elliptic integrals) has its on-axis zero at z_trap too
    # (measured |offset| <= 1.7e-15 m; asserted 1e-9 m), and the map's zero within 1e-6 m of it.
    outside = optimize.brentq(lambda z: np.atleast_2d(_magpylib_field(ROW, currents, np.array([[0.0, 0.0, z]])))[0, 2],
                              z_trap - 0.4 * ROW.pitch, z_trap + 0.4 * ROW.pitch, xtol=1e-13)
    assert abs(outside - z_trap) < 1e-9
    assert abs(zero - outside) < 1e-6


def _trap_frame_energy(states: np.ndarray, z_trap: float) -> np.ndarray:
    """Kinetic + Zeeman energy [J] from the exact coil field (CoilSet of the elliptic-integral loops)."""
    currents = tw.trap_currents(ROW, [z_trap], GRADIENT).currents[0]
    magnitude = ROW.field_set(currents).magnitude(states[:, :3] + (0.0, 0.0, z_trap))
    return 0.5 * OH.mass * np.sum(states[:, 3:] ** 2, axis=1) + OH.zeeman.energy(magnitude)


@pytest.mark.slow
def test_uniform_motion_keeps_trap_frame_energy_to_the_ripple() -> None:
    # Uniform motion (UniformMotion, since a Schedule must decelerate): in the trap frame the
    # only time dependence is the hand-over from coil to coil, so the energy can change only
    # by the order of the depth ripple of moving_trap_phases (peak-to-peak / mean, 0.060
    # here). Measured: max |dE| = 0.016 of the mean depth over 2.3 ms (9 pitches), the same
    # with half the step (so not integration error). Reference for the energy: the exact
    # CoilSet field, not the map.
    phases = tw.moving_trap_phases(ROW, GRADIENT, OH, box_half_widths=BOX, phases=8, samples=401)
    rng = np.random.default_rng(3)
    start = np.zeros((20, 6))
    start[:, :3] = rng.normal(0.0, 7e-4, (20, 3))
    start[:, 3:] = rng.normal(0.0, 0.5, (20, 3))
    motion = UniformMotion(20.0)
    lab = start + (0.0, 0.0, 0.0, 0.0, 0.0, 20.0)
    result = track_device(ROW, None, OH, lab, schedule=motion, gradient=GRADIENT, time_step=2e-6,
                          duration=2.3e-3, box_half_widths=BOX)
    assert result.kept.all()
    # Outside reference for the field inside the energy: magpylib's |B| of the same coils
    # (current.Circle) equals the CoilSet's to 1e-9 at the final positions.
    end = float(motion.position(2.3e-3))
    currents = tw.trap_currents(ROW, [end], GRADIENT).currents[0]
    points = result.final[:, :3] + (0.0, 0.0, end)
    np.testing.assert_allclose(ROW.field_set(currents).magnitude(points),
                               np.linalg.norm(_magpylib_field(ROW, currents, points), axis=1), rtol=1e-9)
    change = _trap_frame_energy(result.final, end) - _trap_frame_energy(start, 0.0)
    assert np.max(np.abs(change)) / np.mean(phases.depth) < 1.2 * phases.ripple
    assert phases.ripple < 0.1  # the premise: a small ripple


@pytest.mark.slow
def test_decelerating_device_survival_agrees_with_rigid_trap() -> None:
    # Reference: tiltwell.track in the trap frame with an IdealQuadrupole of the same axial
    # gradient capped at the array's mean depth (moving_trap_phases), deceleration 200 m/s^2
    # (about half the critical mu B' / m). Measured: rigid 0.921, device 0.934 (3000
    # particles, binomial sigma ~0.005); asserted within 0.05 (loose: the rigid model has
    # no ripple and a sharp cap instead of the coils' rounded rim).
    phases = tw.moving_trap_phases(ROW, GRADIENT, OH, box_half_widths=BOX, phases=8, samples=401)
    schedule = tw.constant_deceleration(20.0, 19.6, deceleration=200.0)
    rigid_source = tw.IdealQuadrupole(GRADIENT, max_field=float(np.mean(phases.depth)) / OH.moment)
    trap = tw.Trap(rigid_source, OH, tuple((-h, h) for h in BOX))
    rng = np.random.default_rng(4)
    cloud = np.zeros((3000, 6))
    cloud[:, :3] = rng.normal(0.0, 1.5e-3, (3000, 3))
    cloud[:, 3:] = rng.normal(0.0, 0.7, (3000, 3))
    rigid = tw.track(trap, cloud, schedule.duration, 2e-6, deceleration=200.0)
    device = track_device(ROW, None, OH, cloud + (0.0, 0.0, 0.0, 0.0, 0.0, 20.0), schedule=schedule,
                          gradient=GRADIENT, time_step=2e-6, duration=schedule.duration, box_half_widths=BOX)
    assert 0.5 < rigid.fraction < 0.98  # the comparison is informative: some loss, not all
    assert abs(device.fraction - rigid.fraction) < 0.05
    assert device.final[device.kept, 2].std() < BOX[2]  # trap frame: kept particles near the zero
    # Outside reference beside tiltwell.track: three kept particles integrated by
    # scipy.integrate.solve_ivp (DOP853, rtol 1e-9) in magpylib's field of the active coils
    # (current.Circle; grad|B| by central differences, step 1e-7 m), with the currents of
    # trap_currents at each instant. The device (its bilinear tables, Verlet at 2 us) lands
    # within measured 3.5e-8 m of them (asserted 1e-7 m), where the force moved them by 5e-5
    # to 9e-4 m from free flight.
    pick = np.array([0, 3, 6])
    assert device.kept[pick].all()
    lab = _magpylib_trajectories(cloud[pick] + (0.0, 0.0, 0.0, 0.0, 0.0, 20.0), schedule)
    end = np.array([0.0, 0.0, float(schedule.position(schedule.duration))])
    assert np.max(np.abs(device.final[pick, :3] - (lab[:, :3] - end))) < 1e-7
    free = cloud[pick, :3] + cloud[pick, 3:] * schedule.duration
    assert np.min(np.max(np.abs(lab[:, :3] - end - free), axis=1)) > 3e-5


def _magpylib_trajectories(states: np.ndarray, schedule: tw.Schedule) -> np.ndarray:
    """Lab-frame states (n, 6) at the end of ``schedule`` from scipy.integrate.solve_ivp (DOP853,
    rtol 1e-9) of r'' = -mu grad|B| / m, |B| from magpylib (_magpylib_field) of the coils
    carrying trap_currents at z_trap(t), grad|B| by central differences (step 1e-7 m)."""
    n, step = states.shape[0], 1e-7
    offsets = np.concatenate((step * np.eye(3), -step * np.eye(3)))

    def rhs(t: float, y: np.ndarray) -> np.ndarray:
        currents = tw.trap_currents(ROW, [float(schedule.position(t))], GRADIENT).currents[0]
        points = (y[:3 * n].reshape(n, 3)[None, :, :] + offsets[:, None, :]).reshape(-1, 3)
        size = np.linalg.norm(_magpylib_field(ROW, currents, points), axis=1).reshape(6, n)
        gradient = ((size[:3] - size[3:]) / (2 * step)).T
        return np.concatenate((y[3 * n:], (-OH.moment / OH.mass * gradient).ravel()))

    y0 = np.concatenate((states[:, :3].ravel(), states[:, 3:].ravel()))
    solution = solve_ivp(rhs, (0.0, schedule.duration), y0, method="DOP853", rtol=1e-9, atol=1e-12)
    assert solution.success
    return np.column_stack((solution.y[:3 * n, -1].reshape(n, 3), solution.y[3 * n:, -1].reshape(n, 3)))


def _magpylib_field(array: tw.CoilArray, currents: np.ndarray, points: np.ndarray) -> np.ndarray:
    """Reference field [T]: magpylib current.Circle loops for every filament of every coil that carries current."""
    loops = []
    for k in np.flatnonzero(currents):
        radii, planes, weights = array.coil(int(k), float(currents[k])).loops()
        loops += [magpylib.current.Circle(current=float(w), diameter=2 * float(r), position=(0.0, 0.0, float(p)))
                  for r, p, w in zip(radii, planes, weights)]
    return np.asarray(magpylib.Collection(*loops).getB(points), dtype=float)


@pytest.mark.parametrize("z_trap", [0.0131, 0.0155])
def test_array_field_matches_magpylib(z_trap: float) -> None:
    # Reference: magpylib (current.Circle, its own elliptic-integral implementation) summed over the
    # filaments of the active coils of WOUND at a trap position, at off-axis points in the box.
    # The exact superposition (CoilArray.field_set -> loop_field) must agree to rounding: rtol 1e-9.
    currents = tw.trap_currents(WOUND, [z_trap], GRADIENT).currents[0]
    points = _random_points(50) * (1.0, 1.0, 0.2) + (0.0, 0.0, z_trap)
    reference = _magpylib_field(WOUND, currents, points)
    mine = WOUND.field_set(currents).field(points)
    np.testing.assert_allclose(mine, reference, rtol=1e-9, atol=1e-12 * np.abs(reference).max())


@pytest.mark.parametrize("z_trap", [0.0131, 0.0155])
def test_tracker_force_matches_magpylib_gradient(z_trap: float) -> None:
    # Reference: -W'(|B|) grad|B| / m with |B| from magpylib (as above) and its gradient by
    # central differences, step 1e-7 m (brute force, truncation ~1e-9 relative). The tracker's
    # summed-table kernel interpolates bilinearly: measured rms error 1.8e-4 and 1.2e-4 (the two
    # positions) of the rms acceleration on the default (65, 401) map; asserted 1e-3. Points
    # avoid the zero's cone.
    currents = tw.trap_currents(WOUND, [z_trap], GRADIENT).currents[0]
    rng = np.random.default_rng(7)
    points = np.column_stack((rng.uniform(0.0008, 0.003, 40) * rng.choice([-1, 1], 40),
                              rng.uniform(-0.003, 0.003, 40), z_trap + rng.uniform(-0.004, 0.004, 40)))
    step = 1e-7
    magnitude = [np.linalg.norm(_magpylib_field(WOUND, currents, points + step * e), axis=1)
                 - np.linalg.norm(_magpylib_field(WOUND, currents, points - step * e), axis=1) for e in np.eye(3)]
    reference = -OH.moment / OH.mass * np.stack(magnitude, axis=1) / (2 * step)
    field_map = CoilFieldMap(WOUND, 0.005, 0.006 + 3 * WOUND.pitch)
    kernel = SummedCoilField(field_map, WOUND.first, 0.006, OH)
    carrying = np.flatnonzero(currents)
    kernel.load(carrying, currents[carrying], z_trap)
    mine = np.empty((3, points.shape[0]))
    kernel.acceleration(np.ascontiguousarray(points.T), mine)
    error = np.sqrt(np.mean((mine.T - reference) ** 2) / np.mean(reference**2))
    assert error < 1e-3


SLOW = UniformMotion(1.0)  # trap speed [m/s] of the smooth case below
SMOOTH_DURATION = 4e-4  # [s]: the particles stay between two coil planes, off the zero


def _smooth_case() -> tuple[CoilFieldMap, np.ndarray, np.ndarray]:
    """A case where the device's force is smooth in space and time: a map with one cell in
    rho^2 and one pitch per axial cell (bilinear within a cell, so smooth there), 20 T/m
    currents planned at 0 and at the end only (linear in t), and particles 1.5-3 mm ahead
    of the zero that stay inside one cell (between the coil planes at 0 and 5 mm)."""
    table = CoilFieldMap(ROW, 0.0056, BOX[2] + 3 * ROW.pitch, (2, 9))
    plan = tw.trap_currents(ROW, SLOW.position(np.array([0.0, SMOOTH_DURATION])), 20.0).currents
    rng = np.random.default_rng(8)
    start = np.column_stack((rng.uniform(-2e-3, 2e-3, 6), rng.uniform(-2e-3, 2e-3, 6), rng.uniform(1.5e-3, 3e-3, 6),
                             rng.normal(0.0, 2.0, (6, 3)) + (0.0, 0.0, SLOW.speed)))
    return table, plan, start


def _solve_ivp_reference(table: CoilFieldMap, plan: np.ndarray, start: np.ndarray) -> np.ndarray:
    """Final trap-frame positions (n, 3) [m] from scipy.integrate.solve_ivp (DOP853, rtol 1e-13)
    of the same lab-frame equations r'' = a(r, t): the summed coil field (public
    SummedCoilField) of the currents interpolated linearly in time between the two plans."""
    n = start.shape[0]
    field = SummedCoilField(table, ROW.first, BOX[2] + table.z_step, OH)

    def rhs(t: float, y: np.ndarray) -> np.ndarray:
        currents = (1.0 - t / SMOOTH_DURATION) * plan[0] + t / SMOOTH_DURATION * plan[1]
        carrying = np.flatnonzero(currents)
        field.load(carrying, currents[carrying], float(SLOW.position(t)))
        out = np.empty((3, n))
        field.acceleration(np.ascontiguousarray(y[:3 * n].reshape(3, n)), out)
        return np.concatenate((y[3 * n:], out.ravel()))

    y0 = np.concatenate((start[:, :3].T.ravel(), start[:, 3:].T.ravel()))
    solution = solve_ivp(rhs, (0.0, SMOOTH_DURATION), y0, method="DOP853", rtol=1e-13, atol=1e-16)
    assert solution.success
    return solution.y[:3 * n, -1].reshape(3, n).T - (0.0, 0.0, float(SLOW.position(SMOOTH_DURATION)))


@pytest.mark.parametrize(("method", "order"), [("verlet", 2), ("yoshida4", 4)])
def test_device_integrator_order_against_solve_ivp(method: str, order: int) -> None:
    # Reference: scipy.integrate.solve_ivp (DOP853, an adaptive 8th-order Runge-Kutta
    # method, rtol 1e-13; its own error, from rtol 1e-11 against 1e-13, is 2e-14 m) of the
    # same lab-frame equations of motion in a smooth, time-dependent case (_smooth_case).
    # Halving the step must divide the final position error by 2^order: 4 for velocity
    # Verlet, 16 for Yoshida's 4th-order composition (H. Yoshida, Phys. Lett. A 150, 262
    # (1990), from memory). Measured: Verlet 4.7e-7, 1.2e-7, 2.9e-8 m (ratios 4.001,
    # 4.000); yoshida4 1.3e-9, 8.1e-11, 5.0e-12 m (ratios 16.001, 16.000).
    table, plan, start = _smooth_case()
    reference = _solve_ivp_reference(table, plan, start)
    errors = []
    for steps in (10, 20, 40):
        result = track_device(ROW, [0.0, SMOOTH_DURATION], OH, start, schedule=SLOW, gradient=20.0,
                              time_step=SMOOTH_DURATION / steps, duration=SMOOTH_DURATION, box_half_widths=BOX,
                              method=method, field_map=table)
        assert result.kept.all()
        assert result.method.startswith(method)
        errors.append(float(np.max(np.abs(result.final[:, :3] - reference))))
    assert errors[0] < {"verlet": 1e-6, "yoshida4": 3e-9}[method]
    for coarse, fine in zip(errors, errors[1:]):
        assert coarse / fine == pytest.approx(2**order, rel=0.05)
    # The force is not negligible: it moves the particles far more than the errors (free
    # flight x = x0 + v t, elementary kinematics, misses the reference by > 0.1 mm).
    free = start[:, :3] + start[:, 3:] * SMOOTH_DURATION - (0.0, 0.0, float(SLOW.position(SMOOTH_DURATION)))
    assert np.max(np.abs(free - reference)) > 1e-4


@pytest.mark.slow
def test_planned_waveforms_converge_as_the_plan_step_squared() -> None:
    # Reference: linear interpolation of a smooth waveform errs as h^2 / 8 max|I''| (the
    # textbook bound, e.g. Burden & Faires, Numerical Analysis, sect. 3.1, from memory), so
    # tracking with currents planned every h and interpolated must approach the run with
    # exact currents at every step with an error falling ~4x per halving of h. Measured
    # final-position rms differences 1.7e-5, 4.4e-6, 1.2e-6 m (ratios 3.8, 3.6).
    schedule = tw.constant_deceleration(20.0, 18.0, deceleration=1000.0)
    rng = np.random.default_rng(5)
    cloud = np.zeros((200, 6))
    cloud[:, :3] = rng.normal(0.0, 6e-4, (200, 3))
    cloud[:, 3:] = rng.normal(0.0, 0.3, (200, 3))
    cloud[:, 5] += 20.0
    common = dict(schedule=schedule, gradient=GRADIENT, time_step=2e-6, duration=schedule.duration, box_half_widths=BOX)
    exact = track_device(ROW, None, OH, cloud, **common)  # type: ignore[arg-type]
    differences = []
    for plan_step in (1.6e-4, 8e-5, 4e-5):
        plan = np.arange(0.0, schedule.duration + plan_step, plan_step)
        planned = track_device(ROW, plan, OH, cloud, **common)  # type: ignore[arg-type]
        assert np.array_equal(planned.kept, exact.kept)
        differences.append(float(np.sqrt(np.mean((planned.final[:, :3] - exact.final[:, :3]) ** 2))))
    assert differences[0] < 4e-5
    for coarse, fine in zip(differences, differences[1:]):
        assert 3.0 < coarse / fine < 5.5


@pytest.mark.slow
def test_plan_at_every_step_reproduces_exact_currents() -> None:
    # Independent route: a plan with one point per tracking step interpolates nothing, so it must
    # reproduce the run with exact currents (differences at rounding level only).
    schedule = tw.constant_deceleration(20.0, 19.0, deceleration=300.0)
    rng = np.random.default_rng(6)
    cloud = np.column_stack((rng.normal(0.0, 6e-4, (50, 3)), rng.normal(0.0, 0.3, (50, 3)) + (0.0, 0.0, 20.0)))
    steps = int(np.ceil(schedule.duration / 2e-6 * (1 - 1e-12)))
    plan = np.arange(steps + 1) * (schedule.duration / steps)
    common = dict(schedule=schedule, gradient=GRADIENT, time_step=2e-6, duration=schedule.duration, box_half_widths=BOX)
    exact = track_device(ROW, None, OH, cloud, **common)  # type: ignore[arg-type]
    planned = track_device(ROW, plan, OH, cloud, **common)  # type: ignore[arg-type]
    np.testing.assert_allclose(planned.final, exact.final, rtol=0.0, atol=1e-9)


@pytest.mark.slow
def test_record_every_thins_the_survival_curve() -> None:
    # The thinned curve must be the full curve at the recorded times (same run, other record).
    schedule = tw.constant_deceleration(20.0, 19.0, deceleration=300.0)
    cloud = np.zeros((30, 6))
    cloud[:, 2] = np.linspace(-0.008, 0.008, 30)
    cloud[:, 5] = 20.0
    common = dict(schedule=schedule, gradient=GRADIENT, time_step=2e-6, duration=schedule.duration, box_half_widths=BOX)
    full = track_device(ROW, None, OH, cloud, **common)  # type: ignore[arg-type]
    thin = track_device(ROW, None, OH, cloud, record_every=7, **common)  # type: ignore[arg-type]
    assert thin.times[-1] == full.times[-1]
    np.testing.assert_array_equal(thin.survival, full.survival[np.searchsorted(full.times, thin.times)])
    assert full.survival[0] < 1.0  # some start outside the box: the curve is not trivial


@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda: CoilFieldMap(ROW, 0.009, 0.02), "rho_max"),
        (lambda: CoilFieldMap(ROW, 0.005, 0.02, (1, 10)), "shape"),
        (lambda: UniformMotion(-1.0), "speed"),
        (lambda: track_device(ROW, None, OH, np.zeros((1, 6)), schedule=UniformMotion(1.0), gradient=1.0,
                              time_step=1e-5, duration=1e-4, box_half_widths=(0.006, 0.006, 0.01)), "box_half_widths"),
        (lambda: track_device(ROW, None, OH, np.zeros((1, 5)), schedule=UniformMotion(1.0), gradient=1.0,
                              time_step=1e-5, duration=1e-4, box_half_widths=BOX), "particles"),
        (lambda: track_device(ROW, [0.0, 5e-5], OH, np.zeros((1, 6)), schedule=UniformMotion(1.0), gradient=1.0,
                              time_step=1e-5, duration=1e-4, box_half_widths=BOX), "plan_times"),
        (lambda: track_device(ROW, None, OH, np.zeros((1, 6)), schedule=UniformMotion(1.0), gradient=1.0,
                              time_step=1e-5, duration=1e-4, box_half_widths=BOX, method="rk4"), "'verlet', 'yoshida4'"),
        (lambda: track_device(ROW, None, OH, np.zeros((1, 6)), schedule=UniformMotion(1.0), gradient=1.0,
                              time_step=1e-12, duration=1e-4, box_half_widths=BOX), "time_step"),
    ],
)
def test_bad_input_names_the_argument(call, name: str) -> None:  # type: ignore[no-untyped-def]
    with pytest.raises(tw.TiltwellError, match=name):
        call()
