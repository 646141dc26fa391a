"""The command line's small things, and the workflow that gathers a scenario's figure data.

- ``tiltwell --version`` prints ``tiltwell.__version__`` (and the installed distribution's
  version, read by the standard library's ``importlib.metadata``);
- a reader that closes the pipe early (``tiltwell keys | head -1``) ends the command
  quietly with status 0, checked with real subprocess pipes;
- ``tiltwell --help`` describes the job and lists every subcommand; every positional
  argument of every subcommand has help text (the argparse parser walked);
- :func:`tiltwell.workflows.figure_data.scenario_figure_data` returns the numbers of the
  library calls it wraps, and these against closed forms: the tilted-V separatrix area of
  the ideal quadrupole, constant-deceleration kinematics, free flight to the detector.
"""

from __future__ import annotations

import argparse
import importlib.metadata
import math
import subprocess
import sys
from typing import Any

import numpy as np
import pytest

import tiltwell as tw
from tiltwell import scenario
from tiltwell.cli import DEMO_SCENARIO, build_parser, main
from tiltwell.workflows.figure_data import (
    ACCEPTANCE_POINTS,
    ACCEPTANCE_SPAN,
    CURRENT_PITCHES,
    DRAWN_PARTICLES,
    SWEEP_FRACTIONS,
    SWEEP_PARTICLES,
    ScenarioFigureData,
    coil_figure_data,
    scenario_figure_data,
)
from tiltwell.workflows.report import build, estimate

COMMAND = [sys.executable, "-m", "tiltwell"]
SUBCOMMANDS = ["run", "sweep", "search", "demo", "figures", "keys", "species", "quadrupole", "coils", "calibrate"]
#: Seconds a subprocess may take (imports included) before the test gives up on it.
TIMEOUT = 120.0


# --- --version -------------------------------------------------------------------------------


def test_version_prints_the_package_version(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as stop:
        main(["--version"])
    assert stop.value.code == 0
    assert capsys.readouterr().out == f"tiltwell {tw.__version__}\n"


def test_version_agrees_with_the_installed_distribution() -> None:
    """``python -m tiltwell --version`` against the version the packaging metadata records
    (pyproject.toml, read back by importlib.metadata)."""
    done = subprocess.run([*COMMAND, "--version"], capture_output=True, text=True, timeout=TIMEOUT, check=False)
    assert done.returncode == 0 and done.stderr == ""
    assert done.stdout == f"tiltwell {importlib.metadata.version('tiltwell')}\n"


# --- a pipe closed early ---------------------------------------------------------------------


@pytest.mark.parametrize("arguments", [["keys"], ["species"]], ids=["keys", "species"])
def test_reader_gone_before_any_output_is_a_quiet_success(arguments: list[str]) -> None:
    """The read end is closed before the command writes (it is still importing), so its
    first write meets a closed pipe: status 0, nothing on standard error."""
    child = subprocess.Popen([*COMMAND, *arguments], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    assert child.stdout is not None and child.stderr is not None
    child.stdout.close()
    error = child.stderr.read()
    child.stderr.close()
    assert child.wait(timeout=TIMEOUT) == 0
    assert error == b""


def test_reader_that_takes_one_line_like_head() -> None:
    """``tiltwell keys | head -1``: the reader takes the first line and closes the pipe."""
    child = subprocess.Popen([*COMMAND, "keys"], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    assert child.stdout is not None and child.stderr is not None
    first = child.stdout.readline()
    child.stdout.close()
    error = child.stderr.read()
    child.stderr.close()
    assert child.wait(timeout=TIMEOUT) == 0
    assert first.startswith(b"[") and error == b""  # the first section heading of `tiltwell keys`


def test_errors_are_still_one_line_with_status_2(tmp_path: Any, capsys: pytest.CaptureFixture[str]) -> None:
    status = main(["run", str(tmp_path / "missing.toml")])
    error = capsys.readouterr().err
    assert status == 2 and len(error.strip().splitlines()) == 1 and error.startswith("tiltwell: error:")


# --- --help ----------------------------------------------------------------------------------


def subcommands(parser: argparse.ArgumentParser) -> dict[str, argparse.ArgumentParser]:
    """The subcommand parsers by name (argparse keeps them in its subparsers action)."""
    found: dict[str, argparse.ArgumentParser] = {}
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            found.update(action.choices)
    return found


def test_help_describes_the_job_and_lists_every_subcommand() -> None:
    done = subprocess.run([*COMMAND, "--help"], capture_output=True, text=True, timeout=TIMEOUT, check=False)
    assert done.returncode == 0 and done.stderr == ""
    text = " ".join(done.stdout.split())  # argparse wraps the lines
    assert "decelerate" in text and "acceptance" in text and "captured" in text
    assert "--version" in text
    for name in SUBCOMMANDS:
        assert f" {name} " in text, name


def test_every_subcommand_has_help_and_a_description() -> None:
    parser = build_parser()
    found = subcommands(parser)
    assert sorted(found) == sorted(SUBCOMMANDS)
    helps = {choice.dest: choice.help for action in parser._actions
             if isinstance(action, argparse._SubParsersAction) for choice in action._choices_actions}
    for name, sub in found.items():
        assert helps[name], name
        assert sub.description, name


@pytest.mark.parametrize("name", SUBCOMMANDS)
def test_every_positional_argument_has_help(name: str) -> None:
    sub = subcommands(build_parser())[name]
    positional = [action for action in sub._actions if not action.option_strings]
    for action in positional:
        assert action.help and action.help != argparse.SUPPRESS, f"{name} {action.dest}"
    if name in ("run", "sweep", "search", "figures", "coils"):
        assert [action.dest for action in positional] == ["file"]


# --- the figure data of a scenario -----------------------------------------------------------

GRADIENT, MAX_FIELD = 100.0, 0.32  # T/m, T: the demo's ideal quadrupole (typed from its [trap])
EDGE = MAX_FIELD / GRADIENT  # m
OH = tw.species("OH")


def tilted_v_area(a: float) -> float:
    """Separatrix area [m·m/s] of the tilted V well of an ideal quadrupole of finite depth
    on its axis, U = mu min(B'|z|, B_max) - m a z, escaping over the front kink at z = EDGE
    (the same elementary integral, derived by hand, as tests/test_figures.py):
    2 sqrt(2/m) (2/3) E^(3/2) (1/(k - m a) + 1/(k + m a)), E = (k - m a) EDGE, k = mu B'."""
    k, m = OH.moment * GRADIENT, OH.mass
    energy = (k - m * a) * EDGE
    return 2.0 * math.sqrt(2.0 / m) * (2.0 / 3.0) * energy**1.5 * (1.0 / (k - m * a) + 1.0 / (k + m * a))


@pytest.fixture(scope="module")
def demo() -> scenario.Scenario:
    """The shipped demo with few particles and a coarse 6-D tolerance (quick), tracked, with
    a detector 0.1 m beyond the trap at release and three trap phases per pitch; its numbers
    from the [trap] quadrupole (``first_estimate``), so that the tilted-V closed forms apply."""
    return (scenario.load(DEMO_SCENARIO).replace("simulation", rtol=0.3, detector_distance=0.1, particles=300,
                                                 first_estimate=True)
            .replace("coils", phases=3))


@pytest.fixture(scope="module")
def data(demo: scenario.Scenario) -> ScenarioFigureData:
    return scenario_figure_data(demo)


def test_separatrix_is_the_library_separatrix_of_the_same_cut(demo: scenario.Scenario,
                                                               data: ScenarioFigureData) -> None:
    a, samples = data.deceleration, demo.simulation.samples
    z, potential = data.trap.axis_cut(a, samples)
    direct = tw.separatrix(z, potential, OH.mass)
    assert data.acceptance.longitudinal.area == pytest.approx(direct.area, rel=1e-12)
    assert data.acceptance.longitudinal.escape_energy == pytest.approx(direct.escape_energy, rel=1e-12)
    # and against the closed form of the tilted V (the kink lies on a grid point)
    assert data.acceptance.longitudinal.area == pytest.approx(tilted_v_area(a), rel=1e-6)


def test_deceleration_is_constant_deceleration_kinematics(demo: scenario.Scenario, data: ScenarioFigureData) -> None:
    """a = (v0^2 - v1^2) / (2 L) for a given length (constant deceleration, elementary)."""
    v0 = build(demo).beam.velocity + demo.beam.mismatch
    d = demo.deceleration
    assert d.length is not None
    assert data.deceleration == pytest.approx((v0**2 - d.final_velocity**2) / (2.0 * d.length), rel=1e-12)


def test_sample_is_the_estimates_sample_relative_to_the_trap(demo: scenario.Scenario,
                                                             data: ScenarioFigureData) -> None:
    built = build(demo)
    drawn = built.beam.sample(demo.simulation.particles, seed=demo.simulation.seed)[:DRAWN_PARTICLES]
    drawn[:, 5] -= built.mismatch
    np.testing.assert_array_equal(data.sample, drawn)
    assert not data.sample.flags.writeable
    assert data.tracking is not None and data.kept is not None
    np.testing.assert_array_equal(data.kept, data.tracking.kept[:DRAWN_PARTICLES])


def test_tracking_and_arrivals_are_the_estimates_and_free_flight(demo: scenario.Scenario,
                                                                 data: ScenarioFigureData) -> None:
    estimates = estimate(demo)
    assert estimates.tracking is not None and data.tracking is not None and data.arrivals is not None
    np.testing.assert_array_equal(data.tracking.kept, estimates.tracking.kept)
    np.testing.assert_array_equal(data.tracking.final, estimates.tracking.final)
    # free flight after release (no forces): t = (distance - z) / (v_release + v_z)
    final = data.tracking.final[data.tracking.kept]
    release = build(demo).schedule.final_velocity
    np.testing.assert_allclose(data.arrivals, (0.1 - final[:, 2]) / (release + final[:, 5]), rtol=1e-12)


def test_curve_and_sweep_span_the_critical_deceleration(demo: scenario.Scenario, data: ScenarioFigureData) -> None:
    critical = OH.moment * GRADIENT / OH.mass  # closed form a_c = mu B' / m (linear state, ideal quadrupole)
    assert data.curve is not None and data.sweep_rows is not None
    assert data.curve.critical_deceleration == pytest.approx(critical, rel=1e-9)
    grid = np.linspace(0.0, ACCEPTANCE_SPAN * data.trap.critical_deceleration(demo.simulation.samples),
                       ACCEPTANCE_POINTS)
    np.testing.assert_allclose(data.curve.decelerations, grid, rtol=1e-15)
    direct = tw.acceptance_curve(data.trap, grid, samples=demo.simulation.samples)
    np.testing.assert_allclose(data.curve.longitudinal, direct.longitudinal, rtol=1e-12)
    bound = grid < critical
    np.testing.assert_allclose(data.curve.longitudinal[bound], [tilted_v_area(a) for a in grid[bound]], rtol=1e-6)
    decelerations = np.array([row["deceleration"] for row in data.sweep_rows])
    np.testing.assert_allclose(decelerations, np.array(SWEEP_FRACTIONS) * critical, rtol=1e-9)
    v0, v1 = build(demo).beam.velocity + demo.beam.mismatch, demo.deceleration.final_velocity
    lengths = [row["length"] for row in data.sweep_rows]
    np.testing.assert_allclose(lengths, (v0**2 - v1**2) / (2.0 * decelerations), rtol=1e-9)  # L = dv^2 / (2 a)
    # the tracked estimate too (the demo tracks): each point's own sweep row, computed again here
    tracked = tw.sweep(demo.replace("simulation", particles=min(demo.simulation.particles, SWEEP_PARTICLES)),
                       decelerations[:1])
    assert data.sweep_rows[0]["captured_fraction_mc"] == tracked[0]["captured_fraction_mc"]
    assert all(0.0 <= row["captured_fraction_mc"] <= 1.0 for row in data.sweep_rows)


def test_coil_stretch_follows_the_schedule(demo: scenario.Scenario, data: ScenarioFigureData) -> None:
    """The coil-current stretch: the first rows of the run, while the trap is within
    CURRENT_PITCHES pitches of its start, at z = v0 t - a t^2 / 2 (constant deceleration)."""
    assert data.coils is not None
    schedule = build(demo).schedule
    times, plan = data.coils.times, data.coils.plan
    v0 = schedule.initial_velocity
    np.testing.assert_allclose(plan.positions, v0 * times - 0.5 * data.deceleration * times**2, rtol=1e-9,
                               atol=1e-12)
    pitch = demo.deceleration.pitch
    assert pitch is not None and demo.coils is not None
    assert np.all(plan.positions[:-1] <= CURRENT_PITCHES * pitch)
    assert plan.positions[-1] <= CURRENT_PITCHES * pitch < plan.positions[-1] + v0 * demo.coils.plan_step
    assert plan.currents.shape == (times.size, plan.currents.shape[1]) and times[0] == 0.0
    assert data.coils.scan.phases.size == 3
    # the whole run the title names: (v0 - vf) / a (kinematics), to one table step
    assert data.coils.duration == pytest.approx((v0 - schedule.final_velocity) / data.deceleration,
                                                abs=demo.coils.plan_step)


def test_coil_figure_data_rejects_what_is_not_a_coil_run(data: ScenarioFigureData) -> None:
    assert data.coils is not None
    with pytest.raises(tw.TiltwellError, match="run must be a CoilRun"):
        coil_figure_data("run", data.coils.scan)  # type: ignore[arg-type]


def test_scenario_figure_data_rejects_what_is_not_a_scenario() -> None:
    with pytest.raises(tw.TiltwellError, match="scenario must be a Scenario"):
        scenario_figure_data({"species": "OH"})  # type: ignore[arg-type]
