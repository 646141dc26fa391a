"""Layer 4, the ``tiltwell`` command line (also ``python -m tiltwell``): the grammar in
:mod:`.parser`, the commands in :mod:`.commands` and :mod:`.coils`, a scenario's figures
in one call in :mod:`.drawings` (loaded only by ``tiltwell figures``: it needs matplotlib)."""

from ..workflows.demo import DEMO_SCENARIO
from .commands import main, quadrupole_summary
from .parser import build_parser

__all__ = ["DEMO_SCENARIO", "build_parser", "main", "quadrupole_summary"]
