"""Design searches: points against itertools and scipy.stats.qmc by hand, rows against the
summary and the coil row's loads computed directly, the results file against kills and torn
lines, a Dask cluster against the serial run, the netCDF file against xarray's reader."""

from __future__ import annotations

import itertools
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from scipy.stats import qmc

from conftest import KRYPTON_SPEED_300K
from tiltwell import scenario as sc
from tiltwell import summarise
from tiltwell._base.validation import TiltwellError
from tiltwell.workflows import search as se
from tiltwell.workflows.coilreport import row_load
from tiltwell.workflows.demo import demo_scenario


def ideal(**simulation: object) -> sc.Scenario:
    """The demo's [trap] quadrupole alone (no coil row, no absolute yield): ~0.1 s a point."""
    data = demo_scenario().to_dict()
    for name in ("coils", "detector"):
        data.pop(name)
    for name in ("pressure", "seed_fraction", "rotational_temperature"):
        data["beam"].pop(name)
    data["simulation"].update({"track": False, "samples": 401, "particles": 2000, **simulation})
    return sc.from_dict(data)


def test_a_grid_is_the_cartesian_product_first_key_slowest() -> None:
    a = se.parse_vary("deceleration.deceleration=1e4:3e4:3")
    b = se.parse_vary("trap.gradient=80,100")
    assert a.values == (1e4, 2e4, 3e4) and a.unit == "m/s^2"
    points = se.design_points([a, b])
    expected = list(itertools.product((1e4, 2e4, 3e4), (80.0, 100.0)))
    assert [(p[a.name], p[b.name]) for p in points] == expected
    log = se.parse_vary("deceleration.deceleration=1e3:1e5:3:log")
    np.testing.assert_allclose(log.values, [1e3, 1e4, 1e5], rtol=1e-12)


def test_a_sample_is_scipy_qmc_scaled_to_the_ranges() -> None:
    """The same scrambled sequences drawn here with scipy.stats.qmc and scaled by hand; and
    the Latin-hypercube property itself: each of n equal strata of a range holds one point."""
    varies = [se.parse_vary("deceleration.deceleration=1e4:3e4"), se.parse_vary("trap.gradient=50:150:log")]
    for method, engine in (("lhs", qmc.LatinHypercube), ("sobol", qmc.Sobol)):
        points = se.design_points(varies, 16, method=method, seed=7)
        unit = engine(d=2, seed=np.random.default_rng(7)).random(16)
        np.testing.assert_allclose([p["deceleration.deceleration"] for p in points], 1e4 + 2e4 * unit[:, 0], rtol=1e-12)
        np.testing.assert_allclose([p["trap.gradient"] for p in points], 50 * 3.0 ** unit[:, 1], rtol=1e-12)
    lhs = np.array([p["deceleration.deceleration"] for p in se.design_points(varies, 50, seed=3)])
    assert sorted(np.floor((lhs - 1e4) / 2e4 * 50).astype(int)) == list(range(50))


def test_an_integer_key_stays_an_integer() -> None:
    turns, active = se.parse_vary("coils.turns=10:30"), se.parse_vary("coils.active=2:8")
    points = se.design_points([turns, active], 20, seed=1)
    assert {p["coils.turns"] for p in points} <= set(range(10, 31)) and len({p["coils.turns"] for p in points}) > 10
    assert {p["coils.active"] for p in points} == {2.0, 4.0, 6.0, 8.0}  # an even key: the nearest even integer
    changed = se.point_scenario(demo_scenario(), points[0])
    assert changed.coils is not None and changed.coils.turns == int(points[0]["coils.turns"])
    assert isinstance(changed.coils.turns, int)


@pytest.mark.parametrize(("text", "words"), [
    ("deceleration.deceleration=-1:5:3", ("[deceleration] deceleration", "m/s^2")),
    ("deceleration.decelration=1:2:3", ("unknown key", "did you mean 'deceleration'")),
    ("trap.gradient=5:1:3", ("LOW < HIGH",)),
    ("trap.gradient", ("section.key=LOW:HIGH",)),
    ("trap.gradient=a:b", ("section.key=LOW:HIGH",)),
    ("species.name=1:2", ("species.name holds text", "one number")),
    ("trap.gradient=0:100:2", ("[trap] gradient [T/m]", "(0, 100000]")),
    ("deceleration.rise_time=0:1e-5:2:log", ("logarithmic range needs LOW > 0",)),
])
def test_bad_varied_keys_are_refused_naming_the_key(text: str, words: tuple[str, ...]) -> None:
    with pytest.raises(TiltwellError) as caught:
        se.parse_vary(text)
    assert all(word in str(caught.value) for word in words), str(caught.value)


def test_a_search_needs_compatible_keys() -> None:
    a, length = se.parse_vary("deceleration.deceleration=1e4:2e4:2"), se.parse_vary("deceleration.length=1:2:2")
    with pytest.raises(TiltwellError, match="not both"):
        se.design_points([a, length])
    with pytest.raises(TiltwellError, match="--sample"):
        se.design_points([se.parse_vary("trap.gradient=50:150")])
    with pytest.raises(TiltwellError, match="fills ranges"):
        se.design_points([se.parse_vary("trap.gradient=50,150")], 4)


def test_a_row_is_the_summary_of_the_scenario_so_changed() -> None:
    """Each row against summarise() of the scenario changed by hand, key by key."""
    scenario = ideal()
    result = se.search(scenario, [se.parse_vary("deceleration.deceleration=1.5e4,3e4")], max_length=4.0)
    for point, row in zip(result.points, result.rows):
        assert row is not None
        direct = summarise(scenario.replace("deceleration", deceleration=point["deceleration.deceleration"],
                                            length=None))
        for name in ("length", "longitudinal_acceptance", "acceptance_6d", "captured_fraction_energy"):
            assert row[name] == pytest.approx(direct[name], rel=1e-12), name
        assert row["slow_particles"] is None and row["worst_voltage"] is None and row["hardware_passed"] is None
    # L = (v0^2 - vf^2) / 2a: 4.9 m at 1.5e4 m/s^2 is beyond the 4 m limit, 2.5 m at 3e4 within it
    np.testing.assert_allclose(result.values("length"), (KRYPTON_SPEED_300K**2 - 20.0**2) / (2 * np.array([1.5e4, 3e4])),
                               rtol=1e-9)
    assert result.values("feasible").tolist() == [0.0, 1.0]
    assert result.figure_name() == "captured_fraction_energy"


@pytest.mark.slow
def test_the_hardware_columns_are_the_coil_rows_verdicts() -> None:
    """On the demo's coil row: worst values and margins as row_load gives them, and a
    voltage limit below the worst voltage makes the point infeasible."""
    scenario = demo_scenario().replace("simulation", track=False)
    tight = scenario.replace("limits", voltage=300.0)
    for case in (scenario, tight):
        row = se.evaluate(case, {"deceleration.length": 3.0})
        load = row_load(case.replace("deceleration", length=3.0))
        for verdict in load.verdicts:
            assert row[f"worst_{verdict.quantity}"] == pytest.approx(verdict.value, rel=1e-12)
            assert row[f"{verdict.quantity}_margin"] == pytest.approx(verdict.limit / verdict.value - 1, rel=1e-9)
        assert row["slow_particles_low"] < row["slow_particles"] < row["slow_particles_high"]
    assert row["worst_voltage"] > 300.0 and row["voltage_margin"] < 0
    assert row["hardware_passed"] == 0.0 and row["feasible"] == 0.0


GRID = ["deceleration.deceleration=1e4:4e4:4", "trap.gradient=80,100,120"]

KILLED_SEARCH = """
import sys
from tiltwell import scenario as sc
from tiltwell.workflows import search as se
scenario = sc.load(sys.argv[1])
se.search(scenario, [se.parse_vary(t) for t in sys.argv[3:]], store=sys.argv[2])
"""


def test_a_search_killed_mid_way_resumes_to_the_same_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """SIGKILL a search in another process after some points; resuming computes only the
    rest, and its CSV is byte for byte that of an uninterrupted run."""
    scenario = ideal()
    varies = [se.parse_vary(text) for text in GRID]
    whole = se.search(scenario, varies).to_csv()
    path = tmp_path / "case.toml"
    sc.save(scenario, path)
    store = tmp_path / "points.jsonl"
    child = subprocess.Popen([sys.executable, "-c", KILLED_SEARCH, str(path), str(store), *GRID])
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and (not store.exists() or store.read_bytes().count(b"\n") < 4):
        time.sleep(0.02)
    os.kill(child.pid, signal.SIGKILL)
    child.wait()
    finished = store.read_bytes().count(b"\n") - 1
    assert 3 <= finished < 12
    calls = []
    real = se.evaluate
    monkeypatch.setattr(se, "evaluate", lambda *args: calls.append(args) or real(*args))
    resumed = se.search(sc.load(path), varies, store=store)
    assert len(calls) == 12 - finished
    assert resumed.to_csv() == whole
    assert se.read_search(store).to_csv() == whole


def test_a_torn_last_line_is_dropped_and_another_search_refused(tmp_path: Path) -> None:
    scenario = ideal()
    varies = [se.parse_vary("deceleration.deceleration=1e4:3e4:3")]
    store = tmp_path / "points.jsonl"
    full = se.search(scenario, varies, store=store).to_csv()
    lines = store.read_bytes().split(b"\n")
    store.write_bytes(b"\n".join(lines[:3]) + b"\n" + lines[3][:25])  # point 2 cut mid-line by a kill
    assert se.read_search(store).rows[2] is None
    assert se.search(scenario, varies, store=store).to_csv() == full
    assert store.read_bytes().count(b"\n") == 4 and all(json.loads(line) for line in store.read_bytes().splitlines())
    with pytest.raises(TiltwellError, match="another search"):
        se.search(scenario.replace("simulation", seed=1), varies, store=store)
    store.write_bytes(b"deceleration [m/s^2]\n")
    with pytest.raises(TiltwellError, match="not a tiltwell search results file"):
        se.search(scenario, varies, store=store)


def test_a_failing_point_records_its_error_and_the_search_goes_on(monkeypatch: pytest.MonkeyPatch,
                                                                  tmp_path: Path) -> None:
    """The error is kept as the point's row; resumed (the fault gone, as a lost worker
    comes back), the failed point runs again and only it."""
    real = se.evaluate
    calls: list[float] = []

    def flaky(scenario: sc.Scenario, point: dict, max_length: float | None = None) -> dict:  # type: ignore[type-arg]
        calls.append(point["deceleration.deceleration"])
        if point["deceleration.deceleration"] == 2e4 and len(calls) <= 3:
            raise ZeroDivisionError("a fault in one point")
        return real(scenario, point, max_length)

    monkeypatch.setattr(se, "evaluate", flaky)
    varies, store = [se.parse_vary("deceleration.deceleration=1e4:3e4:3")], tmp_path / "points.jsonl"
    result = se.search(ideal(), varies, store=store)
    assert result.rows[1] is None and result.errors == {1: "ZeroDivisionError: a fault in one point"}
    assert result.rows[0] is not None and result.rows[2] is not None
    assert "ZeroDivisionError: a fault in one point" in result.to_csv().splitlines()[5]
    resumed = se.search(ideal(), varies, store=store)
    assert calls == [1e4, 2e4, 3e4, 2e4] and resumed.errors == {} and resumed.rows[1] is not None
    assert resumed.to_csv() == se.search(ideal(), varies).to_csv()


@pytest.mark.slow
def test_a_dask_cluster_gives_the_serial_search(tmp_path: Path) -> None:
    distributed = pytest.importorskip("distributed")
    scenario = ideal()
    varies = [se.parse_vary(text) for text in GRID]
    serial = se.search(scenario, varies).to_csv()
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, dashboard_address=None) as cluster:
        with distributed.Client(cluster) as client:
            spread = se.search(scenario, varies, executor=client.get_executor(), store=tmp_path / "p.jsonl")
    assert spread.to_csv() == serial


def test_a_grid_is_a_labelled_data_set_in_netcdf(tmp_path: Path) -> None:
    """Written with scipy's netCDF writer, read back by xarray's reader."""
    xr = pytest.importorskip("xarray")
    result = se.search(ideal(), [se.parse_vary(text) for text in GRID])
    path = result.to_netcdf(tmp_path / "grid.nc")
    with xr.open_dataset(path, engine="scipy") as data:
        assert data["longitudinal_acceptance"].dims == ("deceleration.deceleration", "trap.gradient")
        np.testing.assert_array_equal(data["trap.gradient"].values, [80.0, 100.0, 120.0])
        assert data["length"].attrs["units"] == "m" and data["deceleration.deceleration"].attrs["units"] == "m/s^2"
        table = data["captured_fraction_energy"].values
        for i, point in enumerate(result.points):
            row = result.rows[i]
            assert row is not None
            j, k = divmod(i, 3)
            assert table[j, k] == row["captured_fraction_energy"]
            assert data["length"].sel({"deceleration.deceleration": point["deceleration.deceleration"],
                                       "trap.gradient": point["trap.gradient"]}).item() == row["length"]
        assert "[deceleration]" in data.attrs["scenario"]
    sampled = se.search(ideal(), [se.parse_vary("trap.gradient=80:120")], sample=2)
    with pytest.raises(TiltwellError, match="only a grid"):
        sampled.to_dataset()
