"""tiltwell: acceptance of decelerating moving magnetic traps for paramagnetic beams.

The stable core (see DESIGN.md): :func:`separatrix`, :func:`loop_field`,
:func:`acceptance_6d`, :func:`gaussian_fraction`. SI units throughout.
"""

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
from .energetic import EnergeticAcceptance, acceptance_6d, energetic_acceptance
from .fields import CoilSet, Coil, IdealQuadrupole, anti_helmholtz, loop_field
from .overlap import gaussian_fraction
from .separatrix import Separatrix, separatrix
from .species import BreitRabi, LinearZeeman, Species, TabulatedZeeman, catalogue, species
from .traps import Trap

__version__ = "0.1.0"

__all__ = [
    "AcceptanceCurve",
    "BreitRabi",
    "Coil",
    "CoilSet",
    "EnergeticAcceptance",
    "IdealQuadrupole",
    "LinearZeeman",
    "Separatrix",
    "Species",
    "TabulatedZeeman",
    "TiltwellError",
    "Trap",
    "TrapAcceptance",
    "acceptance_6d",
    "acceptance_curve",
    "anti_helmholtz",
    "catalogue",
    "energetic_acceptance",
    "from_millikelvin",
    "gaussian_fraction",
    "longitudinal_acceptance",
    "loop_field",
    "millikelvin",
    "separatrix",
    "species",
    "trap_acceptance",
    "transverse_acceptance",
]
