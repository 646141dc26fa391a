"""Scenario files: validation messages, round trip, atomic save."""

from __future__ import annotations

import dataclasses
import os
import re
from pathlib import Path

import numpy as np
import pytest

from tiltwell import TiltwellError
from tiltwell import scenario as sc
from tiltwell.workflows.keys import spec_of

DEMO = Path(sc.__file__).with_name("data") / "demo.toml"


def _demo_text() -> str:
    return DEMO.read_text(encoding="utf-8")


def _plain_demo_text() -> str:
    """The demo without its uncertain absolute-number keys (pressure, seed fraction,
    rotational temperature), for tests that add their own."""
    keep = [line for line in _demo_text().splitlines()
            if not line.startswith(("pressure =", "seed_fraction =", "rotational_temperature ="))]
    return "\n".join(keep) + "\n"


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
        ("gradient = 100.0", "gradeint = 100.0", ["unknown key", "[trap] gradeint", "gradient"]),
        ("gradient = 100.0", "gradient = -1.0", ["[trap] gradient", "T/m", "(0, 100000]", "-1.0"]),
        ("temperature = 300.0", "temperature = \"hot\"", ["[beam] temperature", "[K]", "hot"]),
        ("\n[simulation]\n", "\n[simulations]\n", ["unknown section", "did you mean '[simulation]'"]),
        ("particles = 100000", "particles = 1.5", ["[simulation] particles", "integer"]),
        ("kind = \"quadrupole\"", "kind = \"quadropole\"", ["[trap] kind", "quadrupole"]),
        ("length = 3.0", "length = 3.0\ndeceleration = 1e4", ["exactly one of deceleration and length"]),
        ("speed_ratio = 20.0", "", ["exactly one of speed_ratio and relative_spread"]),
        ("max_field = 0.32", "", ["[trap] max_field is required"]),
        ("gradient = 100.0", "gradient = 100.0\nradius = 0.01", ["radius does not apply"]),
        ("apertures = [[0.2, 3.0e-3]]", "apertures = [0.2, 3.0e-3]", ["[beam] apertures", "pairs"]),
        ("name = \"OH\"", "name = \"OH\"\nmass = 2.8e-26", ["both mass", "moment"]),
        ("pitch = 0.008", "", ["both pitch", "peak_current"]),
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


# ---- the optional [coils] section ----------------------------------------------------------


def _with_coils(**changes: object) -> dict[str, dict[str, object]]:
    data = sc.load(DEMO).to_dict()
    for key, value in changes.items():
        if value is None:
            del data["coils"][key]
        else:
            data["coils"][key] = value
    return data


@pytest.mark.parametrize(
    ("changes", "words"),
    [
        ({"radius": -0.019}, ["[coils] radius", "[m]", "(0, 1]", "-0.019"]),
        ({"turns": 0}, ["[coils] turns", "[1, 100000]", "0"]),
        ({"turns": 2.5}, ["[coils] turns", "integer", "2.5"]),
        ({"width": 0.0}, ["[coils] width", "[m]", "(0, 1]"]),
        ({"height": 2.0}, ["[coils] height", "[m]", "(0, 1]", "2.0"]),
        ({"fill_factor": 1.5}, ["[coils] fill_factor", "(0, 1]", "1.5"]),
        ({"max_current": -400.0}, ["[coils] max_current", "[A]", "(0, 1e+06]"]),
        ({"active": 3}, ["[coils] active", "even", "3"]),
        ({"active": 0}, ["[coils] active", "[2, 64]"]),
        ({"gradient": 0.0}, ["[coils] gradient", "[T/m]", "(0, 100000]"]),
        ({"plan_step": "fast"}, ["[coils] plan_step", "[s]", "fast"]),
        ({"phases": 0}, ["[coils] phases", "[1, 64]"]),
        ({"turn": 200, "turns": None}, ["unknown key", "[coils] turn", "did you mean 'turns'"]),
        ({"radius": None}, ["[coils] radius is required"]),
        ({"height": 0.009}, ["[coils] height [m]", "[deceleration] pitch = 0.008", "0.009"]),
    ],
    ids=["radius", "turns-zero", "turns-float", "width", "height-range", "fill_factor", "max_current", "active-odd",
         "active-zero", "gradient", "plan_step-type", "phases", "misspelt", "missing", "taller-than-pitch"],
)
def test_coils_errors_name_the_key(changes: dict[str, object], words: list[str]) -> None:
    with pytest.raises(TiltwellError) as caught:
        sc.from_dict(_with_coils(**changes))
    for word in words:
        assert word in str(caught.value)


def test_coils_need_the_pitch() -> None:
    data = _with_coils()
    del data["deceleration"]["pitch"], data["deceleration"]["peak_current"]
    with pytest.raises(TiltwellError, match=r"\[coils\] needs the coil pitch: give \[deceleration\] pitch \[m\]"):
        sc.from_dict(data)
    data["coil"] = data.pop("coils")
    with pytest.raises(TiltwellError, match=r"did you mean '\[coils\]'"):
        sc.from_dict(data)


def test_coils_round_trip_and_stay_optional(tmp_path: Path) -> None:
    scenario = sc.load(DEMO)
    assert scenario.coils is not None and scenario.coils.turns == 24 and scenario.coils.gradient is None
    changed = scenario.replace("coils", gradient=200.0, max_current=None, phases=5)
    assert sc.load(sc.save(changed, tmp_path / "c.toml")) == changed
    assert changed.coils is not None and changed.coils.max_current is None and changed.coils.phases == 5
    bare = sc.from_dict({name: keys for name, keys in scenario.to_dict().items() if name != "coils"})
    assert bare.coils is None and "coils" not in bare.to_dict()
    assert sc.loads(sc.dumps(bare)) == bare
    again = bare.replace("coils", **scenario.to_dict()["coils"])
    assert again == scenario


def test_describe_lists_the_coils_keys() -> None:
    text = sc.describe()
    assert "[coils] (optional section)" in text and "z_k = -(active/2 - 1) pitch + k pitch" in text
    for line in ("radius [m] in (0, 1]", "plan_step [s] in (0, 1] (default 2e-06)", "max_current [A]", "phases"):
        assert line in text.split("[coils]")[1]


# ---- one range text for messages and for `tiltwell keys` -----------------------------------


def _bounded_keys() -> list[tuple[str, str]]:
    """(section, key) of every key whose value(s) have a finite upper end, from the listing."""
    found, section = [], ""
    for line in sc.describe().splitlines():
        if line.startswith("["):
            section = line.split("]")[0][1:]
        elif " in [" in line or " in (" in line:
            found.append((section, line.split()[0]))
    return found


def _kind(section: str, name: str) -> str:
    cls = ({"hold": sc.HoldSection, "detector": sc.DetectorSection}.get(section)  # the demo has no [hold]
           or type(getattr(sc.load(DEMO), section)))
    return next(spec_of(item).kind for item in dataclasses.fields(cls) if item.name == name)


@pytest.mark.parametrize(("section", "name"), _bounded_keys(), ids=lambda v: str(v))
def test_an_out_of_range_value_is_reported_with_the_listed_range(section: str, name: str) -> None:
    """Twice the upper end plus one is outside every range; the message names the key and
    shows the range exactly as `tiltwell keys` lists it."""
    listed = next(line for line in sc.describe().split(f"[{section}]")[1].splitlines()
                  if line.startswith(f"  {name} "))
    match = re.search(r" in ([\[(][^\])]*[\])])", listed)
    assert match is not None
    allowed = match.group(1)
    high = float(allowed[1:-1].split(", ")[1])
    kind = _kind(section, name)
    bad: object = int(2 * high) + 1 if kind.endswith("integer") else 2 * high + 1.0
    bad = {"triple": [bad] * 3, "pairs": [[bad, bad]]}.get(kind, bad)
    data = sc.load(DEMO).to_dict()
    required = {"hold": {"time": 1.0}, "detector": {"distance": 1.0, "radius": 1e-3}}  # keys these sections need
    data.setdefault(section, dict(required.get(section, {})))[name] = bad
    with pytest.raises(TiltwellError) as caught:
        sc.from_dict(data)
    assert f"[{section}] {name}" in str(caught.value) and f"in {allowed}" in str(caught.value)


def test_listing_shows_kind_range_and_required() -> None:
    text = sc.describe()
    coils = text.split("[coils]")[1]
    assert "  turns in [1, 100000] (required): turns per coil" in coils
    assert "  active in [2, 64], even (default 4): coils carrying current at once" in coils
    assert "  kind one of quadrupole, coils (required): the trap" in text
    assert "  seed in [0, 9223372036854775807] (default 0): random seed" in text


@pytest.mark.parametrize(
    ("section", "name", "value", "words"),
    [
        ("beam", "temperature", "300", ["[beam] temperature [K]", "real number", "'300'"]),
        ("beam", "temperature", True, ["[beam] temperature [K]", "real number", "True"]),
        ("simulation", "track", 1, ["[simulation] track", "true or false", "1"]),
        ("species", "name", " ", ["[species] name", "non-empty string"]),
        ("trap", "half_widths", [0.01, 0.01], ["[trap] half_widths [m]", "three numbers [x, y, z]"]),
        ("trap", "half_widths", [0.01, 0.01, 0.0], ["[trap] half_widths[2] [m]", "(0, 10]", "0.0"]),
        ("beam", "apertures", [[0.2, -1.0]], ["[beam] apertures[0][1] [m]", "(0, 100]", "-1.0"]),
        ("simulation", "method", "yoshida", ["[simulation] method", "verlet, yoshida4", "did you mean 'yoshida4'"]),
    ],
    ids=["number-as-text", "bool-as-number", "number-as-bool", "blank-name", "short-triple", "triple-item",
         "pair-item", "bad-choice"],
)
def test_each_kind_is_checked_by_the_validation_helper(section: str, name: str, value: object,
                                                       words: list[str]) -> None:
    data = sc.load(DEMO).to_dict()
    data.setdefault(section, {})[name] = value
    with pytest.raises(TiltwellError) as caught:
        sc.from_dict(data)
    for word in words:
        assert word in str(caught.value)


def test_numpy_numbers_from_widgets_are_accepted_as_plain_python_values() -> None:
    changed = sc.load(DEMO).replace("trap", gradient=np.float64(200.0)).replace("simulation", particles=np.int64(50))
    assert changed.trap.gradient == 200.0 and type(changed.trap.gradient) is float
    assert changed.simulation.particles == 50 and type(changed.simulation.particles) is int
    assert sc.loads(sc.dumps(changed)) == changed


# ---- issue 11: source, hold and spin-flip keys ---------------------------------------------


def test_new_keys_are_optional_and_old_files_load_unchanged() -> None:
    scenario = sc.load(Path(__file__).with_name("data") / "coil_pair.toml")  # written before these keys
    beam = scenario.beam
    assert (beam.pressure, beam.seed_fraction, beam.peaking_factor, beam.rotational_temperature) == (None,) * 4
    assert scenario.simulation.spin_flips is False and scenario.hold is None and len(scenario.uncertainties) == 0
    assert "hold" not in scenario.to_dict() and "pressure" not in scenario.to_dict()["beam"]


def test_new_keys_round_trip(tmp_path: Path) -> None:
    changed = (sc.load(DEMO).replace("beam", pressure=3.0e5, seed_fraction=0.01, peaking_factor=1.9,
                                     rotational_temperature=2.0)
               .replace("simulation", spin_flips=True).replace("hold", time=0.5, vacuum_pressure=1e-7))
    again = sc.load(sc.save(changed, tmp_path / "hold.toml"))
    assert again == changed
    assert changed.hold == sc.HoldSection(time=0.5, vacuum_pressure=1e-7, vacuum_temperature=295.0)
    assert changed.simulation.spin_flips is True and changed.beam.peaking_factor == 1.9


def test_describe_lists_the_new_keys() -> None:
    text = sc.describe()
    beam = text.split("[beam]")[1].split("[deceleration]")[0]
    for line in ("  pressure [Pa] in (0, 1e+08]:", "  seed_fraction in (0, 1]:", "  peaking_factor in (0, 10]:",
                 "  rotational_temperature [K] in (0, 1000]:"):
        assert line in beam
    assert "  spin_flips (default False): count non-adiabatic spin flips" in text
    hold = text.split("[hold] (optional section)")[1].split("[limits]")[0]
    for line in ("  time [s] in [0, 10000] (required):", "  vacuum_pressure [Pa] in [0, 100000] (default 0.0):",
                 "  vacuum_temperature [K] in (0, 1000] (default 295.0):"):
        assert line in hold


@pytest.mark.parametrize(
    ("section", "changes", "words"),
    [
        ("beam", {"pressure": 3e5}, ["[beam] give both pressure [Pa] and seed_fraction [1]"]),
        ("beam", {"seed_fraction": 0.1}, ["[beam] give both pressure [Pa] and seed_fraction [1]"]),
        ("beam", {"pressure": 0.0, "seed_fraction": 0.1}, ["[beam] pressure [Pa]", "(0, 1e+08]", "0.0"]),
        ("beam", {"pressure": 1e5, "seed_fraction": 0.0}, ["[beam] seed_fraction", "(0, 1]", "0.0"]),
        ("beam", {"rotational_temperature": -3.0}, ["[beam] rotational_temperature [K]", "(0, 1000]", "-3.0"]),
        ("hold", {"vacuum_pressure": 1e-8}, ["[hold] time is required"]),
        ("hold", {"time": 1.0, "vacuum_presure": 1e-8}, ["unknown key", "[hold] vacuum_presure",
                                                         "did you mean 'vacuum_pressure'"]),
        ("hold", {"time": -1.0}, ["[hold] time [s]", "[0, 10000]", "-1.0"]),
        ("hold", {"time": 1.0, "vacuum_temperature": 0.0}, ["[hold] vacuum_temperature [K]", "(0, 1000]"]),
        ("simulation", {"spin_flips": 1}, ["[simulation] spin_flips", "true or false"]),
    ],
    ids=["pressure-alone", "fraction-alone", "pressure-zero", "fraction-zero", "rotation-negative", "hold-no-time",
         "hold-misspelt", "hold-negative", "vacuum-temperature-zero", "spin-flips-number"],
)
def test_new_key_errors_name_section_key_unit_and_range(section: str, changes: dict[str, object],
                                                        words: list[str]) -> None:
    data = sc.load(Path(__file__).with_name("data") / "coil_pair.toml").to_dict()  # none of these keys
    data.setdefault(section, {}).update(changes)
    with pytest.raises(TiltwellError) as caught:
        sc.from_dict(data)
    for word in words:
        assert word in str(caught.value)


# ---- issue 11: uncertain inputs -------------------------------------------------------------

UNCERTAIN = """
[beam]
pressure = { value = 3.0e5, uncertainty = 0.3e5 }
seed_fraction = { value = 0.02, relative = 0.25 }
"""


def _uncertain_text() -> str:
    text = _plain_demo_text().replace("\n[beam]\n", UNCERTAIN, 1)
    assert "pressure = {" in text
    return text


def test_uncertain_inputs_keep_the_nominal_value_and_round_trip(tmp_path: Path) -> None:
    scenario = sc.loads(_uncertain_text())
    assert scenario.beam.pressure == 3.0e5 and scenario.beam.seed_fraction == 0.02
    assert dict(scenario.uncertainties) == {"beam.pressure": 3.0e4, "beam.seed_fraction": 0.25 * 0.02}
    written = sc.dumps(scenario)
    assert "pressure = { value = 300000.0, uncertainty = 30000.0 }" in written
    assert "seed_fraction = { value = 0.02, uncertainty = 0.005 }" in written
    assert sc.load(sc.save(scenario, tmp_path / "u.toml")) == scenario and sc.loads(written) == scenario
    assert hash(sc.loads(written)) == hash(scenario) and {scenario: 1}[sc.loads(written)] == 1
    kept = scenario.replace("trap", gradient=120.0)
    assert kept.uncertainties == scenario.uncertainties
    plain = scenario.replace("beam", pressure=2.0e5)
    assert dict(plain.uncertainties) == {"beam.seed_fraction": 0.005} and plain.beam.pressure == 2.0e5
    assert plain != scenario and hash(plain) != hash(scenario)


def test_listing_states_the_uncertainty_syntax() -> None:
    assert "key = { value = X, uncertainty = U }" in sc.describe().splitlines()[-1]


@pytest.mark.parametrize(
    ("section", "name", "value", "words"),
    [
        ("beam", "temperature", {"value": 300.0, "uncertainty": -1.0},
         ["[beam] temperature uncertainty [K]", "[0, inf)", "-1.0"]),
        ("beam", "temperature", {"value": 300.0, "relative": -0.1},
         ["[beam] temperature relative uncertainty", "[0, inf)", "-0.1"]),
        ("beam", "temperature", {"value": -300.0, "uncertainty": 1.0}, ["[beam] temperature [K]", "(0, 5000]"]),
        ("beam", "temperature", {"value": 300.0}, ["[beam] temperature [K]", "{ value = X, uncertainty = U }"]),
        ("beam", "temperature", {"value": 300.0, "uncertainty": 1.0, "relative": 0.1},
         ["[beam] temperature [K]", "{ value = X, relative = R }"]),
        ("beam", "temperature", {"value": 300.0, "uncertanty": 1.0},
         ["unknown field 'uncertanty'", "[beam] temperature", "did you mean 'uncertainty'"]),
        ("beam", "temperature", {"value": 300.0, "uncertainty": "big"}, ["[beam] temperature uncertainty", "big"]),
        ("beam", "apertures", {"value": [[0.2, 3e-3]], "uncertainty": 1e-4},
         ["[beam] apertures cannot carry an uncertainty", "[distance, diameter] pairs"]),
        ("beam", "gas", {"value": "Kr", "uncertainty": 1.0}, ["[beam] gas cannot carry an uncertainty", "text"]),
        ("simulation", "particles", {"value": 1000, "uncertainty": 10},
         ["[simulation] particles cannot carry an uncertainty", "integer"]),
        ("simulation", "track", {"value": True, "uncertainty": 0.1}, ["[simulation] track cannot carry"]),
    ],
    ids=["negative", "negative-relative", "value-out-of-range", "no-uncertainty", "both-forms", "misspelt-field",
         "uncertainty-as-text", "list-key", "text-key", "integer-key", "boolean-key"],
)
def test_uncertainty_errors_name_the_key(section: str, name: str, value: object, words: list[str]) -> None:
    data = sc.load(DEMO).to_dict()
    data[section][name] = value
    with pytest.raises(TiltwellError) as caught:
        sc.from_dict(data)
    for word in words:
        assert word in str(caught.value)


def test_zero_uncertainty_is_kept_as_given() -> None:
    scenario = sc.loads(_plain_demo_text()).replace("trap", gradient={"value": 100.0, "uncertainty": 0.0})
    assert dict(scenario.uncertainties) == {"trap.gradient": 0.0}
    assert sc.loads(sc.dumps(scenario)) == scenario
