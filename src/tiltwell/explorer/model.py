"""What the explorer shows, computed by the library from the control values; no widgets.

The controls are a :class:`Settings`. They map onto a scenario (:func:`physics_scenario`
for the trap and the beam, :func:`full_scenario` for everything, the file the explorer
saves), which :func:`tiltwell.workflows.report.build` turns into the trap, the beam and the
schedule. :class:`Model` keeps what does not change while only the deceleration moves
(the trap's samples, the beam, its drawn particles) and returns one :class:`Picture` per
setting, plus the inputs of the trade-off curve (:mod:`tiltwell.explorer.tradeoff`, whose
:func:`tradeoff` and :class:`TradeoffInputs` are also importable from here).

Two controls have no key of their own in a scenario and are carried by the keys that set
them in the source model (:class:`tiltwell.Source`): the initial (mean beam) velocity by
the nozzle temperature, ``T = T_file (v / v_file)^2`` because the terminal velocity goes as
``sqrt(T)``; the transverse spread scale by the skimmer and aperture diameters, all scaled
alike, because the transverse velocity spread is ``v (D / 4) / L`` of the narrowest one.
"""

from __future__ import annotations

import dataclasses
import os
from collections import OrderedDict
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .tradeoff import TradeoffInputs, tradeoff
from .._base.validation import TiltwellError
from ..wells.acceptance import TrapAcceptance, TrapSampler, acceptances_at
from ..physics.beam import Beam
from ..wells.overlap import plane_product_fraction
from ..workflows.report import build, timing
from ..workflows.scenario import Scenario, load
from ..coils.schedule import Schedule
from ..wells.traps import Trap

__all__ = [
    "Model",
    "Picture",
    "Reference",
    "Settings",
    "TradeoffInputs",
    "as_scenario",
    "full_scenario",
    "physics_scenario",
    "reference",
    "tradeoff",
]

FloatArray = NDArray[np.float64]

#: Particles drawn once per beam for the quick phase-plane view.
VIEW_PARTICLES = 2000
#: A trap's samples are reused for this many decelerations, then sampled afresh (the
#: sampler keeps every well it has seen).
_SAMPLER_USES = 400
_CACHE = 12
#: Above this many coils the timing table is not built (a near-zero deceleration makes the
#: device absurdly long; the table would hold one row per coil).
MAX_COILS = 100_000


@dataclass(frozen=True)
class Settings:
    """The control values, SI.

    ``trap`` is ``(gradient [T/m], max_field [T])`` for a quadrupole scenario and
    ``(current [A],)`` for a coil pair; ``initial_velocity`` is the beam's mean velocity
    [m/s] (the trap starts at it plus ``mismatch``); ``transverse_scale`` multiplies the
    transverse velocity spread [1].
    """

    species: str
    trap: tuple[float, ...]
    deceleration: float
    initial_velocity: float
    final_velocity: float
    relative_spread: float
    transverse_scale: float
    mismatch: float
    particles: int

    @property
    def trap_key(self) -> tuple[Any, ...]:
        return (self.species, self.trap)

    @property
    def beam_key(self) -> tuple[Any, ...]:
        return (self.species, self.trap, self.initial_velocity, self.relative_spread, self.transverse_scale)

    @property
    def tradeoff_key(self) -> tuple[Any, ...]:
        return (*self.beam_key, self.final_velocity, self.mismatch)


@dataclass(frozen=True)
class Reference:
    """The values the base scenario implies, against which the controls are mapped."""

    velocity: float
    spread: float
    temperature: float
    deceleration: float
    critical: float


def _building_scenario(scenario: Scenario) -> Scenario:
    """``scenario`` with a deceleration every beam can make (to 0 m/s at 1 m/s^2, no
    mismatch): its trap and beam build even when its own schedule would not."""
    return scenario.replace("beam", mismatch=0.0).replace(
        "deceleration", final_velocity=0.0, deceleration=1.0, length=None)


def reference(base: Scenario) -> Reference:
    """Velocity, relative spread and temperature of ``base``'s beam, its deceleration (or
    half the critical one when its schedule does not build) and its trap's critical
    deceleration."""
    built = build(_building_scenario(base))
    critical = built.trap.critical_deceleration(base.simulation.samples)
    try:
        deceleration = build(base).schedule.deceleration
    except TiltwellError:
        deceleration = base.deceleration.deceleration or 0.5 * critical
    return Reference(
        velocity=built.beam.velocity,
        spread=built.source.velocity_spread / built.source.terminal_velocity,
        temperature=base.beam.temperature,
        deceleration=deceleration,
        critical=critical,
    )


def settings_of(base: Scenario, ref: Reference) -> Settings:
    """The control values that reproduce ``base``."""
    t = base.trap
    trap = (t.gradient, t.max_field) if t.kind == "quadrupole" else (t.current,)
    return Settings(
        species=base.species.name,
        trap=tuple(float(v) for v in trap if v is not None),
        deceleration=ref.deceleration,
        initial_velocity=ref.velocity,
        final_velocity=base.deceleration.final_velocity,
        relative_spread=ref.spread,
        transverse_scale=1.0,
        mismatch=base.beam.mismatch,
        particles=base.simulation.particles,
    )


def physics_scenario(base: Scenario, ref: Reference, settings: Settings) -> Scenario:
    """``base`` with the species, trap and beam of ``settings``, and the building
    deceleration of :func:`_building_scenario`. Keys whose control is untouched keep
    their form in the file (a speed ratio stays a speed ratio)."""
    scenario = base
    if settings.species != base.species.name:
        scenario = scenario.replace("species", name=settings.species, mass=None, moment=None)
    if base.trap.kind == "quadrupole":
        gradient, max_field = settings.trap
        scenario = scenario.replace("trap", gradient=gradient, max_field=max_field)
    else:
        (current,) = settings.trap
        scenario = scenario.replace("trap", current=current)
    beam: dict[str, Any] = {}
    if settings.initial_velocity != ref.velocity:
        beam["temperature"] = ref.temperature * (settings.initial_velocity / ref.velocity) ** 2
    if settings.relative_spread != ref.spread:
        beam.update(relative_spread=settings.relative_spread, speed_ratio=None)
    if settings.transverse_scale != 1.0:
        scale = settings.transverse_scale
        beam["skimmer_diameter"] = base.beam.skimmer_diameter * scale
        beam["apertures"] = [[distance, diameter * scale] for distance, diameter in base.beam.apertures]
    if beam:
        scenario = scenario.replace("beam", **beam)
    return _building_scenario(scenario)


def full_scenario(physics: Scenario, settings: Settings) -> Scenario:
    """The whole scenario of ``settings`` (the file the explorer saves)."""
    return (
        physics.replace("beam", mismatch=settings.mismatch)
        .replace("deceleration", final_velocity=settings.final_velocity, deceleration=settings.deceleration)
        .replace("simulation", particles=settings.particles)
    )


@dataclass
class _TrapEntry:
    trap: Trap
    sampler: TrapSampler
    critical: float
    rest: tuple[FloatArray, FloatArray]
    uses: int = 0


@dataclass(frozen=True, eq=False)
class _BeamEntry:
    physics: Scenario
    trap: Trap
    beam: Beam
    particles: FloatArray
    temperature: float


@dataclass(frozen=True, eq=False)
class Picture:
    """Everything drawn for one setting.

    ``scenario``/``schedule`` are None (and ``problems`` says why) when the deceleration
    settings do not make a schedule; ``coils`` is None without a coil pitch in the file.
    """

    settings: Settings
    trap: Trap
    beam: Beam
    critical: float
    acceptance: TrapAcceptance
    overlap: float
    rest: tuple[FloatArray, FloatArray]
    moving: tuple[FloatArray, FloatArray]
    particles: FloatArray
    temperature: float
    scenario: Scenario | None
    schedule: Schedule | None
    coils: int | None
    coils_note: str
    problems: tuple[str, ...]


class Model:
    """The library's answers for the explorer's settings, with caches keyed by the
    settings each answer depends on. Use it from one thread; :func:`tradeoff` and the
    library calls on a :class:`Picture`'s objects may run in others."""

    def __init__(self, base: Scenario) -> None:
        self.base = base
        self.reference = reference(base)
        self.samples = base.simulation.samples
        self.rtol = base.simulation.rtol
        self.seed = base.simulation.seed
        self._traps: OrderedDict[tuple[Any, ...], _TrapEntry] = OrderedDict()
        self._beams: OrderedDict[tuple[Any, ...], _BeamEntry] = OrderedDict()

    def initial_settings(self) -> Settings:
        return settings_of(self.base, self.reference)

    def _beam(self, settings: Settings) -> _BeamEntry:
        key = settings.beam_key
        if key not in self._beams:
            physics = physics_scenario(self.base, self.reference, settings)
            built = build(physics)
            particles = built.beam.sample(VIEW_PARTICLES, seed=self.seed)
            self._beams[key] = _BeamEntry(physics, built.trap, built.beam, particles, physics.beam.temperature)
            _trim(self._beams)
        self._beams.move_to_end(key)
        return self._beams[key]

    def _trap(self, settings: Settings) -> _TrapEntry:
        key = settings.trap_key
        if key not in self._traps:
            trap = self._beam(settings).trap
            self._traps[key] = _TrapEntry(trap, TrapSampler(trap, self.samples), trap.critical_deceleration(self.samples),
                                          trap.axis_cut(0.0, self.samples))
            _trim(self._traps)
        self._traps.move_to_end(key)
        return self._traps[key]

    def critical(self, settings: Settings) -> float:
        """Critical deceleration [m/s^2] of the trap of ``settings``."""
        return self._trap(settings).critical

    def scenario(self, settings: Settings) -> Scenario:
        """The whole scenario of ``settings``, checked by building it; raises
        TiltwellError when it is invalid or does not build (e.g. a final velocity not
        below the initial one)."""
        scenario = full_scenario(self._beam(settings).physics, settings)
        build(scenario)
        return scenario

    def picture(self, settings: Settings) -> Picture:
        """Acceptances (no 6-D), overlap, cuts and schedule at ``settings``."""
        beam = self._beam(settings)
        entry = self._trap(settings)
        if entry.uses >= _SAMPLER_USES:
            entry.sampler, entry.uses = TrapSampler(entry.trap, self.samples), 0
        entry.uses += 1
        a = settings.deceleration
        acceptance = acceptances_at(entry.sampler, np.array([a], dtype=np.float64), rtol=self.rtol)[0]
        overlap = plane_product_fraction(acceptance.longitudinal, acceptance.transverse, beam.beam, settings.mismatch)
        problems: list[str] = []
        scenario: Scenario | None = None
        schedule: Schedule | None = None
        coils: int | None = None
        note = "no coil pitch in the scenario"
        try:
            scenario = full_scenario(beam.physics, settings)
            schedule = build(scenario).schedule
            pitch = scenario.deceleration.pitch
            if pitch is not None and schedule.length > MAX_COILS * pitch:
                note = f"over {MAX_COILS} coils"
                problems.append(f"the device would be {schedule.length:.3g} m long, over {MAX_COILS} coils of pitch "
                                f"{pitch:g} m: no coil timing")
            else:
                table = timing(scenario, schedule)
                coils = None if table is None else int(table.positions.size)
        except TiltwellError as error:
            note = "no schedule"
            problems.append(str(error))
        return Picture(
            settings=settings, trap=entry.trap, beam=beam.beam, critical=entry.critical, acceptance=acceptance,
            overlap=overlap, rest=entry.rest, moving=entry.trap.axis_cut(a, self.samples),
            particles=beam.particles, temperature=beam.temperature, scenario=scenario, schedule=schedule,
            coils=coils, coils_note=note, problems=tuple(problems),
        )

    def start_velocity(self, settings: Settings) -> float | None:
        """The trap's initial velocity [m/s] (beam velocity plus mismatch, as the
        scenario builds it), or None when the settings make no schedule."""
        try:
            probe = dataclasses.replace(settings, deceleration=1.0)
            return build(full_scenario(self._beam(probe).physics, probe)).schedule.initial_velocity
        except TiltwellError:
            return None

    def tradeoff_inputs(self, settings: Settings) -> TradeoffInputs:
        entry = self._trap(settings)
        return TradeoffInputs(entry.trap, self._beam(settings).beam, entry.critical, self.samples, self.rtol,
                              settings.mismatch, self.start_velocity(settings), settings.final_velocity)


def _trim(cache: OrderedDict[tuple[Any, ...], Any]) -> None:
    while len(cache) > _CACHE:
        cache.popitem(last=False)


def as_scenario(scenario: Scenario | str | os.PathLike[str] | None, default: str | os.PathLike[str]) -> Scenario:
    """``scenario`` itself, or the scenario of the TOML file at that path, or (None) the
    one in the file ``default``; anything else raises TiltwellError."""
    if scenario is None:
        return load(default)
    if isinstance(scenario, Scenario):
        return scenario
    if isinstance(scenario, (str, os.PathLike)):
        return load(scenario)
    raise TiltwellError(f"scenario must be a Scenario, a path to a TOML file, or None; got {type(scenario).__name__}")
