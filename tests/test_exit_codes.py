"""Every case the README's exit-code table lists ends with its code, and none with 1 (a bug).

Common practice, no source: the cases are those of the robustness review (output targets,
crashes on valid input, endless decks, impossible settings); the physics is only He and Ne.
"""

from __future__ import annotations

import io
import json
import os
import stat

import pytest

import tdhf.cli

HE = '[atom]\nelement = "He"\n'


def run_main(*args) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    code = tdhf.cli.main([str(a) for a in args], stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def _deck(folder, text):
    path = folder / "deck.toml"
    path.write_text(text)
    return path


def _read_only(folder):
    path = folder / "old.json"
    path.write_text("keep")
    path.chmod(0o444)
    return path


def _symlink(folder):
    (folder / "target.json").write_text("old")
    (folder / "link.json").symlink_to("target.json")
    return folder / "link.json"


def _deep(folder):
    return _deck(folder, "a = " + "[" * 3000 + "]" * 3000 + "\n")


def _series_into_file(folder):
    (folder / "results").write_text("a file")
    return ["series", _deck(folder, HE), "--out", folder / "results"]


#: (id, argv builder given a folder, expected exit code)
CASES = [
    ("closed-p-shell-without-s", lambda f: ["atom", "Ne", "--charge", "4", "--configuration", "2p6"], 0),
    ("growth-near-one", lambda f: ["run", _deck(f, HE + "[grid]\ngrowth = 1.0001\n")], 2),
    ("tiny-first-element-high-order", lambda f: ["run", _deck(f, HE + "[grid]\norder = 24\ngrowth = 1.01\n"
                                                            "first_element = 1e-4\nr_max = 2000.0\n")], 2),
    ("imaginary-frequency-1e155", lambda f: ["atom", "He", "--imaginary", "1e155"], 2),
    ("real-frequency-1e300", lambda f: ["atom", "He", "--frequencies", "1e300"], 2),
    ("frequency-not-finite", lambda f: ["atom", "He", "--frequencies", "nan"], 2),
    ("endless-deck-stream", lambda f: ["run", "/dev/zero"], 2),
    ("deeply-nested-deck", lambda f: ["run", _deep(f)], 2),
    ("deck-is-a-folder", lambda f: ["run", f], 2),
    ("json-to-a-device", lambda f: ["atom", "He", "--json", os.devnull], 0),
    ("json-through-a-symlink", lambda f: ["atom", "He", "--json", _symlink(f)], 0),
    ("json-over-a-read-only-file", lambda f: ["atom", "He", "--json", _read_only(f)], 2),
    ("json-into-a-folder", lambda f: ["atom", "He", "--json", f], 2),
    ("csv-into-a-missing-folder", lambda f: ["pairs", "He", "--csv", f / "missing" / "a.csv"], 2),
    ("csv-without-dispersion", lambda f: ["run", _deck(f, HE), "--csv", f / "a.csv"], 2),
    ("series-out-is-a-file", _series_into_file, 2),
    ("unbound-dianion", lambda f: ["atom", "He", "--charge", "-2"], 2),
    ("open-shell", lambda f: ["atom", "Na"], 2),
    ("bad-argument", lambda f: ["atom", "He", "--multipoles", "x"], 2),
    ("no-command", lambda f: [], 2),
    ("scf-not-converged", lambda f: ["run", _deck(f, HE + "[scf]\nmax_iterations = 1\n")], 3),
    ("anion-unbound-against-electron-loss", lambda f: ["atom", "H", "--charge", "-1"], 0),
]


@pytest.mark.parametrize("build, expected", [case[1:] for case in CASES], ids=[case[0] for case in CASES])
def test_listed_case_ends_with_its_exit_code_and_never_1(tmp_path, build, expected):
    code, out, err = run_main(*build(tmp_path))
    assert code != tdhf.cli.EXIT_BUG, err
    assert code == expected, err
    assert "Traceback" not in err
    errors = [line for line in err.splitlines() if line.startswith("tdhf: error:")]
    assert len(errors) == (expected != 0), err


def test_device_and_symlink_targets_stay_what_they_were(tmp_path):
    before = os.stat(os.devnull)
    assert run_main("atom", "He", "--json", os.devnull, "-q")[0] == 0
    assert stat.S_ISCHR(os.stat(os.devnull).st_mode) and os.stat(os.devnull).st_ino == before.st_ino
    link = _symlink(tmp_path)
    assert run_main("atom", "He", "--json", link, "-q")[0] == 0
    assert link.is_symlink() and json.loads((tmp_path / "target.json").read_text())["atom"]["name"] == "He"
    read_only = _read_only(tmp_path)
    assert run_main("atom", "He", "--json", read_only, "-q")[0] == 2 and read_only.read_text() == "keep"


def test_configuration_without_s_shell_reports_no_cusp_ratio(tmp_path):
    """Ne4+ 2p6: rho(0) = 0 exactly (P ~ r^2 for l = 1, analytic), so Kato's cusp ratio is undefined."""
    code, out, _ = run_main("atom", "Ne", "--charge", "4", "--configuration", "2p6", "--json", tmp_path / "o.json")
    assert code == 0
    state = json.loads((tmp_path / "o.json").read_text())["ground_state"]
    assert state["converged"] is True and state["density_at_nucleus"] == 0.0 and state["cusp_ratio"] is None
    assert next(line for line in out.splitlines() if "cusp ratio" in line).split()[-4] == "-"


def test_warnings_stored_in_the_json_reach_the_terminal_once(tmp_path):
    code, _, err = run_main("atom", "H", "--charge", "-1", "--json", tmp_path / "o.json")
    notes = json.loads((tmp_path / "o.json").read_text())["warnings"]
    assert code == 0 and any("unbound against electron loss" in note for note in notes)
    for note in notes:
        assert err.splitlines().count(f"tdhf: warning: {note}") == 1


def test_series_shows_each_decks_warnings(tmp_path):
    deck = tmp_path / "hydride.toml"
    deck.write_text('[atom]\nelement = "H"\ncharge = -1\n')
    code, _, err = run_main("series", deck, "--out", tmp_path / "out")
    notes = json.loads((tmp_path / "out" / "hydride.json").read_text())["warnings"]
    assert code == 0 and notes
    for note in notes:
        assert f"tdhf: warning: {deck}: {note}" in err.splitlines()


def test_open_shell_hint_suggests_only_ions_hartree_fock_binds():
    code, _, err = run_main("atom", "O")
    assert code == 2 and "O4+ (charge 4)" in err and "O2-" not in err


@pytest.mark.parametrize("text, key", [
    ('[atom]\nelement = "/etc/passwd"\n', "atom.element"),
    ('[atom]\nelement = "He"\nconfiguration = "../../etc/passwd"\n', "atom.configuration"),
    ('[atom]\nelement = "He"\n[grid]\npreset = "/dev/zero"\n', "grid.preset"),
    ('[atom]\nelement = "He"\n[dispersion]\npartners = ["../../etc/passwd"]\n', "dispersion.partners[0]"),
    ('[atom]\nelement = "He"\noutput = "/tmp/x.json"\n', "atom.output"),
    ('include = "other.toml"\n[atom]\nelement = "He"\n', "include"),
], ids=["element", "configuration", "preset", "partner", "output-key", "include-key"])
def test_decks_are_data_only(tmp_path, text, key):
    """No deck value is a path: each path-like value is a one-line error naming its key, nothing written."""
    deck = _deck(tmp_path, text)
    code, out, err = run_main("run", deck)
    assert code == 2 and out == ""
    (line,) = err.splitlines()
    assert line.startswith(f"tdhf: error: {key}")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["deck.toml"]


@pytest.mark.parametrize("redirect, reason", [(">/dev/full", "No space left on device"), (">&-", "it is closed"),
                                              ("| true", "Broken pipe")], ids=["full", "closed", "broken-pipe"])
def test_stdout_that_cannot_take_the_results_is_an_output_failure(tmp_path, redirect, reason):
    import shlex
    import subprocess
    import sys

    command = f"set -o pipefail; {shlex.quote(sys.executable)} -m tdhf atom Ne {redirect}"  # pipefail: tdhf's code
    run = subprocess.run(["bash", "-c", command], cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert run.returncode == 4, run.stderr
    (line,) = run.stderr.splitlines()
    assert line.startswith("tdhf: error: stdout: ") and reason in line
