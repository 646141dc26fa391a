"""Calibrating the beam source from measured free-beam time-of-flight traces.

A trace is a CSV file of two columns, time [s] since the valve trigger and signal; ``#``
lines are comments and a first non-comment line that is not numeric is a header (our own
``name [unit]`` table layout). Each sample stands for the bin between the midpoints to its
neighbours. The model of the signal in a bin of trace ``i`` at distance ``L_i`` is

    mu = scale_i * integral over the bin of f(t - time_offset; L_i, v, relative_spread * v, tau)
         + background_i,

with ``f`` the arrival-time density of :func:`tiltwell.physics.arrival.flux_density` (a
top-hat opening of ``tau`` = ``[beam] valve_open_time``, Gaussian speeds): ``scale_i`` is the
signal of all the particles of one shot, ``background_i`` a constant per sample. The
parameters ``velocity`` [m/s], ``relative_spread`` [1] and ``time_offset`` [s] (the valve's
delay after the trigger) are shared by all traces.

Counted signals (all samples non-negative integers, or ``counts=True``) are fitted by the
Poisson likelihood (the deviance is minimised; weights from the observed counts would bias a
small background low), their standard errors from the Fisher information with the model as
the variance, ``(J^T diag(1/mu) J)^-1``, the reduced chi-square is Pearson's. An analog
signal is fitted by least squares with one Gaussian noise estimated from the residuals,
``sigma^2 = SSR / (n - p)``, errors from ``sigma^2 (J^T J)^-1``; its reduced chi-square is 1 by
construction unless the noise is given. J is the model's Jacobian by central differences.

At one distance the velocity and the time offset are nearly degenerate (a faster beam
arriving later looks alike): their correlation, reported, is close to +-1 and their errors
large. Fix one (``fix={"time_offset": ...}``, the delay from the trigger) or fit traces at
several distances together, which separates them. SI units.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import least_squares

from .._base.validation import TiltwellError, as_scalar
from ..physics.arrival import binned_flux
from ..physics.constants import BOLTZMANN
from ..physics.source import gas
from .scenario import Scenario, save

__all__ = ["MIN_SAMPLES", "PARAMETERS", "Calibration", "Trace", "calibrate", "calibrated_scenario", "fit_traces",
           "read_trace", "write_calibrated"]

FloatArray = NDArray[np.float64]

#: The fitted parameters, in the order of :attr:`Calibration.names` (scale, background per trace).
PARAMETERS = ("velocity", "relative_spread", "time_offset", "scale", "background")
#: Fewest samples a trace must have.
MIN_SAMPLES = 8
#: Smallest model value in the Poisson likelihood (a zero background with zero counts).
_FLOOR = 1e-12
#: Relative step of the central differences of the Jacobian (in the parameters' own scales).
_STEP = 1e-6


@dataclass(frozen=True, eq=False)
class Trace:
    """A measured trace: ``times`` [s] strictly increasing, ``signal`` (counts or analog), the
    file and the line number of each sample (for messages)."""

    times: FloatArray
    signal: FloatArray
    path: str
    lines: tuple[int, ...]

    @property
    def is_counts(self) -> bool:
        """True when every sample is a non-negative integer."""
        return bool(np.all(self.signal >= 0.0) and np.all(self.signal == np.round(self.signal)))

    @property
    def edges(self) -> FloatArray:
        """Bin edges [s], shape (n + 1,): midpoints between samples, the ends mirrored."""
        t = self.times
        mid = 0.5 * (t[1:] + t[:-1])
        return np.concatenate(([t[0] - (mid[0] - t[0])], mid, [t[-1] + (t[-1] - mid[-1])]))


def _error(path: str, line: int, message: str) -> TiltwellError:
    return TiltwellError(f"trace {path}, line {line}: {message}")


def read_trace(path: str | os.PathLike[str]) -> Trace:
    """Read a measured trace CSV (see the module notes).

    Raises
    ------
    TiltwellError
        One line naming the file and the line: unreadable, empty, one column, not a number,
        NaN or infinite, negative time, time not strictly increasing, fewer than
        ``MIN_SAMPLES`` samples, or the maximum at the first or last sample (the trace does
        not contain the peak).
    """
    name = str(path)
    try:
        text = Path(path).read_text(encoding="utf-8")
    except OSError as error:
        raise TiltwellError(f"cannot read trace file {name!r}: {error.strerror}") from None
    times: list[float] = []
    values: list[float] = []
    lines: list[int] = []
    first = True
    number = 0
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        cells = [cell.strip() for cell in line.split(",")]
        if len(cells) != 2:
            raise _error(name, number, f"must have two columns, time [s] and signal; got {len(cells)}: {line!r}")
        try:
            t, s = float(cells[0]), float(cells[1])
        except ValueError:
            if first:
                first = False
                continue  # a header row
            raise _error(name, number, f"time [s] and signal must be numbers; got {line!r}") from None
        first = False
        if not (math.isfinite(t) and math.isfinite(s)):
            raise _error(name, number, f"time [s] and signal must be finite; got {line!r}")
        if t < 0.0:
            raise _error(name, number, f"time [s] must be >= 0 (since the trigger); got {t!r}")
        if times and t <= times[-1]:
            raise _error(name, number, f"time [s] must increase strictly; got {t!r} after {times[-1]!r}")
        times.append(t)
        values.append(s)
        lines.append(number)
    if not times:
        raise _error(name, max(number, 1), "no data rows: the trace is empty")
    if len(times) < MIN_SAMPLES:
        raise _error(name, lines[-1], f"a trace needs >= {MIN_SAMPLES} samples; got {len(times)}")
    peak = int(np.argmax(values))
    if peak in (0, len(values) - 1):
        raise _error(name, lines[peak], "the signal is largest at the first or last sample: the trace does not "
                     "contain the peak")
    return Trace(np.array(times), np.array(values), name, tuple(lines))


@dataclass(frozen=True, eq=False)
class Calibration:
    """The fitted source (see the module notes).

    Attributes
    ----------
    velocity, velocity_error : float
        Mean forward speed and its standard error [m/s].
    relative_spread, relative_spread_error : float
        rms speed spread over the mean [1].
    time_offset, time_offset_error : float
        Valve delay after the trigger [s].
    scales, scale_errors, backgrounds, background_errors : tuple of float
        Per trace: the signal of one shot's particles and the constant per sample (signal units).
    names : tuple of str
        The free parameters, in the order of ``correlation`` (``scale[i]``, ``background[i]``).
    correlation : ndarray, shape (p, p)
        Their correlation matrix.
    reduced_chi_square : float
        Pearson (counts) or residual (analog) chi-square over n - p.
    counts : bool
        True for the Poisson fit.
    distances : tuple of float
        Detector distance of each trace [m].
    paths : tuple of str
        The trace files.
    fixed : dict
        The parameters held, name to value.
    open_time : float
        The valve's open time the model used [s].
    """

    velocity: float
    velocity_error: float
    relative_spread: float
    relative_spread_error: float
    time_offset: float
    time_offset_error: float
    scales: tuple[float, ...]
    scale_errors: tuple[float, ...]
    backgrounds: tuple[float, ...]
    background_errors: tuple[float, ...]
    names: tuple[str, ...]
    correlation: FloatArray
    reduced_chi_square: float
    counts: bool
    distances: tuple[float, ...]
    paths: tuple[str, ...]
    fixed: dict[str, float]
    open_time: float

    def fitted(self, trace: Trace, index: int = 0) -> FloatArray:
        """The fitted signal on ``trace``'s samples, with trace ``index``'s scale and
        background (the same model the fit minimised)."""
        full = np.array([self.velocity, self.relative_spread, self.time_offset, self.scales[index],
                         self.backgrounds[index]])
        return _model(full, [trace], [self.distances[index]], self.open_time)

    def to_dict(self) -> dict[str, Any]:
        """The DESIGN.md keys (``scale``, ``background`` of the first trace), the correlation
        matrix with its names, and every trace's scale and background with errors."""
        return {"velocity": self.velocity, "velocity_error": self.velocity_error,
                "relative_spread": self.relative_spread, "relative_spread_error": self.relative_spread_error,
                "time_offset": self.time_offset, "time_offset_error": self.time_offset_error,
                "scale": self.scales[0], "background": self.backgrounds[0],
                "reduced_chi_square": self.reduced_chi_square,
                "correlation": {"names": list(self.names), "matrix": self.correlation.tolist()},
                "traces": [{"file": p, "distance": d, "scale": s, "scale_error": se, "background": b,
                            "background_error": be}
                           for p, d, s, se, b, be in zip(self.paths, self.distances, self.scales, self.scale_errors,
                                                         self.backgrounds, self.background_errors)]}


def _model(full: FloatArray, traces: list[Trace], distances: list[float], open_time: float) -> FloatArray:
    velocity, spread, offset = full[0], full[1], full[2]
    parts = []
    for i, (trace, distance) in enumerate(zip(traces, distances)):
        edges = trace.edges - offset
        shares = binned_flux(edges, distance, velocity, spread * velocity, open_time) if edges[-1] > edges[0] else 0
        parts.append(full[3 + 2 * i] * shares + full[4 + 2 * i])
    return np.concatenate(parts)


def _guess(traces: list[Trace], distances: list[float], open_time: float) -> FloatArray:
    """Starting values from the first trace's peak and width; each trace's scale and background."""
    first, length = traces[0], distances[0]
    peak = float(first.times[np.argmax(first.signal)])
    velocity = length / max(peak - 0.5 * open_time, 0.5 * peak)
    out = [velocity, 0.0, 0.0]
    widths = []
    for trace in traces:
        ends = np.concatenate((trace.signal[:3], trace.signal[-3:]))
        background = float(np.median(ends))
        above = trace.signal - background
        out += [max(float(np.sum(above * np.diff(trace.edges)) / np.mean(np.diff(trace.edges))), 1e-9),
                background]
        weights = np.clip(above, 0.0, None)
        mean = float(np.sum(weights * trace.times) / max(np.sum(weights), 1e-300))
        widths.append(math.sqrt(float(np.sum(weights * (trace.times - mean) ** 2) / max(np.sum(weights), 1e-300))))
    rms = math.sqrt(max(widths[0] ** 2 - open_time**2 / 12.0, (0.1 * widths[0]) ** 2))
    out[1] = float(np.clip(rms * velocity**2 / length / velocity, 0.005, 0.5))
    return np.array(out)


def fit_traces(traces: list[Trace], distances: list[float], open_time: float, *, counts: bool | None = None,
               fix: dict[str, float] | None = None, noise: float | None = None) -> Calibration:
    """Fit traces measured at ``distances`` [m] with the valve open for ``open_time`` [s].

    Parameters
    ----------
    traces : list of Trace
        From :func:`read_trace`, one or more.
    distances : list of float
        Nozzle to detector of each trace [m], > 0.
    open_time : float
        ``[beam] valve_open_time`` [s], >= 0.
    counts : bool, optional
        Poisson (True) or Gaussian (False) likelihood; default: Poisson when every sample
        of every trace is a non-negative integer.
    fix : dict, optional
        Parameters held at a value, names from ``PARAMETERS`` (``scale`` and ``background``
        hold every trace's); their errors are 0.
    noise : float, optional
        The analog signal's noise (rms per sample); default: estimated from the residuals.

    Returns
    -------
    Calibration

    Notes
    -----
    At one distance ``velocity`` and ``time_offset`` are nearly degenerate (see the module
    notes): read their correlation in ``Calibration.correlation``.
    """
    if not traces or len(traces) != len(distances):
        raise TiltwellError(f"give one distance [m] per trace; got {len(traces)} trace(s), {len(distances)} "
                            "distance(s)")
    lengths = [as_scalar(d, "distance", "m", low=0.0, low_open=True) for d in distances]
    tau = as_scalar(open_time, "open_time", "s", low=0.0)
    fix = dict(fix or {})
    for name in fix:
        if name not in PARAMETERS:
            raise TiltwellError(f"fix: a parameter name must be one of {', '.join(PARAMETERS)}; got {name!r}")
    poisson = all(t.is_counts for t in traces) if counts is None else bool(counts)
    if poisson and not all(t.is_counts for t in traces):
        raise TiltwellError("counts=True needs every sample to be a non-negative integer count")
    start = _guess(traces, lengths, tau)
    held = np.zeros(start.size, dtype=bool)
    kinds = ["velocity", "relative_spread", "time_offset"] + ["scale", "background"] * len(traces)
    for index, kind in enumerate(kinds):
        if kind in fix:
            start[index] = as_scalar(fix[kind], f"fix {kind}", "SI")
            held[index] = True
    dt = float(np.median(np.diff(traces[0].times)))
    units = np.array([start[0], 0.05, dt] + [u for i in range(len(traces))
                                             for u in (max(start[3 + 2 * i], 1.0), max(abs(start[4 + 2 * i]), 1.0))])
    low = np.array([1e-6 * start[0], 1e-4, -np.inf] + [0.0, 0.0 if poisson else -np.inf] * len(traces)) / units
    high = np.array([np.inf, 1.0, np.inf] + [np.inf, np.inf] * len(traces)) / units
    free = ~held
    data = np.concatenate([t.signal for t in traces])

    def full(x: FloatArray) -> FloatArray:
        out = start.copy()
        out[free] = x * units[free]
        return out

    def residuals(x: FloatArray) -> FloatArray:
        mu = _model(full(x), traces, lengths, tau)
        if not poisson:
            return np.asarray(data - mu, dtype=np.float64)
        mu = np.maximum(mu, _FLOOR)
        term = np.where(data > 0.0, data * np.log(np.where(data > 0.0, data, 1.0) / mu), 0.0)
        deviance = 2.0 * np.maximum(term - (data - mu), 0.0)
        return np.asarray(np.sign(data - mu) * np.sqrt(deviance), dtype=np.float64)

    x0 = np.clip(start[free] / units[free], low[free] + 1e-9, high[free] - 1e-9)
    solution = least_squares(residuals, x0, bounds=(low[free], high[free]), x_scale=1.0, method="trf",
                             xtol=1e-12, ftol=1e-12, gtol=1e-12, max_nfev=5000)
    best = full(solution.x)
    mu = _model(best, traces, lengths, tau)
    jacobian = np.empty((data.size, int(free.sum())))
    for column, index in enumerate(np.flatnonzero(free).tolist()):
        step = np.zeros(best.size)
        step[index] = _STEP * units[index]
        jacobian[:, column] = (_model(best + step, traces, lengths, tau) - _model(best - step, traces, lengths, tau)) \
            / (2.0 * _STEP)  # per unit of the parameter's own scale: a well-conditioned information
    dof = max(data.size - int(free.sum()), 1)
    if poisson:
        variance = np.maximum(mu, _FLOOR)
        information = jacobian.T @ (jacobian / variance[:, None])
        chi2 = float(np.sum((data - mu) ** 2 / variance)) / dof
    else:
        ssr = float(np.sum((data - mu) ** 2))
        sigma2 = ssr / dof if noise is None else as_scalar(noise, "noise", "signal", low=0.0, low_open=True) ** 2
        information = jacobian.T @ jacobian / sigma2
        chi2 = ssr / dof / sigma2
    covariance = np.linalg.pinv(information) * np.outer(units[free], units[free])
    errors = np.zeros(best.size)
    errors[free] = np.sqrt(np.clip(np.diag(covariance), 0.0, None))
    scale = np.sqrt(np.clip(np.diag(covariance), 1e-300, None))
    correlation = covariance / np.outer(scale, scale)
    correlation.setflags(write=False)
    _check_peaks(traces, lengths, tau, best)
    names = [f"{kind}[{(i - 3) // 2}]" if i >= 3 and len(traces) > 1 else kind for i, kind in enumerate(kinds)]
    return Calibration(float(best[0]), float(errors[0]), float(best[1]), float(errors[1]), float(best[2]),
                       float(errors[2]), tuple(map(float, best[3::2])), tuple(map(float, errors[3::2])),
                       tuple(map(float, best[4::2])), tuple(map(float, errors[4::2])),
                       tuple(n for n, f in zip(names, free) if f), correlation, chi2, poisson, tuple(lengths),
                       tuple(t.path for t in traces), {k: float(v) for k, v in fix.items()}, float(tau))


def _check_peaks(traces: list[Trace], distances: list[float], open_time: float, best: FloatArray) -> None:
    """The fitted peak of each trace must lie inside it (else the fit extrapolates): the
    model is searched over the trace's span and as much again on either side."""
    for trace, distance in zip(traces, distances):
        span = float(trace.edges[-1] - trace.edges[0])
        fine = np.linspace(trace.edges[0] - span, trace.edges[-1] + span, 12 * trace.times.size + 1)
        shape = binned_flux(fine - best[2], distance, best[0], best[1] * best[0], open_time)
        peak = float(fine[int(np.argmax(shape))])
        if not np.any(shape > 0.0) or peak <= trace.times[0] or peak >= trace.times[-1]:
            line = trace.lines[0] if peak <= trace.times[0] else trace.lines[-1]
            raise _error(trace.path, line, f"the fitted peak (at {peak:.6g} s) lies outside the samples "
                         f"({trace.times[0]:.6g} to {trace.times[-1]:.6g} s): the trace does not contain the peak")


def calibrate(scenario: Scenario, paths: list[str | os.PathLike[str]], distances: list[float] | None = None, *,
              counts: bool | None = None, fix: dict[str, float] | None = None) -> Calibration:
    """Read trace files and fit them (:func:`fit_traces`) with the scenario's valve opening.

    ``distances`` [m], one per trace; default: the ``[detector] distance`` for every trace
    (an error without a ``[detector]`` section)."""
    if distances is None:
        if scenario.detector is None:
            raise TiltwellError("calibrate needs a detector distance [m]: give a [detector] section in the "
                                "scenario or one distance per trace")
        distances = [scenario.detector.distance] * len(paths)
    return fit_traces([read_trace(p) for p in paths], list(distances), scenario.beam.valve_open_time,
                      counts=counts, fix=fix)


def calibrated_scenario(scenario: Scenario, calibration: Calibration) -> Scenario:
    """The scenario with the fitted beam: ``[beam] temperature`` set so that the carrier's
    terminal velocity ``sqrt(2 g/(g-1) k T0 / m)`` equals the fitted velocity (that formula
    inverted, ``T0 = m v^2 (g-1) / (2 g k)``; the beam model sets the speed by gas and
    temperature only), ``relative_spread`` set to the fitted one and ``speed_ratio`` removed.
    The time offset, scale and background have no scenario key and are not written."""
    carrier = gas(scenario.beam.gas)
    g = carrier.heat_capacity_ratio
    temperature = carrier.mass * calibration.velocity**2 * (g - 1.0) / (2.0 * g * BOLTZMANN)
    return scenario.replace("beam", temperature=temperature, relative_spread=calibration.relative_spread,
                            speed_ratio=None)


def write_calibrated(scenario: Scenario, calibration: Calibration, path: str | os.PathLike[str], *,
                     source: str | os.PathLike[str] | None = None, force: bool = False) -> Path:
    """Write :func:`calibrated_scenario` to ``path`` atomically; refuse to write over the
    ``source`` scenario file unless ``force``."""
    if source is not None and not force and Path(path).resolve() == Path(source).resolve():
        raise TiltwellError(f"will not write the calibrated scenario over its input {str(source)!r}: give another "
                            "path (or --force)")
    return save(calibrated_scenario(scenario, calibration), path)
