"""Scenario files: validation messages, round trip, atomic save."""

from __future__ import annotations

import os
from pathlib import Path

import pytest

from tiltwell import TiltwellError
from tiltwell import scenario as sc

DEMO = Path(sc.__file__).with_name("data") / "demo.toml"


def _demo_text() -> str:
    return DEMO.read_text(encoding="utf-8")


def test_demo_loads_and_round_trips(tmp_path: Path) -> None:
    scenario = sc.load(DEMO)
    assert scenario.species.name == "OH"
    assert scenario.beam.apertures == ((0.2, 3.0e-3),)
    path = sc.save(scenario, tmp_path / "copy.toml")
    assert sc.load(path) == scenario
    assert sc.loads(sc.dumps(scenario)) == scenario


@pytest.mark.parametrize(
    ("old", "new", "words"),
    [
        ("gradient = 250.0", "gradeint = 250.0", ["unknown key", "[trap] gradeint", "gradient"]),
        ("gradient = 250.0", "gradient = -1.0", ["[trap] gradient", "T/m", "(0, 100000]", "-1.0"]),
        ("temperature = 300.0", "temperature = \"hot\"", ["[beam] temperature", "[K]", "hot"]),
        ("[simulation]", "[simulations]", ["unknown section", "did you mean '[simulation]'"]),
        ("particles = 100000", "particles = 1.5", ["[simulation] particles", "integer"]),
        ("kind = \"quadrupole\"", "kind = \"quadropole\"", ["[trap] kind", "quadrupole"]),
        ("length = 1.5", "length = 1.5\ndeceleration = 1e4", ["exactly one of deceleration and length"]),
        ("speed_ratio = 20.0", "", ["exactly one of speed_ratio and relative_spread"]),
        ("max_field = 0.8", "", ["[trap] max_field is required"]),
        ("gradient = 250.0", "gradient = 250.0\nradius = 0.01", ["radius does not apply"]),
        ("apertures = [[0.2, 3.0e-3]]", "apertures = [0.2, 3.0e-3]", ["[beam] apertures", "pairs"]),
        ("name = \"OH\"", "name = \"OH\"\nmass = 2.8e-26", ["both mass", "moment"]),
        ("pitch = 0.012", "", ["both pitch", "peak_current"]),
    ],
    ids=["misspelt-key", "out-of-range", "wrong-type", "misspelt-section", "float-count", "bad-choice",
         "both-given", "neither-given", "missing", "foreign-key", "apertures-shape", "half-custom", "half-timing"],
)
def test_errors_name_section_key_unit_and_range(old: str, new: str, words: list[str]) -> None:
    text = _demo_text()
    assert old in text
    with pytest.raises(TiltwellError) as caught:
        sc.loads(text.replace(old, new, 1))
    for word in words:
        assert word in str(caught.value)


def test_invalid_toml_and_missing_file(tmp_path: Path) -> None:
    with pytest.raises(TiltwellError, match="not valid TOML"):
        sc.loads("[species\nname = 1")
    with pytest.raises(TiltwellError, match="cannot read"):
        sc.load(tmp_path / "absent.toml")
    with pytest.raises(TiltwellError, match="missing section \\[trap\\]"):
        sc.loads("[species]\nname = \"OH\"\n")


def test_a_failed_save_keeps_the_old_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """A crash between writing and renaming must leave the saved file whole and no debris."""
    path = sc.save(sc.load(DEMO), tmp_path / "plan.toml")
    before = path.read_bytes()

    def broken(*args: object) -> None:
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken)
    changed = sc.load(DEMO).replace("deceleration", length=0.5)
    with pytest.raises(OSError):
        sc.save(changed, path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan.toml"]


def test_replace_validates_like_loading() -> None:
    scenario = sc.load(DEMO)
    changed = scenario.replace("deceleration", length=None, deceleration=5e4)
    assert changed.deceleration.deceleration == 5e4 and changed.deceleration.length is None
    with pytest.raises(TiltwellError, match="deceleration"):
        scenario.replace("deceleration", length=None, deceleration=-5.0)
    with pytest.raises(TiltwellError, match="unknown section"):
        scenario.replace("decel", length=1.0)


def test_describe_lists_every_key_with_its_unit() -> None:
    text = sc.describe()
    for line in ("[beam]", "temperature [K]", "gradient [T/m]", "final_velocity [m/s]", "particles"):
        assert line in text
