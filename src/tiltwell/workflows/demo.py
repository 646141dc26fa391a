"""The invented demo scenario shipped with the package (an invented lab, species choice and
coil row; not the parameters of any published experiment)."""

from __future__ import annotations

from pathlib import Path

from .scenario import Scenario, load

__all__ = ["DEMO_SCENARIO", "demo_scenario"]

#: Path of the invented demo scenario file inside the installed package.
DEMO_SCENARIO = Path(__file__).with_name("data") / "demo.toml"


def demo_scenario() -> Scenario:
    """The invented demo scenario, read from :data:`DEMO_SCENARIO`."""
    return load(DEMO_SCENARIO)
