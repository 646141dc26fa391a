"""The explorer's detector part (tiltwell.explorer.detector): predicted traces drawn as the
library computes them, a measured trace loaded from a file and drawn over them, and its fit.

Outside references: the measured traces are drawn by an independent Monte-Carlo sampler
written here (start times uniform across the valve opening, Gaussian speeds by numpy,
arrival times histogrammed, Poisson counts and background), never by the model of the fit;
the fitted speed must recover the sampler's speed within four of its reported standard
errors (a Gaussian is beyond 4 sigma with probability 6e-5, from memory). The predicted
lines are compared with :func:`tiltwell.workflows.traces.predicted_traces` called here on
the explorer's scenario (the physics of the traces is tested against its closed form in
tests/test_traces.py); the rate per µs summed over the bins gives the detected number.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest

from tiltwell import TiltwellError
from tiltwell import scenario as sc
from tiltwell.explorer import Explorer
from tiltwell.workflows.assemble import build
from tiltwell.workflows.traces import predicted_traces

DEMO = Path(sc.__file__).with_name("data") / "demo.toml"
SPEED, SPREAD, OFFSET = 390.0, 0.05, 1.0e-5  # invented: the sampler's beam [m/s], [1], valve delay [s]


def small_demo(detector: bool = True) -> sc.Scenario:
    """The demo as an ideal quadrupole (no coil row), small samples: fast."""
    data = sc.load(DEMO).to_dict()
    for section in ("coils", "limits", "hold"):
        data.pop(section, None)
    data["simulation"].update(particles=2000, samples=401, seed=5)
    if not detector:
        data.pop("detector")
    return sc.from_dict(data)


@pytest.fixture(scope="module")
def shared() -> Iterator[Explorer]:
    app = Explorer(small_demo(), auto_tradeoff=False)
    yield app
    app.close()


@pytest.fixture
def app(shared: Explorer) -> Explorer:
    shared.reset()
    shared.wait()
    return shared


def sampled_trace(path: Path, distance: float, seed: int = 11, number: int = 20000, background: float = 3.0,
                  bin_width: float = 1e-5) -> Path:
    """A free-beam trace by the independent sampler, written as a two-column CSV."""
    rng = np.random.default_rng(seed)
    tau = sc.load(DEMO).beam.valve_open_time
    count = rng.poisson(number)
    arrivals = rng.uniform(0.0, tau, count) + OFFSET + distance / rng.normal(SPEED, SPREAD * SPEED, count)
    centre = distance / SPEED
    edges = np.arange(math.floor(0.7 * centre / bin_width), math.ceil(1.4 * centre / bin_width) + 1) * bin_width
    counts, _ = np.histogram(arrivals, edges)
    counts = counts + rng.poisson(background, counts.size)
    lines = ["# time [s], signal [counts]"] + [f"{0.5 * (a + b):.9g},{c}" for a, b, c in zip(edges, edges[1:], counts)]
    path.write_text("\n".join(lines) + "\n")
    return path


def test_the_part_is_a_closed_section_of_the_page(app: Explorer) -> None:
    part = app.detector
    assert part.section in app.widget.children
    assert part.section.selected_index is None
    assert not part.actions["predict"].disabled and part.actions["fit"].disabled


def test_predicted_lines_are_the_library_traces(app: Explorer) -> None:
    part = app.detector
    traces = part.predict().result()
    assert traces is not None and part.traces is traces
    reference = predicted_traces(app.scenario())  # the same scenario, computed again here
    step_us = app.scenario().detector.time_bin * 1e6  # type: ignore[union-attr]
    free = part.sources["free"].data
    np.testing.assert_allclose(free["rate"], reference.free / step_us, rtol=1e-12)
    np.testing.assert_allclose(free["time"], 0.5 * (reference.edges[1:] + reference.edges[:-1]) * 1e3, rtol=1e-12)
    assert np.sum(free["rate"]) * step_us == pytest.approx(reference.free_detected, rel=1e-9)
    assert reference.packet is not None
    np.testing.assert_allclose(part.sources["packet"].data["rate"], reference.packet / step_us, rtol=1e-12)
    assert f"{reference.free_detected:.3g}" in part.readouts["free"].value
    assert app.errors == []


def test_a_settings_change_clears_the_prediction_and_discards_a_late_one(app: Explorer) -> None:
    part = app.detector
    part.predict().result()
    assert len(part.sources["free"].data["rate"]) > 0
    future = part.predict()
    app.update(final_velocity=25.0)
    future.result()
    assert part.traces is None and len(part.sources["free"].data["rate"]) == 0
    assert part.readouts["free"].value == "—"
    assert app.errors == []


def test_the_monte_carlo_check_also_predicts_the_traces(app: Explorer) -> None:
    app.run_monte_carlo().result()
    app.wait()
    part = app.detector
    assert part.traces is not None and part.traces.packet is not None
    assert len(part.sources["packet"].data["rate"]) == part.traces.packet.size
    assert part.traces.packet_detected == pytest.approx(float(np.sum(part.traces.packet)), rel=1e-9)
    assert app.errors == []


def test_a_measured_trace_is_drawn_as_in_its_file_and_fitted(app: Explorer, tmp_path: Path) -> None:
    part = app.detector
    distance = app.scenario().detector.distance  # type: ignore[union-attr]
    path = sampled_trace(tmp_path / "free-beam.csv", distance)
    table = np.loadtxt(path, delimiter=",", comments="#")
    part.trace_path.value = str(path)
    part.actions["load"].click()
    assert part.trace is not None and not part.actions["fit"].disabled
    np.testing.assert_allclose(part.sources["measured"].data["time"], table[:, 0] * 1e3, rtol=1e-12)
    np.testing.assert_array_equal(part.sources["measured"].data["signal"], table[:, 1])
    assert "counts (Poisson fit)" in part.readouts["measured"].value
    result = part.fit().result()
    assert result is not None
    calibration = part.calibration
    assert calibration is not None and calibration is result[0]
    assert abs(calibration.velocity - SPEED) < 4.0 * calibration.velocity_error
    assert abs(calibration.relative_spread - SPREAD) < 4.0 * calibration.relative_spread_error
    np.testing.assert_allclose(part.sources["fitted"].data["signal"], calibration.fitted(part.trace), rtol=1e-12)
    shown = part.readouts["fit"].value
    assert f"v = {calibration.velocity:.4g}" in shown and "correlated" in shown
    assert app.errors == []


@pytest.mark.parametrize(("text", "line"), [("# t, s\n1e-3,1\n2e-3,nan\n3e-3,2\n", 3), ("1e-3,1\n", 1),
                                            ("1e-3,1\n2e-3,4\n1.5e-3,2\n", 3)],
                         ids=["nan", "one-row", "time-goes-back"])
def test_a_bad_trace_gives_a_message_naming_file_and_line(app: Explorer, tmp_path: Path, text: str,
                                                          line: int) -> None:
    part = app.detector
    good = part.load(sampled_trace(tmp_path / "good.csv", 3.35))
    bad = tmp_path / "bad.csv"
    bad.write_text(text)
    assert part.load(bad) is None
    assert "bad.csv" in part.message.value and f"line {line}" in part.message.value
    assert part.trace is good  # the trace shown before stays
    assert app.errors == []


def test_an_empty_path_and_a_missing_file_say_so(app: Explorer, tmp_path: Path) -> None:
    part = app.detector
    part.trace_path.value = ""
    part.actions["load"].click()
    assert "give the measured trace" in part.message.value
    assert part.load(tmp_path / "nowhere.csv") is None and "nowhere.csv" in part.message.value
    assert app.errors == []


def test_without_a_detector_section_nothing_is_predicted_and_the_message_says_why() -> None:
    app = Explorer(small_demo(detector=False), auto_tradeoff=False)
    try:
        part = app.detector
        assert part.actions["predict"].disabled
        assert "[detector]" in part.message.value
        with pytest.raises(TiltwellError, match=r"\[detector\]"):
            part.predict()
        app.run_monte_carlo().result()
        app.wait()
        assert part.traces is None and app.errors == []
    finally:
        app.close()


def test_the_demo_detector_lies_beyond_the_released_packet() -> None:
    """The demo's [detector] is downstream of the row's end (release point = flight
    distance + length, written out here from the file's own numbers)."""
    demo = sc.load(DEMO)
    assert demo.detector is not None
    release = demo.beam.flight_distance + build(small_demo()).schedule.length
    assert release == pytest.approx(0.25 + 3.0, rel=1e-12)
    assert demo.detector.distance > release
