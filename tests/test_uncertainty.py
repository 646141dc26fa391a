"""Input uncertainties carried to a result (tiltwell.workflows.uncertainty).

The toy output is the product pressure x seed_fraction of two independent Gaussian inputs,
whose exact variance is Goodman's (L. A. Goodman, "On the exact variance of products",
J. Am. Stat. Assoc. 55, 708 (1960), eq. 1 for independent factors):
``Var(xy) = mu_y^2 s_x^2 + mu_x^2 s_y^2 + s_x^2 s_y^2``; its first-order Sobol' indices are
``S_x = mu_y^2 s_x^2 / Var`` (Saltelli et al., "Global Sensitivity Analysis: The Primer",
Wiley 2008, eq. 1.23 with E[xy | x] = x mu_y). Brute-force checks draw plain Monte-Carlo
samples with numpy's default_rng, many more than the propagation uses.
"""

from __future__ import annotations

import dataclasses
import json
import math
from concurrent.futures import ProcessPoolExecutor, ThreadPoolExecutor
from pathlib import Path

import numpy as np
import pytest

from tiltwell import TiltwellError
from tiltwell import scenario as sc
from tiltwell.workflows.keys import Uncertainties
from tiltwell.workflows.uncertainty import HIGH_PROBABILITY, LOW_PROBABILITY, Propagation, propagate, with_systematic

DEMO = Path(sc.__file__).with_name("data") / "demo.toml"
PRESSURE, FRACTION = 3.0e5, 0.05  # Pa, 1: invented toy values


def _plain() -> sc.Scenario:
    """The demo with every input a plain value (it ships with uncertain ones)."""
    return dataclasses.replace(sc.load(DEMO), uncertainties=Uncertainties())


def _uncertain(pressure: dict[str, float], fraction: dict[str, float]) -> sc.Scenario:
    return _plain().replace("beam", pressure=pressure, seed_fraction=fraction)


def product(scenario: sc.Scenario) -> float:
    """The toy output [Pa]; top level so a process pool can send it."""
    assert scenario.beam.pressure is not None and scenario.beam.seed_fraction is not None
    return scenario.beam.pressure * scenario.beam.seed_fraction


def both(scenario: sc.Scenario) -> dict[str, float]:
    return {"product": product(scenario), "fraction": float(scenario.beam.seed_fraction or 0.0)}


@pytest.fixture(scope="module")
def small_sigmas() -> sc.Scenario:
    """Relative sigmas 2 % and 5 %: the product is nearly Gaussian, so its 68 % half-width is sigma."""
    return _uncertain({"value": PRESSURE, "relative": 0.02}, {"value": FRACTION, "relative": 0.05})


@pytest.fixture(scope="module")
def small_result(small_sigmas: sc.Scenario) -> Propagation:
    return propagate(small_sigmas, product, samples=1024, seed=11)


@pytest.mark.slow
def test_interval_is_the_closed_form_propagation(small_result: Propagation) -> None:
    """Half the 68 % interval against Goodman's exact sigma (relative sigmas in quadrature
    plus their product); measured within 3 % over seeds 0-7 at 1,024 samples."""
    r = small_result
    sigma = PRESSURE * FRACTION * math.sqrt(0.02**2 + 0.05**2 + (0.02 * 0.05) ** 2)
    assert r.nominal == pytest.approx(PRESSURE * FRACTION, rel=1e-12)
    assert (r.high - r.low) / 2 == pytest.approx(sigma, rel=0.06)
    assert r.median == pytest.approx(PRESSURE * FRACTION, rel=0.01)
    assert r.low < r.median < r.high and r.values.shape == (1024,) and r.samples.shape == (1024, 2)


@pytest.mark.slow
def test_sensitivity_ranks_the_larger_share_first_near_the_closed_form(small_result: Propagation) -> None:
    """RBD-FAST first-order indices and the regression cross-check against the Sobol'
    shares of the product (module notes); measured within 0.015 over seeds 0-7."""
    r = small_result
    var = 0.02**2 + 0.05**2 + (0.02 * 0.05) ** 2  # relative variance
    shares = {"beam.seed_fraction": 0.05**2 / var, "beam.pressure": 0.02**2 / var}  # 0.862, 0.138
    assert [row.input for row in r.sensitivity] == ["beam.seed_fraction", "beam.pressure"]
    for row in r.sensitivity:
        assert row.first_order == pytest.approx(shares[row.input], abs=0.04)
        assert row.regression == pytest.approx(shares[row.input], abs=0.04)
        assert 0 < row.first_order_error < 0.1
    first = r.sensitivity[0]
    assert (first.unit, first.nominal, first.uncertainty) == ("", FRACTION, pytest.approx(0.05 * FRACTION))


@pytest.mark.slow
def test_interval_matches_brute_force_resampling_with_truncation() -> None:
    """Larger sigmas (skewed product) and a seed fraction 0.9 +- 0.1 truncated at its upper
    end 1: the three quantiles against 4e6 plain Monte-Carlo draws (numpy default_rng, the
    truncation by rejection); measured within 0.07 of the half-width over seeds 0-5."""
    scenario = _uncertain({"value": PRESSURE, "relative": 0.1}, {"value": 0.9, "uncertainty": 0.1})
    r = propagate(scenario, product, samples=1024, seed=3)
    rng = np.random.default_rng(7)
    n = 4_000_000
    fraction = 0.9 + 0.1 * rng.standard_normal(3 * n)
    fraction = fraction[fraction <= 1.0][:n]
    brute = np.quantile(PRESSURE * (1 + 0.1 * rng.standard_normal(n)) * fraction, [LOW_PROBABILITY, 0.5,
                                                                                     HIGH_PROBABILITY])
    half = (brute[2] - brute[0]) / 2
    assert np.all(np.abs(np.array(r.interval) - brute) < 0.12 * half)
    assert r.samples[:, 1].max() <= 1.0


def test_truncated_input_has_the_closed_form_mean() -> None:
    """Sample mean of seed_fraction 0.95 +- 0.1 in (0, 1] against the truncated-normal mean
    mu + sigma (phi(a) - phi(b)) / (Phi(b) - Phi(a)) (Johnson, Kotz & Balakrishnan,
    "Continuous Univariate Distributions" vol. 1, 2nd ed., eq. 13.134), written with math.erf."""
    scenario = _uncertain({"value": PRESSURE, "relative": 0.01}, {"value": 0.95, "uncertainty": 0.1})
    r = propagate(scenario, product, samples=512, seed=1)
    column = r.samples[:, list(r.inputs).index("beam.seed_fraction")]

    def phi(x: float) -> float:
        return math.exp(-x * x / 2) / math.sqrt(2 * math.pi)

    def cdf(x: float) -> float:
        return 0.5 * (1 + math.erf(x / math.sqrt(2)))

    a, b = (0.0 - 0.95) / 0.1, (1.0 - 0.95) / 0.1
    mean = 0.95 + 0.1 * (phi(a) - phi(b)) / (cdf(b) - cdf(a))  # 0.8991
    assert column.mean() == pytest.approx(mean, abs=2e-4)
    assert 0 < column.min() and column.max() <= 1.0


def test_open_lower_bound_is_never_sampled() -> None:
    """A pressure of 1000 +- 1000 Pa: the range (0, 1e8] keeps every sample above 0."""
    r = propagate(_uncertain({"value": 1e3, "uncertainty": 1e3}, {"value": FRACTION, "relative": 0.1}), product,
                  samples=256, seed=2)
    assert r.samples[:, list(r.inputs).index("beam.pressure")].min() > 0


def test_same_seed_same_result_and_default_seed_from_the_scenario(small_sigmas: sc.Scenario) -> None:
    first = propagate(small_sigmas, product, samples=64, seed=5)
    again = propagate(small_sigmas, product, samples=64, seed=5)
    other = propagate(small_sigmas, product, samples=64, seed=6)
    assert np.array_equal(first.values, again.values) and first.sensitivity == again.sensitivity
    assert not np.array_equal(first.values, other.values)
    default = propagate(small_sigmas, product, samples=64)
    assert default.seed == small_sigmas.simulation.seed == 2026
    assert np.array_equal(default.values, propagate(small_sigmas, product, samples=64, seed=2026).values)


@pytest.mark.parametrize("kind", ["threads", "processes"])
def test_an_executor_gives_the_serial_result(small_sigmas: sc.Scenario, kind: str) -> None:
    serial = propagate(small_sigmas, product, samples=64, seed=4)
    pool = ThreadPoolExecutor(2) if kind == "threads" else ProcessPoolExecutor(2)
    with pool as executor:
        parallel = propagate(small_sigmas, product, samples=64, seed=4, executor=executor)
    assert np.array_equal(serial.values, parallel.values) and serial.interval == parallel.interval
    assert serial.sensitivity == parallel.sensitivity


def test_several_outputs_share_one_sample(small_sigmas: sc.Scenario) -> None:
    """An output that is seed_fraction itself owes all its variance to it (index 1, closed form)."""
    out = propagate(small_sigmas, both, samples=256, seed=8)
    assert set(out) == {"product", "fraction"}
    assert np.array_equal(out["product"].samples, out["fraction"].samples)
    assert np.allclose(out["fraction"].values, out["fraction"].samples[:, 1], rtol=0, atol=0)
    top = out["fraction"].sensitivity[0]
    assert top.input == "beam.seed_fraction" and top.first_order == pytest.approx(1.0, abs=0.03)
    assert top.regression == pytest.approx(1.0, abs=1e-9)
    assert out["fraction"].sensitivity[1].first_order == pytest.approx(0.0, abs=0.05)


def test_zero_uncertainty_stays_fixed_and_a_constant_output_has_no_shares() -> None:
    scenario = _uncertain({"value": PRESSURE, "uncertainty": 0.0}, {"value": FRACTION, "relative": 0.1})
    r = propagate(scenario, lambda s: 1.0, samples=64, seed=0)
    assert r.inputs == ("beam.seed_fraction",)
    assert r.interval == (1.0, 1.0, 1.0) and r.sensitivity[0].first_order == 0.0


def test_results_are_read_only_and_json_ready(small_sigmas: sc.Scenario) -> None:
    r = propagate(small_sigmas, product, samples=64, seed=3)
    with pytest.raises(ValueError):
        r.values[0] = 0.0
    data = json.loads(json.dumps(r.to_dict()))
    assert data["samples"] == 64 and data["sensitivity"][0]["input"] == "beam.seed_fraction"
    assert "S1" in r._repr_html_()


@pytest.mark.parametrize(
    ("kwargs", "words"),
    [
        ({"samples": 10}, ["samples", "[64, 10000000]", "10"]),
        ({"seed": -1}, ["seed", "-1"]),
        ({"evaluate": lambda s: float("nan")}, ["evaluate(the nominal scenario)", "nan"]),
        ({"evaluate": lambda s: {"a": 1.0} if s.beam.pressure == PRESSURE else {"b": 1.0}}, ["same outputs"]),
        ({"evaluate": 3.0}, ["evaluate must be a function"]),
    ],
    ids=["few-samples", "negative-seed", "nan-output", "changing-outputs", "not-callable"],
)
def test_bad_arguments_are_named(small_sigmas: sc.Scenario, kwargs: dict[str, object], words: list[str]) -> None:
    arguments: dict[str, object] = {"evaluate": product, "samples": 64, **kwargs}
    with pytest.raises(TiltwellError) as caught:
        propagate(small_sigmas, **arguments)  # type: ignore[arg-type]
    for word in words:
        assert word in str(caught.value)


def test_a_scenario_without_uncertainties_is_refused() -> None:
    with pytest.raises(TiltwellError, match="no uncertain input"):
        propagate(_plain(), product)


# ---- a stated systematic ------------------------------------------------------------------


def test_systematic_adds_in_quadrature_on_each_side() -> None:
    """3-4-5 on the low side, 5-12-13 on the high side (arithmetic)."""
    assert with_systematic((7.0, 10.0, 15.0), 4.0) == pytest.approx((5.0, 10.0, 15.0 + 1.403124237))
    assert with_systematic((-2.0, 3.0, 15.0), 12.0) == pytest.approx((-10.0, 3.0, 3.0 + math.hypot(12, 12)))
    assert with_systematic((1.0, 2.0, 3.0), 0.0) == (1.0, 2.0, 3.0)


def test_systematic_matches_a_brute_force_sum_of_independent_errors() -> None:
    """A Gaussian statistical error (sigma 3) plus an independent Gaussian systematic
    (sigma 4): the quantiles of 4e6 sums (numpy default_rng) against the widened interval."""
    rng = np.random.default_rng(1)
    total = 10 + 3 * rng.standard_normal(4_000_000) + 4 * rng.standard_normal(4_000_000)
    brute = np.quantile(total, [LOW_PROBABILITY, 0.5, HIGH_PROBABILITY])
    assert with_systematic((7.0, 10.0, 13.0), 4.0) == pytest.approx(tuple(brute), abs=0.02)


def test_systematic_bad_input_is_named(small_sigmas: sc.Scenario) -> None:
    with pytest.raises(TiltwellError, match=r"spread must be finite and in \[0, inf\); got -1.0"):
        with_systematic((1.0, 2.0, 3.0), -1.0)
    with pytest.raises(TiltwellError, match="low <= centre <= high"):
        with_systematic((3.0, 2.0, 1.0), 1.0)
    r = propagate(small_sigmas, product, samples=64, seed=3)
    low, centre, high = r.with_systematic(100.0)
    assert centre == r.median and low == pytest.approx(centre - math.hypot(centre - r.low, 100.0))
    assert high == pytest.approx(centre + math.hypot(r.high - centre, 100.0))
