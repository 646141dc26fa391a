"""The command line: same numbers as the library, one-line errors."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest
from scipy import constants

from tiltwell import species
from tiltwell.cli import main


def test_quadrupole_json_matches_closed_forms(capsys: pytest.CaptureFixture[str]) -> None:
    """Closed forms of an ideal quadrupole: the critical deceleration is a_c = W' B'_z / m
    (the Rb-87 stretched state's Zeeman energy is exactly linear, Breit-Rabi), and the
    escape energy at a = 0 is the Zeeman energy at the truncation field, W(B_max)."""
    assert main(["quadrupole", "Rb-87", "--gradient", "1.5", "--max-field", "0.02", "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    rb = species("Rb-87")
    assert summary["critical_deceleration"] == pytest.approx(rb.moment * 1.5 / rb.mass, rel=1e-9)
    assert summary["escape_energy"] == pytest.approx(float(rb.zeeman.energy(0.02)), rel=1e-9)
    assert summary["units"]["acceptance_6d"] == "(m*m/s)^3"
    assert summary["acceptance_6d"] > 0


def test_quadrupole_text_and_unbound(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["quadrupole", "H", "--gradient", "1", "--max-field", "0.1", "--deceleration", "1e9"]) == 0
    assert "no bound well" in capsys.readouterr().out


def test_species_listing_names_every_entry(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["species"]) == 0
    out = capsys.readouterr().out
    for name in ("H", "Rb-87", "CaF", "OH"):
        assert name in out
    assert main(["species", "OH"]) == 0
    assert "mu_B" in capsys.readouterr().out


@pytest.mark.parametrize(
    ("argv", "word"),
    [
        (["species", "Rb78"], "Rb-87"),
        (["quadrupole", "H", "--gradient", "-1", "--max-field", "0.1"], "gradient"),
        (["quadrupole", "H", "--gradient", "1", "--max-field", "nan"], "max_field"),
    ],
    ids=["unknown-species", "negative-gradient", "nan-field"],
)
def test_errors_are_one_line_without_traceback(argv: list[str], word: str) -> None:
    completed = subprocess.run(
        [sys.executable, "-m", "tiltwell.cli", *argv], capture_output=True, text=True, check=False
    )
    assert completed.returncode == 2
    assert word in completed.stderr
    assert "Traceback" not in completed.stderr
    assert len(completed.stderr.strip().splitlines()) == 1


def test_bohr_magneton_sanity() -> None:
    """The hydrogen moment in the catalogue is about one Bohr magneton (CODATA via scipy)."""
    assert species("H").moment == pytest.approx(constants.physical_constants["Bohr magneton"][0], rel=2e-3)
