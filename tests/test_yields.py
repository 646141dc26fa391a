"""The yield budget (tiltwell.workflows.yields) against closed forms written here.

- Choked flow of an ideal gas through a sonic orifice, ``F(g) n0 sqrt(2 k T0/m) pi d^2/4``
  (D. R. Miller, "Free jet sources", ch. 2 of G. Scoles (ed.), Atomic and Molecular Beam
  Methods Vol. 1 (1988); from memory), with the centre-line peaking factor 1.98 of a
  monatomic jet (Beijerinck & Verster, Physica 111C (1981) 327; from memory) and the exact
  solid angle of a round aperture, ``2 pi (1 - cos theta)``.
- OH X2Pi3/2 J = 3/2: 8 states (2 Lambda components x 4 M), of which M > 0 seek low field
  (hand count, Brown & Carrington, Rotational Spectroscopy of Diatomic Molecules, ch. 9).
- Background-gas loss ``n sigma <v>`` (kinetic theory) and the Majorana rate
  ``chi (hbar/m) (mu B'/k T)^2`` (Petrich et al., PRL 74, 3352 (1995); from memory).
- The propagated interval against a brute-force resampling with numpy's generator.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import scipy.constants as C
from scipy import stats

from tiltwell import scenario as sc
from tiltwell.workflows.report import build, estimate, summarise
from tiltwell.workflows.yields import YIELD_UNITS, yield_budget

DEMO = Path(sc.__file__).with_name("data") / "demo.toml"
KR = 83.798 * C.atomic_mass  # kg, krypton (standard atomic weight, from memory)
PRESSURE, SEED = 2.0e5, 1.0e-3  # Pa, 1: invented


def quadrupole(**beam: Any) -> sc.Scenario:
    """The demo as an ideal quadrupole (no coil row), small samples: fast."""
    data = sc.load(DEMO).to_dict()
    for section in ("coils", "limits", "hold"):
        data.pop(section, None)
    for name in ("pressure", "seed_fraction", "rotational_temperature"):  # the demo's own, uncertain
        data["beam"].pop(name, None)
    data["beam"].update(beam)
    data["simulation"].update(particles=3000, samples=401, seed=5)
    return sc.from_dict(data)


@pytest.fixture(scope="module")
def absolute() -> sc.Scenario:
    return quadrupole(pressure=PRESSURE, seed_fraction=SEED, rotational_temperature=5.0)


@pytest.fixture(scope="module")
def summary(absolute: sc.Scenario) -> dict[str, Any]:
    return summarise(absolute)


def choked_flow(pressure: float, temperature: float, diameter: float, mass: float, gamma: float) -> float:
    factor = math.sqrt(gamma / (gamma + 1)) * (2 / (gamma + 1)) ** (1 / (gamma - 1))
    return factor * pressure / (C.k * temperature) * math.sqrt(2 * C.k * temperature / mass) * math.pi * diameter**2 / 4


def test_per_pulse_and_reaching_the_trap_are_the_free_jet_closed_forms(absolute: sc.Scenario,
                                                                      summary: dict[str, Any]) -> None:
    b = absolute.beam
    flow = choked_flow(PRESSURE, b.temperature, b.nozzle_diameter, KR, 5 / 3)
    assert summary["particles_per_pulse"] == pytest.approx(flow * b.valve_open_time * SEED, rel=1e-4)
    # the demo's limiting aperture: 3 mm at 0.2 m (D/L 0.015) against the skimmer's 2 mm at 0.08 m
    theta = math.atan(1.5e-3 / 0.2)
    solid = 2 * math.pi * (1 - math.cos(theta))
    assert summary["reaching_trap"] == pytest.approx(summary["particles_per_pulse"] * 1.98 / math.pi * solid, rel=1e-9)


def test_oh_half_the_states_seek_low_field_and_each_keeps_its_own_fraction(absolute: sc.Scenario,
                                                                           summary: dict[str, Any]) -> None:
    assert summary["trappable_fraction"] == pytest.approx(0.5, abs=1e-9)
    states = summary["states"]
    assert [round(s["share"], 9) for s in states] == [0.25, 0.25]  # M = 3/2 and M = 1/2, both parities each
    assert states[0]["moment"] == pytest.approx(3 * states[1]["moment"], rel=1e-12)  # W = g M mu_B B
    kept = sum(s["share"] * s["captured_fraction"] for s in states)
    assert summary["captured_particles"] == pytest.approx(summary["reaching_trap"] * kept, rel=1e-12)
    assert summary["captured_fraction_mc"] == pytest.approx(states[0]["captured_fraction"], rel=1e-12)
    assert summary["slow_particles_low"] < summary["slow_particles"] < summary["slow_particles_high"]


def test_the_weaker_state_has_its_own_critical_deceleration(absolute: sc.Scenario, summary: dict[str, Any]) -> None:
    """a_c is proportional to the moment (the tilt m a against mu B'): the M = 1/2 state's well
    vanishes at a third of the M = 3/2 one's, so at 0.54 a_c it keeps nothing."""
    a = summary["deceleration"] / summary["critical_deceleration"]
    assert 1 / 3 < a < 1
    assert summary["states"][1]["captured_fraction"] == 0.0


def test_yield_is_linear_in_pressure_and_seed_fraction(summary: dict[str, Any]) -> None:
    doubled = summarise(quadrupole(pressure=2 * PRESSURE, seed_fraction=3 * SEED, rotational_temperature=5.0))
    for name in ("particles_per_pulse", "reaching_trap", "slow_particles", "slow_particles_low",
                 "slow_particles_high", "final_density", "final_phase_space_density", "initial_phase_space_density"):
        assert doubled[name] == pytest.approx(6 * summary[name], rel=1e-12), name
    assert doubled["final_temperature"] == pytest.approx(summary["final_temperature"], rel=1e-12)


def test_final_cloud_temperature_is_the_survivors_velocity_variance(absolute: sc.Scenario,
                                                                    summary: dict[str, Any]) -> None:
    """Only the M = 3/2 state survives here: its kept rows' variance, weighted by each row's
    probability of no spin flip (the demo counts flips), by numpy's weighted average."""
    built = build(absolute)
    found = estimate(absolute, built)
    assert found.tracking is not None and found.tracking.survival_weights is not None
    kept = found.tracking.final[found.tracking.kept]
    weights = found.tracking.survival_weights[found.tracking.kept]
    assert 0.9 < weights.mean() < 1.0  # some flips, few
    mean = np.average(kept, axis=0, weights=weights)
    variance = np.average((kept - mean) ** 2, axis=0, weights=weights)
    temperatures = built.species.mass * variance[3:] / C.k
    assert summary["final_temperatures"] == pytest.approx(temperatures.tolist(), rel=1e-9)
    sizes = np.sqrt(variance[:3])
    number = summary["slow_particles"]
    assert summary["final_density"] == pytest.approx(number / ((2 * math.pi) ** 1.5 * np.prod(sizes)), rel=1e-9)


def test_summary_carries_the_fixed_keys_with_units(summary: dict[str, Any]) -> None:
    fixed = {"particles_per_pulse": "1", "trappable_fraction": "1", "slow_particles": "1", "slow_particles_low": "1",
             "slow_particles_high": "1", "initial_phase_space_density": "1", "final_temperature": "K",
             "final_density": "1/m^3", "final_phase_space_density": "1"}
    for name, unit in fixed.items():
        assert isinstance(summary[name], float) and summary["units"][name] == unit == YIELD_UNITS[name]


def test_without_a_pressure_only_fractions_and_temperature() -> None:
    found = summarise(quadrupole(rotational_temperature=5.0))
    assert found["slow_particles"] is None and found["particles_per_pulse"] is None and found["final_density"] is None
    assert found["trappable_fraction"] == pytest.approx(0.5, abs=1e-9)
    assert found["final_temperature"] > 0
    assert any("pressure" in note for note in found["yield_notes"])


def test_molecule_without_rotational_temperature_is_taken_as_all_trapped_with_a_note() -> None:
    found = summarise(quadrupole(pressure=PRESSURE, seed_fraction=SEED))
    assert found["trappable_fraction"] == 1.0 and len(found["states"]) == 1
    assert any("upper bound" in note for note in found["yield_notes"])


def test_hold_survival_is_background_gas_and_majorana_closed_forms(absolute: sc.Scenario,
                                                                   summary: dict[str, Any]) -> None:
    held = sc.from_dict(absolute.to_dict() | {"hold": {"time": 2.0, "vacuum_pressure": 1e-6,
                                                         "vacuum_temperature": 295.0}})
    found = summarise(held)
    n = 1e-6 / (C.k * 295.0)
    mean_speed = math.sqrt(8 * C.k * 295.0 / (math.pi * 28.0134 * C.atomic_mass))
    background = n * 9e-18 * mean_speed  # the default cross-section: common practice, no source
    top = found["states"][0]
    hbar = C.hbar
    mass = build(absolute).species.mass
    majorana = 0.16 * hbar / mass * (top["moment"] * 100.0 / (C.k * found["final_temperature"])) ** 2
    assert top["hold_survival"] == pytest.approx(math.exp(-2.0 * (background + majorana)), rel=1e-6)
    assert found["slow_particles"] == pytest.approx(summary["slow_particles"] * top["hold_survival"], rel=1e-9)


def test_propagated_interval_against_brute_force_resampling(absolute: sc.Scenario) -> None:
    """Only the pressure uncertain (10 %): the yield is proportional to it, so its sampled
    68 % interval is the pressure's, which plain Monte-Carlo draws of the truncated
    Gaussian give directly (Latin hypercube of 64 against 2e5 draws: within 5 %)."""
    text = sc.dumps(absolute).replace(f"pressure = {PRESSURE!r}", f"pressure = {{ value = {PRESSURE!r}, relative = 0.1 }}")
    uncertain = sc.loads(text)
    built = build(uncertain)
    budget = yield_budget(uncertain, built, estimate(uncertain, built))
    found = budget.propagation
    assert found is not None and found.inputs == ("beam.pressure",)
    rng = np.random.default_rng(3)
    draws = stats.truncnorm.rvs(-10.0, 1e8, loc=1.0, scale=0.1, size=200_000, random_state=rng)
    low, high = np.quantile(draws, [stats.norm.cdf(-1), stats.norm.cdf(1)])
    assert found.low / found.nominal == pytest.approx(low, rel=0.05)
    assert found.high / found.nominal == pytest.approx(high, rel=0.05)
    assert budget.slow_particles is not None and budget.low is not None and budget.high is not None
    sampled = budget.slow_particles * (found.median - found.low) / found.nominal
    other = math.hypot(budget.statistical or 0.0, budget.systematic or 0.0)
    assert budget.slow_particles - budget.low == pytest.approx(math.hypot(sampled, other), rel=1e-9)
    assert found.sensitivity[0].input == "beam.pressure" and found.sensitivity[0].regression > 0.95


def test_run_prints_the_budget_with_the_json_numbers(absolute: sc.Scenario, tmp_path: Path,
                                                     capsys: pytest.CaptureFixture[str]) -> None:
    from tiltwell.cli import main

    path = sc.save(absolute, tmp_path / "absolute.toml")
    assert main(["run", str(path), "--json"]) == 0
    found = json.loads(capsys.readouterr().out)
    assert main(["run", str(path)]) == 0
    text = capsys.readouterr().out
    line = next(row for row in text.splitlines() if "slow particles per shot" in row)
    assert f"{found['slow_particles']:.3g} (68 %: {found['slow_particles_low']:.3g} to " in line
    for label, key in (("per pulse", "particles_per_pulse"), ("reaching the trap", "reaching_trap"),
                       ("captured", "captured_particles")):
        row = next(r for r in text.splitlines() if r.startswith(f"    {label:21s} "))
        assert f"{found[key]:.3g}" in row
    assert f"{found['final_temperature'] * 1e3:.3g} mK" in text


def test_run_without_a_pressure_says_what_is_missing(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from tiltwell.cli import main

    path = sc.save(quadrupole(rotational_temperature=5.0), tmp_path / "fractions.toml")
    assert main(["run", str(path)]) == 0
    text = capsys.readouterr().out
    assert "slow particles per shot  needs [beam] pressure and seed_fraction" in text
    assert "in trappable states      0.5 of the particles" in text


def test_hold_takes_the_weak_field_moment_of_a_breit_rabi_state() -> None:
    """Rb-87 |F=2, mF=1> in a 1000 T/m quadrupole: the Majorana rate uses the moment at the
    zero, g_F m_F mu_B with g_F = (g_J + 2 I g_I) / (2 I + 1) (the weak-field limit of the
    Breit-Rabi formula, Arimondo, Inguscio & Violino, RMP 49, 31 (1977); from memory), about
    half the slope at 1 T; the temperature is the survivors' velocity variance by numpy."""
    data = quadrupole(pressure=PRESSURE, seed_fraction=SEED).to_dict()
    data["species"] = {"name": "Rb-87"}
    data["trap"].update(gradient=1000.0, max_field=0.5)
    data["simulation"]["spin_flips"] = False
    data["hold"] = {"time": 0.5}
    held = sc.from_dict(data)
    built = build(held)
    budget = yield_budget(held, built, estimate(held, built))
    state = next(s for s in budget.states if s.label.endswith("F=2 mF=1"))
    tracking = state.estimates.tracking
    assert tracking is not None and np.count_nonzero(tracking.kept) >= 5
    g_j, g_i, spin = 2.00233113, -0.0009951414, 1.5  # Steck, Rubidium 87 D Line Data (from memory)
    weak = (g_j + 2 * spin * g_i) / (2 * spin + 1) * C.physical_constants["Bohr magneton"][0]
    temperature = float(np.mean(built.species.mass * tracking.final[tracking.kept][:, 3:].var(axis=0) / C.k))
    rate = 0.16 * C.hbar / built.species.mass * (weak * 1000.0 / (C.k * temperature)) ** 2
    assert state.hold == pytest.approx(math.exp(-0.5 * rate), rel=1e-6)
    assert state.moment > 1.5 * weak  # the slope at 1 T would overstate the rate


def test_a_state_without_a_moment_at_the_zero_is_kept_out_of_the_spin_flip_check() -> None:
    """Hydrogen |F=1, mF=0> seeks low fields (its Breit-Rabi energy rises with |B|) but has no
    linear moment at the zero, where the Landau-Zener picture needs one: the summary counts
    its captured fraction without flips and says so, instead of failing."""
    data = quadrupole(pressure=PRESSURE, seed_fraction=SEED).to_dict()
    data["species"] = {"name": "H"}
    data["simulation"]["spin_flips"] = True
    found = summarise(sc.from_dict(data))
    labels = [s["label"] for s in found["states"]]
    assert labels == ["2S1/2 F=1 mF=1", "2S1/2 F=1 mF=0"] and found["trappable_fraction"] == pytest.approx(0.5)
    assert any("mF=0: it has no moment at the field zero" in note for note in found["yield_notes"])
    zero = found["states"][1]
    assert zero["after_spin_flips"] == zero["captured_fraction"]
