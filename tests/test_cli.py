"""The command line: same numbers as the library, one-line errors."""

from __future__ import annotations

import contextlib
import io
import json
import subprocess
import sys

import numpy as np
import pytest
from scipy import constants

from tiltwell import species
from tiltwell.cli import main


def test_quadrupole_json_matches_closed_forms(capsys: pytest.CaptureFixture[str]) -> None:
    """Closed forms of an ideal quadrupole: the critical deceleration is a_c = W' B'_z / m
    (the Rb-87 stretched state's Zeeman energy is exactly linear, Breit-Rabi), and the
    escape energy at a = 0 is the Zeeman energy at the truncation field, W(B_max)."""
    assert main(["quadrupole", "Rb-87", "--gradient", "1.5", "--max-field", "0.02", "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    rb = species("Rb-87")
    assert summary["critical_deceleration"] == pytest.approx(rb.moment * 1.5 / rb.mass, rel=1e-9)
    assert summary["escape_energy"] == pytest.approx(float(rb.zeeman.energy(0.02)), rel=1e-9)
    assert summary["units"]["acceptance_6d"] == "(m*m/s)^3"
    assert summary["acceptance_6d"] > 0


def test_quadrupole_text_and_unbound(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["quadrupole", "H", "--gradient", "1", "--max-field", "0.1", "--deceleration", "1e9"]) == 0
    assert "no bound well" in capsys.readouterr().out


def test_species_listing_names_every_entry(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["species"]) == 0
    out = capsys.readouterr().out
    for name in ("H", "Rb-87", "CaF", "OH"):
        assert name in out
    assert main(["species", "OH"]) == 0
    assert "mu_B" in capsys.readouterr().out


@pytest.mark.slow
@pytest.mark.parametrize(
    ("argv", "word"),
    [
        (["species", "Rb78"], "Rb-87"),
        (["quadrupole", "H", "--gradient", "-1", "--max-field", "0.1"], "gradient"),
        (["quadrupole", "H", "--gradient", "1", "--max-field", "nan"], "--max-field [T]"),
    ],
    ids=["unknown-species", "negative-gradient", "nan-field"],
)
def test_errors_are_one_line_without_traceback(argv: list[str], word: str) -> None:
    completed = subprocess.run(
        [sys.executable, "-m", "tiltwell", *argv], capture_output=True, text=True, check=False
    )
    assert completed.returncode == 2
    assert word in completed.stderr
    assert "Traceback" not in completed.stderr
    assert len(completed.stderr.strip().splitlines()) == 1


def test_bohr_magneton_sanity() -> None:
    """The hydrogen moment in the catalogue is about one Bohr magneton (CODATA via scipy)."""
    assert species("H").moment == pytest.approx(constants.physical_constants["Bohr magneton"][0], rel=2e-3)


def _scenario_file(tmp_path, **simulation):  # type: ignore[no-untyped-def]
    from tiltwell import scenario as sc
    from tiltwell.cli import DEMO_SCENARIO

    scenario = sc.load(DEMO_SCENARIO).replace("simulation", **simulation)
    return sc.save(scenario, tmp_path / "plan.toml")


@pytest.mark.slow
def test_run_json_matches_the_library(tmp_path, capsys: pytest.CaptureFixture[str]) -> None:  # type: ignore[no-untyped-def]
    """The command line prints what tiltwell.summarise computes (one JSON object)."""
    from tiltwell import scenario as sc
    from tiltwell import summarise

    path = _scenario_file(tmp_path, particles=1000, track=False)
    assert main(["run", str(path), "--json"]) == 0
    printed = json.loads(capsys.readouterr().out)
    direct = json.loads(json.dumps(summarise(sc.load(path))))
    assert printed == direct
    assert printed["captured_fraction_mc"] is None  # trajectories switched off


@pytest.mark.slow
def test_run_text_summary(tmp_path, capsys: pytest.CaptureFixture[str]) -> None:  # type: ignore[no-untyped-def]
    path = _scenario_file(tmp_path, particles=500)
    assert main(["run", str(path)]) == 0
    out = capsys.readouterr().out
    for phrase in ("longitudinal acceptance", "trajectories", "CAUTION", "mK"):
        assert phrase in out


@pytest.mark.slow
def test_demo_writes_its_scenario_and_summary(tmp_path, capsys: pytest.CaptureFixture[str]) -> None:  # type: ignore[no-untyped-def]
    """Full demo (1e5 trajectories): the written scenario loads back equal to the shipped one."""
    from tiltwell import scenario as sc
    from tiltwell.cli import DEMO_SCENARIO

    assert main(["demo", "--out", str(tmp_path)]) == 0
    assert sc.load(tmp_path / "demo.toml") == sc.load(DEMO_SCENARIO)
    summary = json.loads((tmp_path / "demo-summary.json").read_text())
    assert summary["mc_particles"] == 100_000
    assert 0.0 < summary["captured_fraction_mc"] < 1.0


@pytest.mark.slow
def test_sweep_writes_csv(tmp_path) -> None:  # type: ignore[no-untyped-def]
    path = _scenario_file(tmp_path, particles=200, track=False)
    out = tmp_path / "trade.csv"
    assert main(["sweep", str(path), "--start", "2e4", "--stop", "6e4", "--points", "3", "--out", str(out),
                 "--quiet"]) == 0
    lines = out.read_text().splitlines()
    assert all(line.startswith("# ") for line in lines[:3])  # title, units, note
    assert len(lines) == 3 + 4 and lines[3].startswith("deceleration [m/s^2]")


@pytest.mark.slow
@pytest.mark.parametrize(
    ("edit", "word"),
    [("gradient = 100.0", "gradeint = 100.0"), ("temperature = 300.0", "temperature = -4.0")],
    ids=["unknown-key", "negative-temperature"],
)
def test_run_scenario_errors_are_one_line(tmp_path, edit: str, word: str) -> None:  # type: ignore[no-untyped-def]
    from tiltwell.cli import DEMO_SCENARIO

    path = tmp_path / "bad.toml"
    path.write_text(DEMO_SCENARIO.read_text().replace(edit, word))
    completed = subprocess.run([sys.executable, "-m", "tiltwell", "run", str(path)],
                               capture_output=True, text=True, check=False)
    assert completed.returncode == 2
    assert "Traceback" not in completed.stderr
    assert len(completed.stderr.strip().splitlines()) == 1
    assert word.split(" = ")[0] in completed.stderr


def test_keys_lists_the_scenario_keys(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["keys"]) == 0
    assert "flight_distance [m]" in capsys.readouterr().out


@pytest.mark.slow
def test_run_writes_the_coil_timing_table(tmp_path) -> None:  # type: ignore[no-untyped-def]
    """The CSV's passing times put the trap centre on each coil: z(t) = v0 t - a t^2 / 2
    (constant-deceleration kinematics) at the listed coil positions."""
    import numpy as np

    from tiltwell import build
    from tiltwell import scenario as sc

    path = _scenario_file(tmp_path, particles=100, track=False)
    out = tmp_path / "timing.csv"
    assert main(["run", str(path), "--timing", str(out)]) == 0
    lines = [line for line in out.read_text().splitlines() if not line.startswith("#")]
    assert lines[0].split(",")[1:3] == ["position [m]", "passing_time [s]"]
    rows = np.array([[float(v) for v in line.split(",")[1:3]] for line in lines[1:]])
    plan = build(sc.load(path)).schedule
    v0, a = plan.initial_velocity, plan.deceleration
    positions, times = rows[:, 0], rows[:, 1]
    # every coil of the row is listed; those before the start (after the end) are "passed" at 0 (the duration)
    inside = (positions >= 0.0) & (positions <= plan.length)
    # row_layout's rule: floor(L / p) + active coils, less one for a whole L / p with a tapered hand-over:
    # floor(3.0 / 0.008) + 6 - 1 = 375 + 5 = 380, the first at -(6/2 - 1) x 8 mm = -16 mm, so
    # -16 mm + k x 8 mm for k = 0 ... 379: 0, 8 mm, ..., 3.0 m (376 coils) and two beyond each end
    assert inside.sum() == 376 and positions.size == 380
    assert np.allclose(v0 * times[inside] - 0.5 * a * times[inside] ** 2, positions[inside], rtol=1e-9, atol=1e-12)
    assert np.all(times[positions < 0.0] == 0.0)
    assert np.allclose(times[positions > plan.length], (v0 - plan.final_velocity) / a, rtol=1e-12)
    assert "electrical-safety" in out.read_text()


def test_coils_text_summary_carries_the_caution(tmp_path, capsys: pytest.CaptureFixture[str]) -> None:  # type: ignore[no-untyped-def]
    """The readable summary of `tiltwell coils` (numbers checked in tests/test_coilreport.py)."""
    from tiltwell import scenario as sc
    from tiltwell.cli import DEMO_SCENARIO

    path = sc.save(sc.load(DEMO_SCENARIO).replace("coils", phases=2), tmp_path / "plan.toml")
    out = tmp_path / "waveforms.csv"
    assert main(["coils", str(path), "--csv", str(out)]) == 0
    text = capsys.readouterr().out
    # the row (row_layout's rule): floor(3.0 m / 8 mm) + 6 active - 1 (whole number, tapered hand-over)
    # = 380 coils, the first at -(6/2 - 1) x 8 mm = -16 mm
    for phrase in ("380 coils at 8 mm pitch", "mK", "mm*m/s", "mH", "kV", "I^2 t", "CAUTION", "electrical-safety",
                   "coil k at z = -16 mm + k x 8 mm", "A/s while the trap moves (the driver's slew rate)",
                   "while running", "(bound, peak current for the longest pulse: +", f"wrote {out}"):
        assert phrase in text
    assert "electrical-safety" in out.read_text()


def _coils_cli(*argv: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "tiltwell", "coils", *argv], capture_output=True, text=True,
                          check=False)


@pytest.mark.slow
@pytest.mark.parametrize(
    ("edit", "word"),
    [
        (("pitch = 0.008 ", ""), "[deceleration] pitch"),
        (("turns = 24", "turns = -24"), "[coils] turns"),
        (("width = 0.004", "width = 0.04"), "radius - width/2"),  # no bore (a narrow one only shrinks the box)
        (("plan_step = 2.0e-6", "plan_step = 1e-11"), "[coils] plan_step"),
    ],
    ids=["no-pitch", "negative-turns", "bore-too-small", "table-too-long"],
)
def test_coils_errors_are_one_line_and_leave_the_csv_alone(tmp_path, edit: tuple[str, str], word: str) -> None:  # type: ignore[no-untyped-def]
    from tiltwell.cli import DEMO_SCENARIO

    text = DEMO_SCENARIO.read_text()
    assert edit[0] in text
    text = text.replace(edit[0], edit[1], 1)
    if word == "[deceleration] pitch":
        text = text.replace("peak_current = 1000.0", "")
    path = tmp_path / "bad.toml"
    path.write_text(text)
    old = tmp_path / "old.csv"
    old.write_text("kept\n")
    completed = _coils_cli(str(path), "--csv", str(old), "--json")
    assert completed.returncode == 2
    assert "Traceback" not in completed.stderr and len(completed.stderr.strip().splitlines()) == 1
    assert word in completed.stderr
    assert completed.stdout == "" and old.read_text() == "kept\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.toml", "old.csv"]


@pytest.mark.slow
def test_coils_needs_the_section_and_an_existing_folder(tmp_path) -> None:  # type: ignore[no-untyped-def]
    path = _scenario_file(tmp_path, particles=100)
    text = path.read_text()
    path.write_text(text[: text.index("[coils]")])
    completed = _coils_cli(str(path))
    assert completed.returncode == 2 and "no [coils] section" in completed.stderr
    missing = tmp_path / "absent" / "w.csv"
    completed = _coils_cli(str(_scenario_file(tmp_path, particles=100).with_name("plan.toml")), "--csv", str(missing))
    assert completed.returncode == 2 and "existing folder" in completed.stderr and not missing.exists()


@pytest.mark.slow
def test_coils_track_writes_the_device_check_and_its_figures(tmp_path) -> None:  # type: ignore[no-untyped-def]
    # The numbers' physics is checked in tests/test_devicecompare.py and tests/test_device.py;
    # here: the command wires the scenario's beam into compare_device, the box shrinks to the
    # bore as documented (closed form: bore = radius - width/2 = 10 - 2 = 8 mm, box corner
    # hypot(12.8, 12.8) mm with 12.8 mm = 4 max_field / gradient = 4 x 0.32 T / 100 T/m, so
    # scale 0.99 x 8 mm / hypot(12.8, 12.8) mm for the demo),
    # and the figures are written.
    import tiltwell as tw
    from tiltwell import scenario as sc
    from tiltwell.cli import DEMO_SCENARIO
    from tiltwell.workflows.coilreport import coil_run, device_box

    demo = sc.load(DEMO_SCENARIO).replace("coils", phases=2).replace("simulation", detector_distance=0.2)
    path = sc.save(demo, tmp_path / "plan.toml")
    stream = io.StringIO()
    with contextlib.redirect_stdout(stream):
        assert main(["coils", str(path), "--json", "--track", "300", "--figures", str(tmp_path / "figs")]) == 0
    numbers = json.loads(stream.getvalue())["device_check"]
    assert numbers["particles"] == 300
    assert numbers["ripple_loss"] == pytest.approx(numbers["kept_rigid_twin"] - numbers["kept_coil_row"], abs=1e-15)
    scale = 0.99 * (0.010 - 0.004 / 2) / np.hypot(0.0128, 0.0128)
    np.testing.assert_allclose(numbers["box_half_widths"], [0.0128 * scale, 0.0128 * scale, 0.0064], rtol=1e-12)
    # the same run by hand: the beam sampled as the captured fraction samples it, then compare_device
    built = tw.build(demo)
    run = coil_run(demo, built.schedule)
    sample = built.beam.sample(300, seed=demo.simulation.seed)
    sample[:, 5] -= built.mismatch
    direct = tw.compare_device(run.array, built.species, sample, schedule=built.schedule, gradient=run.gradient,
                               time_step=numbers["time_step"], box_half_widths=device_box(demo, run.array),
                               plan_times=run.times, phases=2)
    assert (direct.rigid.fraction, direct.device.fraction) == (numbers["kept_rigid_twin"], numbers["kept_coil_row"])
    rigid, device = direct.arrival_times(0.2)
    assert numbers["arrival_median_coil_row"] == pytest.approx(float(np.median(device)), rel=1e-12)
    names = ["coil-currents", "coil-phases", "device-survival", "device-phase-space", "device-arrivals"]
    for name in names:
        assert (tmp_path / "figs" / f"{name}.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_coils_track_needs_a_positive_count(tmp_path, capsys: pytest.CaptureFixture[str]) -> None:  # type: ignore[no-untyped-def]
    from tiltwell.cli import DEMO_SCENARIO

    assert main(["coils", str(DEMO_SCENARIO), "--track", "0"]) == 2
    assert "--track" in capsys.readouterr().err

