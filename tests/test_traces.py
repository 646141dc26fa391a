"""The [detector] section and the predicted time-of-flight traces (tiltwell.workflows.traces).

Outside references: the change of variables of a speed density into an arrival-time density,
f(t) = (L/t^2) g(L/t) for the flux through a plane and n(t) = (t/L) f(t) for the density in a
thin volume (H. Pauly, Atom, Molecule, and Cluster Beams I (Springer, 2000), the chapter on
time-of-flight velocity analysis; G. Scoles (ed.), Atomic and Molecular Beam Methods Vol. 1
(Oxford UP, 1988); both from memory), integrated by scipy.integrate.quad; an independent
Monte-Carlo sampler written here (uniform start times across the opening, Gaussian speeds);
the share of an isotropic 2-D Gaussian inside a circle, 1 - exp(-R^2 / (2 s^2)) (from memory);
and the tracked survivors flown to the plane by straight lines written here.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from scipy import integrate, stats

from tiltwell import TiltwellError
from tiltwell import scenario as sc
from tiltwell.physics.arrival import binned_flux, flux_density, line_density
from tiltwell.workflows.report import build, estimate
from tiltwell.workflows.traces import RELATIVE_UNIT, Traces, predicted_traces
from tiltwell.workflows.yields import yield_budget

DEMO = Path(sc.__file__).with_name("data") / "demo.toml"
L, V0, SIGMA = 1.2, 500.0, 25.0  # m, m/s, m/s: an invented free flight
DETECTOR = {"distance": 3.4, "radius": 5.0e-3, "efficiency": 0.4, "time_bin": 2.0e-6}  # invented


def point_flux(t: float, distance: float = L) -> float:
    """Pauly / Scoles change of variables: (L / t^2) g(L / t)."""
    return distance / t**2 * stats.norm.pdf(distance / t, V0, SIGMA)


# --- the pure physics ------------------------------------------------------------------------


@pytest.mark.parametrize("t", [2.0e-3, 2.3e-3, 2.4e-3, 2.6e-3, 3.0e-3], ids=lambda t: f"t={t * 1e3:g}ms")
def test_point_source_flux_is_the_change_of_variables(t: float) -> None:
    assert flux_density(np.array([t]), L, V0, SIGMA, 0.0)[0] == pytest.approx(point_flux(t), rel=1e-12, abs=1e-300)


def test_point_source_flux_integrates_to_the_share_moving_forward() -> None:
    total, _ = integrate.quad(point_flux, 1e-4, 0.05, points=[L / V0], limit=200)
    assert total == pytest.approx(stats.norm.sf(0.0, V0, SIGMA), rel=1e-9)
    edges = np.arange(1.6e-3, 4.0e-3, 2e-6)
    assert binned_flux(edges, L, V0, SIGMA, 0.0).sum() == pytest.approx(total, rel=1e-9)


@pytest.mark.parametrize("t", [2.2e-3, 2.35e-3, 2.42e-3, 2.5e-3, 2.7e-3], ids=lambda t: f"t={t * 1e3:g}ms")
def test_top_hat_opening_is_the_point_source_averaged_over_the_opening(t: float) -> None:
    tau = 1.0e-4
    expected, _ = integrate.quad(lambda t0: point_flux(t - t0) / tau, 0.0, min(tau, t), epsabs=0.0, epsrel=1e-11)
    assert flux_density(np.array([t]), L, V0, SIGMA, tau)[0] == pytest.approx(expected, rel=1e-8, abs=1e-6)


def test_binned_flux_against_an_independent_monte_carlo_sampler() -> None:
    """Start times uniform over the opening, Gaussian speeds, arrival times histogrammed."""
    rng = np.random.default_rng(11)
    n, tau = 2_000_000, 5.0e-5
    speeds = rng.normal(V0, SIGMA, n)
    times = rng.uniform(0.0, tau, n)[speeds > 0] + L / speeds[speeds > 0]
    edges = np.arange(1.9e-3, 3.2e-3, 1e-5)
    counts, _ = np.histogram(times, edges)
    expected = n * binned_flux(edges, L, V0, SIGMA, tau)
    assert np.all(np.abs(counts - expected) < 5.0 * np.sqrt(expected) + 3.0)
    chi2 = float(np.sum((counts - expected)[expected > 20] ** 2 / expected[expected > 20]))
    dof = int(np.sum(expected > 20))
    assert chi2 / dof < 1.3


@pytest.mark.parametrize("t", [2.2e-3, 2.4e-3, 2.6e-3], ids=lambda t: f"t={t * 1e3:g}ms")
def test_density_detector_sees_t_over_l_times_the_flux(t: float) -> None:
    """A density detector (e.g. laser ionisation in a thin volume) weighs slow particles more:
    n(t) = (t / L) f(t) for a point source (Pauly; Scoles; from memory)."""
    assert line_density(np.array([t]), L, V0, SIGMA, 0.0)[0] == pytest.approx(t / L * point_flux(t), rel=1e-12)


def test_density_detector_against_a_monte_carlo_slab_count() -> None:
    rng = np.random.default_rng(3)
    n, tau, t, slab = 2_000_000, 1.0e-4, 2.45e-3, 2.0e-3
    speeds = rng.normal(V0, SIGMA, n)
    positions = speeds * (t - rng.uniform(0.0, tau, n))
    inside = np.count_nonzero((positions >= L - slab / 2) & (positions < L + slab / 2))
    expected = n * slab * line_density(np.array([t]), L, V0, SIGMA, tau)[0]
    assert abs(inside - expected) < 4.0 * math.sqrt(expected)


def test_density_trace_is_later_than_the_flux_trace() -> None:
    times = np.linspace(1.8e-3, 3.4e-3, 4001)
    flux, density = flux_density(times, L, V0, SIGMA, 0.0), line_density(times, L, V0, SIGMA, 0.0)
    mean_flux = integrate.trapezoid(times * flux, times) / integrate.trapezoid(flux, times)
    mean_density = integrate.trapezoid(times * density, times) / integrate.trapezoid(density, times)
    # <t>_density = <t^2>_flux / <t>_flux > <t>_flux by the flux trace's variance over its mean
    variance = integrate.trapezoid(times**2 * flux, times) / integrate.trapezoid(flux, times) - mean_flux**2
    assert mean_density == pytest.approx(mean_flux + variance / mean_flux, rel=1e-9)


# --- the scenario ------------------------------------------------------------------------------


def with_detector(absolute: bool = True, **detector: Any) -> dict[str, Any]:
    """The demo as an ideal quadrupole with a [detector], small samples: fast."""
    data = sc.load(DEMO).to_dict()
    for section in ("coils", "limits", "hold"):
        data.pop(section, None)
    for name in ("pressure", "seed_fraction", "rotational_temperature"):
        data["beam"].pop(name, None)
    if absolute:
        data["beam"].update(pressure=2.0e5, seed_fraction=1.0e-3, rotational_temperature=5.0)  # invented
    data["simulation"].update(particles=2000, samples=401, seed=5)
    data["detector"] = DETECTOR | detector
    return data


@pytest.fixture(scope="module")
def case() -> tuple[sc.Scenario, Any, Any, Any, Traces]:
    scenario = sc.from_dict(with_detector())
    built = build(scenario)
    found = estimate(scenario, built)
    budget = yield_budget(scenario, built, found)
    return scenario, built, found, budget, predicted_traces(scenario, found, built=built, budget=budget)


def beam_sigma(scenario: sc.Scenario, distance: float) -> float:
    """Transverse rms at ``distance`` of the source model (tiltwell.physics.source.Source
    notes): nozzle rms d/4, angle rms (D/4)/L_aperture of the tightest aperture, drifted."""
    b = scenario.beam
    openings = [(b.skimmer_diameter, b.nozzle_skimmer_distance), *((dia, at) for at, dia in b.apertures)]
    angle = min(openings, key=lambda p: p[0] / p[1])
    return math.hypot(b.nozzle_diameter / 4, angle[0] / 4 / angle[1] * distance)


def test_free_trace_integrates_to_the_expected_detected_number(case: Any) -> None:
    scenario, _, _, budget, traces = case
    share = 1.0 - math.exp(-DETECTOR["radius"] ** 2 / (2 * beam_sigma(scenario, DETECTOR["distance"]) ** 2))
    assert traces.free_share == pytest.approx(share, rel=1e-12)
    expected = budget.reaching_trap * share * DETECTOR["efficiency"]
    assert traces.free.sum() == pytest.approx(expected, rel=1e-9)
    assert traces.free_detected == pytest.approx(expected, rel=1e-9)
    assert traces.absolute and traces.unit == "particles per shot"


def test_free_trace_shape_against_monte_carlo_of_the_scenario_source(case: Any) -> None:
    scenario, built, _, _, traces = case
    rng = np.random.default_rng(8)
    n, v0 = 1_000_000, built.beam.velocity
    speeds = rng.normal(v0, built.beam.longitudinal.sigma_velocity, n)
    times = rng.uniform(0.0, scenario.beam.valve_open_time, n) + DETECTOR["distance"] / speeds
    counts, _ = np.histogram(times, traces.edges)
    expected = traces.free / traces.free.sum() * n
    assert np.all(np.abs(counts - expected) < 5.0 * np.sqrt(expected) + 3.0)


def test_packet_trace_is_the_histogram_of_the_tracked_finals_flown_to_the_plane(case: Any) -> None:
    scenario, built, found, budget, traces = case
    b, d = scenario.beam, scenario.deceleration
    v0, vf = built.beam.velocity, d.final_velocity
    duration = 2 * d.length / (v0 + vf)  # constant deceleration over the length
    release_time = b.valve_open_time / 2 + b.flight_distance / v0 + duration
    finals = found.tracking.final[found.tracking.kept]
    weights = found.tracking.survival_weights  # the tracker's no-spin-flip probabilities, when counted
    w = np.ones(len(finals)) if weights is None else weights[found.tracking.kept]
    plane = DETECTOR["distance"] - (b.flight_distance + d.length)
    flight = (plane - finals[:, 2]) / (vf + finals[:, 5])
    forward = flight > 0
    x, y = finals[:, 0] + finals[:, 3] * flight, finals[:, 1] + finals[:, 4] * flight
    seen = forward & (np.hypot(x, y) <= DETECTOR["radius"])
    assert seen.sum() > 20
    assert traces.release_time == pytest.approx(release_time, rel=1e-12)
    share = w[seen].sum() / w.sum()
    assert traces.packet_share == pytest.approx(share, rel=1e-12)
    expected_number = budget.slow_particles * share * DETECTOR["efficiency"]
    assert traces.packet_detected == pytest.approx(expected_number, rel=1e-12)
    counts, _ = np.histogram(release_time + flight[seen], traces.edges, weights=w[seen])
    np.testing.assert_allclose(traces.packet, counts * expected_number / w[seen].sum(), rtol=1e-12, atol=1e-9)
    assert traces.packet.sum() == pytest.approx(expected_number, rel=1e-12)


def test_csv_reads_back_with_units(case: Any, tmp_path: Path) -> None:
    traces = case[4]
    path = tmp_path / "traces.csv"
    text = traces.to_csv(path)
    assert "time_start [s],time_end [s],free_beam [1],decelerated [1]" in text and "particles per shot" in text
    table = np.genfromtxt(path, delimiter=",", skip_header=3, names=True)
    assert table.dtype.names == ("time_start_s", "time_end_s", "free_beam_1", "decelerated_1")
    np.testing.assert_array_equal(table["time_start_s"], traces.edges[:-1])
    np.testing.assert_array_equal(table["free_beam_1"], traces.free)
    np.testing.assert_array_equal(table["decelerated_1"], traces.packet)
    assert np.all(np.diff(table["time_start_s"]) == pytest.approx(DETECTOR["time_bin"], rel=1e-6))


def test_without_a_pressure_the_trace_is_relative_and_says_so() -> None:
    scenario = sc.from_dict(with_detector(absolute=False) | {"simulation": {"particles": 300, "samples": 401,
                                                                            "track": False}})
    traces = predicted_traces(scenario)
    assert not traces.absolute and traces.unit == RELATIVE_UNIT and "relative" in traces.to_csv()
    assert traces.free_detected == pytest.approx(traces.free_share * DETECTOR["efficiency"], rel=1e-9)
    assert traces.packet is None and any("no decelerated packet" in note for note in traces.notes)


@pytest.mark.parametrize(("name", "value", "words"), [
    ("distance", 0.0, "[detector] distance [m] must be finite and in (0, 100]; got 0.0"),
    ("radius", -1e-3, "[detector] radius [m] must be finite and in (0, 1]; got -0.001"),
    ("efficiency", 1.5, "[detector] efficiency [1] must be finite and in (0, 1]; got 1.5"),
    ("time_bin", 0.0, "[detector] time_bin [s] must be finite and in (0, 1]; got 0.0"),
    ("time_bim", 1e-6, "unknown key '[detector] time_bim'; did you mean 'time_bin'?"),
], ids=["distance", "radius", "efficiency", "time_bin", "unknown"])
def test_bad_detector_values_name_section_key_unit_and_range(name: str, value: float, words: str) -> None:
    with pytest.raises(TiltwellError) as error:
        change: dict[str, Any] = {name: value}
        sc.from_dict(with_detector(**change))
    assert str(error.value) == words


def test_detector_before_the_release_and_no_detector_are_errors(case: Any) -> None:
    scenario, built, found, budget, _ = case
    with pytest.raises(TiltwellError, match=r"\[detector\] distance \[m\] must lie beyond the released packet"):
        predicted_traces(scenario.replace("detector", distance=1.0), found, built=built, budget=budget)
    no_detector = sc.from_dict({k: v for k, v in scenario.to_dict().items() if k != "detector"})
    with pytest.raises(TiltwellError, match=r"no \[detector\] section"):
        predicted_traces(no_detector, found, built=built, budget=budget)
    with pytest.raises(TiltwellError, match=r"time_bin \[s\] gives .* bins"):
        predicted_traces(scenario.replace("detector", time_bin=1e-12), found, built=built, budget=budget)


def test_scenario_with_a_detector_round_trips(tmp_path: Path) -> None:
    scenario = sc.from_dict(with_detector())
    assert scenario.detector == sc.DetectorSection(**DETECTOR)
    assert sc.load(sc.save(scenario, tmp_path / "detector.toml")) == scenario
    assert "[detector] (optional section)" in sc.describe()
    assert sc.from_dict(with_detector(efficiency=1.0) | {"detector": {"distance": 3.4, "radius": 1e-3}}).detector \
        == sc.DetectorSection(3.4, 1e-3, 1.0, 1e-6)


def test_figure_draws_both_traces_from_the_data(case: Any) -> None:
    from matplotlib.patches import StepPatch

    from tiltwell.figures import detector_traces

    traces = case[4]
    figure = detector_traces(traces)
    drawn = {artist.get_gid(): artist for artist in figure.axes[0].patches if isinstance(artist, StepPatch)}
    np.testing.assert_array_equal(drawn["free-beam-trace"].get_data()[0], traces.free)
    np.testing.assert_array_equal(drawn["packet-trace"].get_data()[0], traces.packet)
    np.testing.assert_allclose(drawn["packet-trace"].get_data()[1], traces.edges * 1e3)
    assert "[ms]" in figure.axes[0].get_xlabel()


def test_run_writes_the_trace_csv_and_says_what_it_wrote(case: Any, tmp_path: Path,
                                                         capsys: pytest.CaptureFixture[str]) -> None:
    from tiltwell.cli.commands import main

    scenario, traces = case[0], case[4]
    path = sc.save(scenario, tmp_path / "with-detector.toml")
    out = tmp_path / "trace.csv"
    assert main(["run", str(path), "--trace", str(out)]) == 0
    assert out.read_text(encoding="utf-8") == traces.to_csv()  # the same computation, same seed
    said = capsys.readouterr().out
    assert f"free beam {traces.free_detected:.4g}" in said
    assert f"decelerated packet {traces.packet_detected:.4g}" in said
    without = sc.from_dict({k: v for k, v in scenario.to_dict().items() if k != "detector"})
    bare = sc.save(without, tmp_path / "bare.toml")
    assert main(["run", str(bare), "--trace", str(tmp_path / "none.csv")]) == 2
    assert "--trace needs a [detector] section" in capsys.readouterr().err and not (tmp_path / "none.csv").exists()


def test_a_broad_beam_says_which_slow_tail_the_window_leaves_out() -> None:
    data = with_detector(absolute=False)
    data["beam"].pop("speed_ratio")
    data["beam"]["relative_spread"] = 0.2
    data["simulation"].update(particles=300, track=False)
    traces = predicted_traces(sc.from_dict(data))
    note = next(note for note in traces.notes if "free-beam window" in note)
    built = build(sc.from_dict(data))
    mean, spread = built.beam.velocity, built.beam.longitudinal.sigma_velocity
    left_out = stats.norm.cdf(0.05 * mean, mean, spread) - stats.norm.cdf(0.0, mean, spread)  # scipy.stats
    assert f"a share {left_out:.2g} of the beam" in note
    inside = stats.norm.sf(0.05 * mean, mean, spread)  # what the window keeps, by scipy.stats
    assert traces.free_detected == pytest.approx(traces.free_share * DETECTOR["efficiency"] * inside, rel=1e-6)
