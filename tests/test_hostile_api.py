"""Hostile arguments through the public Python API: every argument of the functions a script
calls, one at a time replaced by a value a careless or hostile caller might pass (a complex
number, a boolean, a string, None, NaN, infinity, 2**70, a huge float, a wrong object, a
list). The only way out is a normal answer or a TiltwellError whose message names the
argument; never another exception (AttributeError, TypeError, OverflowError, numpy's
errors), and never a complex number cut to its real part or a boolean taken as 1.

The reference is the argument contract itself (DESIGN.md: "Bad input raises ValueError that
names the argument"); each call is first made with good values and must succeed.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable
from typing import Any

import numpy as np
import pytest

import tiltwell as tw
from tiltwell import TiltwellError

OH = tw.species("OH")
Z = np.linspace(-0.01, 0.01, 401)
U = OH.moment * 100.0 * np.abs(Z)
TRAP = tw.Trap(tw.IdealQuadrupole(100.0, 0.32), OH, ((-0.006, 0.006), (-0.006, 0.006), (-0.003, 0.003)))
ROW = tw.CoilArray(count=12, pitch=0.005, radius=0.008, turns=20, active=4)
PLAN = tw.constant_deceleration(400.0, 20.0, length=1.0)
LIMITS = tw.HardwareLimits()
CLOUD = np.zeros((4, 6))
SOURCE = tw.Source(gas=tw.gas("Kr"), temperature=300.0, mass=OH.mass, valve_open_time=2e-5, nozzle_diameter=5e-4,
                   nozzle_skimmer_distance=0.08, skimmer_diameter=2e-3, flight_distance=0.25, speed_ratio=20.0)
BEAM = SOURCE.beam()
DEMO = tw.scenario.load(tw.scenario.__file__.replace("scenario.py", "data/demo.toml"))

#: Values a careless or hostile caller passes where a number (or an array) is wanted.
HOSTILE: tuple[Any, ...] = (complex(1.0, 1.0), np.complex128(2.0 + 0.5j), True, np.True_, "1.0", None, math.nan,
                            math.inf, -math.inf, 2**70, 1e300, -1e300, object(), [1.0, 2.0])

#: Values that must never be taken as a number: complex ones (cut to their real part) and booleans.
NEVER_NUMBERS = (complex(1.0, 1.0), np.complex128(2.0 + 0.5j), True, np.True_)


def _call(function: Callable[..., Any], kwargs: dict[str, Any]) -> Any:
    with warnings.catch_warnings():
        warnings.simplefilter("error", np.exceptions.ComplexWarning)
        return function(**kwargs)


#: name -> (callable, a good call's keyword arguments, the arguments that must be numbers).
CASES: dict[str, tuple[Callable[..., Any], dict[str, Any], tuple[str, ...]]] = {
    "separatrix": (tw.separatrix, {"z": Z, "U": U, "mass": OH.mass}, ("mass",)),
    "loop_field": (tw.loop_field, {"points": [[0.0, 0.0, 0.01]], "radius": 0.01, "z": 0.0, "current": 10.0},
                   ("radius", "z", "current")),
    "free_jet": (tw.free_jet, {"pressure": 1e5, "temperature": 300.0, "nozzle_diameter": 5e-4, "mass": 6.6e-26,
                               "heat_capacity_ratio": 5 / 3}, ("pressure", "temperature", "nozzle_diameter", "mass",
                                                               "heat_capacity_ratio")),
    "majorana_rate": (tw.majorana_rate, {"mass": OH.mass, "moment": OH.moment, "gradient": 100.0, "temperature": 1e-3},
                      ("mass", "moment", "gradient", "temperature")),
    "mutual_inductance": (tw.mutual_inductance, {"radius_a": 0.01, "radius_b": 0.012, "distance": 0.005},
                          ("radius_a", "radius_b", "distance")),
    "terminal_velocity": (tw.terminal_velocity, {"mass": 1.4e-25, "heat_capacity_ratio": 5 / 3, "temperature": 300.0},
                          ("mass", "heat_capacity_ratio", "temperature")),
    "background_gas_rate": (tw.background_gas_rate, {"pressure": 1e-8}, ("pressure",)),
    "cone": (tw.cone, {"diameter": 0.002, "distance": 0.1}, ("diameter", "distance")),
    "constant_deceleration": (tw.constant_deceleration, {"initial_velocity": 400.0, "final_velocity": 20.0,
                                                         "length": 1.0}, ("initial_velocity", "final_velocity", "length")),
    "IdealQuadrupole": (tw.IdealQuadrupole, {"gradient": 100.0, "max_field": 0.3}, ("gradient", "max_field")),
    "anti_helmholtz": (tw.anti_helmholtz, {"radius": 0.01, "separation": 0.012, "current": 40.0, "turns": 10},
                       ("radius", "separation", "current")),
    "Coil": (tw.Coil, {"radius": 0.01, "z": 0.0, "current": 5.0}, ("radius", "z", "current")),
    "CoilArray": (tw.CoilArray, {"count": 12, "pitch": 0.005, "radius": 0.008, "turns": 20, "active": 4},
                  ("pitch", "radius")),
    "LinearZeeman": (tw.LinearZeeman, {"moment": OH.moment}, ("moment",)),
    "HardwareLimits": (tw.HardwareLimits, {"voltage": 500.0}, ("voltage",)),
    "longitudinal_acceptance": (tw.longitudinal_acceptance, {"trap": TRAP, "deceleration": 1e4, "samples": 401},
                                ("deceleration",)),
    "trap_acceptance": (tw.trap_acceptance, {"trap": TRAP, "deceleration": 1e4, "samples": 401, "include_6d": False},
                        ("deceleration",)),
    "trap_currents": (tw.trap_currents, {"array": ROW, "z_trap": [0.02, 0.025], "gradient": 2.0}, ("gradient",)),
    "waveforms": (tw.waveforms, {"array": ROW, "schedule": tw.constant_deceleration(40.0, 20.0, length=0.03),
                                 "gradient": 2.0, "times": [0.0, 1e-4]}, ("gradient",)),
    "coil_timing": (tw.coil_timing, {"schedule": PLAN, "pitch": 0.01, "peak_current": 100.0},
                    ("pitch", "peak_current")),
    "track": (tw.track, {"trap": TRAP, "particles": CLOUD, "duration": 1e-5, "time_step": 1e-6},
              ("duration", "time_step")),
    "cloud_stats": (tw.cloud_stats, {"particles": np.random.default_rng(1).normal(size=(50, 6)), "mass": OH.mass},
                    ("mass",)),
    "hold_survival": (tw.hold_survival, {"time": [0.0, 1.0]}, ()),
    "arrival_times": (tw.arrival_times, {"final": np.zeros((3, 6)) + [0, 0, 0, 0, 0, 1.0], "release_velocity": 20.0,
                                         "distance": 0.1}, ("release_velocity", "distance")),
    "populations": (tw.populations, {"source": "OH", "rotational_temperature": 5.0}, ("rotational_temperature",)),
    "capture_estimates": (tw.capture_estimates, {"trap": TRAP, "deceleration": 1e4, "beam": BEAM, "duration": 1e-4,
                                                 "particles": 200, "samples": 401, "time_step": 1e-5,
                                                 "track_particles": False},
                          ("deceleration", "duration", "time_step")),
    "acceptance_curve": (tw.acceptance_curve, {"trap": TRAP, "decelerations": [0.0, 1e4], "samples": 401},
                         ()),
    "transverse_acceptance": (tw.transverse_acceptance, {"trap": TRAP, "deceleration": 1e4, "samples": 401},
                              ("deceleration",)),
    "hardware_estimate": (tw.hardware_estimate, {"peak_current": 100.0, "pulse_duration": 1e-3, "wire_area": 1e-6,
                                                 "turns": 20, "coil_radius": 0.01, "rise_time": 1e-5,
                                                 "winding_radius": 0.001},
                          ("peak_current", "pulse_duration", "wire_area", "coil_radius", "rise_time")),
    "Aperture": (tw.Aperture, {"distance": 0.2, "diameter": 0.003}, ("distance", "diameter")),
    "moving_trap_phases": (tw.moving_trap_phases, {"array": ROW, "gradient": 2.0, "species": OH,
                                                   "box_half_widths": (0.003, 0.003, 0.004), "phases": 2,
                                                   "samples": 201}, ("gradient",)),
    "gaussian_fraction": (tw.gaussian_fraction, {"separatrix": tw.separatrix(Z, U, OH.mass), "mean": [0.0, 0.0],
                                                 "cov": [[1e-6, 0.0], [0.0, 1.0]]}, ()),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_a_good_call_works(name: str) -> None:
    function, kwargs, _ = CASES[name]
    _call(function, kwargs)


@pytest.mark.parametrize(("name", "argument"), [(name, argument) for name, (_, kwargs, _) in sorted(CASES.items())
                                                for argument in kwargs])
def test_hostile_arguments_get_a_tiltwell_error_or_an_answer(name: str, argument: str) -> None:
    function, kwargs, numbers = CASES[name]
    for value in HOSTILE:
        try:
            _call(function, {**kwargs, argument: value})
        except TiltwellError as error:
            assert str(error) and "\n" not in str(error)
            continue
        except Exception as error:  # noqa: BLE001 - what this test looks for
            pytest.fail(f"{name}({argument}={value!r}) raised {type(error).__name__}: {error}")
        if argument in numbers and any(value is bad for bad in NEVER_NUMBERS):
            pytest.fail(f"{name}({argument}={value!r}) took a complex number or a boolean as a number")


@pytest.mark.parametrize("flag", ["include_6d"])
def test_flags_must_be_booleans(flag: str) -> None:
    with pytest.raises(TiltwellError, match=flag):
        tw.trap_acceptance(TRAP, 1e4, samples=401, **{flag: "no"})


def test_a_time_step_beyond_a_tenth_of_the_crossing_is_refused() -> None:
    """The well's crossing time (z_front - z_back) / sqrt(2 depth / m) from the separatrix
    computed here; a step of a fifth of it is refused, a twentieth accepted."""
    well = tw.longitudinal_acceptance(TRAP, 1e4, samples=2001)
    crossing = (well.z_front - well.z_back) / math.sqrt(2 * well.depth / OH.mass)
    common = {"trap": TRAP, "deceleration": 1e4, "beam": BEAM, "duration": 10 * crossing, "particles": 50}
    with pytest.raises(TiltwellError, match=r"time_step \[s\] must be in \(0, .*crossing time"):
        tw.capture_estimates(**common, time_step=crossing / 5)
    assert math.isfinite(tw.capture_estimates(**common, time_step=crossing / 20).tracked)
    for bad in (math.inf, True, "1e-6", complex(1e-6, 0)):
        with pytest.raises(TiltwellError, match="time_step"):
            tw.capture_estimates(**common, time_step=bad)


def test_requests_beyond_this_machine_are_refused_with_the_estimate() -> None:
    """2**70 particles: refused at once (no allocation), naming the memory needed and free."""
    with pytest.raises(TiltwellError, match=r"needs about .* GiB of memory; this machine has .* GiB free"):
        tw.capture_estimates(TRAP, 1e4, BEAM, 1e-4, particles=2**70)


def test_a_scenario_names_its_own_keys() -> None:
    from tiltwell.workflows.demo import demo_scenario
    from tiltwell.workflows.rowtrack import estimate

    data = demo_scenario().to_dict()
    data.pop("coils")
    data["simulation"].update(particles=100, first_estimate=True)
    quick = tw.scenario.from_dict(data)
    with pytest.raises(TiltwellError, match=r"^\[simulation\] switch_on_time \[s\] must be at most the run"):
        estimate(quick.replace("simulation", switch_on_time=0.5))
    with pytest.raises(TiltwellError, match=r"^\[simulation\] time_step: time_step \[s\] must be in"):
        estimate(quick.replace("simulation", time_step=1e-3))


def test_a_figure_too_large_to_render_is_refused(tmp_path: Any) -> None:
    from matplotlib.figure import Figure

    from tiltwell.figures import save

    figure = Figure()
    figure.add_subplot().plot([0, 1], [0, 1])
    with pytest.raises(TiltwellError, match=r"240000 x 240000 pixels is refused: at most 65535"):
        save(figure, tmp_path / "poster.png", width=100, height=100, dpi=2400)
    assert not (tmp_path / "poster.png").exists()
    save(figure, tmp_path / "small.png", width=2, height=1, dpi=50)
    assert (tmp_path / "small.png").read_bytes()[:4] == b"\x89PNG"


@pytest.mark.parametrize(("section", "change", "words"), [
    ("trap", {"half_widths": [1.0, 1.0, 0.5]}, r"^\[trap\] half_widths \[m\] must be at most \(0.0512, 0.0512, 0.0256\)"),
    ("species", {"name": "XX"}, r"^\[species\] name: unknown species 'XX'"),
    ("beam", {"gas": "Qq"}, r"^\[beam\] gas: unknown gas 'Qq'"),
    ("beam", {"mismatch": 1e4}, r"^\[deceleration\] rise_time: .*top speed \(1.039e\+04 m/s"),
])
def test_cross_key_refusals_name_the_scenario_keys(section: str, change: dict[str, Any], words: str) -> None:
    """A box 16 x 16 x 8 max_field / gradient is the largest allowed (4 times the default box
    4, 4, 2 x max_field / gradient = 3.2 mm for 0.32 T and 100 T/m)."""
    from tiltwell.workflows.demo import demo_scenario

    with pytest.raises(TiltwellError, match=words):
        scenario = demo_scenario().replace("simulation", track=False, particles=500, first_estimate=True)
        tw.summarise(scenario.replace(section, **change))


def test_choices_ignore_case_and_numpy_integers_are_integers() -> None:
    from tiltwell.workflows.demo import demo_scenario

    scenario = demo_scenario().replace("trap", kind="QUADRUPOLE").replace("simulation", particles=np.int64(500))
    assert scenario.trap.kind == "quadrupole" and scenario.simulation.particles == 500
    assert isinstance(scenario.simulation.particles, int)


@pytest.mark.parametrize("call", [
    lambda: tw.summarise("demo.toml"), lambda: tw.summarise(None), lambda: tw.build(1),
    lambda: tw.sweep(object(), [1e4]), lambda: tw.search("x", ["trap.gradient=1,2"]),
    lambda: tw.optimise(object(), ["trap.gradient=1:2"]), lambda: tw.search(DEMO, [3.0]),
    lambda: tw.pareto_front("a", "b"),
], ids=["summarise-str", "summarise-none", "build-int", "sweep-object", "search-str", "optimise-object",
        "search-number-as-key", "pareto-text"])
def test_wrong_objects_in_the_workflows_are_named(call: Callable[[], Any]) -> None:
    with pytest.raises(TiltwellError, match=r"must be|each varied key"):
        call()


def test_a_varied_key_may_be_given_as_text() -> None:
    from tiltwell.workflows.searchkeys import design_points

    points = design_points("trap.gradient=80,100")
    assert points == [{"trap.gradient": 80.0}, {"trap.gradient": 100.0}]


def test_an_error_names_its_argument_and_keeps_it_through_pickle() -> None:
    """The refused argument travels with the error (as a process pool or Dask sends it back),
    so a scenario's own key can be named without reading the message."""
    import pickle

    with pytest.raises(TiltwellError) as caught:
        tw.majorana_rate(OH.mass, OH.moment, -1.0, 1e-3)
    assert caught.value.argument == "gradient"
    again = pickle.loads(pickle.dumps(caught.value))
    assert again.argument == "gradient" and str(again) == str(caught.value)
    from tiltwell._base.files import WriteError

    assert isinstance(WriteError("cannot write 'x': full"), OSError)
