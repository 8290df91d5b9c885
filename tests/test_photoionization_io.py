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
from tdhf.errors import DeckError, InputError
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
    ('photon_energies = ["1 parsec"]', "photoionization.photon_energies[0]"),
    ("range = [3.0, 1.0]", "photoionization.range"),
    ("range = [1.0, 2.0, 3.0]", "photoionization.range"),
    ("sum_rules = 1\nrange = [1, 2]", "photoionization.sum_rules"),
    ("energies = [1.0]", "photoionization.energies"),
])
def test_bad_tables_name_the_key(table, key):
    with pytest.raises(InputError) as error:
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


def test_photon_energies_take_units():
    """CODATA (scipy.constants): "40.8 eV" is 40.8 / 27.211386... hartree; a wavelength is hc/lambda."""
    from scipy.constants import physical_constants

    deck = parse_deck('[atom]\nelement = "He"\n[photoionization]\nphoton_energies = ["40.8 eV", 1.5]\n'
                      'range = ["30 eV", "2 hartree"]\n')
    hartree_ev = physical_constants["Hartree energy in eV"][0]
    assert deck.photoionization.photon_energies == pytest.approx((40.8 / hartree_ev, 1.5), rel=1e-15)
    assert deck.photoionization.range == pytest.approx((30.0 / hartree_ev, 2.0), rel=1e-15)
    with pytest.raises(InputError, match=r"photoionization\.photon_energies\[0\]"):
        parse_deck('[atom]\nelement = "He"\n[photoionization]\nphoton_energies = ["40 furlongs"]\n')


def test_a_photon_energy_too_large_for_the_grid_is_refused_with_the_limit(tmp_path):
    """Every setting runs in bounded memory or is refused: a 2000-hartree photon needs ~7000 scaled-grid
    points; it is refused (exit 2) naming the key and the largest energy that fits, the others computed."""
    deck = tmp_path / "he.toml"
    deck.write_text('[atom]\nelement = "He"\n[photoionization]\nphoton_energies = [1.5, 2000.0]\nsum_rules = false\n')
    run = subprocess.run([sys.executable, "-m", "tdhf", "run", str(deck), "--json", str(tmp_path / "out.json"), "-q"],
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 2 and "Traceback" not in run.stderr
    assert "photoionization.photon_energies[1]: 2000 hartree needs a continuum grid of" in run.stderr
    assert "the largest photon energy that fits is" in run.stderr
    data = json.loads((tmp_path / "out.json").read_text())
    assert [row["photon_energy"] for row in data["photoionization"]] == [1.5]
