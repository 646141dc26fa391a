"""The grammar of the ``tiltwell`` command line: its subcommands, arguments and help texts
(:func:`build_parser`); :mod:`.commands` runs what it parses."""

from __future__ import annotations

import argparse

from .._base.version import VERSION

__all__ = ["DESCRIPTION", "EPILOG", "MAX_SWEEP_POINTS", "build_parser"]

#: Most points ``tiltwell sweep --points`` accepts (each point is a whole scenario run).
MAX_SWEEP_POINTS = 100_000

#: What ``tiltwell --help`` says the tool is for.
DESCRIPTION = """\
tiltwell: how hard can a moving magnetic trap decelerate a beam of paramagnetic atoms or
molecules and still keep them? From a scenario file (TOML: species, trap, beam source,
deceleration, simulation, optional coil row) it computes the longitudinal, transverse and
6-D acceptance of the tilted trap, the fraction of the beam captured and kept (phase-space
overlap, energetic 6-D count, trajectories), trade-off sweeps, design searches under the
hardware limits, the coil row's currents and figures for proposals. SI units throughout."""

#: Examples under the subcommand list of ``tiltwell --help``.
EPILOG = """\
examples:
  tiltwell demo --out demo                  write the invented demo scenario and run it
  tiltwell run demo/demo.toml --json        one JSON object of SI numbers
  tiltwell keys                             every scenario key with unit and range
  tiltwell figures demo/demo.toml --out demo/figures
  tiltwell search demo/demo.toml --vary deceleration.length=2:4:5 --out demo/search

Errors print one line and exit with status 2. `python -m tiltwell` is the same command."""


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of ``tiltwell`` with every subcommand."""
    parser = argparse.ArgumentParser(prog="tiltwell", description=DESCRIPTION, epilog=EPILOG,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action="version", version=f"tiltwell {VERSION}",
                        help="print the version of tiltwell and exit")
    commands = parser.add_subparsers(dest="command", required=True, title="commands", metavar="COMMAND")
    run = commands.add_parser("run", help="compute a scenario file: acceptances and captured fractions",
                              description="Compute a scenario: acceptances, the three captured-fraction "
                                          "estimates, the schedule and (with a pitch) the coil timing.")
    run.add_argument("file", help="scenario file (TOML; `tiltwell keys` lists its keys)")
    run.add_argument("--json", action="store_true", help="print one JSON object (SI units)")
    run.add_argument("--progress", action="store_true", help="show a progress bar for the trajectories")
    run.add_argument("--timing", metavar="CSV", help="also write the coil timing table (needs pitch, peak_current)")
    run.add_argument("--trace", metavar="CSV", help="also write the predicted time-of-flight traces at the "
                     "[detector] (free beam and decelerated packet per time bin)")
    sweeping = commands.add_parser("sweep", help="trade-off table over decelerations (or lengths), as CSV",
                                   description="Run a scenario at equally spaced decelerations (or lengths) "
                                               "and write one CSV row per point.")
    sweeping.add_argument("file", help="scenario file (TOML) whose deceleration (or length) is varied")
    sweeping.add_argument("--start", type=float, required=True, help="first deceleration [m/s^2] (or length [m])")
    sweeping.add_argument("--stop", type=float, required=True, help="last deceleration [m/s^2] (or length [m])")
    sweeping.add_argument("--points", type=int, default=11,
                          help=f"number of points, 1 to {MAX_SWEEP_POINTS}, default 11")
    sweeping.add_argument("--lengths", action="store_true", help="sweep the length [m] instead")
    sweeping.add_argument("--out", help="CSV file to write (default: standard output)")
    sweeping.add_argument("--workers", type=int, default=1, help="processes to use, at most the cores; default 1")
    sweeping.add_argument("--quiet", action="store_true", help="no progress bar")
    looking = commands.add_parser("search", help="design search over several keys, or the best design under limits",
                                  description="Vary scenario keys together over a grid, a list or a space-filling "
                                              "sample; every point a whole summary with its hardware verdicts; or, "
                                              "with --optimise, find the best design within the limits. Results "
                                              "are kept point by point: the same command resumes a stopped search.")
    looking.add_argument("file", help="scenario file (TOML)")
    looking.add_argument("--vary", action="append", required=True, metavar="KEY=LOW:HIGH[:N]",
                         help="a varied key, section.key=LOW:HIGH[:N][:log] (N points: a grid) or section.key=A,B,C "
                              "(a list); repeat for each key")
    looking.add_argument("--sample", type=int, metavar="N", help="N space-filling points over the ranges instead of a grid")
    looking.add_argument("--method", choices=("lhs", "sobol"), default="lhs",
                         help="sample: Latin hypercube (default) or Sobol' (scipy.stats.qmc)")
    looking.add_argument("--seed", type=int, default=0, help="seed of the sample and of the optimiser, default 0")
    looking.add_argument("--max-length", type=float, metavar="M", help="device-length limit [m]")
    looking.add_argument("--optimise", metavar="FIGURE", help="maximise this column (slow_particles, "
                         "captured_fraction_energy, ...) within the limits instead of a search")
    looking.add_argument("--out", required=True, help="folder for the results (created if missing)")
    looking.add_argument("--workers", type=int, default=1, help="processes to use, at most the cores; default 1")
    looking.add_argument("--json", action="store_true", help="print one JSON object")
    looking.add_argument("--quiet", action="store_true", help="no progress bar")
    demo = commands.add_parser("demo", help="write the invented demo scenario and run it",
                               description="Write the invented demo scenario and its summary to a folder.")
    demo.add_argument("--out", required=True, help="folder for the demo files")
    demo.add_argument("--json", action="store_true", help="print the summary as one JSON object")
    drawing = commands.add_parser("figures", help="write a scenario's figures (PDF, SVG, PNG) for proposals",
                                  description="Compute a scenario and write each of its figures in each format.")
    drawing.add_argument("file", help="scenario file (TOML) to draw")
    drawing.add_argument("--out", required=True, help="folder for the figures (created if missing)")
    drawing.add_argument("--formats", default="pdf,svg,png", help="comma-separated, from pdf, svg, png; default all")
    drawing.add_argument("--width", type=float, default=6.0, help="figure width [in], default 6.0")
    drawing.add_argument("--height", type=float, default=4.0, help="figure height [in], default 4.0")
    drawing.add_argument("--dpi", type=float, default=300.0, help="resolution [1/in], default 300")
    drawing.add_argument("--draw-caution", action="store_true",
                         help="also draw the electrical caution on the coil-current figure (it is in the files' "
                              "metadata and printed here either way)")
    commands.add_parser("keys", help="every scenario key with unit, range and meaning",
                        description="List every scenario key with its unit, range and meaning.")
    listing = commands.add_parser("species", help="list the species catalogue or show one species",
                                  description="List the species catalogue (mass, moment, state) or show one.")
    listing.add_argument("name", nargs="?", help="a catalogue name (e.g. OH); omitted: list them all")
    quad = commands.add_parser("quadrupole", help="acceptance of an ideal quadrupole of finite depth",
                               description="Acceptance of a species in an ideal quadrupole trap whose depth is "
                                           "cut at a field, decelerating: a first estimate without a scenario.")
    quad.add_argument("species", help="a catalogue name (`tiltwell species` lists them)")
    quad.add_argument("--gradient", type=float, required=True, help="axial gradient [T/m]")
    quad.add_argument("--max-field", type=float, required=True, help="field where the depth is cut [T]")
    quad.add_argument("--deceleration", type=float, default=0.0, help="[m/s^2], default 0")
    quad.add_argument("--json", action="store_true", help="print one JSON object")
    row = commands.add_parser("coils", help="size the scenario's coil row ([coils]) and write its waveforms",
                              description="Size the scenario's coil row: currents, the trap across one pitch, "
                                          "hardware estimates with their cautions; optionally track the beam "
                                          "through the row and through its rigid twin.")
    row.add_argument("file", help="scenario file (TOML) with a [coils] section")
    row.add_argument("--json", action="store_true", help="print one JSON object (SI units)")
    row.add_argument("--csv", metavar="FILE", help="write the current waveform of every coil (with cautions)")
    row.add_argument("--track", type=int, metavar="N", help="track N particles of the beam through the coil row "
                     "and through its rigid twin (slow: minutes for 1e5)")
    row.add_argument("--figures", metavar="DIR", help="write the coil figures (PNG) to this folder")
    row.add_argument("--progress", action="store_true", help="progress bars while tracking")
    fitting = commands.add_parser("calibrate", help="fit measured free-beam traces: speed, spread, valve delay",
                                  description="Fit measured free-beam time-of-flight traces (CSV: time [s], signal; "
                                              "# comments) for the beam's velocity, relative spread, the valve's "
                                              "time offset, and a scale and background per trace.")
    fitting.add_argument("file", help="scenario file (TOML); its [beam] valve_open_time and [detector] distance")
    fitting.add_argument("--trace", action="append", required=True, metavar="CSV",
                         help="a measured trace (repeat for traces at several distances)")
    fitting.add_argument("--distance", action="append", type=float, metavar="D",
                         help="detector distance [m] of each --trace, once per --trace in order "
                              "(default: [detector] distance for all)")
    fitting.add_argument("--fix", action="append", metavar="NAME=VALUE",
                         help="hold a parameter (velocity, relative_spread, time_offset, scale, background), SI")
    fitting.add_argument("--signal", choices=("counts", "analog"),
                         help="likelihood: Poisson counts or Gaussian analog (default: counts when all "
                              "samples are non-negative integers)")
    fitting.add_argument("--json", action="store_true", help="print one JSON object (SI units)")
    fitting.add_argument("--write", metavar="TOML", help="write the scenario with the fitted beam values")
    fitting.add_argument("--force", action="store_true", help="allow --write over the input scenario")
    fitting.add_argument("--figure", metavar="FILE", help="draw data, fit and residuals (PDF, SVG or PNG)")
    return parser
