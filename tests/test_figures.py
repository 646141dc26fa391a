"""Static figures: the views draw the library's data, in display units, and export cleanly.

Each figure is checked against something outside the view: closed forms of the ideal
quadrupole trap (its potential on the axis, barriers, separatrix area, critical
deceleration), the area of an ellipse, numpy's histogram, and the file formats' own
headers read with the standard library.
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")  # before anything can pick a display backend

import math
import os
import struct
import sys
import xml.etree.ElementTree as ET
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from matplotlib.collections import PathCollection
from matplotlib.figure import Figure

import tiltwell as tw
from tiltwell import figures, scenario
from tiltwell.cli import DEMO_SCENARIO, main
from tiltwell.cli.drawings import write_scenario_figures
from tiltwell.physics.constants import millikelvin

GRADIENT, MAX_FIELD = 250.0, 0.8  # T/m, T: the README's ideal quadrupole
EDGE = MAX_FIELD / GRADIENT  # m, where |B| reaches the cap on the axis
OH = tw.species("OH")  # a linear Zeeman state: W = moment * |B|
CRITICAL = OH.moment * GRADIENT / OH.mass  # m/s^2: the restoring force mu B' over m


@pytest.fixture(autouse=True)
def no_pyplot_state() -> Iterator[list[Figure]]:
    """Figures made here are collected and cleared afterwards; none may land in pyplot's
    global list (the view makes plain ``Figure`` objects)."""
    made: list[Figure] = []
    yield made
    if "matplotlib.pyplot" in sys.modules:
        import matplotlib.pyplot as plt

        leaked = plt.get_fignums()
        plt.close("all")
        assert leaked == []
    for figure in made:
        figure.clear()


@pytest.fixture(scope="module")
def trap() -> tw.Trap:
    return tw.Trap(tw.IdealQuadrupole(GRADIENT, MAX_FIELD), OH, ((-4 * EDGE, 4 * EDGE),) * 2 + ((-2 * EDGE, 2 * EDGE),))


def artist(figure: Figure, gid: str) -> Any:
    """The one artist with this gid, on any axes of the figure."""
    found = [a for ax in figure.axes for a in ax.get_children() if a.get_gid() == gid]
    assert len(found) == 1, f"{len(found)} artists with gid {gid!r}"
    return found[0]


def has(figure: Figure, gid: str) -> bool:
    return any(a.get_gid() == gid for ax in figure.axes for a in ax.get_children())


def shoelace(x: np.ndarray, y: np.ndarray) -> float:
    """Area of a closed polygon (the shoelace formula)."""
    return 0.5 * abs(float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))


def axis_potential(z: np.ndarray, a: float) -> np.ndarray:
    """Closed form on the axis of an ideal quadrupole of finite depth: |B| = min(B'|z|, B_max)
    (DESIGN.md), W = mu |B| for a linear Zeeman state, tilted by -m a z [J]."""
    return OH.moment * np.minimum(GRADIENT * np.abs(z), MAX_FIELD) - OH.mass * a * z


def tilted_v_area(a: float) -> float:
    """Phase-space area [m·m/s] inside the separatrix of the tilted V well
    U = (k - m a) z for z > 0, (k + m a)|z| for z < 0, k = mu B', escaping over the front
    kink at z = EDGE with E = (k - m a) EDGE. Elementary integral (derived by hand):
    area = 2 sqrt(2/m) (2/3) E^(3/2) (1/(k - m a) + 1/(k + m a)); zero for a >= a_c."""
    k, m = OH.moment * GRADIENT, OH.mass
    if m * a >= k:
        return 0.0
    energy = (k - m * a) * EDGE
    return 2.0 * math.sqrt(2.0 / m) * (2.0 / 3.0) * energy**1.5 * (1.0 / (k - m * a) + 1.0 / (k + m * a))


# --- potential ------------------------------------------------------------------------------


def test_potential_lines_follow_the_axis_closed_form(trap: tw.Trap, no_pyplot_state: list[Figure]) -> None:
    a = 0.3 * CRITICAL
    figure = figures.potential(trap, a)
    no_pyplot_state.append(figure)
    assert isinstance(figure, Figure)
    for gid, deceleration in (("potential-lab", 0.0), ("potential-decelerating", a)):
        line = artist(figure, gid)
        z = np.asarray(line.get_xdata()) * 1e-3
        expected = millikelvin(axis_potential(z, deceleration))
        np.testing.assert_allclose(line.get_ydata(), expected, rtol=1e-9, atol=1e-9 * expected.max())
    assert figure.axes[0].get_xlabel() == "z [mm]"


def test_potential_escape_energy_and_barriers_are_the_closed_forms(trap: tw.Trap,
                                                                   no_pyplot_state: list[Figure]) -> None:
    """Tilted V well of the capped quadrupole: front barrier at the cap, z = EDGE, height
    W(B_max) - m a EDGE (= the escape energy); behind the bottom the capped potential still
    rises to the box wall z = -2 EDGE, height W(B_max) + 2 m a EDGE: marked as the wall, not
    as a barrier (there is no maximum there)."""
    a = 0.3 * CRITICAL
    figure = figures.potential(trap, a)
    no_pyplot_state.append(figure)
    cap, tilt = OH.moment * MAX_FIELD, OH.mass * a * EDGE
    escape = artist(figure, "escape-energy").get_ydata()
    assert escape[0] == pytest.approx(millikelvin(cap - tilt), rel=1e-9)
    assert escape[0] == pytest.approx(millikelvin(tw.longitudinal_acceptance(trap, a).escape_energy), rel=1e-12)
    assert not has(figure, "barrier-back") and not has(figure, "box-wall-front")
    assert any("box wall" in text.get_text() for text in figure.axes[0].texts)
    assert not any("back barrier" in text.get_text() for text in figure.axes[0].texts)
    for gid, z, height in (("barrier-front", EDGE, cap - tilt), ("box-wall-back", -2 * EDGE, cap + 2 * tilt)):
        marker = artist(figure, gid)
        assert marker.get_xdata()[0] == pytest.approx(z * 1e3, rel=1e-9)
        assert marker.get_ydata()[0] == pytest.approx(millikelvin(height), rel=1e-9)


def test_potential_beyond_the_critical_deceleration_says_no_well(trap: tw.Trap,
                                                                 no_pyplot_state: list[Figure]) -> None:
    figure = figures.potential(trap, 1.2 * CRITICAL)
    no_pyplot_state.append(figure)
    assert has(figure, "no-well")
    assert not has(figure, "escape-energy")
    assert not has(figure, "barrier-front")


# --- phase plane ----------------------------------------------------------------------------


@pytest.mark.parametrize("fraction", [0.0, 0.3, 0.7], ids=["a=0", "a=0.3ac", "a=0.7ac"])
def test_separatrix_line_is_the_library_curve_with_the_closed_form_area(
    trap: tw.Trap, fraction: float, no_pyplot_state: list[Figure]
) -> None:
    well = tw.longitudinal_acceptance(trap, fraction * CRITICAL)
    figure = figures.phase_plane(well)
    no_pyplot_state.append(figure)
    line = artist(figure, "separatrix")
    z, v = well.boundary()
    np.testing.assert_array_equal(line.get_xdata(), z * 1e3)
    np.testing.assert_array_equal(line.get_ydata(), v)
    # the drawn polygon encloses the closed-form area, in mm·m/s (chords cost ~1e-4)
    drawn = shoelace(np.asarray(line.get_xdata()), np.asarray(line.get_ydata()))
    assert drawn == pytest.approx(tilted_v_area(fraction * CRITICAL) * 1e3, rel=1e-3)


@pytest.mark.parametrize("sigmas", [1, 2], ids=["1sigma", "2sigma"])
def test_beam_ellipse_encloses_pi_k2_emittance(trap: tw.Trap, sigmas: int, no_pyplot_state: list[Figure]) -> None:
    """Area of an ellipse: the k-sigma contour q^T C^-1 q = k^2 of a bivariate normal has
    area pi k^2 sqrt(det C), and sqrt(det C) = s_q s_v sqrt(1 - r^2) for rms sizes s and
    correlation r (closed forms)."""
    s_q, s_v, r = 1.5e-3, 4.0, 0.6
    plane = tw.PhasePlane.from_sigmas(s_q, s_v, r)
    mean = (0.5e-3, -2.0)
    figure = figures.phase_plane(tw.longitudinal_acceptance(trap, 0.0), plane=plane, mean=mean)
    no_pyplot_state.append(figure)
    line = artist(figure, f"beam-{sigmas}sigma")
    x, v = np.asarray(line.get_xdata()), np.asarray(line.get_ydata())
    emittance = s_q * s_v * math.sqrt(1.0 - r * r)
    assert shoelace(x, v) == pytest.approx(math.pi * sigmas**2 * emittance * 1e3, rel=1e-3)  # mm·m/s
    # every vertex, back in SI, lies on the contour (np.linalg.solve, no eigenvectors)
    points = np.vstack([x * 1e-3 - mean[0], v - mean[1]])
    covariance = np.array([[s_q**2, r * s_q * s_v], [r * s_q * s_v, s_v**2]])
    levels = np.sum(points * np.linalg.solve(covariance, points), axis=0)
    np.testing.assert_allclose(levels, sigmas**2, rtol=1e-9)


def test_particles_are_split_kept_and_lost(trap: tw.Trap, no_pyplot_state: list[Figure]) -> None:
    well = tw.longitudinal_acceptance(trap, 0.0)
    rng = np.random.default_rng(1)
    q, v = rng.normal(0.0, 2e-3, 40), rng.normal(0.0, 10.0, 40)
    kept = np.arange(40) % 3 == 0  # a pattern the view cannot guess
    figure = figures.phase_plane(well, particles=(q, v), kept=kept)
    no_pyplot_state.append(figure)
    for gid, chosen in (("particles-kept", kept), ("particles-lost", ~kept)):
        cloud = artist(figure, gid)
        assert isinstance(cloud, PathCollection)
        np.testing.assert_array_equal(np.asarray(cloud.get_offsets()), np.column_stack([q[chosen] * 1e3, v[chosen]]))
    kept_colour = artist(figure, "particles-kept").get_facecolor()[0]
    lost_colour = artist(figure, "particles-lost").get_facecolor()[0]
    assert not np.allclose(kept_colour, lost_colour)


@pytest.mark.parametrize(("axis", "label"), [("longitudinal", "z [mm]"), ("transverse", "x [mm]")],
                         ids=["longitudinal", "transverse"])
def test_phase_plane_axis_label(trap: tw.Trap, axis: str, label: str, no_pyplot_state: list[Figure]) -> None:
    figure = figures.phase_plane(tw.longitudinal_acceptance(trap, 0.0), axis=axis)
    no_pyplot_state.append(figure)
    assert figure.axes[0].get_xlabel() == label


def test_phase_plane_of_an_unbound_well_draws_a_note(trap: tw.Trap, no_pyplot_state: list[Figure]) -> None:
    figure = figures.phase_plane(tw.longitudinal_acceptance(trap, 1.2 * CRITICAL))
    no_pyplot_state.append(figure)
    assert has(figure, "no-well") and not has(figure, "separatrix")


@pytest.mark.parametrize(
    ("keywords", "word"),
    [({"axis": "vertical"}, "axis"),
     ({"particles": ([0.0, 1e-3], [0.0, 1.0]), "kept": [1, 0]}, "kept"),
     ({"particles": ([0.0, 1e-3], [0.0]), "kept": None}, "particles")],
    ids=["unknown-axis", "kept-not-bool", "particles-lengths-differ"],
)
def test_phase_plane_bad_input_names_the_argument(trap: tw.Trap, keywords: dict[str, Any], word: str) -> None:
    with pytest.raises(tw.TiltwellError, match=word):
        figures.phase_plane(tw.longitudinal_acceptance(trap, 0.0), **keywords)


# --- trade-off, acceptance curve, time of flight, survival -----------------------------------


def stopping_row(deceleration: float, overlap: float, energy: float) -> dict[str, Any]:
    """A sweep row for stopping 400 m/s: length v^2 / (2 a) (DESIGN.md: 1.6e5 m/s^2 stops
    400 m/s in 0.5 m)."""
    return {"deceleration": deceleration, "length": 400.0**2 / (2.0 * deceleration),
            "captured_fraction_overlap": overlap, "captured_fraction_energy": energy,
            "captured_fraction_energy_error": 0.01, "captured_fraction_mc": None}


def test_tradeoff_draws_the_rows_in_order_with_length_on_a_twin_axis(no_pyplot_state: list[Figure]) -> None:
    rows = [stopping_row(1.6e5, 0.05, 0.04), stopping_row(4e4, 0.30, 0.28), stopping_row(8e4, 0.2, 0.18)]
    figure = figures.tradeoff_plot(rows, current=8e4)
    no_pyplot_state.append(figure)
    overlap = artist(figure, "captured_fraction_overlap")
    np.testing.assert_allclose(overlap.get_xdata(), [40.0, 80.0, 160.0])  # 10^3 m/s^2
    np.testing.assert_allclose(overlap.get_ydata(), [0.30, 0.2, 0.05])
    length = artist(figure, "length")
    np.testing.assert_allclose(length.get_ydata(), [2.0, 1.0, 0.5], rtol=1e-12)  # m, v^2/(2a)
    assert length.axes is not overlap.axes and length.axes.get_ylabel() == "device length [m]"
    assert artist(figure, "current-deceleration").get_xdata()[0] == pytest.approx(80.0)
    assert not has(figure, "captured_fraction_mc")  # all None: not drawn


def test_tradeoff_rejects_rows_without_deceleration() -> None:
    with pytest.raises(tw.TiltwellError, match="rows"):
        figures.tradeoff_plot([{"length": 1.0}])


def test_acceptance_curve_follows_the_tilted_v_closed_form(trap: tw.Trap, no_pyplot_state: list[Figure]) -> None:
    decelerations = np.linspace(0.0, 1.1 * CRITICAL, 9)  # misses a_c itself, where the well is flat
    curve = tw.acceptance_curve(trap, decelerations)
    figure = figures.acceptance_against_deceleration(curve, current=0.5 * CRITICAL)
    no_pyplot_state.append(figure)
    longitudinal = artist(figure, "acceptance-longitudinal")
    np.testing.assert_allclose(longitudinal.get_xdata(), decelerations * 1e-3)
    expected = [tilted_v_area(a) * 1e3 for a in decelerations]  # mm·m/s
    np.testing.assert_allclose(longitudinal.get_ydata(), expected, rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(artist(figure, "acceptance-transverse").get_ydata(), curve.transverse * 1e3)
    # closed form a_c = mu B' / m for the linear state in the ideal quadrupole
    assert artist(figure, "critical-deceleration").get_xdata()[0] == pytest.approx(CRITICAL * 1e-3, rel=1e-9)


def test_time_of_flight_histogram_is_numpys_and_ignores_inf(no_pyplot_state: list[Figure]) -> None:
    rng = np.random.default_rng(3)
    times = np.concatenate([rng.uniform(2e-3, 9e-3, 200), [np.inf] * 7])  # s
    figure = figures.time_of_flight(times, bins=12)
    no_pyplot_state.append(figure)
    stairs = artist(figure, "time-of-flight")
    counts, edges = np.histogram(times[:200] * 1e3, bins=12)  # numpy on the finite times, in ms
    np.testing.assert_array_equal(stairs.get_data().values, counts)
    np.testing.assert_allclose(stairs.get_data().edges, edges, rtol=1e-12)
    assert stairs.get_data().values.sum() == 200


def test_survival_line_is_the_tracking_result(no_pyplot_state: list[Figure]) -> None:
    times = np.linspace(0.0, 5e-3, 6)
    kept = np.array([True] * 3 + [False] * 7)
    result = tw.TrackingResult(times=times, survival=np.array([1.0, 0.8, 0.6, 0.5, 0.3, 0.3]),
                               final=np.zeros((10, 6)), kept=kept, lost_time=np.where(kept, np.inf, 1e-3),
                               method="verlet", time_step=1e-3)
    figure = figures.survival(result)
    no_pyplot_state.append(figure)
    line = artist(figure, "survival")
    np.testing.assert_allclose(line.get_xdata(), [0.0, 1.0, 2.0, 3.0, 4.0, 5.0])  # ms
    np.testing.assert_array_equal(line.get_ydata(), result.survival)
    assert "0.3 ± 0.14" in line.get_label()  # 3 of 10 kept; sqrt(0.3 * 0.7 / 10) = 0.145
    assert "verlet" not in figure.axes[0].get_title() and not has(figure, "outside-box")
    assert figures.export.details_of(figure) == "integrator: verlet, time step 0.001 s"


def test_survival_says_what_starts_outside_the_box(no_pyplot_state: list[Figure], tmp_path: Path) -> None:
    """A count of 0.52 at switch-on: 48 % of the sample started outside the box (said on the
    figure); the integrator goes into the PNG's metadata (read back by matplotlib's reader)."""
    kept = np.array([True] * 3 + [False] * 7)
    result = tw.TrackingResult(times=np.linspace(0.0, 1e-3, 3), survival=np.array([0.52, 0.4, 0.3]),
                               final=np.zeros((10, 6)), kept=kept, lost_time=np.where(kept, np.inf, 0.0),
                               method="yoshida4", time_step=5e-4)
    figure = figures.survival(result)
    no_pyplot_state.append(figure)
    assert "48 % of the sample starts outside\nthe trap box" in artist(figure, "outside-box").get_text()
    path = figures.save(figure, tmp_path / "survival.png", dpi=50)
    from PIL import Image

    assert Image.open(path).text["Comment"] == "integrator: yoshida4, time step 0.0005 s"


def test_drawing_into_a_given_axes_returns_its_figure(trap: tw.Trap, no_pyplot_state: list[Figure]) -> None:
    figure = Figure()
    no_pyplot_state.append(figure)
    left, right = figure.subplots(1, 2)
    assert figures.phase_plane(tw.longitudinal_acceptance(trap, 0.0), ax=right) is figure
    assert has(figure, "separatrix") and not any(a.get_gid() == "separatrix" for a in left.get_children())


def test_palette_lightness_steps_apart() -> None:
    """CIE 1976 L* from sRGB (IEC 61966-2-1 transfer curve, Rec. 709 luminance weights;
    from memory): kept (blue) and lost (amber) differ by >= 25, any two colours by >= 3
    (thresholds: common practice, no source)."""
    def lightness(colour: str) -> float:
        c = np.array([int(colour[i : i + 2], 16) / 255.0 for i in (1, 3, 5)])
        linear = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
        y = float(linear @ [0.2126, 0.7152, 0.0722])
        return 116.0 * y ** (1 / 3) - 16.0 if y > (6 / 29) ** 3 else y * (29 / 3) ** 3

    values = sorted(lightness(c) for c in figures.PALETTE.values())
    assert min(np.diff(values)) >= 3.0
    assert lightness(figures.PALETTE["amber"]) - lightness(figures.PALETTE["blue"]) >= 25.0


# --- export -------------------------------------------------------------------------------


@pytest.fixture
def small(trap: tw.Trap, no_pyplot_state: list[Figure]) -> Figure:
    figure = figures.potential(trap, 0.3 * CRITICAL)
    no_pyplot_state.append(figure)
    return figure


def test_png_has_width_times_dpi_pixels(small: Figure, tmp_path: Path) -> None:
    """PNG layout (ISO/IEC 15948): 8-byte signature, then the IHDR chunk whose data starts
    with width and height as big-endian 32-bit integers at bytes 16..24."""
    path = figures.save(small, tmp_path / "f.png", width=3.5, height=2.5, dpi=100)
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"
    assert struct.unpack(">II", data[16:24]) == (350, 250)
    np.testing.assert_allclose(small.get_size_inches(), [6.0, 4.0])  # the figure keeps its size


@pytest.mark.slow
def test_pdf_starts_with_its_magic(small: Figure, tmp_path: Path) -> None:
    data = figures.save(small, tmp_path / "f.pdf", width=3.5, height=2.5).read_bytes()
    assert data.startswith(b"%PDF") and len(data) > 1000


def test_svg_parses_with_the_width_in_points(small: Figure, tmp_path: Path) -> None:
    root = ET.parse(figures.save(small, tmp_path / "f.svg", width=3.5, height=2.5)).getroot()
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert (root.get("width"), root.get("height")) == ("252pt", "180pt")  # 72 pt per inch


@pytest.mark.slow
@pytest.mark.parametrize("suffix", [".pdf", ".svg", ".png"], ids=["pdf", "svg", "png"])
def test_save_is_reproducible_atomic_and_readable(small: Figure, tmp_path: Path, suffix: str) -> None:
    first = figures.save(small, tmp_path / f"f{suffix}", dpi=50).read_bytes()
    second = figures.save(small, tmp_path / f"f{suffix}", dpi=50).read_bytes()
    assert first == second  # no dates or random ids in the file
    assert os.listdir(tmp_path) == [f"f{suffix}"]  # no temporary file left behind
    assert (tmp_path / f"f{suffix}").stat().st_mode & 0o777 == 0o644


@pytest.mark.parametrize(("name", "word"), [("f.gif", "path"), ("missing/f.png", "path")],
                         ids=["bad-suffix", "missing-folder"])
def test_save_errors_name_the_path(small: Figure, tmp_path: Path, name: str, word: str) -> None:
    with pytest.raises(tw.TiltwellError, match=word) as error:
        figures.save(small, tmp_path / name)
    assert name.split("/")[-1] in str(error.value)


def test_save_rejects_a_negative_width(small: Figure, tmp_path: Path) -> None:
    with pytest.raises(tw.TiltwellError, match="width"):
        figures.save(small, tmp_path / "f.png", width=-1.0)


# --- whole scenario, and the command line ---------------------------------------------------

NAMES = ["potential", "phase-longitudinal", "phase-transverse", "acceptance", "tradeoff", "coil-currents",
         "coil-phases", "survival"]


def demo_scenario(**simulation: Any) -> scenario.Scenario:
    """The shipped demo with a coarse 6-D tolerance (rtol 0.3): these tests check which
    files are written, and the seven 6-D acceptances of a scenario's figures (one for the
    estimates, six for the trade-off sweep) dominate their run time at the demo's 1e-2."""
    return scenario.load(DEMO_SCENARIO).replace("simulation", rtol=0.3, **simulation).replace("coils", phases=3)


@pytest.mark.slow
def test_scenario_figures_writes_every_figure(tmp_path: Path) -> None:
    demo = demo_scenario(detector_distance=0.1)
    written = write_scenario_figures(demo, tmp_path / "out", formats=("svg", "png"), width=3.0, height=2.0,
                                     dpi=100, particles=2000)
    expected = [tmp_path / "out" / f"{name}.{kind}" for name in [*NAMES, "time-of-flight", "yield-budget"] for kind in ("svg", "png")]
    assert written == expected
    assert all(path.stat().st_size > 0 for path in written)
    assert struct.unpack(">II", (tmp_path / "out" / "survival.png").read_bytes()[16:24]) == (300, 200)


@pytest.mark.slow
def test_cli_figures_writes_the_files(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = scenario.save(demo_scenario(particles=300), tmp_path / "s.toml")
    status = main(["figures", str(path), "--out", str(tmp_path / "figs"), "--formats", "png",
                   "--width", "3", "--height", "2", "--dpi", "40"])
    assert status == 0
    names = [*NAMES, "yield-budget"]  # the demo gives a pressure: absolute numbers
    assert sorted(os.listdir(tmp_path / "figs")) == sorted(f"{name}.png" for name in names)
    assert struct.unpack(">II", (tmp_path / "figs" / "tradeoff.png").read_bytes()[16:24]) == (120, 80)
    printed = capsys.readouterr().out
    assert printed.count("wrote ") == len(names)
    assert tw.ELECTRICAL_CAUTION in printed  # the demo has a coil row: its current figure sizes hardware


@pytest.mark.parametrize(("option", "word"), [(["--formats", "gif"], "formats"), (["--width", "-1"], "width")],
                         ids=["unknown-format", "negative-width"])
def test_cli_figures_errors_are_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str], option: list[str],
                                         word: str) -> None:
    status = main(["figures", str(DEMO_SCENARIO), "--out", str(tmp_path / "figs"), *option])
    error = capsys.readouterr().err
    assert status == 2 and word in error and len(error.strip().splitlines()) == 1
    assert not (tmp_path / "figs").exists()  # checked before anything is computed or created
