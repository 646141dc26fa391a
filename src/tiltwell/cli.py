"""The ``tiltwell`` command line.

``tiltwell species [NAME]`` lists the catalogue or shows one species;
``tiltwell quadrupole SPECIES --gradient G --max-field B --deceleration A [--json]``
gives the acceptance of an ideal quadrupole trap of finite depth, a first estimate.
Errors print one line and exit with status 2, never a traceback.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from collections.abc import Sequence

from ._validation import TiltwellError, as_scalar
from .acceptance import trap_acceptance
from .constants import ATOMIC_MASS, BOHR_MAGNETON, millikelvin
from .fields import IdealQuadrupole
from .species import catalogue, species
from .traps import Trap

__all__ = ["main", "quadrupole_summary"]


def quadrupole_summary(name: str, gradient: float, max_field: float, deceleration: float) -> dict[str, object]:
    """Acceptance of ``name`` in an ideal quadrupole (axial gradient [T/m], field cap [T])
    decelerating at [m/s^2], as a JSON-ready dict of SI numbers with a ``units`` map.

    The trap region is |z| < 2 B_max / B' axially and |x|, |y| < 4 B_max / B' radially,
    twice the extent of the truncation surface in each direction.
    """
    particle = species(name)
    gradient = as_scalar(gradient, "gradient", "T/m", low=0.0, low_open=True)
    max_field = as_scalar(max_field, "max_field", "T", low=0.0, low_open=True)
    deceleration = as_scalar(deceleration, "deceleration", "m/s^2")
    edge = max_field / gradient
    box = ((-4 * edge, 4 * edge), (-4 * edge, 4 * edge), (-2 * edge, 2 * edge))
    trap = Trap(IdealQuadrupole(gradient, max_field), particle, box)
    result = trap_acceptance(trap, deceleration)
    return {
        "species": particle.name,
        "gradient": gradient,
        "max_field": max_field,
        "deceleration": deceleration,
        "critical_deceleration": trap.critical_deceleration(),
        "bound": result.bound,
        "longitudinal_acceptance": result.longitudinal.area,
        "transverse_acceptance": result.transverse.area,
        "acceptance_6d": result.volume,
        "escape_energy": result.escape_energy if result.bound else None,
        "depth": result.longitudinal.depth,
        "units": {
            "gradient": "T/m",
            "max_field": "T",
            "deceleration": "m/s^2",
            "critical_deceleration": "m/s^2",
            "longitudinal_acceptance": "m*m/s",
            "transverse_acceptance": "m*m/s",
            "acceptance_6d": "(m*m/s)^3",
            "escape_energy": "J",
            "depth": "J",
        },
    }


def _print_species(name: str | None) -> None:
    if name is None:
        for entry in catalogue():
            particle = species(entry)
            print(f"{entry:8s} {particle.mass / ATOMIC_MASS:9.4f} u  "
                  f"{particle.moment / BOHR_MAGNETON:5.3f} mu_B  {particle.state}")
        return
    particle = species(name)
    print(f"{particle.name}: {particle.state}")
    print(f"  mass    {particle.mass:.6e} kg")
    print(f"  moment  {particle.moment / BOHR_MAGNETON:.4f} mu_B (slope at 1 T)")
    print(f"  source  {particle.source}")


def _print_quadrupole(summary: dict[str, object]) -> None:
    def number(key: str) -> float:
        value = summary[key]
        assert isinstance(value, (int, float))
        return float(value)

    print(f"{summary['species']} in an ideal quadrupole, {number('gradient'):g} T/m, depth cut at "
          f"{number('max_field'):g} T, decelerating at {number('deceleration'):g} m/s^2")
    print(f"  critical deceleration   {number('critical_deceleration'):.4g} m/s^2")
    if not summary["bound"]:
        print("  no bound well at this deceleration")
        return
    print(f"  depth (axis)            {millikelvin(number('depth')):.4g} mK")
    print(f"  longitudinal acceptance {number('longitudinal_acceptance') * 1e3:.4g} mm*m/s")
    print(f"  transverse acceptance   {number('transverse_acceptance') * 1e3:.4g} mm*m/s")
    print(f"  6-D acceptance          {number('acceptance_6d') * 1e9:.4g} (mm*m/s)^3")


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="tiltwell", description=__doc__.splitlines()[0])
    commands = parser.add_subparsers(dest="command", required=True)
    listing = commands.add_parser("species", help="list the species catalogue or show one species")
    listing.add_argument("name", nargs="?")
    quad = commands.add_parser("quadrupole", help="acceptance of an ideal quadrupole of finite depth")
    quad.add_argument("species")
    quad.add_argument("--gradient", type=float, required=True, help="axial gradient [T/m]")
    quad.add_argument("--max-field", type=float, required=True, help="field where the depth is cut [T]")
    quad.add_argument("--deceleration", type=float, default=0.0, help="[m/s^2], default 0")
    quad.add_argument("--json", action="store_true", help="print one JSON object")
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``tiltwell`` console script; returns the exit status."""
    arguments = _parser().parse_args(argv)
    try:
        if arguments.command == "species":
            _print_species(arguments.name)
        else:
            summary = quadrupole_summary(
                arguments.species, arguments.gradient, arguments.max_field, arguments.deceleration
            )
            if arguments.json:
                print(json.dumps(summary))
            else:
                _print_quadrupole(summary)
    except TiltwellError as error:
        print(f"tiltwell: error: {error}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into a reader that stopped early (e.g. head)
        sys.stdout = open(os.devnull, "w")  # noqa: SIM115 - silence the flush at exit
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
