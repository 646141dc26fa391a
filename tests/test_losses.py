"""Hold losses: the Majorana rate by hand and its scaling laws, the background-gas rate by
hand and against scipy's Maxwell distribution, and survival."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc
from scipy.stats import maxwell

from tiltwell import TiltwellError, background_gas_rate, hold_survival, majorana_rate
from tiltwell.dynamics.losses import BACKGROUND_CROSS_SECTION, MAJORANA_CHI

from conftest import AMU, K_B, MU_B

RB87 = 86.909 * AMU  # kg (from memory)
N2 = 28.0134 * AMU  # kg


def test_majorana_by_hand() -> None:
    """87Rb |F=1, m_F=-1> (mu = mu_B / 2), 1 T/m, 100 uK, chi = 0.16:
    hbar / m = 1.054572e-34 / 1.443160e-25 = 7.30736e-10 m^2/s;
    mu B' / (k T) = 4.637005e-24 / 1.380649e-27 = 3358.57 /m; squared 1.12800e7 /m^2;
    rate = 0.16 * 7.30736e-10 * 1.12800e7 = 1.3188e-3 /s
    (formula of Petrich et al., PRL 74, 3352 (1995), chi of Dubessy et al., PRA 85, 013411
    (2012); both from memory)."""
    assert MAJORANA_CHI == 0.16
    assert majorana_rate(RB87, MU_B / 2, 1.0, 1e-4) == pytest.approx(1.3188e-3, rel=1e-4)
    written_out = 0.3 * sc.hbar / RB87 * (MU_B / 2 * 2.5 / (K_B * 3e-5)) ** 2
    assert majorana_rate(RB87, MU_B / 2, 2.5, 3e-5, chi=0.3) == pytest.approx(written_out, rel=1e-13)


@pytest.mark.parametrize("factor", [0.5, 2.0, 10.0])
def test_majorana_scaling_laws(factor: float) -> None:
    base = majorana_rate(RB87, MU_B, 1.5, 2e-4)
    assert majorana_rate(RB87, MU_B, 1.5, 2e-4 * factor) == pytest.approx(base / factor**2, rel=1e-13)
    assert majorana_rate(RB87, MU_B, 1.5 * factor, 2e-4) == pytest.approx(base * factor**2, rel=1e-13)
    assert majorana_rate(RB87, MU_B * factor, 1.5, 2e-4) == pytest.approx(base * factor**2, rel=1e-13)
    assert majorana_rate(RB87 * factor, MU_B, 1.5, 2e-4) == pytest.approx(base / factor, rel=1e-13)
    assert majorana_rate(RB87, MU_B, 1.5, 2e-4, chi=MAJORANA_CHI * factor) == pytest.approx(base * factor,
                                                                                           rel=1e-13)


def test_background_rate_by_hand() -> None:
    """N2 at 1e-8 mbar = 1e-6 Pa, 295 K: n = 1e-6 / (1.380649e-23 * 295) = 2.45524e14 /m^3;
    <v> = sqrt(8 k T / (pi m)) = 472.188 m/s (m = 4.65173e-26 kg); with sigma = 9e-18 m^2
    the rate is 1.04340 /s, a lifetime of 0.958 s (the ~1 s at 1e-8 mbar rule of thumb,
    common practice, no source)."""
    assert BACKGROUND_CROSS_SECTION == 9e-18
    assert background_gas_rate(1e-6) == pytest.approx(1.04340, rel=1e-4)
    assert background_gas_rate(1e-6, 295.0, 9e-18, gas_mass=N2) == pytest.approx(1.04340, rel=1e-4)


def test_background_mean_speed_against_scipy_maxwell() -> None:
    """The mean relative speed is the mean of the Maxwell speed distribution with
    scale sqrt(k T / m) (scipy.stats.maxwell computes it its own way)."""
    t, m, p, sigma = 77.0, 2.016 * AMU, 3e-7, 4e-19
    speed = float(maxwell.mean(scale=math.sqrt(K_B * t / m)))
    expected = p / (K_B * t) * sigma * speed
    assert background_gas_rate(p, t, sigma, gas_mass=m) == pytest.approx(expected, rel=1e-12)


def test_background_rate_is_linear_in_pressure_and_cross_section() -> None:
    base = background_gas_rate(1e-7)
    assert background_gas_rate(4e-7) == pytest.approx(4 * base, rel=1e-14)
    assert background_gas_rate(1e-7, cross_section=3 * BACKGROUND_CROSS_SECTION) == pytest.approx(3 * base,
                                                                                                 rel=1e-14)


def test_hold_survival() -> None:
    assert hold_survival(2.0, 0.1, 0.4) == pytest.approx(math.exp(-1.0), rel=1e-15)
    assert hold_survival(5.0) == 1.0
    assert hold_survival(0.0, 3.0) == 1.0
    times = np.array([0.0, 1.0, 2.0])
    np.testing.assert_allclose(hold_survival(times, 0.5), np.exp(-0.5 * times), rtol=1e-15)
    majorana = majorana_rate(RB87, MU_B / 2, 1.0, 1e-4)
    gas = background_gas_rate(1e-6)
    assert hold_survival(1.0, majorana, gas) == pytest.approx(math.exp(-(1.3188e-3 + 1.04340)), rel=1e-4)


@pytest.mark.parametrize(
    "call, match",
    [
        (lambda: majorana_rate(0.0, MU_B, 1.0, 1e-4), "mass"),
        (lambda: majorana_rate(RB87, -MU_B, 1.0, 1e-4), "moment"),
        (lambda: majorana_rate(RB87, MU_B, 0.0, 1e-4), "gradient"),
        (lambda: majorana_rate(RB87, MU_B, 1.0, 0.0), "temperature"),
        (lambda: majorana_rate(RB87, MU_B, 1.0, 1e-4, chi=0.0), "chi"),
        (lambda: background_gas_rate(0.0), "pressure"),
        (lambda: background_gas_rate(1e-6, -1.0), "temperature"),
        (lambda: background_gas_rate(1e-6, cross_section=0.0), "cross_section"),
        (lambda: background_gas_rate(1e-6, gas_mass=0.0), "gas_mass"),
        (lambda: hold_survival(-1.0, 0.1), "time"),
        (lambda: hold_survival(1.0, -0.1), "rates"),
        (lambda: hold_survival(float("nan"), 0.1), "time"),
    ],
)
def test_bad_inputs(call: object, match: str) -> None:
    with pytest.raises(TiltwellError, match=match):
        call()  # type: ignore[operator]
