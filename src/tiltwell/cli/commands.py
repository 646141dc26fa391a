"""The ``tiltwell`` command line.

``tiltwell run FILE [--json]`` computes a scenario; ``tiltwell sweep FILE ...`` writes a
trade-off table as CSV; ``tiltwell demo --out DIR`` writes the invented demo scenario and
runs it; ``tiltwell figures FILE --out DIR [--formats pdf,svg,png]`` writes a scenario's
figures; ``tiltwell keys`` lists every scenario key with unit and range;
``tiltwell species [NAME]`` lists the catalogue or shows one species;
``tiltwell quadrupole SPECIES --gradient G --max-field B --deceleration A [--json]``
gives the acceptance of an ideal quadrupole trap of finite depth, a first estimate;
``tiltwell coils FILE [--json] [--csv FILE] [--track N] [--figures DIR]`` sizes the
scenario's coil row (``[coils]``), writes its current waveform table, tracks N particles of
the beam through the row and through its rigid twin, and draws it.
Errors print one line and exit with status 2, never a traceback.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from collections.abc import Sequence
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

from ..workflows import scenario as scenario_module
from .._base.files import atomic_write_text

from .._base.validation import TiltwellError, as_scalar
from ..wells.acceptance import trap_acceptance
from ..physics.constants import ATOMIC_MASS, BOHR_MAGNETON, millikelvin
from ..physics.fields import IdealQuadrupole
from ..workflows.report import build, summarise, timing
from ..physics.species import catalogue, species
from ..workflows.sweep import sweep, sweep_csv
from ..workflows.demo import DEMO_SCENARIO
from ..wells.traps import Trap


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


def _number(summary: dict[str, object], key: str) -> float:
    """A summary value as a float (NaN where it is missing or None)."""
    value = summary.get(key)
    return float(value) if isinstance(value, (int, float)) else float("nan")


def _print_acceptances(summary: dict[str, object], width: int) -> None:
    rows = [
        ("depth (axis)", f"{millikelvin(_number(summary, 'depth')):.4g} mK"),
        ("longitudinal acceptance", f"{_number(summary, 'longitudinal_acceptance') * 1e3:.4g} mm*m/s"),
        ("transverse acceptance", f"{_number(summary, 'transverse_acceptance') * 1e3:.4g} mm*m/s"),
        ("6-D acceptance", f"{_number(summary, 'acceptance_6d') * 1e9:.4g} (mm*m/s)^3"),
    ]
    for label, value in rows:
        print(f"  {label:{width}s} {value}")


def _print_quadrupole(summary: dict[str, object]) -> None:
    print(f"{summary['species']} in an ideal quadrupole, {_number(summary, 'gradient'):g} T/m, depth cut at "
          f"{_number(summary, 'max_field'):g} T, decelerating at {_number(summary, 'deceleration'):g} m/s^2")
    print(f"  critical deceleration   {_number(summary, 'critical_deceleration'):.4g} m/s^2")
    if not summary["bound"]:
        print("  no bound well at this deceleration")
        return
    _print_acceptances(summary, 23)


def _print_run(summary: dict[str, object]) -> None:
    def number(key: str) -> float:
        return _number(summary, key)

    print(f"{summary['species']}: {number('initial_velocity'):.1f} -> {number('final_velocity'):.1f} m/s at "
          f"{number('deceleration'):.4g} m/s^2 over {number('length'):.3g} m in {number('duration') * 1e3:.3g} ms "
          f"(critical {number('critical_deceleration'):.4g} m/s^2)")
    _print_acceptances(summary, 24)
    print("  captured fraction")
    print(f"    phase-space overlap    {number('captured_fraction_overlap'):.4g}")
    print(f"    energetic 6-D          {number('captured_fraction_energy'):.4g} "
          f"+- {number('captured_fraction_energy_error'):.2g}")
    print(f"    trajectories           {number('captured_fraction_mc'):.4g} "
          f"+- {number('captured_fraction_mc_error'):.2g}  ({int(number('mc_particles'))} particles)")
    if "coils" in summary:
        print(f"  coils                    {int(number('coils'))}")
        print(f"  {summary['caution']}")


def _run(path: str, as_json: bool, progress: bool, timing_path: str | None) -> None:
    scenario = scenario_module.load(path)
    if timing_path is not None:
        table = timing(scenario, build(scenario).schedule)
        if table is None:
            raise TiltwellError("--timing needs [deceleration] pitch [m] and peak_current [A] in the scenario")
        table.to_csv(timing_path)
    summary = summarise(scenario, progress=progress)
    if as_json:
        print(json.dumps(summary))
    else:
        _print_run(summary)


def _sweep(arguments: argparse.Namespace) -> None:
    scenario = scenario_module.load(arguments.file)
    values = np.linspace(arguments.start, arguments.stop, arguments.points)
    executor = ProcessPoolExecutor(arguments.workers) if arguments.workers > 1 else None
    try:
        keyword = "lengths" if arguments.lengths else "decelerations"
        rows = sweep(scenario, **{keyword: values}, executor=executor, progress=not arguments.quiet)
    finally:
        if executor is not None:
            executor.shutdown()
    text = sweep_csv(rows, arguments.out)
    if arguments.out is None:
        print(text, end="")


def _demo(out: str, as_json: bool) -> None:
    folder = Path(out)
    folder.mkdir(parents=True, exist_ok=True)
    demo = scenario_module.loads(DEMO_SCENARIO.read_text(encoding="utf-8"))
    path = scenario_module.save(demo, folder / "demo.toml")
    summary = summarise(demo)
    atomic_write_text(folder / "demo-summary.json", json.dumps(summary, indent=2) + "\n")
    if as_json:
        print(json.dumps(summary))
    else:
        print(f"wrote {path} and {folder / 'demo-summary.json'}")
        _print_run(summary)


def _figures(arguments: argparse.Namespace) -> None:
    from ..figures import scenario_figures  # matplotlib is loaded only for this command

    scenario = scenario_module.load(arguments.file)
    formats = tuple(part.strip() for part in arguments.formats.split(","))
    for path in scenario_figures(scenario, arguments.out, formats=formats, width=arguments.width,
                                 height=arguments.height, dpi=arguments.dpi):
        print(f"wrote {path}")


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="tiltwell", description=__doc__.splitlines()[0])
    commands = parser.add_subparsers(dest="command", required=True)
    run = commands.add_parser("run", help="compute a scenario file")
    run.add_argument("file")
    run.add_argument("--json", action="store_true", help="print one JSON object (SI units)")
    run.add_argument("--progress", action="store_true", help="show a progress bar for the trajectories")
    run.add_argument("--timing", metavar="CSV", help="also write the coil timing table (needs pitch, peak_current)")
    sweeping = commands.add_parser("sweep", help="trade-off table over decelerations (or lengths), as CSV")
    sweeping.add_argument("file")
    sweeping.add_argument("--start", type=float, required=True, help="first deceleration [m/s^2] (or length [m])")
    sweeping.add_argument("--stop", type=float, required=True, help="last deceleration [m/s^2] (or length [m])")
    sweeping.add_argument("--points", type=int, default=11, help="number of points, default 11")
    sweeping.add_argument("--lengths", action="store_true", help="sweep the length [m] instead")
    sweeping.add_argument("--out", help="CSV file to write (default: standard output)")
    sweeping.add_argument("--workers", type=int, default=1, help="processes to use, default 1")
    sweeping.add_argument("--quiet", action="store_true", help="no progress bar")
    demo = commands.add_parser("demo", help="write the invented demo scenario and run it")
    demo.add_argument("--out", required=True, help="folder for the demo files")
    demo.add_argument("--json", action="store_true", help="print the summary as one JSON object")
    drawing = commands.add_parser("figures", help="write a scenario's figures (PDF, SVG, PNG) for proposals")
    drawing.add_argument("file")
    drawing.add_argument("--out", required=True, help="folder for the figures (created if missing)")
    drawing.add_argument("--formats", default="pdf,svg,png", help="comma-separated, from pdf, svg, png; default all")
    drawing.add_argument("--width", type=float, default=6.0, help="figure width [in], default 6.0")
    drawing.add_argument("--height", type=float, default=4.0, help="figure height [in], default 4.0")
    drawing.add_argument("--dpi", type=float, default=300.0, help="resolution [1/in], default 300")
    commands.add_parser("keys", help="every scenario key with unit, range and meaning")
    listing = commands.add_parser("species", help="list the species catalogue or show one species")
    listing.add_argument("name", nargs="?")
    quad = commands.add_parser("quadrupole", help="acceptance of an ideal quadrupole of finite depth")
    quad.add_argument("species")
    quad.add_argument("--gradient", type=float, required=True, help="axial gradient [T/m]")
    quad.add_argument("--max-field", type=float, required=True, help="field where the depth is cut [T]")
    quad.add_argument("--deceleration", type=float, default=0.0, help="[m/s^2], default 0")
    quad.add_argument("--json", action="store_true", help="print one JSON object")
    row = commands.add_parser("coils", help="size the scenario's coil row ([coils]) and write its waveforms")
    row.add_argument("file")
    row.add_argument("--json", action="store_true", help="print one JSON object (SI units)")
    row.add_argument("--csv", metavar="FILE", help="write the current waveform of every coil (with cautions)")
    row.add_argument("--track", type=int, metavar="N", help="track N particles of the beam through the coil row "
                     "and through its rigid twin (slow: minutes for 1e5)")
    row.add_argument("--figures", metavar="DIR", help="write the coil figures (PNG) to this folder")
    row.add_argument("--progress", action="store_true", help="progress bars while tracking")
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``tiltwell`` console script; returns the exit status."""
    arguments = _parser().parse_args(argv)
    try:
        if arguments.command == "run":
            _run(arguments.file, arguments.json, arguments.progress, arguments.timing)
        elif arguments.command == "sweep":
            _sweep(arguments)
        elif arguments.command == "demo":
            _demo(arguments.out, arguments.json)
        elif arguments.command == "figures":
            _figures(arguments)
        elif arguments.command == "keys":
            print(scenario_module.describe())
        elif arguments.command == "species":
            _print_species(arguments.name)
        elif arguments.command == "coils":
            from .coils import coils_command  # the coil-row modules load only for this command

            coils_command(arguments)
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
    except OSError as error:
        print(f"tiltwell: error: {error.filename or ''}: {error.strerror}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into a reader that stopped early (e.g. head)
        sys.stdout = open(os.devnull, "w")  # noqa: SIM115 - silence the flush at exit
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
