"""The notebook explorer, without a browser: controls set in code, then the Bokeh sources,
readouts and state are compared with what the library computes directly from the scenario
the controls describe (:func:`tiltwell.workflows.report.build` of :meth:`Explorer.scenario`), and
with closed forms where the explorer draws something itself (the beam ellipses)."""

from __future__ import annotations

import math
import sys
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest
import scipy.constants as sc
from bokeh.io.state import curstate
from bokeh.resources import INLINE
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import tiltwell as tw
from tiltwell import scenario as scenario_io
from tiltwell.explorer import DEMO, Explorer, explore
from tiltwell.explorer.views import sci
from tiltwell.workflows.report import build

COILS = (Path(__file__).parent / "data" / "coil_pair.toml").read_text(encoding="utf-8")


from conftest import millikelvin_of as mk  # J -> mK with scipy's k_B, independent of tiltwell


@pytest.fixture(scope="module")
def shared() -> Iterator[Explorer]:
    app = explore(auto_tradeoff=False)
    yield app
    app.close()


@pytest.fixture
def app(shared: Explorer) -> Explorer:
    shared.reset()
    assert shared.errors == []
    return shared


def direct(app: Explorer) -> tuple[tw.Trap, tw.Beam, float, float, tw.TrapAcceptance]:
    """The library's own answer for the explorer's scenario: trap, beam, deceleration,
    mismatch and trap_acceptance without 6-D."""
    scenario = app.scenario()
    built = build(scenario)
    a = scenario.deceleration.deceleration
    assert a is not None
    return built.trap, built.beam, a, built.mismatch, tw.trap_acceptance(built.trap, a, include_6d=False)


def assert_marked(app: Explorer, plane: str, position: np.ndarray, velocity: np.ndarray, kept: np.ndarray) -> None:
    """The plane's kept and lost sources hold exactly these particles (mm, m/s), in order."""
    for name, chosen in (("kept", kept), ("lost", ~kept)):
        data = app.sources[f"{plane}_{name}"].data
        np.testing.assert_allclose(data["q"], position[chosen] * 1e3, rtol=1e-12, atol=0)
        np.testing.assert_allclose(data["v"], velocity[chosen], rtol=1e-12, atol=0)


@pytest.mark.slow
def test_default_is_the_demo_and_displays_as_a_widget(app: Explorer) -> None:
    assert app.controls["species"].value == "OH"
    assert scenario_io.load(DEMO).trap.gradient == app.controls["gradient"].value
    bundle = app._repr_mimebundle_()
    assert bundle["application/vnd.jupyter.widget-view+json"]["model_id"] == app.widget.model_id
    # nothing switched Bokeh to notebook output (which would load BokehJS from a CDN)
    assert not curstate().notebook


def test_display_publishes_inline_bokehjs_then_the_widget(app: Explorer, monkeypatch: pytest.MonkeyPatch) -> None:
    import IPython.display

    shown: list[dict[str, object]] = []
    monkeypatch.setattr(IPython.display, "publish_display_data", lambda data, *args, **kwargs: shown.append(data))
    monkeypatch.setattr(IPython.display, "display", lambda obj: shown.append({"widget": obj}))
    app.controls["deceleration"].value = 0.3 * app.state["critical_deceleration"]  # a change before display
    app._ipython_display_()
    assert shown[-1] == {"widget": app.widget}
    # the views are drawn from a serialised document: it holds the current data, changes made before display included
    bundle = app.views["longitudinal"].render_bundle["docs_json"]
    assert f"{app.figures['longitudinal'].title.text}" in str(bundle)
    scripts = "".join(str(value) for data in shown[:-1] for value in data.values())
    # BokehJS itself, from the installed bokeh (re-indented inside the loader)
    assert " ".join(INLINE.js_raw[0][:5000].split()) in " ".join(scripts.split())
    assert "cdn.bokeh.org" not in scripts
    assert not curstate().notebook


def test_slider_grids_hold_the_loaded_values(app: Explorer) -> None:
    # a browser slider draws min + k step (noUiSlider's stepping); the loaded values lie on that grid
    for name, control in app.controls.items():
        if hasattr(control, "step") and hasattr(control, "readout_format") and name != "deceleration_log":
            k = (control.value - control.min) / control.step
            assert abs(k - round(k)) < 1e-9, name


def test_a_value_sent_back_rounded_in_its_last_digits_changes_nothing(app: Explorer) -> None:
    loaded = dict(app.state)
    app.controls["initial_velocity"].value *= 1.0 + 1e-13
    assert app.state == pytest.approx(loaded, nan_ok=True, rel=0, abs=0)
    assert app.scenario().beam == scenario_io.load(DEMO).beam  # the temperature was not rewritten


def test_initial_numbers_equal_the_library(app: Explorer) -> None:
    trap, beam, a, mismatch, result = direct(app)
    assert app.state["deceleration"] == a
    assert app.state["longitudinal_acceptance"] == tw.longitudinal_acceptance(trap, a).area
    assert app.state["transverse_acceptance"] == result.transverse.area
    assert app.state["escape_energy"] == result.escape_energy
    overlap = tw.plane_product_fraction(result.longitudinal, result.transverse, beam, mismatch)
    assert app.state["captured_fraction_overlap"] == overlap
    assert app.readouts["longitudinal"].value == f"{result.longitudinal.area * 1e3:.4g} mm·m/s"
    assert app.readouts["overlap"].value == f"{overlap:.4g}"
    assert app.readouts["depth"].value == f"{mk(result.longitudinal.depth):.4g} mK"
    # the demo stops 385.8 m/s to 20 m/s in 3.0 m: L = (v0^2 - vf^2) / (2 a) (kinematics)
    v0 = beam.velocity
    assert app.state["length"] == pytest.approx((v0**2 - 20.0**2) / (2 * a), rel=1e-12)
    # the row is the coils that ever carry current: those strictly within active/2 = 3 pitches
    # of the trap's path 0 .. L = 375 pitches of 8 mm, i.e. z_k = k pitch for k = -2 .. 377
    assert app.state["coils"] == round(3.0 / 0.008) + 2 * (6 // 2 - 1) + 1


@pytest.mark.parametrize("fraction", [0.1, 0.5, 0.9])
def test_deceleration_move_redraws_from_the_library(app: Explorer, fraction: float) -> None:
    before = app.sources["longitudinal_separatrix"].data["q"]
    app.controls["deceleration"].value = fraction * app.state["critical_deceleration"]
    trap, _beam, a, _, result = direct(app)
    assert a == fraction * app.state["critical_deceleration"]
    z, v = tw.longitudinal_acceptance(trap, a).boundary()
    np.testing.assert_allclose(app.sources["longitudinal_separatrix"].data["q"], z * 1e3, rtol=1e-12, atol=0)
    np.testing.assert_allclose(app.sources["longitudinal_separatrix"].data["v"], v, rtol=1e-12, atol=0)
    x, vx = result.transverse.boundary()
    np.testing.assert_allclose(app.sources["transverse_separatrix"].data["q"], x * 1e3, rtol=1e-12, atol=0)
    np.testing.assert_allclose(app.sources["transverse_separatrix"].data["v"], vx, rtol=1e-12, atol=0)
    cut_z, cut_u = trap.axis_cut(a)
    np.testing.assert_allclose(app.sources["potential"].data["z"], cut_z * 1e3, rtol=1e-12)
    np.testing.assert_allclose(app.sources["potential"].data["moving"], mk(cut_u), rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(app.sources["potential"].data["lab"], mk(trap.axis_cut(0.0)[1]), rtol=1e-12,
                               atol=1e-12)
    assert len(before) != len(app.sources["longitudinal_separatrix"].data["q"]) or not np.array_equal(
        before, app.sources["longitudinal_separatrix"].data["q"])
    assert app.state["longitudinal_acceptance"] == result.longitudinal.area
    assert app.sources["tradeoff_current"].data["deceleration"] == [a]
    assert app.message.value == ""


def test_barriers_define_the_escape_energy(app: Explorer) -> None:
    app.controls["deceleration"].value = 0.4 * app.state["critical_deceleration"]
    _, _, _, _, result = direct(app)
    # DESIGN.md: the escape energy is the lower of the highest potentials either side of the bottom
    assert min(app.state["back_barrier"], app.state["front_barrier"]) == pytest.approx(
        result.longitudinal.depth, rel=1e-12)
    # the tilt -m a z lowers the front (downstream) barrier
    assert app.state["front_barrier"] < app.state["back_barrier"]
    heights = app.sources["barriers"].data["height"]
    np.testing.assert_allclose(heights, mk([app.state["back_barrier"], app.state["front_barrier"]]), rtol=1e-12)


def test_above_the_critical_deceleration_gives_a_message_and_no_separatrix(app: Explorer) -> None:
    critical = app.state["critical_deceleration"]
    app.controls["deceleration"].value = 1.3 * critical
    assert f"no bound well above the critical deceleration {tw.explorer.views.sci(critical)} m/s^2" in app.message.value
    for plane in ("longitudinal", "transverse"):
        assert len(app.sources[f"{plane}_separatrix"].data["q"]) == 0
        assert len(app.sources[f"{plane}_kept"].data["q"]) == 0
        assert len(app.sources[f"{plane}_lost"].data["q"]) == 2000
    assert app.state["longitudinal_acceptance"] == 0.0
    assert app.state["captured_fraction_overlap"] == 0.0
    assert len(app.sources["barriers"].data["z"]) == 0
    assert app.errors == []


def test_critical_deceleration_of_a_linear_zeeman_quadrupole() -> None:
    # the demo's trap is its coil row; its first estimate ([simulation] first_estimate) is the ideal quadrupole
    quadrupole = scenario_io.load(DEMO).replace("simulation", first_estimate=True)
    app = explore(quadrupole, auto_tradeoff=False)
    try:
        app.update(species="CaF", gradient=180.0)
        check_linear_critical(app)
    finally:
        app.close()


def check_linear_critical(app: Explorer) -> None:
    particle = tw.species("CaF")
    # closed form: on the axis of an ideal quadrupole |B| = B' |z| (DESIGN.md conventions), so a linear Zeeman
    # potential has the constant slope dU/dz = mu B' in front of the bottom, and the well vanishes at a = mu B' / m
    assert app.state["critical_deceleration"] == pytest.approx(particle.moment * 180.0 / particle.mass, rel=1e-9)
    assert "critical deceleration " + tw.explorer.views.sci(app.state["critical_deceleration"]) in (
        app.readouts["critical"].value)


@pytest.mark.parametrize("name", ["H", "Rb-87", "NH"])
def test_species_change_equals_the_library(app: Explorer, name: str) -> None:
    app.controls["species"].value = name
    trap, beam, _a, mismatch, result = direct(app)
    assert trap.species.name == name
    assert app.state["critical_deceleration"] == trap.critical_deceleration()
    assert app.state["longitudinal_acceptance"] == result.longitudinal.area
    assert app.state["captured_fraction_overlap"] == tw.plane_product_fraction(
        result.longitudinal, result.transverse, beam, mismatch)
    # the slider runs a little past the critical deceleration (or to the current value, never
    # clipped), and the readout says so
    slider, critical = app.controls["deceleration"], app.state["critical_deceleration"]
    assert slider.max >= 1.25 * critical
    assert slider.max < 1.3 * critical or slider.max == pytest.approx(slider.value, rel=1e-3)
    assert "no well beyond it (the slider's last 20 %)" in app.readouts["critical"].value


@pytest.mark.parametrize(("control", "value"), [("gradient", 400.0), ("max_field", 1.5), ("mismatch", 6.0)])
def test_trap_and_mismatch_controls_equal_the_library(app: Explorer, control: str, value: float) -> None:
    app.controls[control].value = value
    _trap, beam, _a, mismatch, result = direct(app)
    assert app.state["transverse_acceptance"] == result.transverse.area
    assert app.state["captured_fraction_overlap"] == tw.plane_product_fraction(
        result.longitudinal, result.transverse, beam, mismatch)
    assert app.message.value == ""


def test_beam_ellipses_are_the_sigma_contours_of_the_beam(app: Explorer) -> None:
    app.update(mismatch=8.0)
    _, beam, _, _, _ = direct(app)
    data = app.sources["longitudinal_ellipses"].data
    for k, xs, ys in zip((1.0, 2.0), data["xs"], data["ys"]):
        d = np.stack([np.asarray(xs) * 1e-3, np.asarray(ys) + 8.0])  # back to m, about the mean (0, -mismatch)
        # quadratic form d^T C^-1 d = k^2 on the k-sigma contour, solved with numpy.linalg
        form = np.einsum("in,in->n", d, np.linalg.solve(beam.longitudinal.covariance, d))
        np.testing.assert_allclose(form, k**2, rtol=1e-9)
    # the drawn particles share the frame: inside the 2-sigma ellipse lies 1 - exp(-2^2/2) of a 2-D Gaussian
    # (chi-square with 2 degrees of freedom), within 4 binomial standard errors
    q = np.concatenate([app.sources[f"longitudinal_{kind}"].data["q"] for kind in ("kept", "lost")]) * 1e-3
    v = np.concatenate([app.sources[f"longitudinal_{kind}"].data["v"] for kind in ("kept", "lost")]) + 8.0
    d = np.stack([q, v])
    inside = np.mean(np.einsum("in,in->n", d, np.linalg.solve(beam.longitudinal.covariance, d)) < 4.0)
    expected = 1.0 - math.exp(-2.0)
    assert abs(inside - expected) < 4.0 * math.sqrt(expected * (1 - expected) / q.size)


def test_particles_are_marked_by_the_separatrix(app: Explorer) -> None:
    app.update(mismatch=-5.0, deceleration=0.6 * app.state["critical_deceleration"])
    scenario = app.scenario()
    _, beam, _, _, result = direct(app)
    sample = beam.sample(2000, seed=scenario.simulation.seed)
    along = result.longitudinal.contains(sample[:, 2], sample[:, 5] + 5.0)
    assert 0 < np.count_nonzero(along) < along.size
    assert_marked(app, "longitudinal", sample[:, 2], sample[:, 5] + 5.0, along)
    across = result.transverse.contains(sample[:, 0], sample[:, 3])
    assert_marked(app, "transverse", sample[:, 0], sample[:, 3], across)
    assert "(kept: inside the separatrix)" in app.figures["longitudinal"].title.text


def test_velocity_controls_follow_the_source_model(app: Explorer) -> None:
    app.update(initial_velocity=300.0, relative_spread=0.05, transverse_scale=2.0)
    scenario = app.scenario()
    # terminal velocity sqrt(2 gamma/(gamma-1) k T0 / m) of krypton (83.798 u, gamma 5/3; Miller, ch. 2 of
    # Scoles (ed.), Atomic and Molecular Beam Methods; atomic weight from memory)
    mass = 83.798 * sc.physical_constants["atomic mass constant"][0]
    assert math.sqrt(5.0 * sc.k * scenario.beam.temperature / mass) == pytest.approx(300.0, rel=1e-12)
    assert app.state["beam_velocity"] == pytest.approx(300.0, rel=1e-12)
    # free flight keeps <v v>: the 1-sigma ellipse reaches 0.05 x 300 m/s in velocity
    ys = np.asarray(app.sources["longitudinal_ellipses"].data["ys"][0])
    assert (ys.max() - ys.min()) / 2 == pytest.approx(0.05 * 300.0, rel=1e-3)
    # the transverse velocity spread is v (D/4)/L of the narrowest aperture: doubling every D doubles it
    base = build(scenario.replace("beam", skimmer_diameter=2e-3, apertures=[[0.2, 3e-3]]))
    assert build(scenario).beam.horizontal.sigma_velocity == pytest.approx(
        2.0 * base.beam.horizontal.sigma_velocity, rel=1e-12)


@pytest.mark.parametrize(("values", "words"), [
    ({"final_velocity": 500.0}, ["final_velocity", "500"]),
    ({"deceleration": 0.0}, ["deceleration", "m/s^2", "0.0"]),
])
def test_invalid_schedule_keeps_the_picture_and_says_why(app: Explorer, values: dict[str, float],
                                                         words: list[str], tmp_path: Path) -> None:
    app.update(**values)
    assert all(word in app.message.value for word in words)
    assert len(app.sources["longitudinal_separatrix"].data["q"]) > 0
    assert math.isnan(app.state["length"])
    assert app.readouts["length"].value == "—"
    with pytest.raises(tw.TiltwellError):
        app.save_scenario(tmp_path / "never.toml")
    assert list(tmp_path.iterdir()) == []
    assert app.errors == []


def test_a_tiny_deceleration_skips_an_absurd_coil_table(app: Explorer) -> None:
    app.update(deceleration=1e-6)  # 385.8 m/s stopped at 1e-6 m/s^2: 7.4e10 m, some 6e12 coils of 12 mm
    v0 = app.state["beam_velocity"]
    assert app.state["length"] == pytest.approx((v0**2 - 20.0**2) / 2e-6, rel=1e-12)
    assert "over 100000 coils" in app.message.value
    assert app.readouts["coils"].value == "— (over 100000 coils)"
    assert math.isnan(app.state["coils"])
    assert app.errors == []


@pytest.mark.slow
def test_invalid_beam_blanks_the_views_with_a_message() -> None:
    wide = scenario_io.load(DEMO).replace("beam", skimmer_diameter=0.03)
    app = explore(wide, auto_tradeoff=False)
    try:
        app.controls["transverse_scale"].value = 4.0  # 0.12 m > the 0.1 m a skimmer may have
        assert "skimmer_diameter" in app.message.value
        assert all(len(next(iter(source.data.values()))) == 0 for source in app.sources.values())
        app.controls["transverse_scale"].value = 1.0
        assert app.message.value == ""
        assert app.errors == []
    finally:
        app.close()


def test_log_scale_switches_the_slider_and_both_move_together(app: Explorer) -> None:
    app.controls["log_scale"].value = True
    assert app.widget is not None and app.deceleration_box.children == (app.controls["deceleration_log"],)
    app.controls["deceleration_log"].value = 2.0e4
    assert app.controls["deceleration"].value == 2.0e4
    assert app.state["deceleration"] == 2.0e4
    app.controls["log_scale"].value = False
    assert app.deceleration_box.children == (app.controls["deceleration"],)


def test_update_rejects_unknown_controls_and_values_out_of_range(app: Explorer) -> None:
    with pytest.raises(tw.TiltwellError, match="unknown control"):
        app.update(gradeint=100.0)
    with pytest.raises(tw.TiltwellError, match=r"mismatch must be a number in \[-96"):
        app.update(mismatch=1e4)


control_values = st.fixed_dictionaries({
    "species": st.sampled_from(tw.catalogue()),
    "gradient": st.floats(10.0, 400.0),  # the sliders span 0.1 to 4 x the demo's 100 T/m and 0.32 T
    "max_field": st.floats(0.033, 1.28),
    "initial_velocity": st.floats(116.0, 1150.0),
    "final_velocity": st.floats(0.0, 1150.0),
    "relative_spread": st.floats(0.002, 0.3),
    "transverse_scale": st.floats(0.1, 4.0),
    "mismatch": st.floats(-96.0, 96.0),
})


@pytest.mark.slow
@settings(max_examples=40, deadline=None, database=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(values=control_values, fraction=st.floats(0.0, 1.25))
def test_any_setting_gives_a_picture_never_an_exception(app: Explorer, values: dict[str, object],
                                                        fraction: float) -> None:
    app.update(**values)
    app.update(deceleration=fraction * app.state["critical_deceleration"])
    assert app.errors == []
    for source in app.sources.values():
        assert len({len(column) for column in source.data.values()}) == 1
    assert app.state["critical_deceleration"] > 0.0
    bound = app.state["longitudinal_acceptance"] > 0.0
    assert bound == (len(app.sources["longitudinal_separatrix"].data["q"]) > 0)
    if fraction > 1.0 and not bound:
        assert "no bound well above the critical deceleration" in app.message.value


def test_save_scenario_round_trip(app: Explorer, tmp_path: Path) -> None:
    app.update(species="NH", gradient=300.0, initial_velocity=350.0, relative_spread=0.02, transverse_scale=0.5,
               mismatch=-3.0, final_velocity=5.0)
    app.update(deceleration=0.3 * app.state["critical_deceleration"])
    path = app.save_scenario(tmp_path / "plan.toml")
    loaded = scenario_io.load(path)
    assert loaded == app.scenario()
    built = build(loaded)
    assert built.beam.velocity == app.state["beam_velocity"]
    assert built.schedule.deceleration == app.state["deceleration"]
    assert tw.trap_acceptance(built.trap, built.schedule.deceleration, include_6d=False).longitudinal.area == (
        app.state["longitudinal_acceptance"])
    assert list(tmp_path.iterdir()) == [path]  # atomic: no temporary file left behind


def test_save_html_is_standalone_with_inline_bokehjs(app: Explorer, tmp_path: Path) -> None:
    path = app.save_html(tmp_path / "views.html")
    text = path.read_text(encoding="utf-8")
    assert "cdn.bokeh.org" not in text
    assert '<script type="text/javascript" src="http' not in text
    assert INLINE.js_raw[0][:5000] in text  # the start of bokeh.min.js itself, inlined
    assert f"{app.state['longitudinal_acceptance'] * 1e3:.4g} mm" in text  # the readouts head the page
    assert list(tmp_path.iterdir()) == [path]
    assert "Monte-Carlo button" not in text and "6-D button" not in text  # no row points to a missing button
    assert "readouts not computed before saving are left out" in text


@pytest.mark.slow
def test_monte_carlo_equals_capture_estimates(app: Explorer) -> None:
    app.update(particles=300)
    stale = app.readouts["tracked"].value
    estimates = app.run_monte_carlo().result(timeout=120)
    app.wait()  # and the yield budget the check starts after it
    assert isinstance(estimates, tw.CaptureEstimates)
    trap, beam, a, mismatch, _ = direct(app)
    scenario = app.scenario()
    schedule = build(scenario).schedule
    reference = tw.capture_estimates(trap, a, beam, schedule.duration, particles=300, seed=scenario.simulation.seed,
                                     mismatch=mismatch)
    assert app.state["captured_fraction_energy"] == reference.energetic
    assert app.state["captured_fraction_mc"] == reference.tracked
    assert app.state["acceptance_6d"] == reference.acceptance.volume
    assert app.readouts["tracked"].value.startswith(f"{reference.tracked:.4g} ± ")
    assert app.readouts["tracked"].value != stale
    assert reference.tracking is not None
    sample = beam.sample(300, seed=scenario.simulation.seed)
    assert_marked(app, "longitudinal", sample[:, 2], sample[:, 5] - mismatch, reference.tracking.kept)
    # the drawn particles are the check's own: its sample and its kept flags, in both planes
    assert estimates is not None and estimates.sample is not None and estimates.tracking is not None
    np.testing.assert_array_equal(estimates.sample[:, 5], sample[:, 5] - mismatch)
    assert_marked(app, "transverse", estimates.sample[:, 0], estimates.sample[:, 3], estimates.tracking.kept)
    assert "(kept: tracked trajectories)" in app.figures["longitudinal"].title.text
    assert "finished" in app.actions["progress"].value
    # any move makes the heavy numbers stale
    app.controls["deceleration"].value = 0.5 * app.state["critical_deceleration"]
    assert math.isnan(app.state["captured_fraction_mc"])
    assert app.readouts["tracked"].value == "— (Monte-Carlo button)"


@pytest.mark.slow
def test_monte_carlo_is_followed_by_the_yield_budget(app: Explorer) -> None:
    """After the check, slow particles per shot and the final cloud appear beside the
    fractions: the numbers of tiltwell.yield_budget for the same scenario and estimates."""
    app.update(particles=300)
    estimates = app.run_monte_carlo().result(timeout=120)
    app.wait()
    assert estimates is not None
    scenario = app.scenario()
    budget = tw.yield_budget(scenario, build(scenario), estimates)
    assert budget.slow_particles is not None and budget.final_cloud is not None
    assert app.state["slow_particles"] == pytest.approx(budget.slow_particles, rel=1e-12)
    assert app.state["final_temperature"] == pytest.approx(budget.final_cloud.temperature, rel=1e-12)
    shown = app.readouts["slow"].value
    assert shown.startswith(sci(budget.slow_particles)) and sci(budget.high or 0.0) in shown
    assert f"{budget.final_cloud.temperature * 1e3:.3g} mK" in app.readouts["final_cloud"].value
    app.controls["deceleration"].value = 0.5 * app.state["critical_deceleration"]
    assert math.isnan(app.state["slow_particles"]) and app.readouts["slow"].value.startswith("— (Monte-Carlo")


@pytest.mark.slow
def test_a_result_for_old_settings_is_discarded(app: Explorer) -> None:
    app.update(particles=200)
    future = app.run_monte_carlo()
    app.controls["mismatch"].value = 2.0  # moves on while the check runs (it takes ~1 s: the 6-D grid)
    future.result(timeout=60)
    app.wait()
    assert "discarded" in app.status.value
    assert math.isnan(app.state["captured_fraction_mc"])
    assert app.errors == []


@pytest.mark.slow
def test_tradeoff_recomputes_in_the_background(tmp_path: Path) -> None:
    app = explore()
    try:
        app.controls["relative_spread"].value = 0.05
        assert "updating" in app.figures["tradeoff"].title.text
        app.wait(timeout=60)
        assert app.figures["tradeoff"].title.text == "trade-off against deceleration"
        trap, beam, _, mismatch, _ = direct(app)
        data = app.sources["tradeoff"].data
        v0, vf = beam.velocity + mismatch, app.state["final_velocity"]
        for i in (3, 15):
            a = data["deceleration"][i]
            at = tw.trap_acceptance(trap, a, include_6d=False)
            assert data["overlap"][i] == tw.plane_product_fraction(at.longitudinal, at.transverse, beam, mismatch)
            # stopping distance of a constant deceleration, (v0^2 - vf^2) / (2 a)
            assert data["length"][i] == pytest.approx((v0**2 - vf**2) / (2 * a), rel=1e-12)
        assert data["deceleration"][-1] == pytest.approx(1.1 * app.state["critical_deceleration"], rel=1e-12)
        assert app.errors == []
    finally:
        app.close()


@pytest.mark.slow
def test_coil_scenario_has_a_current_control(tmp_path: Path) -> None:
    path = tmp_path / "coils.toml"
    path.write_text(COILS, encoding="utf-8")
    app = explore(path, auto_tradeoff=False)
    try:
        assert "current" in app.controls and "gradient" not in app.controls
        app.controls["current"].value = 300.0
        trap, _beam, _a, _mismatch, result = direct(app)
        assert app.scenario().trap.current == 300.0
        assert app.state["longitudinal_acceptance"] == result.longitudinal.area
        assert app.state["transverse_acceptance"] == result.transverse.area
        assert app.state["critical_deceleration"] == trap.critical_deceleration()
        assert app.readouts["coils"].value == "— (no coil pitch in the scenario)"
        assert app.state["deceleration"] == 5000.0 and app.message.value == ""
        assert app.errors == []
    finally:
        app.close()


def test_save_figures_without_the_figures_module(app: Explorer, monkeypatch: pytest.MonkeyPatch,
                                                 tmp_path: Path) -> None:
    monkeypatch.setitem(sys.modules, "tiltwell.figures", None)  # import now raises ImportError
    assert app.save_figures(tmp_path / "figures").result(timeout=0) is None
    assert "tiltwell.figures" in app.status.value
    assert list(tmp_path.iterdir()) == []


@pytest.mark.slow
def test_compute_6d_equals_trap_acceptance(app: Explorer) -> None:
    volume = app.compute_6d().result(timeout=120)
    trap, _, a, _, _ = direct(app)
    assert volume == tw.trap_acceptance(trap, a).volume
    assert app.state["acceptance_6d"] == volume
    assert app.readouts["acceptance_6d"].value == f"{volume * 1e9:.4g} (mm·m/s)³"


@pytest.mark.slow
def test_save_figures_writes_the_scenario_set(app: Explorer, tmp_path: Path) -> None:
    app.update(particles=200)
    future = app.save_figures(tmp_path / "figures")
    paths = future.result(timeout=600)
    assert paths is not None and all(path.is_file() and path.parent == tmp_path / "figures" for path in paths)
    # every figure in the three formats the figures module writes by default
    names = {path.stem for path in paths}
    assert {"potential", "phase-longitudinal", "phase-transverse"} <= names
    expected = [f"{name}.{ext}" for name in names for ext in ("pdf", "png", "svg")]
    assert sorted(path.name for path in paths) == sorted(expected)
    assert app.status.value == f"figures written to {tmp_path / 'figures'}"
    assert app.errors == []


def test_legends_sit_under_the_plots_not_on_the_data() -> None:
    """Every explorer figure with a legend keeps it in the panel under the plot (Bokeh's
    layout, outside the data area), in at most two rows."""
    from bokeh.models import Legend

    from tiltwell.explorer import coilviews, views

    drawn = {**views.make_views()[0], **coilviews.make_views()[0]}
    with_legend = {name: p for name, p in drawn.items() if p.legend}
    assert set(with_legend) == {"potential", "longitudinal", "transverse", "tradeoff", "depth", "acceptance"}
    for name, p in with_legend.items():
        assert not any(isinstance(item, Legend) for item in p.center), name
        (legend,) = [item for item in p.below if isinstance(item, Legend)]
        assert legend.orientation == "horizontal" and legend.nrows in ("auto", 1, 2), name


def test_the_save_buttons_default_to_a_folder_outside_the_checkout(monkeypatch: pytest.MonkeyPatch,
                                                                   tmp_path: Path) -> None:
    from tiltwell.explorer.widgets import output_paths

    monkeypatch.setenv("TILTWELL_OUTPUT", str(tmp_path / "out"))
    assert output_paths() == (str(tmp_path / "out" / "scenario.toml"), str(tmp_path / "out" / "figures"))
    monkeypatch.delenv("TILTWELL_OUTPUT")
    monkeypatch.setenv("HOME", str(tmp_path))
    assert output_paths()[0] == str(tmp_path / "tiltwell-output" / "scenario.toml")


def test_one_tick_rule_for_every_axis(app: Explorer) -> None:
    """Every linear axis of every explorer figure (main views, coil part, detector, design)
    formats its ticks by the same rule, so 2e4 m/s^2 reads the same in any figure and for any
    species; Bokeh's BasicTickFormatter with those settings is the reference."""
    from bokeh.models import BasicTickFormatter, LinearAxis

    from tiltwell.explorer.plumbing import TICK_RULE

    figures = [*app.figures.values(), *app.coil_array.figures.values(), app.detector.figure, app.design.figure]
    axes = [axis for p in figures for axis in (*p.left, *p.right, *p.below, *p.above) if isinstance(axis, LinearAxis)]
    assert len(axes) >= 2 * len(figures)
    for axis in axes:
        assert isinstance(axis.formatter, BasicTickFormatter)
        assert {key: getattr(axis.formatter, key) for key in TICK_RULE} == TICK_RULE
    app.controls["species"].value = "Rb-87"
    assert all(isinstance(axis.formatter, BasicTickFormatter) for p in app.figures.values() for axis in p.left)


def test_axis_labels_carry_no_raw_underscores() -> None:
    """A label with a subscript is math text between $$ (Bokeh hands it to MathJax, inlined
    with BokehJS); no other label shows an underscore."""
    from bokeh.models import LinearAxis

    from tiltwell.explorer import coilviews, views

    drawn = {**views.make_views()[0], **coilviews.make_views()[0]}
    labels = [str(axis.axis_label) for p in drawn.values() for axis in (*p.left, *p.right, *p.below)
              if isinstance(axis, LinearAxis) and axis.axis_label]
    assert r"$$U / k_\mathrm{B}\ \mathrm{[mK]}$$" in labels and r"$$v_z - v_\mathrm{trap}\ \mathrm{[m/s]}$$" in labels
    for label in labels:
        assert "_" not in label or (label.startswith("$$") and label.endswith("$$")), label
