"""tiltwell: acceptance of decelerating moving magnetic traps for paramagnetic beams.

The stable core (see DESIGN.md): :func:`separatrix`, :func:`loop_field`,
:func:`acceptance_6d`, :func:`gaussian_fraction`. SI units throughout.

The subpackages are the layers, imports pointing down only: :mod:`._base` (validation,
display, files) and :mod:`.physics` (layer 1); :mod:`.wells`, :mod:`.coils` and
:mod:`.dynamics` (layer 2, the computation); :mod:`.workflows` (layer 3: scenarios,
reports, sweeps, design searches); :mod:`.figures`, :mod:`.explorer` and :mod:`.cli` (layer 4, the views).
"""

from typing import Any

from ._base.validation import TiltwellError
from ._base.version import VERSION
from .physics.beam import Beam, PhasePlane
from .physics.constants import from_millikelvin, millikelvin
from .physics.fields import Coil, CoilSet, IdealQuadrupole, anti_helmholtz, loop_field
from .physics.hardware import ELECTRICAL_CAUTION, HardwareEstimate, hardware_estimate
from .physics.inductance import mutual_inductance
from .physics.jet import FreeJet, cone, free_jet
from .physics.limits import HardwareLimits
from .physics.source import Aperture, Gas, Source, gas, mixture, terminal_velocity
from .physics.species import BreitRabi, LinearZeeman, Species, TabulatedZeeman, catalogue, species
from .physics.states import Populations, ZeemanState, populations, states, trappable_fraction
from .wells.acceptance import (
    AcceptanceCurve,
    TrapAcceptance,
    acceptance_curve,
    longitudinal_acceptance,
    trap_acceptance,
    transverse_acceptance,
)
from .wells.energetic import EnergeticAcceptance, acceptance_6d, energetic_acceptance
from .wells.overlap import energetic_fraction, gaussian_fraction, plane_product_fraction
from .wells.separatrix import Separatrix, separatrix
from .wells.traps import Trap
from .coils.array import CoilArray, CurrentPlan, trap_currents, waveforms
from .coils.drive import DriveLoad, drive_load
from .coils.moving import PhaseScan, moving_trap_phases
from .coils.schedule import CoilTiming, Schedule, arrival_times, coil_timing, constant_deceleration
from .dynamics.capture import CaptureEstimates, capture_estimates
from .dynamics.cloud import CloudStats, cloud_stats
from .dynamics.compare import DeviceComparison, PhaseAveragedField, compare_device
from .dynamics.device import CoilFieldMap, UniformMotion, track_device
from .dynamics.losses import background_gas_rate, hold_survival, majorana_rate
from .dynamics.spinflip import SpinFlips
from .dynamics.tracking import FieldMap, TrackingResult, track
from .workflows import scenario
from .workflows.report import build, summarise
from .workflows.scenario import Scenario
from .workflows.optimise import optimise, pareto_front
from .workflows.search import parse_vary, read_search, search
from .workflows.sweep import sweep
from .workflows.yields import YieldBudget, yield_budget

__version__ = VERSION


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
    "CloudStats",
    "Coil",
    "CoilArray",
    "CoilFieldMap",
    "CoilSet",
    "CoilTiming",
    "CurrentPlan",
    "DeviceComparison",
    "DriveLoad",
    "ELECTRICAL_CAUTION",
    "EnergeticAcceptance",
    "Explorer",
    "FieldMap",
    "FreeJet",
    "Gas",
    "HardwareEstimate",
    "HardwareLimits",
    "IdealQuadrupole",
    "LinearZeeman",
    "PhaseAveragedField",
    "PhasePlane",
    "PhaseScan",
    "Populations",
    "Scenario",
    "Schedule",
    "Separatrix",
    "Source",
    "Species",
    "SpinFlips",
    "TabulatedZeeman",
    "TiltwellError",
    "TrackingResult",
    "Trap",
    "TrapAcceptance",
    "UniformMotion",
    "YieldBudget",
    "ZeemanState",
    "acceptance_6d",
    "acceptance_curve",
    "anti_helmholtz",
    "arrival_times",
    "background_gas_rate",
    "build",
    "capture_estimates",
    "catalogue",
    "cloud_stats",
    "coil_timing",
    "compare_device",
    "cone",
    "constant_deceleration",
    "drive_load",
    "energetic_acceptance",
    "energetic_fraction",
    "explore",
    "free_jet",
    "from_millikelvin",
    "gas",
    "gaussian_fraction",
    "hardware_estimate",
    "hold_survival",
    "longitudinal_acceptance",
    "loop_field",
    "majorana_rate",
    "millikelvin",
    "mixture",
    "moving_trap_phases",
    "mutual_inductance",
    "optimise",
    "pareto_front",
    "parse_vary",
    "plane_product_fraction",
    "populations",
    "read_search",
    "scenario",
    "search",
    "separatrix",
    "species",
    "states",
    "summarise",
    "sweep",
    "terminal_velocity",
    "track",
    "track_device",
    "transverse_acceptance",
    "trap_acceptance",
    "trap_currents",
    "trappable_fraction",
    "waveforms",
    "yield_budget",
]
