"""Fault injection: write failures of every kind, signals during series and pairs, NaN in the SCF,
a non-converging deck and a bug in the middle of a series, stale or broken files on resume, two
series in one folder.  Every case ends with a documented exit code, never 1 for a non-bug, and
never loses a finished result.

Common practice, no source: the behaviour checked is the exit-code table and the file rules of
the README; the physics is only He, Ne and Ar at default settings.
"""

from __future__ import annotations

import errno
import io
import json
import os
import resource
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

import tdhf.cli
from tdhf.errors import OutputError
from tdhf.series import run_series

HE = '[atom]\nelement = "He"\n'


def tdhf_process(*args, cwd, **kwargs) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "tdhf", *args], cwd=cwd, capture_output=True, text=True,
                          timeout=180, **kwargs)


def run_main(*args) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    code = tdhf.cli.main(list(args), stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def error_lines(text: str) -> list[str]:
    return [line for line in text.splitlines() if line.startswith("tdhf: error:")]


def visible(folder) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


def write_decks(folder, **decks) -> list:
    paths = []
    for name, text in decks.items():
        path = folder / f"{name}.toml"
        path.write_text(text)
        paths.append(path)
    return paths


# --- write failures after the computation ------------------------------------------------------


def test_json_write_failure_exits_4_prints_the_results_and_still_writes_the_csv(tmp_path, monkeypatch):
    from tdhf.report import serialize

    real = serialize.write_text

    def full_for_json(path, text, option=""):
        if str(getattr(path, "path", path)).endswith(".json"):
            raise OutputError(f"--json {path.path}: cannot write the file: No space left on device")
        return real(path, text, option)

    monkeypatch.setattr(serialize, "write_text", full_for_json)
    code, out, err = run_main("pairs", "He", "--points", "12", "--json", str(tmp_path / "out.json"),
                              "--csv", str(tmp_path / "alpha.csv"), "-q")
    assert code == tdhf.cli.EXIT_OUTPUT
    (line,) = error_lines(err)
    assert "out.json: cannot write the file: No space left on device" in line and "printed on stdout" in line
    assert "Dispersion coefficients" in out and "total energy" in out  # printed despite -q
    assert visible(tmp_path) == ["alpha.csv"]


def test_disk_full_through_os_write(tmp_path, monkeypatch):
    from tdhf.report import files

    (tmp_path / "out.json").write_text("previous")
    monkeypatch.setattr(files.os, "write", lambda fd, data: (_ for _ in ()).throw(OSError(errno.ENOSPC, "No space left on device")))
    code, out, err = run_main("atom", "He", "--json", str(tmp_path / "out.json"))
    assert code == 4 and "No space left on device" in error_lines(err)[0] and "total energy" in out
    assert (tmp_path / "out.json").read_text() == "previous" and visible(tmp_path) == ["out.json"]


def test_file_size_limit_exits_4_and_keeps_the_old_file(tmp_path):
    """RLIMIT_FSIZE below the JSON size: write() fails with EFBIG (Python ignores SIGXFSZ)."""
    (tmp_path / "out.json").write_text("previous")

    def limit() -> None:
        resource.setrlimit(resource.RLIMIT_FSIZE, (1000, 1000))

    run = tdhf_process("atom", "He", "--json", "out.json", cwd=tmp_path, preexec_fn=limit)
    assert run.returncode == 4, run.stderr
    (line,) = error_lines(run.stderr)
    assert line.startswith("tdhf: error: --json out.json: cannot write the file: File too large")
    assert "total energy" in run.stdout and "Traceback" not in run.stderr
    assert (tmp_path / "out.json").read_text() == "previous" and visible(tmp_path) == ["out.json"]


def test_series_goes_on_after_an_output_error(tmp_path, monkeypatch):
    from tdhf import series

    real = series.write_json

    def fail_for_neon(path, data, option=""):
        if path.name == "b_ne.json":
            raise OutputError(f"series --out {path}: cannot write the file: No space left on device")
        return real(path, data, option)

    monkeypatch.setattr(series, "write_json", fail_for_neon)
    decks = write_decks(tmp_path, a_he=HE, b_ne='[atom]\nelement = "Ne"\n', c_li='[atom]\nelement = "Li"\ncharge = 1\n')
    code, out, err = run_main("series", *map(str, decks), "--out", str(tmp_path / "out"))
    assert code == 4
    assert visible(tmp_path / "out") == ["a_he.json", "c_li.json"]
    (line,) = error_lines(err)
    assert "b_ne.toml" in line and "No space left on device" in line
    assert "output error" in out and out.count("Hartree-Fock ground state") == 1  # Ne's results printed


def test_series_out_naming_a_file_is_refused_before_any_work(tmp_path):
    (tmp_path / "results").write_text("not a folder")
    decks = write_decks(tmp_path, he=HE)
    code, out, err = run_main("series", *map(str, decks), "--out", str(tmp_path / "results"))
    assert code == 2 and out == ""
    assert err.splitlines() == [f"tdhf: error: series --out {tmp_path / 'results'}: {tmp_path / 'results'}"
                                " is not a folder; give a folder"]


def test_json_naming_the_deck_or_the_csv_is_refused(tmp_path):
    deck = tmp_path / "he.toml"
    deck.write_text(HE + '[dispersion]\npartners = ["He"]\n')
    code, _, err = run_main("run", str(deck), "--json", str(deck))
    assert code == 2 and "is the deck file itself" in err and deck.read_text().startswith("[atom]")
    code, _, err = run_main("run", str(deck), "--json", str(tmp_path / "x"), "--csv", str(tmp_path / "x"))
    assert code == 2 and "same file as --json" in err
    assert visible(tmp_path) == ["he.toml"]


# --- NaN in the SCF, non-convergence and bugs inside a series -------------------------------------


def test_nan_in_the_scf_is_detected_reported_and_never_printed_as_a_number(tmp_path, monkeypatch):
    from tdhf import scf

    real = scf.exchange_operator
    calls = [0]

    def poisoned(kernels, shells, l):
        calls[0] += 1
        matrix = real(kernels, shells, l)
        return matrix * np.nan if calls[0] >= 3 else matrix

    monkeypatch.setattr(scf, "exchange_operator", poisoned)
    code, out, err = run_main("atom", "He", "--multipoles", "1", "--json", str(tmp_path / "out.json"))
    assert code == 3
    assert any("non-finite values (NaN or Inf) in the Fock matrix at iteration 3" in line for line in err.splitlines())
    data = json.loads((tmp_path / "out.json").read_text())
    state = data["ground_state"]
    assert state["converged"] is False and state["total_energy"] is None and "non-finite" in state["scf_message"]
    assert data["polarizabilities"] == []  # nothing computed from a broken ground state
    energy_row = next(line for line in out.splitlines() if line.strip().startswith("total energy"))
    assert "nan" in energy_row and not any(ch.isdigit() for ch in energy_row.replace("nan", ""))


def test_a_non_converging_deck_in_the_middle_of_a_series(tmp_path):
    decks = write_decks(tmp_path, a_he=HE, b_stuck=HE + "[scf]\nmax_iterations = 1\n", c_ne='[atom]\nelement = "Ne"\n')
    assert [e.status for e in run_series(decks, tmp_path / "first")] == ["ok", "not converged", "ok"]
    code, out, err = run_main("series", *map(str, decks), "--out", str(tmp_path / "out"))
    assert code == 3
    assert json.loads((tmp_path / "out" / "b_stuck.json").read_text())["ground_state"]["converged"] is False
    (line,) = error_lines(err)
    assert "b_stuck.toml: He: Hartree-Fock did not converge" in line


def test_an_unexpected_exception_stays_with_its_deck(tmp_path, monkeypatch):
    from tdhf import series

    real = series.run_deck

    def broken_for_neon(deck, progress=None):
        if deck.atom.element == "Ne":
            raise ZeroDivisionError("float division by zero")
        return real(deck, progress)

    monkeypatch.setattr(series, "run_deck", broken_for_neon)
    decks = write_decks(tmp_path, a_ne='[atom]\nelement = "Ne"\n', b_he=HE)
    entries = run_series(decks, tmp_path / "out")
    assert [e.status for e in entries] == ["internal error", "ok"]
    assert entries[0].message == "internal error ZeroDivisionError: float division by zero"
    # one worker: the patched run_deck lives in this process only
    code, _, err = run_main("series", *map(str, decks), "--out", str(tmp_path / "out2"), "--workers", "1")
    assert code == 1 and len(error_lines(err)) == 1  # a bug is a bug, even isolated


# --- resume that verifies ------------------------------------------------------------------------


@pytest.mark.parametrize("damage, reason", [
    (lambda path: path.write_text(""), "empty"),
    (lambda path: path.write_text(path.read_text()[:200]), "truncated"),
    (lambda path: path.write_text('{"atom": {}}'), "incomplete"),
    (lambda path: path.write_text(path.read_text().replace('"version": "', '"version": "0.0.0-old')), "made by tdhf"),
], ids=["empty", "truncated", "incomplete", "old-version"])
def test_resume_recomputes_damaged_or_stale_files(tmp_path, damage, reason, caplog):
    decks = write_decks(tmp_path, he=HE)
    out = tmp_path / "out"
    run_series(decks, out)
    good = (out / "he.json").read_text()
    damage(out / "he.json")
    (out / ".he.json.a1b2c3d4.tmp").write_text("left by a killed writer")
    with caplog.at_level("INFO", logger="tdhf.series"):
        (entry,) = run_series(decks, out, resume=True)
    assert entry.status == "ok" and reason in caplog.text
    assert (out / "he.json").read_text() == good and visible(out) == ["he.json"]


def test_resume_recomputes_after_the_deck_was_edited_and_skips_when_current(tmp_path):
    (deck,) = write_decks(tmp_path, he=HE)
    out = tmp_path / "out"
    run_series([deck], out)
    assert [e.status for e in run_series([deck], out, resume=True)] == ["skipped"]
    deck.write_text(HE + "[grid]\norder = 12\n")
    (entry,) = run_series([deck], out, resume=True)
    assert entry.status == "ok"
    assert json.loads((out / "he.json").read_text())["settings"]["grid"]["order"] == 12
    deck.write_text('[atom]\nelement = 2\n[grid]\norder = 12\n')  # the same calculation written differently
    assert [e.status for e in run_series([deck], out, resume=True)] == ["skipped"]


def test_resume_recomputes_a_flagged_result(tmp_path):
    (deck,) = write_decks(tmp_path, he=HE + "[scf]\nmax_iterations = 1\n")
    run_series([deck], tmp_path / "out")
    assert [e.status for e in run_series([deck], tmp_path / "out", resume=True)] == ["not converged"]


def test_two_series_in_one_folder_do_not_corrupt_each_other(tmp_path):
    decks = write_decks(tmp_path, a_he=HE, b_ne='[atom]\nelement = "Ne"\n', c_li='[atom]\nelement = "Li"\ncharge = 1\n',
                        d_be='[atom]\nelement = "Be"\n')
    command = [sys.executable, "-m", "tdhf", "series", *map(str, decks), "--out", "out", "-q"]
    processes = [subprocess.Popen(command, cwd=tmp_path, stderr=subprocess.PIPE, text=True) for _ in range(2)]
    errors = [process.communicate(timeout=180)[1] for process in processes]
    assert [process.returncode for process in processes] == [0, 0], errors
    assert visible(tmp_path / "out") == ["a_he.json", "b_ne.json", "c_li.json", "d_be.json"]
    for name in visible(tmp_path / "out"):
        assert json.loads((tmp_path / "out" / name).read_text())["ground_state"]["converged"] is True


# --- signals ----------------------------------------------------------------------------------------


@pytest.mark.parametrize("signum", [pytest.param(signal.SIGINT, marks=pytest.mark.slow), signal.SIGTERM],
                         ids=["SIGINT", "SIGTERM"])
def test_signal_during_series_keeps_finished_results_and_resume_gives_identical_numbers(tmp_path, signum):
    decks = write_decks(tmp_path, a_he=HE, b_ne='[atom]\nelement = "Ne"\n[response]\n', c_be='[atom]\nelement = "Be"\n')
    args = [sys.executable, "-m", "tdhf", "series", *map(str, decks), "--out", "out"]
    process = subprocess.Popen(args, cwd=tmp_path, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    finished = tmp_path / "out" / "a_he.json"
    deadline = time.monotonic() + 120
    while not finished.exists() and process.poll() is None and time.monotonic() < deadline:
        time.sleep(0.005)
    process.send_signal(signum)
    stdout, stderr = process.communicate(timeout=120)
    assert process.returncode == 130, stderr
    assert "Traceback" not in stderr and "interrupted" in stderr
    assert visible(tmp_path / "out") == ["a_he.json"]  # no partial file, no temporary, no lock
    assert "interrupted" in stdout  # the summary lists the deck that was running
    resumed = tdhf_process("series", *map(str, decks), "--out", "out", "--resume", cwd=tmp_path)
    assert resumed.returncode == 0, resumed.stderr
    assert "skipped" in resumed.stdout
    fresh = tdhf_process("series", *map(str, decks), "--out", "fresh", "-q", cwd=tmp_path)
    assert fresh.returncode == 0
    for name in ("a_he.json", "b_ne.json", "c_be.json"):
        assert (tmp_path / "out" / name).read_text() == (tmp_path / "fresh" / name).read_text()


@pytest.mark.parametrize("signum", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
def test_signal_during_pairs_leaves_the_old_file_intact(tmp_path, signum):
    (tmp_path / "pairs.json").write_text("previous result")
    process = subprocess.Popen([sys.executable, "-m", "tdhf", "pairs", "He", "Ne", "Ar", "--json", "pairs.json",
                                "-v"], cwd=tmp_path, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    for line in process.stderr:
        if "dispersion" in line:  # the responses are being solved
            break
    process.send_signal(signum)
    _, stderr = process.communicate(timeout=120)
    assert process.returncode == 130 and "Traceback" not in stderr
    assert (tmp_path / "pairs.json").read_text() == "previous result" and visible(tmp_path) == ["pairs.json"]


def test_output_paths_survive_unusual_deck_names(tmp_path):
    """Decks are data only: a result is always <out>/<deck stem>.json, inside the folder named."""
    odd = tmp_path / "..toml"
    odd.write_text(HE)
    (entry,) = run_series([odd], tmp_path / "out")
    assert entry.status == "ok" and os.path.dirname(entry.output) == str(tmp_path / "out")
    assert visible(tmp_path / "out") == ["..json"]


def test_a_failing_certification_keeps_the_results_of_the_run(tmp_path, monkeypatch):
    from tdhf.errors import GridError

    def refuse(result, deck, progress=None, map_tasks=None):
        raise GridError("grid: the refined box would need too many points")

    monkeypatch.setattr("tdhf.certify.certify", refuse)
    code, out, err = run_main("atom", "He", "--certify", "--json", str(tmp_path / "out.json"))
    assert code == 2
    (line,) = error_lines(err)
    assert line == ("tdhf: error: --certify: grid: the refined box would need too many points;"
                    " the results are kept without certification")
    assert json.loads((tmp_path / "out.json").read_text())["ground_state"]["converged"] is True
    assert "total energy" in out


def test_a_folder_that_becomes_unusable_during_a_series_is_an_output_error(tmp_path, monkeypatch):
    from tdhf.report import files

    real = files.os.open

    def no_lock(path, flags, mode=0o777):
        if str(path).endswith(".lock"):
            raise PermissionError(errno.EACCES, os.strerror(errno.EACCES))
        return real(path, flags, mode)

    decks = write_decks(tmp_path, he=HE)
    monkeypatch.setattr(files.os, "open", no_lock)
    (entry,) = run_series(decks, tmp_path / "out")
    assert entry.status == "output error" and "cannot claim he.json: Permission denied" in entry.message


def test_an_interrupt_between_two_decks_is_recorded_against_the_next(tmp_path):
    decks = write_decks(tmp_path, a_he=HE, b_li='[atom]\nelement = "Li"\ncharge = 1\n')
    calls = []

    def progress(stage):
        calls.append(stage)
        if len(calls) == 2:
            raise KeyboardInterrupt

    entries = run_series(decks, tmp_path / "out", progress=progress)
    assert [e.status for e in entries] == ["ok", "interrupted"]
    assert visible(tmp_path / "out") == ["a_he.json"]
