"""The ``tiltwell coils`` command: the scenario's coil row, its waveform table, the device
check against the rigid twin, and its figures (see :mod:`tiltwell.cli`)."""

from __future__ import annotations

import argparse
import json
from pathlib import Path
from typing import Any

import numpy as np

from ..workflows import scenario as scenario_module
from .._base.validation import TiltwellError
from ..physics.constants import millikelvin
from .paths import refuse_clashes, refuse_in_folder


def _number(summary: dict[str, Any], key: str) -> float:
    """A summary value as a float (NaN where it is missing or None)."""
    value = summary.get(key)
    return float(value) if isinstance(value, (int, float)) else float("nan")


def _print_coils(summary: dict[str, object]) -> None:
    def number(key: str) -> float:
        return _number(summary, key)

    def line(label: str, text: str) -> None:
        print(f"  {label:26s} {text}")

    print(f"coil row: {int(number('count'))} coils at {number('pitch') * 1e3:.4g} mm pitch, z = "
          f"{number('first') * 1e3:.4g} to {number('last') * 1e3:.5g} mm, {int(number('active'))} carrying current")
    line("gradient", f"{number('gradient'):.4g} T/m wanted; {number('achieved_gradient_min'):.4g} T/m at least, "
         f"{number('achieved_gradient_mean'):.4g} T/m on average")
    line("peak current", f"{number('peak_current'):.4g} A per turn; the limit cut the gradient at "
         f"{number('limited_fraction') * 100:.3g} % of the points")
    print(f"  trap across one pitch ({int(number('phases'))} positions, decelerating at "
          f"{number('phase_deceleration'):.4g} m/s^2)")
    line("  depth", f"worst {millikelvin(number('depth_worst')):.4g} mK, mean {millikelvin(number('depth_mean')):.4g} "
         f"mK, ripple {number('ripple') * 100:.3g} %")
    for kind in ("longitudinal", "transverse"):
        line(f"  {kind} acceptance", f"worst {number(kind + '_acceptance_worst') * 1e3:.4g}, mean "
             f"{number(kind + '_acceptance_mean') * 1e3:.4g} mm*m/s")
    line("  field zero off target", f"{number('zero_offset_max') * 1e6:.3g} um at most")
    line("waveform table", f"{int(number('plan_points'))} points every {number('plan_step') * 1e6:.4g} us over "
         f"{number('duration') * 1e3:.4g} ms")
    print("  one coil (copper at 20 C, no cooling during a pulse)")
    line("  pulse", f"{number('pulse_duration_min') * 1e3:.3g} to {number('pulse_duration_max') * 1e3:.3g} ms")
    line("  inductance", f"{number('inductance') * 1e3:.4g} mH (self; the neighbours' mutual terms are in the "
         "voltages below)")
    line("  resistance", f"{number('resistance'):.4g} Ohm")
    line("  steepest slope", f"{number('max_slope'):.3g} A/s while the trap moves (the driver's slew rate)")
    step = number('handover_step')
    if step == 0.0:
        line("  hand-over", "smooth: each coil's current is weighted in and out ([coils] handover), no jump")
    elif summary.get("handover_voltage") is not None:
        line("  hand-over step", f"{step:.4g} A; L dI/dt {number('handover_voltage') / 1e3:.4g} kV (self only) over "
             f"the {number('rise_time') * 1e6:.3g} us rise time")
    else:
        line("  hand-over step", f"{step:.4g} A (a jump: give [deceleration] rise_time for its L dI/dt)")
    line("  I^2 t (hottest coil)", f"{number('current_squared_time'):.4g} A^2 s: +{number('temperature_rise'):.3g} K "
         f"(bound, peak current for the longest pulse: +{number('temperature_rise_bound'):.3g} K)")
    line("  stored energy", f"{number('stored_energy'):.4g} J at the peak current")
    hardware = summary["hardware"]
    assert isinstance(hardware, dict)  # coil_summary's nested dict of the row's loads
    print("  the whole shot, every coil (switch-on and switch-off within the rise time, mutual terms included)")
    line("  largest voltage", f"{number('peak_voltage') / 1e3:.4g} kV (induced {number('inductive_voltage') / 1e3:.4g} "
         f"kV; at switch-on {number('switch_on_voltage') / 1e3:.4g} kV, while running "
         f"{number('running_voltage') / 1e3:.4g} kV, at switch-off {number('switch_off_voltage') / 1e3:.4g} kV)")
    for verdict in hardware["verdicts"]:
        state = "pass" if verdict["passed"] else "FAIL"
        line(f"  {verdict['quantity'].replace('_', ' ')}",
             f"{verdict['value']:.4g} {verdict['unit']} against {verdict['limit']:.4g} ([limits]): {state}")
        if verdict["advice"]:
            print(f"      {verdict['advice']}")
    print(f"  {hardware['assumptions']}")
    print(f"  {summary['caution']}")


def coils_command(arguments: argparse.Namespace) -> None:
    """``tiltwell coils FILE [--json] [--csv FILE] [--track N] [--figures DIR] [--progress]``."""
    from ..workflows.coilreport import coil_run, coil_scan, coil_summary, device_box, device_check

    path, csv_path, folder = arguments.file, arguments.csv, arguments.figures
    refuse_clashes([("the scenario", path)], [("--csv", csv_path)])
    refuse_in_folder("--figures", folder, (), {".png"}, [("the scenario", path), ("--csv", csv_path)])
    scenario = scenario_module.load(path)
    if csv_path is not None and not Path(csv_path).parent.is_dir():
        raise TiltwellError(f"--csv must name a file in an existing folder; got {csv_path!r}")
    if folder is not None and Path(folder).exists() and not Path(folder).is_dir():
        raise TiltwellError(f"--figures must name a folder; got the file {folder!r}")
    if arguments.track is not None and arguments.track < 1:
        raise TiltwellError(f"--track must be a number of particles >= 1; got {arguments.track}")
    try:
        run = coil_run(scenario)
        scan = coil_scan(scenario, run)
        summary = coil_summary(scenario, run, scan)
        check = None if arguments.track is None else device_check(scenario, arguments.track, run=run,
                                                                  progress=arguments.progress)
    except TiltwellError as error:
        raise TiltwellError(f"{path}: {error}") from None
    if check is not None:
        summary["device_check"] = _device_numbers(scenario, check, device_box(scenario, run.array))
    if csv_path is not None:
        run.plan.to_csv(csv_path, run.times, run.array.positions)
    written = [] if folder is None else _coil_figures(scenario, run, scan, check, folder)
    if arguments.json:
        print(json.dumps(summary))
        return
    _print_coils(summary)
    if check is not None:
        _print_device(summary["device_check"])
    if csv_path is not None:
        print(f"wrote {csv_path}: current per turn of each coil against time, coil k at z = "
              f"{_number(summary, 'first') * 1e3:.4g} mm + k x {_number(summary, 'pitch') * 1e3:.4g} mm")
    for item in written:
        print(f"wrote {item}")


def _device_numbers(scenario: scenario_module.Scenario, check: Any, box: tuple[float, float, float]) -> dict[str, Any]:
    """The device check as JSON-ready numbers (SI)."""
    numbers: dict[str, Any] = {
        "particles": int(check.rigid.kept.size),
        "time_step": check.rigid.time_step,
        "box_half_widths": list(box),
        "kept_rigid_twin": check.rigid.fraction,
        "kept_coil_row": check.device.fraction,
        "ripple_loss": check.ripple_loss,
        "ripple_loss_error": check.ripple_loss_error,
    }
    distance = scenario.simulation.detector_distance
    if distance is not None:
        rigid, device = check.arrival_times(distance)
        numbers["detector_distance"] = distance
        numbers["arrival_median_rigid_twin"] = float(np.median(rigid)) if rigid.size else None
        numbers["arrival_median_coil_row"] = float(np.median(device)) if device.size else None
    return numbers


def _print_device(numbers: dict[str, Any]) -> None:
    print(f"device check: {numbers['particles']} particles of the beam, step {numbers['time_step'] * 1e6:.3g} us, "
          f"box half widths {', '.join(f'{h * 1e3:.3g}' for h in numbers['box_half_widths'])} mm")
    print(f"  kept by the rigid twin     {numbers['kept_rigid_twin']:.4f}")
    print(f"  kept by the coil row       {numbers['kept_coil_row']:.4f}")
    print(f"  loss from the ripple       {numbers['ripple_loss']:+.4f} +- {numbers['ripple_loss_error']:.4f} (paired)")
    if numbers.get("arrival_median_coil_row") is not None:
        print(f"  median arrival at {numbers['detector_distance'] * 1e3:.4g} mm: twin "
              f"{numbers['arrival_median_rigid_twin'] * 1e3:.4g} ms, coil row {numbers['arrival_median_coil_row'] * 1e3:.4g} ms")


def _coil_figures(scenario: scenario_module.Scenario, run: Any, scan: Any, check: Any, folder: str) -> list[Path]:
    from ..figures import coil_figures, device_arrivals, device_phase_space, device_survival, save
    from ..workflows.figure_data import coil_figure_data

    target = Path(folder)
    target.mkdir(parents=True, exist_ok=True)
    drawings = coil_figures(coil_figure_data(run, scan))
    if check is not None:
        drawings["device-survival"] = device_survival(check)
        drawings["device-phase-space"] = device_phase_space(check)
        distance = scenario.simulation.detector_distance
        if distance is not None:
            drawings["device-arrivals"] = device_arrivals(check, distance)
    return [save(figure, target / f"{name}.png") for name, figure in drawings.items()]
