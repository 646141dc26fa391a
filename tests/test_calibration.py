"""Calibrating the source from measured free-beam traces (tiltwell.workflows.calibration).

Outside references: an independent Monte-Carlo sampler written here generates every trace
(start times uniform across the valve opening, Gaussian speeds drawn by numpy, arrival times
t0 + offset + L / v histogrammed; the particle number Poisson, so the bin counts are a Poisson
process; a Poisson or Gaussian background by numpy), never the model of the fit; the share of
68.3 % of a Gaussian within one standard deviation (from memory) for the coverage of the
reported errors; the scatter of repeated fits (brute force) for the analog errors; and the
terminal velocity of an ideal supersonic expansion, sqrt(2 g/(g-1) k T0 / m) (Miller, ch. 2 of
G. Scoles (ed.), Atomic and Molecular Beam Methods Vol. 1, from memory), written here with
scipy.constants and the krypton mass 83.798 u (from memory).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
import scipy.constants as const

from tiltwell import TiltwellError
from tiltwell import scenario as sc
from tiltwell.cli.commands import main
from tiltwell.workflows.assemble import build
from tiltwell.workflows.calibration import (Trace, calibrate, calibrated_scenario, fit_traces, read_trace,
                                            write_calibrated)

DEMO = Path(sc.__file__).with_name("data") / "demo.toml"
TAU = 2.0e-5  # s, the demo's valve_open_time
TRUE = {"velocity": 600.0, "relative_spread": 0.05, "time_offset": 1.0e-5}  # invented
DETECTOR = {"distance": 0.3, "radius": 5.0e-3}  # invented
DESIGN_KEYS = {"velocity", "velocity_error", "relative_spread", "relative_spread_error", "time_offset",
               "time_offset_error", "scale", "background", "reduced_chi_square"}


def sample(seed: int, distance: float = 0.3, scale: float = 3000.0, background: float = 2.0, bin_width: float = 4e-6,
           analog_noise: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Bin centres [s] and signal of a free-beam trace drawn by the independent sampler."""
    rng = np.random.default_rng(seed)
    v, rel, offset = TRUE["velocity"], TRUE["relative_spread"], TRUE["time_offset"]
    number = rng.poisson(scale) if analog_noise is None else 400_000
    arrivals = rng.uniform(0.0, TAU, number) + offset + distance / rng.normal(v, rel * v, number)
    centre = distance / v + offset
    edges = np.arange(math.floor((centre - 0.25 * distance / v) / bin_width),
                      math.ceil((centre + 0.3 * distance / v) / bin_width) + 1) * bin_width
    histogram, _ = np.histogram(arrivals, edges)
    if analog_noise is None:
        signal = histogram + rng.poisson(background, histogram.size)
    else:
        signal = histogram * (scale / number) + background + rng.normal(0.0, analog_noise, histogram.size)
    return 0.5 * (edges[1:] + edges[:-1]), signal.astype(float)


def as_trace(times: np.ndarray, signal: np.ndarray) -> Trace:
    return Trace(times, signal, "synthetic", tuple(range(1, times.size + 1)))


def write_csv(path: Path, times: np.ndarray, signal: np.ndarray, header: str = "time [s], signal [1]") -> Path:
    body = "".join(f"{float(t)!r}, {float(s)!r}\n" for t, s in zip(times, signal))
    path.write_text(f"# an invented trace\n{header}\n{body}", encoding="utf-8")
    return path


@pytest.fixture()
def scenario_file(tmp_path: Path) -> Path:
    scenario = sc.load(DEMO)
    scenario = sc.from_dict({**scenario.to_dict(), "detector": dict(DETECTOR)})
    return sc.save(scenario, tmp_path / "input.toml")


def test_coverage_of_the_velocity_error() -> None:
    """|fit - true| < reported error in about 68.3 % of seeds (Gaussian, from memory)."""
    seeds = 40
    inside = 0
    backgrounds, background_errors = [], []
    for seed in range(seeds):
        result = fit_traces([as_trace(*sample(seed))], [0.3], TAU)
        assert result.counts
        inside += abs(result.velocity - TRUE["velocity"]) < result.velocity_error
        backgrounds.append(result.backgrounds[0])
        background_errors.append(result.background_errors[0])
    assert 0.5 <= inside / seeds <= 0.85
    # the Poisson likelihood does not bias a small background (2 per bin) low: the mean over seeds
    assert abs(np.mean(backgrounds) - 2.0) < 3.0 * np.mean(background_errors) / math.sqrt(seeds)


def test_known_scale_and_background_are_recovered() -> None:
    result = fit_traces([as_trace(*sample(7, scale=2.0e5, background=5.0))], [0.3], TAU,
                        fix={"time_offset": TRUE["time_offset"]})
    assert abs(result.scales[0] - 2.0e5) < 3.0 * result.scale_errors[0]
    assert result.scales[0] == pytest.approx(2.0e5, rel=0.01)
    assert abs(result.backgrounds[0] - 5.0) < 3.0 * result.background_errors[0]
    assert abs(result.velocity - TRUE["velocity"]) < 3.0 * result.velocity_error < 1.0
    assert abs(result.relative_spread - 0.05) < 3.0 * result.relative_spread_error
    assert 0.7 < result.reduced_chi_square < 1.4  # Pearson chi-square of a good fit over its dof


def test_analog_errors_match_the_scatter_of_repeated_fits() -> None:
    fits = [fit_traces([as_trace(*sample(seed, scale=3000.0, background=1.0, analog_noise=2.0))], [0.3], TAU,
                       fix={"time_offset": TRUE["time_offset"]}) for seed in range(20)]
    assert not any(f.counts for f in fits)
    speeds = np.array([f.velocity for f in fits])
    reported = float(np.mean([f.velocity_error for f in fits]))
    assert abs(speeds.mean() - TRUE["velocity"]) < 3.0 * reported / math.sqrt(len(fits))
    assert 0.6 < speeds.std(ddof=1) / reported < 1.5  # brute-force scatter against the reported error
    assert np.mean([f.backgrounds[0] for f in fits]) == pytest.approx(1.0, abs=0.2)


def test_fix_holds_a_parameter_exactly() -> None:
    result = fit_traces([as_trace(*sample(3))], [0.3], TAU, fix={"velocity": 612.5})
    assert result.velocity == 612.5 and result.velocity_error == 0.0
    assert "velocity" not in result.names and result.correlation.shape == (4, 4)
    with pytest.raises(TiltwellError, match="fix"):
        fit_traces([as_trace(*sample(3))], [0.3], TAU, fix={"speed": 1.0})


def test_two_distances_break_the_velocity_offset_degeneracy() -> None:
    near = as_trace(*sample(11, distance=0.3, scale=20000.0))
    far = as_trace(*sample(12, distance=0.9, scale=20000.0))
    one = fit_traces([near], [0.3], TAU)
    both = fit_traces([near, far], [0.3, 0.9], TAU)
    i, j = one.names.index("velocity"), one.names.index("time_offset")
    assert abs(one.correlation[i, j]) > 0.9  # nearly degenerate at one distance
    assert both.velocity_error < one.velocity_error / 5.0
    assert both.time_offset_error < one.time_offset_error / 5.0
    assert abs(both.velocity - TRUE["velocity"]) < 3.0 * both.velocity_error
    assert abs(both.time_offset - TRUE["time_offset"]) < 3.0 * both.time_offset_error
    assert len(both.scales) == 2 and "scale[1]" in both.names


BAD = {
    "empty": ("# nothing\n", 1),
    "one column": ("# t only\n0.1\n0.2\n", 2),
    "three columns": ("0.1, 1, 2\n", 1),
    "not a number": ("t, s\n1e-4, 1\n2e-4, x\n", 3),
    "non-monotonic": ("1e-4, 1\n3e-4, 5\n2e-4, 3\n", 3),
    "nan": ("1e-4, 1\n2e-4, nan\n", 2),
    "negative time": ("-1e-4, 1\n", 1),
    "no peak": ("".join(f"{k * 1e-5!r}, {k}\n" for k in range(1, 11)), 10),
    "too short": ("1e-4, 1\n2e-4, 3\n3e-4, 1\n", 3),
}


@pytest.mark.parametrize("case", list(BAD), ids=list(BAD))
def test_bad_traces_give_one_line_naming_file_and_line(tmp_path: Path, case: str) -> None:
    text, line = BAD[case]
    path = tmp_path / "bad.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(TiltwellError) as caught:
        read_trace(path)
    message = str(caught.value)
    assert "\n" not in message and str(path) in message and f"line {line}:" in message


def test_a_header_is_accepted_only_first(tmp_path: Path) -> None:
    times, signal = sample(5)
    path = write_csv(tmp_path / "t.csv", times, signal)
    trace = read_trace(path)
    assert np.array_equal(trace.times, times) and trace.is_counts and trace.lines[0] == 3


def test_calibrated_scenario_round_trips(tmp_path: Path, scenario_file: Path) -> None:
    before = scenario_file.read_bytes()
    path = write_csv(tmp_path / "t.csv", *sample(9, scale=20000.0))
    scenario = sc.load(scenario_file)
    result = calibrate(scenario, [path], fix={"time_offset": TRUE["time_offset"]})
    out = write_calibrated(scenario, result, tmp_path / "calibrated.toml", source=scenario_file)
    loaded = sc.load(out)
    assert loaded.beam.speed_ratio is None and loaded.beam.relative_spread == result.relative_spread
    assert build(loaded).source.terminal_velocity == pytest.approx(result.velocity, rel=1e-9)
    mass = 83.798 * const.physical_constants["atomic mass constant"][0]  # Kr, from memory
    gamma = 5.0 / 3.0
    assert math.sqrt(2 * gamma / (gamma - 1) * const.k * loaded.beam.temperature / mass) == pytest.approx(
        result.velocity, rel=1e-4)  # the closed form of the terminal velocity, outside tiltwell
    assert calibrated_scenario(scenario, result).beam.temperature == loaded.beam.temperature
    assert scenario_file.read_bytes() == before
    with pytest.raises(TiltwellError, match="over its input"):
        write_calibrated(scenario, result, scenario_file, source=scenario_file)
    assert scenario_file.read_bytes() == before


def test_cli_json_and_write(tmp_path: Path, scenario_file: Path, capsys: pytest.CaptureFixture[str]) -> None:
    near = write_csv(tmp_path / "near.csv", *sample(21, scale=20000.0))
    far = write_csv(tmp_path / "far.csv", *sample(22, distance=0.9, scale=20000.0))
    out = tmp_path / "cal.toml"
    status = main(["calibrate", str(scenario_file), "--trace", str(near), "--trace", str(far), "--distance", "0.3",
                   "--distance", "0.9", "--json", "--write", str(out)])
    data = json.loads(capsys.readouterr().out)
    assert status == 0 and DESIGN_KEYS <= set(data) and set(data) - DESIGN_KEYS == {"correlation", "traces"}
    assert abs(data["velocity"] - TRUE["velocity"]) < 3.0 * data["velocity_error"]
    assert sc.load(out).beam.relative_spread == data["relative_spread"]
    status = main(["calibrate", str(scenario_file), "--trace", str(near), "--fix", "time_offset=1e-5"])
    text = capsys.readouterr().out
    assert status == 0 and "velocity" in text and "(fixed)" in text and "reduced chi-square" in text


@pytest.mark.parametrize("extra", [["--distance", "0.3", "--distance", "0.9"], ["--fix", "speed=3"],
                                   ["--write", "SELF"]], ids=["distances", "fix-name", "over-input"])
def test_cli_errors_exit_2(tmp_path: Path, scenario_file: Path, extra: list[str],
                           capsys: pytest.CaptureFixture[str]) -> None:
    near = write_csv(tmp_path / "near.csv", *sample(21))
    before = scenario_file.read_bytes()
    extra = [str(scenario_file) if e == "SELF" else e for e in extra]
    status = main(["calibrate", str(scenario_file), "--trace", str(near), *extra])
    error = capsys.readouterr().err
    assert status == 2 and error.startswith("tiltwell: error:") and error.count("\n") == 1
    assert scenario_file.read_bytes() == before


def test_a_trace_cut_before_its_peak_is_refused() -> None:
    """The sampler's trace cut on its rising edge (its largest sample kept inside by hand)."""
    times, signal = sample(5, scale=20000.0)
    cut = int(np.argmax(signal)) - 4
    times, signal = times[:cut], signal[:cut].copy()
    signal[-1], signal[-3] = signal[-2] - 1.0, signal[-2] + 5.0
    with pytest.raises(TiltwellError, match=r"^trace synthetic, line \d+: the fitted peak .* does not contain the peak$"):
        fit_traces([as_trace(times, signal)], [0.3], TAU, fix={"time_offset": TRUE["time_offset"]})


def test_fit_figure_draws_the_data_the_model_and_poisson_residuals(tmp_path: Path, scenario_file: Path) -> None:
    """The drawn fit is the fitted model re-evaluated here from the reported parameters with
    the flux closed form (tiltwell.physics.arrival.binned_flux over the trace's bins, a check
    of Calibration.fitted too), the residuals (data - model) / sqrt(model)."""
    import matplotlib

    matplotlib.use("Agg")
    from tiltwell.figures import calibration_fit
    from tiltwell.physics.arrival import binned_flux

    times, signal = sample(3, scale=2.0e4)
    trace = as_trace(times, signal)
    result = fit_traces([trace], [0.3], TAU)
    by_hand = result.scales[0] * binned_flux(trace.edges - result.time_offset, 0.3, result.velocity,
                                             result.relative_spread * result.velocity, TAU) + result.backgrounds[0]
    figure = calibration_fit(result, [trace])
    top, bottom = figure.axes
    lines = {line.get_gid(): line for ax in (top, bottom) for line in ax.get_lines()}
    np.testing.assert_allclose(lines["fit-0"].get_ydata(), by_hand, rtol=1e-12)
    np.testing.assert_array_equal(lines["data-0"].get_ydata(), signal)
    np.testing.assert_allclose(lines["residual-0"].get_ydata(), (signal - by_hand) / np.sqrt(np.maximum(by_hand, 1.0)),
                               rtol=1e-12)
    np.testing.assert_allclose(lines["data-0"].get_xdata(), times * 1e3, rtol=1e-15)
    path = write_csv(tmp_path / "t.csv", times, signal)
    assert main(["calibrate", str(scenario_file), "--trace", str(path), "--figure", str(tmp_path / "fit.png")]) == 0
    assert (tmp_path / "fit.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
