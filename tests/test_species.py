"""Tests of tiltwell.species. Every numerical check names its outside reference beside it."""

from __future__ import annotations

import dataclasses
import re

import numpy as np
import pytest
import scipy.constants as sc

from tiltwell._base.validation import TiltwellError
from tiltwell.physics.constants import BOHR_MAGNETON, ELECTRON_G, NUCLEAR_MAGNETON, PLANCK
from tiltwell.physics.species import (
    OH_ROTATION,
    OH_SPIN_ORBIT,
    BreitRabi,
    LinearZeeman,
    Species,
    TabulatedZeeman,
    ZeemanModel,
    catalogue,
    species,
)

MU_B = BOHR_MAGNETON
H_HYPERFINE = 1420.405751768e6  # Hz, hydrogen maser frequency, from memory
PC = sc.physical_constants


# --- independent brute force: A I·J + mu_B (g_J J_z + g_I I_z) B in the |mJ, mI> basis ---------

def spin_matrices(s: float) -> tuple[np.ndarray, np.ndarray]:
    """S_z and S_+ for spin s, basis m = s, s-1, ..., -s."""
    m = s - np.arange(round(2 * s) + 1)
    raise_ = np.diag(np.sqrt(s * (s + 1) - m[1:] * (m[1:] + 1)), k=1)
    return np.diag(m), raise_


def brute_levels(model: BreitRabi, field: float) -> float:
    """Energy of model's state (incl. zero-field offset) by numpy.linalg.eigvalsh."""
    spin, split = model.nuclear_spin, model.hyperfine_splitting
    jz, jp = spin_matrices(0.5)
    iz, ip = spin_matrices(spin)
    a = split / (spin + 0.5)  # dE = A (I + 1/2) for J = 1/2
    i_dot_j = np.kron(jz, iz) + 0.5 * (np.kron(jp, ip.T) + np.kron(jp.T, ip))
    zeeman = MU_B * field * (model.g_J * np.kron(jz, np.eye(iz.shape[0])) + model.g_I * np.kron(np.eye(2), iz))
    hamiltonian = a * i_dot_j + zeeman
    total_m = np.diag(np.kron(jz, np.eye(iz.shape[0])) + np.kron(np.eye(2), iz))
    block = np.flatnonzero(np.abs(total_m - model.mF) < 1e-9)  # F_z is conserved
    levels = np.linalg.eigvalsh(hamiltonian[np.ix_(block, block)])
    # dE > 0 here: in each mF block the upper level belongs to F = I + 1/2
    return float(levels[-1] if model.F > spin else levels[0])


def all_states(name: str) -> list[tuple[str, float, float]]:
    spin = species(name).zeeman.nuclear_spin  # type: ignore[attr-defined]
    cases = []
    for f in (spin + 0.5, spin - 0.5):
        for k in range(round(2 * f) + 1):
            cases.append((name, f, -f + k))
    return cases


def state_of(name: str, f: float, m: float) -> BreitRabi:
    base = species(name).zeeman
    assert isinstance(base, BreitRabi)
    return dataclasses.replace(base, F=f, mF=m)


STATES = all_states("H") + all_states("D") + all_states("Rb-87")
STATE_IDS = [f"{n}-F{f:g}-m{m:g}" for n, f, m in STATES]
ALKALI_STATES = STATES + all_states("Li-7") + all_states("Na-23") + all_states("K-39")
ALKALI_IDS = [f"{n}-F{f:g}-m{m:g}" for n, f, m in ALKALI_STATES]


# --- Breit–Rabi ------------------------------------------------------------------------------

@pytest.mark.parametrize("mF", [-1, 0, 1])
def test_hydrogen_zero_field_splitting(mF: int) -> None:
    # Reference: hydrogen ground-state hyperfine frequency 1420.405751768 MHz (hydrogen maser;
    # Hellwig et al., IEEE Trans. Instrum. Meas. 19, 200 (1970)), from memory.
    upper = state_of("H", 1, mF)
    lower = state_of("H", 0, 0)
    gap = (upper.energy(0.0) + upper.zero_field_energy) - (lower.energy(0.0) + lower.zero_field_energy)
    assert gap == pytest.approx(PLANCK * H_HYPERFINE, rel=1e-12)


def fermi_splitting(spin: float, moment_ratio: float, nuclear_mass: float) -> float:
    """Fermi contact splitting [Hz]: A = (2 mu0/3) g_e mu_B (mu_I/I) |psi(0)|^2, dE = A (I+1/2)."""
    reduced = sc.m_e * nuclear_mass / (sc.m_e + nuclear_mass)
    radius = PC["Bohr radius"][0] * sc.m_e / reduced
    a = 2 * sc.mu_0 / 3 * ELECTRON_G * MU_B * moment_ratio * NUCLEAR_MAGNETON / spin / (np.pi * radius**3)
    return a * (spin + 0.5) / PLANCK


@pytest.mark.parametrize(
    ("name", "spin", "moment_key", "mass_key"),
    [("H", 0.5, "proton mag. mom. to nuclear magneton ratio", "proton mass"),
     ("D", 1.0, "deuteron mag. mom. to nuclear magneton ratio", "deuteron mass")],
    ids=["H", "D"],
)
def test_catalogue_splitting_against_fermi_contact(name: str, spin: float, moment_key: str, mass_key: str) -> None:
    # Reference: Fermi contact formula (E. Fermi, Z. Phys. 60, 320 (1930); Bethe & Salpeter,
    # Quantum Mechanics of One- and Two-Electron Atoms, sec. 22), from memory, with CODATA
    # constants from scipy. QED and nuclear-structure corrections are ~1e-4 (from memory).
    model = species(name).zeeman
    assert isinstance(model, BreitRabi)
    expected = fermi_splitting(spin, PC[moment_key][0], PC[mass_key][0])
    assert model.hyperfine_splitting / PLANCK == pytest.approx(expected, rel=1e-3)


@pytest.mark.parametrize(("name", "f", "m"), STATES, ids=STATE_IDS)
def test_breit_rabi_matches_diagonalisation(name: str, f: float, m: float) -> None:
    # Reference: independent brute-force diagonalisation (numpy.linalg.eigvalsh) of
    # A I·J + mu_B (g_J J_z + g_I I_z) B built from spin matrices.
    model = state_of(name, f, m)
    fields = np.array([0.0, 1e-5, 1e-3, 0.01, 0.05, 0.2, 0.5, 1.0, 3.0])
    expected = np.array([brute_levels(model, b) for b in fields])
    got = model.energy(fields) + model.zero_field_energy
    np.testing.assert_allclose(got, expected, rtol=0, atol=1e-10 * model.hyperfine_splitting)


def lande_g_f(model: BreitRabi) -> float:
    f, spin, j = model.F, model.nuclear_spin, 0.5
    if f == 0:
        return 0.0
    ff, ii, jj = f * (f + 1), spin * (spin + 1), j * (j + 1)
    return model.g_J * (ff - ii + jj) / (2 * ff) + model.g_I * (ff + ii - jj) / (2 * ff)


@pytest.mark.parametrize(("name", "f", "m"), ALKALI_STATES, ids=ALKALI_IDS)
def test_weak_field_slope_is_lande(name: str, f: float, m: float) -> None:
    # Reference: Lande g_F including the nuclear term, as in D. A. Steck, "Rubidium 87 D Line
    # Data" (from memory); Foot, Atomic Physics (OUP 2005), ch. 6, gives the g_J part.
    model = state_of(name, f, m)
    expected = lande_g_f(model) * m * MU_B
    assert float(model.derivative(0.0)) == pytest.approx(expected, rel=1e-12, abs=1e-12 * MU_B)
    small = 1e-9 * model.hyperfine_splitting / MU_B  # x ~ 1e-9: energy/B is the slope
    assert float(model.energy(small)) / small == pytest.approx(expected, rel=1e-6, abs=1e-6 * MU_B)


@pytest.mark.parametrize(("name", "f", "m"), ALKALI_STATES, ids=ALKALI_IDS)
def test_strong_field_slope_is_paschen_back(name: str, f: float, m: float) -> None:
    # Reference: Paschen–Back limit W -> mu_B (g_J mJ + g_I mI) B (Foot, Atomic Physics, ch. 6,
    # from memory); F = I+1/2 states other than mF = -(I+1/2) go to mJ = +1/2.
    model = state_of(name, f, m)
    m_j = 0.5 if (f > model.nuclear_spin and m > -f) else -0.5
    expected = MU_B * (model.g_J * m_j + model.g_I * (m - m_j))
    strong = 1e4 * model.hyperfine_splitting / ((model.g_J - model.g_I) * MU_B)  # x = 1e4
    assert float(model.derivative(strong)) == pytest.approx(expected, rel=1e-7)


# --- all models: zero at zero field, shapes, derivatives ----------------------------------------

def sampled_table(model: ZeemanModel, top: float, n: int) -> TabulatedZeeman:
    fields = np.linspace(0.0, top, n)
    return TabulatedZeeman(fields, model.energy(fields) + 1e-24)  # offset: table is absolute


MODELS: dict[str, ZeemanModel] = {
    "linear": LinearZeeman(2 * MU_B),
    "H-F1-m0": state_of("H", 1, 0),
    "Rb87-F2-m-2": state_of("Rb-87", 2, -2),
    "Rb87-F1-m-1": state_of("Rb-87", 1, -1),
    "table-Rb87-F1-m-1": sampled_table(state_of("Rb-87", 1, -1), 0.5, 200),
}


@pytest.mark.parametrize("name", list(MODELS) + [f"catalogue-{n}" for n in catalogue()])
def test_energy_is_zero_at_zero_field(name: str) -> None:
    # Reference: the definition (energies from the state's zero-field level).
    model = species(name[10:]).zeeman if name.startswith("catalogue-") else MODELS[name]
    assert isinstance(model, ZeemanModel)
    assert float(model.energy(0.0)) == 0.0


@pytest.mark.parametrize("name", list(MODELS))
def test_shapes(name: str) -> None:
    model = MODELS[name]
    scalar = model.energy(0.3)
    assert isinstance(scalar, np.ndarray) and scalar.shape == ()
    assert isinstance(model.derivative(0.3), np.ndarray) and model.derivative(0.3).shape == ()
    grid = np.full((2, 3), 0.3)
    assert model.energy(grid).shape == (2, 3) and model.derivative(grid).shape == (2, 3)
    np.testing.assert_array_equal(model.energy(grid), np.full((2, 3), float(scalar)))


@pytest.mark.parametrize("name", list(MODELS))
def test_derivative_matches_central_difference(name: str) -> None:
    # Reference: central finite differences of energy(), an independent route.
    model = MODELS[name]
    fields = np.array([0.003, 0.03, 0.12, 0.31, 0.77, 1.6])
    step = 1e-6
    numeric = (model.energy(fields + step) - model.energy(fields - step)) / (2 * step)
    np.testing.assert_allclose(model.derivative(fields), numeric, rtol=1e-6, atol=1e-8 * MU_B)


def test_linear_model() -> None:
    # Reference: closed form W = mu B.
    model = LinearZeeman(3 * MU_B)
    fields = np.array([0.0, 0.25, 2.0])
    np.testing.assert_allclose(model.energy(fields), 3 * MU_B * fields, rtol=1e-15)
    np.testing.assert_allclose(model.derivative(fields), 3 * MU_B, rtol=1e-15)


# --- tabulated model ---------------------------------------------------------------------------

def test_table_reproduces_linear_curve_and_extrapolates() -> None:
    # Reference: closed form W = mu B; PCHIP is exact on linear data and the extension is linear.
    table = sampled_table(LinearZeeman(2 * MU_B), 1.0, 200)
    fields = np.random.default_rng(1).uniform(0.0, 2.5, 500)
    np.testing.assert_allclose(table.energy(fields), 2 * MU_B * fields, rtol=1e-12, atol=1e-12 * MU_B)
    np.testing.assert_allclose(table.derivative(fields), 2 * MU_B, rtol=1e-12)


@pytest.mark.parametrize(("name", "f", "m", "top"), [("Rb-87", 1, -1, 0.5), ("H", 1, 0, 0.5)], ids=["Rb87-F1-m-1", "H-F1-m0"])
def test_table_reproduces_breit_rabi(name: str, f: float, m: float, top: float) -> None:
    # Reference: the Breit–Rabi closed form. Tolerance 1e-4 dE on energy and 1e-2 mu_B on the
    # slope at 200 samples (observed 4e-5 dE, 5e-3 mu_B); doubling the samples must cut the
    # energy error by > 3 (PCHIP is at least second order, Fritsch & Carlson 1980).
    model = state_of(name, f, m)
    errors = []
    for n in (200, 400):
        table = sampled_table(model, top, n)
        mid = 0.5 * (table.fields[1:] + table.fields[:-1])
        errors.append(np.max(np.abs(table.energy(mid) - model.energy(mid))))
        if n == 200:
            np.testing.assert_allclose(table.derivative(mid), model.derivative(mid), rtol=0, atol=1e-2 * MU_B)
    assert errors[0] < 1e-4 * model.hyperfine_splitting
    assert errors[0] > 3 * errors[1]


def test_table_has_no_overshoot() -> None:
    # Reference: shape preservation of PCHIP (Fritsch & Carlson, SIAM J. Numer. Anal. 17, 238
    # (1980)): between two samples the curve stays between their values.
    fields = np.arange(12.0) * 0.1
    energies = np.array([0, 0, 0, 1, 1, 1, 5, 5, 2, 2, 2, 2.5]) * MU_B
    table = TabulatedZeeman(fields, energies)
    for left in range(fields.size - 1):
        inside = np.linspace(fields[left], fields[left + 1], 101)
        values = table.energy(inside)
        low, high = sorted(energies[left : left + 2])
        assert np.all(values >= low - 1e-12 * MU_B) and np.all(values <= high + 1e-12 * MU_B), left


def test_table_extension_is_straight() -> None:
    # Reference: the documented rule (a straight line beyond the table), checked by second
    # differences and by the slope at the last sample against Breit–Rabi.
    model = state_of("Rb-87", 1, -1)
    table = sampled_table(model, 0.5, 200)
    beyond = np.linspace(0.5, 3.0, 11)
    w = table.energy(beyond)
    np.testing.assert_allclose(np.diff(w, 2), 0.0, atol=1e-12 * float(np.max(np.abs(w))))
    assert float(table.derivative(2.0)) == pytest.approx(float(model.derivative(0.5)), abs=1e-2 * MU_B)


# --- catalogue ---------------------------------------------------------------------------------

NUCLEONS = {"H": 1, "D": 2, "Li-7": 7, "Na-23": 23, "K-39": 39, "Rb-87": 87, "N": 14, "O2": 32,
            "Ne*": 20, "Ar*": 40, "Cr": 52, "NH": 15, "OH": 17, "CaF": 59}


def test_catalogue_names() -> None:
    assert set(catalogue()) == set(NUCLEONS)
    assert all(species(n).name == n for n in catalogue())


@pytest.mark.parametrize("name", list(NUCLEONS))
def test_mass_near_nucleon_count(name: str) -> None:
    # Reference: nucleon count of the isotopes (mass defect and electrons < 0.1 u here).
    assert species(name).mass / sc.atomic_mass == pytest.approx(NUCLEONS[name], abs=0.1)


@pytest.mark.parametrize(("name", "key"), [("H", "proton mass in u"), ("D", "deuteron mass in u")], ids=["H", "D"])
def test_hydrogen_masses_against_codata(name: str, key: str) -> None:
    # Reference: CODATA (scipy.constants) nucleus + electron - binding R_inf hc (m_r/m_e).
    nucleus, electron = PC[key][0], PC["electron mass in u"][0]
    binding = PC["Rydberg constant times hc in J"][0] * nucleus / (nucleus + electron)
    expected = nucleus + electron - binding / PC["atomic mass constant energy equivalent"][0]
    assert species(name).mass / sc.atomic_mass == pytest.approx(expected, abs=1e-9)


@pytest.mark.parametrize("name", list(NUCLEONS))
def test_catalogue_is_low_field_seeking(name: str) -> None:
    # Reference: the definition of a low-field seeker (dW/dB > 0).
    slopes = species(name).zeeman.derivative(np.array([0.0, 1e-4, 1e-2, 1.0, 5.0]))
    assert np.all(slopes > 0)


def lande(l: float, s: float, j: float) -> float:
    jj = j * (j + 1)
    return (jj - s * (s + 1) + l * (l + 1)) / (2 * jj) + ELECTRON_G * (jj + s * (s + 1) - l * (l + 1)) / (2 * jj)


def hund_a(lam: float, sigma: float, omega: float, j: float) -> float:
    return (lam + ELECTRON_G * sigma) * omega / (j * (j + 1))


def hill_van_vleck_g(j: float, y: float) -> float:
    """g of the Omega = 3/2-dominated level of a 2Pi state with Y = A/B < 2 (inverted, as OH) in
    intermediate coupling, from the Hill–Van Vleck mixing angle (E. Hill and J. H. Van Vleck,
    Phys. Rev. 32, 250 (1928)): cos 2t = |Y-2|/R, sin 2t = 2 sqrt(X^2-1)/R, R = sqrt(4X^2 +
    Y(Y-4)), X = J + 1/2; case (a) Zeeman matrix diagonal (1 + g_s/2)(3/2)/(J(J+1)),
    (1 - g_s/2)(1/2)/(J(J+1)), off-diagonal g_s sqrt(X^2-1)/(2J(J+1)) (Brown & Carrington,
    ch. 9, from memory)."""
    x2, jj = (j + 0.5) ** 2, j * (j + 1)
    r = np.sqrt(4 * x2 + y * (y - 4))
    a, b = (1 + ELECTRON_G / 2) * 1.5 / jj, (1 - ELECTRON_G / 2) * 0.5 / jj
    return float((a + b) / 2 + (a - b) / 2 * abs(y - 2) / r + ELECTRON_G * np.sqrt(x2 - 1) / (2 * jj) * 2 * np.sqrt(x2 - 1) / r)


def stretched(name: str) -> float:
    model = species(name).zeeman
    assert isinstance(model, BreitRabi)
    return model.g_J / 2 + model.g_I * model.nuclear_spin


# Expected moment / mu_B at 1 T. References (from memory): LS Lande g_J (Foot, Atomic Physics,
# ch. 5); Hund's case (b) g = g_s [J(J+1) + S(S+1) - N(N+1)] / (2 J(J+1)) (Brown & Carrington,
# Rotational Spectroscopy of Diatomic Molecules (2003), ch. 9); OH in intermediate case (a)/(b)
# coupling from the Hill–Van Vleck mixing angle (closed form above, with the catalogue's A and
# B); stretched |mJ=1/2, mI=I> is an exact eigenstate (Breit & Rabi 1931).
MOMENTS = {
    "H": lambda: stretched("H"), "D": lambda: stretched("D"), "Li-7": lambda: stretched("Li-7"),
    "Na-23": lambda: stretched("Na-23"), "K-39": lambda: stretched("K-39"),
    "Rb-87": lambda: stretched("Rb-87"),
    "N": lambda: lande(0, 1.5, 1.5) * 1.5,
    "O2": lambda: ELECTRON_G * (6 + 2 - 2) / 12 * 2,
    "Ne*": lambda: lande(1, 1, 2) * 2,
    "Ar*": lambda: lande(1, 1, 2) * 2,
    "Cr": lambda: lande(0, 3, 3) * 3,
    "NH": lambda: ELECTRON_G * (2 + 2 - 0) / 4 * 1,
    "OH": lambda: hill_van_vleck_g(1.5, OH_SPIN_ORBIT / OH_ROTATION) * 1.5,
    "CaF": lambda: ELECTRON_G * 0.5,
}


@pytest.mark.parametrize("name", list(MOMENTS))
def test_catalogue_moment(name: str) -> None:
    assert species(name).moment / MU_B == pytest.approx(MOMENTS[name](), rel=1e-12)


def test_oh_moment_against_literature_and_hund_limits() -> None:
    # Reference: OH X2Pi3/2 J = 3/2 effective g ~0.935 (from memory), so M = 3/2 carries
    # ~1.40 mu_B, to 1 %; it lies between the pure case (a) (Lambda + g_s Sigma) Omega M/(J(J+1))
    # = 1.20 mu_B and the case (b) F1 value (g_s/(2J) + 1/(J(J+1/2))) M = 1.50 mu_B (Brown &
    # Carrington ch. 9, from memory), since |A|/B = 7.5 is intermediate.
    moment = species("OH").moment / MU_B
    assert moment == pytest.approx(0.935 * 1.5, rel=0.01)
    assert hund_a(1, 0.5, 1.5, 1.5) * 1.5 < moment < (ELECTRON_G / 3 + 1 / 3) * 1.5


@pytest.mark.parametrize("alias", [a for n in catalogue() for a in species(n).aliases])
def test_lookup_by_alias(alias: str) -> None:
    found = species(alias.upper())
    assert alias in found.aliases
    assert species(f"  {alias.lower()} ") is found


def test_unknown_name_suggests_close_match() -> None:
    with pytest.raises(TiltwellError, match=r"'Rb78'.*close matches: Rb-87.*catalogue\(\)"):
        species("Rb78")
    with pytest.raises(TiltwellError, match="no close match"):
        species("qqqqqq")


def test_species_is_frozen() -> None:
    with pytest.raises(dataclasses.FrozenInstanceError):
        species("H").mass = 1.0  # type: ignore[misc]


# --- bad input ---------------------------------------------------------------------------------

DE = PLANCK * 1e9
BAD = {
    "moment-text": (lambda: LinearZeeman("a"), "moment"),  # type: ignore[arg-type]
    "moment-nan": (lambda: LinearZeeman(np.nan), "moment"),
    "spin-zero": (lambda: BreitRabi(0, DE, 0.5, 0.5), "nuclear_spin"),
    "spin-quarter": (lambda: BreitRabi(0.25, DE, 0.75, 0.75), "nuclear_spin"),
    "splitting-zero": (lambda: BreitRabi(0.5, 0.0, 1, 1), "hyperfine_splitting"),
    "F": (lambda: BreitRabi(0.5, DE, 2, 0), "F must be one of 0, 1"),
    "mF-range": (lambda: BreitRabi(1.5, DE, 2, 3), "mF must be one of -2, -1, 0, 1, 2 for F = 2"),
    "mF-half": (lambda: BreitRabi(1.5, DE, 1, 0.5), "mF must be one of -1, 0, 1"),
    "g_J": (lambda: BreitRabi(1.5, DE, 2, 2, g_J=np.inf), "g_J"),
    "field-negative": (lambda: LinearZeeman(MU_B).energy([0.1, -0.1]), "field"),
    "field-nan": (lambda: state_of("H", 1, 1).derivative(np.nan), "field"),
    "fields-order": (lambda: TabulatedZeeman([0, 2, 1], [0, 1, 2]), "fields"),
    "fields-start": (lambda: TabulatedZeeman([0.1, 2], [0, 1]), "fields"),
    "fields-one": (lambda: TabulatedZeeman([0.0], [0.0]), "fields"),
    "energies-length": (lambda: TabulatedZeeman([0, 1, 2], [0, 1]), "energies"),
    "energies-nan": (lambda: TabulatedZeeman([0, 1], [0, np.nan]), "energies"),
    "mass-negative": (lambda: Species("X", -1.0, LinearZeeman(MU_B)), "mass"),
    "mass-zero": (lambda: Species("X", 0.0, LinearZeeman(MU_B)), "mass"),
    "zeeman": (lambda: Species("X", 1e-26, 3.0), "zeeman"),  # type: ignore[arg-type]
    "name-empty": (lambda: Species("", 1e-26, LinearZeeman(MU_B)), "name"),
    "lookup-type": (lambda: species(3), "name"),  # type: ignore[arg-type]
}


@pytest.mark.parametrize("case", list(BAD))
def test_bad_input_names_argument(case: str) -> None:
    call, text = BAD[case]
    with pytest.raises(TiltwellError, match="^" + re.escape(text)):
        call()
