"""``tiltwell search``: its files against the library calls they come from, resuming, one-line
errors, Ctrl-C, the optimiser's answer against the closed-form optimum, and the search
figures' drawn data against the search's own columns."""

from __future__ import annotations

import json
import math
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from conftest import KRYPTON_SPEED_300K
from test_search import ideal
from tiltwell import scenario as sc
from tiltwell.cli import main
from tiltwell.figures import design_front, design_map
from tiltwell.figures.export import caution_of
from tiltwell.workflows import search as se
from tiltwell.workflows.optimise import front_of

GRID = ["--vary", "deceleration.deceleration=1e4:4e4:4", "--vary", "trap.gradient=80,120"]


@pytest.fixture()
def case(tmp_path: Path) -> Path:
    path = tmp_path / "case.toml"
    sc.save(ideal(), path)
    return path


def test_the_files_of_a_search_and_its_resume(case: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "out"
    assert main(["search", str(case), *GRID, "--max-length", "4", "--out", str(out), "--json", "--quiet"]) == 0
    printed = json.loads(capsys.readouterr().out)
    direct = se.search(sc.load(case), [se.parse_vary(GRID[1]), se.parse_vary(GRID[3])], max_length=4.0)
    assert (out / "search.csv").read_text() == direct.to_csv()
    assert printed["front_length"] == front_of(direct, "length").tolist() and printed["failed"] == 0
    assert {Path(p).name for p in printed["files"]} == {"search.csv", "search.nc", "front-length.png", "map.png"}
    table = np.genfromtxt(out / "search.csv", delimiter=",", skip_header=3, names=True)
    assert table.size == 8 and "length_m" in table.dtype.names
    lines = (out / "points.jsonl").read_bytes()
    assert main(["search", str(case), *GRID, "--max-length", "4", "--out", str(out), "--quiet"]) == 0
    assert (out / "points.jsonl").read_bytes() == lines  # everything was finished: nothing ran again
    assert "front of captured_fraction_energy against device length" in capsys.readouterr().out


@pytest.mark.parametrize(("arguments", "words"), [
    (["--vary", "trap.gradient=-5:5:3"], "[trap] gradient [T/m] must be"),
    (["--vary", "trap.gradient=50:150"], "--sample"),
    (["--vary", "trap.gradient=50:150:3", "--workers", "0"], "--workers must be in [1,"),
    (["--vary", "trap.gradient=50:150:3", "--max-length", "-2"], "max_length [m] must be a positive number"),
    (["--vary", "trap.gradient=50:150", "--optimise", "price"], "figure must be one of"),
])
def test_bad_requests_get_one_line(case: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                   arguments: list[str], words: str) -> None:
    assert main(["search", str(case), *arguments, "--out", str(tmp_path / "o"), "--quiet"]) == 2
    error = capsys.readouterr().err
    assert error.count("\n") == 1 and words in error, error


def test_a_results_folder_of_another_search_is_refused(case: Path, tmp_path: Path,
                                                       capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "out"
    assert main(["search", str(case), "--vary", "trap.gradient=80,120", "--out", str(out), "--quiet"]) == 0
    before = (out / "points.jsonl").read_bytes()
    assert main(["search", str(case), "--vary", "trap.gradient=80,130", "--out", str(out), "--quiet"]) == 2
    assert "holds another search" in capsys.readouterr().err
    assert (out / "points.jsonl").read_bytes() == before


@pytest.mark.slow
def test_ctrl_c_exits_130_in_one_line_and_the_same_command_resumes(case: Path, tmp_path: Path) -> None:
    out = tmp_path / "out"
    command = [sys.executable, "-m", "tiltwell", "search", str(case), "--vary", "deceleration.deceleration=1e4:4e4:30",
               "--out", str(out), "--quiet"]
    child = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    store = out / "points.jsonl"
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and (not store.exists() or store.read_bytes().count(b"\n") < 4):
        time.sleep(0.02)
    child.send_signal(signal.SIGINT)
    stdout, stderr = child.communicate(timeout=60)
    assert child.returncode == 130, stderr
    assert "Traceback" not in stderr and stdout.count("\n") == 1 and "the same command resumes" in stdout
    kept = store.read_bytes().count(b"\n") - 1
    assert 3 <= kept < 30
    finished = subprocess.run(command, capture_output=True, text=True, timeout=300)
    assert finished.returncode == 0, finished.stderr
    whole = se.search(sc.load(case), [se.parse_vary("deceleration.deceleration=1e4:4e4:30")])
    assert (out / "search.csv").read_text() == whole.to_csv()


@pytest.mark.slow
def test_the_optimiser_from_the_command_line(case: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """Under a 2.5 m limit the gentlest deceleration wins: a* = (v0^2 - vf^2) / (2 L) (kinematics;
    tests/test_optimise.py shows why from the tilted V-well's area)."""
    out = tmp_path / "best"
    assert main(["search", str(case), "--vary", "deceleration.deceleration=1e4:4e4", "--optimise",
                 "longitudinal_acceptance", "--max-length", "2.5", "--out", str(out)]) == 0
    best = sc.load(out / "optimum.toml")
    a_best = (KRYPTON_SPEED_300K**2 - 20.0**2) / (2 * 2.5)
    assert best.deceleration.deceleration == pytest.approx(a_best, rel=1e-2) and best.deceleration.length is None
    saved = json.loads((out / "optimum.json").read_text())
    assert saved["feasible"] and saved["point"]["deceleration.deceleration"] == best.deceleration.deceleration
    assert "margin to the length limit" in capsys.readouterr().out


def test_the_figures_draw_the_searchs_own_numbers() -> None:
    result = se.search(ideal(), [se.parse_vary("deceleration.deceleration=1e4:4e4:4"),
                                 se.parse_vary("trap.gradient=80,120")], max_length=4.0)
    front = design_front(result)
    (line,) = [a for a in front.axes[0].get_lines() if a.get_gid() == "front"]
    on = front_of(result, "length")
    np.testing.assert_array_equal(line.get_xdata(), result.values("length")[on])
    np.testing.assert_array_equal(line.get_ydata(), result.values("captured_fraction_energy")[on])
    assert caution_of(front) is None
    assert front.axes[0].get_xlabel() == "device length [m]"
    drawn = design_map(result)
    (mesh,) = [a for a in drawn.axes[0].collections if a.get_gid() == "map"]
    grid = result.values("captured_fraction_energy").reshape(4, 2)
    np.testing.assert_array_equal(np.asarray(mesh.get_array()).reshape(2, 4), grid.T)
    assert not math.isnan(float(np.nansum(grid)))


@pytest.mark.slow
def test_a_hardware_front_carries_the_caution() -> None:
    from tiltwell.workflows.demo import demo_scenario

    scenario = demo_scenario().replace("simulation", track=False)
    result = se.search(scenario, [se.parse_vary("deceleration.length=2.5,3.5")])
    figure = design_front(result, "worst_voltage")
    assert caution_of(figure) is not None and "electrical" in str(caution_of(figure)).lower()
    assert figure.axes[0].get_xlabel() == "largest coil voltage [V]"
