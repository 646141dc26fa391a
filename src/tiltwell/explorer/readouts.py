"""The numbers the explorer shows: a :class:`~tiltwell.explorer.model.Picture` as a
flat SI state, the readout texts in the units people read, and the messages that say what
is wrong with a setting."""

from __future__ import annotations

import html
import math

from . import style
from .model import Picture
from .views import barrier_picks, sci
from .widgets import DECELERATION_SPAN, READOUTS
from ..physics.constants import millikelvin

__all__ = ["HEAVY", "page_header", "problems", "state_of", "texts", "warning"]

#: State keys of the heavy checks, cleared (NaN) whenever a setting changes.
HEAVY = ("acceptance_6d", "captured_fraction_energy", "captured_fraction_energy_error", "captured_fraction_mc",
         "captured_fraction_mc_error", "mc_particles", "slow_particles", "slow_particles_low", "slow_particles_high",
         "final_temperature", "final_density")


def warning(text: str) -> str:
    """``text`` (HTML) shown as a warning; empty stays empty."""
    return f"<span style='color:{style.WARNING}'>{text}</span>" if text else ""


def problems(picture: Picture) -> list[str]:
    """What is wrong with a picture's setting, in words (plain text)."""
    acceptance, a, critical = picture.acceptance, picture.settings.deceleration, picture.critical
    found = []
    if critical <= 0.0:
        found.append("this trap has no well on its axis even at rest")
    elif not acceptance.bound and a > critical:
        found.append(f"no bound well above the critical deceleration {sci(critical)} m/s^2")
    elif not acceptance.bound:
        found.append("no bound well at this deceleration")
    elif acceptance.transverse.area == 0.0:
        found.append("no transverse well at the bottom of the tilted well")
    return found + list(picture.problems)


def state_of(picture: Picture) -> dict[str, float]:
    """The numbers of a picture, SI; NaN for what it does not have."""
    acceptance, s, schedule, nan = picture.acceptance, picture.settings, picture.schedule, math.nan
    z, moving = picture.moving
    picks = barrier_picks(z, moving, acceptance.longitudinal.z_bottom)
    back = front = nan
    if picks is not None:
        bottom, b, f = picks
        back, front = float(moving[b] - moving[bottom]), float(moving[f] - moving[bottom])
    state = {
        "deceleration": s.deceleration, "critical_deceleration": picture.critical,
        "beam_velocity": picture.beam.velocity, "final_velocity": s.final_velocity, "mismatch": s.mismatch,
        "relative_spread": s.relative_spread, "transverse_scale": s.transverse_scale,
        "nozzle_temperature": picture.temperature,
        "longitudinal_acceptance": acceptance.longitudinal.area, "transverse_acceptance": acceptance.transverse.area,
        "escape_energy": acceptance.escape_energy, "depth": acceptance.longitudinal.depth,
        "back_barrier": back, "front_barrier": front, "captured_fraction_overlap": picture.overlap,
        "initial_velocity": nan if schedule is None else schedule.initial_velocity,
        "length": nan if schedule is None else schedule.length,
        "duration": nan if schedule is None else schedule.duration,
        "coils": nan if picture.coils is None else float(picture.coils),
    }
    return state | {key: nan for key in HEAVY}


def texts(state: dict[str, float]) -> dict[str, str]:
    """Readout texts of a state, in the units people read."""
    def value(key: str, scale: float, unit: str, fmt: str = ".4g", missing: str = "—") -> str:
        number = state.get(key, math.nan)
        return f"{number * scale:{fmt}} {unit}".strip() if math.isfinite(number) else missing

    def estimate(key: str) -> str:
        p, error = state.get(key, math.nan), state.get(f"{key}_error", math.nan)
        if not math.isfinite(p):
            return "— (Monte-Carlo button)"
        return f"{p:.4g} ± {error:.2g} ({state['mc_particles']:.0f} particles)"

    def slow() -> str:
        n, low, high = (state.get(key, math.nan) for key in ("slow_particles", "slow_particles_low",
                                                              "slow_particles_high"))
        if not math.isfinite(n):
            return "— (Monte-Carlo button; needs [beam] pressure)"
        return f"{sci(n)} ({sci(low)} to {sci(high)})"

    def cloud() -> str:
        t, n = state.get("final_temperature", math.nan), state.get("final_density", math.nan)
        if not math.isfinite(t):
            return "— (Monte-Carlo button)"
        return f"{t * 1e3:.3g} mK" + (f", {sci(n * 1e-6)} /cm³" if math.isfinite(n) else "")

    critical = state.get("critical_deceleration", math.nan)
    return {
        "critical": (f"critical deceleration {sci(critical)} m/s²: no well beyond it (the slider's last "
                     f"{100 * (1 - 1 / DECELERATION_SPAN):.0f} %)" if math.isfinite(critical) else "—"),
        "longitudinal": value("longitudinal_acceptance", 1e3, "mm·m/s"),
        "transverse": value("transverse_acceptance", 1e3, "mm·m/s"),
        "acceptance_6d": value("acceptance_6d", 1e9, "(mm·m/s)³", missing="— (6-D button)"),
        "depth": value("depth", millikelvin(1.0), "mK"),
        "escape_energy": value("escape_energy", millikelvin(1.0), "mK"),
        "overlap": value("captured_fraction_overlap", 1.0, ""),
        "energetic": estimate("captured_fraction_energy"),
        "tracked": estimate("captured_fraction_mc"),
        "slow": slow(),
        "final_cloud": cloud(),
        "initial_velocity": value("initial_velocity", 1.0, "m/s"),
        "temperature": value("nozzle_temperature", 1.0, "K"),
        "length": value("length", 1.0, "m"),
        "duration": value("duration", 1e3, "ms"),
        "coils": value("coils", 1.0, "", ".0f"),
    }


def page_header(species: str, shown: dict[str, str]) -> str:
    """The head of a saved page (HTML): the species, the critical deceleration and the
    table of readouts, ``shown`` being the readout texts as displayed (HTML), keyed as in
    :data:`tiltwell.explorer.widgets.READOUTS` plus ``critical``. A readout not computed
    (shown as "— (... button)" in the explorer, where the button is) is left out: the page
    has no buttons, and says how many rows it leaves out."""
    kept = [(label, shown[key]) for key, label in READOUTS if not shown[key].startswith("—")]
    rows = "".join(f"<tr><td>{html.escape(label)}</td><td>{value}</td></tr>" for label, value in kept)
    left = len(READOUTS) - len(kept)
    note = f"<p><small>{left} readouts not computed before saving are left out.</small></p>" if left else ""
    return f"<b>tiltwell explorer</b>: {html.escape(species)}, {shown['critical']}<table>{rows}</table>{note}"
