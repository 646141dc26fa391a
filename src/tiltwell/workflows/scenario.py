"""Scenario files: a whole planning case in one TOML file, validated on load.

Five sections and optional others, every key with its unit and allowed range
(``tiltwell.workflows.scenario.describe()`` prints them all):

``[species]`` the particle; ``[trap]`` the trap (an ideal quadrupole of finite depth, or an
anti-Helmholtz coil pair) and its box; ``[beam]`` the source and flight path;
``[deceleration]`` the target final velocity and the deceleration or length, optionally the
coil-array pitch and current pulse for the timing table; ``[simulation]`` sample size,
seed and numerics; optionally ``[coils]``, the real coil row of the decelerator (winding,
current limit, number of active coils, waveform table step): where given, every number of
the scenario comes from that row (:mod:`tiltwell.workflows.devicemodel`); ``[hold]`` a hold
in the stopped trap; ``[limits]`` the hardware ratings; ``[detector]`` the time-of-flight
detector (:mod:`tiltwell.workflows.traces`). The optional sections live in
:mod:`tiltwell.workflows.sections`. A real-number key may carry an
uncertainty, ``{ value = X, uncertainty = U }`` (:data:`~tiltwell.workflows.keys.UNCERTAINTY_SYNTAX`):
the section holds X, :attr:`Scenario.uncertainties` holds U, and saving writes the same form.

Every key is declared with its :class:`~tiltwell.workflows.keys.KeySpec` (kind, unit, range,
default), and loading converts each value through the one validation helper
(:mod:`tiltwell._base.validation`), reporting the first problem naming the section, key,
unit, allowed range and the value found; an unknown section or key is an error that
suggests the close match. Saving writes a temporary file beside the target and renames it
over, so a crash never leaves a half-written scenario, and ``load(save(x)) == x``.
"""

from __future__ import annotations

import dataclasses
import difflib
import os
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import tomli_w

from .._base.files import atomic_write_text
from .._base.validation import TiltwellError
from .keys import UNCERTAINTY_SYNTAX, KeySpec, Uncertainties, key, spec_of
from .sections import CoilsSection, DetectorSection, HoldSection, LimitsSection

__all__ = [
    "BeamSection",
    "CoilsSection",
    "DecelerationSection",
    "DetectorSection",
    "HoldSection",
    "LimitsSection",
    "Scenario",
    "SimulationSection",
    "SpeciesSection",
    "TrapSection",
    "Uncertainties",
    "box_half_widths",
    "check_scenario",
    "describe",
    "key_spec",
    "load",
    "loads",
    "save",
]


@dataclass(frozen=True)
class SpeciesSection:
    name: str = key("text", "", "catalogue name (tiltwell.catalogue()), or the label of a custom species",
                    required=True)
    mass: float | None = key("number", "kg", "mass of a custom species (give with moment)", 0.0, 1e-22, open_low=True)
    moment: float | None = key("number", "J/T", "linear Zeeman moment of a custom species (give with mass)", 0.0, 1e-21,
                               open_low=True)


@dataclass(frozen=True)
class TrapSection:
    kind: str = key("choice", "", "the trap", choices=("quadrupole", "coils"), required=True)
    half_widths: tuple[float, ...] | None = key(
        "triple", "m", "half widths (x, y, z) of the trap box around the field zero; quadrupole default: 4, 4, 2 x "
        "max_field/gradient", 0.0, 10.0, open_low=True, form="three numbers [x, y, z]")
    gradient: float | None = key("number", "T/m", "axial gradient of the quadrupole", 0.0, 1e5, open_low=True)
    max_field: float | None = key("number", "T", "field where the quadrupole's depth is cut", 0.0, 100.0, open_low=True)
    radius: float | None = key("number", "m", "coil mean radius", 0.0, 10.0, open_low=True)
    separation: float | None = key("number", "m", "distance between the two coil planes", 0.0, 20.0, open_low=True)
    current: float | None = key("number", "A", "current per turn", 0.0, 1e6, open_low=True)
    turns: int | None = key("integer", "", "turns per coil", 1, 1e6)
    width: float | None = key("number", "m", "radial extent of a winding", 0.0, 10.0)
    height: float | None = key("number", "m", "axial extent of a winding", 0.0, 10.0)


@dataclass(frozen=True)
class BeamSection:
    gas: str = key("text", "", "carrier gas name (He, Ne, Ar, Kr, Xe, H2, N2, O2)", required=True)
    temperature: float = key("number", "K", "nozzle stagnation temperature", 0.0, 5000.0, open_low=True, required=True)
    speed_ratio: float | None = key("number", "", "speed ratio v/alpha (or give relative_spread)", 0.0, 1000.0,
                                    open_low=True)
    relative_spread: float | None = key("number", "", "rms velocity spread over mean velocity", 0.0, 1.0, open_low=True)
    valve_open_time: float = key("number", "s", "valve opening time", 0.0, 1.0, open_low=True, required=True)
    nozzle_diameter: float = key("number", "m", "nozzle orifice diameter", 0.0, 0.1, open_low=True, required=True)
    nozzle_skimmer_distance: float = key("number", "m", "nozzle to skimmer", 0.0, 10.0, open_low=True, required=True)
    skimmer_diameter: float = key("number", "m", "skimmer orifice diameter", 0.0, 0.1, open_low=True, required=True)
    flight_distance: float = key("number", "m", "nozzle to the point where the trap is switched on", 0.0, 100.0,
                                 open_low=True, required=True)
    apertures: tuple[tuple[float, float], ...] = key(
        "pairs", "m", "further apertures as [[distance from nozzle, diameter], ...]", 0.0, 100.0, default=(),
        open_low=True, form="a list of [distance, diameter] pairs")
    mismatch: float = key("number", "m/s", "trap velocity minus beam velocity at switch-on", -1e4, 1e4, default=0.0)
    pressure: float | None = key("number", "Pa", "nozzle stagnation pressure, for absolute numbers of particles (give "
                                 "with seed_fraction; left out: fractions only)", 0.0, 1e8, open_low=True)
    seed_fraction: float | None = key("number", "", "mole fraction of the species in the gas (1: the gas is the "
                                      "species alone; give with pressure)", 0.0, 1.0, open_low=True)
    peaking_factor: float | None = key("number", "", "centre-line peaking factor of the free jet (default: by the "
                                       "gas's heat-capacity ratio)", 0.0, 10.0, open_low=True)
    rotational_temperature: float | None = key("number", "K", "rotational temperature of the species in the beam, "
                                               "for the share in the trapped state (default: all in that state)",
                                               0.0, 1000.0, open_low=True)


@dataclass(frozen=True)
class DecelerationSection:
    final_velocity: float = key("number", "m/s", "velocity at the end of the deceleration", 0.0, 1e5, required=True)
    deceleration: float | None = key("number", "m/s^2", "constant deceleration (or give length)", 0.0, 1e9,
                                     open_low=True)
    length: float | None = key("number", "m", "deceleration length (or give deceleration)", 0.0, 1e3, open_low=True)
    pitch: float | None = key("number", "m", "coil-array pitch, for the timing table", 0.0, 1.0, open_low=True)
    peak_current: float | None = key("number", "A", "coil current pulse height, for the timing table", 0.0, 1e6,
                                     open_low=True)
    rise_time: float = key("number", "s", "current rise time of each coil", 0.0, 1.0, default=0.0)


@dataclass(frozen=True)
class SimulationSection:
    particles: int = key("integer", "", "Monte-Carlo sample size", 1, 1e8, default=10_000)
    seed: int = key("integer", "", "random seed", 0, 2**63 - 1, default=0)
    method: str = key("choice", "", "integrator", default="verlet", choices=("verlet", "yoshida4"))
    time_step: float | None = key("number", "s", "integrator step (default: well crossing time / 100)", 0.0, 1.0,
                                  open_low=True)
    samples: int = key("integer", "", "samples of each 1-D cut", 101, 100_001, default=2001)
    rtol: float = key("number", "", "relative accuracy of the 6-D acceptance", 1e-4, 0.5, default=1e-2)
    track: bool = key("boolean", "", "integrate trajectories (false: overlap and energetic only)", default=True)
    switch_on_time: float = key("number", "s", "linear ramp of the trap depth at switch-on (trajectories only)", 0.0,
                                1.0, default=0.0)
    detector_distance: float | None = key("number", "m", "time-of-flight detector beyond the trap centre at release",
                                          0.0, 100.0, open_low=True)
    first_estimate: bool = key("boolean", "", "take the trap from the trap section (the ideal quadrupole: a "
                               "quick first estimate) even where a coils section gives the coil row", default=False)
    track_through: str = key("choice", "", "what the trajectories of a coil-row scenario go through: \"twin\", the "
                             "row's phase-averaged rigid trap, or \"row\", the time-dependent row itself "
                             "(lab frame; measured on the demo: 6.5e3 particles/s through the row, 2.1e4/s through the twin)",
                             default="twin", choices=("twin", "row"))
    spin_flips: bool = key("boolean", "", "count non-adiabatic spin flips at the field zero as a loss in the tracked "
                           "estimate", default=False)


_SECTIONS: dict[str, type] = {
    "species": SpeciesSection,
    "trap": TrapSection,
    "beam": BeamSection,
    "deceleration": DecelerationSection,
    "simulation": SimulationSection,
    "coils": CoilsSection,
    "hold": HoldSection,
    "limits": LimitsSection,
    "detector": DetectorSection,
}

#: Sections that may be left out, and what they default to.
_OPTIONAL: dict[str, Any] = {"simulation": {}, "coils": None, "hold": None, "limits": {}, "detector": None}

#: What :func:`describe` says about a section besides its keys.
_NOTES: dict[str, str] = {"coils": " ".join(str(CoilsSection.__doc__).split()),
                         "hold": str(HoldSection.__doc__), "limits": " ".join(str(LimitsSection.__doc__).split()),
                         "detector": " ".join(str(DetectorSection.__doc__).split())}


@dataclass(frozen=True)
class Scenario:
    """A validated planning case. Build it with :func:`load` or :func:`loads`.

    ``uncertainties`` maps ``"section.key"`` to the standard uncertainty of that input in
    the key's unit (the section holds the nominal value); empty when no input has one."""

    species: SpeciesSection
    trap: TrapSection
    beam: BeamSection
    deceleration: DecelerationSection
    simulation: SimulationSection = SimulationSection()
    coils: CoilsSection | None = None
    hold: HoldSection | None = None
    limits: LimitsSection = LimitsSection()
    detector: DetectorSection | None = None
    uncertainties: Uncertainties = Uncertainties()

    def to_dict(self) -> dict[str, dict[str, Any]]:
        """Plain nested dict of the given values (None omitted, tuples as lists), as written
        to TOML; an uncertain input is ``{"value": X, "uncertainty": U}``."""
        out: dict[str, dict[str, Any]] = {}
        for name in _SECTIONS:
            section = getattr(self, name)
            if section is not None:
                out[name] = {item.name: self._entry(f"{name}.{item.name}", getattr(section, item.name))
                             for item in dataclasses.fields(section) if getattr(section, item.name) is not None}
        return out

    def _entry(self, where: str, value: Any) -> Any:
        if where in self.uncertainties:
            return {"value": value, "uncertainty": self.uncertainties[where]}
        return _plain(value)

    def replace(self, section: str, **changes: Any) -> Scenario:
        """A copy with keys of one section changed (None removes a key), validated like a
        loaded file. A plain value replaces the key's uncertainty too; give
        ``{"value": X, "uncertainty": U}`` to set one."""
        data = self.to_dict()
        if section not in _SECTIONS:
            raise _unknown("section", f"[{section}]", [f"[{known}]" for known in _SECTIONS])
        data.setdefault(section, {})
        for name, value in changes.items():
            if value is None:
                data[section].pop(name, None)
            else:
                data[section][name] = value
        return from_dict(data)


def _unknown(what: str, name: str, known: list[str], where: str = "") -> TiltwellError:
    close = difflib.get_close_matches(name, known, n=1)
    hint = f"; did you mean '{close[0]}'?" if close else f"; known: {', '.join(known)}"
    return TiltwellError(f"unknown {what} '{where}{name}'{hint}")


def _plain(value: Any) -> Any:
    """Tuples (at any depth) as lists, as TOML writes arrays."""
    return [_plain(v) for v in value] if isinstance(value, tuple) else value


def from_dict(data: Mapping[str, Any]) -> Scenario:
    """Validate a nested mapping (as parsed from TOML) into a :class:`Scenario`."""
    if not isinstance(data, Mapping):
        raise TiltwellError(f"a scenario must be a table of sections; got {type(data).__name__}")
    for name in data:
        if name not in _SECTIONS:
            raise _unknown("section", f"[{name}]", [f"[{known}]" for known in _SECTIONS])
    sections: dict[str, Any] = {}
    uncertain: dict[str, float] = {}
    for name, cls in _SECTIONS.items():
        raw = data.get(name, _OPTIONAL.get(name))
        if raw is None:
            if name in _OPTIONAL:
                sections[name] = None
                continue
            raise TiltwellError(f"missing section [{name}]")
        if not isinstance(raw, Mapping):
            raise TiltwellError(f"[{name}] must be a table; got {raw!r}")
        specs = {item.name: spec_of(item) for item in dataclasses.fields(cls)}
        for key_name in raw:
            if key_name not in specs:
                raise _unknown("key", key_name, list(specs), f"[{name}] ")
        values = {}
        for key_name, spec in specs.items():
            if key_name in raw:
                values[key_name], uncertainty = spec.convert_uncertain(f"[{name}] {key_name}", raw[key_name])
                if uncertainty is not None:
                    uncertain[f"{name}.{key_name}"] = uncertainty
            elif spec.required:
                raise TiltwellError(f"[{name}] {key_name} is required ({spec.doc})")
        sections[name] = cls(**values)
    scenario = Scenario(**sections, uncertainties=Uncertainties(uncertain))
    _check_together(scenario)
    return scenario


def _exactly_one(section: str, first: str, second: str, a: Any, b: Any) -> None:
    if (a is None) == (b is None):
        raise TiltwellError(f"[{section}] give exactly one of {first} and {second}")


def _check_together(s: Scenario) -> None:
    """Rules that tie keys together."""
    if (s.species.mass is None) != (s.species.moment is None):
        raise TiltwellError("[species] give both mass [kg] and moment [J/T] for a custom species, or neither")
    needed = {"quadrupole": ("gradient", "max_field"), "coils": ("radius", "separation", "current", "half_widths")}
    for name in needed[s.trap.kind]:
        if getattr(s.trap, name) is None:
            raise TiltwellError(f"[trap] {name} is required when kind = \"{s.trap.kind}\"")
    unused = {"quadrupole": ("radius", "separation", "current", "turns", "width", "height"),
              "coils": ("gradient", "max_field")}
    for name in unused[s.trap.kind]:
        if getattr(s.trap, name) is not None:
            raise TiltwellError(f"[trap] {name} does not apply when kind = \"{s.trap.kind}\"")
    if s.trap.kind == "quadrupole" and s.trap.half_widths is not None:
        _check_quadrupole_box(s.trap)
    _exactly_one("beam", "speed_ratio", "relative_spread", s.beam.speed_ratio, s.beam.relative_spread)
    if (s.beam.pressure is None) != (s.beam.seed_fraction is None):
        raise TiltwellError("[beam] give both pressure [Pa] and seed_fraction [1] for absolute numbers of particles "
                            "(seed_fraction = 1.0 for a beam of the species alone), or neither")
    _exactly_one("deceleration", "deceleration", "length", s.deceleration.deceleration, s.deceleration.length)
    if (s.deceleration.pitch is None) != (s.deceleration.peak_current is None):
        raise TiltwellError("[deceleration] give both pitch [m] and peak_current [A] for the timing table, or neither")
    if s.coils is not None:
        _check_coils(s)


def box_half_widths(trap: TrapSection) -> tuple[float, float, float]:
    """Half widths (hx, hy, hz) [m] of the trap box: ``half_widths`` when given, else (for
    an ideal quadrupole) 4, 4 and 2 times max_field / gradient, twice the truncation surface."""
    if trap.half_widths is not None:
        hx, hy, hz = trap.half_widths
        return hx, hy, hz
    assert trap.gradient is not None and trap.max_field is not None
    edge = trap.max_field / trap.gradient
    return 4 * edge, 4 * edge, 2 * edge


#: Largest trap box of an ideal quadrupole, in units of its default box (4, 4, 2) max_field
#: / gradient: the answers agree to 1e-3 up to 4 times the default and drift beyond it (at 8
#: times, the transverse acceptance 13 % and the 6-D one 35 % low on the demo's quadrupole,
#: measured), as a larger box samples the well too coarsely.
MAX_BOX_SCALE = 4.0


def _check_quadrupole_box(trap: TrapSection) -> None:
    assert trap.gradient is not None and trap.max_field is not None and trap.half_widths is not None
    edge = trap.max_field / trap.gradient
    largest = tuple(MAX_BOX_SCALE * factor * edge for factor in (4.0, 4.0, 2.0))
    if any(h > limit * (1 + 1e-12) for h, limit in zip(trap.half_widths, largest)):
        raise TiltwellError(
            f"[trap] half_widths [m] must be at most ({', '.join(f'{v:.4g}' for v in largest)}) for this quadrupole: "
            f"it holds nothing beyond |B| = max_field ({2 * edge:.4g} m off the axis, {edge:.4g} m along it), and a "
            f"box more than {MAX_BOX_SCALE:g} times the default samples the well too coarsely; "
            f"got {list(trap.half_widths)} (leave half_widths out for the default box)")


def _check_coils(s: Scenario) -> None:
    """The [coils] rules that need other sections."""
    c, pitch = s.coils, s.deceleration.pitch
    assert c is not None
    if pitch is None:
        raise TiltwellError("[coils] needs the coil pitch: give [deceleration] pitch [m] (and peak_current [A])")
    if c.gradient is None and s.trap.kind != "quadrupole":
        raise TiltwellError(f"[coils] gradient [T/m] is required when [trap] kind = \"{s.trap.kind}\"")
    if c.height > pitch:
        raise TiltwellError(f"[coils] height [m] must be at most [deceleration] pitch = {pitch:g} m "
                            f"(neighbouring windings would overlap); got {c.height!r}")
    # The trap box is fitted into the bore where the coils are used (tiltwell.workflows.devicemodel.trap_box):
    # a quadrupole's default box follows its gradient, which the explorer varies without touching [coils].


def loads(text: str) -> Scenario:
    """Parse and validate scenario TOML text."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise TiltwellError(f"scenario is not valid TOML: {error}") from None
    return from_dict(data)


def load(path: str | os.PathLike[str]) -> Scenario:
    """Read and validate a scenario file: UTF-8 text (a leading UTF-8 byte-order mark, as
    some Windows editors write, is accepted and skipped). Bytes that are not UTF-8 (Latin-1,
    UTF-16, a binary file) are one TiltwellError naming the file and the first bad byte's
    offset."""
    try:
        raw = Path(path).read_bytes()
    except OSError as error:
        raise TiltwellError(f"cannot read scenario file {str(path)!r}: {error.strerror or error}") from None
    try:
        text = raw.decode("utf-8-sig").replace("\r\n", "\n").replace("\r", "\n")  # newlines as read_text gives
    except UnicodeDecodeError as error:
        hint = " (it starts with a UTF-16 byte-order mark)" if raw[:2] in (b"\xff\xfe", b"\xfe\xff") else ""
        raise TiltwellError(f"scenario file {str(path)!r} is not UTF-8 text{hint}: byte 0x{raw[error.start]:02x} at "
                            f"offset {error.start}; save it as UTF-8") from None
    try:
        return loads(text)
    except TiltwellError as error:
        raise TiltwellError(f"{path}: {error}") from None


def dumps(scenario: Scenario) -> str:
    """The scenario as TOML text, an uncertain input as an inline table on one line."""
    chunks = []
    for name, table in scenario.to_dict().items():
        lines = [f"{key_name} = {{ {', '.join(tomli_w.dumps(value).strip().splitlines())} }}\n"
                 if isinstance(value, Mapping) else tomli_w.dumps({key_name: value}) for key_name, value in table.items()]
        chunks.append(f"[{name}]\n" + "".join(lines))
    return "\n".join(chunks)


def save(scenario: Scenario, path: str | os.PathLike[str]) -> Path:
    """Write ``scenario`` to ``path`` atomically (temporary file, then rename)."""
    return atomic_write_text(Path(path), dumps(scenario))


def check_scenario(scenario: object, name: str = "scenario") -> Scenario:
    """``scenario`` if it is a :class:`Scenario`, else a TiltwellError saying how to make one."""
    if not isinstance(scenario, Scenario):
        raise TiltwellError(f"{name} must be a tiltwell Scenario (tiltwell.scenario.load(path) reads one); "
                            f"got {type(scenario).__name__}")
    return scenario


def key_spec(name: str) -> KeySpec:
    """The :class:`~tiltwell.workflows.keys.KeySpec` of the key ``"section.key"``; an unknown
    section or key is an error that suggests the close match."""
    section, dot, key_name = str(name).partition(".")
    if not dot:
        raise TiltwellError(f"a key is named section.key (for example deceleration.deceleration); got {name!r}")
    if section not in _SECTIONS:
        raise _unknown("section", f"[{section}]", [f"[{known}]" for known in _SECTIONS])
    specs = {item.name: spec_of(item) for item in dataclasses.fields(_SECTIONS[section])}
    if key_name not in specs:
        raise _unknown("key", key_name, list(specs), f"[{section}] ")
    return specs[key_name]


def describe() -> str:
    """Every section and key with unit, allowed range, default and meaning
    (:meth:`~tiltwell.workflows.keys.KeySpec.describe`)."""
    lines = []
    for name, cls in _SECTIONS.items():
        lines.append(f"[{name}]" + (" (optional section)" if name in _OPTIONAL else ""))
        if name in _NOTES:
            lines.append(f"  {_NOTES[name]}")
        lines.extend(f"  {spec_of(item).describe(item.name)}" for item in dataclasses.fields(cls))
    lines.append(UNCERTAINTY_SYNTAX[0].upper() + UNCERTAINTY_SYNTAX[1:] + ".")
    return "\n".join(lines)
