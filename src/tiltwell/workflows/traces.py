"""Predicted time-of-flight traces at the ``[detector]``: the free beam and the decelerated packet.

Time runs from the start of the valve opening. The detector counts the particles crossing a
disc of ``radius`` on the beam axis at ``distance`` from the nozzle (a flux detector), each
with probability ``efficiency``; the traces are the expected detected particles per bin of
``time_bin``.

- **free beam** (decelerator off): the top-hat opening and the Gaussian speed distribution
  of the beam model flown freely over ``distance``
  (:func:`tiltwell.physics.arrival.binned_flux`), times the share of the beam inside the
  disc there, ``1 - exp(-R^2 / (2 s^2))`` with ``s`` the transverse rms of the Gaussian beam
  drifted to the detector (the 2-D Gaussian's share inside a circle, x and y alike), times
  the number that enters the limiting aperture's cone, all states of the species
  (``reaching_trap`` of :func:`tiltwell.workflows.yields.yield_budget`).
- **decelerated packet**: the tracked survivors' final phase space (trap frame) released at
  the end of the deceleration, ``flight_distance + length`` from the nozzle, at the final
  velocity (after ``[hold] time`` when there is a hold; the hold's phase space is not
  tracked), flown freely (:func:`tiltwell.coils.schedule.arrival_times`); those inside the
  disc at the plane are counted. The packet's number is ``slow_particles`` times the share
  that crosses the disc times ``efficiency`` (that share is the scenario's own state's,
  taken for every trapped state). The switch-on comes when the synchronous
  particle, leaving at the middle of the opening, reaches ``flight_distance``.

Without ``[beam] pressure`` the traces are relative: per particle of the species sent into
the limiting aperture's cone (``unit`` says which). SI units.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from .._base.display import html_table
from .._base.files import table_text, write_table
from .._base.validation import TiltwellError, read_only_copy
from ..coils.schedule import arrival_times
from ..dynamics.capture import CaptureEstimates
from ..physics.arrival import binned_flux
from .assemble import Built, build
from .rowtrack import estimate
from .scenario import Scenario
from .yields import YieldBudget, yield_budget

__all__ = ["MAX_BINS", "SPEED_TAIL", "Traces", "predicted_traces"]

FloatArray = NDArray[np.float64]

#: Most time bins a trace may have (a guard against a time_bin typed wrong).
MAX_BINS = 1_000_000
#: The free-beam window covers speeds within this many rms of the mean (the tail beyond: < 1e-15).
SPEED_TAIL = 8.0
#: The slowest speed the free-beam window reaches, as a share of the mean (broad beams).
SLOWEST = 0.05

ABSOLUTE_UNIT = "particles per shot"
RELATIVE_UNIT = "relative: per particle of the species sent into the limiting aperture's cone (no [beam] pressure)"


@dataclass(frozen=True, eq=False)
class Traces:
    """Predicted detector traces of one scenario (see the module notes).

    Attributes
    ----------
    edges : ndarray, shape (K + 1,)
        Bin edges [s] since the valve began to open, ``time_bin`` apart.
    free : ndarray, shape (K,)
        Expected detected particles per bin of the free beam [1] (in ``unit``).
    packet : ndarray, shape (K,), or None
        The same for the decelerated packet; None without tracked survivors.
    free_detected, packet_detected : float
        Expected detected particles per shot [1] (in ``unit``); ``packet_detected`` is None
        with ``packet``.
    free_share : float
        Share of the free beam inside the detected disc [1].
    packet_share : float or None
        Share of the tracked survivors that cross the disc [1].
    release_distance, release_time : float
        Where [m, from the nozzle] and when [s] the packet is released.
    absolute : bool
        True for numbers per shot, False for a relative trace.
    unit : str
        What one unit of the traces is, in words.
    notes : tuple of str
    """

    edges: FloatArray
    free: FloatArray
    packet: FloatArray | None
    free_detected: float
    packet_detected: float | None
    free_share: float
    packet_share: float | None
    release_distance: float
    release_time: float
    absolute: bool
    unit: str
    notes: tuple[str, ...]

    def to_csv(self, path: str | os.PathLike[str] | None = None) -> str:
        """The traces as a table (:func:`tiltwell._base.files.table_text`'s layout): bin
        start and end [s], free beam and decelerated packet [1] per bin (empty cells without
        a packet); written atomically to ``path`` when given. Returns the text."""
        columns = [("time_start", "s"), ("time_end", "s"), ("free_beam", "1"), ("decelerated", "1")]
        packet = self.packet
        rows = [(float(self.edges[i]), float(self.edges[i + 1]), float(self.free[i]),
                 None if packet is None else float(packet[i])) for i in range(self.free.size)]
        title = f"predicted time-of-flight traces: expected detected particles per bin, {self.unit}"
        note = "each row: one time bin since the valve began to open; empty cell: no decelerated packet"
        if path is None:
            return table_text(title, columns, rows, caution=note)
        return write_table(Path(path), title, columns, rows, caution=note)

    def _repr_html_(self) -> str:
        rows = [("free beam detected", f"{self.free_detected:.4g}"),
                ("packet detected", "—" if self.packet_detected is None else f"{self.packet_detected:.4g}"),
                ("unit", self.unit), ("bins", f"{self.free.size}")]
        return html_table("Predicted time-of-flight traces", rows)


def _relative_slow(budget: YieldBudget) -> float:
    """Slow particles per particle sent into the cone: sum of share x kept after flips x hold."""
    return float(sum(s.share * s.after_flips * s.hold for s in budget.states))


def _packet(scenario: Scenario, built: Built, estimates: CaptureEstimates,
            release: float) -> tuple[FloatArray, FloatArray, float] | None:
    """(arrival times since release [s], weights, share crossing the disc) of the detected
    survivors, or None without survivors."""
    detector = scenario.detector
    assert detector is not None
    tracking = estimates.tracking
    if tracking is None or not np.any(tracking.kept):
        return None
    plane = detector.distance - release
    finals = tracking.final[tracking.kept]
    if plane <= 0.0 or np.any(finals[:, 2] > plane):
        raise TiltwellError(f"[detector] distance [m] must lie beyond the released packet (the trap centre at "
                            f"release is {release:g} m from the nozzle, its survivors reach "
                            f"{release + float(finals[:, 2].max()):g} m); got {detector.distance!r}")
    flips = tracking.survival_weights  # the no-spin-flip probabilities, when counted
    weights = np.ones(finals.shape[0]) if flips is None else flips[tracking.kept]
    times = arrival_times(finals, built.schedule.final_velocity, plane)
    arrived = np.isfinite(times)
    at = np.where(arrived, times, 0.0)
    radius = np.hypot(finals[:, 0] + finals[:, 3] * at, finals[:, 1] + finals[:, 4] * at)
    detected = arrived & (radius <= detector.radius)
    total = float(weights.sum())
    share = float(weights[detected].sum()) / total if total > 0.0 else 0.0
    return times[detected], weights[detected], share


def predicted_traces(scenario: Scenario, estimates: CaptureEstimates | None = None, *, built: Built | None = None,
                     budget: YieldBudget | None = None) -> Traces:
    """The free-beam and decelerated-packet traces at the scenario's ``[detector]``.

    Parameters
    ----------
    scenario : Scenario
        With a ``[detector]`` section.
    estimates : CaptureEstimates, optional
        Its :func:`tiltwell.workflows.rowtrack.estimate` (computed when left out).
    built : Built, optional
        Its :func:`tiltwell.workflows.assemble.build`.
    budget : YieldBudget, optional
        Its :func:`tiltwell.workflows.yields.yield_budget` (computed when left out).

    Returns
    -------
    Traces
        See the module notes for the model and its limits.
    """
    detector = scenario.detector
    if detector is None:
        raise TiltwellError("the scenario has no [detector] section: give distance [m], radius [m] (and efficiency, "
                            "time_bin [s]) for predicted traces")
    built = build(scenario) if built is None else built
    estimates = estimate(scenario, built) if estimates is None else estimates
    budget = yield_budget(scenario, built, estimates) if budget is None else budget
    notes = list(budget.notes)
    absolute = budget.reaching_trap is not None
    reach = budget.reaching_trap if budget.reaching_trap is not None else 1.0
    slow = budget.slow_particles if budget.slow_particles is not None else _relative_slow(budget)
    beam, source, schedule = built.beam, built.source, built.schedule
    v0, spread, tau, length = beam.velocity, beam.longitudinal.sigma_velocity, source.valve_open_time, detector.distance
    drift = (length - source.flight_distance) / v0
    sigmas = (beam.horizontal.drift(drift).sigma_position, beam.vertical.drift(drift).sigma_position)
    free_share = 1.0 - math.exp(-detector.radius**2 / (2.0 * sigmas[0] * sigmas[1]))
    release = source.flight_distance + schedule.length
    hold = scenario.hold.time if scenario.hold is not None else 0.0
    release_time = 0.5 * tau + source.flight_distance / v0 + schedule.duration + hold
    if hold > 0.0:
        notes.append("the packet is released after the hold with its phase space at the end of the deceleration")
    packet = _packet(scenario, built, estimates, release)
    if packet is None:
        notes.append("no tracked survivors: no decelerated packet")
    first = length / (v0 + SPEED_TAIL * spread)
    last = tau + length / max(v0 - SPEED_TAIL * spread, SLOWEST * v0)
    if v0 - SPEED_TAIL * spread < SLOWEST * v0:
        root = spread * math.sqrt(2.0)  # the Gaussian's share between 0 and SLOWEST v0, by erf
        tail = 0.5 * (math.erf((SLOWEST - 1.0) * v0 / root) + math.erf(v0 / root))
        notes.append(f"the free-beam window stops at {SLOWEST:g} of the mean speed: the slower particles "
                     f"(a share {tail:.2g} of the beam) are left out")
    if packet is not None and packet[0].size:
        first = min(first, release_time + float(packet[0].min()))
        last = max(last, release_time + float(packet[0].max()))
    step = detector.time_bin
    start, stop = math.floor(first / step), math.ceil(last / step) + 1
    if stop - start > MAX_BINS:
        raise TiltwellError(f"[detector] time_bin [s] gives {stop - start} bins over {first:g} to {last:g} s, more "
                            f"than {MAX_BINS}: give a wider bin; got {step!r}")
    edges = np.arange(start, stop + 1) * step
    scale = reach * free_share * detector.efficiency
    free = binned_flux(edges, length, v0, spread, tau) * scale
    packet_trace, packet_detected, packet_share = None, None, None
    if packet is not None:
        times, weights, packet_share = packet
        packet_detected = slow * packet_share * detector.efficiency
        counts, _ = np.histogram(release_time + times, bins=edges, weights=weights)
        total = float(weights.sum())
        packet_trace = read_only_copy(counts * (packet_detected / total if total > 0.0 else 0.0))
    return Traces(read_only_copy(edges), read_only_copy(free), packet_trace, float(free.sum()), packet_detected, free_share,
                  packet_share, release, release_time, absolute, ABSOLUTE_UNIT if absolute else RELATIVE_UNIT,
                  tuple(notes))
