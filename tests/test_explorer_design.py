"""The explorer's design-space part (tiltwell.explorer.design): a search's results file drawn
as the search library reads it, its front as the brute-force dominance check of
tests/test_optimise.py finds it, and a chosen design put into the sliders."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest

from test_optimise import brute_front
from test_search import ideal
from tiltwell import TiltwellError
from tiltwell.explorer import Explorer
from tiltwell.explorer.design import TITLE
from tiltwell.workflows import search as se

VARIES = ("deceleration.deceleration=1e4:4e4:4", "trap.gradient=80,120")


@pytest.fixture(scope="module")
def shared() -> Iterator[Explorer]:
    app = Explorer(ideal(), auto_tradeoff=False)
    yield app
    app.close()


@pytest.fixture
def app(shared: Explorer) -> Explorer:
    shared.reset()
    shared.wait()
    return shared


@pytest.fixture(scope="module")
def results(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, se.SearchResult]:
    folder = tmp_path_factory.mktemp("search")
    result = se.search(ideal(), [se.parse_vary(text) for text in VARIES], max_length=4.0,
                       store=folder / "points.jsonl")
    return folder, result


def test_the_part_is_a_closed_section_at_the_foot(app: Explorer) -> None:
    children = list(app.widget.children)
    assert children.index(app.design.section) == len(children) - 1
    assert app.design.section.titles == (TITLE,) and app.design.section.selected_index is None
    assert app.design.actions["use"].disabled and app.design.choice.disabled


def test_a_loaded_search_is_drawn_with_its_front(app: Explorer, results: tuple[Path, se.SearchResult]) -> None:
    folder, result = results
    assert app.design.load(folder) is not None  # a folder means its points.jsonl
    gain, cost = result.values("captured_fraction_energy"), result.values("length")
    feasible = result.values("feasible") == 1.0
    drawn = app.design.sources
    np.testing.assert_array_equal(drawn["within"].data["index"], np.flatnonzero(feasible))
    np.testing.assert_array_equal(drawn["beyond"].data["index"], np.flatnonzero(~feasible))
    front = np.asarray(drawn["front"].data["index"])
    assert sorted(front.tolist()) == np.flatnonzero(brute_front(np.where(feasible, gain, np.nan), cost)).tolist()
    np.testing.assert_array_equal(drawn["front"].data["gain"], gain[front])
    assert [value for _, value in app.design.choice.options] == front.tolist()
    assert app.design.cost.disabled  # no coil row: no voltages to draw against
    assert "8 of 8 points computed" in app.design.status.value


def test_a_front_design_goes_into_the_sliders(app: Explorer, results: tuple[Path, se.SearchResult]) -> None:
    folder, result = results
    app.design.load(folder / "points.jsonl")
    index = app.design.choice.options[-1][1]
    app.design.choice.value = index
    assert list(app.design.sources["chosen"].data["index"]) == [index]
    point = app.design.use()
    row = result.rows[index]
    assert row is not None
    assert app.controls["gradient"].value == pytest.approx(point["trap.gradient"], rel=1e-9)
    assert app.controls["deceleration"].value == pytest.approx(row["deceleration"], rel=1e-3)
    assert app.scenario().trap.gradient == pytest.approx(point["trap.gradient"], rel=1e-9)
    assert "design in the sliders" in app.design.status.value and not app.errors


def test_a_varied_key_without_a_slider_is_named(app: Explorer, tmp_path: Path) -> None:
    store = tmp_path / "points.jsonl"
    se.search(ideal(), [se.parse_vary("beam.temperature=250,300")], store=store)
    app.design.load(store)
    app.design.use(app.design.choice.options[0][1])
    assert "not sliders, set them in the scenario file: beam.temperature = " in app.design.status.value


def test_bad_results_files_keep_the_shown_search(app: Explorer, results: tuple[Path, se.SearchResult],
                                                 tmp_path: Path) -> None:
    folder, _ = results
    app.design.load(folder)
    shown = app.design.result
    bad = tmp_path / "bad.jsonl"
    bad.write_text("time [s],signal\n0.0,1\n")
    for path, words in ((bad, "not a tiltwell search results file"), (tmp_path / "none.jsonl", "cannot read"),
                        (tmp_path, "cannot read")):
        assert app.design.load(path) is None
        assert words in app.design.message.value and app.design.result is shown
    app.design.results_path.value = "  "
    app.design.actions["load"].click()
    assert "give the results file" in app.design.message.value and not app.errors
    with pytest.raises(TiltwellError, match="no computed design"):
        app.design.use(99)
