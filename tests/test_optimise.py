"""The trade-off front against a brute-force dominance check, and the optimiser against the
closed-form optimum of a tilted V-shaped well under a length limit."""

from __future__ import annotations

import math

import numpy as np
import pytest

from conftest import KRYPTON_SPEED_300K
from test_search import ideal
from tiltwell import species
from tiltwell._base.validation import TiltwellError
from tiltwell.workflows import search as se
from tiltwell.workflows.optimise import front_of, optimise, pareto_front


def brute_front(gain: np.ndarray, cost: np.ndarray) -> np.ndarray:
    """Non-dominated by definition, every pair compared (O(n^2))."""
    keep = np.zeros(gain.size, dtype=bool)
    for i in range(gain.size):
        if not (np.isfinite(gain[i]) and np.isfinite(cost[i])):
            continue
        dominated = any(gain[j] >= gain[i] and cost[j] <= cost[i] and (gain[j] > gain[i] or cost[j] < cost[i])
                        for j in range(gain.size) if np.isfinite(gain[j]) and np.isfinite(cost[j]))
        keep[i] = not dominated
    return keep


@pytest.mark.parametrize("seed", range(6))
def test_the_front_is_the_brute_force_non_dominated_set(seed: int) -> None:
    """Random clouds with ties (values on a coarse lattice) and NaNs."""
    rng = np.random.default_rng(seed)
    gain, cost = rng.integers(0, 12, 80).astype(float), rng.integers(0, 12, 80).astype(float)
    gain[rng.integers(0, 80, 5)] = np.nan
    np.testing.assert_array_equal(pareto_front(gain, cost), brute_front(gain, cost))


def test_the_front_of_a_search_grid() -> None:
    """On a grid of decelerations and gradients: complete and non-dominated against the brute
    force, and the captured fraction rises along it as the device gets longer."""
    result = se.search(ideal(), [se.parse_vary("deceleration.deceleration=1e4:4e4:4"),
                                 se.parse_vary("trap.gradient=60,100,140")])
    gain, cost = result.values("captured_fraction_energy"), result.values("length")
    on = front_of(result, "length")
    assert sorted(on.tolist()) == np.flatnonzero(brute_front(gain, cost)).tolist()
    assert np.all(np.diff(cost[on]) > 0) and np.all(np.diff(gain[on]) > 0)
    with pytest.raises(TiltwellError, match="unknown search column"):
        front_of(result, "price")


def v_well_area(a: float, gradient: float, max_field: float, mass: float, moment: float) -> float:
    """Longitudinal acceptance [m m/s] of U = min(mu B' |z|, mu B_max) - m a z, the ideal
    quadrupole's axis potential tilted by the deceleration (derived here): the front barrier
    sits at z_f = B_max / B' with escape energy E = (k - m a) z_f (k = mu B'); E - U falls
    linearly to 0 over E / (k + m a) behind the bottom and E / (k - m a) ahead, and over a
    linear ramp of length d, 2 int sqrt(2 s x / m) dx = (4/3) sqrt(2/m) E^(3/2) / s, so
    A = (4/3) sqrt(2/m) E^(3/2) (1 / (k + m a) + 1 / (k - m a)), falling as a rises."""
    k = moment * gradient
    energy = (k - mass * a) * max_field / gradient
    return 4 / 3 * math.sqrt(2 / mass) * energy**1.5 * (1 / (k + mass * a) + 1 / (k - mass * a))


@pytest.mark.slow
def test_the_optimiser_finds_the_closed_form_optimum_under_a_length_limit() -> None:
    """The acceptance falls with the deceleration (v_well_area), so under a length limit L the
    best design decelerates as gently as L allows: a* = (v0^2 - vf^2) / (2 L) (kinematics).
    The optimiser finds a* to 1 %, the acceptance there to 1 % of the closed form, the
    length limit within 1 % and the sensitivity d ln A / d ln a of the closed form to 5 %."""
    oh = species("OH")
    limit = 2.5
    a_best = (KRYPTON_SPEED_300K**2 - 20.0**2) / (2 * limit)
    scenario = ideal(samples=2001)
    found = optimise(scenario, [se.parse_vary("deceleration.deceleration=1e4:4e4")], "longitudinal_acceptance",
                     max_length=limit, seed=1, popsize=8, maxiter=60)
    assert found.feasible
    assert found.point["deceleration.deceleration"] == pytest.approx(a_best, rel=1e-2)
    area = v_well_area(found.point["deceleration.deceleration"], 100.0, 0.32, oh.mass, oh.moment)
    assert found.value == pytest.approx(area, rel=1e-2)
    assert 0.0 <= found.margins["length"] < 1e-3
    h = 1e-4
    slope = (math.log(v_well_area(a_best * (1 + h), 100.0, 0.32, oh.mass, oh.moment))
             - math.log(v_well_area(a_best * (1 - h), 100.0, 0.32, oh.mass, oh.moment))) / (2 * h)
    assert found.sensitivity["deceleration.deceleration"] == pytest.approx(slope, rel=5e-2)
    assert any("margin to the length limit" in line for line in found.lines())


def test_the_optimiser_refuses_what_it_cannot_do() -> None:
    with pytest.raises(TiltwellError, match="needs the absolute yield"):
        optimise(ideal(), [se.parse_vary("deceleration.deceleration=1e4:4e4")], "slow_particles")
    with pytest.raises(TiltwellError, match="figure must be one of"):
        optimise(ideal(), [se.parse_vary("deceleration.deceleration=1e4:4e4")], "price")
    with pytest.raises(TiltwellError, match="needs a range"):
        optimise(ideal(), [se.parse_vary("deceleration.deceleration=1e4,4e4")])
    with pytest.raises(TiltwellError, match="max_length"):
        optimise(ideal(), [se.parse_vary("deceleration.deceleration=1e4:4e4")], max_length=-1.0)
