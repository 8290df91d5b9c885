"""The ``[photoionization]`` table, its results in a run and its JSON contract, and the exit code of
the command line for photon energies below the threshold.  Only He is solved (a few seconds)."""

from __future__ import annotations

import dataclasses
import json
import subprocess
import sys

import pytest

from tdhf.deck import format_deck, parse_deck
from tdhf.driver import run_deck
from tdhf.report.json_result import result_to_json
from tdhf.errors import DeckError
from tdhf.properties.photoionization import PhotoionizationSection

HE = '[atom]\nelement = "He"\n'


def test_table_is_read_and_written_back():
    deck = parse_deck(HE + "[photoionization]\nphoton_energies = [1.0, 2]\nrange = [1.5, 3.0]\nsum_rules = false\n")
    assert deck.photoionization == PhotoionizationSection((1.0, 2.0), (1.5, 3.0), False)
    assert parse_deck(format_deck(deck)) == deck
    assert parse_deck(HE + "[photoionization]\nrange = [1, 2]\n").photoionization.sum_rules is True


@pytest.mark.parametrize("table, key", [
    ("", "photoionization: give photon_energies"),
    ("photon_energies = [1.0, -2.0]", "photoionization.photon_energies[1]"),
    ("photon_energies = [1.0, 1.0]", "photoionization.photon_energies[1]"),
    ('photon_energies = ["1"]', "photoionization.photon_energies[0]"),
    ("range = [3.0, 1.0]", "photoionization.range"),
    ("range = [1.0, 2.0, 3.0]", "photoionization.range"),
    ("sum_rules = 1\nrange = [1, 2]", "photoionization.sum_rules"),
    ("energies = [1.0]", "photoionization.energies"),
])
def test_bad_tables_name_the_key(table, key):
    with pytest.raises(DeckError) as error:
        parse_deck(HE + "[photoionization]\n" + table + "\n")
    assert str(error.value).startswith(key) and "\n" not in str(error.value)


@pytest.fixture(scope="module")
def helium_run():
    deck = parse_deck(HE + "[photoionization]\nphoton_energies = [0.5, 1.0, 2.0]\nsum_rules = false\n")
    return run_deck(deck)


def test_energies_below_the_threshold_are_refused_and_the_rest_computed(helium_run):
    """One line per refused energy, naming the key, the threshold and where the bound lines are."""
    (line,) = helium_run.rejected
    assert line.startswith("photoionization.photon_energies[0]: 0.5 hartree")
    assert "0.917956 hartree" in line and "excitations" in line
    assert [row.photon_energy for row in helium_run.photoionization] == [1.0, 2.0]
    assert helium_run.converged


def test_json_contract(helium_run):
    """photoionization[{photon_energy, cross_section, cross_section_velocity, cross_section_uncoupled,
    partial[{subshell, cross_section}]}], resonances[{energy, width, subshell}], units stated."""
    data = json.loads(json.dumps(result_to_json(helium_run), allow_nan=False))
    row = data["photoionization"][0]
    for key in ("photon_energy", "cross_section", "cross_section_velocity", "cross_section_uncoupled", "partial"):
        assert key in row
    assert row["partial"] == [{"subshell": "1s", "cross_section": pytest.approx(row["cross_section"], rel=1e-6)}]
    assert data["resonances"] == []
    assert data["continuum"]["thresholds"] == [{"subshell": "1s", "energy": pytest.approx(0.917955563, abs=1e-8)}]
    assert "bohr^2" in data["conventions"]["photoionization"]
    assert data["rejected"]
    plain = result_to_json(run_deck(parse_deck(HE)))
    assert not {"photoionization", "resonances", "continuum", "rejected"} & set(plain)


def test_unconverged_rows_are_convergence_problems(helium_run):
    flagged = dataclasses.replace(helium_run.photoionization[0], converged=False)
    result = dataclasses.replace(helium_run, photoionization=(flagged,) + helium_run.photoionization[1:])
    assert any("photoionization at 1 hartree" in line for line in result.convergence_problems())


def test_range_starting_below_the_threshold_is_computed_from_it():
    result = run_deck(parse_deck(HE + "[photoionization]\nrange = [0.5, 1.2]\nsum_rules = false\n"))
    assert result.rejected[0].startswith("photoionization.range[0]: 0.5 hartree")
    energies = [row.photon_energy for row in result.photoionization]
    assert 0.9179 < min(energies) < 0.9181 and max(energies) == 1.2 and len(energies) >= 40


def test_command_line_exit_code_and_json(tmp_path):
    deck = tmp_path / "he.toml"
    deck.write_text(HE + "[photoionization]\nphoton_energies = [0.5, 1.5]\nsum_rules = false\n")
    out = tmp_path / "he.json"
    run = subprocess.run([sys.executable, "-m", "tdhf", "run", str(deck), "--json", str(out), "-q"],
                         capture_output=True, text=True)
    assert run.returncode == 2
    assert run.stderr.count("\n") == 1 and "photoionization.photon_energies[0]" in run.stderr
    assert json.loads(out.read_text())["photoionization"][0]["photon_energy"] == 1.5
