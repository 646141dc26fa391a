"""Layer 4, the ``tiltwell`` command line (also ``python -m tiltwell``); see :mod:`.commands`."""

from ..workflows.demo import DEMO_SCENARIO
from .commands import main, quadrupole_summary

__all__ = ["DEMO_SCENARIO", "main", "quadrupole_summary"]
