"""The yield-budget waterfall (tiltwell.figures.yield_waterfall), read back from the drawn
artists: each bar spans the axis floor to its stage's number, each drop band the two
neighbouring numbers, the interval bar the given ends; the kept fraction printed on each
drop is the ratio of the two numbers (hand arithmetic). The numbers are invented."""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")  # before anything can pick a display backend

import pytest
from matplotlib.collections import LineCollection
from matplotlib.patches import Rectangle

from tiltwell import TiltwellError, figures

STEPS = [{"label": "per pulse", "number": 1.0e13}, {"label": "in trappable states", "number": 5.0e12},
         {"label": "reaching the trap", "number": 1.2e9}, {"label": "captured", "number": 6.0e7}]


def _bars(figure: matplotlib.figure.Figure, prefix: str) -> dict[str, Rectangle]:
    return {p.get_gid(): p for p in figure.axes[0].patches if isinstance(p, Rectangle) and
            str(p.get_gid()).startswith(prefix)}


def test_bars_reach_each_stage_and_drops_span_neighbours() -> None:
    figure = figures.yield_waterfall(STEPS, interval=(3.0e7, 9.0e7))
    ax = figure.axes[0]
    assert ax.get_yscale() == "log"
    stages = _bars(figure, "stage-")
    assert sorted(stages) == [f"stage-{k}" for k in range(4)]
    for k, step in enumerate(STEPS):
        bar = stages[f"stage-{k}"]
        assert bar.get_y() + bar.get_height() == pytest.approx(step["number"], rel=1e-12)
        assert bar.get_y() == pytest.approx(ax.get_ylim()[0], rel=1e-12)
    drops = _bars(figure, "drop-")
    for k in range(3):
        band = drops[f"drop-{k}"]
        assert band.get_y() == pytest.approx(STEPS[k + 1]["number"], rel=1e-12)
        assert band.get_y() + band.get_height() == pytest.approx(STEPS[k]["number"], rel=1e-12)
    texts = [t.get_text() for t in ax.texts]
    assert "× 0.5" in texts and "× 0.05" in texts  # 5e12 / 1e13 and 6e7 / 1.2e9
    assert [t.get_text() for t in ax.get_xticklabels()] == [s["label"] for s in STEPS]


def test_interval_bar_has_the_given_ends() -> None:
    figure = figures.yield_waterfall(STEPS, interval=(3.0e7, 9.0e7))
    lines = [c for c in figure.axes[0].collections if isinstance(c, LineCollection) and c.get_gid() == "interval"]
    assert len(lines) == 1
    (segment,) = lines[0].get_segments()
    assert sorted(segment[:, 1]) == pytest.approx([3.0e7, 9.0e7], rel=1e-12)


@pytest.mark.parametrize("steps, interval, word", [
    ([], None, "non-empty"),
    ([{"label": "a", "number": 0.0}], None, "> 0"),
    ([{"number": 1.0}], None, "label"),
    (STEPS, (7.0e7, 9.0e7), "bracket"),
])
def test_bad_input_names_what_is_wrong(steps: list[dict[str, float]], interval: tuple[float, float] | None,
                                       word: str) -> None:
    with pytest.raises(TiltwellError, match=word):
        figures.yield_waterfall(steps, interval=interval)
