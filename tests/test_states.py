"""Tests of tiltwell.physics.states (which Zeeman states a trap holds, how the beam fills them)
and of the tools behind it (wigner_3j, wigner_6j, MatrixZeeman, triplet_sigma_block,
doublet_pi_level). Every numerical check names its outside reference beside it.

The brute-force references are written here from scratch with numpy: spin matrices, the
hyperfine Hamiltonian of an atom in the |m_J, m_I> product basis, Clebsch–Gordan vectors by
lowering operators and Gram–Schmidt, and the 3Sigma Hamiltonian of O2 in the uncoupled
|N M_N>|S M_S> basis with the angular integrals done by quadrature of scipy's spherical
harmonics (no 3-j or 6-j symbol involved). Constants come from scipy.constants (CODATA).
"""

from __future__ import annotations

import functools
import math
import re
from fractions import Fraction

import numpy as np
import periodictable
import pytest
import scipy.constants as sc
import scipy.special as sp
from scipy.optimize import brentq

from tiltwell._base.validation import TiltwellError
from tiltwell.physics.species import OH_ROTATION, OH_SPIN_ORBIT, catalogue, doublet_pi_level, species
from tiltwell.physics.states import (
    O2_CONSTANTS,
    ZeemanState,
    is_molecule,
    populations,
    species_of_state,
    states,
    trappable_fraction,
    triplet_sigma_block,
)
from tiltwell.physics.zeeman import BreitRabi, LinearZeeman, MatrixZeeman, wigner_3j, wigner_6j

MU_B = sc.physical_constants["Bohr magneton"][0]  # J/T
G_S = -sc.physical_constants["electron g factor"][0]  # 2.00231930436...
K_B, H = sc.k, sc.h
MHZ = H * 1e6  # J per MHz
WAVENUMBER = H * sc.c * 100  # J per cm^-1
ATOMS = ("H", "D", "Li-7", "Na-23", "K-39", "Rb-87")


def spin_matrices(s: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """S_x, S_y, S_z for spin s in the basis m = s, s-1, ..., -s (Condon–Shortley ladders)."""
    m = s - np.arange(round(2 * s) + 1)
    up = np.diag(np.sqrt(s * (s + 1) - m[1:] * (m[1:] + 1)), k=1).astype(complex)  # S_+
    return (up + up.T) / 2, (up - up.T) / 2j, np.diag(m).astype(complex)


def quantum(label: str, name: str) -> float:
    """The value of ``name=`` in a state label, e.g. quantum('... F=1 mF=-1', 'mF') = -1."""
    return float(Fraction(re.search(rf"(?:^| ){name}=(-?[0-9/]+)", label).group(1)))  # type: ignore[union-attr]


# --- 1. Breit–Rabi states against a brute-force diagonalisation --------------------------------

def hyperfine_blocks(model: BreitRabi, fields: np.ndarray) -> dict[float, tuple[np.ndarray, np.ndarray]]:
    """A I.J + mu_B (g_J J_z + g_I I_z) B in |m_J, m_I> (J = 1/2), dE = A (I + 1/2); per
    total m (conserved): ascending eigenvalues (n_fields, d) and Hellmann–Feynman slopes."""
    i = model.nuclear_spin
    j_ops, i_ops = spin_matrices(0.5), spin_matrices(i)
    a = model.hyperfine_splitting / (i + 0.5)
    h0: np.ndarray = a * sum((np.kron(jo, io) for jo, io in zip(j_ops, i_ops)), np.zeros((2 * len(i_ops[2]),) * 2))
    h1 = MU_B * (model.g_J * np.kron(j_ops[2], np.eye(len(i_ops[2]))) + model.g_I * np.kron(np.eye(2), i_ops[2]))
    total = np.real(np.diag(np.kron(j_ops[2], np.eye(len(i_ops[2]))) + np.kron(np.eye(2), i_ops[2])))
    out = {}
    for m in np.unique(total):
        idx = np.flatnonzero(total == m)
        values, vectors = np.linalg.eigh(h0[np.ix_(idx, idx)] + fields[:, None, None] * h1[np.ix_(idx, idx)])
        slopes = np.real(np.einsum("nik,ij,njk->nk", vectors.conj(), h1[np.ix_(idx, idx)], vectors))
        out[float(m)] = (values, slopes)
    return out


def hyperfine_cases() -> list[tuple[str, int]]:
    cases = [(n, k) for n in ATOMS for k in range(len(states(n)))]
    return cases + [("CaF", k) for k in range(4)]  # CaF X2Sigma+ N=0: 19F hyperfine by Breit–Rabi


FIELDS = np.array([0.0, 1e-4, 1e-3, 0.01, 0.05, 0.2, 0.5, 1.0, 3.0])  # T
SLOPE_FIELDS = np.geomspace(1e-7, 1.0, 500)  # T; not the sampling the code uses


def matched_curve(name: str, k: int, fields: np.ndarray) -> tuple[ZeemanState, np.ndarray, np.ndarray]:
    """State k of ``name`` and the brute-force curve (energy above the lowest zero-field level,
    slope) that starts at the state's zero-field level in its mF block (levels of one mF never
    cross, so the rank is kept)."""
    state = states(name)[k]
    model = state.zeeman
    assert isinstance(model, BreitRabi)
    blocks = hyperfine_blocks(model, np.concatenate([[0.0], fields]))
    ground = min(float(v[0, 0]) for v, _ in blocks.values())
    values, slopes = blocks[quantum(state.label, "mF")]
    rank = np.flatnonzero(np.abs(values[0] - ground - state.level_energy) < 1e-9 * abs(model.hyperfine_splitting))
    assert rank.size == 1, (state.label, values[0] - ground)
    return state, values[1:, rank[0]] - ground, slopes[1:, rank[0]]


@pytest.mark.parametrize(("name", "k"), hyperfine_cases(), ids=[f"{n}-{k}" for n, k in hyperfine_cases()])
def test_hyperfine_state_matches_diagonalisation(name: str, k: int) -> None:
    # Reference: independent brute-force diagonalisation (numpy.linalg.eigh) of
    # A I.J + mu_B (g_J J_z + g_I I_z) B built from spin matrices; energies above the lowest
    # zero-field level = level_energy + W(B). Observed agreement ~1e-15 relative.
    state, want, _ = matched_curve(name, k, FIELDS)
    split = abs(state.zeeman.hyperfine_splitting)  # type: ignore[attr-defined]
    np.testing.assert_allclose(state.level_energy + state.zeeman.energy(FIELDS), want, rtol=1e-9, atol=1e-12 * split)


@pytest.mark.parametrize(("name", "k"), hyperfine_cases(), ids=[f"{n}-{k}" for n, k in hyperfine_cases()])
def test_low_field_seeking_flag_matches_diagonalisation(name: str, k: int) -> None:
    # Reference: Hellmann–Feynman slopes <v|dH/dB|v> of the brute-force eigenvectors at 500
    # log-spaced fields 1e-7 ... 1 T: a low-field seeker rises at every one.
    state, _, slopes = matched_curve(name, k, SLOPE_FIELDS)
    assert state.low_field_seeking == bool(np.all(slopes > 0))


@pytest.mark.parametrize("name", ATOMS)
def test_hyperfine_state_count_and_labels(name: str) -> None:
    # Reference: counting, (2I+1)(2J+1) states with J = 1/2; the level F holds 2F+1 of them,
    # F = I + 1/2 lying dE above F = I - 1/2 (all these splittings are positive).
    model = species(name).zeeman
    assert isinstance(model, BreitRabi)
    found = states(name)
    assert len(found) == round(2 * model.nuclear_spin + 1) * 2
    assert len({(quantum(s.label, "F"), quantum(s.label, "mF")) for s in found}) == len(found)
    for s in found:
        f = quantum(s.label, "F")
        same = [t for t in found if t.level_energy == pytest.approx(s.level_energy, abs=1e-6 * model.hyperfine_splitting)]
        assert len(same) == round(2 * f + 1)
        upper = f > model.nuclear_spin
        assert s.level_energy == pytest.approx(model.hyperfine_splitting if upper else 0.0, rel=1e-12)


def test_rb87_upper_state_of_lower_level_turns_over() -> None:
    # Reference: the Breit–Rabi formula (Breit & Rabi, Phys. Rev. 38, 2082 (1931)): for
    # F = I - 1/2 the energy is -dE/2 sqrt(1 + 4 m x/(2I+1) + x^2) + ..., highest at
    # x = -2m/(2I+1) = 1/2 for Rb-87 |1, -1>, x = (g_J - g_I) mu_B B / dE (g_I shifts it ~1e-3).
    model = species("Rb-87").zeeman
    assert isinstance(model, BreitRabi)
    state = next(s for s in states("Rb-87") if s.label.endswith("F=1 mF=-1"))
    turn = 0.5 * model.hyperfine_splitting / ((model.g_J - model.g_I) * MU_B)
    assert float(state.zeeman.derivative(0.99 * turn)) > 0 > float(state.zeeman.derivative(1.01 * turn))
    assert state.seeks_low_field(0.95 * turn) and not state.seeks_low_field(1.05 * turn)
    assert not state.low_field_seeking  # the turn (0.12 T) lies inside the 1 T trap range


# --- 2. Wigner symbols against brute-force Clebsch–Gordan vectors and closed forms ---------------

HALVES = [x / 2 for x in range(0, 6)]  # 0 ... 5/2


@functools.cache
def coupled_vectors(j1: float, j2: float) -> dict[tuple[float, float], np.ndarray]:
    """|J M> in the product basis |m1>|m2> (m1, m2 descending), by lowering from |J J>; each
    |J J> is the unit vector orthogonal to the |J' J> with J' > J, with the Condon–Shortley
    phase <j1 j1; j2 J-j1 | J J> > 0 (Edmonds, Angular Momentum in QM (1957), sec. 3.5)."""
    o1, o2 = spin_matrices(j1), spin_matrices(j2)
    lower = np.real(np.kron(o1[0] - 1j * o1[1], np.eye(len(o2[2]))) + np.kron(np.eye(len(o1[2])), o2[0] - 1j * o2[1]))
    m1 = np.repeat(j1 - np.arange(len(o1[2])), len(o2[2]))
    total = m1 + np.tile(j2 - np.arange(len(o2[2])), len(o1[2]))
    found: dict[tuple[float, float], np.ndarray] = {}
    big = j1 + j2
    while big >= abs(j1 - j2) - 1e-9:
        sub = np.flatnonzero(np.abs(total - big) < 1e-9)
        project = np.eye(sub.size) - sum(np.outer(v[sub], v[sub]) for (jj, mm), v in found.items() if mm == big)
        values, vectors = np.linalg.eigh(project)
        top = np.zeros(total.size)
        top[sub] = vectors[:, -1]
        top *= np.sign(top[sub[np.argmax(m1[sub])]])
        vec, m = top, big
        while m >= -big - 1e-9:
            found[(big, m)] = vec
            vec = lower @ vec / math.sqrt(max(big * (big + 1) - m * (m - 1), 1e-300))
            m -= 1
        big -= 1
    return found


def three_j_brute(j1: float, j2: float, j3: float, m1: float, m2: float, m3: float) -> float:
    # (j1 j2 j3; m1 m2 m3) = (-1)^(j1 - j2 - m3) <j1 m1 j2 m2 | j3 -m3> / sqrt(2 j3 + 1)
    # (Edmonds sec. 3.7, from memory).
    vec = coupled_vectors(j1, j2).get((j3, -m3))
    if vec is None or abs(m1 + m2 + m3) > 1e-9:
        return 0.0
    k = round(j1 - m1) * round(2 * j2 + 1) + round(j2 - m2)
    return (-1) ** round(j1 - j2 - m3) * vec[k] / math.sqrt(2 * j3 + 1)


def three_j_cases() -> list[tuple[float, ...]]:
    out: list[tuple[float, ...]] = []
    for j1 in HALVES:
        for j2 in HALVES:
            for k in range(round(2 * min(j1, j2)) + 1):
                j3 = abs(j1 - j2) + k
                for m1 in np.arange(-j1, j1 + 0.5):
                    for m2 in np.arange(-j2, j2 + 0.5):
                        if abs(m1 + m2) <= j3:
                            out.append((j1, j2, j3, float(m1), float(m2), float(-m1 - m2)))
    return out


def test_wigner_3j_against_brute_force_clebsch_gordan() -> None:
    # Reference: Clebsch–Gordan vectors built here by lowering operators (brute force), every
    # allowed symbol with j1, j2 <= 5/2 (integers and half-integers). Observed ~1e-15.
    cases = three_j_cases()
    assert len(cases) > 1000
    got = np.array([wigner_3j(*c) for c in cases])
    want = np.array([three_j_brute(*c) for c in cases])
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)


@pytest.mark.parametrize("j", HALVES[1:] + [7.0, 11.5])
def test_wigner_3j_closed_forms(j: float) -> None:
    # Reference: (j j 0; m -m 0) = (-1)^(j-m)/sqrt(2j+1) (Edmonds eq. 3.7.9, from memory),
    # orthogonality sum_{m1,m2} (j1 j2 j3; m1 m2 m3)^2 = 1/(2 j3 + 1) (Edmonds eq. 3.7.8).
    for m in np.arange(-j, j + 0.5):
        assert wigner_3j(j, j, 0, m, -m, 0) == pytest.approx((-1) ** round(j - m) / math.sqrt(2 * j + 1), rel=1e-12)
    j2 = 1.5
    for j3 in np.arange(abs(j - j2), j + j2 + 0.5):
        for m3 in np.arange(-j3, j3 + 0.5):
            total = sum(wigner_3j(j, j2, j3, m1, -m1 - m3, m3) ** 2 for m1 in np.arange(-j, j + 0.5))
            assert total == pytest.approx(1 / (2 * j3 + 1), rel=1e-12)


@pytest.mark.parametrize(("l1", "l2", "l3"), [(1, 1, 2), (2, 3, 1), (3, 3, 4), (4, 2, 6), (5, 5, 2), (2, 2, 3)])
def test_wigner_3j_parity_closed_form(l1: int, l2: int, l3: int) -> None:
    # Reference: (l1 l2 l3; 0 0 0) = (-1)^g sqrt((L-2l1)!(L-2l2)!(L-2l3)!/(L+1)!) g!/((g-l1)!
    # (g-l2)!(g-l3)!) for L = 2g even, 0 for L odd (Edmonds eq. 3.7.17, from memory).
    total = l1 + l2 + l3
    if total % 2:
        assert wigner_3j(l1, l2, l3, 0, 0, 0) == 0.0
        return
    g, f = total // 2, math.factorial
    want = (-1) ** g * math.sqrt(f(total - 2 * l1) * f(total - 2 * l2) * f(total - 2 * l3) / f(total + 1)) \
        * f(g) / (f(g - l1) * f(g - l2) * f(g - l3))
    assert wigner_3j(l1, l2, l3, 0, 0, 0) == pytest.approx(want, rel=1e-12)


def test_wigner_3j_forbidden_is_zero() -> None:
    # Reference: selection rules (Edmonds sec. 3.7): m sum, triangle, |m| <= j, j - m integral.
    assert wigner_3j(1, 1, 3, 0, 0, 0) == 0.0
    assert wigner_3j(1, 1, 1, 1, 0, 0) == 0.0
    assert wigner_3j(1, 1, 2, 2, -2, 0) == 0.0
    assert wigner_3j(1, 1, 1, 0.5, -0.5, 0) == 0.0


def six_j_brute(j1: float, j2: float, j12: float, j3: float, big: float, j23: float) -> float:
    """{j1 j2 j12; j3 J j23} from the overlap of |(j1 j2) j12, j3; J J> and |j1, (j2 j3) j23;
    J J>, = (-1)^(j1+j2+j3+J) sqrt((2 j12 + 1)(2 j23 + 1)) {...} (Edmonds eq. 6.1.5, from
    memory), both states built from the brute-force Clebsch–Gordan vectors above."""
    d1, d2, d3 = (round(2 * j + 1) for j in (j1, j2, j3))
    left = np.zeros(d1 * d2 * d3)
    inner, outer = coupled_vectors(j1, j2), coupled_vectors(j12, j3)
    for m12 in np.arange(-j12, j12 + 0.5):
        for m3 in np.arange(-j3, j3 + 0.5):
            c = outer[(big, big)][round(j12 - m12) * d3 + round(j3 - m3)]
            left += c * np.kron(inner[(j12, m12)], np.eye(d3)[round(j3 - m3)])
    right = np.zeros_like(left)
    inner, outer = coupled_vectors(j2, j3), coupled_vectors(j1, j23)
    for m1 in np.arange(-j1, j1 + 0.5):
        for m23 in np.arange(-j23, j23 + 0.5):
            c = outer[(big, big)][round(j1 - m1) * round(2 * j23 + 1) + round(j23 - m23)]
            right += c * np.kron(np.eye(d1)[round(j1 - m1)], inner[(j23, m23)])
    return float(left @ right) * (-1) ** round(j1 + j2 + j3 + big) / math.sqrt((2 * j12 + 1) * (2 * j23 + 1))


def six_j_cases() -> list[tuple[float, ...]]:
    out: list[tuple[float, ...]] = []
    for j1 in (0.5, 1.0, 1.5, 2.0):
        for j2 in (0.5, 1.0, 1.5):
            for j3 in (0.5, 1.0, 2.0):
                for j12 in np.arange(abs(j1 - j2), j1 + j2 + 0.5):
                    for j23 in np.arange(abs(j2 - j3), j2 + j3 + 0.5):
                        for big in np.arange(abs(j12 - j3), j12 + j3 + 0.5):
                            if abs(j1 - j23) <= big <= j1 + j23:
                                out.append((j1, j2, float(j12), j3, float(big), float(j23)))
    return out


def test_wigner_6j_against_brute_force_recoupling() -> None:
    # Reference: recoupling overlaps of three angular momenta from the brute-force
    # Clebsch–Gordan vectors (no 3-j symbols, no Racah sum). Observed ~1e-15.
    cases = six_j_cases()
    assert len(cases) > 300
    got = np.array([wigner_6j(*c) for c in cases])
    want = np.array([six_j_brute(*c) for c in cases])
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)


@pytest.mark.parametrize(("a", "b", "c"), [(1, 1, 1), (0.5, 1, 1.5), (2, 3, 1), (2.5, 1.5, 3), (4, 2, 3)])
def test_wigner_6j_closed_form_and_orthogonality(a: float, b: float, c: float) -> None:
    # Reference: {a b c; 0 c b} = (-1)^(a+b+c)/sqrt((2b+1)(2c+1)) (Edmonds eq. 6.3.2, from
    # memory); sum_x (2x+1)(2e+1) {a b x; c d e}{a b x; c d e'} = delta(e, e') (eq. 6.2.9).
    want = (-1) ** round(a + b + c) / math.sqrt((2 * b + 1) * (2 * c + 1))
    assert wigner_6j(a, b, c, 0, c, b) == pytest.approx(want, rel=1e-12)
    d = 2  # a + b + c + d integral in every case above
    xs = np.arange(max(abs(a - b), abs(c - d)), min(a + b, c + d) + 0.5)
    es = np.arange(max(abs(a - d), abs(c - b)), min(a + d, c + b) + 0.5)
    assert xs.size >= 2 and es.size >= 2
    for e in es:
        for e2 in es:
            total = sum((2 * x + 1) * (2 * e + 1) * wigner_6j(a, b, x, c, d, e) * wigner_6j(a, b, x, c, d, e2) for x in xs)
            assert total == pytest.approx(float(e == e2), abs=1e-12)


# --- 3. MatrixZeeman and O2 X3Sigma_g- -----------------------------------------------------------

@pytest.mark.parametrize("index", [0, 1])
def test_matrix_zeeman_two_level_closed_form(index: int) -> None:
    # Reference: a two-level avoided crossing, H = [[-D/2, mu B], [mu B, D/2]], has
    # E = -+ sqrt(D^2/4 + mu^2 B^2) (any quantum mechanics text); slope dE/dB in closed form.
    gap, moment = 1e-24, 1.3 * MU_B
    model = MatrixZeeman(np.diag([-gap / 2, gap / 2]), [[0.0, moment], [moment, 0.0]], index)
    fields = np.array([0.0, 0.01, 0.1, 1.0, 4.0])
    sign = 1 if index else -1
    root = np.sqrt(gap**2 / 4 + (moment * fields) ** 2)
    np.testing.assert_allclose(model.energy(fields), sign * (root - gap / 2), rtol=1e-12, atol=1e-15 * gap)
    np.testing.assert_allclose(model.derivative(fields), sign * moment**2 * fields / root, rtol=1e-10, atol=1e-12 * MU_B)
    assert model.energy(np.zeros((2, 3))).shape == (2, 3)


def gaunt_nn(rotations: tuple[int, ...]) -> tuple[list[tuple[int, int]], np.ndarray]:
    """<N M| n_i n_j |N' M'> for the unit vector n along the axis, by Gauss–Legendre x uniform
    quadrature of scipy's spherical harmonics (exact for these polynomial integrands)."""
    labels = [(n, m) for n in rotations for m in range(n, -n - 1, -1)]
    x, w = np.polynomial.legendre.leggauss(24)
    phi = np.arange(48) * 2 * np.pi / 48
    theta, azimuth = np.meshgrid(np.arccos(x), phi, indexing="ij")
    weight = np.outer(w, np.full(phi.size, 2 * np.pi / phi.size))
    y = np.array([sp.sph_harm_y(n, m, theta, azimuth) for n, m in labels])
    axis = [np.sin(theta) * np.cos(azimuth), np.sin(theta) * np.sin(azimuth), np.cos(theta)]
    nn = np.array([[np.einsum("atp,tp,btp->ab", y.conj(), weight * axis[i] * axis[j], y) for j in range(3)]
                   for i in range(3)])
    return labels, nn


@functools.cache
def o2_brute(rotations: tuple[int, ...] = (1, 3, 5, 7)) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """H0, H1 of 16O2 X3Sigma_g- in |N M_N>|M_S> (S = 1): B N^2 - D N^4 + gamma N.S +
    (2 lambda/3)(3 (n.S)^2 - S^2) and g_s mu_B S_Z per tesla (the Hamiltonian of Brown &
    Carrington, Rotational Spectroscopy of Diatomic Molecules (2003), ch. 9, in the uncoupled
    basis); with total M and N of each basis vector."""
    labels, nn = gaunt_nn(rotations)
    d = len(labels)
    rot = [np.zeros((d, d), complex) for _ in range(3)]
    start = 0
    for n in rotations:
        for i, op in enumerate(spin_matrices(n)):
            rot[i][start:start + 2 * n + 1, start:start + 2 * n + 1] = op
        start += 2 * n + 1
    s_ops = spin_matrices(1)
    c = O2_CONSTANTS
    nsq = np.diag([n * (n + 1.0) for n, _ in labels])
    h0 = np.kron(c["rotation"] * nsq - c["distortion"] * nsq @ nsq, np.eye(3))
    h0 = h0 + c["spin_rotation"] * sum(np.kron(rot[i], s_ops[i]) for i in range(3))
    axial = sum(np.kron(nn[i, j], s_ops[i] @ s_ops[j]) for i in range(3) for j in range(3))
    h0 = h0 + (2 * c["spin_spin"] / 3) * (3 * axial - 2 * np.eye(3 * d))
    h1 = G_S * MU_B * np.kron(np.eye(d), s_ops[2])
    total = np.array([m + ms for _, m in labels for ms in (1, 0, -1)], dtype=float)
    big_n = np.array([n for n, _ in labels for _ in (1, 0, -1)])
    return h0, h1, total, big_n


O2_FIELDS = np.array([0.0, 0.002, 0.02, 0.2, 0.6, 1.0, 2.0])  # T


def o2_curve(state: ZeemanState, fields: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Brute-force energy above the O2 ground level, Hellmann–Feynman slope, and the N weights
    of the zero-field eigenvector, for the curve starting at the state's zero-field level."""
    h0, h1, total, big_n = o2_brute()
    ground = np.linalg.eigvalsh(h0)[0]
    idx = np.flatnonzero(total == quantum(state.label, "M"))
    a, b = h0[np.ix_(idx, idx)], h1[np.ix_(idx, idx)]
    values, vectors = np.linalg.eigh(a + np.concatenate([[0.0], fields])[:, None, None] * b)
    rank = np.flatnonzero(np.abs(values[0] - ground - state.level_energy) < 1e-6 * O2_CONSTANTS["spin_spin"])
    assert rank.size == 1, state.label
    k = rank[0]
    slopes = np.real(np.einsum("ni,ij,nj->n", vectors[1:, :, k].conj(), b, vectors[1:, :, k]))
    weights = {n: float(np.sum(np.abs(vectors[0, big_n[idx] == n, k]) ** 2)) for n in (1, 3, 5, 7)}
    return values[1:, k] - ground, slopes, np.array([weights[n] for n in (1, 3, 5, 7)])


O2_LABELS = [s.label for s in states("O2")]


@pytest.mark.parametrize("k", range(len(O2_LABELS)), ids=O2_LABELS)
def test_o2_state_matches_uncoupled_diagonalisation(k: int) -> None:
    # Reference: brute-force diagonalisation in the uncoupled |N M_N>|M_S> basis (spin
    # matrices, spherical-harmonic quadrature; same N = 1 ... 7 truncation, no 3-j/6-j
    # symbols). Energies above the ground level to 1e-9 relative; slopes by Hellmann–Feynman.
    state = states("O2")[k]
    energy, slope, _ = o2_curve(state, O2_FIELDS)
    scale = O2_CONSTANTS["spin_spin"]
    np.testing.assert_allclose(state.level_energy + state.zeeman.energy(O2_FIELDS), energy, rtol=1e-9, atol=1e-9 * scale)
    np.testing.assert_allclose(state.zeeman.derivative(O2_FIELDS), slope, rtol=1e-7, atol=1e-9 * MU_B)


def test_o2_labels_against_diagonalisation() -> None:
    # Reference: the brute force above: a zero-field level J appears in 2J+1 M blocks (with
    # the same energy, to 1e-9 of lambda), and the label's N holds most of the eigenvector.
    found = states("O2")
    assert len(found) == 9 + 21  # N = 1 (J = 0, 1, 2) and N = 3 (J = 2, 3, 4)
    for state in found:
        n, j = quantum(state.label, "N"), quantum(state.label, "J")
        same = [s for s in found if abs(s.level_energy - state.level_energy) < 1e-9 * O2_CONSTANTS["spin_spin"]]
        assert len(same) == round(2 * j + 1) and {quantum(s.label, "J") for s in same} == {j}
        assert sorted(quantum(s.label, "M") for s in same) == list(np.arange(-j, j + 1))
        weights = o2_curve(state, O2_FIELDS[:1])[2]
        assert (1, 3, 5, 7)[int(np.argmax(weights))] == n


#: Measured 16O2 fine-structure and rotational lines [MHz], from memory: the N=1 "1-" line
#: (J=1<-0) 118750.34 and "1+" (J=1<-2) 56264.77; N=3 "3+" (J=3<-4) 58446.59, "3-" (J=3<-2)
#: 62486.26; N=3 J=3 <- N=1 J=2 487249.4 (the line the SWAS satellite searched for) and
#: N=3 J=2 <- N=1 J=1 368498.3 (see e.g. the JPL and CDMS line catalogues).
O2_LINES = [((1, 1), (1, 0), 118750.34), ((1, 1), (1, 2), 56264.77), ((3, 3), (3, 4), 58446.59),
            ((3, 3), (3, 2), 62486.26), ((3, 3), (1, 2), 487249.4), ((3, 2), (1, 1), 368498.3)]


def o2_level(n: int, j: int) -> float:
    return next(s.level_energy for s in states("O2") if quantum(s.label, "N") == n and quantum(s.label, "J") == j)


@pytest.mark.parametrize(("upper", "lower", "frequency"), O2_LINES, ids=[f"{u}-{l}" for u, l, _ in O2_LINES])
def test_o2_levels_against_measured_lines(upper: tuple[int, int], lower: tuple[int, int], frequency: float) -> None:
    # Reference: measured line frequencies (from memory, above). Tolerance 2 MHz (1e-4 K, far
    # below k T_rot): the model leaves out the centrifugal corrections of lambda and gamma
    # (lambda_D ~ 0.06 MHz x N(N+1), from memory); observed errors 0.2 ... 0.8 MHz.
    assert (o2_level(*upper) - o2_level(*lower)) / MHZ == pytest.approx(frequency, abs=2.0)


def case_b_g(n: float, s: float, j: float) -> float:
    """Spin-only case (b) g_J = g_s [J(J+1) + S(S+1) - N(N+1)] / (2 J(J+1)) (Brown &
    Carrington ch. 9; Townes & Schawlow, Microwave Spectroscopy, ch. 11; from memory)."""
    return 0.0 if j == 0 else G_S * (j * (j + 1) + s * (s + 1) - n * (n + 1)) / (2 * j * (j + 1))


@pytest.mark.parametrize("k", range(len(O2_LABELS)), ids=O2_LABELS)
def test_o2_low_field_slope_is_case_b(k: int) -> None:
    # Reference: at B = 0, H1 = g_s mu_B S_Z is diagonal in N and each N holds one |N J M>, so
    # dW/dB = M mu_B sum_N w_N g_J(N, J) exactly, with case (b) g_J (closed form above) and the
    # weights w_N of the brute-force eigenvector. Against pure case (b) (w_N = 1 for the label's
    # N): exact where J has no N +- 2 partner (N=1 J=0,1; N=3 J=3), else within 6 %: the
    # spin-spin admixture w ~ (lambda / (E_N+2 - E_N))^2 ~ 2 % times |g_partner - g| / g < 3.
    state = states("O2")[k]
    n, j, m = (quantum(state.label, q) for q in ("N", "J", "M"))
    weights = o2_curve(state, O2_FIELDS[:1])[2]
    mixed = sum(w * case_b_g(nn, 1, j) for w, nn in zip(weights, (1, 3, 5, 7)) if abs(nn - j) <= 1)
    slope = float(state.zeeman.derivative(0.0))
    assert slope == pytest.approx(m * mixed * MU_B, rel=1e-9, abs=1e-12 * MU_B)
    pure = (n, j) in ((1, 0), (1, 1), (3, 3))
    assert slope == pytest.approx(m * case_b_g(n, 1, j) * MU_B, rel=1e-9 if pure else 0.06, abs=1e-12 * MU_B)


@pytest.mark.parametrize("m", [2, 1, 0, -1, -2])
def test_o2_single_rotation_closed_forms(m: int) -> None:
    # Reference: with N = 1 alone, |N=1 J M> are exact zero-field eigenstates, so the slope
    # at B = 0 is the case (b) g_J M mu_B; the stretched |M_N = 1, M_S = 1> (J = M = 2) is an
    # exact eigenstate at every field, W = g_s mu_B B (Brown & Carrington ch. 9, from memory).
    h0, h1, basis = triplet_sigma_block(m, (1,), **O2_CONSTANTS)
    order = np.argsort(np.diag(h0))
    np.testing.assert_allclose(h0, np.diag(np.diag(h0)), atol=1e-12 * O2_CONSTANTS["spin_spin"])
    for rank, b in enumerate(order):
        j = basis[b][1]
        model = MatrixZeeman(h0, h1, rank)
        assert float(model.derivative(0.0)) == pytest.approx(m * case_b_g(1, 1, j) * MU_B, rel=1e-12, abs=1e-12 * MU_B)
    if m == 2:
        fields = np.array([0.3, 1.0, 5.0, 30.0])
        stretched = MatrixZeeman(h0, h1, 0)
        np.testing.assert_allclose(stretched.energy(fields), G_S * MU_B * fields, rtol=1e-12)
        np.testing.assert_allclose(stretched.derivative(fields), G_S * MU_B, rtol=1e-12)


# --- 4. OH X2Pi: doublet_pi_level against Hill–Van Vleck and the Hund's case limits --------------

def hill_van_vleck(j: float, y: float, rotation: float, upper: bool) -> float:
    """E = B [(J+1/2)^2 - 1 +- (1/2) sqrt(4 (J+1/2)^2 + Y (Y-4))], Y = A/B, Lambda = 1 (E. Hill
    and J. H. Van Vleck, Phys. Rev. 32, 250 (1928); Herzberg, Spectra of Diatomic Molecules
    (1950), eq. V,28; from memory). Zero: the mean of the two case (a) diagonal terms minus
    B (X^2 - 1), the same zero as the code's +-A/2 convention."""
    x2 = (j + 0.5) ** 2
    return rotation * (x2 - 1 + (0.5 if upper else -0.5) * math.sqrt(4 * x2 + y * (y - 4)))


def hvv_g(j: float, y: float, omega: float, g_s: float = G_S, g_l: float = 1.0) -> float:
    """g of a 2Pi level in intermediate coupling from the Hill–Van Vleck mixing angle: the
    level is cos(t)|Omega=3/2> + sin(t)|Omega=1/2> (or the orthogonal one), cos 2t = |Y-2|/R,
    sin 2t = 2 sqrt(X^2-1)/R, R = sqrt(4X^2 + Y(Y-4)); the Zeeman operator in the case (a)
    basis has diagonal (g_l Lambda + g_s Sigma) Omega/(J(J+1)) and off-diagonal
    g_s sqrt(X^2-1)/(2J(J+1)) (Brown & Carrington ch. 9; Radford, Phys. Rev. 122, 114 (1961);
    from memory). The off-diagonal sign is fixed by the case (b) limit, checked below."""
    x2, jj = (j + 0.5) ** 2, j * (j + 1)
    r = math.sqrt(4 * x2 + y * (y - 4))
    cos2, sin2 = abs(y - 2) / r, 2 * math.sqrt(x2 - 1) / r
    a, b = (g_l + g_s / 2) * 1.5 / jj, (g_l - g_s / 2) * 0.5 / jj
    off = g_s * math.sqrt(x2 - 1) / (2 * jj)
    side = 1 if omega == 1.5 else -1  # the level dominated by |Omega = 3/2> or by |Omega = 1/2>
    sign = 1 if y < 2 else -1  # sign of the mixing: the -B sqrt(X^2-1) coupling over the gap
    return (a + b) / 2 + side * (a - b) / 2 * cos2 + side * sign * off * sin2


Y_CASES = [OH_SPIN_ORBIT / OH_ROTATION, 0.0, 1.0, 3.5, 12.0, -40.0]


@pytest.mark.parametrize("y", Y_CASES, ids=[f"Y{y:.3g}" for y in Y_CASES])
@pytest.mark.parametrize("j", [1.5, 2.5, 3.5])
@pytest.mark.parametrize("omega", [1.5, 0.5])
def test_doublet_pi_against_hill_van_vleck(y: float, j: float, omega: float) -> None:
    # Reference: Hill–Van Vleck energies (closed form above); the Omega = 3/2 level is the
    # upper root when Y > 2 (diagonal case (a) gap B(Y-2) > 0), the lower when Y < 2. g from
    # the closed-form mixing angle. Observed ~1e-15.
    energy, g = doublet_pi_level(j, y * OH_ROTATION, OH_ROTATION, omega)
    upper = (y > 2) == (omega == 1.5)
    assert energy == pytest.approx(hill_van_vleck(j, y, OH_ROTATION, upper), rel=1e-12, abs=1e-12 * OH_ROTATION)
    assert g == pytest.approx(hvv_g(j, y, omega), rel=1e-10)


@pytest.mark.parametrize("y", [OH_SPIN_ORBIT / OH_ROTATION, 0.0, 12.0])
def test_doublet_pi_j_half(y: float) -> None:
    # Reference: J = 1/2 has only Omega = 1/2: Hill–Van Vleck with X = 1 gives
    # E = (B/2)(2 - Y) = -A/2 + B; g = (g_l - g_s/2)(1/2)/(J(J+1)) = (2 g_l - g_s)/3, the same
    # as case (b) N = 1, J = 1/2 (closed forms, from memory).
    energy, g = doublet_pi_level(0.5, y * OH_ROTATION, OH_ROTATION, 0.5)
    assert energy == pytest.approx(OH_ROTATION * (2 - y) / 2, rel=1e-12, abs=1e-12 * OH_ROTATION)
    assert g == pytest.approx((2 * 1.0 - G_S) / 3, rel=1e-12)


@pytest.mark.parametrize("g_s,g_l", [(2.0, 1.0), (G_S, 1.0), (G_S, 0.9)], ids=["gs2", "gsfree", "gl0.9"])
@pytest.mark.parametrize("j", [1.5, 2.5, 4.5])
@pytest.mark.parametrize("omega", [1.5, 0.5])
@pytest.mark.parametrize("y", [-1e6, 1e6])
def test_doublet_pi_case_a_limit(g_s: float, g_l: float, j: float, omega: float, y: float) -> None:
    # Reference: pure Hund's case (a), |A| >> B: g = (g_l Lambda + g_s Sigma) Omega/(J(J+1)),
    # Lambda = 1, Sigma = Omega - 1 (Brown & Carrington ch. 9; 0.8 for OH J = 3/2 with g_s = 2,
    # from memory). Mixing ~ B sqrt(X^2-1)/A ~ 1e-5 here: tolerance 1e-4 (absolute 1e-5 where
    # the case (a) value vanishes, Omega = 1/2 with g_s = 2 g_l).
    g = doublet_pi_level(j, y * OH_ROTATION, OH_ROTATION, omega, g_s=g_s, g_l=g_l)[1]
    assert g == pytest.approx((g_l + g_s * (omega - 1)) * omega / (j * (j + 1)), rel=1e-4, abs=1e-5)


def case_b_2pi(j: float, n: float, g_s: float, g_l: float) -> float:
    """Case (b) g of a 2Pi level (Lambda = 1, S = 1/2): g_s [J(J+1)+S(S+1)-N(N+1)]/(2J(J+1))
    + g_l Lambda^2/(N(N+1)) [J(J+1)+N(N+1)-S(S+1)]/(2J(J+1)) (orbital moment projected on N,
    then on J; Brown & Carrington ch. 9, from memory)."""
    jj, nn, ss = j * (j + 1), n * (n + 1), 0.75
    return g_s * (jj + ss - nn) / (2 * jj) + g_l / nn * (jj + nn - ss) / (2 * jj)


@pytest.mark.parametrize("g_s,g_l", [(2.0, 1.0), (G_S, 1.0), (G_S, 0.9)], ids=["gs2", "gsfree", "gl0.9"])
@pytest.mark.parametrize(("j", "omega"), [(0.5, 0.5)] + [(j, o) for j in (1.5, 2.5, 3.5) for o in (1.5, 0.5)])
def test_doublet_pi_case_b_limit(g_s: float, g_l: float, j: float, omega: float) -> None:
    # Reference: pure case (b), A = 0: the Omega = 3/2-dominated level is F1, J = N + 1/2, the
    # other F2, J = N - 1/2, at B (N(N+1) - 1) (Lambda^2 = 1), with the case (b) g above
    # (g = 1 for F1 J = 3/2 with g_s = 2, g_l = 1). Exact in this limit. (J = 1/2: Omega = 1/2 only.)
    n = j - 0.5 if omega == 1.5 else j + 0.5
    energy, g = doublet_pi_level(j, 0.0, OH_ROTATION, omega, g_s=g_s, g_l=g_l)
    assert energy == pytest.approx(OH_ROTATION * (n * (n + 1) - 1), rel=1e-12)
    assert g == pytest.approx(case_b_2pi(j, n, g_s, g_l), rel=1e-12)


def test_oh_j32_g_against_literature() -> None:
    # Reference: the effective g of OH X2Pi3/2 J = 3/2, ~0.935 (from memory), to 1 %; it lies
    # between the case (a) 0.8 (g_s = 2) and case (b) 1.0 limits.
    g = doublet_pi_level(1.5, OH_SPIN_ORBIT, OH_ROTATION)[1]
    assert g == pytest.approx(0.935, rel=0.01)


def test_oh_first_rotational_interval_against_measured() -> None:
    # Reference: OH X2Pi3/2 J = 5/2 <- 3/2 lines at 2514.317 and 2509.949 GHz (the two
    # Lambda-doublet components, the 119 um lines; from memory); their mean is the interval of
    # the level centres. Tolerance 0.3 %: centrifugal distortion (D ~ 0.0019 cm^-1, from
    # memory, ~0.12 cm^-1 here) is neglected; observed +0.15 %.
    low, high = (doublet_pi_level(j, OH_SPIN_ORBIT, OH_ROTATION)[0] for j in (1.5, 2.5))
    assert (high - low) / H / 1e9 == pytest.approx((2514.317 + 2509.949) / 2, rel=3e-3)


# --- 5. Populations against hand Boltzmann sums ---------------------------------------------------

def message_top(call: object) -> float:
    """The largest allowed temperature printed in a refusal, ``(0, <top>]``."""
    with pytest.raises(TiltwellError) as info:
        call()  # type: ignore[operator]
    text = str(info.value)
    assert text.startswith("rotational_temperature [K] must be in (0, ") and "; got " in text
    return float(re.search(r"\(0, ([0-9.e+-]+)\]", text).group(1))  # type: ignore[union-attr]


@pytest.mark.parametrize("name", ATOMS)
def test_atom_populations_equal_weights(name: str) -> None:
    # Reference: hyperfine and Zeeman splittings (< 0.4 K) are far below k T of the source and
    # an atom has no rotation: every |F, mF> equally filled (common practice, no source); the
    # trappable share counts the brute-force low-field seekers of section 1.
    found = populations(name)
    n = len(states(name))
    np.testing.assert_allclose(found.weights, 1 / n, rtol=1e-15)
    assert found.temperature is None and found.neglected == 0.0
    rising = sum(bool(np.all(matched_curve(name, k, SLOPE_FIELDS)[2] > 0)) for k in range(n))
    assert found.trappable_fraction == pytest.approx(rising / n, rel=1e-15)
    assert populations(name, 300.0).trappable_fraction == found.trappable_fraction  # T ignored


def test_hydrogen_and_rubidium_trappable_by_hand() -> None:
    # Reference: Breit–Rabi by hand: H |1,1> and |1,0> rise at every field, |1,-1> and |0,0>
    # fall: 2/4. Rb-87: |2,2>, |2,1>, |2,0> rise; |1,-1> rises only up to x = 1/2 (0.12 T), so
    # it counts over 0 ... 0.05 T but not over 0 ... 1 T: 3/8, then 4/8.
    assert {s.label for s, _ in populations("H").trapped()} == {"2S1/2 F=1 mF=1", "2S1/2 F=1 mF=0"}
    assert populations("H").trappable_fraction == pytest.approx(0.5, rel=1e-15)
    rb = populations("Rb-87")
    assert rb.trappable_fraction == pytest.approx(3 / 8, rel=1e-15)
    assert trappable_fraction(rb, field_range=0.05) == pytest.approx(4 / 8, rel=1e-15)
    assert len(rb.trapped(0.05)) == 4


NH_ROTATION = 16.343 * WAVENUMBER  # J; NH X3Sigma- B_0 (Huber & Herzberg (1979), from memory)


@pytest.mark.parametrize("temperature", [2.0, 5.0, 8.0])
def test_nh_populations_by_hand(temperature: float) -> None:
    # Reference: hand Boltzmann sum: N = 0 (3 states, J = 1) at 0 and N = 1 (9 states) at 2B
    # (rigid rotor): neglected = 9 q/(3 + 9 q), q = exp(-2B/kT); M = 1 of 3 traps.
    found = populations("NH", temperature)
    q = math.exp(-2 * NH_ROTATION / (K_B * temperature))
    assert found.neglected == pytest.approx(9 * q / (3 + 9 * q), rel=1e-9)
    np.testing.assert_allclose(found.weights, 1 / 3, rtol=1e-15)
    assert found.trappable_fraction == pytest.approx(1 / 3, rel=1e-15)
    assert found.temperature == temperature


def test_nh_refusal_names_largest_temperature() -> None:
    # Reference: solving 9 q/(3 + 9 q) = tol by hand: q = tol/(3 (1 - tol)), T = 2B/(k ln(1/q)).
    for tol in (0.01, 0.05):
        q = tol / (3 * (1 - tol))
        top = 2 * NH_ROTATION / (K_B * math.log(1 / q))
        shown = message_top(lambda: populations("NH", 2 * top, tolerance=tol))
        assert 0.99 * top <= shown <= top  # 3 digits, rounded down
        assert populations("NH", shown, tolerance=tol).neglected <= tol  # the bound shown is allowed


def oh_interval() -> float:
    y = OH_SPIN_ORBIT / OH_ROTATION
    return hill_van_vleck(2.5, y, OH_ROTATION, False) - hill_van_vleck(1.5, y, OH_ROTATION, False)


@pytest.mark.parametrize("temperature", [5.0, 15.0, 24.0])
def test_oh_populations_by_hand(temperature: float) -> None:
    # Reference: hand count: J = 3/2 holds 8 states of equal energy (Lambda doubling
    # neglected), half with M Omega > 0 (low-field seekers); J = 5/2 (12 states) lies at the
    # Hill–Van Vleck interval above: neglected = 12 q/(8 + 12 q).
    found = populations("OH", temperature)
    assert len(found) == 8
    np.testing.assert_allclose(found.weights, 1 / 8, rtol=1e-15)
    assert found.trappable_fraction == pytest.approx(0.5, rel=1e-15)
    moments = sorted(s.moment / MU_B for s, _ in found.trapped())
    g = hvv_g(1.5, OH_SPIN_ORBIT / OH_ROTATION, 1.5)
    np.testing.assert_allclose(moments, [g / 2, g / 2, 1.5 * g, 1.5 * g], rtol=1e-10)
    q = math.exp(-oh_interval() / (K_B * temperature))
    assert found.neglected == pytest.approx(12 * q / (8 + 12 * q), rel=1e-9)


def test_oh_refusal_names_field_unit_and_largest_temperature() -> None:
    # Reference: 12 q/(8 + 12 q) = tol by hand: q = 8 tol/(12 (1 - tol)), T = dE/(k ln(1/q)).
    q = 8 * 0.01 / (12 * 0.99)
    top = oh_interval() / (K_B * math.log(1 / q))
    shown = message_top(lambda: populations("OH", 40.0))
    assert 0.99 * top <= shown <= top
    assert populations("OH", shown).neglected <= 0.01
    with pytest.raises(TiltwellError, match=r"for OH: above it the omitted X2Pi3/2 J=5/2 level .* got 40\.0$"):
        populations("OH", 40.0)


#: O2 level energies [MHz] above N=1 J=0 from the measured lines of O2_LINES (from memory).
O2_MEASURED = {(1, 0): 0.0, (1, 1): 118750.34, (1, 2): 118750.34 - 56264.77, (3, 2): 118750.34 + 368498.3,
               (3, 3): 118750.34 - 56264.77 + 487249.4}
O2_MEASURED[(3, 4)] = O2_MEASURED[(3, 3)] - 58446.59


@functools.cache
def o2_rising() -> dict[str, bool]:
    """Low-field seeking per O2 label from the brute-force Hellmann–Feynman slopes."""
    return {s.label: bool(np.all(o2_curve(s, SLOPE_FIELDS)[1] > 0)) for s in states("O2")}


@pytest.mark.parametrize("temperature", [1.0, 5.0])
def test_o2_populations_by_hand(temperature: float) -> None:
    # Reference: hand Boltzmann sum over the 30 N = 1, 3 states with energies from the
    # measured lines (from memory, 2 MHz ~ 1e-4 K: tolerance 3e-4 relative at 1 K) and the
    # low-field-seeking flags of the brute-force diagonalisation.
    found = populations("O2", temperature)
    energies = np.array([O2_MEASURED[(round(quantum(s.label, "N")), round(quantum(s.label, "J")))] for s in found.states])
    boltzmann = np.exp(-energies * MHZ / (K_B * temperature))
    np.testing.assert_allclose(found.weights, boltzmann / boltzmann.sum(), rtol=3e-4)
    rising = np.array([o2_rising()[s.label] for s in found.states])
    assert found.trappable_fraction == pytest.approx(boltzmann[rising].sum() / boltzmann.sum(), rel=3e-4)
    assert {s.label[len("X3Sigma_g- "):] for s in found.states[:9] if o2_rising()[s.label]} == {
        "N=1 J=1 M=1", "N=1 J=1 M=0", "N=1 J=2 M=2", "N=1 J=2 M=1"}


def test_o2_neglected_and_refusal_against_brute_force() -> None:
    # Reference: hand sum with the brute-force zero-field levels (uncoupled basis): the N = 5
    # level (33 states) put at its lowest energy; the largest temperature solves
    # share = tol (scipy brentq on the hand formula).
    h0, _, _, big_n = o2_brute()
    values, vectors = np.linalg.eigh(h0)
    values = values - values[0]
    dominant = np.array([(1, 3, 5, 7)[int(np.argmax([np.sum(np.abs(vectors[big_n == n, k]) ** 2) for n in (1, 3, 5, 7)]))]
                         for k in range(values.size)])
    kept, fifth = values[dominant <= 3], values[dominant == 5].min()
    assert kept.size == 30 and np.count_nonzero(dominant == 5) == 33  # |N=5 M_N>|M_S>

    def share(t: float) -> float:
        extra = 33 * math.exp(-fifth / (K_B * t))
        return extra / (np.exp(-kept / (K_B * t)).sum() + extra)

    assert populations("O2", 6.0).neglected == pytest.approx(share(6.0), rel=1e-9)
    top = brentq(lambda t: share(t) - 0.01, 1.0, 100.0)
    shown = message_top(lambda: populations("O2", 50.0))
    assert 0.99 * top <= shown <= top
    assert populations("O2", shown).neglected <= 0.01


CAF_ROTATION = 10267.54 * MHZ  # J; CaF X2Sigma+ B (the catalogue's value, from memory)


@pytest.mark.parametrize("temperature", [0.5, 2.0, 10.0])
def test_caf_populations_by_hand(temperature: float) -> None:
    # Reference: hand Boltzmann sum: N = 0 F = 0 (1 state) at 0, F = 1 (3 states) at dE, and
    # N = 1 ... 15, 2(2N+1) states per M_S = +-1/2, at B N(N+1) + 3 dE/4 (the N = 0 centroid
    # lies 3dE/4 above F = 0 for I = 1/2); low-field seekers: |1,1>, |1,0> and M_S = +1/2;
    # N = 16 (4 x 33 states) omitted.
    split = states("CaF")[0].zeeman.hyperfine_splitting  # type: ignore[attr-defined]
    beta = 1 / (K_B * temperature)
    ladder = [(2 * (2 * n + 1), math.exp(-beta * (CAF_ROTATION * n * (n + 1) + 0.75 * split))) for n in range(1, 16)]
    z = 1 + 3 * math.exp(-beta * split) + 2 * sum(c * q for c, q in ladder)
    trapped = 2 * math.exp(-beta * split) + sum(c * q for c, q in ladder)
    found = populations("CaF", temperature)
    assert found.trappable_fraction == pytest.approx(trapped / z, rel=1e-9)
    assert found.weights[3] == pytest.approx(1 / z, rel=1e-9)  # F = 0
    extra = 4 * 33 * math.exp(-beta * (CAF_ROTATION * 16 * 17 + 0.75 * split))
    assert found.neglected == pytest.approx(extra / (z + extra), rel=1e-9, abs=1e-300)


def test_caf_refusal_against_hand_sum() -> None:
    # Reference: the hand sum above solved for share = 0.01 with scipy brentq.
    split = states("CaF")[0].zeeman.hyperfine_splitting  # type: ignore[attr-defined]

    def share(t: float) -> float:
        beta = 1 / (K_B * t)
        ladder = sum(4 * (2 * n + 1) * math.exp(-beta * (CAF_ROTATION * n * (n + 1) + 0.75 * split)) for n in range(1, 16))
        z = 1 + 3 * math.exp(-beta * split) + ladder
        extra = 4 * 33 * math.exp(-beta * (CAF_ROTATION * 16 * 17 + 0.75 * split))
        return extra / (z + extra)

    top = brentq(lambda t: share(t) - 0.01, 1.0, 200.0)
    shown = message_top(lambda: populations("CaF", 100.0))
    assert 0.99 * top <= shown <= top


def test_explicit_weights_and_state_lists() -> None:
    # Reference: hand normalisation; W = moment |B| is a low-field seeker for moment > 0 only.
    found = populations([(2 * MU_B, 1.0), (-MU_B, 3.0), (0.0, 1.0)])
    np.testing.assert_allclose(found.weights, [0.2, 0.6, 0.2], rtol=1e-15)
    assert found.trappable_fraction == pytest.approx(0.2, rel=1e-15)
    assert found.temperature is None and found.neglected == 0.0
    assert [w for _, w in found] == pytest.approx([0.2, 0.6, 0.2], rel=1e-15)
    up = ZeemanState("up", LinearZeeman(MU_B))
    down = ZeemanState("down", LinearZeeman(-MU_B), level_energy=2 * K_B, degeneracy=3)  # 2 K above
    listed = populations([up, down], 1.0)
    z = 1 + 3 * math.exp(-2.0)
    np.testing.assert_allclose(listed.weights, [1 / z, 3 * math.exp(-2.0) / z], rtol=1e-12)
    assert listed.trappable_fraction == pytest.approx(1 / z, rel=1e-12)
    mixed = populations([(up, 1), (down, 1)])
    assert mixed.trappable_fraction == pytest.approx(0.5, rel=1e-15)
    assert not found.weights.flags.writeable


def test_molecules_need_a_temperature() -> None:
    assert [n for n in catalogue() if is_molecule(n)] == ["O2", "NH", "OH", "CaF"]
    for name in ("O2", "NH", "OH", "CaF"):
        with pytest.raises(TiltwellError, match=rf"^rotational_temperature \[K\] is needed for {name}; got None$"):
            populations(name)


BAD = {
    "unknown-name": (lambda: populations("Oh2", 5.0), r"^unknown species 'Oh2'; close matches: OH"),
    "name-type": (lambda: states(3), r"^name must be a string"),  # type: ignore[arg-type]
    "temperature-negative": (lambda: populations("NH", -1.0),
                             r"^rotational_temperature \[K\] must be finite and in \(0, inf\); got -1\.0"),
    "temperature-zero": (lambda: populations("NH", 0.0),
                         r"^rotational_temperature \[K\] must be finite and in \(0, inf\)"),
    "list-no-temperature": (lambda: populations([ZeemanState("a", LinearZeeman(MU_B))]),
                            r"^rotational_temperature \[K\] is needed for a list of states"),
    "tolerance-zero": (lambda: populations("OH", 5.0, tolerance=0.0),
                       r"^tolerance \[1\] must be finite and in \(0, 1\); got 0\.0"),
    "tolerance-one": (lambda: populations("OH", 5.0, tolerance=1.0), r"^tolerance \[1\]"),
    "empty-list": (lambda: populations([]),
                   r"^source must be a species name, a list of ZeemanState or of \(state, weight\) pairs; got \[\]"),
    "not-a-list": (lambda: populations(3.0), r"^source must be"),  # type: ignore[arg-type]
    "negative-weight": (lambda: populations([(MU_B, 1.0), (MU_B, -1.0)]),
                        r"^source\[1\] weight \[1\] must be finite and in \[0, inf\); got -1\.0"),
    "bad-moment": (lambda: populations([("x", 1.0)]), r"^source\[0\] moment \[J/T\] must be a real number"),
    "not-a-pair": (lambda: populations([(MU_B, 1.0, 2.0)]), r"^source\[0\] must be a \(state, weight\) pair"),
    "zero-weights": (lambda: populations([(MU_B, 0.0)]),
                     r"^weights \[1\] must have a positive sum; got 0\.0"),
    "level-negative": (lambda: ZeemanState("a", LinearZeeman(MU_B), level_energy=-1e-23),
                       r"^level_energy \[J\] must be finite and in \[0, inf\)"),
    "degeneracy-zero": (lambda: ZeemanState("a", LinearZeeman(MU_B), degeneracy=0),
                        r"^degeneracy must be an integer"),
    "zeeman-type": (lambda: ZeemanState("a", 3.0),  # type: ignore[arg-type]
                    r"^zeeman must have energy\(field\) and derivative\(field\) methods; got float"),
    "label-empty": (lambda: ZeemanState(" ", LinearZeeman(MU_B)), r"^label must be a non-empty string"),
    "field-range": (lambda: states("H")[0].seeks_low_field(0.0),
                    r"^field_range \[T\] must be finite and in \(1e-06, inf\)"),
    "matrix-asymmetric": (lambda: MatrixZeeman([[0, 1], [0, 0]], np.eye(2), 0),
                          r"^zero_field \[J\] must be symmetric"),
    "matrix-shape": (lambda: MatrixZeeman(np.eye(2), np.eye(3), 0),
                     r"^per_tesla \[J/T\] must be square, shape \(d, d\) like zero_field; got \(3, 3\)"),
    "matrix-index": (lambda: MatrixZeeman(np.eye(2), np.eye(2), 2),
                     r"^index must be an integer in \[0, 1\]; got 2"),
    "matrix-field": (lambda: MatrixZeeman(np.eye(2), np.eye(2), 0).energy(-1.0),
                     r"^field \[T\] is a magnitude"),
    "pi-j-integer": (lambda: doublet_pi_level(2.0, -1e-21, 1e-22),
                     r"^j \[1\] must be a half-integer >= 1/2; got 2\.0"),
    "pi-j-omega": (lambda: doublet_pi_level(0.5, -1e-21, 1e-22, 1.5),
                   r"^j \[1\] must be >= 3/2 for omega = 3/2; got 0\.5"),
    "pi-omega": (lambda: doublet_pi_level(1.5, -1e-21, 1e-22, 1.0),
                 r"^omega \[1\] must be 3/2 or 1/2; got 1\.0"),
    "pi-rotation": (lambda: doublet_pi_level(1.5, -1e-21, 0.0),
                    r"^rotation \[J\] must be finite and in \(0, inf\); got 0\.0"),
}


@pytest.mark.parametrize("case", list(BAD))
def test_bad_input_names_argument(case: str) -> None:
    call, pattern = BAD[case]
    with pytest.raises(TiltwellError, match=pattern):
        call()


# --- 6. Masses against periodictable ---------------------------------------------------------

#: Each species' atoms as (element, mass number).
ISOTOPES = {"H": [("H", 1)], "D": [("H", 2)], "Li-7": [("Li", 7)], "Na-23": [("Na", 23)], "K-39": [("K", 39)],
            "Rb-87": [("Rb", 87)], "N": [("N", 14)], "O2": [("O", 16), ("O", 16)], "Ne*": [("Ne", 20)],
            "Ar*": [("Ar", 40)], "Cr": [("Cr", 52)], "NH": [("N", 14), ("H", 1)], "OH": [("O", 16), ("H", 1)],
            "CaF": [("Ca", 40), ("F", 19)]}


@pytest.mark.parametrize("name", list(ISOTOPES))
def test_mass_against_periodictable(name: str) -> None:
    # Reference: periodictable (AME2020 isotope masses, M. Wang et al., Chinese Phys. C 45,
    # 030003 (2021)), summed over the atoms of a molecule (binding ~1e-9 neglected; so is the
    # ~1e-9 excitation energy of Ne*, Ar*); u from scipy (CODATA).
    assert set(ISOTOPES) == set(catalogue())
    expected = sum(getattr(periodictable, el)[a].mass for el, a in ISOTOPES[name]) * sc.atomic_mass
    assert species(name).mass == pytest.approx(expected, rel=1e-8)


# --- 7. species_of_state --------------------------------------------------------------------

@pytest.mark.parametrize(("name", "label"), [("O2", "X3Sigma_g- N=1 J=1 M=0"), ("H", "2S1/2 F=1 mF=0"),
                                             ("OH", "X2Pi3/2 J=3/2 M=1/2 MOmega>0"), ("CaF", "X2Sigma+ N=2 M_S=+1/2")])
def test_species_of_state(name: str, label: str) -> None:
    # Reference: the state's own curve (definition) and the catalogue mass.
    state = next(s for s in states(name) if s.label == label)
    particle = species_of_state(name, state)
    fields = np.array([0.0, 0.01, 0.3, 1.0])
    np.testing.assert_array_equal(particle.zeeman.energy(fields), state.zeeman.energy(fields))
    np.testing.assert_array_equal(particle.zeeman.derivative(fields), state.zeeman.derivative(fields))
    assert particle.mass == species(name).mass
    assert particle.moment == state.moment and label in particle.name and particle.state == label
