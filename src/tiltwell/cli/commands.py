"""The ``tiltwell`` command line.

``tiltwell run FILE [--json] [--trace CSV]`` computes a scenario (and writes the predicted
time-of-flight traces at its ``[detector]``); ``tiltwell sweep FILE ...`` writes a
trade-off table as CSV; ``tiltwell demo --out DIR`` writes the invented demo scenario and
runs it; ``tiltwell figures FILE --out DIR [--formats pdf,svg,png]`` writes a scenario's
figures; ``tiltwell keys`` lists every scenario key with unit and range;
``tiltwell species [NAME]`` lists the catalogue or shows one species;
``tiltwell quadrupole SPECIES --gradient G --max-field B --deceleration A [--json]``
gives the acceptance of an ideal quadrupole trap of finite depth, a first estimate;
``tiltwell coils FILE [--json] [--csv FILE] [--track N] [--figures DIR]`` sizes the
scenario's coil row (``[coils]``), writes its current waveform table, tracks N particles of
the beam through the row and through its rigid twin, and draws it.
``tiltwell calibrate FILE --trace CSV ...`` fits measured free-beam traces (:mod:`.calibrate`);
``tiltwell search FILE --vary KEY=LOW:HIGH[:N] ... --out DIR`` runs a design search or, with
``--optimise FIGURE``, finds the best design under the limits (:mod:`.search`).
Errors print one line and exit with status 2, never a traceback; Ctrl-C prints one line
and exits with status 130; output piped into a reader that stops early (``tiltwell keys |
head -1``) ends quietly with status 0. An output that is an input (or another output) is
refused before anything is computed (:mod:`.paths`); outputs are written after the
computation succeeded.
``tiltwell --version`` prints the version; the grammar is :mod:`.parser`.
"""

from __future__ import annotations

import argparse
import json
import os
import signal
import sys
from collections.abc import Callable, Sequence
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path
from typing import Any

import numpy as np

from ..workflows import scenario as scenario_module
from .._base.files import atomic_write_text

from .._base.validation import TiltwellError, as_scalar
from ..wells.acceptance import trap_acceptance
from ..physics.hardware import ELECTRICAL_CAUTION
from ..physics.constants import ATOMIC_MASS, BOHR_MAGNETON, millikelvin
from ..physics.fields import IdealQuadrupole
from ..workflows.report import summarise, summarise_parts, timing
from ..physics.species import catalogue, species
from ..workflows.sweep import sweep, sweep_csv
from ..workflows.demo import DEMO_SCENARIO
from ..wells.traps import Trap
from .calibrate import run_calibrate
from .parser import MAX_SWEEP_POINTS, build_parser
from .paths import refuse_clashes, refuse_in_folder


__all__ = ["INTERRUPTED", "main", "quadrupole_summary"]

#: Exit status after Ctrl-C (128 + SIGINT, as shells report it; the same as :mod:`.search`).
INTERRUPTED = 130


def quadrupole_summary(name: str, gradient: float, max_field: float, deceleration: float) -> dict[str, object]:
    """Acceptance of ``name`` in an ideal quadrupole (axial gradient [T/m], field cap [T])
    decelerating at [m/s^2], as a JSON-ready dict of SI numbers with a ``units`` map.

    The trap region is |z| < 2 B_max / B' axially and |x|, |y| < 4 B_max / B' radially,
    twice the extent of the truncation surface in each direction.
    """
    particle = species(name)
    # the ranges of the scenario keys that hold the same numbers ([trap] gradient, max_field)
    gradient = scenario_module.key_spec("trap.gradient").convert("--gradient", gradient)
    max_field = scenario_module.key_spec("trap.max_field").convert("--max-field", max_field)
    deceleration = as_scalar(deceleration, "--deceleration", "m/s^2", low=-1e9, high=1e9)
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
    print(f"  trap model               {summary['trap_model']}")
    if summary.get("bound") is False:
        print(f"  the well vanishes above a_c = {number('critical_deceleration'):.4g} m/s^2; at a = "
              f"{number('deceleration'):.4g} m/s^2 nothing is kept")
    else:
        _print_acceptances(summary, 24)
        if "depth_worst_phase" in summary:
            print(f"  worst phase of the row   depth {millikelvin(number('depth_worst_phase')):.4g} mK, acceptances "
                  f"{number('longitudinal_acceptance_worst_phase') * 1e3:.4g} / "
                  f"{number('transverse_acceptance_worst_phase') * 1e3:.4g} mm*m/s")
        print("  captured fraction")
        print(f"    phase-space overlap    {number('captured_fraction_overlap'):.4g}")
        print(f"    energetic 6-D          {number('captured_fraction_energy'):.4g} "
              f"+- {number('captured_fraction_energy_error'):.2g}")
        if summary.get("captured_fraction_mc") is None:
            print("    trajectories           not tracked ([simulation] track = false)")
        else:
            print(f"    trajectories           {number('captured_fraction_mc'):.4g} "
                  f"+- {number('captured_fraction_mc_error'):.2g}  ({int(number('mc_particles'))} particles)")
    _print_budget(summary)
    if "coils" in summary:
        print(f"  coils                    {int(number('coils'))}")
        print(f"  {summary['caution']}")


def _print_budget(summary: dict[str, Any]) -> None:
    """The yield budget lines of ``tiltwell run`` (keys of :mod:`tiltwell.workflows.yields`)."""
    def number(key: str) -> float:
        return _number(summary, key)

    if summary.get("slow_particles") is None:
        print(f"  in trappable states      {number('trappable_fraction'):.3g} of the particles")
        print("  slow particles per shot  needs [beam] pressure and seed_fraction")
    else:
        print(f"  slow particles per shot  {number('slow_particles'):.3g} (68 %: {number('slow_particles_low'):.3g} "
              f"to {number('slow_particles_high'):.3g})")
        per_pulse = number("particles_per_pulse")
        steps = [("per pulse", per_pulse, "steady free jet over the valve's open time: an upper bound"),
                 ("in trappable states", per_pulse * number("trappable_fraction"), "low-field seekers"),
                 ("reaching the trap", number("reaching_trap"), "into the limiting aperture's cone"),
                 ("captured", number("captured_particles"), summary.get("slow_particles_estimate"))]
        if number("after_spin_flips") != number("captured_particles"):
            loss = 1.0 - number("after_spin_flips") / number("captured_particles")
            steps.append(("after spin flips", number("after_spin_flips"), f"Landau-Zener at the zero: {loss:.2g} lost"))
        if number("hold_survival") != 1.0:
            steps.append(("after the hold", number("slow_particles"), f"survival {number('hold_survival'):.3g}"))
        for label, value, note in steps:
            print(f"    {label:21s} {value:.3g}  ({note})")
        others = ", ".join(f"{name} {value:.3g}" for name, value in summary["slow_particles_by_estimate"].items()
                           if value is not None)
        print(f"    by each estimate      {others}")
        print(f"    error parts           statistical {number('slow_particles_statistical'):.2g}, systematic "
              f"{number('slow_particles_systematic'):.2g} (half the range of the estimates)")
        found = summary.get("uncertainty")
        if found:
            ranked = ", ".join(f"{row['input']} {row['first_order']:.2f}" for row in found["sensitivity"][:3])
            print(f"    most sensitive inputs {ranked} (first-order share of the variance, "
                  f"{found['samples']} samples)")
    if summary.get("final_temperature") is not None:
        axes = ", ".join(f"{t * 1e3:.3g}" for t in summary["final_temperatures"])
        line = f"  final cloud              {number('final_temperature') * 1e3:.3g} mK ({axes} mK in x, y, z)"
        if summary.get("final_density") is not None:
            line += (f", peak density {number('final_density'):.3g} /m^3, phase-space density "
                     f"{number('final_phase_space_density'):.2g} (at switch-on "
                     f"{number('initial_phase_space_density'):.2g})")
        print(line)
    for note in summary.get("yield_notes", []):
        print(f"  note: {note}")


def _run(path: str, as_json: bool, progress: bool, timing_path: str | None, trace_path: str | None = None) -> None:
    refuse_clashes([("the scenario", path)], [("--timing", timing_path), ("--trace", trace_path)])
    scenario = scenario_module.load(path)
    if trace_path is not None and scenario.detector is None:
        raise TiltwellError("--trace needs a [detector] section in the scenario: distance [m] from the nozzle, "
                            "radius [m] (and efficiency, time_bin [s])")
    if timing_path is not None and (scenario.deceleration.pitch is None or scenario.deceleration.peak_current is None):
        raise TiltwellError("--timing needs [deceleration] pitch [m] and peak_current [A] in the scenario")
    summary, built, estimates, budget = summarise_parts(scenario, progress=progress)
    traces = None
    if trace_path is not None:  # from the same estimates and budget as the summary
        from ..workflows.traces import predicted_traces

        traces = predicted_traces(scenario, estimates, built=built, budget=budget)
    if timing_path is not None:  # written only now that the whole computation succeeded
        table = timing(scenario, built.schedule)
        assert table is not None  # pitch and peak_current were checked above
        table.to_csv(timing_path)
    if traces is not None and trace_path is not None:
        traces.to_csv(trace_path)
    if as_json:
        print(json.dumps(summary))
    else:
        _print_run(summary)
    if traces is not None:
        if not as_json:
            packet = "none" if traces.packet_detected is None else f"{traces.packet_detected:.4g}"
            print(f"wrote {trace_path}: detected per shot, free beam {traces.free_detected:.4g}, decelerated packet "
                  f"{packet} ({traces.unit})")


def _sweep(arguments: argparse.Namespace) -> None:
    if not 1 <= arguments.points <= MAX_SWEEP_POINTS:
        raise TiltwellError(f"--points must be in [1, {MAX_SWEEP_POINTS}]; got {arguments.points}")
    cores = os.cpu_count() or 1
    if not 1 <= arguments.workers <= cores:
        raise TiltwellError(f"--workers must be in [1, {cores}] (the cores of this machine); got {arguments.workers}")
    refuse_clashes([("the scenario", arguments.file)], [("--out", arguments.out)])
    scenario = scenario_module.load(arguments.file)
    values = np.linspace(arguments.start, arguments.stop, arguments.points)
    executor = ProcessPoolExecutor(arguments.workers, initializer=_ignore_interrupts) if arguments.workers > 1 else None
    try:
        keyword = "lengths" if arguments.lengths else "decelerations"
        rows = sweep(scenario, **{keyword: values}, executor=executor, progress=not arguments.quiet)
    except KeyboardInterrupt:
        if executor is not None:
            _stop(executor)
        raise
    finally:
        if executor is not None:
            executor.shutdown(cancel_futures=True)
    text = sweep_csv(rows, arguments.out)
    if arguments.out is None:
        print(text, end="")


def _ignore_interrupts() -> None:
    """In a worker process: leave Ctrl-C to the parent, which stops the workers (:func:`_stop`)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def _stop(executor: ProcessPoolExecutor) -> None:
    """Cancel the points not started and end the worker processes now, without waiting for
    the running points (Python 3.14's ``terminate_workers``; before it, the executor's
    ``_processes`` map, the only handle on them the standard library gives)."""
    executor.shutdown(wait=False, cancel_futures=True)
    terminate = getattr(executor, "terminate_workers", None)
    if callable(terminate):
        terminate()
        return
    for process in list((getattr(executor, "_processes", None) or {}).values()):
        process.terminate()


def _demo(out: str, as_json: bool) -> None:
    folder = Path(out)
    if folder.exists() and not folder.is_dir():
        raise TiltwellError(f"--out must be a folder; {out!r} is a file")
    demo = scenario_module.loads(DEMO_SCENARIO.read_text(encoding="utf-8"))
    summary = summarise(demo)  # computed first: a failed or interrupted run writes nothing
    folder.mkdir(parents=True, exist_ok=True)
    path = scenario_module.save(demo, folder / "demo.toml")
    atomic_write_text(folder / "demo-summary.json", json.dumps(summary, indent=2) + "\n")
    if as_json:
        print(json.dumps(summary))
    else:
        print(f"wrote {path} and {folder / 'demo-summary.json'}")
        _print_run(summary)


def _figures(arguments: argparse.Namespace) -> None:
    from .drawings import write_scenario_figures  # matplotlib is loaded only for this command

    formats = tuple(part.strip() for part in arguments.formats.split(","))
    refuse_in_folder("--out", arguments.out, (), {f".{kind.lower()}" for kind in formats},
                     [("the scenario", arguments.file)])
    scenario = scenario_module.load(arguments.file)
    for path in write_scenario_figures(scenario, arguments.out, formats=formats, width=arguments.width,
                                       height=arguments.height, dpi=arguments.dpi, draw_caution=arguments.draw_caution):
        print(f"wrote {path}")
    if scenario.coils is not None:  # the coil-current figure sizes hardware
        print(ELECTRICAL_CAUTION)


def _coils(arguments: argparse.Namespace) -> None:
    from .coils import coils_command  # the coil-row modules load only for this command

    coils_command(arguments)


def _search(arguments: argparse.Namespace) -> None:
    from .search import search_command  # the search modules load only for this command

    search_command(arguments)


def _quadrupole(arguments: argparse.Namespace) -> None:
    summary = quadrupole_summary(arguments.species, arguments.gradient, arguments.max_field, arguments.deceleration)
    if arguments.json:
        print(json.dumps(summary))
    else:
        _print_quadrupole(summary)


#: What each subcommand of :func:`tiltwell.cli.parser.build_parser` runs.
_COMMANDS: dict[str, Callable[[argparse.Namespace], None]] = {
    "run": lambda arguments: _run(arguments.file, arguments.json, arguments.progress, arguments.timing,
                                  arguments.trace),
    "sweep": _sweep,
    "demo": lambda arguments: _demo(arguments.out, arguments.json),
    "figures": _figures,
    "keys": lambda arguments: print(scenario_module.describe()),
    "species": lambda arguments: _print_species(arguments.name),
    "quadrupole": _quadrupole,
    "coils": _coils,
    "calibrate": run_calibrate,
    "search": _search,
}


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``tiltwell`` console script; returns the exit status."""
    arguments = build_parser().parse_args(argv)
    try:
        _COMMANDS[arguments.command](arguments)
        sys.stdout.flush()  # here, so that a reader gone early is met inside this try
    except TiltwellError as error:
        print(f"tiltwell: error: {error}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into a reader that stopped early (e.g. head): not an error
        _silence_stdout()
        return 0
    except OSError as error:
        reason = error.strerror or str(error) or type(error).__name__
        where = f"{error.filename}: " if error.filename not in (None, "") else ""
        print(f"tiltwell: error: {where}{reason}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:  # Ctrl-C: one line, no traceback (tiltwell search says what it kept)
        print("tiltwell: interrupted (Ctrl-C)", file=sys.stderr)
        return INTERRUPTED
    return 0


def _silence_stdout() -> None:
    """Point standard output at the null device, so that the interpreter's final flush of
    what is still buffered does not fail a second time (and report it) on the closed pipe."""
    try:
        descriptor = sys.stdout.fileno()
    except (AttributeError, OSError, ValueError):  # not a real file (e.g. captured by a test): nothing to flush
        return
    null = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(null, descriptor)
    finally:
        os.close(null)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
