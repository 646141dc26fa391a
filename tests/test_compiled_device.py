"""The compiled device step of ``track_device`` against its numpy route, case by case.

Reference: the numpy stepper of ``tiltwell.dynamics.device`` (whole-array numpy passes,
kept as the reference: ``devicekernel.ENABLED = False``). The compiled kernels of
``tiltwell.dynamics.devicekernel`` repeat its operations in its order without fastmath, so
every array of the result must be equal bit for bit: the kept set, the step each particle
left, the survival curve and the final states. All geometry is invented for the tests (a 5
mm pitch row of 8 mm coils as in tests/test_device.py, OH molecules).
"""

from __future__ import annotations

import threading
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numba
import numpy as np
import pytest
from scipy import constants

import tiltwell as tw
from tiltwell.dynamics import devicekernel
from tiltwell.dynamics.device import CoilFieldMap, track_device
from tiltwell.dynamics.results import TrackingResult

from conftest import AMU
from conftest import COIL_BOX as BOX

ROW = tw.CoilArray(count=40, pitch=0.005, radius=0.008, first=-0.02, turns=50)
OH = tw.species("OH")  # linear Zeeman state: the compiled route
GRADIENT = 20.0  # [T/m]
SCHEDULE = tw.constant_deceleration(20.0, 19.0, deceleration=3000.0)
STEP = 2e-6  # [s]


def _cloud(count: int = 240, seed: int = 11) -> np.ndarray:
    """Lab-frame particles (count, 6) around the trap at t = 0, hot enough that some leave
    through each of the six walls, with three that start outside the box."""
    rng = np.random.default_rng(seed)
    cloud = np.column_stack((rng.normal(0.0, 1.5e-3, (count, 3)), rng.normal(0.0, 12.0, (count, 3))))
    cloud[:3, :3] = [[0.0045, 0.0, 0.0], [0.0, -0.0045, 0.0], [0.0, 0.0, 0.0065]]
    return cloud + (0.0, 0.0, float(SCHEDULE.position(0.0)), 0.0, 0.0, float(SCHEDULE.velocity(0.0)))


def _both(*args: Any, **options: Any) -> tuple[TrackingResult, TrackingResult]:
    """(compiled, numpy) results of the same ``track_device`` call."""
    fast = track_device(*args, **options)
    devicekernel.ENABLED = False
    try:
        slow = track_device(*args, **options)
    finally:
        devicekernel.ENABLED = True
    return fast, slow


def _assert_identical(fast: TrackingResult, slow: TrackingResult) -> None:
    np.testing.assert_array_equal(fast.kept, slow.kept)
    np.testing.assert_array_equal(fast.lost_time, slow.lost_time)
    np.testing.assert_array_equal(fast.times, slow.times)
    np.testing.assert_array_equal(fast.survival, slow.survival)
    np.testing.assert_array_equal(fast.final, slow.final)  # bit for bit: no fastmath, same order
    assert fast.method == slow.method


def _common(**more: Any) -> dict[str, Any]:
    return dict(schedule=SCHEDULE, gradient=GRADIENT, time_step=STEP, duration=SCHEDULE.duration,
                box_half_widths=BOX, **more)


@pytest.mark.parametrize("planned", [False, True], ids=["exact-currents", "planned-waveforms"])
@pytest.mark.parametrize("method", ["verlet", "yoshida4"])
def test_compiled_equals_numpy_with_losses_at_every_wall(method: str, planned: bool) -> None:
    plan = np.linspace(0.0, 1.02 * SCHEDULE.duration, 23) if planned else None
    fast, slow = _both(ROW, plan, OH, _cloud(), **_common(method=method))
    _assert_identical(fast, slow)
    # The case is not trivial: some kept, some lost at t = 0, and some lost through each of
    # the six walls (the trap-frame final position of a leaver lies on or beyond its wall).
    assert 0.2 < fast.fraction < 0.8
    assert np.all(fast.lost_time[:3] == 0.0)  # the three placed outside
    leavers = fast.final[~fast.kept & (fast.lost_time > 0.0), :3]
    halves = np.array(BOX)
    for axis in range(3):
        assert np.any(leavers[:, axis] <= -halves[axis]) and np.any(leavers[:, axis] >= halves[axis])


def test_options_record_every_progress_and_given_map() -> None:
    # record_every thins the survival curve, progress shows a bar (tqdm), field_map replaces
    # the default table: with each, the compiled route still equals the numpy route.
    table = CoilFieldMap(ROW, 0.0057, BOX[2] + 3 * ROW.pitch, (33, 201))
    fast, slow = _both(ROW, None, OH, _cloud(seed=12), **_common(record_every=7, progress=True, field_map=table))
    _assert_identical(fast, slow)
    steps = round(SCHEDULE.duration / fast.time_step)
    assert fast.times.size == len(range(0, steps, 7)) + 1  # every 7th step and the end


def test_many_calls_and_compaction_equal_one_route() -> None:
    # More particles than one block and more steps than one call (devicekernel.WINDOWS force
    # evaluations a call), so the working set is compacted between calls as particles leave.
    cloud = _cloud(count=1500, seed=13)
    fast, slow = _both(ROW, None, OH, cloud, **_common(method="yoshida4"))
    _assert_identical(fast, slow)
    steps = round(SCHEDULE.duration / STEP)
    assert steps * 3 > 10 * devicekernel.WINDOWS and cloud.shape[0] > 10 * devicekernel.BLOCK


@pytest.fixture
def _threads() -> Iterator[int]:
    before = numba.get_num_threads()
    yield before
    numba.set_num_threads(before)


def test_threads_and_serial_kernel_give_the_same_result(_threads: int, monkeypatch: pytest.MonkeyPatch) -> None:
    # The threaded kernel on 1 and on all threads (the work threshold lowered so the
    # threads are used), and the serial kernel (a call from another thread): all identical.
    monkeypatch.setattr(devicekernel, "THREAD_WORK", 1)
    cloud = _cloud(count=700, seed=14)
    results = []
    for threads in sorted({1, int(numba.config.NUMBA_NUM_THREADS)}):  # type: ignore[attr-defined]
        numba.set_num_threads(threads)
        results.append(track_device(ROW, None, OH, cloud, **_common()))
    holder: list[TrackingResult] = []
    worker = threading.Thread(target=lambda: holder.append(track_device(ROW, None, OH, cloud, **_common())))
    worker.start()
    worker.join()
    devicekernel.ENABLED = False
    try:
        reference = track_device(ROW, None, OH, cloud, **_common())
    finally:
        devicekernel.ENABLED = True
    for result in results + holder:
        _assert_identical(result, reference)


def test_other_zeeman_models_take_the_numpy_route() -> None:
    # A Breit–Rabi state (an invented I = 3/2 atom, splitting h x 2 GHz, F=2 mF=1) is not
    # compiled: the call runs the numpy route and so equals it exactly.
    atom = tw.Species("test-21", 7 * AMU, tw.BreitRabi(1.5, constants.h * 2e9, F=2, mF=1))
    fast, slow = _both(ROW, None, atom, _cloud(count=40, seed=15), **_common())
    _assert_identical(fast, slow)


# --- the rigid twin of `tiltwell coils --track` from the row's own table ------------------


DEMO = Path(__file__).parents[1] / "src" / "tiltwell" / "workflows" / "data" / "demo.toml"


@pytest.fixture(scope="module")
def demo() -> dict[str, Any]:
    """The demo scenario's built parts, coil run, device box, twin table and phases."""
    from tiltwell.workflows import scenario as sc
    from tiltwell.workflows.coilrun import coil_run, coils_section, device_box
    from tiltwell.workflows.devicemodel import twin_table
    from tiltwell.workflows.report import build

    scenario = sc.load(DEMO)
    built = build(scenario)
    run = coil_run(scenario, built.schedule)
    return {"built": built, "run": run, "box": device_box(scenario, run.array), "table": twin_table(scenario),
            "phases": coils_section(scenario).phases}


def test_twin_table_map_equals_the_filament_map(demo: dict[str, Any]) -> None:
    # Reference: the rigid twin evaluated directly (PhaseAveragedField: every phase's coils,
    # exact elliptic-integral loop fields, gradient by central differences), the route
    # compare_device took before. The row's table of the same twin (devicemodel.twin_table,
    # a bicubic spline of the phase-averaged |B|) must give |B| within its stated accuracy
    # (fieldtable.TABLE_SHAPE: 1.8e-6 of the largest value; measured 1.1e-8 at these nodes),
    # and the rigid run's FieldMap forces within measured rms 2.4e-4 (asserted 1e-3) of the
    # largest, 4.0e-3 at most away from the zero (asserted 1e-2; at the box corners, the
    # table's rim); at the zero itself the direct central differences straddle the cone.
    from tiltwell.dynamics.compare import PhaseAveragedField
    from tiltwell.dynamics.fieldmap import FieldMap

    built, run, box, table, phases = demo["built"], demo["run"], demo["box"], demo["table"], demo["phases"]
    direct = PhaseAveragedField(run.array, run.gradient, phases)
    bounds = tuple((-h, h) for h in box)
    shape = (21, 21, 21)
    nodes = np.stack(np.meshgrid(*[np.linspace(lo, hi, n) for (lo, hi), n in zip(bounds, shape)], indexing="ij"),
                     axis=-1).reshape(-1, 3)
    exact = direct.magnitude(nodes)
    assert np.max(np.abs(table.magnitude(nodes) - exact)) < 1.8e-6 * np.max(exact)
    species = built.species
    old = FieldMap.from_trap(tw.Trap(direct, species, bounds), shape).forces.reshape(-1, 3)
    new = FieldMap.from_trap(tw.Trap(table, species, bounds), shape).forces.reshape(-1, 3)
    size = np.linalg.norm(old, axis=1)
    error = np.linalg.norm(new - old, axis=1)
    away = np.linalg.norm(nodes, axis=1) > 1e-9
    assert np.sqrt(np.mean(error[away] ** 2) / np.mean(size[away] ** 2)) < 1e-3
    assert np.max(error[away]) < 1e-2 * np.max(size)


def test_twin_table_keeps_the_same_fraction(demo: dict[str, Any]) -> None:
    # Reference: compare_device with the twin evaluated directly (twin=None, the old route).
    # With the row's table as the twin, the device run is unchanged (bit for bit) and the
    # rigid run's kept fraction may move only within the paired statistical error of the
    # two rigid runs (sqrt(n01 + n10 - (n01 - n10)^2 / n) / n, the McNemar variance):
    # measured 1 discordant particle of 800.
    from tiltwell.dynamics.compare import compare_device

    built, run, box, table, phases = demo["built"], demo["run"], demo["box"], demo["table"], demo["phases"]
    sample = built.beam.sample(800, seed=3)
    sample[:, 5] -= built.mismatch
    common: dict[str, Any] = dict(schedule=built.schedule, gradient=run.gradient, time_step=5e-6, box_half_widths=box,
                                  plan_times=run.times, phases=phases, field_map_shape=(21, 21, 21))
    old = compare_device(run.array, built.species, sample, **common)
    new = compare_device(run.array, built.species, sample, twin=table, **common)
    _assert_identical(new.device, old.device)
    only_old = int(np.count_nonzero(old.rigid.kept & ~new.rigid.kept))
    only_new = int(np.count_nonzero(new.rigid.kept & ~old.rigid.kept))
    n = sample.shape[0]
    paired = np.sqrt(max(only_old + only_new - (only_old - only_new) ** 2 / n, 1.0)) / n
    assert abs(new.rigid.fraction - old.rigid.fraction) <= 3.0 * paired
    assert 0.05 < old.rigid.fraction < 0.95  # the comparison is informative
