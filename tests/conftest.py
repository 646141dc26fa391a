"""What the test files share: the test-run settings, the outside constants several files
check against, and the ``slow`` marker (``make test-fast`` = ``pytest -m "not slow"``)."""

from __future__ import annotations

import math
import os
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest
import scipy.constants as sc

from tiltwell import LinearZeeman, Species

os.environ.setdefault("MPLBACKEND", "Agg")  # before anything can pick a display backend

#: CODATA values from scipy.constants, an outside source for the checks (tiltwell takes its
#: own constants from the same library, so these agree by construction; the tests use them
#: to write closed forms independently of tiltwell's constants module).
MU_B = sc.physical_constants["Bohr magneton"][0]  # J/T
AMU = sc.physical_constants["atomic mass constant"][0]  # kg
K_B = sc.k  # J/K

#: Test data folder (reference tables and scenario files as text).
DATA = Path(__file__).parent / "data"

#: Half widths [m] of the trap box shared by the coil-row tests: inside an 8 mm bore.
COIL_BOX = (0.004, 0.004, 0.006)


@pytest.fixture(autouse=True)
def _close_figures() -> Iterator[None]:
    """Close every matplotlib figure a test left open (only if matplotlib was loaded)."""
    yield
    import sys

    if "matplotlib.pyplot" in sys.modules:
        sys.modules["matplotlib.pyplot"].close("all")


def millikelvin_of(energy: object) -> np.ndarray:
    """J -> mK with CODATA's Boltzmann constant (scipy.constants), independent of tiltwell."""
    return np.asarray(energy) / K_B * 1e3


#: Terminal speed [m/s] of a monatomic carrier from a 300 K nozzle,
#: sqrt(2 gamma / (gamma - 1) k T0 / m) = sqrt(5 k T0 / m) for gamma = 5/3 (Scoles, Atomic
#: and Molecular Beam Methods, vol. 1, ch. 2, from memory), for krypton, 83.798 u (standard
#: atomic weight, from memory): the carrier of the invented demo and of several test scenarios.
KRYPTON_SPEED_300K = math.sqrt(5 * K_B * 300.0 / (83.798 * AMU))

#: An invented test particle: 7 u with a constant moment of one Bohr magneton.
TEST_PARTICLE = Species("test-particle", 7 * AMU, LinearZeeman(MU_B), state="linear 1 mu_B")


class WrappedSource:
    """A field source behind a plain wrapper: its own numbers, but not a type the trackers
    inline or compile, so ``track`` takes the general ``Trap.force`` route (numpy)."""

    def __init__(self, source: object) -> None:
        self.source = source

    def magnitude(self, points: object) -> np.ndarray:
        return self.source.magnitude(points)  # type: ignore[attr-defined, no-any-return]

    def magnitude_gradient(self, points: object) -> np.ndarray:
        return self.source.magnitude_gradient(points)  # type: ignore[attr-defined, no-any-return]

    def field(self, points: object) -> np.ndarray:
        return self.source.field(points)  # type: ignore[attr-defined, no-any-return]
