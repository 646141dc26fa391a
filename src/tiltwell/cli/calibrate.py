"""``tiltwell calibrate SCENARIO --trace CSV [--trace CSV ...] [--distance D ...] [--fix NAME=VALUE ...]
[--signal counts|analog] [--json] [--write FILE [--force]]``: fit measured free-beam traces
(:mod:`tiltwell.workflows.calibration`). Each ``--trace`` is at the scenario's ``[detector]
distance`` unless ``--distance`` is given once per ``--trace``, in the same order."""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from .._base.validation import TiltwellError
from ..workflows import scenario as scenario_module
from ..workflows.calibration import PARAMETERS, Calibration, calibrate, read_trace, write_calibrated
from .paths import refuse_clashes

__all__ = ["run_calibrate"]


def _fixes(items: list[str] | None) -> dict[str, float]:
    out: dict[str, float] = {}
    for item in items or []:
        name, sep, value = item.partition("=")
        if not sep or name.strip() not in PARAMETERS:
            raise TiltwellError(f"--fix must be NAME=VALUE with NAME one of {', '.join(PARAMETERS)}; got {item!r}")
        try:
            out[name.strip()] = float(value)
        except ValueError:
            raise TiltwellError(f"--fix {name.strip()} needs a number (SI units); got {value!r}") from None
    return out


def _print(result: Calibration) -> None:
    kind = "Poisson (counts)" if result.counts else "Gaussian (analog, noise from the residuals)"
    print(f"fit of {len(result.paths)} trace(s), {kind} likelihood")
    rows = [("velocity", result.velocity, result.velocity_error, "m/s"),
            ("relative_spread", result.relative_spread, result.relative_spread_error, ""),
            ("time_offset", result.time_offset, result.time_offset_error, "s")]
    for i, path in enumerate(result.paths):
        tag = f"[{i}]" if len(result.paths) > 1 else ""
        rows += [(f"scale{tag}", result.scales[i], result.scale_errors[i], f"signal per shot ({path})"),
                 (f"background{tag}", result.backgrounds[i], result.background_errors[i], "signal per sample")]
    for name, value, error, unit in rows:
        held = "  (fixed)" if name in result.fixed else ""
        print(f"  {name:<18} {value:.6g} +- {error:.3g} {unit}{held}")
    print(f"  reduced chi-square {result.reduced_chi_square:.4g}")
    print("  correlation matrix: " + " ".join(f"{name:>16}" for name in result.names))
    for name, row in zip(result.names, result.correlation):
        print(f"  {name:>18} " + " ".join(f"{value:>16.3f}" for value in row))
    if len(set(result.distances)) == 1 and "time_offset" not in result.fixed and "velocity" not in result.fixed:
        print("  note: at one distance velocity and time_offset are nearly degenerate (see their correlation); "
              "fix one (--fix time_offset=...) or add a trace at another --distance")


def run_calibrate(arguments: argparse.Namespace) -> None:
    """Run ``tiltwell calibrate`` for the parsed ``arguments``: every output is checked
    against the inputs (:mod:`.paths`) before the fit, and written after it."""
    traces = [("--trace", path) for path in arguments.trace]
    refuse_clashes([*traces, *([] if arguments.force else [("the scenario", arguments.file)])],
                   [("--write", arguments.write)])
    refuse_clashes([("the scenario", arguments.file), *traces, ("--write", arguments.write)],
                   [("--figure", arguments.figure)])
    if arguments.figure is not None and Path(arguments.figure).suffix.lower() not in (".pdf", ".svg", ".png"):
        raise TiltwellError(f"--figure must end in .pdf, .svg or .png; got {arguments.figure!r}")
    scenario = scenario_module.load(arguments.file)
    distances = arguments.distance
    if distances is not None and len(distances) != len(arguments.trace):
        raise TiltwellError(f"--distance [m] must be given once per --trace or not at all; got {len(distances)} "
                            f"for {len(arguments.trace)} trace(s)")
    counts = None if arguments.signal is None else arguments.signal == "counts"
    result = calibrate(scenario, arguments.trace, distances, counts=counts, fix=_fixes(arguments.fix))
    drawing = None
    if arguments.figure is not None:  # drawn before anything is written
        from ..figures import calibration_fit, save  # matplotlib only when a figure is asked for

        drawing = calibration_fit(result, [read_trace(path) for path in arguments.trace])
    if arguments.write is not None:
        write_calibrated(scenario, result, arguments.write, source=arguments.file, force=arguments.force)
    if drawing is not None:
        save(drawing, arguments.figure)
    if arguments.json:
        print(json.dumps(result.to_dict()))
        return
    _print(result)
    if arguments.write is not None:
        print(f"wrote {arguments.write}: [beam] temperature set so that the terminal velocity is the fitted one, "
              "relative_spread the fitted one (speed_ratio removed)")
