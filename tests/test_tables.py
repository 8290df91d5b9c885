"""Reference tables from result files: the long table (CSV, Markdown, LaTeX) and the wide view.

Every check compares the table with the result file it was built from (no outside source).
"""

import csv
import io
import json

import pytest
from rich.console import Console

from tdhf.certify import certified
from tdhf.deck import parse_deck
from tdhf.driver import run_deck
from tdhf.errors import InputError
from tdhf.report.json_result import result_to_json
from tdhf.report.tables import LONG_COLUMNS, check_table_path, in_units, long_table, result_paths, table_text, \
    wide_table
from tdhf.units import display_unit

DECKS = {
    "neon.json": '[atom]\nelement = "Ne"\n[response]\nfrequencies = [0.0, 0.1]\n',
    "helium.json": '[atom]\nelement = "He"\n[response]\nmultipoles = [1, 2]\n[dispersion]\npartners = ["He"]\n',
}


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    folder = tmp_path_factory.mktemp("results")
    for name, text in DECKS.items():
        deck = parse_deck(text)
        result = run_deck(deck)
        if name == "helium.json":
            result = certified(result, deck)
        (folder / name).write_text(json.dumps(result_to_json(result)))
    (folder / "notes.json").write_text('{"not": "a result"}')
    return folder


def test_long_table_holds_every_number_of_every_file(results):
    paths, notes = result_paths([results])
    assert [p.name for p in paths] == ["helium.json", "neon.json"] and len(notes) == 1 and "notes.json" in notes[0]
    rows = long_table(paths)
    assert rows[0].system == "He" and rows[-1].system == "Ne"  # ordered by Z
    for path in paths:
        data = json.loads(path.read_text())
        mine = [row for row in rows if row.source == path.name]
        assert [(r.system, r.property, r.value, r.uncertainty, r.unit) for r in mine] == [
            (q["system"], q["property"], q["value"], q["uncertainty"], q["unit"]) for q in data["quantities"]]
        assert all(r.program == f"tdhf {data['program']['version']}" for r in mine)
    assert all(row.settings.endswith("certified") for row in rows)
    assert {row.settings.rsplit("; ", 1)[-1] for row in rows} == {"certified", "not certified"}


def test_csv_reads_back_bit_identical(results):
    rows = long_table(result_paths([results])[0])
    parsed = list(csv.DictReader(io.StringIO(table_text(rows, ".csv"))))
    assert tuple(parsed[0]) == LONG_COLUMNS and len(parsed) == len(rows)
    for row, cells in zip(rows, parsed):
        assert float(cells["value"]) == row.value
        assert (cells["uncertainty"] == "") == (row.uncertainty is None)
        assert cells["frequency"] == ("" if row.frequency is None else repr(row.frequency))


def test_markdown_and_latex_show_certified_digits(results):
    rows = long_table(result_paths([results])[0])
    helium = [row for row in rows if row.source == "helium.json"]
    energy = next(row for row in helium if row.property == "total_energy")
    markdown = table_text(helium, ".md")
    lines = markdown.splitlines()
    assert lines[0].startswith("| system |") and len([line for line in lines if line.startswith("| He")]) == len(helium)
    # format_value: digits through the second significant digit of the uncertainty, in parentheses
    assert f"{energy.value:.13f}"[:8] in markdown and "(" in lines[2] and "Digits shown are certified" in markdown
    latex = table_text(helium, ".tex")
    assert latex.count("\\\\") == len(helium) + 1 and "total\\_energy" in latex and "\\end{tabular}" in latex
    assert "hartree bohr$^{6}$" in latex


def test_units_convert_values_uncertainties_and_frequencies(results):
    rows = long_table(result_paths([results])[0])
    converted = in_units(rows, "spectroscopic")
    for before, after in zip(rows, converted):
        unit = display_unit(before.property, before.unit, "spectroscopic")
        assert after.value == before.value * unit.factor and after.unit == unit.label
        if before.frequency is not None:
            assert after.frequency_unit == "eV"
    assert any(row.unit == "angstrom^3" for row in converted)


def test_wide_view_has_systems_as_rows_and_units_in_headers(results):
    rows = long_table(result_paths([results])[0])
    console = Console(width=250, record=True, file=io.StringIO())
    console.print(wide_table(rows))
    text = console.export_text()
    assert "alpha_1(0)" in text and "(bohr^3)" in text and "C6 with He" in text and "(hartree)" in text
    body = [line.split()[0] for line in text.splitlines() if line.strip().startswith(("He", "Ne"))]
    assert body == ["He", "Ne"]
    helium_alpha = next(r for r in rows if r.system == "He" and r.property == "polarizability" and r.level == "coupled")
    assert "(" in text.split("\n He")[1].split("\n")[0]  # He is certified: its cells carry (uncertainty)
    assert helium_alpha.uncertainty is not None


def test_table_paths_and_folders_are_checked(tmp_path):
    assert check_table_path("x.MD") == ".md"
    with pytest.raises(InputError, match="--table x.xlsx: unknown table format '.xlsx'; end the name in .csv"):
        check_table_path("x.xlsx")
    with pytest.raises(InputError, match="no tdhf result files found"):
        result_paths([tmp_path])
    with pytest.raises(InputError, match="no such file or folder"):
        result_paths([tmp_path / "missing"])
    (tmp_path / "broken.json").write_text("{")
    with pytest.raises(InputError, match="not a JSON result file"):
        result_paths([tmp_path / "broken.json"])
