"""tiltwell: acceptance of decelerating moving magnetic traps for paramagnetic beams.

The stable core (see DESIGN.md): :func:`separatrix`, :func:`loop_field`,
:func:`acceptance_6d`, :func:`gaussian_fraction`. SI units throughout.
"""

from typing import Any

from ._validation import TiltwellError
from .acceptance import (
    AcceptanceCurve,
    TrapAcceptance,
    acceptance_curve,
    longitudinal_acceptance,
    trap_acceptance,
    transverse_acceptance,
)
from .constants import from_millikelvin, millikelvin
from .beam import Beam, PhasePlane
from .capture import CaptureEstimates, capture_estimates
from .coilarray import CoilArray, CurrentPlan, trap_currents, waveforms
from .device import CoilFieldMap, UniformMotion, track_device
from .devicecompare import DeviceComparison, PhaseAveragedField, compare_device
from .energetic import EnergeticAcceptance, acceptance_6d, energetic_acceptance
from .fields import CoilSet, Coil, IdealQuadrupole, anti_helmholtz, loop_field
from .hardware import ELECTRICAL_CAUTION, HardwareEstimate, hardware_estimate
from .moving import PhaseScan, moving_trap_phases
from .overlap import energetic_fraction, gaussian_fraction, plane_product_fraction
from .report import build, summarise
from .scenario import Scenario
from .schedule import CoilTiming, Schedule, arrival_times, coil_timing, constant_deceleration
from .separatrix import Separatrix, separatrix
from .source import Aperture, Gas, Source, gas, mixture, terminal_velocity
from .species import BreitRabi, LinearZeeman, Species, TabulatedZeeman, catalogue, species
from .sweep import sweep
from .tracking import FieldMap, TrackingResult, track
from .traps import Trap

__version__ = "0.1.0"


def __getattr__(name: str) -> Any:
    """The explorer (ipywidgets + Bokeh) is imported on first use, so scripts and the
    command line start without loading the notebook stack."""
    if name in ("explore", "Explorer"):
        from . import explorer

        return getattr(explorer, name)
    raise AttributeError(f"module 'tiltwell' has no attribute {name!r}")

__all__ = [
    "AcceptanceCurve",
    "Aperture",
    "Beam",
    "BreitRabi",
    "CaptureEstimates",
    "Coil",
    "CoilArray",
    "CoilFieldMap",
    "CoilSet",
    "CoilTiming",
    "CurrentPlan",
    "DeviceComparison",
    "ELECTRICAL_CAUTION",
    "EnergeticAcceptance",
    "Explorer",
    "FieldMap",
    "Gas",
    "HardwareEstimate",
    "IdealQuadrupole",
    "LinearZeeman",
    "PhaseAveragedField",
    "PhasePlane",
    "PhaseScan",
    "Scenario",
    "Schedule",
    "Separatrix",
    "Source",
    "Species",
    "TabulatedZeeman",
    "TiltwellError",
    "TrackingResult",
    "Trap",
    "TrapAcceptance",
    "UniformMotion",
    "acceptance_6d",
    "acceptance_curve",
    "anti_helmholtz",
    "arrival_times",
    "build",
    "capture_estimates",
    "catalogue",
    "coil_timing",
    "compare_device",
    "constant_deceleration",
    "energetic_acceptance",
    "energetic_fraction",
    "explore",
    "from_millikelvin",
    "gas",
    "gaussian_fraction",
    "hardware_estimate",
    "longitudinal_acceptance",
    "loop_field",
    "millikelvin",
    "mixture",
    "moving_trap_phases",
    "plane_product_fraction",
    "separatrix",
    "species",
    "summarise",
    "sweep",
    "terminal_velocity",
    "track",
    "track_device",
    "transverse_acceptance",
    "trap_acceptance",
    "trap_currents",
    "waveforms",
]
