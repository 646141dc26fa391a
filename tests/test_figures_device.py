"""Figures of the coil-array device (tiltwell.figures: current_pulses, phase_scan,
device_survival, device_phase_space, device_arrivals).

The views draw the library's data in display units; each is checked against something
outside the view: Jackson's on-axis loop field for the drawn currents, scipy's Boltzmann
constant for the depth in mK, numpy's histogram of hand-computed free-flight times, and
the file formats' own headers. Geometry and data are invented.
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")  # before anything can pick a display backend

import dataclasses
import struct
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from matplotlib.figure import Figure
from scipy.constants import k as boltzmann
from scipy.constants import mu_0

import tiltwell as tw
from tiltwell import figures
from tiltwell.dynamics.compare import DeviceComparison
from tiltwell.coils.moving import PhaseScan

ROW = tw.CoilArray(count=16, pitch=0.005, radius=0.008, first=-0.01, turns=50)  # thin coils
GRADIENT = 2.0  # T/m
SCHEDULE = tw.constant_deceleration(3.0, 1.0, deceleration=400.0)  # 5 ms over 10 mm


@pytest.fixture(autouse=True)
def made() -> Iterator[list[Figure]]:
    """Figures made here are cleared afterwards; none may land in pyplot's global list."""
    drawn: list[Figure] = []
    yield drawn
    if "matplotlib.pyplot" in sys.modules:
        import matplotlib.pyplot as plt

        leaked = plt.get_fignums()
        plt.close("all")
        assert leaked == []
    for figure in drawn:
        figure.clear()


def artist(figure: Figure, gid: str) -> Any:
    """The one artist with this gid, on any axes of the figure."""
    found = [a for ax in figure.axes for a in ax.get_children() if a.get_gid() == gid]
    assert len(found) == 1, f"{len(found)} artists with gid {gid!r}"
    return found[0]


def _result(kept: np.ndarray, final: np.ndarray, survival: np.ndarray, times: np.ndarray) -> tw.TrackingResult:
    lost = np.where(kept, np.inf, times[1])
    return tw.TrackingResult(times, survival, final, kept, lost, "by hand", float(times[1] - times[0]))


@pytest.fixture
def comparison() -> DeviceComparison:
    """Hand-built runs of 200 particles over the schedule's 5 ms (no tracking)."""
    rng = np.random.default_rng(5)
    times = np.linspace(0.0, SCHEDULE.duration, 11)
    final = np.zeros((200, 6))
    final[:, 2] = rng.uniform(-3e-3, 3e-3, 200)
    final[:, 5] = rng.normal(0.0, 0.3, 200)
    rigid = _result(rng.random(200) < 0.6, final, np.linspace(1.0, 0.6, 11), times)
    other = final.copy()
    other[:, 5] += 0.05
    device = _result(rng.random(200) < 0.55, other, np.linspace(1.0, 0.55, 11), times)
    return DeviceComparison(rigid, device, SCHEDULE)


# ---- current pulses ---------------------------------------------------------------------------


def _on_axis(z: float, plane: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """B_z and dB_z/dz per ampere-turn of thin loops of radius a at z (Jackson, Classical
    Electrodynamics, 3rd ed., sect. 5.5, from memory): mu0 a^2 / (2 (a^2 + d^2)^(3/2))."""
    a2, d = ROW.radius**2, z - plane
    field = mu_0 * a2 / (2.0 * (a2 + d * d) ** 1.5)
    return field, -3.0 * d * field / (a2 + d * d)


def test_drawn_currents_put_the_zero_on_the_trap(made: list[Figure]) -> None:
    # Reference: with every coil that ever carries current drawn, the drawn currents must
    # give B_z = 0 and dB_z/dz = 2 T/m at the trap centre z_trap(t) = v0 t - a t^2 / 2 by
    # Jackson's on-axis loop formula. Measured: |B_z| <= 2.6e-16 T (fields ~1e-2 T), gradient to 5.6e-16.
    times = np.linspace(0.0, SCHEDULE.duration, 41)
    plan = tw.waveforms(ROW, SCHEDULE, GRADIENT, times)
    used = [int(k) for k in np.flatnonzero(np.any(plan.currents != 0.0, axis=0))]
    figure = figures.current_pulses(plan, times, coils=used)
    made.append(figure)
    lines = {k: artist(figure, f"coil-{k}") for k in used}
    np.testing.assert_allclose(lines[used[0]].get_xdata(), times * 1e3, rtol=1e-12)  # ms
    for j, t in enumerate(times):
        z_trap = 3.0 * t - 200.0 * t * t
        field, slope = _on_axis(z_trap, ROW.positions[used])
        amps = np.array([lines[k].get_ydata()[j] for k in used]) * ROW.turns
        assert abs(amps @ field) < 1e-13
        assert amps @ slope == pytest.approx(GRADIENT, rel=1e-12)


def test_default_window_is_six_coils_around_the_middle_with_the_caution(made: list[Figure]) -> None:
    times = np.linspace(0.0, SCHEDULE.duration, 41)
    plan = tw.waveforms(ROW, SCHEDULE, GRADIENT, times)
    used = np.flatnonzero(np.any(plan.currents != 0.0, axis=0))  # coils 1..6 here: 6 of them (6 at ~5e-30 A)
    figure = figures.current_pulses(plan, times)
    made.append(figure)
    drawn = sorted(int(a.get_gid()[5:]) for a in figure.axes[0].get_lines() if str(a.get_gid()).startswith("coil-"))
    start = used.size // 2 - 3
    assert drawn == [int(k) for k in used[start:start + 6]]
    caution = artist(figure, "electrical-caution")
    assert caution.get_text() == tw.ELECTRICAL_CAUTION and caution.get_wrap()  # wrapped to the figure when drawn
    assert not caution.get_visible()  # carried for the file's metadata, drawn only when asked
    assert "of the" not in figure.axes[0].get_title(loc="left")  # the whole run shown: no window named
    drawn_figure = figures.current_pulses(plan, times, draw_caution=True)
    made.append(drawn_figure)
    assert artist(drawn_figure, "electrical-caution").get_visible()


@pytest.mark.parametrize("suffix", ["pdf", "svg", "png"])
def test_the_caution_goes_into_the_files_metadata(made: list[Figure], tmp_path: Path, suffix: str) -> None:
    """Read back with general-purpose readers: PDF document info and SVG Dublin Core as
    text, the PNG text chunk with Pillow (matplotlib's own image dependency)."""
    times = np.linspace(0.0, SCHEDULE.duration, 41)
    pulses = figures.current_pulses(tw.waveforms(ROW, SCHEDULE, GRADIENT, times), times)
    other = figures.phase_scan(tw.moving_trap_phases(ROW, GRADIENT, tw.species("OH"), box_half_widths=(0.003,) * 3,
                                                     phases=3, samples=201))
    made += [pulses, other]
    paths = [figures.save(figure, tmp_path / f"{name}.{suffix}", width=4.0, height=3.0, dpi=50)
             for name, figure in (("pulses", pulses), ("other", other))]

    def note(path: Path) -> str:
        if suffix == "png":
            from PIL import Image

            with Image.open(path) as image:
                return str(image.text.get("Description", ""))
        return path.read_bytes().decode("latin-1")

    assert tw.ELECTRICAL_CAUTION[:40] in note(paths[0])
    assert tw.ELECTRICAL_CAUTION[:40] not in note(paths[1])


# ---- phase scan -------------------------------------------------------------------------------


def test_phase_scan_draws_depth_in_millikelvin_and_marks_the_worst_phase(made: list[Figure]) -> None:
    # Reference: E / k_B with scipy's Boltzmann constant for the depth; numpy's argmin and
    # mean for the worst phase and the averages; the phases are k pitch / 8.
    depth_mk = np.array([9.5, 7.8, 6.1, 5.0, 4.5, 4.3, 4.5, 5.0])
    longitudinal = np.array([46.0, 37.0, 29.0, 23.0, 20.0, 18.5, 19.0, 23.0]) * 1e-3  # m·m/s
    transverse = np.array([18.0, 19.0, 20.5, 21.0, 21.5, 21.6, 21.4, 21.0]) * 1e-3
    values: dict[str, Any] = {field.name: np.full(8, np.nan) for field in dataclasses.fields(PhaseScan)}  # not drawn
    values.update(phases=0.005 * np.arange(8) / 8, positions=0.1 + 0.005 * np.arange(8) / 8,
                  depth=depth_mk * 1e-3 * boltzmann, longitudinal=longitudinal, transverse=transverse,
                  bound=np.ones(8, bool))
    scan = PhaseScan(**values)
    figure = figures.phase_scan(scan)
    made.append(figure)
    depth = artist(figure, "depth")
    np.testing.assert_allclose(depth.get_xdata(), np.arange(8) / 8)
    np.testing.assert_allclose(depth.get_ydata(), depth_mk, rtol=1e-12)
    np.testing.assert_allclose(artist(figure, "acceptance-longitudinal").get_ydata(), longitudinal * 1e3, rtol=1e-12)
    np.testing.assert_allclose(artist(figure, "acceptance-transverse").get_ydata(), transverse * 1e3, rtol=1e-12)
    assert artist(figure, "worst-phase").get_xdata()[0] == pytest.approx(np.argmin(longitudinal) / 8)
    assert artist(figure, "mean-depth").get_ydata()[0] == pytest.approx(np.mean(depth_mk), rel=1e-12)
    assert artist(figure, "mean-longitudinal").get_ydata()[0] == pytest.approx(np.mean(longitudinal) * 1e3)
    assert artist(figure, "mean-transverse").get_ydata()[0] == pytest.approx(np.mean(transverse) * 1e3)
    ripple = (9.5 - 4.3) / np.mean(depth_mk)  # peak-to-peak over mean
    assert f"{ripple:.3g}" in figure.axes[0].get_title(loc="left")


# ---- the device against its rigid twin ----------------------------------------------------------


def test_survival_lines_and_the_ripple_loss_in_the_title(comparison: DeviceComparison, made: list[Figure]) -> None:
    figure = figures.device_survival(comparison)
    made.append(figure)
    for name, result in (("rigid", comparison.rigid), ("device", comparison.device)):
        line = artist(figure, f"survival-{name}")
        np.testing.assert_allclose(line.get_xdata(), np.linspace(0.0, 5.0, 11), rtol=1e-12)  # ms
        np.testing.assert_array_equal(line.get_ydata(), result.survival)
        assert f"kept {result.fraction:.3g}" in line.get_label()
    # paired error by hand from the discordant counts: sqrt(n01 + n10 - (n01 - n10)^2 / n) / n
    n01 = int(np.sum(comparison.rigid.kept & ~comparison.device.kept))
    n10 = int(np.sum(comparison.device.kept & ~comparison.rigid.kept))
    error = np.sqrt(n01 + n10 - (n01 - n10) ** 2 / 200) / 200
    loss = (comparison.rigid.kept.sum() - comparison.device.kept.sum()) / 200
    assert f"ripple loss {loss:.3g} ± {error:.2g}" in figure.axes[0].get_title(loc="left")


def test_phase_space_draws_the_kept_particles_of_both_runs(comparison: DeviceComparison,
                                                          made: list[Figure]) -> None:
    figure = figures.device_phase_space(comparison)
    made.append(figure)
    for name, result in (("rigid", comparison.rigid), ("device", comparison.device)):
        offsets = artist(figure, f"phase-space-{name}").get_offsets()
        expected = np.column_stack((result.final[result.kept, 2] * 1e3, result.final[result.kept, 5]))
        np.testing.assert_allclose(offsets, expected, rtol=1e-12)


def test_arrival_histograms_are_numpys_of_the_free_flight_times(comparison: DeviceComparison,
                                                               made: list[Figure]) -> None:
    # Reference: t = T + (d - z) / (v_z + v_f) by hand (T = 5 ms, v_f = 1 m/s, d = 0.1 m),
    # binned by numpy over shared edges; particles slower than ~0.1 m/s in the lab fall
    # beyond the default range (median + 5 IQR) and are counted as off scale.
    edges = np.linspace(0.02, 0.4, 31)  # s
    figure = figures.device_arrivals(comparison, 0.1, bins=edges)
    made.append(figure)
    for name, result in (("rigid", comparison.rigid), ("device", comparison.device)):
        kept = result.final[result.kept]
        lab = kept[:, 5] + 1.0
        times = np.where(lab > 0, 5e-3 + (0.1 - kept[:, 2]) / np.where(lab > 0, lab, 1.0), np.inf)
        counts, _ = np.histogram(times[np.isfinite(times)], bins=edges)
        stairs = artist(figure, f"time-of-flight-{name}")
        np.testing.assert_array_equal(stairs.get_data().values, counts)
        np.testing.assert_allclose(stairs.get_data().edges, edges * 1e3, rtol=1e-12)
    default = figures.device_arrivals(comparison, 0.1)
    made.append(default)
    both = np.concatenate([c for c in comparison.arrival_times(0.1)])
    finite = both[np.isfinite(both)]
    q1, median, q3 = np.quantile(finite, [0.25, 0.5, 0.75])
    shown = artist(default, "time-of-flight-rigid").get_data().edges
    assert shown[0] == pytest.approx(finite.min() * 1e3) and shown[-1] == pytest.approx(min(finite.max(), median + 5 * (q3 - q1)) * 1e3)
    assert len(shown) == 51


# ---- export, axes and bad input -------------------------------------------------------------


@pytest.mark.slow
@pytest.mark.parametrize("suffix", [".pdf", ".svg", ".png"], ids=["pdf", "svg", "png"])
def test_device_figures_export(comparison: DeviceComparison, made: list[Figure], tmp_path: Path, suffix: str) -> None:
    # File headers: "%PDF" (ISO 32000), an <svg> root (W3C SVG), the PNG signature and
    # IHDR size (ISO/IEC 15948: width, height as big-endian 32-bit integers at bytes 16..24).
    times = np.linspace(0.0, SCHEDULE.duration, 21)
    drawn = [figures.current_pulses(tw.waveforms(ROW, SCHEDULE, GRADIENT, times), times),
             figures.device_survival(comparison), figures.device_phase_space(comparison),
             figures.device_arrivals(comparison, 0.1)]
    made.extend(drawn)
    for n, figure in enumerate(drawn):
        data = figures.save(figure, tmp_path / f"f{n}{suffix}", width=4.0, height=3.0, dpi=50).read_bytes()
        if suffix == ".pdf":
            assert data.startswith(b"%PDF")
        elif suffix == ".svg":
            assert b"<svg" in data[:2000]
        else:
            assert data[:8] == b"\x89PNG\r\n\x1a\n" and struct.unpack(">II", data[16:24]) == (200, 150)


def test_drawing_into_a_given_axes_returns_its_figure(comparison: DeviceComparison, made: list[Figure]) -> None:
    figure = Figure()
    made.append(figure)
    left, right = figure.subplots(1, 2)
    assert figures.device_survival(comparison, ax=left) is figure
    assert figures.device_phase_space(comparison, ax=right) is figure
    assert artist(figure, "survival-device") in left.get_children()


@pytest.mark.parametrize(
    ("call", "name"),
    [
        (lambda c: figures.device_survival("run"), "comparison"),
        (lambda c: figures.device_arrivals(c, -0.1), "distance"),
        (lambda c: figures.device_arrivals(c, 0.1, bins=0), "bins"),
        (lambda c: figures.phase_scan(c), "scan"),
        (lambda c: figures.current_pulses(c, [0.0]), "plan"),
        (lambda c: figures.current_pulses(tw.waveforms(ROW, SCHEDULE, GRADIENT, [0.0, 1e-3]), [0.0]), "times"),
        (lambda c: figures.current_pulses(tw.waveforms(ROW, SCHEDULE, GRADIENT, [0.0, 1e-3]), [0.0, 1e-3],
                                          coils=[99]), "coils"),
    ],
    ids=["survival-type", "distance", "bins", "scan-type", "plan-type", "times-shape", "coil-index"],
)
def test_bad_input_names_the_argument(comparison: DeviceComparison, call, name: str) -> None:  # type: ignore[no-untyped-def]
    with pytest.raises(tw.TiltwellError, match=name):
        call(comparison)


def test_a_stretch_of_the_run_is_named_in_the_title(made: list[Figure]) -> None:
    """The first fifth of the schedule's duration drawn: the title says which part of the run."""
    times = np.linspace(0.0, 0.2 * SCHEDULE.duration, 11)
    figure = figures.current_pulses(tw.waveforms(ROW, SCHEDULE, GRADIENT, times), times, run_duration=SCHEDULE.duration)
    made.append(figure)
    expected = f"the first {0.2 * SCHEDULE.duration * 1e3:.3g} ms of the {SCHEDULE.duration * 1e3:.3g} ms run"
    assert figure.axes[0].get_title(loc="left").endswith(expected)
