"""Acceptance of the workflow commands through the command line: reference tables from a series,
rebuilt from the files, compared with themselves, computed in parallel and drawn.

Every check compares tdhf with itself (the per-deck JSON against the tables built from it, one
worker against two, a cluster against this process): common practice, no source.
"""

import csv
import io
import json
import re
import sys

import pytest

from tdhf.cli import main

#: Eight small closed-shell systems: the He and Ne isoelectronic sequences and their neighbours.
SYSTEMS = [("He", 0), ("Li", 1), ("Be", 2), ("Be", 0), ("Ne", 0), ("Na", 1), ("Mg", 2), ("Ar", 0)]


def run(*argv):
    out, err = io.StringIO(), io.StringIO()
    code = main([str(a) for a in argv], stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def _decks(folder, dispersion=True):
    folder.mkdir()
    paths = []
    for element, charge in SYSTEMS:
        text = f'[atom]\nelement = "{element}"\ncharge = {charge}\n[response]\nfrequencies = [0.0, "1064 nm"]\n'
        if dispersion:
            text += '[dispersion]\npartners = ["He"]\n'
        path = folder / f"{element.lower()}{charge}.toml"
        path.write_text(text)
        paths.append(path)
    return paths


@pytest.fixture(scope="module")
def series(tmp_path_factory):
    """A series of eight decks run once with --table in three formats (one worker)."""
    root = tmp_path_factory.mktemp("series")
    decks = _decks(root / "decks")
    tables = [root / "table.csv", root / "table.md", root / "table.tex"]
    code, out, err = run("series", *decks, "--out", root / "results", "--workers", "1",
                         *[x for t in tables for x in ("--table", t)])
    assert code == 0, err
    return root, decks, tables, out


def test_series_tables_hold_every_number_of_every_result_file(series):
    root, decks, tables, out = series
    rows = list(csv.DictReader(io.StringIO((root / "table.csv").read_text())))
    assert tuple(rows[0]) == ("system", "partner", "property", "multipole", "frequency", "frequency_unit",
                              "imaginary", "level", "k", "orbital", "index", "value", "uncertainty", "unit",
                              "converged", "source", "program", "settings")
    count = 0
    for deck in decks:
        data = json.loads((root / "results" / f"{deck.stem}.json").read_text())
        mine = [row for row in rows if row["source"] == f"{deck.stem}.json"]
        assert len(mine) == len(data["quantities"])
        for row, quantity in zip(mine, data["quantities"]):
            assert (row["system"], row["property"], row["unit"]) == (quantity["system"], quantity["property"],
                                                                   quantity["unit"])
            assert float(row["value"]) == quantity["value"]
        count += len(mine)
    assert count == len(rows)
    units = {(row["property"], row["multipole"]): row["unit"] for row in rows}
    assert units[("polarizability", "1")] == "bohr^3" and units[("C6", "")] == "hartree bohr^6"
    assert units[("total_energy", "")] == "hartree"
    markdown = (root / "table.md").read_text()
    latex = (root / "table.tex").read_text()
    assert markdown.count("\n| ") == len(rows) and latex.count(" \\\\\n") == len(rows) + 1  # + the header
    # the wide view: systems as rows (ordered by Z), units in the headers
    assert re.search(r"\n He +-2\.86", out) and "(bohr^3)" in out and "C6 with He" in out
    order = [line.split()[0] for line in out.splitlines() if re.match(r" (He|Li\+|Be2\+|Be|Ne|Na\+|Mg2\+|Ar) ", line)]
    assert order[-8:] == ["He", "Li+", "Be", "Be2+", "Ne", "Na+", "Mg2+", "Ar"]  # by Z, then charge


def test_table_rebuilds_the_series_tables_from_the_files(series, tmp_path):
    root, _, tables, _ = series
    again = [tmp_path / t.name for t in tables]
    code, _, err = run("table", root / "results", *[x for t in again for x in ("--table", t)], "-q")
    assert code == 0, err
    for first, second in zip(tables, again):
        assert first.read_bytes() == second.read_bytes()


def test_a_table_in_other_units_converts_every_row(series, tmp_path):
    root, _, _, _ = series
    code, out, _ = run("table", root / "results", "--table", tmp_path / "si.csv", "--units", "si")
    assert code == 0 and "(10^-18 J)" in out
    atomic = list(csv.DictReader(io.StringIO((root / "table.csv").read_text())))
    si = list(csv.DictReader(io.StringIO((tmp_path / "si.csv").read_text())))
    alpha = [(a, s) for a, s in zip(atomic, si) if a["property"] == "polarizability" and a["multipole"] == "1"]
    # CODATA via scipy.constants: 1 atomic unit of polarizability = 1.64877727212e-41 C m^2 V^-1
    assert all(float(s["value"]) == pytest.approx(float(a["value"]) * 1.64877727212, rel=1e-11) for a, s in alpha)
    assert {s["unit"] for _, s in alpha} == {"10^-41 C m^2 V^-1"} and {s["frequency_unit"] for _, s in alpha} == {
        "10^-18 J"}


def test_compare_of_the_series_own_table_gives_zero_deviations(series, tmp_path):
    root, _, _, _ = series
    code, out, err = run("compare", root / "table.csv", "--no-certify", "--json", tmp_path / "c.json",
                         "--csv", tmp_path / "c.csv", "-q")
    assert code == 0, err
    data = json.loads((tmp_path / "c.json").read_text())
    assert sorted(data) == ["comparison", "model", "program", "summary", "systems"]
    assert set(data["comparison"][0]) >= {"label", "system", "partner", "property", "multipole", "frequency",
                                          "imaginary", "level", "value", "reference", "deviation",
                                          "relative_deviation", "reference_uncertainty"}
    assert all(row["deviation"] == 0.0 for row in data["comparison"])
    (summary,) = data["summary"]
    assert summary["max_relative_deviation"] == 0.0 and summary["count"] == len(data["comparison"])
    assert len(list(csv.DictReader(io.StringIO((tmp_path / "c.csv").read_text())))) == len(data["comparison"])


def test_compare_ranks_labels_and_prints_the_summary(tmp_path):
    path = tmp_path / "user.csv"
    path.write_text("label,system,property,value\nclose,He,total_energy,-2.8616\nfar,He,total_energy,-2.80\n")
    code, out, _ = run("compare", path, "--no-certify")
    assert code == 0
    summary = out[out.index("Per label"):]
    assert summary.index("close") < summary.index("far")


def test_a_bad_user_file_is_one_line_naming_file_line_and_column(tmp_path):
    path = tmp_path / "user.csv"
    path.write_text("system,property,value,frequency\nHe,polarizability,1.3,0\nHe,polarizability,1.3,2 parsec\n")
    code, out, err = run("compare", path, "--no-certify")
    (line,) = err.splitlines()
    assert code == 2 and out == "" and "Traceback" not in err
    assert line.startswith(f"tdhf: error: {path}:3: column frequency: unknown frequency unit 'parsec'")


def test_pairs_prints_every_systems_energy_and_static_alpha(tmp_path):
    code, out, err = run("pairs", "He:Be", "He:Ne", "--workers", "1", "--json", tmp_path / "p.json")
    assert code == 0, err
    table = out[out.index("Systems of the dispersion table"):]
    assert all(re.search(rf"\n {name} +-\d", table) for name in ("He", "Be", "Ne"))
    data = json.loads((tmp_path / "p.json").read_text())
    assert [row["pair"] for row in data["dispersion"]] == [["He", "Be"], ["He", "Ne"]]
    assert [state["system"]["name"] for state in data["partner_ground_states"]] == ["He", "Be", "Ne"]
    tables = {table["system"]: table for table in data["polarizability_tables"]}
    statics = {q["system"]: q["value"] for q in data["quantities"]
               if q["property"] == "polarizability" and q["multipole"] == 1}
    assert statics == {name: tables[name]["static_dipole"] for name in ("He", "Be", "Ne")}


def test_mixed_systems_and_pairs_are_refused():
    code, _, err = run("pairs", "He", "Be:Ne")
    assert code == 2 and "not both" in err


def test_plots_are_written_with_the_extra_and_refused_without(series, tmp_path, monkeypatch):
    pytest.importorskip("matplotlib")
    root, _, _, _ = series
    result = root / "results" / "be0.json"
    code, out, err = run("plot", result, "--out", tmp_path / "pictures", "--svg", "-q")
    assert code == 0, err
    names = sorted(p.name for p in (tmp_path / "pictures").iterdir())
    assert names == sorted(f"be0_{name}.{kind}" for name in ("densities", "alpha_real_L1", "alpha_imaginary",
                                                             "first_order_L1") for kind in ("png", "svg"))
    assert all((tmp_path / "pictures" / name).stat().st_size > 1000 for name in names)
    monkeypatch.setitem(sys.modules, "matplotlib", None)  # as without the [plot] extra
    code, out, err = run("plot", result, "--out", tmp_path / "none")
    assert code == 2 and err.splitlines() == [
        "tdhf: error: plots need matplotlib, which is not installed; install it with: pip install 'tdhf[plot]'"]
    assert not (tmp_path / "none").exists()


@pytest.mark.slow
def test_two_workers_write_the_files_of_one(series, tmp_path):
    root, decks, _, _ = series
    code, _, err = run("series", *decks, "--out", tmp_path / "two", "--workers", "2", "-q")
    assert code == 0, err
    for deck in decks:
        name = f"{deck.stem}.json"
        assert (tmp_path / "two" / name).read_bytes() == (root / "results" / name).read_bytes()


@pytest.mark.slow
def test_a_dask_cluster_writes_the_files_of_one_worker(series, tmp_path):
    distributed = pytest.importorskip("distributed")
    root, decks, _, _ = series
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
        code, _, err = run("series", *decks[:4], "--out", tmp_path / "dask", "--scheduler", cluster.scheduler_address,
                           "-q")
    assert code == 0, err
    for deck in decks[:4]:
        name = f"{deck.stem}.json"
        assert (tmp_path / "dask" / name).read_bytes() == (root / "results" / name).read_bytes()
