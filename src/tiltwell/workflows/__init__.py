"""Layer 3, workflows: scenario files (TOML <-> dataclasses), whole-scenario and coil-row
reports, sweeps over any executor, and the invented demo scenario. Imports layers 1-2 only."""
