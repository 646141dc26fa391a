"""A whole scenario: summary numbers against closed forms; sweeps serial and on Dask."""

from __future__ import annotations

import csv
import re
from pathlib import Path

import numpy as np
import pytest

from conftest import KRYPTON_SPEED_300K
from tiltwell import scenario as sc
from tiltwell import species, summarise, sweep
from tiltwell.coils.array import CoilArray, waveforms
from tiltwell.coils.schedule import coil_timing, constant_deceleration
from tiltwell.physics.hardware import ELECTRICAL_CAUTION
from tiltwell.workflows.report import UNITS
from tiltwell.workflows.sweep import COLUMNS, sweep_csv

DEMO = Path(sc.__file__).with_name("data") / "demo.toml"


def _small(particles: int = 2000, track: bool = True, first_estimate: bool = False) -> sc.Scenario:
    return sc.load(DEMO).replace("simulation", particles=particles, track=track, first_estimate=first_estimate)


@pytest.fixture(scope="module")
def summary() -> dict:  # type: ignore[type-arg]
    """The demo through its [trap] quadrupole (the first estimate), whose closed forms these tests know."""
    return summarise(_small(first_estimate=True))


@pytest.mark.slow
def test_summary_kinematics_against_closed_forms(summary: dict) -> None:  # type: ignore[type-arg]
    """v0 = sqrt(5 k T / m_Kr) (monatomic terminal velocity; Kr 83.798 u, standard atomic
    weight from memory); a = (v0^2 - vf^2) / (2 L); t = (v0 - vf) / a (kinematics)."""
    v0 = KRYPTON_SPEED_300K  # the closed form above, written out in conftest
    assert summary["initial_velocity"] == pytest.approx(v0, rel=1e-9)
    assert summary["deceleration"] == pytest.approx((v0**2 - 20.0**2) / (2 * 3.0), rel=1e-9)
    assert summary["duration"] == pytest.approx((v0 - 20.0) / summary["deceleration"], rel=1e-9)
    assert summary["length"] == pytest.approx(3.0, rel=1e-12)


def test_summary_trap_numbers_against_closed_forms(summary: dict) -> None:  # type: ignore[type-arg]
    """Ideal quadrupole: critical deceleration mu B'/m; axis depth at a tilt f = m a is
    D (1 - f/c) with D = mu B_max, c = mu B' (tests/test_acceptance.py derives it)."""
    oh = species("OH")
    c, depth = oh.moment * 100.0, oh.moment * 0.32
    assert summary["critical_deceleration"] == pytest.approx(c / oh.mass, rel=1e-9)
    expected = depth * (1 - oh.mass * summary["deceleration"] / c)
    assert summary["escape_energy"] == pytest.approx(expected, rel=1e-6)
    assert summary["depth"] == pytest.approx(expected, rel=1e-6)


def test_summary_has_every_key_with_its_unit(summary: dict) -> None:  # type: ignore[type-arg]
    for key in ("longitudinal_acceptance", "transverse_acceptance", "acceptance_6d", "escape_energy",
                "captured_fraction_overlap", "captured_fraction_energy", "captured_fraction_mc", "mc_particles",
                "deceleration", "initial_velocity", "length", "duration", "final_velocity"):
        assert key in summary and key in summary["units"]
    assert summary["mc_particles"] == 2000
    # the row: coil j at j x 8 mm carries current while the trap (0 to 3.0 m) is within 3 pitches of it
    # (6 active, tapered): integers j with -3 < j < 3.0 / 0.008 + 3 = 378, i.e. -2 ... 377
    assert summary["coils"] == len(range(-2, 378)) == 380
    assert "electrical-safety" in summary["caution"]
    # the three estimates agree to within their noise and model differences on this case
    fractions = [summary[k] for k in ("captured_fraction_overlap", "captured_fraction_energy", "captured_fraction_mc")]
    assert max(fractions) - min(fractions) < 0.05


#: Sweep points at 0.2, 0.4, 0.6 and 0.8 of the demo's critical deceleration mu B'/m (OH, 100 T/m:
#: 1.1135e-23 J/T x 100 T/m / 2.8234e-26 kg = 3.94e4 m/s^2), so every point still holds molecules.
SWEEP_POINTS = np.array([8e3, 1.6e4, 2.4e4, 3.2e4])


@pytest.fixture(scope="module")
def serial_rows() -> list[dict]:  # type: ignore[type-arg]
    return sweep(_small(500, track=False), SWEEP_POINTS)


@pytest.mark.slow
def test_sweep_trades_length_against_acceptance(serial_rows: list[dict]) -> None:  # type: ignore[type-arg]
    """Harder deceleration: shorter machine (L = (v0^2 - vf^2) / 2a exactly), fewer coils,
    smaller acceptance and captured fraction."""
    lengths = np.array([r["length"] for r in serial_rows])
    assert lengths * SWEEP_POINTS == pytest.approx(np.full(4, lengths[0] * SWEEP_POINTS[0]), rel=1e-12)
    for key in ("coils", "longitudinal_acceptance", "transverse_acceptance", "acceptance_6d",
                "captured_fraction_overlap", "captured_fraction_energy"):
        values = [r[key] for r in serial_rows]
        assert all(b < a for a, b in zip(values, values[1:])), key


@pytest.mark.slow
def test_sweep_on_a_dask_cluster_equals_the_serial_sweep(serial_rows: list[dict]) -> None:  # type: ignore[type-arg]
    """The same points through a Dask LocalCluster's concurrent.futures executor."""
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, dashboard_address=None) as cluster:
        with distributed.Client(cluster) as client:
            rows = sweep(_small(500, track=False), SWEEP_POINTS, executor=client.get_executor())
    assert rows == serial_rows


@pytest.mark.slow
def test_sweep_over_lengths_and_csv(tmp_path: Path) -> None:
    rows = sweep(_small(300, track=False), lengths=[1.0, 2.0])
    assert [r["length"] for r in rows] == pytest.approx([1.0, 2.0], rel=1e-12)
    path = tmp_path / "sweep.csv"
    text = sweep_csv(rows, path)
    lines = path.read_text().splitlines()
    assert all(line.startswith("# ") for line in lines[:3])  # title, units, note
    assert lines[3].split(",")[0] == "deceleration [m/s^2]" and len(lines) == 3 + 3
    assert text == path.read_text()
    assert len(lines[4].split(",")) == len(COLUMNS)


@pytest.mark.parametrize(
    ("kwargs", "word"),
    [({}, "exactly one"), ({"decelerations": [1e4], "lengths": [1.0]}, "exactly one"),
     ({"decelerations": [-1.0]}, "positive"), ({"decelerations": [[1.0]]}, "decelerations")],
    ids=["neither", "both", "negative", "2-d"],
)
def test_sweep_bad_input(kwargs: dict, word: str) -> None:  # type: ignore[type-arg]
    with pytest.raises(ValueError, match=word):
        sweep(_small(10, track=False), **kwargs)


@pytest.mark.slow
def test_time_of_flight_in_the_summary() -> None:
    """With a detector 0.2 m beyond the released trap (final speed 20 m/s) the mean
    arrival time is near 0.2 m / 20 m/s = 10 ms; the spread comes from the trap-frame
    velocities (under 10 m/s in the first estimate's well: axis depth mu B_max (1 - a/c) =
    96 mK for OH at 0.32 T, a/c = 0.63, i.e. sqrt(2 D / m) = 9.7 m/s), so 20 % brackets it."""
    summary = summarise(sc.load(DEMO).replace("simulation", particles=2000, detector_distance=0.2,
                                              first_estimate=True))
    assert summary["arrival_time_mean"] == pytest.approx(0.2 / 20.0, rel=0.2)
    assert 0 < summary["arrival_time_rms"] < summary["arrival_time_mean"]
    assert summary["units"]["arrival_time_mean"] == "s"


# ---- one layout for every table tiltwell writes ---------------------------------------------

#: A header cell: a lower-case name, one space, the unit in brackets (no comma, no bracket inside).
HEADER_CELL = re.compile(r"^[a-z][a-z0-9_]* \[[^\[\],]+\]$")


def _tables(tmp_path: Path) -> dict[str, tuple[Path, tuple[str, ...], np.ndarray]]:
    """The coil timing, the coil waveforms and a sweep, written by tiltwell, each with its
    expected numpy column names and the numbers (rows x columns) it was given."""
    schedule = constant_deceleration(400.0, 40.0, deceleration=8e4)  # invented numbers
    timing = coil_timing(schedule, 0.05, peak_current=300.0, rise_time=5e-6)
    timing.to_csv(tmp_path / "timing.csv")
    size = timing.positions.size
    timing_values = np.column_stack([np.arange(size), timing.positions, timing.passing_times, timing.on_times,
                                     timing.off_times, np.full(size, 300.0), np.full(size, timing.rise_time)])
    row = CoilArray(count=9, pitch=0.005, radius=0.006, first=-0.004, max_current=500.0)  # invented coil row
    times = np.linspace(0.0, 0.004, 9)
    plan = waveforms(row, constant_deceleration(12.0, 2.0, deceleration=2500.0), 2.0, times)
    plan.to_csv(tmp_path / "waveforms.csv", times)
    used = np.arange(row.count)  # a column for every coil of the row
    rows = [{name: (j + 1) * 10.0 ** (i - 3) for j, name in enumerate(COLUMNS)} for i in range(4)]  # invented
    for i, values in enumerate(rows):
        values["coils"] = 10 + i
    sweep_csv(rows, tmp_path / "sweep.csv")
    sweep_names = tuple(name + "_" + "".join(c for c in UNITS.get(name, "1") if c.isalnum()) for name in COLUMNS)
    return {
        "timing": (tmp_path / "timing.csv", ("index_1", "position_m", "passing_time_s", "on_time_s", "off_time_s",
                                             "peak_current_A", "rise_time_s"), timing_values),
        "waveforms": (tmp_path / "waveforms.csv", ("time_s", *(f"coil_{k}_A" for k in used)),
                      np.column_stack([times, plan.currents[:, used]])),
        "sweep": (tmp_path / "sweep.csv", sweep_names, np.array([[r[name] for name in COLUMNS] for r in rows])),
    }


def test_every_table_has_comments_then_one_unit_header_row(tmp_path: Path) -> None:
    """Read back with the standard library's csv module: three ``# `` lines (title, units,
    caution or note), one header row of ``name [unit]`` cells, then the numbers bit for bit."""
    for kind, (path, _, values) in _tables(tmp_path).items():
        lines = path.read_text(encoding="utf-8").splitlines()
        assert all(line.startswith("# ") for line in lines[:3]) and not lines[3].startswith("#"), kind
        assert lines[1].startswith("# units: SI"), kind
        header, *body = csv.reader(lines[3:])
        assert len(header) == values.shape[1] and all(HEADER_CELL.match(cell) for cell in header), (kind, header)
        np.testing.assert_array_equal(np.array(body, dtype=float), values, err_msg=kind)
        if kind != "sweep":  # the two tables that size hardware carry the caution
            assert lines[2] == f"# {ELECTRICAL_CAUTION}", kind


def test_numpy_reads_every_table_in_one_line(tmp_path: Path) -> None:
    """The reading recipes the docstrings give: ``numpy.genfromtxt(path, delimiter=",",
    skip_header=3, names=True)`` (named columns) and ``numpy.loadtxt(path, delimiter=",",
    skiprows=4)``; ``genfromtxt(..., comments="#", names=True)`` does not work (it takes its
    names from the first comment line), so it is not offered."""
    for kind, (path, names, values) in _tables(tmp_path).items():
        named = np.genfromtxt(path, delimiter=",", skip_header=3, names=True)
        assert named.dtype.names == names, kind
        np.testing.assert_array_equal(np.column_stack([named[name] for name in names]), values, err_msg=kind)
        np.testing.assert_array_equal(np.loadtxt(path, delimiter=",", skiprows=4, ndmin=2), values, err_msg=kind)
        with pytest.raises(ValueError):
            np.genfromtxt(path, delimiter=",", comments="#", names=True)


def test_a_sweep_value_not_computed_is_an_empty_cell(tmp_path: Path) -> None:
    rows = [{name: 1.0 for name in COLUMNS}]
    rows[0]["captured_fraction_mc"] = None
    text = sweep_csv(rows)
    assert text.splitlines()[4].split(",")[COLUMNS.index("captured_fraction_mc")] == ""
    path = tmp_path / "sweep.csv"
    path.write_text(text)
    named = np.genfromtxt(path, delimiter=",", skip_header=3, names=True)
    assert np.isnan(named["captured_fraction_mc_1"]) and named["deceleration_ms2"] == 1.0
