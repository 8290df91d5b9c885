"""Tests of the output edges: constants, JSON serialization, the driver, terminal tables, the CLI.

The command line is tested end to end in a subprocess (``python -m tdhf``): exit code, what goes to
stdout and to stderr, and which files are left behind.  Only He (and Ne for the tables) are solved,
so the whole file runs in a few seconds.
"""

from __future__ import annotations

import io
import json
import math
import subprocess
import sys
import types
from dataclasses import dataclass, field

import numpy as np
import pytest
import scipy.constants
from rich.console import Console
from roundoff import U

from tdhf.constants import BOHR_ANGSTROM, HARTREE_EV, POLARIZABILITY_ANGSTROM3, POLARIZABILITY_SI, hartree_to_ev
from tdhf.deck import parse_deck
from tdhf.driver import RESPONSE_FIELDS, RunResult, run_deck
from tdhf.report.json_result import result_to_json
from tdhf.report.serialize import to_jsonable, write_json
from tdhf.report.terminal import ROW_TABLES, print_report, rows_table

# Numerical Hartree-Fock limit of He, hartree: -2.8616799956 (M. Cinal, J. Math. Chem. 58 (2020),
# quoted from memory to 10 decimals).  The default grid reaches ~1e-9 hartree, hence atol 1e-9.
HE_HF_LIMIT = -2.8616799956
HE_ATOL = 1e-9

HE_DECK = '[atom]\nelement = "He"\n'
TOP_LEVEL_KEYS = ["atom", "ground_state", "warnings", "settings", "program", "conventions", "quantities"]
ALL_KEYS = ["atom", "ground_state", *RESPONSE_FIELDS, "dispersion", "warnings", "rejected", "settings", "program",
            "conventions", "quantities"]


# --- constants -------------------------------------------------------------------------------


def test_constants_come_from_codata():
    pc = scipy.constants.physical_constants
    assert HARTREE_EV == pc["Hartree energy in eV"][0]
    assert hartree_to_ev(1.0) == HARTREE_EV
    # a0 * 1e10 against a0 / 1e-10: one rounding each, plus the comparison.
    assert BOHR_ANGSTROM == pytest.approx(pc["Bohr radius"][0] / scipy.constants.angstrom, rel=3 * U)


def test_polarizability_units_agree():
    """Exact relation: 1 a.u. of polarizability / (4 pi eps0) = a0^3.  CODATA quotes both constants
    to 12 significant digits, so their rounding (<= 5e-12 relative for the polarizability unit,
    3 x 1e-12 for a0^3) and a few roundings here bound the disagreement by 1e-11 (measured 1.2e-12)."""
    volume_m3 = POLARIZABILITY_SI / (4.0 * math.pi * scipy.constants.epsilon_0)
    assert volume_m3 * 1e30 == pytest.approx(POLARIZABILITY_ANGSTROM3, rel=1e-11)


# --- serialization ---------------------------------------------------------------------------


@dataclass(frozen=True)
class _Inner:
    value: float
    flags: tuple[bool, ...]


@dataclass(frozen=True)
class _Outer:
    name: str
    count: np.int64
    inner: _Inner
    values: np.ndarray
    rows: tuple[_Inner, ...]
    hidden: object = field(default=None, metadata={"json": False})


def test_to_jsonable_walks_dataclasses_numpy_and_tuples():
    obj = _Outer("x", np.int64(3), _Inner(np.float64(0.5), (True, False)), np.array([[1.0, np.nan], [np.inf, 2.0]]),
                 (_Inner(1.0, ()),), hidden=object())
    data = to_jsonable(obj)
    assert data == {"name": "x", "count": 3, "inner": {"value": 0.5, "flags": [True, False]},
                    "values": [[1.0, None], [None, 2.0]], "rows": [{"value": 1.0, "flags": []}]}
    assert type(data["count"]) is int and type(data["inner"]["value"]) is float
    json.dumps(data, allow_nan=False)


def test_to_jsonable_rejects_unknown_types():
    with pytest.raises(TypeError, match="set"):
        to_jsonable({"a": {1, 2}})


def test_write_json_is_atomic(tmp_path):
    path = tmp_path / "out.json"
    write_json(path, {"a": (1, 2.5)})
    assert json.loads(path.read_text()) == {"a": [1, 2.5]}
    with pytest.raises(TypeError):
        write_json(path, {"a": {1}})
    assert json.loads(path.read_text()) == {"a": [1, 2.5]}  # old content kept
    with pytest.raises(TypeError):
        write_json(tmp_path / "never.json", object())
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.json"]  # no partial or temporary file


# --- driver ----------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def helium_run() -> RunResult:
    return run_deck(parse_deck(HE_DECK))


def test_driver_ground_state(helium_run):
    assert helium_run.converged and helium_run.convergence_problems() == ()
    assert helium_run.ground_state.total_energy == pytest.approx(HE_HF_LIMIT, abs=HE_ATOL, rel=0)
    assert helium_run.atom.name == "He" and helium_run.warnings == ()
    assert helium_run.program.name == "tdhf" and helium_run.program.version


def test_result_json_without_response_has_no_response_lists(helium_run):
    data = result_to_json(helium_run)
    assert list(data) == TOP_LEVEL_KEYS
    assert data["atom"] == {"name": "He", "Z": 2, "charge": 0, "electrons": 2, "configuration": "1s2"}
    assert data["settings"]["response"] is None and data["settings"]["grid"]["order"] == 10
    json.dumps(data, allow_nan=False)


def test_progress_is_reported():
    stages = []
    run_deck(parse_deck(HE_DECK), progress=stages.append)
    assert stages == ["ground state of He"]


def test_response_api_is_called_with_the_deck_section(monkeypatch):
    """Wiring only: a stand-in compute_response records its arguments and returns marked rows."""
    calls = []

    def compute_response(ground_state, multipoles, frequencies, imaginary_frequencies, coupled, broadening, **options):
        calls.append((ground_state.system.name, multipoles, frequencies, imaginary_frequencies, coupled))
        return types.SimpleNamespace(**{name: [{"from": name}] for name in RESPONSE_FIELDS}, warnings=["note"],
                                     rejected=[])

    monkeypatch.setattr("tdhf.driver.compute_response", compute_response)
    deck = parse_deck(HE_DECK + "[response]\nmultipoles = [1, 2]\nfrequencies = [0, 0.1]\n"
                                "imaginary_frequencies = [0.5]\ncoupled = false\n")
    result = run_deck(deck)
    assert calls == [("He", (1, 2), (0.0, 0.1), (0.5,), False)]
    assert all(getattr(result, name) == ({"from": name},) for name in RESPONSE_FIELDS)
    assert result.warnings == ("note",)


def test_unconverged_ground_state_is_returned_and_skips_response():
    deck = parse_deck(HE_DECK + "[scf]\nmax_iterations = 1\n[response]\n")
    with pytest.warns(RuntimeWarning) as caught:
        result = run_deck(deck)
    messages = [str(w.message) for w in caught]
    assert any(m.startswith("scf: not converged") for m in messages)
    assert "response: skipped; the ground state of He did not converge" in messages
    assert not result.converged and not result.ground_state.converged
    (problem,) = result.convergence_problems()
    assert problem.startswith("He: Hartree-Fock did not converge after 2 iterations (DIIS, then damped DIIS")
    assert result_to_json(result)["ground_state"]["converged"] is False


# --- terminal tables -------------------------------------------------------------------------


def _render(result) -> str:
    stream = io.StringIO()
    print_report(Console(file=stream, width=140), result)
    return stream.getvalue()


def test_terminal_report_has_units_and_values(helium_run):
    text = _render(helium_run)
    assert text.splitlines()[0].startswith("He")
    for fragment in ("total energy", "hartree", "virial ratio", "rho(0)", "cusp ratio", "(eV)",
                     "<r>", "(bohr)", "-2.8616799956", "1s"):
        assert fragment in text


def test_row_tables_show_every_field_with_missing_as_dash():
    rows = [{"multipole": 1, "frequency": 0.0, "imaginary": False, "coupled": 1.3832, "uncoupled": None}]
    stream = io.StringIO()
    title, columns = ROW_TABLES["polarizabilities"]
    Console(file=stream, width=140).print(rows_table(title, rows, columns))
    text = stream.getvalue()
    assert "frequency" in text and "(hartree)" in text and "1.3832" in text and "real" in text and " - " in text


# --- command line, end to end -----------------------------------------------------------------


def tdhf(*args: str, cwd) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "tdhf", *args], cwd=cwd, capture_output=True, text=True,
                          timeout=120)


def test_cli_atom_he_writes_json_and_a_table(tmp_path):
    run = tdhf("atom", "He", "--json", "out.json", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    assert run.stderr == ""
    assert "total energy" in run.stdout and "Orbitals" in run.stdout and "Traceback" not in run.stdout
    data = json.loads((tmp_path / "out.json").read_text())
    assert list(data) == TOP_LEVEL_KEYS
    assert set(data["atom"]) == {"name", "Z", "charge", "electrons", "configuration"}
    state = data["ground_state"]
    for key in ("converged", "total_energy", "kinetic_energy", "virial_ratio", "orbitals"):
        assert key in state
    assert {"label", "n", "l", "occupation", "energy"} <= set(state["orbitals"][0])
    assert state["converged"] is True
    assert state["total_energy"] == pytest.approx(HE_HF_LIMIT, abs=HE_ATOL, rel=0)
    assert data["program"]["name"] == "tdhf"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.json"]


def test_cli_quiet_prints_nothing(tmp_path):
    run = tdhf("atom", "He", "--quiet", cwd=tmp_path)
    assert (run.returncode, run.stdout, run.stderr) == (0, "", "")


def test_cli_verbose_logs_scf_iterations_on_stderr(tmp_path):
    (tmp_path / "he.toml").write_text(HE_DECK)
    run = tdhf("run", "he.toml", "-v", cwd=tmp_path)
    assert run.returncode == 0
    assert "tdhf: scf    1  E = " in run.stderr and "tdhf: option grid: " in run.stderr
    assert "total energy" in run.stdout and "tdhf: scf" not in run.stdout


def test_cli_bad_deck_exits_2_with_one_line(tmp_path):
    (tmp_path / "bad.toml").write_text('[atom]\nelement = "Ne"\n[response]\nfrequencies = [0.0, 0.1, -0.1]\n')
    run = tdhf("run", "bad.toml", "--json", "out.json", cwd=tmp_path)
    assert run.returncode == 2
    assert run.stdout == ""
    assert run.stderr.splitlines() == ["tdhf: error: response.frequencies[2]: -0.1 is negative; frequencies are "
                                       "in hartree and must be >= 0"]
    assert "Traceback" not in run.stderr
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.toml"]  # no JSON left behind


@pytest.mark.parametrize("args", [
    ["atom", "Xx", "--json", "out.json"],
    ["atom", "F", "--json", "out.json"],
    ["atom", "He", "--multipoles", "4", "--json", "out.json"],
    ["run", "absent.toml", "--json", "out.json"],
    ["atom", "He", "--json", "no/such/dir/out.json"],
    ["atom", "Na+", "--charge", "2", "--json", "out.json"],
], ids=["unknown-element", "open-shell", "multipole-4", "missing-deck", "bad-json-dir", "two-charges"])
def test_cli_input_errors(tmp_path, args):
    run = tdhf(*args, cwd=tmp_path)
    assert run.returncode == 2
    (line,) = run.stderr.splitlines()
    assert line.startswith("tdhf: error: ") and "Traceback" not in run.stderr
    assert list(tmp_path.iterdir()) == []


def test_cli_atom_takes_an_ion_by_its_name(tmp_path):
    """Common practice, no source: "Na+" is Na with charge +1, as in the dispersion partners."""
    assert tdhf("atom", "Na+", "-q", "--json", "ion.json", cwd=tmp_path).returncode == 0
    atom = json.loads((tmp_path / "ion.json").read_text())["atom"]
    assert (atom["Z"], atom["charge"]) == (11, 1)


def test_cli_unconverged_exits_3_and_keeps_the_json(tmp_path):
    (tmp_path / "he.toml").write_text(HE_DECK + "[scf]\nmax_iterations = 1\n")
    run = tdhf("run", "he.toml", "--json", "out.json", "--quiet", cwd=tmp_path)
    assert run.returncode == 3
    assert run.stdout == ""
    (line,) = run.stderr.splitlines()
    assert line.startswith("tdhf: error: He: Hartree-Fock did not converge after 2 iterations (DIIS, then damped DIIS")
    assert line.endswith("results written to out.json")
    assert json.loads((tmp_path / "out.json").read_text())["ground_state"]["converged"] is False


def test_cli_response_options_build_the_response_section(tmp_path):
    run = tdhf("atom", "He", "--multipoles", "1", "2", "--frequencies", "0", "0.1", "--imaginary", "0.5",
               "--json", "out.json", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    assert "Traceback" not in run.stderr
    data = json.loads((tmp_path / "out.json").read_text())
    assert data["settings"]["response"] == {"multipoles": [1, 2], "frequencies": [0.0, 0.1],
                                            "imaginary_frequencies": [0.5], "coupled": True, "broadening": 0.0,
                                            "excitations": 0}
    assert all(name in data for name in RESPONSE_FIELDS) and "dispersion" not in data
    for warning in data["warnings"]:
        assert f"tdhf: warning: {warning}" in run.stderr.splitlines()


def test_cli_version_and_usage(tmp_path):
    version = tdhf("--version", cwd=tmp_path)
    assert version.returncode == 0 and version.stdout.startswith("tdhf ")
    usage = tdhf(cwd=tmp_path)
    assert usage.returncode == 2 and "usage: tdhf" in usage.stderr


def test_cli_library_warnings_become_one_stderr_line(tmp_path):
    (tmp_path / "he.toml").write_text(HE_DECK + "[grid]\nr_max = 10.0\n")  # too small a box for He
    run = tdhf("run", "he.toml", cwd=tmp_path)
    assert run.returncode == 0
    (line,) = run.stderr.splitlines()
    assert line.startswith("tdhf: warning: grid.r_max: the outermost orbital has decayed only to exp(-")
    assert tdhf("run", "he.toml", "-q", cwd=tmp_path).stderr == ""


def test_cli_unexpected_error_exits_1_with_one_line(monkeypatch):
    import tdhf.cli

    def broken(deck, progress=None, map_tasks=None):
        raise RuntimeError("something impossible")

    monkeypatch.setattr("tdhf.driver.run_deck", broken)
    out, err = io.StringIO(), io.StringIO()
    assert tdhf.cli.main(["atom", "He"], stdout=out, stderr=err) == 1
    assert out.getvalue() == ""
    assert err.getvalue().splitlines() == [
        "tdhf: error: internal error RuntimeError: something impossible (run with --verbose for the traceback)"]
    err = io.StringIO()
    assert tdhf.cli.main(["atom", "He", "-v"], stdout=out, stderr=err) == 1
    assert "Traceback" in err.getvalue()


def test_cli_frequency_on_the_threshold_exits_2_and_keeps_the_rest(tmp_path):
    """He: 0.9 hartree lies between the 1s4p and 1s5p 1P poles (below the 0.918 threshold) and is
    computed with its neighbouring poles; 1.2 is above the threshold: complex alpha with outgoing
    waves, absorbing (Im alpha > 0, analytic sign of absorption); the threshold itself is refused.
    Pole positions are self-regression values of this code (tests/test_spectrum.py)."""
    run = tdhf("atom", "He", "--multipoles", "1", "--frequencies", "0", "0.9", "1.2", "0.9179555628",
               "--json", "out.json", cwd=tmp_path)
    assert run.returncode == 2
    assert "Traceback" not in run.stderr
    (error,) = [line for line in run.stderr.splitlines() if line.startswith("tdhf: error:")]
    assert "response.frequencies[3]: 0.917956 hartree is at the ionization threshold (0.91795" in error
    data = json.loads((tmp_path / "out.json").read_text())
    rows = data["polarizabilities"]
    assert [row["frequency"] for row in rows] == [0.0, 0.9, 1.2]
    assert rows[1]["pole_below"] < 0.9 < rows[1]["pole_above"] < 0.918
    assert rows[2]["method"] == "outgoing waves" and rows[2]["coupled_imaginary_part"] > 0.0 and rows[2]["converged"]
    assert data["rejected"] and data["rejected"][0].startswith("response.frequencies[3]")


def test_cli_certify_compares_every_number_on_a_finer_grid(tmp_path):
    """Common practice, no source: a two-grid comparison; the defaults hold He to 1e-9 relative."""
    run = tdhf("atom", "He", "--multipoles", "1", "--frequencies", "0", "--certify", "--json", "out.json", "-q",
               cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    rows = json.loads((tmp_path / "out.json").read_text())["certification"]
    quantities = {row["quantity"] for row in rows}
    assert {"ground_state.total_energy", "polarizabilities[0].coupled", "sum_rules[0].value"} <= quantities
    assert max(row["relative_difference"] for row in rows) < 1e-9


def test_broadened_response_has_absorption(tmp_path):
    """Im alpha(omega + i eta) > 0 for omega > 0 (absorption sign convention, analytic)."""
    deck = tmp_path / "he.toml"
    deck.write_text('[atom]\nelement = "He"\n[response]\nfrequencies = [0.5, 0.9]\nbroadening = 0.01\n')
    run = tdhf("run", str(deck), "--json", "out.json", "-q", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    rows = json.loads((tmp_path / "out.json").read_text())["polarizabilities"]
    assert [row["frequency"] for row in rows] == [0.5, 0.9]  # above the first line is allowed when broadened
    assert all(row["coupled_imaginary_part"] > 0.0 and row["broadening"] == 0.01 for row in rows)


def test_cli_pairs_table_json_and_csv(tmp_path):
    """A series table: every unordered pair once, alpha(i w) exported; H-H C6 = 6.499026705 (exact, from memory)."""
    run = tdhf("pairs", "H", "He", "--points", "16", "--json", "out.json", "--csv", "alpha.csv", "-q", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    data = json.loads((tmp_path / "out.json").read_text())
    assert [row["pair"] for row in data["dispersion"]] == [["H", "H"], ["H", "He"], ["He", "He"]]
    # Tolerance: a unit in the last recalled digit plus the row's own (16-point) quadrature error estimate.
    assert abs(data["dispersion"][0]["C6"] - 6.499026705) <= 1e-9 + data["dispersion"][0]["C6_error"]
    lines = (tmp_path / "alpha.csv").read_text().splitlines()
    assert lines[0] == "system,frequency_hartree,weight,alpha1,alpha2,alpha3"
    assert {line.split(",")[0] for line in lines[1:]} == {"H", "He"}


def test_cli_pairs_rejects_an_open_shell_system(tmp_path):
    run = tdhf("pairs", "He", "Na", cwd=tmp_path)
    assert run.returncode == 2 and "Traceback" not in run.stderr
    (line,) = run.stderr.splitlines()
    assert line.startswith("tdhf: error: dispersion.systems[0]") and "3s1" in line
