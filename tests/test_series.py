"""A series of decks: one result file each, a bad deck does not stop the others, resume skips."""

import json
import subprocess
import sys

from tdhf.series import run_series


def _decks(tmp_path):
    good = tmp_path / "helium.toml"
    good.write_text('[atom]\nelement = "He"\n')
    ion = tmp_path / "lithium_ion.toml"
    ion.write_text('[atom]\nelement = "Li"\ncharge = 1\n')
    bad = tmp_path / "sodium.toml"
    bad.write_text('[atom]\nelement = "Na"\n')  # open 3s1 shell
    return [good, bad, ion]


def test_series_writes_one_file_per_deck_and_isolates_failures(tmp_path):
    out = tmp_path / "results"
    entries = run_series(_decks(tmp_path), out)
    assert [e.status for e in entries] == ["ok", "input error", "ok"]
    assert "3s1" in entries[1].message and entries[1].output == ""
    assert sorted(p.name for p in out.iterdir()) == ["helium.json", "lithium_ion.json"]
    # He numerical HF limit (Cinal, J. Math. Chem. 58 (2020); from memory)
    assert abs(json.loads((out / "helium.json").read_text())["ground_state"]["total_energy"] + 2.8616799956) < 1e-9


def test_series_resume_skips_finished_decks(tmp_path):
    out = tmp_path / "results"
    decks = _decks(tmp_path)
    run_series(decks[:1], out)
    entries = run_series(decks, out, resume=True)
    assert [e.status for e in entries] == ["skipped", "input error", "ok"]


def test_cli_series_exit_code_and_summary(tmp_path):
    run = subprocess.run([sys.executable, "-m", "tdhf", "series", *map(str, _decks(tmp_path)), "--out", "res"],
                         cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert run.returncode == 2 and "Traceback" not in run.stderr
    assert "helium" in run.stdout and "input error" in run.stdout
    (line,) = run.stderr.splitlines()
    assert line.startswith("tdhf: error:") and "sodium.toml" in line
